//! Loop shapes for the covariance products, one arithmetic.
//!
//! A covariance entry is a sum of products taken in a fixed order. That
//! order is what decides the bits, not the shape of the loops around it, so
//! each kernel here comes in two shapes that perform the same operations in
//! the same order on every entry:
//!
//! - *column* shape: whole columns updated at once (`y += a * x` over a
//!   contiguous column). Independent lanes, so a host's vector unit and
//!   out-of-order core run them in parallel; the summation chains never
//!   wait on each other.
//! - *dot* shape: one entry at a time, a running sum in a register over two
//!   contiguous columns, only the upper triangle computed. Fewest loads,
//!   stores and operations on an in-order core without a vector unit (a
//!   Cortex-M4F), where the column shape spends its time moving
//!   accumulators through memory (measured 47% slower there).
//!
//! [`VECTOR`] picks the shape at compile time. Both are always compiled and
//! the unit tests check, bit for bit, that they agree: a host run of the
//! verifier computes exactly what the microcontroller computes.

use nalgebra::{SMatrix, SVector};

use crate::scalar::Scalar;

/// `true` on targets with a vector unit and deep pipelines, where the
/// column shapes win; `false` on in-order microcontroller cores.
pub(crate) const VECTOR: bool = cfg!(any(
    target_arch = "x86_64",
    target_arch = "x86",
    target_arch = "aarch64"
));

/// Negative zero, the additive identity of IEEE 754 arithmetic: -0 + a is
/// a for every a (+0 + a is not, for a = -0), so a sum started from it has
/// no first addition to execute; compilers drop it.
#[inline(always)]
pub(crate) fn neg_zero<T: Scalar>() -> T {
    -T::zero()
}

/// Independent partial sums for reductions whose value does not depend on
/// the order (finiteness tests).
const LANES: usize = if VECTOR { 4 } else { 1 };

/// A cheaper finiteness sum of `values`: their plain sum s, returned as
/// s - s (zero exactly when s is finite), one add per value instead of the
/// two of [`finite_sum`]. Its price: finite values whose sum passes the
/// largest finite value give NaN too, so the values it tests must lie far
/// from overflow (a state, a covariance). The extended predict's tests.
// `s - s` is the point: it is not zero for NaN or infinity.
#[allow(clippy::eq_op)]
#[inline(always)]
pub(crate) fn plain_finite_sum<T: Scalar>(values: impl Iterator<Item = T>) -> T {
    let total = values.fold(neg_zero::<T>(), |a, v| a + v);
    total - total
}

/// The finiteness sum of `values`: v - v is +0 for a finite v and NaN for
/// NaN or infinity, and NaN survives any sum of them, so the sum is zero
/// exactly when every value is finite, whatever its order. Pure FP adds with
/// one comparison at the end, instead of a move, mask and branch per entry
/// (common practice on FPUs without a cheap classify instruction); sums of
/// several operands add up to one test. On a host, [`LANES`] partial sums
/// keep the adds from waiting on each other.
// `v - v` is the point: it is not zero for NaN or infinity.
#[allow(clippy::eq_op)]
#[inline(always)]
pub(crate) fn finite_sum<T: Scalar>(values: &[T]) -> T {
    let mut lanes = [neg_zero::<T>(); LANES];
    let mut chunks = values.chunks_exact(LANES);
    for chunk in &mut chunks {
        for (acc, &v) in lanes.iter_mut().zip(chunk) {
            *acc += v - v;
        }
    }
    let mut acc = neg_zero::<T>();
    for &v in chunks.remainder() {
        acc += v - v;
    }
    for lane in lanes {
        acc += lane;
    }
    acc
}

/// `true` when every value is finite ([`finite_sum`] is zero).
#[inline(always)]
pub(crate) fn all_finite<T: Scalar>(values: &[T]) -> bool {
    finite_sum(values) == T::zero()
}

