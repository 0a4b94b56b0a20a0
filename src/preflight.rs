//! The pre-flight check as a core piece: the profile's checklist evaluated
//! against the live watch state and the cage log, with typed results
//! (pass, fail, waiting for data, hand item) and the detail in words; and
//! the sign-off, which refuses while anything blocks it. The screens, the
//! command line and the reports only present what this module decides.
//!
//! A pre-flight that passes over a crash is the worst failure this tool can
//! have, so the rules lean to failing:
//! - The **cage log** item is always on the list (added when the profile
//!   binds none). It fails while a detected impact is pending (confirmed by
//!   nobody, dismissed by nobody), while a member is DUE or REPLACE NOW, and
//!   while a member is at INSPECT (an `ok` finding after the event that put
//!   it there returns it to OK, src/health.rs). A log that cannot be read,
//!   or has damaged records, fails it too. A pending detection, a member at
//!   REPLACE NOW (the cage is grounded until it is replaced), torn records
//!   waiting in the side file (they may be either) or an unreadable log
//!   cannot be overridden.
//! - Live items (take-off face, link fresh, battery, signing) are
//!   *waiting*, never passing, while there is no data.
//! - Sign-off is refused while a hand item is unticked, or an automatic item
//!   that did not pass (failing or waiting) has no override reason.
//!
//! To add an automatic check: a variant of [`Check`], its arm in
//! `evaluate_check`, and (for checks the profile cannot name) where it joins
//! the list in [`evaluate`]. That is the one place.

use crate::cage::Cage;
use crate::health::{self, Status};
use crate::logbook::{Event, ItemResult, PreflightEvent, PreflightItemResult, Record, detection};
use crate::profile::{AutoCheck, Profile};
use crate::tracker::{WatchState, WatchStateKind};
use serde::Serialize;
use std::collections::{BTreeMap, BTreeSet};

/// The text of the cage-log item when the profile has none of its own.
pub const CAGE_LOG_TEXT: &str = "Cage log clear: no pending detection, no member DUE or REPLACE NOW, no member at INSPECT without an ok finding since the event that put it there";
/// The text of the signing item.
pub const SIGNING_TEXT: &str = "Telemetry signed (MAVLink 2 signing key in use)";
/// The text of the remaining-margin item, before the minimum speed.
pub const MARGIN_TEXT: &str = "The cage takes at least";
/// The text of the informational last-pre-flight item.
pub const LAST_PREFLIGHT_TEXT: &str = "Last pre-flight sign-off (for information)";

/// An automatic check.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "snake_case")]
pub enum Check {
    /// No pending detection; no member at INSPECT or worse.
    CageLog,
    /// Resting on a take-off face.
    TakeoffFace,
    /// Fresh data on the link.
    LinkFresh,
    /// Battery at or above the profile's minimum.
    Battery,
    /// Signed telemetry, when asked for.
    Signing,
    /// The cage can still take the profile's `min_margin_speed_m_per_s` on
    /// every face (when the profile sets it).
    Margin,
    /// When and by whom the previous pre-flight was signed (never blocks).
    LastPreflight,
}

impl Check {
    /// The check a profile item names.
    pub fn from_profile(c: AutoCheck) -> Check {
        match c {
            AutoCheck::NoMemberDue => Check::CageLog,
            AutoCheck::OnTakeoffFace => Check::TakeoffFace,
            AutoCheck::LinkFresh => Check::LinkFresh,
            AutoCheck::Battery => Check::Battery,
        }
    }
}

/// Automatic or by hand.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum ItemKind {
    /// Evaluated by the tool.
    Auto,
    /// Checked and ticked by the operator.
    Hand,
}

/// The result of one item.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Outcome {
    /// Checked and fine.
    Pass,
    /// Checked and not fine.
    Fail,
    /// No data to decide on (counts as not passing).
    Waiting,
    /// An item the operator checks by hand.
    Hand,
}

