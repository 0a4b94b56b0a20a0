//! The transports' messages in the live feed's terms: the one place the
//! edge (link readers) meets the core feed, shared by the screens, the
//! headless watch and `preflight --link`.

use crate::transport::{LinkEvent, LinkMsg, LinkRx};
use cagehand::feed::{Feed, FeedInput, FeedInputRef, Step};
use std::borrow::Cow;

/// Messages taken into one step at the most, so a consumer that is far
/// behind still shows progress.
const MOST_PER_STEP: usize = 4096;

/// The next step of the feed for a consumer that shows the state rather
/// than printing every change (the screens): waits for one message, then
/// takes every message already waiting into the same step and builds the
/// state once. A message that brings a detection, a note or the end ends
/// the step at once, so none of those is merged away; `changed` says
/// whether any message of the step changed the state or face. None when
/// the link has ended and everything was taken.
pub fn next_step(rx: &mut LinkRx, feed: &mut Feed) -> Option<Step> {
    let mut msg = rx.recv().ok()?;
    let mut changed = false;
    for _ in 0..MOST_PER_STEP {
        let c = feed.advance(feed_input(msg));
        changed |= c.changed;
        if c.detection.is_some() || c.note.is_some() || c.ended {
            return Some(Step {
                state: feed.state(),
                changed,
                detection: c.detection,
                note: c.note,
                ended: c.ended,
            });
        }
        match rx.try_recv() {
            Ok(m) => msg = m,
            Err(_) => break,
        }
    }
    Some(Step {
        state: feed.state(),
        changed,
        detection: None,
        note: None,
        ended: false,
    })
}

/// A reader's message as a borrowed feed input (the sample read where
/// the reader's batch holds it).
pub fn feed_input_ref(msg: &LinkMsg) -> FeedInputRef<'_> {
    match msg {
        LinkMsg::Sample { at_s, sample } => FeedInputRef::Sample {
            at_s: *at_s,
            sample,
        },
        LinkMsg::Health { at_s, counters } => FeedInputRef::Counters {
            at_s: *at_s,
            counters: *counters,
        },
        LinkMsg::Tick { at_s } | LinkMsg::Bytes { at_s, .. } => FeedInputRef::Tick { at_s: *at_s },
        LinkMsg::Event { at_s, event } => FeedInputRef::Note {
            at_s: *at_s,
            text: match event {
                LinkEvent::Lost(s) => Cow::Owned(format!("link lost: {s}")),
                LinkEvent::Note(s) => Cow::Borrowed(s.as_str()),
                LinkEvent::Reopened => Cow::Borrowed("link reopened"),
            },
        },
        LinkMsg::End { at_s } => FeedInputRef::End { at_s: *at_s },
    }
}

/// A reader's message as a feed input.
pub fn feed_input(msg: LinkMsg) -> FeedInput {
    match msg {
        LinkMsg::Sample { at_s, sample } => FeedInput::Sample { at_s, sample },
        LinkMsg::Health { at_s, counters } => FeedInput::Counters { at_s, counters },
        LinkMsg::Tick { at_s } | LinkMsg::Bytes { at_s, .. } => FeedInput::Tick { at_s },
        LinkMsg::Event { at_s, event } => FeedInput::Note {
            at_s,
            text: match event {
                LinkEvent::Lost(s) => format!("link lost: {s}"),
                LinkEvent::Note(s) => s,
                LinkEvent::Reopened => "link reopened".to_string(),
            },
        },
        LinkMsg::End { at_s } => FeedInput::End { at_s },
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::transport::Parcel;
    use cagehand::cage::Cage;
    use cagehand::profile::Profile;
    use cagehand::sample::{STANDARD_GRAVITY_M_S2, Sample};
    use nalgebra::{UnitQuaternion, Vector3};

    /// A drop onto the bottom face at 50 Hz with a 7.9 g spike at 2.02 s
    /// (above the demo's detection threshold), as link messages.
    fn drop_messages() -> Vec<LinkMsg> {
        (0..250)
            .map(|i| {
                let t = i as f64 * 0.02;
                let g = if i == 101 { 7.9 } else { 1.0 };
                LinkMsg::Sample {
                    at_s: t,
                    sample: Sample {
                        t_s: t,
                        attitude: Some(UnitQuaternion::identity()),
                        accel_body_m_s2: Some(Vector3::new(0.0, 0.0, -g * STANDARD_GRAVITY_M_S2)),
                        velocity_ned_m_s: None,
                        battery_v: Some(12.0),
                        armed: Some(false),
                    },
                }
            })
            .collect()
    }

    #[test]
    fn a_step_takes_what_waits_but_never_merges_a_detection_or_the_end() {
        let p = Profile::demo().expect("demo");
        let cage = Cage::from_profile(&p).expect("cage");
        // The same messages through a plain feed, one step each.
        let mut plain = Feed::new(cage.clone(), &p, "test");
        let mut plain_detections = 0;
        for m in drop_messages() {
            plain_detections += usize::from(plain.push(feed_input(m)).detection.is_some());
        }
        let end = plain.push(FeedInput::End { at_s: 5.0 });
        plain_detections += usize::from(end.detection.is_some());
        assert_eq!(plain_detections, 1);

        // All of it waiting at once, in batches of 50.
        let (tx, rx) = std::sync::mpsc::sync_channel(64);
        let mut msgs = drop_messages();
        msgs.push(LinkMsg::End { at_s: 5.0 });
        for chunk in msgs.chunks(50) {
            tx.send(chunk.iter().cloned().map(Parcel::pack).collect())
                .expect("send");
        }
        drop(tx);
        let mut rx = LinkRx::new(rx);
        let mut feed = Feed::new(cage, &p, "test");
        let mut steps = Vec::new();
        while let Some(s) = next_step(&mut rx, &mut feed) {
            steps.push(s);
        }
        // Far fewer steps than messages, one detection, the end last.
        assert!(steps.len() < 10, "{} steps", steps.len());
        assert_eq!(steps.iter().filter(|s| s.detection.is_some()).count(), 1);
        let last = steps.last().expect("steps");
        assert!(last.ended);
        assert_eq!(last.state, end.state);
        assert!(steps[0].changed);
    }
}
