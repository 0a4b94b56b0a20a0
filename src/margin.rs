//! Remaining margin: for every face (or node) of the cage, the impact speed
//! on a surface at which the first member reaches its capacity, with the
//! cage as the log says it is now.
//!
//! The speed comes from the same nonlinear statics and energy balance the
//! impact analysis uses ([`crate::impact`]): the contact load of the strike
//! is followed along the cage's own load-deflection path, once per strike,
//! up to the force at which the first member's utilisation reaches 1; the
//! work done to that point, along the cage path in series with the surface
//! (`F^2 / (2 k_surface)`), is the kinetic energy the cage can take:
//! 1/2 m v^2 = W (Goldsmith, Impact, 1960, spring contact model). No
//! bisection over speeds: one walk per strike, and only the last interval
//! of that walk is refined (regula falsi on the utilisation).
//!
//! The cage as it is now ([`CageCondition`]): a member at REPLACE NOW
//! counts as failed (the cage is grounded: every speed is 0); a member
//! with an open finding (fray, slack, loose end) counts at its capacity
//! times the profile's factor for that kind (`[inspection.derate]`, the
//! product over the distinct kinds open on it); a replaced member counts
//! new. Fatigue damage below the health rules' levels is not derated.

use crate::cage::Cage;
use crate::health::{self, Status};
use crate::impact::{ContactLoad, STANDARD_GRAVITY_M_S2, Strike, surface_stiffness_n_per_m};
use crate::logbook::{FindingKind, Record};
use crate::profile::{Inspection, Profile};
use crate::statics::{Equilibrium, NonlinearModel, StaticsError, Structure, self_stress};
use nalgebra::Vector3;
use serde::Serialize;

/// Intervals the walk takes at least over the path to first failure, so
/// the work integral (trapezoid rule) is fine enough.
const MIN_INTERVALS: f64 = 16.0;
/// Steps the walk may take before it stops looking for a failure.
const MAX_POINTS: usize = 400;
/// The refinement stops when the first utilisation is within this of 1.
const UTILISATION_TOLERANCE: f64 = 1e-6;
/// Regula falsi iterations allowed in the last interval.
const MAX_REFINE: usize = 40;
/// First step of the walk, as a fraction of the smallest member capacity.
const FIRST_STEP: f64 = 0.01;

/// One point of a load path: the contact force, how far the cage has
/// deflected at the contact, and every member's utilisation there.
#[derive(Debug, Clone, PartialEq)]
pub struct PathPoint {
    /// Contact force.
    pub force_n: f64,
    /// Deflection of the cage at the contact, along the contact force.
    pub deflection_m: f64,
    /// Utilisation of every member against its (derated) capacity.
    pub utilisation: Vec<f64>,
}

impl PathPoint {
    /// The most used member and its utilisation (none for no members).
    fn worst(&self) -> Option<(usize, f64)> {
        self.utilisation
            .iter()
            .copied()
            .enumerate()
            .fold(None, |best, (j, u)| match best {
                Some((_, b)) if b >= u => best,
                _ => Some((j, u)),
            })
    }

    fn worst_u(&self) -> f64 {
        self.worst().map_or(0.0, |(_, u)| u)
    }
}

/// Where a walk ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Limit {
    /// A member reached its capacity.
    Member,
    /// The cage found no equilibrium before any member reached capacity
    /// (it may snap through or collapse): the figure is the work up to the
    /// last equilibrium, a lower bound of what the model can say.
    NoEquilibrium,
    /// No member reached capacity within the walk's step allowance: the
    /// figure is the work up to where the walk stopped.
    NotReached,
    /// A member already counts as failed: the cage must not fly.
    Grounded,
}

