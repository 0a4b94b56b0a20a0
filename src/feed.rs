//! The live feed: one core piece that turns what a link delivers into the
//! watch state and impact detections, for every consumer alike (the
//! screens, `watch --headless`, `preflight --link`). It knows no terminal,
//! socket or file: the caller hands it [`FeedInput`]s, each stamped with
//! the link clock, and gets a [`Step`] back.
//!
//! Inside: the tracker (src/tracker.rs) for the state, the impact detector
//! (src/impact_detect.rs) for detections. A detection comes out as the
//! body of a `detection` record ([`DetectionEvent`]); the application writes
//! it to the vehicle's log at once ([`crate::logbook::detection`] says how
//! a replay of the same recording is recognised and not written twice).
//! At the end of a finite input the detector is flushed, so a crash in the
//! last moments of a recording is not lost.

use crate::cage::Cage;
use crate::impact_detect::ImpactDetector;
use crate::link::Counters;
use crate::logbook::DetectionEvent;
use crate::profile::Profile;
use crate::sample::Sample;
use crate::tracker::{Tracker, WatchState, WatchStateKind};

/// Acceleration spikes closer together than this are one impact (bounces,
/// ringing). Common practice, no published source: a cage tumbling after a
/// crash hits again within a fraction of a second, and the crew records the
/// crash once.
pub const REFRACTORY_S: f64 = 1.0;

/// What a link delivers, in the feed's own terms (the transports' messages
/// map onto these one to one).
#[derive(Debug, Clone, PartialEq)]
pub enum FeedInput {
    /// A decoded sample that arrived at `at_s` on the link clock.
    Sample {
        /// Link clock, seconds.
        at_s: f64,
        /// The sample.
        sample: Sample,
    },
    /// The decoder's counters so far.
    Counters {
        /// Link clock, seconds.
        at_s: f64,
        /// The counters.
        counters: Counters,
    },
    /// Time passes with nothing else to say.
    Tick {
        /// Link clock, seconds.
        at_s: f64,
    },
    /// Something happened to the link (lost, reopened, a note), in words.
    Note {
        /// Link clock, seconds.
        at_s: f64,
        /// What.
        text: String,
    },
    /// A finite input ended.
    End {
        /// Link clock, seconds.
        at_s: f64,
    },
}

/// A [`FeedInput`] borrowed from where the caller keeps it: a fast link's
/// samples are read where they arrived, not moved through every layer.
#[derive(Debug, Clone, PartialEq)]
pub enum FeedInputRef<'a> {
    /// See [`FeedInput::Sample`].
    Sample {
        /// Link clock, seconds.
        at_s: f64,
        /// The sample.
        sample: &'a Sample,
    },
    /// See [`FeedInput::Counters`].
    Counters {
        /// Link clock, seconds.
        at_s: f64,
        /// The counters.
        counters: Counters,
    },
    /// See [`FeedInput::Tick`].
    Tick {
        /// Link clock, seconds.
        at_s: f64,
    },
    /// See [`FeedInput::Note`].
    Note {
        /// Link clock, seconds.
        at_s: f64,
        /// What.
        text: std::borrow::Cow<'a, str>,
    },
    /// See [`FeedInput::End`].
    End {
        /// Link clock, seconds.
        at_s: f64,
    },
}

impl FeedInput {
    /// The input, borrowed.
    pub fn as_ref(&self) -> FeedInputRef<'_> {
        match self {
            FeedInput::Sample { at_s, sample } => FeedInputRef::Sample {
                at_s: *at_s,
                sample,
            },
            FeedInput::Counters { at_s, counters } => FeedInputRef::Counters {
                at_s: *at_s,
                counters: *counters,
            },
            FeedInput::Tick { at_s } => FeedInputRef::Tick { at_s: *at_s },
            FeedInput::Note { at_s, text } => FeedInputRef::Note {
                at_s: *at_s,
                text: std::borrow::Cow::Borrowed(text),
            },
            FeedInput::End { at_s } => FeedInputRef::End { at_s: *at_s },
        }
    }
}

/// What one input changed.
#[derive(Debug, Clone, PartialEq)]
pub struct Step {
    /// The watch state after the input.
    pub state: WatchState,
    /// The state or the face differs from the previous step's (the first
    /// step counts as a change).
    pub changed: bool,
    /// An impact detected with this input, as the body of the record to
    /// write (its `source` is the link's).
    pub detection: Option<DetectionEvent>,
    /// A link event in words, passed through.
    pub note: Option<String>,
    /// The input has ended; no more steps will follow.
    pub ended: bool,
}

