//! A seeded mutation fuzzer over the bundled networks: no input makes copyloop panic, abort or
//! run away, and every JSON it prints is JSON.
//!
//! Mutations: tokens deleted, duplicated and swapped; lines dropped and repeated; numbers
//! replaced by huge, tiny, negative, NaN, infinite and odd-unit values; unicode inserted; a
//! token repeated into a long line. Every mutant goes through the compiler and the `check`
//! report in this process (a panic is caught and reported with the mutant); a few hundred of
//! the accepted ones go through `simulate`, `steady` and `noise` as child processes with short
//! budgets and a time limit (two at a time), which must exit 0 or 2 and print valid JSON
//! (`noise` with `--exact-states 0`: its exact solve would take longer than its ensemble).
//! No message prints a number longer than the mutant itself holds: shortest round-trip or
//! scientific form, never the 300 digits of a plain 1e300.

mod support;

use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use std::io::Read;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Mutants per bundled network through the compiler.
const MUTANTS: usize = 20_000;
/// Accepted mutants per bundled network run through the engines.
const RUNS: usize = 40;
/// Time limit of one engine run.
const LIMIT: Duration = Duration::from_secs(60);

const NUMBERS: &[&str] = &[
    "1e308",
    "1.79e308",
    "1e-308",
    "5e-324",
    "0",
    "-1",
    "-0",
    "NaN",
    "inf",
    "1e400",
    "18446744073709551617",
    "0.5 parsecs",
    "3 nM/s",
    "2 /M",
    "7 fL",
    "1e15 molecules",
    "4 um3",
    "12 h",
    "1e-30 /s",
];
const UNICODE: &[&str] = &["µ", "é", "→", "\u{feff}", "\u{0}", "𝔸", "\u{202e}", "±"];

fn bundled() -> Vec<(String, String)> {
    let dir = concat!(env!("CARGO_MANIFEST_DIR"), "/reactions");
    let mut out: Vec<(String, String)> = std::fs::read_dir(dir)
        .unwrap()
        .filter_map(|e| {
            let p = e.ok()?.path();
            (p.extension()? == "crn").then(|| {
                let name = p.file_name().unwrap().to_string_lossy().into_owned();
                (name, std::fs::read_to_string(&p).unwrap())
            })
        })
        .collect();
    out.sort();
    assert!(!out.is_empty());
    out
}

/// Splits text into tokens (words, numbers, punctuation) and the whitespace between them.
fn tokens(text: &str) -> Vec<String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    for c in text.chars() {
        let word = c.is_alphanumeric() || c == '_' || c == '.';
        if word {
            cur.push(c);
        } else {
            if !cur.is_empty() {
                out.push(std::mem::take(&mut cur));
            }
            out.push(c.to_string());
        }
    }
    if !cur.is_empty() {
        out.push(cur);
    }
    out
}

fn mutate(text: &str, rng: &mut Xoshiro256PlusPlus) -> String {
    let mut t = tokens(text);
    for _ in 0..rng.random_range(1..=4) {
        if t.is_empty() {
            break;
        }
        let k = rng.random_range(0..t.len());
        match rng.random_range(0..9) {
            0 => {
                t.remove(k);
            }
            1 => {
                let x = t[k].clone();
                t.insert(k, x);
            }
            2 => {
                let j = rng.random_range(0..t.len());
                t.swap(k, j);
            }
            3 | 4 => {
                if let Some(j) =
                    (k..t.len()).find(|&j| t[j].starts_with(|c: char| c.is_ascii_digit()))
                {
                    t[j] = NUMBERS[rng.random_range(0..NUMBERS.len())].to_string();
                }
            }
            5 => t.insert(k, UNICODE[rng.random_range(0..UNICODE.len())].to_string()),
            6 => {
                // A long line: one token repeated, joined by operators a law accepts.
                let x = t[k].clone();
                let n = rng.random_range(100..3000);
                t[k] = vec![x; n].join(" + ");
            }
            7 => {
                // Drop or repeat a whole line.
                let text: String = t.concat();
                let mut lines: Vec<&str> = text.lines().collect();
                if !lines.is_empty() {
                    let l = rng.random_range(0..lines.len());
                    if rng.random_bool(0.5) {
                        lines.remove(l);
                    } else {
                        lines.insert(l, lines[l]);
                    }
                }
                t = tokens(&(lines.join("\n") + "\n"));
            }
            _ => {
                // Nest a law deeply.
                let n = rng.random_range(10..500);
                t.insert(k, "(".repeat(n));
                t.insert((k + 2).min(t.len()), ")".repeat(n));
            }
        }
    }
    t.concat()
}

