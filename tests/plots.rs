//! Every plot copyloop writes, read back: parsed as XML (roxmltree) and checked for its axis
//! labels, legend, markers, bands and error bars, with every coordinate finite and inside the
//! view box; drawn where the axes say (positions recovered from the tick labels); and rendered
//! once by a real SVG renderer (resvg), which must accept it without a warning.
//!
//! Set COPYLOOP_PLOTS_DIR to a directory to keep each plot there as SVG and PNG.

mod support;

use copyloop::ensemble::{self, EnsembleSpec};
use copyloop::network::{load_source, Overrides};
use copyloop::report::simulate::{default_species, Course};
use copyloop::report::{self, plot::ramp::series_colour};
use support::svg::{parse, path_points, pixels_of, render, Plot};

fn example(name: &str) -> String {
    format!("{}/reactions/{name}", env!("CARGO_MANIFEST_DIR"))
}

/// (value, pixel) of each tick label of `class`: the pixel along the axis (x for `x-tick`, y
/// for `y-tick`, whose baseline sits 4 px below the tick).
fn ticks(p: &Plot, class: &str) -> Vec<(f64, f64)> {
    p.all(class)
        .iter()
        .map(|n| {
            let v: f64 = n.text().unwrap().parse().expect("a numeric tick label");
            let at = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
            (
                v,
                if class == "x-tick" {
                    at("x")
                } else {
                    at("y") - 4.0
                },
            )
        })
        .collect()
}

/// The axis mapping value → pixel read from two tick labels (linear, or linear in log₁₀).
fn mapping(ticks: &[(f64, f64)], log: bool) -> impl Fn(f64) -> f64 {
    assert!(ticks.len() >= 2, "at least two ticks: {ticks:?}");
    let f = move |v: f64| if log { v.log10() } else { v };
    let (a, b) = (ticks[0], ticks[ticks.len() - 1]);
    let slope = (b.1 - a.1) / (f(b.0) - f(a.0));
    move |v| a.1 + (f(v) - f(a.0)) * slope
}

fn count(node: &roxmltree::Node, class: &str) -> usize {
    node.descendants()
        .filter(|n| n.attribute("class") == Some(class))
        .count()
}

// An invented production–decay–binding network (made-up numbers): A is made and cleared,
// binds a clamped partner B into C.
const COURSE_NET: &str = "\
species A = 0 molecules
species B = 50 molecules clamped
species C = 0 molecules
step make  0 -> A @ 20
step clear A -> 0 @ 0.01
step bind  A + B -> C @ 0.0002
step loose C -> A + B @ 0.05
";

#[test]
fn time_course_of_an_ensemble_draws_mean_and_sd_bands_where_the_axes_say() {
    let net = load_source("invented.crn", COURSE_NET.as_bytes(), &Overrides::default()).unwrap();
    let spec = EnsembleSpec {
        replicates: 12,
        grid_points: 31,
        threads: Some(1),
        ..EnsembleSpec::new(1200.0)
    };
    let r = ensemble::run(&net, &spec).unwrap();
    let species = default_species(&net);
    assert_eq!(species, vec![0, 2], "the non-clamped species by default");
    let text = report::simulate::svg(&net, Course::from(&r), &species);
    let p = parse(&text);
    // 1200 s is more than 10 minutes: the axis reads in minutes.
    assert_eq!(p.text("x-label"), "time (min)");
    assert_eq!(p.text("y-label"), "count (molecules)");
    assert_eq!(p.legend(), ["A (mean ± SD)", "C (mean ± SD)"]);
    let x = mapping(&ticks(&p, "x-tick"), false);
    let y = mapping(&ticks(&p, "y-tick"), false);
    let series = p.series();
    assert_eq!(series.len(), 2);
    for (s, &i) in series.iter().zip(&species) {
        assert_eq!(count(s, "band"), 1, "one band per species");
        assert_eq!(count(s, "line"), 1, "one line per species");
        assert_eq!(count(s, "marker"), 0);
        let line = s
            .descendants()
            .find(|n| n.attribute("class") == Some("line"))
            .unwrap();
        let pts = path_points(line.attribute("d").unwrap());
        assert_eq!(pts.len(), r.grid_times.len(), "a vertex per grid time");
        for (k, &(px, py)) in pts.iter().enumerate() {
            let w = &r.grid[k][i];
            assert!((px - x(r.grid_times[k] / 60.0)).abs() < 0.05, "time at {k}");
            assert!((py - y(w.mean())).abs() < 0.05, "mean at {k}");
        }
        let band = s
            .descendants()
            .find(|n| n.attribute("class") == Some("band"))
            .unwrap();
        let outline = path_points(band.attribute("d").unwrap());
        assert_eq!(
            outline.len(),
            2 * r.grid_times.len(),
            "upper and lower edge"
        );
        let last = r.grid_times.len() - 1;
        let w = &r.grid[last][i];
        assert!(
            (outline[last].1 - y(w.mean() + w.sd())).abs() < 0.05,
            "mean + SD"
        );
        assert!(
            (outline[last + 1].1 - y(w.mean() - w.sd())).abs() < 0.05,
            "mean − SD"
        );
    }
    let frame = p.bounds("frame");
    let legend = p.bounds("legend-frame");
    assert!(
        legend.0 > frame.2,
        "the legend stands beside the plot area, not over it"
    );
    let pixels = render(&text);
    assert!(
        pixels_of(&pixels, series_colour(0), 8) > 100,
        "A's line is drawn"
    );
    assert!(
        pixels_of(&pixels, series_colour(1), 8) > 100,
        "C's line is drawn"
    );
    support::svg::keep("time_course", &text, &pixels);
}

