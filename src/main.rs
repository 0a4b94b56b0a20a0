//! The `cagehand` binary: the application around the core library. The
//! command line (`cli`), the screens (`tui`) and the link transports
//! (`transport`: sockets, serial ports, files, threads) live here; every
//! policy lives in the library (`cagehand::...`).

use std::process::ExitCode;

mod cli;
mod transport;
mod tui;

/// mimalloc instead of the system allocator, on Linux on x86-64 (measured)
/// and 64-bit ARM (Cargo.toml); elsewhere the system allocator stays. A large cage's statics and recovery map touch tens of
/// megabytes on every core; with the system allocator, one `plan --all` on
/// a 1280-face cage took 7,300 page faults, a sixth of its time. mimalloc
/// asks the kernel for 2 MB pages where the kernel allows it (transparent
/// huge pages set to `madvise` or `always`, the usual default): about 280
/// faults, and `plan --all`, `cage --json` and `profile check` take 17-19%
/// less time (DEVELOPERS.md, budget table). Where the kernel refuses large
/// pages it still works, without that gain. The benchmarks use it too
/// (benches/), so they measure what ships.
#[cfg(all(
    target_os = "linux",
    any(target_arch = "x86_64", target_arch = "aarch64")
))]
#[global_allocator]
static ALLOCATOR: mimalloc::MiMalloc = mimalloc::MiMalloc;

fn main() -> ExitCode {
    cli::main()
}
