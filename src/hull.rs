//! Convex hull of a point set in 3-D, with coplanar triangles merged into
//! one polygonal face.
//!
//! Written here rather than taken from a crate because the cage needs two
//! things general hull libraries do not give together: faces that are whole
//! polygons (a cube has 6 faces, not 12 triangles) and vertex order that is a
//! pure function of the input, so face ids stay stable. The method is the
//! textbook incremental hull (add a point, delete the faces it sees, close
//! the horizon with new triangles). The directed-edge map that finds the
//! horizon is kept up to date as triangles come and go rather than rebuilt
//! for every point, so each point costs one pass of dot products over the
//! live triangles plus work in proportion to the triangles it changes: a
//! few milliseconds for the 2562 nodes of a large geodesic cage.

use nalgebra::Vector3;
use std::collections::HashMap;

/// Why no hull could be built.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum HullError {
    /// Fewer than four points.
    #[error("{0} points cannot enclose a volume (at least 4 are needed)")]
    TooFew(usize),
    /// All points on a plane or a line.
    #[error("the points are all on one plane, so they enclose no volume")]
    Flat,
}

/// A face of the hull: a convex polygon.
#[derive(Debug, Clone, PartialEq)]
pub struct HullFace {
    /// Point indices, counter-clockwise seen from outside.
    pub vertices: Vec<usize>,
    /// Unit outward normal.
    pub normal: Vector3<f64>,
    /// Plane offset: `normal . x = offset` on the face.
    pub offset: f64,
}

/// The hull: faces and the tolerance used to decide coplanarity.
#[derive(Debug, Clone, PartialEq)]
pub struct Hull {
    /// Polygonal faces.
    pub faces: Vec<HullFace>,
    /// Distance below which a point counts as on a plane.
    pub tolerance: f64,
}

#[derive(Clone, Copy)]
struct Tri {
    v: [usize; 3],
    n: Vector3<f64>,
    d: f64,
}

fn tri(p: &[Vector3<f64>], a: usize, b: usize, c: usize) -> Tri {
    let n = (p[b] - p[a]).cross(&(p[c] - p[a]));
    let n = n / n.norm().max(f64::MIN_POSITIVE);
    Tri {
        v: [a, b, c],
        n,
        d: n.dot(&p[a]),
    }
}

