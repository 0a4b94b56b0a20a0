//! The self-stress projection without a dense decomposition, for cages
//! with no mechanism (the usual case for a large cage).
//!
//! The member forces t are a self-stress when A t = 0. Internal forces are
//! always self-equilibrated as a free body (R^T A = 0, R the six rigid-body
//! motions), so the six rows of A at a statically determinate support
//! (three coordinates of a node, two of a second, one of a third, chosen
//! so that no rigid motion leaves them all fixed) are combinations of the
//! other rows: dropping them gives A_red with null(A_red) = null(A)
//! exactly. With no mechanism A_red has full row rank 3n - 6, and
//! K = A_red A_red^T (a stiffness matrix with unit axial stiffnesses, one
//! 6 x 6 block per member) is sparse, symmetric and positive definite. The
//! part of g in the null space is then t = g - A_red^T y with K y = A_red g
//! (one sparse Cholesky factorisation), refined until A t vanishes to
//! round-off. This is the orthogonal projection the dense decomposition
//! gives (Pellegrino 1993, docs/references.md: the self-stress states span
//! the null space of A), computed in near-linear time.
//!
//! The shortcut is taken only when it is safe: when the factorisation
//! fails, or an estimate of K's smallest eigenvalue says it is near
//! singular (a mechanism, or nearly one), or the refined answer still does
//! not balance, [`project`] returns `None` and the caller uses the dense
//! decomposition, which handles every cage.

use super::Bar;
use faer::linalg::solvers::Solve;
use faer::sparse::linalg::solvers::{Llt, SymbolicLlt};
use faer::sparse::{SparseColMat, Triplet};
use faer::{Mat, Side};
use nalgebra::Vector3;

/// K is accepted when its smallest eigenvalue, as estimated, is at least
/// this fraction of a bound on the largest eigenvalue of A A^T: the
/// singular values of A then stay above 1e-4 of the largest, far from the
/// dense rank tolerance (1e-9), and the refined answer is exact to
/// round-off.
const CONDITION_FLOOR: f64 = 1e-8;
/// Inverse iterations for the smallest eigenvalue of K.
const INVERSE_ITERATIONS: usize = 10;
/// Refinement passes at most.
const MAX_REFINE: usize = 4;
/// |A t| accepted, as a fraction of |g| times the largest column norm of A.
const BALANCE_TOLERANCE: f64 = 1e-13;
/// |A t| beyond which the answer is refused, same scale.
const BALANCE_LIMIT: f64 = 1e-11;

/// The rank of A and the part of `g` (one entry per member) in the null
/// space of A, when the cage has no mechanism and the sparse route is
/// well conditioned; `None` otherwise (use the dense decomposition).
pub(crate) fn project(pos: &[Vector3<f64>], bars: &[Bar], g: &[f64]) -> Option<(usize, Vec<f64>)> {
    let n = pos.len();
    let b = bars.len();
    if n < 3 || g.len() != b || b + 6 < 3 * n {
        // Fewer members than 3n - 6: A cannot have full row rank.
        return None;
    }
    let support = support(pos)?;
    // Reduced index of every coordinate, `usize::MAX` for the support.
    let mut index = vec![0usize; 3 * n];
    let mut next = 0;
    for (i, slot) in index.iter_mut().enumerate() {
        if support.contains(&i) {
            *slot = usize::MAX;
        } else {
            *slot = next;
            next += 1;
        }
    }
    let dim = next;
    let units = unit_vectors(pos, bars);
    let k = stiffness(bars, &units, &index, dim)?;
    let symbolic = SymbolicLlt::try_new(k.symbolic(), Side::Lower).ok()?;
    let llt = Llt::try_new_with_symbolic(symbolic, k.as_ref(), Side::Lower).ok()?;
    if !well_conditioned(&llt, dim, gershgorin_full(bars, &units, n)) {
        return None;
    }

    let red = |t: &[f64], out: &mut Mat<f64>| {
        // out = A_red t (one column).
        out.fill(0.0);
        for ((bar, e), &tj) in bars.iter().zip(&units).zip(t) {
            let [p, q] = bar.nodes;
            for c in 0..3 {
                let (ip, iq) = (index[3 * p + c], index[3 * q + c]);
                if ip != usize::MAX {
                    out[(ip, 0)] += e[c] * tj;
                }
                if iq != usize::MAX {
                    out[(iq, 0)] -= e[c] * tj;
                }
            }
        }
    };
    let subtract_transpose = |y: &Mat<f64>, t: &mut [f64]| {
        // t -= A_red^T y.
        for ((bar, e), tj) in bars.iter().zip(&units).zip(t.iter_mut()) {
            let [p, q] = bar.nodes;
            let at = |i: usize| if i == usize::MAX { 0.0 } else { y[(i, 0)] };
            for c in 0..3 {
                *tj -= e[c] * (at(index[3 * p + c]) - at(index[3 * q + c]));
            }
        }
    };

    let g_norm = g.iter().map(|x| x * x).sum::<f64>().sqrt();
    // Every non-empty column of A has norm sqrt(2).
    let scale = g_norm * std::f64::consts::SQRT_2;
    let mut t = g.to_vec();
    let mut y = Mat::<f64>::zeros(dim, 1);
    let mut balanced = false;
    for _ in 0..=MAX_REFINE {
        red(&t, &mut y);
        let r = y.norm_l2();
        if !r.is_finite() {
            return None;
        }
        if r <= BALANCE_TOLERANCE * scale {
            balanced = true;
            break;
        }
        llt.solve_in_place(y.as_mut());
        subtract_transpose(&y, &mut t);
    }
    // The six support rows are combinations of the others; check them too.
    let imbalance = full_imbalance(n, bars, &units, &t);
    // A comparison with NaN is false, so a non-finite answer is refused.
    let ok = balanced && imbalance <= BALANCE_LIMIT * scale && t.iter().all(|x| x.is_finite());
    ok.then_some((3 * n - 6, t))
}

