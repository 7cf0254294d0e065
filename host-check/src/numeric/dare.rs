//! Steady state of the filter's discrete algebraic Riccati equation,
//! solved in double-double with a residual check.
//!
//! The filter DARE for `x(k+1) = F x(k) + w`, `z = H x + v` is
//! `P = F (P - P H' (H P H' + R)^-1 H P) F' + Q` for the steady prior `P`.
//! It is solved by the structure-preserving doubling algorithm (SDA: E. K.-W.
//! Chu, H.-Y. Fan, W.-W. Lin & C.-S. Wang, "Structure-preserving algorithms
//! for periodic discrete-time algebraic Riccati equations", Int. J. Control
//! 77(8), 2004; W.-W. Lin & S.-F. Xu, SIAM J. Matrix Anal. Appl. 28(1),
//! 2006), which converges quadratically, so slow filters (gains near zero)
//! cost no more than fast ones. Every operation is in [`Dd`](super::Dd); the answer is
//! then polished by two plain Riccati steps and its relative residual is
//! reported.

#![allow(clippy::needless_range_loop)] // index loops read like the formulas

use nalgebra::DMatrix;

use super::{DdMatrix, NumericError};

/// The steady state of a linear time-invariant filter.
#[derive(Clone, Debug, PartialEq)]
pub struct Steady {
    /// Steady prior (predicted) covariance `P-`.
    pub prior: DMatrix<f64>,
    /// Steady posterior (updated) covariance `P+ = P- - K S K'`.
    pub posterior: DMatrix<f64>,
    /// Steady gain `K = P- H' S^-1`, `S = H P- H' + R`.
    pub gain: DMatrix<f64>,
    /// Doubling steps used (each doubles the horizon covered: `k` steps
    /// equal `2^k` Riccati iterations).
    pub iterations: usize,
    /// `||Ric(P) - P||_F / ||P||_F` at the returned `P` (0 when `P = 0`),
    /// evaluated in double-double.
    pub residual: f64,
}

/// Largest number of doubling steps (covers 2^80 Riccati iterations).
const MAX_DOUBLINGS: usize = 80;
/// Convergence: relative change of the doubling iterate below this.
const TOL: f64 = 1e-28;
/// A solution whose residual exceeds this is reported as not converged.
const RESIDUAL_LIMIT: f64 = 1e-20;
/// Closed-loop spectral radius at or above `1 - STABLE_MARGIN` means the
/// solution does not stabilise the filter.
const STABLE_MARGIN: f64 = 1e-10;

fn dims(
    what: &'static str,
    expected: (usize, usize),
    found: (usize, usize),
) -> Result<(), NumericError> {
    if expected == found {
        Ok(())
    } else {
        Err(NumericError::DimensionMismatch {
            what,
            expected,
            found,
        })
    }
}

fn finite(what: &'static str, m: &DMatrix<f64>) -> Result<(), NumericError> {
    if m.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(NumericError::NonFinite { what })
    }
}

/// One Riccati step in double-double: returns `(prior_next, posterior,
/// gain)` from the prior `p`.
fn riccati_step(
    p: &DdMatrix,
    f: &DdMatrix,
    ft: &DdMatrix,
    h: &DdMatrix,
    ht: &DdMatrix,
    q: &DdMatrix,
    r: &DdMatrix,
) -> Result<(DdMatrix, DdMatrix, DdMatrix), NumericError> {
    let hp = h.try_mul(p)?;
    let s = hp.try_mul(ht)?.try_add(r)?;
    // S^-1 H P (m x n); gain K = (S^-1 H P)'.
    let y = s
        .solve_spd(&hp)
        .map_err(|_| NumericError::NotPositiveDefinite {
            what: "innovation covariance H P H' + R",
        })?;
    let mut post = p.try_sub(&hp.transpose().try_mul(&y)?)?;
    post.symmetrize_mut();
    let mut next = f.try_mul(&post)?.try_mul(ft)?.try_add(q)?;
    next.symmetrize_mut();
    Ok((next, post, y.transpose()))
}

