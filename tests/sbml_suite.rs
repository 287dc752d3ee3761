//! The SBML test suite (Keating et al. 2020, Mol. Syst. Biol. 16:e9110 [M]; its discrete
//! stochastic part is Evans, Gillespie & Wilkinson 2008, Bioinformatics 24:285 [verified]):
//! every model file of every case is imported, and each must import or be refused by name.
//!
//! - A case whose tags name a construct copyloop refuses (algebraic rules, fast reactions, the
//!   delay and rateOf csymbols, the comp and fbc packages; the distrib package of the
//!   statistical-distribution cases) must be refused naming that construct.
//! - Every other case must be read without error: imported, or valid SBML that the network
//!   cannot hold yet (said so by name).
//! - The Level 2 and Level 3 files of one case are the same model: they must fare alike.
//!
//! `cargo test --release --test sbml_suite -- --ignored write_conformance_table` rewrites
//! docs/sbml-conformance.md from the same survey.

mod support;

use std::collections::{BTreeMap, BTreeSet};
use std::fmt::Write as _;
use support::sbml_suite::{cases, outcome, refused_tag, suite_dir, Case, Outcome};

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
            if o1.label() != o2.label() {
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
    let Some(s) = survey() else { return };
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
         construct (*refused*). Simulated numbers against each case's expected results are not \
         compared yet.\n\n",
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
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/docs/sbml-conformance.md");
    std::fs::write(path, out).unwrap();
    eprintln!("wrote {path}");
}
