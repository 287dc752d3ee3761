//! A sweep session: one run of a [`Job`] into its sweep file, from opening (or resuming) the
//! file to how the run ended.
//!
//! The session decides which points are left, stops after the points in flight when asked to,
//! and says how the run ended as an [`Ending`]; the caller words it and picks the exit status.
//! A second interrupt abandons the points in flight: [`Session::interrupt`] then hands back the
//! file's lock, so the caller can exit without leaving a line half written.

use super::{run, Job, Outcome, RunOptions, Store, Task};
use crate::error::Result;
use std::collections::HashSet;
use std::fs::File;
use std::sync::atomic::{AtomicBool, AtomicUsize, Ordering};
use std::sync::MutexGuard;

/// One run of a sweep into its file.
#[derive(Debug)]
pub struct Session {
    store: Store,
    fingerprint: String,
    members: Vec<u64>,
    already_done: u64,
    todo: Vec<u64>,
    stop: AtomicBool,
    interrupts: AtomicUsize,
}

/// What an interrupt did.
#[derive(Debug)]
pub enum Interrupt<'a> {
    /// The first: the run stops once the points in flight are written.
    Stopping,
    /// A later one: the points in flight are abandoned. Holding the guard keeps every other
    /// writer off the file until the process exits.
    Abandon(MutexGuard<'a, File>),
}

/// How a session's run ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Ending {
    /// Every point of this run is in the file, none failed.
    Complete,
    /// An interrupt stopped the run; `in_file` of the run's `members` points are in the file,
    /// and resuming finishes the rest.
    Stopped { in_file: u64, members: u64 },
    /// Every point was run, and `failed` of the `members` points carry an error in the file;
    /// `internal` when one of them is a fault of copyloop rather than of the input.
    Failed {
        failed: u64,
        members: u64,
        internal: bool,
    },
}

impl Session {
    /// Creates `out` for running `task` over `job`, or with `resume` continues it: its
    /// finished points are kept and not run again (a file of another sweep is refused, a
    /// missing one starts afresh).
    pub fn open(job: &Job, task: &dyn Task, out: &str, resume: bool) -> Result<Session> {
        let header = job.header(task);
        let (store, done) = if resume {
            Store::resume(out, &header)?
        } else {
            (Store::create(out, &header)?, Vec::new())
        };
        let done: HashSet<u64> = done.into_iter().collect();
        let members: Vec<u64> = job.members().collect();
        let todo = members
            .iter()
            .copied()
            .filter(|i| !done.contains(i))
            .collect();
        Ok(Session {
            store,
            fingerprint: header.fingerprint,
            already_done: done.len() as u64,
            members,
            todo,
            stop: AtomicBool::new(false),
            interrupts: AtomicUsize::new(0),
        })
    }

    /// The fingerprint of the sweep in the file.
    pub fn fingerprint(&self) -> &str {
        &self.fingerprint
    }

    /// The path of the sweep file.
    pub fn path(&self) -> &str {
        self.store.path()
    }

    /// The points this run is responsible for (its shard, or all).
    pub fn members(&self) -> u64 {
        self.members.len() as u64
    }

    /// Points of this run already in the file when it was opened.
    pub fn already_done(&self) -> u64 {
        self.already_done
    }

    /// Points this run still has to do.
    pub fn todo(&self) -> u64 {
        self.todo.len() as u64
    }

    /// Asks the run to stop; safe to call from a signal handler's thread.
    pub fn interrupt(&self) -> Interrupt<'_> {
        if self.interrupts.fetch_add(1, Ordering::SeqCst) == 0 {
            self.stop.store(true, Ordering::SeqCst);
            Interrupt::Stopping
        } else {
            Interrupt::Abandon(self.store.lock())
        }
    }

    /// Runs the points left on `threads` threads, calling `progress` with the number written
    /// so far after each one.
    pub fn run(
        &self,
        job: &Job,
        task: &dyn Task,
        threads: usize,
        progress: &(dyn Fn(u64) + Sync),
    ) -> Result<Outcome> {
        run(
            &job.ast,
            &job.design,
            task,
            &self.todo,
            &self.store,
            &RunOptions {
                threads,
                stop: &self.stop,
                progress,
            },
        )
    }

    /// How the run that gave `outcome` ended.
    pub fn ending(&self, outcome: &Outcome) -> Ending {
        if outcome.stopped {
            Ending::Stopped {
                in_file: self.already_done + outcome.written,
                members: self.members(),
            }
        } else if outcome.failed.is_empty() {
            Ending::Complete
        } else {
            Ending::Failed {
                failed: outcome.failed.len() as u64,
                members: self.members(),
                internal: outcome
                    .failed
                    .iter()
                    .any(|f| f.fault == super::Fault::Internal),
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::sweep::{DesignKind, FnTask};
    use serde_json::json;

    fn job() -> Job {
        let text = "species X = 0 molecules\nparam k = 1 /s\nstep make 0 -> X @ k\n";
        Job::from_source(
            "t.crn",
            text.as_bytes().to_vec(),
            &["k=list:1,2,3,4".to_string()],
            DesignKind::Grid,
            None,
            0,
            None,
        )
        .unwrap()
    }

    #[test]
    fn a_stopped_session_resumes_with_the_points_left() {
        let job = job();
        let task = FnTask::new("k", json!({}), |p| Ok(json!({"seed": p.seed})));
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("s.jsonl");
        let out = out.to_str().unwrap();

        let first = Session::open(&job, &task, out, false).unwrap();
        assert_eq!(
            (first.members(), first.todo(), first.already_done()),
            (4, 4, 0)
        );
        assert!(matches!(first.interrupt(), Interrupt::Stopping));
        let outcome = first.run(&job, &task, 1, &|_| {}).unwrap();
        let Ending::Stopped { in_file, members } = first.ending(&outcome) else {
            panic!("an interrupted run must end stopped: {outcome:?}");
        };
        assert_eq!(members, 4);
        assert!(in_file < 4, "{in_file} points written after the stop");
        drop(first);

        let again = Session::open(&job, &task, out, true).unwrap();
        assert_eq!(again.already_done(), in_file);
        assert_eq!(again.todo(), 4 - in_file);
        let outcome = again.run(&job, &task, 2, &|_| {}).unwrap();
        assert_eq!(outcome.written, 4 - in_file);
        assert_eq!(again.ending(&outcome), Ending::Complete);
        assert!(matches!(again.interrupt(), Interrupt::Stopping));
        assert!(matches!(again.interrupt(), Interrupt::Abandon(_)));
    }

    #[test]
    fn failed_points_end_the_run_as_failed() {
        let job = job();
        let task = FnTask::new("k", json!({}), |p| {
            if p.index % 2 == 0 {
                Err(crate::error::Error::usage("no"))
            } else {
                Ok(json!({}))
            }
        });
        let dir = tempfile::tempdir().unwrap();
        let out = dir.path().join("f.jsonl");
        let s = Session::open(&job, &task, out.to_str().unwrap(), false).unwrap();
        let outcome = s.run(&job, &task, 1, &|_| {}).unwrap();
        assert_eq!(
            s.ending(&outcome),
            Ending::Failed {
                failed: 2,
                members: 4,
                internal: false
            }
        );
    }
}
