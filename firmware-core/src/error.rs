//! Errors and outcomes of the filter's operations: "refused, nothing changed"
//! is kept apart from "the measurement was gated out".

use core::fmt;

/// Which input or quantity an error is about.
#[non_exhaustive]
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum Operand {
    /// The state vector x.
    State,
    /// The covariance P.
    Covariance,
    /// The transition matrix F (or the process model's Jacobian).
    Transition,
    /// The control input u or its matrix B.
    Control,
    /// The process noise covariance Q.
    ProcessNoise,
    /// The measurement z.
    Measurement,
    /// The measurement matrix H (or the measurement model's Jacobian).
    MeasurementMatrix,
    /// The measurement noise covariance R.
    MeasurementNoise,
    /// The time step dt.
    TimeStep,
    /// The gate threshold.
    Gate,
    /// The expected measurement h(x) or the residual.
    Innovation,
    /// The health monitor's standard normal quantile.
    Quantile,
}

impl fmt::Display for Operand {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(match self {
            Operand::State => "state x",
            Operand::Covariance => "covariance P",
            Operand::Transition => "transition F",
            Operand::Control => "control input",
            Operand::ProcessNoise => "process noise Q",
            Operand::Measurement => "measurement z",
            Operand::MeasurementMatrix => "measurement matrix H",
            Operand::MeasurementNoise => "measurement noise R",
            Operand::TimeStep => "time step dt",
            Operand::Gate => "gate threshold",
            Operand::Innovation => "innovation",
            Operand::Quantile => "health quantile",
        })
    }
}

/// Why an operation was refused. A refused operation leaves the filter's
/// state and covariance bit-identical to what they were before the call.
#[non_exhaustive]
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum FilterError {
    /// An input (or a result computed from it) holds NaN or infinity.
    NonFinite(Operand),
    /// A covariance input is not symmetric positive (semi)definite; for
    /// diagonal checks, `index` is the offending row.
    NotPositiveDefinite {
        /// Which matrix.
        operand: Operand,
        /// The first row where the check failed.
        index: u8,
    },
    /// A covariance input is not symmetric to within rounding.
    NotSymmetric(Operand),
    /// The innovation covariance S = H P H' + R has a pivot that is not
    /// safely positive: the measurement cannot be weighed.
    SingularInnovation {
        /// The LDL' pivot that failed.
        pivot: u8,
    },
    /// The posterior covariance would lose positive definiteness: a
    /// non-positive or non-finite variance on the diagonal, a non-finite
    /// entry, or (with the definiteness check on, or from
    /// [`crate::Kalman::check_definiteness`]) a failing LDL' pivot. The
    /// filter is numerically unhealthy in this form and precision.
    CovarianceLost {
        /// The first diagonal entry or LDL' pivot that failed.
        index: u8,
    },
    /// The time step is zero, negative or not finite.
    InvalidTimeStep,
    /// A finite number that must be positive is zero or negative (a gate
    /// threshold, the health monitor's quantile).
    NotPositive(Operand),
}

/// The two things an error can mean to firmware, matched without a
/// wildcard: the call's input was refused, or the filter's own numbers can
/// no longer be trusted in this form and precision.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub enum ErrorKind {
    /// The input was rejected (not finite, not a covariance, not positive,
    /// a bad time step). Nothing changed; fix the caller or the model.
    Rejected,
    /// The filter cannot carry on safely: the innovation covariance could
    /// not be factored or the posterior would not be a covariance. Nothing
    /// changed; reinitialise, or move to a more robust form or precision.
    Unhealthy,
}

impl FilterError {
    /// Whether the input was refused or the filter is numerically unhealthy.
    #[must_use]
    pub fn kind(&self) -> ErrorKind {
        match self {
            FilterError::SingularInnovation { .. } | FilterError::CovarianceLost { .. } => {
                ErrorKind::Unhealthy
            }
            FilterError::NonFinite(_)
            | FilterError::NotPositiveDefinite { .. }
            | FilterError::NotSymmetric(_)
            | FilterError::InvalidTimeStep
            | FilterError::NotPositive(_) => ErrorKind::Rejected,
        }
    }
}

impl fmt::Display for FilterError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FilterError::NonFinite(op) => write!(f, "{op} holds NaN or infinity"),
            FilterError::NotPositiveDefinite { operand, index } => {
                write!(f, "{operand} is not positive definite (row {index})")
            }
            FilterError::NotSymmetric(op) => write!(f, "{op} is not symmetric"),
            FilterError::SingularInnovation { pivot } => write!(
                f,
                "innovation covariance S = HPH' + R is singular or indefinite (pivot {pivot})"
            ),
            FilterError::CovarianceLost { index } => write!(
                f,
                "posterior covariance lost positive definiteness (diagonal {index})"
            ),
            FilterError::InvalidTimeStep => {
                f.write_str("time step is zero, negative or not finite")
            }
            FilterError::NotPositive(op) => write!(f, "{op} is zero or negative"),
        }
    }
}

impl core::error::Error for FilterError {}

/// What an accepted call to an update did with the measurement.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
#[must_use = "a gated-out measurement changed nothing; check the outcome"]
pub enum Outcome<T> {
    /// The measurement was applied. `nis` is its normalised innovation squared.
    Applied {
        /// Normalised innovation squared, nu' S^-1 nu.
        nis: T,
    },
    /// The measurement failed the chi-square gate and changed nothing.
    Gated {
        /// Normalised innovation squared, nu' S^-1 nu.
        nis: T,
    },
}

impl<T: Copy> Outcome<T> {
    /// The normalised innovation squared, applied or not.
    pub fn nis(&self) -> T {
        match *self {
            Outcome::Applied { nis } | Outcome::Gated { nis } => nis,
        }
    }

    /// `true` when the measurement was applied.
    pub fn is_applied(&self) -> bool {
        matches!(self, Outcome::Applied { .. })
    }
}

/// Clamps a small index into the error payload type.
#[inline]
pub(crate) fn idx(i: usize) -> u8 {
    if i > u8::MAX as usize {
        u8::MAX
    } else {
        i as u8
    }
}
