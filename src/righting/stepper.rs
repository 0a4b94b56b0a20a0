//! Stepping through a plan by hand: pure logic, no terminal, no clock of
//! its own (the caller passes sample times), so it can be tested with
//! scripted attitude sequences.
//!
//! Phases: waiting for the operator to command step k; commanded (waiting
//! for motion); rolling (motion seen); done (on a take-off face) or no
//! route. Arrival on the expected face advances to the next step; arrival
//! on any other face replans from there; falling back onto the start face
//! asks for the same step again; no motion within the time-out after a
//! command asks again.

use super::RightingModel;
use super::plan::{Plan, Step};
use crate::rest::{RestState, RestStatus};
use nalgebra::UnitQuaternion;

/// Seconds after a command with no motion before the operator is asked
/// again: long enough to arm and spin up, short enough not to wait on a
/// command that never reached the vehicle (common practice, no published
/// source).
pub const DEFAULT_MOTION_TIMEOUT_S: f64 = 8.0;

/// Where the stepper is.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Phase {
    /// Waiting for the operator to command step `step` (0-based).
    Waiting {
        /// Step index.
        step: usize,
    },
    /// Step commanded at `since_s`; no motion seen yet.
    Commanded {
        /// Step index.
        step: usize,
        /// Time of the command.
        since_s: f64,
    },
    /// Motion seen after the command; waiting for the vehicle to settle.
    Rolling {
        /// Step index.
        step: usize,
    },
    /// Resting on a take-off face.
    Done,
    /// No take-off face can be reached from where the vehicle lies.
    NoRoute,
}

/// What the operator should be told after an input.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Notice {
    /// Step `step` was commanded; watching for motion.
    Commanded {
        /// Step index.
        step: usize,
    },
    /// Motion seen: the roll is under way.
    Rolling {
        /// Step index.
        step: usize,
    },
    /// The step ended where expected; `next` is the step to command now.
    Arrived {
        /// Step just completed.
        step: usize,
        /// Next step to command.
        next: usize,
    },
    /// The vehicle rolled back onto the step's start face; command it again.
    FellBack {
        /// Step to repeat.
        step: usize,
    },
    /// No motion within the time-out; command the step again.
    NoMotion {
        /// Step to repeat.
        step: usize,
    },
    /// The vehicle settled on an unexpected face; a new plan starts there.
    Replanned {
        /// Face it settled on.
        face: usize,
    },
    /// On a take-off face: righting complete.
    Done {
        /// The take-off face.
        face: usize,
    },
    /// No take-off face can be reached from `face`; the plan says why.
    NoRoute {
        /// Where the vehicle lies.
        face: usize,
    },
}

/// The righting state machine.
#[derive(Debug, Clone)]
pub struct Stepper {
    model: RightingModel,
    plan: Plan,
    phase: Phase,
    timeout_s: f64,
}

impl Stepper {
    /// Start stepping through `plan`.
    pub fn new(model: RightingModel, plan: Plan, timeout_s: f64) -> Stepper {
        let phase = initial_phase(&plan);
        Stepper {
            model,
            plan,
            phase,
            timeout_s,
        }
    }

    /// The plan being followed (replaced on a replan).
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    /// The current phase.
    pub fn phase(&self) -> Phase {
        self.phase
    }

    /// The step waiting, commanded or rolling, if any.
    pub fn current_step(&self) -> Option<&Step> {
        match self.phase {
            Phase::Waiting { step } | Phase::Commanded { step, .. } | Phase::Rolling { step } => {
                self.plan.steps.get(step)
            }
            Phase::Done | Phase::NoRoute => None,
        }
    }

    /// The operator commands the waiting step at `t_s`. Ignored in any
    /// other phase (a double press does nothing).
    pub fn command(&mut self, t_s: f64) -> Option<Notice> {
        match self.phase {
            Phase::Waiting { step } => {
                self.phase = Phase::Commanded { step, since_s: t_s };
                Some(Notice::Commanded { step })
            }
            _ => None,
        }
    }

