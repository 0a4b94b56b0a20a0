//! How a record line is framed, hashed and chained, and what the chain says
//! about the log as a whole. Pure: strings in, strings out.
//!
//! A chained line (format 2, and new records in a format-1 log) is
//!
//! ```text
//! <record JSON> prev=<64 hex> sha256=<64 hex>
//! ```
//!
//! where `sha256` is the SHA-256 of every byte before ` sha256=` (the JSON,
//! ` prev=` and the previous value) and is called the line hash; `prev` is
//! the chain value after the line before. The chain value after the header
//! is the SHA-256 of the header line; after a chained record it is that
//! record's line hash; after a format-1 (unchained) record it is the
//! SHA-256 of the text `<value before> <its checksum>`, so old records are
//! folded into the chain the first record written after them commits to.
//! The last chain value, with the last sequence number, is the chain head.
//! See docs/logbook.md.

use super::Record;
use sha2::{Digest, Sha256};
use std::collections::HashMap;

/// What separates the record's JSON from the previous chain value.
pub const PREV_TAG: &str = " prev=";
/// What separates the line's hash from the rest.
pub const SUM_TAG: &str = " sha256=";

/// Lower-case hex SHA-256 of some bytes.
pub fn sha256_hex(bytes: &[u8]) -> String {
    const HEX: &[u8; 16] = b"0123456789abcdef";
    let digest = Sha256::digest(bytes);
    let mut s = String::with_capacity(64);
    for b in digest.iter() {
        s.push(char::from(HEX[usize::from(b >> 4)]));
        s.push(char::from(HEX[usize::from(b & 0x0f)]));
    }
    s
}

fn is_hash(s: &str) -> bool {
    s.len() == 64 && s.bytes().all(|b| b.is_ascii_hexdigit())
}

/// The chain value after the header: the hash of the header line, without
/// its line end.
pub fn header_value(header_line: &str) -> String {
    sha256_hex(header_line.as_bytes())
}

/// The chain value after a format-1 record whose checksum is `checksum`.
pub fn fold_unchained(before: &str, checksum: &str) -> String {
    sha256_hex(format!("{before} {}", checksum.to_ascii_lowercase()).as_bytes())
}

/// One record as a format-1 line (no chain), with its newline. Kept for
/// reading and testing old logs; this program writes chained lines.
pub fn encode_unchained(record: &Record) -> Result<String, String> {
    record.check()?;
    let json = serde_json::to_string(record).map_err(|e| e.to_string())?;
    // serde_json escapes control characters, so the JSON holds no newline.
    Ok(format!("{json}{SUM_TAG}{}\n", sha256_hex(json.as_bytes())))
}

/// One record as a chained line after chain value `prev`: the line with
/// its newline, and its line hash (the next chain value).
pub fn encode_chained(record: &Record, prev: &str) -> Result<(String, String), String> {
    record.check()?;
    if !is_hash(prev) {
        return Err(format!(
            "previous chain value {prev:?} is not 64 hex digits"
        ));
    }
    let json = serde_json::to_string(record).map_err(|e| e.to_string())?;
    let body = format!("{json}{PREV_TAG}{}", prev.to_ascii_lowercase());
    let hash = sha256_hex(body.as_bytes());
    Ok((format!("{body}{SUM_TAG}{hash}\n"), hash))
}

/// A record line that checks.
#[derive(Debug, Clone, PartialEq)]
pub struct Decoded {
    /// The record.
    pub record: Record,
    /// Its line hash (lower case): the checksum of a format-1 line.
    pub hash: String,
    /// The chain value it names as the one before it; `None` for format 1.
    pub prev: Option<String>,
}

/// A record line that does not check, with what could still be read of it.
#[derive(Debug, Clone, PartialEq)]
pub struct LineError {
    /// What is wrong.
    pub reason: String,
    /// The checksum holds: the bytes are as written, so this is no torn
    /// write (a newer event kind, say) and must never be set aside.
    pub verified: bool,
    /// The line hash it carries, when that part is well formed.
    pub tag: Option<String>,
    /// Whether it carries a `prev=` (a chained line).
    pub chained: bool,
    /// The sequence number its start claims, when readable.
    pub seq: Option<u64>,
}

/// The sequence number a damaged line's start claims (`{"seq":N,`).
fn claimed_seq(text: &[u8]) -> Option<u64> {
    let rest = text.strip_prefix(b"{\"seq\":")?;
    let n = rest.iter().take_while(|b| b.is_ascii_digit()).count();
    std::str::from_utf8(&rest[..n]).ok()?.parse().ok()
}

