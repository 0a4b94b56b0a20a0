//! The screens give the terminal back when a signal ends them: the real
//! binary runs the demo in a tmux pane, gets SIGTERM, SIGINT or SIGHUP,
//! and afterwards the pane must have left the alternate screen, show the
//! cursor, have echo and line editing back (`stty -a` in the pane), and the
//! exit status must be 128 plus the signal number (the usual shell
//! convention for a program ended by a signal; POSIX `sh`, "Exit Status").
//!
//! Skipped, with the reason printed, where tmux is not installed. Each
//! wait is bounded.

#![cfg(unix)]

use std::path::Path;
use std::process::{Command, Output};
use std::time::{Duration, Instant};

const WAIT: Duration = Duration::from_secs(20);

fn tmux(sock: &str, args: &[&str]) -> Output {
    Command::new("tmux")
        .arg("-L")
        .arg(sock)
        .args(args)
        .env_remove("TMUX")
        .output()
        .expect("run tmux")
}

fn tmux_out(sock: &str, args: &[&str]) -> String {
    String::from_utf8_lossy(&tmux(sock, args).stdout).to_string()
}

fn tmux_present() -> bool {
    Command::new("tmux")
        .arg("-V")
        .output()
        .is_ok_and(|o| o.status.success())
}

/// Poll `f` until it returns Some, or fail after [`WAIT`] with `what`.
fn wait_for<T>(what: &str, mut f: impl FnMut() -> Option<T>) -> T {
    let t0 = Instant::now();
    loop {
        if let Some(v) = f() {
            return v;
        }
        assert!(t0.elapsed() < WAIT, "timed out waiting for {what}");
        std::thread::sleep(Duration::from_millis(100));
    }
}

/// The first child of `pid` (Linux /proc; the shell's one foreground child).
fn child_of(pid: &str) -> Option<String> {
    let p = format!("/proc/{pid}/task/{pid}/children");
    let text = std::fs::read_to_string(p).ok()?;
    text.split_whitespace().next().map(str::to_string)
}

struct Server(String);

impl Drop for Server {
    fn drop(&mut self) {
        let _ = tmux(&self.0, &["kill-server"]);
    }
}

fn run_one(signal: &str, number: i32, dir: &Path) {
    let sock = format!("cagehand-sig-{}-{signal}", std::process::id());
    let _server = Server(sock.clone());
    let pidfile = dir.join(format!("{signal}.pid"));
    let bin = env!("CARGO_BIN_EXE_cagehand");
    let script = format!(
        "echo $$ > '{}'; '{}'; echo \"EXIT=$?\"; stty -a; echo STTY-DONE; sleep 60",
        pidfile.display(),
        bin
    );
    let data = format!("CAGEHAND_DATA={}", dir.join("data").display());
    let out = tmux(
        &sock,
        &[
            "new-session",
            "-d",
            "-s",
            "t",
            "-x",
            "80",
            "-y",
            "24",
            "-e",
            &data,
            "-e",
            "NO_COLOR=1",
            "sh",
            "-c",
            &script,
        ],
    );
    assert!(out.status.success(), "tmux new-session: {out:?}");
    let shell = wait_for("the pane's shell", || {
        std::fs::read_to_string(&pidfile)
            .ok()
            .map(|s| s.trim().to_string())
            .filter(|s| !s.is_empty())
    });
    // The screens are up: alternate screen on and the tabs drawn.
    wait_for("the screens to draw", || {
        let alt = tmux_out(&sock, &["display", "-p", "-t", "t", "#{alternate_on}"]);
        let pane = tmux_out(&sock, &["capture-pane", "-p", "-t", "t"]);
        (alt.trim() == "1" && pane.contains("Watch") && pane.contains("Righting")).then_some(())
    });
    let pid = wait_for("the program's pid", || child_of(&shell));
    let kill = Command::new("kill")
        .args(["-s", signal, &pid])
        .output()
        .expect("run kill");
    assert!(kill.status.success(), "kill -s {signal}: {kill:?}");
    // `stty -a` prints several lines and the pane may be read between
    // them, so wait for the marker echoed after it has finished.
    let pane = wait_for("the exit line and the whole of stty -a", || {
        let pane = tmux_out(&sock, &["capture-pane", "-p", "-t", "t"]);
        (pane.contains("EXIT=") && pane.contains("STTY-DONE")).then_some(pane)
    });
    assert!(
        pane.contains(&format!("EXIT={}", 128 + number)),
        "SIG{signal}: exit status 128 + {number}:\n{pane}"
    );
    let alt = tmux_out(&sock, &["display", "-p", "-t", "t", "#{alternate_on}"]);
    assert_eq!(alt.trim(), "0", "SIG{signal}: alternate screen left");
    let cursor = tmux_out(&sock, &["display", "-p", "-t", "t", "#{cursor_flag}"]);
    assert_eq!(cursor.trim(), "1", "SIG{signal}: cursor shown again");
    // stty -a lists "echo" and "icanon" when on, "-echo" "-icanon" when off.
    let words: Vec<&str> = pane.split_whitespace().collect();
    for flag in ["echo", "icanon", "isig"] {
        assert!(
            words.contains(&flag) && !words.contains(&format!("-{flag}").as_str()),
            "SIG{signal}: {flag} back on after the restore:\n{pane}"
        );
    }
}

#[test]
fn each_signal_restores_the_terminal_and_exits_128_plus_it() {
    if !tmux_present() {
        println!("skipped: tmux is not installed, so there is no terminal to check");
        return;
    }
    if !Path::new("/proc/self/task").exists() {
        println!("skipped: no /proc to find the program's pid in the pane");
        return;
    }
    let dir = tempfile::tempdir().expect("temp dir");
    for (signal, number) in [("TERM", 15), ("INT", 2), ("HUP", 1)] {
        run_one(signal, number, dir.path());
    }
}
