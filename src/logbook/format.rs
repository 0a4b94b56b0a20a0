//! The log file format, pure: bytes in, records out, and records to lines.
//! No file is touched here, so every rule can be tested on byte strings.
//! How a single line is framed, hashed and chained is in
//! [`super::chain`]; this module splits the file into its header and
//! lines, finds a torn tail, and gathers what the chain walk says into
//! [`Integrity`].

use super::chain::{self, ChainHead, Decoded, Integrity, Issue, IssueKind, Item};
use super::{FORMAT_VERSION, Record};

pub use super::chain::sha256_hex;

/// The first word of the header line.
pub const MAGIC: &str = "cagehand-logbook";

/// Most decode attempts spent recovering records from one damaged line.
const MAX_RECOVERY_ATTEMPTS: u32 = 2000;

/// Why a file cannot be read as a log at all (the header).
#[derive(Debug, Clone, PartialEq, thiserror::Error)]
pub enum FormatError {
    /// The first line is not our header.
    #[error("line 1: expected a header `{MAGIC} format=N vehicle=ID`, found {found:?}")]
    NotALogbook {
        /// The start of the first line.
        found: String,
    },
    /// Written by a newer cagehand.
    #[error("line 1: format {found} is newer than this program reads (up to {FORMAT_VERSION})")]
    NewerFormat {
        /// The version in the file.
        found: u32,
    },
}

/// A torn or corrupt last line: the bytes from `offset` to the end.
#[derive(Debug, Clone, PartialEq)]
pub struct TornTail {
    /// 1-based line number.
    pub line: usize,
    /// Byte offset where it starts; the good part of the file ends here.
    pub offset: usize,
    /// Its raw bytes.
    pub bytes: Vec<u8>,
    /// What is wrong.
    pub reason: String,
}

/// What a log's bytes hold.
#[derive(Debug, Clone, PartialEq, Default)]
pub struct Parsed {
    /// Format version from the header (`None`: empty file, or a torn header).
    pub format: Option<u32>,
    /// Vehicle id from the header.
    pub vehicle: Option<String>,
    /// Records that check, in file order, with their 1-based line numbers
    /// (an exact repeat of an earlier line is left out: counted once).
    pub records: Vec<(usize, Record)>,
    /// A torn last line (a write cut short), to be set aside.
    pub tail: Option<TornTail>,
    /// The line number of a last record that checks but has no newline
    /// after it (e.g. lost in an edit or a merge under version control).
    /// It is kept; the next append writes the missing newline first.
    pub unterminated: Option<usize>,
    /// The last line ended in CRLF (the file was converted, e.g. by a
    /// checkout): the next append uses the same line end.
    pub crlf: bool,
    /// Everything found about the log's soundness, with the chain head.
    pub integrity: Integrity,
    /// The chain value after the last kept line: the next record's `prev`.
    pub chain_value: String,
}

impl Parsed {
    /// The sequence number the next record gets, or `None` when the
    /// largest number in the log leaves no next one (numbers never wrap).
    pub fn next_seq(&self) -> Option<u64> {
        self.records
            .iter()
            .map(|(_, r)| r.seq)
            .max()
            .unwrap_or(0)
            .checked_add(1)
    }
}

/// The header line of a new log for a vehicle, with its newline.
pub fn encode_header(vehicle_id: &str) -> String {
    format!("{MAGIC} format={FORMAT_VERSION} vehicle={vehicle_id}\n")
}

/// One record as a format-1 line (unchained), with its newline. Refuses a
/// record that could not be read back (non-finite numbers, a bad time).
/// This program writes chained lines ([`encode_log`], the store); this
/// form is for reading and testing format-1 logs.
pub fn encode_record(record: &Record) -> Result<String, String> {
    chain::encode_unchained(record)
}

/// A whole new log (format 2, chained) holding these records, as the
/// store would write it.
pub fn encode_log(vehicle_id: &str, records: &[Record]) -> Result<String, String> {
    let mut s = encode_header(vehicle_id);
    let mut value = chain::header_value(s.trim_end());
    for r in records {
        let (line, hash) = chain::encode_chained(r, &value)?;
        s.push_str(&line);
        value = hash;
    }
    Ok(s)
}

