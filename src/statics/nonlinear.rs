//! Nonlinear equilibrium of the prestressed cage under loads the linear
//! force method cannot balance (docs/design.md, "Why the linear answer is not
//! enough"): unknown node positions; member forces from Hooke's law about
//! rest lengths that carry the prestress; strings that cannot push;
//! Newton iterations with the consistent tangent stiffness; load stepping;
//! rigid-body motion removed from every step.
//!
//! Force law of member j with rest length L0, stiffness EA, current
//! length l and unit vector e: t = EA (l - L0) / L0, and t = 0 for a
//! string with l < L0. Its consistent tangent on the node pair is
//! k = (EA/L0) e e^T + (t/l) (I - e e^T) (zero material part when slack),
//! which is Guest's K = A diag(EA/L0 - t/l) A^T + kron(Omega, I3)
//! (Guest 2006, docs/references.md) written member by member.

use super::{StaticsError, Structure, remove_rigid, rigid_modes, stack};
use crate::cage::MemberKind;
use faer::linalg::solvers::Solve;
use faer::sparse::linalg::solvers::{Llt, Lu, SymbolicLlt, SymbolicLu};
use faer::sparse::{Argsort, Pair, SparseColMat, SymbolicSparseColMat, Triplet};
use nalgebra::{DMatrix, DVector, Matrix3, Vector3};

/// A load that may depend on the current node positions: writes the
/// nodal forces at positions `pos` and load factor `factor` into `out`.
pub type LoadFn<'l> = dyn Fn(&[Vector3<f64>], f64, &mut [Vector3<f64>]) + 'l;

/// Newton iterations allowed for one load step.
const MAX_NEWTON: usize = 40;
/// Full steps taken per load step when the line search finds no decrease.
const MAX_FORCED: usize = 3;
/// Smallest load step, as a fraction of the whole load change.
const MIN_STEP: f64 = 1e-4;
/// Residual accepted, as a fraction of the force scale (load and prestress).
const TOLERANCE: f64 = 1e-10;
/// Material stiffness kept by a slack string in the tangent (not in the
/// forces), as a fraction of its taut stiffness, so the tangent of a
/// momentarily slack mechanism stays invertible.
const SLACK_STIFFNESS: f64 = 1e-6;

/// Rest lengths for which the unloaded cage carries `prestress_n`:
/// L0 = L / (1 + t0 / EA). A compression beyond half of EA (no real member
/// survives it) is capped there so the rest length stays finite.
pub fn rest_lengths_m(s: &Structure, prestress_n: &[f64]) -> Vec<f64> {
    s.bars
        .iter()
        .zip(prestress_n)
        .map(|(b, &t0)| b.length_m / (1.0 + t0 / b.ea_n).max(0.5))
        .collect()
}

/// An equilibrium state of the cage.
#[derive(Debug, Clone, PartialEq)]
pub struct Equilibrium {
    /// Load factor this state balances.
    pub load: f64,
    /// Node positions, body frame.
    pub pos_m: Vec<Vector3<f64>>,
    /// Member forces, tension positive.
    pub force_n: Vec<f64>,
    /// Norm of the out-of-balance nodal force.
    pub residual_n: f64,
    /// Newton iterations spent reaching this state (cumulative).
    pub iterations: usize,
    /// Strings that are slack (member indices).
    pub slack: Vec<usize>,
}

/// The cage as a nonlinear elastic structure with its rest lengths.
#[derive(Debug, Clone)]
pub struct NonlinearModel<'a> {
    structure: &'a Structure,
    rest_m: Vec<f64>,
    prestress_scale_n: f64,
    reference_modes: DMatrix<f64>,
}

