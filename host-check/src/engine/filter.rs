//! The catalogue of variants (precision x covariance form) and one running
//! filter of cairn-core's own code for each, behind a closed enum.

use cairn_core::{
    Conventional, Estimator, FilterError, Joseph, Kalman, Ldl, MeasurementModel, Scalar, UdKalman,
};
use nalgebra::{DMatrix, SMatrix, SVector};
use serde::Serialize;

use super::system::{Sensor, System};
use crate::engine::plan::Precision;

/// A covariance form of cairn-core.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Form {
    /// `Kalman<_, _, Conventional>`: P = P - K H P.
    Conventional,
    /// `UdKalman`: the U-D factored form.
    Ud,
    /// `Kalman<_, _, Joseph>`: Joseph's form.
    Joseph,
}

impl Form {
    /// The name used in specs and reports.
    #[must_use]
    pub fn name(self) -> &'static str {
        match self {
            Form::Conventional => "conventional",
            Form::Ud => "u-d",
            Form::Joseph => "joseph",
        }
    }

    /// The form with this name.
    #[must_use]
    pub fn parse(name: &str) -> Option<Form> {
        match name.to_ascii_lowercase().as_str() {
            "conventional" => Some(Form::Conventional),
            "u-d" | "ud" => Some(Form::Ud),
            "joseph" => Some(Form::Joseph),
            _ => None,
        }
    }
}

/// One variant: a scalar type and a covariance form.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
pub struct Variant {
    /// Scalar type.
    pub precision: Precision,
    /// Covariance form.
    pub form: Form,
    /// Rough cost rank on a Cortex-M4F, cheapest first (f64 is software
    /// floating point there, so every f32 form ranks before any f64 one).
    pub cost_rank: u8,
}

impl Variant {
    /// "f32 joseph" and so on.
    #[must_use]
    pub fn name(&self) -> String {
        format!("{} {}", self.precision.name(), self.form.name())
    }

    /// The catalogued variant of this precision and form.
    #[must_use]
    pub fn of(precision: Precision, form: Form) -> Variant {
        VARIANTS
            .iter()
            .copied()
            .find(|v| v.precision == precision && v.form == form)
            .unwrap_or(Variant {
                precision,
                form,
                cost_rank: 0,
            })
    }

    /// The variant with this precision and form name.
    #[must_use]
    pub fn find(precision: Precision, form: &str) -> Option<Variant> {
        VARIANTS
            .iter()
            .copied()
            .find(|v| v.precision == precision && v.form.name() == form)
    }
}

/// Every variant the check runs, cheapest first.
pub const VARIANTS: [Variant; 6] = [
    Variant {
        precision: Precision::F32,
        form: Form::Conventional,
        cost_rank: 1,
    },
    Variant {
        precision: Precision::F32,
        form: Form::Ud,
        cost_rank: 2,
    },
    Variant {
        precision: Precision::F32,
        form: Form::Joseph,
        cost_rank: 3,
    },
    Variant {
        precision: Precision::F64,
        form: Form::Conventional,
        cost_rank: 4,
    },
    Variant {
        precision: Precision::F64,
        form: Form::Ud,
        cost_rank: 5,
    },
    Variant {
        precision: Precision::F64,
        form: Form::Joseph,
        cost_rank: 6,
    },
];

/// The variant every other's state is compared with.
pub const BASELINE: Variant = VARIANTS[5];

/// The distinct form names, for error messages.
#[must_use]
pub fn form_names() -> Vec<&'static str> {
    vec!["conventional", "joseph", "u-d"]
}

/// A running filter: cairn-core's own type for one variant.
#[derive(Debug, Clone, Copy)]
pub enum Filter<const N: usize> {
    /// f32, conventional.
    F32Conventional(Kalman<f32, N, Conventional>),
    /// f32, U-D.
    F32Ud(UdKalman<f32, N>),
    /// f32, Joseph.
    F32Joseph(Kalman<f32, N, Joseph>),
    /// f64, conventional.
    F64Conventional(Kalman<f64, N, Conventional>),
    /// f64, U-D.
    F64Ud(UdKalman<f64, N>),
    /// f64, Joseph.
    F64Joseph(Kalman<f64, N, Joseph>),
}

/// Runs `$body` with `$f` bound to the filter and `$t` to its scalar.
macro_rules! each {
    ($filter:expr, $f:ident, $t:ident => $body:expr) => {
        match $filter {
            Filter::F32Conventional($f) => {
                type $t = f32;
                $body
            }
            Filter::F32Ud($f) => {
                type $t = f32;
                $body
            }
            Filter::F32Joseph($f) => {
                type $t = f32;
                $body
            }
            Filter::F64Conventional($f) => {
                type $t = f64;
                $body
            }
            Filter::F64Ud($f) => {
                type $t = f64;
                $body
            }
            Filter::F64Joseph($f) => {
                type $t = f64;
                $body
            }
        }
    };
}

