//! The sled's cost probe for `cairn cost --probe`: one probe per filter
//! operation (the 15-state predict and the three fixes, Joseph form), each
//! called `CALLS` times on a filter driven along the simulated tow; and the
//! predict and the position fix once more with the models' structural
//! patterns switched off (`Dense`), which prices the patterns.
#![no_std]
#![no_main]

use cairn_core::nalgebra::{Vector1, Vector3};
use cairn_core::{Dense, Joseph, Kalman};
use core::hint::black_box;
use skerry_sled::{MagYaw, PositionFix, STATES, SledInertial, VelocityFix};
use skerry_sled_probe::run::{self, DT, GATE_1, GATE_3, common::Lcg};

type Filter = Kalman<f32, STATES, Joseph>;

cairn_probe::predict_probe!(
    /// One strapdown predict over one IMU sample.
    predict, Filter, SledInertial<f32>, STATES
);
cairn_probe::predict_probe!(
    /// The same predict with the patterns off: dense kernels.
    dense_predict, Filter, Dense<SledInertial<f32>>, STATES
);
cairn_probe::update_probe!(
    /// The position fix with the pattern off: dense kernels.
    dense_position_update, Filter, Dense<PositionFix<f32>>, STATES, 3
);
cairn_probe::update_probe!(
    /// One satellite position fix (m = 3).
    position_update, Filter, PositionFix<f32>, STATES, 3
);
cairn_probe::update_probe!(
    /// One satellite velocity fix (m = 3).
    velocity_update, Filter, VelocityFix<f32>, STATES, 3
);
cairn_probe::update_probe!(
    /// One magnetometer yaw (m = 1, wrapped residual).
    mag_yaw_update, Filter, MagYaw<f32>, STATES, 1
);

/// Calls per probe; `cairn cost` reads this figure from the output.
const CALLS: u32 = 16;

#[cairn_probe::entry]
fn main() -> ! {
    let m = run::models();
    let mut filter = run::initial_filter();
    let mut noise = Lcg(0x5eed_0015);
    let mut failures = 0u32;
    let mut twin = filter;
    let dense = Dense(m.inertial);
    for k in 1..=CALLS {
        let u = run::tow(k);
        failures += u32::from(predict(black_box(&mut filter), &m.inertial, &u, DT).is_err());
        failures += u32::from(dense_predict(black_box(&mut twin), &dense, &u, DT).is_err());
    }
    let dense = Dense(m.position);
    for _ in 0..CALLS {
        let x = *twin.state();
        let z = Vector3::new(x[0] + 0.02, x[1] - 0.02, x[2] + 0.05);
        let r = dense_position_update(black_box(&mut twin), &dense, &z, Some(GATE_3));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *filter.state();
        let z = Vector3::new(
            x[0] + 0.02 * noise.signed_unit(),
            x[1] + 0.02 * noise.signed_unit(),
            x[2] + 0.05 * noise.signed_unit(),
        );
        let r = position_update(black_box(&mut filter), &m.position, &z, Some(GATE_3));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *filter.state();
        let z = Vector3::new(
            x[3] + 0.05 * noise.signed_unit(),
            x[4] + 0.05 * noise.signed_unit(),
            x[5] + 0.1 * noise.signed_unit(),
        );
        let r = velocity_update(black_box(&mut filter), &m.velocity, &z, Some(GATE_3));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let z = Vector1::new(filter.state()[8] + 0.03 * noise.signed_unit());
        let r = mag_yaw_update(black_box(&mut filter), &m.yaw, &z, Some(GATE_1));
        failures += u32::from(r.is_err());
    }
    cairn_probe::finish(
        CALLS,
        failures,
        &[
            "predict",
            "position_update",
            "velocity_update",
            "mag_yaw_update",
            "dense_predict",
            "dense_position_update",
        ],
    )
}
