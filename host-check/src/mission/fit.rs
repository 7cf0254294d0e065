//! Growth of a variant's covariance error with steps: level, linear or
//! square-root, fitted by ordinary least squares and chosen by a penalised
//! fit (Schwarz's criterion), then extrapolated to the mission length.

use serde::Serialize;

/// How an error grows with the step count k.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Growth {
    /// e(k) = a: no growth.
    Level,
    /// e(k) = a + b k: a bias re-injected every step.
    Linear,
    /// e(k) = a + b sqrt(k): a random walk of rounding errors.
    SquareRoot,
}

impl Growth {
    /// The model's name in reports.
    pub fn name(self) -> &'static str {
        match self {
            Growth::Level => "level",
            Growth::Linear => "linear",
            Growth::SquareRoot => "square-root",
        }
    }

    /// The regressor g(k) of the model a + b g(k) (0 for the level).
    pub fn regressor(self, k: f64) -> f64 {
        match self {
            Growth::Level => 0.0,
            Growth::Linear => k,
            Growth::SquareRoot => k.max(0.0).sqrt(),
        }
    }
}

/// A fitted growth model.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Fit {
    /// The model chosen.
    pub growth: Growth,
    /// Intercept a.
    pub a: f64,
    /// Slope b (0 for the level).
    pub b: f64,
    /// Coefficient of determination of the chosen model, 0 to 1 (1 for an
    /// exactly level series).
    pub r_squared: f64,
    /// Residual root mean square over the mean value: the scatter the
    /// model leaves, relative to the error itself.
    pub residual_ratio: f64,
    /// Points fitted.
    pub points: usize,
}

impl Fit {
    /// The model's value at step `k`.
    pub fn at(&self, k: f64) -> f64 {
        self.a + self.b * self.growth.regressor(k)
    }

    /// The first step at which the model reaches `limit`, or `None` when it
    /// never does (level, or not growing). A model already above the limit
    /// at step 0 crosses at step 0.
    pub fn crossing(&self, limit: f64) -> Option<f64> {
        if self.a >= limit {
            return Some(0.0);
        }
        if self.growth == Growth::Level || self.b <= 0.0 {
            return None;
        }
        let g = (limit - self.a) / self.b;
        match self.growth {
            Growth::Level => None,
            Growth::Linear => Some(g),
            Growth::SquareRoot => Some(g * g),
        }
        .filter(|k| k.is_finite())
    }
}

/// Ordinary least squares of y on [1, g(k)]: (a, b, residual sum of
/// squares). The level model is the mean.
fn ols(growth: Growth, k: &[f64], y: &[f64]) -> (f64, f64, f64) {
    let n = y.len() as f64;
    let my = y.iter().sum::<f64>() / n;
    if growth == Growth::Level {
        let rss = y.iter().map(|v| (v - my) * (v - my)).sum();
        return (my, 0.0, rss);
    }
    let g: Vec<f64> = k.iter().map(|&k| growth.regressor(k)).collect();
    let mg = g.iter().sum::<f64>() / n;
    let (mut sgg, mut sgy) = (0.0, 0.0);
    for (gi, yi) in g.iter().zip(y) {
        sgg += (gi - mg) * (gi - mg);
        sgy += (gi - mg) * (yi - my);
    }
    let b = if sgg > 0.0 { sgy / sgg } else { 0.0 };
    let a = my - b * mg;
    let rss = g
        .iter()
        .zip(y)
        .map(|(gi, yi)| {
            let r = yi - a - b * gi;
            r * r
        })
        .sum();
    (a, b, rss)
}

/// Fits the three growth models to (step, error) points by ordinary least
/// squares and keeps the one with the smallest Schwarz criterion
/// n ln(RSS/n) + p ln n (Schwarz, "Estimating the dimension of a model",
/// Annals of Statistics 6(2), 1978; from memory), p = 1 for the level and
/// 2 for the others, so a slope must earn its parameter. Non-finite points
/// are skipped; `None` with fewer than three points left.
pub fn fit(steps: &[f64], errors: &[f64]) -> Option<Fit> {
    let (k, y): (Vec<f64>, Vec<f64>) = steps
        .iter()
        .zip(errors)
        .filter(|(k, e)| k.is_finite() && e.is_finite())
        .map(|(k, e)| (*k, *e))
        .unzip();
    if y.len() < 3 {
        return None;
    }
    let n = y.len() as f64;
    let my = y.iter().sum::<f64>() / n;
    let tss: f64 = y.iter().map(|v| (v - my) * (v - my)).sum();
    // A floor on the residual: scatter at the rounding of sums of the
    // values is no evidence for or against a slope.
    let scale = y.iter().fold(0.0_f64, |m, v| m.max(v.abs()));
    let floor = n * (n * f64::EPSILON * scale).powi(2) + f64::MIN_POSITIVE;
    let mut best: Option<(f64, Fit)> = None;
    for (growth, p) in [
        (Growth::Level, 1.0),
        (Growth::Linear, 2.0),
        (Growth::SquareRoot, 2.0),
    ] {
        let (a, b, rss) = ols(growth, &k, &y);
        let criterion = n * ((rss + floor) / n).ln() + p * n.ln();
        let fit = Fit {
            growth,
            a,
            b,
            r_squared: if tss > floor { 1.0 - rss / tss } else { 1.0 },
            residual_ratio: if my != 0.0 {
                (rss / n).sqrt() / my.abs()
            } else {
                0.0
            },
            points: y.len(),
        };
        if best.as_ref().is_none_or(|(c, _)| criterion < *c) {
            best = Some((criterion, fit));
        }
    }
    best.map(|(_, f)| f)
}

