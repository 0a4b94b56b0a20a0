//! One telemetry sample, whatever link or protocol it came over. Decoders
//! produce these; the tracker, the impact detector and the screens consume
//! them.

use nalgebra::{UnitQuaternion, Vector3};

/// A telemetry sample. Fields a link does not carry are `None`.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Sample {
    /// Time of the sample in seconds: the sender's clock where the protocol
    /// carries one, else the arrival time on the receiver's monotonic clock.
    pub t_s: f64,
    /// Attitude, body (FRD) -> world (NED).
    pub attitude: Option<UnitQuaternion<f64>>,
    /// Specific force measured by the accelerometer, body frame, m/s^2
    /// (about (0, 0, -9.81) at rest upright).
    pub accel_body_m_s2: Option<Vector3<f64>>,
    /// Velocity, world NED, m/s.
    pub velocity_ned_m_s: Option<Vector3<f64>>,
    /// Battery voltage.
    pub battery_v: Option<f64>,
    /// Motors armed.
    pub armed: Option<bool>,
}

/// Standard gravity, m/s^2 (ISO 80000-3; CGPM 1901).
pub const STANDARD_GRAVITY_M_S2: f64 = 9.80665;
