//! `watch --headless` speaks the same state words as the screens: a feed
//! held still at 20 degrees of roll is `propped` (motionless, not flat on
//! any face) within the dwell time, with the nearest face and how far off
//! it lies; before any data the state is `stale` with "no data yet".

use serde_json::Value;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_cagehand");

/// The demo profile's dwell time and rest tolerance (profiles/demo.toml,
/// `[watch]`).
const DWELL_S: f64 = 0.5;
const TOLERANCE_DEG: f64 = 12.0;

fn watch_lines(feed: &str, extra: &[&str]) -> Vec<Value> {
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("feed.txt");
    std::fs::write(&path, feed).expect("write feed");
    let spec = format!("raw:{}", path.display());
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--proto", "line", "--link", &spec])
        .args(extra)
        .env("CAGEHAND_DATA", dir.path())
        .output()
        .expect("run cagehand");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout)
        .lines()
        .map(|l| serde_json::from_str(l).expect("one JSON object per line"))
        .collect()
}

#[test]
fn held_still_at_20_deg_of_roll_is_propped_within_the_dwell() {
    // 2 s at 50 Hz, roll 20 deg, not moving. The demo cage's faces are 39
    // to 53 deg apart, so 20 deg of roll is outside the 12 deg tolerance of
    // every face (checked below from the output's own error_deg).
    let feed: String = (0..100)
        .map(|i| format!("t={:.2} roll=20 pitch=0 yaw=0\n", f64::from(i) * 0.02))
        .collect();
    let lines = watch_lines(&feed, &["--summary"]);
    let states: Vec<&Value> = lines.iter().filter(|v| v.get("state").is_some()).collect();
    for v in &states {
        assert_eq!(v["schema"], "cagehand.watch/1", "{v}");
    }
    let propped = states
        .iter()
        .find(|v| v["state"] == "propped")
        .unwrap_or_else(|| panic!("no propped line in {lines:#?}"));
    let t = propped["t"].as_f64().expect("t");
    // The first sample is at t = 0: propped once steady for the dwell.
    assert!(t <= DWELL_S + 0.05, "propped at {t} s, dwell {DWELL_S} s");
    assert!(propped["face"].is_string(), "{propped}");
    let off = propped["error_deg"].as_f64().expect("error_deg");
    assert!(off > TOLERANCE_DEG, "{propped}");
    assert!(
        propped["reason"]
            .as_str()
            .is_some_and(|r| r.contains("not flat")),
        "{propped}"
    );
    assert!(
        states.iter().all(|v| v["state"] != "resting"),
        "never called resting: {lines:#?}"
    );
    let summary = lines.last().expect("summary");
    assert_eq!(summary["summary"], true);
    assert!(
        summary["states_seen"]
            .as_array()
            .is_some_and(|a| a.iter().any(|s| s == "propped")),
        "{summary}"
    );
    assert_eq!(summary["faces_seen"], serde_json::json!([]), "{summary}");
}

#[test]
fn no_data_is_stale_with_the_reason_no_data_yet() {
    // A feed with no sample at all: one comment line.
    let lines = watch_lines("# nothing yet\n", &[]);
    let first = lines.first().expect("a line even without data");
    assert_eq!(first["state"], "stale", "{first}");
    assert_eq!(first["reason"], "no data yet", "{first}");
    assert!(first["face"].is_null(), "{first}");
}

#[test]
fn attitude_and_attitude_quaternion_for_one_instant_count_once() {
    use cagehand::link::mavlink::{Message, encode_frame};
    // 3 s at 50 Hz, each instant sent twice: ATTITUDE and
    // ATTITUDE_QUATERNION with the same time_boot_ms (as autopilots stream
    // them). 100 messages a second, 50 attitude samples a second.
    let mut bytes = Vec::new();
    let mut seq = 0u8;
    for k in 0..150u32 {
        let ms = 1000 + k * 20;
        for msg in [
            Message::Attitude {
                time_boot_ms: ms,
                rpy_rad: [0.0; 3],
                rates_rad_s: [0.0; 3],
            },
            Message::AttitudeQuaternion {
                time_boot_ms: ms,
                q: [1.0, 0.0, 0.0, 0.0],
                rates_rad_s: [0.0; 3],
            },
        ] {
            bytes.extend(encode_frame(2, seq, 1, 1, &msg, None));
            seq = seq.wrapping_add(1);
        }
    }
    let dir = tempfile::tempdir().expect("temp dir");
    let path = dir.path().join("capture.bin");
    std::fs::write(&path, &bytes).expect("write capture");
    let spec = format!("raw:{}", path.display());
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--proto", "mavlink", "--link", &spec])
        .env("CAGEHAND_DATA", dir.path())
        .output()
        .expect("run cagehand");
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let last: Value = String::from_utf8_lossy(&o.stdout)
        .lines()
        .rev()
        .filter_map(|l| serde_json::from_str::<Value>(l).ok())
        .find(|v| v.get("state").is_some())
        .expect("a state line");
    assert_eq!(last["link"]["frames"], 300, "{last}");
    let rate = last["link"]["rate_hz"].as_f64().expect("rate_hz");
    assert!(
        (rate - 50.0).abs() <= 1.5,
        "samples, not messages: {rate} Hz\n{last}"
    );
}
