//! The log file on disk: open (with an advisory lock), set a torn tail
//! aside, append one record durably. This is the only part of the logbook
//! that touches files, and only the file the caller names.

use super::chain::{self, ChainHead, Integrity, Issue, IssueKind};
use super::format::{self, TornTail};
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
    /// The largest sequence number in the log has no successor; numbers
    /// never wrap back to 0.
    #[error(
        "{path}: record {last} holds the largest sequence number there is; no record can follow it (numbers never wrap): start a new log for this vehicle and keep this one"
    )]
    SequenceExhausted {
        /// The log file.
        path: PathBuf,
        /// The largest sequence number in the log.
        last: u64,
    },
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
    /// Every integrity problem found (corrupt, torn, broken chain,
    /// duplicate, missing records), notes, and the chain head: what the
    /// screens and reports show wherever a decision is made from the log.
    pub integrity: Integrity,
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
    /// Everything worth telling the operator, one sentence each: every
    /// integrity problem with what it affects, then the notes. The text
    /// may hold outside bytes: escape it before printing
    /// ([`crate::text::terminal`]).
    pub fn messages(&self, path: &Path) -> Vec<String> {
        let p = path.display();
        let mut out: Vec<String> = self
            .integrity
            .issues
            .iter()
            .map(|i| format!("{p}:{}: {} ({})", i.line, i.detail, i.kind.effect()))
            .collect();
        out.extend(
            self.integrity
                .notes
                .iter()
                .map(|n| format!("{p}: note: {n}")),
        );
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
    /// `None` when the largest sequence number has no successor.
    next_seq: Option<u64>,
    /// The file ends in a record without its line end: the next append
    /// writes this first, in the same single write.
    pending_eol: &'static str,
    /// The line end of the file (CRLF once a checkout converted it).
    eol: &'static str,
    /// The chain value after the last line: the next record's `prev`.
    chain_value: String,
    /// The newest record's sequence number and chain value.
    head: Option<ChainHead>,
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

/// Lines in a log's bytes (a last line without its line end counts).
fn line_count(bytes: &[u8]) -> usize {
    bytes.iter().filter(|&&b| b == b'\n').count()
        + usize::from(!bytes.is_empty() && !bytes.ends_with(b"\n"))
}

/// What the side file adds to the log's name.
pub const SIDE_FILE_SUFFIX: &str = ".set-aside";

/// Where the torn records of the log at `path` are set aside.
fn side_path(path: &Path) -> PathBuf {
    let mut side_name = path.as_os_str().to_owned();
    side_name.push(SIDE_FILE_SUFFIX);
    PathBuf::from(side_name)
}

/// The side file of `path`, when an earlier write set torn records aside
/// in it and it still holds them: an issue at the end of the log (its
/// `bytes`), said every time the log is read until the file is moved away,
/// so a set-aside impact cannot drop out of sight after one warning. The
/// lines are counted only then, not at every reading.
fn held_aside(path: &Path, bytes: &[u8]) -> Option<Issue> {
    let side = side_path(path);
    let len = std::fs::metadata(&side).ok().filter(|m| m.is_file())?.len();
    (len > 0).then(|| Issue {
        line: line_count(bytes).max(1),
        kind: IssueKind::SetAside,
        detail: format!(
            "{} holds {len} bytes of torn records set aside by an earlier write; read it, record again what it held (an impact may be among it), then move it away",
            side.display()
        ),
    })
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
            next_seq: Some(1),
            pending_eol: "",
            eol: "\n",
            chain_value: String::new(),
            head: None,
        };
        let Some(f) = file.as_mut() else {
            report.new_file = true;
            // No log, yet records set aside from one: still said.
            report.integrity.issues.extend(held_aside(&path, &[]));
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
        let mut integrity = parsed.integrity;
        if let Some(v) = &parsed.vehicle
            && v != vehicle_id
        {
            report.other_vehicle = Some(v.clone());
            integrity.issues.insert(
                0,
                Issue {
                    line: 1,
                    kind: IssueKind::OtherVehicle,
                    detail: format!("the header names vehicle {v:?}, not {vehicle_id:?}"),
                },
            );
        }
        report.unterminated = parsed.unterminated;
        book.eol = if parsed.crlf { "\r\n" } else { "\n" };
        if parsed.unterminated.is_some() {
            book.pending_eol = if bytes.ends_with(b"\r") {
                "\n"
            } else {
                book.eol
            };
        }
        book.chain_value = parsed.chain_value;
        book.head = integrity.head.clone();
        book.records = parsed.records.into_iter().map(|(_, r)| r).collect();
        if let Some(tail) = parsed.tail {
            match access {
                Access::Read => {
                    for i in &mut integrity.issues {
                        if i.kind == IssueKind::Torn && i.line == tail.line {
                            i.detail.push_str(
                                "; ignored, and the next write moves it to the side file",
                            );
                        }
                    }
                    report.torn_tail = Some(tail);
                }
                Access::Write => {
                    let s = book.set_aside(f, &tail)?;
                    for i in &mut integrity.issues {
                        if i.kind == IssueKind::Torn && i.line == tail.line {
                            i.detail = format!(
                                "torn last record moved to {} ({} bytes; every record before it is kept): {}",
                                s.side_path.display(),
                                s.bytes,
                                tail.reason
                            );
                        }
                    }
                    report.set_aside = Some(s);
                    book.len = tail.offset as u64;
                }
            }
        }
        if report.set_aside.is_none()
            && let Some(issue) = held_aside(&path, &bytes)
        {
            integrity.issues.push(issue);
        }
        report.integrity = integrity;
        book.file = file;
        Ok((book, report))
    }

    /// Copy a torn tail to the side file (durably), then cut it from the log.
    /// A kill between the two leaves the tail in both; the next open finds
    /// it already in the side file and only cuts, so it is never copied
    /// twice.
    fn set_aside(&self, file: &File, tail: &TornTail) -> Result<SetAside, StoreError> {
        let side_path = side_path(&self.path);
        let mut side = OpenOptions::new()
            .read(true)
            .append(true)
            .create(true)
            .open(&side_path)
            .map_err(io("cannot open the side file", &side_path))?;
        let done = SetAside {
            side_path: side_path.clone(),
            line: tail.line,
            bytes: tail.bytes.len(),
            reason: tail.reason.clone(),
        };
        let mut entry = b" bytes follow\n".to_vec();
        entry.extend_from_slice(&tail.bytes);
        entry.push(b'\n');
        let kept = read_all(&mut side, &side_path)?;
        if kept.windows(entry.len()).any(|w| w == entry.as_slice()) {
            file.set_len(tail.offset as u64)
                .and_then(|()| file.sync_data())
                .map_err(io("cannot cut the torn record from", &self.path))?;
            return Ok(done);
        }
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
        Ok(done)
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
        let Some(seq) = self.next_seq else {
            return Err(StoreError::SequenceExhausted {
                path: self.path.clone(),
                last: u64::MAX,
            });
        };
        let record = Record {
            seq,
            time: format_time(time),
            operator: operator.to_string(),
            event,
        };
        let creating = self.len == 0;
        let (mut buf, prev) = if creating {
            let header = format::encode_header(&self.vehicle);
            let value = chain::header_value(header.trim_end());
            (header, value)
        } else {
            (self.pending_eol.to_string(), self.chain_value.clone())
        };
        let (line, hash) = chain::encode_chained(&record, &prev).map_err(StoreError::Record)?;
        buf.push_str(line.trim_end_matches('\n'));
        buf.push_str(if creating { "\n" } else { self.eol });
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
        self.pending_eol = "";
        self.next_seq = seq.checked_add(1);
        self.head = Some(ChainHead {
            seq,
            hash: hash.clone(),
        });
        self.chain_value = hash;
        self.records.push(record.clone());
        Ok(record)
    }

    /// The chain head after the newest record (`None`: no log file yet):
    /// print it with every report, so a record removed later shows.
    pub fn head(&self) -> Option<&ChainHead> {
        self.head.as_ref()
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

    /// A new log of vehicle `v` holding two notes: its folder and path.
    fn two_notes() -> (tempfile::TempDir, PathBuf) {
        let dir = tempfile::tempdir().unwrap();
        let (mut b, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let now = jiff::Timestamp::now();
        b.append("ana", now, note("one")).unwrap();
        b.append("ana", now, note("two")).unwrap();
        let path = b.path().to_path_buf();
        (dir, path)
    }

    /// Nothing to report: sound, nothing torn or set aside.
    fn clean(r: &OpenReport) -> bool {
        r.integrity.is_sound()
            && r.integrity.notes.is_empty()
            && r.set_aside.is_none()
            && r.torn_tail.is_none()
            && r.unterminated.is_none()
            && !r.new_file
    }

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
        assert!(clean(&r), "{r:?}");
        let text = std::fs::read_to_string(dir.path().join("v1.cagelog")).unwrap();
        assert!(text.starts_with("cagehand-logbook format=2 vehicle=v1\n"));
    }

    #[test]
    fn torn_tail_goes_to_the_side_file_on_write_open() {
        let (dir, path) = two_notes();
        let now = jiff::Timestamp::now();
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
        // While the side file holds the torn record, every reading says
        // so (it may have been an impact), and nothing else is wrong.
        let (b, r) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert_eq!(b.records().len(), 2);
        let kinds: Vec<IssueKind> = r.integrity.issues.iter().map(|i| i.kind).collect();
        assert_eq!(kinds, vec![IssueKind::SetAside], "{r:?}");
        assert!(r.integrity.issues[0].detail.contains(".set-aside"));
        drop(b);
        // Read, recorded again and moved away: the log is clean.
        std::fs::rename(&s.side_path, dir.path().join("read-and-entered.txt")).unwrap();
        let (b, r) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert!(clean(&r), "{r:?}");
        assert_eq!(b.records().len(), 2);
    }

    #[test]
    fn a_valid_last_record_without_newline_is_kept_and_the_next_append_ends_it() {
        // Pins: a last line that lost only its newline (an edit or a merge
        // under version control) is kept on read and on write open, nothing
        // is set aside, and the next append writes "\n" before its record.
        let (dir, path) = two_notes();
        let now = jiff::Timestamp::now();
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
        assert!(clean(&r), "{r:?}");
        let seqs: Vec<u64> = b.records().iter().map(|r| r.seq).collect();
        assert_eq!(seqs, [1, 2, 3]);
    }

    #[test]
    fn an_unterminated_last_line_that_fails_its_checksum_is_still_set_aside() {
        // Pins: only a last line whose checksum (or JSON) fails is torn.
        let (dir, path) = two_notes();
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
    fn a_format_1_log_is_continued_with_chained_records() {
        // The fixture was written by format 1 (tests/fixtures/logbook).
        let dir = tempfile::tempdir().unwrap();
        let path = dir.path().join("kestrel-demo.cagelog");
        let old = include_bytes!("../../tests/fixtures/logbook/kestrel-demo.cagelog");
        std::fs::write(&path, old).unwrap();
        let (mut b, r) = Logbook::open(dir.path(), "kestrel-demo", Access::Write, WAIT).unwrap();
        assert!(r.integrity.is_sound(), "{:?}", r.integrity);
        assert_eq!(r.integrity.unchained, 6);
        let before = b.head().cloned().unwrap();
        assert_eq!(before.seq, 6);
        let rec = b
            .append("ana", jiff::Timestamp::now(), note("continued"))
            .unwrap();
        assert_eq!(rec.seq, 7);
        drop(b);
        let bytes = std::fs::read(&path).unwrap();
        // The old part is untouched, header included; the new line links to
        // the chain value the format-1 records fold into.
        assert_eq!(&bytes[..old.len()], &old[..]);
        let new_line = std::str::from_utf8(&bytes[old.len()..]).unwrap();
        assert!(new_line.contains(&format!(" prev={} sha256=", before.hash)));
        let (b, r) = Logbook::open(dir.path(), "kestrel-demo", Access::Read, WAIT).unwrap();
        assert!(r.integrity.is_sound(), "{:?}", r.integrity);
        assert_eq!(b.records().len(), 7);
        assert_eq!(b.head().map(|h| h.seq), Some(7));
    }

    #[test]
    fn a_crlf_log_keeps_every_record_and_is_continued_in_crlf() {
        let (dir, path) = two_notes();
        let now = jiff::Timestamp::now();
        let lf = std::fs::read_to_string(&path).unwrap();
        std::fs::write(&path, lf.replace('\n', "\r\n")).unwrap();
        let (mut b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        assert!(clean(&r), "{r:?}");
        assert_eq!(b.records().len(), 2);
        assert_eq!(b.append("ana", now, note("three")).unwrap().seq, 3);
        drop(b);
        let text = std::fs::read_to_string(&path).unwrap();
        assert!(text.ends_with("\r\n") && !text.replace("\r\n", "").contains('\n'));
        let (b, r) = Logbook::open(dir.path(), "v", Access::Read, WAIT).unwrap();
        assert!(clean(&r), "{r:?}");
        assert_eq!(b.records().len(), 3);
    }

    #[test]
    fn the_largest_sequence_number_has_no_successor() {
        let dir = tempfile::tempdir().unwrap();
        let r = Record {
            seq: u64::MAX,
            time: "2026-12-01T22:40:00.000Z".into(),
            operator: "ana".into(),
            event: note("last"),
        };
        let text = format::encode_log("v", &[r]).unwrap();
        std::fs::write(dir.path().join("v.cagelog"), text).unwrap();
        let (mut b, _) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let err = b
            .append("ana", jiff::Timestamp::now(), note("x"))
            .unwrap_err();
        assert!(matches!(err, StoreError::SequenceExhausted { .. }), "{err}");
        assert!(err.to_string().contains("never wrap"));
        assert_eq!(b.records().len(), 1);
    }

    #[test]
    fn a_set_aside_cut_short_is_not_copied_twice() {
        let (dir, path) = two_notes();
        let full = std::fs::read(&path).unwrap();
        let torn = &full[..full.len() - 20];
        std::fs::write(&path, torn).unwrap();
        let (b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        let side = r.set_aside.unwrap().side_path;
        drop(b);
        // As if killed after the copy and before the cut: the tail is in
        // both files. The next open only cuts.
        std::fs::write(&path, torn).unwrap();
        let (b, r) = Logbook::open(dir.path(), "v", Access::Write, WAIT).unwrap();
        assert!(r.set_aside.is_some());
        assert_eq!(b.records().len(), 1);
        let kept = std::fs::read_to_string(&side).unwrap();
        assert_eq!(kept.matches("bytes follow").count(), 1, "{kept}");
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
