//! The inertial noise terms fitted to an Allan variance curve: quantization
//! Q, white rate noise N, bias instability B, rate random walk K and rate
//! ramp R, each with its 1-sigma uncertainty.
//!
//! # Model
//! IEEE Std 952-1997 (Annex C; El-Sheimy, Hou & Niu 2008, Table I): the
//! terms are independent and their Allan variances add,
//! `sigma^2(tau) = 3 Q^2 / tau^2 + N^2 / tau + (2 ln2 / pi) B^2 +
//! K^2 tau / 3 + R^2 tau^2 / 2` (log-log slopes -1, -1/2, 0, +1/2, +1 of the deviation).
//! The coefficients of `tau^-2 .. tau^2` are found by weighted least squares
//! on the Allan *variance*, all of them non-negative: every subset of terms
//! is solved and the feasible one with the smallest `chi^2 + 2 k` (Akaike's
//! criterion, k terms; plus [`RAMP_PENALTY`] when the ramp is in) is kept. Each point's weight is one over
//! `(2 delta sigma^2)` squared (the variance's relative error is twice the
//! deviation's, [`super::confidence`]), iterated three times with the
//! fitted curve in place of the measured one so that low points do not
//! pull the fit down.
//!
//! Only cluster times a factor of two apart enter the fit (octave spacing):
//! neighbouring points share most of their data, and octave-spaced ones
//! nearly none, so the least-squares covariance is a fair 1-sigma
//! uncertainty. The bias instability of a real sensor (flicker noise) is
//! flat only over a limited range; the fit's B is the level of that floor.

use nalgebra::{DMatrix, DVector};

use crate::numeric::noise::BIAS_FLOOR;

/// Extra score a subset with the ramp term pays (see [`fit`]).
pub const RAMP_PENALTY: f64 = 10.0;

/// A solved subset: its columns, coefficients, their covariance and chi^2.
type Solved = (Vec<usize>, DVector<f64>, DMatrix<f64>, f64);

/// The terms, in the order of their power of tau (-2 .. 2).
pub const TERMS: [Term; 5] = [Term::Q, Term::N, Term::B, Term::K, Term::R];

/// One term of the standard noise model.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Term {
    /// Quantization noise (slope -1).
    Q,
    /// White rate noise: angle or velocity random walk (slope -1/2).
    N,
    /// Bias instability (slope 0).
    B,
    /// Rate random walk (slope +1/2).
    K,
    /// Rate ramp (slope +1).
    R,
}

impl Term {
    /// Power of tau of the term's Allan variance.
    #[must_use]
    pub fn power(self) -> i32 {
        match self {
            Term::Q => -2,
            Term::N => -1,
            Term::B => 0,
            Term::K => 1,
            Term::R => 2,
        }
    }

    /// `sigma^2(tau) = factor * coefficient^2 * tau^power`.
    #[must_use]
    pub fn factor(self) -> f64 {
        match self {
            Term::Q => 3.0,
            Term::N => 1.0,
            Term::B => BIAS_FLOOR * BIAS_FLOOR,
            Term::K => 1.0 / 3.0,
            Term::R => 0.5,
        }
    }

    /// The standard's name.
    #[must_use]
    pub fn name(self) -> &'static str {
        match self {
            Term::Q => "quantization noise Q",
            Term::N => "white rate noise N (angle/velocity random walk)",
            Term::B => "bias instability B",
            Term::K => "rate random walk K",
            Term::R => "rate ramp R",
        }
    }

    /// The term's Allan variance at `tau` for coefficient `c`.
    #[must_use]
    pub fn avar(self, c: f64, tau: f64) -> f64 {
        self.factor() * c * c * tau.powi(self.power())
    }
}

/// One fitted term.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Fitted {
    /// Which term.
    pub term: Term,
    /// Its coefficient (Q in units*s, N in units*sqrt(s), B in units, K in
    /// units/sqrt(s), R in units/s).
    pub value: f64,
    /// Its 1-sigma uncertainty.
    pub sigma: f64,
}

/// The fit of one curve.
#[derive(Debug, Clone, PartialEq)]
pub struct Fit {
    /// The terms kept (coefficient > 0), in the order of [`TERMS`].
    pub terms: Vec<Fitted>,
    /// Points used (octave-spaced).
    pub used: usize,
    /// Weighted sum of squared residuals over the points used.
    pub chi2: f64,
}

impl Fit {
    /// A fitted term, if kept.
    #[must_use]
    pub fn get(&self, term: Term) -> Option<Fitted> {
        self.terms.iter().copied().find(|f| f.term == term)
    }

    /// The fitted Allan variance at `tau`.
    #[must_use]
    pub fn avar(&self, tau: f64) -> f64 {
        self.terms.iter().map(|f| f.term.avar(f.value, tau)).sum()
    }
}

/// One point of the curve for the fit.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CurvePoint {
    /// Cluster time, s.
    pub tau: f64,
    /// Allan variance.
    pub avar: f64,
    /// Relative 1-sigma error of the deviation.
    pub delta: f64,
}

/// Picks the points a factor of two apart, from the shortest cluster time.
#[must_use]
pub fn octave_spaced(points: &[CurvePoint]) -> Vec<CurvePoint> {
    let mut out: Vec<CurvePoint> = Vec::new();
    for p in points {
        if p.delta.is_finite()
            && out
                .last()
                .is_none_or(|l| p.tau >= 2.0 * l.tau * (1.0 - 1e-9))
        {
            out.push(*p);
        }
    }
    out
}