/// How a variant's update is formed.
#[derive(Debug, Clone, Copy)]
pub enum UpdateInput<'a> {
    /// The reference's Jacobian, noise and innovation: the variant applies
    /// z = H x + nu with its own state (covariance mode).
    Shared {
        /// H at the reference state.
        h: &'a DMatrix<f64>,
        /// R at the reference state.
        r: &'a DMatrix<f64>,
        /// The reference's innovation.
        innovation: &'a [f64],
    },
    /// The measurement itself, through the variant's own model at its own
    /// state (end-to-end mode), already in the variant's frame.
    Own {
        /// The measurement.
        z: &'a [f64],
    },
}

/// What one update did in a variant.
#[derive(Debug, Clone)]
pub struct VariantUpdate {
    /// The gain K = P H' S^-1 formed from the variant's prior in its own
    /// precision (the arithmetic of the core's covariance forms), or `None`
    /// when S could not be factored.
    pub gain: Option<DMatrix<f64>>,
    /// The smallest LDL' pivot of S relative to its diagonal entry, in the
    /// variant's precision (the core refuses below M eps).
    pub pivot_ratio: f64,
    /// `true` when the measurement was applied.
    pub applied: bool,
    /// The variant's own gate decision (`true`: it would apply), when the
    /// channel has a gate.
    pub own_decision: Option<bool>,
    /// The normalised innovation squared in the variant's precision (NaN
    /// when neither tried nor applied).
    pub nis: f64,
}

pub(crate) fn to_s<T: Scalar, const R: usize, const C: usize>(
    m: &DMatrix<f64>,
) -> SMatrix<T, R, C> {
    SMatrix::from_fn(|i, j| T::of(m[(i, j)]))
}

fn to_sv<T: Scalar, const R: usize>(v: &[f64]) -> SVector<T, R> {
    SVector::from_fn(|i, _| T::of(v[i]))
}

fn widen<T: Scalar, const R: usize, const C: usize>(m: &SMatrix<T, R, C>) -> SMatrix<f64, R, C> {
    m.map(Scalar::to_f64)
}

impl<const N: usize> Filter<N> {
    /// Starts a variant at x0 and P0, rounded to its precision.
    ///
    /// # Errors
    /// The core's refusal of x0 or P0 in this precision.
    pub fn start(
        variant: Variant,
        x0: &SVector<f64, N>,
        p0: &SMatrix<f64, N, N>,
    ) -> Result<Self, FilterError> {
        fn make<T: Scalar, E: Estimator<T, N>, const N: usize>(
            x0: &SVector<f64, N>,
            p0: &SMatrix<f64, N, N>,
        ) -> Result<E, FilterError> {
            E::try_new(x0.map(T::of), p0.map(T::of))
        }
        Ok(match (variant.precision, variant.form) {
            (Precision::F32, Form::Conventional) => Filter::F32Conventional(make(x0, p0)?),
            (Precision::F32, Form::Ud) => Filter::F32Ud(make(x0, p0)?),
            (Precision::F32, Form::Joseph) => Filter::F32Joseph(make(x0, p0)?),
            (Precision::F64, Form::Conventional) => Filter::F64Conventional(make(x0, p0)?),
            (Precision::F64, Form::Ud) => Filter::F64Ud(make(x0, p0)?),
            (Precision::F64, Form::Joseph) => Filter::F64Joseph(make(x0, p0)?),
        })
    }

    /// The covariance, widened to f64.
    #[must_use]
    pub fn covariance(&self) -> SMatrix<f64, N, N> {
        each!(self, f, T => widen::<T, N, N>(&f.covariance_snapshot()))
    }

    /// The state, widened to f64.
    #[must_use]
    pub fn state(&self) -> SVector<f64, N> {
        each!(self, f, T => widen::<T, N, 1>(f.state()))
    }

    /// Linear predict with F and Q (and the sources G diag(q) G' of Q when
    /// the model gives them), rounded to the variant's precision.
    ///
    /// # Errors
    /// The core's error; nothing changes.
    pub fn predict_shared(
        &mut self,
        f: &SMatrix<f64, N, N>,
        q: &SMatrix<f64, N, N>,
        sources: Option<&(SMatrix<f64, N, N>, SVector<f64, N>)>,
    ) -> Result<(), FilterError> {
        each!(self, e, T => {
            let (fs, qs) = (f.map(T::of), q.map(T::of));
            match sources {
                Some((g, qv)) => {
                    Estimator::predict_with_sources(e, &fs, &qs, &g.map(T::of), &qv.map(T::of))
                }
                None => e.predict(&fs, &qs),
            }
        })
    }

    /// The extended predict through the variant's own model, with the input
    /// row and step rounded to its precision.
    ///
    /// # Errors
    /// The core's error; nothing changes.
    pub fn predict_own<S: System<N>>(
        &mut self,
        system: &S,
        input: &[f64],
        dt: f64,
    ) -> Result<(), FilterError> {
        each!(self, e, T => {
            let model = system.process::<T>();
            let u = system.input::<T>(input);
            e.predict_with(&model, &u, T::of(dt))
        })
    }

