//! The screens' model, the messages that change it, and `update`, the one
//! place it changes. No terminal here: tests drive `update` directly.
//!
//! The model is what every screen shares ([`Shared`]: the vehicle, the live
//! picture, the message line) plus one component per screen holding that
//! screen's own state (selection, stepping). `update` routes a key through
//! the global key table, then the current screen's table.

use crate::tui::cage_view::CageScreen;
use crate::tui::component::Component;
use crate::tui::form::{FORM_KEYS, Form, FormAction, Purpose, Work};
use crate::tui::keys::{self, GLOBAL_KEYS, GlobalAction};
use crate::tui::margin_map::{LogMark, MarginShown, MarginState, log_mark};
use crate::tui::preflight_view::PreflightScreen;
use crate::tui::righting_view::RightingScreen;
use crate::tui::theme::Theme;
use crate::tui::watch_view::WatchScreen;
use cagehand::cage::Cage;
use cagehand::health::HealthReport;
use cagehand::net::Net;
use cagehand::profile::Profile;
use cagehand::rest::RestStatus;
use nalgebra::UnitQuaternion;
use ratatui::crossterm::event::{KeyEvent, KeyEventKind};

/// The four screens.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Screen {
    /// Live state, resting face and link health on the net.
    Watch,
    /// Roll plan from the resting face to a take-off face.
    Righting,
    /// Cage members: geometry, loads and health.
    Cage,
    /// The pre-flight checklist.
    Preflight,
}

impl Screen {
    /// All screens in tab order.
    pub const ALL: [Screen; 4] = [
        Screen::Watch,
        Screen::Righting,
        Screen::Cage,
        Screen::Preflight,
    ];

    /// The tab title.
    pub fn title(self) -> &'static str {
        match self {
            Screen::Watch => "Watch",
            Screen::Righting => "Righting",
            Screen::Cage => "Cage",
            Screen::Preflight => "Preflight",
        }
    }

    fn index(self) -> usize {
        Screen::ALL.iter().position(|&x| x == self).unwrap_or(0)
    }
}

/// The vehicle's state: the same five words as `watch --headless`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LiveState {
    /// Lying still on a face.
    Resting,
    /// Motionless but not flat on any face.
    Propped,
    /// Turning or rolling.
    Moving,
    /// Flying.
    Airborne,
    /// No fresh data (or none yet); `LiveView::reason` says which.
    Stale,
}

impl LiveState {
    /// The word shown on screen (the JSON word in capitals).
    pub fn word(self) -> &'static str {
        match self {
            LiveState::Resting => "RESTING",
            LiveState::Propped => "PROPPED",
            LiveState::Moving => "MOVING",
            LiveState::Airborne => "AIRBORNE",
            LiveState::Stale => "STALE",
        }
    }

    /// A symbol beside the word, so the state never rests on colour.
    pub fn symbol(self) -> &'static str {
        match self {
            LiveState::Resting => "=",
            LiveState::Propped => "/",
            LiveState::Moving => "~",
            LiveState::Airborne => "^",
            LiveState::Stale => "?",
        }
    }
}

/// Link health as the screens show it.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LinkView {
    /// Link spec, e.g. `sim` or `udp:127.0.0.1:14550`.
    pub source: String,
    /// Attitude samples per second over the last window (instants, not messages).
    pub rate_hz: f64,
    /// Age of the last sample.
    pub age_s: Option<f64>,
    /// Frames decoded.
    pub frames: u64,
    /// Bad frames of any kind (CRC, malformed, rejected).
    pub errors: u64,
}

/// The latest live picture of the vehicle.
#[derive(Debug, Clone, PartialEq)]
pub struct LiveView {
    /// State.
    pub state: LiveState,
    /// Why, in words, for stale and propped ("no data yet").
    pub reason: Option<String>,
    /// Resting face, or the nearest face while propped, moving or
    /// airborne; None when stale.
    pub face: Option<usize>,
    /// Angle between gravity and that face's normal.
    pub error_deg: Option<f64>,
    /// Roll, pitch, yaw.
    pub rpy_deg: Option<[f64; 3]>,
    /// Battery voltage.
    pub battery_v: Option<f64>,
    /// Motors armed.
    pub armed: Option<bool>,
    /// Link health.
    pub link: LinkView,
    /// The latest attitude and the rest detector's answer, on the link
    /// clock (None while stale): what the righting stepper verifies from.
    pub rest: Option<RestSample>,
    /// The pre-flight checklist evaluated by the core against this state
    /// and the cage log (None until the feed has evaluated it).
    pub preflight: Option<cagehand::preflight::Evaluation>,
    /// Detections in the cage log not yet confirmed or dismissed: loud on
    /// every screen until resolved.
    pub pending: Vec<cagehand::logbook::Pending>,
}

