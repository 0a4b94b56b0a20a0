//! `[watch]`: resting-face identification and link-health settings.

use super::ProfileError;
use super::read::{Bound, Table};

/// Resting-face identification and link health settings.
#[derive(Debug, Clone, PartialEq)]
pub struct WatchSettings {
    /// A face is "resting" only within this angle of gravity.
    pub rest_tolerance_deg: f64,
    /// Attitude must be steady this long before "resting".
    pub dwell_s: f64,
    /// Margin a new face needs over the current one before switching.
    pub hysteresis_deg: f64,
    /// Data older than this is stale.
    pub stale_after_s: f64,
}

const KEYS: &[&str] = &[
    "rest_tolerance_deg",
    "dwell_s",
    "hysteresis_deg",
    "stale_after_s",
];

/// Longest wait that still means "watching live", s (plausibility bound, ours).
const MAX_WAIT_S: f64 = 3600.0;

pub(super) fn read(root: &Table) -> Result<WatchSettings, ProfileError> {
    let t = root.table("watch", KEYS)?;
    Ok(WatchSettings {
        rest_tolerance_deg: t.number_or(
            "rest_tolerance_deg",
            Bound::within(0.1, 90.0, "deg"),
            12.0,
        )?,
        dwell_s: t.number_or("dwell_s", Bound::non_negative(MAX_WAIT_S, "s"), 0.5)?,
        hysteresis_deg: t.number_or("hysteresis_deg", Bound::within(0.0, 45.0, "deg"), 3.0)?,
        stale_after_s: t.number_or("stale_after_s", Bound::positive(MAX_WAIT_S, "s"), 1.5)?,
    })
}
