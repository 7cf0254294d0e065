//! The U-D factored filter and the steady-gain filter against published
//! behaviour and closed forms.

use cairn_core::{Conventional, CovarianceForm, FilterError, Joseph, Kalman, SteadyGain, UdKalman};
use nalgebra::{Matrix1, Matrix2, Matrix2x3, Matrix3, SMatrix, SVector, Vector1, Vector2, Vector3};
use proptest::prelude::*;

/// The exact posterior of the ill-conditioned example as d -> 0 (Dyer and
/// McReynolds 1969, as reproduced by Grewal and Andrews; matrices from
/// memory, limit values computed).
fn dyer_limit() -> Matrix3<f64> {
    Matrix3::new(
        0.625, -0.375, -0.25, -0.375, 0.625, -0.25, -0.25, -0.25, 0.5,
    )
}

fn dyer_h(d: f32) -> Matrix2x3<f32> {
    Matrix2x3::new(1.0, 1.0, 1.0, 1.0, 1.0, 1.0 + d)
}

fn rel(p: &Matrix3<f64>) -> f64 {
    (p - dyer_limit()).norm() / dyer_limit().norm()
}

fn covariance_form<F: CovarianceForm>(d: f32) -> Result<Matrix3<f64>, FilterError> {
    let mut kf = Kalman::<f32, 3, F>::try_new(Vector3::zeros(), Matrix3::identity())?;
    let _ = kf.update(
        &Vector2::zeros(),
        &dyer_h(d),
        &(Matrix2::identity() * (d * d)),
        None,
    )?;
    Ok(kf.covariance().map(f64::from))
}

#[test]
fn ud_survives_the_ill_conditioned_example_where_covariance_forms_break() {
    // Grewal and Andrews (implementation-methods chapter), after Dyer and
    // McReynolds (1969): with d near sqrt(eps_f32) ~ 1e-4 the conventional
    // and Joseph single-precision updates lose the answer, while Bierman's
    // U-D update stays accurate until d nears eps (docs/references.md: f32 at
    // d = 1e-5 has a relative error of about 5e-4, computed).
    let d = 1e-4_f32;
    let mut ud = UdKalman::<f32, 3>::try_new(Vector3::zeros(), Matrix3::identity()).unwrap();
    let _ = ud
        .update(
            &Vector2::zeros(),
            &dyer_h(d),
            &(Matrix2::identity() * (d * d)),
            None,
        )
        .unwrap();
    let p_ud = ud.rebuild_covariance().map(f64::from);
    assert!(rel(&p_ud) < 5e-3, "U-D relative error {}", rel(&p_ud));
    assert!(ud.d().iter().all(|&v| v > 0.0));
    for (name, p) in [
        ("conventional", covariance_form::<Conventional>(d)),
        ("joseph", covariance_form::<Joseph>(d)),
    ] {
        match p {
            Err(_) => {}
            Ok(p) => {
                let broken = rel(&p) > 0.1 || p.symmetric_eigenvalues().min() <= 0.0;
                assert!(
                    broken,
                    "{name} unexpectedly accurate: relative error {}",
                    rel(&p)
                );
            }
        }
    }
    // At d = 1e-1 every form is accurate to the O(d) term of the limit.
    for p in [
        covariance_form::<Conventional>(0.1).unwrap(),
        covariance_form::<Joseph>(0.1).unwrap(),
    ] {
        assert!(rel(&p) < 0.1);
    }
}

const N: usize = 4;

fn spd(a: Vec<f64>, floor: f64) -> SMatrix<f64, N, N> {
    let a = SMatrix::<f64, N, N>::from_iterator(a);
    a * a.transpose() + SMatrix::<f64, N, N>::identity() * floor
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn ud_matches_joseph_in_f64(
        f in prop::collection::vec(-1.0f64..1.0, N * N),
        q in prop::collection::vec(-1.0f64..1.0, N * N),
        p in prop::collection::vec(-1.0f64..1.0, N * N),
        h in prop::collection::vec(-1.0f64..1.0, 2 * N),
        z in prop::collection::vec(-2.0f64..2.0, 2),
    ) {
        // Same posterior in exact arithmetic (Bierman 1977; Thornton and
        // Bierman 1977): agreement to rounding in f64.
        let f = SMatrix::<f64, N, N>::identity() + SMatrix::from_iterator(f) * 0.2;
        let q = spd(q, 0.01) * 0.1;
        let p0 = spd(p, 0.1);
        let h = SMatrix::<f64, 2, N>::from_iterator(h);
        let r = Matrix2::new(0.3, 0.1, 0.1, 0.2);
        let z = Vector2::from_iterator(z);
        let mut j = Kalman::<f64, N, Joseph>::try_new(SVector::zeros(), p0).unwrap();
        let mut u = UdKalman::<f64, N>::try_new(SVector::zeros(), p0).unwrap();
        for _ in 0..4 {
            j.predict(&f, &q).unwrap();
            u.predict(&f, &q).unwrap();
            let a = j.update(&z, &h, &r, None).unwrap();
            let b = u.update(&z, &h, &r, None).unwrap();
            prop_assert!((a.nis() - b.nis()).abs() < 1e-9 * a.nis().max(1.0));
        }
        let pj = j.covariance();
        let pu = u.rebuild_covariance();
        prop_assert!((pj - pu).norm() / pj.norm() < 1e-9);
        prop_assert!((j.state() - u.state()).norm() < 1e-9 * j.state().norm().max(1.0));
    }
}