impl Hull {
    /// Build the hull of `points`.
    pub fn new(points: &[[f64; 3]]) -> Result<Hull, HullError> {
        let p: Vec<Vector3<f64>> = points.iter().map(|q| Vector3::from(*q)).collect();
        if p.len() < 4 {
            return Err(HullError::TooFew(p.len()));
        }
        let extent = p
            .iter()
            .flat_map(|q| q.iter().map(|x| x.abs()))
            .fold(0.0_f64, f64::max)
            .max(f64::MIN_POSITIVE);
        let eps = 1e-9 * extent.max(1.0) + 1e-7 * extent;

        // Initial tetrahedron from extreme points.
        let i0 = (0..p.len())
            .min_by(|&a, &b| p[a].x.total_cmp(&p[b].x))
            .ok_or(HullError::TooFew(0))?;
        let i1 = far_from(&p, |q| (q - p[i0]).norm());
        let axis = (p[i1] - p[i0]).normalize();
        let i2 = far_from(&p, |q| {
            let r = q - p[i0];
            (r - axis * axis.dot(&r)).norm()
        });
        let plane_n = (p[i1] - p[i0]).cross(&(p[i2] - p[i0]));
        if plane_n.norm() <= eps * extent {
            return Err(HullError::Flat);
        }
        let plane_n = plane_n.normalize();
        let i3 = far_from(&p, |q| plane_n.dot(&(q - p[i0])).abs());
        let h = plane_n.dot(&(p[i3] - p[i0]));
        if h.abs() <= eps {
            return Err(HullError::Flat);
        }
        let mut tris: Vec<Tri> = if h < 0.0 {
            vec![
                tri(&p, i0, i1, i2),
                tri(&p, i0, i3, i1),
                tri(&p, i1, i3, i2),
                tri(&p, i2, i3, i0),
            ]
        } else {
            vec![
                tri(&p, i0, i2, i1),
                tri(&p, i0, i1, i3),
                tri(&p, i1, i2, i3),
                tri(&p, i2, i0, i3),
            ]
        };

        // Triangles live in creation order with a flag (so the survivors
        // keep their order and new ones go at the end, as a rebuilt list
        // would have them); the owner of every directed edge is kept up to
        // date as triangles are added and removed.
        let mut alive = vec![true; tris.len()];
        let mut live = tris.len();
        let mut owner: HashMap<(usize, usize), usize> = HashMap::new();
        for (ti, t) in tris.iter().enumerate() {
            for e in 0..3 {
                owner.insert((t.v[e], t.v[(e + 1) % 3]), ti);
            }
        }
        let mut visible: Vec<usize> = Vec::new();
        let mut is_visible: Vec<bool> = vec![false; tris.len()];
        let mut horizon: Vec<(usize, usize)> = Vec::new();
        for (k, q) in p.iter().enumerate() {
            if [i0, i1, i2, i3].contains(&k) {
                continue;
            }
            visible.clear();
            visible.extend(
                (0..tris.len()).filter(|&ti| alive[ti] && tris[ti].n.dot(q) - tris[ti].d > eps),
            );
            if visible.is_empty() {
                continue;
            }
            for &ti in &visible {
                is_visible[ti] = true;
            }
            horizon.clear();
            for &ti in &visible {
                let t = tris[ti];
                for e in 0..3 {
                    let (a, b) = (t.v[e], t.v[(e + 1) % 3]);
                    if owner.get(&(b, a)).is_some_and(|&o| !is_visible[o]) {
                        horizon.push((a, b));
                    }
                }
            }
            for &ti in &visible {
                alive[ti] = false;
                is_visible[ti] = false;
                let t = tris[ti];
                for e in 0..3 {
                    let key = (t.v[e], t.v[(e + 1) % 3]);
                    if owner.get(&key) == Some(&ti) {
                        owner.remove(&key);
                    }
                }
            }
            live -= visible.len();
            for &(a, b) in &horizon {
                let ti = tris.len();
                tris.push(tri(&p, a, b, k));
                alive.push(true);
                is_visible.push(false);
                for (x, y) in [(a, b), (b, k), (k, a)] {
                    owner.insert((x, y), ti);
                }
            }
            live += horizon.len();
            // Drop the dead once they outnumber the living, keeping order.
            if tris.len() > 2 * live + 64 {
                let mut keep = alive.iter();
                tris.retain(|_| *keep.next().unwrap_or(&false));
                alive = vec![true; tris.len()];
                is_visible = vec![false; tris.len()];
                owner.clear();
                for (ti, t) in tris.iter().enumerate() {
                    for e in 0..3 {
                        owner.insert((t.v[e], t.v[(e + 1) % 3]), ti);
                    }
                }
            }
        }
        let tris: Vec<Tri> = tris
            .iter()
            .zip(&alive)
            .filter(|(_, a)| **a)
            .map(|(t, _)| *t)
            .collect();
        Ok(Hull {
            faces: merge_coplanar(&p, &tris, eps),
            tolerance: eps,
        })
    }

    /// True when `x` is inside every face plane by more than the tolerance.
    pub fn contains_strictly(&self, x: [f64; 3]) -> bool {
        let x = Vector3::from(x);
        self.faces
            .iter()
            .all(|f| f.normal.dot(&x) - f.offset < -self.tolerance)
    }

    /// Number of distinct edges (each shared by two faces).
    pub fn edge_count(&self) -> usize {
        self.faces.iter().map(|f| f.vertices.len()).sum::<usize>() / 2
    }

    /// Number of distinct vertices used by the faces.
    pub fn vertex_count(&self) -> usize {
        let mut v: Vec<usize> = self.faces.iter().flat_map(|f| f.vertices.clone()).collect();
        v.sort_unstable();
        v.dedup();
        v.len()
    }
}

fn far_from(p: &[Vector3<f64>], dist: impl Fn(&Vector3<f64>) -> f64) -> usize {
    let mut best = 0;
    let mut best_d = f64::NEG_INFINITY;
    for (i, q) in p.iter().enumerate() {
        let d = dist(q);
        if d > best_d + 1e-15 {
            best = i;
            best_d = d;
        }
    }
    best
}

