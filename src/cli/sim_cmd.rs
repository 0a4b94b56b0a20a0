//! `cagehand sim`: run the simulated vehicle and send its telemetry to a
//! UDP link, for trying the tool without a vehicle and for tests.
//!
//! Command channel: the simulator listens on its own UDP socket (the
//! address is printed in the first line) for one text command per
//! datagram: `roll FACE` (roll across an edge onto that neighbouring face;
//! it may land one face further, as vehicles do) or `fly` (take off, fly,
//! crash again). It answers each with a datagram `ok ...` or `error ...`.
//! Its stdout carries one JSON object per event: `started`, `command`,
//! `resting` (with the face and its neighbours), `done`.

use super::ProfileArg;
use super::link_args::ProtoArg;
use cagehand::link::Proto;
use cagehand::link::spec::LinkSpec;
use cagehand::sim::wire::Wire;
use cagehand::sim::{SIM_RATE_HZ, Sim, SimCommand};
use serde_json::json;
use std::io::Write;
use std::net::{SocketAddr, UdpSocket};
use std::process::ExitCode;
use std::time::{Duration, Instant};

/// Slowest and fastest simulation pace accepted by `--speed`.
const MIN_SPEED: f64 = 0.01;
const MAX_SPEED: f64 = 1000.0;

/// Send simulated telemetry to a link.
#[derive(Debug, clap::Args)]
pub struct Args {
    #[command(flatten)]
    profile: ProfileArg,
    /// Where to send: udp:HOST:PORT.
    #[arg(long, value_name = "SPEC")]
    to: String,
    /// Protocol to send (auto means MAVLink).
    #[arg(long, value_enum, default_value_t = ProtoArg::Mavlink)]
    proto: ProtoArg,
    /// Seed: the same seed flies the same flight.
    #[arg(long, default_value_t = 1)]
    seed: u64,
    /// Stop after this many simulated seconds.
    #[arg(long, value_name = "S")]
    duration_s: Option<f64>,
    /// Simulated seconds per real second (for quick tests).
    #[arg(long, default_value_t = 1.0)]
    speed: f64,
    /// Address of the command socket.
    #[arg(long, value_name = "ADDR", default_value = "127.0.0.1:0")]
    bind: SocketAddr,
}

/// Run the simulator.
pub fn run(args: &Args) -> anyhow::Result<ExitCode> {
    let to = match args.to.parse::<LinkSpec>() {
        Ok(LinkSpec::Udp(a)) => a,
        Ok(other) => {
            return Err(super::bad_input(format!(
                "--to {other}: the simulator sends to udp:HOST:PORT only"
            )));
        }
        Err(e) => return Err(super::bad_input(e.to_string())),
    };
    if !(args.speed.is_finite() && (MIN_SPEED..=MAX_SPEED).contains(&args.speed)) {
        return Err(super::bad_input(format!(
            "--speed {:?}: expected a factor from {MIN_SPEED} to {MAX_SPEED}",
            args.speed
        )));
    }
    super::check_duration_s(args.duration_s)?;
    let loaded = args.profile.load()?;
    let cage = &loaded.cage;
    let sock = UdpSocket::bind(args.bind)
        .map_err(|e| anyhow::anyhow!("cannot bind {}: {e}", args.bind))?;
    sock.set_nonblocking(true)?;
    let mut out = std::io::stdout().lock();
    // Every line carries the schema (docs/json.md).
    let mut emit = |mut v: serde_json::Value| -> bool {
        if let serde_json::Value::Object(fields) = &mut v {
            fields.insert("schema".into(), json!("cagehand.sim/1"));
        }
        writeln!(out, "{v}").and_then(|_| out.flush()).is_ok()
    };
    emit(
        json!({"event": "started", "command_addr": sock.local_addr()?.to_string(), "to": to.to_string(), "seed": args.seed, "proto": Proto::from(args.proto)}),
    );
    let mut sim = Sim::new(cage, args.seed);
    let mut wire = Wire::new(args.proto.into());
    let neighbours = |sim: &Sim, f: usize| -> Vec<String> {
        // ok: f comes from the simulator's resting face, an index into these faces.
        let face = &cage.faces[f];
        cage.faces
            .iter()
            .enumerate()
            .filter(|(j, g)| {
                *j != f
                    && g.edges.iter().any(|e| {
                        face.edges.iter().any(|h| {
                            (h.nodes[0] == e.nodes[1] && h.nodes[1] == e.nodes[0])
                                || h.nodes == e.nodes
                        })
                    })
            })
            .map(|(j, _)| sim.face_id(j).to_string())
            .collect()
    };
    let t0 = Instant::now();
    let dt = 1.0 / SIM_RATE_HZ;
    let mut was_resting: Option<usize> = None;
    let mut buf = [0u8; 512];
    loop {
        while let Ok((n, from)) = sock.recv_from(&mut buf) {
            let text = String::from_utf8_lossy(&buf[..n]).trim().to_string();
            let res = text.parse::<SimCommand>().and_then(|c| sim.command(&c));
            let reply = match &res {
                Ok(()) => format!("ok {text}"),
                Err(e) => format!("error {e}"),
            };
            let _ = sock.send_to(reply.as_bytes(), from);
            if !emit(
                json!({"event": "command", "t": round3(sim.t_s()), "command": text, "ok": res.is_ok(), "reply": reply}),
            ) {
                return Ok(ExitCode::SUCCESS);
            }
        }
        sim.step(dt);
        let tel = sim.telemetry();
        let now_resting = sim.resting_face();
        if now_resting != was_resting {
            if let Some(f) = now_resting {
                let planned = sim.last_roll().map(|(p, _)| sim.face_id(p).to_string());
                if !emit(
                    json!({"event": "resting", "t": round3(tel.t_s), "face": sim.face_id(f), "planned": planned, "neighbours": neighbours(&sim, f)}),
                ) {
                    return Ok(ExitCode::SUCCESS);
                }
            }
            was_resting = now_resting;
        }
        let wall = tel.t_s / args.speed - t0.elapsed().as_secs_f64();
        if wall > 0.0 {
            // Capped so no factor can ask for an unrepresentable sleep.
            std::thread::sleep(Duration::from_secs_f64(wall.min(1.0)));
        }
        // A listener not up yet (connection refused) is not fatal.
        let _ = sock.send_to(&wire.encode(&tel), to);
        if args.duration_s.is_some_and(|d| tel.t_s >= d) {
            break;
        }
    }
    emit(json!({"event": "done", "t": round3(sim.t_s())}));
    Ok(ExitCode::SUCCESS)
}

fn round3(x: f64) -> f64 {
    (x * 1000.0).round() / 1000.0
}
