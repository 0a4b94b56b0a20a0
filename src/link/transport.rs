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

use super::mavlink::MavConfig;
use super::record::{RecordError, RecordReader};
use super::spec::{AllowEntry, LinkSpec, ReplaySpeed};
use super::{Counters, Decoder, Proto};
use crate::cage::Cage;
use crate::sample::Sample;
use crate::sim::wire::Wire;
use crate::sim::{SIM_RATE_HZ, Sim, SimCommand};
use std::io::Read;
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::{self, Receiver, Sender, SyncSender, TrySendError};
use std::time::{Duration, Instant};

/// Longest silence between messages from a reader, in link seconds.
pub const TICK_S: f64 = 0.25;
/// Longest silence in a `raw:` capture that gets ticks, in sender seconds:
/// beyond it the sender's clock jumped (a reboot, a garbled time) and ticks
/// would only flood the consumer; stale shows long before.
const MAX_GAP_TICKS_S: f64 = 600.0;
/// Messages the channel holds before a live reader starts dropping.
const CHANNEL_CAP: usize = 4096;
/// Wait between attempts to reopen a serial port that went away.
const REOPEN_EVERY: Duration = Duration::from_secs(1);

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
        matches!(self, LinkError::File { .. } | LinkError::Recording { .. })
    }
}

/// An open link: its channel and a way to stop it.
#[derive(Debug)]
pub struct Link {
    /// Messages from the reader.
    pub rx: Receiver<LinkMsg>,
    /// The spec it was opened from, as shown on the health line.
    pub source: String,
    commands: Option<Sender<SimCommand>>,
    stop: Arc<AtomicBool>,
}

impl Link {
    /// Send a command to the in-process simulator; false for other links.
    pub fn command(&self, cmd: SimCommand) -> bool {
        self.commands.as_ref().is_some_and(|c| c.send(cmd).is_ok())
    }

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
    }
}

/// The reader's side of the channel, with its decoder.
struct Sink {
    tx: SyncSender<LinkMsg>,
    decoder: Decoder,
    raw: bool,
    blocking: bool,
    sample_clock: bool,
    clock_s: f64,
    last_sent_s: f64,
    /// Counters last sent in a `Health` message (None: send them again).
    health_sent: Option<Counters>,
    /// A sample has set the clock (`sample_clock` links only).
    clock_from_sample: bool,
}

impl Sink {
    /// Send; false once the consumer is gone.
    fn send(&mut self, msg: LinkMsg) -> bool {
        self.last_sent_s = self.clock_s;
        if self.blocking {
            return self.tx.send(msg).is_ok();
        }
        match self.tx.try_send(msg) {
            Ok(()) => true,
            Err(TrySendError::Full(LinkMsg::Sample { .. })) => {
                self.decoder.count_dropped(1);
                true
            }
            Err(TrySendError::Full(LinkMsg::Health { .. })) => {
                // Lost: send the counters with the next batch.
                self.health_sent = None;
                true
            }
            Err(TrySendError::Full(_)) => true,
            Err(TrySendError::Disconnected(_)) => false,
        }
    }

    fn advance(&mut self, at_s: f64) {
        if at_s.is_finite() && at_s > self.clock_s {
            self.clock_s = at_s;
        }
    }

    fn data(&mut self, at_s: f64, bytes: &[u8]) -> bool {
        self.advance(at_s);
        if self.raw {
            let at_s = self.clock_s;
            return self.send(LinkMsg::Bytes {
                at_s,
                data: bytes.to_vec(),
            });
        }
        if self.sample_clock {
            // One line at a time, so each sample's counters are its own
            // (a captured line's frames count includes that line, no more).
            for piece in bytes.split_inclusive(|&b| b == b'\n') {
                self.decoder.push(piece, self.clock_s);
                if !self.flush() {
                    return false;
                }
            }
            return true;
        }
        self.decoder.push(bytes, self.clock_s);
        self.flush()
    }

