//! The recording format of `cagehand record` (our own, version 1): raw link
//! bytes with their arrival times, so a replay feeds the decoder exactly
//! what it saw, at the pace it saw it.
//!
//! Layout (all integers little-endian):
//! 1. Magic, 8 bytes: `CHREC01\n`.
//! 2. Header: a u32 byte count, then that many bytes of UTF-8 JSON, e.g.
//!    `{"link":"udp:127.0.0.1:14550","started_utc":"2026-12-01T22:00:00Z"}`
//!    (at most 64 KiB; readers ignore keys they do not know).
//! 3. Chunks until the end of the file, each: u64 arrival time in
//!    microseconds since the recording started, u32 byte count (1 to
//!    65536), then the bytes as received (one UDP datagram or one serial
//!    read).
//!
//! A recording cut short (power lost mid-write) replays up to its last
//! whole chunk; the reader reports the cut.

use serde::{Deserialize, Serialize};
use std::io::{Read, Write};

/// First bytes of every recording.
pub const MAGIC: &[u8; 8] = b"CHREC01\n";
/// Largest chunk.
pub const MAX_CHUNK: usize = 65536;
const MAX_HEADER: usize = 65536;

/// What a recording says about itself.
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize, Default)]
pub struct Header {
    /// The link spec it was recorded from.
    pub link: String,
    /// When recording started (RFC 3339, UTC).
    pub started_utc: String,
}

/// One chunk of bytes and when it arrived.
#[derive(Debug, Clone, PartialEq)]
pub struct Chunk {
    /// Arrival time since the start, seconds.
    pub at_s: f64,
    /// The bytes.
    pub data: Vec<u8>,
}

/// Why a recording cannot be read.
#[derive(Debug, thiserror::Error)]
pub enum RecordError {
    /// Not a recording of ours.
    #[error("not a cagehand recording: expected the magic bytes {expected:?}, found {found:?}")]
    BadMagic {
        /// What we look for.
        expected: String,
        /// What the file starts with.
        found: String,
    },
    /// Header too long or not JSON.
    #[error("recording header at byte 8: {0}")]
    BadHeader(String),
    /// A chunk length out of range.
    #[error("recording chunk at byte {offset}: length {len} outside 1..={MAX_CHUNK}")]
    BadChunk {
        /// Byte offset of the chunk.
        offset: u64,
        /// Length found.
        len: u64,
    },
    /// The file ends inside a chunk.
    #[error("recording cut short at byte {offset} (inside a chunk); replayed up to there")]
    Truncated {
        /// Byte offset of the cut chunk.
        offset: u64,
    },
    /// Reading failed.
    #[error("reading recording: {0}")]
    Io(#[from] std::io::Error),
}

/// Writes a recording.
#[derive(Debug)]
pub struct RecordWriter<W: Write> {
    w: W,
}

impl<W: Write> RecordWriter<W> {
    /// Start a recording: magic and header.
    pub fn new(mut w: W, header: &Header) -> std::io::Result<RecordWriter<W>> {
        let h = serde_json::to_vec(header).map_err(std::io::Error::other)?;
        w.write_all(MAGIC)?;
        w.write_all(&(h.len() as u32).to_le_bytes())?;
        w.write_all(&h)?;
        w.flush()?;
        Ok(RecordWriter { w })
    }

    /// Append bytes that arrived at `at_s`; longer data is split. Each
    /// chunk goes out in one write, so a crash loses at most the last.
    pub fn write(&mut self, at_s: f64, data: &[u8]) -> std::io::Result<()> {
        let us = (at_s.max(0.0) * 1.0e6).round() as u64;
        for part in data.chunks(MAX_CHUNK) {
            let mut rec = Vec::with_capacity(12 + part.len());
            rec.extend_from_slice(&us.to_le_bytes());
            rec.extend_from_slice(&(part.len() as u32).to_le_bytes());
            rec.extend_from_slice(part);
            self.w.write_all(&rec)?;
        }
        self.w.flush()
    }

    /// The underlying writer.
    pub fn into_inner(self) -> W {
        self.w
    }
}

/// Reads a recording chunk by chunk.
#[derive(Debug)]
pub struct RecordReader<R: Read> {
    r: R,
    offset: u64,
    done: bool,
    /// The recording's header.
    pub header: Header,
}

fn read_full<R: Read>(r: &mut R, buf: &mut [u8]) -> std::io::Result<usize> {
    let mut n = 0;
    while n < buf.len() {
        match r.read(&mut buf[n..]) {
            Ok(0) => break,
            Ok(k) => n += k,
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => return Err(e),
        }
    }
    Ok(n)
}

impl<R: Read> RecordReader<R> {
    /// Open a recording: check the magic, read the header.
    pub fn new(mut r: R) -> Result<RecordReader<R>, RecordError> {
        let mut m = [0u8; 8];
        let n = read_full(&mut r, &mut m)?;
        if n < 8 || &m != MAGIC {
            return Err(RecordError::BadMagic {
                expected: String::from_utf8_lossy(MAGIC).into_owned(),
                found: String::from_utf8_lossy(&m[..n]).into_owned(),
            });
        }
        let mut l = [0u8; 4];
        if read_full(&mut r, &mut l)? < 4 {
            return Err(RecordError::BadHeader("file ends in the header".into()));
        }
        let len = u32::from_le_bytes(l) as usize;
        if len > MAX_HEADER {
            return Err(RecordError::BadHeader(format!(
                "header length {len} over {MAX_HEADER}"
            )));
        }
        let mut h = vec![0u8; len];
        if read_full(&mut r, &mut h)? < len {
            return Err(RecordError::BadHeader("file ends in the header".into()));
        }
        let header: Header =
            serde_json::from_slice(&h).map_err(|e| RecordError::BadHeader(e.to_string()))?;
        Ok(RecordReader {
            r,
            offset: 12 + len as u64,
            done: false,
            header,
        })
    }

