//! Cheap input checks shared by every operation: finiteness, symmetry and the
//! necessary conditions for a covariance to be positive (semi)definite.

use nalgebra::{SMatrix, SVector};

use crate::error::{FilterError, Operand, idx};
use crate::kernel::{finite_sum, neg_zero};
use crate::ldl::{Ldl, failing_pivot};
use crate::model::{Linearized, ProcessModel};
use crate::pattern::Pattern;
use crate::patterned::{free_sum, from_sources_as_declared, propagate_as_declared};
use crate::scalar::Scalar;

pub(crate) use crate::kernel::all_finite;

/// Several operands finite, tested with one comparison: each part is an
/// operand's finiteness sum ([`finite_sum`], [`free_sum`]) with the operand
/// it names; the first part whose sum is not zero names the error (looked
/// at only on the error path, from the sums already in registers).
#[inline(always)]
pub(crate) fn finite_all<T: Scalar, const K: usize>(
    parts: [(T, Operand); K],
) -> Result<(), FilterError> {
    let mut total = neg_zero::<T>();
    for (sum, _) in parts {
        total += sum;
    }
    if total == T::zero() {
        Ok(())
    } else {
        Err(first_non_finite(parts))
    }
}

/// The operand of the first part whose sum is not zero.
#[cold]
fn first_non_finite<T: Scalar, const K: usize>(parts: [(T, Operand); K]) -> FilterError {
    let named = parts.iter().find(|(sum, _)| *sum != T::zero());
    FilterError::NonFinite(named.map_or(Operand::Innovation, |&(_, what)| what))
}

/// Every entry finite.
#[inline(always)]
pub(crate) fn finite<T: Scalar, const R: usize, const C: usize>(
    a: &SMatrix<T, R, C>,
    what: Operand,
) -> Result<(), FilterError> {
    if all_finite(a.as_slice()) {
        Ok(())
    } else {
        Err(FilterError::NonFinite(what))
    }
}

/// Symmetric to within a few roundings of its diagonal (common practice:
/// inputs assembled in floating point may differ by an ulp across the
/// diagonal).
#[inline(always)]
pub(crate) fn symmetric<T: Scalar, const N: usize>(
    a: &SMatrix<T, N, N>,
    what: Operand,
) -> Result<(), FilterError> {
    if pairs(a, false).0 {
        return Err(FilterError::NotSymmetric(what));
    }
    Ok(())
}

/// One branch-free pass over the pairs i < j: `(asymmetric, minor)`, where
/// `asymmetric` is set when some |a_ij - a_ji| exceeds 16 eps times the
/// larger of |a_ii|, |a_jj|, and `minor` (computed only when `minors` is
/// set) when some 2 x 2 principal minor is negative beyond 16 eps. No
/// early exit: the pass costs the same whatever the values, and a host
/// runs its comparisons without waiting on branches.
#[inline(always)]
fn pairs<T: Scalar, const N: usize>(a: &SMatrix<T, N, N>, minors: bool) -> (bool, bool) {
    let tol = T::EPSILON * T::of(16.0);
    let grow = T::one() + tol;
    let mut asymmetric = false;
    let mut minor = false;
    for j in 1..N {
        let ajj = a[(j, j)];
        for i in 0..j {
            let aii = a[(i, i)];
            // A plain comparison: `max` on floats is a libm call on the target.
            let (ai, aj) = (aii.abs(), ajj.abs());
            let scale = if ai > aj { ai } else { aj };
            let c = a[(i, j)];
            asymmetric |= (c - a[(j, i)]).abs() > tol * scale;
            // A rank-deficient block (one noise source driving two states)
            // has c^2 = a_ii a_jj exactly; allow the few roundings that
            // assembling it in floating point costs.
            if minors {
                minor |= c * c > aii * ajj * grow;
            }
        }
    }
    (asymmetric, minor)
}

