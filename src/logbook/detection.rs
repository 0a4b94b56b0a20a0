//! Detected impacts as records, and what became of them.
//!
//! The live feed ([`crate::feed`]) turns an acceleration peak into a
//! [`DetectionEvent`]; the application writes it to the log at once, so a
//! crash is on record even if the laptop dies a second later. The crew then
//! confirms it (an `impact` record whose `detection` names it) or dismisses
//! it (a [`DismissalEvent`] with the reason). A detection that is neither is
//! *pending*, and a pending detection blocks the pre-flight sign-off.
//!
//! Identity: the same recording replayed twice must not add a second record.
//! A detection is the same as one already in the log when it came from the
//! same link source at the same link time (the sender's clock, which a
//! replay reproduces) with the same peak, both to within
//! [`SAME_LINK_TIME_S`] and [`SAME_PEAK_G`]. Two real crashes cannot share
//! all three; a replay always does.

use super::{Event, Record};
use crate::impact_detect::ProposedImpact;
use serde::{Deserialize, Serialize};

/// Link times closer than this are the same instant (the log keeps
/// numbers as JSON decimals, which may not read back to the last bit).
pub const SAME_LINK_TIME_S: f64 = 1e-3;
/// Peaks closer than this, in g, are the same peak.
pub const SAME_PEAK_G: f64 = 1e-3;

/// The input a confirmation's impact analysis starts from.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ConfirmInput {
    /// Approach speed along the face normal, m/s (energy balance).
    Speed(f64),
    /// Measured peak acceleration, g (F = m a).
    PeakG(f64),
}

impl ConfirmInput {
    /// The rule of [`DetectionEvent::confirm_input`] on a peak and an
    /// approach speed: the speed when positive, else the peak.
    pub fn from_readings(peak_g: f64, approach_speed_m_per_s: Option<f64>) -> ConfirmInput {
        match approach_speed_m_per_s {
            Some(v) if v > 0.0 => ConfirmInput::Speed(v),
            _ => ConfirmInput::PeakG(peak_g),
        }
    }
}

/// An impact the live feed detected (the `detection` record).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DetectionEvent {
    /// Time of the peak on the link's sample clock (the sender's clock
    /// where the protocol carries one), seconds. The record's own `time`
    /// is the UTC time it was written, at the moment of detection.
    pub link_time_s: f64,
    /// Peak specific force, in standard gravities.
    pub peak_g: f64,
    /// Unit direction of the push at the peak, body frame (FRD).
    pub direction_body: [f64; 3],
    /// The face most likely struck (`F1..`).
    pub face: String,
    /// How squarely the push went through that face (1: straight in).
    pub face_alignment: f64,
    /// Speed (magnitude of the velocity) just before the event, when the
    /// link carries velocity; null when unknown.
    pub speed_m_per_s: Option<f64>,
    /// Approach speed along the face's outward normal, when velocity and
    /// attitude were known; null when unknown.
    pub normal_speed_m_per_s: Option<f64>,
    /// The link it came over, e.g. `udp:127.0.0.1:14550` or `sim`.
    pub source: String,
}

impl DetectionEvent {
    /// The record body for a detector's proposal on a link.
    pub fn from_proposed(p: &ProposedImpact, source: &str) -> DetectionEvent {
        DetectionEvent {
            link_time_s: p.t_s,
            peak_g: p.peak_g,
            direction_body: p.direction_body,
            face: p.face_id.clone(),
            face_alignment: p.face_alignment,
            speed_m_per_s: p.speed_m_per_s,
            normal_speed_m_per_s: p.normal_speed_m_per_s,
            source: source.to_string(),
        }
    }

    /// Whether `other` is this same detection seen again (a replay).
    pub fn same_as(&self, other: &DetectionEvent) -> bool {
        self.source == other.source
            && (self.link_time_s - other.link_time_s).abs() < SAME_LINK_TIME_S
            && (self.peak_g - other.peak_g).abs() < SAME_PEAK_G
    }

    /// The speed to pre-fill a confirmation with: the approach speed along
    /// the face normal when known, else the magnitude (larger or equal, so
    /// an estimate from it errs on the safe side).
    pub fn approach_speed_m_per_s(&self) -> Option<f64> {
        self.normal_speed_m_per_s
            .map(|v| v.max(0.0))
            .or(self.speed_m_per_s)
    }

    /// What a confirmation is analysed from when the crew gives neither a
    /// peak nor a speed: one rule for the screens' form and `log confirm`,
    /// so the same detection never gives two forces. The approach speed
    /// (energy balance) when the link carried a positive one, because a
    /// peak sampled at the link's rate can miss the top of a short impact
    /// (common practice, no published source); else the measured peak.
    pub fn confirm_input(&self) -> ConfirmInput {
        ConfirmInput::from_readings(self.peak_g, self.approach_speed_m_per_s())
    }

