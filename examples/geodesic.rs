//! Print the geodesic test cage of a level as a profile (TOML), for
//! measuring whole commands on large cages:
//! `cargo run --release --example geodesic -- 3 > /tmp/geodesic-3.toml`.

fn main() -> std::process::ExitCode {
    let arg = std::env::args().nth(1).unwrap_or_else(|| "1".into());
    match arg.parse::<u32>() {
        Ok(k) if k <= 6 => {
            print!("{}", cagehand::geodesic::profile_toml(k));
            std::process::ExitCode::SUCCESS
        }
        _ => {
            eprintln!("level {arg:?}: expected a subdivision level from 0 to 6");
            std::process::ExitCode::from(2)
        }
    }
}
