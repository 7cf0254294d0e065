//! The extended-precision reference filter: the textbook covariance
//! recursion evaluated in double-double, independent of `cairn-core`.

#![allow(clippy::needless_range_loop)] // index loops read like the formulas

use nalgebra::{DMatrix, DVector};

use super::ddmat::DdLdl;
use super::{Dd, DdMatrix, NumericError};

/// The result of a reference update.
#[derive(Clone, Debug, PartialEq)]
pub struct RefUpdate {
    /// The Kalman gain `K = P H' S^-1`, rounded to `f64`.
    pub gain: DMatrix<f64>,
    /// Normalised innovation squared `nu' S^-1 nu`.
    pub nis: f64,
}

/// Why the reference refused an update.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum RefError {
    /// `S = H P H' + R` is not positive definite even in double-double.
    SingularInnovation,
    /// An operand had the wrong shape or was not finite.
    Input(NumericError),
}

impl core::fmt::Display for RefError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            RefError::SingularInnovation => write!(
                f,
                "innovation covariance H P H' + R is not positive definite in double-double"
            ),
            RefError::Input(e) => write!(f, "reference update input: {e}"),
        }
    }
}

impl std::error::Error for RefError {}

/// The double-double reference filter.
///
/// The covariance recursion is the textbook one (Kalman 1960; e.g.
/// Bar-Shalom, Li & Kirubarajan 2001, section 5.2), evaluated with every
/// product and sum in [`Dd`]:
///
/// - predict: `x = F x`, `P = F P F' + Q`;
/// - update: `S = H P H' + R` factored as `L D L'` (no pivoting, in
///   double-double), `K = P H' S^-1`, `P = P - W' D^-1 W` with
///   `W = L^-1 H P` (equal to `P - K S K'`, but symmetric by construction and
///   never forming an inverse), `x = x + K nu`.
///
/// `P` is kept exactly symmetric (the upper triangle is computed and
/// mirrored). Matrices given in `f64` are converted exactly, so the only
/// rounding is double-double rounding (relative 2^-104 or so per operation);
/// with about 32 significant digits the reference is some 16 digits better
/// than an `f64` filter, which makes it a reference even for the `f64` runs.
///
/// Hot paths do not allocate: scratch space is kept in the filter and only
/// grows when a larger measurement is first seen.
#[derive(Clone, Debug)]
pub struct ReferenceFilter {
    n: usize,
    x: DdMatrix,
    p: DdMatrix,
    // Scratch for predict.
    fp: DdMatrix,
    xs: Vec<Dd>,
    // Scratch for update (m x n, m x m), resized when m changes.
    hp: DdMatrix,
    w: DdMatrix,
    s: DdMatrix,
    ldl: DdLdl,
    nu: Vec<Dd>,
}

fn shape_err(what: &'static str, expected: (usize, usize), found: (usize, usize)) -> RefError {
    RefError::Input(NumericError::DimensionMismatch {
        what,
        expected,
        found,
    })
}

fn finite_f64(what: &'static str, m: &DMatrix<f64>) -> Result<(), RefError> {
    if m.iter().all(|v| v.is_finite()) {
        Ok(())
    } else {
        Err(RefError::Input(NumericError::NonFinite { what }))
    }
}

impl ReferenceFilter {
    /// A filter at `x0`, `p0` (converted exactly). `p0` is used as given
    /// (the caller validates it); use [`ReferenceFilter::try_new`] to check
    /// shapes.
    ///
    /// # Panics
    /// When `p0` is not `n x n` with `n = x0.len()` (a programming error:
    /// validated specs never reach here with mismatched shapes).
    #[must_use]
    pub fn new(x0: &DVector<f64>, p0: &DMatrix<f64>) -> Self {
        match Self::try_new(x0, p0) {
            Ok(f) => f,
            Err(e) => panic!("{e}"),
        }
    }

