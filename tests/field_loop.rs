//! The field loop through the real binary: the simulated crash detected by
//! the headless watch and written to the log, then confirmed or dismissed,
//! and the pre-flight that cannot be signed over it. The demo vehicle and
//! its crash are an invented scenario (src/sim.rs).

use serde_json::Value;
use std::path::Path;
use std::process::Output;

mod common;
use common::{cmd, ok};

fn json(o: &Output) -> Value {
    serde_json::from_str(&ok(o)).unwrap()
}

fn log_bytes(data: &Path) -> Vec<u8> {
    std::fs::read(data.join("kestrel-demo.cagelog")).unwrap_or_default()
}

/// The demo's simulated flight and crash, as fast as it can go.
fn watch_crash(data: &Path, seed: u32) -> Vec<Value> {
    let spec = format!("sim:{seed}");
    let out = ok(&cmd(
        data,
        &[
            "watch",
            "--headless",
            "--link",
            &spec,
            "--replay-speed",
            "max",
            "--duration-s",
            "15",
        ],
    ));
    out.lines()
        .map(|l| serde_json::from_str(l).unwrap())
        .filter(|v: &Value| v.get("detection").is_some())
        .collect()
}

fn records(data: &Path) -> Vec<Value> {
    let show = json(&cmd(data, &["log", "show", "--json"]));
    show["records"].as_array().unwrap().clone()
}

#[test]
fn headless_watch_writes_the_simulated_crash_once_even_when_replayed() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let dets = watch_crash(d, 1);
    assert_eq!(dets.len(), 1, "{dets:?}");
    let det = &dets[0]["detection"];
    // The simulator's spike peaks near 8 g (src/sim.rs CRASH_SPIKE_G).
    let g = det["peak_g"].as_f64().unwrap();
    assert!((5.0..=8.5).contains(&g), "{g}");
    assert_eq!(det["logged_seq"], 1);
    assert!(det["face"].as_str().unwrap().starts_with('F'));
    // The sim link carries velocity: the speed before is known.
    assert!(det["speed_m_per_s"].as_f64().is_some());
    let recs = records(d);
    assert_eq!(recs.len(), 1);
    assert_eq!(recs[0]["event"], "detection");
    assert_eq!(recs[0]["face"], det["face"]);
    assert_eq!(recs[0]["source"], "sim:1");
    // The same run again is the same detection: no second record.
    let again = watch_crash(d, 1);
    assert_eq!(again[0]["detection"]["logged_seq"], 1);
    assert_eq!(again[0]["detection"]["new_record"], false);
    assert_eq!(records(d).len(), 1);
}

#[test]
fn pending_confirm_dismiss_round_trip() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    watch_crash(d, 1);
    watch_crash(d, 2);
    // The contract: an array of {seq, time, peak_g, face,
    // speed_m_per_s, source}.
    let pending = json(&cmd(d, &["log", "pending", "--json"]));
    let p = pending.as_array().unwrap();
    assert_eq!(p.len(), 2);
    for key in ["seq", "time", "peak_g", "face", "speed_m_per_s", "source"] {
        assert!(p[0].get(key).is_some(), "{key} missing: {}", p[0]);
    }
    assert_eq!(p[0].as_object().unwrap().len(), 6);
    // Health says it before the table.
    let h = ok(&cmd(d, &["log", "health"]));
    let pend = h.find("PENDING").expect("pending in health");
    assert!(pend < h.find("member  kind").unwrap());
    // Confirm the first with the detection's face and input.
    let c = json(&cmd(d, &["log", "confirm", "1", "--json"]));
    assert_eq!(c["detection"], 1);
    assert_eq!(c["record_seq"], 3);
    assert_eq!(c["strike"], p[0]["face"]);
    // Dismiss the second.
    let o = cmd(d, &["log", "dismiss", "2", "--reason", "hand launch"]);
    assert!(ok(&o).contains("kestrel-demo"));
    assert!(
        json(&cmd(d, &["log", "pending", "--json"]))
            .as_array()
            .unwrap()
            .is_empty()
    );
    let recs = records(d);
    let kinds: Vec<&str> = recs.iter().map(|r| r["event"].as_str().unwrap()).collect();
    assert_eq!(kinds, ["detection", "detection", "impact", "dismissal"]);
    assert_eq!(recs[2]["detection"], 1);
    assert_eq!(recs[2]["source"], "detected");
    assert_eq!(recs[3]["detection"], 2);
    assert_eq!(recs[3]["reason"], "hand launch");
    // Twice is refused, and nothing is written.
    let before = log_bytes(d);
    for args in [
        &["log", "confirm", "1"][..],
        &["log", "dismiss", "1", "--reason", "x"],
        &["log", "dismiss", "2", "--reason", "x"],
        &["log", "confirm", "3"],
        &["log", "dismiss", "99", "--reason", "x"],
    ] {
        let o = cmd(d, args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
    }
    // A number that names no record says so, with the numbers there are;
    // a record of another kind is named by its kind.
    let err = |args: &[&str]| String::from_utf8_lossy(&cmd(d, args).stderr).to_string();
    let e = err(&["log", "confirm", "99"]);
    assert!(
        e.contains("there is no record #99: the log holds #1 to #4"),
        "{e}"
    );
    let e = err(&["log", "confirm", "3"]);
    assert!(
        e.contains("record #3 is not a detection: its kind is `impact`"),
        "{e}"
    );
    assert_eq!(log_bytes(d), before);
}

