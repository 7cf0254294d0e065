//! Averages of NEES and NIS over the runs, their chi-square intervals, the
//! verdict per variant, and the text and JSON forms of the report.

use std::fmt::Write as _;

use serde::Serialize;

use super::ConsistencyError;
use super::chi2::{self, Interval, Place};
use crate::engine::Variant;
use crate::engine::trials::Trace;

/// Fraction of points that must fall inside the 95% interval for a
/// statistic to be called consistent. With a consistent filter about 95%
/// fall inside; the margin absorbs the correlation of NEES between steps.
pub const MIN_INSIDE: f64 = 0.90;

/// A statistic below [`MIN_INSIDE`] is still called consistent when a
/// consistent filter would leave that many points outside its interval,
/// and that many outside the far interval, each with at least this chance
/// (binomial tails): a few points (a slow channel, a short run) slightly
/// outside prove nothing.
pub const SIGNIFICANCE: f64 = 0.01;

/// The far interval leaves out this fraction of a consistent filter's
/// points. Few points far outside it are already improbable, so a single
/// step far off is judged even when there are few steps.
pub const FAR_RATE: f64 = 1e-3;

/// Most points kept in a report's decimated series.
const SERIES_POINTS: usize = 400;

/// Whether the filter's covariance matches its actual errors.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Verdict {
    /// The averages stay inside their intervals.
    Consistent,
    /// The averages sit above their intervals: the filter believes itself
    /// more accurate than it is (Q or R too small).
    Optimistic,
    /// The averages sit below their intervals: the filter is more accurate
    /// than it believes (Q or R too large).
    Pessimistic,
    /// The filter refused to go on in at least one run (a numerical failure).
    Failed,
}

impl Verdict {
    /// The word used in the text report.
    pub fn word(self) -> &'static str {
        match self {
            Verdict::Consistent => "consistent",
            Verdict::Optimistic => "optimistic",
            Verdict::Pessimistic => "pessimistic",
            Verdict::Failed => "failed",
        }
    }
}

/// Running sums of one statistic over the runs, per point (a step for NEES,
/// a measurement for NIS).
#[derive(Debug, Clone, Default)]
pub struct Sums {
    sum: Vec<f64>,
    count: Vec<u32>,
}

impl Sums {
    /// Adds one run's values; NaN marks a missing value (after a failure).
    pub fn add(&mut self, values: &[f64]) {
        if self.sum.len() < values.len() {
            self.sum.resize(values.len(), 0.0);
            self.count.resize(values.len(), 0);
        }
        for (i, &v) in values.iter().enumerate() {
            if !v.is_nan() {
                self.sum[i] += v;
                self.count[i] += 1;
            }
        }
    }
}

/// The summary of one averaged statistic (NEES, or NIS of one channel).
#[derive(Debug, Clone, Serialize)]
pub struct Summary {
    /// Degrees of freedom of one sample (states, or channel components).
    pub dof: usize,
    /// Points (steps or measurements) averaged over the runs.
    pub points: usize,
    /// Interval for one point's average over every run.
    pub interval: Interval,
    /// Mean over points of the per-point average.
    pub time_average: f64,
    /// Interval of the time average, treating all samples as independent
    /// (exact for NIS of a consistent filter, whose innovations are white;
    /// only indicative for NEES, which is correlated in time).
    pub time_average_interval: Interval,
    /// Fraction of points whose average falls inside `interval`.
    pub inside: f64,
    /// Fraction above.
    pub above: f64,
    /// Fraction below.
    pub below: f64,
    /// The chance that a consistent filter leaves at least as many points
    /// outside (binomial tail, treating points as independent).
    pub outside_chance: f64,
    /// Points outside the far interval (confidence 1 - [`FAR_RATE`]).
    pub far_outside: usize,
    /// The verdict on this statistic alone.
    pub verdict: Verdict,
    /// Decimated series (point index, average) for plots.
    pub series: Vec<(usize, f64)>,
}