    /// A filter at `x0`, `p0`, checking shapes and finiteness.
    ///
    /// # Errors
    /// [`RefError::Input`] when `p0` is not `n x n` or an entry is not finite.
    pub fn try_new(x0: &DVector<f64>, p0: &DMatrix<f64>) -> Result<Self, RefError> {
        let n = x0.len();
        if p0.shape() != (n, n) {
            return Err(shape_err("initial covariance", (n, n), p0.shape()));
        }
        finite_f64("initial covariance", p0)?;
        if !x0.iter().all(|v| v.is_finite()) {
            return Err(RefError::Input(NumericError::NonFinite {
                what: "initial state",
            }));
        }
        Ok(ReferenceFilter {
            n,
            x: DdMatrix::from_f64_vector(x0),
            p: DdMatrix::from_f64(p0),
            fp: DdMatrix::zeros(n, n),
            xs: vec![Dd::ZERO; n],
            hp: DdMatrix::zeros(0, n),
            w: DdMatrix::zeros(0, n),
            s: DdMatrix::zeros(0, 0),
            ldl: DdLdl::with_size(0),
            nu: Vec::new(),
        })
    }

    /// State dimension.
    #[must_use]
    pub fn dim(&self) -> usize {
        self.n
    }

    /// `x = F x`, `P = F P F' + Q`, in double-double.
    ///
    /// # Panics
    /// When `F` or `Q` is not `n x n` (a programming error; see
    /// [`ReferenceFilter::try_predict`] for the checked version).
    pub fn predict(&mut self, f: &DMatrix<f64>, q: &DMatrix<f64>) {
        if let Err(e) = self.try_predict(f, q) {
            panic!("{e}");
        }
    }

    /// `x = F x`, `P = F P F' + Q`, with shapes checked first (nothing
    /// changes on an error).
    ///
    /// # Errors
    /// [`RefError::Input`] when `F` or `Q` is not `n x n`.
    pub fn try_predict(&mut self, f: &DMatrix<f64>, q: &DMatrix<f64>) -> Result<(), RefError> {
        let n = self.n;
        if f.shape() != (n, n) {
            return Err(shape_err("transition matrix F", (n, n), f.shape()));
        }
        if q.shape() != (n, n) {
            return Err(shape_err("process noise Q", (n, n), q.shape()));
        }
        self.propagate_covariance(f, Some(q));
        // x = F x.
        for i in 0..n {
            let mut acc = Dd::ZERO;
            for k in 0..n {
                let fik = f[(i, k)];
                if fik != 0.0 {
                    acc += self.x[(k, 0)] * fik;
                }
            }
            self.xs[i] = acc;
        }
        for i in 0..n {
            self.x[(i, 0)] = self.xs[i];
        }
        Ok(())
    }

    /// `P = F P F' + Q` only (the state is left alone: for nonlinear models
    /// the caller propagates it and sets it with
    /// [`ReferenceFilter::set_state`]).
    ///
    /// # Errors
    /// [`RefError::Input`] when `F` or `Q` is not `n x n`.
    pub fn predict_covariance(
        &mut self,
        f: &DMatrix<f64>,
        q: &DMatrix<f64>,
    ) -> Result<(), RefError> {
        let n = self.n;
        if f.shape() != (n, n) {
            return Err(shape_err("transition matrix F", (n, n), f.shape()));
        }
        if q.shape() != (n, n) {
            return Err(shape_err("process noise Q", (n, n), q.shape()));
        }
        self.propagate_covariance(f, Some(q));
        Ok(())
    }

