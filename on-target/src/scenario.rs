//! The pose-filter run shared by the target and the host: an invented warehouse
//! tug ("Wren") with 200 Hz wheel odometry, 5 Hz beacon fixes and a 10 Hz compass.
//!
//! Every input is made from a 32-bit linear congruential generator by exact
//! integer-to-float conversions and IEEE-754 arithmetic, so the host and the
//! Cortex-M4F feed the filter the same f32 bits. This file depends only on
//! `cairn_core` and `nalgebra`: the host test includes it by path.

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use cairn_core::{Joseph, Kalman, Outcome, Scalar, wrap_angle};
use nalgebra::{Matrix3, Vector1, Vector2, Vector3};

/// Steps of the bit-exactness run (20 s of odometry at 200 Hz).
pub const STEPS: u32 = 4000;

/// Odometry period, s.
pub const DT: f32 = 0.005;

/// A 32-bit linear congruential generator with the multiplier and increment
/// published in Press et al., *Numerical Recipes* (2nd ed., 1992), ch. 7.1.
pub struct Lcg(pub u32);

impl Lcg {
    /// The next raw 32-bit value.
    pub fn next_u32(&mut self) -> u32 {
        self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        self.0
    }

    /// A value in [-1, 1): the top 24 bits as a signed integer times 2^-23,
    /// exact in f32 on every IEEE-754 machine.
    pub fn signed_unit(&mut self) -> f32 {
        let top = (self.next_u32() >> 8) as i32 - (1 << 23);
        top as f32 * (1.0 / 8_388_608.0)
    }
}

/// The filter's models for the tug.
pub struct Models {
    /// Odometry process model.
    pub motion: PlanarOdometry<f32>,
    /// Beacon position fix.
    pub beacon: PositionFix<f32>,
    /// Compass heading fix.
    pub compass: HeadingFix<f32>,
}

/// The tug's models: odometry noise 0.02 m/s and 0.01 rad/s per sample,
/// beacon 0.05 m, compass 0.02 rad (standard deviations; invented figures).
pub fn models() -> Models {
    Models {
        motion: PlanarOdometry {
            speed_var: 4e-4,
            yaw_rate_var: 1e-4,
            heading_drift_var: 1e-8,
        },
        beacon: PositionFix {
            var: Vector2::repeat(2.5e-3),
        },
        compass: HeadingFix { var: 4e-4 },
    }
}

/// The filter at the start of the run.
pub fn initial_filter() -> Kalman<f32, 3, Joseph> {
    Kalman::new_unchecked(
        Vector3::zeros(),
        Matrix3::from_diagonal(&Vector3::new(0.01, 0.01, 1e-3)),
    )
}

/// What one run produced: the final covariance and state as bit patterns,
/// a hash over the covariance bits after every step, and the outcome counts.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct Summary {
    /// Final covariance P, column-major, `f32::to_bits`.
    pub p: [u32; 9],
    /// Final state x, `f32::to_bits`.
    pub x: [u32; 3],
    /// FNV-1a (Fowler, Noll and Vo; common practice) over the bits of P
    /// after every step, in column-major order.
    pub trace: u32,
    /// Fixes applied.
    pub applied: u32,
    /// Fixes rejected by the gate.
    pub gated: u32,
    /// Operations refused with an error (expected: none).
    pub refused: u32,
}

fn fnv1a(mut h: u32, word: u32) -> u32 {
    for byte in word.to_le_bytes() {
        h ^= u32::from(byte);
        h = h.wrapping_mul(0x0100_0193);
    }
    h
}

/// Runs the tug for `steps` odometry steps and summarises the filter.
pub fn run(steps: u32) -> Summary {
    let m = models();
    let mut filter = initial_filter();
    let mut noise = Lcg(0x00c0_ffee);
    let mut truth = Vector3::<f32>::zeros();
    let mut summary = Summary {
        p: [0; 9],
        x: [0; 3],
        trace: 0x811c_9dc5,
        applied: 0,
        gated: 0,
        refused: 0,
    };
    let tally = |r: Result<Outcome<f32>, cairn_core::FilterError>, s: &mut Summary| match r {
        Ok(o) if o.is_applied() => s.applied += 1,
        Ok(_) => s.gated += 1,
        Err(_) => s.refused += 1,
    };
    for k in 0..steps {
        // Speed steps through 0.4, 0.6, 0.8 m/s every 2.5 s; the yaw rate
        // is a triangle wave of +-0.3 rad/s with a 10 s period.
        let speed = 0.4 + 0.2 * ((k / 500) % 3) as f32;
        let phase = (k % 2000) as f32 * (1.0 / 500.0);
        let yaw_rate = 0.3
            * if phase < 2.0 {
                phase - 1.0
            } else {
                3.0 - phase
            };
        let (s, c) = (truth[2] + yaw_rate * DT * 0.5).sin_cos_rad();
        truth = Vector3::new(
            truth[0] + speed * DT * c,
            truth[1] + speed * DT * s,
            wrap_angle(truth[2] + yaw_rate * DT),
        );
        let odo = Odometry {
            speed: speed + 0.02 * noise.signed_unit(),
            yaw_rate: yaw_rate + 0.01 * noise.signed_unit(),
        };
        if filter.predict_with(&m.motion, &odo, DT).is_err() {
            summary.refused += 1;
        }
        if k % 40 == 39 {
            let z = Vector2::new(
                truth[0] + 0.05 * noise.signed_unit(),
                truth[1] + 0.05 * noise.signed_unit(),
            );
            // 13.82: chi-square 0.999 quantile, 2 dof (common practice).
            tally(filter.update_with(&m.beacon, &z, Some(13.82)), &mut summary);
        }
        if k % 20 == 19 {
            let z = Vector1::new(wrap_angle(truth[2] + 0.02 * noise.signed_unit()));
            // 10.83: chi-square 0.999 quantile, 1 dof (common practice).
            tally(
                filter.update_with(&m.compass, &z, Some(10.83)),
                &mut summary,
            );
        }
        for v in filter.covariance().iter() {
            summary.trace = fnv1a(summary.trace, v.to_bits());
        }
    }
    for (dst, v) in summary.p.iter_mut().zip(filter.covariance().iter()) {
        *dst = v.to_bits();
    }
    for (dst, v) in summary.x.iter_mut().zip(filter.state().iter()) {
        *dst = v.to_bits();
    }
    summary
}

