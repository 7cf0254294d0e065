//! The steady-gain option: the covariance a fixed-gain filter really has
//! (it carries none of its own) against the optimal one, and the core's
//! `SteadyGain` run in f32 and f64 on the spec's schedule.

use cairn_core::{FilterError, Scalar, SteadyGain};
use nalgebra::{DMatrix, DVector, SMatrix, SVector};
use serde::Serialize;

use crate::engine::steady::Lifted;
use crate::engine::synth::{Noise, sqrt_factor};
use crate::numeric::dare;

/// Largest number of measurement intervals the transient is followed for.
const MAX_INTERVALS: usize = 200_000;

/// What the steady-gain filter costs in accuracy, and how its core runs
/// went.
#[derive(Debug, Clone, Serialize)]
pub struct ConstantGain {
    /// The steady gain used, row-major.
    pub gain: Vec<Vec<f64>>,
    /// Spectral radius of the fixed-gain closed loop (I - K H) F over one
    /// measurement interval: below 1, errors and transients die out.
    pub closed_loop_radius: f64,
    /// Largest relative excess of the implied posterior covariance over the
    /// optimal one: the largest generalised eigenvalue of (P_fixed, P_opt)
    /// minus 1, over the transient.
    pub max_excess: f64,
    /// Time of that largest excess, s.
    pub max_excess_time_s: f64,
    /// Largest trace ratio minus 1 over the transient.
    pub max_trace_excess: f64,
    /// Time after which the excess stays within the threshold, s (`None`
    /// when it did not settle within the intervals followed).
    pub settle_time_s: Option<f64>,
    /// The threshold used (the spec's largest relative covariance error).
    pub threshold: f64,
    /// Measurement intervals followed.
    pub intervals: usize,
    /// The implied prior covariance at the last interval followed, row-major.
    pub final_prior: Vec<Vec<f64>>,
    /// The implied posterior covariance at the last interval followed.
    pub final_posterior: Vec<Vec<f64>>,
    /// The core's `SteadyGain` variants (f32 and f64), when its sizes are
    /// built.
    pub variants: Vec<GainVariantResult>,
    /// Why the core's filter was not run, if it was not.
    pub variants_note: Option<String>,
}

/// One run of the core's `SteadyGain`.
#[derive(Debug, Clone, Serialize)]
pub struct GainVariantResult {
    /// "f32 steady gain" or "f64 steady gain".
    pub name: String,
    /// Steps run.
    pub steps: u64,
    /// The first refused operation, if any.
    pub refused: Option<String>,
    /// Largest state difference from the f64 steady-gain run, in steady
    /// posterior standard deviations (largest over states).
    #[serde(rename = "max_state_difference_sd")]
    pub max_state_difference_sigma: f64,
    /// The same, largest in each of the run's plot buckets.
    #[serde(skip)]
    pub state_series: Vec<f64>,
    /// Time of each bucket's end, s.
    #[serde(skip)]
    pub series_time: Vec<f64>,
    /// When the state difference is projected to cross its threshold, s
    /// (robust line of a significant rise; `None`: no such rise; filled
    /// in by the mission analysis, as are the fields below).
    pub crossing_s: Option<f64>,
    /// The earliest crossing the slope interval allows, s.
    pub crossing_low_s: Option<f64>,
    /// The latest, s (`None`: never).
    pub crossing_high_s: Option<f64>,
    /// The trend test on its state difference.
    pub trend: Option<super::Trend>,
    /// What the projection of the state difference says.
    pub outlook: Option<super::Outlook>,
    /// For an undecided outlook: the horizon that would decide it, s.
    pub run_at_least_s: Option<f64>,
}

fn rows(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
        .collect()
}

/// The largest generalised eigenvalue of (a, b) for symmetric a and
/// positive definite b, or `None` when b has no Cholesky factor.
fn largest_generalised(a: &DMatrix<f64>, b: &DMatrix<f64>) -> Option<f64> {
    let l = b.clone().cholesky()?.l();
    let li = l.try_inverse()?;
    let m = &li * a * li.transpose();
    let m = (&m + m.transpose()) * 0.5;
    crate::engine::metrics::eigen_range(&m).map(|(_, hi)| hi)
}

