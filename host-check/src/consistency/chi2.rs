//! Two-sided chi-square acceptance intervals for averaged NEES and NIS
//! (Bar-Shalom, Li & Kirubarajan 2001), with quantiles from `statrs`.

use serde::Serialize;
use statrs::distribution::{Binomial, ChiSquared, ContinuousCDF, DiscreteCDF};

use super::ConsistencyError;

/// A closed acceptance interval for an averaged statistic.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Interval {
    /// Lower bound.
    pub lower: f64,
    /// Upper bound.
    pub upper: f64,
}

impl Interval {
    /// Where `value` falls: below, inside or above.
    pub fn place(&self, value: f64) -> Place {
        if value.is_nan() || value > self.upper {
            Place::Above
        } else if value < self.lower {
            Place::Below
        } else {
            Place::Inside
        }
    }
}

/// Where a value falls relative to an [`Interval`].
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Place {
    /// Below the lower bound (the filter's covariance is too large).
    Below,
    /// Inside the interval.
    Inside,
    /// Above the upper bound, or not a number (the covariance is too small).
    Above,
}

/// The two-sided `confidence` interval for the average of `count`
/// independent chi-square variables of `dof` degrees of freedom each:
/// `count * average ~ chi2(count * dof)`, so the bounds are the
/// `(1 -+ confidence) / 2` quantiles of chi2(count dof) divided by `count`.
///
/// # Errors
/// [`ConsistencyError::Statistic`] when `dof` or `count` is zero or
/// `confidence` is not strictly between 0 and 1.
pub fn average_interval(
    dof: usize,
    count: u64,
    confidence: f64,
) -> Result<Interval, ConsistencyError> {
    if dof == 0 || count == 0 || !(confidence > 0.0 && confidence < 1.0) {
        return Err(ConsistencyError::Statistic(format!(
            "no chi-square interval for {count} samples of {dof} degrees of freedom at confidence {confidence}"
        )));
    }
    let total = dof as f64 * count as f64;
    let chi = ChiSquared::new(total).map_err(|e| {
        ConsistencyError::Statistic(format!("chi-square with {total} degrees of freedom: {e}"))
    })?;
    let tail = (1.0 - confidence) / 2.0;
    let n = count as f64;
    let lower = chi.inverse_cdf(tail) / n;
    let upper = chi.inverse_cdf(1.0 - tail) / n;
    if !(lower.is_finite() && upper.is_finite() && lower < upper) {
        return Err(ConsistencyError::Statistic(format!(
            "chi-square quantiles for {total} degrees of freedom did not converge"
        )));
    }
    Ok(Interval { lower, upper })
}

/// The chance that `outside` or more of `points` independent points fall
/// outside their intervals when each does so with probability `rate`
/// (the upper tail of the binomial distribution).
///
/// # Errors
/// [`ConsistencyError::Statistic`] for a rate outside [0, 1].
pub fn outside_chance(points: u64, outside: u64, rate: f64) -> Result<f64, ConsistencyError> {
    if outside == 0 {
        return Ok(1.0);
    }
    let b = Binomial::new(rate, points)
        .map_err(|e| ConsistencyError::Statistic(format!("binomial with rate {rate}: {e}")))?;
    Ok(b.sf(outside - 1))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn one_run_three_dof_matches_the_published_interval() {
        // Bar-Shalom, Li & Kirubarajan 2001: one run, n = 3 -> [0.216, 9.348].
        let i = average_interval(3, 1, 0.95).unwrap();
        assert!((i.lower - 0.216).abs() < 5e-4, "{i:?}");
        assert!((i.upper - 9.348).abs() < 5e-4, "{i:?}");
    }

    #[test]
    fn binomial_tail_matches_hand_values() {
        // Binomial(10, 0.05): P(X >= 1) = 1 - 0.95^10, P(X >= 2) = 1 - 0.95^10
        // - 10 0.05 0.95^9 (common practice: the binomial distribution).
        let p0 = 0.95_f64.powi(10);
        let p1 = 10.0 * 0.05 * 0.95_f64.powi(9);
        assert!((outside_chance(10, 1, 0.05).unwrap() - (1.0 - p0)).abs() < 1e-12);
        assert!((outside_chance(10, 2, 0.05).unwrap() - (1.0 - p0 - p1)).abs() < 1e-12);
        assert_eq!(outside_chance(10, 0, 0.05).unwrap(), 1.0);
        assert!(outside_chance(10, 2, 1.5).is_err());
    }

    #[test]
    fn bad_arguments_are_refused() {
        assert!(average_interval(0, 10, 0.95).is_err());
        assert!(average_interval(2, 0, 0.95).is_err());
        assert!(average_interval(2, 10, 1.0).is_err());
        assert!(average_interval(2, 10, f64::NAN).is_err());
    }
}
