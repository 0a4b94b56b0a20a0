//! Transport checks on real sockets, a pseudo-terminal and the in-process simulator.

use super::*;

fn demo_cage() -> Cage {
    cagehand::vehicle::demo()
        .expect("the demo profile loads")
        .cage
}

#[test]
fn udp_link_reads_frames_and_refuses_strangers() {
    let probe = std::net::UdpSocket::bind("127.0.0.1:0").expect("bind probe");
    let me = probe.local_addr().expect("addr");
    let listen = std::net::UdpSocket::bind("127.0.0.1:0").expect("bind");
    let addr = listen.local_addr().expect("addr");
    drop(listen);
    let opts = LinkOptions {
        allow: vec![AllowEntry::Socket(me)],
        ..Default::default()
    };
    let mut link = open(&LinkSpec::Udp(addr), opts, Mode::Decode).expect("open udp");
    let stranger = std::net::UdpSocket::bind("127.0.0.1:0").expect("bind");
    stranger
        .send_to(b"t=1 roll=0 pitch=0 yaw=0\n", addr)
        .expect("send");
    probe
        .send_to(b"t=2 roll=0 pitch=0 yaw=0\n", addr)
        .expect("send");
    let deadline = Instant::now() + Duration::from_secs(3);
    let (mut got, mut last) = (Vec::new(), Counters::default());
    while Instant::now() < deadline && (got.is_empty() || last.rejected == 0) {
        match link.rx.recv_timeout(Duration::from_millis(100)) {
            Ok(LinkMsg::Sample { sample, .. }) => got.push(sample.t_s),
            Ok(LinkMsg::Health { counters, .. }) => last = counters,
            _ => {}
        }
    }
    assert_eq!(got, vec![2.0]);
    assert_eq!(last.rejected, 1);
}

#[cfg(unix)]
#[test]
fn serial_link_reads_reports_busy_and_loss() {
    use serialport::SerialPort;
    use std::io::Write;
    let (mut master, slave) = serialport::TTYPort::pair().expect("pseudo-terminal pair");
    let path = slave.name().expect("pty name");
    drop(slave);
    let spec = LinkSpec::Serial {
        path: path.clone(),
        baud: 57600,
    };
    let mut link = open(&spec, LinkOptions::default(), Mode::Decode).expect("open pty");
    // A second opener finds the port taken (serialport opens exclusively).
    let e = open(&spec, LinkOptions::default(), Mode::Decode).expect_err("busy");
    assert!(matches!(e, LinkError::SerialBusy { .. }), "{e}");
    assert!(e.to_string().contains("another program"));
    master
        .write_all(b"t=1 roll=5 pitch=0 yaw=0\n")
        .expect("write to pty");
    let deadline = Instant::now() + Duration::from_secs(3);
    let mut got = None;
    while got.is_none() && Instant::now() < deadline {
        if let Ok(LinkMsg::Sample { sample, .. }) = link.rx.recv_timeout(Duration::from_millis(100))
        {
            got = Some(sample.t_s);
        }
    }
    assert_eq!(got, Some(1.0));
    // The device goes away: the reader says so (and keeps trying).
    drop(master);
    let mut lost = false;
    let deadline = Instant::now() + Duration::from_secs(3);
    while !lost && Instant::now() < deadline {
        if let Ok(LinkMsg::Event {
            event: LinkEvent::Lost(_),
            ..
        }) = link.rx.recv_timeout(Duration::from_millis(100))
        {
            lost = true;
        }
    }
    assert!(lost, "no Lost event after the pty closed");
}

#[test]
fn missing_serial_port_says_so() {
    let e = open(
        &LinkSpec::Serial {
            path: "/dev/cagehand-no-such-port".into(),
            baud: 57600,
        },
        LinkOptions::default(),
        Mode::Decode,
    )
    .expect_err("no such port");
    assert!(matches!(e, LinkError::SerialMissing { .. }), "{e}");
    assert!(e.to_string().contains("plugged in"));
}

