//! The equilibrium matrix, its rank, its self-stress states and
//! mechanisms, and the prestress taken from the profile's pretension.

use super::{Bar, StaticsError, Structure, svd_with};
use crate::cage::MemberKind;
use nalgebra::{DMatrix, DVector, Vector3};

/// Singular values below this fraction of the largest count as zero.
pub(crate) const RANK_TOLERANCE: f64 = 1e-9;

/// The equilibrium matrix A (3n x b) at positions `pos`: `A t = f`.
pub fn equilibrium_matrix(pos: &[Vector3<f64>], bars: &[Bar]) -> DMatrix<f64> {
    let mut a = DMatrix::zeros(3 * pos.len(), bars.len());
    for_each_entry(pos, bars, |row, col, v| a[(row, col)] = v);
    a
}

/// The non-zero entries of A (row, column, value): column j holds the unit
/// vector from member j's second node to its first at the first node and
/// its negative at the second; a member of zero length has none.
fn for_each_entry(pos: &[Vector3<f64>], bars: &[Bar], mut put: impl FnMut(usize, usize, f64)) {
    for (j, bar) in bars.iter().enumerate() {
        let [p, q] = bar.nodes;
        let d = pos[p] - pos[q];
        let l = d.norm();
        if l <= 0.0 {
            continue;
        }
        for k in 0..3 {
            put(3 * p + k, j, d[k] / l);
            put(3 * q + k, j, -d[k] / l);
        }
    }
}

/// The SVD of A padded with zero rows to at least b rows, so its V holds
/// the whole null space: rank, null-space basis (b x s) and a solver.
pub(crate) struct Decomposed {
    /// Self-stress states as columns (b x s).
    pub null: DMatrix<f64>,
    svd: nalgebra::SVD<f64, nalgebra::Dyn, nalgebra::Dyn>,
    tol: f64,
    rows: usize,
}

impl Decomposed {
    /// Decompose A; `solvable` keeps U so [`Decomposed::pseudo_solve`] works.
    pub(crate) fn new(a: &DMatrix<f64>, solvable: bool) -> Result<Decomposed, StaticsError> {
        let (m, b) = a.shape();
        let rows = m.max(b);
        let mut padded = DMatrix::zeros(rows, b);
        padded.view_mut((0, 0), (m, b)).copy_from(a);
        let s = svd_with(padded, solvable, "equilibrium matrix")?;
        let smax = s.singular_values.iter().copied().fold(0.0, f64::max);
        let tol = RANK_TOLERANCE * smax.max(f64::MIN_POSITIVE);
        let null = match &s.v_t {
            Some(vt) => {
                let cols: Vec<DVector<f64>> = (0..b)
                    .filter(|&i| s.singular_values[i] <= tol)
                    .map(|i| vt.row(i).transpose())
                    .collect();
                if cols.is_empty() {
                    DMatrix::zeros(b, 0)
                } else {
                    DMatrix::from_columns(&cols)
                }
            }
            None => {
                return Err(StaticsError::NoDecomposition {
                    what: "equilibrium matrix",
                });
            }
        };
        Ok(Decomposed {
            null,
            svd: s,
            tol,
            rows,
        })
    }

    /// Least-squares, least-norm member forces for loads f: A+ f.
    pub(crate) fn pseudo_solve(&self, f: &DVector<f64>) -> Result<DVector<f64>, StaticsError> {
        let mut fp = DVector::zeros(self.rows);
        fp.rows_mut(0, f.len()).copy_from(f);
        self.svd
            .solve(&fp, self.tol)
            .map_err(|_| StaticsError::NoDecomposition {
                what: "equilibrium matrix",
            })
    }

    /// Least-norm nodal displacements d (length `nodes3`) whose member
    /// elongations A^T d best match `e`: d = (A^T)+ e.
    pub(crate) fn compatible_displacements(
        &self,
        e: &DVector<f64>,
        nodes3: usize,
    ) -> Option<DVector<f64>> {
        let (u, vt) = (self.svd.u.as_ref()?, self.svd.v_t.as_ref()?);
        let mut y = vt * e;
        for (yi, &sv) in y.iter_mut().zip(self.svd.singular_values.iter()) {
            *yi = if sv > self.tol { *yi / sv } else { 0.0 };
        }
        Some((u * y).rows(0, nodes3).into_owned())
    }
}

