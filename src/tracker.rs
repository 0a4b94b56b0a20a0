//! The tracker turns samples into the watch state: resting, propped,
//! moving, airborne or stale, the face, the error, the attitude, and link
//! health.
//! Pure: it has no clock of its own; the caller passes the link clock
//! (`at_s`, seconds, receiver side: arrival time on a live link, the
//! recorded arrival time on a replay), so a replay gives the same states.
//!
//! States, in order of precedence:
//! - **stale**: no attitude for longer than `watch.stale_after_s` (or none
//!   yet: the reason then says "no data yet"). Nothing else is shown as
//!   current: face, error and angles are null.
//! - **airborne**: the motors are armed and the vehicle is flying. It
//!   becomes airborne when, while armed, it climbs or descends at
//!   [`AIRBORNE_VERTICAL_SPEED_M_S`] or more, moves over the ground at
//!   [`AIRBORNE_GROUND_SPEED_M_S`] or more, or the specific force stays at
//!   least [`AIRBORNE_FORCE_OFF_G`] away from 1 g for
//!   [`AIRBORNE_FORCE_HOLD_S`]. It stays airborne until disarmed, or until
//!   the rest detector says resting or propped and no airborne cue has been seen for
//!   [`AIRBORNE_QUIET_S`]. A steady level hover with no vertical speed looks
//!   like lying still on the bottom face; the next cue brings it back.
//! - **resting** / **propped** / **moving**: from the rest detector
//!   (src/rest.rs): steady for the dwell time within tolerance of a face;
//!   steady but beyond the tolerance of every face; not steady. While
//!   propped or moving the face is the nearest one and `error_deg` says how
//!   far off it the vehicle lies.
//!
//! The rate counts attitude instants, not messages: ATTITUDE and
//! ATTITUDE_QUATERNION sent for the same sender time are one sample.

use crate::attitude::rpy_deg;
use crate::cage::Cage;
use crate::link::Counters;
use crate::profile::WatchSettings;
use crate::rest::{RestDetector, RestMark, RestState, RestStatus};
use crate::sample::{STANDARD_GRAVITY_M_S2, Sample};
use nalgebra::UnitQuaternion;
use serde::Serialize;
use std::collections::{BTreeSet, VecDeque};

/// Vertical speed that says the vehicle is climbing or descending, m/s.
/// Common practice, no published source: well above the drift of a
/// consumer-grade velocity estimate at rest.
pub const AIRBORNE_VERTICAL_SPEED_M_S: f64 = 0.5;
/// Ground speed that says the vehicle is flying, not rolling, m/s: a
/// rolling cage of half a metre covers a face or so per second, well under
/// this (common practice, no published source).
pub const AIRBORNE_GROUND_SPEED_M_S: f64 = 1.0;
/// Distance of the specific force from 1 g that says thrust is carrying or
/// accelerating the vehicle, in g (common practice, no published source).
pub const AIRBORNE_FORCE_OFF_G: f64 = 0.25;
/// How long the force cue must hold; shorter excursions are bumps and
/// crash spikes, not flight.
pub const AIRBORNE_FORCE_HOLD_S: f64 = 0.3;
/// Quiet time after the last cue before a resting vehicle stops being airborne.
pub const AIRBORNE_QUIET_S: f64 = 2.0;
/// Window over which the sample rate is measured, s.
const RATE_WINDOW_S: f64 = 2.0;

/// What the watch shows.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Hash, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum WatchStateKind {
    /// Lying still on a face.
    Resting,
    /// Motionless but not flat on any face (on an edge, a rock, a branch).
    Propped,
    /// On the ground but not settled (rolling, tumbling, carried).
    Moving,
    /// Armed and flying.
    Airborne,
    /// No fresh attitude.
    Stale,
}

/// Link health, as the watch line shows it (a JSON contract).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct LinkHealth {
    /// The link spec, e.g. `udp:127.0.0.1:14550`.
    pub source: String,
    /// Attitude samples per second over the last two seconds, counting
    /// one per attitude instant (not one per message).
    pub rate_hz: f64,
    /// Age of the last attitude sample, ms (null before the first).
    pub age_ms: Option<u64>,
    /// Good frames or lines.
    pub frames: u64,
    /// Bad MAVLink candidates.
    pub crc_errors: u64,
    /// Unknown MAVLink ids.
    pub unknown: u64,
    /// Refused frames and senders.
    pub rejected: u64,
    /// Malformed lines or values.
    pub malformed: u64,
    /// Samples lost before the tracker got them.
    pub dropped: u64,
}

