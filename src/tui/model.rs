//! The screens' model, the messages that change it, and `update`, the one
//! place it changes. No terminal here: tests drive `update` directly.

use crate::cage::Cage;
use crate::net::Net;
use crate::profile::Profile;
use crate::tui::theme::Theme;
use ratatui::crossterm::event::{KeyCode, KeyEvent, KeyEventKind, KeyModifiers};

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
        }
    }
}

/// Messages into `update`.
#[derive(Debug, Clone, PartialEq)]
pub enum Msg {
    /// A key press.
    Key(KeyEvent),
    /// A new live picture from the tracker.
    Live(LiveView),
    /// The terminal was resized.
    Resize,
    /// The link ended or failed, with the reason.
    LinkEnded(String),
}

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
}

impl Model {
    /// A model for a loaded profile, waiting for data on `source`.
    pub fn new(profile: Profile, cage: Cage, source: &str, theme: Theme) -> Model {
        let net = Net::unfold(&cage);
        let takeoff = cage
            .takeoff_faces(&profile.righting.takeoff_faces)
            .unwrap_or_default();
        Model {
            profile,
            cage,
            net,
            takeoff,
            screen: Screen::Watch,
            help: false,
            quit: false,
            live: LiveView::waiting(source),
            notice: None,
            theme,
        }
    }
}

/// Apply a message; returns whether anything visible changed.
pub fn update(model: &mut Model, msg: Msg) -> bool {
    match msg {
        Msg::Resize => true,
        Msg::Live(live) => {
            let changed = model.live != live;
            model.live = live;
            changed
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::tui::theme::ColourDepth;

    fn model() -> Model {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        Model::new(p, c, "sim", Theme::new(ColourDepth::None))
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
        update(&mut m, key(KeyCode::Char('q')));
        assert!(m.quit);
    }

    #[test]
    fn same_live_picture_is_not_a_change() {
        let mut m = model();
        let live = LiveView::waiting("sim");
        assert!(!update(&mut m, Msg::Live(live.clone())));
        let mut moved = live;
        moved.state = LiveState::Moving;
        assert!(update(&mut m, Msg::Live(moved)));
    }

    #[test]
    fn link_end_makes_the_picture_stale() {
        let mut m = model();
        let mut live = LiveView::waiting("sim");
        live.state = LiveState::Resting;
        live.face = Some(3);
        update(&mut m, Msg::Live(live));
        update(&mut m, Msg::LinkEnded("end of file".into()));
        assert_eq!(m.live.state, LiveState::Stale);
        assert_eq!(m.live.face, None);
        assert!(m.notice.as_deref().unwrap().contains("end of file"));
    }
}