    fn propagate_covariance(&mut self, f: &DMatrix<f64>, q: Option<&DMatrix<f64>>) {
        let n = self.n;
        // FP = F P (zeros of F skipped: they contribute exact zeros).
        for i in 0..n {
            for j in 0..n {
                let mut acc = Dd::ZERO;
                for k in 0..n {
                    let fik = f[(i, k)];
                    if fik != 0.0 {
                        acc += self.p[(k, j)] * fik;
                    }
                }
                self.fp[(i, j)] = acc;
            }
        }
        // P = FP F' + Q, upper triangle computed and mirrored.
        for i in 0..n {
            for j in i..n {
                let mut acc = match q {
                    Some(q) => Dd::from_f64(0.5 * (q[(i, j)] + q[(j, i)])),
                    None => Dd::ZERO,
                };
                for k in 0..n {
                    let fjk = f[(j, k)];
                    if fjk != 0.0 {
                        acc += self.fp[(i, k)] * fjk;
                    }
                }
                self.p[(i, j)] = acc;
                self.p[(j, i)] = acc;
            }
        }
    }

    /// Replaces the state (for nonlinear models the caller propagates it).
    ///
    /// # Panics
    /// When `x` does not have `n` entries (a programming error).
    pub fn set_state(&mut self, x: &DVector<f64>) {
        assert_eq!(x.len(), self.n, "state length");
        for i in 0..self.n {
            self.x[(i, 0)] = Dd::from_f64(x[i]);
        }
    }

    /// Replaces the covariance (for example to restart from a variant's
    /// covariance); it is symmetrised.
    ///
    /// # Errors
    /// [`RefError::Input`] when `p` is not `n x n` or not finite.
    pub fn set_covariance(&mut self, p: &DMatrix<f64>) -> Result<(), RefError> {
        let n = self.n;
        if p.shape() != (n, n) {
            return Err(shape_err("covariance", (n, n), p.shape()));
        }
        finite_f64("covariance", p)?;
        self.p.assign_f64(p);
        self.p.symmetrize_mut();
        Ok(())
    }

    fn ensure_update_scratch(&mut self, m: usize) {
        let n = self.n;
        if self.hp.shape() != (m, n) {
            self.hp = DdMatrix::zeros(m, n);
            self.w = DdMatrix::zeros(m, n);
            self.s = DdMatrix::zeros(m, m);
            self.ldl = DdLdl::with_size(m);
            self.nu = vec![Dd::ZERO; m];
        }
    }

    fn check_update(&self, h: &DMatrix<f64>, r: &DMatrix<f64>, m: usize) -> Result<(), RefError> {
        let n = self.n;
        if h.shape() != (m, n) {
            return Err(shape_err("measurement matrix H", (m, n), h.shape()));
        }
        if r.shape() != (m, m) {
            return Err(shape_err("measurement noise R", (m, m), r.shape()));
        }
        finite_f64("measurement matrix H", h)?;
        finite_f64("measurement noise R", r)?;
        Ok(())
    }

    /// The update with an innovation computed by the caller (`nu = z -
    /// h(x)`, the way a nonlinear model needs it), in double-double.
    ///
    /// # Errors
    /// [`RefError::Input`] on shapes or non-finite input;
    /// [`RefError::SingularInnovation`] when `H P H' + R` is not positive
    /// definite. Nothing changes on an error.
    pub fn update(
        &mut self,
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        innovation: &DVector<f64>,
    ) -> Result<RefUpdate, RefError> {
        let m = innovation.len();
        self.check_update(h, r, m)?;
        if !innovation.iter().all(|v| v.is_finite()) {
            return Err(RefError::Input(NumericError::NonFinite {
                what: "innovation",
            }));
        }
        self.ensure_update_scratch(m);
        for i in 0..m {
            self.nu[i] = Dd::from_f64(innovation[i]);
        }
        self.apply_update(h, r)
    }

    /// The update of a linear measurement `z = H x + v`: the innovation
    /// `z - H x` is formed in double-double from the reference's own state.
    ///
    /// # Errors
    /// As [`ReferenceFilter::update`].
    pub fn update_linear(
        &mut self,
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        z: &DVector<f64>,
    ) -> Result<RefUpdate, RefError> {
        let m = z.len();
        self.check_update(h, r, m)?;
        if !z.iter().all(|v| v.is_finite()) {
            return Err(RefError::Input(NumericError::NonFinite {
                what: "measurement",
            }));
        }
        self.ensure_update_scratch(m);
        for i in 0..m {
            let mut acc = Dd::from_f64(z[i]);
            for k in 0..self.n {
                let hik = h[(i, k)];
                if hik != 0.0 {
                    acc -= self.x[(k, 0)] * hik;
                }
            }
            self.nu[i] = acc;
        }
        self.apply_update(h, r)
    }

