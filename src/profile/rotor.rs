//! `[mount]` (the cage-to-body rotation) and `[[rotor]]` (hubs, axes and
//! thrusts in the body frame).

use super::ProfileError;
use super::read::{Bound, Table};
use super::vehicle::MAX_COORD_M;

/// One rotor, body frame.
#[derive(Debug, Clone, PartialEq)]
pub struct Rotor {
    /// Hub position, body frame.
    pub position_m: [f64; 3],
    /// Unit thrust direction, body frame (default body -z, "up").
    pub axis: [f64; 3],
    /// Largest forward thrust.
    pub max_thrust_n: f64,
    /// Largest reverse thrust (0 when the motor cannot spin backwards).
    pub reverse_thrust_n: f64,
}

const MOUNT_KEYS: &[&str] = &["roll_deg", "pitch_deg", "yaw_deg"];
const ROTOR_KEYS: &[&str] = &["position_m", "axis", "max_thrust_n", "reverse_thrust_n"];

/// Largest thrust of one rotor, N: about ten tonnes-force, far beyond any
/// vehicle that is righted by its own rotors (plausibility bound, ours).
const MAX_THRUST_N: f64 = 1.0e5;

pub(super) fn read(root: &Table) -> Result<([f64; 3], Vec<Rotor>), ProfileError> {
    let m = root.table("mount", MOUNT_KEYS)?;
    let mount_rpy_deg = [
        m.number_or("roll_deg", Bound::within(-360.0, 360.0, "deg"), 0.0)?,
        m.number_or("pitch_deg", Bound::within(-90.0, 90.0, "deg"), 0.0)?,
        m.number_or("yaw_deg", Bound::within(-360.0, 360.0, "deg"), 0.0)?,
    ];
    let mut rotors = Vec::new();
    for r in root.tables("rotor", ROTOR_KEYS)? {
        let axis = match r.vec3("axis", Bound::within(-1e6, 1e6, ""))? {
            None => [0.0, 0.0, -1.0],
            Some(a) => {
                let n = (a[0] * a[0] + a[1] * a[1] + a[2] * a[2]).sqrt();
                if n < 1e-9 {
                    return Err(r.doc().invalid_key(
                        &r.path("axis"),
                        "a non-zero direction",
                        "[0, 0, 0]",
                    ));
                }
                [a[0] / n, a[1] / n, a[2] / n]
            }
        };
        rotors.push(Rotor {
            position_m: r
                .vec3("position_m", Bound::within(-MAX_COORD_M, MAX_COORD_M, "m"))?
                .ok_or_else(|| {
                    r.missing(
                        "position_m",
                        "three numbers [x, y, z] in metres, body frame",
                    )
                })?,
            axis,
            max_thrust_n: r.number_req("max_thrust_n", Bound::positive(MAX_THRUST_N, "N"))?,
            reverse_thrust_n: r.number_or(
                "reverse_thrust_n",
                Bound::non_negative(MAX_THRUST_N, "N"),
                0.0,
            )?,
        });
    }
    Ok((mount_rpy_deg, rotors))
}
