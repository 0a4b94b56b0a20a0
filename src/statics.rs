//! Statics of the cage: the equilibrium matrix and its self-stress states
//! and mechanisms, the prestress, a linear load case by the force method,
//! and the nonlinear equilibrium used for impacts.
//!
//! Conventions: member forces are positive in tension. The equilibrium
//! matrix `A` (3n x b) maps member forces to the external nodal loads they
//! balance, `A t = f`; column j holds the unit vector from the member's
//! second node to its first at the first node, and its negative at the
//! second node. Its transpose maps nodal displacements to member
//! elongations. Everything here works in the body frame.

use crate::cage::{Cage, MemberKind};
use crate::profile::Profile;
use nalgebra::{DMatrix, DVector, SVD, Vector3};

mod force_method;
mod matrix;
mod nonlinear;
mod reduced;

pub use force_method::{LinearResult, linear_load_case};
pub use matrix::{SelfStress, equilibrium_matrix, self_stress};
pub use nonlinear::{Equilibrium, NonlinearModel, rest_lengths_m};

/// Why a statics computation could not give an answer.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum StaticsError {
    /// A face index the cage does not have.
    #[error("face index {index} is not a face of this cage (it has {count} faces)")]
    UnknownFace {
        /// Index asked for (0-based).
        index: usize,
        /// Number of faces.
        count: usize,
    },
    /// A node index the cage does not have.
    #[error("node index {index} is not a node of this cage (it has {count} nodes)")]
    UnknownNode {
        /// Index asked for (0-based).
        index: usize,
        /// Number of nodes.
        count: usize,
    },
    /// A surface name the profile has no preset for.
    #[error("surface {name:?} is not in the profile's impact.surface list (known: {})", known.join(", "))]
    UnknownSurface {
        /// Name asked for.
        name: String,
        /// Names the profile defines.
        known: Vec<String>,
    },
    /// An input number that must be positive and finite is not.
    #[error("{what}: expected a positive finite number, found {found}")]
    NotPositive {
        /// What the number is.
        what: &'static str,
        /// The value given.
        found: f64,
    },
    /// A load vector of the wrong length.
    #[error("load has {found} nodal forces, expected {expected} (one per node)")]
    LoadSize {
        /// Number of nodes.
        expected: usize,
        /// Number of forces given.
        found: usize,
    },
    /// A numerical factorisation did not finish.
    #[error("the singular value decomposition of the {what} did not converge")]
    NoDecomposition {
        /// Which matrix.
        what: &'static str,
    },
    /// The slack-string active set of the linear load case changed on
    /// every pass up to the cap (it cycles between sets of slack strings),
    /// so no consistent answer was found.
    #[error(
        "linear load case: the set of slack strings did not settle after {passes} passes (it keeps changing), so no member forces are given"
    )]
    ActiveSetCycled {
        /// Passes made before giving up.
        passes: usize,
    },
    /// Newton iterations found no equilibrium (the cage collapses or the
    /// load is beyond what the solver can follow).
    #[error(
        "solver: no equilibrium at load {load:.1}, last found at {reached:.1} (residual {residual_n:.2e} N after {iterations} iterations)"
    )]
    NoEquilibrium {
        /// Load factor aimed at.
        load: f64,
        /// Load factor at which the last equilibrium was found.
        reached: f64,
        /// Residual of the last attempt.
        residual_n: f64,
        /// Newton iterations spent in total.
        iterations: usize,
    },
}

/// One member as statics sees it.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Bar {
    /// End node indices.
    pub nodes: [usize; 2],
    /// Rod or string (strings cannot push).
    pub kind: MemberKind,
    /// Axial stiffness E A.
    pub ea_n: f64,
    /// Length in the unloaded cage.
    pub length_m: f64,
    /// Capacity: rods buckling or crushing, strings breaking.
    pub capacity_n: f64,
}

impl Bar {
    /// Utilisation of this member at a force (tension positive): rods
    /// |compression| / capacity, strings tension / capacity.
    pub fn utilisation(&self, force_n: f64) -> f64 {
        let demand = match self.kind {
            MemberKind::Rod => (-force_n).max(0.0),
            MemberKind::String => force_n.max(0.0),
        };
        if self.capacity_n > 0.0 {
            demand / self.capacity_n
        } else {
            f64::INFINITY
        }
    }
}

/// Nodes and members reduced to what statics needs.
#[derive(Debug, Clone, PartialEq)]
pub struct Structure {
    /// Node positions, body frame.
    pub pos_m: Vec<Vector3<f64>>,
    /// Members in the cage's order (rods then strings).
    pub bars: Vec<Bar>,
}

/// Capacity of a member: rods the smaller of pinned-end Euler buckling and
/// crushing, strings the breaking load times termination efficiency.
pub fn capacity_n(profile: &Profile, kind: MemberKind, length_m: f64) -> f64 {
    match kind {
        MemberKind::Rod => profile.rod.capacity_n(length_m),
        MemberKind::String => profile.string.capacity_n(),
    }
}

impl Structure {
    /// The structure of a cage with the profile's sections.
    pub fn from_cage(cage: &Cage, profile: &Profile) -> Structure {
        Structure {
            pos_m: cage.nodes.iter().map(|n| n.pos_body).collect(),
            bars: cage
                .members
                .iter()
                .map(|m| Bar {
                    nodes: m.nodes,
                    kind: m.kind,
                    ea_n: match m.kind {
                        MemberKind::Rod => profile.rod.ea_n(),
                        MemberKind::String => profile.string.ea_n(),
                    },
                    length_m: m.length_m,
                    capacity_n: capacity_n(profile, m.kind, m.length_m),
                })
                .collect(),
        }
    }

