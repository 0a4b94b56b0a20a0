//! The statics of the vehicle held on its pivot at one angle of a roll:
//! the linear constraints the rotor thrusts must meet there. The
//! feasibility check ([`super::feasibility`]) turns them into small linear
//! programmes; the rotor commands are those programmes' answers.
//!
//! Body frame throughout. At roll angle b the body-frame gravity direction
//! is g (unit, pointing down), the weight is W = m g0, rotor k sits at r_k
//! and thrusts T_k along the unit axis t_k (-reverse_k <= T_k <= max_k).
//! The roll axis u is horizontal at every angle (it is perpendicular to
//! both face normals, and gravity turns about it), so v = u x g is the
//! horizontal axis perpendicular to it. The ground pushes on the cage only
//! at the pivot; its force is what the weight and the thrusts leave over,
//! F = -(W g + sum T_k t_k).
//!
//! - **No lift-off**: the normal force N = W + sum T_k (t_k . g) >= 0.
//! - **No sliding**: |tangential part of F| <= mu N. With all rotors along
//!   one axis the tangential part has a fixed direction and this is two
//!   exact half-planes in the total thrust; otherwise the cone is replaced
//!   by an inscribed regular polygon of [`FRICTION_SIDES`] sides (an inner
//!   approximation: it can only understate what the rotors can do).
//! - **Vertex pivot, sideways balance** (an equality): a point contact
//!   carries no moment, so the moment of the weight and the thrusts about
//!   the horizontal axis v through the pivot node P must vanish:
//!   W v . ((c - P) x g) + sum T_k v . ((r_k - P) x t_k) = 0.
//!   (Gravity's part is constant through the roll: with u . g = 0,
//!   (u x g) . ((c - P) x g) = u . (c - P), the offset of the centre of
//!   mass along the pivot axis; the rotors' part turns with g.)
//! - **Edge roll, reaction between the nodes**: the edge A-B lies along u,
//!   B - A = L u. Let M_A be the moment of the weight and the thrusts about
//!   v through A. The reaction at A has no moment about that axis; the one
//!   at B, f_B = N_B (-g) + (tangential), has
//!   v . (L u x f_B) = L f_B . (v x u) = L f_B . g = -L N_B,
//!   because (u x g) x u = g (u . u) - u (g . u) = g. Balance gives
//!   N_B = M_A / L; about v through B in the same way N_A = -M_B / L. Both
//!   must be >= 0 (the ground pushes, never pulls): the resultant reaction
//!   then stays on the segment between the two pivot nodes, and the cage
//!   does not start to turn about one node instead.
//!
//! The moment about u itself is the roll: the reactions act on the axis
//! and give none, so the rotors' moment sum c_k T_k with
//! c_k = u . ((r_k - p) x t_k) must beat gravity's resisting moment.
//!
//! Not modelled (stated so nobody reads more into it): the moment about
//! the vertical (the yaw balance; at an edge the friction at the two nodes
//! can carry it, at a point contact we assume the node's small contact
//! patch does), the rotors' drag torques, ground effect, and momentum.

use super::moves::{MoveKind, Roll};
use crate::cage::Cage;
use crate::profile::Rotor;
use crate::sample::STANDARD_GRAVITY_M_S2;
use nalgebra::{Unit, UnitQuaternion, Vector3};

/// Sides of the polygon that stands in for the friction cone when the
/// rotors do not all share one axis.
pub const FRICTION_SIDES: usize = 16;

/// Which physical condition a constraint row stands for (to say why a
/// move cannot be made).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Condition {
    /// The ground must push, not pull.
    LiftOff,
    /// The contact must not slide.
    Friction,
    /// Edge rolls: the reaction stays between the two pivot nodes.
    Between,
    /// Vertex pivots: no net moment about the horizontal axis through the
    /// node perpendicular to the pivot axis.
    Sideways,
}

/// One coefficient per rotor, kept inline for up to eight rotors: a roll's
/// check builds a dozen rows at each of some thirty angles, and a heap
/// allocation each was a fifth of its time.
pub type Coeffs = smallvec::SmallVec<[f64; 8]>;

