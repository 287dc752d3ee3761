//! A seeded mutation fuzzer over the bundled networks: no input makes copyloop panic, abort or
//! run away, and every JSON it prints is JSON.
//!
//! Mutations: tokens deleted, duplicated and swapped; lines dropped and repeated; numbers
//! replaced by huge, tiny, negative, NaN, infinite and odd-unit values; unicode inserted; a
//! token repeated into a long line. Every mutant goes through the compiler and the `check`
//! report in this process (a panic is caught and reported with the mutant); a few hundred of
//! the accepted ones go through `simulate`, `steady` and `noise` as child processes with short
//! budgets and a time limit, which must exit 0 or 2 and print valid JSON.

mod support;

use rand::{RngExt, SeedableRng};
use rand_xoshiro::Xoshiro256PlusPlus;
use std::io::Read;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

/// Mutants per bundled network through the compiler.
const MUTANTS: usize = 7_000;
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

// Every mutant compiles or is refused with exit status 2 and a location, and the accepted ones
// render their `check` report; nothing panics.
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
                        let _ = copyloop::report::check::table(&net);
                        Ok(())
                    }
                    Err(e) => Err(e.exit_code()),
                }
            });
            match outcome {
                Ok(Ok(())) => accepted += 1,
                Ok(Err(code)) => {
                    assert_eq!(
                        code, 2,
                        "{name} mutant {m} refused with exit {code}:\n{mutant}"
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

// Accepted mutants through the engines with short budgets: each exits 0 or 2 within its time
// limit, never panics (exit 101) or aborts, and a successful run prints one valid JSON document
// (JSON has no NaN or infinity: serde_json refuses to read them).
#[test]
fn accepted_mutants_run_or_are_refused() {
    let dir = tempfile::tempdir().unwrap();
    let mut ran = 0;
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
            let path = dir.path().join(format!("m{done}.crn"));
            std::fs::write(&path, &mutant).unwrap();
            for args in [
                &[
                    "simulate",
                    "--t-end",
                    &t_end,
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
                    &t_end,
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
                    &t_end,
                    "--threads",
                    "1",
                    "--json",
                ],
            ] {
                let (code, out, err) = run_limited(&path, args);
                match code {
                    Some(0) => {
                        let v: Result<serde_json::Value, _> = serde_json::from_str(&out);
                        assert!(
                            v.is_ok(),
                            "{name}: {args:?} printed invalid JSON:\n{mutant}"
                        );
                    }
                    Some(2) => assert!(err.contains("error"), "{args:?}: {err}"),
                    None => panic!("{name}: {args:?} ran past {LIMIT:?} on:\n{mutant}"),
                    Some(c) => panic!("{name}: {args:?} exited {c}:\n{err}\n{mutant}"),
                }
                ran += 1;
            }
        }
    }
    assert!(ran >= 100, "only {ran} engine runs");
}
