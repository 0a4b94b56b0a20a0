//! MAVLink v1 and v2 framing for the docs/design.md subset, hand-written: the
//! subset is eight messages, and a decoder we own can count every kind of
//! trouble (bad CRC, unknown id, refused sender) the link-health line shows.
//!
//! The streaming decoder takes bytes as they arrive and hands back frames.
//! Its rules (docs/references.md, MAVLink): the CRC is CRC-16/MCRF4XX over every
//! byte after the start byte, then the message's CRC_EXTRA; a MAVLink 2
//! payload may be truncated (trailing zeros dropped) and is zero-filled; a
//! payload longer than we know is accepted and the rest ignored; after a bad
//! candidate the search resumes one byte past its start byte; a frame with
//! an id outside the subset cannot be checked, so it is counted and skipped
//! whole when the byte after it starts another frame (else it is noise and
//! the search resumes one byte on), and never when a frame we can check
//! (a known id with a good CRC) starts inside it: the checkable frame wins.
//! At the end of a finite input ([`MavDecoder::finish`]) a candidate still
//! waiting for bytes is resumed past, so the frames it claimed are read.
//! Memory is bounded: the buffer never holds more than one chunk plus two
//! frames' worth (an unknown frame and a candidate inside it), and the
//! output queue drops (and counts) its oldest frames when nobody pulls.

pub mod messages;
pub mod signing;

use crate::link::Counters;
use crate::sample::{STANDARD_GRAVITY_M_S2, Sample};
use crc::{CRC_16_MCRF4XX, Crc, Table};
pub use messages::Message;
use nalgebra::{Quaternion, UnitQuaternion, Vector3};
pub use signing::{ReplayFloor, SignatureVerdict, SigningKey, Verifier};
use std::collections::VecDeque;

/// MAVLink 1 start byte.
pub const STX_V1: u8 = 0xFE;
/// MAVLink 2 start byte.
pub const STX_V2: u8 = 0xFD;
/// Header bytes after and including the start byte.
const HDR_V1: usize = 6;
const HDR_V2: usize = 10;
/// Longest possible frame: v2 header, 255 payload, CRC, signature.
pub const MAX_FRAME_LEN: usize = HDR_V2 + 255 + 2 + signing::SIGNATURE_LEN;
/// Bytes taken from the caller per parse pass, in the old framing of the
/// bound below (the bytes are now read where they lie).
const CHUNK: usize = 1024;
/// New bytes put behind held ones: more than any candidate needs from its
/// start (an unknown frame, the byte after it and a candidate starting on
/// its last byte).
const BRIDGE: usize = 2 * MAX_FRAME_LEN + 2;
/// Most bytes the decoder ever holds between pushes: an unknown frame and
/// a candidate inside it still waiting for its bytes (bounded by one chunk
/// plus that, as it always was).
pub const MAX_BUFFERED: usize = CHUNK + 2 * MAX_FRAME_LEN;
/// Frames kept for the caller before the oldest are dropped.
const MAX_QUEUED: usize = 256;

/// CRC-16/MCRF4XX with the crc crate's 16-lane table (slice-by-16);
/// [`checksum`] uses its lanes for the short tails too. `tests` checks both
/// against the crate's one-lane table and the published check value.
static X25: Crc<u16, Table<16>> = Crc::<u16, Table<16>>::new(&CRC_16_MCRF4XX);

/// CRC-16/MCRF4XX of `bytes` followed by `extra` (the MAVLink checksum).
///
/// Every frame is checked, and MAVLink frames are short (26 bytes on
/// average in the simulator's telemetry), so the tail after the 16-byte
/// blocks matters as much as the blocks: it goes in blocks of 8, 4 and 2
/// with the same table's lanes (lane k is a byte followed by k zero
/// bytes, the textbook slicing identity), one table step per block
/// instead of one per byte. Inlined into the frame check, its one caller
/// on the live path.
#[inline]
pub fn checksum(bytes: &[u8], extra: u8) -> u16 {
    let t = X25.table();
    // MCRF4XX: reflected, initial value 0xFFFF (its own bit reversal), no
    // final xor.
    let mut crc: u16 = 0xFFFF;
    let mut rest = bytes;
    while let Some((block, tail)) = rest.split_first_chunk::<16>() {
        crc = slice_step(t, crc, block);
        rest = tail;
    }
    if let Some((block, tail)) = rest.split_first_chunk::<8>() {
        crc = slice_step(t, crc, block);
        rest = tail;
    }
    if let Some((block, tail)) = rest.split_first_chunk::<4>() {
        crc = slice_step(t, crc, block);
        rest = tail;
    }
    if let Some((block, tail)) = rest.split_first_chunk::<2>() {
        crc = slice_step(t, crc, block);
        rest = tail;
    }
    // At most one byte is left: it and the CRC_EXTRA byte go as one block.
    match rest {
        [b] => slice_step(t, crc, &[*b, extra]),
        _ => t[0][usize::from((crc ^ u16::from(extra)) & 0xFF)] ^ (crc >> 8),
    }
}

