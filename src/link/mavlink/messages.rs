//! Payloads of the MAVLink messages cagehand reads (docs/design.md subset), as
//! typed values, with the wire layout of common.xml: fields sorted by type
//! size, extensions appended. Decoding takes a payload already zero-filled to
//! the full length; encoding (for the simulator and tests) writes the full
//! length and leaves truncation to the framer.

/// What the decoder knows about one message id.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct MessageInfo {
    /// Message id.
    pub id: u32,
    /// Name in common.xml.
    pub name: &'static str,
    /// CRC_EXTRA seed from the message definition.
    pub crc_extra: u8,
    /// Payload length without extensions (MAVLink 1 form).
    pub base_len: usize,
    /// Payload length with extensions (MAVLink 2 form).
    pub full_len: usize,
}

/// The message table. Values from docs/references.md (MAVLink common.xml).
pub const KNOWN: [MessageInfo; 8] = [
    info(0, "HEARTBEAT", 50, 9, 9),
    info(1, "SYS_STATUS", 124, 31, 43),
    info(26, "SCALED_IMU", 170, 22, 24),
    info(30, "ATTITUDE", 39, 28, 28),
    info(31, "ATTITUDE_QUATERNION", 246, 32, 48),
    info(32, "LOCAL_POSITION_NED", 185, 28, 28),
    info(105, "HIGHRES_IMU", 93, 62, 63),
    info(147, "BATTERY_STATUS", 154, 36, 54),
];

const fn info(id: u32, name: &'static str, crc_extra: u8, base: usize, full: usize) -> MessageInfo {
    MessageInfo {
        id,
        name,
        crc_extra,
        base_len: base,
        full_len: full,
    }
}

/// Longest full payload in the table, so a zero-filled copy fits a fixed buffer.
pub const MAX_FULL_LEN: usize = 63;

/// Look up a message id. Every candidate frame asks, so it is one index
/// into a table of the ids below 256 (all of the subset's) rather than a
/// search of [`KNOWN`].
#[inline]
pub fn lookup(id: u32) -> Option<&'static MessageInfo> {
    let slot = *BY_ID.get(usize::try_from(id).ok()?)?;
    KNOWN.get(usize::from(slot))
}

/// Position in [`KNOWN`] of each id below 256; `u8::MAX` for an id outside
/// the subset.
static BY_ID: [u8; 256] = {
    let mut t = [u8::MAX; 256];
    let mut k = 0;
    while k < KNOWN.len() {
        t[KNOWN[k].id as usize] = k as u8;
        k += 1;
    }
    t
};

/// `base_mode` flag meaning the motors are armed (MAV_MODE_FLAG_SAFETY_ARMED).
pub const MODE_FLAG_ARMED: u8 = 0x80;
/// `type` of a ground control station (MAV_TYPE_GCS): its heartbeat says
/// nothing about the vehicle.
pub const MAV_TYPE_GCS: u8 = 6;
/// `autopilot` of a component that is no flight controller
/// (MAV_AUTOPILOT_INVALID): cameras, gimbals, companion computers and ground
/// stations; their heartbeats say nothing about the vehicle's arming.
pub const MAV_AUTOPILOT_INVALID: u8 = 8;
/// UINT16_MAX marks an unknown cell voltage or battery voltage.
pub const UNKNOWN_U16: u16 = u16::MAX;

