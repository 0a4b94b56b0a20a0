//! Hostile link inputs through the real binary (issue 12, links): the
//! signing bypass over UDP on loopback, replay across two processes, the
//! inputs that used to hang the decoder (each run bounded by a timeout) and
//! good frames hidden behind a false start or inside an unknown frame.

use cagehand::link::mavlink::signing::{NEW_STREAM_WINDOW_TICKS, timestamp_from_unix_s};
use cagehand::link::mavlink::{Message, SignWith, SigningKey, encode_frame};
use cagehand::link::record::{Header, RecordWriter};
use serde_json::Value;
use std::io::Read;
use std::net::UdpSocket;
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

const BIN: &str = env!("CARGO_BIN_EXE_cagehand");

/// Wait for a child, killing it past the deadline (a hung test must end).
/// Its output is drained meanwhile, so a full pipe cannot stall it.
fn wait_bounded(mut c: Child, limit: Duration) -> (std::process::Output, bool) {
    let drain = |r: Option<Box<dyn Read + Send>>| {
        std::thread::spawn(move || {
            let mut v = Vec::new();
            if let Some(mut r) = r {
                let _ = r.read_to_end(&mut v);
            }
            v
        })
    };
    let out = drain(c.stdout.take().map(|s| Box::new(s) as Box<dyn Read + Send>));
    let err = drain(c.stderr.take().map(|s| Box::new(s) as Box<dyn Read + Send>));
    let t0 = Instant::now();
    let mut ended = false;
    while t0.elapsed() < limit {
        if let Ok(Some(_)) = c.try_wait() {
            ended = true;
            break;
        }
        std::thread::sleep(Duration::from_millis(20));
    }
    let _ = c.kill();
    let status = c.wait().expect("child status");
    let output = std::process::Output {
        status,
        stdout: out.join().unwrap_or_default(),
        stderr: err.join().unwrap_or_default(),
    };
    (output, ended)
}

fn json_lines(out: &[u8]) -> Vec<Value> {
    String::from_utf8_lossy(out)
        .lines()
        .map(|l| serde_json::from_str(l).unwrap_or_else(|e| panic!("not JSON: {l}: {e}")))
        .collect()
}

fn summary(out: &[u8]) -> Value {
    let v = json_lines(out);
    let s = v.last().expect("output").clone();
    assert_eq!(s["summary"], true, "{s}");
    s
}

fn free_port() -> u16 {
    let s = UdpSocket::bind("127.0.0.1:0").expect("bind");
    s.local_addr().expect("addr").port()
}

fn write_key(dir: &Path) -> (SigningKey, String) {
    let bytes: [u8; 32] = std::array::from_fn(|i| (0xA0 + i) as u8);
    let hex: String = bytes.iter().map(|b| format!("{b:02x}")).collect();
    let p = dir.join("key.hex");
    std::fs::write(&p, hex + "\n").expect("write key");
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        std::fs::set_permissions(&p, std::fs::Permissions::from_mode(0o600)).expect("chmod");
    }
    (SigningKey::from_bytes(bytes), p.display().to_string())
}

fn wall_timestamp() -> u64 {
    let s = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .expect("clock after 1970")
        .as_secs_f64();
    timestamp_from_unix_s(s)
}

/// Signed ATTITUDE frames as a vehicle would send them.
fn signed_frames(key: &SigningKey, link_id: u8, ts0: u64, n: usize) -> Vec<Vec<u8>> {
    (0..n)
        .map(|i| {
            let msg = Message::Attitude {
                time_boot_ms: 1000 + 20 * i as u32,
                rpy_rad: [0.0; 3],
                rates_rad_s: [0.0; 3],
            };
            let sign = SignWith {
                key,
                link_id,
                timestamp: ts0 + i as u64,
            };
            encode_frame(2, i as u8, 1, 1, &msg, Some(sign))
        })
        .collect()
}