/// One attitude with the rest detector's answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RestSample {
    /// Link clock, s.
    pub t_s: f64,
    /// Attitude, body -> world.
    pub attitude: UnitQuaternion<f64>,
    /// Resting, propped or moving, and on (or near) which face.
    pub status: RestStatus,
}

impl LiveView {
    /// Nothing received yet on `source`: stale, "no data yet".
    pub fn waiting(source: &str) -> LiveView {
        LiveView {
            state: LiveState::Stale,
            reason: Some("no data yet".to_string()),
            face: None,
            error_deg: None,
            rpy_deg: None,
            battery_v: None,
            armed: None,
            link: LinkView {
                source: source.to_string(),
                ..LinkView::default()
            },
            rest: None,
            preflight: None,
            pending: Vec::new(),
        }
    }

    /// The face the vehicle rests on, only when it is resting: the one face
    /// the net frames and the take-off verdict is given for.
    pub fn resting_face(&self) -> Option<usize> {
        match self.state {
            LiveState::Resting => self.face,
            _ => None,
        }
    }
}

/// Messages into `update`.
#[derive(Debug, Clone, PartialEq)]
pub enum Msg {
    /// A key press.
    Key(KeyEvent),
    /// A new live picture from the tracker (boxed: it is large and frequent).
    Live(Box<LiveView>),
    /// The terminal was resized to (columns, rows).
    Resize(u16, u16),
    /// The link ended or failed, with the reason.
    LinkEnded(String),
    /// Something the operator should know (an impact was detected, the
    /// link was lost and came back).
    Notice(String),
    /// A signal asked the program to end (SIGTERM, SIGINT, SIGHUP).
    Signal(i32),
    /// The cage log changed (this program or another wrote to it): member
    /// health anew, and where it came from or why there is none.
    Health(Option<Box<HealthReport>>, String),
    /// The cage log's records as last read (the record list, the pending
    /// detections).
    Records(Vec<cagehand::logbook::Record>),
    /// A write to the log was carried out (or refused): what changed, the
    /// vehicle and the log file.
    Written(String),
    /// The remaining margin worked out (off the screens' thread) for the
    /// log as it was at `mark`, or why it could not be; shown only while
    /// the screens show that same log.
    Margin {
        /// The reading of the log it was worked out for.
        mark: LogMark,
        /// The table, or why there is none.
        result: Result<Box<cagehand::margin::MarginTable>, String>,
    },
}

/// Side effects `update` asks the loop to carry out.
#[derive(Debug, Clone, PartialEq)]
pub enum Effect {
    /// Tell the in-process simulator to roll onto this face (the demo's
    /// stand-in for the operator flying the roll).
    SimRoll(String),
    /// Write to the vehicle's cage log; the result comes back as
    /// [`Msg::Written`] and fresh [`Msg::Records`] / [`Msg::Health`].
    Log {
        /// Who writes it.
        operator: String,
        /// What to write.
        work: Work,
        /// The newest sequence number the screen had read when it asked
        /// (a sign-off is refused when the log changed since).
        seen_seq: Option<u64>,
        /// The checklist as evaluated when a sign-off was asked for.
        eval: Option<Box<cagehand::preflight::Evaluation>>,
    },
}

/// What every screen reads, and the few things any screen may change (the
/// message line, the effects).
#[derive(Debug, Clone)]
pub struct Shared {
    /// The vehicle profile.
    pub profile: Profile,
    /// Its cage.
    pub cage: Cage,
    /// The unfolded net, computed once.
    pub net: Net,
    /// Take-off face indices.
    pub takeoff: Vec<usize>,
    /// Latest live picture.
    pub live: LiveView,
    /// A one-line message for the user (link ended, key not bound).
    pub notice: Option<String>,
    /// Styles.
    pub theme: Theme,
    /// Member health from the cage log, if one could be read.
    pub health: Option<HealthReport>,
    /// Where the health came from, or why there is none.
    pub health_source: String,
    /// Effects for the loop to carry out.
    pub outbox: Vec<Effect>,
    /// Terminal size (columns, rows), for page-sized scrolling.
    pub size: (u16, u16),
    /// Who writes records (None: asked on the screen).
    pub operator: Option<String>,
    /// The cage log's records as last read.
    pub records: Vec<cagehand::logbook::Record>,
    /// The open log-work form, if any: it takes every key until Enter or Esc.
    pub form: Option<Form>,
    /// The remaining margin for the records shown (worked out off the
    /// screens' thread; `Working` until it arrives).
    pub margin: MarginState,
}

