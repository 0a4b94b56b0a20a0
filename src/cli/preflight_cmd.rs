//! `cagehand preflight`: evaluate the checklist (src/preflight.rs) against
//! the cage log and, with `--link`, a few seconds of live data; `preflight
//! sign` records the sign-off, or refuses with every reason and writes
//! nothing.

use super::link_args::LinkArgs;
use super::log_cmd::{LogOpts, same_log_args, store_err};
use super::{Loaded, bad_input};
use crate::transport::Mode;
use cagehand::feed::Feed;
use cagehand::logbook::Access;
use cagehand::preflight::{self, Evaluation, ItemKind, LogInput, Outcome, SignError, SignOff};
use cagehand::text::terminal;
use cagehand::tracker::{WatchState, WatchStateKind};
use serde::Serialize;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;
use std::sync::mpsc::RecvTimeoutError;
use std::time::{Duration, Instant};

/// How long to listen for live items when `--listen-s` is not given.
const DEFAULT_LISTEN_S: f64 = 3.0;

/// Evaluate or sign the pre-flight checklist.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// Vehicle profile (TOML); the built-in demo profile when omitted.
    #[arg(long, value_name = "FILE", global = true)]
    profile: Option<PathBuf>,
    #[command(flatten)]
    log: LogOpts,
    /// Listen to this link for the live items (take-off face, link,
    /// battery): udp:HOST:PORT, serial:PATH@BAUD, file:PATH, sim[:SEED].
    /// Without it the live items are waiting.
    #[arg(long, value_name = "SPEC", global = true)]
    link: Option<String>,
    /// Listen for up to this many seconds (default 3).
    #[arg(long, value_name = "S", global = true, requires = "link")]
    listen_s: Option<f64>,
    /// MAVLink 2 signing key for the link; adds the signing item.
    #[arg(long, value_name = "FILE", global = true, requires = "link")]
    signing_key: Option<PathBuf>,
    /// Print JSON.
    #[arg(long, global = true)]
    json: bool,
    #[command(subcommand)]
    action: Option<Action>,
}

#[derive(Debug, clap::Subcommand)]
enum Action {
    /// Sign the pre-flight off: tick hand items, give override reasons.
    Sign {
        /// Hand items checked: `all`, or numbers `N[,N...]`.
        #[arg(long, value_name = "all|N,..")]
        tick: Option<String>,
        /// An automatic item to sign over although it does not pass
        /// (repeat; each with its --reason, in the same order).
        #[arg(long = "override", value_name = "N")]
        overrides: Vec<u32>,
        /// Why the item before it is overridden.
        #[arg(long, value_name = "TEXT")]
        reason: Vec<String>,
        /// Free text stored with the sign-off.
        #[arg(long, value_name = "TEXT")]
        note: Option<String>,
    },
}

#[derive(Serialize)]
struct EvalJson<'a> {
    schema: &'static str,
    vehicle: &'a str,
    log: &'a str,
    items: &'a [preflight::ItemEval],
    can_sign: bool,
    blocking: Vec<String>,
}

#[derive(Serialize)]
struct SignJson<'a> {
    schema: &'static str,
    vehicle: &'a str,
    log: &'a str,
    signed: bool,
    seq: Option<u64>,
    operator: Option<&'a str>,
    blocking: &'a [String],
}

