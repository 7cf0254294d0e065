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
//!
//! ## Example: from a datasheet to a steady state, and a reference run
//! ```
//! use cairn_host_check::numeric::{dare, noise, vanloan, ReferenceFilter};
//! use nalgebra::{DMatrix, DVector};
//!
//! // An invented wheel-speed sensor: 0.02 (m/s)/sqrt(Hz), one-sided, drives a
//! // velocity state; position is measured at 50 Hz with 5 cm noise.
//! let accel = noise::convert(0.02, "m/s^2/sqrt(Hz)", "m/s^2", None, None)?;
//! let fix = noise::convert(5.0, "cm", "m", None, Some(50.0))?;
//! let dt = 1.0 / 50.0;
//! let a = DMatrix::from_row_slice(2, 2, &[0.0, 1.0, 0.0, 0.0]);
//! let g = DMatrix::from_row_slice(2, 1, &[0.0, 1.0]);
//! let (f, q) = vanloan::discretize(&a, &g, &DMatrix::from_element(1, 1, accel.intensity), dt)?;
//! let h = DMatrix::from_row_slice(1, 2, &[1.0, 0.0]);
//! let r = DMatrix::from_element(1, 1, noise::sample_variance(fix.intensity, dt));
//! let steady = dare::solve(&f, &h, &q, &r)?;
//!
//! // The double-double reference converges to the same steady state.
//! let mut reference = ReferenceFilter::new(&DVector::zeros(2), &DMatrix::identity(2, 2));
//! for _ in 0..5000 {
//!     reference.predict(&f, &q);
//!     reference.update(&h, &r, &DVector::zeros(1))?;
//! }
//! let diff = (reference.covariance() - &steady.posterior).norm() / steady.posterior.norm();
//! assert!(diff < 1e-12);
//! # Ok::<(), Box<dyn std::error::Error>>(())
//! ```

/// Test helper: `dmat![a, b; c, d]` builds a `DMatrix<f64>` row by row.
#[cfg(test)]
macro_rules! dmat {
    ($($($x:expr),+);+ $(;)?) => {{
        let rows: Vec<Vec<f64>> = vec![$(vec![$(f64::from($x)),+]),+];
        nalgebra::DMatrix::from_fn(rows.len(), rows[0].len(), |i, j| rows[i][j])
    }};
}

pub mod conversion;
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
