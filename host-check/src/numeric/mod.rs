//! Numerical foundations of the verifier: double-double arithmetic, the
//! extended-precision reference filter, discretisation, Riccati steady state
//! and noise-figure conversions.
//!
//! Everything here is host-only (`std`, heap allocation allowed outside the
//! hot paths) and independent of `cairn-core`'s generic filter code, so that
//! the reference it computes is a genuine second opinion.
//!
//! | module        | job                                                                 |
//! |---------------|---------------------------------------------------------------------|
//! | [`dd`]        | double-double scalar [`Dd`] (106-bit significand)                   |
//! | [`ddmat`]     | small dense [`DdMatrix`] with LDL' and LU solves                    |
//! | [`mod@reference`] | [`ReferenceFilter`]: predict/update in double-double                |
//! | [`vanloan`]   | matrix exponential and Van Loan (1978) discretisation               |
//! | [`dare`]      | steady state of the discrete Riccati equation, solved in [`Dd`]     |
//! | [`noise`]     | datasheet noise figures to white-noise intensities, with the steps  |
//! | [`units`]     | the unit grammar of the spec file                                   |

/// Test helper: `dmat![a, b; c, d]` builds a `DMatrix<f64>` row by row.
#[cfg(test)]
macro_rules! dmat {
    ($($($x:expr),+);+ $(;)?) => {{
        let rows: Vec<Vec<f64>> = vec![$(vec![$(f64::from($x)),+]),+];
        nalgebra::DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
    }};
}

pub mod dare;
pub mod dd;
pub mod ddmat;
mod error;
pub mod noise;
pub mod reference;
pub mod units;
pub mod vanloan;

pub use dd::Dd;
pub use ddmat::DdMatrix;
pub use error::NumericError;
pub use reference::{RefError, RefUpdate, ReferenceFilter};
