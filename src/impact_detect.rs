//! Impact detection from live acceleration: a peak above the profile's
//! `impact.detect_threshold_g` becomes a *proposed* impact, which the
//! operator confirms or edits before anything is written to the log.
//!
//! What the accelerometer gives is the specific force f (body frame): all
//! non-gravitational force on the vehicle over its mass. In a collision with
//! the rotors idle that is the contact force over the mass, so the peak in
//! g is |f| / g0, the very figure `impact --peak-accel-g` takes (F = m a).
//!
//! The struck face: the ground pushes the cage *inwards* through the face
//! it hits, so the contact force, and with it f, points along that face's
//! inward normal. The face struck is therefore the one whose outward normal
//! is most opposite to f at the peak: the smallest n_out . f/|f|. This is
//! the same rule as the resting face (at rest f = -g0 g_b, so the face
//! whose normal is closest to gravity), which the tests use as a check.
//! Limits: rotor thrust and the IMU's offset from the centre of mass (it
//! feels rotation too) bias the direction; the operator confirms the face.
//!
//! Speed just before: from the last sample with a velocity before the
//! peak's event began. Its component along the struck face's outward
//! normal (with the attitude of that sample) is the approach speed the
//! impact estimate wants; without an attitude only the magnitude is known,
//! which is larger or equal, so an estimate from it errs on the safe side.
//!
//! One proposal per event: samples above the threshold closer together than
//! the refractory period (bounces, ringing) are one event, and its proposal
//! comes once the signal has stayed below the threshold that long.
//!
//! The clock is the samples' own (`t_s`, the sender's), so a recording
//! replays exactly as it was detected live. That clock restarts when the
//! vehicle reboots; a sample earlier than the open event's last one
//! therefore ends the event at once (its proposal comes with that sample),
//! rather than leaving it open until the new clock catches up. Samples out
//! of order by a little split an event in two at worst: one extra proposal
//! for the operator to dismiss, never a lost one.

use crate::cage::Cage;
use crate::sample::{STANDARD_GRAVITY_M_S2, Sample};
use nalgebra::{UnitQuaternion, Vector3};
use serde::Serialize;

/// Time below the threshold that ends an event, when none is given.
pub const DEFAULT_REFRACTORY_S: f64 = 0.5;

/// A detected impact, for the operator to confirm or edit.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ProposedImpact {
    /// Time of the peak (the samples' clock).
    pub t_s: f64,
    /// Peak specific force, in standard gravities.
    pub peak_g: f64,
    /// Unit direction of the specific force at the peak, body frame: the
    /// direction the ground pushed the vehicle.
    pub direction_body: [f64; 3],
    /// Index of the face most likely struck.
    pub face: usize,
    /// Its id.
    pub face_id: String,
    /// cos of the angle between the push and that face's inward normal
    /// (1: straight through the face; low values: a glancing or node hit).
    pub face_alignment: f64,
    /// Speed magnitude just before the event, when velocity was known.
    pub speed_m_per_s: Option<f64>,
    /// Approach speed along the face's outward normal, when velocity and
    /// attitude were known (positive: moving into the ground).
    pub normal_speed_m_per_s: Option<f64>,
    /// Samples above the threshold in the event.
    pub samples_above: u32,
}

impl ProposedImpact {
    /// The analysis inputs once the operator confirms the proposal as it
    /// is: the face, and the measured peak (F = m a). Edits replace these.
    pub fn analysis_inputs(&self) -> (crate::impact::Strike, crate::impact::ImpactInput) {
        (
            crate::impact::Strike::Face(self.face),
            crate::impact::ImpactInput::PeakAccel { g: self.peak_g },
        )
    }

    /// The speed to propose for the impact estimate: the normal component
    /// when known, else the magnitude (which errs on the safe side).
    pub fn approach_speed_m_per_s(&self) -> Option<f64> {
        self.normal_speed_m_per_s
            .map(|v| v.max(0.0))
            .or(self.speed_m_per_s)
    }
}

#[derive(Debug, Clone)]
struct Active {
    peak_t_s: f64,
    peak: Vector3<f64>,
    last_above_t_s: f64,
    samples_above: u32,
    before: Option<(Vector3<f64>, Option<UnitQuaternion<f64>>)>,
}

