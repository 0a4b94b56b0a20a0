//! The log file on disk: open (with an advisory lock), set a torn tail
//! aside, append one record durably. This is the only part of the logbook
//! that touches files, and only the file the caller names.

use super::format::{self, Problem, TornTail};
use super::{Event, Record, format_time};
use std::fs::{File, OpenOptions};
use std::io::{Read, Seek, SeekFrom, Write};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// Why the log could not be opened or written.
#[derive(Debug, thiserror::Error)]
pub enum StoreError {
    /// A file operation failed.
    #[error("{action} {path}")]
    Io {
        /// What we were doing.
        action: &'static str,
        /// The file or folder.
        path: PathBuf,
        /// The system's reason (shown by the error chain).
        source: std::io::Error,
    },
    /// Another process holds the lock.
    #[error(
        "{path} is in use by another cagehand process (advisory lock held for {waited_s:.1} s); try again when it has finished"
    )]
    Locked {
        /// The log file.
        path: PathBuf,
        /// How long we waited.
        waited_s: f64,
    },
    /// The file is not a log this program can read.
    #[error("{path}: {source}")]
    Format {
        /// The log file.
        path: PathBuf,
        /// What is wrong with its header.
        source: format::FormatError,
    },
    /// The vehicle id cannot name a file.
    #[error(
        "vehicle id {0:?} cannot name a log file: use letters, digits, '.', '_' and '-' (not first '.')"
    )]
    BadVehicleId(String),
    /// The record cannot be written as it is.
    #[error("record not written: {0}")]
    Record(String),
    /// The log was opened for reading only.
    #[error("the log was opened for reading only")]
    ReadOnly,
}

/// Reading only (no lock against readers, no repair) or writing.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Access {
    /// Shared lock; the file is not changed; a torn tail is only reported.
    Read,
    /// Exclusive lock; the folder and file are created; a torn tail is set aside.
    Write,
}

/// A torn tail that was moved out of the log.
#[derive(Debug, Clone, PartialEq)]
pub struct SetAside {
    /// The side file it was appended to.
    pub side_path: PathBuf,
    /// The line it was on.
    pub line: usize,
    /// How many bytes.
    pub bytes: usize,
    /// What was wrong with it.
    pub reason: String,
}

/// What opening found, for the operator to be told.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct OpenReport {
    /// The file did not exist (writing creates it at the first record).
    pub new_file: bool,
    /// Corrupt records in the middle, skipped.
    pub problems: Vec<Problem>,
    /// Sequence gaps or repeats.
    pub sequence_warnings: Vec<Problem>,
    /// A torn tail moved to the side file (writing).
    pub set_aside: Option<SetAside>,
    /// A torn tail left in place (reading).
    pub torn_tail: Option<TornTail>,
    /// The header names another vehicle.
    pub other_vehicle: Option<String>,
    /// The line of a last record that checks but lost its newline; it is
    /// kept, and the next append writes the newline first.
    pub unterminated: Option<usize>,
}

impl OpenReport {
    /// Everything worth telling the operator, one sentence each.
    pub fn messages(&self, path: &Path) -> Vec<String> {
        let p = path.display();
        let mut out = Vec::new();
        if let Some(v) = &self.other_vehicle {
            out.push(format!("{p}: the header names vehicle {v:?}"));
        }
        for pr in &self.problems {
            out.push(format!(
                "{p}:{}: corrupt record skipped: {}",
                pr.line, pr.reason
            ));
        }
        for pr in &self.sequence_warnings {
            out.push(format!("{p}:{}: {}", pr.line, pr.reason));
        }
        if let Some(s) = &self.set_aside {
            out.push(format!(
                "{p}:{}: torn last record ({} bytes: {}) moved to {}; every record before it is kept",
                s.line,
                s.bytes,
                s.reason,
                s.side_path.display()
            ));
        }
        if let Some(line) = self.unterminated {
            out.push(format!(
                "{p}:{line}: note: the last record has no line end (edited or merged?); it checks and is kept, and the next write adds the line end"
            ));
        }
        if let Some(t) = &self.torn_tail {
            out.push(format!(
                "{p}:{}: torn last record ({} bytes: {}) ignored; the next write sets it aside",
                t.line,
                t.bytes.len(),
                t.reason
            ));
        }
        out
    }
}

/// The log file name for a vehicle id: `<id>.cagelog`.
pub fn log_file_name(vehicle_id: &str) -> Result<String, StoreError> {
    // The one rule `profile check` also applies.
    if crate::profile::is_valid_vehicle_id(vehicle_id) {
        Ok(format!("{vehicle_id}.cagelog"))
    } else {
        Err(StoreError::BadVehicleId(vehicle_id.to_string()))
    }
}