impl<'a> NonlinearModel<'a> {
    /// The model whose unloaded state carries `prestress_n`.
    pub fn new(structure: &'a Structure, prestress_n: &[f64]) -> NonlinearModel<'a> {
        NonlinearModel {
            structure,
            rest_m: rest_lengths_m(structure, prestress_n),
            prestress_scale_n: prestress_n.iter().fold(0.0, |m, t| m.max(t.abs())),
            reference_modes: rigid_modes(&structure.pos_m),
        }
    }

    /// The unloaded state (load factor 0) at the cage's own geometry.
    pub fn unloaded(&self) -> Equilibrium {
        let pos = self.structure.pos_m.clone();
        let mut force = vec![0.0; self.structure.bars.len()];
        self.member_forces(&pos, &mut force);
        let mut g = DVector::zeros(3 * pos.len());
        self.structure.internal_forces(&pos, &force, &mut g);
        Equilibrium {
            load: 0.0,
            slack: self.slack(&pos),
            residual_n: g.norm(),
            pos_m: pos,
            force_n: force,
            iterations: 0,
        }
    }

    /// Member forces at positions `pos` by the force law.
    pub fn member_forces(&self, pos: &[Vector3<f64>], out: &mut [f64]) {
        for ((bar, &l0), t) in self.structure.bars.iter().zip(&self.rest_m).zip(out) {
            let l = (pos[bar.nodes[0]] - pos[bar.nodes[1]]).norm();
            *t = bar.ea_n * (l - l0) / l0;
            if bar.kind == MemberKind::String && *t < 0.0 {
                *t = 0.0;
            }
        }
    }

    fn slack(&self, pos: &[Vector3<f64>]) -> Vec<usize> {
        self.structure
            .bars
            .iter()
            .zip(&self.rest_m)
            .enumerate()
            .filter(|(_, (b, l0))| {
                b.kind == MemberKind::String && (pos[b.nodes[0]] - pos[b.nodes[1]]).norm() < **l0
            })
            .map(|(j, _)| j)
            .collect()
    }

    /// Displacements from the unloaded geometry with the best-fit rigid
    /// motion (the six rigid modes of the unloaded cage) removed.
    pub fn deformation(&self, pos: &[Vector3<f64>]) -> Vec<Vector3<f64>> {
        let mut u = stack(pos) - stack(&self.structure.pos_m);
        remove_rigid(&self.reference_modes, &mut u);
        (0..pos.len())
            .map(|i| Vector3::new(u[3 * i], u[3 * i + 1], u[3 * i + 2]))
            .collect()
    }

    /// Residual f - A t at positions `pos`, with its member forces.
    fn residual(
        &self,
        pos: &[Vector3<f64>],
        load: &LoadFn,
        factor: f64,
        force: &mut [f64],
        f_buf: &mut [Vector3<f64>],
        r: &mut DVector<f64>,
    ) {
        self.member_forces(pos, force);
        self.structure.internal_forces(pos, force, r);
        load(pos, factor, f_buf);
        for (i, f) in f_buf.iter().enumerate() {
            for k in 0..3 {
                r[3 * i + k] = f[k] - r[3 * i + k];
            }
        }
    }

    /// Consistent tangent stiffness at `pos` (3n x 3n), plus a penalty on
    /// the rigid-body modes so the system is solvable.
    /// Dense: only the fallback when the sparse solve fails.
    fn tangent(&self, pos: &[Vector3<f64>], force: &[f64], k: &mut DMatrix<f64>) {
        k.fill(0.0);
        for ((bar, &l0), &t) in self.structure.bars.iter().zip(&self.rest_m).zip(force) {
            let [a, b] = bar.nodes;
            let Some(kj) = member_tangent(bar, l0, t, pos) else {
                continue;
            };
            for r in 0..3 {
                for c in 0..3 {
                    let v = kj[(r, c)];
                    k[(3 * a + r, 3 * a + c)] += v;
                    k[(3 * b + r, 3 * b + c)] += v;
                    k[(3 * a + r, 3 * b + c)] -= v;
                    k[(3 * b + r, 3 * a + c)] -= v;
                }
            }
        }
        let scale = (0..k.nrows()).map(|i| k[(i, i)].abs()).fold(0.0, f64::max);
        let modes = rigid_modes(pos);
        // One product for the six rank-one penalty terms.
        k.gemm(scale.max(1.0), &modes, &modes.transpose(), 1.0);
    }

    /// Follow the load from the state `start` to load factor `to`, in load
    /// steps with Newton iterations, and return the equilibrium reached.
    pub fn solve(
        &self,
        start: &Equilibrium,
        load: &LoadFn,
        to: f64,
    ) -> Result<Equilibrium, StaticsError> {
        let n = self.structure.node_count();
        let b = self.structure.bars.len();
        let mut f_buf = vec![Vector3::zeros(); n];
        load(&start.pos_m, to, &mut f_buf);
        let load_scale = f_buf.iter().fold(0.0_f64, |m, f| m.max(f.amax()));
        let tol = TOLERANCE * load_scale.max(self.prestress_scale_n).max(1.0);

        let mut ws = Workspace {
            force: vec![0.0; b],
            f_buf,
            r: DVector::zeros(3 * n),
            k: None,
            sparse: SparseTangent::new(&self.structure.pos_m),
            trial: vec![Vector3::zeros(); n],
        };
        let from = start.load;
        let mut pos = start.pos_m.clone();
        let mut iterations = start.iterations;
        let mut done = 0.0_f64;
        let mut step = 1.0_f64;
        let mut last_residual;
        loop {
            let s = (done + step).min(1.0);
            let factor = from + s * (to - from);
            let mut trial_pos = pos.clone();
            match self.newton(&mut trial_pos, load, factor, tol, &mut ws) {
                Ok((res, it)) => {
                    iterations += it;
                    pos = trial_pos;
                    done = s;
                    last_residual = res;
                    if done >= 1.0 {
                        break;
                    }
                    step = (step * 1.5).min(1.0 - done);
                }
                Err((res, it)) => {
                    iterations += it;
                    last_residual = res;
                    step /= 2.0;
                    if step < MIN_STEP {
                        return Err(StaticsError::NoEquilibrium {
                            load: to,
                            reached: from + done * (to - from),
                            residual_n: last_residual,
                            iterations,
                        });
                    }
                }
            }
        }
        let mut force = vec![0.0; b];
        self.member_forces(&pos, &mut force);
        Ok(Equilibrium {
            load: to,
            slack: self.slack(&pos),
            pos_m: pos,
            force_n: force,
            residual_n: last_residual,
            iterations,
        })
    }

    /// Newton iterations at one load factor. Ok: residual and iterations;
    /// Err: the same when it did not converge.
    fn newton(
        &self,
        pos: &mut [Vector3<f64>],
        load: &LoadFn,
        factor: f64,
        tol: f64,
        ws: &mut Workspace,
    ) -> Result<(f64, usize), (f64, usize)> {
        let size = self.structure.size_m().max(1e-9);
        self.residual(pos, load, factor, &mut ws.force, &mut ws.f_buf, &mut ws.r);
        let mut rn = ws.r.norm();
        let mut forced = 0;
        for it in 0..MAX_NEWTON {
            if rn <= tol {
                return Ok((rn, it));
            }
            // A small cage's tangent is solved dense: for a few dozen
            // coordinates the sparse set-up (triplets sorted, ordering,
            // symbolic analysis) costs more than the whole dense LU.
            let step = if ws.r.len() <= DENSE_UP_TO {
                self.dense_step(pos, ws)
                    .or_else(|| ws.sparse.solve(self, pos, &ws.force, &ws.r))
            } else {
                ws.sparse
                    .solve(self, pos, &ws.force, &ws.r)
                    .or_else(|| self.dense_step(pos, ws))
            };
            let Some(mut dx) = step else {
                return Err((rn, it));
            };
            let modes = rigid_modes(pos);
            remove_rigid(&modes, &mut dx);
            // Cap the step: no node moves more than a tenth of the cage size.
            let biggest = (0..pos.len())
                .map(|i| dx.fixed_rows::<3>(3 * i).norm())
                .fold(0.0, f64::max);
            if biggest > 0.1 * size {
                dx *= 0.1 * size / biggest;
            }
            // Backtrack until the residual falls.
            let mut alpha = 1.0;
            let mut accepted = false;
            for _ in 0..12 {
                for (i, p) in ws.trial.iter_mut().enumerate() {
                    *p = pos[i] + dx.fixed_rows::<3>(3 * i) * alpha;
                }
                self.residual(
                    &ws.trial,
                    load,
                    factor,
                    &mut ws.force,
                    &mut ws.f_buf,
                    &mut ws.r,
                );
                let trial_rn = ws.r.norm();
                if trial_rn < rn * (1.0 - 1e-4 * alpha) || trial_rn <= tol {
                    pos.copy_from_slice(&ws.trial);
                    rn = trial_rn;
                    accepted = true;
                    break;
                }
                alpha /= 2.0;
            }
            if !accepted {
                // The residual is not smooth where a string goes slack or
                // taut, so no step along dx may lower it; take the full
                // step once in a while so the slack set can change.
                if forced >= MAX_FORCED {
                    return Err((rn, it + 1));
                }
                forced += 1;
                for (i, p) in pos.iter_mut().enumerate() {
                    *p += dx.fixed_rows::<3>(3 * i);
                }
                self.residual(pos, load, factor, &mut ws.force, &mut ws.f_buf, &mut ws.r);
                rn = ws.r.norm();
            }
        }
        if rn <= tol {
            Ok((rn, MAX_NEWTON))
        } else {
            Err((rn, MAX_NEWTON))
        }
    }
}

impl NonlinearModel<'_> {
    /// The Newton step by the dense tangent (LU, then SVD): the fallback
    /// for a tangent the sparse LU cannot factorise.
    fn dense_step(&self, pos: &[Vector3<f64>], ws: &mut Workspace) -> Option<DVector<f64>> {
        let dim = ws.r.len();
        let k = ws.k.get_or_insert_with(|| DMatrix::zeros(dim, dim));
        self.tangent(pos, &ws.force, k);
        // K plus the rigid-mode penalty is symmetric, and positive definite
        // while the cage is stable: Cholesky at half the cost of LU, and LU
        // where Cholesky finds it is not.
        let step = match k.clone().cholesky() {
            Some(llt) => Some(llt.solve(&ws.r)),
            None => k.clone().lu().solve(&ws.r),
        };
        match step {
            Some(dx) if dx.iter().all(|v| v.is_finite()) => Some(dx),
            _ => super::svd(k.clone(), "tangent stiffness")
                .ok()
                .and_then(|s| s.solve(&ws.r, 1e-12).ok()),
        }
    }
}

