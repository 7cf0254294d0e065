//! The error type shared by the numeric modules: bad input or a problem
//! without a solution, always reported, never a panic.

use std::fmt;

/// Why a numeric routine refused its input or found no answer.
#[derive(Clone, Debug, PartialEq)]
#[non_exhaustive]
pub enum NumericError {
    /// A matrix or vector had the wrong shape.
    DimensionMismatch {
        /// Which operand.
        what: &'static str,
        /// The shape required (rows, columns).
        expected: (usize, usize),
        /// The shape given (rows, columns).
        found: (usize, usize),
    },
    /// An operand contained NaN or an infinity.
    NonFinite {
        /// Which operand.
        what: &'static str,
    },
    /// A matrix that must be symmetric positive definite was not.
    NotPositiveDefinite {
        /// Which matrix.
        what: &'static str,
    },
    /// A matrix that must be invertible was (numerically) singular.
    Singular {
        /// Which matrix.
        what: &'static str,
    },
    /// A scalar that must be positive (a rate, a time step, a variance) was not.
    NotPositive {
        /// Which quantity.
        what: &'static str,
        /// The value given.
        value: f64,
    },
    /// The Riccati equation has no bounded solution: a mode the
    /// measurements cannot see is unstable (the pair (F, H) is not detectable).
    NotDetectable,
    /// The Riccati equation's solution does not stabilise the filter: a
    /// mode on or outside the unit circle is not excited by the process noise
    /// (the pair (F, Q^(1/2)) is not stabilisable). Carries the spectral
    /// radius of the closed loop.
    NotStabilisable {
        /// Spectral radius of `F (I - K H)` at the solution found.
        spectral_radius: f64,
    },
    /// An iteration did not converge.
    NoConvergence {
        /// Which routine.
        what: &'static str,
        /// Iterations done.
        iterations: usize,
    },
    /// A unit name the grammar does not know.
    UnknownUnit {
        /// The whole unit text.
        text: String,
        /// The unknown name.
        name: String,
    },
    /// A unit text that does not parse.
    BadUnit {
        /// The whole unit text.
        text: String,
        /// What is wrong, in words.
        reason: String,
    },
    /// A noise figure's unit does not fit the noise quantity's unit.
    UnitMismatch {
        /// The figure's unit text.
        unit: String,
        /// The quantity's unit text.
        quantity: String,
        /// What was expected, in words.
        reason: String,
    },
    /// A noise figure lacks something it needs (for example a sample rate).
    MissingInput {
        /// What is missing, in words.
        what: &'static str,
    },
}

impl fmt::Display for NumericError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            NumericError::DimensionMismatch {
                what,
                expected,
                found,
            } => write!(
                f,
                "{what} must be {}x{}, found {}x{}",
                expected.0, expected.1, found.0, found.1
            ),
            NumericError::NonFinite { what } => {
                write!(f, "{what} contains NaN or an infinity")
            }
            NumericError::NotPositiveDefinite { what } => {
                write!(f, "{what} is not symmetric positive definite")
            }
            NumericError::Singular { what } => write!(f, "{what} is singular"),
            NumericError::NotPositive { what, value } => {
                write!(f, "{what} must be positive, found {value}")
            }
            NumericError::NotDetectable => write!(
                f,
                "no steady state: an unstable mode is not seen by the measurements (F, H not detectable)"
            ),
            NumericError::NotStabilisable { spectral_radius } => write!(
                f,
                "no stabilising steady state: a mode is not excited by the process noise \
                 (closed-loop spectral radius {spectral_radius})"
            ),
            NumericError::NoConvergence { what, iterations } => {
                write!(f, "{what} did not converge in {iterations} iterations")
            }
            NumericError::UnknownUnit { text, name } => {
                write!(f, "unknown unit `{name}` in `{text}`")
            }
            NumericError::BadUnit { text, reason } => {
                write!(f, "cannot read unit `{text}`: {reason}")
            }
            NumericError::UnitMismatch {
                unit,
                quantity,
                reason,
            } => write!(
                f,
                "unit `{unit}` does not fit a noise on a quantity in `{quantity}`: {reason}"
            ),
            NumericError::MissingInput { what } => write!(f, "missing {what}"),
        }
    }
}

impl std::error::Error for NumericError {}