/// Decode one record line (without its line end; a final `\r` is ignored,
/// so a log converted to CRLF line ends reads the same).
pub fn decode_line(line: &[u8]) -> Result<Decoded, LineError> {
    let line = line.strip_suffix(b"\r").unwrap_or(line);
    let mut err = LineError {
        reason: String::new(),
        verified: false,
        tag: None,
        chained: false,
        seq: claimed_seq(line),
    };
    let fail = |mut e: LineError, reason: String| {
        e.reason = reason;
        Err(e)
    };
    let text = match std::str::from_utf8(line) {
        Ok(t) => t,
        Err(e) => return fail(err, format!("not UTF-8 text ({e})")),
    };
    let Some((body, sum)) = text.rsplit_once(SUM_TAG) else {
        return fail(err, "no `sha256=` checksum at the end of the line".into());
    };
    if !is_hash(sum) {
        return fail(err, format!("checksum {sum:?} is not 64 hex digits"));
    }
    let sum = sum.to_ascii_lowercase();
    err.tag = Some(sum.clone());
    // A chained line ends its body in ` prev=<64 hex>`; JSON cannot end so.
    let (json, prev) = match body.rsplit_once(PREV_TAG) {
        Some((json, p)) if is_hash(p) => (json, Some(p.to_ascii_lowercase())),
        _ => (body, None),
    };
    err.chained = prev.is_some();
    if sha256_hex(body.as_bytes()) != sum {
        return fail(
            err,
            "checksum does not match the record (changed or damaged)".into(),
        );
    }
    err.verified = true;
    let record: Record = match serde_json::from_str(json) {
        Ok(r) => r,
        Err(e) => {
            return fail(
                err,
                format!(
                    "the checksum holds but the record does not read (written by a newer cagehand?): {e}"
                ),
            );
        }
    };
    if let Err(e) = record.check() {
        return fail(err, format!("the checksum holds but {e}"));
    }
    Ok(Decoded {
        record,
        hash: sum,
        prev,
    })
}

/// The newest record's sequence number and the chain value after it: what
/// an inspector keeps (printed by every export and by `log health`) to
/// show later that nothing was removed or changed up to it.
#[derive(Debug, Clone, PartialEq, Eq, serde::Serialize)]
pub struct ChainHead {
    /// Sequence number of the newest record (0: no records yet).
    pub seq: u64,
    /// The chain value after it, 64 lower-case hex digits.
    pub hash: String,
}

impl std::fmt::Display for ChainHead {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "{}:{}", self.seq, self.hash)
    }
}

impl std::str::FromStr for ChainHead {
    type Err = String;

    /// `SEQ:HASH`, the hash whole or its first 16 or more hex digits.
    fn from_str(s: &str) -> Result<ChainHead, String> {
        let bad = || {
            format!(
                "chain head {:?}: expected SEQ:HASH (a record number, a colon, and at least 16 hex digits of the hash), as the report prints it",
                crate::text::terminal(s)
            )
        };
        let (seq, hash) = s.trim().split_once(':').ok_or_else(bad)?;
        let seq: u64 = seq.trim().parse().map_err(|_| bad())?;
        let hash = hash.trim().to_ascii_lowercase();
        if hash.len() < 16 || hash.len() > 64 || !hash.bytes().all(|b| b.is_ascii_hexdigit()) {
            return Err(bad());
        }
        Ok(ChainHead { seq, hash })
    }
}

/// The kinds of trouble a log can show about itself.
#[derive(Debug, Clone, Copy, PartialEq, Eq, serde::Serialize)]
#[serde(rename_all = "snake_case")]
pub enum IssueKind {
    /// A line that does not check (damaged or edited), skipped.
    Corrupt,
    /// A line whose checksum holds but which cannot be read, skipped.
    Unreadable,
    /// A torn last line (a write cut short), skipped or set aside.
    Torn,
    /// A record does not follow the one before it: something before it
    /// was changed, removed, inserted or moved.
    ChainBroken,
    /// A line repeats an earlier one exactly.
    Duplicate,
    /// A format-1 record after the chain began (or in a format-2 log): its
    /// content and place are not protected.
    Unchained,
    /// Sequence numbers skip: records are missing.
    SequenceGap,
    /// Sequence numbers repeat or go backwards.
    SequenceOrder,
    /// The header names another vehicle.
    OtherVehicle,
    /// Torn records were moved to the side file by an earlier write and
    /// are still there: what they held (an impact, perhaps) is in no
    /// count until someone reads them and records it again.
    SetAside,
}

