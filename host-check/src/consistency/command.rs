//! `cairn trials`: the command-line face of the Monte Carlo consistency
//! study (arguments, exit code, text and JSON output).

use std::path::PathBuf;

use clap::Args;

use super::{Form, Options, Variant, Verdict, all_variants};
use crate::exit::{EXIT_BAD_INPUT, EXIT_FAIL, EXIT_PASS, Failure};
use crate::spec::{self, Plan, Precision};

/// Exit codes of `cairn trials`.
pub const EXIT_CODES: &str = "Exit codes:
  0  the variant to flash (the spec's [flash], default f32 joseph) is consistent;
     with --variant, every variant run is consistent
  1  it is not (optimistic, pessimistic or failed)
  2  bad input: a malformed spec, a bad option, an unwritable file";

/// `cairn trials`.
#[derive(Debug, Args)]
pub struct TrialsArgs {
    /// The spec file (TOML); the built-in demo when omitted.
    pub spec: Option<PathBuf>,
    /// Monte Carlo runs.
    #[arg(long, value_name = "N", default_value_t = super::DEFAULT_RUNS)]
    pub runs: usize,
    /// Steps per run (default: the spec's horizon, at most 2000 steps).
    #[arg(long, value_name = "K", conflicts_with = "seconds")]
    pub steps: Option<u64>,
    /// Seconds per run, instead of --steps.
    #[arg(long, value_name = "S")]
    pub seconds: Option<f64>,
    /// Multiply the process noise the filters are told by this factor (the
    /// simulated truth keeps the spec's): 0.1 shows what a Q ten times too
    /// small does.
    #[arg(long, value_name = "X", default_value_t = 1.0)]
    pub filter_q_scale: f64,
    /// Pose model, origin shift: each variant moves its origin to its x, y
    /// (whole metres, origin kept in f64) whenever |x| or |y| passes M
    /// metres, and is judged on origin + local state (overrides the spec's
    /// `origin_shift_m`).
    #[arg(long = "origin-shift", alias = "recentre", value_name = "M")]
    pub recentre: Option<f64>,
    /// Confidence of the two-sided chi-square intervals.
    #[arg(long, value_name = "P", default_value_t = 0.95)]
    pub confidence: f64,
    /// Run only this variant, e.g. f32-joseph, f64-conventional, f32-u-d
    /// (repeatable; all six by default).
    #[arg(long = "variant", value_name = "PRECISION-FORM")]
    pub variants: Vec<String>,
    /// Write the whole report (with decimated NEES/NIS series) as JSON.
    #[arg(long, value_name = "PATH")]
    pub json: Option<PathBuf>,
    /// Print only one verdict line per variant.
    #[arg(long, short)]
    pub quiet: bool,
    /// Never show a progress bar (it is hidden anyway when stderr is not a terminal).
    #[arg(long)]
    pub no_progress: bool,
}

fn bad(message: String) -> Failure {
    Failure {
        code: EXIT_BAD_INPUT,
        error: message.into(),
    }
}

/// Parses `f32-joseph`, `f64-u-d` and the like.
fn parse_variant(text: &str) -> Option<Variant> {
    let (scalar, form) = text.trim().split_once(['-', ' ', ':'])?;
    let precision = match scalar.to_ascii_lowercase().as_str() {
        "f32" => Precision::F32,
        "f64" => Precision::F64,
        _ => return None,
    };
    Some(Variant::of(precision, Form::parse(form)?))
}

/// Runs `cairn trials`; returns the exit code.
///
/// # Errors
/// A [`Failure`] with exit code 2 for a bad spec, option or output file.
pub fn execute(a: &TrialsArgs) -> Result<u8, Failure> {
    let mut plan: Plan = match &a.spec {
        Some(path) => spec::load(path).map_err(|e| Failure {
            code: EXIT_BAD_INPUT,
            error: Box::new(e),
        })?,
        None => crate::demo::plan().map_err(|e| Failure {
            code: EXIT_BAD_INPUT,
            error: Box::new(e),
        })?,
    };
    if let (Some(spec), Some(json)) = (&a.spec, &a.json) {
        crate::output::refuse_clashes(&[("spec", spec)], &[("--json", json)])?;
    }
    plan.set_recentre(a.recentre)
        .map_err(|m| crate::exit::bad(crate::exit::Message(m)))?;
    let mut variants = Vec::new();
    for v in &a.variants {
        let parsed = parse_variant(v).ok_or_else(|| {
            bad(format!(
                "--variant `{v}`: write PRECISION-FORM with PRECISION f32 or f64 and FORM joseph, conventional or u-d"
            ))
        })?;
        if !variants.contains(&parsed) {
            variants.push(parsed);
        }
    }
    let chosen = !variants.is_empty();
    if !chosen {
        variants = all_variants();
    }
    // In the check's order (cheapest first), whatever the order of the
    // options.
    variants.sort_by_key(|v| v.cost_rank);
    let steps = match a.seconds {
        Some(s) if !(s.is_finite() && s > 0.0) => {
            return Err(bad(format!("--seconds must be positive, got {s}")));
        }
        Some(s) => Some(((s * plan.step_hz).round() as u64).max(1)),
        None => a.steps,
    };
    let options = Options {
        runs: a.runs,
        steps,
        filter_q_scale: a.filter_q_scale,
        confidence: a.confidence,
        variants,
        progress: !a.no_progress,
    };
    let report = super::run(&plan, &options).map_err(|e| Failure {
        code: EXIT_BAD_INPUT,
        error: Box::new(e),
    })?;
    if a.quiet {
        let mut text = String::new();
        for v in &report.variants {
            text.push_str(&format!(
                "{}: {} ({})\n",
                v.label,
                v.verdict.word(),
                v.reason
            ));
        }
        crate::output::print(&text)?;
    } else {
        crate::output::print(&report.text())?;
    }
    if let Some(path) = &a.json {
        let json = serde_json::to_string_pretty(&report)
            .map_err(|e| bad(format!("cannot write the JSON report: {e}")))?;
        crate::output::write_file(path, json.as_bytes())?;
    }
    let judged: Vec<&super::VariantReport> = if chosen {
        report.variants.iter().collect()
    } else {
        report
            .variants
            .iter()
            .filter(|v| {
                v.variant.precision == plan.flash.precision
                    && Form::parse(&plan.flash.form) == Some(v.variant.form)
            })
            .collect()
    };
    let all_consistent =
        !judged.is_empty() && judged.iter().all(|v| v.verdict == Verdict::Consistent);
    Ok(if all_consistent { EXIT_PASS } else { EXIT_FAIL })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn variant_names_parse() {
        assert_eq!(
            parse_variant("f32-u-d"),
            Some(Variant::of(Precision::F32, Form::Ud))
        );
        assert_eq!(
            parse_variant("F64-Joseph"),
            Some(Variant::of(Precision::F64, Form::Joseph))
        );
        assert_eq!(parse_variant("f16-joseph"), None);
        assert_eq!(parse_variant("f32-square-root"), None);
        assert_eq!(parse_variant("joseph"), None);
    }
}
