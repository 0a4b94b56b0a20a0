//! The cage log: one append-only, human-readable file per vehicle, holding
//! impacts, inspection findings, replacements, pre-flight sign-offs and
//! notes. Member health ([`crate::health`]) is computed from it, so the log
//! is the single source of truth about the cage's history.
//!
//! # File format, version 2 (a contract: stable, documented in docs/logbook.md)
//!
//! The file is UTF-8 text, one line per item, each line ended by `\n` (a
//! reader also takes `\r\n`, and a last line without its end):
//!
//! ```text
//! cagehand-logbook format=2 vehicle=kestrel-demo
//! {"seq":1,"time":"2026-12-01T22:40:00.000Z","operator":"ana","event":"note","text":"new cage"} prev=<64 hex> sha256=<64 hex>
//! {"seq":2,...,"event":"impact",...} prev=<64 hex> sha256=<64 hex>
//! ```
//!
//! - Line 1, the header: the word `cagehand-logbook`, then `format=N` (this
//!   program writes 2, reads 1 and 2, and refuses a larger N rather than
//!   misreading it), then `vehicle=ID` (the profile's `vehicle.id`).
//! - Every further line is one record: a JSON object, ` prev=` and the
//!   chain value before it, ` sha256=` and the SHA-256 of every byte before
//!   ` sha256=`. The records form a hash chain ([`chain`](mod@chain)): an
//!   edit, deletion, reordering or duplicate shows at the first record it
//!   touches, and the chain head printed by every report anchors the newest.
//!   A format-1 line is the JSON, ` sha256=` and the SHA-256 of the JSON
//!   alone; a format-1 log is continued with chained records.
//! - Every record has `seq` (1, 2, .. in file order), `time` (UTC, RFC 3339,
//!   e.g. `2026-12-01T22:40:00.123Z`), `operator` and `event`, one of
//!   `impact`, `finding`, `replacement`, `preflight`, `note`, `detection`,
//!   `dismissal`, with the fields of [`ImpactEvent`], [`FindingEvent`],
//!   [`ReplacementEvent`], [`PreflightEvent`], [`NoteEvent`],
//!   [`DetectionEvent`] and [`DismissalEvent`]. Readers ignore fields they
//!   do not know, so later versions may add fields without a new format
//!   number.
//! - A `detection` is an impact the live feed detected, written at once; an
//!   `impact` with `"detection": SEQ` confirms it, a `dismissal` naming it
//!   dismisses it; until one of them is written it is *pending*
//!   ([`detection::pending`]).
//! - Empty lines are ignored.
//!
//! Durability: a record is written with one `write` of the whole line (the
//! header too, for a new file), then `fsync` (`sync_data`), before the
//! command reports success; a failed write is cut back to the old length.
//! An advisory lock on the file keeps two writers apart. A torn *last* line
//! (no line end and a failing hash: a crash mid-write) is moved to a side
//! file `<vehicle>.cagelog.set-aside` and reported; any other line that
//! does not check stays, is reported with its line number every time and
//! skipped, and the rest loads (whole
//! records inside a damaged line, e.g. two lines run together by a damaged
//! newline, are recovered by their checksums).
//!
//! The parsing and encoding are pure ([`format`](mod@format), [`chain`](mod@chain));
//! the file handling is in [`store`](mod@store).

use crate::impact::{ImpactInput, ImpactMethod};
use serde::{Deserialize, Serialize};

pub mod chain;
pub mod detection;
pub mod follow;
pub mod format;
pub mod store;

pub use chain::{ChainHead, Integrity, Issue, IssueKind};
pub use detection::{DetectionEvent, DismissalEvent, Pending, pending};
pub use format::{FormatError, Parsed, TornTail, encode_header, encode_log, encode_record, parse};
pub use store::{
    Access, Logbook, OpenReport, SIDE_FILE_SUFFIX, SetAside, StoreError, log_file_name,
};

/// The format version this program writes, and the highest it reads
/// (format 1 logs are read and continued; see docs/logbook.md).
pub const FORMAT_VERSION: u32 = 2;

/// One record of the log: when, who, what.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct Record {
    /// Sequence number: 1 for the first record, one more for each after.
    pub seq: u64,
    /// UTC time, RFC 3339.
    pub time: String,
    /// Who recorded it.
    pub operator: String,
    /// What happened.
    #[serde(flatten)]
    pub event: Event,
}

/// The things the log records.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
#[serde(tag = "event", rename_all = "snake_case")]
pub enum Event {
    /// A collision, with the statics analysis of it.
    Impact(ImpactEvent),
    /// What an inspection found on one member.
    Finding(FindingEvent),
    /// A member was replaced.
    Replacement(ReplacementEvent),
    /// A pre-flight checklist was run and signed.
    Preflight(PreflightEvent),
    /// Free text.
    Note(NoteEvent),
    /// An impact the live feed detected, awaiting confirmation or dismissal.
    Detection(DetectionEvent),
    /// A detection the crew judged not to be a crash, with the reason.
    Dismissal(DismissalEvent),
}

