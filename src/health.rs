//! Member health from the cage log and the profile's inspection rules.
//!
//! Rules, applied per member to the records since its last replacement, in
//! file order (so the same log and profile always give the same answer):
//! - **Replace now** when any impact loaded it to `overload_utilisation` or
//!   more (the magnitude of force over capacity). A synthetic line shock
//!   loaded near its breaking strength is retired (Cordage Institute CI
//!   2001-04), and composite damage from an impact can be hidden (FAA AC
//!   20-107B, 2009), so an overload is never averaged away.
//! - **Damage** by Miner's rule (Miner, "Cumulative damage in fatigue",
//!   J. Appl. Mech. 12, 1945): D = sum n_i / N_i, one impact being one load
//!   cycle, with a Basquin-type curve N(u) = u^-k (k = `sn_exponent_rod` or
//!   `sn_exponent_string`), so one impact at utilisation u adds u^k. An
//!   impact below `endurance_utilisation` adds nothing; one at or above
//!   capacity (u >= 1) adds 1, a whole life (N is at least one cycle), so D
//!   stays readable where the overload rule has already spoken. D at or above
//!   `inspect_damage` is INSPECT, at or above `due_damage` is DUE.
//! - **Count rule** (strings): `string_count_limit` impacts at or above
//!   `string_count_utilisation` make it DUE.
//! - **Findings**: a cut or crack makes it REPLACE NOW, a fray DUE (they do not heal); slack
//!   or a loose end make it INSPECT until a later `ok` finding on the same
//!   member (both can be put right in the field). An `ok` finding after the
//!   latest impact that added damage is the inspection that damage at the
//!   INSPECT level asks for: the member returns to OK with the reason
//!   "inspected" (a later damaging impact asks for a new one). `ok` clears
//!   nothing at DUE or above, nor a cut, crack or fray.
//! - **Replacement** resets the member: damage, counts, maximum and
//!   findings before it no longer count.

use crate::cage::{Cage, MemberKind};
use crate::logbook::{Event, FindingKind, Record, StrikeRef};
use crate::profile::Inspection;
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// A member's status, in increasing severity.
#[derive(Debug, Clone, Copy, PartialEq, Eq, PartialOrd, Ord, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Status {
    /// Nothing to do.
    Ok,
    /// Look at it before the next flight.
    Inspect,
    /// Replace it at the next opportunity; do not keep flying on it.
    Due,
    /// Replace it before flying again.
    ReplaceNow,
}

impl Status {
    /// The status as printed (`ok`, `inspect`, `due`, `replace_now`).
    pub fn name(self) -> &'static str {
        match self {
            Status::Ok => "ok",
            Status::Inspect => "inspect",
            Status::Due => "due",
            Status::ReplaceNow => "replace_now",
        }
    }
    /// The status as a crew reads it on paper.
    pub fn label(self) -> &'static str {
        match self {
            Status::Ok => "OK",
            Status::Inspect => "INSPECT",
            Status::Due => "DUE",
            Status::ReplaceNow => "REPLACE NOW",
        }
    }
}

/// The health of one member (what `log health --json` prints, per member).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct MemberHealth {
    /// Member id.
    pub id: String,
    /// Rod or string.
    pub kind: MemberKind,
    /// The most severe status any rule gives.
    pub status: Status,
    /// Miner sum since the last replacement.
    pub damage: f64,
    /// Largest utilisation magnitude since the last replacement.
    pub max_utilisation: f64,
    /// Impacts recorded since the last replacement that list this member
    /// (the impact command lists every member, loaded or slack).
    pub impacts: u32,
    /// Why, in words: every rule that raised the status, or why it is ok.
    pub reasons: Vec<String>,
}

/// Health of every member, plus what in the log could not be used.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct HealthReport {
    /// Members in cage id order (rods, then strings).
    pub members: Vec<MemberHealth>,
    /// Log entries naming members this cage does not have.
    pub warnings: Vec<String>,
}

impl HealthReport {
    /// Members that need action (inspect or worse), most severe first,
    /// then in id order.
    pub fn to_act_on(&self) -> Vec<&MemberHealth> {
        let mut v: Vec<&MemberHealth> = self
            .members
            .iter()
            .filter(|m| m.status > Status::Ok)
            .collect();
        v.sort_by_key(|m| std::cmp::Reverse(m.status));
        v
    }

