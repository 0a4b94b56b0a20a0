//! The real binary against real inputs: raw captures of pymavlink frames,
//! line-protocol captures, and live UDP on 127.0.0.1 (bounded in time).

use cagehand::cage::Cage;
use cagehand::profile::Profile;
use cagehand::rest::resting_attitude;
use serde_json::Value;
use std::io::{BufRead, BufReader};
use std::net::UdpSocket;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_cagehand");
const FIXTURES: &str = include_str!("fixtures/mavlink/frames.jsonl");
const KEY_FILE: &str = concat!(
    env!("CARGO_MANIFEST_DIR"),
    "/tests/fixtures/mavlink/signing_key.hex"
);

fn unhex(s: &str) -> Vec<u8> {
    (0..s.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&s[i..i + 2], 16).expect("hex"))
        .collect()
}

fn lines(out: &[u8]) -> Vec<Value> {
    String::from_utf8_lossy(out)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON: {l}: {e}")))
        .collect()
}

fn watch(args: &[&str]) -> (i32, Vec<Value>, String) {
    let o = Command::new(BIN)
        .arg("watch")
        .args(args)
        .output()
        .expect("run cagehand");
    (
        o.status.code().unwrap_or(-1),
        lines(&o.stdout),
        String::from_utf8_lossy(&o.stderr).into_owned(),
    )
}

fn summary(v: &[Value]) -> &Value {
    let s = v.last().expect("output");
    assert_eq!(s["summary"], true, "{s}");
    s
}

/// Wait for a child, killing it past the deadline (a hung test must end).
fn wait_bounded(mut c: Child, limit: Duration) -> std::process::Output {
    let t0 = Instant::now();
    while t0.elapsed() < limit {
        if let Ok(Some(_)) = c.try_wait() {
            break;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let _ = c.kill();
    c.wait_with_output().expect("child output")
}

fn free_port() -> u16 {
    let s = UdpSocket::bind("127.0.0.1:0").expect("bind");
    s.local_addr().expect("addr").port()
}

fn demo_cage() -> Cage {
    Cage::from_profile(&Profile::demo().expect("demo")).expect("cage")
}

/// The demo profile with a short dwell and stale time, so live tests end quickly.
fn quick_profile(dir: &Path) -> String {
    let text = cagehand::profile::DEMO_PROFILE_TOML
        .replace("dwell_s = 0.5", "dwell_s = 0.25")
        .replace("stale_after_s = 1.5", "stale_after_s = 0.5");
    assert_ne!(text, cagehand::profile::DEMO_PROFILE_TOML);
    let p = dir.join("quick.toml");
    std::fs::write(&p, text).expect("write profile");
    p.display().to_string()
}

#[test]
fn watch_screens_without_a_terminal_point_to_headless() {
    let (code, out, err) = watch(&[]);
    assert_eq!(code, 2);
    assert!(out.is_empty());
    assert!(err.contains("--headless"), "{err}");
}

#[test]
fn bad_link_spec_is_bad_input() {
    let (code, _, err) = watch(&["--headless", "--link", "tcp:1"]);
    assert_eq!(code, 2);
    assert!(err.contains("expected udp:HOST:PORT"), "{err}");
    let (code, _, err) = watch(&["--headless", "--link", "file:/no/such/recording"]);
    assert_eq!(code, 2, "{err}");
}

/// Every pymavlink fixture frame, with noise before, between and inside.
fn capture(dir: &Path) -> (std::path::PathBuf, usize) {
    let mut bytes = vec![0x55, 0xFE, 0x02, 0x00];
    let mut n = 0;
    for line in FIXTURES.lines() {
        let v: Value = serde_json::from_str(line).expect("fixture");
        let Some(hex) = v["hex"].as_str() else {
            continue;
        };
        let f = unhex(hex);
        bytes.extend_from_slice(&f);
        // A corrupted copy of each frame: rejected by its CRC.
        let mut bad = f.clone();
        let k = bad.len() / 2;
        bad[k] ^= 0x10;
        bytes.extend_from_slice(&bad);
        bytes.extend_from_slice(&[0x00, 0x13]);
        n += 1;
    }
    // A frame with an id outside the subset (STATUSTEXT 253), then a good one.
    bytes.extend_from_slice(&[0xFD, 3, 0, 0, 0, 1, 1, 253, 0, 0, b'h', b'i', 0, 0x11, 0x22]);
    bytes.extend_from_slice(&unhex(
        "fe1c0001011e40e20100cdcccc3dcdcc4cbe0000c03f0ad7233c0ad7a3bc8fc2f53c4c6c",
    ));
    bytes.extend_from_slice(&[0u8; 300]);
    let p = dir.join("capture.bin");
    std::fs::write(&p, bytes).expect("write capture");
    (p, n + 1)
}

#[test]
fn raw_capture_of_independent_frames_with_noise() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (p, n) = capture(dir.path());
    let spec = format!("raw:{}", p.display());
    // Frames by pymavlink 2.4.50 (tests/fixtures/mavlink/gen_frames.py).
    let (code, out, err) = watch(&[
        "--headless",
        "--proto",
        "mavlink",
        "--link",
        &spec,
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    let s = summary(&out);
    assert_eq!(s["frames_decoded"], n as u64);
    assert_eq!(s["errors"]["unknown"], 1);
    assert!(
        s["errors"]["crc"]
            .as_u64()
            .is_some_and(|c| c >= (n - 1) as u64),
        "{s}"
    );
    // --sysid 1 refuses the one frame from system 7.
    let (_, out, _) = watch(&["--headless", "--link", &spec, "--sysid", "1", "--summary"]);
    let s = summary(&out);
    assert_eq!(
        (
            s["frames_decoded"].as_u64(),
            s["errors"]["rejected"].as_u64()
        ),
        (Some(n as u64 - 1), Some(1))
    );
}

#[test]
fn signing_key_accepts_only_signed_frames_and_warns_on_open_files() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (p, n) = capture(dir.path());
    let spec = format!("raw:{}", p.display());
    let key = dir.path().join("key.hex");
    std::fs::copy(KEY_FILE, &key).expect("copy key");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o600)).expect("chmod");
    }
    let k = key.display().to_string();
    let (code, out, err) = watch(&[
        "--headless",
        "--link",
        &spec,
        "--signing-key",
        &k,
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    assert!(!err.contains("warning"), "{err}");
    let s = summary(&out);
    // The two signed fixture frames pass; every other good frame is refused.
    assert_eq!(s["frames_decoded"], 2);
    assert_eq!(s["errors"]["rejected"], n as u64 - 2);
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&key, std::fs::Permissions::from_mode(0o644)).expect("chmod");
        let (_, _, err) = watch(&["--headless", "--link", &spec, "--signing-key", &k]);
        assert!(err.contains("can be read by others"), "{err}");
    }
    let bad = dir.path().join("bad.hex");
    std::fs::write(&bad, "abcd\n").expect("write");
    let (code, _, err) = watch(&[
        "--headless",
        "--link",
        &spec,
        "--signing-key",
        &bad.display().to_string(),
    ]);
    assert_eq!(code, 2);
    assert!(err.contains("64 hexadecimal"), "{err}");
}