/// Turns a stream of samples into impact proposals.
#[derive(Debug, Clone)]
pub struct ImpactDetector {
    face_ids: Vec<String>,
    normals_body: Vec<Vector3<f64>>,
    threshold_g: f64,
    /// Squared specific force (m/s^2)^2 below which a sample is surely
    /// under the threshold: (threshold x g)^2 less a part in 10^9, minus
    /// infinity for a threshold of zero or below (or not a number), so it
    /// is never NaN (the finite samples' squared norms are not either).
    below_sq: f64,
    refractory_s: f64,
    last_velocity: Option<(Vector3<f64>, Option<UnitQuaternion<f64>>)>,
    active: Option<Active>,
}

impl ImpactDetector {
    /// A detector for a cage: threshold in g (the profile's
    /// `impact.detect_threshold_g`) and refractory period in seconds.
    pub fn new(cage: &Cage, threshold_g: f64, refractory_s: f64) -> ImpactDetector {
        ImpactDetector {
            face_ids: cage.faces.iter().map(|f| f.id.clone()).collect(),
            normals_body: cage.faces.iter().map(|f| f.normal_body).collect(),
            threshold_g,
            below_sq: if threshold_g > 0.0 {
                (threshold_g * STANDARD_GRAVITY_M_S2).powi(2) * (1.0 - 1e-9)
            } else {
                f64::NEG_INFINITY
            },
            refractory_s: refractory_s.max(0.0),
            last_velocity: None,
            active: None,
        }
    }

    /// Feed one sample; returns a proposal when an event has ended.
    pub fn push(&mut self, s: &Sample) -> Option<ProposedImpact> {
        if !s.t_s.is_finite() {
            return None;
        }
        let mut done = None;
        if let Some(a) = &self.active
            && (s.t_s < a.last_above_t_s || s.t_s - a.last_above_t_s >= self.refractory_s)
        {
            done = self.finish();
        }
        let accel = s
            .accel_body_m_s2
            .filter(|a| a.iter().all(|x| x.is_finite()));
        // Most samples are far below the threshold, and their squared norm
        // says so without a square root; one within a part in 10^9 of it
        // (far more than round-off) is decided by the norm as always.
        if let Some(f) = accel.filter(|f| f.norm_squared() >= self.below_sq) {
            let g = f.norm() / STANDARD_GRAVITY_M_S2;
            if g >= self.threshold_g {
                match &mut self.active {
                    Some(a) => {
                        a.last_above_t_s = s.t_s;
                        a.samples_above += 1;
                        if g > a.peak.norm() / STANDARD_GRAVITY_M_S2 {
                            a.peak = f;
                            a.peak_t_s = s.t_s;
                        }
                    }
                    None => {
                        self.active = Some(Active {
                            peak_t_s: s.t_s,
                            peak: f,
                            last_above_t_s: s.t_s,
                            samples_above: 1,
                            before: self.last_velocity,
                        })
                    }
                }
            }
        }
        // Velocity after the event began is already disturbed by it.
        if self.active.is_none()
            && let Some(v) = s
                .velocity_ned_m_s
                .filter(|v| v.iter().all(|x| x.is_finite()))
        {
            self.last_velocity = Some((v, s.attitude));
        }
        done
    }