/// Join adjacent coplanar triangles into polygons.
fn merge_coplanar(p: &[Vector3<f64>], tris: &[Tri], eps: f64) -> Vec<HullFace> {
    let mut owner: HashMap<(usize, usize), usize> = HashMap::new();
    for (ti, t) in tris.iter().enumerate() {
        for e in 0..3 {
            owner.insert((t.v[e], t.v[(e + 1) % 3]), ti);
        }
    }
    let mut parent: Vec<usize> = (0..tris.len()).collect();
    fn find(parent: &mut [usize], mut i: usize) -> usize {
        while parent[i] != i {
            parent[i] = parent[parent[i]];
            i = parent[i];
        }
        i
    }
    let coplanar = |a: &Tri, b: &Tri| {
        a.n.dot(&b.n) > 1.0 - 1e-9 && b.v.iter().all(|&v| (a.n.dot(&p[v]) - a.d).abs() <= eps)
    };
    for (ti, t) in tris.iter().enumerate() {
        for e in 0..3 {
            if let Some(&o) = owner.get(&(t.v[(e + 1) % 3], t.v[e]))
                && coplanar(t, &tris[o])
            {
                let (ra, rb) = (find(&mut parent, ti), find(&mut parent, o));
                if ra != rb {
                    parent[ra.max(rb)] = ra.min(rb);
                }
            }
        }
    }
    let mut groups: Vec<(usize, Vec<usize>)> = Vec::new();
    let mut group_of: HashMap<usize, usize> = HashMap::new();
    for ti in 0..tris.len() {
        let r = find(&mut parent, ti);
        match group_of.get(&r) {
            Some(&gi) => groups[gi].1.push(ti),
            None => {
                group_of.insert(r, groups.len());
                groups.push((r, vec![ti]));
            }
        }
    }
    let mut faces = Vec::new();
    for (_, g) in groups {
        // Boundary edges: directed edges of the group whose twin is not in it.
        let in_group: std::collections::HashSet<usize> = g.iter().copied().collect();
        let mut next: HashMap<usize, usize> = HashMap::new();
        for &ti in &g {
            let t = &tris[ti];
            for e in 0..3 {
                let (a, b) = (t.v[e], t.v[(e + 1) % 3]);
                let twin_inside = owner.get(&(b, a)).is_some_and(|o| in_group.contains(o));
                if !twin_inside {
                    next.insert(a, b);
                }
            }
        }
        let Some(&start) = next.keys().min() else {
            continue;
        };
        let mut loop_v = vec![start];
        let mut cur = start;
        while let Some(&n) = next.get(&cur) {
            if n == start || loop_v.len() > next.len() {
                break;
            }
            loop_v.push(n);
            cur = n;
        }
        // Newell's method: robust normal for a planar polygon.
        let mut n = Vector3::zeros();
        for i in 0..loop_v.len() {
            let a = p[loop_v[i]];
            let b = p[loop_v[(i + 1) % loop_v.len()]];
            n += a.cross(&b);
        }
        let n = n.normalize();
        let offset = loop_v.iter().map(|&v| n.dot(&p[v])).sum::<f64>() / loop_v.len() as f64;
        faces.push(HullFace {
            vertices: loop_v,
            normal: n,
            offset,
        });
    }
    faces
}

#[cfg(test)]
mod tests {
    use super::*;

    fn cube() -> Vec<[f64; 3]> {
        let mut v = Vec::new();
        for x in [-1.0, 1.0] {
            for y in [-1.0, 1.0] {
                for z in [-1.0, 1.0] {
                    v.push([x, y, z]);
                }
            }
        }
        v
    }

    #[test]
    fn cube_has_six_square_faces() {
        let h = Hull::new(&cube()).unwrap();
        assert_eq!(h.faces.len(), 6);
        assert!(h.faces.iter().all(|f| f.vertices.len() == 4));
        // Euler's formula V - E + F = 2 for a convex polyhedron.
        assert_eq!(
            h.vertex_count() as i64 - h.edge_count() as i64 + h.faces.len() as i64,
            2
        );
    }

    #[test]
    fn normals_point_outward() {
        let h = Hull::new(&cube()).unwrap();
        for f in &h.faces {
            assert!(
                f.offset > 0.0,
                "origin is inside, so every offset is positive"
            );
        }
        assert!(h.contains_strictly([0.1, 0.2, -0.3]));
        assert!(!h.contains_strictly([1.0, 0.0, 0.0]));
    }

    #[test]
    fn flat_points_are_refused() {
        let pts = [
            [0.0, 0.0, 0.0],
            [1.0, 0.0, 0.0],
            [0.0, 1.0, 0.0],
            [1.0, 1.0, 0.0],
        ];
        assert_eq!(Hull::new(&pts), Err(HullError::Flat));
        assert_eq!(Hull::new(&pts[..3]), Err(HullError::TooFew(3)));
    }

    #[test]
    fn interior_points_are_ignored() {
        let mut pts = cube();
        pts.push([0.0, 0.0, 0.0]);
        let h = Hull::new(&pts).unwrap();
        assert_eq!(h.faces.len(), 6);
        assert!(h.faces.iter().all(|f| !f.vertices.contains(&8)));
    }
}
