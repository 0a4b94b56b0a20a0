//! Statics and impact checks on explicit cages built in the test: the
//! six-strut cage's published values, a cage with no self-stress, and
//! invariance of every utilisation under rotation, translation and scale.

use cagehand::cage::{Cage, MemberKind};
use cagehand::impact::{ImpactInput, Strike, analyse_impact};
use cagehand::profile::Profile;
use cagehand::statics::{Structure, linear_load_case, self_stress};
use nalgebra::{Rotation3, Vector3};
use proptest::prelude::*;

/// Node positions of the six-strut cage (docs/references.md): (+-s/2, 0, +-L/2),
/// (+-L/2, +-s/2, 0), (0, +-L/2, +-s/2); rods join nodes (2k, 2k+1).
fn icosa6(l: f64, s: f64) -> Vec<Vector3<f64>> {
    let (h, q) = (l / 2.0, s / 2.0);
    vec![
        Vector3::new(q, 0.0, h),
        Vector3::new(q, 0.0, -h),
        Vector3::new(-q, 0.0, h),
        Vector3::new(-q, 0.0, -h),
        Vector3::new(h, q, 0.0),
        Vector3::new(-h, q, 0.0),
        Vector3::new(h, -q, 0.0),
        Vector3::new(-h, -q, 0.0),
        Vector3::new(0.0, h, q),
        Vector3::new(0.0, -h, q),
        Vector3::new(0.0, h, -q),
        Vector3::new(0.0, -h, -q),
    ]
}

/// Strings of the six-strut cage at s = L/2: the node pairs at the string
/// length sqrt(6)/4 L (Tibert & Pellegrino 2003).
fn icosa6_strings(pos: &[Vector3<f64>], l: f64) -> Vec<[usize; 2]> {
    let mut out = Vec::new();
    for i in 0..pos.len() {
        for j in i + 1..pos.len() {
            if ((pos[i] - pos[j]).norm() - 6f64.sqrt() / 4.0 * l).abs() < 1e-6 * l {
                out.push([i, j]);
            }
        }
    }
    out
}

/// An explicit profile as TOML text. The rod section is chosen so that
/// crushing, not buckling, limits the rods at every scale the tests use,
/// which makes utilisation independent of scale (invented test data).
fn explicit_toml(pos: &[Vector3<f64>], strings: &[[usize; 2]], com: Vector3<f64>) -> String {
    let mut t =
        String::from("# Invented test vehicle.\n[vehicle]\nid = \"test\"\nmass_kg = 0.78\n");
    t += &format!("com_m = [{}, {}, {}]\n\n", com.x, com.y, com.z);
    t += "[cage]\n\n[cage.rod_section]\nouter_diameter_mm = 8.0\ninner_diameter_mm = 6.0\n\
          modulus_gpa = 90.0\ncrush_strength_mpa = 10.0\ndensity_kg_m3 = 1550.0\n\n\
          [cage.string_section]\ndiameter_mm = 1.0\nmodulus_gpa = 40.0\nbreaking_load_n = 700.0\n\
          termination_efficiency = 0.6\npretension_n = 20.0\n\n";
    for (i, p) in pos.iter().enumerate() {
        t += &format!(
            "[[cage.node]]\nid = \"N{}\"\npos_m = [{:.17e}, {:.17e}, {:.17e}]\n\n",
            i + 1,
            p.x,
            p.y,
            p.z
        );
    }
    for k in 0..6 {
        t += &format!(
            "[[cage.rod]]\nnodes = [\"N{}\", \"N{}\"]\n\n",
            2 * k + 1,
            2 * k + 2
        );
    }
    for s in strings {
        t += &format!(
            "[[cage.string]]\nnodes = [\"N{}\", \"N{}\"]\n\n",
            s[0] + 1,
            s[1] + 1
        );
    }
    t
}

fn build(pos: &[Vector3<f64>], strings: &[[usize; 2]], com: Vector3<f64>) -> (Profile, Cage) {
    let p = Profile::parse(&explicit_toml(pos, strings, com), "test.toml").unwrap();
    let c = Cage::from_profile(&p).unwrap();
    (p, c)
}

/// Index of the face whose node set is `ids` (node ids are the profile's).
fn face_with_nodes(c: &Cage, ids: &[String]) -> usize {
    let mut want: Vec<&str> = ids.iter().map(|s| s.as_str()).collect();
    want.sort_unstable();
    c.faces
        .iter()
        .position(|f| {
            let mut have: Vec<&str> = f.nodes.iter().map(|&i| c.nodes[i].id.as_str()).collect();
            have.sort_unstable();
            have == want
        })
        .unwrap()
}