#[test]
fn sim_at_max_speed_gives_samples_and_takes_commands() {
    let opts = LinkOptions {
        cage: Some(demo_cage()),
        replay_speed: ReplaySpeed::Max,
        ..Default::default()
    };
    let mut link = open(&LinkSpec::Sim { seed: 2 }, opts, Mode::Decode).expect("sim");
    let commander = link.commander().expect("the simulator takes commands");
    assert!(commander.send(SimCommand::Fly).is_ok());
    let mut n = 0;
    let mut note = None;
    while n < 200 || note.is_none() {
        match link.rx.recv_timeout(Duration::from_secs(2)) {
            Ok(LinkMsg::Sample { sample, .. }) if sample.attitude.is_some() => n += 1,
            Ok(LinkMsg::Event {
                event: LinkEvent::Note(s),
                ..
            }) => note = Some(s),
            Ok(_) => {}
            Err(e) => panic!("sim stopped: {e}"),
        }
    }
    // The command reached the simulator, which answered (accepted while
    // resting, refused if the reader had already run into the flight).
    assert!(
        note.as_ref().is_some_and(|s| s.starts_with("sim: fly")),
        "{note:?}"
    );
}

#[test]
fn bind_errors_give_the_hint_for_their_kind_and_the_os_text_once() {
    use std::io::{Error, ErrorKind};
    let addr: std::net::SocketAddr = "127.0.0.1:80".parse().expect("addr");
    let msg = |kind: ErrorKind| {
        let e = LinkError::Bind {
            addr,
            source: Error::new(kind, "OS TEXT"),
        };
        (e.to_string(), format!("{:#}", anyhow::Error::new(e)))
    };
    let (own, full) = msg(ErrorKind::AddrInUse);
    assert!(own.contains("another program"), "{own}");
    assert!(!own.contains("OS TEXT"), "{own}");
    assert_eq!(full.matches("OS TEXT").count(), 1, "{full}");
    let (own, _) = msg(ErrorKind::AddrNotAvailable);
    assert!(own.contains("not an address of this machine"), "{own}");
    assert!(own.contains("127.0.0.1 or 0.0.0.0"), "{own}");
    assert!(!own.contains("another program"), "{own}");
    let (own, _) = msg(ErrorKind::PermissionDenied);
    assert!(own.contains("below 1024 need privileges"), "{own}");
    let (own, full) = msg(ErrorKind::Other);
    assert_eq!(own, "cannot listen on udp 127.0.0.1:80");
    assert_eq!(full, "cannot listen on udp 127.0.0.1:80: OS TEXT");
}

#[test]
fn bind_in_use_on_loopback_says_another_program() {
    let held = std::net::UdpSocket::bind("127.0.0.1:0").expect("bind");
    let addr = held.local_addr().expect("addr");
    let e = open(&LinkSpec::Udp(addr), LinkOptions::default(), Mode::Decode).expect_err("in use");
    assert!(e.to_string().contains("another program"), "{e}");
}

/// Everything a sink sends for `reads`, in order, batches flattened.
fn sink_messages(blocking: bool, reads: &[&[u8]]) -> Vec<LinkMsg> {
    let (tx, rx) = mpsc::sync_channel(1 << 20);
    let (_spare_tx, spare_rx) = mpsc::channel();
    let decoder = Decoder::new(Proto::Auto, MavConfig::default()).expect("no key");
    let mut sink = Sink::new(tx, decoder, false, blocking, true, None, spare_rx);
    for read in reads {
        let at = sink.clock_s;
        assert!(sink.data(at, read));
    }
    sink.end();
    drop(sink);
    rx.iter().flatten().map(Parcel::unpack).collect()
}

#[test]
fn a_raw_capture_replays_as_it_did_line_by_line() {
    // The reference is the line-by-line reading a raw capture had before
    // (still what a sink that may drop does): each newline-ended piece
    // pushed and flushed, its counters sent before its first sample. The
    // blocking replay reads the bytes whole and must send the same
    // messages, ticks for the sender's silences included.
    let cage = demo_cage();
    let mut sim = Sim::new(&cage, 11);
    let mut wire = Wire::new(Proto::Mavlink);
    let mut bytes = Vec::new();
    for step in 0..3000 {
        sim.step(0.01);
        let frames = wire.encode(&sim.telemetry());
        // Three seconds of silence, and noise between frames (newlines,
        // MAVLink 2 and 1 start bytes).
        if !(1000..1300).contains(&step) {
            bytes.extend(frames);
        }
        if step % 97 == 0 {
            bytes.extend_from_slice(&[b'\n', 0xFD, 3, b'\n', 0, 0xFE, b'\n']);
        }
    }
    for read_len in [1usize, 7, 300, 4096, 1 << 16] {
        let reads: Vec<&[u8]> = bytes.chunks(read_len).collect();
        let want = sink_messages(false, &reads);
        let got = sink_messages(true, &reads);
        assert!(want.iter().any(|m| matches!(m, LinkMsg::Tick { .. })));
        assert_eq!(
            format!("{got:?}"),
            format!("{want:?}"),
            "reads of {read_len}"
        );
    }
}
