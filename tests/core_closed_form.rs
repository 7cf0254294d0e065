//! The core against published closed forms.

use cairn_core::{Conventional, CovarianceForm, Joseph, Kalman, UdKalman};
use nalgebra::{Matrix1, Matrix1x2, Matrix2, Vector1, Vector2};

/// The filter's own gain: with a unit innovation, the update moves the
/// state by K (x+ = x- + K nu). Measuring z = h x- + 1 from x- = 0 reads
/// K off the state exactly, without computing it from the covariance.
fn gain_of<const N: usize, F: CovarianceForm>(
    kf: &mut Kalman<f64, N, F>,
    h: &nalgebra::SMatrix<f64, 1, N>,
    r: f64,
) -> nalgebra::SVector<f64, N> {
    let prior = *kf.state();
    let z = h * prior + Vector1::new(1.0);
    let _ = kf.update(&z, h, &Matrix1::new(r), None).unwrap();
    let gain = kf.state() - prior;
    // Back to the origin (P unchanged), so the next prior state is exactly
    // zero and the next difference carries no rounding of a large state.
    let here = *kf.state();
    kf.shift_origin(&here).unwrap();
    gain
}

/// Runs a scalar random walk observed in white noise to steady state and
/// returns (prior variance, the filter's gain, posterior variance).
fn random_walk_steady<F: CovarianceForm>(q: f64, r: f64) -> (f64, f64, f64) {
    let mut kf = Kalman::<f64, 1, F>::try_new(Vector1::zeros(), Matrix1::new(1.0)).unwrap();
    let (mut prior, mut gain) = (0.0, 0.0);
    for _ in 0..20_000 {
        kf.predict(&Matrix1::identity(), &Matrix1::new(q)).unwrap();
        prior = kf.covariance()[(0, 0)];
        gain = gain_of(&mut kf, &Matrix1::identity(), r)[0];
    }
    (prior, gain, kf.covariance()[(0, 0)])
}

#[test]
fn random_walk_in_white_noise_reaches_the_closed_form_steady_state() {
    // Steady prior variance P = (q + sqrt(q^2 + 4 q r)) / 2, gain
    // K = P / (P + r) = q / P, posterior P - q: the scalar discrete Riccati
    // equation solved in closed form (values in docs/references.md,
    // "computed", 7 to 8 digits): q = r = 1 -> P = 1.6180340,
    // K = 0.6180340; q = 0.01, r = 1 -> P = 0.1051249, K = 0.0951249;
    // q = 1e-4, r = 0.25 -> P = 5.05025e-3, K = 0.019801. The filter's
    // gain is read from its state (`gain_of`), not recomputed from P.
    for &(q, r, p_table, k_table, digits) in &[
        (1.0, 1.0, 1.618_034_0, 0.618_034_0, 1e-7),
        (0.01, 1.0, 0.105_124_9, 0.095_124_9, 1e-7),
        (1e-4, 0.25, 5.050_25e-3, 0.019_801, 1e-6),
    ] {
        let closed = (q + f64::sqrt(q * q + 4.0 * q * r)) / 2.0;
        assert!((closed - p_table).abs() < digits, "{closed}");
        assert!((q / closed - k_table).abs() < digits, "{}", q / closed);
        for (name, (p, k, post)) in [
            ("joseph", random_walk_steady::<Joseph>(q, r)),
            ("conventional", random_walk_steady::<Conventional>(q, r)),
        ] {
            // f64 at a contracting fixed point: a few roundings.
            assert!(
                (p - closed).abs() / closed < 1e-12,
                "{name} P {p} vs {closed}"
            );
            assert!(
                (k - q / closed).abs() / (q / closed) < 1e-12,
                "{name} K {k}"
            );
            assert!(
                (post - (closed - q)).abs() / closed < 1e-12,
                "{name} P+ {post}"
            );
        }
    }
}

