//! Resting-face identification: which face of the cage the vehicle lies on,
//! from its attitude alone.
//!
//! The face is the one whose outward normal (body frame) is closest to the
//! body-frame gravity direction g_b = R^T (0, 0, 1) (docs/design.md). That
//! direction does not depend on yaw, so neither does anything here.
//!
//! A face is reported as *resting* only when
//! - its normal is within `watch.rest_tolerance_deg` of gravity, and
//! - the attitude has been steady for `watch.dwell_s`: steady means the
//!   gravity direction has stayed within [`STEADY_ANGLE_DEG`] of where it
//!   was when the steady spell began (an anchor, not the previous sample, so
//!   a slow creep does not count as steady).
//!
//! A vehicle steady for the dwell time but farther than the tolerance from
//! every face is *propped* (on an edge, a rock, a branch); anything not
//! steady is *moving*.
//!
//! Hysteresis (`watch.hysteresis_deg`): the detector keeps its current face
//! until another face is closer to gravity by more than the hysteresis, so
//! sensor noise near a tie between two faces does not make the face flicker;
//! once resting, it stays resting until the error exceeds the tolerance by
//! the hysteresis.

use crate::attitude::{angle_between_deg, gravity_body};
use crate::cage::Cage;
use crate::profile::WatchSettings;
use nalgebra::{UnitQuaternion, Vector3};
use serde::Serialize;

/// Largest change of the gravity direction (degrees) that still counts as
/// steady. Small against the 39 to 53 degree rolls between faces and above
/// the noise of a hobby-grade attitude estimate at rest (about a degree);
/// common practice, no published source.
pub const STEADY_ANGLE_DEG: f64 = 2.5;

/// How well one face explains a gravity direction.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct FaceFit {
    /// Index of the best face.
    pub face: usize,
    /// Angle between that face's outward normal and gravity, degrees.
    pub error_deg: f64,
    /// The second-best face (none only for a cage with a single face, which
    /// a valid profile cannot have).
    pub runner_up: Option<usize>,
    /// Runner-up error minus best error: how clear the answer is.
    pub margin_deg: f64,
}

/// Best face for a body-frame gravity direction: the face whose outward
/// normal is closest to `gravity_body`.
///
/// Runs for every live sample, so faces are compared by the dot product of
/// their unit normal with gravity (the angle falls as the dot product
/// rises, and |g| is the same for every face); the angle itself is worked
/// out only for the best face and the runner-up.
pub fn fit_face(cage: &Cage, gravity_body: &Vector3<f64>) -> FaceFit {
    let mut best: Option<(usize, f64)> = None;
    let mut second: Option<(usize, f64)> = None;
    for (i, f) in cage.faces.iter().enumerate() {
        let d = f.normal_body.dot(gravity_body);
        // A non-finite gravity gives NaN; treat it as the worst fit.
        let d = if d.is_finite() { d } else { f64::NEG_INFINITY };
        match best {
            Some((_, bd)) if d <= bd => {
                if second.is_none_or(|(_, sd)| d > sd) {
                    second = Some((i, d));
                }
            }
            _ => {
                second = best;
                best = Some((i, d));
            }
        }
    }
    let error = |i: usize| {
        let e = angle_between_deg(&cage.faces[i].normal_body, gravity_body);
        if e.is_finite() { e } else { 180.0 }
    };
    let (face, error_deg) = best.map_or((0, 180.0), |(i, _)| (i, error(i)));
    let second = second.map(|(i, _)| (i, error(i)));
    FaceFit {
        face,
        error_deg,
        runner_up: second.map(|(i, _)| i),
        margin_deg: second.map_or(180.0 - error_deg, |(_, e)| e - error_deg),
    }
}

/// Whether the vehicle lies still on a face.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum RestState {
    /// Steady for the dwell time, within tolerance of a face.
    Resting,
    /// Steady for the dwell time but farther from every face than the
    /// tolerance: propped on an edge, a rock or a branch. Not on a face, so
    /// nothing that needs a face (a plan, a take-off verdict) follows.
    Propped,
    /// Not steady: rolling, tumbling, held in a hand.
    Moving,
}

/// The detector's answer for one sample.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct RestStatus {
    /// Resting or moving.
    pub state: RestState,
    /// The resting face, or the nearest face (with hysteresis) while moving.
    pub face: usize,
    /// Angle between `face`'s normal and gravity, degrees.
    pub error_deg: f64,
    /// The raw best fit of this sample, without hysteresis.
    pub fit: FaceFit,
}