fn summarize(
    sums: &Sums,
    dof: usize,
    runs: usize,
    confidence: f64,
) -> Result<Option<Summary>, ConsistencyError> {
    let points = sums.sum.len();
    if points == 0 {
        return Ok(None);
    }
    let interval = chi2::average_interval(dof, runs as u64, confidence)?;
    // Intervals by the number of runs behind a point (fewer after failures):
    // the `confidence` one and the far one.
    let mut bands: std::collections::HashMap<u32, (Interval, Interval)> =
        std::collections::HashMap::new();
    let (mut inside, mut above, mut below, mut far) = (0usize, 0usize, 0usize, 0usize);
    let mut total = 0.0;
    let mut samples = 0u64;
    let mut series = Vec::new();
    let stride = points.div_ceil(SERIES_POINTS).max(1);
    for i in 0..points {
        let c = sums.count[i];
        let avg = if c == 0 {
            f64::NAN
        } else {
            sums.sum[i] / f64::from(c)
        };
        let key = if c == 0 { runs as u32 } else { c };
        let (here, wide) = match bands.get(&key) {
            Some(b) => *b,
            None => {
                let b = (
                    chi2::average_interval(dof, u64::from(key), confidence)?,
                    chi2::average_interval(dof, u64::from(key), 1.0 - FAR_RATE)?,
                );
                bands.insert(key, b);
                b
            }
        };
        match here.place(avg) {
            Place::Inside => inside += 1,
            Place::Above => above += 1,
            Place::Below => below += 1,
        }
        if wide.place(avg) != Place::Inside {
            far += 1;
        }
        if c > 0 {
            total += sums.sum[i];
            samples += u64::from(c);
        }
        if i % stride == 0 || i + 1 == points {
            series.push((i + 1, avg));
        }
    }
    let p = points as f64;
    let inside_count = inside;
    let (inside, above, below) = (inside as f64 / p, above as f64 / p, below as f64 / p);
    let time_average = if samples == 0 {
        f64::NAN
    } else {
        total / samples as f64
    };
    let time_average_interval = chi2::average_interval(dof, samples.max(1), confidence)?;
    let outside_chance = chi2::outside_chance(
        points as u64,
        (points - inside_count) as u64,
        1.0 - confidence,
    )?;
    let far_chance = chi2::outside_chance(points as u64, far as u64, FAR_RATE)?;
    let verdict = if samples == 0 {
        Verdict::Failed
    } else if inside >= MIN_INSIDE || (outside_chance >= SIGNIFICANCE && far_chance >= SIGNIFICANCE)
    {
        Verdict::Consistent
    } else if above >= below {
        Verdict::Optimistic
    } else {
        Verdict::Pessimistic
    };
    Ok(Some(Summary {
        dof,
        points,
        interval,
        time_average,
        time_average_interval,
        inside,
        above,
        below,
        outside_chance,
        far_outside: far,
        verdict,
        series,
    }))
}

/// The NIS summary of one channel.
#[derive(Debug, Clone, Serialize)]
pub struct ChannelSummary {
    /// Channel name.
    pub channel: String,
    /// Its summary (absent when the channel never delivered).
    pub nis: Option<Summary>,
}

/// The findings for one variant.
#[derive(Debug, Clone, Serialize)]
pub struct VariantReport {
    /// "f32 joseph" and so on.
    #[serde(rename = "name")]
    pub label: String,
    /// Scalar type and form.
    pub variant: Variant,
    /// Runs in which the filter refused to go on.
    pub failed_runs: usize,
    /// The first such refusal: run, step and the core's message.
    pub first_failure: Option<String>,
    /// Average NEES.
    pub nees: Option<Summary>,
    /// Average NIS per channel.
    pub nis: Vec<ChannelSummary>,
    /// Overall verdict.
    pub verdict: Verdict,
    /// Why, in words.
    pub reason: String,
    /// Times the filter moved its origin, per run on average (0 without
    /// an origin shift; a start beyond the distance counts once).
    #[serde(rename = "origin_shifts_per_run")]
    pub recentres_per_run: f64,
}

/// Accumulates the traces of one variant over the runs, in run order.
pub struct Accumulator {
    variant: Variant,
    nees: Sums,
    nis: Vec<Sums>,
    failed_runs: usize,
    first_failure: Option<String>,
    recentres: u64,
}

