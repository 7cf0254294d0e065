//! The tug's filter replaying rows of its recorded shift: the same source
//! runs on the Cortex-M4F (`tug_bits`) and on the host (the root test
//! binary includes this file), so their bits can be compared step by step.

#[path = "../../common.rs"]
pub mod common;

use bramble_tug::{HeadingFix, ImuSample, RadioFix, STATES, TugMotion, WheelSpeed};
use cairn_core::nalgebra::{SMatrix, SVector, Vector1, Vector2};
use cairn_core::{Joseph, Kalman};
use common::Tally;

/// Row kinds of the table (the same numbers as `log_rows.rs`).
pub const INPUT: u32 = 0;
/// A wheel-speed reading.
pub const WHEEL: u32 = 1;
/// A radio position fix.
pub const RADIO: u32 = 2;
/// A heading fix.
pub const HEADING: u32 = 3;

/// Chi-square gates at 99.9% (1 and 2 degrees of freedom; handbook values,
/// e.g. NIST/SEMATECH e-Handbook, table of chi-square critical values).
pub const GATE_1: f32 = 10.83;
/// 2 degrees of freedom, 99.9%.
pub const GATE_2: f32 = 13.82;

/// The tug's models with the noise figures the recorded shift was made
/// with (its header comment; invented sensors).
pub struct Models {
    /// The process model.
    pub motion: TugMotion<f32>,
    /// Wheel speed.
    pub wheel: WheelSpeed<f32>,
    /// Radio position fix.
    pub radio: RadioFix<f32>,
    /// Heading fix.
    pub heading: HeadingFix<f32>,
}

/// The models.
pub fn models() -> Models {
    Models {
        motion: TugMotion::new(2.9e-4, 4.0e-3, 2.0e-5),
        wheel: WheelSpeed::new(0.03),
        radio: RadioFix::new(0.10),
        heading: HeadingFix::new(0.02),
    }
}

/// The filter at the log's suggested start (its header prints pi/2 as
/// 1.570796): x0 = (6, 4, pi/2, 0, 0),
/// P0 = diag(0.01, 0.01, 1e-4, 1e-4, 1e-5).
pub fn initial_filter() -> Kalman<f32, STATES, Joseph> {
    let x0 = SVector::<f32, STATES>::from([6.0, 4.0, core::f32::consts::FRAC_PI_2, 0.0, 0.0]);
    let p0 = SMatrix::<f32, STATES, STATES>::from_diagonal(&SVector::from([
        0.01, 0.01, 1e-4, 1e-4, 1e-5,
    ]));
    Kalman::new_unchecked(x0, p0)
}

/// Replays `rows` (`[kind, a, b, c]`, f32 bits) through the Joseph-form
/// filter, folding the covariance and state bits into the tally's trace
/// after every row; `checkpoint(row, trace)` runs after every `every` rows.
pub fn run(
    rows: &[[u32; 4]],
    every: usize,
    mut checkpoint: impl FnMut(usize, u32),
) -> (Tally, Kalman<f32, STATES, Joseph>) {
    let m = models();
    let mut filter = initial_filter();
    let mut tally = Tally::new();
    for (i, row) in rows.iter().enumerate() {
        let [kind, a, b, c] = *row;
        let (a, b, c) = (f32::from_bits(a), f32::from_bits(b), f32::from_bits(c));
        match kind {
            INPUT => {
                let u = ImuSample { gyro: b, accel: c };
                tally.predict(filter.predict_with(&m.motion, &u, a));
            }
            WHEEL => tally.update(filter.update_with(&m.wheel, &Vector1::new(a), Some(GATE_1))),
            RADIO => tally.update(filter.update_with(&m.radio, &Vector2::new(a, b), Some(GATE_2))),
            HEADING => {
                tally.update(filter.update_with(&m.heading, &Vector1::new(a), Some(GATE_1)));
            }
            _ => tally.refused += 1,
        }
        tally.fold(filter.covariance().as_slice(), filter.state().as_slice());
        if every > 0 && (i + 1) % every == 0 {
            checkpoint(i + 1, tally.trace);
        }
    }
    (tally, filter)
}
