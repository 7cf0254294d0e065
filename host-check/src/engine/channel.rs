//! A measurement channel with its size erased, so channels of different
//! sizes sit in one list: the typed [`Sensor`] behind a small trait object.

use cairn_core::{Entry, MeasurementModel};
use nalgebra::{DMatrix, SMatrix, SVector};

use super::filter::{Filter, UpdateInput, VariantUpdate};
use super::system::Sensor;

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

/// A measurement channel with its dimension erased, so channels of
/// different sizes sit in one list.
pub trait Channel<const N: usize>: Sync {
    /// Number of components.
    fn dim(&self) -> usize;

    /// h(x), H and R at `x`, in `f64`.
    fn evaluate(&self, x: &SVector<f64, N>) -> Evaluation;

    /// The first entry of this channel's H, then of its R (as `evaluate`
    /// gave them), that breaks the model's declared structural pattern
    /// (`MeasurementModel::JACOBIAN_PATTERN`, `NOISE_PATTERN`): the
    /// matrix ("H" or "R"), the entry and what the pattern says.
    fn pattern_break(&self, ev: &Evaluation) -> Option<(&'static str, usize, usize, Entry)>;

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
    ) -> Result<VariantUpdate, cairn_core::FilterError>;
}

/// A [`Sensor`] of `M` components as a [`Channel`].
pub struct SensorChannel<S, const M: usize>(pub S);

impl<const N: usize, const M: usize, S: Sensor<N, M>> Channel<N> for SensorChannel<S, M> {
    fn dim(&self) -> usize {
        M
    }

    fn evaluate(&self, x: &SVector<f64, N>) -> Evaluation {
        let m = self.0.model::<f64>();
        let h = m.expected(x);
        let jac = m.jacobian(x);
        let r = m.noise(x);
        Evaluation {
            predicted: h.iter().copied().collect(),
            jacobian: DMatrix::from_fn(M, N, |i, j| jac[(i, j)]),
            noise: DMatrix::from_fn(M, M, |i, j| r[(i, j)]),
        }
    }

    fn pattern_break(&self, ev: &Evaluation) -> Option<(&'static str, usize, usize, Entry)> {
        let h_pattern = <S::Model<f64> as MeasurementModel<f64, N, M>>::JACOBIAN_PATTERN;
        let r_pattern = <S::Model<f64> as MeasurementModel<f64, N, M>>::NOISE_PATTERN;
        let h = SMatrix::<f64, M, N>::from_fn(|i, j| ev.jacobian[(i, j)]);
        let r = SMatrix::<f64, M, M>::from_fn(|i, j| ev.noise[(i, j)]);
        let h_break = h_pattern
            .first_violation(&h)
            .map(|(i, j)| ("H", i, j, h_pattern.entry(i, j)));
        h_break.or_else(|| {
            r_pattern
                .first_violation(&r)
                .map(|(i, j)| ("R", i, j, r_pattern.entry(i, j)))
        })
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
    ) -> Result<VariantUpdate, cairn_core::FilterError> {
        super::filter::update_channel::<N, M, S>(&self.0, filter, input, apply, gate)
    }
}
