//! The transports' messages in the live feed's terms: the one place the
//! edge (link readers) meets the core feed, shared by the screens, the
//! headless watch and `preflight --link`.

use crate::transport::{LinkEvent, LinkMsg};
use cagehand::feed::FeedInput;

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
