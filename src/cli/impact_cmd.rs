//! `cagehand impact`: analyse an impact on the cage (the peak force, the
//! force and utilisation of every member) and record it in the cage log
//! (unless `--dry-run`), with the member status changes it causes.

use super::log_cmd::{self, LogOpts};
use super::{Loaded, ProfileArg, bad_input};
use cagehand::cage::MemberKind;
use cagehand::health::StatusChange;
use cagehand::impact::{
    CageStatics, ImpactAnalysis, ImpactInput, ImpactMethod, Strike, analyse_impact_on,
};
use cagehand::logbook::{Access, ImpactEvent, ImpactSource, StrikeRef};
use cagehand::statics::StaticsError;
use serde::Serialize;
use std::io::Write;
use std::process::ExitCode;

/// Members shown in the readable table.
const TABLE_ROWS: usize = 12;

/// Analyse (and, later, record) an impact.
#[derive(Debug, clap::Args)]
#[command(group(clap::ArgGroup::new("where").required(true).args(["face", "node"])))]
#[command(group(clap::ArgGroup::new("how").required(true).args(["speed", "peak_accel_g"])))]
pub struct Args {
    /// The vehicle profile.
    #[command(flatten)]
    pub profile: ProfileArg,
    /// Struck face id (F1..).
    #[arg(long, value_name = "ID")]
    pub face: Option<String>,
    /// Struck node id (N1..), instead of a face.
    #[arg(long, value_name = "ID")]
    pub node: Option<String>,
    /// Approach speed normal to the ground.
    #[arg(long, value_name = "M_PER_S", allow_negative_numbers = true)]
    pub speed: Option<f64>,
    /// Measured peak acceleration, in g.
    #[arg(long, value_name = "G", allow_negative_numbers = true)]
    pub peak_accel_g: Option<f64>,
    /// Ground surface preset (the profile's impact.surface names).
    #[arg(long, value_name = "NAME", conflicts_with = "peak_accel_g")]
    pub surface: Option<String>,
    /// Contact duration for the half-sine estimate (with --speed; takes
    /// precedence over --surface).
    #[arg(
        long,
        value_name = "S",
        allow_negative_numbers = true,
        conflicts_with = "peak_accel_g"
    )]
    pub contact_duration_s: Option<f64>,
    /// Analyse only; do not record the impact in the cage log.
    #[arg(long)]
    pub dry_run: bool,
    /// Free text stored with the impact.
    #[arg(long, value_name = "TEXT")]
    pub note: Option<String>,
    /// Where the log is and who records.
    #[command(flatten)]
    pub log: LogOpts,
    /// Print JSON instead of the readable report.
    #[arg(long)]
    pub json: bool,
}

/// The strike and the estimate inputs, resolved against the profile and cage.
pub struct Resolved {
    /// Where the cage was struck.
    pub strike: Strike,
    /// Id of the struck face or node.
    pub strike_id: String,
    /// The estimate inputs.
    pub input: ImpactInput,
}

/// Turn the typed arguments into a strike and an input, or bad input
/// naming the valid values.
pub fn resolve(args: &Args, l: &Loaded) -> anyhow::Result<Resolved> {
    let cage = &l.cage;
    let (strike, strike_id) = match (&args.face, &args.node) {
        (Some(id), _) => {
            let i = cage.face_named(id).ok_or_else(|| {
                bad_input(format!(
                    "--face {id}: not a face of this cage; valid faces are F1..F{}",
                    cage.faces.len()
                ))
            })?;
            (Strike::Face(i), cage.faces[i].id.clone())
        }
        (None, Some(id)) => {
            let i = cage.node_named(id).ok_or_else(|| {
                let ids: Vec<&str> = cage.nodes.iter().map(|n| n.id.as_str()).collect();
                bad_input(format!(
                    "--node {id}: not a node of this cage; valid nodes are {}",
                    ids.join(", ")
                ))
            })?;
            (Strike::Node(i), cage.nodes[i].id.clone())
        }
        (None, None) => {
            return Err(bad_input(
                "give the struck face (--face ID) or node (--node ID)",
            ));
        }
    };
    let settings = &l.profile.impact;
    super::check_surface_arg(settings, args.surface.as_deref())?;
    let input = match (args.peak_accel_g, args.speed) {
        (Some(g), _) => ImpactInput::PeakAccel { g },
        (None, Some(v)) => match (
            args.contact_duration_s,
            &args.surface,
            settings.contact_duration_s,
        ) {
            (Some(dt), _, _) | (None, None, Some(dt)) => ImpactInput::SpeedAndDuration {
                speed_m_per_s: v,
                duration_s: dt,
            },
            _ => ImpactInput::Speed {
                speed_m_per_s: v,
                surface: args.surface.clone(),
            },
        },
        (None, None) => {
            return Err(bad_input("give --speed M_PER_S or --peak-accel-g G"));
        }
    };
    Ok(Resolved {
        strike,
        strike_id,
        input,
    })
}

