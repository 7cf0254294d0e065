//! Covariance measurement-update forms: Joseph (default) and conventional,
//! each evaluated at O(n^2 m) cost and returning an exactly symmetric result.

use core::marker::PhantomData;

use nalgebra::{SMatrix, SVector};

use crate::kernel::{VECTOR, neg_zero};
use crate::pattern::Pattern;
use crate::patterned;
use crate::scalar::Scalar;

/// How the posterior covariance is formed from the prior and the gain.
///
/// Implementations receive the full symmetric prior P in `p` and overwrite
/// its upper triangle (diagonal included) with the posterior's, in place
/// (no n x n copy); the lower triangle is left unspecified and the filter
/// mirrors the upper one over it when it commits. Given
/// B = P H' (n x m), the gain K = B S^-1, R and the innovation covariance
/// S = H P H' + R. They must not form I - KH as an n x n matrix.
pub trait CovarianceForm {
    /// A short name for reports.
    const NAME: &'static str;

    /// Whether the filter factors every covariance it is about to store
    /// (LDL', see [`Checked`]) and refuses an indefinite one. `false` unless
    /// a form says otherwise.
    const CHECKS_DEFINITENESS: bool = false;

    /// Posterior covariance for a vector measurement, in place.
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        s: &SMatrix<T, M, M>,
    );

    /// [`CovarianceForm::posterior`] for an H with the structure `h_pattern`
    /// and an R with the structure `r_pattern` (a model's
    /// [`crate::MeasurementModel::JACOBIAN_PATTERN`] and
    /// [`crate::MeasurementModel::NOISE_PATTERN`]; `r` holds R's declared
    /// entries): the same numbers, the products with structural zeros
    /// skipped. The default ignores the patterns.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn posterior_patterned<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        h_pattern: &Pattern<M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        r_pattern: &Pattern<M, M>,
        s: &SMatrix<T, M, M>,
    ) {
        let _ = (h_pattern, r_pattern);
        Self::posterior(p, h, b, k, r, s);
    }

    /// Posterior covariance for one scalar measurement with row `h`,
    /// `b = P h'`, gain `k`, noise variance `r` and innovation variance `s`,
    /// in place.
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        r: T,
        s: T,
    );
}

/// Joseph's stabilised form, P+ = (I - KH) P (I - KH)' + K R K'
/// (Bucy and Joseph, 1968).
///
/// Evaluated in its factored order, with I - KH applied as a rank-m
/// correction from each side rather than formed: W = P - K (H P);
/// D = K R - W H'; P+ = W + D K', the last with only its upper triangle
/// computed and mirrored. About 2.5 n^2 m + n m^2 multiply-adds beyond the
/// shared work, never the O(n^3) product with I - KH. A gain error enters
/// P+ only to second order.
///
/// The algebraically equal expansion P - K B' - B K' + K S K' is cheaper
/// (n^2 m + n m^2) but loses the form's robustness in single precision: on
/// the Dyer-McReynolds example at d = 1e-2 it returned an indefinite f32
/// posterior where this order stays positive definite (measured with the
/// verifier), so it is not used.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Joseph;

/// The conventional form, P+ = (I - KH) P = P - K (P H')', upper triangle
/// computed and mirrored: about n^2 m / 2 multiply-adds. Cheapest, but a
/// gain error enters P+ to first order.
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Conventional;

/// Another form with the definiteness check on: the same arithmetic as
/// `F`, and before every commit the covariance is factored as LDL' (upper
/// triangle, [`crate::Ldl::factor`]'s pivot rule); a failing pivot refuses
/// the operation with [`crate::FilterError::CovarianceLost`] at that row,
/// leaving state and covariance bit-identical.
///
/// The filter's cheap commit test reads only the diagonal, and rounding can
/// make P indefinite with a positive diagonal: in f32 the update
/// P0 = I (3 x 3), H = [[1, 1, 1], [1, 1, 1.001]], R = 1e-6 I stores a P
/// with a negative eigenvalue in both the Joseph and the conventional form
/// (the exact posterior's smallest eigenvalue is +1.67e-7). The check costs
/// about n^3 / 6 multiply-adds and n - 1 divides per operation, about 150
/// Cortex-M4F cycles at n = 3 (CHANGELOG.md). A compile-time choice, so a
/// filter without it pays nothing; [`crate::Kalman::with_form`] switches.
///
/// ```
/// use cairn_core::{Checked, FilterError, Joseph, Kalman};
/// use nalgebra::{Matrix2, Matrix2x3, Matrix3, Vector2, Vector3};
///
/// let mut kf: Kalman<f32, 3, Checked<Joseph>> =
///     Kalman::try_new(Vector3::zeros(), Matrix3::identity())?;
/// let h = Matrix2x3::new(1.0, 1.0, 1.0, 1.0, 1.0, 1.001);
/// let r = Matrix2::identity() * 1e-6;
/// let refused = kf.update(&Vector2::zeros(), &h, &r, None);
/// assert!(matches!(refused, Err(FilterError::CovarianceLost { .. })));
/// assert_eq!(kf.covariance(), &Matrix3::identity());
/// # Ok::<(), FilterError>(())
/// ```
#[derive(Debug, Clone, Copy, Default, PartialEq, Eq)]
pub struct Checked<F>(PhantomData<F>);

