//! Draws the events-per-second curve of `cargo bench --bench scale` as docs/scale.svg, with
//! copyloop's own plot module: the median time per iteration that criterion stored
//! (target/criterion/scale/<selection>/<reactions>/new/estimates.json) and the events of one
//! iteration (its throughput, benchmark.json). Run after the bench:
//! `cargo run --release --example scale_plot`. Prints the figures as a table too.

use copyloop::report::plot::{AxisSpec, Chart, Dash, Datum, Marker, Series};
use std::path::Path;

/// The sizes of benches/scale.rs.
const SIZES: [usize; 7] = [100, 300, 1_000, 3_000, 10_000, 30_000, 100_000];

/// Million events per second of one benchmark, if criterion stored it.
fn rate(dir: &Path) -> Option<f64> {
    let read = |f: &str| -> Option<serde_json::Value> {
        serde_json::from_str(&std::fs::read_to_string(dir.join("new").join(f)).ok()?).ok()
    };
    let ns = read("estimates.json")?["median"]["point_estimate"].as_f64()?;
    let events = read("benchmark.json")?["throughput"]["Elements"].as_f64()?;
    Some(events / ns * 1e3)
}

fn main() {
    let root = Path::new("target/criterion/scale");
    let names = [
        ("tree", "sum tree"),
        ("rejection", "composition–rejection"),
        ("spread_tree", "sum tree, propensities over 12 decades"),
        (
            "spread_rejection",
            "composition–rejection, propensities over 12 decades",
        ),
    ];
    let mut series = Vec::new();
    println!("| reactions | {} |", names.map(|n| n.1).join(" | "));
    println!("| ---: |{}", " ---: |".repeat(names.len()));
    let rates: Vec<Vec<Option<f64>>> = names
        .iter()
        .map(|(dir, _)| {
            SIZES
                .iter()
                .map(|m| rate(&root.join(dir).join(m.to_string())))
                .collect()
        })
        .collect();
    for (i, m) in SIZES.iter().enumerate() {
        let cells: Vec<String> = rates
            .iter()
            .map(|r| r[i].map_or("–".into(), |v| format!("{v:.2} M")))
            .collect();
        println!("| {m} | {} |", cells.join(" | "));
    }
    for ((_, label), r) in names.iter().zip(&rates) {
        let points: Vec<Datum> = SIZES
            .iter()
            .zip(r)
            .filter_map(|(&m, v)| v.map(|v| Datum::new(m as f64, v)))
            .collect();
        let mut s = Series::new(*label, points);
        s.line = Some(if label.contains("decades") {
            Dash::Dashed
        } else {
            Dash::Solid
        });
        s.marker = Some(Marker::Circle);
        series.push(s);
    }
    let chart = Chart {
        title: "Exact kernel: events per second against network size".into(),
        x: AxisSpec {
            label: "reactions".into(),
            log: true,
            from_zero: false,
        },
        y: AxisSpec {
            label: "million events per second".into(),
            log: false,
            from_zero: true,
        },
        categories: Vec::new(),
        series,
        notes: vec![
            "Benchmark-loop figures (cargo bench --bench scale): one core of a shared 2-core \
             machine, no observer, median of criterion's samples."
                .into(),
            "Invented stationary random networks: reversible pairs, each species read by about \
             two reactions at every size."
                .into(),
        ],
    };
    std::fs::create_dir_all("docs").expect("docs directory");
    std::fs::write("docs/scale.svg", chart.render()).expect("write docs/scale.svg");
    println!("wrote docs/scale.svg");
}