/// Six coordinates of a statically determinate support: all three of a
/// node far from the centroid, the two at a second node (the farthest from
/// the first) most nearly perpendicular to the line between them, and the
/// one at a third node (the farthest from that line) most nearly normal to
/// the plane of the three. No rigid motion leaves all six fixed. `None`
/// when the nodes are (nearly) collinear.
fn support(pos: &[Vector3<f64>]) -> Option<[usize; 6]> {
    let centre = super::centroid(pos);
    let farthest = |f: &dyn Fn(&Vector3<f64>) -> f64| {
        (0..pos.len()).max_by(|&i, &j| f(&pos[i]).total_cmp(&f(&pos[j])))
    };
    let a = farthest(&|p| (p - centre).norm())?;
    let b = farthest(&|p| (p - pos[a]).norm())?;
    let d = pos[b] - pos[a];
    let axis = d.try_normalize(0.0)?;
    let off_line = |p: &Vector3<f64>| {
        let r = p - pos[a];
        (r - axis * axis.dot(&r)).norm()
    };
    let c = farthest(&off_line)?;
    let spread = off_line(&pos[c]);
    if spread.is_nan() || spread <= 1e-6 * d.norm() {
        return None;
    }
    let normal = d.cross(&(pos[c] - pos[a]));
    let largest = |v: &Vector3<f64>| v.iamax();
    let along = largest(&d);
    let [b1, b2] = match along {
        0 => [1, 2],
        1 => [0, 2],
        _ => [0, 1],
    };
    let cn = largest(&normal);
    Some([
        3 * a,
        3 * a + 1,
        3 * a + 2,
        3 * b + b1,
        3 * b + b2,
        3 * c + cn,
    ])
}

/// Unit vector of every member from its second node to its first (zero
/// for a member of zero length): the entries of A.
fn unit_vectors(pos: &[Vector3<f64>], bars: &[Bar]) -> Vec<Vector3<f64>> {
    bars.iter()
        .map(|bar| {
            let d = pos[bar.nodes[0]] - pos[bar.nodes[1]];
            let l = d.norm();
            if l > 0.0 { d / l } else { Vector3::zeros() }
        })
        .collect()
}

