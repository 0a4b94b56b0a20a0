//! `cagehand cage`: the cage's geometry, faces and members, as a readable
//! report or as JSON (a contract: scripts parse it).

use super::ProfileArg;
use super::rotor_out::{RotorJson, ScheduleJson, rotors_json, schedule_json};
use cagehand::cage::{Cage, MemberKind};
use cagehand::profile::Profile;
use cagehand::righting::{MoveKind, RightingModel};
use cagehand::statics::SelfStress;
use serde::Serialize;
use std::io::Write;
use std::process::ExitCode;

/// Report on the cage of a profile.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    profile: ProfileArg,
    /// Print JSON instead of the readable report.
    #[arg(long)]
    json: bool,
    #[command(subcommand)]
    action: Option<Action>,
}

#[derive(Debug, clap::Subcommand)]
enum Action {
    /// Remaining margin: per face, the impact speed at which the first
    /// member reaches its capacity, with the cage as the log says it is.
    Margin(super::margin_cmd::Args),
}

#[derive(Debug, Serialize)]
struct VehicleJson<'a> {
    id: &'a str,
    name: &'a str,
    mass_kg: f64,
}

#[derive(Debug, Serialize)]
struct NodeJson<'a> {
    id: &'a str,
    /// Cage frame (the profile's node coordinates).
    pos_m: [f64; 3],
    /// Body frame (FRD), the frame of the face normals and the rotors.
    pos_body_m: [f64; 3],
    /// Physical tag from the profile, if any.
    tag: Option<&'a str>,
}

#[derive(Debug, Serialize)]
struct MemberJson<'a> {
    id: &'a str,
    kind: MemberKind,
    nodes: [&'a str; 2],
    tag: Option<&'a str>,
    length_m: f64,
    prestress_n: f64,
    capacity_n: f64,
}

#[derive(Debug, Serialize)]
struct FaceJson<'a> {
    id: &'a str,
    nodes: Vec<&'a str>,
    normal: [f64; 3],
    strings: usize,
    stable: bool,
    margin_m: f64,
    tilt_deg: f64,
}

#[derive(Debug, Serialize)]
struct SelfStressJson<'a> {
    rank: usize,
    states: usize,
    mechanisms: usize,
    prestress_ok: bool,
    message: &'a str,
}

/// One move between resting faces (see `righting`).
#[derive(Debug, Serialize)]
struct MoveJson<'a> {
    from: &'a str,
    to: &'a str,
    kind: MoveKind,
    pivot: Vec<&'a str>,
    angle_deg: f64,
    feasible: bool,
    /// needed / available moment at the worst angle; null when the rotors
    /// give no helping moment at all.
    thrust_fraction: Option<f64>,
    settles_on: &'a str,
    /// Rotor commands at the start of the roll, feasible moves only.
    #[serde(skip_serializing_if = "Option::is_none")]
    rotors: Option<Vec<RotorJson>>,
    /// Settings by roll angle, where one setting cannot hold the roll.
    #[serde(skip_serializing_if = "Option::is_none")]
    rotor_schedule: Option<Vec<ScheduleJson>>,
}

/// The cage report: what `cage --json` prints.
#[derive(Debug, Serialize)]
struct Report<'a> {
    schema: &'static str,
    vehicle: VehicleJson<'a>,
    nodes: Vec<NodeJson<'a>>,
    members: Vec<MemberJson<'a>>,
    faces: Vec<FaceJson<'a>>,
    self_stress: SelfStressJson<'a>,
    moves: Vec<MoveJson<'a>>,
}

fn report<'a>(
    p: &'a Profile,
    c: &'a Cage,
    ss: &'a SelfStress,
    model: &RightingModel,
) -> Report<'a> {
    let nid = |i: usize| c.nodes[i].id.as_str();
    let fid = |i: usize| c.faces[i].id.as_str();
    let rotors = &model.limits.rotors;
    Report {
        schema: "cagehand.cage/1",
        vehicle: VehicleJson {
            id: &p.vehicle.id,
            name: &p.vehicle.name,
            mass_kg: p.vehicle.mass_kg,
        },
        nodes: c
            .nodes
            .iter()
            .map(|n| NodeJson {
                id: &n.id,
                pos_m: n.pos_cage.into(),
                pos_body_m: n.pos_body.into(),
                tag: n.tag.as_deref(),
            })
            .collect(),
        members: c
            .members
            .iter()
            .enumerate()
            .map(|(j, m)| MemberJson {
                id: &m.id,
                kind: m.kind,
                nodes: [nid(m.nodes[0]), nid(m.nodes[1])],
                tag: m.tag.as_deref(),
                length_m: m.length_m,
                prestress_n: ss.prestress_n.get(j).copied().unwrap_or(0.0),
                capacity_n: cagehand::statics::capacity_n(p, m.kind, m.length_m),
            })
            .collect(),
        faces: c
            .faces
            .iter()
            .map(|f| FaceJson {
                id: &f.id,
                nodes: f.nodes.iter().map(|&i| nid(i)).collect(),
                normal: f.normal_body.into(),
                strings: f.string_edges,
                stable: f.stable,
                margin_m: f.margin_m,
                tilt_deg: f.tilt_deg,
            })
            .collect(),
        self_stress: SelfStressJson {
            rank: ss.rank,
            states: ss.states,
            mechanisms: ss.mechanisms,
            prestress_ok: ss.prestress_ok,
            message: &ss.message,
        },
        moves: model
            .moves
            .iter()
            .enumerate()
            .map(|(k, m)| MoveJson {
                from: fid(m.roll.from),
                to: fid(m.roll.to),
                kind: m.roll.kind,
                pivot: m.roll.pivot.iter().map(|&i| nid(i)).collect(),
                angle_deg: m.roll.angle_deg,
                feasible: model.feasible(k),
                thrust_fraction: m.feasibility.thrust_fraction,
                settles_on: fid(m.settles_on),
                rotors: model.commands(k).map(|c| rotors_json(rotors, &c.thrust_n)),
                rotor_schedule: model.commands(k).and_then(|c| schedule_json(rotors, c)),
            })
            .collect(),
    }
}

