//! The tug's cost probe for `cairn cost --probe`: one probe per filter
//! operation (the predict and the three fixes, Joseph form), each called
//! `CALLS` times on a filter driven from the recorded shift.
#![no_std]
#![no_main]

use bramble_tug::{HeadingFix, RadioFix, STATES, TugMotion, WheelSpeed};
use bramble_tug_probe::run::{self, GATE_1, GATE_2, common::Lcg};
use bramble_tug_probe::{SHIFT, run::INPUT};
use cairn_core::nalgebra::{Vector1, Vector2};
use cairn_core::{Joseph, Kalman};
use core::hint::black_box;

type Filter = Kalman<f32, STATES, Joseph>;

cairn_probe::predict_probe!(
    /// One predict: the tug's motion over one IMU sample.
    predict, Filter, TugMotion<f32>, STATES
);
cairn_probe::update_probe!(
    /// One wheel-speed update (m = 1).
    wheel_update, Filter, WheelSpeed<f32>, STATES, 1
);
cairn_probe::update_probe!(
    /// One radio position fix (m = 2).
    radio_update, Filter, RadioFix<f32>, STATES, 2
);
cairn_probe::update_probe!(
    /// One heading fix (m = 1, wrapped residual).
    heading_update, Filter, HeadingFix<f32>, STATES, 1
);

/// Calls per probe; `cairn cost` reads this figure from the output.
const CALLS: u32 = 16;

#[cairn_probe::entry]
fn main() -> ! {
    let m = run::models();
    let mut filter = run::initial_filter();
    let mut noise = Lcg(0x7e57_ab1e);
    let mut failures = 0u32;
    // Predicts on the shift's own inputs.
    let inputs = SHIFT.iter().filter(|r| r[0] == INPUT).take(CALLS as usize);
    for r in inputs {
        let u = bramble_tug::ImuSample {
            gyro: f32::from_bits(r[2]),
            accel: f32::from_bits(r[3]),
        };
        let dt = f32::from_bits(r[1]);
        failures += u32::from(predict(black_box(&mut filter), &m.motion, &u, dt).is_err());
    }
    for _ in 0..CALLS {
        let z = Vector1::new(filter.state()[3] + 0.03 * noise.signed_unit());
        let r = wheel_update(black_box(&mut filter), &m.wheel, &z, Some(GATE_1));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let x = *filter.state();
        let z = Vector2::new(
            x[0] + 0.1 * noise.signed_unit(),
            x[1] + 0.1 * noise.signed_unit(),
        );
        let r = radio_update(black_box(&mut filter), &m.radio, &z, Some(GATE_2));
        failures += u32::from(r.is_err());
    }
    for _ in 0..CALLS {
        let z = Vector1::new(filter.state()[2] + 0.02 * noise.signed_unit());
        let r = heading_update(black_box(&mut filter), &m.heading, &z, Some(GATE_1));
        failures += u32::from(r.is_err());
    }
    cairn_probe::finish(
        CALLS,
        failures,
        &["predict", "wheel_update", "radio_update", "heading_update"],
    )
}
