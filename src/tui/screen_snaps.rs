//! Snapshot tests of every screen at 80x24 and 160x48, in the demo state
//! and the edge states, plus the too-small notice and the help. The text
//! form carries no colour; meaning must show in words and symbols anyway.
//! The scenario (vehicle, faces, numbers) is the invented demo of ours.

use crate::tui::model::{LiveState, LiveView, Model, Msg, Screen, demo_model, live_on, update};
use crate::tui::model::{held, tracked, with_preflight};
use crate::tui::view::render_text;
use cagehand::health::{HealthReport, Status, assess};
use cagehand::sample::Sample;

const SIZES: [(u16, u16); 2] = [(80, 24), (160, 48)];

/// A face of the demo cage that is not a take-off face (F9).
const DEMO_FACE: usize = 8;

fn with_live(mut m: Model, live: LiveView) -> Model {
    update(&mut m, Msg::Live(Box::new(live)));
    m
}

/// The demo: resting on F9, battery and link as the simulator gives them,
/// an empty cage log.
fn demo() -> Model {
    let m = demo_model();
    let mut live = live_on(&m, DEMO_FACE, 12.0, LiveState::Resting);
    live.battery_v = Some(11.92);
    live.armed = Some(false);
    live.link.frames = 1234;
    let health = assess(&[], &m.shared.cage, &m.shared.profile.inspection);
    let q = cagehand::rest::resting_attitude(&m.shared.cage, DEMO_FACE);
    let st = tracked(&m, &held(q, Some(11.92), Some(false)), 1.5);
    let m = with_live(m, live).with_health(Some(health), "no records yet (demo)".to_string());
    with_preflight(m, &st)
}

fn no_data() -> Model {
    let m = demo_model();
    let st = tracked(&m, &[], 0.0);
    with_preflight(m, &st)
}

fn stale() -> Model {
    let m = demo_model();
    let mut live = LiveView::waiting("sim");
    live.reason = Some("no attitude for 2.3 s".to_string());
    live.link.age_s = Some(2.3);
    live.link.frames = 811;
    let q = cagehand::rest::resting_attitude(&m.shared.cage, DEMO_FACE);
    let st = tracked(&m, &held(q, None, None), 1.5 + 2.3);
    let m = with_live(m, live);
    with_preflight(m, &st)
}

fn airborne() -> Model {
    let m = demo_model();
    let mut live = live_on(&m, 0, 20.0, LiveState::Airborne);
    live.armed = Some(true);
    live.battery_v = Some(11.61);
    let q = cagehand::rest::resting_attitude(&m.shared.cage, 0);
    let mut samples = held(q, Some(11.61), Some(true));
    // Climbing at 1.5 m/s: the airborne cue.
    samples.push((
        1.5,
        Sample {
            t_s: 1.5,
            velocity_ned_m_s: Some(nalgebra::Vector3::new(0.0, 0.0, -1.5)),
            ..Sample::default()
        },
    ));
    let st = tracked(&m, &samples, 1.5);
    let m = with_live(m, live);
    with_preflight(m, &st)
}

fn propped() -> Model {
    let m = demo_model();
    // Held still at 20 deg of roll: nearest F1, 20 deg off.
    let q = cagehand::attitude::quat_from_rpy_deg(20.0, 0.0, 0.0);
    let fit = cagehand::rest::fit_face(&m.shared.cage, &cagehand::attitude::gravity_body(&q));
    let mut live = live_on(&m, fit.face, 5.0, LiveState::Propped);
    live.error_deg = Some(fit.error_deg);
    live.rpy_deg = Some([20.0, 0.0, 0.0]);
    live.reason = Some(format!(
        "still, {:.1} deg off: not flat on any face",
        fit.error_deg
    ));
    let st = tracked(&m, &held(q, None, None), 1.5);
    assert_eq!(st.state, cagehand::tracker::WatchStateKind::Propped);
    let m = with_live(m, live);
    with_preflight(m, &st)
}

/// The demo with one detected impact not yet confirmed or dismissed.
fn pending() -> Model {
    let m = demo();
    let mut live = m.shared.live.clone();
    live.pending = vec![cagehand::logbook::Pending {
        seq: 12,
        time: "2026-12-02T05:40:00Z".to_string(),
        peak_g: 6.4,
        face: "F5".to_string(),
        speed_m_per_s: Some(2.1),
        source: "sim".to_string(),
    }];
    with_live(m, live)
}

