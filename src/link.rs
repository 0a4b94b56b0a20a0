//! Links: where telemetry comes from. The decoders (`mavlink`, `line`) and
//! the recording format (`record`) are pure and take bytes from the caller;
//! The transports that open sockets, serial ports and files are the
//! application's (`src/transport.rs` in the binary).

pub mod clock;
pub mod line;
pub mod mavlink;
pub mod record;
pub mod spec;

use crate::sample::Sample;
use serde::Serialize;

/// What went through a decoder. The link-health line shows these.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq, Serialize)]
pub struct Counters {
    /// Good frames or lines, accepted.
    pub frames: u64,
    /// MAVLink candidates refused: bad CRC or an impossible header.
    pub crc_errors: u64,
    /// MAVLink frames with an id outside the subset, skipped.
    pub unknown: u64,
    /// Lines (or frame values) that do not parse, skipped.
    pub malformed: u64,
    /// Good frames refused: wrong system id, unsigned or badly signed or
    /// replayed when a key is set, or a UDP sender not on the allow-list.
    pub rejected: u64,
    /// Samples lost because nobody took them in time.
    pub dropped: u64,
}

impl Counters {
    /// Sum of two sets of counters.
    pub fn plus(&self, o: &Counters) -> Counters {
        Counters {
            frames: self.frames + o.frames,
            crc_errors: self.crc_errors + o.crc_errors,
            unknown: self.unknown + o.unknown,
            malformed: self.malformed + o.malformed,
            rejected: self.rejected + o.rejected,
            dropped: self.dropped + o.dropped,
        }
    }
}

/// Which decoder reads a link.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Proto {
    /// MAVLink v1/v2.
    Mavlink,
    /// key=value lines.
    Line,
    /// Decide from the data: the first protocol to give a good frame wins.
    #[default]
    Auto,
}

/// A protocol choice that cannot be honoured.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum ProtoError {
    /// Lines carry no signature: with a key, nothing they say could be trusted.
    #[error(
        "the line protocol cannot be used with a signing key: lines carry no signature, so none of them could be trusted; read signed MAVLink 2 (protocol mavlink or auto), or leave out the key"
    )]
    LineWithKey,
}

/// A decoder for one link, whichever protocol it speaks.
#[derive(Debug)]
pub struct Decoder {
    mav: Option<(mavlink::MavDecoder, mavlink::SampleMaker)>,
    line: Option<line::LineDecoder>,
    out: std::collections::VecDeque<Sample>,
    extra: Counters,
}

/// What [`Decoder::push_cut`] hands out, in the order of the bytes.
#[derive(Debug, Clone, PartialEq)]
pub enum Delivery {
    /// A sample.
    Sample(Sample),
    /// The end of a piece, with the counters after it.
    Cut(Counters),
}

/// Samples kept for the caller before the oldest are dropped.
const MAX_QUEUED_SAMPLES: usize = 512;

impl Decoder {
    /// A decoder for `proto` with the MAVLink filters in `cfg`. With a
    /// signing key only signed MAVLink is read: `Auto` never settles on
    /// lines, and `Line` is refused.
    pub fn new(proto: Proto, cfg: mavlink::MavConfig) -> Result<Decoder, ProtoError> {
        let keyed = cfg.signing_key.is_some();
        let mav = || {
            Some((
                mavlink::MavDecoder::new(cfg.clone()),
                mavlink::SampleMaker::default(),
            ))
        };
        let (m, l) = match proto {
            Proto::Line if keyed => return Err(ProtoError::LineWithKey),
            Proto::Auto if keyed => (mav(), None),
            Proto::Mavlink => (mav(), None),
            Proto::Line => (None, Some(line::LineDecoder::new())),
            Proto::Auto => (mav(), Some(line::LineDecoder::new())),
        };
        Ok(Decoder {
            mav: m,
            line: l,
            out: Default::default(),
            extra: Counters::default(),
        })
    }

    /// The signature checker, when a key is set: live links set its wall
    /// clock and save its replay floor.
    pub fn verifier_mut(&mut self) -> Option<&mut mavlink::Verifier> {
        self.mav.as_mut().and_then(|(m, _)| m.verifier_mut())
    }

    /// The protocol in use (auto until the data has decided).
    pub fn proto(&self) -> Proto {
        match (&self.mav, &self.line) {
            (Some(_), None) => Proto::Mavlink,
            (None, Some(_)) => Proto::Line,
            _ => Proto::Auto,
        }
    }

