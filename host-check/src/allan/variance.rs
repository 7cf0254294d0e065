//! Overlapping Allan variance of one axis, computed while the log streams
//! by, at log-spaced cluster sizes, in memory that does not grow with it.
//!
//! # Method
//! The overlapping estimator (IEEE Std 952-1997, Annex C; El-Sheimy, Hou &
//! Niu 2008, eq. 5) from the integrated series `theta_k = sum_{j<k} y_j`:
//! `AVAR(m) = sum_k (theta_{k+2m} - 2 theta_{k+m} + theta_k)^2 /
//! (2 m^2 (N - 2m + 1))` (in the samples' units squared; `tau = m Ts`).
//!
//! The lags are served by a *decimated cascade*: level `L` keeps the last
//! `2 LEVEL_SPAN` = 128 values of `theta` at every `2^L`-th sample, and serves the
//! cluster sizes `m = m' 2^L` with `m'` in `[LEVEL_SPAN / 2, LEVEL_SPAN)`
//! (level 0: `m < LEVEL_SPAN`, every sample). Each level therefore sums the
//! overlapping terms at a stride of `2^L <= m / 32` samples instead of 1:
//! every term is still an unbiased estimate of the Allan variance (the
//! estimator's mean is unchanged); only its variance differs, and for
//! strides below m/32 it is within a few per cent of the fully overlapping
//! one. Memory: `levels x RING` values (about 30 x 128 for 10^9 samples).
//!
//! The sums keep `theta` as an unevaluated pair (sum and rounding error,
//! Knuth's two-sum) around the first sample (subtracted from every sample),
//! so a constant bias does not cancel digits in the second differences.

/// Cluster sizes below this use level 0 (stride 1, fully overlapping).
pub const LEVEL_SPAN: u64 = 64;
/// Values of `theta` kept per level: enough for `2 m' + 1`.
const RING: usize = 2 * LEVEL_SPAN as usize;

/// One served cluster size.
#[derive(Debug, Clone)]
struct Lag {
    /// Cluster size in level samples.
    m_level: usize,
    /// Sum of squared second differences.
    sum: f64,
    /// Number of terms.
    terms: u64,
}

#[derive(Debug, Clone)]
struct Level {
    hi: [f64; RING],
    lo: [f64; RING],
    /// Values pushed so far (the next index).
    pushed: usize,
    lags: Vec<Lag>,
}

/// The streaming estimator of one axis.
#[derive(Debug, Clone)]
pub struct AllanAccumulator {
    wanted: Vec<u64>,
    levels: Vec<Level>,
    count: u64,
    offset: f64,
    hi: f64,
    lo: f64,
}

/// The Allan variance at one cluster size, before the time scale is known.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RawPoint {
    /// Cluster size, samples.
    pub m: u64,
    /// Overlapping Allan variance, samples' units squared.
    pub avar: f64,
    /// Terms summed.
    pub terms: u64,
    /// Stride of the terms, samples (1: fully overlapping).
    pub stride: u64,
}

/// Log-spaced cluster sizes, `points_per_decade` per decade from 1, as the
/// cascade can serve them (rounded to a multiple of the level's stride),
/// without repeats, up to `max`.
#[must_use]
pub fn cluster_sizes(points_per_decade: u32, max: u64) -> Vec<u64> {
    let mut out: Vec<u64> = Vec::new();
    let p = f64::from(points_per_decade.max(1));
    for i in 0.. {
        let want = 10f64.powf(f64::from(i) / p).round();
        if want > max as f64 || want > 1e18 {
            break;
        }
        let m = servable(want as u64);
        if m <= max && out.last().is_none_or(|&l| m > l) {
            out.push(m);
        }
    }
    out
}

/// The level serving cluster size `m`.
fn level_of(m: u64) -> u32 {
    if m < LEVEL_SPAN {
        0
    } else {
        (m / LEVEL_SPAN).ilog2() + 1
    }
}

/// `m` rounded to a multiple of its level's stride.
fn servable(m: u64) -> u64 {
    let s = 1u64 << level_of(m);
    let r = ((m + s / 2) / s).max(1) * s;
    // Rounding may move m to the next level; its stride divides it anyway.
    r
}

impl AllanAccumulator {
    /// An estimator for the cluster sizes `wanted` (see [`cluster_sizes`];
    /// each must be servable, i.e. a multiple of its level's stride).
    #[must_use]
    pub fn new(wanted: &[u64]) -> Self {
        Self {
            wanted: wanted.to_vec(),
            levels: Vec::new(),
            count: 0,
            offset: 0.0,
            hi: 0.0,
            lo: 0.0,
        }
    }

    /// Adds one sample.
    #[inline]
    pub fn push(&mut self, y: f64) {
        if self.count == 0 {
            self.offset = y;
            self.new_level();
        }
        let d = y - self.offset;
        // Two-sum: hi + lo carries theta exactly to about 2^-106.
        let s = self.hi + d;
        let bb = s - self.hi;
        let err = (self.hi - (s - bb)) + (d - bb);
        self.hi = s;
        self.lo += err;
        self.count += 1;
        let tz = self.count.trailing_zeros() as usize;
        if tz >= self.levels.len() && self.count == 1u64 << self.levels.len() {
            self.new_level();
        }
        let (hi, lo) = (self.hi, self.lo);
        for level in self.levels.iter_mut().take(tz + 1) {
            level.push(hi, lo);
        }
    }

