//! `cagehand profile check` on valid and invalid profiles: the real binary,
//! fixture files in tests/fixtures/profiles, exit codes and messages.

use std::process::Command;

fn check(file: &str) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args([
            "profile",
            "check",
            &format!("tests/fixtures/profiles/{file}"),
        ])
        .output()
        .expect("run cagehand");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

/// Each bad fixture: the file, the `line:column`, the key and a phrase of
/// what was expected or found, all of which the message must carry.
const BAD: &[(&str, &str, &str, &str)] = &[
    (
        "unknown-key.toml",
        ":7:1:",
        "vehicle.mass_lb",
        "unknown field",
    ),
    (
        "wrong-type.toml",
        ":6:11:",
        "vehicle.mass_kg",
        "expected f64",
    ),
    (
        "negative-mass.toml",
        ":6:11:",
        "vehicle.mass_kg",
        "expected a positive number, found -0.45",
    ),
    (
        "negative-length.toml",
        ":65:21:",
        "cage.rod_section.outer_diameter_mm",
        "found -6",
    ),
    (
        "duplicate-node.toml",
        ":26:6:",
        "cage.node[5].id",
        "used once",
    ),
    (
        "missing-node.toml",
        ":62:9:",
        "cage.string[9].nodes",
        "unknown node \"N9\"",
    ),
    (
        "self-member.toml",
        ":46:9:",
        "cage.string[2].nodes",
        "joined to itself",
    ),
    (
        "rod-not-longest.toml",
        ":44:9:",
        "cage.string[1].nodes",
        "rods must be the longest",
    ),
    (
        "inner-diameter.toml",
        ":66:21:",
        "cage.rod_section.inner_diameter_mm",
        "smaller than the outer",
    ),
    (
        "com-outside.toml",
        ":7:9:",
        "vehicle.com_m",
        "inside the cage",
    ),
    (
        "zero-pretension.toml",
        ":76:16:",
        "cage.string_section.pretension_n",
        "impacts cannot be solved",
    ),
    (
        "zero-inspect.toml",
        ":112:18:",
        "inspection.inspect_damage",
        "above 0",
    ),
    (
        "inspect-above-due.toml",
        ":112:18:",
        "inspection.inspect_damage",
        "inspect 0.8 > due 0.5",
    ),
    (
        "zero-count-limit.toml",
        ":112:22:",
        "inspection.string_count_limit",
        "at least 1",
    ),
    ("bad-toml.toml", ":3:9:", "", "expected `]`"),
];

#[test]
fn bad_profiles_are_refused_with_file_line_column_key_and_expectation() {
    for (file, at, key, phrase) in BAD {
        let (code, stdout, stderr) = check(file);
        assert_eq!(
            code, 2,
            "{file}: exit code 2 for bad input; stderr: {stderr}"
        );
        assert!(stdout.is_empty(), "{file}: nothing on stdout");
        assert!(
            stderr.contains(&format!("{file}{at}")),
            "{file}: location {at} in {stderr}"
        );
        assert!(stderr.contains(key), "{file}: key {key} in {stderr}");
        assert!(stderr.contains(phrase), "{file}: '{phrase}' in {stderr}");
        assert_eq!(
            stderr.lines().count(),
            1,
            "{file}: one clear line, no panic: {stderr}"
        );
    }
}

#[test]
fn valid_profiles_pass_with_a_summary() {
    let (code, stdout, stderr) = check("valid-prism.toml");
    assert_eq!(code, 0, "{stderr}");
    assert!(
        stdout.contains("6 nodes, 3 rods, 9 strings, 8 faces"),
        "{stdout}"
    );
    for bundled in ["demo.toml", "prism-explicit.toml"] {
        let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
            .args(["profile", "check", &format!("profiles/{bundled}"), "--json"])
            .output()
            .expect("run cagehand");
        assert!(out.status.success(), "{bundled}");
        let v: serde_json::Value = serde_json::from_slice(&out.stdout).expect("json");
        assert_eq!(v["ok"], true);
    }
}

#[test]
fn a_missing_file_is_bad_input_not_a_crash() {
    let (code, _, stderr) = check("no-such-file.toml");
    assert_eq!(code, 2);
    assert!(stderr.contains("cannot read profile"), "{stderr}");
}

#[test]
fn payload_nodes_off_the_centre_of_mass_are_refused() {
    let (code, stdout, stderr) = check("payload-off-com.toml");
    assert_eq!(code, 2, "{stderr}");
    assert!(stdout.is_empty());
    for part in ["vehicle.com_m", "payload nodes", "\"N1\", \"N2\", \"N3\""] {
        assert!(stderr.contains(part), "'{part}' in {stderr}");
    }
    assert_eq!(stderr.lines().count(), 1, "{stderr}");
}
