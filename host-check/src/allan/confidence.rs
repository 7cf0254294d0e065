//! The confidence of an Allan deviation at one cluster time: the simple
//! degrees-of-freedom rule of IEEE Std 952-1997 and El-Sheimy et al. 2008.
//!
//! With `N` samples and clusters of `m` samples there are `K = N / m`
//! independent clusters; the relative (1-sigma) error of the Allan
//! deviation is `delta = 1 / sqrt(2 (K - 1))` (IEEE Std 952-1997, Annex C,
//! "percentage error"; El-Sheimy, Hou & Niu 2008, eq. 6). The rule counts
//! non-overlapping clusters, so for the overlapping estimator it is
//! conservative (its error is smaller, by up to about 1/sqrt(1.5) for white
//! noise: Howe, Allan & Barnes 1981 give the exact equivalent degrees of
//! freedom per noise type). The interval reported is
//! `sigma (1 - delta) .. sigma (1 + delta)`, about 68%.

/// Relative 1-sigma error of the Allan deviation from `samples` samples at
/// cluster size `m`: `1 / sqrt(2 (N/m - 1))`; infinite below two clusters.
#[must_use]
pub fn relative_error(samples: u64, m: u64) -> f64 {
    let k = samples as f64 / m.max(1) as f64;
    if k <= 1.0 {
        f64::INFINITY
    } else {
        1.0 / (2.0 * (k - 1.0)).sqrt()
    }
}

/// The 1-sigma interval of an Allan deviation `adev` with relative error
/// `delta`: `(adev (1 - delta), adev (1 + delta))`, the lower end kept at
/// zero or above.
#[must_use]
pub fn interval(adev: f64, delta: f64) -> (f64, f64) {
    ((adev * (1.0 - delta)).max(0.0), adev * (1.0 + delta))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_simple_rule() {
        // El-Sheimy 2008, eq. 6: K = 9 clusters -> 1/sqrt(16) = 25%
        // (closed form); 10^4 clusters -> about 0.71%.
        assert!((relative_error(900, 100) - 0.25).abs() < 1e-15);
        assert!((relative_error(1_000_000, 100) - 1.0 / (2.0f64 * 9999.0).sqrt()).abs() < 1e-15);
        assert!(relative_error(10, 10).is_infinite());
        assert_eq!(interval(2.0, 0.25), (1.5, 2.5));
        assert_eq!(interval(2.0, 3.0).0, 0.0);
    }
}
