//! Host cost of the core's predict and update against a textbook nalgebra
//! filter, for n = 3, 6, 9, 15 states, m = 1, 2, 3 measurements, f32 and f64.
//!
//! Every group holds the core's forms and the textbook baseline side by side,
//! so each run shows the ratios. `cargo bench --bench filter`; a filter
//! argument narrows it, e.g. `cargo bench --bench filter -- update_f32_n9_m3`.

use std::hint::black_box;
use std::time::Duration;

use cairn_core::{Conventional, Joseph, Kalman, Scalar, UdKalman};
use criterion::{Criterion, criterion_group, criterion_main};
use nalgebra::{SMatrix, SVector};

/// Deterministic inputs: Press et al.'s 32-bit LCG (*Numerical Recipes*,
/// 2nd ed., ch. 7.1), seeded per size so every run times the same numbers.
struct Inputs(u32);

impl Inputs {
    fn unit(&mut self) -> f64 {
        self.0 = self.0.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
        f64::from(self.0 >> 8) / f64::from(1u32 << 24) * 2.0 - 1.0
    }

    fn matrix<T: Scalar, const R: usize, const C: usize>(&mut self) -> SMatrix<T, R, C> {
        SMatrix::from_fn(|_, _| T::of(self.unit()))
    }

    /// A well-conditioned covariance A A' / n + scale I.
    fn covariance<T: Scalar, const N: usize>(&mut self, scale: f64) -> SMatrix<T, N, N> {
        let a: SMatrix<f64, N, N> = self.matrix();
        let p = a * a.transpose() / N as f64 + SMatrix::<f64, N, N>::identity() * scale;
        p.map(T::of)
    }
}

/// The textbook update: explicit inverse of S, Joseph form with full n x n
/// products, P+ = (I - KH) P (I - KH)' + K R K' (Bucy and Joseph, 1968, as
/// commonly taught).
#[inline(never)]
fn textbook_update<T: Scalar, const N: usize, const M: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
    z: &SVector<T, M>,
    h: &SMatrix<T, M, N>,
    r: &SMatrix<T, M, M>,
) -> Option<(SVector<T, N>, SMatrix<T, N, N>)> {
    let ht = h.transpose();
    let s = h * p * ht + r;
    let s_inv = s.try_inverse()?;
    let k = p * ht * s_inv;
    let x = x + k * (z - h * x);
    let i_kh = SMatrix::<T, N, N>::identity() - k * h;
    let p = i_kh * p * i_kh.transpose() + k * r * k.transpose();
    Some((x, p))
}

/// Joseph's factored order (W = P - K B', D = K R - W H', P+ = W + D K')
/// written directly in nalgebra with a Cholesky solve and no checks at all:
/// the floor for the core's arithmetic with nalgebra's kernels, so every run
/// shows how much of the core's cost is its checks and transactions.
#[inline(never)]
fn factored_unchecked<T: Scalar, const N: usize, const M: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
    z: &SVector<T, M>,
    h: &SMatrix<T, M, N>,
    r: &SMatrix<T, M, M>,
) -> Option<(SVector<T, N>, SMatrix<T, N, N>)> {
    let b = p * h.transpose();
    let s = h * b + r;
    let k = s.cholesky()?.solve(&b.transpose()).transpose();
    let x = x + k * (z - h * x);
    let w = p - k * b.transpose();
    let d = k * r - w * h.transpose();
    Some((x, w + d * k.transpose()))
}

/// The textbook predict: x = F x, P = F P F' + Q with full products.
#[inline(never)]
fn textbook_predict<T: Scalar, const N: usize>(
    x: &SVector<T, N>,
    p: &SMatrix<T, N, N>,
    f: &SMatrix<T, N, N>,
    q: &SMatrix<T, N, N>,
) -> (SVector<T, N>, SMatrix<T, N, N>) {
    (f * x, f * p * f.transpose() + q)
}

