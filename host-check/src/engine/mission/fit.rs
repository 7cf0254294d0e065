//! Trend of a variant's error with steps: a rank-based test on per-block
//! maxima (Mann-Kendall) and a robust slope with its interval (Theil-Sen).
//! Growth is claimed only when the test finds it significant.

use serde::Serialize;

/// Two-sided significance level of the trend test and one minus the
/// coverage of the slope interval.
pub const ALPHA: f64 = 0.05;
/// Number of blocks the tested part of a series is cut into (the per-block
/// maxima are what the test sees). Each block of the 400-point decimated
/// series then spans ten plot buckets: long enough that neighbouring
/// maxima are less correlated than the buckets', many enough for the
/// normal approximation of the test statistic (Gilbert 1987 recommends
/// it from n = 10 on; from memory).
pub const BLOCKS: usize = 36;
/// Fewest blocks the test is run on.
pub const MIN_BLOCKS: usize = 10;

/// The standard normal distribution function, from the series of Abramowitz
/// and Stegun, *Handbook of Mathematical Functions*, 7.1.6 (from memory):
/// erf x = (2/sqrt(pi)) exp(-x^2) sum_n 2^n x^(2n+1) / (1 3 5 ... (2n+1)),
/// whose terms are all of one sign (no cancellation), and Phi(x) =
/// (1 + erf(x/sqrt(2)))/2. Absolute error near 1e-15 for |x| <= 8; 0 or 1
/// beyond (Phi(-8) is 6e-16).
pub fn normal_cdf(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x.abs() > 8.0 {
        return if x > 0.0 { 1.0 } else { 0.0 };
    }
    let u = x.abs() / std::f64::consts::SQRT_2;
    let (mut term, mut sum) = (u, u);
    let mut n = 0.0;
    // The terms peak near n = u^2 (at most 32 here) and then fall faster
    // than geometrically: 200 terms are far more than needed.
    for _ in 0..200 {
        n += 1.0;
        term *= 2.0 * u * u / (2.0 * n + 1.0);
        sum += term;
        if term < sum * 1e-17 {
            break;
        }
    }
    let erf = (2.0 / std::f64::consts::PI.sqrt() * (-u * u).exp() * sum).min(1.0);
    if x >= 0.0 {
        0.5 * (1.0 + erf)
    } else {
        0.5 * (1.0 - erf)
    }
}

/// The standard normal quantile: the x with [`normal_cdf`]`(x) = p`, by
/// bisection on [-8, 8] (`NaN` outside (0, 1)).
pub fn normal_quantile(p: f64) -> f64 {
    if !(p > 0.0 && p < 1.0) {
        return f64::NAN;
    }
    let (mut lo, mut hi) = (-8.0_f64, 8.0_f64);
    // Each halving gains a bit: 60 take the bracket of 16 below 1e-16.
    for _ in 0..60 {
        let mid = 0.5 * (lo + hi);
        if normal_cdf(mid) < p {
            lo = mid;
        } else {
            hi = mid;
        }
    }
    0.5 * (lo + hi)
}

/// The Mann-Kendall statistic of a series in time order (Mann,
/// "Nonparametric tests against trend", Econometrica 13, 1945; Kendall,
/// *Rank Correlation Methods*, 4th ed., Griffin 1975; the tie correction
/// as in Gilbert, *Statistical Methods for Environmental Pollution
/// Monitoring*, Van Nostrand Reinhold 1987, ch. 16; from memory):
/// (S, Var S). S = sum over i < j of sign(y_j - y_i);
/// Var S = [n(n-1)(2n+5) - sum_p t_p(t_p-1)(2t_p+5)] / 18 over the groups
/// of t_p equal values.
pub fn mann_kendall(y: &[f64]) -> (f64, f64) {
    let n = y.len();
    let mut s = 0_i64;
    for i in 0..n {
        for j in i + 1..n {
            s += match y[j].partial_cmp(&y[i]) {
                Some(std::cmp::Ordering::Greater) => 1,
                Some(std::cmp::Ordering::Less) => -1,
                _ => 0,
            };
        }
    }
    let mut sorted = y.to_vec();
    sorted.sort_by(f64::total_cmp);
    let mut ties = 0.0;
    let mut i = 0;
    while i < n {
        let mut j = i + 1;
        while j < n && sorted[j] == sorted[i] {
            j += 1;
        }
        let t = (j - i) as f64;
        ties += t * (t - 1.0) * (2.0 * t + 5.0);
        i = j;
    }
    let nf = n as f64;
    (s as f64, (nf * (nf - 1.0) * (2.0 * nf + 5.0) - ties) / 18.0)
}