/// Turns a stream of attitudes into resting / moving with a face, with the
/// dwell time and hysteresis of the profile. Pure state, no clock of its
/// own: the caller passes each sample's time.
#[derive(Debug, Clone)]
pub struct RestDetector {
    tolerance_deg: f64,
    dwell_s: f64,
    hysteresis_deg: f64,
    /// Face held by the hysteresis.
    face: Option<usize>,
    /// Gravity direction and time at the start of the current steady spell.
    anchor: Option<(Vector3<f64>, f64)>,
    /// Time of the previous sample (to notice time running backwards).
    last_t_s: Option<f64>,
    resting: bool,
}

impl RestDetector {
    /// A detector with the profile's watch settings.
    pub fn new(settings: &WatchSettings) -> Self {
        RestDetector {
            tolerance_deg: settings.rest_tolerance_deg,
            dwell_s: settings.dwell_s,
            hysteresis_deg: settings.hysteresis_deg,
            face: None,
            anchor: None,
            last_t_s: None,
            resting: false,
        }
    }

    /// Forget everything seen so far (after a link gap, say).
    pub fn reset(&mut self) {
        self.face = None;
        self.anchor = None;
        self.last_t_s = None;
        self.resting = false;
    }

    /// Feed one attitude sample taken at `t_s` seconds.
    pub fn update(&mut self, cage: &Cage, t_s: f64, q: &UnitQuaternion<f64>) -> RestStatus {
        let g = gravity_body(q);
        let fit = fit_face(cage, &g);
        let valid = t_s.is_finite() && g.iter().all(|x| x.is_finite());
        if !valid || self.last_t_s.is_some_and(|last| t_s < last) {
            // Bad data or a clock that ran backwards: start over, say moving.
            self.reset();
            if !valid {
                return RestStatus {
                    state: RestState::Moving,
                    face: fit.face,
                    error_deg: fit.error_deg,
                    fit,
                };
            }
        }
        self.last_t_s = Some(t_s);

        // Face with hysteresis.
        let face = match self.face {
            Some(held) if held < cage.faces.len() => {
                let held_err = angle_between_deg(&cage.faces[held].normal_body, &g);
                if held_err - fit.error_deg > self.hysteresis_deg {
                    fit.face
                } else {
                    held
                }
            }
            _ => fit.face,
        };
        if self.face != Some(face) {
            self.resting = false;
        }
        self.face = Some(face);
        let error_deg = if face == fit.face {
            fit.error_deg
        } else {
            angle_between_deg(&cage.faces[face].normal_body, &g)
        };

        // Steadiness against the anchor.
        let since = match self.anchor {
            Some((a, t0)) if angle_between_deg(&a, &g) <= STEADY_ANGLE_DEG => t0,
            _ => {
                self.anchor = Some((g, t_s));
                self.resting = false;
                t_s
            }
        };
        let steady = t_s - since >= self.dwell_s;
        let limit = if self.resting {
            self.tolerance_deg + self.hysteresis_deg
        } else {
            self.tolerance_deg
        };
        self.resting = steady && error_deg <= limit;
        RestStatus {
            state: if self.resting {
                RestState::Resting
            } else if steady {
                RestState::Propped
            } else {
                RestState::Moving
            },
            face,
            error_deg,
            fit,
        }
    }
}

