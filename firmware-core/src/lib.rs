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
//! - Generic over the scalar: the same code runs in `f32` and `f64`, with
//!   the same bits on host and target. Sine and cosine
//!   ([`Scalar::sin_cos_rad`]) never come from the platform's maths library:
//!   for `f32` they are the crate's own kernel, all f32 adds and multiplies
//!   (hardware on a Cortex-M4F; arguments beyond about 8043 rad go to libm's
//!   `sinf`/`cosf`), unless a feature below picks another; for `f64` they are
//!   libm's portable `sin`/`cos`.
//!
//! ## Example
//! ```
//! use cairn_core::{Kalman, Joseph, Outcome, pose::{HeadingFix, Odometry, PlanarOdometry}};
//! use cairn_core::nalgebra::{Matrix3, Vector1, Vector3};
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
//! ## Your own model
//! A model is two small trait implementations: [`ProcessModel`] (the
//! transition, its Jacobian and the process noise, here as independent
//! sources Q = G diag(q) G') and [`MeasurementModel`] (the expected
//! measurement h(x), its Jacobian and R). Written once over [`Scalar`], the same model runs in
//! `f32` on the target and in `f64` (or `f32`) on the host. A turntable
//! whose angle is read by a pair of Hall sensors:
//! ```
//! use cairn_core::nalgebra::{Matrix2, Vector2};
//! use cairn_core::{Joseph, Kalman, MeasurementModel, Outcome, ProcessModel, Scalar, wrap_angle};
//!
//! /// Angle (rad, wrapped) and rate (rad/s), driven by a commanded angular
//! /// acceleration; the torque disturbance is white, `accel_var` per step.
//! struct Turntable<T> {
//!     accel_var: T,
//! }
//!
//! impl<T: Scalar> Turntable<T> {
//!     /// The one noise source: an acceleration held over the step.
//!     fn sources(&self, dt: T) -> (Matrix2<T>, Vector2<T>) {
//!         let g = Matrix2::new(dt * dt * T::of(0.5), T::zero(), dt, T::zero());
//!         (g, Vector2::new(self.accel_var, T::zero()))
//!     }
//! }
//!
//! impl<T: Scalar> ProcessModel<T, 2> for Turntable<T> {
//!     type Input = T; // commanded angular acceleration, rad/s^2
//!     fn transition(&self, x: &Vector2<T>, u: &T, dt: T) -> Vector2<T> {
//!         Vector2::new(x[0] + x[1] * dt + *u * dt * dt * T::of(0.5), x[1] + *u * dt)
//!     }
//!     fn jacobian(&self, _x: &Vector2<T>, _u: &T, dt: T) -> Matrix2<T> {
//!         Matrix2::new(T::one(), dt, T::zero(), T::one())
//!     }
//!     fn noise(&self, _x: &Vector2<T>, _u: &T, dt: T) -> Matrix2<T> {
//!         let (g, q) = self.sources(dt);
//!         g * Matrix2::from_diagonal(&q) * g.transpose()
//!     }
//!     fn noise_sources(&self, _x: &Vector2<T>, _u: &T, dt: T) -> Option<(Matrix2<T>, Vector2<T>)> {
//!         Some(self.sources(dt))
//!     }
//!     fn normalize(&self, x: &mut Vector2<T>) {
//!         x[0] = wrap_angle(x[0]);
//!     }
//! }
//!
//! /// The two Hall channels read (cos, sin) of the angle, variance `var` each.
//! struct HallPair<T> {
//!     var: T,
//! }
//!
//! impl<T: Scalar> MeasurementModel<T, 2, 2> for HallPair<T> {
//!     fn expected(&self, x: &Vector2<T>) -> Vector2<T> {
//!         let (s, c) = x[0].sin_cos_rad();
//!         Vector2::new(c, s)
//!     }
//!     fn jacobian(&self, x: &Vector2<T>) -> Matrix2<T> {
//!         let (s, c) = x[0].sin_cos_rad();
//!         Matrix2::new(-s, T::zero(), c, T::zero())
//!     }
//!     fn noise(&self, _x: &Vector2<T>) -> Matrix2<T> {
//!         Matrix2::from_diagonal_element(self.var)
//!     }
//!     fn normalize(&self, x: &mut Vector2<T>) {
//!         x[0] = wrap_angle(x[0]);
//!     }
//! }
//!
//! let table = Turntable { accel_var: 0.04_f32 };
//! let hall = HallPair { var: 1e-4 };
//! let mut filter: Kalman<f32, 2, Joseph> =
//!     Kalman::try_new(Vector2::new(3.1, 0.5), Matrix2::from_diagonal_element(0.01))?;
//! for _ in 0..10 {
//!     filter.predict_with(&table, &0.0, 0.01)?;
//! }
//! // 0.05 rad on from 3.1 rad: past pi, so the angle wrapped to about -3.133.
//! assert!((filter.state()[0] + 3.1332).abs() < 1e-3);
//! let (s, c) = (-3.1332_f32).sin_cos_rad();
//! let outcome = filter.update_with(&hall, &Vector2::new(c, s), Some(9.21))?;
//! assert!(matches!(outcome, Outcome::Applied { .. }));
//! assert!(filter.covariance()[(0, 0)] < 1e-3);
//! # Ok::<(), cairn_core::FilterError>(())
//! ```
//! The example crates `examples/bramble-tug` (n = 5) and
//! `examples/skerry-sled` (n = 15) in the repository are fuller models.
//!
//! ## Covariance forms: why U-D is its own type
//! Joseph and conventional are a type parameter of one filter,
//! [`Kalman<T, N, F>`](Kalman) with `F:` [`CovarianceForm`]: both store P,
//! share the predict, the gain and the innovation solve, and differ only in
//! the formula that turns the prior P into the posterior
//! ([`CovarianceForm::posterior`]). The U-D filter, [`UdKalman`], stores the
//! factors U and D of P = U D U', not P. Its measurement update (Bierman's)
//! and its time update (Thornton's weighted Gram-Schmidt) are different
//! algorithms over the factors, not a posterior formula over a stored P, so
//! it cannot be a `CovarianceForm`; it is its own type. [`Estimator`] is the
//! one trait over all three, for code that switches form by changing one
//! type: [`Kalman::covariance`] borrows the stored P, while
//! [`UdKalman::rebuild_covariance`] computes U D U' (O(n^3)), and
//! [`Estimator::covariance_snapshot`] is the owned copy either way.
//!
//! ## nalgebra
//! The core is built on nalgebra 0.34 (default features off, with `libm`)
//! and re-exports it as [`nalgebra`]. Write `cairn_core::nalgebra::...` in
//! a model crate rather than depending on nalgebra yourself: a nalgebra of
//! another version (0.35, say) is a different crate, its `SMatrix` a
//! different type from the one the core's traits take, so the model would
//! not fit the traits, and a firmware that needs both compiles two copies.
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
//! `libm-trig` and `fast-trig` each choose the one `f32` sine and cosine, so
//! they exclude each other: enabling both is a compile error that says so
//! (rather than one silently winning). Enable at most one of them.
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

// The two trigonometry features each choose the f32 sine and cosine.
#[cfg(all(feature = "fast-trig", feature = "libm-trig"))]
compile_error!(
    "cairn-core: the features `fast-trig` and `libm-trig` both choose the f32 sine and cosine; enable one of them, not both"
);

mod check;
mod error;
mod estimator;
mod form;
mod health;
mod kalman;
mod kernel;
mod ldl;
mod model;
mod pattern;
mod patterned;
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
pub use kernel::from_sources as noise_from_sources;
pub use ldl::Ldl;
pub use model::{Dense, Linearized, MeasurementModel, ProcessModel};
/// The nalgebra the core is built on (0.34): models name its types through
/// this path, so they are the core's own.
pub use nalgebra;
pub use pattern::{Entry, Pattern};
pub use scalar::{Scalar, wrap_angle};
pub use steady::SteadyGain;
pub use ud::UdKalman;
