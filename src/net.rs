//! The unfolded net of the cage: the hull's faces laid flat in the plane,
//! joined along a spanning tree of the face graph, for drawing on a screen.
//!
//! Edge unfolding (Demaine & O'Rourke, Geometric Folding Algorithms, 2007,
//! ch. 22): choose a spanning tree of the faces, cut every other edge, and
//! rotate each face about its hinge edge into its parent's plane. The tree
//! here is breadth-first from the most level face (F1), children in face id
//! order, which keeps the take-off faces in the middle of the drawing. When
//! that net overlaps itself, roots are tried in turn; the net reports
//! whether overlap remains, so a screen can say so rather than mislead.

use crate::cage::Cage;
use nalgebra::{Vector2, Vector3};
use std::collections::VecDeque;

/// One face laid flat.
#[derive(Debug, Clone, PartialEq)]
pub struct NetFace {
    /// Face index in the cage.
    pub face: usize,
    /// 2-D position of each of the face's nodes, in the face's node order.
    pub points: Vec<[f64; 2]>,
    /// Parent face in the unfolding tree (None for the root).
    pub parent: Option<usize>,
}

/// The unfolded net.
#[derive(Debug, Clone, PartialEq)]
pub struct Net {
    /// Faces in the order they were laid (root first).
    pub faces: Vec<NetFace>,
    /// Whether any two faces overlap in the plane.
    pub overlaps: bool,
}

impl Net {
    /// Unfold the cage's hull.
    pub fn unfold(cage: &Cage) -> Net {
        let mut best: Option<Net> = None;
        for root in 0..cage.faces.len() {
            let net = unfold_from(cage, root);
            if !net.overlaps {
                return net;
            }
            best.get_or_insert(net);
        }
        best.unwrap_or(Net {
            faces: Vec::new(),
            overlaps: false,
        })
    }

    /// The laid-out face for a cage face index.
    pub fn face(&self, face: usize) -> Option<&NetFace> {
        self.faces.iter().find(|f| f.face == face)
    }

    /// Bounds `(min_x, max_x, min_y, max_y)` of all points.
    pub fn bounds(&self) -> (f64, f64, f64, f64) {
        let mut b = (
            f64::INFINITY,
            f64::NEG_INFINITY,
            f64::INFINITY,
            f64::NEG_INFINITY,
        );
        for p in self.faces.iter().flat_map(|f| &f.points) {
            b.0 = b.0.min(p[0]);
            b.1 = b.1.max(p[0]);
            b.2 = b.2.min(p[1]);
            b.3 = b.3.max(p[1]);
        }
        b
    }

    /// Centroid of a laid-out face.
    pub fn centroid(f: &NetFace) -> [f64; 2] {
        let n = f.points.len().max(1) as f64;
        let (x, y) = f
            .points
            .iter()
            .fold((0.0, 0.0), |(x, y), p| (x + p[0], y + p[1]));
        [x / n, y / n]
    }
}

/// Shared edge of two faces, as node indices, if they share one.
fn shared_edge(cage: &Cage, a: usize, b: usize) -> Option<[usize; 2]> {
    let fa = &cage.faces[a];
    fa.edges.iter().map(|e| e.nodes).find(|e| {
        cage.faces[b]
            .edges
            .iter()
            .any(|g| g.nodes == [e[1], e[0]] || g.nodes == *e)
    })
}

fn unfold_from(cage: &Cage, root: usize) -> Net {
    let n = cage.faces.len();
    let mut placed: Vec<Option<Vec<Vector2<f64>>>> = vec![None; n];
    let mut parent: Vec<Option<usize>> = vec![None; n];
    let mut order = Vec::new();

    // Root: the face's own plane, first edge along +x.
    let rf = &cage.faces[root];
    let p0 = cage.nodes[rf.nodes[0]].pos_body;
    let ex = (cage.nodes[rf.nodes[1]].pos_body - p0).normalize();
    let ey = rf.normal_body.cross(&ex);
    placed[root] = Some(
        rf.nodes
            .iter()
            .map(|&i| {
                let d = cage.nodes[i].pos_body - p0;
                // Seen from outside the cage, so the net reads like the cage
                // viewed from outside (mirror y).
                Vector2::new(d.dot(&ex), -d.dot(&ey))
            })
            .collect(),
    );
    order.push(root);
    let mut queue = VecDeque::from([root]);
    while let Some(f) = queue.pop_front() {
        for g in 0..n {
            if placed[g].is_some() {
                continue;
            }
            let Some([a, b]) = shared_edge(cage, f, g) else {
                continue;
            };
            let Some(pf) = placed[f].as_ref() else {
                continue;
            };
            let pos_in =
                |face: usize, node: usize| cage.faces[face].nodes.iter().position(|&x| x == node);
            let (Some(ia), Some(ib)) = (pos_in(f, a), pos_in(f, b)) else {
                continue;
            };
            let (a2, b2) = (pf[ia], pf[ib]);
            let e2 = (b2 - a2).normalize();
            let mut n2 = Vector2::new(-e2.y, e2.x);
            let centre_f = pf.iter().sum::<Vector2<f64>>() / pf.len() as f64;
            if n2.dot(&(centre_f - a2)) > 0.0 {
                n2 = -n2;
            }
            let (a3, b3) = (cage.nodes[a].pos_body, cage.nodes[b].pos_body);
            let e3 = (b3 - a3).normalize();
            let pts: Vec<Vector2<f64>> = cage.faces[g]
                .nodes
                .iter()
                .map(|&v| {
                    let d: Vector3<f64> = cage.nodes[v].pos_body - a3;
                    let along = d.dot(&e3);
                    let perp = (d - e3 * along).norm();
                    a2 + e2 * along + n2 * perp
                })
                .collect();
            placed[g] = Some(pts);
            parent[g] = Some(f);
            order.push(g);
            queue.push_back(g);
        }
    }
    let faces: Vec<NetFace> = order
        .iter()
        .filter_map(|&f| {
            placed[f].as_ref().map(|pts| NetFace {
                face: f,
                points: pts.iter().map(|p| [p.x, p.y]).collect(),
                parent: parent[f],
            })
        })
        .collect();
    let overlaps = any_overlap(&faces);
    Net { faces, overlaps }
}