/// Digits a message may print in a row: an f64 in shortest round-trip form has at most 17
/// significant digits, and a plain form up to 1e21 at most 22 (common practice); longer runs
/// only where the mutant itself has them (a message may quote the file).
fn digits_allowed(mutant: &str) -> usize {
    support::longest_digits(mutant).max(22)
}

// Every mutant compiles or is refused with exit status 2 and a location, and the accepted ones
// render their `check` report; nothing panics, and no message or report spells out a number
// longer than the file does.
#[test]
fn mutants_never_panic_the_compiler() {
    let mut refused = 0usize;
    let mut accepted = 0usize;
    for (name, text) in bundled() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(0x5eed ^ name.len() as u64);
        for m in 0..MUTANTS {
            let mutant = mutate(&text, &mut rng);
            let outcome = std::panic::catch_unwind(|| {
                match copyloop::network::load_source(
                    "mutant.crn",
                    mutant.as_bytes(),
                    &Default::default(),
                ) {
                    Ok(net) => {
                        let json = copyloop::report::check::json(&net);
                        serde_json::to_string(&json).expect("check JSON encodes");
                        let table = copyloop::report::check::table(&net);
                        let warnings: String =
                            net.warnings.iter().map(|w| w.message.clone()).collect();
                        Ok(support::longest_digits(&table).max(support::longest_digits(&warnings)))
                    }
                    Err(e) => {
                        let messages: String = match &e {
                            copyloop::Error::Input(d) => d
                                .iter()
                                .map(|d| {
                                    format!("{} {}", d.message, d.help.as_deref().unwrap_or(""))
                                })
                                .collect(),
                            other => other.to_string(),
                        };
                        Err((e.exit_code(), support::longest_digits(&messages)))
                    }
                }
            });
            let allowed = digits_allowed(&mutant);
            match outcome {
                Ok(Ok(digits)) => {
                    assert!(
                        digits <= allowed,
                        "{name} mutant {m}: its check report or warnings print {digits} digits in a row:\n{mutant}"
                    );
                    accepted += 1;
                }
                Ok(Err((code, digits))) => {
                    assert_eq!(
                        code, 2,
                        "{name} mutant {m} refused with exit {code}:\n{mutant}"
                    );
                    assert!(
                        digits <= allowed,
                        "{name} mutant {m}: its error prints {digits} digits in a row:\n{mutant}"
                    );
                    refused += 1;
                }
                Err(_) => panic!("{name} mutant {m} panicked the compiler:\n{mutant}"),
            }
        }
    }
    assert!(
        refused > 1000 && accepted > 1000,
        "{refused} refused, {accepted} accepted"
    );
}

/// Runs the binary on `file` with `args`, killing it after [`LIMIT`]; its exit code and stdout.
fn run_limited(file: &std::path::Path, args: &[&str]) -> (Option<i32>, String, String) {
    let mut child = Command::new(support::cli::BIN)
        .arg(args[0])
        .arg(file)
        .args(&args[1..])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    // Both pipes are drained while the child runs: a report larger than the pipe's buffer
    // would otherwise block the child and look like a hang.
    let drain = |mut pipe: Box<dyn Read + Send>| {
        std::thread::spawn(move || {
            let mut text = String::new();
            let _ = pipe.read_to_string(&mut text);
            text
        })
    };
    let out = drain(Box::new(child.stdout.take().unwrap()));
    let err = drain(Box::new(child.stderr.take().unwrap()));
    let start = Instant::now();
    loop {
        if let Some(status) = child.try_wait().unwrap() {
            return (status.code(), out.join().unwrap(), err.join().unwrap());
        }
        if start.elapsed() > LIMIT {
            let _ = child.kill();
            let _ = child.wait();
            return (None, out.join().unwrap(), err.join().unwrap());
        }
        std::thread::sleep(Duration::from_millis(2));
    }
}

