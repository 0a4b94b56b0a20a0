//! `cagehand plan`: the roll sequence from a face (or a live attitude) to a
//! take-off face, or the recovery map for every face. The JSON is a
//! contract; the readable form is a short table an operator can read off
//! a phone photo.

use super::rotor_out::{RotorJson, ScheduleJson, rotors_json, schedule_json, thinned};
use super::{ProfileArg, bad_input};
use cagehand::attitude::{gravity_body, quat_from_rpy_deg, rpy_deg, whole_deg};
use cagehand::cage::Cage;
use cagehand::rest::{fit_face, resting_attitude};
use cagehand::righting::describe::{setting_text, step_words};
use cagehand::righting::{MoveKind, Plan, RightingModel, Step};
use rayon::prelude::*;
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
    /// Readable form: `text` (a table) or `md` (a recovery sheet in
    /// Markdown, every line within 80 columns).
    #[arg(long, value_enum, default_value_t = Format::Text)]
    format: Format,
}

/// Readable output forms.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
enum Format {
    /// A compact table.
    Text,
    /// A Markdown recovery sheet to print or keep on a phone.
    Md,
}

/// Schema name of `plan --json` (both forms).
const SCHEMA: &str = "cagehand.plan/1";

/// Schedule entries the readable forms print: about one every this many
/// degrees (the JSON carries every entry).
const SHEET_EVERY_DEG: f64 = 10.0;

#[derive(Debug, Serialize)]
struct StepJson<'a> {
    from: &'a str,
    to: &'a str,
    kind: MoveKind,
    pivot: Vec<&'a str>,
    pivot_tags: Vec<Option<&'a str>>,
    angle_deg: f64,
    thrust_fraction: f64,
    start_rpy_deg: [f64; 3],
    target_rpy_deg: [f64; 3],
    tips: String,
    rotors: Vec<RotorJson>,
    #[serde(skip_serializing_if = "Option::is_none")]
    rotor_schedule: Option<Vec<ScheduleJson>>,
}

/// One plan as `plan --json` prints it.
#[derive(Debug, Serialize)]
struct PlanJson<'a> {
    #[serde(skip_serializing_if = "Option::is_none")]
    schema: Option<&'static str>,
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

/// The recovery map as `plan --all --json` prints it.
#[derive(Debug, Serialize)]
struct MapJson<'a> {
    schema: &'static str,
    faces: Vec<PlanJson<'a>>,
}

fn plan_json<'a>(model: &'a RightingModel, p: &'a Plan) -> PlanJson<'a> {
    let cage = &model.cage;
    let rotors = &model.limits.rotors;
    let fid = |i: usize| cage.faces[i].id.as_str();
    PlanJson {
        schema: None,
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
                pivot_tags: s
                    .pivot
                    .iter()
                    .map(|&i| cage.nodes[i].tag.as_deref())
                    .collect(),
                angle_deg: s.angle_deg,
                thrust_fraction: s.thrust_fraction,
                start_rpy_deg: rpy_deg(&s.start),
                target_rpy_deg: rpy_deg(&s.target),
                tips: tips(model, s),
                rotors: rotors_json(rotors, &s.commands.thrust_n),
                rotor_schedule: schedule_json(rotors, &s.commands),
            })
            .collect(),
    }
}

/// Which way the step tips the vehicle, in its own terms.
fn tips(model: &RightingModel, s: &Step) -> String {
    step_words(
        &model.cage,
        &model.moves[s.move_index].roll,
        &s.start,
        &s.target,
    )
}

/// The recovery map, the rotor commands of its moves (independent of each
/// other) worked out on every core.
fn recovery_map(model: &RightingModel) -> Vec<Plan> {
    let draft = model.map_draft();
    draft.moves().par_iter().for_each(|&k| {
        model.commands(k);
    });
    // The faces with no route are explained from what the start of every
    // move out of them says: worked out on every core too (the few moves
    // checked whole are checked as each face's plan is assembled).
    let unreached: Vec<usize> = model
        .unreached(&draft)
        .into_iter()
        .flat_map(|f| model.moves_from(f))
        .collect();
    unreached.par_iter().for_each(|&k| {
        model.outlook(k);
    });
    // The moves among those faces that their start does not refuse are
    // checked whole when the faces are grouped: checked on every core here.
    model.unreached_links(&draft).par_iter().for_each(|&k| {
        model.check(k);
    });
    // Each face's plan is assembled on its own.
    let map = model.finish_map(draft);
    (0..model.cage.faces.len())
        .into_par_iter()
        .map(|face| model.map_plan(&map, face))
        .collect()
}

