//! A sweep survives being killed: `--resume` finishes it with every point exactly once, equal to
//! an uninterrupted run; a torn last line is dropped; a file of another sweep is refused.

use serde_json::Value;
use std::collections::BTreeMap;
use std::path::Path;
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_copyloop");

fn example() -> String {
    format!(
        "{}/reactions/enzyme_clearance.crn",
        env!("CARGO_MANIFEST_DIR")
    )
}

fn sweep(args: &[&str]) -> Command {
    let mut c = Command::new(BIN);
    c.arg("sweep").arg(example()).args(args);
    c
}

/// Resumes the sweep `args` into `out`, which must succeed; its JSON summary.
fn resume(args: &[&str], out: &Path) -> Value {
    let st = sweep(args)
        .arg("--out")
        .arg(out)
        .arg("--resume")
        .arg("--json")
        .output()
        .unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    serde_json::from_slice(&st.stdout).unwrap()
}

/// The header and the point lines of a sweep file, by point; panics on a point seen twice.
fn read(path: &Path) -> (Value, BTreeMap<u64, Value>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut lines = text.lines();
    let header: Value = serde_json::from_str(lines.next().unwrap()).unwrap();
    let mut points = BTreeMap::new();
    for l in lines {
        let v: Value = serde_json::from_str(l).unwrap();
        let p = v["point"].as_u64().unwrap();
        assert!(
            points.insert(p, v).is_none(),
            "point {p} is in the file twice"
        );
    }
    (header, points)
}

fn lines_in(path: &Path) -> usize {
    std::fs::read(path)
        .map(|b| b.iter().filter(|&&c| c == b'\n').count())
        .unwrap_or(0)
}

const BIG: &[&str] = &[
    "--vary",
    "kon=lin:1e6..1e8:2000",
    "--task",
    "initial",
    "--seed",
    "11",
    "--threads",
    "2",
];

#[test]
fn killed_sweep_resumes_to_the_uninterrupted_result() {
    let dir = tempfile::tempdir().unwrap();
    let full = dir.path().join("full.jsonl");
    let st = sweep(BIG).arg("--out").arg(&full).output().unwrap();
    assert!(
        st.status.success(),
        "{}",
        String::from_utf8_lossy(&st.stderr)
    );
    let (full_header, full_points) = read(&full);
    assert_eq!(full_points.len(), 2000);

    // Kill it once at least 40 points are on the disk. Every point is synced to the disk on
    // its own, so the run takes far longer than reaching 40 lines; should it finish first
    // anyway, the test says so instead of passing without a kill.
    let part = dir.path().join("part.jsonl");
    let mut child = sweep(BIG)
        .arg("--out")
        .arg(&part)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while lines_in(&part) < 41 && start.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(2));
    }
    child.kill().unwrap(); // SIGKILL
    let status = child.wait().unwrap();
    assert!(
        !status.success(),
        "the sweep finished before it could be killed"
    );
    let before = read_lenient(&part);
    assert!(
        (40..2000).contains(&before),
        "{before} points before the kill"
    );

    let summary = resume(BIG, &part);
    assert_eq!(summary["already_done"].as_u64().unwrap(), before as u64);
    assert_eq!(
        summary["written"].as_u64().unwrap(),
        2000 - before as u64,
        "no finished point is computed again"
    );
    let (header, points) = read(&part);
    assert_eq!(header, full_header);
    assert_eq!(points, full_points);
}

/// Whole point lines in a file that may end in a torn line.
fn read_lenient(path: &Path) -> usize {
    let text = std::fs::read_to_string(path).unwrap();
    text.split_inclusive('\n')
        .skip(1)
        .filter(|l| l.ends_with('\n'))
        .count()
}

