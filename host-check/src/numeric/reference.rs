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
/// product and sum in [`Dd`](super::Dd):
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
