//! The steady-state problem a time-invariant scenario brings to a check:
//! its model lifted to the update period, or why there is none.

/// The LTI model between updates: (F^m, H stacked, sum F^i Q F^i', R
/// block diagonal, m steps per update).
pub type Lifted = (
    nalgebra::DMatrix<f64>,
    nalgebra::DMatrix<f64>,
    nalgebra::DMatrix<f64>,
    nalgebra::DMatrix<f64>,
    u64,
);

/// The steady-state problem of a time-invariant scenario, if it has one.
#[derive(Debug, Clone, Default)]
pub struct Steady {
    /// The model lifted to the update period.
    pub lifted: Option<Lifted>,
    /// Why there is none.
    pub note: Option<String>,
}
