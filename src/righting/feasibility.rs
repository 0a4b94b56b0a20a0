//! Quasi-static feasibility of a roll, and the rotor commands that carry
//! it.
//!
//! During a roll about axis u through p, gravity's moment about u is
//! m g u . ((c - p) x g_b(b)), which has the form m g r cos(g0 + b): it
//! resists until the centre of mass passes over the pivot (the tip angle),
//! then helps. A rotor fixed to the body has the constant moment arm
//! c_k = u . ((r_k - p) x t_k). At each checked roll angle the thrusts
//! must meet the contact conditions of [`super::contact`] (no lift-off, no
//! sliding, the reaction between the two nodes of an edge, the sideways
//! balance on the single node of a vertex pivot). The best moment the
//! rotors can give there is a small linear programme (LP): maximise
//! sum c_k T_k under those conditions. The move is feasible when
//! available / needed >= the torque margin at every angle up to the tip
//! angle (checked every [`ANGLE_STEP_DEG`] and at both ends; the tip angle
//! itself is exact, from the closed form of the gravity moment), and when
//! beyond the tip, where gravity helps, the conditions can still be met
//! without the rotors pushing back harder than gravity helps: a vertex
//! pivot stays on one point the whole way down, and an edge roll must not
//! swing about one of its nodes.
//!
//! The LPs are solved with the pure-Rust `microlp` crate (maintained, no
//! system library, and the problems are tiny) wherever the screen
//! ([`super::screen`]) cannot prove the answer itself: a best moment whose
//! proved bounds meet to round-off, or a least-thrust setting proved to be
//! the *only* optimum (which any correct solver must return), is taken
//! from the screen; the angles of a roll start from the previous angle's
//! tight constraints. The agreement tests hold both paths to round-off on
//! every move of the demo and of geodesic cages. Every answer is checked
//! against the conditions here; an answer that fails the check, or a
//! solver error, counts as "no thrust can do it", erring on the side of
//! "cannot". (An earlier exact greedy fill for rotors sharing one axis no
//! longer applies: the conditions on the reaction and the sideways balance
//! bind single rotors, not only the total thrust.)
//!
//! **Rotor commands.** For a feasible move the least total thrust
//! (sum |T_k|) that gives at least margin x needed moment where gravity
//! resists, and at least the needed (negative) moment where it helps, with
//! every condition met: first one setting for every checked angle at once
//! (one more LP); where none exists, a schedule by roll angle, each entry
//! the least-thrust setting at its angle, kept over the following angles
//! for as long as it still meets them. The sideways balance of a vertex
//! pivot is an equality whose gravity part is constant while the rotors'
//! part turns with the roll, so a vertex pivot needs a changing setting
//! (unless the centre of mass lies exactly over the pivot axis).

use super::contact::{AngleRows, Row, rows_at};
pub use super::contact::{
    Condition, FRICTION_SIDES, gravity_at, moment_arms_m, resisting_moment_nm,
};
use super::moves::Roll;
use super::screen::{self, Screen};
use crate::cage::Cage;
use crate::profile::Rotor;
use crate::sample::STANDARD_GRAVITY_M_S2;

/// Angular step of the check along the roll, degrees.
pub const ANGLE_STEP_DEG: f64 = 0.5;

/// Settings the feasibility check needs from the profile.
#[derive(Debug, Clone, PartialEq)]
pub struct Limits {
    /// Rotors, body frame.
    pub rotors: Vec<Rotor>,
    /// Coulomb friction coefficient, cage on ground.
    pub friction_coefficient: f64,
    /// Required ratio available / needed.
    pub torque_margin: f64,
}

/// One rotor setting in force from a roll angle on.
#[derive(Debug, Clone, PartialEq)]
pub struct ScheduleEntry {
    /// Roll angle from which the setting applies, degrees.
    pub from_deg: f64,
    /// Thrust per rotor in profile order, newtons (negative: reversed).
    pub thrust_n: Vec<f64>,
}

/// What to set the rotors to for one move.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct RotorCommands {
    /// The setting to apply at the start of the roll, per rotor in profile
    /// order, newtons (negative: reversed).
    pub thrust_n: Vec<f64>,
    /// When one setting cannot hold the whole roll: the settings by roll
    /// angle, the first from 0 deg. Empty when `thrust_n` holds throughout.
    pub schedule: Vec<ScheduleEntry>,
}

impl RotorCommands {
    /// The setting in force at `angle_deg` into the roll.
    pub fn at(&self, angle_deg: f64) -> &[f64] {
        self.schedule
            .iter()
            .rev()
            .find(|e| e.from_deg <= angle_deg + 1e-9)
            .map_or(&self.thrust_n, |e| &e.thrust_n)
    }
}

/// A thrust as a share of the rotor's limit in its direction: positive
/// forward (over `max_thrust_n`), negative reversed (over
/// `reverse_thrust_n`); 0 when the limit is 0.
pub fn share(thrust_n: f64, rotor: &Rotor) -> f64 {
    let limit = if thrust_n >= 0.0 {
        rotor.max_thrust_n
    } else {
        rotor.reverse_thrust_n
    };
    if limit > 0.0 { thrust_n / limit } else { 0.0 }
}

