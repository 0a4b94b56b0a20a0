//! `raw:PATH`: a plain byte capture, read as fast as the consumer takes it;
//! the link clock is the sender's own time (set by the samples).

use super::LinkEvent;
use super::sink::Sink;
use std::io::Read;
use std::sync::atomic::{AtomicBool, Ordering};

pub(super) fn read_raw(mut f: std::fs::File, sink: &mut Sink, stop: &AtomicBool) {
    let mut buf = vec![0u8; 1 << 16];
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