/// The standardised statistic with the continuity correction (Gilbert
/// 1987, eq. 16.4; from memory): (S - 1)/sd for S > 0, (S + 1)/sd for
/// S < 0, 0 for S = 0.
pub fn mann_kendall_z(s: f64, variance: f64) -> f64 {
    if variance <= 0.0 {
        0.0
    } else if s > 0.0 {
        (s - 1.0) / variance.sqrt()
    } else if s < 0.0 {
        (s + 1.0) / variance.sqrt()
    } else {
        0.0
    }
}

fn median(v: &mut [f64]) -> f64 {
    v.sort_by(f64::total_cmp);
    let n = v.len();
    if n == 0 {
        f64::NAN
    } else if n % 2 == 1 {
        v[n / 2]
    } else {
        0.5 * (v[n / 2 - 1] + v[n / 2])
    }
}

/// Pairwise slopes (y_j - y_i)/(x_j - x_i) over x_j > x_i, sorted.
fn pairwise_slopes(x: &[f64], y: &[f64]) -> Vec<f64> {
    let mut slopes = Vec::with_capacity(x.len() * x.len().saturating_sub(1) / 2);
    for i in 0..x.len() {
        for j in 0..x.len() {
            if x[j] > x[i] {
                slopes.push((y[j] - y[i]) / (x[j] - x[i]));
            }
        }
    }
    slopes.sort_by(f64::total_cmp);
    slopes
}

/// The Theil-Sen line with Sen's interval for the slope (Theil, "A
/// rank-invariant method of linear and polynomial regression analysis",
/// Proc. KNAW 53, 1950; Sen, "Estimates of the regression coefficient based
/// on Kendall's tau", JASA 63, 1968; the interval's ranks as in Gilbert
/// 1987, sec. 16.5; from memory): the slope is the median of the N pairwise
/// slopes; with C = z sqrt(Var S), the interval runs from the
/// round((N - C)/2)-th to the (round((N + C)/2) + 1)-th smallest slope
/// (1-based, clamped to the list). The intercept is the median of
/// y - slope x (Conover, *Practical Nonparametric Statistics*, Wiley 1980;
/// from memory). (slope, low, high, intercept); `None` with no pair.
pub fn theil_sen(x: &[f64], y: &[f64], variance_s: f64, z: f64) -> Option<(f64, f64, f64, f64)> {
    let mut slopes = pairwise_slopes(x, y);
    if slopes.is_empty() {
        return None;
    }
    let n = slopes.len();
    let c = z * variance_s.max(0.0).sqrt();
    let nf = n as f64;
    let lower = (((nf - c) / 2.0).round() as i64 - 1).clamp(0, n as i64 - 1) as usize;
    let upper = (((nf + c) / 2.0).round() as i64).clamp(0, n as i64 - 1) as usize;
    let (lo, hi) = (slopes[lower], slopes[upper]);
    let slope = median(&mut slopes);
    let mut rest: Vec<f64> = x.iter().zip(y).map(|(x, y)| y - slope * x).collect();
    Some((slope, lo, hi, median(&mut rest)))
}

/// Ranks 1..n, ties given their average rank.
fn ranks(y: &[f64]) -> Vec<f64> {
    let mut order: Vec<usize> = (0..y.len()).collect();
    order.sort_by(|&a, &b| y[a].total_cmp(&y[b]));
    let mut r = vec![0.0; y.len()];
    let mut i = 0;
    while i < order.len() {
        let mut j = i + 1;
        while j < order.len() && y[order[j]] == y[order[i]] {
            j += 1;
        }
        // Positions i..j (0-based) share the ranks i+1..j: their mean.
        let mean = (i + 1 + j) as f64 / 2.0;
        for &k in &order[i..j] {
            r[k] = mean;
        }
        i = j;
    }
    r
}

