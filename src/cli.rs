//! The command line: what the user typed (clap structs), turned into ready
//! objects (a loaded profile, an opened link) before a command runs.
//! Errors become a message on stderr and an exit code: 2 for bad usage or
//! bad input, 1 for a runtime failure.

use anyhow::Context;
use clap::{Parser, Subcommand};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// `eprintln!` that cannot panic: when standard error is closed (a script
/// that closed the pipe, `2>&-`), the message is lost, not the exit status
/// of a command that may already have written its record.
macro_rules! say_err {
    ($($arg:tt)*) => {{
        use std::io::Write as _;
        let _ = writeln!(std::io::stderr(), $($arg)*);
    }};
}

mod cage_cmd;
pub mod impact_cmd;
pub mod link_args;
pub mod live;
pub mod log_cmd;
pub mod margin_cmd;
mod plan_cmd;
mod preflight_cmd;
mod profile_cmd;
mod progress;
mod record_cmd;
mod rotor_out;
mod sim_cmd;
mod tui_cmd;
mod watch_cmd;

/// Bad input or usage: the command exits with code 2.
#[derive(Debug, thiserror::Error)]
#[error("{0}")]
pub struct BadInput(pub String);

/// Refuse a `--surface` the profile does not define, naming the valid ones.
pub fn check_surface_arg(
    settings: &cagehand::profile::ImpactSettings,
    surface: Option<&str>,
) -> anyhow::Result<()> {
    match surface {
        Some(name) if !settings.surface_names().contains(&name) => Err(bad_input(format!(
            "--surface {name}: not a surface of this profile; valid surfaces are {}",
            settings.surface_names().join(", ")
        ))),
        _ => Ok(()),
    }
}

/// Wrap a message as bad input (exit code 2).
pub fn bad_input(msg: impl Into<String>) -> anyhow::Error {
    anyhow::Error::new(BadInput(msg.into()))
}

/// Field companion for vehicles in a protective tensegrity or polyhedral cage.
#[derive(Debug, Parser)]
#[command(name = "cagehand", version, about, long_about = None)]
pub struct Cli {
    /// Colour on the screens: auto (honours NO_COLOR and whether the output
    /// is a terminal), always, or never.
    #[arg(long, value_enum, default_value_t = ColorChoice::Auto, global = true)]
    color: ColorChoice,
    #[command(subcommand)]
    command: Option<Command>,
}

pub use crate::tui::theme::ColorChoice;

/// The `--color` choice of this run, set once in `main`.
static COLOR_CHOICE: std::sync::OnceLock<ColorChoice> = std::sync::OnceLock::new();

/// The `--color` choice of this run (auto before arguments are parsed).
pub fn color_choice() -> ColorChoice {
    COLOR_CHOICE.get().copied().unwrap_or(ColorChoice::Auto)
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
    /// The pre-flight checklist: evaluate it, or sign it off (`preflight sign`).
    Preflight(preflight_cmd::Args),
    /// Print a shell completion script (bash, zsh, fish, elvish, powershell).
    Completions(CompletionsArgs),
    /// Print the manual page (roff) on stdout: `cagehand manual | man -l -`.
    Manual,
}

/// `cagehand completions SHELL`.
#[derive(Debug, clap::Args)]
struct CompletionsArgs {
    /// The shell to complete for.
    #[arg(value_enum)]
    shell: clap_complete::Shell,
}

/// The profile a command works on: a file, or the built-in demo.
#[derive(Debug, Clone, clap::Args)]
pub struct ProfileArg {
    /// Vehicle profile (TOML); the built-in demo profile when omitted.
    #[arg(long, value_name = "FILE")]
    pub profile: Option<PathBuf>,
}

use cagehand::profile::Profile;
pub use cagehand::vehicle::Loaded;
use cagehand::vehicle::{Built, LoadError};

impl ProfileArg {
    /// Load and validate the profile, and build its cage.
    pub fn load(&self) -> anyhow::Result<Loaded> {
        load_profile(self.profile.as_deref())
    }

