//! Positive (semi)definiteness the way a covariance needs it: a process noise
//! Q that only looks semidefinite pair by pair is refused, a posterior that
//! rounding made indefinite is caught, and a factored covariance that
//! overflows is refused. Every refusal leaves the filter bit-identical.
//!
//! Eigenvalues quoted as references are computed independently of the core:
//! in closed form where the matrix allows it, otherwise by nalgebra's
//! symmetric eigensolver in f64 (`SymmetricEigen`, a general-purpose
//! reference library; the core never calls it).

use cairn_core::{
    Checked, Conventional, CovarianceForm, ErrorKind, FilterError, HealthMonitor, Joseph, Kalman,
    Operand, UdKalman,
};
use nalgebra::{Matrix2, Matrix2x3, Matrix3, SMatrix, Vector2, Vector3};

/// The smallest eigenvalue of a symmetric matrix, in f64 by nalgebra's
/// eigensolver (the reference, not the code under test).
fn min_eigenvalue<const N: usize>(p: &SMatrix<f64, N, N>) -> f64 {
    nalgebra::DMatrix::from_column_slice(N, N, p.as_slice())
        .symmetric_eigen()
        .eigenvalues
        .min()
}

fn widen<const N: usize>(p: &SMatrix<f32, N, N>) -> SMatrix<f64, N, N> {
    p.map(f64::from)
}

fn bits<const N: usize>(x: &SMatrix<f32, N, 1>, p: &SMatrix<f32, N, N>) -> Vec<u32> {
    x.iter().chain(p.iter()).map(|v| v.to_bits()).collect()
}

/// Q = 1 on the diagonal, -0.6 off it: every 2 x 2 minor is 1 - 0.36 > 0,
/// but the eigenvalues are 1 + 2 (-0.6) = -0.2 and 1 + 0.6 = 1.6 (twice):
/// closed form for a I + b (J - I), J the all-ones matrix (common practice).
fn pairwise_fine_q() -> Matrix3<f32> {
    Matrix3::new(1.0, -0.6, -0.6, -0.6, 1.0, -0.6, -0.6, -0.6, 1.0)
}

#[test]
fn q_with_fine_minors_but_a_negative_eigenvalue_is_refused() {
    let q = pairwise_fine_q();
    assert!((min_eigenvalue(&widen(&q)) + 0.2).abs() < 1e-7);
    // Its LDL' pivots, by hand: d0 = 1, d1 = 1 - 0.36 = 0.64,
    // l21 = (-0.6 - 0.36) / 0.64 = -1.5, d2 = 1 - 0.36 - 2.25 * 0.64 = -0.8:
    // the test fails at row 2.
    let expected = FilterError::NotPositiveDefinite {
        operand: Operand::ProcessNoise,
        index: 2,
    };
    let mut kf = Kalman::<f32, 3>::try_new(Vector3::zeros(), Matrix3::identity() * 1e-3).unwrap();
    let before = bits(kf.state(), kf.covariance());
    assert_eq!(kf.predict(&Matrix3::identity(), &q), Err(expected));
    assert_eq!(bits(kf.state(), kf.covariance()), before);
    let mut ud = UdKalman::<f32, 3>::try_new(Vector3::zeros(), Matrix3::identity() * 1e-3).unwrap();
    let before = bits(ud.state(), ud.factors());
    assert_eq!(ud.predict(&Matrix3::identity(), &q), Err(expected));
    assert_eq!(bits(ud.state(), ud.factors()), before);
    assert_eq!(expected.kind(), ErrorKind::Rejected);
    // The same matrix one step inside the semidefinite cone (off-diagonal
    // -0.49: eigenvalue 1 - 0.98 = 0.02) is accepted.
    let fine = Matrix3::new(1.0, -0.49, -0.49, -0.49, 1.0, -0.49, -0.49, -0.49, 1.0);
    assert!(kf.predict(&Matrix3::identity(), &fine).is_ok());
}

/// A small linear congruential generator (Knuth, TAOCP vol. 2, MMIX
/// constants) for reproducible test matrices.
struct Lcg(u64);

impl Lcg {
    fn unit(&mut self) -> f64 {
        self.0 = self
            .0
            .wrapping_mul(6_364_136_223_846_793_005)
            .wrapping_add(1_442_695_040_888_963_407);
        (self.0 >> 11) as f64 / (1u64 << 53) as f64
    }
    fn signed(&mut self) -> f64 {
        2.0 * self.unit() - 1.0
    }
}

