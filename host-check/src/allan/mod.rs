//! Noise figures from the user's own sensor: the overlapping Allan
//! deviation of a recorded static log, and the inertial noise terms fitted to it.
//!
//! | module         | job                                                           |
//! |----------------|---------------------------------------------------------------|
//! | [`command`]    | `cairn allan`: options, log file to report and plot           |
//! | [`reader`]     | the CSV log, streamed row by row, with located errors         |
//! | [`variance`]   | overlapping Allan variance, a decimated cascade of bounded memory |
//! | [`confidence`] | the 1-sigma error of each point (IEEE 952 / El-Sheimy rule)   |
//! | [`fit`]        | N, B, K (and Q, R) with uncertainties                         |
//! | [`plot`]       | the log-log SVG with the fitted lines                         |
//! | [`report`]     | the text report and the spec lines that use the figures      |
//!
//! Memory is independent of the log's length: the reader holds one line,
//! each axis a few thousand numbers ([`variance`]).

pub mod command;
pub mod confidence;
pub mod fit;
pub mod plot;
pub mod reader;
pub mod report;
pub mod variance;

use std::io::BufRead;

pub use fit::{Fit, Fitted, Term};
pub use reader::{Axis, LogError, LogSummary};

/// Fewest non-overlapping clusters a reported cluster time may have.
pub const MIN_CLUSTERS: u64 = 3;

/// How to analyse a log.
#[derive(Debug, Clone)]
pub struct Options {
    /// Cluster times per decade.
    pub points_per_decade: u32,
    /// The samples' unit for every axis (overrides the header's).
    pub unit: Option<String>,
}

impl Default for Options {
    fn default() -> Self {
        Self {
            points_per_decade: 10,
            unit: None,
        }
    }
}

/// The Allan deviation at one cluster time.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AllanPoint {
    /// Cluster size, samples.
    pub m: u64,
    /// Cluster time, s.
    pub tau: f64,
    /// Overlapping Allan deviation, in the samples' unit.
    pub adev: f64,
    /// Relative 1-sigma error ([`confidence::relative_error`]).
    pub delta: f64,
    /// Lower end of the 1-sigma interval.
    pub lo: f64,
    /// Upper end.
    pub hi: f64,
    /// Terms summed by the estimator.
    pub terms: u64,
    /// Their stride, samples (1: fully overlapping).
    pub stride: u64,
    /// Non-overlapping clusters in the log, `N / m`.
    pub clusters: u64,
}

/// One axis analysed.
#[derive(Debug, Clone, PartialEq)]
pub struct AxisResult {
    /// Name and unit.
    pub axis: Axis,
    /// The curve, shortest cluster time first.
    pub points: Vec<AllanPoint>,
    /// The term fit, if the curve allowed one.
    pub fit: Option<Fit>,
    /// Least-squares slope of the samples against time, units/s.
    pub drift_per_s: f64,
    /// The lowest point of the fitted curve within the measured cluster
    /// times: `(tau, adev)` (the bias-instability read-off).
    pub minimum: Option<(f64, f64)>,
    /// What the reader of the report should know.
    pub warnings: Vec<String>,
}

/// The whole log analysed.
#[derive(Debug, Clone, PartialEq)]
pub struct Analysis {
    /// The file name as given.
    pub file: String,
    /// What the reader saw.
    pub summary: LogSummary,
    /// Each value column.
    pub axes: Vec<AxisResult>,
    /// Warnings about the whole log.
    pub warnings: Vec<String>,
}

/// Least-squares line of the samples against time, kept as running means
/// and co-moments (Welford's update: no cancellation over long logs).
#[derive(Debug, Clone, Default)]
struct Trend {
    n: f64,
    mt: f64,
    mx: f64,
    ctt: f64,
    ctx: f64,
}

impl Trend {
    #[inline]
    fn push(&mut self, t: f64, x: f64) {
        self.n += 1.0;
        let dt = t - self.mt;
        self.mt += dt / self.n;
        let dx = x - self.mx;
        self.mx += dx / self.n;
        self.ctt += dt * (t - self.mt);
        self.ctx += dt * (x - self.mx);
    }
    fn slope(&self) -> f64 {
        if self.ctt > 0.0 {
            self.ctx / self.ctt
        } else {
            0.0
        }
    }
}

