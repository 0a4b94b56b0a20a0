//! `cagehand plan`: the roll sequence from a face (or a live attitude) to a
//! take-off face, or the recovery map for every face. The JSON is a
//! contract; the readable form is a short table an operator can read off
//! a phone photo.

use super::{ProfileArg, bad_input};
use cagehand::attitude::{gravity_body, quat_from_rpy_deg, rpy_deg, whole_deg};
use cagehand::cage::Cage;
use cagehand::rest::{fit_face, resting_attitude};
use cagehand::righting::{MoveKind, Plan, RightingModel};
use serde::Serialize;
use std::io::Write;
use std::process::ExitCode;

/// The caution printed under every readable plan.
fn write_caution(out: &mut impl Write) -> std::io::Result<()> {
    writeln!(
        out,
        "thrust: share of the rotors' best moment needed at the roll's worst angle."
    )?;
    for line in cagehand::caution::CAUTION_LINES {
        writeln!(out, "{line}")?;
    }
    Ok(())
}

/// Plan the roll back to a take-off face.
#[derive(Debug, clap::Args)]
#[command(group(clap::ArgGroup::new("start").required(true).args(["from", "attitude", "all"])))]
pub struct Args {
    #[command(flatten)]
    profile: ProfileArg,
    /// Face the vehicle rests on, e.g. F7.
    #[arg(long, value_name = "FACE")]
    from: Option<String>,
    /// Current attitude as ROLL,PITCH,YAW in degrees, e.g. -150,20,35.
    #[arg(long, value_name = "ROLL,PITCH,YAW", allow_hyphen_values = true)]
    attitude: Option<String>,
    /// The recovery map: one plan from every face.
    #[arg(long)]
    all: bool,
    /// Print JSON instead of the readable table.
    #[arg(long)]
    json: bool,
}

#[derive(Debug, Serialize)]
struct StepJson<'a> {
    from: &'a str,
    to: &'a str,
    kind: MoveKind,
    pivot: Vec<&'a str>,
    angle_deg: f64,
    thrust_fraction: f64,
    target_rpy_deg: [f64; 3],
}

/// One plan as `plan --json` prints it.
#[derive(Debug, Serialize)]
struct PlanJson<'a> {
    from: &'a str,
    goal: Option<&'a str>,
    reachable: bool,
    #[serde(skip_serializing_if = "Option::is_none")]
    reason: Option<&'a str>,
    #[serde(skip_serializing_if = "Option::is_none")]
    note: Option<&'a str>,
    total_angle_deg: f64,
    steps: Vec<StepJson<'a>>,
}

fn plan_json<'a>(cage: &'a Cage, p: &'a Plan) -> PlanJson<'a> {
    let fid = |i: usize| cage.faces[i].id.as_str();
    PlanJson {
        from: fid(p.from),
        goal: p.goal.map(fid),
        reachable: p.reachable,
        reason: p.reason.as_deref(),
        note: p.note.as_deref(),
        total_angle_deg: p.total_angle_deg,
        steps: p
            .steps
            .iter()
            .map(|s| StepJson {
                from: fid(s.from),
                to: fid(s.to),
                kind: s.kind,
                pivot: s.pivot.iter().map(|&i| cage.nodes[i].id.as_str()).collect(),
                angle_deg: s.angle_deg,
                thrust_fraction: s.thrust_fraction,
                target_rpy_deg: rpy_deg(&s.target),
            })
            .collect(),
    }
}

/// Parse a face id such as `F7` (case-insensitive).
pub fn parse_face(cage: &Cage, text: &str) -> anyhow::Result<usize> {
    let t = text.trim().to_ascii_uppercase();
    cage.face_index(&t).ok_or_else(|| {
        bad_input(format!(
            "--from {text:?}: expected a face id of this cage, F1..F{}",
            cage.faces.len()
        ))
    })
}

/// Parse `ROLL,PITCH,YAW` in degrees.
pub fn parse_rpy(text: &str) -> anyhow::Result<[f64; 3]> {
    let parts: Vec<&str> = text.split(',').map(str::trim).collect();
    let nums: Option<Vec<f64>> = parts
        .iter()
        .map(|p| p.parse::<f64>().ok().filter(|x| x.is_finite()))
        .collect();
    match nums.as_deref() {
        Some([r, p, y]) if p.abs() <= 90.0 => Ok([*r, *p, *y]),
        Some([_, p, _]) => Err(bad_input(format!(
            "--attitude {text:?}: pitch must be within -90..90 degrees, found {p}"
        ))),
        _ => Err(bad_input(format!(
            "--attitude {text:?}: expected three numbers ROLL,PITCH,YAW in degrees, such as -150,20,35"
        ))),
    }
}

fn pct(f: f64) -> String {
    format!("{:.0}%", f * 100.0)
}

/// Widest line of the readable output, so a phone photo of it stays legible.
const PHOTO_WIDTH: usize = 78;

/// Greedy word wrap at `width` characters (a word longer than that gets a
/// line of its own).
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
            lines.push(std::mem::take(&mut line));
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

