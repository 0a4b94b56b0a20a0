//! The screens' model, the messages that change it, and `update`, the one
//! place it changes. No terminal here: tests drive `update` directly.

use crate::tui::theme::Theme;
use cagehand::cage::Cage;
use cagehand::health::HealthReport;
use cagehand::net::Net;
use cagehand::profile::Profile;
use cagehand::rest::{RestState, RestStatus};
use cagehand::righting::stepper::{DEFAULT_MOTION_TIMEOUT_S, Notice, Phase, Stepper};
use cagehand::righting::{Plan, RightingModel};
use nalgebra::UnitQuaternion;
use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};
use std::collections::VecDeque;

/// The four screens.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Screen {
    /// Live attitude, resting face and link health on the net.
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
}

/// The vehicle's state as the tracker sees it.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum LiveState {
    /// No sample yet.
    Waiting,
    /// Steady on a face.
    Resting,
    /// Turning or rolling.
    Moving,
    /// Flying.
    Airborne,
    /// Data too old to trust.
    Stale,
}

impl LiveState {
    /// The word shown on screen.
    pub fn word(self) -> &'static str {
        match self {
            LiveState::Waiting => "WAITING",
            LiveState::Resting => "RESTING",
            LiveState::Moving => "MOVING",
            LiveState::Airborne => "AIRBORNE",
            LiveState::Stale => "STALE",
        }
    }
}

/// Link health as shown in the status line.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct LinkView {
    /// Link spec, e.g. `sim` or `udp:127.0.0.1:14550`.
    pub source: String,
    /// Samples per second over the last window.
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
    /// Resting face (nearest face while moving); None when stale or waiting.
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
}

/// One attitude with the rest detector's answer.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RestSample {
    /// Link clock, s.
    pub t_s: f64,
    /// Attitude, body -> world.
    pub attitude: UnitQuaternion<f64>,
    /// Resting or moving, and on which face.
    pub status: RestStatus,
}

impl LiveView {
    /// Nothing received yet on `source`.
    pub fn waiting(source: &str) -> LiveView {
        LiveView {
            state: LiveState::Waiting,
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
    /// The terminal was resized.
    Resize,
    /// The link ended or failed, with the reason.
    LinkEnded(String),
    /// Something the operator should know (an impact was detected, the
    /// link was lost and came back).
    Notice(String),
}

/// Side effects `update` asks the loop to carry out.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum Effect {
    /// Tell the in-process simulator to roll onto this face (the demo's
    /// stand-in for the operator flying the roll).
    SimRoll(String),
}

/// Righting on the screens: the plan from where the vehicle lies, and the
/// stepper once the operator has started.
#[derive(Debug, Clone)]
pub struct RightingState {
    /// Moves and their feasibility.
    pub model: RightingModel,
    /// Plan preview from the resting face (before stepping starts).
    pub preview: Option<Plan>,
    /// The stepper, once the operator has commanded the first step.
    pub stepper: Option<Stepper>,
    /// Recent stepper notices, newest last.
    pub log: VecDeque<String>,
}

/// How many stepper notices the Righting screen keeps.
const RIGHTING_LOG_LINES: usize = 6;

/// Everything the screens show.
#[derive(Debug, Clone)]
pub struct Model {
    /// The vehicle profile.
    pub profile: Profile,
    /// Its cage.
    pub cage: Cage,
    /// The unfolded net, computed once.
    pub net: Net,
    /// Take-off face indices.
    pub takeoff: Vec<usize>,
    /// Current screen.
    pub screen: Screen,
    /// Help overlay shown.
    pub help: bool,
    /// Set when the user asked to quit.
    pub quit: bool,
    /// Latest live picture.
    pub live: LiveView,
    /// A one-line message for the user (link ended, key not bound).
    pub notice: Option<String>,
    /// Styles.
    pub theme: Theme,
    /// Righting (None when the moves could not be built; `notice` says why).
    pub righting: Option<RightingState>,
    /// Member health from the cage log, if one could be read.
    pub health: Option<HealthReport>,
    /// Where the health came from, or why there is none.
    pub health_source: String,
    /// Effects for the loop to carry out.
    pub outbox: Vec<Effect>,
    /// First member row shown on the Cage screen.
    pub cage_scroll: usize,
}

impl Model {
    /// A model for a loaded profile, waiting for data on `source`.
    pub fn new(profile: Profile, cage: Cage, source: &str, theme: Theme) -> Model {
        let net = Net::unfold(&cage);
        let takeoff = cage
            .takeoff_faces(&profile.righting.takeoff_faces)
            .unwrap_or_default();
        let (righting, notice) = match RightingModel::new(&profile, &cage) {
            Ok(model) => (
                Some(RightingState {
                    model,
                    preview: None,
                    stepper: None,
                    log: VecDeque::new(),
                }),
                None,
            ),
            Err(e) => (None, Some(format!("righting unavailable: {e}"))),
        };
        Model {
            profile,
            cage,
            net,
            takeoff,
            screen: Screen::Watch,
            help: false,
            quit: false,
            live: LiveView::waiting(source),
            notice,
            theme,
            righting,
            health: None,
            health_source: "no cage log read".to_string(),
            outbox: Vec::new(),
            cage_scroll: 0,
        }
    }

