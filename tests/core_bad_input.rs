//! Every kind of bad input is refused with the right error and leaves the
//! filter bit-identical (the core's transactional guarantee).

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use cairn_core::{FilterError, Kalman, Operand};
use nalgebra::{Matrix2, Matrix2x3, Matrix3, Vector1, Vector2, Vector3};

type Pose = Kalman<f32, 3>;

fn filter() -> Pose {
    let p = Matrix3::new(0.04, 0.01, 0.0, 0.01, 0.05, 0.002, 0.0, 0.002, 0.01);
    Kalman::try_new(Vector3::new(1.0, 2.0, 0.3), p).unwrap()
}

fn snapshot(kf: &Pose) -> Vec<u32> {
    kf.state()
        .iter()
        .chain(kf.covariance().iter())
        .map(|v| v.to_bits())
        .collect()
}

/// Runs `op` on a fresh filter, checks it fails with `expected` and that no
/// bit of state or covariance changed.
fn refused<R: core::fmt::Debug>(
    expected: FilterError,
    op: impl FnOnce(&mut Pose) -> Result<R, FilterError>,
) {
    let mut kf = filter();
    let before = snapshot(&kf);
    let err = op(&mut kf).expect_err("bad input must be refused");
    assert_eq!(err, expected);
    assert_eq!(
        snapshot(&kf),
        before,
        "a refused operation changed the filter"
    );
    // The message is readable.
    assert!(!format!("{err}").is_empty());
}

fn h() -> Matrix2x3<f32> {
    PositionFix::<f32>::h()
}

#[test]
fn non_finite_measurement_matrix_and_noise() {
    let r = Matrix2::identity() * 0.01;
    refused(FilterError::NonFinite(Operand::Measurement), |kf| {
        kf.update(&Vector2::new(f32::NAN, 0.0), &h(), &r, None)
    });
    let mut bad_h = h();
    bad_h[(1, 2)] = f32::INFINITY;
    refused(FilterError::NonFinite(Operand::MeasurementMatrix), |kf| {
        kf.update(&Vector2::zeros(), &bad_h, &r, None)
    });
    refused(FilterError::NonFinite(Operand::MeasurementNoise), |kf| {
        kf.update(&Vector2::zeros(), &h(), &(r * f32::NAN), None)
    });
    refused(FilterError::NonFinite(Operand::Gate), |kf| {
        kf.update(&Vector2::zeros(), &h(), &r, Some(f32::NAN))
    });
    refused(FilterError::NonFinite(Operand::Gate), |kf| {
        kf.update(&Vector2::zeros(), &h(), &r, Some(f32::INFINITY))
    });
}

#[test]
fn a_gate_of_zero_or_below_is_named_as_such() {
    // A finite gate that is not positive is not "NaN or infinity".
    let r = Matrix2::identity() * 0.01;
    for g in [0.0, -0.0, -1.0, f32::MIN] {
        refused(FilterError::NotPositive(Operand::Gate), |kf| {
            kf.update(&Vector2::zeros(), &h(), &r, Some(g))
        });
        refused(FilterError::NotPositive(Operand::Gate), |kf| {
            kf.update_sequential(&Vector2::zeros(), &h(), &Vector2::new(0.01, 0.01), Some(g))
        });
        refused(FilterError::NotPositive(Operand::Gate), |kf| {
            kf.update_with(&HeadingFix { var: 1e-3 }, &Vector1::new(0.3), Some(g))
        });
    }
    assert_eq!(
        format!("{}", FilterError::NotPositive(Operand::Gate)),
        "gate threshold is zero or negative"
    );
}

#[test]
fn error_kinds_split_rejected_input_from_an_unhealthy_filter() {
    use cairn_core::ErrorKind::{Rejected, Unhealthy};
    // Matched without a wildcard: both kinds, nothing else.
    let name = |k: cairn_core::ErrorKind| match k {
        Rejected => "rejected",
        Unhealthy => "unhealthy",
    };
    for (e, kind) in [
        (FilterError::NonFinite(Operand::State), Rejected),
        (
            FilterError::NotPositiveDefinite {
                operand: Operand::ProcessNoise,
                index: 0,
            },
            Rejected,
        ),
        (FilterError::NotSymmetric(Operand::Covariance), Rejected),
        (FilterError::InvalidTimeStep, Rejected),
        (FilterError::NotPositive(Operand::Gate), Rejected),
        (FilterError::SingularInnovation { pivot: 1 }, Unhealthy),
        (FilterError::CovarianceLost { index: 2 }, Unhealthy),
    ] {
        assert_eq!(name(e.kind()), name(kind), "{e}");
    }
}