    /// One line for listings.
    pub fn summary(&self) -> String {
        let speed = match self.speed_m_per_s {
            Some(v) => format!(", {v:.1} m/s before"),
            None => ", speed unknown".to_string(),
        };
        format!(
            "detected {:.1} g, likely on {}{speed} (link {}, t {:.3} s)",
            self.peak_g, self.face, self.source, self.link_time_s
        )
    }

    /// Why the record could not be read back (non-finite numbers).
    pub fn check(&self) -> Result<(), String> {
        let mut nums = vec![
            ("link_time_s", self.link_time_s),
            ("peak_g", self.peak_g),
            ("face_alignment", self.face_alignment),
        ];
        nums.extend(self.direction_body.iter().map(|&v| ("direction_body", v)));
        nums.extend(self.speed_m_per_s.map(|v| ("speed_m_per_s", v)));
        nums.extend(
            self.normal_speed_m_per_s
                .map(|v| ("normal_speed_m_per_s", v)),
        );
        match nums.iter().find(|(_, v)| !v.is_finite()) {
            Some((name, v)) => Err(format!("{name} is {v}, not a finite number")),
            None => Ok(()),
        }
    }
}

/// A detection dismissed by the crew (the `dismissal` record).
#[derive(Debug, Clone, PartialEq, Serialize, Deserialize)]
pub struct DismissalEvent {
    /// Sequence number of the `detection` record.
    pub detection: u64,
    /// Why it was not a crash ("hand launch", "dropped on the bench").
    pub reason: String,
}

/// A pending detection, as `log pending` lists it (a contract).
#[derive(Debug, Clone, PartialEq, Serialize)]
pub struct Pending {
    /// Sequence number of the `detection` record.
    pub seq: u64,
    /// UTC time it was written.
    pub time: String,
    /// Peak, in g.
    pub peak_g: f64,
    /// Face most likely struck.
    pub face: String,
    /// Speed just before, null when the link carried no velocity.
    pub speed_m_per_s: Option<f64>,
    /// The link it came over.
    pub source: String,
}

/// What became of a detection.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Resolution {
    /// No `detection` record has that sequence number.
    NotADetection,
    /// Neither confirmed nor dismissed.
    Pending,
    /// Confirmed by the impact record with this sequence number.
    Confirmed(u64),
    /// Dismissed by the dismissal record with this sequence number.
    Dismissed(u64),
}

/// What became of the detection with sequence number `seq`.
pub fn resolution(records: &[Record], seq: u64) -> Resolution {
    let is_detection = records
        .iter()
        .any(|r| r.seq == seq && matches!(r.event, Event::Detection(_)));
    if !is_detection {
        return Resolution::NotADetection;
    }
    for r in records {
        match &r.event {
            Event::Impact(i) if i.detection == Some(seq) => return Resolution::Confirmed(r.seq),
            Event::Dismissal(d) if d.detection == seq => return Resolution::Dismissed(r.seq),
            _ => {}
        }
    }
    Resolution::Pending
}

/// The detection record with this sequence number, if there is one.
pub fn detection(records: &[Record], seq: u64) -> Option<&DetectionEvent> {
    records.iter().find_map(|r| match &r.event {
        Event::Detection(d) if r.seq == seq => Some(d),
        _ => None,
    })
}

/// Detections neither confirmed nor dismissed, in log order.
pub fn pending(records: &[Record]) -> Vec<Pending> {
    let resolved: std::collections::BTreeSet<u64> = records
        .iter()
        .filter_map(|r| match &r.event {
            Event::Impact(i) => i.detection,
            Event::Dismissal(d) => Some(d.detection),
            _ => None,
        })
        .collect();
    records
        .iter()
        .filter_map(|r| match &r.event {
            Event::Detection(d) if !resolved.contains(&r.seq) => Some(Pending {
                seq: r.seq,
                time: r.time.clone(),
                peak_g: d.peak_g,
                face: d.face.clone(),
                speed_m_per_s: d.speed_m_per_s,
                source: d.source.clone(),
            }),
            _ => None,
        })
        .collect()
}

/// The sequence number of a record of this same detection already in the
/// log (a replay), if any.
pub fn find_same(records: &[Record], d: &DetectionEvent) -> Option<u64> {
    records.iter().find_map(|r| match &r.event {
        Event::Detection(e) if e.same_as(d) => Some(r.seq),
        _ => None,
    })
}

/// What writing a detection did.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Logged {
    /// Sequence number of the detection's record.
    pub seq: u64,
    /// False when the log already held this detection (a replay), so
    /// nothing was written.
    pub new: bool,
}

/// Write a detection to an open log at once, unless the log already holds
/// it (the same recording replayed): then nothing is written and the
/// earlier record's number is returned. Open the log for writing just
/// before, so records of other processes are seen.
pub fn record(
    book: &mut super::Logbook,
    operator: &str,
    time: jiff::Timestamp,
    d: DetectionEvent,
) -> Result<Logged, super::StoreError> {
    if let Some(seq) = find_same(book.records(), &d) {
        return Ok(Logged { seq, new: false });
    }
    let r = book.append(operator, time, Event::Detection(d))?;
    Ok(Logged {
        seq: r.seq,
        new: true,
    })
}

