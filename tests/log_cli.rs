//! The `log` and `impact` commands as a crew uses them, with the real
//! binary on the bundled demo profile.

use std::path::Path;
use std::process::Command;

mod common;
use common::{BIN, cmd, ok};

/// The members of `log health --json` (cagehand.health/1, docs/json.md).
fn health(data: &Path) -> Vec<serde_json::Value> {
    let h: serde_json::Value =
        serde_json::from_str(&ok(&cmd(data, &["log", "health", "--json"]))).unwrap();
    assert_eq!(h["schema"], "cagehand.health/1");
    h["members"].as_array().unwrap().clone()
}

/// `log export --format FORMAT --out OUT` on the log in `data`.
fn export_to(data: &Path, format: &str, out: &Path) -> std::process::Output {
    let out = out.to_str().expect("a UTF-8 temporary path");
    cmd(data, &["log", "export", "--format", format, "--out", out])
}

fn member<'a>(h: &'a [serde_json::Value], id: &str) -> &'a serde_json::Value {
    h.iter().find(|m| m["id"] == id).unwrap()
}

#[test]
fn impact_is_recorded_and_health_follows_it() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = ok(&cmd(
        d,
        &[
            "impact",
            "--face",
            "F3",
            "--peak-accel-g",
            "40",
            "--note",
            "hard landing",
            "--json",
        ],
    ));
    let report: serde_json::Value = serde_json::from_str(&out).unwrap();
    assert_eq!(report["recorded"], true);
    assert_eq!(report["record_seq"], 1);
    assert!(report["status_changes"].is_array());
    // The stored record carries every member's load by id, and the note.
    let show: serde_json::Value =
        serde_json::from_str(&ok(&cmd(d, &["log", "show", "--json"]))).unwrap();
    let rec = &show["records"][0];
    assert_eq!(rec["event"], "impact");
    assert_eq!(rec["operator"], "ana");
    assert_eq!(rec["strike"]["face"], "F3");
    assert_eq!(rec["input"]["peak_accel"]["g"], 40.0);
    assert_eq!(rec["method"], "measured_acceleration");
    assert_eq!(rec["note"], "hard landing");
    assert_eq!(rec["members"].as_array().unwrap().len(), 30);
    // Health: the contract's fields, and the impact counted everywhere.
    let h = health(d);
    assert_eq!(h.len(), 30);
    for m in &h {
        for key in [
            "id",
            "kind",
            "status",
            "damage",
            "max_utilisation",
            "impacts",
            "reasons",
        ] {
            assert!(m.get(key).is_some(), "{key} missing in {m}");
        }
        assert_eq!(m["impacts"], 1);
        assert!(!m["reasons"].as_array().unwrap().is_empty());
    }
    // The stored utilisation is what health reports as the maximum.
    let stored_r1 = rec["members"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["member"] == "R1")
        .unwrap()["utilisation"]
        .as_f64()
        .unwrap();
    assert_eq!(
        member(&h, "R1")["max_utilisation"].as_f64().unwrap(),
        stored_r1.abs()
    );
    // A dry run records nothing.
    ok(&cmd(
        d,
        &["impact", "--face", "F3", "--speed", "2", "--dry-run"],
    ));
    let show: serde_json::Value =
        serde_json::from_str(&ok(&cmd(d, &["log", "show", "--json"]))).unwrap();
    assert_eq!(show["records"].as_array().unwrap().len(), 1);
}

#[test]
fn findings_replacement_and_status_changes() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = ok(&cmd(
        d,
        &[
            "log",
            "finding",
            "S4",
            "fray",
            "--note",
            "fuzzy near the knot",
        ],
    ));
    assert!(out.contains("S4: OK -> DUE"), "{out}");
    assert_eq!(member(&health(d), "S4")["status"], "due");
    let out = ok(&cmd(d, &["log", "finding", "S4", "ok"]));
    assert!(out.contains("no member changed status"), "{out}");
    let out = ok(&cmd(d, &["log", "replace", "S4", "--part", "HMPE lot 12"]));
    assert!(out.contains("S4: DUE -> OK"), "{out}");
    let h = health(d);
    assert_eq!(member(&h, "S4")["status"], "ok");
    let reasons = member(&h, "S4")["reasons"].to_string();
    assert!(reasons.contains("replaced with HMPE lot 12"), "{reasons}");
    let out = ok(&cmd(d, &["log", "finding", "S5", "loose-end"]));
    assert!(out.contains("S5: OK -> INSPECT"), "{out}");
    ok(&cmd(d, &["log", "note", "end of day"]));
    let show = ok(&cmd(d, &["log", "show"]));
    assert_eq!(show.lines().count(), 6, "{show}");
    assert!(show.contains("#5    ") && show.contains("end of day"));
}