/// What one input changed, without the watch state: [`Feed::advance`]
/// returns it for every sample of a fast link, and the caller builds the
/// state ([`Feed::state`]) only when it shows or prints it.
#[derive(Debug, Clone, PartialEq)]
pub struct Change {
    /// The state or the face differs from the previous input's (the first
    /// input counts as a change).
    pub changed: bool,
    /// An impact detected with this input (see [`Step::detection`]).
    pub detection: Option<DetectionEvent>,
    /// A link event in words, passed through.
    pub note: Option<String>,
    /// The input has ended; no more inputs will follow.
    pub ended: bool,
}

/// Link messages in, watch state and detections out.
#[derive(Debug, Clone)]
pub struct Feed {
    cage: Cage,
    tracker: Tracker,
    detector: ImpactDetector,
    source: String,
    last_key: Option<(WatchStateKind, Option<usize>)>,
    detections: u64,
}

impl Feed {
    /// A feed for the vehicle `profile` describes (its cage built), on the
    /// link named `source`.
    pub fn new(cage: Cage, profile: &Profile, source: &str) -> Feed {
        let detector = ImpactDetector::new(&cage, profile.impact.detect_threshold_g, REFRACTORY_S);
        Feed {
            tracker: Tracker::new(&profile.watch, source),
            detector,
            cage,
            source: source.to_string(),
            last_key: None,
            detections: 0,
        }
    }

    /// Take one input and return the state after it.
    pub fn push(&mut self, input: FeedInput) -> Step {
        let c = self.advance(input);
        Step {
            state: self.state(),
            changed: c.changed,
            detection: c.detection,
            note: c.note,
            ended: c.ended,
        }
    }

    /// Take one input; the state is not built (see [`Change`]).
    pub fn advance(&mut self, input: FeedInput) -> Change {
        self.advance_ref(input.as_ref())
    }

    /// Take one borrowed input (see [`FeedInputRef`]); the state is not
    /// built.
    pub fn advance_ref(&mut self, input: FeedInputRef<'_>) -> Change {
        let mut detection = None;
        let mut note = None;
        let mut ended = false;
        match input {
            FeedInputRef::Sample { at_s, sample } => {
                self.tracker.update(&self.cage, at_s, sample);
                detection = self.detector.push(sample);
            }
            FeedInputRef::Counters { at_s, counters } => {
                self.tracker.tick(at_s);
                self.tracker.set_counters(counters);
            }
            FeedInputRef::Tick { at_s } => self.tracker.tick(at_s),
            FeedInputRef::Note { at_s, text } => {
                self.tracker.tick(at_s);
                note = Some(text.into_owned());
            }
            FeedInputRef::End { at_s } => {
                self.tracker.tick(at_s);
                detection = self.detector.finish();
                ended = true;
            }
        }
        let detection = detection.map(|p| {
            self.detections += 1;
            DetectionEvent::from_proposed(&p, &self.source)
        });
        let key = self.tracker.state_key(&self.cage);
        let changed = self.last_key != Some(key);
        self.last_key = Some(key);
        Change {
            changed,
            detection,
            note,
            ended,
        }
    }

    /// The link clock now, s (as the state's `t`).
    pub fn time_s(&self) -> f64 {
        self.tracker.time_s()
    }

    /// End of watching without an end of input (a time limit, a closed
    /// link): an impact still in progress is reported rather than lost.
    pub fn finish(&mut self) -> Option<DetectionEvent> {
        let p = self.detector.finish()?;
        self.detections += 1;
        Some(DetectionEvent::from_proposed(&p, &self.source))
    }

    /// The link clock now, s, unrounded (see [`Tracker::clock_s`]).
    pub fn clock_s(&self) -> f64 {
        self.tracker.clock_s()
    }

    /// The watch state now.
    pub fn state(&self) -> WatchState {
        self.tracker.state(&self.cage)
    }

    /// The tracker, for what the screens read beyond the state (the latest
    /// rest sample, faces seen, counters).
    pub fn tracker(&self) -> &Tracker {
        &self.tracker
    }

    /// The cage the feed tracks.
    pub fn cage(&self) -> &Cage {
        &self.cage
    }

    /// The link's name.
    pub fn source(&self) -> &str {
        &self.source
    }