impl Outcome {
    /// The result as stored in a `preflight` record.
    pub fn stored(self) -> ItemResult {
        match self {
            Outcome::Pass => ItemResult::Pass,
            Outcome::Fail => ItemResult::Fail,
            Outcome::Waiting => ItemResult::Waiting,
            Outcome::Hand => ItemResult::Hand,
        }
    }

    /// `pass`, `fail`, `waiting`, `hand`.
    pub fn name(self) -> &'static str {
        self.stored().name()
    }
}

/// One item evaluated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct ItemEval {
    /// Its number on the list, from 1.
    pub n: u32,
    /// What the crew checks.
    pub text: String,
    /// Automatic or by hand.
    pub kind: ItemKind,
    /// Which check, for automatic items.
    #[serde(skip)]
    pub check: Option<Check>,
    /// The result.
    pub result: Outcome,
    /// Why, in words.
    pub detail: String,
    /// Whether an override reason may let it sign while it does not pass
    /// (false for a pending detection, a member at REPLACE NOW, records
    /// set aside and an unreadable log).
    #[serde(skip)]
    pub can_override: bool,
}

impl ItemEval {
    /// An automatic item that did not pass (and so needs an override).
    pub fn blocks(&self) -> bool {
        self.kind == ItemKind::Auto && matches!(self.result, Outcome::Fail | Outcome::Waiting)
    }
}

/// The cage log as the evaluation sees it.
#[derive(Debug, Clone, Copy)]
pub enum LogInput<'a> {
    /// The log was read.
    Read {
        /// Its records.
        records: &'a [Record],
        /// The log file, for the detail.
        path: &'a str,
        /// There was no file yet (nothing recorded).
        new_file: bool,
        /// Damaged records skipped, in words (damage may be understated).
        trouble: Option<&'a str>,
        /// Torn records wait in the side file: one may be a crash or a
        /// cut member, so this trouble cannot be overridden.
        held_aside: bool,
    },
    /// The log could not be read, with the reason.
    Unreadable(&'a str),
}

/// Everything the evaluation looks at.
#[derive(Debug, Clone, Copy)]
pub struct Inputs<'a> {
    /// The vehicle's profile (checklist, minimum battery, inspection rules).
    pub profile: &'a Profile,
    /// Its cage.
    pub cage: &'a Cage,
    /// The live state; None when no link was listened to.
    pub live: Option<&'a WatchState>,
    /// The cage log.
    pub log: LogInput<'a>,
    /// Signed telemetry is asked for: Some(whether a key is in use).
    pub signing: Option<bool>,
    /// The remaining margin of the cage, when it has been computed (the
    /// margin item waits without it).
    pub margin: Option<&'a MarginSummary>,
}

/// What the margin item needs of the remaining-margin computation.
#[derive(Debug, Clone, PartialEq)]
pub struct MarginSummary {
    /// The face that takes the lowest impact speed.
    pub weakest_face: String,
    /// That speed, m/s (0 when grounded).
    pub speed_m_per_s: f64,
    /// Members counted as failed, which ground the cage (empty: none).
    pub grounded_by: Vec<String>,
}

/// The checklist evaluated.
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Evaluation {
    /// The vehicle id.
    pub vehicle: String,
    /// Every item, in order.
    pub items: Vec<ItemEval>,
}

impl Evaluation {
    /// What stops `sign --tick all` with no override, one line per item.
    pub fn blocking(&self) -> Vec<String> {
        self.items
            .iter()
            .filter(|i| i.blocks())
            .map(|i| {
                let no = if i.can_override {
                    ""
                } else {
                    " (cannot be overridden)"
                };
                format!(
                    "{}. {}: {} {}{no}",
                    i.n,
                    i.text,
                    i.result.name().to_uppercase(),
                    i.detail
                )
            })
            .collect()
    }

