//! The extended-precision reference filter: the textbook covariance
//! recursion evaluated in double-double, independent of `cairn-core`.

use nalgebra::{DMatrix, DVector};

use super::{DdMatrix, NumericError};

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
#[derive(Clone, Debug)]
pub struct ReferenceFilter {
    x: DdMatrix,
    p: DdMatrix,
}

impl ReferenceFilter {
    /// A filter at `x0`, `p0` (converted exactly).
    #[must_use]
    pub fn new(x0: &DVector<f64>, p0: &DMatrix<f64>) -> Self {
        ReferenceFilter {
            x: DdMatrix::from_f64_vector(x0),
            p: DdMatrix::from_f64(p0),
        }
    }

    /// `x = F x`, `P = F P F' + Q`.
    pub fn predict(&mut self, f: &DMatrix<f64>, q: &DMatrix<f64>) {
        let _ = (f, q);
        todo!()
    }

    /// Replaces the state (for nonlinear models the caller propagates it).
    pub fn set_state(&mut self, x: &DVector<f64>) {
        self.x = DdMatrix::from_f64_vector(x);
    }

    /// The update with a given innovation.
    ///
    /// # Errors
    /// [`RefError`].
    pub fn update(
        &mut self,
        h: &DMatrix<f64>,
        r: &DMatrix<f64>,
        innovation: &DVector<f64>,
    ) -> Result<RefUpdate, RefError> {
        let _ = (h, r, innovation);
        todo!()
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
        DVector::from_fn(self.x.nrows(), |i, _| self.x[(i, 0)].to_f64())
    }
}
