//! A quick screen of one contact LP (best rotor moment at one angle of a
//! roll) that settles most angles without the general solver.
//!
//! A small dense simplex (two phases, Bland's rule, bounds as rows) finds
//! a candidate answer; the candidate is then *proved* from the original
//! rows, independently of how it was found:
//!
//! - **Optimum**: a setting `x` that meets every row and bound within a
//!   hair gives a lower bound `c . x`; multipliers `y >= 0` on the
//!   inequalities and `z` on the equalities give the upper bound
//!   `y . b + z . e + sum_k max(r_k lo_k, r_k hi_k)`, `r = c - A^T y - E^T z`
//!   (weak LP duality: for every feasible `x`, `c . x = r . x + y . A x +
//!   z . E x <= r . x + y . b + z . e`).
//! - **Infeasible**: multipliers with `min over the box of q . x >
//!   y . b + z . e` (`q = A^T y + E^T z`) prove that no setting meets the
//!   rows (Farkas' lemma); the proof is made with every row and bound
//!   widened by the tolerance of the answer check, so no answer the
//!   general solver could give would pass that check either.
//!
//! Anything the screen cannot prove comes back [`Screen::Unknown`] and the
//! caller solves the LP as before, so a slip here costs time, never a
//! wrong verdict. (Chvátal, "Linear Programming", 1983, ch. 2-5 and 8:
//! the simplex method, Bland's rule, bounded variables, duality.)

use super::contact::{AngleRows, Row};
use crate::profile::Rotor;

/// What the screen proved about `max c . x` over the rows and the bounds.
#[derive(Debug, Clone, PartialEq)]
pub enum Screen {
    /// No setting meets the rows, even with every row and bound relaxed by
    /// the tolerance.
    Infeasible,
    /// The optimum lies between `lo` and `hi`; `x` meets every row within
    /// the tolerance and gives `lo`.
    Optimum {
        /// Proven lower bound (the moment of `x`).
        lo: f64,
        /// Proven upper bound.
        hi: f64,
        /// The setting that gives `lo`.
        x: Vec<f64>,
    },
    /// Not proved either way: solve the LP.
    Unknown,
}

/// Pivot and reduced-cost threshold of the simplex.
const EPS: f64 = 1e-11;
/// Pivots before the screen gives up.
const MAX_PIVOTS: usize = 200;

/// Screen `max arms . T` over `rows` within the rotors' limits; `tol` is
/// the tolerance of the answer check ([`AngleRows::admits`]).
pub fn best_moment(rows: &AngleRows, rotors: &[Rotor], tol: f64) -> Screen {
    let lo: Vec<f64> = rotors.iter().map(|r| -r.reverse_thrust_n).collect();
    let hi: Vec<f64> = rotors.iter().map(|r| r.max_thrust_n).collect();
    screen(&rows.arms_m, &rows.rows, &lo, &hi, tol)
}

/// Screen `max c . x` subject to `rows` and `lo <= x <= hi`.
pub fn screen(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64], tol: f64) -> Screen {
    let n = c.len();
    if n == 0
        || lo.len() != n
        || hi.len() != n
        || rows.iter().any(|r| r.coeffs.len() != n)
        || lo
            .iter()
            .zip(hi)
            .any(|(a, b)| !a.is_finite() || !b.is_finite() || a > b)
        || c.iter().any(|v| !v.is_finite())
        || rows
            .iter()
            .any(|r| !r.rhs.is_finite() || r.coeffs.iter().any(|v| !v.is_finite()))
    {
        return Screen::Unknown;
    }
    let Some(sol) = Simplex::solve(c, rows, lo, hi) else {
        return Screen::Unknown;
    };
    match sol {
        Solved::Infeasible(mult) => {
            if farkas_holds(rows, lo, hi, &mult, tol) {
                Screen::Infeasible
            } else {
                Screen::Unknown
            }
        }
        Solved::Optimal { x, mult } => {
            // A hundredth of the answer check's tolerance: the setting is
            // well inside what the check accepts.
            let hair = tol * 1e-2;
            let meets = x
                .iter()
                .zip(lo.iter().zip(hi))
                .all(|(v, (a, b))| *v >= a - hair && *v <= b + hair)
                && rows.iter().all(|r| {
                    let e = r.excess(&x);
                    if r.equality {
                        e.abs() <= hair
                    } else {
                        e <= hair
                    }
                });
            if !meets {
                return Screen::Unknown;
            }
            let value: f64 = c.iter().zip(&x).map(|(a, b)| a * b).sum();
            let Some(bound) = dual_bound(c, rows, lo, hi, &mult) else {
                return Screen::Unknown;
            };
            // The bound and the value can cross only by round-off.
            if bound < value - 1e-9 * (1.0 + value.abs()) {
                return Screen::Unknown;
            }
            Screen::Optimum {
                lo: value,
                hi: bound.max(value),
                x,
            }
        }
    }
}

