//! `cagehand record`: save a link's raw bytes with their arrival times in
//! our recording format (src/link/record.rs), for `--link file:PATH`.

use super::link_args::LinkArgs;
use crate::transport::{LinkEvent, LinkMsg, Mode};
use anyhow::Context;
use cagehand::link::record::{Header, RecordWriter};
use serde::Serialize;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::mpsc::RecvTimeoutError;
use std::time::Duration;

/// Record a link.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    profile: super::ProfileArg,
    #[command(flatten)]
    link: LinkArgs,
    /// Output file (not overwritten if it exists).
    #[arg(long, value_name = "FILE")]
    out: PathBuf,
    /// Stop after this many seconds of link time.
    #[arg(long, value_name = "S")]
    duration_s: Option<f64>,
}

/// The schema of every line `record` prints (docs/json.md).
const RECORD_SCHEMA: &str = "cagehand.record/1";

#[derive(Debug, Serialize)]
struct Report {
    schema: &'static str,
    event: &'static str,
    out: String,
    link: String,
    chunks: u64,
    bytes: u64,
    duration_s: f64,
}

/// Run the recorder.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    super::check_duration_s(args.duration_s)?;
    let spec = args.link.spec()?;
    let cage = match spec {
        cagehand::link::spec::LinkSpec::Sim { .. } => Some(args.profile.load()?.cage),
        _ => None,
    };
    // A recording keeps the bytes as they came: nothing is checked, so no
    // replay floor (and no data folder) is needed.
    let mut link = args.link.open(cage, Mode::Raw, || {
        Err(super::bad_input("recording keeps no replay floor"))
    })?;
    let file = std::fs::OpenOptions::new()
        .write(true)
        .create_new(true)
        .open(&args.out)
        .map_err(|e| super::bad_input(format!("cannot create {}: {e}", args.out.display())))?;
    let header = Header {
        link: link.source.clone(),
        started_utc: jiff::Timestamp::now().to_string(),
    };
    let mut w = RecordWriter::new(std::io::BufWriter::new(file), &header)
        .with_context(|| format!("writing {}", args.out.display()))?;
    let mut out = std::io::stdout().lock();
    // First line: the recorder is listening (tests and scripts wait for it).
    writeln!(
        out,
        "{}",
        serde_json::json!({"schema": RECORD_SCHEMA, "event": "started", "out": args.out.display().to_string(), "link": link.source})
    )?;
    out.flush()?;
    let (mut chunks, mut bytes, mut t) = (0u64, 0u64, 0.0f64);
    loop {
        let msg = match link.rx.recv_timeout(Duration::from_secs(2)) {
            Ok(m) => m,
            Err(RecvTimeoutError::Timeout) => continue,
            Err(RecvTimeoutError::Disconnected) => break,
        };
        match msg {
            LinkMsg::Bytes { at_s, data } => {
                w.write(at_s, &data)
                    .with_context(|| format!("writing {}", args.out.display()))?;
                chunks += 1;
                bytes += data.len() as u64;
                t = t.max(at_s);
            }
            LinkMsg::Event { at_s, event } => {
                t = t.max(at_s);
                let text = match event {
                    LinkEvent::Lost(s) | LinkEvent::Note(s) => s,
                    LinkEvent::Reopened => "link reopened".into(),
                };
                let _ = writeln!(
                    std::io::stderr().lock(),
                    "cagehand: {}: {text}",
                    link.source
                );
            }
            LinkMsg::End { .. } => break,
            LinkMsg::Tick { at_s }
            | LinkMsg::Health { at_s, .. }
            | LinkMsg::Sample { at_s, .. } => t = t.max(at_s),
        }
        if args.duration_s.is_some_and(|d| t >= d) {
            break;
        }
    }
    let r = Report {
        schema: RECORD_SCHEMA,
        event: "done",
        out: args.out.display().to_string(),
        link: link.source.clone(),
        chunks,
        bytes,
        duration_s: (t * 1000.0).round() / 1000.0,
    };
    writeln!(out, "{}", serde_json::to_string(&r)?)?;
    Ok(ExitCode::SUCCESS)
}
