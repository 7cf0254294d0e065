//! LDL' factorisation of small symmetric positive definite matrices and the
//! solves built on it: no square roots, no explicit inverse.

use nalgebra::{SMatrix, SVector};

use crate::scalar::Scalar;

/// An LDL' factorisation of a symmetric positive definite M x M matrix:
/// unit lower-triangular L (strict lower part stored) and diagonal D, with
/// the reciprocals of D so every later solve multiplies instead of
/// dividing (M divisions in all: a divide costs 14 cycles on a Cortex-M4F
/// against 1 for a multiply, TI SWCU192 Table 3-27).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Ldl<T: Scalar, const M: usize> {
    l: SMatrix<T, M, M>,
    d: SVector<T, M>,
    inv_d: SVector<T, M>,
}

impl<T: Scalar, const M: usize> Ldl<T, M> {
    /// Factors the symmetric matrix `s`, reading its lower triangle only.
    ///
    /// A pivot counts as safely positive when it is finite and exceeds
    /// `M * eps` times the diagonal entry it came from (common practice for
    /// a rank decision: a pivot at the rounding level of its column carries
    /// no information).
    ///
    /// # Errors
    /// `Err(j)` with the index of the first pivot that is not safely positive.
    /// A pivot too small for a finite reciprocal (a subnormal variance)
    /// would turn the rows below it into NaN; when a later row fails, the
    /// factorisation is redone on that cold path to report the tiny pivot's
    /// own row instead.
    ///
    /// # Panics
    /// Never.
    #[inline(always)]
    pub fn factor(s: &SMatrix<T, M, M>) -> Result<Self, usize> {
        match Self::factor_checked::<false>(s) {
            Ok(f) => Ok(f),
            Err(_) => Err(Self::failing_row(*s)),
        }
    }

    /// [`Ldl::factor`]'s test alone, when the factors are not needed (a
    /// measurement noise R that only has to be positive definite): for
    /// M <= 2 by the leading principal minors, without a divide. The second
    /// pivot d1 = s11 - s10^2 / s00 exceeds M eps |s11| exactly when the
    /// minor s00 s11 - s10^2 exceeds M eps |s11| s00 (multiplied through by
    /// the positive s00), so the rule is the same up to rounding; a 14-cycle
    /// divide on a Cortex-M4F is saved. A refusal by the minor is confirmed
    /// by the factorisation (the products can underflow or overflow where
    /// the pivots do not). Larger M factor as usual.
    ///
    /// # Errors
    /// `Err(j)` with the index of the first pivot that is not safely positive.
    ///
    /// # Panics
    /// Never.
    #[inline(always)]
    pub fn definite(s: &SMatrix<T, M, M>) -> Result<(), usize> {
        if M > 2 {
            return Self::factor(s).map(|_| ());
        }
        if M == 0 {
            return Ok(());
        }
        let tol = T::EPSILON * T::of(M as f64);
        let s00 = s[(0, 0)];
        if !pivot_accepted(s00, tol * s00.abs()) {
            return Err(0);
        }
        if M == 2 {
            let (s10, s11) = (s[(M - 1, 0)], s[(M - 1, M - 1)]);
            let minor = s00 * s11 - s10 * s10;
            // A subnormal s00 has no finite reciprocal: the factorisation
            // refuses it at its own row, and so does this test.
            if !(pivot_accepted(minor, tol * s11.abs() * s00) && recip_finite(s00)) {
                // The products can underflow (variances near 1e-20 in f32)
                // or overflow where the pivots do not: the factorisation
                // has the last word on a refusal.
                return confirm_refusal(s00, s10, s11);
            }
        }
        Ok(())
    }

    /// [`Ldl::definite`] for a diagonal `s` (its off-diagonal entries are
    /// not read): each variance is its own pivot, accepted by the
    /// factorisation's rule (above `M eps` times itself and finite, and,
    /// but for the last, with a finite reciprocal, without which the
    /// factorisation fails at that row).
    ///
    /// # Errors
    /// `Err(j)` with the index of the first pivot that is not safely positive.
    ///
    /// # Panics
    /// Never.
    #[inline(always)]
    pub fn definite_diagonal(s: &SMatrix<T, M, M>) -> Result<(), usize> {
        let tol = T::EPSILON * T::of(M as f64);
        for j in 0..M {
            let d = s[(j, j)];
            // A branch per test: on a Cortex-M4F, combining the comparisons
            // costs flag arithmetic (measured with `cairn cost`).
            if !pivot_accepted(d, tol * d.abs()) {
                return Err(j);
            }
            if j + 1 < M && !recip_finite(d) {
                return Err(j);
            }
        }
        Ok(())
    }

