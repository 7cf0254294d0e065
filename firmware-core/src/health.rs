//! A runtime health monitor a firmware loop can poll: windowed mean NIS
//! against chi-square bounds, correlation asymmetry of the covariance and
//! smallest variance.

use nalgebra::SMatrix;

use crate::check;
use crate::error::{FilterError, Operand, Outcome};
use crate::scalar::Scalar;
use crate::ud::UdKalman;

/// Where the windowed mean NIS lies against its chi-square interval.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum NisBand {
    /// Fewer samples than the monitor needs to judge.
    TooFew,
    /// Below the lower bound: pessimistic, the filter claims more
    /// uncertainty than it has (R or Q too large).
    Pessimistic,
    /// Inside the two-sided interval.
    Consistent,
    /// Above the upper bound: optimistic, the filter claims less
    /// uncertainty than it has; innovations are larger than it expects (Q or
    /// R too small, a model error, or divergence).
    Optimistic,
}

/// One poll of the health monitor.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct HealthReport<T> {
    /// Measurements in the window.
    pub samples: u16,
    /// Sum of NIS over the window divided by the total degrees of freedom.
    pub mean_nis_per_dof: T,
    /// Lower bound of the two-sided interval for that mean.
    pub lower: T,
    /// Upper bound of the two-sided interval for that mean.
    pub upper: T,
    /// The NIS verdict.
    pub nis: NisBand,
    /// The correlation asymmetry: the largest |P_ij - P_ji| relative to
    /// sqrt(P_ii P_jj). (The verifier's "asymmetry" is another measure,
    /// max |P_ij - P_ji| relative to the Frobenius norm of P.)
    pub correlation_asymmetry: T,
    /// Smallest diagonal entry of P (for a factored filter, the smallest D).
    pub min_variance: T,
    /// `true` when P is positive definite by an LDL' factorisation (the
    /// pivot rule of [`crate::Ldl::factor`]); for a factored filter, when
    /// every D is positive and finite and U D U' is finite. A positive
    /// diagonal alone does not make P a covariance.
    pub positive_definite: bool,
    /// `true` when NIS is consistent (or too few to judge), P is symmetric
    /// within tolerance, finite and positive definite.
    pub healthy: bool,
}

/// Windowed consistency and covariance-sanity monitor, `W` measurements deep.
///
/// The chi-square bounds use the Wilson-Hilferty approximation
/// (Wilson and Hilferty, PNAS 17, 1931), so no tables are needed on the
/// target. Against exact quantiles (95% interval, measured in the tests):
/// for 10 or more degrees of freedom in the window the lower bound is
/// within 0.8% and the upper within 1e-4; the upper bound is within 2% for
/// any window. Below 10 the lower bound is too low (4% at 5 degrees of
/// freedom, 48% at 2, zero at 1), so a small window flags [`NisBand::Pessimistic`]
/// late, never early: size `W` for 10 or more degrees of freedom where a
/// too-large Q or R matters.
#[derive(Debug, Clone)]
pub struct HealthMonitor<T: Scalar, const W: usize> {
    /// A ring of the last `W` (NIS, degrees of freedom) pairs. Our own
    /// rather than `heapless::HistoryBuf`, whose `write` keeps a bounds
    /// check the optimiser cannot remove (the on-target no-panic link proof
    /// failed on it): here every index is reduced modulo `W`.
    window: [(T, u8); W],
    /// The slot the next sample goes to.
    next: usize,
    /// How many slots hold samples (at most `W`).
    filled: usize,
    z: T,
    min_samples: u16,
    correlation_asymmetry_limit: T,
}

impl<T: Scalar, const W: usize> HealthMonitor<T, W> {
    /// A monitor with a two-sided 95% interval (standard normal quantile
    /// 1.959964), judging once it holds `W / 2` measurements and flagging
    /// correlation asymmetry above 1e3 machine epsilons.
    #[must_use]
    pub fn new() -> Self {
        Self::build(T::of(1.959_963_984_540_054))
    }

    /// A monitor with the two-sided interval of the given standard normal
    /// quantile (2.575829 for 99%).
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for a NaN or infinite quantile and
    /// [`FilterError::NotPositive`] for zero or below, both with
    /// [`Operand::Quantile`]: either would make the interval meaningless
    /// (a NaN bound compares false, so every window read as consistent).
    ///
    /// # Panics
    /// Never.
    pub fn try_with_quantile(z: T) -> Result<Self, FilterError> {
        check::positive(z, Operand::Quantile)?;
        Ok(Self::build(z))
    }