/// The rank of A and the projection onto its null space (the self-stress
/// states), from one dense singular value decomposition of A^T by faer:
/// the left singular vectors of A^T with non-zero singular values span the
/// row space of A, and the self-stresses are its orthogonal complement, so
/// neither V nor the padding to a square matrix is needed.
pub(crate) struct RowSpace {
    /// Rank of A.
    pub rank: usize,
    /// Orthonormal basis of the row space of A (b x rank).
    basis: faer::Mat<f64>,
}

impl RowSpace {
    /// Decompose A^T (built straight from the members, b x 3n).
    pub(crate) fn new(pos: &[Vector3<f64>], bars: &[Bar]) -> Result<RowSpace, StaticsError> {
        use faer::dyn_stack::{MemBuffer, MemStack};
        use faer::linalg::svd::{ComputeSvdVectors, svd, svd_scratch};
        let (b, m) = (bars.len(), 3 * pos.len());
        let mut at = faer::Mat::<f64>::zeros(b, m);
        for_each_entry(pos, bars, |row, col, v| at[(col, row)] = v);
        let size = b.min(m);
        if size == 0 {
            return Ok(RowSpace {
                rank: 0,
                basis: faer::Mat::zeros(b, 0),
            });
        }
        let mut s = faer::Col::<f64>::zeros(size);
        let mut u = faer::Mat::<f64>::zeros(b, size);
        let par = faer::Par::Seq;
        let params = Default::default();
        let req = svd_scratch::<f64>(
            b,
            m,
            ComputeSvdVectors::Thin,
            ComputeSvdVectors::No,
            par,
            params,
        );
        svd(
            at.as_ref(),
            s.as_diagonal_mut(),
            Some(u.as_mut()),
            None,
            par,
            MemStack::new(&mut MemBuffer::new(req)),
            params,
        )
        .map_err(|_| StaticsError::NoDecomposition {
            what: "equilibrium matrix",
        })?;
        let sv: Vec<f64> = (0..size).map(|i| s[i]).collect();
        let smax = sv.iter().copied().fold(0.0, f64::max);
        let tol = RANK_TOLERANCE * smax.max(f64::MIN_POSITIVE);
        let keep: Vec<usize> = (0..size).filter(|&i| sv[i] > tol).collect();
        let basis = faer::Mat::from_fn(b, keep.len(), |r, c| u[(r, keep[c])]);
        Ok(RowSpace {
            rank: keep.len(),
            basis,
        })
    }

    /// The part of `g` (length b) in the null space of A: g minus its
    /// projection on the row space.
    pub(crate) fn null_part(&self, g: &[f64]) -> Vec<f64> {
        let (b, r) = self.basis.shape();
        let mut coeff = vec![0.0; r];
        for (c, x) in coeff.iter_mut().enumerate() {
            let col = self.basis.col(c);
            *x = (0..b).map(|i| col[i] * g[i]).sum();
        }
        let mut t = g.to_vec();
        for (c, &x) in coeff.iter().enumerate() {
            let col = self.basis.col(c);
            for (i, ti) in t.iter_mut().enumerate() {
                *ti -= x * col[i];
            }
        }
        t
    }
}

/// The rank of A and the part of `g` in its null space: by the sparse
/// reduced stiffness when the cage has no mechanism and that route is well
/// conditioned (`super::reduced`), else by the dense decomposition. Both
/// give the same projection to round-off where both apply.
pub(crate) fn rank_and_null_part(
    s: &Structure,
    g: &[f64],
) -> Result<(usize, Vec<f64>), StaticsError> {
    if let Some(found) = super::reduced::project(&s.pos_m, &s.bars, g) {
        return Ok(found);
    }
    let d = RowSpace::new(&s.pos_m, &s.bars)?;
    Ok((d.rank, d.null_part(g)))
}

