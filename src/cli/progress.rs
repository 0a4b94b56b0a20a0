//! Progress on stderr for cages large enough that a command takes a
//! noticeable time on a field laptop (seconds rather than milliseconds),
//! so the crew knows it is working and not hung. Small cages print
//! nothing; stdout (and so `--json`) is never touched.

use cagehand::cage::Cage;
use std::cell::Cell;
use std::io::{IsTerminal, Write};

/// Members from which a cage counts as large: the statics then take a
/// second or more on a 2-core laptop (DEVELOPERS.md, budget table).
pub const LARGE_MEMBERS: usize = 1000;

/// Progress reporter for one command on one cage.
pub struct Large {
    members: Option<usize>,
    terminal: bool,
    /// A step line without its newline is on the terminal.
    open_line: Cell<bool>,
}

impl Large {
    /// A reporter that speaks only when the cage is large.
    pub fn new(cage: &Cage) -> Large {
        let members = cage.members.len();
        Large {
            members: (members >= LARGE_MEMBERS).then_some(members),
            terminal: std::io::stderr().is_terminal(),
            open_line: Cell::new(false),
        }
    }

    /// A stage begins (one line).
    pub fn stage(&self, what: &str) {
        self.close_line();
        if let Some(m) = self.members {
            let mut err = std::io::stderr().lock();
            let _ = writeln!(
                err,
                "cagehand: working on the {what} ({m} members, a large cage: this may take a while)"
            );
        }
    }

    /// Step `done` of `total` within a stage: one updating line on a
    /// terminal, every fourth step otherwise (logs stay short).
    pub fn step(&self, what: &str, done: usize, total: usize) {
        if self.members.is_none() {
            return;
        }
        let mut err = std::io::stderr().lock();
        if self.terminal {
            let _ = write!(err, "\rcagehand: {what} {done}/{total}");
            self.open_line.set(true);
        } else if done.is_multiple_of(4) || done >= total {
            let _ = writeln!(err, "cagehand: {what} {done}/{total}");
        }
    }
}

impl Large {
    fn close_line(&self) {
        if self.open_line.replace(false) {
            let _ = writeln!(std::io::stderr().lock());
        }
    }
}

impl Drop for Large {
    fn drop(&mut self) {
        self.close_line();
    }
}