/// A noise covariance: finite, symmetric, non-negative diagonal, every
/// 2 x 2 principal minor non-negative (O(n^2), to within rounding), then
/// positive semidefinite by an LDL' factorisation shifted by a few roundings
/// of its diagonal ([`crate::ldl::failing_pivot`]; about n^3 / 6
/// multiply-adds and n - 1 divides). The minors alone are necessary, not
/// sufficient: Q = [[1, -0.6, -0.6], [-0.6, 1, -0.6], [-0.6, -0.6, 1]] passes
/// them with an eigenvalue of -0.2. With `strict`, the diagonal must be
/// positive.
#[inline(always)]
pub(crate) fn noise<T: Scalar, const N: usize>(
    a: &SMatrix<T, N, N>,
    what: Operand,
    strict: bool,
) -> Result<(), FilterError> {
    finite(a, what)?;
    let (asymmetric, minor) = pairs(a, true);
    if asymmetric {
        return Err(FilterError::NotSymmetric(what));
    }
    let mut diagonal = false;
    for i in 0..N {
        let d = a[(i, i)];
        diagonal |= d < T::zero() || (strict && d <= T::zero());
    }
    if diagonal || minor {
        return Err(FilterError::NotPositiveDefinite {
            operand: what,
            index: idx(first_indefinite(*a, strict)),
        });
    }
    if let Some(j) = failing_pivot(a, true) {
        return Err(FilterError::NotPositiveDefinite {
            operand: what,
            index: idx(j),
        });
    }
    Ok(())
}

/// A computed covariance (upper triangle read) that is positive definite by
/// an LDL' factorisation with [`crate::Ldl::factor`]'s pivot rule: the test
/// the diagonal alone cannot make (an indefinite matrix can have a positive
/// diagonal).
///
/// # Errors
/// [`FilterError::CovarianceLost`] at the first failing pivot.
// Never inlined: the filters call it only with the check switched on, and
// inlined into every operation it would grow them for the unchecked case.
#[inline(never)]
pub(crate) fn definite<T: Scalar, const N: usize>(p: &SMatrix<T, N, N>) -> Result<(), FilterError> {
    match failing_pivot(p, false) {
        Some(j) => Err(FilterError::CovarianceLost { index: idx(j) }),
        None => Ok(()),
    }
}

/// The row of the first failing diagonal entry or 2 x 2 minor, in the order
/// rows are read (only on the error path; by value, so the matrix need only
/// be written to memory when this runs).
#[cold]
fn first_indefinite<T: Scalar, const N: usize>(a: SMatrix<T, N, N>, strict: bool) -> usize {
    let grow = T::one() + T::EPSILON * T::of(16.0);
    for i in 0..N {
        let d = a[(i, i)];
        if d < T::zero() || (strict && d <= T::zero()) {
            return i;
        }
        for j in 0..i {
            // The entry `pairs` tested: the upper one, (j, i).
            let c = a[(j, i)];
            if c * c > a[(j, j)] * a[(i, i)] * grow {
                return i;
            }
        }
    }
    0
}

/// A measurement noise covariance R with structure `pattern` (its declared
/// entries already in place, [`Pattern::apply`]): symmetric to within
/// rounding and positive definite by [`Ldl::factor`]'s pivot rule. A
/// diagonal pattern needs no symmetry test, and its variances are the
/// pivots ([`Ldl::definite_diagonal`]).
#[inline(always)]
pub(crate) fn measurement_noise<T: Scalar, const M: usize>(
    r: &SMatrix<T, M, M>,
    pattern: &Pattern<M, M>,
) -> Result<(), FilterError> {
    let definite = if pattern.is_diagonal() {
        Ldl::definite_diagonal(r)
    } else {
        symmetric(r, Operand::MeasurementNoise)?;
        Ldl::definite(r)
    };
    definite.map_err(|j| FilterError::NotPositiveDefinite {
        operand: Operand::MeasurementNoise,
        index: idx(j),
    })
}

/// The gate threshold, when given, must be finite and positive.
#[inline(always)]
pub(crate) fn gate<T: Scalar>(g: Option<T>) -> Result<(), FilterError> {
    match g {
        Some(v) => positive(v, Operand::Gate),
        None => Ok(()),
    }
}

/// A finite, positive number: NaN or infinity is [`FilterError::NonFinite`],
/// zero or below [`FilterError::NotPositive`].
#[inline(always)]
pub(crate) fn positive<T: Scalar>(v: T, what: Operand) -> Result<(), FilterError> {
    if v.finite() && v > T::zero() {
        Ok(())
    } else {
        Err(not_positive(v, what))
    }
}