    /// Moves the origin: x -= offset (rounded to the variant's precision).
    ///
    /// # Errors
    /// The core's error; nothing changes.
    pub fn shift_origin(&mut self, offset: &SVector<f64, N>) -> Result<(), FilterError> {
        each!(self, e, T => e.shift_origin(&offset.map(T::of)))
    }

    /// The NEES (x + origin - truth)' P^-1 (x + origin - truth) in f64,
    /// with `angles` wrapped, or `None` when P cannot be factored.
    #[must_use]
    pub fn nees(
        &self,
        truth: &SVector<f64, N>,
        origin: &SVector<f64, N>,
        angles: &[usize],
    ) -> Option<f64> {
        let mut e = self.state() + origin - truth;
        for &i in angles {
            e[i] = cairn_core::wrap_angle(e[i]);
        }
        let c = self.covariance().cholesky()?;
        Some(e.dot(&c.solve(&e)))
    }
}

/// The gain the core's own arithmetic forms from a prior, with the smallest
/// relative pivot of S.
fn gain<T: Scalar, const N: usize, const M: usize>(
    p: &SMatrix<T, N, N>,
    h: &SMatrix<T, M, N>,
    r: &SMatrix<T, M, M>,
) -> (Option<DMatrix<f64>>, f64) {
    let b = p * h.transpose();
    let mut s = h * b;
    for j in 0..M {
        for i in 0..M {
            s[(i, j)] += r[(i, j)];
        }
    }
    match Ldl::factor(&s) {
        Ok(ldl) => {
            let d = ldl.diagonal();
            let ratio = (0..M)
                .map(|j| (d[j] / s[(j, j)].abs()).to_f64())
                .fold(f64::INFINITY, f64::min);
            let k = ldl.right_divide(&b);
            (
                Some(DMatrix::from_fn(N, M, |i, j| k[(i, j)].to_f64())),
                ratio,
            )
        }
        Err(_) => (None, 0.0),
    }
}

fn update_typed<
    T: Scalar,
    E: Estimator<T, N> + Copy,
    S: Sensor<N, M>,
    const N: usize,
    const M: usize,
>(
    sensor: &S,
    e: &mut E,
    input: UpdateInput<'_>,
    apply: bool,
    gate: Option<f64>,
) -> Result<VariantUpdate, FilterError> {
    let gate_t = gate.map(T::of);
    let p = e.covariance_snapshot();
    match input {
        UpdateInput::Shared { h, r, innovation } => {
            let hs = to_s::<T, M, N>(h);
            let rs = to_s::<T, M, M>(r);
            // z = H x + nu, formed in f64 from the variant's own state.
            let x = widen::<T, N, 1>(e.state());
            let z = SVector::<T, M>::from_fn(|i, _| {
                let mut acc = innovation[i];
                for j in 0..N {
                    acc += h[(i, j)] * x[j];
                }
                T::of(acc)
            });
            let (g, pivot_ratio) = gain(&p, &hs, &rs);
            let mut nis = f64::NAN;
            let own_decision = match gate_t {
                Some(_) => {
                    let mut trial = *e;
                    let o = trial.update(&z, &hs, &rs, gate_t)?;
                    nis = o.nis().to_f64();
                    Some(o.is_applied())
                }
                None => None,
            };
            let applied = if apply {
                let o = e.update(&z, &hs, &rs, None)?;
                nis = o.nis().to_f64();
                o.is_applied()
            } else {
                false
            };
            Ok(VariantUpdate {
                gain: g,
                pivot_ratio,
                applied,
                own_decision,
                nis,
            })
        }
        UpdateInput::Own { z } => {
            let model = sensor.model::<T>();
            let zs = to_sv::<T, M>(z);
            let hs = model.jacobian(e.state());
            let rs = model.noise(e.state());
            let (g, pivot_ratio) = gain(&p, &hs, &rs);
            let mut nis = f64::NAN;
            let own_decision = match gate_t {
                Some(_) => {
                    let mut trial = *e;
                    let o = trial.update_with(&model, &zs, gate_t)?;
                    nis = o.nis().to_f64();
                    Some(o.is_applied())
                }
                None => None,
            };
            let applied = if apply {
                let o = e.update_with(&model, &zs, None)?;
                nis = o.nis().to_f64();
                o.is_applied()
            } else {
                false
            };
            Ok(VariantUpdate {
                gain: g,
                pivot_ratio,
                applied,
                own_decision,
                nis,
            })
        }
    }
}

/// One update of an `M`-component sensor on whichever variant `filter` is.
pub(crate) fn update_channel<const N: usize, const M: usize, S: Sensor<N, M>>(
    sensor: &S,
    filter: &mut Filter<N>,
    input: UpdateInput<'_>,
    apply: bool,
    gate: Option<f64>,
) -> Result<VariantUpdate, FilterError> {
    each!(filter, e, T => update_typed::<T, _, S, N, M>(sensor, e, input, apply, gate))
}