/// Attitude at which the vehicle rests on `face` with zero yaw: the face's
/// normal points straight down. With R = Ry(pitch) Rx(roll) the body
/// gravity is R^T z = (-sin p, cos p sin r, cos p cos r), so the angles
/// follow in closed form. An index past the last face gives the identity.
pub fn resting_attitude(cage: &Cage, face: usize) -> UnitQuaternion<f64> {
    let Some(f) = cage.faces.get(face) else {
        return UnitQuaternion::identity();
    };
    let n = f.normal_body;
    let pitch = (-n.x).clamp(-1.0, 1.0).asin();
    let roll = n.y.atan2(n.z);
    UnitQuaternion::from_euler_angles(roll, pitch, 0.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::attitude::{quat_from_rpy_deg, rotate_about_world, rpy_deg};
    use crate::profile::Profile;
    use approx::assert_relative_eq;

    fn demo() -> (Profile, Cage) {
        crate::cage::demo_cage()
    }

    #[test]
    fn resting_attitude_points_the_face_down_with_zero_yaw() {
        let (_, c) = demo();
        for i in 0..c.faces.len() {
            let q = resting_attitude(&c, i);
            let g = gravity_body(&q);
            assert!(angle_between_deg(&g, &c.faces[i].normal_body) < 1e-9);
            assert!(rpy_deg(&q)[2].abs() < 1e-9);
            let fit = fit_face(&c, &g);
            assert_eq!(fit.face, i);
            assert!(fit.error_deg < 1e-9);
            assert!(fit.margin_deg > 30.0, "neighbours are 39 deg or more away");
        }
    }

    #[test]
    fn dot_product_fit_agrees_with_the_smallest_angle() {
        // The face of least angle to gravity (docs/design.md's definition) found
        // by comparing angles must be the one found by dot products, with
        // the same errors, over directions all round the sphere.
        let (_, c) = demo();
        for i in 0..40 {
            for j in 0..80 {
                let (th, ph) = (i as f64 * 0.0785 + 0.01, j as f64 * 0.0785);
                let g = Vector3::new(th.sin() * ph.cos(), th.sin() * ph.sin(), th.cos()) * 9.8;
                let mut errs: Vec<(f64, usize)> = c
                    .faces
                    .iter()
                    .enumerate()
                    .map(|(k, f)| (angle_between_deg(&f.normal_body, &g), k))
                    .collect();
                errs.sort_by(|a, b| a.0.total_cmp(&b.0));
                let fit = fit_face(&c, &g);
                assert_eq!(fit.face, errs[0].1);
                assert!((fit.error_deg - errs[0].0).abs() < 1e-9);
                assert!((fit.margin_deg - (errs[1].0 - errs[0].0)).abs() < 1e-9);
            }
        }
    }

    #[test]
    fn fit_ignores_yaw() {
        let (_, c) = demo();
        let q = quat_from_rpy_deg(25.0, -40.0, 0.0);
        let a = fit_face(&c, &gravity_body(&q));
        for yaw in [-170.0, -45.0, 30.0, 120.0] {
            let q2 = quat_from_rpy_deg(25.0, -40.0, yaw);
            let b = fit_face(&c, &gravity_body(&q2));
            assert_eq!(a.face, b.face);
            assert_relative_eq!(a.error_deg, b.error_deg, epsilon = 1e-9);
        }
    }

    #[test]
    fn upright_demo_rests_on_f1() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let q = UnitQuaternion::identity();
        let mut states = Vec::new();
        for k in 0..=10 {
            states.push(d.update(&c, k as f64 * 0.1, &q));
        }
        assert!(states.iter().all(|s| s.face == 0));
        // dwell 0.5 s: moving until 0.5 s, resting from then on.
        for (k, s) in states.iter().enumerate() {
            let want = if k >= 5 {
                RestState::Resting
            } else {
                RestState::Moving
            };
            assert_eq!(s.state, want, "sample {k}");
        }
    }

    #[test]
    fn yaw_spin_while_lying_still_stays_resting() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let base = resting_attitude(&c, 7);
        let mut last = None;
        for k in 0..40 {
            // Spinning about the world vertical changes yaw only.
            let q = rotate_about_world(&base, &Vector3::z(), k as f64 * 0.3);
            last = Some(d.update(&c, k as f64 * 0.05, &q));
        }
        let s = last.unwrap();
        assert_eq!(s.state, RestState::Resting);
        assert_eq!(s.face, 7);
    }

    #[test]
    fn rolling_is_moving_then_rests_on_the_new_face() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let from = resting_attitude(&c, 0);
        let to = resting_attitude(&c, 3);
        let mut t = 0.0;
        for _ in 0..10 {
            d.update(&c, t, &from);
            t += 0.1;
        }
        assert_eq!(d.update(&c, t, &from).state, RestState::Resting);
        // Roll over one second: moving throughout.
        for k in 1..=10 {
            t += 0.1;
            let q = from.slerp(&to, k as f64 / 10.0);
            let s = d.update(&c, t, &q);
            assert_eq!(s.state, RestState::Moving, "step {k}");
        }
        let mut s = d.update(&c, t, &to);
        for _ in 0..6 {
            t += 0.1;
            s = d.update(&c, t, &to);
        }
        assert_eq!((s.state, s.face), (RestState::Resting, 3));
    }

    #[test]
    fn propped_on_an_edge_is_propped_not_resting() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        // Halfway between two neighbouring faces: about 20 deg from each,
        // beyond the 12 deg tolerance.
        let g = (c.faces[0].normal_body + c.faces[1].normal_body).normalize();
        let n = g;
        let q = UnitQuaternion::from_euler_angles(n.y.atan2(n.z), (-n.x).asin(), 0.0);
        let mut s = d.update(&c, 0.0, &q);
        assert_eq!(s.state, RestState::Moving, "not yet steady for the dwell");
        for k in 1..30 {
            s = d.update(&c, k as f64 * 0.1, &q);
        }
        assert_eq!(s.state, RestState::Propped);
        assert!(s.error_deg > p.watch.rest_tolerance_deg);
        assert!(s.face == 0 || s.face == 1, "the nearest face is named");
    }

    #[test]
    fn noise_near_a_tie_does_not_flicker() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let mid = (c.faces[0].normal_body + c.faces[1].normal_body).normalize();
        let across = (c.faces[1].normal_body - c.faces[0].normal_body).normalize();
        let mut faces = Vec::new();
        for k in 0..50 {
            // +-1 deg of noise across the tie, alternating.
            let off: f64 = if k % 2 == 0 { 1.0 } else { -1.0 };
            let g = (mid + across * off.to_radians()).normalize();
            let q = UnitQuaternion::from_euler_angles(g.y.atan2(g.z), (-g.x).asin(), 0.0);
            let s = d.update(&c, k as f64 * 0.02, &q);
            assert!(s.fit.margin_deg < 3.0, "the samples do sit near the tie");
            faces.push(s.face);
        }
        assert!(faces.iter().all(|&f| f == faces[0]), "{faces:?}");
        // Without hysteresis the raw fit does flip.
        let mut p0 = p.watch.clone();
        p0.hysteresis_deg = 0.0;
        let mut d0 = RestDetector::new(&p0);
        let mut raw = Vec::new();
        for k in 0..4 {
            let off: f64 = if k % 2 == 0 { 1.0 } else { -1.0 };
            let g = (mid + across * off.to_radians()).normalize();
            let q = UnitQuaternion::from_euler_angles(g.y.atan2(g.z), (-g.x).asin(), 0.0);
            raw.push(d0.update(&c, k as f64 * 0.02, &q).face);
        }
        assert_ne!(raw[0], raw[1]);
    }

    #[test]
    fn slow_creep_never_counts_as_steady() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let base = resting_attitude(&c, 0);
        // 1 deg per 0.1 s: each step is small, the drift is not.
        for k in 0..40 {
            let q = rotate_about_world(&base, &Vector3::x(), (k as f64 * 1.0).to_radians());
            let s = d.update(&c, k as f64 * 0.1, &q);
            if k >= 3 {
                assert_eq!(s.state, RestState::Moving, "sample {k}");
            }
        }
    }

    #[test]
    fn reset_and_backwards_time_restart_the_dwell() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let q = UnitQuaternion::identity();
        for k in 0..10 {
            d.update(&c, k as f64 * 0.1, &q);
        }
        assert_eq!(d.update(&c, 1.0, &q).state, RestState::Resting);
        assert_eq!(d.update(&c, 0.2, &q).state, RestState::Moving);
        d.reset();
        assert_eq!(d.update(&c, 5.0, &q).state, RestState::Moving);
        assert_eq!(d.update(&c, 5.6, &q).state, RestState::Resting);
    }

    #[test]
    fn nan_attitude_is_moving_and_does_not_panic() {
        let (p, c) = demo();
        let mut d = RestDetector::new(&p.watch);
        let q = UnitQuaternion::new_unchecked(nalgebra::Quaternion::new(f64::NAN, 0.0, 0.0, 0.0));
        let s = d.update(&c, 0.0, &q);
        assert_eq!(s.state, RestState::Moving);
        let s = d.update(&c, f64::NAN, &UnitQuaternion::identity());
        assert_eq!(s.state, RestState::Moving);
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(64))]

            /// Held still at any attitude (yaw spinning freely), the detector
            /// rests after the dwell exactly when the nearest face is within
            /// the tolerance, says propped otherwise, and always names the
            /// nearest face.
            #[test]
            fn still_attitude_rests_iff_within_tolerance(
                r in -180.0..180.0f64, p in -89.0..89.0f64,
                yaws in proptest::collection::vec(-180.0..180.0f64, 12..20),
            ) {
                let (prof, c) = demo();
                let mut d = RestDetector::new(&prof.watch);
                let mut last = None;
                for (k, y) in yaws.iter().enumerate() {
                    let q = quat_from_rpy_deg(r, p, *y);
                    last = Some(d.update(&c, k as f64 * 0.1, &q));
                }
                let s = last.unwrap();
                let fit = fit_face(&c, &gravity_body(&quat_from_rpy_deg(r, p, 0.0)));
                prop_assert_eq!(s.face, fit.face);
                let want = if fit.error_deg <= prof.watch.rest_tolerance_deg {
                    RestState::Resting
                } else {
                    RestState::Propped
                };
                prop_assert_eq!(s.state, want);
            }
        }
    }
}