/// A decoded message of the subset.
#[derive(Debug, Clone, PartialEq)]
pub enum Message {
    /// HEARTBEAT (0).
    Heartbeat {
        /// MAV_TYPE.
        mav_type: u8,
        /// MAV_AUTOPILOT.
        autopilot: u8,
        /// MAV_MODE_FLAG bits.
        base_mode: u8,
        /// Autopilot-specific mode.
        custom_mode: u32,
        /// MAV_STATE.
        system_status: u8,
    },
    /// SYS_STATUS (1), the battery part.
    SysStatus {
        /// Battery voltage, mV (UINT16_MAX unknown).
        voltage_battery_mv: u16,
        /// Battery current, cA (-1 unknown).
        current_battery_ca: i16,
        /// Remaining charge, percent (-1 unknown).
        battery_remaining_pct: i8,
    },
    /// SCALED_IMU (26).
    ScaledImu {
        /// Boot time, ms.
        time_boot_ms: u32,
        /// Specific force, body FRD, milli-g.
        acc_mg: [i16; 3],
        /// Angular rate, mrad/s.
        gyro_mrad_s: [i16; 3],
    },
    /// ATTITUDE (30).
    Attitude {
        /// Boot time, ms.
        time_boot_ms: u32,
        /// Roll, pitch, yaw, rad (Z-Y-X).
        rpy_rad: [f32; 3],
        /// Body rates, rad/s.
        rates_rad_s: [f32; 3],
    },
    /// ATTITUDE_QUATERNION (31).
    AttitudeQuaternion {
        /// Boot time, ms.
        time_boot_ms: u32,
        /// Quaternion w, x, y, z (body -> NED).
        q: [f32; 4],
        /// Body rates, rad/s.
        rates_rad_s: [f32; 3],
    },
    /// LOCAL_POSITION_NED (32).
    LocalPositionNed {
        /// Boot time, ms.
        time_boot_ms: u32,
        /// Position, NED, m.
        pos_m: [f32; 3],
        /// Velocity, NED, m/s.
        vel_m_s: [f32; 3],
    },
    /// HIGHRES_IMU (105).
    HighresImu {
        /// Time, us.
        time_usec: u64,
        /// Specific force, body FRD, m/s^2.
        acc_m_s2: [f32; 3],
        /// Angular rate, rad/s.
        gyro_rad_s: [f32; 3],
    },
    /// BATTERY_STATUS (147), the voltage part.
    BatteryStatus {
        /// Battery id.
        id: u8,
        /// Cell voltages, mV (UINT16_MAX unused).
        voltages_mv: [u16; 10],
        /// Remaining charge, percent (-1 unknown).
        battery_remaining_pct: i8,
    },
}

/// `N` bytes of the payload from `o`; bytes past its end read as zero
/// (MAVLink 2 drops trailing zeros, so a carried payload may be short).
#[inline(always)]
fn bytes_at<const N: usize>(p: &[u8], o: usize) -> [u8; N] {
    match p.get(o..).and_then(|s| s.first_chunk::<N>()) {
        Some(a) => *a,
        None => {
            let mut a = [0u8; N];
            for (k, x) in a.iter_mut().enumerate() {
                *x = p.get(o + k).copied().unwrap_or(0);
            }
            a
        }
    }
}
#[inline(always)]
fn u8_at(p: &[u8], o: usize) -> u8 {
    bytes_at::<1>(p, o)[0]
}
#[inline(always)]
fn u16_at(p: &[u8], o: usize) -> u16 {
    u16::from_le_bytes(bytes_at(p, o))
}
#[inline(always)]
fn i16_at(p: &[u8], o: usize) -> i16 {
    i16::from_le_bytes(bytes_at(p, o))
}
#[inline(always)]
fn u32_at(p: &[u8], o: usize) -> u32 {
    u32::from_le_bytes(bytes_at(p, o))
}
#[inline(always)]
fn u64_at(p: &[u8], o: usize) -> u64 {
    u64::from_le_bytes(bytes_at(p, o))
}
#[inline(always)]
fn f32_at(p: &[u8], o: usize) -> f32 {
    f32::from_bits(u32_at(p, o))
}
#[inline(always)]
fn f32x3(p: &[u8], o: usize) -> [f32; 3] {
    [f32_at(p, o), f32_at(p, o + 4), f32_at(p, o + 8)]
}

impl Message {
    /// Decode a payload zero-filled to at least the message's full length.
    /// Returns `None` for an id outside the subset or a payload too short
    /// (the framer never passes one).
    pub fn decode(id: u32, p: &[u8]) -> Option<Message> {
        let info = lookup(id)?;
        if p.len() < info.full_len {
            return None;
        }
        Message::decode_carried(id, p)
    }