    fn new_level(&mut self) {
        let l = self.levels.len() as u32;
        let lags = self
            .wanted
            .iter()
            .filter(|&&m| level_of(m) == l)
            .map(|&m| Lag {
                m_level: (m >> l) as usize,
                sum: 0.0,
                terms: 0,
            })
            .collect();
        let mut level = Level {
            hi: [0.0; RING],
            lo: [0.0; RING],
            pushed: 0,
            lags,
        };
        // theta_0 = 0 belongs to every level.
        level.push(0.0, 0.0);
        self.levels.push(level);
    }

    /// Samples added.
    #[must_use]
    pub fn count(&self) -> u64 {
        self.count
    }

    /// The Allan variance at every wanted cluster size with at least one
    /// term, in the order wanted.
    #[must_use]
    pub fn points(&self) -> Vec<RawPoint> {
        let mut out = Vec::new();
        for &m in &self.wanted {
            let l = level_of(m);
            let Some(level) = self.levels.get(l as usize) else {
                continue;
            };
            let Some(lag) = level.lags.iter().find(|g| (g.m_level as u64) << l == m) else {
                continue;
            };
            if lag.terms == 0 {
                continue;
            }
            let mf = m as f64;
            out.push(RawPoint {
                m,
                avar: lag.sum / (2.0 * mf * mf * lag.terms as f64),
                terms: lag.terms,
                stride: 1 << l,
            });
        }
        out
    }
}

impl Level {
    #[inline]
    fn push(&mut self, hi: f64, lo: f64) {
        let j = self.pushed;
        let mask = RING - 1;
        self.hi[j & mask] = hi;
        self.lo[j & mask] = lo;
        self.pushed += 1;
        for lag in &mut self.lags {
            let m = lag.m_level;
            if j >= 2 * m {
                let (a, b) = ((j - m) & mask, (j - 2 * m) & mask);
                let d = (hi - 2.0 * self.hi[a] + self.hi[b]) + (lo - 2.0 * self.lo[a] + self.lo[b]);
                lag.sum += d * d;
                lag.terms += 1;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The fully overlapping estimator, straight from its definition
    /// (IEEE Std 952-1997 Annex C), all samples in memory.
    fn direct(y: &[f64], m: usize) -> f64 {
        let mut theta = vec![0.0];
        for v in y {
            theta.push(theta.last().unwrap() + v);
        }
        let n = y.len();
        let mut s = 0.0;
        for k in 0..=(n - 2 * m) {
            let d = theta[k + 2 * m] - 2.0 * theta[k + m] + theta[k];
            s += d * d;
        }
        s / (2.0 * (m * m) as f64 * (n - 2 * m + 1) as f64)
    }

    fn noise(n: usize, seed: u64) -> Vec<f64> {
        let mut x = seed;
        (0..n)
            .map(|_| {
                x = x
                    .wrapping_mul(6_364_136_223_846_793_005)
                    .wrapping_add(1_442_695_040_888_963_407);
                ((x >> 11) as f64 / (1u64 << 53) as f64) - 0.5
            })
            .collect()
    }

    #[test]
    fn level_zero_equals_the_definition() {
        // Stride 1 below LEVEL_SPAN: the same sum as the definition, to
        // rounding; a large constant bias does not matter (offset removed).
        let y: Vec<f64> = noise(5000, 3).iter().map(|v| v + 1e6).collect();
        let sizes = cluster_sizes(10, 63);
        let mut acc = AllanAccumulator::new(&sizes);
        for &v in &y {
            acc.push(v);
        }
        // The reference sums the samples with the bias taken off exactly
        // (1e6 + u - 1e6 is exact for |u| < 0.5), so its own digits survive.
        let centred: Vec<f64> = y.iter().map(|v| v - 1e6).collect();
        for p in acc.points() {
            let want = direct(&centred, p.m as usize);
            assert_eq!(p.stride, 1);
            assert!(
                ((p.avar - want) / want).abs() < 1e-8,
                "m {}: {} vs {want}",
                p.m,
                p.avar
            );
            assert_eq!(p.terms, 5000 - 2 * p.m + 1);
        }
    }

    #[test]
    fn decimated_levels_are_close_to_the_definition() {
        // Strides of at most m/32: the estimate differs from the fully
        // overlapping one by far less than its own statistical error
        // (1/sqrt(2 (N/m - 1)) relative in deviation, El-Sheimy 2008).
        let n = 40_000;
        let y = noise(n, 9);
        let sizes = cluster_sizes(10, 10_000);
        let mut acc = AllanAccumulator::new(&sizes);
        for &v in &y {
            acc.push(v);
        }
        let pts = acc.points();
        assert!(pts.iter().any(|p| p.stride > 1));
        for p in pts.iter().filter(|p| p.m <= n as u64 / 4) {
            let want = direct(&y, p.m as usize);
            let delta = 1.0 / (2.0 * (n as f64 / p.m as f64 - 1.0)).sqrt();
            let rel = ((p.avar / want).sqrt() - 1.0).abs();
            assert!(
                rel < 0.2 * delta,
                "m {} stride {}: {rel} vs {delta}",
                p.m,
                p.stride
            );
        }
    }

    #[test]
    fn sizes_are_servable_and_increasing() {
        let s = cluster_sizes(10, 1_000_000);
        assert_eq!(&s[..4], &[1, 2, 3, 4]);
        assert!(s.windows(2).all(|w| w[1] > w[0]));
        for &m in &s {
            assert_eq!(m % (1 << level_of(m)), 0, "{m}");
            let ml = m >> level_of(m);
            assert!(ml < LEVEL_SPAN, "{m}");
        }
    }
}
