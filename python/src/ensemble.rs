//! Runs an ensemble block by block so that Python keeps control between blocks: the GIL is
//! released while blocks run, Ctrl-C is seen between waves of blocks, and a progress bar is
//! drawn only when asked.
//!
//! The library runs replicates in blocks of `BLOCK`, each seeded by (seed, replicate index),
//! and merges the blocks in block order into an empty accumulator. Running each block as its
//! own ensemble (`first_replicate` = block start) and merging the results in the same order
//! performs the same floating-point operations, so the numbers equal the command line's for
//! the same seed, whatever the thread count.

use copyloop::ensemble::{self, EnsembleResult, EnsembleSpec, BLOCK};
use copyloop::Network;
use pyo3::prelude::*;
use std::sync::atomic::{AtomicUsize, Ordering};
use std::sync::Mutex;

/// Blocks in flight per worker thread between two looks at Python's signals.
const BLOCKS_PER_THREAD: usize = 4;

/// The ensemble `spec` asks for, equal to `copyloop::ensemble::run(net, spec)`.
pub fn run(
    py: Python<'_>,
    net: &Network,
    spec: &EnsembleSpec,
    progress: bool,
) -> PyResult<EnsembleResult> {
    spec.validate().map_err(crate::errors::to_py)?;
    let threads = spec
        .threads
        .unwrap_or_else(|| std::thread::available_parallelism().map_or(1, |n| n.get()))
        .max(1);
    let blocks = spec.replicates.div_ceil(BLOCK) as usize;
    let wave = threads * BLOCKS_PER_THREAD;
    let bar = progress.then(|| {
        let b = indicatif::ProgressBar::new(spec.replicates);
        b.set_style(
            indicatif::ProgressStyle::with_template(
                "{bar:40} {pos}/{len} replicates, {elapsed} elapsed, {eta} left",
            )
            .unwrap_or_else(|_| indicatif::ProgressStyle::default_bar()),
        );
        b
    });
    let started = std::time::Instant::now();
    let mut total: Option<EnsembleResult> = None;
    let mut start = 0;
    while start < blocks {
        let end = (start + wave).min(blocks);
        let parts = py.detach(|| run_wave(net, spec, start..end, threads, bar.as_ref()));
        for part in parts {
            let part = part.map_err(crate::errors::to_py)?;
            match &mut total {
                None => total = Some(part),
                Some(t) => t.merge(&part),
            }
        }
        start = end;
        if let Err(e) = py.check_signals() {
            if let Some(b) = &bar {
                b.abandon();
            }
            return Err(e);
        }
    }
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    let mut total = total
        .ok_or_else(|| pyo3::exceptions::PyValueError::new_err("replicates: must be at least 1"))?;
    total.spec = spec.clone();
    total.wall_seconds = started.elapsed().as_secs_f64();
    Ok(total)
}

/// Blocks `range` on `threads` scoped threads, returned in block order.
fn run_wave(
    net: &Network,
    spec: &EnsembleSpec,
    range: std::ops::Range<usize>,
    threads: usize,
    bar: Option<&indicatif::ProgressBar>,
) -> Vec<copyloop::Result<EnsembleResult>> {
    let slots: Vec<Mutex<Option<copyloop::Result<EnsembleResult>>>> =
        range.clone().map(|_| Mutex::new(None)).collect();
    let next = AtomicUsize::new(0);
    std::thread::scope(|s| {
        for _ in 0..threads.min(range.len()) {
            s.spawn(|| loop {
                let k = next.fetch_add(1, Ordering::Relaxed);
                if k >= slots.len() {
                    break;
                }
                let first = (range.start + k) as u64 * BLOCK;
                let count = BLOCK.min(spec.replicates - first);
                let block = EnsembleSpec {
                    replicates: count,
                    first_replicate: spec.first_replicate + first,
                    threads: Some(1),
                    progress: false,
                    ..spec.clone()
                };
                let r = ensemble::run(net, &block);
                if let Some(b) = bar {
                    b.inc(count);
                }
                *slots[k].lock().unwrap_or_else(|e| e.into_inner()) = Some(r);
            });
        }
    });
    slots
        .into_iter()
        .map(|m| {
            m.into_inner()
                .unwrap_or_else(|e| e.into_inner())
                .unwrap_or_else(|| Err(copyloop::Error::Internal("a block did not run".into())))
        })
        .collect()
}