/// Listen to the link for up to `listen_s`, through the core feed; stop
/// early once the picture is settled. None without `--link`.
fn listen(args: &Args, l: &Loaded) -> anyhow::Result<Option<(WatchState, bool)>> {
    let Some(spec) = &args.link else {
        return Ok(None);
    };
    let listen_s = args.listen_s.unwrap_or(DEFAULT_LISTEN_S);
    if !(listen_s.is_finite() && listen_s > 0.0 && listen_s <= 600.0) {
        return Err(bad_input(format!(
            "--listen-s {listen_s}: expected a number of seconds above 0, up to 600"
        )));
    }
    let link_args = LinkArgs {
        link: spec.clone(),
        signing_key: args.signing_key.clone(),
        ..LinkArgs::default_sim()
    };
    let mut link = link_args.open(Some(l.cage.clone()), Mode::Decode, || args.log.data_dir())?;
    let mut feed = Feed::new(l.cage.clone(), &l.profile, &link.source);
    let start = Instant::now();
    let deadline = Duration::from_secs_f64(listen_s);
    let mut detections = Vec::new();
    while let Some(left) = deadline.checked_sub(start.elapsed()) {
        let msg = match link.rx.recv_timeout(left) {
            Ok(m) => m,
            Err(RecvTimeoutError::Timeout) | Err(RecvTimeoutError::Disconnected) => break,
        };
        let step = feed.push(super::live::feed_input(msg));
        if let Some(d) = step.detection {
            detections.push(d);
        }
        if step.ended {
            break;
        }
        // Resting on a face with battery known: nothing more to wait for.
        if step.state.state == WatchStateKind::Resting && step.state.battery_v.is_some() {
            break;
        }
    }
    if let Some(d) = feed.finish() {
        detections.push(d);
    }
    // A crash seen while listening is a crash: it goes in the log (and
    // then blocks the sign-off) like any other detection.
    for d in &detections {
        let operator = args.log.operator()?;
        let mut book = args.log.open(l, Access::Write)?;
        let logged = cagehand::logbook::detection::record(
            &mut book,
            &operator,
            jiff::Timestamp::now(),
            d.clone(),
        )
        .map_err(store_err)?;
        say_err!(
            "cagehand: impact detected while listening: {:.1} g on {}; detection #{} in the cage log of {} ({})",
            d.peak_g,
            d.face,
            logged.seq,
            l.profile.vehicle.id,
            book.path().display()
        );
    }
    Ok(Some((feed.state(), args.signing_key.is_some())))
}

/// The log's integrity problems in one line, for the cage-log item: said
/// whether or not the log file exists (records set aside from a log that
/// is gone still count).
fn integrity_trouble(report: &cagehand::logbook::OpenReport) -> Option<String> {
    report
        .integrity
        .headline()
        .map(|h| format!("{h}; see `cagehand log verify`"))
}

fn evaluate(
    l: &Loaded,
    live: Option<&(WatchState, bool)>,
    records: &[cagehand::logbook::Record],
    path: &str,
    new_file: bool,
    trouble: Option<&str>,
    held_aside: bool,
) -> Evaluation {
    // The margin item's figure, computed only when the profile asks for it;
    // no answer leaves the item waiting (it blocks), never passing.
    let margin = l.profile.preflight.min_margin_speed_m_per_s.and_then(|_| {
        super::margin_cmd::compute(l, records, None, cagehand::margin::Strikes::Faces)
            .ok()
            .and_then(|t| t.summary())
    });
    preflight::evaluate(&preflight::Inputs {
        profile: &l.profile,
        cage: &l.cage,
        live: live.map(|(st, _)| st),
        log: LogInput::Read {
            records,
            path,
            new_file,
            trouble,
            held_aside,
        },
        signing: live.and_then(|(_, key)| key.then_some(true)),
        margin: margin.as_ref(),
    })
}

fn write_items(out: &mut impl Write, e: &Evaluation) -> anyhow::Result<()> {
    for i in &e.items {
        let kind = match i.kind {
            ItemKind::Auto => "auto",
            ItemKind::Hand => "hand",
        };
        writeln!(
            out,
            "{:>2}. {:<7} {:<4} {}",
            i.n,
            i.result.name().to_uppercase(),
            kind,
            terminal(&i.text)
        )?;
        if i.result != Outcome::Hand {
            writeln!(out, "             {}", terminal(&i.detail))?;
        }
    }
    Ok(())
}

/// `--tick all` or `N[,N...]`.
fn parse_ticks(tick: Option<&str>, e: &Evaluation) -> anyhow::Result<Vec<u32>> {
    let Some(t) = tick.map(str::trim) else {
        return Ok(Vec::new());
    };
    if t.eq_ignore_ascii_case("all") {
        return Ok(e.hand_items());
    }
    t.split(',')
        .map(|p| {
            p.trim().parse::<u32>().map_err(|_| {
                bad_input(format!(
                    "--tick {t}: expected `all` or item numbers like 5,6,7; {p:?} is not a number"
                ))
            })
        })
        .collect()
}