/// Decode one record line (without its newline; a CRLF's `\r` is ignored).
pub fn decode_record(line: &[u8]) -> Result<Record, String> {
    chain::decode_line(line)
        .map(|d| d.record)
        .map_err(|e| e.reason)
}

fn parse_header(line: &str) -> Result<(u32, Option<String>), FormatError> {
    let not_ours = || FormatError::NotALogbook {
        found: line.chars().take(60).collect(),
    };
    let mut words = line.split(' ');
    if words.next() != Some(MAGIC) {
        return Err(not_ours());
    }
    let mut format = None;
    let mut vehicle = None;
    for w in words {
        if let Some(v) = w.strip_prefix("format=") {
            format = Some(v.parse::<u32>().map_err(|_| not_ours())?);
        } else if let Some(v) = w.strip_prefix("vehicle=") {
            vehicle = Some(v.to_string());
        }
    }
    let format = format.ok_or_else(not_ours)?;
    if format > FORMAT_VERSION || format == 0 {
        return Err(FormatError::NewerFormat { found: format });
    }
    Ok((format, vehicle))
}

/// Whole records inside a damaged line: every span that starts at a `{`
/// and ends just after a `sha256=` and 64 hex digits, whose checksum holds.
/// A checksum cannot match by accident, so nothing false is recovered.
fn recover(line: &[u8]) -> Vec<Decoded> {
    let tag = chain::SUM_TAG.as_bytes();
    let ends: Vec<usize> = (0..line.len().saturating_sub(tag.len() + 63))
        .filter(|&i| line[i..].starts_with(tag))
        .map(|i| i + tag.len() + 64)
        .filter(|&e| e <= line.len() && line[e - 64..e].iter().all(u8::is_ascii_hexdigit))
        .collect();
    let mut found = Vec::new();
    let mut from = 0;
    // Bound the work on a line of garbage built to look like many records.
    let mut attempts = 0u32;
    for &end in &ends {
        for start in from..end {
            if line[start] != b'{' {
                continue;
            }
            attempts += 1;
            if attempts > MAX_RECOVERY_ATTEMPTS {
                return found;
            }
            if let Ok(d) = chain::decode_line(&line[start..end]) {
                found.push(d);
                from = end;
                break;
            }
        }
    }
    found
}

/// A damaged line, and the whole records inside it, as chain items.
fn bad_line(items: &mut Vec<Item>, no: usize, line: &[u8], error: chain::LineError) {
    let found = recover(line);
    let mut error = error;
    if !found.is_empty() {
        error.reason = format!(
            "{}; {} recovered from it",
            error.reason,
            crate::text::count(found.len(), "whole record", "whole records")
        );
    }
    items.push(Item::Bad {
        line: no,
        error,
        raw_hash: sha256_hex(line),
        recovered: found.len(),
    });
    items.extend(
        found
            .into_iter()
            .map(|decoded| Item::Record { line: no, decoded }),
    );
}

