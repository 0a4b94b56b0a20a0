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
//! - **The only optimum** ([`unique_optimum`]): when the constraints an
//!   optimum must keep tight (by complementary slackness) pin a single
//!   point, that point is what every correct solver returns.
//! - **Warm starts** ([`screen_from`], [`unique_optimum_at`]): the
//!   constraints tight at the previous angle's optimum are tried first;
//!   the point they pin is accepted only with the same proofs.
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

/// [`best_moment`] starting from the tight set of the previous angle's
/// optimum (see [`screen_from`]), with the thrust limits as bounds
/// (`lo`: minus the reverse limits, `hi`: the forward limits), worked out
/// once per roll by the caller.
pub fn best_moment_from(
    rows: &AngleRows,
    lo: &[f64],
    hi: &[f64],
    tol: f64,
    hint: &mut Vec<Tight>,
) -> Screen {
    screen_from(&rows.arms_m, &rows.rows, lo, hi, tol, hint)
}

/// Screen `max c . x` subject to `rows` and `lo <= x <= hi`.
pub fn screen(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64], tol: f64) -> Screen {
    screen_cold(c, rows, lo, hi, tol).0
}

/// [`screen`], trying first the constraints that were tight at the
/// previous programme's optimum (`hint`, updated with this one's): where
/// the point they pin meets every row and its multipliers' dual bound
/// equals its value up to round-off, that proves the optimum as the
/// simplex's answer would, with one small linear solve instead of the
/// simplex. The angles of a roll change their programme a little at a
/// time, so the tight set mostly carries over.
pub fn screen_from(
    c: &[f64],
    rows: &[Row],
    lo: &[f64],
    hi: &[f64],
    tol: f64,
    hint: &mut Vec<Tight>,
) -> Screen {
    if hint.len() == c.len()
        && well_formed(c, rows, lo, hi)
        && let Some((x, lambda)) = vertex_solve(c, rows, lo, hi, hint)
        && holds(rows, lo, hi, &x, tol * 1e-2)
    {
        let mut mult = vec![0.0; rows.len()];
        for (t, l) in hint.iter().zip(&lambda) {
            if let Tight::Row(r) = *t {
                mult[r] = *l;
            }
        }
        let value: f64 = c.iter().zip(&x).map(|(a, b)| a * b).sum();
        if let Some(bound) = dual_bound(c, rows, lo, hi, &mult)
            && (bound - value).abs() <= 1e-9 * (1.0 + value.abs())
        {
            return Screen::Optimum {
                lo: value,
                hi: bound.max(value),
                x,
            };
        }
    }
    let (answer, tight) = screen_cold(c, rows, lo, hi, tol);
    *hint = tight;
    answer
}

/// [`screen`] by the simplex, with the tight set of a proved optimum when
/// it has exactly one constraint per variable (empty otherwise).
fn screen_cold(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64], tol: f64) -> (Screen, Vec<Tight>) {
    if !well_formed(c, rows, lo, hi) {
        return (Screen::Unknown, Vec::new());
    }
    let Some(sol) = Simplex::solve(c, rows, lo, hi) else {
        return (Screen::Unknown, Vec::new());
    };
    match sol {
        Solved::Infeasible(mult) => {
            if farkas_holds(rows, lo, hi, &mult, tol) {
                (Screen::Infeasible, Vec::new())
            } else {
                (Screen::Unknown, Vec::new())
            }
        }
        Solved::Optimal { x, mult } => {
            // A hundredth of the answer check's tolerance: the setting is
            // well inside what the check accepts.
            let hair = tol * 1e-2;
            if !holds(rows, lo, hi, &x, hair) {
                return (Screen::Unknown, Vec::new());
            }
            let value: f64 = c.iter().zip(&x).map(|(a, b)| a * b).sum();
            let Some(bound) = dual_bound(c, rows, lo, hi, &mult) else {
                return (Screen::Unknown, Vec::new());
            };
            // The bound and the value can cross only by round-off.
            if bound < value - 1e-9 * (1.0 + value.abs()) {
                return (Screen::Unknown, Vec::new());
            }
            let mut tight = tight_set(c, rows, lo, hi, &x, &mult, hair).unwrap_or_default();
            if tight.len() != c.len() {
                tight.clear();
            }
            (
                Screen::Optimum {
                    lo: value,
                    hi: bound.max(value),
                    x,
                },
                tight,
            )
        }
    }
}

