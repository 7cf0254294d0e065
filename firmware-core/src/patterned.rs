//! The covariance products over a [`Pattern`]'s non-zero entries.
//!
//! Each kernel computes every entry as the dense kernels do (the same
//! products, summed in the same ascending order from -0), skipping the
//! products with a structural zero and taking a structural one's product as
//! the other factor. One loop shape, an entry at a time, serves every
//! target: skipping zeros leaves no contiguous columns for a vector unit to
//! run, and one shape makes the host's f32 the target's by construction.
//! Small patterns (the pose model's) unroll completely, their lists folded
//! into straight-line code; larger ones loop over the constant lists.

use nalgebra::{SMatrix, SVector};

use crate::kernel::{self, neg_zero};
use crate::pattern::{Entry, Pattern};
use crate::scalar::Scalar;

/// Column `j` of `m` as a fixed-size array (nalgebra stores columns
/// whole), so the whole-column updates over it have a constant length that
/// unrolls and, on a host, runs in the vector unit; `None` for a column
/// beyond the matrix (never: the patterns hold columns below `C`), which
/// keeps the kernels free of panic paths.
#[inline(always)]
fn column_of<T: Scalar, const R: usize, const C: usize>(
    m: &SMatrix<T, R, C>,
    j: usize,
) -> Option<&[T; R]> {
    m.data.0.get(j)
}

/// Row k of a symmetric P read from its upper triangle only: P[k,e] for
/// e >= k and P[e,k] (the same value in a mirrored P) before it. A kernel
/// that reads each pair once loads and holds fewer values (the 3-state pose
/// predict loads 6 entries of P instead of 8; on a Cortex-M4F, with the
/// early state test, it keeps 4 fewer values in callee-saved FPU
/// registers). The lower triangle of the stored P is an exact mirror (see
/// [`crate::Kalman`]).
#[inline(always)]
fn upper_row<T: Scalar, const N: usize>(p: &SMatrix<T, N, N>, k: usize) -> [T; N] {
    core::array::from_fn(|e| if e >= k { p[(k, e)] } else { p[(e, k)] })
}

/// `acc += column * entry` (or `-=` with `SUBTRACT`), entry by entry, with
/// a structural one's product taken as the column itself; `entry` is read
/// only when it is free.
#[inline(always)]
fn update_column<T: Scalar, const N: usize, const SUBTRACT: bool>(
    acc: &mut [T; N],
    column: Option<&[T; N]>,
    one: bool,
    entry: impl FnOnce() -> T,
) {
    let Some(column) = column else {
        return;
    };
    if one {
        for (a, &v) in acc.iter_mut().zip(column) {
            if SUBTRACT {
                *a -= v;
            } else {
                *a += v;
            }
        }
    } else {
        let factor = entry();
        for (a, &v) in acc.iter_mut().zip(column) {
            let term = v * factor;
            if SUBTRACT {
                *a -= term;
            } else {
                *a += term;
            }
        }
    }
}

/// `factor`'s product with an entry: the entry itself when it is a
/// structural one, else `factor * entry`.
#[inline(always)]
fn times<T: Scalar>(factor: T, one: bool, entry: T) -> T {
    if one { factor } else { factor * entry }
}

/// The finiteness sum ([`crate::kernel::finite_sum`]) of the free entries,
/// the only ones the kernels read: zero exactly when they are all finite.
#[allow(clippy::eq_op)]
#[inline(always)]
pub(crate) fn free_sum<T: Scalar, const R: usize, const C: usize>(
    m: &SMatrix<T, R, C>,
    pattern: &Pattern<R, C>,
) -> T {
    if pattern.is_dense() {
        return crate::kernel::finite_sum(m.as_slice());
    }
    let mut acc = neg_zero::<T>();
    for i in 0..R {
        pattern.each_in_row(
            i,
            #[inline(always)]
            |j, one| {
                if !one {
                    let v = m[(i, j)];
                    acc += v - v;
                }
            },
        );
    }
    acc
}

