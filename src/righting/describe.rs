//! Where a move happens on the real vehicle, in its own terms: which side
//! it tips toward (body frame FRD: x forward, y right, z down) and where
//! the nose points after it (from the expected attitude). Computed from the
//! pivot, the centre of mass and the attitude, so a crew can match the
//! words to the vehicle in front of them; and the rotor commands in short
//! words (`#2 REV 1.12 N (75%)`), as the plan sheets and the screens give
//! them.

use super::feasibility::share;
use super::moves::Roll;
use crate::cage::Cage;
use crate::profile::Rotor;
use nalgebra::{UnitQuaternion, Vector3};

/// Share of a unit direction above which a body axis is named (about
/// 22.5 deg off the axis, so "front right" covers the diagonal).
const NAMED: f64 = 0.38;

/// The direction the vehicle tips toward at the start of `roll`, body
/// frame: horizontal (perpendicular to gravity), perpendicular to the
/// pivot axis, from the centre of mass toward the pivot. Zero when the
/// centre of mass lies over the pivot axis.
pub fn tip_direction_body(cage: &Cage, roll: &Roll) -> Vector3<f64> {
    let g = cage.faces[roll.from].normal_body;
    let u = roll.axis_body;
    let d = roll.point_body - cage.com_body;
    let h = d - g * d.dot(&g) - u * d.dot(&u);
    let n = h.norm();
    if n < 1e-12 { Vector3::zeros() } else { h / n }
}

/// A body-frame direction in words: "right rear", "front", "top", ...
pub fn side_words(d: &Vector3<f64>) -> String {
    let fore = if d.x > NAMED {
        Some("front")
    } else if d.x < -NAMED {
        Some("rear")
    } else {
        None
    };
    let side = if d.y > NAMED {
        Some("right")
    } else if d.y < -NAMED {
        Some("left")
    } else {
        None
    };
    match (side, fore) {
        (Some(s), Some(f)) => format!("{s} {f}"),
        (Some(s), None) => s.to_string(),
        (None, Some(f)) => f.to_string(),
        // FRD: body z points down, so -z is the top.
        (None, None) if d.z < 0.0 => "top".to_string(),
        (None, None) => "underside".to_string(),
    }
}

/// Where the nose (body +x) points at attitude `q` (body to world, NED).
pub fn nose_words(q: &UnitQuaternion<f64>) -> &'static str {
    let nose = q * Vector3::x();
    if nose.z < -0.5 {
        "up"
    } else if nose.z > 0.5 {
        "down"
    } else {
        "level"
    }
}

/// The whole description of a step, e.g. "tips toward the right rear,
/// nose stays up".
pub fn step_words(
    cage: &Cage,
    roll: &Roll,
    start: &UnitQuaternion<f64>,
    end: &UnitQuaternion<f64>,
) -> String {
    let d = tip_direction_body(cage, roll);
    let (a, b) = (nose_words(start), nose_words(end));
    let nose = if a == b {
        format!("nose stays {b}")
    } else {
        format!("nose ends {b}")
    };
    if d == Vector3::zeros() {
        format!("centre of mass over the pivot, {nose}")
    } else {
        format!("tips toward the {}, {nose}", side_words(&d))
    }
}

/// One rotor's command in words, e.g. `#2 fwd 1.20 N (40%)`, `#3 off`.
pub fn rotor_text(k: usize, thrust_n: f64, rotor: &Rotor) -> String {
    if thrust_n.abs() < 0.005 {
        return format!("#{} off", k + 1);
    }
    let dir = if thrust_n > 0.0 { "fwd" } else { "REV" };
    format!(
        "#{} {dir} {:.2} N ({:.0}%)",
        k + 1,
        thrust_n.abs(),
        share(thrust_n, rotor).abs() * 100.0
    )
}

/// A whole setting in words, rotors separated by two spaces.
pub fn setting_text(rotors: &[Rotor], thrust_n: &[f64]) -> String {
    rotors
        .iter()
        .enumerate()
        .map(|(k, r)| rotor_text(k, thrust_n.get(k).copied().unwrap_or(0.0), r))
        .collect::<Vec<_>>()
        .join("  ")
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn words_follow_the_body_axes() {
        // FRD: +x front, +y right, +z down (the frame convention in
        // README.md).
        let s = |x: f64, y: f64, z: f64| side_words(&Vector3::new(x, y, z).normalize());
        assert_eq!(s(1.0, 0.0, 0.0), "front");
        assert_eq!(s(-1.0, 1.0, 0.0), "right rear");
        assert_eq!(s(0.2, -1.0, 0.1), "left");
        assert_eq!(s(0.1, 0.1, -1.0), "top");
        assert_eq!(s(0.0, 0.0, 1.0), "underside");
        // Level attitude: nose level; pitched up 60 deg: nose up.
        let level = UnitQuaternion::identity();
        assert_eq!(nose_words(&level), "level");
        let up = UnitQuaternion::from_euler_angles(0.0, 60f64.to_radians(), 0.0);
        assert_eq!(nose_words(&up), "up");
    }
}
