//! The reader's side of the channel: the decoder, the link clock, what was
//! last sent, and the replay floor it keeps for live links with a key.

use super::floor::FloorStore;
use super::{LinkEvent, LinkMsg, Parcel};
use cagehand::link::clock::{TICK_S, silence_ticks};
use cagehand::link::{Counters, Decoder, Delivery};
use std::sync::mpsc::{Receiver, SyncSender, TrySendError};

/// Messages a blocking link (a replay) ships at once at the most.
const BLOCKING_BATCH: usize = 1024;

/// The reader's side of the channel, with its decoder.
///
/// What one read of bytes produces (samples, counters, ticks) is held and
/// shipped as one batch when the read is done: one channel hand-over per
/// read instead of two per sample (a replay's long reads in parts of
/// [`BLOCKING_BATCH`]). The order of the messages is unchanged.
pub(super) struct Sink {
    pub(super) tx: SyncSender<Vec<Parcel>>,
    /// Messages of the read in progress, not yet shipped.
    held: Vec<Parcel>,
    /// Emptied batches the consumer handed back, reused for the next ones.
    spare: Receiver<Vec<Parcel>>,
    /// Inside a read: `send` holds instead of shipping.
    holding: bool,
    pub(super) decoder: Decoder,
    pub(super) raw: bool,
    pub(super) blocking: bool,
    pub(super) sample_clock: bool,
    pub(super) clock_s: f64,
    pub(super) last_sent_s: f64,
    /// Counters last sent in a `Health` message (None: send them again).
    pub(super) health_sent: Option<Counters>,
    /// A sample has set the clock (`sample_clock` links only).
    pub(super) clock_from_sample: bool,
    /// Where the replay floor is kept (live links with a signing key).
    pub(super) floor: Option<FloorStore>,
}

/// Move the link's clock on to `at_s`: never back, and never to a time
/// that is not a number.
fn advance_clock(clock_s: &mut f64, at_s: f64) {
    if at_s.is_finite() && at_s > *clock_s {
        *clock_s = at_s;
    }
}

impl Sink {
    /// A sink for a reader: `blocking` waits for the consumer instead of
    /// dropping; `sample_clock` runs the link clock on sender time.
    pub(super) fn new(
        tx: SyncSender<Vec<Parcel>>,
        decoder: Decoder,
        raw: bool,
        blocking: bool,
        sample_clock: bool,
        floor: Option<FloorStore>,
        spare: Receiver<Vec<Parcel>>,
    ) -> Sink {
        Sink {
            tx,
            held: Vec::new(),
            spare,
            holding: false,
            decoder,
            raw,
            blocking,
            sample_clock,
            clock_s: 0.0,
            last_sent_s: 0.0,
            health_sent: None,
            clock_from_sample: false,
            floor,
        }
    }

    /// Send (or hold, inside a read); false once the consumer is gone.
    pub(super) fn send(&mut self, msg: LinkMsg) -> bool {
        self.last_sent_s = self.clock_s;
        if self.holding {
            self.held.push(Parcel::pack(msg));
            if self.blocking && self.held.len() >= BLOCKING_BATCH {
                // A replay's read gives thousands of messages: shipped in
                // parts, the consumer takes them while they are still in
                // the cache. Nothing is dropped on a blocking link, so the
                // parts carry exactly what the whole batch would.
                let next = self.fresh_batch();
                let batch = std::mem::replace(&mut self.held, next);
                return self.ship(batch);
            }
            return true;
        }
        let mut batch = self.fresh_batch();
        batch.push(Parcel::pack(msg));
        self.ship(batch)
    }

    /// An empty batch: one the consumer handed back, else a new one. Every
    /// batch shipped takes one, so the spares never pile up.
    fn fresh_batch(&mut self) -> Vec<Parcel> {
        self.spare.try_recv().unwrap_or_default()
    }