/// Kalata's steady gains of the discrete white-noise-acceleration tracker
/// at tracking index `lambda` (Kalata 1984; expressions from memory, in
/// docs/references.md).
fn kalata(lambda: f64) -> (f64, f64) {
    let root = (lambda * lambda + 8.0 * lambda).sqrt();
    let alpha = -(lambda * lambda + 8.0 * lambda - (lambda + 4.0) * root) / 8.0;
    let beta = (lambda * lambda + 4.0 * lambda - lambda * root) / 4.0;
    (alpha, beta)
}

#[test]
fn white_noise_acceleration_tracker_reaches_its_closed_form_steady_state() {
    // Position and velocity, F = [[1, T], [0, 1]], H = [1, 0], R = sv^2, and
    // the piecewise-constant acceleration noise (Bar-Shalom, Li and
    // Kirubarajan 2001; from memory) Q = sw^2 [[T^4/4, T^3/2], [T^3/2, T^2]],
    // built here from that formula. Tracking index lambda = sw T^2 / sv.
    //
    // Steady gain K = [alpha, beta / T]. The steady prior follows from the
    // gain by hand: P11 = sv^2 alpha / (1 - alpha) (from K1), P12 =
    // sv^2 (beta / T) / (1 - alpha) (from K2), and the (1, 2) Riccati entry
    // gives P22 = ((alpha + beta) P12 - Q12) / T. At lambda = 1, T = 1,
    // sv = 1: alpha = 3/4, beta = 1/2, P = [[3, 2], [2, 2]]; at T = 1/2,
    // sw = 4 (lambda = 1 again): K = [3/4, 1], P = [[3, 4], [4, 8]]; both
    // re-checked by hand against the (1, 1) and (2, 2) entries of
    // P = F (I - K H) P F' + Q. Every entry of Q enters these, unlike the
    // relation beta^2 / (1 - alpha) = lambda^2, which holds for any Q11 and
    // Q12.
    struct Case {
        // gain holds [alpha, beta]; K = [alpha, beta / T].
        t: f64,
        sw: f64,
        sv: f64,
        gain: [f64; 2],
        prior: [f64; 3],
        tol: f64,
    }
    let (a2, b2) = kalata(2.0);
    // docs/references.md: lambda = 2 -> alpha 0.85410, beta 0.76393 (5 digits).
    assert!((a2 - 0.854_10).abs() < 5e-6 && (b2 - 0.763_93).abs() < 5e-6);
    // lambda = 2 at T = 1, sv = 1, sw = 2: prior from the same relations,
    // with Q12 = sw^2 / 2 = 2.
    let p11 = a2 / (1.0 - a2);
    let p12 = b2 / (1.0 - a2);
    let p22 = (a2 + b2) * p12 - 2.0;
    let cases = [
        Case {
            t: 1.0,
            sw: 1.0,
            sv: 1.0,
            gain: [0.75, 0.5],
            prior: [3.0, 2.0, 2.0],
            tol: 1e-12,
        },
        Case {
            t: 0.5,
            sw: 4.0,
            sv: 1.0,
            gain: [0.75, 0.5],
            prior: [3.0, 4.0, 8.0],
            tol: 1e-12,
        },
        Case {
            t: 1.0,
            sw: 2.0,
            sv: 1.0,
            gain: [a2, b2],
            prior: [p11, p12, p22],
            tol: 1e-12,
        },
    ];
    for c in cases {
        let f = Matrix2::new(1.0, c.t, 0.0, 1.0);
        let s2 = c.sw * c.sw;
        let (t2, t3, t4) = (c.t * c.t, c.t.powi(3), c.t.powi(4));
        let q = Matrix2::new(t4 / 4.0, t3 / 2.0, t3 / 2.0, t2) * s2;
        let h = Matrix1x2::new(1.0, 0.0);
        let r = c.sv * c.sv;
        let mut kf =
            Kalman::<f64, 2, Joseph>::try_new(Vector2::zeros(), Matrix2::identity()).unwrap();
        let mut ud = UdKalman::<f64, 2>::try_new(Vector2::zeros(), Matrix2::identity()).unwrap();
        let (mut prior, mut gain) = (Matrix2::zeros(), Vector2::zeros());
        for _ in 0..2000 {
            kf.predict(&f, &q).unwrap();
            ud.predict(&f, &q).unwrap();
            prior = *kf.covariance();
            gain = gain_of(&mut kf, &h, r);
            let _ = ud
                .update(&Vector1::new(0.0), &h, &Matrix1::new(r), None)
                .unwrap();
        }
        let want_gain = Vector2::new(c.gain[0], c.gain[1] / c.t);
        let want_prior = Matrix2::new(c.prior[0], c.prior[1], c.prior[1], c.prior[2]);
        assert!(
            (gain - want_gain).amax() < c.tol * 10.0,
            "T {}: K {gain} vs {want_gain}",
            c.t
        );
        assert!(
            (prior - want_prior).amax() < c.tol * want_prior.amax() * 10.0,
            "T {}: prior {prior} vs {want_prior}",
            c.t
        );
        // The U-D filter's posterior agrees: (I - K H) P-.
        let post = want_prior - want_gain * (h * want_prior);
        assert!(
            (ud.rebuild_covariance() - post).amax() < 1e-10 * post.amax(),
            "U-D {}",
            ud.rebuild_covariance()
        );
    }
}