#[test]
fn deterministic_time_course_draws_lines_without_bands() {
    let net = load_source("invented.crn", COURSE_NET.as_bytes(), &Overrides::default()).unwrap();
    // Immigration–death alone, A(t) = k/γ·(1 − e^(−γt)) with k = 20/s, γ = 0.01/s (its exact
    // mean) [C]; C held at 0: a course given in molecules at each time, as the ODE gives one.
    let times: Vec<f64> = (0..=50).map(|k| k as f64 * 2.0 * 3600.0 / 50.0).collect();
    let counts: Vec<Vec<f64>> = times
        .iter()
        .map(|&t| vec![2000.0 * (1.0 - (-0.01 * t).exp()), 50.0, 0.0])
        .collect();
    let course = Course::Deterministic {
        times: &times,
        counts: &counts,
    };
    let text = report::simulate::svg(&net, course, &[0, 1]);
    let p = parse(&text);
    assert_eq!(p.text("x-label"), "time (min)");
    assert_eq!(p.legend(), ["A", "B (clamped)"]);
    assert!(p.all("band").is_empty(), "no SD, no band");
    assert_eq!(p.all("line").len(), 2);
    let y = mapping(&ticks(&p, "y-tick"), false);
    let line = &p.all("line")[0];
    let pts = path_points(line.attribute("d").unwrap());
    assert!((pts[50].1 - y(counts[50][0])).abs() < 0.05);
    let long: Vec<f64> = times.iter().map(|t| t * 10.0).collect();
    let course = Course::Deterministic {
        times: &long,
        counts: &counts,
    };
    let p2_text = report::simulate::svg(&net, course, &[0]);
    assert_eq!(
        parse(&p2_text).text("x-label"),
        "time (h)",
        "20 h reads in hours"
    );
    let pixels = render(&text);
    assert!(pixels_of(&pixels, series_colour(0), 8) > 100);
    support::svg::keep("time_course_ode", &text, &pixels);
}