    /// Decode a payload as it was carried, straight from the frame: bytes
    /// past its end read as zero (what MAVLink 2's truncation of trailing
    /// zeros means), so the framer needs no zero-filled copy. `None` for
    /// an id outside the subset.
    #[inline]
    pub fn decode_carried(id: u32, p: &[u8]) -> Option<Message> {
        Some(match id {
            0 => Message::Heartbeat {
                custom_mode: u32_at(p, 0),
                mav_type: u8_at(p, 4),
                autopilot: u8_at(p, 5),
                base_mode: u8_at(p, 6),
                system_status: u8_at(p, 7),
            },
            1 => Message::SysStatus {
                voltage_battery_mv: u16_at(p, 14),
                current_battery_ca: i16_at(p, 16),
                battery_remaining_pct: u8_at(p, 30) as i8,
            },
            26 => Message::ScaledImu {
                time_boot_ms: u32_at(p, 0),
                acc_mg: [i16_at(p, 4), i16_at(p, 6), i16_at(p, 8)],
                gyro_mrad_s: [i16_at(p, 10), i16_at(p, 12), i16_at(p, 14)],
            },
            30 => Message::Attitude {
                time_boot_ms: u32_at(p, 0),
                rpy_rad: f32x3(p, 4),
                rates_rad_s: f32x3(p, 16),
            },
            31 => Message::AttitudeQuaternion {
                time_boot_ms: u32_at(p, 0),
                q: [f32_at(p, 4), f32_at(p, 8), f32_at(p, 12), f32_at(p, 16)],
                rates_rad_s: f32x3(p, 20),
            },
            32 => Message::LocalPositionNed {
                time_boot_ms: u32_at(p, 0),
                pos_m: f32x3(p, 4),
                vel_m_s: f32x3(p, 16),
            },
            105 => Message::HighresImu {
                time_usec: u64_at(p, 0),
                acc_m_s2: f32x3(p, 8),
                gyro_rad_s: f32x3(p, 20),
            },
            147 => {
                let mut v = [0u16; 10];
                for (i, c) in v.iter_mut().enumerate() {
                    *c = u16_at(p, 10 + 2 * i);
                }
                Message::BatteryStatus {
                    voltages_mv: v,
                    id: u8_at(p, 32),
                    battery_remaining_pct: u8_at(p, 35) as i8,
                }
            }
            _ => return None,
        })
    }

    /// The message id.
    pub fn id(&self) -> u32 {
        match self {
            Message::Heartbeat { .. } => 0,
            Message::SysStatus { .. } => 1,
            Message::ScaledImu { .. } => 26,
            Message::Attitude { .. } => 30,
            Message::AttitudeQuaternion { .. } => 31,
            Message::LocalPositionNed { .. } => 32,
            Message::HighresImu { .. } => 105,
            Message::BatteryStatus { .. } => 147,
        }
    }

