//! Running the points of a sweep in parallel.
//!
//! `threads` workers (fewer when fewer points are left) take points in order from a shared
//! counter. Each point gets a thread budget for its own parallel work (replicates):
//! budget = max(1, ⌊T / min(T, U)⌋) with T the sweep's threads and U the points not yet finished
//! when it starts. The points running at any moment were all unfinished when each of them
//! started, so their budgets add up to at most T: the cores are never oversubscribed, and the
//! last points of a sweep get the cores the finished ones gave back.
//!
//! A stop request (Ctrl-C) lets the running points finish and write their lines, and starts no
//! new one.

use super::design::Design;
use super::store::{point_line, Store};
use super::task::{Point, Task};
use crate::error::{Error, Result};
use crate::network::compile;
use crate::network::parser::Ast;
use std::sync::atomic::{AtomicBool, AtomicU64, AtomicUsize, Ordering};
use std::sync::Mutex;

/// How to run.
pub struct RunOptions<'a> {
    /// Threads in all (≥ 1).
    pub threads: usize,
    /// Set to stop after the points in flight.
    pub stop: &'a AtomicBool,
    /// Called after each point is written, with the number written so far by this run.
    pub progress: &'a (dyn Fn(u64) + Sync),
}

/// What a run did.
#[derive(Debug, Default)]
pub struct Outcome {
    /// Points written by this run (failed ones included).
    pub written: u64,
    /// Points whose task failed, in point order.
    pub failed: Vec<FailedPoint>,
    /// Whether a stop request ended the run before every point was done.
    pub stopped: bool,
}

/// Runs `task` at each point of `todo` (point numbers of `design`), appending each point's line
/// to `store` as soon as it finishes.
pub fn run(
    ast: &std::sync::Arc<Ast>,
    design: &Design,
    task: &dyn Task,
    todo: &[u64],
    store: &Store,
    opts: &RunOptions,
) -> Result<Outcome> {
    let threads = opts.threads.max(1);
    let workers = threads.min(todo.len()).max(1);
    let pool = rayon::ThreadPoolBuilder::new()
        .num_threads(workers)
        .thread_name(|i| format!("sweep-{i}"))
        .build()
        .map_err(|e| Error::Internal(format!("cannot start the sweep's threads: {e}")))?;
    let next = AtomicUsize::new(0);
    let finished = AtomicU64::new(0);
    let failed = Mutex::new(Vec::new());
    let io_error: Mutex<Option<Error>> = Mutex::new(None);
    let abort = AtomicBool::new(false);
    pool.scope(|s| {
        for _ in 0..workers {
            s.spawn(|_| loop {
                if opts.stop.load(Ordering::SeqCst) || abort.load(Ordering::SeqCst) {
                    return;
                }
                let k = next.fetch_add(1, Ordering::SeqCst);
                let Some(&i) = todo.get(k) else { return };
                let unfinished = todo.len() - finished.load(Ordering::SeqCst) as usize;
                let budget = (threads / threads.min(unfinished).max(1)).max(1);
                let outcome = run_point(ast, design, task, i, budget);
                let line = point_line(design, i, outcome.as_ref().map_err(|e| e.0.as_str()));
                if let Err(e) = store.append(&line) {
                    io_error.lock().unwrap().get_or_insert(e);
                    abort.store(true, Ordering::SeqCst);
                    return;
                }
                if let Err((message, fault)) = outcome {
                    failed.lock().unwrap().push(FailedPoint {
                        point: i,
                        message,
                        fault,
                    });
                }
                let n = finished.fetch_add(1, Ordering::SeqCst) + 1;
                (opts.progress)(n);
            });
        }
    });
    if let Some(e) = io_error.into_inner().unwrap() {
        return Err(e);
    }
    let written = finished.load(Ordering::SeqCst);
    let mut failed = failed.into_inner().unwrap();
    failed.sort_by_key(|f: &FailedPoint| f.point);
    Ok(Outcome {
        written,
        failed,
        stopped: written < todo.len() as u64,
    })
}

/// A point whose task failed.
#[derive(Clone, Debug, PartialEq, Eq)]
pub struct FailedPoint {
    /// The point's number in the design.
    pub point: u64,
    /// The error's text, without the leading `error: `.
    pub message: String,
    /// Whose fault it is.
    pub fault: Fault,
}

/// Whose fault a failed point is: the point's model or values (exit status 2), or copyloop's
/// own (an internal error or a panic, exit status 1).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Fault {
    Input,
    Internal,
}

/// Why `run_point` failed, before the point's number is attached.
type Failure = (String, Fault);

/// Compiles point `i` and runs the task there. A panic inside the task is caught and reported
/// as that point's failure, so one bad point does not end a night's sweep.
fn run_point(
    ast: &std::sync::Arc<Ast>,
    design: &Design,
    task: &dyn Task,
    i: u64,
    threads: usize,
) -> std::result::Result<serde_json::Value, Failure> {
    let overrides = design.overrides(i);
    let net = compile(ast, &overrides).map_err(|d| (message(&Error::Input(d)), Fault::Input))?;
    let point = Point {
        index: i,
        seed: design.seed_of(i),
        threads,
        net: &net,
        overrides: &overrides,
        ast,
    };
    match std::panic::catch_unwind(std::panic::AssertUnwindSafe(|| task.run(&point))) {
        Ok(Ok(v)) => Ok(v),
        Ok(Err(e)) => {
            let fault = if e.exit_code() == 1 {
                Fault::Internal
            } else {
                Fault::Input
            };
            Err((message(&e), fault))
        }
        Err(payload) => {
            let what = payload
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| payload.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "a panic".into());
            Err((format!("internal error: {what}"), Fault::Internal))
        }
    }
}

/// An error's text without the leading `error: `.
fn message(e: &Error) -> String {
    let s = e.to_string();
    s.strip_prefix("error: ").map(str::to_string).unwrap_or(s)
}