/// The first failure on a load path, and the impact it takes to get there.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Failure {
    /// Contact force at first failure.
    pub force_n: f64,
    /// Work along the cage path in series with the surface, to that force.
    pub work_j: f64,
    /// Normal impact speed whose kinetic energy equals that work.
    pub speed_m_per_s: f64,
    /// Peak deceleration at that force, F / (m g0), in g.
    pub peak_g: f64,
    /// The member that reaches its capacity first (index into the
    /// structure's members), when one does.
    pub member: Option<usize>,
    /// Why the walk ended.
    pub limit: Limit,
    /// Equilibrium solves the walk spent.
    pub solves: usize,
}

/// Work of one path interval by the trapezoid rule, never negative: the
/// same rule [`crate::impact::energy_balance_force_n`] integrates with.
fn interval_work_j(a: &PathPoint, b: &PathPoint) -> f64 {
    (b.deflection_m - a.deflection_m).max(0.0) * (a.force_n + b.force_n) / 2.0
}

/// Walk a load path from `start` up to the first member failure and read
/// the impact speed off the work done: 1/2 m v^2 = W_cage + F^2 / (2 k_s).
///
/// `solve(state, force)` continues the path from a state below to a new
/// contact force (it is only ever asked for forces above the state's);
/// `first_step_n` is the first force step. The steps follow the linear
/// extrapolation of every member's utilisation towards 1, at least
/// `MIN_INTERVALS` of them over the path; the interval that crosses 1 is
/// refined by regula falsi (Illinois variant) from the state below it.
pub fn walk_to_first_failure<S>(
    start: (S, PathPoint),
    mut solve: impl FnMut(&S, f64) -> Result<(S, PathPoint), StaticsError>,
    first_step_n: f64,
    mass_kg: f64,
    surface_n_per_m: f64,
) -> Result<Failure, StaticsError> {
    let finish = |p: &PathPoint, work_cage_j: f64, member, limit, solves| {
        let work_j = work_cage_j + p.force_n * p.force_n / (2.0 * surface_n_per_m);
        Failure {
            force_n: p.force_n,
            work_j,
            speed_m_per_s: (2.0 * work_j / mass_kg).sqrt(),
            peak_g: p.force_n / (mass_kg * STANDARD_GRAVITY_M_S2),
            member,
            limit,
            solves,
        }
    };
    let (mut s_lo, mut lo) = start;
    if let Some((j, u)) = lo.worst()
        && u >= 1.0
    {
        return Ok(finish(&lo, 0.0, Some(j), Limit::Member, 0));
    }
    let mut work_j = 0.0;
    let mut solves = 0;
    let mut step_n = first_step_n.max(f64::MIN_POSITIVE);
    // Walk until an interval crosses utilisation 1.
    let mut hi = loop {
        if solves >= MAX_POINTS {
            return Ok(finish(&lo, work_j, None, Limit::NotReached, solves));
        }
        let f = lo.force_n + step_n;
        solves += 1;
        let (s, p) = match solve(&s_lo, f) {
            Ok(next) => next,
            Err(StaticsError::NoEquilibrium { reached, .. }) => {
                // Go as far as the solver got, then stop there.
                let mut w = work_j;
                let mut last = lo;
                if reached > last.force_n && reached < f {
                    solves += 1;
                    if let Ok((_, p)) = solve(&s_lo, reached)
                        && p.worst_u() < 1.0
                    {
                        w += interval_work_j(&last, &p);
                        last = p;
                    }
                }
                return Ok(finish(&last, w, None, Limit::NoEquilibrium, solves));
            }
            Err(e) => return Err(e),
        };
        if p.worst_u() >= 1.0 {
            break p;
        }
        // Force at which the first member reaches 1 if every utilisation
        // kept its slope over this step.
        let predicted = lo
            .utilisation
            .iter()
            .zip(&p.utilisation)
            .filter_map(|(&u0, &u1)| {
                let slope = (u1 - u0) / (p.force_n - lo.force_n);
                (slope > 0.0).then(|| p.force_n + (1.0 - u1) / slope)
            })
            .fold(f64::INFINITY, f64::min);
        work_j += interval_work_j(&lo, &p);
        (s_lo, lo) = (s, p);
        step_n = if predicted.is_finite() {
            // Aim a little past the prediction so the crossing is bracketed,
            // but take small enough steps for the work integral.
            let gap = (predicted - lo.force_n) * 1.05;
            gap.min(predicted / MIN_INTERVALS)
                .min(4.0 * step_n)
                .max(1e-9 * lo.force_n.max(first_step_n))
        } else {
            4.0 * step_n
        };
    };
    // Regula falsi on g(F) = max utilisation - 1 over [lo, hi].
    let mut g_lo = lo.worst_u() - 1.0;
    let mut g_hi = hi.worst_u() - 1.0;
    let mut side = 0_i8;
    for _ in 0..MAX_REFINE {
        if g_hi.abs() <= UTILISATION_TOLERANCE
            || hi.force_n - lo.force_n <= 1e-12 * hi.force_n.max(1.0)
        {
            break;
        }
        let f = lo.force_n + (hi.force_n - lo.force_n) * (-g_lo) / (g_hi - g_lo);
        let f = f.clamp(lo.force_n, hi.force_n);
        solves += 1;
        let (s, p) = match solve(&s_lo, f) {
            Ok(next) => next,
            Err(StaticsError::NoEquilibrium { .. }) => {
                return Ok(finish(&lo, work_j, None, Limit::NoEquilibrium, solves));
            }
            Err(e) => return Err(e),
        };
        let g = p.worst_u() - 1.0;
        if g >= 0.0 {
            (hi, g_hi) = (p, g);
            if side == 1 {
                g_lo /= 2.0;
            }
            side = 1;
        } else {
            if g.abs() <= UTILISATION_TOLERANCE {
                // Converged from below: this point is the failure.
                let w = work_j + interval_work_j(&lo, &p);
                let member = p.worst().map(|(j, _)| j);
                return Ok(finish(&p, w, member, Limit::Member, solves));
            }
            work_j += interval_work_j(&lo, &p);
            (s_lo, lo, g_lo) = (s, p, g);
            if side == -1 {
                g_hi /= 2.0;
            }
            side = -1;
        }
    }
    let w = work_j + interval_work_j(&lo, &hi);
    let member = hi.worst().map(|(j, _)| j);
    Ok(finish(&hi, w, member, Limit::Member, solves))
}