    /// The innovation covariance `S = H P H' + R` that the next update with
    /// this `H`, `R` would use, rounded to `f64`.
    ///
    /// # Errors
    /// [`RefError::Input`] on shapes.
    pub fn innovation_covariance(
        &mut self,
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
    ) -> Result<DMatrix<f64>, RefError> {
        let m = h.nrows();
        self.check_update(h, r, m)?;
        self.ensure_update_scratch(m);
        self.form_s(h, r);
        Ok(self.s.to_f64())
    }

    fn form_s(&mut self, h: &DMatrix<f64>, r: &DMatrix<f64>) {
        let (n, m) = (self.n, h.nrows());
        // HP (m x n).
        for i in 0..m {
            for j in 0..n {
                let mut acc = Dd::ZERO;
                for k in 0..n {
                    let hik = h[(i, k)];
                    if hik != 0.0 {
                        acc += self.p[(k, j)] * hik;
                    }
                }
                self.hp[(i, j)] = acc;
            }
        }
        // S = HP H' + R (symmetric: upper computed, mirrored).
        for i in 0..m {
            for j in i..m {
                let mut acc = Dd::from_f64(0.5 * (r[(i, j)] + r[(j, i)]));
                for k in 0..n {
                    let hjk = h[(j, k)];
                    if hjk != 0.0 {
                        acc += self.hp[(i, k)] * hjk;
                    }
                }
                self.s[(i, j)] = acc;
                self.s[(j, i)] = acc;
            }
        }
    }

    fn apply_update(&mut self, h: &DMatrix<f64>, r: &DMatrix<f64>) -> Result<RefUpdate, RefError> {
        let (n, m) = (self.n, h.nrows());
        self.form_s(h, r);
        if self.ldl.factor_from(&self.s).is_err() {
            return Err(RefError::SingularInnovation);
        }
        let l = self.ldl.lower();
        let d = self.ldl.diagonal();
        // W = L^-1 HP (forward substitution, unit diagonal).
        for j in 0..n {
            for i in 0..m {
                let mut acc = self.hp[(i, j)];
                for k in 0..i {
                    acc -= l[(i, k)] * self.w[(k, j)];
                }
                self.w[(i, j)] = acc;
            }
        }
        // e = L^-1 nu; NIS = sum e_i^2 / d_i.
        let mut nis = Dd::ZERO;
        for i in 0..m {
            let mut acc = self.nu[i];
            for k in 0..i {
                acc -= l[(i, k)] * self.nu[k];
            }
            self.nu[i] = acc;
        }
        for i in 0..m {
            nis += self.nu[i] * self.nu[i] / d[i];
            // From here nu holds D^-1 L^-1 nu.
            self.nu[i] = self.nu[i] / d[i];
        }
        // Gain K' = S^-1 HP = L'^-1 D^-1 W (m x n), kept in hp.
        for j in 0..n {
            for i in (0..m).rev() {
                let mut acc = self.w[(i, j)] / d[i];
                for k in (i + 1)..m {
                    acc -= l[(k, i)] * self.hp[(k, j)];
                }
                self.hp[(i, j)] = acc;
            }
        }
        if !self.hp.is_finite() || !nis.is_finite() {
            return Err(RefError::SingularInnovation);
        }
        // x = x + K nu = x + W' D^-1 L^-1 nu.
        for j in 0..n {
            let mut acc = Dd::ZERO;
            for i in 0..m {
                acc += self.w[(i, j)] * self.nu[i];
            }
            self.x[(j, 0)] += acc;
        }
        // P = P - W' D^-1 W (upper triangle, mirrored).
        for a in 0..n {
            for b in a..n {
                let mut acc = Dd::ZERO;
                for i in 0..m {
                    acc += self.w[(i, a)] * self.w[(i, b)] / d[i];
                }
                let v = self.p[(a, b)] - acc;
                self.p[(a, b)] = v;
                self.p[(b, a)] = v;
            }
        }
        let gain = DMatrix::from_fn(n, m, |i, j| self.hp[(j, i)].to_f64());
        Ok(RefUpdate {
            gain,
            nis: nis.to_f64(),
        })
    }

