//! The `plan` command and the `moves` of `cage --json`, run as the real
//! binary: the JSON contract, the readable table, and exit codes.

use serde_json::Value;
use std::process::Command;

fn run(args: &[&str]) -> (i32, String, String) {
    let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args(args)
        .output()
        .expect("binary runs");
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

fn json(args: &[&str]) -> Value {
    let (code, out, err) = run(args);
    assert_eq!(code, 0, "{err}");
    serde_json::from_str(&out).expect("valid JSON")
}

const FWD: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/profiles/demo-forward-only.toml"
);
const DEMO: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/profiles/demo.toml");

#[test]
fn cage_json_lists_moves() {
    let v = json(&["cage", "--json"]);
    let moves = v["moves"].as_array().unwrap();
    assert!(!moves.is_empty());
    let mut kinds = std::collections::BTreeSet::new();
    for m in moves {
        for k in [
            "from",
            "to",
            "kind",
            "pivot",
            "angle_deg",
            "feasible",
            "thrust_fraction",
            "settles_on",
        ] {
            assert!(m.get(k).is_some(), "{k} missing in {m}");
        }
        let kind = m["kind"].as_str().unwrap();
        let pivots = m["pivot"].as_array().unwrap().len();
        assert_eq!(pivots, if kind == "edge" { 2 } else { 1 });
        kinds.insert(kind.to_string());
    }
    assert_eq!(kinds.len(), 2, "the demo plans vertex pivots too");
    assert!(moves.iter().any(|m| m["feasible"] == true));
    assert!(moves.iter().any(|m| m["feasible"] == false));
}

#[test]
fn plan_from_a_face_json() {
    let v = json(&["plan", "--profile", DEMO, "--from", "F9", "--json"]);
    assert_eq!(v["from"], "F9");
    assert_eq!(v["goal"], "F1");
    assert_eq!(v["reachable"], true);
    let steps = v["steps"].as_array().unwrap();
    assert!(!steps.is_empty());
    assert_eq!(steps[0]["from"], "F9");
    assert_eq!(steps.last().unwrap()["to"], "F1");
    let total: f64 = steps.iter().map(|s| s["angle_deg"].as_f64().unwrap()).sum();
    assert!(total <= v["total_angle_deg"].as_f64().unwrap() + 1e-9);
    for s in steps {
        assert_eq!(s["target_rpy_deg"].as_array().unwrap().len(), 3);
        let f = s["thrust_fraction"].as_f64().unwrap();
        assert!(f > 0.0 && f < 1.0);
    }
    // Consecutive steps chain.
    for w in steps.windows(2) {
        assert_eq!(w[0]["to"], w[1]["from"]);
    }
}

#[test]
fn plan_from_an_attitude_accepts_negative_angles() {
    let v = json(&["plan", "--attitude", "-150,20,35", "--json"]);
    assert!(v["from"].as_str().unwrap().starts_with('F'));
    assert!(v.get("reachable").is_some());
}

#[test]
fn recovery_map_has_one_plan_per_face() {
    let v = json(&["plan", "--profile", DEMO, "--all", "--json"]);
    let plans = v.as_array().unwrap();
    assert_eq!(plans.len(), 20);
    assert!(plans.iter().all(|p| p["reachable"] == true));
    let f = json(&["plan", "--profile", FWD, "--all", "--json"]);
    let stuck: Vec<&Value> = f
        .as_array()
        .unwrap()
        .iter()
        .filter(|p| p["reachable"] == false)
        .collect();
    assert!(stuck.len() > 10);
    for p in stuck {
        assert!(p["reason"].as_str().unwrap().contains("missing move"));
    }
}

#[test]
fn readable_plan_has_the_table_and_the_caution() {
    let (code, out, _) = run(&["plan", "--from", "F9"]);
    assert_eq!(code, 0);
    assert!(out.contains("F9 -> F1"));
    assert!(out.contains("pivot"));
    assert!(out.contains("CAUTION"));
    assert!(out.contains("propellers"));
    assert!(out.contains("aviation rules"));
    // Short enough for a phone photo: under 80 columns.
    assert!(out.lines().all(|l| l.len() < 80));
}

#[test]
fn bad_face_or_attitude_exit_2() {
    for args in [
        &["plan", "--from", "F99"][..],
        &["plan", "--from", "top"],
        &["plan", "--attitude", "1,2"],
        &["plan", "--attitude", "a,b,c"],
        &["plan", "--attitude", "0,95,0"],
        &["plan"],
    ] {
        let (code, _, err) = run(args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(!err.is_empty());
    }
}

#[test]
fn no_route_reasons_are_wrapped_for_a_phone_photo() {
    // The forward-only demo cannot right itself from most faces; each reason
    // is a long sentence that must still fit in under 80 columns.
    let (code, out, _) = run(&[
        "plan",
        "--all",
        "--profile",
        "profiles/demo-forward-only.toml",
    ]);
    assert_eq!(code, 0);
    assert!(out.contains("NO ROUTE"));
    assert!(out.contains("missing move"));
    assert!(out.lines().all(|l| l.chars().count() < 80), "{out}");
}