/// Run `cagehand preflight`.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let l = super::load_profile(args.profile.as_deref())?;
    if let Some(Action::Sign {
        overrides, reason, ..
    }) = &args.action
        && overrides.len() != reason.len()
    {
        return Err(bad_input(format!(
            "{} --override and {} --reason: give one --reason TEXT after each --override N",
            overrides.len(),
            reason.len()
        )));
    }
    let live = listen(args, &l)?;
    let vehicle = l.profile.vehicle.id.clone();
    let mut out = std::io::stdout().lock();
    match &args.action {
        None => {
            let (book, report) = args.log.open_reporting(&l, Access::Read)?;
            let path = book.path().display().to_string();
            let trouble = integrity_trouble(&report);
            let e = evaluate(
                &l,
                live.as_ref(),
                book.records(),
                &path,
                report.new_file,
                trouble.as_deref(),
                report.integrity.holds_set_aside(),
            );
            if args.json {
                let j = EvalJson {
                    schema: "cagehand.preflight/1",
                    vehicle: &vehicle,
                    log: &path,
                    items: &e.items,
                    can_sign: e.can_sign(),
                    blocking: e.blocking(),
                };
                super::write_json(&mut out, &j)?;
            } else {
                writeln!(
                    out,
                    "pre-flight of {} (cage log {})",
                    terminal(&vehicle),
                    terminal(&path)
                )?;
                write_items(&mut out, &e)?;
                writeln!(out)?;
                if e.can_sign() {
                    writeln!(
                        out,
                        "ready to sign once every hand item is checked: `cagehand preflight sign --tick all{}`",
                        same_log_args(&l, &args.log)
                    )?;
                } else {
                    writeln!(out, "not ready to sign:")?;
                    for b in e.blocking() {
                        writeln!(out, "  {}", terminal(&b))?;
                    }
                }
                writeln!(out, "Caution: {}", cagehand::report::CAUTION)?;
            }
            Ok(ExitCode::SUCCESS)
        }
        Some(Action::Sign {
            tick,
            overrides,
            reason,
            note,
        }) => {
            let operator = args.log.operator()?;
            // Evaluate under the write lock, so no record slips in between.
            let (mut book, report) = args.log.open_reporting(&l, Access::Write)?;
            let path = book.path().display().to_string();
            let trouble = integrity_trouble(&report);
            let records = book.records().to_vec();
            let e = evaluate(
                &l,
                live.as_ref(),
                &records,
                &path,
                report.new_file,
                trouble.as_deref(),
                report.integrity.holds_set_aside(),
            );
            let s = SignOff {
                ticked: parse_ticks(tick.as_deref(), &e)?.into_iter().collect(),
                overrides: overrides
                    .iter()
                    .copied()
                    .zip(reason.iter().cloned())
                    .collect(),
                note: note.clone(),
            };
            match preflight::sign_and_record(&mut book, &operator, jiff::Timestamp::now(), &e, &s) {
                Ok(rec) => {
                    if args.json {
                        let j = SignJson {
                            schema: "cagehand.preflight-sign/1",
                            vehicle: &vehicle,
                            log: &path,
                            signed: true,
                            seq: Some(rec.seq),
                            operator: Some(&operator),
                            blocking: &[],
                        };
                        super::write_json(&mut out, &j)?;
                    } else {
                        writeln!(out, "{}", rec.seq)?;
                        say_err!(
                            "cagehand: pre-flight of {vehicle} signed off by {operator}: record #{} in {path}",
                            rec.seq
                        );
                    }
                    Ok(ExitCode::SUCCESS)
                }
                Err(SignError::Refused(r)) => {
                    if args.json {
                        let j = SignJson {
                            schema: "cagehand.preflight-sign/1",
                            vehicle: &vehicle,
                            log: &path,
                            signed: false,
                            seq: None,
                            operator: None,
                            blocking: &r.reasons,
                        };
                        super::write_json(&mut out, &j)?;
                    }
                    say_err!(
                        "cagehand: pre-flight of {vehicle} NOT signed; nothing was written to {path}:"
                    );
                    for reason in &r.reasons {
                        say_err!("  {}", terminal(reason));
                    }
                    Ok(ExitCode::from(1))
                }
                Err(SignError::Store(e)) => {
                    Err(store_err(e).context("the sign-off was not recorded"))
                }
            }
        }
    }
}
