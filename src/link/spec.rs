//! Link specs as the user types them (`udp:HOST:PORT`, `serial:PATH@BAUD`,
//! `file:PATH`, `raw:PATH`, `sim[:SEED]`), sender allow-lists and replay
//! speeds. Pure parsing: nothing is opened here.

use std::net::{IpAddr, Ipv4Addr, SocketAddr};
use std::path::PathBuf;

/// Baud rate when `serial:PATH` names none: the usual telemetry-radio rate.
pub const DEFAULT_BAUD: u32 = 57600;

/// Where telemetry comes from.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum LinkSpec {
    /// Listen for UDP datagrams on this address.
    Udp(SocketAddr),
    /// A serial port.
    Serial {
        /// Device path, e.g. `/dev/ttyUSB0`.
        path: String,
        /// Baud rate.
        baud: u32,
    },
    /// Replay a recording made by `cagehand record`.
    File(PathBuf),
    /// Read a plain byte capture.
    Raw(PathBuf),
    /// The built-in simulated vehicle, in-process.
    Sim {
        /// Its seed.
        seed: u64,
    },
}

/// A spec that does not parse.
#[derive(Debug, Clone, PartialEq, Eq, thiserror::Error)]
#[error(
    "link {found:?}: {why}; expected udp:HOST:PORT (or udp:PORT), serial:PATH@BAUD, file:PATH, raw:PATH or sim[:SEED]"
)]
pub struct SpecError {
    /// What was typed.
    pub found: String,
    /// What is wrong with it.
    pub why: String,
}

fn err(found: &str, why: impl Into<String>) -> SpecError {
    SpecError {
        found: found.to_string(),
        why: why.into(),
    }
}

/// Parse `HOST` as an address: an IP literal (IPv6 in brackets or bare),
/// `localhost`, or empty for the loopback address.
fn parse_host(h: &str) -> Option<IpAddr> {
    match h {
        "" | "localhost" => Some(IpAddr::V4(Ipv4Addr::LOCALHOST)),
        _ => h
            .strip_prefix('[')
            .and_then(|x| x.strip_suffix(']'))
            .unwrap_or(h)
            .parse()
            .ok(),
    }
}

impl std::str::FromStr for LinkSpec {
    type Err = SpecError;
    fn from_str(s: &str) -> Result<LinkSpec, SpecError> {
        let (kind, rest) = s.split_once(':').unwrap_or((s, ""));
        match kind {
            "udp" => {
                let (host, port) = match rest.rsplit_once(':') {
                    Some((h, p)) if !h.ends_with(':') || h.starts_with('[') => (h, p),
                    _ => ("", rest),
                };
                let port: u16 = port
                    .parse()
                    .map_err(|_| err(s, format!("port {port:?} is not a number 0-65535")))?;
                let ip = parse_host(host).ok_or_else(|| {
                    err(s, format!("host {host:?} is not an IP address (name one, e.g. 127.0.0.1 or 0.0.0.0)"))
                })?;
                Ok(LinkSpec::Udp(SocketAddr::new(ip, port)))
            }
            "serial" => {
                let (path, baud) = match rest.rsplit_once('@') {
                    Some((p, b)) => (
                        p,
                        b.parse::<u32>().ok().filter(|&b| b > 0).ok_or_else(|| {
                            err(s, format!("baud {b:?} is not a positive number"))
                        })?,
                    ),
                    None => (rest, DEFAULT_BAUD),
                };
                if path.is_empty() {
                    return Err(err(s, "no device path"));
                }
                Ok(LinkSpec::Serial {
                    path: path.to_string(),
                    baud,
                })
            }
            "file" | "raw" if rest.is_empty() => Err(err(s, "no file path")),
            "file" => Ok(LinkSpec::File(PathBuf::from(rest))),
            "raw" => Ok(LinkSpec::Raw(PathBuf::from(rest))),
            "sim" if !s.contains(':') => Ok(LinkSpec::Sim { seed: 1 }),
            "sim" => rest
                .parse()
                .map(|seed| LinkSpec::Sim { seed })
                .map_err(|_| err(s, format!("seed {rest:?} is not a whole number"))),
            _ => Err(err(s, format!("unknown kind {kind:?}"))),
        }
    }
}

