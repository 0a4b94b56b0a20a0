//! Opening the screens: build the model, read the cage log, start the feed
//! thread (link -> core feed -> live picture; detections written to the
//! cage log at once), and hand over to the terminal loop, which carries out
//! the model's effects.

use super::Loaded;
use super::link_args::LinkArgs;
use super::log_cmd::{LogOpts, lock_wait};
use crate::transport::{Link, Mode};
use crate::tui::form::Work;
use crate::tui::margin_map::{LogMark, log_mark};
use crate::tui::model::{Effect, LinkView, LiveState, LiveView, Model, Msg, RestSample, count};
use crate::tui::theme::{ColourDepth, Theme};
use cagehand::feed::Feed;
use cagehand::health::assess;
use cagehand::logbook::follow::Follower;
use cagehand::logbook::store::{Access, Logbook, OpenReport, log_file_name};
use cagehand::logbook::{Record, detection};
use cagehand::margin::MarginTable;
use cagehand::preflight;
use cagehand::sim::SimCommand;
use cagehand::tracker::{Tracker, WatchState, WatchStateKind};
use std::process::ExitCode;
use std::sync::mpsc::{self, Sender};
use std::sync::{Arc, Mutex};
use std::time::{Duration, Instant};

/// How often the feed thread looks whether the cage log changed, to pick
/// up records other processes wrote.
const LOG_REREAD: Duration = Duration::from_secs(1);

/// How often the feed thread reads the cage log whether or not its file
/// seems to have changed.
const LOG_FULL_REREAD: Duration = Duration::from_secs(10);

/// Open the screens on a loaded profile, fed by the link `link_args` names.
pub fn run(loaded: Loaded, link_args: &LinkArgs, log: &LogOpts) -> anyhow::Result<ExitCode> {
    use std::io::IsTerminal;
    if !std::io::stdout().is_terminal() || !std::io::stdin().is_terminal() {
        return Err(super::bad_input(
            "the screens need a terminal; for JSON lines use `cagehand watch --headless`",
        ));
    }
    let (health, health_source) = read_health(&loaded, log);
    let link = link_args.open(Some(loaded.cage.clone()), Mode::Decode, || log.data_dir())?;
    let theme = Theme::new(ColourDepth::for_choice(super::color_choice()));
    let model = Model::new(
        loaded.profile.clone(),
        loaded.cage.clone(),
        &link.source,
        theme,
    )
    .with_health(health, health_source);
    let mut model = model;
    model.shared.operator = log.operator_opt();
    model.shared.records = LogView::read(&loaded, log).records;
    model.shared.live.pending = detection::pending(&model.shared.records);
    let (tx, rx) = mpsc::channel::<Msg>();
    let commander = link.commander();
    let margin = spawn_margin(loaded.clone(), tx.clone());
    let writer = spawn_writer(loaded.clone(), log.clone(), tx.clone(), margin.clone());
    let back = tx.clone();
    spawn_feed(link, loaded, log.clone(), tx.clone(), margin);
    let signal = crate::tui::run(model, tx, rx, |effect| match effect {
        Effect::SimRoll(face) => {
            // Only the in-process simulator takes commands; on a real link the
            // operator flies the roll and the screen verifies it.
            if let Some(c) = &commander {
                let _ = c.send(SimCommand::Roll(face));
            }
        }
        Effect::Log {
            operator,
            work,
            seen_seq,
            eval,
        } => {
            // Carried out on the writer thread: the screens stay live while
            // a confirmation runs the impact analysis.
            let job = WriteJob {
                operator,
                work,
                seen_seq,
                eval,
            };
            if writer.send(job).is_err() {
                let _ = back.send(Msg::Written(
                    "NOT written: the log writer has stopped; restart the screens".to_string(),
                ));
            }
        }
    })?;
    // Ended by a signal: the usual 128 + its number, after the restore.
    Ok(match signal {
        Some(n) => ExitCode::from(u8::try_from(128 + n).unwrap_or(u8::MAX)),
        None => ExitCode::SUCCESS,
    })
}

