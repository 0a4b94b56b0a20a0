//! A simulated vehicle in a cage, invented and deterministic for a seed:
//! it sits on its take-off face, arms, climbs, cruises, crashes (a short
//! acceleration spike), tumbles and comes to rest on some stable face of the
//! cage, disarmed. Then it waits for commands: `roll` across an edge to a
//! neighbouring face (it sometimes lands on another face than planned, as
//! real vehicles do), or `fly` for another flight and crash.
//!
//! The core is pure: [`Sim::step`] advances the state by a time step and
//! [`Sim::telemetry`] says what the sensors read. `wire` turns telemetry
//! into MAVLink frames or protocol lines. The rest attitude for a face is
//! the one that points its outward normal along gravity
//! ([`crate::rest::resting_attitude`]), turned by some yaw.

pub mod wire;

use crate::attitude::gravity_body;
use crate::cage::Cage;
use crate::rest::resting_attitude;
use crate::sample::STANDARD_GRAVITY_M_S2;
use nalgebra::{Unit, UnitQuaternion, Vector3};
use std::collections::BTreeMap;

/// Attitude and IMU rate of the simulator, Hz.
pub const SIM_RATE_HZ: f64 = 50.0;
/// Chance that a roll carries on over the next edge to another face.
pub const OVERSHOOT_CHANCE: f64 = 0.25;
/// Peak of the crash spike, in g.
pub const CRASH_SPIKE_G: f64 = 8.0;
const CRASH_SPIKE_S: f64 = 0.04;
const ROLL_S: f64 = 1.2;
const CLIMB_S: f64 = 2.0;
const CLIMB_SPEED_M_S: f64 = 1.0;
const CRUISE_S: f64 = 3.0;
const FIRST_IDLE_S: f64 = 2.0;

/// A command to the simulator.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum SimCommand {
    /// Roll across an edge onto the named neighbouring face.
    Roll(String),
    /// Take off, fly, crash again.
    Fly,
}

impl std::fmt::Display for SimCommand {
    /// The command channel's text form (what `FromStr` reads).
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            SimCommand::Roll(face) => write!(f, "roll {face}"),
            SimCommand::Fly => write!(f, "fly"),
        }
    }
}

impl std::str::FromStr for SimCommand {
    type Err = SimError;
    /// `roll F3` or `fly` (the sim command channel's text form).
    fn from_str(s: &str) -> Result<SimCommand, SimError> {
        let mut it = s.split_whitespace();
        match (it.next(), it.next(), it.next()) {
            (Some("roll"), Some(f), None) => Ok(SimCommand::Roll(f.to_string())),
            (Some("fly"), None, None) => Ok(SimCommand::Fly),
            _ => Err(SimError::BadCommand(s.chars().take(60).collect())),
        }
    }
}

/// Why a command was refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum SimError {
    /// Text that is no command.
    #[error("unknown command {0:?}: expected `roll FACE` or `fly`")]
    BadCommand(String),
    /// A face id the cage does not have.
    #[error("no face {0} on this cage")]
    NoFace(String),
    /// Not a neighbour across an edge.
    #[error("face {to} does not share an edge with the resting face {from}")]
    NotNeighbour {
        /// Resting face.
        from: String,
        /// Asked-for face.
        to: String,
    },
    /// Still moving or flying.
    #[error("the vehicle is not resting yet")]
    Busy,
}

/// What the sensors read at one instant.
#[derive(Debug, Clone, PartialEq)]
pub struct Telemetry {
    /// Time since the simulation started (the vehicle's boot clock), s.
    pub t_s: f64,
    /// Attitude, body -> NED.
    pub q: UnitQuaternion<f64>,
    /// Specific force, body frame, m/s^2.
    pub accel_body_m_s2: Vector3<f64>,
    /// Velocity, NED, m/s.
    pub velocity_ned_m_s: Vector3<f64>,
    /// Battery voltage.
    pub battery_v: f64,
    /// Motors armed.
    pub armed: bool,
    /// The face it rests on (truth), when resting.
    pub resting_face: Option<usize>,
}

#[derive(Debug, Clone)]
enum Phase {
    Resting { face: usize, until_s: Option<f64> },
    Climb { t0: f64 },
    Cruise { t0: f64 },
    Crash { t0: f64, dir: Vector3<f64> },
    Motion(Motion),
}

