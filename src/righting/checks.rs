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
            // REFERENCES.md: dihedral arccos(-sqrt(5)/3) = 138.1897 deg, so a
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
    let f = &mv.feasibility;
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
    assert!(!back.feasibility.feasible);
    assert_eq!(back.feasibility.thrust_fraction, None);
    // Feasible exactly when max thrust >= margin m g / 2.
    let edge_n = 1.2 * mg / 2.0;
    let (_, lo, b, s) = one_rotor_cube(edge_n * 0.99, 1.2);
    let (_, hi, _, _) = one_rotor_cube(edge_n * 1.01, 1.2);
    let find = |m: &RightingModel| {
        m.moves
            .iter()
            .find(|x| x.roll.from == b && x.roll.to == s)
            .unwrap()
            .feasibility
            .feasible
    };
    assert!(!find(&lo));
    assert!(find(&hi));
}

#[test]
fn no_rotors_no_feasible_moves() {
    // A profile with no [[rotor]] table at all.
    let extra = "[righting]\ntakeoff_faces = [\"F1\"]\nvertex_pivots = true\n";
    let (p0, _, m0) = build(&explicit_toml(&cube(0.1), [0.01, 0.0, 0.02], 1.0, extra));
    assert!(p0.rotors.is_empty());
    assert!(!m0.moves.is_empty());
    assert!(m0.moves.iter().all(|x| !x.feasibility.feasible));
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
    assert!(m.moves.iter().all(|x| !x.feasibility.feasible));
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
    // Tilting one rotor by a hair forces the LP path; its answer must be
    // close to the exact greedy one (the friction polygon is inscribed, so
    // it may only be a little lower).
    let p = Profile::demo().unwrap();
    let c = Cage::from_profile(&p).unwrap();
    let exact = RightingModel::new(&p, &c).unwrap();
    let mut limits = exact.limits.clone();
    limits.rotors[0].axis = {
        let a = nalgebra::Vector3::new(1e-6, 0.0, -1.0).normalize();
        [a.x, a.y, a.z]
    };
    let lp = RightingModel::with_limits(c, limits, exact.takeoff.clone(), true, 1.5);
    for (a, b) in exact.moves.iter().zip(&lp.moves) {
        assert_eq!(a.roll, b.roll);
        let (fa, fb) = (a.feasibility.available_nm, b.feasibility.available_nm);
        let g = super::feasibility::gravity_at(&exact.cage, &a.roll, 0.0);
        let arms = super::feasibility::moment_arms_m(&a.roll, &exact.limits.rotors);
        let ea = super::feasibility::best_moment_nm(&exact.cage, &exact.limits, &arms, &g);
        let eb = super::feasibility::best_moment_nm(&lp.cage, &lp.limits, &arms, &g);
        assert!(
            eb <= ea + 1e-6,
            "inner approximation never exceeds the exact value"
        );
        assert!(eb >= ea * 0.97 - 1e-6, "{eb} vs {ea}");
        let _ = (fa, fb);
    }
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
            for (x, y) in a.moves.iter().zip(&b.moves) {
                prop_assert!(!x.feasibility.feasible || y.feasibility.feasible);
                if let (Some(fx), Some(fy)) = (x.feasibility.thrust_fraction, y.feasibility.thrust_fraction) {
                    prop_assert!(fy <= fx + 1e-9);
                }
            }
        }
    }
}

#[test]
fn forward_only_rotors_rarely_roll_an_inverted_vehicle() {
    // DESIGN.md "Feasibility": lying inverted, forward thrust presses the
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
        let ok = from_inv.iter().filter(|x| x.feasibility.feasible).count();
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
        let feasible = m.moves.iter().filter(|x| x.feasibility.feasible).count();
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