/// Member health from the vehicle's cage log, or why there is none. A log
/// that cannot be read does not stop the screens; they say why.
fn read_health(l: &Loaded, log: &LogOpts) -> (Option<cagehand::health::HealthReport>, String) {
    let dir = match log.data_dir() {
        Ok(d) => d,
        Err(e) => return (None, format!("{e:#}")),
    };
    match Logbook::open(&dir, &l.profile.vehicle.id, Access::Read, lock_wait()) {
        Ok((book, _)) if book.records().is_empty() => (
            Some(assess(&[], &l.cage, &l.profile.inspection)),
            format!("no records yet in {}", book.path().display()),
        ),
        Ok((book, report)) => {
            // Integrity problems (skipped, changed or removed records) say
            // what they affect; the screens show this line.
            let note = match report.integrity.headline() {
                Some(h) => format!(" ({h}: run `cagehand log verify`)"),
                None => String::new(),
            };
            (
                Some(assess(book.records(), &l.cage, &l.profile.inspection)),
                format!(
                    "{} in {}{note}",
                    count(book.records().len(), "record"),
                    book.path().display()
                ),
            )
        }
        Err(e) => (None, format!("cannot read the cage log: {e}")),
    }
}

fn live_view(
    st: &WatchState,
    tracker: &Tracker,
    cage: &cagehand::cage::Cage,
    preflight: Option<preflight::Evaluation>,
    pending: Vec<cagehand::logbook::Pending>,
) -> LiveView {
    let errors = st.link.crc_errors + st.link.malformed + st.link.rejected;
    LiveView {
        state: match st.state {
            WatchStateKind::Resting => LiveState::Resting,
            WatchStateKind::Propped => LiveState::Propped,
            WatchStateKind::Moving => LiveState::Moving,
            WatchStateKind::Airborne => LiveState::Airborne,
            WatchStateKind::Stale => LiveState::Stale,
        },
        reason: st.reason.clone(),
        face: st.face_index,
        error_deg: st.error_deg,
        rpy_deg: st.rpy_deg,
        battery_v: st.battery_v,
        armed: st.armed,
        link: LinkView {
            source: st.link.source.clone(),
            rate_hz: st.link.rate_hz,
            age_s: st.link.age_ms.map(|ms| ms as f64 / 1000.0),
            frames: st.link.frames,
            errors,
        },
        rest: tracker
            .last_rest(cage)
            .map(|(t_s, attitude, status)| RestSample {
                t_s,
                attitude,
                status,
            }),
        preflight,
        pending,
    }
}

/// The cage log as the feed thread last read it (for the pre-flight
/// evaluation): re-read after each detection it writes.
struct LogView {
    records: Vec<Record>,
    path: String,
    new_file: bool,
    /// The log's integrity problems in one line (damage may be
    /// understated): fails the pre-flight as `log health` warns of it.
    trouble: Option<String>,
    /// Torn records wait in the side file (the trouble cannot be
    /// overridden then).
    held_aside: bool,
    error: Option<String>,
    /// Detections not yet confirmed or dismissed.
    pending: Vec<cagehand::logbook::Pending>,
    /// The pre-flight checks that look only at the log, worked out from
    /// this reading (None until [`LogView::read`] has).
    checks: Option<preflight::LogChecks>,
}

impl LogView {
    /// Read the log, and work out its pre-flight checks once.
    fn read(l: &Loaded, log: &LogOpts) -> LogView {
        let opened = log
            .data_dir()
            .map_err(|e| format!("{e:#}"))
            .and_then(|dir| {
                Logbook::open(&dir, &l.profile.vehicle.id, Access::Read, lock_wait())
                    .map_err(|e| e.to_string())
            });
        let mut view = match opened {
            Ok((book, report)) => LogView::of_open(&book, &report),
            Err(e) => LogView {
                records: Vec::new(),
                path: String::new(),
                new_file: false,
                trouble: None,
                held_aside: false,
                error: Some(e),
                pending: Vec::new(),
                checks: None,
            },
        };
        view.checks = Some(view.log_checks(l));
        view
    }

    /// The view of a log opened by the caller (its checks not worked out).
    fn of_open(book: &Logbook, report: &OpenReport) -> LogView {
        LogView {
            records: book.records().to_vec(),
            path: book.path().display().to_string(),
            new_file: report.new_file,
            trouble: report.integrity.headline(),
            held_aside: report.integrity.holds_set_aside(),
            error: None,
            pending: detection::pending(book.records()),
            checks: None,
        }
    }

    /// The pre-flight checks that look only at this reading of the log.
    fn log_checks(&self, l: &Loaded) -> preflight::LogChecks {
        preflight::LogChecks::of(&self.inputs(l, None, None))
    }