/// The per-axis estimators fed by the reader.
struct Streams {
    sizes: Vec<u64>,
    unit: Option<String>,
    accs: Vec<variance::AllanAccumulator>,
    trends: Vec<Trend>,
    axes: Vec<Axis>,
    t0: f64,
}

impl reader::Sink for Streams {
    fn header(&mut self, found: &[Axis]) -> Result<(), String> {
        self.axes = found.to_vec();
        for a in &mut self.axes {
            if let Some(u) = &self.unit {
                a.unit = Some(u.clone());
            }
            match &a.unit {
                None => {
                    return Err(format!(
                        "column `{}` has no unit: give it in the header as `{}[deg/s]` or with --unit",
                        a.name, a.name
                    ));
                }
                Some(u) => {
                    crate::numeric::units::parse_unit(u)
                        .map_err(|e| format!("column `{}`: {e}", a.name))?;
                }
            }
        }
        self.accs = vec![variance::AllanAccumulator::new(&self.sizes); self.axes.len()];
        self.trends = vec![Trend::default(); self.axes.len()];
        Ok(())
    }

    #[inline]
    fn row(&mut self, t: f64, values: &[f64]) {
        if self.t0.is_nan() {
            self.t0 = t;
        }
        let tr = t - self.t0;
        for ((acc, trend), &v) in self.accs.iter_mut().zip(&mut self.trends).zip(values) {
            acc.push(v);
            trend.push(tr, v);
        }
    }
}

/// Analyses the log read from `input` (named `file` in messages).
///
/// # Errors
/// A [`LogError`] with the file and line for a malformed log (see
/// [`reader::read_log`]), a missing unit, or a log too short for any
/// cluster time.
pub fn analyse<R: BufRead>(file: &str, input: R, options: &Options) -> Result<Analysis, LogError> {
    let sizes = variance::cluster_sizes(options.points_per_decade, 1 << 50);
    let mut sink = Streams {
        sizes,
        unit: options.unit.clone(),
        accs: Vec::new(),
        trends: Vec::new(),
        axes: Vec::new(),
        t0: f64::NAN,
    };
    let summary = reader::read_log(file, input, &mut sink)?;
    let Streams {
        accs, trends, axes, ..
    } = sink;
    let n = summary.samples;
    let ts = summary.mean_interval_s();
    let mut warnings = Vec::new();
    if summary.gaps.count > 0 {
        let g = &summary.gaps;
        warnings.push(format!(
            "{} intervals longer than 1.5 x the first ({:e} s), first at line {}, longest {:e} s at line {}: the samples are treated as evenly spaced at the mean interval {:e} s, so cluster times across a gap are not what they say; cut the log at its gaps",
            g.count, summary.first_interval_s, g.first_line, g.longest_s, g.longest_line, ts
        ));
    }
    let jitter = (ts - summary.first_interval_s).abs() / ts;
    if jitter > 0.01 && summary.gaps.count == 0 {
        warnings.push(format!(
            "the mean interval {ts:e} s differs from the first ({:e} s) by {:.1}%: the clock is irregular",
            summary.first_interval_s,
            jitter * 100.0
        ));
    }
    let mut results = Vec::new();
    for ((axis, acc), trend) in axes.into_iter().zip(&accs).zip(&trends) {
        let points: Vec<AllanPoint> = acc
            .points()
            .into_iter()
            .filter(|p| p.m.saturating_mul(MIN_CLUSTERS) <= n)
            .map(|p| {
                let adev = p.avar.sqrt();
                let delta = confidence::relative_error(n, p.m);
                let (lo, hi) = confidence::interval(adev, delta);
                AllanPoint {
                    m: p.m,
                    tau: p.m as f64 * ts,
                    adev,
                    delta,
                    lo,
                    hi,
                    terms: p.terms,
                    stride: p.stride,
                    clusters: n / p.m,
                }
            })
            .collect();
        if points.iter().any(|p| !p.adev.is_finite()) {
            return Err(LogError {
                file: file.to_string(),
                line: 0,
                message: format!(
                    "column `{}`: the Allan variance overflows f64 (values near 1e150 or beyond): give the samples in a larger unit",
                    axis.name
                ),
            });
        }
        if points.is_empty() {
            return Err(LogError {
                file: file.to_string(),
                line: 0,
                message: format!(
                    "{n} samples are too few for any cluster time: the shortest needs {MIN_CLUSTERS} clusters"
                ),
            });
        }
        results.push(axis_result(axis, points, trend.slope(), n));
    }
    Ok(Analysis {
        file: file.to_string(),
        summary,
        axes: results,
        warnings,
    })
}