impl Accumulator {
    /// An empty accumulator for `channels` channels.
    pub fn new(variant: Variant, channels: usize) -> Self {
        Self {
            variant,
            nees: Sums::default(),
            nis: vec![Sums::default(); channels],
            failed_runs: 0,
            first_failure: None,
            recentres: 0,
        }
    }

    /// Adds run `run`'s trace.
    pub fn add(&mut self, run: usize, trace: &Trace) {
        self.nees.add(&trace.nees);
        self.recentres += trace.recentres;
        for (sums, values) in self.nis.iter_mut().zip(&trace.nis) {
            sums.add(values);
        }
        if let Some((step, e)) = trace.failure {
            self.failed_runs += 1;
            if self.first_failure.is_none() {
                self.first_failure = Some(format!("run {run}, step {step}: {e}"));
            }
        }
    }

    /// The variant's report.
    ///
    /// # Errors
    /// [`ConsistencyError::Statistic`] when an interval cannot be computed.
    pub fn finish(
        self,
        n: usize,
        channels: &[(String, usize)],
        runs: usize,
        confidence: f64,
    ) -> Result<VariantReport, ConsistencyError> {
        let nees = summarize(&self.nees, n, runs, confidence)?;
        let mut nis = Vec::with_capacity(channels.len());
        for ((name, m), sums) in channels.iter().zip(&self.nis) {
            nis.push(ChannelSummary {
                channel: name.clone(),
                nis: summarize(sums, *m, runs, confidence)?,
            });
        }
        let pct = |x: f64| 100.0 * x;
        let (verdict, reason) = if self.failed_runs > 0 {
            (
                Verdict::Failed,
                format!(
                    "the filter refused to go on in {} of {runs} runs",
                    self.failed_runs
                ),
            )
        } else if let Some(s) = nees.as_ref().filter(|s| s.verdict != Verdict::Consistent) {
            (
                s.verdict,
                format!(
                    "average NEES inside its interval at {:.1}% of steps (above {:.1}%, below {:.1}%; at least {:.0}% needed)",
                    pct(s.inside),
                    pct(s.above),
                    pct(s.below),
                    pct(MIN_INSIDE)
                ),
            )
        } else if let Some((c, s)) = nis.iter().find_map(|c| {
            c.nis
                .as_ref()
                .filter(|s| s.verdict != Verdict::Consistent)
                .map(|s| (c, s))
        }) {
            (
                s.verdict,
                format!(
                    "average NIS of `{}` inside its interval at {:.1}% of measurements (above {:.1}%, below {:.1}%)",
                    c.channel,
                    pct(s.inside),
                    pct(s.above),
                    pct(s.below)
                ),
            )
        } else {
            (
                Verdict::Consistent,
                "average NEES and every channel's average NIS leave their intervals no more often than chance allows".to_string(),
            )
        };
        Ok(VariantReport {
            label: self.variant.name(),
            variant: self.variant,
            failed_runs: self.failed_runs,
            first_failure: self.first_failure,
            nees,
            nis,
            verdict,
            reason,
            recentres_per_run: self.recentres as f64 / runs.max(1) as f64,
        })
    }
}

/// The whole Monte Carlo consistency report.
#[derive(Debug, Clone, Serialize)]
pub struct Report {
    /// Spec title.
    pub title: String,
    /// Spec file.
    #[serde(rename = "spec")]
    pub file: String,
    /// Monte Carlo runs.
    pub runs: usize,
    /// Steps per run.
    pub steps: usize,
    /// Steps in the spec's horizon (the trials may use fewer).
    pub spec_steps: u64,
    /// Scale applied to the filters' Q (1 = as specified).
    pub filter_q_scale: f64,
    /// Confidence of the two-sided intervals.
    pub confidence: f64,
    /// Seed of the study (run i uses a seed derived from it and i).
    pub seed: u64,
    /// Seconds one run covers (steps x the step length).
    pub run_seconds: f64,
    /// The origin-shift distance the pose filters used, m (`None`: they
    /// kept the spec's frame).
    #[serde(rename = "origin_shift_m")]
    pub recentre_m: Option<f64>,
    /// One entry per variant.
    pub variants: Vec<VariantReport>,
}