#[test]
fn noise_plot_labels_every_point_with_species_and_volume_and_shows_intervals() {
    // The receptors given as a concentration (≈ 150 molecules in 2 fL), so that each volume
    // has its own copy numbers: an amount given in molecules keeps its count at every volume.
    let text = std::fs::read_to_string(example("receptor_signal.crn")).unwrap();
    let text = text.replace("R  = 150 molecules", "R  = 125 nM");
    assert!(text.contains("R  = 125 nM"));
    let net = load_source(
        "receptor_signal.crn",
        text.as_bytes(),
        &Overrides::default(),
    )
    .unwrap();
    let opts = copyloop::noise::Options {
        replicates: 20,
        threads: Some(1),
        volumes: vec![1e-15, 4e-15],
        ..Default::default()
    };
    let r = copyloop::noise::noise(&net, &opts).unwrap();
    let text = report::noise::svg(&r);
    let p = parse(&text);
    assert_eq!(p.text("x-label"), "mean copy number (molecules)");
    assert_eq!(p.text("y-label"), "coefficient of variation (SD / mean)");
    assert_eq!(
        p.legend(),
        ["ensemble (95 % CI)", "linear noise (LNA)", "1/√N (Poisson)"]
    );
    let drawn: Vec<_> = r
        .volumes
        .iter()
        .flat_map(|v| {
            v.species
                .iter()
                .filter(|s| !s.clamped && s.mean > 0.0 && s.cv > 0.0)
        })
        .collect();
    assert_eq!(drawn.len(), 6, "R, RL, Q at two volumes");
    let series = p.series();
    assert_eq!(count(&series[0], "marker"), drawn.len());
    assert_eq!(
        count(&series[0], "error-bar"),
        drawn.len(),
        "every CV has its interval"
    );
    assert_eq!(count(&series[1], "marker"), drawn.len());
    assert_eq!(count(&series[2], "line"), 1, "the Poisson line");
    let mut labels = p.texts("point-label");
    labels.sort();
    assert_eq!(
        labels,
        ["Q, 1 fL", "Q, 4 fL", "R, 1 fL", "R, 4 fL", "RL, 1 fL", "RL, 4 fL"]
    );
    // The Poisson line lies at CV = 1/√N on the log–log axes read from the ticks.
    let x = mapping(&ticks(&p, "x-tick"), true);
    let y = mapping(&ticks(&p, "y-tick"), true);
    let poisson = series[2]
        .descendants()
        .find(|n| n.attribute("class") == Some("line"))
        .unwrap();
    let ends = path_points(poisson.attribute("d").unwrap());
    let n0 = drawn
        .iter()
        .map(|s| s.mean)
        .chain(drawn.iter().map(|s| s.lna_mean));
    let lo = n0.fold(f64::INFINITY, f64::min);
    assert!((ends[0].0 - x(lo)).abs() < 0.2 && (ends[0].1 - y(1.0 / lo.sqrt())).abs() < 0.2);
    // Labels do not overlap each other (estimated extents, 0.6 em a character).
    let boxes: Vec<(f64, f64, f64, f64)> = p
        .all("point-label")
        .iter()
        .map(|n| {
            let at = |a: &str| n.attribute(a).unwrap().parse::<f64>().unwrap();
            let w = n.text().unwrap().chars().count() as f64 * 6.0;
            let left = match n.attribute("text-anchor") {
                Some("end") => at("x") - w,
                Some("middle") => at("x") - w / 2.0,
                _ => at("x"),
            };
            (left, at("y") - 10.0, left + w, at("y") + 3.0)
        })
        .collect();
    for (i, a) in boxes.iter().enumerate() {
        for b in &boxes[i + 1..] {
            let apart = a.2 <= b.0 || b.2 <= a.0 || a.3 <= b.1 || b.3 <= a.1;
            assert!(apart, "labels overlap: {a:?} {b:?}");
        }
    }
    let pixels = render(&text);
    assert!(
        pixels_of(&pixels, series_colour(0), 8) > 30,
        "ensemble markers drawn"
    );
    support::svg::keep("noise", &text, &pixels);
}

// Invented: an enzyme clearing a clamped substrate, a receptor signalling while bound, and a
// carrier taking up a hormone that is made and cleared (made-up numbers).
const TWO_MOTIFS: &str = "\
volume 1 pL
species S = 50 nM clamped
species E = 100 molecules
species ES = 0 molecules
species P = 0 molecules
species L = 20 nM clamped
species R = 200 molecules
species RL = 0 molecules
species M = 0 molecules
species H = 0 molecules
species G = 300 molecules
species HG = 0 molecules
step bind E + S <-> ES @ 1e6 /M/s, 1 /s
step turn ES -> E + P @ 2 /s
step out  P -> 0 @ 0.05 /s
step grab R + L <-> RL @ 1e7 /M/s, 0.1 /s
step sig  RL -> RL + M @ 1 /s
step deg  M -> 0 @ 0.1 /s
step make 0 -> H @ 5
step hold H + G <-> HG @ 0.001, 0.1
step use  HG -> G @ 0.02
step gone H -> 0 @ 0.01
";