    /// Feed bytes that arrived at `arrival_s` (receiver clock).
    pub fn push(&mut self, data: &[u8], arrival_s: f64) {
        // Small pieces, collected after each, so the inner queues never fill
        // and only this decoder's queue drops (and counts) samples.
        for piece in data.chunks(1024) {
            if let Some(l) = self.line.as_mut() {
                l.push(piece, arrival_s);
            }
            if let Some((m, _)) = self.mav.as_mut() {
                m.push(piece);
            }
            self.settle();
            self.collect(arrival_s);
        }
    }

    /// Feed bytes that arrived at `arrival_s`, taken in pieces that end
    /// after each byte equal to `cut` (the last at the end of `data`), and
    /// hand each sample and, after each piece, the counters to `each`, in
    /// order: what [`push`](Self::push) of each piece, then popping its
    /// samples and reading [`counters`](Self::counters), gives, delivery
    /// for delivery. Once the link is known to speak MAVLink the frames
    /// are read where they lie and their samples go straight to `each`
    /// (no queue, nothing dropped); until then each piece goes through
    /// `push`. The arrival time only times samples before the first
    /// sender time, so one for all the bytes is what each piece's would be
    /// for a caller whose clock runs on sender time.
    pub fn push_cut(
        &mut self,
        data: &[u8],
        arrival_s: f64,
        cut: u8,
        mut each: impl FnMut(Delivery),
    ) {
        let mut rest = data;
        while !rest.is_empty() {
            if self.line.is_none()
                && let Some((m, maker)) = self.mav.as_mut()
            {
                while let Some(s) = self.out.pop_front() {
                    each(Delivery::Sample(s));
                }
                let extra = &mut self.extra;
                m.push_each_cut(rest, cut, |d| match d {
                    mavlink::Decoded::Frame(f) => match maker.sample(f, arrival_s) {
                        mavlink::SampleOutcome::Sample(s) => each(Delivery::Sample(s)),
                        mavlink::SampleOutcome::Nothing => {}
                        mavlink::SampleOutcome::Malformed => extra.malformed += 1,
                    },
                    mavlink::Decoded::Cut(c) => each(Delivery::Cut(c.plus(extra))),
                });
                return;
            }
            let end = memchr::memchr(cut, rest).map_or(rest.len(), |k| k + 1);
            let (piece, tail) = rest.split_at(end);
            rest = tail;
            self.push(piece, arrival_s);
            while let Some(s) = self.out.pop_front() {
                each(Delivery::Sample(s));
            }
            each(Delivery::Cut(self.counters()));
        }
    }

    /// End of input: a last line without a newline still counts, and
    /// MAVLink bytes held for a frame that never completed are searched
    /// again for the frames behind them.
    pub fn finish(&mut self, arrival_s: f64) {
        if let Some(l) = self.line.as_mut() {
            l.finish(arrival_s);
        }
        if let Some((m, _)) = self.mav.as_mut() {
            m.finish();
        }
        self.settle();
        self.collect(arrival_s);
    }

    /// Next sample, oldest first.
    pub fn pop(&mut self) -> Option<Sample> {
        self.out.pop_front()
    }

    /// Counters of the protocol in use.
    pub fn counters(&self) -> Counters {
        let base = match (&self.mav, &self.line) {
            (Some((m, _)), Some(l)) => {
                // Undecided: report MAVLink's view unless lines are clearly winning.
                if l.counters().frames > 0 {
                    l.counters()
                } else {
                    m.counters()
                }
            }
            (Some((m, _)), None) => m.counters(),
            (None, Some(l)) => l.counters(),
            (None, None) => Counters::default(),
        };
        base.plus(&self.extra)
    }

    /// Count a sample the caller could not deliver.
    pub fn count_dropped(&mut self, n: u64) {
        self.extra.dropped += n;
    }

    /// Count a datagram refused before decoding (sender not allowed).
    pub fn count_rejected(&mut self, n: u64) {
        self.extra.rejected += n;
    }

    fn settle(&mut self) {
        if self.mav.is_some() && self.line.is_some() {
            let mf = self.mav.as_ref().map_or(0, |(m, _)| m.counters().frames);
            let lf = self.line.as_ref().map_or(0, |l| l.counters().frames);
            if mf > 0 {
                self.line = None;
            } else if lf > 0 {
                self.mav = None;
            }
        }
    }