    /// Detections yielded so far.
    pub fn detections(&self) -> u64 {
        self.detections
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::logbook::{Access, Event, Logbook, detection};
    use crate::sample::STANDARD_GRAVITY_M_S2;
    use nalgebra::{UnitQuaternion, Vector3};
    use std::time::Duration;

    /// A scripted drop onto the bottom face: 2 s at rest upright, a spike
    /// of `peak_g` over three samples, 3 s at rest again; 50 Hz.
    fn scripted(peak_g: f64) -> Vec<FeedInput> {
        let g0 = STANDARD_GRAVITY_M_S2;
        let mut out = Vec::new();
        for i in 0..250 {
            let t = i as f64 * 0.02;
            // The push is up through the bottom face (-z body when upright).
            let g = match i {
                100 => peak_g * 0.6,
                101 => peak_g,
                102 => peak_g * 0.5,
                _ => 1.0,
            };
            out.push(FeedInput::Sample {
                at_s: t,
                sample: Sample {
                    t_s: t,
                    attitude: Some(UnitQuaternion::identity()),
                    accel_body_m_s2: Some(Vector3::new(0.0, 0.0, -g * g0)),
                    velocity_ned_m_s: Some(Vector3::new(0.0, 0.0, if i < 100 { 2.0 } else { 0.0 })),
                    battery_v: Some(12.1),
                    armed: Some(false),
                },
            });
        }
        out.push(FeedInput::End { at_s: 5.0 });
        out
    }

    fn run(inputs: &[FeedInput]) -> (Vec<DetectionEvent>, Vec<Step>) {
        let p = Profile::demo().unwrap();
        let cage = Cage::from_profile(&p).unwrap();
        let mut feed = Feed::new(cage, &p, "file:crash.rec");
        let steps: Vec<Step> = inputs.iter().map(|i| feed.push(i.clone())).collect();
        let dets = steps.iter().filter_map(|s| s.detection.clone()).collect();
        (dets, steps)
    }

    #[test]
    fn a_peak_becomes_exactly_one_detection() {
        let (dets, steps) = run(&scripted(7.9));
        assert_eq!(dets.len(), 1, "{dets:?}");
        let d = &dets[0];
        // The specific force at the peak is the scripted 7.9 g (|f| / g0).
        approx::assert_relative_eq!(d.peak_g, 7.9, epsilon = 1e-9);
        approx::assert_relative_eq!(d.link_time_s, 2.02, epsilon = 1e-9);
        // Pushed up through the face that is down when upright.
        assert_eq!(d.direction_body, [0.0, 0.0, -1.0]);
        // The demo's faces are numbered from the most level when upright
        // (docs: ids rule in src/cage.rs), so the bottom face is F1.
        assert_eq!(d.face, "F1");
        // The velocity before the event: 2 m/s straight down.
        assert_eq!(d.speed_m_per_s, Some(2.0));
        assert_eq!(d.source, "file:crash.rec");
        assert!(steps.last().unwrap().ended);
        assert!(steps[0].changed);
        // Below the threshold there is none.
        assert!(run(&scripted(3.0)).0.is_empty());
    }

    #[test]
    fn the_quiet_step_agrees_with_the_full_state() {
        // `advance` decides "changed" from the tracker's key, without the
        // state; it must say what comparing whole states says.
        let p = Profile::demo().unwrap();
        let cage = Cage::from_profile(&p).unwrap();
        let mut feed = Feed::new(cage, &p, "file:crash.rec");
        let mut last: Option<(WatchStateKind, Option<String>)> = None;
        let mut changes = 0;
        for input in scripted(7.9) {
            let c = feed.advance(input);
            let st = feed.state();
            let key = (st.state, st.face.clone());
            assert_eq!(c.changed, last.as_ref() != Some(&key), "at t = {}", st.t);
            assert_eq!(feed.time_s(), st.t);
            changes += usize::from(c.changed);
            last = Some(key);
        }
        // The first input, then resting on F1 once the dwell has passed.
        assert!(changes >= 2, "{changes}");
    }

    #[test]
    fn a_crash_at_the_very_end_of_an_input_is_not_lost() {
        let mut inputs = scripted(7.9);
        // Cut the recording right after the spike.
        inputs.truncate(103);
        inputs.push(FeedInput::End { at_s: 2.06 });
        let (dets, _) = run(&inputs);
        assert_eq!(dets.len(), 1);
    }

    #[test]
    fn the_same_replay_twice_gives_one_record() {
        let dir = tempfile::tempdir().unwrap();
        let wait = Duration::from_millis(200);
        for _ in 0..2 {
            let (dets, _) = run(&scripted(7.9));
            let (mut book, _) = Logbook::open(dir.path(), "v1", Access::Write, wait).unwrap();
            for d in dets {
                detection::record(&mut book, "ana", jiff::Timestamp::now(), d).unwrap();
            }
        }
        let (book, _) = Logbook::open(dir.path(), "v1", Access::Read, wait).unwrap();
        let n = book
            .records()
            .iter()
            .filter(|r| matches!(r.event, Event::Detection(_)))
            .count();
        assert_eq!(n, 1);
        assert_eq!(detection::pending(book.records()).len(), 1);
    }
}