/// Weak-duality upper bound on `max c . x` from row multipliers (negative
/// multipliers on inequalities are dropped, which keeps the bound valid).
fn dual_bound(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64], mult: &[f64]) -> Option<f64> {
    let mut r = c.to_vec();
    let mut total = 0.0;
    for (row, &m) in rows.iter().zip(mult) {
        let m = if row.equality { m } else { m.max(0.0) };
        if m == 0.0 {
            continue;
        }
        total += m * row.rhs;
        for (rk, a) in r.iter_mut().zip(&row.coeffs) {
            *rk -= m * a;
        }
    }
    for (k, rk) in r.iter().enumerate() {
        total += (rk * lo[k]).max(rk * hi[k]);
    }
    total.is_finite().then_some(total)
}

/// Whether multipliers prove that no `x` in the box widened by `tol`
/// meets every row relaxed by `tol` (Farkas' lemma).
fn farkas_holds(rows: &[Row], lo: &[f64], hi: &[f64], mult: &[f64], tol: f64) -> bool {
    let n = lo.len();
    // Try the multipliers as found and negated (the sign convention of the
    // phase-one duals is then no concern of the proof).
    [1.0, -1.0].into_iter().any(|sign| {
        let mut q = vec![0.0; n];
        let mut rhs = 0.0;
        let mut weight = 0.0;
        for (row, &m0) in rows.iter().zip(mult) {
            let m = sign * m0;
            let m = if row.equality { m } else { m.max(0.0) };
            if m == 0.0 {
                continue;
            }
            rhs += m * row.rhs;
            weight += m.abs();
            for (qk, a) in q.iter_mut().zip(&row.coeffs) {
                *qk += m * a;
            }
        }
        let least: f64 = q
            .iter()
            .enumerate()
            .map(|(k, qk)| (qk * (lo[k] - tol)).min(qk * (hi[k] + tol)))
            .sum();
        // q . x <= y . b + z . e + tol (sum |multipliers|) for every x that
        // meets the relaxed rows; a least value above that is a contradiction.
        weight > 0.0 && least.is_finite() && least > rhs + tol * weight + 1e-12 * (1.0 + rhs.abs())
    })
}

/// What the simplex found: multipliers per original row either way.
enum Solved {
    Infeasible(Vec<f64>),
    Optimal { x: Vec<f64>, mult: Vec<f64> },
}

/// Dense tableau in the shifted variables `w = x - lo`, `0 <= w <= hi - lo`:
/// original rows first, then one row `w_k + s = hi_k - lo_k` per variable.
struct Simplex {
    /// Rows of `[coefficients..., rhs]`, `cols + 1` wide.
    t: Vec<f64>,
    rows: usize,
    cols: usize,
    basis: Vec<usize>,
    /// Column that started as the unit vector of each row.
    unit: Vec<usize>,
    /// +1, or -1 where the row was negated to make its rhs >= 0.
    sign: Vec<f64>,
}

impl Simplex {
    fn at(&self, i: usize, j: usize) -> f64 {
        self.t[i * (self.cols + 1) + j]
    }

    fn rhs(&self, i: usize) -> f64 {
        self.at(i, self.cols)
    }