/// One linear constraint on the thrusts: `coeffs . T <= rhs`, or
/// `coeffs . T == rhs` when `equality`.
#[derive(Debug, Clone, PartialEq)]
pub struct Row {
    /// Coefficient per rotor.
    pub coeffs: Coeffs,
    /// Right-hand side, newtons or newton metres.
    pub rhs: f64,
    /// An equality rather than an upper bound.
    pub equality: bool,
    /// The condition it stands for.
    pub condition: Condition,
}

impl Row {
    /// `coeffs . t - rhs`: positive means violated (for an equality, any
    /// non-zero value does).
    pub fn excess(&self, t: &[f64]) -> f64 {
        self.coeffs.iter().zip(t).map(|(a, x)| a * x).sum::<f64>() - self.rhs
    }
}

/// Everything the rotors must meet at one angle of a roll.
#[derive(Debug, Clone, PartialEq)]
pub struct AngleRows {
    /// Roll angle from the start, degrees.
    pub angle_deg: f64,
    /// Gravity's moment about the roll axis that resists the roll, N m
    /// (negative once gravity helps).
    pub needed_nm: f64,
    /// The rotors' moment arms about the roll axis, c_k, metres.
    pub arms_m: Coeffs,
    /// The contact conditions.
    pub rows: Vec<Row>,
}

impl AngleRows {
    /// Whether thrusts `t` meet the bounds and every row within `tol`
    /// (newtons or newton metres).
    pub fn admits(&self, rotors: &[Rotor], t: &[f64], tol: f64) -> bool {
        t.len() == rotors.len()
            && t.iter()
                .zip(rotors)
                .all(|(x, r)| *x >= -r.reverse_thrust_n - tol && *x <= r.max_thrust_n + tol)
            && self.rows.iter().all(|row| {
                let e = row.excess(t);
                if row.equality {
                    e.abs() <= tol
                } else {
                    e <= tol
                }
            })
    }

    /// The rotors' moment about the roll axis for thrusts `t`, N m.
    pub fn moment_nm(&self, t: &[f64]) -> f64 {
        self.arms_m.iter().zip(t).map(|(c, x)| c * x).sum()
    }
}

/// Body-frame gravity direction `beta_rad` into a roll.
pub fn gravity_at(cage: &Cage, roll: &Roll, beta_rad: f64) -> Vector3<f64> {
    let n = cage.faces[roll.from].normal_body;
    let r = UnitQuaternion::from_axis_angle(&Unit::new_normalize(roll.axis_body), -beta_rad);
    r * n
}

/// Gravity's moment about the roll axis that resists the roll, N m
/// (negative once the centre of mass has passed over the pivot).
pub fn resisting_moment_nm(cage: &Cage, roll: &Roll, beta_rad: f64) -> f64 {
    let g = gravity_at(cage, roll, beta_rad);
    let w = cage.mass_kg * STANDARD_GRAVITY_M_S2;
    -roll
        .axis_body
        .dot(&(cage.com_body - roll.point_body).cross(&(g * w)))
}

/// Moment arms c_k = u . ((r_k - p) x t_k) of the rotors about a roll axis.
pub fn moment_arms_m(roll: &Roll, rotors: &[Rotor]) -> Vec<f64> {
    axis_arms(&roll.axis_body, &roll.point_body, rotors).to_vec()
}

/// Moment arms of the rotors about the axis `axis` through `point`.
fn axis_arms(axis: &Vector3<f64>, point: &Vector3<f64>, rotors: &[Rotor]) -> Coeffs {
    rotors
        .iter()
        .map(|r| {
            let pos = Vector3::from(r.position_m);
            let t = Vector3::from(r.axis);
            axis.dot(&(pos - point).cross(&t))
        })
        .collect()
}

/// The common thrust axis when all rotors share one (to 1e-9).
pub fn shared_axis(rotors: &[Rotor]) -> Option<Vector3<f64>> {
    let first = Vector3::from(rotors.first()?.axis);
    rotors
        .iter()
        .all(|r| (Vector3::from(r.axis) - first).norm() < 1e-9)
        .then_some(first)
}

