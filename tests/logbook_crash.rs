//! Crash safety of the cage log, with the real binary: SIGKILL at random
//! moments, a torn tail, a corrupt middle record, two writers at once, a
//! data folder that cannot be written, and a full device.

use std::collections::BTreeSet;
use std::io::Read;
use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_cagehand");
const LOG: &str = "kestrel-demo.cagelog";

fn cagehand(data: &Path, args: &[&str]) -> Command {
    let mut c = Command::new(BIN);
    c.arg("log")
        .args(args)
        .arg("--data")
        .arg(data)
        // By the environment: `--operator` is only on the actions that write.
        .env("CAGEHAND_OPERATOR", "crash-test")
        .env_remove("CAGEHAND_DATA");
    c
}

fn run(data: &Path, args: &[&str]) -> Output {
    cagehand(data, args).output().unwrap()
}

fn text(b: &[u8]) -> String {
    String::from_utf8_lossy(b).into_owned()
}

/// Sequence numbers in `log show --json`, and the stderr of that run.
fn shown(data: &Path) -> (Vec<u64>, String) {
    let o = run(data, &["show", "--json"]);
    assert!(o.status.success(), "show failed: {}", text(&o.stderr));
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    let seqs = v["records"]
        .as_array()
        .unwrap()
        .iter()
        .map(|r| r["seq"].as_u64().unwrap())
        .collect();
    (seqs, text(&o.stderr))
}

/// Sequence numbers a writer reported as recorded.
fn reported(stdout: &str) -> Vec<u64> {
    stdout
        .lines()
        .filter_map(|l| l.strip_prefix("recorded #"))
        .filter_map(|n| n.trim().parse().ok())
        .collect()
}

/// A small xorshift generator: random kill moments without a dependency.
struct Rng(u64);
impl Rng {
    fn next(&mut self) -> u64 {
        self.0 ^= self.0 << 13;
        self.0 ^= self.0 >> 7;
        self.0 ^= self.0 << 17;
        self.0
    }
}

#[test]
fn sigkill_at_random_moments_loses_no_reported_record() {
    let dir = tempfile::tempdir().unwrap();
    let data = dir.path().to_path_buf();
    let seed = std::time::SystemTime::now()
        .duration_since(std::time::UNIX_EPOCH)
        .unwrap()
        .as_nanos() as u64
        | 1;
    eprintln!("kill-moment seed {seed}");
    let mut rng = Rng(seed);
    let mut all_reported = BTreeSet::new();
    let start = Instant::now();
    let kills = 30;
    for k in 0..kills {
        let mut child = cagehand(&data, &["note", "crash", "--repeat", "1000000"])
            .stdout(Stdio::piped())
            .stderr(Stdio::null())
            .spawn()
            .unwrap();
        // 2 to 60 ms: sometimes during start-up, mostly mid-stream; every
        // fifth child lives 150 to 350 ms, so that even on a loaded machine
        // (a start-up of about 100 ms) some children are killed mid-write.
        let wait_ms = if k % 5 == 4 {
            150 + rng.next() % 201
        } else {
            2 + rng.next() % 59
        };
        std::thread::sleep(Duration::from_millis(wait_ms));
        child.kill().unwrap(); // SIGKILL on Unix
        child.wait().unwrap();
        let mut out = String::new();
        child
            .stdout
            .take()
            .unwrap()
            .read_to_string(&mut out)
            .unwrap();
        all_reported.extend(reported(&out));
    }
    let elapsed = start.elapsed();
    let (seqs, stderr) = shown(&data);
    assert!(!stderr.contains("corrupt record"), "{stderr}");
    let present: BTreeSet<u64> = seqs.iter().copied().collect();
    let missing: Vec<&u64> = all_reported.difference(&present).collect();
    assert!(missing.is_empty(), "reported but missing: {missing:?}");
    // Numbers are contiguous: nothing lost, nothing doubled.
    assert_eq!(seqs, (1..=seqs.len() as u64).collect::<Vec<_>>());
    assert!(!all_reported.is_empty(), "no child got to write anything");
    eprintln!(
        "{kills} kills in {:.2} s; {} records reported, {} present",
        elapsed.as_secs_f64(),
        all_reported.len(),
        seqs.len()
    );
    // And the log still takes writes.
    let o = run(&data, &["note", "after the crashes"]);
    assert!(o.status.success(), "{}", text(&o.stderr));
}

fn three_notes(data: &Path) -> PathBuf {
    for t in ["alpha", "bravo", "charlie"] {
        assert!(run(data, &["note", t]).status.success());
    }
    data.join(LOG)
}