/// Random symmetric matrices with unit diagonal and off-diagonal entries in
/// (-1, 1) pass every 2 x 2 minor; the eigensolver says which are
/// semidefinite. Returns (indefinite ones accepted, semidefinite refused,
/// indefinite count).
fn sweep<const N: usize>(seed: u64, count: usize) -> (usize, usize, usize) {
    let mut g = Lcg(seed);
    let (mut accepted_bad, mut refused_good, mut indefinite) = (0, 0, 0);
    for _ in 0..count {
        let mut q = SMatrix::<f32, N, N>::identity();
        for j in 1..N {
            for i in 0..j {
                let c = (0.999 * g.signed()) as f32;
                q[(i, j)] = c;
                q[(j, i)] = c;
            }
        }
        let lambda = min_eigenvalue(&widen(&q));
        // Clearly on one side: a margin far above rounding.
        if lambda.abs() < 1e-3 {
            continue;
        }
        let mut kf = Kalman::<f32, N>::try_new(
            nalgebra::SVector::zeros(),
            SMatrix::<f32, N, N>::identity() * 1e-3,
        )
        .unwrap();
        let ok = kf.predict(&SMatrix::identity(), &q).is_ok();
        if lambda < 0.0 {
            indefinite += 1;
            accepted_bad += usize::from(ok);
        } else {
            refused_good += usize::from(!ok);
        }
    }
    (accepted_bad, refused_good, indefinite)
}

#[test]
fn every_clearly_indefinite_q_is_refused_and_every_semidefinite_one_accepted() {
    // Before the LDL' test all of these passed the minors; now none may.
    let (bad3, good3, n3) = sweep::<3>(7, 4000);
    let (bad6, good6, n6) = sweep::<6>(8, 4000);
    println!(
        "indefinite Q passing every 2 x 2 minor: n = 3: {n3}, n = 6: {n6}; accepted now: {bad3}, {bad6}"
    );
    assert!(
        n3 > 100 && n6 > 1000,
        "the sweep must meet indefinite matrices"
    );
    assert_eq!((bad3, bad6), (0, 0));
    assert_eq!((good3, good6), (0, 0));
}

#[test]
fn rank_deficient_q_from_fewer_sources_than_states_is_accepted() {
    // Q = G diag(q) G' with fewer columns than states is positive
    // semidefinite and singular (common practice); assembled in f32 it
    // rounds to a matrix whose smallest eigenvalue may be slightly
    // negative. The test's shift of a few roundings must let it through,
    // with states of very different scales too (a per-row shift).
    fn run<const N: usize, const K: usize>(seed: u64, spread: bool) -> usize {
        let mut g = Lcg(seed);
        let mut refused = 0;
        for _ in 0..6000 / N {
            // Row scales 1e-2 to 10 with `spread`, else all 1.
            let scale = SMatrix::<f32, N, 1>::from_fn(|i, _| {
                if spread {
                    10f32.powi((i % 4) as i32 - 2)
                } else {
                    1.0
                }
            });
            let gm = SMatrix::<f32, N, K>::from_fn(|i, _| g.signed() as f32 * scale[i]);
            let qv = SMatrix::<f32, K, 1>::from_fn(|_, _| (0.1 + g.unit()) as f32);
            let q = gm * SMatrix::<f32, K, K>::from_diagonal(&qv) * gm.transpose();
            let q = (q + q.transpose()) * 0.5;
            let p0 = SMatrix::<f32, N, N>::identity() * 1e-3;
            let mut kf = Kalman::<f32, N>::try_new(nalgebra::SVector::zeros(), p0).unwrap();
            let mut ud = UdKalman::<f32, N>::try_new(nalgebra::SVector::zeros(), p0).unwrap();
            refused += usize::from(kf.predict(&SMatrix::identity(), &q).is_err());
            refused += usize::from(ud.predict(&SMatrix::identity(), &q).is_err());
        }
        refused
    }
    for spread in [false, true] {
        assert_eq!(run::<3, 1>(1, spread), 0);
        assert_eq!(run::<3, 2>(2, spread), 0);
        assert_eq!(run::<6, 3>(3, spread), 0);
        assert_eq!(run::<9, 4>(4, spread), 0);
        assert_eq!(run::<15, 7>(5, spread), 0);
    }
}

/// The ill-conditioned update of Dyer and McReynolds (1969, as reproduced
/// by Grewal and Andrews; matrices from memory) at d = 1e-3 in f32:
/// P0 = I, H = [[1, 1, 1], [1, 1, 1 + d]], R = d^2 I.
fn ill_conditioned<F: CovarianceForm>() -> (Kalman<f32, 3, F>, Result<(), FilterError>) {
    let h = Matrix2x3::new(1.0, 1.0, 1.0, 1.0, 1.0, 1.001_f32);
    let r = Matrix2::identity() * 1e-6_f32;
    let mut kf = Kalman::<f32, 3, F>::try_new(Vector3::zeros(), Matrix3::identity()).unwrap();
    let out = kf.update(&Vector2::zeros(), &h, &r, None).map(|_| ());
    (kf, out)
}