/// One sentence that a pending detection must not be missed, for the top
/// of `log health` and the reports; None when nothing is pending.
pub fn pending_warning(pending: &[Pending]) -> Option<String> {
    if pending.is_empty() {
        return None;
    }
    let list: Vec<String> = pending
        .iter()
        .map(|p| format!("#{} ({:.1} g on {}, {})", p.seq, p.peak_g, p.face, p.time))
        .collect();
    Some(format!(
        "{} not yet confirmed or dismissed: {}. The health below does not include them: confirm each (`log confirm SEQ`) or dismiss it with a reason (`log dismiss SEQ --reason TEXT`) before flying",
        crate::text::count(pending.len(), "detected impact", "detected impacts"),
        list.join(", ")
    ))
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{ImpactEvent, NoteEvent, StrikeRef};

    /// The confirmation's input: the approach speed along the normal when
    /// positive, else the speed's magnitude, else the measured peak.
    #[test]
    fn a_confirmation_starts_from_the_speed_when_the_link_carried_one() {
        let mut d = det(1.0, 7.5);
        assert_eq!(d.confirm_input(), ConfirmInput::PeakG(7.5));
        d.speed_m_per_s = Some(2.5);
        assert_eq!(d.confirm_input(), ConfirmInput::Speed(2.5));
        d.normal_speed_m_per_s = Some(1.5);
        assert_eq!(d.confirm_input(), ConfirmInput::Speed(1.5));
        // Moving away from the face along its normal: no approach to
        // estimate from, so the measured peak.
        d.normal_speed_m_per_s = Some(-0.5);
        assert_eq!(d.confirm_input(), ConfirmInput::PeakG(7.5));
    }

    fn det(t: f64, g: f64) -> DetectionEvent {
        DetectionEvent {
            link_time_s: t,
            peak_g: g,
            direction_body: [0.0, 0.0, -1.0],
            face: "F3".into(),
            face_alignment: 0.98,
            speed_m_per_s: None,
            normal_speed_m_per_s: None,
            source: "sim".into(),
        }
    }

    fn rec(seq: u64, event: Event) -> Record {
        Record {
            seq,
            time: "2026-12-01T22:40:00.000Z".into(),
            operator: "ana".into(),
            event,
        }
    }

    fn confirming(seq: u64) -> Event {
        let mut i = ImpactEvent::beyond_model(
            StrikeRef::Face("F3".into()),
            &crate::impact::ImpactInput::PeakAccel { g: 8.0 },
            crate::impact::ImpactMethod::MeasuredAcceleration,
            100.0,
            0.0,
            None,
        );
        i.detection = Some(seq);
        Event::Impact(i)
    }

    #[test]
    fn pending_until_confirmed_or_dismissed() {
        let mut log = vec![
            rec(1, Event::Detection(det(7.0, 7.9))),
            rec(2, Event::Detection(det(30.0, 6.1))),
            rec(
                3,
                Event::Note(NoteEvent {
                    text: "walk out".into(),
                }),
            ),
        ];
        assert_eq!(
            pending(&log).iter().map(|p| p.seq).collect::<Vec<_>>(),
            [1, 2]
        );
        assert_eq!(resolution(&log, 1), Resolution::Pending);
        assert_eq!(resolution(&log, 3), Resolution::NotADetection);
        log.push(rec(4, confirming(1)));
        log.push(rec(
            5,
            Event::Dismissal(DismissalEvent {
                detection: 2,
                reason: "hand launch".into(),
            }),
        ));
        assert!(pending(&log).is_empty());
        assert_eq!(resolution(&log, 1), Resolution::Confirmed(4));
        assert_eq!(resolution(&log, 2), Resolution::Dismissed(5));
        assert!(pending_warning(&pending(&log)).is_none());
    }

    #[test]
    fn the_same_detection_replayed_is_found() {
        let log = vec![rec(1, Event::Detection(det(7.0, 7.9)))];
        assert_eq!(find_same(&log, &det(7.0004, 7.9004)), Some(1));
        assert_eq!(find_same(&log, &det(7.1, 7.9)), None);
        assert_eq!(find_same(&log, &det(7.0, 8.2)), None);
        let mut other = det(7.0, 7.9);
        other.source = "udp:127.0.0.1:14550".into();
        assert_eq!(find_same(&log, &other), None);
    }

    #[test]
    fn a_detection_round_trips_through_the_file_format_with_null_speed() {
        let r = rec(1, Event::Detection(det(7.02, 7.93)));
        let line = crate::logbook::encode_record(&r).unwrap();
        assert!(line.contains("\"event\":\"detection\""), "{line}");
        assert!(line.contains("\"speed_m_per_s\":null"), "{line}");
        let back = crate::logbook::format::decode_record(line.trim_end().as_bytes()).unwrap();
        assert_eq!(back, r);
        let mut bad = det(1.0, f64::NAN);
        bad.face = "F1".into();
        assert!(
            crate::logbook::encode_record(&rec(1, Event::Detection(bad)))
                .unwrap_err()
                .contains("peak_g")
        );
    }
}
