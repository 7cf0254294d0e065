//! Calls every cost probe of `cairn_on_target::probe` a known number of times
//! with varying inputs, for `cairn cost`, which runs it under QEMU with
//! instruction tracing and attributes the executed instructions to each probe.
#![no_std]
#![no_main]

use cairn_core::pose::Odometry;
use cairn_core::{Conventional, Joseph, Kalman};
use cairn_on_target::scenario::{self, Lcg};
use cairn_on_target::{Line, exit, probe};
use core::hint::black_box;
use cortex_m_rt::entry;
use nalgebra::{SMatrix, SVector, Vector1, Vector2};

/// Calls per probe; `cairn cost` reads this figure from the output.
const CALLS: u32 = 16;

#[entry]
fn main() -> ! {
    let mut noise = Lcg(0x0bad_5eed);
    let mut failures = 0u32;

    // The pose filter, as in the scenario.
    let models = scenario::models();
    let mut pose = scenario::initial_filter();
    for _ in 0..CALLS {
        let odo = Odometry {
            speed: 0.6 + 0.02 * noise.signed_unit(),
            yaw_rate: 0.1 + 0.01 * noise.signed_unit(),
        };
        let r = probe::pose_predict(black_box(&mut pose), &models.motion, &odo, scenario::DT);
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *pose.state();
        let z = Vector2::new(
            x[0] + 0.05 * noise.signed_unit(),
            x[1] + 0.05 * noise.signed_unit(),
        );
        let r = probe::pose_position_update(black_box(&mut pose), &models.beacon, &z, Some(13.82));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let z = Vector1::new(pose.state()[2] + 0.02 * noise.signed_unit());
        let r = probe::pose_heading_update(black_box(&mut pose), &models.compass, &z, Some(10.83));
        failures += u32::from(r.is_err());
    }

    // A linear n = 9 model: three axes of position, velocity, acceleration;
    // measurements of the three positions.
    let dt = 0.01_f32;
    let mut f = SMatrix::<f32, 9, 9>::identity();
    let mut q = SMatrix::<f32, 9, 9>::zeros();
    let mut h = SMatrix::<f32, 3, 9>::zeros();
    for axis in 0..3 {
        let b = 3 * axis;
        f[(b, b + 1)] = dt;
        f[(b, b + 2)] = 0.5 * dt * dt;
        f[(b + 1, b + 2)] = dt;
        q[(b + 2, b + 2)] = 1e-4;
        h[(axis, b)] = 1.0;
    }
    let r = SMatrix::<f32, 3, 3>::from_diagonal_element(1e-2);
    let p0 = SMatrix::<f32, 9, 9>::identity();
    let mut joseph = Kalman::<f32, 9, Joseph>::new_unchecked(SVector::zeros(), p0);
    let mut conventional = Kalman::<f32, 9, Conventional>::new_unchecked(SVector::zeros(), p0);
    for _ in 0..CALLS {
        failures += u32::from(probe::linear9_predict(black_box(&mut joseph), &f, &q).is_err());
    }
    for _ in 0..CALLS {
        let z = SVector::<f32, 3>::from_fn(|_, _| 0.1 * noise.signed_unit());
        let res = probe::linear9_update3_joseph(black_box(&mut joseph), &z, &h, &r);
        failures += u32::from(res.is_err());
        let res = probe::linear9_update3_conventional(black_box(&mut conventional), &z, &h, &r);
        failures += u32::from(res.is_err());
    }
    Line::new()
        .text("cairn cost probe: calls ")
        .dec(CALLS)
        .text(" failures ")
        .dec(failures)
        .send();
    exit(failures == 0)
}