/// Engine runs at once (the compiler test runs beside them on a core of its own).
const PARALLEL: usize = 2;

/// One engine run of an accepted mutant.
struct Job {
    name: String,
    mutant: String,
    path: std::path::PathBuf,
    args: Vec<String>,
}

/// What is wrong with a finished run, if anything.
fn judge(job: &Job, code: Option<i32>, out: &str, err: &str) -> Option<String> {
    let (name, args, mutant) = (&job.name, &job.args, &job.mutant);
    match code {
        Some(0) if serde_json::from_str::<serde_json::Value>(out).is_err() => {
            Some(format!("{name}: {args:?} printed invalid JSON:\n{mutant}"))
        }
        Some(0) => None,
        Some(2) if !err.contains("error") => Some(format!("{args:?}: {err}")),
        Some(2) => None,
        None => Some(format!("{name}: {args:?} ran past {LIMIT:?} on:\n{mutant}")),
        Some(c) => Some(format!("{name}: {args:?} exited {c}:\n{err}\n{mutant}")),
    }
}

// Accepted mutants through the engines with short budgets: each exits 0 or 2 within its time
// limit, never panics (exit 101) or aborts, and a successful run prints one valid JSON document
// (JSON has no NaN or infinity: serde_json refuses to read them).
#[test]
fn accepted_mutants_run_or_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut jobs = Vec::new();
    let mut accepted = 0;
    for (name, text) in bundled() {
        let mut rng = Xoshiro256PlusPlus::seed_from_u64(0xf00d ^ name.len() as u64);
        let mut done = 0;
        let mut tries = 0;
        while done < RUNS && tries < 50 * RUNS {
            tries += 1;
            let mutant = mutate(&text, &mut rng);
            let Ok(net) =
                copyloop::network::load_source("m.crn", mutant.as_bytes(), &Default::default())
            else {
                continue;
            };
            done += 1;
            accepted += 1;
            // A short budget: about 10⁶ events at the initial rate, at most 2 s.
            let x0 = net.initial_state();
            let a0: f64 = net.propensities().iter().map(|p| p.eval(&x0).abs()).sum();
            let t_end = if a0 > 0.0 && a0.is_finite() {
                (1e6 / a0).min(2.0)
            } else {
                2.0
            };
            let t_end = format!("{t_end:e}");
            let burn_in = format!("{:e}", 0.3 * t_end.parse::<f64>().unwrap());
            let path = dir.path().join(format!("m{accepted}.crn"));
            std::fs::write(&path, &mutant).unwrap();
            let t = t_end.as_str();
            for args in [
                &[
                    "simulate",
                    "--t-end",
                    t,
                    "--replicates",
                    "2",
                    "--grid",
                    "5",
                    "--threads",
                    "1",
                    "--json",
                ][..],
                &[
                    "simulate",
                    "--t-end",
                    t,
                    "--method",
                    "tau",
                    "--threads",
                    "1",
                    "--json",
                ],
                &["steady", "--json"],
                &[
                    "noise",
                    "--replicates",
                    "4",
                    "--burn-in",
                    &burn_in,
                    "--t-end",
                    t,
                    "--threads",
                    "1",
                    "--exact-states",
                    "0",
                    "--json",
                ],
            ] {
                jobs.push(Job {
                    name: name.clone(),
                    mutant: mutant.clone(),
                    path: path.clone(),
                    args: args.iter().map(|a| a.to_string()).collect(),
                });
            }
        }
    }
    let next = std::sync::atomic::AtomicUsize::new(0);
    let failures = std::sync::Mutex::new(Vec::new());
    std::thread::scope(|s| {
        for _ in 0..PARALLEL {
            s.spawn(|| loop {
                let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                let Some(job) = jobs.get(k) else { break };
                let args: Vec<&str> = job.args.iter().map(String::as_str).collect();
                let (code, out, err) = run_limited(&job.path, &args);
                if let Some(f) = judge(job, code, &out, &err) {
                    failures.lock().unwrap().push(f);
                }
            });
        }
    });
    let failures = failures.into_inner().unwrap();
    assert!(failures.is_empty(), "{}", failures.join("\n\n"));
    assert!(
        accepted >= 150 && jobs.len() >= 4 * 150,
        "only {accepted} accepted mutants, {} engine runs",
        jobs.len()
    );
}
