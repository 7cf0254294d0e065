//! The Skerry sled's models as cairn's check builds them, shared by the
//! host test and the hour-long example binary.

#![allow(dead_code)]

use cairn_core::Scalar;
use cairn_core::nalgebra::{SVector, Vector3};
use cairn_host_check::engine::{Sensor, System};
use cairn_host_check::scenario::Scenario;
use skerry_sled::{
    ImuSample, MagYaw, PITCH, POSITION, PositionFix, ROLL, STANDARD_GRAVITY, STATES, SledInertial,
    VelocityFix, YAW,
};

/// The sled's noise figures (invented).
const GYRO_ARW: f64 = 1.5e-4;
const ACCEL_VRW: f64 = 1.0e-3;
const GYRO_BIAS_RW: f64 = 1.0e-5;
const ACCEL_BIAS_RW: f64 = 5.0e-5;

pub struct Sled;

impl System<STATES> for Sled {
    type Process<T: Scalar> = SledInertial<T>;
    fn process<T: Scalar>(&self) -> SledInertial<T> {
        SledInertial::new(
            T::of(GYRO_ARW),
            T::of(ACCEL_VRW),
            T::of(GYRO_BIAS_RW),
            T::of(ACCEL_BIAS_RW),
        )
    }
    fn input_len(&self) -> usize {
        6
    }
    fn input<T: Scalar>(&self, v: &[f64]) -> ImuSample<T> {
        ImuSample {
            gyro: Vector3::new(T::of(v[0]), T::of(v[1]), T::of(v[2])),
            accel: Vector3::new(T::of(v[3]), T::of(v[4]), T::of(v[5])),
        }
    }
    fn angle_states(&self) -> &[usize] {
        &[ROLL, YAW]
    }
    fn position_states(&self) -> &[usize] {
        &[POSITION, POSITION + 1, POSITION + 2]
    }
}

pub struct Position;
impl Sensor<STATES, 3> for Position {
    type Model<T: Scalar> = PositionFix<T>;
    fn model<T: Scalar>(&self) -> PositionFix<T> {
        PositionFix::new(T::of(0.02), T::of(0.05))
    }
    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, STATES>) {
        for i in 0..3 {
            z[i] -= origin[POSITION + i];
        }
    }
}

pub struct Velocity;
impl Sensor<STATES, 3> for Velocity {
    type Model<T: Scalar> = VelocityFix<T>;
    fn model<T: Scalar>(&self) -> VelocityFix<T> {
        VelocityFix::new(T::of(0.05), T::of(0.1))
    }
}

pub struct Yaw;
impl Sensor<STATES, 1> for Yaw {
    type Model<T: Scalar> = MagYaw<T>;
    fn model<T: Scalar>(&self) -> MagYaw<T> {
        MagYaw::new(T::of(0.03))
    }
}

/// A gentle tow (invented): a slow yaw weave, a small surge, the
/// accelerometer reading the specific force that holds the sled up.
pub fn tow(t: f64, out: &mut [f64]) {
    out[0] = 0.0;
    out[1] = 0.0;
    out[2] = 0.02 * (0.1 * t).sin();
    out[3] = 0.05 * (0.05 * t).cos();
    out[4] = 0.0;
    out[5] = -STANDARD_GRAVITY;
}

/// The simulated tow: 100 Hz, a position fix at 1 Hz, a velocity fix at
/// 5 Hz and a magnetometer yaw at 2 Hz, over `seconds`.
pub fn scenario(seconds: f64) -> Scenario<'static, STATES, Sled> {
    let mut p0 = [0.0; STATES];
    for (i, v) in p0.iter_mut().enumerate() {
        *v = match i {
            0..=2 => 0.25,
            3..=5 => 0.01,
            6..=8 => 1e-4,
            9..=11 => 1e-8,
            _ => 1e-6,
        };
    }
    let mut x0 = [0.0; STATES];
    x0[PITCH] = 0.01;
    Scenario::new("Skerry sled, simulated tow", Sled, x0, p0)
        .describe("Skerry sled strapdown inertial model (skerry-sled crate)")
        .step_hz(100.0)
        .horizon_s(seconds)
        .inputs(tow)
        .channel("position", Position, 1.0)
        .channel("velocity", Velocity, 5.0)
        .channel("mag_yaw", Yaw, 2.0)
}
