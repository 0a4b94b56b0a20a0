//! Cage geometry on cages other than the six-strut one, and invariants:
//! counts and angles do not change when a cage is rotated, translated or
//! scaled; normals point outward; Euler's formula holds.

use approx::assert_relative_eq;
use cagehand::cage::Cage;
use cagehand::profile::Profile;
use nalgebra::{Rotation3, Vector3};
use proptest::prelude::*;

/// TOML for an explicit cage whose members are all strings (geometry only).
fn explicit_toml(
    nodes: &[[f64; 3]],
    edges: &[[usize; 2]],
    com: [f64; 3],
    mount: [f64; 3],
) -> String {
    let mut s = format!(
        "[vehicle]\nid = \"t\"\nmass_kg = 1.0\ncom_m = [{}, {}, {}]\n[cage]\nkind = \"explicit\"\n",
        com[0], com[1], com[2]
    );
    for (i, p) in nodes.iter().enumerate() {
        s += &format!(
            "[[cage.node]]\nid = \"N{}\"\npos_m = [{:e}, {:e}, {:e}]\n",
            i + 1,
            p[0],
            p[1],
            p[2]
        );
    }
    for e in edges {
        s += &format!(
            "[[cage.string]]\nnodes = [\"N{}\", \"N{}\"]\n",
            e[0] + 1,
            e[1] + 1
        );
    }
    s += "[cage.rod_section]\nouter_diameter_mm = 8.0\ninner_diameter_mm = 6.0\nmodulus_gpa = 90.0\ncrush_strength_mpa = 400.0\ndensity_kg_m3 = 1500.0\n";
    s += "[cage.string_section]\ndiameter_mm = 1.0\nmodulus_gpa = 40.0\nbreaking_load_n = 500.0\npretension_n = 10.0\n";
    s += &format!(
        "[mount]\nroll_deg = {}\npitch_deg = {}\nyaw_deg = {}\n",
        mount[0], mount[1], mount[2]
    );
    s
}

fn build(nodes: &[[f64; 3]], edges: &[[usize; 2]], com: [f64; 3], mount: [f64; 3]) -> Cage {
    let p = Profile::parse(&explicit_toml(nodes, edges, com, mount), "test").expect("profile");
    Cage::from_profile(&p).expect("cage")
}

fn icosahedron(a: f64) -> Vec<[f64; 3]> {
    // Vertices as the cyclic permutations of (0, +-1, +-phi), edge 2.
    let phi = (1.0 + 5f64.sqrt()) / 2.0;
    let k = a / 2.0;
    let mut v = Vec::new();
    for (s1, s2) in [(1.0, 1.0), (1.0, -1.0), (-1.0, 1.0), (-1.0, -1.0)] {
        v.push([0.0, s1 * k, s2 * phi * k]);
        v.push([s1 * k, s2 * phi * k, 0.0]);
        v.push([s2 * phi * k, 0.0, s1 * k]);
    }
    v
}

/// Edges: pairs of points at the shortest distance.
fn shortest_edges(p: &[[f64; 3]]) -> Vec<[usize; 2]> {
    let d = |a: usize, b: usize| Vector3::from(p[a]).metric_distance(&Vector3::from(p[b]));
    let mut min = f64::INFINITY;
    for a in 0..p.len() {
        for b in a + 1..p.len() {
            min = min.min(d(a, b));
        }
    }
    let mut e = Vec::new();
    for a in 0..p.len() {
        for b in a + 1..p.len() {
            if d(a, b) < min * (1.0 + 1e-6) {
                e.push([a, b]);
            }
        }
    }
    e
}

fn euler_characteristic(c: &Cage) -> i64 {
    let edges: usize = c.faces.iter().map(|f| f.nodes.len()).sum::<usize>() / 2;
    c.nodes.len() as i64 - edges as i64 + c.faces.len() as i64
}

fn adjacent_normal_angles_deg(c: &Cage) -> Vec<f64> {
    let mut out = Vec::new();
    for (i, f) in c.faces.iter().enumerate() {
        for g in &c.faces[i + 1..] {
            let shared = f.nodes.iter().filter(|n| g.nodes.contains(n)).count();
            if shared >= 2 {
                out.push(f.normal_body.angle(&g.normal_body).to_degrees());
            }
        }
    }
    out.sort_by(f64::total_cmp);
    out
}

