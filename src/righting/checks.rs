//! Checks of the righting core against outside values and invariants
//! (the list in the righting issue). Test cages are TOML strings read
//! through `Profile::parse`, like any vehicle's.

use super::feasibility::tip_angle_deg;
use super::moves::{MoveKind, Roll};
use super::*;
use crate::cage::Cage;
use crate::profile::Profile;
use crate::rest::resting_attitude;
use crate::sample::STANDARD_GRAVITY_M_S2;
use approx::assert_relative_eq;
use petgraph::visit::EdgeRef;

/// An explicit cage whose hull edges are all strings, with the given
/// rotor and righting sections appended.
fn explicit_toml(nodes: &[[f64; 3]], com: [f64; 3], mass_kg: f64, extra: &str) -> String {
    let mut s = format!(
        "[vehicle]\nid = \"test\"\nmass_kg = {mass_kg}\ncom_m = [{}, {}, {}]\n\n[cage]\n",
        com[0], com[1], com[2]
    );
    s += "[cage.rod_section]\nouter_diameter_mm = 8.0\ninner_diameter_mm = 6.0\nmodulus_gpa = 90.0\ncrush_strength_mpa = 450.0\ndensity_kg_m3 = 1550.0\n";
    s += "[cage.string_section]\ndiameter_mm = 1.0\nmodulus_gpa = 40.0\nbreaking_load_n = 700.0\npretension_n = 10.0\n";
    for (i, p) in nodes.iter().enumerate() {
        s += &format!(
            "[[cage.node]]\nid = \"N{}\"\npos_m = [{}, {}, {}]\n",
            i + 1,
            p[0],
            p[1],
            p[2]
        );
    }
    // Strings along the hull edges: the shortest distances in these
    // regular solids.
    let d = |a: [f64; 3], b: [f64; 3]| {
        ((a[0] - b[0]).powi(2) + (a[1] - b[1]).powi(2) + (a[2] - b[2]).powi(2)).sqrt()
    };
    let mut shortest = f64::INFINITY;
    for i in 0..nodes.len() {
        for j in i + 1..nodes.len() {
            shortest = shortest.min(d(nodes[i], nodes[j]));
        }
    }
    for i in 0..nodes.len() {
        for j in i + 1..nodes.len() {
            if d(nodes[i], nodes[j]) < shortest * (1.0 + 1e-9) {
                s += &format!(
                    "[[cage.string]]\nnodes = [\"N{}\", \"N{}\"]\n",
                    i + 1,
                    j + 1
                );
            }
        }
    }
    s + extra
}

fn cube(half_m: f64) -> Vec<[f64; 3]> {
    let h = half_m;
    let mut v = Vec::new();
    for x in [-h, h] {
        for y in [-h, h] {
            for z in [-h, h] {
                v.push([x, y, z]);
            }
        }
    }
    v
}

fn octahedron(r: f64) -> Vec<[f64; 3]> {
    vec![
        [r, 0.0, 0.0],
        [-r, 0.0, 0.0],
        [0.0, r, 0.0],
        [0.0, -r, 0.0],
        [0.0, 0.0, r],
        [0.0, 0.0, -r],
    ]
}

fn icosahedron() -> Vec<[f64; 3]> {
    // Edge length 2: (0, +-1, +-phi) and cyclic permutations.
    let phi = (1.0 + 5f64.sqrt()) / 2.0;
    let mut v = Vec::new();
    for a in [-1.0, 1.0] {
        for b in [-phi, phi] {
            v.push([0.0, a, b]);
            v.push([a, b, 0.0]);
            v.push([b, 0.0, a]);
        }
    }
    v
}

fn build(toml: &str) -> (Profile, Cage, RightingModel) {
    let p = Profile::parse(toml, "test.toml").expect("test profile is valid");
    let c = Cage::from_profile(&p).expect("test cage builds");
    let m = RightingModel::new(&p, &c).expect("model builds");
    (p, c, m)
}

/// The model's check of one of its moves (given by reference).
fn verdict<'a>(m: &'a RightingModel, mv: &Move) -> &'a Feasibility {
    let k = m
        .moves
        .iter()
        .position(|x| std::ptr::eq(x, mv))
        .expect("a move of this model");
    m.check(k)
}

fn face_with_normal(c: &Cage, n: [f64; 3]) -> usize {
    let n = nalgebra::Vector3::from(n);
    (0..c.faces.len())
        .find(|&i| (c.faces[i].normal_body - n).norm() < 1e-9)
        .expect("face with that normal")
}

#[test]
fn icosahedron_tip_angle_is_half_the_roll_and_margin_is_a_over_2_sqrt3() {
    let toml = explicit_toml(&icosahedron(), [0.0, 0.0, 0.0], 1.0, "");
    let (_, c, _) = build(&toml);
    assert_eq!(c.faces.len(), 20);
    let a = 2.0;
    for f in &c.faces {
        // McGhee & Frank, Math. Biosci. 3, 1968 (static stability margin):
        // per-edge margin a / (2 sqrt 3) = 0.288675 a with the centre of
        // mass at the centre.
        assert_relative_eq!(f.margin_m, 0.288675 * a, epsilon = 1e-6);
    }
    let mut rolls = 0;
    for i in 0..c.faces.len() {
        for j in 0..c.faces.len() {
            let Some(r) = Roll::between(&c, i, j) else {
                continue;
            };
            if r.kind != MoveKind::Edge {
                continue;
            }
            rolls += 1;
            // docs/references.md: dihedral arccos(-sqrt(5)/3) = 138.1897 deg, so a
            // roll is 41.8103 deg; the centre of mass passes over the edge
            // at half of it, 20.9052 deg (McGhee & Frank 1968; Messuri &
            // Klein, IEEE J. Robotics & Automation 1(3), 1985).
            assert_relative_eq!(r.angle_deg, 41.8103, epsilon = 1e-4);
            assert_relative_eq!(tip_angle_deg(&c, &r), 20.9052, epsilon = 1e-4);
        }
    }
    assert_eq!(rolls, 60);
}

