//! The terminal screens (edge code): a model, messages, `update` and `view`
//! in the submodules; here only the loop that owns the terminal.
//!
//! One thread reads the keyboard and each link has its reader thread; all
//! send [`Msg`] over one channel. The loop blocks on that channel, marks the
//! model dirty when `update` says something visible changed, and draws at
//! most [`FRAME_CAP`] apart: no polling, no drawing when nothing changed.
//! The terminal is restored on every exit, including a panic (ratatui's
//! hook) and an error (the guard's Drop).

pub mod cage_view;
pub mod model;
pub mod net_view;
pub mod preflight_view;
pub mod righting_view;
pub mod theme;
pub mod vehicle_view;
pub mod view;

use model::{Effect, Model, Msg, update};
use ratatui::crossterm::event::{self, Event};
use std::sync::mpsc::{Receiver, RecvTimeoutError, Sender};
use std::time::{Duration, Instant};

/// Shortest time between two frames.
pub const FRAME_CAP: Duration = Duration::from_millis(50);

/// Restores the terminal when dropped, whatever way the loop ends.
struct Restore;

impl Drop for Restore {
    fn drop(&mut self) {
        ratatui::restore();
    }
}

/// Forward keyboard and resize events into the channel until it closes.
fn spawn_input(tx: Sender<Msg>) {
    std::thread::spawn(move || {
        loop {
            let msg = match event::read() {
                Ok(Event::Key(k)) => Msg::Key(k),
                Ok(Event::Resize(..)) => Msg::Resize,
                Ok(_) => continue,
                Err(e) => Msg::LinkEnded(format!("terminal input failed: {e}")),
            };
            if tx.send(msg).is_err() {
                break;
            }
        }
    });
}

/// Run the screens until the user quits. `tx` is a sender of the channel
/// `rx` reads, handed to the keyboard thread; `on_effect` carries out what
/// `update` asked for (commands to the simulator).
pub fn run(
    mut model: Model,
    tx: Sender<Msg>,
    rx: Receiver<Msg>,
    mut on_effect: impl FnMut(Effect),
) -> anyhow::Result<()> {
    let mut terminal = ratatui::try_init()?;
    let _restore = Restore;
    spawn_input(tx);
    let mut dirty = true;
    let mut last_draw = Instant::now() - FRAME_CAP;
    loop {
        if dirty && last_draw.elapsed() >= FRAME_CAP {
            terminal.draw(|f| view::view(&model, f))?;
            last_draw = Instant::now();
            dirty = false;
        }
        let msg = if dirty {
            // Something waits to be drawn: sleep only until the frame cap allows it.
            match rx.recv_timeout(FRAME_CAP.saturating_sub(last_draw.elapsed())) {
                Ok(m) => m,
                Err(RecvTimeoutError::Timeout) => continue,
                Err(RecvTimeoutError::Disconnected) => break,
            }
        } else {
            match rx.recv() {
                Ok(m) => m,
                Err(_) => break,
            }
        };
        dirty |= update(&mut model, msg);
        while let Ok(m) = rx.try_recv() {
            dirty |= update(&mut model, m);
        }
        for effect in model.outbox.drain(..) {
            on_effect(effect);
        }
        if model.quit {
            break;
        }
    }
    Ok(())
}
