//! # skerry-sled
//!
//! A user model for cairn-core at n = 15, written the way a firmware
//! project writes its own: Skerry is an invented survey sled, towed across
//! snow and sea ice behind a tracked vehicle while its radar maps the ice
//! beneath. It carries a strapdown 3-axis gyro and accelerometer at about
//! 100 Hz, a satellite receiver (position and velocity fixes) and a
//! magnetometer (yaw).
//!
//! The state has the layout of the classic 15-state inertial filter with
//! sensor biases, written here as a total-state extended filter with Euler
//! angles:
//!
//! | indices | constant | state | unit |
//! |---|---|---|---|
//! | 0-2 | [`POSITION`] | position north, east, down in a local level frame | m |
//! | 3-5 | [`VELOCITY`] | velocity north, east, down | m/s |
//! | 6 | [`ROLL`] | roll (ZYX Euler), wrapped to (-pi, pi] | rad |
//! | 7 | [`PITCH`] | pitch; keep well inside +-90 degrees | rad |
//! | 8 | [`YAW`] | yaw from north, wrapped to (-pi, pi] | rad |
//! | 9-11 | [`GYRO_BIAS`] | gyro biases, body x, y, z | rad/s |
//! | 12-14 | [`ACCEL_BIAS`] | accelerometer biases, body x, y, z | m/s^2 |
//!
//! The process model is [`SledInertial`] (input [`ImuSample`]: gyro x, y, z,
//! then accelerometer x, y, z, body frame forward-right-down); the channels
//! are [`PositionFix`] (m = 3), [`VelocityFix`] (m = 3) and [`MagYaw`]
//! (m = 1, wrapped residual). Every model is generic over the core's
//! [`Scalar`](cairn_core::Scalar) and takes its sines and cosines from
//! [`Scalar::sin_cos_rad`](cairn_core::Scalar::sin_cos_rad), so a host run
//! computes the target's bits. No allocation, no panics, no maths library
//! calls of its own.
//!
//! Euler angles are singular at pitch +-90 degrees: the rate matrix holds
//! 1 / cos(pitch). A towed sled never comes near it; a vehicle that can
//! should carry its attitude as a quaternion or an error angle instead.
//!
//! ## Example
//! ```
//! use cairn_core::nalgebra::{SMatrix, SVector, Vector3};
//! use cairn_core::{Joseph, Kalman, Outcome};
//! use skerry_sled::{ImuSample, MagYaw, SledInertial, STANDARD_GRAVITY};
//!
//! let mut p0 = SMatrix::<f32, 15, 15>::identity() * 1e-4;
//! p0[(8, 8)] = 0.01;
//! let mut filter: Kalman<f32, 15, Joseph> = Kalman::try_new(SVector::zeros(), p0)?;
//! let imu = SledInertial::new(1.5e-4, 1.0e-3, 1.0e-5, 5.0e-5);
//! let at_rest = ImuSample {
//!     gyro: Vector3::zeros(),
//!     accel: Vector3::new(0.0, 0.0, -STANDARD_GRAVITY as f32),
//! };
//! filter.predict_with(&imu, &at_rest, 0.01)?;
//! let outcome = filter.update_with(&MagYaw::new(0.03), &SVector::<f32, 1>::new(0.02), None)?;
//! assert!(matches!(outcome, Outcome::Applied { .. }));
//! assert!(filter.covariance()[(8, 8)] < 0.01);
//! # Ok::<(), cairn_core::FilterError>(())
//! ```
#![no_std]
#![forbid(unsafe_code)]
#![deny(missing_docs)]

mod fixes;
mod strapdown;

pub use fixes::{MagYaw, PositionFix, VelocityFix};
pub use strapdown::{ImuSample, STANDARD_GRAVITY, SledInertial};

/// The number of states.
pub const STATES: usize = 15;
/// Index of the first position state (north; east and down follow), m.
pub const POSITION: usize = 0;
/// Index of the first velocity state (north; east and down follow), m/s.
pub const VELOCITY: usize = 3;
/// Index of roll, rad.
pub const ROLL: usize = 6;
/// Index of pitch, rad.
pub const PITCH: usize = 7;
/// Index of yaw, rad.
pub const YAW: usize = 8;
/// Index of the first gyro bias (body x; y and z follow), rad/s.
pub const GYRO_BIAS: usize = 9;
/// Index of the first accelerometer bias (body x; y and z follow), m/s^2.
pub const ACCEL_BIAS: usize = 12;

#[cfg(test)]
mod tests;
