//! Attitude conventions (docs/design.md contract): world NED, body FRD, attitude
//! is the rotation body -> world as a Hamilton unit quaternion; Euler angles
//! are aerospace Z-Y-X, R = Rz(yaw) Ry(pitch) Rx(roll).

use nalgebra::{Rotation3, Unit, UnitQuaternion, Vector3};

/// Whole degrees for display, without a "-0" (a rounded -0.3 deg is 0).
pub fn whole_deg(x: f64) -> f64 {
    let r = x.round();
    if r == 0.0 { 0.0 } else { r }
}

/// Rotation from Z-Y-X Euler angles in degrees: R = Rz(yaw) Ry(pitch) Rx(roll).
pub fn rotation_from_rpy_deg(roll_deg: f64, pitch_deg: f64, yaw_deg: f64) -> Rotation3<f64> {
    // nalgebra applies roll, then pitch, then yaw: exactly Rz Ry Rx.
    Rotation3::from_euler_angles(
        roll_deg.to_radians(),
        pitch_deg.to_radians(),
        yaw_deg.to_radians(),
    )
}

/// Quaternion from Z-Y-X Euler angles in degrees.
pub fn quat_from_rpy_deg(roll_deg: f64, pitch_deg: f64, yaw_deg: f64) -> UnitQuaternion<f64> {
    UnitQuaternion::from_euler_angles(
        roll_deg.to_radians(),
        pitch_deg.to_radians(),
        yaw_deg.to_radians(),
    )
}

/// Z-Y-X Euler angles (roll, pitch, yaw) in degrees of a body -> world attitude.
pub fn rpy_deg(q: &UnitQuaternion<f64>) -> [f64; 3] {
    let (r, p, y) = q.euler_angles();
    [r.to_degrees(), p.to_degrees(), y.to_degrees()]
}

/// Gravity direction in the body frame (the reduced attitude): g_b = R^T (0, 0, 1).
pub fn gravity_body(q: &UnitQuaternion<f64>) -> Vector3<f64> {
    q.inverse_transform_vector(&Vector3::z())
}

/// Angle between two unit vectors in degrees, safe against rounding.
pub fn angle_between_deg(a: &Vector3<f64>, b: &Vector3<f64>) -> f64 {
    // atan2 of |a x b| and a . b keeps precision near 0 and 180 degrees.
    a.cross(b).norm().atan2(a.dot(b)).to_degrees()
}

/// Tilt between two attitudes: the angle between their body-frame gravity
/// directions, which ignores yaw.
pub fn tilt_between_deg(a: &UnitQuaternion<f64>, b: &UnitQuaternion<f64>) -> f64 {
    angle_between_deg(&gravity_body(a), &gravity_body(b))
}

/// Rotate `q` about a world-frame axis by `angle_rad` (the attitude after a
/// roll about a pivot whose world direction is `axis_world`).
pub fn rotate_about_world(
    q: &UnitQuaternion<f64>,
    axis_world: &Vector3<f64>,
    angle_rad: f64,
) -> UnitQuaternion<f64> {
    let r = UnitQuaternion::from_axis_angle(&Unit::new_normalize(*axis_world), angle_rad);
    r * q
}

#[cfg(test)]
mod tests {
    use super::*;
    use approx::assert_relative_eq;

    #[test]
    fn euler_to_quaternion_reference_vector() {
        // docs/references.md: roll 10, pitch 20, yaw 30 deg -> q, computed with scipy
        // Rotation (Z-Y-X); convention per ISO 1151-1 and Diebel 2006.
        let q = quat_from_rpy_deg(10.0, 20.0, 30.0);
        let c = q.coords; // (x, y, z, w)
        assert_relative_eq!(c.w, 0.951548525, epsilon = 1e-9);
        assert_relative_eq!(c.x, 0.038134576, epsilon = 1e-9);
        assert_relative_eq!(c.y, 0.189307857, epsilon = 1e-9);
        assert_relative_eq!(c.z, 0.239298338, epsilon = 1e-9);
        let g = gravity_body(&q);
        assert_relative_eq!(g.x, -0.342020143, epsilon = 1e-9);
        assert_relative_eq!(g.y, 0.163175911, epsilon = 1e-9);
        assert_relative_eq!(g.z, 0.925416578, epsilon = 1e-9);
        let rpy = rpy_deg(&q);
        assert_relative_eq!(rpy[0], 10.0, epsilon = 1e-9);
        assert_relative_eq!(rpy[1], 20.0, epsilon = 1e-9);
        assert_relative_eq!(rpy[2], 30.0, epsilon = 1e-9);
    }