/// Consistent tangent of one member on its node pair (none for a member
/// of zero length).
fn member_tangent(bar: &super::Bar, l0: f64, t: f64, pos: &[Vector3<f64>]) -> Option<Matrix3<f64>> {
    let [a, b] = bar.nodes;
    let d = pos[a] - pos[b];
    let l = d.norm();
    if l <= 0.0 {
        return None;
    }
    let e = d / l;
    let taut = bar.kind == MemberKind::Rod || l >= l0;
    let k_mat = bar.ea_n / l0 * if taut { 1.0 } else { SLACK_STIFFNESS };
    let q = t / l;
    let ee = e * e.transpose();
    Some(ee * k_mat + (Matrix3::identity() - ee) * q)
}

/// Coordinates (3 per node) up to which the Newton step is solved dense
/// first: 60 nodes. Measured on the demo (12 nodes): the sparse set-up per
/// iteration was most of `cage margin`'s time.
const DENSE_UP_TO: usize = 180;

/// The tangent system K dx = r solved sparse. The dense solver this
/// replaces factorised M = K + s Phi Phi^T (Phi: the rigid modes, s the
/// largest diagonal entry), a matrix made dense by the rank-six penalty.
/// Here the same M is written as B + U C U^T with B = K + s E sparse (E:
/// springs on the nine coordinates of three nodes spanning a triangle, so
/// B has no rigid motion left), U = [Phi | E's columns] and
/// C = diag(s, -s): one sparse LU of B and the Woodbury identity give
/// M^-1 r to round-off, with no dense 3n x 3n matrix.
struct SparseTangent {
    /// Coordinates held by the springs of E.
    anchors: Vec<usize>,
    /// Triplets of B, in a fixed order so the pattern never changes.
    triplets: Vec<Triplet<usize, usize, f64>>,
    /// B's pattern and where each triplet goes in it, worked out on first
    /// use: later iterations fill in the values without sorting the
    /// triplets again (faer's `new_from_argsort`; the same matrix as
    /// `try_new_from_triplets`, which is these two steps).
    pattern: Option<(SymbolicSparseColMat<usize>, Argsort<usize>)>,
    /// The triplets' values, in their order.
    values: Vec<f64>,
    /// Symbolic LU of B's pattern, computed on first use.
    symbolic: Option<SymbolicLu<usize>>,
    /// Symbolic Cholesky of B's pattern, computed on first use: B is
    /// symmetric, and positive definite while the cage is stable, where
    /// the Cholesky factorisation costs a fraction of the LU.
    symbolic_llt: Option<SymbolicLlt<usize>>,
}

