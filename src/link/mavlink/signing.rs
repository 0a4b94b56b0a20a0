//! MAVLink 2 message signing: the secret key, the 6-byte signature and the
//! replay rule. REFERENCES.md (MAVLink): the signature is the first 6 bytes
//! of SHA-256(key | header from 0xFD | payload | CRC | link id | timestamp);
//! a timestamp not newer than the last on its (sysid, compid, link id)
//! stream is a replay; the stream's timestamp moves only after a valid
//! signature.

use sha2::{Digest, Sha256};
use std::collections::HashMap;

/// Length of the signature block after the CRC: link id, 48-bit timestamp,
/// 6-byte signature.
pub const SIGNATURE_LEN: usize = 13;

/// Incompatibility flag saying the frame is signed.
pub const INCOMPAT_SIGNED: u8 = 0x01;

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
}

/// Most signing streams remembered; beyond this the oldest-looking entries
/// are forgotten (only frames with a valid signature ever add one).
const MAX_STREAMS: usize = 1024;

/// Verifies signatures and remembers the last timestamp per stream.
#[derive(Debug, Clone)]
pub struct Verifier {
    key: SigningKey,
    last: HashMap<(u8, u8, u8), u64>,
}

impl Verifier {
    /// A verifier for one key.
    pub fn new(key: SigningKey) -> Verifier {
        Verifier {
            key,
            last: HashMap::new(),
        }
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
        if self.key.sign(&frame[..n - 6]) != block[7..13] {
            return SignatureVerdict::BadSignature;
        }
        let stream = (sysid, compid, link_id);
        if let Some(&prev) = self.last.get(&stream)
            && timestamp <= prev
        {
            return SignatureVerdict::Replay;
        }
        if self.last.len() >= MAX_STREAMS && !self.last.contains_key(&stream) {
            self.last.clear();
        }
        self.last.insert(stream, timestamp);
        SignatureVerdict::Accepted
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
    }
}