/// Line-protocol text for `secs` of rest on `face` at 50 Hz from `t0`.
fn rest_lines(cage: &Cage, face: usize, t0: f64, secs: f64) -> Vec<String> {
    let q = resting_attitude(cage, face).coords;
    (0..(secs * 50.0) as usize)
        .map(|i| {
            format!(
                "t={:.2} qw={:.6} qx={:.6} qy={:.6} qz={:.6} vbat=12.3 armed=0\n",
                t0 + i as f64 * 0.02,
                q.w,
                q.x,
                q.y,
                q.z
            )
        })
        .collect()
}

#[test]
fn line_capture_rests_on_its_face_and_counts_bad_lines() {
    let cage = demo_cage();
    let dir = tempfile::tempdir().expect("tempdir");
    let mut text: String = rest_lines(&cage, 4, 0.0, 1.0).concat();
    text.push_str("this is not a sample\nroll=1 pitch=2\n");
    text.push_str(&rest_lines(&cage, 4, 1.0, 1.0).concat());
    let p = dir.path().join("lines.txt");
    std::fs::write(&p, text).expect("write");
    let (code, out, err) = watch(&[
        "--headless",
        "--link",
        &format!("raw:{}", p.display()),
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    let s = summary(&out);
    assert_eq!(s["errors"]["malformed"], 2);
    assert_eq!(s["frames_decoded"], 100);
    assert_eq!(s["faces_seen"], serde_json::json!([cage.faces[4].id]));
    let last = &out[out.len() - 2];
    assert_eq!(last["state"], "resting");
    assert_eq!(last["face"], cage.faces[4].id.as_str());
    assert_eq!(last["rpy_deg"].as_array().map(|a| a.len()), Some(3));
}

/// One line-protocol sample of rest on `face` at sender time `t`.
fn rest_line(cage: &Cage, face: usize, t: f64) -> String {
    let q = resting_attitude(cage, face).coords;
    format!(
        "t={t:.2} qw={:.6} qx={:.6} qy={:.6} qz={:.6} vbat=12.3 armed=0\n",
        q.w, q.x, q.y, q.z
    )
}

#[test]
fn small_line_capture_counts_frames_on_every_line() {
    let cage = demo_cage();
    let dir = tempfile::tempdir().expect("tempdir");
    // Seven samples, one bad line: small enough for one read of the file.
    let mut text = String::new();
    for (i, t) in [0.2, 0.6, 1.0, 1.4, 1.8].into_iter().enumerate() {
        text.push_str(&rest_line(&cage, 4, t));
        if i == 2 {
            text.push_str("not a sample\n");
        }
    }
    text.push_str(&rest_line(&cage, 4, 2.2));
    text.push_str(&rest_line(&cage, 4, 2.6));
    let p = dir.path().join("small.txt");
    std::fs::write(&p, text).expect("write");
    let (code, out, err) = watch(&[
        "--headless",
        "--link",
        &format!("raw:{}", p.display()),
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    let s = summary(&out);
    assert_eq!(s["frames_decoded"], 7);
    let body = &out[..out.len() - 1];
    let last = body.last().expect("a watch line");
    assert_eq!(last["link"]["frames"], s["frames_decoded"], "{last}");
    assert_eq!(last["link"]["malformed"], 1, "{last}");
    // Each line's count covers the samples up to its own time, never later ones.
    for l in body {
        let frames = l["link"]["frames"].as_u64().expect("frames");
        let t = l["t"].as_f64().expect("t");
        let upto = [0.2, 0.6, 1.0, 1.4, 1.8, 2.2, 2.6]
            .iter()
            .filter(|&&x| x <= t + 1e-9)
            .count() as u64;
        assert_eq!(frames, upto, "{l}");
    }
}

#[test]
fn silence_in_a_raw_capture_shows_stale() {
    let cage = demo_cage();
    let dir = tempfile::tempdir().expect("tempdir");
    // 1 s of rest, a 5.8 s silence on the sender's clock, 1 s of rest.
    let mut text: String = rest_lines(&cage, 4, 2.2, 1.0).concat();
    text.push_str(&rest_lines(&cage, 4, 9.0, 1.0).concat());
    let p = dir.path().join("gap.txt");
    std::fs::write(&p, text).expect("write");
    let (code, out, err) = watch(&[
        "--headless",
        "--link",
        &format!("raw:{}", p.display()),
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    // The demo profile's stale_after_s is 1.5 s (profiles/demo.toml).
    let stale: Vec<f64> = out
        .iter()
        .filter(|l| l["state"] == "stale")
        .filter_map(|l| l["t"].as_f64())
        .collect();
    assert!(
        stale.iter().any(|&t| t > 3.18 + 1.5 && t < 9.0),
        "no stale line inside the gap: {stale:?}"
    );
    assert!(
        stale.iter().all(|&t| !(2.3..=3.18 + 1.5).contains(&t)),
        "{stale:?}"
    );
    let states = &summary(&out)["states_seen"];
    assert!(
        states
            .as_array()
            .is_some_and(|a| a.contains(&"stale".into()) && a.contains(&"resting".into())),
        "{states}"
    );
    let last = &out[out.len() - 2];
    assert_eq!(last["state"], "resting", "{last}");
}

#[test]
fn udp_address_not_on_this_machine_says_so_once() {
    // 192.0.2.1 is TEST-NET-1 (RFC 5737): never an address of this machine.
    let (code, _out, err) = watch(&["--headless", "--link", "udp:192.0.2.1:14550"]);
    assert_ne!(code, 0, "{err}");
    assert!(err.contains("not an address of this machine"), "{err}");
    assert!(err.contains("127.0.0.1 or 0.0.0.0"), "{err}");
    assert!(!err.contains("another program"), "{err}");
    let os_text = err.rsplit(": ").next().unwrap_or_default().trim();
    assert!(!os_text.is_empty(), "{err}");
    assert_eq!(err.matches(os_text).count(), 1, "OS text repeated: {err}");
}

fn changes(v: &[Value]) -> Vec<(String, Value)> {
    let mut out: Vec<(String, Value)> = Vec::new();
    for l in v.iter().filter(|l| l.get("state").is_some()) {
        let k = (
            l["state"].as_str().unwrap_or("").to_string(),
            l["face"].clone(),
        );
        if out.last() != Some(&k) {
            out.push(k);
        }
    }
    // Stale before the data starts and after it stops depends on when the
    // watcher started and stopped; the states the data gave are the point.
    while out.last().is_some_and(|(s, _)| s == "stale") {
        out.pop();
    }
    while out.first().is_some_and(|(s, _)| s == "stale") {
        out.remove(0);
    }
    out
}

fn first_line(c: &mut Child) -> String {
    let mut r = BufReader::new(c.stdout.as_mut().expect("stdout"));
    let mut s = String::new();
    let _ = r.read_line(&mut s);
    s
}

#[test]
fn live_udp_watch_allow_list_and_recording_replays_the_same_states() {
    let cage = demo_cage();
    let dir = tempfile::tempdir().expect("tempdir");
    let rec = dir.path().join("live.chrec");
    let prof = quick_profile(dir.path());
    let (pw, pr) = (free_port(), free_port());
    let sender = UdpSocket::bind("127.0.0.1:0").expect("bind");
    let stranger = UdpSocket::bind("127.0.0.1:0").expect("bind");
    let allow = sender.local_addr().expect("addr").to_string();
    let mut w = Command::new(BIN)
        .args([
            "watch",
            "--headless",
            "--summary",
            "--duration-s",
            "2.4",
            "--allow",
            &allow,
        ])
        .args(["--profile", &prof])
        .args(["--link", &format!("udp:127.0.0.1:{pw}")])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn watch");
    let mut r = Command::new(BIN)
        .args(["record", "--duration-s", "2.2", "--allow", &allow])
        .args([
            "--link",
            &format!("udp:127.0.0.1:{pr}"),
            "--out",
            &rec.display().to_string(),
        ])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn record");
    // Both are listening once they print their first line.
    let first = first_line(&mut w);
    assert!(first.contains("\"stale\""), "{first}");
    assert!(first_line(&mut r).contains("started"));
    // 0.5 s on face 2, a quick roll to face 5, 0.5 s there; 50 Hz.
    let mut script = rest_lines(&cage, 2, 0.0, 0.5);
    let (q0, q1) = (resting_attitude(&cage, 2), resting_attitude(&cage, 5));
    for i in 0..10 {
        let q = q0.slerp(&q1, (i + 1) as f64 / 10.0).coords;
        script.push(format!(
            "t={:.2} qw={} qx={} qy={} qz={}\n",
            0.5 + i as f64 * 0.02,
            q.w,
            q.x,
            q.y,
            q.z
        ));
    }
    script.extend(rest_lines(&cage, 5, 0.7, 0.5));
    let t0 = Instant::now();
    for (i, line) in script.iter().enumerate() {
        let due = Duration::from_millis(20 * i as u64);
        if let Some(d) = due.checked_sub(t0.elapsed()) {
            std::thread::sleep(d);
        }
        for port in [pw, pr] {
            sender
                .send_to(line.as_bytes(), ("127.0.0.1", port))
                .expect("send");
        }
        if i % 10 == 0 {
            // Not on the allow-list: refused and counted.
            let bogus = rest_lines(&cage, 9, 0.0, 0.02).concat();
            stranger
                .send_to(bogus.as_bytes(), ("127.0.0.1", pw))
                .expect("send");
        }
    }
    let wo = wait_bounded(w, Duration::from_secs(8));
    let ro = wait_bounded(r, Duration::from_secs(8));
    assert!(
        ro.status.success(),
        "{}",
        String::from_utf8_lossy(&ro.stderr)
    );
    let live = lines(&wo.stdout);
    let s = summary(&live);
    assert!(
        s["errors"]["rejected"].as_u64().is_some_and(|n| n >= 5),
        "{s}"
    );
    assert_eq!(s["frames_decoded"], script.len() as u64);
    let (f2, f5) = (cage.faces[2].id.clone(), cage.faces[5].id.clone());
    assert_eq!(s["faces_seen"], serde_json::json!([f2, f5]));
    let live_changes = changes(&live);
    assert!(live_changes.contains(&("resting".into(), Value::from(f2.as_str()))));
    assert_eq!(
        live_changes.last(),
        Some(&("resting".into(), Value::from(f5.as_str())))
    );
    // The data stopped: the live watch ends stale, with nothing shown as current.
    let end = &live[live.len() - 2];
    assert_eq!(
        (end["state"].as_str(), end["face"].is_null()),
        (Some("stale"), true),
        "{end}"
    );
    // The recording replays (at full speed) to the same sequence of states.
    let (code, replay, err) = watch(&[
        "--headless",
        "--profile",
        &prof,
        "--link",
        &format!("file:{}", rec.display()),
        "--replay-speed",
        "max",
        "--summary",
    ]);
    assert_eq!(code, 0, "{err}");
    assert_eq!(changes(&replay), live_changes);
    assert_eq!(summary(&replay)["frames_decoded"], script.len() as u64);
    // At its recorded pace (here four times faster) it gives the same again.
    let t0 = Instant::now();
    let (_, paced, _) = watch(&[
        "--headless",
        "--profile",
        &prof,
        "--link",
        &format!("file:{}", rec.display()),
        "--replay-speed",
        "4",
    ]);
    assert_eq!(changes(&paced), live_changes);
    assert!(
        t0.elapsed() > Duration::from_millis(250),
        "paced replay ran at full speed"
    );
}

#[test]
fn sim_over_udp_takes_a_roll_command() {
    let cage = demo_cage();
    let dir = tempfile::tempdir().expect("tempdir");
    let prof = quick_profile(dir.path());
    let pw = free_port();
    let mut w = Command::new(BIN)
        .args([
            "watch",
            "--headless",
            "--duration-s",
            "2.5",
            "--profile",
            &prof,
        ])
        .args(["--link", &format!("udp:127.0.0.1:{pw}")])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn watch");
    assert!(first_line(&mut w).contains("stale"));
    let mut sim = Command::new(BIN)
        .args(["sim", "--seed", "4", "--speed", "16", "--duration-s", "60"])
        .args(["--to", &format!("udp:127.0.0.1:{pw}")])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn sim");
    let mut out = BufReader::new(sim.stdout.take().expect("stdout"));
    let mut next = || -> Value {
        let mut s = String::new();
        let _ = out.read_line(&mut s);
        serde_json::from_str(&s).unwrap_or(Value::Null)
    };
    let started = next();
    let cmd_addr = started["command_addr"]
        .as_str()
        .expect("command address")
        .to_string();
    let ctl = UdpSocket::bind("127.0.0.1:0").expect("bind");
    ctl.set_read_timeout(Some(Duration::from_secs(3)))
        .expect("timeout");
    // First rest is the take-off face; the second follows the crash.
    let mut rests = Vec::new();
    let t0 = Instant::now();
    while rests.len() < 2 && t0.elapsed() < Duration::from_secs(6) {
        let v = next();
        if v["event"] == "resting" {
            rests.push(v);
        }
    }
    assert_eq!(rests.len(), 2, "{rests:?}");
    let target = rests[1]["neighbours"][0]
        .as_str()
        .expect("a neighbour")
        .to_string();
    ctl.send_to(format!("roll {target}").as_bytes(), &cmd_addr)
        .expect("send command");
    let mut buf = [0u8; 256];
    let (n, _) = ctl.recv_from(&mut buf).expect("reply");
    assert_eq!(
        String::from_utf8_lossy(&buf[..n]),
        format!("ok roll {target}")
    );
    let mut landed = Value::Null;
    while t0.elapsed() < Duration::from_secs(8) {
        let v = next();
        if v["event"] == "resting" {
            landed = v;
            break;
        }
    }
    assert_eq!(landed["planned"], target.as_str(), "{landed}");
    let face = landed["face"].as_str().expect("landed face").to_string();
    let wo = wait_bounded(w, Duration::from_secs(8));
    let _ = sim.kill();
    let _ = sim.wait();
    let states = changes(&lines(&wo.stdout));
    assert!(states.iter().any(|(s, _)| s == "airborne"), "{states:?}");
    assert_eq!(
        states.last(),
        Some(&("resting".to_string(), Value::from(face.as_str()))),
        "{states:?}"
    );
    assert!(cage.face_index(&face).is_some());
}

#[test]
fn sim_refuses_a_pace_it_cannot_keep_instead_of_panicking() {
    // A pace of 1e-300 once reached Duration::from_secs_f64 with an
    // unrepresentable value and panicked.
    for bad in [
        ["--speed", "1e-300"],
        ["--speed", "1e9"],
        ["--duration-s", "0"],
    ] {
        let out = std::process::Command::new(env!("CARGO_BIN_EXE_cagehand"))
            .args(["sim", "--to", "udp:127.0.0.1:9"])
            .args(bad)
            .output()
            .expect("run cagehand");
        let err = String::from_utf8_lossy(&out.stderr);
        assert_eq!(out.status.code(), Some(2), "{bad:?}: {err}");
        assert!(err.contains("expected"), "{bad:?}: {err}");
        assert!(!err.contains("panicked"), "{err}");
    }
}
