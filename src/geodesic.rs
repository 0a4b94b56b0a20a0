//! Geodesic-sphere test cages of any size, for the benchmarks and the
//! large-cage tests (invented vehicles, not a design anyone should fly).
//!
//! The cage of subdivision level `k`: a regular icosahedron whose
//! triangles are each cut into four (edge midpoints) `k` times, every point
//! pushed out to a sphere of radius [`RADIUS_M`]. That gives
//! 10 * 4^k + 2 nodes and 20 * 4^k triangular faces (k = 1: 42 nodes,
//! 80 faces; k = 2: 162 / 320; k = 3: 642 / 1280; k = 4: 2562 / 5120).
//! Strings run along the hull edges (30 * 4^k of them). The rods come in
//! two layouts ([`Rods`]):
//! - [`Rods::Antipodal`]: one rod joins each node to its antipode
//!   (5 * 4^k + 1 rods), so k = 1, 2, 3 have 141, 561 and 2241 members.
//!   Every one of these rods passes through the centre, so the loader's
//!   rod-crossing check refuses the cage; it is built in code only (the
//!   benchmarks and the large-cage tests parse it without that check).
//! - [`Rods::Hub`]: one rod (a spoke) joins each node to a centre node
//!   `HUB`, so the rods meet at a node instead of crossing and the whole
//!   loader accepts the cage. k = 1, 2, 3 have 162, 642 and 2562 members
//!   (and 43, 163, 643 nodes): more than the antipodal layout, so a time
//!   measured on it is no easier. The example writes this layout for
//!   whole-command measurements.
//!
//! The vehicle's mass grows with the rods' mass (half a kilogram of payload plus twice the rods), and each of the four
//! rotors is sized to the mass (0.6 m g forward, 0.3 m g reversed), so the
//! righting problem keeps its proportions as the cage grows.
//!
//! Node order: the twelve icosahedron vertices, then each new midpoint in
//! the order the subdivision creates it (triangles in order, edges a-b,
//! b-c, c-a). The result is a profile in the explicit cage format, so the
//! whole chain (validation, hull, ids, statics, planning) runs on it as on
//! any profile.

use nalgebra::Vector3;
use std::collections::HashMap;
use std::fmt::Write;

/// Radius of the sphere the nodes lie on.
pub const RADIUS_M: f64 = 0.2;

/// Rod tube outer and inner diameters (mm) and density (kg/m^3): a light
/// CFRP tube, planning figures from memory.
const ROD_OD_MM: f64 = 6.0;
const ROD_ID_MM: f64 = 4.5;
const ROD_DENSITY_KG_M3: f64 = 1600.0;

/// The node positions (on the sphere) and the triangles of the subdivided
/// icosahedron at level `k`.
pub fn sphere(k: u32) -> (Vec<Vector3<f64>>, Vec<[usize; 3]>) {
    let phi = (1.0 + 5f64.sqrt()) / 2.0;
    let mut pts: Vec<Vector3<f64>> = Vec::with_capacity(10 * 4usize.pow(k) + 2);
    for (s1, s2) in [(1.0, 1.0), (1.0, -1.0), (-1.0, 1.0), (-1.0, -1.0)] {
        pts.push(Vector3::new(0.0, s1, s2 * phi));
        pts.push(Vector3::new(s1, s2 * phi, 0.0));
        pts.push(Vector3::new(s2 * phi, 0.0, s1));
    }
    // Triangles: triples of vertices pairwise at the edge length 2.
    let adjacent = |a: usize, b: usize| ((pts[a] - pts[b]).norm() - 2.0).abs() < 1e-9;
    let mut tris = Vec::with_capacity(20);
    for a in 0..12 {
        for b in a + 1..12 {
            for c in b + 1..12 {
                if adjacent(a, b) && adjacent(b, c) && adjacent(a, c) {
                    tris.push([a, b, c]);
                }
            }
        }
    }
    for p in &mut pts {
        *p = p.normalize() * RADIUS_M;
    }
    for _ in 0..k {
        let mut mid: HashMap<(usize, usize), usize> = HashMap::new();
        let mut next = Vec::with_capacity(tris.len() * 4);
        for &[a, b, c] in &tris {
            let mut m = |x: usize, y: usize| {
                *mid.entry((x.min(y), x.max(y))).or_insert_with(|| {
                    pts.push(((pts[x] + pts[y]) / 2.0).normalize() * RADIUS_M);
                    pts.len() - 1
                })
            };
            let (ab, bc, ca) = (m(a, b), m(b, c), m(c, a));
            next.extend([[a, ab, ca], [b, bc, ab], [c, ca, bc], [ab, bc, ca]]);
        }
        tris = next;
    }
    (pts, tris)
}