/// Cube of side 0.2 m, 1 kg, centre of mass at the centre, one rotor on
/// the top edge opposite the pivot. Resting on the bottom face and rolling
/// about the bottom edge at x = +0.1 m, gravity resists with m g d at the
/// start, d = 0.1 m (centre of mass to edge, horizontally); the rotor at
/// x = -0.1 m thrusting up along body -z has lever arm 2d = 0.2 m about
/// that edge. So the thrust needed at the start is m g d / (2 d) = m g / 2
/// and the fraction of an 8 N rotor is 9.80665 / 16 = 0.6129. Later in
/// the roll the need falls as cos(45 deg + b) faster than friction limits
/// the rotor (checked below), so the start is the worst angle. Hand-worked
/// (common practice, no published source).
fn one_rotor_cube(max_thrust_n: f64, margin: f64) -> (Cage, RightingModel, usize, usize) {
    let extra = format!(
        "[[rotor]]\nposition_m = [-0.1, 0.0, -0.1]\nmax_thrust_n = {max_thrust_n}\n\n[righting]\ntakeoff_faces = [\"F1\"]\ntorque_margin = {margin}\nfriction_coefficient = 0.6\n"
    );
    let (_, c, m) = build(&explicit_toml(&cube(0.1), [0.0, 0.0, 0.0], 1.0, &extra));
    let bottom = face_with_normal(&c, [0.0, 0.0, 1.0]);
    let side = face_with_normal(&c, [1.0, 0.0, 0.0]);
    (c, m, bottom, side)
}

#[test]
fn cube_with_one_rotor_needs_m_g_d_over_the_lever_arm() {
    let (c, m, bottom, side) = one_rotor_cube(8.0, 1.2);
    let mv = m
        .moves
        .iter()
        .find(|x| x.roll.from == bottom && x.roll.to == side)
        .expect("bottom -> +x roll");
    let mg = 1.0 * STANDARD_GRAVITY_M_S2;
    let want = mg * 0.1 / (8.0 * 0.2);
    let f = verdict(&m, mv);
    assert_relative_eq!(f.thrust_fraction.unwrap(), want, epsilon = 1e-9);
    assert_relative_eq!(f.worst_angle_deg, 0.0, epsilon = 1e-9);
    assert_relative_eq!(f.needed_nm, mg * 0.1, epsilon = 1e-9);
    assert_relative_eq!(f.available_nm, 8.0 * 0.2, epsilon = 1e-9);
    // The centre of mass passes over the edge at 45 deg (hand-worked).
    assert_relative_eq!(f.tip_angle_deg, 45.0, epsilon = 1e-9);
    assert!(f.feasible, "0.613 * 1.2 <= 1");
    // Rolling the other way (about x = -0.1) the rotor sits on the pivot
    // edge: no lever arm, no help.
    let other = face_with_normal(&c, [-1.0, 0.0, 0.0]);
    let back = m
        .moves
        .iter()
        .find(|x| x.roll.from == bottom && x.roll.to == other)
        .unwrap();
    assert!(!verdict(&m, back).feasible);
    assert_eq!(verdict(&m, back).thrust_fraction, None);
    // Feasible exactly when max thrust >= margin m g / 2.
    let edge_n = 1.2 * mg / 2.0;
    let (_, lo, b, s) = one_rotor_cube(edge_n * 0.99, 1.2);
    let (_, hi, _, _) = one_rotor_cube(edge_n * 1.01, 1.2);
    let find = |m: &RightingModel| {
        let mv = m
            .moves
            .iter()
            .find(|x| x.roll.from == b && x.roll.to == s)
            .unwrap();
        verdict(m, mv).feasible
    };
    assert!(!find(&lo));
    assert!(find(&hi));
}