    /// Send what the decoder has: the counters first (when they changed),
    /// so a consumer never shows a sample with counters older than it, then
    /// the samples, then the counters again if they changed meanwhile.
    fn flush(&mut self) -> bool {
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
    /// of recordings have: every [`TICK_S`] from the last sample up to
    /// `next_s`. Only between samples (the first sample sets the clock);
    /// a silence longer than [`MAX_GAP_TICKS_S`] (a sender clock that
    /// jumped) gets ticks for that long only.
    fn gap_ticks(&mut self, next_s: f64) -> bool {
        if !self.clock_from_sample || !next_s.is_finite() {
            return true;
        }
        let start = self.clock_s;
        let end = next_s.min(start + MAX_GAP_TICKS_S);
        let mut t = start;
        while end - t > TICK_S {
            t += TICK_S;
            self.advance(t);
            if !self.send(LinkMsg::Tick { at_s: t }) {
                return false;
            }
        }
        true
    }

    /// A tick if the link has been quiet for [`TICK_S`].
    fn tick(&mut self, at_s: f64) -> bool {
        self.advance(at_s);
        if self.clock_s - self.last_sent_s >= TICK_S {
            let at_s = self.clock_s;
            return self.send(LinkMsg::Tick { at_s });
        }
        true
    }

    fn event(&mut self, event: LinkEvent) -> bool {
        let at_s = self.clock_s;
        self.send(LinkMsg::Event { at_s, event })
    }

    fn end(&mut self) {
        self.decoder.finish(self.clock_s);
        self.flush();
        let at_s = self.clock_s;
        let _ = self.tx.send(LinkMsg::End { at_s });
    }
}

fn serial_error(path: &str, baud: u32, e: serialport::Error) -> LinkError {
    use serialport::ErrorKind as K;
    let path = path.to_string();
    if !std::path::Path::new(&path).exists() {
        return LinkError::SerialMissing { path };
    }
    match e.kind {
        K::Io(std::io::ErrorKind::NotFound) => LinkError::SerialMissing { path },
        K::Io(std::io::ErrorKind::PermissionDenied) => LinkError::SerialPermission { path },
        // serialport reports EBUSY (another process holds the port) as NoDevice.
        K::NoDevice => LinkError::SerialBusy { path },
        _ => LinkError::Serial {
            path,
            baud,
            msg: e.description,
        },
    }
}

fn open_serial(path: &str, baud: u32) -> Result<Box<dyn serialport::SerialPort>, LinkError> {
    serialport::new(path, baud)
        .timeout(Duration::from_millis(200))
        .open()
        .map_err(|e| serial_error(path, baud, e))
}

/// Open a link and start its reader thread.
pub fn open(spec: &LinkSpec, opts: LinkOptions, mode: Mode) -> Result<Link, LinkError> {
    let (tx, rx) = mpsc::sync_channel(CHANNEL_CAP);
    let stop = Arc::new(AtomicBool::new(false));
    let max = opts.replay_speed == ReplaySpeed::Max;
    let blocking = mode == Mode::Raw
        || match spec {
            LinkSpec::File(_) | LinkSpec::Raw(_) => true,
            LinkSpec::Sim { .. } => max,
            _ => false,
        };
    let mut sink = Sink {
        tx,
        decoder: Decoder::new(opts.proto, opts.mav.clone()),
        raw: mode == Mode::Raw,
        blocking,
        sample_clock: matches!(spec, LinkSpec::Raw(_)),
        clock_s: 0.0,
        last_sent_s: 0.0,
        health_sent: None,
        clock_from_sample: false,
    };
    let st = stop.clone();
    let mut commands = None;
    let body: Box<dyn FnOnce() + Send> = match spec.clone() {
        LinkSpec::Udp(addr) => {
            let sock = std::net::UdpSocket::bind(addr)
                .map_err(|source| LinkError::Bind { addr, source })?;
            let _ = sock.set_read_timeout(Some(Duration::from_millis(100)));
            let allow = opts.allow.clone();
            Box::new(move || read_udp(sock, &allow, &mut sink, &st))
        }
        LinkSpec::Serial { path, baud } => {
            let port = open_serial(&path, baud)?;
            Box::new(move || read_serial(port, &path, baud, &mut sink, &st))
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
            Box::new(move || replay(reader, speed, &mut sink, &st))
        }
        LinkSpec::Raw(path) => {
            let f = std::fs::File::open(&path).map_err(|source| LinkError::File {
                path: path.display().to_string(),
                source,
            })?;
            Box::new(move || read_raw(f, &mut sink, &st))
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
                run_sim(
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
    std::thread::Builder::new()
        .name(format!("link {spec}"))
        .spawn(body)
        .map_err(LinkError::Thread)?;
    Ok(Link {
        rx,
        source: spec.to_string(),
        commands,
        stop,
    })
}

fn read_udp(sock: std::net::UdpSocket, allow: &[AllowEntry], sink: &mut Sink, stop: &AtomicBool) {
    let t0 = Instant::now();
    let mut buf = vec![0u8; 65536];
    while !stop.load(Ordering::Relaxed) {
        let ok = match sock.recv_from(&mut buf) {
            Ok((n, from)) => {
                // Arrival time is taken after the wait, not before it.
                let now = t0.elapsed().as_secs_f64();
                if allow.is_empty() || allow.iter().any(|a| a.matches(&from)) {
                    sink.data(now, &buf[..n])
                } else {
                    sink.decoder.count_rejected(1);
                    sink.flush()
                }
            }
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::WouldBlock
                        | std::io::ErrorKind::TimedOut
                        | std::io::ErrorKind::Interrupted
                ) =>
            {
                true
            }
            Err(e) => {
                // ICMP port-unreachable and the like: note it, keep listening.
                let ok = sink.event(LinkEvent::Note(format!("udp: {e}")));
                std::thread::sleep(Duration::from_millis(50));
                ok
            }
        };
        if !ok || !sink.tick(t0.elapsed().as_secs_f64()) {
            return;
        }
    }
}

fn read_serial(
    mut port: Box<dyn serialport::SerialPort>,
    path: &str,
    baud: u32,
    sink: &mut Sink,
    stop: &AtomicBool,
) {
    let t0 = Instant::now();
    let mut buf = vec![0u8; 4096];
    while !stop.load(Ordering::Relaxed) {
        match port.read(&mut buf) {
            Ok(0) => {}
            Ok(n) => {
                if !sink.data(t0.elapsed().as_secs_f64(), &buf[..n]) {
                    return;
                }
            }
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::TimedOut | std::io::ErrorKind::Interrupted
                ) => {}
            Err(e) => {
                if !sink.event(LinkEvent::Lost(format!(
                    "serial port {path}: {e}; reopening"
                ))) {
                    return;
                }
                loop {
                    if stop.load(Ordering::Relaxed) || !sink.tick(t0.elapsed().as_secs_f64()) {
                        return;
                    }
                    std::thread::sleep(REOPEN_EVERY);
                    if let Ok(p) = open_serial(path, baud) {
                        port = p;
                        if !sink.event(LinkEvent::Reopened) {
                            return;
                        }
                        break;
                    }
                }
            }
        }
        if !sink.tick(t0.elapsed().as_secs_f64()) {
            return;
        }
    }
}

fn replay<R: Read>(
    mut reader: RecordReader<R>,
    speed: ReplaySpeed,
    sink: &mut Sink,
    stop: &AtomicBool,
) {
    let t0 = Instant::now();
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
        let mut t = sink.clock_s;
        while chunk.at_s - t > TICK_S {
            t += TICK_S;
            if let ReplaySpeed::Factor(k) = speed {
                sleep_until(t0, t / k, stop);
            }
            if !sink.tick(t) {
                return;
            }
        }
        if let ReplaySpeed::Factor(k) = speed {
            sleep_until(t0, chunk.at_s / k, stop);
        }
        if !sink.data(chunk.at_s, &chunk.data) {
            return;
        }
    }
    sink.end();
}

fn sleep_until(t0: Instant, wall_s: f64, stop: &AtomicBool) {
    while !stop.load(Ordering::Relaxed) {
        let left = wall_s - t0.elapsed().as_secs_f64();
        if left <= 0.0 {
            return;
        }
        std::thread::sleep(Duration::from_secs_f64(left.min(0.1)));
    }
}

fn read_raw(mut f: std::fs::File, sink: &mut Sink, stop: &AtomicBool) {
    let mut buf = vec![0u8; 4096];
    loop {
        if stop.load(Ordering::Relaxed) {
            return;
        }
        match f.read(&mut buf) {
            Ok(0) => break,
            Ok(n) => {
                let at = sink.clock_s;
                if !sink.data(at, &buf[..n]) {
                    return;
                }
            }
            Err(e) if e.kind() == std::io::ErrorKind::Interrupted => {}
            Err(e) => {
                sink.event(LinkEvent::Note(format!("reading capture: {e}")));
                break;
            }
        }
    }
    sink.end();
}

fn run_sim(
    mut sim: Sim,
    mut wire: Wire,
    max: bool,
    commands: Receiver<SimCommand>,
    sink: &mut Sink,
    stop: &AtomicBool,
) {
    let t0 = Instant::now();
    let dt = 1.0 / SIM_RATE_HZ;
    while !stop.load(Ordering::Relaxed) {
        while let Ok(cmd) = commands.try_recv() {
            let note = match sim.command(&cmd) {
                Ok(()) => format!("sim: {cmd} accepted"),
                Err(e) => format!("sim: {cmd} refused: {e}"),
            };
            if !sink.event(LinkEvent::Note(note)) {
                return;
            }
        }
        sim.step(dt);
        let tel = sim.telemetry();
        if !max {
            sleep_until(t0, tel.t_s, stop);
        }
        let bytes = wire.encode(&tel);
        if !sink.data(tel.t_s, &bytes) {
            return;
        }
    }
}

#[cfg(test)]
mod tests;
