//! The command line: what the user typed (clap structs), turned into ready
//! objects (a loaded profile, an opened link) before a command runs.
//! Errors become a message on stderr and an exit code: 2 for bad usage or
//! bad input, 1 for a runtime failure.

use crate::cage::Cage;
use crate::profile::Profile;
use anyhow::Context;
use clap::{Parser, Subcommand};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

mod cage_cmd;
pub mod impact_cmd;
pub mod link_args;
pub mod log_cmd;
pub mod margin_cmd;
mod plan_cmd;
mod profile_cmd;
mod record_cmd;
mod sim_cmd;
mod tui_cmd;
mod watch_cmd;

/// Bad input or usage: the command exits with code 2.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct BadInput(pub String);

/// Wrap a message as bad input (exit code 2).
pub fn bad_input(msg: impl Into<String>) -> anyhow::Error {
    anyhow::Error::new(BadInput(msg.into()))
}

/// Field companion for vehicles in a protective tensegrity or polyhedral cage.
#[derive(Debug, Parser)]
#[command(name = "cagehand", version, about, long_about = None)]
pub struct Cli {
    #[command(subcommand)]
    command: Option<Command>,
}

#[derive(Debug, Subcommand)]
enum Command {
    /// Cage geometry, faces, members and statics report; `cage margin`:
    /// the remaining margin per face.
    Cage(cage_cmd::Args),
    /// Profile tools.
    Profile(profile_cmd::Args),
    /// Analyse an impact on the cage (--dry-run: without recording it).
    Impact(impact_cmd::Args),
    /// Roll plan from a face or attitude to a take-off face.
    Plan(plan_cmd::Args),
    /// Watch the vehicle live (`--headless`: JSON lines).
    Watch(watch_cmd::Args),
    /// Send simulated telemetry to a UDP link.
    Sim(sim_cmd::Args),
    /// Record a link's raw bytes with arrival times.
    Record(record_cmd::Args),
    /// The cage log: records, member health, findings, replacements, reports.
    Log(log_cmd::Args),
}

/// The profile a command works on: a file, or the built-in demo.
#[derive(Debug, Clone, clap::Args)]
pub struct ProfileArg {
    /// Vehicle profile (TOML); the built-in demo profile when omitted.
    #[arg(long, value_name = "FILE")]
    pub profile: Option<PathBuf>,
}

/// A validated profile and the cage built from it.
pub struct Loaded {
    /// The profile.
    pub profile: Profile,
    /// Its cage.
    pub cage: Cage,
}

impl ProfileArg {
    /// Load and validate the profile, and build its cage.
    pub fn load(&self) -> anyhow::Result<Loaded> {
        load_profile(self.profile.as_deref())
    }
}

/// Load a profile file (or the demo) and build its cage; every failure is bad input.
pub fn load_profile(path: Option<&Path>) -> anyhow::Result<Loaded> {
    let (text, name) = match path {
        None => (
            crate::profile::DEMO_PROFILE_TOML.to_string(),
            crate::profile::DEMO_PROFILE_NAME.to_string(),
        ),
        Some(p) => (
            std::fs::read_to_string(p)
                .with_context(|| format!("cannot read profile {}", p.display()))
                .map_err(|e| bad_input(format!("{e:#}")))?,
            p.display().to_string(),
        ),
    };
    let profile = Profile::parse(&text, &name).map_err(|e| bad_input(e.to_string()))?;
    let cage =
        Cage::from_profile(&profile).map_err(|e| bad_input(format!("{}: {e}", profile.source)))?;
    // Take-off face ids can only be checked once the hull has numbered the
    // faces; point at the key all the same.
    if let Err(e) = cage.takeoff_faces(&profile.righting.takeoff_faces) {
        let (line, column) =
            crate::profile::locate_key(&text, "righting", "takeoff_faces").unwrap_or((1, 1));
        return Err(bad_input(format!("{name}:{line}:{column}: {e}")));
    }
    Ok(Loaded { profile, cage })
}

/// `--duration-s`, when given, must be a positive number of seconds.
pub fn check_duration_s(duration_s: Option<f64>) -> anyhow::Result<()> {
    match duration_s {
        Some(d) if !(d.is_finite() && d > 0.0) => Err(bad_input(format!(
            "--duration-s {d}: expected a positive number of seconds"
        ))),
        _ => Ok(()),
    }
}

/// Print a value as pretty JSON on stdout.
pub fn print_json(value: &impl serde::Serialize) -> anyhow::Result<()> {
    use std::io::Write;
    let mut out = std::io::stdout().lock();
    serde_json::to_writer_pretty(&mut out, value)?;
    writeln!(out)?;
    Ok(())
}

/// Parse arguments, run the command, and map errors to exit codes.
pub fn main() -> ExitCode {
    let cli = match Cli::try_parse() {
        Ok(c) => c,
        Err(e) => {
            let code = if e.use_stderr() { 2 } else { 0 };
            let _ = e.print();
            return ExitCode::from(code);
        }
    };
    match run(cli) {
        Ok(code) => code,
        Err(e) if is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("cagehand: {e:#}");
            if e.downcast_ref::<BadInput>().is_some() {
                ExitCode::from(2)
            } else {
                ExitCode::from(1)
            }
        }
    }
}

/// A reader that closed our stdout early (`| head`) is not a failure.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    match cli.command {
        None => tui_cmd::run(
            load_profile(None)?,
            &link_args::LinkArgs::default_sim(),
            &log_cmd::LogOpts::default(),
        ),
        Some(Command::Cage(a)) => cage_cmd::run(&a),
        Some(Command::Profile(a)) => profile_cmd::run(&a),
        Some(Command::Log(a)) => log_cmd::run(&a),
        Some(Command::Impact(a)) => impact_cmd::run(&a),
        Some(Command::Plan(a)) => plan_cmd::run(&a),
        Some(Command::Watch(a)) => watch_cmd::run(&a),
        Some(Command::Sim(a)) => sim_cmd::run(&a),
        Some(Command::Record(a)) => record_cmd::run(&a),
    }
}
