//! Steady state of the filter's discrete algebraic Riccati equation,
//! solved in double-double with a residual check.

use nalgebra::DMatrix;

use super::NumericError;

/// The steady state of a linear time-invariant filter.
#[derive(Clone, Debug, PartialEq)]
pub struct Steady {
    /// Steady prior (predicted) covariance.
    pub prior: DMatrix<f64>,
    /// Steady posterior (updated) covariance.
    pub posterior: DMatrix<f64>,
    /// Steady gain.
    pub gain: DMatrix<f64>,
    /// Iterations used.
    pub iterations: usize,
    /// Relative residual of the Riccati equation at the solution.
    pub residual: f64,
}

/// Solves the filter DARE.
///
/// # Errors
/// [`NumericError`].
pub fn solve(
    f: &DMatrix<f64>,
    h: &DMatrix<f64>,
    q: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<Steady, NumericError> {
    let _ = (f, h, q, r);
    todo!()
}