fn face_ids(c: &Cage, face: usize) -> Vec<String> {
    c.faces[face]
        .nodes
        .iter()
        .map(|&i| c.nodes[i].id.clone())
        .collect()
}

/// Utilisation per member id.
fn utilisations(c: &Cage, p: &Profile, face_nodes: &[String], g: f64) -> Vec<(String, f64)> {
    let face = face_with_nodes(c, face_nodes);
    let r = analyse_impact(c, p, Strike::Face(face), &ImpactInput::PeakAccel { g }).unwrap();
    assert!(r.residual_n < 1e-6 * r.force_n);
    let mut u: Vec<(String, f64)> = r
        .members
        .iter()
        .map(|m| (c.members[m.member].id.clone(), m.utilisation))
        .collect();
    u.sort_by(|a, b| a.0.cmp(&b.0));
    u
}

const COM: Vector3<f64> = Vector3::new(0.012, -0.006, 0.018);

#[test]
fn explicit_six_strut_matches_published_values() {
    let l = 0.4;
    let pos = icosa6(l, l / 2.0);
    let strings = icosa6_strings(&pos, l);
    assert_eq!(strings.len(), 24);
    let (p, c) = build(&pos, &strings, COM);
    let ss = self_stress(&Structure::from_cage(&c, &p), 20.0).unwrap();
    // Pellegrino & Calladine 1986 (docs/references.md): rank 29, one self-stress
    // state, one mechanism.
    assert_eq!((ss.rank, ss.states, ss.mechanisms), (29, 1, 1));
    assert!(ss.prestress_ok);
    for (m, t) in c.members.iter().zip(&ss.prestress_n) {
        match m.kind {
            // Tibert & Pellegrino 2003; Jessen 1967: rod/string force -sqrt(6).
            MemberKind::Rod => assert!((t / 20.0 + 6f64.sqrt()).abs() < 1e-9),
            MemberKind::String => assert!((t - 20.0).abs() < 1e-9),
        }
    }
}

#[test]
fn a_cage_with_no_self_stress_says_so_and_still_computes() {
    // Nodes moved off the equilibrium form: the equilibrium matrix gains
    // full column rank, so no self-stress exists (Pellegrino & Calladine
    // 1986: s = b - r = 0 and m = 3n - r - 6 = 0 for rank 30).
    let l = 0.4;
    let base = icosa6(l, l / 2.0);
    let strings = icosa6_strings(&base, l);
    let nudge = [
        [0.011, -0.004, 0.002],
        [-0.003, 0.009, -0.006],
        [0.005, 0.002, -0.010],
        [-0.008, -0.006, 0.004],
    ];
    let pos: Vec<Vector3<f64>> = base
        .iter()
        .enumerate()
        .map(|(i, p)| p + Vector3::from(nudge[i % 4]) * 0.5)
        .collect();
    let (p, c) = build(&pos, &strings, COM);
    let s = Structure::from_cage(&c, &p);
    let ss = self_stress(&s, 20.0).unwrap();
    assert_eq!((ss.rank, ss.states, ss.mechanisms), (30, 0, 0));
    assert!(!ss.prestress_ok);
    assert!(ss.message.contains("No self-stress"), "{}", ss.message);
    assert!(ss.prestress_n.iter().all(|&t| t == 0.0));
    // What can still be computed: a load the members balance (rod R1's
    // ends pulled apart) is carried with no residual, by the rod alone.
    let [a, b] = c.members[0].nodes;
    let e = (s.pos_m[a] - s.pos_m[b]).normalize();
    let mut loads = vec![Vector3::zeros(); s.node_count()];
    loads[a] = e * 10.0;
    loads[b] = -e * 10.0;
    let r = linear_load_case(&s, &ss.prestress_n, &loads).unwrap();
    assert!(r.residual_n < 1e-9);
    assert!((r.total_n[0] - 10.0).abs() < 1e-9);
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(10))]

    #[test]
    fn rotating_and_translating_changes_no_utilisation(
        roll in -180.0f64..180.0, pitch in -89.0f64..89.0, yaw in -180.0f64..180.0,
        dx in -1.0f64..1.0, dy in -1.0f64..1.0, dz in -1.0f64..1.0,
    ) {
        let l = 0.4;
        let pos = icosa6(l, l / 2.0);
        let strings = icosa6_strings(&pos, l);
        let (p0, c0) = build(&pos, &strings, COM);
        let face = face_ids(&c0, 0);
        let u0 = utilisations(&c0, &p0, &face, 60.0);

        let rot = Rotation3::from_euler_angles(roll.to_radians(), pitch.to_radians(), yaw.to_radians());
        let shift = Vector3::new(dx, dy, dz);
        let moved: Vec<Vector3<f64>> = pos.iter().map(|q| rot * q + shift).collect();
        let (p1, c1) = build(&moved, &strings, rot * COM + shift);
        let u1 = utilisations(&c1, &p1, &face, 60.0);
        for ((id0, a), (id1, b)) in u0.iter().zip(&u1) {
            prop_assert_eq!(id0, id1);
            prop_assert!((a - b).abs() < 1e-6, "{}: {} vs {}", id0, a, b);
        }
    }

    #[test]
    fn scaling_changes_no_utilisation(scale in 0.5f64..1.5) {
        // Same sections and the same peak acceleration: the strains, and so
        // the forces, do not depend on the cage's size; crushing limits the
        // rods here, so capacities do not either.
        let l = 0.4;
        let pos = icosa6(l, l / 2.0);
        let strings = icosa6_strings(&pos, l);
        let (p0, c0) = build(&pos, &strings, COM);
        let face = face_ids(&c0, 0);
        let u0 = utilisations(&c0, &p0, &face, 60.0);
        let big: Vec<Vector3<f64>> = pos.iter().map(|q| q * scale).collect();
        let (p1, c1) = build(&big, &icosa6_strings(&big, l * scale), COM * scale);
        let u1 = utilisations(&c1, &p1, &face, 60.0);
        for ((id0, a), (_, b)) in u0.iter().zip(&u1) {
            prop_assert!((a - b).abs() < 1e-6, "{}: {} vs {}", id0, a, b);
        }
    }
}