/// Convex polygons overlap when no edge normal of either separates them
/// (separating axis theorem); touching along an edge or a corner is not
/// overlap, so each polygon is shrunk a little about its centroid first.
fn convex_overlap(a: &[[f64; 2]], b: &[[f64; 2]]) -> bool {
    let shrink = |p: &[[f64; 2]]| -> Vec<Vector2<f64>> {
        let c = p
            .iter()
            .map(|q| Vector2::new(q[0], q[1]))
            .sum::<Vector2<f64>>()
            / p.len() as f64;
        p.iter()
            .map(|q| c + (Vector2::new(q[0], q[1]) - c) * (1.0 - 1e-6))
            .collect()
    };
    let (a, b) = (shrink(a), shrink(b));
    for poly in [&a, &b] {
        for i in 0..poly.len() {
            let e = poly[(i + 1) % poly.len()] - poly[i];
            let axis = Vector2::new(-e.y, e.x);
            let span = |p: &[Vector2<f64>]| {
                p.iter()
                    .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), q| {
                        let d = axis.dot(q);
                        (lo.min(d), hi.max(d))
                    })
            };
            let (sa, sb) = (span(&a), span(&b));
            if sa.1 <= sb.0 || sb.1 <= sa.0 {
                return false;
            }
        }
    }
    true
}

fn any_overlap(faces: &[NetFace]) -> bool {
    faces.iter().enumerate().any(|(i, f)| {
        faces[i + 1..]
            .iter()
            .any(|g| convex_overlap(&f.points, &g.points))
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    fn demo() -> Cage {
        crate::cage::demo_cage().1
    }

    #[test]
    fn demo_net_lays_every_face_once_without_overlap() {
        let c = demo();
        let net = Net::unfold(&c);
        assert_eq!(net.faces.len(), c.faces.len());
        assert!(!net.overlaps);
        assert_eq!(net.faces[0].face, 0, "root is F1, the most level face");
        // A spanning tree: every face but the root has a parent laid before it.
        for (k, f) in net.faces.iter().enumerate().skip(1) {
            let p = f.parent.unwrap();
            assert!(net.faces[..k].iter().any(|g| g.face == p));
        }
    }

    #[test]
    fn unfolding_keeps_edge_lengths() {
        // Rotating a face about its hinge is an isometry: every edge keeps
        // its 3-D length in the plane.
        let c = demo();
        let net = Net::unfold(&c);
        for nf in &net.faces {
            let face = &c.faces[nf.face];
            for i in 0..face.nodes.len() {
                let j = (i + 1) % face.nodes.len();
                let l3 = (c.nodes[face.nodes[i]].pos_body - c.nodes[face.nodes[j]].pos_body).norm();
                let (p, q) = (nf.points[i], nf.points[j]);
                assert_relative_eq!(
                    ((p[0] - q[0]).powi(2) + (p[1] - q[1]).powi(2)).sqrt(),
                    l3,
                    epsilon = 1e-9
                );
            }
        }
    }

    #[test]
    fn overlap_test_tells_touching_from_overlapping() {
        let sq = [[0.0, 0.0], [1.0, 0.0], [1.0, 1.0], [0.0, 1.0]];
        let beside = [[1.0, 0.0], [2.0, 0.0], [2.0, 1.0], [1.0, 1.0]];
        let over = [[0.5, 0.5], [1.5, 0.5], [1.5, 1.5], [0.5, 1.5]];
        assert!(!convex_overlap(&sq, &beside));
        assert!(convex_overlap(&sq, &over));
    }
}