/// Schema name of a watch line.
pub const WATCH_SCHEMA: &str = "cagehand.watch/1";

/// One watch line (a JSON contract: `watch --headless` prints these).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct WatchState {
    /// Always [`WATCH_SCHEMA`].
    pub schema: &'static str,
    /// Link clock, seconds.
    pub t: f64,
    /// The state.
    pub state: WatchStateKind,
    /// Why the state is what it is, in words, for stale and propped
    /// ("no data yet", "no attitude for 2.1 s", "still, 20.0 deg off F1");
    /// null otherwise.
    pub reason: Option<String>,
    /// Face id: the resting face, the nearest face while propped, moving or
    /// airborne, null when stale.
    pub face: Option<String>,
    /// Index of that face in `cage.faces`, for screens (not in the JSON).
    #[serde(skip)]
    pub face_index: Option<usize>,
    /// Angle between that face's normal and gravity, degrees.
    pub error_deg: Option<f64>,
    /// Roll, pitch, yaw in degrees (Z-Y-X).
    pub rpy_deg: Option<[f64; 3]>,
    /// Motors armed, where the link says (null when stale).
    pub armed: Option<bool>,
    /// Battery voltage, where the link says (null when stale).
    pub battery_v: Option<f64>,
    /// Link health.
    pub link: LinkHealth,
}

/// Turns samples into watch states.
#[derive(Debug, Clone)]
pub struct Tracker {
    rest: RestDetector,
    stale_after_s: f64,
    source: String,
    counters: Counters,
    last: Option<Attitude>,
    /// Sender time of the last attitude, to count instants, not messages.
    last_sample_t_s: Option<f64>,
    arrivals: VecDeque<f64>,
    armed: Option<bool>,
    battery_v: Option<f64>,
    airborne: bool,
    last_cue_s: Option<f64>,
    force_off_since: Option<f64>,
    faces_seen: BTreeSet<usize>,
    now_s: f64,
}

#[derive(Debug, Clone, Copy)]
struct Attitude {
    at_s: f64,
    q: UnitQuaternion<f64>,
    /// The rest detector's answer; its angles are worked out only when a
    /// state is built.
    status: RestMark,
}

impl Tracker {
    /// A tracker with the profile's watch settings, for a link named `source`.
    pub fn new(settings: &WatchSettings, source: &str) -> Tracker {
        Tracker {
            rest: RestDetector::new(settings),
            stale_after_s: settings.stale_after_s,
            source: source.to_string(),
            counters: Counters::default(),
            last: None,
            last_sample_t_s: None,
            arrivals: VecDeque::new(),
            armed: None,
            battery_v: None,
            airborne: false,
            last_cue_s: None,
            force_off_since: None,
            faces_seen: BTreeSet::new(),
            now_s: 0.0,
        }
    }

    /// The link's counters, as its reader last reported them.
    pub fn set_counters(&mut self, c: Counters) {
        self.counters = c;
    }

    /// The link's counters.
    pub fn counters(&self) -> Counters {
        self.counters
    }

    /// Faces the vehicle has rested on so far (indices into `cage.faces`).
    pub fn faces_seen(&self) -> &BTreeSet<usize> {
        &self.faces_seen
    }

    /// Advance the link clock without a sample (ticks).
    pub fn tick(&mut self, at_s: f64) {
        if at_s.is_finite() && at_s > self.now_s {
            self.now_s = at_s;
        }
    }

    fn is_stale(&self) -> bool {
        self.last
            .is_none_or(|a| self.now_s - a.at_s > self.stale_after_s)
    }