impl Shared {
    /// A face's id, or `?` for an index past the last face.
    pub fn face_id(&self, i: usize) -> &str {
        self.cage.faces.get(i).map_or("?", |f| f.id.as_str())
    }
}

/// One component per screen.
#[derive(Debug, Clone)]
pub struct Screens {
    /// Watch.
    pub watch: WatchScreen,
    /// Righting.
    pub righting: RightingScreen,
    /// Cage.
    pub cage: CageScreen,
    /// Preflight.
    pub preflight: PreflightScreen,
}

/// Everything the screens show.
#[derive(Debug, Clone)]
pub struct Model {
    /// What all screens share.
    pub shared: Shared,
    /// Each screen's own state.
    pub screens: Screens,
    /// Current screen.
    pub screen: Screen,
    /// Help overlay shown.
    pub help: bool,
    /// Set when the user asked to quit or a signal arrived.
    pub quit: bool,
    /// The signal that ended the program, if one did (exit 128 + it).
    pub exit_signal: Option<i32>,
}

impl Model {
    /// A model for a loaded profile, waiting for data on `source`.
    pub fn new(profile: Profile, cage: Cage, source: &str, theme: Theme) -> Model {
        let net = Net::unfold(&cage);
        let takeoff = cage
            .takeoff_faces(&profile.righting.takeoff_faces)
            .unwrap_or_default();
        let (righting, notice) = RightingScreen::new(&profile, &cage);
        Model {
            shared: Shared {
                profile,
                cage,
                net,
                takeoff,
                live: LiveView::waiting(source),
                notice,
                theme,
                health: None,
                health_source: "no cage log read".to_string(),
                outbox: Vec::new(),
                size: (80, 24),
                operator: None,
                records: Vec::new(),
                form: None,
                margin: MarginState::Working,
            },
            screens: Screens {
                watch: WatchScreen::default(),
                righting,
                cage: CageScreen::default(),
                preflight: PreflightScreen::default(),
            },
            screen: Screen::Watch,
            help: false,
            quit: false,
            exit_signal: None,
        }
    }

    /// Attach member health read from the cage log.
    pub fn with_health(mut self, health: Option<HealthReport>, source: String) -> Model {
        self.shared.health = health;
        self.shared.health_source = source;
        self
    }
}

/// Apply a message; returns whether anything visible changed.
pub fn update(model: &mut Model, msg: Msg) -> bool {
    match msg {
        Msg::Resize(w, h) => {
            model.shared.size = (w, h);
            true
        }
        Msg::Live(live) => {
            let changed = model.shared.live != *live;
            model.shared.live = *live;
            let s = &mut model.screens;
            let sh = &mut model.shared;
            // Every screen follows (no short-circuit: each keeps its own state).
            let followed = [
                s.watch.follow_live(sh),
                s.righting.follow_live(sh),
                s.cage.follow_live(sh),
                s.preflight.follow_live(sh),
            ];
            changed || followed.iter().any(|&f| f)
        }
        Msg::Notice(text) => {
            model.shared.notice = Some(text);
            true
        }
        Msg::LinkEnded(why) => {
            let live = &mut model.shared.live;
            model.shared.notice = Some(format!("link ended: {why}"));
            live.state = LiveState::Stale;
            live.reason = Some(format!("link ended: {why}"));
            live.face = None;
            live.error_deg = None;
            live.rest = None;
            true
        }
        Msg::Health(report, source) => {
            model.shared.health = report.map(|b| *b);
            model.shared.health_source = source;
            true
        }
        Msg::Records(records) => {
            model.shared.live.pending = cagehand::logbook::detection::pending(&records);
            if log_mark(&records) != log_mark(&model.shared.records) {
                // The margin shown was for other records: wait for the
                // one worked out for these.
                model.shared.margin = MarginState::Working;
                // An override or sign-off form open on the checklist as
                // it was is closed: what it would sign no longer holds.
                let stale_form = matches!(
                    model.shared.form.as_ref().map(|f| &f.purpose),
                    Some(Purpose::Sign | Purpose::Override(_))
                );
                if stale_form {
                    model.shared.form = None;
                }
                if (model.screens.preflight.log_changed() || stale_form)
                    && crate::tui::preflight_view::newest_sign_off(&records).is_none()
                {
                    // Said here (a sign-off says itself), and on the
                    // Preflight screen until the next tick.
                    model.shared.notice = Some(crate::tui::preflight_view::CLEARED.to_string());
                }
            }
            model.shared.records = records;
            true
        }
        Msg::Written(text) => {
            model.shared.notice = Some(text);
            true
        }
        Msg::Margin { mark, result } => {
            if mark != log_mark(&model.shared.records) {
                // Worked out for a reading of the log the screens no
                // longer (or not yet) show: one for the shown log follows.
                return false;
            }
            let sh = &mut model.shared;
            sh.margin = match result {
                Ok(table) => {
                    let ids: Vec<&str> = sh.cage.members.iter().map(|m| m.id.as_str()).collect();
                    MarginState::Ready(Box::new(MarginShown::new(*table, &ids)))
                }
                Err(why) => MarginState::Failed(why),
            };
            true
        }
        Msg::Signal(n) => {
            model.exit_signal = Some(n);
            model.quit = true;
            true
        }
        Msg::Key(key) => on_key(model, key),
    }
}

