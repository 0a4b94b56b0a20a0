//! `[vehicle]`: identity and mass properties. The id rule is shared with
//! the cage log, which names its file after the id.

use super::ProfileError;
use super::read::{Bound, KeyPath, Table, clip};

/// Identity and mass properties of the vehicle.
#[derive(Debug, Clone, PartialEq)]
pub struct Vehicle {
    /// Stable id; the logbook is keyed by it.
    pub id: String,
    /// Human name.
    pub name: String,
    /// Total mass with cage and payload.
    pub mass_kg: f64,
    /// Centre of mass in the cage frame.
    pub com_m: [f64; 3],
}

const KEYS: &[&str] = &["id", "name", "mass_kg", "com_m"];

/// Heaviest vehicle the tool plans for: far above any hand-righted caged
/// vehicle; a larger figure is a unit mistake (plausibility bound, ours).
pub(super) const MAX_MASS_KG: f64 = 1.0e3;
/// Largest coordinate of a point of the cage or vehicle, metres (same).
pub(super) const MAX_COORD_M: f64 = 100.0;
/// Longest vehicle id, in bytes (the log file is named after it).
const MAX_ID_BYTES: usize = 128;

/// The vehicle id rule, in words, for messages.
pub fn vehicle_id_rule() -> String {
    format!("an id of 1 to {MAX_ID_BYTES} letters, digits, '.', '_' or '-', not starting with '.'")
}

/// Whether `id` can key a cage log (it names the log's file): 1 to 128
/// ASCII letters, digits, `.`, `_` or `-`, not starting with `.`. The one
/// rule both `profile check` and the log use.
pub fn is_valid_vehicle_id(id: &str) -> bool {
    !id.is_empty()
        && id.len() <= MAX_ID_BYTES
        && !id.starts_with('.')
        && id
            .bytes()
            .all(|b| b.is_ascii_alphanumeric() || b == b'.' || b == b'_' || b == b'-')
}

/// A key of `[vehicle]`, for checks made on the built cage.
pub fn vehicle_key(name: &str) -> KeyPath {
    KeyPath::section("vehicle").key(name)
}

pub(super) fn read(root: &Table) -> Result<Vehicle, ProfileError> {
    let t = root.table("vehicle", KEYS)?;
    let id = t
        .text("id")?
        .ok_or_else(|| t.missing("id", &vehicle_id_rule()))?;
    if !is_valid_vehicle_id(id.get_ref()) {
        return Err(t.doc().invalid(
            &id.span(),
            &t.path("id"),
            vehicle_id_rule(),
            format!("{:?}", clip(id.get_ref())),
        ));
    }
    let id = id.into_inner();
    let name = match t.text("name")? {
        Some(n) => n.into_inner(),
        None => id.clone(),
    };
    let mass_kg = t.number_req("mass_kg", Bound::positive(MAX_MASS_KG, "kg"))?;
    let com_m = t
        .vec3("com_m", Bound::within(-MAX_COORD_M, MAX_COORD_M, "m"))?
        .ok_or_else(|| t.missing("com_m", "three numbers [x, y, z] in metres, cage frame"))?;
    Ok(Vehicle {
        id,
        name,
        mass_kg,
        com_m,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_id_rule_refuses_what_cannot_name_a_file() {
        // What a file name may hold portably (common practice, no published source).
        for bad in ["", "..", ".hidden", "a/b", "a b", "é", &"x".repeat(129)] {
            assert!(!is_valid_vehicle_id(bad), "{bad:?}");
        }
        for good in ["kestrel-demo", "a.b_c", &"x".repeat(128)] {
            assert!(is_valid_vehicle_id(good), "{good:?}");
        }
    }
}