/// The cage as the log says it is now: each member's capacity factor and
/// the members that count as failed.
#[derive(Debug, Clone, PartialEq)]
pub struct CageCondition {
    /// Capacity factor per member (cage member order), in (0, 1].
    pub capacity_factor: Vec<f64>,
    /// Members at REPLACE NOW (indices), which count as failed.
    pub failed: Vec<usize>,
}

impl CageCondition {
    /// Every member new.
    pub fn new_cage(cage: &Cage) -> CageCondition {
        CageCondition {
            capacity_factor: vec![1.0; cage.members.len()],
            failed: Vec::new(),
        }
    }

    /// The condition from the log's records: REPLACE NOW members failed;
    /// open findings derated by `rules.derate` (the product over the
    /// distinct kinds open on a member); a replacement resets a member.
    pub fn from_log(records: &[Record], cage: &Cage, rules: &Inspection) -> CageCondition {
        let report = health::assess(records, cage, rules);
        let open = health::open_findings(records, cage, rules);
        let capacity_factor = open
            .iter()
            .map(|kinds| {
                kinds
                    .iter()
                    .map(|k| match k {
                        FindingKind::Fray => rules.derate.fray,
                        FindingKind::Slack => rules.derate.slack,
                        FindingKind::LooseEnd => rules.derate.loose_end,
                        // Cuts and cracks make the member failed below;
                        // `ok` is never open.
                        FindingKind::Cut | FindingKind::Crack | FindingKind::Ok => 1.0,
                    })
                    .product()
            })
            .collect();
        let failed = report
            .members
            .iter()
            .enumerate()
            .filter(|(_, m)| m.status == Status::ReplaceNow)
            .map(|(j, _)| j)
            .collect();
        CageCondition {
            capacity_factor,
            failed,
        }
    }
}

