//! `copyloop sweep FILE --vary NAME=SPEC … --task TASK [task options] --out F.jsonl`
//!
//! The task's options are its own command's flags, written anywhere after `--task TASK`; the
//! sweep's own flags (`--out`, `--seed`, `--threads`, `--resume`, `--shard`, `--svg`, …) may
//! stand among them and always belong to the sweep.

use crate::error::{Error, Result};
use crate::report;
use crate::sweep::{self, DesignKind, Ending, Interrupt, Job, Point, Session, Shard, Task};
use clap::{Args, Command, FromArgMatches, ValueEnum};
use serde_json::{Map, Value};
use std::io::IsTerminal;
use std::sync::Arc;

#[derive(Debug, Args)]
pub struct SweepArgs {
    /// Network file (.crn)
    pub file: String,
    /// A swept value: NAME=lin:A..B:N, NAME=log:A..B:N or NAME=list:A,B,… ; values may carry
    /// units (a bare value is in the unit the file wrote); NAME is a param, a species (initial
    /// amount) or `volume`. Repeat for more dimensions
    #[arg(long, value_name = "NAME=SPEC")]
    pub vary: Vec<String>,
    /// grid: every combination of the values; lhs: a Latin hypercube of --points points
    #[arg(long, value_enum)]
    pub design: Option<DesignArg>,
    /// Points of a Latin hypercube (default: the common N of the specs)
    #[arg(long, value_name = "N")]
    pub points: Option<u64>,
    /// The task run at every point: simulate, steady, reconcile or noise, followed by that
    /// command's options; also check (the check document) and initial (what the point compiles
    /// to)
    #[arg(long, value_name = "TASK")]
    pub task: Option<String>,
    /// The sweep file (JSON lines): a header line, then one line per finished point
    #[arg(long, value_name = "F.jsonl")]
    pub out: Option<String>,
    /// Continue the --out file: skip its finished points, drop a torn last line (a missing
    /// file starts afresh)
    #[arg(long)]
    pub resume: bool,
    /// Run the I-th of N disjoint shares of the points (1-based), e.g. 3/8
    #[arg(long, value_name = "I/N")]
    pub shard: Option<String>,
    /// Master seed; point i is seeded from (seed, i) alone [default: 0]
    #[arg(long)]
    pub seed: Option<u64>,
    /// Threads in all, shared between points and the replicates inside them [default: all
    /// cores]
    #[arg(long)]
    pub threads: Option<usize>,
    /// Draw the swept response: a line for one varied value, a heat map for two
    #[arg(long, value_name = "F.svg")]
    pub svg: Option<String>,
    /// The result key drawn by --svg, as a JSON pointer into `result` (default per task, e.g.
    /// /final/<species>/mean for simulate)
    #[arg(long, value_name = "PATH")]
    pub metric: Option<String>,
    /// Print the summary as one JSON document
    #[arg(long)]
    pub json: bool,
    /// The task's options (its command's flags)
    #[arg(
        trailing_var_arg = true,
        allow_hyphen_values = true,
        hide = true,
        value_name = "TASK OPTIONS"
    )]
    pub task_options: Vec<String>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, ValueEnum)]
pub enum DesignArg {
    Grid,
    Lhs,
}

/// Options of the `initial` task (none besides the file).
#[derive(Debug, Args)]
struct InitialArgs {
    file: String,
}

/// The identity of a task without options of its own.
fn no_options<A>(_: &A) -> Result<Value> {
    Ok(Value::Object(Map::new()))
}

/// Builds the task a sweep runs from its name and its command's options (`file` stands in
/// for the command's FILE).
///
/// Wiring a command in is one arm here: `args_task::<XArgs>("x", file, options, identity,
/// document)`, where `document(&XArgs, &Point) -> Result<Value>` is the function the command
/// itself uses to build its `--json` document from a compiled network, a seed and a thread
/// count, and `identity(&XArgs) -> Result<Value>` gives the options' meaning for the
/// fingerprint.
fn task(name: &str, file: &str, options: &[String]) -> Result<Box<dyn Task>> {
    use super::{check, noise, reconcile, simulate, steady};
    match name {
        "check" => args_task::<check::CheckArgs>("check", file, options, no_options, |_, p| {
            Ok(report::check::json(p.net))
        }),
        "initial" => args_task::<InitialArgs>("initial", file, options, no_options, |_, p| {
            Ok(report::sweep::initial(p.net))
        }),
        "simulate" => args_task::<simulate::SimulateArgs>(
            "simulate",
            file,
            options,
            simulate::identity,
            simulate::document,
        ),
        "steady" => {
            args_task::<steady::SteadyArgs>("steady", file, options, no_options, steady::document)
        }
        "reconcile" => args_task::<reconcile::ReconcileArgs>(
            "reconcile",
            file,
            options,
            reconcile::identity,
            reconcile::document,
        ),
        "noise" => {
            args_task::<noise::NoiseArgs>("noise", file, options, noise::identity, noise::document)
        }
        _ => Err(Error::usage(format!(
            "--task {name}: unknown task; tasks are simulate, steady, reconcile, noise, check \
             and initial"
        ))),
    }
}

