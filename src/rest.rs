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
        let d = face_dot(&f.normal_body, gravity_body);
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
    let (face, error_deg) = best.map_or((0, 180.0), |(i, _)| {
        (i, fit_error_deg(cage, i, gravity_body))
    });
    let second = second.map(|(i, _)| (i, fit_error_deg(cage, i, gravity_body)));
    FaceFit {
        face,
        error_deg,
        runner_up: second.map(|(i, _)| i),
        margin_deg: second.map_or(180.0 - error_deg, |(_, e)| e - error_deg),
    }
}

/// The dot product [`fit_face`] ranks faces by: a non-finite gravity gives
/// NaN, taken as the worst fit.
fn face_dot(normal: &Vector3<f64>, gravity_body: &Vector3<f64>) -> f64 {
    let d = normal.dot(gravity_body);
    if d.is_finite() { d } else { f64::NEG_INFINITY }
}

/// The best face alone, as [`fit_face`] picks it (the first of equal dot
/// products), without any angle: what every sample needs.
fn best_face(cage: &Cage, gravity_body: &Vector3<f64>, hint: Option<usize>) -> usize {
    let packed = cage.face_normals_body();
    if packed.len() != cage.faces.len() {
        return best_of(cage.faces.iter().map(|f| &f.normal_body), gravity_body);
    }
    // The previous sample's best face keeps the answer while gravity stays
    // well inside its share of directions (Cage::face_capture_tan2): then
    // its dot product is the largest by far more than rounding, which is
    // what the search below would find.
    if let Some(b) = hint
        && let (Some(n), Some(&c)) = (packed.get(b), cage.face_capture_tan2().get(b))
    {
        let d = n.dot(gravity_body);
        let gg = gravity_body.norm_squared();
        if d.is_finite() && gg.is_finite() && gg >= 1e-200 && d > 0.0 && gg - d * d < c * d * d {
            return b;
        }
    }
    best_of(packed.iter(), gravity_body)
}

fn best_of<'a>(
    normals: impl Iterator<Item = &'a Vector3<f64>>,
    gravity_body: &Vector3<f64>,
) -> usize {
    // Written without branches on the data (selects, not jumps): the
    // comparisons follow the vehicle's attitude and predict badly.
    let (mut best, mut best_dot) = (0, f64::NEG_INFINITY);
    for (i, n) in normals.enumerate() {
        let d = face_dot(n, gravity_body);
        let take = i == 0 || d > best_dot;
        best = if take { i } else { best };
        best_dot = if take { d } else { best_dot };
    }
    best
}

/// A face's error as [`fit_face`] reports it (a non-finite angle as 180).
fn fit_error_deg(cage: &Cage, face: usize, gravity_body: &Vector3<f64>) -> f64 {
    let e = angle_between_deg(&cage.faces[face].normal_body, gravity_body);
    if e.is_finite() { e } else { 180.0 }
}

/// "The angle between two vectors is at most `deg`", decided for every
/// sample without an arc tangent where the answer is clear, and always
/// the same answer as `angle_between_deg(a, b) <= deg`.
///
/// `angle_between_deg` is atan2(|a x b|, a . b) in degrees. For a limit
/// between 1e-6 and 89 degrees and a dot product of at least 1e-100 (so
/// the products and their squares below are normal numbers, rounded to the
/// last place) the angle is below the limit exactly when |a x b|^2 is below
/// ((a . b) tan(limit))^2; away from the boundary by a relative 1e-9 (some
/// million times the rounding of atan2, tan, the squares and the degree
/// conversion, which are within a few units in the last place) the
/// comparison of the two squares decides; within it, and for anything not
/// finite, the angle itself is worked out as before.
#[derive(Debug, Clone, Copy)]
struct AngleLimit {
    deg: f64,
    /// tan(limit) shrunk and grown by the margin; None: always the angle.
    tan_below_above: Option<(f64, f64)>,
}

impl AngleLimit {
    const MARGIN: f64 = 1e-9;

    fn new(deg: f64) -> AngleLimit {
        let tan_below_above = (1e-6..=89.0).contains(&deg).then(|| {
            let t = deg.to_radians().tan();
            (t * (1.0 - Self::MARGIN), t * (1.0 + Self::MARGIN))
        });
        AngleLimit {
            deg,
            tan_below_above,
        }
    }

    /// `angle_between_deg(a, b) <= self.deg`.
    fn holds(&self, a: &Vector3<f64>, b: &Vector3<f64>) -> bool {
        self.decide(a, b, |e| e)
    }

    /// The same for a face's error as [`fit_face`] reports it, where a
    /// non-finite angle counts as 180 degrees.
    fn holds_for_fit(&self, a: &Vector3<f64>, b: &Vector3<f64>) -> bool {
        self.decide(a, b, |e| if e.is_finite() { e } else { 180.0 })
    }