    /// Whether ticking every hand item, with no override, would sign now.
    pub fn can_sign(&self) -> bool {
        !self.items.iter().any(ItemEval::blocks)
    }

    /// The numbers of the hand items.
    pub fn hand_items(&self) -> Vec<u32> {
        self.items
            .iter()
            .filter(|i| i.kind == ItemKind::Hand)
            .map(|i| i.n)
            .collect()
    }

    /// The item with this number.
    pub fn item(&self, n: u32) -> Option<&ItemEval> {
        self.items.iter().find(|i| i.n == n)
    }

    /// The item this automatic check decides, if the list has one.
    pub fn checked(&self, check: Check) -> Option<&ItemEval> {
        self.items.iter().find(|i| i.check == Some(check))
    }
}

/// Evaluate the checklist.
pub fn evaluate(inp: &Inputs) -> Evaluation {
    evaluate_with(inp, &LogChecks::of(inp))
}

/// The checks that look only at the cage log (whether it is clear, the
/// last sign-off), worked out once per reading of the log. The screens
/// evaluate the list at every step of a live link, up to some forty a
/// second; working out every member's health from a season's records at
/// each step cost more than all the rest of the screens (600 records: the
/// screens under a 1 kHz feed went from 2% to 4% of a core).
#[derive(Debug, Clone, PartialEq)]
pub struct LogChecks {
    cage_log: (Outcome, String, bool),
    last_preflight: (Outcome, String, bool),
}

impl LogChecks {
    /// The log checks for `inp`'s log, profile and cage (its live state,
    /// signing and margin are not looked at).
    pub fn of(inp: &Inputs) -> LogChecks {
        LogChecks {
            cage_log: cage_log(inp),
            last_preflight: last_preflight(inp),
        }
    }

    /// Whether `eval`, a checklist shown from some earlier reading of the
    /// log, gives its cage log item the verdict these checks give (its
    /// result and whether it may be overridden; the wording may differ,
    /// such as a record count). A sign-off is refused when it does not: a
    /// record written since that reading (a finding that made a member
    /// REPLACE NOW) must not be signed over by a checklist that still says
    /// the log is clear.
    pub fn agree_with(&self, eval: &Evaluation) -> bool {
        let (result, _, can_override) = &self.cage_log;
        eval.checked(Check::CageLog)
            .is_some_and(|i| i.result == *result && i.can_override == *can_override)
    }
}

/// [`evaluate`], with the log checks already worked out by
/// [`LogChecks::of`] from the same log, profile and cage as `inp`'s (the
/// caller keeps them with the reading of the log they came from).
pub fn evaluate_with(inp: &Inputs, log_checks: &LogChecks) -> Evaluation {
    let mut list: Vec<(String, Option<Check>)> = inp
        .profile
        .preflight
        .items
        .iter()
        .map(|it| (it.text.clone(), it.check.map(Check::from_profile)))
        .collect();
    // Checks that are always on the list, whatever the profile says.
    let has = |list: &[(String, Option<Check>)], c: Check| list.iter().any(|(_, k)| *k == Some(c));
    if !has(&list, Check::CageLog) {
        list.push((CAGE_LOG_TEXT.to_string(), Some(Check::CageLog)));
    }
    if inp.signing.is_some() && !has(&list, Check::Signing) {
        list.push((SIGNING_TEXT.to_string(), Some(Check::Signing)));
    }
    if let Some(min) = inp.profile.preflight.min_margin_speed_m_per_s {
        list.push((
            format!("{MARGIN_TEXT} {min:.1} m/s on every face"),
            Some(Check::Margin),
        ));
    }
    list.push((LAST_PREFLIGHT_TEXT.to_string(), Some(Check::LastPreflight)));
    let items = list
        .into_iter()
        .enumerate()
        .map(|(i, (text, check))| {
            let n = i as u32 + 1;
            match check {
                None => ItemEval {
                    n,
                    text,
                    kind: ItemKind::Hand,
                    check: None,
                    result: Outcome::Hand,
                    detail: "check by hand, then tick".to_string(),
                    can_override: false,
                },
                Some(c) => {
                    let (result, detail, can_override) = evaluate_check(c, inp, log_checks);
                    ItemEval {
                        n,
                        text,
                        kind: ItemKind::Auto,
                        check: Some(c),
                        result,
                        detail,
                        can_override,
                    }
                }
            }
        })
        .collect();
    Evaluation {
        vehicle: inp.profile.vehicle.id.clone(),
        items,
    }
}

