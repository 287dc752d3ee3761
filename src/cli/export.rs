//! `copyloop export FILE --sbml OUT.xml`: write the network as SBML Level 3 Version 2.

use crate::error::{Error, Result};
use crate::network::{load, Overrides};
use crate::sbml::export;
use clap::Args;

#[derive(Debug, Args)]
pub struct ExportArgs {
    /// Network file (.crn, or SBML)
    pub file: String,
    /// Write SBML Level 3 Version 2 to this file
    #[arg(long, value_name = "OUT.xml")]
    pub sbml: String,
    /// Print one JSON document instead of the summary
    #[arg(long)]
    pub json: bool,
}

/// Whether two paths name the same existing file.
fn same_file(a: &str, b: &str) -> bool {
    match (std::fs::canonicalize(a), std::fs::canonicalize(b)) {
        (Ok(x), Ok(y)) => x == y,
        _ => false,
    }
}

pub fn run(a: &ExportArgs) -> Result<()> {
    if same_file(&a.file, &a.sbml) {
        return Err(Error::usage(format!(
            "--sbml {} is the network file itself; choose another output file",
            a.sbml
        )));
    }
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    let (text, summary) = export::sbml(&net)?;
    std::fs::write(&a.sbml, text).map_err(|e| Error::io(&a.sbml, e))?;
    if a.json {
        let mut v = serde_json::to_value(&summary)
            .map_err(|e| Error::Internal(format!("JSON encoding failed: {e}")))?;
        v["out"] = serde_json::Value::String(a.sbml.clone());
        return super::print_json(&v);
    }
    let mut s = format!(
        "wrote {} (SBML Level 3 Version 2): {} species, {} parameters, {} reactions, amounts in {}\n",
        a.sbml,
        summary.species,
        summary.parameters,
        summary.reactions,
        if summary.scale == "volume" { "mole" } else { "molecules" }
    );
    for p in &summary.plain_constants {
        s.push_str(&format!(
            "  {}: plain constant ({})\n",
            p.reaction, p.origin
        ));
    }
    for r in &summary.self_reactions {
        s.push_str(&format!(
            "  {r}: deterministic law as SBML defines it; copyloop's stochastic reading in the annotation\n"
        ));
    }
    for r in &summary.rounded {
        s.push_str(&format!(
            "  {r}: a law in molecules per time, written divided by N_A; it reads back equal to rounding\n"
        ));
    }
    super::print_stdout(&s)
}
