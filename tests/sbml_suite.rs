//! The SBML test suite (Keating et al. 2020, Mol. Syst. Biol. 16:e9110 [M]; its discrete
//! stochastic part is Evans, Gillespie & Wilkinson 2008, Bioinformatics 24:285 [verified]):
//! every model file of every case is imported, and each must import or be refused by name.
//!
//! - A case whose tags name a construct copyloop refuses (algebraic rules, fast reactions, the
//!   delay and rateOf csymbols, the comp and fbc packages; the distrib package of the
//!   statistical-distribution cases) must be refused naming that construct.
//! - Every other case must be read without error: imported, or valid SBML that the network
//!   cannot hold yet (said so by name).
//! - The Level 2 and Level 3 files of one case are the same model: they must fare alike,
//!   except where the Level 3 file declares no substance unit (Level 2's default is mole).
//!
//!
//! Every stochastic time-course case that imports is simulated and judged by the suite's own
//! criteria (tests/support/sbml_stochastic.rs says how and how many replicates), seeded by the
//! case number; its Level 2 file must give the same numbers.
//!
//! `cargo test --release --test sbml_suite -- --ignored write_conformance_table` rewrites
//! docs/sbml-conformance.md from the same survey and the same ensembles.

mod support;

use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use std::path::Path;
use support::sbml_semantic;
use support::sbml_stochastic::{self as stochastic, Cumulants};
use support::sbml_suite::{
    all_supported, cases, outcome, refused_tag, suite_dir, Case, Outcome, SUPPORTED_TAGS,
};

/// Constructs a case must be refused for, by their names.
fn expected_refusals(c: &Case) -> BTreeSet<&'static str> {
    let mut out: BTreeSet<&str> = c.tags().filter_map(|t| refused_tag(t)).collect();
    if c.kind == "StatisticalDistribution" {
        out.insert("package distrib");
    }
    out
}

struct Survey {
    /// (case, outcome of each file, newest first)
    rows: Vec<(Case, Vec<(String, Outcome)>)>,
}

fn survey() -> Option<Survey> {
    let Some(root) = suite_dir() else {
        eprintln!("skipped: the SBML test suite's data is not here (set COPYLOOP_SBML_SUITE)");
        return None;
    };
    let rows = cases(&root)
        .into_iter()
        .map(|c| {
            let files = c
                .files(&root)
                .into_iter()
                .map(|f| {
                    let name = f.file_name().unwrap().to_string_lossy().into_owned();
                    (name, outcome(&f))
                })
                .collect();
            (c, files)
        })
        .collect();
    Some(Survey { rows })
}

