//! `copyloop merge F1.jsonl F2.jsonl … --out F.jsonl`: sweep shards back into one sweep file.

use crate::error::{Error, Result};
use crate::report;
use crate::sweep;
use clap::Args;

#[derive(Debug, Args)]
pub struct MergeArgs {
    /// Sweep files (shards) of one sweep
    #[arg(required = true, value_name = "F.jsonl")]
    pub files: Vec<String>,
    /// The merged sweep file, ordered by point
    #[arg(long, value_name = "F.jsonl")]
    pub out: String,
    /// Draw the swept response of the merged file: a line for one varied value, a heat map for
    /// two
    #[arg(long, value_name = "F.svg")]
    pub svg: Option<String>,
    /// The result key drawn by --svg, as a JSON pointer into `result`
    #[arg(long, value_name = "PATH")]
    pub metric: Option<String>,
    /// Print the summary as one JSON document
    #[arg(long)]
    pub json: bool,
}

pub fn run(a: &MergeArgs) -> Result<()> {
    let merged = sweep::merge(&a.files, &a.out)?;
    if let Some(svg) = &a.svg {
        let r = sweep::response(&a.out, a.metric.as_deref())?;
        std::fs::write(svg, report::sweep::response::svg(&r)).map_err(|e| Error::io(svg, e))?;
    }
    let summary = report::sweep::MergeSummary {
        out: &a.out,
        fingerprint: &merged.header.fingerprint,
        files: a.files.len(),
        points: merged.points,
        points_total: merged.header.points,
        torn: &merged.torn,
        svg: a.svg.as_deref(),
    };
    if a.json {
        super::print_json(&report::sweep::merge_json(&summary))
    } else {
        super::print_stdout(&report::sweep::merge_text(&summary))
    }
}