/// A headless watch on a UDP port with the key and data folder.
fn spawn_watch(port: u16, key: &str, data: &Path, extra: &[&str]) -> Child {
    let mut c = Command::new(BIN)
        .args(["watch", "--headless", "--summary", "--duration-s", "1.5"])
        .args(["--link", &format!("udp:127.0.0.1:{port}")])
        .args(["--signing-key", key, "--data", &data.display().to_string()])
        .args(extra)
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn watch");
    // Listening once it prints its first line (read byte by byte, so
    // nothing after it is taken from the pipe).
    let mut line = Vec::new();
    let out = c.stdout.as_mut().expect("stdout");
    let mut b = [0u8; 1];
    while let Ok(1) = out.read(&mut b) {
        if b[0] == b'\n' {
            break;
        }
        line.push(b[0]);
    }
    let line = String::from_utf8_lossy(&line);
    assert!(line.contains("stale"), "{line}");
    c
}

fn send_all(port: u16, datagrams: &[Vec<u8>]) {
    let s = UdpSocket::bind("127.0.0.1:0").expect("bind sender");
    for d in datagrams {
        s.send_to(d, ("127.0.0.1", port)).expect("send");
        std::thread::sleep(Duration::from_millis(5));
    }
}

#[test]
fn with_a_key_unsigned_text_cannot_win_and_replays_fail_across_processes() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (key, key_file) = write_key(dir.path());
    let data = dir.path().join("data");
    let ts = wall_timestamp();
    let genuine = signed_frames(&key, 0, ts, 20);

    // Run 1: three unsigned text lines first, then the genuine frames.
    let port = free_port();
    let w = spawn_watch(port, &key_file, &data, &[]);
    let mut script = vec![b"t=0 roll=0 pitch=0 yaw=0 vbat=12.6 armed=0\n".to_vec(); 3];
    script.extend(genuine.iter().cloned());
    send_all(port, &script);
    let (o, ended) = wait_bounded(w, Duration::from_secs(15));
    assert!(ended, "watch did not end");
    let err = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(0), "{err}");
    let s = summary(&o.stdout);
    assert_eq!(s["frames_decoded"], 20, "{s}");
    assert_eq!(s["errors"]["rejected"], 0, "{s}");
    // The floor is kept in the data folder, one file per key.
    let kept: Vec<_> = std::fs::read_dir(data.join("signing"))
        .expect("signing folder")
        .collect();
    assert_eq!(kept.len(), 1);

    // Run 2, a new process: the same capture replayed is refused, as are
    // frames signed two minutes ago on a new link id; fresh frames pass.
    let port = free_port();
    let w = spawn_watch(port, &key_file, &data, &[]);
    let mut script = genuine.clone();
    script.extend(signed_frames(&key, 7, ts - 2 * NEW_STREAM_WINDOW_TICKS, 5));
    script.extend(signed_frames(&key, 0, wall_timestamp() + 100, 3));
    send_all(port, &script);
    let (o, ended) = wait_bounded(w, Duration::from_secs(15));
    assert!(ended, "watch did not end");
    let s = summary(&o.stdout);
    assert_eq!(s["frames_decoded"], 3, "{s}");
    assert_eq!(s["errors"]["rejected"], 25, "{s}");
}

#[test]
fn line_protocol_with_a_key_is_refused() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (_, key_file) = write_key(dir.path());
    let o = Command::new(BIN)
        .args(["watch", "--headless", "--proto", "line", "--link", "udp:0"])
        .args(["--signing-key", &key_file])
        .output()
        .expect("run");
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(
        err.contains("--proto line cannot be used with --signing-key"),
        "{err}"
    );
}

#[test]
fn a_damaged_replay_floor_is_not_ignored() {
    let dir = tempfile::tempdir().expect("tempdir");
    let (key, key_file) = write_key(dir.path());
    let data = dir.path().join("data");
    let floor = data
        .join("signing")
        .join(format!("{}.floor.json", key.fingerprint()));
    std::fs::create_dir_all(floor.parent().expect("folder")).expect("mkdir");
    std::fs::write(&floor, "{").expect("damage");
    let o = Command::new(BIN)
        .args([
            "watch",
            "--headless",
            "--link",
            &format!("udp:{}", free_port()),
        ])
        .args(["--signing-key", &key_file, "--data"])
        .arg(&data)
        .output()
        .expect("run");
    assert_eq!(o.status.code(), Some(2));
    let err = String::from_utf8_lossy(&o.stderr);
    assert!(err.contains("replay floor"), "{err}");
    assert_eq!(std::fs::read_to_string(&floor).expect("kept"), "{");
}

