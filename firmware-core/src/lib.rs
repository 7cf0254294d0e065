//! # cairn-core
//!
//! A fixed-size Kalman filter for microcontrollers: linear and extended
//! predict and update, Joseph-form, conventional or U-D factored covariance
//! update, a constant-gain filter, a chi-square innovation gate, a polled
//! health monitor and a ready planar pose model (x, y, heading from wheel
//! odometry with position and heading fixes).
//!
//! ## Guarantees
//! - `no_std`, no allocation: every matrix is a const-generic nalgebra
//!   `SMatrix` stored inline, so mismatched dimensions are compile errors.
//! - No panics on any input: bad input returns a [`FilterError`].
//! - Transactional: a refused or gated update leaves state and covariance
//!   bit-identical. [`FilterError::kind`] sorts every refusal into
//!   [`ErrorKind::Rejected`] (bad input) or [`ErrorKind::Unhealthy`] (the
//!   filter's own numbers), matched without a wildcard.
//! - Noise covariances are tested positive semidefinite by a shifted LDL'
//!   factorisation, not only pair by pair; every stored covariance has a
//!   positive finite diagonal, and the [`Checked`] form (or
//!   [`Kalman::check_definiteness`], or the [`HealthMonitor`]) factors it to
//!   catch an indefinite one that rounding left with a positive diagonal.
//! - Bounded time: every operation is straight-line loops over N and M.
//! - No explicit inverse and no square root in the covariance path (S is
//!   factored as LDL'); P is exactly symmetric after every operation.
//! - Generic over the scalar: the same code runs in `f32` and `f64`, and
//!   trigonometry goes through `libm`, so host and target compute the same
//!   bits.
//!
//! ## Example
//! ```
//! use cairn_core::{Kalman, Joseph, Outcome, pose::{HeadingFix, Odometry, PlanarOdometry}};
//! use nalgebra::{Matrix3, Vector1, Vector3};
//!
//! let mut filter: Kalman<f32, 3, Joseph> =
//!     Kalman::try_new(Vector3::zeros(), Matrix3::from_diagonal_element(0.01))?;
//! let motion = PlanarOdometry { speed_var: 4e-4, yaw_rate_var: 1e-4, heading_drift_var: 0.0 };
//! filter.predict_with(&motion, &Odometry { speed: 0.5, yaw_rate: 0.1 }, 0.01)?;
//! let outcome = filter.update_with(&HeadingFix { var: 1e-3 }, &Vector1::new(0.002), Some(6.63))?;
//! assert!(matches!(outcome, Outcome::Applied { .. }));
//! assert!(filter.covariance()[(2, 2)] < 0.01);
//! # Ok::<(), cairn_core::FilterError>(())
//! ```
//!
//! ## Features
//! - Default `f32` trigonometry is the crate's own single-precision sin/cos
//!   (Cody-Waite reduction and the Cephes minimax polynomials, all in f32):
//!   about 2 ulp, and no software f64 on a Cortex-M4F.
//! - `libm-trig`: libm's `sinf`/`cosf` instead (computed in f64 internally:
//!   a software routine on an M4).
//! - `fast-trig`: micromath's polynomial sin/cos for `f32` (cheapest, about
//!   1e-3 accurate; the verifier's report shows what that costs).
//! - `defmt`: `defmt::Format` for the error, outcome and health types.
//!
//! ## MSRV
//! Rust 1.95.
#![cfg_attr(not(test), no_std)]
#![forbid(unsafe_code)]
#![deny(missing_docs)]
#![warn(
    clippy::missing_errors_doc,
    clippy::missing_panics_doc,
    clippy::must_use_candidate
)]

mod check;
mod error;
mod estimator;
mod form;
mod health;
mod kalman;
mod kernel;
mod ldl;
mod model;
pub mod pose;
mod scalar;
mod steady;
// The default f32 sin/cos; unused when a feature picks another kernel.
#[cfg_attr(any(feature = "fast-trig", feature = "libm-trig"), allow(dead_code))]
mod trig;
mod ud;

pub use error::{ErrorKind, FilterError, Operand, Outcome};
pub use estimator::Estimator;
pub use form::{Checked, Conventional, CovarianceForm, Joseph};
pub use health::{HealthMonitor, HealthReport, NisBand, wilson_hilferty_bounds};
pub use kalman::Kalman;
pub use ldl::Ldl;
pub use model::{Linearized, MeasurementModel, ProcessModel};
pub use scalar::{Scalar, wrap_angle};
pub use steady::SteadyGain;
pub use ud::UdKalman;
