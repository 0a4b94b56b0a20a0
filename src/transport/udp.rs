//! `udp:HOST:PORT`: listen for datagrams, one read per datagram, senders
//! not on the allow-list counted as rejected.
//!
//! A fast sender's datagrams are gathered: after one arrives the reader
//! waits [`GATHER`] and takes everything that came meanwhile, then hands
//! it all to the consumer as one batch. At 1000 datagrams a second that is
//! about forty wake-ups of each thread instead of a thousand. The cost
//! is up to [`GATHER`] of delay, and the datagrams of one batch are stamped
//! with the time they were read rather than the time they came; the
//! watch's clocks are far coarser (a rest needs half a second of dwell,
//! the link goes stale after seconds).

use super::LinkEvent;
use super::sink::Sink;
use cagehand::link::clock::TICK_S;
use cagehand::link::spec::AllowEntry;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// How long the reader waits after a datagram for more to gather.
pub(super) const GATHER: Duration = Duration::from_millis(25);

/// Shortest wait for a datagram, so a tick just missed is sent soon
/// without the reader spinning.
const MIN_WAIT_S: f64 = 0.01;

pub(super) fn read_udp(
    sock: std::net::UdpSocket,
    allow: &[AllowEntry],
    sink: &mut Sink,
    stop: &AtomicBool,
) {
    let t0 = Instant::now();
    let mut buf = vec![0u8; 65536];
    // Taking what came during a gathering wait (the socket not blocking).
    let mut gathering = false;
    while !stop.load(Ordering::Relaxed) {
        if !gathering {
            // Wait in the socket until the next tick is due, not less: an
            // idle link wakes the reader four times a second, not ten
            // (each wake-up costs more than the read on a virtual machine).
            let quiet_s = t0.elapsed().as_secs_f64() - sink.last_sent_s;
            let wait_s = (TICK_S - quiet_s).clamp(MIN_WAIT_S, TICK_S);
            let _ = sock.set_read_timeout(Some(Duration::from_secs_f64(wait_s)));
        }
        let ok = match sock.recv_from(&mut buf) {
            Ok((n, from)) => {
                // Arrival time is taken after the wait, not before it.
                let now = t0.elapsed().as_secs_f64();
                let ok = if allow.is_empty() || allow.iter().any(|a| a.matches(&from)) {
                    sink.data(now, &buf[..n])
                } else {
                    sink.decoder.count_rejected(1);
                    sink.flush()
                };
                if !gathering {
                    sink.hold();
                    std::thread::sleep(GATHER);
                    // Should this fail, the read below blocks for its
                    // timeout at most and the batch goes then.
                    let _ = sock.set_nonblocking(true);
                    gathering = true;
                }
                ok
            }
            Err(e)
                if matches!(
                    e.kind(),
                    std::io::ErrorKind::WouldBlock
                        | std::io::ErrorKind::TimedOut
                        | std::io::ErrorKind::Interrupted
                ) =>
            {
                if gathering {
                    // Everything that came meanwhile is taken: ship it.
                    gathering = false;
                    let _ = sock.set_nonblocking(false);
                    sink.release()
                } else {
                    true
                }
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
    sink.release();
}