/// A sequence of attitudes to pass through, ending at rest on a face.
#[derive(Debug, Clone)]
struct Motion {
    from: UnitQuaternion<f64>,
    keys: Vec<(UnitQuaternion<f64>, f64)>,
    idx: usize,
    t_seg0: f64,
    end_face: usize,
}

/// The simulated vehicle.
#[derive(Debug, Clone)]
pub struct Sim {
    normals: Vec<Vector3<f64>>,
    stable: Vec<bool>,
    ids: Vec<String>,
    rest_q: Vec<UnitQuaternion<f64>>,
    neighbours: Vec<Vec<usize>>,
    takeoff: usize,
    rng: u64,
    t_s: f64,
    q: UnitQuaternion<f64>,
    vel: Vector3<f64>,
    spike: Option<Vector3<f64>>,
    armed: bool,
    armed_s: f64,
    phase: Phase,
    /// Face of the last finished motion, and what was planned (for reports).
    last_roll: Option<(usize, usize)>,
}

impl Sim {
    /// A simulator for `cage`, deterministic for `seed`. It starts resting
    /// on the most level stable face (F1 when that one is stable).
    pub fn new(cage: &Cage, seed: u64) -> Sim {
        let n = cage.faces.len();
        let mut by_edge: BTreeMap<(usize, usize), Vec<usize>> = BTreeMap::new();
        for (i, f) in cage.faces.iter().enumerate() {
            for e in &f.edges {
                let k = (e.nodes[0].min(e.nodes[1]), e.nodes[0].max(e.nodes[1]));
                by_edge.entry(k).or_default().push(i);
            }
        }
        let mut neighbours = vec![Vec::new(); n];
        for fs in by_edge.values() {
            for &a in fs {
                for &b in fs {
                    if a != b && !neighbours[a].contains(&b) {
                        neighbours[a].push(b);
                    }
                }
            }
        }
        let stable: Vec<bool> = cage.faces.iter().map(|f| f.stable).collect();
        let takeoff = (0..n)
            .filter(|&i| stable[i])
            .min_by(|&a, &b| cage.faces[a].tilt_deg.total_cmp(&cage.faces[b].tilt_deg))
            .unwrap_or(0);
        let rest_q: Vec<UnitQuaternion<f64>> = (0..n).map(|i| resting_attitude(cage, i)).collect();
        let q = rest_q
            .get(takeoff)
            .copied()
            .unwrap_or_else(UnitQuaternion::identity);
        Sim {
            normals: cage.faces.iter().map(|f| f.normal_body).collect(),
            stable,
            ids: cage.faces.iter().map(|f| f.id.clone()).collect(),
            rest_q,
            neighbours,
            takeoff,
            // splitmix64 state; a zero seed is as good as any other.
            rng: seed ^ 0x9E37_79B9_7F4A_7C15,
            t_s: 0.0,
            q,
            vel: Vector3::zeros(),
            spike: None,
            armed: false,
            armed_s: 0.0,
            phase: Phase::Resting {
                face: takeoff,
                until_s: Some(FIRST_IDLE_S),
            },
            last_roll: None,
        }
    }