/// `true` when every entry on and above the diagonal is finite (the lower
/// triangle of a mirrored matrix holds the same values).
#[inline(always)]
pub(crate) fn upper_finite<T: Scalar, const N: usize>(m: &SMatrix<T, N, N>) -> bool {
    upper_finite_sum(m) == T::zero()
}

/// The finiteness sum ([`finite_sum`]) of the entries on and above the
/// diagonal. On a host, four partial sums keep the adds from waiting on
/// each other.
#[allow(clippy::eq_op)]
#[inline(always)]
pub(crate) fn upper_finite_sum<T: Scalar, const N: usize>(m: &SMatrix<T, N, N>) -> T {
    let values = m.as_slice();
    let (mut a0, mut a1, mut a2, mut a3): (T, T, T, T) =
        (neg_zero(), neg_zero(), neg_zero(), neg_zero());
    for j in 0..N {
        let column = &values[j * N..j * N + j + 1];
        if VECTOR {
            let mut quads = column.chunks_exact(4);
            for q in &mut quads {
                a0 += q[0] - q[0];
                a1 += q[1] - q[1];
                a2 += q[2] - q[2];
                a3 += q[3] - q[3];
            }
            for &v in quads.remainder() {
                a0 += v - v;
            }
        } else {
            for &v in column {
                a0 += v - v;
            }
        }
    }
    a0 + a1 + a2 + a3
}

/// Copies the upper triangle onto the lower one.
#[inline(always)]
pub(crate) fn mirror_upper<T: Scalar, const N: usize>(m: &mut SMatrix<T, N, N>) {
    for j in 1..N {
        for i in 0..j {
            m[(j, i)] = m[(i, j)];
        }
    }
}

