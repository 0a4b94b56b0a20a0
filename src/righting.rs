//! Righting: which moves take the vehicle from face to face, which of them
//! its rotors can make, and the roll plans from any face to a take-off face.
//!
//! - [`moves`]: edge rolls and vertex pivots, and where a roll onto a face
//!   the vehicle cannot rest on settles.
//! - [`contact`]: the conditions the thrusts must meet at one angle of a
//!   roll (lift-off, friction, the reaction on the pivot).
//! - [`describe`]: a move in the vehicle's own terms (which side tips).
//! - [`feasibility`]: the quasi-static moment check and the rotor commands.
//! - [`plan`]: the graph of resting faces and feasible moves, the recovery
//!   map (multi-goal Dijkstra) and single plans (A*).
//! - [`stepper`]: the state machine that walks the operator through a plan.

pub mod contact;
pub mod describe;
pub mod feasibility;
pub mod moves;
pub mod plan;
pub mod screen;
pub mod stepper;

#[cfg(test)]
mod checks;

use crate::cage::{Cage, CageError};
use crate::profile::Profile;
pub use feasibility::{Feasibility, Limits, RotorCommands, ScheduleEntry};
pub use moves::{MoveKind, Roll};
pub use plan::{Plan, Step};

/// A commanded roll and what follows from it: the passive rolls until the
/// vehicle settles, and whether the rotors can make it.
#[derive(Debug, Clone, PartialEq)]
pub struct Move {
    /// The roll the operator commands.
    pub roll: Roll,
    /// Rolls gravity then makes on its own (empty when `roll.to` is a
    /// resting face).
    pub settle: Vec<Roll>,
    /// Face the vehicle ends on.
    pub settles_on: usize,
    /// Quasi-static verdict on the commanded roll. In a [`RightingModel`]
    /// its `commands` are left out and `feasible` says only that the check
    /// passed: [`RightingModel::commands`] and [`RightingModel::feasible`]
    /// give the whole answer.
    pub feasibility: Feasibility,
    /// The rotor commands, worked out on first use: a move's check costs
    /// a fraction of its commands, and a plan takes few of the moves.
    commands: std::sync::OnceLock<Option<RotorCommands>>,
}

impl Move {
    /// Total rotation, commanded plus passive, degrees.
    pub fn total_angle_deg(&self) -> f64 {
        self.roll.angle_deg + self.settle.iter().map(|r| r.angle_deg).sum::<f64>()
    }
}

/// Everything the planner knows about one vehicle: its cage, limits, moves
/// and take-off faces. Built once per profile; plans are queries on it.
#[derive(Debug, Clone)]
pub struct RightingModel {
    /// The cage.
    pub cage: Cage,
    /// Rotors, friction and margin.
    pub limits: Limits,
    /// Every move from every resting face (feasible or not). Moves that
    /// would only fall back to where they started are left out.
    pub moves: Vec<Move>,
    /// Take-off face indices.
    pub takeoff: Vec<usize>,
    /// Cost multiplier for vertex pivots (>= 1, so the heuristic stays admissible).
    pub vertex_pivot_weight: f64,
}

impl RightingModel {
    /// Build the model of a profile's vehicle.
    pub fn new(profile: &Profile, cage: &Cage) -> Result<RightingModel, CageError> {
        let takeoff = cage.takeoff_faces(&profile.righting.takeoff_faces)?;
        let limits = Limits {
            rotors: profile.rotors.clone(),
            friction_coefficient: profile.righting.friction_coefficient,
            torque_margin: profile.righting.torque_margin,
        };
        Ok(RightingModel::with_limits(
            cage.clone(),
            limits,
            takeoff,
            profile.righting.vertex_pivots,
            profile.righting.vertex_pivot_weight,
        ))
    }

    /// Build from parts (tests vary the limits).
    pub fn with_limits(
        cage: Cage,
        limits: Limits,
        takeoff: Vec<usize>,
        vertex_pivots: bool,
        vertex_pivot_weight: f64,
    ) -> RightingModel {
        let mut moves = Vec::new();
        for roll in moves::candidate_rolls(&cage, vertex_pivots) {
            if !cage.faces[roll.from].stable {
                continue;
            }
            let settle = moves::settle(&cage, roll.to);
            let settles_on = settle.last().map_or(roll.to, |r| r.to);
            if settles_on == roll.from {
                continue;
            }
            let feasibility = feasibility::assess_check(&cage, &roll, &limits);
            moves.push(Move {
                roll,
                settle,
                settles_on,
                feasibility,
                commands: std::sync::OnceLock::new(),
            });
        }
        RightingModel {
            cage,
            limits,
            moves,
            takeoff,
            vertex_pivot_weight: vertex_pivot_weight.max(1.0),
        }
    }

    /// Planning cost of a move: its total rotation, weighted for vertex pivots.
    pub fn cost_deg(&self, m: &Move) -> f64 {
        let w = match m.roll.kind {
            MoveKind::Edge => 1.0,
            MoveKind::Vertex => self.vertex_pivot_weight,
        };
        m.total_angle_deg() * w
    }

    /// The rotor commands of move `k` (worked out on first use); `None`
    /// when the check refuses it, or when no setting carries some angle of
    /// it, which makes it infeasible (fail safe).
    pub fn commands(&self, k: usize) -> Option<&RotorCommands> {
        let m = self.moves.get(k)?;
        if !m.feasibility.feasible {
            return None;
        }
        m.commands
            .get_or_init(|| feasibility::move_commands(&self.cage, &m.roll, &self.limits))
            .as_ref()
    }

    /// Whether move `k` can be made: the check passes and rotor commands
    /// exist (working them out if need be).
    pub fn feasible(&self, k: usize) -> bool {
        self.commands(k).is_some()
    }

    /// Whether move `k` may be planned with: the check passes and its
    /// commands, where already worked out, exist.
    fn plannable(&self, k: usize) -> bool {
        let m = &self.moves[k];
        m.feasibility.feasible && m.commands.get().is_none_or(|c| c.is_some())
    }

    /// Where the vehicle ends up if left lying on `face`.
    pub fn settle_face(&self, face: usize) -> usize {
        moves::settle(&self.cage, face)
            .last()
            .map_or(face, |r| r.to)
    }
}
