//! Monte Carlo consistency: simulates truth and measurements from a spec's
//! own noise, runs every filter variant, and judges average NEES and NIS
//! against their chi-square intervals (Bar-Shalom, Li & Kirubarajan 2001).
//!
//! Run `i` draws its noise from a generator seeded by the spec's seed and
//! `i` alone, and the averages are summed in run order, so a report does
//! not depend on the number of threads or their scheduling.

pub mod chi2;
pub mod command;
pub mod report;

use std::fmt;
use std::io::IsTerminal;

use indicatif::{ProgressBar, ProgressStyle};
use rayon::prelude::*;

pub use crate::engine::{Form, Variant};
pub use chi2::{Interval, average_interval};
pub use report::{Report, Summary, VariantReport, Verdict};

use crate::engine::check::Steady;
use crate::engine::trials::{Trace, run_trial};
use crate::engine::{Channel, InputProfile, System, VARIANTS};
use crate::models::{Visit, with_models};
use crate::spec::Plan;

/// Steps per run when the options do not say (the spec's horizon if shorter).
pub const DEFAULT_STEPS: u64 = 2_000;
/// Most steps per run.
pub const MAX_STEPS: usize = 2_000_000;
/// Bytes the runs in flight may hold.
const MEMORY_BUDGET: usize = 1 << 30;
/// Rough measurement components per step, for the memory estimate.
const MAX_COMPONENTS_TOTAL: usize = 3;
/// Runs when the options do not say.
pub const DEFAULT_RUNS: usize = 50;

/// Why a consistency study could not be made.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ConsistencyError {
    /// A bad option (runs, steps, scale, confidence).
    Option(String),
    /// The spec's model cannot be simulated (size, a covariance that is not one).
    Model(String),
    /// A chi-square quantile could not be computed.
    Statistic(String),
}

impl fmt::Display for ConsistencyError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConsistencyError::Option(m) => write!(f, "bad trials option: {m}"),
            ConsistencyError::Model(m) => write!(f, "cannot simulate the spec: {m}"),
            ConsistencyError::Statistic(m) => write!(f, "chi-square interval: {m}"),
        }
    }
}

impl std::error::Error for ConsistencyError {}

/// How to run the study.
#[derive(Debug, Clone)]
pub struct Options {
    /// Monte Carlo runs (at least 1).
    pub runs: usize,
    /// Steps per run; `None` takes the spec's horizon capped at
    /// [`DEFAULT_STEPS`].
    pub steps: Option<u64>,
    /// Factor applied to the process noise the filters are told (1 = as
    /// specified); the truth always uses the spec's noise. Below 1 makes
    /// the filters optimistic, above 1 pessimistic.
    pub filter_q_scale: f64,
    /// Confidence of the two-sided intervals (0.95 by default).
    pub confidence: f64,
    /// The variants to run (all six by default).
    pub variants: Vec<Variant>,
    /// Show a progress bar on standard error when it is a terminal.
    pub progress: bool,
}

impl Default for Options {
    fn default() -> Self {
        Self {
            runs: DEFAULT_RUNS,
            steps: None,
            filter_q_scale: 1.0,
            confidence: 0.95,
            variants: all_variants(),
            progress: false,
        }
    }
}

/// Runs the Monte Carlo study of `plan`.
///
/// # Errors
/// [`ConsistencyError`] for bad options or a spec that cannot be simulated.
/// A filter that fails numerically is not an error: it is reported.
pub fn run(plan: &Plan, options: &Options) -> Result<Report, ConsistencyError> {
    let (steps, channels) = prepare(plan, options)?;
    let acc = with_models(
        plan,
        Study {
            plan,
            options,
            steps,
            channels: &channels,
        },
    )
    .map_err(|e| ConsistencyError::Model(e.0))??;
    finish(plan, options, steps, &channels, acc)
}

/// Runs the Monte Carlo study of a user's own models on the scenario
/// `plan` describes (the library's entry: [`crate::scenario`]).
///
/// # Errors
/// As [`run`].
pub fn run_models<const N: usize, S: System<N>>(
    plan: &Plan,
    options: &Options,
    system: &S,
    models: &[&dyn Channel<N>],
    inputs: &dyn InputProfile,
) -> Result<Report, ConsistencyError> {
    let (steps, channels) = prepare(plan, options)?;
    if plan.n() != N || models.len() != plan.channels.len() {
        return Err(ConsistencyError::Model(format!(
            "the scenario has {} states and {} channels, the models {N} states and {} channels",
            plan.n(),
            plan.channels.len(),
            models.len()
        )));
    }
    let acc = study(plan, options, steps, &channels, system, models, inputs)?;
    finish(plan, options, steps, &channels, acc)
}

