//! Matrix exponential and Van Loan's (1978) discretisation of a continuous
//! linear model driven by white noise.
//!
//! Model and conventions: `dx = A x dt + G dw` with `E[w(t) w(s)'] = Qc
//! delta(t - s)`, `Qc` the two-sided intensity (units of the noise squared
//! times seconds; see [`super::noise`] for turning datasheet figures into
//! it). Over a step `T` the discrete model is `x(k+1) = Phi x(k) + w(k)`,
//! `Phi = e^(A T)`, `Qd = E[w w'] = integral_0^T e^(A s) G Qc G' e^(A' s) ds`.

#![allow(clippy::needless_range_loop)] // index loops read like the formulas

use nalgebra::DMatrix;

use super::NumericError;

fn check_finite(what: &'static str, m: &DMatrix<f64>) -> Result<(), NumericError> {
    if m.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(NumericError::NonFinite { what })
    }
}

/// Van Loan's discretisation (C. F. Van Loan, "Computing integrals
/// involving the matrix exponential", IEEE Trans. Automatic Control
/// AC-23(3), 1978): with `M = [[-A, G Qc G'], [0, A']] T` and `B = e^M`,
/// `Phi = B22'` and `Qd = Phi B12`. Returns `(Phi, Qd)`, `Qd` exactly
/// symmetric. When `||A T||_1 > 1` the formula is applied to `T / 2^s`
/// and the result doubled `s` times (`Phi <- Phi^2`,
/// `Qd <- Phi Qd Phi' + Qd`), which keeps stiff models (time constants far
/// below `T`) finite and accurate.
///
/// Shapes: `a` is `n x n`, `g` is `n x p`, `qc` is `p x p` (only its
/// symmetric part is used); `dt > 0`.
///
/// # Errors
/// [`NumericError::DimensionMismatch`] on shapes, [`NumericError::NonFinite`]
/// on NaN or infinite entries (or a result that overflows),
/// [`NumericError::NotPositive`] when `dt` is not a positive finite number.
pub fn discretize(
    a: &DMatrix<f64>,
    g: &DMatrix<f64>,
    qc: &DMatrix<f64>,
    dt: f64,
) -> Result<(DMatrix<f64>, DMatrix<f64>), NumericError> {
    let n = a.nrows();
    if a.ncols() != n {
        return Err(NumericError::DimensionMismatch {
            what: "system matrix A",
            expected: (n, n),
            found: a.shape(),
        });
    }
    let p = g.ncols();
    if g.nrows() != n {
        return Err(NumericError::DimensionMismatch {
            what: "noise input matrix G",
            expected: (n, p),
            found: g.shape(),
        });
    }
    if qc.shape() != (p, p) {
        return Err(NumericError::DimensionMismatch {
            what: "noise intensity Qc",
            expected: (p, p),
            found: qc.shape(),
        });
    }
    if !(dt.is_finite() && dt > 0.0) {
        return Err(NumericError::NotPositive {
            what: "time step",
            value: dt,
        });
    }
    check_finite("system matrix A", a)?;
    check_finite("noise input matrix G", g)?;
    check_finite("noise intensity Qc", qc)?;
    let qs = (qc + qc.transpose()) * 0.5;
    let gqg = g * qs * g.transpose();
    // Van Loan's block exponential contains e^(-A T): for a stiff stable
    // model (||A T|| in the hundreds) it overflows. So the step is halved
    // until ||A T_s||_1 <= 1, discretised there, and doubled back with the
    // exact semigroup identities Phi(2T) = Phi(T)^2,
    // Qd(2T) = Phi(T) Qd(T) Phi(T)' + Qd(T).
    let norm_at = norm1(a) * dt;
    let halvings = if norm_at > 1.0 {
        norm_at.log2().ceil().min(1000.0) as i32
    } else {
        0
    };
    let ts = dt * 2f64.powi(-halvings);
    let mut m = DMatrix::zeros(2 * n, 2 * n);
    for i in 0..n {
        for j in 0..n {
            m[(i, j)] = -a[(i, j)] * ts;
            m[(i, n + j)] = gqg[(i, j)] * ts;
            m[(n + i, n + j)] = a[(j, i)] * ts;
        }
    }
    let b = expm(&m)?;
    let mut phi = b.view((n, n), (n, n)).transpose();
    let b12 = b.view((0, n), (n, n)).into_owned();
    let mut qd = &phi * b12;
    qd = (&qd + qd.transpose()) * 0.5;
    for _ in 0..halvings {
        qd = &phi * &qd * phi.transpose() + &qd;
        qd = (&qd + qd.transpose()) * 0.5;
        phi = &phi * &phi;
    }
    check_finite("discretised noise Qd", &qd)?;
    check_finite("transition matrix Phi", &phi)?;
    Ok((phi, qd))
}