#[test]
fn unknown_member_or_kind_is_bad_input_listing_valid_values() {
    let dir = tempfile::tempdir().unwrap();
    let o = cmd(dir.path(), &["log", "finding", "S99", "cut"]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(
        e.contains("valid members are R1, R2") && e.contains("S24"),
        "{e}"
    );
    let o = cmd(dir.path(), &["log", "finding", "S1", "bent"]);
    assert_eq!(o.status.code(), Some(2));
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("ok, fray, cut, crack, slack, loose_end"), "{e}");
    let o = cmd(dir.path(), &["log", "replace", "X1"]);
    assert_eq!(o.status.code(), Some(2));
    // A part given empty is a mistake, not a lot number.
    for part in ["", "   "] {
        let o = cmd(dir.path(), &["log", "replace", "S1", "--part", part]);
        assert_eq!(o.status.code(), Some(2), "{part:?}");
        let e = String::from_utf8_lossy(&o.stderr);
        assert!(e.contains("--part is empty"), "{e}");
    }
    // Nothing was written by any of them.
    assert!(!dir.path().join("kestrel-demo.cagelog").exists());
}

#[test]
fn flags_beat_the_environment() {
    let dir = tempfile::tempdir().unwrap();
    let other = tempfile::tempdir().unwrap();
    let o = Command::new(BIN)
        .args(["log", "note", "hello", "--operator", "bo", "--data"])
        .arg(other.path())
        .env("CAGEHAND_DATA", dir.path())
        .env("CAGEHAND_OPERATOR", "ana")
        .output()
        .unwrap();
    ok(&o);
    let text = std::fs::read_to_string(other.path().join("kestrel-demo.cagelog")).unwrap();
    assert!(text.starts_with("cagehand-logbook format=2 vehicle=kestrel-demo\n"));
    assert!(text.contains("\"operator\":\"bo\""));
    assert!(!dir.path().join("kestrel-demo.cagelog").exists());
    // No operator in a flag or the environment (not even $USER): the
    // operating system's account name for this user is recorded.
    let o = Command::new(BIN)
        .args(["log", "note", "hello", "--data"])
        .arg(dir.path())
        .env_remove("CAGEHAND_OPERATOR")
        .env_remove("USER")
        .env_remove("LOGNAME")
        .env_remove("USERNAME")
        .output()
        .unwrap();
    ok(&o);
    let text = std::fs::read_to_string(dir.path().join("kestrel-demo.cagelog")).unwrap();
    let last = text.lines().last().unwrap();
    assert!(last.contains("\"operator\":\""), "{last}");
    assert!(
        !last.contains("\"operator\":\"\""),
        "an empty operator: {last}"
    );
}

#[test]
fn health_is_the_same_every_time_and_exports_carry_it() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    for (face, g) in [("F1", "30"), ("F7", "55"), ("F3", "45")] {
        ok(&cmd(d, &["impact", "--face", face, "--peak-accel-g", g]));
    }
    ok(&cmd(d, &["log", "finding", "R2", "crack"]));
    let a = ok(&cmd(d, &["log", "health", "--json"]));
    let b = ok(&cmd(d, &["log", "health", "--json"]));
    assert_eq!(a, b);
    let md_path = d.join("report.md");
    ok(&export_to(d, "md", &md_path));
    let md = std::fs::read_to_string(&md_path).unwrap();
    assert!(md.contains("# Cage maintenance report: Kestrel trainer"));
    assert!(
        md.contains("- **R2 rod**: REPLACE NOW"),
        "a crack is replace now"
    );
    assert!(md.contains("must be inspected physically"));
    assert!(md.contains("| 4 |"));
    let csv = ok(&cmd(d, &["log", "export", "--format", "csv"]));
    assert!(csv.starts_with("id,kind,status,damage,max_utilisation,impacts,reasons\r\n"));
    // One row per member (the log's own rows, pre-flight gaps, follow).
    let member_rows = csv
        .lines()
        .filter(|l| l.contains(",rod,") || l.contains(",string,"))
        .count();
    assert_eq!(member_rows, 30);
    assert!(csv.contains("\r\n(log),chain_head,,,,,4:"));
    assert!(csv.contains("R2,rod,replace_now,"));
}