/// The verdict on one roll.
#[derive(Debug, Clone, PartialEq)]
pub struct Feasibility {
    /// Whether available / needed >= margin over the whole resisted part,
    /// the conditions can be met over the rest, and commands were found.
    pub feasible: bool,
    /// needed / available at the worst angle; `None` when no thrust within
    /// the rotors' limits can carry the move.
    pub thrust_fraction: Option<f64>,
    /// Roll angle (from the start) where the ratio is worst.
    pub worst_angle_deg: f64,
    /// Gravity's resisting moment at the worst angle, N m.
    pub needed_nm: f64,
    /// Best rotor moment at the worst angle, N m.
    pub available_nm: f64,
    /// Angle at which the centre of mass passes over the pivot (gravity
    /// stops resisting); at least the roll angle when it never does.
    pub tip_angle_deg: f64,
    /// Where no thrust can carry the move: the one condition without which
    /// the rotors could (`None` when there is no single one, or the move
    /// is not blocked).
    pub blocked_by: Option<Condition>,
    /// The rotor commands, for a feasible move.
    pub commands: Option<RotorCommands>,
}

/// Angle (degrees) at which the centre of mass passes over the pivot: the
/// first zero of the resisting moment A cos b + B sin b.
pub fn tip_angle_deg(cage: &Cage, roll: &Roll) -> f64 {
    let a = resisting_moment_nm(cage, roll, 0.0);
    let b = resisting_moment_nm(cage, roll, std::f64::consts::FRAC_PI_2);
    if a <= 0.0 {
        return 0.0;
    }
    // a cos x + b sin x = 0  ->  first positive root.
    let x = (a).atan2(-b);
    x.to_degrees()
}

/// The angles the check visits, degrees: evenly up to the tip angle (both
/// ends included), then evenly on to the end of the roll.
pub fn checked_angles_deg(cage: &Cage, roll: &Roll) -> Vec<f64> {
    let tip = tip_angle_deg(cage, roll);
    let end = tip.min(roll.angle_deg);
    let steps = (end / ANGLE_STEP_DEG).ceil().max(1.0) as usize;
    let mut out: Vec<f64> = (0..=steps).map(|i| end * i as f64 / steps as f64).collect();
    if roll.angle_deg > end + 1e-9 {
        let rest = roll.angle_deg - end;
        let n = (rest / ANGLE_STEP_DEG).ceil().max(1.0) as usize;
        out.extend((1..=n).map(|i| end + rest * i as f64 / n as f64));
    }
    out
}

/// The constraint table of a roll: one [`AngleRows`] per checked angle.
pub fn table(cage: &Cage, roll: &Roll, limits: &Limits) -> Vec<AngleRows> {
    checked_angles_deg(cage, roll)
        .iter()
        .map(|b| {
            rows_at(
                cage,
                roll,
                &limits.rotors,
                limits.friction_coefficient,
                b.to_radians(),
            )
        })
        .collect()
}

/// The moment the rotors must give at an angle where gravity's resisting
/// moment is `needed_nm`: margin times it while gravity resists, and no
/// more than gravity's help (a negative need) once it helps.
pub fn required_nm(needed_nm: f64, margin: f64) -> f64 {
    if needed_nm > 0.0 {
        needed_nm * margin
    } else {
        needed_nm
    }
}

/// Tolerance of the checks on an LP answer, newtons or newton metres.
pub fn tolerance(cage: &Cage) -> f64 {
    1e-7 * (1.0 + cage.mass_kg * STANDARD_GRAVITY_M_S2)
}

/// Whether the setting `t` meets every condition at `rows` and gives at
/// least the required moment there.
pub fn meets(rows: &AngleRows, limits: &Limits, t: &[f64], tol: f64) -> bool {
    rows.admits(&limits.rotors, t, tol)
        && rows.moment_nm(t) >= required_nm(rows.needed_nm, limits.torque_margin) - tol
}

/// Best rotor moment about the roll axis at one angle and the thrusts
/// that give it; `None` when no thrust within the limits meets the
/// conditions (or the solver's answer fails the check).
pub fn best_moment(rows: &AngleRows, rotors: &[Rotor], tol: f64) -> Option<(f64, Vec<f64>)> {
    use microlp::{ComparisonOp, OptimizationDirection, Problem};
    if rotors.is_empty() {
        return rows.admits(rotors, &[], tol).then(|| (0.0, Vec::new()));
    }
    let mut lp = Problem::new(OptimizationDirection::Maximize);
    let vars: Vec<_> = rotors
        .iter()
        .zip(&rows.arms_m)
        .map(|(r, &c)| lp.add_var(c, (-r.reverse_thrust_n, r.max_thrust_n)))
        .collect();
    for row in &rows.rows {
        let expr: Vec<_> = vars
            .iter()
            .copied()
            .zip(row.coeffs.iter().copied())
            .collect();
        let op = if row.equality {
            ComparisonOp::Eq
        } else {
            ComparisonOp::Le
        };
        lp.add_constraint(expr.as_slice(), op, row.rhs);
    }
    let outcome = lp.solve().ok()?;
    let sol = outcome.solution()?;
    let t: Vec<f64> = vars.iter().map(|v| sol.var_value(*v)).collect();
    rows.admits(rotors, &t, tol)
        .then(|| (rows.moment_nm(&t), t))
}

