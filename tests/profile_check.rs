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
        "found an unknown key `mass_lb`",
    ),
    (
        "wrong-type.toml",
        ":6:11:",
        "vehicle.mass_kg",
        "expected a number, found the text \"heavy\"",
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
    // A comment after a section header does not move the location.
    (
        "comment-after-header.toml",
        ":95:18:",
        "righting.takeoff_faces[1]",
        "expected a face of this cage (it has F1..F8), found F99",
    ),
    // Plausibility: the pretension alone must leave every member within
    // its capacity. The prism's rods (aluminium tube 6/4 mm, E 70 GPa,
    // 379.4 mm) buckle at pi^2 E I / L^2 = 245.0 N (Euler, pinned ends;
    // Roark's Formulas for Stress and Strain, Table 15.1); its one
    // self-stress state puts 1.614 times the largest string tension on
    // each rod (the `cage` command's own table), so 200 N loads the rods
    // to about 323 N.
    (
        "pretension-buckles-rods.toml",
        ":77:16:",
        "cage.string_section.pretension_n",
        "against a capacity of 245.0 N before any impact",
    ),
    (
        "pretension-breaks-strings.toml",
        ":77:16:",
        "cage.string_section.pretension_n",
        "expected a pretension below the strings' capacity of 292.5 N",
    ),
    (
        "huge-rotor-position.toml",
        ":88:22:",
        "rotor[2].position_m[2]",
        "expected a number from -100 to 100 m, found 1e30 m",
    ),
    (
        "huge-thrust.toml",
        ":89:16:",
        "rotor[2].max_thrust_n",
        "no larger than 100000 N (a plausible physical value), found 1e30 N",
    ),
    // A take-off face the vehicle cannot rest on, refused at its entry.
    (
        "takeoff-face-cannot-hold.toml",
        ":95:24:",
        "righting.takeoff_faces[2]",
        "F8, over which the centre of mass does not lie",
    ),
    // Rods whose centre lines pass closer than a rod diameter.
    (
        "rods-cross.toml",
        ":37:9:",
        "cage.rod[2].nodes",
        "rod N2-N5 crossing rod 1 (N1-N4)",
    ),
    (
        "duplicate-takeoff-face.toml",
        ":95:30:",
        "righting.takeoff_faces[3]",
        "expected each take-off face listed once, found F1 again",
    ),
    (
        "duplicate-payload-node.toml",
        ":12:48:",
        "cage.payload_nodes[6]",
        "expected each payload node listed once, found \"N1\" again",
    ),
    // A check on the built cage, located at the key that decides it. The
    // rods: 3 x 379.4 mm of tube 6/4 mm (area 15.71 mm^2) at 2700 kg/m^3
    // weigh 0.048 kg (hand computation).
    (
        "rods-too-heavy.toml",
        ":7:11:",
        "vehicle.mass_kg",
        "expected a mass above the rods' own 0.048 kg (by their section and density), found 0.04 kg",
    ),
    // serde's own phrasings ("missing field", "wanted string or table",
    // "did not match any variant") are ours now.
    (
        "missing-field.toml",
        ":4:1:",
        "vehicle.mass_kg",
        "expected a number, found no `mass_kg` in [vehicle]",
    ),
    (
        "takeoff-faces-number.toml",
        ":95:17:",
        "righting.takeoff_faces",
        "expected \"auto\" or a non-empty list of face ids such as [\"F1\", \"F2\"], found the whole number 5",
    ),
    (
        "check-number.toml",
        ":108:9:",
        "preflight.item[2].check",
        "expected a text in quotes, found the whole number 5",
    ),
    (
        "check-unknown.toml",
        ":108:9:",
        "preflight.item[2].check",
        "expected one of no_member_due, on_takeoff_face, link_fresh, battery, found \"on_any_face\"",
    ),
    (
        "section-not-table.toml",
        ":4:9:",
        "mount",
        "expected a table [mount], found the whole number 5",
    ),
    // The byte 0xb0 (Latin-1 degree sign) is the 39th character of line 6.
    (
        "not-utf8.toml",
        ":6:39:",
        "",
        "expected UTF-8 text, found the byte 0xb0",
    ),
    // The log's own rule (`profile::is_valid_vehicle_id`).
    (
        "bad-vehicle-id.toml",
        ":5:6:",
        "vehicle.id",
        "expected an id of 1 to 128 letters, digits, '.', '_' or '-', not starting with '.', found \".hidden\"",
    ),
    (
        "derate-out-of-range.toml",
        ":101:8:",
        "inspection.derate.fray",
        "expected a positive number no larger than 1",
    ),
    (
        "margin-speed-negative.toml",
        ":102:28:",
        "preflight.min_margin_speed_m_per_s",
        "expected a positive number, found -2 m/s",
    ),
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