#[test]
fn reconcile_plot_sets_predictions_beside_the_ensemble_with_error_bars() {
    let net = load_source(
        "two_motifs.crn",
        TWO_MOTIFS.as_bytes(),
        &Overrides::default(),
    )
    .unwrap();
    let opts = copyloop::reconcile::Options {
        replicates: 8,
        threads: Some(1),
        t_end: Some(300.0),
        burn_in: Some(50.0),
        ..Default::default()
    };
    let r = copyloop::reconcile::reconcile(&net, &opts).unwrap();
    let n = r.motifs.len();
    assert_eq!(n, 3, "an enzyme, a receptor and a carrier motif");
    let text = report::reconcile::svg(&net, &r);
    let p = parse(&text);
    assert_eq!(
        p.text("x-label"),
        "carrier motif (carrier·ligand → output step)"
    );
    assert!(p.text("y-label").starts_with("output flux (molecules/s"));
    assert_eq!(
        p.legend(),
        [
            "ensemble mean (95 % CI)",
            "Langmuir form",
            "total QSSA",
            "ODE steady state"
        ]
    );
    let names: Vec<String> = r
        .motifs
        .iter()
        .map(|m| format!("{}·{} → {}", m.carrier, m.ligand, m.output))
        .collect();
    assert_eq!(p.texts("x-tick"), names);
    let series = p.series();
    assert_eq!(count(&series[0], "marker"), n);
    assert_eq!(count(&series[0], "error-bar"), n);
    assert_eq!(count(&series[1], "marker"), n);
    let tqssa = r
        .motifs
        .iter()
        .filter(|m| m.predicted.tqssa_per_s.is_some())
        .count();
    assert_eq!(count(&series[2], "marker"), tqssa);
    assert_eq!(count(&series[3], "marker"), n);
    // At each category the four markers stand apart: none hides another.
    let centre = |node: &roxmltree::Node| -> f64 {
        match node.tag_name().name() {
            "circle" => node.attribute("cx").unwrap().parse().unwrap(),
            "rect" => {
                node.attribute("x").unwrap().parse::<f64>().unwrap()
                    + node.attribute("width").unwrap().parse::<f64>().unwrap() / 2.0
            }
            _ => path_points(node.attribute("d").unwrap())[0].0,
        }
    };
    let xs: Vec<Vec<f64>> = series
        .iter()
        .map(|s| {
            s.descendants()
                .filter(|d| d.attribute("class") == Some("marker"))
                .map(|d| centre(&d))
                .collect()
        })
        .collect();
    for (k, ((&e, &l), &o)) in xs[0].iter().zip(&xs[1]).zip(&xs[3]).enumerate() {
        assert!(
            l - e > 10.0 && o - l > 10.0,
            "offsets at motif {k}: {e} {l} {o}"
        );
    }
    let pixels = render(&text);
    assert!(
        pixels_of(&pixels, series_colour(1), 8) > 20,
        "Langmuir markers drawn"
    );
    support::svg::keep("reconcile", &text, &pixels);
}

fn run_sweep(args: &[&str], dir: &std::path::Path, name: &str) -> String {
    let out = dir.join(format!("{name}.jsonl"));
    let svg = dir.join(format!("{name}.svg"));
    let mut all = vec!["sweep".to_string(), example("receptor_signal.crn")];
    all.extend(args.iter().map(|s| s.to_string()));
    all.extend([
        "--task".into(),
        "steady".into(),
        "--threads".into(),
        "1".into(),
        "--out".into(),
        out.to_string_lossy().into(),
        "--svg".into(),
        svg.to_string_lossy().into(),
    ]);
    let refs: Vec<&str> = all.iter().map(String::as_str).collect();
    let o = support::cli::run(&refs);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    std::fs::read_to_string(svg).unwrap()
}

