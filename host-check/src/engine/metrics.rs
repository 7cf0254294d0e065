//! Per-variant figures gathered while streaming: running maxima and minima,
//! the first failure, and a fixed-size decimated series for the plot.

use nalgebra::DMatrix;
use serde::Serialize;

/// Number of plot buckets, whatever the horizon.
pub const BUCKETS: usize = 400;

/// The first thing that went wrong in a variant.
#[derive(Debug, Clone, Serialize)]
pub struct Failure {
    /// Filter step (1-based; 0 = start).
    pub step: u64,
    /// Time, s.
    pub time_s: f64,
    /// The operation ("start", "predict", "update `channel`").
    pub operation: String,
    /// The core's error.
    pub error: String,
}

/// Running figures of one variant.
#[derive(Debug, Clone, Serialize)]
pub struct Tracker {
    /// Largest relative covariance error (Frobenius) against the reference.
    pub max_relative_error: f64,
    /// Step of that maximum.
    pub max_relative_error_step: u64,
    /// Largest |P - P'| entry relative to ||P||_F.
    pub max_asymmetry: f64,
    /// Smallest eigenvalue seen (computed after updates and at plot points).
    pub min_eigenvalue: f64,
    /// Step of that minimum.
    pub min_eigenvalue_step: u64,
    /// First step where P failed a Cholesky factorisation in f64.
    pub first_not_positive_definite: Option<u64>,
    /// Largest relative gain error against the reference gain.
    pub max_gain_error: f64,
    /// Step of that maximum.
    pub max_gain_error_step: u64,
    /// Gains compared (updates where the variant's S could be factored).
    pub gains_compared: u64,
    /// Smallest LDL' pivot of S relative to its diagonal, in this precision.
    pub min_innovation_pivot_ratio: f64,
    /// Largest state difference from the f64 Joseph run, per state.
    pub max_state_difference: Vec<f64>,
    /// The same in reference standard deviations (largest over states).
    #[serde(rename = "max_state_difference_sd")]
    pub max_state_difference_sigma: f64,
    /// `false` when states were not compared (covariance-only mode of a
    /// nonlinear model, where states are not judged).
    pub states_compared: bool,
    /// Updates applied.
    pub updates_applied: u64,
    /// Updates gated out.
    pub updates_gated: u64,
    /// The first refused operation, if any (the variant stops there).
    pub failure: Option<Failure>,
    /// Largest relative error against the external reference, if given.
    pub max_external_error: Option<f64>,
    /// Relative distance of the last posterior from the Riccati steady
    /// state, when one applies.
    pub steady_distance: Option<f64>,
    /// The last posterior covariance (kept for the steady-state check).
    #[serde(skip)]
    pub last_posterior: Option<DMatrix<f64>>,
    /// Decimated relative error: the largest in each bucket.
    #[serde(skip)]
    pub series: Vec<f64>,
    /// Decimated state difference from the f64 run in standard
    /// deviations: the largest in each bucket (NaN where not compared).
    #[serde(skip)]
    pub state_series: Vec<f64>,
}

impl Tracker {
    /// A fresh tracker for `n` states.
    pub fn new(n: usize) -> Self {
        Self {
            max_relative_error: 0.0,
            max_relative_error_step: 0,
            max_asymmetry: 0.0,
            min_eigenvalue: f64::INFINITY,
            min_eigenvalue_step: 0,
            first_not_positive_definite: None,
            max_gain_error: 0.0,
            max_gain_error_step: 0,
            gains_compared: 0,
            min_innovation_pivot_ratio: f64::INFINITY,
            max_state_difference: vec![0.0; n],
            max_state_difference_sigma: 0.0,
            states_compared: false,
            updates_applied: 0,
            updates_gated: 0,
            failure: None,
            max_external_error: None,
            steady_distance: None,
            last_posterior: None,
            series: vec![f64::NAN; BUCKETS],
            state_series: vec![f64::NAN; BUCKETS],
        }
    }

    /// Records a step's state difference in standard deviations.
    pub fn state_difference(&mut self, bucket: usize, sigma: f64) {
        if sigma > self.max_state_difference_sigma || sigma.is_nan() {
            self.max_state_difference_sigma = if sigma.is_nan() { f64::INFINITY } else { sigma };
        }
        let b = &mut self.state_series[bucket.min(BUCKETS - 1)];
        if b.is_nan() || sigma > *b {
            *b = sigma;
        }
    }