/// Which of the two ways `v` failed (only on the error path).
#[cold]
fn not_positive<T: Scalar>(v: T, what: Operand) -> FilterError {
    if v.finite() {
        FilterError::NotPositive(what)
    } else {
        FilterError::NonFinite(what)
    }
}

/// The result of an operation, before it is committed: finite state, finite
/// covariance (upper triangle: the lower one mirrors it) with a positive
/// diagonal. One pass without early exits; the failing row is looked up
/// only on the error path.
#[inline(always)]
pub(crate) fn posterior<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
) -> Result<(), FilterError> {
    if !all_finite(x.as_slice()) {
        return Err(FilterError::NonFinite(Operand::State));
    }
    covariance(p)
}

/// A computed covariance (upper triangle read): finite with a positive
/// diagonal, as [`posterior`] without the state.
#[inline(always)]
pub(crate) fn covariance<T: Scalar, const N: usize>(
    p: &SMatrix<T, N, N>,
) -> Result<(), FilterError> {
    let mut positive = true;
    for i in 0..N {
        positive &= p[(i, i)] > T::zero();
    }
    if !(positive && crate::kernel::upper_finite(p)) {
        return Err(FilterError::CovarianceLost {
            index: idx(first_lost(*p)),
        });
    }
    Ok(())
}

/// Whether an extended predict's covariance may be committed: its upper
/// triangle finite with a positive diagonal, tested in one pass after the
/// arithmetic (the propagated state and the noise variances were tested
/// before it).
///
/// Finiteness is tested by [`plain_finite_sum`] of the upper triangle (with
/// the state's: 8 Cortex-M4F cycles off the pose predict). A covariance
/// whose entries are all finite but sum past the largest finite value is
/// therefore refused as lost, which needs variances within a factor
/// N (N + 1) / 2 of overflow (about 6e37 in f32 at N = 3), where a filter
/// has no arithmetic left anyway.
///
/// The free entries of F and G need no test of their own: a NaN or
/// infinity in one of them makes a diagonal entry of F P F' + G diag(q) G'
/// NaN or infinite (every term of P'[i,i] involves row i of F, and of G;
/// infinity times zero is NaN, and no sum makes NaN or infinity finite
/// again: IEEE 754-2019, section 7.2). When it fails, [`predict_refusal`]
/// names what failed. The caller returns that error at once (`return
/// Err(..)`, not `?` on a `Result`): the compiler cannot tell that the
/// cold call's error is never `Ok`, and with `?` it keeps a path that goes
/// on after the call, committing the result.
///
/// A `carried` row (a unit row of F, [`Pattern::unit_rows`]) is not tested
/// for positivity: the patterned kernels make its variance P[i,i] + Q[i,i]
/// exactly, P[i,i] is positive (every stored covariance has a positive
/// diagonal: tested on every commit, or vouched for through
/// `Kalman::new_unchecked`), Q[i,i] is not negative once the variances
/// pass, and a rounded sum of a positive and a non-negative value is never
/// below the positive one (IEEE 754-2019 section 4.3: every operation is
/// correctly rounded, so rounding is monotone). Its finiteness is tested
/// with the rest.
///
/// The sum is written out rather than passed to [`plain_finite_sum`] as an
/// iterator: a flattened iterator kept bounds checks, a panic path the
/// on-target link proof refuses. The two tests are joined by `&`, not `&&`:
/// with `&&` the compiler split them into branches placed between the
/// products, which on a Cortex-M4F held two more values in callee-saved
/// registers (260 against 252 cycles on the pose predict).
#[inline(always)]
#[allow(clippy::eq_op)]
pub(crate) fn predicted_sound<T: Scalar, const N: usize>(
    p: &SMatrix<T, N, N>,
    carried: &[bool; N],
) -> bool {
    let mut positive = true;
    let mut total = neg_zero::<T>();
    for j in 0..N {
        positive &= carried[j] || p[(j, j)] > T::zero();
        for i in 0..j + 1 {
            total += p[(i, j)];
        }
    }
    (total - total == T::zero()) & positive
}

