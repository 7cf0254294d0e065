//! The fixed-size Kalman filter: state, covariance and the transactional
//! predict and update operations, linear and extended.

use core::marker::PhantomData;

use nalgebra::{SMatrix, SVector};

use crate::check;
use crate::error::{FilterError, Operand, Outcome, idx};
use crate::form::{CovarianceForm, Joseph};
use crate::kernel::{finite_sum, innovation, mirror_upper, plain_finite_sum, propagate};
use crate::ldl::Ldl;
use crate::model::{Linearized, MeasurementModel, ProcessModel};
use crate::pattern::Pattern;
use crate::patterned;
use crate::scalar::Scalar;

/// A Kalman filter over `N` states in scalar `T`, with the covariance
/// measurement update chosen by the type `F` (Joseph by default).
///
/// Every operation checks its inputs, computes into temporaries and commits
/// only when the result is finite with a positive variance on every
/// diagonal entry (and, with a [`crate::Checked`] form, positive definite
/// by an LDL' factorisation): an `Err` or a gated measurement
/// leaves state and covariance bit-identical. The covariance is exactly
/// symmetric after every operation.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Kalman<T: Scalar, const N: usize, F: CovarianceForm = Joseph> {
    x: SVector<T, N>,
    p: SMatrix<T, N, N>,
    form: PhantomData<F>,
}

/// A computed update, not yet committed.
/// The posterior covariance is written into a buffer the caller owns.
enum Weighed<T: Scalar, const N: usize> {
    Apply { x: SVector<T, N>, nis: T },
    Gate { nis: T },
}