impl IssueKind {
    /// What the issue means for anyone deciding from the log.
    pub fn effect(self) -> &'static str {
        match self {
            IssueKind::Duplicate => "the repeat is counted once",
            IssueKind::OtherVehicle => "the records may be another vehicle's",
            IssueKind::SetAside => {
                "records in the side file are not counted: damage may be understated"
            }
            _ => "damage may be understated",
        }
    }
}

/// One integrity problem, where it is and what it affects.
#[derive(Debug, Clone, PartialEq, serde::Serialize)]
pub struct Issue {
    /// 1-based line of the file where it shows.
    pub line: usize,
    /// What kind of problem.
    pub kind: IssueKind,
    /// What was found, in words.
    pub detail: String,
}

impl std::fmt::Display for Issue {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(
            f,
            "line {}: {} ({})",
            self.line,
            self.detail,
            self.kind.effect()
        )
    }
}

/// One record's place in the chain.
#[derive(Debug, Clone, PartialEq)]
pub struct Link {
    /// 1-based line.
    pub line: usize,
    /// Sequence number.
    pub seq: u64,
    /// The chain value after it.
    pub value: String,
}

/// How far a log can be trusted: every problem found, notes that are not
/// problems, and the chain head. Screens and reports show
/// [`Integrity::headline`] and [`Integrity::issues`] wherever a decision
/// is made from the log.
#[derive(Debug, Clone, PartialEq, Default, serde::Serialize)]
pub struct Integrity {
    /// Problems, in file order.
    pub issues: Vec<Issue>,
    /// Things worth knowing that are not problems (a last line without its
    /// line end).
    pub notes: Vec<String>,
    /// How many records were written by format 1, before the chain began:
    /// an edit to them shows only against a chain head kept from before.
    pub unchained: usize,
    /// The chain head (`None`: no log file, or a torn header).
    pub head: Option<ChainHead>,
    /// Every kept record's chain value, to check a kept head against.
    #[serde(skip)]
    pub links: Vec<Link>,
}

impl Integrity {
    /// Whether torn records wait in the side file ([`IssueKind::SetAside`]).
    pub fn holds_set_aside(&self) -> bool {
        self.issues.iter().any(|i| i.kind == IssueKind::SetAside)
    }

    /// No problem found.
    pub fn is_sound(&self) -> bool {
        self.issues.is_empty()
    }

    /// One sentence for the top of a screen or report, when there are
    /// problems: how many, and what they affect.
    pub fn headline(&self) -> Option<String> {
        if self.issues.is_empty() {
            return None;
        }
        let mut effects: Vec<&str> = Vec::new();
        for i in &self.issues {
            let e = i.kind.effect();
            if !effects.contains(&e) {
                effects.push(e);
            }
        }
        Some(format!(
            "the cage log has {}: {}",
            crate::text::count(self.issues.len(), "integrity problem", "integrity problems"),
            effects.join("; ")
        ))
    }

    /// Check the log against a chain head kept from an earlier report.
    /// `Ok` says how the log relates to it; `Err` says what no longer
    /// matches (a removed newest record, a changed record).
    pub fn check_head(&self, kept: &ChainHead) -> Result<String, String> {
        let now = self.head.as_ref().map(|h| h.seq).unwrap_or(0);
        if kept.seq == 0 {
            return Ok(format!(
                "a kept head of record 0 anchors nothing; the log now ends at record {now}"
            ));
        }
        let Some(link) = self.links.iter().rev().find(|l| l.seq == kept.seq) else {
            return Err(if kept.seq > now {
                format!(
                    "record {} named by the kept head is not in the log, which now ends at record {now}: newer records were removed",
                    kept.seq
                )
            } else {
                format!(
                    "record {} named by the kept head is not in the log (removed or damaged)",
                    kept.seq
                )
            });
        };
        if !link.value.starts_with(&kept.hash) {
            return Err(format!(
                "record {} (line {}) does not match the kept head: it, or a record before it, was changed or replaced since the head was kept",
                kept.seq, link.line
            ));
        }
        let later = now.saturating_sub(kept.seq);
        Ok(if later == 0 {
            format!("the log ends at the kept head, record {}", kept.seq)
        } else {
            format!(
                "the log holds the kept head (record {}) and {} after it",
                kept.seq,
                crate::text::count(later, "record", "records")
            )
        })
    }
}