impl Event {
    /// The event's name as written in the file.
    pub fn name(&self) -> &'static str {
        match self {
            Event::Impact(_) => "impact",
            Event::Finding(_) => "finding",
            Event::Replacement(_) => "replacement",
            Event::Preflight(_) => "preflight",
            Event::Note(_) => "note",
            Event::Detection(_) => "detection",
            Event::Dismissal(_) => "dismissal",
        }
    }

    /// A one-line summary for listings and reports.
    pub fn summary(&self) -> String {
        let with_note = |s: String, note: &Option<String>| match note {
            Some(n) if !n.is_empty() => format!("{s}: {n}"),
            _ => s,
        };
        match self {
            Event::Impact(i) => {
                let worst = i
                    .members
                    .iter()
                    .filter(|m| m.utilisation.is_finite())
                    .max_by(|a, b| a.utilisation.abs().total_cmp(&b.utilisation.abs()));
                let worst = match worst {
                    Some(m) => format!(", worst {} at {:.2}", m.member, m.utilisation.abs()),
                    None => String::new(),
                };
                let confirms = match i.detection {
                    Some(seq) => format!(", confirms detection #{seq}"),
                    None => String::new(),
                };
                with_note(
                    format!(
                        "impact on {} ({}), {:.0} N by {}{}{confirms}",
                        i.strike, i.input, i.force_n, i.method, worst
                    ),
                    &i.note,
                )
            }
            Event::Finding(f) => with_note(format!("{} {}", f.member, f.kind.name()), &f.note),
            Event::Replacement(r) => {
                let part = match &r.part {
                    Some(p) => format!(" with {p}"),
                    None => String::new(),
                };
                with_note(format!("{} replaced{part}", r.member), &r.note)
            }
            Event::Preflight(p) => {
                let failed = p
                    .items
                    .iter()
                    .filter(|i| i.result == ItemResult::Fail)
                    .count();
                let overridden = p
                    .items
                    .iter()
                    .filter(|i| i.override_reason.is_some())
                    .count();
                let overridden = if overridden > 0 {
                    format!(", {overridden} overridden")
                } else {
                    String::new()
                };
                with_note(
                    format!(
                        "pre-flight {} ({} items, {failed} failed{overridden})",
                        if p.signed_off {
                            "signed off"
                        } else {
                            "not signed off"
                        },
                        p.items.len()
                    ),
                    &p.note,
                )
            }
            Event::Note(n) => n.text.clone(),
            Event::Detection(d) => d.summary(),
            Event::Dismissal(d) => format!("detection #{} dismissed: {}", d.detection, d.reason),
        }
    }
}

/// Where the cage was struck.
#[derive(Debug, Clone, PartialEq, Eq, Serialize, Deserialize)]
#[serde(rename_all = "snake_case")]
pub enum StrikeRef {
    /// A face, by id (`F1..`).
    Face(String),
    /// A node, by id (`N1..`).
    Node(String),
}

impl std::fmt::Display for StrikeRef {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            StrikeRef::Face(id) => write!(f, "face {id}"),
            StrikeRef::Node(id) => write!(f, "node {id}"),
        }
    }
}

/// Whether an impact was typed in or proposed from live acceleration.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum ImpactSource {
    /// Entered by the operator.
    #[default]
    Entered,
    /// Detected from telemetry, confirmed (perhaps edited) by the operator.
    Detected,
}

/// The load one member carried in an impact.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct MemberLoadRecord {
    /// Member id (`R1..`, `S1..`).
    pub member: String,
    /// Axial force, tension positive.
    pub force_n: f64,
    /// The member's capacity (buckling/crushing for rods, breaking for strings).
    pub capacity_n: f64,
    /// Force over capacity (the magnitude is what health uses).
    pub utilisation: f64,
}