/// A log written by an earlier build (and one record by hand, with
/// Python's json and hashlib) must keep reading the same: the format is a
/// contract. The fixture is an invented demo log.
#[test]
fn committed_fixture_log_reads_the_same() {
    let dir = tempfile::tempdir().unwrap();
    let fixture =
        Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/fixtures/logbook/kestrel-demo.cagelog");
    std::fs::copy(&fixture, dir.path().join("kestrel-demo.cagelog")).unwrap();
    let o = cmd(dir.path(), &["log", "show", "--json"]);
    assert!(
        o.stderr.is_empty(),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let show: serde_json::Value = serde_json::from_str(&ok(&o)).unwrap();
    let recs = show["records"].as_array().unwrap();
    let events: Vec<&str> = recs.iter().map(|r| r["event"].as_str().unwrap()).collect();
    assert_eq!(
        events,
        [
            "note",
            "impact",
            "finding",
            "replacement",
            "finding",
            "preflight"
        ]
    );
    assert_eq!(recs[5]["items"][1]["result"], "skipped");
    let h = health(dir.path());
    // S4 was frayed, then replaced: ok again, and says so.
    assert_eq!(member(&h, "S4")["status"], "ok");
    assert!(
        member(&h, "S4")["reasons"]
            .to_string()
            .contains("replaced with HMPE lot 12")
    );
    // S5 was found slack: inspect.
    assert_eq!(member(&h, "S5")["status"], "inspect");
    // Damage of every other member is u^k of the one stored impact
    // (Miner 1945, one cycle at u on N(u) = u^-k; k from the demo profile:
    // 12 for rods, 6 for strings; nothing below the endurance level 0.2).
    for m in recs[1]["members"].as_array().unwrap() {
        let id = m["member"].as_str().unwrap();
        if id == "S4" {
            continue;
        }
        let u = m["utilisation"].as_f64().unwrap().abs();
        let k = if id.starts_with('R') { 12 } else { 6 };
        let expected = if u >= 0.2 { u.powi(k) } else { 0.0 };
        let got = member(&h, id)["damage"].as_f64().unwrap();
        assert!(
            (got - expected).abs() <= 1e-12 * expected.max(1.0),
            "{id}: {got} vs {expected}"
        );
    }
}

#[test]
fn a_missing_or_damaged_log_is_never_reported_as_a_healthy_cage() {
    // A mistyped --data must not read as "worst OK".
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(out.contains("NO RECORDS"), "{out}");
    assert!(out.contains("no cage log at"), "{out}");
    assert!(!out.contains("worst OK"), "{out}");
    // A damaged record in the middle: the health header says records were
    // skipped, and so does the printed report.
    for g in ["20", "25", "30"] {
        ok(&cmd(d, &["impact", "--face", "F2", "--peak-accel-g", g]));
    }
    let log = std::fs::read_dir(d)
        .unwrap()
        .filter_map(|e| e.ok().map(|e| e.path()))
        .find(|p| p.extension().is_some_and(|x| x == "cagelog"))
        .expect("a cage log");
    let text = std::fs::read_to_string(&log).unwrap();
    let damaged = text.replacen("\"seq\":2", "\"seq\":7", 1);
    assert_ne!(damaged, text);
    std::fs::write(&log, damaged).unwrap();
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(
        out.contains("the cage log has 1 integrity problem: damage may be understated"),
        "{out}"
    );
    assert!(out.contains("line 3: corrupt record skipped"), "{out}");
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(
        md.contains("> **Warning.** the cage log has 1 integrity problem"),
        "{md}"
    );
}

#[test]
fn a_crash_beyond_the_model_is_still_recorded_and_condemns_the_cage() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    // 30 m/s on the demo cage: the nonlinear solver finds no equilibrium.
    let dry = cmd(d, &["impact", "--face", "F1", "--speed", "30", "--dry-run"]);
    assert_eq!(
        dry.status.code(),
        Some(1),
        "a failed analysis is a runtime failure"
    );
    let err = String::from_utf8_lossy(&dry.stderr);
    assert!(err.contains("may have collapsed"), "{err}");
    let out = ok(&cmd(
        d,
        &[
            "impact",
            "--face",
            "F1",
            "--speed",
            "30",
            "--note",
            "hit a wall",
        ],
    ));
    assert!(out.contains("RECORDED as #1 beyond the model"), "{out}");
    let members = health(d);
    assert_eq!(members.len(), 30);
    for m in members {
        assert_eq!(m["status"], "replace_now", "{m}");
        assert!(
            m["reasons"][0]
                .as_str()
                .unwrap()
                .contains("beyond what the model can solve")
        );
    }
    // A replacement still resets one member.
    ok(&cmd(d, &["log", "replace", "S3"]));
    let members = health(d);
    let s3 = member(&members, "S3");
    assert_eq!(s3["status"], "ok");
}