/// The least total thrust (sum |T_k|) that meets every condition and the
/// required moment at all of `rows` at once; `None` when there is none.
///
/// Where the screen proves the optimum and that it is the only one
/// ([`least_thrust_proved`]), that is the answer: any correct solver must
/// give the same setting up to round-off. Otherwise the general solver
/// ([`least_thrust_lp`]) answers, as it always did.
pub fn least_thrust(rows: &[&AngleRows], limits: &Limits, tol: f64) -> Option<Vec<f64>> {
    least_thrust_proved(rows, limits, tol).or_else(|| least_thrust_lp(rows, limits, tol))
}

/// Rounds of adding violated angles before [`least_thrust_proved`] gives
/// up and leaves the programme to the general solver.
const MAX_ROUNDS: usize = 8;

/// The least-thrust programme of [`least_thrust_lp`] in the same split
/// form, for the screen: T = P - Q with `0 <= P <= max`, `0 <= Q <=
/// reverse`, objective `max -(sum P + sum Q)`, the inequalities aimed
/// `inside` as the LP aims them, and one row per angle for the moment.
struct SplitLp {
    cost: Vec<f64>,
    lo: Vec<f64>,
    hi: Vec<f64>,
    /// The rows of each angle, in the order of the angles.
    rows: Vec<Vec<Row>>,
}

impl SplitLp {
    fn new(angles: &[&AngleRows], limits: &Limits, tol: f64) -> SplitLp {
        let n = limits.rotors.len();
        let inside = tol * 1e-2;
        let split = |coeffs: &[f64], sign: f64| -> Vec<f64> {
            coeffs
                .iter()
                .map(|a| sign * a)
                .chain(coeffs.iter().map(|a| -sign * a))
                .collect()
        };
        let rows = angles
            .iter()
            .map(|ar| {
                let mut out: Vec<Row> = ar
                    .rows
                    .iter()
                    .map(|r| Row {
                        coeffs: split(&r.coeffs, 1.0).into(),
                        rhs: if r.equality { r.rhs } else { r.rhs - inside },
                        equality: r.equality,
                        condition: r.condition,
                    })
                    .collect();
                // moment >= required + inside
                //   <=>  -arms . (P - Q) <= -(required + inside)
                out.push(Row {
                    coeffs: split(&ar.arms_m, -1.0).into(),
                    rhs: -(required_nm(ar.needed_nm, limits.torque_margin) + inside),
                    equality: false,
                    condition: Condition::LiftOff,
                });
                out
            })
            .collect();
        SplitLp {
            cost: vec![-1.0; 2 * n],
            lo: vec![0.0; 2 * n],
            hi: limits
                .rotors
                .iter()
                .map(|r| r.max_thrust_n)
                .chain(limits.rotors.iter().map(|r| r.reverse_thrust_n))
                .collect(),
            rows,
        }
    }

    /// The thrusts of a split answer, with the LP path's rounding of
    /// dust to zero.
    fn thrusts(x: &[f64]) -> Vec<f64> {
        let n = x.len() / 2;
        (0..n)
            .map(|k| {
                let v = x[k] - x[n + k];
                if v.abs() < 1e-9 { 0.0 } else { v }
            })
            .collect()
    }
}

/// The least-thrust programme of [`least_thrust_lp`], solved by the screen
/// and kept only when its optimum is proved unique and the setting passes
/// [`meets`] at every angle; `None` when not proved.
///
/// Many angles are solved by adding them as needed: start from the first,
/// middle and last, and add every angle whose rows the answer breaks. An
/// answer that meets every angle and is the only optimum of a programme
/// with fewer rows is the only optimum of the whole one (its feasible set
/// is smaller and still holds the answer).
pub fn least_thrust_proved(rows: &[&AngleRows], limits: &Limits, tol: f64) -> Option<Vec<f64>> {
    least_thrust_vertex(rows, limits, tol).map(|(t, _)| t)
}

/// [`least_thrust_proved`] with the tight set of the answer (empty unless
/// every angle was in the final programme and the vertex is
/// non-degenerate).
fn least_thrust_vertex(
    rows: &[&AngleRows],
    limits: &Limits,
    tol: f64,
) -> Option<(Vec<f64>, Vec<screen::Tight>)> {
    if limits.rotors.is_empty() || rows.is_empty() {
        return None;
    }
    let lp = SplitLp::new(rows, limits, tol);
    let mut chosen: Vec<bool> = vec![false; rows.len()];
    for i in [0, rows.len() / 2, rows.len() - 1] {
        chosen[i] = true;
    }
    let hair = tol * 1e-2;
    for _ in 0..MAX_ROUNDS {
        let sub: Vec<Row> = lp
            .rows
            .iter()
            .zip(&chosen)
            .filter(|(_, c)| **c)
            .flat_map(|(r, _)| r.iter().cloned())
            .collect();
        let vertex = screen::unique_optimum(&lp.cost, &sub, &lp.lo, &lp.hi, tol)?;
        let mut broken = false;
        for (i, rs) in lp.rows.iter().enumerate() {
            if !chosen[i]
                && rs.iter().any(|r| {
                    let e = r.excess(&vertex.x);
                    if r.equality { e.abs() > hair } else { e > hair }
                })
            {
                chosen[i] = true;
                broken = true;
            }
        }
        if broken {
            continue;
        }
        let t = SplitLp::thrusts(&vertex.x);
        let tight = if chosen.iter().all(|c| *c) {
            vertex.tight
        } else {
            Vec::new()
        };
        return rows
            .iter()
            .all(|r| meets(r, limits, &t, tol))
            .then_some((t, tight));
    }
    None
}