    /// Feed one sample that arrived at `at_s`.
    pub fn update(&mut self, cage: &Cage, at_s: f64, s: &Sample) {
        self.tick(at_s);
        let at_s = self.now_s;
        if let Some(a) = s.armed {
            self.armed = Some(a);
            if !a {
                self.airborne = false;
                self.force_off_since = None;
            }
        }
        if let Some(v) = s.battery_v {
            self.battery_v = Some(v);
        }
        let armed = self.armed == Some(true);
        if let Some(v) = s.velocity_ned_m_s
            && armed
            && (v.z.abs() >= AIRBORNE_VERTICAL_SPEED_M_S
                || v.x.hypot(v.y) >= AIRBORNE_GROUND_SPEED_M_S)
        {
            self.cue(at_s);
        }
        if let Some(f) = s.accel_body_m_s2 {
            // Only an armed vehicle's force is a cue: the norm is worked
            // out only then (every IMU sample of a replay comes here).
            if armed && (f.norm() / STANDARD_GRAVITY_M_S2 - 1.0).abs() >= AIRBORNE_FORCE_OFF_G {
                let since = *self.force_off_since.get_or_insert(at_s);
                if at_s - since >= AIRBORNE_FORCE_HOLD_S {
                    self.cue(at_s);
                }
            } else {
                self.force_off_since = None;
            }
        }
        if let Some(q) = s.attitude {
            if self.last.is_some() && self.is_stale() {
                // A gap in the data: what was steady before proves nothing now.
                self.rest.reset();
            }
            // The rest detector runs on the link clock: sender clocks restart
            // when a vehicle reboots, the link clock does not.
            let st = self.rest.advance(cage, at_s, &q);
            self.last = Some(Attitude {
                at_s,
                q,
                status: st,
            });
            // Two messages for one instant (ATTITUDE and ATTITUDE_QUATERNION
            // with the same sender time) are one sample for the rate.
            if self.last_sample_t_s != Some(s.t_s) {
                self.arrivals.push_back(at_s);
            }
            self.last_sample_t_s = Some(s.t_s);
            while self
                .arrivals
                .front()
                .is_some_and(|&t| at_s - t > RATE_WINDOW_S)
            {
                self.arrivals.pop_front();
            }
            if st.state == RestState::Resting {
                self.faces_seen.insert(st.face);
            }
            if st.state != RestState::Moving {
                // Motionless for the dwell, on a face or propped: no
                // longer flying once the cues have gone quiet.
                if self.airborne && self.last_cue_s.is_none_or(|c| at_s - c >= AIRBORNE_QUIET_S) {
                    self.airborne = false;
                }
            }
        }
    }

    fn cue(&mut self, at_s: f64) {
        self.airborne = true;
        self.last_cue_s = Some(at_s);
    }

    /// The latest attitude with the rest detector's answer for it, on the
    /// link clock; None before the first attitude and while stale. The
    /// righting stepper verifies each roll from this.
    pub fn last_rest(&self, cage: &Cage) -> Option<(f64, UnitQuaternion<f64>, RestStatus)> {
        match self.last {
            Some(a) if !self.is_stale() => Some((a.at_s, a.q, a.status.status(cage))),
            _ => None,
        }
    }

    /// The state's kind and face, without building the whole state: what
    /// a consumer compares to see a change, cheap enough for every sample.
    /// Agrees with [`Tracker::state`]'s `state` and `face_index`.
    pub fn state_key(&self, cage: &Cage) -> (WatchStateKind, Option<usize>) {
        match self.last {
            Some(a) if !self.is_stale() => (
                self.kind_of(&a),
                cage.faces.get(a.status.face).map(|_| a.status.face),
            ),
            _ => (WatchStateKind::Stale, None),
        }
    }

    /// The link clock now, s, as the inputs set it (not rounded).
    pub fn clock_s(&self) -> f64 {
        self.now_s
    }

    /// The link clock now, s, rounded to the millisecond as
    /// [`WatchState::t`] is.
    pub fn time_s(&self) -> f64 {
        (self.now_s * 1000.0).round() / 1000.0
    }

    fn kind_of(&self, a: &Attitude) -> WatchStateKind {
        if self.airborne {
            WatchStateKind::Airborne
        } else {
            match a.status.state {
                RestState::Resting => WatchStateKind::Resting,
                RestState::Propped => WatchStateKind::Propped,
                RestState::Moving => WatchStateKind::Moving,
            }
        }
    }