/// The docs/design.md case ("Why the linear answer is not enough"): a 0.3 m
/// six-strut cage of 0.42 kg, 8 kN strings at 15 N pretension, 300 N on F1.
///
/// "8 kN strings" is read here as a string axial stiffness E A = 8 kN
/// (8000 N): that reading is ours, DESIGN does not say which figure it
/// means. 1 mm line at 8 / (pi / 4) GPa gives E A = 8000 N. The breaking
/// load (2 kN at full termination efficiency) is well above every force in
/// the case. The rod section is the demo's CFRP tube (invented test data).
fn design_case_toml() -> String {
    let modulus_gpa = 8.0 / (std::f64::consts::PI / 4.0);
    format!(
        "# Invented test vehicle for the docs/design.md case.\n\
         [vehicle]\nid = \"design-case\"\nmass_kg = 0.42\ncom_m = [0.0, 0.0, 0.0]\n\n\
         [cage]\nkind = \"icosa6\"\nrod_length_m = 0.3\n\n\
         [cage.rod_section]\nouter_diameter_mm = 8.0\ninner_diameter_mm = 6.0\n\
         modulus_gpa = 90.0\ncrush_strength_mpa = 450.0\ndensity_kg_m3 = 1550.0\n\n\
         [cage.string_section]\ndiameter_mm = 1.0\nmodulus_gpa = {modulus_gpa:.17e}\n\
         breaking_load_n = 2000.0\ntermination_efficiency = 1.0\npretension_n = 15.0\n"
    )
}

#[test]
fn design_face_impact_slackens_strings_and_moves_the_face_a_centimetre() {
    let p = Profile::parse(&design_case_toml(), "design-case.toml").unwrap();
    let c = Cage::from_profile(&p).unwrap();
    assert!((p.string.ea_n() - 8000.0).abs() < 1e-6);
    let f1 = c.face_index("F1").unwrap();
    // F = m a: a peak acceleration of 300 N / (m g0) gives a 300 N contact.
    let g = 300.0 / (0.42 * cagehand::impact::STANDARD_GRAVITY_M_S2);
    let r = analyse_impact(&c, &p, Strike::Face(f1), &ImpactInput::PeakAccel { g }).unwrap();
    let slack: Vec<&str> = r
        .slack_strings
        .iter()
        .map(|&j| c.members[j].id.as_str())
        .collect();
    eprintln!(
        "DESIGN case: force {:.1} N, face displacement {:.2} cm, slack strings {:?}, residual {:.2e} N",
        r.force_n,
        r.face_displacement_m * 100.0,
        slack,
        r.residual_n
    );
    assert!((r.force_n - 300.0).abs() < 1e-9);
    assert!(r.residual_n < 1e-6 * r.force_n);
    assert!(r.members.iter().all(|m| m.force_n < 2000.0));
    // docs/design.md design expectation: "a 300 N face impact slackens a few
    // strings and moves the face in by about a centimetre".
    assert!(!slack.is_empty(), "no string slack: {slack:?}");
    // docs/design.md design expectation: about a centimetre, taken as 0.5-2.0 cm.
    assert!(
        (0.005..=0.020).contains(&r.face_displacement_m),
        "face displacement {:.4} m",
        r.face_displacement_m
    );
}