/// The least-thrust setting at one angle, trying first the tight set of
/// the previous angle's answer (`hint`, updated), then the screen, then
/// the general solver: the same answer as [`least_thrust`] at that angle.
fn least_thrust_at(
    rows: &AngleRows,
    limits: &Limits,
    tol: f64,
    hint: &mut Vec<screen::Tight>,
) -> Option<Vec<f64>> {
    if !hint.is_empty() && !limits.rotors.is_empty() {
        let lp = SplitLp::new(&[rows], limits, tol);
        if let Some(x) = screen::unique_optimum_at(&lp.cost, &lp.rows[0], &lp.lo, &lp.hi, tol, hint)
        {
            let t = SplitLp::thrusts(&x);
            if meets(rows, limits, &t, tol) {
                return Some(t);
            }
        }
    }
    if let Some((t, tight)) = least_thrust_vertex(&[rows], limits, tol) {
        *hint = tight;
        return Some(t);
    }
    hint.clear();
    least_thrust_lp(&[rows], limits, tol)
}

/// [`least_thrust`] by the general solver alone: the reference the proved
/// answers are checked against, and the answer wherever no proof is made.
pub fn least_thrust_lp(rows: &[&AngleRows], limits: &Limits, tol: f64) -> Option<Vec<f64>> {
    use microlp::{ComparisonOp, OptimizationDirection, Problem};
    let rotors = &limits.rotors;
    let n = rotors.len();
    if n == 0 {
        let none: [f64; 0] = [];
        return rows
            .iter()
            .all(|r| meets(r, limits, &none, tol))
            .then(Vec::new);
    }
    // T_k = P_k - Q_k with P_k, Q_k >= 0: minimising P + Q minimises |T|.
    let mut lp = Problem::new(OptimizationDirection::Minimize);
    let fwd: Vec<_> = rotors
        .iter()
        .map(|r| lp.add_var(1.0, (0.0, r.max_thrust_n)))
        .collect();
    let rev: Vec<_> = rotors
        .iter()
        .map(|r| lp.add_var(1.0, (0.0, r.reverse_thrust_n)))
        .collect();
    // Aim a little inside the inequalities, so the answer passes the check.
    let inside = tol * 1e-2;
    let expr = |coeffs: &[f64]| -> Vec<(microlp::Variable, f64)> {
        fwd.iter()
            .zip(coeffs)
            .map(|(v, a)| (*v, *a))
            .chain(rev.iter().zip(coeffs).map(|(v, a)| (*v, -*a)))
            .collect()
    };
    for ar in rows {
        for row in &ar.rows {
            if row.equality {
                lp.add_constraint(expr(&row.coeffs).as_slice(), ComparisonOp::Eq, row.rhs);
            } else {
                lp.add_constraint(
                    expr(&row.coeffs).as_slice(),
                    ComparisonOp::Le,
                    row.rhs - inside,
                );
            }
        }
        let need = required_nm(ar.needed_nm, limits.torque_margin);
        lp.add_constraint(expr(&ar.arms_m).as_slice(), ComparisonOp::Ge, need + inside);
    }
    let outcome = lp.solve().ok()?;
    let sol = outcome.solution()?;
    let t: Vec<f64> = fwd
        .iter()
        .zip(&rev)
        .map(|(p, q)| {
            let x = sol.var_value(*p) - sol.var_value(*q);
            if x.abs() < 1e-9 { 0.0 } else { x }
        })
        .collect();
    rows.iter().all(|r| meets(r, limits, &t, tol)).then_some(t)
}

/// Whether the screen proves that no one setting meets every condition
/// and the required moment at the first, middle and last checked angles
/// together, each relaxed by `tol` as [`meets`] relaxes them.
fn no_single_setting(table: &[AngleRows], limits: &Limits, tol: f64) -> bool {
    let (Some(first), Some(last)) = (table.first(), table.last()) else {
        return false;
    };
    let mut rows: Vec<super::contact::Row> = Vec::new();
    for ar in [first, &table[table.len() / 2], last] {
        rows.extend(ar.rows.iter().cloned());
        // moment >= required  <=>  -arms . T <= -required
        rows.push(super::contact::Row {
            coeffs: ar.arms_m.iter().map(|c| -c).collect(),
            rhs: -required_nm(ar.needed_nm, limits.torque_margin),
            equality: false,
            condition: Condition::LiftOff,
        });
    }
    let lo: Vec<f64> = limits.rotors.iter().map(|r| -r.reverse_thrust_n).collect();
    let hi: Vec<f64> = limits.rotors.iter().map(|r| r.max_thrust_n).collect();
    let zero = vec![0.0; lo.len()];
    screen::screen(&zero, &rows, &lo, &hi, tol) == Screen::Infeasible
}

