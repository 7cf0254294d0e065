//! x(k+1) = F x(k) + w and z = H x + v as cairn-core models, so a linear
//! spec runs through the same engine as any user's model.

use cairn_core::{MeasurementModel, ProcessModel, Scalar};
use nalgebra::{DMatrix, SMatrix, SVector};

use crate::engine::{Sensor, System};

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
    fn predict(&self, x: &SVector<T, N>) -> SVector<T, M> {
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