/// An open log: its records, and (for writing) the locked file.
#[derive(Debug)]
pub struct Logbook {
    path: PathBuf,
    vehicle: String,
    file: Option<File>,
    access: Access,
    records: Vec<Record>,
    len: u64,
    next_seq: u64,
    /// The file ends in a record without its newline: the next append
    /// writes it first, in the same single write.
    needs_newline: bool,
}

fn io(action: &'static str, path: &Path) -> impl FnOnce(std::io::Error) -> StoreError + use<> {
    let path = path.to_path_buf();
    move |source| StoreError::Io {
        action,
        path,
        source,
    }
}

fn lock(file: &File, path: &Path, access: Access, wait: Duration) -> Result<(), StoreError> {
    let start = Instant::now();
    loop {
        let r = match access {
            Access::Read => file.try_lock_shared(),
            Access::Write => file.try_lock(),
        };
        match r {
            Ok(()) => return Ok(()),
            Err(std::fs::TryLockError::WouldBlock) if start.elapsed() < wait => {
                std::thread::sleep(Duration::from_millis(15));
            }
            Err(std::fs::TryLockError::WouldBlock) => {
                return Err(StoreError::Locked {
                    path: path.to_path_buf(),
                    waited_s: start.elapsed().as_secs_f64(),
                });
            }
            Err(std::fs::TryLockError::Error(e)) => return Err(io("cannot lock", path)(e)),
        }
    }
}

/// Read exactly the file's current length (never more: a device that reads
/// forever must not hang us).
fn read_all(file: &mut File, path: &Path) -> Result<Vec<u8>, StoreError> {
    let len = file.metadata().map_err(io("cannot read", path))?.len();
    file.seek(SeekFrom::Start(0))
        .map_err(io("cannot read", path))?;
    let mut bytes = Vec::with_capacity(usize::try_from(len).unwrap_or(0));
    file.take(len)
        .read_to_end(&mut bytes)
        .map_err(io("cannot read", path))?;
    Ok(bytes)
}

impl Logbook {
    /// Open the log of `vehicle_id` in `dir`. Writing creates the folder,
    /// takes the exclusive lock (waiting up to `lock_wait` for another
    /// writer) and sets a torn tail aside; reading changes nothing.
    pub fn open(
        dir: &Path,
        vehicle_id: &str,
        access: Access,
        lock_wait: Duration,
    ) -> Result<(Logbook, OpenReport), StoreError> {
        let path = dir.join(log_file_name(vehicle_id)?);
        let mut report = OpenReport::default();
        let mut file = match access {
            Access::Read => match File::open(&path) {
                Ok(f) => Some(f),
                Err(e) if e.kind() == std::io::ErrorKind::NotFound => None,
                Err(e) => return Err(io("cannot open", &path)(e)),
            },
            Access::Write => {
                std::fs::create_dir_all(dir).map_err(io("cannot create the data folder", dir))?;
                let f = OpenOptions::new()
                    .read(true)
                    .append(true)
                    .create(true)
                    .open(&path)
                    .map_err(io("cannot open for writing", &path))?;
                Some(f)
            }
        };
        let mut book = Logbook {
            path: path.clone(),
            vehicle: vehicle_id.to_string(),
            file: None,
            access,
            records: Vec::new(),
            len: 0,
            next_seq: 1,
            needs_newline: false,
        };
        let Some(f) = file.as_mut() else {
            report.new_file = true;
            return Ok((book, report));
        };
        lock(f, &path, access, lock_wait)?;
        let bytes = read_all(f, &path)?;
        report.new_file = bytes.is_empty();
        let parsed = format::parse(&bytes).map_err(|source| StoreError::Format {
            path: path.clone(),
            source,
        })?;
        book.next_seq = parsed.next_seq();
        book.len = bytes.len() as u64;
        if let Some(v) = &parsed.vehicle
            && v != vehicle_id
        {
            report.other_vehicle = Some(v.clone());
        }
        report.problems = parsed.problems;
        report.sequence_warnings = parsed.sequence_warnings;
        report.unterminated = parsed.unterminated;
        book.needs_newline = parsed.unterminated.is_some();
        book.records = parsed.records.into_iter().map(|(_, r)| r).collect();
        if let Some(tail) = parsed.tail {
            match access {
                Access::Read => report.torn_tail = Some(tail),
                Access::Write => {
                    report.set_aside = Some(book.set_aside(f, &tail)?);
                    book.len = tail.offset as u64;
                }
            }
        }
        book.file = file;
        Ok((book, report))
    }