#[test]
fn a_tiny_variance_is_reported_at_its_own_row() {
    // 1e-40 is subnormal in f32 (the smallest normal is 2^-126 = 1.18e-38,
    // IEEE 754 binary32): its reciprocal overflows, and the LDL' test used
    // to carry the infinity into row 2 and report that row.
    let p = Matrix3::from_diagonal(&Vector3::new(1.0, 1e-40, 1.0_f32));
    let expected = Some(FilterError::NotPositiveDefinite {
        operand: Operand::Covariance,
        index: 1,
    });
    assert_eq!(
        Kalman::<f32, 3>::try_new(Vector3::zeros(), p).err(),
        expected
    );
    assert_eq!(
        cairn_core::UdKalman::<f32, 3>::try_new(Vector3::zeros(), p).err(),
        expected
    );
    // The same for R: row 0 of a 2 x 2 measurement noise (it used to be
    // reported at row 1).
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::MeasurementNoise,
            index: 0,
        },
        |kf| {
            kf.update(
                &Vector2::zeros(),
                &h(),
                &Matrix2::from_diagonal(&Vector2::new(1e-40, 0.01)),
                None,
            )
        },
    );
}

#[test]
fn a_declared_diagonal_noise_refuses_what_the_dense_update_refuses() {
    // The position fix declares R diagonal, so its update tests the two
    // variances one by one instead of factoring R: every variance it
    // refuses, at the row it names, must be what the linear update with
    // the same (diagonal) R refuses, and the filter must stay unchanged.
    let values = [f32::NAN, f32::INFINITY, -0.01, 0.0, 1e-40, 1e-30, 0.01];
    let mut refusals = 0;
    for &a in &values {
        for &b in &values {
            let fix = PositionFix {
                var: Vector2::new(a, b),
            };
            let r = Matrix2::from_diagonal(&fix.var);
            let z = Vector2::new(1.01, 1.98);
            let dense = filter().update(&z, &h(), &r, None).map(|_| ());
            let mut kf = filter();
            let before = snapshot(&kf);
            let patterned = kf.update_with(&fix, &z, None).map(|_| ());
            assert_eq!(patterned, dense, "variances {a}, {b}");
            if patterned.is_err() {
                refusals += 1;
                assert_eq!(snapshot(&kf), before, "variances {a}, {b}");
            }
        }
    }
    // Every pair with one of the first five values is refused but two: a
    // subnormal last variance, whose reciprocal the factorisation never
    // needs, after a usable first one.
    assert_eq!(refusals, 7 * 7 - 2 * 2 - 2);
}

#[test]
fn negative_and_indefinite_noise() {
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::MeasurementNoise,
            index: 0,
        },
        |kf| {
            kf.update(
                &Vector2::zeros(),
                &h(),
                &(Matrix2::identity() * -0.01),
                None,
            )
        },
    );
    // Symmetric but indefinite: eigenvalues 0.03 and -0.01.
    let indefinite = Matrix2::new(0.01, 0.02, 0.02, 0.01);
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::MeasurementNoise,
            index: 1,
        },
        |kf| kf.update(&Vector2::zeros(), &h(), &indefinite, None),
    );
    refused(FilterError::NotSymmetric(Operand::MeasurementNoise), |kf| {
        kf.update(
            &Vector2::zeros(),
            &h(),
            &Matrix2::new(0.01, 0.001, 0.0, 0.01),
            None,
        )
    });
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::MeasurementNoise,
            index: 1,
        },
        |kf| kf.update_sequential(&Vector2::zeros(), &h(), &Vector2::new(0.01, 0.0), None),
    );
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::ProcessNoise,
            index: 2,
        },
        |kf| {
            kf.predict(
                &Matrix3::identity(),
                &Matrix3::from_diagonal(&Vector3::new(0.1, 0.1, -1e-6)),
            )
        },
    );
}

