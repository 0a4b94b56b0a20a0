//! `cage margin` run as the real binary on the demo (invented data): the
//! JSON contract, agreement with `impact --dry-run` at the margin speed,
//! a fray and a replacement recorded with `log`, a grounded cage, and the
//! margin section of the Markdown report.

use std::process::{Command, Output};

fn cagehand(data: &std::path::Path, args: &[&str]) -> Output {
    Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args(args)
        .arg("--data")
        .arg(data)
        .env("CAGEHAND_OPERATOR", "tester")
        .output()
        .expect("binary runs")
}

fn ok(out: &Output) -> String {
    assert!(
        out.status.success(),
        "stderr: {}",
        String::from_utf8_lossy(&out.stderr)
    );
    String::from_utf8_lossy(&out.stdout).into_owned()
}

fn json(out: &Output) -> serde_json::Value {
    serde_json::from_str(&ok(out)).expect("valid JSON")
}

fn margin(data: &std::path::Path) -> serde_json::Value {
    json(&cagehand(data, &["cage", "margin", "--json"]))
}

fn speed_of(v: &serde_json::Value, face: &str) -> f64 {
    v["faces"]
        .as_array()
        .unwrap()
        .iter()
        .find(|f| f["face"] == face)
        .unwrap()["speed_m_per_s"]
        .as_f64()
        .unwrap()
}

/// Largest utilisation and its member from `impact --dry-run --json`.
fn impact_worst(data: &std::path::Path, face: &str, speed: f64) -> (String, f64) {
    let v = json(&cagehand(
        data,
        &[
            "impact",
            "--face",
            face,
            "--speed",
            &format!("{speed}"),
            "--surface",
            "packed_soil",
            "--dry-run",
            "--json",
        ],
    ));
    v["members"]
        .as_array()
        .unwrap()
        .iter()
        .map(|m| {
            (
                m["id"].as_str().unwrap().to_string(),
                m["utilisation"].as_f64().unwrap(),
            )
        })
        .fold((String::new(), 0.0), |b, m| if m.1 > b.1 { m } else { b })
}

#[test]
fn margin_contract_agrees_with_impact_and_follows_the_log() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path();
    let v = margin(data);
    assert_eq!(v["schema"], "cagehand.margin/1");
    assert_eq!(v["surface"], "packed_soil");
    assert_eq!(v["grounded"], false);
    assert_eq!(v["grounded_by"], serde_json::json!([]));
    let faces = v["faces"].as_array().unwrap();
    assert_eq!(faces.len(), 20);
    for f in faces {
        let keys: Vec<&String> = f.as_object().unwrap().keys().collect();
        assert_eq!(keys, ["face", "first_member", "peak_g", "speed_m_per_s"]);
        assert!(f["speed_m_per_s"].as_f64().unwrap() > 0.0);
    }
    let weakest = v["weakest"]["face"].as_str().unwrap().to_string();
    let w_speed = v["weakest"]["speed_m_per_s"].as_f64().unwrap();
    assert!(
        faces
            .iter()
            .all(|f| f["speed_m_per_s"].as_f64().unwrap() >= w_speed)
    );
    let first = faces
        .iter()
        .find(|f| f["face"] == weakest.as_str())
        .unwrap()["first_member"]
        .as_str()
        .unwrap()
        .to_string();

    // At the margin speed the impact analysis loads the first member to its
    // capacity (within 0.5%); 1% slower, every member stays below it.
    let (who, u) = impact_worst(data, &weakest, w_speed);
    assert!((u - 1.0).abs() < 5e-3, "utilisation {u}");
    assert_eq!(who, first);
    let (_, u) = impact_worst(data, &weakest, 0.99 * w_speed);
    assert!(u < 1.0, "utilisation {u} at 0.99 v");

    // A fray on that member lowers the weakest face; no face rises.
    ok(&cagehand(data, &["log", "finding", &first, "fray"]));
    let frayed = margin(data);
    assert_eq!(frayed["grounded"], false);
    assert!(speed_of(&frayed, &weakest) < 0.9 * w_speed);
    for f in faces {
        let id = f["face"].as_str().unwrap();
        assert!(speed_of(&frayed, id) <= f["speed_m_per_s"].as_f64().unwrap() * (1.0 + 1e-9));
    }
    // The readable table names the derating and carries the caution.
    let text = ok(&cagehand(data, &["cage", "margin"]));
    assert!(
        text.contains(&format!("{first} counted at 50% of its capacity")),
        "{text}"
    );
    assert!(text.contains("CAUTION: estimates from a model"), "{text}");
    assert!(text.contains("Inspect the cage physically"), "{text}");

    // A replacement restores the undamaged figures exactly.
    ok(&cagehand(data, &["log", "replace", &first]));
    assert_eq!(margin(data), v);

    // A cut is REPLACE NOW: grounded, every speed 0.
    ok(&cagehand(data, &["log", "finding", "S2", "cut"]));
    let g = margin(data);
    assert_eq!(g["grounded"], true);
    assert_eq!(g["grounded_by"], serde_json::json!(["S2"]));
    for f in g["faces"].as_array().unwrap() {
        assert_eq!(f["speed_m_per_s"].as_f64(), Some(0.0));
    }
    assert_eq!(g["weakest"]["speed_m_per_s"].as_f64(), Some(0.0));
    let md = ok(&cagehand(data, &["log", "export", "--format", "md"]));
    assert!(md.contains("## Remaining margin"), "{md}");
    assert!(md.contains("**GROUNDED**: S2"), "{md}");
    assert!(md.contains("| F1 | 0.00 | 0 | S2 |"), "{md}");
}

#[test]
fn an_unknown_surface_is_bad_input() {
    let dir = tempfile::tempdir().unwrap();
    let out = cagehand(dir.path(), &["cage", "margin", "--surface", "ice"]);
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("ice") && err.contains("packed_soil"), "{err}");
}