    /// [`ProfileArg::load`], doing `work` on the built cage on one core
    /// while the statics are worked out on another. A profile the statics
    /// refuse is refused as by `load`, whatever `work` gave.
    pub fn load_with<T: Send>(
        &self,
        work: impl FnOnce(&Built) -> T + Send,
    ) -> anyhow::Result<(Loaded, T)> {
        let built = Built::new(read_profile(self.profile.as_deref())?).map_err(refusal)?;
        let (statics, done) = rayon::join(|| built.statics(), || work(&built));
        let statics = statics.map_err(refusal)?;
        Ok((built.finish(statics), done))
    }
}

/// Load a profile file (or the demo) through the core's validated loader;
/// a refused profile is bad input (exit 2).
pub fn load_profile(path: Option<&Path>) -> anyhow::Result<Loaded> {
    Loaded::new(read_profile(path)?).map_err(refusal)
}

/// Read and parse a profile file (or the demo's); a file that cannot be
/// read, or is not a valid profile, is bad input.
fn read_profile(path: Option<&Path>) -> anyhow::Result<Profile> {
    let parsed = match path {
        None => Profile::demo(),
        Some(p) => {
            let bytes = std::fs::read(p)
                .with_context(|| format!("cannot read profile {}", p.display()))
                .map_err(|e| bad_input(format!("{e:#}")))?;
            Profile::parse_bytes(&bytes, &p.display().to_string())
        }
    };
    parsed.map_err(|e| refusal(LoadError::from(e)))
}

/// A refused profile is bad input (exit 2); statics that did not finish
/// are not the file's fault.
fn refusal(e: LoadError) -> anyhow::Error {
    match e {
        LoadError::Profile(_) => bad_input(e.to_string()),
        LoadError::Statics { .. } => anyhow::Error::new(e),
    }
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
    let _ = COLOR_CHOICE.set(cli.color);
    match run(cli) {
        Ok(code) => code,
        Err(e) if is_broken_pipe(&e) => ExitCode::SUCCESS,
        Err(e) => {
            // Errors quote files and arguments: escaped, lines kept.
            say_err!(
                "cagehand: {}",
                cagehand::text::terminal_lines(&format!("{e:#}"))
            );
            if e.downcast_ref::<BadInput>().is_some() {
                ExitCode::from(2)
            } else {
                ExitCode::from(1)
            }
        }
    }
}

/// Print `value` as pretty JSON and a newline, streamed through a buffer
/// (a recovery map of a large cage is over 100 MB: no copy of it is held
/// as one string). Write errors stay `std::io::Error`s, so a closed
/// stdout is still recognised.
pub fn write_json<T: serde::Serialize>(out: impl std::io::Write, value: &T) -> anyhow::Result<()> {
    use std::io::Write as _;
    let mut w = std::io::BufWriter::with_capacity(1 << 16, out);
    serde_json::to_writer_pretty(&mut w, value).map_err(std::io::Error::from)?;
    writeln!(w)?;
    w.flush()?;
    Ok(())
}

/// A reader that closed our stdout early (`| head`) is not a failure.
fn is_broken_pipe(e: &anyhow::Error) -> bool {
    e.chain().any(|c| {
        c.downcast_ref::<std::io::Error>()
            .is_some_and(|io| io.kind() == std::io::ErrorKind::BrokenPipe)
    })
}

fn run(cli: Cli) -> anyhow::Result<ExitCode> {
    log_cmd::lock_wait_from_env()?;
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
        Some(Command::Preflight(a)) => preflight_cmd::run(&a),
        Some(Command::Completions(a)) => {
            use clap::CommandFactory;
            let mut cmd = Cli::command();
            // Generated into memory first: the generator panics on a
            // write error, and a closed stdout (`| head`) is no failure.
            let mut script = Vec::new();
            clap_complete::generate(a.shell, &mut cmd, "cagehand", &mut script);
            use std::io::Write as _;
            std::io::stdout().lock().write_all(&script)?;
            Ok(ExitCode::SUCCESS)
        }
        Some(Command::Manual) => {
            use clap::CommandFactory;
            let mut out = std::io::stdout().lock();
            clap_mangen::Man::new(Cli::command()).render(&mut out)?;
            Ok(ExitCode::SUCCESS)
        }
    }
}