#[test]
fn operator_is_offered_only_where_a_record_is_written() {
    // Issue 14: an option only where it means something. Reading actions
    // refuse --operator as bad usage (exit 2); writing ones offer it.
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let data = d.display().to_string();
    for read in [
        &["log", "show"][..],
        &["log", "health"],
        &["log", "export", "--format", "csv"],
    ] {
        let mut args = read.to_vec();
        args.extend(["--operator", "bo"]);
        let o = cmd(d, &args);
        assert_eq!(o.status.code(), Some(2), "{args:?}");
        let mut help = read[..2].to_vec();
        help.push("--help");
        assert!(!ok(&cmd(d, &help)).contains("--operator"), "{help:?}");
        // --data still works where a log is read.
        let mut args = read.to_vec();
        args.extend(["--data", &data]);
        ok(&cmd(d, &args));
    }
    for write in ["finding", "replace", "note"] {
        assert!(
            ok(&cmd(d, &["log", write, "--help"])).contains("--operator"),
            "{write}"
        );
    }
    assert!(ok(&cmd(d, &["impact", "--help"])).contains("--operator"));
}

#[test]
fn a_replacement_without_a_part_is_recorded_with_a_warning() {
    let dir = tempfile::tempdir().unwrap();
    let o = cmd(dir.path(), &["log", "replace", "S3"]);
    ok(&o);
    let e = String::from_utf8_lossy(&o.stderr);
    assert!(e.contains("record #1 names no part or lot"), "{e}");
    let o = cmd(
        dir.path(),
        &["log", "replace", "S3", "--part", "HMPE lot 12"],
    );
    ok(&o);
    assert!(!String::from_utf8_lossy(&o.stderr).contains("no part or lot"));
}

/// Standard error closed before the program starts (a script that closed
/// the pipe): the record is written and the command still exits 0, with no
/// panic (exit 101) that would make a script write it a second time.
#[test]
fn a_closed_standard_error_does_not_turn_a_written_record_into_a_failure() {
    let dir = tempfile::tempdir().unwrap();
    for (args, want) in [
        (&["log", "note", "hello"][..], Some(0)),
        (&["log", "replace", "S3"][..], Some(0)),
        // Refused: exit 2, its message lost with standard error.
        (&["log", "finding", "S99", "cut"][..], Some(2)),
    ] {
        let (reader, writer) = std::io::pipe().unwrap();
        drop(reader);
        let o = Command::new(BIN)
            .args(args)
            .env("CAGEHAND_DATA", dir.path())
            .env("CAGEHAND_OPERATOR", "ana")
            .stderr(writer)
            .output()
            .unwrap();
        assert_eq!(o.status.code(), want, "{args:?}");
    }
    let show: serde_json::Value =
        serde_json::from_str(&ok(&cmd(dir.path(), &["log", "show", "--json"]))).unwrap();
    assert_eq!(show["records"].as_array().unwrap().len(), 2);
}

/// `log export --out` aimed at a cage log is refused and writes nothing:
/// the log itself, any `.cagelog` name or side file, or any file that
/// starts with a log's header (a copy kept under another name).
#[test]
fn an_export_never_writes_over_a_cage_log() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["log", "note", "day 1 (invented)"]));
    let log = d.join("kestrel-demo.cagelog");
    let before = std::fs::read(&log).unwrap();
    let copy = d.join("backup.txt");
    std::fs::write(&copy, &before).unwrap();
    for target in [
        log.clone(),
        d.join("other.cagelog"),
        d.join("kestrel-demo.cagelog.set-aside"),
        copy.clone(),
    ] {
        for format in ["csv", "md"] {
            let o = export_to(d, format, &target);
            assert_eq!(o.status.code(), Some(2), "{}", target.display());
            let e = String::from_utf8_lossy(&o.stderr);
            assert!(e.contains("never writes over a log"), "{e}");
        }
    }
    assert_eq!(std::fs::read(&log).unwrap(), before);
    assert_eq!(std::fs::read(&copy).unwrap(), before);
    assert!(!d.join("other.cagelog").exists());
    #[cfg(unix)]
    {
        // Links are judged by what they point at: the log itself (same file),
        // or a log not written yet (by its name).
        let to_log = d.join("report-link.csv");
        std::os::unix::fs::symlink(&log, &to_log).unwrap();
        let to_new_log = d.join("another-link.md");
        std::os::unix::fs::symlink(d.join("spare.cagelog"), &to_new_log).unwrap();
        for (link, says) in [
            (&to_log, "the one this report is read from"),
            (&to_new_log, "cage log"),
        ] {
            let o = export_to(d, "md", link);
            assert_eq!(o.status.code(), Some(2));
            assert!(String::from_utf8_lossy(&o.stderr).contains(says));
        }
        assert_eq!(std::fs::read(&log).unwrap(), before);
        assert!(!d.join("spare.cagelog").exists());
    }
    // A report may carry the log's name in its own.
    let named = d.join("kestrel-demo.cagelog.md");
    ok(&export_to(d, "md", &named));
    // A report's own name is written, and written again.
    let report = d.join("report.csv");
    for _ in 0..2 {
        ok(&export_to(d, "csv", &report));
    }
    assert!(
        std::fs::read_to_string(&report)
            .unwrap()
            .starts_with("id,kind,status")
    );
}
