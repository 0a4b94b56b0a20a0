//! `sim[:SEED]`: the simulated vehicle in-process, encoded on the wire as a
//! real one would be and decoded like any link, taking roll and fly
//! commands from the screens.

use super::sink::Sink;
use super::{LinkEvent, sleep_until};
use cagehand::sim::wire::Wire;
use cagehand::sim::{SIM_RATE_HZ, Sim, SimCommand};
use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::mpsc::Receiver;
use std::time::Instant;

pub(super) fn run_sim(
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