/// A task from a command's clap options: parses `options` as that command's flags and runs
/// `document` at each point.
///
/// The fingerprint holds `identity(&args)`: the parsed options as typed values under names of
/// their own (the library's field names), leaving out the flags the sweep owns. It never holds
/// a flag's spelling or the text a value was written in, so renaming a flag, or writing 0.05
/// as 5e-2, leaves old sweep files resumable.
fn args_task<A>(
    name: &'static str,
    file: &str,
    options: &[String],
    identity: fn(&A) -> Result<Value>,
    document: fn(&A, &Point) -> Result<Value>,
) -> Result<Box<dyn Task>>
where
    A: Args + FromArgMatches + Send + Sync + 'static,
{
    let cmd = A::augment_args(Command::new("copyloop-sweep-task")).no_binary_name(true);
    let argv = std::iter::once(file.to_string()).chain(options.iter().cloned());
    let m = match cmd.try_get_matches_from(argv) {
        Ok(m) => m,
        Err(e) if e.kind() == clap::error::ErrorKind::DisplayHelp => e.exit(),
        Err(e) => return Err(clap_usage(&format!("--task {name}"), e)),
    };
    let args = A::from_arg_matches(&m).map_err(|e| clap_usage(&format!("--task {name}"), e))?;
    let identity = identity(&args)?;
    Ok(Box::new(sweep::FnTask::new(name, identity, move |p| {
        document(&args, p)
    })))
}

fn clap_usage(context: &str, e: clap::Error) -> Error {
    let text = e.to_string();
    let text = text.trim();
    let first = text
        .strip_prefix("error: ")
        .unwrap_or(text)
        .split("\n\n")
        .next()
        .unwrap_or("")
        .to_string();
    Error::usage(format!("{context}: {first}"))
}

/// The sweep's own flags among the task options move back to the sweep: returns (sweep
/// tokens, task tokens).
fn split_options(tokens: &[String]) -> (Vec<String>, Vec<String>) {
    let cmd = SweepArgs::augment_args(Command::new("sweep"));
    let mut sweep = Vec::new();
    let mut task = Vec::new();
    let mut it = tokens.iter();
    while let Some(t) = it.next() {
        let flag = t
            .strip_prefix("--")
            .map(|f| f.split_once('=').map_or((f, false), |(n, _)| (n, true)));
        let owned = flag.and_then(|(name, inline)| {
            cmd.get_arguments()
                .find(|a| a.get_long() == Some(name))
                .map(|a| a.get_action().takes_values() && !inline)
        });
        match owned {
            Some(takes_value) => {
                sweep.push(t.clone());
                if takes_value {
                    if let Some(v) = it.next() {
                        sweep.push(v.clone());
                    }
                }
            }
            None => task.push(t.clone()),
        }
    }
    (sweep, task)
}

impl SweepArgs {
    /// Takes in the sweep flags found among the task options.
    fn absorb(&mut self, o: SweepArgs) -> Result<()> {
        fn one<T>(mine: &mut Option<T>, theirs: Option<T>, flag: &str) -> Result<()> {
            if theirs.is_some() {
                if mine.is_some() {
                    return Err(Error::usage(format!("--{flag} is given twice")));
                }
                *mine = theirs;
            }
            Ok(())
        }
        self.vary.extend(o.vary);
        one(&mut self.design, o.design, "design")?;
        one(&mut self.points, o.points, "points")?;
        one(&mut self.task, o.task, "task")?;
        one(&mut self.out, o.out, "out")?;
        one(&mut self.shard, o.shard, "shard")?;
        one(&mut self.seed, o.seed, "seed")?;
        one(&mut self.threads, o.threads, "threads")?;
        one(&mut self.svg, o.svg, "svg")?;
        one(&mut self.metric, o.metric, "metric")?;
        self.resume |= o.resume;
        self.json |= o.json;
        Ok(())
    }