impl<F: CovarianceForm> CovarianceForm for Checked<F> {
    const NAME: &'static str = F::NAME;
    const CHECKS_DEFINITENESS: bool = true;

    #[inline(always)]
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        s: &SMatrix<T, M, M>,
    ) {
        F::posterior(p, h, b, k, r, s)
    }

    #[inline(always)]
    fn posterior_patterned<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        h_pattern: &Pattern<M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        r_pattern: &Pattern<M, M>,
        s: &SMatrix<T, M, M>,
    ) {
        F::posterior_patterned(p, h, h_pattern, b, k, r, r_pattern, s)
    }

    #[inline(always)]
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        r: T,
        s: T,
    ) {
        F::posterior_scalar(p, h, b, k, r, s)
    }
}

impl CovarianceForm for Joseph {
    const NAME: &'static str = "joseph";

    #[inline(always)]
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        _s: &SMatrix<T, M, M>,
    ) {
        joseph::<T, N, M, VECTOR>(p, h, b, k, r)
    }

    #[inline(always)]
    fn posterior_patterned<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SMatrix<T, M, N>,
        h_pattern: &Pattern<M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        r: &SMatrix<T, M, M>,
        r_pattern: &Pattern<M, M>,
        _s: &SMatrix<T, M, M>,
    ) {
        patterned::joseph(p, h, h_pattern, b, k, r, r_pattern)
    }

    #[inline(always)]
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &mut SMatrix<T, N, N>,
        h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        r: T,
        _s: T,
    ) {
        joseph_scalar::<T, N, VECTOR>(p, h, b, k, r)
    }
}

impl CovarianceForm for Conventional {
    const NAME: &'static str = "conventional";

    #[inline(always)]
    fn posterior<T: Scalar, const N: usize, const M: usize>(
        p: &mut SMatrix<T, N, N>,
        _h: &SMatrix<T, M, N>,
        b: &SMatrix<T, N, M>,
        k: &SMatrix<T, N, M>,
        _r: &SMatrix<T, M, M>,
        _s: &SMatrix<T, M, M>,
    ) {
        conventional::<T, N, M, VECTOR>(p, b, k)
    }

    #[inline(always)]
    fn posterior_scalar<T: Scalar, const N: usize>(
        p: &mut SMatrix<T, N, N>,
        _h: &SVector<T, N>,
        b: &SVector<T, N>,
        k: &SVector<T, N>,
        _r: T,
        _s: T,
    ) {
        conventional_scalar::<T, N, VECTOR>(p, b, k)
    }
}

// The forms' arithmetic, in either loop shape (see the kernel module):
// `COLUMNS` picks whole-column updates, otherwise upper-triangle dots; the
// operations and their order on every entry are the same.

/// Joseph's factored order for a vector measurement.
#[inline(always)]
pub(crate) fn joseph<T: Scalar, const N: usize, const M: usize, const COLUMNS: bool>(
    p: &mut SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    b: &SMatrix<T, N, M>,
    k: &SMatrix<T, N, M>,
    r: &SMatrix<T, M, M>,
) {
    let w = p;
    if COLUMNS {
        // nalgebra's fixed-size gemm runs the same column updates in the
        // same order (y = beta y + alpha a_k x_k, k ascending; alpha and
        // beta are +-1, so every product and sum is the one below).
        let one = T::one();
        w.gemm(-one, k, &b.transpose(), one);
        let mut d = k * r;
        d.gemm(-one, w, &h.transpose(), one);
        w.gemm(one, &d, &k.transpose(), one);
        return;
    }
    // W = P - K B' (B' = H P since P is symmetric), column by column.
    for j in 0..N {
        for c in 0..M {
            let bjc = b[(j, c)];
            for i in 0..N {
                w[(i, j)] -= k[(i, c)] * bjc;
            }
        }
    }
    // D = K R - W H' (n x m), as column updates.
    let mut d = SMatrix::<T, N, M>::from_element(neg_zero());
    for c in 0..M {
        for e in 0..M {
            let rec = r[(e, c)];
            for i in 0..N {
                d[(i, c)] += k[(i, e)] * rec;
            }
        }
        for e in 0..N {
            let hce = h[(c, e)];
            for i in 0..N {
                d[(i, c)] -= w[(i, e)] * hce;
            }
        }
    }
    // P+ = W + D K' (upper triangle), in place in W: column j reads only
    // W's column j.
    for j in 0..N {
        for i in 0..j + 1 {
            let mut v = w[(i, j)];
            for c in 0..M {
                v += d[(i, c)] * k[(j, c)];
            }
            w[(i, j)] = v;
        }
    }
}

