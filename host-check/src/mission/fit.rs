//! Growth of a variant's covariance error with steps: level, linear,
//! square-root or a fitted power, fitted by ordinary least squares and
//! chosen by a penalised fit (Schwarz's criterion), then extrapolated to the
//! mission length.

use serde::Serialize;

/// The interval the power model's exponent p is fitted in.
pub const EXPONENT_RANGE: (f64, f64) = (0.1, 2.0);
/// Spacing of the exponent grid the power model is first profiled on. A
/// fitted exponent within this of 1/2 or 1 is no evidence against the named
/// model, which is kept instead.
pub const EXPONENT_GRID_STEP: f64 = 0.05;
/// Width at which the golden-section refinement of the exponent stops.
const EXPONENT_TOLERANCE: f64 = 1e-4;
/// Fewest points the power model is tried on: three parameters need more
/// than a handful of points before a criterion can weigh them.
const POWER_MIN_POINTS: usize = 10;

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
    /// e(k) = a + b k^p with p fitted (in [`EXPONENT_RANGE`]): mixed or
    /// correlated rounding, between or beyond the two named growths.
    Power,
}

impl Growth {
    /// The model's name in reports (the power model's exponent is in
    /// [`Fit::label`]).
    pub fn name(self) -> &'static str {
        match self {
            Growth::Level => "level",
            Growth::Linear => "linear",
            Growth::SquareRoot => "square-root",
            Growth::Power => "power",
        }
    }
}