/// Follows the optimal filter and the fixed-gain filter from P0 over the
/// lifted model (F^k, sum F^i Q F^i') at the measurement instants:
///
/// P- = F P+ F' + Q;
/// P+ = (I - K H) P- (I - K H)' + K R K',
///
/// with the optimal K = P- H' (H P- H' + R)^-1 for the one and the steady K
/// for the other (the Joseph expression holds for any gain: e.g. Grewal &
/// Andrews, *Kalman Filtering: Theory and Practice*; common practice).
/// Runs the horizon's intervals at least, then on until the excess has
/// settled within the threshold, at most 200 000 intervals.
///
/// # Errors
/// A message when the optimal covariance stops being positive definite or
/// S cannot be inverted (a spec the reference would refuse too).
#[allow(clippy::many_single_char_names)]
pub fn transient(
    lifted: &Lifted,
    steady_gain: &DMatrix<f64>,
    p0: &DMatrix<f64>,
    horizon_intervals: usize,
    dt: f64,
    threshold: f64,
) -> Result<ConstantGain, String> {
    let (f, h, q, r, every) = lifted;
    let n = f.nrows();
    let id = DMatrix::<f64>::identity(n, n);
    let ks = steady_gain;
    let a_fixed = &id - ks * h;
    let krk = ks * r * ks.transpose();
    let closed_loop_radius =
        dare::spectral_radius(&(&a_fixed * f)).map_err(|e| format!("closed loop: {e}"))?;
    let interval_s = *every as f64 * dt;
    let (mut p_opt, mut p_fix) = (p0.clone(), p0.clone());
    let (mut max_excess, mut max_excess_time_s, mut max_trace_excess) = (0.0_f64, 0.0, 0.0_f64);
    let mut last_above: Option<usize> = None;
    let mut prior_fix = p0.clone();
    let mut j = 0;
    while j < MAX_INTERVALS {
        j += 1;
        let pm = f * &p_opt * f.transpose() + q;
        let s = h * &pm * h.transpose() + r;
        let si = s
            .clone()
            .cholesky()
            .ok_or_else(|| format!("S is not positive definite at interval {j}"))?
            .inverse();
        let k = &pm * h.transpose() * si;
        let a = &id - &k * h;
        p_opt = &a * &pm * a.transpose() + &k * r * k.transpose();
        p_opt = (&p_opt + p_opt.transpose()) * 0.5;
        prior_fix = f * &p_fix * f.transpose() + q;
        p_fix = &a_fixed * &prior_fix * a_fixed.transpose() + &krk;
        p_fix = (&p_fix + p_fix.transpose()) * 0.5;
        let excess = largest_generalised(&p_fix, &p_opt)
            .ok_or_else(|| format!("the optimal covariance lost definiteness at interval {j}"))?
            - 1.0;
        let tr = p_opt.trace();
        let trace_excess = if tr > 0.0 {
            p_fix.trace() / tr - 1.0
        } else {
            0.0
        };
        if excess > max_excess {
            max_excess = excess;
            max_excess_time_s = j as f64 * interval_s;
        }
        max_trace_excess = max_trace_excess.max(trace_excess);
        if excess > threshold {
            last_above = Some(j);
        }
        if j >= horizon_intervals && excess <= threshold * 1e-2 {
            break;
        }
    }
    let settled = last_above.is_none_or(|l| l < j);
    Ok(ConstantGain {
        gain: rows(ks),
        closed_loop_radius,
        max_excess,
        max_excess_time_s,
        max_trace_excess,
        settle_time_s: settled.then(|| last_above.map_or(0.0, |l| (l + 1) as f64 * interval_s)),
        threshold,
        intervals: j,
        final_prior: rows(&prior_fix),
        final_posterior: rows(&p_fix),
        variants: Vec::new(),
        variants_note: None,
    })
}

