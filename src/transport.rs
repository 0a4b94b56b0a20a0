//! Transports, at the edge: sockets, serial ports, files and the in-process
//! simulator. [`open`] opens the source (so a missing port or a bad file is
//! an error at once, with the likely fix), then starts one reader thread
//! that sends [`LinkMsg`]s over a channel. The reader never blocks its
//! consumer: live sources use `try_send` and count what a full channel
//! drops; replays and in-process simulations at full speed wait for the
//! consumer instead, since nothing is lost by waiting.
//!
//! Every message carries the link clock `at_s`: seconds since the link was
//! opened (live sources), the recorded arrival time (`file:`), or the
//! latest sender time (`raw:`, which has no arrival times). The reader also
//! sends a `Tick` at least every [`TICK_S`] of link time, so a consumer can
//! notice silence (stale data) without a clock of its own: in a `raw:`
//! capture, between one sample's sender time and the next. Each batch of
//! samples is preceded by a `Health` with the counters when they changed,
//! so a consumer's counters are never older than the sample it shows.
//!
//! One file per transport (`udp`, `serial`, `file` for recordings, `raw`,
//! `sim`); `sink` is the reader's side of the channel, `floor` keeps the
//! signing replay floor of live links in the data folder. Adding a link
//! type: parse its spec in `link/spec.rs`, write its reader here, open it
//! in [`open`].

mod file;
pub mod floor;
mod parcel;
mod raw;
mod serial;
mod sim;
mod sink;
mod udp;

use cagehand::cage::Cage;
use cagehand::link::mavlink::MavConfig;
use cagehand::link::record::{RecordError, RecordReader};
use cagehand::link::spec::{AllowEntry, LinkSpec, ReplaySpeed};
use cagehand::link::{Counters, Decoder, Proto, ProtoError};
use cagehand::sample::Sample;
use cagehand::sim::wire::Wire;
use cagehand::sim::{Sim, SimCommand};
pub use parcel::Parcel;
use sink::Sink;
use std::path::PathBuf;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, RecvError, RecvTimeoutError, Sender, TryRecvError};
use std::thread::JoinHandle;
use std::time::{Duration, Instant};

/// Batches the channel holds before a live reader starts dropping.
const CHANNEL_CAP: usize = 4096;

/// What a reader sends.
#[derive(Debug, Clone, PartialEq)]
pub enum LinkMsg {
    /// A decoded sample.
    Sample {
        /// Link clock.
        at_s: f64,
        /// The sample.
        sample: Sample,
    },
    /// Decoder counters after a batch of bytes.
    Health {
        /// Link clock.
        at_s: f64,
        /// Counters so far.
        counters: Counters,
    },
    /// Raw bytes (links opened with [`Mode::Raw`], for recording).
    Bytes {
        /// Link clock.
        at_s: f64,
        /// The bytes as received.
        data: Vec<u8>,
    },
    /// Something happened to the link.
    Event {
        /// Link clock.
        at_s: f64,
        /// What.
        event: LinkEvent,
    },
    /// Time passes with nothing to say.
    Tick {
        /// Link clock.
        at_s: f64,
    },
    /// A finite input ended.
    End {
        /// Link clock.
        at_s: f64,
    },
}

/// Link events worth telling the operator.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LinkEvent {
    /// The device went away; the reader keeps trying to reopen it.
    Lost(String),
    /// It came back.
    Reopened,
    /// A note (a cut recording, a simulator command's result).
    Note(String),
}

/// Decode samples or pass raw bytes through.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Mode {
    /// Decode to samples.
    Decode,
    /// Raw bytes with arrival times (recording).
    Raw,
}

/// How to open a link.
#[derive(Debug, Clone, Default)]
pub struct LinkOptions {
    /// Protocol.
    pub proto: Proto,
    /// MAVLink filters (sysid, signing key).
    pub mav: MavConfig,
    /// UDP senders allowed (empty: anyone).
    pub allow: Vec<AllowEntry>,
    /// Pace of `file:` replays and of the in-process simulator.
    pub replay_speed: ReplaySpeed,
    /// The cage, for the in-process simulator.
    pub cage: Option<Cage>,
    /// The data folder, where live links with a signing key keep their
    /// replay floor; none keeps it in memory only.
    pub data_dir: Option<PathBuf>,
}

