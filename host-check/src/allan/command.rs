//! `cairn allan`: the options, and the run from a log file to the report
//! and the plot.

use std::fs::File;
use std::io::BufReader;
use std::path::PathBuf;

use clap::Args;

use crate::exit::{EXIT_BAD_INPUT, EXIT_PASS, Failure};
use crate::output;

/// Exit codes of `cairn allan`.
pub const EXIT_CODES: &str = "Exit codes:
  0  analysed (warnings about the log, if any, are in the report)
  2  bad input: an unreadable or malformed log (the message names the file
     and line), a bad option, or an output that cannot be written";

/// `cairn allan`.
#[derive(Debug, Args)]
pub struct AllanArgs {
    /// The recorded static log: CSV with a header `time[s],name[unit],...`
    /// and one row per sample (see docs/allan.md).
    pub log: PathBuf,
    /// The samples' unit for every column (overrides the header's), e.g.
    /// "deg/s" or "m/s^2".
    #[arg(long)]
    pub unit: Option<String>,
    /// Write the log-log Allan deviation plot with the fitted lines as SVG.
    #[arg(long, value_name = "PATH")]
    pub plot: Option<PathBuf>,
    /// The filter's step rate, Hz, for the per-step numbers (default: the
    /// log's own sample rate).
    #[arg(long, value_name = "HZ")]
    pub step_hz: Option<f64>,
    /// Cluster times per decade (1 to 100).
    #[arg(long, value_name = "N", default_value_t = 10)]
    pub per_decade: u32,
}

fn bad(message: String) -> Failure {
    Failure {
        code: EXIT_BAD_INPUT,
        error: message.into(),
    }
}

/// Runs `cairn allan`.
///
/// # Errors
/// Exit code 2 for bad input, with the file and line for a bad log row.
pub fn execute(a: &AllanArgs) -> Result<u8, Failure> {
    if !(1..=100).contains(&a.per_decade) {
        return Err(bad(format!(
            "--per-decade must be 1 to 100, got {}",
            a.per_decade
        )));
    }
    if let Some(r) = a.step_hz
        && !(r.is_finite() && r > 0.0)
    {
        return Err(bad(format!("--step-hz must be positive, got {r}")));
    }
    if let Some(u) = &a.unit {
        crate::numeric::units::parse_unit(u).map_err(|e| bad(format!("--unit: {e}")))?;
    }
    if let Some(p) = &a.plot {
        output::refuse_clashes(&[("log", &a.log)], &[("--plot", p)])?;
    }
    let name = a.log.display().to_string();
    let file = File::open(&a.log).map_err(|e| bad(format!("cannot read {name}: {e}")))?;
    let options = super::Options {
        points_per_decade: a.per_decade,
        unit: a.unit.clone(),
    };
    let analysis = super::analyse(&name, BufReader::with_capacity(1 << 20, file), &options)
        .map_err(|e| Failure {
            code: EXIT_BAD_INPUT,
            error: Box::new(e),
        })?;
    let step_s = a
        .step_hz
        .map_or(analysis.summary.mean_interval_s(), |hz| 1.0 / hz);
    output::print(&super::report::render(&analysis, step_s))?;
    if let Some(p) = &a.plot {
        output::write_file(p, super::plot::svg(&analysis).as_bytes())?;
    }
    Ok(EXIT_PASS)
}
