//! Pass or fail for one variant against the spec's thresholds, with the
//! reasons in words.

use serde::Serialize;

use super::metrics::Tracker;
use crate::engine::plan::Thresholds;

/// A variant's verdict.
#[derive(Debug, Clone, Serialize)]
pub struct Verdict {
    /// `true` when every check passed.
    pub passes: bool,
    /// Why it failed (empty when it passes).
    pub reasons: Vec<String>,
}

/// Judges one variant's figures.
pub fn judge(t: &Tracker, th: &Thresholds) -> Verdict {
    let mut reasons = Vec::new();
    if let Some(f) = &t.failure {
        reasons.push(format!(
            "refused at step {} (t = {:.3} s, {}): {}",
            f.step, f.time_s, f.operation, f.error
        ));
    }
    if let Some(s) = t.first_not_positive_definite {
        reasons.push(format!("covariance not positive definite from step {s}"));
    }
    if t.min_eigenvalue <= 0.0 {
        reasons.push(format!(
            "negative or zero eigenvalue {:.3e}",
            t.min_eigenvalue
        ));
    }
    if exceeds(t.max_relative_error, th.max_relative_error) {
        reasons.push(format!(
            "relative covariance error {:.3e} > {:.1e}",
            t.max_relative_error, th.max_relative_error
        ));
    }
    if exceeds(t.max_asymmetry, th.max_asymmetry) {
        reasons.push(format!(
            "asymmetry {:.3e} > {:.1e}",
            t.max_asymmetry, th.max_asymmetry
        ));
    }
    if t.gains_compared > 0 && exceeds(t.max_gain_error, th.max_gain_error) {
        reasons.push(format!(
            "gain error {:.3e} > {:.1e}",
            t.max_gain_error, th.max_gain_error
        ));
    }
    if t.states_compared && exceeds(t.max_state_difference_sigma, th.max_state_difference_sigma) {
        reasons.push(format!(
            "state differs from the f64 run by {:.2} standard deviations > {}",
            t.max_state_difference_sigma, th.max_state_difference_sigma
        ));
    }
    if let (Some(limit), Some(d)) = (th.max_steady_distance, t.steady_distance)
        && exceeds(d, limit)
    {
        reasons.push(format!(
            "distance from the steady state {d:.3e} > {limit:.1e}"
        ));
    }
    Verdict {
        passes: reasons.is_empty(),
        reasons,
    }
}

/// Above the limit, or not a number at all.
fn exceeds(value: f64, limit: f64) -> bool {
    value.is_nan() || value > limit
}