/// Route a key through a screen's table to the screen.
fn dispatch<C: Component>(c: &mut C, shared: &mut Shared, key: &KeyEvent) -> Option<bool> {
    let action = keys::find(c.keys(), key)?;
    Some(c.act(action, shared))
}

fn on_key(model: &mut Model, key: KeyEvent) -> bool {
    if key.kind == KeyEventKind::Release {
        return false;
    }
    if model.shared.form.is_some() {
        on_form_key(model, &key);
        return true;
    }
    let global = keys::find(GLOBAL_KEYS, &key);
    if model.help {
        // Any key closes the help overlay; the quit keys still quit.
        model.help = false;
        if global == Some(GlobalAction::Quit) {
            model.quit = true;
        }
        return true;
    }
    if let Some(action) = global {
        let n = Screen::ALL.len();
        match action {
            GlobalAction::Quit => model.quit = true,
            GlobalAction::Help => model.help = true,
            GlobalAction::Go(i) => model.screen = Screen::ALL[i.min(n - 1)],
            GlobalAction::Next => model.screen = Screen::ALL[(model.screen.index() + 1) % n],
            GlobalAction::Previous => {
                model.screen = Screen::ALL[(model.screen.index() + n - 1) % n]
            }
            GlobalAction::ClearNotice => return model.shared.notice.take().is_some(),
        }
        model.shared.notice = None;
        return true;
    }
    let s = &mut model.screens;
    let sh = &mut model.shared;
    let done = match model.screen {
        Screen::Watch => dispatch(&mut s.watch, sh, &key),
        Screen::Righting => dispatch(&mut s.righting, sh, &key),
        Screen::Cage => dispatch(&mut s.cage, sh, &key),
        Screen::Preflight => dispatch(&mut s.preflight, sh, &key),
    };
    match done {
        Some(changed) => changed,
        None => {
            model.shared.notice = Some("key not bound here: press ? for the keys".to_string());
            true
        }
    }
}

/// A key while a form is open: the form's keys, else a typed character;
/// Ctrl-C still quits.
fn on_form_key(model: &mut Model, key: &KeyEvent) {
    use ratatui::crossterm::event::{KeyCode, KeyModifiers};
    if keys::Key::Ctrl('c').matches(key) {
        model.quit = true;
        return;
    }
    let Some(mut form) = model.shared.form.take() else {
        return;
    };
    match keys::find(FORM_KEYS, key) {
        Some(FormAction::Cancel) => {
            model.shared.notice = Some("cancelled: nothing written".to_string());
            return;
        }
        Some(FormAction::Submit) => {
            submit(model, form);
            return;
        }
        Some(a) => form.act(a),
        None => {
            if let KeyCode::Char(c) = key.code
                && !key
                    .modifiers
                    .intersects(KeyModifiers::CONTROL | KeyModifiers::ALT)
            {
                form.type_char(c);
            }
        }
    }
    // A refusal on the message line follows the fields as they are typed:
    // it names what is still wrong, or goes once nothing is.
    let sh = &mut model.shared;
    if sh
        .notice
        .as_deref()
        .is_some_and(|n| n.starts_with(NOT_WRITTEN))
    {
        sh.notice = form.work(sh).err().map(|why| format!("{NOT_WRITTEN}{why}"));
    }
    model.shared.form = Some(form);
}