/// Solves the filter DARE for the steady prior covariance, posterior and
/// gain.
///
/// Requirements (checked): `f` is `n x n`, `h` is `m x n`, `q` is `n x n`
/// symmetric, `r` is `m x m` symmetric positive definite, all finite.
/// Existence of the stabilising solution needs `(F, H)` detectable and
/// `(F, Q^(1/2))` stabilisable (e.g. Anderson & Moore, *Optimal Filtering*,
/// 1979, chapter 4; from memory); both failures are detected and reported.
///
/// # Errors
/// [`NumericError::DimensionMismatch`], [`NumericError::NonFinite`],
/// [`NumericError::NotPositiveDefinite`] (for `R`) on bad input;
/// [`NumericError::NotDetectable`] when the iterates grow without bound;
/// [`NumericError::NotStabilisable`] when the solution found leaves a
/// closed-loop mode on or outside the unit circle;
/// [`NumericError::NoConvergence`] when neither convergence nor divergence
/// is seen within the step limit or the residual check fails.
pub fn solve(
    f: &DMatrix<f64>,
    h: &DMatrix<f64>,
    q: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<Steady, NumericError> {
    let n = f.nrows();
    let m = h.nrows();
    dims("transition matrix F", (n, n), f.shape())?;
    dims("measurement matrix H", (m, n), h.shape())?;
    dims("process noise Q", (n, n), q.shape())?;
    dims("measurement noise R", (m, m), r.shape())?;
    finite("transition matrix F", f)?;
    finite("measurement matrix H", h)?;
    finite("process noise Q", q)?;
    finite("measurement noise R", r)?;
    let fd = DdMatrix::from_f64(f);
    let ft = fd.transpose();
    let hd = DdMatrix::from_f64(h);
    let ht = hd.transpose();
    let mut qd = DdMatrix::from_f64(q);
    qd.symmetrize_mut();
    let mut rd = DdMatrix::from_f64(r);
    rd.symmetrize_mut();
    let rinv_h = rd
        .solve_spd(&hd)
        .map_err(|_| NumericError::NotPositiveDefinite {
            what: "measurement noise R",
        })?;

    // Control form X = A' X (I + G X)^-1 A + H0 with A = F', G = H' R^-1 H,
    // H0 = Q; the stabilising X is the steady prior P.
    let mut a = ft.clone();
    let mut g = ht.try_mul(&rinv_h)?;
    g.symmetrize_mut();
    let mut x = qd.clone();
    let id = DdMatrix::identity(n);
    let mut iterations = 0;
    let mut converged = false;
    while iterations < MAX_DOUBLINGS {
        iterations += 1;
        // W = I + G X; solve W [Y1 Y2] = [A G].
        let w = id.try_add(&g.try_mul(&x)?)?;
        let mut rhs = DdMatrix::zeros(n, 2 * n);
        for i in 0..n {
            for j in 0..n {
                rhs[(i, j)] = a[(i, j)];
                rhs[(i, n + j)] = g[(i, j)];
            }
        }
        let sol = match w.solve_lu(&rhs) {
            Ok(s) => s,
            Err(_) => return Err(NumericError::NotDetectable),
        };
        let mut y1 = DdMatrix::zeros(n, n);
        let mut y2 = DdMatrix::zeros(n, n);
        for i in 0..n {
            for j in 0..n {
                y1[(i, j)] = sol[(i, j)];
                y2[(i, j)] = sol[(i, n + j)];
            }
        }
        let at = a.transpose();
        let a_next = a.try_mul(&y1)?;
        let mut g_next = g.try_add(&a.try_mul(&y2)?.try_mul(&at)?)?;
        g_next.symmetrize_mut();
        let mut x_next = x.try_add(&at.try_mul(&x)?.try_mul(&y1)?)?;
        x_next.symmetrize_mut();
        if !x_next.is_finite() || x_next.max_abs().hi() > 1e150 {
            return Err(NumericError::NotDetectable);
        }
        let change = x_next.try_sub(&x)?.norm();
        let size = x_next.norm();
        a = a_next;
        g = g_next;
        x = x_next;
        if change.hi() <= TOL * size.hi() || size.hi() == 0.0 {
            converged = true;
            break;
        }
        // A_k -> 0 when the closed loop is stable; when it grows instead and
        // X keeps changing, the iteration is diverging.
        if !a.is_finite() || !g.is_finite() {
            return Err(NumericError::NotDetectable);
        }
    }
    if !converged {
        return Err(NumericError::NoConvergence {
            what: "Riccati doubling",
            iterations,
        });
    }
    // Polish with two Riccati steps, then measure the residual.
    let mut p = x;
    for _ in 0..2 {
        p = riccati_step(&p, &fd, &ft, &hd, &ht, &qd, &rd)?.0;
    }
    let (next, post, gain) = riccati_step(&p, &fd, &ft, &hd, &ht, &qd, &rd)?;
    let pn = p.norm();
    let residual = if pn.hi() == 0.0 {
        next.norm().to_f64()
    } else {
        (next.try_sub(&p)?.norm() / pn).to_f64()
    };
    if !residual.is_finite() || residual > RESIDUAL_LIMIT {
        return Err(NumericError::NoConvergence {
            what: "Riccati doubling (residual check)",
            iterations,
        });
    }
    // Stabilising? Closed loop F (I - K H).
    let kf = gain.to_f64();
    let closed = f * (DMatrix::<f64>::identity(n, n) - &kf * h);
    let radius = spectral_radius(&closed)?;
    if radius >= 1.0 - STABLE_MARGIN {
        return Err(NumericError::NotStabilisable {
            spectral_radius: radius,
        });
    }
    Ok(Steady {
        prior: p.to_f64(),
        posterior: post.to_f64(),
        gain: kf,
        iterations,
        residual,
    })
}

/// Largest eigenvalue modulus of a real square matrix (`f64` Schur form).
///
/// # Errors
/// [`NumericError::NoConvergence`] when the Schur iteration fails.
pub fn spectral_radius(m: &DMatrix<f64>) -> Result<f64, NumericError> {
    if m.nrows() == 0 {
        return Ok(0.0);
    }
    let schur = nalgebra::linalg::Schur::try_new(m.clone(), f64::EPSILON, 10_000).ok_or(
        NumericError::NoConvergence {
            what: "Schur decomposition",
            iterations: 10_000,
        },
    )?;
    Ok(schur
        .complex_eigenvalues()
        .iter()
        .map(|z| z.norm())
        .fold(0.0, f64::max))
}

#[cfg(test)]
mod tests {
    use super::*;

    fn random_walk(q: f64, r: f64) -> Steady {
        solve(&dmat![1.0], &dmat![1.0], &dmat![q], &dmat![r]).unwrap()
    }

    #[test]
    fn random_walk_in_white_noise() {
        // Closed form (docs/references.md, computed): P = (q + sqrt(q^2 + 4qr))/2,
        // K = q/P, posterior = P - q; and the tabulated values.
        for &(q, r, p_tab, k_tab, tol) in &[
            (1.0, 1.0, 1.618_034_0, 0.618_034_0, 1e-7),
            (0.01, 1.0, 0.105_124_9, 0.095_124_9, 1e-7),
            (1e-4, 0.25, 5.050_25e-3, 0.019_801, 1e-6),
        ] {
            let s = random_walk(q, r);
            let p = (q + (q * q + 4.0 * q * r).sqrt()) / 2.0;
            assert!(
                ((s.prior[(0, 0)] - p) / p).abs() < 1e-14,
                "{q} {r}: {:?}",
                s
            );
            assert!(((s.gain[(0, 0)] - q / p) / (q / p)).abs() < 1e-14);
            assert!(((s.posterior[(0, 0)] - (p - q)) / (p - q)).abs() < 1e-13);
            assert!((s.prior[(0, 0)] - p_tab).abs() < tol * p_tab.max(1.0));
            assert!((s.gain[(0, 0)] - k_tab).abs() < tol * 10.0);
            assert!(s.residual < 1e-25, "{}", s.residual);
        }
    }

    fn kalata(lambda: f64) -> (f64, f64) {
        // Kalata (1984), tracking index (docs/references.md; expressions from memory).
        let r = (lambda * lambda + 8.0 * lambda).sqrt();
        let alpha = -(lambda * lambda + 8.0 * lambda - (lambda + 4.0) * r) / 8.0;
        let beta = (lambda * lambda + 4.0 * lambda - lambda * r) / 4.0;
        (alpha, beta)
    }

    #[test]
    fn alpha_beta_gains_match_kalata() {
        // Discrete white-noise-acceleration model: F = [[1,T],[0,1]],
        // Gamma = [T^2/2, T]', Q = sigma_w^2 Gamma Gamma', H = [1, 0],
        // R = sigma_v^2; lambda = sigma_w T^2 / sigma_v; K = [alpha, beta/T]
        // (Kalata 1984, values computed in docs/references.md).
        let table = [
            (0.1, 0.36, 0.08),
            (0.5, 0.628_37, 0.304_81),
            (1.0, 0.75, 0.5),
            (2.0, 0.854_10, 0.763_93),
            (10.0, 0.978_71, 1.458_98),
        ];
        for &(t, sigma_v) in &[(1.0, 1.0), (0.05, 0.3)] {
            for &(lambda, a_tab, b_tab) in &table {
                let sigma_w = lambda * sigma_v / (t * t);
                let gamma = dmat![t * t / 2.0; t];
                let q = &gamma * gamma.transpose() * (sigma_w * sigma_w);
                let f = dmat![1.0, t; 0.0, 1.0];
                let s = solve(&f, &dmat![1.0, 0.0], &q, &dmat![sigma_v * sigma_v]).unwrap();
                let (alpha, beta) = (s.gain[(0, 0)], s.gain[(1, 0)] * t);
                let (a_cf, b_cf) = kalata(lambda);
                assert!(
                    (alpha - a_cf).abs() < 1e-12,
                    "lambda {lambda}: {alpha} vs {a_cf}"
                );
                assert!(
                    (beta - b_cf).abs() < 1e-12,
                    "lambda {lambda}: {beta} vs {b_cf}"
                );
                assert!((alpha - a_tab).abs() < 6e-6 && (beta - b_tab).abs() < 6e-6);
                // beta^2 / (1 - alpha) = lambda^2 (Kalata 1984).
                assert!((beta * beta / (1.0 - alpha) / (lambda * lambda) - 1.0).abs() < 1e-10);
            }
        }
    }

    #[test]
    fn continuous_wna_alpha_beta() {
        // Continuous white-noise-acceleration model discretised with q = T = 1
        // (Qd = [[1/3, 1/2], [1/2, 1]], Bar-Shalom et al. 2001), sigma_v = 1:
        // alpha 0.75674, beta 0.49322, beta^2/(1-alpha) = T^2 Qd22 / R = 1
        // (docs/references.md, computed).
        let q = dmat![1.0 / 3.0, 0.5; 0.5, 1.0];
        let s = solve(
            &dmat![1.0, 1.0; 0.0, 1.0],
            &dmat![1.0, 0.0],
            &q,
            &dmat![1.0],
        )
        .unwrap();
        let (alpha, beta) = (s.gain[(0, 0)], s.gain[(1, 0)]);
        assert!((alpha - 0.756_74).abs() < 6e-6, "{alpha}");
        assert!((beta - 0.493_22).abs() < 6e-6, "{beta}");
        assert!((beta * beta / (1.0 - alpha) - 1.0).abs() < 1e-12);
        // Posterior = (I - K H) prior (definition; common practice).
        let h = dmat![1.0, 0.0];
        let post = (DMatrix::identity(2, 2) - &s.gain * &h) * &s.prior;
        assert!((post - &s.posterior).abs().max() < 1e-14);
    }

    #[test]
    fn slow_filter_converges_quickly() {
        // q/r = 1e-12: K ~ 1e-6, plain Riccati iteration would need ~1e7
        // steps; doubling needs a few dozen. Closed form as above.
        let s = random_walk(1e-12, 1.0);
        let p = (1e-12 + (1e-24f64 + 4e-12).sqrt()) / 2.0;
        assert!(((s.prior[(0, 0)] - p) / p).abs() < 1e-13);
        assert!(s.iterations < 40, "{}", s.iterations);
    }

    #[test]
    fn undetectable_and_unstabilisable_are_reported() {
        // Unstable mode (2.0) not seen by H: no bounded steady state
        // (Anderson & Moore 1979; from memory).
        let e = solve(
            &dmat![2.0, 0.0; 0.0, 0.5],
            &dmat![0.0, 1.0],
            &DMatrix::identity(2, 2),
            &dmat![1.0],
        );
        assert_eq!(e, Err(NumericError::NotDetectable));
        // A random walk without process noise: P -> 0 and the gain -> 0, the
        // closed loop keeps its eigenvalue 1 (not stabilisable).
        let e = solve(&dmat![1.0], &dmat![1.0], &dmat![0.0], &dmat![1.0]);
        assert!(
            matches!(e, Err(NumericError::NotStabilisable { .. })),
            "{e:?}"
        );
        // A stable unobserved mode is fine (detectable).
        let s = solve(
            &dmat![0.5, 0.0; 0.0, 1.0],
            &dmat![0.0, 1.0],
            &DMatrix::identity(2, 2),
            &dmat![1.0],
        )
        .unwrap();
        // Unobserved stable mode: P11 = 1 / (1 - 0.25) (Lyapunov, closed form).
        assert!((s.prior[(0, 0)] - 4.0 / 3.0).abs() < 1e-14);
    }

    #[test]
    fn bad_input_is_an_error() {
        let one = dmat![1.0];
        assert!(matches!(
            solve(&one, &one, &one, &dmat![0.0]),
            Err(NumericError::NotPositiveDefinite { .. })
        ));
        assert!(matches!(
            solve(&one, &dmat![1.0, 0.0], &one, &one),
            Err(NumericError::DimensionMismatch { .. })
        ));
        assert!(matches!(
            solve(&one, &one, &dmat![f64::INFINITY], &one),
            Err(NumericError::NonFinite { .. })
        ));
    }
}