    /// Encode the full-length payload (extensions zero), for the simulator.
    pub fn encode(&self) -> Vec<u8> {
        let mut p = Vec::with_capacity(MAX_FULL_LEN);
        let f3 = |p: &mut Vec<u8>, v: &[f32; 3]| {
            for x in v {
                p.extend_from_slice(&x.to_le_bytes());
            }
        };
        match self {
            Message::Heartbeat {
                mav_type,
                autopilot,
                base_mode,
                custom_mode,
                system_status,
            } => {
                p.extend_from_slice(&custom_mode.to_le_bytes());
                p.extend_from_slice(&[*mav_type, *autopilot, *base_mode, *system_status, 3]);
            }
            Message::SysStatus {
                voltage_battery_mv,
                current_battery_ca,
                battery_remaining_pct,
            } => {
                p.extend_from_slice(&[0u8; 14]);
                p.extend_from_slice(&voltage_battery_mv.to_le_bytes());
                p.extend_from_slice(&current_battery_ca.to_le_bytes());
                p.extend_from_slice(&[0u8; 12]);
                p.push(*battery_remaining_pct as u8);
            }
            Message::ScaledImu {
                time_boot_ms,
                acc_mg,
                gyro_mrad_s,
            } => {
                p.extend_from_slice(&time_boot_ms.to_le_bytes());
                for v in acc_mg.iter().chain(gyro_mrad_s.iter()) {
                    p.extend_from_slice(&v.to_le_bytes());
                }
            }
            Message::Attitude {
                time_boot_ms,
                rpy_rad,
                rates_rad_s,
            } => {
                p.extend_from_slice(&time_boot_ms.to_le_bytes());
                f3(&mut p, rpy_rad);
                f3(&mut p, rates_rad_s);
            }
            Message::AttitudeQuaternion {
                time_boot_ms,
                q,
                rates_rad_s,
            } => {
                p.extend_from_slice(&time_boot_ms.to_le_bytes());
                for x in q {
                    p.extend_from_slice(&x.to_le_bytes());
                }
                f3(&mut p, rates_rad_s);
            }
            Message::LocalPositionNed {
                time_boot_ms,
                pos_m,
                vel_m_s,
            } => {
                p.extend_from_slice(&time_boot_ms.to_le_bytes());
                f3(&mut p, pos_m);
                f3(&mut p, vel_m_s);
            }
            Message::HighresImu {
                time_usec,
                acc_m_s2,
                gyro_rad_s,
            } => {
                p.extend_from_slice(&time_usec.to_le_bytes());
                f3(&mut p, acc_m_s2);
                f3(&mut p, gyro_rad_s);
            }
            Message::BatteryStatus {
                id,
                voltages_mv,
                battery_remaining_pct,
            } => {
                p.extend_from_slice(&[0u8; 8]);
                p.extend_from_slice(&i16::MAX.to_le_bytes()); // temperature unknown
                for v in voltages_mv {
                    p.extend_from_slice(&v.to_le_bytes());
                }
                p.extend_from_slice(&(-1i16).to_le_bytes());
                p.extend_from_slice(&[*id, 0, 0, *battery_remaining_pct as u8]);
            }
        }
        let full = lookup(self.id()).map_or(p.len(), |i| i.full_len);
        p.resize(full.max(p.len()), 0);
        p
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn lookup_finds_each_known_id_and_nothing_else() {
        // The ids of the subset are those of common.xml (docs/references.md);
        // the table must agree with a plain search of KNOWN for every id.
        for id in (0..600u32).chain([u32::MAX, 1 << 24]) {
            let plain = KNOWN.iter().find(|m| m.id == id);
            assert_eq!(lookup(id), plain, "id {id}");
        }
        assert_eq!(lookup(30).map(|m| m.name), Some("ATTITUDE"));
    }

    #[test]
    fn encode_has_full_length_and_round_trips() {
        let msgs = [
            Message::Heartbeat {
                mav_type: 2,
                autopilot: 3,
                base_mode: 0x81,
                custom_mode: 9,
                system_status: 4,
            },
            Message::SysStatus {
                voltage_battery_mv: 12000,
                current_battery_ca: 5,
                battery_remaining_pct: 50,
            },
            Message::ScaledImu {
                time_boot_ms: 1,
                acc_mg: [1, -2, -1000],
                gyro_mrad_s: [4, 5, 6],
            },
            Message::Attitude {
                time_boot_ms: 2,
                rpy_rad: [0.1, 0.2, 0.3],
                rates_rad_s: [0.0; 3],
            },
            Message::AttitudeQuaternion {
                time_boot_ms: 3,
                q: [1.0, 0.0, 0.0, 0.0],
                rates_rad_s: [0.0; 3],
            },
            Message::LocalPositionNed {
                time_boot_ms: 4,
                pos_m: [1.0, 2.0, 3.0],
                vel_m_s: [0.1, 0.2, 0.3],
            },
            Message::HighresImu {
                time_usec: 5,
                acc_m_s2: [0.0, 0.0, -9.8],
                gyro_rad_s: [0.0; 3],
            },
            Message::BatteryStatus {
                id: 0,
                voltages_mv: [4000; 10],
                battery_remaining_pct: 70,
            },
        ];
        for m in msgs {
            let p = m.encode();
            let info = lookup(m.id()).expect("known id");
            assert_eq!(p.len(), info.full_len, "{}", info.name);
            assert_eq!(Message::decode(m.id(), &p), Some(m));
        }
    }
}
