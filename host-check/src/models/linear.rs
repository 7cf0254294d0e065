//! x(k+1) = F x(k) + w and z = H x + v as cairn-core models, so a linear
//! spec runs through the same engine as any user's model.

use cairn_core::{MeasurementModel, ProcessModel, Scalar};
use nalgebra::{DMatrix, SMatrix, SVector};

use crate::engine::{Sensor, System};
use crate::spec::Plan;

/// F and Q in the filter's scalar.
#[derive(Debug, Clone, Copy)]
pub struct LinearProcess<T: Scalar, const N: usize> {
    /// Transition matrix.
    pub f: SMatrix<T, N, N>,
    /// Discrete process noise covariance.
    pub q: SMatrix<T, N, N>,
}

impl<T: Scalar, const N: usize> ProcessModel<T, N> for LinearProcess<T, N> {
    type Input = ();

    fn transition(&self, x: &SVector<T, N>, _u: &(), _dt: T) -> SVector<T, N> {
        self.f * x
    }

    fn jacobian(&self, _x: &SVector<T, N>, _u: &(), _dt: T) -> SMatrix<T, N, N> {
        self.f
    }

    fn noise(&self, _x: &SVector<T, N>, _u: &(), _dt: T) -> SMatrix<T, N, N> {
        self.q
    }
}

/// A linear time-invariant model with F and Q given in f64.
#[derive(Debug, Clone)]
pub struct LinearSystem<const N: usize> {
    f: SMatrix<f64, N, N>,
    q: SMatrix<f64, N, N>,
}

impl<const N: usize> LinearSystem<N> {
    /// The model from F and Q (N x N).
    #[must_use]
    pub fn new(f: &DMatrix<f64>, q: &DMatrix<f64>) -> Self {
        Self {
            f: SMatrix::from_fn(|i, j| f[(i, j)]),
            q: SMatrix::from_fn(|i, j| q[(i, j)]),
        }
    }
}

impl<const N: usize> System<N> for LinearSystem<N> {
    type Process<T: Scalar> = LinearProcess<T, N>;

    fn process<T: Scalar>(&self) -> LinearProcess<T, N> {
        LinearProcess {
            f: self.f.map(T::of),
            q: self.q.map(T::of),
        }
    }

    fn input_len(&self) -> usize {
        0
    }

    fn input<T: Scalar>(&self, _values: &[f64]) {}

    fn is_linear(&self) -> bool {
        true
    }
}

/// H and R in the filter's scalar.
#[derive(Debug, Clone, Copy)]
pub struct LinearMeasurement<T: Scalar, const N: usize, const M: usize> {
    /// Measurement matrix.
    pub h: SMatrix<T, M, N>,
    /// Measurement noise covariance.
    pub r: SMatrix<T, M, M>,
}

impl<T: Scalar, const N: usize, const M: usize> MeasurementModel<T, N, M>
    for LinearMeasurement<T, N, M>
{
    fn expected(&self, x: &SVector<T, N>) -> SVector<T, M> {
        self.h * x
    }

    fn jacobian(&self, _x: &SVector<T, N>) -> SMatrix<T, M, N> {
        self.h
    }

    fn noise(&self, _x: &SVector<T, N>) -> SMatrix<T, M, M> {
        self.r
    }
}

/// A linear channel with H and R given in f64.
#[derive(Debug, Clone)]
pub struct LinearSensor<const N: usize, const M: usize> {
    h: SMatrix<f64, M, N>,
    r: SMatrix<f64, M, M>,
}

impl<const N: usize, const M: usize> LinearSensor<N, M> {
    /// The channel from H (M x N) and R (M x M).
    #[must_use]
    pub fn new(h: &DMatrix<f64>, r: &DMatrix<f64>) -> Self {
        Self {
            h: SMatrix::from_fn(|i, j| h[(i, j)]),
            r: SMatrix::from_fn(|i, j| r[(i, j)]),
        }
    }
}

impl<const N: usize, const M: usize> Sensor<N, M> for LinearSensor<N, M> {
    type Model<T: Scalar> = LinearMeasurement<T, N, M>;

    fn model<T: Scalar>(&self) -> LinearMeasurement<T, N, M> {
        LinearMeasurement {
            h: self.h.map(T::of),
            r: self.r.map(T::of),
        }
    }
}

pub use crate::engine::check::Lifted;

/// The lifted LTI model between updates, when the spec has one: a linear
/// model whose channels all update together every m steps without dropouts.
pub fn steady_setup(
    plan: &Plan,
    f: &DMatrix<f64>,
    q: &DMatrix<f64>,
) -> (Option<Lifted>, Option<String>) {
    if plan.channels.is_empty() {
        return (None, Some("no steady state without measurements".into()));
    }
    let ratio = plan.step_hz / plan.channels[0].rate_hz;
    let every = ratio.round();
    if !(1.0..=1e5).contains(&every) {
        return (
            None,
            Some("no steady state: more than 100 000 steps between updates".into()),
        );
    }
    if (ratio - every).abs() > 1e-9 * ratio {
        return (
            None,
            Some("no steady state: the update rate does not divide the step rate".into()),
        );
    }
    if plan.channels.iter().any(|c| {
        (c.rate_hz - plan.channels[0].rate_hz).abs() > 1e-12 * c.rate_hz || !c.dropouts.is_empty()
    }) {
        return (
            None,
            Some("no steady state: channels differ in rate or have dropouts".into()),
        );
    }
    let n = plan.n();
    let mut fl = DMatrix::identity(n, n);
    let mut ql = DMatrix::zeros(n, n);
    for _ in 0..every as u64 {
        ql = f * &ql * f.transpose() + q;
        fl = f * fl;
    }
    let m: usize = plan.channels.iter().map(|c| c.m).sum();
    let mut h = DMatrix::zeros(m, n);
    let mut r = DMatrix::zeros(m, m);
    let mut row = 0;
    for c in &plan.channels {
        h.view_mut((row, 0), (c.m, n)).copy_from(&c.h(n));
        r.view_mut((row, row), (c.m, c.m)).copy_from(&c.r);
        row += c.m;
    }
    (Some((fl, h, ql, r, every as u64)), None)
}
