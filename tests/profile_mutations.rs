//! Mutated profiles never panic, and every refusal is located and says
//! what was expected and what was found (property test, proptest).

use cagehand::profile::DEMO_PROFILE_TOML;
use cagehand::vehicle::{LoadError, load};
use proptest::prelude::*;

/// One edit of the demo profile: replace, insert or delete a byte.
fn mutate(text: &[u8], edits: &[(usize, u8, u8)]) -> Vec<u8> {
    let mut b = text.to_vec();
    for &(at, kind, byte) in edits {
        if b.is_empty() {
            break;
        }
        let at = at % b.len();
        match kind % 3 {
            0 => b[at] = byte,
            1 => b.insert(at, byte),
            _ => {
                b.remove(at);
            }
        }
    }
    b
}

/// Bytes a hand edit tends to produce in TOML (and a few that are not text).
fn byte() -> impl Strategy<Value = u8> {
    prop_oneof![
        Just(b'"'),
        Just(b'['),
        Just(b']'),
        Just(b'='),
        Just(b','),
        Just(b'.'),
        Just(b'-'),
        Just(b'e'),
        Just(b'\n'),
        Just(b'#'),
        b'0'..=b'9',
        b'a'..=b'z',
        Just(0xff),
        Just(0xc3),
    ]
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(300))]
    #[test]
    fn every_refusal_is_located_with_expected_and_found(
        edits in proptest::collection::vec((0usize..100_000, 0u8..3, byte()), 1..4)
    ) {
        let bytes = mutate(DEMO_PROFILE_TOML.as_bytes(), &edits);
        let lines = bytes.split(|&b| b == b'\n').count();
        match load(&bytes, "m.toml") {
            Ok(_) | Err(LoadError::Statics { .. }) => {}
            Err(LoadError::Profile(e)) => {
                let msg = e.to_string();
                let rest = msg.strip_prefix("m.toml:").expect("file first");
                let mut parts = rest.splitn(3, ':');
                let line: usize = parts.next().and_then(|l| l.parse().ok()).expect("a line");
                let column: usize = parts.next().and_then(|c| c.parse().ok()).expect("a column");
                prop_assert!(line >= 1 && line <= lines, "{msg}");
                prop_assert!(column >= 1, "{msg}");
                prop_assert!(msg.contains(": expected ") && msg.contains(", found "), "{msg}");
                // None of serde's own phrasing reaches the user.
                for serde_words in ["missing field", "wanted string or table", "untagged enum", "invalid type"] {
                    prop_assert!(!msg.contains(serde_words), "{msg}");
                }
            }
        }
    }
}