/// How the message line begins when a form was refused.
const NOT_WRITTEN: &str = "not written: ";

/// Enter in a form: write when every field is right, else keep the form
/// open and say what is wrong.
fn submit(model: &mut Model, form: Form) {
    let sh = &mut model.shared;
    let work = match form.work(sh) {
        Ok(w) => w,
        Err(why) => {
            sh.notice = Some(format!("{NOT_WRITTEN}{why}"));
            sh.form = Some(form);
            return;
        }
    };
    if let Some(op) = form.operator() {
        sh.operator = Some(op);
    }
    match (&form.purpose, work) {
        (Purpose::Override(n), _) => {
            let reason = form.value("reason").to_string();
            model.screens.preflight.signoff.overrides.insert(*n, reason);
            sh.notice = Some(format!("item {n} overridden (written with the sign-off)"));
        }
        (Purpose::Sign, _) => {
            let note = form.value("note").trim();
            model.screens.preflight.signoff.note = (!note.is_empty()).then(|| note.to_string());
            model.screens.preflight.write_sign(sh);
        }
        (_, Some(work)) => ask_write(sh, work, None),
        (_, None) => {}
    }
}

/// Queue a write to the log for the loop (the operator must be known).
pub(crate) fn ask_write(
    sh: &mut Shared,
    work: Work,
    eval: Option<Box<cagehand::preflight::Evaluation>>,
) {
    let Some(operator) = sh.operator.clone() else {
        sh.notice = Some(format!("{NOT_WRITTEN}no operator name"));
        return;
    };
    let work_kind = match &work {
        Work::Confirm { .. } => Some("running the impact analysis"),
        _ => None,
    };
    sh.outbox.push(Effect::Log {
        operator,
        work,
        seen_seq: sh.records.last().map(|r| r.seq),
        eval,
    });
    // The write runs off the screens' thread (a confirmation runs the
    // impact analysis); the margin is worked out anew after it.
    sh.notice = Some(format!(
        "working: writing to the cage log{}...",
        match &work_kind {
            Some(k) => format!(" ({k})"),
            None => String::new(),
        }
    ));
    sh.margin = MarginState::Working;
}

/// "1 step", "2 steps": a count with its noun, plural right.
pub fn count(n: usize, noun: &str) -> String {
    if n == 1 {
        format!("1 {noun}")
    } else {
        format!("{n} {noun}s")
    }
}

/// The demo vehicle's model without colour, waiting on `sim` (tests).
#[cfg(test)]
pub(crate) fn demo_model() -> Model {
    let (p, c) = {
        let d = cagehand::vehicle::demo().expect("the demo profile loads");
        (d.profile, d.cage)
    };
    Model::new(
        p,
        c,
        "sim",
        Theme::new(crate::tui::theme::ColourDepth::None),
    )
}

/// A live picture of the demo vehicle in `state` on (or near) `face` at
/// `t_s`, as the tracker would send it (tests).
/// A detection record (7.5 g on F2, no speed) numbered `seq`, for tests.
#[cfg(test)]
pub(crate) fn detection_record(seq: u64) -> cagehand::logbook::Record {
    use cagehand::logbook::{DetectionEvent, Event, Record};
    Record {
        seq,
        time: "2026-12-02T05:40:00Z".into(),
        operator: "ana".into(),
        event: Event::Detection(DetectionEvent {
            link_time_s: 3.0,
            peak_g: 7.5,
            direction_body: [0.0, 0.0, -1.0],
            face: "F2".into(),
            face_alignment: 1.0,
            speed_m_per_s: None,
            normal_speed_m_per_s: None,
            source: "sim".into(),
        }),
    }
}

#[cfg(test)]
pub(crate) fn live_on(m: &Model, face: usize, t_s: f64, state: LiveState) -> LiveView {
    use cagehand::rest::RestState;
    let q = cagehand::rest::resting_attitude(&m.shared.cage, face);
    let fit = cagehand::rest::fit_face(&m.shared.cage, &cagehand::attitude::gravity_body(&q));
    let mut live = LiveView::waiting("sim");
    live.state = state;
    live.reason = None;
    live.face = Some(face);
    live.error_deg = Some(fit.error_deg);
    live.rpy_deg = Some(cagehand::attitude::rpy_deg(&q));
    live.link.rate_hz = 50.0;
    live.link.age_s = Some(0.0);
    live.rest = Some(RestSample {
        t_s,
        attitude: q,
        status: RestStatus {
            state: match state {
                LiveState::Resting => RestState::Resting,
                LiveState::Propped => RestState::Propped,
                _ => RestState::Moving,
            },
            face,
            error_deg: fit.error_deg,
            fit,
        },
    });
    live
}