#[test]
fn health_bounds_against_exact_chi_square_quantiles() {
    use statrs::distribution::{ChiSquared, ContinuousCDF};
    // The health monitor's two-sided 95% interval for chi-square(k) / k by
    // Wilson and Hilferty (1931), against the exact quantiles of statrs
    // (a general-purpose reference library), k = total degrees of freedom
    // in the window. Measured (printed below) and asserted with a little
    // room: for k >= 10 the lower bound within 0.8% and the upper within
    // 1e-4; for k >= 50 both within 3e-4; the upper bound within 2% for
    // every k >= 1; the lower bound always below the exact one (at small
    // windows "Pessimistic" is flagged late, never early): 48% low at k = 2, 4% at
    // k = 5, and 0 at k = 1, where the approximation goes negative.
    let z = 1.959_963_984_540_054;
    let mut lines = Vec::new();
    for k in [1u32, 2, 3, 4, 5, 6, 8, 10, 15, 20, 30, 50, 100, 200, 500] {
        let chi = ChiSquared::new(f64::from(k)).unwrap();
        let kf = f64::from(k);
        let (lo_exact, hi_exact) = (chi.inverse_cdf(0.025) / kf, chi.inverse_cdf(0.975) / kf);
        let (lo, hi) = cairn_core::wilson_hilferty_bounds(kf, z);
        let (elo, ehi) = ((lo - lo_exact) / lo_exact, (hi - hi_exact) / hi_exact);
        lines.push(format!("k {k}: lower {elo:+.2e}, upper {ehi:+.2e}"));
        if k >= 10 {
            assert!(elo.abs() < 8e-3 && ehi.abs() < 1e-4, "k = {k}: {elo} {ehi}");
        }
        if k >= 50 {
            assert!(elo.abs() < 3e-4 && ehi.abs() < 3e-4, "k = {k}: {elo} {ehi}");
        }
        assert!(ehi.abs() < 0.02, "k = {k}: upper {ehi}");
        assert!(lo <= lo_exact, "k = {k}: lower {lo} above {lo_exact}");
    }
    println!("{}", lines.join("\n"));
    // Published check values (Bar-Shalom, Li and Kirubarajan 2001; shared
    // docs/references.md): chi-square 0.99 quantiles 6.6349 (1 dof), 9.2103 (2),
    // 11.3449 (3) agree with the reference library to the table's digits.
    for (k, q) in [(1.0, 6.6349), (2.0, 9.2103), (3.0, 11.3449), (4.0, 13.2767)] {
        let got = ChiSquared::new(k).unwrap().inverse_cdf(0.99);
        assert!((got - q).abs() < 1e-4, "{k}: {got}");
    }
    assert_eq!(cairn_core::wilson_hilferty_bounds(1.0, z).0, 0.0);
}
