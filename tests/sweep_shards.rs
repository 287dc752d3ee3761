//! Shards of a sweep merged equal the unsharded run, point for point; `merge` refuses a shard
//! given twice and files of different sweeps; a partial merge can be finished with `--resume`.

use serde_json::Value;
use std::collections::BTreeMap;
use std::path::{Path, PathBuf};
use std::process::{Command, Output};

const BIN: &str = env!("CARGO_BIN_EXE_copyloop");

fn example() -> String {
    format!(
        "{}/reactions/receptor_signal.crn",
        env!("CARGO_MANIFEST_DIR")
    )
}

const SPECS: &[&str] = &[
    "--vary",
    "volume=log:0.5pL..4pL:4",
    "--vary",
    "koff=lin:0.1..0.4:5",
    "--task",
    "initial",
];

fn specs() -> Vec<&'static str> {
    SPECS.to_vec()
}

fn sweep(extra: &[&str], out: &Path) -> Output {
    Command::new(BIN)
        .arg("sweep")
        .arg(example())
        .args(specs())
        .args(extra)
        .args(if extra.contains(&"--seed") {
            vec![]
        } else {
            vec!["--seed", "3"]
        })
        .arg("--out")
        .arg(out)
        .output()
        .unwrap()
}

fn merge(files: &[PathBuf], out: &Path) -> Output {
    Command::new(BIN)
        .arg("merge")
        .args(files)
        .arg("--out")
        .arg(out)
        .output()
        .unwrap()
}

/// The point lines of a sweep file, by point, exactly as written.
fn lines(path: &Path) -> (Value, BTreeMap<u64, String>) {
    let text = std::fs::read_to_string(path).unwrap();
    let mut it = text.lines();
    let header: Value = serde_json::from_str(it.next().unwrap()).unwrap();
    let mut out = BTreeMap::new();
    for l in it {
        let v: Value = serde_json::from_str(l).unwrap();
        let p = v["point"].as_u64().unwrap();
        assert!(out.insert(p, l.to_string()).is_none(), "point {p} twice");
    }
    (header, out)
}

fn ok(o: &Output) {
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
}

#[test]
fn merged_shards_equal_the_unsharded_run() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole.jsonl");
    ok(&sweep(&[], &whole));
    let (whole_header, whole_lines) = lines(&whole);
    assert_eq!(whole_lines.len(), 20);

    let shards: Vec<PathBuf> = (1..=3)
        .map(|i| dir.path().join(format!("s{i}.jsonl")))
        .collect();
    for (i, f) in shards.iter().enumerate() {
        ok(&sweep(
            &["--shard", &format!("{}/3", i + 1), "--threads", "1"],
            f,
        ));
        let (h, l) = lines(f);
        assert_eq!(h["shard"], format!("{}/3", i + 1));
        assert!(
            l.keys().all(|p| p % 3 == i as u64),
            "shard {} holds its own share",
            i + 1
        );
    }
    let merged = dir.path().join("merged.jsonl");
    ok(&merge(&shards, &merged));
    let (h, l) = lines(&merged);
    assert_eq!(
        h, whole_header,
        "a merge of every shard reads as the whole sweep"
    );
    assert_eq!(l, whole_lines, "point for point, byte for byte");
    let text = std::fs::read_to_string(&merged).unwrap();
    let order: Vec<u64> = text
        .lines()
        .skip(1)
        .map(|l| {
            serde_json::from_str::<Value>(l).unwrap()["point"]
                .as_u64()
                .unwrap()
        })
        .collect();
    assert_eq!(order, (0..20).collect::<Vec<_>>(), "ordered by point");
}

#[test]
fn merge_refuses_duplicates_and_other_sweeps() {
    let dir = tempfile::tempdir().unwrap();
    let s1 = dir.path().join("s1.jsonl");
    let s2 = dir.path().join("s2.jsonl");
    ok(&sweep(&["--shard", "1/2"], &s1));
    ok(&sweep(&["--shard", "2/2"], &s2));
    let out = dir.path().join("m.jsonl");

    let o = merge(&[s1.clone(), s2.clone(), s1.clone()], &out);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("in both"));
    assert!(!out.exists(), "nothing is written on a refused merge");

    let copy = dir.path().join("copy.jsonl");
    std::fs::copy(&s1, &copy).unwrap();
    let o = merge(&[s1.clone(), copy], &out);
    assert_eq!(
        o.status.code(),
        Some(2),
        "the same shard under another name"
    );

    let other = dir.path().join("other.jsonl");
    ok(&sweep(&["--shard", "2/2", "--seed", "4"], &other));
    let o = merge(&[s1.clone(), other], &out);
    assert_eq!(o.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&o.stderr).contains("another sweep"));

    let o = merge(&[s1.clone(), s2.clone()], &s1);
    assert_eq!(o.status.code(), Some(2), "--out may not be an input");
}

#[test]
fn a_partial_merge_is_finished_by_resume() {
    let dir = tempfile::tempdir().unwrap();
    let whole = dir.path().join("whole.jsonl");
    ok(&sweep(&[], &whole));
    let s1 = dir.path().join("s1.jsonl");
    ok(&sweep(&["--shard", "1/4"], &s1));
    let merged = dir.path().join("m.jsonl");
    let o = Command::new(BIN)
        .arg("merge")
        .arg(&s1)
        .arg("--json")
        .arg("--out")
        .arg(&merged)
        .output()
        .unwrap();
    ok(&o);
    let summary: Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(summary["points"], 5);
    assert_eq!(summary["missing"], 15);
    ok(&sweep(&["--resume"], &merged));
    assert_eq!(lines(&merged).1, lines(&whole).1);
}

#[test]
fn svg_of_a_heat_map_has_a_cell_per_point() {
    let dir = tempfile::tempdir().unwrap();
    let f = dir.path().join("h.jsonl");
    let svg = dir.path().join("h.svg");
    let svg_arg = svg.to_string_lossy().to_string();
    ok(&sweep(&["--svg", &svg_arg, "--metric", "/omega"], &f));
    let text = std::fs::read_to_string(&svg).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed SVG");
    let cells = doc
        .descendants()
        .filter(|n| n.attribute("class") == Some("cell"))
        .count();
    assert_eq!(cells, 20, "a cell per point");
    let three = Command::new(BIN)
        .arg("sweep")
        .arg(example())
        .args(specs())
        .args(["--vary", "kon=list:1e7", "--svg", &svg_arg])
        .arg("--out")
        .arg(dir.path().join("x.jsonl"))
        .output()
        .unwrap();
    assert_eq!(three.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&three.stderr).contains("varies 3"));
    assert!(
        !dir.path().join("x.jsonl").exists(),
        "refused before any point runs"
    );
    let bad_metric = sweep(
        &["--svg", &svg_arg, "--metric", "/nothing/here"],
        &dir.path().join("y.jsonl"),
    );
    assert_eq!(bad_metric.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&bad_metric.stderr).contains("no point"));
}