    /// Copy a torn tail to the side file (durably), then cut it from the log.
    fn set_aside(&self, file: &File, tail: &TornTail) -> Result<SetAside, StoreError> {
        let mut side_name = self.path.as_os_str().to_owned();
        side_name.push(".set-aside");
        let side_path = PathBuf::from(side_name);
        let mut side = OpenOptions::new()
            .append(true)
            .create(true)
            .open(&side_path)
            .map_err(io("cannot open the side file", &side_path))?;
        let now = format_time(jiff::Timestamp::now());
        let mut buf = format!(
            "# set aside {now} from line {} (byte {}) of {}: {}; {} bytes follow\n",
            tail.line,
            tail.offset,
            self.path.display(),
            tail.reason,
            tail.bytes.len()
        )
        .into_bytes();
        buf.extend_from_slice(&tail.bytes);
        buf.push(b'\n');
        side.write_all(&buf)
            .and_then(|()| side.sync_data())
            .map_err(io("cannot write the side file", &side_path))?;
        file.set_len(tail.offset as u64)
            .and_then(|()| file.sync_data())
            .map_err(io("cannot cut the torn record from", &self.path))?;
        Ok(SetAside {
            side_path,
            line: tail.line,
            bytes: tail.bytes.len(),
            reason: tail.reason.clone(),
        })
    }

    /// Append one event as the next record, durably: one write of the whole
    /// line, then `sync_data`. On any failure the file is cut back to its
    /// old length, so no partial record stays behind.
    pub fn append(
        &mut self,
        operator: &str,
        time: jiff::Timestamp,
        event: Event,
    ) -> Result<Record, StoreError> {
        if self.access != Access::Write {
            return Err(StoreError::ReadOnly);
        }
        let Some(file) = self.file.as_mut() else {
            return Err(StoreError::ReadOnly);
        };
        let record = Record {
            seq: self.next_seq,
            time: format_time(time),
            operator: operator.to_string(),
            event,
        };
        let line = format::encode_record(&record).map_err(StoreError::Record)?;
        let creating = self.len == 0;
        let mut buf = if creating {
            format::encode_header(&self.vehicle)
        } else if self.needs_newline {
            "\n".to_string()
        } else {
            String::new()
        };
        buf.push_str(&line);
        let old_len = self.len;
        let written = file
            .write_all(buf.as_bytes())
            .and_then(|()| file.sync_data());
        if let Err(e) = written {
            // Cut back whatever part reached the file; best effort, the
            // next open would set a torn tail aside anyway.
            let _ = file.set_len(old_len).and_then(|()| file.sync_data());
            return Err(io("cannot write", &self.path)(e));
        }
        if creating && let Some(dir) = self.path.parent() {
            // Make the new directory entry durable too (POSIX); harmless
            // where directories cannot be opened.
            if let Ok(d) = File::open(dir) {
                let _ = d.sync_all();
            }
        }
        self.len += buf.len() as u64;
        self.needs_newline = false;
        self.next_seq += 1;
        self.records.push(record.clone());
        Ok(record)
    }

    /// The records that check, in file order.
    pub fn records(&self) -> &[Record] {
        &self.records
    }

    /// The log file's path.
    pub fn path(&self) -> &Path {
        &self.path
    }