    /// The id of member `j` by the cage's rule (`R1..` for rods, `S1..`
    /// for strings, numbered within each kind in member order): members
    /// are rods then strings, each in id order, so for a structure built
    /// from a cage this is the cage member's own id. Reports name members
    /// by it, not by their index among all members.
    pub fn member_id(&self, j: usize) -> String {
        let Some(bar) = self.bars.get(j) else {
            return format!("member {}", j + 1);
        };
        let k = self.bars[..j].iter().filter(|b| b.kind == bar.kind).count();
        let prefix = match bar.kind {
            MemberKind::Rod => "R",
            MemberKind::String => "S",
        };
        format!("{prefix}{}", k + 1)
    }

    /// Number of nodes.
    pub fn node_count(&self) -> usize {
        self.pos_m.len()
    }

    /// Internal nodal forces `A t` at the positions `pos` (the loads the
    /// member forces balance), written into `out` (length 3n).
    pub fn internal_forces(&self, pos: &[Vector3<f64>], force_n: &[f64], out: &mut DVector<f64>) {
        out.fill(0.0);
        for (bar, &t) in self.bars.iter().zip(force_n) {
            let [a, b] = bar.nodes;
            let d = pos[a] - pos[b];
            let l = d.norm();
            if l <= 0.0 {
                continue;
            }
            let v = d * (t / l);
            for k in 0..3 {
                out[3 * a + k] += v[k];
                out[3 * b + k] -= v[k];
            }
        }
    }

    /// Largest nodal distance from the centroid: a length scale.
    pub fn size_m(&self) -> f64 {
        let c = centroid(&self.pos_m);
        self.pos_m
            .iter()
            .map(|p| (p - c).norm())
            .fold(0.0, f64::max)
    }
}

/// Mean of points.
pub(crate) fn centroid(pos: &[Vector3<f64>]) -> Vector3<f64> {
    if pos.is_empty() {
        return Vector3::zeros();
    }
    pos.iter().sum::<Vector3<f64>>() / pos.len() as f64
}

/// Stack nodal vectors into one column of length 3n.
pub fn stack(v: &[Vector3<f64>]) -> DVector<f64> {
    DVector::from_iterator(3 * v.len(), v.iter().flat_map(|p| [p.x, p.y, p.z]))
}

/// Sorted SVD with a bounded number of iterations.
pub(crate) fn svd(
    m: DMatrix<f64>,
    what: &'static str,
) -> Result<SVD<f64, nalgebra::Dyn, nalgebra::Dyn>, StaticsError> {
    svd_with(m, true, what)
}

/// Sorted SVD, with U only when asked for (it is needed to solve, not for
/// the null space, and costs as much again on large cages).
pub(crate) fn svd_with(
    m: DMatrix<f64>,
    compute_u: bool,
    what: &'static str,
) -> Result<SVD<f64, nalgebra::Dyn, nalgebra::Dyn>, StaticsError> {
    SVD::try_new(m, compute_u, true, f64::EPSILON, 10_000)
        .ok_or(StaticsError::NoDecomposition { what })
}

/// Orthonormal basis (columns) of the six rigid-body motions of the points:
/// three translations and three small rotations about their centroid.
pub(crate) fn rigid_modes(pos: &[Vector3<f64>]) -> DMatrix<f64> {
    let n = pos.len();
    let c = centroid(pos);
    let mut m = DMatrix::zeros(3 * n, 6);
    for (i, p) in pos.iter().enumerate() {
        let r = p - c;
        for k in 0..3 {
            m[(3 * i + k, k)] = 1.0;
            let axis = Vector3::ith(k, 1.0);
            let v = axis.cross(&r);
            for q in 0..3 {
                m[(3 * i + q, 3 + k)] = v[q];
            }
        }
    }
    // Gram-Schmidt; a degenerate rotation (collinear points) is dropped.
    let mut basis: Vec<DVector<f64>> = Vec::with_capacity(6);
    for j in 0..6 {
        let mut v = m.column(j).into_owned();
        for b in &basis {
            let d = b.dot(&v);
            v.axpy(-d, b, 1.0);
        }
        let norm = v.norm();
        let scale = m.column(j).norm().max(1e-300);
        if norm > 1e-9 * scale {
            basis.push(v / norm);
        }
    }
    DMatrix::from_columns(&basis)
}

/// Remove the rigid-body part (columns of `modes`, orthonormal) from `v`.
pub(crate) fn remove_rigid(modes: &DMatrix<f64>, v: &mut DVector<f64>) {
    let coeff = modes.transpose() * &*v;
    *v -= modes * coeff;
}

/// Mass-weighted mean of points (plain mean when the masses sum to zero).
pub fn centroid_weighted(pos: &[Vector3<f64>], masses_kg: &[f64]) -> Vector3<f64> {
    let m: f64 = masses_kg.iter().sum();
    if m <= 0.0 {
        return centroid(pos);
    }
    pos.iter()
        .zip(masses_kg)
        .map(|(p, &mi)| p * mi)
        .sum::<Vector3<f64>>()
        / m
}