    fn build(z: T) -> Self {
        Self {
            window: [(T::zero(), 0); W],
            next: 0,
            filled: 0,
            z,
            min_samples: (W / 2).max(1).min(u16::MAX as usize) as u16,
            correlation_asymmetry_limit: T::EPSILON * T::of(1e3),
        }
    }

    /// Records the NIS of an update outcome with `dof` measurement
    /// components. Gated measurements count too: they are evidence.
    pub fn record(&mut self, outcome: &Outcome<T>, dof: u8) {
        self.record_nis(outcome.nis(), dof);
    }

    /// Records one normalised innovation squared. Non-finite values and
    /// `dof = 0` are ignored.
    pub fn record_nis(&mut self, nis: T, dof: u8) {
        if nis.finite() && dof > 0 {
            if W == 0 {
                return;
            }
            let i = self.next % W;
            self.window[i] = (nis, dof);
            self.next = (i + 1) % W;
            if self.filled < W {
                self.filled += 1;
            }
        }
    }

    /// Forgets the window.
    pub fn clear(&mut self) {
        self.next = 0;
        self.filled = 0;
    }

    /// Judges the window and the covariance `p`: definiteness by an LDL'
    /// factorisation of its upper triangle (about n^3 / 6 multiply-adds and
    /// n - 1 divides), not by the diagonal alone.
    #[must_use]
    pub fn assess<const N: usize>(&self, p: &SMatrix<T, N, N>) -> HealthReport<T> {
        let (correlation_asymmetry, min_variance, finite) = covariance_sanity(p);
        let definite = finite && check::definite(p).is_ok();
        self.judge(correlation_asymmetry, min_variance, finite, definite)
    }

    /// Judges the window and a U-D factored filter. Definiteness is read
    /// from D (every entry positive and finite: U D U' is then positive
    /// definite by construction) and from the variances of U D U' being
    /// finite, so `min_variance` reports the smallest D; the factors carry
    /// no asymmetry (its correlation asymmetry is zero).
    #[must_use]
    pub fn assess_factored<const N: usize>(&self, filter: &UdKalman<T, N>) -> HealthReport<T> {
        let d = filter.d();
        let finite = filter.factors().iter().all(|v| v.finite())
            && filter
                .rebuild_covariance()
                .diagonal()
                .iter()
                .all(|v| v.finite());
        let min_d = d
            .iter()
            .copied()
            .fold(T::max_value().unwrap_or_else(T::one), |a, b| {
                if b < a || !b.finite() { b } else { a }
            });
        let definite = finite && min_d > T::zero();
        self.judge(T::zero(), min_d, finite, definite)
    }

    fn judge(
        &self,
        correlation_asymmetry: T,
        min_variance: T,
        finite: bool,
        positive_definite: bool,
    ) -> HealthReport<T> {
        let mut sum = T::zero();
        let mut dof: u32 = 0;
        // The filled slots in storage order (the first `filled` ones until
        // the ring wraps, then all).
        for (i, &(nis, d)) in self.window.iter().enumerate() {
            if i < self.filled {
                sum += nis;
                dof += u32::from(d);
            }
        }
        let samples = self.filled.min(u16::MAX as usize) as u16;
        let (mean, lower, upper, nis) = if dof == 0 || samples < self.min_samples {
            (T::zero(), T::zero(), T::zero(), NisBand::TooFew)
        } else {
            let k = T::of(f64::from(dof));
            let mean = sum / k;
            let (lo, hi) = wilson_hilferty_bounds(k, self.z);
            let band = if mean < lo {
                NisBand::Pessimistic
            } else if mean > hi {
                NisBand::Optimistic
            } else {
                NisBand::Consistent
            };
            (mean, lo, hi, band)
        };
        let healthy = finite
            && positive_definite
            && min_variance > T::zero()
            && correlation_asymmetry <= self.correlation_asymmetry_limit
            && matches!(nis, NisBand::Consistent | NisBand::TooFew);
        HealthReport {
            samples,
            mean_nis_per_dof: mean,
            lower,
            upper,
            nis,
            correlation_asymmetry,
            min_variance,
            positive_definite,
            healthy,
        }
    }
}

impl<T: Scalar, const W: usize> Default for HealthMonitor<T, W> {
    fn default() -> Self {
        Self::new()
    }
}