/// A vertex pivot worked on paper (hand-worked, common practice, no
/// published source). Octahedron with nodes at +-r on the axes, r = 0.15 m,
/// no mount (body frame = cage frame), m = 1 kg, W = m g0 = 9.80665 N,
/// centre of mass c = (0, 0, 0.03) m. Resting on the face with normal
/// n = (1, 1, 1)/sqrt 3 (so g = n at the start), pivot about the node
/// P = (r, 0, 0) to the face with normal (1, -1, -1)/sqrt 3; the two faces
/// share only P.
///
/// - Pivot axis u = n_to x n_from / |..| = (0, -1, 1)/sqrt 2; sideways axis
///   v = u x g = (-2, 1, 1)/sqrt 6.
/// - Gravity's resisting moment at the start: c - P = (-0.15, 0, 0.03),
///   (c - P) x g = (-0.03, 0.18, -0.15)/sqrt 3, u . that = -0.33/sqrt 6, so
///   needed = 0.33 W / sqrt 6 = 1.321155 N m.
/// - Gravity's sideways moment: W v . ((c - P) x g) = W u . (c - P)
///   = W 0.03 / sqrt 2 = 0.208031 N m (constant through the pivot).
/// - One rotor at r1 = (-0.05, -0.02, 0.04), thrusting along
///   t = -(1, 1, 1)/sqrt 3 (straight up off the start face, so no sliding
///   force at the start). With a = r1 - P = (-0.2, -0.02, 0.04):
///   roll arm c1 = u . (a x t) = -(2 a_x - a_y - a_z)/sqrt 6 = 0.42/sqrt 6,
///   sideways arm d1 = v . (a x t) = (a_y - a_z)/sqrt 2 = -0.06/sqrt 2.
/// - Sideways balance d1 T + W 0.03/sqrt 2 = 0 fixes T = W 0.03/0.06 = W/2
///   = 4.903325 N (below the lift-off limit T <= W), so the rotor gives
///   exactly c1 T = 0.21 W/sqrt 6 = 0.840735 N m, and the fraction needed
///   is 0.33/0.21 = 11/7: the pivot cannot be made.
/// - Without the sideways balance (the old model) the rotor could run up
///   to the lift-off limit T = W, giving c1 W and a fraction 11/14 = 0.786,
///   which a 1.2 margin would have passed.
#[test]
fn octahedron_vertex_pivot_needs_the_sideways_balance() {
    use super::contact::{Condition, rows_at};
    use super::feasibility::{best_moment, tolerance};
    let s3 = 3f64.sqrt();
    let extra = format!(
        "[[rotor]]\nposition_m = [-0.05, -0.02, 0.04]\naxis = [{a}, {a}, {a}]\nmax_thrust_n = 20.0\nreverse_thrust_n = 0.0\n\n[righting]\ntakeoff_faces = [\"F1\"]\nvertex_pivots = true\ntorque_margin = 1.2\nfriction_coefficient = 0.6\n",
        a = -1.0 / s3
    );
    let (_, c, m) = build(&explicit_toml(
        &octahedron(0.15),
        [0.0, 0.0, 0.03],
        1.0,
        &extra,
    ));
    let from = face_with_normal(&c, [1.0 / s3, 1.0 / s3, 1.0 / s3]);
    let to = face_with_normal(&c, [1.0 / s3, -1.0 / s3, -1.0 / s3]);
    let mv = m
        .moves
        .iter()
        .find(|x| x.roll.from == from && x.roll.to == to)
        .expect("the vertex pivot is a candidate");
    assert_eq!(mv.roll.kind, MoveKind::Vertex);
    let w = STANDARD_GRAVITY_M_S2;
    let rows = rows_at(&c, &mv.roll, &m.limits.rotors, 0.6, 0.0);
    // needed = 0.33 W / sqrt 6 (hand-worked above)
    assert_relative_eq!(rows.needed_nm, 0.33 * w / 6f64.sqrt(), epsilon = 1e-9);
    assert_relative_eq!(rows.arms_m[0], 0.42 / 6f64.sqrt(), epsilon = 1e-12);
    let side = rows
        .rows
        .iter()
        .find(|r| r.condition == Condition::Sideways)
        .expect("a vertex pivot carries the sideways balance");
    assert!(side.equality);
    // d1 = -0.06 / sqrt 2 and gravity's side W 0.03 / sqrt 2 = 0.208031 N m
    assert_relative_eq!(side.coeffs[0], -0.06 / 2f64.sqrt(), epsilon = 1e-12);
    assert_relative_eq!(-side.rhs, w * 0.03 / 2f64.sqrt(), epsilon = 1e-9);
    assert_relative_eq!(-side.rhs, 0.208031, epsilon = 1e-6);
    let tol = tolerance(&c);
    let (avail, t) = best_moment(&rows, &m.limits.rotors, tol).expect("balanced at the start");
    // T = W/2 and c1 T = 0.21 W / sqrt 6
    assert_relative_eq!(t[0], w / 2.0, epsilon = 1e-7);
    assert_relative_eq!(avail, 0.21 * w / 6f64.sqrt(), epsilon = 1e-7);
    assert_relative_eq!(rows.needed_nm / avail, 11.0 / 7.0, epsilon = 1e-7);
    // The whole pivot can only be worse than its start.
    let f = verdict(&m, mv);
    assert!(!f.feasible);
    assert!(f.thrust_fraction.is_none_or(|x| x >= 11.0 / 7.0 - 1e-7));
    assert!(f.commands.is_none());
    // Dropping the sideways balance gives the old, optimistic answer 11/14.
    let mut relaxed = rows.clone();
    relaxed.rows.retain(|r| r.condition != Condition::Sideways);
    let (old, _) = best_moment(&relaxed, &m.limits.rotors, tol).unwrap();
    assert_relative_eq!(rows.needed_nm / old, 11.0 / 14.0, epsilon = 1e-7);
}

#[test]
fn no_rotors_no_feasible_moves() {
    // A profile with no [[rotor]] table at all.
    let extra = "[righting]\ntakeoff_faces = [\"F1\"]\nvertex_pivots = true\n";
    let (p0, _, m0) = build(&explicit_toml(&cube(0.1), [0.01, 0.0, 0.02], 1.0, extra));
    assert!(p0.rotors.is_empty());
    assert!(!m0.moves.is_empty());
    assert!((0..m0.moves.len()).all(|k| !m0.check(k).feasible));
    // The demo cage with its rotors taken away.
    let p = Profile::demo().unwrap();
    let c = Cage::from_profile(&p).unwrap();
    let limits = Limits {
        rotors: Vec::new(),
        friction_coefficient: 0.6,
        torque_margin: 1.2,
    };
    let m = RightingModel::with_limits(c, limits, vec![0], true, 1.5);
    assert!(!m.moves.is_empty());
    assert!((0..m.moves.len()).all(|k| !m.check(k).feasible));
    assert!(m.graph().graph.edge_count() == 0);
    let plan = m.plan(5, &resting_attitude(&m.cage, 5));
    assert!(!plan.reachable);
    assert!(plan.reason.unwrap().contains("no helping moment"));
}