/// F P F' + Q for a symmetric P and an F with structure `pattern`: the upper
/// triangle (diagonal included); the lower one is left unspecified.
///
/// Entry (i, j), i <= j, is `sum_e C[i,e] F[j,e]` over row j's non-zero e
/// (ascending) plus `Q[i,j]`, where `C[i,e] = sum_k F[i,k] P[k,e]` over row
/// i's non-zero k (ascending): the dense kernel's sums less their zero
/// terms, about 2 n nnz(F) multiply-adds instead of 1.5 n^3. Both products
/// run as whole-row updates, one per non-zero entry of F (row i of C is
/// `sum_k F[i,k] P[k,:]`, column j of the result `sum_e F[j,e] C[:,e]`):
/// the walk over the pattern's lists is paid once per entry of F, not once
/// per product, and the updates have fixed lengths that unroll.
#[inline(always)]
pub(crate) fn propagate<T: Scalar, const N: usize>(
    f: &SMatrix<T, N, N>,
    pattern: &Pattern<N, N>,
    p: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> SMatrix<T, N, N> {
    let mut c = SMatrix::<T, N, N>::from_element(neg_zero());
    for i in 0..N {
        let mut row = [neg_zero::<T>(); N];
        pattern.each_in_row(
            i,
            #[inline(always)]
            |k, one| {
                if pattern.is_scanned() {
                    let pk = upper_row(p, k);
                    update_column::<T, N, false>(&mut row, Some(&pk), one, || f[(i, k)]);
                } else {
                    // P[k,:] is P's column k (P is symmetric).
                    update_column::<T, N, false>(&mut row, column_of(p, k), one, || f[(i, k)]);
                }
            },
        );
        for (e, &v) in row.iter().enumerate() {
            c[(i, e)] = v;
        }
    }
    let mut out = SMatrix::<T, N, N>::from_element(neg_zero());
    for j in 0..N {
        let mut column = [neg_zero::<T>(); N];
        pattern.each_in_row(
            j,
            #[inline(always)]
            |e, one| {
                let ce = column_of(&c, e);
                update_column::<T, N, false>(&mut column, ce, one, || f[(j, e)]);
            },
        );
        // The whole column was formed (fixed length) and is stored whole:
        // the part below the diagonal is not read.
        if let (Some(dst), Some(qj)) = (out.data.0.get_mut(j), q.data.0.get(j)) {
            for ((d, &c), &qv) in dst.iter_mut().zip(&column).zip(qj) {
                *d = c + qv;
            }
        }
    }
    out
}

/// P' = F P F' + Q by F's declared structure: the dense kernel
/// ([`kernel::propagate`]) for a dense pattern, [`propagate`] otherwise. The
/// one choice the extended predict and its refusal both make.
#[inline(always)]
pub(crate) fn propagate_as_declared<T: Scalar, const N: usize>(
    f: &SMatrix<T, N, N>,
    pattern: &Pattern<N, N>,
    p: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> SMatrix<T, N, N> {
    if pattern.is_dense() {
        kernel::propagate(f, p, q)
    } else {
        propagate(f, pattern, p, q)
    }
}

/// Q = G diag(q) G' by G's declared structure (`columns`, transposed):
/// [`kernel::from_sources`] for a dense pattern, [`from_sources`] otherwise.
#[inline(always)]
pub(crate) fn from_sources_as_declared<T: Scalar, const N: usize>(
    g: &SMatrix<T, N, N>,
    columns: &Pattern<N, N>,
    q: &SVector<T, N>,
) -> SMatrix<T, N, N> {
    if columns.is_dense() {
        kernel::from_sources(g, q)
    } else {
        from_sources(g, columns, q)
    }
}

/// Q = G diag(q) G' for a G whose transposed structure is `columns` (row k
/// of `columns` lists the states noise source k drives): entry (i, j) is
/// `sum_k (G[i,k] q[k]) G[j,k]` over the sources that drive both i and j,
/// k ascending, from -0; exactly symmetric.
#[inline(always)]
pub(crate) fn from_sources<T: Scalar, const N: usize>(
    g: &SMatrix<T, N, N>,
    columns: &Pattern<N, N>,
    q: &SVector<T, N>,
) -> SMatrix<T, N, N> {
    let mut out = SMatrix::<T, N, N>::from_element(neg_zero());
    // Source by source (k ascending), so each entry's sum keeps its order.
    for k in 0..N {
        let qk = q[k];
        columns.each_in_row(
            k,
            #[inline(always)]
            |j, one_j| {
                columns.each_in_row(
                    k,
                    #[inline(always)]
                    |i, one_i| {
                        if i <= j {
                            // (G[i,k] q[k]) G[j,k], with a one's product taken as
                            // the other factor.
                            out[(i, j)] += match (one_i, one_j) {
                                (true, true) => qk,
                                (true, false) => g[(j, k)] * qk,
                                (false, true) => g[(i, k)] * qk,
                                (false, false) => g[(i, k)] * qk * g[(j, k)],
                            };
                        }
                    },
                );
            },
        );
    }
    for j in 1..N {
        for i in 0..j {
            out[(j, i)] = out[(i, j)];
        }
    }
    out
}

/// B = P H' (n x m) and S = H B + R (m x m, exactly symmetric) for an H with
/// structure `pattern` and an R with structure `r_pattern`:
/// `B[i,c] = sum_e P[e,i] H[c,e]` and `S[i,j] = sum_e H[i,e] B[e,j] + R[i,j]`
/// (i >= j, mirrored), over the rows' non-zero e, ascending, the addition of
/// a structural zero of R skipped.
#[inline(always)]
pub(crate) fn innovation<T: Scalar, const N: usize, const M: usize>(
    p: &SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    pattern: &Pattern<M, N>,
    r: &SMatrix<T, M, M>,
    r_pattern: &Pattern<M, M>,
) -> (SMatrix<T, N, M>, SMatrix<T, M, M>) {
    let mut b = SMatrix::<T, N, M>::from_element(neg_zero());
    for c in 0..M {
        // B[:,c] = sum_e H[c,e] P[:,e] (P's column e is its row e).
        let mut column = [neg_zero::<T>(); N];
        pattern.each_in_row(
            c,
            #[inline(always)]
            |e, one| {
                let pe = column_of(p, e);
                update_column::<T, N, false>(&mut column, pe, one, || h[(c, e)]);
            },
        );
        for (i, &v) in column.iter().enumerate() {
            b[(i, c)] = v;
        }
    }
    let mut s = SMatrix::<T, M, M>::from_element(neg_zero());
    for j in 0..M {
        for i in j..M {
            let mut v = neg_zero::<T>();
            pattern.each_in_row(
                i,
                #[inline(always)]
                |e, one| v += times(b[(e, j)], one, h[(i, e)]),
            );
            let v = match r_pattern.entry(i, j) {
                Entry::Zero => v,
                Entry::One => v + T::one(),
                Entry::Free => v + r[(i, j)],
            };
            s[(i, j)] = v;
            s[(j, i)] = v;
        }
    }
    (b, s)
}

/// Joseph's factored order (see [`crate::Joseph`]) for an H with structure
/// `pattern`, in place in `p` (upper triangle of the result): W = P - K B',
/// computed where it is read (the upper triangle and the columns H uses);
/// D = K R - W H' over the non-zero entries of R (`r_pattern`) and H;
/// P+ = W + D K'.
#[inline(always)]
pub(crate) fn joseph<T: Scalar, const N: usize, const M: usize>(
    p: &mut SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    pattern: &Pattern<M, N>,
    b: &SMatrix<T, N, M>,
    k: &SMatrix<T, N, M>,
    r: &SMatrix<T, M, M>,
    r_pattern: &Pattern<M, M>,
) {
    let w = p;
    for j in 0..N {
        // Below the diagonal, W is read only in the columns D reads.
        let below = pattern.column_used(j);
        for i in 0..N {
            if i > j && !below {
                break;
            }
            let mut v = w[(i, j)];
            for c in 0..M {
                v -= k[(i, c)] * b[(j, c)];
            }
            w[(i, j)] = v;
        }
    }
    let mut d = SMatrix::<T, N, M>::from_element(neg_zero());
    for c in 0..M {
        // D[:,c] = K R[:,c] - sum_e H[c,e] W[:,e].
        let mut column = [neg_zero::<T>(); N];
        for e in 0..M {
            let one = match r_pattern.entry(e, c) {
                Entry::Zero => continue,
                Entry::One => true,
                Entry::Free => false,
            };
            update_column::<T, N, false>(&mut column, column_of(k, e), one, || r[(e, c)]);
        }
        let w = &*w;
        pattern.each_in_row(
            c,
            #[inline(always)]
            |e, one| {
                let we = column_of(w, e);
                update_column::<T, N, true>(&mut column, we, one, || h[(c, e)]);
            },
        );
        for (i, &v) in column.iter().enumerate() {
            d[(i, c)] = v;
        }
    }
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

#[cfg(test)]
mod tests {
    use super::*;
    use crate::kernel;
    use crate::kernel::testing::Lcg;
    use crate::pattern::Entry;

    /// A random matrix that obeys `pattern`.
    fn obeying<T: Scalar, const R: usize, const C: usize>(
        g: &mut Lcg,
        pattern: &Pattern<R, C>,
    ) -> SMatrix<T, R, C> {
        let mut m: SMatrix<T, R, C> = g.matrix();
        for i in 0..R {
            for j in 0..C {
                match pattern.entry(i, j) {
                    Entry::Zero => m[(i, j)] = T::zero(),
                    Entry::One => m[(i, j)] = T::one(),
                    Entry::Free => {}
                }
            }
        }
        m
    }

    /// Equal as numbers on and above the diagonal, and bit for bit except
    /// for the sign of an exact zero (the only thing a skipped zero product
    /// can change).
    fn same_upper<T: Scalar, const R: usize, const C: usize>(
        a: &SMatrix<T, R, C>,
        b: &SMatrix<T, R, C>,
        upper_only: bool,
    ) -> bool {
        (0..C).all(|j| {
            let rows = if upper_only { j + 1 } else { R };
            (0..rows).all(|i| {
                let (x, y) = (a[(i, j)], b[(i, j)]);
                x == y && (x == T::zero() || x.to_f64().to_bits() == y.to_f64().to_bits())
            })
        })
    }

    /// A pattern with a random mix of zeros, ones and free entries.
    fn random_pattern<const R: usize, const C: usize>(g: &mut Lcg) -> Pattern<R, C> {
        let mut cells = [[Entry::Free; C]; R];
        for row in &mut cells {
            for cell in row.iter_mut() {
                let u = g.unit();
                *cell = if u < -0.2 {
                    Entry::Zero
                } else if u < 0.2 {
                    Entry::One
                } else {
                    Entry::Free
                };
            }
        }
        Pattern::from_cells(cells)
    }

    fn agree_with_dense<T: Scalar, const N: usize, const M: usize>(seed: u32) {
        let mut g = Lcg(seed);
        for round in 0..40 {
            let fp: Pattern<N, N> = if round == 0 {
                Pattern::DENSE
            } else {
                random_pattern(&mut g)
            };
            let hp: Pattern<M, N> = random_pattern(&mut g);
            let f = obeying::<T, N, N>(&mut g, &fp);
            let p = g.covariance::<T, N>();
            let q = g.covariance::<T, N>();
            let dense = kernel::propagate_dots(&f, &p, &q);
            assert!(
                same_upper(&propagate(&f, &fp, &p, &q), &dense, true),
                "predict n = {N}"
            );
            let gm = obeying::<T, N, N>(&mut g, &fp);
            let qv = SVector::<T, N>::from_fn(|i, _| {
                T::of(g.unit().abs() + f64::from(u8::from(i == 0)))
            });
            let dense = kernel::from_sources(&gm, &qv);
            assert!(
                same_upper(&from_sources(&gm, &fp.transpose(), &qv), &dense, false),
                "sources n = {N}"
            );
            let h = obeying::<T, M, N>(&mut g, &hp);
            // R with a random structure of its own (the kernels need no
            // definiteness), its declared entries in place.
            let rp: Pattern<M, M> = if round % 2 == 0 {
                Pattern::DENSE
            } else {
                random_pattern(&mut g)
            };
            let r = rp.apply(&g.covariance::<T, M>());
            let (bd, sd) = kernel::innovation_shaped::<T, N, M, false>(&p, &h, &r);
            let (bp, sp) = innovation(&p, &h, &hp, &r, &rp);
            assert!(
                same_upper(&bp, &bd, false) && same_upper(&sp, &sd, false),
                "innovation"
            );
            let k: SMatrix<T, N, M> = g.matrix();
            let mut dense = p;
            crate::form::joseph::<T, N, M, false>(&mut dense, &h, &bd, &k, &r);
            let mut sparse = p;
            joseph(&mut sparse, &h, &hp, &bd, &k, &r, &rp);
            assert!(same_upper(&sparse, &dense, true), "joseph n = {N}, m = {M}");
        }
    }

    #[test]
    fn patterned_kernels_compute_the_dense_numbers() {
        agree_with_dense::<f32, 3, 2>(31);
        agree_with_dense::<f32, 3, 1>(32);
        agree_with_dense::<f32, 15, 3>(33);
        agree_with_dense::<f64, 9, 3>(34);
        agree_with_dense::<f64, 24, 1>(35);
    }

    #[test]
    fn only_free_entries_are_tested_for_finiteness() {
        const P: Pattern<2, 2> = Pattern::IDENTITY.free(0, 1);
        let mut m = SMatrix::<f32, 2, 2>::new(f32::NAN, 2.0, f32::INFINITY, 1.0);
        assert_eq!(free_sum(&m, &P), 0.0);
        m[(0, 1)] = f32::NAN;
        assert!(free_sum(&m, &P).is_nan());
    }
}
