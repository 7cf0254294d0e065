//! The list of filter variants the verifier runs, cheapest first. Adding a
//! form is one [`Family`] impl and one line in [`VARIANTS`].

use cairn_core::{Conventional, Estimator, FilterError, Joseph, Kalman, Scalar, UdKalman};
use nalgebra::DMatrix;

use super::lane::{CoreLane, Lane};
use crate::spec::Precision;

/// A covariance form of cairn-core, for every state count.
pub trait Family {
    /// The estimator type at scalar `T` and `N` states.
    type At<T: Scalar, const N: usize>: Estimator<T, N> + 'static;
}

/// [`Kalman`] with the conventional update.
pub struct ConventionalForm;
/// [`Kalman`] with the Joseph update.
pub struct JosephForm;
/// The U-D factored filter [`UdKalman`].
pub struct UdForm;

impl Family for ConventionalForm {
    type At<T: Scalar, const N: usize> = Kalman<T, N, Conventional>;
}
impl Family for JosephForm {
    type At<T: Scalar, const N: usize> = Kalman<T, N, Joseph>;
}
impl Family for UdForm {
    type At<T: Scalar, const N: usize> = UdKalman<T, N>;
}

/// Why a variant could not be started.
#[derive(Debug, Clone, PartialEq, Eq)]
pub enum BuildError {
    /// No instantiation for this many states.
    Size(usize),
    /// The core refused x0 or P0 in this precision.
    Refused(FilterError),
}

impl core::fmt::Display for BuildError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        match self {
            BuildError::Size(n) => write!(f, "no variant is built for {n} states (1 to 9 are)"),
            BuildError::Refused(e) => write!(f, "the core refused the initial state: {e}"),
        }
    }
}

/// Builds a lane over `n` states, dispatching the run-time size to one of
/// the monomorphised instantiations N = 1..=9.
macro_rules! dispatch_n {
    ($n:expr, $t:ty, $fam:ty, $x0:expr, $p0:expr; $($k:literal)*) => {
        match $n {
            $( $k => CoreLane::<$t, $k, <$fam as Family>::At<$t, $k>>::boxed($x0, $p0)
                .map_err(BuildError::Refused), )*
            other => Err(BuildError::Size(other)),
        }
    };
}

fn build<T: Scalar, Fm: Family>(
    n: usize,
    x0: &[f64],
    p0: &DMatrix<f64>,
) -> Result<Box<dyn Lane>, BuildError> {
    dispatch_n!(n, T, Fm, x0, p0; 1 2 3 4 5 6 7 8 9)
}

/// Builds a lane over N states from x0 and P0.
pub type BuildFn = fn(usize, &[f64], &DMatrix<f64>) -> Result<Box<dyn Lane>, BuildError>;

/// One variant: a scalar type, a covariance form and how to build it.
#[derive(Clone, Copy)]
pub struct Variant {
    /// Scalar type.
    pub precision: Precision,
    /// Form name as written in specs ("joseph", "conventional", "u-d").
    pub form: &'static str,
    /// Rough cost rank on a Cortex-M4F, cheapest first (f64 is software
    /// floating point there, so every f32 form ranks before any f64 one).
    pub cost_rank: u8,
    /// Builds the lane.
    pub build: BuildFn,
}

impl Variant {
    /// "f32 joseph" and so on.
    pub fn name(&self) -> String {
        format!("{} {}", self.precision.name(), self.form)
    }
}

impl core::fmt::Debug for Variant {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(&self.name())
    }
}

/// Every variant the verifier runs, cheapest first.
pub const VARIANTS: &[Variant] = &[
    Variant {
        precision: Precision::F32,
        form: "conventional",
        cost_rank: 1,
        build: build::<f32, ConventionalForm>,
    },
    Variant {
        precision: Precision::F32,
        form: "u-d",
        cost_rank: 2,
        build: build::<f32, UdForm>,
    },
    Variant {
        precision: Precision::F32,
        form: "joseph",
        cost_rank: 3,
        build: build::<f32, JosephForm>,
    },
    Variant {
        precision: Precision::F64,
        form: "conventional",
        cost_rank: 4,
        build: build::<f64, ConventionalForm>,
    },
    Variant {
        precision: Precision::F64,
        form: "u-d",
        cost_rank: 5,
        build: build::<f64, UdForm>,
    },
    Variant {
        precision: Precision::F64,
        form: "joseph",
        cost_rank: 6,
        build: build::<f64, JosephForm>,
    },
];

/// The variant with this precision and form name.
pub fn find(precision: Precision, form: &str) -> Option<&'static Variant> {
    VARIANTS
        .iter()
        .find(|v| v.precision == precision && v.form == form)
}

/// The distinct form names, for error messages.
pub fn form_names() -> Vec<&'static str> {
    let mut names: Vec<&'static str> = VARIANTS.iter().map(|v| v.form).collect();
    names.sort_unstable();
    names.dedup();
    names
}
