//! The U-D factored filter: P = U D U' with U unit upper-triangular and D
//! diagonal, Bierman's measurement update and Thornton's time update.

use nalgebra::{SMatrix, SVector};

use crate::check;
use crate::error::{FilterError, Operand, Outcome, idx};
use crate::ldl::Ldl;
use crate::model::{Linearized, MeasurementModel, ProcessModel};
use crate::pattern::Pattern;
use crate::scalar::Scalar;

/// A Kalman filter that carries its covariance as U-D factors.
///
/// The measurement update is Bierman's scalar algorithm (Bierman,
/// *Factorization Methods for Discrete Sequential Estimation*, 1977): about
/// 1.5 n^2 multiplies per scalar, no square roots; a correlated R is first
/// decorrelated by its own LDL' factors. The time update is Thornton's
/// modified weighted Gram-Schmidt (Thornton and Bierman, Int. J. Control,
/// 1977). D positive is the definiteness invariant: a covariance built from
/// the factors is positive definite by construction, and rounding perturbs
/// the factors, not the symmetry.
///
/// Storage is compact: the strict upper triangle of `ud` holds U, its
/// diagonal holds D. Operations are transactional like [`crate::Kalman`];
/// a predict whose U D U' would overflow is refused although its factors
/// are finite, as the covariance form refuses it.
///
/// Give the process noise as sources where you can
/// ([`UdKalman::predict_with_sources`], or a model's
/// [`crate::ProcessModel::noise_sources`]): a full Q must be factored first,
/// and that factorisation has to decide which of its pivots are zero. A
/// pivot at the rounding level of the largest variance that lost most of
/// its own diagonal entry to cancellation counts as zero; a small variance
/// beside much larger ones that is correlated almost perfectly with them in
/// Q (a slowly drifting bias) can then lose its share of the noise, with no
/// error. Independent sources need no factorisation: only q >= 0 is
/// checked, and every variance reaches the state it drives.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct UdKalman<T: Scalar, const N: usize> {
    x: SVector<T, N>,
    ud: SMatrix<T, N, N>,
}

/// U-D factorisation of a symmetric positive semidefinite matrix (upper
/// unit-triangular U, diagonal D), packed. Zero pivots are allowed (the
/// column of U is then zero, and pivots within rounding of zero, or below
/// it, count as zero); non-finite pivots are refused, and with `strict`
/// every pivot that is not safely positive.
#[inline(always)]
fn factor_ud<T: Scalar, const N: usize>(
    p: &SMatrix<T, N, N>,
    strict: bool,
) -> Result<SMatrix<T, N, N>, usize> {
    // Pivots at the rounding level of the largest variance carry no
    // information; for a semidefinite matrix (strict = false) they are
    // zeroed rather than divided by, which keeps the factors of a
    // rank-deficient Q bounded (common practice for a rank decision).
    // Except a pivot that kept a good part of its own diagonal entry (more
    // than 2^-10 of it: little cancellation, so not a rank-deficient
    // direction, whose pivot is a few roundings of its entry):
    // a small but real variance, such as a slowly drifting bias beside
    // metre-sized positions in f32, which zeroing would cut off from its
    // process noise for good. A pivot within a few roundings of its own
    // diagonal entry is zero in any case.
    let mut largest = T::zero();
    for j in 0..N {
        let v = p[(j, j)].abs();
        if v > largest {
            largest = v;
        }
    }
    let rounding = T::EPSILON * T::of(4.0 * N as f64);
    let floor = rounding * largest;
    let kept = T::of(1.0 / 1024.0);
    let mut ud = SMatrix::<T, N, N>::zeros();
    for j in (0..N).rev() {
        let mut d = p[(j, j)];
        for k in (j + 1)..N {
            let u = ud[(j, k)];
            d -= u * u * ud[(k, k)];
        }
        let own = p[(j, j)].abs();
        let tiny = if strict {
            T::EPSILON * T::of(N as f64) * own
        } else if d > kept * own {
            rounding * own
        } else {
            floor
        };
        // A covariance (strict) needs every pivot safely positive. A noise
        // covariance has already passed the shifted LDL' test of
        // `check::noise`, so it is semidefinite to within a few roundings:
        // a pivot this bottom-up elimination drives below zero is rounding
        // amplified by a nearly dependent pair of rows (measured: about 4%
        // of random rank-2 3 x 3 f32 matrices G diag(q) G'), a rank-deficient
        // direction, and is zeroed like one rather than refused.
        if !d.finite() || (strict && d <= tiny) {
            return Err(j);
        }
        if d <= tiny {
            d = T::zero();
        }
        ud[(j, j)] = d;
        // One divide per pivot; the column multiplies by the reciprocal.
        let inv = if d > T::zero() {
            T::one() / d
        } else {
            T::zero()
        };
        // A subnormal pivot has no finite reciprocal: refuse it here (strict)
        // or count it as zero, rather than fill the column with infinities.
        if !inv.finite() {
            if strict {
                return Err(j);
            }
            ud[(j, j)] = T::zero();
            continue;
        }
        for i in 0..j {
            let mut v = p[(i, j)];
            for k in (j + 1)..N {
                v -= ud[(i, k)] * ud[(j, k)] * ud[(k, k)];
            }
            ud[(i, j)] = v * inv;
        }
    }
    Ok(ud)
}