/// Rotor commands for a feasible roll: one setting where one exists,
/// otherwise a schedule by roll angle. `None` when some checked angle has
/// no setting (which the caller treats as infeasible).
pub fn commands(table: &[AngleRows], limits: &Limits, tol: f64) -> Option<RotorCommands> {
    commands_by(table, limits, tol, false)
}

/// [`commands`] with every programme left to the general solver: the
/// reference the proved answers are checked against.
pub fn commands_lp(table: &[AngleRows], limits: &Limits, tol: f64) -> Option<RotorCommands> {
    commands_by(table, limits, tol, true)
}

fn commands_by(
    table: &[AngleRows],
    limits: &Limits,
    tol: f64,
    by_lp: bool,
) -> Option<RotorCommands> {
    let all: Vec<&AngleRows> = table.iter().collect();
    let solve_all = || {
        if by_lp {
            least_thrust_lp(&all, limits, tol)
        } else {
            least_thrust(&all, limits, tol)
        }
    };
    // The one-setting LP is skipped only where a proof shows that no
    // setting meets the first, middle and last angles together (then it
    // could not meet them all, and its answer would be None anyway).
    if !no_single_setting(table, limits, tol)
        && let Some(t) = solve_all()
    {
        return Some(RotorCommands {
            thrust_n: t,
            schedule: Vec::new(),
        });
    }
    let mut schedule: Vec<ScheduleEntry> = Vec::new();
    let mut hint = Vec::new();
    for rows in table {
        if schedule
            .last()
            .is_some_and(|e| meets(rows, limits, &e.thrust_n, tol))
        {
            continue;
        }
        let t = if by_lp {
            least_thrust_lp(&[rows], limits, tol)?
        } else {
            least_thrust_at(rows, limits, tol, &mut hint)?
        };
        schedule.push(ScheduleEntry {
            from_deg: rows.angle_deg,
            thrust_n: t,
        });
    }
    let first = schedule.first()?.thrust_n.clone();
    if schedule.len() == 1 {
        schedule.clear();
    }
    Some(RotorCommands {
        thrust_n: first,
        schedule,
    })
}

/// Check one roll over its whole angle by the LP at every checked angle,
/// and find its rotor commands: the reference that [`assess`] must agree
/// with (the agreement tests run both), and its fallback.
pub fn assess_plain(cage: &Cage, roll: &Roll, limits: &Limits) -> Feasibility {
    plain_with(cage, roll, limits, CommandsBy::Lp)
}

/// How a check finds the rotor commands of a move it passes.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum CommandsBy {
    /// The general solver for every programme (the reference).
    Lp,
    /// Proved answers where possible, the solver elsewhere.
    Proved,
    /// Not now: the caller asks [`move_commands`] when it needs them.
    Later,
}

fn plain_with(cage: &Cage, roll: &Roll, limits: &Limits, by: CommandsBy) -> Feasibility {
    let tol = tolerance(cage);
    let table = table(cage, roll, limits);
    let zero = vec![0.0; limits.rotors.len()];
    // (ratio, angle, needed, available)
    let mut worst: Option<(f64, f64, f64, f64)> = None;
    let mut blocked_by = None;
    for rows in &table {
        let needed = rows.needed_nm;
        let (ratio, avail) = if needed <= 0.0 {
            // Gravity helps: the rotors need only keep the contact.
            if rows.admits(&limits.rotors, &zero, tol) {
                continue;
            }
            match best_moment(rows, &limits.rotors, tol) {
                Some((m, _)) if m >= needed - tol => continue,
                Some((m, _)) => (f64::INFINITY, m),
                None => (f64::INFINITY, 0.0),
            }
        } else {
            match best_moment(rows, &limits.rotors, tol) {
                // A moment below a millionth of the need is rounding, not help.
                Some((m, _)) if m > 1e-6 * needed => (needed / m, m),
                Some((m, _)) => (f64::INFINITY, m),
                None => (f64::INFINITY, 0.0),
            }
        };
        if ratio.is_infinite() && blocked_by.is_none() && worst.is_none_or(|w| w.0.is_finite()) {
            blocked_by = blocking_condition(rows, limits, tol, false);
        }
        if worst.is_none_or(|w| ratio > w.0) {
            worst = Some((ratio, rows.angle_deg, needed, avail));
        }
    }
    finish(cage, roll, limits, &table, worst, blocked_by, by)
}

/// Relative slack of the screen's decisions: answers this close to a
/// threshold or a tie go to the LP.
const SCREEN_SLACK: f64 = 1e-6;

/// What the screen and, where needed, the LP say about one angle.
enum AngleOutcome {
    /// Nothing to report (gravity helps and the contact holds).
    Fine,
    /// Ratio needed / available lies in `[lo, hi]`; `exact` is the best
    /// moment where it is known (from the LP, or proved to round-off by
    /// the screen).
    Finite {
        lo: f64,
        hi: f64,
        exact: Option<f64>,
    },
    /// No thrust carries the move here; `avail` as the LP gives it.
    Blocked { avail: f64 },
}

