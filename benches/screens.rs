//! Drawing a full Watch frame on ratatui's `TestBackend` (the budget table
//! in DEVELOPERS.md): the demo vehicle resting on a face, at 80x24 and at
//! 160x48.
//!
//! The screens are modules of the binary, which a benchmark cannot link,
//! so this benchmark compiles the same source files (`src/tui.rs` and its
//! modules) into itself. They reach the core only through `cagehand::...`
//! (tests/boundary.rs), which is what makes that possible.

#[allow(dead_code, unused_imports)]
#[path = "../src/"]
mod app {
    pub mod tui;
}
// The screens name each other `crate::tui::...`.
use app::tui;

use divan::{Bencher, black_box};
use ratatui::Terminal;
use ratatui::backend::TestBackend;
use tui::model::{LiveState, LiveView, Model, Msg, RestSample, update};

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

/// The demo vehicle resting on face `face`, as the feed would send it.
fn resting_demo(face: usize) -> Model {
    let d = cagehand::vehicle::demo().expect("the demo profile loads");
    let mut m = Model::new(
        d.profile,
        d.cage,
        "sim",
        tui::theme::Theme::new(tui::theme::ColourDepth::True),
    );
    let q = cagehand::rest::resting_attitude(&m.shared.cage, face);
    let fit = cagehand::rest::fit_face(&m.shared.cage, &cagehand::attitude::gravity_body(&q));
    let mut live = LiveView::waiting("sim");
    live.state = LiveState::Resting;
    live.reason = None;
    live.face = Some(face);
    live.error_deg = Some(fit.error_deg);
    live.rpy_deg = Some(cagehand::attitude::rpy_deg(&q));
    live.battery_v = Some(11.9);
    live.armed = Some(false);
    live.link.rate_hz = 50.0;
    live.link.age_s = Some(0.0);
    live.rest = Some(RestSample {
        t_s: 12.0,
        attitude: q,
        status: cagehand::rest::RestStatus {
            state: cagehand::rest::RestState::Resting,
            face,
            error_deg: fit.error_deg,
            fit,
        },
    });
    update(&mut m, Msg::Live(Box::new(live)));
    m
}

fn draw(b: Bencher, (w, h): (u16, u16)) {
    let m = resting_demo(8);
    let mut term = Terminal::new(TestBackend::new(w, h)).expect("test terminal");
    b.bench_local(|| {
        term.draw(|f| tui::view::view(black_box(&m), f))
            .expect("draw");
    });
}

/// One full Watch frame at 80x24.
#[divan::bench]
fn watch_frame_80x24(b: Bencher) {
    draw(b, (80, 24));
}

/// One full Watch frame at 160x48.
#[divan::bench]
fn watch_frame_160x48(b: Bencher) {
    draw(b, (160, 48));
}
