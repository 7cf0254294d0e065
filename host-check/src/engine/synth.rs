//! The synthetic world the filter sees: a seeded truth trajectory, noisy
//! odometry and noisy measurements (f64, the same for every variant).

use nalgebra::{DMatrix, DVector};

/// SplitMix64 followed by the polar Box-Muller transform: small, seeded,
/// repeatable on every platform (common practice for simulation noise).
#[derive(Debug, Clone)]
pub struct Noise {
    state: u64,
    spare: Option<f64>,
}

impl Noise {
    /// A generator from a seed.
    pub fn new(seed: u64) -> Self {
        Self {
            state: seed,
            spare: None,
        }
    }

    fn next_u64(&mut self) -> u64 {
        self.state = self.state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }

    fn uniform(&mut self) -> f64 {
        // 53 random bits in [0, 1), mapped to (-1, 1).
        let u = (self.next_u64() >> 11) as f64 / (1u64 << 53) as f64;
        2.0 * u - 1.0
    }

    /// A standard normal sample.
    pub fn normal(&mut self) -> f64 {
        if let Some(s) = self.spare.take() {
            return s;
        }
        loop {
            let a = self.uniform();
            let b = self.uniform();
            let s = a * a + b * b;
            if s > 0.0 && s < 1.0 {
                let m = (-2.0 * s.ln() / s).sqrt();
                self.spare = Some(b * m);
                return a * m;
            }
        }
    }

    /// A sample of N(0, L L') given the factor L.
    pub fn correlated(&mut self, l: &DMatrix<f64>) -> DVector<f64> {
        let w = DVector::from_fn(l.ncols(), |_, _| self.normal());
        l * w
    }
}

/// A square-root factor L with L L' = C for a symmetric positive
/// semidefinite C (via the eigen-decomposition, so singular C is fine).
pub fn sqrt_factor(c: &DMatrix<f64>) -> DMatrix<f64> {
    let Some(e) = c
        .iter()
        .all(|v| v.is_finite())
        .then(|| nalgebra::linalg::SymmetricEigen::try_new(c.clone(), f64::EPSILON, 10_000))
        .flatten()
    else {
        // Extreme values: fall back to the diagonal's square roots.
        return DMatrix::from_fn(c.nrows(), c.ncols(), |i, j| {
            if i == j {
                c[(i, i)].max(0.0).sqrt()
            } else {
                0.0
            }
        });
    };
    let mut l = e.eigenvectors.clone();
    for (j, &v) in e.eigenvalues.iter().enumerate() {
        let s = v.max(0.0).sqrt();
        for i in 0..l.nrows() {
            l[(i, j)] *= s;
        }
    }
    l
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn normal_samples_have_unit_variance() {
        // Sample mean and variance of N(0, 1): common practice, with 4-sigma
        // bands for 200 000 samples (sd of the mean 2.2e-3, of the variance 3.2e-3).
        let mut g = Noise::new(7);
        let n = 200_000;
        let mut s = 0.0;
        let mut s2 = 0.0;
        for _ in 0..n {
            let x = g.normal();
            s += x;
            s2 += x * x;
        }
        let mean = s / n as f64;
        let var = s2 / n as f64 - mean * mean;
        assert!(mean.abs() < 0.009, "mean {mean}");
        assert!((var - 1.0).abs() < 0.013, "variance {var}");
    }

    #[test]
    fn square_root_factor_reproduces_the_matrix() {
        let c = DMatrix::from_row_slice(2, 2, &[4.0, 2.0, 2.0, 2.0]);
        let l = sqrt_factor(&c);
        assert!((&l * l.transpose() - &c).norm() < 1e-12);
    }
}
