//! `serial:PATH@BAUD`: a serial port, reopened when the device comes back.

use super::sink::Sink;
use super::{LinkError, LinkEvent};
use std::io::Read;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::{Duration, Instant};

/// Wait between attempts to reopen a serial port that went away.
const REOPEN_EVERY: Duration = Duration::from_secs(1);

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

/// Open the port (with a read timeout, so the reader sees its stop flag).
pub(super) fn open_serial(
    path: &str,
    baud: u32,
) -> Result<Box<dyn serialport::SerialPort>, LinkError> {
    serialport::new(path, baud)
        .timeout(Duration::from_millis(200))
        .open()
        .map_err(|e| serial_error(path, baud, e))
}

pub(super) fn read_serial(
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
