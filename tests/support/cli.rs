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