/// A plan's text buffer starts with this much room.
const PLAN_TEXT_BYTES: usize = 4096;

/// Every plan's text, written on every core (a map of a large cage is
/// thousands of plans), in the plans' order.
fn rendered(
    plans: &[Plan],
    write: impl Fn(&mut Vec<u8>, &Plan) -> std::io::Result<()> + Sync,
) -> std::io::Result<Vec<Vec<u8>>> {
    plans
        .par_iter()
        .map(|p| {
            // Room for a typical plan's text (3 kB on hub-3): grown from
            // empty, each buffer was copied a dozen times on the way.
            let mut buf = Vec::with_capacity(PLAN_TEXT_BYTES);
            write(&mut buf, p).map(|()| buf)
        })
        .collect()
}

/// Parse a face id such as `F7` (case-insensitive).
pub fn parse_face(cage: &Cage, text: &str) -> anyhow::Result<usize> {
    cage.face_named(text).ok_or_else(|| {
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

/// Greedy wrap at `width` characters. Items separated by two spaces (a
/// rotor's command) stay whole on one line where they fit; otherwise the
/// text breaks between words (a word longer than the width gets a line of
/// its own).
fn wrap(text: &str, width: usize) -> Vec<String> {
    let mut lines = Vec::new();
    let mut line = String::new();
    for item in text.split("  ").map(str::trim).filter(|i| !i.is_empty()) {
        let sep = if item.contains(' ') && text.contains("  ") {
            "  "
        } else {
            " "
        };
        let fits = line.chars().count() + sep.len() + item.chars().count() <= width;
        if item.chars().count() <= width && (line.is_empty() || fits) {
            if !line.is_empty() {
                line.push_str(sep);
            }
            line.push_str(item);
            continue;
        }
        if item.chars().count() <= width {
            lines.push(std::mem::take(&mut line));
            line.push_str(item);
            continue;
        }
        for word in item.split_whitespace() {
            if !line.is_empty() && line.chars().count() + 1 + word.chars().count() > width {
                lines.push(std::mem::take(&mut line));
            }
            if !line.is_empty() {
                line.push(' ');
            }
            line.push_str(word);
        }
    }
    if !line.is_empty() {
        lines.push(line);
    }
    lines
}

/// "F9 -> F1: 2 steps, 92 deg": a route in one line, `joint` between the
/// faces.
fn route_line(cage: &Cage, p: &Plan, joint: &str) -> String {
    let fid = |i: usize| cage.faces[i].id.as_str();
    let n = p.steps.len();
    format!(
        "{} {joint} {}: {n} step{}, {:.0} deg",
        fid(p.from),
        p.goal.map_or("-", fid),
        if n == 1 { "" } else { "s" },
        p.total_angle_deg
    )
}

/// Write `text` wrapped to the photo width, the first line after
/// `first`, the rest after `rest` (both counted in the width).
fn write_wrapped(out: &mut impl Write, first: &str, rest: &str, text: &str) -> std::io::Result<()> {
    // Tags and names may come from a profile: escaped for the terminal.
    let text = cagehand::text::terminal(text);
    let width = PHOTO_WIDTH - first.chars().count().max(rest.chars().count());
    for (k, line) in wrap(&text, width).iter().enumerate() {
        writeln!(out, "{}{line}", if k == 0 { first } else { rest })?;
    }
    Ok(())
}

/// The rotor commands of a step, one setting or a thinned schedule, as
/// lines of text (each a label and a setting).
fn command_lines(model: &RightingModel, s: &Step) -> Vec<(String, String)> {
    let rotors = &model.limits.rotors;
    if s.commands.schedule.is_empty() {
        return vec![("rotors:".into(), setting_text(rotors, &s.commands.thrust_n))];
    }
    let shown = thinned(&s.commands, SHEET_EVERY_DEG);
    let mut out = vec![(
        "rotors:".into(),
        format!(
            "change during the roll ({} settings in --json; about every {SHEET_EVERY_DEG:.0} deg here)",
            s.commands.schedule.len()
        ),
    )];
    for (from, t) in shown {
        out.push((format!("from {from:.0} deg:"), setting_text(rotors, t)));
    }
    out
}

/// Each move's rotor-command lines as [`write_plan`] prints them, written
/// once per move however many plans of a map take it (they depend on the
/// move alone).
struct CommandText {
    lines: Vec<std::sync::OnceLock<Vec<u8>>>,
}

impl CommandText {
    fn new(model: &RightingModel) -> CommandText {
        CommandText {
            lines: (0..model.moves.len())
                .map(|_| std::sync::OnceLock::new())
                .collect(),
        }
    }

    /// The lines of step `s` of a plan of `model`.
    fn of(&self, model: &RightingModel, s: &Step) -> std::io::Result<std::borrow::Cow<'_, [u8]>> {
        let kept = self.lines.get(s.move_index);
        if let Some(text) = kept.and_then(|l| l.get()) {
            return Ok(text.as_slice().into());
        }
        let mut text = Vec::new();
        for (label, line) in command_lines(model, s) {
            write_wrapped(&mut text, &format!("      {label} "), "        ", &line)?;
        }
        Ok(match kept {
            Some(l) => l.get_or_init(|| text).as_slice().into(),
            None => text.into(),
        })
    }
}

/// A whole number of degrees (from [`whole_deg`]) as an integer, which
/// prints as `{:.0}` would, without the general float formatting.
fn whole(x: f64) -> i64 {
    whole_deg(x) as i64
}

fn write_plan(
    out: &mut impl Write,
    model: &RightingModel,
    p: &Plan,
    texts: &CommandText,
) -> std::io::Result<()> {
    let cage = &model.cage;
    let fid = |i: usize| cage.faces[i].id.as_str();
    if let Some(n) = &p.note {
        for line in wrap(&format!("note: {n}"), PHOTO_WIDTH) {
            writeln!(out, "{line}")?;
        }
    }
    if !p.reachable {
        writeln!(out, "{}: NO ROUTE to a take-off face.", fid(p.from))?;
        if let Some(r) = &p.reason {
            for line in wrap(r, PHOTO_WIDTH - 2) {
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
    writeln!(out, "{} in all", route_line(cage, p, "->"))?;
    writeln!(
        out,
        " #  from -> to    pivot     kind    angle  thrust  expect r/p/y deg"
    )?;
    for (k, s) in p.steps.iter().enumerate() {
        let pivot: Vec<&str> = s.pivot.iter().map(|&i| cage.nodes[i].id.as_str()).collect();
        let [r, pi, y] = rpy_deg(&s.target);
        writeln!(
            out,
            "{:>2}  {:<4} -> {:<4}  {:<9} {:<6} {:>4.0}    {:>5}  {:>4} {:>4} {:>4}",
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
            whole(r),
            whole(pi),
            whole(y)
        )?;
        write_wrapped(out, "      ", "      ", &tips(model, s))?;
        if s.pivot.iter().any(|&i| cage.nodes[i].tag.is_some()) {
            let labels: Vec<String> = s.pivot.iter().map(|&i| cage.nodes[i].label()).collect();
            write_wrapped(out, "      pivot: ", "        ", &labels.join(" - "))?;
        }
        out.write_all(&texts.of(model, s)?)?;
    }
    Ok(())
}

/// Markdown list item `- text`, wrapped with a two-space hang.
fn md_item(out: &mut impl Write, indent: &str, text: &str) -> std::io::Result<()> {
    write_wrapped(out, &format!("{indent}- "), &format!("{indent}  "), text)
}

/// The recovery sheet of one plan (Markdown, within 80 columns).
fn write_sheet(out: &mut impl Write, model: &RightingModel, p: &Plan) -> std::io::Result<()> {
    let cage = &model.cage;
    let fid = |i: usize| cage.faces[i].id.as_str();
    let rpy = |q| {
        let [r, pi, y] = rpy_deg(q);
        format!(
            "{:.0} / {:.0} / {:.0}",
            whole_deg(r),
            whole_deg(pi),
            whole_deg(y)
        )
    };
    if !p.reachable {
        writeln!(out, "## {}: no route", fid(p.from))?;
        writeln!(out)?;
        if let Some(n) = &p.note {
            md_item(out, "", &format!("Note: {n}"))?;
        }
        if let Some(r) = &p.reason {
            md_item(out, "", r)?;
        }
        writeln!(out)?;
        return Ok(());
    }
    if p.steps.is_empty() {
        writeln!(out, "## {}: take-off face", fid(p.from))?;
        writeln!(out)?;
        md_item(out, "", "Already on a take-off face: nothing to roll.")?;
        writeln!(out)?;
        return Ok(());
    }
    writeln!(out, "## {}", route_line(cage, p, "to"))?;
    writeln!(out)?;
    if let Some(n) = &p.note {
        md_item(out, "", &format!("Note: {n}"))?;
        writeln!(out)?;
    }
    for (k, s) in p.steps.iter().enumerate() {
        let pivot: Vec<String> = s.pivot.iter().map(|&i| cage.nodes[i].label()).collect();
        let what = match s.kind {
            MoveKind::Edge => format!("edge roll across {}", pivot.join("-")),
            MoveKind::Vertex => format!("pivot about node {}", pivot.join("-")),
        };
        writeln!(out, "### Step {}: {} to {}", k + 1, fid(s.from), fid(s.to))?;
        writeln!(out)?;
        md_item(out, "", &format!("Move: {what}, {:.0} deg.", s.angle_deg))?;
        md_item(
            out,
            "",
            &format!(
                "Start: on {}, roll / pitch / yaw {} deg.",
                fid(s.from),
                rpy(&s.start)
            ),
        )?;
        md_item(out, "", &format!("Where: {}.", tips(model, s)))?;
        for (label, text) in command_lines(model, s) {
            let label = if label == "rotors:" {
                "Rotors:".to_string()
            } else {
                label
            };
            md_item(out, "", &format!("{label} {text}"))?;
        }
        md_item(
            out,
            "",
            &format!(
                "Needs {} of the rotors' best moment at the worst angle.",
                pct(s.thrust_fraction)
            ),
        )?;
        md_item(
            out,
            "",
            &format!(
                "Expect: on {}, roll / pitch / yaw {} deg.",
                fid(s.to),
                rpy(&s.target)
            ),
        )?;
        writeln!(out)?;
    }
    Ok(())
}

/// The sheet's header: what the numbers mean.
fn write_sheet_header(
    out: &mut impl Write,
    model: &RightingModel,
    name: &str,
) -> std::io::Result<()> {
    writeln!(out, "# Recovery sheet: {}", cagehand::text::markdown(name))?;
    writeln!(out)?;
    write_wrapped(
        out,
        "",
        "",
        &format!(
            "Rotors are numbered #1..#{} in profile order. Thrust in newtons: fwd spins the usual way, REV reversed; the percentage is of that rotor's limit in that direction. Attitudes are roll / pitch / yaw in degrees, yaw 0 at the start when planned from a face id.",
            model.limits.rotors.len()
        ),
    )?;
    writeln!(out)?;
    Ok(())
}

/// Run the plan command.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    // The model, and the recovery map when asked for, are worked out while
    // the profile's statics are checked.
    let (l, work) = args.profile.load_with(|b| {
        if args.all {
            super::progress::Large::new(&b.cage).stage("recovery map");
        }
        RightingModel::new(&b.profile, &b.cage).map(|model| {
            let map = args.all.then(|| recovery_map(&model));
            (model, map)
        })
    })?;
    let (model, map) = work.map_err(|e| bad_input(format!("{}: {e}", l.profile.source)))?;
    let cage = &model.cage;
    // A map of a large cage is megabytes of lines: written through a
    // buffer, not a system call per line; flushed before returning, so a
    // write error is still reported.
    let mut out = std::io::BufWriter::with_capacity(1 << 16, std::io::stdout().lock());
    if let Some(plans) = map {
        if args.json {
            let js = MapJson {
                schema: SCHEMA,
                faces: plans.par_iter().map(|p| plan_json(&model, p)).collect(),
            };
            super::write_json(&mut out, &js)?;
        } else if args.format == Format::Md {
            write_sheet_header(&mut out, &model, &l.profile.vehicle.name)?;
            for text in rendered(&plans, |buf, p| write_sheet(buf, &model, p))? {
                out.write_all(&text)?;
            }
            write_caution(&mut out)?;
        } else {
            writeln!(
                out,
                "recovery map, {} ({} faces)",
                cagehand::text::terminal(&l.profile.vehicle.name),
                cage.faces.len()
            )?;
            let texts = CommandText::new(&model);
            for text in rendered(&plans, |buf, p| {
                write_plan(buf, &model, p, &texts)?;
                writeln!(buf)
            })? {
                out.write_all(&text)?;
            }
            write_caution(&mut out)?;
        }
        out.flush()?;
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
        let mut js = plan_json(&model, &plan);
        js.schema = Some(SCHEMA);
        super::write_json(&mut out, &js)?;
    } else if args.format == Format::Md {
        write_sheet_header(&mut out, &model, &l.profile.vehicle.name)?;
        write_sheet(&mut out, &model, &plan)?;
        write_caution(&mut out)?;
    } else {
        write_plan(&mut out, &model, &plan, &CommandText::new(&model))?;
        writeln!(out)?;
        if args.from.is_some() {
            writeln!(
                out,
                "yaw: the expected yaw assumes 0 deg at the start (planned from a face id)."
            )?;
        }
        write_caution(&mut out)?;
    }
    out.flush()?;
    Ok(ExitCode::SUCCESS)
}