#[test]
fn regular_icosahedron_angles_and_margin() {
    let a = 0.3;
    let p = icosahedron(a);
    let e = shortest_edges(&p);
    assert_eq!(e.len(), 30);
    let c = build(&p, &e, [0.0, 0.0, 0.0], [0.0, 0.0, 0.0]);
    assert_eq!(c.faces.len(), 20);
    assert_eq!(euler_characteristic(&c), 2);
    // Dihedral angle arccos(-sqrt(5)/3) = 138.1897 deg, so a roll between
    // neighbouring faces is 41.8103 deg (docs/references.md).
    for ang in adjacent_normal_angles_deg(&c) {
        assert_relative_eq!(ang, 41.8103, epsilon = 1e-4);
    }
    // Per-edge static margin with the centre of mass at the centre:
    // a / (2 sqrt 3) (McGhee & Frank, Math. Biosci. 3, 1968).
    for f in &c.faces {
        assert!(f.stable);
        assert_relative_eq!(f.margin_m, a / (2.0 * 3f64.sqrt()), epsilon = 1e-9);
    }
}

#[test]
fn cube_faces_are_squares() {
    let mut p = Vec::new();
    for x in [-0.1, 0.1] {
        for y in [-0.1, 0.1] {
            for z in [-0.1, 0.1] {
                p.push([x, y, z]);
            }
        }
    }
    let c = build(&p, &shortest_edges(&p), [0.0, 0.0, 0.01], [0.0, 0.0, 0.0]);
    assert_eq!(c.faces.len(), 6);
    assert!(
        c.faces
            .iter()
            .all(|f| f.nodes.len() == 4 && f.string_edges == 4)
    );
    assert_eq!(euler_characteristic(&c), 2);
    // The face straight below the centre of mass is F1, level; the top is last.
    assert_relative_eq!(c.faces[0].tilt_deg, 0.0, epsilon = 1e-9);
    assert_relative_eq!(c.faces[5].tilt_deg, 180.0, epsilon = 1e-9);
}

#[test]
fn twisted_prism_has_eight_faces() {
    let p = Profile::parse(
        &std::fs::read_to_string("profiles/prism-explicit.toml").expect("read"),
        "prism",
    )
    .expect("profile");
    let c = Cage::from_profile(&p).expect("cage");
    assert_eq!(c.faces.len(), 8);
    assert_eq!(euler_characteristic(&c), 2);
    assert_eq!(
        c.members.iter().filter(|m| m.id.starts_with('R')).count(),
        3
    );
}

/// Geodesic sphere: each icosahedron face cut into freq^2 triangles, the
/// points pushed out to the sphere. 10 freq^2 + 2 nodes.
fn geodesic(freq: usize, radius: f64) -> Vec<[f64; 3]> {
    let ico = icosahedron(2.0);
    let e = shortest_edges(&ico);
    let mut tris = Vec::new();
    for (i, a) in e.iter().enumerate() {
        for b in &e[i + 1..] {
            for &x in a {
                for &y in b {
                    if x == y {
                        let (p, q) = (a[0] + a[1] - x, b[0] + b[1] - y);
                        if e.contains(&[p.min(q), p.max(q)]) && x < p && p < q {
                            tris.push([x, p, q]);
                        }
                    }
                }
            }
        }
    }
    let mut pts: Vec<Vector3<f64>> = Vec::new();
    for t in &tris {
        let (a, b, c) = (
            Vector3::from(ico[t[0]]),
            Vector3::from(ico[t[1]]),
            Vector3::from(ico[t[2]]),
        );
        for i in 0..=freq {
            for j in 0..=freq - i {
                let k = freq - i - j;
                let p = (a * i as f64 + b * j as f64 + c * k as f64).normalize() * radius;
                if !pts.iter().any(|q| (q - p).norm() < 1e-9) {
                    pts.push(p);
                }
            }
        }
    }
    pts.iter().map(|p| [p.x, p.y, p.z]).collect()
}

#[test]
fn geodesic_sphere_of_several_hundred_nodes() {
    let p = geodesic(6, 0.25);
    assert_eq!(p.len(), 362);
    let c = build(&p, &shortest_edges(&p), [0.0, 0.0, 0.0], [0.0, 0.0, 0.0]);
    assert_eq!(c.faces.len(), 720);
    assert_eq!(euler_characteristic(&c), 2);
    for f in &c.faces {
        for n in &c.nodes {
            assert!(
                f.normal_body.dot(&(n.pos_body - f.centroid_body)) < 1e-9,
                "normals outward"
            );
        }
    }
}

