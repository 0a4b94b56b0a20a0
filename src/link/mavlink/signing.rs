//! MAVLink 2 message signing: the secret key, the 6-byte signature and the
//! replay rules (docs/links.md, "Signing"). The signature is the first 6
//! bytes of SHA-256(key | header from 0xFD | payload | CRC | link id |
//! timestamp), compared in constant time. A stream is a (sysid, compid,
//! link id) triple; its timestamp must grow. A stream first heard in this
//! run may not start more than one minute (6,000,000 ticks of 10 us)
//! behind the local timestamp, the later of the newest accepted timestamp
//! and the wall clock the caller supplies; a stream's timestamp moves only
//! after a valid signature.
//!
//! The [`ReplayFloor`] is the state that must outlive the process (so a
//! capture cannot be replayed to a new process). It is plain data with a
//! text form; reading and writing its file is the caller's business.

use sha2::{Digest, Sha256};
use std::collections::{BTreeMap, HashSet};
use subtle::ConstantTimeEq;

/// Length of the signature block after the CRC: link id, 48-bit timestamp,
/// 6-byte signature.
pub const SIGNATURE_LEN: usize = 13;

/// Incompatibility flag saying the frame is signed.
pub const INCOMPAT_SIGNED: u8 = 0x01;

/// Signing timestamp ticks per second (the unit is 10 us).
pub const TICKS_PER_S: u64 = 100_000;

/// Seconds from the Unix epoch to 2015-01-01 00:00:00 UTC, where signing
/// timestamps start.
pub const SIGNING_EPOCH_UNIX_S: u64 = 1_420_070_400;

/// How far behind the local timestamp a stream first heard may start:
/// one minute, as the MAVLink signing guide sets it (docs/links.md).
pub const NEW_STREAM_WINDOW_TICKS: u64 = 60 * TICKS_PER_S;

/// Largest timestamp a frame can carry (48 bits).
pub const MAX_TIMESTAMP: u64 = (1 << 48) - 1;

/// The signing timestamp for a wall-clock time given as seconds since the
/// Unix epoch (0 before 2015, capped at 48 bits).
pub fn timestamp_from_unix_s(unix_s: f64) -> u64 {
    let s = unix_s - SIGNING_EPOCH_UNIX_S as f64;
    if !s.is_finite() || s <= 0.0 {
        return 0;
    }
    ((s * TICKS_PER_S as f64) as u64).min(MAX_TIMESTAMP)
}

/// A 32-byte MAVLink 2 signing secret.
#[derive(Clone, PartialEq, Eq)]
pub struct SigningKey([u8; 32]);

impl std::fmt::Debug for SigningKey {
    // The secret never reaches a log or an error message.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("SigningKey(..)")
    }
}

/// Why a key file's text is not a key.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum KeyError {
    /// Wrong number of hexadecimal characters.
    #[error(
        "signing key: expected 64 hexadecimal characters on one line, found {found} characters"
    )]
    Length {
        /// Characters found.
        found: usize,
    },
    /// A character that is not hexadecimal.
    #[error("signing key: expected hexadecimal digits, found {found:?} at character {index}")]
    NotHex {
        /// Position (1-based).
        index: usize,
        /// The character.
        found: char,
    },
}

impl SigningKey {
    /// Key from raw bytes.
    pub fn from_bytes(bytes: [u8; 32]) -> SigningKey {
        SigningKey(bytes)
    }

    /// Key from a key file's text: 64 hexadecimal characters on one line
    /// (surrounding whitespace and one trailing newline allowed).
    pub fn from_hex_text(text: &str) -> Result<SigningKey, KeyError> {
        let t = text.trim();
        let n = t.chars().count();
        if n != 64 {
            return Err(KeyError::Length { found: n });
        }
        let mut out = [0u8; 32];
        let chars: Vec<char> = t.chars().collect();
        for (i, pair) in chars.chunks(2).enumerate() {
            let mut v = 0u8;
            for (j, c) in pair.iter().enumerate() {
                let d = c.to_digit(16).ok_or(KeyError::NotHex {
                    index: 2 * i + j + 1,
                    found: *c,
                })?;
                v = (v << 4) | d as u8;
            }
            out[i] = v;
        }
        Ok(SigningKey(out))
    }