#[test]
fn torn_tail_is_set_aside_and_reported() {
    let dir = tempfile::tempdir().unwrap();
    let path = three_notes(dir.path());
    let len = std::fs::metadata(&path).unwrap().len();
    std::fs::OpenOptions::new()
        .write(true)
        .open(&path)
        .unwrap()
        .set_len(len - 40)
        .unwrap();
    // Reading reports it and leaves it.
    let (seqs, stderr) = shown(dir.path());
    assert_eq!(seqs, vec![1, 2]);
    assert!(stderr.contains(":4: torn last record"), "{stderr}");
    // Writing sets it aside, then appends.
    let o = run(dir.path(), &["note", "delta"]);
    assert!(o.status.success());
    let stderr = text(&o.stderr);
    assert!(
        stderr.contains("moved to") && stderr.contains(".set-aside"),
        "{stderr}"
    );
    assert_eq!(text(&o.stdout).trim(), "recorded #3");
    let side = std::fs::read_to_string(dir.path().join(format!("{LOG}.set-aside"))).unwrap();
    assert!(side.contains("charlie"), "{side}");
    // Every later reading says the side file holds records (a torn
    // record may have been an impact), until it is moved away.
    let (seqs, stderr) = shown(dir.path());
    assert_eq!(seqs, vec![1, 2, 3]);
    assert!(stderr.contains("torn records set aside"), "{stderr}");
    std::fs::rename(
        dir.path().join(format!("{LOG}.set-aside")),
        dir.path().join("read.txt"),
    )
    .unwrap();
    let (_, stderr) = shown(dir.path());
    assert!(stderr.is_empty(), "{stderr}");
}

#[test]
fn corrupt_middle_record_is_reported_with_its_line() {
    let dir = tempfile::tempdir().unwrap();
    let path = three_notes(dir.path());
    let t = std::fs::read_to_string(&path)
        .unwrap()
        .replace("bravo", "brav0");
    std::fs::write(&path, t).unwrap();
    let (seqs, stderr) = shown(dir.path());
    assert_eq!(seqs, vec![1, 3]);
    assert!(
        stderr.contains(&format!(
            "{LOG}:3: corrupt record skipped (it claims number 2)"
        )),
        "{stderr}"
    );
    // Appending does not touch the middle; the next number follows the last.
    let o = run(dir.path(), &["note", "delta"]);
    assert_eq!(text(&o.stdout).trim(), "recorded #4");
}

#[test]
fn two_writers_at_once_are_kept_apart() {
    let dir = tempfile::tempdir().unwrap();
    let spawn = |tag: &str| {
        cagehand(dir.path(), &["note", tag, "--repeat", "60"])
            .stdout(Stdio::piped())
            .stderr(Stdio::piped())
            .spawn()
            .unwrap()
    };
    let (a, b) = (spawn("a"), spawn("b"));
    let (a, b) = (a.wait_with_output().unwrap(), b.wait_with_output().unwrap());
    assert!(a.status.success(), "{}", text(&a.stderr));
    assert!(b.status.success(), "{}", text(&b.stderr));
    let mut got: Vec<u64> = reported(&text(&a.stdout));
    got.extend(reported(&text(&b.stdout)));
    got.sort();
    assert_eq!(got, (1..=120).collect::<Vec<_>>());
    let (seqs, stderr) = shown(dir.path());
    assert_eq!(seqs, (1..=120).collect::<Vec<_>>());
    assert!(stderr.is_empty(), "{stderr}");
}

#[test]
fn a_held_lock_gives_a_clear_message_and_no_record() {
    let dir = tempfile::tempdir().unwrap();
    let path = three_notes(dir.path());
    let holder = std::fs::OpenOptions::new().read(true).open(&path).unwrap();
    holder.lock().unwrap();
    let o = cagehand(dir.path(), &["note", "blocked"])
        .env("CAGEHAND_LOCK_WAIT_S", "0.2")
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1));
    let stderr = text(&o.stderr);
    assert!(
        stderr.contains("in use by another cagehand process"),
        "{stderr}"
    );
    holder.unlock().unwrap();
    assert_eq!(shown(dir.path()).0, vec![1, 2, 3]);
}

