//! The simulator's telemetry on the wire: MAVLink 2 frames (attitude
//! quaternion and scaled IMU every step, local velocity every fifth,
//! heartbeat, system status and battery once a second) or protocol lines.

use super::Telemetry;
use crate::link::Proto;
use crate::link::mavlink::{Message, encode_frame};
use std::fmt::Write;

/// The simulator's system and component ids.
pub const SIM_SYSID: u8 = 1;
/// Component id (an autopilot).
pub const SIM_COMPID: u8 = 1;

/// Encodes telemetry for one protocol.
#[derive(Debug, Clone)]
pub struct Wire {
    proto: Proto,
    seq: u8,
    steps: u64,
    next_status_s: f64,
}

impl Wire {
    /// An encoder; `Auto` means MAVLink.
    pub fn new(proto: Proto) -> Wire {
        Wire {
            proto,
            seq: 0,
            steps: 0,
            next_status_s: 0.0,
        }
    }

    fn frame(&mut self, out: &mut Vec<u8>, m: &Message) {
        out.extend_from_slice(&encode_frame(2, self.seq, SIM_SYSID, SIM_COMPID, m, None));
        self.seq = self.seq.wrapping_add(1);
    }

    /// Bytes for one step's telemetry.
    pub fn encode(&mut self, t: &Telemetry) -> Vec<u8> {
        self.steps += 1;
        let c = t.q.coords;
        if self.proto == Proto::Line {
            let a = t.accel_body_m_s2;
            let v = t.velocity_ned_m_s;
            let mut s = String::new();
            let _ = writeln!(
                s,
                "t={:.3} qw={:.6} qx={:.6} qy={:.6} qz={:.6} ax={:.3} ay={:.3} az={:.3} vn={:.2} ve={:.2} vd={:.2} vbat={:.2} armed={}",
                t.t_s,
                c.w,
                c.x,
                c.y,
                c.z,
                a.x,
                a.y,
                a.z,
                v.x,
                v.y,
                v.z,
                t.battery_v,
                u8::from(t.armed)
            );
            return s.into_bytes();
        }
        let ms = (t.t_s * 1000.0).round().clamp(0.0, u32::MAX as f64) as u32;
        let mut out = Vec::with_capacity(200);
        if t.t_s >= self.next_status_s {
            self.next_status_s = t.t_s + 1.0;
            let hb = Message::Heartbeat {
                mav_type: 2,
                autopilot: 3,
                base_mode: if t.armed { 0x80 | 0x01 } else { 0x01 },
                custom_mode: 0,
                system_status: if t.armed { 4 } else { 3 },
            };
            self.frame(&mut out, &hb);
            let mv = (t.battery_v * 1000.0).round().clamp(0.0, 65534.0) as u16;
            self.frame(
                &mut out,
                &Message::SysStatus {
                    voltage_battery_mv: mv,
                    current_battery_ca: if t.armed { 800 } else { 20 },
                    battery_remaining_pct: 80,
                },
            );
            let cell = mv / 3;
            let mut cells = [u16::MAX; 10];
            cells[..3].copy_from_slice(&[cell, cell, mv - 2 * cell]);
            self.frame(
                &mut out,
                &Message::BatteryStatus {
                    id: 0,
                    voltages_mv: cells,
                    battery_remaining_pct: 80,
                },
            );
        }
        self.frame(
            &mut out,
            &Message::AttitudeQuaternion {
                time_boot_ms: ms,
                q: [c.w as f32, c.x as f32, c.y as f32, c.z as f32],
                rates_rad_s: [0.0; 3],
            },
        );
        let mg = |x: f64| {
            (x / crate::sample::STANDARD_GRAVITY_M_S2 * 1000.0)
                .round()
                .clamp(-32767.0, 32767.0) as i16
        };
        let a = t.accel_body_m_s2;
        self.frame(
            &mut out,
            &Message::ScaledImu {
                time_boot_ms: ms,
                acc_mg: [mg(a.x), mg(a.y), mg(a.z)],
                gyro_mrad_s: [0; 3],
            },
        );
        if self.steps % 5 == 1 {
            let v = t.velocity_ned_m_s;
            self.frame(
                &mut out,
                &Message::LocalPositionNed {
                    time_boot_ms: ms,
                    pos_m: [0.0; 3],
                    vel_m_s: [v.x as f32, v.y as f32, v.z as f32],
                },
            );
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cage::Cage;
    use crate::link::{Decoder, Proto};
    use crate::profile::Profile;
    use crate::sim::{SIM_RATE_HZ, Sim};

    #[test]
    fn both_protocols_decode_to_the_same_attitude() {
        let c = Cage::from_profile(&Profile::demo().expect("demo")).expect("cage");
        for proto in [Proto::Mavlink, Proto::Line] {
            let mut sim = Sim::new(&c, 5);
            let mut w = Wire::new(proto);
            let mut d = Decoder::new(Proto::Auto, Default::default()).expect("no key");
            let mut last = None;
            for _ in 0..100 {
                sim.step(1.0 / SIM_RATE_HZ);
                let t = sim.telemetry();
                d.push(&w.encode(&t), t.t_s);
                last = Some(t);
            }
            let mut att = None;
            while let Some(s) = d.pop() {
                if s.attitude.is_some() {
                    att = s.attitude;
                }
            }
            let (Some(a), Some(t)) = (att, last) else {
                panic!("no attitude over {proto:?}");
            };
            assert!(a.angle_to(&t.q) < 1e-4, "{proto:?}");
            assert_eq!(d.counters().crc_errors + d.counters().malformed, 0);
        }
    }
}
