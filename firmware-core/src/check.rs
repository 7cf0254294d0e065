//! Cheap input checks shared by every operation: finiteness, symmetry and the
//! necessary conditions for a covariance to be positive (semi)definite.

use nalgebra::{SMatrix, SVector};

use crate::error::{FilterError, Operand, idx};
use crate::model::{Linearized, ProcessModel};
use crate::scalar::Scalar;

pub(crate) use crate::kernel::all_finite;

/// Every entry finite.
#[inline]
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
#[inline]
pub(crate) fn symmetric<T: Scalar, const N: usize>(
    a: &SMatrix<T, N, N>,
    what: Operand,
) -> Result<(), FilterError> {
    let tol = T::EPSILON * T::of(16.0);
    for j in 0..N {
        for i in 0..j {
            // A plain comparison: `max` on floats is a libm call on the target.
            let (ai, aj) = (a[(i, i)].abs(), a[(j, j)].abs());
            let scale = if ai > aj { ai } else { aj };
            if (a[(i, j)] - a[(j, i)]).abs() > tol * scale {
                return Err(FilterError::NotSymmetric(what));
            }
        }
    }
    Ok(())
}

/// A noise covariance: finite, symmetric, non-negative diagonal and every
/// 2 x 2 principal minor non-negative (necessary for positive
/// semidefiniteness, to within rounding; O(n^2)). With `strict`, the
/// diagonal must be positive.
#[inline]
pub(crate) fn noise<T: Scalar, const N: usize>(
    a: &SMatrix<T, N, N>,
    what: Operand,
    strict: bool,
) -> Result<(), FilterError> {
    finite(a, what)?;
    symmetric(a, what)?;
    let slack = T::EPSILON * T::of(16.0);
    for i in 0..N {
        let d = a[(i, i)];
        if d < T::zero() || (strict && d <= T::zero()) {
            return Err(FilterError::NotPositiveDefinite {
                operand: what,
                index: idx(i),
            });
        }
        for j in 0..i {
            // A rank-deficient block (one noise source driving two states)
            // has c^2 = a_ii a_jj exactly; allow the few roundings that
            // assembling it in floating point costs.
            let c = a[(i, j)];
            if c * c > a[(i, i)] * a[(j, j)] * (T::one() + slack) {
                return Err(FilterError::NotPositiveDefinite {
                    operand: what,
                    index: idx(i),
                });
            }
        }
    }
    Ok(())
}

/// The gate threshold, when given, must be finite and positive.
#[inline]
pub(crate) fn gate<T: Scalar>(g: Option<T>) -> Result<(), FilterError> {
    match g {
        Some(v) if !(v.finite() && v > T::zero()) => Err(FilterError::NonFinite(Operand::Gate)),
        _ => Ok(()),
    }
}

/// The result of an operation, before it is committed: finite state, finite
/// covariance with a positive diagonal.
#[inline]
pub(crate) fn posterior<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
) -> Result<(), FilterError> {
    if !all_finite(x.as_slice()) {
        return Err(FilterError::NonFinite(Operand::State));
    }
    for i in 0..N {
        let d = p[(i, i)];
        if !(d.finite() && d > T::zero()) {
            return Err(FilterError::CovarianceLost { index: idx(i) });
        }
    }
    if !all_finite(p.as_slice()) {
        return Err(FilterError::CovarianceLost { index: 0 });
    }
    Ok(())
}

/// One extended predict's model evaluation, checked: dt positive and
/// finite, the Jacobian finite, the propagated state finite and
/// normalised. Q (or its sources) is left for the caller's form to check.
#[inline]
pub(crate) fn linearize<T: Scalar, const N: usize, P: ProcessModel<T, N>>(
    model: &P,
    x: &SVector<T, N>,
    u: &P::Input,
    dt: T,
) -> Result<Linearized<T, N>, FilterError> {
    if !(dt.finite() && dt > T::zero()) {
        return Err(FilterError::InvalidTimeStep);
    }
    let mut lin = model.linearize(x, u, dt);
    finite(&lin.jacobian, Operand::Transition)?;
    finite(&lin.next, Operand::Control)?;
    model.normalize(&mut lin.next);
    Ok(lin)
}

/// Independent noise sources: finite, every variance non-negative.
#[inline]
pub(crate) fn sources<T: Scalar, const N: usize>(
    g: &SMatrix<T, N, N>,
    q: &SVector<T, N>,
) -> Result<(), FilterError> {
    finite(g, Operand::ProcessNoise)?;
    finite(q, Operand::ProcessNoise)?;
    match q.iter().position(|&v| v < T::zero()) {
        Some(i) => Err(FilterError::NotPositiveDefinite {
            operand: Operand::ProcessNoise,
            index: idx(i),
        }),
        None => Ok(()),
    }
}

/// x - offset, when both the offset and the result are finite.
#[inline]
pub(crate) fn shifted<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    offset: &SVector<T, N>,
) -> Result<SVector<T, N>, FilterError> {
    finite(offset, Operand::State)?;
    let moved = x - offset;
    finite(&moved, Operand::State)?;
    Ok(moved)
}
