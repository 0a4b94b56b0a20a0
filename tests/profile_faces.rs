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
    // The list item itself: `takeoff_faces = ["F99"]`, column 18.
    assert!(
        err.contains(&format!(":{line}:18: righting.takeoff_faces[1]: ")),
        "line {line} in {err}"
    );
    assert!(
        err.contains("expected a face of this cage (it has F1..F8), found F99"),
        "{err}"
    );
}
