//! The line protocol for custom firmware (docs/design.md): one sample per line of
//! whitespace-separated `key=value` pairs. Keys: `t` (s), `roll pitch yaw`
//! (degrees, Z-Y-X) or `qw qx qy qz`, optional `ax ay az` (m/s^2, body),
//! `vn ve vd` (m/s, NED), `vbat` (V), `armed` (0/1). Unknown keys are
//! ignored; a line that does not parse is counted and skipped. Lines are
//! bounded: a longer line is malformed and read past to its newline.
//! Empty lines and lines starting with `#` are skipped silently. A line
//! without `t` takes the arrival time; a `t` beyond what the link clock can
//! step through (docs/links.md) is malformed, as the clock would stand still.

use crate::attitude::quat_from_rpy_deg;
use crate::link::Counters;
use crate::link::mavlink::unit_quaternion;
use crate::sample::Sample;
use nalgebra::Vector3;
use std::collections::VecDeque;

/// Longest line accepted, bytes.
pub const MAX_LINE_LEN: usize = 512;
const MAX_QUEUED: usize = 256;

/// Why a line was refused.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
pub enum LineError {
    /// A token without `=`.
    #[error("token {0:?} is not key=value")]
    NotPair(String),
    /// A known key whose value is not a finite number.
    #[error("key {key}: expected a finite number, found {found:?}")]
    BadNumber {
        /// Key.
        key: String,
        /// Value text.
        found: String,
    },
    /// A time the link clock cannot step through (beyond
    /// [`MAX_TIME_S`](crate::link::clock::MAX_TIME_S) either way).
    #[error(
        "key t: expected a time within {max:e} s either side of zero, found {0:?}",
        max = crate::link::clock::MAX_TIME_S
    )]
    TimeRange(String),
    /// `armed` not 0 or 1.
    #[error("key armed: expected 0 or 1, found {0:?}")]
    BadArmed(String),
    /// The same key twice.
    #[error("key {0} given twice")]
    Duplicate(String),
    /// Only some of a group (roll/pitch/yaw, qw..qz, ax..az, vn..vd).
    #[error("incomplete group: {0} must come together")]
    Incomplete(&'static str),
    /// Both Euler angles and a quaternion.
    #[error("both roll/pitch/yaw and a quaternion given")]
    BothAttitudes,
    /// A quaternion far from unit length.
    #[error("quaternion is not of unit length")]
    NotUnit,
    /// No known key at all.
    #[error("no known key")]
    Empty,
    /// Longer than [`MAX_LINE_LEN`] or not UTF-8.
    #[error("line too long or not text")]
    NotText,
}

/// The place of `t` in a sample's table of values (see [`key_index`]): it
/// is range-checked apart from the other keys.
const TIME: usize = 0;
/// The place of `armed`: it is read as 0 or 1, not as a number.
const ARMED: usize = 15;

/// The place of a known key in a sample's table of values (16 places): a
/// `match`, which compiles to a few length and byte comparisons instead of
/// a string comparison per key (`tests` checks it against the key list).
fn key_index(key: &str) -> Option<usize> {
    Some(match key {
        "t" => TIME,
        "roll" => 1,
        "pitch" => 2,
        "yaw" => 3,
        "qw" => 4,
        "qx" => 5,
        "qy" => 6,
        "qz" => 7,
        "ax" => 8,
        "ay" => 9,
        "az" => 10,
        "vn" => 11,
        "ve" => 12,
        "vd" => 13,
        "vbat" => 14,
        "armed" => ARMED,
        _ => return None,
    })
}