impl Report {
    /// The report as readable text.
    pub fn text(&self) -> String {
        let mut out = String::new();
        let _ = writeln!(out, "cairn trials: {} ({})", self.title, self.file);
        let _ = writeln!(
            out,
            "{} runs x {} steps (spec horizon {} steps), seed {}, filter Q scale {}, {:.0}% two-sided chi-square intervals",
            self.runs,
            self.steps,
            self.spec_steps,
            self.seed,
            self.filter_q_scale,
            100.0 * self.confidence
        );
        let _ = writeln!(
            out,
            "(Bar-Shalom, Li & Kirubarajan 2001: runs x average ~ chi2(runs x dof)); a statistic is\n\
             consistent when {:.0}% of its points fall inside, or when a consistent filter would leave\n\
             as many outside, and as many outside the {}% interval, with a {:.0}% chance or more.\n\
             The time average's interval treats samples as independent: exact for NIS, only\n\
             indicative for NEES (correlated in time); it is shown, the per-point test decides\n",
            100.0 * MIN_INSIDE,
            100.0 * (1.0 - FAR_RATE),
            100.0 * SIGNIFICANCE
        );
        if let Some(d) = self.recentre_m {
            let _ = writeln!(
                out,
                "Origin shift: each variant moves its origin to its x, y (whole metres, kept in f64)\n\
                 through the core's origin shift when |x| or |y| passes {d} m (a start beyond it counts\n\
                 once); fixes reach it minus the origin and NEES is taken on origin + local state, in f64\n"
            );
        }
        let width = self
            .variants
            .iter()
            .flat_map(|v| v.nis.iter().map(|c| c.channel.chars().count() + 4))
            .chain([14])
            .max()
            .unwrap_or(14);
        let _ = writeln!(
            out,
            "  {:<width$} {:>3} {:>9} {:>19} {:>19} {:>7} {:>6} {:>6}  verdict",
            "statistic",
            "dof",
            "time avg",
            "its interval",
            "interval per point",
            "inside",
            "above",
            "below",
        );
        let mut average_outside = false;
        for v in &self.variants {
            let _ = writeln!(out, "{}", v.label);
            let mut row = |name: &str, s: &Summary| {
                // A time average outside its interval beside a verdict
                // says which test decided it (the per-point one).
                let mark = if s.verdict != Verdict::Failed
                    && s.time_average_interval.place(s.time_average) != Place::Inside
                {
                    average_outside = true;
                    " (per-point test; time avg outside its interval)"
                } else {
                    ""
                };
                let _ = writeln!(
                    out,
                    "  {:<width$} {:>3} {:>9.4} {:>19} {:>19} {:>6.1}% {:>5.1}% {:>5.1}%  {}{mark}",
                    name,
                    s.dof,
                    s.time_average,
                    format!(
                        "[{:.4}, {:.4}]",
                        s.time_average_interval.lower, s.time_average_interval.upper
                    ),
                    format!("[{:.4}, {:.4}]", s.interval.lower, s.interval.upper),
                    100.0 * s.inside,
                    100.0 * s.above,
                    100.0 * s.below,
                    s.verdict.word(),
                );
            };
            if let Some(s) = &v.nees {
                row("NEES", s);
            }
            for c in &v.nis {
                if let Some(s) = &c.nis {
                    row(&format!("NIS {}", c.channel), s);
                }
            }
            let _ = writeln!(out, "  => {}: {}", v.verdict.word(), v.reason);
            if let Some(f) = &v.first_failure {
                let _ = writeln!(out, "     first failure: {f}");
            }
            if self.recentre_m.is_some() {
                let _ = writeln!(
                    out,
                    "     {:.1} origin shifts per run of {} s on average",
                    v.recentres_per_run, self.run_seconds
                );
            }
        }
        if average_outside {
            let _ = writeln!(
                out,
                "\n(per-point test: a statistic's verdict comes from its points against the per-point\n\
                 interval; its time average can leave its own interval, which treats every sample as\n\
                 independent, without deciding it: for NEES, correlated in time, that interval is too narrow)"
            );
        }
        out
    }
}