#[test]
fn interrupt_stops_cleanly_and_resume_finishes() {
    let dir = tempfile::tempdir().unwrap();
    let part = dir.path().join("int.jsonl");
    let child = sweep(BIG)
        .arg("--out")
        .arg(&part)
        .stdout(Stdio::null())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while lines_in(&part) < 21 && start.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(2));
    }
    let kill = Command::new("kill")
        .arg("-INT")
        .arg(child.id().to_string())
        .status()
        .unwrap();
    assert!(kill.success());
    let out = child.wait_with_output().unwrap();
    assert_eq!(
        out.status.code(),
        Some(130),
        "a stopped sweep exits with 130"
    );
    let text = std::fs::read_to_string(&part).unwrap();
    assert!(
        text.ends_with('\n'),
        "every point line is whole after Ctrl-C"
    );
    let (_, points) = read(&part);
    assert!(points.len() < 2000);
    let st = sweep(BIG)
        .arg("--out")
        .arg(&part)
        .arg("--resume")
        .output()
        .unwrap();
    assert!(st.status.success());
    assert_eq!(read(&part).1.len(), 2000);
}

const SMALL: &[&str] = &[
    "--vary",
    "kon=log:1e6..1e8:4",
    "--vary",
    "E=lin:100..400:3",
    "--task",
    "initial",
];

#[test]
fn torn_last_line_is_dropped_and_redone() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("t.jsonl");
    assert!(sweep(SMALL)
        .arg("--out")
        .arg(&f)
        .status()
        .unwrap()
        .success());
    let (_, whole) = read(&f);
    let text = std::fs::read_to_string(&f).unwrap();
    let last_start = text[..text.len() - 1].rfind('\n').unwrap() + 1;
    let torn_at = last_start + (text.len() - last_start) / 2;
    std::fs::write(&f, &text.as_bytes()[..torn_at]).unwrap();
    let summary = resume(SMALL, &f);
    assert_eq!(summary["written"], 1);
    assert_eq!(summary["already_done"], 11);
    assert_eq!(read(&f).1, whole);
}

#[test]
fn a_file_of_another_sweep_is_refused_with_status_2() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("m.jsonl");
    assert!(sweep(SMALL)
        .arg("--out")
        .arg(&f)
        .status()
        .unwrap()
        .success());
    let before = std::fs::read(&f).unwrap();
    for other in [
        vec!["--seed", "5"],
        vec!["--vary", "koff=list:0.5"],
        vec!["--shard", "1/2"],
    ] {
        let st = sweep(SMALL)
            .args(&other)
            .arg("--out")
            .arg(&f)
            .arg("--resume")
            .output()
            .unwrap();
        assert_eq!(st.status.code(), Some(2), "{other:?}");
        let msg = String::from_utf8_lossy(&st.stderr);
        assert!(
            msg.contains("another sweep") || msg.contains("shard"),
            "{msg}"
        );
    }
    // Another task, and another network text.
    let st = Command::new(BIN)
        .args([
            "sweep",
            &example(),
            "--vary",
            "kon=log:1e6..1e8:4",
            "--vary",
        ])
        .args(["E=lin:100..400:3", "--task", "check", "--resume", "--out"])
        .arg(&f)
        .output()
        .unwrap();
    assert_eq!(st.status.code(), Some(2));
    let edited = dir.path().join("edited.crn");
    let mut net = std::fs::read_to_string(example()).unwrap();
    net.push_str("# a comment changes the text\n");
    std::fs::write(&edited, net).unwrap();
    let st = Command::new(BIN)
        .arg("sweep")
        .arg(&edited)
        .args(SMALL)
        .args(["--resume", "--out"])
        .arg(&f)
        .output()
        .unwrap();
    assert_eq!(st.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&st.stderr).contains("network file's text"));
    assert_eq!(
        std::fs::read(&f).unwrap(),
        before,
        "a refused file is left as it was"
    );
    // Without --resume an existing file is never overwritten.
    let st = sweep(SMALL).arg("--out").arg(&f).output().unwrap();
    assert_eq!(st.status.code(), Some(2));
    assert_eq!(std::fs::read(&f).unwrap(), before);
}

#[test]
fn same_numbers_whatever_the_thread_count() {
    let dir = tempfile::tempdir().unwrap();
    let one = dir.path().join("one.jsonl");
    let two = dir.path().join("two.jsonl");
    let run = |threads: &str, f: &Path| {
        assert!(sweep(SMALL)
            .args(["--threads", threads, "--out"])
            .arg(f)
            .status()
            .unwrap()
            .success());
    };
    run("1", &one);
    run("2", &two);
    assert_eq!(read(&one), read(&two));
}