/// The lowest point of the fitted Allan deviation between `from` and `to`
/// (a scan of 400 log-spaced cluster times).
fn fitted_minimum(fit: &Fit, from: f64, to: f64) -> Option<(f64, f64)> {
    let (a, b) = (from.ln(), to.ln());
    (0..=400)
        .map(|k| {
            let tau = (a + (b - a) * f64::from(k) / 400.0).exp();
            (tau, fit.avar(tau).sqrt())
        })
        .filter(|(_, v)| v.is_finite())
        .min_by(|x, y| x.1.total_cmp(&y.1))
}

fn axis_result(axis: Axis, points: Vec<AllanPoint>, drift: f64, n: u64) -> AxisResult {
    let mut warnings = Vec::new();
    let curve: Vec<fit::CurvePoint> = points
        .iter()
        .map(|p| fit::CurvePoint {
            tau: p.tau,
            avar: p.adev * p.adev,
            delta: p.delta,
        })
        .collect();
    let used = fit::octave_spaced(&curve);
    let fitted = fit::fit(&used);
    if used.len() < 5 {
        warnings.push(format!(
            "only {} octave-spaced cluster times ({n} samples): too few to separate the five terms; record longer",
            used.len()
        ));
    }
    if points.iter().any(|p| p.adev == 0.0) {
        warnings.push("the Allan deviation is zero at some cluster times: the samples are constant or coarsely quantized".into());
    }
    let minimum = fitted
        .as_ref()
        .and_then(|f| fitted_minimum(f, points[0].tau, points[points.len() - 1].tau));
    let last = points[points.len() - 1];
    // A rate ramp R has Allan deviation R tau / sqrt(2) (IEEE Std 952-1997,
    // Annex C). A rate random walk looks like a drift over the whole log
    // too (its least-squares slope is typically 0.8 of its own Allan
    // deviation at a third of the log), so all must agree: the fit kept a
    // ramp term that carries over half the variance at the longest cluster
    // time, the least-squares drift explains half its deviation or more,
    // and the curve still rises over the last octave.
    let ramp = drift.abs() * last.tau / 2f64.sqrt();
    let ramp_term = fitted
        .as_ref()
        .and_then(|f| {
            f.get(Term::R)
                .map(|r| Term::R.avar(r.value, last.tau) / f.avar(last.tau))
        })
        .unwrap_or(0.0);
    let rising = points
        .iter()
        .rev()
        .find(|p| p.tau <= last.tau / 2.0 * (1.0 + 1e-9))
        .is_some_and(|half| half.adev > 0.0 && (last.adev / half.adev).log2() > 0.5);
    if ramp > 0.5 * last.adev && ramp_term > 0.5 && rising {
        warnings.push(format!(
            "the samples drift by {drift:.3e} per s (least squares; {ramp:.3e} as an Allan deviation at tau = {:.4e} s, against {:.4e} measured): the log is not static or not warmed up, and the long cluster times (K, and B) show the trend, not the sensor's noise",
            last.tau, last.adev
        ));
    }
    if fitted
        .as_ref()
        .is_some_and(|f| f.get(Term::K).is_none() && f.get(Term::R).is_none())
        && points
            .iter()
            .rev()
            .nth(1)
            .is_some_and(|p| p.adev > last.adev)
    {
        warnings.push("the curve still falls at the longest cluster time and no rate random walk is seen: K (and maybe B) is not resolved; record longer".into());
    }
    AxisResult {
        axis,
        points,
        fit: fitted,
        drift_per_s: drift,
        minimum,
        warnings,
    }
}