/// Work out the rotor commands of every move the check passes (the JSON
/// report lists them all), spread over the machine's cores: each move's
/// commands are independent, and the model keeps each the first time it
/// is asked, from whichever thread.
fn commands_of_every_move(model: &RightingModel) {
    let threads = std::thread::available_parallelism()
        .map_or(1, |n| n.get())
        .clamp(1, 8);
    let next = std::sync::atomic::AtomicUsize::new(0);
    std::thread::scope(|scope| {
        for _ in 0..threads {
            scope.spawn(|| {
                loop {
                    let k = next.fetch_add(1, std::sync::atomic::Ordering::Relaxed);
                    if k >= model.moves.len() {
                        break;
                    }
                    model.commands(k);
                }
            });
        }
    });
}

/// Run the cage command.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    if let Some(Action::Margin(m)) = &args.action {
        return super::margin_cmd::run(m, &args.profile);
    }
    let l = args.profile.load()?;
    // The self-stress was worked out once, when the vehicle loaded.
    let ss = &l.statics.self_stress;
    let model = RightingModel::new(&l.profile, &l.cage)
        .map_err(|e| super::bad_input(format!("{}: {e}", l.profile.source)))?;
    if args.json {
        commands_of_every_move(&model);
    }
    let r = report(&l.profile, &l.cage, ss, &model);
    let mut out = std::io::stdout().lock();
    if args.json {
        super::write_json(&mut out, &r)?;
        return Ok(ExitCode::SUCCESS);
    }
    let t = cagehand::text::terminal;
    writeln!(
        out,
        "{} ({}), {:.3} kg",
        t(r.vehicle.id),
        t(r.vehicle.name),
        r.vehicle.mass_kg
    )?;
    writeln!(
        out,
        "{} nodes, {} rods, {} strings, {} faces",
        r.nodes.len(),
        l.cage.rod_count(),
        r.members.len() - l.cage.rod_count(),
        r.faces.len()
    )?;
    writeln!(out)?;
    writeln!(
        out,
        "face  nodes               strings  rest  tilt(deg)  margin(mm)"
    )?;
    for f in &r.faces {
        writeln!(
            out,
            "{:<5} {:<19} {:>7}  {:<4}  {:>9.1}  {:>10.1}",
            t(f.id),
            t(&f.nodes.join(" ")),
            f.strings,
            if f.stable { "yes" } else { "no" },
            f.tilt_deg,
            f.margin_m * 1e3
        )?;
    }
    writeln!(out)?;
    writeln!(
        out,
        "member  kind    nodes     length(mm)  prestress(N)  capacity(N)  tag"
    )?;
    for m in &r.members {
        let kind = match m.kind {
            MemberKind::Rod => "rod",
            MemberKind::String => "string",
        };
        writeln!(
            out,
            "{:<7} {:<7} {:<9} {:>10.1}  {:>12.2}  {:>11.1}  {}",
            t(m.id),
            kind,
            t(&m.nodes.join("-")),
            m.length_m * 1e3,
            m.prestress_n,
            m.capacity_n,
            t(m.tag.unwrap_or(""))
        )?;
    }
    writeln!(out)?;
    writeln!(out, "statics: {}", t(&ss.message))?;
    if ss.prestress_ok && ss.mechanisms > 0 {
        writeln!(
            out,
            "  only the prestress stiffens the mechanism{}, so impacts are solved as a nonlinear equilibrium",
            if ss.mechanisms == 1 { "" } else { "s" }
        )?;
    }
    writeln!(out)?;
    for line in cagehand::caution::CAUTION_LINES {
        writeln!(out, "{line}")?;
    }
    Ok(ExitCode::SUCCESS)
}