/// Brute force: cheapest simple path in the feasible-move graph from
/// `face` to a goal.
fn exhaustive(m: &RightingModel, face: usize) -> Option<f64> {
    let pg = m.graph();
    let goals = m.goals();
    fn go(
        m: &RightingModel,
        pg: &plan::PlanGraph,
        goals: &[usize],
        at: petgraph::graph::NodeIndex,
        seen: &mut Vec<bool>,
        cost: f64,
        best: &mut Option<f64>,
    ) {
        if goals.contains(&pg.graph[at]) {
            if best.is_none_or(|b| cost < b) {
                *best = Some(cost);
            }
            return;
        }
        for e in pg.graph.edges(at) {
            let t = e.target();
            if !seen[t.index()] {
                seen[t.index()] = true;
                let c = cost + m.cost_deg(&m.moves[*e.weight()]);
                go(m, pg, goals, t, seen, c, best);
                seen[t.index()] = false;
            }
        }
    }
    let start = pg.node[face]?;
    let mut seen = vec![false; pg.graph.node_count()];
    seen[start.index()] = true;
    let mut best = None;
    go(m, &pg, &goals, start, &mut seen, 0.0, &mut best);
    best
}

fn quad_rotors(arm_m: f64, z_m: f64, max_n: f64, rev_n: f64) -> String {
    let mut s = String::new();
    for (x, y) in [(1.0, 1.0), (-1.0, 1.0), (-1.0, -1.0), (1.0, -1.0)] {
        s += &format!(
            "[[rotor]]\nposition_m = [{}, {}, {z_m}]\nmax_thrust_n = {max_n}\nreverse_thrust_n = {rev_n}\n",
            x * arm_m,
            y * arm_m
        );
    }
    s
}

fn small_cages() -> Vec<RightingModel> {
    let mut out = Vec::new();
    for (com, rev, pivots) in [
        ([0.0, 0.0, 0.0], 3.0, false),
        ([0.02, -0.01, 0.03], 1.0, true),
        ([-0.03, 0.02, -0.02], 0.0, true),
    ] {
        for nodes in [cube(0.1), octahedron(0.15)] {
            let extra = quad_rotors(0.06, -0.02, 6.0, rev)
                + &format!(
                    "[righting]\ntakeoff_faces = [\"F1\"]\nvertex_pivots = {pivots}\nvertex_pivot_weight = 1.7\nfriction_coefficient = 0.8\n"
                );
            out.push(build(&explicit_toml(&nodes, com, 1.0, &extra)).2);
        }
    }
    out
}

#[test]
fn plans_are_optimal_against_exhaustive_search_and_match_dijkstra() {
    let mut reached = 0;
    for m in small_cages() {
        let to_go = m.cost_to_go();
        let map = m.recovery_map();
        for f in 0..m.cage.faces.len() {
            if !m.cage.faces[f].stable {
                continue;
            }
            let brute = exhaustive(&m, f);
            let astar = m.plan(f, &resting_attitude(&m.cage, f));
            assert_eq!(astar.reachable, brute.is_some(), "face {f}");
            assert_eq!(to_go[f].is_some(), brute.is_some());
            assert_eq!(map[f].reachable, brute.is_some());
            if let Some(b) = brute {
                reached += 1;
                assert_relative_eq!(astar.cost_deg, b, epsilon = 1e-9);
                assert_relative_eq!(to_go[f].unwrap(), b, epsilon = 1e-9);
                assert_relative_eq!(map[f].cost_deg, b, epsilon = 1e-9);
                assert!(m.goals().contains(&astar.goal.unwrap()));
            } else {
                assert!(astar.reason.is_some());
            }
        }
    }
    assert!(reached > 10, "the small cages do have routes ({reached})");
}