    /// Hand a batch to the consumer. A live link whose consumer is behind
    /// drops the batch rather than wait: its samples count as dropped and
    /// its counters go again with the next batch.
    fn ship(&mut self, batch: Vec<Parcel>) -> bool {
        if self.blocking {
            return self.tx.send(batch).is_ok();
        }
        match self.tx.try_send(batch) {
            Ok(()) => true,
            Err(TrySendError::Full(batch)) => {
                let samples = batch.iter().filter(|m| m.is_sample()).count();
                if samples > 0 {
                    self.decoder.count_dropped(samples as u64);
                }
                if batch.iter().any(Parcel::is_health) {
                    self.health_sent = None;
                }
                true
            }
            Err(TrySendError::Disconnected(_)) => false,
        }
    }

    pub(super) fn advance(&mut self, at_s: f64) {
        advance_clock(&mut self.clock_s, at_s);
    }

    /// Hold what follows until [`Sink::release`]: a reader that gathers
    /// several reads into one batch (UDP, see src/transport/udp.rs).
    pub(super) fn hold(&mut self) {
        self.holding = true;
    }

    /// Ship what was held; false once the consumer is gone.
    pub(super) fn release(&mut self) -> bool {
        self.holding = false;
        if self.held.is_empty() {
            return true;
        }
        let next = self.fresh_batch();
        let batch = std::mem::replace(&mut self.held, next);
        self.ship(batch)
    }

    /// Bytes that arrived at `at_s`: decoded, and everything they give
    /// shipped as one batch (or added to the one being held).
    pub(super) fn data(&mut self, at_s: f64, bytes: &[u8]) -> bool {
        if self.holding {
            return self.data_held(at_s, bytes);
        }
        self.holding = true;
        let ok = self.data_held(at_s, bytes);
        let shipped = self.release();
        ok && shipped
    }

    fn data_held(&mut self, at_s: f64, bytes: &[u8]) -> bool {
        self.advance(at_s);
        if self.raw {
            let at_s = self.clock_s;
            return self.send(LinkMsg::Bytes {
                at_s,
                data: bytes.to_vec(),
            });
        }
        if self.floor.is_some()
            && let Some(v) = self.decoder.verifier_mut()
        {
            v.set_wall_clock(super::floor::wall_timestamp());
        }
        if self.sample_clock && self.blocking {
            return self.data_in_lines(bytes);
        }
        if self.sample_clock {
            // One line at a time, so each sample's counters are its own
            // (a captured line's frames count includes that line, no more).
            let mut rest = bytes;
            while !rest.is_empty() {
                let end = memchr::memchr(b'\n', rest).map_or(rest.len(), |k| k + 1);
                let (piece, tail) = rest.split_at(end);
                rest = tail;
                self.decoder.push(piece, self.clock_s);
                if !self.flush() {
                    return false;
                }
            }
            return true;
        }
        self.decoder.push(bytes, self.clock_s);
        let ok = self.flush();
        self.keep_floor(false);
        ok
    }

    /// A capture on the sender's clock, replayed (blocking): the messages
    /// are those of pushing it one line (up to and including a newline
    /// byte) at a time and flushing after each, so each sample's counters
    /// are its own (a captured line's frames count includes that line, no
    /// more), in the same order: for each line its samples, each after
    /// the ticks of the silence before it, the counters (when they
    /// changed) before its first sample or, with none, after the line.
    /// The decoder reads the bytes whole ([`Decoder::push_cut`]) and says
    /// where each line ends with the counters there; the counters go into
    /// a slot kept before the line's first sample. Nothing is shipped
    /// while a slot is open.
    fn data_in_lines(&mut self, bytes: &[u8]) -> bool {
        let Sink {
            tx,
            held,
            spare,
            decoder,
            clock_s,
            last_sent_s,
            health_sent,
            clock_from_sample,
            ..
        } = self;
        let mut gone = false;
        // The line's counters slot: its index in `held` and its clock.
        let mut slot: Option<(usize, f64)> = None;
        decoder.push_cut(bytes, *clock_s, b'\n', |d| match d {
            Delivery::Sample(sample) => {
                if *clock_from_sample {
                    for t in silence_ticks(*clock_s, sample.t_s) {
                        advance_clock(clock_s, t);
                        held.push(Parcel::Tick { at_s: t });
                    }
                }
                advance_clock(clock_s, sample.t_s);
                *clock_from_sample = true;
                if slot.is_none() {
                    slot = Some((held.len(), *clock_s));
                    held.push(Parcel::Tick { at_s: *clock_s });
                }
                *last_sent_s = *clock_s;
                held.push(Parcel::sample(*clock_s, sample));
            }
            Delivery::Cut(counters) => {
                let changed = *health_sent != Some(counters);
                match slot.take() {
                    Some((k, at_s)) if changed => held[k] = Parcel::Health { at_s, counters },
                    Some((k, _)) => {
                        held.remove(k);
                    }
                    None if changed => {
                        *last_sent_s = *clock_s;
                        held.push(Parcel::Health {
                            at_s: *clock_s,
                            counters,
                        });
                    }
                    None => {}
                }
                if changed {
                    *health_sent = Some(counters);
                }
                if held.len() >= BLOCKING_BATCH && !gone {
                    // In parts, as `send` ships them (see there).
                    let next = spare.try_recv().unwrap_or_default();
                    gone = tx.send(std::mem::replace(held, next)).is_err();
                }
            }
        });
        !gone
    }