/// Read a log's bytes. Only a bad header is an error; damaged records are
/// reported in [`Parsed::integrity`] and the rest still load. Lines may end
/// in LF or CRLF, and the last may have no line end.
pub fn parse(bytes: &[u8]) -> Result<Parsed, FormatError> {
    let mut out = Parsed::default();
    if bytes.is_empty() {
        return Ok(out);
    }
    let Some(first_nl) = bytes.iter().position(|&b| b == b'\n') else {
        // No complete line: a header torn while the file was created, or
        // something else altogether.
        if MAGIC.as_bytes().starts_with(bytes) || bytes.starts_with(MAGIC.as_bytes()) {
            out.tail = Some(TornTail {
                line: 1,
                offset: 0,
                bytes: bytes.to_vec(),
                reason: "torn header (the file was cut while being created)".to_string(),
            });
            out.integrity.issues.push(Issue {
                line: 1,
                kind: IssueKind::Torn,
                detail: "torn header (the file was cut while being created)".into(),
            });
            return Ok(out);
        }
        return Err(FormatError::NotALogbook {
            found: String::from_utf8_lossy(&bytes[..bytes.len().min(60)]).into_owned(),
        });
    };
    let header_bytes = bytes[..first_nl]
        .strip_suffix(b"\r")
        .unwrap_or(&bytes[..first_nl]);
    let header = String::from_utf8_lossy(header_bytes);
    let (format, vehicle) = parse_header(&header)?;
    out.format = Some(format);
    out.vehicle = vehicle;
    out.crlf = header_bytes.len() < first_nl;
    let header_value = chain::header_value(&header);

    let mut items: Vec<Item> = Vec::new();
    // A damaged newline after the header runs the first record into it.
    let stowaways = recover(header_bytes);
    if !stowaways.is_empty() {
        items.push(Item::Bad {
            line: 1,
            error: chain::LineError {
                reason: format!(
                    "the header line runs on; {} recovered from it",
                    crate::text::count(stowaways.len(), "whole record", "whole records")
                ),
                verified: false,
                tag: None,
                chained: false,
                seq: None,
            },
            raw_hash: String::new(),
            recovered: stowaways.len(),
        });
        items.extend(
            stowaways
                .into_iter()
                .map(|decoded| Item::Record { line: 1, decoded }),
        );
    }

    // Split the rest into lines, remembering where each starts.
    let mut lines: Vec<(usize, usize, &[u8], bool)> = Vec::new(); // (line no, offset, bytes, terminated)
    let mut start = first_nl + 1;
    let mut line_no = 2;
    while start < bytes.len() {
        match bytes[start..].iter().position(|&b| b == b'\n') {
            Some(n) => {
                lines.push((line_no, start, &bytes[start..start + n], true));
                start += n + 1;
            }
            None => {
                lines.push((line_no, start, &bytes[start..], false));
                start = bytes.len();
            }
        }
        line_no += 1;
    }
    let is_blank = |l: &[u8]| l.is_empty() || l == b"\r";
    // The last line that is not empty is the candidate tail.
    let last_nonempty = lines.iter().rposition(|(_, _, l, _)| !is_blank(l));
    for (idx, (no, offset, line, terminated)) in lines.iter().enumerate() {
        if is_blank(line) {
            continue;
        }
        if *terminated {
            out.crlf = line.ends_with(b"\r");
        }
        let is_last = Some(idx) == last_nonempty;
        match chain::decode_line(line) {
            Ok(decoded) => {
                if !*terminated {
                    out.unterminated = Some(*no);
                }
                items.push(Item::Record { line: *no, decoded });
            }
            // A last line without its end that does not check is a write
            // cut short (a record is written with its newline in one write).
            // A whole line that does not check was changed or damaged after
            // it was written, and one whose checksum holds is as written:
            // both stay in the file, reported.
            Err(e) if is_last && !e.verified && !*terminated => {
                let reason = format!(
                    "torn record: the line has no end (a write was cut short): {}",
                    e.reason
                );
                out.integrity.issues.push(Issue {
                    line: *no,
                    kind: IssueKind::Torn,
                    detail: format!(
                        "torn last record: the line has no end (a write was cut short): {}",
                        e.reason
                    ),
                });
                out.tail = Some(TornTail {
                    line: *no,
                    offset: *offset,
                    bytes: bytes[*offset..].to_vec(),
                    reason,
                });
            }
            Err(e) => bad_line(&mut items, *no, line, e),
        }
    }

    let walk = chain::walk(format, &header_value, &items);
    let mut issues: Vec<Issue> = Vec::new();
    for item in &items {
        if let Item::Bad { line, error, .. } = item {
            issues.push(Issue {
                line: *line,
                kind: if error.verified {
                    IssueKind::Unreadable
                } else {
                    IssueKind::Corrupt
                },
                detail: {
                    let what = if error.verified {
                        "unreadable"
                    } else {
                        "corrupt"
                    };
                    match error.seq {
                        Some(n) => format!(
                            "{what} record skipped (it claims number {n}): {}",
                            error.reason
                        ),
                        None => format!("{what} record skipped: {}", error.reason),
                    }
                },
            });
        }
    }
    issues.extend(walk.issues);
    issues.extend(chain::sequence_issues(&items, &walk.keep));
    issues.append(&mut out.integrity.issues);
    issues.sort_by_key(|i| i.line);
    out.integrity.issues = issues;
    out.integrity.unchained = walk.unchained;
    if let Some(no) = out.unterminated {
        out.integrity.notes.push(format!(
            "line {no}: the last record has no line end (edited or merged?); it checks and is kept, and the next write adds the line end"
        ));
    }
    for (idx, item) in items.into_iter().enumerate() {
        if let Item::Record { line, decoded } = item
            && walk.keep[idx]
        {
            out.records.push((line, decoded.record));
        }
    }
    // The head is the newest record's chain value (the header's when there
    // is none), the one a kept head is later compared with.
    out.integrity.head = Some(match walk.links.last() {
        Some(l) => ChainHead {
            seq: l.seq,
            hash: l.value.clone(),
        },
        None => ChainHead {
            seq: 0,
            hash: header_value.clone(),
        },
    });
    out.integrity.links = walk.links;
    out.chain_value = walk.value;
    Ok(out)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{Event, FindingEvent, FindingKind, NoteEvent};
    use proptest::prelude::*;

    fn note(seq: u64, text: &str) -> Record {
        Record {
            seq,
            time: "2026-12-01T22:40:00.123Z".to_string(),
            operator: "ana".to_string(),
            event: Event::Note(NoteEvent {
                text: text.to_string(),
            }),
        }
    }

    /// The chained lines a new log holds for these records.
    fn lines(records: &[Record]) -> Vec<String> {
        let mut value = chain::header_value(encode_header("kestrel-demo").trim_end());
        records
            .iter()
            .map(|r| {
                let (line, hash) = chain::encode_chained(r, &value).unwrap();
                value = hash;
                line
            })
            .collect()
    }

    fn file(records: &[Record]) -> Vec<u8> {
        encode_log("kestrel-demo", records).unwrap().into_bytes()
    }

    fn issues(p: &Parsed, kind: IssueKind) -> Vec<&Issue> {
        p.integrity
            .issues
            .iter()
            .filter(|i| i.kind == kind)
            .collect()
    }

    #[test]
    fn records_round_trip_and_header_is_read() {
        let recs = vec![
            note(1, "new cage"),
            Record {
                seq: 2,
                time: "2026-12-01T22:41:00Z".to_string(),
                operator: "bo".to_string(),
                event: Event::Finding(FindingEvent {
                    member: "S3".to_string(),
                    kind: FindingKind::LooseEnd,
                    note: Some("knot \"slipping\"\nsecond line".to_string()),
                }),
            },
        ];
        let p = parse(&file(&recs)).unwrap();
        assert_eq!(p.format, Some(FORMAT_VERSION));
        assert_eq!(p.vehicle.as_deref(), Some("kestrel-demo"));
        let got: Vec<Record> = p.records.into_iter().map(|(_, r)| r).collect();
        assert_eq!(got, recs);
        assert!(
            p.integrity.is_sound() && p.tail.is_none(),
            "{:?}",
            p.integrity
        );
    }

    #[test]
    fn a_line_is_json_then_checksum() {
        let line = encode_record(&note(1, "x")).unwrap();
        assert!(line.starts_with("{\"seq\":1,\"time\":"));
        assert!(line.ends_with('\n'));
        let (json, sum) = line.trim_end().rsplit_once(" sha256=").unwrap();
        assert_eq!(sum, sha256_hex(json.as_bytes()));
    }

    #[test]
    fn sha256_matches_the_standard_check_value() {
        // FIPS 180-2, Appendix B.1: SHA-256("abc").
        assert_eq!(
            sha256_hex(b"abc"),
            "ba7816bf8f01cfea414140de5dae2223b00361a396177a9cb410ff61f20015ad"
        );
    }

    #[test]
    fn torn_tail_is_separated_and_earlier_records_kept() {
        let mut bytes = file(&[note(1, "a"), note(2, "b"), note(3, "c")]);
        let full = bytes.len();
        bytes.truncate(full - 30);
        let p = parse(&bytes).unwrap();
        assert_eq!(p.records.len(), 2);
        let tail = p.tail.unwrap();
        assert_eq!(tail.line, 4);
        assert_eq!(tail.offset + tail.bytes.len(), bytes.len());
        assert!(tail.reason.contains("torn"));
    }

    #[test]
    fn a_valid_last_line_without_its_newline_is_kept() {
        // Pins: losing only the final newline (an edit, a merge) loses no
        // record; it is noted, not torn. A changed byte in that line is torn.
        let mut bytes = file(&[note(1, "a"), note(2, "b")]);
        assert_eq!(bytes.pop(), Some(b'\n'));
        let p = parse(&bytes).unwrap();
        assert_eq!(p.records.len(), 2);
        assert_eq!(p.tail, None);
        assert!(p.integrity.is_sound());
        assert_eq!(p.unterminated, Some(3));
        assert_eq!(p.next_seq(), Some(3));
        let n = bytes.len();
        bytes[n - 5] ^= 0x01;
        let p = parse(&bytes).unwrap();
        assert_eq!(p.records.len(), 1);
        assert_eq!(p.unterminated, None);
        let tail = p.tail.unwrap();
        assert_eq!(tail.line, 3);
        assert!(tail.reason.contains("torn"), "{}", tail.reason);
    }

    #[test]
    fn a_complete_last_line_that_does_not_check_is_kept_and_reported() {
        // Pins: a write is one `write` ending in its newline, so a crash
        // leaves a line without one. A whole last line that fails its hash
        // was changed or damaged after it was written: it stays in the file
        // and is reported every time, never quietly set aside.
        let mut bytes = file(&[note(1, "a"), note(2, "b")]);
        let n = bytes.len();
        bytes[n - 10] ^= 0x01; // flips a checksum digit
        let p = parse(&bytes).unwrap();
        assert_eq!(p.records.len(), 1);
        assert_eq!(p.tail, None);
        let bad = issues(&p, IssueKind::Corrupt);
        assert_eq!(bad.len(), 1);
        assert_eq!(bad[0].line, 3);
    }

    #[test]
    fn corrupt_middle_record_is_reported_by_line_and_rest_loads() {
        let bytes = file(&[note(1, "alpha"), note(2, "bravo"), note(3, "charlie")]);
        let text = String::from_utf8(bytes).unwrap().replace("bravo", "brav0");
        let p = parse(text.as_bytes()).unwrap();
        assert_eq!(p.records.len(), 2);
        let bad = issues(&p, IssueKind::Corrupt);
        assert_eq!(bad.len(), 1);
        assert_eq!(bad[0].line, 3);
        assert!(bad[0].detail.contains("checksum"));
        assert!(p.tail.is_none());
        // The corruption is the one problem: record 2 is present but
        // damaged, so neither "3 where 2 expected" nor a broken link to it.
        assert_eq!(p.integrity.issues.len(), 1, "{:?}", p.integrity.issues);
        assert_eq!(p.next_seq(), Some(4));
    }

    #[test]
    fn preflight_sign_off_round_trips() {
        use crate::logbook::{ItemResult, PreflightEvent, PreflightItemResult};
        let r = Record {
            seq: 1,
            time: "2026-12-01T23:00:00Z".into(),
            operator: "ana".into(),
            event: Event::Preflight(PreflightEvent {
                items: vec![
                    PreflightItemResult {
                        text: "Battery".into(),
                        result: ItemResult::Pass,
                        detail: Some("8.1 V".into()),
                        ..Default::default()
                    },
                    PreflightItemResult {
                        text: "Props".into(),
                        result: ItemResult::Skipped,
                        detail: None,
                        ..Default::default()
                    },
                ],
                signed_off: true,
                note: None,
            }),
        };
        let line = encode_record(&r).unwrap();
        assert!(line.contains("\"event\":\"preflight\""));
        assert!(line.contains("\"result\":\"skipped\""));
        assert_eq!(decode_record(line.trim_end().as_bytes()).unwrap(), r);
    }

    #[test]
    fn records_run_together_by_a_damaged_newline_are_recovered() {
        let bytes = file(&[note(1, "a"), note(2, "b"), note(3, "c")]);
        let mut text = String::from_utf8(bytes).unwrap();
        let first_end = text.find('\n').unwrap() + 1;
        let second_end = first_end + text[first_end..].find('\n').unwrap();
        text.replace_range(second_end..second_end + 1, "{");
        let p = parse(text.as_bytes()).unwrap();
        let seqs: Vec<u64> = p.records.iter().map(|(_, r)| r.seq).collect();
        // Both halves of the run-together line check: nothing is lost.
        assert_eq!(seqs, vec![1, 2, 3]);
        let bad = issues(&p, IssueKind::Corrupt);
        assert_eq!(bad.len(), 1);
        assert_eq!(bad[0].line, 2);
        assert!(bad[0].detail.contains("2 whole records recovered"));
    }

    #[test]
    fn a_fixed_log_written_by_format_1_reads_and_re_encodes_byte_for_byte() {
        // Pins the on-disk form of impact records: these lines were written
        // by format 1 when the log had its own copy of the input type and
        // kept the method as a string. Every input variant and method must
        // still read, with the same typed values, and encode to the same
        // bytes (so the checksums of existing logs still hold).
        use crate::impact::{ImpactInput, ImpactMethod};
        let bytes = include_bytes!("../../tests/fixtures/logbook/format1-impacts.cagelog");
        let p = parse(bytes).unwrap();
        assert!(p.integrity.is_sound() && p.tail.is_none() && p.unterminated.is_none());
        assert_eq!(p.records.len(), 4);
        let mut again = "cagehand-logbook format=1 vehicle=kestrel-demo\n".to_string();
        for (_, r) in &p.records {
            again.push_str(&encode_record(r).unwrap());
        }
        assert_eq!(again.as_bytes(), &bytes[..]);
        let impacts: Vec<&crate::logbook::ImpactEvent> = p
            .records
            .iter()
            .filter_map(|(_, r)| match &r.event {
                Event::Impact(i) => Some(i),
                _ => None,
            })
            .collect();
        assert_eq!(
            impacts.iter().map(|i| i.method).collect::<Vec<_>>(),
            [
                ImpactMethod::EnergyBalance,
                ImpactMethod::EnergyBalance,
                ImpactMethod::MeasuredAcceleration,
                ImpactMethod::HalfSinePulse
            ]
        );
        assert_eq!(
            impacts[0].input,
            ImpactInput::Speed {
                speed_m_per_s: 2.5,
                surface: Some("grass".into())
            }
        );
        assert_eq!(
            impacts[1].input,
            ImpactInput::Speed {
                speed_m_per_s: 1.25,
                surface: None
            }
        );
        assert_eq!(impacts[2].input, ImpactInput::PeakAccel { g: 18.5 });
        assert_eq!(
            impacts[3].input,
            ImpactInput::SpeedAndDuration {
                speed_m_per_s: 3.0,
                duration_s: 0.012
            }
        );
        for m in [
            ImpactMethod::MeasuredAcceleration,
            ImpactMethod::EnergyBalance,
            ImpactMethod::HalfSinePulse,
        ] {
            assert_eq!(
                serde_json::to_string(&m).unwrap(),
                format!("\"{}\"", m.name())
            );
        }
    }

    #[test]
    fn header_rules() {
        assert!(matches!(
            parse(b"hello\n"),
            Err(FormatError::NotALogbook { .. })
        ));
        assert!(matches!(
            parse(b"cagehand-logbook format=3 vehicle=x\n"),
            Err(FormatError::NewerFormat { found: 3 })
        ));
        let torn = parse(b"cagehand-log").unwrap();
        assert_eq!(torn.tail.map(|t| t.offset), Some(0));
        assert_eq!(parse(b"").unwrap(), Parsed::default());
        assert!(parse(b"cagehand-logbook format=1 vehicle=x\n").is_ok());
    }

    #[test]
    fn non_finite_numbers_and_bad_times_are_refused_before_writing() {
        use crate::impact::{ImpactInput, ImpactMethod};
        use crate::logbook::{ImpactEvent, ImpactSource, StrikeRef};
        let mut r = note(1, "x");
        r.time = "yesterday".into();
        assert!(encode_record(&r).unwrap_err().contains("RFC 3339"));
        // serde_json would write NaN as null, which could never be read back.
        r = note(1, "x");
        r.event = Event::Impact(ImpactEvent {
            strike: StrikeRef::Face("F1".into()),
            input: ImpactInput::PeakAccel { g: 10.0 },
            source: ImpactSource::Entered,
            method: ImpactMethod::MeasuredAcceleration,
            force_n: f64::NAN,
            residual_n: 0.0,
            face_displacement_m: 0.0,
            slack_strings: vec![],
            beyond_model: false,
            detection: None,
            members: vec![],
            note: None,
        });
        assert!(encode_record(&r).unwrap_err().contains("force_n"));
    }

    /// Damage one byte of a good file: every record whose line was not hit
    /// must still load (or sit whole in a tail that is set aside).
    fn one_damaged_byte(recs: &[Record], pos: usize, byte: u8) -> Result<(), TestCaseError> {
        let good = file(recs);
        let mut bad = good.clone();
        if bad[pos] == byte {
            return Ok(());
        }
        bad[pos] = byte;
        let header_len = encode_header("kestrel-demo").len();
        match parse(&bad) {
            Err(_) => prop_assert!(pos < header_len),
            Ok(p) => {
                // Which record's line held the damaged byte.
                let mut start = header_len;
                let mut hit = None;
                let chained = lines(recs);
                for (i, line) in chained.iter().enumerate() {
                    let len = line.len();
                    if (start..start + len).contains(&pos) {
                        hit = Some(i);
                    }
                    start += len;
                }
                // A damaged newline runs two lines together: the record
                // after it is then recovered from the damaged line.
                let got: Vec<&Record> = p.records.iter().map(|(_, r)| r).collect();
                let tail = p.tail.as_ref().map(|t| t.bytes.clone()).unwrap_or_default();
                for (i, r) in recs.iter().enumerate() {
                    let body = chained[i].trim_end().as_bytes();
                    let in_tail = tail.windows(body.len()).any(|w| w == body);
                    if Some(i) != hit {
                        // Kept in the log, or (the last line only) in
                        // the tail that is set aside whole.
                        prop_assert!(got.contains(&r) || in_tail, "record {} lost", i + 1);
                    }
                }
            }
        }
        Ok(())
    }

    #[test]
    fn every_byte_position_damaged_costs_at_most_its_own_record() {
        // Three records and the bytes that matter to the framing (a
        // newline, an opening brace) or not at all (a zero), at every place.
        let recs: Vec<Record> = (1..=3).map(|i| note(i, &format!("n{i}"))).collect();
        let len = file(&recs).len();
        for pos in 0..len {
            for byte in [0u8, b'\n', b'{'] {
                one_damaged_byte(&recs, pos, byte).unwrap();
            }
        }
    }

    proptest! {
        #![proptest_config(ProptestConfig::with_cases(64))]
        #[test]
        fn parser_never_panics_on_arbitrary_bytes(bytes in proptest::collection::vec(any::<u8>(), 0..400)) {
            let _ = parse(&bytes);
            let mut with_header = b"cagehand-logbook format=1 vehicle=v\n".to_vec();
            with_header.extend_from_slice(&bytes);
            let p = parse(&with_header);
            prop_assert!(p.is_ok());
        }

        #[test]
        fn one_damaged_byte_costs_at_most_its_own_record(pos in 0usize..10_000, byte in any::<u8>()) {
            let recs: Vec<Record> = (1..=5).map(|i| note(i, &format!("note number {i}"))).collect();
            let pos = pos % file(&recs).len();
            one_damaged_byte(&recs, pos, byte)?;
        }


        #[test]
        fn any_note_text_round_trips(text in ".{0,80}", op in "[a-z ]{1,12}") {
            let mut r = note(1, &text);
            r.operator = op.clone();
            if op.trim().is_empty() {
                prop_assert!(encode_record(&r).is_err());
            } else {
                let line = encode_record(&r).unwrap();
                prop_assert_eq!(line.matches('\n').count(), 1);
                prop_assert_eq!(decode_record(line.trim_end_matches('\n').as_bytes()).unwrap(), r);
            }
        }

        #[test]
        fn any_cut_of_a_good_file_keeps_every_complete_record(cut in 0usize..2000) {
            let bytes = file(&[note(1, "a"), note(2, "b"), note(3, "c")]);
            let cut = cut.min(bytes.len());
            let p = parse(&bytes[..cut]).unwrap();
            let mut complete = bytes[..cut].iter().filter(|&&b| b == b'\n').count().saturating_sub(1);
            // A cut just before a record's newline leaves that record whole.
            let header_len = encode_header("kestrel-demo").len();
            if cut > header_len && cut < bytes.len() && bytes[cut] == b'\n' {
                complete += 1;
            }
            prop_assert_eq!(p.records.len(), complete);
            prop_assert!(p.integrity.issues.iter().all(|i| i.kind == IssueKind::Torn), "{:?}", p.integrity.issues);
        }
    }
}