/// What a strike can take: the margin of one face or node.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StrikeMargin {
    /// The face or node struck.
    pub strike: Strike,
    /// Its id (`F1..` or `N1..`).
    pub id: String,
    /// Id of the member that fails first, when one does.
    pub first_member: Option<String>,
    /// The first failure on its load path.
    pub failure: Failure,
}

/// A member counted below its new capacity.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Derated {
    /// Member id.
    pub id: String,
    /// Capacity factor, in (0, 1).
    pub factor: f64,
}

/// The remaining margin of the whole cage on one surface.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MarginTable {
    /// Surface preset name.
    pub surface: String,
    /// Its contact stiffness.
    pub surface_n_per_m: f64,
    /// Members that count as failed (ids): the cage must not fly.
    pub grounded_by: Vec<String>,
    /// Capacity factor per member (cage member order).
    pub capacity_factor: Vec<f64>,
    /// The members counted below their new capacity, in member order.
    pub derated: Vec<Derated>,
    /// Every face, in face order.
    pub faces: Vec<StrikeMargin>,
    /// Every node, in node order, when asked for.
    pub nodes: Vec<StrikeMargin>,
}

impl MarginTable {
    /// True when a member counts as failed.
    pub fn grounded(&self) -> bool {
        !self.grounded_by.is_empty()
    }

    /// What the pre-flight margin item needs: the weakest face, its speed
    /// and the members that ground the cage; None for a cage without faces.
    pub fn summary(&self) -> Option<crate::preflight::MarginSummary> {
        self.weakest_face()
            .map(|w| crate::preflight::MarginSummary {
                weakest_face: w.id.clone(),
                speed_m_per_s: w.failure.speed_m_per_s,
                grounded_by: self.grounded_by.clone(),
            })
    }

    /// The face that takes the lowest speed (the first of equals).
    pub fn weakest_face(&self) -> Option<&StrikeMargin> {
        self.faces.iter().fold(None, |best, m| match best {
            Some(b) if b.failure.speed_m_per_s <= m.failure.speed_m_per_s => Some(b),
            _ => Some(m),
        })
    }
}

/// Which strikes to compute.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Strikes {
    /// Every face.
    Faces,
    /// Every face and every node.
    FacesAndNodes,
}