/// One automatic check: result, detail, and whether it may be overridden.
fn evaluate_check(c: Check, inp: &Inputs, log_checks: &LogChecks) -> (Outcome, String, bool) {
    match c {
        Check::CageLog => log_checks.cage_log.clone(),
        Check::TakeoffFace => takeoff_face(inp),
        Check::LinkFresh => link_fresh(inp),
        Check::Battery => battery(inp),
        Check::Signing => signing(inp),
        Check::Margin => margin(inp),
        Check::LastPreflight => log_checks.last_preflight.clone(),
    }
}

fn cage_log(inp: &Inputs) -> (Outcome, String, bool) {
    let (records, path, new_file, trouble, held_aside) = match inp.log {
        LogInput::Unreadable(why) => {
            return (
                Outcome::Fail,
                format!("cannot read the cage log ({why}): a crash may be unrecorded"),
                false,
            );
        }
        LogInput::Read {
            records,
            path,
            new_file,
            trouble,
            held_aside,
        } => (records, path, new_file, trouble, held_aside),
    };
    let pending = detection::pending(records);
    let h = health::assess(records, inp.cage, &inp.profile.inspection);
    let mut problems = Vec::new();
    if !pending.is_empty() {
        let list: Vec<String> = pending
            .iter()
            .map(|p| format!("#{} ({:.1} g on {})", p.seq, p.peak_g, p.face))
            .collect();
        let noun = if list.len() == 1 {
            "detection"
        } else {
            "detections"
        };
        problems.push(format!(
            "{noun} {} pending: confirm or dismiss first",
            list.join(", ")
        ));
    }
    for (status, words) in [
        (Status::ReplaceNow, "REPLACE NOW (grounded until replaced)"),
        (Status::Due, "DUE"),
        (Status::Inspect, "at INSPECT with no ok finding since"),
    ] {
        let ids: Vec<&str> = h
            .members
            .iter()
            .filter(|m| m.status == status)
            .map(|m| m.id.as_str())
            .collect();
        if !ids.is_empty() {
            problems.push(format!("{} {words}", ids.join(" ")));
        }
    }
    if let Some(t) = trouble {
        problems.push(t.to_string());
    }
    if !problems.is_empty() {
        // A pending detection must be confirmed or dismissed, a member at
        // REPLACE NOW grounds the cage until it is replaced, and records
        // set aside may hold either: no reason typed at the sign-off
        // stands in for any of them.
        let grounded = h.members.iter().any(|m| m.status == Status::ReplaceNow);
        return (
            Outcome::Fail,
            problems.join("; "),
            pending.is_empty() && !grounded && !held_aside,
        );
    }
    if new_file {
        return (
            Outcome::Pass,
            format!("no records yet in {path}: nothing is recorded for this vehicle there"),
            true,
        );
    }
    (
        Outcome::Pass,
        format!(
            "no pending detection, no member at INSPECT or worse ({} records)",
            records.len()
        ),
        true,
    )
}

/// The live state, or why there is none (waiting).
fn live<'a>(inp: &Inputs<'a>) -> Result<&'a WatchState, String> {
    match inp.live {
        None => Err("no link listened to".to_string()),
        Some(st) if st.link.age_ms.is_none() => Err("no data yet".to_string()),
        Some(st) if st.state == WatchStateKind::Stale => Err(format!(
            "data stale ({:.1} s old)",
            st.link.age_ms.unwrap_or(0) as f64 / 1000.0
        )),
        Some(st) => Ok(st),
    }
}