#[test]
fn every_file_imports_or_is_refused_by_name() {
    let Some(s) = survey() else { return };
    let mut failures = Vec::new();
    let mut files = 0;
    for (c, outs) in &s.rows {
        assert!(
            !outs.is_empty(),
            "case {} {} has no model file",
            c.suite,
            c.id
        );
        let want = expected_refusals(c);
        for (f, o) in outs {
            files += 1;
            let ok = match o {
                Outcome::Refused(k, _) => want.contains(k.name().as_str()),
                Outcome::Imported | Outcome::NotYet(_) => want.is_empty(),
                Outcome::Error(_) => false,
            };
            if !ok {
                failures.push(format!("{f}: expected refusal {want:?}, got {o:?}"));
            }
        }
        if let [(f1, o1), (f2, o2), ..] = outs.as_slice() {
            // A Level 3 file that declares no substance unit cannot be read as counts or moles;
            // its Level 2 twin has the default unit, mole.
            let undeclared =
                matches!(o1, Outcome::NotYet(m) if m.contains("no declared substance unit"));
            if o1.label() != o2.label() && !undeclared {
                failures.push(format!(
                    "{f1} is {}, but {f2} is {}",
                    o1.label(),
                    o2.label()
                ));
            }
        }
    }
    eprintln!("{} cases, {files} files surveyed", s.rows.len());
    assert!(
        failures.is_empty(),
        "{} files:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

/// The category of a case, from its newest file.
fn category(outs: &[(String, Outcome)]) -> &'static str {
    outs.first().map_or("missing", |(_, o)| o.label())
}

/// The reason a file was not imported, without the element-specific part.
fn reason(o: &Outcome) -> Option<String> {
    match o {
        Outcome::Imported => None,
        Outcome::Refused(k, _) => Some(format!("refused: {}", k.name())),
        Outcome::NotYet(m) => Some(format!(
            "not mapped yet: {}",
            m.split("not supported yet: ")
                .nth(1)
                .unwrap_or(m)
                .split(" `")
                .next()
                .unwrap_or("")
        )),
        Outcome::Error(m) => Some(format!("error: {m}")),
    }
}

#[test]
#[ignore = "writes docs/sbml-conformance.md; run on purpose"]
fn write_conformance_table() {
    let (Some(root), Some(s)) = (suite_dir(), survey()) else {
        return;
    };
    const COLS: [&str; 4] = ["imported", "read, not mapped yet", "refused", "error"];
    let mut by_tag: BTreeMap<String, [usize; 4]> = BTreeMap::new();
    let mut by_suite: BTreeMap<String, [usize; 4]> = BTreeMap::new();
    let mut reasons: BTreeMap<String, (usize, Vec<String>)> = BTreeMap::new();
    for (c, outs) in &s.rows {
        let k = COLS.iter().position(|x| *x == category(outs)).unwrap_or(3);
        by_suite
            .entry(format!("{} ({})", c.suite, c.kind))
            .or_default()[k] += 1;
        for t in c.tags() {
            by_tag.entry(t.clone()).or_default()[k] += 1;
        }
        if let Some(r) = outs.first().and_then(|(_, o)| reason(o)) {
            let e = reasons.entry(r).or_default();
            e.0 += 1;
            if e.1.len() < 8 {
                e.1.push(c.id.clone());
            }
        }
    }
    let mut out = String::new();
    out.push_str(
        "# SBML test-suite conformance\n\n\
         Generated by `cargo test --release --test sbml_suite -- --ignored write_conformance_table` \
         from the SBML test suite's cases (set `COPYLOOP_SBML_SUITE` to their directory). Each \
         case is counted once, by its newest-level file; the Level 2 file of a case must fare \
         the same (the test `every_file_imports_or_is_refused_by_name` checks it).\n\n\
         This table measures import: whether each model is read and compiled to a network \
         (*imported*), read as valid SBML that the network cannot hold yet (*read, not mapped \
         yet*, with the reason), or refused by name because copyloop does not support a \
         construct (*refused*). The numbers of every imported case are compared with the \
         suite's expected results below: the semantic cases with the deterministic method, the \
         stochastic ones with ensembles.\n\n",
    );
    let table = |out: &mut String, title: &str, rows: &BTreeMap<String, [usize; 4]>| {
        writeln!(out, "| {title} | cases | {} |", COLS.join(" | ")).unwrap();
        writeln!(out, "| --- | ---: | {} |", COLS.map(|_| "---:").join(" | ")).unwrap();
        for (name, n) in rows {
            let total: usize = n.iter().sum();
            let cells: Vec<String> = n.iter().map(|x| x.to_string()).collect();
            writeln!(out, "| {name} | {total} | {} |", cells.join(" | ")).unwrap();
        }
        out.push('\n');
    };
    out.push_str("## By suite\n\n");
    table(&mut out, "suite (type)", &by_suite);
    out.push_str("## By feature tag\n\nA case counts under every tag it carries.\n\n");
    table(&mut out, "tag", &by_tag);
    out.push_str(
        "## Why cases are not imported\n\n| reason | cases | e.g. |\n| --- | ---: | --- |\n",
    );
    let mut rs: Vec<_> = reasons.into_iter().collect();
    rs.sort_by_key(|r| std::cmp::Reverse(r.1 .0));
    for (r, (n, ids)) in rs {
        writeln!(
            out,
            "| {} | {n} | {} |",
            r.replace('|', "\\|"),
            ids.join(", ")
        )
        .unwrap();
    }
    out.push('\n');
    let cases: Vec<Case> = s.rows.iter().map(|r| r.0.clone()).collect();
    semantic_section(
        &mut out,
        &s,
        &sbml_semantic::imported_outcomes(&root, &cases),
    );
    stochastic_section(&mut out, &stochastic_outcomes(&root, &s));
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/docs/sbml-conformance.md");
    std::fs::write(path, out).unwrap();
    eprintln!("wrote {path}");
}

/// Every stochastic time-course case that imports, with its outcome; the Level 2 file of each
/// must give the same numbers as the newest one.
fn stochastic_outcomes(root: &Path, s: &Survey) -> Vec<Result<stochastic::Outcome, String>> {
    let cumulants = Cumulants::read();
    let replicates = stochastic::replicates();
    s.rows
        .iter()
        .filter(|(c, outs)| c.kind == "StochasticTimeCourse" && category(outs) == "imported")
        .map(|(c, _)| {
            let fail = |e: String| format!("{}: {e}", c.id);
            let nets = stochastic::networks(root, c).map_err(fail)?;
            let seed: u64 = c.id.parse().map_err(|_| fail("not a number".into()))?;
            let mut o =
                stochastic::run(root, c, &nets[0].1, replicates, seed, &cumulants).map_err(fail)?;
            for (file, net) in &nets[1..] {
                if let Err(e) = stochastic::same_numbers(&nets[0].1, net, seed) {
                    o.failures.push(format!("{file}: {e}"));
                }
            }
            o.levels = nets.iter().map(|n| n.0.clone()).collect();
            Ok(o)
        })
        .collect()
}

/// The semantic cases compared with their expected results: per suite and per tag, how many
/// imported cases pass, and every failure with its first bad value.
fn semantic_section(
    out: &mut String,
    s: &Survey,
    outcomes: &[(Case, Result<sbml_semantic::Outcome, String>)],
) {
    let passed = |o: &Result<sbml_semantic::Outcome, String>| o.as_ref().is_ok_and(|o| o.passed());
    let n_pass = outcomes.iter().filter(|(_, o)| passed(o)).count();
    let values: usize = outcomes
        .iter()
        .filter_map(|(_, o)| o.as_ref().ok())
        .map(|o| o.values)
        .sum();
    let total = s
        .rows
        .iter()
        .filter(|(c, _)| c.suite == "semantic" && c.kind == "TimeCourse")
        .count();
    writeln!(
        out,
        "## Semantic cases, measured\n\n\
         **{n_pass} of the {} imported semantic time-course cases pass** ({total} such cases \
         in all; {values} values compared). Each case's newest-level file is integrated with \
         the deterministic method (RODAS4, relative tolerance 1e-10, absolute tolerance a \
         thousandth of the case's) at the times of its results file, and every variable its \
         settings name is compared, as an amount or a concentration as they say, by the \
         suite's criterion |sim − expected| ≤ absolute + relative·|expected| with the case's \
         own tolerances; the case's Level 2 file, where it imports, is compared the same way. \
         `cargo test --release --test sbml_semantic` runs a fixed subset; \
         `-- --ignored` runs them all.\n",
        outcomes.len()
    )
    .unwrap();
    let imported: BTreeMap<&str, bool> = outcomes
        .iter()
        .map(|(c, o)| (c.id.as_str(), passed(o)))
        .collect();
    let claimed: Vec<&Case> = s
        .rows
        .iter()
        .map(|(c, _)| c)
        .filter(|c| c.suite == "semantic" && c.kind == "TimeCourse" && all_supported(c))
        .collect();
    let claimed_pass = claimed
        .iter()
        .filter(|c| imported.get(c.id.as_str()) == Some(&true))
        .count();
    let missed: Vec<&str> = claimed
        .iter()
        .filter(|c| imported.get(c.id.as_str()) != Some(&true))
        .map(|c| c.id.as_str())
        .collect();
    writeln!(
        out,
        "**{claimed_pass} of the {} semantic time-course cases whose every tag is in the supported list pass ({:.1} %)**; a case of the list that is not imported counts as a failure. The list (tests/support/sbml_suite.rs, `SUPPORTED_TAGS`) is docs/sbml-supported.md's: {}. Not passing: {}.\n",
        claimed.len(),
        100.0 * claimed_pass as f64 / claimed.len().max(1) as f64,
        SUPPORTED_TAGS.join(", "),
        if missed.is_empty() {
            "none".to_string()
        } else {
            missed.join(", ")
        }
    )
    .unwrap();
    let mut by_tag: BTreeMap<String, [usize; 3]> = BTreeMap::new();
    for (c, _) in s
        .rows
        .iter()
        .filter(|(c, _)| c.suite == "semantic" && c.kind == "TimeCourse")
    {
        for t in c.tags() {
            let e = by_tag.entry(t.clone()).or_default();
            e[0] += 1;
            if let Some(&p) = imported.get(c.id.as_str()) {
                e[1] += 1;
                e[2] += usize::from(p);
            }
        }
    }
    out.push_str("| tag | cases | imported | pass |\n| --- | ---: | ---: | ---: |\n");
    for (t, n) in &by_tag {
        writeln!(out, "| {t} | {} | {} | {} |", n[0], n[1], n[2]).unwrap();
    }
    out.push_str("\n### Failures\n\n");
    let mut any = false;
    for (c, o) in outcomes {
        let why = match o {
            Ok(o) if o.passed() => continue,
            Ok(o) => format!(
                "{} of {} values outside tolerance; first: {}",
                o.bad,
                o.values,
                o.first_bad.as_deref().unwrap_or("")
            ),
            Err(e) => format!("not run: {e}"),
        };
        any = true;
        writeln!(out, "- {}: {}", c.id, why.replace('|', "\\|")).unwrap();
    }
    if !any {
        out.push_str("None: every imported semantic case passes.\n");
    }
    out.push('\n');
}

/// 1234567 → "1,234,567".
fn grouped(n: u64) -> String {
    let d = n.to_string();
    let mut out = String::new();
    for (k, c) in d.chars().enumerate() {
        if k > 0 && (d.len() - k).is_multiple_of(3) {
            out.push(',');
        }
        out.push(c);
    }
    out
}

fn stochastic_section(out: &mut String, outcomes: &[Result<stochastic::Outcome, String>]) {
    let ok: Vec<&stochastic::Outcome> = outcomes.iter().filter_map(|o| o.as_ref().ok()).collect();
    let passed = ok.iter().filter(|o| o.failures.is_empty()).count();
    let points: usize = ok.iter().flat_map(|o| &o.series).map(|x| x.tested).sum();
    let outside: usize = ok.iter().flat_map(|o| &o.series).map(|x| x.z_outside).sum();
    let alpha = ok.first().map_or(0.0, |o| o.mean_alpha);
    let events: u64 = ok.iter().map(|o| o.events).sum();
    let seconds: f64 = ok.iter().map(|o| o.seconds).sum();
    let replicates = ok.first().map_or(0, |o| o.replicates);
    writeln!(
        out,
        "## Stochastic cases, measured\n\n\
         **{passed} of the {} imported stochastic time-course cases pass** the suite's criteria \
         ({} could not be run). Each case's newest-level file is simulated with the direct \
         method, {} replicates seeded by the case number, and every reported species \
         is judged at every point of the case's grid (start, duration and steps from its \
         settings) against the exact means μ_t and standard deviations σ_t of its results file. \
         The Level 2 file of each case must give the same numbers, bit for bit, from the same \
         seed (1,000 replicates). These ensembles ran {} events in {seconds:.1} s of wall \
         time, summed over cases (the `stochastic_cases_pass_the_suite_criteria` test runs them \
         in CI; `COPYLOOP_SBML_REPLICATES` sets another count).\n",
        outcomes.len(),
        outcomes.len() - ok.len(),
        grouped(replicates),
        grouped(events),
    )
    .unwrap();
    out.push_str(
        "- **Mean test** Z_t = √n·(x̄_t − μ_t)/σ_t. The suite's `meanRange` (−3, 3) is a \
         per-point range; a case reports about 50 correlated points per species, so the verdict \
         holds the range's false-alarm rate per series by Bonferroni: |Z_t| below the bound in \
         the table (4.04 for 51 points). The points outside the suite's own (−3, 3) are counted \
         too: ",
    );
    writeln!(
        out,
        "{outside} of {points}, where a correct simulator gives {:.1} on average (α = {:.2} % \
         per point).",
        alpha * points as f64,
        100.0 * alpha
    )
    .unwrap();
    out.push_str(
        "- **Variance test** Y_t = √(n/2)·(S²_t/σ²_t − 1), S²_t = (1/n)Σ(x_t − μ_t)², within the \
         suite's `sdRange` (−5, 5) at every point. Y_t presumes Var(S²) = 2σ⁴/n (a normal \
         fourth moment); in general Var(S²) = (κ₄ + 2σ⁴)/n, so the plain Y_t has standard \
         deviation s_Y = √(1 + κ₄/2σ⁴). κ₄, the fourth cumulant, is computed exactly for every \
         case (moment equations, closed at every order for the linear models, and the master \
         equation of the 51-state dimerisation; tests/reference/sbml_stochastic_cumulants.py, \
         which also reproduces every μ_t and σ_t of the results files). Where s_Y exceeds 1.25 \
         somewhere in a series, ±5 no longer spans 4 of the statistic's own standard deviations \
         and the plain test is invalid; that series is judged by the exact statistic \
         Y*_t = (S²_t − σ²_t)/√((κ₄ + 2σ⁴)/n) against the same (−5, 5) (*judged by* Y*). That \
         happens for the birth–death model started from 10 molecules (heavy-tailed late in the \
         run, as extinctions pile up at 0) and for a death counter early in the run (nearly \
         Poisson with a mean below 1). Both statistics are shown for every series.\n",
    );
    out.push_str(
        "- Where σ_t = 0 (t = 0, clamped species) every replicate must equal μ_t exactly \
         (*exact* points).\n\n",
    );
    out.push_str(
        "| case | species | points | exact | max \\|Z\\| | Z bound | outside (−3, 3) | max \\|Y\\| \
         | max s_Y | max \\|Y*\\| | judged by | verdict |\n\
         | --- | --- | ---: | ---: | ---: | ---: | ---: | ---: | ---: | ---: | --- | --- |\n",
    );
    for o in outcomes {
        let o = match o {
            Ok(o) => o,
            Err(e) => {
                writeln!(
                    out,
                    "| {} | | | | | | | | | | | not run |",
                    e.replace('|', "\\|")
                )
                .unwrap();
                continue;
            }
        };
        let verdict = if o.failures.is_empty() {
            "passes".to_string()
        } else {
            format!("**fails**: {}", o.failures.join("; ").replace('|', "\\|"))
        };
        for (k, x) in o.series.iter().enumerate() {
            let f2 = |v: Option<f64>| v.map_or("–".to_string(), |v| format!("{:.2}", v.abs()));
            let tested = x.tested > 0;
            let opt = |v: f64| tested.then_some(v);
            writeln!(
                out,
                "| {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} | {} |",
                if k == 0 { o.id.as_str() } else { "" },
                x.species,
                x.tested,
                x.exact,
                f2(opt(x.max_z)),
                if tested {
                    format!("{:.2}", o.z_bound)
                } else {
                    "–".into()
                },
                if tested {
                    x.z_outside.to_string()
                } else {
                    "–".into()
                },
                f2(opt(x.max_y_plain)),
                f2(x.max_s_y.filter(|_| tested)),
                f2(x.max_y_exact.filter(|_| tested)),
                match (tested, x.uses_exact) {
                    (false, _) => "exact points",
                    (true, true) => "Y*",
                    (true, false) => "Y",
                },
                if k == 0 { verdict.as_str() } else { "" },
            )
            .unwrap();
        }
    }
    out.push_str(
        "\nNot run: the stochastic cases that do not import yet (see above: assignment rules, \
         events) and the statistical-distribution cases (the `distrib` package, refused).\n",
    );
}

#[test]
fn stochastic_cases_pass_the_suite_criteria() {
    let (Some(root), Some(s)) = (suite_dir(), survey()) else {
        return;
    };
    let outcomes = stochastic_outcomes(&root, &s);
    assert!(
        outcomes.len() >= 28,
        "only {} stochastic cases ran",
        outcomes.len()
    );
    let mut failures = Vec::new();
    for o in outcomes {
        match o {
            Err(e) => failures.push(e),
            Ok(o) => {
                for x in o.series.iter().filter(|x| x.tested > 0) {
                    eprintln!(
                        "{} {}: {} points, max |Z| {:.2} (bound {:.2}), max |Y| {:.2}, \
                         max |Y*| {:.2}, max s_Y {:.2}{}",
                        o.id,
                        x.species,
                        x.tested,
                        x.max_z.abs(),
                        o.z_bound,
                        x.max_y_plain.abs(),
                        x.max_y_exact.unwrap_or(f64::NAN).abs(),
                        x.max_s_y.unwrap_or(f64::NAN),
                        if x.uses_exact { ", judged by Y*" } else { "" }
                    );
                }
                failures.extend(o.failures.iter().map(|f| format!("{}: {f}", o.id)));
            }
        }
    }
    assert!(failures.is_empty(), "{}", failures.join("\n"));
}