    /// The worst status over the cage.
    pub fn worst(&self) -> Status {
        self.members
            .iter()
            .map(|m| m.status)
            .max()
            .unwrap_or(Status::Ok)
    }
}

/// A member whose status an event changed.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct StatusChange {
    /// Member id.
    pub id: String,
    /// Before.
    pub from: Status,
    /// After.
    pub to: Status,
    /// The reasons after.
    pub reasons: Vec<String>,
}

/// Members whose status differs between two reports of the same cage.
pub fn changes(before: &HealthReport, after: &HealthReport) -> Vec<StatusChange> {
    after
        .members
        .iter()
        .filter_map(|a| {
            let b = before.members.iter().find(|b| b.id == a.id)?;
            (b.status != a.status).then(|| StatusChange {
                id: a.id.clone(),
                from: b.status,
                to: a.status,
                reasons: a.reasons.clone(),
            })
        })
        .collect()
}

#[derive(Debug, Default, Clone)]
struct Acc {
    damage: f64,
    damaging: u32,
    max_u: f64,
    impacts: u32,
    counted: u32,
    overloads: Vec<String>,
    /// Cuts and cracks: the member must not fly again.
    critical: Vec<String>,
    serious: Vec<String>,
    minor: Vec<String>,
    last_ok: Option<String>,
    /// An `ok` finding recorded after the latest impact that added damage.
    inspected_since_damage: Option<String>,
    replaced: Option<String>,
    /// Findings still in force (fray until replaced; slack and loose end
    /// until a later `ok`), for the capacity derating of the margin.
    open: BTreeSet<FindingKind>,
}

fn with_note(s: String, note: &Option<String>) -> String {
    match note {
        Some(n) if !n.trim().is_empty() => format!("{s} ({})", n.trim()),
        _ => s,
    }
}

/// Compute the health of every member of `cage` from the log's records.
pub fn assess(records: &[Record], cage: &Cage, rules: &Inspection) -> HealthReport {
    let (acc, unknown) = accumulate(records, cage, rules);
    let members = cage
        .members
        .iter()
        .zip(acc)
        .map(|(m, a)| judge(&m.id, m.kind, a, rules))
        .collect();
    let warnings = unknown
        .into_iter()
        .map(|id| {
            format!(
                "the log names member {id}, which this cage does not have; its entries are ignored"
            )
        })
        .collect();
    HealthReport { members, warnings }
}

/// The findings still in force on every member (in cage member order):
/// a fray until the member is replaced, slack and a loose end until a
/// later `ok` finding or a replacement; by the same walk as [`assess`].
/// Cuts and cracks are listed too, though they already make a member
/// REPLACE NOW.
pub fn open_findings(records: &[Record], cage: &Cage, rules: &Inspection) -> Vec<Vec<FindingKind>> {
    accumulate(records, cage, rules)
        .0
        .into_iter()
        .map(|a| a.open.into_iter().collect())
        .collect()
}

