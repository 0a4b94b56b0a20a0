//! The `impact` and `cage` commands run as the real binary: the JSON
//! contract, the estimate methods, and the exit codes for bad input.

use cagehand::profile::Profile;
use std::process::{Command, Output};

/// The built-in demo profile the commands use when none is given.
fn demo() -> Profile {
    Profile::demo().expect("demo profile")
}

fn cagehand(args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args(args)
        .output()
        .expect("binary runs")
}

fn json(out: &Output) -> serde_json::Value {
    assert!(
        out.status.success(),
        "stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    serde_json::from_slice(&out.stdout).expect("valid JSON")
}

fn stderr(out: &Output) -> String {
    String::from_utf8_lossy(&out.stderr).into_owned()
}

#[test]
fn peak_acceleration_gives_f_equals_m_a() {
    let v = json(&cagehand(&[
        "impact",
        "--face",
        "F1",
        "--peak-accel-g",
        "10",
        "--dry-run",
        "--json",
    ]));
    // F = m a with the demo's mass and standard gravity 9.80665 m/s^2.
    let f = v["force_n"].as_f64().unwrap();
    assert!((f - demo().vehicle.mass_kg * 10.0 * 9.80665).abs() < 1e-9);
    assert_eq!(v["method"], "measured_acceleration");
    assert!(v["residual_n"].as_f64().unwrap() < 1e-6 * f);
    assert!(v["face_displacement_m"].as_f64().unwrap() > 0.0);
    assert!(v["slack_strings"].is_array());
    let members = v["members"].as_array().unwrap();
    assert_eq!(members.len(), 30);
    for m in members {
        assert!(m["id"].is_string() && m["kind"].is_string());
        assert!(m["force_n"].is_f64() && m["utilisation"].as_f64().unwrap() >= 0.0);
    }
}

#[test]
fn speed_uses_the_energy_balance_and_a_duration_the_half_sine() {
    let v = json(&cagehand(&[
        "impact",
        "--face",
        "F2",
        "--speed",
        "3",
        "--surface",
        "grass",
        "--dry-run",
        "--json",
    ]));
    assert_eq!(v["method"], "energy_balance");
    let f = v["force_n"].as_f64().unwrap();
    // Below the surface-only bound v sqrt(m k) (Goldsmith 1960).
    let p = demo();
    let grass = p
        .impact
        .surfaces
        .iter()
        .find(|s| s.name == "grass")
        .unwrap();
    assert!(f > 0.0 && f < 3.0 * (p.vehicle.mass_kg * grass.stiffness_n_per_m).sqrt());

    let v = json(&cagehand(&[
        "impact",
        "--face",
        "F2",
        "--speed",
        "3",
        "--contact-duration-s",
        "0.01",
        "--dry-run",
        "--json",
    ]));
    assert_eq!(v["method"], "half_sine_pulse");
    // Goldsmith 1960; Stronge 2000: pi/2 m (1 + e) v / dt.
    let expect =
        std::f64::consts::FRAC_PI_2 * p.vehicle.mass_kg * (1.0 + p.impact.restitution) * 3.0 / 0.01;
    assert!((v["force_n"].as_f64().unwrap() - expect).abs() < 1e-9);
}

#[test]
fn a_node_strike_is_analysed() {
    let v = json(&cagehand(&[
        "impact",
        "--node",
        "N3",
        "--peak-accel-g",
        "20",
        "--dry-run",
        "--json",
    ]));
    assert_eq!(v["strike"], "N3");
    assert!(v["residual_n"].as_f64().unwrap() < 1e-6 * v["force_n"].as_f64().unwrap());
}

#[test]
fn readable_report_lists_worst_members_and_a_caution() {
    let out = cagehand(&["impact", "--face", "F1", "--speed", "3", "--dry-run"]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.contains("energy balance"));
    assert!(text.contains("Caution: these are estimates, not guarantees"));
    assert!(text.contains("Inspect the cage physically"));
    // Worst first: the first table row has the largest use.
    let uses: Vec<f64> = text
        .lines()
        .filter_map(|l| l.split_whitespace().nth(4)?.strip_suffix('%')?.parse().ok())
        .collect();
    assert!(uses.len() >= 2 && uses.windows(2).all(|w| w[0] >= w[1]));
}

#[test]
fn without_dry_run_the_impact_is_recorded_in_the_cage_log() {
    // (The cage log arrived: recording is no longer refused.)
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().to_str().unwrap();
    let out = cagehand(&[
        "impact",
        "--face",
        "F1",
        "--speed",
        "3",
        "--data",
        data,
        "--operator",
        "t",
    ]);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(String::from_utf8_lossy(&out.stdout).contains("recorded as #1"));
    assert!(dir.path().join("kestrel-demo.cagelog").exists());
}

#[test]
fn bad_ids_and_surfaces_list_the_valid_values() {
    let out = cagehand(&["impact", "--face", "F21", "--speed", "3", "--dry-run"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("F1..F20"), "{}", stderr(&out)); // six-strut cage: 20 faces

    let out = cagehand(&["impact", "--node", "N99", "--speed", "3", "--dry-run"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("N1, N2"), "{}", stderr(&out));

    let out = cagehand(&[
        "impact",
        "--face",
        "F1",
        "--speed",
        "3",
        "--surface",
        "ice",
        "--dry-run",
    ]);
    assert_eq!(out.status.code(), Some(2));
    assert!(stderr(&out).contains("packed_soil"), "{}", stderr(&out));

    let out = cagehand(&["impact", "--face", "F1", "--speed", "-3", "--dry-run"]);
    assert_eq!(out.status.code(), Some(2), "{}", stderr(&out));

    let out = cagehand(&["impact", "--face", "F1", "--dry-run"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn cage_json_reports_self_stress_and_prestress() {
    let v = json(&cagehand(&["cage", "--json"]));
    let ss = &v["self_stress"];
    // Pellegrino & Calladine 1986: rank 29, one self-stress, one mechanism.
    assert_eq!(ss["rank"], 29);
    assert_eq!(ss["states"], 1);
    assert_eq!(ss["mechanisms"], 1);
    assert_eq!(ss["prestress_ok"], true);
    let pre = demo().string.pretension_n;
    for m in v["members"].as_array().unwrap() {
        let t = m["prestress_n"].as_f64().unwrap();
        match m["kind"].as_str().unwrap() {
            // Strings at the pretension; rods -sqrt(6) times it (Tibert &
            // Pellegrino 2003).
            "string" => assert!((t - pre).abs() < 1e-9),
            _ => assert!((t + pre * 6f64.sqrt()).abs() < 1e-9),
        }
    }
}

#[test]
fn a_cage_with_no_self_stress_is_reported_plainly() {
    let v = json(&cagehand(&[
        "cage",
        "--profile",
        "tests/fixtures/profiles/no-self-stress.toml",
        "--json",
    ]));
    assert_eq!(v["self_stress"]["states"], 0);
    assert_eq!(v["self_stress"]["prestress_ok"], false);
    assert!(
        v["self_stress"]["message"]
            .as_str()
            .unwrap()
            .contains("No self-stress")
    );
    let out = cagehand(&[
        "impact",
        "--profile",
        "tests/fixtures/profiles/no-self-stress.toml",
        "--face",
        "F1",
        "--peak-accel-g",
        "10",
        "--dry-run",
    ]);
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(out.status.success(), "{}", stderr(&out));
    assert!(text.contains("No self-stress"), "{text}");
}