/// The planner checks a move only when it could lower some face's cost,
/// yet its costs are those of the whole graph of checked moves: the
/// recovery map and every single plan cost what Dijkstra's algorithm
/// (Dijkstra 1959, petgraph's implementation) gives on the graph of every
/// move checked, on the small cages, the demo and a geodesic cage; on the
/// geodesic cage the map checks under half of the moves.
#[test]
fn the_planner_checks_few_moves_and_costs_what_the_whole_graph_does() {
    // The level-1 geodesic cage has no face within the automatic take-off
    // tilt: two faces are named instead.
    let level_one = crate::geodesic::profile_toml(1).replace(
        "takeoff_faces = \"auto\"",
        "takeoff_faces = [\"F1\", \"F40\"]",
    );
    assert_ne!(level_one, crate::geodesic::profile_toml(1));
    let geodesic = {
        let p = Profile::parse(&level_one, "geodesic").expect("profile");
        let c = Cage::from_profile(&p).expect("cage");
        RightingModel::new(&p, &c).expect("model")
    };
    let demo = {
        let p = Profile::demo().expect("demo");
        let c = Cage::from_profile(&p).expect("cage");
        RightingModel::new(&p, &c).expect("model")
    };
    // Cages where most faces have no route: the forward-only demo, and the
    // geodesic cage with weak forward-only rotors (their explanations are
    // worked out once per group of faces that reach the same faces).
    let forward_only = {
        let text = include_str!("../../profiles/demo-forward-only.toml");
        let p = Profile::parse(text, "demo-forward-only").expect("profile");
        let c = Cage::from_profile(&p).expect("cage");
        RightingModel::new(&p, &c).expect("model")
    };
    let weak = {
        let text = &level_one;
        // Every rotor at a quarter of its thrust, both ways.
        let weak: String = text
            .lines()
            .map(|l| match l.split_once(" = ") {
                Some((key @ ("max_thrust_n" | "reverse_thrust_n"), v)) => {
                    let n: f64 = v.parse().expect("a number");
                    format!("{key} = {}", n * 0.25)
                }
                _ => l.to_string(),
            })
            .collect::<Vec<_>>()
            .join("\n");
        let p = Profile::parse(&weak, "geodesic-weak").expect("profile");
        let c = Cage::from_profile(&p).expect("cage");
        RightingModel::new(&p, &c).expect("model")
    };
    let mut models = small_cages();
    models.push(demo);
    models.push(forward_only);
    models.push(weak);
    models.push(geodesic);
    let last = models.len() - 1;
    let mut unreached = [0usize; 2];
    for (i, m) in models.into_iter().enumerate() {
        let whole = m.clone();
        let to_go = whole.cost_to_go();
        let map = m.recovery_map();
        let checked = m.moves.iter().filter(|x| x.check.get().is_some()).count();
        if i == last {
            eprintln!("the map checked {checked} of {} moves", m.moves.len());
            assert!(
                checked * 2 < m.moves.len(),
                "the map checked {checked} of {} moves",
                m.moves.len()
            );
        }
        if i + 1 == last {
            // The weak cage: most faces have no route, and saying why checks
            // whole only the moves that could be the closest to feasible
            // (210 of 900 when this was written, where every move out of
            // such a face was checked before).
            assert!(
                checked * 3 < m.moves.len(),
                "the weak cage's map checked {checked} of {} moves",
                m.moves.len()
            );
        }
        let single = m.clone();
        for (f, plan) in map.iter().enumerate() {
            let start = m.settle_face(f);
            let by_astar = single.plan(f, &resting_attitude(&single.cage, f));
            match to_go[start] {
                Some(d) => {
                    assert_relative_eq!(plan.cost_deg, d, epsilon = 1e-9);
                    assert_relative_eq!(by_astar.cost_deg, d, epsilon = 1e-9);
                }
                None => assert!(!plan.reachable && !by_astar.reachable),
            }
            // The explanation of an unreachable face is the same whichever
            // way it was worked out, and the same as where every move was
            // checked whole (the whole graph's model: no move is passed
            // over on the strength of its start alone).
            assert_eq!(plan.reason, by_astar.reason, "face {f}");
            if !plan.reachable {
                let every = whole.plan(f, &resting_attitude(&whole.cage, f));
                assert_eq!(plan.reason, every.reason, "face {f}");
            }
            if !plan.reachable && i + 2 >= last && i < last {
                unreached[last - 1 - i] += 1;
            }
        }
    }
    // Both cages meant to have faces without a route do have them.
    eprintln!("faces without a route: {unreached:?}");
    assert!(unreached.iter().all(|&n| n > 0), "{unreached:?}");
    assert!(unreached[0] < 80, "the weak geodesic cage has routes too");
}

/// The moves a caller checks ahead on every core ([`RightingModel::unreached_links`])
/// are the moves grouping the faces with no route checks whole: checking
/// them first changes no plan and checks no move the map would not.
/// (An invariant of our own, on the forward-only demo and a geodesic
/// cage whose rotors are too weak for most rolls.)
#[test]
fn the_links_checked_ahead_are_those_the_map_checks() {
    let weak = crate::geodesic::profile_toml(1)
        .replace(
            "takeoff_faces = \"auto\"",
            "takeoff_faces = [\"F1\", \"F40\"]",
        )
        .lines()
        .map(|l| match l.split_once(" = ") {
            Some(("max_thrust_n", v)) => {
                format!(
                    "max_thrust_n = {}",
                    v.parse::<f64>().expect("a number") * 0.25
                )
            }
            Some(("reverse_thrust_n", _)) => "reverse_thrust_n = 0.0".to_string(),
            _ => l.to_string(),
        })
        .collect::<Vec<_>>()
        .join("\n");
    let texts = [
        include_str!("../../profiles/demo-forward-only.toml").to_string(),
        weak,
    ];
    for text in &texts {
        let p = Profile::parse(text, "test").expect("profile");
        let c = Cage::from_profile(&p).expect("cage");
        let model = RightingModel::new(&p, &c).expect("model");
        let checked = |m: &RightingModel| -> Vec<usize> {
            (0..m.moves.len())
                .filter(|&k| m.moves[k].check.get().is_some())
                .collect()
        };
        let plain = model.clone();
        let plain_map = plain.recovery_map();
        let ahead = model.clone();
        let draft = ahead.map_draft();
        for k in draft.moves() {
            ahead.commands(k);
        }
        for k in ahead
            .unreached(&draft)
            .into_iter()
            .flat_map(|f| ahead.moves_from(f))
        {
            ahead.outlook(k);
        }
        let links = ahead.unreached_links(&draft);
        assert!(
            !links.is_empty(),
            "{}: no links to check ahead",
            p.vehicle.name
        );
        for &k in &links {
            ahead.check(k);
        }
        let finished = ahead.finish_map(draft);
        let ahead_map: Vec<Plan> = (0..c.faces.len())
            .map(|f| ahead.map_plan(&finished, f))
            .collect();
        assert_eq!(checked(&ahead), checked(&plain), "{}", p.vehicle.name);
        for (a, b) in ahead_map.iter().zip(&plain_map) {
            assert_eq!(a.reason, b.reason);
            assert_eq!(a.reachable, b.reachable);
            assert_eq!(a.cost_deg.to_bits(), b.cost_deg.to_bits());
        }
    }
}

#[test]
fn astar_equals_dijkstra_on_every_demo_face() {
    let p = Profile::demo().unwrap();
    let c = Cage::from_profile(&p).unwrap();
    let m = RightingModel::new(&p, &c).unwrap();
    let to_go = m.cost_to_go();
    for f in 0..c.faces.len() {
        let plan = m.plan(f, &resting_attitude(&c, f));
        let start = m.settle_face(f);
        match to_go[start] {
            Some(d) => assert_relative_eq!(plan.cost_deg, d, epsilon = 1e-9),
            None => assert!(!plan.reachable),
        }
    }
}

