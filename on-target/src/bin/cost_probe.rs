//! Calls every cost probe of `cairn_on_target::probe` a known number of times
//! with varying inputs, for `cairn cost`, which runs it under QEMU with
//! instruction tracing and attributes the executed instructions to each probe.
#![no_std]
#![no_main]

use cairn_core::pose::Odometry;
use cairn_core::{Checked, HealthMonitor, Joseph, Kalman, UdKalman};
use cairn_on_target::scenario::{self, Lcg};
use cairn_on_target::{Line, exit, probe};
use core::hint::black_box;
use cortex_m_rt::entry;
use nalgebra::{Matrix2, SMatrix, Vector1, Vector2};

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

    // The same pose operations with the definiteness check on, and the
    // check alone.
    let mut checked = scenario::initial_filter().with_form::<Checked<Joseph>>();
    for _ in 0..CALLS {
        let odo = Odometry {
            speed: 0.6 + 0.02 * noise.signed_unit(),
            yaw_rate: 0.1 + 0.01 * noise.signed_unit(),
        };
        let r = probe::pose_predict_checked(
            black_box(&mut checked),
            &models.motion,
            &odo,
            scenario::DT,
        );
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *checked.state();
        let z = Vector2::new(
            x[0] + 0.05 * noise.signed_unit(),
            x[1] + 0.05 * noise.signed_unit(),
        );
        let r = probe::pose_position_update_checked(
            black_box(&mut checked),
            &models.beacon,
            &z,
            Some(13.82),
        );
        failures += u32::from(r.is_err());
    }
    let plain = checked.with_form::<Joseph>();
    for _ in 0..CALLS {
        failures += u32::from(probe::definiteness3(black_box(&plain)).is_err());
    }
    // The health monitor, a full window of invented NIS values: linked here
    // for the no-panic proof, not a probe (its correlation asymmetry and
    // chi-square bounds take square roots, which `cairn cost` flags in any
    // probe).
    let Ok(mut monitor) = HealthMonitor::<f32, 16>::try_with_quantile(1.96) else {
        exit(false)
    };
    for _ in 0..16 {
        monitor.record_nis(1.0 + 0.5 * noise.signed_unit(), 1);
    }
    let report = black_box(&monitor).assess(black_box(&plain).covariance());
    failures += u32::from(!report.positive_definite);
    // A 9-state covariance: I plus a small symmetric perturbation.
    let p9 = SMatrix::<f32, 9, 9>::from_fn(|i, j| {
        let base = if i == j { 1.0 } else { 0.0 };
        base + 0.01 / (1.0 + (i + j) as f32)
    });
    let nine = Kalman::<f32, 9, Joseph>::new_unchecked(nalgebra::SVector::zeros(), p9);
    for _ in 0..CALLS {
        failures += u32::from(probe::definiteness9(black_box(&nine)).is_err());
    }

    // The floors: the same arithmetic with no checks (not a filter).
    let start = scenario::initial_filter();
    let (mut x, mut p) = (*start.state(), *start.covariance());
    for _ in 0..CALLS {
        let odo = Odometry {
            speed: 0.6 + 0.02 * noise.signed_unit(),
            yaw_rate: 0.1 + 0.01 * noise.signed_unit(),
        };
        probe::pose_predict_unchecked(
            black_box(&mut x),
            &mut p,
            &models.motion,
            &odo,
            scenario::DT,
        );
    }
    for _ in 0..CALLS {
        let z = Vector2::new(
            x[0] + 0.05 * noise.signed_unit(),
            x[1] + 0.05 * noise.signed_unit(),
        );
        probe::pose_position_update_unchecked(black_box(&mut x), &mut p, &Matrix2::from_diagonal(&models.beacon.var), &z);
    }
    failures += u32::from(!(p.iter().all(|v| v.is_finite()) && p[(0, 0)] > 0.0));

    // The same operations on the U-D factored filter, from the same start.
    let start = scenario::initial_filter();
    let Ok(mut ud) = UdKalman::try_new(*start.state(), *start.covariance()) else {
        exit(false)
    };
    for _ in 0..CALLS {
        let odo = Odometry {
            speed: 0.6 + 0.02 * noise.signed_unit(),
            yaw_rate: 0.1 + 0.01 * noise.signed_unit(),
        };
        let r = probe::pose_ud_predict(black_box(&mut ud), &models.motion, &odo, scenario::DT);
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *ud.state();
        let z = Vector2::new(
            x[0] + 0.05 * noise.signed_unit(),
            x[1] + 0.05 * noise.signed_unit(),
        );
        let r = probe::pose_ud_position_update(black_box(&mut ud), &models.beacon, &z, Some(13.82));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let z = Vector1::new(ud.state()[2] + 0.02 * noise.signed_unit());
        let r = probe::pose_ud_heading_update(black_box(&mut ud), &models.compass, &z, Some(10.83));
        failures += u32::from(r.is_err());
    }

    // The linear probes for the sizes the build asked for (CAIRN_COST_SIZES).
    failures += probe::run_linear(&mut noise, CALLS);
    Line::new()
        .text("cairn cost probe: calls ")
        .dec(CALLS)
        .text(" failures ")
        .dec(failures)
        .send();
    exit(failures == 0)
}
