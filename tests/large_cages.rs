//! Statics and righting on the generated geodesic cages (levels 1 and 2:
//! 141 and 561 members) agree with the answers the implementation gave
//! before the sparse and cached rewrite (tests/fixtures/geodesic.json,
//! computed once with the dense SVD / dense LU code at commit b1e73c3).
//! The fixture is a regression reference, not a published value: the
//! published-value checks stay in tests/statics.rs and the unit tests.
//!
//! Regenerate (only when a change of answer is intended and explained):
//! `cargo test --release --test large_cages -- --ignored record`.

use cagehand::cage::Cage;
use cagehand::impact::{ImpactInput, Strike, analyse_impact};
use cagehand::profile::Profile;
use cagehand::righting::RightingModel;
use cagehand::statics::{Structure, self_stress};
use serde_json::{Value, json};

const FIXTURE: &str = concat!(env!("CARGO_MANIFEST_DIR"), "/tests/fixtures/geodesic.json");
/// Peak acceleration of the fixture's impact on F1.
const IMPACT_G: f64 = 20.0;
/// Members listed per cage: the most loaded by absolute force.
const TOP: usize = 8;

fn load(k: u32) -> (Profile, Cage) {
    let p = Profile::parse(&cagehand::geodesic::profile_toml(k), "geodesic").expect("profile");
    let c = Cage::from_profile(&p).expect("cage");
    (p, c)
}

/// The few numbers kept per cage.
fn summary(k: u32) -> Value {
    let (p, c) = load(k);
    let s = Structure::from_cage(&c, &p);
    let ss = self_stress(&s, p.string.pretension_n).expect("self-stress");
    let top = |forces: &[f64]| {
        let mut idx: Vec<usize> = (0..forces.len()).collect();
        idx.sort_by(|&a, &b| forces[b].abs().total_cmp(&forces[a].abs()).then(a.cmp(&b)));
        idx.truncate(TOP);
        idx.iter()
            .map(|&j| json!([c.members[j].id, forces[j]]))
            .collect::<Vec<_>>()
    };
    let a = analyse_impact(
        &c,
        &p,
        Strike::Face(0),
        &ImpactInput::PeakAccel { g: IMPACT_G },
    )
    .expect("impact");
    let forces: Vec<f64> = a.members.iter().map(|m| m.force_n).collect();
    let model = RightingModel::new(&p, &c).expect("righting model");
    let plans = model.recovery_map();
    let reachable: Vec<&cagehand::righting::plan::Plan> =
        plans.iter().filter(|p| p.reachable).collect();
    json!({
        "k": k,
        "rank": ss.rank,
        "states": ss.states,
        "mechanisms": ss.mechanisms,
        "prestress_ok": ss.prestress_ok,
        "prestress_top": top(&ss.prestress_n),
        "impact_force_n": a.force_n,
        "impact_top": top(&forces),
        "impact_slack": a.slack_strings.iter().map(|&j| c.members[j].id.clone()).collect::<Vec<_>>(),
        "impact_face_displacement_m": a.face_displacement_m,
        "plans_reachable": reachable.len(),
        "plans_cost_sum_deg": reachable.iter().map(|p| p.cost_deg).sum::<f64>(),
        "plans_cost_first": plans.iter().take(12).map(|p| p.reachable.then_some(p.cost_deg)).collect::<Vec<_>>(),
        "plans_steps_sum": plans.iter().map(|p| p.steps.len()).sum::<usize>(),
    })
}

#[test]
#[ignore = "writes the fixture; run only to record a deliberate change"]
fn record() {
    let all: Vec<Value> = [1, 2].into_iter().map(summary).collect();
    let text = serde_json::to_string_pretty(&json!({ "cages": all })).expect("json");
    std::fs::write(FIXTURE, text + "\n").expect("write fixture");
}

fn close(a: &Value, b: &Value, scale: f64, what: &str) {
    let (x, y) = (a.as_f64().expect(what), b.as_f64().expect(what));
    assert!(
        (x - y).abs() <= 1e-6 * scale.max(1e-9),
        "{what}: {x} now, {y} in the fixture"
    );
}

fn check(k: u32) {
    let text = std::fs::read_to_string(FIXTURE).expect("fixture");
    let fixture: Value = serde_json::from_str(&text).expect("fixture json");
    let want = fixture["cages"]
        .as_array()
        .and_then(|a| a.iter().find(|c| c["k"] == k))
        .expect("fixture for this level")
        .clone();
    let got = summary(k);
    for key in [
        "rank",
        "states",
        "mechanisms",
        "prestress_ok",
        "impact_slack",
        "plans_reachable",
        "plans_steps_sum",
    ] {
        assert_eq!(got[key], want[key], "level {k}: {key}");
    }
    for key in ["prestress_top", "impact_top"] {
        let (g, w) = (got[key].as_array().unwrap(), want[key].as_array().unwrap());
        let scale = w[0][1].as_f64().unwrap().abs();
        assert_eq!(g.len(), w.len());
        for (gi, wi) in g.iter().zip(w) {
            // Members tied in force may swap places; compare forces by rank
            // and the member ids only where the forces are clearly apart.
            close(
                &gi[1],
                &wi[1],
                scale,
                &format!("level {k}: {key} {}", wi[0]),
            );
        }
        // A member clearly above the cut (not tied with the last one
        // listed) must be listed now too.
        let cut = w[w.len() - 1][1].as_f64().unwrap().abs();
        for wi in w {
            if wi[1].as_f64().unwrap().abs() > cut + 1e-6 * scale {
                assert!(
                    g.iter().any(|gi| gi[0] == wi[0]),
                    "level {k}: {key}: {} no longer listed",
                    wi[0]
                );
            }
        }
    }
    let f = want["impact_force_n"].as_f64().unwrap();
    close(
        &got["impact_force_n"],
        &want["impact_force_n"],
        f,
        "impact force",
    );
    close(
        &got["impact_face_displacement_m"],
        &want["impact_face_displacement_m"],
        want["impact_face_displacement_m"].as_f64().unwrap().abs(),
        "face displacement",
    );
    close(
        &got["plans_cost_sum_deg"],
        &want["plans_cost_sum_deg"],
        1.0,
        "plan cost sum",
    );
    assert_eq!(
        got["plans_cost_first"].as_array().map(Vec::len),
        want["plans_cost_first"].as_array().map(Vec::len)
    );
    for (g, w) in got["plans_cost_first"]
        .as_array()
        .unwrap()
        .iter()
        .zip(want["plans_cost_first"].as_array().unwrap())
    {
        match (g.is_null(), w.is_null()) {
            (true, true) => {}
            (false, false) => close(g, w, 1.0, "plan cost"),
            _ => panic!("level {k}: reachability changed: {g} vs {w}"),
        }
    }
}

#[test]
fn level_1_matches_the_recorded_answers() {
    check(1);
}

#[test]
fn level_2_matches_the_recorded_answers() {
    check(2);
}