    /// Signature of `signed_part`: the frame from the 0xFD byte through the
    /// link id and timestamp (everything but the last 6 bytes).
    pub fn sign(&self, signed_part: &[u8]) -> [u8; 6] {
        let mut h = Sha256::new();
        h.update(self.0);
        h.update(signed_part);
        let d = h.finalize();
        let mut s = [0u8; 6];
        s.copy_from_slice(&d[..6]);
        s
    }

    /// A name for this key that reveals nothing of it (16 hexadecimal
    /// characters of a hash over a fixed label and the key), so state kept
    /// per key can be found again without writing the key down.
    pub fn fingerprint(&self) -> String {
        let mut h = Sha256::new();
        h.update(b"cagehand replay floor v1\0");
        h.update(self.0);
        h.finalize()[..8]
            .iter()
            .map(|b| format!("{b:02x}"))
            .collect()
    }
}

/// Why a signed frame was refused.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum SignatureVerdict {
    /// Valid and newer than the last on its stream.
    Accepted,
    /// The signature does not match the key.
    BadSignature,
    /// Timestamp not newer than the last accepted on its stream.
    Replay,
    /// A stream first heard in this run, starting more than
    /// [`NEW_STREAM_WINDOW_TICKS`] behind the local timestamp.
    TooOld,
}

/// (sysid, compid, link id).
pub type StreamId = (u8, u8, u8);

/// Most signing streams remembered; beyond this the stream with the oldest
/// timestamp is forgotten (only frames with a valid signature add one, and
/// a forgotten stream is held to the new-stream window again).
const MAX_STREAMS: usize = 1024;

/// The replay state that outlives a process: the local timestamp (newest
/// accepted) and the newest timestamp accepted on each stream.
#[derive(Debug, Clone, Default, PartialEq, Eq)]
pub struct ReplayFloor {
    local: u64,
    streams: BTreeMap<StreamId, u64>,
}

/// Why a saved replay floor cannot be read.
#[derive(Debug, thiserror::Error, PartialEq, Eq)]
pub enum FloorError {
    /// Not the JSON we write.
    #[error("expected a cagehand replay floor (JSON with \"schema\": \"{SCHEMA}\"), found {0}")]
    Format(String),
    /// A timestamp beyond what a frame can carry.
    #[error("timestamp {0} is beyond the 48 bits a frame carries")]
    Range(u64),
}

const SCHEMA: &str = "cagehand.replay-floor/1";

#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct FloorText {
    schema: String,
    local_timestamp: u64,
    streams: Vec<StreamText>,
}

#[derive(serde::Serialize, serde::Deserialize)]
#[serde(deny_unknown_fields)]
struct StreamText {
    sysid: u8,
    compid: u8,
    link_id: u8,
    timestamp: u64,
}

impl ReplayFloor {
    /// The local timestamp: the newest accepted on any stream.
    pub fn local_timestamp(&self) -> u64 {
        self.local
    }

    /// The newest timestamp accepted on a stream.
    pub fn stream(&self, id: StreamId) -> Option<u64> {
        self.streams.get(&id).copied()
    }

    /// The verdict on a validly signed frame with timestamp `ts` on
    /// `stream`. `first_in_run`: the stream has not been accepted in this
    /// run yet (then the new-stream window applies, with `wall` as the
    /// wall clock's timestamp when the caller has one).
    pub fn judge(
        &self,
        stream: StreamId,
        ts: u64,
        first_in_run: bool,
        wall: Option<u64>,
    ) -> SignatureVerdict {
        if self.streams.get(&stream).is_some_and(|&prev| ts <= prev) {
            return SignatureVerdict::Replay;
        }
        let local = self.local.max(wall.unwrap_or(0));
        if first_in_run && ts.saturating_add(NEW_STREAM_WINDOW_TICKS) < local {
            return SignatureVerdict::TooOld;
        }
        SignatureVerdict::Accepted
    }

    /// Record an accepted timestamp.
    pub fn accept(&mut self, stream: StreamId, ts: u64) {
        if self.streams.len() >= MAX_STREAMS
            && !self.streams.contains_key(&stream)
            && let Some((&oldest, _)) = self.streams.iter().min_by_key(|(_, t)| **t)
        {
            self.streams.remove(&oldest);
        }
        let e = self.streams.entry(stream).or_insert(0);
        *e = (*e).max(ts);
        self.local = self.local.max(ts);
    }

