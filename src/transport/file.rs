//! `file:PATH`: replay a recording at its own pace (or a multiple, or as
//! fast as the consumer takes it). Silences get ticks as a live link's
//! would, capped as [`silence_ticks`] caps them; the rest of a longer
//! silence is skipped, not waited for, so a garbled chunk time cannot stall
//! the replay.

use super::sink::Sink;
use super::{LinkEvent, sleep_until};
use cagehand::link::clock::{MAX_GAP_TICKS_S, silence_ticks};
use cagehand::link::record::RecordReader;
use cagehand::link::spec::ReplaySpeed;
use std::io::Read;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Instant;

pub(super) fn replay<R: Read>(
    mut reader: RecordReader<R>,
    speed: ReplaySpeed,
    sink: &mut Sink,
    stop: &AtomicBool,
) {
    let t0 = Instant::now();
    // Link seconds of silence skipped rather than waited through.
    let mut skipped_s = 0.0;
    let pace = |t: f64, skipped_s: f64| {
        if let ReplaySpeed::Factor(k) = speed {
            sleep_until(t0, (t - skipped_s) / k, stop);
        }
    };
    while let Some(chunk) = reader.next_chunk() {
        if stop.load(Ordering::Relaxed) {
            return;
        }
        let chunk = match chunk {
            Ok(c) => c,
            Err(e) => {
                sink.event(LinkEvent::Note(e.to_string()));
                break;
            }
        };
        // Ticks for the silences in the recording, at its own clock.
        let from = sink.clock_s;
        for t in silence_ticks(from, chunk.at_s) {
            pace(t, skipped_s);
            if !sink.tick(t) {
                return;
            }
        }
        let gap = chunk.at_s - from;
        if gap > MAX_GAP_TICKS_S {
            skipped_s += gap - MAX_GAP_TICKS_S;
        }
        pace(chunk.at_s, skipped_s);
        if !sink.data(chunk.at_s, &chunk.data) {
            return;
        }
    }
    sink.end();
}
