//! `cagehand cage margin`: the remaining margin of the cage as the log says
//! it is now: per face, the impact speed at which the first member reaches
//! its capacity (see `cagehand::margin`). Its JSON is a contract
//! (`cagehand.margin/1`, docs/json.md).

use super::log_cmd::{LogOpts, trust_note};
use super::{Loaded, ProfileArg, bad_input};
use cagehand::logbook::Access;
use cagehand::margin::{CageCondition, Limit, MarginTable, StrikeMargin, Strikes, margin_table};
use cagehand::statics::StaticsError;
use serde::Serialize;
use std::io::Write;
use std::process::ExitCode;

/// The remaining margin, face by face.
#[derive(Debug, clap::Args)]
pub struct Args {
    /// The vehicle profile.
    #[command(flatten)]
    pub profile: ProfileArg,
    /// Ground surface preset (the profile's impact.surface names); the
    /// profile's default surface when omitted.
    #[arg(long, value_name = "NAME")]
    pub surface: Option<String>,
    /// Also every node struck alone (the JSON gains a `nodes` list).
    #[arg(long)]
    pub nodes: bool,
    /// Where the log is.
    #[command(flatten)]
    pub log: LogOpts,
    /// Print JSON instead of the readable table.
    #[arg(long)]
    pub json: bool,
}

#[derive(Debug, Serialize)]
struct FaceJson<'a> {
    face: &'a str,
    speed_m_per_s: f64,
    peak_g: f64,
    first_member: Option<&'a str>,
}

#[derive(Debug, Serialize)]
struct NodeJson<'a> {
    node: &'a str,
    speed_m_per_s: f64,
    peak_g: f64,
    first_member: Option<&'a str>,
}

#[derive(Debug, Serialize)]
struct WeakestJson<'a> {
    face: &'a str,
    speed_m_per_s: f64,
}

#[derive(Debug, Serialize)]
struct Report<'a> {
    schema: &'static str,
    surface: &'a str,
    grounded: bool,
    grounded_by: &'a [String],
    faces: Vec<FaceJson<'a>>,
    weakest: Option<WeakestJson<'a>>,
    #[serde(skip_serializing_if = "Option::is_none")]
    nodes: Option<Vec<NodeJson<'a>>>,
}

fn report(t: &MarginTable, with_nodes: bool) -> Report<'_> {
    Report {
        schema: "cagehand.margin/1",
        surface: &t.surface,
        grounded: t.grounded(),
        grounded_by: &t.grounded_by,
        faces: t
            .faces
            .iter()
            .map(|m| FaceJson {
                face: &m.id,
                speed_m_per_s: m.failure.speed_m_per_s,
                peak_g: m.failure.peak_g,
                first_member: m.first_member.as_deref(),
            })
            .collect(),
        weakest: t.weakest_face().map(|m| WeakestJson {
            face: &m.id,
            speed_m_per_s: m.failure.speed_m_per_s,
        }),
        nodes: with_nodes.then(|| {
            t.nodes
                .iter()
                .map(|m| NodeJson {
                    node: &m.id,
                    speed_m_per_s: m.failure.speed_m_per_s,
                    peak_g: m.failure.peak_g,
                    first_member: m.first_member.as_deref(),
                })
                .collect()
        }),
    }
}

/// Why a row has no member, in a few words.
fn limit_words(limit: Limit) -> &'static str {
    match limit {
        Limit::Member => "",
        Limit::NoEquilibrium => "no equilibrium beyond this (may collapse)",
        Limit::NotReached => "no member reached capacity in the walk",
        Limit::Grounded => "a member counts as failed",
    }
}

