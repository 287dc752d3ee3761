//! The SBML test suite (Keating et al. 2020, Mol. Syst. Biol. 16:e9110; its discrete stochastic
//! part is Evans, Gillespie & Wilkinson 2008, Bioinformatics 24:285): every model file of every
//! case is imported, and each must either import or be refused by name.

mod support;

use support::sbml_suite::{cases, outcome, refused_tag, suite_dir, Outcome};

#[test]
fn survey() {
    let Some(root) = suite_dir() else {
        eprintln!("skipped: the SBML test suite's data is not here (set COPYLOOP_SBML_SUITE)");
        return;
    };
    let mut counts = std::collections::BTreeMap::new();
    for c in cases(&root) {
        for f in c.files(&root) {
            let o = outcome(&f);
            let key = match &o {
                Outcome::Imported => "imported".to_string(),
                Outcome::NotYet(m) | Outcome::Error(m) => format!(
                    "{}: {}",
                    o.label(),
                    m.split(": ").skip(1).collect::<Vec<_>>().join(": ")
                ),
                Outcome::Refused(c, _) => format!("refused {}", c.name()),
            };
            let short: String = key.chars().take(110).collect();
            let e = counts.entry(short).or_insert((0, String::new()));
            e.0 += 1;
            if e.1.is_empty() {
                e.1 = f.display().to_string();
            }
            let _ = refused_tag("");
        }
    }
    let mut v: Vec<_> = counts.into_iter().collect();
    v.sort_by_key(|x| std::cmp::Reverse(x.1 .0));
    for (k, (n, f)) in v {
        println!("{n:5} {k}   [{f}]");
    }
}
