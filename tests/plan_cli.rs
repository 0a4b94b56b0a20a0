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
    assert_eq!(v["schema"], "cagehand.cage/1");
    let rotor_count = 4; // the demo profile's [[rotor]] tables
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
        if m["feasible"] == true {
            check_rotors(&m["rotors"], rotor_count);
            if let Some(sched) = m.get("rotor_schedule") {
                for e in sched.as_array().unwrap() {
                    assert!(e["from_deg"].as_f64().unwrap() >= 0.0);
                    check_rotors(&e["rotors"], rotor_count);
                }
            }
        } else {
            assert!(m.get("rotors").is_none(), "{m}");
        }
        if m["thrust_fraction"].is_null() {
            assert_eq!(m["feasible"], false);
        }
    }
    assert_eq!(kinds.len(), 2, "the demo plans vertex pivots too");
    assert!(moves.iter().any(|m| m["feasible"] == true));
    assert!(moves.iter().any(|m| m["feasible"] == false));
}

/// `rotors`: every rotor, 1-based in profile order, share = thrust over
/// the limit in its direction (the demo: 3 N forward, 1.5 N reversed).
fn check_rotors(r: &Value, count: usize) {
    let list = r.as_array().expect("rotors is a list");
    assert_eq!(list.len(), count);
    for (k, x) in list.iter().enumerate() {
        assert_eq!(x["rotor"].as_u64().unwrap() as usize, k + 1);
        let t = x["thrust_n"].as_f64().unwrap();
        let share = x["share"].as_f64().unwrap();
        assert!((-1.5 - 1e-6..=3.0 + 1e-6).contains(&t), "{t}");
        let want = if t >= 0.0 { t / 3.0 } else { t / 1.5 };
        assert!((share - want).abs() < 1e-9, "{share} vs {want}");
    }
}

#[test]
fn cage_json_gives_node_positions_in_both_frames() {
    let v = json(&["cage", "--json"]);
    let nodes = v["nodes"].as_array().unwrap();
    let pos = |id: &str, key: &str| -> [f64; 3] {
        let n = nodes.iter().find(|n| n["id"] == id).unwrap();
        let a = n[key].as_array().unwrap();
        [
            a[0].as_f64().unwrap(),
            a[1].as_f64().unwrap(),
            a[2].as_f64().unwrap(),
        ]
    };
    let dot = |a: [f64; 3], b: [f64; 3]| a[0] * b[0] + a[1] * b[1] + a[2] * b[2];
    for f in v["faces"].as_array().unwrap() {
        // The face normal is in the body frame: every node of the face has
        // the same body-frame offset along it (a plane), and the mount is a
        // rotation, so lengths agree between the frames.
        let n: Vec<f64> = f["normal"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_f64().unwrap())
            .collect();
        let n = [n[0], n[1], n[2]];
        let ids: Vec<&str> = f["nodes"]
            .as_array()
            .unwrap()
            .iter()
            .map(|x| x.as_str().unwrap())
            .collect();
        let d0 = dot(pos(ids[0], "pos_body_m"), n);
        for id in &ids {
            assert!((dot(pos(id, "pos_body_m"), n) - d0).abs() < 1e-9);
            let (a, b) = (pos(id, "pos_m"), pos(id, "pos_body_m"));
            assert!((dot(a, a) - dot(b, b)).abs() < 1e-9);
        }
    }
}

#[test]
fn plan_from_a_face_json() {
    let v = json(&["plan", "--profile", DEMO, "--from", "F9", "--json"]);
    assert_eq!(v["schema"], "cagehand.plan/1");
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
        assert_eq!(s["start_rpy_deg"].as_array().unwrap().len(), 3);
        assert!(s["tips"].as_str().unwrap().contains("nose"));
        check_rotors(&s["rotors"], 4);
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
    assert_eq!(v["schema"], "cagehand.plan/1");
    let plans = v["faces"].as_array().unwrap();
    assert_eq!(plans.len(), 20);
    assert!(plans.iter().all(|p| p["reachable"] == true));
    for p in plans {
        assert!(
            p.get("schema").is_none(),
            "the schema is named once, at the top"
        );
        for s in p["steps"].as_array().unwrap() {
            check_rotors(&s["rotors"], 4);
        }
    }
    let f = json(&["plan", "--profile", FWD, "--all", "--json"]);
    let stuck: Vec<&Value> = f["faces"]
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

#[test]
fn recovery_sheet_in_markdown_fits_80_columns() {
    for args in [
        &["plan", "--all", "--format", "md"][..],
        &["plan", "--from", "F10", "--format", "md"],
        &["plan", "--all", "--format", "md", "--profile", FWD],
    ] {
        let (code, out, err) = run(args);
        assert_eq!(code, 0, "{err}");
        assert!(out.starts_with("# Recovery sheet"));
        assert!(out.contains("CAUTION"));
        assert!(out.lines().all(|l| l.chars().count() <= 80), "{out}");
    }
    let (_, out, _) = run(&["plan", "--from", "F10", "--format", "md"]);
    for must in [
        "### Step 1",
        "Rotors: #1",
        "Where: tips toward",
        "Expect: on F1",
    ] {
        assert!(out.contains(must), "{must} missing:\n{out}");
    }
    // The readable table carries the rotor commands too.
    let (_, out, _) = run(&["plan", "--from", "F10"]);
    assert!(out.contains("rotors: #1"));
}

#[test]
fn node_tags_from_the_profile_are_shown() {
    let v = json(&[
        "cage",
        "--json",
        "--profile",
        "tests/fixtures/profiles/valid-prism.toml",
    ]);
    let n1 = &v["nodes"][0];
    assert_eq!(n1["id"], "N1");
    assert_eq!(n1["tag"], "yellow cap");
    assert!(v["nodes"][1]["tag"].is_null());
}

/// `plan` works out the map while the statics are checked (on another
/// core), but a profile the prestress check refuses is still refused: exit
/// 2, the reason on stderr, and no plan on stdout (fail safe; the same
/// refusal as `profile check`).
#[test]
fn a_profile_the_prestress_check_refuses_gets_no_plan() {
    let text = std::fs::read_to_string(DEMO).expect("demo profile");
    assert!(text.contains("pretension_n = 20.0"));
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("overtight.toml");
    std::fs::write(
        &path,
        text.replace("pretension_n = 20.0", "pretension_n = 5000.0"),
    )
    .expect("write");
    let p = path.to_str().expect("utf-8 path");
    for args in [
        &["plan", "--all", "--profile", p][..],
        &["plan", "--from", "F3", "--profile", p],
    ] {
        let (code, out, err) = run(args);
        assert_eq!(code, 2, "{args:?}: {err}");
        assert!(out.is_empty(), "{args:?}: {out}");
        assert!(
            err.contains("pretension") || err.contains("prestress"),
            "{err}"
        );
    }
    let (code, _, check) = run(&["profile", "check", p]);
    assert_eq!(code, 2);
    assert!(
        check.contains("pretension") || check.contains("prestress"),
        "{check}"
    );
}
