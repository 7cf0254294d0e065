//! Hooks for nonlinear (extended) filtering: a process model f(x, u, dt) and a
//! measurement model h(x), each with its Jacobian and its own residual rule.

use nalgebra::{SMatrix, SVector};

use crate::pattern::Pattern;
use crate::scalar::Scalar;

/// Everything one extended predict needs from a process model at the
/// prior state.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Linearized<T: Scalar, const N: usize> {
    /// The propagated state f(x, u, dt).
    pub next: SVector<T, N>,
    /// The Jacobian of f with respect to x.
    pub jacobian: SMatrix<T, N, N>,
    /// The discrete process noise Q.
    pub noise: SMatrix<T, N, N>,
    /// Q as independent sources G diag(q) G', when the model knows them.
    /// The filters then form Q from these (`noise` must equal G diag(q) G'):
    /// it is semidefinite by construction, so only q >= 0 is checked.
    pub sources: Option<(SMatrix<T, N, N>, SVector<T, N>)>,
}

/// A nonlinear process model x' = f(x, u, dt) with its Jacobian and its
/// discrete process noise.
pub trait ProcessModel<T: Scalar, const N: usize> {
    /// The control input (odometry, commanded rates, ...).
    type Input;

    /// Which entries of the Jacobian F are structurally zero or one for
    /// every state and input: the predict's kernels skip them (see
    /// [`Pattern`]). The default, [`Pattern::DENSE`], declares none.
    const JACOBIAN_PATTERN: Pattern<N, N> = Pattern::DENSE;

    /// Which entries of the noise-source matrix G (the first part of the
    /// model's noise sources) are structurally zero or one; the columns of
    /// G beyond the number of sources are zero. Default: none declared.
    const SOURCES_PATTERN: Pattern<N, N> = Pattern::DENSE;

    /// The propagated state f(x, u, dt).
    fn transition(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SVector<T, N>;

    /// The Jacobian of f with respect to x, evaluated at the prior state.
    fn jacobian(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SMatrix<T, N, N>;

    /// The discrete process noise covariance Q for this step.
    fn noise(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SMatrix<T, N, N>;

    /// The same process noise as independent sources, Q = G diag(q) G',
    /// when the model knows them (columns of G beyond the number of sources
    /// are zero). Factored filters then skip factoring Q. The default is
    /// `None`.
    fn noise_sources(
        &self,
        _x: &SVector<T, N>,
        _u: &Self::Input,
        _dt: T,
    ) -> Option<(SMatrix<T, N, N>, SVector<T, N>)> {
        None
    }

    /// All of the above in one call. The filters call this; override it
    /// when the pieces share work (the pose model takes one sine and cosine
    /// per step instead of three).
    fn linearize(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> Linearized<T, N> {
        Linearized {
            next: self.transition(x, u, dt),
            jacobian: self.jacobian(x, u, dt),
            noise: self.noise(x, u, dt),
            sources: self.noise_sources(x, u, dt),
        }
    }

    /// Brings a state back to its canonical range (for example, wraps a
    /// heading into (-pi, pi]). The default does nothing.
    fn normalize(&self, _x: &mut SVector<T, N>) {}
}

/// A nonlinear measurement model z = h(x) + v with its Jacobian, noise and
/// residual rule.
pub trait MeasurementModel<T: Scalar, const N: usize, const M: usize> {
    /// Which entries of the Jacobian H are structurally zero or one for
    /// every state: the update's kernels skip them (see [`Pattern`]). The
    /// default, [`Pattern::DENSE`], declares none.
    const JACOBIAN_PATTERN: Pattern<M, N> = Pattern::DENSE;

    /// Which entries of the noise covariance R are structurally zero or one
    /// (most often [`Pattern::IDENTITY`] with its diagonal freed: sensor axes
    /// with independent errors). The update never reads a declared entry:
    /// it takes the declared value, skips the products with a zero, and a
    /// diagonal R is tested variance by variance instead of factored. The
    /// default, [`Pattern::DENSE`], declares none.
    const NOISE_PATTERN: Pattern<M, M> = Pattern::DENSE;

    /// The expected measurement h(x) at the state x (not the filter's
    /// predict step).
    fn expected(&self, x: &SVector<T, N>) -> SVector<T, M>;

    /// The Jacobian of h with respect to x.
    fn jacobian(&self, x: &SVector<T, N>) -> SMatrix<T, M, N>;

    /// The measurement noise covariance R.
    fn noise(&self, x: &SVector<T, N>) -> SMatrix<T, M, M>;

    /// The innovation z - h(x). Override to wrap angles.
    fn residual(&self, z: &SVector<T, M>, expected: &SVector<T, M>) -> SVector<T, M> {
        z - expected
    }

    /// Brings the posterior state back to its canonical range. The default
    /// does nothing.
    fn normalize(&self, _x: &mut SVector<T, N>) {}
}

/// A model with its structural patterns switched off: the same functions,
/// the dense kernels. For pricing or comparing a pattern (the numbers are
/// the same but for the sign of an exact zero, see [`Pattern`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Dense<M>(pub M);

impl<T: Scalar, const N: usize, P: ProcessModel<T, N>> ProcessModel<T, N> for Dense<P> {
    type Input = P::Input;

    #[inline(always)]
    fn transition(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SVector<T, N> {
        self.0.transition(x, u, dt)
    }
    #[inline(always)]
    fn jacobian(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SMatrix<T, N, N> {
        self.0.jacobian(x, u, dt)
    }
    #[inline(always)]
    fn noise(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> SMatrix<T, N, N> {
        self.0.noise(x, u, dt)
    }
    #[inline(always)]
    fn noise_sources(
        &self,
        x: &SVector<T, N>,
        u: &Self::Input,
        dt: T,
    ) -> Option<(SMatrix<T, N, N>, SVector<T, N>)> {
        self.0.noise_sources(x, u, dt)
    }
    #[inline(always)]
    fn linearize(&self, x: &SVector<T, N>, u: &Self::Input, dt: T) -> Linearized<T, N> {
        self.0.linearize(x, u, dt)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, N>) {
        self.0.normalize(x);
    }
}

impl<T: Scalar, const N: usize, const M: usize, H: MeasurementModel<T, N, M>>
    MeasurementModel<T, N, M> for Dense<H>
{
    #[inline(always)]
    fn expected(&self, x: &SVector<T, N>) -> SVector<T, M> {
        self.0.expected(x)
    }
    #[inline(always)]
    fn jacobian(&self, x: &SVector<T, N>) -> SMatrix<T, M, N> {
        self.0.jacobian(x)
    }
    #[inline(always)]
    fn noise(&self, x: &SVector<T, N>) -> SMatrix<T, M, M> {
        self.0.noise(x)
    }
    #[inline(always)]
    fn residual(&self, z: &SVector<T, M>, expected: &SVector<T, M>) -> SVector<T, M> {
        self.0.residual(z, expected)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, N>) {
        self.0.normalize(x);
    }
}
