//! The `cagehand` binary: the application around the core library. The
//! command line (`cli`), the screens (`tui`) and the link transports
//! (`transport`: sockets, serial ports, files, threads) live here; every
//! policy lives in the library (`cagehand::...`).

use std::process::ExitCode;

mod cli;
mod transport;
mod tui;

fn main() -> ExitCode {
    cli::main()
}