    /// End the current event, if any (e.g. at the end of a recording).
    pub fn finish(&mut self) -> Option<ProposedImpact> {
        let a = self.active.take()?;
        let peak_norm = a.peak.norm();
        if peak_norm <= 0.0 || self.normals_body.is_empty() {
            return None;
        }
        let dir = a.peak / peak_norm;
        // The face whose outward normal is most opposite to the push.
        let (face, dot) = self
            .normals_body
            .iter()
            .enumerate()
            .map(|(i, n)| (i, n.dot(&dir)))
            .min_by(|x, y| x.1.total_cmp(&y.1).then(x.0.cmp(&y.0)))?;
        let n = self.normals_body[face];
        let (speed, normal_speed) = match a.before {
            Some((v, att)) => (
                Some(v.norm()),
                att.map(|q| (q.inverse_transform_vector(&v)).dot(&n)),
            ),
            None => (None, None),
        };
        Some(ProposedImpact {
            t_s: a.peak_t_s,
            peak_g: peak_norm / STANDARD_GRAVITY_M_S2,
            direction_body: [dir.x, dir.y, dir.z],
            face,
            face_id: self.face_ids[face].clone(),
            face_alignment: -dot,
            speed_m_per_s: speed,
            normal_speed_m_per_s: normal_speed,
            samples_above: a.samples_above,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cage() -> (Cage, f64) {
        let (p, c) = crate::cage::demo_cage();
        (c, p.impact.detect_threshold_g)
    }

    fn sample(t: f64, accel: Vector3<f64>) -> Sample {
        Sample {
            t_s: t,
            accel_body_m_s2: Some(accel),
            ..Sample::default()
        }
    }

    const G: f64 = STANDARD_GRAVITY_M_S2;

    #[test]
    fn samples_near_the_threshold_are_decided_by_the_norm() {
        // The rule is the profile's: a sample counts when |f| / g0 reaches
        // detect_threshold_g (g0 standard gravity, ISO 80000-3). The squared
        // pre-check must not change that for forces a few ulps to a part in
        // 10^8 either side of it, nor for thresholds of zero or below.
        let (c, threshold) = cage();
        for thr in [threshold, 0.0, -1.0, 3.7] {
            let at = thr.abs().max(1.0) * G;
            let dir = Vector3::new(0.36, -0.48, 0.8);
            for k in -40i32..=40 {
                let rel = f64::from(k.signum()) * 10f64.powf(-8.0 - f64::from(k.abs()) / 5.0);
                let f = dir * at * (1.0 + if k == 0 { 0.0 } else { rel });
                let mut d = ImpactDetector::new(&c, thr, 1.0);
                d.push(&sample(0.0, f));
                let counted = d.finish().is_some();
                assert_eq!(counted, f.norm() / G >= thr, "threshold {thr}, k {k}");
            }
        }
    }

    #[test]
    fn at_rest_the_rule_names_the_resting_face() {
        // Upright, gravity in body is +z; the resting face is the one whose
        // normal is closest to +z, which is F1 by the id rule (most level).
        // A quiet accelerometer reads f = -g0 z; with a 1 g threshold the
        // detector must name F1.
        let (c, _) = cage();
        let mut d = ImpactDetector::new(&c, 0.9, 0.1);
        assert!(d.push(&sample(0.0, Vector3::new(0.0, 0.0, -G))).is_none());
        let p = d.finish().unwrap();
        let resting = c
            .faces
            .iter()
            .enumerate()
            .max_by(|a, b| a.1.normal_body.z.total_cmp(&b.1.normal_body.z))
            .unwrap()
            .0;
        assert_eq!(p.face, resting);
        assert_eq!(p.face_id, "F1");
        approx::assert_relative_eq!(p.peak_g, 1.0, epsilon = 1e-12);
    }

    #[test]
    fn a_push_through_each_face_names_that_face() {
        let (c, thr) = cage();
        for (i, f) in c.faces.iter().enumerate() {
            let mut d = ImpactDetector::new(&c, thr, 0.2);
            d.push(&sample(0.0, Vector3::new(0.0, 0.0, -G)));
            let p0 = d.push(&sample(1.0, -f.normal_body * 12.0 * G));
            assert!(p0.is_none());
            let p = d.push(&sample(1.5, Vector3::new(0.0, 0.0, -G))).unwrap();
            assert_eq!(p.face, i);
            approx::assert_relative_eq!(p.face_alignment, 1.0, epsilon = 1e-9);
            approx::assert_relative_eq!(p.peak_g, 12.0, epsilon = 1e-9);
        }
    }

    #[test]
    fn one_proposal_per_event_with_the_largest_peak() {
        let (c, thr) = cage();
        let n = c.faces[3].normal_body;
        let mut d = ImpactDetector::new(&c, thr, 0.3);
        let mut got = Vec::new();
        // A ringing impact: peaks at 0.00, 0.01 (largest), bounce at 0.2,
        // all one event; a second impact 2 s later.
        let trace = [
            (0.00, 8.0),
            (0.01, 15.0),
            (0.02, 2.0),
            (0.20, 6.0),
            (0.30, 1.0),
            (0.60, 1.0),
            (2.00, 9.0),
            (2.01, 1.0),
            (2.50, 1.0),
        ];
        for (t, g) in trace {
            got.extend(d.push(&sample(t, -n * g * G)));
        }
        got.extend(d.finish());
        assert_eq!(got.len(), 2);
        approx::assert_relative_eq!(got[0].peak_g, 15.0, epsilon = 1e-9);
        assert_eq!(got[0].t_s, 0.01);
        assert_eq!(got[0].samples_above, 3);
        approx::assert_relative_eq!(got[1].peak_g, 9.0, epsilon = 1e-9);
        assert!(got.iter().all(|p| p.face == 3));
    }

    #[test]
    fn speed_from_the_last_velocity_before_the_event() {
        let (c, thr) = cage();
        let f1 = c.faces[0].normal_body; // about body +z (down) when upright
        let mut d = ImpactDetector::new(&c, thr, 0.2);
        let level = UnitQuaternion::identity();
        let mut s = sample(0.0, Vector3::new(0.0, 0.0, 0.0));
        s.velocity_ned_m_s = Some(Vector3::new(3.0, 0.0, 4.0)); // 5 m/s, 4 down
        s.attitude = Some(level);
        d.push(&s);
        let mut hit = sample(0.1, -f1 * 10.0 * G);
        hit.velocity_ned_m_s = Some(Vector3::new(0.0, 0.0, -1.0)); // rebound, ignored
        d.push(&hit);
        let p = d.finish().unwrap();
        assert_eq!(p.speed_m_per_s, Some(5.0));
        let vn = p.normal_speed_m_per_s.unwrap();
        approx::assert_relative_eq!(vn, Vector3::new(3.0, 0.0, 4.0).dot(&f1), epsilon = 1e-12);
        assert_eq!(p.approach_speed_m_per_s(), Some(vn.max(0.0)));
    }

    #[test]
    fn a_confirmed_proposal_becomes_a_stored_impact_health_can_use() {
        use crate::logbook::{Event, ImpactEvent, ImpactSource, Record, StrikeRef};
        let (p, c) = crate::cage::demo_cage();
        let mut d = ImpactDetector::new(&c, p.impact.detect_threshold_g, 0.2);
        d.push(&sample(0.0, -c.faces[4].normal_body * 30.0 * G));
        let proposal = d.finish().unwrap();
        let (strike, input) = proposal.analysis_inputs();
        let a = crate::impact::analyse_impact(&c, &p, strike, &input).unwrap();
        // F = m a with the measured peak (Goldsmith, Impact, 1960: the
        // contact force is the mass times the deceleration).
        approx::assert_relative_eq!(a.force_n, p.vehicle.mass_kg * 30.0 * G, max_relative = 1e-9);
        let ev = ImpactEvent::from_analysis(
            &c,
            StrikeRef::Face(proposal.face_id.clone()),
            &input,
            &a,
            ImpactSource::Detected,
            None,
        );
        assert_eq!(ev.members.len(), c.members.len());
        assert_eq!(ev.method, crate::impact::ImpactMethod::MeasuredAcceleration);
        let rec = Record {
            seq: 1,
            time: "2026-12-01T23:00:00.000Z".into(),
            operator: "ana".into(),
            event: Event::Impact(ev),
        };
        let line = crate::logbook::encode_record(&rec).unwrap();
        assert!(line.contains("\"source\":\"detected\""));
        let h = crate::health::assess(&[rec], &c, &p.inspection);
        let worst = a
            .members
            .iter()
            .map(|m| m.utilisation.abs())
            .fold(0.0, f64::max);
        let reported = h
            .members
            .iter()
            .map(|m| m.max_utilisation)
            .fold(0.0, f64::max);
        assert_eq!(reported, worst);
    }

    #[test]
    fn a_clock_that_goes_backwards_closes_the_open_event() {
        // Pins: the vehicle reboots mid-event, its clock restarts near zero;
        // the open event is proposed with the first sample of the new clock
        // instead of staying open until the new clock passes the old one.
        let (c, thr) = cage();
        let n = c.faces[2].normal_body;
        let mut d = ImpactDetector::new(&c, thr, 0.3);
        assert!(d.push(&sample(500.00, -n * 14.0 * G)).is_none());
        assert!(d.push(&sample(500.01, -n * 3.0 * G)).is_none());
        // Reboot: quiet samples on the restarted clock.
        let p = d.push(&sample(0.05, Vector3::new(0.0, 0.0, -G))).unwrap();
        assert_eq!(p.face, 2);
        assert_eq!(p.t_s, 500.0);
        approx::assert_relative_eq!(p.peak_g, 14.0, epsilon = 1e-9);
        // Nothing left open, and a new impact on the new clock is its own.
        assert!(d.push(&sample(0.10, Vector3::new(0.0, 0.0, -G))).is_none());
        assert!(d.push(&sample(1.00, -n * 9.0 * G)).is_none());
        let q = d.push(&sample(1.50, Vector3::new(0.0, 0.0, -G))).unwrap();
        approx::assert_relative_eq!(q.peak_g, 9.0, epsilon = 1e-9);
        assert!(d.finish().is_none());
    }

    #[test]
    fn junk_samples_are_ignored() {
        let (c, thr) = cage();
        let mut d = ImpactDetector::new(&c, thr, 0.2);
        d.push(&sample(f64::NAN, Vector3::new(0.0, 0.0, -100.0 * G)));
        d.push(&sample(0.0, Vector3::new(f64::INFINITY, 0.0, 0.0)));
        d.push(&Sample::default());
        assert!(d.finish().is_none());
    }
}