/// K = A_red A_red^T, both triangles, every diagonal entry present.
fn stiffness(
    bars: &[Bar],
    units: &[Vector3<f64>],
    index: &[usize],
    dim: usize,
) -> Option<SparseColMat<usize, f64>> {
    let mut triplets = Vec::with_capacity(36 * bars.len() + dim);
    for (bar, e) in bars.iter().zip(units) {
        let [p, q] = bar.nodes;
        for r in 0..3 {
            for c in 0..3 {
                let v = e[r] * e[c];
                if v == 0.0 {
                    continue;
                }
                for (node_r, node_c, sign) in [(p, p, 1.0), (q, q, 1.0), (p, q, -1.0), (q, p, -1.0)]
                {
                    let (i, j) = (index[3 * node_r + r], index[3 * node_c + c]);
                    if i != usize::MAX && j != usize::MAX {
                        triplets.push(Triplet::new(i, j, sign * v));
                    }
                }
            }
        }
    }
    for i in 0..dim {
        triplets.push(Triplet::new(i, i, 0.0));
    }
    SparseColMat::try_new_from_triplets(dim, dim, &triplets).ok()
}

/// Gershgorin bound on the largest eigenvalue of the full A A^T, i.e. on
/// the square of A's largest singular value.
fn gershgorin_full(bars: &[Bar], units: &[Vector3<f64>], n: usize) -> f64 {
    let mut rows = vec![0.0; 3 * n];
    for (bar, e) in bars.iter().zip(units) {
        let [p, q] = bar.nodes;
        let abs: f64 = e.iter().map(|x| x.abs()).sum();
        for r in 0..3 {
            // Row r of node p (and of q): |e_r| |e_c| over c, twice (the
            // p-p block and the p-q block).
            let v = 2.0 * e[r].abs() * abs;
            rows[3 * p + r] += v;
            rows[3 * q + r] += v;
        }
    }
    rows.into_iter().fold(0.0, f64::max)
}

/// Whether K's smallest eigenvalue, estimated by inverse iteration from a
/// fixed scrambled start, is at least [`CONDITION_FLOOR`] of `largest`.
/// Each ratio |K^-1 v| / |v| is at most 1 / lambda_min and never falls from
/// one iteration to the next; after k iterations it is at least c^(1/k) /
/// lambda_min, c the start's share along the weakest mode, so the estimate
/// errs by a small factor only (and the floor keeps a wide margin).
fn well_conditioned(llt: &Llt<usize, f64>, dim: usize, largest: f64) -> bool {
    if dim == 0 {
        return true;
    }
    let mut state = 0x9E37_79B9_7F4A_7C15_u64;
    let mut v = Mat::<f64>::from_fn(dim, 1, |_, _| {
        // xorshift64: a start with no structure in common with the cage.
        state ^= state << 13;
        state ^= state >> 7;
        state ^= state << 17;
        (state >> 11) as f64 / (1u64 << 53) as f64 - 0.5
    });
    let mut norm = v.norm_l2();
    let mut ratio = 0.0;
    for _ in 0..INVERSE_ITERATIONS {
        if !(norm > 0.0 && norm.is_finite()) {
            return false;
        }
        v *= faer::Scale(1.0 / norm);
        llt.solve_in_place(v.as_mut());
        norm = v.norm_l2();
        ratio = norm;
    }
    ratio.is_finite() && ratio > 0.0 && 1.0 / ratio >= CONDITION_FLOOR * largest
}