/// A collision and its analysis.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ImpactEvent {
    /// Face or node struck.
    pub strike: StrikeRef,
    /// What the analysis was given (the solver's own type; its serde form
    /// is part of the log format, pinned by a fixture test).
    pub input: ImpactInput,
    /// Entered or detected.
    #[serde(default)]
    pub source: ImpactSource,
    /// How the peak force was estimated (stored by its snake_case name).
    pub method: ImpactMethod,
    /// Peak contact force.
    pub force_n: f64,
    /// Equilibrium residual of the solution.
    pub residual_n: f64,
    /// How far the struck face moved in.
    pub face_displacement_m: f64,
    /// Strings that went slack, by id.
    #[serde(default)]
    pub slack_strings: Vec<String>,
    /// Every member's load.
    pub members: Vec<MemberLoadRecord>,
    /// Free text.
    #[serde(default)]
    pub note: Option<String>,
    /// The cage found no equilibrium under this impact (it may have
    /// collapsed): `members` is empty, `force_n` is the contact force at
    /// which the solution was lost, and health treats every member as to
    /// be replaced. Written only when true, so older lines are unchanged.
    #[serde(default, skip_serializing_if = "std::ops::Not::not")]
    pub beyond_model: bool,
    /// The `detection` record this impact confirms, by sequence number.
    /// Written only when set, so older lines are unchanged.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub detection: Option<u64>,
}

impl ImpactEvent {
    /// The stored form of an impact the model could not follow: recorded all
    /// the same, because the worst crash is the one that most needs logging.
    pub fn beyond_model(
        strike: StrikeRef,
        input: &ImpactInput,
        method: ImpactMethod,
        lost_at_n: f64,
        residual_n: f64,
        note: Option<String>,
    ) -> ImpactEvent {
        ImpactEvent {
            strike,
            input: input.clone(),
            source: ImpactSource::Entered,
            method,
            force_n: lost_at_n,
            residual_n,
            face_displacement_m: 0.0,
            slack_strings: Vec::new(),
            members: Vec::new(),
            note: note.filter(|n| !n.trim().is_empty()),
            beyond_model: true,
            detection: None,
        }
    }

    /// The stored form of an impact analysis: member indices become ids.
    pub fn from_analysis(
        cage: &crate::cage::Cage,
        strike: StrikeRef,
        input: &ImpactInput,
        a: &crate::impact::ImpactAnalysis,
        source: ImpactSource,
        note: Option<String>,
    ) -> ImpactEvent {
        let id = |j: usize| {
            cage.members
                .get(j)
                .map(|m| m.id.clone())
                .unwrap_or_else(|| format!("#{j}"))
        };
        ImpactEvent {
            strike,
            input: input.clone(),
            source,
            method: a.method,
            force_n: a.force_n,
            residual_n: a.residual_n,
            face_displacement_m: a.face_displacement_m,
            slack_strings: a.slack_strings.iter().map(|&j| id(j)).collect(),
            members: a
                .members
                .iter()
                .map(|m| MemberLoadRecord {
                    member: id(m.member),
                    force_n: m.force_n,
                    capacity_n: m.capacity_n,
                    utilisation: m.utilisation,
                })
                .collect(),
            note: note.filter(|n| !n.trim().is_empty()),
            beyond_model: false,
            detection: None,
        }
    }
}

/// What an inspection found on a member.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, PartialOrd, Ord)]
#[serde(rename_all = "snake_case")]
pub enum FindingKind {
    /// Inspected, nothing wrong.
    Ok,
    /// Frayed fibres.
    Fray,
    /// A cut.
    Cut,
    /// A crack (rods).
    Crack,
    /// A string gone slack.
    Slack,
    /// A termination coming undone.
    LooseEnd,
}

impl FindingKind {
    /// Every kind, in the order help texts list them.
    pub const ALL: [FindingKind; 6] = [
        FindingKind::Ok,
        FindingKind::Fray,
        FindingKind::Cut,
        FindingKind::Crack,
        FindingKind::Slack,
        FindingKind::LooseEnd,
    ];

    /// The name used in the file and on the command line.
    pub fn name(self) -> &'static str {
        match self {
            FindingKind::Ok => "ok",
            FindingKind::Fray => "fray",
            FindingKind::Cut => "cut",
            FindingKind::Crack => "crack",
            FindingKind::Slack => "slack",
            FindingKind::LooseEnd => "loose_end",
        }
    }

    /// Parse a name (`loose-end` is accepted for `loose_end`).
    pub fn parse(s: &str) -> Option<FindingKind> {
        let s = s.trim().to_ascii_lowercase().replace('-', "_");
        FindingKind::ALL.into_iter().find(|k| k.name() == s)
    }
}

/// An inspection finding on one member.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct FindingEvent {
    /// Member id.
    pub member: String,
    /// What was found.
    pub kind: FindingKind,
    /// Free text.
    #[serde(default)]
    pub note: Option<String>,
}

/// A member replacement.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct ReplacementEvent {
    /// Member id.
    pub member: String,
    /// Part number or lot of the new member.
    #[serde(default)]
    pub part: Option<String>,
    /// Free text.
    #[serde(default)]
    pub note: Option<String>,
}