fn write_rows(out: &mut impl Write, what: &str, rows: &[StrikeMargin]) -> anyhow::Result<()> {
    writeln!(out, "{what:<5} speed(m/s)  peak(g)  first to fail")?;
    for m in rows {
        let who = m.first_member.as_deref().unwrap_or("-");
        let why = limit_words(m.failure.limit);
        writeln!(
            out,
            "{:<5} {:>10.2}  {:>7.0}  {who}{}{why}",
            m.id,
            m.failure.speed_m_per_s,
            m.failure.peak_g,
            if why.is_empty() { "" } else { "  " }
        )?;
    }
    Ok(())
}

/// Compute the margin table of a loaded profile from its log's records:
/// statics input errors are bad input, a failed solution a runtime failure.
pub fn compute(
    l: &Loaded,
    records: &[cagehand::logbook::Record],
    surface: Option<&str>,
    strikes: Strikes,
) -> anyhow::Result<MarginTable> {
    let condition = CageCondition::from_log(records, &l.cage, &l.profile.inspection);
    margin_table(&l.cage, &l.profile, &condition, surface, strikes).map_err(|e| match e {
        StaticsError::UnknownSurface { .. } => bad_input(format!("--surface: {e}")),
        other => anyhow::Error::new(other).context("remaining margin could not be computed"),
    })
}

/// Run `cagehand cage margin`; `parent` is the `cage` command's profile,
/// used when none is given after `margin`.
pub fn run(args: &Args, parent: &ProfileArg) -> anyhow::Result<ExitCode> {
    let l = match &args.profile.profile {
        Some(_) => args.profile.load()?,
        None => parent.load()?,
    };
    super::check_surface_arg(&l.profile.impact, args.surface.as_deref())?;
    let (book, open) = args.log.open_reporting(&l, Access::Read)?;
    if let Some(n) = trust_note(&open, &book) {
        say_err!("cagehand: warning: {n}");
    }
    // A pending detection is a crash the margin does not include yet: say
    // so on every output (stderr for JSON, the table too).
    let pending = cagehand::logbook::detection::pending_warning(
        &cagehand::logbook::detection::pending(book.records()),
    );
    if let Some(w) = &pending {
        say_err!("cagehand: warning: {w} (the margin below does not include it)");
    }
    let strikes = if args.nodes {
        Strikes::FacesAndNodes
    } else {
        Strikes::Faces
    };
    let t = compute(&l, book.records(), args.surface.as_deref(), strikes)?;
    let r = report(&t, args.nodes);
    let mut out = std::io::stdout().lock();
    if args.json {
        super::write_json(&mut out, &r)?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(
        out,
        "remaining margin of {} on {} ({:.0} N/m), from {} log records",
        l.profile.vehicle.id,
        t.surface,
        t.surface_n_per_m,
        book.records().len()
    )?;
    writeln!(
        out,
        "the impact speed at which the first member reaches its capacity"
    )?;
    if let Some(w) = &pending {
        writeln!(out, "WARNING: {w}: the margin below does not include it")?;
    }
    if t.grounded() {
        writeln!(
            out,
            "GROUNDED: {} at REPLACE NOW count{} as failed; do not fly until replaced",
            t.grounded_by.join(", "),
            if t.grounded_by.len() == 1 { "s" } else { "" }
        )?;
    }
    for d in &t.derated {
        writeln!(
            out,
            "{} counted at {:.0}% of its capacity (open findings)",
            d.id,
            d.factor * 100.0
        )?;
    }
    writeln!(out)?;
    write_rows(&mut out, "face", &t.faces)?;
    if args.nodes {
        writeln!(out)?;
        write_rows(&mut out, "node", &t.nodes)?;
    }
    if let Some(w) = &r.weakest {
        writeln!(out)?;
        writeln!(out, "weakest: {} at {:.2} m/s", w.face, w.speed_m_per_s)?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "Not captured: fatigue beyond Miner's sum, hidden composite damage,"
    )?;
    writeln!(out, "joints and end fittings.")?;
    for line in cagehand::caution::CAUTION_LINES {
        writeln!(out, "{line}")?;
    }
    Ok(ExitCode::SUCCESS)
}