fn takeoff_face(inp: &Inputs) -> (Outcome, String, bool) {
    let st = match live(inp) {
        Ok(st) => st,
        Err(why) => return (Outcome::Waiting, why, true),
    };
    let takeoff = inp
        .cage
        .takeoff_faces(&inp.profile.righting.takeoff_faces)
        .unwrap_or_default();
    let face = st.face.clone().unwrap_or_else(|| "no face".to_string());
    match (st.state, st.face_index) {
        (WatchStateKind::Resting, Some(f)) if takeoff.contains(&f) => {
            (Outcome::Pass, format!("resting on {face}"), true)
        }
        (WatchStateKind::Resting, _) => (
            Outcome::Fail,
            format!("resting on {face}, not a take-off face"),
            true,
        ),
        (other, _) => (
            Outcome::Fail,
            format!(
                "not at rest on a face ({}, nearest {face})",
                kind_name(other)
            ),
            true,
        ),
    }
}

fn kind_name(k: WatchStateKind) -> String {
    serde_json::to_value(k)
        .ok()
        .and_then(|v| v.as_str().map(str::to_string))
        .unwrap_or_else(|| format!("{k:?}").to_lowercase())
}

fn link_fresh(inp: &Inputs) -> (Outcome, String, bool) {
    match inp.live {
        None => (Outcome::Waiting, "no link listened to".to_string(), true),
        Some(st) if st.link.age_ms.is_none() => (Outcome::Waiting, "no data yet".to_string(), true),
        Some(st) if st.state == WatchStateKind::Stale => (
            Outcome::Fail,
            format!(
                "data stale: last sample {:.1} s ago",
                st.link.age_ms.unwrap_or(0) as f64 / 1000.0
            ),
            true,
        ),
        Some(st) => (
            Outcome::Pass,
            format!("{:.0} Hz on {}", st.link.rate_hz, st.link.source),
            true,
        ),
    }
}

fn battery(inp: &Inputs) -> (Outcome, String, bool) {
    let min = inp.profile.preflight.min_battery_v;
    let st = match live(inp) {
        Ok(st) => st,
        Err(why) => return (Outcome::Waiting, why, true),
    };
    match st.battery_v {
        None => (
            Outcome::Waiting,
            "the link gives no battery voltage".to_string(),
            true,
        ),
        Some(v) if v >= min => (
            Outcome::Pass,
            format!("{v:.2} V (minimum {min:.2} V)"),
            true,
        ),
        Some(v) => (
            Outcome::Fail,
            format!("{v:.2} V is below the minimum {min:.2} V"),
            true,
        ),
    }
}

fn signing(inp: &Inputs) -> (Outcome, String, bool) {
    match inp.signing {
        None | Some(false) => (
            Outcome::Fail,
            "signed telemetry is asked for, but no signing key is in use".to_string(),
            true,
        ),
        Some(true) => match live(inp) {
            Err(why) => (Outcome::Waiting, why, true),
            Ok(st) => (
                Outcome::Pass,
                format!(
                    "key in use: {} frames accepted, {} refused",
                    st.link.frames, st.link.rejected
                ),
                true,
            ),
        },
    }
}

fn margin(inp: &Inputs) -> (Outcome, String, bool) {
    let min = inp
        .profile
        .preflight
        .min_margin_speed_m_per_s
        .unwrap_or(0.0);
    match inp.margin {
        None => (
            Outcome::Waiting,
            "the remaining margin has not been computed".to_string(),
            true,
        ),
        Some(m) if !m.grounded_by.is_empty() => (
            Outcome::Fail,
            format!("grounded: {} count as failed", m.grounded_by.join(" ")),
            true,
        ),
        Some(m) if m.speed_m_per_s < min => (
            Outcome::Fail,
            format!(
                "{} takes only {:.1} m/s (minimum {min:.1} m/s)",
                m.weakest_face, m.speed_m_per_s
            ),
            true,
        ),
        Some(m) => (
            Outcome::Pass,
            format!(
                "weakest face {} takes {:.1} m/s (minimum {min:.1} m/s)",
                m.weakest_face, m.speed_m_per_s
            ),
            true,
        ),
    }
}

