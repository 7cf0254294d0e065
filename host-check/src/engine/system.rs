//! The user's side of a check: their process and measurement models,
//! written once and generic over the core's scalar, as the engine sees them.

use cairn_core::{MeasurementModel, ProcessModel, Scalar};
use nalgebra::SVector;

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
