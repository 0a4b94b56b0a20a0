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
//! for every point, and the triangles a point sees come from conflict lists
//! (Clarkson and Shor 1989: the points not added yet that see each
//! triangle) rather than a test of every live triangle, so each point costs
//! work in proportion to the triangles it changes and the points they had.

use foldhash::HashMap;
use foldhash::HashMapExt;
use nalgebra::Vector3;

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

/// How the triangles a new point sees are found.
#[derive(Clone, Copy, PartialEq, Eq)]
enum Search {
    /// From conflict lists: near n log n for points in general order.
    Conflicts,
    /// By testing every live triangle (the tests' reference).
    #[cfg_attr(not(test), allow(dead_code))]
    Exhaustive,
}

impl Hull {
    /// Build the hull of `points`.
    pub fn new(points: &[[f64; 3]]) -> Result<Hull, HullError> {
        Hull::build(points, Search::Conflicts)
    }

    fn build(points: &[[f64; 3]], search: Search) -> Result<Hull, HullError> {
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

        // Triangles live in creation order with a flag (the survivors keep
        // their order and new ones go at the end, as a rebuilt list would
        // have them); the owner of every directed edge is kept up to date
        // as triangles are added and removed.
        let mut alive = vec![true; tris.len()];
        let mut owner: HashMap<(usize, usize), usize> = HashMap::new();
        for (ti, t) in tris.iter().enumerate() {
            for e in 0..3 {
                owner.insert((t.v[e], t.v[(e + 1) % 3]), ti);
            }
        }
        let initial = [i0, i1, i2, i3];
        let above = |t: &Tri, q: &Vector3<f64>| t.n.dot(q) - t.d > eps;
        // Conflict lists (Clarkson and Shor 1989): the points not added yet
        // that see each triangle, and the triangles each such point sees
        // (some of them since removed). A new triangle on the horizon edge
        // a-b can only be seen by a point that saw one of the two
        // triangles that shared a-b, so only their points are tested.
        let conflicts_kept = search == Search::Conflicts;
        let mut conflicts: Vec<Vec<usize>> = vec![Vec::new(); tris.len()];
        let mut sees: Vec<Vec<usize>> = vec![Vec::new(); p.len()];
        if conflicts_kept {
            for (k, q) in p.iter().enumerate() {
                if initial.contains(&k) {
                    continue;
                }
                for (ti, t) in tris.iter().enumerate() {
                    if above(t, q) {
                        conflicts[ti].push(k);
                        sees[k].push(ti);
                    }
                }
            }
        }
        // The last new triangle each point was tested against.
        let mut tested: Vec<usize> = vec![usize::MAX; p.len()];
        let mut visible: Vec<usize> = Vec::new();
        let mut is_visible: Vec<bool> = vec![false; tris.len()];
        // Horizon edges a-b with the visible triangle that had a-b and the
        // kept one that has b-a.
        let mut horizon: Vec<(usize, usize, usize, usize)> = Vec::new();
        for (k, q) in p.iter().enumerate() {
            if initial.contains(&k) {
                continue;
            }
            visible.clear();
            match search {
                Search::Conflicts => {
                    visible.extend(
                        std::mem::take(&mut sees[k])
                            .into_iter()
                            .filter(|&ti| alive[ti]),
                    );
                    visible.sort_unstable();
                }
                Search::Exhaustive => {
                    visible.extend((0..tris.len()).filter(|&ti| alive[ti] && above(&tris[ti], q)))
                }
            }
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
                    if let Some(&o) = owner.get(&(b, a))
                        && !is_visible[o]
                    {
                        horizon.push((a, b, ti, o));
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
            for &(a, b, gone, kept) in &horizon {
                let ti = tris.len();
                let t = tri(&p, a, b, k);
                let mut seen_by = Vec::new();
                if conflicts_kept {
                    for &j in conflicts[gone].iter().chain(&conflicts[kept]) {
                        if j > k && tested[j] != ti {
                            tested[j] = ti;
                            if above(&t, &p[j]) {
                                seen_by.push(j);
                                sees[j].push(ti);
                            }
                        }
                    }
                }
                tris.push(t);
                conflicts.push(seen_by);
                alive.push(true);
                is_visible.push(false);
                for (x, y) in [(a, b), (b, k), (k, a)] {
                    owner.insert((x, y), ti);
                }
            }
            for &ti in &visible {
                conflicts[ti] = Vec::new();
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
    // Groups in the order of their first triangle; a triangle is in a
    // group when its root is the group's.
    let root: Vec<usize> = (0..tris.len()).map(|ti| find(&mut parent, ti)).collect();
    let mut groups: Vec<Vec<usize>> = Vec::new();
    let mut group_of: Vec<usize> = vec![usize::MAX; tris.len()];
    for (ti, &r) in root.iter().enumerate() {
        match group_of[r] {
            usize::MAX => {
                group_of[r] = groups.len();
                groups.push(vec![ti]);
            }
            gi => groups[gi].push(ti),
        }
    }
    let mut faces = Vec::new();
    // The group's boundary, as (from, to) pairs: a few per face, so a list
    // is quicker than a map (a later edge from the same vertex replaces
    // the earlier, as a map's insert would).
    let mut next: Vec<(usize, usize)> = Vec::new();
    for g in groups {
        // Boundary edges: directed edges of the group whose twin is not in it.
        let r = root[g[0]];
        next.clear();
        for &ti in &g {
            let t = &tris[ti];
            for e in 0..3 {
                let (a, b) = (t.v[e], t.v[(e + 1) % 3]);
                let twin_inside = owner.get(&(b, a)).is_some_and(|&o| root[o] == r);
                if !twin_inside {
                    match next.iter_mut().find(|(from, _)| *from == a) {
                        Some(edge) => edge.1 = b,
                        None => next.push((a, b)),
                    }
                }
            }
        }
        let Some(start) = next.iter().map(|&(from, _)| from).min() else {
            continue;
        };
        let after = |v: usize| next.iter().find(|(from, _)| *from == v).map(|&(_, to)| to);
        let mut loop_v = vec![start];
        let mut cur = start;
        while let Some(n) = after(cur) {
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

    /// Both searches give the same hull, face for face and vertex for
    /// vertex (the same face ids), with the exhaustive one as the
    /// reference: conflict lists are an established method (Clarkson and
    /// Shor 1989), and this checks our use of them.
    fn same_as_exhaustive(points: &[[f64; 3]]) {
        let fast = Hull::new(points);
        let slow = Hull::build(points, Search::Exhaustive);
        assert_eq!(fast, slow, "{} points", points.len());
    }

    #[test]
    fn conflict_lists_give_the_exhaustive_hull_on_spheres_and_grids() {
        for k in 0..=4 {
            let (nodes, _) = crate::geodesic::sphere(k);
            let pts: Vec<[f64; 3]> = nodes.iter().map(|v| [v.x, v.y, v.z]).collect();
            same_as_exhaustive(&pts);
        }
        // A 5x5x5 grid: many points on each face plane and inside.
        let mut grid = Vec::new();
        for x in 0..5 {
            for y in 0..5 {
                for z in 0..5 {
                    grid.push([f64::from(x), f64::from(y), f64::from(z)]);
                }
            }
        }
        same_as_exhaustive(&grid);
        let mut pts = cube();
        pts.push([0.0, 0.0, 0.0]);
        same_as_exhaustive(&pts);
        // The case the property test below shrank to when the new
        // triangles' candidates were taken from one side of the horizon
        // edge only (a fault put in on purpose, to see the test catch it).
        same_as_exhaustive(&[
            [
                -0.21166519765429553,
                -0.7108149874864792,
                -0.6635754581390547,
            ],
            [-0.6082650908632915, 0.0, -1.0],
            [-0.6006765384496323, -0.4120925817830636, 0.8188627643545844],
            [0.12556137101905854, 0.39260517783206833, 1.0],
            [0.0, -0.9607336988902186, 0.0],
            [0.28611885852323554, 0.0, -1.0],
        ]);
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #[test]
            fn conflict_lists_give_the_exhaustive_hull(
                points in proptest::collection::vec(
                    prop_oneof![
                        // Anywhere in a box, or on a few planes (coplanar runs).
                        proptest::array::uniform3(-1.0f64..1.0),
                        (proptest::array::uniform2(-1.0f64..1.0), prop_oneof![Just(-1.0), Just(1.0)])
                            .prop_map(|([a, b], c)| [a, b, c]),
                        (-3i32..=3, -3i32..=3, -3i32..=3)
                            .prop_map(|(a, b, c)| [f64::from(a), f64::from(b), f64::from(c)]),
                    ],
                    4..80,
                ),
            ) {
                let fast = Hull::new(&points);
                let slow = Hull::build(&points, Search::Exhaustive);
                prop_assert_eq!(fast, slow);
            }
        }
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