#[test]
fn singular_innovation_covariance() {
    // Two identical rows with negligible noise: S = H P H' + R is singular
    // to working precision (common practice: a rank decision at the
    // rounding level).
    let twin = Matrix2x3::new(1.0, 0.0, 0.0, 1.0, 0.0, 0.0);
    let tiny = Matrix2::identity() * 1e-30;
    refused(FilterError::SingularInnovation { pivot: 1 }, |kf| {
        kf.update(&Vector2::zeros(), &twin, &tiny, None)
    });
}

#[test]
fn bad_time_steps_and_transitions() {
    let motion = PlanarOdometry {
        speed_var: 1e-4,
        yaw_rate_var: 1e-4,
        heading_drift_var: 0.0,
    };
    let u = Odometry {
        speed: 1.0,
        yaw_rate: 0.1,
    };
    for dt in [0.0, -0.01, f32::NAN, f32::INFINITY] {
        refused(FilterError::InvalidTimeStep, |kf| {
            kf.predict_with(&motion, &u, dt)
        });
    }
    refused(FilterError::NonFinite(Operand::Transition), |kf| {
        kf.predict_with(
            &motion,
            &Odometry {
                speed: f32::NAN,
                yaw_rate: 0.0,
            },
            0.01,
        )
    });
    // The pose model gives its noise as independent sources; the filter
    // forms Q from them and checks only the variances (a negative or NaN
    // variance is not a variance).
    for (bad, index) in [(-1e-4, 0), (f32::NAN, 0)] {
        let expected = if bad.is_nan() {
            FilterError::NonFinite(Operand::ProcessNoise)
        } else {
            FilterError::NotPositiveDefinite {
                operand: Operand::ProcessNoise,
                index,
            }
        };
        refused(expected, |kf| {
            kf.predict_with(
                &PlanarOdometry {
                    speed_var: bad,
                    ..motion
                },
                &u,
                0.01,
            )
        });
    }
    refused(
        FilterError::NotPositiveDefinite {
            operand: Operand::ProcessNoise,
            index: 2,
        },
        |kf| {
            kf.predict_with(
                &PlanarOdometry {
                    heading_drift_var: -1e-9,
                    ..motion
                },
                &u,
                0.01,
            )
        },
    );
    let mut f = Matrix3::identity();
    f[(0, 1)] = f32::NEG_INFINITY;
    refused(FilterError::NonFinite(Operand::Transition), |kf| {
        kf.predict(&f, &Matrix3::zeros())
    });
    // Overflow in the propagated covariance is caught before commit.
    refused(FilterError::CovarianceLost { index: 0 }, |kf| {
        kf.predict(&(Matrix3::identity() * 1e30), &Matrix3::zeros())
    });
}

#[test]
fn bad_initial_covariance() {
    let asym = Matrix3::new(1.0, 0.5, 0.0, 0.0, 1.0, 0.0, 0.0, 0.0, 1.0_f32);
    assert_eq!(
        Kalman::<f32, 3>::try_new(Vector3::zeros(), asym).err(),
        Some(FilterError::NotSymmetric(Operand::Covariance))
    );
    let indefinite = Matrix3::new(1.0, 2.0, 0.0, 2.0, 1.0, 0.0, 0.0, 0.0, 1.0_f32);
    assert_eq!(
        Kalman::<f32, 3>::try_new(Vector3::zeros(), indefinite).err(),
        Some(FilterError::NotPositiveDefinite {
            operand: Operand::Covariance,
            index: 1
        })
    );
    assert_eq!(
        Kalman::<f32, 3>::try_new(Vector3::new(0.0, f32::NAN, 0.0), Matrix3::identity()).err(),
        Some(FilterError::NonFinite(Operand::State))
    );
}

#[test]
fn heading_residual_wraps_and_state_stays_in_range() {
    // Heading near +pi, fix near -pi: the true difference is small, so the
    // update must move the heading a little across the seam, not by 2 pi
    // (common practice for angular residuals).
    let mut kf =
        Kalman::<f64, 3>::try_new(Vector3::new(0.0, 0.0, 3.13), Matrix3::identity() * 0.01)
            .unwrap();
    let out = kf
        .update_with(&HeadingFix { var: 0.01 }, &Vector1::new(-3.13), Some(6.63))
        .unwrap();
    assert!(
        out.is_applied(),
        "wrapped residual is small, must pass the gate"
    );
    let th = kf.state()[2];
    assert!(
        th.abs() > 3.13 && th.abs() <= core::f64::consts::PI,
        "heading {th}"
    );
}