impl SparseTangent {
    fn new(pos: &[Vector3<f64>]) -> SparseTangent {
        // Three nodes far apart: the first, the farthest from it, and the
        // farthest from the line through both.
        let a = 0;
        let far = |f: &dyn Fn(&Vector3<f64>) -> f64| {
            (0..pos.len())
                .max_by(|&i, &j| f(&pos[i]).total_cmp(&f(&pos[j])))
                .unwrap_or(0)
        };
        let b = far(&|p| (p - pos[a]).norm());
        let axis = (pos[b] - pos[a])
            .try_normalize(0.0)
            .unwrap_or_else(Vector3::x);
        let c = far(&|p| {
            let r = p - pos[a];
            (r - axis * axis.dot(&r)).norm()
        });
        let mut nodes = vec![a, b, c];
        nodes.sort_unstable();
        nodes.dedup();
        SparseTangent {
            anchors: nodes
                .iter()
                .flat_map(|&i| [3 * i, 3 * i + 1, 3 * i + 2])
                .collect(),
            triplets: Vec::new(),
            pattern: None,
            values: Vec::new(),
            symbolic: None,
            symbolic_llt: None,
        }
    }

    /// Solve (K + s Phi Phi^T) dx = r for the tangent at `pos`; `None` when
    /// the sparse factorisation fails or gives a non-finite answer (the
    /// caller then falls back to the dense solver).
    fn solve(
        &mut self,
        model: &NonlinearModel,
        pos: &[Vector3<f64>],
        force: &[f64],
        r: &DVector<f64>,
    ) -> Option<DVector<f64>> {
        let dim = r.len();
        let mut diag = vec![0.0; dim];
        self.triplets.clear();
        for ((bar, &l0), &t) in model.structure.bars.iter().zip(&model.rest_m).zip(force) {
            let kj = member_tangent(bar, l0, t, pos).unwrap_or_else(Matrix3::zeros);
            let [a, b] = bar.nodes;
            for rr in 0..3 {
                diag[3 * a + rr] += kj[(rr, rr)];
                diag[3 * b + rr] += kj[(rr, rr)];
                for cc in 0..3 {
                    let v = kj[(rr, cc)];
                    self.triplets.push(Triplet::new(3 * a + rr, 3 * a + cc, v));
                    self.triplets.push(Triplet::new(3 * b + rr, 3 * b + cc, v));
                    self.triplets.push(Triplet::new(3 * a + rr, 3 * b + cc, -v));
                    self.triplets.push(Triplet::new(3 * b + rr, 3 * a + cc, -v));
                }
            }
        }
        let s = diag.iter().fold(0.0_f64, |m, d| m.max(d.abs())).max(1.0);
        // Every diagonal entry present, so the pattern is the same every time.
        for i in 0..dim {
            let spring = if self.anchors.contains(&i) { s } else { 0.0 };
            self.triplets.push(Triplet::new(i, i, spring));
        }
        if self.pattern.is_none() {
            let pairs: Vec<Pair<usize, usize>> = self
                .triplets
                .iter()
                .map(|t| Pair::new(t.row, t.col))
                .collect();
            self.pattern = SymbolicSparseColMat::try_new_from_indices(dim, dim, &pairs).ok();
        }
        let (pattern, order) = self.pattern.as_ref()?;
        self.values.clear();
        self.values.extend(self.triplets.iter().map(|t| t.val));
        let bmat =
            SparseColMat::<usize, f64>::new_from_argsort(pattern.clone(), order, &self.values)
                .ok()?;
        if self.symbolic_llt.is_none() {
            self.symbolic_llt = SymbolicLlt::try_new(bmat.symbolic(), faer::Side::Lower).ok();
        }
        let llt = self
            .symbolic_llt
            .clone()
            .and_then(|sym| Llt::try_new_with_symbolic(sym, bmat.as_ref(), faer::Side::Lower).ok());
        // Not positive definite (a compressed rod near buckling): LU.
        let factor = match llt {
            Some(llt) => Ok(llt),
            None => {
                if self.symbolic.is_none() {
                    self.symbolic = Some(SymbolicLu::try_new(bmat.symbolic()).ok()?);
                }
                Err(Lu::try_new_with_symbolic(self.symbolic.clone()?, bmat.as_ref()).ok()?)
            }
        };
        let modes = rigid_modes(pos);
        let q = modes.ncols();
        let extra = q + self.anchors.len();
        // Right-hand sides: r, then the columns of U.
        let mut y = faer::Mat::<f64>::zeros(dim, 1 + extra);
        for i in 0..dim {
            y[(i, 0)] = r[i];
            for c in 0..q {
                y[(i, 1 + c)] = modes[(i, c)];
            }
        }
        for (k, &i) in self.anchors.iter().enumerate() {
            y[(i, 1 + q + k)] = 1.0;
        }
        match &factor {
            Ok(llt) => llt.solve_in_place(y.as_mut()),
            Err(lu) => lu.solve_in_place(y.as_mut()),
        }
        // U^T y for a column of y.
        let ut = |col: usize, row: usize| -> f64 {
            if row < q {
                (0..dim).map(|i| modes[(i, row)] * y[(i, col)]).sum()
            } else {
                y[(self.anchors[row - q], col)]
            }
        };
        let cap = DMatrix::from_fn(extra, extra, |i, j| {
            let c_inv = if i == j {
                if i < q { 1.0 / s } else { -1.0 / s }
            } else {
                0.0
            };
            c_inv + ut(1 + j, i)
        });
        let z = DVector::from_fn(extra, |i, _| ut(0, i));
        let w = cap.lu().solve(&z)?;
        let dx = DVector::from_fn(dim, |i, _| {
            y[(i, 0)] - (0..extra).map(|k| y[(i, 1 + k)] * w[k]).sum::<f64>()
        });
        dx.iter().all(|v| v.is_finite()).then_some(dx)
    }
}

