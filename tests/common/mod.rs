//! Helpers shared by the integration tests that run the real binary on a
//! temporary data folder (each test binary uses the ones it needs).

#![allow(dead_code)]

use std::path::Path;
use std::process::{Command, Output};

/// The binary under test.
pub const BIN: &str = env!("CARGO_BIN_EXE_cagehand");

/// Run the binary with `args`, its log in `data`, as operator `ana`.
pub fn cmd(data: &Path, args: &[&str]) -> Output {
    Command::new(BIN)
        .args(args)
        .env("CAGEHAND_DATA", data)
        .env("CAGEHAND_OPERATOR", "ana")
        .output()
        .expect("run the cagehand binary")
}

/// The standard output of a run that must have succeeded; fails the test
/// with the exit code and standard error otherwise.
pub fn ok(o: &Output) -> String {
    assert!(
        o.status.success(),
        "exit {:?}: {}",
        o.status.code(),
        String::from_utf8_lossy(&o.stderr)
    );
    String::from_utf8(o.stdout.clone()).expect("UTF-8 output")
}
