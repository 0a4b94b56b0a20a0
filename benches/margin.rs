//! The whole remaining-margin table of the demo cage (every face, the
//! profile's default surface, an undamaged cage), the figure the screens
//! recompute when the log changes. Budget: under 50 ms (DEVELOPERS.md).

use cagehand::cage::Cage;
use cagehand::margin::{CageCondition, Strikes, margin_table};
use cagehand::profile::Profile;
use criterion::{Criterion, criterion_group, criterion_main};
use std::hint::black_box;

/// The program's own allocator (src/main.rs), so the figure is the
/// program's.
#[cfg(all(
    target_os = "linux",
    any(target_arch = "x86_64", target_arch = "aarch64")
))]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn demo_margin(c: &mut Criterion) {
    let profile = match Profile::demo() {
        Ok(p) => p,
        Err(e) => panic!("the bundled demo profile is refused: {e}"),
    };
    let cage = match Cage::from_profile(&profile) {
        Ok(c) => c,
        Err(e) => panic!("the demo cage cannot be built: {e}"),
    };
    let condition = CageCondition::new_cage(&cage);
    c.bench_function("margin_table_demo_faces", |b| {
        b.iter(|| margin_table(black_box(&cage), &profile, &condition, None, Strikes::Faces))
    });
}

criterion_group! {
    name = benches;
    config = Criterion::default().sample_size(10);
    targets = demo_margin
}
criterion_main!(benches);