/// The constraints an optimal `x'` must keep tight, given the multipliers
/// `mult` of the rows: every equality, every inequality with a positive
/// multiplier, every bound whose reduced cost is not zero, every fixed
/// variable (see [`unique_optimum`] for why). `None` when one of them is
/// not tight at `x` (the multipliers do not belong to `x`).
fn tight_set(
    c: &[f64],
    rows: &[Row],
    lo: &[f64],
    hi: &[f64],
    x: &[f64],
    mult: &[f64],
    hair: f64,
) -> Option<Vec<Tight>> {
    let mut r = c.to_vec();
    let scale = 1.0 + c.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let strict = 1e-9 * scale;
    let mut tight: Vec<Tight> = Vec::new();
    for (i, (row, &m)) in rows.iter().zip(mult).enumerate() {
        let m = if row.equality { m } else { m.max(0.0) };
        for (rk, a) in r.iter_mut().zip(&row.coeffs) {
            *rk -= m * a;
        }
        if row.equality || m > strict {
            if row.excess(x).abs() > hair {
                return None;
            }
            tight.push(Tight::Row(i));
        }
    }
    for k in 0..c.len() {
        let bound = if hi[k] <= lo[k] || r[k] < -strict {
            Tight::Lower(k)
        } else if r[k] > strict {
            Tight::Upper(k)
        } else {
            continue;
        };
        let v = if bound == Tight::Lower(k) {
            lo[k]
        } else {
            hi[k]
        };
        if (x[k] - v).abs() > hair {
            return None;
        }
        tight.push(bound);
    }
    Some(tight)
}

/// The point where the `n` constraints `tight` hold with equality, and
/// their multipliers: `lambda` with `c = sum lambda_i a_i` over their
/// normals. `None` when the system is singular or the answer is not
/// finite.
fn vertex_solve(
    c: &[f64],
    rows: &[Row],
    lo: &[f64],
    hi: &[f64],
    tight: &[Tight],
) -> Option<(Vec<f64>, Vec<f64>)> {
    let n = c.len();
    if tight.len() != n {
        return None;
    }
    // Row-major n x n matrix of the tight constraints' normals (on the
    // stack for the sizes the fixed solvers take).
    let (mut a_stack, mut b_stack) = ([0.0; 256], [0.0; 16]);
    let (mut a_heap, mut b_heap) = (Vec::new(), Vec::new());
    let (a, b): (&mut [f64], &mut [f64]) = if n <= 16 {
        (&mut a_stack[..n * n], &mut b_stack[..n])
    } else {
        a_heap.resize(n * n, 0.0);
        b_heap.resize(n, 0.0);
        (&mut a_heap, &mut b_heap)
    };
    for (i, t) in tight.iter().enumerate() {
        match *t {
            Tight::Row(r) => {
                let row = rows.get(r)?;
                a[i * n..(i + 1) * n].copy_from_slice(&row.coeffs);
                b[i] = row.rhs;
            }
            Tight::Lower(k) | Tight::Upper(k) if k >= n => return None,
            Tight::Lower(k) => {
                a[i * n + k] = 1.0;
                b[i] = lo[k];
            }
            Tight::Upper(k) => {
                a[i * n + k] = 1.0;
                b[i] = hi[k];
            }
        }
    }
    // Small systems on the stack (the common case: one or two unknowns
    // per rotor), larger ones on the heap.
    let (x, lambda) = match n {
        0..=4 => solve_pair_4(n, a, b, c)?,
        5..=8 => solve_pair_8(n, a, b, c)?,
        9..=16 => solve_pair_16(n, a, b, c)?,
        _ => {
            let m = nalgebra::DMatrix::from_row_slice(n, n, a);
            let x = m
                .clone()
                .lu()
                .solve(&nalgebra::DVector::from_column_slice(b))?;
            let l = m
                .transpose()
                .lu()
                .solve(&nalgebra::DVector::from_column_slice(c))?;
            (x.iter().copied().collect(), l.iter().copied().collect())
        }
    };
    let scale = 1.0 + c.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    // The multipliers must reproduce c (a check on the solve itself).
    let reproduces = (0..n).all(|k| {
        let sum: f64 = (0..n).map(|i| a[i * n + k] * lambda[i]).sum();
        (sum - c[k]).abs() <= 1e-9 * scale
    });
    let finite = x.iter().chain(&lambda).all(|v| v.is_finite());
    (finite && reproduces).then_some((x, lambda))
}

