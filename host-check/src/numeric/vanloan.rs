//! Matrix exponential and Van Loan's (1978) discretisation of a continuous
//! linear model driven by white noise.

use nalgebra::DMatrix;

use super::NumericError;

/// Van Loan discretisation; returns `(Phi, Qd)`.
///
/// # Errors
/// [`NumericError`] on bad shapes or values.
pub fn discretize(
    a: &DMatrix<f64>,
    g: &DMatrix<f64>,
    qc: &DMatrix<f64>,
    dt: f64,
) -> Result<(DMatrix<f64>, DMatrix<f64>), NumericError> {
    let _ = (a, g, qc, dt);
    todo!()
}

/// Matrix exponential.
///
/// # Errors
/// [`NumericError`] on bad shapes or values.
pub fn expm(m: &DMatrix<f64>) -> Result<DMatrix<f64>, NumericError> {
    let _ = m;
    todo!()
}