#[test]
fn step_targets_rest_on_the_step_faces() {
    for m in small_cages() {
        for f in 0..m.cage.faces.len() {
            let plan = m.plan(f, &resting_attitude(&m.cage, f));
            for s in &plan.steps {
                let g = crate::attitude::gravity_body(&s.target);
                let fit = crate::rest::fit_face(&m.cage, &g);
                assert_eq!(fit.face, s.to);
                assert!(fit.error_deg < 1e-6);
            }
        }
    }
}

#[test]
fn general_lp_agrees_with_the_exact_shared_axis_solution() {
    // Tilting one rotor by a hair replaces the two exact friction
    // half-planes by the inscribed polygon; the LP's answer must be close
    // to the exact one (the polygon is inscribed, so it may only be a
    // little lower).
    use super::contact::rows_at;
    use super::feasibility::{best_moment, tolerance};
    let p = Profile::demo().unwrap();
    let c = Cage::from_profile(&p).unwrap();
    let exact = RightingModel::new(&p, &c).unwrap();
    let mut tilted = exact.limits.rotors.clone();
    tilted[0].axis = {
        let a = nalgebra::Vector3::new(1e-6, 0.0, -1.0).normalize();
        [a.x, a.y, a.z]
    };
    let mu = exact.limits.friction_coefficient;
    let tol = tolerance(&c);
    let mut compared = 0;
    for mv in &exact.moves {
        for b_deg in [0.0, 10.0, 20.0] {
            let b = f64::to_radians(b_deg);
            let a = best_moment(
                &rows_at(&c, &mv.roll, &exact.limits.rotors, mu, b),
                &exact.limits.rotors,
                tol,
            );
            let t = best_moment(&rows_at(&c, &mv.roll, &tilted, mu, b), &tilted, tol);
            if let (Some((ea, _)), Some((eb, _))) = (a, t) {
                compared += 1;
                assert!(
                    eb <= ea + 1e-5,
                    "inner approximation never exceeds the exact value: {eb} > {ea}"
                );
                assert!(eb >= ea - 0.03 * ea.abs() - 1e-5, "{eb} vs {ea}");
            }
        }
    }
    assert!(compared > 100, "{compared}");
}

mod props {
    use super::*;
    use proptest::prelude::*;