/// A steady-gain filter of the core behind run-time sizes.
trait GainVariant {
    fn predict(&mut self) -> Result<(), FilterError>;
    fn update(&mut self, z: &[f64]) -> Result<(), FilterError>;
    fn state(&self, out: &mut [f64]);
}

struct CoreGain<T: Scalar, const N: usize, const M: usize>(SteadyGain<T, N, M>);

impl<T: Scalar, const N: usize, const M: usize> GainVariant for CoreGain<T, N, M> {
    fn predict(&mut self) -> Result<(), FilterError> {
        self.0.predict()
    }
    fn update(&mut self, z: &[f64]) -> Result<(), FilterError> {
        let z = SVector::<T, M>::from_fn(|i, _| T::of(z[i]));
        self.0.update(&z, None).map(|_| ())
    }
    fn state(&self, out: &mut [f64]) {
        for (o, v) in out.iter_mut().zip(self.0.state().iter()) {
            *o = v.to_f64();
        }
    }
}

/// The inputs of a `SteadyGain`: x0, the one-step F, H, K and S.
type GainInputs<'a> = (
    &'a [f64],
    &'a DMatrix<f64>,
    &'a DMatrix<f64>,
    &'a DMatrix<f64>,
    &'a DMatrix<f64>,
);

fn build<T: Scalar, const N: usize, const M: usize>(
    (x0, f, h, k, s): GainInputs<'_>,
) -> Result<Box<dyn GainVariant>, FilterError> {
    let g = SteadyGain::<T, N, M>::try_new(
        SVector::from_fn(|i, _| T::of(x0[i])),
        SMatrix::from_fn(|i, j| T::of(f[(i, j)])),
        SMatrix::from_fn(|i, j| T::of(h[(i, j)])),
        SMatrix::from_fn(|i, j| T::of(k[(i, j)])),
        &SMatrix::from_fn(|i, j| T::of(s[(i, j)])),
    )?;
    Ok(Box::new(CoreGain(g)))
}

type Started = Result<Box<dyn GainVariant>, FilterError>;
type Built = Option<Started>;

fn build_m<T: Scalar, const N: usize>(m: usize, inputs: GainInputs<'_>) -> Built {
    Some(match m {
        1 => build::<T, N, 1>(inputs),
        2 => build::<T, N, 2>(inputs),
        3 => build::<T, N, 3>(inputs),
        4 => build::<T, N, 4>(inputs),
        _ => return None,
    })
}

/// Builds a variant for n states (1 to 9) and m stacked measurement
/// components (1 to 4); `None` outside those sizes.
fn build_variant<T: Scalar>(n: usize, m: usize, inputs: GainInputs<'_>) -> Built {
    match n {
        1 => build_m::<T, 1>(m, inputs),
        2 => build_m::<T, 2>(m, inputs),
        3 => build_m::<T, 3>(m, inputs),
        4 => build_m::<T, 4>(m, inputs),
        5 => build_m::<T, 5>(m, inputs),
        6 => build_m::<T, 6>(m, inputs),
        7 => build_m::<T, 7>(m, inputs),
        8 => build_m::<T, 8>(m, inputs),
        9 => build_m::<T, 9>(m, inputs),
        _ => None,
    }
}

/// The schedule a steady-gain run needs from the spec.
pub struct GainSchedule<'a> {
    /// One-step transition.
    pub f: &'a DMatrix<f64>,
    /// One-step process noise.
    pub q: &'a DMatrix<f64>,
    /// Initial state and covariance.
    pub x0: &'a [f64],
    /// Initial covariance (draws the true start).
    pub p0: &'a DMatrix<f64>,
    /// Steps to run.
    pub steps: u64,
    /// Seed of the synthetic noise.
    pub seed: u64,
    /// Filter step rate, Hz.
    pub step_hz: f64,
}