fn last_preflight(inp: &Inputs) -> (Outcome, String, bool) {
    let detail = match inp.log {
        LogInput::Unreadable(_) => "unknown: the cage log cannot be read".to_string(),
        LogInput::Read { records, .. } => match last_sign_off(records) {
            Some((r, _)) => format!("signed by {} at {} (#{})", r.operator, r.time, r.seq),
            None => "none recorded in this log".to_string(),
        },
    };
    (Outcome::Pass, detail, true)
}

/// What the operator gives at sign-off.
#[derive(Debug, Clone, Default, PartialEq)]
pub struct SignOff {
    /// Hand items ticked, by number.
    pub ticked: BTreeSet<u32>,
    /// Override reasons for automatic items that do not pass, by number.
    pub overrides: BTreeMap<u32, String>,
    /// Free text.
    pub note: Option<String>,
}

impl SignOff {
    /// Every hand item of `eval` ticked (`--tick all`).
    pub fn tick_all(eval: &Evaluation) -> SignOff {
        SignOff {
            ticked: eval.hand_items().into_iter().collect(),
            ..SignOff::default()
        }
    }

    /// Tick a hand item, or untick it when ticked (the screen's key).
    pub fn toggle(&mut self, n: u32) {
        if !self.ticked.remove(&n) {
            self.ticked.insert(n);
        }
    }
}

/// The sign-off was refused; nothing may be written.
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
#[error("pre-flight not signed: {}", .reasons.join("; "))]
pub struct Refused {
    /// Every reason, one per item.
    pub reasons: Vec<String>,
}

/// The `preflight` record for a sign-off, or every reason it is refused.
pub fn sign(eval: &Evaluation, s: &SignOff) -> Result<PreflightEvent, Refused> {
    let mut reasons = Vec::new();
    for &n in &s.ticked {
        match eval.item(n) {
            Some(i) if i.kind == ItemKind::Hand => {}
            Some(_) => reasons.push(format!(
                "item {n} is automatic: it cannot be ticked (override it with a reason if it does not pass)"
            )),
            None => reasons.push(format!(
                "there is no item {n} (items are 1..{})",
                eval.items.len()
            )),
        }
    }
    for (&n, why) in &s.overrides {
        match eval.item(n) {
            Some(i) if !i.blocks() => reasons.push(format!(
                "item {n} needs no override (it is {})",
                i.result.name()
            )),
            Some(_) if why.trim().is_empty() => {
                reasons.push(format!("item {n}: the override reason is empty"))
            }
            Some(_) => {}
            None => reasons.push(format!("there is no item {n} to override")),
        }
    }
    for i in &eval.items {
        match i.kind {
            ItemKind::Hand if !s.ticked.contains(&i.n) => {
                reasons.push(format!("{}. {}: not ticked", i.n, i.text))
            }
            ItemKind::Auto if i.blocks() && !i.can_override => reasons.push(format!(
                "{}. {}: {} {} (cannot be overridden)",
                i.n,
                i.text,
                i.result.name().to_uppercase(),
                i.detail
            )),
            ItemKind::Auto if i.blocks() && !s.overrides.contains_key(&i.n) => {
                reasons.push(format!(
                    "{}. {}: {} {} (give an override reason to sign all the same)",
                    i.n,
                    i.text,
                    i.result.name().to_uppercase(),
                    i.detail
                ))
            }
            _ => {}
        }
    }
    if !reasons.is_empty() {
        return Err(Refused { reasons });
    }
    let items = eval
        .items
        .iter()
        .map(|i| PreflightItemResult {
            n: i.n,
            kind: Some(
                match i.kind {
                    ItemKind::Auto => "auto",
                    ItemKind::Hand => "hand",
                }
                .to_string(),
            ),
            text: i.text.clone(),
            result: i.result.stored(),
            detail: Some(i.detail.clone()),
            ticked: (i.kind == ItemKind::Hand).then(|| s.ticked.contains(&i.n)),
            override_reason: s.overrides.get(&i.n).map(|r| r.trim().to_string()),
        })
        .collect();
    Ok(PreflightEvent {
        items,
        signed_off: true,
        note: s.note.clone().filter(|n| !n.trim().is_empty()),
    })
}