    /// What tells one reading of the log from another: the record count and
    /// the newest sequence number (the log is append-only).
    fn mark(&self) -> (usize, Option<u64>, bool) {
        (
            self.records.len(),
            self.records.last().map(|r| r.seq),
            self.error.is_some(),
        )
    }

    /// What the margin worker is asked to work out for this reading.
    fn margin_job(&self) -> MarginJob {
        match &self.error {
            Some(e) => Err(format!("cannot read the cage log: {e}")),
            None => Ok(self.records.clone()),
        }
    }

    /// The pre-flight's inputs from this reading of the log.
    fn inputs<'a>(
        &'a self,
        l: &'a Loaded,
        st: Option<&'a WatchState>,
        margin: Option<&'a preflight::MarginSummary>,
    ) -> preflight::Inputs<'a> {
        let log = match &self.error {
            Some(e) => preflight::LogInput::Unreadable(e),
            None => preflight::LogInput::Read {
                records: &self.records,
                path: &self.path,
                new_file: self.new_file,
                trouble: self.trouble.as_deref(),
                held_aside: self.held_aside,
            },
        };
        preflight::Inputs {
            profile: &l.profile,
            cage: &l.cage,
            live: st,
            log,
            signing: None,
            margin,
        }
    }

    fn evaluate(
        &self,
        l: &Loaded,
        st: Option<&WatchState>,
        margin: Option<&preflight::MarginSummary>,
    ) -> preflight::Evaluation {
        let inputs = self.inputs(l, st, margin);
        match &self.checks {
            Some(checks) => preflight::evaluate_with(&inputs, checks),
            None => preflight::evaluate(&inputs),
        }
    }
}

/// What the margin worker works from: the log's records, or why the log
/// could not be read.
type MarginJob = Result<Vec<Record>, String>;

/// The margin worker: asked with each new reading of the log, it works
/// the margin out off the screens' thread and the feed thread, sends it to
/// the screens, and keeps the pre-flight's summary for the feed.
#[derive(Clone)]
struct MarginWorker {
    jobs: Sender<MarginJob>,
    /// The summary for the reading last worked out.
    latest: Arc<Mutex<Option<Latest>>>,
}

/// A reading of the log and its pre-flight summary (None: no faces or no
/// solution).
type Latest = (LogMark, Option<preflight::MarginSummary>);

impl MarginWorker {
    /// Ask for the margin of a reading of the log; false when the worker
    /// has stopped.
    fn ask(&self, job: MarginJob) -> bool {
        self.jobs.send(job).is_ok()
    }

    /// The pre-flight's summary, only when it was worked out for `mark`
    /// (otherwise the margin item waits).
    fn summary_for(&self, mark: LogMark) -> Option<preflight::MarginSummary> {
        let latest = self.latest.lock().ok()?;
        match latest.as_ref() {
            Some((m, summary)) if *m == mark => summary.clone(),
            _ => None,
        }
    }
}

/// Start the margin worker. Only the newest reading waiting is worked
/// out; a reading already worked out is answered again without working.
fn spawn_margin(l: Loaded, ui: Sender<Msg>) -> MarginWorker {
    let (jobs, rx) = mpsc::channel::<MarginJob>();
    let latest = Arc::new(Mutex::new(None));
    let slot = Arc::clone(&latest);
    std::thread::spawn(move || {
        let mut last: Option<(LogMark, Result<Box<MarginTable>, String>)> = None;
        while let Ok(mut job) = rx.recv() {
            while let Ok(newer) = rx.try_recv() {
                job = newer;
            }
            let (mark, result) = match job {
                Err(why) => (log_mark(&[]), Err(why)),
                Ok(records) => {
                    let mark = log_mark(&records);
                    let result = match &last {
                        Some((m, r)) if *m == mark => r.clone(),
                        _ => super::margin_cmd::compute(
                            &l,
                            &records,
                            None,
                            cagehand::margin::Strikes::Faces,
                        )
                        .map(Box::new)
                        .map_err(|e| format!("{e:#}")),
                    };
                    (mark, result)
                }
            };
            if let Ok(mut s) = slot.lock() {
                *s = Some((mark, result.as_ref().ok().and_then(|t| t.summary())));
            }
            let msg = Msg::Margin {
                mark,
                result: result.clone(),
            };
            if ui.send(msg).is_err() {
                return;
            }
            last = Some((mark, result));
        }
    });
    MarginWorker { jobs, latest }
}

