//! The replay floor on disk (docs/links.md, "Signing"): one small JSON file
//! per signing key in the data folder's `signing/` folder, named by the
//! key's fingerprint. Loaded when a live link opens, saved when it moved
//! (at most every [`SAVE_EVERY`], and when the reader ends), by writing a
//! temporary file and renaming it over the old one, so a crash leaves the
//! old floor or the new one, never half of one. A floor another process
//! saved meanwhile is merged in, never lowered.

use super::LinkError;
use cagehand::link::mavlink::signing::{ReplayFloor, timestamp_from_unix_s};
use cagehand::link::mavlink::{SigningKey, Verifier};
use std::io::Write;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant, SystemTime, UNIX_EPOCH};

/// Longest time a moved floor waits before it is saved.
pub const SAVE_EVERY: Duration = Duration::from_millis(500);

/// Where the floor for `key` is kept under the data folder.
pub fn floor_path(data_dir: &Path, key: &SigningKey) -> PathBuf {
    data_dir
        .join("signing")
        .join(format!("{}.floor.json", key.fingerprint()))
}

/// The wall clock as a signing timestamp (0 if the clock is before 2015).
pub fn wall_timestamp() -> u64 {
    let unix_s = SystemTime::now()
        .duration_since(UNIX_EPOCH)
        .map(|d| d.as_secs_f64())
        .unwrap_or(0.0);
    timestamp_from_unix_s(unix_s)
}

/// The saved floor, none if there is no file yet. A file that cannot be
/// read is an error: starting afresh would accept what it was keeping out.
pub fn load(path: &Path) -> Result<Option<ReplayFloor>, LinkError> {
    let text = match std::fs::read_to_string(path) {
        Ok(t) => t,
        Err(e) if e.kind() == std::io::ErrorKind::NotFound => return Ok(None),
        Err(e) => {
            return Err(LinkError::Floor {
                path: path.display().to_string(),
                why: e.to_string(),
            });
        }
    };
    ReplayFloor::from_text(&text)
        .map(Some)
        .map_err(|e| LinkError::Floor {
            path: path.display().to_string(),
            why: e.to_string(),
        })
}

/// Write the floor atomically, merged with what is there now.
pub fn save(path: &Path, floor: &ReplayFloor) -> std::io::Result<()> {
    let mut merged = floor.clone();
    if let Ok(Some(on_disk)) = load(path) {
        merged.merge(&on_disk);
    }
    if let Some(dir) = path.parent() {
        std::fs::create_dir_all(dir)?;
    }
    let tmp = path.with_extension(format!("tmp.{}", std::process::id()));
    let written = (|| {
        let mut f = std::fs::File::create(&tmp)?;
        f.write_all(merged.to_text().as_bytes())?;
        f.sync_all()?;
        std::fs::rename(&tmp, path)
    })();
    if written.is_err() {
        let _ = std::fs::remove_file(&tmp);
    }
    written
}

/// A floor file and when it was last saved.
#[derive(Debug)]
pub(super) struct FloorStore {
    path: PathBuf,
    last_save: Option<Instant>,
    pending: bool,
    failed: bool,
}

impl FloorStore {
    pub(super) fn new(path: PathBuf) -> FloorStore {
        FloorStore {
            path,
            last_save: None,
            pending: false,
            failed: false,
        }
    }

    /// Save the verifier's floor if it moved and is due (or `now`). A
    /// message the first time saving fails.
    pub(super) fn keep(&mut self, v: &mut Verifier, now: bool) -> Option<String> {
        self.pending |= v.take_changed();
        let due = now || self.last_save.is_none_or(|t| t.elapsed() >= SAVE_EVERY);
        if !self.pending || !due {
            return None;
        }
        self.last_save = Some(Instant::now());
        match save(&self.path, v.floor()) {
            Ok(()) => {
                self.pending = false;
                None
            }
            Err(e) if !self.failed => {
                self.failed = true;
                Some(format!(
                    "cannot save the replay floor {}: {e}; frames captured in this run could be replayed to the next one",
                    self.path.display()
                ))
            }
            Err(_) => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn save_is_atomic_merges_and_loads_back() {
        let dir = tempfile::tempdir().expect("temp dir");
        let key = SigningKey::from_bytes([9; 32]);
        let path = floor_path(dir.path(), &key);
        assert_eq!(load(&path).expect("no file yet"), None);
        let mut a = ReplayFloor::default();
        a.accept((1, 1, 0), 500);
        save(&path, &a).expect("save");
        let mut b = ReplayFloor::default();
        b.accept((1, 1, 0), 200);
        b.accept((2, 1, 0), 900);
        save(&path, &b).expect("save");
        let back = load(&path).expect("loads").expect("a floor");
        // Never lowered by a process that knew less.
        assert_eq!(back.stream((1, 1, 0)), Some(500));
        assert_eq!(back.stream((2, 1, 0)), Some(900));
        // No temporary file left behind.
        let names: Vec<_> = std::fs::read_dir(path.parent().expect("folder"))
            .expect("list")
            .map(|e| e.expect("entry").file_name())
            .collect();
        assert_eq!(names.len(), 1, "{names:?}");
        std::fs::write(&path, "not json").expect("damage");
        let e = load(&path).expect_err("damaged");
        assert!(e.to_string().contains("replay floor"), "{e}");
    }
}