/// The tracker's state after `samples` (time, sample), then `until_s` of
/// link time: what the feed would evaluate the checklist against.
#[cfg(test)]
pub(crate) fn tracked(
    m: &Model,
    samples: &[(f64, cagehand::sample::Sample)],
    until_s: f64,
) -> cagehand::tracker::WatchState {
    let mut tr = cagehand::tracker::Tracker::new(&m.shared.profile.watch, "sim");
    for (t, s) in samples {
        tr.update(&m.shared.cage, *t, s);
    }
    tr.tick(until_s);
    tr.state(&m.shared.cage)
}
/// Samples held at attitude `q` for 1.5 s at 50 Hz.
#[cfg(test)]
pub(crate) fn held(
    q: UnitQuaternion<f64>,
    battery_v: Option<f64>,
    armed: Option<bool>,
) -> Vec<(f64, cagehand::sample::Sample)> {
    (0..75)
        .map(|k| {
            let t = f64::from(k) * 0.02;
            (
                t,
                cagehand::sample::Sample {
                    t_s: t,
                    attitude: Some(q),
                    battery_v,
                    armed,
                    ..cagehand::sample::Sample::default()
                },
            )
        })
        .collect()
}
/// Attach the core's evaluation of the checklist against `st` and an empty
/// cage log, as the feed does.
#[cfg(test)]
pub(crate) fn with_preflight(mut m: Model, st: &cagehand::tracker::WatchState) -> Model {
    let eval = cagehand::preflight::evaluate(&cagehand::preflight::Inputs {
        profile: &m.shared.profile,
        cage: &m.shared.cage,
        live: Some(st),
        log: cagehand::preflight::LogInput::Read {
            records: &[],
            path: "(invented demo log)",
            new_file: true,
            trouble: None,
            held_aside: false,
        },
        signing: None,
        margin: None,
    });
    let mut live = m.shared.live.clone();
    live.preflight = Some(eval);
    update(&mut m, Msg::Live(Box::new(live)));
    m
}

#[cfg(test)]
mod tests {
    use super::*;
    use cagehand::righting::stepper::Phase;
    use ratatui::crossterm::event::{KeyCode, KeyModifiers};

    fn model() -> Model {
        demo_model()
    }

    fn key(c: KeyCode) -> Msg {
        Msg::Key(KeyEvent::new(c, KeyModifiers::NONE))
    }

    #[test]
    fn keys_switch_screens_and_quit() {
        let mut m = model();
        assert_eq!(m.screen, Screen::Watch);
        update(&mut m, key(KeyCode::Char('2')));
        assert_eq!(m.screen, Screen::Righting);
        update(&mut m, key(KeyCode::Tab));
        assert_eq!(m.screen, Screen::Cage);
        update(&mut m, key(KeyCode::BackTab));
        assert_eq!(m.screen, Screen::Righting);
        update(&mut m, key(KeyCode::Char('?')));
        assert!(m.help);
        update(&mut m, key(KeyCode::Char('x')));
        assert!(!m.help && !m.quit, "any key closes help");
        update(&mut m, key(KeyCode::Char('3')));
        update(&mut m, key(KeyCode::Down));
        update(&mut m, key(KeyCode::Char('j')));
        update(&mut m, key(KeyCode::Up));
        assert_eq!(
            m.screens.cage.selected, 1,
            "arrows and j/k move the selection"
        );
        for _ in 0..10 {
            update(&mut m, key(KeyCode::PageDown));
        }
        assert_eq!(
            m.screens.cage.selected,
            m.shared.cage.members.len() - 1,
            "scrolling stops at the last member"
        );
        update(&mut m, key(KeyCode::Char('q')));
        assert!(m.quit);
    }

    #[test]
    fn ctrl_c_quits_and_a_signal_records_its_number() {
        let mut m = model();
        update(
            &mut m,
            Msg::Key(KeyEvent::new(KeyCode::Char('c'), KeyModifiers::CONTROL)),
        );
        assert!(m.quit && m.exit_signal.is_none());
        let mut m = model();
        update(&mut m, Msg::Signal(15));
        assert!(m.quit);
        assert_eq!(m.exit_signal, Some(15));
    }