    /// The state now.
    pub fn state(&self, cage: &Cage) -> WatchState {
        let stale = self.is_stale();
        let span = self
            .arrivals
            .front()
            .map_or(0.0, |&t0| (self.now_s - t0).max(0.0));
        let rate_hz = if stale || self.arrivals.len() < 2 {
            0.0
        } else {
            ((self.arrivals.len() - 1) as f64 / span.max(1e-3) * 10.0).round() / 10.0
        };
        let c = self.counters;
        let link = LinkHealth {
            source: self.source.clone(),
            rate_hz,
            age_ms: self
                .last
                .map(|a| ((self.now_s - a.at_s).max(0.0) * 1000.0).round() as u64),
            frames: c.frames,
            crc_errors: c.crc_errors,
            unknown: c.unknown,
            rejected: c.rejected,
            malformed: c.malformed,
            dropped: c.dropped,
        };
        let reason = match self.last {
            None => Some("no data yet".to_string()),
            Some(a) if stale => Some(format!(
                "no attitude for {:.1} s",
                (self.now_s - a.at_s).max(0.0)
            )),
            Some(_) => None,
        };
        let base = WatchState {
            schema: WATCH_SCHEMA,
            t: self.time_s(),
            state: WatchStateKind::Stale,
            reason,
            face: None,
            face_index: None,
            error_deg: None,
            rpy_deg: None,
            armed: None,
            battery_v: None,
            link,
        };
        match self.last {
            Some(a) if !stale => {
                let state = self.kind_of(&a);
                let status = a.status.status(cage);
                let face = cage.faces.get(status.face);
                let reason = match (state, face) {
                    (WatchStateKind::Propped, Some(f)) => Some(format!(
                        "still, {:.1} deg off {}: not flat on any face",
                        status.error_deg, f.id
                    )),
                    _ => None,
                };
                let r = rpy_deg(&a.q).map(round2);
                WatchState {
                    state,
                    reason,
                    armed: self.armed,
                    battery_v: self.battery_v,
                    face: face.map(|f| f.id.clone()),
                    face_index: face.map(|_| status.face),
                    error_deg: Some(round2(status.error_deg)),
                    rpy_deg: Some(r),
                    ..base
                }
            }
            _ => base,
        }
    }
}

