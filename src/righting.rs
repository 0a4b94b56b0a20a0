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
//!   map (multi-goal Dijkstra) and single plans (A*), checking a move only
//!   when a search reaches it.
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
pub use feasibility::{Feasibility, Limits, Outlook, RotorCommands, ScheduleEntry};
pub use moves::{MoveKind, Roll};
pub use plan::{FinishedMap, MapDraft, Plan, Step};

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
    /// Quasi-static verdict on the commanded roll, without the commands,
    /// checked on first use ([`RightingModel::check`]): a plan needs the
    /// verdicts of only the moves that could lower some face's cost.
    check: std::sync::OnceLock<Feasibility>,
    /// The rotor commands, worked out on first use: a move's check costs
    /// a fraction of its commands, and a plan takes few of the moves.
    /// (Shared with the plans' steps that take the move: a map of a large
    /// cage has thousands of steps, and a vertex pivot's schedule is long.)
    commands: std::sync::OnceLock<Option<std::sync::Arc<RotorCommands>>>,
    /// What the roll's start says about its check, worked out on first
    /// use ([`RightingModel::outlook`]): the explanations of faces with no
    /// route ask it of every move out of them.
    outlook: std::sync::OnceLock<Outlook>,
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
    /// Every move from every resting face (feasible or not), ordered by the
    /// face it starts from. Moves that would only fall back to where they
    /// started are left out.
    pub moves: Vec<Move>,
    /// Take-off face indices.
    pub takeoff: Vec<usize>,
    /// Cost multiplier for vertex pivots (>= 1, so the heuristic stays admissible).
    pub vertex_pivot_weight: f64,
    /// The moves that end on each face (indices into `moves`), for the
    /// planner's search back from the goals.
    into: Vec<Vec<usize>>,
    /// Where each face's moves start in `moves` (one more entry than faces).
    out_start: Vec<usize>,
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
        // Where the vehicle settles from each face, worked out once per
        // face rather than once per move into it (a face has several).
        let mut settled: Vec<Option<Vec<moves::Roll>>> = vec![None; cage.faces.len()];
        for roll in moves::candidate_rolls(&cage, vertex_pivots) {
            if !cage.faces[roll.from].stable {
                continue;
            }
            let settle = match settled.get_mut(roll.to) {
                Some(kept) => kept
                    .get_or_insert_with(|| moves::settle(&cage, roll.to))
                    .clone(),
                None => moves::settle(&cage, roll.to),
            };
            let settles_on = settle.last().map_or(roll.to, |r| r.to);
            if settles_on == roll.from {
                continue;
            }
            moves.push(Move {
                roll,
                settle,
                settles_on,
                check: std::sync::OnceLock::new(),
                commands: std::sync::OnceLock::new(),
                outlook: std::sync::OnceLock::new(),
            });
        }
        debug_assert!(moves.windows(2).all(|w| w[0].roll.from <= w[1].roll.from));
        let faces = cage.faces.len();
        let mut into = vec![Vec::new(); faces];
        let mut out_start = vec![0; faces + 1];
        for (k, m) in moves.iter().enumerate() {
            if let Some(list) = into.get_mut(m.settles_on) {
                list.push(k);
            }
            out_start[m.roll.from + 1] = k + 1;
        }
        // Faces without moves start where the previous face's moves end.
        for f in 1..=faces {
            out_start[f] = out_start[f].max(out_start[f - 1]);
        }
        RightingModel {
            cage,
            limits,
            moves,
            takeoff,
            vertex_pivot_weight: vertex_pivot_weight.max(1.0),
            into,
            out_start,
        }
    }

    /// The quasi-static verdict on move `k`, without its commands (checked
    /// on first use): `feasible` says only that the check passed;
    /// [`RightingModel::feasible`] also asks for the commands.
    ///
    /// Panics when `k` is not an index into `moves`, as indexing does.
    pub fn check(&self, k: usize) -> &Feasibility {
        let m = &self.moves[k];
        m.check
            .get_or_init(|| feasibility::assess_check(&self.cage, &m.roll, &self.limits))
    }

    /// What move `k`'s check gives or, before it is checked, what the
    /// start of its roll says of it (worked out once): a fraction of a
    /// check, enough to prove most moves out of a face with no route
    /// refused, and to rank the rest. Panics as [`RightingModel::check`].
    pub fn outlook(&self, k: usize) -> Outlook {
        let m = &self.moves[k];
        if let Some(check) = m.check.get() {
            return check
                .thrust_fraction
                .map_or(Outlook::Blocked, Outlook::AtLeast);
        }
        *m.outlook
            .get_or_init(|| feasibility::first_angle_outlook(&self.cage, &m.roll, &self.limits))
    }

    /// The moves that start on `face` (indices into `moves`).
    pub fn moves_from(&self, face: usize) -> std::ops::Range<usize> {
        let at = |f: usize| self.out_start.get(f).copied().unwrap_or(self.moves.len());
        at(face)..at(face + 1)
    }

    /// The moves that end on `face` (indices into `moves`).
    pub fn moves_into(&self, face: usize) -> &[usize] {
        self.into.get(face).map_or(&[], Vec::as_slice)
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
        self.shared_commands(k).map(|c| &**c)
    }

    /// [`RightingModel::commands`], shared (for the steps of plans).
    fn shared_commands(&self, k: usize) -> Option<&std::sync::Arc<RotorCommands>> {
        let m = self.moves.get(k)?;
        if m.check.get().is_none() {
            // Not checked yet: check and work out the commands from one
            // table of angle rows. (Another thread may have set either
            // first, with the same answer.)
            let (check, commands) =
                feasibility::check_then_commands(&self.cage, &m.roll, &self.limits);
            let passed = check.feasible;
            let _ = m.check.set(check);
            if passed {
                let _ = m.commands.set(commands.map(std::sync::Arc::new));
            }
        }
        if !self.check(k).feasible {
            return None;
        }
        m.commands
            .get_or_init(|| {
                feasibility::move_commands(&self.cage, &m.roll, &self.limits)
                    .map(std::sync::Arc::new)
            })
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
        self.check(k).feasible && self.moves[k].commands.get().is_none_or(|c| c.is_some())
    }

    /// [`RightingModel::plannable`], without the whole check where the
    /// start of the roll already proves it refused.
    fn plannable_unless_refused(&self, k: usize) -> bool {
        !self.outlook(k).refused(self.limits.torque_margin) && self.plannable(k)
    }

    /// Where the vehicle ends up if left lying on `face`.
    pub fn settle_face(&self, face: usize) -> usize {
        moves::settle(&self.cage, face)
            .last()
            .map_or(face, |r| r.to)
    }
}
