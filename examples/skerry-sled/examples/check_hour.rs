//! One simulated hour of the Skerry sled at 100 Hz through cairn's whole
//! check, as a small binary a firmware CI can call: prints the report and
//! the wall time, exits 0 on pass, 1 on fail, 2 when the scenario is bad.
//!
//! `cargo run --release -p skerry-sled --example check_hour [SECONDS]`

#[path = "../tests/common/mod.rs"]
mod common;

use std::process::ExitCode;

fn main() -> ExitCode {
    let seconds = std::env::args()
        .nth(1)
        .and_then(|s| s.parse::<f64>().ok())
        .unwrap_or(3600.0);
    let start = std::time::Instant::now();
    match common::scenario(seconds).check() {
        Ok(report) => {
            print!("{}", report.text());
            eprintln!(
                "checked {} steps of 15 states in {:.2} s wall",
                report.run.steps,
                start.elapsed().as_secs_f64()
            );
            ExitCode::from(report.exit_code())
        }
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(2)
        }
    }
}