/// One write the screens asked for, carried out on the writer thread.
struct WriteJob {
    operator: String,
    work: Work,
    seen_seq: Option<u64>,
    eval: Option<Box<preflight::Evaluation>>,
}

/// Start the writer: each write is carried out in turn (the same checks
/// and refusals as before, a refusal leaves the log unchanged), then the
/// record list, pending detections and member health are sent anew, the
/// margin is asked for, and the message line says what was written.
fn spawn_writer(
    l: Loaded,
    log: LogOpts,
    ui: Sender<Msg>,
    margin: MarginWorker,
) -> Sender<WriteJob> {
    let (jobs, rx) = mpsc::channel::<WriteJob>();
    std::thread::spawn(move || {
        while let Ok(job) = rx.recv() {
            let said = carry_out(
                &l,
                &log,
                &job.operator,
                &job.work,
                job.seen_seq,
                job.eval.as_deref(),
            );
            let fresh = LogView::read(&l, &log);
            let asked = margin.ask(fresh.margin_job());
            let (health, source) = read_health(&l, &log);
            let sent = ui.send(Msg::Records(fresh.records)).is_ok()
                && ui.send(Msg::Health(health.map(Box::new), source)).is_ok()
                && ui.send(Msg::Written(said)).is_ok();
            if !sent || !asked {
                return;
            }
        }
    });
    jobs
}

/// Carry out one write the screens asked for; the words say what was
/// written (and what it changed), on which vehicle, in which file, or why
/// nothing was.
fn carry_out(
    l: &Loaded,
    log: &LogOpts,
    operator: &str,
    work: &Work,
    seen_seq: Option<u64>,
    eval: Option<&preflight::Evaluation>,
) -> String {
    use cagehand::logwork::{self, Vehicle};
    let vehicle = &l.profile.vehicle.id;
    let dir = match log.data_dir() {
        Ok(d) => d,
        Err(e) => return format!("NOT written for {vehicle}: {e:#}"),
    };
    let (mut book, report) = match Logbook::open(&dir, vehicle, Access::Write, lock_wait()) {
        Ok(opened) => opened,
        Err(e) => return format!("NOT written for {vehicle}: cannot open its cage log: {e}"),
    };
    let path = book.path().display().to_string();
    let v = Vehicle {
        profile: &l.profile,
        cage: &l.cage,
    };
    let now = jiff::Timestamp::now();
    let result = match work {
        Work::Confirm {
            seq,
            strike,
            input,
            note,
        } => logwork::confirm(
            v,
            &mut book,
            operator,
            now,
            *seq,
            strike,
            input,
            note.clone(),
        ),
        Work::Dismiss { seq, reason } => {
            logwork::dismiss(v, &mut book, operator, now, *seq, reason)
        }
        Work::Finding { member, kind, note } => {
            logwork::finding(v, &mut book, operator, now, member, *kind, note.clone())
        }
        Work::Replacement { member, part, note } => {
            logwork::replacement(v, &mut book, operator, now, member, part, note.clone())
        }
        Work::Note(text) => logwork::note(v, &mut book, operator, now, text),
        Work::Sign(signoff) => {
            // The log as it is now, under the write lock, against the
            // checklist the operator saw.
            let now_checks = LogView::of_open(&book, &report).log_checks(l);
            return sign(
                &mut book,
                operator,
                now,
                seen_seq,
                eval,
                &now_checks,
                signoff,
                vehicle,
                &path,
            );
        }
    };
    match result {
        Ok(w) => {
            let changes = if w.changes.is_empty() {
                "no status changed".to_string()
            } else {
                w.changes
                    .iter()
                    .map(|c| format!("{}: {} -> {}", c.id, c.from.label(), c.to.label()))
                    .collect::<Vec<_>>()
                    .join(", ")
            };
            let beyond = if w.beyond_model {
                " (beyond the model: every member REPLACE NOW)"
            } else {
                ""
            };
            format!(
                "{changes}{beyond}; #{} {} written for {vehicle} in {path}",
                w.record.seq,
                w.record.event.name()
            )
        }
        Err(e) => format!("NOT written for {vehicle} ({path}): {e}"),
    }
}