    fn demo_variant(
        dx: f64,
        dy: f64,
        dz: f64,
        scale: f64,
        rev: f64,
        pivots: bool,
    ) -> RightingModel {
        let p = Profile::demo().unwrap();
        let mut c = Cage::from_profile(&p).unwrap();
        // Move the centre of mass, then recompute what depends on it.
        let com = c.com_body + nalgebra::Vector3::new(dx, dy, dz);
        let p2 = Profile::parse(
            &crate::profile::DEMO_PROFILE_TOML.replace(
                "com_m = [0.012, -0.006, 0.018]",
                &format!(
                    "com_m = [{}, {}, {}]",
                    (c.mount.inverse() * com).x,
                    (c.mount.inverse() * com).y,
                    (c.mount.inverse() * com).z
                ),
            ),
            "demo-variant",
        )
        .unwrap();
        c = Cage::from_profile(&p2).unwrap();
        let mut limits = Limits {
            rotors: p2.rotors.clone(),
            friction_coefficient: p2.righting.friction_coefficient,
            torque_margin: p2.righting.torque_margin,
        };
        for r in &mut limits.rotors {
            r.max_thrust_n *= scale;
            r.reverse_thrust_n = rev * r.max_thrust_n;
        }
        let takeoff = c.takeoff_faces(&p2.righting.takeoff_faces).unwrap();
        RightingModel::with_limits(c, limits, takeoff, pivots, 1.5)
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(10))]

        /// The A* heuristic never exceeds the true remaining cost
        /// (admissibility; Hart, Nilsson & Raphael 1968).
        #[test]
        fn heuristic_is_admissible(
            dx in -0.03..0.03f64, dy in -0.03..0.03f64, dz in -0.03..0.03f64,
            scale in 0.8..3.0f64, rev in 0.0..1.0f64, pivots in any::<bool>(),
        ) {
            let m = demo_variant(dx, dy, dz, scale, rev, pivots);
            let to_go = m.cost_to_go();
            for (f, d) in to_go.iter().enumerate() {
                if let Some(d) = d {
                    prop_assert!(m.heuristic_deg(f) <= d + 1e-9);
                }
                // Every plan that exists ends on a take-off face, its steps
                // chain, and it costs what Dijkstra says.
                if !m.cage.faces[f].stable {
                    continue;
                }
                let plan = m.plan(f, &resting_attitude(&m.cage, f));
                prop_assert_eq!(plan.reachable, d.is_some());
                if let Some(d) = d {
                    prop_assert!((plan.cost_deg - d).abs() < 1e-9);
                    let end = plan.steps.last().map_or(f, |s| s.to);
                    prop_assert!(m.goals().contains(&end));
                    for w in plan.steps.windows(2) {
                        prop_assert_eq!(w[0].to, w[1].from);
                    }
                }
            }
        }

        /// The rotor commands of every feasible move meet every contact
        /// condition and give at least the needed moment at every checked
        /// angle. Checked from the forces and moment vectors directly, not
        /// from the LP's rows: the ground's force is what weight and
        /// thrust leave over; it must push (N >= 0) inside the friction
        /// cone; on a node it takes no moment, on an edge its two node
        /// forces must both push (statics of a rigid body, any mechanics
        /// text).
        #[test]
        fn rotor_commands_hold_at_every_checked_angle(
            dx in -0.03..0.03f64, dy in -0.03..0.03f64, dz in -0.03..0.03f64,
            scale in 0.8..3.0f64, rev in 0.0..1.0f64,
        ) {
            use nalgebra::Vector3;
            let m = demo_variant(dx, dy, dz, scale, rev, true);
            let w = m.cage.mass_kg * STANDARD_GRAVITY_M_S2;
            let mu = m.limits.friction_coefficient;
            let tol = 1e-6 * (1.0 + w);
            let mut checked = 0;
            for (k, mv) in m.moves.iter().enumerate().filter(|(k, _)| m.check(*k).feasible) {
                let cmd = m.commands(k).expect("moves the check passes have commands");
                prop_assert_eq!(cmd.thrust_n.len(), m.limits.rotors.len());
                if let Some(first) = cmd.schedule.first() {
                    prop_assert_eq!(first.from_deg, 0.0);
                    prop_assert_eq!(&first.thrust_n, &cmd.thrust_n);
                }
                for b_deg in super::super::feasibility::checked_angles_deg(&m.cage, &mv.roll) {
                    let t = cmd.at(b_deg);
                    let g = super::super::feasibility::gravity_at(&m.cage, &mv.roll, b_deg.to_radians());
                    let mut force = g * w;
                    let moment = |q: &Vector3<f64>| {
                        let mut sum = (m.cage.com_body - q).cross(&(g * w));
                        for (r, x) in m.limits.rotors.iter().zip(t) {
                            sum += (Vector3::from(r.position_m) - q).cross(&(Vector3::from(r.axis) * *x));
                        }
                        sum
                    };
                    for (r, x) in m.limits.rotors.iter().zip(t) {
                        prop_assert!(*x <= r.max_thrust_n + tol && *x >= -r.reverse_thrust_n - tol);
                        force += Vector3::from(r.axis) * *x;
                    }
                    let normal = force.dot(&g);
                    prop_assert!(normal >= -tol, "lifts off: {}", normal);
                    let tangential = (force - g * normal).norm();
                    prop_assert!(tangential <= mu * normal + tol, "slides: {} > {}", tangential, mu * normal);
                    let u = mv.roll.axis_body;
                    let p = mv.roll.point_body;
                    let needed = super::super::feasibility::resisting_moment_nm(&m.cage, &mv.roll, b_deg.to_radians());
                    // The rotors' moment about the roll axis (turning the body by +angle).
                    let rotor_moment = (moment(&p) - (m.cage.com_body - p).cross(&(g * w))).dot(&u);
                    prop_assert!(rotor_moment >= needed - tol, "{} < {} at {}", rotor_moment, needed, b_deg);
                    let v = u.cross(&g);
                    match mv.roll.kind {
                        MoveKind::Vertex => {
                            prop_assert!(moment(&p).dot(&v).abs() <= tol, "topples sideways at {}", b_deg);
                        }
                        MoveKind::Edge => {
                            let a = m.cage.nodes[mv.roll.pivot[0]].pos_body;
                            let b = m.cage.nodes[mv.roll.pivot[1]].pos_body;
                            let len = (b - a).dot(&u);
                            prop_assert!(moment(&a).dot(&v) / len >= -tol, "node B pulls at {}", b_deg);
                            prop_assert!(-moment(&b).dot(&v) / len >= -tol, "node A pulls at {}", b_deg);
                        }
                    }
                    checked += 1;
                }
            }
            prop_assert!(checked > 0);
        }

        /// More thrust never makes a feasible move infeasible, nor raises
        /// the fraction of the available moment a move needs.
        #[test]
        fn more_thrust_never_hurts(
            dx in -0.03..0.03f64, dy in -0.03..0.03f64,
            scale in 0.5..2.0f64, extra in 1.0..2.5f64, rev in 0.0..1.0f64,
        ) {
            let a = demo_variant(dx, dy, 0.0, scale, rev, false);
            let b = demo_variant(dx, dy, 0.0, scale * extra, rev, false);
            prop_assert_eq!(a.moves.len(), b.moves.len());
            for k in 0..a.moves.len() {
                let (x, y) = (a.check(k), b.check(k));
                prop_assert!(!x.feasible || y.feasible);
                if let (Some(fx), Some(fy)) = (x.thrust_fraction, y.thrust_fraction) {
                    prop_assert!(fy <= fx + 1e-9);
                }
            }
        }
    }
}

#[test]
fn forward_only_rotors_rarely_roll_an_inverted_vehicle() {
    // docs/design.md "Feasibility": lying inverted, forward thrust presses the
    // cage into its support face, so most rolls from inverted faces are
    // impossible; reversible motors open them.
    let p = Profile::demo().unwrap();
    let c = Cage::from_profile(&p).unwrap();
    let with_reverse = RightingModel::new(&p, &c).unwrap();
    let mut limits = with_reverse.limits.clone();
    for r in &mut limits.rotors {
        r.reverse_thrust_n = 0.0;
    }
    let forward = RightingModel::with_limits(c.clone(), limits, vec![0], false, 1.5);
    let inverted: Vec<usize> = (0..c.faces.len())
        .filter(|&f| c.faces[f].tilt_deg > 120.0)
        .collect();
    assert!(!inverted.is_empty());
    let count = |m: &RightingModel| {
        let from_inv: Vec<&Move> = m
            .moves
            .iter()
            .filter(|x| inverted.contains(&x.roll.from) && x.roll.kind == MoveKind::Edge)
            .collect();
        let ok = from_inv.iter().filter(|x| verdict(m, x).feasible).count();
        (ok, from_inv.len())
    };
    let (fwd_ok, n) = count(&forward);
    let (rev_ok, _) = count(&with_reverse);
    eprintln!("inverted edge rolls feasible: forward-only {fwd_ok}/{n}, reversible {rev_ok}/{n}");
    assert!(fwd_ok * 3 <= n, "forward-only: {fwd_ok} of {n}");
    assert!(rev_ok > fwd_ok);
}