#[test]
fn unwritable_data_folder_gives_a_clear_error_and_no_record() {
    // Tests run as root, where permission bits do not stop writes, so the
    // data folder is put below a regular file: no process can create it.
    let dir = tempfile::tempdir().unwrap();
    let blocker = dir.path().join("not-a-folder");
    std::fs::write(&blocker, b"x").unwrap();
    let data = blocker.join("cagehand");
    let o = run(&data, &["note", "x"]);
    assert_eq!(o.status.code(), Some(1));
    let stderr = text(&o.stderr);
    assert!(stderr.contains("cannot create the data folder"), "{stderr}");
    assert!(stderr.contains("nothing was recorded") || !text(&o.stdout).contains("recorded"));
    assert!(!data.exists());
    // The impact command refuses before analysing.
    let o = Command::new(BIN)
        .args([
            "impact",
            "--face",
            "F1",
            "--speed",
            "2",
            "--operator",
            "t",
            "--data",
        ])
        .arg(&data)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1));
    assert!(text(&o.stdout).is_empty());
}

#[test]
fn read_only_log_file_gives_a_clear_error_when_not_root() {
    use std::os::unix::fs::PermissionsExt;
    let dir = tempfile::tempdir().unwrap();
    let path = three_notes(dir.path());
    let before = std::fs::read(&path).unwrap();
    std::fs::set_permissions(&path, std::fs::Permissions::from_mode(0o444)).unwrap();
    let o = run(dir.path(), &["note", "x"]);
    // As root the write is allowed (permission bits do not bind root); then
    // it must simply succeed. Otherwise: a clear error and no change.
    if o.status.success() {
        assert_eq!(text(&o.stdout).trim(), "recorded #4");
    } else {
        assert_eq!(o.status.code(), Some(1));
        assert!(text(&o.stderr).contains("cannot open for writing"));
        assert_eq!(std::fs::read(&path).unwrap(), before);
    }
}

#[test]
fn full_device_gives_a_clear_error_and_no_record() {
    // A full disk, simulated honestly at the system call: the log file is a
    // link to /dev/full, where every write fails with ENOSPC.
    if !Path::new("/dev/full").exists() {
        eprintln!("no /dev/full here; skipped");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    std::os::unix::fs::symlink("/dev/full", dir.path().join(LOG)).unwrap();
    let o = run(dir.path(), &["note", "x"]);
    assert_eq!(o.status.code(), Some(1));
    let stderr = text(&o.stderr);
    assert!(stderr.contains("No space left on device"), "{stderr}");
    assert!(stderr.contains("nothing was recorded"), "{stderr}");
    assert!(!text(&o.stdout).contains("recorded #"));
}

#[test]
fn disk_full_in_the_middle_of_a_record_leaves_no_partial_record() {
    // A disk that fills up mid-record, simulated with a file size limit
    // (RLIMIT_FSIZE via the shell's `ulimit -f`, SIGXFSZ ignored so the
    // write fails with EFBIG instead of killing the process): the write
    // that crosses the limit is cut short, and the log must be cut back.
    if !Path::new("/bin/bash").exists() {
        eprintln!("no /bin/bash here; skipped");
        return;
    }
    let dir = tempfile::tempdir().unwrap();
    let script = format!(
        "trap '' XFSZ; ulimit -f 2; exec '{BIN}' log --data '{}' note filler --operator t --repeat 100",
        dir.path().display()
    );
    let o = Command::new("/bin/bash")
        .arg("-c")
        .arg(&script)
        .output()
        .unwrap();
    assert_eq!(o.status.code(), Some(1), "{}", text(&o.stderr));
    let stderr = text(&o.stderr);
    assert!(stderr.contains("nothing was recorded"), "{stderr}");
    let got = reported(&text(&o.stdout));
    assert!(got.len() >= 3, "{got:?}");
    // bash counts `ulimit -f` in 1024-byte blocks: 2048 bytes at most.
    let len = std::fs::metadata(dir.path().join(LOG)).unwrap().len();
    assert!(len <= 2048, "{len}");
    // Every reported record is there and nothing torn is left behind.
    let (seqs, stderr) = shown(dir.path());
    assert_eq!(seqs, got);
    assert!(stderr.is_empty(), "{stderr}");
}

#[test]
fn a_data_folder_that_is_a_file_is_bad_input_and_left_alone() {
    let dir = tempfile::tempdir().unwrap();
    let file = dir.path().join("datafile");
    std::fs::write(&file, b"keep me").unwrap();
    let o = run(&file, &["note", "x"]);
    assert_eq!(o.status.code(), Some(2), "{}", text(&o.stderr));
    assert!(text(&o.stderr).contains("is a file, not a folder"));
    assert_eq!(std::fs::read(&file).unwrap(), b"keep me");
}