/// Sign the pre-flight, refused when the log changed since the checklist
/// shown was evaluated (a record slipped in, or the checklist was worked
/// out from an older reading than the records shown: evaluate again
/// first) or a detection is pending in the log as it is now.
#[allow(clippy::too_many_arguments)]
fn sign(
    book: &mut Logbook,
    operator: &str,
    now: jiff::Timestamp,
    seen_seq: Option<u64>,
    eval: Option<&preflight::Evaluation>,
    now_checks: &preflight::LogChecks,
    signoff: &preflight::SignOff,
    vehicle: &str,
    path: &str,
) -> String {
    let Some(eval) = eval else {
        return "NOT signed: the checklist was not evaluated".to_string();
    };
    if book.records().last().map(|r| r.seq) != seen_seq || !now_checks.agree_with(eval) {
        return format!(
            "NOT signed: the cage log of {vehicle} changed since the checklist was shown; wait a second and sign again"
        );
    }
    let pending = detection::pending(book.records());
    if !pending.is_empty() {
        return format!(
            "NOT signed: {} pending in {path}",
            count(pending.len(), "detection")
        );
    }
    match preflight::sign_and_record(book, operator, now, eval, signoff) {
        Ok(r) => format!(
            "pre-flight signed off by {operator}: record #{} for {vehicle} in {path}",
            r.seq
        ),
        Err(e) => format!("NOT signed for {vehicle}: {e}"),
    }
}

/// Write a detection to the log at once; the notice says where it went
/// (vehicle and file) or why it could not be written.
fn write_detection(l: &Loaded, log: &LogOpts, d: &cagehand::logbook::DetectionEvent) -> String {
    let vehicle = &l.profile.vehicle.id;
    let args = super::log_cmd::same_log_args(l, log);
    let written = log.operator().and_then(|operator| {
        let mut book = log.open(l, Access::Write)?;
        let logged = detection::record(&mut book, &operator, jiff::Timestamp::now(), d.clone())
            .map_err(super::log_cmd::store_err)?;
        Ok((logged, book.path().display().to_string()))
    });
    match written {
        // The screen's own keys first (the message line is cut at the
        // terminal's width), then the file and the commands from elsewhere.
        Ok((logged, path)) => format!(
            "impact {:.1} g on {}: detection #{} pending for {vehicle}; on the Cage screen (3) y confirms and x dismisses the oldest pending detection; log {path}, or `cagehand log confirm {}{args}` / `cagehand log dismiss {} --reason TEXT{args}`",
            d.peak_g, d.face, logged.seq, logged.seq, logged.seq
        ),
        Err(e) => format!(
            "impact {:.1} g on {} NOT logged for {vehicle}: {e:#}; record it with `cagehand impact --face {} --peak-accel-g {:.1}{args}`",
            d.peak_g, d.face, d.face, d.peak_g
        ),
    }
}

/// Watches the cage log's file for writes by other programs; none when the
/// data folder or the vehicle id gives no path (the log is then read every
/// second, as its reading reports the trouble).
fn log_follower(l: &Loaded, log: &LogOpts) -> Option<Follower> {
    let dir = log.data_dir().ok()?;
    let name = log_file_name(&l.profile.vehicle.id).ok()?;
    Some(Follower::new(&dir.join(name)))
}