    #[test]
    fn an_unbound_key_says_so() {
        let mut m = model();
        update(&mut m, key(KeyCode::Char('z')));
        assert!(m.shared.notice.as_deref().unwrap().contains("press ?"));
        update(&mut m, key(KeyCode::Esc));
        assert_eq!(m.shared.notice, None);
    }

    #[test]
    fn same_live_picture_is_not_a_change() {
        let mut m = model();
        let live = LiveView::waiting("sim");
        assert!(!update(&mut m, Msg::Live(Box::new(live.clone()))));
        let mut moved = live;
        moved.state = LiveState::Moving;
        assert!(update(&mut m, Msg::Live(Box::new(moved))));
    }

    #[test]
    fn before_any_data_the_state_is_stale_with_the_reason() {
        let m = model();
        assert_eq!(m.shared.live.state, LiveState::Stale);
        assert_eq!(m.shared.live.reason.as_deref(), Some("no data yet"));
    }

    #[test]
    fn only_a_resting_vehicle_has_a_resting_face() {
        let m = model();
        for (state, want) in [
            (LiveState::Resting, Some(4)),
            (LiveState::Propped, None),
            (LiveState::Moving, None),
            (LiveState::Airborne, None),
        ] {
            let live = live_on(&m, 4, 1.0, state);
            assert_eq!(live.resting_face(), want, "{state:?}");
        }
    }

    fn resting_on(m: &Model, face: usize, t_s: f64, resting: bool) -> Msg {
        let state = if resting {
            LiveState::Resting
        } else {
            LiveState::Moving
        };
        Msg::Live(Box::new(live_on(m, face, t_s, state)))
    }

    #[test]
    fn righting_steps_by_hand_and_verifies_arrival() {
        let mut m = model();
        update(&mut m, key(KeyCode::Char('2')));
        // F9 (index 8) is not a take-off face in the demo; a plan appears.
        let start = 8;
        let msg = resting_on(&m, start, 1.0, true);
        update(&mut m, msg);
        let plan = m
            .screens
            .righting
            .shown_plan()
            .expect("a preview plan")
            .clone();
        assert!(plan.reachable && !plan.steps.is_empty());
        // Enter commands step 1 and asks the simulator to roll.
        update(&mut m, key(KeyCode::Enter));
        assert_eq!(m.shared.outbox.len(), 1, "one roll command for the sim");
        let first = plan.steps[0].clone();
        let expected_roll = m.screens.righting.moves().unwrap().moves[first.move_index]
            .roll
            .to;
        assert_eq!(
            m.shared.outbox[0],
            Effect::SimRoll(m.shared.cage.faces[expected_roll].id.clone())
        );
        // Enter again while the step is under way is refused, said on the
        // message line until the stepper moves on.
        update(&mut m, key(KeyCode::Enter));
        assert_eq!(m.shared.outbox.len(), 1, "no second command");
        assert_eq!(
            m.shared.notice.as_deref(),
            Some("a step is already under way")
        );
        // Motion, then arrival on the step's face: the next step waits.
        let moving = resting_on(&m, start, 1.5, false);
        update(&mut m, moving);
        let arrived = resting_on(&m, first.to, 3.0, true);
        update(&mut m, arrived);
        let r = &m.screens.righting;
        let phase = r.stepper.as_ref().unwrap().phase();
        if plan.steps.len() > 1 {
            assert_eq!(phase, Phase::Waiting { step: 1 });
        } else {
            assert_eq!(phase, Phase::Done);
        }
        assert!(
            r.log
                .iter()
                .any(|l| l.contains("arrived as planned") || l.contains("complete"))
        );
        assert_eq!(
            m.shared.notice, None,
            "the refusal went when the step moved on"
        );
        // x abandons stepping.
        update(&mut m, key(KeyCode::Char('x')));
        assert!(m.screens.righting.stepper.is_none());
    }

    #[test]
    fn link_end_makes_the_picture_stale() {
        let mut m = model();
        let live = live_on(&m, 3, 1.0, LiveState::Resting);
        update(&mut m, Msg::Live(Box::new(live)));
        update(&mut m, Msg::LinkEnded("end of file".into()));
        assert_eq!(m.shared.live.state, LiveState::Stale);
        assert_eq!(m.shared.live.face, None);
        assert!(m.shared.notice.as_deref().unwrap().contains("end of file"));
    }