#[test]
fn a_confirmed_detection_loads_the_members_as_the_impact_command_does() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    watch_crash(d, 3);
    let c = json(&cmd(
        d,
        &[
            "log",
            "confirm",
            "1",
            "--face",
            "F2",
            "--peak-accel-g",
            "7.5",
            "--json",
        ],
    ));
    let i = json(&cmd(
        d,
        &[
            "impact",
            "--face",
            "F2",
            "--peak-accel-g",
            "7.5",
            "--dry-run",
            "--json",
        ],
    ));
    assert_eq!(c["members"], i["members"]);
    assert_eq!(c["force_n"], i["force_n"]);
    // With a speed and a surface too.
    watch_crash(d, 4);
    let pending = json(&cmd(d, &["log", "pending", "--json"]));
    let seq = pending[0]["seq"].as_u64().unwrap().to_string();
    let c = json(&cmd(
        d,
        &[
            "log",
            "confirm",
            &seq,
            "--node",
            "N3",
            "--speed",
            "2.0",
            "--surface",
            "grass",
            "--json",
        ],
    ));
    let i = json(&cmd(
        d,
        &[
            "impact",
            "--node",
            "N3",
            "--speed",
            "2.0",
            "--surface",
            "grass",
            "--dry-run",
            "--json",
        ],
    ));
    assert_eq!(c["members"], i["members"]);
}

/// `log confirm` with neither a peak nor a speed analyses the detection
/// from the input the screens' form is filled with (the approach speed the
/// link carried, else the peak), so the two never record different forces
/// for one crash: the same members and force as `impact --speed` with that
/// speed.
#[test]
fn a_confirmation_without_inputs_uses_the_speed_the_link_carried() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    watch_crash(d, 1);
    let det = &records(d)[0];
    assert_eq!(det["event"], "detection");
    let normal = det["normal_speed_m_per_s"].as_f64();
    let speed = normal
        .map(|v| v.max(0.0))
        .or(det["speed_m_per_s"].as_f64())
        .filter(|v| *v > 0.0)
        .expect("the simulated crash carries its approach speed");
    let c = json(&cmd(d, &["log", "confirm", "1", "--json"]));
    assert_eq!(c["method"], "energy_balance", "{c}");
    let face = c["strike"].as_str().unwrap().to_string();
    let i = json(&cmd(
        d,
        &[
            "impact",
            "--face",
            &face,
            "--speed",
            &format!("{speed}"),
            "--dry-run",
            "--json",
        ],
    ));
    assert_eq!(c["members"], i["members"]);
    assert_eq!(c["force_n"], i["force_n"]);
}

fn item<'a>(eval: &'a Value, text_part: &str) -> &'a Value {
    eval["items"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["text"].as_str().unwrap().contains(text_part))
        .unwrap()
}

/// A cut member is at REPLACE NOW: the cage is grounded, and no override
/// reason signs the pre-flight until the member is replaced (this
/// project's own rule, common practice, no published source).
#[test]
fn preflight_cannot_be_signed_over_a_member_at_replace_now() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["log", "finding", "R6", "cut"]));
    let e = json(&cmd(d, &["preflight", "--json"]));
    let cage = item(&e, "Cage log");
    assert_eq!(cage["result"], "fail");
    assert!(cage["detail"].as_str().unwrap().contains("R6 REPLACE NOW"));
    let before = log_bytes(d);
    let mut args = vec!["preflight", "sign", "--tick", "all"];
    for k in ["1", "2", "3", "4"] {
        args.extend(["--override", k, "--reason", "x"]);
    }
    let o = cmd(d, &args);
    assert_eq!(o.status.code(), Some(1));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("R6 REPLACE NOW") && err.contains("cannot be overridden"),
        "{err}"
    );
    assert_eq!(log_bytes(d), before);
    // Replaced: the same overrides (for the waiting live items) sign.
    ok(&cmd(d, &["log", "replace", "R6", "--part", "rod lot 7"]));
    let mut args = vec!["preflight", "sign", "--tick", "all"];
    for k in ["2", "3", "4"] {
        args.extend(["--override", k, "--reason", "on the bench"]);
    }
    assert_eq!(ok(&cmd(d, &args)).trim(), "3");
}