/// The factor n/n* by which serial correlation inflates Var S (Hamed and
/// Rao, "A modified Mann-Kendall trend test for autocorrelated data",
/// J. Hydrology 204, 1998; from memory): the series is detrended with its
/// Theil-Sen slope per index, ranked, and the ranks' autocorrelations rho_i
/// that lie outside +-z/sqrt(n) enter
/// n/n* = 1 + 2/(n(n-1)(n-2)) sum_i (n-i)(n-i-1)(n-i-2) rho_i.
/// Floored at 1 here: a negative correlation is not let make the test
/// bolder than for independent values.
pub fn hamed_rao_factor(y: &[f64], z: f64) -> f64 {
    hamed_rao_raw(y, z).max(1.0)
}

/// [`hamed_rao_factor`] without the floor (the published expression).
fn hamed_rao_raw(y: &[f64], z: f64) -> f64 {
    let n = y.len();
    if n < 3 {
        return 1.0;
    }
    let idx: Vec<f64> = (1..=n).map(|i| i as f64).collect();
    let mut slopes = pairwise_slopes(&idx, y);
    let b = median(&mut slopes);
    let detrended: Vec<f64> = y.iter().zip(&idx).map(|(y, i)| y - b * i).collect();
    let r = ranks(&detrended);
    let mean = r.iter().sum::<f64>() / n as f64;
    let d: Vec<f64> = r.iter().map(|v| v - mean).collect();
    let c0: f64 = d.iter().map(|v| v * v).sum();
    if c0 <= 0.0 {
        return 1.0;
    }
    let nf = n as f64;
    let bound = z / nf.sqrt();
    let mut sum = 0.0;
    for lag in 1..n {
        let rho = d[..n - lag]
            .iter()
            .zip(&d[lag..])
            .map(|(a, b)| a * b)
            .sum::<f64>()
            / c0;
        if rho.abs() > bound {
            let m = (n - lag) as f64;
            sum += m * (m - 1.0) * (m - 2.0) * rho;
        }
    }
    1.0 + 2.0 / (nf * (nf - 1.0) * (nf - 2.0)) * sum
}

/// What the trend test and the robust slope found on one series.
#[derive(Debug, Clone, Copy, PartialEq, Serialize)]
pub struct Trend {
    /// Blocks tested (their maxima are the test's values).
    pub blocks: usize,
    /// Steps per block.
    pub block_steps: f64,
    /// Mann-Kendall S.
    pub s: f64,
    /// Var S with the tie correction, times the serial-correlation factor.
    pub variance: f64,
    /// Hamed and Rao's factor n/n* (1: no significant autocorrelation).
    pub correlation_factor: f64,
    /// The standardised statistic.
    pub z: f64,
    /// Its two-sided p-value.
    pub p_value: f64,
    /// `true` when p < [`ALPHA`] and S > 0: a rising trend.
    pub rising: bool,
    /// `true` when p < [`ALPHA`] and S < 0: a falling trend.
    pub falling: bool,
    /// Theil-Sen slope, error per step.
    pub slope: f64,
    /// Lower end of its 95% interval.
    pub slope_low: f64,
    /// Upper end of its 95% interval.
    pub slope_high: f64,
    /// The robust line's value at the last block's end.
    pub line_at_end: f64,
    /// The largest block maximum tested.
    pub largest: f64,
    /// Step at the end of the last block.
    pub end_step: f64,
}

impl Trend {
    /// In reports: "rising (p 0.003)", "none (p 0.41)", "falling (p 0.01)".
    pub fn label(&self) -> String {
        let word = if self.rising {
            "rising"
        } else if self.falling {
            "falling"
        } else {
            "none"
        };
        format!("{word} (p {})", p_words(self.p_value))
    }
}

fn p_words(p: f64) -> String {
    if p < 1e-4 {
        "<1e-4".into()
    } else if p < 0.01 {
        format!("{p:.4}")
    } else {
        format!("{p:.2}")
    }
}

