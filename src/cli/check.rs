//! `copyloop check FILE`: compile and show the network.

use crate::error::Result;
use crate::network::{load, Overrides};
use crate::report;
use clap::Args;

#[derive(Debug, Args)]
pub struct CheckArgs {
    /// Network file (.crn)
    pub file: String,
    /// Print one JSON document instead of the table
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &CheckArgs) -> Result<()> {
    let net = load(&a.file, &Overrides::default())?;
    super::print_warnings(&net);
    if a.json {
        super::print_json(&report::check::json(&net))
    } else {
        super::print_stdout(&report::check::table(&net))
    }
}