struct Workspace {
    force: Vec<f64>,
    f_buf: Vec<Vector3<f64>>,
    r: DVector<f64>,
    /// Dense tangent, made only if the sparse solve ever fails.
    k: Option<DMatrix<f64>>,
    sparse: SparseTangent,
    trial: Vec<Vector3<f64>>,
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::profile::Profile;
    use crate::statics::{linear_load_case, self_stress};
    use approx::assert_relative_eq;

    fn demo() -> (Structure, Vec<f64>) {
        let p = Profile::demo().unwrap();
        let s = Structure::from_cage(&Cage::from_profile(&p).unwrap(), &p);
        let t0 = self_stress(&s, p.string.pretension_n).unwrap().prestress_n;
        (s, t0)
    }

    #[test]
    fn rest_lengths_carry_the_prestress() {
        let (s, t0) = demo();
        let model = NonlinearModel::new(&s, &t0);
        let u = model.unloaded();
        for (t, t_ref) in u.force_n.iter().zip(&t0) {
            assert_relative_eq!(t, t_ref, epsilon = 1e-9);
        }
        assert!(u.residual_n < 1e-9);
    }

    #[test]
    fn zero_load_leaves_the_cage_at_rest() {
        // The unloaded cage is in equilibrium at its prestress: the solver
        // must neither move it nor change a force.
        let (s, t0) = demo();
        let model = NonlinearModel::new(&s, &t0);
        let none =
            |_: &[Vector3<f64>], _: f64, out: &mut [Vector3<f64>]| out.fill(Vector3::zeros());
        let eq = model.solve(&model.unloaded(), &none, 1.0).unwrap();
        let moved = model
            .deformation(&eq.pos_m)
            .iter()
            .map(|u| u.norm())
            .fold(0.0, f64::max);
        assert!(moved < 1e-12, "moved {moved}");
        for (t, t_ref) in eq.force_n.iter().zip(&t0) {
            assert_relative_eq!(t, t_ref, epsilon = 1e-9);
        }
        assert!(eq.slack.is_empty());
    }