    /// Attach member health read from the cage log.
    pub fn with_health(mut self, health: Option<HealthReport>, source: String) -> Model {
        self.health = health;
        self.health_source = source;
        self
    }

    /// The plan the Righting screen shows: the stepper's, else the preview.
    pub fn shown_plan(&self) -> Option<&Plan> {
        let r = self.righting.as_ref()?;
        r.stepper.as_ref().map(|s| s.plan()).or(r.preview.as_ref())
    }
}

/// Apply a message; returns whether anything visible changed.
pub fn update(model: &mut Model, msg: Msg) -> bool {
    match msg {
        Msg::Resize => true,
        Msg::Live(live) => {
            let changed = model.live != *live;
            model.live = *live;
            follow_righting(model) || changed
        }
        Msg::Notice(text) => {
            model.notice = Some(text);
            true
        }
        Msg::LinkEnded(why) => {
            model.notice = Some(format!("link ended: {why}"));
            model.live.state = LiveState::Stale;
            model.live.face = None;
            true
        }
        Msg::Key(key) => on_key(model, key),
    }
}

/// Feed the live rest answer to the stepper, or refresh the preview plan
/// when the vehicle settles on a new face. Returns whether anything changed.
fn follow_righting(model: &mut Model) -> bool {
    let Some(rs) = model.live.rest else {
        return false;
    };
    let Some(r) = model.righting.as_mut() else {
        return false;
    };
    if let Some(stepper) = r.stepper.as_mut() {
        let Some(n) = stepper.observe(rs.t_s, &rs.attitude, &rs.status) else {
            return false;
        };
        let text = describe(&model.cage, stepper, n);
        r.log.push_back(text);
        while r.log.len() > RIGHTING_LOG_LINES {
            r.log.pop_front();
        }
        return true;
    }
    if rs.status.state != RestState::Resting {
        return false;
    }
    if r.preview.as_ref().is_some_and(|p| p.from == rs.status.face) {
        return false;
    }
    r.preview = Some(r.model.plan(rs.status.face, &rs.attitude));
    true
}

fn face_id(cage: &Cage, i: usize) -> &str {
    cage.faces.get(i).map_or("?", |f| f.id.as_str())
}

/// A stepper notice in words for the Righting screen's log.
fn describe(cage: &Cage, stepper: &Stepper, n: Notice) -> String {
    match n {
        Notice::Commanded { step } => format!("step {} commanded; watching for motion", step + 1),
        Notice::Rolling { step } => format!("step {}: rolling", step + 1),
        Notice::Arrived { step, next } => format!(
            "step {} arrived as planned; step {} is next",
            step + 1,
            next + 1
        ),
        Notice::FellBack { step } => format!("step {}: fell back; command it again", step + 1),
        Notice::NoMotion { step } => format!("step {}: no motion seen; command it again", step + 1),
        Notice::Replanned { face } => format!(
            "settled on {} instead: new plan of {} steps",
            face_id(cage, face),
            stepper.plan().steps.len()
        ),
        Notice::Done { face } => format!(
            "on take-off face {}: righting complete",
            face_id(cage, face)
        ),
        Notice::NoRoute { face } => {
            format!("no route from {}: see the reason", face_id(cage, face))
        }
    }
}

/// Enter on the Righting screen: start stepping, or command the waiting step.
fn command_step(model: &mut Model) -> bool {
    let t_s = model.live.rest.map(|r| r.t_s);
    let Some(r) = model.righting.as_mut() else {
        return false;
    };
    let Some(t_s) = t_s else {
        model.notice = Some("no live attitude: cannot command a step".to_string());
        return true;
    };
    if r.stepper.is_none() {
        let Some(plan) = r.preview.clone() else {
            model.notice = Some("no plan yet: wait until the vehicle rests on a face".to_string());
            return true;
        };
        r.stepper = Some(Stepper::new(
            r.model.clone(),
            plan,
            DEFAULT_MOTION_TIMEOUT_S,
        ));
        r.log.clear();
    }
    let Some(stepper) = r.stepper.as_mut() else {
        return false;
    };
    let roll_to = stepper
        .current_step()
        .and_then(|s| r.model.moves.get(s.move_index))
        .map(|m| m.roll.to);
    match stepper.command(t_s) {
        Some(n) => {
            let text = describe(&model.cage, stepper, n);
            r.log.push_back(text);
            if let Some(to) = roll_to {
                model
                    .outbox
                    .push(Effect::SimRoll(face_id(&model.cage, to).to_string()));
            }
        }
        None => {
            let why = match stepper.phase() {
                Phase::Done => "righting is complete",
                Phase::NoRoute => "there is no route to command",
                _ => "a step is already under way",
            };
            model.notice = Some(why.to_string());
        }
    }
    true
}

fn on_key(model: &mut Model, key: KeyEvent) -> bool {
    if key.kind == KeyEventKind::Release {
        return false;
    }
    if key.modifiers.contains(KeyModifiers::CONTROL) && key.code == KeyCode::Char('c') {
        model.quit = true;
        return true;
    }
    if model.help {
        // Any key closes the help overlay; q still quits.
        model.help = false;
        if key.code == KeyCode::Char('q') {
            model.quit = true;
        }
        return true;
    }
    match key.code {
        KeyCode::Char('q') => model.quit = true,
        KeyCode::Char('?') | KeyCode::F(1) => model.help = true,
        KeyCode::Char('1') | KeyCode::Char('w') => model.screen = Screen::Watch,
        KeyCode::Char('2') | KeyCode::Char('r') => model.screen = Screen::Righting,
        KeyCode::Char('3') | KeyCode::Char('c') => model.screen = Screen::Cage,
        KeyCode::Char('4') | KeyCode::Char('p') => model.screen = Screen::Preflight,
        KeyCode::Tab => model.screen = next(model.screen, 1),
        KeyCode::BackTab => model.screen = next(model.screen, Screen::ALL.len() - 1),
        KeyCode::Esc => {
            let had = model.notice.take().is_some();
            return had;
        }
        KeyCode::Enter if model.screen == Screen::Righting => return command_step(model),
        KeyCode::Down | KeyCode::Char('j') if model.screen == Screen::Cage => {
            let last = model.cage.members.len().saturating_sub(1);
            model.cage_scroll = (model.cage_scroll + 1).min(last);
            return true;
        }
        KeyCode::Up | KeyCode::Char('k') if model.screen == Screen::Cage => {
            model.cage_scroll = model.cage_scroll.saturating_sub(1);
            return true;
        }
        KeyCode::PageDown if model.screen == Screen::Cage => {
            let last = model.cage.members.len().saturating_sub(1);
            model.cage_scroll = (model.cage_scroll + 10).min(last);
            return true;
        }
        KeyCode::PageUp if model.screen == Screen::Cage => {
            model.cage_scroll = model.cage_scroll.saturating_sub(10);
            return true;
        }
        KeyCode::Char('x') if model.screen == Screen::Righting => {
            if let Some(r) = model.righting.as_mut() {
                r.stepper = None;
                r.preview = None;
                r.log.clear();
            }
            model.notice = Some(
                "stepping abandoned; the plan restarts from where the vehicle rests".to_string(),
            );
            return true;
        }
        _ => {
            model.notice = Some("key not bound here: press ? for the keys".to_string());
            return true;
        }
    }
    model.notice = None;
    true
}

fn next(s: Screen, step: usize) -> Screen {
    let i = Screen::ALL.iter().position(|&x| x == s).unwrap_or(0);
    Screen::ALL[(i + step) % Screen::ALL.len()]
}

/// The demo vehicle's model without colour, waiting on `sim` (tests).
#[cfg(test)]
pub(crate) fn demo_model() -> Model {
    let demo = cagehand::vehicle::demo().expect("the demo profile loads");
    let (p, c) = (demo.profile, demo.cage);
    Model::new(
        p,
        c,
        "sim",
        Theme::new(crate::tui::theme::ColourDepth::None),
    )
}

#[cfg(test)]
mod tests {
    use super::*;

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
        update(&mut m, key(KeyCode::Down));
        update(&mut m, key(KeyCode::Up));
        assert_eq!(m.cage_scroll, 1, "arrows scroll the member table");
        update(&mut m, key(KeyCode::PageDown));
        update(&mut m, key(KeyCode::PageDown));
        update(&mut m, key(KeyCode::PageDown));
        assert_eq!(
            m.cage_scroll,
            m.cage.members.len() - 1,
            "scrolling stops at the last member"
        );
        update(&mut m, key(KeyCode::Char('q')));
        assert!(m.quit);
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