fn unreachable() -> Model {
    let (mut p, c) = {
        let d = cagehand::vehicle::demo().expect("the demo profile loads");
        (d.profile, d.cage)
    };
    // A margin no rotor can meet: no roll is feasible, so no route.
    p.righting.torque_margin = 1000.0;
    let m = Model::new(
        p,
        c,
        "sim",
        crate::tui::theme::Theme::new(crate::tui::theme::ColourDepth::None),
    );
    let live = live_on(&m, DEMO_FACE, 3.0, LiveState::Resting);
    with_live(m, live)
}

fn flagged() -> Model {
    let m = demo();
    let mut h: HealthReport = m.shared.health.clone().expect("demo health");
    let flags = [
        (
            0,
            Status::ReplaceNow,
            1.12,
            1.4,
            "damage 1.12 reaches 1.00; utilisation 140% in the impact of 2026-11-30 exceeded the capacity",
        ),
        (
            3,
            Status::Due,
            0.81,
            0.9,
            "damage 0.81 reaches the replace-at threshold 0.80",
        ),
        (
            7,
            Status::Inspect,
            0.35,
            0.7,
            "damage 0.35 reaches the inspect-at threshold 0.30",
        ),
    ];
    for (i, status, damage, u, why) in flags {
        if let Some(mh) = h.members.get_mut(i) {
            mh.status = status;
            mh.damage = damage;
            mh.max_utilisation = u;
            mh.impacts = 2;
            mh.reasons = vec![why.to_string()];
        }
    }
    m.with_health(Some(h), "3 records (invented demo log)".to_string())
}

fn snap(name: &str, m: &Model, screens: &[Screen]) {
    for &screen in screens {
        let mut m = m.clone();
        m.screen = screen;
        for (w, h) in SIZES {
            update(&mut m, Msg::Resize(w, h));
            let text = render_text(&m, w, h);
            insta::assert_snapshot!(
                format!("{name}_{}_{w}x{h}", screen.title().to_lowercase()),
                text
            );
        }
    }
}

#[test]
fn demo_state() {
    snap("demo", &demo(), &Screen::ALL);
}

#[test]
fn no_data_state() {
    snap("no_data", &no_data(), &Screen::ALL);
}

#[test]
fn stale_state() {
    snap(
        "stale",
        &stale(),
        &[Screen::Watch, Screen::Righting, Screen::Preflight],
    );
}

#[test]
fn airborne_state() {
    snap(
        "airborne",
        &airborne(),
        &[Screen::Watch, Screen::Righting, Screen::Preflight],
    );
}

#[test]
fn propped_state() {
    snap(
        "propped",
        &propped(),
        &[Screen::Watch, Screen::Righting, Screen::Preflight],
    );
}

#[test]
fn pending_detection() {
    let m = pending();
    snap(
        "pending",
        &m,
        &[Screen::Watch, Screen::Righting, Screen::Cage],
    );
    // The line is whole at 80 columns.
    let text = render_text(&m, 80, 24);
    assert!(
        text.contains("IMPACT #12 PENDING: 6.4 g on F5; confirm or dismiss it before flying"),
        "{text}"
    );
}

#[test]
fn unreachable_face() {
    snap("unreachable", &unreachable(), &[Screen::Righting]);
}

#[test]
fn flagged_members() {
    snap("flagged", &flagged(), &[Screen::Cage]);
}

#[test]
fn terminal_too_small() {
    for screen in Screen::ALL {
        let mut m = demo();
        m.screen = screen;
        let text = render_text(&m, 30, 8);
        insta::assert_snapshot!(
            format!("too_small_{}_30x8", screen.title().to_lowercase()),
            text
        );
    }
}

#[test]
fn help_overlay() {
    for screen in Screen::ALL {
        let mut m = demo();
        m.screen = screen;
        m.help = true;
        let text = render_text(&m, 80, 24);
        insta::assert_snapshot!(
            format!("help_{}_80x24", screen.title().to_lowercase()),
            text
        );
    }
}

/// The pending demo with its cage log read: the detection and two records
/// before it (invented scenario).
fn with_records() -> Model {
    use cagehand::logbook::{DetectionEvent, Event, FindingEvent, FindingKind, NoteEvent, Record};
    let mut m = pending();
    let rec = |seq, time: &str, event| Record {
        seq,
        time: time.to_string(),
        operator: "ana".to_string(),
        event,
    };
    let records = vec![
        rec(
            10,
            "2026-12-02T05:30:00Z",
            Event::Note(NoteEvent {
                text: "field day 3, grass strip (invented)".into(),
            }),
        ),
        rec(
            11,
            "2026-12-02T05:35:00Z",
            Event::Finding(FindingEvent {
                member: "S4".into(),
                kind: FindingKind::Fray,
                note: Some("light fraying at the end".into()),
            }),
        ),
        rec(
            12,
            "2026-12-02T05:40:00Z",
            Event::Detection(DetectionEvent {
                link_time_s: 31.2,
                peak_g: 6.4,
                direction_body: [0.0, 0.0, -1.0],
                face: "F5".into(),
                face_alignment: 0.97,
                speed_m_per_s: Some(2.1),
                normal_speed_m_per_s: Some(1.9),
                source: "sim".into(),
            }),
        ),
    ];
    update(&mut m, Msg::Records(records));
    m.shared.operator = Some("ana".into());
    m
}