/// The verdict at one angle exactly as [`assess_plain`] reaches it, by the
/// LP.
fn angle_by_lp(rows: &AngleRows, limits: &Limits, tol: f64) -> AngleOutcome {
    let needed = rows.needed_nm;
    match best_moment(rows, &limits.rotors, tol) {
        Some((m, _)) if needed <= 0.0 && m >= needed - tol => AngleOutcome::Fine,
        Some((m, _)) if needed > 0.0 && m > 1e-6 * needed => AngleOutcome::Finite {
            lo: needed / m,
            hi: needed / m,
            exact: Some(m),
        },
        Some((m, _)) => AngleOutcome::Blocked { avail: m },
        None => AngleOutcome::Blocked { avail: 0.0 },
    }
}

/// Relative width under which the screen's proved bounds on the best
/// moment are the optimum itself (round-off apart), as the LP would give
/// it.
const PROVED_EXACT: f64 = 1e-9;

/// The verdict at one angle: proved by the screen where it can be
/// (starting from the previous angle's tight set, `hint`), by the LP
/// otherwise. Where the proved bounds on the moment meet up to round-off
/// the moment is taken as exact; otherwise the ratio is only bounded and
/// the caller asks the LP for the exact value where it matters.
fn angle_outcome(
    rows: &AngleRows,
    limits: &Limits,
    tol: f64,
    zero: &[f64],
    bounds: (&[f64], &[f64]),
    hint: &mut Vec<screen::Tight>,
) -> AngleOutcome {
    let needed = rows.needed_nm;
    let slack = SCREEN_SLACK * (1.0 + needed.abs());
    if needed <= 0.0 && rows.admits(&limits.rotors, zero, tol) {
        return AngleOutcome::Fine;
    }
    match screen::best_moment_from(rows, bounds.0, bounds.1, tol, hint) {
        Screen::Infeasible => AngleOutcome::Blocked { avail: 0.0 },
        Screen::Optimum { lo, .. } if needed <= 0.0 && lo >= needed - tol + slack => {
            AngleOutcome::Fine
        }
        Screen::Optimum { lo, hi, .. } if needed > 0.0 && lo > 1e-6 * needed + slack => {
            AngleOutcome::Finite {
                lo: needed / hi,
                hi: needed / lo,
                exact: (hi - lo <= PROVED_EXACT * (1.0 + lo.abs())).then_some(lo),
            }
        }
        // A proved optimum short of the LP's bar: blocked, as the LP would
        // find (most often no thrust gives any helping moment at all, and
        // the optimum is exactly zero).
        Screen::Optimum { lo, hi, .. } if proved_below(lo, hi, lp_bar(needed, tol)) => {
            // (+ 0.0: a zero moment reads 0, not -0)
            AngleOutcome::Blocked { avail: lo + 0.0 }
        }
        _ => angle_by_lp(rows, limits, tol),
    }
}

/// The least best moment the LP path counts as carrying an angle that
/// needs `needed` (N m): a positive share of it where gravity resists,
/// gravity's own help less the tolerance where it helps.
fn lp_bar(needed: f64, tol: f64) -> f64 {
    if needed > 0.0 {
        1e-6 * needed
    } else {
        needed - tol
    }
}

/// Whether the screen's bounds `lo..hi` on a best moment meet to
/// round-off ([`PROVED_EXACT`]) and lie below `bar` by more than their
/// width: the LP's optimum, the same number up to round-off, is below it
/// too.
fn proved_below(lo: f64, hi: f64, bar: f64) -> bool {
    let width = PROVED_EXACT * (1.0 + lo.abs().max(bar.abs()));
    hi - lo <= width && hi < bar - width
}

/// Which single condition, dropped, would let the rotors meet the rest
/// at `rows` (the reason a move is blocked there); with `screened`, the
/// screen decides where it can prove the answer and the LP the rest.
fn blocking_condition(
    rows: &AngleRows,
    limits: &Limits,
    tol: f64,
    screened: bool,
) -> Option<Condition> {
    let needed = rows.needed_nm;
    let slack = SCREEN_SLACK * (1.0 + needed.abs());
    // The threshold the LP's moment is held to.
    let bar = lp_bar(needed, tol);
    [Condition::Sideways, Condition::Between]
        .into_iter()
        .find(|c| {
            if !rows.rows.iter().any(|r| r.condition == *c) {
                return false;
            }
            let mut relaxed = rows.clone();
            relaxed.rows.retain(|r| r.condition != *c);
            let proof = if screened {
                screen::best_moment(&relaxed, &limits.rotors, tol)
            } else {
                Screen::Unknown
            };
            match proof {
                Screen::Infeasible => false,
                Screen::Optimum { lo, .. } if lo > bar + slack => true,
                Screen::Optimum { hi, .. } if hi < bar - slack => false,
                Screen::Optimum { lo, hi, .. } if proved_below(lo, hi, bar) => false,
                _ => best_moment(&relaxed, &limits.rotors, tol).is_some_and(|(m, _)| {
                    if needed > 0.0 {
                        m > 1e-6 * needed
                    } else {
                        m >= needed - tol
                    }
                }),
            }
        })
}