    /// Next chunk; `None` at the end. After an error, the next call ends.
    pub fn next_chunk(&mut self) -> Option<Result<Chunk, RecordError>> {
        if self.done {
            return None;
        }
        let start = self.offset;
        let mut head = [0u8; 12];
        let n = match read_full(&mut self.r, &mut head) {
            Ok(n) => n,
            Err(e) => return self.fail(e.into()),
        };
        if n == 0 {
            self.done = true;
            return None;
        }
        if n < 12 {
            return self.fail(RecordError::Truncated { offset: start });
        }
        let mut us = [0u8; 8];
        us.copy_from_slice(&head[..8]);
        let len = u32::from_le_bytes([head[8], head[9], head[10], head[11]]) as usize;
        if len == 0 || len > MAX_CHUNK {
            return self.fail(RecordError::BadChunk {
                offset: start,
                len: len as u64,
            });
        }
        let mut data = vec![0u8; len];
        match read_full(&mut self.r, &mut data) {
            Ok(k) if k == len => {}
            Ok(_) => return self.fail(RecordError::Truncated { offset: start }),
            Err(e) => return self.fail(e.into()),
        }
        self.offset += 12 + len as u64;
        Some(Ok(Chunk {
            at_s: u64::from_le_bytes(us) as f64 / 1.0e6,
            data,
        }))
    }

    fn fail(&mut self, e: RecordError) -> Option<Result<Chunk, RecordError>> {
        self.done = true;
        Some(Err(e))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn sample_recording() -> Vec<u8> {
        let h = Header {
            link: "udp:127.0.0.1:9".into(),
            started_utc: "2026-12-01T00:00:00Z".into(),
        };
        let mut w = RecordWriter::new(Vec::new(), &h).expect("write to memory");
        w.write(0.0, b"abc").expect("write");
        w.write(1.25, b"defg").expect("write");
        w.into_inner()
    }

    #[test]
    fn round_trip_and_layout() {
        let bytes = sample_recording();
        assert_eq!(&bytes[..8], MAGIC);
        let mut r = RecordReader::new(&bytes[..]).expect("reads");
        assert_eq!(r.header.link, "udp:127.0.0.1:9");
        let a = r.next_chunk().expect("chunk").expect("ok");
        assert_eq!((a.at_s, a.data.as_slice()), (0.0, &b"abc"[..]));
        let b = r.next_chunk().expect("chunk").expect("ok");
        assert_eq!((b.at_s, b.data.as_slice()), (1.25, &b"defg"[..]));
        assert!(r.next_chunk().is_none());
        // The second chunk's length field sits 8 bytes into its record.
        let hlen = u32::from_le_bytes([bytes[8], bytes[9], bytes[10], bytes[11]]) as usize;
        let second = 12 + hlen + 12 + 3;
        assert_eq!(&bytes[second + 8..second + 12], &4u32.to_le_bytes());
    }

    #[test]
    fn cut_recording_replays_what_is_whole() {
        let bytes = sample_recording();
        let cut = &bytes[..bytes.len() - 2];
        let mut r = RecordReader::new(cut).expect("reads");
        assert!(r.next_chunk().expect("chunk").is_ok());
        assert!(matches!(
            r.next_chunk(),
            Some(Err(RecordError::Truncated { .. }))
        ));
        assert!(r.next_chunk().is_none());
        assert!(matches!(
            RecordReader::new(&b"hello world"[..]),
            Err(RecordError::BadMagic { .. })
        ));
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn arbitrary_bytes_never_panic(tail in proptest::collection::vec(any::<u8>(), 0..300)) {
            let mut b = MAGIC.to_vec();
            b.extend_from_slice(&2u32.to_le_bytes());
            b.extend_from_slice(b"{}");
            b.extend_from_slice(&tail);
            if let Ok(mut r) = RecordReader::new(&b[..]) {
                let mut n = 0;
                while let Some(c) = r.next_chunk() {
                    n += 1;
                    prop_assert!(n < 400);
                    if let Ok(c) = c { prop_assert!(!c.data.is_empty()); }
                }
            }
        }
    }
}
