//! Parameter sweeps: many points of one network, resumable, shardable onto a cluster.
//!
//! ```text
//! --vary specs ─▶ spec::Vary ─▶ design::Design (grid | Latin hypercube, point seeds)
//!                                   │
//!                 Job (network text + design + shard)
//!                                   │
//!                                   ▼
//!    session::Session (opens or resumes the file; the points left; stop; how the run ended)
//!                                   │
//!            task::Task ──────▶ run::run ─▶ store::Store (JSON lines) ─▶ shard::merge
//! ```
//!
//! A point is compiled from the file with its values ([`crate::network::Overrides`]) and handed
//! to a [`Task`], which returns the JSON document its command prints. Point i's seed comes from
//! (seed, i) alone ([`point_seed`]), so a point's line is the same whether the sweep ran on one
//! machine or as N shards, with any number of threads, in one go or resumed.

pub mod design;
pub mod response;
pub mod run;
pub mod session;
pub mod shard;
pub mod spec;
pub mod store;
pub mod task;

pub use design::{point_seed, Design, DesignKind};
pub use response::{response, Axis, Response};
pub use run::{run, FailedPoint, Fault, Outcome, RunOptions};
pub use session::{Ending, Interrupt, Session};
pub use shard::{merge, Merged, Shard};
pub use spec::Vary;
pub use store::{scan, Header, Store};
pub use task::{default_metric, FnTask, Point, Task};

use crate::error::{Error, Result};
use crate::network::parser::{self, Ast, Item};
use crate::network::{compile, Network};

/// A sweep ready to run: the network file, its design and the share of it this run does.
#[derive(Debug)]
pub struct Job {
    pub file: String,
    pub source: Vec<u8>,
    pub ast: std::sync::Arc<Ast>,
    pub design: Design,
    pub shard: Option<Shard>,
}

impl Job {
    /// Reads the network file and builds the design from the `--vary` specs.
    pub fn load(
        file: &str,
        specs: &[String],
        kind: DesignKind,
        points: Option<u64>,
        seed: u64,
        shard: Option<Shard>,
    ) -> Result<Job> {
        let source = std::fs::read(file).map_err(|e| Error::io(file, e))?;
        Job::from_source(file, source, specs, kind, points, seed, shard)
    }

    /// As [`Job::load`], with the file's bytes given.
    pub fn from_source(
        file: &str,
        source: Vec<u8>,
        specs: &[String],
        kind: DesignKind,
        points: Option<u64>,
        seed: u64,
        shard: Option<Shard>,
    ) -> Result<Job> {
        let ast = if crate::sbml::is_sbml_path(file) {
            crate::sbml::syntax_tree(file, &source)?
        } else {
            parser::parse(file, &source).map_err(Error::Input)?
        };
        let vary = specs
            .iter()
            .map(|s| Vary::parse(s, &ast))
            .collect::<Result<Vec<_>>>()?;
        let design = match kind {
            DesignKind::Grid => {
                if points.is_some() {
                    return Err(Error::usage(
                        "--points sets the size of a Latin hypercube; add --design lhs, or \
                         leave --points out of a grid",
                    ));
                }
                Design::grid(vary, seed)?
            }
            DesignKind::Lhs => Design::lhs(vary, points, seed)?,
        };
        Ok(Job {
            file: file.to_string(),
            source,
            ast: std::sync::Arc::new(ast),
            design,
            shard,
        })
    }

    /// Compiles the networks that test every value the design uses (see
    /// [`Design::probes`]) and returns point 0's network. An error names the `--vary` that
    /// caused it.
    pub fn check(&self) -> Result<Network> {
        for (words, o) in self.design.probes() {
            if let Err(diags) = compile(&self.ast, &o) {
                return Err(Error::usage(format!(
                    "the network does not compile at the sweep point {words}:\n{}",
                    Error::Input(diags)
                )));
            }
        }
        self.network(0)
    }

    /// Point `i`'s network.
    pub fn network(&self, i: u64) -> Result<Network> {
        compile(&self.ast, &self.design.overrides(i)).map_err(Error::Input)
    }

    /// The points this run is responsible for (its shard, or all), in order.
    pub fn members(&self) -> impl Iterator<Item = u64> + '_ {
        (0..self.design.total()).filter(|&i| self.shard.is_none_or(|s| s.contains(i)))
    }

    /// The sweep file header for running `task`.
    pub fn header(&self, task: &dyn Task) -> Header {
        let mut h = Header::new(
            &self.file,
            &self.source,
            &self.design,
            task.name(),
            task.options(),
            self.shard,
        );
        let free = self.ast.items.iter().find_map(|item| match item {
            Item::Species {
                name,
                clamped: false,
                ..
            } => Some(name.text.as_str()),
            _ => None,
        });
        h.default_metric = free.and_then(|n| task::species_metric(task.name(), n));
        h
    }
}