/// Check one roll over its whole angle, and find its rotor commands.
///
/// The same answer as [`assess_plain`] with far fewer LPs: the screen
/// ([`screen`]) proves most angles' verdicts; the scan stops at the first
/// angle no thrust can carry (nothing later can be worse, and the plain
/// check reports the first such angle); among the carried angles only
/// those whose proven ratio range reaches the worst proven lower bound get
/// the LP, so the reported ratio, angle and moments are the LP's own. Any
/// disagreement between the screen and the LP sends the roll to
/// [`assess_plain`].
pub fn assess(cage: &Cage, roll: &Roll, limits: &Limits) -> Feasibility {
    assess_with(cage, roll, limits, CommandsBy::Proved)
}

/// [`assess`] without the rotor commands: `feasible` says only that the
/// check passed, and `commands` is `None`. The planner checks every move
/// this way and asks [`move_commands`] for the moves a plan takes (a
/// move without commands then counts as infeasible, as in [`assess`]).
pub fn assess_check(cage: &Cage, roll: &Roll, limits: &Limits) -> Feasibility {
    assess_with(cage, roll, limits, CommandsBy::Later)
}

/// The rotor commands of a roll the check passes (as [`assess`] finds
/// them); `None` when no setting carries some checked angle.
pub fn move_commands(cage: &Cage, roll: &Roll, limits: &Limits) -> Option<RotorCommands> {
    commands(&table(cage, roll, limits), limits, tolerance(cage))
}

/// [`assess_check`] and then, where the check passes, [`move_commands`],
/// from one table of angle rows (the check builds the whole table of a
/// move it passes; the commands need the same one).
pub fn check_then_commands(
    cage: &Cage,
    roll: &Roll,
    limits: &Limits,
) -> (Feasibility, Option<RotorCommands>) {
    let (check, table) = scan(cage, roll, limits, CommandsBy::Later);
    if !check.feasible {
        return (check, None);
    }
    let commands = match table {
        Some(table) => commands(&table, limits, tolerance(cage)),
        None => move_commands(cage, roll, limits),
    };
    (check, commands)
}

/// What the start of a roll (its first checked angle, 0 deg) says about
/// its check, before the rest of the roll is scanned.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Outlook {
    /// No thrust carries the roll there: the check stops there too, and
    /// its `thrust_fraction` is `None`.
    Blocked,
    /// The check's `thrust_fraction`, if it has one, is at least this
    /// (the proved lower bound of the ratio there; 0 where gravity helps
    /// or the screen proves nothing).
    AtLeast(f64),
}

impl Outlook {
    /// The least thrust fraction the check can give (infinite: blocked).
    pub fn floor(self) -> f64 {
        match self {
            Outlook::Blocked => f64::INFINITY,
            Outlook::AtLeast(f) => f,
        }
    }

    /// Whether the check is sure to refuse the roll: blocked, or needing
    /// more of the rotors at the start than the torque margin allows
    /// (with room for the round-off between the bound and the check's
    /// own ratio).
    pub fn refused(self, torque_margin: f64) -> bool {
        self.floor() * torque_margin > 1.0 + 1e-6
    }
}

/// The [`Outlook`] of a roll from its first checked angle alone, as
/// [`assess_check`]'s scan finds it there (a fraction of a whole check:
/// most rolls out of a face with no route are refused at their start).
pub fn first_angle_outlook(cage: &Cage, roll: &Roll, limits: &Limits) -> Outlook {
    let Some(&first) = checked_angles_deg(cage, roll).first() else {
        return Outlook::AtLeast(0.0);
    };
    match AngleScanner::new(cage, roll, limits).at(first).1 {
        AngleOutcome::Blocked { .. } => Outlook::Blocked,
        AngleOutcome::Finite { lo, .. } => Outlook::AtLeast(lo.max(0.0)),
        AngleOutcome::Fine => Outlook::AtLeast(0.0),
    }
}

/// A roll's angles as the check meets them, in order: the rows at each
/// and the verdict there, with what every angle shares (the tolerance, the
/// zero setting, the thrust limits as bounds) worked out once, and each
/// angle's screen starting from the previous angle's tight set.
struct AngleScanner<'a> {
    cage: &'a Cage,
    roll: &'a Roll,
    limits: &'a Limits,
    tol: f64,
    zero: Vec<f64>,
    lo: Vec<f64>,
    hi: Vec<f64>,
    hint: Vec<screen::Tight>,
}

