//! `[preflight]`: the checklist, the lowest battery voltage to fly on, and
//! the smallest speed margin the pre-flight asks for.

use super::ProfileError;
use super::read::{Bound, Table, clip};
use serde::Deserialize;

/// One checklist item.
#[derive(Debug, Clone, PartialEq)]
pub struct PreflightItem {
    /// What the crew checks.
    pub text: String,
    /// Automatic check bound to live data or the log, if any.
    pub check: Option<AutoCheck>,
}

/// Automatic checks a pre-flight item may be bound to.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Deserialize, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum AutoCheck {
    /// No cage member is due or must be replaced.
    NoMemberDue,
    /// The vehicle rests on a take-off face.
    OnTakeoffFace,
    /// The link delivers fresh data.
    LinkFresh,
    /// Battery voltage at or above the profile minimum.
    Battery,
}

impl AutoCheck {
    /// Every check, with the name a profile writes for it.
    pub const ALL: [(AutoCheck, &'static str); 4] = [
        (AutoCheck::NoMemberDue, "no_member_due"),
        (AutoCheck::OnTakeoffFace, "on_takeoff_face"),
        (AutoCheck::LinkFresh, "link_fresh"),
        (AutoCheck::Battery, "battery"),
    ];

    /// The check a profile names, if any.
    pub fn from_name(name: &str) -> Option<AutoCheck> {
        AutoCheck::ALL
            .iter()
            .find(|(_, n)| *n == name)
            .map(|(c, _)| *c)
    }
}

/// The pre-flight checklist.
#[derive(Debug, Clone, PartialEq)]
pub struct Preflight {
    /// Lowest battery voltage to fly on.
    pub min_battery_v: f64,
    /// Smallest margin, as an impact speed the cage can still take, that
    /// the pre-flight asks for; `None` when the profile sets none.
    pub min_margin_speed_m_per_s: Option<f64>,
    /// Items in order.
    pub items: Vec<PreflightItem>,
}

const KEYS: &[&str] = &["min_battery_v", "min_margin_speed_m_per_s", "item"];
const ITEM_KEYS: &[&str] = &["text", "check"];

/// Highest pack voltage, V (plausibility bound, ours).
const MAX_BATTERY_V: f64 = 1000.0;
/// Fastest impact speed a margin may ask for, m/s (same).
const MAX_SPEED_M_PER_S: f64 = 100.0;

pub(super) fn read(root: &Table) -> Result<Preflight, ProfileError> {
    let t = root.table("preflight", KEYS)?;
    let mut items = Vec::new();
    for it in t.tables("item", ITEM_KEYS)? {
        let text = it
            .text("text")?
            .ok_or_else(|| it.missing("text", "a non-empty text"))?;
        let text = text.get_ref().trim().to_string();
        if text.is_empty() {
            return Err(it
                .doc()
                .invalid_key(&it.path("text"), "a non-empty text", "\"\""));
        }
        let check = match it.text("check")? {
            None => None,
            Some(c) => Some(AutoCheck::from_name(c.get_ref()).ok_or_else(|| {
                let names: Vec<&str> = AutoCheck::ALL.iter().map(|(_, n)| *n).collect();
                it.doc().invalid(
                    &c.span(),
                    &it.path("check"),
                    format!("one of {}", names.join(", ")),
                    format!("{:?}", clip(c.get_ref())),
                )
            })?),
        };
        items.push(PreflightItem { text, check });
    }
    Ok(Preflight {
        min_battery_v: t.number_or(
            "min_battery_v",
            Bound::non_negative(MAX_BATTERY_V, "V"),
            0.0,
        )?,
        min_margin_speed_m_per_s: t.number(
            "min_margin_speed_m_per_s",
            Bound::positive(MAX_SPEED_M_PER_S, "m/s"),
        )?,
        items,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn every_check_is_named_as_serde_writes_it() {
        for (c, name) in AutoCheck::ALL {
            // The log writes checks by serde's name: both must agree.
            assert_eq!(serde_json::to_value(c).unwrap(), name);
            // A new check must be added to ALL: this match is exhaustive.
            match c {
                AutoCheck::NoMemberDue
                | AutoCheck::OnTakeoffFace
                | AutoCheck::LinkFresh
                | AutoCheck::Battery => {}
            }
        }
    }
}