    /// The error path of [`Ldl::factor`]: the careful pass's failing row
    /// (by value, so the matrix is written to memory only when this runs).
    #[cold]
    #[inline(never)]
    fn failing_row(s: SMatrix<T, M, M>) -> usize {
        match Self::factor_checked::<true>(&s) {
            Err(j) => j,
            // Unreachable: the careful pass refuses whatever the fast one
            // does, and no later.
            Ok(_) => 0,
        }
    }

    /// The factorisation; with `RECIPROCALS`, a pivot whose reciprocal is
    /// not finite fails at its own row.
    #[inline(always)]
    fn factor_checked<const RECIPROCALS: bool>(s: &SMatrix<T, M, M>) -> Result<Self, usize> {
        let mut l = SMatrix::<T, M, M>::zeros();
        let mut d = SVector::<T, M>::zeros();
        let mut inv_d = SVector::<T, M>::zeros();
        let tol = T::EPSILON * T::of(M as f64);
        for j in 0..M {
            let mut dj = s[(j, j)];
            for k in 0..j {
                let ljk = l[(j, k)];
                dj -= ljk * ljk * d[k];
            }
            let scale = s[(j, j)].abs();
            if !pivot_accepted(dj, tol * scale) {
                return Err(j);
            }
            if RECIPROCALS && !recip_finite(dj) {
                return Err(j);
            }
            let inv = T::one() / dj;
            d[j] = dj;
            inv_d[j] = inv;
            for i in (j + 1)..M {
                let mut v = s[(i, j)];
                for k in 0..j {
                    v -= l[(i, k)] * l[(j, k)] * d[k];
                }
                l[(i, j)] = v * inv;
            }
        }
        Ok(Self { l, d, inv_d })
    }

    /// The diagonal factor D.
    pub fn diagonal(&self) -> &SVector<T, M> {
        &self.d
    }

    /// Solves S y = b in place.
    #[inline(always)]
    pub fn solve_mut(&self, b: &mut SVector<T, M>) {
        // L w = b
        for i in 0..M {
            let mut v = b[i];
            for k in 0..i {
                v -= self.l[(i, k)] * b[k];
            }
            b[i] = v;
        }
        // D v = w
        for i in 0..M {
            b[i] *= self.inv_d[i];
        }
        // L' y = v
        for i in (0..M).rev() {
            let mut v = b[i];
            for k in (i + 1)..M {
                v -= self.l[(k, i)] * b[k];
            }
            b[i] = v;
        }
    }

    /// The quadratic form b' S^-1 b, computed as sum (L^-1 b)_i^2 / d_i.
    #[inline(always)]
    pub fn inverse_quadratic(&self, b: &SVector<T, M>) -> T {
        let mut w = *b;
        let mut acc = crate::kernel::neg_zero::<T>();
        for i in 0..M {
            let mut v = w[i];
            for k in 0..i {
                v -= self.l[(i, k)] * w[k];
            }
            w[i] = v;
            acc += v * v * self.inv_d[i];
        }
        acc
    }

    /// Decorrelates a measurement: with S = L D L', returns L^-1 H and
    /// L^-1 nu, whose noise covariance is the diagonal D.
    #[inline(always)]
    pub fn decorrelate<const N: usize>(
        &self,
        h: &SMatrix<T, M, N>,
        nu: &SVector<T, M>,
    ) -> (SMatrix<T, M, N>, SVector<T, M>) {
        let mut h = *h;
        let mut nu = *nu;
        for i in 0..M {
            for k in 0..i {
                let l = self.l[(i, k)];
                let nk = nu[k];
                nu[i] -= l * nk;
                for c in 0..N {
                    let v = h[(k, c)];
                    h[(i, c)] -= l * v;
                }
            }
        }
        (h, nu)
    }

    /// Right division: returns X with X S = B, i.e. B S^-1, for an N x M `b`
    /// (S is symmetric, so each row of X solves S x' = b').
    #[inline(always)]
    pub fn right_divide<const N: usize>(&self, b: &SMatrix<T, N, M>) -> SMatrix<T, N, M> {
        let mut x = *b;
        for r in 0..N {
            let mut row = SVector::<T, M>::from_fn(|i, _| b[(r, i)]);
            self.solve_mut(&mut row);
            for i in 0..M {
                x[(r, i)] = row[i];
            }
        }
        x
    }
}

/// `true` when 1 / `d` is finite, for a positive finite `d`: d times the
/// largest finite value reaches 1 (a multiply, not a 14-cycle divide).
#[inline(always)]
fn recip_finite<T: Scalar>(d: T) -> bool {
    d * T::max_value().unwrap_or_else(T::one) >= T::one()
}