impl<'a> AngleScanner<'a> {
    fn new(cage: &'a Cage, roll: &'a Roll, limits: &'a Limits) -> AngleScanner<'a> {
        AngleScanner {
            cage,
            roll,
            limits,
            tol: tolerance(cage),
            zero: vec![0.0; limits.rotors.len()],
            lo: limits.rotors.iter().map(|r| -r.reverse_thrust_n).collect(),
            hi: limits.rotors.iter().map(|r| r.max_thrust_n).collect(),
            hint: Vec::new(),
        }
    }

    /// The rows `angle_deg` into the roll, and the verdict there.
    fn at(&mut self, angle_deg: f64) -> (AngleRows, AngleOutcome) {
        let rows = rows_at(
            self.cage,
            self.roll,
            &self.limits.rotors,
            self.limits.friction_coefficient,
            angle_deg.to_radians(),
        );
        let outcome = angle_outcome(
            &rows,
            self.limits,
            self.tol,
            &self.zero,
            (&self.lo, &self.hi),
            &mut self.hint,
        );
        (rows, outcome)
    }
}

fn assess_with(cage: &Cage, roll: &Roll, limits: &Limits, by: CommandsBy) -> Feasibility {
    scan(cage, roll, limits, by).0
}

/// The check (with commands as `by` says), and the table of every
/// checked angle when the scan built all of it.
fn scan(
    cage: &Cage,
    roll: &Roll,
    limits: &Limits,
    by: CommandsBy,
) -> (Feasibility, Option<Vec<AngleRows>>) {
    let mut angles = AngleScanner::new(cage, roll, limits);
    let tol = angles.tol;
    // (index, ratio lower bound, upper bound, LP moment when exact)
    let mut carried: Vec<(usize, f64, f64, Option<f64>)> = Vec::new();
    let mut blocked: Option<(usize, f64)> = None;
    // The rows are built as the scan reaches them (a blocked roll often
    // stops at its first angle).
    let mut table: Vec<AngleRows> = Vec::new();
    for (i, &b) in checked_angles_deg(cage, roll).iter().enumerate() {
        let (rows, outcome) = angles.at(b);
        table.push(rows);
        match outcome {
            AngleOutcome::Fine => {}
            AngleOutcome::Finite { lo, hi, exact } => carried.push((i, lo, hi, exact)),
            AngleOutcome::Blocked { avail } => {
                blocked = Some((i, avail));
                break;
            }
        }
    }
    // (ratio, angle, needed, available)
    let mut blocked_by = None;
    let worst: Option<(f64, f64, f64, f64)> = match blocked {
        Some((i, avail)) => {
            let rows = &table[i];
            blocked_by = blocking_condition(rows, limits, tol, true);
            Some((f64::INFINITY, rows.angle_deg, rows.needed_nm, avail))
        }
        None => {
            let floor = carried
                .iter()
                .map(|c| c.1)
                .fold(f64::NEG_INFINITY, f64::max);
            let mut worst: Option<(f64, f64, f64, f64)> = None;
            for &(i, _, hi, exact) in &carried {
                if hi * (1.0 + SCREEN_SLACK) < floor * (1.0 - SCREEN_SLACK) {
                    continue;
                }
                let rows = &table[i];
                let m = match exact {
                    Some(m) => m,
                    None => match angle_by_lp(rows, limits, tol) {
                        AngleOutcome::Finite { exact: Some(m), .. } => m,
                        // The LP disagrees with the screen: take the plain path.
                        _ => {
                            let by = if by == CommandsBy::Later {
                                by
                            } else {
                                CommandsBy::Lp
                            };
                            return (plain_with(cage, roll, limits, by), None);
                        }
                    },
                };
                let ratio = rows.needed_nm / m;
                if worst.is_none_or(|w| ratio > w.0) {
                    worst = Some((ratio, rows.angle_deg, rows.needed_nm, m));
                }
            }
            worst
        }
    };
    let verdict = finish(cage, roll, limits, &table, worst, blocked_by, by);
    let whole = blocked.is_none();
    (verdict, whole.then_some(table))
}

/// The verdict from the worst angle: feasible when carried with the
/// margin there, and then the rotor commands over every checked angle,
/// found as `by` says.
fn finish(
    cage: &Cage,
    roll: &Roll,
    limits: &Limits,
    table: &[AngleRows],
    worst: Option<(f64, f64, f64, f64)>,
    blocked_by: Option<Condition>,
    by: CommandsBy,
) -> Feasibility {
    let tol = tolerance(cage);
    let (mut feasible, thrust_fraction, worst_angle_deg, needed_nm, available_nm) = match worst {
        None => (true, Some(0.0), 0.0, 0.0, 0.0),
        Some((ratio, angle, needed, avail)) => (
            ratio.is_finite() && ratio * limits.torque_margin <= 1.0 + 1e-12,
            ratio.is_finite().then_some(ratio),
            angle,
            needed,
            avail,
        ),
    };
    let commands = match by {
        _ if !feasible => None,
        CommandsBy::Later => None,
        CommandsBy::Lp => commands_by(table, limits, tol, true),
        CommandsBy::Proved => commands_by(table, limits, tol, false),
    };
    // No commands for a move the check passed: say "cannot" (fail safe).
    // (Later: the caller does this when it asks for them.)
    if by != CommandsBy::Later {
        feasible &= commands.is_some();
    }
    Feasibility {
        feasible,
        thrust_fraction,
        worst_angle_deg,
        needed_nm,
        available_nm,
        tip_angle_deg: tip_angle_deg(cage, roll),
        blocked_by,
        commands,
    }
}
