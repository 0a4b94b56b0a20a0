//! Command-line conventions a Rust tool user expects: shell completions, a
//! manual page, `--color`, and a checked CAGEHAND_LOCK_WAIT_S. These run
//! the real binary.

use std::process::Command;

fn cagehand(args: &[&str]) -> std::process::Output {
    Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args(args)
        .output()
        .expect("the binary runs")
}

#[test]
fn completions_name_every_subcommand() {
    for shell in ["bash", "zsh", "fish"] {
        let out = cagehand(&["completions", shell]);
        assert!(out.status.success(), "{shell}: {out:?}");
        let text = String::from_utf8_lossy(&out.stdout);
        for sub in ["cage", "plan", "impact", "log", "watch", "profile"] {
            assert!(text.contains(sub), "{shell} completion lacks {sub}");
        }
    }
}

/// A reader that closes early (`cagehand completions bash | head -1`):
/// exit 0, no panic (exit 101). The pipe is closed before the program
/// starts, so every write fails.
#[test]
fn completions_and_the_manual_to_a_closed_pipe_exit_0() {
    for args in [
        &["completions", "bash"][..],
        &["completions", "powershell"][..],
        &["manual"][..],
    ] {
        let (reader, writer) = std::io::pipe().unwrap();
        drop(reader);
        let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
            .args(args)
            .stdout(writer)
            .output()
            .expect("the binary runs");
        assert_eq!(out.status.code(), Some(0), "{args:?}: {out:?}");
    }
}

#[test]
fn completions_refuse_an_unknown_shell() {
    let out = cagehand(&["completions", "teletype"]);
    assert_eq!(out.status.code(), Some(2));
}

#[test]
fn manual_is_a_roff_page() {
    let out = cagehand(&["manual"]);
    assert!(out.status.success());
    let text = String::from_utf8_lossy(&out.stdout);
    assert!(text.starts_with(".ie") || text.contains(".TH"), "{text}");
    assert!(text.contains("cagehand"));
}

#[test]
fn color_takes_three_values_anywhere() {
    for v in ["auto", "always", "never"] {
        let out = cagehand(&["cage", "--color", v]);
        assert!(out.status.success(), "--color {v}: {out:?}");
    }
    let out = cagehand(&["--color", "sometimes", "cage"]);
    assert_eq!(out.status.code(), Some(2));
    assert!(String::from_utf8_lossy(&out.stderr).contains("sometimes"));
}

#[test]
fn a_bad_lock_wait_is_refused_not_ignored() {
    let out = Command::new(env!("CARGO_BIN_EXE_cagehand"))
        .args(["cage"])
        .env("CAGEHAND_LOCK_WAIT_S", "soon")
        .output()
        .expect("the binary runs");
    assert_eq!(out.status.code(), Some(2));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(err.contains("CAGEHAND_LOCK_WAIT_S"), "{err}");
    assert!(err.contains("0 to 3600"), "{err}");
}