#[test]
fn preflight_cannot_be_signed_over_a_pending_crash() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    watch_crash(d, 1);
    let e = json(&cmd(d, &["preflight", "--json"]));
    assert_eq!(e["schema"], "cagehand.preflight/1");
    assert_eq!(e["vehicle"], "kestrel-demo");
    assert_eq!(e["can_sign"], false);
    let cage = item(&e, "Cage log");
    assert_eq!(cage["kind"], "auto");
    assert_eq!(cage["result"], "fail");
    assert!(cage["detail"].as_str().unwrap().contains("#1"));
    // No link: the live items wait.
    assert_eq!(item(&e, "take-off face")["result"], "waiting");
    let n = cage["n"].as_u64().unwrap().to_string();
    let before = log_bytes(d);
    // Refused even with every override: exit 1, the reasons, nothing written.
    let mut args = vec!["preflight", "sign", "--tick", "all"];
    for k in [n.as_str(), "2", "3", "4"] {
        args.extend(["--override", k, "--reason", "looked fine"]);
    }
    let o = cmd(d, &args);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("cannot be overridden"));
    assert_eq!(log_bytes(d), before);
    // Dismissed: now the waiting live items are what blocks.
    ok(&cmd(d, &["log", "dismiss", "1", "--reason", "bench drop"]));
    let before = log_bytes(d);
    let o = cmd(d, &["preflight", "sign", "--tick", "all"]);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("WAITING"));
    assert_eq!(log_bytes(d), before);
    // The waiting live items (no link), each overridden with a reason.
    const OVERRIDES: [&str; 12] = [
        "--override",
        "2",
        "--reason",
        "on the stand",
        "--override",
        "3",
        "--reason",
        "radio off",
        "--override",
        "4",
        "--reason",
        "fresh pack",
    ];
    // An unticked hand item refuses too.
    let mut args = vec!["preflight", "sign", "--tick", "5,6"];
    args.extend(OVERRIDES);
    let o = cmd(d, &args);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("7."));
    assert_eq!(log_bytes(d), before);
    // Every hand item ticked and every waiting item overridden: signed.
    let mut args = vec!["preflight", "sign", "--tick", "all", "--operator", "cy"];
    args.extend(OVERRIDES);
    let o = cmd(d, &args);
    assert_eq!(ok(&o).trim(), "3");
    let recs = records(d);
    let pf = &recs[2];
    assert_eq!(pf["event"], "preflight");
    assert_eq!(pf["operator"], "cy");
    assert_eq!(pf["signed_off"], true);
    let items = pf["items"].as_array().unwrap();
    assert_eq!(items[1]["override_reason"], "on the stand");
    assert_eq!(items[1]["result"], "waiting");
    assert_eq!(items[4]["ticked"], true);
    // The report shows the sign-off, with the overrides.
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(md.contains("Last sign-off: record #3 by cy"), "{md}");
    assert!(md.contains("OVERRIDDEN: on the stand"));
    let csv = ok(&cmd(d, &["log", "export", "--format", "csv"]));
    assert!(csv.contains("#3,preflight,signed_off"));
}

#[test]
fn a_pending_crash_is_loud_in_both_exports_and_an_unsigned_crash_is_named() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    watch_crash(d, 1);
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(md.contains("PENDING DETECTIONS"), "{md}");
    assert!(md.contains("No pre-flight sign-off since the latest crash (#1)"));
    let csv = ok(&cmd(d, &["log", "export", "--format", "csv"]));
    let second = csv.split("\r\n").nth(1).unwrap();
    assert!(second.starts_with("#1,detection,pending"), "{second}");
}

#[test]
fn preflight_listens_to_the_link_for_the_live_items() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // The simulated vehicle sits on its take-off face for its first
    // seconds (src/sim.rs), with a full battery.
    let e = json(&cmd(
        d,
        &["preflight", "--link", "sim", "--listen-s", "3", "--json"],
    ));
    assert_eq!(item(&e, "take-off face")["result"], "pass");
    assert_eq!(item(&e, "link fresh")["result"], "pass");
    assert_eq!(item(&e, "Battery")["result"], "pass");
    assert_eq!(e["can_sign"], true, "{e}");
    assert_eq!(e["blocking"].as_array().unwrap().len(), 0);
}