/// Padé coefficients `b_0..b_m` and the 1-norm bounds `theta_m` of Higham
/// (2005), Table 2.3 / equation (2.10) (from memory, reproduced by many
/// implementations; the unit tests check the results against closed forms).
const PADE3: [f64; 4] = [120.0, 60.0, 12.0, 1.0];
const PADE5: [f64; 6] = [30240.0, 15120.0, 3360.0, 420.0, 30.0, 1.0];
const PADE7: [f64; 8] = [
    17_297_280.0,
    8_648_640.0,
    1_995_840.0,
    277_200.0,
    25_200.0,
    1512.0,
    56.0,
    1.0,
];
const PADE9: [f64; 10] = [
    17_643_225_600.0,
    8_821_612_800.0,
    2_075_673_600.0,
    302_702_400.0,
    30_270_240.0,
    2_162_160.0,
    110_880.0,
    3960.0,
    90.0,
    1.0,
];
const PADE13: [f64; 14] = [
    64_764_752_532_480_000.0,
    32_382_376_266_240_000.0,
    7_771_770_303_897_600.0,
    1_187_353_796_428_800.0,
    129_060_195_264_000.0,
    10_559_470_521_600.0,
    670_442_572_800.0,
    33_522_128_640.0,
    1_323_241_920.0,
    40_840_800.0,
    960_960.0,
    16380.0,
    182.0,
    1.0,
];
const THETA: [f64; 5] = [
    1.495_585_217_958_292e-2,
    2.539_398_330_063_23e-1,
    9.504_178_996_162_932e-1,
    2.097_847_961_257_068,
    5.371_920_351_148_152,
];

fn norm1(m: &DMatrix<f64>) -> f64 {
    (0..m.ncols())
        .map(|j| m.column(j).iter().map(|v| v.abs()).sum::<f64>())
        .fold(0.0, f64::max)
}

/// The matrix exponential `e^M` by the scaling and squaring method with
/// Padé approximants of degree 3, 5, 7, 9 or 13 chosen by the 1-norm
/// (N. J. Higham, "The scaling and squaring method for the matrix
/// exponential revisited", SIAM J. Matrix Anal. Appl. 26(4), 2005,
/// Algorithm 2.3).
///
/// # Errors
/// [`NumericError::DimensionMismatch`] when `m` is not square,
/// [`NumericError::NonFinite`] on NaN/infinite input or overflow, and
/// [`NumericError::Singular`] if the Padé denominator cannot be solved
/// (not expected for the norms the algorithm admits).
pub fn expm(m: &DMatrix<f64>) -> Result<DMatrix<f64>, NumericError> {
    let n = m.nrows();
    if m.ncols() != n {
        return Err(NumericError::DimensionMismatch {
            what: "matrix exponential operand",
            expected: (n, n),
            found: m.shape(),
        });
    }
    check_finite("matrix exponential operand", m)?;
    if n == 0 {
        return Ok(DMatrix::zeros(0, 0));
    }
    let id = DMatrix::<f64>::identity(n, n);
    let norm = norm1(m);
    let a2 = m * m;
    // Low degrees: no scaling needed.
    let low: [&[f64]; 4] = [&PADE3, &PADE5, &PADE7, &PADE9];
    for (k, b) in low.iter().enumerate() {
        if norm <= THETA[k] {
            // U = A * sum b_odd A^(2j), V = sum b_even A^(2j).
            let mut u_inner = DMatrix::zeros(n, n);
            let mut v = DMatrix::zeros(n, n);
            let mut pow = id.clone();
            for j in 0..b.len() / 2 {
                u_inner += &pow * b[2 * j + 1];
                v += &pow * b[2 * j];
                pow = &pow * &a2;
            }
            let u = m * u_inner;
            return pade_solve(&u, &v);
        }
    }
    // Degree 13 with scaling by 2^-s.
    let s = if norm > THETA[4] {
        (norm / THETA[4]).log2().ceil().max(0.0) as i32
    } else {
        0
    };
    let scale = 2f64.powi(-s);
    let a = m * scale;
    let a2 = &a2 * (scale * scale);
    let a4 = &a2 * &a2;
    let a6 = &a4 * &a2;
    let b = &PADE13;
    let u_hi = &a6 * b[13] + &a4 * b[11] + &a2 * b[9];
    let u_inner = &a6 * u_hi + &a6 * b[7] + &a4 * b[5] + &a2 * b[3] + &id * b[1];
    let u = &a * u_inner;
    let v_hi = &a6 * b[12] + &a4 * b[10] + &a2 * b[8];
    let v = &a6 * v_hi + &a6 * b[6] + &a4 * b[4] + &a2 * b[2] + &id * b[0];
    let mut r = pade_solve(&u, &v)?;
    for _ in 0..s {
        r = &r * &r;
    }
    check_finite("matrix exponential", &r)?;
    Ok(r)
}