/// Why a link cannot be opened. Each message says the likely fix.
#[derive(Debug, thiserror::Error)]
pub enum LinkError {
    /// UDP bind failed. The message gives the hint for the kind of
    /// failure; the OS text is the error's source (shown once, after it).
    #[error("cannot listen on udp {addr}{}", bind_hint(addr, source))]
    Bind {
        /// Address.
        addr: std::net::SocketAddr,
        /// Cause.
        source: std::io::Error,
    },
    /// No such serial device.
    #[error(
        "serial port {path} not found: is the radio or flight controller plugged in? look for it with `ls /dev/ttyUSB* /dev/ttyACM*` (or /dev/serial/by-id/)"
    )]
    SerialMissing {
        /// Path.
        path: String,
    },
    /// Another program has the port.
    #[error(
        "serial port {path} is busy: another program (a ground station, a serial monitor, ModemManager) has it open; close that program and try again"
    )]
    SerialBusy {
        /// Path.
        path: String,
    },
    /// No permission.
    #[error(
        "no permission to open serial port {path}: add yourself to the group that owns it (often `dialout`: `sudo usermod -aG dialout $USER`, then log in again)"
    )]
    SerialPermission {
        /// Path.
        path: String,
    },
    /// Other serial failure.
    #[error("cannot open serial port {path} at {baud} baud: {msg}")]
    Serial {
        /// Path.
        path: String,
        /// Baud.
        baud: u32,
        /// Cause.
        msg: String,
    },
    /// A file cannot be opened.
    #[error("cannot open {path}: {source}")]
    File {
        /// Path.
        path: String,
        /// Cause.
        source: std::io::Error,
    },
    /// A recording cannot be read.
    #[error(
        "{path}: {source} (record one with `cagehand record`, or read a plain capture with raw:PATH)"
    )]
    Recording {
        /// Path.
        path: String,
        /// Cause.
        source: RecordError,
    },
    /// The protocol cannot be read as asked (lines with a signing key).
    #[error(transparent)]
    Proto(#[from] ProtoError),
    /// The saved replay floor cannot be read.
    #[error(
        "replay floor {path}: {why}; it keeps replayed signed frames out, so it is not ignored: move it aside to start a new one (frames up to a minute older than now could then be accepted once)"
    )]
    Floor {
        /// The file.
        path: String,
        /// What is wrong.
        why: String,
    },
    /// The simulator needs a cage.
    #[error("the sim link needs a profile's cage")]
    NoCage,
    /// The thread could not start.
    #[error("cannot start the link reader: {0}")]
    Thread(std::io::Error),
}

/// The likely fix for a failed UDP bind, by the kind of failure.
fn bind_hint(addr: &std::net::SocketAddr, e: &std::io::Error) -> String {
    use std::io::ErrorKind as K;
    match e.kind() {
        K::AddrInUse => format!(
            " (another program, such as a ground station, is using port {}: close it or pick another port)",
            addr.port()
        ),
        K::AddrNotAvailable => format!(
            " ({} is not an address of this machine: listen on 127.0.0.1 or 0.0.0.0)",
            addr.ip()
        ),
        K::PermissionDenied => format!(
            " (ports below 1024 need privileges: pick a port of 1024 or more, such as 14550; port {})",
            addr.port()
        ),
        _ => String::new(),
    }
}

impl LinkError {
    /// Whether the user can fix this by changing what they typed or named
    /// (exit code 2) rather than a runtime failure (exit code 1).
    pub fn is_bad_input(&self) -> bool {
        matches!(
            self,
            LinkError::File { .. }
                | LinkError::Recording { .. }
                | LinkError::Proto(_)
                | LinkError::Floor { .. }
        )
    }
}

/// The consumer's end of a link: the reader ships its messages in batches
/// (everything one read produced goes in one channel send, so a fast link
/// costs one hand-over per read rather than per sample), packed small
/// ([`Parcel`]); this hands them out one at a time, in order, unpacked,
/// and hands each emptied batch back to the reader for reuse.
#[derive(Debug)]
pub struct LinkRx {
    rx: Receiver<Vec<Parcel>>,
    /// The batch being handed out: its parcels are taken where they lie
    /// (not copied into a queue), `next` is the first not yet taken.
    batch: Vec<Parcel>,
    next: usize,
    /// The message [`LinkRx::recv_timeout_ref`] lends, unpacked here.
    lent: LinkMsg,
    /// Where an emptied batch goes back to its reader for reuse (so a fast
    /// replay writes into memory already mapped rather than fresh pages).
    spare: Option<Sender<Vec<Parcel>>>,
}