#[test]
fn an_update_that_rounding_made_indefinite_is_caught() {
    // The exact posterior (I + H' H / r)^-1 has smallest eigenvalue
    // 1 / (1 + mu / r), mu the largest eigenvalue of H H' =
    // [[3, 3 + d], [3 + d, 3 + 2 d + d^2]] (closed form of a 2 x 2
    // symmetric eigenvalue): 1.6664e-7 at d = 1e-3, positive.
    let d = 1e-3_f64;
    let (a, b, c) = (3.0, 3.0 + d, 3.0 + 2.0 * d + d * d);
    let mu = (a + c) / 2.0 + (((a - c) / 2.0).powi(2) + b * b).sqrt();
    let exact_min = 1.0 / (1.0 + mu / (d * d));
    assert!((exact_min - 1.6664e-7).abs() < 1e-10, "{exact_min}");

    let monitor = HealthMonitor::<f32, 8>::new();
    // Unchecked, both covariance forms store an indefinite P: the
    // eigensolver finds a negative eigenvalue though every variance is
    // positive, and the health monitor (now factoring P) says so.
    let (joseph, out) = ill_conditioned::<Joseph>();
    assert!(out.is_ok());
    let pj = widen(joseph.covariance());
    let (conventional, out) = ill_conditioned::<Conventional>();
    assert!(out.is_ok());
    let pc = widen(conventional.covariance());
    let (lj, lc) = (min_eigenvalue(&pj), min_eigenvalue(&pc));
    println!(
        "f32 posterior smallest eigenvalue: joseph {lj:e}, conventional {lc:e}, exact {exact_min:e}"
    );
    assert!(lj < 0.0 && lc < 0.0, "joseph {lj}, conventional {lc}");
    assert!((0..3).all(|i| pj[(i, i)] > 0.0 && pc[(i, i)] > 0.0));
    for (p, report) in [
        (joseph.covariance(), monitor.assess(joseph.covariance())),
        (
            conventional.covariance(),
            monitor.assess(conventional.covariance()),
        ),
    ] {
        assert!(report.min_variance > 0.0);
        assert!(!report.positive_definite && !report.healthy, "{p}");
    }
    assert!(joseph.check_definiteness().is_err());
    assert!(conventional.check_definiteness().is_err());

    // Checked, both refuse, bit-identical, as an unhealthy filter.
    let start = Kalman::<f32, 3>::try_new(Vector3::zeros(), Matrix3::identity()).unwrap();
    let before = bits(start.state(), start.covariance());
    for (after, out) in [
        {
            let (k, o) = ill_conditioned::<Checked<Joseph>>();
            (bits(k.state(), k.covariance()), o)
        },
        {
            let (k, o) = ill_conditioned::<Checked<Conventional>>();
            (bits(k.state(), k.covariance()), o)
        },
    ] {
        let err = out.expect_err("an indefinite posterior must be refused");
        assert!(matches!(err, FilterError::CovarianceLost { .. }), "{err}");
        assert_eq!(err.kind(), ErrorKind::Unhealthy);
        assert_eq!(after, before);
    }
    // A sound update still commits with the check on, to the same bits as
    // without it (the check only reads).
    let h = Matrix2x3::new(1.0, 0.0, 0.0, 0.0, 1.0, 0.5_f32);
    let r = Matrix2::identity() * 0.01_f32;
    let mut on = start.with_form::<Checked<Joseph>>();
    let mut off = start;
    let z = Vector2::new(0.3, -0.2);
    assert!(on.update(&z, &h, &r, None).is_ok());
    assert!(off.update(&z, &h, &r, None).is_ok());
    assert_eq!(
        bits(on.state(), on.covariance()),
        bits(off.state(), off.covariance())
    );
}

#[test]
fn a_ud_covariance_that_overflows_is_refused_as_the_covariance_form_refuses_it() {
    // P0 = 3e38 I and F = [[1, 1], [0, 1]]: P00 = 3e38 + 3e38 = 6e38 is
    // beyond f32's largest finite value, 3.4028235e38 (IEEE 754 binary32).
    let p0 = Matrix2::identity() * 3e38_f32;
    let f = Matrix2::new(1.0, 1.0, 0.0, 1.0_f32);
    let q = Matrix2::zeros();
    let mut kf = Kalman::<f32, 2>::try_new(Vector2::zeros(), p0).unwrap();
    let before = bits(kf.state(), kf.covariance());
    assert_eq!(
        kf.predict(&f, &q),
        Err(FilterError::CovarianceLost { index: 0 })
    );
    assert_eq!(bits(kf.state(), kf.covariance()), before);
    // Thornton's update keeps every factor finite (D = [3e38, 3e38],
    // U_01 = 1), so only the variances of U D U' show the overflow.
    let mut ud = UdKalman::<f32, 2>::try_new(Vector2::zeros(), p0).unwrap();
    let before = bits(ud.state(), ud.factors());
    let err = ud.predict(&f, &q).expect_err("an infinite covariance");
    assert_eq!(err, FilterError::CovarianceLost { index: 0 });
    assert_eq!(err.kind(), ErrorKind::Unhealthy);
    assert_eq!(bits(ud.state(), ud.factors()), before);
    let g = Matrix2::identity();
    assert_eq!(
        ud.predict_with_sources(&f, &g, &Vector2::zeros()),
        Err(FilterError::CovarianceLost { index: 0 })
    );
    assert_eq!(bits(ud.state(), ud.factors()), before);
    // Below half the range (the check's margin for the rounding of the
    // off-diagonal sums) it still propagates: P00 = 1.5e38.
    let mut half = UdKalman::<f32, 2>::try_new(Vector2::zeros(), p0 / 4.0).unwrap();
    assert!(half.predict(&f, &q).is_ok());
    assert!(half.rebuild_covariance().iter().all(|v| v.is_finite()));
}