    fn solve(c: &[f64], orig: &[Row], lo: &[f64], hi: &[f64]) -> Option<Solved> {
        let n = c.len();
        let m = orig.len() + n;
        // Columns: w (n), one slack per inequality and per bound row, then
        // artificials as needed.
        let slacks = orig.iter().filter(|r| !r.equality).count() + n;
        let mut row_coef: Vec<Vec<f64>> = Vec::with_capacity(m);
        let mut row_rhs: Vec<f64> = Vec::with_capacity(m);
        let mut row_slack: Vec<Option<usize>> = Vec::with_capacity(m);
        let mut next_slack = n;
        for r in orig {
            let shift: f64 = r.coeffs.iter().zip(lo).map(|(a, l)| a * l).sum();
            row_coef.push(r.coeffs.clone());
            row_rhs.push(r.rhs - shift);
            if r.equality {
                row_slack.push(None);
            } else {
                row_slack.push(Some(next_slack));
                next_slack += 1;
            }
        }
        for k in 0..n {
            let mut a = vec![0.0; n];
            a[k] = 1.0;
            row_coef.push(a);
            row_rhs.push(hi[k] - lo[k]);
            row_slack.push(Some(next_slack));
            next_slack += 1;
        }
        // Rows needing an artificial: equalities and negative right-hand sides.
        let needs_art: Vec<bool> = (0..m)
            .map(|i| row_slack[i].is_none() || row_rhs[i] < 0.0)
            .collect();
        let art0 = n + slacks;
        let cols = art0 + needs_art.iter().filter(|x| **x).count();
        let w = cols + 1;
        let mut t = vec![0.0; m * w];
        let mut basis = vec![0; m];
        let mut unit = vec![0; m];
        let mut sign = vec![1.0; m];
        let mut next_art = art0;
        for i in 0..m {
            let s = if row_rhs[i] < 0.0 { -1.0 } else { 1.0 };
            sign[i] = s;
            for k in 0..n {
                t[i * w + k] = s * row_coef[i][k];
            }
            if let Some(j) = row_slack[i] {
                t[i * w + j] = s;
            }
            t[i * w + cols] = s * row_rhs[i];
            if needs_art[i] {
                t[i * w + next_art] = 1.0;
                basis[i] = next_art;
                unit[i] = next_art;
                next_art += 1;
            } else if let Some(j) = row_slack[i] {
                basis[i] = j;
                unit[i] = j;
            }
        }
        let mut sx = Simplex {
            t,
            rows: m,
            cols,
            basis,
            unit,
            sign,
        };
        let n_orig = orig.len();
        if cols > art0 {
            // Phase one: maximise minus the sum of the artificials.
            let cost1: Vec<f64> = (0..cols)
                .map(|j| if j >= art0 { -1.0 } else { 0.0 })
                .collect();
            sx.optimise(&cost1, cols)?;
            let infeas: f64 = (0..m)
                .filter(|&i| sx.basis[i] >= art0)
                .map(|i| sx.rhs(i))
                .sum();
            if infeas > 1e-9 * (1.0 + row_rhs.iter().map(|v| v.abs()).fold(0.0, f64::max)) {
                let mult = sx.multipliers(&cost1, n_orig);
                return Some(Solved::Infeasible(mult));
            }
            // Drive the artificials out of the basis where a real column
            // can take their place (a row left with one is redundant).
            for i in 0..m {
                if sx.basis[i] >= art0
                    && let Some(j) = (0..art0).find(|&j| sx.at(i, j).abs() > 1e-9)
                {
                    sx.pivot(i, j);
                }
            }
        }
        let mut cost2 = vec![0.0; cols];
        cost2[..n].copy_from_slice(c);
        sx.optimise(&cost2, art0)?;
        let mut wv = vec![0.0; n];
        for i in 0..m {
            if sx.basis[i] < n {
                wv[sx.basis[i]] = sx.rhs(i);
            }
        }
        let x: Vec<f64> = wv
            .iter()
            .zip(lo.iter().zip(hi))
            .map(|(v, (a, b))| (a + v).clamp(*a, *b))
            .collect();
        let mult = sx.multipliers(&cost2, n_orig);
        Some(Solved::Optimal { x, mult })
    }