    /// Save the replay floor when it moved (at most every
    /// [`super::floor::SAVE_EVERY`], or now when `now`). A failure is told
    /// once, as a note.
    fn keep_floor(&mut self, now: bool) {
        let Some(store) = self.floor.as_mut() else {
            return;
        };
        let Some(v) = self.decoder.verifier_mut() else {
            return;
        };
        if let Some(msg) = store.keep(v, now) {
            let at_s = self.clock_s;
            self.send(LinkMsg::Event {
                at_s,
                event: LinkEvent::Note(msg),
            });
        }
    }

    /// Send what the decoder has: the counters first (when they changed),
    /// so a consumer never shows a sample with counters older than it, then
    /// the samples, then the counters again if they changed meanwhile.
    pub(super) fn flush(&mut self) -> bool {
        while let Some(sample) = self.decoder.pop() {
            if self.sample_clock {
                if !self.gap_ticks(sample.t_s) {
                    return false;
                }
                self.advance(sample.t_s);
                self.clock_from_sample = true;
            }
            if !self.health() {
                return false;
            }
            let at_s = self.clock_s;
            if !self.send(LinkMsg::Sample { at_s, sample }) {
                return false;
            }
        }
        self.health()
    }

    /// The counters, if they changed since they were last sent.
    fn health(&mut self) -> bool {
        let counters = self.decoder.counters();
        if self.health_sent == Some(counters) {
            return true;
        }
        let at_s = self.clock_s;
        self.health_sent = Some(counters);
        self.send(LinkMsg::Health { at_s, counters })
    }

    /// Ticks for a silence in a capture on the sender's clock, as replays
    /// of recordings have. Only between samples (the first sample sets the
    /// clock); capped as [`silence_ticks`] caps them.
    fn gap_ticks(&mut self, next_s: f64) -> bool {
        if !self.clock_from_sample {
            return true;
        }
        for t in silence_ticks(self.clock_s, next_s) {
            self.advance(t);
            if !self.send(LinkMsg::Tick { at_s: t }) {
                return false;
            }
        }
        true
    }

    /// A tick if the link has been quiet for [`TICK_S`].
    pub(super) fn tick(&mut self, at_s: f64) -> bool {
        self.advance(at_s);
        self.keep_floor(false);
        if self.clock_s - self.last_sent_s >= TICK_S {
            let at_s = self.clock_s;
            return self.send(LinkMsg::Tick { at_s });
        }
        true
    }

    pub(super) fn event(&mut self, event: LinkEvent) -> bool {
        let at_s = self.clock_s;
        self.send(LinkMsg::Event { at_s, event })
    }

    /// A finite input ended.
    pub(super) fn end(&mut self) {
        self.decoder.finish(self.clock_s);
        self.flush();
        let at_s = self.clock_s;
        let _ = self.tx.send(vec![Parcel::pack(LinkMsg::End { at_s })]);
    }
}

impl Drop for Sink {
    fn drop(&mut self) {
        // The reader is ending: what the floor learned since its last save
        // must not be lost, or those frames could be replayed next run.
        self.keep_floor(true);
    }
}
