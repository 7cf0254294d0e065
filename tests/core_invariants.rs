//! Property tests of the core's invariants on random well-conditioned models,
//! run once per scalar type, with an independent f64 reference computed by
//! nalgebra's own Cholesky factorisation and inverse.

use cairn_core::{Conventional, CovarianceForm, Joseph, Kalman, Outcome, Scalar};
use nalgebra::{SMatrix, SVector};
use proptest::prelude::*;

const N: usize = 4;
const M: usize = 2;

/// A random well-conditioned model: F near identity, Q, R and P0 of the
/// form A A' + c I.
#[derive(Debug, Clone)]
struct Model {
    f: SMatrix<f64, N, N>,
    q: SMatrix<f64, N, N>,
    h: SMatrix<f64, M, N>,
    r: SMatrix<f64, M, M>,
    p0: SMatrix<f64, N, N>,
    x0: SVector<f64, N>,
    z: SVector<f64, M>,
}

fn spd<const K: usize>(a: Vec<f64>, floor: f64) -> SMatrix<f64, K, K> {
    let a = SMatrix::<f64, K, K>::from_iterator(a);
    a * a.transpose() + SMatrix::<f64, K, K>::identity() * floor
}

fn model() -> impl Strategy<Value = Model> {
    let v = |n: usize| prop::collection::vec(-1.0f64..1.0, n);
    (v(N * N), v(N * N), v(M * N), v(M * M), v(N * N), v(N), v(M)).prop_map(
        |(f, q, h, r, p, x, z)| Model {
            f: SMatrix::<f64, N, N>::identity() + SMatrix::from_iterator(f) * 0.2,
            q: spd::<N>(q, 0.01) * 0.1,
            h: SMatrix::from_iterator(h),
            r: spd::<M>(r, 0.1),
            p0: spd::<N>(p, 0.1),
            x0: SVector::from_iterator(x),
            z: SVector::from_iterator(z) * 3.0,
        },
    )
}

fn cast<T: Scalar, const R: usize, const C: usize>(a: &SMatrix<f64, R, C>) -> SMatrix<T, R, C> {
    a.map(T::of)
}

fn widen<T: Scalar, const R: usize, const C: usize>(a: &SMatrix<T, R, C>) -> SMatrix<f64, R, C> {
    a.map(Scalar::to_f64)
}

fn min_eigen(p: &SMatrix<f64, N, N>) -> f64 {
    p.symmetric_eigenvalues().min()
}

/// Textbook posterior P - P H' S^-1 H P with S inverted by nalgebra's
/// Cholesky: an independent reference for both forms.
fn textbook_posterior(
    p: &SMatrix<f64, N, N>,
    h: &SMatrix<f64, M, N>,
    r: &SMatrix<f64, M, M>,
) -> SMatrix<f64, N, N> {
    let s = h * p * h.transpose() + r;
    let s_inv = s.cholesky().expect("S is SPD for these models").inverse();
    p - p * h.transpose() * s_inv * h * p
}

fn bits<T: Scalar, F: CovarianceForm>(kf: &Kalman<T, N, F>) -> Vec<u64> {
    kf.state()
        .iter()
        .chain(kf.covariance().iter())
        .map(|v| v.to_f64().to_bits())
        .collect()
}