#[test]
fn sweep_line_names_the_varied_value_with_the_file_unit_and_a_free_species() {
    let dir = tempfile::tempdir().unwrap();
    let text = run_sweep(&["--vary", "kon=log:1e6..1e8:5"], dir.path(), "line");
    let p = parse(&text);
    // kon is written `1e7 /M/s` in the file; L is clamped, so the default figure is R's.
    assert_eq!(p.text("x-label"), "kon [/M/s]");
    assert_eq!(p.text("y-label"), "R: steady count [molecules]");
    assert_eq!(p.legend(), ["R: steady count [molecules]"]);
    let series = p.series();
    assert_eq!(count(&series[0], "marker"), 5);
    assert_eq!(count(&series[0], "line"), 1);
    let x = mapping(&ticks(&p, "x-tick"), true);
    let marks: Vec<f64> = p
        .all("marker")
        .iter()
        .map(|m| m.attribute("cx").unwrap().parse().unwrap())
        .collect();
    for (k, want) in [1e6, 1e6 * 10f64.sqrt(), 1e7, 1e7 * 10f64.sqrt(), 1e8]
        .iter()
        .enumerate()
    {
        assert!(
            (marks[k] - x(*want)).abs() < 0.05,
            "point {k} on the log axis"
        );
    }
    let pixels = render(&text);
    assert!(pixels_of(&pixels, series_colour(0), 8) > 50);
    support::svg::keep("sweep_line", &text, &pixels);
}

#[test]
fn sweep_heat_map_has_a_cell_per_point_and_a_named_colour_bar() {
    let dir = tempfile::tempdir().unwrap();
    let text = run_sweep(
        &[
            "--vary",
            "volume=log:0.5pL..4pL:4",
            "--vary",
            "koff=lin:0.1..0.4:5",
        ],
        dir.path(),
        "heat",
    );
    let p = parse(&text);
    assert_eq!(p.text("x-label"), "volume [pL]", "the unit the sweep gave");
    assert_eq!(p.text("y-label"), "koff [/s]", "the unit the file wrote");
    assert_eq!(p.text("bar-label"), "R: steady count [molecules]");
    assert_eq!(p.all("cell").len(), 20);
    assert!(p.all("bar-tick").len() >= 2);
    // Cells tile the plot area without gaps or overlaps: their areas add up to the frame's.
    let area: f64 = p
        .all("cell")
        .iter()
        .map(|c| {
            let v = |a: &str| c.attribute(a).unwrap().parse::<f64>().unwrap();
            v("width") * v("height")
        })
        .sum();
    let f = p.bounds("frame");
    let frame = (f.2 - f.0) * (f.3 - f.1);
    assert!(
        (area - frame).abs() < 0.002 * frame,
        "cells {area} frame {frame}"
    );
    let pixels = render(&text);
    // The darkest and the lightest stop of the ramp are both on the page (bar and cells).
    assert!(pixels_of(&pixels, "#440154", 6) > 20);
    assert!(pixels_of(&pixels, "#fde725", 6) > 20);
    support::svg::keep("sweep_heat", &text, &pixels);
}

#[test]
fn heat_map_of_a_scattered_design_draws_a_dot_per_point_and_greys_missing_values() {
    use copyloop::sweep::{Axis, Response};
    let axis = |name: &str, log: bool| Axis {
        name: name.into(),
        unit: None,
        file_unit: Some("nM".into()),
        log,
        grid: Vec::new(),
    };
    // A made-up Latin hypercube of 7 points, one of which failed.
    let points: Vec<(Vec<f64>, Option<f64>)> = (0..7)
        .map(|k| {
            let (a, b) = (1.0 + k as f64, 10f64.powf(k as f64 / 3.0));
            (vec![a, b], (k != 3).then_some(a * b))
        })
        .collect();
    let r = Response {
        axes: vec![axis("A", false), axis("B & <C>", true)],
        metric: "/final/A/mean".into(),
        task: "simulate".into(),
        points,
    };
    let text = report::sweep::response::svg(&r);
    let p = parse(&text);
    assert_eq!(p.text("x-label"), "A [nM]");
    assert_eq!(
        p.text("y-label"),
        "B & <C> [nM]",
        "names are escaped and read back"
    );
    assert_eq!(p.text("bar-label"), "A: final mean [molecules]");
    assert_eq!(p.all("dot").len(), 7);
    assert_eq!(p.text("missing-label"), "no value");
    assert!(p.text("note").starts_with("1 of 7 points have no value"));
    let pixels = render(&text);
    assert!(
        pixels_of(&pixels, "#d0d0d0", 2) > 20,
        "the failed point is grey"
    );
    support::svg::keep("sweep_lhs", &text, &pixels);
}

#[test]
#[should_panic(expected = "resvg rejects the SVG")]
fn the_renderer_check_fails_on_a_file_resvg_rejects() {
    render("<svg xmlns=\"http://www.w3.org/2000/svg\" width=\"10\" height=\"10\"><rect></svg>");
}