/// Why an extended predict failed its tests (the state and variances before
/// the products, then [`predicted_sound`]): the model is evaluated again,
/// at the same point, to name what failed, in a fixed order: F, the state,
/// G, the variances, then the predicted covariance, formed again from the
/// prior `p` by the same kernels (the same bits). Recomputing here keeps the
/// predicted covariance out of memory on the predict's own path: on a
/// Cortex-M4F the pose predict then needs no stack frame.
#[cold]
#[inline(never)]
pub(crate) fn predict_refusal<T: Scalar, const N: usize, P: ProcessModel<T, N>>(
    model: &P,
    prior: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
    u: &P::Input,
    dt: T,
) -> FilterError {
    let Linearized {
        next,
        jacobian,
        noise,
        sources,
    } = model.linearize(prior, u, dt);
    let f = free_sum(&jacobian, &P::JACOBIAN_PATTERN);
    let x = finite_sum(next.as_slice());
    let g = sources
        .as_ref()
        .map_or(neg_zero(), |(g, _)| free_sum(g, &P::SOURCES_PATTERN));
    if f + x + g != T::zero() {
        return first_non_finite([
            (f, Operand::Transition),
            (x, Operand::Control),
            (g, Operand::ProcessNoise),
        ]);
    }
    let q = match sources {
        Some((g, q)) => {
            if variance_sum(&q) != T::zero() {
                return bad_variances(q);
            }
            from_sources_as_declared(&g, const { &P::SOURCES_PATTERN.transpose() }, &q)
        }
        None => noise,
    };
    let predicted = propagate_as_declared(&jacobian, const { &P::JACOBIAN_PATTERN }, p, &q);
    FilterError::CovarianceLost {
        index: idx(first_lost(predicted)),
    }
}

/// The first diagonal entry that is not a positive finite variance, or 0
/// when the diagonal is sound and the loss is off it.
#[cold]
fn first_lost<T: Scalar, const N: usize>(p: SMatrix<T, N, N>) -> usize {
    (0..N)
        .find(|&i| !(p[(i, i)].finite() && p[(i, i)] > T::zero()))
        .unwrap_or(0)
}

/// The time step of an extended predict: positive and finite.
#[inline(always)]
pub(crate) fn time_step<T: Scalar>(dt: T) -> Result<(), FilterError> {
    if dt.finite() && dt > T::zero() {
        Ok(())
    } else {
        Err(FilterError::InvalidTimeStep)
    }
}

/// One extended predict's model evaluation, checked in one pass with one
/// branch: the free entries of the Jacobian (those the kernels read) and
/// the propagated state finite and, for noise given as sources, the free
/// entries of G finite and every variance finite and non-negative; then
/// the state is normalised. Q given whole is left for the caller to check.
/// Takes the parts of the model's [`crate::model::Linearized`] rather than
/// the whole: callers take it apart at once, so each part stays in
/// registers where it fits instead of the whole evaluation being built in
/// memory.
#[inline(always)]
pub(crate) fn linearized<T: Scalar, const N: usize, P: ProcessModel<T, N>>(
    model: &P,
    jacobian: &SMatrix<T, N, N>,
    pattern: &Pattern<N, N>,
    next: &mut SVector<T, N>,
    sources: Option<(&SMatrix<T, N, N>, &Pattern<N, N>, &SVector<T, N>)>,
) -> Result<(), FilterError> {
    let f = free_sum(jacobian, pattern);
    let x = finite_sum(next.as_slice());
    let (g, q) = match sources {
        Some((g, g_pattern, q)) => (free_sum(g, g_pattern), variance_sum(q)),
        None => (neg_zero(), neg_zero()),
    };
    if f + x + g + q != T::zero() {
        finite_all([
            (f, Operand::Transition),
            (x, Operand::Control),
            (g, Operand::ProcessNoise),
        ])?;
        if let Some((_, _, q)) = sources {
            return Err(bad_variances(*q));
        }
    }
    model.normalize(next);
    Ok(())
}