macro_rules! invariants_for {
    ($name:ident, $t:ty, $sym_tol:expr, $eig_tol:expr) => {
        mod $name {
            use super::*;

            fn run<F: CovarianceForm>(m: &Model) -> Result<(), TestCaseError> {
                let mut kf = Kalman::<$t, N, F>::try_new(cast(&m.x0), cast(&m.p0)).unwrap();
                for _ in 0..5 {
                    kf.predict(&cast(&m.f), &cast(&m.q)).unwrap();
                    let prior = widen(kf.covariance());
                    let out = kf.update(&cast(&m.z), &cast(&m.h), &cast(&m.r), None).unwrap();
                    prop_assert!(out.is_applied());
                    let p = widen(kf.covariance());
                    // Exact symmetry is a design guarantee of the core.
                    prop_assert_eq!(p, p.transpose());
                    // Positive definite (common practice: a covariance).
                    prop_assert!(min_eigen(&p) > 0.0, "min eigenvalue {}", min_eigen(&p));
                    // An update never increases covariance: P_prior - P_post is
                    // positive semidefinite (Kalman 1960, information only added).
                    let drop = min_eigen(&(prior - p));
                    prop_assert!(drop > -$eig_tol * prior.norm(), "prior - post eigenvalue {}", drop);
                    // Agreement with the textbook posterior in f64 arithmetic.
                    let reference = textbook_posterior(&prior, &m.h, &m.r);
                    let rel = (p - reference).norm() / reference.norm();
                    prop_assert!(rel < $sym_tol, "relative difference {} from textbook", rel);
                }
                Ok(())
            }

            proptest! {
                #![proptest_config(ProptestConfig::with_cases(64))]

                #[test]
                fn joseph_keeps_a_symmetric_positive_definite_covariance(m in model()) {
                    run::<Joseph>(&m)?;
                }

                #[test]
                fn conventional_keeps_a_symmetric_positive_definite_covariance(m in model()) {
                    run::<Conventional>(&m)?;
                }

                #[test]
                fn a_gated_update_changes_no_bit(m in model()) {
                    let mut kf = Kalman::<$t, N, Joseph>::try_new(cast(&m.x0), cast(&m.p0)).unwrap();
                    kf.predict(&cast(&m.f), &cast(&m.q)).unwrap();
                    let before = bits(&kf);
                    // A measurement far outside any plausible gate.
                    let z = cast::<$t, M, 1>(&(m.z.add_scalar(1e6)));
                    let out = kf.update(&z, &cast(&m.h), &cast(&m.r), Some(<$t>::of(11.34))).unwrap();
                    prop_assert!(matches!(out, Outcome::Gated { .. }), "expected a gated outcome");
                    prop_assert_eq!(&bits(&kf), &before);
                    let out = kf.update_sequential(&z, &cast(&m.h), &cast(&m.r.diagonal()), Some(<$t>::of(11.34))).unwrap();
                    prop_assert!(matches!(out, Outcome::Gated { .. }), "expected a gated outcome");
                    prop_assert_eq!(&bits(&kf), &before);
                }

                #[test]
                fn sequential_matches_joint_update_for_diagonal_noise(m in model()) {
                    // Processing uncorrelated components one at a time gives the
                    // joint posterior and the joint NIS (common practice; e.g.
                    // Bar-Shalom, Li and Kirubarajan 2001, sequential updating).
                    let r = SMatrix::<f64, M, M>::from_diagonal(&m.r.diagonal());
                    let mut joint = Kalman::<$t, N, Joseph>::try_new(cast(&m.x0), cast(&m.p0)).unwrap();
                    let mut seq = joint;
                    let a = joint.update(&cast(&m.z), &cast(&m.h), &cast(&r), None).unwrap();
                    let b = seq.update_sequential(&cast(&m.z), &cast(&m.h), &cast(&m.r.diagonal()), None).unwrap();
                    let pj = widen(joint.covariance());
                    let ps = widen(seq.covariance());
                    prop_assert!((pj - ps).norm() / pj.norm() < $sym_tol);
                    let (na, nb) = (a.nis().to_f64(), b.nis().to_f64());
                    prop_assert!((na - nb).abs() <= $sym_tol * 10.0 * na.max(1.0), "nis {} vs {}", na, nb);
                }
            }
        }
    };
}

// f64: both forms agree with the textbook posterior to about 1e-9 relative
// (the requirement); f32 to single-precision level.
invariants_for!(in_f64, f64, 1e-9, 1e-12);
invariants_for!(in_f32, f32, 2e-3, 1e-5);

#[test]
fn joseph_and_conventional_agree_in_f64() {
    // Both are algebraically the same posterior (Bucy and Joseph 1968);
    // on a well-conditioned model they agree to rounding.
    let m = Model {
        f: SMatrix::<f64, N, N>::identity(),
        q: SMatrix::<f64, N, N>::identity() * 0.01,
        h: SMatrix::<f64, M, N>::new(1.0, 0.5, 0.0, 0.0, 0.0, 0.3, 1.0, -0.2),
        r: SMatrix::<f64, M, M>::new(0.2, 0.05, 0.05, 0.3),
        p0: SMatrix::<f64, N, N>::identity() * 2.0,
        x0: SVector::zeros(),
        z: SVector::<f64, M>::new(0.4, -1.0),
    };
    let mut j = Kalman::<f64, N, Joseph>::try_new(m.x0, m.p0).unwrap();
    let mut c = Kalman::<f64, N, Conventional>::try_new(m.x0, m.p0).unwrap();
    for _ in 0..100 {
        j.predict(&m.f, &m.q).unwrap();
        c.predict(&m.f, &m.q).unwrap();
        let _ = j.update(&m.z, &m.h, &m.r, None).unwrap();
        let _ = c.update(&m.z, &m.h, &m.r, None).unwrap();
    }
    let rel = (j.covariance() - c.covariance()).norm() / c.covariance().norm();
    assert!(rel < 1e-9, "relative difference {rel}");
}