    #[test]
    fn rodrigues_reference_vector() {
        // docs/references.md: axis (1,2,3)/sqrt(14), 60 deg, v = (1,0,0), computed.
        let axis = Vector3::new(1.0, 2.0, 3.0);
        let q = rotate_about_world(&UnitQuaternion::identity(), &axis, 60f64.to_radians());
        let v = q * Vector3::x();
        assert_relative_eq!(v.x, 0.535714286, epsilon = 1e-9);
        assert_relative_eq!(v.y, 0.765793646, epsilon = 1e-9);
        assert_relative_eq!(v.z, -0.355767193, epsilon = 1e-9);
    }

    #[test]
    fn rotation_matrix_agrees_with_quaternion() {
        let r = rotation_from_rpy_deg(-35.0, 12.0, 170.0);
        let q = quat_from_rpy_deg(-35.0, 12.0, 170.0);
        let v = Vector3::new(0.3, -1.2, 2.0);
        assert_relative_eq!(r * v, q * v, epsilon = 1e-12);
    }

    mod props {
        use super::*;
        use proptest::prelude::*;

        proptest! {
            #![proptest_config(ProptestConfig::with_cases(64))]

            /// Z-Y-X angles survive a round trip through the quaternion away
            /// from gimbal lock at pitch +-90 deg (Diebel 2006, section 5.6).
            #[test]
            fn rpy_round_trip(r in -179.0..179.0f64, p in -85.0..85.0f64, y in -179.0..179.0f64) {
                let q = quat_from_rpy_deg(r, p, y);
                let back = rpy_deg(&q);
                prop_assert!((back[0] - r).abs() < 1e-7);
                prop_assert!((back[1] - p).abs() < 1e-7);
                prop_assert!((back[2] - y).abs() < 1e-7);
            }

            /// Quaternions stay unit, gravity stays a unit vector, and the
            /// matrix and quaternion forms agree.
            #[test]
            fn unit_norms(r in -180.0..180.0f64, p in -90.0..90.0f64, y in -180.0..180.0f64) {
                let q = quat_from_rpy_deg(r, p, y);
                prop_assert!((q.quaternion().norm() - 1.0).abs() < 1e-12);
                prop_assert!((gravity_body(&q).norm() - 1.0).abs() < 1e-12);
                let m = rotation_from_rpy_deg(r, p, y);
                let v = Vector3::new(0.2, -0.7, 1.1);
                prop_assert!((m * v - q * v).norm() < 1e-12);
            }

            /// Tilt ignores yaw: spinning about the world vertical changes
            /// nothing the rest detector looks at.
            #[test]
            fn tilt_ignores_yaw(r in -180.0..180.0f64, p in -89.0..89.0f64, y1 in -180.0..180.0f64, y2 in -180.0..180.0f64) {
                let a = quat_from_rpy_deg(r, p, y1);
                let b = quat_from_rpy_deg(r, p, y2);
                prop_assert!(tilt_between_deg(&a, &b) < 1e-6);
            }

            /// A rotation about a world axis by an angle tilts gravity by at
            /// most that angle, exactly that angle when the axis is level.
            #[test]
            fn world_rotation_tilt(r in -60.0..60.0f64, p in -60.0..60.0f64, az in 0.0..360.0f64, ang in 0.0..170.0f64) {
                let q = quat_from_rpy_deg(r, p, 0.0);
                let axis = Vector3::new(az.to_radians().cos(), az.to_radians().sin(), 0.0);
                let q2 = rotate_about_world(&q, &axis, ang.to_radians());
                prop_assert!((tilt_between_deg(&q, &q2) - ang).abs() < 1e-6);
                prop_assert!((q2.quaternion().norm() - 1.0).abs() < 1e-12);
            }
        }
    }
}
