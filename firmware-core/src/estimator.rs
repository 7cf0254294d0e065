//! One trait over every filter form, so firmware (and the host verifier)
//! switches between covariance forms by changing a single type.

use nalgebra::{SMatrix, SVector};

use crate::error::{FilterError, Outcome};
use crate::form::CovarianceForm;
use crate::kalman::Kalman;
use crate::model::{MeasurementModel, ProcessModel};
use crate::scalar::Scalar;
use crate::ud::UdKalman;

/// The operations every filter form offers. `Kalman<T, N, Joseph>`,
/// `Kalman<T, N, Conventional>` and `UdKalman<T, N>` implement it with the
/// same contracts (transactional, no panics); see their inherent methods for
/// the documentation of each operation and its errors.
pub trait Estimator<T: Scalar, const N: usize>: Sized {
    /// Short name of the form, for reports (for a covariance filter, its
    /// form's [`CovarianceForm::NAME`]).
    const NAME: &'static str;

    /// A filter from an initial state and covariance.
    ///
    /// # Errors
    /// As [`Kalman::try_new`].
    fn try_new(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Result<Self, FilterError>;

    /// The state estimate.
    fn state(&self) -> &SVector<T, N>;

    /// An owned copy of the covariance as a full symmetric matrix: a copy of
    /// the stored P for the covariance forms ([`Kalman::covariance`] borrows
    /// it), an O(n^3) rebuild from the factors for the U-D filter
    /// ([`UdKalman::rebuild_covariance`]). For reports and checks, not the
    /// hot path.
    fn covariance_snapshot(&self) -> SMatrix<T, N, N>;

    /// Moves the origin the state is expressed in: x -= offset, covariance
    /// unchanged (keeps f32 positions near a local origin).
    ///
    /// # Errors
    /// As [`Kalman::shift_origin`]; nothing changes on error.
    fn shift_origin(&mut self, offset: &SVector<T, N>) -> Result<(), FilterError>;

    /// Linear predict.
    ///
    /// # Errors
    /// As [`Kalman::predict`].
    fn predict(&mut self, f: &SMatrix<T, N, N>, q: &SMatrix<T, N, N>) -> Result<(), FilterError>;

    /// Linear predict given the process noise both as Q and as independent
    /// sources G diag(q) G' equal to it. Covariance forms use Q; factored
    /// forms use the sources and skip factoring a possibly singular Q (the
    /// default uses Q).
    ///
    /// # Errors
    /// As [`Kalman::predict`] and [`UdKalman::predict_with_sources`].
    fn predict_with_sources(
        &mut self,
        f: &SMatrix<T, N, N>,
        q: &SMatrix<T, N, N>,
        _g: &SMatrix<T, N, N>,
        _q_sources: &SVector<T, N>,
    ) -> Result<(), FilterError> {
        self.predict(f, q)
    }

    /// Extended predict.
    ///
    /// # Errors
    /// As [`Kalman::predict_with`].
    fn predict_with<P: ProcessModel<T, N>>(
        &mut self,
        model: &P,
        u: &P::Input,
        dt: T,
    ) -> Result<(), FilterError>;

    /// Linear update.
    ///
    /// # Errors
    /// As [`Kalman::update`].
    fn update<const M: usize>(
        &mut self,
        z: &SVector<T, M>,
        h: &SMatrix<T, M, N>,
        r: &SMatrix<T, M, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError>;

    /// Extended update.
    ///
    /// # Errors
    /// As [`Kalman::update_with`].
    fn update_with<Mm: MeasurementModel<T, N, M>, const M: usize>(
        &mut self,
        model: &Mm,
        z: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError>;

    /// Sequential update with uncorrelated noise.
    ///
    /// # Errors
    /// As [`Kalman::update_sequential`].
    fn update_sequential<const M: usize>(
        &mut self,
        z: &SVector<T, M>,
        h: &SMatrix<T, M, N>,
        r: &SVector<T, M>,
        gate: Option<T>,
    ) -> Result<Outcome<T>, FilterError>;
}

macro_rules! forward {
    () => {
        fn shift_origin(&mut self, offset: &SVector<T, N>) -> Result<(), FilterError> {
            Self::shift_origin(self, offset)
        }
        fn predict(
            &mut self,
            f: &SMatrix<T, N, N>,
            q: &SMatrix<T, N, N>,
        ) -> Result<(), FilterError> {
            Self::predict(self, f, q)
        }
        fn predict_with<P: ProcessModel<T, N>>(
            &mut self,
            model: &P,
            u: &P::Input,
            dt: T,
        ) -> Result<(), FilterError> {
            Self::predict_with(self, model, u, dt)
        }
        fn update<const M: usize>(
            &mut self,
            z: &SVector<T, M>,
            h: &SMatrix<T, M, N>,
            r: &SMatrix<T, M, M>,
            gate: Option<T>,
        ) -> Result<Outcome<T>, FilterError> {
            Self::update(self, z, h, r, gate)
        }
        fn update_with<Mm: MeasurementModel<T, N, M>, const M: usize>(
            &mut self,
            model: &Mm,
            z: &SVector<T, M>,
            gate: Option<T>,
        ) -> Result<Outcome<T>, FilterError> {
            Self::update_with(self, model, z, gate)
        }
        fn update_sequential<const M: usize>(
            &mut self,
            z: &SVector<T, M>,
            h: &SMatrix<T, M, N>,
            r: &SVector<T, M>,
            gate: Option<T>,
        ) -> Result<Outcome<T>, FilterError> {
            Self::update_sequential(self, z, h, r, gate)
        }
    };
}

impl<T: Scalar, const N: usize, F: CovarianceForm> Estimator<T, N> for Kalman<T, N, F> {
    const NAME: &'static str = F::NAME;
    fn try_new(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Result<Self, FilterError> {
        Kalman::try_new(x, p)
    }
    fn state(&self) -> &SVector<T, N> {
        Kalman::state(self)
    }
    fn covariance_snapshot(&self) -> SMatrix<T, N, N> {
        *self.covariance()
    }
    forward!();
}

impl<T: Scalar, const N: usize> Estimator<T, N> for UdKalman<T, N> {
    const NAME: &'static str = "u-d";
    fn try_new(x: SVector<T, N>, p: SMatrix<T, N, N>) -> Result<Self, FilterError> {
        UdKalman::try_new(x, p)
    }
    fn state(&self) -> &SVector<T, N> {
        UdKalman::state(self)
    }
    fn covariance_snapshot(&self) -> SMatrix<T, N, N> {
        self.rebuild_covariance()
    }
    fn predict_with_sources(
        &mut self,
        f: &SMatrix<T, N, N>,
        _q: &SMatrix<T, N, N>,
        g: &SMatrix<T, N, N>,
        q_sources: &SVector<T, N>,
    ) -> Result<(), FilterError> {
        UdKalman::predict_with_sources(self, f, g, q_sources)
    }
    forward!();
}
