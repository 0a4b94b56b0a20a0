//! A fuzzing harness for the two decoders and the recording reader:
//! proptest with large generated inputs (tens of kilobytes of hostile
//! bytes: start-byte storms, fake headers of known and unknown ids with
//! large claimed lengths, long lines, mutated recordings). Each case runs
//! on its own thread under a time limit, so a hang fails the test instead
//! of stalling CI; the number of cases is small by default and can be
//! raised with PROPTEST_CASES for a longer run.
//!
//! Properties: no panic, no hang, bounded memory (the decoder's buffer and
//! queues, the ticks a replay gives a silence), and every good frame or
//! line inserted after the garbage is decoded, unless the garbage happens
//! to hold a frame that passes its own checksum overlapping them (such a
//! frame is indistinguishable from a real one; those cases are skipped).

use cagehand::link::clock::{MAX_GAP_TICKS_S, TICK_S, silence_ticks};
use cagehand::link::line::{LineDecoder, MAX_LINE_LEN};
use cagehand::link::mavlink::{
    self, MAX_BUFFERED, MavConfig, MavDecoder, Message, STX_V1, STX_V2, checksum, encode_frame,
    messages,
};
use cagehand::link::record::{Header, MAX_CHUNK, RecordReader, RecordWriter};
use cagehand::link::{Decoder, Proto};
use proptest::prelude::*;
use std::sync::mpsc;
use std::time::Duration;

/// Longest a single case may take (debug build, a busy 2-core machine).
const CASE_LIMIT: Duration = Duration::from_secs(20);

fn config() -> ProptestConfig {
    let mut c = ProptestConfig::default();
    if std::env::var_os("PROPTEST_CASES").is_none() {
        c.cases = 24;
    }
    c.max_shrink_iters = 64;
    c
}

/// Run `f` on its own thread; fail if it does not finish in time.
fn bounded<T: Send + 'static>(f: impl FnOnce() -> T + Send + 'static) -> T {
    let (tx, rx) = mpsc::channel();
    std::thread::spawn(move || {
        let _ = tx.send(f());
    });
    match rx.recv_timeout(CASE_LIMIT) {
        Ok(v) => v,
        Err(mpsc::RecvTimeoutError::Timeout) => panic!("decoder hung (over {CASE_LIMIT:?})"),
        Err(mpsc::RecvTimeoutError::Disconnected) => panic!("decoder panicked"),
    }
}

/// Hostile pieces: raw bytes, start-byte storms, fake headers.
fn piece() -> impl Strategy<Value = Vec<u8>> {
    let known_ids: Vec<u32> = messages::KNOWN.iter().map(|m| m.id).collect();
    prop_oneof![
        3 => proptest::collection::vec(any::<u8>(), 1..400),
        2 => (1usize..40, prop_oneof![Just(STX_V1), Just(STX_V2)]).prop_map(|(n, b)| vec![b; n]),
        // A v2 header: any length, signed or not, a known or unknown id.
        2 => (any::<u8>(), 0u8..2, any::<u8>(), proptest::sample::select(known_ids.clone()), any::<bool>(), any::<u32>())
            .prop_map(|(len, inc, sys, known, use_known, other)| {
                let id = if use_known { known } else { other & 0xFF_FFFF };
                let b = id.to_le_bytes();
                vec![STX_V2, len, inc, 0, 0, sys, 1, b[0], b[1], b[2]]
            }),
        // A v1 header with a known or unknown id.
        1 => (any::<u8>(), any::<u8>()).prop_map(|(len, id)| vec![STX_V1, len, 0, 1, 1, id]),
    ]
}

fn garbage(max_pieces: usize) -> impl Strategy<Value = Vec<u8>> {
    proptest::collection::vec(piece(), 0..max_pieces).prop_map(|v| v.concat())
}

/// Good frames of the subset, v1 and v2, with arbitrary field values.
fn good_frame() -> impl Strategy<Value = Vec<u8>> {
    (
        1u8..3,
        any::<u8>(),
        any::<u32>(),
        any::<[f32; 3]>(),
        0usize..3,
    )
        .prop_map(|(version, seq, t, v, kind)| {
            let msg = match kind {
                0 => Message::Attitude {
                    time_boot_ms: t,
                    rpy_rad: v,
                    rates_rad_s: [v[2], v[1], v[0]],
                },
                1 => Message::Heartbeat {
                    mav_type: 2,
                    autopilot: 3,
                    base_mode: (t & 0xFF) as u8,
                    custom_mode: t,
                    system_status: 4,
                },
                _ => Message::AttitudeQuaternion {
                    time_boot_ms: t,
                    q: [v[0], v[1], v[2], 0.5],
                    rates_rad_s: v,
                },
            };
            encode_frame(version, seq, 1, 1, &msg, None)
        })
}