    /// Take in another floor (one saved by another process): the newer
    /// timestamp of each stream, never an older one.
    pub fn merge(&mut self, other: &ReplayFloor) {
        for (&id, &ts) in &other.streams {
            self.accept(id, ts);
        }
        self.local = self.local.max(other.local);
    }

    /// The text form (one JSON object) the caller saves.
    pub fn to_text(&self) -> String {
        let t = FloorText {
            schema: SCHEMA.to_string(),
            local_timestamp: self.local,
            streams: self
                .streams
                .iter()
                .map(|(&(sysid, compid, link_id), &timestamp)| StreamText {
                    sysid,
                    compid,
                    link_id,
                    timestamp,
                })
                .collect(),
        };
        // ok-path: plain integers and strings always serialise.
        serde_json::to_string_pretty(&t).unwrap_or_default() + "\n"
    }

    /// Read the text form back.
    pub fn from_text(text: &str) -> Result<ReplayFloor, FloorError> {
        let t: FloorText =
            serde_json::from_str(text).map_err(|e| FloorError::Format(e.to_string()))?;
        if t.schema != SCHEMA {
            return Err(FloorError::Format(format!("schema {:?}", t.schema)));
        }
        let mut f = ReplayFloor::default();
        for s in t.streams {
            if s.timestamp > MAX_TIMESTAMP {
                return Err(FloorError::Range(s.timestamp));
            }
            f.accept((s.sysid, s.compid, s.link_id), s.timestamp);
        }
        if t.local_timestamp > MAX_TIMESTAMP {
            return Err(FloorError::Range(t.local_timestamp));
        }
        f.local = f.local.max(t.local_timestamp);
        Ok(f)
    }
}

/// Verifies signatures and keeps the replay floor.
#[derive(Debug, Clone)]
pub struct Verifier {
    key: SigningKey,
    floor: ReplayFloor,
    heard: HashSet<StreamId>,
    wall: Option<u64>,
    changed: bool,
}

impl Verifier {
    /// A verifier for one key with an empty floor and no wall clock (a
    /// replay of a recording).
    pub fn new(key: SigningKey) -> Verifier {
        Verifier::with_floor(key, ReplayFloor::default())
    }

    /// A verifier continuing from a saved floor.
    pub fn with_floor(key: SigningKey, floor: ReplayFloor) -> Verifier {
        Verifier {
            key,
            floor,
            heard: HashSet::new(),
            wall: None,
            changed: false,
        }
    }

    /// The wall clock now, as a signing timestamp (see
    /// [`timestamp_from_unix_s`]); live links set it before each read.
    pub fn set_wall_clock(&mut self, ts: u64) {
        self.wall = Some(ts);
    }

    /// The floor, to save.
    pub fn floor(&self) -> &ReplayFloor {
        &self.floor
    }

    /// Whether the floor moved since the last call.
    pub fn take_changed(&mut self) -> bool {
        std::mem::take(&mut self.changed)
    }