    fn decide(&self, a: &Vector3<f64>, b: &Vector3<f64>, read: impl Fn(f64) -> f64) -> bool {
        let cross = a.cross(b);
        let cross2 = cross.norm_squared();
        let dot = a.dot(b);
        if let Some((below, above)) = self.tan_below_above
            && cross2.is_finite()
            && dot.is_finite()
            && dot >= 1e-100
        {
            // Squares against squares, so no square root waits in the way:
            // each side is rounded a few times more, still a million times
            // inside the margin, and with the dot product at least 1e-100
            // the squares stay normal numbers. Finite here, so the angle is
            // finite too: `read` keeps it.
            let (lo, hi) = (dot * below, dot * above);
            if cross2 < lo * lo {
                return true;
            }
            if cross2 > hi * hi {
                return false;
            }
        }
        // The same expression as `angle_between_deg`.
        read(cross.norm().atan2(dot).to_degrees()) <= self.deg
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

impl RestState {
    /// The state from whether the vehicle is within tolerance of a face and
    /// whether it has been steady for the dwell time.
    fn of(resting: bool, steady: bool) -> RestState {
        if resting {
            RestState::Resting
        } else if steady {
            RestState::Propped
        } else {
            RestState::Moving
        }
    }
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

/// The detector's answer for one sample without its angles: what the
/// tracker keeps for every sample. The angles (the error, the fit's best
/// and runner-up) are worked out by [`RestMark::status`] only when a
/// state is shown, from the same gravity direction, so they are exactly
/// what [`RestDetector::update`] reports.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RestMark {
    /// Resting, propped or moving.
    pub state: RestState,
    /// The resting face, or the nearest face (with hysteresis).
    pub face: usize,
    /// Body-frame gravity direction of the sample.
    gravity_body: Vector3<f64>,
}

impl RestMark {
    /// The full answer, angles included (as [`RestDetector::update`]
    /// returns it).
    pub fn status(&self, cage: &Cage) -> RestStatus {
        let fit = fit_face(cage, &self.gravity_body);
        let error_deg = if self.face == fit.face {
            fit.error_deg
        } else {
            angle_between_deg(&cage.faces[self.face].normal_body, &self.gravity_body)
        };
        RestStatus {
            state: self.state,
            face: self.face,
            error_deg,
            fit,
        }
    }
}

/// Turns a stream of attitudes into resting / moving with a face, with the
/// dwell time and hysteresis of the profile. Pure state, no clock of its
/// own: the caller passes each sample's time.
#[derive(Debug, Clone)]
pub struct RestDetector {
    tolerance: AngleLimit,
    /// The tolerance widened by the hysteresis (while resting).
    tolerance_held: AngleLimit,
    steady: AngleLimit,
    dwell_s: f64,
    hysteresis_deg: f64,
    /// Face held by the hysteresis.
    face: Option<usize>,
    /// Gravity direction and time at the start of the current steady spell.
    anchor: Option<(Vector3<f64>, f64)>,
    /// Time of the previous sample (to notice time running backwards).
    last_t_s: Option<f64>,
    resting: bool,
    /// The previous sample's best face: where the next search starts (a
    /// hint only; the answer never depends on it).
    last_best: Option<usize>,
}

impl RestDetector {
    /// A detector with the profile's watch settings.
    pub fn new(settings: &WatchSettings) -> Self {
        RestDetector {
            tolerance: AngleLimit::new(settings.rest_tolerance_deg),
            tolerance_held: AngleLimit::new(settings.rest_tolerance_deg + settings.hysteresis_deg),
            steady: AngleLimit::new(STEADY_ANGLE_DEG),
            dwell_s: settings.dwell_s,
            hysteresis_deg: settings.hysteresis_deg,
            face: None,
            anchor: None,
            last_t_s: None,
            resting: false,
            last_best: None,
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
        self.advance(cage, t_s, q).status(cage)
    }

    /// Feed one attitude sample taken at `t_s` seconds; the angles are left
    /// for [`RestMark::status`]. Runs for every live sample, so faces are
    /// compared by dot products and the limits by `AngleLimit`: no arc
    /// tangent unless the face held by the hysteresis is not the best one
    /// or a comparison is too close to call without it.
    pub fn advance(&mut self, cage: &Cage, t_s: f64, q: &UnitQuaternion<f64>) -> RestMark {
        let g = gravity_body(q);
        let best = best_face(cage, &g, self.last_best);
        self.last_best = Some(best);
        let valid = t_s.is_finite() && g.iter().all(|x| x.is_finite());
        if !valid || self.last_t_s.is_some_and(|last| t_s < last) {
            // Bad data or a clock that ran backwards: start over, say moving.
            self.reset();
            if !valid {
                return RestMark {
                    state: RestState::Moving,
                    face: best,
                    gravity_body: g,
                };
            }
        }
        self.last_t_s = Some(t_s);

        // Face with hysteresis: the held face stays unless another is
        // closer by more than the hysteresis (the held face being the best
        // one, it stays).
        let face = match self.face {
            Some(held) if held < cage.faces.len() && held != best => {
                let held_err = angle_between_deg(&cage.faces[held].normal_body, &g);
                if held_err - fit_error_deg(cage, best, &g) > self.hysteresis_deg {
                    best
                } else {
                    held
                }
            }
            Some(held) if held < cage.faces.len() => held,
            _ => best,
        };
        if self.face != Some(face) {
            self.resting = false;
        }
        self.face = Some(face);

        // Steadiness against the anchor.
        let since = match self.anchor {
            Some((a, t0)) if self.steady.holds(&a, &g) => t0,
            _ => {
                self.anchor = Some((g, t_s));
                self.resting = false;
                t_s
            }
        };
        let steady = t_s - since >= self.dwell_s;
        let limit = if self.resting {
            &self.tolerance_held
        } else {
            &self.tolerance
        };
        self.resting = steady && self.within(cage, face, best, &g, limit);
        RestMark {
            state: RestState::of(self.resting, steady),
            face,
            gravity_body: g,
        }
    }

    /// Whether `face`'s error (as [`RestMark::status`] reports it) is
    /// within `limit`.
    fn within(
        &self,
        cage: &Cage,
        face: usize,
        best: usize,
        g: &Vector3<f64>,
        limit: &AngleLimit,
    ) -> bool {
        match cage.faces.get(face) {
            Some(f) if face == best => limit.holds_for_fit(&f.normal_body, g),
            Some(f) => limit.holds(&f.normal_body, g),
            // No faces at all: the fit's error is 180 degrees.
            None => 180.0 <= limit.deg,
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

    /// The detector as it was written before the per-sample work was cut
    /// down: every comparison by the angles themselves (the definitions of
    /// docs/design.md), the full fit for every sample. The faster detector
    /// must give exactly its answers.
    struct ByAngles {
        tolerance_deg: f64,
        dwell_s: f64,
        hysteresis_deg: f64,
        face: Option<usize>,
        anchor: Option<(Vector3<f64>, f64)>,
        last_t_s: Option<f64>,
        resting: bool,
    }

    impl ByAngles {
        fn new(w: &WatchSettings) -> ByAngles {
            ByAngles {
                tolerance_deg: w.rest_tolerance_deg,
                dwell_s: w.dwell_s,
                hysteresis_deg: w.hysteresis_deg,
                face: None,
                anchor: None,
                last_t_s: None,
                resting: false,
            }
        }

        fn update(&mut self, cage: &Cage, t_s: f64, q: &UnitQuaternion<f64>) -> RestStatus {
            let g = gravity_body(q);
            let fit = fit_face(cage, &g);
            let valid = t_s.is_finite() && g.iter().all(|x| x.is_finite());
            if !valid || self.last_t_s.is_some_and(|last| t_s < last) {
                (self.face, self.anchor, self.last_t_s, self.resting) = (None, None, None, false);
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
                state: RestState::of(self.resting, steady),
                face,
                error_deg,
                fit,
            }
        }
    }

    fn geodesic_cage(k: u32) -> Cage {
        let p = Profile::parse(&crate::geodesic::profile_toml(k), "geodesic").unwrap();
        Cage::from_profile(&p).unwrap()
    }

    #[test]
    fn the_capture_shortcut_finds_the_nearest_face() {
        // Directions near every face's normal, near the bisectors between
        // faces and all round the sphere, with every face as the hint: the
        // shortcut's face is the one of least angle (docs/design.md),
        // found here by comparing every angle.
        for cage in [demo().1, geodesic_cage(1), geodesic_cage(2)] {
            assert!(
                !cage.face_capture_tan2().is_empty(),
                "bounds exist up to 512 faces"
            );
            let mut dirs: Vec<Vector3<f64>> = Vec::new();
            for f in &cage.faces {
                for e in [0.0, 1e-3, 0.05, 0.2, 0.4] {
                    dirs.push(f.normal_body + Vector3::new(e, -0.7 * e, 0.3 * e));
                }
            }
            for a in cage.faces.iter().take(12) {
                for b in cage.faces.iter().take(12) {
                    dirs.push((a.normal_body + b.normal_body) * 4.9);
                }
            }
            for i in 0..30 {
                for j in 0..60 {
                    let (th, ph) = (i as f64 * 0.105 + 0.01, j as f64 * 0.105);
                    dirs.push(Vector3::new(
                        th.sin() * ph.cos(),
                        th.sin() * ph.sin(),
                        th.cos(),
                    ));
                }
            }
            for (k, g) in dirs.iter().enumerate() {
                // fit_face is checked against the angles themselves above
                // (dot_product_fit_agrees_with_the_smallest_angle); here the
                // directions near a normal are checked against them too.
                let want = fit_face(&cage, g).face;
                if k < 5 * cage.faces.len() {
                    let by_angle = (0..cage.faces.len())
                        .map(|f| (angle_between_deg(&cage.faces[f].normal_body, g), f))
                        .min_by(|x, y| x.0.total_cmp(&y.0))
                        .map(|(_, f)| f);
                    assert_eq!(Some(want), by_angle);
                }
                for hint in 0..cage.faces.len() {
                    assert_eq!(
                        best_face(&cage, g, Some(hint)),
                        want,
                        "hint {hint}, g {g:?}"
                    );
                }
                assert_eq!(best_face(&cage, g, None), want);
            }
        }
    }

    #[test]
    fn many_faces_have_no_capture_bounds_and_still_fit() {
        let cage = geodesic_cage(3);
        assert!(cage.faces.len() > crate::cage::CAPTURE_MAX_FACES);
        assert!(cage.face_capture_tan2().is_empty());
        let g = Vector3::new(0.3, -0.2, 0.9);
        assert_eq!(best_face(&cage, &g, Some(0)), fit_face(&cage, &g).face);
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(64))]

            /// The angle limit decides as the angle itself does, for
            /// directions drawn anywhere and right at the limit (within a
            /// few 1e-12 of it, where only the angle can tell).
            #[test]
            fn angle_limit_agrees_with_the_angle(
                limit in prop_oneof![Just(STEADY_ANGLE_DEG), Just(12.0), Just(15.0), Just(0.0),
                    Just(89.0), Just(120.0), 0.0..90.0f64],
                axis in proptest::array::uniform3(-1.0..1.0f64),
                off in prop_oneof![Just(0.0), -1e-11..1e-11f64, -1.0..1.0f64, -90.0..90.0f64],
                scale in prop_oneof![Just(1.0), Just(9.81), 1e-3..1e3f64],
            ) {
                let a = Vector3::new(axis[0], axis[1], axis[2] + 1.5);
                prop_assume!(a.norm() > 1e-6);
                let a = a.normalize();
                // b at (limit + off) degrees from a, about some perpendicular.
                let perp = a.cross(&Vector3::new(0.3, 1.0, -0.2)).normalize();
                let rot = UnitQuaternion::from_axis_angle(
                    &nalgebra::Unit::new_normalize(perp),
                    (limit + off).to_radians(),
                );
                let b = rot * a * scale;
                let l = AngleLimit::new(limit);
                prop_assert_eq!(l.holds(&a, &b), angle_between_deg(&a, &b) <= limit);
                let e = angle_between_deg(&a, &b);
                let fit_e = if e.is_finite() { e } else { 180.0 };
                prop_assert_eq!(l.holds_for_fit(&a, &b), fit_e <= limit);
            }

            /// Any walk of attitudes (rolls, rests, jumps, a clock that
            /// sometimes runs back) gives, sample for sample, the answers
            /// of the detector that compares angles throughout.
            #[test]
            fn the_detector_answers_as_the_angles_do(
                steps in proptest::collection::vec(
                    (0usize..20, -8.0..8.0f64, -8.0..8.0f64, 0.0..0.3f64, 0u8..10), 20..120),
                hysteresis in prop_oneof![Just(0.0), Just(3.0), 0.0..10.0f64],
            ) {
                let (mut prof, c) = demo();
                prof.watch.hysteresis_deg = hysteresis;
                let mut fast = RestDetector::new(&prof.watch);
                let mut slow = ByAngles::new(&prof.watch);
                let mut t = 0.0;
                for (face, dr, dp, dt, kind) in steps {
                    t += if kind == 0 { -0.4 } else { dt };
                    let base = resting_attitude(&c, face);
                    let q = base * quat_from_rpy_deg(dr, dp, 0.0);
                    let want = slow.update(&c, t, &q);
                    let got = fast.update(&c, t, &q);
                    prop_assert_eq!(got, want);
                    // Held still a while: the dwell passes.
                    if kind == 1 {
                        for _ in 0..8 {
                            t += 0.1;
                            prop_assert_eq!(fast.update(&c, t, &q), slow.update(&c, t, &q));
                        }
                    }
                }
            }

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