#[test]
fn ud_refusals_change_nothing() {
    let mut u =
        UdKalman::<f32, 3>::try_new(Vector3::new(1.0, 2.0, 3.0), Matrix3::identity()).unwrap();
    let before = u;
    let h = Matrix2x3::new(1.0, 0.0, 0.0, 0.0, 1.0, 0.0);
    assert!(
        u.update(&Vector2::new(f32::NAN, 0.0), &h, &Matrix2::identity(), None)
            .is_err()
    );
    assert!(
        u.update(&Vector2::zeros(), &h, &(Matrix2::identity() * -1.0), None)
            .is_err()
    );
    assert!(
        u.predict(&Matrix3::identity(), &(Matrix3::identity() * -1.0))
            .is_err()
    );
    let out = u
        .update(
            &Vector2::new(1e6, 0.0),
            &h,
            &Matrix2::identity(),
            Some(9.21),
        )
        .unwrap();
    assert!(!out.is_applied());
    assert_eq!(u, before);
}

#[test]
fn steady_gain_filter_uses_the_closed_form_gain() {
    // Random walk in white noise, q = 0.01, r = 1: steady prior P = 0.1051249,
    // K = 0.0951249 (closed form, docs/references.md, "computed"). The steady-gain
    // filter's posterior estimate after one update is x + K (z - x).
    let (q, r) = (0.01_f64, 1.0_f64);
    let p = (q + (q * q + 4.0 * q * r).sqrt()) / 2.0;
    let k = p / (p + r);
    assert!((k - 0.095_124_9).abs() < 1e-7);
    let mut sg = SteadyGain::<f64, 1, 1>::try_new(
        Vector1::new(2.0),
        Matrix1::identity(),
        Matrix1::identity(),
        Matrix1::new(k),
        &Matrix1::new(p + r),
    )
    .unwrap();
    sg.predict().unwrap();
    let out = sg.update(&Vector1::new(3.0), Some(6.63)).unwrap();
    assert!(out.is_applied());
    assert!((sg.state()[0] - (2.0 + k)).abs() < 1e-15);
    assert!((out.nis() - 1.0 / (p + r)).abs() < 1e-15);
    assert!(
        SteadyGain::<f64, 1, 1>::try_new(
            Vector1::zeros(),
            Matrix1::identity(),
            Matrix1::identity(),
            Matrix1::new(k),
            &Matrix1::new(0.0)
        )
        .is_err()
    );
}

/// Runs a short linear scenario through the form-agnostic trait.
fn through_trait<E: cairn_core::Estimator<f64, 3>>() -> Matrix3<f64> {
    let mut e = E::try_new(Vector3::zeros(), Matrix3::identity()).unwrap();
    let f = Matrix3::new(1.0, 0.1, 0.0, 0.0, 1.0, 0.1, 0.0, 0.0, 1.0);
    let h = Matrix2x3::new(1.0, 0.0, 0.0, 0.0, 0.0, 1.0);
    for _ in 0..50 {
        e.predict(&f, &(Matrix3::identity() * 1e-3)).unwrap();
        let _ = e
            .update(
                &Vector2::new(0.1, -0.1),
                &h,
                &Matrix2::new(0.1, 0.02, 0.02, 0.2),
                None,
            )
            .unwrap();
    }
    e.covariance_snapshot()
}

#[test]
fn every_form_behind_the_estimator_trait_gives_the_same_posterior() {
    // Joseph, conventional and U-D are the same posterior in exact arithmetic
    // (Bierman 1977): in f64 they agree to rounding on a benign model.
    let j = through_trait::<Kalman<f64, 3, Joseph>>();
    let c = through_trait::<Kalman<f64, 3, Conventional>>();
    let u = through_trait::<UdKalman<f64, 3>>();
    assert!((j - c).norm() / j.norm() < 1e-12);
    assert!((j - u).norm() / j.norm() < 1e-12);
}