/// One line of a log body as read: a record that checks, or one that does
/// not (with any whole records recovered from it).
#[derive(Debug, Clone)]
pub enum Item {
    /// A record that checks.
    Record {
        /// 1-based line.
        line: usize,
        /// The decoded line.
        decoded: Decoded,
    },
    /// A line that does not check.
    Bad {
        /// 1-based line.
        line: usize,
        /// What could be read of it.
        error: LineError,
        /// A hash of its raw bytes, standing in for a tag it lacks.
        raw_hash: String,
        /// Whole records recovered from it follow as `Record` items.
        recovered: usize,
    },
}

/// The outcome of walking the chain.
#[derive(Debug, Clone, Default)]
pub struct Walk {
    /// Which `Record` items to count (a duplicate is not), by item index.
    pub keep: Vec<bool>,
    /// Problems found.
    pub issues: Vec<Issue>,
    /// Records before the chain began (format 1).
    pub unchained: usize,
    /// Every kept record's chain value.
    pub links: Vec<Link>,
    /// The chain value after the last line.
    pub value: String,
}

/// Walk the lines of a log after its header: check every link, find
/// duplicates, and compute the chain value after each line.
pub fn walk(format: u32, header_value: &str, items: &[Item]) -> Walk {
    let mut w = Walk {
        keep: vec![false; items.len()],
        value: header_value.to_string(),
        ..Walk::default()
    };
    // Chain value -> (line, seq) of the record it follows.
    let mut after: HashMap<String, (usize, u64)> = HashMap::new();
    let mut hashes: HashMap<String, usize> = HashMap::new();
    let mut chain_began = format >= 2;
    // After a line that does not check, the next link is not judged: the
    // damage is already reported, and its tag may be what was damaged.
    let mut resync = false;
    let mut last: Option<(usize, u64)> = None;
    for (idx, item) in items.iter().enumerate() {
        match item {
            Item::Bad {
                error,
                raw_hash,
                recovered,
                ..
            } => {
                resync = true;
                if *recovered == 0 {
                    let tag = error.tag.clone().unwrap_or_else(|| raw_hash.clone());
                    w.value = if error.chained {
                        tag
                    } else {
                        fold_unchained(&w.value, &tag)
                    };
                }
            }
            Item::Record { line, decoded } => {
                let seq = decoded.record.seq;
                if let Some(first) = hashes.get(&decoded.hash) {
                    w.issues.push(Issue {
                        line: *line,
                        kind: IssueKind::Duplicate,
                        detail: format!("record {seq} repeats line {first} exactly"),
                    });
                    continue;
                }
                hashes.insert(decoded.hash.clone(), *line);
                w.keep[idx] = true;
                match &decoded.prev {
                    Some(prev) => {
                        if !resync && *prev != w.value {
                            let detail = match (after.get(prev), last) {
                                (Some((l, s)), _) => format!(
                                    "record {seq} was written after record {s} (line {l}), not after the line before it: records were inserted, removed or moved here"
                                ),
                                _ if *prev == header_value => format!(
                                    "record {seq} was written as the first record of the log: the records before it were added or moved here"
                                ),
                                (None, Some((l, s))) => format!(
                                    "record {seq} does not follow record {s} (line {l}): that record was changed after this one was written, or records between them were removed"
                                ),
                                (None, None) => format!(
                                    "record {seq} does not follow the header: records before it were removed"
                                ),
                            };
                            w.issues.push(Issue {
                                line: *line,
                                kind: IssueKind::ChainBroken,
                                detail,
                            });
                        }
                        chain_began = true;
                        w.value = decoded.hash.clone();
                    }
                    None => {
                        if chain_began {
                            w.issues.push(Issue {
                                line: *line,
                                kind: IssueKind::Unchained,
                                detail: format!(
                                    "record {seq} has no link to the record before it (written by hand or by an older cagehand): its content and place are not protected"
                                ),
                            });
                        } else {
                            w.unchained += 1;
                        }
                        w.value = fold_unchained(&w.value, &decoded.hash);
                    }
                }
                resync = false;
                after.insert(w.value.clone(), (*line, seq));
                w.links.push(Link {
                    line: *line,
                    seq,
                    value: w.value.clone(),
                });
                last = Some((*line, seq));
            }
        }
    }
    w
}

