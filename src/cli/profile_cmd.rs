//! `cagehand profile check FILE`: validate a profile and summarise it.

use super::load_profile;
use cagehand::cage::MemberKind;
use std::io::Write;
use std::path::PathBuf;
use std::process::ExitCode;

/// Profile tools.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(subcommand)]
    action: Action,
}

#[derive(Debug, clap::Subcommand)]
enum Action {
    /// Validate a profile and print a summary.
    Check {
        /// Profile file (TOML).
        file: PathBuf,
        /// Print the summary as JSON.
        #[arg(long)]
        json: bool,
    },
}

/// Run the profile command.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let mut out = std::io::stdout().lock();
    match &args.action {
        Action::Check { file, json } => {
            let l = load_profile(Some(file))?;
            let (p, c) = (&l.profile, &l.cage);
            let strings = c
                .members
                .iter()
                .filter(|m| m.kind == MemberKind::String)
                .count();
            let stable = c.faces.iter().filter(|f| f.stable).count();
            if *json {
                super::print_json(&serde_json::json!({
                    "schema": "cagehand.profile-check/1",
                    "ok": true,
                    "file": p.source,
                    "vehicle": {"id": p.vehicle.id, "name": p.vehicle.name, "mass_kg": p.vehicle.mass_kg},
                    "nodes": c.nodes.len(),
                    "rods": c.rod_count(),
                    "strings": strings,
                    "faces": c.faces.len(),
                    "stable_faces": stable,
                    "rotors": p.rotors.len(),
                    "preflight_items": p.preflight.items.len(),
                }))?;
            } else {
                let t = cagehand::text::terminal;
                writeln!(out, "{}: ok", t(&p.source))?;
                writeln!(
                    out,
                    "  vehicle   {} ({}), {:.3} kg",
                    t(&p.vehicle.id),
                    t(&p.vehicle.name),
                    p.vehicle.mass_kg
                )?;
                writeln!(
                    out,
                    "  cage      {} nodes, {} rods, {} strings, {} faces ({} the vehicle can rest on)",
                    c.nodes.len(),
                    c.rod_count(),
                    strings,
                    c.faces.len(),
                    stable
                )?;
                writeln!(out, "  rotors    {}", p.rotors.len())?;
                writeln!(out, "  preflight {} items", p.preflight.items.len())?;
            }
            Ok(ExitCode::SUCCESS)
        }
    }
}
