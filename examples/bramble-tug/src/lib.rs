//! # bramble-tug
//!
//! A user model for cairn-core, written the way a firmware project writes
//! its own: Bramble is an invented battery tug that pulls carts along the
//! aisles of a warehouse. It dead-reckons from a yaw-rate gyro and a forward
//! accelerometer at about 100 Hz and corrects with wheel-encoder speed, radio
//! position fixes from ranging beacons and heading fixes from ceiling
//! markers.
//!
//! ## States (n = 5)
//! | index | constant | state | unit |
//! |---|---|---|---|
//! | 0 | [`X`] | x, east in the warehouse frame | m |
//! | 1 | [`Y`] | y, north | m |
//! | 2 | [`HEADING`] | heading from the x axis, counter-clockwise, wrapped to (-pi, pi] | rad |
//! | 3 | [`SPEED`] | forward speed | m/s |
//! | 4 | [`GYRO_BIAS`] | gyro bias | rad/s |
//!
//! The process model is [`TugMotion`] (input [`ImuSample`]: `gyro`, then
//! `accel`); the channels are [`WheelSpeed`] (m = 1), [`RadioFix`] (m = 2)
//! and [`HeadingFix`] (m = 1, wrapped residual). Every model is generic over
//! the core's [`Scalar`](cairn_core::Scalar) (`f32` on the tug, `f64` for
//! checks) and takes its sine and cosine from
//! [`Scalar::sin_cos_rad`](cairn_core::Scalar::sin_cos_rad), so a host run
//! computes the target's bits. No allocation, no panics, no maths library
//! calls of its own.
//!
//! ## Example
//! ```
//! use bramble_tug::{ImuSample, RadioFix, TugMotion};
//! use cairn_core::nalgebra::{SMatrix, SVector};
//! use cairn_core::{Joseph, Kalman, Outcome};
//!
//! let x0 = SVector::<f32, 5>::from([0.0, 0.0, 0.0, 0.0, 0.0]);
//! let p0 = SMatrix::<f32, 5, 5>::from_diagonal(&SVector::from([0.01, 0.01, 1e-3, 1e-4, 1e-6]));
//! let mut filter: Kalman<f32, 5, Joseph> = Kalman::try_new(x0, p0)?;
//! let motion = TugMotion::new(2.9e-4, 4.0e-3, 2.0e-5);
//! filter.predict_with(&motion, &ImuSample { gyro: 0.02, accel: 0.5 }, 0.01)?;
//! let fix = RadioFix::new(0.1);
//! let outcome = filter.update_with(&fix, &SVector::<f32, 2>::new(0.01, -0.02), Some(9.21))?;
//! assert!(matches!(outcome, Outcome::Applied { .. }));
//! # Ok::<(), cairn_core::FilterError>(())
//! ```
//!
//! A recorded (invented) ten-minute run is in `data/bramble-shift.csv`,
//! made by `scripts/make-tug-log.py`; its format is `docs/log-format.md`.
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

mod fixes;
mod motion;

pub use fixes::{HeadingFix, RadioFix, WheelSpeed};
pub use motion::{ImuSample, TugMotion};

/// The number of states.
pub const STATES: usize = 5;
/// Index of x (m).
pub const X: usize = 0;
/// Index of y (m).
pub const Y: usize = 1;
/// Index of the heading (rad).
pub const HEADING: usize = 2;
/// Index of the forward speed (m/s).
pub const SPEED: usize = 3;
/// Index of the gyro bias (rad/s).
pub const GYRO_BIAS: usize = 4;

#[cfg(test)]
mod tests;