/// Walk the records in file order and gather, per member, what the rules
/// judge; also the member ids the log names that the cage does not have.
fn accumulate(records: &[Record], cage: &Cage, rules: &Inspection) -> (Vec<Acc>, BTreeSet<String>) {
    let index: BTreeMap<&str, usize> = cage
        .members
        .iter()
        .enumerate()
        .map(|(i, m)| (m.id.as_str(), i))
        .collect();
    let mut acc = vec![Acc::default(); cage.members.len()];
    let mut unknown: BTreeSet<String> = BTreeSet::new();
    for r in records {
        let when = format!("#{} {} by {}", r.seq, r.time, r.operator);
        match &r.event {
            Event::Impact(imp) => {
                let what = match &imp.strike {
                    StrikeRef::Face(f) => format!("impact on face {f}"),
                    StrikeRef::Node(n) => format!("impact on node {n}"),
                };
                if imp.beyond_model {
                    // No equilibrium: the loads are unknown and the cage may
                    // have collapsed. Every member is suspect.
                    for a in acc.iter_mut() {
                        a.impacts += 1;
                        a.overloads.push(format!(
                            "record {}: {what} ({when}) was beyond what the model can solve (no equilibrium at {:.0} N; the cage may have collapsed): treat the whole cage as damaged and replace before flying",
                            r.seq, imp.force_n
                        ));
                    }
                }
                for load in &imp.members {
                    let Some(&i) = index.get(load.member.as_str()) else {
                        unknown.insert(load.member.clone());
                        continue;
                    };
                    let u = load.utilisation.abs();
                    let a = &mut acc[i];
                    if !u.is_finite() {
                        // Unknown load: assume the worst rather than skip it.
                        a.impacts += 1;
                        a.overloads.push(format!(
                            "record {}: utilisation not a number ({what}, {when}): replace before flying",
                            r.seq
                        ));
                        continue;
                    }
                    a.impacts += 1;
                    a.max_u = a.max_u.max(u);
                    if u >= rules.overload_utilisation {
                        a.overloads.push(format!(
                            "{what} ({when}) loaded it to {u:.2} of capacity, at or above the overload level {:.2}: replace before flying",
                            rules.overload_utilisation
                        ));
                    }
                    if u >= rules.endurance_utilisation {
                        let k = match cage.members[i].kind {
                            MemberKind::Rod => rules.sn_exponent_rod,
                            MemberKind::String => rules.sn_exponent_string,
                        };
                        // One cycle at u: n/N = 1 / u^-k = u^k, with N at
                        // least one cycle (u >= 1 uses up a whole life).
                        a.damage += u.powf(k).min(1.0);
                        a.damaging += 1;
                        // New damage: an earlier inspection no longer covers it.
                        a.inspected_since_damage = None;
                    }
                    if cage.members[i].kind == MemberKind::String
                        && u >= rules.string_count_utilisation
                    {
                        a.counted += 1;
                    }
                }
            }
            Event::Finding(f) => {
                let Some(&i) = index.get(f.member.as_str()) else {
                    unknown.insert(f.member.clone());
                    continue;
                };
                let a = &mut acc[i];
                let text = with_note(format!("finding {} ({when})", f.kind.name()), &f.note);
                if f.kind == FindingKind::Ok {
                    a.open
                        .retain(|k| !matches!(k, FindingKind::Slack | FindingKind::LooseEnd));
                } else {
                    a.open.insert(f.kind);
                }
                match f.kind {
                    // A cut line is retired (Cordage Institute CI 2001-04,
                    // Fiber Rope Inspection and Retirement Criteria) and a
                    // cracked composite tube has lost compressive strength
                    // that cannot be seen (FAA AC 20-107B): replace now. A
                    // fray is wear: replace at the next opportunity.
                    FindingKind::Cut | FindingKind::Crack => a
                        .critical
                        .push(format!("{text}: replace before flying again")),
                    FindingKind::Fray => a.serious.push(format!("{text}: replace")),
                    FindingKind::Slack | FindingKind::LooseEnd => {
                        a.minor.push(format!("{text}: put right and inspect"))
                    }
                    FindingKind::Ok => {
                        a.minor.clear();
                        a.last_ok = Some(format!("inspected ok ({when})"));
                        a.inspected_since_damage = Some(format!("#{} by {}", r.seq, r.operator));
                    }
                }
            }
            Event::Replacement(rep) => {
                let Some(&i) = index.get(rep.member.as_str()) else {
                    unknown.insert(rep.member.clone());
                    continue;
                };
                let part = match &rep.part {
                    Some(p) => format!(" with {p}"),
                    None => String::new(),
                };
                acc[i] = Acc {
                    replaced: Some(with_note(format!("replaced{part} ({when})"), &rep.note)),
                    ..Acc::default()
                };
            }
            // A detection is not yet a load: it counts once confirmed (an
            // impact record), and blocks the pre-flight until then.
            Event::Preflight(_) | Event::Note(_) | Event::Detection(_) | Event::Dismissal(_) => {}
        }
    }
    (acc, unknown)
}