    /// The full sweep flags and the task's own, however they were interleaved.
    fn settle(mut self) -> Result<(SweepArgs, Vec<String>)> {
        let (mine, task_tokens) = split_options(&std::mem::take(&mut self.task_options));
        if !mine.is_empty() {
            let cmd = SweepArgs::augment_args(Command::new("copyloop sweep")).no_binary_name(true);
            let argv = std::iter::once(self.file.clone()).chain(mine);
            let m = cmd
                .try_get_matches_from(argv)
                .map_err(|e| clap_usage("sweep", e))?;
            let more = SweepArgs::from_arg_matches(&m).map_err(|e| clap_usage("sweep", e))?;
            self.absorb(more)?;
        }
        Ok((self, task_tokens))
    }
}

/// Prints the warnings the sweep's probe points (every listed value, the ends of each range)
/// get and point 0 does not, such as an amount rounded to whole molecules at a small volume.
fn probe_warnings(job: &Job, first: &crate::Network) {
    for (words, o) in job.design.probes() {
        let Ok(net) = crate::network::compile::compile(&job.ast, &o) else {
            continue;
        };
        for w in net.warnings.iter().filter(|w| !first.warnings.contains(w)) {
            let text = w.to_string();
            eprintln!("at the sweep point {words}: {text}\n");
        }
    }
}

pub fn run(a: SweepArgs) -> Result<()> {
    let (a, task_tokens) = a.settle()?;
    let task_name = a.task.as_deref().ok_or_else(|| {
        Error::usage("sweep needs --task TASK (simulate, steady, reconcile, noise, check, initial)")
    })?;
    let out = a
        .out
        .as_deref()
        .ok_or_else(|| Error::usage("sweep needs --out F.jsonl, the file the points go to"))?;
    let threads = match a.threads {
        Some(0) => return Err(Error::usage("--threads must be at least 1")),
        Some(n) => n,
        None => std::thread::available_parallelism().map_or(1, |n| n.get()),
    };
    let shard = a.shard.as_deref().map(Shard::parse).transpose()?;
    let kind = match a.design.unwrap_or(DesignArg::Grid) {
        DesignArg::Grid => DesignKind::Grid,
        DesignArg::Lhs => DesignKind::Lhs,
    };
    let plan = Job::load(&a.file, &a.vary, kind, a.points, a.seed.unwrap_or(0), shard)?;
    if a.svg.is_some() {
        sweep::response::check_drawable(plan.design.vary.len())?;
    }
    let task = task(task_name, &a.file, &task_tokens)?;
    let first = plan.check()?;
    super::print_warnings(&first);
    probe_warnings(&plan, &first);
    let session = Arc::new(Session::open(&plan, task.as_ref(), out, a.resume)?);
    watch_signals(&session);
    let bar = progress_bar(session.todo(), session.already_done());
    let tick = |n: u64| {
        if let Some(b) = &bar {
            b.set_position(n);
        }
    };
    let outcome = session.run(&plan, task.as_ref(), threads, &tick)?;
    if let Some(b) = &bar {
        b.finish_and_clear();
    }
    if let Some(svg) = &a.svg {
        let r = sweep::response(out, a.metric.as_deref())?;
        let text = report::sweep::response::svg(&r);
        std::fs::write(svg, text).map_err(|e| Error::io(svg, e))?;
    }
    let summary = report::sweep::SweepSummary {
        out,
        fingerprint: session.fingerprint(),
        task: task.name(),
        points_total: plan.design.total(),
        shard: shard.map(|s| s.to_string()),
        points_here: session.members(),
        already_done: session.already_done(),
        written: outcome.written,
        failed: &outcome.failed,
        stopped: outcome.stopped,
        svg: a.svg.as_deref(),
    };
    if a.json {
        super::print_json(&report::sweep::sweep_json(&summary))?;
    } else {
        super::print_stdout(&report::sweep::sweep_text(&summary))?;
    }
    match session.ending(&outcome) {
        Ending::Complete => Ok(()),
        Ending::Stopped { in_file, members } => {
            eprintln!(
                "sweep stopped: {in_file} of {members} points are in {out}; run the same command \
                 with --resume to finish"
            );
            std::process::exit(130);
        }
        Ending::Failed {
            failed,
            members,
            internal,
        } => {
            let first = &outcome.failed[0];
            let text = format!(
                "{failed} of {members} points failed (their lines in {out} carry `error`); \
                 point {}: {}",
                first.point, first.message
            );
            Err(if internal {
                Error::Internal(text)
            } else {
                Error::Usage(text)
            })
        }
    }
}