/// Run the analysis on the cage's statics (worked out once by the caller);
/// input errors become bad input, a failed solution a runtime failure.
pub fn analyse(l: &Loaded, statics: &CageStatics, r: &Resolved) -> anyhow::Result<ImpactAnalysis> {
    let large = super::progress::Large::new(&l.cage);
    let mut progress = |done: usize, total: usize| large.step("load path", done, total);
    analyse_impact_on(&l.cage, &l.profile, statics, r.strike, &r.input, &mut progress).map_err(|e| match e {
        StaticsError::NoEquilibrium { load, reached, .. } => anyhow::Error::new(e.clone()).context(
            format!(
                "impact analysis failed: the cage held up to a contact force of {reached:.0} N but not {load:.0} N; it may have collapsed: inspect it physically before anything else"
            ),
        ),
        StaticsError::UnknownFace { .. }
        | StaticsError::UnknownNode { .. }
        | StaticsError::UnknownSurface { .. }
        | StaticsError::NotPositive { .. }
        | StaticsError::LoadSize { .. } => bad_input(e.to_string()),
        other => {
            // Say plainly when the cage carries no prestress: that is the
            // usual reason a tensegrity finds no equilibrium.
            let ss = &statics.self_stress;
            let why = if ss.prestress_ok {
                String::new()
            } else {
                format!(" ({})", ss.message)
            };
            anyhow::Error::new(other).context(format!("impact analysis failed{why}"))
        }
    })
}

#[derive(Debug, Serialize)]
struct MemberJson<'a> {
    id: &'a str,
    kind: MemberKind,
    force_n: f64,
    capacity_n: f64,
    utilisation: f64,
}

/// The schema of `impact --json` (and of `log confirm --json`, which adds
/// to it): docs/json.md.
pub const IMPACT_SCHEMA: &str = "cagehand.impact/1";

#[derive(Debug, Serialize)]
struct Report<'a> {
    schema: &'static str,
    vehicle: &'a str,
    strike: &'a str,
    /// False: the cage found an equilibrium and the figures below hold.
    beyond_model: bool,
    force_n: f64,
    method: ImpactMethod,
    input: &'a ImpactInput,
    residual_n: f64,
    face_displacement_m: f64,
    slack_strings: Vec<&'a str>,
    iterations: usize,
    prestress_ok: bool,
    members: Vec<MemberJson<'a>>,
    recorded: bool,
    /// Sequence number of the log record, when recorded.
    record_seq: Option<u64>,
    /// The detection this impact confirms (`log confirm`), else null.
    detection: Option<u64>,
    /// The cage log written to; null for a dry run.
    log: Option<String>,
    /// Members whose status the impact changed, when recorded.
    status_changes: Vec<StatusChange>,
}

fn method_text(m: ImpactMethod) -> &'static str {
    match m {
        ImpactMethod::MeasuredAcceleration => "measured peak acceleration, F = m a",
        ImpactMethod::EnergyBalance => {
            "energy balance along the cage's load-deflection path with the surface"
        }
        ImpactMethod::HalfSinePulse => "impulse over the contact duration, half-sine peak",
    }
}