impl LinkRx {
    pub(crate) fn new(rx: Receiver<Vec<Parcel>>) -> LinkRx {
        LinkRx {
            rx,
            batch: Vec::new(),
            next: 0,
            lent: LinkMsg::Tick { at_s: 0.0 },
            spare: None,
        }
    }

    /// A receiver that hands emptied batches back through `spare`.
    fn with_spare(rx: Receiver<Vec<Parcel>>, spare: Sender<Vec<Parcel>>) -> LinkRx {
        LinkRx {
            spare: Some(spare),
            ..LinkRx::new(rx)
        }
    }

    /// The next message of the batch in hand, if any is left.
    #[inline]
    fn take(&mut self) -> Option<LinkMsg> {
        let slot = self.batch.get_mut(self.next)?;
        self.next += 1;
        Some(std::mem::replace(slot, Parcel::Tick { at_s: 0.0 }).unpack())
    }

    /// A new batch in hand; the emptied one goes back to the reader.
    fn refill(&mut self, batch: Vec<Parcel>) {
        let mut old = std::mem::replace(&mut self.batch, batch);
        self.next = 0;
        if let Some(spare) = &self.spare
            && old.capacity() > 0
        {
            old.clear();
            // A reader that has ended no longer wants it.
            let _ = spare.send(old);
        }
    }

    /// The next message, waiting as long as it takes; Err once the reader
    /// has ended and everything it sent was handed out.
    pub fn recv(&mut self) -> Result<LinkMsg, RecvError> {
        loop {
            if let Some(m) = self.take() {
                return Ok(m);
            }
            let batch = self.rx.recv()?;
            self.refill(batch);
        }
    }

    /// The next message, waiting at most `timeout`.
    pub fn recv_timeout(&mut self, timeout: Duration) -> Result<LinkMsg, RecvTimeoutError> {
        if let Some(m) = self.take() {
            return Ok(m); // the common case: no clock read
        }
        let deadline = Instant::now() + timeout;
        loop {
            if let Some(m) = self.take() {
                return Ok(m);
            }
            let left = deadline.saturating_duration_since(Instant::now());
            let batch = self.rx.recv_timeout(left)?;
            self.refill(batch);
        }
    }

    /// The next message, lent (unpacked into the receiver's own slot, not
    /// handed over), waiting at most `timeout`; valid until the next call.
    pub fn recv_timeout_ref(&mut self, timeout: Duration) -> Result<&LinkMsg, RecvTimeoutError> {
        if self.next >= self.batch.len() {
            let deadline = Instant::now() + timeout;
            while self.next >= self.batch.len() {
                let left = deadline.saturating_duration_since(Instant::now());
                let batch = self.rx.recv_timeout(left)?;
                self.refill(batch);
            }
        }
        if let Some(m) = self.take() {
            self.lent = m;
        }
        Ok(&self.lent)
    }

    /// The next message if one is already here (not waiting).
    pub fn try_recv(&mut self) -> Result<LinkMsg, TryRecvError> {
        loop {
            if let Some(m) = self.take() {
                return Ok(m);
            }
            let batch = self.rx.try_recv()?;
            self.refill(batch);
        }
    }
}

/// An open link: its channel and a way to stop it.
#[derive(Debug)]
pub struct Link {
    /// Messages from the reader.
    pub rx: LinkRx,
    /// The spec it was opened from, as shown on the health line.
    pub source: String,
    commands: Option<Sender<SimCommand>>,
    stop: Arc<AtomicBool>,
    /// The reader, joined on drop when it keeps a replay floor (so its
    /// last save is done before the process ends).
    reader: Option<JoinHandle<()>>,
}

impl Link {
    /// A sender for in-process simulator commands that outlives borrowing
    /// the link (the screens keep it while a thread reads `rx`); None for
    /// other links.
    pub fn commander(&self) -> Option<Sender<SimCommand>> {
        self.commands.clone()
    }
}

impl Drop for Link {
    fn drop(&mut self) {
        // The reader sees the flag (or the closed channel) and ends.
        self.stop.store(true, Ordering::Relaxed);
        if let Some(h) = self.reader.take() {
            // Close our end first, so a reader waiting to send is released.
            drop(std::mem::replace(
                &mut self.rx,
                LinkRx::new(mpsc::sync_channel(0).1),
            ));
            let _ = h.join();
        }
    }
}

