//! Covariance measurement-update forms: Joseph (default) and conventional,
//! each evaluated at O(n^2 m) cost and returning an exactly symmetric result.

use nalgebra::{SMatrix, SVector};

use crate::scalar::Scalar;

/// How the posterior covariance is formed from the prior and the gain.
///
/// Implementations receive B = P H' (n x m), the gain K = B S^-1 and R, and
/// return the full symmetric posterior. They must not form I - KH as an
/// n x n matrix.
pub trait CovarianceForm {
    /// A short name for reports.
    const NAME: &'static str;

    /// Posterior covariance for a vector measurement.
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
    ) -> SMatrix<T, N, N>;

    /// Posterior covariance for one scalar measurement with row `h`,
    /// `b = P h'`, gain `k` and noise variance `r`.
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &SMatrix<T, N, N>,
        h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        r: T,
    ) -> SMatrix<T, N, N>;
}

/// Joseph's stabilised form, P+ = (I - KH) P (I - KH)' + K R K'
/// (Bucy and Joseph, 1968).
///
/// Evaluated as W = P - K (H P); A = W H'; P+ = W - A K' + (K R) K', with
/// only the upper triangle of the last sum computed and mirrored: about
/// 2.5 n^2 m + n m^2 multiply-adds. First-order errors in K do not reach P+.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Joseph;

/// The conventional form, P+ = (I - KH) P = P - K (P H')', upper triangle
/// computed and mirrored: about n^2 m / 2 multiply-adds. Cheapest, but a
/// gain error enters P+ to first order.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Conventional;

impl CovarianceForm for Joseph {
    const NAME: &'static str = "joseph";

    #[inline]
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
    ) -> SMatrix<T, N, N> {
        // W = P - K B' (B' = H P since P is symmetric).
        let mut w = *p;
        for j in 0..N {
            for i in 0..N {
                let mut v = w[(i, j)];
                for c in 0..M {
                    v -= k[(i, c)] * b[(j, c)];
                }
                w[(i, j)] = v;
            }
        }
        // D = K R - W H'  (n x m).
        let mut d = SMatrix::<T, N, M>::zeros();
        for c in 0..M {
            for i in 0..N {
                let mut v = T::zero();
                for e in 0..M {
                    v += k[(i, e)] * r[(e, c)];
                }
                for e in 0..N {
                    v -= w[(i, e)] * h[(c, e)];
                }
                d[(i, c)] = v;
            }
        }
        // P+ = W + D K', upper triangle, mirrored.
        let mut out = w;
        for j in 0..N {
            for i in 0..=j {
                let mut v = w[(i, j)];
                for c in 0..M {
                    v += d[(i, c)] * k[(j, c)];
                }
                out[(i, j)] = v;
                out[(j, i)] = v;
            }
        }
        out
    }

    #[inline]
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &SMatrix<T, N, N>,
        h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        r: T,
    ) -> SMatrix<T, N, N> {
        let mut w = *p;
        for j in 0..N {
            for i in 0..N {
                w[(i, j)] -= k[i] * b[j];
            }
        }
        let mut d = SVector::<T, N>::zeros();
        for i in 0..N {
            let mut v = r * k[i];
            for e in 0..N {
                v -= w[(i, e)] * h[e];
            }
            d[i] = v;
        }
        let mut out = w;
        for j in 0..N {
            for i in 0..=j {
                let v = w[(i, j)] + d[i] * k[j];
                out[(i, j)] = v;
                out[(j, i)] = v;
            }
        }
        out
    }
}

impl CovarianceForm for Conventional {
    const NAME: &'static str = "conventional";

    #[inline]
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &SMatrix<T, N, N>,
        _h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        _r: &SMatrix<T, M, M>,
    ) -> SMatrix<T, N, N> {
        let mut out = *p;
        for j in 0..N {
            for i in 0..=j {
                let mut v = p[(i, j)];
                for c in 0..M {
                    v -= k[(i, c)] * b[(j, c)];
                }
                out[(i, j)] = v;
                out[(j, i)] = v;
            }
        }
        out
    }

    #[inline]
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &SMatrix<T, N, N>,
        _h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        _r: T,
    ) -> SMatrix<T, N, N> {
        let mut out = *p;
        for j in 0..N {
            for i in 0..=j {
                let v = p[(i, j)] - k[i] * b[j];
                out[(i, j)] = v;
                out[(j, i)] = v;
            }
        }
        out
    }
}
