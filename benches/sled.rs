//! Host cost of the 15-state Skerry sled filter (examples/skerry-sled) with
//! its structural patterns, with them switched off (`Dense`), and as a
//! straightforward nalgebra textbook filter of the same model: one
//! strapdown predict and one satellite position fix (m = 3), f32.
//!
//! `cargo bench --bench sled`.

use std::hint::black_box;
use std::time::Duration;

use cairn_core::{Dense, Joseph, Kalman, MeasurementModel, ProcessModel};
use criterion::{Criterion, criterion_group, criterion_main};
use nalgebra::{SMatrix, SVector, Vector3};
use skerry_sled::{ImuSample, PITCH, PositionFix, STANDARD_GRAVITY, STATES, SledInertial};

type Filter = Kalman<f32, STATES, Joseph>;

/// A start near level with the invented sled's P0 and a turning, surging
/// IMU sample (invented figures, as the example's own checks).
fn start() -> (Filter, SledInertial<f32>, ImuSample<f32>, PositionFix<f32>) {
    let mut x0 = SVector::<f32, STATES>::zeros();
    x0[PITCH] = 0.01;
    let p0 = SMatrix::<f32, STATES, STATES>::from_fn(|i, j| {
        let sd = |k: usize| match k {
            0..=2 => 0.5,
            3..=5 => 0.1,
            6..=8 => 0.01,
            9..=11 => 1e-4,
            _ => 1e-3,
        };
        if i == j {
            sd(i) * sd(i)
        } else {
            0.1 * sd(i) * sd(j) * 0.5f32.powi((i as i32 - j as i32).abs())
        }
    });
    let filter = Filter::try_new(x0, p0).expect("P0 is a covariance");
    let model = SledInertial::new(1.5e-4, 1.0e-3, 1.0e-5, 5.0e-5);
    let imu = ImuSample {
        gyro: Vector3::new(0.001, -0.002, 0.02),
        accel: Vector3::new(0.05, 0.01, -STANDARD_GRAVITY as f32),
    };
    (filter, model, imu, PositionFix::new(0.02, 0.05))
}

/// The textbook predict of the same model: x = f(x, u), P = F P F' + Q with
/// Q = G diag(q) G', all full nalgebra products.
#[inline(never)]
fn textbook_predict(
    x: &SVector<f32, STATES>,
    p: &SMatrix<f32, STATES, STATES>,
    model: &SledInertial<f32>,
    u: &ImuSample<f32>,
    dt: f32,
) -> (SVector<f32, STATES>, SMatrix<f32, STATES, STATES>) {
    let f = model.jacobian(x, u, dt);
    let (g, q) = model
        .noise_sources(x, u, dt)
        .expect("the sled gives sources");
    let q = g * SMatrix::from_diagonal(&q) * g.transpose();
    (model.transition(x, u, dt), f * p * f.transpose() + q)
}

/// The textbook update: explicit inverse of S, Joseph form with full n x n
/// products (Bucy and Joseph, 1968, as commonly taught).
#[inline(never)]
fn textbook_update(
    x: &SVector<f32, STATES>,
    p: &SMatrix<f32, STATES, STATES>,
    model: &PositionFix<f32>,
    z: &Vector3<f32>,
) -> Option<(SVector<f32, STATES>, SMatrix<f32, STATES, STATES>)> {
    let h = model.jacobian(x);
    let r = model.noise(x);
    let ht = h.transpose();
    let s = h * p * ht + r;
    let k = p * ht * s.try_inverse()?;
    let x = x + k * (z - model.expected(x));
    let i_kh = SMatrix::<f32, STATES, STATES>::identity() - k * h;
    Some((x, i_kh * p * i_kh.transpose() + k * r * k.transpose()))
}

fn sled(c: &mut Criterion) {
    let (filter, model, imu, fix) = start();
    let dt = 0.01f32;
    let mut g = c.benchmark_group("sled_predict_f32");
    g.bench_function("patterned", |b| {
        b.iter(|| {
            let mut f = black_box(filter);
            f.predict_with(&model, black_box(&imu), dt).ok();
            f
        })
    });
    let dense = Dense(model);
    g.bench_function("dense", |b| {
        b.iter(|| {
            let mut f = black_box(filter);
            f.predict_with(&dense, black_box(&imu), dt).ok();
            f
        })
    });
    g.bench_function("textbook", |b| {
        b.iter(|| {
            textbook_predict(
                black_box(filter.state()),
                black_box(filter.covariance()),
                &model,
                black_box(&imu),
                dt,
            )
        })
    });
    g.finish();
    let z = Vector3::new(0.3f32, -0.2, 0.05);
    let mut g = c.benchmark_group("sled_position_update_f32");
    g.bench_function("patterned", |b| {
        b.iter(|| {
            let mut f = black_box(filter);
            f.update_with(&fix, black_box(&z), None).ok();
            f
        })
    });
    let dense = Dense(fix);
    g.bench_function("dense", |b| {
        b.iter(|| {
            let mut f = black_box(filter);
            f.update_with(&dense, black_box(&z), None).ok();
            f
        })
    });
    g.bench_function("textbook", |b| {
        b.iter(|| {
            textbook_update(
                black_box(filter.state()),
                black_box(filter.covariance()),
                &fix,
                black_box(&z),
            )
        })
    });
    g.finish();
}

criterion_group! {
    name = benches;
    config = Criterion::default()
        .warm_up_time(Duration::from_millis(500))
        .measurement_time(Duration::from_secs(3));
    targets = sled
}
criterion_main!(benches);