/// What the equilibrium matrix says about the cage, and the prestress.
#[derive(Debug, Clone, PartialEq)]
pub struct SelfStress {
    /// Rank of the equilibrium matrix.
    pub rank: usize,
    /// Number of independent self-stress states, b - r.
    pub states: usize,
    /// Number of infinitesimal mechanisms of the free body, 3n - r - 6.
    pub mechanisms: usize,
    /// Prestress of the unloaded cage per member (tension positive); all
    /// zero when no self-stress keeps the strings in tension.
    pub prestress_n: Vec<f64>,
    /// Whether a self-stress with every string in tension was found.
    pub prestress_ok: bool,
    /// A plain sentence on the outcome, for the report.
    pub message: String,
}

/// Rank, self-stress states, mechanisms and prestress of a structure; the
/// prestress is scaled so the largest string tension is `pretension_n`.
///
/// With several self-stress states, the one nearest to "all strings equally
/// tensioned" (the projection of that pattern onto the null space) is used.
pub fn self_stress(s: &Structure, pretension_n: f64) -> Result<SelfStress, StaticsError> {
    let b = s.bars.len();
    let strings: Vec<usize> = (0..b)
        .filter(|&j| s.bars[j].kind == MemberKind::String)
        .collect();
    // "Every string pulls equally", to be projected onto the self-stresses.
    let mut g = vec![0.0; b];
    for &j in &strings {
        g[j] = 1.0;
    }
    let (rank, projected) = rank_and_null_part(s, &g)?;
    let states = b - rank;
    let mechanisms = (3 * s.node_count()).saturating_sub(rank + 6);
    let zero = vec![0.0; b];
    let plural = |n: usize, one: &str, many: &str| {
        if n == 1 {
            format!("1 {one}")
        } else {
            format!("{n} {many}")
        }
    };
    let counts = format!(
        "rank {} of {}x{}: {}, {}",
        rank,
        3 * s.node_count(),
        b,
        plural(states, "self-stress state", "self-stress states"),
        plural(mechanisms, "mechanism", "mechanisms")
    );
    let fail = |why: String| SelfStress {
        rank,
        states,
        mechanisms,
        prestress_n: zero.clone(),
        prestress_ok: false,
        message: format!("{counts}. {why}; prestress taken as zero."),
    };
    if states == 0 {
        return Ok(fail(
            "No self-stress state: the nodes are not an equilibrium form of these members".into(),
        ));
    }
    if strings.is_empty() {
        return Ok(fail("The cage has no strings to pretension".into()));
    }
    // The projection of "every string pulls equally" onto the states.
    let t = DVector::from_vec(projected);
    let largest = strings.iter().map(|&j| t[j]).fold(f64::MIN, f64::max);
    let scale_ref = t.amax();
    if largest.is_nan() || largest <= 1e-9 * scale_ref.max(f64::MIN_POSITIVE) {
        return Ok(fail(
            "No self-stress state puts the strings in tension".into(),
        ));
    }
    let t = t * (pretension_n / largest);
    if let Some(&j) = strings
        .iter()
        .find(|&&j| t[j] <= 1e-9 * pretension_n.max(f64::MIN_POSITIVE))
    {
        return Ok(fail(format!(
            "No self-stress state keeps every string in tension (string {} would carry {:.3} N)",
            s.member_id(j),
            t[j]
        )));
    }
    Ok(SelfStress {
        rank,
        states,
        mechanisms,
        prestress_n: t.iter().copied().collect(),
        prestress_ok: true,
        message: format!(
            "{counts}. Prestress scaled so the largest string tension is {pretension_n} N."
        ),
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::profile::Profile;
    use approx::assert_relative_eq;

    fn demo() -> Structure {
        let p = Profile::demo().unwrap();
        Structure::from_cage(&Cage::from_profile(&p).unwrap(), &p)
    }

    #[test]
    fn six_strut_rank_states_mechanisms() {
        let s = demo();
        let ss = self_stress(&s, 20.0).unwrap();
        // Pellegrino & Calladine, "Matrix analysis of statically and
        // kinematically indeterminate frameworks", 1986 (docs/references.md):
        // 36 x 30, rank 29, one self-stress, one mechanism.
        assert_eq!(equilibrium_matrix(&s.pos_m, &s.bars).shape(), (36, 30));
        assert_eq!((ss.rank, ss.states, ss.mechanisms), (29, 1, 1));
        assert!(ss.prestress_ok, "{}", ss.message);
    }

    #[test]
    fn several_states_pull_the_strings_equally() {
        // A rod and two strings between the same two nodes: rank 1, two
        // self-stress states; strings equally tensioned means the rod
        // carries twice their force in compression (hand check, common
        // practice, no published source).
        let pos = vec![Vector3::new(0.3, 0.0, 0.0), Vector3::zeros()];
        let bar = |kind| Bar {
            nodes: [0, 1],
            kind,
            ea_n: 1e5,
            length_m: 0.3,
            capacity_n: 1e3,
        };
        let s = Structure {
            pos_m: pos,
            bars: vec![
                bar(MemberKind::Rod),
                bar(MemberKind::String),
                bar(MemberKind::String),
            ],
        };
        let ss = self_stress(&s, 20.0).unwrap();
        assert_eq!((ss.rank, ss.states), (1, 2));
        assert!(ss.prestress_ok);
        assert_relative_eq!(ss.prestress_n[0], -40.0, epsilon = 1e-9);
        assert_relative_eq!(ss.prestress_n[1], 20.0, epsilon = 1e-9);
        assert_relative_eq!(ss.prestress_n[2], 20.0, epsilon = 1e-9);
    }

    #[test]
    fn a_string_left_out_is_named_by_its_id() {
        // A rod and a string between nodes 0 and 1 (one self-stress), and a
        // second string from node 1 to node 2 that no self-stress can
        // tension: it is the cage's S2 (rods first, strings in id order),
        // third among all members, and the message must name it S2.
        let pos = vec![
            Vector3::new(0.3, 0.0, 0.0),
            Vector3::zeros(),
            Vector3::new(0.0, 0.3, 0.0),
        ];
        let bar = |nodes, kind| Bar {
            nodes,
            kind,
            ea_n: 1e5,
            length_m: 0.3,
            capacity_n: 1e3,
        };
        let s = Structure {
            pos_m: pos,
            bars: vec![
                bar([0, 1], MemberKind::Rod),
                bar([0, 1], MemberKind::String),
                bar([1, 2], MemberKind::String),
            ],
        };
        let ss = self_stress(&s, 20.0).unwrap();
        assert!(!ss.prestress_ok);
        assert!(
            ss.message.contains("string S2 would carry"),
            "{}",
            ss.message
        );
        assert!(!ss.message.contains("string 3"), "{}", ss.message);
    }

    #[test]
    fn member_ids_match_the_cage() {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        let s = Structure::from_cage(&c, &p);
        for (j, m) in c.members.iter().enumerate() {
            assert_eq!(s.member_id(j), m.id);
        }
        assert_eq!(s.member_id(6), "S1");
    }

    #[test]
    fn six_strut_force_ratios() {
        let s = demo();
        let ss = self_stress(&s, 20.0).unwrap();
        for (bar, &t) in s.bars.iter().zip(&ss.prestress_n) {
            match bar.kind {
                // Tibert & Pellegrino 2003; Jessen 1967 (docs/references.md):
                // force ratio rod/string = -sqrt(6), force density ratio -3/2.
                MemberKind::Rod => {
                    assert_relative_eq!(t / 20.0, -6f64.sqrt(), epsilon = 1e-9);
                    let q_string = 20.0 / (6f64.sqrt() / 4.0 * bar.length_m);
                    assert_relative_eq!((t / bar.length_m) / q_string, -1.5, epsilon = 1e-9);
                }
                MemberKind::String => assert_relative_eq!(t, 20.0, epsilon = 1e-9),
            }
        }
        // The prestress is in equilibrium with no load.
        let mut g = DVector::zeros(36);
        s.internal_forces(&s.pos_m, &ss.prestress_n, &mut g);
        assert!(g.amax() < 1e-9);
    }
}