fn watch_file(spec: &str, limit: Duration) -> (std::process::Output, bool) {
    let c = Command::new(BIN)
        .args(["watch", "--headless", "--summary", "--replay-speed", "max"])
        .args(["--link", spec])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .expect("spawn watch");
    wait_bounded(c, limit)
}

#[test]
fn a_line_time_a_tick_cannot_step_is_malformed_not_a_hang() {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("times.txt");
    // 3e15 s: doubles there are 0.5 apart, so t + 0.25 s == t (IEEE 754
    // binary64 spacing, docs/links.md); the clock could never step past.
    std::fs::write(
        &p,
        "t=1 roll=0 pitch=0 yaw=0\nt=3e15 roll=0 pitch=0 yaw=0\nt=3.0000000001e15 roll=0 pitch=0 yaw=0\nt=2 roll=0 pitch=0 yaw=0\n",
    )
    .expect("write");
    let (o, ended) = watch_file(&format!("raw:{}", p.display()), Duration::from_secs(20));
    assert!(ended, "watch hung on a huge line time");
    let s = summary(&o.stdout);
    assert_eq!(s["frames_decoded"], 2, "{s}");
    assert_eq!(s["errors"]["malformed"], 2, "{s}");
}

#[test]
fn a_recording_chunk_far_in_the_future_gets_capped_ticks_not_a_flood() {
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("far.chrec");
    let f = std::fs::File::create(&p).expect("create");
    let mut w = RecordWriter::new(f, &Header::default()).expect("header");
    w.write(0.0, b"t=0 roll=0 pitch=0 yaw=0\n").expect("chunk");
    // 10^18 us: the chunk time from the issue.
    w.write(1.0e12, b"t=1 roll=0 pitch=0 yaw=0\n")
        .expect("chunk");
    drop(w);
    let (o, ended) = watch_file(&format!("file:{}", p.display()), Duration::from_secs(20));
    assert!(ended, "replay did not end");
    // Ticks for at most 600 s of silence: a line a second at most, not
    // one per tick for 31,700 years.
    let n = json_lines(&o.stdout).len();
    assert!(n < 1000, "{n} lines");
    let s = summary(&o.stdout);
    assert_eq!(s["frames_decoded"], 2, "{s}");
}

#[test]
fn good_frames_behind_a_false_start_or_inside_an_unknown_frame_are_read() {
    // pymavlink 2.4.50 reference v1 ATTITUDE frame (docs/links.md).
    let hex = "fe1c0001011e40e20100cdcccc3dcdcc4cbe0000c03f0ad7233c0ad7a3bc8fc2f53c4c6c";
    let good: Vec<u8> = (0..hex.len())
        .step_by(2)
        .map(|i| u8::from_str_radix(&hex[i..i + 2], 16).expect("hex"))
        .collect();
    // An unknown id claiming 100 bytes with a good frame inside, the byte
    // after the claim a start byte; then a false start claiming 200 bytes
    // with three good frames behind it at the end of the capture.
    let mut bytes = vec![0xFD, 100, 0, 0, 0, 1, 1, 253, 0, 0];
    bytes.extend_from_slice(&good);
    bytes.resize(112, 0);
    bytes.extend_from_slice(&good);
    bytes.extend_from_slice(&[0xFD, 200, 0, 0, 0, 1, 1, 30, 0, 0]);
    for _ in 0..3 {
        bytes.extend_from_slice(&good);
    }
    let dir = tempfile::tempdir().expect("tempdir");
    let p = dir.path().join("hidden.bin");
    std::fs::write(&p, bytes).expect("write");
    let (o, ended) = watch_file(&format!("raw:{}", p.display()), Duration::from_secs(20));
    assert!(ended);
    let s = summary(&o.stdout);
    assert_eq!(s["frames_decoded"], 5, "{s}");
}