/// One slicing step of a reflected CRC-16 over `N` (2 to 16) bytes: the
/// register folds into the first two bytes, and byte j goes through lane
/// N - 1 - j.
#[inline(always)]
fn slice_step<const N: usize>(t: &[[u16; 256]; 16], crc: u16, block: &[u8; N]) -> u16 {
    let [lo, hi] = crc.to_le_bytes();
    let mut out = t[N - 1][usize::from(block[0] ^ lo)] ^ t[N - 2][usize::from(block[1] ^ hi)];
    for (j, &b) in block.iter().enumerate().skip(2) {
        out ^= t[N - 1 - j][usize::from(b)];
    }
    out
}

/// A frame that passed CRC, filters and signing.
#[derive(Debug, Clone, PartialEq)]
pub struct Frame {
    /// 1 or 2.
    pub version: u8,
    /// Sequence number.
    pub seq: u8,
    /// Sending system.
    pub sysid: u8,
    /// Sending component.
    pub compid: u8,
    /// Whether it carried a signature (checked only when a key is set).
    pub signed: bool,
    /// The decoded message.
    pub message: Message,
}

/// Where [`MavDecoder::push`] and [`MavDecoder::finish`] hand their good
/// frames: into the queue `out` for [`MavDecoder::pop`], the oldest
/// dropped (and counted in `dropped`) to keep it within [`MAX_QUEUED`].
fn queue_into<'q>(
    out: &'q mut VecDeque<Frame>,
    dropped: &'q mut u64,
) -> impl FnMut(Decoded<'_>) + 'q {
    move |d| {
        if let Decoded::Frame(f) = d {
            if out.len() >= MAX_QUEUED {
                out.pop_front();
                *dropped += 1;
            }
            out.push_back(f.clone());
        }
    }
}

/// What [`MavDecoder::push_each_cut`] hands out, in the order of the bytes.
#[derive(Debug, Clone, PartialEq)]
pub enum Decoded<'a> {
    /// A good frame.
    Frame(&'a Frame),
    /// The end of a piece (after a cut byte, or the end of the bytes),
    /// with the counters after it.
    Cut(Counters),
}

/// What the decoder accepts.
#[derive(Debug, Clone, Default)]
pub struct MavConfig {
    /// Only frames from this system id (several vehicles on one link).
    pub sysid: Option<u8>,
    /// With a key, only frames signed with it (and not replayed) pass.
    pub signing_key: Option<SigningKey>,
    /// The replay floor saved by an earlier run with the same key (live
    /// links); none starts afresh.
    pub replay_floor: Option<ReplayFloor>,
}

/// Streaming MAVLink decoder: push bytes, pull frames.
#[derive(Debug)]
pub struct MavDecoder {
    buf: Vec<u8>,
    sysid: Option<u8>,
    verifier: Option<Verifier>,
    out: VecDeque<Frame>,
    counters: Counters,
}

enum Candidate {
    /// Not enough bytes yet.
    Incomplete,
    /// Not a frame: resync one byte past the start byte.
    Bad,
    /// A frame of an id we do not know: skip this many bytes.
    Unknown(usize),
    /// A frame that passed the CRC but a filter refused it.
    Rejected(usize),
    /// A good frame of this many bytes (handed out already).
    Good(usize),
}

impl MavDecoder {
    /// A decoder with the given filters.
    pub fn new(cfg: MavConfig) -> MavDecoder {
        MavDecoder {
            buf: Vec::with_capacity(CHUNK + MAX_FRAME_LEN),
            sysid: cfg.sysid,
            verifier: cfg
                .signing_key
                .map(|k| Verifier::with_floor(k, cfg.replay_floor.unwrap_or_default())),
            out: VecDeque::new(),
            counters: Counters::default(),
        }
    }

    /// Counters so far.
    pub fn counters(&self) -> Counters {
        self.counters
    }

    /// Bytes held while waiting for the rest of a frame (bounded).
    pub fn buffered(&self) -> usize {
        self.buf.len()
    }

    /// The signature checker, when a key is set (the caller sets its wall
    /// clock and saves its floor).
    pub fn verifier_mut(&mut self) -> Option<&mut Verifier> {
        self.verifier.as_mut()
    }

    /// Feed received bytes. They are read where they lie: only the bytes
    /// of a frame still waiting for the rest of it are kept (copied) for
    /// the next push. Good frames wait in a bounded queue for [`pop`](Self::pop).
    pub fn push(&mut self, data: &[u8]) {
        let mut out = std::mem::take(&mut self.out);
        let mut dropped = 0;
        self.push_with(data, None, &mut queue_into(&mut out, &mut dropped));
        self.out = out;
        self.counters.dropped += dropped;
    }

    /// Feed received bytes and hand each good frame to `each` as it is
    /// read, instead of queueing it: nothing is copied or dropped on the
    /// way, which is what a fast link needs (every frame is checked
    /// exactly as by [`push`](Self::push); frames already queued by it
    /// stay queued).
    pub fn push_each(&mut self, data: &[u8], mut each: impl FnMut(&Frame)) {
        self.push_with(data, None, &mut |d| {
            if let Decoded::Frame(f) = d {
                each(f)
            }
        });
    }

    /// As [`push_each`](Self::push_each), with the bytes taken in pieces
    /// that end after each byte equal to `cut` (the last piece at the end
    /// of `data`), and a [`Decoded::Cut`] with the counters after each
    /// piece: what pushing the pieces one by one would give,
    /// frame for frame and count for count (a replay shows each line's
    /// counters as of the end of its line), without cutting the bytes
    /// apart: a frame the cut falls inside is read where it lies once its
    /// bytes are all there, not copied aside.
    pub fn push_each_cut(&mut self, data: &[u8], cut: u8, mut each: impl FnMut(Decoded<'_>)) {
        self.push_with(data, Some(cut), &mut each);
    }

    /// The one push behind the others: `cut` marks where pieces end.
    fn push_with<E: FnMut(Decoded<'_>)>(&mut self, data: &[u8], cut: Option<u8>, emit: &mut E) {
        // `start`: the first byte of `data` not yet read, when nothing is
        // held (held bytes are always read before it).
        let mut start = 0;
        let mut from = 0;
        while from < data.len() {
            let end = match cut {
                Some(c) => memchr::memchr(c, &data[from..]).map_or(data.len(), |k| from + k + 1),
                None => data.len(),
            };
            if !self.buf.is_empty() {
                start = match self.bridge(&data[from..end], emit) {
                    Some(used) => from + used,
                    None => end,
                };
            }
            if self.buf.is_empty() {
                // A candidate that waited at `start` in the piece before is
                // read again with the bytes now after it.
                start += self.scan(&data[start..end], end - start, false, emit);
            }
            if cut.is_some() {
                emit(Decoded::Cut(self.counters));
            }
            from = end;
        }
        if self.buf.is_empty() {
            self.buf.extend_from_slice(&data[start..]);
        }
    }

    /// Read the held bytes (a candidate that waited) with the first bytes
    /// of `data` behind them. Returns how many bytes of `data` were read
    /// once nothing is held any more, or None while a candidate still
    /// waits (all of `data` is held then).
    fn bridge<E: FnMut(Decoded<'_>)>(&mut self, data: &[u8], emit: &mut E) -> Option<usize> {
        let mut rest = data;
        while !self.buf.is_empty() {
            if rest.is_empty() {
                return None;
            }
            let held = self.buf.len();
            let take = rest.len().min(BRIDGE);
            let mut buf = std::mem::take(&mut self.buf);
            buf.extend_from_slice(&rest[..take]);
            let stop = self.scan(&buf, held, false, emit);
            if stop < held {
                // Still waiting (all of `rest` is in `buf` by now, since
                // a candidate never needs more than BRIDGE bytes).
                buf.drain(..stop);
                rest = &rest[take..];
            } else {
                buf.clear();
                rest = &rest[stop - held..];
            }
            self.buf = buf;
        }
        Some(data.len() - rest.len())
    }

    /// Next decoded frame, oldest first.
    pub fn pop(&mut self) -> Option<Frame> {
        self.out.pop_front()
    }

    /// End of input: nothing more will come, so a candidate still waiting
    /// for bytes is no frame. The search resumes one byte past it, so good
    /// frames it claimed are read after all.
    pub fn finish(&mut self) {
        let mut buf = std::mem::take(&mut self.buf);
        let mut out = std::mem::take(&mut self.out);
        let mut dropped = 0;
        let stop = self.scan(
            &buf,
            buf.len(),
            true,
            &mut queue_into(&mut out, &mut dropped),
        );
        buf.drain(..stop.min(buf.len()));
        self.buf = buf;
        self.out = out;
        self.counters.dropped += dropped;
    }

    /// Read the candidates of `b` that start before `limit`, counting each
    /// and handing the good frames to `emit`. Returns where the search stopped: the
    /// start of a candidate that waits for more bytes (below `limit`), or
    /// the first byte after `limit` not yet read (at or past it).
    fn scan<E: FnMut(Decoded<'_>)>(
        &mut self,
        b: &[u8],
        limit: usize,
        at_end: bool,
        emit: &mut E,
    ) -> usize {
        let mut i = 0;
        while i < limit {
            match b[i..].iter().position(|&c| c == STX_V1 || c == STX_V2) {
                None => return b.len(),
                Some(k) => i += k,
            }
            if i >= limit {
                break;
            }
            match self.candidate(&b[i..], at_end, emit) {
                Candidate::Incomplete if at_end => {
                    self.counters.crc_errors += 1;
                    i += 1;
                }
                Candidate::Incomplete => return i,
                Candidate::Bad => {
                    self.counters.crc_errors += 1;
                    i += 1;
                }
                Candidate::Unknown(n) => {
                    self.counters.unknown += 1;
                    i += n;
                }
                Candidate::Rejected(n) => {
                    self.counters.rejected += 1;
                    i += n;
                }
                Candidate::Good(n) => i += n,
            }
        }
        i
    }

    /// The candidate frame at the start of `b` (which begins with a start
    /// byte). A good frame is counted and handed to `emit` here, where it
    /// was built: moved out through the return value, it would be copied
    /// (and read back before its bytes were all written).
    #[inline(always)]
    fn candidate<E: FnMut(Decoded<'_>)>(
        &mut self,
        b: &[u8],
        at_end: bool,
        emit: &mut E,
    ) -> Candidate {
        let shape = match Shape::of(b) {
            ShapeOf::Incomplete => return Candidate::Incomplete,
            ShapeOf::Bad => return Candidate::Bad,
            ShapeOf::Shape(s) => s,
        };
        let total = shape.total;
        let Some(info) = messages::lookup(shape.msgid) else {
            // Unknown ids cannot be checked. Take it as a frame only when the
            // next byte starts another one (or the input ends with it), and
            // no frame we can check starts inside it: otherwise a stray
            // start byte would swallow the good frames after it.
            let next_ok = match b.get(total) {
                None if at_end => true,
                None => return Candidate::Incomplete,
                Some(&n) => n == STX_V1 || n == STX_V2,
            };
            if !next_ok {
                return Candidate::Bad;
            }
            return match checkable_frame_inside(&b[..total.min(b.len())], &b[1..], at_end) {
                Inside::Found => Candidate::Bad,
                Inside::Wait => Candidate::Incomplete,
                Inside::None => Candidate::Unknown(total),
            };
        };
        if !shape.crc_ok(b, info) {
            return Candidate::Bad;
        }
        let (sysid, compid, signed) = (shape.sysid, shape.compid, shape.signed);
        if self.sysid.is_some_and(|want| want != sysid) {
            return Candidate::Rejected(total);
        }
        if let Some(v) = self.verifier.as_mut()
            && (!signed || v.check(&b[..total], sysid, compid) != SignatureVerdict::Accepted)
        {
            return Candidate::Rejected(total);
        }
        // Decoded where it lies; bytes a MAVLink 2 sender dropped (trailing
        // zeros) read as zero, bytes past the fields we know are ignored.
        let n = shape.len.min(info.full_len);
        let carried = &b[shape.hdr..shape.hdr + n];
        match Message::decode_carried(shape.msgid, carried) {
            Some(message) => {
                let frame = Frame {
                    version: if shape.v2 { 2 } else { 1 },
                    seq: shape.seq,
                    sysid,
                    compid,
                    signed,
                    message,
                };
                self.counters.frames += 1;
                emit(Decoded::Frame(&frame));
                Candidate::Good(total)
            }
            // ok-path for completeness: every id in the table decodes.
            None => Candidate::Unknown(total),
        }
    }
}

/// The header of a candidate frame.
#[derive(Debug, Clone, Copy)]
struct Shape {
    v2: bool,
    hdr: usize,
    len: usize,
    seq: u8,
    sysid: u8,
    compid: u8,
    msgid: u32,
    signed: bool,
    /// Whole frame length, signature included.
    total: usize,
}

enum ShapeOf {
    Incomplete,
    Bad,
    Shape(Shape),
}

impl Shape {
    /// Read the header at the start of `b` (which begins with a start byte).
    fn of(b: &[u8]) -> ShapeOf {
        let v2 = b[0] == STX_V2;
        let hdr = if v2 { HDR_V2 } else { HDR_V1 };
        if b.len() < hdr {
            return ShapeOf::Incomplete;
        }
        let len = b[1] as usize;
        let (incompat, seq, sysid, compid, msgid) = if v2 {
            let id = u32::from_le_bytes([b[7], b[8], b[9], 0]);
            (b[2], b[4], b[5], b[6], id)
        } else {
            (0, b[2], b[3], b[4], b[5] as u32)
        };
        if incompat & !signing::INCOMPAT_SIGNED != 0 {
            // A flag we do not understand: this cannot be a frame we can read.
            return ShapeOf::Bad;
        }
        let signed = incompat & signing::INCOMPAT_SIGNED != 0;
        let total = hdr + len + 2 + if signed { signing::SIGNATURE_LEN } else { 0 };
        if b.len() < total {
            return ShapeOf::Incomplete;
        }
        ShapeOf::Shape(Shape {
            v2,
            hdr,
            len,
            seq,
            sysid,
            compid,
            msgid,
            signed,
            total,
        })
    }

    /// The CRC matches, and a MAVLink 1 payload is not shorter than its
    /// message (only MAVLink 2 may drop trailing zeros; a short v1 payload
    /// is damaged or from a sender we cannot read).
    #[inline]
    fn crc_ok(&self, b: &[u8], info: &messages::MessageInfo) -> bool {
        let crc_at = self.hdr + self.len;
        let crc = u16::from_le_bytes([b[crc_at], b[crc_at + 1]]);
        checksum(&b[1..crc_at], info.crc_extra) == crc && (self.v2 || self.len >= info.base_len)
    }
}

enum Inside {
    /// A frame we can check starts inside.
    Found,
    /// A candidate inside needs bytes that have not come yet.
    Wait,
    /// Nothing we can check starts inside.
    None,
}

/// Whether a frame of a known id with a good CRC starts inside `claimed`
/// (after its first byte). `rest` is everything buffered from the byte after
/// the claim's start, since an inner frame may run past the claim.
fn checkable_frame_inside(claimed: &[u8], rest: &[u8], at_end: bool) -> Inside {
    let mut wait = false;
    for (k, _) in claimed
        .iter()
        .enumerate()
        .skip(1)
        .filter(|(_, b)| **b == STX_V1 || **b == STX_V2)
    {
        let b = &rest[k - 1..];
        match Shape::of(b) {
            ShapeOf::Bad => {}
            ShapeOf::Incomplete => {
                // Only a known id could win; wait for its bytes.
                let known = if b[0] == STX_V2 {
                    b.len() < HDR_V2
                        || messages::lookup(u32::from_le_bytes([b[7], b[8], b[9], 0])).is_some()
                } else {
                    b.len() < HDR_V1 || messages::lookup(u32::from(b[5])).is_some()
                };
                wait |= known && !at_end;
            }
            ShapeOf::Shape(s) => {
                if let Some(info) = messages::lookup(s.msgid)
                    && s.crc_ok(b, info)
                {
                    return Inside::Found;
                }
            }
        }
    }
    if wait { Inside::Wait } else { Inside::None }
}

/// Signing parameters for an outgoing frame.
#[derive(Debug, Clone, Copy)]
pub struct SignWith<'a> {
    /// The key.
    pub key: &'a SigningKey,
    /// Link id.
    pub link_id: u8,
    /// Timestamp, 10 us units since 2015-01-01 (48 bits used).
    pub timestamp: u64,
}

/// Encode one frame. MAVLink 2 payloads are truncated (trailing zeros,
/// never the first byte); MAVLink 1 carries the base length.
pub fn encode_frame(
    version: u8,
    seq: u8,
    sysid: u8,
    compid: u8,
    msg: &Message,
    sign: Option<SignWith<'_>>,
) -> Vec<u8> {
    let id = msg.id();
    let Some(info) = messages::lookup(id) else {
        return Vec::new(); // ok: every Message variant is in the table
    };
    let mut payload = msg.encode();
    let mut out = Vec::with_capacity(MAX_FRAME_LEN);
    if version == 1 {
        payload.truncate(info.base_len);
        out.extend_from_slice(&[STX_V1, payload.len() as u8, seq, sysid, compid, id as u8]);
    } else {
        while payload.len() > 1 && payload.last() == Some(&0) {
            payload.pop();
        }
        let incompat = if sign.is_some() {
            signing::INCOMPAT_SIGNED
        } else {
            0
        };
        let idb = id.to_le_bytes();
        out.extend_from_slice(&[
            STX_V2,
            payload.len() as u8,
            incompat,
            0,
            seq,
            sysid,
            compid,
            idb[0],
            idb[1],
            idb[2],
        ]);
    }
    out.extend_from_slice(&payload);
    let crc = checksum(&out[1..], info.crc_extra);
    out.extend_from_slice(&crc.to_le_bytes());
    if let (2, Some(s)) = (version, sign) {
        out.push(s.link_id);
        out.extend_from_slice(&s.timestamp.to_le_bytes()[..6]);
        let sig = s.key.sign(&out);
        out.extend_from_slice(&sig);
    }
    out
}

/// Turns frames into samples: one sample per frame, carrying only what that
/// message says (attitude, specific force, velocity, battery or armed), timed
/// by the sender's boot clock. Messages without a time field take the last
/// sender time seen, or the arrival time before any.
#[derive(Debug, Default, Clone)]
pub struct SampleMaker {
    last_t_s: Option<f64>,
}

/// Sender times above this many seconds are wall-clock epochs, not boot
/// times; they would mix two clocks, so such messages take the last time.
const MAX_BOOT_TIME_S: f64 = 1.0e8;

impl SampleMaker {
    /// The sample a frame carries, or nothing when it carries nothing we use
    /// (the heartbeat of a ground station or of a component that is no
    /// flight controller, an unknown battery voltage), or carries
    /// values that are not numbers (counted by the caller as malformed via
    /// [`SampleOutcome::Malformed`]).
    ///
    /// Inlined where it is called (the link decoder's one place), so the
    /// frame just decoded is read from registers, not written out and
    /// read back.
    #[inline]
    pub fn sample(&mut self, frame: &Frame, arrival_s: f64) -> SampleOutcome {
        let mut s = Sample::default();
        let t = |ms: Option<f64>, this: &mut Self| -> f64 {
            match ms {
                Some(v) if v < MAX_BOOT_TIME_S => {
                    this.last_t_s = Some(v);
                    v
                }
                _ => this.last_t_s.unwrap_or(arrival_s),
            }
        };
        match &frame.message {
            Message::Heartbeat {
                mav_type,
                autopilot,
                base_mode,
                ..
            } => {
                if *mav_type == messages::MAV_TYPE_GCS
                    || *autopilot == messages::MAV_AUTOPILOT_INVALID
                {
                    return SampleOutcome::Nothing;
                }
                s.t_s = t(None, self);
                s.armed = Some(base_mode & messages::MODE_FLAG_ARMED != 0);
            }
            Message::SysStatus {
                voltage_battery_mv, ..
            } => {
                if *voltage_battery_mv == messages::UNKNOWN_U16 {
                    return SampleOutcome::Nothing;
                }
                s.t_s = t(None, self);
                s.battery_v = Some(f64::from(*voltage_battery_mv) / 1000.0);
            }
            Message::BatteryStatus { voltages_mv, .. } => {
                let (mut sum_mv, mut known) = (0.0, 0usize);
                for &v in voltages_mv.iter().filter(|&&v| v != messages::UNKNOWN_U16) {
                    sum_mv += f64::from(v);
                    known += 1;
                }
                if known == 0 {
                    return SampleOutcome::Nothing;
                }
                s.t_s = t(None, self);
                s.battery_v = Some(sum_mv / 1000.0);
            }
            Message::ScaledImu {
                time_boot_ms,
                acc_mg,
                ..
            } => {
                s.t_s = t(Some(f64::from(*time_boot_ms) / 1000.0), self);
                let k = STANDARD_GRAVITY_M_S2 / 1000.0;
                s.accel_body_m_s2 = Some(Vector3::new(
                    f64::from(acc_mg[0]) * k,
                    f64::from(acc_mg[1]) * k,
                    f64::from(acc_mg[2]) * k,
                ));
            }
            Message::HighresImu {
                time_usec,
                acc_m_s2,
                ..
            } => {
                let a = vec3(acc_m_s2);
                if !a.iter().all(|x| x.is_finite()) {
                    return SampleOutcome::Malformed;
                }
                s.t_s = t(Some(*time_usec as f64 / 1.0e6), self);
                s.accel_body_m_s2 = Some(a);
            }
            Message::Attitude {
                time_boot_ms,
                rpy_rad,
                ..
            } => {
                let r = vec3(rpy_rad);
                if !r.iter().all(|x| x.is_finite()) {
                    return SampleOutcome::Malformed;
                }
                s.t_s = t(Some(f64::from(*time_boot_ms) / 1000.0), self);
                s.attitude = Some(UnitQuaternion::from_euler_angles(r.x, r.y, r.z));
            }
            Message::AttitudeQuaternion {
                time_boot_ms, q, ..
            } => {
                let Some(uq) = unit_quaternion([q[0], q[1], q[2], q[3]].map(f64::from)) else {
                    return SampleOutcome::Malformed;
                };
                s.t_s = t(Some(f64::from(*time_boot_ms) / 1000.0), self);
                s.attitude = Some(uq);
            }
            Message::LocalPositionNed {
                time_boot_ms,
                vel_m_s,
                ..
            } => {
                let v = vec3(vel_m_s);
                if !v.iter().all(|x| x.is_finite()) {
                    return SampleOutcome::Malformed;
                }
                s.t_s = t(Some(f64::from(*time_boot_ms) / 1000.0), self);
                s.velocity_ned_m_s = Some(v);
            }
        }
        SampleOutcome::Sample(s)
    }
}

/// What a frame gave.
#[derive(Debug, Clone, PartialEq)]
pub enum SampleOutcome {
    /// A sample.
    Sample(Sample),
    /// Nothing the tracker uses.
    Nothing,
    /// Values that are not usable numbers.
    Malformed,
}

#[inline]
fn vec3(v: &[f32; 3]) -> Vector3<f64> {
    Vector3::new(f64::from(v[0]), f64::from(v[1]), f64::from(v[2]))
}

/// A unit quaternion from (w, x, y, z) if it is finite and within 10 % of
/// unit length (further off means a wrong field order or units, not noise).
#[inline]
pub fn unit_quaternion(wxyz: [f64; 4]) -> Option<UnitQuaternion<f64>> {
    let q = Quaternion::new(wxyz[0], wxyz[1], wxyz[2], wxyz[3]);
    // The norm is worked out once: this is `from_quaternion` (q over its
    // norm), with the norm it used handed back for the check.
    let (unit, n) = UnitQuaternion::new_and_get(q);
    if !n.is_finite() || (n - 1.0).abs() > 0.1 {
        return None;
    }
    Some(unit)
}

#[cfg(test)]
mod tests;