fn prism_nodes() -> (Vec<[f64; 3]>, Vec<[usize; 2]>) {
    let p = vec![
        [0.16, 0.0, 0.11],
        [-0.08, 0.13856, 0.11],
        [-0.08, -0.13856, 0.11],
        [-0.13856, 0.08, -0.11],
        [0.0, -0.16, -0.11],
        [0.13856, 0.08, -0.11],
    ];
    let e = vec![
        [0, 1],
        [1, 2],
        [2, 0],
        [3, 4],
        [4, 5],
        [5, 3],
        [0, 5],
        [1, 3],
        [2, 4],
        [0, 3],
        [1, 4],
        [2, 5],
    ];
    (p, e)
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    /// Rotating the cage's nodes, with the mount turned back by the same
    /// rotation, and translating or scaling them, leaves the counts, tilts,
    /// roll angles and (scaled) margins unchanged.
    #[test]
    fn rigid_motion_and_scale_change_nothing(
        roll in -170.0f64..170.0, pitch in -80.0f64..80.0, yaw in -170.0f64..170.0,
        t in prop::array::uniform3(-0.5f64..0.5), scale in 0.2f64..5.0,
    ) {
        let (p, e) = prism_nodes();
        let com = [0.005, 0.0, 0.02];
        let base = build(&p, &e, com, [0.0, 0.0, 0.0]);
        let r = Rotation3::from_euler_angles(roll.to_radians(), pitch.to_radians(), yaw.to_radians());
        let move_pt = |q: [f64; 3]| {
            let v = r * Vector3::from(q) * scale + Vector3::from(t);
            [v.x, v.y, v.z]
        };
        let moved: Vec<[f64; 3]> = p.iter().map(|q| move_pt(*q)).collect();
        // The mount must undo the rotation (about the moved origin: a mount is a
        // pure rotation, so translation moves every node but no angle).
        let (mr, mp, my) = r.inverse().euler_angles();
        let c = build(&moved, &e, move_pt(com), [mr.to_degrees(), mp.to_degrees(), my.to_degrees()]);
        prop_assert_eq!(c.faces.len(), base.faces.len());
        prop_assert_eq!(euler_characteristic(&c), 2);
        for (f, g) in c.faces.iter().zip(&base.faces) {
            prop_assert_eq!(&f.id, &g.id);
            prop_assert!((f.tilt_deg - g.tilt_deg).abs() < 1e-6);
            prop_assert_eq!(f.string_edges, g.string_edges);
            prop_assert_eq!(f.stable, g.stable);
            prop_assert!((f.margin_m - g.margin_m * scale).abs() < 1e-9 * scale.max(1.0));
        }
        let (a, b) = (adjacent_normal_angles_deg(&c), adjacent_normal_angles_deg(&base));
        for (x, y) in a.iter().zip(&b) {
            prop_assert!((x - y).abs() < 1e-6);
        }
    }

    /// Listing the nodes in another order gives the same faces with the same
    /// ids: face ids are a function of the geometry.
    #[test]
    fn face_ids_do_not_depend_on_listing_order(perm in Just((0..6usize).collect::<Vec<_>>()).prop_shuffle()) {
        let (p, e) = prism_nodes();
        let base = build(&p, &e, [0.005, 0.0, 0.02], [0.0, 0.0, 0.0]);
        let shuffled: Vec<[f64; 3]> = perm.iter().map(|&i| p[i]).collect();
        let inv: Vec<usize> = (0..6).map(|i| perm.iter().position(|&x| x == i).unwrap_or(0)).collect();
        let e2: Vec<[usize; 2]> = e.iter().map(|m| [inv[m[0]], inv[m[1]]]).collect();
        let c = build(&shuffled, &e2, [0.005, 0.0, 0.02], [0.0, 0.0, 0.0]);
        for (f, g) in c.faces.iter().zip(&base.faces) {
            prop_assert_eq!(&f.id, &g.id);
            prop_assert!((f.normal_body - g.normal_body).norm() < 1e-9);
        }
    }
}

#[test]
fn icosahedron_net_does_not_overlap() {
    // No edge unfolding of the icosahedron overlaps (Horiyama & Shoji,
    // CCCG 2011), so the breadth-first net from F1 must not either.
    let p = icosahedron(0.3);
    let c = build(&p, &shortest_edges(&p), [0.0, 0.0, 0.0], [0.0, 0.0, 0.0]);
    let net = cagehand::net::Net::unfold(&c);
    assert_eq!(net.faces.len(), 20);
    assert!(!net.overlaps);
}