/// Correlation asymmetry (largest |P_ij - P_ji| / sqrt(P_ii P_jj)), smallest
/// diagonal entry, and whether every diagonal entry is finite.
fn covariance_sanity<T: Scalar, const N: usize>(p: &SMatrix<T, N, N>) -> (T, T, bool) {
    let mut asymmetry = T::zero();
    let mut min_variance = T::max_value().unwrap_or_else(T::one);
    let mut finite = true;
    for j in 0..N {
        let d = p[(j, j)];
        finite &= d.finite();
        if d < min_variance || !d.finite() {
            min_variance = d;
        }
        for i in 0..j {
            let scale = (p[(i, i)] * p[(j, j)]).abs().sqrt();
            if scale > T::zero() {
                let a = (p[(i, j)] - p[(j, i)]).abs() / scale;
                if a > asymmetry || !a.finite() {
                    asymmetry = a;
                }
            }
        }
    }
    (asymmetry, min_variance, finite)
}

/// Two-sided bounds for chi-square(k) / k at standard normal quantile `z`:
/// (1 - 2/(9k) -/+ z sqrt(2/(9k)))^3 (Wilson and Hilferty 1931).
pub fn wilson_hilferty_bounds<T: Scalar>(k: T, z: T) -> (T, T) {
    let c = T::of(2.0) / (T::of(9.0) * k);
    let s = c.sqrt();
    let base = T::one() - c;
    let lo = base - z * s;
    let hi = base + z * s;
    let lo = if lo > T::zero() {
        lo * lo * lo
    } else {
        T::zero()
    };
    (lo, hi * hi * hi)
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::Matrix3;

    #[test]
    fn wilson_hilferty_matches_published_interval() {
        // Bar-Shalom, Li and Kirubarajan (2001): for 50 runs of n = 3 the
        // two-sided 95% interval of the average NEES is [2.3597, 3.7160],
        // i.e. chi-square(150)/150 bounds [0.78657, 1.23867].
        // Wilson-Hilferty gives 2.35960 and 3.71606: about 1e-4 from the
        // exact quantiles at 150 degrees of freedom, plus the table's own
        // rounding of 5e-5, so 1.5e-4 (the exact quantiles themselves are
        // checked in the cross-crate tests against a reference library).
        let (lo, hi) = wilson_hilferty_bounds(150.0_f64, 1.959_963_984_540_054);
        assert!((lo * 3.0 - 2.3597).abs() < 1.5e-4, "lo {}", lo * 3.0);
        assert!((hi * 3.0 - 3.7160).abs() < 1.5e-4, "hi {}", hi * 3.0);
    }

    #[test]
    fn the_window_keeps_the_last_w_samples() {
        // 4 slots, 7 samples 1..=7: the window holds 4, 5, 6, 7, mean 5.5
        // (exact in binary floating point).
        let mut m = HealthMonitor::<f64, 4>::new();
        for v in 1..=7 {
            m.record_nis(f64::from(v), 1);
        }
        let r = m.assess(&Matrix3::<f64>::identity());
        assert_eq!(r.samples, 4);
        assert_eq!(r.mean_nis_per_dof, 5.5);
        m.record_nis(f64::NAN, 1);
        m.record_nis(1.0, 0);
        assert_eq!(m.assess(&Matrix3::<f64>::identity()).samples, 4);
        m.clear();
        assert_eq!(m.assess(&Matrix3::<f64>::identity()).samples, 0);
    }

    #[test]
    fn flags_high_nis_and_lost_variance() {
        let mut m = HealthMonitor::<f64, 20>::new();
        let p = Matrix3::<f64>::identity();
        assert_eq!(m.assess(&p).nis, NisBand::TooFew);
        for _ in 0..20 {
            m.record_nis(9.0, 1);
        }
        let r = m.assess(&p);
        assert_eq!(r.nis, NisBand::Optimistic);
        assert!(!r.healthy);
        m.clear();
        for _ in 0..20 {
            m.record_nis(1.0, 1);
        }
        assert!(m.assess(&p).healthy);
        let ud = UdKalman::<f64, 3>::try_new(nalgebra::Vector3::zeros(), p).unwrap();
        assert!(m.assess_factored(&ud).healthy);
        let mut bad = p;
        bad[(2, 2)] = -1e-9;
        assert!(!m.assess(&bad).healthy);
        let mut skew = p;
        skew[(0, 1)] = 1e-6;
        assert!(!m.assess(&skew).healthy);
    }
}
