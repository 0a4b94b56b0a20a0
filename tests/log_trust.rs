//! The cage log against what the field and people do to it, through the
//! real binary: line ends converted by a checkout, records edited (and
//! re-hashed), deleted, repeated or moved, an exhausted sequence, a
//! set-aside cut short, and outside text built to steer the terminal.

use cagehand::logbook::chain::{SUM_TAG, sha256_hex};
use std::path::{Path, PathBuf};
use std::process::Command;

mod common;
use common::{BIN, cmd, ok};

/// What a command said on stderr besides the line naming the log it wrote
/// to (every write names its vehicle and log file).
fn warnings(o: &std::process::Output) -> String {
    String::from_utf8_lossy(&o.stderr)
        .lines()
        .filter(|l| !l.starts_with("cagehand: written to the cage log of "))
        .collect::<Vec<_>>()
        .join("\n")
}

fn log_path(d: &Path) -> PathBuf {
    d.join("kestrel-demo.cagelog")
}

fn lines(d: &Path) -> Vec<String> {
    std::fs::read_to_string(log_path(d))
        .unwrap()
        .lines()
        .map(str::to_string)
        .collect()
}

fn write_lines(d: &Path, lines: &[String]) {
    std::fs::write(log_path(d), format!("{}\n", lines.join("\n"))).unwrap();
}

/// A log of four records: two notes, a cut string (REPLACE NOW), a note.
fn four_records(d: &Path) {
    ok(&cmd(d, &["log", "note", "new cage (invented demo)"]));
    ok(&cmd(d, &["log", "note", "pre-season check"]));
    ok(&cmd(
        d,
        &["log", "finding", "S3", "cut", "--note", "cut by a rotor"],
    ));
    ok(&cmd(d, &["log", "note", "grounded"]));
}

/// The status `log health --json` gives one member.
fn status(d: &Path, id: &str) -> String {
    let h: serde_json::Value =
        serde_json::from_str(&ok(&cmd(d, &["log", "health", "--json"]))).unwrap();
    h["members"]
        .as_array()
        .unwrap()
        .iter()
        .find(|m| m["id"] == id)
        .unwrap()["status"]
        .as_str()
        .unwrap()
        .to_string()
}

/// `log verify`'s exit code and output.
fn verify(d: &Path, extra: &[&str]) -> (i32, String) {
    let mut args = vec!["log", "verify"];
    args.extend_from_slice(extra);
    let o = cmd(d, &args);
    (
        o.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&o.stdout).into_owned(),
    )
}

/// The chain head `log health` prints.
fn printed_head(d: &Path) -> String {
    let out = ok(&cmd(d, &["log", "health"]));
    let line = out
        .lines()
        .find(|l| l.starts_with("chain head "))
        .unwrap_or_else(|| panic!("no chain head in {out}"));
    line["chain head ".len()..]
        .split_whitespace()
        .next()
        .unwrap()
        .to_string()
}

#[test]
fn a_crlf_log_with_a_cut_string_still_reads_replace_now() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["log", "note", "new cage"]));
    ok(&cmd(d, &["log", "finding", "S3", "cut"]));
    assert_eq!(status(d, "S3"), "replace_now");
    // As a checkout with autocrlf, or an editor, leaves it.
    let text = std::fs::read_to_string(log_path(d)).unwrap();
    std::fs::write(log_path(d), text.replace('\n', "\r\n")).unwrap();
    let o = cmd(d, &["log", "health"]);
    assert!(warnings(&o).is_empty(), "{}", warnings(&o));
    let out = ok(&o);
    assert!(out.contains("worst REPLACE NOW"), "{out}");
    assert!(!out.contains("WARNING"), "{out}");
    // Writing to it sets nothing aside and reuses no number.
    let o = cmd(d, &["log", "note", "after the checkout"]);
    assert!(warnings(&o).is_empty(), "{}", warnings(&o));
    assert!(ok(&o).contains("recorded #3"));
    assert!(!d.join("kestrel-demo.cagelog.set-aside").exists());
    assert_eq!(status(d, "S3"), "replace_now");
    assert_eq!(verify(d, &[]).0, 0);
    // And without its final line end, likewise.
    let text = std::fs::read_to_string(log_path(d)).unwrap();
    std::fs::write(log_path(d), text.trim_end()).unwrap();
    assert_eq!(status(d, "S3"), "replace_now");
    assert!(ok(&cmd(d, &["log", "note", "x"])).contains("recorded #4"));
    assert!(!d.join("kestrel-demo.cagelog.set-aside").exists());
    assert_eq!(verify(d, &[]).0, 0);
}

