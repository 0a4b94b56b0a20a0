//! The `cagehand` binary: argument parsing and dispatch only. Everything
//! with a policy lives in the library.

use std::process::ExitCode;

fn main() -> ExitCode {
    cagehand::cli::main()
}