    /// Feed one rest-detector answer for the attitude `q` at `t_s`.
    pub fn observe(
        &mut self,
        t_s: f64,
        q: &UnitQuaternion<f64>,
        status: &RestStatus,
    ) -> Option<Notice> {
        let resting = status.state == RestState::Resting;
        match self.phase {
            Phase::Waiting { step } => {
                let from = self.plan.steps.get(step).map(|s| s.from);
                if resting && from != Some(status.face) {
                    return Some(self.replan(status.face, q));
                }
                None
            }
            Phase::Commanded { step, since_s } => {
                let Some(s) = self.plan.steps.get(step) else {
                    return Some(self.replan(status.face, q));
                };
                if !resting {
                    self.phase = Phase::Rolling { step };
                    return Some(Notice::Rolling { step });
                }
                if status.face == s.to {
                    return Some(self.advance(step, status.face));
                }
                if status.face != s.from {
                    return Some(self.replan(status.face, q));
                }
                if t_s - since_s > self.timeout_s {
                    self.phase = Phase::Waiting { step };
                    return Some(Notice::NoMotion { step });
                }
                None
            }
            Phase::Rolling { step } => {
                if !resting {
                    return None;
                }
                let Some(s) = self.plan.steps.get(step) else {
                    return Some(self.replan(status.face, q));
                };
                if status.face == s.to {
                    Some(self.advance(step, status.face))
                } else if status.face == s.from {
                    self.phase = Phase::Waiting { step };
                    Some(Notice::FellBack { step })
                } else {
                    Some(self.replan(status.face, q))
                }
            }
            Phase::Done | Phase::NoRoute => {
                let end = self.plan.steps.last().map_or(self.plan.from, |s| s.to);
                let end = self.model.settle_face(end);
                if resting && status.face != end {
                    return Some(self.replan(status.face, q));
                }
                None
            }
        }
    }

    fn advance(&mut self, step: usize, face: usize) -> Notice {
        let next = step + 1;
        if next >= self.plan.steps.len() {
            self.phase = Phase::Done;
            Notice::Done { face }
        } else {
            self.phase = Phase::Waiting { step: next };
            Notice::Arrived { step, next }
        }
    }

    fn replan(&mut self, face: usize, q: &UnitQuaternion<f64>) -> Notice {
        self.plan = self.model.plan(face, q);
        self.phase = initial_phase(&self.plan);
        match self.phase {
            Phase::Done => Notice::Done {
                face: self.plan.goal.unwrap_or(face),
            },
            Phase::NoRoute => Notice::NoRoute { face },
            _ => Notice::Replanned { face },
        }
    }
}

