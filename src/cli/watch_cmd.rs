//! `cagehand watch`: live state of the vehicle. `--headless` prints one
//! JSON object per line (a contract: scripts and checks parse it; see
//! docs/json.md) on every change of state or face and once a second of
//! link time; for every detected impact a line with a `detection` object,
//! after writing the detection to the vehicle's cage log; `--summary` adds
//! one object when the input ends.

use super::link_args::LinkArgs;
use super::log_cmd::LogOpts;
use super::{Loaded, ProfileArg};
use crate::transport::Mode;
use cagehand::feed::Feed;
use cagehand::logbook::{Access, DetectionEvent, detection};
use cagehand::tracker::WatchStateKind;
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
    log: LogOpts,
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

/// The `detection` object of a headless line.
#[derive(Debug, Serialize)]
struct DetectionLine<'a> {
    schema: &'static str,
    /// Peak time on the link's sample clock, s.
    link_time_s: f64,
    peak_g: f64,
    face: &'a str,
    speed_m_per_s: Option<f64>,
    direction_body: [f64; 3],
    source: &'a str,
    /// The detection's record in the cage log; null when it could not be
    /// written (the reason is on stderr).
    logged_seq: Option<u64>,
    /// False when the log already held it (the same recording replayed).
    new_record: bool,
    vehicle: &'a str,
    log: Option<String>,
}

/// A detection line: its own schema beside the state lines'
/// (`cagehand.watch/1`) and the summary's (docs/json.md).
#[derive(Debug, Serialize)]
struct DetectionJson<'a> {
    schema: &'static str,
    detection: DetectionLine<'a>,
}

/// Write a detection to the vehicle's log at once (the log is opened for
/// this one write, so other writers are not held off while watching).
/// Says on stderr where it went, or why it could not be written.
fn log_detection(
    l: &Loaded,
    opts: &LogOpts,
    d: &DetectionEvent,
) -> (Option<detection::Logged>, Option<String>) {
    let vehicle = &l.profile.vehicle.id;
    let written = opts.operator().and_then(|operator| {
        let mut book = opts.open(l, Access::Write)?;
        let path = book.path().display().to_string();
        let logged = detection::record(&mut book, &operator, jiff::Timestamp::now(), d.clone())
            .map_err(super::log_cmd::store_err)?;
        Ok((logged, path))
    });
    match written {
        Ok((logged, path)) => {
            let what = if logged.new {
                format!("written as #{}", logged.seq)
            } else {
                format!("already in the log as #{} (a replay)", logged.seq)
            };
            let args = super::log_cmd::same_log_args(l, opts);
            say_err!(
                "cagehand: impact detected: {:.1} g, likely on {}; {what} in the cage log of {vehicle} ({path}); confirm or dismiss it with `cagehand log confirm {}{args}` or `cagehand log dismiss {} --reason TEXT{args}`",
                d.peak_g,
                d.face,
                logged.seq,
                logged.seq,
            );
            (Some(logged), Some(path))
        }
        Err(e) => {
            say_err!(
                "cagehand: impact detected: {:.1} g, likely on {}, but NOT written to the cage log of {vehicle}: {e:#}; record it by hand with `cagehand impact --face {} --peak-accel-g {:.1}{}`",
                d.peak_g,
                d.face,
                d.face,
                d.peak_g,
                super::log_cmd::same_log_args(l, opts)
            );
            (None, None)
        }
    }
}

/// Log a detection and print its line; false when stdout has gone away.
fn write_detection(
    out: &mut impl Write,
    loaded: &Loaded,
    opts: &LogOpts,
    d: &DetectionEvent,
) -> anyhow::Result<bool> {
    let (logged, log) = log_detection(loaded, opts, d);
    let line = DetectionJson {
        schema: "cagehand.watch-detection/1",
        detection: DetectionLine {
            schema: "cagehand.detection/1",
            link_time_s: d.link_time_s,
            peak_g: d.peak_g,
            face: &d.face,
            speed_m_per_s: d.speed_m_per_s,
            direction_body: d.direction_body,
            source: &d.source,
            logged_seq: logged.map(|l| l.seq),
            new_record: logged.is_some_and(|l| l.new),
            vehicle: &loaded.profile.vehicle.id,
            log,
        },
    };
    Ok(writeln!(out, "{}", serde_json::to_string(&line)?).is_ok())
}

/// Whether the feed's clock as a line shows it ([`Feed::time_s`], rounded
/// to the millisecond) has reached `mark_s`, a whole second. Asked for
/// every message of a fast replay, so the rounding is done only near the
/// mark: a clock more than a millisecond short of it cannot round up to it.
fn reaches(feed: &Feed, mark_s: f64) -> bool {
    let (clock_ms, mark_ms) = (feed.clock_s() * 1000.0, mark_s * 1000.0);
    if mark_s.abs() < 1e9 && (mark_s as i64) as f64 == mark_s && clock_ms < mark_ms - 1.0 {
        return false;
    }
    feed.time_s() >= mark_s
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
    let mut link = args
        .link
        .open(Some(cage.clone()), Mode::Decode, || args.log.data_dir())?;
    let mut feed = Feed::new(cage.clone(), &loaded.profile, &link.source);
    let mut out = std::io::stdout().lock();
    let mut last_link = None;
    let mut next_periodic = 0.0;
    let mut lines = 0u64;
    let mut states = BTreeSet::new();
    loop {
        let msg = match link.rx.recv_timeout_ref(Duration::from_secs(2)) {
            Ok(m) => m,
            Err(RecvTimeoutError::Timeout) => continue,
            Err(RecvTimeoutError::Disconnected) => break,
        };
        let step = feed.advance_ref(super::live::feed_input_ref(msg));
        if let Some(text) = &step.note {
            let _ = writeln!(
                std::io::stderr().lock(),
                "cagehand: {}: {text}",
                link.source
            );
        }
        // The state is built only when a line may be due: a change, a new
        // second of link time, or the end.
        if step.changed || step.ended || reaches(&feed, next_periodic) {
            let st = feed.state();
            // At the end, a last line if the link's counters moved since the
            // last one, so the last line agrees with the summary.
            let link_moved = step.ended && last_link.as_ref() != Some(&st.link);
            if step.changed || st.t >= next_periodic || link_moved {
                states.insert(st.state);
                if writeln!(out, "{}", serde_json::to_string(&st)?).is_err() {
                    return Ok(ExitCode::SUCCESS); // the reader of our output went away
                }
                lines += 1;
                next_periodic = st.t.floor() + 1.0;
                last_link = Some(st.link);
            }
        }
        if let Some(d) = &step.detection {
            if !write_detection(&mut out, &loaded, &args.log, d)? {
                return Ok(ExitCode::SUCCESS);
            }
            lines += 1;
        }
        if step.ended {
            break;
        }
        if args.duration_s.is_some_and(|d| feed.time_s() >= d) {
            // Stopping early: an impact in progress is still reported.
            if let Some(d) = feed.finish() {
                write_detection(&mut out, &loaded, &args.log, &d)?;
                lines += 1;
            }
            break;
        }
    }
    if args.summary {
        let tracker = feed.tracker();
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
