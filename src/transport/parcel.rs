//! A message as the channel carries it from the reader to its consumer.
//!
//! A replay hands several hundred thousand messages a second from one core
//! to the other. As [`LinkMsg`]s they are 152 bytes each, most of it a
//! [`Sample`] with room for every field; writing them into the batch was a
//! third of the reader's time, and reading them back a large part of the
//! consumer's. A sample made from a MAVLink frame carries one field, so
//! it travels as that field alone: a parcel is at most 64 bytes (one cache
//! line), and is unpacked where it is taken into the very message that was
//! packed, bit for bit. Anything else (a sample of several fields from the
//! line protocol, bytes, events, the end) travels boxed; those are rare.

use super::LinkMsg;
use cagehand::link::Counters;
use cagehand::sample::Sample;
use nalgebra::{UnitQuaternion, Vector3};

/// A [`LinkMsg`], packed for the channel ([`Parcel::pack`],
/// [`Parcel::unpack`]).
#[derive(Debug, Clone, PartialEq)]
pub enum Parcel {
    /// A sample carrying only an attitude.
    Attitude {
        at_s: f64,
        t_s: f64,
        q: UnitQuaternion<f64>,
    },
    /// A sample carrying only a specific force.
    Accel {
        at_s: f64,
        t_s: f64,
        f: Vector3<f64>,
    },
    /// A sample carrying only a velocity.
    Velocity {
        at_s: f64,
        t_s: f64,
        v: Vector3<f64>,
    },
    /// A sample carrying only a battery voltage.
    Battery { at_s: f64, t_s: f64, volts: f64 },
    /// A sample carrying only whether the motors are armed.
    Armed { at_s: f64, t_s: f64, armed: bool },
    /// [`LinkMsg::Health`].
    Health { at_s: f64, counters: Counters },
    /// [`LinkMsg::Tick`].
    Tick { at_s: f64 },
    /// Any other message, as it is.
    Other(Box<LinkMsg>),
}

impl Parcel {
    /// The parcel that carries `msg`.
    pub fn pack(msg: LinkMsg) -> Parcel {
        match msg {
            LinkMsg::Sample { at_s, sample } => Parcel::sample(at_s, sample),
            LinkMsg::Health { at_s, counters } => Parcel::Health { at_s, counters },
            LinkMsg::Tick { at_s } => Parcel::Tick { at_s },
            other => Parcel::Other(Box::new(other)),
        }
    }

    /// The parcel that carries `LinkMsg::Sample { at_s, sample }`.
    #[inline]
    pub fn sample(at_s: f64, sample: Sample) -> Parcel {
        // Taken apart whole, so a field added to `Sample` must be placed
        // here before this builds.
        let Sample {
            t_s,
            attitude,
            accel_body_m_s2,
            velocity_ned_m_s,
            battery_v,
            armed,
        } = &sample;
        let t_s = *t_s;
        match (
            attitude,
            accel_body_m_s2,
            velocity_ned_m_s,
            battery_v,
            armed,
        ) {
            (&Some(q), None, None, None, None) => Parcel::Attitude { at_s, t_s, q },
            (None, &Some(f), None, None, None) => Parcel::Accel { at_s, t_s, f },
            (None, None, &Some(v), None, None) => Parcel::Velocity { at_s, t_s, v },
            (None, None, None, &Some(volts), None) => Parcel::Battery { at_s, t_s, volts },
            (None, None, None, None, &Some(armed)) => Parcel::Armed { at_s, t_s, armed },
            _ => Parcel::Other(Box::new(LinkMsg::Sample { at_s, sample })),
        }
    }

    /// The message it carries.
    #[inline]
    pub fn unpack(self) -> LinkMsg {
        let (at_s, sample) = match self {
            Parcel::Attitude { at_s, t_s, q } => (at_s, one(t_s, |s| s.attitude = Some(q))),
            Parcel::Accel { at_s, t_s, f } => (at_s, one(t_s, |s| s.accel_body_m_s2 = Some(f))),
            Parcel::Velocity { at_s, t_s, v } => (at_s, one(t_s, |s| s.velocity_ned_m_s = Some(v))),
            Parcel::Battery { at_s, t_s, volts } => (at_s, one(t_s, |s| s.battery_v = Some(volts))),
            Parcel::Armed { at_s, t_s, armed } => (at_s, one(t_s, |s| s.armed = Some(armed))),
            Parcel::Health { at_s, counters } => return LinkMsg::Health { at_s, counters },
            Parcel::Tick { at_s } => return LinkMsg::Tick { at_s },
            Parcel::Other(msg) => return *msg,
        };
        LinkMsg::Sample { at_s, sample }
    }

