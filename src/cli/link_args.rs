//! The link flags shared by `watch` and `record`, turned into an open link.

use super::bad_input;
use crate::transport::{self, Link, LinkOptions, Mode};
use cagehand::cage::Cage;
use cagehand::link::Proto;
use cagehand::link::mavlink::{MavConfig, SigningKey};
use cagehand::link::spec::{AllowEntry, LinkSpec, ReplaySpeed};
use std::io::Write;
use std::path::{Path, PathBuf};

/// Where telemetry comes from and what to accept.
#[derive(Debug, Clone, clap::Args)]
pub struct LinkArgs {
    /// udp:HOST:PORT (listen; 127.0.0.1 unless named), serial:PATH@BAUD,
    /// file:PATH (a recording), raw:PATH (a plain byte capture), `sim[:SEED]`.
    #[arg(long, value_name = "SPEC", default_value = "sim")]
    pub link: String,
    /// Protocol on the link.
    #[arg(long, value_enum, default_value_t = ProtoArg::Auto)]
    pub proto: ProtoArg,
    /// Accept UDP only from this sender (IP or IP:PORT); repeatable.
    #[arg(long, value_name = "ADDR")]
    pub allow: Vec<String>,
    /// Accept MAVLink only from this system id.
    #[arg(long, value_name = "ID")]
    pub sysid: Option<u8>,
    /// MAVLink 2 signing key: 64 hexadecimal characters on one line. With
    /// it, unsigned, badly signed and replayed frames are rejected.
    #[arg(long, value_name = "FILE")]
    pub signing_key: Option<PathBuf>,
    /// Pace of file: replays and of the sim link: `max` or a factor (1 = as recorded).
    #[arg(long, value_name = "SPEED", default_value = "1")]
    pub replay_speed: String,
}

/// The protocol as typed (the core's [`Proto`] knows no command line).
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum ProtoArg {
    /// MAVLink v1/v2.
    Mavlink,
    /// key=value lines.
    Line,
    /// Decide from the data: the first protocol to give a good frame wins
    /// (MAVLink only when a signing key is given).
    Auto,
}

impl From<ProtoArg> for Proto {
    fn from(p: ProtoArg) -> Proto {
        match p {
            ProtoArg::Mavlink => Proto::Mavlink,
            ProtoArg::Line => Proto::Line,
            ProtoArg::Auto => Proto::Auto,
        }
    }
}

/// Read a signing key file, warning when others can read it.
pub fn read_key(path: &Path) -> anyhow::Result<SigningKey> {
    let text = std::fs::read_to_string(path)
        .map_err(|e| bad_input(format!("cannot read signing key {}: {e}", path.display())))?;
    #[cfg(unix)]
    {
        use std::os::unix::fs::PermissionsExt;
        if let Ok(m) = std::fs::metadata(path) {
            let mode = m.permissions().mode() & 0o777;
            if mode & 0o077 != 0 {
                let mut err = std::io::stderr().lock();
                let _ = writeln!(
                    err,
                    "cagehand: warning: signing key {} can be read by others (mode {mode:o}); `chmod 600 {}`",
                    path.display(),
                    path.display()
                );
            }
        }
    }
    SigningKey::from_hex_text(&text).map_err(|e| bad_input(format!("{}: {e}", path.display())))
}

impl LinkArgs {
    /// The built-in simulated vehicle at its own pace (the demo).
    pub fn default_sim() -> LinkArgs {
        LinkArgs {
            link: "sim".to_string(),
            proto: ProtoArg::Auto,
            allow: Vec::new(),
            sysid: None,
            signing_key: None,
            replay_speed: "1".to_string(),
        }
    }

    /// The parsed spec.
    pub fn spec(&self) -> anyhow::Result<LinkSpec> {
        self.link
            .parse()
            .map_err(|e: cagehand::link::spec::SpecError| bad_input(e.to_string()))
    }

    /// Open the link (the cage feeds the sim link). `data_dir` is where a
    /// live link with a signing key keeps its replay floor; it is asked
    /// for only then (watch passes the log's data folder).
    pub fn open(
        &self,
        cage: Option<Cage>,
        mode: Mode,
        data_dir: impl FnOnce() -> anyhow::Result<PathBuf>,
    ) -> anyhow::Result<Link> {
        let spec = self.spec()?;
        let allow = self
            .allow
            .iter()
            .map(|a| {
                a.parse::<AllowEntry>()
                    .map_err(|e| bad_input(format!("--allow {e}")))
            })
            .collect::<anyhow::Result<Vec<_>>>()?;
        if !allow.is_empty() && !matches!(spec, LinkSpec::Udp(_)) {
            return Err(bad_input("--allow applies to udp: links only"));
        }
        let replay_speed: ReplaySpeed = self
            .replay_speed
            .parse()
            .map_err(|e: String| bad_input(format!("--replay-speed {e}")))?;
        let signing_key = self.signing_key.as_deref().map(read_key).transpose()?;
        if signing_key.is_some() && self.proto == ProtoArg::Line {
            return Err(bad_input(
                "--proto line cannot be used with --signing-key: lines carry no signature, so none of them could be trusted; use --proto mavlink (or auto) with a vehicle that signs its MAVLink 2 frames, or leave out the key",
            ));
        }
        let live = matches!(spec, LinkSpec::Udp(_) | LinkSpec::Serial { .. });
        let data_dir = if signing_key.is_some() && live && mode == Mode::Decode {
            Some(data_dir()?)
        } else {
            None
        };
        let opts = LinkOptions {
            proto: self.proto.into(),
            mav: MavConfig {
                sysid: self.sysid,
                signing_key,
                replay_floor: None,
            },
            allow,
            replay_speed,
            cage,
            data_dir,
        };
        transport::open(&spec, opts, mode).map_err(|e| {
            if e.is_bad_input() {
                bad_input(e.to_string())
            } else {
                anyhow::Error::new(e)
            }
        })
    }
}