impl<T: Scalar, const N: usize> UdKalman<T, N> {
    /// A filter from an initial state and covariance, factored as U D U'.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`], [`FilterError::NotSymmetric`] or
    /// [`FilterError::NotPositiveDefinite`] as for [`crate::Kalman::try_new`].
    ///
    /// # Panics
    /// Never.
    pub fn try_new(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Result<Self, FilterError> {
        check::finite(&x, Operand::State)?;
        check::finite(&p, Operand::Covariance)?;
        check::symmetric(&p, Operand::Covariance)?;
        let ud = factor_ud(&p, true).map_err(|j| FilterError::NotPositiveDefinite {
            operand: Operand::Covariance,
            index: idx(j),
        })?;
        Ok(Self { x, ud })
    }

    /// The state estimate x.
    pub fn state(&self) -> &SVector<T, N> {
        &self.x
    }

    /// The factors, packed: U in the strict upper triangle, D on the diagonal.
    pub fn factors(&self) -> &SMatrix<T, N, N> {
        &self.ud
    }

    /// The diagonal factor D.
    #[must_use]
    pub fn d(&self) -> SVector<T, N> {
        self.ud.diagonal()
    }

    /// The covariance U D U', rebuilt from the factors (the filter stores U
    /// and D, not P): exactly symmetric (upper triangle computed, mirrored),
    /// O(n^3 / 3) multiply-adds; for reports and checks, not the hot path.
    #[must_use]
    pub fn rebuild_covariance(&self) -> SMatrix<T, N, N> {
        let mut p = SMatrix::<T, N, N>::zeros();
        for j in 0..N {
            for i in 0..j + 1 {
                // sum over k >= j of U_ik D_k U_jk, with U_kk = 1.
                let mut v = T::zero();
                for k in j..N {
                    let uik = if i == k { T::one() } else { self.ud[(i, k)] };
                    let ujk = if j == k { T::one() } else { self.ud[(j, k)] };
                    v += uik * self.ud[(k, k)] * ujk;
                }
                p[(i, j)] = v;
                p[(j, i)] = v;
            }
        }
        p
    }

    /// Moves the origin the state is expressed in: x -= offset, factors
    /// unchanged; see [`crate::Kalman::shift_origin`].
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for a non-finite offset or result; nothing
    /// changes on error.
    ///
    /// # Panics
    /// Never.
    pub fn shift_origin(&mut self, offset: &SVector<T, N>) -> Result<(), FilterError> {
        self.x = check::shifted(&self.x, offset)?;
        Ok(())
    }

    /// Linear predict: x = F x, P = F P F' + Q by Thornton's modified
    /// weighted Gram-Schmidt on W = [F U | U_q], weights diag(D, D_q).
    ///
    /// # Errors
    /// As [`crate::Kalman::predict`] (Q passes the same semidefinite test);
    /// [`FilterError::CovarianceLost`] also when U D U' would overflow
    /// although the factors are finite. Nothing
    /// changes on error.
    ///
    /// # Panics
    /// Never.
    pub fn predict(
        &mut self,
        f: &SMatrix<T, N, N>,
        q: &SMatrix<T, N, N>,
    ) -> Result<(), FilterError> {
        check::finite(f, Operand::Transition)?;
        check::noise(q, Operand::ProcessNoise, false)?;
        let x = f * self.x;
        let ud = self.time_update(f, q)?;
        self.commit::<true>(x, ud)
    }

    /// Extended predict through a process model, as
    /// [`crate::Kalman::predict_with`].
    ///
    /// # Errors
    /// [`FilterError::InvalidTimeStep`] for a bad dt; otherwise as
    /// [`UdKalman::predict`]. Nothing changes on error.
    ///
    /// # Panics
    /// Never, unless the model's own functions panic.
    pub fn predict_with<P: ProcessModel<T, N>>(
        &mut self,
        model: &P,
        u: &P::Input,
        dt: T,
    ) -> Result<(), FilterError> {
        check::time_step(dt)?;
        let Linearized {
            mut next,
            jacobian,
            noise,
            sources,
        } = model.linearize(&self.x, u, dt);
        check::linearized(
            model,
            &jacobian,
            const { &Pattern::DENSE },
            &mut next,
            sources
                .as_ref()
                .map(|(g, q)| (g, const { &Pattern::DENSE }, q)),
        )?;
        let ud = match sources {
            Some((g, q)) => self.gram_schmidt(&jacobian, &g, &q)?,
            None => {
                check::noise(&noise, Operand::ProcessNoise, false)?;
                self.time_update(&jacobian, &noise)?
            }
        };
        self.commit::<true>(next, ud)
    }

    #[inline(always)]
    fn time_update(
        &self,
        f: &SMatrix<T, N, N>,
        q: &SMatrix<T, N, N>,
    ) -> Result<SMatrix<T, N, N>, FilterError> {
        let uq = factor_ud(q, false).map_err(|j| FilterError::NotPositiveDefinite {
            operand: Operand::ProcessNoise,
            index: idx(j),
        })?;
        let mut g = SMatrix::<T, N, N>::zeros();
        for i in 0..N {
            for k in i..N {
                g[(i, k)] = if i == k { T::one() } else { uq[(i, k)] };
            }
        }
        self.gram_schmidt(f, &g, &uq.diagonal())
    }

    /// Linear predict with the process noise given as Q = G diag(q) G'
    /// (the noise-input form of Thornton and Bierman 1977): no factorisation
    /// of Q at all. Columns of G beyond the number of noise sources may be
    /// zero.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for NaN or infinity in F, G or q;
    /// [`FilterError::NotPositiveDefinite`] for a negative entry of q;
    /// [`FilterError::CovarianceLost`] when the result is not a covariance.
    /// Nothing changes on error.
    ///
    /// # Panics
    /// Never.
    pub fn predict_with_sources(
        &mut self,
        f: &SMatrix<T, N, N>,
        g: &SMatrix<T, N, N>,
        q: &SVector<T, N>,
    ) -> Result<(), FilterError> {
        check::finite(f, Operand::Transition)?;
        check::sources(g, const { &Pattern::DENSE }, q)?;
        let x = f * self.x;
        let ud = self.gram_schmidt(f, g, q)?;
        self.commit::<true>(x, ud)
    }

    /// Thornton's modified weighted Gram-Schmidt: the U-D factors of
    /// [F U | G] diag(D, q) [F U | G]'.
    #[inline(always)]
    fn gram_schmidt(
        &self,
        f: &SMatrix<T, N, N>,
        g: &SMatrix<T, N, N>,
        q: &SVector<T, N>,
    ) -> Result<SMatrix<T, N, N>, FilterError> {
        // Rows of W: a = F U (n x n) and b = G.
        let mut a = SMatrix::<T, N, N>::zeros();
        for i in 0..N {
            for k in 0..N {
                // (F U)_ik = F_ik + sum_{l<k} F_il U_lk
                let mut v = f[(i, k)];
                for l in 0..k {
                    v += f[(i, l)] * self.ud[(l, k)];
                }
                a[(i, k)] = v;
            }
        }
        let mut b = *g;
        let mut out = SMatrix::<T, N, N>::zeros();
        for j in (0..N).rev() {
            // d_j = sum_k w_jk^2 Dw_k ; keep c_k = Dw_k w_jk.
            let mut ca = SVector::<T, N>::zeros();
            let mut cb = SVector::<T, N>::zeros();
            let mut dj = T::zero();
            for k in 0..N {
                ca[k] = self.ud[(k, k)] * a[(j, k)];
                cb[k] = q[k] * b[(j, k)];
                dj += a[(j, k)] * ca[k] + b[(j, k)] * cb[k];
            }
            if !(dj.finite() && dj > T::zero()) {
                return Err(FilterError::CovarianceLost { index: idx(j) });
            }
            out[(j, j)] = dj;
            // One divide per pivot; the column multiplies by the reciprocal.
            let inv = T::one() / dj;
            for i in 0..j {
                let mut v = T::zero();
                for k in 0..N {
                    v += a[(i, k)] * ca[k] + b[(i, k)] * cb[k];
                }
                let uij = v * inv;
                out[(i, j)] = uij;
                for k in 0..N {
                    let (ajk, bjk) = (a[(j, k)], b[(j, k)]);
                    a[(i, k)] -= uij * ajk;
                    b[(i, k)] -= uij * bjk;
                }
            }
        }
        Ok(out)
    }

    /// Linear update z = H x + v, v ~ N(0, R): R is decorrelated by its LDL'
    /// factors, then each component is applied by Bierman's scalar update.
    ///
    /// # Errors
    /// As [`crate::Kalman::update`]. Nothing changes on error.
    ///
    /// # Panics
    /// Never.
    pub fn update<const M: usize>(
        &mut self,
        z: &SVector<T, M>,
        h: &SMatrix<T, M, N>,
        r: &SMatrix<T, M, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError> {
        check::finite(z, Operand::Measurement)?;
        check::finite(h, Operand::MeasurementMatrix)?;
        let nu = z - h * self.x;
        self.update_innovation(nu, h, r, gate, |_| {})
    }

    /// Extended update through a measurement model, as
    /// [`crate::Kalman::update_with`].
    ///
    /// # Errors
    /// As [`crate::Kalman::update_with`]. Nothing changes on error.
    ///
    /// # Panics
    /// Never, unless the model's own functions panic.
    pub fn update_with<Mm: MeasurementModel<T, N, M>, const M: usize>(
        &mut self,
        model: &Mm,
        z: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError> {
        check::finite(z, Operand::Measurement)?;
        let expected = model.expected(&self.x);
        check::finite(&expected, Operand::Innovation)?;
        let nu = model.residual(z, &expected);
        let h = model.jacobian(&self.x);
        check::finite(&h, Operand::MeasurementMatrix)?;
        // R as the model declares it (see `MeasurementModel::NOISE_PATTERN`).
        let r = const { &Mm::NOISE_PATTERN }.apply(&model.noise(&self.x));
        self.update_innovation(
            nu,
            &h,
            &r,
            gate,
            #[inline(always)]
            |x| model.normalize(x),
        )
    }

    /// Update with uncorrelated noise (variances `r`), component by
    /// component, as [`crate::Kalman::update_sequential`].
    ///
    /// # Errors
    /// As [`crate::Kalman::update_sequential`]. Nothing changes on error.
    ///
    /// # Panics
    /// Never.
    pub fn update_sequential<const M: usize>(
        &mut self,
        z: &SVector<T, M>,
        h: &SMatrix<T, M, N>,
        r: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError> {
        check::finite(z, Operand::Measurement)?;
        check::finite(h, Operand::MeasurementMatrix)?;
        let nu = z - h * self.x;
        let r = SMatrix::<T, M, M>::from_diagonal(r);
        self.update_innovation(nu, h, &r, gate, |_| {})
    }

    fn update_innovation<const M: usize>(
        &mut self,
        nu: SVector<T, M>,
        h: &SMatrix<T, M, N>,
        r: &SMatrix<T, M, M>,
        gate: Option<T>,
        normalize: impl FnOnce(&mut SVector<T, N>),
    ) -> Result<Outcome<T>, FilterError> {
        check::finite(&nu, Operand::Innovation)?;
        check::finite(r, Operand::MeasurementNoise)?;
        check::symmetric(r, Operand::MeasurementNoise)?;
        check::gate(gate)?;
        let rl = Ldl::factor(r).map_err(|j| FilterError::NotPositiveDefinite {
            operand: Operand::MeasurementNoise,
            index: idx(j),
        })?;
        // Decorrelate: with R = L D L', use L^-1 H, L^-1 nu and variances D.
        let (ht, nut) = rl.decorrelate(h, &nu);
        let mut x = self.x;
        let mut ud = self.ud;
        let mut nis = T::zero();
        for c in 0..M {
            let hc = SVector::<T, N>::from_fn(|i, _| ht[(c, i)]);
            // The sequential innovation against the state updated so far.
            let nuc = nut[c] - hc.dot(&(x - self.x));
            let (k, _s, inv_s) = bierman(&mut ud, &hc, rl.diagonal()[c])
                .map_err(|_| FilterError::SingularInnovation { pivot: idx(c) })?;
            nis += nuc * nuc * inv_s;
            x += k * nuc;
        }
        if !nis.finite() {
            return Err(FilterError::NonFinite(Operand::Innovation));
        }
        if let Some(g) = gate
            && nis > g
        {
            return Ok(Outcome::Gated { nis });
        }
        normalize(&mut x);
        self.commit::<false>(x, ud)?;
        Ok(Outcome::Applied { nis })
    }

    #[inline(always)]
    /// Checks and stores a computed state and factors; `PREDICT` adds the
    /// overflow test of U D U' (a measurement update only shrinks the
    /// covariance, so it cannot overflow one that was finite).
    fn commit<const PREDICT: bool>(
        &mut self,
        x: SVector<T, N>,
        ud: SMatrix<T, N, N>,
    ) -> Result<(), FilterError> {
        if !check::all_finite(x.as_slice()) {
            return Err(FilterError::NonFinite(Operand::State));
        }
        for j in 0..N {
            let d = ud[(j, j)];
            if !(d.finite() && d > T::zero()) {
                return Err(FilterError::CovarianceLost { index: idx(j) });
            }
        }
        if !check::all_finite(ud.as_slice()) {
            return Err(FilterError::CovarianceLost { index: 0 });
        }
        // Finite factors can still describe an infinite covariance: with
        // D = 3e38 and a unit U entry, P_00 = D_0 + U_01^2 D_1 overflows in
        // f32. The variances P_ii = D_i + sum_k>i U_ik^2 D_k must stay below
        // half the largest finite value (doubled, they stay finite), so
        // every entry of U D U' is finite too: |P_ij| <= sqrt(P_ii P_jj)
        // (Cauchy-Schwarz), with room for the rounding of its sum. O(n^2).
        for i in 0..if PREDICT { N } else { 0 } {
            let mut v = ud[(i, i)];
            for k in (i + 1)..N {
                let u = ud[(i, k)];
                v += u * u * ud[(k, k)];
            }
            if !(v + v).finite() {
                return Err(FilterError::CovarianceLost { index: idx(i) });
            }
        }
        self.x = x;
        self.ud = ud;
        Ok(())
    }
}

/// Bierman's scalar measurement update of packed U-D factors in place, for
/// row `h` and noise variance `r` (positive). Returns the gain, the
/// innovation variance s = h P h' + r and its reciprocal.
#[inline(always)]
fn bierman<T: Scalar, const N: usize>(
    ud: &mut SMatrix<T, N, N>,
    h: &SVector<T, N>,
    r: T,
) -> Result<(SVector<T, N>, T, T), ()> {
    // f = U' h, v = D f.
    let mut f = SVector::<T, N>::zeros();
    for j in 0..N {
        let mut s = h[j];
        for i in 0..j {
            s += ud[(i, j)] * h[i];
        }
        f[j] = s;
    }
    let mut v = SVector::<T, N>::zeros();
    for j in 0..N {
        v[j] = ud[(j, j)] * f[j];
    }
    // One divide per step of the recursion: each alpha's reciprocal serves
    // its own step and, as 1 / a0, the next.
    let mut b = SVector::<T, N>::zeros();
    let mut alpha = r;
    let mut inv_alpha = T::one() / r;
    for j in 0..N {
        let (a0, inv_a0) = (alpha, inv_alpha);
        alpha += f[j] * v[j];
        if !(alpha.finite() && alpha > T::zero()) {
            return Err(());
        }
        inv_alpha = T::one() / alpha;
        ud[(j, j)] = ud[(j, j)] * a0 * inv_alpha;
        b[j] = v[j];
        let lambda = -f[j] * inv_a0;
        for i in 0..j {
            let t = ud[(i, j)];
            ud[(i, j)] = t + b[i] * lambda;
            b[i] += t * v[j];
        }
    }
    Ok((b * inv_alpha, alpha, inv_alpha))
}