/// |A t| over every row of A, the support's included.
fn full_imbalance(n: usize, bars: &[Bar], units: &[Vector3<f64>], t: &[f64]) -> f64 {
    let mut f = vec![0.0; 3 * n];
    for ((bar, e), &tj) in bars.iter().zip(units).zip(t) {
        let [p, q] = bar.nodes;
        for c in 0..3 {
            f[3 * p + c] += e[c] * tj;
            f[3 * q + c] -= e[c] * tj;
        }
    }
    f.iter().map(|x| x * x).sum::<f64>().sqrt()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::{Cage, MemberKind};
    use crate::profile::Profile;
    use crate::statics::Structure;
    use crate::statics::matrix::RowSpace;

    fn geodesic_with(k: u32, rods: crate::geodesic::Rods) -> Structure {
        let text = crate::geodesic::profile_toml_with(k, rods);
        let p = Profile::parse(&text, "geodesic").unwrap();
        Structure::from_cage(&Cage::from_profile(&p).unwrap(), &p)
    }

    /// The geodesic cage with antipodal rods.
    fn geodesic(k: u32) -> Structure {
        geodesic_with(k, crate::geodesic::Rods::Antipodal)
    }

    /// The geodesic cage with a spoke from every node to a centre node.
    fn hub(k: u32) -> Structure {
        geodesic_with(k, crate::geodesic::Rods::Hub)
    }

    /// A load pattern on the members with no structure: strings at 1, the
    /// rest scrambled.
    fn patterns(s: &Structure) -> Vec<Vec<f64>> {
        let strings = s
            .bars
            .iter()
            .map(|b| f64::from(u8::from(b.kind == MemberKind::String)))
            .collect();
        let scrambled = (0..s.bars.len())
            .map(|j| ((j * 7919 + 13) % 101) as f64 / 50.0 - 1.0)
            .collect();
        vec![strings, scrambled]
    }

    /// The sparse route, where taken, agrees with the dense decomposition
    /// (the reference: an orthogonal projection from a full SVD, Golub &
    /// Van Loan, Matrix Computations, 4th ed., 2013, section 2.5) to
    /// round-off, rank included. Returns whether it was taken.
    fn agrees(s: &Structure) -> bool {
        let dense = RowSpace::new(&s.pos_m, &s.bars).unwrap();
        let mut taken = false;
        for g in patterns(s) {
            let Some((rank, t)) = project(&s.pos_m, &s.bars, &g) else {
                continue;
            };
            taken = true;
            assert_eq!(rank, dense.rank);
            assert_eq!(rank, 3 * s.node_count() - 6);
            let want = dense.null_part(&g);
            let big = want.iter().fold(0.0_f64, |m, x| m.max(x.abs())).max(1e-300);
            for (j, (x, y)) in t.iter().zip(&want).enumerate() {
                assert!(
                    (x - y).abs() <= 1e-9 * big,
                    "member {j}: {x} sparse vs {y} dense"
                );
            }
        }
        taken
    }

    #[test]
    fn geodesic_cages_agree_with_the_dense_projection() {
        for k in 0..=2 {
            assert!(agrees(&geodesic(k)), "level {k}: sparse route not taken");
        }
        // The hub layout from level 1 (at level 0 its spokes are shorter
        // than the strings, which the profile refuses).
        for k in 1..=2 {
            assert!(agrees(&hub(k)), "hub level {k}: sparse route not taken");
        }
    }

    #[test]
    fn a_cage_off_its_equilibrium_form_agrees_too() {
        // Every node of the level-1 cage moved a little: still no
        // mechanism, a different geometry with no symmetry left.
        let mut s = geodesic(1);
        for (i, p) in s.pos_m.iter_mut().enumerate() {
            let w = |m: usize| ((i * m + 5) % 17) as f64 / 17.0 - 0.5;
            *p += Vector3::new(w(3), w(7), w(11)) * 0.01;
        }
        for b in &mut s.bars {
            b.length_m = (s.pos_m[b.nodes[0]] - s.pos_m[b.nodes[1]]).norm();
        }
        assert!(agrees(&s));
    }

    #[test]
    fn a_cage_with_a_mechanism_takes_the_dense_route() {
        // The six-strut cage has one mechanism (Pellegrino & Calladine
        // 1986, docs/references.md): K is singular, so the sparse route
        // must step aside for the dense decomposition.
        let p = Profile::demo().unwrap();
        let s = Structure::from_cage(&Cage::from_profile(&p).unwrap(), &p);
        for g in patterns(&s) {
            assert!(project(&s.pos_m, &s.bars, &g).is_none());
        }
        // Every member at one node of the hub cage taken out: a loose node,
        // three mechanisms, so again the dense route.
        let mut h = hub(1);
        h.bars.retain(|b| !b.nodes.contains(&0));
        assert!(project(&h.pos_m, &h.bars, &patterns(&h)[0]).is_none());
    }

    #[test]
    fn the_support_holds_no_rigid_motion() {
        // The six support coordinates of the rigid-body modes form a
        // non-singular 6 x 6 matrix: no rigid motion leaves them fixed.
        for s in [geodesic(1), hub(1)] {
            let rows = support(&s.pos_m).unwrap();
            let modes = crate::statics::rigid_modes(&s.pos_m);
            let m = nalgebra::DMatrix::from_fn(6, 6, |r, c| modes[(rows[r], c)]);
            let sv = m.singular_values();
            assert!(sv.min() > 1e-3 * sv.max(), "{sv}");
        }
    }
}
