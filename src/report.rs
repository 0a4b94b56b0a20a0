//! Maintenance reports from the log: Markdown a crew can print or attach,
//! and CSV of the health table for a spreadsheet. Pure: text out.

use crate::cage::MemberKind;
use crate::health::{HealthReport, MemberHealth};
use crate::logbook::Record;
use crate::logbook::chain::{ChainHead, Integrity};
use crate::margin::MarginTable;
use crate::text;

/// What a report is about.
#[derive(Debug, Clone)]
pub struct ReportHeader<'a> {
    /// Vehicle id.
    pub vehicle_id: &'a str,
    /// Vehicle name.
    pub vehicle_name: &'a str,
    /// Where the profile came from.
    pub profile: &'a str,
    /// The log file.
    pub log_path: &'a str,
    /// When the report was made (RFC 3339).
    pub generated: &'a str,
    /// The log's chain head when the report was made: printed so a reader
    /// who keeps the report can later show nothing up to it was removed.
    pub head: Option<&'a ChainHead>,
    /// What the log says about its own soundness; problems go right under
    /// the title.
    pub integrity: Option<&'a Integrity>,
}

/// The caution every report carries.
pub const CAUTION: &str = "These figures are estimates from a simplified model and the recorded \
inputs, not guarantees. The cage must be inspected physically after every crash and before \
every flight, whatever this report says.";

fn kind(m: &MemberHealth) -> &'static str {
    match m.kind {
        MemberKind::Rod => "rod",
        MemberKind::String => "string",
    }
}

/// Outside text in Markdown: no markup, no control characters, no bare
/// `|` to split a cell ([`text::markdown`]).
fn cell(s: &str) -> String {
    text::markdown(s)
}

/// The remaining margin: per face, the impact speed at which the first
/// member reaches its capacity, with the cage as the log says it is.
fn margin_section(margin: Result<&MarginTable, String>) -> String {
    let mut s = String::from("## Remaining margin\n\n");
    let t = match margin {
        Ok(t) => t,
        Err(why) => {
            s.push_str(&format!("Not computed: {}\n\n", cell(&why)));
            return s;
        }
    };
    s.push_str(&format!(
        "Impact speed on {} at which the first member reaches its capacity, \
from the nonlinear statics and the energy balance of the impact analysis.\n\n",
        cell(&t.surface)
    ));
    if t.grounded() {
        s.push_str(&format!(
            "**GROUNDED**: {} at REPLACE NOW count as failed; every speed is 0. \
Do not fly until replaced.\n\n",
            t.grounded_by.join(", ")
        ));
    }
    for d in &t.derated {
        s.push_str(&format!(
            "- {} counted at {:.0}% of its capacity (open findings)\n",
            d.id,
            d.factor * 100.0
        ));
    }
    if !t.derated.is_empty() {
        s.push('\n');
    }
    s.push_str("| Face | Speed (m/s) | Peak (g) | First to fail |\n");
    s.push_str("|---|---:|---:|---|\n");
    for f in &t.faces {
        s.push_str(&format!(
            "| {} | {:.2} | {:.0} | {} |\n",
            f.id,
            f.failure.speed_m_per_s,
            f.failure.peak_g,
            f.first_member
                .as_deref()
                .unwrap_or("none (beyond the model)")
        ));
    }
    if let Some(w) = t.weakest_face() {
        s.push_str(&format!(
            "\nWeakest: **{}** at {:.2} m/s.\n",
            w.id, w.failure.speed_m_per_s
        ));
    }
    s.push_str(
        "\nNot captured: fatigue beyond Miner's sum, hidden composite damage, \
joints and end fittings. These are model estimates: inspect the cage physically.\n\n",
    );
    s
}

/// The Markdown maintenance report.
pub fn markdown(h: &ReportHeader, records: &[Record], health: &HealthReport) -> String {
    markdown_with_margin(h, records, health, None)
}