/// Checks the options against the plan: the steps per run and the
/// channels' names and sizes.
fn prepare(
    plan: &Plan,
    options: &Options,
) -> Result<(usize, Vec<(String, usize)>), ConsistencyError> {
    if options.runs == 0 {
        return Err(ConsistencyError::Option(
            "at least one run is needed".into(),
        ));
    }
    if options.variants.is_empty() {
        return Err(ConsistencyError::Option("no variant to run".into()));
    }
    if !(options.confidence > 0.0 && options.confidence < 1.0) {
        return Err(ConsistencyError::Option(format!(
            "confidence must lie strictly between 0 and 1, got {}",
            options.confidence
        )));
    }
    let steps = match options.steps {
        Some(0) => {
            return Err(ConsistencyError::Option(
                "at least one step is needed".into(),
            ));
        }
        Some(s) => s,
        None => plan.steps.min(DEFAULT_STEPS),
    };
    let steps = usize::try_from(steps)
        .ok()
        .filter(|&s| s <= MAX_STEPS)
        .ok_or_else(|| {
            ConsistencyError::Option(format!(
                "{steps} steps per run is too many (at most {MAX_STEPS}; consistency shows long before)"
            ))
        })?;
    if !(options.filter_q_scale.is_finite() && options.filter_q_scale > 0.0) {
        return Err(ConsistencyError::Option(format!(
            "the filter's Q scale must be a positive number, got {}",
            options.filter_q_scale
        )));
    }
    if plan.x0.len() != plan.n() || plan.p0.shape() != (plan.n(), plan.n()) {
        return Err(ConsistencyError::Model(
            "x0 or P0 does not match the states".into(),
        ));
    }
    if plan.p0.clone().cholesky().is_none() {
        return Err(ConsistencyError::Model(
            "P0 is not positive definite: the truth cannot be drawn from it".into(),
        ));
    }
    let channels: Vec<(String, usize)> = plan
        .channels
        .iter()
        .map(|c| (c.name.clone(), c.m))
        .collect();
    Ok((steps, channels))
}

fn finish(
    plan: &Plan,
    options: &Options,
    steps: usize,
    channels: &[(String, usize)],
    acc: Vec<report::Accumulator>,
) -> Result<Report, ConsistencyError> {
    let variants = acc
        .into_iter()
        .map(|a| a.finish(plan.n(), channels, options.runs, options.confidence))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(Report {
        title: plan.title.clone(),
        file: plan.file.clone(),
        runs: options.runs,
        steps,
        spec_steps: plan.steps,
        filter_q_scale: options.filter_q_scale,
        confidence: options.confidence,
        seed: plan.seed,
        run_seconds: steps as f64 / plan.step_hz,
        recentre_m: plan.recentre_m.filter(|_| !plan.is_linear()),
        variants,
    })
}

struct Study<'a> {
    plan: &'a Plan,
    options: &'a Options,
    steps: usize,
    channels: &'a [(String, usize)],
}

impl Visit for Study<'_> {
    type Output = Result<Vec<report::Accumulator>, ConsistencyError>;

    fn visit<const N: usize, S: System<N>>(
        self,
        system: &S,
        channels: &[&dyn Channel<N>],
        inputs: &dyn InputProfile,
        _steady: Steady,
    ) -> Self::Output {
        study(
            self.plan,
            self.options,
            self.steps,
            self.channels,
            system,
            channels,
            inputs,
        )
    }
}

/// The runs, in batches: each batch in parallel, then summed in run order.
/// A run in flight holds every variant's trace; the batch keeps that under
/// the memory budget (1 GiB).
#[allow(clippy::too_many_arguments)]
pub fn study<const N: usize, S: System<N>>(
    plan: &Plan,
    options: &Options,
    steps: usize,
    names: &[(String, usize)],
    system: &S,
    channels: &[&dyn Channel<N>],
    inputs: &dyn InputProfile,
) -> Result<Vec<report::Accumulator>, ConsistencyError> {
    let mut acc: Vec<report::Accumulator> = options
        .variants
        .iter()
        .map(|&v| report::Accumulator::new(v, names.len()))
        .collect();
    let bar = if options.progress && std::io::stderr().is_terminal() {
        let bar = ProgressBar::new(options.runs as u64);
        if let Ok(style) =
            ProgressStyle::with_template("trials {bar:40} {pos}/{len} runs, {eta} left")
        {
            bar.set_style(style);
        }
        bar
    } else {
        ProgressBar::hidden()
    };
    let per_step = 8 * (N + options.variants.len() * (1 + names.len()) + 2 * MAX_COMPONENTS_TOTAL);
    let per_run = (steps * per_step).max(1);
    let batch = (MEMORY_BUDGET / per_run).clamp(1, rayon::current_num_threads() * 4);
    let mut start = 0;
    while start < options.runs {
        let end = (start + batch).min(options.runs);
        let traces: Vec<Result<Vec<Trace>, String>> = (start..end)
            .into_par_iter()
            .map(|i| {
                let t = run_trial(
                    plan,
                    system,
                    channels,
                    inputs,
                    &options.variants,
                    steps,
                    options.filter_q_scale,
                    i,
                );
                bar.inc(1);
                t
            })
            .collect();
        for (offset, run_traces) in traces.into_iter().enumerate() {
            let run_traces = run_traces.map_err(ConsistencyError::Model)?;
            for (a, t) in acc.iter_mut().zip(&run_traces) {
                a.add(start + offset, t);
            }
        }
        start = end;
    }
    bar.finish_and_clear();
    Ok(acc)
}

/// Every variant, in the catalogue's order.
#[must_use]
pub fn all_variants() -> Vec<Variant> {
    VARIANTS.to_vec()
}
