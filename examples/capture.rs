//! Write a raw MAVLink capture of the simulator's telemetry (invented data),
//! for measuring the headless replay whole-process:
//! `cargo run --release --example capture -- 11 > /tmp/capture.bin`
//! writes about 11 MB (attitude and IMU every 10 ms step, velocity every
//! fifth, status and battery once a second, the demo vehicle's crash
//! included), then
//! `cagehand watch --headless --link raw:/tmp/capture.bin --replay-speed max --summary`.

use cagehand::cage::Cage;
use cagehand::link::Proto;
use cagehand::profile::Profile;
use cagehand::sim::Sim;
use cagehand::sim::wire::Wire;
use std::io::Write;

fn main() -> std::process::ExitCode {
    let arg = std::env::args().nth(1).unwrap_or_else(|| "11".into());
    let Ok(megabytes) = arg.parse::<usize>() else {
        eprintln!("size {arg:?}: expected a whole number of megabytes");
        return std::process::ExitCode::from(2);
    };
    let (Ok(p), seed) = (Profile::demo(), 7) else {
        eprintln!("the built-in demo profile did not load");
        return std::process::ExitCode::FAILURE;
    };
    let Ok(c) = Cage::from_profile(&p) else {
        eprintln!("the built-in demo cage did not build");
        return std::process::ExitCode::FAILURE;
    };
    let mut sim = Sim::new(&c, seed);
    let mut wire = Wire::new(Proto::Mavlink);
    let mut out = std::io::BufWriter::new(std::io::stdout().lock());
    let mut written = 0usize;
    while written < megabytes * 1_000_000 {
        sim.step(0.01);
        let bytes = wire.encode(&sim.telemetry());
        written += bytes.len();
        if out.write_all(&bytes).is_err() {
            return std::process::ExitCode::FAILURE;
        }
    }
    if out.flush().is_err() {
        return std::process::ExitCode::FAILURE;
    }
    std::process::ExitCode::SUCCESS
}