/// Cuts (step, value) points into blocks and keeps each block's largest
/// value, at its last step. Non-finite points are skipped; the first
/// `skip_share` of the finite points (the start-up transient) is left out.
pub fn block_maxima(steps: &[f64], values: &[f64], skip_share: f64) -> (Vec<f64>, Vec<f64>) {
    let (k, y): (Vec<f64>, Vec<f64>) = steps
        .iter()
        .zip(values)
        .filter(|(k, e)| k.is_finite() && e.is_finite())
        .map(|(k, e)| (*k, *e))
        .unzip();
    let skip = (k.len() as f64 * skip_share) as usize;
    let (k, y) = (&k[skip..], &y[skip..]);
    let blocks = BLOCKS.min(k.len());
    let mut bk = Vec::with_capacity(blocks);
    let mut by = Vec::with_capacity(blocks);
    for b in 0..blocks {
        let (lo, hi) = (b * k.len() / blocks, (b + 1) * k.len() / blocks);
        if hi > lo {
            bk.push(k[hi - 1]);
            by.push(y[lo..hi].iter().copied().fold(f64::NEG_INFINITY, f64::max));
        }
    }
    (bk, by)
}

/// The trend of a decimated series: block maxima after the start-up
/// share, the Mann-Kendall test with the tie-corrected variance inflated by
/// Hamed and Rao's factor, and the Theil-Sen slope whose interval uses the
/// same variance (so the interval excludes 0 about when the test rejects).
/// `None` with fewer than [`MIN_BLOCKS`] blocks.
pub fn trend(steps: &[f64], values: &[f64], skip_share: f64) -> Option<Trend> {
    let (k, y) = block_maxima(steps, values, skip_share);
    if y.len() < MIN_BLOCKS {
        return None;
    }
    let z_crit = normal_quantile(1.0 - ALPHA / 2.0);
    let (s, var0) = mann_kendall(&y);
    let factor = hamed_rao_factor(&y, z_crit);
    let variance = var0 * factor;
    let z = mann_kendall_z(s, variance);
    let p_value = 2.0 * (1.0 - normal_cdf(z.abs()));
    let (slope, slope_low, slope_high, intercept) = theil_sen(&k, &y, variance, z_crit)?;
    let end_step = *k.last()?;
    let block_steps = if k.len() > 1 {
        (end_step - k[0]) / (k.len() - 1) as f64
    } else {
        end_step
    };
    Some(Trend {
        blocks: y.len(),
        block_steps,
        s,
        variance,
        correlation_factor: factor,
        z,
        p_value,
        rising: p_value < ALPHA && s > 0.0,
        falling: p_value < ALPHA && s < 0.0,
        slope,
        slope_low,
        slope_high,
        line_at_end: intercept + slope * end_step,
        largest: y.iter().copied().fold(f64::NEG_INFINITY, f64::max),
        end_step,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_quantiles_match_the_published_tables() {
        // Abramowitz & Stegun, Table 26.1 / any standard normal table
        // (from memory): Phi(1) = 0.8413447461, Phi(1.96) = 0.9750021049,
        // Phi(0) = 0.5; quantiles z(0.975) = 1.959963985,
        // z(0.95) = 1.644853627, z(0.995) = 2.575829304. The same values
        // come out of scipy 1.17's norm.cdf / norm.ppf.
        assert!((normal_cdf(1.0) - 0.841_344_746_1).abs() < 1e-10);
        assert!((normal_cdf(1.96) - 0.975_002_104_9).abs() < 1e-10);
        assert!((normal_cdf(-1.96) - 0.024_997_895_1).abs() < 1e-10);
        assert_eq!(normal_cdf(0.0), 0.5);
        // Phi(-5) = 2.866515719e-7 (the same tables).
        assert!((normal_cdf(-5.0) / 2.866_515_719e-7 - 1.0).abs() < 1e-6);
        for (p, z) in [
            (0.975, 1.959_963_985),
            (0.95, 1.644_853_627),
            (0.995, 2.575_829_304),
            (0.5, 0.0),
            (0.025, -1.959_963_985),
        ] {
            assert!((normal_quantile(p) - z).abs() < 1e-8, "{p}");
        }
        assert!(normal_quantile(0.0).is_nan() && normal_quantile(1.0).is_nan());
    }

    #[test]
    fn mann_kendall_s_and_its_variance_by_hand() {
        // Computed by hand here: 1, 3, 2, 5, 4 has 8 rising and 2 falling
        // pairs, S = 6; no ties, Var S = 5 x 4 x 15 / 18 = 16.667;
        // Z = (6 - 1)/sqrt(16.667) = 1.2247.
        let (s, v) = mann_kendall(&[1.0, 3.0, 2.0, 5.0, 4.0]);
        assert_eq!(s, 6.0);
        assert!((v - 300.0 / 18.0).abs() < 1e-12);
        assert!((mann_kendall_z(s, v) - 5.0 / (300.0_f64 / 18.0).sqrt()).abs() < 1e-12);
        // With ties, by hand: 2, 2, 3, 1, 3, 4: S = 2 + 2 + 0 + 2 + 1 = 7;
        // two pairs of ties, sum t(t-1)(2t+5) = 18 + 18, so
        // Var S = (6 x 5 x 17 - 36)/18 = 474/18 = 26.333.
        let (s, v) = mann_kendall(&[2.0, 2.0, 3.0, 1.0, 3.0, 4.0]);
        assert_eq!(s, 7.0);
        assert!((v - 474.0 / 18.0).abs() < 1e-12);
        // A falling series: S = -n(n-1)/2, Z negative and corrected by +1.
        let (s, v) = mann_kendall(&[5.0, 4.0, 3.0, 2.0, 1.0]);
        assert_eq!(s, -10.0);
        assert!((mann_kendall_z(s, v) + 9.0 / v.sqrt()).abs() < 1e-12);
    }

    #[test]
    fn mann_kendall_and_hamed_rao_agree_with_pymannkendall() {
        // Reference values from pymannkendall 1.4.3 (Hussain & Mahmud, JOSS
        // 4(39), 2019), original_test and hamed_rao_modification_test at
        // alpha 0.05, on an invented random walk (numpy seed 1, rounded to
        // 0.1; 18 distinct values among 24): S = 36, Var S = 1619.3333,
        // Hamed-Rao Var S = 2813.1763281, Z = 0.65988699, p = 0.50932635.
        let y = [
            0.3, 1.2, 1.5, 0.2, 1.1, 1.5, 1.0, 1.6, 2.0, 2.2, 2.3, 2.8, 2.1, 1.9, 1.4, 2.0, 2.1,
            1.8, 1.0, 0.7, 0.8, 0.5, 1.8, 2.8,
        ];
        let (s, v) = mann_kendall(&y);
        assert_eq!(s, 36.0);
        assert!((v - 1_619.333_333_333).abs() < 1e-6, "{v}");
        let z_crit = normal_quantile(0.975);
        let f = hamed_rao_factor(&y, z_crit);
        assert!((v * f - 2_813.176_328_1).abs() < 1e-5, "{}", v * f);
        let z = mann_kendall_z(s, v * f);
        assert!((z - 0.659_886_99).abs() < 1e-7, "{z}");
        assert!((2.0 * (1.0 - normal_cdf(z)) - 0.509_326_35).abs() < 1e-7);
        // A series whose ranks are negatively correlated at long lags: the
        // published expression shrinks Var S (pymannkendall: 949 to
        // 395.55822806); the floor keeps the plain variance.
        let a = [
            1.0, 1.2, 1.5, 1.9, 2.2, 2.3, 2.1, 1.8, 1.6, 1.7, 2.0, 2.5, 2.9, 3.1, 3.0, 2.7, 2.4,
            2.6, 3.0, 3.4,
        ];
        let (s, v) = mann_kendall(&a);
        assert_eq!((s, v), (123.0, 949.0));
        assert!((v * hamed_rao_raw(&a, z_crit) - 395.558_228_06).abs() < 1e-6);
        assert_eq!(hamed_rao_factor(&a, z_crit), 1.0);
    }

    #[test]
    fn theil_sen_slope_and_interval_by_hand_and_against_scipy() {
        // By hand here: x = 1..5, y = 1, 3, 2, 5, 4. The ten pairwise
        // slopes sorted: -1, -1, 1/3, 1/2, 3/4, 1, 1, 4/3, 2, 3; median
        // (5th and 6th) = (3/4 + 1)/2 = 0.875. Intercept: median of
        // y - 0.875 x = 0.125, 1.25, -0.625, 1.5, -0.375 -> 0.125.
        let x = [1.0, 2.0, 3.0, 4.0, 5.0];
        let y = [1.0, 3.0, 2.0, 5.0, 4.0];
        let (_, v) = mann_kendall(&y);
        let z = normal_quantile(0.975);
        let (b, lo, hi, a) = theil_sen(&x, &y, v, z).expect("pairs");
        assert!((b - 0.875).abs() < 1e-12);
        assert!((a - 0.125).abs() < 1e-12);
        // C = 1.96 sqrt(16.667) = 8.0; ranks round((10 - 8)/2) = 1 and
        // round((10 + 8)/2) + 1 = 10: the whole list, -1 to 3 (by hand;
        // scipy 1.17's theilslopes(y, x, 0.95, method="joint") gives the
        // same slope, interval and intercept).
        assert_eq!((lo, hi), (-1.0, 3.0));
        // A longer series against scipy 1.17 theilslopes (0.95, "joint"):
        // the series above with a tie, on x = 0..19: slope 0.1, interval
        // 0.0666667 to 0.1333333, intercept 1.25.
        let y = [
            1.0, 1.2, 1.5, 1.9, 2.2, 2.3, 2.1, 1.8, 1.6, 1.7, 2.0, 2.5, 2.9, 3.1, 3.0, 2.7, 2.4,
            2.6, 3.0, 3.4,
        ];
        let x: Vec<f64> = (0..20).map(f64::from).collect();
        let (_, v) = mann_kendall(&y);
        let (b, lo, hi, a) = theil_sen(&x, &y, v, z).expect("pairs");
        assert!((b - 0.1).abs() < 1e-12, "{b}");
        assert!((lo - 0.066_666_667).abs() < 1e-8, "{lo}");
        assert!((hi - 0.133_333_333).abs() < 1e-8, "{hi}");
        assert!((a - 1.25).abs() < 1e-12, "{a}");
    }

    #[test]
    fn a_level_series_shows_no_trend_and_a_rising_one_does() {
        // Invented series (tests of our own code): bucket maxima wobbling
        // about a level, then the same with a clear linear rise.
        let k: Vec<f64> = (1..=400).map(|i| f64::from(i) * 100.0).collect();
        let mut u: u64 = 7;
        let mut wobble = || {
            u = u.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
            (u >> 11) as f64 / (1u64 << 53) as f64 - 0.5
        };
        let level: Vec<f64> = k.iter().map(|_| 1e-4 * (1.0 + 0.2 * wobble())).collect();
        let t = trend(&k, &level, 0.1).expect("enough blocks");
        assert_eq!(t.blocks, BLOCKS);
        assert!(!t.rising && !t.falling, "{t:?}");
        assert!(t.slope_low <= 0.0 && t.slope_high >= 0.0, "{t:?}");
        let rising: Vec<f64> = k
            .iter()
            .map(|&k| 1e-4 * (1.0 + 0.2 * wobble()) + 1e-8 * k)
            .collect();
        let t = trend(&k, &rising, 0.1).expect("enough blocks");
        assert!(t.rising, "{t:?}");
        assert!(
            t.slope_low > 0.0 && t.slope_low < 1e-8 && t.slope_high > 1e-8,
            "{t:?}"
        );
        // Too few points: no trend.
        assert!(trend(&k[..5], &rising[..5], 0.1).is_none());
    }

    #[test]
    fn ties_get_their_average_rank() {
        // By hand: 3, 1, 3, 2 -> ranks 3.5, 1, 3.5, 2.
        assert_eq!(ranks(&[3.0, 1.0, 3.0, 2.0]), vec![3.5, 1.0, 3.5, 2.0]);
    }
}