/// Fits the terms to `points` (all of them: pass [`octave_spaced`] points
/// for the documented uncertainty). `None` when fewer than two points have
/// a finite error or no subset has all coefficients positive.
#[must_use]
pub fn fit(points: &[CurvePoint]) -> Option<Fit> {
    let pts: Vec<CurvePoint> = points
        .iter()
        .copied()
        .filter(|p| p.delta.is_finite() && p.avar > 0.0 && p.tau > 0.0)
        .collect();
    if pts.len() < 2 {
        return None;
    }
    let tau_ref = (pts[0].tau * pts[pts.len() - 1].tau).sqrt();
    let mut scale: Vec<f64> = pts.iter().map(|p| 2.0 * p.delta * p.avar).collect();
    let mut best: Option<Solved> = None;
    for _ in 0..3 {
        best = None;
        let mut best_score = f64::INFINITY;
        for mask in 1u32..(1 << TERMS.len()) {
            let cols: Vec<usize> = (0..TERMS.len()).filter(|&j| mask & (1 << j) != 0).collect();
            if cols.len() > pts.len() {
                continue;
            }
            let Some((x, cov, chi2)) = solve(&pts, &scale, &cols, tau_ref) else {
                continue;
            };
            if x.iter().any(|&v| v.is_nan() || v <= 0.0) {
                continue;
            }
            // A ramp is a trend, not noise: it is kept only when it buys a
            // clearly better fit (chi^2 lower by 10 more), so that the end of
            // a rate random walk, which a short log cannot tell from a ramp,
            // is read as K.
            let ramp = if cols.contains(&4) { RAMP_PENALTY } else { 0.0 };
            let score = chi2 + 2.0 * cols.len() as f64 + ramp;
            if score < best_score {
                best_score = score;
                best = Some((cols, x, cov, chi2));
            }
        }
        let (cols, x, _, _) = best.as_ref()?;
        // Reweight with the fitted curve.
        for (s, p) in scale.iter_mut().zip(&pts) {
            let model: f64 = cols
                .iter()
                .zip(x.iter())
                .map(|(&j, &c)| c * (p.tau / tau_ref).powi(TERMS[j].power()))
                .sum();
            *s = 2.0 * p.delta * model;
        }
    }
    let (cols, x, cov, chi2) = best?;
    let terms = cols
        .iter()
        .enumerate()
        .map(|(i, &j)| {
            let term = TERMS[j];
            // x_i = factor * coef^2 * tau_ref^power.
            let a = term.factor() * tau_ref.powi(term.power());
            let value = (x[i] / a).sqrt();
            let sd_x = cov[(i, i)].max(0.0).sqrt();
            // coef = sqrt(x / a): d coef = d x / (2 sqrt(a x)).
            let sigma = sd_x / (2.0 * (a * x[i]).sqrt());
            Fitted { term, value, sigma }
        })
        .collect();
    Some(Fit {
        terms,
        used: pts.len(),
        chi2,
    })
}

/// Weighted least squares on the chosen columns; the coefficients (of the
/// scaled basis `(tau / tau_ref)^p`), their covariance and chi^2.
fn solve(
    pts: &[CurvePoint],
    scale: &[f64],
    cols: &[usize],
    tau_ref: f64,
) -> Option<(DVector<f64>, DMatrix<f64>, f64)> {
    let a = DMatrix::from_fn(pts.len(), cols.len(), |i, k| {
        (pts[i].tau / tau_ref).powi(TERMS[cols[k]].power()) / scale[i]
    });
    let b = DVector::from_fn(pts.len(), |i, _| pts[i].avar / scale[i]);
    let ata = a.transpose() * &a;
    let chol = ata.clone().cholesky()?;
    let x = chol.solve(&(a.transpose() * &b));
    let r = &a * &x - &b;
    let cov = chol.inverse();
    if x.iter().any(|v| !v.is_finite()) {
        return None;
    }
    Some((x, cov, r.norm_squared()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn exact_curves_give_back_their_terms() {
        // A noiseless curve of the standard's model (IEEE Std 952-1997
        // Annex C) returns the coefficients it was built from.
        let (n, b, k) = (2e-3, 5e-4, 3e-5);
        let pts: Vec<CurvePoint> = (0..20)
            .map(|i| {
                let tau = 0.01 * 2f64.powi(i);
                let avar = Term::N.avar(n, tau) + Term::B.avar(b, tau) + Term::K.avar(k, tau);
                CurvePoint {
                    tau,
                    avar,
                    delta: 0.05,
                }
            })
            .collect();
        let f = fit(&pts).unwrap();
        for (t, want) in [(Term::N, n), (Term::B, b), (Term::K, k)] {
            let got = f.get(t).unwrap_or_else(|| panic!("{t:?} missing: {f:?}"));
            assert!(((got.value - want) / want).abs() < 1e-6, "{t:?}: {got:?}");
        }
        assert!(
            f.get(Term::Q).is_none() && f.get(Term::R).is_none(),
            "{f:?}"
        );
    }

    #[test]
    fn octave_spacing() {
        let pts: Vec<CurvePoint> = [1.0, 1.5, 2.0, 3.0, 4.1, 8.0, 8.3]
            .iter()
            .map(|&tau| CurvePoint {
                tau,
                avar: 1.0,
                delta: 0.1,
            })
            .collect();
        let taus: Vec<f64> = octave_spaced(&pts).iter().map(|p| p.tau).collect();
        assert_eq!(taus, vec![1.0, 2.0, 4.1, 8.3]);
    }
}