/// Ctrl-C (and SIGTERM, which a batch scheduler sends at a time limit): the first stops the
/// sweep after the points in flight; a second exits at once, holding the file so no line is
/// left half written.
fn watch_signals(session: &Arc<Session>) {
    let session = Arc::clone(session);
    let installed = ctrlc::set_handler(move || match session.interrupt() {
        Interrupt::Stopping => eprintln!(
            "\nstopping: the points in flight finish and are written (signal again to abandon \
             them)"
        ),
        Interrupt::Abandon(_held) => {
            eprintln!(
                "\nabandoned the points in flight; {} holds every finished point, --resume \
                 continues it",
                session.path()
            );
            std::process::exit(130);
        }
    });
    if let Err(e) = installed {
        eprintln!("warning: cannot watch for Ctrl-C ({e}); an interrupt stops the sweep at once");
    }
}

/// A progress bar with points per hour and the time left, when stderr is a terminal.
fn progress_bar(todo: u64, already: u64) -> Option<indicatif::ProgressBar> {
    if !std::io::stderr().is_terminal() || todo == 0 {
        return None;
    }
    let style = indicatif::ProgressStyle::with_template(
        "{prefix}[{bar:32}] {pos}/{len} points  {per_hour}  ETA {left}",
    )
    .ok()?
    .progress_chars("=> ")
    .with_key(
        "per_hour",
        |s: &indicatif::ProgressState, w: &mut dyn std::fmt::Write| {
            let secs = s.elapsed().as_secs_f64();
            let rate = if secs > 0.0 {
                s.pos() as f64 / secs * 3600.0
            } else {
                0.0
            };
            let _ = write!(w, "{} points/h", report::num(rate));
        },
    )
    .with_key(
        "left",
        |s: &indicatif::ProgressState, w: &mut dyn std::fmt::Write| {
            let secs = s.elapsed().as_secs_f64();
            let pos = s.pos();
            if pos == 0 {
                let _ = write!(w, "-");
                return;
            }
            let left = (s.len().unwrap_or(pos) - pos) as f64 * secs / pos as f64;
            let _ = write!(w, "{}", clock(left));
        },
    );
    let bar = indicatif::ProgressBar::new(todo).with_style(style);
    if already > 0 {
        bar.set_prefix(format!("({already} already done) "));
    }
    bar.enable_steady_tick(std::time::Duration::from_millis(500));
    Some(bar)
}

/// Seconds as `1h02m`, `3m05s` or `12s`.
fn clock(secs: f64) -> String {
    let s = secs.round() as u64;
    match s {
        0..=59 => format!("{s}s"),
        60..=3599 => format!("{}m{:02}s", s / 60, s % 60),
        _ => format!("{}h{:02}m", s / 3600, s % 3600 / 60),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn strings(s: &[&str]) -> Vec<String> {
        s.iter().map(|x| x.to_string()).collect()
    }

    #[test]
    fn sweep_flags_are_taken_back_from_the_task_options() {
        let (mine, theirs) = split_options(&strings(&[
            "--t-end",
            "5",
            "--out",
            "f.jsonl",
            "--replicates=3",
            "--resume",
            "--seed=4",
            "--vary",
            "k=list:1",
        ]));
        assert_eq!(
            mine,
            strings(&["--out", "f.jsonl", "--resume", "--seed=4", "--vary", "k=list:1"])
        );
        assert_eq!(theirs, strings(&["--t-end", "5", "--replicates=3"]));
    }

    fn identity(task_name: &str, options: &[&str]) -> Value {
        task(task_name, "loop.crn", &strings(options))
            .unwrap()
            .options()
    }

    #[test]
    fn the_fingerprint_holds_what_options_mean_not_how_they_are_written() {
        assert_eq!(
            identity("noise", &["--t-end", "1h", "--volumes", "1pL,2pL"]),
            identity("noise", &["--volumes=1000fL,2000 fL", "--t-end=3600"])
        );
        assert_eq!(
            identity("reconcile", &["--tolerance", "0.05", "--observe", "H=2nM"]),
            identity("reconcile", &["--observe", " H=2nM ", "--tolerance=5e-2"])
        );
        assert_ne!(
            identity("reconcile", &["--tolerance", "0.05"]),
            identity("reconcile", &["--tolerance", "0.1"])
        );
        assert_eq!(
            identity("simulate", &["--t-end", "5"]),
            identity("simulate", &["--t-end", "5", "--epsilon", "0.1"]),
            "the direct method does not read --epsilon"
        );
        assert_ne!(
            identity("simulate", &["--t-end", "5", "--method", "tau"]),
            identity(
                "simulate",
                &["--t-end", "5", "--method", "tau", "--epsilon", "0.1"]
            )
        );
    }

    #[test]
    fn clock_reads_naturally() {
        assert_eq!(clock(5.0), "5s");
        assert_eq!(clock(185.0), "3m05s");
        assert_eq!(clock(3720.0), "1h02m");
    }
}