impl std::fmt::Display for LinkSpec {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            LinkSpec::Udp(a) => write!(f, "udp:{a}"),
            LinkSpec::Serial { path, baud } => write!(f, "serial:{path}@{baud}"),
            LinkSpec::File(p) => write!(f, "file:{}", p.display()),
            LinkSpec::Raw(p) => write!(f, "raw:{}", p.display()),
            LinkSpec::Sim { seed } => write!(f, "sim:{seed}"),
        }
    }
}

/// One `--allow` entry: a sender address, with or without its port.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum AllowEntry {
    /// Any port from this address.
    Ip(IpAddr),
    /// Exactly this address and port.
    Socket(SocketAddr),
}

impl AllowEntry {
    /// Whether a sender matches.
    pub fn matches(&self, from: &SocketAddr) -> bool {
        match self {
            AllowEntry::Ip(ip) => from.ip() == *ip,
            AllowEntry::Socket(a) => from == a,
        }
    }
}

impl std::str::FromStr for AllowEntry {
    type Err = String;
    fn from_str(s: &str) -> Result<AllowEntry, String> {
        if let Ok(a) = s.parse::<SocketAddr>() {
            return Ok(AllowEntry::Socket(a));
        }
        parse_host(s)
            .filter(|_| !s.is_empty())
            .map(AllowEntry::Ip)
            .ok_or_else(|| format!("{s:?} is not an IP address or IP:PORT"))
    }
}

/// Pace of a replay.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum ReplaySpeed {
    /// This many times the recorded pace (1 = as recorded).
    Factor(f64),
    /// As fast as the reader can go.
    Max,
}

impl Default for ReplaySpeed {
    fn default() -> ReplaySpeed {
        ReplaySpeed::Factor(1.0)
    }
}

impl std::str::FromStr for ReplaySpeed {
    type Err = String;
    fn from_str(s: &str) -> Result<ReplaySpeed, String> {
        if s == "max" {
            return Ok(ReplaySpeed::Max);
        }
        match s.parse::<f64>() {
            Ok(x) if x.is_finite() && x > 0.0 => Ok(ReplaySpeed::Factor(x)),
            _ => Err(format!(
                "{s:?}: expected `max` or a positive factor such as 1 or 4"
            )),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn specs_parse_and_print() {
        let cases = [
            ("udp:14550", "udp:127.0.0.1:14550"),
            ("udp::14550", "udp:127.0.0.1:14550"),
            ("udp:localhost:9", "udp:127.0.0.1:9"),
            ("udp:0.0.0.0:14550", "udp:0.0.0.0:14550"),
            ("udp:[::1]:14550", "udp:[::1]:14550"),
            ("serial:/dev/ttyUSB0@115200", "serial:/dev/ttyUSB0@115200"),
            ("serial:/dev/ttyACM0", "serial:/dev/ttyACM0@57600"),
            ("file:rec/a.chrec", "file:rec/a.chrec"),
            ("raw:cap.bin", "raw:cap.bin"),
            ("sim", "sim:1"),
            ("sim:42", "sim:42"),
        ];
        for (typed, shown) in cases {
            let s: LinkSpec = typed.parse().unwrap_or_else(|e| panic!("{typed}: {e}"));
            assert_eq!(s.to_string(), shown);
        }
        for bad in [
            "udp:host.example:1",
            "udp:70000",
            "tcp:1",
            "serial:@9600",
            "serial:/dev/x@0",
            "file:",
            "sim:x",
        ] {
            let e = bad.parse::<LinkSpec>().expect_err(bad);
            assert!(e.to_string().contains("expected udp:HOST:PORT"), "{e}");
        }
    }

    #[test]
    fn allow_entries_and_speeds() {
        let a: AllowEntry = "127.0.0.1".parse().expect("ip");
        let b: AllowEntry = "127.0.0.1:5000".parse().expect("socket");
        let from: SocketAddr = "127.0.0.1:5000".parse().expect("addr");
        let other: SocketAddr = "127.0.0.2:5000".parse().expect("addr");
        assert!(a.matches(&from) && b.matches(&from));
        assert!(!a.matches(&other) && !b.matches(&"127.0.0.1:5001".parse().expect("addr")));
        assert!("nope".parse::<AllowEntry>().is_err());
        assert_eq!("max".parse::<ReplaySpeed>(), Ok(ReplaySpeed::Max));
        assert_eq!("2".parse::<ReplaySpeed>(), Ok(ReplaySpeed::Factor(2.0)));
        assert!("0".parse::<ReplaySpeed>().is_err());
    }
}