/// Why a sign-off was not recorded.
#[derive(Debug, thiserror::Error)]
pub enum SignError {
    /// Refused: the reasons; nothing was written.
    #[error(transparent)]
    Refused(#[from] Refused),
    /// The log could not be written.
    #[error(transparent)]
    Store(#[from] crate::logbook::StoreError),
}

/// Sign and record in one go: the `preflight` record is appended only when
/// the sign-off is not refused. Evaluate from `book.records()` with the log
/// open for writing, so no record slips in between.
pub fn sign_and_record(
    book: &mut crate::logbook::Logbook,
    operator: &str,
    time: jiff::Timestamp,
    eval: &Evaluation,
    s: &SignOff,
) -> Result<Record, SignError> {
    if operator.trim().is_empty() {
        return Err(Refused {
            reasons: vec!["no operator name: the sign-off must say who signed".to_string()],
        }
        .into());
    }
    let event = sign(eval, s)?;
    Ok(book.append(operator, time, Event::Preflight(event))?)
}

/// The latest signed pre-flight in the log.
pub fn last_sign_off(records: &[Record]) -> Option<(&Record, &PreflightEvent)> {
    records.iter().rev().find_map(|r| match &r.event {
        Event::Preflight(p) if p.signed_off => Some((r, p)),
        _ => None,
    })
}

/// Crashes the log knows of, by the sequence number of their first record:
/// impacts entered by hand, and detections not dismissed (a confirmed
/// detection and its impact are one crash).
fn crashes(records: &[Record]) -> Vec<u64> {
    let dismissed: BTreeSet<u64> = records
        .iter()
        .filter_map(|r| match &r.event {
            Event::Dismissal(d) => Some(d.detection),
            _ => None,
        })
        .collect();
    records
        .iter()
        .filter_map(|r| match &r.event {
            Event::Impact(i) if i.detection.is_none() => Some(r.seq),
            Event::Detection(_) if !dismissed.contains(&r.seq) => Some(r.seq),
            _ => None,
        })
        .collect()
}

/// Plain sentences about flights without a sign-off: a crash after another
/// crash with no sign-off between them (the cage was flown unsigned), and
/// no sign-off since the latest crash. Empty when all is in order.
pub fn sign_off_gaps(records: &[Record]) -> Vec<String> {
    let signed: Vec<u64> = records
        .iter()
        .filter_map(|r| match &r.event {
            Event::Preflight(p) if p.signed_off => Some(r.seq),
            _ => None,
        })
        .collect();
    let signed_between = |a: u64, b: u64| signed.iter().any(|&s| s > a && s < b);
    let crashes = crashes(records);
    let mut out = Vec::new();
    for w in crashes.windows(2) {
        if !signed_between(w[0], w[1]) {
            out.push(format!(
                "The cage was flown with no pre-flight sign-off after crash #{}: crash #{} followed it unsigned.",
                w[0], w[1]
            ));
        }
    }
    if let Some(&last) = crashes.last()
        && !signed_between(last, u64::MAX)
    {
        out.push(format!(
            "No pre-flight sign-off since the latest crash (#{last}): the cage must not fly before one."
        ));
    }
    out
}

#[cfg(test)]
mod tests;