fn round2(x: f64) -> f64 {
    (x * 100.0).round() / 100.0
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::Profile;
    use crate::rest::resting_attitude;
    use nalgebra::Vector3;

    fn demo() -> (Profile, Cage) {
        crate::cage::demo_cage()
    }

    fn att(t: f64, q: UnitQuaternion<f64>) -> Sample {
        Sample {
            t_s: t,
            attitude: Some(q),
            ..Default::default()
        }
    }

    #[test]
    fn stale_until_data_then_resting_then_stale_again() {
        let (p, c) = demo();
        let mut tr = Tracker::new(&p.watch, "test");
        assert_eq!(tr.state(&c).state, WatchStateKind::Stale);
        let q = resting_attitude(&c, 4);
        for i in 0..50 {
            let t = i as f64 * 0.02;
            tr.update(&c, t, &att(t, q));
        }
        let s = tr.state(&c);
        // Still for 1 s > dwell 0.5 s, normal along gravity.
        assert_eq!(s.state, WatchStateKind::Resting);
        assert_eq!(s.face.as_deref(), Some(c.faces[4].id.as_str()));
        assert_eq!(s.face_index, Some(4));
        assert!(s.error_deg.is_some_and(|e| e < 1e-6));
        assert!((s.link.rate_hz - 50.0).abs() < 1.0, "{}", s.link.rate_hz);
        // No data for longer than stale_after_s (1.5 s in the demo).
        tr.tick(0.98 + p.watch.stale_after_s + 0.01);
        let s = tr.state(&c);
        assert_eq!(s.state, WatchStateKind::Stale);
        assert_eq!((s.face, s.error_deg, s.rpy_deg), (None, None, None));
        assert_eq!((s.armed, s.battery_v), (None, None));
        assert_eq!(s.link.age_ms, Some(1510));
        // Fresh data after the gap must dwell again before resting.
        tr.update(&c, 3.0, &att(3.0, q));
        assert_eq!(tr.state(&c).state, WatchStateKind::Moving);
    }

    #[test]
    fn armed_climb_is_airborne_until_disarmed() {
        let (p, c) = demo();
        let mut tr = Tracker::new(&p.watch, "test");
        let q = resting_attitude(&c, 0);
        let mut s = att(0.0, q);
        s.armed = Some(true);
        tr.update(&c, 0.0, &s);
        tr.update(
            &c,
            0.1,
            &Sample {
                t_s: 0.1,
                velocity_ned_m_s: Some(Vector3::new(0.0, 0.0, -1.0)),
                ..Default::default()
            },
        );
        tr.update(&c, 0.12, &att(0.12, q));
        assert_eq!(tr.state(&c).state, WatchStateKind::Airborne);
        tr.update(
            &c,
            0.2,
            &Sample {
                t_s: 0.2,
                armed: Some(false),
                ..Default::default()
            },
        );
        tr.update(&c, 0.22, &att(0.22, q));
        assert_eq!(tr.state(&c).state, WatchStateKind::Moving);
    }

    #[test]
    fn a_short_spike_is_not_flight_but_sustained_thrust_is() {
        let (p, c) = demo();
        let mut tr = Tracker::new(&p.watch, "test");
        let q = resting_attitude(&c, 0);
        let mut s = att(0.0, q);
        s.armed = Some(true);
        tr.update(&c, 0.0, &s);
        let f = |t: f64, g: f64| Sample {
            t_s: t,
            attitude: Some(q),
            accel_body_m_s2: Some(Vector3::new(0.0, 0.0, -g * STANDARD_GRAVITY_M_S2)),
            ..Default::default()
        };
        tr.update(&c, 0.02, &f(0.02, 6.0));
        tr.update(&c, 0.04, &f(0.04, 6.0));
        tr.update(&c, 0.06, &f(0.06, 1.0));
        assert_ne!(tr.state(&c).state, WatchStateKind::Airborne);
        for i in 0..20 {
            let t = 0.1 + i as f64 * 0.02;
            tr.update(&c, t, &f(t, 1.4));
        }
        assert_eq!(tr.state(&c).state, WatchStateKind::Airborne);
    }

    #[test]
    fn no_data_yet_is_stale_with_that_reason() {
        let (p, c) = demo();
        let tr = Tracker::new(&p.watch, "test");
        let s = tr.state(&c);
        assert_eq!(s.state, WatchStateKind::Stale);
        assert_eq!(s.reason.as_deref(), Some("no data yet"));
        let json = serde_json::to_value(&s).unwrap();
        assert_eq!(json["state"], "stale");
        assert_eq!(json["schema"], WATCH_SCHEMA);
    }

    #[test]
    fn still_at_20_deg_roll_is_propped_with_the_nearest_face() {
        let (p, c) = demo();
        let mut tr = Tracker::new(&p.watch, "test");
        let q = crate::attitude::quat_from_rpy_deg(20.0, 0.0, 0.0);
        let fit = crate::rest::fit_face(&c, &crate::attitude::gravity_body(&q));
        assert!(
            fit.error_deg > p.watch.rest_tolerance_deg,
            "20 deg of roll is off every demo face by more than the tolerance"
        );
        let mut t = 0.0;
        while t <= p.watch.dwell_s + 0.1 {
            tr.update(&c, t, &att(t, q));
            t += 0.02;
        }
        let s = tr.state(&c);
        assert_eq!(s.state, WatchStateKind::Propped);
        assert_eq!(s.face_index, Some(fit.face));
        assert!((s.error_deg.unwrap() - fit.error_deg).abs() < 0.01);
        assert!(s.reason.as_deref().unwrap().contains("not flat"));
        assert_eq!(serde_json::to_value(&s).unwrap()["state"], "propped");
        assert!(
            tr.faces_seen().is_empty(),
            "propped is not a face rested on"
        );
    }

    #[test]
    fn two_messages_for_one_instant_count_once_in_the_rate() {
        let (p, c) = demo();
        let mut tr = Tracker::new(&p.watch, "test");
        let q = resting_attitude(&c, 0);
        // 50 instants a second, each sent twice (ATTITUDE and
        // ATTITUDE_QUATERNION carry the same time_boot_ms).
        for i in 0..100 {
            let t = i as f64 * 0.02;
            tr.update(&c, t, &att(t, q));
            tr.update(&c, t + 0.001, &att(t, q));
        }
        let r = tr.state(&c).link.rate_hz;
        assert!((r - 50.0).abs() < 1.5, "{r}");
    }
}