    fn next_u64(&mut self) -> u64 {
        self.rng = self.rng.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.rng;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    /// Uniform in [0, 1).
    fn uniform(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64
    }

    fn signed(&mut self) -> f64 {
        2.0 * self.uniform() - 1.0
    }

    fn pick(&mut self, v: &[usize]) -> Option<usize> {
        if v.is_empty() {
            return None;
        }
        let i = (self.uniform() * v.len() as f64) as usize;
        v.get(i.min(v.len() - 1)).copied()
    }

    fn random_attitude(&mut self) -> UnitQuaternion<f64> {
        let axis = Vector3::new(self.signed(), self.signed(), self.signed() + 1e-3);
        UnitQuaternion::from_axis_angle(
            &Unit::new_normalize(axis),
            std::f64::consts::PI * self.uniform(),
        )
    }

    /// Time since start, s.
    pub fn t_s(&self) -> f64 {
        self.t_s
    }

    /// The face it rests on, if resting.
    pub fn resting_face(&self) -> Option<usize> {
        match self.phase {
            Phase::Resting { face, .. } => Some(face),
            _ => None,
        }
    }

    /// The last roll's (planned, landed) faces; None after a flight.
    pub fn last_roll(&self) -> Option<(usize, usize)> {
        self.last_roll
    }

    /// Apply a command.
    pub fn command(&mut self, cmd: &SimCommand) -> Result<(), SimError> {
        let Some(from) = self.resting_face() else {
            return Err(SimError::Busy);
        };
        // ok: indices below are faces of this cage (resting_face, position in
        // ids, neighbour lists), all below the face count.
        match cmd {
            SimCommand::Fly => {
                // A flight ends in a tumble, not a roll: nothing is planned.
                self.last_roll = None;
                self.arm();
                self.phase = Phase::Climb { t0: self.t_s };
                Ok(())
            }
            SimCommand::Roll(id) => {
                // Face ids are matched without regard to case, as `plan
                // --from` does: `roll f3` is `roll F3`.
                let to = self
                    .ids
                    .iter()
                    .position(|f| f.eq_ignore_ascii_case(id))
                    .ok_or_else(|| SimError::NoFace(id.clone()))?;
                if !self.neighbours[from].contains(&to) {
                    return Err(SimError::NotNeighbour {
                        from: self.ids[from].clone(),
                        to: self.ids[to].clone(),
                    });
                }
                let mut keys = Vec::new();
                let q1 = self.roll_attitude(&self.q, from, to);
                keys.push((q1, ROLL_S));
                let mut end = to;
                let carry_on = !self.stable[to] || self.uniform() < OVERSHOOT_CHANCE;
                if carry_on {
                    let next: Vec<usize> = self.neighbours[to]
                        .iter()
                        .copied()
                        .filter(|&f| f != from && self.stable[f])
                        .collect();
                    if let Some(g) = self.pick(&next) {
                        keys.push((self.roll_attitude(&q1, to, g), ROLL_S * 0.8));
                        end = g;
                    }
                }
                self.last_roll = Some((to, end));
                self.arm();
                self.phase = Phase::Motion(Motion {
                    from: self.q,
                    keys,
                    idx: 0,
                    t_seg0: self.t_s,
                    end_face: end,
                });
                Ok(())
            }
        }
    }

    /// Attitude after rolling from resting on `from` to resting on `to`
    /// about their shared edge: turn the body so `to`'s normal takes the
    /// place of `from`'s (straight down). Both normals are perpendicular to
    /// the shared edge, so the turn is about the edge.
    fn roll_attitude(
        &self,
        q: &UnitQuaternion<f64>,
        from: usize,
        to: usize,
    ) -> UnitQuaternion<f64> {
        let r = UnitQuaternion::rotation_between(&self.normals[to], &self.normals[from])
            .unwrap_or_else(UnitQuaternion::identity);
        q * r
    }

    fn arm(&mut self) {
        self.armed = true;
    }

    /// Advance by `dt_s`.
    pub fn step(&mut self, dt_s: f64) {
        let dt = dt_s.clamp(0.0, 1.0);
        self.t_s += dt;
        if self.armed {
            self.armed_s += dt;
        }
        let t = self.t_s;
        self.spike = None;
        match self.phase.clone() {
            Phase::Resting { face, until_s } => {
                self.vel = Vector3::zeros();
                if until_s.is_some_and(|u| t >= u) {
                    self.arm();
                    self.phase = Phase::Climb { t0: t };
                } else {
                    let _ = face;
                }
            }
            Phase::Climb { t0 } => {
                self.vel = Vector3::new(0.0, 0.0, -CLIMB_SPEED_M_S);
                self.q = self.hover_attitude(t);
                if t - t0 >= CLIMB_S {
                    self.phase = Phase::Cruise { t0: t };
                }
            }
            Phase::Cruise { t0 } => {
                self.vel = Vector3::new(2.0 * (t - t0).min(1.0), 0.0, 0.0);
                self.q = self.hover_attitude(t);
                if t - t0 >= CRUISE_S {
                    let dir = Unit::new_normalize(Vector3::new(
                        self.signed(),
                        self.signed(),
                        self.signed() + 1e-3,
                    ));
                    self.phase = Phase::Crash {
                        t0: t,
                        dir: dir.into_inner(),
                    };
                }
            }
            Phase::Crash { t0, dir } => {
                self.vel = Vector3::zeros();
                self.spike = Some(dir);
                if t - t0 >= CRASH_SPIKE_S {
                    // The crash disarms (failsafe); the cage tumbles to rest.
                    self.armed = false;
                    let candidates: Vec<usize> =
                        (0..self.stable.len()).filter(|&i| self.stable[i]).collect();
                    let end = self.pick(&candidates).unwrap_or(self.takeoff);
                    let mid = self.random_attitude() * self.q;
                    let yaw = UnitQuaternion::from_axis_angle(
                        &Vector3::z_axis(),
                        std::f64::consts::PI * self.signed(),
                    );
                    let rest = self.rest_q.get(end).copied().unwrap_or(self.q);
                    let q_end = yaw * rest;
                    let dur = 0.6 + 0.6 * self.uniform();
                    self.phase = Phase::Motion(Motion {
                        from: self.q,
                        keys: vec![(mid, dur), (q_end, dur)],
                        idx: 0,
                        t_seg0: t,
                        end_face: end,
                    });
                }
            }
            Phase::Motion(mut m) => {
                self.vel = Vector3::zeros();
                let Some(&(target, dur)) = m.keys.get(m.idx) else {
                    self.phase = Phase::Resting {
                        face: m.end_face,
                        until_s: None,
                    };
                    return;
                };
                let s = ((t - m.t_seg0) / dur).clamp(0.0, 1.0);
                let ease = s * s * (3.0 - 2.0 * s);
                self.q = m.from.slerp(&target, ease);
                if s >= 1.0 {
                    m.from = target;
                    m.idx += 1;
                    m.t_seg0 = t;
                }
                if m.idx >= m.keys.len() {
                    self.armed = false;
                    self.phase = Phase::Resting {
                        face: m.end_face,
                        until_s: None,
                    };
                } else {
                    self.phase = Phase::Motion(m);
                }
            }
        }
    }

    /// Level with a gentle wobble of a few degrees, as a hovering vehicle is.
    fn hover_attitude(&self, t: f64) -> UnitQuaternion<f64> {
        let up = self.rest_q.get(self.takeoff).copied().unwrap_or_default();
        let wob = UnitQuaternion::from_euler_angles(
            (4.0f64).to_radians() * (1.7 * t).sin(),
            (3.0f64).to_radians() * (1.1 * t).cos(),
            0.3 * t,
        );
        wob * up
    }

    /// What the sensors read now, with a little noise.
    pub fn telemetry(&mut self) -> Telemetry {
        let resting = self.resting_face();
        let noise = UnitQuaternion::from_euler_angles(
            0.15f64.to_radians() * self.signed(),
            0.15f64.to_radians() * self.signed(),
            0.1f64.to_radians() * self.signed(),
        );
        let q = self.q * noise;
        let g = STANDARD_GRAVITY_M_S2;
        let mut f = -g * gravity_body(&q);
        match self.phase {
            Phase::Climb { t0 } if self.t_s - t0 < 0.5 => f *= 1.3,
            _ => {}
        }
        if let Some(d) = self.spike {
            f += CRASH_SPIKE_G * g * d;
        }
        f += Vector3::new(self.signed(), self.signed(), self.signed()) * 0.03;
        Telemetry {
            t_s: self.t_s,
            q,
            accel_body_m_s2: f,
            velocity_ned_m_s: self.vel,
            battery_v: 12.6 - 0.02 * self.armed_s - 0.0005 * self.t_s,
            armed: self.armed,
            resting_face: resting,
        }
    }

    /// Face id for an index.
    pub fn face_id(&self, i: usize) -> &str {
        self.ids.get(i).map_or("?", |s| s.as_str())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::Profile;
    use crate::rest::fit_face;

    fn cage() -> Cage {
        Cage::from_profile(&Profile::demo().expect("demo")).expect("cage")
    }

    fn run(sim: &mut Sim, s: f64) -> Vec<Telemetry> {
        let n = (s * SIM_RATE_HZ).round() as usize;
        (0..n)
            .map(|_| {
                sim.step(1.0 / SIM_RATE_HZ);
                sim.telemetry()
            })
            .collect()
    }

    #[test]
    fn flies_crashes_and_rests_on_a_stable_face() {
        let c = cage();
        let mut sim = Sim::new(&c, 7);
        let tel = run(&mut sim, 12.0);
        assert!(tel.iter().any(|t| t.armed && t.velocity_ned_m_s.z < -0.5));
        let peak = tel
            .iter()
            .map(|t| t.accel_body_m_s2.norm() / STANDARD_GRAVITY_M_S2)
            .fold(0.0, f64::max);
        assert!(peak > 5.0, "crash spike {peak} g");
        let face = sim.resting_face().expect("resting after the tumble");
        assert!(c.faces[face].stable);
        let last = tel.last().expect("telemetry");
        // At rest the face's normal is along gravity (within the noise).
        let fit = fit_face(&c, &gravity_body(&last.q));
        assert_eq!(fit.face, face);
        assert!(fit.error_deg < 1.0);
        assert!(!last.armed);
    }

    #[test]
    fn same_seed_same_flight() {
        let c = cage();
        let (mut a, mut b) = (Sim::new(&c, 3), Sim::new(&c, 3));
        assert_eq!(run(&mut a, 10.0), run(&mut b, 10.0));
    }

    #[test]
    fn rolls_to_a_neighbour_or_beyond() {
        let c = cage();
        let mut sim = Sim::new(&c, 11);
        run(&mut sim, 12.0);
        let from = sim.resting_face().expect("resting");
        assert_eq!(sim.command(&SimCommand::Fly).map(|_| ()), Ok(()));
        run(&mut sim, 12.0);
        let from2 = sim.resting_face().expect("resting again");
        let _ = from;
        let to = sim.neighbours[from2][0];
        let id = c.faces[to].id.clone();
        assert_eq!(sim.command(&SimCommand::Roll(id)), Ok(()));
        assert_eq!(sim.command(&SimCommand::Fly), Err(SimError::Busy));
        run(&mut sim, 3.0);
        let landed = sim.resting_face().expect("landed");
        let (planned, end) = sim.last_roll().expect("rolled");
        assert_eq!((planned, end.eq(&landed)), (to, true));
        assert!(landed == to || sim.neighbours[to].contains(&landed));
        let fit = fit_face(&c, &gravity_body(&sim.q));
        assert_eq!(fit.face, landed);
        assert!(fit.error_deg < 1e-6);
        // Not a neighbour:
        let far = (0..c.faces.len())
            .find(|&f| f != landed && !sim.neighbours[landed].contains(&f))
            .expect("a far face");
        assert!(matches!(
            sim.command(&SimCommand::Roll(c.faces[far].id.clone())),
            Err(SimError::NotNeighbour { .. })
        ));
        assert_eq!(
            "roll F3".parse::<SimCommand>(),
            Ok(SimCommand::Roll("F3".into()))
        );
        assert!("jump".parse::<SimCommand>().is_err());
    }

    #[test]
    fn fly_clears_the_planned_roll() {
        let c = cage();
        let mut sim = Sim::new(&c, 11);
        run(&mut sim, 12.0);
        let from = sim.resting_face().expect("resting");
        let to = sim.neighbours[from][0];
        assert_eq!(
            sim.command(&SimCommand::Roll(c.faces[to].id.clone())),
            Ok(())
        );
        run(&mut sim, 3.0);
        assert!(sim.last_roll().is_some());
        assert_eq!(sim.command(&SimCommand::Fly), Ok(()));
        assert_eq!(sim.last_roll(), None);
        run(&mut sim, 12.0);
        assert!(sim.resting_face().is_some());
        assert_eq!(sim.last_roll(), None);
    }

    #[test]
    fn face_ids_are_matched_without_regard_to_case() {
        let c = cage();
        let mut sim = Sim::new(&c, 11);
        run(&mut sim, 12.0);
        let from = sim.resting_face().expect("resting");
        let to = sim.neighbours[from][0];
        let lower = c.faces[to].id.to_lowercase();
        assert_ne!(lower, c.faces[to].id, "demo face ids have upper case");
        let cmd: SimCommand = format!("roll {lower}").parse().expect("parses");
        assert_eq!(sim.command(&cmd), Ok(()));
        assert_eq!(sim.last_roll().map(|(p, _)| p), Some(to));
        // Not a neighbour, in lower case: the error names the cage's own id.
        run(&mut sim, 3.0);
        let landed = sim.resting_face().expect("landed");
        let far = (0..c.faces.len())
            .find(|&f| f != landed && !sim.neighbours[landed].contains(&f))
            .expect("a far face");
        let far_lower = c.faces[far].id.to_lowercase();
        assert_eq!(
            sim.command(&SimCommand::Roll(far_lower)),
            Err(SimError::NotNeighbour {
                from: c.faces[landed].id.clone(),
                to: c.faces[far].id.clone(),
            })
        );
        assert_eq!(
            sim.command(&SimCommand::Roll("nope".into())),
            Err(SimError::NoFace("nope".into()))
        );
    }
}