// Two sweeps given one --out: the second is refused (exit 2, naming the lock) while the first
// runs, and the first finishes with every point exactly once and every line whole. Before,
// both reported success and left 9–29 of 40 points and broken lines.
#[test]
fn a_second_sweep_on_the_same_file_is_refused() {
    let dir = tempfile::tempdir().unwrap();
    let out = dir.path().join("one.jsonl");
    let mut first = sweep(BIG)
        .arg("--out")
        .arg(&out)
        .stdout(Stdio::null())
        .stderr(Stdio::null())
        .spawn()
        .unwrap();
    // Wait until the first holds the file (its header is written under the lock).
    let start = Instant::now();
    while lines_in(&out) == 0 && start.elapsed() < Duration::from_secs(60) {
        std::thread::sleep(Duration::from_millis(5));
    }
    let second = sweep(BIG)
        .arg("--out")
        .arg(&out)
        .arg("--resume")
        .output()
        .unwrap();
    let still_running = first.try_wait().unwrap().is_none();
    assert!(first.wait().unwrap().success());
    assert!(
        still_running,
        "the first sweep ended before the second started: the test needs a longer sweep"
    );
    assert_eq!(second.status.code(), Some(2));
    let msg = String::from_utf8_lossy(&second.stderr);
    assert!(msg.contains("another copyloop sweep"), "{msg}");
    let (_, points) = read(&out);
    assert_eq!(points.len(), 2000);
}

/// A sweep file written by an earlier build (tests/data/sweep_v1/partial.jsonl: the header and
/// point 0 of a three-point sweep of a frozen copy of the enzyme loop) still resumes. The
/// fingerprint holds what the task's options mean, not how they were spelled, so the options
/// here are written differently from the command that made the file (`--t-end=1s` for
/// `--t-end 1`, `--epsilon`, which the direct method does not read, and another order). A flag
/// renamed later must keep this test passing; a change that breaks it breaks every user's
/// unfinished sweep and must be a new sweep file format instead.
#[test]
fn a_sweep_file_from_an_earlier_build_resumes_whatever_the_flags_spelling() {
    let data = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/data/sweep_v1");
    let net = data.join("loop.crn");
    let dir = tempfile::tempdir().unwrap();
    let part = dir.path().join("partial.jsonl");
    std::fs::copy(data.join("partial.jsonl"), &part).unwrap();
    let (old_header, old_points) = read(&part);
    let args = [
        "--task",
        "simulate",
        "--t-end=1s",
        "--grid",
        "3",
        "--replicates=2",
        "--method",
        "direct",
        "--epsilon",
        "0.5",
        "--vary",
        "kcat=list:1,2,4",
    ];
    let run = |out: &Path, resume: bool| {
        let mut c = Command::new(BIN);
        c.arg("sweep").arg(&net).args(args).arg("--out").arg(out);
        if resume {
            c.arg("--resume");
        }
        let st = c.arg("--json").output().unwrap();
        assert!(
            st.status.success(),
            "{}",
            String::from_utf8_lossy(&st.stderr)
        );
        serde_json::from_slice::<Value>(&st.stdout).unwrap()
    };
    let summary = run(&part, true);
    assert_eq!(summary["already_done"], 1);
    assert_eq!(summary["written"], 2);
    let (header, points) = read(&part);
    assert_eq!(header, old_header, "the header is kept as it was");
    assert_eq!(
        points[&0], old_points[&0],
        "the finished point is not redone"
    );

    let fresh = dir.path().join("fresh.jsonl");
    run(&fresh, false);
    let (_, fresh_points) = read(&fresh);
    // Equal numbers; only the timings differ between runs.
    let timeless = |v: &Value| {
        let mut v = v.clone();
        let r = v["result"].as_object_mut().unwrap();
        r.remove("wall_seconds");
        r.remove("events_per_second");
        v
    };
    for p in [1, 2] {
        assert_eq!(
            timeless(&points[&p]),
            timeless(&fresh_points[&p]),
            "point {p}"
        );
    }
}