/// The constraints at `beta_rad` into `roll` (see the module comment).
pub fn rows_at(cage: &Cage, roll: &Roll, rotors: &[Rotor], mu: f64, beta_rad: f64) -> AngleRows {
    let g = gravity_at(cage, roll, beta_rad);
    let w = cage.mass_kg * STANDARD_GRAVITY_M_S2;
    let axes: smallvec::SmallVec<[Vector3<f64>; 8]> =
        rotors.iter().map(|r| Vector3::from(r.axis)).collect();
    let normal: Coeffs = axes.iter().map(|t| t.dot(&g)).collect();
    // Lift-off, the friction rows and at most two more: room for all of
    // them at once (this runs for every angle of every move checked).
    let mut rows = Vec::with_capacity(1 + FRICTION_SIDES + 2);
    rows.push(Row {
        // -sum a_k T_k <= W
        coeffs: normal.iter().map(|a| -a).collect(),
        rhs: w,
        equality: false,
        condition: Condition::LiftOff,
    });
    match shared_axis(rotors) {
        Some(t) => {
            // Tangential force along a fixed direction, size |S| s:
            // (s - mu a) S <= mu W and (-s - mu a) S <= mu W.
            let a = t.dot(&g);
            let s = (t - g * a).norm();
            if s > 1e-12 {
                for sign in [1.0, -1.0] {
                    rows.push(Row {
                        coeffs: smallvec::smallvec![sign * s - mu * a; rotors.len()],
                        rhs: mu * w,
                        equality: false,
                        condition: Condition::Friction,
                    });
                }
            }
        }
        None => {
            let tang: smallvec::SmallVec<[Vector3<f64>; 8]> =
                axes.iter().zip(&normal).map(|(t, a)| t - g * *a).collect();
            let helper = if g.x.abs() < 0.9 {
                Vector3::x()
            } else {
                Vector3::y()
            };
            let e1 = g.cross(&helper).normalize();
            let e2 = g.cross(&e1);
            let shrink = (std::f64::consts::PI / FRICTION_SIDES as f64).cos();
            for m in 0..FRICTION_SIDES {
                let phi = std::f64::consts::TAU * m as f64 / FRICTION_SIDES as f64;
                let d = e1 * phi.cos() + e2 * phi.sin();
                // sum T_k (t_k_perp . d) <= mu cos(pi/n) (W + sum a_k T_k)
                rows.push(Row {
                    coeffs: tang
                        .iter()
                        .zip(&normal)
                        .map(|(tp, a)| tp.dot(&d) - mu * shrink * a)
                        .collect(),
                    rhs: mu * shrink * w,
                    equality: false,
                    condition: Condition::Friction,
                });
            }
        }
    }
    let u = roll.axis_body;
    let v = u.cross(&g);
    let c = cage.com_body;
    // Moment of the weight about v through `q`, and the rotors' arms.
    let about = |q: &Vector3<f64>| (w * v.dot(&(c - q).cross(&g)), axis_arms(&v, q, rotors));
    match roll.kind {
        MoveKind::Vertex => {
            let p = roll.point_body;
            let (grav, arms) = about(&p);
            rows.push(Row {
                coeffs: arms,
                rhs: -grav,
                equality: true,
                condition: Condition::Sideways,
            });
        }
        MoveKind::Edge => {
            let (a, b) = match roll.pivot.as_slice() {
                [i, j, ..] => (cage.nodes[*i].pos_body, cage.nodes[*j].pos_body),
                _ => (roll.point_body, roll.point_body),
            };
            let len = (b - a).dot(&u);
            if len.abs() > 1e-9 {
                // N_B = M_A / L >= 0  ->  -(e / L) . T <= grav_A / L
                let (ga, ea) = about(&a);
                rows.push(Row {
                    coeffs: ea.iter().map(|e| -e / len).collect(),
                    rhs: ga / len,
                    equality: false,
                    condition: Condition::Between,
                });
                // N_A = -M_B / L >= 0  ->  (f / L) . T <= -grav_B / L
                let (gb, eb) = about(&b);
                rows.push(Row {
                    coeffs: eb.iter().map(|e| e / len).collect(),
                    rhs: -gb / len,
                    equality: false,
                    condition: Condition::Between,
                });
            }
        }
    }
    AngleRows {
        angle_deg: beta_rad.to_degrees(),
        needed_nm: resisting_moment_nm(cage, roll, beta_rad),
        arms_m: axis_arms(&roll.axis_body, &roll.point_body, rotors),
        rows,
    }
}