    /// A live picture resting (or moving) on `face` at `t_s`.
    fn resting_on(m: &Model, face: usize, t_s: f64, resting: bool) -> Msg {
        let q = cagehand::rest::resting_attitude(&m.cage, face);
        let fit = cagehand::rest::fit_face(&m.cage, &cagehand::attitude::gravity_body(&q));
        let mut live = LiveView::waiting("sim");
        live.state = if resting {
            LiveState::Resting
        } else {
            LiveState::Moving
        };
        live.face = Some(face);
        live.rest = Some(RestSample {
            t_s,
            attitude: q,
            status: RestStatus {
                state: if resting {
                    RestState::Resting
                } else {
                    RestState::Moving
                },
                face,
                error_deg: fit.error_deg,
                fit,
            },
        });
        Msg::Live(Box::new(live))
    }

    #[test]
    fn righting_steps_by_hand_and_verifies_arrival() {
        let mut m = model();
        update(&mut m, key(KeyCode::Char('2')));
        // F9 (index 8) is not a take-off face in the demo; a plan appears.
        let start = 8;
        let msg = resting_on(&m, start, 1.0, true);
        update(&mut m, msg);
        let plan = m.shown_plan().expect("a preview plan").clone();
        assert!(plan.reachable && !plan.steps.is_empty());
        // Enter commands step 1 and asks the simulator to roll.
        update(&mut m, key(KeyCode::Enter));
        assert_eq!(m.outbox.len(), 1, "one roll command for the sim");
        let first = plan.steps[0].clone();
        let expected_roll = m.righting.as_ref().unwrap().model.moves[first.move_index]
            .roll
            .to;
        assert_eq!(
            m.outbox[0],
            Effect::SimRoll(m.cage.faces[expected_roll].id.clone())
        );
        // Motion, then arrival on the step's face: the next step waits.
        let moving = resting_on(&m, start, 1.5, false);
        update(&mut m, moving);
        let arrived = resting_on(&m, first.to, 3.0, true);
        update(&mut m, arrived);
        let r = m.righting.as_ref().unwrap();
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
        // x abandons stepping.
        update(&mut m, key(KeyCode::Char('x')));
        assert!(m.righting.as_ref().unwrap().stepper.is_none());
    }

    #[test]
    fn link_end_makes_the_picture_stale() {
        let mut m = model();
        let mut live = LiveView::waiting("sim");
        live.state = LiveState::Resting;
        live.face = Some(3);
        update(&mut m, Msg::Live(Box::new(live)));
        update(&mut m, Msg::LinkEnded("end of file".into()));
        assert_eq!(m.live.state, LiveState::Stale);
        assert_eq!(m.live.face, None);
        assert!(m.notice.as_deref().unwrap().contains("end of file"));
    }
}
