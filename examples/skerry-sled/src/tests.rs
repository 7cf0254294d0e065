//! A minute of an invented tow run through cairn-core's filters: the
//! covariance stays positive definite and the errors stay consistent with it.

extern crate std;

use std::vec::Vec;

use cairn_core::nalgebra::{Cholesky, Matrix3, SMatrix, SVector, Vector3};
use cairn_core::{
    Dense, Joseph, Kalman, MeasurementModel, Outcome, ProcessModel, Scalar, UdKalman, wrap_angle,
};

use crate::{
    ImuSample, MagYaw, PITCH, PositionFix, ROLL, STANDARD_GRAVITY, SledInertial, VelocityFix, YAW,
};

/// SplitMix64 (Steele, Lea and Flood, OOPSLA 2014) with Box-Muller normals.
struct Rng(u64);

impl Rng {
    fn uniform(&mut self) -> f64 {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        ((z >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    fn normal(&mut self) -> f64 {
        let (u1, u2) = (self.uniform(), self.uniform());
        (-2.0 * u1.ln()).sqrt() * (core::f64::consts::TAU * u2).cos()
    }
}

const GYRO_ARW: f64 = 1.5e-4;
const ACCEL_VRW: f64 = 1.0e-3;
const GYRO_BIAS_RW: f64 = 1.0e-5;
const ACCEL_BIAS_RW: f64 = 5.0e-5;
/// Standard deviations of the start: position, velocity, roll and pitch,
/// yaw, gyro biases, accelerometer biases.
const START_STD: [f64; 6] = [0.05, 0.05, 0.02, 0.05, 3e-3, 0.05];

/// The invented tow's attitude (roll, pitch, yaw) and its rates at time t.
fn attitude(t: f64) -> ([f64; 3], [f64; 3]) {
    let att = [
        0.06 * (0.9 * t).sin(),
        0.1 * (0.25 * t + 0.5).sin(),
        0.4 + 0.02 * t + 0.1 * (0.3 * t).sin(),
    ];
    let rate = [
        0.054 * (0.9 * t).cos(),
        0.025 * (0.25 * t + 0.5).cos(),
        0.02 + 0.03 * (0.3 * t).cos(),
    ];
    (att, rate)
}

/// Velocity (north, east, down) and acceleration at time t: the sled
/// follows its yaw at a varying speed and heaves gently.
fn motion(t: f64) -> (Vector3<f64>, Vector3<f64>) {
    let (att, rate) = attitude(t);
    let (s, ds) = (1.5 + 0.3 * (0.2 * t).sin(), 0.06 * (0.2 * t).cos());
    let (sy, cy) = att[2].sin_cos();
    let v = Vector3::new(s * cy, s * sy, 0.04 * (0.5 * t).sin());
    let a = Vector3::new(
        ds * cy - s * sy * rate[2],
        ds * sy + s * cy * rate[2],
        0.02 * (0.5 * t).cos(),
    );
    (v, a)
}

/// Body-to-level rotation composed from the three elementary rotations
/// (written apart from the model's expanded form).
fn rotation(att: [f64; 3]) -> Matrix3<f64> {
    let (sr, cr) = att[0].sin_cos();
    let (sp, cp) = att[1].sin_cos();
    let (sy, cy) = att[2].sin_cos();
    let rx = Matrix3::new(1.0, 0.0, 0.0, 0.0, cr, -sr, 0.0, sr, cr);
    let ry = Matrix3::new(cp, 0.0, sp, 0.0, 1.0, 0.0, -sp, 0.0, cp);
    let rz = Matrix3::new(cy, -sy, 0.0, sy, cy, 0.0, 0.0, 0.0, 1.0);
    rz * ry * rx
}

/// Body rate and specific force at time t: w = W(roll, pitch) (Euler
/// rates) (Titterton and Weston 2004, from memory) and f = C' (a - g).
fn body(t: f64) -> (Vector3<f64>, Vector3<f64>) {
    let (att, rate) = attitude(t);
    let (sr, cr) = att[0].sin_cos();
    let (sp, cp) = att[1].sin_cos();
    let w = Vector3::new(
        rate[0] - sp * rate[2],
        cr * rate[1] + sr * cp * rate[2],
        -sr * rate[1] + cr * cp * rate[2],
    );
    let (_, a) = motion(t);
    let f = rotation(att).transpose() * (a - Vector3::new(0.0, 0.0, STANDARD_GRAVITY));
    (w, f)
}

struct Step {
    dt: f64,
    imu: ImuSample<f64>,
    fix: Option<(Vector3<f64>, Vector3<f64>, f64)>,
    truth: SVector<f64, 15>,
}

/// Sixty seconds at a jittered 100 Hz, the sensors averaging over each
/// step (1 ms sub-steps), with position, velocity and yaw fixes at 1 Hz.
fn scenario(seed: u64) -> (Vec<Step>, SVector<f64, 15>) {
    let mut rng = Rng(seed);
    let mut pos = Vector3::new(0.0, 0.0, 0.0);
    let mut bg = Vector3::from_fn(|_, _| START_STD[4] * rng.normal());
    let mut ba = Vector3::from_fn(|_, _| START_STD[5] * rng.normal());
    let truth_at = |t: f64, pos: &Vector3<f64>, bg: &Vector3<f64>, ba: &Vector3<f64>| {
        let (att, _) = attitude(t);
        let (v, _) = motion(t);
        let mut x = SVector::<f64, 15>::zeros();
        x.fixed_rows_mut::<3>(0).copy_from(pos);
        x.fixed_rows_mut::<3>(3).copy_from(&v);
        x[ROLL] = att[0];
        x[PITCH] = att[1];
        x[YAW] = wrap_angle(att[2]);
        x.fixed_rows_mut::<3>(9).copy_from(bg);
        x.fixed_rows_mut::<3>(12).copy_from(ba);
        x
    };
    let x0 = truth_at(0.0, &pos, &bg, &ba);
    let mut t = 0.0;
    let mut steps = Vec::new();
    for k in 0..6000 {
        let dt = 0.01 + 0.001 * (2.0 * rng.uniform() - 1.0);
        let subs = (dt / 0.001).round() as usize;
        let h = dt / subs as f64;
        let (mut w_sum, mut f_sum) = (Vector3::zeros(), Vector3::zeros());
        for _ in 0..subs {
            let mid = t + 0.5 * h;
            let (w, f) = body(mid);
            w_sum += w * h;
            f_sum += f * h;
            pos += motion(mid).0 * h;
            t += h;
        }
        for i in 0..3 {
            bg[i] += GYRO_BIAS_RW * dt.sqrt() * rng.normal();
            ba[i] += ACCEL_BIAS_RW * dt.sqrt() * rng.normal();
        }
        let noise = |rng: &mut Rng, n: f64| Vector3::from_fn(|_, _| n / dt.sqrt() * rng.normal());
        let imu = ImuSample {
            gyro: w_sum / dt + bg + noise(&mut rng, GYRO_ARW),
            accel: f_sum / dt + ba + noise(&mut rng, ACCEL_VRW),
        };
        let truth = truth_at(t, &pos, &bg, &ba);
        let fix = (k % 100 == 99).then(|| {
            let p = Vector3::new(
                truth[0] + 0.02 * rng.normal(),
                truth[1] + 0.02 * rng.normal(),
                truth[2] + 0.05 * rng.normal(),
            );
            let v = Vector3::new(
                truth[3] + 0.05 * rng.normal(),
                truth[4] + 0.05 * rng.normal(),
                truth[5] + 0.1 * rng.normal(),
            );
            (p, v, wrap_angle(truth[YAW] + 0.03 * rng.normal()))
        });
        steps.push(Step {
            dt,
            imu,
            fix,
            truth,
        });
    }
    (steps, x0)
}

fn start(truth: &SVector<f64, 15>, rng: &mut Rng) -> (SVector<f64, 15>, SMatrix<f64, 15, 15>) {
    let std = |i: usize| match i {
        0..=2 => START_STD[0],
        3..=5 => START_STD[1],
        6 | 7 => START_STD[2],
        8 => START_STD[3],
        9..=11 => START_STD[4],
        _ => START_STD[5],
    };
    let p0 = SMatrix::<f64, 15, 15>::from_fn(|i, j| if i == j { std(i) * std(i) } else { 0.0 });
    // Biases start at zero (their truth was drawn from P0); the rest from
    // the truth plus a draw from P0.
    let x0 = SVector::<f64, 15>::from_fn(|i, _| {
        if i >= 9 {
            0.0
        } else {
            truth[i] + std(i) * rng.normal()
        }
    });
    (x0, p0)
}

/// Runs the scenario in scalar T through a Joseph-form filter; returns the
/// NEES after each fix, checking P positive definite after every operation
/// (nalgebra's Cholesky, a general-purpose reference).
fn run<T: Scalar>(steps: &[Step], x0: &SVector<f64, 15>, p0: &SMatrix<f64, 15, 15>) -> Vec<f64> {
    let of = |v: f64| T::of(v);
    let mut filter: Kalman<T, 15, Joseph> = Kalman::try_new(x0.map(of), p0.map(of)).unwrap();
    let model = SledInertial::new(
        of(GYRO_ARW),
        of(ACCEL_VRW),
        of(GYRO_BIAS_RW),
        of(ACCEL_BIAS_RW),
    );
    let pos = PositionFix::new(of(0.02), of(0.05));
    let vel = VelocityFix::new(of(0.05), of(0.1));
    let yaw = MagYaw::new(of(0.03));
    let pd = |f: &Kalman<T, 15, Joseph>| {
        let p = f.covariance().map(|v| v.to_f64());
        assert!(Cholesky::new(p).is_some(), "P lost positive definiteness");
    };
    let mut nees = Vec::new();
    for s in steps {
        let u = ImuSample {
            gyro: s.imu.gyro.map(of),
            accel: s.imu.accel.map(of),
        };
        filter.predict_with(&model, &u, of(s.dt)).unwrap();
        pd(&filter);
        if let Some((p, v, y)) = s.fix {
            let a = filter.update_with(&pos, &p.map(of), None).unwrap();
            let b = filter.update_with(&vel, &v.map(of), None).unwrap();
            let c = filter
                .update_with(&yaw, &SVector::<T, 1>::new(of(y)), None)
                .unwrap();
            for o in [a, b, c] {
                assert!(matches!(o, Outcome::Applied { .. }));
            }
            pd(&filter);
            let mut e = filter.state().map(|v| v.to_f64()) - s.truth;
            e[ROLL] = wrap_angle(e[ROLL]);
            e[YAW] = wrap_angle(e[YAW]);
            let chol = Cholesky::new(filter.covariance().map(|v| v.to_f64())).unwrap();
            nees.push(e.dot(&chol.solve(&e)));
        }
    }
    nees
}

#[test]
fn a_minute_of_towing_stays_positive_definite_and_consistent() {
    let (steps, truth0) = scenario(31_337);
    let (x0, p0) = start(&truth0, &mut Rng(99));
    for nees in [run::<f64>(&steps, &x0, &p0), run::<f32>(&steps, &x0, &p0)] {
        assert_eq!(nees.len(), 60);
        // NEES ~ chi-square(15) for a consistent filter (Bar-Shalom, Li and
        // Kirubarajan 2001). One run's epochs are correlated, so the time
        // average is loosely bounded: [5, 35] holds a consistent run; a
        // Jacobian with a sign error or a missing gravity lands outside.
        let mean = nees.iter().sum::<f64>() / nees.len() as f64;
        std::eprintln!("mean NEES {mean}");
        assert!((5.0..35.0).contains(&mean), "time-averaged NEES {mean}");
    }
}

#[test]
fn the_factored_filter_agrees_with_the_joseph_filter() {
    // The U-D filter takes the model's twelve noise sources directly
    // (Bierman 1977); in f64 the two forms agree to rounding.
    let (steps, truth0) = scenario(5);
    let (x0, p0) = start(&truth0, &mut Rng(6));
    let mut joseph: Kalman<f64, 15, Joseph> = Kalman::try_new(x0, p0).unwrap();
    let mut ud: UdKalman<f64, 15> = UdKalman::try_new(x0, p0).unwrap();
    let model = SledInertial::new(GYRO_ARW, ACCEL_VRW, GYRO_BIAS_RW, ACCEL_BIAS_RW);
    let pos = PositionFix::new(0.02, 0.05);
    for s in &steps[..1000] {
        joseph.predict_with(&model, &s.imu, s.dt).unwrap();
        ud.predict_with(&model, &s.imu, s.dt).unwrap();
        if let Some((p, _, _)) = s.fix {
            let a = joseph.update_with(&pos, &p, None).unwrap();
            let b = ud.update_with(&pos, &p, None).unwrap();
            assert!(matches!(a, Outcome::Applied { .. }) && matches!(b, Outcome::Applied { .. }));
        }
    }
    let dp = (joseph.covariance() - ud.rebuild_covariance()).abs().max();
    let dx = (joseph.state() - ud.state()).abs().max();
    assert!(
        dp < 1e-12 * joseph.covariance().abs().max(),
        "P differs by {dp}"
    );
    assert!(dx < 1e-9, "x differs by {dx}");
}

/// Runs `steps` through a patterned and a dense (`Dense`) Joseph filter in
/// scalar T and asserts that they hold the same numbers after every
/// operation (the patterns only skip products with structural zeros and
/// ones; equality as numbers, so the sign of an exact zero may differ).
fn patterned_equals_dense<T: Scalar>(
    steps: &[Step],
    x0: &SVector<f64, 15>,
    p0: &SMatrix<f64, 15, 15>,
) {
    let of = |v: f64| T::of(v);
    let start: Kalman<T, 15, Joseph> = Kalman::try_new(x0.map(of), p0.map(of)).unwrap();
    let (mut patterned, mut dense) = (start, start);
    let model = SledInertial::new(
        of(GYRO_ARW),
        of(ACCEL_VRW),
        of(GYRO_BIAS_RW),
        of(ACCEL_BIAS_RW),
    );
    let pos = PositionFix::new(of(0.02), of(0.05));
    let vel = VelocityFix::new(of(0.05), of(0.1));
    let yaw = MagYaw::new(of(0.03));
    let same = |a: &Kalman<T, 15, Joseph>, b: &Kalman<T, 15, Joseph>, k: usize| {
        assert!(a.covariance() == b.covariance(), "P differs at step {k}");
        assert!(a.state() == b.state(), "x differs at step {k}");
    };
    for (k, s) in steps.iter().enumerate() {
        let u = ImuSample {
            gyro: s.imu.gyro.map(of),
            accel: s.imu.accel.map(of),
        };
        patterned.predict_with(&model, &u, of(s.dt)).unwrap();
        dense.predict_with(&Dense(model), &u, of(s.dt)).unwrap();
        same(&patterned, &dense, k);
        if let Some((p, v, y)) = s.fix {
            let y = SVector::<T, 1>::new(of(y));
            let outcomes = [
                patterned.update_with(&pos, &p.map(of), None),
                dense.update_with(&Dense(pos), &p.map(of), None),
                patterned.update_with(&vel, &v.map(of), None),
                dense.update_with(&Dense(vel), &v.map(of), None),
                patterned.update_with(&yaw, &y, None),
                dense.update_with(&Dense(yaw), &y, None),
            ];
            for o in outcomes {
                assert!(matches!(o, Ok(Outcome::Applied { .. })), "step {k}");
            }
            same(&patterned, &dense, k);
        }
    }
}

#[test]
fn the_patterns_hold_along_a_tow_and_change_no_number() {
    let (steps, truth0) = scenario(77);
    let (x0, p0) = start(&truth0, &mut Rng(78));
    // The declared structure fits the model's matrices along the whole run
    // (at the true states and the recorded inputs).
    let model = SledInertial::new(GYRO_ARW, ACCEL_VRW, GYRO_BIAS_RW, ACCEL_BIAS_RW);
    let f_pattern = <SledInertial<f64> as ProcessModel<f64, 15>>::JACOBIAN_PATTERN;
    let g_pattern = <SledInertial<f64> as ProcessModel<f64, 15>>::SOURCES_PATTERN;
    assert_eq!((f_pattern.nonzero(), g_pattern.nonzero()), (48, 24));
    for s in &steps {
        let f = model.jacobian(&s.truth, &s.imu, s.dt);
        assert_eq!(f_pattern.first_violation(&f), None);
        let (g, _) = model.noise_sources(&s.truth, &s.imu, s.dt).unwrap();
        assert_eq!(g_pattern.first_violation(&g), None);
    }
    for (h, pattern) in [
        (
            PositionFix::new(0.02, 0.05).jacobian(&x0),
            <PositionFix<f64> as MeasurementModel<f64, 15, 3>>::JACOBIAN_PATTERN,
        ),
        (
            VelocityFix::new(0.05, 0.1).jacobian(&x0),
            <VelocityFix<f64> as MeasurementModel<f64, 15, 3>>::JACOBIAN_PATTERN,
        ),
    ] {
        assert_eq!(pattern.first_violation(&h), None);
    }
    patterned_equals_dense::<f64>(&steps[..2000], &x0, &p0);
    patterned_equals_dense::<f32>(&steps[..2000], &x0, &p0);
}