    /// Check a whole signed v2 frame (`frame` ends with the 13-byte block).
    pub fn check(&mut self, frame: &[u8], sysid: u8, compid: u8) -> SignatureVerdict {
        let n = frame.len();
        if n < SIGNATURE_LEN + 12 {
            return SignatureVerdict::BadSignature;
        }
        let block = &frame[n - SIGNATURE_LEN..];
        let link_id = block[0];
        let mut ts = [0u8; 8];
        ts[..6].copy_from_slice(&block[1..7]);
        let timestamp = u64::from_le_bytes(ts);
        let sig = self.key.sign(&frame[..n - 6]);
        if !bool::from(sig.ct_eq(&block[7..13])) {
            return SignatureVerdict::BadSignature;
        }
        let stream = (sysid, compid, link_id);
        let first = !self.heard.contains(&stream);
        let v = self.floor.judge(stream, timestamp, first, self.wall);
        if v == SignatureVerdict::Accepted {
            if self.heard.len() >= MAX_STREAMS {
                self.heard.clear();
            }
            self.heard.insert(stream);
            self.floor.accept(stream, timestamp);
            self.changed = true;
        }
        v
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn key_text_is_validated() {
        let hex = "000102030405060708090a0b0c0d0e0f101112131415161718191a1b1c1d1e1f\n";
        let k = SigningKey::from_hex_text(hex).expect("valid key");
        let mut b = [0u8; 32];
        for (i, x) in b.iter_mut().enumerate() {
            *x = i as u8;
        }
        assert_eq!(k, SigningKey::from_bytes(b));
        assert_eq!(
            SigningKey::from_hex_text("abcd"),
            Err(KeyError::Length { found: 4 })
        );
        let bad = format!("{}g", &hex[..63]);
        assert_eq!(
            SigningKey::from_hex_text(&bad),
            Err(KeyError::NotHex {
                index: 64,
                found: 'g'
            })
        );
        assert_eq!(format!("{k:?}"), "SigningKey(..)");
        assert_eq!(k.fingerprint().len(), 16);
        assert_ne!(
            k.fingerprint(),
            SigningKey::from_bytes([0; 32]).fingerprint()
        );
    }

    #[test]
    fn timestamps_count_10_us_from_2015() {
        // MAVLink signing guide (docs/links.md): 10 us units since
        // 2015-01-01 00:00 UTC, which is Unix time 1420070400 s.
        assert_eq!(timestamp_from_unix_s(1_420_070_400.0), 0);
        assert_eq!(timestamp_from_unix_s(1_420_070_401.0), 100_000);
        assert_eq!(timestamp_from_unix_s(0.0), 0);
        assert_eq!(timestamp_from_unix_s(f64::NAN), 0);
        assert_eq!(timestamp_from_unix_s(1e30), MAX_TIMESTAMP);
    }

    #[test]
    fn new_streams_are_held_to_the_one_minute_window() {
        let mut f = ReplayFloor::default();
        let a = (1, 1, 0);
        let wall = 10 * NEW_STREAM_WINDOW_TICKS;
        // A first stream just inside the window behind the wall clock.
        let edge = wall - NEW_STREAM_WINDOW_TICKS;
        assert_eq!(
            f.judge(a, edge, true, Some(wall)),
            SignatureVerdict::Accepted
        );
        assert_eq!(
            f.judge(a, edge - 1, true, Some(wall)),
            SignatureVerdict::TooOld
        );
        f.accept(a, wall + 500);
        // The local timestamp is now the newest accepted (ahead of the wall).
        let b = (1, 1, 7);
        let edge = wall + 500 - NEW_STREAM_WINDOW_TICKS;
        assert_eq!(
            f.judge(b, edge, true, Some(wall)),
            SignatureVerdict::Accepted
        );
        assert_eq!(
            f.judge(b, edge - 1, true, Some(wall)),
            SignatureVerdict::TooOld
        );
        // A stream already heard in this run is held to its own timestamp only.
        assert_eq!(
            f.judge(a, wall + 501, false, Some(wall)),
            SignatureVerdict::Accepted
        );
        // A known stream must grow; equal is a replay.
        assert_eq!(
            f.judge(a, wall + 500, false, None),
            SignatureVerdict::Replay
        );
        assert_eq!(
            f.judge(a, wall + 501, false, None),
            SignatureVerdict::Accepted
        );
    }

    #[test]
    fn floor_text_round_trips_and_refuses_damage() {
        let mut f = ReplayFloor::default();
        f.accept((1, 2, 3), 1000);
        f.accept((4, 5, 6), 7);
        let back = ReplayFloor::from_text(&f.to_text()).expect("reads back");
        assert_eq!(back, f);
        assert_eq!(back.local_timestamp(), 1000);
        assert_eq!(back.stream((4, 5, 6)), Some(7));
        assert!(matches!(
            ReplayFloor::from_text("{\"schema\":\"x\"}"),
            Err(FloorError::Format(_))
        ));
        let big = f.to_text().replace("1000", "999999999999999999");
        assert!(matches!(
            ReplayFloor::from_text(&big),
            Err(FloorError::Range(_))
        ));
    }

    #[test]
    fn stream_table_is_bounded_and_forgets_the_oldest() {
        let mut f = ReplayFloor::default();
        for i in 0..(MAX_STREAMS as u64 + 5) {
            let id = ((i % 256) as u8, (i / 256) as u8, 0);
            f.accept(id, 1000 + i);
        }
        assert_eq!(f.streams.len(), MAX_STREAMS);
        assert_eq!(f.stream((0, 0, 0)), None);
        assert_eq!(f.stream((4, 4, 0)), Some(1000 + 4 * 256 + 4));
    }
}