/// Sequence numbers in file order: a gap (records missing) or a repeat or
/// step back. A gap that a damaged line explains (it claims the missing
/// number, or its number cannot be read) is not reported again: the damage
/// is.
pub fn sequence_issues(items: &[Item], keep: &[bool]) -> Vec<Issue> {
    let mut out = Vec::new();
    let mut expected: Option<u64> = Some(1);
    for (idx, item) in items.iter().enumerate() {
        match item {
            Item::Bad { recovered, .. } => {
                // The damaged line held the next number (the number it
                // claims may be what was damaged): judge the record after.
                if *recovered == 0 {
                    expected = None;
                }
            }
            Item::Record { line, decoded } if keep.get(idx).copied().unwrap_or(false) => {
                let seq = decoded.record.seq;
                if let Some(e) = expected {
                    if seq > e {
                        let missing = if seq - e == 1 {
                            format!("record {e} is missing")
                        } else {
                            format!("records {e} to {} are missing", seq - 1)
                        };
                        out.push(Issue {
                            line: *line,
                            kind: IssueKind::SequenceGap,
                            detail: format!("record {seq} where {e} was expected: {missing}"),
                        });
                    } else if seq < e {
                        out.push(Issue {
                            line: *line,
                            kind: IssueKind::SequenceOrder,
                            detail: format!(
                                "record {seq} where {e} was expected: the number repeats or goes back"
                            ),
                        });
                    }
                }
                expected = seq.checked_add(1);
            }
            Item::Record { .. } => {}
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{Event, NoteEvent};

    fn note(seq: u64) -> Record {
        Record {
            seq,
            time: "2026-12-01T22:40:00.123Z".into(),
            operator: "ana".into(),
            event: Event::Note(NoteEvent {
                text: format!("n{seq}"),
            }),
        }
    }

    #[test]
    fn a_chained_line_hashes_everything_before_its_checksum() {
        let prev = sha256_hex(b"header");
        let (line, hash) = encode_chained(&note(1), &prev).unwrap();
        let body = line.trim_end().rsplit_once(SUM_TAG).unwrap().0;
        assert!(body.ends_with(&format!(" prev={prev}")));
        assert_eq!(hash, sha256_hex(body.as_bytes()));
        let d = decode_line(line.trim_end().as_bytes()).unwrap();
        assert_eq!(d.prev.as_deref(), Some(prev.as_str()));
        assert_eq!(d.hash, hash);
        assert_eq!(d.record, note(1));
        // A CRLF line end reads the same.
        let crlf = format!("{}\r", line.trim_end());
        assert_eq!(decode_line(crlf.as_bytes()).unwrap(), d);
    }

    #[test]
    fn a_verified_line_that_does_not_read_is_marked_verified() {
        let json =
            r#"{"seq":4,"time":"2026-12-01T22:40:00Z","operator":"a","event":"from_the_future"}"#;
        let line = format!("{json}{SUM_TAG}{}", sha256_hex(json.as_bytes()));
        let e = decode_line(line.as_bytes()).unwrap_err();
        assert!(e.verified && e.seq == Some(4), "{e:?}");
        let e = decode_line(&line.as_bytes()[..line.len() - 3]).unwrap_err();
        assert!(!e.verified);
    }

    #[test]
    fn chain_heads_parse_as_printed() {
        let h = ChainHead {
            seq: 12,
            hash: sha256_hex(b"x"),
        };
        assert_eq!(h.to_string().parse::<ChainHead>().unwrap(), h);
        let short: ChainHead = format!("12:{}", &h.hash[..16]).parse().unwrap();
        assert_eq!(short.seq, 12);
        assert!("12".parse::<ChainHead>().is_err());
        assert!("12:abc".parse::<ChainHead>().is_err());
        assert!("x:0123456789abcdef".parse::<ChainHead>().is_err());
    }

    // The tamper cases below edit a good chained log the way a person with
    // a text editor and sha256sum would, and check where it shows.

    fn log(n: u64) -> Vec<String> {
        let recs: Vec<Record> = (1..=n).map(note).collect();
        crate::logbook::encode_log("v", &recs)
            .unwrap()
            .lines()
            .map(str::to_string)
            .collect()
    }

    fn parse_lines(lines: &[String]) -> crate::logbook::Parsed {
        crate::logbook::parse(format!("{}\n", lines.join("\n")).as_bytes()).unwrap()
    }

    fn kinds(p: &crate::logbook::Parsed) -> Vec<(usize, IssueKind)> {
        p.integrity
            .issues
            .iter()
            .map(|i| (i.line, i.kind))
            .collect()
    }

    /// Re-hash a chained line after its JSON was edited, as a forger would.
    fn reseal(line: &str) -> String {
        let body = line.rsplit_once(SUM_TAG).unwrap().0;
        format!("{body}{SUM_TAG}{}", sha256_hex(body.as_bytes()))
    }

    #[test]
    fn an_edited_and_resealed_record_breaks_the_next_link() {
        let mut l = log(4);
        l[2] = reseal(&l[2].replace("\"n2\"", "\"ok\""));
        let p = parse_lines(&l);
        assert_eq!(
            p.records.len(),
            4,
            "a record that verifies is never dropped"
        );
        assert_eq!(kinds(&p), [(4, IssueKind::ChainBroken)]);
        let d = &p.integrity.issues[0].detail;
        assert!(d.contains("does not follow record 2 (line 3)"), "{d}");
        assert!(
            p.integrity
                .headline()
                .unwrap()
                .contains("damage may be understated")
        );
    }

    #[test]
    fn a_deleted_middle_record_shows_as_a_broken_link_and_a_gap() {
        let mut l = log(4);
        l.remove(2);
        let p = parse_lines(&l);
        assert_eq!(
            kinds(&p),
            [(3, IssueKind::ChainBroken), (3, IssueKind::SequenceGap)]
        );
        assert!(p.integrity.issues[1].detail.contains("record 2 is missing"));
    }

    #[test]
    fn reordered_records_are_found() {
        let mut l = log(4);
        l.swap(2, 3);
        let p = parse_lines(&l);
        let k = kinds(&p);
        assert!(k.contains(&(3, IssueKind::ChainBroken)), "{k:?}");
        assert!(k.contains(&(3, IssueKind::SequenceGap)), "{k:?}");
        assert!(k.contains(&(4, IssueKind::SequenceOrder)), "{k:?}");
    }

    #[test]
    fn a_duplicated_line_is_found_and_counted_once() {
        let mut l = log(3);
        let again = l[2].clone();
        l.insert(3, again);
        let p = parse_lines(&l);
        assert_eq!(p.records.len(), 3);
        assert_eq!(kinds(&p), [(4, IssueKind::Duplicate)]);
        assert!(p.integrity.issues[0].detail.contains("repeats line 3"));
    }

    #[test]
    fn a_deleted_newest_record_shows_against_a_kept_head() {
        let l = log(4);
        let whole = parse_lines(&l);
        let kept = whole.integrity.head.clone().unwrap();
        assert_eq!(kept.seq, 4);
        assert!(whole.integrity.check_head(&kept).is_ok());
        let cut = parse_lines(&l[..4]);
        assert!(
            cut.integrity.is_sound(),
            "the cut log is consistent by itself"
        );
        let err = cut.integrity.check_head(&kept).unwrap_err();
        assert!(err.contains("newer records were removed"), "{err}");
        // A record appended in its place takes number 4 but not its hash.
        let mut again = l[..4].to_vec();
        let prev = cut.chain_value.clone();
        let mut r = note(4);
        r.event = Event::Note(NoteEvent {
            text: "other".into(),
        });
        again.push(encode_chained(&r, &prev).unwrap().0.trim_end().to_string());
        let redone = parse_lines(&again);
        assert!(
            redone
                .integrity
                .check_head(&kept)
                .unwrap_err()
                .contains("changed or replaced")
        );
        // A short hash as a report prints it for the command line also works.
        let short: ChainHead = format!("4:{}", &kept.hash[..16]).parse().unwrap();
        assert!(whole.integrity.check_head(&short).is_ok());
    }

    #[test]
    fn a_record_appended_by_hand_without_a_link_is_flagged() {
        let mut l = log(2);
        l.push(encode_unchained(&note(3)).unwrap().trim_end().to_string());
        let p = parse_lines(&l);
        assert_eq!(p.records.len(), 3);
        assert_eq!(kinds(&p), [(4, IssueKind::Unchained)]);
    }

    #[test]
    fn a_corrupt_record_is_reported_as_corrupt_not_as_a_gap_or_a_break() {
        let mut l = log(8);
        l[7] = l[7].replace("\"n7\"", "\"nX\"");
        let p = parse_lines(&l);
        assert_eq!(kinds(&p), [(8, IssueKind::Corrupt)]);
        assert_eq!(p.records.len(), 7);
    }
}