    #[test]
    fn a_changed_cage_log_replaces_the_health_and_keeps_stepping_state() {
        let mut m = model();
        m.screens.cage.selected = 5;
        let report = cagehand::health::assess(&[], &m.shared.cage, &m.shared.profile.inspection);
        update(
            &mut m,
            Msg::Health(Some(Box::new(report)), "2 records in the test log".into()),
        );
        assert!(m.shared.health.is_some());
        assert_eq!(m.shared.health_source, "2 records in the test log");
        assert_eq!(m.screens.cage.selected, 5, "the screen's own state stays");
    }

    fn type_text(m: &mut Model, text: &str) {
        for c in text.chars() {
            update(m, key(KeyCode::Char(c)));
        }
    }

    /// The demo with detection #4 pending in its read log.
    fn with_pending_detection() -> Model {
        let mut m = model();
        update(&mut m, Msg::Records(vec![super::detection_record(4)]));
        m.shared.operator = Some("ana".into());
        update(&mut m, key(KeyCode::Char('3')));
        m
    }

    #[test]
    fn esc_in_a_form_writes_nothing_and_keys_type_into_it() {
        let mut m = with_pending_detection();
        assert_eq!(m.shared.live.pending.len(), 1);
        update(&mut m, key(KeyCode::Char('x')));
        assert!(m.shared.form.is_some(), "x opens the dismissal form");
        // q and the screen keys are typed, not obeyed, while a form is open.
        type_text(&mut m, "q2 hand launch");
        assert!(!m.quit && m.screen == Screen::Cage);
        update(&mut m, key(KeyCode::Esc));
        assert!(m.shared.form.is_none());
        assert!(m.shared.outbox.is_empty(), "Esc writes nothing");
    }

    #[test]
    fn a_confirmation_is_pre_filled_and_enter_asks_for_the_write() {
        let mut m = with_pending_detection();
        update(&mut m, key(KeyCode::Char('y')));
        let f = m.shared.form.clone().expect("the confirm form");
        assert_eq!(f.value("face or node"), "F2", "face from the detection");
        assert_eq!(f.value("peak g"), "7.5", "no speed known: the peak");
        update(&mut m, key(KeyCode::Enter));
        match m.shared.outbox.as_slice() {
            [Effect::Log { operator, work, .. }] => {
                assert_eq!(operator, "ana");
                assert_eq!(
                    *work,
                    Work::Confirm {
                        seq: 4,
                        strike: cagehand::logbook::StrikeRef::Face("F2".into()),
                        input: cagehand::impact::ImpactInput::PeakAccel { g: 7.5 },
                        note: None,
                    }
                );
            }
            other => panic!("one log write expected, got {other:?}"),
        }
    }

    #[test]
    fn a_bad_form_stays_open_with_what_was_typed() {
        let mut m = with_pending_detection();
        update(&mut m, key(KeyCode::Char('R')));
        update(&mut m, key(KeyCode::Tab));
        type_text(&mut m, "bent");
        update(&mut m, key(KeyCode::Enter));
        assert!(m.shared.outbox.is_empty(), "no part: nothing written");
        let f = m.shared.form.as_ref().expect("the form stays open");
        assert_eq!(f.value("note"), "bent");
        assert!(m.shared.notice.as_deref().unwrap().contains("part or lot"));
        // The refusal follows the typing: it goes once the part is given.
        update(&mut m, key(KeyCode::BackTab));
        assert!(m.shared.notice.as_deref().unwrap().contains("part or lot"));
        type_text(&mut m, "LOT-1");
        assert_eq!(m.shared.notice, None, "nothing is wrong any more");
    }

    #[test]
    fn a_written_record_clears_the_pending_detection_at_once() {
        use cagehand::logbook::{DismissalEvent, Event, Record};
        let mut m = with_pending_detection();
        let mut records = m.shared.records.clone();
        records.push(Record {
            seq: 5,
            time: "2026-12-02T05:41:00Z".into(),
            operator: "ana".into(),
            event: Event::Dismissal(DismissalEvent {
                detection: 4,
                reason: "hand launch".into(),
            }),
        });
        update(&mut m, Msg::Records(records));
        update(&mut m, Msg::Written("#5 dismissal written".into()));
        assert!(m.shared.live.pending.is_empty());
        assert!(m.shared.notice.as_deref().unwrap().contains("#5"));
    }

    #[test]
    fn counts_have_their_plurals_right() {
        assert_eq!(count(1, "step"), "1 step");
        assert_eq!(count(0, "gap"), "0 gaps");
        assert_eq!(count(2, "record"), "2 records");
    }
}
