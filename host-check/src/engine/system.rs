//! The user's side of a check: their process and measurement models,
//! written once and generic over the core's scalar, as the engine sees them.

use cairn_core::{MeasurementModel, ProcessModel, Scalar};
use nalgebra::{DMatrix, SVector};

use super::filter::{Filter, LaneUpdate};

/// A process model the check can build in every precision it runs: the
/// firmware's own `ProcessModel`, in `f32` and `f64`, and in `f64` for the
/// reference and the simulated truth.
pub trait System<const N: usize>: Sync {
    /// The model in scalar `T`: the very type the firmware runs.
    type Process<T: Scalar>: ProcessModel<T, N> + Send + Sync;

    /// Builds the model in `T` (its parameters rounded to `T`, as the
    /// firmware holds them).
    fn process<T: Scalar>(&self) -> Self::Process<T>;

    /// Number of input values per step (the values of a log's `input`
    /// rows, and of a simulated input profile).
    fn input_len(&self) -> usize;

    /// The model's input in `T` from one row of input values, in the
    /// documented order.
    fn input<T: Scalar>(&self, values: &[f64]) -> <Self::Process<T> as ProcessModel<T, N>>::Input;

    /// States that are angles wrapped to (-pi, pi]: differences between two
    /// filters' states, and central differences of the model, are wrapped
    /// there too. The default: none.
    fn angle_states(&self) -> &[usize] {
        &[]
    }

    /// States that hold a position in metres, which a variant may move its
    /// origin along (re-centring; the default: none).
    fn position_states(&self) -> &[usize] {
        &[]
    }

    /// `true` when the model is linear (its Jacobian does not depend on the
    /// state): then every variant runs it itself in either mode, and states
    /// are always compared. The default: `false`.
    fn is_linear(&self) -> bool {
        false
    }
}

/// A measurement model the check can build in every precision it runs.
pub trait Sensor<const N: usize, const M: usize>: Sync {
    /// The model in scalar `T`: the very type the firmware runs.
    type Model<T: Scalar>: MeasurementModel<T, N, M>;

    /// Builds the model in `T`.
    fn model<T: Scalar>(&self) -> Self::Model<T>;

    /// The measurement as a filter whose origin sits at `origin` (zero but
    /// for position states) must see it: a position fix subtracts the
    /// origin. The default leaves `z` as it is (a measurement that does not
    /// depend on where the origin is).
    fn to_frame(&self, _z: &mut [f64], _origin: &SVector<f64, N>) {}
}

/// One measurement model evaluated in `f64`.
#[derive(Debug, Clone)]
pub struct Evaluation {
    /// The predicted measurement h(x).
    pub predicted: Vec<f64>,
    /// The Jacobian H (m x n).
    pub jacobian: DMatrix<f64>,
    /// The noise covariance R (m x m).
    pub noise: DMatrix<f64>,
}

/// How a variant's update is formed.
#[derive(Debug, Clone, Copy)]
pub enum UpdateInput<'a> {
    /// The reference's Jacobian, noise and innovation: the variant applies
    /// z = H x + nu with its own state (covariance mode).
    Shared {
        /// H at the reference state.
        h: &'a DMatrix<f64>,
        /// R at the reference state.
        r: &'a DMatrix<f64>,
        /// The reference's innovation.
        innovation: &'a [f64],
    },
    /// The measurement itself, through the variant's own model at its own
    /// state (end-to-end mode), already in the variant's frame.
    Own {
        /// The measurement.
        z: &'a [f64],
    },
}

/// A measurement channel with its dimension erased, so channels of
/// different sizes sit in one list.
pub trait Channel<const N: usize>: Sync {
    /// Number of components.
    fn dim(&self) -> usize;

    /// h(x), H and R at `x`, in `f64`.
    fn evaluate(&self, x: &SVector<f64, N>) -> Evaluation;

    /// The innovation z - h(x) by the model's own residual rule, in `f64`.
    fn residual(&self, z: &[f64], predicted: &[f64]) -> Vec<f64>;

    /// The model's normalisation of a posterior state, in `f64`.
    fn normalize(&self, x: &mut SVector<f64, N>);

    /// See [`Sensor::to_frame`].
    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, N>);

    /// Applies (or, with `apply` false, only tries) one update on a
    /// variant. With a gate, the variant's own gate decision is tried on a
    /// copy and returned; the variant itself applies exactly when `apply`
    /// says so (the decision of the reference), so that covariances are
    /// compared on the same decisions.
    ///
    /// # Errors
    /// The core's error; the variant is unchanged.
    fn update(
        &self,
        filter: &mut Filter<N>,
        input: UpdateInput<'_>,
        apply: bool,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, cairn_core::FilterError>;
}

/// A [`Sensor`] of `M` components as a [`Channel`].
pub struct SensorChannel<S, const M: usize>(pub S);

impl<const N: usize, const M: usize, S: Sensor<N, M>> Channel<N> for SensorChannel<S, M> {
    fn dim(&self) -> usize {
        M
    }

    fn evaluate(&self, x: &SVector<f64, N>) -> Evaluation {
        let m = self.0.model::<f64>();
        let h = m.predict(x);
        let jac = m.jacobian(x);
        let r = m.noise(x);
        Evaluation {
            predicted: h.iter().copied().collect(),
            jacobian: DMatrix::from_fn(M, N, |i, j| jac[(i, j)]),
            noise: DMatrix::from_fn(M, M, |i, j| r[(i, j)]),
        }
    }

    fn residual(&self, z: &[f64], predicted: &[f64]) -> Vec<f64> {
        let m = self.0.model::<f64>();
        let zs = SVector::<f64, M>::from_fn(|i, _| z[i]);
        let ps = SVector::<f64, M>::from_fn(|i, _| predicted[i]);
        m.residual(&zs, &ps).iter().copied().collect()
    }

    fn normalize(&self, x: &mut SVector<f64, N>) {
        self.0.model::<f64>().normalize(x);
    }

    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, N>) {
        self.0.to_frame(z, origin);
    }

    fn update(
        &self,
        filter: &mut Filter<N>,
        input: UpdateInput<'_>,
        apply: bool,
        gate: Option<f64>,
    ) -> Result<LaneUpdate, cairn_core::FilterError> {
        super::filter::update_channel::<N, M, S>(&self.0, filter, input, apply, gate)
    }
}