/// Parse one line (without its newline). `Ok(None)` for blank or comment lines.
pub fn parse_line(line: &str, arrival_s: f64) -> Result<Option<Sample>, LineError> {
    let line = line.trim();
    if line.is_empty() || line.starts_with('#') {
        return Ok(None);
    }
    let mut vals: [Option<f64>; 16] = [None; 16];
    for tok in line.split_whitespace() {
        // `=` is one byte, so the token splits on a character boundary.
        let Some(eq) = tok.bytes().position(|b| b == b'=') else {
            return Err(LineError::NotPair(tok.chars().take(40).collect()));
        };
        let (k, v) = (&tok[..eq], &tok[eq + 1..]);
        let Some(idx) = key_index(k) else {
            continue; // unknown keys are ignored
        };
        if vals[idx].is_some() {
            return Err(LineError::Duplicate(k.to_string()));
        }
        let x = if idx == ARMED {
            match v {
                "0" => 0.0,
                "1" => 1.0,
                _ => return Err(LineError::BadArmed(v.chars().take(40).collect())),
            }
        } else {
            match v.parse::<f64>() {
                Ok(x) if x.is_finite() => x,
                _ => {
                    return Err(LineError::BadNumber {
                        key: k.to_string(),
                        found: v.chars().take(40).collect(),
                    });
                }
            }
        };
        if idx == TIME && !crate::link::clock::time_in_range(x) {
            return Err(LineError::TimeRange(v.chars().take(40).collect()));
        }
        vals[idx] = Some(x);
    }
    if vals.iter().all(Option::is_none) {
        return Err(LineError::Empty);
    }
    // Groups come whole or not at all (nothing allocated per line).
    let group = |r: std::ops::Range<usize>, name: &'static str| -> Result<bool, LineError> {
        let n = vals[r.clone()].iter().filter(|v| v.is_some()).count();
        match n {
            0 => Ok(false),
            n if n == r.len() => Ok(true),
            _ => Err(LineError::Incomplete(name)),
        }
    };
    let v = |i: usize| vals[i].unwrap_or(0.0);
    let rpy = group(1..4, "roll pitch yaw")?;
    let q = group(4..8, "qw qx qy qz")?;
    let acc = group(8..11, "ax ay az")?;
    let vel = group(11..14, "vn ve vd")?;
    let attitude = match (rpy, q) {
        (true, true) => return Err(LineError::BothAttitudes),
        (true, false) => Some(quat_from_rpy_deg(v(1), v(2), v(3))),
        (false, true) => Some(unit_quaternion([v(4), v(5), v(6), v(7)]).ok_or(LineError::NotUnit)?),
        (false, false) => None,
    };
    Ok(Some(Sample {
        t_s: vals[0].unwrap_or(arrival_s),
        attitude,
        accel_body_m_s2: acc.then(|| Vector3::new(v(8), v(9), v(10))),
        velocity_ned_m_s: vel.then(|| Vector3::new(v(11), v(12), v(13))),
        battery_v: vals[14],
        armed: vals[15].map(|a| a > 0.5),
    }))
}

/// Streaming line decoder: push bytes, pull samples.
#[derive(Debug, Default)]
pub struct LineDecoder {
    line: Vec<u8>,
    overflow: bool,
    out: VecDeque<Sample>,
    counters: Counters,
}

impl LineDecoder {
    /// An empty decoder.
    pub fn new() -> LineDecoder {
        LineDecoder::default()
    }

    /// Counters so far.
    pub fn counters(&self) -> Counters {
        self.counters
    }

    /// Feed bytes that arrived at `arrival_s`. Whole lines are parsed where
    /// they lie in `data` (found with `memchr`); only a line split across
    /// pushes is copied (up to [`MAX_LINE_LEN`] bytes of it), its start
    /// while it waits and then its end.
    pub fn push(&mut self, data: &[u8], arrival_s: f64) {
        let mut rest = data;
        while let Some(k) = memchr::memchr(b'\n', rest) {
            let piece = &rest[..k];
            if self.line.is_empty() && !self.overflow {
                self.take_line(piece, piece.len() > MAX_LINE_LEN, arrival_s);
            } else {
                self.hold(piece);
                self.end_line(arrival_s);
            }
            rest = &rest[k + 1..];
        }
        self.hold(rest);
    }