/// Solvers of `A x = b` and `A^T lambda = c` for an `n x n` row-major
/// `A`, padded to a fixed size with the identity so the work stays on the
/// stack (nalgebra's fixed-size LU).
macro_rules! fixed_pair_solver {
    ($name:ident, $size:literal) => {
        fn $name(n: usize, a: &[f64], b: &[f64], c: &[f64]) -> Option<(Vec<f64>, Vec<f64>)> {
            let mut m = nalgebra::SMatrix::<f64, $size, $size>::identity();
            let mut bv = nalgebra::SVector::<f64, $size>::zeros();
            let mut cv = nalgebra::SVector::<f64, $size>::zeros();
            for i in 0..n {
                for k in 0..n {
                    m[(i, k)] = a[i * n + k];
                }
                bv[i] = b[i];
                cv[i] = c[i];
            }
            let x = m.lu().solve(&bv)?;
            let l = m.transpose().lu().solve(&cv)?;
            Some((x.as_slice()[..n].to_vec(), l.as_slice()[..n].to_vec()))
        }
    };
}
fixed_pair_solver!(solve_pair_4, 4);
fixed_pair_solver!(solve_pair_8, 8);
fixed_pair_solver!(solve_pair_16, 16);

/// Whether the programme is one the simplex can take: matching lengths,
/// finite numbers, a non-empty box.
fn well_formed(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64]) -> bool {
    let n = c.len();
    n > 0
        && lo.len() == n
        && hi.len() == n
        && rows.iter().all(|r| r.coeffs.len() == n)
        && lo
            .iter()
            .zip(hi)
            .all(|(a, b)| a.is_finite() && b.is_finite() && a <= b)
        && c.iter().all(|v| v.is_finite())
        && rows
            .iter()
            .all(|r| r.rhs.is_finite() && r.coeffs.iter().all(|v| v.is_finite()))
}

/// Whether `x` meets every row and bound within `hair`.
fn holds(rows: &[Row], lo: &[f64], hi: &[f64], x: &[f64], hair: f64) -> bool {
    x.iter()
        .zip(lo.iter().zip(hi))
        .all(|(v, (a, b))| *v >= a - hair && *v <= b + hair)
        && rows.iter().all(|r| {
            let e = r.excess(x);
            if r.equality {
                e.abs() <= hair
            } else {
                e <= hair
            }
        })
}

/// The optimum of `max c . x` over `rows` and `lo <= x <= hi`, when it is
/// proved optimal *and* proved to be the only optimum; `None` otherwise
/// (the caller then asks the general solver).
///
/// Optimal: `x` meets every row and bound within a hundredth of `tol`,
/// and the weak-duality bound of its multipliers meets `c . x` up to
/// round-off. The only one: every feasible `x'` has
/// `bound - c . x' = sum_i y_i (b_i - a_i . x') + sum_k (max(r_k lo_k,
/// r_k hi_k) - r_k x'_k)`, a sum of terms that are never negative, so an
/// optimal `x'` keeps tight every inequality with `y_i > 0` and every
/// bound with `r_k != 0`, as well as every equality. When those
/// constraints alone have rank `n`, they pin a single point: `x`.
/// (Chvátal 1983, ch. 5, complementary slackness; the same argument as
/// "a non-degenerate dual optimum gives a unique primal optimum".)
/// A unique optimum is what any correct solver must return, up to its
/// round-off, so the answer does not depend on which solver found it.
pub fn unique_optimum(c: &[f64], rows: &[Row], lo: &[f64], hi: &[f64], tol: f64) -> Option<Vertex> {
    if !well_formed(c, rows, lo, hi) {
        return None;
    }
    let Solved::Optimal { x, mult } = Simplex::solve(c, rows, lo, hi)? else {
        return None;
    };
    let hair = tol * 1e-2;
    if !holds(rows, lo, hi, &x, hair) {
        return None;
    }
    let value: f64 = c.iter().zip(&x).map(|(a, b)| a * b).sum();
    let bound = dual_bound(c, rows, lo, hi, &mult)?;
    if (bound - value).abs() > 1e-9 * (1.0 + value.abs()) {
        return None;
    }
    let n = c.len();
    let tight = tight_set(c, rows, lo, hi, &x, &mult, hair)?;
    let count = tight.len();
    let mut pinned: Vec<f64> = Vec::with_capacity(count * n);
    for t in &tight {
        match *t {
            Tight::Row(i) => pinned.extend_from_slice(&rows[i].coeffs),
            Tight::Lower(k) | Tight::Upper(k) => {
                pinned.extend((0..n).map(|j| if j == k { 1.0 } else { 0.0 }))
            }
        }
    }
    if count < n {
        return None;
    }
    let a = nalgebra::DMatrix::from_row_slice(count, n, &pinned);
    let largest = a.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    if a.rank(1e-9 * largest.max(1.0)) != n {
        return None;
    }
    // A degenerate vertex (more tight constraints than unknowns) is no
    // starting point for the next programme.
    let tight = if count > n { Vec::new() } else { tight };
    Some(Vertex { x, tight })
}