    /// The vehicle id the log is for.
    pub fn vehicle(&self) -> &str {
        &self.vehicle
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::NoteEvent;

    fn note(t: &str) -> Event {
        Event::Note(NoteEvent { text: t.into() })
    }

    const WAIT: Duration = Duration::from_millis(100);

    #[test]
    fn append_then_reopen_reads_back() {
        let dir = tempfile::tempdir().unwrap();
        let (mut b, r) = Logbook::open(dir.path(), "v1", Access::Write, WAIT).unwrap();
        assert!(r.new_file);
        let now = jiff::Timestamp::now();
        assert_eq!(b.append("ana", now, note("one")).unwrap().seq, 1);
        assert_eq!(b.append("ana", now, note("two")).unwrap().seq, 2);
        drop(b);
        let (b, r) = Logbook::open(dir.path(), "v1", Access::Read, WAIT).unwrap();
        assert_eq!(b.records().len(), 2);
        assert_eq!(r, OpenReport::default());
        let text = std::fs::read_to_string(dir.path().join("v1.cagelog")).unwrap();
        assert!(text.starts_with("cagehand-logbook format=1 vehicle=v1\n"));
    }

    #[test]
    fn torn_tail_goes_to_the_side_file_on_write_open() {
        let dir = tempfile::tempdir().unwrap();
        let (mut b, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let now = jiff::Timestamp::now();
        b.append("ana", now, note("one")).unwrap();
        b.append("ana", now, note("two")).unwrap();
        drop(b);
        let path = dir.path().join("v.cagelog");
        let len = std::fs::metadata(&path).unwrap().len();
        let f = OpenOptions::new().write(true).open(&path).unwrap();
        f.set_len(len - 20).unwrap();
        drop(f);
        let (rb, rr) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert_eq!(rb.records().len(), 1);
        assert!(rr.torn_tail.is_some());
        drop(rb);
        let (mut b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let s = r.set_aside.clone().unwrap();
        assert_eq!(s.line, 3);
        assert!(
            std::fs::read_to_string(&s.side_path)
                .unwrap()
                .contains("\"two\"")
        );
        assert_eq!(b.append("ana", now, note("three")).unwrap().seq, 2);
        drop(b);
        let (b, r) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert_eq!(r, OpenReport::default());
        assert_eq!(b.records().len(), 2);
    }

    #[test]
    fn a_valid_last_record_without_newline_is_kept_and_the_next_append_ends_it() {
        // Pins: a last line that lost only its newline (an edit or a merge
        // under version control) is kept on read and on write open, nothing
        // is set aside, and the next append writes "\n" before its record.
        let dir = tempfile::tempdir().unwrap();
        let (mut b, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let now = jiff::Timestamp::now();
        b.append("ana", now, note("one")).unwrap();
        b.append("ana", now, note("two")).unwrap();
        drop(b);
        let path = dir.path().join("v.cagelog");
        let full = std::fs::read(&path).unwrap();
        assert_eq!(full.last(), Some(&b'\n'));
        std::fs::write(&path, &full[..full.len() - 1]).unwrap();

        let (rb, rr) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert_eq!(rb.records().len(), 2);
        assert_eq!(rr.torn_tail, None);
        assert_eq!(rr.unterminated, Some(3));
        assert!(rr.messages(&path)[0].contains("kept"));
        drop(rb);

        let (mut b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        assert_eq!(r.set_aside, None);
        assert_eq!(r.unterminated, Some(3));
        assert_eq!(b.records().len(), 2);
        let mut side = path.as_os_str().to_owned();
        side.push(".set-aside");
        assert!(!PathBuf::from(side).exists());
        assert_eq!(b.append("ana", now, note("three")).unwrap().seq, 3);
        drop(b);

        let text = std::fs::read(&path).unwrap();
        assert_eq!(&text[..full.len()], &full[..], "the newline was restored");
        let (b, r) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert_eq!(r, OpenReport::default());
        let seqs: Vec<u64> = b.records().iter().map(|r| r.seq).collect();
        assert_eq!(seqs, [1, 2, 3]);
    }

    #[test]
    fn an_unterminated_last_line_that_fails_its_checksum_is_still_set_aside() {
        // Pins: only a last line whose checksum (or JSON) fails is torn.
        let dir = tempfile::tempdir().unwrap();
        let (mut b, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let now = jiff::Timestamp::now();
        b.append("ana", now, note("one")).unwrap();
        b.append("ana", now, note("two")).unwrap();
        drop(b);
        let path = dir.path().join("v.cagelog");
        let mut bytes = std::fs::read(&path).unwrap();
        bytes.pop();
        let n = bytes.len();
        bytes[n - 1] = if bytes[n - 1] == b'0' { b'1' } else { b'0' };
        std::fs::write(&path, &bytes).unwrap();
        let (b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        assert_eq!(b.records().len(), 1);
        assert_eq!(r.unterminated, None);
        assert_eq!(r.set_aside.map(|s| s.line), Some(3));
    }

    #[test]
    fn a_second_writer_is_refused_while_the_first_holds_the_lock() {
        let dir = tempfile::tempdir().unwrap();
        let (_a, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let err = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap_err();
        assert!(matches!(err, StoreError::Locked { .. }), "{err}");
        assert!(err.to_string().contains("in use by another cagehand"));
    }

    #[test]
    fn bad_vehicle_ids_are_refused() {
        assert!(log_file_name("../etc").is_err());
        assert!(log_file_name(".hidden").is_err());
        assert!(log_file_name("").is_err());
        assert_eq!(
            log_file_name("kestrel-demo").unwrap(),
            "kestrel-demo.cagelog"
        );
    }
}
