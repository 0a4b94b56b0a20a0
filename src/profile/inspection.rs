//! `[inspection]`: damage thresholds, count rules, and the capacity
//! factors findings apply (`[inspection.derate]`).

use super::ProfileError;
use super::read::{Bound, Table, num};

/// Damage thresholds and count rules.
#[derive(Debug, Clone, PartialEq)]
pub struct Inspection {
    /// Utilisation at or above which a member must be replaced now.
    pub overload_utilisation: f64,
    /// Utilisation below which a load does no fatigue damage.
    pub endurance_utilisation: f64,
    /// Miner sum at which a member should be inspected.
    pub inspect_damage: f64,
    /// Miner sum at which a member is due for replacement.
    pub due_damage: f64,
    /// Basquin exponent for rods: cycles to failure N = u^-k.
    pub sn_exponent_rod: f64,
    /// Basquin exponent for strings.
    pub sn_exponent_string: f64,
    /// A string is due after this many impacts above `string_count_utilisation`.
    pub string_count_limit: u32,
    /// Utilisation that counts towards the string count rule.
    pub string_count_utilisation: f64,
    /// Capacity factors for members with a recorded finding.
    pub derate: Derate,
}

/// Capacity factors, each in (0, 1], for a member with a recorded finding
/// that leaves it in service: its capacity is multiplied by the factor.
/// The defaults are from memory, conservative planning defaults.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Derate {
    /// A frayed string.
    pub fray: f64,
    /// A slack string.
    pub slack: f64,
    /// A loose end fitting.
    pub loose_end: f64,
}

impl Default for Derate {
    /// From memory, conservative planning defaults.
    fn default() -> Derate {
        Derate {
            fray: 0.5,
            slack: 0.8,
            loose_end: 0.8,
        }
    }
}

const KEYS: &[&str] = &[
    "overload_utilisation",
    "endurance_utilisation",
    "inspect_damage",
    "due_damage",
    "sn_exponent_rod",
    "sn_exponent_string",
    "string_count_limit",
    "string_count_utilisation",
    "derate",
];
const DERATE_KEYS: &[&str] = &["fray", "slack", "loose_end"];

pub(super) fn read(root: &Table) -> Result<Inspection, ProfileError> {
    let t = root.table("inspection", KEYS)?;
    let d = t.table("derate", DERATE_KEYS)?;
    let factor = Bound::above(0.0, 1.0, "");
    let defaults = Derate::default();
    let derate = Derate {
        fray: d.number_or("fray", factor, defaults.fray)?,
        slack: d.number_or("slack", factor, defaults.slack)?,
        loose_end: d.number_or("loose_end", factor, defaults.loose_end)?,
    };
    let inspection = Inspection {
        overload_utilisation: t.number_or(
            "overload_utilisation",
            Bound::within(0.01, 10.0, ""),
            1.0,
        )?,
        endurance_utilisation: t.number_or(
            "endurance_utilisation",
            Bound::within(0.0, 1.0, ""),
            0.2,
        )?,
        inspect_damage: t.number_or("inspect_damage", Bound::within(0.0, 1.0, ""), 0.3)?,
        due_damage: t.number_or("due_damage", Bound::within(0.0, 1.0, ""), 0.7)?,
        sn_exponent_rod: t.number_or("sn_exponent_rod", Bound::within(1.0, 100.0, ""), 12.0)?,
        sn_exponent_string: t.number_or(
            "sn_exponent_string",
            Bound::within(1.0, 100.0, ""),
            6.0,
        )?,
        string_count_limit: t.count_or("string_count_limit", 1, 1_000_000, 20)?,
        string_count_utilisation: t.number_or(
            "string_count_utilisation",
            Bound::within(0.0, 10.0, ""),
            0.5,
        )?,
        derate,
    };
    let inspect = t.path("inspect_damage");
    if inspection.inspect_damage <= 0.0 {
        return Err(t.doc().invalid_key(
            &inspect,
            "an inspect level above 0 (at 0 every member would be flagged)",
            num(inspection.inspect_damage),
        ));
    }
    if inspection.inspect_damage > inspection.due_damage {
        return Err(t.doc().invalid_key(
            &inspect,
            "an inspect level not above the due level",
            format!(
                "inspect {} > due {}",
                num(inspection.inspect_damage),
                num(inspection.due_damage)
            ),
        ));
    }
    Ok(inspection)
}