impl<T: Scalar, const N: usize, F: CovarianceForm> Kalman<T, N, F> {
    /// A filter from a state and covariance that the caller vouches for
    /// (finite, symmetric, positive definite). `const`, so a filter can be
    /// built in a `static`; prefer [`Kalman::try_new`] when the values come
    /// from outside.
    pub const fn new_unchecked(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Self {
        Self {
            x,
            p,
            form: PhantomData,
        }
    }

    /// The same state and covariance under another covariance form, for
    /// example `with_form::<Checked<Joseph>>()` to switch the definiteness
    /// check on ([`crate::Checked`]). `const`, like [`Kalman::new_unchecked`].
    #[must_use]
    pub const fn with_form<G: CovarianceForm>(self) -> Kalman<T, N, G> {
        Kalman {
            x: self.x,
            p: self.p,
            form: PhantomData,
        }
    }

    /// Factors the stored covariance as LDL' and reports the first pivot
    /// that is not safely positive: the test a [`crate::Checked`] form runs
    /// on every commit, on demand (for a polled check; the
    /// [`crate::HealthMonitor`] runs the same test).
    ///
    /// # Errors
    /// [`FilterError::CovarianceLost`] with the failing pivot's row.
    ///
    /// # Panics
    /// Never.
    pub fn check_definiteness(&self) -> Result<(), FilterError> {
        check::definite(&self.p)
    }

    /// A filter from an initial state and covariance.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for NaN or infinity, [`FilterError::NotSymmetric`]
    /// or [`FilterError::NotPositiveDefinite`] for a covariance that is not a
    /// covariance (checked by an LDL' factorisation).
    ///
    /// # Panics
    /// Never.
    pub fn try_new(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Result<Self, FilterError> {
        check::finite(&x, Operand::State)?;
        check::finite(&p, Operand::Covariance)?;
        check::symmetric(&p, Operand::Covariance)?;
        if let Err(j) = Ldl::factor(&p) {
            return Err(FilterError::NotPositiveDefinite {
                operand: Operand::Covariance,
                index: idx(j),
            });
        }
        let mut p = p;
        symmetrize(&mut p);
        Ok(Self::new_unchecked(x, p))
    }

    /// The state estimate x.
    pub fn state(&self) -> &SVector<T, N> {
        &self.x
    }

    /// The stored covariance P (exactly symmetric), borrowed: no copy, no
    /// arithmetic.
    pub fn covariance(&self) -> &SMatrix<T, N, N> {
        &self.p
    }

    /// Moves the origin the state is expressed in: x -= offset, P unchanged.
    ///
    /// For models that do not depend on absolute position (the planar pose
    /// model's x and y), firmware can keep the f32 state near zero and carry
    /// the origin itself (in f64 or integer millimetres): far from the origin
    /// an f32 position cannot resolve a small step (at 1.2 km the spacing is
    /// 0.12 mm against 4 mm steps at 200 Hz, which the verifier's end-to-end
    /// mode shows as state drift).
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

    /// Linear predict: x = F x, P = F P F' + Q.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for NaN or infinity in F or Q;
    /// [`FilterError::NotSymmetric`] or [`FilterError::NotPositiveDefinite`]
    /// when Q is not symmetric positive semidefinite to within a few
    /// roundings (symmetry, diagonal, 2 x 2 minors, then a shifted LDL'
    /// factorisation); [`FilterError::CovarianceLost`] when the result
    /// would not be a covariance. Nothing changes on error.
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
        let p = propagate(f, &self.p, q);
        self.commit(&x, &p)
    }

    /// Linear predict with a control term: x = F x + B u, P = F P F' + Q.
    ///
    /// # Errors
    /// As [`Kalman::predict`], and [`FilterError::NonFinite`] for a
    /// non-finite B or u.
    ///
    /// # Panics
    /// Never.
    pub fn predict_with_control<const U: usize>(
        &mut self,
        f: &SMatrix<T, N, N>,
        b: &SMatrix<T, N, U>,
        u: &SVector<T, U>,
        q: &SMatrix<T, N, N>,
    ) -> Result<(), FilterError> {
        check::finite(f, Operand::Transition)?;
        check::finite(b, Operand::Control)?;
        check::finite(u, Operand::Control)?;
        check::noise(q, Operand::ProcessNoise, false)?;
        let x = f * self.x + b * u;
        let p = propagate(f, &self.p, q);
        self.commit(&x, &p)
    }

    /// Extended predict through a process model: x = f(x, u, dt),
    /// P = F P F' + Q with F and Q from the model at the prior state. When
    /// the model gives its noise as independent sources (`sources` of its
    /// [`Linearized`]), Q is formed from them as G diag(q) G'.
    ///
    /// # Errors
    /// [`FilterError::InvalidTimeStep`] for dt that is zero, negative or not
    /// finite; otherwise as [`Kalman::predict`]. Nothing changes on error.
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
        // Taken apart at once: each part stays in registers where it fits.
        let Linearized {
            mut next,
            jacobian,
            noise,
            sources,
        } = model.linearize(&self.x, u, dt);
        // The model's structure, constants of its type: a dense pattern
        // takes the dense kernels.
        let f_pattern = const { &P::JACOBIAN_PATTERN };
        let g_columns = const { &P::SOURCES_PATTERN.transpose() };
        let x_sum = plain_finite_sum(next.iter().copied());
        // Noise given as independent sources makes its own Q, symmetric and
        // semidefinite by construction once its variances pass. The
        // propagated state and the variances are tested in one sum before
        // the products, so they are done with before the covariance is
        // formed (on a Cortex-M4F the pose predict then holds fewer values
        // in callee-saved FPU registers); F and G are tested by the result
        // (`check::predicted_sound`). A Q given whole is tested first,
        // after F and the state it would otherwise be named after.
        let q = match sources {
            Some((g, q)) => {
                if x_sum + check::variance_sum(&q) != T::zero() {
                    return Err(check::predict_refusal(model, &self.x, &self.p, u, dt));
                }
                patterned::from_sources_as_declared(&g, g_columns, &q)
            }
            None => {
                check::finite_all([
                    (
                        patterned::free_sum(&jacobian, f_pattern),
                        Operand::Transition,
                    ),
                    (x_sum, Operand::Control),
                ])?;
                check::noise(&noise, Operand::ProcessNoise, false)?;
                noise
            }
        };
        let p = patterned::propagate_as_declared(&jacobian, f_pattern, &self.p, &q);
        if !check::predicted_sound(&p, const { &P::JACOBIAN_PATTERN.unit_rows() }) {
            return Err(check::predict_refusal(model, &self.x, &self.p, u, dt));
        }
        // Finite, so its normalisation is too.
        model.normalize(&mut next);
        self.store_checked(&next, &p)
    }