/// Whether a frame of a known id that passes its checksum starts at `j`
/// (written apart from the decoder, from the framing rules in docs/links.md),
/// and where it ends.
fn checkable_at(b: &[u8], j: usize) -> Option<usize> {
    let v2 = match b[j] {
        STX_V2 => true,
        STX_V1 => false,
        _ => return None,
    };
    let hdr = if v2 { 10 } else { 6 };
    let h = b.get(j..j + hdr)?;
    let len = h[1] as usize;
    let (inc, id) = if v2 {
        (h[2], u32::from_le_bytes([h[7], h[8], h[9], 0]))
    } else {
        (0, u32::from(h[5]))
    };
    if inc > 1 {
        return None;
    }
    let info = messages::lookup(id)?;
    let total = hdr + len + 2 + if inc == 1 { 13 } else { 0 };
    let f = b.get(j..j + total)?;
    let crc = u16::from_le_bytes([f[hdr + len], f[hdr + len + 1]]);
    (checksum(&f[1..hdr + len], info.crc_extra) == crc && (v2 || len >= info.base_len))
        .then_some(j + total)
}

proptest! {
    #![proptest_config(config())]

    #[test]
    fn mavlink_reads_every_good_frame_after_garbage(
        junk in garbage(160),
        frames in proptest::collection::vec(good_frame(), 1..20),
        split in 1usize..3000,
    ) {
        // Skip the rare garbage holding a checkable frame that runs into the
        // good frames: no decoder could tell it from a real one.
        let accidental = (0..junk.len()).any(|j| {
            let mut b = junk[j..].to_vec();
            b.extend(frames.concat());
            checkable_at(&b, 0).is_some_and(|end| j + end > junk.len())
        });
        prop_assume!(!accidental);
        let mut stream = junk.clone();
        for f in &frames {
            stream.extend_from_slice(f);
        }
        let want: Vec<Vec<u8>> = frames.clone();
        let got = bounded(move || {
            let mut d = MavDecoder::new(MavConfig::default());
            let mut got = Vec::new();
            let mut max_buf = 0;
            for chunk in stream.chunks(split) {
                d.push(chunk);
                max_buf = max_buf.max(d.buffered());
                while let Some(f) = d.pop() {
                    got.push(f);
                }
            }
            d.finish();
            while let Some(f) = d.pop() {
                got.push(f);
            }
            (got, max_buf, d.buffered())
        });
        let (got, max_buf, left) = got;
        prop_assert!(max_buf <= MAX_BUFFERED, "buffer {max_buf}");
        prop_assert_eq!(left, 0);
        prop_assert!(got.len() >= want.len());
        // The last frames decoded are the good ones, in order.
        let tail: Vec<Vec<u8>> = got[got.len() - want.len()..]
            .iter()
            .map(|f| encode_frame(f.version, f.seq, f.sysid, f.compid, &f.message, None))
            .collect();
        prop_assert_eq!(tail, want);
    }

    #[test]
    fn lines_read_every_good_line_after_garbage(
        junk in proptest::collection::vec(
            prop_oneof![
                3 => proptest::collection::vec(any::<u8>(), 1..300),
                1 => (1usize..3 * MAX_LINE_LEN).prop_map(|n| vec![b'x'; n]),
                1 => "[a-z]{1,6}=[-0-9.e]{0,30}( |\n)".prop_map(String::into_bytes),
                1 => Just(b"t=3e15 roll=0 pitch=0 yaw=0\n".to_vec()),
            ],
            0..200,
        ),
        times in proptest::collection::vec(-1.0e6f64..1.0e6, 1..50),
    ) {
        let junk = junk.concat();
        let n = times.len();
        let t2 = times.clone();
        let got = bounded(move || {
            let mut d = LineDecoder::new();
            let mut got = Vec::new();
            d.push(&junk, 0.0);
            while d.pop().is_some() {}
            d.push(b"\n", 0.0);
            while d.pop().is_some() {}
            for t in &t2 {
                d.push(format!("t={t} roll=1 pitch=2 yaw=3\n").as_bytes(), 0.0);
                while let Some(s) = d.pop() {
                    got.push(s.t_s);
                }
            }
            d.finish(0.0);
            got
        });
        prop_assert_eq!(got.len(), n);
        for (g, t) in got.iter().zip(&times) {
            prop_assert_eq!(*g, format!("{t}").parse::<f64>().expect("number"));
        }
    }

    #[test]
    fn auto_decoder_survives_hostile_mixes_with_bounded_queues(
        junk in proptest::collection::vec(
            prop_oneof![
                piece(),
                "[ -~]{0,80}\n".prop_map(String::into_bytes),
            ],
            0..300,
        ),
        split in 1usize..5000,
    ) {
        let junk = junk.concat();
        bounded(move || {
            let mut d = Decoder::new(Proto::Auto, MavConfig::default()).expect("no key");
            for chunk in junk.chunks(split) {
                d.push(chunk, 0.0);
                let mut n = 0;
                while d.pop().is_some() {
                    n += 1;
                }
                assert!(n <= 512, "queue of {n}");
            }
            d.finish(0.0);
            while d.pop().is_some() {}
        });
    }

    #[test]
    fn mutated_recordings_read_and_replay_in_bounded_time(
        chunks in proptest::collection::vec(
            (0u64..10_000_000, proptest::collection::vec(any::<u8>(), 1..2000)),
            0..30,
        ),
        flips in proptest::collection::vec((any::<prop::sample::Index>(), any::<u8>()), 0..40),
        far in proptest::collection::vec((any::<prop::sample::Index>(), any::<u64>()), 0..3),
        cut in any::<prop::sample::Index>(),
        do_cut in any::<bool>(),
    ) {
        let mut w = RecordWriter::new(Vec::new(), &Header::default()).expect("memory");
        for (us, data) in &chunks {
            w.write(*us as f64 / 1e6, data).expect("memory");
        }
        let mut bytes = w.into_inner();
        // Byte flips anywhere, chunk times far in the future, a cut.
        for (i, b) in &flips {
            let k = i.index(bytes.len());
            bytes[k] ^= b;
        }
        let body = bytes.len().saturating_sub(8);
        for (i, v) in &far {
            if body > 0 {
                let k = i.index(body);
                bytes[k..k + 8].copy_from_slice(&v.to_le_bytes());
            }
        }
        if do_cut {
            bytes.truncate(cut.index(bytes.len() + 1));
        }
        let n_bytes = bytes.len();
        let (n_chunks, ticks) = bounded(move || {
            let Ok(mut r) = RecordReader::new(&bytes[..]) else {
                return (0usize, 0usize);
            };
            let mut d = Decoder::new(Proto::Auto, MavConfig::default()).expect("no key");
            let (mut n, mut ticks, mut clock) = (0usize, 0usize, 0.0f64);
            while let Some(c) = r.next_chunk() {
                let Ok(c) = c else { break };
                assert!(!c.data.is_empty() && c.data.len() <= MAX_CHUNK);
                // The replay's silence ticks, as the file link gives them.
                let t = silence_ticks(clock, c.at_s).count();
                assert!(t as f64 <= MAX_GAP_TICKS_S / TICK_S);
                ticks += t;
                clock = clock.max(c.at_s);
                d.push(&c.data, c.at_s);
                while d.pop().is_some() {}
                n += 1;
            }
            d.finish(clock);
            (n, ticks)
        });
        // Every chunk holds at least a 12-byte head and one byte.
        prop_assert!(n_chunks <= n_bytes / 13 + 1);
        prop_assert!(ticks as f64 <= (n_chunks as f64) * MAX_GAP_TICKS_S / TICK_S);
    }
}

