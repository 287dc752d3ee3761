//! The SBML test suite's cases, read from where the suite's data lives at run time, and what
//! copyloop makes of each file.
//!
//! The data directory (holding `cases.tsv`, `semantic/` and `stochastic/`) is
//! `$COPYLOOP_SBML_SUITE`, else a `shared/sbml-suite` directory beside the repository or one of
//! its parent directories. Tests that need it print that they skipped when it is absent.

use copyloop::network::Overrides;
use copyloop::sbml::{self, Construct, ErrorKind, SbmlError};
use std::path::{Path, PathBuf};

/// Where the suite's data is, if anywhere.
pub fn suite_dir() -> Option<PathBuf> {
    if let Ok(p) = std::env::var("COPYLOOP_SBML_SUITE") {
        let p = PathBuf::from(p);
        return p.join("cases.tsv").is_file().then_some(p);
    }
    let here = PathBuf::from(env!("CARGO_MANIFEST_DIR"));
    here.ancestors()
        .skip(1)
        .map(|a| a.join("shared").join("sbml-suite"))
        .find(|p| p.join("cases.tsv").is_file())
}

/// One row of `cases.tsv`.
#[derive(Clone, Debug)]
pub struct Case {
    pub suite: String,
    pub id: String,
    pub kind: String,
    pub components: Vec<String>,
    pub tests: Vec<String>,
}

impl Case {
    pub fn dir(&self, root: &Path) -> PathBuf {
        root.join(&self.suite).join(&self.id)
    }

    /// The case's model files, newest level first.
    pub fn files(&self, root: &Path) -> Vec<PathBuf> {
        let mut out: Vec<PathBuf> = std::fs::read_dir(self.dir(root))
            .map(|d| {
                d.filter_map(|e| e.ok().map(|e| e.path()))
                    .filter(|p| {
                        p.file_name()
                            .and_then(|n| n.to_str())
                            .is_some_and(|n| n.contains("-sbml-l") && n.ends_with(".xml"))
                    })
                    .collect()
            })
            .unwrap_or_default();
        out.sort();
        out.reverse();
        out
    }

    /// Every tag, components then tests.
    pub fn tags(&self) -> impl Iterator<Item = &String> {
        self.components.iter().chain(&self.tests)
    }
}

/// The suite's feature tags that docs/sbml-supported.md lists as supported (components, then
/// test tags). A case whose every tag is here is one copyloop claims to run; the share of those
/// that pass is the conformance figure.
pub const SUPPORTED_TAGS: [&str; 39] = [
    "Compartment",
    "Species",
    "Reaction",
    "Parameter",
    "AssignmentRule",
    "RateRule",
    "InitialAssignment",
    "FunctionDefinition",
    "EventNoDelay",
    "EventWithDelay",
    "CSymbolTime",
    "CSymbolAvogadro",
    "Amount",
    "Concentration",
    "NonUnityCompartment",
    "0D-Compartment",
    "MultiCompartment",
    "HasOnlySubstanceUnits",
    "BoundaryCondition",
    "ConstantSpecies",
    "LocalParameters",
    "NonConstantParameter",
    "NonUnityStoichiometry",
    "AssignedConstantStoichiometry",
    "ConversionFactors",
    "DefaultValue",
    "ReversibleReaction",
    "InitialValueReassigned",
    "UncommonMathML",
    "BoolNumericSwap",
    "L3v2MathML",
    "NoMathML",
    "EventIsPersistent",
    "EventIsNotPersistent",
    "EventT0Firing",
    "EventUsesTriggerTimeValues",
    "EventUsesAssignmentTimeValues",
    "EventPriority",
    "SpeciesReferenceInMath",
];

/// Whether every tag of `c` is a supported one.
pub fn all_supported(c: &Case) -> bool {
    c.tags().all(|t| SUPPORTED_TAGS.contains(&t.as_str()))
}

/// Reads `cases.tsv`.
pub fn cases(root: &Path) -> Vec<Case> {
    let text = std::fs::read_to_string(root.join("cases.tsv")).expect("cases.tsv");
    let split = |s: &str| -> Vec<String> {
        s.split(',')
            .map(|x| x.trim().to_string())
            .filter(|x| !x.is_empty() && !x.starts_with("testType"))
            .collect()
    };
    text.lines()
        .skip(1)
        .filter_map(|l| {
            let f: Vec<&str> = l.split('\t').collect();
            (f.len() >= 5).then(|| Case {
                suite: f[0].to_string(),
                id: f[1].to_string(),
                kind: f[2].to_string(),
                components: split(f[3]),
                tests: split(f[4]),
            })
        })
        .collect()
}

/// Tags whose cases copyloop refuses, with the construct it names.
pub fn refused_tag(tag: &str) -> Option<&'static str> {
    Some(match tag {
        "AlgebraicRule" => "algebraic rule",
        "FastReaction" | "MultipleFastReactions" => "fast reaction",
        "CSymbolDelay" | "DelayInTrigger" | "DelayInEventAssignment" => "delay function",
        "CSymbolRateOf" => "rateOf function",
        t if t.starts_with("comp:") => "package comp",
        t if t.starts_with("fbc:") => "package fbc",
        _ => return None,
    })
}

/// What copyloop made of one file.
#[derive(Clone, Debug)]
pub enum Outcome {
    /// Compiled to a network.
    Imported,
    /// Read and valid, but the network cannot hold it yet.
    NotYet(String),
    /// Refused: a construct copyloop does not support.
    Refused(Construct, String),
    /// Any other error.
    Error(String),
}

impl Outcome {
    pub fn label(&self) -> &'static str {
        match self {
            Outcome::Imported => "imported",
            Outcome::NotYet(_) => "read, not mapped yet",
            Outcome::Refused(..) => "refused",
            Outcome::Error(_) => "error",
        }
    }
}

fn first(errs: &[SbmlError]) -> Outcome {
    if let Some(e) = errs
        .iter()
        .find(|e| matches!(*e.kind, ErrorKind::Unsupported { .. }))
    {
        if let ErrorKind::Unsupported { construct } = &*e.kind {
            return Outcome::Refused(construct.clone(), e.to_string());
        }
    }
    let e = &errs[0];
    match &*e.kind {
        ErrorKind::NotYet { .. } => Outcome::NotYet(e.to_string()),
        _ => Outcome::Error(format!("line {}: {e}", e.loc.line)),
    }
}

/// Imports one file as far as it goes.
pub fn outcome(path: &Path) -> Outcome {
    let bytes = std::fs::read(path).expect("case file");
    let imported = match sbml::import(&bytes) {
        Ok(i) => i,
        Err(errs) => return first(&errs),
    };
    let text = String::from_utf8_lossy(&bytes);
    let file = path.display().to_string();
    match sbml::map::ast(&file, &text, &imported.document) {
        Err(e) => first(&[e]),
        Ok(_) => match sbml::load_source(&file, &bytes, &Overrides::default()) {
            Ok(_) => Outcome::Imported,
            Err(copyloop::Error::Input(d))
                if d.iter()
                    .all(|d| d.message.starts_with("not supported yet: ")) =>
            {
                Outcome::NotYet(d[0].message.clone())
            }
            Err(e) => Outcome::Error(e.to_string()),
        },
    }
}