#[test]
fn rank_deficient_process_noise_is_accepted_in_single_precision() {
    // Odometry noise maps two inputs into three states, so Q = L S L' is
    // positive semidefinite and singular; rounding in f32 must not make the
    // cheap definiteness checks refuse it (common practice: one noise
    // source driving several states gives a singular Q).
    let motion = PlanarOdometry {
        speed_var: 4e-4_f32,
        yaw_rate_var: 2.5e-5,
        heading_drift_var: 0.0,
    };
    let mut kf = filter();
    let mut ud = cairn_core::UdKalman::<f32, 3>::try_new(*kf.state(), *kf.covariance()).unwrap();
    for k in 0..20_000 {
        let u = Odometry {
            speed: 1.2,
            yaw_rate: 0.3 * ((k as f32) * 1e-3).sin(),
        };
        kf.predict_with(&motion, &u, 0.005).unwrap();
        ud.predict_with(&motion, &u, 0.005).unwrap();
    }
}

#[test]
fn shifting_the_origin_keeps_f32_positions_resolved() {
    // Far from the origin an f32 position cannot carry a 4 mm step exactly
    // (IEEE 754 binary32: 24-bit significand, so the spacing at 1200 m is
    // 2^-13 m = 0.12 mm; common practice: keep a local origin). Driving
    // 1000 steps of 4 mm at x = 1200 m accumulates rounding; the same drive
    // with the origin moved next to the robot stays exact to f32 at 0.
    let motion = PlanarOdometry {
        speed_var: 1e-4_f32,
        yaw_rate_var: 1e-6,
        heading_drift_var: 0.0,
    };
    let u = Odometry {
        speed: 0.8,
        yaw_rate: 0.0,
    };
    let p0 = Matrix3::identity() * 0.01;
    let mut far = Kalman::<f32, 3>::try_new(Vector3::new(1200.0, 0.0, 0.0), p0).unwrap();
    let mut near = far;
    near.shift_origin(&Vector3::new(1200.0, 0.0, 0.0)).unwrap();
    assert_eq!(near.state()[0], 0.0);
    assert_eq!(near.covariance(), far.covariance());
    for _ in 0..1000 {
        far.predict_with(&motion, &u, 0.005).unwrap();
        near.predict_with(&motion, &u, 0.005).unwrap();
    }
    let exact = 1000.0 * 0.8 * 0.005; // 4 m
    let far_err = (f64::from(far.state()[0]) - 1200.0 - exact).abs();
    let near_err = (f64::from(near.state()[0]) - exact).abs();
    // Measured: near 3.7e-5 m, far 2.8e-2 m.
    assert!(
        near_err < 1e-4 && far_err > 100.0 * near_err,
        "near {near_err}, far {far_err}"
    );
    // A bad offset is refused and changes nothing.
    let before = snapshot(&near);
    for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
        assert_eq!(
            near.shift_origin(&Vector3::new(0.0, bad, 0.0)),
            Err(FilterError::NonFinite(Operand::State))
        );
    }
    assert_eq!(snapshot(&near), before);
}

/// A two-state model whose free Jacobian entry F[0,1] and free source
/// entry G[1,0] are set by the test; the state itself stays finite.
struct Injected {
    f01: f32,
    g10: f32,
}

impl cairn_core::ProcessModel<f32, 2> for Injected {
    type Input = ();
    const JACOBIAN_PATTERN: cairn_core::Pattern<2, 2> = cairn_core::Pattern::IDENTITY.free(0, 1);
    const SOURCES_PATTERN: cairn_core::Pattern<2, 2> =
        cairn_core::Pattern::ZERO.one(0, 0).free(1, 0).one(1, 1);
    fn transition(&self, x: &Vector2<f32>, _u: &(), _dt: f32) -> Vector2<f32> {
        *x
    }
    fn jacobian(&self, _x: &Vector2<f32>, _u: &(), _dt: f32) -> Matrix2<f32> {
        Matrix2::new(1.0, self.f01, 0.0, 1.0)
    }
    fn noise(&self, x: &Vector2<f32>, u: &(), dt: f32) -> Matrix2<f32> {
        let (g, q) = self.noise_sources(x, u, dt).unwrap_or_default();
        g * Matrix2::from_diagonal(&q) * g.transpose()
    }
    fn noise_sources(
        &self,
        _x: &Vector2<f32>,
        _u: &(),
        _dt: f32,
    ) -> Option<(Matrix2<f32>, Vector2<f32>)> {
        Some((
            Matrix2::new(1.0, 0.0, self.g10, 1.0),
            Vector2::new(0.0, 1e-4),
        ))
    }
}