#[test]
fn cage_log_panel() {
    let m = with_records();
    assert_eq!(m.shared.live.pending.len(), 1, "the detection is pending");
    snap("records", &m, &[Screen::Cage]);
}

#[test]
fn forms_with_a_bad_entry() {
    use crate::tui::form::Form;
    // A confirmation pre-filled from detection #12, the face mistyped.
    let mut m = with_records();
    let mut f = Form::confirm(&m.shared, 12);
    f.fields[0].value = "F55".into();
    m.shared.form = Some(f);
    snap("form_confirm_bad", &m, &[Screen::Cage]);
    // A replacement with a note typed but the part left empty; no
    // operator known, so the form asks for one.
    let mut m = with_records();
    m.shared.operator = None;
    let mut f = Form::replacement(&m.shared, "R3");
    f.fields[2].value = "bent at N7".into();
    f.focus = 2;
    m.shared.form = Some(f);
    snap("form_replacement_bad", &m, &[Screen::Cage]);
}

#[test]
fn preflight_blocked_and_ready() {
    // Blocked: resting on F9 (no take-off face), hand items unticked.
    snap("blocked", &demo(), &[Screen::Preflight]);
    // Ready: resting on a take-off face, every hand item ticked.
    let m = demo_model();
    let face = m.shared.takeoff[0];
    let mut live = live_on(&m, face, 12.0, LiveState::Resting);
    live.battery_v = Some(12.4);
    live.armed = Some(false);
    let q = cagehand::rest::resting_attitude(&m.shared.cage, face);
    let st = tracked(&m, &held(q, Some(12.4), Some(false)), 1.5);
    let health = assess(&[], &m.shared.cage, &m.shared.profile.inspection);
    let m = with_live(m, live).with_health(Some(health), "no records yet (demo)".to_string());
    let mut m = with_preflight(m, &st);
    let eval = m.shared.live.preflight.clone().expect("evaluated");
    m.screens.preflight.signoff = cagehand::preflight::SignOff::tick_all(&eval);
    assert!(
        cagehand::preflight::sign(&eval, &m.screens.preflight.signoff).is_ok(),
        "{:?}",
        eval.blocking()
    );
    snap("ready", &m, &[Screen::Preflight]);
}

/// The Cage screen with the remaining margin: the member table with its
/// margin column, and the margin map, on the undamaged demo; the map while
/// the margin is still being worked out; the map with the fray of the
/// records (derated) and grounded by a cut rod (invented scenario).
#[test]
fn margin_on_the_cage_screen() {
    use crate::tui::margin_map::with_margin;
    let m = with_margin(demo());
    snap("margin", &m, &[Screen::Cage]);
    let mut map = m.clone();
    map.screens.cage.margin_map = true;
    snap("margin_map", &map, &[Screen::Cage]);
    let mut working = demo();
    working.screens.cage.margin_map = true;
    snap("margin_working", &working, &[Screen::Cage]);
    let mut frayed = with_margin(with_records());
    frayed.screens.cage.margin_map = true;
    snap("margin_frayed", &frayed, &[Screen::Cage]);
    let mut grounded = demo();
    let cut = cagehand::logbook::Record {
        seq: 1,
        time: "2026-12-02T06:10:00Z".into(),
        operator: "ana".into(),
        event: cagehand::logbook::Event::Finding(cagehand::logbook::FindingEvent {
            member: "R3".into(),
            kind: cagehand::logbook::FindingKind::Cut,
            note: Some("cut through at N7 (invented)".into()),
        }),
    };
    let health = assess(
        std::slice::from_ref(&cut),
        &grounded.shared.cage,
        &grounded.shared.profile.inspection,
    );
    update(&mut grounded, Msg::Records(vec![cut]));
    let mut grounded =
        with_margin(grounded).with_health(Some(health), "1 record (invented demo log)".to_string());
    snap("margin_grounded", &grounded, &[Screen::Cage]);
    grounded.screens.cage.margin_map = true;
    snap("margin_grounded_map", &grounded, &[Screen::Cage]);
}