/// Sleep until `wall_s` after `t0`, watching the stop flag.
fn sleep_until(t0: Instant, wall_s: f64, stop: &AtomicBool) {
    while !stop.load(Ordering::Relaxed) {
        let left = wall_s - t0.elapsed().as_secs_f64();
        if !left.is_finite() || left <= 0.0 {
            return;
        }
        std::thread::sleep(Duration::from_secs_f64(left.min(0.1)));
    }
}

/// Open a link and start its reader thread.
pub fn open(spec: &LinkSpec, opts: LinkOptions, mode: Mode) -> Result<Link, LinkError> {
    let (tx, rx) = mpsc::sync_channel(CHANNEL_CAP);
    let (spare_tx, spare_rx) = mpsc::channel();
    let stop = Arc::new(AtomicBool::new(false));
    let max = opts.replay_speed == ReplaySpeed::Max;
    let blocking = mode == Mode::Raw
        || match spec {
            LinkSpec::File(_) | LinkSpec::Raw(_) => true,
            LinkSpec::Sim { .. } => max,
            _ => false,
        };
    let live = matches!(spec, LinkSpec::Udp(_) | LinkSpec::Serial { .. });
    let mut mav = opts.mav.clone();
    // Live links with a key keep their replay floor in the data folder;
    // replays of files are replays by nature and keep theirs in memory.
    let floor = match (&mav.signing_key, &opts.data_dir, mode) {
        (Some(key), Some(dir), Mode::Decode) if live => {
            let path = floor::floor_path(dir, key);
            mav.replay_floor = floor::load(&path)?;
            Some(floor::FloorStore::new(path))
        }
        _ => None,
    };
    let keeps_floor = floor.is_some();
    let decoder = Decoder::new(opts.proto, mav)?;
    let mut sink = Sink::new(
        tx,
        decoder,
        mode == Mode::Raw,
        blocking,
        matches!(spec, LinkSpec::Raw(_)),
        floor,
        spare_rx,
    );
    let st = stop.clone();
    let mut commands = None;
    let body: Box<dyn FnOnce() + Send> = match spec.clone() {
        LinkSpec::Udp(addr) => {
            let sock = std::net::UdpSocket::bind(addr)
                .map_err(|source| LinkError::Bind { addr, source })?;
            let allow = opts.allow.clone();
            Box::new(move || udp::read_udp(sock, &allow, &mut sink, &st))
        }
        LinkSpec::Serial { path, baud } => {
            let port = serial::open_serial(&path, baud)?;
            Box::new(move || serial::read_serial(port, &path, baud, &mut sink, &st))
        }
        LinkSpec::File(path) => {
            let name = path.display().to_string();
            let f = std::fs::File::open(&path).map_err(|source| LinkError::File {
                path: name.clone(),
                source,
            })?;
            let reader = RecordReader::new(std::io::BufReader::new(f))
                .map_err(|source| LinkError::Recording { path: name, source })?;
            let speed = opts.replay_speed;
            Box::new(move || file::replay(reader, speed, &mut sink, &st))
        }
        LinkSpec::Raw(path) => {
            let f = std::fs::File::open(&path).map_err(|source| LinkError::File {
                path: path.display().to_string(),
                source,
            })?;
            Box::new(move || raw::read_raw(f, &mut sink, &st))
        }
        LinkSpec::Sim { seed } => {
            let cage = opts.cage.clone().ok_or(LinkError::NoCage)?;
            let (ctx, crx) = mpsc::channel();
            commands = Some(ctx);
            let proto = if opts.proto == Proto::Line {
                Proto::Line
            } else {
                Proto::Mavlink
            };
            Box::new(move || {
                sim::run_sim(
                    Sim::new(&cage, seed),
                    Wire::new(proto),
                    max,
                    crx,
                    &mut sink,
                    &st,
                )
            })
        }
    };
    let handle = std::thread::Builder::new()
        .name(format!("link {spec}"))
        .spawn(body)
        .map_err(LinkError::Thread)?;
    Ok(Link {
        rx: LinkRx::with_spare(rx, spare_tx),
        source: spec.to_string(),
        commands,
        stop,
        reader: keeps_floor.then_some(handle),
    })
}

#[cfg(test)]
mod tests;