/// A pivot `d` above `floor` (itself zero or above) and finite, in one FPU
/// comparison: d - d is +0 for a finite d and NaN otherwise, so
/// `d + (d - d)` is `d` itself (up to the sign of a zero) or NaN, and NaN
/// fails the comparison. The equivalent `d.is_finite() && d > 0` is folded
/// by the compiler into a class test that a Cortex-M4F runs as about 25
/// integer instructions, and two comparisons into flag arithmetic (both
/// measured with `cairn cost`).
// `d - d` is the point: it is not zero for NaN or infinity.
#[allow(clippy::eq_op)]
#[inline(always)]
pub(crate) fn pivot_accepted<T: Scalar>(d: T, floor: T) -> bool {
    d + (d - d) > floor
}

/// [`Ldl::definite`]'s refusal of the 2 x 2 matrix [[s00, s10], [s10, s11]],
/// confirmed by the factorisation (cold, with the entries in registers: out
/// of the way of the accepting path).
#[cold]
#[inline(never)]
fn confirm_refusal<T: Scalar>(s00: T, s10: T, s11: T) -> Result<(), usize> {
    Ldl::factor(&SMatrix::<T, 2, 2>::new(s00, s10, s10, s11)).map(|_| ())
}

/// The first row where an LDL' factorisation of the symmetric matrix `a`
/// (upper triangle read; the lower one may hold anything) meets a pivot that
/// is not accepted, or `None` when every pivot is.
///
/// - `semidefinite = false` (a covariance P): every pivot must be finite,
///   with a finite reciprocal, and exceed `n eps` times its diagonal entry,
///   the rule of [`Ldl::factor`].
/// - `semidefinite = true` (a noise covariance Q, often rank-deficient):
///   the matrix tested is `a + 4 n eps diag(a)`, a shift of a few roundings
///   relative to each diagonal entry (so the test does not depend on the
///   units of each state), and every pivot must be positive, or zero on an
///   all-zero row. A positive semidefinite matrix assembled in floating point
///   passes (its rounding errors are smaller than the shift); one with an
///   eigenvalue below minus a few roundings of its diagonal fails. A pivot
///   too small to divide by counts as zero.
///
/// About n^3 / 6 multiply-adds and n - 1 divides, no allocation; stops at
/// the failing row.
#[inline(always)]
pub(crate) fn failing_pivot<T: Scalar, const N: usize>(
    a: &SMatrix<T, N, N>,
    semidefinite: bool,
) -> Option<usize> {
    let n = T::of(N as f64);
    let (shift, tol) = if semidefinite {
        (T::one() + T::EPSILON * T::of(4.0) * n, T::zero())
    } else {
        (T::one(), T::EPSILON * n)
    };
    // One buffer: for i > j, w(i, j) = L_ij d_j below the diagonal and
    // w(j, i) = L_ij above it (so both are read down a column).
    let mut w = SMatrix::<T, N, N>::zeros();
    for j in 0..N {
        let ajj = a[(j, j)];
        let mut dj = ajj * shift;
        for k in 0..j {
            dj -= w[(j, k)] * w[(k, j)];
        }
        let accepted = pivot_accepted(dj, tol * ajj.abs()) && recip_finite(dj);
        let inv = if accepted {
            T::one() / dj
        } else if semidefinite && (dj > T::zero() || (dj == T::zero() && ajj == T::zero())) {
            // Too small to divide by, or an all-zero row: a zero pivot.
            T::zero()
        } else {
            return Some(j);
        };
        for i in (j + 1)..N {
            // Upper triangle: entry (j, i) stands for (i, j).
            let mut v = a[(j, i)];
            for k in 0..j {
                v -= w[(i, k)] * w[(k, j)];
            }
            w[(i, j)] = v;
            w[(j, i)] = v * inv;
        }
    }
    None
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::{Matrix3, Vector3};

    #[test]
    fn an_empty_matrix_is_definite_without_reading_an_entry() {
        // A 0 x 0 matrix has no minors to fail (common practice: the empty
        // product is 1); before the guard the divide-free test read (0, 0).
        assert_eq!(
            Ldl::<f32, 0>::definite(&SMatrix::<f32, 0, 0>::zeros()),
            Ok(())
        );
    }

    #[test]
    fn solves_a_known_system() {
        // S = A A' + I for a fixed A; the solve is checked by substitution.
        let s = Matrix3::new(4.0, 2.0, 0.6, 2.0, 5.0, 1.0, 0.6, 1.0, 3.0_f64);
        let ldl = Ldl::factor(&s).unwrap();
        let mut y = Vector3::new(1.0, -2.0, 0.5);
        let b = y;
        ldl.solve_mut(&mut y);
        assert!((s * y - b).norm() < 1e-14);
        let q = ldl.inverse_quadratic(&b);
        assert!((q - b.dot(&y)).abs() < 1e-14);
    }

    #[test]
    fn refuses_indefinite_and_singular() {
        let indefinite = Matrix3::new(1.0, 2.0, 0.0, 2.0, 1.0, 0.0, 0.0, 0.0, 1.0_f64);
        assert_eq!(Ldl::factor(&indefinite).err(), Some(1));
        let singular = Matrix3::new(1.0, 1.0, 0.0, 1.0, 1.0, 0.0, 0.0, 0.0, 1.0_f32);
        assert_eq!(Ldl::factor(&singular).err(), Some(1));
        let nan = Matrix3::new(f64::NAN, 0.0, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 1.0);
        assert_eq!(Ldl::factor(&nan).err(), Some(0));
    }

    #[test]
    fn the_divide_free_test_refuses_what_the_factorisation_refuses() {
        use nalgebra::{Matrix1, Matrix2};
        // Sylvester's criterion (a symmetric matrix is positive definite
        // exactly when its leading principal minors are positive; common
        // practice) against the factorisation's own pivots, on a grid of
        // 2 x 2 matrices through definite, semidefinite, indefinite and
        // non-finite ones. Away from the rounding-level boundary the two
        // must agree on the verdict and on the failing row.
        let values = [
            -2.0_f64, -1.0, -1e-3, 0.0, 1e-300, 1e-3, 0.5, 0.999, 1.0, 1.001, 2.0, 1e30,
        ];
        let mut compared = 0;
        for &a in &values {
            for &b in &values {
                for &d in &values {
                    let s = Matrix2::new(a, b, b, d);
                    let minor = a * d - b * b;
                    // Within a few roundings of a zero pivot the two tests
                    // may round differently.
                    let boundary = minor.abs() <= 1e-12 * (a * d).abs().max(b * b);
                    if boundary {
                        continue;
                    }
                    compared += 1;
                    assert_eq!(Ldl::definite(&s), Ldl::factor(&s).map(|_| ()), "{s}");
                }
            }
        }
        assert!(compared > 1000, "{compared}");
        for bad in [f64::NAN, f64::INFINITY, -1.0, 0.0] {
            assert_eq!(Ldl::definite(&Matrix1::new(bad)), Err(0));
            assert_eq!(Ldl::definite(&Matrix2::new(1.0, 0.0, 0.0, bad)), Err(1));
        }
        assert_eq!(Ldl::definite(&Matrix1::new(1e-30_f32)), Ok(()));
        // Tiny variances whose product underflows in f32 are still accepted.
        let tiny = Matrix2::new(1e-20_f32, 0.0, 0.0, 1e-20);
        assert_eq!(Ldl::definite(&tiny), Ok(()));
        assert_eq!(Ldl::factor(&tiny).map(|_| ()), Ok(()));
        // Beyond 2 x 2, the factorisation itself.
        let indefinite = Matrix3::new(1.0, 2.0, 0.0, 2.0, 1.0, 0.0, 0.0, 0.0, 1.0_f64);
        assert_eq!(Ldl::definite(&indefinite), Err(1));
    }

    #[test]
    fn the_diagonal_test_refuses_what_the_factorisation_refuses() {
        // Every diagonal f32 3 x 3 matrix over values through negative,
        // zero, subnormal (1e-40: no finite reciprocal), tiny, ordinary,
        // huge and non-finite variances: the variance-by-variance test must
        // give the factorisation's verdict and failing row, exactly (a
        // diagonal matrix's pivots are its entries, so there is no rounding
        // boundary). The subnormal case fails at its own row but for the
        // last, where the factorisation never needs its reciprocal.
        let values = [
            f32::NAN,
            f32::NEG_INFINITY,
            -1.0,
            0.0,
            1e-40,
            1e-30,
            0.25,
            3.0e38,
            f32::INFINITY,
        ];
        let mut refused_subnormal_early = false;
        for &a in &values {
            for &b in &values {
                for &c in &values {
                    let s = Matrix3::from_diagonal(&nalgebra::Vector3::new(a, b, c));
                    let factored = Ldl::factor(&s).map(|_| ());
                    assert_eq!(Ldl::definite_diagonal(&s), factored, "{s}");
                    refused_subnormal_early |= a == 1e-40 && factored == Err(0);
                }
            }
        }
        assert!(refused_subnormal_early);
        // Off-diagonal entries are not read.
        let mut s = Matrix3::from_diagonal_element(2.0_f32);
        s[(0, 2)] = f32::NAN;
        s[(1, 0)] = -5.0;
        assert_eq!(Ldl::definite_diagonal(&s), Ok(()));
    }
}