#[test]
fn a_finding_edited_from_cut_to_ok_and_rehashed_is_caught() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let mut l = lines(d);
    // Line 4 holds the cut (header, two notes, then the finding). Edit it
    // and recompute its hash, as someone with sha256sum would.
    assert!(l[3].contains("\"kind\":\"cut\""));
    let edited = l[3].replace("\"kind\":\"cut\"", "\"kind\":\"ok\"");
    let body = edited.rsplit_once(SUM_TAG).unwrap().0;
    l[3] = format!("{body}{SUM_TAG}{}", sha256_hex(body.as_bytes()));
    write_lines(d, &l);

    let out = ok(&cmd(d, &["log", "health"]));
    // The warning comes before the table, with what it affects and where.
    let warn = out.find("WARNING: the cage log has 1 integrity problem: damage may be understated");
    let table = out.find("member  kind");
    assert!(warn.is_some() && warn < table, "{out}");
    assert!(
        out.contains("line 5: record 4 does not follow record 3 (line 4)"),
        "{out}"
    );
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(
        md.contains("> **Warning.** the cage log has 1 integrity problem"),
        "{md}"
    );
    assert!(md.contains("does not follow record 3 (line 4)"), "{md}");
    let csv = ok(&cmd(d, &["log", "export", "--format", "csv"]));
    assert!(
        csv.contains("(log),integrity,problem,,,,\"line 5: record 4 does not follow"),
        "{csv}"
    );
    let (code, v) = verify(d, &[]);
    assert_eq!(code, 1, "{v}");
    assert!(v.contains("PROBLEMS"), "{v}");
    let o = cmd(d, &["log", "verify", "--json"]);
    assert_eq!(o.status.code(), Some(1));
    let j: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(j["schema"], "cagehand.log_verify/1");
    assert_eq!(j["integrity"]["sound"], false);
    assert_eq!(j["integrity"]["issues"][0]["kind"], "chain_broken");
    assert_eq!(j["integrity"]["issues"][0]["line"], 5);
}

#[test]
fn the_newest_record_edited_without_a_new_hash_stays_reported_after_a_write() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["log", "note", "new cage"]));
    ok(&cmd(d, &["log", "finding", "S3", "cut"]));
    let mut l = lines(d);
    l[2] = l[2].replace("\"kind\":\"cut\"", "\"kind\":\"ok\"");
    write_lines(d, &l);
    ok(&cmd(d, &["log", "note", "next day"]));
    // Not moved out of sight as if it were a torn write: still in the log,
    // still reported wherever the cage's health is read.
    assert!(!d.join("kestrel-demo.cagelog.set-aside").exists());
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(
        out.contains(
            "line 3: corrupt record skipped (it claims number 2): checksum does not match"
        ),
        "{out}"
    );
    assert!(out.contains("damage may be understated"), "{out}");
    assert_eq!(verify(d, &[]).0, 1);
}

#[test]
fn an_edit_to_the_newest_record_or_its_removal_shows_against_the_kept_head() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let kept = printed_head(d);
    assert!(kept.starts_with("4:"), "{kept}");
    // The Markdown report prints the same head.
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(md.contains(&format!("- Chain head: `{kept}`")), "{md}");
    let (code, v) = verify(d, &["--head", &kept]);
    assert_eq!(code, 0, "{v}");
    assert!(v.contains("matches"), "{v}");
    // A record added later still holds the kept head.
    ok(&cmd(d, &["log", "note", "one more"]));
    let (code, v) = verify(d, &["--head", &kept]);
    assert_eq!(code, 0, "{v}");
    assert!(v.contains("1 record after it"), "{v}");
    // Remove the two newest: the log alone looks whole, the kept head not.
    let l = lines(d);
    write_lines(d, &l[..l.len() - 2]);
    assert_eq!(verify(d, &[]).0, 0);
    let (code, v) = verify(d, &["--head", &kept]);
    assert_eq!(code, 1, "{v}");
    assert!(
        v.contains("DOES NOT MATCH") && v.contains("newer records were removed"),
        "{v}"
    );
    // Its number taken again by a new record: still no match.
    ok(&cmd(d, &["log", "note", "in its place"]));
    let (code, v) = verify(d, &["--head", &kept]);
    assert_eq!(code, 1, "{v}");
    assert!(v.contains("changed or replaced"), "{v}");
    // A short form of the head, and a malformed one.
    let short = &kept[..kept.find(':').unwrap() + 17];
    assert_eq!(verify(d, &["--head", short]).0, 1);
    assert_eq!(verify(d, &["--head", "4:xyz"]).0, 2);
}