/// F P F' + Q for a symmetric P: the upper triangle (diagonal included);
/// the lower one is left unspecified, for the caller to mirror.
///
/// Entry (i, j), i <= j, is `sum_e C[i,e] F[j,e]` (e ascending from zero)
/// plus `Q[i,j]`, where `C[i,e] = sum_k F[i,k] P[k,e]` (k ascending from
/// zero): about 1.5 n^3 multiply-adds, only the upper triangle of the second
/// product needed.
#[inline(always)]
pub(crate) fn propagate<T: Scalar, const N: usize>(
    f: &SMatrix<T, N, N>,
    p: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> SMatrix<T, N, N> {
    if VECTOR {
        propagate_columns(f, p, q)
    } else {
        propagate_dots(f, p, q)
    }
}

/// [`propagate`] in the column shape.
#[inline(always)]
pub(crate) fn propagate_columns<T: Scalar, const N: usize>(
    f: &SMatrix<T, N, N>,
    p: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> SMatrix<T, N, N> {
    // nalgebra's products for fixed sizes are column updates in this order
    // (y = a_0 x_0, then y += a_k x_k, k ascending): C = F P, then C F' + Q.
    let c = f * p;
    c * f.transpose() + q
}

/// [`propagate`] in the dot shape.
#[inline(always)]
pub(crate) fn propagate_dots<T: Scalar, const N: usize>(
    f: &SMatrix<T, N, N>,
    p: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> SMatrix<T, N, N> {
    // A = C' (A[e,i] = C[i,e]): dots of P's column e (= row e, P symmetric)
    // with F' column i, both contiguous.
    let ft = f.transpose();
    // Two entries at a time share each load of F' (an in-order core with
    // no vector unit is load-bound here: 3 loads per 2 multiply-adds
    // instead of 4); each entry's own sum keeps its order.
    let mut a = SMatrix::<T, N, N>::zeros();
    for i in 0..N {
        let mut e = 0;
        while e + 1 < N {
            let (mut v0, mut v1) = (neg_zero::<T>(), neg_zero::<T>());
            for k in 0..N {
                let f = ft[(k, i)];
                v0 += p[(k, e)] * f;
                v1 += p[(k, e + 1)] * f;
            }
            a[(e, i)] = v0;
            a[(e + 1, i)] = v1;
            e += 2;
        }
        if e < N {
            let mut v = neg_zero::<T>();
            for k in 0..N {
                v += p[(k, e)] * ft[(k, i)];
            }
            a[(e, i)] = v;
        }
    }
    let mut out = SMatrix::<T, N, N>::zeros();
    for j in 0..N {
        let mut i = 0;
        while i < j {
            let (mut v0, mut v1) = (neg_zero::<T>(), neg_zero::<T>());
            for e in 0..N {
                let f = ft[(e, j)];
                v0 += a[(e, i)] * f;
                v1 += a[(e, i + 1)] * f;
            }
            out[(i, j)] = v0 + q[(i, j)];
            out[(i + 1, j)] = v1 + q[(i + 1, j)];
            i += 2;
        }
        if i == j {
            let mut v = neg_zero::<T>();
            for e in 0..N {
                v += a[(e, i)] * ft[(e, j)];
            }
            out[(i, j)] = v + q[(i, j)];
        }
    }
    out
}

/// Q = G diag(q) G' from independent noise sources: entry (i, j) is
/// `sum_k (G[i,k] q[k]) G[j,k]` (k ascending from zero; `G[i,k] q[k]` is
/// shared by a row's entries, so a fixed-size build multiplies it once),
/// exactly symmetric, and positive semidefinite by construction when every
/// `q[k] >= 0`, which is all a caller has to check.
#[inline(always)]
pub fn from_sources<T: Scalar, const N: usize>(
    g: &SMatrix<T, N, N>,
    q: &SVector<T, N>,
) -> SMatrix<T, N, N> {
    let mut out = SMatrix::<T, N, N>::zeros();
    for j in 0..N {
        for i in 0..j + 1 {
            let mut v = neg_zero::<T>();
            for k in 0..N {
                v += g[(i, k)] * q[k] * g[(j, k)];
            }
            out[(i, j)] = v;
            out[(j, i)] = v;
        }
    }
    out
}

/// The shared inputs of a measurement update: B = P H' (n x m) and the
/// innovation covariance S = H B + R (m x m, exactly symmetric).
///
/// `B[i,c] = sum_e P[i,e] H[c,e]` (e ascending from zero; P symmetric, so
/// the dot shape reads P's column i); `S[i,j] = sum_e H[i,e] B[e,j]`
/// (e ascending from zero) plus `R[i,j]` for i >= j, mirrored.
#[inline(always)]
pub(crate) fn innovation<T: Scalar, const N: usize, const M: usize>(
    p: &SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    r: &SMatrix<T, M, M>,
) -> (SMatrix<T, N, M>, SMatrix<T, M, M>) {
    innovation_shaped::<T, N, M, VECTOR>(p, h, r)
}

/// [`innovation`] in either shape.
#[inline(always)]
pub(crate) fn innovation_shaped<T: Scalar, const N: usize, const M: usize, const COLUMNS: bool>(
    p: &SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    r: &SMatrix<T, M, M>,
) -> (SMatrix<T, N, M>, SMatrix<T, M, M>) {
    if COLUMNS {
        // nalgebra's fixed-size products are these column updates in this
        // order (y = a_0 x_0, then y += a_e x_e, e ascending).
        let b = p * h.transpose();
        let mut s = h * b + r;
        for j in 1..M {
            for i in 0..j {
                s[(i, j)] = s[(j, i)];
            }
        }
        return (b, s);
    }
    let mut b = SMatrix::<T, N, M>::from_element(neg_zero());
    for c in 0..M {
        for i in 0..N {
            let mut v = neg_zero::<T>();
            for e in 0..N {
                v += p[(e, i)] * h[(c, e)];
            }
            b[(i, c)] = v;
        }
    }
    let mut s = SMatrix::<T, M, M>::from_element(neg_zero());
    for j in 0..M {
        for i in j..M {
            let mut v = neg_zero::<T>();
            for e in 0..N {
                v += h[(i, e)] * b[(e, j)];
            }
            let v = v + r[(i, j)];
            s[(i, j)] = v;
            s[(j, i)] = v;
        }
    }
    (b, s)
}

/// Deterministic test inputs shared by the kernel and form tests.
#[cfg(test)]
pub(crate) mod testing {
    use super::*;

    /// Deterministic values in [-1, 1): Press et al.'s 32-bit LCG
    /// (*Numerical Recipes*, 2nd ed., ch. 7.1).
    pub(crate) struct Lcg(pub(crate) u32);
    impl Lcg {
        pub(crate) fn unit(&mut self) -> f64 {
            self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            f64::from(self.0 >> 8) / f64::from(1u32 << 24) * 2.0 - 1.0
        }
        pub(crate) fn matrix<T: Scalar, const R: usize, const C: usize>(
            &mut self,
        ) -> SMatrix<T, R, C> {
            SMatrix::from_fn(|_, _| T::of(self.unit()))
        }
        pub(crate) fn covariance<T: Scalar, const N: usize>(&mut self) -> SMatrix<T, N, N> {
            let a: SMatrix<T, N, N> = self.matrix();
            let mut p = a * a.transpose();
            mirror_upper(&mut p);
            p
        }
    }
}

#[cfg(test)]
mod tests {
    use super::testing::Lcg;
    use super::*;

    /// The bits of the upper triangle (diagonal included).
    fn bits<T: Scalar, const N: usize>(m: &SMatrix<T, N, N>) -> [u64; 256] {
        let mut out = [0u64; 256];
        let upper = (0..N).flat_map(|j| (0..=j).map(move |i| (i, j)));
        for (o, (i, j)) in out.iter_mut().zip(upper) {
            *o = m[(i, j)].to_f64().to_bits();
        }
        out
    }

    fn shapes_agree<T: Scalar, const N: usize>(seed: u32) {
        let mut g = Lcg(seed);
        for _ in 0..50 {
            let f: SMatrix<T, N, N> = g.matrix();
            let p = g.covariance::<T, N>();
            let q = g.covariance::<T, N>();
            let cols = propagate_columns(&f, &p, &q);
            let dots = propagate_dots(&f, &p, &q);
            assert_eq!(bits(&cols), bits(&dots), "n = {N}");
        }
    }

    fn innovation_shapes_agree<T: Scalar, const N: usize, const M: usize>(seed: u32) {
        let mut g = Lcg(seed);
        for _ in 0..50 {
            let p = g.covariance::<T, N>();
            let h: SMatrix<T, M, N> = g.matrix();
            let r = g.covariance::<T, M>();
            let (bc, sc) = innovation_shaped::<T, N, M, true>(&p, &h, &r);
            let (bd, sd) = innovation_shaped::<T, N, M, false>(&p, &h, &r);
            let same = bc.iter().chain(sc.iter()).zip(bd.iter().chain(sd.iter()));
            for (x, y) in same {
                assert_eq!(
                    x.to_f64().to_bits(),
                    y.to_f64().to_bits(),
                    "n = {N}, m = {M}"
                );
            }
            assert_eq!(sc, sc.transpose());
        }
    }

    #[test]
    fn both_innovation_shapes_compute_the_same_bits() {
        innovation_shapes_agree::<f32, 3, 2>(21);
        innovation_shapes_agree::<f32, 9, 3>(22);
        innovation_shapes_agree::<f64, 15, 1>(23);
    }

    #[test]
    fn both_shapes_compute_the_same_bits() {
        shapes_agree::<f32, 3>(1);
        shapes_agree::<f32, 9>(2);
        shapes_agree::<f32, 15>(3);
        shapes_agree::<f64, 6>(4);
        shapes_agree::<f64, 9>(5);
    }

    #[test]
    fn finiteness_over_lanes() {
        for len in 0..40 {
            let mut v = [1.5f32; 40];
            assert!(all_finite(&v[..len]));
            for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
                for at in 0..len {
                    v[at] = bad;
                    assert!(!all_finite(&v[..len]), "len {len} at {at}");
                    v[at] = -2.0;
                }
            }
        }
    }
}