    fn collect(&mut self, arrival_s: f64) {
        // Straight into the bounded queue: nothing allocated per sample.
        let (out, extra) = (&mut self.out, &mut self.extra);
        if let Some((m, maker)) = self.mav.as_mut() {
            while let Some(f) = m.pop() {
                match maker.sample(&f, arrival_s) {
                    mavlink::SampleOutcome::Sample(s) => queue(out, extra, s),
                    mavlink::SampleOutcome::Nothing => {}
                    mavlink::SampleOutcome::Malformed => extra.malformed += 1,
                }
            }
        }
        if let Some(l) = self.line.as_mut() {
            // While undecided, line samples wait in the line decoder's queue.
            if self.mav.is_none() {
                while let Some(s) = l.pop() {
                    queue(out, extra, s);
                }
            }
        }
    }
}

/// Queue a sample, dropping (and counting) the oldest when full.
fn queue(out: &mut std::collections::VecDeque<Sample>, extra: &mut Counters, s: Sample) {
    if out.len() >= MAX_QUEUED_SAMPLES {
        out.pop_front();
        extra.dropped += 1;
    }
    out.push_back(s);
}

#[cfg(test)]
mod tests {
    use super::*;

    use proptest::prelude::*;

    #[test]
    fn samples_nobody_takes_are_dropped_and_counted() {
        let mut d = Decoder::new(Proto::Line, Default::default()).expect("no key");
        let text = "t=1 vbat=12\n".repeat(MAX_QUEUED_SAMPLES + 10);
        d.push(text.as_bytes(), 0.0);
        let c = d.counters();
        assert_eq!((c.frames, c.dropped), (MAX_QUEUED_SAMPLES as u64 + 10, 10));
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn auto_decoder_survives_arbitrary_bytes(data in proptest::collection::vec(any::<u8>(), 0..3000)) {
            let mut d = Decoder::new(Proto::Auto, Default::default()).expect("no key");
            d.push(&data, 0.0);
            d.finish(0.0);
            let mut n = 0;
            while d.pop().is_some() { n += 1; }
            prop_assert!(n <= MAX_QUEUED_SAMPLES);
        }
    }