/// The Markdown maintenance report with a remaining-margin section: the
/// table, or why it could not be computed.
pub fn markdown_with_margin(
    h: &ReportHeader,
    records: &[Record],
    health: &HealthReport,
    margin: Option<Result<&MarginTable, String>>,
) -> String {
    let mut s = String::new();
    s.push_str(&format!(
        "# Cage maintenance report: {}\n\n",
        cell(h.vehicle_name)
    ));
    if let Some(i) = h.integrity
        && let Some(line) = i.headline()
    {
        s.push_str(&format!("> **Warning.** {}.\n", cell(&line)));
        s.push_str(">\n");
        for issue in &i.issues {
            s.push_str(&format!("> - {}\n", cell(&issue.to_string())));
        }
        s.push('\n');
    }
    s.push_str(&format!("- Vehicle id: {}\n", cell(h.vehicle_id)));
    s.push_str(&format!("- Profile: {}\n", cell(h.profile)));
    s.push_str(&format!(
        "- Log: {} ({} records)\n",
        cell(h.log_path),
        records.len()
    ));
    if let Some(head) = h.head {
        s.push_str(&format!(
            "- Chain head: `{head}` (keep this report: `cagehand log verify --head {}:{}` shows later whether any record up to it was changed or removed)\n",
            head.seq,
            &head.hash[..head.hash.len().min(16)]
        ));
    }
    s.push_str(&format!("- Generated: {}\n", cell(h.generated)));
    s.push_str(&format!(
        "- Worst status: **{}**\n\n",
        health.worst().label()
    ));
    s.push_str(&format!("> **Caution.** {CAUTION}\n\n"));
    let pending = crate::logbook::pending(records);
    if let Some(w) = crate::logbook::detection::pending_warning(&pending) {
        s.push_str(&format!("> **PENDING DETECTIONS.** {}.\n\n", cell(&w)));
    }
    let gaps = crate::preflight::sign_off_gaps(records);
    for g in &gaps {
        s.push_str(&format!("> **Pre-flight.** {}\n\n", cell(g)));
    }

    s.push_str("## Members to act on\n\n");
    let act = health.to_act_on();
    if act.is_empty() {
        s.push_str("None: no member is flagged by the log.\n\n");
    } else {
        for m in act {
            s.push_str(&format!(
                "- **{} {}**: {}\n",
                cell(&m.id),
                kind(m),
                m.status.label()
            ));
            for r in &m.reasons {
                s.push_str(&format!("  - {}\n", cell(r)));
            }
            s.push_str("  - Done by: ________  Date: ________\n");
        }
        s.push('\n');
    }

    s.push_str(&preflight_section(records));

    s.push_str("## Member health\n\n");
    s.push_str("| Member | Kind | Status | Damage D | Max utilisation | Impacts |\n");
    s.push_str("|---|---|---|---:|---:|---:|\n");
    for m in &health.members {
        s.push_str(&format!(
            "| {} | {} | {} | {:.3} | {:.2} | {} |\n",
            cell(&m.id),
            kind(m),
            m.status.label(),
            m.damage,
            m.max_utilisation,
            m.impacts
        ));
    }
    s.push('\n');
    if !health.warnings.is_empty() {
        s.push_str("Warnings:\n\n");
        for w in &health.warnings {
            s.push_str(&format!("- {}\n", cell(w)));
        }
        s.push('\n');
    }

    if let Some(m) = margin {
        s.push_str(&margin_section(m));
    }

    s.push_str("## Events\n\n");
    if records.is_empty() {
        s.push_str("The log is empty.\n");
    } else {
        s.push_str("| # | Time (UTC) | Operator | Event | Details |\n");
        s.push_str("|---:|---|---|---|---|\n");
        for r in records {
            s.push_str(&format!(
                "| {} | {} | {} | {} | {} |\n",
                r.seq,
                cell(&r.time),
                cell(&r.operator),
                r.event.name(),
                cell(&r.event.summary())
            ));
        }
    }
    s
}

/// The last sign-off: who, when, each item with its result, ticks and
/// overrides.
fn preflight_section(records: &[Record]) -> String {
    let mut s = String::from("## Pre-flight\n\n");
    let Some((r, p)) = crate::preflight::last_sign_off(records) else {
        s.push_str("No pre-flight sign-off is recorded in this log.\n\n");
        return s;
    };
    s.push_str(&format!(
        "Last sign-off: record #{} by {} at {}.\n\n",
        r.seq,
        cell(&r.operator),
        cell(&r.time)
    ));
    s.push_str("| # | Result | Item | Detail | Ticked / override |\n");
    s.push_str("|---:|---|---|---|---|\n");
    for i in &p.items {
        let mark = match (&i.override_reason, i.ticked) {
            (Some(why), _) => format!("OVERRIDDEN: {why}"),
            (None, Some(true)) => "ticked".to_string(),
            (None, Some(false)) => "not ticked".to_string(),
            (None, None) => String::new(),
        };
        s.push_str(&format!(
            "| {} | {} | {} | {} | {} |\n",
            i.n,
            i.result.name(),
            cell(&i.text),
            cell(i.detail.as_deref().unwrap_or("")),
            cell(&mark)
        ));
    }
    if let Some(n) = &p.note {
        s.push_str(&format!("\nNote: {}\n", cell(n)));
    }
    s.push('\n');
    s
}

/// RFC 4180 field: quoted when it holds a comma, quote or line break.
fn csv_field(s: &str) -> String {
    if s.contains([',', '"', '\n', '\r']) {
        format!("\"{}\"", s.replace('"', "\"\""))
    } else {
        s.to_string()
    }
}