/// Runs the core's `SteadyGain` in f32 and f64 on a seeded simulation of
/// the spec's model, measuring every `every` steps, and compares the f32
/// state with the f64 one in steady posterior standard deviations.
///
/// # Errors
/// A note when the sizes have no instantiation (n above 9 or more than 4
/// measurement components).
pub fn run_variants(
    sched: &GainSchedule<'_>,
    lifted: &Lifted,
    gain: &DMatrix<f64>,
    steady_prior: &DMatrix<f64>,
    steady_posterior: &DMatrix<f64>,
) -> Result<Vec<GainVariantResult>, String> {
    let (_, h, _, r, every) = lifted;
    let n = sched.f.nrows();
    let m = h.nrows();
    let s = h * steady_prior * h.transpose() + r;
    let inputs: GainInputs<'_> = (sched.x0, sched.f, h, gain, &s);
    let mut runs: Vec<(String, Started)> = Vec::new();
    for (name, built) in [
        ("f32 steady gain", build_variant::<f32>(n, m, inputs)),
        ("f64 steady gain", build_variant::<f64>(n, m, inputs)),
    ] {
        let Some(b) = built else {
            return Err(format!(
                "the core's steady-gain filter is built here for 1 to 9 states and 1 to 4 \
                 measurement components (this spec has {n} and {m})"
            ));
        };
        runs.push((name.to_string(), b));
    }
    let mut refused: Vec<Option<String>> = vec![None; runs.len()];
    let mut max_sigma = vec![0.0_f64; runs.len()];
    let buckets = crate::engine::metrics::BUCKETS;
    let mut series = vec![vec![f64::NAN; buckets]; runs.len()];
    let dt_step = 1.0 / sched.step_hz;
    let sd: Vec<f64> = (0..n).map(|i| steady_posterior[(i, i)].sqrt()).collect();
    let mut noise = Noise::new(sched.seed ^ 0x5EED_C0A5_7A27_0001);
    let mut truth = DVector::from_column_slice(sched.x0) + noise.correlated(&sqrt_factor(sched.p0));
    let qf = sqrt_factor(sched.q);
    let rf = sqrt_factor(r);
    let (mut x, mut x_ref) = (vec![0.0; n], vec![0.0; n]);
    for k in 1..=sched.steps {
        let bucket = (((k - 1) as u128 * buckets as u128) / u128::from(sched.steps)) as usize;
        truth = sched.f * &truth + noise.correlated(&qf);
        let measure = k % every == 0;
        let z: Vec<f64> = if measure {
            (h * &truth + noise.correlated(&rf))
                .iter()
                .copied()
                .collect()
        } else {
            Vec::new()
        };
        for (i, (_, run)) in runs.iter_mut().enumerate() {
            let Ok(run) = run else { continue };
            if refused[i].is_some() {
                continue;
            }
            let res = run
                .predict()
                .and_then(|()| if measure { run.update(&z) } else { Ok(()) });
            if let Err(e) = res {
                refused[i] = Some(format!("step {k}: {e}"));
            }
        }
        // The f64 run is the last variant.
        if let Some((_, Ok(base))) = runs.last() {
            base.state(&mut x_ref);
        }
        for (i, (_, run)) in runs.iter().enumerate() {
            if let Ok(run) = run {
                run.state(&mut x);
                let mut step = 0.0_f64;
                for j in 0..n {
                    if sd[j] > 0.0 {
                        step = step.max((x[j] - x_ref[j]).abs() / sd[j]);
                    }
                }
                max_sigma[i] = max_sigma[i].max(step);
                let b = &mut series[i][bucket.min(buckets - 1)];
                if b.is_nan() || step > *b {
                    *b = step;
                }
            }
        }
    }
    Ok(runs
        .into_iter()
        .enumerate()
        .map(|(i, (name, run))| GainVariantResult {
            name,
            steps: sched.steps,
            refused: match run {
                Ok(_) => refused[i].clone(),
                Err(e) => Some(format!("start: {e}")),
            },
            max_state_difference_sigma: max_sigma[i],
            state_series: std::mem::take(&mut series[i]),
            series_time: (1..=buckets)
                .map(|b| (b as f64 * sched.steps as f64 / buckets as f64).ceil() * dt_step)
                .collect(),
            crossing_s: None,
            crossing_low_s: None,
            crossing_high_s: None,
            trend: None,
            outlook: None,
            run_at_least_s: None,
        })
        .collect())
}