fn judge(id: &str, kind: MemberKind, a: Acc, rules: &Inspection) -> MemberHealth {
    let mut status = Status::Ok;
    let mut reasons = Vec::new();
    if !a.overloads.is_empty() {
        status = Status::ReplaceNow;
        reasons.extend(a.overloads);
    }
    let d = a.damage;
    let since = if a.replaced.is_some() {
        "since its replacement"
    } else {
        "in the log"
    };
    let impacts = if a.damaging == 1 { "impact" } else { "impacts" };
    let damage_words = format!(
        "Miner damage D = {d:.3} from {} {impacts} at or above the endurance level {:.2} {since}",
        a.damaging, rules.endurance_utilisation
    );
    if d >= rules.due_damage {
        status = status.max(Status::Due);
        reasons.push(format!(
            "{damage_words}: reached the due level {:.2}",
            rules.due_damage
        ));
    } else if d >= rules.inspect_damage {
        match &a.inspected_since_damage {
            Some(by) => reasons.push(format!(
                "inspected: {damage_words} reached the inspect level {:.2} (due at {:.2}), and an ok finding ({by}) was recorded after the impact that raised it",
                rules.inspect_damage, rules.due_damage
            )),
            None => {
                status = status.max(Status::Inspect);
                reasons.push(format!(
                    "{damage_words}: reached the inspect level {:.2} (due at {:.2}); record an `ok` finding once inspected",
                    rules.inspect_damage, rules.due_damage
                ));
            }
        }
    }
    if kind == MemberKind::String && a.counted >= rules.string_count_limit {
        status = status.max(Status::Due);
        reasons.push(format!(
            "{} impacts at or above {:.2} of capacity {since}: the limit is {}",
            a.counted, rules.string_count_utilisation, rules.string_count_limit
        ));
    }
    if !a.critical.is_empty() {
        status = status.max(Status::ReplaceNow);
        reasons.extend(a.critical);
    }
    if !a.serious.is_empty() {
        status = status.max(Status::Due);
        reasons.extend(a.serious);
    }
    if !a.minor.is_empty() {
        status = status.max(Status::Inspect);
        reasons.extend(a.minor);
    }
    if status == Status::Ok && d < rules.inspect_damage {
        reasons.push(format!(
            "{damage_words}, below the inspect level {:.2}; largest utilisation {:.2}",
            rules.inspect_damage, a.max_u
        ));
    }
    if let Some(ok) = a.last_ok {
        reasons.push(ok);
    }
    if let Some(r) = a.replaced {
        reasons.push(r);
    }
    MemberHealth {
        id: id.to_string(),
        kind,
        status,
        damage: d,
        max_utilisation: a.max_u,
        impacts: a.impacts,
        reasons,
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::logbook::{
        FindingEvent, ImpactEvent, ImpactSource, MemberLoadRecord, ReplacementEvent,
    };
    use crate::profile::Profile;

    fn demo() -> (Cage, Inspection) {
        let p = Profile::demo().unwrap();
        (Cage::from_profile(&p).unwrap(), p.inspection.clone())
    }

    fn rules() -> Inspection {
        Inspection {
            overload_utilisation: 1.0,
            endurance_utilisation: 0.2,
            inspect_damage: 0.3,
            due_damage: 0.7,
            sn_exponent_rod: 12.0,
            sn_exponent_string: 6.0,
            string_count_limit: 20,
            string_count_utilisation: 0.5,
            derate: Default::default(),
        }
    }

    fn rec(seq: u64, event: Event) -> Record {
        Record {
            seq,
            time: format!("2026-12-01T22:{:02}:00Z", seq % 60),
            operator: "ana".into(),
            event,
        }
    }

    fn impact(loads: &[(&str, f64)]) -> Event {
        Event::Impact(ImpactEvent {
            strike: StrikeRef::Face("F1".into()),
            input: crate::impact::ImpactInput::PeakAccel { g: 20.0 },
            source: ImpactSource::Entered,
            method: crate::impact::ImpactMethod::MeasuredAcceleration,
            force_n: 150.0,
            residual_n: 1e-9,
            face_displacement_m: 0.004,
            slack_strings: vec![],
            beyond_model: false,
            detection: None,
            members: loads
                .iter()
                .map(|(m, u)| MemberLoadRecord {
                    member: m.to_string(),
                    force_n: u * 300.0,
                    capacity_n: 300.0,
                    utilisation: *u,
                })
                .collect(),
            note: None,
        })
    }

    fn finding(m: &str, kind: FindingKind) -> Event {
        Event::Finding(FindingEvent {
            member: m.into(),
            kind,
            note: None,
        })
    }

    fn replace(m: &str) -> Event {
        Event::Replacement(ReplacementEvent {
            member: m.into(),
            part: Some("lot 7".into()),
            note: None,
        })
    }

    fn get<'a>(h: &'a HealthReport, id: &str) -> &'a MemberHealth {
        h.members.iter().find(|m| m.id == id).unwrap()
    }

    fn log(events: Vec<Event>) -> Vec<Record> {
        events
            .into_iter()
            .enumerate()
            .map(|(i, e)| rec(i as u64 + 1, e))
            .collect()
    }

    #[test]
    fn miner_two_level_block_matches_hand_calculation() {
        // Miner, "Cumulative damage in fatigue", J. Appl. Mech. 12, 1945:
        // D = sum n_i / N_i. Worked by hand for a string, k = 6, N(u) = u^-6:
        //   level 1: n = 10 impacts at u = 0.5, N = 0.5^-6 = 64,
        //            n/N = 10/64 = 0.15625
        //   level 2: n = 2 impacts at u = 0.8, N = 0.8^-6 = 3.814697..,
        //            n/N = 2 * 0.262144 = 0.524288
        //   D = 0.15625 + 0.524288 = 0.680538: at or above the inspect level
        //   0.3, below the due level 0.7. Two impacts at u = 0.1 are below
        //   the endurance level 0.2 and add nothing.
        let (cage, _) = demo();
        let mut ev = vec![impact(&[("S1", 0.5)]); 10];
        ev.push(impact(&[("S1", 0.8)]));
        ev.push(impact(&[("S1", 0.1)]));
        ev.push(impact(&[("S1", 0.8)]));
        ev.push(impact(&[("S1", 0.1)]));
        let h = assess(&log(ev), &cage, &rules());
        let s1 = get(&h, "S1");
        approx::assert_relative_eq!(s1.damage, 0.680538, epsilon = 1e-9);
        assert_eq!(s1.status, Status::Inspect);
        assert_eq!(s1.impacts, 14);
        assert_eq!(s1.max_utilisation, 0.8);
        assert!(s1.reasons[0].contains("D = 0.681"), "{:?}", s1.reasons);
        assert!(s1.reasons[0].contains("12 impacts"), "{:?}", s1.reasons);
        // One more impact at 0.6 adds 0.6^6 = 0.046656 (by hand): D = 0.727194, due.
        let mut ev2 = vec![impact(&[("S1", 0.5)]); 10];
        ev2.extend([
            impact(&[("S1", 0.8)]),
            impact(&[("S1", 0.8)]),
            impact(&[("S1", 0.6)]),
        ]);
        let s1 = get(&assess(&log(ev2), &cage, &rules()), "S1").clone();
        approx::assert_relative_eq!(s1.damage, 0.727194, epsilon = 1e-9);
        assert_eq!(s1.status, Status::Due);
    }

    #[test]
    fn rods_use_the_rod_exponent() {
        // k = 12 for rods: one impact at 0.9 adds 0.9^12 = 0.2824295 (by hand).
        let (cage, _) = demo();
        let h = assess(&log(vec![impact(&[("R1", -0.9)])]), &cage, &rules());
        approx::assert_relative_eq!(get(&h, "R1").damage, 0.282429536481, epsilon = 1e-9);
        assert_eq!(get(&h, "R1").status, Status::Ok);
    }

    #[test]
    fn overload_is_replace_now_whatever_else() {
        let (cage, _) = demo();
        let h = assess(
            &log(vec![
                impact(&[("R2", -1.0), ("S4", 0.99)]),
                finding("R2", FindingKind::Ok),
            ]),
            &cage,
            &rules(),
        );
        let r2 = get(&h, "R2");
        assert_eq!(r2.status, Status::ReplaceNow);
        // u = 1 is N = 1^-12 = 1 cycle: a whole life.
        assert_eq!(r2.damage, 1.0);
        assert!(r2.reasons[0].contains("overload level 1.00"));
        // 0.99 is not an overload, but 0.99^6 = 0.941480 is past due (by hand).
        assert_eq!(get(&h, "S4").status, Status::Due);
        assert_eq!(h.worst(), Status::ReplaceNow);
        assert_eq!(h.to_act_on()[0].id, "R2");
    }

    #[test]
    fn a_non_finite_utilisation_is_replace_now() {
        // Pins: a record whose utilisation is NaN or infinite is not skipped
        // but errs on the safe side: REPLACE NOW, with the record named.
        let (_, cage) = crate::cage::demo_cage();
        for bad in [f64::NAN, f64::INFINITY, f64::NEG_INFINITY] {
            let h = assess(
                &log(vec![impact(&[("R1", 0.1)]), impact(&[("S3", bad)])]),
                &cage,
                &rules(),
            );
            let s3 = get(&h, "S3");
            assert_eq!(s3.status, Status::ReplaceNow, "{bad}");
            assert!(
                s3.reasons[0].contains("record 2: utilisation not a number"),
                "{:?}",
                s3.reasons
            );
            assert!(s3.damage.is_finite() && s3.max_utilisation.is_finite());
            assert_eq!(get(&h, "R1").status, Status::Ok);
        }
    }

    #[test]
    fn count_rule_makes_a_string_due() {
        // 20 impacts at 0.5 (limit 20 at 0.5): D = 20/64 = 0.3125 alone
        // would only be inspect; the count makes it due.
        let (cage, _) = demo();
        let h = assess(&log(vec![impact(&[("S2", 0.5)]); 20]), &cage, &rules());
        let s2 = get(&h, "S2");
        assert_eq!(s2.status, Status::Due);
        assert!(s2.reasons.iter().any(|r| r.contains("the limit is 20")));
        // 19 impacts: D = 19/64 = 0.296875 (by hand), below inspect, and
        // the count is under the limit.
        let h = assess(&log(vec![impact(&[("S2", 0.5)]); 19]), &cage, &rules());
        assert_eq!(get(&h, "S2").status, Status::Ok);
    }

    #[test]
    fn findings_rules() {
        let (cage, _) = demo();
        // Cut or cracked: replace now (CI 2001-04; FAA AC 20-107B); frayed:
        // due. A later "ok" finding clears neither.
        for (kind, want) in [
            (FindingKind::Cut, Status::ReplaceNow),
            (FindingKind::Crack, Status::ReplaceNow),
            (FindingKind::Fray, Status::Due),
        ] {
            let h = assess(
                &log(vec![finding("S3", kind), finding("S3", FindingKind::Ok)]),
                &cage,
                &rules(),
            );
            assert_eq!(get(&h, "S3").status, want, "{kind:?}");
        }
        for kind in [FindingKind::Slack, FindingKind::LooseEnd] {
            let h = assess(&log(vec![finding("S3", kind)]), &cage, &rules());
            assert_eq!(get(&h, "S3").status, Status::Inspect);
            let h = assess(
                &log(vec![finding("S3", kind), finding("S3", FindingKind::Ok)]),
                &cage,
                &rules(),
            );
            assert_eq!(get(&h, "S3").status, Status::Ok);
            assert!(
                get(&h, "S3")
                    .reasons
                    .iter()
                    .any(|r| r.contains("inspected ok"))
            );
        }
        // ok clears nothing computed.
        let mut ev = vec![impact(&[("S1", 0.9)]); 3];
        ev.push(finding("S1", FindingKind::Ok));
        let h = assess(&log(ev), &cage, &rules());
        assert_eq!(get(&h, "S1").status, Status::Due);
    }

    #[test]
    fn an_ok_finding_after_the_damaging_impact_is_the_inspection() {
        // S1 at u = 0.9 once: 0.9^6 = 0.531441 (by hand), between the
        // inspect level 0.3 and the due level 0.7: INSPECT.
        let (cage, _) = demo();
        let h = assess(&log(vec![impact(&[("S1", 0.9)])]), &cage, &rules());
        assert_eq!(get(&h, "S1").status, Status::Inspect);
        // An ok finding after it: OK, "inspected".
        let ev = vec![impact(&[("S1", 0.9)]), finding("S1", FindingKind::Ok)];
        let h = assess(&log(ev), &cage, &rules());
        let s1 = get(&h, "S1");
        assert_eq!(s1.status, Status::Ok);
        assert!(s1.reasons[0].starts_with("inspected"), "{:?}", s1.reasons);
        // An ok finding before the damaging impact does not count.
        let ev = vec![finding("S1", FindingKind::Ok), impact(&[("S1", 0.9)])];
        let h = assess(&log(ev), &cage, &rules());
        assert_eq!(get(&h, "S1").status, Status::Inspect);
        // A further damaging impact after the inspection asks for another.
        let ev = vec![
            impact(&[("S1", 0.9)]),
            finding("S1", FindingKind::Ok),
            impact(&[("S1", 0.25)]),
        ];
        let h = assess(&log(ev), &cage, &rules());
        assert_eq!(get(&h, "S1").status, Status::Inspect);
        // An ok finding on another member inspects only that one.
        let ev = vec![impact(&[("S1", 0.9)]), finding("S2", FindingKind::Ok)];
        let h = assess(&log(ev), &cage, &rules());
        assert_eq!(get(&h, "S1").status, Status::Inspect);
    }

    #[test]
    fn replacement_resets_the_member_only() {
        let (cage, _) = demo();
        let records_upto = |n: usize| {
            log(vec![
                impact(&[("R1", -1.2), ("S1", 0.9)]),
                finding("R1", FindingKind::Crack),
                replace("R1"),
                impact(&[("R1", -0.3), ("S1", 0.3)]),
            ])[..n]
                .to_vec()
        };
        let h = assess(&records_upto(4), &cage, &rules());
        let before = assess(&records_upto(2), &cage, &rules());
        // 1.2^12 = 8.9 would be more than a life: capped at 1 (N >= 1 cycle).
        assert_eq!(get(&before, "R1").damage, 1.0);
        assert_eq!(get(&before, "R1").status, Status::ReplaceNow);
        let r1 = get(&h, "R1");
        assert_eq!(r1.status, Status::Ok);
        assert_eq!(r1.impacts, 1);
        approx::assert_relative_eq!(r1.damage, 0.3f64.powi(12), epsilon = 1e-15);
        assert_eq!(r1.max_utilisation, 0.3);
        assert!(r1.reasons.iter().any(|r| r.contains("replaced with lot 7")));
        assert_eq!(get(&h, "S1").impacts, 2);
        assert_eq!(get(&h, "S1").status, Status::Inspect);
    }

    #[test]
    fn unknown_members_are_warned_about_not_fatal() {
        let (cage, _) = demo();
        let h = assess(&log(vec![impact(&[("S99", 0.9)])]), &cage, &rules());
        assert_eq!(h.warnings.len(), 1);
        assert_eq!(h.worst(), Status::Ok);
    }

    #[test]
    fn every_status_has_reasons_and_the_result_is_deterministic() {
        let (cage, _) = demo();
        let records = log(vec![
            impact(&[("S1", 0.7), ("R3", -0.95), ("S5", 0.25)]),
            finding("S6", FindingKind::Slack),
            impact(&[("S1", 0.75), ("R3", -0.5)]),
            replace("S5"),
        ]);
        let a = assess(&records, &cage, &rules());
        // Through the file format and back: the same health, to the bit.
        let mut text = crate::logbook::encode_header("v");
        for r in &records {
            text.push_str(&crate::logbook::encode_record(r).unwrap());
        }
        let reread: Vec<Record> = crate::logbook::parse(text.as_bytes())
            .unwrap()
            .records
            .into_iter()
            .map(|(_, r)| r)
            .collect();
        let b = assess(&reread, &cage, &rules());
        assert_eq!(a, b);
        assert_eq!(
            serde_json::to_string(&a).unwrap(),
            serde_json::to_string(&b).unwrap()
        );
        assert!(a.members.iter().all(|m| !m.reasons.is_empty()));
        let before = assess(&records[..1], &cage, &rules());
        let ch = changes(&before, &a);
        assert!(ch.iter().any(|c| c.id == "S6" && c.to == Status::Inspect));
    }
}
