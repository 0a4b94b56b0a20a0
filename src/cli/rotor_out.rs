//! Rotor commands as the outputs show them: the JSON list (a contract:
//! `rotor` is the 1-based index in profile order, every rotor listed, 0 N
//! when off, `share` the thrust over that rotor's limit in its direction,
//! negative when reversed). The short text form for tables, sheets and the
//! screens is `cagehand::righting::describe::setting_text`.

use cagehand::profile::Rotor;
use cagehand::righting::RotorCommands;
use cagehand::righting::feasibility::share;
use serde::Serialize;

/// One rotor's command.
#[derive(Debug, Serialize)]
pub struct RotorJson {
    /// 1-based index in profile order.
    pub rotor: usize,
    /// Thrust, newtons; negative when reversed.
    pub thrust_n: f64,
    /// Thrust over the rotor's limit in its direction (negative reversed).
    pub share: f64,
}

/// One entry of a schedule by roll angle.
#[derive(Debug, Serialize)]
pub struct ScheduleJson {
    /// Roll angle from which the setting applies, degrees.
    pub from_deg: f64,
    /// The setting.
    pub rotors: Vec<RotorJson>,
}

/// Every rotor's command for thrusts `thrust_n` (profile order).
pub fn rotors_json(rotors: &[Rotor], thrust_n: &[f64]) -> Vec<RotorJson> {
    rotors
        .iter()
        .enumerate()
        .map(|(k, r)| {
            let t = thrust_n.get(k).copied().unwrap_or(0.0);
            RotorJson {
                rotor: k + 1,
                thrust_n: t,
                share: share(t, r),
            }
        })
        .collect()
}

/// The schedule, or `None` when one setting holds for the whole roll.
pub fn schedule_json(rotors: &[Rotor], c: &RotorCommands) -> Option<Vec<ScheduleJson>> {
    (!c.schedule.is_empty()).then(|| {
        c.schedule
            .iter()
            .map(|e| ScheduleJson {
                from_deg: e.from_deg,
                rotors: rotors_json(rotors, &e.thrust_n),
            })
            .collect()
    })
}

/// Schedule entries to print: at most about one every `every_deg`
/// degrees (the JSON carries them all), always the first.
pub fn thinned(c: &RotorCommands, every_deg: f64) -> Vec<(f64, &[f64])> {
    let mut out: Vec<(f64, &[f64])> = Vec::new();
    for e in &c.schedule {
        if out
            .last()
            .is_none_or(|(from, _)| e.from_deg >= from + every_deg - 1e-9)
        {
            out.push((e.from_deg, e.thrust_n.as_slice()));
        }
    }
    out
}
