//! `udp:HOST:PORT`: listen for datagrams, one read per datagram, senders
//! not on the allow-list counted as rejected.

use super::LinkEvent;
use super::sink::Sink;
use cagehand::link::spec::AllowEntry;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

pub(super) fn read_udp(
    sock: std::net::UdpSocket,
    allow: &[AllowEntry],
    sink: &mut Sink,
    stop: &AtomicBool,
) {
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