fn initial_phase(plan: &Plan) -> Phase {
    if !plan.reachable {
        Phase::NoRoute
    } else if plan.steps.is_empty() {
        Phase::Done
    } else {
        Phase::Waiting { step: 0 }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::profile::Profile;
    use crate::rest::{RestDetector, resting_attitude};
    use crate::righting::Limits;

    /// The demo cage with rotors strong and reversible enough that most
    /// moves are feasible, so plans have several steps.
    fn strong_model() -> (Profile, RightingModel) {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        let mut rotors = p.rotors.clone();
        for r in &mut rotors {
            r.max_thrust_n *= 4.0;
            r.reverse_thrust_n = r.max_thrust_n;
        }
        let limits = Limits {
            rotors,
            friction_coefficient: 0.8,
            torque_margin: 1.2,
        };
        let takeoff = vec![0];
        (
            p,
            RightingModel::with_limits(c, limits, takeoff, false, 1.5),
        )
    }

    /// Feed `q` for `secs` at 20 Hz; returns every notice.
    fn hold(
        st: &mut Stepper,
        det: &mut RestDetector,
        model: &RightingModel,
        t: &mut f64,
        q: &UnitQuaternion<f64>,
        secs: f64,
    ) -> Vec<Notice> {
        let mut out = Vec::new();
        let n = (secs / 0.05).round() as usize;
        for _ in 0..n {
            *t += 0.05;
            let s = det.update(&model.cage, *t, q);
            out.extend(st.observe(*t, q, &s));
        }
        out
    }

    /// Roll from `a` to `b` over one second.
    fn roll(
        st: &mut Stepper,
        det: &mut RestDetector,
        model: &RightingModel,
        t: &mut f64,
        a: &UnitQuaternion<f64>,
        b: &UnitQuaternion<f64>,
    ) -> Vec<Notice> {
        let mut out = Vec::new();
        for k in 1..=20 {
            *t += 0.05;
            let q = a.slerp(b, k as f64 / 20.0);
            let s = det.update(&model.cage, *t, &q);
            out.extend(st.observe(*t, &q, &s));
        }
        out
    }

    fn setup(
        from: usize,
    ) -> (
        Profile,
        RightingModel,
        Stepper,
        RestDetector,
        f64,
        UnitQuaternion<f64>,
    ) {
        let (p, m) = strong_model();
        let q0 = resting_attitude(&m.cage, from);
        let plan = m.plan(from, &q0);
        let st = Stepper::new(m.clone(), plan, DEFAULT_MOTION_TIMEOUT_S);
        let det = RestDetector::new(&p.watch);
        (p, m, st, det, 0.0, q0)
    }

    /// A stable face whose plan has at least two steps.
    fn far_face() -> usize {
        let (_, m) = strong_model();
        (0..m.cage.faces.len())
            .find(|&f| {
                m.cage.faces[f].stable && m.plan(f, &resting_attitude(&m.cage, f)).steps.len() >= 2
            })
            .expect("the strong demo has multi-step plans")
    }

    #[test]
    fn walks_a_plan_to_the_end() {
        let from = far_face();
        let (_, m, mut st, mut det, mut t, q0) = setup(from);
        assert_eq!(st.phase(), Phase::Waiting { step: 0 });
        assert!(hold(&mut st, &mut det, &m, &mut t, &q0, 1.0).is_empty());
        let mut q = q0;
        let n = st.plan().steps.len();
        for k in 0..n {
            assert_eq!(st.command(t), Some(Notice::Commanded { step: k }));
            assert_eq!(st.command(t), None, "a second press is ignored");
            let target = st.current_step().unwrap().target;
            let notes = roll(&mut st, &mut det, &m, &mut t, &q, &target);
            assert_eq!(notes.first(), Some(&Notice::Rolling { step: k }));
            let notes = hold(&mut st, &mut det, &m, &mut t, &target, 1.0);
            let want = if k + 1 == n {
                Notice::Done { face: 0 }
            } else {
                Notice::Arrived {
                    step: k,
                    next: k + 1,
                }
            };
            assert_eq!(notes, vec![want]);
            q = target;
        }
        assert_eq!(st.phase(), Phase::Done);
    }

    #[test]
    fn landing_elsewhere_replans_from_there() {
        let from = far_face();
        let (_, m, mut st, mut det, mut t, q0) = setup(from);
        hold(&mut st, &mut det, &m, &mut t, &q0, 1.0);
        let step = st.current_step().unwrap().clone();
        // Land on a stable face that is neither the start nor the target.
        let other = (0..m.cage.faces.len())
            .find(|&f| f != step.from && f != step.to && m.cage.faces[f].stable && f != 0)
            .unwrap();
        let q_other = resting_attitude(&m.cage, other);
        st.command(t);
        roll(&mut st, &mut det, &m, &mut t, &q0, &q_other);
        let notes = hold(&mut st, &mut det, &m, &mut t, &q_other, 1.0);
        assert_eq!(notes, vec![Notice::Replanned { face: other }]);
        assert_eq!(st.plan().from, other);
        assert_eq!(st.phase(), Phase::Waiting { step: 0 });
    }

    #[test]
    fn no_motion_within_the_timeout_asks_again() {
        let from = far_face();
        let (_, m, mut st, mut det, mut t, q0) = setup(from);
        hold(&mut st, &mut det, &m, &mut t, &q0, 1.0);
        st.command(t);
        let notes = hold(
            &mut st,
            &mut det,
            &m,
            &mut t,
            &q0,
            DEFAULT_MOTION_TIMEOUT_S - 1.0,
        );
        assert!(notes.is_empty());
        let notes = hold(&mut st, &mut det, &m, &mut t, &q0, 2.0);
        assert_eq!(notes, vec![Notice::NoMotion { step: 0 }]);
        assert_eq!(st.phase(), Phase::Waiting { step: 0 });
    }

    #[test]
    fn falling_back_asks_for_the_same_step() {
        let from = far_face();
        let (_, m, mut st, mut det, mut t, q0) = setup(from);
        hold(&mut st, &mut det, &m, &mut t, &q0, 1.0);
        let target = st.current_step().unwrap().target;
        st.command(t);
        let part = q0.slerp(&target, 0.3);
        roll(&mut st, &mut det, &m, &mut t, &q0, &part);
        roll(&mut st, &mut det, &m, &mut t, &part, &q0);
        let notes = hold(&mut st, &mut det, &m, &mut t, &q0, 1.0);
        assert_eq!(notes, vec![Notice::FellBack { step: 0 }]);
        assert_eq!(st.phase(), Phase::Waiting { step: 0 });
    }

    #[test]
    fn already_on_a_takeoff_face_is_done() {
        let (_, m, st, _, _, _) = setup(0);
        assert_eq!(st.phase(), Phase::Done);
        assert!(st.current_step().is_none());
        assert!(m.plan(0, &UnitQuaternion::identity()).steps.is_empty());
    }
}