    /// Records the covariance at a step against the reference's.
    pub fn covariance(
        &mut self,
        step: u64,
        bucket: usize,
        p: &DMatrix<f64>,
        reference: &DMatrix<f64>,
        ref_norm: f64,
    ) {
        let rel = relative(p, reference, ref_norm);
        if rel > self.max_relative_error || rel.is_nan() {
            self.max_relative_error = if rel.is_nan() { f64::INFINITY } else { rel };
            self.max_relative_error_step = step;
        }
        let b = &mut self.series[bucket.min(BUCKETS - 1)];
        if b.is_nan() || rel > *b {
            *b = rel;
        }
        let n = p.nrows();
        let norm = p.norm();
        let mut asym = 0.0_f64;
        for j in 0..n {
            for i in 0..j {
                asym = asym.max((p[(i, j)] - p[(j, i)]).abs());
            }
        }
        if norm > 0.0 {
            self.max_asymmetry = self.max_asymmetry.max(asym / norm);
        }
        if self.first_not_positive_definite.is_none() && !cholesky_ok(p) {
            self.first_not_positive_definite = Some(step);
            self.eigen(step, p);
        }
    }

    /// Records the smallest eigenvalue of P at this step.
    pub fn eigen(&mut self, step: u64, p: &DMatrix<f64>) {
        let Some((min, _)) = eigen_range(p) else {
            return;
        };
        if min < self.min_eigenvalue {
            self.min_eigenvalue = min;
            self.min_eigenvalue_step = step;
        }
    }

    /// Records a gain against the reference gain.
    pub fn gain(&mut self, step: u64, k: &DMatrix<f64>, reference: &DMatrix<f64>) {
        self.gains_compared += 1;
        let rel = relative(k, reference, reference.norm());
        if rel > self.max_gain_error || rel.is_nan() {
            self.max_gain_error = if rel.is_nan() { f64::INFINITY } else { rel };
            self.max_gain_error_step = step;
        }
    }

    /// `true` once the variant has stopped.
    pub fn stopped(&self) -> bool {
        self.failure.is_some()
    }
}

/// The smallest and largest eigenvalue of a symmetric matrix, or `None`
/// when it holds non-finite entries or the iteration does not converge
/// (bounded: never hangs on extreme values).
pub fn eigen_range(m: &DMatrix<f64>) -> Option<(f64, f64)> {
    if !m.iter().all(|v| v.is_finite()) {
        return None;
    }
    let e = nalgebra::linalg::SymmetricEigen::try_new(m.clone(), f64::EPSILON, 10_000)?;
    let lo = e.eigenvalues.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = e
        .eigenvalues
        .iter()
        .copied()
        .fold(f64::NEG_INFINITY, f64::max);
    Some((lo, hi))
}

/// ||a - b||_F / ||b||_F (or the absolute difference when b is zero).
pub fn relative(a: &DMatrix<f64>, b: &DMatrix<f64>, b_norm: f64) -> f64 {
    let mut s = 0.0;
    for (x, y) in a.iter().zip(b.iter()) {
        let d = x - y;
        s += d * d;
    }
    let d = s.sqrt();
    if b_norm > 0.0 { d / b_norm } else { d }
}

/// A Cholesky factorisation of a small symmetric matrix succeeds (all
/// pivots positive), on the stack.
pub fn cholesky_ok(p: &DMatrix<f64>) -> bool {
    let n = p.nrows();
    if n > 9 {
        return p.clone().cholesky().is_some();
    }
    let mut l = [0.0_f64; 81];
    for j in 0..n {
        let mut d = p[(j, j)];
        for k in 0..j {
            d -= l[j * 9 + k] * l[j * 9 + k];
        }
        if !(d.is_finite() && d > 0.0) {
            return false;
        }
        let d = d.sqrt();
        l[j * 9 + j] = d;
        for i in (j + 1)..n {
            let mut v = p[(i, j)];
            for k in 0..j {
                v -= l[i * 9 + k] * l[j * 9 + k];
            }
            l[i * 9 + j] = v / d;
        }
    }
    true
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn cholesky_flags_an_indefinite_matrix() {
        // [[1, 2], [2, 1]] has eigenvalues 3 and -1 (hand computation).
        let bad = DMatrix::from_row_slice(2, 2, &[1.0, 2.0, 2.0, 1.0]);
        assert!(!cholesky_ok(&bad));
        let good = DMatrix::from_row_slice(2, 2, &[2.0, 1.0, 1.0, 2.0]);
        assert!(cholesky_ok(&good));
    }
}