#[test]
fn a_deleted_middle_record_is_shown_in_health_and_reports() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let mut l = lines(d);
    l.remove(2); // record 2
    write_lines(d, &l);
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(
        out.contains("WARNING: the cage log has 2 integrity problems"),
        "{out}"
    );
    assert!(out.contains("record 2 is missing"), "{out}");
    assert!(out.contains("records between them were removed"), "{out}");
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    assert!(md.contains("record 2 is missing"), "{md}");
    assert_eq!(verify(d, &[]).0, 1);
    // The next record continues the numbers after the highest.
    assert!(ok(&cmd(d, &["log", "note", "x"])).contains("recorded #5"));
}

#[test]
fn a_duplicated_line_is_counted_once_and_reported() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["impact", "--face", "F3", "--peak-accel-g", "40"]));
    let mut l = lines(d);
    let again = l[1].clone();
    l.push(again);
    write_lines(d, &l);
    let h: serde_json::Value =
        serde_json::from_str(&ok(&cmd(d, &["log", "health", "--json"]))).unwrap();
    for m in h["members"].as_array().unwrap() {
        assert_eq!(m["impacts"], 1, "{m}");
    }
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(
        out.contains("record 1 repeats line 2 exactly (the repeat is counted once)"),
        "{out}"
    );
    assert_eq!(verify(d, &[]).0, 1);
}

#[test]
fn reordered_records_are_reported() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let mut l = lines(d);
    l.swap(2, 3);
    write_lines(d, &l);
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(out.contains("WARNING: the cage log has"), "{out}");
    assert!(out.contains("line 3: record 3"), "{out}");
    // Nothing that verifies is dropped: the cut still counts.
    assert_eq!(status(d, "S3"), "replace_now");
    assert_eq!(verify(d, &[]).0, 1);
}

#[test]
fn a_corrupt_record_is_reported_as_such_not_as_a_wrong_number() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let mut l = lines(d);
    l[2] = l[2].replace("pre-season", "pre-seasoN");
    write_lines(d, &l);
    let out = ok(&cmd(d, &["log", "health"]));
    assert!(out.contains("1 integrity problem"), "{out}");
    assert!(
        out.contains("line 3: corrupt record skipped (it claims number 2)"),
        "{out}"
    );
    assert!(!out.contains("where 2 was expected"), "{out}");
}

#[test]
fn the_largest_sequence_number_is_not_followed_by_zero() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let rec = cagehand::logbook::Record {
        seq: u64::MAX,
        time: "2026-12-01T22:40:00.000Z".into(),
        operator: "ana".into(),
        event: cagehand::logbook::Event::Note(cagehand::logbook::NoteEvent {
            text: "the last number".into(),
        }),
    };
    let text = cagehand::logbook::encode_log("kestrel-demo", &[rec]).unwrap();
    std::fs::write(log_path(d), &text).unwrap();
    let o = cmd(d, &["log", "note", "one more"]);
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("numbers never wrap"), "{err}");
    assert_eq!(std::fs::read_to_string(log_path(d)).unwrap(), text);
}

#[test]
fn a_set_aside_interrupted_before_the_cut_is_not_copied_twice() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    four_records(d);
    let full = std::fs::read(log_path(d)).unwrap();
    let torn = &full[..full.len() - 30];
    std::fs::write(log_path(d), torn).unwrap();
    ok(&cmd(d, &["log", "note", "after the crash"]));
    // As if the writer had been killed after copying the tail to the side
    // file and before cutting it from the log.
    std::fs::write(log_path(d), torn).unwrap();
    ok(&cmd(d, &["log", "note", "after the second crash"]));
    let side_path = d.join("kestrel-demo.cagelog.set-aside");
    let side = std::fs::read_to_string(&side_path).unwrap();
    assert_eq!(side.matches("bytes follow").count(), 1, "{side}");
    // The side file is reported at every reading until it is moved away.
    let (code, out) = verify(d, &[]);
    assert_eq!(code, 1, "{out}");
    assert!(out.contains("torn records set aside"), "{out}");
    std::fs::rename(&side_path, d.join("entered-again.txt")).unwrap();
    assert_eq!(verify(d, &[]).0, 0);
}

const HOSTILE: &str =
    "ok\u{1b}]0;owned\u{7}\u{1b}[2J <script>alert(1)</script> | \u{9b}31m \u{202e}";

fn no_controls(what: &str, s: &str) {
    for c in ['\u{1b}', '\u{7}', '\u{9b}', '\u{202e}'] {
        assert!(!s.contains(c), "{what} holds {c:?}: {s:?}");
    }
}