#[test]
fn a_ud_filter_keeps_a_small_variance_from_a_full_q() {
    // A position and a slowly drifting bias, F = [[1, dt], [0, 1]], a
    // diagonal Q with the bias's variance far below the position's. With
    // no measurement the bias variance grows by q_b a step exactly:
    // P_bb(k) = P_bb(0) + k q_b (the random walk's variance, closed form).
    // The U-D factorisation of Q used to zero pivots below a few roundings
    // of the *largest* variance, so q_b never reached the bias.
    let dt = 0.01_f32;
    let f = Matrix2::new(1.0, dt, 0.0, 1.0);
    let (qp, qb) = (1.0e-2_f32, 1.0e-10_f32);
    let q = Matrix2::new(qp, 0.0, 0.0, qb);
    let p0 = Matrix2::new(1.0, 0.0, 0.0, 1e-10_f32);
    let mut ud = UdKalman::<f32, 2>::try_new(Vector2::zeros(), p0).unwrap();
    let mut sources = ud;
    let steps = 1000;
    for _ in 0..steps {
        ud.predict(&f, &q).unwrap();
        sources
            .predict_with_sources(&f, &Matrix2::identity(), &Vector2::new(qp, qb))
            .unwrap();
    }
    let want = 1e-10 + f64::from(steps) * 1e-10;
    for (name, got) in [
        ("full Q", f64::from(ud.rebuild_covariance()[(1, 1)])),
        ("sources", f64::from(sources.rebuild_covariance()[(1, 1)])),
    ] {
        // f32 sums of 1000 terms: a relative error of a few 1e-5 at most.
        assert!((got - want).abs() < 1e-4 * want, "{name}: {got} vs {want}");
    }
    assert!(ud.d()[1] > 0.0);
}

#[test]
fn the_health_monitor_refuses_a_meaningless_quantile() {
    for (z, err) in [
        (f64::NAN, FilterError::NonFinite(Operand::Quantile)),
        (f64::INFINITY, FilterError::NonFinite(Operand::Quantile)),
        (f64::NEG_INFINITY, FilterError::NonFinite(Operand::Quantile)),
        (-1.96, FilterError::NotPositive(Operand::Quantile)),
        (0.0, FilterError::NotPositive(Operand::Quantile)),
    ] {
        assert_eq!(
            HealthMonitor::<f64, 10>::try_with_quantile(z).err(),
            Some(err)
        );
        assert_eq!(err.kind(), ErrorKind::Rejected);
    }
    // A sound quantile judges: NIS = 9 per degree of freedom over 10
    // samples is far above any 99% bound (2.575829, the standard normal
    // quantile; from memory).
    let mut m = HealthMonitor::<f64, 10>::try_with_quantile(2.575_829).unwrap();
    for _ in 0..10 {
        m.record_nis(9.0, 1);
    }
    assert!(!m.assess(&Matrix3::<f64>::identity()).healthy);
}

#[test]
fn the_health_monitor_judges_definiteness_not_the_diagonal() {
    // [[1, 2, 0], [2, 1, 0], [0, 0, 1]]: positive diagonal, eigenvalues 3,
    // 1 and -1 (closed form of the 2 x 2 block [[1, 2], [2, 1]]: 1 +/- 2).
    let p = Matrix3::new(1.0, 2.0, 0.0, 2.0, 1.0, 0.0, 0.0, 0.0, 1.0_f64);
    assert!((min_eigenvalue(&p) + 1.0).abs() < 1e-12);
    let mut m = HealthMonitor::<f64, 10>::new();
    for _ in 0..10 {
        m.record_nis(1.0, 1);
    }
    let report = m.assess(&p);
    assert!(report.min_variance > 0.0);
    assert!(!report.positive_definite && !report.healthy);
    let sound = m.assess(&Matrix3::identity());
    assert!(sound.positive_definite && sound.healthy);
}