/// CSV text from outside: no control characters (a spreadsheet shows them
/// raw), and a leading `=`, `+`, `-` or `@` quoted away so a spreadsheet
/// does not run it as a formula (OWASP, "CSV Injection").
fn csv_text(s: &str) -> String {
    let t = text::terminal(s);
    let t = if t.starts_with(['=', '+', '-', '@']) {
        format!("'{t}")
    } else {
        t.into_owned()
    };
    csv_field(&t)
}

/// The health table as CSV (RFC 4180), one row per member, reasons joined
/// with "; ". After the members, rows with id `(log)` carry the chain head
/// (kind `chain_head`) and each integrity problem (kind `integrity`,
/// status `problem`), with the same columns, so the file stays one table.
pub fn csv(
    health: &HealthReport,
    head: Option<&ChainHead>,
    integrity: Option<&Integrity>,
) -> String {
    let mut s = String::from("id,kind,status,damage,max_utilisation,impacts,reasons\r\n");
    for m in &health.members {
        s.push_str(&format!(
            "{},{},{},{:.6},{:.4},{},{}\r\n",
            csv_text(&m.id),
            kind(m),
            m.status.name(),
            m.damage,
            m.max_utilisation,
            m.impacts,
            csv_text(&m.reasons.join("; "))
        ));
    }
    if let Some(head) = head {
        s.push_str(&format!("(log),chain_head,,,,,{head}\r\n"));
    }
    for i in integrity.map(|i| i.issues.as_slice()).unwrap_or_default() {
        s.push_str(&format!(
            "(log),integrity,problem,,,,{}\r\n",
            csv_text(&i.to_string())
        ));
    }
    s
}

/// The health table as CSV with the log's loud facts as rows of their
/// own, in the same columns: pending detections first (status `pending`),
/// then the members, then every pre-flight record (kind `preflight`, id
/// `#SEQ`, status `signed_off`), and a row per sign-off gap (kind
/// `preflight`, status `missing`).
pub fn csv_with_records(
    health: &HealthReport,
    records: &[Record],
    head: Option<&ChainHead>,
    integrity: Option<&Integrity>,
) -> String {
    let all = csv(health, head, integrity);
    let (header, members) = all.split_once("\r\n").unwrap_or((&all, ""));
    let mut s = format!("{header}\r\n");
    for p in crate::logbook::pending(records) {
        let why = format!(
            "detected {:.1} g on {} at {} ({}); not confirmed or dismissed",
            p.peak_g, p.face, p.time, p.source
        );
        s.push_str(&format!(
            "#{},detection,pending,,,,{}\r\n",
            p.seq,
            csv_text(&why)
        ));
    }
    s.push_str(members);
    for r in records {
        if let crate::logbook::Event::Preflight(p) = &r.event {
            let status = if p.signed_off {
                "signed_off"
            } else {
                "not_signed_off"
            };
            let why = format!("by {} at {}: {}", r.operator, r.time, r.event.summary());
            s.push_str(&format!(
                "#{},preflight,{status},,,,{}\r\n",
                r.seq,
                csv_text(&why)
            ));
        }
    }
    for g in crate::preflight::sign_off_gaps(records) {
        s.push_str(&format!(",preflight,missing,,,,{}\r\n", csv_text(&g)));
    }
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::health::Status;

    fn health() -> HealthReport {
        HealthReport {
            members: vec![
                MemberHealth {
                    id: "R1".into(),
                    kind: MemberKind::Rod,
                    status: Status::Ok,
                    damage: 0.0,
                    max_utilisation: 0.0,
                    impacts: 0,
                    reasons: vec!["fine".into()],
                },
                MemberHealth {
                    id: "S1".into(),
                    kind: MemberKind::String,
                    status: Status::Due,
                    damage: 0.75,
                    max_utilisation: 0.9,
                    impacts: 3,
                    reasons: vec!["finding cut, \"deep\"".into()],
                },
            ],
            warnings: vec![],
        }
    }

    #[test]
    fn csv_quotes_per_rfc_4180() {
        let c = csv(&health(), None, None);
        let lines: Vec<&str> = c.split("\r\n").collect();
        assert_eq!(
            lines[0],
            "id,kind,status,damage,max_utilisation,impacts,reasons"
        );
        assert_eq!(
            lines[2],
            "S1,string,due,0.750000,0.9000,3,\"finding cut, \"\"deep\"\"\""
        );
    }

    #[test]
    fn markdown_lists_members_to_act_on_and_the_caution() {
        let h = ReportHeader {
            vehicle_id: "v",
            vehicle_name: "Vee",
            profile: "p.toml",
            log_path: "/d/v.cagelog",
            generated: "2026-12-01T23:00:00Z",
            head: None,
            integrity: None,
        };
        let md = markdown(&h, &[], &health());
        assert!(md.contains("- **S1 string**: DUE"));
        assert!(!md.contains("- **R1"));
        assert!(md.contains("must be inspected physically"));
        assert!(md.contains("| S1 | string | DUE | 0.750 | 0.90 | 3 |"));
    }
}