    /// The covariance rounded to `f64`.
    #[must_use]
    pub fn covariance(&self) -> DMatrix<f64> {
        self.p.to_f64()
    }

    /// The covariance in double-double.
    #[must_use]
    pub fn covariance_dd(&self) -> &DdMatrix {
        &self.p
    }

    /// The covariance's smallest eigenvalue, computed in double-double
    /// (inverse iteration on its LDL' factor) while it is positive
    /// definite, so that an eigenvalue far below `f64`'s epsilon times the
    /// largest keeps its digits (rounding P to f64 first moves an eigenvalue
    /// of 1.7e-9 by about 6e-8 relative on the Dyer-McReynolds example).
    /// When P is not positive definite in double-double, or the iteration
    /// stalls, the smallest eigenvalue of its `f64` rounding (NaN when none
    /// is found).
    #[must_use]
    pub fn smallest_eigenvalue(&self) -> f64 {
        match self.p.smallest_eigenvalue_spd() {
            Ok(l) if l.hi() > 0.0 => l.to_f64(),
            _ => crate::run::metrics::eigen_range(&self.p.to_f64()).map_or(f64::NAN, |(lo, _)| lo),
        }
    }

    /// The state rounded to `f64`.
    #[must_use]
    pub fn state(&self) -> DVector<f64> {
        DVector::from_fn(self.n, |i, _| self.x[(i, 0)].to_f64())
    }