/// Joseph's factored order for one scalar measurement.
#[inline(always)]
fn joseph_scalar<T: Scalar, const N: usize, const COLUMNS: bool>(
    p: &mut SMatrix<T, N, N>,
    h: &SVector<T, N>,
    b: &SVector<T, N>,
    k: &SVector<T, N>,
    r: T,
) {
    let w = p;
    for j in 0..N {
        let bj = b[j];
        for i in 0..N {
            w[(i, j)] -= k[i] * bj;
        }
    }
    let mut d = *k * r;
    for e in 0..N {
        let he = h[e];
        for i in 0..N {
            d[i] -= w[(i, e)] * he;
        }
    }
    if COLUMNS {
        for j in 0..N {
            let kj = k[j];
            for i in 0..N {
                w[(i, j)] += d[i] * kj;
            }
        }
    } else {
        for j in 0..N {
            for i in 0..j + 1 {
                let v = w[(i, j)] + d[i] * k[j];
                w[(i, j)] = v;
            }
        }
    }
}

/// The conventional form for a vector measurement.
#[inline(always)]
fn conventional<T: Scalar, const N: usize, const M: usize, const COLUMNS: bool>(
    p: &mut SMatrix<T, N, N>,
    b: &SMatrix<T, N, M>,
    k: &SMatrix<T, N, M>,
) {
    let out = p;
    if COLUMNS {
        for j in 0..N {
            for c in 0..M {
                let bjc = b[(j, c)];
                for i in 0..N {
                    out[(i, j)] -= k[(i, c)] * bjc;
                }
            }
        }
    } else {
        for j in 0..N {
            for i in 0..j + 1 {
                let mut v = out[(i, j)];
                for c in 0..M {
                    v -= k[(i, c)] * b[(j, c)];
                }
                out[(i, j)] = v;
            }
        }
    }
}

/// The conventional form for one scalar measurement.
#[inline(always)]
fn conventional_scalar<T: Scalar, const N: usize, const COLUMNS: bool>(
    p: &mut SMatrix<T, N, N>,
    b: &SVector<T, N>,
    k: &SVector<T, N>,
) {
    let out = p;
    if COLUMNS {
        for j in 0..N {
            let bj = b[j];
            for i in 0..N {
                out[(i, j)] -= k[i] * bj;
            }
        }
    } else {
        for j in 0..N {
            for i in 0..j + 1 {
                let v = out[(i, j)] - k[i] * b[j];
                out[(i, j)] = v;
            }
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel::mirror_upper;
    use crate::kernel::testing::Lcg;

    /// The upper triangles (the forms' output) agree bit for bit.
    fn same_bits<T: Scalar, const N: usize>(a: &SMatrix<T, N, N>, b: &SMatrix<T, N, N>) -> bool {
        (0..N)
            .all(|j| (0..=j).all(|i| a[(i, j)].to_f64().to_bits() == b[(i, j)].to_f64().to_bits()))
    }

    fn shapes_agree<T: Scalar, const N: usize, const M: usize>(seed: u32) {
        let mut g = Lcg(seed);
        for _ in 0..50 {
            let a: SMatrix<T, N, N> = g.matrix();
            let mut p = a * a.transpose();
            mirror_upper(&mut p);
            let h: SMatrix<T, M, N> = g.matrix();
            let k: SMatrix<T, N, M> = g.matrix();
            let r = SMatrix::<T, M, M>::identity();
            let b = p * h.transpose();
            let run = |f: &dyn Fn(&mut SMatrix<T, N, N>)| {
                let mut out = p;
                f(&mut out);
                out
            };
            let cols = run(&|q| joseph::<T, N, M, true>(q, &h, &b, &k, &r));
            let dots = run(&|q| joseph::<T, N, M, false>(q, &h, &b, &k, &r));
            assert!(same_bits(&cols, &dots), "joseph n = {N}, m = {M}");
            let cols = run(&|q| conventional::<T, N, M, true>(q, &b, &k));
            let dots = run(&|q| conventional::<T, N, M, false>(q, &b, &k));
            assert!(same_bits(&cols, &dots), "conventional n = {N}, m = {M}");
            let (hr, br, kr) = (h.row(0).transpose(), b.column(0).into(), k.column(0).into());
            let cols = run(&|q| joseph_scalar::<T, N, true>(q, &hr, &br, &kr, T::one()));
            let dots = run(&|q| joseph_scalar::<T, N, false>(q, &hr, &br, &kr, T::one()));
            assert!(same_bits(&cols, &dots), "joseph scalar n = {N}");
            let cols = run(&|q| conventional_scalar::<T, N, true>(q, &br, &kr));
            let dots = run(&|q| conventional_scalar::<T, N, false>(q, &br, &kr));
            assert!(same_bits(&cols, &dots), "conventional scalar n = {N}");
        }
    }

    #[test]
    fn both_shapes_compute_the_same_bits() {
        shapes_agree::<f32, 3, 1>(11);
        shapes_agree::<f32, 3, 2>(12);
        shapes_agree::<f32, 9, 3>(13);
        shapes_agree::<f32, 15, 2>(14);
        shapes_agree::<f64, 9, 3>(15);
    }
}