    /// Duals of the first `n_orig` rows for the objective `cost`, in the
    /// original rows' signs.
    fn multipliers(&self, cost: &[f64], n_orig: usize) -> Vec<f64> {
        (0..n_orig)
            .map(|r| {
                let j = self.unit[r];
                let pi: f64 = (0..self.rows)
                    .map(|i| cost[self.basis[i]] * self.at(i, j))
                    .sum();
                self.sign[r] * pi
            })
            .collect()
    }

    /// Maximise `cost` over the columns below `limit` entering (Bland's
    /// rule); `None` when unbounded or out of pivots.
    fn optimise(&mut self, cost: &[f64], limit: usize) -> Option<()> {
        for _ in 0..MAX_PIVOTS {
            // Entering: the first column with a positive reduced cost.
            let enter = (0..limit).find(|&j| {
                if self.basis.contains(&j) {
                    return false;
                }
                let z: f64 = (0..self.rows)
                    .map(|i| cost[self.basis[i]] * self.at(i, j))
                    .sum();
                cost[j] - z > EPS
            });
            let Some(j) = enter else { return Some(()) };
            // Leaving: least ratio, ties to the smallest basic index.
            let mut best: Option<(f64, usize)> = None;
            for i in 0..self.rows {
                let a = self.at(i, j);
                if a > EPS {
                    let ratio = self.rhs(i) / a;
                    let better = match best {
                        None => true,
                        Some((r, bi)) => {
                            ratio < r - 1e-15
                                || (ratio <= r + 1e-15 && self.basis[i] < self.basis[bi])
                        }
                    };
                    if better {
                        best = Some((ratio, i));
                    }
                }
            }
            let (_, i) = best?;
            self.pivot(i, j);
        }
        None
    }

