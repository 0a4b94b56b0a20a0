//! Profile values that can only be checked once the hull has numbered the
//! faces are still refused by `profile check`, at their line and column.

use std::process::Command;

#[test]
fn an_unknown_takeoff_face_is_refused_where_it_is_written() {
    let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args([
            "profile",
            "check",
            "tests/fixtures/profiles/unknown-takeoff-face.toml",
        ])
        .output()
        .expect("run cagehand");
    let err = String::from_utf8_lossy(&out.stderr);
    assert_eq!(out.status.code(), Some(2), "{err}");
    assert!(err.contains("unknown-takeoff-face.toml:"), "{err}");
    let line = std::fs::read_to_string("tests/fixtures/profiles/unknown-takeoff-face.toml")
        .expect("fixture")
        .lines()
        .position(|l| l.contains("F99"))
        .expect("the fixture names F99")
        + 1;
    assert!(
        err.contains(&format!(":{line}:1: ")),
        "line {line} in {err}"
    );
    assert!(
        err.contains("F99 is not a face of this cage (it has F1..F8)"),
        "{err}"
    );
}