#[test]
fn demo_profiles_show_what_reverse_thrust_buys() {
    let fwd_text = include_str!("../../profiles/demo-forward-only.toml");
    let demo = Profile::demo().unwrap();
    let fwd = Profile::parse(fwd_text, "demo-forward-only.toml").unwrap();
    // The same invented vehicle apart from the reverse thrust.
    assert_eq!(demo.cage, fwd.cage);
    assert_eq!(demo.vehicle.com_m, fwd.vehicle.com_m);
    assert_eq!(demo.rotors.len(), fwd.rotors.len());
    for (a, b) in demo.rotors.iter().zip(&fwd.rotors) {
        assert_eq!(
            (a.position_m, a.axis, a.max_thrust_n),
            (b.position_m, b.axis, b.max_thrust_n)
        );
        assert!(a.reverse_thrust_n > 0.0);
        assert_eq!(b.reverse_thrust_n, 0.0);
    }
    let routes = |p: &Profile| {
        let c = Cage::from_profile(p).unwrap();
        let m = RightingModel::new(p, &c).unwrap();
        let map = m.recovery_map();
        for plan in &map {
            assert!(plan.reachable || plan.reason.as_deref().is_some_and(|r| !r.is_empty()));
        }
        let feasible = (0..m.moves.len()).filter(|&k| m.check(k).feasible).count();
        (
            map.iter().filter(|p| p.reachable).count(),
            feasible,
            m.moves.len(),
        )
    };
    let (demo_routes, demo_ok, demo_all) = routes(&demo);
    let (fwd_routes, _, _) = routes(&fwd);
    // The demo shows both kinds of move, and a route from every face.
    assert!(demo_ok > 0 && demo_ok < demo_all);
    assert_eq!(demo_routes, 20);
    assert!(fwd_routes < demo_routes / 2, "{fwd_routes}");
}

#[test]
fn unstable_faces_settle_and_plans_start_where_the_vehicle_settles() {
    // Octahedron with the centre of mass pushed towards one vertex: the
    // faces around the opposite vertex cannot hold it.
    let extra = quad_rotors(0.05, -0.02, 6.0, 3.0)
        + "[righting]\ntakeoff_faces = \"auto\"\nmax_takeoff_tilt_deg = 60.0\nvertex_pivots = true\nfriction_coefficient = 0.8\n";
    let (_, c, m) = build(&explicit_toml(
        &octahedron(0.15),
        [0.0, 0.0, 0.09],
        1.0,
        &extra,
    ));
    let unstable: Vec<usize> = (0..c.faces.len()).filter(|&f| !c.faces[f].stable).collect();
    assert!(
        !unstable.is_empty(),
        "the offset centre of mass leaves some faces unstable"
    );
    for &f in &unstable {
        let end = m.settle_face(f);
        assert!(c.faces[end].stable);
        assert!(
            m.moves.iter().all(|x| x.roll.from != f),
            "no moves start on {f}"
        );
        let plan = m.plan(f, &resting_attitude(&c, f));
        assert!(
            plan.note
                .as_deref()
                .is_some_and(|n| n.contains("settles on"))
        );
        if let Some(first) = plan.steps.first() {
            assert_eq!(first.from, end);
        }
    }
    assert!(
        m.moves.iter().any(|x| !x.settle.is_empty()),
        "some rolls land on an unstable face"
    );
    let json_like: Vec<(usize, usize, usize)> = m
        .moves
        .iter()
        .filter(|x| !x.settle.is_empty())
        .map(|x| (x.roll.from, x.roll.to, x.settles_on))
        .collect();
    assert!(json_like.iter().all(|(_, to, end)| to != end));
    // Every move's settle chain ends on a stable face and the heights of
    // the centre of mass above the support plane fall along it.
    for mv in &m.moves {
        assert!(c.faces[mv.settles_on].stable);
        let mut h = f64::INFINITY;
        for r in std::iter::once(&mv.roll).chain(&mv.settle) {
            let f = &c.faces[r.to];
            let height = f.normal_body.dot(&(f.centroid_body - c.com_body));
            if r.from != mv.roll.from {
                assert!(height < h + 1e-12);
            }
            h = height;
        }
    }
}

/// A move whose check passes but for which no rotor setting is found
/// counts as infeasible (the fail-safe rule of the feasibility check;
/// common practice, no published source): the recovery map and a single
/// plan route around it, no cost falls without it, and every step shown
/// carries its commands.
#[test]
fn a_move_without_commands_is_routed_around() {
    let p = Profile::demo().expect("demo");
    let c = Cage::from_profile(&p).expect("cage");
    let m = RightingModel::new(&p, &c).expect("model");
    let map = m.recovery_map();
    let (face, first) = map
        .iter()
        .enumerate()
        .find_map(|(f, plan)| plan.steps.first().map(|s| (f, s.move_index)))
        .expect("some plan has a step");
    let fresh = RightingModel::new(&p, &c).expect("model");
    assert!(fresh.check(first).feasible);
    fresh.moves[first]
        .commands
        .set(None)
        .expect("commands not worked out yet");
    assert!(!fresh.feasible(first));
    let again = fresh.recovery_map();
    assert!(
        again
            .iter()
            .flat_map(|plan| &plan.steps)
            .all(|s| s.move_index != first)
    );
    let single = fresh.plan(face, &resting_attitude(&fresh.cage, face));
    assert!(single.steps.iter().all(|s| s.move_index != first));
    for (before, after) in map.iter().zip(&again) {
        if after.reachable {
            assert!(before.reachable && after.cost_deg >= before.cost_deg - 1e-9);
        }
    }
    for s in again.iter().flat_map(|plan| &plan.steps) {
        assert_eq!(Some(&*s.commands), fresh.commands(s.move_index));
    }
}