/// `true` when the last half of the series is flat: its own fitted linear
/// change over that half is within `tolerance` of its mean (or of `limit`,
/// whichever is larger), the test for a level error.
pub fn flat_last_half(steps: &[f64], errors: &[f64], tolerance: f64, limit: f64) -> bool {
    let half = steps.len() / 2;
    let (k, y): (Vec<f64>, Vec<f64>) = steps[half..]
        .iter()
        .zip(&errors[half..])
        .filter(|(k, e)| k.is_finite() && e.is_finite())
        .map(|(k, e)| (*k, *e))
        .unzip();
    if y.len() < 3 {
        return false;
    }
    let (_, b, _) = ols(Growth::Linear, &k, &y);
    let span = k.last().copied().unwrap_or(0.0) - k.first().copied().unwrap_or(0.0);
    let mean = y.iter().sum::<f64>() / y.len() as f64;
    (b * span).abs() <= tolerance * mean.abs().max(limit)
}

#[cfg(test)]
mod tests {
    use super::*;

    // Invented series with known growth: tests of our own fitting code.
    fn series(f: impl Fn(f64) -> f64, wobble: f64) -> (Vec<f64>, Vec<f64>) {
        let k: Vec<f64> = (1..=200).map(|i| f64::from(i) * 1000.0).collect();
        // A deterministic wobble (alternating sign), like bucket maxima.
        let e = k
            .iter()
            .enumerate()
            .map(|(i, &k)| f(k) * (1.0 + if i % 2 == 0 { wobble } else { -wobble }))
            .collect();
        (k, e)
    }

    #[test]
    fn ordinary_least_squares_recovers_a_level() {
        let (k, e) = series(|_| 3e-6, 0.05);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Level);
        assert!((f.a - 3e-6).abs() < 1e-8);
        assert_eq!(f.crossing(1e-3), None);
        // An exactly level series is level, with R^2 reported as 1.
        let (k, e) = series(|_| 2e-7, 0.0);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Level);
        assert!((f.r_squared - 1.0).abs() < 1e-12);
    }

    #[test]
    fn ordinary_least_squares_recovers_linear_growth() {
        let (k, e) = series(|k| 1e-7 + 2e-10 * k, 0.01);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Linear);
        assert!((f.b / 2e-10 - 1.0).abs() < 0.02, "slope {}", f.b);
        assert!(f.r_squared > 0.99);
        // 1e-7 + 2e-10 k = 1e-3 at k = (1e-3 - 1e-7) / 2e-10 (arithmetic).
        let c = f.crossing(1e-3).expect("crosses");
        assert!((c / 4.9995e6 - 1.0).abs() < 0.03, "crossing {c}");
    }

    #[test]
    fn ordinary_least_squares_recovers_square_root_growth() {
        let (k, e) = series(|k| 5e-8 + 3e-8 * k.sqrt(), 0.01);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::SquareRoot);
        assert!((f.b / 3e-8 - 1.0).abs() < 0.02, "slope {}", f.b);
        // Crossing 1e-3: sqrt(k) = (1e-3 - 5e-8) / 3e-8 (arithmetic).
        let c = f.crossing(1e-3).expect("crosses");
        let want = ((1e-3 - 5e-8) / 3e-8_f64).powi(2);
        assert!((c / want - 1.0).abs() < 0.05, "crossing {c} vs {want}");
        assert!(!flat_last_half(&k, &e, 0.05, 0.0));
    }

    #[test]
    fn a_flat_last_half_is_recognised() {
        // Decays, then stays level: a filter settling into steady state.
        let (k, e) = series(|k| 1e-6 * (1.0 + 10.0 * (-k / 2e4).exp()), 0.02);
        assert!(flat_last_half(&k, &e, 0.05, 0.0));
    }

    #[test]
    fn too_few_points_give_no_fit() {
        assert_eq!(fit(&[1.0, 2.0], &[1.0, 2.0]), None);
        assert_eq!(fit(&[1.0, 2.0, 3.0], &[f64::NAN, 1.0, 2.0]), None);
    }
}