/// The result of one pre-flight item.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize, Deserialize, Default)]
#[serde(rename_all = "snake_case")]
pub enum ItemResult {
    /// Checked and fine.
    Pass,
    /// Checked and not fine (the default: a result never read is no pass).
    #[default]
    Fail,
    /// Not checked (with the operator's reason in the detail); older records.
    Skipped,
    /// An automatic item that had no data to decide on.
    Waiting,
    /// An item the crew checks by hand (see `ticked`).
    Hand,
}

impl ItemResult {
    /// The name as written in the file and in JSON.
    pub fn name(self) -> &'static str {
        match self {
            ItemResult::Pass => "pass",
            ItemResult::Fail => "fail",
            ItemResult::Skipped => "skipped",
            ItemResult::Waiting => "waiting",
            ItemResult::Hand => "hand",
        }
    }
}

/// One checklist item as it was signed.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct PreflightItemResult {
    /// The item's number on the checklist (1-based; 0 in older records).
    #[serde(default)]
    pub n: u32,
    /// `auto` or `hand` (absent in older records).
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub kind: Option<String>,
    /// The item's text, as the profile gave it at the time.
    pub text: String,
    /// The result.
    pub result: ItemResult,
    /// Measured value or reason, if any.
    #[serde(default)]
    pub detail: Option<String>,
    /// For a hand item: whether the operator ticked it.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub ticked: Option<bool>,
    /// For an automatic item that did not pass: the operator's reason for
    /// signing all the same.
    #[serde(default, skip_serializing_if = "Option::is_none")]
    pub override_reason: Option<String>,
}

/// A pre-flight checklist run.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct PreflightEvent {
    /// Items in checklist order.
    pub items: Vec<PreflightItemResult>,
    /// Whether the operator signed the vehicle fit to fly.
    pub signed_off: bool,
    /// Free text.
    #[serde(default)]
    pub note: Option<String>,
}

/// Free text.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct NoteEvent {
    /// The note.
    pub text: String,
}

impl Record {
    /// The record's time, parsed.
    pub fn timestamp(&self) -> Option<jiff::Timestamp> {
        self.time.parse().ok()
    }

    /// Why this record cannot be written or trusted: a number that is not
    /// finite (JSON cannot carry it) or a time that is not RFC 3339.
    pub fn check(&self) -> Result<(), String> {
        if self.time.parse::<jiff::Timestamp>().is_err() {
            return Err(format!("time {:?} is not an RFC 3339 UTC time", self.time));
        }
        if self.operator.trim().is_empty() {
            return Err("operator is empty".to_string());
        }
        if let Event::Detection(d) = &self.event {
            return d.check();
        }
        if let Event::Impact(i) = &self.event {
            let mut nums = vec![
                ("force_n", i.force_n),
                ("residual_n", i.residual_n),
                ("face_displacement_m", i.face_displacement_m),
            ];
            match &i.input {
                ImpactInput::Speed { speed_m_per_s, .. } => {
                    nums.push(("speed_m_per_s", *speed_m_per_s))
                }
                ImpactInput::PeakAccel { g } => nums.push(("g", *g)),
                ImpactInput::SpeedAndDuration {
                    speed_m_per_s,
                    duration_s,
                } => {
                    nums.push(("speed_m_per_s", *speed_m_per_s));
                    nums.push(("duration_s", *duration_s));
                }
            }
            for m in &i.members {
                nums.push(("force_n", m.force_n));
                nums.push(("capacity_n", m.capacity_n));
                nums.push(("utilisation", m.utilisation));
            }
            if let Some((name, v)) = nums.iter().find(|(_, v)| !v.is_finite()) {
                return Err(format!("{name} is {v}, not a finite number"));
            }
        }
        Ok(())
    }
}

/// A UTC time in the form the log stores: RFC 3339 with milliseconds,
/// e.g. `2026-12-01T22:40:00.120Z` (fixed width, so columns line up).
pub fn format_time(t: jiff::Timestamp) -> String {
    format!("{t:.3}")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn times_are_rfc3339_utc_with_milliseconds() {
        let t = jiff::Timestamp::from_millisecond(1_796_164_800_120).unwrap();
        assert_eq!(format_time(t), "2026-12-01T22:40:00.120Z");
        let t = jiff::Timestamp::from_second(1_796_164_800).unwrap();
        assert_eq!(format_time(t), "2026-12-01T22:40:00.000Z");
        assert_eq!(format_time(t).parse::<jiff::Timestamp>().unwrap(), t);
    }

    #[test]
    fn finding_kinds_parse_by_name() {
        for k in FindingKind::ALL {
            assert_eq!(FindingKind::parse(k.name()), Some(k));
        }
        assert_eq!(FindingKind::parse("Loose-End"), Some(FindingKind::LooseEnd));
        assert_eq!(FindingKind::parse("bent"), None);
    }
}