    /// Keep the bytes of a line still waiting for its newline: at most
    /// [`MAX_LINE_LEN`] of them, the line marked too long past that.
    fn hold(&mut self, bytes: &[u8]) {
        let room = MAX_LINE_LEN - self.line.len();
        if bytes.len() > room {
            self.line.extend_from_slice(&bytes[..room]);
            self.overflow = true;
        } else {
            self.line.extend_from_slice(bytes);
        }
    }

    /// End of input: parse a last line that has no newline.
    pub fn finish(&mut self, arrival_s: f64) {
        if !self.line.is_empty() || self.overflow {
            self.end_line(arrival_s);
        }
    }

    /// Next sample.
    pub fn pop(&mut self) -> Option<Sample> {
        self.out.pop_front()
    }

    fn end_line(&mut self, arrival_s: f64) {
        let line = std::mem::take(&mut self.line);
        self.take_line(&line, self.overflow, arrival_s);
        self.line = line;
        self.line.clear();
        self.overflow = false;
    }

    /// Parse one line (without its newline) and count it: `too_long` when
    /// it ran past [`MAX_LINE_LEN`].
    fn take_line(&mut self, line: &[u8], too_long: bool, arrival_s: f64) {
        let res = if too_long {
            Err(LineError::NotText)
        } else {
            match std::str::from_utf8(line) {
                Ok(s) => parse_line(s, arrival_s),
                Err(_) => Err(LineError::NotText),
            }
        };
        match res {
            Ok(Some(s)) => {
                self.counters.frames += 1;
                if self.out.len() >= MAX_QUEUED {
                    self.out.pop_front();
                    self.counters.dropped += 1;
                }
                self.out.push_back(s);
            }
            Ok(None) => {}
            Err(_) => self.counters.malformed += 1,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::attitude::rpy_deg;
    use approx::assert_relative_eq;
    use proptest::prelude::*;

    /// The keys of the module's documentation, in their places.
    const KEYS: [&str; 16] = [
        "t", "roll", "pitch", "yaw", "qw", "qx", "qy", "qz", "ax", "ay", "az", "vn", "ve", "vd",
        "vbat", "armed",
    ];

    #[test]
    fn every_key_has_its_own_place() {
        for (i, k) in KEYS.iter().enumerate() {
            assert_eq!(key_index(k), Some(i), "{k}");
        }
        for k in ["", "T", "rol", "rolls", "q", "vbatt", "armed ", "x"] {
            assert_eq!(key_index(k), None, "{k:?}");
        }
    }

    #[test]
    fn full_line_parses_in_degrees() {
        let s = parse_line(
            "t=12.5 roll=10 pitch=20 yaw=30 ax=0.1 ay=0 az=-9.8 vn=1 ve=2 vd=-0.5 vbat=11.9 armed=1 extra=7",
            0.0,
        )
        .expect("parses")
        .expect("a sample");
        assert_eq!(s.t_s, 12.5);
        // docs/references.md: roll 10, pitch 20, yaw 30 deg -> q (computed, scipy Rotation).
        let q = s.attitude.expect("attitude").coords;
        assert_relative_eq!(q.w, 0.951548525, epsilon = 1e-9);
        assert_relative_eq!(q.x, 0.038134576, epsilon = 1e-9);
        assert_relative_eq!(q.y, 0.189307857, epsilon = 1e-9);
        assert_relative_eq!(q.z, 0.239298338, epsilon = 1e-9);
        assert_eq!(s.accel_body_m_s2, Some(Vector3::new(0.1, 0.0, -9.8)));
        assert_eq!(s.velocity_ned_m_s, Some(Vector3::new(1.0, 2.0, -0.5)));
        assert_eq!(s.battery_v, Some(11.9));
        assert_eq!(s.armed, Some(true));
    }

    #[test]
    fn quaternion_line_and_arrival_time() {
        let s = parse_line(
            "qw=0.951548525 qx=0.038134576 qy=0.189307857 qz=0.239298338",
            4.0,
        )
        .expect("parses")
        .expect("a sample");
        assert_eq!(s.t_s, 4.0);
        let rpy = rpy_deg(&s.attitude.expect("attitude"));
        // Same docs/references.md attitude vector, the other way round.
        assert_relative_eq!(rpy[0], 10.0, epsilon = 1e-6);
        assert_relative_eq!(rpy[1], 20.0, epsilon = 1e-6);
        assert_relative_eq!(rpy[2], 30.0, epsilon = 1e-6);
    }

    #[test]
    fn bad_lines_are_refused_with_a_reason() {
        let cases = [
            (
                "t=1 roll=1 pitch=2",
                LineError::Incomplete("roll pitch yaw"),
            ),
            ("t=1 roll", LineError::NotPair("roll".into())),
            (
                "t=x",
                LineError::BadNumber {
                    key: "t".into(),
                    found: "x".into(),
                },
            ),
            (
                "vbat=nan",
                LineError::BadNumber {
                    key: "vbat".into(),
                    found: "nan".into(),
                },
            ),
            ("armed=yes", LineError::BadArmed("yes".into())),
            ("t=1 t=2", LineError::Duplicate("t".into())),
            ("qw=2 qx=0 qy=0 qz=0", LineError::NotUnit),
            (
                "roll=0 pitch=0 yaw=0 qw=1 qx=0 qy=0 qz=0",
                LineError::BothAttitudes,
            ),
            ("foo=1 bar=2", LineError::Empty),
            // 3e15 s: doubles there are 0.5 apart, so a 0.25 s tick cannot
            // step the clock (IEEE 754 binary64 spacing, docs/links.md).
            ("t=3e15 vbat=12", LineError::TimeRange("3e15".into())),
            ("t=-3e15 vbat=12", LineError::TimeRange("-3e15".into())),
        ];
        for (line, want) in cases {
            assert_eq!(parse_line(line, 0.0), Err(want), "{line}");
        }
        assert_eq!(parse_line("  # comment", 0.0), Ok(None));
        assert_eq!(parse_line("", 0.0), Ok(None));
    }

    #[test]
    fn stream_counts_and_recovers() {
        let mut d = LineDecoder::new();
        let mut text = b"t=1 roll=0 pitch=0 yaw=0\r\nbad line\n".to_vec();
        text.extend(std::iter::repeat_n(b'x', MAX_LINE_LEN + 10));
        text.extend_from_slice(b"\n\xff\xfe\nt=2 vbat=12");
        d.push(&text, 0.0);
        d.finish(0.0);
        let c = d.counters();
        assert_eq!(c.frames, 2);
        assert_eq!(c.malformed, 3); // "bad line", the long line, the non-text line
        assert_eq!(d.pop().map(|s| s.t_s), Some(1.0));
        assert_eq!(d.pop().and_then(|s| s.battery_v), Some(12.0));
    }

    /// The reading the decoder had before lines were read where they lie,
    /// kept as the model: one byte at a time into a bounded line, the
    /// line parsed at its newline with the arrival time of the push that
    /// brought the newline (or of the finish). Returns the samples and the
    /// counters.
    fn bytewise(pieces: &[(&[u8], f64)], finish_s: f64) -> (Vec<Sample>, Counters) {
        let (mut line, mut overflow) = (Vec::new(), false);
        let (mut out, mut c) = (Vec::new(), Counters::default());
        let mut end = |line: &mut Vec<u8>, overflow: &mut bool, at_s: f64| {
            let res = match std::str::from_utf8(line) {
                Ok(s) if !*overflow => parse_line(s, at_s),
                _ => Err(LineError::NotText),
            };
            match res {
                Ok(Some(s)) => {
                    c.frames += 1;
                    out.push(s);
                }
                Ok(None) => {}
                Err(_) => c.malformed += 1,
            }
            line.clear();
            *overflow = false;
        };
        for &(piece, at_s) in pieces {
            for &b in piece {
                if b == b'\n' {
                    end(&mut line, &mut overflow, at_s);
                } else if line.len() < MAX_LINE_LEN {
                    line.push(b);
                } else {
                    overflow = true;
                }
            }
        }
        if !line.is_empty() || overflow {
            end(&mut line, &mut overflow, finish_s);
        }
        (out, c)
    }

    /// Pieces of a stream: good lines (with and without a time, so the
    /// arrival time counts), bad ones, lines from just under the length
    /// bound to twice past it, blank and comment lines, stray bytes.
    fn stream_piece() -> impl Strategy<Value = Vec<u8>> {
        prop_oneof![
            Just(b"t=1.5 qw=1 qx=0 qy=0 qz=0 vbat=12.1 armed=1\n".to_vec()),
            Just(b"t=2 roll=10 pitch=-5 yaw=90 ax=0 ay=0 az=-9.8\r\n".to_vec()),
            Just(b"vbat=12.0 armed=0\n".to_vec()),
            Just(b"bad line\n# comment\n\n".to_vec()),
            // Good lines without a time, at the bound's length give or
            // take two bytes, or anywhere up to twice past it: spaces
            // between two pairs, so only the length decides.
            prop_oneof![
                MAX_LINE_LEN - 2..MAX_LINE_LEN + 3,
                MAX_LINE_LEN - 8..2 * MAX_LINE_LEN + 8
            ]
            .prop_map(|n| {
                let mut l = b"vbat=11".to_vec();
                l.resize(n - 7, b' ');
                l.extend_from_slice(b"armed=1\n");
                l
            }),
            proptest::collection::vec(any::<u8>(), 0..40),
            proptest::collection::vec(prop_oneof![Just(b'\n'), Just(b'='), Just(b' ')], 0..6),
        ]
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(256))]
        #[test]
        fn lines_read_where_they_lie_give_what_bytewise_reading_gave(
            parts in proptest::collection::vec(stream_piece(), 0..30),
            cuts in proptest::collection::vec(any::<proptest::sample::Index>(), 0..12),
        ) {
            let data = parts.concat();
            let mut at: Vec<usize> = cuts.iter().map(|c| c.index(data.len() + 1)).collect();
            at.sort_unstable();
            at.push(data.len());
            // Each push arrives at its own time, so a line ended by a
            // later push must take that push's time.
            let mut pieces = Vec::new();
            let mut from = 0;
            for (k, c) in at.into_iter().enumerate() {
                pieces.push((&data[from..c], 100.0 + k as f64));
                from = c;
            }
            let finish_s = 1000.0;
            let (want, want_c) = bytewise(&pieces, finish_s);
            let mut d = LineDecoder::new();
            for &(p, at_s) in &pieces {
                d.push(p, at_s);
                prop_assert!(d.line.len() <= MAX_LINE_LEN);
            }
            d.finish(finish_s);
            let mut got = Vec::new();
            while let Some(s) = d.pop() {
                got.push(s);
            }
            // At most 30 pieces make far fewer samples than the queue
            // holds, so none is dropped and all are compared.
            prop_assert!(want.len() < MAX_QUEUED);
            prop_assert_eq!(d.counters(), want_c);
            prop_assert_eq!(got, want);
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn arbitrary_bytes_never_panic_and_stay_bounded(data in proptest::collection::vec(any::<u8>(), 0..4000)) {
            let mut d = LineDecoder::new();
            d.push(&data, 0.0);
            prop_assert!(d.line.len() <= MAX_LINE_LEN);
            d.push(b"\nt=9 roll=1 pitch=2 yaw=3\n", 0.0);
            let mut last = None;
            while let Some(s) = d.pop() { last = Some(s); }
            prop_assert_eq!(last.map(|s| s.t_s), Some(9.0));
        }
    }
}
