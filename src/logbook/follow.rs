//! Noticing records another process wrote (a crew member at a second
//! terminal, a script, the headless watch): the screens ask every second or
//! so whether the log file changed, and re-read it with
//! [`Logbook::open`](super::Logbook::open) when it did. Part of the log
//! store's one exception to "no files in the core": it looks only at the
//! file the caller names, and only at its size and modification time.

use std::path::{Path, PathBuf};
use std::time::SystemTime;

/// What the file looked like when last asked.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
struct Stamp {
    len: u64,
    modified: Option<SystemTime>,
}

/// Watches one log file for changes.
#[derive(Debug, Clone)]
pub struct Follower {
    path: PathBuf,
    seen: Option<Stamp>,
}

fn stamp(path: &Path) -> Option<Stamp> {
    let m = std::fs::metadata(path).ok()?;
    Some(Stamp {
        len: m.len(),
        modified: m.modified().ok(),
    })
}

impl Follower {
    /// Follow the log at `path` (e.g. [`Logbook::path`](super::Logbook::path)),
    /// taking its present state as seen.
    pub fn new(path: &Path) -> Follower {
        Follower {
            path: path.to_path_buf(),
            seen: stamp(path),
        }
    }

    /// Whether the file changed (appeared, grew, was cut, rewritten) since
    /// the last call or since `new`; re-read the log when it did.
    pub fn changed(&mut self) -> bool {
        let now = stamp(&self.path);
        let changed = now != self.seen;
        self.seen = now;
        changed
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{Access, Event, Logbook, NoteEvent};
    use std::time::Duration;

    #[test]
    fn a_record_written_by_another_writer_is_noticed() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Duration::from_millis(200);
        let (reader, _) = Logbook::open(dir.path(), "v1", Access::Read, wait).unwrap();
        let mut f = Follower::new(reader.path());
        assert!(!f.changed());
        let (mut w, _) = Logbook::open(dir.path(), "v1", Access::Write, wait).unwrap();
        let note = |t: &str| Event::Note(NoteEvent { text: t.into() });
        w.append("bo", jiff::Timestamp::now(), note("one")).unwrap();
        assert!(f.changed());
        assert!(!f.changed());
        w.append("bo", jiff::Timestamp::now(), note("two")).unwrap();
        drop(w);
        assert!(f.changed());
        let (again, _) = Logbook::open(dir.path(), "v1", Access::Read, wait).unwrap();
        assert_eq!(again.records().len(), 2);
    }
}