    fn pivot(&mut self, i: usize, j: usize) {
        let w = self.cols + 1;
        let p = self.t[i * w + j];
        for k in 0..w {
            self.t[i * w + k] /= p;
        }
        for r in 0..self.rows {
            if r == i {
                continue;
            }
            let f = self.t[r * w + j];
            if f != 0.0 {
                for k in 0..w {
                    self.t[r * w + k] -= f * self.t[i * w + k];
                }
            }
        }
        self.basis[i] = j;
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::profile::Profile;
    use crate::righting::feasibility::{self, assess, assess_plain, tolerance};
    use crate::righting::{RightingModel, moves};

    fn model(p: &Profile) -> RightingModel {
        let c = Cage::from_profile(p).expect("cage builds");
        RightingModel::new(p, &c).expect("model builds")
    }

    fn geodesic(k: u32) -> Profile {
        Profile::parse(&crate::geodesic::profile_toml(k), "geodesic").expect("profile")
    }

    /// The fast check and the plain one (the LP at every angle) give the
    /// same verdict, ratio, worst angle, moments, blocking condition and
    /// rotor commands on every move, bit for bit: the reported figures
    /// come from the same LPs.
    fn agree_on_every_move(m: &RightingModel) -> usize {
        let mut compared = 0;
        for mv in &m.moves {
            let plain = assess_plain(&m.cage, &mv.roll, &m.limits);
            assert_eq!(
                mv.feasibility, plain,
                "{} -> {} ({:?})",
                mv.roll.from, mv.roll.to, mv.roll.kind
            );
            assert_eq!(assess(&m.cage, &mv.roll, &m.limits), plain);
            compared += 1;
        }
        compared
    }

    #[test]
    fn fast_check_agrees_with_the_lp_on_the_demo() {
        let p = Profile::demo().expect("demo");
        let m = model(&p);
        assert!(agree_on_every_move(&m) >= 60);
        // With the rotors forward-only too (most inverted moves blocked).
        let fwd = Profile::parse(
            include_str!("../../profiles/demo-forward-only.toml"),
            "demo-forward-only.toml",
        )
        .expect("forward-only demo");
        assert!(agree_on_every_move(&model(&fwd)) >= 60);
    }

    #[test]
    fn fast_check_agrees_with_the_lp_on_geodesic_cages() {
        for k in [1, 2] {
            let m = model(&geodesic(k));
            let n = agree_on_every_move(&m);
            assert!(n >= 3 * 20 * 4usize.pow(k), "level {k}: {n} moves");
        }
    }

    /// The screen's proofs hold against the general solver on every angle
    /// of every demo move, and it decides nearly all of them itself.
    #[test]
    fn screen_bounds_contain_the_lp_answer() {
        let p = Profile::demo().expect("demo");
        let m = model(&p);
        let tol = tolerance(&m.cage);
        let (mut decided, mut total) = (0, 0);
        for mv in &m.moves {
            for rows in feasibility::table(&m.cage, &mv.roll, &m.limits) {
                total += 1;
                let lp = feasibility::best_moment(&rows, &m.limits.rotors, tol);
                match best_moment(&rows, &m.limits.rotors, tol) {
                    Screen::Infeasible => {
                        decided += 1;
                        assert!(lp.is_none(), "proved infeasible, LP found {lp:?}");
                    }
                    Screen::Optimum { lo, hi, x } => {
                        decided += 1;
                        assert!(rows.admits(&m.limits.rotors, &x, tol));
                        let (v, _) = lp.expect("the screen found a setting, so must the LP");
                        let slack = 1e-7 * (1.0 + v.abs());
                        assert!(v >= lo - slack && v <= hi + slack, "{lo} <= {v} <= {hi}");
                        assert!(hi - lo <= 1e-9 * (1.0 + lo.abs()), "{lo} {hi}");
                    }
                    Screen::Unknown => {}
                }
            }
        }
        assert!(decided * 100 >= total * 95, "{decided} of {total}");
    }

    /// Hand-worked: maximise x + y with x + y <= 1 in the box [0, 2]^2 is 1
    /// (any point of the segment); x + y >= 3 in the box [0, 1]^2 has no
    /// point (common practice, no published source).
    #[test]
    fn tiny_programmes_by_hand() {
        let row = |coeffs: Vec<f64>, rhs: f64, equality: bool| Row {
            coeffs,
            rhs,
            equality,
            condition: super::super::contact::Condition::LiftOff,
        };
        let s = screen(
            &[1.0, 1.0],
            &[row(vec![1.0, 1.0], 1.0, false)],
            &[0.0, 0.0],
            &[2.0, 2.0],
            1e-7,
        );
        let Screen::Optimum { lo, hi, .. } = s else {
            panic!("{s:?}")
        };
        assert!((lo - 1.0).abs() < 1e-12 && (hi - 1.0).abs() < 1e-12);
        let s = screen(
            &[1.0, 0.0],
            &[row(vec![-1.0, -1.0], -3.0, false)],
            &[0.0, 0.0],
            &[1.0, 1.0],
            1e-7,
        );
        assert_eq!(s, Screen::Infeasible);
        // An equality that pins x = 0.5, with bounds below zero.
        let s = screen(
            &[2.0, -1.0],
            &[row(vec![1.0, 0.0], 0.5, true)],
            &[-1.0, -1.0],
            &[1.0, 1.0],
            1e-7,
        );
        let Screen::Optimum { lo, hi, .. } = s else {
            panic!("{s:?}")
        };
        assert!((lo - 2.0).abs() < 1e-12 && (hi - 2.0).abs() < 1e-12);
    }

    /// The node-sharing search lists the same rolls, in the same order, as
    /// trying every pair of faces.
    #[test]
    fn candidate_rolls_match_every_pair() {
        for p in [Profile::demo().expect("demo"), geodesic(1)] {
            let c = Cage::from_profile(&p).expect("cage");
            let mut all = Vec::new();
            for i in 0..c.faces.len() {
                for j in 0..c.faces.len() {
                    if i != j
                        && let Some(r) = moves::Roll::between(&c, i, j)
                    {
                        all.push(r);
                    }
                }
            }
            assert_eq!(moves::candidate_rolls(&c, true), all);
        }
    }

    #[test]
    fn no_rotors_is_left_to_the_lp() {
        let rows = super::super::contact::AngleRows {
            angle_deg: 0.0,
            needed_nm: 1.0,
            arms_m: Vec::new(),
            rows: Vec::new(),
        };
        assert_eq!(best_moment(&rows, &[], 1e-7), Screen::Unknown);
    }
}
