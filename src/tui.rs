//! The terminal screens (edge code): a model, messages, `update` and `view`
//! in the submodules; here only the loop that owns the terminal.
//!
//! One thread reads the keyboard and each link has its reader thread; all
//! send [`Msg`] over one channel. The loop blocks on that channel, marks the
//! model dirty when `update` says something visible changed, and draws at
//! most [`FRAME_CAP`] apart: no polling, no drawing when nothing changed.
//! The terminal is restored on every exit: a quit key, an error (the
//! guard's Drop), a panic on any thread (ratatui's hook, then exit 101),
//! and SIGTERM, SIGINT or SIGHUP
//! (a signal thread sends [`Msg::Signal`]; the loop leaves, the guard
//! restores, and [`run`] returns the signal so the caller exits with 128
//! plus its number).

pub mod cage_view;
pub mod component;
pub mod form;
pub mod keys;
pub mod margin_map;
pub mod model;
pub mod net_view;
pub mod preflight_view;
pub mod righting_view;
#[cfg(test)]
mod screen_snaps;
pub mod table;
pub mod theme;
pub mod vehicle_view;
pub mod view;
pub mod watch_view;

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
                Ok(Event::Resize(w, h)) => Msg::Resize(w, h),
                Ok(_) => continue,
                Err(e) => Msg::LinkEnded(format!("terminal input failed: {e}")),
            };
            if tx.send(msg).is_err() {
                break;
            }
        }
    });
}

/// Forward SIGTERM, SIGINT and SIGHUP into the channel, so the loop leaves
/// and the terminal is restored before the process ends.
fn spawn_signals(tx: Sender<Msg>) -> anyhow::Result<()> {
    use signal_hook::consts::{SIGHUP, SIGINT, SIGTERM};
    let mut signals = signal_hook::iterator::Signals::new([SIGTERM, SIGINT, SIGHUP])?;
    std::thread::spawn(move || {
        for n in signals.forever() {
            if tx.send(Msg::Signal(n)).is_err() {
                break;
            }
        }
    });
    Ok(())
}

/// Run the screens until the user quits or a signal ends them. `tx` is a
/// sender of the channel `rx` reads, handed to the keyboard and signal
/// threads; `on_effect` carries out what `update` asked for (commands to
/// the simulator). Returns the signal that ended the screens, if one did.
pub fn run(
    mut model: Model,
    tx: Sender<Msg>,
    rx: Receiver<Msg>,
    mut on_effect: impl FnMut(Effect),
) -> anyhow::Result<Option<i32>> {
    // Signals first: one arriving between init and here would otherwise
    // end the process with the terminal still in raw mode.
    spawn_signals(tx.clone())?;
    // A panic on any thread ends the program: ratatui's hook (installed by
    // `try_init`, run first) restores the terminal, this one prints the
    // message and exits, so a reader thread's panic cannot leave the screens
    // drawing into a terminal already given back.
    let previous = std::panic::take_hook();
    std::panic::set_hook(Box::new(move |info| {
        previous(info);
        std::process::exit(101);
    }));
    let mut terminal = ratatui::try_init()?;
    let _restore = Restore;
    if let Ok(size) = terminal.size() {
        update(&mut model, Msg::Resize(size.width, size.height));
    }
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
        for effect in model.shared.outbox.drain(..) {
            on_effect(effect);
        }
        if model.quit {
            break;
        }
    }
    Ok(model.exit_signal)
}