    /// Bytes: good MAVLink frames (v1 and v2, several messages, values
    /// that put newline and start bytes inside them), garbage and lines.
    fn mixed_stream() -> impl Strategy<Value = Vec<u8>> {
        let part = prop_oneof![
            4 => (any::<u32>(), any::<[i16; 3]>(), 1u8..=2, any::<u8>()).prop_map(|(t, a, v, seq)| {
                let msg = mavlink::Message::ScaledImu {
                    time_boot_ms: t % 100_000_000,
                    acc_mg: a,
                    gyro_mrad_s: [10, 10, 10],
                };
                mavlink::encode_frame(v, seq, 1, 1, &msg, None)
            }),
            4 => (any::<u32>(), any::<[f32; 4]>(), any::<u8>()).prop_map(|(t, q, seq)| {
                let msg = mavlink::Message::AttitudeQuaternion {
                    time_boot_ms: t % 100_000_000,
                    q,
                    rates_rad_s: [0.0; 3],
                };
                mavlink::encode_frame(2, seq, 1, 1, &msg, None)
            }),
            1 => any::<u16>().prop_map(|mv| {
                let msg = mavlink::Message::SysStatus {
                    voltage_battery_mv: mv,
                    current_battery_ca: -1,
                    battery_remaining_pct: -1,
                };
                mavlink::encode_frame(1, 0, 1, 1, &msg, None)
            }),
            2 => proptest::collection::vec(
                prop_oneof![Just(b'\n'), Just(mavlink::STX_V1), Just(mavlink::STX_V2), any::<u8>()],
                0..40
            ),
            1 => Just(b"t=1 roll=0 pitch=0 yaw=0 vbat=12\n".to_vec()),
        ];
        proptest::collection::vec(part, 0..60).prop_map(|v| v.concat())
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(256))]
        /// `push_cut` gives what pushing each newline-ended piece and then
        /// popping its samples and reading the counters gives (the way
        /// replays were read before it), for every protocol choice and
        /// however the bytes are split into reads.
        #[test]
        fn push_cut_is_push_piece_by_piece(
            data in mixed_stream(),
            reads in proptest::collection::vec(1usize..700, 1..20),
            proto in prop_oneof![Just(Proto::Auto), Just(Proto::Mavlink), Just(Proto::Line)],
        ) {
            let mut by_piece = Decoder::new(proto, Default::default()).expect("no key");
            let mut cut = Decoder::new(proto, Default::default()).expect("no key");
            let (mut want, mut got) = (Vec::new(), Vec::new());
            let mut rest = data.as_slice();
            let mut k = 0;
            while !rest.is_empty() {
                let n = reads[k % reads.len()].min(rest.len());
                k += 1;
                let (read, tail) = rest.split_at(n);
                rest = tail;
                let arrival_s = k as f64;
                for piece in read.split_inclusive(|&b| b == b'\n') {
                    by_piece.push(piece, arrival_s);
                    while let Some(s) = by_piece.pop() {
                        want.push(Delivery::Sample(s));
                    }
                    want.push(Delivery::Cut(by_piece.counters()));
                }
                cut.push_cut(read, arrival_s, b'\n', |d| got.push(d));
            }
            by_piece.finish(0.0);
            cut.finish(0.0);
            prop_assert_eq!(by_piece.counters(), cut.counters());
            prop_assert_eq!(by_piece.pop(), cut.pop());
            // Values that are not numbers (NaN quaternions) compare as
            // unequal to themselves: compare the debug text.
            prop_assert_eq!(format!("{want:?}"), format!("{got:?}"));
        }
    }

    #[test]
    fn a_key_means_signed_mavlink_only() {
        let key = mavlink::SigningKey::from_bytes([5u8; 32]);
        let cfg = mavlink::MavConfig {
            signing_key: Some(key.clone()),
            ..Default::default()
        };
        assert_eq!(
            Decoder::new(Proto::Line, cfg.clone()).err(),
            Some(ProtoError::LineWithKey)
        );
        // Unsigned text first cannot win the protocol choice.
        let mut d = Decoder::new(Proto::Auto, cfg).expect("auto with a key");
        assert_eq!(d.proto(), Proto::Mavlink);
        d.push(
            b"t=0 roll=0 pitch=0 yaw=0 vbat=12.6 armed=0
"
            .repeat(3)
            .as_slice(),
            0.0,
        );
        assert_eq!(d.proto(), Proto::Mavlink);
        assert!(d.pop().is_none());
        let msg = mavlink::Message::Attitude {
            time_boot_ms: 1500,
            rpy_rad: [0.0; 3],
            rates_rad_s: [0.0; 3],
        };
        for (i, k) in [&key, &key, &mavlink::SigningKey::from_bytes([6u8; 32])]
            .into_iter()
            .enumerate()
        {
            let sign = mavlink::SignWith {
                key: k,
                link_id: 0,
                timestamp: 1000 + i as u64,
            };
            d.push(
                &mavlink::encode_frame(2, i as u8, 1, 1, &msg, Some(sign)),
                0.0,
            );
        }
        d.push(&mavlink::encode_frame(2, 9, 1, 1, &msg, None), 0.0);
        let c = d.counters();
        // Two genuine frames decoded; the wrongly signed and the unsigned
        // one counted as rejected, not as decoded.
        assert_eq!((c.frames, c.rejected, c.malformed), (2, 2, 0));
        assert_eq!(d.pop().map(|s| s.t_s), Some(1.5));
    }

    #[test]
    fn auto_settles_on_lines_for_text() {
        let mut d = Decoder::new(Proto::Auto, Default::default()).expect("no key");
        d.push(b"t=1 roll=0 pitch=0 yaw=0\n", 0.0);
        assert_eq!(d.proto(), Proto::Line);
        assert_eq!(d.pop().map(|s| s.t_s), Some(1.0));
    }

    #[test]
    fn auto_settles_on_mavlink_for_frames() {
        // docs/references.md v1 ATTITUDE frame (pymavlink 2.4.50 reference frames).
        let hex = "fe1c0001011e40e20100cdcccc3dcdcc4cbe0000c03f0ad7233c0ad7a3bc8fc2f53c4c6c";
        let bytes: Vec<u8> = (0..hex.len())
            .step_by(2)
            .map(|i| u8::from_str_radix(&hex[i..i + 2], 16).expect("hex"))
            .collect();
        let mut d = Decoder::new(Proto::Auto, Default::default()).expect("no key");
        d.push(&bytes, 0.0);
        assert_eq!(d.proto(), Proto::Mavlink);
        assert_eq!(d.counters().frames, 1);
        // time_boot_ms 123456 -> 123.456 s (docs/references.md).
        assert_eq!(d.pop().map(|s| s.t_s), Some(123.456));
    }
}