/// Solves `(V - U) R = V + U`.
fn pade_solve(u: &DMatrix<f64>, v: &DMatrix<f64>) -> Result<DMatrix<f64>, NumericError> {
    let p = v + u;
    let q = v - u;
    let r = q.lu().solve(&p).ok_or(NumericError::Singular {
        what: "Pade denominator",
    })?;
    check_finite("matrix exponential", &r)?;
    Ok(r)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn max_rel(a: &DMatrix<f64>, b: &DMatrix<f64>) -> f64 {
        let scale = b
            .iter()
            .fold(0.0f64, |m, v| m.max(v.abs()))
            .max(f64::MIN_POSITIVE);
        (a - b).iter().fold(0.0f64, |m, v| m.max(v.abs())) / scale
    }

    #[test]
    fn random_walk_qd_is_w_t() {
        // Van Loan (1978) on F = 0, G = 1: Qd = W T; W = 3, T = 0.25 -> 0.75
        // (docs/references.md, computed).
        let (phi, qd) = discretize(&dmat![0.0], &dmat![1.0], &dmat![3.0], 0.25).unwrap();
        assert_eq!(phi[(0, 0)], 1.0);
        assert!((qd[(0, 0)] - 0.75).abs() < 1e-15, "{qd}");
    }

    #[test]
    fn white_noise_acceleration_matches_bar_shalom() {
        // Continuous white-noise-acceleration model, intensity q:
        // Qd = q [[T^3/3, T^2/2], [T^2/2, T]] (Bar-Shalom, Li & Kirubarajan
        // 2001; from memory). q = 2, T = 0.1 -> [[6.6667e-4, 0.01], [0.01, 0.2]].
        let a = dmat![0.0, 1.0; 0.0, 0.0];
        let g = dmat![0.0; 1.0];
        let (phi, qd) = discretize(&a, &g, &dmat![2.0], 0.1).unwrap();
        let t: f64 = 0.1;
        let expect = dmat![2.0 * t.powi(3) / 3.0, t * t; t * t, 2.0 * t];
        assert!(max_rel(&qd, &expect) < 1e-13, "{qd}");
        assert!((qd[(0, 0)] - 6.6667e-4).abs() < 1e-8);
        assert!((qd[(0, 1)] - 0.01).abs() < 1e-15 && (qd[(1, 1)] - 0.2).abs() < 1e-15);
        assert!(max_rel(&phi, &dmat![1.0, 0.1; 0.0, 1.0]) < 1e-15, "{phi}");
        // Exactly symmetric.
        assert_eq!(qd[(0, 1)], qd[(1, 0)]);
    }

    #[test]
    fn gauss_markov_closed_form() {
        // First-order Gauss-Markov dx = -x/tau dt + dw, intensity W:
        // Qd = (W tau / 2)(1 - e^(-2T/tau)), Phi = e^(-T/tau) (docs/references.md).
        // The stiff cases (T/tau = 1000, 1e5) overflow the plain block
        // exponential; the halving-and-doubling path must stay accurate.
        for &(w, tau, t) in &[
            (0.5, 2.0, 0.01),
            (4.0, 0.1, 1.0),
            (1e-6, 100.0, 0.005),
            (2.0, 1e-3, 1.0),
            (2.0, 1e-5, 1.0),
        ] {
            let (phi, qd) = discretize(&dmat![-1.0 / tau], &dmat![1.0], &dmat![w], t).unwrap();
            let q_exact = w * tau / 2.0 * (-(-2.0 * t / tau).exp_m1());
            assert!(
                ((qd[(0, 0)] - q_exact) / q_exact).abs() < 1e-12,
                "{qd} vs {q_exact}"
            );
            assert!((phi[(0, 0)] - (-t / tau).exp()).abs() < 1e-15);
        }
    }

    #[test]
    fn expm_rotation_generator() {
        // e^([[0, -th], [th, 0]]) = [[cos th, -sin th], [sin th, cos th]]
        // (closed form, common practice). th = 0.3 uses a low-degree Pade
        // approximant; th = 10 and 100 need scaling and squaring.
        for &th in &[0.01f64, 0.3, 1.5, 10.0, 100.0] {
            let e = expm(&dmat![0.0, -th; th, 0.0]).unwrap();
            let (s, c) = th.sin_cos();
            let expect = dmat![c, -s; s, c];
            assert!(max_rel(&e, &expect) < 1e-13 * th.max(1.0), "th {th}: {e}");
        }
    }

    #[test]
    fn expm_nilpotent_and_diagonal() {
        // N = [[0,t,0],[0,0,t],[0,0,0]]: e^N = I + N + N^2/2 exactly
        // (the series terminates; closed form).
        for &t in &[0.1, 3.0, 50.0] {
            let n = dmat![0.0, t, 0.0; 0.0, 0.0, t; 0.0, 0.0, 0.0];
            let e = expm(&n).unwrap();
            let expect = dmat![1.0, t, t * t / 2.0; 0.0, 1.0, t; 0.0, 0.0, 1.0];
            assert!(max_rel(&e, &expect) < 1e-14, "t {t}: {e}");
        }
        // Diagonal: e^diag(d) = diag(e^d).
        let e = expm(&dmat![-7.5, 0.0; 0.0, 2.25]).unwrap();
        assert!((e[(0, 0)] / (-7.5f64).exp() - 1.0).abs() < 1e-13);
        assert!((e[(1, 1)] / 2.25f64.exp() - 1.0).abs() < 1e-13);
        assert_eq!(e[(0, 1)], 0.0);
    }

    #[test]
    fn bad_input_is_an_error() {
        assert!(matches!(
            expm(&DMatrix::zeros(2, 3)),
            Err(NumericError::DimensionMismatch { .. })
        ));
        assert!(matches!(
            expm(&dmat![f64::NAN]),
            Err(NumericError::NonFinite { .. })
        ));
        assert!(matches!(
            expm(&dmat![1e300]),
            Err(NumericError::NonFinite { .. })
        ));
        let a = dmat![0.0];
        let g = dmat![1.0];
        let q = dmat![1.0];
        assert!(matches!(
            discretize(&a, &g, &q, 0.0),
            Err(NumericError::NotPositive { .. })
        ));
        assert!(matches!(
            discretize(&a, &g, &q, f64::NAN),
            Err(NumericError::NotPositive { .. })
        ));
        assert!(matches!(
            discretize(&a, &dmat![1.0, 0.0], &q, 0.1),
            Err(NumericError::DimensionMismatch { .. })
        ));
        assert!(matches!(
            discretize(&dmat![0.0, 1.0], &g, &q, 0.1),
            Err(NumericError::DimensionMismatch { .. })
        ));
    }
}