/// Record an impact the cage found no equilibrium for, and say so loudly.
#[allow(clippy::too_many_arguments)]
fn record_beyond_model(
    args: &Args,
    l: &Loaded,
    resolved: &Resolved,
    book: &mut cagehand::logbook::Logbook,
    lost_at_n: f64,
    residual_n: f64,
    why: &anyhow::Error,
    detection: Option<u64>,
) -> anyhow::Result<ExitCode> {
    let strike = match resolved.strike {
        Strike::Face(_) => StrikeRef::Face(resolved.strike_id.clone()),
        Strike::Node(_) => StrikeRef::Node(resolved.strike_id.clone()),
    };
    let method = match resolved.input {
        ImpactInput::PeakAccel { .. } => ImpactMethod::MeasuredAcceleration,
        ImpactInput::Speed { .. } => ImpactMethod::EnergyBalance,
        ImpactInput::SpeedAndDuration { .. } => ImpactMethod::HalfSinePulse,
    };
    let mut event = ImpactEvent::beyond_model(
        strike,
        &resolved.input,
        method,
        lost_at_n,
        residual_n,
        args.note.clone(),
    );
    if detection.is_some() {
        event.source = ImpactSource::Detected;
        event.detection = detection;
    }
    let (rec, changes) = log_cmd::record_impact(l, &args.log, book, event)?;
    let mut out = std::io::stdout().lock();
    if args.json {
        let j = serde_json::json!({
            "schema": IMPACT_SCHEMA,
            "vehicle": l.profile.vehicle.id,
            "strike": resolved.strike_id,
            "beyond_model": true,
            "lost_at_force_n": lost_at_n,
            "message": why.to_string(),
            "recorded": true,
            "record_seq": rec.seq,
            "detection": detection,
            "log": book.path().display().to_string(),
            "status_changes": changes,
        });
        super::write_json(&mut out, &j)?;
        return Ok(ExitCode::SUCCESS);
    }
    writeln!(out, "{}", cagehand::text::terminal(&why.to_string()))?;
    writeln!(
        out,
        "RECORDED as #{} beyond the model in the cage log of {} ({}): every member is now REPLACE NOW ({} status changes).",
        rec.seq,
        l.profile.vehicle.id,
        book.path().display(),
        changes.len()
    )?;
    writeln!(
        out,
        "Treat the whole cage as damaged; do not fly it before a full inspection."
    )?;
    for line in cagehand::caution::CAUTION_LINES {
        writeln!(out, "{line}")?;
    }
    Ok(ExitCode::SUCCESS)
}

/// Run the impact command.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let l = args.profile.load()?;
    run_loaded(args, &l, None)
}