fn write_plan(out: &mut impl Write, cage: &Cage, p: &Plan) -> std::io::Result<()> {
    // Face and node ids may come from a profile: escaped for the terminal.
    let fid = |i: usize| cagehand::text::terminal(&cage.faces[i].id).into_owned();
    if let Some(n) = &p.note {
        for line in wrap(
            &cagehand::text::terminal(&format!("note: {n}")),
            PHOTO_WIDTH,
        ) {
            writeln!(out, "{line}")?;
        }
    }
    if !p.reachable {
        writeln!(out, "{}: NO ROUTE to a take-off face.", fid(p.from))?;
        if let Some(r) = &p.reason {
            for line in wrap(&cagehand::text::terminal(r), PHOTO_WIDTH - 2) {
                writeln!(out, "  {line}")?;
            }
        }
        return Ok(());
    }
    if p.steps.is_empty() {
        writeln!(
            out,
            "{}: already on a take-off face, nothing to roll.",
            fid(p.from)
        )?;
        return Ok(());
    }
    writeln!(
        out,
        "{} -> {}: {} step{}, {:.0} deg in all",
        fid(p.from),
        p.goal.map_or_else(|| "-".to_string(), fid),
        p.steps.len(),
        if p.steps.len() == 1 { "" } else { "s" },
        p.total_angle_deg
    )?;
    writeln!(
        out,
        " #  from -> to    pivot     kind    angle  thrust  expect r/p/y deg"
    )?;
    for (k, s) in p.steps.iter().enumerate() {
        let pivot: Vec<String> = s
            .pivot
            .iter()
            .map(|&i| cagehand::text::terminal(&cage.nodes[i].id).into_owned())
            .collect();
        let [r, pi, y] = rpy_deg(&s.target);
        writeln!(
            out,
            "{:>2}  {:<4} -> {:<4}  {:<9} {:<6} {:>4.0}    {:>5}  {:>4.0} {:>4.0} {:>4.0}",
            k + 1,
            fid(s.from),
            fid(s.to),
            pivot.join("-"),
            match s.kind {
                MoveKind::Edge => "edge",
                MoveKind::Vertex => "vertex",
            },
            s.angle_deg,
            pct(s.thrust_fraction),
            whole_deg(r),
            whole_deg(pi),
            whole_deg(y)
        )?;
    }
    Ok(())
}

/// Run the plan command.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let l = args.profile.load()?;
    let model = RightingModel::new(&l.profile, &l.cage)
        .map_err(|e| bad_input(format!("{}: {e}", l.profile.source)))?;
    let cage = &model.cage;
    let mut out = std::io::stdout().lock();
    if args.all {
        let plans = model.recovery_map();
        if args.json {
            let js: Vec<PlanJson> = plans.iter().map(|p| plan_json(cage, p)).collect();
            writeln!(out, "{}", serde_json::to_string_pretty(&js)?)?;
        } else {
            writeln!(
                out,
                "recovery map, {} ({} faces)",
                cagehand::text::terminal(&l.profile.vehicle.name),
                cage.faces.len()
            )?;
            for p in &plans {
                write_plan(&mut out, cage, p)?;
                writeln!(out)?;
            }
            write_caution(&mut out)?;
        }
        return Ok(ExitCode::SUCCESS);
    }
    let (face, attitude, fit_note) = match (&args.from, &args.attitude) {
        (Some(f), _) => {
            let face = parse_face(cage, f)?;
            (face, resting_attitude(cage, face), None)
        }
        (None, Some(a)) => {
            let [r, p, y] = parse_rpy(a)?;
            let q = quat_from_rpy_deg(r, p, y);
            let fit = fit_face(cage, &gravity_body(&q));
            let note = (fit.error_deg > l.profile.watch.rest_tolerance_deg).then(|| {
                format!(
                    "the attitude is {:.0} deg from the nearest face {}, more than the rest tolerance of {} deg: the vehicle may be propped on an edge or still moving",
                    fit.error_deg, cage.faces[fit.face].id, l.profile.watch.rest_tolerance_deg
                )
            });
            (fit.face, q, note)
        }
        (None, None) => {
            return Err(bad_input(
                "give --from FACE, --attitude ROLL,PITCH,YAW or --all",
            ));
        }
    };
    let mut plan = model.plan(face, &attitude);
    if let Some(n) = fit_note {
        plan.note = Some(match plan.note.take() {
            Some(old) => format!("{n}; {old}"),
            None => n,
        });
    }
    if args.json {
        writeln!(
            out,
            "{}",
            serde_json::to_string_pretty(&plan_json(cage, &plan))?
        )?;
    } else {
        write_plan(&mut out, cage, &plan)?;
        writeln!(out)?;
        if args.from.is_some() {
            writeln!(
                out,
                "yaw: the expected yaw assumes 0 deg at the start (planned from a face id)."
            )?;
        }
        write_caution(&mut out)?;
    }
    Ok(ExitCode::SUCCESS)
}