    #[test]
    fn small_load_agrees_with_the_force_method() {
        // docs/references.md (Zhang & Ohsaki 2015; Skelton & de Oliveira 2009,
        // from memory): for a small load in the range of A the nonlinear
        // solution must agree with the linear force method (Pellegrino 1993).
        // Load: the two ends of rod R1 pulled apart, equal and opposite
        // forces along the rod.
        let (s, t0) = demo();
        let [a, b] = s.bars[0].nodes;
        let e = (s.pos_m[a] - s.pos_m[b]).normalize();
        let p_n = 0.5;
        let mut loads = vec![Vector3::zeros(); s.node_count()];
        loads[a] = e * p_n;
        loads[b] = -e * p_n;
        let lin = linear_load_case(&s, &t0, &loads).unwrap();
        assert!(lin.residual_n < 1e-9 && lin.slack.is_empty());
        let model = NonlinearModel::new(&s, &t0);
        let dead = |_: &[Vector3<f64>], k: f64, out: &mut [Vector3<f64>]| {
            for (o, f) in out.iter_mut().zip(&loads) {
                *o = f * k;
            }
        };
        let eq = model.solve(&model.unloaded(), &dead, 1.0).unwrap();
        assert!(eq.residual_n < 1e-6 * p_n);
        for (j, (tn, tl)) in eq.force_n.iter().zip(&lin.total_n).enumerate() {
            // Agreement to a small fraction of the load (second-order terms).
            // Seen: at most 3e-5 of the load for this case.
            assert!((tn - tl).abs() < 1e-4 * p_n, "member {j}: {tn} vs {tl}");
        }
        // The rod itself takes most of the pull as less compression.
        assert!(lin.response_n[0] > 0.0);
    }
}
