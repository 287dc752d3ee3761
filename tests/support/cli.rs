//! Running the copyloop binary from the integration tests.

use std::process::{Command, Output};

/// The binary Cargo built for these tests.
pub const BIN: &str = env!("CARGO_BIN_EXE_copyloop");

/// Runs copyloop with `args`.
pub fn run(args: &[&str]) -> Output {
    Command::new(BIN).args(args).output().expect("run copyloop")
}

/// Runs copyloop, which must succeed, and parses its standard output as one JSON document.
pub fn json(args: &[&str]) -> serde_json::Value {
    let out = run(args);
    assert_eq!(
        out.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("one JSON document")
}

/// Writes `text` to a temporary `.xml` file and runs copyloop with `args` after its path
/// (`args[0]` is the command); returns the exit status, stdout and stderr.
pub fn run_file(text: &[u8], args: &[&str]) -> (Option<i32>, String, String) {
    use std::io::Write;
    let mut f = tempfile::Builder::new().suffix(".xml").tempfile().unwrap();
    f.write_all(text).unwrap();
    let path = f.path().to_str().unwrap().to_string();
    let mut all = vec![args[0], path.as_str()];
    all.extend(&args[1..]);
    let out = run(&all);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}