    /// The state in double-double (an `n x 1` matrix).
    #[must_use]
    pub fn state_dd(&self) -> &DdMatrix {
        &self.x
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Dyer & McReynolds (1969), reproduced in Grewal & Andrews, *Kalman
    /// Filtering: Theory and Practice* (matrices from memory, docs/references.md):
    /// P0 = I3, H = [[1,1,1],[1,1,1+d]], R = d^2 I2.
    fn dyer_mcreynolds(d: f64) -> ReferenceFilter {
        let mut f = ReferenceFilter::new(&DVector::zeros(3), &DMatrix::identity(3, 3));
        let h = dmat![1.0, 1.0, 1.0; 1.0, 1.0, 1.0 + d];
        let r = DMatrix::identity(2, 2) * (d * d);
        f.update(&h, &r, &DVector::zeros(2)).unwrap();
        f
    }

    #[test]
    #[allow(clippy::excessive_precision)] // the computed digits, as printed
    fn ill_conditioned_update_keeps_the_answer() {
        // Exact posterior (docs/references.md): [[0.625,-0.375,-0.25],
        // [-0.375,0.625,-0.25],[-0.25,-0.25,0.5]] + O(d). Beyond that, the
        // entries to 20 digits, computed with 60-digit arithmetic (mpmath)
        // from P+ = (I + H'H/R)^-1 for the problem as stored in f64
        // (dh = fl(1 + d) - 1, R = fl(d*d): the problem is so ill-conditioned
        // that the storage rounding of d moves the answer by 1e-14).
        let cases = [
            (
                1e-4,
                [
                    0.625_009_375_703_090_866_99,
                    -0.374_990_624_296_909_133_01,
                    -0.250_006_249_218_767_675_49,
                    0.499_987_500_312_550_972_28,
                ],
                1.666_611_108_333_549_425_2e-9,
            ),
            (
                1e-6,
                [
                    0.625_000_093_755_211_971_56,
                    -0.374_999_906_244_788_028_44,
                    -0.250_000_062_510_205_198_35,
                    0.499_999_875_020_597_907,
                ],
                1.666_666_111_110_833_345_7e-13,
            ),
        ];
        let limit = dmat![0.625, -0.375, -0.25; -0.375, 0.625, -0.25; -0.25, -0.25, 0.5];
        for (d, entries, lambda_min) in cases {
            let f = dyer_mcreynolds(d);
            let p = f.covariance();
            assert!((&p - &limit).abs().max() < d, "d {d}: {p}");
            let got = [p[(0, 0)], p[(0, 1)], p[(0, 2)], p[(2, 2)]];
            for (g, e) in got.iter().zip(entries) {
                assert!(
                    (g - e).abs() <= 4.0 * f64::EPSILON * e.abs(),
                    "d {d}: {g} vs {e}"
                );
            }
            // Symmetry by construction.
            assert_eq!(f.covariance_dd().asymmetry(), Dd::ZERO);
            // det P+ = r^2 / det(H H' + r I) = r^2 / (2dh^2 + 6r + 2r dh +
            // r dh^2 + r^2), about d^2/8 (hand-derived with Sylvester's
            // determinant identity; dh, r as stored in f64).
            let det: Dd = f
                .covariance_dd()
                .ldl()
                .unwrap()
                .diagonal()
                .iter()
                .fold(Dd::ONE, |a, b| a * *b);
            let (dh, r) = ((1.0 + d) - 1.0, d * d);
            let det_exact = r * r / (2.0 * dh * dh + 6.0 * r + 2.0 * r * dh + r * dh * dh + r * r);
            assert!((det_exact / (d * d / 8.0) - 1.0).abs() < 10.0 * d);
            assert!((det.to_f64() / det_exact - 1.0).abs() < 1e-12, "{det}");
            // Smallest eigenvalue: computed (mpmath) above; to first order
            // it is det / (1 * 0.75) = d^2/6 (the other two eigenvalues
            // tend to 1 and 0.75); d^2/8 is the determinant, not the eigenvalue
            // (docs/references.md).
            let lmin = f
                .covariance_dd()
                .smallest_eigenvalue_spd()
                .unwrap()
                .to_f64();
            assert!((lmin / lambda_min - 1.0).abs() < 1e-12, "d {d}: {lmin}");
            // The same through the filter's own figure.
            let own = f.smallest_eigenvalue();
            assert!((own / lambda_min - 1.0).abs() < 1e-12, "d {d}: {own}");
            assert!((lmin / (d * d / 6.0) - 1.0).abs() < 10.0 * d);
        }
    }

    #[test]
    fn a_singular_covariance_reports_its_f64_smallest_eigenvalue() {
        // diag(2, 0): no LDL' factor with positive pivots; the f64 route
        // gives the exact 0 (arithmetic).
        let f = ReferenceFilter::new(&DVector::zeros(2), &dmat![2.0, 0.0; 0.0, 0.0]);
        assert_eq!(f.smallest_eigenvalue(), 0.0);
        let f = ReferenceFilter::new(&DVector::zeros(2), &dmat![2.0, 0.0; 0.0, 0.5]);
        assert!((f.smallest_eigenvalue() - 0.5).abs() < 1e-15);
    }

    /// A small deterministic generator for test matrices (LCG of Knuth's
    /// MMIX constants).
    struct Lcg(u64);
    impl Lcg {
        fn next(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64 * 2.0 - 1.0
        }
        fn matrix(&mut self, r: usize, c: usize) -> DMatrix<f64> {
            DMatrix::from_fn(r, c, |_, _| self.next())
        }
    }

    #[test]
    fn agrees_with_f64_on_a_well_conditioned_case() {
        // On a well-conditioned problem the textbook f64 filter (nalgebra,
        // Cholesky of S) is accurate to ~1e-14 relative, so the double-double
        // reference must agree with it to ~1e-12 (common practice: backward
        // stable arithmetic, error ~ n * eps * cond).
        let (n, m) = (4, 2);
        let mut g = Lcg(7);
        let f = DMatrix::identity(n, n) * 0.9 + g.matrix(n, n) * 0.05;
        let b = g.matrix(n, n);
        let q = &b * b.transpose() * 0.01 + DMatrix::identity(n, n) * 0.01;
        let h = g.matrix(m, n);
        let r = DMatrix::identity(m, m) * 0.5;
        let x0 = DVector::from_fn(n, |i, _| i as f64);
        let p0 = DMatrix::identity(n, n) * 2.0;
        let mut reference = ReferenceFilter::new(&x0, &p0);
        let (mut x, mut p) = (x0.clone(), p0.clone());
        for k in 0..200 {
            reference.predict(&f, &q);
            x = &f * x;
            p = &f * &p * f.transpose() + &q;
            if k % 3 == 0 {
                let z = DVector::from_fn(m, |i, _| (k as f64 * 0.1 + i as f64).sin());
                let s = &h * &p * h.transpose() + &r;
                let chol = s.clone().cholesky().unwrap();
                let k_gain = chol.solve(&(&h * &p)).transpose();
                let nu = &z - &h * &x;
                let nis = nu.dot(&chol.solve(&nu));
                x += &k_gain * &nu;
                p = &p - &k_gain * &s * k_gain.transpose();
                p = (&p + p.transpose()) * 0.5;
                let u = reference.update_linear(&h, &r, &z).unwrap();
                assert!((&u.gain - &k_gain).norm() < 1e-12 * k_gain.norm());
                assert!((u.nis - nis).abs() < 1e-12 * nis.max(1.0));
            }
        }
        let pr = reference.covariance();
        assert!((&pr - &p).norm() < 1e-12 * p.norm(), "{pr} vs {p}");
        assert!((reference.state() - &x).norm() < 1e-12 * x.norm().max(1.0));
        // set_state replaces the state exactly.
        reference.set_state(&x0);
        assert_eq!(reference.state(), x0);
    }

    #[test]
    fn steady_state_to_thirty_digits() {
        // Random walk in white noise with q = r = 1: steady prior
        // (q + sqrt(q^2 + 4qr))/2 = (1 + sqrt 5)/2, posterior = prior - q =
        // (sqrt 5 - 1)/2 = 0.618033988749894848204586834365638117720...
        // (docs/references.md closed form; digits of the golden ratio, common
        // knowledge). The iteration contracts by (1 - K)^2 ~ 0.15 per step,
        // so 100 steps leave only rounding: the double-double reference must
        // hold ~30 digits, where an f64 filter holds 16.
        let one = dmat![1.0];
        let mut f = ReferenceFilter::new(&DVector::zeros(1), &one);
        for _ in 0..100 {
            f.predict(&one, &one);
            f.update(&one, &one, &DVector::zeros(1)).unwrap();
        }
        let post = f.covariance_dd()[(0, 0)];
        let exact = (Dd::from_f64(5.0).sqrt() - 1.0) * 0.5;
        let err = ((post - exact) / exact).abs().to_f64();
        assert!(err < 1e-30, "{post} vs {exact}: {err}");
        // Independent of the Dd square root: the f64 nearest the value is
        // 0.6180339887498949 and the remainder is -5.4321152036825059e-17
        // (computed with 50-digit mpmath).
        assert_eq!(post.hi(), 0.618_033_988_749_894_9);
        assert!(
            (post.lo() + 5.432_115_203_682_506e-17).abs() < 1e-30,
            "{post}"
        );
    }

    #[test]
    fn innovation_update_equals_linear_update() {
        // Giving z - H x as the innovation must give the same result as
        // the linear update (definition of the innovation; common practice).
        let h = dmat![1.0, 0.0];
        let r = dmat![0.25];
        let x0 = DVector::from_vec(vec![1.0, -2.0]);
        let p0 = dmat![2.0, 0.5; 0.5, 1.0];
        let mut a = ReferenceFilter::new(&x0, &p0);
        let mut b = a.clone();
        let z = DVector::from_vec(vec![1.5]);
        let ua = a.update_linear(&h, &r, &z).unwrap();
        let ub = b.update(&h, &r, &(&z - &h * &x0)).unwrap();
        assert_eq!(ua, ub);
        assert_eq!(a.covariance(), b.covariance());
        // Scalar case by hand: S = 2.25, K = [2/2.25, 0.5/2.25],
        // P11+ = 2 - 4/2.25 (textbook update, common practice).
        assert!((ua.gain[(0, 0)] - 2.0 / 2.25).abs() < 1e-16);
        assert!((a.covariance()[(0, 0)] - (2.0 - 4.0 / 2.25)).abs() < 1e-15);
        assert!((ua.nis - 0.25 / 2.25).abs() < 1e-16);
    }

    #[test]
    fn covariance_only_predict_and_innovation_covariance() {
        // Covariance-only predict leaves the state alone and gives
        // F P F' + Q; S = H P H' + R (textbook definitions, common practice).
        let f = dmat![1.0, 0.5; 0.0, 1.0];
        let q = dmat![0.1, 0.0; 0.0, 0.2];
        let x0 = DVector::from_vec(vec![3.0, 4.0]);
        let mut a = ReferenceFilter::new(&x0, &DMatrix::identity(2, 2));
        a.predict_covariance(&f, &q).unwrap();
        assert_eq!(a.state(), x0);
        // F F' + Q = [[1.25 + 0.1, 0.5], [0.5, 1 + 0.2]] (by hand).
        assert_eq!(a.covariance(), dmat![1.35, 0.5; 0.5, 1.2]);
        let s = a
            .innovation_covariance(&dmat![1.0, 1.0], &dmat![0.5])
            .unwrap();
        assert!((s[(0, 0)] - (1.35 + 1.0 + 1.2 + 0.5)).abs() < 1e-15);
        a.set_covariance(&dmat![2.0, 1.0; 0.0, 2.0]).unwrap();
        assert_eq!(a.covariance(), dmat![2.0, 0.5; 0.5, 2.0]);
        assert!(a.set_covariance(&dmat![f64::NAN]).is_err());
    }

    #[test]
    fn bad_input_is_refused_and_changes_nothing() {
        let mut f = ReferenceFilter::new(&DVector::zeros(2), &DMatrix::zeros(2, 2));
        let before = f.covariance();
        // S = H 0 H' + 0 = 0: not positive definite.
        let e = f.update(&dmat![1.0, 0.0], &dmat![0.0], &DVector::zeros(1));
        assert_eq!(e, Err(RefError::SingularInnovation));
        assert_eq!(f.covariance(), before);
        assert!(matches!(
            f.update(&dmat![1.0, 0.0, 0.0], &dmat![1.0], &DVector::zeros(1)),
            Err(RefError::Input(NumericError::DimensionMismatch { .. }))
        ));
        assert!(matches!(
            f.update(
                &dmat![1.0, 0.0],
                &dmat![1.0],
                &DVector::from_vec(vec![f64::NAN])
            ),
            Err(RefError::Input(NumericError::NonFinite { .. }))
        ));
        assert!(matches!(
            f.try_predict(&DMatrix::identity(3, 3), &DMatrix::zeros(2, 2)),
            Err(RefError::Input(NumericError::DimensionMismatch { .. }))
        ));
        assert!(ReferenceFilter::try_new(&DVector::zeros(2), &DMatrix::zeros(3, 3)).is_err());
        assert_eq!(f.covariance(), before);
        // The error messages say what is wrong.
        assert!(
            RefError::SingularInnovation
                .to_string()
                .contains("positive definite")
        );
    }
}