#[test]
fn a_non_finite_jacobian_or_source_entry_is_named_not_reported_as_a_lost_covariance() {
    // The extended predict tests F's and G's free entries through the
    // result (a NaN or infinity there always reaches the diagonal of
    // F P F' + Q: IEEE 754 infinity times zero is NaN) and names them on
    // the error path. P is diagonal, so an infinite F[0,1] meets zeros.
    let start = || {
        Kalman::<f32, 2>::try_new(
            Vector2::new(1.0, -2.0),
            Matrix2::from_diagonal(&Vector2::new(0.5, 0.25)),
        )
        .unwrap()
    };
    let bits = |kf: &Kalman<f32, 2>| {
        kf.state()
            .iter()
            .chain(kf.covariance().iter())
            .map(|v| v.to_bits())
            .collect::<Vec<_>>()
    };
    for bad in [f32::NAN, f32::INFINITY, f32::NEG_INFINITY] {
        for (model, expected) in [
            (
                Injected { f01: bad, g10: 0.5 },
                FilterError::NonFinite(Operand::Transition),
            ),
            (
                Injected { f01: 0.5, g10: bad },
                FilterError::NonFinite(Operand::ProcessNoise),
            ),
            (
                Injected { f01: bad, g10: bad },
                FilterError::NonFinite(Operand::Transition),
            ),
        ] {
            let mut kf = start();
            let before = bits(&kf);
            assert_eq!(kf.predict_with(&model, &(), 0.01), Err(expected), "{bad}");
            assert_eq!(bits(&kf), before, "{bad}");
        }
    }
    // The same model with finite entries predicts.
    let mut kf = start();
    kf.predict_with(&Injected { f01: 0.5, g10: 0.5 }, &(), 0.01)
        .unwrap();
    assert!(kf.covariance()[(0, 0)] > 0.5);
}

/// An extended predict whose covariance overflows is refused, naming the
/// first lost variance: the refusal forms the predicted covariance again
/// from the prior (IEEE 754-2019, section 7.4: an overflowing sum or
/// product rounds to infinity). Row 1 when y's variance overflows; row 2,
/// a row of F that carries the heading over unchanged (its positivity
/// follows from the prior's, its finiteness is still tested), when the
/// heading's does.
#[test]
fn an_overflowing_extended_predict_names_the_lost_variance() {
    // Heading 0 and no turn: sin 0 = 0, so F = I + d e1 e2' with d = v dt.
    let p = Matrix3::from_diagonal(&Vector3::new(1.0, 1.0, 1e37_f32));
    let quiet = PlanarOdometry {
        speed_var: 0.0,
        yaw_rate_var: 0.0,
        heading_drift_var: 0.0,
    };
    let cases = [
        // P'[1,1] = 1 + d (d P[2,2]) = 1e39 with d = 10.
        (
            quiet,
            Odometry {
                speed: 1000.0,
                yaw_rate: 0.0,
            },
            1,
        ),
        // P'[2,2] = P[2,2] + f32::MAX rounds to infinity.
        (
            PlanarOdometry {
                heading_drift_var: f32::MAX,
                ..quiet
            },
            Odometry {
                speed: 0.0,
                yaw_rate: 0.0,
            },
            2,
        ),
    ];
    for (motion, u, index) in cases {
        let mut kf = Kalman::<f32, 3>::try_new(Vector3::zeros(), p).unwrap();
        let before = snapshot(&kf);
        assert_eq!(
            kf.predict_with(&motion, &u, 0.01),
            Err(FilterError::CovarianceLost { index })
        );
        assert_eq!(
            snapshot(&kf),
            before,
            "a refused predict changed the filter"
        );
    }
}
