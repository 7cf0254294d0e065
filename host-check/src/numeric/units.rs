//! The unit grammar of the spec file: parses texts such as `deg/s/sqrt(Hz)`
//! or `(deg/h)^2/Hz` into a scale factor and a dimension.

use super::NumericError;

/// A parsed unit.
#[derive(Clone, Debug, PartialEq)]
pub struct Unit {
    /// Multiply a value in this unit by `scale` to get coherent base units.
    pub scale: f64,
    /// Twice the exponent of each base dimension.
    pub dims: [i32; 6],
}

/// Parses a unit text.
///
/// # Errors
/// [`NumericError::UnknownUnit`] or [`NumericError::BadUnit`].
pub fn parse_unit(text: &str) -> Result<Unit, NumericError> {
    let _ = text;
    todo!()
}
