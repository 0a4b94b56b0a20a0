//! The budget benchmarks (DEVELOPERS.md, "Benchmarks and the performance
//! budget"): the live path (MAVLink decoding, line parsing, face
//! identification) and the cage computations (hull, recovery map, impact) on
//! the demo and on geodesic cages generated in code
//! (`cagehand::geodesic`: level 2 has 320 faces and 561 members, level 3
//! 1280 faces and 2241 members, level 4 2562 nodes).
//!
//! Drawing a Watch frame is in benches/screens.rs (it compiles the screens'
//! source into itself, since they are modules of the binary).
//!
//! `cargo bench` runs them all (a few minutes, most of it the 2241-member
//! impact); `cargo bench -- impact` runs one group. CI only compiles them.

use cagehand::cage::Cage;
use cagehand::hull::Hull;
use cagehand::impact::{ImpactInput, Strike, analyse_impact};
use cagehand::link::Proto;
use cagehand::link::line::LineDecoder;
use cagehand::link::mavlink::{MavConfig, MavDecoder, SampleMaker};
use cagehand::profile::Profile;
use cagehand::righting::RightingModel;
use cagehand::sim::Sim;
use cagehand::sim::wire::Wire;
use divan::counter::{BytesCount, ItemsCount};
use divan::{Bencher, black_box};
use nalgebra::Vector3;

/// The program's own allocator (src/main.rs), so the figures are the
/// program's.
#[cfg(all(
    target_os = "linux",
    any(target_arch = "x86_64", target_arch = "aarch64")
))]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() {
    divan::main();
}

fn demo() -> (Profile, Cage) {
    let p = Profile::demo().expect("demo profile");
    let c = Cage::from_profile(&p).expect("demo cage");
    (p, c)
}

fn geodesic(k: u32) -> (Profile, Cage) {
    let p = Profile::parse(&cagehand::geodesic::profile_toml(k), "geodesic").expect("profile");
    let c = Cage::from_profile(&p).expect("cage");
    (p, c)
}

/// About a megabyte of the simulator's telemetry on the wire: attitude and
/// IMU every step, velocity every fifth, status and battery once a second.
fn stream(proto: Proto, bytes: usize) -> Vec<u8> {
    let (_, c) = demo();
    let mut sim = Sim::new(&c, 7);
    let mut wire = Wire::new(proto);
    let mut out = Vec::with_capacity(bytes + 1024);
    while out.len() < bytes {
        sim.step(0.01);
        out.extend(wire.encode(&sim.telemetry()));
    }
    out
}

mod live {
    use super::*;

    /// MAVLink decoding and sample making, bytes per second: every frame
    /// checked and made into a sample as the link decoder does once a
    /// link speaks MAVLink (`MavDecoder::push_each`, the frames read where
    /// they lie).
    #[divan::bench(sample_count = 20)]
    fn decode_mavlink(b: Bencher) {
        let data = stream(Proto::Mavlink, 1 << 20);
        b.counter(BytesCount::new(data.len())).bench(|| {
            let mut d = MavDecoder::new(MavConfig::default());
            let mut maker = SampleMaker::default();
            let mut n = 0usize;
            for chunk in data.chunks(4096) {
                d.push_each(chunk, |f| {
                    black_box(maker.sample(f, 0.0));
                    n += 1;
                });
            }
            n
        });
    }

    /// MAVLink decoding alone, bytes per second: every frame found, checked
    /// and decoded into its message, no sample made (the difference from
    /// `decode_mavlink` is what making the samples costs).
    #[divan::bench(sample_count = 20)]
    fn decode_mavlink_frames(b: Bencher) {
        let data = stream(Proto::Mavlink, 1 << 20);
        b.counter(BytesCount::new(data.len())).bench(|| {
            let mut d = MavDecoder::new(MavConfig::default());
            let mut n = 0usize;
            for chunk in data.chunks(4096) {
                d.push_each(chunk, |f| {
                    black_box(f);
                    n += 1;
                });
            }
            n
        });
    }

    /// Line protocol parsing, samples per second.
    #[divan::bench(sample_count = 20)]
    fn parse_lines(b: Bencher) {
        let data = stream(Proto::Line, 1 << 20);
        let lines = data.iter().filter(|&&c| c == b'\n').count();
        b.counter(ItemsCount::new(lines)).bench(|| {
            let mut d = LineDecoder::new();
            let mut n = 0usize;
            for chunk in data.chunks(4096) {
                d.push(chunk, 0.0);
                while let Some(s) = d.pop() {
                    black_box(s);
                    n += 1;
                }
            }
            n
        });
    }

    fn gravities() -> Vec<Vector3<f64>> {
        (0..1000)
            .map(|i| {
                let (th, ph) = (i as f64 * 0.0031, i as f64 * 0.0173);
                Vector3::new(th.sin() * ph.cos(), th.sin() * ph.sin(), th.cos())
            })
            .collect()
    }

    /// Face identification of one sample on the demo cage (20 faces).
    #[divan::bench]
    fn fit_face_demo(b: Bencher) {
        let (_, c) = demo();
        let g = gravities();
        b.counter(ItemsCount::new(g.len())).bench(|| {
            for x in &g {
                black_box(cagehand::rest::fit_face(&c, x));
            }
        });
    }

    /// Face identification of one sample on a 1280-face cage.
    #[divan::bench(sample_count = 20)]
    fn fit_face_1280(b: Bencher) {
        let (_, c) = geodesic(3);
        let g = gravities();
        b.counter(ItemsCount::new(g.len())).bench(|| {
            for x in &g {
                black_box(cagehand::rest::fit_face(&c, x));
            }
        });
    }
}

mod cage {
    use super::*;

    /// Convex hull of the 2562 nodes of a level-4 geodesic cage.
    #[divan::bench(sample_count = 10)]
    fn hull_2562(b: Bencher) {
        let (pts, _) = cagehand::geodesic::sphere(4);
        let pts: Vec<[f64; 3]> = pts.iter().map(|p| [p.x, p.y, p.z]).collect();
        b.bench(|| Hull::new(&pts).expect("hull").faces.len());
    }

    /// Recovery map (a plan from every face) of the demo.
    #[divan::bench(sample_count = 20)]
    fn recovery_map_demo(b: Bencher) {
        let (p, c) = demo();
        let m = RightingModel::new(&p, &c).expect("model");
        b.bench(|| m.recovery_map().len());
    }

    /// Recovery map of a 1280-face cage, the model built each time too
    /// (as `plan --all` does).
    #[divan::bench(sample_count = 5)]
    fn recovery_map_1280(b: Bencher) {
        let (p, c) = geodesic(3);
        b.bench(|| {
            let m = RightingModel::new(&p, &c).expect("model");
            m.recovery_map().len()
        });
    }

    fn impact(b: Bencher, (p, c): (Profile, Cage)) {
        b.bench(|| {
            analyse_impact(&c, &p, Strike::Face(0), &ImpactInput::PeakAccel { g: 20.0 })
                .expect("impact")
                .force_n
        });
    }

    /// Impact (peak acceleration 20 g on F1) on the demo, 30 members.
    #[divan::bench(sample_count = 20)]
    fn impact_demo(b: Bencher) {
        impact(b, demo());
    }

    /// Impact on the 561-member geodesic cage.
    #[divan::bench(sample_count = 5)]
    fn impact_561(b: Bencher) {
        impact(b, geodesic(2));
    }

    /// Impact on the 2241-member geodesic cage.
    #[divan::bench(sample_count = 2, sample_size = 1)]
    fn impact_2241(b: Bencher) {
        impact(b, geodesic(3));
    }
}