    /// Whether it carries a sample (what a full channel counts as dropped).
    pub fn is_sample(&self) -> bool {
        match self {
            Parcel::Attitude { .. }
            | Parcel::Accel { .. }
            | Parcel::Velocity { .. }
            | Parcel::Battery { .. }
            | Parcel::Armed { .. } => true,
            Parcel::Other(m) => matches!(**m, LinkMsg::Sample { .. }),
            Parcel::Health { .. } | Parcel::Tick { .. } => false,
        }
    }

    /// Whether it carries counters.
    pub fn is_health(&self) -> bool {
        match self {
            Parcel::Health { .. } => true,
            Parcel::Other(m) => matches!(**m, LinkMsg::Health { .. }),
            _ => false,
        }
    }
}

/// A sample at `t_s` with the one field `set` fills.
#[inline(always)]
fn one(t_s: f64, set: impl FnOnce(&mut Sample)) -> Sample {
    let mut s = Sample {
        t_s,
        ..Sample::default()
    };
    set(&mut s);
    s
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::transport::LinkEvent;
    use nalgebra::Quaternion;

    fn messages() -> Vec<LinkMsg> {
        let q = UnitQuaternion::new_unchecked(Quaternion::new(0.5, -0.5, 0.5, 0.5));
        let v = Vector3::new(0.1, -2.5, 9.75);
        let one = |f: &dyn Fn(&mut Sample)| {
            let mut s = Sample {
                t_s: 12.345,
                ..Sample::default()
            };
            f(&mut s);
            LinkMsg::Sample {
                at_s: 3.5,
                sample: s,
            }
        };
        vec![
            one(&|s| s.attitude = Some(q)),
            one(&|s| s.accel_body_m_s2 = Some(v)),
            one(&|s| s.velocity_ned_m_s = Some(-v)),
            one(&|s| s.battery_v = Some(15.9)),
            one(&|s| s.armed = Some(true)),
            one(&|s| s.armed = Some(false)),
            // Several fields (the line protocol), and none.
            one(&|s| {
                s.attitude = Some(q);
                s.battery_v = Some(12.0);
                s.armed = Some(false);
            }),
            one(&|_| {}),
            LinkMsg::Health {
                at_s: 1.0,
                counters: Counters {
                    frames: 7,
                    crc_errors: 1,
                    unknown: 2,
                    malformed: 3,
                    rejected: 4,
                    dropped: 5,
                },
            },
            LinkMsg::Tick { at_s: 2.0 },
            LinkMsg::Bytes {
                at_s: 2.5,
                data: vec![1, 2, 3],
            },
            LinkMsg::Event {
                at_s: 3.0,
                event: LinkEvent::Note("a note".into()),
            },
            LinkMsg::End { at_s: 4.0 },
        ]
    }

    #[test]
    fn a_message_comes_out_as_it_went_in() {
        for m in messages() {
            let p = Parcel::pack(m.clone());
            assert_eq!(p.is_sample(), matches!(m, LinkMsg::Sample { .. }), "{m:?}");
            assert_eq!(p.is_health(), matches!(m, LinkMsg::Health { .. }), "{m:?}");
            assert_eq!(p.unpack(), m);
        }
    }

    #[test]
    fn values_that_are_not_numbers_keep_their_bits() {
        // A sample is packed before it is checked: NaN must pass through
        // unchanged for the consumer to count it as it always did.
        let nan = f64::from_bits(0x7FF8_0000_DEAD_BEEF);
        let s = Sample {
            t_s: nan,
            accel_body_m_s2: Some(Vector3::new(nan, -0.0, f64::INFINITY)),
            ..Sample::default()
        };
        let LinkMsg::Sample { sample, .. } = Parcel::sample(nan, s).unpack() else {
            panic!("a sample comes back a sample");
        };
        let f = sample.accel_body_m_s2.expect("the force comes back");
        assert_eq!(sample.t_s.to_bits(), nan.to_bits());
        assert_eq!(f.x.to_bits(), nan.to_bits());
        assert_eq!(f.y.to_bits(), (-0.0f64).to_bits());
        assert_eq!(f.z, f64::INFINITY);
    }

    #[test]
    fn the_frequent_parcels_fit_one_cache_line() {
        // The point of packing (see the module's comment): 64 bytes
        // against the 152 of a `LinkMsg`.
        assert!(std::mem::size_of::<Parcel>() <= 64);
        assert!(std::mem::size_of::<LinkMsg>() > 64);
    }
}
