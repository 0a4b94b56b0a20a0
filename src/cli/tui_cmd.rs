//! Opening the screens: build the model, read the cage log, start the feed
//! thread (link -> tracker -> live picture), and hand over to the terminal
//! loop, which carries out the model's effects.

use super::Loaded;
use super::link_args::LinkArgs;
use super::log_cmd::{LogOpts, lock_wait};
use crate::cage::Cage;
use crate::health::assess;
use crate::impact_detect::ImpactDetector;
use crate::link::transport::{Link, LinkEvent, LinkMsg, Mode};
use crate::logbook::store::{Access, Logbook};
use crate::profile::Profile;
use crate::sim::SimCommand;
use crate::tracker::{Tracker, WatchState, WatchStateKind};
use crate::tui::model::{Effect, LinkView, LiveState, LiveView, Model, Msg, RestSample};
use crate::tui::theme::{ColourDepth, Theme};
use std::process::ExitCode;
use std::sync::mpsc::{self, Sender};

/// Bounces closer together than this are one impact.
const IMPACT_REFRACTORY_S: f64 = 1.0;

/// Open the screens on a loaded profile, fed by the link `link_args` names.
pub fn run(loaded: Loaded, link_args: &LinkArgs, log: &LogOpts) -> anyhow::Result<ExitCode> {
    use std::io::IsTerminal;
    if !std::io::stdout().is_terminal() || !std::io::stdin().is_terminal() {
        return Err(super::bad_input(
            "the screens need a terminal; for JSON lines use `cagehand watch --headless`",
        ));
    }
    let (health, health_source) = read_health(&loaded, log);
    let link = link_args.open(Some(loaded.cage.clone()), Mode::Decode)?;
    let theme = Theme::new(ColourDepth::for_choice(super::color_choice()));
    let model = Model::new(
        loaded.profile.clone(),
        loaded.cage.clone(),
        &link.source,
        theme,
    )
    .with_health(health, health_source);
    let (tx, rx) = mpsc::channel::<Msg>();
    let commander = link.commander();
    spawn_feed(link, loaded.cage, loaded.profile, tx.clone());
    crate::tui::run(model, tx, rx, |effect| match effect {
        Effect::SimRoll(face) => {
            // Only the in-process simulator takes commands; on a real link the
            // operator flies the roll and the screen verifies it.
            if let Some(c) = &commander {
                let _ = c.send(SimCommand::Roll(face));
            }
        }
    })?;
    Ok(ExitCode::SUCCESS)
}

/// Member health from the vehicle's cage log, or why there is none. A log
/// that cannot be read does not stop the screens; they say why.
fn read_health(l: &Loaded, log: &LogOpts) -> (Option<crate::health::HealthReport>, String) {
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
            let problems = report.messages(book.path()).len();
            let note = if problems > 0 {
                format!(" ({problems} problems: run `cagehand log show`)")
            } else {
                String::new()
            };
            (
                Some(assess(book.records(), &l.cage, &l.profile.inspection)),
                format!(
                    "{} records in {}{note}",
                    book.records().len(),
                    book.path().display()
                ),
            )
        }
        Err(e) => (None, format!("cannot read the cage log: {e}")),
    }
}

fn live_view(st: &WatchState, tracker: &Tracker) -> LiveView {
    let errors = st.link.crc_errors + st.link.malformed + st.link.rejected;
    LiveView {
        state: match st.state {
            WatchStateKind::Resting => LiveState::Resting,
            WatchStateKind::Moving => LiveState::Moving,
            WatchStateKind::Airborne => LiveState::Airborne,
            WatchStateKind::Stale if st.link.age_ms.is_none() => LiveState::Waiting,
            WatchStateKind::Stale => LiveState::Stale,
        },
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
            .last_rest()
            .map(|(t_s, attitude, status)| RestSample {
                t_s,
                attitude,
                status,
            }),
    }
}

/// The link's reader messages through the tracker and the impact detector,
/// into the screens' channel. Ends when the link ends or the screens close.
fn spawn_feed(link: Link, cage: Cage, profile: Profile, tx: Sender<Msg>) {
    std::thread::spawn(move || {
        let mut tracker = Tracker::new(&profile.watch, &link.source);
        let mut detector = ImpactDetector::new(
            &cage,
            profile.impact.detect_threshold_g,
            IMPACT_REFRACTORY_S,
        );
        while let Ok(msg) = link.rx.recv() {
            let mut extra = None;
            match msg {
                LinkMsg::Sample { at_s, sample } => {
                    tracker.update(&cage, at_s, &sample);
                    if let Some(p) = detector.push(&sample) {
                        extra = Some(Msg::Notice(format!(
                            "impact detected: {:.1} g, likely on {}; record it with `cagehand impact --face {} --peak-accel-g {:.1}`",
                            p.peak_g, p.face_id, p.face_id, p.peak_g
                        )));
                    }
                }
                LinkMsg::Health { at_s, counters } => {
                    tracker.tick(at_s);
                    tracker.set_counters(counters);
                }
                LinkMsg::Tick { at_s } | LinkMsg::Bytes { at_s, .. } => tracker.tick(at_s),
                LinkMsg::Event { at_s, event } => {
                    tracker.tick(at_s);
                    extra = Some(Msg::Notice(match event {
                        LinkEvent::Lost(s) => format!("link lost: {s}"),
                        LinkEvent::Note(s) => s,
                        LinkEvent::Reopened => "link reopened".to_string(),
                    }));
                }
                LinkMsg::End { at_s } => {
                    tracker.tick(at_s);
                    let _ = tx.send(Msg::Live(Box::new(live_view(
                        &tracker.state(&cage),
                        &tracker,
                    ))));
                    let _ = tx.send(Msg::LinkEnded("end of input".to_string()));
                    return;
                }
            }
            if tx
                .send(Msg::Live(Box::new(live_view(
                    &tracker.state(&cage),
                    &tracker,
                ))))
                .is_err()
            {
                return;
            }
            if let Some(m) = extra
                && tx.send(m).is_err()
            {
                return;
            }
        }
    });
}