/// Analyse and record an impact on a loaded profile; with `detection`, the
/// impact confirms that pending detection (`log confirm`): checked under
/// the log's write lock, recorded with `"detection": SEQ`.
pub fn run_loaded(args: &Args, l: &Loaded, detection: Option<u64>) -> anyhow::Result<ExitCode> {
    let resolved = resolve(args, l)?;
    // Open (and lock) the log before the analysis, so a log that cannot be
    // written is reported before any work, and no other writer slips in.
    let mut book = if args.dry_run {
        None
    } else {
        Some(args.log.open(l, Access::Write)?)
    };
    if let (Some(seq), Some(book)) = (detection, book.as_ref()) {
        log_cmd::check_pending(book, seq)?;
    }
    // The cage's statics were worked out once, when the vehicle loaded.
    let statics = &l.statics;
    super::progress::Large::new(&l.cage).stage("impact");
    let a = match (analyse(l, statics, &resolved), book.as_mut()) {
        (Ok(a), _) => a,
        (Err(e), Some(book)) => {
            // The worst crash is the one that most needs logging: record it
            // as beyond the model, which makes every member REPLACE NOW.
            let Some(StaticsError::NoEquilibrium {
                load, residual_n, ..
            }) = e.downcast_ref::<StaticsError>().cloned()
            else {
                return Err(e);
            };
            return record_beyond_model(args, l, &resolved, book, load, residual_n, &e, detection);
        }
        (Err(e), None) => return Err(e),
    };
    let ss = &statics.self_stress;
    // Record last, once everything the report needs has been computed.
    let (record_seq, status_changes) = match book.as_mut() {
        Some(book) => {
            let strike = match resolved.strike {
                Strike::Face(_) => StrikeRef::Face(resolved.strike_id.clone()),
                Strike::Node(_) => StrikeRef::Node(resolved.strike_id.clone()),
            };
            let mut event = ImpactEvent::from_analysis(
                &l.cage,
                strike,
                &resolved.input,
                &a,
                if detection.is_some() {
                    ImpactSource::Detected
                } else {
                    ImpactSource::Entered
                },
                args.note.clone(),
            );
            event.detection = detection;
            let (rec, changes) = log_cmd::record_impact(l, &args.log, book, event)?;
            (Some(rec.seq), changes)
        }
        None => (None, Vec::new()),
    };
    let cage = &l.cage;
    let report = Report {
        schema: IMPACT_SCHEMA,
        vehicle: &l.profile.vehicle.id,
        strike: &resolved.strike_id,
        beyond_model: false,
        force_n: a.force_n,
        method: a.method,
        input: &resolved.input,
        residual_n: a.residual_n,
        face_displacement_m: a.face_displacement_m,
        slack_strings: a
            .slack_strings
            .iter()
            .map(|&j| cage.members[j].id.as_str())
            .collect(),
        iterations: a.iterations,
        prestress_ok: ss.prestress_ok,
        members: a
            .members
            .iter()
            .map(|m| MemberJson {
                id: &cage.members[m.member].id,
                kind: cage.members[m.member].kind,
                force_n: m.force_n,
                capacity_n: m.capacity_n,
                utilisation: m.utilisation,
            })
            .collect(),
        recorded: record_seq.is_some(),
        record_seq,
        detection,
        log: book.as_ref().map(|b| b.path().display().to_string()),
        status_changes,
    };
    let mut out = std::io::stdout().lock();
    if args.json {
        super::write_json(&mut out, &report)?;
        return Ok(ExitCode::SUCCESS);
    }
    match (report.record_seq, &book) {
        (Some(seq), Some(book)) => writeln!(
            out,
            "impact on {} of {} recorded as #{seq} in {}{}",
            cagehand::text::terminal(report.strike),
            cagehand::text::terminal(report.vehicle),
            book.path().display(),
            match detection {
                Some(d) => format!(", confirming detection #{d}"),
                None => String::new(),
            }
        )?,
        _ => writeln!(
            out,
            "impact on {} of {} (dry run, not recorded)",
            cagehand::text::terminal(report.strike),
            cagehand::text::terminal(report.vehicle)
        )?,
    }
    writeln!(
        out,
        "peak force {:.1} N ({})",
        a.force_n,
        method_text(a.method)
    )?;
    writeln!(
        out,
        "moved in {:.2} mm; {} slack string{}{}; residual {:.2e} N after {} iterations",
        a.face_displacement_m * 1e3,
        report.slack_strings.len(),
        if report.slack_strings.len() == 1 {
            ""
        } else {
            "s"
        },
        if report.slack_strings.is_empty() {
            String::new()
        } else {
            format!(" ({})", report.slack_strings.join(" "))
        },
        a.residual_n,
        a.iterations
    )?;
    if !ss.prestress_ok {
        writeln!(out, "note: {}", ss.message)?;
    }
    writeln!(out)?;
    let mut order: Vec<&MemberJson> = report.members.iter().collect();
    order.sort_by(|x, y| y.utilisation.total_cmp(&x.utilisation));
    writeln!(out, "member  kind     force(N)  capacity(N)  use")?;
    for m in order.iter().take(TABLE_ROWS) {
        let kind = match m.kind {
            MemberKind::Rod => "rod",
            MemberKind::String => "string",
        };
        let flag = if m.utilisation >= l.profile.inspection.overload_utilisation {
            "  OVERLOAD"
        } else {
            ""
        };
        writeln!(
            out,
            "{:<7} {:<7} {:>9.1}  {:>11.1}  {:>4.0}%{flag}",
            m.id,
            kind,
            m.force_n,
            m.capacity_n,
            m.utilisation * 100.0
        )?;
    }
    if order.len() > TABLE_ROWS {
        writeln!(
            out,
            "... {} more members (all in --json)",
            order.len() - TABLE_ROWS
        )?;
    }
    if report.recorded {
        writeln!(out)?;
        writeln!(out, "status changes:")?;
        log_cmd::write_changes(&mut out, &report.status_changes)?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "Caution: these are estimates, not guarantees. Inspect the cage physically after every crash."
    )?;
    Ok(ExitCode::SUCCESS)
}