/// The remaining margin of `cage` in `condition` on the named surface (the
/// profile's default when `None`).
pub fn margin_table(
    cage: &Cage,
    profile: &Profile,
    condition: &CageCondition,
    surface: Option<&str>,
    strikes: Strikes,
) -> Result<MarginTable, StaticsError> {
    let (surface, k_s) = surface_stiffness_n_per_m(profile, surface)?;
    let mut structure = Structure::from_cage(cage, profile);
    let capacity_factor: Vec<f64> = (0..structure.bars.len())
        .map(|j| condition.capacity_factor.get(j).copied().unwrap_or(1.0))
        .collect();
    for (bar, f) in structure.bars.iter_mut().zip(&capacity_factor) {
        bar.capacity_n *= f;
    }
    let mut failed = condition.failed.clone();
    failed.sort_unstable();
    failed.dedup();
    let grounded_by: Vec<String> = failed.iter().map(|&j| structure.member_id(j)).collect();
    let mut targets: Vec<(Strike, String)> = cage
        .faces
        .iter()
        .enumerate()
        .map(|(i, f)| (Strike::Face(i), f.id.clone()))
        .collect();
    if strikes == Strikes::FacesAndNodes {
        targets.extend(
            cage.nodes
                .iter()
                .enumerate()
                .map(|(i, n)| (Strike::Node(i), n.id.clone())),
        );
    }
    let results: Vec<StrikeMargin> = if let Some(&first) = failed.first() {
        let grounded = Failure {
            force_n: 0.0,
            work_j: 0.0,
            speed_m_per_s: 0.0,
            peak_g: 0.0,
            member: Some(first),
            limit: Limit::Grounded,
            solves: 0,
        };
        targets
            .into_iter()
            .map(|(strike, id)| StrikeMargin {
                strike,
                id,
                first_member: Some(structure.member_id(first)),
                failure: grounded.clone(),
            })
            .collect()
    } else {
        let ss = self_stress(&structure, profile.string.pretension_n)?;
        let model = NonlinearModel::new(&structure, &ss.prestress_n);
        let unloaded = model.unloaded();
        let first_step_n = FIRST_STEP
            * structure
                .bars
                .iter()
                .map(|b| b.capacity_n)
                .fold(f64::INFINITY, f64::min)
                .min(1e9);
        targets
            .into_iter()
            .map(|(strike, id)| {
                let load = ContactLoad::new(cage, strike)?;
                let load_fn = |pos: &[Vector3<f64>], f: f64, out: &mut [Vector3<f64>]| {
                    load.forces(pos, f, out)
                };
                let point = |st: &Equilibrium| PathPoint {
                    force_n: st.load,
                    deflection_m: load.displacement_m(&model.deformation(&st.pos_m)),
                    utilisation: structure
                        .bars
                        .iter()
                        .zip(&st.force_n)
                        .map(|(b, &t)| b.utilisation(t))
                        .collect(),
                };
                let start = (unloaded.clone(), point(&unloaded));
                let failure = walk_to_first_failure(
                    start,
                    |from, f| {
                        let st = model.solve(from, &load_fn, f)?;
                        let p = point(&st);
                        Ok((st, p))
                    },
                    first_step_n,
                    cage.mass_kg,
                    k_s,
                )?;
                Ok(StrikeMargin {
                    strike,
                    id,
                    first_member: failure.member.map(|j| structure.member_id(j)),
                    failure,
                })
            })
            .collect::<Result<_, StaticsError>>()?
    };
    let (faces, nodes) = results
        .into_iter()
        .partition(|m| matches!(m.strike, Strike::Face(_)));
    let derated = capacity_factor
        .iter()
        .enumerate()
        .filter(|(_, f)| **f < 1.0)
        .map(|(j, &factor)| Derated {
            id: structure.member_id(j),
            factor,
        })
        .collect();
    Ok(MarginTable {
        surface,
        surface_n_per_m: k_s,
        grounded_by,
        capacity_factor,
        derated,
        faces,
        nodes,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::MemberKind;
    use crate::impact::{ImpactInput, analyse_impact};
    use crate::logbook::{Event, FindingEvent, ReplacementEvent};
    use crate::statics::Bar;
    use approx::assert_relative_eq;
    use std::sync::OnceLock;

    /// The undamaged demo table, computed once for the tests that need it.
    fn undamaged() -> &'static MarginTable {
        static TABLE: OnceLock<MarginTable> = OnceLock::new();
        TABLE.get_or_init(|| {
            let (p, c) = crate::cage::demo_cage();
            margin_table(&c, &p, &CageCondition::new_cage(&c), None, Strikes::Faces).unwrap()
        })
    }

    fn rec(seq: u64, event: Event) -> Record {
        Record {
            seq,
            time: format!("2026-12-02T04:{:02}:00Z", seq % 60),
            operator: "test".into(),
            event,
        }
    }

    fn finding(seq: u64, member: &str, kind: FindingKind) -> Record {
        rec(
            seq,
            Event::Finding(FindingEvent {
                member: member.into(),
                kind,
                note: None,
            }),
        )
    }

    fn replacement(seq: u64, member: &str) -> Record {
        rec(
            seq,
            Event::Replacement(ReplacementEvent {
                member: member.into(),
                part: None,
                note: None,
            }),
        )
    }

    #[test]
    fn one_string_in_series_with_the_surface_matches_the_hand_calculation() {
        // Hand-worked case (Goldsmith, Impact, 1960, spring contact model:
        // a mass on linear springs in series, 1/2 m v^2 = F^2 / (2 k_eff)).
        // One string, EA = 30 000 N, L = 0.2 m, no prestress: k_string =
        // EA / L = 150 000 N/m. Surface k_s = 150 000 N/m, so k_eff =
        // 1 / (1/150 000 + 1/150 000) = 75 000 N/m. Breaking load 300 N:
        // the string fails at F = 300 N, W = 300^2 / (2 * 75 000) = 0.6 J,
        // and a mass of 1.2 kg carries 0.6 J at v = sqrt(2 * 0.6 / 1.2)
        // = 1.0 m/s; peak 300 / (1.2 * 9.80665) = 25.493 g.
        // The path is the real nonlinear statics: two nodes pulled apart.
        let s = Structure {
            pos_m: vec![Vector3::zeros(), Vector3::new(0.2, 0.0, 0.0)],
            bars: vec![Bar {
                nodes: [1, 0],
                kind: MemberKind::String,
                ea_n: 30_000.0,
                length_m: 0.2,
                capacity_n: 300.0,
            }],
        };
        let model = NonlinearModel::new(&s, &[0.0]);
        let pull = |_: &[Vector3<f64>], f: f64, out: &mut [Vector3<f64>]| {
            out[0] = Vector3::new(-f, 0.0, 0.0);
            out[1] = Vector3::new(f, 0.0, 0.0);
        };
        let point = |st: &Equilibrium| PathPoint {
            force_n: st.load,
            deflection_m: (st.pos_m[1] - st.pos_m[0]).norm() - 0.2,
            utilisation: vec![s.bars[0].utilisation(st.force_n[0])],
        };
        let unloaded = model.unloaded();
        let start = (unloaded.clone(), point(&unloaded));
        let f = walk_to_first_failure(
            start,
            |from, f| {
                let st = model.solve(from, &pull, f)?;
                let p = point(&st);
                Ok((st, p))
            },
            3.0,
            1.2,
            150_000.0,
        )
        .unwrap();
        assert_eq!(f.limit, Limit::Member);
        assert_eq!(f.member, Some(0));
        assert_relative_eq!(f.force_n, 300.0, max_relative = 1e-6);
        assert_relative_eq!(f.work_j, 0.6, max_relative = 1e-6);
        assert_relative_eq!(f.speed_m_per_s, 1.0, max_relative = 1e-6);
        assert_relative_eq!(f.peak_g, 25.493, max_relative = 1e-4);
    }

    #[test]
    fn a_path_that_never_fails_or_loses_equilibrium_says_so() {
        // Analytic paths: a member whose utilisation stays at 0.5 is never
        // reached; a path that has no equilibrium past 10 N stops there,
        // with the work of a linear spring of 1000 N/m up to 10 N plus the
        // surface's: 10^2/2000 + 10^2/(2 * 1000) = 0.1 J.
        let flat = |_: &(), f: f64| {
            Ok((
                (),
                PathPoint {
                    force_n: f,
                    deflection_m: f / 1000.0,
                    utilisation: vec![0.5],
                },
            ))
        };
        let start = || {
            (
                (),
                PathPoint {
                    force_n: 0.0,
                    deflection_m: 0.0,
                    utilisation: vec![0.5],
                },
            )
        };
        let f = walk_to_first_failure(start(), flat, 1.0, 1.0, 1000.0).unwrap();
        assert_eq!((f.limit, f.member), (Limit::NotReached, None));
        let lost = |_: &(), f: f64| {
            if f > 10.0 + 1e-9 {
                return Err(StaticsError::NoEquilibrium {
                    load: f,
                    reached: 10.0,
                    residual_n: 1.0,
                    iterations: 1,
                });
            }
            Ok((
                (),
                PathPoint {
                    force_n: f,
                    deflection_m: f / 1000.0,
                    utilisation: vec![f / 1000.0],
                },
            ))
        };
        let f = walk_to_first_failure(start(), lost, 5.0, 1.0, 1000.0).unwrap();
        assert_eq!((f.limit, f.member), (Limit::NoEquilibrium, None));
        assert_relative_eq!(f.work_j, 0.1, max_relative = 1e-9);
    }

    #[test]
    fn undamaged_demo_agrees_with_the_impact_analysis_at_that_speed() {
        // The margin speed fed back into the impact analysis (energy
        // balance on the same surface) must load the first member to its
        // capacity, and 1% slower must leave every member below it. The
        // two integrate the same path on different grids: seen within
        // 0.2% of utilisation on the demo (invented data).
        let (p, c) = crate::cage::demo_cage();
        let t = undamaged();
        assert!(!t.grounded());
        assert_eq!(t.faces.len(), c.faces.len());
        for m in &t.faces {
            assert_eq!(m.failure.limit, Limit::Member, "{}", m.id);
            let v = m.failure.speed_m_per_s;
            let at = |v: f64| {
                let input = ImpactInput::Speed {
                    speed_m_per_s: v,
                    surface: None,
                };
                analyse_impact(&c, &p, m.strike, &input).unwrap()
            };
            let r = at(v);
            let (j, u) = r
                .members
                .iter()
                .map(|x| (x.member, x.utilisation))
                .fold((0, 0.0), |b, x| if x.1 > b.1 { x } else { b });
            assert!((u - 1.0).abs() < 5e-3, "{}: utilisation {u}", m.id);
            assert_eq!(Some(j), m.failure.member, "{}", m.id);
            let below = at(0.99 * v);
            assert!(
                below.members.iter().all(|x| x.utilisation < 1.0),
                "{} at 0.99 v",
                m.id
            );
            assert_relative_eq!(
                m.failure.peak_g,
                m.failure.force_n / (c.mass_kg * STANDARD_GRAVITY_M_S2)
            );
        }
        let w = t.weakest_face().unwrap();
        assert!(
            t.faces
                .iter()
                .all(|m| m.failure.speed_m_per_s >= w.failure.speed_m_per_s)
        );
    }

    #[test]
    fn a_fray_lowers_the_faces_it_governs_and_a_replacement_restores_them() {
        let (p, c) = crate::cage::demo_cage();
        let base = undamaged();
        let weakest = base.weakest_face().unwrap();
        let member = weakest.first_member.clone().unwrap();
        let mut log = vec![finding(1, &member, FindingKind::Fray)];
        let cond = CageCondition::from_log(&log, &c, &p.inspection);
        let j = c.member_index(&member).unwrap();
        assert_relative_eq!(cond.capacity_factor[j], p.inspection.derate.fray);
        assert!(cond.failed.is_empty());
        let frayed = margin_table(&c, &p, &cond, None, Strikes::Faces).unwrap();
        assert_eq!(frayed.derated.len(), 1);
        for (a, b) in base.faces.iter().zip(&frayed.faces) {
            // No face's figure rises (a weaker member cannot make the cage
            // stronger); small path-integration differences aside.
            assert!(
                b.failure.speed_m_per_s <= a.failure.speed_m_per_s * (1.0 + 1e-9),
                "{} rose: {} -> {}",
                a.id,
                a.failure.speed_m_per_s,
                b.failure.speed_m_per_s
            );
            if a.first_member.as_deref() == Some(member.as_str()) {
                assert!(
                    b.failure.speed_m_per_s < 0.9 * a.failure.speed_m_per_s,
                    "{} governed by {member}: {} -> {}",
                    a.id,
                    a.failure.speed_m_per_s,
                    b.failure.speed_m_per_s
                );
            }
        }
        log.push(replacement(2, &member));
        let cond = CageCondition::from_log(&log, &c, &p.inspection);
        assert_eq!(cond, CageCondition::new_cage(&c));
        let restored = margin_table(&c, &p, &cond, None, Strikes::Faces).unwrap();
        assert_eq!(&restored, base);
    }

    #[test]
    fn findings_derate_by_kind_and_replace_now_grounds_the_cage() {
        let (p, c) = crate::cage::demo_cage();
        let d = p.inspection.derate;
        let idx = |id: &str| c.member_index(id).unwrap();
        let log = vec![
            finding(1, "S1", FindingKind::Slack),
            finding(2, "S1", FindingKind::Ok),
            finding(3, "S2", FindingKind::Fray),
            finding(4, "S2", FindingKind::LooseEnd),
            finding(5, "S2", FindingKind::Fray),
            finding(6, "S3", FindingKind::LooseEnd),
        ];
        let cond = CageCondition::from_log(&log, &c, &p.inspection);
        // Slack put right (ok): new. A fray stays and compounds with a loose
        // end (the product over distinct kinds; the second fray is the same
        // defect recorded again).
        assert_relative_eq!(cond.capacity_factor[idx("S1")], 1.0);
        assert_relative_eq!(cond.capacity_factor[idx("S2")], d.fray * d.loose_end);
        assert_relative_eq!(cond.capacity_factor[idx("S3")], d.loose_end);
        assert!(cond.failed.is_empty());

        // A cut is REPLACE NOW: the member counts as failed and the cage
        // must not fly: every speed 0, the member named.
        let mut log = log;
        log.push(finding(7, "S4", FindingKind::Cut));
        let cond = CageCondition::from_log(&log, &c, &p.inspection);
        assert_eq!(cond.failed, vec![idx("S4")]);
        let t = margin_table(&c, &p, &cond, Some("concrete"), Strikes::FacesAndNodes).unwrap();
        assert!(t.grounded());
        assert_eq!(t.grounded_by, vec!["S4".to_string()]);
        assert_eq!(t.faces.len(), c.faces.len());
        assert_eq!(t.nodes.len(), c.nodes.len());
        for m in t.faces.iter().chain(&t.nodes) {
            assert_eq!(m.failure.speed_m_per_s, 0.0);
            assert_eq!(m.failure.limit, Limit::Grounded);
            assert_eq!(m.first_member.as_deref(), Some("S4"));
        }
        // Unknown surface: an error naming the known ones.
        assert!(matches!(
            margin_table(&c, &p, &cond, Some("ice"), Strikes::Faces),
            Err(StaticsError::UnknownSurface { .. })
        ));
    }

    #[test]
    fn derate_factors_come_from_the_profile_and_are_checked() {
        // Defaults: conservative planning values, from memory.
        let p = crate::profile::Profile::demo().unwrap();
        assert_eq!(
            (
                p.inspection.derate.fray,
                p.inspection.derate.slack,
                p.inspection.derate.loose_end
            ),
            (0.5, 0.8, 0.8)
        );
        let text = format!(
            "{}\n[inspection.derate]\nfray = 0.4\nloose_end = 1.0\n",
            crate::profile::DEMO_PROFILE_TOML
        );
        let p = crate::profile::Profile::parse(&text, "t.toml").unwrap();
        assert_eq!(
            (
                p.inspection.derate.fray,
                p.inspection.derate.slack,
                p.inspection.derate.loose_end
            ),
            (0.4, 0.8, 1.0)
        );
        for bad in ["fray = 0.0", "slack = 1.5", "loose_end = -0.1", "cut = 0.5"] {
            let text = format!(
                "{}\n[inspection.derate]\n{bad}\n",
                crate::profile::DEMO_PROFILE_TOML
            );
            let e = crate::profile::Profile::parse(&text, "t.toml").unwrap_err();
            let key = bad.split(' ').next().unwrap();
            assert!(e.to_string().contains(key), "{bad}: {e}");
        }
    }
}
