//! `cairn constants`: the command-line face of the firmware constants
//! generator.

use std::path::PathBuf;

use clap::{Args, ValueEnum};

use crate::exit::{EXIT_BAD_INPUT, EXIT_PASS, Failure};
use crate::spec::{self, Precision};

/// Exit codes of `cairn constants`.
pub const EXIT_CODES: &str = "Exit codes:
  0  written
  2  bad input: a malformed spec, a value the precision cannot hold, an unwritable file";

/// The precision of the constants.
#[derive(Debug, Clone, Copy, ValueEnum)]
pub enum ScalarArg {
    /// Single precision (the usual choice on a Cortex-M4F).
    F32,
    /// Double precision.
    F64,
}

/// `cairn constants`.
#[derive(Debug, Args)]
pub struct ConstantsArgs {
    /// The spec file (TOML); the built-in demo when omitted.
    pub spec: Option<PathBuf>,
    /// Write the Rust source here (standard output when omitted).
    #[arg(long, short, value_name = "PATH")]
    pub output: Option<PathBuf>,
    /// Precision of the arrays.
    #[arg(
        long = "precision",
        alias = "scalar",
        value_enum,
        default_value = "f32"
    )]
    pub scalar: ScalarArg,
}

fn bad(error: Box<dyn std::error::Error + Send + Sync>) -> Failure {
    Failure {
        code: EXIT_BAD_INPUT,
        error,
    }
}

/// Runs `cairn constants`; returns the exit code.
///
/// # Errors
/// A [`Failure`] with exit code 2 for a bad spec, an unrepresentable value
/// or an unwritable file.
pub fn execute(a: &ConstantsArgs) -> Result<u8, Failure> {
    let plan = match &a.spec {
        Some(path) => spec::load(path).map_err(|e| bad(Box::new(e)))?,
        None => crate::demo::plan().map_err(|e| bad(Box::new(e)))?,
    };
    if let (Some(spec), Some(out)) = (&a.spec, &a.output) {
        crate::output::refuse_clashes(&[("spec", spec)], &[("-o", out)])?;
    }
    let precision = match a.scalar {
        ScalarArg::F32 => Precision::F32,
        ScalarArg::F64 => Precision::F64,
    };
    let generated = super::generate(&plan, precision).map_err(|e| bad(Box::new(e)))?;
    match &a.output {
        Some(path) => {
            crate::output::write_file(path, generated.source.as_bytes())?;
            crate::output::note(&format!(
                "wrote {} constants to {}{}",
                generated.constants.len(),
                path.display(),
                match &generated.steady_note {
                    Some(why) => format!(" (no steady state: {why})"),
                    None => " (with the Riccati steady state)".into(),
                }
            ));
        }
        None => crate::output::print(&generated.source)?,
    }
    Ok(EXIT_PASS)
}