/// Steps of the nine-state run (6 s at 100 Hz).
pub const LINEAR_STEPS: u32 = 600;

/// What the nine-state run produced: a hash of the covariance bits after
/// every step for each form (Joseph, conventional, U-D), and the count of
/// refused operations (expected: none).
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub struct LinearSummary {
    /// FNV-1a over P's bits after every step: Joseph, conventional, U-D
    /// (the U-D filter's packed factors).
    pub traces: [u32; 3],
    /// Operations refused with an error.
    pub refused: u32,
}

/// A nine-state run with the core's general kernels (n = 9, m = 3), which
/// take different loop shapes on a host and on a microcontroller: an
/// invented survey sled ("Plover") with position, velocity and a drifting
/// velocity-sensor bias per axis, 100 Hz steps, a 3-axis position fix every
/// 10 steps and a biased velocity reading every 5 (invented figures).
pub fn run_linear(steps: u32) -> LinearSummary {
    use cairn_core::{Conventional, UdKalman};
    use nalgebra::{SMatrix, SVector};
    const DT9: f32 = 0.01;
    let f = SMatrix::<f32, 9, 9>::from_fn(|i, j| match (i, j) {
        _ if i == j => 1.0,
        (0..=2, 3..=5) if j == i + 3 => DT9,
        _ => 0.0,
    });
    let q = SMatrix::<f32, 9, 9>::from_diagonal(&SVector::<f32, 9>::from_fn(|i, _| match i {
        0..=2 => 1e-6,
        3..=5 => 1e-4,
        _ => 1e-8,
    }));
    let h_pos = SMatrix::<f32, 3, 9>::from_fn(|i, j| if j == i { 1.0 } else { 0.0 });
    let h_vel =
        SMatrix::<f32, 3, 9>::from_fn(|i, j| if j == i + 3 || j == i + 6 { 1.0 } else { 0.0 });
    let r_pos = SMatrix::<f32, 3, 3>::from_fn(|i, j| if i == j { 4e-4 } else { 1e-4 });
    let r_vel = SMatrix::<f32, 3, 3>::from_diagonal_element(2.5e-3);
    let p0 = SMatrix::<f32, 9, 9>::from_diagonal(&SVector::<f32, 9>::from_fn(|i, _| match i {
        0..=2 => 1.0,
        3..=5 => 0.25,
        _ => 0.01,
    }));
    let x0 = SVector::<f32, 9>::zeros();
    let mut joseph = Kalman::<f32, 9, Joseph>::new_unchecked(x0, p0);
    let mut conventional = Kalman::<f32, 9, Conventional>::new_unchecked(x0, p0);
    let Ok(mut ud) = UdKalman::<f32, 9>::try_new(x0, p0) else {
        return LinearSummary {
            traces: [0; 3],
            refused: 1,
        };
    };
    let mut noise = Lcg(0x51ed_0009);
    let mut truth = SVector::<f32, 9>::from_fn(|i, _| match i {
        3 => 0.5,
        4 => -0.2,
        6 => 0.03,
        _ => 0.0,
    });
    let mut summary = LinearSummary {
        traces: [0x811c_9dc5; 3],
        refused: 0,
    };
    for k in 0..steps {
        truth = f * truth;
        for i in 3..6 {
            truth[i] += 0.01 * noise.signed_unit();
        }
        let mut refused = 0;
        refused += u32::from(joseph.predict(&f, &q).is_err());
        refused += u32::from(conventional.predict(&f, &q).is_err());
        refused += u32::from(ud.predict(&f, &q).is_err());
        let fix = |h: &SMatrix<f32, 3, 9>, sd: f32, noise: &mut Lcg| {
            let mut z = h * truth;
            for v in z.iter_mut() {
                *v += sd * noise.signed_unit();
            }
            z
        };
        if k % 10 == 9 {
            let z = fix(&h_pos, 0.02, &mut noise);
            refused += u32::from(joseph.update(&z, &h_pos, &r_pos, None).is_err());
            refused += u32::from(conventional.update(&z, &h_pos, &r_pos, None).is_err());
            refused += u32::from(ud.update(&z, &h_pos, &r_pos, None).is_err());
        }
        if k % 5 == 4 {
            let z = fix(&h_vel, 0.05, &mut noise);
            refused += u32::from(joseph.update(&z, &h_vel, &r_vel, None).is_err());
            refused += u32::from(conventional.update(&z, &h_vel, &r_vel, None).is_err());
            refused += u32::from(ud.update(&z, &h_vel, &r_vel, None).is_err());
        }
        summary.refused += refused;
        let mats = [joseph.covariance(), conventional.covariance(), ud.factors()];
        for (trace, m) in summary.traces.iter_mut().zip(mats) {
            for v in m.iter() {
                *trace = fnv1a(*trace, v.to_bits());
            }
        }
    }
    summary
}