/// How the rods of a geodesic cage are laid out (see the module comment).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Rods {
    /// Each node to its antipode; every rod passes through the centre.
    Antipodal,
    /// Each node to a centre node; rods meet there and never cross.
    Hub,
}

/// The explicit-cage profile (TOML text) of the geodesic cage of level `k`
/// with antipodal rods (the in-code benchmark and test cage).
pub fn profile_toml(k: u32) -> String {
    profile_toml_with(k, Rods::Antipodal)
}

/// The explicit-cage profile (TOML text) of the geodesic cage of level `k`
/// with the given rod layout.
pub fn profile_toml_with(k: u32, layout: Rods) -> String {
    let (mut pts, tris) = sphere(k);
    let mut edges: Vec<[usize; 2]> = tris
        .iter()
        .flat_map(|&[a, b, c]| [[a, b], [b, c], [c, a]])
        .map(|[a, b]| [a.min(b), a.max(b)])
        .collect();
    edges.sort_unstable();
    edges.dedup();
    // Antipodes by quantised position (the subdivided icosahedron is
    // centrally symmetric, so every node has one).
    let key = |p: &Vector3<f64>| {
        let q = |x: f64| (x / RADIUS_M * 1e6).round() as i64;
        (q(p.x), q(p.y), q(p.z))
    };
    let index: HashMap<(i64, i64, i64), usize> =
        pts.iter().enumerate().map(|(i, p)| (key(p), i)).collect();
    let rods: Vec<[usize; 2]> = match layout {
        Rods::Antipodal => pts
            .iter()
            .enumerate()
            .filter_map(|(i, p)| index.get(&key(&-p)).map(|&j| [i, j]))
            .filter(|&[i, j]| i < j)
            .collect(),
        Rods::Hub => {
            let hub = pts.len();
            pts.push(Vector3::zeros());
            (0..hub).map(|i| [i, hub]).collect()
        }
    };
    let area_m2 = std::f64::consts::PI / 4.0 * (ROD_OD_MM.powi(2) - ROD_ID_MM.powi(2)) * 1e-6;
    // Both layouts have the same total rod length (n/2 rods of 2R, or n of R).
    let rod_length_m: f64 = rods.iter().map(|&[a, b]| (pts[a] - pts[b]).norm()).sum();
    let rods_kg = rod_length_m * area_m2 * ROD_DENSITY_KG_M3;
    let mass_kg = ((0.5 + 2.0 * rods_kg) * 1000.0).round() / 1000.0;
    let weight_n = mass_kg * crate::sample::STANDARD_GRAVITY_M_S2;
    let (fwd_n, rev_n) = (0.6 * weight_n, 0.3 * weight_n);

    let mut s = String::new();
    let _ = write!(
        s,
        "# Geodesic test cage, level {k}, {}: INVENTED DATA generated by cagehand::geodesic\n\
         # ({} nodes, {} rods, {} strings). Not a vehicle anyone should fly.\n\n\
         [vehicle]\nid = \"geodesic-{k}\"\nname = \"Geodesic test cage level {k} (invented)\"\n\
         mass_kg = {mass_kg}\ncom_m = [0.004, -0.003, 0.006]\n\n\
         [cage]\nkind = \"explicit\"\npayload_nodes = []\n\n",
        match layout {
            Rods::Antipodal => "antipodal rods",
            Rods::Hub => "spokes to a centre node",
        },
        pts.len(),
        rods.len(),
        edges.len()
    );
    let surface = tris.iter().flatten().max().map_or(0, |&m| m + 1);
    let id = |i: usize| {
        if i < surface {
            format!("N{}", i + 1)
        } else {
            "HUB".to_string()
        }
    };
    for (i, p) in pts.iter().enumerate() {
        let _ = writeln!(
            s,
            "[[cage.node]]\nid = \"{}\"\npos_m = [{:e}, {:e}, {:e}]",
            id(i),
            p.x,
            p.y,
            p.z
        );
    }
    for &[a, b] in &rods {
        let _ = writeln!(s, "[[cage.rod]]\nnodes = [\"{}\", \"{}\"]", id(a), id(b));
    }
    for [a, b] in &edges {
        let _ = writeln!(
            s,
            "[[cage.string]]\nnodes = [\"N{}\", \"N{}\"]",
            a + 1,
            b + 1
        );
    }
    let _ = write!(
        s,
        "\n[cage.rod_section]\nouter_diameter_mm = {ROD_OD_MM}\ninner_diameter_mm = {ROD_ID_MM}\n\
         modulus_gpa = 90.0\ncrush_strength_mpa = 450.0\ndensity_kg_m3 = {ROD_DENSITY_KG_M3}\n\n\
         [cage.string_section]\ndiameter_mm = 1.0\nmodulus_gpa = 40.0\nbreaking_load_n = 700.0\n\
         termination_efficiency = 0.6\npretension_n = 20.0\n\n\
         [mount]\nroll_deg = 0.0\npitch_deg = 0.0\nyaw_deg = 0.0\n\n"
    );
    for (x, y) in [(0.08, 0.08), (-0.08, 0.08), (-0.08, -0.08), (0.08, -0.08)] {
        let _ = write!(
            s,
            "[[rotor]]\nposition_m = [{x}, {y}, -0.02]\nmax_thrust_n = {fwd_n:.4}\nreverse_thrust_n = {rev_n:.4}\n\n"
        );
    }
    s += "[righting]\ntakeoff_faces = \"auto\"\nmax_takeoff_tilt_deg = 15.0\nvertex_pivots = true\n\
          vertex_pivot_weight = 1.5\ntorque_margin = 1.2\nfriction_coefficient = 0.8\n";
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::{Cage, MemberKind};
    use crate::profile::Profile;

    #[test]
    fn counts_follow_the_subdivision() {
        // Geodesic counts (common practice, no published source): a level-k
        // subdivided icosahedron has 10*4^k + 2 vertices, 30*4^k edges and
        // 20*4^k triangles.
        for k in 0..=2u32 {
            let p = Profile::parse(&profile_toml(k), "geodesic").unwrap();
            let c = Cage::from_profile(&p).unwrap();
            let f = 4usize.pow(k);
            assert_eq!(c.nodes.len(), 10 * f + 2);
            assert_eq!(c.faces.len(), 20 * f);
            let rods = c.members.iter().filter(|m| m.kind == MemberKind::Rod);
            assert_eq!(rods.count(), 5 * f + 1);
            assert_eq!(c.members.len(), 35 * f + 1);
            for n in &c.nodes {
                assert!((n.pos_body.norm() - RADIUS_M).abs() < 1e-12);
            }
        }
    }

    #[test]
    fn hub_layout_adds_a_centre_node_and_a_spoke_per_node() {
        // (Level 0 has no hub form: the icosahedron's edges, 0.21 m, are
        // longer than its spokes, 0.2 m, which the profile refuses.) Same geodesic counts as above, plus one centre node and one
        // spoke rod per surface node (10*4^k + 2 of them).
        for k in 1..=2u32 {
            let p = Profile::parse(&profile_toml_with(k, Rods::Hub), "geodesic").unwrap();
            let c = Cage::from_profile(&p).unwrap();
            let f = 4usize.pow(k);
            let surface = 10 * f + 2;
            assert_eq!(c.nodes.len(), surface + 1);
            assert_eq!(c.faces.len(), 20 * f);
            let rods = c.members.iter().filter(|m| m.kind == MemberKind::Rod);
            assert_eq!(rods.count(), surface);
            assert_eq!(c.members.len(), 30 * f + surface);
            let centre = c.nodes.iter().filter(|n| n.pos_body.norm() < 1e-12);
            assert_eq!(centre.count(), 1);
        }
    }

    #[test]
    fn both_layouts_weigh_the_same() {
        // n/2 antipodal rods of length 2R weigh as much as n spokes of R.
        for k in 1..=2u32 {
            let a = Profile::parse(&profile_toml(k), "a").unwrap();
            let h = Profile::parse(&profile_toml_with(k, Rods::Hub), "h").unwrap();
            assert!((a.vehicle.mass_kg - h.vehicle.mass_kg).abs() < 1e-9);
        }
    }
}
