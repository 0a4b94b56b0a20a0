//! `cagehand watch`: live state of the vehicle. `--headless` prints one
//! JSON object per line (a contract: scripts and checks parse it; see
//! docs/json.md) on every change of state or face and once a second of
//! link time; `--summary` adds one object when the input ends.

use super::ProfileArg;
use super::link_args::LinkArgs;
use crate::link::transport::{LinkEvent, LinkMsg, Mode};
use crate::tracker::{Tracker, WatchStateKind};
use serde::Serialize;
use std::collections::BTreeSet;
use std::io::Write;
use std::process::ExitCode;
use std::sync::mpsc::RecvTimeoutError;
use std::time::{Duration, Instant};

/// Watch the vehicle.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    profile: ProfileArg,
    #[command(flatten)]
    link: LinkArgs,
    #[command(flatten)]
    log: super::log_cmd::LogOpts,
    /// Print JSON lines instead of the screen.
    #[arg(long)]
    headless: bool,
    /// At the end of a finite input, print one summary object.
    #[arg(long)]
    summary: bool,
    /// Stop after this many seconds of link time.
    #[arg(long, value_name = "S")]
    duration_s: Option<f64>,
}

#[derive(Debug, Serialize)]
struct Errors {
    crc: u64,
    unknown: u64,
    malformed: u64,
    rejected: u64,
    dropped: u64,
}

#[derive(Debug, Serialize)]
struct Summary {
    schema: &'static str,
    summary: bool,
    source: String,
    frames_decoded: u64,
    errors: Errors,
    faces_seen: Vec<String>,
    states_seen: Vec<WatchStateKind>,
    lines: u64,
    link_time_s: f64,
    wall_time_s: f64,
}

/// Run the watch.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    if !args.headless {
        if args.summary || args.duration_s.is_some() {
            return Err(super::bad_input(
                "--summary and --duration-s go with --headless",
            ));
        }
        return super::tui_cmd::run(args.profile.load()?, &args.link, &args.log);
    }
    super::check_duration_s(args.duration_s)?;
    let loaded = args.profile.load()?;
    let cage = &loaded.cage;
    let wall0 = Instant::now();
    let link = args.link.open(Some(cage.clone()), Mode::Decode)?;
    let mut tracker = Tracker::new(&loaded.profile.watch, &link.source);
    let mut out = std::io::stdout().lock();
    let mut last_key = None;
    let mut last_link = None;
    let mut next_periodic = 0.0;
    let mut lines = 0u64;
    let mut states = BTreeSet::new();
    loop {
        let msg = match link.rx.recv_timeout(Duration::from_secs(2)) {
            Ok(m) => m,
            Err(RecvTimeoutError::Timeout) => continue,
            Err(RecvTimeoutError::Disconnected) => break,
        };
        let mut ended = false;
        match msg {
            LinkMsg::Sample { at_s, sample } => tracker.update(cage, at_s, &sample),
            LinkMsg::Health { at_s, counters } => {
                tracker.tick(at_s);
                tracker.set_counters(counters);
            }
            LinkMsg::Tick { at_s } => tracker.tick(at_s),
            LinkMsg::Bytes { at_s, .. } => tracker.tick(at_s),
            LinkMsg::Event { at_s, event } => {
                tracker.tick(at_s);
                let text = match event {
                    LinkEvent::Lost(s) | LinkEvent::Note(s) => s,
                    LinkEvent::Reopened => "link reopened".to_string(),
                };
                let _ = writeln!(
                    std::io::stderr().lock(),
                    "cagehand: {}: {text}",
                    link.source
                );
            }
            LinkMsg::End { at_s } => {
                tracker.tick(at_s);
                ended = true;
            }
        }
        let st = tracker.state(cage);
        let key = (st.state, st.face.clone());
        // At the end, a last line if the link's counters moved since the
        // last one, so the last line agrees with the summary.
        let link_moved = ended && last_link.as_ref() != Some(&st.link);
        if last_key.as_ref() != Some(&key) || st.t >= next_periodic || link_moved {
            states.insert(st.state);
            if writeln!(out, "{}", serde_json::to_string(&st)?).is_err() {
                return Ok(ExitCode::SUCCESS); // the reader of our output went away
            }
            lines += 1;
            last_key = Some(key);
            last_link = Some(st.link.clone());
            next_periodic = st.t.floor() + 1.0;
        }
        if ended || args.duration_s.is_some_and(|d| st.t >= d) {
            break;
        }
    }
    if args.summary {
        let c = tracker.counters();
        let s = Summary {
            schema: "cagehand.watch-summary/1",
            summary: true,
            source: link.source.clone(),
            frames_decoded: c.frames,
            errors: Errors {
                crc: c.crc_errors,
                unknown: c.unknown,
                malformed: c.malformed,
                rejected: c.rejected,
                dropped: c.dropped,
            },
            faces_seen: tracker
                .faces_seen()
                .iter()
                .filter_map(|&i| cage.faces.get(i).map(|f| f.id.clone()))
                .collect(),
            states_seen: states.into_iter().collect(),
            lines,
            link_time_s: tracker.state(cage).t,
            wall_time_s: (wall0.elapsed().as_secs_f64() * 1000.0).round() / 1000.0,
        };
        let _ = writeln!(out, "{}", serde_json::to_string(&s)?);
    }
    Ok(ExitCode::SUCCESS)
}
