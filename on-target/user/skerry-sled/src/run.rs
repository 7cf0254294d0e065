//! The sled's 15-state filter on a simulated tow: the same source runs on
//! the Cortex-M4F (`sled_bits`) and on the host (the root test binary
//! includes this file), so their bits can be compared step by step. The
//! truth is the sled's own f32 transition without noise; the fixes are the
//! truth plus seeded noise (invented scenario).

#[path = "../../common.rs"]
pub mod common;

use cairn_core::nalgebra::{SMatrix, SVector, Vector1, Vector3};
use cairn_core::{Joseph, Kalman, ProcessModel, Scalar};
use common::{Lcg, Tally};
use skerry_sled::{
    ImuSample, MagYaw, PITCH, POSITION, PositionFix, STANDARD_GRAVITY, STATES, SledInertial,
    VELOCITY, VelocityFix, YAW,
};

/// Predicts in the bit run (30 s at 100 Hz), on the target and the host.
pub const STEPS: u32 = 3_000;
/// The step, s (100 Hz).
pub const DT: f32 = 0.01;
/// Steps between position fixes (1 Hz).
pub const POSITION_EVERY: u32 = 100;
/// Steps between velocity fixes (5 Hz).
pub const VELOCITY_EVERY: u32 = 20;
/// Steps between magnetometer yaws (2 Hz).
pub const YAW_EVERY: u32 = 50;

/// Chi-square gates at 99.9% (1 and 3 degrees of freedom; handbook values,
/// e.g. NIST/SEMATECH e-Handbook, table of chi-square critical values).
pub const GATE_1: f32 = 10.83;
/// 3 degrees of freedom, 99.9%.
pub const GATE_3: f32 = 16.27;

/// The sled's models with its invented noise figures (the same as the
/// crate's host check).
pub struct Models {
    /// The strapdown process model.
    pub inertial: SledInertial<f32>,
    /// Satellite position fix.
    pub position: PositionFix<f32>,
    /// Satellite velocity fix.
    pub velocity: VelocityFix<f32>,
    /// Magnetometer yaw.
    pub yaw: MagYaw<f32>,
}

/// The models.
pub fn models() -> Models {
    Models {
        inertial: SledInertial::new(1.5e-4, 1.0e-3, 1.0e-5, 5.0e-5),
        position: PositionFix::new(0.02, 0.05),
        velocity: VelocityFix::new(0.05, 0.1),
        yaw: MagYaw::new(0.03),
    }
}

/// The start: level but for a pitch of 0.01 rad, P0 as the crate's check.
pub fn initial_state() -> SVector<f32, STATES> {
    let mut x0 = SVector::<f32, STATES>::zeros();
    x0[PITCH] = 0.01;
    x0
}

/// The filter at the start.
pub fn initial_filter() -> Kalman<f32, STATES, Joseph> {
    let p0 = SMatrix::<f32, STATES, STATES>::from_diagonal(&SVector::from_fn(|i, _| match i {
        0..=2 => 0.25,
        3..=5 => 0.01,
        6..=8 => 1e-4,
        9..=11 => 1e-8,
        _ => 1e-6,
    }));
    Kalman::new_unchecked(initial_state(), p0)
}

/// The tow's IMU sample at step `k` (invented): a slow yaw weave, a small
/// surge, the accelerometer reading the specific force that holds the sled
/// up.
pub fn tow(k: u32) -> ImuSample<f32> {
    let t = k as f32 * DT;
    let (s, _) = (0.1 * t).sin_cos_rad();
    let (_, c) = (0.05 * t).sin_cos_rad();
    ImuSample {
        gyro: Vector3::new(0.0, 0.0, 0.02 * s),
        accel: Vector3::new(0.05 * c, 0.0, -STANDARD_GRAVITY as f32),
    }
}

/// Runs `steps` predicts with the fixes at their rates, folding the
/// covariance and state bits into the tally's trace after every operation;
/// `checkpoint(step, trace)` runs after every `every` steps.
pub fn run(
    steps: u32,
    every: u32,
    mut checkpoint: impl FnMut(u32, u32),
) -> (Tally, Kalman<f32, STATES, Joseph>) {
    let m = models();
    let mut filter = initial_filter();
    let mut truth = initial_state();
    let mut noise = Lcg(0x51ed_5eed);
    let mut tally = Tally::new();
    let fold = |f: &Kalman<f32, STATES, Joseph>, t: &mut Tally| {
        t.fold(f.covariance().as_slice(), f.state().as_slice());
    };
    for k in 1..=steps {
        let u = tow(k);
        truth = m.inertial.transition(&truth, &u, DT);
        m.inertial.normalize(&mut truth);
        tally.predict(filter.predict_with(&m.inertial, &u, DT));
        fold(&filter, &mut tally);
        if k % VELOCITY_EVERY == 0 {
            let z = Vector3::from_fn(|i, _| truth[VELOCITY + i] + 0.05 * noise.signed_unit());
            tally.update(filter.update_with(&m.velocity, &z, Some(GATE_3)));
            fold(&filter, &mut tally);
        }
        if k % YAW_EVERY == 0 {
            let z = Vector1::new(truth[YAW] + 0.03 * noise.signed_unit());
            tally.update(filter.update_with(&m.yaw, &z, Some(GATE_1)));
            fold(&filter, &mut tally);
        }
        if k % POSITION_EVERY == 0 {
            let z = Vector3::from_fn(|i, _| truth[POSITION + i] + 0.02 * noise.signed_unit());
            tally.update(filter.update_with(&m.position, &z, Some(GATE_3)));
            fold(&filter, &mut tally);
        }
        if every > 0 && k % every == 0 {
            checkpoint(k, tally.trace);
        }
    }
    (tally, filter)
}
