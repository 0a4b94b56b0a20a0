//! The crew's writes to the cage log, as core functions every front end
//! calls the same way: confirm or dismiss a detection, record a finding, a
//! replacement or a note. Each checks its input against the cage and the
//! log, appends one record through the log store, and returns the record
//! with the member status changes it caused, so a screen can say at once
//! what changed ("R3: DUE -> REPLACE NOW"). The log must be open for
//! writing (its lock held), so the checks and the write see the same log.

use crate::cage::Cage;
use crate::health::{self, StatusChange};
use crate::impact::{ImpactInput, ImpactMethod, Strike, analyse_impact};
use crate::logbook::detection::{Resolution, resolution};
use crate::logbook::{
    DismissalEvent, Event, FindingEvent, FindingKind, ImpactEvent, ImpactSource, Logbook,
    NoteEvent, Record, ReplacementEvent, StoreError, StrikeRef,
};
use crate::profile::Profile;
use crate::statics::StaticsError;

/// Why a write was refused or failed.
#[derive(Debug, thiserror::Error)]
pub enum WorkError {
    /// The input does not fit this cage or this log; nothing was written.
    #[error("{0}")]
    Refused(String),
    /// The impact analysis failed for a reason other than a lost
    /// equilibrium (which is recorded as beyond the model).
    #[error("impact analysis failed: {0}")]
    Analysis(#[from] StaticsError),
    /// The log could not be written.
    #[error(transparent)]
    Store(#[from] StoreError),
}

/// A record written and what it changed.
#[derive(Debug, Clone, PartialEq)]
pub struct Written {
    /// The record as stored.
    pub record: Record,
    /// Members whose status it changed.
    pub changes: Vec<StatusChange>,
    /// True when an impact could not be solved and was recorded as beyond
    /// the model (every member REPLACE NOW).
    pub beyond_model: bool,
}

/// The vehicle a log belongs to: its cage and its profile's rules.
#[derive(Debug, Clone, Copy)]
pub struct Vehicle<'a> {
    /// The profile (inspection rules, impact settings).
    pub profile: &'a Profile,
    /// Its cage.
    pub cage: &'a Cage,
}

fn append(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    event: Event,
) -> Result<(Record, Vec<StatusChange>), WorkError> {
    if operator.trim().is_empty() {
        return Err(WorkError::Refused(
            "no operator name: every record says who wrote it".into(),
        ));
    }
    let before = health::assess(book.records(), v.cage, &v.profile.inspection);
    let record = book.append(operator.trim(), time, event)?;
    let after = health::assess(book.records(), v.cage, &v.profile.inspection);
    Ok((record, health::changes(&before, &after)))
}

/// The detection `seq` is pending in this log, or refused saying what
/// became of it.
pub fn check_pending(book: &Logbook, seq: u64) -> Result<(), WorkError> {
    match resolution(book.records(), seq) {
        Resolution::Pending => Ok(()),
        Resolution::NotADetection => Err(WorkError::Refused(not_a_detection(book, seq))),
        Resolution::Confirmed(by) => Err(WorkError::Refused(format!(
            "detection #{seq} was already confirmed by impact #{by}"
        ))),
        Resolution::Dismissed(by) => Err(WorkError::Refused(format!(
            "detection #{seq} was already dismissed by #{by}"
        ))),
    }
}

/// Why `seq` names no detection: no such record (with the numbers the log
/// holds), or a record of another kind.
fn not_a_detection(book: &Logbook, seq: u64) -> String {
    let records = book.records();
    match records.iter().find(|r| r.seq == seq) {
        Some(r) => format!(
            "record #{seq} is not a detection: its kind is `{}` (`log pending` lists the detections)",
            r.event.name()
        ),
        None => match (records.first(), records.last()) {
            (Some(first), Some(last)) => format!(
                "there is no record #{seq}: the log holds #{} to #{} (`log pending` lists the detections)",
                first.seq, last.seq
            ),
            _ => format!("there is no record #{seq}: the log is empty"),
        },
    }
}

/// Confirm the pending detection `seq` as an impact on `strike` with
/// `input`, analysed exactly as `cagehand impact` analyses it. An impact
/// the cage finds no equilibrium for is recorded all the same, as beyond
/// the model.
#[allow(clippy::too_many_arguments)]
pub fn confirm(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    seq: u64,
    strike: &StrikeRef,
    input: &ImpactInput,
    note: Option<String>,
) -> Result<Written, WorkError> {
    check_pending(book, seq)?;
    let index = match strike {
        StrikeRef::Face(id) => v.cage.face_index(id).map(Strike::Face),
        StrikeRef::Node(id) => v.cage.node_index(id).map(Strike::Node),
    }
    .ok_or_else(|| WorkError::Refused(format!("{strike} is not part of this cage")))?;
    let (mut event, beyond) = match analyse_impact(v.cage, v.profile, index, input) {
        Ok(a) => (
            ImpactEvent::from_analysis(
                v.cage,
                strike.clone(),
                input,
                &a,
                ImpactSource::Detected,
                note,
            ),
            false,
        ),
        Err(StaticsError::NoEquilibrium {
            load, residual_n, ..
        }) => {
            let method = match input {
                ImpactInput::PeakAccel { .. } => ImpactMethod::MeasuredAcceleration,
                ImpactInput::Speed { .. } => ImpactMethod::EnergyBalance,
                ImpactInput::SpeedAndDuration { .. } => ImpactMethod::HalfSinePulse,
            };
            let mut e =
                ImpactEvent::beyond_model(strike.clone(), input, method, load, residual_n, note);
            e.source = ImpactSource::Detected;
            (e, true)
        }
        Err(
            e @ (StaticsError::UnknownFace { .. }
            | StaticsError::UnknownNode { .. }
            | StaticsError::UnknownSurface { .. }
            | StaticsError::NotPositive { .. }
            | StaticsError::LoadSize { .. }),
        ) => return Err(WorkError::Refused(e.to_string())),
        Err(e) => return Err(e.into()),
    };
    event.detection = Some(seq);
    let (record, changes) = append(v, book, operator, time, Event::Impact(event))?;
    Ok(Written {
        record,
        changes,
        beyond_model: beyond,
    })
}

/// Dismiss the pending detection `seq`, with the reason (required).
pub fn dismiss(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    seq: u64,
    reason: &str,
) -> Result<Written, WorkError> {
    if reason.trim().is_empty() {
        return Err(WorkError::Refused(
            "the reason is empty: say why it was not a crash".into(),
        ));
    }
    check_pending(book, seq)?;
    let event = Event::Dismissal(DismissalEvent {
        detection: seq,
        reason: reason.trim().to_string(),
    });
    let (record, changes) = append(v, book, operator, time, event)?;
    Ok(Written {
        record,
        changes,
        beyond_model: false,
    })
}

fn member(v: Vehicle, id: &str) -> Result<String, WorkError> {
    match v.cage.member_index(id) {
        Some(_) => Ok(id.to_string()),
        None => Err(WorkError::Refused(format!(
            "{id:?} is not a member of this cage (R1.., S1..)"
        ))),
    }
}

/// Record what an inspection found on a member.
pub fn finding(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    member_id: &str,
    kind: FindingKind,
    note: Option<String>,
) -> Result<Written, WorkError> {
    let event = Event::Finding(FindingEvent {
        member: member(v, member_id)?,
        kind,
        note: note.filter(|n| !n.trim().is_empty()),
    });
    let (record, changes) = append(v, book, operator, time, event)?;
    Ok(Written {
        record,
        changes,
        beyond_model: false,
    })
}

/// Record a replacement; the part or lot is required (an inspector will
/// ask which lot went in).
pub fn replacement(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    member_id: &str,
    part: &str,
    note: Option<String>,
) -> Result<Written, WorkError> {
    if part.trim().is_empty() {
        return Err(WorkError::Refused(
            "the part or lot is empty: say which part went in".into(),
        ));
    }
    let event = Event::Replacement(ReplacementEvent {
        member: member(v, member_id)?,
        part: Some(part.trim().to_string()),
        note: note.filter(|n| !n.trim().is_empty()),
    });
    let (record, changes) = append(v, book, operator, time, event)?;
    Ok(Written {
        record,
        changes,
        beyond_model: false,
    })
}

/// Record a note (not empty).
pub fn note(
    v: Vehicle,
    book: &mut Logbook,
    operator: &str,
    time: jiff::Timestamp,
    text: &str,
) -> Result<Written, WorkError> {
    if text.trim().is_empty() {
        return Err(WorkError::Refused("the note is empty".into()));
    }
    let event = Event::Note(NoteEvent {
        text: text.to_string(),
    });
    let (record, changes) = append(v, book, operator, time, event)?;
    Ok(Written {
        record,
        changes,
        beyond_model: false,
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{Access, DetectionEvent};
    use std::time::Duration;

    fn det() -> Event {
        Event::Detection(DetectionEvent {
            link_time_s: 7.0,
            peak_g: 7.9,
            direction_body: [0.0, 0.0, -1.0],
            face: "F1".into(),
            face_alignment: 1.0,
            speed_m_per_s: Some(2.0),
            normal_speed_m_per_s: None,
            source: "sim".into(),
        })
    }

    /// The demo vehicle and a log holding one detection (#1).
    fn setup() -> (Profile, Cage, tempfile::TempDir, Logbook) {
        let p = Profile::demo().unwrap();
        let c = Cage::from_profile(&p).unwrap();
        let dir = tempfile::tempdir().unwrap();
        let (mut book, _) =
            Logbook::open(dir.path(), "v", Access::Write, Duration::from_millis(200)).unwrap();
        book.append("ana", jiff::Timestamp::now(), det()).unwrap();
        (p, c, dir, book)
    }

    #[test]
    fn confirm_records_the_same_loads_as_the_analysis_and_names_the_detection() {
        let (p, c, _dir, mut book) = setup();
        let v = Vehicle {
            profile: &p,
            cage: &c,
        };
        let now = jiff::Timestamp::now();
        let input = ImpactInput::PeakAccel { g: 7.9 };
        let w = confirm(
            v,
            &mut book,
            "ana",
            now,
            1,
            &StrikeRef::Face("F1".into()),
            &input,
            None,
        )
        .unwrap();
        let Event::Impact(i) = &w.record.event else {
            panic!("not an impact: {:?}", w.record.event)
        };
        assert_eq!(i.detection, Some(1));
        assert_eq!(i.source, ImpactSource::Detected);
        // The same numbers as the analysis itself (F = m a on face F1).
        let a = analyse_impact(&c, &p, Strike::Face(0), &input).unwrap();
        assert_eq!(i.force_n, a.force_n);
        assert_eq!(i.members.len(), a.members.len());
        for (m, am) in i.members.iter().zip(&a.members) {
            assert_eq!(m.force_n, am.force_n);
        }
        // Twice, or a dismissal after it, is refused and writes nothing.
        let strike = StrikeRef::Face("F1".into());
        assert!(confirm(v, &mut book, "ana", now, 1, &strike, &input, None).is_err());
        assert!(dismiss(v, &mut book, "ana", now, 1, "bench").is_err());
        assert_eq!(book.records().len(), 2);
    }

    #[test]
    fn each_write_checks_its_input_first() {
        let (p, c, _dir, mut book) = setup();
        let v = Vehicle {
            profile: &p,
            cage: &c,
        };
        let now = jiff::Timestamp::now();
        assert!(dismiss(v, &mut book, "ana", now, 1, " ").is_err());
        assert!(dismiss(v, &mut book, "ana", now, 2, "x").is_err());
        assert!(replacement(v, &mut book, "ana", now, "R1", "", None).is_err());
        assert!(replacement(v, &mut book, "ana", now, "R99", "lot 7", None).is_err());
        assert!(finding(v, &mut book, "", now, "R1", FindingKind::Ok, None).is_err());
        assert!(note(v, &mut book, "ana", now, "").is_err());
        assert_eq!(book.records().len(), 1);
        let w = dismiss(v, &mut book, "ana", now, 1, "hand launch").unwrap();
        assert_eq!(w.record.seq, 2);
        let w = finding(v, &mut book, "ana", now, "S3", FindingKind::Slack, None).unwrap();
        assert_eq!(w.changes.len(), 1);
        assert_eq!(w.changes[0].to, crate::health::Status::Inspect);
        let w = replacement(v, &mut book, "ana", now, "S3", "lot 7", None).unwrap();
        assert_eq!(w.changes[0].to, crate::health::Status::Ok);
        assert!(note(v, &mut book, "ana", now, "new props").is_ok());
        assert_eq!(book.records().len(), 5);
    }
}
