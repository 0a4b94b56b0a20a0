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

/// The report, with the moves given (the JSON writes its moves itself:
/// [`write_report_json`]).
fn report<'a>(
    p: &'a Profile,
    c: &'a Cage,
    ss: &'a SelfStress,
    moves: Vec<MoveJson<'a>>,
) -> Report<'a> {
    let nid = |i: usize| c.nodes[i].id.as_str();
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
        moves,
    }
}

/// Move `k` as the JSON report lists it (its commands worked out if need be).
fn move_json<'a>(c: &'a Cage, model: &RightingModel, k: usize) -> MoveJson<'a> {
    let nid = |i: usize| c.nodes[i].id.as_str();
    let fid = |i: usize| c.faces[i].id.as_str();
    let rotors = &model.limits.rotors;
    let m = &model.moves[k];
    let commands = model.commands(k);
    MoveJson {
        from: fid(m.roll.from),
        to: fid(m.roll.to),
        kind: m.roll.kind,
        pivot: m.roll.pivot.iter().map(|&i| nid(i)).collect(),
        angle_deg: m.roll.angle_deg,
        feasible: commands.is_some(),
        thrust_fraction: model.check(k).thrust_fraction,
        settles_on: fid(m.settles_on),
        rotors: commands.map(|c| rotors_json(rotors, &c.thrust_n)),
        rotor_schedule: commands.and_then(|c| schedule_json(rotors, c)),
    }
}

/// Moves checked, worked out and serialised at a time, on every core.
const MOVES_PER_BLOCK: usize = 512;

/// Write the JSON report `r` (its list of moves empty) with every move of
/// `model` in that list: the moves are most of the report of a large cage
/// (each feasible move's rotor commands), so they are checked, worked out
/// and serialised on every core, a block at a time, and written in order.
/// The bytes are those `serde_json` writes for the whole report at once.
fn write_report_json(
    out: impl Write,
    r: &Report,
    c: &Cage,
    model: &RightingModel,
) -> anyhow::Result<()> {
    use rayon::prelude::*;
    let head = serde_json::to_vec_pretty(r)?;
    let mut w = std::io::BufWriter::with_capacity(1 << 16, out);
    // The report ends with its moves: `"moves": []` and the closing brace.
    let open = match head.strip_suffix(b"[]\n}") {
        Some(open) if !model.moves.is_empty() => open,
        _ => {
            w.write_all(&head)?;
            writeln!(w)?;
            w.flush()?;
            return Ok(());
        }
    };
    w.write_all(open)?;
    w.write_all(b"[\n")?;
    let ks: Vec<usize> = (0..model.moves.len()).collect();
    for block in ks.chunks(MOVES_PER_BLOCK) {
        let texts: Vec<Vec<u8>> = block
            .par_iter()
            .map(|&k| serde_json::to_vec_pretty(&move_json(c, model, k)).map(|js| nested(&js)))
            .collect::<Result<_, _>>()?;
        for (i, text) in texts.iter().enumerate() {
            if block[i] > 0 {
                w.write_all(b",\n")?;
            }
            w.write_all(text)?;
        }
    }
    w.write_all(b"\n  ]\n}\n")?;
    w.flush()?;
    Ok(())
}

/// A pretty-printed value as it stands two levels down (in the report's
/// list of moves): every line indented by four more spaces. A line break
/// within a JSON string is escaped, so every newline byte is layout.
fn nested(js: &[u8]) -> Vec<u8> {
    let mut out = Vec::with_capacity(js.len() + js.len() / 4);
    out.extend_from_slice(b"    ");
    for (i, line) in js.split(|&b| b == b'\n').enumerate() {
        if i > 0 {
            out.extend_from_slice(b"\n    ");
        }
        out.extend_from_slice(line);
    }
    out
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
    let r = report(&l.profile, &l.cage, ss, Vec::new());
    let mut out = std::io::stdout().lock();
    if args.json {
        super::progress::Large::new(&l.cage).stage("rotor commands of every move");
        write_report_json(&mut out, &r, &l.cage, &model)?;
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

#[cfg(test)]
mod tests {
    use super::*;

    /// The report written a block of moves at a time is byte for byte what
    /// `serde_json` writes for the whole report at once (the reference),
    /// on the demo, on a cage with more moves than a block, and with no
    /// moves at all.
    #[test]
    fn the_report_written_in_blocks_is_serde_jsons_own() {
        let demo = cagehand::vehicle::demo().expect("demo");
        let geodesic = cagehand::vehicle::load(
            cagehand::geodesic::profile_toml_with(1, cagehand::geodesic::Rods::Hub).as_bytes(),
            "geodesic-1",
        )
        .expect("geodesic");
        for l in [&demo, &geodesic] {
            let model = RightingModel::new(&l.profile, &l.cage).expect("model");
            let ss = &l.statics.self_stress;
            let moves = (0..model.moves.len())
                .map(|k| move_json(&l.cage, &model, k))
                .collect();
            let whole = report(&l.profile, &l.cage, ss, moves);
            let mut want = serde_json::to_vec_pretty(&whole).expect("serialises");
            want.push(b'\n');
            let mut got = Vec::new();
            let r = report(&l.profile, &l.cage, ss, Vec::new());
            write_report_json(&mut got, &r, &l.cage, &model).expect("writes");
            assert_eq!(
                String::from_utf8_lossy(&got),
                String::from_utf8_lossy(&want)
            );
            if l.profile.vehicle.id.starts_with("geodesic") {
                assert!(model.moves.len() > MOVES_PER_BLOCK, "{}", model.moves.len());
            }
            // No moves: the report as serde_json writes it.
            let mut none = model.clone();
            none.moves.clear();
            let mut got = Vec::new();
            write_report_json(&mut got, &r, &l.cage, &none).expect("writes");
            let mut want = serde_json::to_vec_pretty(&r).expect("serialises");
            want.push(b'\n');
            assert_eq!(got, want);
        }
    }
}