#[test]
fn noise_sources_time_update_equals_the_full_q_one() {
    // Thornton and Bierman (1977): the weighted Gram-Schmidt time update
    // accepts Q as G diag(q) G' directly; in f64 it must give F P F' + Q.
    use cairn_core::ProcessModel;
    use cairn_core::pose::{Odometry, PlanarOdometry};
    let motion = PlanarOdometry {
        speed_var: 0.0144_f64,
        yaw_rate_var: 6.9e-6,
        heading_drift_var: 2.7e-10,
    };
    let p0 = Matrix3::new(0.25, 0.01, 0.002, 0.01, 0.2, -0.003, 0.002, -0.003, 0.01);
    let mut a = UdKalman::<f64, 3>::try_new(Vector3::new(0.0, 0.0, 0.4), p0).unwrap();
    let mut b = Kalman::<f64, 3, Joseph>::try_new(Vector3::new(0.0, 0.0, 0.4), p0).unwrap();
    for k in 0..2000 {
        let u = Odometry {
            speed: 0.8,
            yaw_rate: 0.26 * ((k / 400) % 2) as f64,
        };
        let x = *b.state();
        let (g, q) = motion.noise_sources(&x, &u, 0.005).unwrap();
        let gq = g * Matrix3::from_diagonal(&q) * g.transpose();
        assert!((gq - motion.noise(&x, &u, 0.005)).norm() <= 1e-15 * gq.norm().max(1e-30));
        a.predict_with(&motion, &u, 0.005).unwrap();
        b.predict_with(&motion, &u, 0.005).unwrap();
    }
    let (pa, pb) = (a.rebuild_covariance(), *b.covariance());
    assert!(
        (pa - pb).norm() / pb.norm() < 1e-12,
        "{}",
        (pa - pb).norm() / pb.norm()
    );
    assert!((a.state() - b.state()).norm() < 1e-12);
}

#[test]
fn joseph_stays_positive_definite_where_its_expansion_does_not() {
    // Dyer and McReynolds' example (via Grewal and Andrews) at d = 1e-2 in
    // f32: the exact posterior's smallest eigenvalue is 1.66e-5 (f64
    // textbook update below, an independent nalgebra computation). The
    // factored Joseph order must keep it positive and close; the expanded
    // form P - KB' - BK' + KSK' went indefinite here (-4.5e-5, measured).
    let d = 1e-2_f32;
    let p = covariance_form::<Joseph>(d).unwrap();
    let h = dyer_h(d).map(f64::from);
    let r = Matrix2::identity() * f64::from(d * d);
    let s = h * h.transpose() + r;
    let exact = Matrix3::identity() - h.transpose() * s.cholesky().unwrap().inverse() * h;
    let (got, want) = (
        p.symmetric_eigenvalues().min(),
        exact.symmetric_eigenvalues().min(),
    );
    assert!(
        (want - 1.66e-5).abs() < 1e-7,
        "exact smallest eigenvalue {want}"
    );
    assert!(
        got > 0.0 && (got - want).abs() < 0.05 * want,
        "f32 Joseph smallest eigenvalue {got} vs {want}"
    );
}

/// The pose model with its noise sources hidden: filters must take its Q
/// as a matrix and check it in full.
struct OnlyQ(cairn_core::pose::PlanarOdometry<f32>);

impl cairn_core::ProcessModel<f32, 3> for OnlyQ {
    type Input = cairn_core::pose::Odometry<f32>;
    fn transition(&self, x: &Vector3<f32>, u: &Self::Input, dt: f32) -> Vector3<f32> {
        self.0.transition(x, u, dt)
    }
    fn jacobian(&self, x: &Vector3<f32>, u: &Self::Input, dt: f32) -> Matrix3<f32> {
        self.0.jacobian(x, u, dt)
    }
    fn noise(&self, x: &Vector3<f32>, u: &Self::Input, dt: f32) -> Matrix3<f32> {
        self.0.noise(x, u, dt)
    }
    fn normalize(&self, x: &mut Vector3<f32>) {
        self.0.normalize(x);
    }
}

#[test]
fn predict_from_noise_sources_equals_predict_from_q() {
    // Q = G diag(q) G' (common practice): the filter forming Q from the
    // model's sources (checking q >= 0 only) and the filter given Q (checked
    // in full) compute the same f32 covariance, step for step, to the
    // rounding of a zero's sign at most.
    use cairn_core::ProcessModel;
    use cairn_core::pose::{Odometry, PlanarOdometry};
    let motion = PlanarOdometry {
        speed_var: 4e-4,
        yaw_rate_var: 1e-4,
        heading_drift_var: 1e-8,
    };
    assert!(
        motion
            .noise_sources(
                &Vector3::zeros(),
                &Odometry {
                    speed: 1.0,
                    yaw_rate: 0.0
                },
                0.01
            )
            .is_some()
    );
    let start = Kalman::<f32, 3, Joseph>::try_new(Vector3::zeros(), Matrix3::identity() * 1e-2)
        .expect("P0 is a covariance");
    let (mut a, mut b) = (start, start);
    for k in 0..500 {
        let u = Odometry {
            speed: 0.5 + 0.001 * k as f32,
            yaw_rate: 0.2 - 0.0005 * k as f32,
        };
        a.predict_with(&motion, &u, 0.005).expect("sources path");
        b.predict_with(&OnlyQ(motion), &u, 0.005)
            .expect("matrix path");
        for (x, y) in a.covariance().iter().zip(b.covariance().iter()) {
            assert!(x == y, "step {k}: {x:e} against {y:e}");
        }
        assert_eq!(a.state(), b.state());
    }
}