/// The link's reader messages through the core feed into the screens'
/// channel; detections are written to the log as they come. Ends when the
/// link ends or the screens close.
fn spawn_feed(mut link: Link, l: Loaded, log: LogOpts, tx: Sender<Msg>, margin: MarginWorker) {
    std::thread::spawn(move || {
        let mut feed = Feed::new(l.cage.clone(), &l.profile, &link.source);
        // Stamped before each reading, so a write during it shows next time.
        let mut follower = log_follower(&l, &log);
        let mut book = LogView::read(&l, &log);
        // The screens start from this reading, and its margin is asked for.
        if tx.send(Msg::Records(book.records.clone())).is_err() || !margin.ask(book.margin_job()) {
            return;
        }
        let mut last_read = Instant::now();
        let mut last_full = Instant::now();
        while let Some(step) = super::live::next_step(&mut link.rx, &mut feed) {
            let mut extra = step.note.clone().map(Msg::Notice);
            let mut reread = false;
            if last_read.elapsed() >= LOG_REREAD {
                // Records written by another program (a `cagehand log
                // confirm` in a second terminal) show within about a
                // second: the file is looked at (its size and time) every
                // second and read only when it changed.
                last_read = Instant::now();
                // Read anyway after a failed reading (the file may not
                // change again) and every LOG_FULL_REREAD (a network
                // folder may report a file's size and time late).
                let full = last_full.elapsed() >= LOG_FULL_REREAD || book.error.is_some();
                reread = follower.as_mut().is_none_or(Follower::changed) || full;
            }
            if let Some(d) = &step.detection {
                extra = Some(Msg::Notice(write_detection(&l, &log, d)));
                if let Some(f) = follower.as_mut() {
                    f.changed();
                }
                reread = true;
            }
            if reread {
                // The screens keep their own state.
                last_full = Instant::now();
                let fresh = LogView::read(&l, &log);
                if fresh.mark() != book.mark() {
                    if !margin.ask(fresh.margin_job())
                        || tx.send(Msg::Records(fresh.records.clone())).is_err()
                    {
                        return;
                    }
                    let (health, source) = read_health(&l, &log);
                    if tx.send(Msg::Health(health.map(Box::new), source)).is_err() {
                        return;
                    }
                }
                book = fresh;
            }
            let summary = match book.error {
                None => margin.summary_for(log_mark(&book.records)),
                Some(_) => None,
            };
            let eval = book.evaluate(&l, Some(&step.state), summary.as_ref());
            let live = Msg::Live(Box::new(live_view(
                &step.state,
                feed.tracker(),
                feed.cage(),
                Some(eval),
                book.pending.clone(),
            )));
            if tx.send(live).is_err() {
                return;
            }
            if let Some(m) = extra
                && tx.send(m).is_err()
            {
                return;
            }
            if step.ended {
                let _ = tx.send(Msg::LinkEnded("end of input".to_string()));
                return;
            }
        }
    });
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::time::Duration;

    const WAIT: Duration = Duration::from_secs(120);

    /// A cage log in a temporary folder written as "ana", and the demo
    /// vehicle (the folder goes when the first value is dropped).
    fn demo_log() -> (tempfile::TempDir, LogOpts, Loaded) {
        let dir = tempfile::tempdir().expect("temp dir");
        let log = LogOpts {
            data: Some(dir.path().to_path_buf()),
            operator: Some("ana".into()),
        };
        let l = cagehand::vehicle::demo().expect("the demo loads");
        (dir, log, l)
    }

    /// The messages the writer sends, up to and with `Written`.
    fn until_written(rx: &mpsc::Receiver<Msg>) -> Vec<Msg> {
        let mut msgs = Vec::new();
        loop {
            let m = rx.recv_timeout(WAIT).expect("the writer answers");
            let done = matches!(m, Msg::Written(_));
            msgs.push(m);
            if done {
                return msgs;
            }
        }
    }

    #[test]
    fn writes_are_carried_out_off_the_asking_thread_and_refusals_change_nothing() {
        let (_dir, log, l) = demo_log();
        let (tx, rx) = mpsc::channel::<Msg>();
        // The margin worker's end is held here: the test sees what the
        // writer asks of it without working the margin out.
        let (jobs, asked) = mpsc::channel::<MarginJob>();
        let margin = MarginWorker {
            jobs,
            latest: Arc::new(Mutex::new(None)),
        };
        let writer = spawn_writer(l, log, tx, margin);
        // Asking returns at once; the answer comes over the channel.
        let t0 = Instant::now();
        writer
            .send(WriteJob {
                operator: "ana".into(),
                work: Work::Note("grass strip, day 3 (invented)".into()),
                seen_seq: None,
                eval: None,
            })
            .expect("the writer takes the job");
        assert!(t0.elapsed() < Duration::from_secs(1));
        match &until_written(&rx)[..] {
            [Msg::Records(r), Msg::Health(..), Msg::Written(said)] => {
                assert_eq!(r.len(), 1, "the note is in the records sent");
                assert!(said.contains("note written for kestrel-demo"), "{said}");
            }
            other => panic!("records, health, written expected: {other:?}"),
        }
        let job = asked.recv_timeout(WAIT).expect("the margin asked for");
        assert_eq!(job.map(|r| r.len()), Ok(1), "for the log with the note");
        // A dismissal of a detection that is not in the log is refused and
        // the log keeps its one record.
        writer
            .send(WriteJob {
                operator: "ana".into(),
                work: Work::Dismiss {
                    seq: 9,
                    reason: "no such detection".into(),
                },
                seen_seq: Some(1),
                eval: None,
            })
            .expect("the writer takes the job");
        match &until_written(&rx)[..] {
            [Msg::Records(r), Msg::Health(..), Msg::Written(said)] => {
                assert_eq!(r.len(), 1, "nothing written");
                assert!(said.starts_with("NOT written"), "{said}");
            }
            other => panic!("records, health, written expected: {other:?}"),
        }
    }

    #[test]
    fn a_checklist_from_an_older_reading_is_not_signed_over_a_failing_log() {
        // The writer's records run ahead of the checklist the feed thread
        // evaluated (it reads the log again within a second): a sign-off
        // in between must not record a clear log that is no longer clear.
        // This project's rule (common practice, no published source): a
        // pre-flight never passes over a member at REPLACE NOW or DUE.
        let (_dir, log, l) = demo_log();
        let write = |work: Work, seen_seq, eval: Option<&preflight::Evaluation>| {
            carry_out(&l, &log, "ana", &work, seen_seq, eval)
        };
        let said = write(Work::Note("day 1 (invented)".into()), None, None);
        assert!(said.contains("#1 note"), "{said}");
        let shown = |view: &LogView| view.evaluate(&l, None, None);
        let clear = shown(&LogView::read(&l, &log));
        let cage_log =
            |e: &preflight::Evaluation| e.checked(preflight::Check::CageLog).map(|i| i.result);
        assert_eq!(cage_log(&clear), Some(preflight::Outcome::Pass));
        let member = l.cage.members[0].id.clone();
        let said = write(
            Work::Finding {
                member,
                // A fray puts the member at DUE: a failing item a reason
                // may override (a crack, at REPLACE NOW, could not be).
                kind: cagehand::logbook::FindingKind::Fray,
                note: None,
            },
            Some(1),
            None,
        );
        assert!(said.contains("#2 finding"), "{said}");
        let failing = shown(&LogView::read(&l, &log));
        assert_eq!(cage_log(&failing), Some(preflight::Outcome::Fail));
        // Every hand item ticked and every other item overridden, as a
        // crew in a hurry would: only the log's state can refuse it.
        let sign = |eval: &preflight::Evaluation, seen_seq| {
            let mut s = preflight::SignOff::tick_all(eval);
            for i in eval.items.iter().filter(|i| {
                i.can_override
                    && !matches!(
                        i.result,
                        preflight::Outcome::Pass | preflight::Outcome::Hand
                    )
            }) {
                s.overrides.insert(i.n, "no link in this test".into());
            }
            write(Work::Sign(s), Some(seen_seq), Some(eval))
        };
        // The records shown are the writer's (#2), the checklist the older
        // one: refused, and nothing written.
        let said = sign(&clear, 2);
        assert!(
            said.contains("changed since the checklist was shown"),
            "{said}"
        );
        assert_eq!(LogView::read(&l, &log).records.len(), 2);
        // The checklist of the newest reading is signed, its failing cage
        // log item overridden with the reason on record (the design).
        let said = sign(&failing, 2);
        assert!(said.contains("signed off by ana: record #3"), "{said}");
        // A record that changes no verdict (a note) does not stop the next.
        let said = write(Work::Note("day 2 (invented)".into()), Some(3), None);
        assert!(said.contains("#4 note"), "{said}");
        let said = sign(&shown(&LogView::read(&l, &log)), 4);
        assert!(said.contains("record #5"), "{said}");
        let said = sign(&failing, 5);
        assert!(said.contains("record #6"), "{said}");
    }

    #[test]
    fn an_unreadable_log_gives_no_margin_and_says_why() {
        let l = cagehand::vehicle::demo().expect("the demo loads");
        let (tx, rx) = mpsc::channel::<Msg>();
        let worker = spawn_margin(l, tx);
        assert!(worker.ask(Err("cannot read the cage log: locked".into())));
        match rx.recv_timeout(WAIT).expect("the margin worker answers") {
            Msg::Margin { mark, result } => {
                assert_eq!(mark, (0, None), "the screens show no records then");
                assert_eq!(result, Err("cannot read the cage log: locked".into()));
            }
            other => panic!("{other:?}"),
        }
        // The pre-flight gets no summary: its margin item waits.
        assert_eq!(worker.summary_for((0, None)), None);
    }
}