#[test]
fn signed_good_frames_after_garbage_are_read_with_the_key() {
    // The same property with a key: garbage (including unsigned frames of
    // the subset) then frames signed with growing timestamps.
    let key = mavlink::SigningKey::from_bytes([0x42; 32]);
    let mut stream: Vec<u8> = Vec::new();
    for i in 0..2000u32 {
        stream.push((i.wrapping_mul(2_654_435_761) >> 13) as u8);
        if i % 97 == 0 {
            stream.extend_from_slice(&[STX_V2, 250, 1, 0, 0, 1, 1, 30, 0, 0]);
        }
    }
    let msg = Message::Attitude {
        time_boot_ms: 5,
        rpy_rad: [0.1, 0.2, 0.3],
        rates_rad_s: [0.0; 3],
    };
    stream.extend(encode_frame(2, 0, 1, 1, &msg, None));
    for i in 0..10 {
        let sign = mavlink::SignWith {
            key: &key,
            link_id: 0,
            timestamp: 1000 + i,
        };
        stream.extend(encode_frame(2, i as u8, 1, 1, &msg, Some(sign)));
    }
    let got = bounded(move || {
        let mut d = MavDecoder::new(MavConfig {
            signing_key: Some(key),
            ..Default::default()
        });
        d.push(&stream);
        d.finish();
        let mut n = 0;
        while d.pop().is_some() {
            n += 1;
        }
        (n, d.counters())
    });
    assert_eq!(got.0, 10, "{:?}", got.1);
}