#[test]
#[should_panic(expected = "resvg warned")]
fn the_renderer_check_fails_on_a_warning() {
    render(concat!(
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="10" height="10">"#,
        r#"<path d="M 1,1 L 5,q" stroke="black"/></svg>"#
    ));
}

// Immigration–death (DSMTS 002-01: 0 -> X at 1/s, X -> 0 at 0.1/s from X = 0): X(t) is
// Poisson with mean 10(1 − e^(−0.1 t)) (McQuarrie 1967 [verified]).
#[test]
fn distribution_plot_draws_the_exact_law_where_the_axes_say_beside_the_histogram() {
    let dir = tempfile::tempdir().unwrap();
    let svg = dir.path().join("d.svg");
    let fixture = format!(
        "{}/tests/fixtures/dsmts/dsmts-002-01.crn",
        env!("CARGO_MANIFEST_DIR")
    );
    let o = support::cli::run(&[
        "distribution",
        &fixture,
        "--t-end",
        "20",
        "--grid",
        "3",
        "--species",
        "X",
        "--svg",
        svg.to_str().unwrap(),
        "--svg-times",
        "20",
        "--ensemble",
        "100",
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    let p = parse(&text);
    assert_eq!(p.text("x-label"), "X (molecules)");
    assert_eq!(p.text("y-label"), "probability");
    assert_eq!(p.legend(), ["t = 20 s exact", "t = 20 s, 100 runs"]);
    let series = p.series();
    assert_eq!(count(&series[0], "line"), 1);
    assert!(count(&series[1], "marker") > 5, "the histogram's bins");
    let x = mapping(&ticks(&p, "x-tick"), false);
    let y = mapping(&ticks(&p, "y-tick"), false);
    let line = series[0]
        .descendants()
        .find(|n| n.attribute("class") == Some("line"))
        .unwrap();
    let mu = 10.0 * (1.0 - (-2.0f64).exp());
    let mut pmf = (-mu).exp();
    for (k, &(px, py)) in path_points(line.attribute("d").unwrap()).iter().enumerate() {
        assert!((px - x(k as f64)).abs() < 0.05, "k = {k}");
        assert!((py - y(pmf)).abs() < 0.05, "p({k})");
        pmf *= mu / (k + 1) as f64;
    }
    let pixels = render(&text);
    assert!(pixels_of(&pixels, series_colour(0), 8) > 50);
    support::svg::keep("distribution", &text, &pixels);
}

/// `simulate --svg F --species X`: the command line writes the chart of the species it was
/// told to draw (coordinates are checked against the ensemble in the test above), and refuses
/// a name the network lacks with exit status 2.
#[test]
fn simulate_writes_the_time_course_of_the_chosen_species() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("invented.crn");
    std::fs::write(&file, COURSE_NET).unwrap();
    let file = file.to_str().unwrap();
    let out = dir.path().join("course.svg");
    let out = out.to_str().unwrap();
    let common = [
        "simulate",
        file,
        "--t-end",
        "300",
        "--replicates",
        "4",
        "--grid",
        "11",
        "--threads",
        "1",
        "--svg",
        out,
        "--json",
    ];
    let mut args = common.to_vec();
    args.extend(["--species", "C"]);
    let v = support::cli::json(&args);
    let text = std::fs::read_to_string(out).unwrap();
    let p = parse(&text);
    assert_eq!(p.legend(), ["C (mean ± SD)"]);
    assert_eq!(p.text("x-label"), "time (s)");
    let series = p.series();
    assert_eq!(series.len(), 1);
    let line = series[0]
        .descendants()
        .find(|n| n.attribute("class") == Some("line"))
        .unwrap();
    assert_eq!(path_points(line.attribute("d").unwrap()).len(), 11);
    assert!(v.is_object(), "the JSON document is printed as well");
    render(&text);

    // Default: the species that are not clamped (A and C; B is clamped).
    let v = support::cli::json(&common);
    assert!(v.is_object());
    let p2 = std::fs::read_to_string(out).unwrap();
    assert_eq!(parse(&p2).legend(), ["A (mean ± SD)", "C (mean ± SD)"]);

    let mut bad = common.to_vec();
    bad.extend(["--species", "Q"]);
    let o = support::cli::run(&bad);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("\"Q\" is not a species"), "{err}");
}