/// The regressor k^p of the model a + b k^p, with the named exponents
/// computed exactly (k itself, the square root).
fn regressor(k: f64, p: f64) -> f64 {
    let k = k.max(0.0);
    if p == 1.0 {
        k
    } else if p == 0.5 {
        k.sqrt()
    } else {
        k.powf(p)
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
    /// The exponent p of the model a + b k^p: fitted for the power model,
    /// 1 for the linear, 0.5 for the square-root, 0 for the level.
    pub exponent: f64,
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
    /// The model in reports: its name, with the exponent for the power
    /// model ("power 0.73"); "power 2.00+" when the exponent sits at the top
    /// of its search range, where the growth may be faster still.
    pub fn label(&self) -> String {
        match self.growth {
            Growth::Power if self.at_top_of_range() => format!("power {:.2}+", self.exponent),
            Growth::Power => format!("power {:.2}", self.exponent),
            g => g.name().to_string(),
        }
    }

    /// `true` for a power fit whose exponent reached the top of
    /// [`EXPONENT_RANGE`].
    pub fn at_top_of_range(&self) -> bool {
        self.growth == Growth::Power
            && self.exponent >= EXPONENT_RANGE.1 - 10.0 * EXPONENT_TOLERANCE
    }

    /// The model's value at step `k`.
    pub fn at(&self, k: f64) -> f64 {
        match self.growth {
            Growth::Level => self.a,
            _ => self.a + self.b * regressor(k, self.exponent),
        }
    }

    /// The first step at which the model reaches `limit`, or `None` when it
    /// never does (level, or not growing). A model already above the limit
    /// at step 0 crosses at step 0.
    pub fn crossing(&self, limit: f64) -> Option<f64> {
        if self.a >= limit {
            return Some(0.0);
        }
        if self.growth == Growth::Level || self.b <= 0.0 || self.exponent <= 0.0 {
            return None;
        }
        let g = (limit - self.a) / self.b;
        match self.growth {
            Growth::Level => None,
            Growth::Linear => Some(g),
            Growth::SquareRoot => Some(g * g),
            Growth::Power => Some(g.powf(1.0 / self.exponent)),
        }
        .filter(|k| k.is_finite())
    }
}

/// Ordinary least squares of y on [1, g]: (a, b, residual sum of squares).
/// A constant regressor gives b = 0 and a the mean.
fn ols(g: &[f64], y: &[f64]) -> (f64, f64, f64) {
    let n = y.len() as f64;
    let my = y.iter().sum::<f64>() / n;
    let mg = g.iter().sum::<f64>() / n;
    let (mut sgg, mut sgy) = (0.0, 0.0);
    for (gi, yi) in g.iter().zip(y) {
        sgg += (gi - mg) * (gi - mg);
        sgy += (gi - mg) * (yi - my);
    }
    let b = if sgg > 0.0 && sgy.is_finite() {
        sgy / sgg
    } else {
        0.0
    };
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

/// Least squares of one growth model with a fixed exponent (the level is
/// the mean): (a, b, residual sum of squares).
fn ols_model(growth: Growth, exponent: f64, k: &[f64], y: &[f64]) -> (f64, f64, f64) {
    if growth == Growth::Level {
        let my = y.iter().sum::<f64>() / y.len() as f64;
        return (my, 0.0, y.iter().map(|v| (v - my) * (v - my)).sum());
    }
    let g: Vec<f64> = k.iter().map(|&k| regressor(k, exponent)).collect();
    ols(&g, y)
}

/// Golden-section search for the minimum of `f` on [lo, hi] down to width
/// `tol` (Kiefer, "Sequential minimax search for a maximum", Proc. AMS
/// 4(3), 1953; from memory): (argument, value) of the best point evaluated.
fn golden_section(f: impl Fn(f64) -> f64, mut lo: f64, mut hi: f64, tol: f64) -> (f64, f64) {
    // 1/phi = (sqrt(5) - 1) / 2: each step keeps this share of the bracket.
    let r = (5.0_f64.sqrt() - 1.0) / 2.0;
    let mut x1 = hi - r * (hi - lo);
    let mut x2 = lo + r * (hi - lo);
    let (mut f1, mut f2) = (f(x1), f(x2));
    // The bracket shrinks by 0.618 a step: 60 steps take any bracket we
    // use below 1e-12 of its width; the bound keeps a NaN from looping.
    for _ in 0..60 {
        if hi - lo <= tol {
            break;
        }
        if f1 <= f2 {
            hi = x2;
            x2 = x1;
            f2 = f1;
            x1 = hi - r * (hi - lo);
            f1 = f(x1);
        } else {
            lo = x1;
            x1 = x2;
            f1 = f2;
            x2 = lo + r * (hi - lo);
            f2 = f(x2);
        }
    }
    if f1 <= f2 { (x1, f1) } else { (x2, f2) }
}

/// Least squares of a + b k^p with p fitted in [`EXPONENT_RANGE`]: the
/// residual sum of squares is profiled over p (a and b by ordinary least
/// squares for each p) on a grid of [`EXPONENT_GRID_STEP`], then refined by
/// golden-section search between the best grid point's neighbours.
/// (a, b, p, residual sum of squares); `None` when the steps give no
/// regressor (all at or below 0).
fn ols_power(k: &[f64], y: &[f64]) -> Option<(f64, f64, f64, f64)> {
    // Steps scaled to at most 1, so k^p stays well inside f64 for any p.
    let kmax = k.iter().fold(0.0_f64, |m, &k| m.max(k));
    if !(kmax > 0.0 && kmax.is_finite()) {
        return None;
    }
    let ks: Vec<f64> = k.iter().map(|&k| k.max(0.0) / kmax).collect();
    let rss = |p: f64| {
        let g: Vec<f64> = ks.iter().map(|&k| k.powf(p)).collect();
        ols(&g, y).2
    };
    let (lo, hi) = EXPONENT_RANGE;
    let cells = ((hi - lo) / EXPONENT_GRID_STEP).round() as usize;
    let grid = |i: usize| lo + (hi - lo) * i as f64 / cells as f64;
    let mut best = (0, f64::INFINITY);
    for i in 0..=cells {
        let r = rss(grid(i));
        if r < best.1 {
            best = (i, r);
        }
    }
    let (i, grid_rss) = best;
    if !grid_rss.is_finite() {
        return None;
    }
    let (p, refined) = golden_section(
        rss,
        grid(i.saturating_sub(1)),
        grid((i + 1).min(cells)),
        EXPONENT_TOLERANCE,
    );
    let p = if refined <= grid_rss { p } else { grid(i) };
    let g: Vec<f64> = ks.iter().map(|&k| k.powf(p)).collect();
    let (a, b_scaled, rss) = ols(&g, y);
    // a + b_s (k / kmax)^p = a + (b_s / kmax^p) k^p.
    Some((a, b_scaled / kmax.powf(p), p, rss))
}

/// Fits the growth models to (step, error) points by least squares and
/// keeps the one with the smallest Schwarz criterion n ln(RSS/n) + m ln n
/// (Schwarz, "Estimating the dimension of a model", Annals of Statistics
/// 6(2), 1978; from memory), m = 1 parameter for the level, 2 for the
/// linear and square-root, 3 for the power model (its exponent counts), so
/// a slope and an exponent must each earn their parameter. The power model
/// is tried on at least ten points, and not when its exponent comes out
/// within [`EXPONENT_GRID_STEP`] of 1/2 or 1: the named model stands then.
/// Non-finite points are skipped; `None` with fewer than three points left.
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
    // (model, a, b, exponent, residual sum of squares, parameters)
    let mut candidates: Vec<(Growth, f64, f64, f64, f64, f64)> = [
        (Growth::Level, 0.0, 1.0),
        (Growth::Linear, 1.0, 2.0),
        (Growth::SquareRoot, 0.5, 2.0),
    ]
    .into_iter()
    .map(|(growth, p, m)| {
        let (a, b, rss) = ols_model(growth, p, &k, &y);
        (growth, a, b, p, rss, m)
    })
    .collect();
    if y.len() >= POWER_MIN_POINTS
        && let Some((a, b, p, rss)) = ols_power(&k, &y)
        && (p - 0.5).abs() > EXPONENT_GRID_STEP
        && (p - 1.0).abs() > EXPONENT_GRID_STEP
    {
        candidates.push((Growth::Power, a, b, p, rss, 3.0));
    }
    let mut best: Option<(f64, Fit)> = None;
    for (growth, a, b, exponent, rss, m) in candidates {
        let criterion = n * ((rss + floor) / n).ln() + m * n.ln();
        let fit = Fit {
            growth,
            a,
            b,
            exponent,
            r_squared: if tss > floor { 1.0 - rss / tss } else { 1.0 },
            residual_ratio: if my != 0.0 {
                (rss / n).sqrt() / my.abs()
            } else {
                0.0
            },
            points: y.len(),
        };
        // Ties go to the simpler model (listed first).
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
    let (_, b, _) = ols(&k, &y);
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
    fn an_exponent_at_the_top_of_its_range_is_marked() {
        // Cubic growth cannot be told apart above p = 2: the label says so.
        let k: Vec<f64> = (1..=200).map(|i| f64::from(i) * 1000.0).collect();
        let e: Vec<f64> = k.iter().map(|&k| 1e-6 + 1e-15 * k * k * k).collect();
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Power, "{f:?}");
        assert!(f.at_top_of_range(), "{f:?}");
        assert!(f.label().ends_with('+'), "{}", f.label());
        let square_root: Vec<f64> = k.iter().map(|&k| 1e-6 + 1e-8 * k.sqrt()).collect();
        assert!(!fit(&k, &square_root).expect("fits").label().ends_with('+'));
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

    // The power model. Synthetic series again: these test the fitting
    // machinery (ordinary least squares, Schwarz 1978's criterion,
    // golden-section search after Kiefer 1953), not any filter.

    /// A deterministic, irregular relative noise in [-amp, amp] (a
    /// multiplicative congruential sequence, not a regular alternation).
    fn noisy(f: impl Fn(f64) -> f64, amp: f64) -> (Vec<f64>, Vec<f64>) {
        let k: Vec<f64> = (1..=200).map(|i| f64::from(i) * 1000.0).collect();
        let mut u: u64 = 12_345;
        let e = k
            .iter()
            .map(|&k| {
                u = u.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
                let unit = (u >> 11) as f64 / (1u64 << 53) as f64; // [0, 1)
                f(k) * (1.0 + amp * (2.0 * unit - 1.0))
            })
            .collect();
        (k, e)
    }

    #[test]
    fn golden_section_finds_the_minimum_of_a_parabola() {
        // (x - 0.3)^2 + 2 on [0, 1]: minimum 2 at 0.3 (arithmetic); the
        // bracket shrinks by 0.618 a step (Kiefer 1953) down to 1e-6.
        let (x, fx) = golden_section(|x| (x - 0.3) * (x - 0.3) + 2.0, 0.0, 1.0, 1e-6);
        assert!((x - 0.3).abs() < 1e-6, "{x}");
        assert!((fx - 2.0).abs() < 1e-12, "{fx}");
        // A minimum at the bracket's end is approached, not missed.
        let (x, _) = golden_section(|x| x, 0.1, 2.0, 1e-4);
        assert!((x - 0.1).abs() < 1e-4, "{x}");
    }

    #[test]
    fn a_power_of_three_quarters_is_recovered_and_chosen() {
        // e = 2e-7 + 4e-9 k^0.75 with 1% noise: between the square root and
        // the line, so neither named model fits it as well.
        let (k, e) = noisy(|k| 2e-7 + 4e-9 * k.powf(0.75), 0.01);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Power, "{f:?}");
        assert!((f.exponent - 0.75).abs() < 0.05, "exponent {}", f.exponent);
        assert!(f.r_squared > 0.99, "{f:?}");
        assert_eq!(f.label(), format!("power {:.2}", f.exponent));
        // The fitted curve follows the generating one over the data and,
        // with the exponent within 0.05, within 20% at 100x the last step.
        let truth = |k: f64| 2e-7 + 4e-9 * k.powf(0.75);
        assert!((f.at(1e5) / truth(1e5) - 1.0).abs() < 0.02);
        assert!((f.at(2e7) / truth(2e7) - 1.0).abs() < 0.2, "{}", f.at(2e7));
        // Crossing 1e-3: k = ((1e-3 - a) / b)^(1/p), checked against the
        // model's own value there (arithmetic).
        let c = f.crossing(1e-3).expect("crosses");
        assert!((f.at(c) / 1e-3 - 1.0).abs() < 1e-9, "{c}");
        // Its criterion beat both named models fitted to the same points.
        for (named, p) in [(Growth::SquareRoot, 0.5), (Growth::Linear, 1.0)] {
            let (_, _, rss) = ols_model(named, p, &k, &e);
            let (_, _, _, rss_power) = ols_power(&k, &e).expect("power fit");
            let n = k.len() as f64;
            assert!(
                n * (rss_power / n).ln() + 3.0 * n.ln() < n * (rss / n).ln() + 2.0 * n.ln(),
                "{named:?}"
            );
        }
    }

    #[test]
    fn square_root_and_linear_series_keep_their_named_models() {
        // The power fit lands near 1/2 or 1 and the named model, one
        // parameter cheaper, stands.
        let (k, e) = noisy(|k| 5e-8 + 3e-8 * k.sqrt(), 0.01);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::SquareRoot, "{f:?}");
        assert_eq!(f.exponent, 0.5);
        assert_eq!(f.label(), "square-root");
        let (_, _, p, _) = ols_power(&k, &e).expect("power fit");
        assert!((p - 0.5).abs() < EXPONENT_GRID_STEP, "{p}");
        let (k, e) = noisy(|k| 1e-7 + 2e-10 * k, 0.01);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Linear, "{f:?}");
        assert_eq!(f.exponent, 1.0);
        // An exponent of 0.53 with little noise would beat the square root
        // on the criterion alone, but within the grid step of 1/2 it is no
        // evidence of another growth: the named model is kept.
        let (k, e) = noisy(|k| 5e-8 + 3e-8 * k.powf(0.53), 1e-4);
        let (_, _, p, _) = ols_power(&k, &e).expect("power fit");
        assert!((p - 0.53).abs() < 0.01, "{p}");
        assert_eq!(fit(&k, &e).expect("fits").growth, Growth::SquareRoot);
        // Noise about a level: the power fit's extra freedom buys too
        // little residual for its two extra parameters.
        let (k, e) = noisy(|_| 3e-6, 0.05);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Level, "{f:?}");
        assert_eq!(f.label(), "level");
    }

    #[test]
    fn a_shrinking_power_never_crosses() {
        // e = 1e-5 - 5e-14 k^1.5: falling, as an error settling down.
        let (k, e) = noisy(|k| 1e-5 - 5e-14 * k.powf(1.5), 0.001);
        let f = fit(&k, &e).expect("fits");
        assert_eq!(f.growth, Growth::Power, "{f:?}");
        assert!((f.exponent - 1.5).abs() < 0.05, "{}", f.exponent);
        assert!(f.b < 0.0);
        assert_eq!(f.crossing(1e-3), None);
        // Already above the limit at the start: crosses at step 0.
        assert_eq!(f.crossing(1e-6), Some(0.0));
    }

    #[test]
    fn degenerate_series_fit_a_level_without_panicking() {
        // All equal, all zero, one step repeated, zeros with a step at 0:
        // nothing to fit but a constant, and nothing panics.
        let k: Vec<f64> = (0..50).map(f64::from).collect();
        for y in [vec![4.2e-7; 50], vec![0.0; 50]] {
            let f = fit(&k, &y).expect("fits");
            assert_eq!(f.growth, Growth::Level, "{f:?}");
            assert!(f.at(1e9).is_finite() && f.crossing(1.0).is_none());
        }
        let same_step = vec![7.0; 50];
        let y: Vec<f64> = (0..50).map(|i| f64::from(i % 3)).collect();
        let f = fit(&same_step, &y).expect("fits");
        assert_eq!(f.growth, Growth::Level, "{f:?}");
        assert_eq!(ols_power(&[0.0; 20], &[1.0; 20]), None);
        // Three points: too few for the power model; a line through them.
        let f = fit(&[1.0, 2.0, 3.0], &[1.0, 2.0, 3.0]).expect("fits");
        assert_eq!(f.growth, Growth::Linear, "{f:?}");
    }
}