/// A constraint held with equality at a vertex: a row, or a variable's
/// lower or upper bound.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Tight {
    /// Row `i` of the programme.
    Row(usize),
    /// Variable `k` at its lower bound (or fixed, when its bounds meet).
    Lower(usize),
    /// Variable `k` at its upper bound.
    Upper(usize),
}

/// A proved unique optimum and, when it is a non-degenerate vertex, the
/// `n` constraints that pin it (empty otherwise).
#[derive(Debug, Clone, PartialEq)]
pub struct Vertex {
    /// The optimum.
    pub x: Vec<f64>,
    /// The constraints tight at it, one per variable.
    pub tight: Vec<Tight>,
}

/// The unique optimum of `max c . x` over `rows` and `lo <= x <= hi` when
/// the `n` constraints `tight` pin it, proved without the simplex: the
/// point where they all hold with equality meets every row and bound
/// within a hundredth of `tol`, and `c` is a combination of those
/// constraints' normals with every multiplier strictly of the sign that
/// makes it optimal (positive for `a . x <= b` and upper bounds, negative
/// for lower bounds, any sign for equalities and fixed variables). That is
/// the optimality condition of LP, and strict signs with `n` independent
/// constraints make the optimum the only one, as in [`unique_optimum`].
/// Programmes that change little from one to the next (the angles of a
/// roll) usually keep the same tight set, so the previous answer's set is
/// tried first.
pub fn unique_optimum_at(
    c: &[f64],
    rows: &[Row],
    lo: &[f64],
    hi: &[f64],
    tol: f64,
    tight: &[Tight],
) -> Option<Vec<f64>> {
    let n = c.len();
    if tight.len() != n || !well_formed(c, rows, lo, hi) {
        return None;
    }
    let (x, lambda) = vertex_solve(c, rows, lo, hi, tight)?;
    if !holds(rows, lo, hi, &x, tol * 1e-2) {
        return None;
    }
    let scale = 1.0 + c.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let strict = 1e-9 * scale;
    let signs_hold = tight.iter().zip(&lambda).all(|(t, &l)| match *t {
        Tight::Row(r) => rows[r].equality || l > strict,
        Tight::Upper(_) => l > strict,
        Tight::Lower(k) => hi[k] <= lo[k] || l < -strict,
    });
    signs_hold.then_some(x)
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
        // The rows' coefficients are read where they lie (the original rows,
        // then the bound rows' unit vectors), not copied.
        let coef = |i: usize, k: usize| match orig.get(i) {
            Some(r) => r.coeffs.get(k).copied().unwrap_or(0.0),
            None => f64::from(u8::from(i - orig.len() == k)),
        };
        let mut row_rhs: Vec<f64> = Vec::with_capacity(m);
        let mut row_slack: Vec<Option<usize>> = Vec::with_capacity(m);
        let mut next_slack = n;
        for r in orig {
            let shift: f64 = r.coeffs.iter().zip(lo).map(|(a, l)| a * l).sum();
            row_rhs.push(r.rhs - shift);
            if r.equality {
                row_slack.push(None);
            } else {
                row_slack.push(Some(next_slack));
                next_slack += 1;
            }
        }
        for k in 0..n {
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
                t[i * w + k] = s * coef(i, k);
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
    use crate::righting::feasibility::{
        self, Feasibility, Outlook, assess, assess_plain, tolerance,
    };
    use crate::righting::{RightingModel, moves};

    fn model(p: &Profile) -> RightingModel {
        let c = Cage::from_profile(p).expect("cage builds");
        RightingModel::new(p, &c).expect("model builds")
    }

    fn geodesic(k: u32) -> Profile {
        Profile::parse(&crate::geodesic::profile_toml(k), "geodesic").expect("profile")
    }

    /// Whether two figures agree to round-off.
    fn near(x: f64, y: f64) -> bool {
        (x - y).abs() <= 1e-9 * (1.0 + x.abs().max(y.abs()))
    }

    /// Two settings agree to round-off (newtons).
    fn same_setting(a: &[f64], b: &[f64]) -> bool {
        a.len() == b.len() && a.iter().zip(b).all(|(x, y)| (x - y).abs() <= 1e-7)
    }

    /// The fast check (the screen's proofs, warm starts from the previous
    /// angle's tight set, least-thrust settings proved to be the only
    /// optimum) and the plain one (the microlp solver, a general-purpose
    /// LP library, at every angle and for every command) agree on every
    /// move: the same verdict, blocking condition, worst angle and
    /// schedule by angle; the ratio, the moments and every thrust to
    /// round-off.
    fn agree_on_every_move(m: &RightingModel) -> usize {
        let mut compared = 0;
        for (k, mv) in m.moves.iter().enumerate() {
            let what = format!("{} -> {} ({:?})", mv.roll.from, mv.roll.to, mv.roll.kind);
            let plain = assess_plain(&m.cage, &mv.roll, &m.limits);
            let fast = &assess(&m.cage, &mv.roll, &m.limits);
            // The model's check is the same check without the commands,
            // and its commands, asked for, are the same commands.
            let check = feasibility::assess_check(&m.cage, &mv.roll, &m.limits);
            assert_eq!(m.check(k), &check, "{what}: repeatable");
            assert_eq!(m.commands(k), fast.commands.as_ref(), "{what}");
            assert_eq!(m.feasible(k), fast.feasible, "{what}");
            let same_but_commands = Feasibility {
                commands: None,
                feasible: check.feasible,
                ..fast.clone()
            };
            assert_eq!(check, same_but_commands, "{what}");
            assert_eq!(fast.feasible, plain.feasible, "{what}");
            assert_eq!(fast.blocked_by, plain.blocked_by, "{what}");
            assert_eq!(fast.worst_angle_deg, plain.worst_angle_deg, "{what}");
            assert_eq!(fast.tip_angle_deg, plain.tip_angle_deg, "{what}");
            match (fast.thrust_fraction, plain.thrust_fraction) {
                (Some(x), Some(y)) => assert!(near(x, y), "{what}: {x} vs {y}"),
                (x, y) => assert_eq!(x, y, "{what}"),
            }
            assert!(near(fast.needed_nm, plain.needed_nm), "{what}");
            assert!(near(fast.available_nm, plain.available_nm), "{what}");
            // What the start of the roll says holds for the whole check by
            // the LP: blocked there, no fraction at all; otherwise the
            // fraction is at least the bound, and a refusal is one.
            let outlook = feasibility::first_angle_outlook(&m.cage, &mv.roll, &m.limits);
            match (outlook, plain.thrust_fraction) {
                (Outlook::Blocked, f) => assert_eq!(f, None, "{what}: blocked at its start"),
                (Outlook::AtLeast(floor), Some(f)) => {
                    assert!(f >= floor * (1.0 - 1e-9), "{what}: {f} under {floor}")
                }
                (Outlook::AtLeast(_), None) => {}
            }
            if outlook.refused(m.limits.torque_margin) {
                assert!(!plain.feasible, "{what}: refused at its start");
            }
            match (&fast.commands, &plain.commands) {
                (Some(x), Some(y)) => {
                    assert!(
                        same_setting(&x.thrust_n, &y.thrust_n),
                        "{what}: {x:?} vs {y:?}"
                    );
                    assert_eq!(x.schedule.len(), y.schedule.len(), "{what}");
                    for (e, f) in x.schedule.iter().zip(&y.schedule) {
                        assert_eq!(e.from_deg, f.from_deg, "{what}");
                        assert!(
                            same_setting(&e.thrust_n, &f.thrust_n),
                            "{what}: {e:?} vs {f:?}"
                        );
                    }
                }
                (x, y) => assert_eq!(x, y, "{what}"),
            }
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

    /// With weak forward-only rotors most moves are blocked, many where no
    /// thrust gives any helping moment (the screen proves a best moment of
    /// exactly zero, short of what the LP path counts as carrying): the
    /// fast check still gives the verdicts and reasons of the plain check,
    /// which solves every angle with the microlp solver (a general-purpose
    /// LP library, the reference here).
    #[test]
    fn fast_check_agrees_with_the_lp_where_the_rotors_are_weak() {
        for k in [1, 2] {
            let mut p = geodesic(k);
            for r in &mut p.rotors {
                r.max_thrust_n *= 0.15;
                r.reverse_thrust_n = 0.0;
            }
            let m = model(&p);
            let n = agree_on_every_move(&m);
            let blocked = (0..m.moves.len())
                .filter(|&i| m.check(i).thrust_fraction.is_none())
                .count();
            assert!(n >= 3 * 20 * 4usize.pow(k), "level {k}: {n} moves");
            assert!(2 * blocked > n, "level {k}: {blocked} of {n} blocked");
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
            coeffs: coeffs.into(),
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

    /// Hand-worked: maximise -x - 2y subject to x + y >= 1 in the box
    /// [0, 2]^2 has the single optimum (1, 0), pinned by the row and the
    /// lower bound of y; maximise -x - y there has a whole segment of
    /// optima, so no unique answer is claimed. Moving the row to
    /// x + y >= 1.5 keeps the same tight set, which then gives (1.5, 0)
    /// without the simplex; a wrong tight set (x at its lower bound) gives
    /// a point whose multipliers have the wrong sign, and is refused
    /// (common practice, no published source).
    #[test]
    fn unique_optima_by_hand() {
        let row = |coeffs: Vec<f64>, rhs: f64| Row {
            coeffs: coeffs.into(),
            rhs,
            equality: false,
            condition: super::super::contact::Condition::LiftOff,
        };
        let (lo, hi) = ([0.0, 0.0], [2.0, 2.0]);
        let rows = [row(vec![-1.0, -1.0], -1.0)];
        let v = unique_optimum(&[-1.0, -2.0], &rows, &lo, &hi, 1e-7).expect("unique");
        assert!(
            (v.x[0] - 1.0).abs() < 1e-12 && v.x[1].abs() < 1e-12,
            "{v:?}"
        );
        assert_eq!(v.tight, vec![Tight::Row(0), Tight::Lower(1)]);
        assert_eq!(unique_optimum(&[-1.0, -1.0], &rows, &lo, &hi, 1e-7), None);
        let moved = [row(vec![-1.0, -1.0], -1.5)];
        let x = unique_optimum_at(&[-1.0, -2.0], &moved, &lo, &hi, 1e-7, &v.tight).expect("warm");
        assert!((x[0] - 1.5).abs() < 1e-12 && x[1].abs() < 1e-12, "{x:?}");
        let wrong = [Tight::Row(0), Tight::Lower(0)];
        assert_eq!(
            unique_optimum_at(&[-1.0, -2.0], &moved, &lo, &hi, 1e-7, &wrong),
            None
        );
        // The warm screen proves the same optimum as the simplex, with or
        // without a usable hint, and leaves a hint for the next one.
        let cold = screen(&[-1.0, -2.0], &moved, &lo, &hi, 1e-7);
        for start in [v.tight.clone(), wrong.to_vec(), Vec::new()] {
            let mut hint = start;
            let warm = screen_from(&[-1.0, -2.0], &moved, &lo, &hi, 1e-7, &mut hint);
            let (Screen::Optimum { lo: a, .. }, Screen::Optimum { lo: b, .. }) = (&warm, &cold)
            else {
                panic!("{warm:?} {cold:?}")
            };
            assert!((a - b).abs() < 1e-12 && (a + 1.5).abs() < 1e-12);
            assert_eq!(hint.len(), 2);
        }
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
            arms_m: Default::default(),
            rows: Vec::new(),
        };
        assert_eq!(best_moment(&rows, &[], 1e-7), Screen::Unknown);
    }
}
