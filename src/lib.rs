//! cagehand: a field companion for vehicles inside a tensegrity or convex
//! polyhedral protective cage. The library is the core: no terminal, no
//! sockets, no files opened behind the caller's back (`link` and `tui` sit
//! at the edge and say so).

#![deny(missing_docs)]

pub mod attitude;
pub mod cage;
pub mod caution;
pub mod cli;
pub mod feed;
pub mod health;
pub mod hull;
pub mod impact;
pub mod impact_detect;
pub mod link;
pub mod logbook;
pub mod margin;
pub mod net;
pub mod preflight;
pub mod profile;
pub mod rest;
pub mod righting;
pub mod sample;
pub mod sim;
pub mod statics;
pub mod tracker;
pub mod tui;
pub mod vehicle;
