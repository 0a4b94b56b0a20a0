//! cagehand: a field companion for vehicles inside a tensegrity or convex
//! polyhedral protective cage. This library is the core: no terminal, no
//! command line, no sockets or serial ports, and no files opened behind the
//! caller's back (the log store, `logbook::store`, is the one documented
//! exception: it opens the log file the caller names). The command line, the
//! screens and the link transports are the application, in the binary
//! (`src/main.rs`); `tests/boundary.rs` keeps the line.

#![deny(missing_docs)]

pub mod attitude;
pub mod cage;
pub mod caution;
pub mod feed;
pub mod geodesic;
pub mod health;
pub mod hull;
pub mod impact;
pub mod impact_detect;
pub mod link;
pub mod logbook;
pub mod logwork;
pub mod margin;
pub mod net;
pub mod preflight;
pub mod profile;
pub mod report;
pub mod rest;
pub mod righting;
pub mod sample;
pub mod sim;
pub mod statics;
pub mod text;
pub mod tracker;
pub mod vehicle;