/// Zero exactly when every variance is finite and non-negative: |v| - v is
/// +0 for a finite v >= 0, positive for a negative v or -inf, NaN for NaN
/// or +inf, so one sum and one comparison test both conditions.
#[inline(always)]
pub(crate) fn variance_sum<T: Scalar, const N: usize>(q: &SVector<T, N>) -> T {
    let mut acc = neg_zero::<T>();
    for &v in q.iter() {
        acc += v.abs() - v;
    }
    acc
}

/// Independent noise sources: the free entries of G (those the kernels
/// read) finite, every variance finite and non-negative.
#[inline(always)]
pub(crate) fn sources<T: Scalar, const N: usize>(
    g: &SMatrix<T, N, N>,
    pattern: &Pattern<N, N>,
    q: &SVector<T, N>,
) -> Result<(), FilterError> {
    finite_all([(free_sum(g, pattern), Operand::ProcessNoise)])?;
    if variance_sum(q) == T::zero() {
        Ok(())
    } else {
        Err(bad_variances(*q))
    }
}

/// Which of the variances failed, and how (only on the error path; by
/// value, so the variances are written to memory only when this runs).
#[cold]
fn bad_variances<T: Scalar, const N: usize>(q: SVector<T, N>) -> FilterError {
    if !all_finite(q.as_slice()) {
        return FilterError::NonFinite(Operand::ProcessNoise);
    }
    FilterError::NotPositiveDefinite {
        operand: Operand::ProcessNoise,
        index: idx(q.iter().position(|&v| v < T::zero()).unwrap_or(0)),
    }
}

/// x - offset, when both the offset and the result are finite.
#[inline(always)]
pub(crate) fn shifted<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    offset: &SVector<T, N>,
) -> Result<SVector<T, N>, FilterError> {
    finite(offset, Operand::State)?;
    let moved = x - offset;
    finite(&moved, Operand::State)?;
    Ok(moved)
}

#[cfg(test)]
mod tests {
    use super::*;
    use nalgebra::Matrix3;

    // IEEE 754-2019, section 7.2: NaN and infinity propagate through sums,
    // so one sum of the upper triangle finds either anywhere in it.
    #[test]
    fn predicted_sound_refuses_any_non_finite_upper_entry() {
        let base = Matrix3::<f32>::new(4.0, 0.5, -0.25, 0.5, 3.0, 0.125, -0.25, 0.125, 2.0);
        assert!(predicted_sound(&base, &[false; 3]));
        for (i, j) in [(0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2)] {
            for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
                let mut p = base;
                p[(i, j)] = bad;
                assert!(
                    !predicted_sound(&p, &[false; 3]),
                    "({i}, {j}) = {bad} passed"
                );
            }
        }
        let mut p = base;
        p[(1, 1)] = 0.0;
        assert!(!predicted_sound(&p, &[false; 3]), "a zero variance passed");
    }

    // A carried row (a unit row of F) has its positivity from the prior's
    // and is not tested; its finiteness still is.
    #[test]
    fn predicted_sound_skips_only_the_positivity_of_carried_rows() {
        let mut p = Matrix3::<f32>::new(4.0, 0.5, -0.25, 0.5, 3.0, 0.125, -0.25, 0.125, 0.0);
        assert!(!predicted_sound(&p, &[false; 3]));
        assert!(predicted_sound(&p, &[false, false, true]));
        assert!(!predicted_sound(&p, &[true, true, false]));
        p[(2, 2)] = f32::INFINITY;
        assert!(!predicted_sound(&p, &[true; 3]));
    }

    // The documented price of the plain sum: finite entries whose sum
    // overflows are refused; just below it they pass.
    #[test]
    fn predicted_sound_refuses_an_overflowing_sum_only() {
        let big = f32::MAX / 4.0;
        let near = Matrix3::<f32>::from_diagonal_element(big);
        assert!(
            predicted_sound(&near, &[false; 3]),
            "3 x MAX/4 on the diagonal refused"
        );
        let over = Matrix3::<f32>::new(big, big, 0.0, big, big, big, 0.0, big, big);
        assert!(
            !predicted_sound(&over, &[false; 3]),
            "a sum of 5 x MAX/4 passed"
        );
    }
}
