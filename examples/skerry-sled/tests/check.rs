//! The Skerry sled's 15-state inertial models checked by cairn from the
//! crate's own host tests: every precision and covariance form against the
//! double-double reference, and the Jacobians against central differences.

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

struct Sled;

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

struct Position;
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

struct Velocity;
impl Sensor<STATES, 3> for Velocity {
    type Model<T: Scalar> = VelocityFix<T>;
    fn model<T: Scalar>(&self) -> VelocityFix<T> {
        VelocityFix::new(T::of(0.05), T::of(0.1))
    }
}

struct Yaw;
impl Sensor<STATES, 1> for Yaw {
    type Model<T: Scalar> = MagYaw<T>;
    fn model<T: Scalar>(&self) -> MagYaw<T> {
        MagYaw::new(T::of(0.03))
    }
}

/// A gentle tow (invented): a slow yaw weave, a small surge, the
/// accelerometer reading the specific force that holds the sled up.
fn tow(t: f64, out: &mut [f64]) {
    out[0] = 0.0;
    out[1] = 0.0;
    out[2] = 0.02 * (0.1 * t).sin();
    out[3] = 0.05 * (0.05 * t).cos();
    out[4] = 0.0;
    out[5] = -STANDARD_GRAVITY;
}

#[test]
fn the_fifteen_state_sled_passes_its_own_check() {
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
    let report = Scenario::new("Skerry sled, simulated tow", Sled, x0, p0)
        .describe("Skerry sled strapdown inertial model (skerry-sled crate)")
        .step_hz(100.0)
        .horizon_s(60.0)
        .inputs(tow)
        .channel("position", Position, 1.0)
        .channel("velocity", Velocity, 5.0)
        .channel("mag_yaw", Yaw, 2.0)
        .check()
        .expect("a consistent scenario");
    let text = report.text();
    // The f64 forms track the double-double reference to rounding level
    // (common practice), and the sled's own analytic 15 x 15 Jacobian and
    // its measurement Jacobians match central differences.
    let f64j = report.variant("f64 joseph").expect("ran");
    assert!(f64j.figures.max_relative_error < 1e-8, "{text}");
    let jac = report.run.jacobians.as_ref().expect("compared");
    assert!(jac.passes, "{text}");
    assert_eq!(jac.models.len(), 4);
    assert!(jac.models.iter().all(|m| m.points > 0), "{text}");
    assert_eq!(report.run.reach.len(), STATES);
    assert!(report.passes(), "{text}");
}
