//! Print a geodesic test cage of a level as a profile (TOML), for
//! measuring whole commands on large cages:
//! `cargo run --release --example geodesic -- 3 > /tmp/geodesic-3.toml`.
//!
//! The default layout has a spoke rod from every node to a centre node, so
//! the loader accepts it; `--antipodal` prints the in-code benchmark layout
//! instead, whose rods all cross at the centre (the loader refuses it).

use cagehand::geodesic::{Rods, profile_toml_with};

fn main() -> std::process::ExitCode {
    let mut level = None;
    let mut layout = Rods::Hub;
    for arg in std::env::args().skip(1) {
        match (arg.as_str(), arg.parse::<u32>()) {
            ("--antipodal", _) => layout = Rods::Antipodal,
            ("--hub", _) => layout = Rods::Hub,
            (_, Ok(k)) if k <= 6 && level.is_none() => level = Some(k),
            _ => {
                eprintln!(
                    "argument {arg:?}: expected one subdivision level from 0 to 6, then --hub (default) or --antipodal"
                );
                return std::process::ExitCode::from(2);
            }
        }
    }
    print!("{}", profile_toml_with(level.unwrap_or(1), layout));
    std::process::ExitCode::SUCCESS
}
