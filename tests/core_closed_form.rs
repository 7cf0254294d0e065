//! The core against published closed forms.

use cairn_core::{Conventional, Joseph, Kalman};
use nalgebra::{Matrix1, Vector1};

/// Runs a scalar random walk observed in white noise to steady state and
/// returns (prior variance, gain).
fn random_walk_steady<F: cairn_core::CovarianceForm>(q: f64, r: f64) -> (f64, f64) {
    let mut kf = Kalman::<f64, 1, F>::try_new(Vector1::zeros(), Matrix1::new(1.0)).unwrap();
    let (mut prior, mut gain) = (0.0, 0.0);
    for _ in 0..20_000 {
        kf.predict(&Matrix1::identity(), &Matrix1::new(q)).unwrap();
        prior = kf.covariance()[(0, 0)];
        gain = prior / (prior + r);
        let _ = kf
            .update(
                &Vector1::new(0.0),
                &Matrix1::identity(),
                &Matrix1::new(r),
                None,
            )
            .unwrap();
    }
    (prior, gain)
}

#[test]
fn random_walk_in_white_noise_reaches_the_closed_form_steady_state() {
    // Steady prior variance P = (q + sqrt(q^2 + 4 q r)) / 2, gain K = q / P:
    // the scalar discrete Riccati equation solved in closed form (values in
    // shared REFERENCES, "computed"): q = r = 1 -> P = 1.6180340, K = 0.6180340;
    // q = 0.01, r = 1 -> P = 0.1051249, K = 0.0951249.
    for &(q, r, p_expect, k_expect) in &[
        (1.0, 1.0, 1.618_034_0, 0.618_034_0),
        (0.01, 1.0, 0.105_124_9, 0.095_124_9),
    ] {
        let closed = (q + f64::sqrt(q * q + 4.0 * q * r)) / 2.0;
        assert!((closed - p_expect).abs() < 1e-7);
        let (p, k) = random_walk_steady::<Joseph>(q, r);
        assert!(
            (p - closed).abs() / closed < 1e-12,
            "joseph P {p} vs {closed}"
        );
        assert!((k - k_expect).abs() < 1e-7, "joseph K {k}");
        let (p, _) = random_walk_steady::<Conventional>(q, r);
        assert!(
            (p - closed).abs() / closed < 1e-12,
            "conventional P {p} vs {closed}"
        );
    }
}
