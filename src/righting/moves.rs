//! Candidate moves between faces: edge rolls (two faces sharing an edge)
//! and vertex pivots (two faces sharing only a node), and where a roll
//! onto a face the vehicle cannot rest on ends up.
//!
//! Sign convention, used by the feasibility code too: a roll turns the body
//! by +angle about `axis_body` (right hand), through `point_body`. Seen in
//! the body frame, gravity then turns by -angle about the same axis, from
//! the `from` face's normal to the `to` face's normal. With
//! `axis_body = normalize(n_to x n_from)` this holds for every pair of
//! faces, because the axis is perpendicular to both normals.

use crate::attitude::angle_between_deg;
use crate::cage::Cage;
use nalgebra::Vector3;
use serde::Serialize;

/// How the vehicle turns between two faces.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum MoveKind {
    /// Roll about an edge shared by the two faces.
    Edge,
    /// Pivot about a single node the two faces share.
    Vertex,
}

/// One rigid rotation of the vehicle from lying on one face to lying on another.
#[derive(Debug, Clone, PartialEq)]
pub struct Roll {
    /// Face the roll starts on.
    pub from: usize,
    /// Face it lands on.
    pub to: usize,
    /// Edge roll or vertex pivot.
    pub kind: MoveKind,
    /// Pivot node indices: two for an edge, one for a vertex.
    pub pivot: Vec<usize>,
    /// Unit rotation axis, body frame (the body turns +angle about it).
    pub axis_body: Vector3<f64>,
    /// A point on the axis, body frame (a pivot node).
    pub point_body: Vector3<f64>,
    /// Rotation angle: the angle between the two faces' normals.
    pub angle_deg: f64,
}

impl Roll {
    /// The roll about the common nodes of two faces. `None` when they share
    /// no node, or their normals are parallel (no defined axis).
    pub fn between(cage: &Cage, from: usize, to: usize) -> Option<Roll> {
        let (fa, fb) = (cage.faces.get(from)?, cage.faces.get(to)?);
        let shared: Vec<usize> = fa
            .nodes
            .iter()
            .copied()
            .filter(|n| fb.nodes.contains(n))
            .collect();
        let kind = match shared.len() {
            0 => return None,
            1 => MoveKind::Vertex,
            _ => MoveKind::Edge,
        };
        let axis = fb.normal_body.cross(&fa.normal_body);
        let norm = axis.norm();
        if norm < 1e-12 {
            return None;
        }
        // Edge: keep the two shared nodes in `from`'s counter-clockwise order.
        let pivot = if kind == MoveKind::Edge {
            let k = fa.nodes.len();
            (0..k)
                .find_map(|i| {
                    let (a, b) = (fa.nodes[i], fa.nodes[(i + 1) % k]);
                    (shared.contains(&a) && shared.contains(&b)).then_some(vec![a, b])
                })
                .unwrap_or(shared)
        } else {
            shared
        };
        Some(Roll {
            from,
            to,
            kind,
            point_body: cage.nodes[pivot[0]].pos_body,
            pivot,
            axis_body: axis / norm,
            angle_deg: angle_between_deg(&fa.normal_body, &fb.normal_body),
        })
    }
}

/// Every roll from every face: edge rolls always, vertex pivots when asked.
pub fn candidate_rolls(cage: &Cage, vertex_pivots: bool) -> Vec<Roll> {
    // Only faces that share a node can roll into each other: list them per
    // node once, rather than trying every pair of faces. Same rolls, same
    // order (by `from`, then by `to`).
    let mut faces_at: Vec<Vec<usize>> = vec![Vec::new(); cage.nodes.len()];
    for (i, f) in cage.faces.iter().enumerate() {
        for &n in &f.nodes {
            if let Some(list) = faces_at.get_mut(n) {
                list.push(i);
            }
        }
    }
    let mut out = Vec::new();
    let mut near: Vec<usize> = Vec::new();
    for i in 0..cage.faces.len() {
        near.clear();
        for &n in &cage.faces[i].nodes {
            near.extend(faces_at.get(n).into_iter().flatten().copied());
        }
        near.sort_unstable();
        near.dedup();
        for &j in &near {
            if i == j {
                continue;
            }
            if let Some(r) = Roll::between(cage, i, j)
                && (r.kind == MoveKind::Edge || vertex_pivots)
            {
                out.push(r);
            }
        }
    }
    out
}

/// The rolls gravity makes on its own from `face` until the vehicle lies on
/// a face it can rest on (empty when `face` is such a face). From a face the
/// centre of mass projects outside of, the vehicle tips across the edge the
/// projection lies furthest beyond; each such roll lowers the centre of
/// mass, so the chain ends. A guard of one roll per face stops it anyway.
pub fn settle(cage: &Cage, face: usize) -> Vec<Roll> {
    let mut out = Vec::new();
    let mut at = face;
    for _ in 0..cage.faces.len() {
        let Some(f) = cage.faces.get(at) else { break };
        if f.stable {
            break;
        }
        let c = cage.com_body;
        let worst = f
            .edges
            .iter()
            .map(|e| {
                let (a, b) = (
                    cage.nodes[e.nodes[0]].pos_body,
                    cage.nodes[e.nodes[1]].pos_body,
                );
                let along = b - a;
                (
                    e.nodes,
                    along.cross(&(c - a)).dot(&f.normal_body) / along.norm(),
                )
            })
            .min_by(|x, y| x.1.total_cmp(&y.1));
        let Some((edge, _)) = worst else { break };
        let next = cage
            .faces
            .iter()
            .enumerate()
            .find(|(k, g)| *k != at && g.nodes.contains(&edge[0]) && g.nodes.contains(&edge[1]))
            .map(|(k, _)| k);
        let Some(next) = next.and_then(|k| Roll::between(cage, at, k)) else {
            break;
        };
        at = next.to;
        out.push(next);
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::profile::Profile;
    use approx::assert_relative_eq;

    #[test]
    fn six_strut_roll_angles_are_the_two_computed_values() {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        let rolls = candidate_rolls(&c, false);
        // 20 triangles, 30 edges, each edge rolled both ways.
        assert_eq!(rolls.len(), 60);
        for r in &rolls {
            let a = r.pivot[0].min(r.pivot[1]);
            let b = r.pivot[0].max(r.pivot[1]);
            let gap = !c.members.iter().any(|m| m.nodes == [a, b]);
            // docs/references.md: string edge arccos(sqrt(3/5)) = 39.2315 deg, rod
            // gap 2 atan(1/2) = 53.1301 deg (computed with numpy from the
            // node coordinates of Jessen 1967 / Tibert & Pellegrino 2003).
            let want = if gap { 53.1301 } else { 39.2315 };
            assert_relative_eq!(r.angle_deg, want, epsilon = 1e-4);
            assert_relative_eq!(
                (3.0f64 / 5.0).sqrt().acos().to_degrees(),
                39.2315,
                epsilon = 1e-4
            );
        }
        let gaps = rolls.iter().filter(|r| r.angle_deg > 45.0).count();
        assert_eq!(gaps, 12, "six rod gaps, each rolled both ways");
    }

    #[test]
    fn roll_axis_turns_gravity_from_one_normal_to_the_other() {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        for r in candidate_rolls(&c, true) {
            let rot = nalgebra::UnitQuaternion::from_axis_angle(
                &nalgebra::Unit::new_normalize(r.axis_body),
                -r.angle_deg.to_radians(),
            );
            let g = rot * c.faces[r.from].normal_body;
            assert!((g - c.faces[r.to].normal_body).norm() < 1e-9);
        }
    }
}