macro_rules! bench_update {
    ($c:expr, $t:ty, $n:literal, $m:literal) => {{
        let mut seeded = Inputs(0x5eed_0000 + $n * 16 + $m);
        let p0 = seeded.covariance::<$t, $n>(1.0);
        let x0: SVector<$t, $n> = seeded.matrix();
        let h: SMatrix<$t, $m, $n> = seeded.matrix();
        // Diagonal R, so the sequential update applies too.
        let r_diag = SVector::<$t, $m>::from_fn(|i, _| <$t>::of(0.5 + 0.1 * i as f64));
        let r = SMatrix::<$t, $m, $m>::from_diagonal(&r_diag);
        let z: SVector<$t, $m> = h * x0 + seeded.matrix::<$t, $m, 1>() * <$t>::of(0.1);
        let joseph = Kalman::<$t, $n, Joseph>::try_new(x0, p0).expect("P is a covariance");
        let conventional =
            Kalman::<$t, $n, Conventional>::try_new(x0, p0).expect("P is a covariance");
        let ud = UdKalman::<$t, $n>::try_new(x0, p0).expect("P is a covariance");
        let mut g = $c.benchmark_group(concat!(
            "update_",
            stringify!($t),
            "_n",
            stringify!($n),
            "_m",
            stringify!($m)
        ));
        g.bench_function("joseph", |b| {
            b.iter(|| {
                let mut f = black_box(joseph);
                let o = f.update(black_box(&z), black_box(&h), black_box(&r), None);
                (f, o)
            })
        });
        g.bench_function("conventional", |b| {
            b.iter(|| {
                let mut f = black_box(conventional);
                let o = f.update(black_box(&z), black_box(&h), black_box(&r), None);
                (f, o)
            })
        });
        g.bench_function("u-d", |b| {
            b.iter(|| {
                let mut f = black_box(ud);
                let o = f.update_sequential(black_box(&z), black_box(&h), black_box(&r_diag), None);
                (f, o)
            })
        });
        g.bench_function("sequential_joseph", |b| {
            b.iter(|| {
                let mut f = black_box(joseph);
                let o = f.update_sequential(black_box(&z), black_box(&h), black_box(&r_diag), None);
                (f, o)
            })
        });
        g.bench_function("factored_unchecked", |b| {
            b.iter(|| {
                factored_unchecked(
                    black_box(&x0),
                    black_box(&p0),
                    black_box(&z),
                    black_box(&h),
                    black_box(&r),
                )
            })
        });
        g.bench_function("textbook", |b| {
            b.iter(|| {
                textbook_update(
                    black_box(&x0),
                    black_box(&p0),
                    black_box(&z),
                    black_box(&h),
                    black_box(&r),
                )
            })
        });
        g.finish();
    }};
}

macro_rules! bench_predict {
    ($c:expr, $t:ty, $n:literal) => {{
        let mut seeded = Inputs(0x0f0e_0000 + $n);
        let p0 = seeded.covariance::<$t, $n>(1.0);
        let x0: SVector<$t, $n> = seeded.matrix();
        // F near the identity (a discretised slow system), Q diagonal.
        let f = SMatrix::<$t, $n, $n>::identity() + seeded.matrix::<$t, $n, $n>() * <$t>::of(0.01);
        let q = SMatrix::<$t, $n, $n>::from_diagonal_element(<$t>::of(1e-3));
        let filter = Kalman::<$t, $n, Joseph>::try_new(x0, p0).expect("P is a covariance");
        let ud = UdKalman::<$t, $n>::try_new(x0, p0).expect("P is a covariance");
        // The same Q as independent sources: G = I, q = its diagonal.
        let g_src = SMatrix::<$t, $n, $n>::identity();
        let q_src = q.diagonal();
        let mut g = $c.benchmark_group(concat!("predict_", stringify!($t), "_n", stringify!($n)));
        g.bench_function("u-d_q", |b| {
            b.iter(|| {
                let mut k = black_box(ud);
                let o = k.predict(black_box(&f), black_box(&q));
                (k, o)
            })
        });
        g.bench_function("u-d_sources", |b| {
            b.iter(|| {
                let mut k = black_box(ud);
                let o = k.predict_with_sources(black_box(&f), black_box(&g_src), black_box(&q_src));
                (k, o)
            })
        });
        g.bench_function("core", |b| {
            b.iter(|| {
                let mut k = black_box(filter);
                let o = k.predict(black_box(&f), black_box(&q));
                (k, o)
            })
        });
        g.bench_function("textbook", |b| {
            b.iter(|| {
                textbook_predict(black_box(&x0), black_box(&p0), black_box(&f), black_box(&q))
            })
        });
        g.finish();
    }};
}

macro_rules! for_sizes {
    ($c:expr, $t:ty) => {{
        bench_predict!($c, $t, 3);
        bench_predict!($c, $t, 6);
        bench_predict!($c, $t, 9);
        bench_predict!($c, $t, 15);
        bench_update!($c, $t, 3, 1);
        bench_update!($c, $t, 3, 2);
        bench_update!($c, $t, 3, 3);
        bench_update!($c, $t, 6, 1);
        bench_update!($c, $t, 6, 2);
        bench_update!($c, $t, 6, 3);
        bench_update!($c, $t, 9, 1);
        bench_update!($c, $t, 9, 2);
        bench_update!($c, $t, 9, 3);
        bench_update!($c, $t, 15, 1);
        bench_update!($c, $t, 15, 2);
        bench_update!($c, $t, 15, 3);
    }};
}

fn f32_filters(c: &mut Criterion) {
    for_sizes!(c, f32);
}

fn f64_filters(c: &mut Criterion) {
    for_sizes!(c, f64);
}

/// Short runs: the whole bench takes a few minutes on two cores.
fn config() -> Criterion {
    Criterion::default()
        .warm_up_time(Duration::from_millis(300))
        .measurement_time(Duration::from_millis(800))
        .sample_size(20)
}

criterion_group! {
    name = benches;
    config = config();
    targets = f32_filters, f64_filters
}
criterion_main!(benches);