#[test]
fn outside_text_cannot_steer_the_terminal_or_the_report() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    let o = Command::new(BIN)
        .args([
            "log",
            "finding",
            "S3",
            "fray",
            "--operator",
            HOSTILE,
            "--note",
            HOSTILE,
        ])
        .env("CAGEHAND_DATA", d)
        .output()
        .unwrap();
    no_controls("finding echo", &ok(&o));
    ok(&cmd(
        d,
        &["log", "replace", "S3", "--part", HOSTILE, "--note", HOSTILE],
    ));
    ok(&cmd(d, &["log", "note", HOSTILE]));
    let show = ok(&cmd(d, &["log", "show"]));
    no_controls("log show", &show);
    assert!(
        show.contains("\\u{1b}]0;owned\\u{7}"),
        "shown, not hidden: {show}"
    );
    let health = cmd(d, &["log", "health"]);
    no_controls("log health", &String::from_utf8_lossy(&health.stdout));
    no_controls(
        "log health stderr",
        &String::from_utf8_lossy(&health.stderr),
    );
    no_controls("log verify", &verify(d, &[]).1);
    let md = ok(&cmd(d, &["log", "export", "--format", "md"]));
    no_controls("Markdown report", &md);
    assert!(!md.contains("<script>"), "{md}");
    assert!(md.contains("&lt;script&gt;"), "{md}");
    // No raw `|` from the text splits an events-table row: every row has
    // the table's six separators.
    for row in md.lines().filter(|l| l.starts_with("| 3 |")) {
        assert_eq!(row.matches(" | ").count() + 2, 6, "{row}");
    }
    let csv = ok(&cmd(d, &["log", "export", "--format", "csv"]));
    no_controls("CSV", &csv);

    // A profile whose strings carry the same.
    let demo =
        std::fs::read_to_string(Path::new(env!("CARGO_MANIFEST_DIR")).join("profiles/demo.toml"))
            .unwrap();
    let toml_hostile = "Kestrel \\u001b]0;owned\\u0007\\u001b[2J \\u009b \\u202e";
    let profile = demo.replace(
        "name = \"Kestrel trainer (invented demo)\"",
        &format!("name = \"{toml_hostile}\""),
    );
    assert_ne!(profile, demo);
    let pf = d.join("hostile.toml");
    std::fs::write(&pf, profile).unwrap();
    let pf = pf.to_str().unwrap();
    no_controls("profile check", &ok(&cmd(d, &["profile", "check", pf])));
    no_controls("cage", &ok(&cmd(d, &["cage", "--profile", pf])));
    no_controls("plan", &ok(&cmd(d, &["plan", "--all", "--profile", pf])));
    no_controls(
        "report with a hostile vehicle name",
        &ok(&cmd(
            d,
            &["log", "export", "--format", "md", "--profile", pf],
        )),
    );
}

/// A grounding record torn at its end (its text whole, its line end and
/// the last hash digits lost) is set aside by the next write. From then on
/// the log must not read as sound: health, verify and the pre-flight keep
/// saying that records wait in the side file, until it is moved away.
#[test]
fn a_set_aside_grounding_record_keeps_the_log_from_reading_as_sound() {
    let dir = tempfile::tempdir().unwrap();
    let d = dir.path();
    ok(&cmd(d, &["log", "finding", "R6", "cut"]));
    let full = std::fs::read(log_path(d)).unwrap();
    std::fs::write(log_path(d), &full[..full.len() - 3]).unwrap();
    ok(&cmd(d, &["log", "note", "next day (invented)"]));
    // The cut member's record is gone from the count...
    let health = ok(&cmd(d, &["log", "health"]));
    assert!(health.contains("set aside"), "{health}");
    assert_eq!(verify(d, &[]).0, 1);
    // ...so the pre-flight's cage-log item fails, and says why.
    let e: serde_json::Value =
        serde_json::from_str(&ok(&cmd(d, &["preflight", "--json"]))).unwrap();
    let cage = e["items"]
        .as_array()
        .unwrap()
        .iter()
        .find(|i| i["text"].as_str().unwrap().starts_with("Cage log"))
        .unwrap();
    assert_eq!(cage["result"], "fail", "{cage}");
    assert!(
        cage["detail"].as_str().unwrap().contains("integrity"),
        "{cage}"
    );
    // No reason signs over it: the torn record may be the cut member.
    let before = std::fs::read(log_path(d)).unwrap();
    let mut args = vec!["preflight", "sign", "--tick", "all"];
    for k in ["1", "2", "3", "4"] {
        args.extend(["--override", k, "--reason", "x"]);
    }
    let o = cmd(d, &args);
    assert_eq!(o.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&o.stderr).contains("cannot be overridden"));
    assert_eq!(std::fs::read(log_path(d)).unwrap(), before);
    std::fs::rename(
        d.join("kestrel-demo.cagelog.set-aside"),
        d.join("read-and-entered-again.txt"),
    )
    .unwrap();
    assert_eq!(verify(d, &[]).0, 0);
}