    /// Linear update with measurement z = H x + v, v ~ N(0, R), solving with
    /// an LDL' factorisation of S = H P H' + R (no inverse, no square root).
    ///
    /// With `gate = Some(g)`, a measurement whose normalised innovation
    /// squared exceeds `g` (a chi-square quantile with M degrees of freedom)
    /// is not applied and [`Outcome::Gated`] is returned.
    ///
    /// # Errors
    /// [`FilterError::NonFinite`] for NaN or infinity in z, H, R or the gate;
    /// [`FilterError::NotPositive`] for a gate of zero or below;
    /// [`FilterError::NotSymmetric`] or [`FilterError::NotPositiveDefinite`]
    /// for an R that is not positive definite; [`FilterError::SingularInnovation`]
    /// when S cannot be factored safely; [`FilterError::CovarianceLost`] when
    /// the posterior would not be a covariance. Nothing changes on error.
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
        let nu = z - h * self.x;
        check::finite_all([
            (finite_sum(z.as_slice()), Operand::Measurement),
            (finite_sum(h.as_slice()), Operand::MeasurementMatrix),
            (finite_sum(r.as_slice()), Operand::MeasurementNoise),
            (finite_sum(nu.as_slice()), Operand::Innovation),
        ])?;
        let mut post = self.p;
        let (h_dense, r_dense) = (const { &Pattern::DENSE }, const { &Pattern::DENSE });
        let weighed = self.weigh(nu, h, h_dense, r, r_dense, gate, &mut post)?;
        self.finish(weighed, &post, |_| {})
    }

    /// Extended update through a measurement model: innovation
    /// `model.residual(z, h(x))`, Jacobian H and noise R from the model.
    ///
    /// # Errors
    /// As [`Kalman::update`]; [`FilterError::NonFinite`] with
    /// [`Operand::Innovation`] when h(x) or the residual is not finite.
    ///
    /// # Panics
    /// Never, unless the model's own functions panic.
    pub fn update_with<Mm: MeasurementModel<T, N, M>, const M: usize>(
        &mut self,
        model: &Mm,
        z: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError> {
        // The model's residual sees only finite arguments.
        let expected = model.expected(&self.x);
        check::finite_all([
            (finite_sum(z.as_slice()), Operand::Measurement),
            (finite_sum(expected.as_slice()), Operand::Innovation),
        ])?;
        let nu = model.residual(z, &expected);
        let h = model.jacobian(&self.x);
        let h_pattern = const { &Mm::JACOBIAN_PATTERN };
        let r_pattern = const { &Mm::NOISE_PATTERN };
        let r = model.noise(&self.x);
        // Only the entries of H and R the kernels read.
        check::finite_all([
            (finite_sum(nu.as_slice()), Operand::Innovation),
            (
                patterned::free_sum(&h, h_pattern),
                Operand::MeasurementMatrix,
            ),
            (
                patterned::free_sum(&r, r_pattern),
                Operand::MeasurementNoise,
            ),
        ])?;
        let r = r_pattern.apply(&r);
        let mut post = self.p;
        let weighed = self.weigh(nu, &h, h_pattern, &r, r_pattern, gate, &mut post)?;
        self.finish(
            weighed,
            &post,
            #[inline(always)]
            |x| model.normalize(x),
        )
    }

    /// Linear update with uncorrelated measurement noise, processed one
    /// component at a time (no factorisation at all: each step divides by a
    /// scalar innovation variance). `r` holds the M variances.
    ///
    /// The gate, if any, applies to the sum of the sequential normalised
    /// innovations squared, which equals the joint NIS for a linear model.
    ///
    /// # Errors
    /// As [`Kalman::update`]; a non-positive variance in `r` is
    /// [`FilterError::NotPositiveDefinite`]. Nothing changes on error.
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
        check::finite(r, Operand::MeasurementNoise)?;
        check::gate(gate)?;
        for i in 0..M {
            if r[i] <= T::zero() {
                return Err(FilterError::NotPositiveDefinite {
                    operand: Operand::MeasurementNoise,
                    index: idx(i),
                });
            }
        }
        let mut x = self.x;
        let mut p = self.p;
        let mut nis = T::zero();
        for i in 0..M {
            let hi = SVector::<T, N>::from_fn(|c, _| h[(i, c)]);
            let b = p * hi;
            let hb = hi.dot(&b);
            let s = hb + r[i];
            if !(s.finite() && s > T::zero() && s > T::EPSILON * hb.abs()) {
                return Err(FilterError::SingularInnovation { pivot: idx(i) });
            }
            let nu = z[i] - hi.dot(&x);
            nis += nu * nu / s;
            let k = b / s;
            x += k * nu;
            F::posterior_scalar(&mut p, &hi, &b, &k, r[i], s);
            // The next component reads the whole matrix.
            mirror_upper(&mut p);
        }
        if !nis.finite() {
            return Err(FilterError::NonFinite(Operand::Innovation));
        }
        if let Some(g) = gate
            && nis > g
        {
            return Ok(Outcome::Gated { nis });
        }
        self.commit(&x, &p)?;
        Ok(Outcome::Applied { nis })
    }

    /// Shared update arithmetic, for an innovation and an R the caller has
    /// checked finite (with `r_pattern`'s declared entries in place): checks
    /// R is positive definite, factors S, gates, forms the gain and the
    /// posterior, the latter in `post` (which holds the prior on entry).
    /// Nothing is written to `self`.
    #[allow(clippy::too_many_arguments)]
    #[inline(always)]
    fn weigh<const M: usize>(
        &self,
        nu: SVector<T, M>,
        h: &SMatrix<T, M, N>,
        h_pattern: &Pattern<M, N>,
        r: &SMatrix<T, M, M>,
        r_pattern: &Pattern<M, M>,
        gate: Option<T>,
        post: &mut SMatrix<T, N, N>,
    ) -> Result<Weighed<T, N>, FilterError> {
        check::gate(gate)?;
        check::measurement_noise(r, r_pattern)?;
        let dense = h_pattern.is_dense() && r_pattern.is_dense();
        // B = P H' (n x m); S = H B + R.
        let (b, s) = if dense {
            innovation(&self.p, h, r)
        } else {
            patterned::innovation(&self.p, h, h_pattern, r, r_pattern)
        };
        let ldl = Ldl::factor(&s).map_err(|j| FilterError::SingularInnovation { pivot: idx(j) })?;
        let nis = ldl.inverse_quadratic(&nu);
        // The NIS is a sum of non-negative terms: within a (finite) gate it
        // is finite, so one comparison serves both tests on that path.
        let within = match gate {
            Some(g) => nis <= g,
            None => nis.finite(),
        };
        if !within {
            if !nis.finite() {
                return Err(FilterError::NonFinite(Operand::Innovation));
            }
            return Ok(Weighed::Gate { nis });
        }
        let k = ldl.right_divide(&b);
        let x = self.x + k * nu;
        if dense {
            F::posterior(post, h, &b, &k, r, &s);
        } else {
            F::posterior_patterned(post, h, h_pattern, &b, &k, r, r_pattern, &s);
        }
        Ok(Weighed::Apply { x, nis })
    }

    #[inline(always)]
    fn finish(
        &mut self,
        weighed: Weighed<T, N>,
        post: &SMatrix<T, N, N>,
        normalize: impl FnOnce(&mut SVector<T, N>),
    ) -> Result<Outcome<T>, FilterError> {
        match weighed {
            Weighed::Gate { nis } => Ok(Outcome::Gated { nis }),
            Weighed::Apply { mut x, nis } => {
                normalize(&mut x);
                self.commit(&x, post)?;
                Ok(Outcome::Applied { nis })
            }
        }
    }

    /// Checks a computed state and the upper triangle of a computed
    /// covariance, and only then stores them, the covariance mirrored so it
    /// is exactly symmetric (the copy the commit makes anyway).
    #[inline(always)]
    fn commit(&mut self, x: &SVector<T, N>, p: &SMatrix<T, N, N>) -> Result<(), FilterError> {
        check::posterior(x, p)?;
        self.store(x, p)
    }

    /// [`Kalman::commit`] for a state already checked finite.
    #[inline(always)]
    fn store(&mut self, x: &SVector<T, N>, p: &SMatrix<T, N, N>) -> Result<(), FilterError> {
        check::covariance(p)?;
        self.store_checked(x, p)
    }

    /// [`Kalman::store`] for a covariance already checked finite with a
    /// positive diagonal.
    #[inline(always)]
    fn store_checked(
        &mut self,
        x: &SVector<T, N>,
        p: &SMatrix<T, N, N>,
    ) -> Result<(), FilterError> {
        // A compile-time choice: a filter without the check pays nothing.
        if F::CHECKS_DEFINITENESS {
            check::definite(p)?;
        }
        self.x = *x;
        for j in 0..N {
            for i in 0..j + 1 {
                let v = p[(i, j)];
                self.p[(i, j)] = v;
                self.p[(j, i)] = v;
            }
        }
        Ok(())
    }
}

/// Replaces P by (P + P') / 2.
#[inline]
fn symmetrize<T: Scalar, const N: usize>(p: &mut SMatrix<T, N, N>) {
    let half = T::of(0.5);
    for j in 0..N {
        for i in 0..j {
            let v = (p[(i, j)] + p[(j, i)]) * half;
            p[(i, j)] = v;
            p[(j, i)] = v;
        }
    }
}
