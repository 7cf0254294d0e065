//! Firmware constants: writes a spec's matrices (F, Q, H and R per channel,
//! P0, and for time-invariant models the Riccati steady state) as a Rust
//! source file of `pub const` arrays, ready to `include!` in firmware.
//!
//! Layout: a matrix is `[[T; ROWS]; COLS]`, one inner array per column
//! (column-major, nalgebra's own storage order), so
//! `SMatrix::from_array_storage(ArrayStorage(F))` builds it in a `const`
//! context; each matrix is also shown row by row in its doc comment.

pub mod command;
mod emit;

use std::fmt::{self, Write as _};

use nalgebra::DMatrix;

use crate::numeric::dare;
use crate::spec::{ChannelKind, ModelPlan, Plan, Precision};

pub use emit::{const_name, literal};

/// Why a constants file could not be written.
#[derive(Debug, Clone, PartialEq)]
#[non_exhaustive]
pub enum ConstantsError {
    /// A number is not finite, or overflows the chosen precision.
    NotRepresentable {
        /// The constant.
        name: String,
        /// The value.
        value: f64,
    },
    /// A non-zero number too small for the chosen precision: it would be
    /// written as zero or as a subnormal that keeps few digits.
    Underflows {
        /// The constant.
        name: String,
        /// Row of the entry (0-based; 0 for vectors' first entry and scalars).
        row: usize,
        /// Column of the entry (0-based).
        col: usize,
        /// The value.
        value: f64,
        /// The precision's name.
        precision: &'static str,
    },
    /// A user's own model has no spec matrices to write.
    UserModel,
}

impl fmt::Display for ConstantsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ConstantsError::UserModel => {
                f.write_str("a user's own model has no spec matrices to write: its constants are in its own crate")
            }
            ConstantsError::NotRepresentable { name, value } => {
                write!(
                    f,
                    "{name} holds {value}, which the chosen precision cannot represent"
                )
            }
            ConstantsError::Underflows {
                name,
                row,
                col,
                value,
                precision,
            } => write!(
                f,
                "{name} entry ({row}, {col}) is {value:e}, below the smallest normal {precision}: \
                 it would be written as {}; rescale the model's units or use --precision f64",
                if *precision == "f32" && (*value as f32) == 0.0 {
                    "0.0".to_string()
                } else {
                    "a subnormal that keeps few digits".to_string()
                }
            ),
        }
    }
}

impl std::error::Error for ConstantsError {}

/// What was written, besides the source text: each constant's name and
/// values (f64, column-major for matrices), for checks and reports.
#[derive(Debug, Clone)]
pub struct Constant {
    /// Its name in the file.
    pub name: String,
    /// Rows (1 for vectors and scalars).
    pub rows: usize,
    /// Columns (1 for vectors and scalars).
    pub cols: usize,
    /// The values before rounding to the chosen precision, column-major.
    pub values: Vec<f64>,
}

/// The generated file.
#[derive(Debug, Clone)]
pub struct Generated {
    /// The Rust source.
    pub source: String,
    /// Every numeric constant in it.
    pub constants: Vec<Constant>,
    /// Why the steady state is absent, when it is.
    pub steady_note: Option<String>,
}

struct Writer {
    out: String,
    constants: Vec<Constant>,
    precision: Precision,
}

impl Writer {
    /// Every value finite and within the precision's range; `rows` maps a
    /// column-major index to its entry for the message.
    fn check(&self, name: &str, values: &[f64], rows: usize) -> Result<(), ConstantsError> {
        let (limit, smallest) = match self.precision {
            Precision::F32 => (f64::from(f32::MAX), f64::from(f32::MIN_POSITIVE)),
            Precision::F64 => (f64::MAX, f64::MIN_POSITIVE),
        };
        if let Some(&value) = values.iter().find(|v| !(v.is_finite() && v.abs() <= limit)) {
            return Err(ConstantsError::NotRepresentable {
                name: name.into(),
                value,
            });
        }
        match values.iter().position(|v| *v != 0.0 && v.abs() < smallest) {
            Some(i) => Err(ConstantsError::Underflows {
                name: name.into(),
                row: i % rows.max(1),
                col: i / rows.max(1),
                value: values[i],
                precision: self.precision.name(),
            }),
            None => Ok(()),
        }
    }

    fn matrix(
        &mut self,
        name: &str,
        doc: &[String],
        m: &DMatrix<f64>,
    ) -> Result<(), ConstantsError> {
        self.check(name, m.as_slice(), m.nrows())?;
        emit::matrix(&mut self.out, name, doc, m, self.precision);
        self.constants.push(Constant {
            name: name.into(),
            rows: m.nrows(),
            cols: m.ncols(),
            values: m.as_slice().to_vec(),
        });
        Ok(())
    }

    fn vector(&mut self, name: &str, doc: &[String], v: &[f64]) -> Result<(), ConstantsError> {
        self.check(name, v, v.len())?;
        emit::vector(&mut self.out, name, doc, v, self.precision);
        self.constants.push(Constant {
            name: name.into(),
            rows: v.len(),
            cols: 1,
            values: v.to_vec(),
        });
        Ok(())
    }

    fn scalar(&mut self, name: &str, doc: &[String], v: f64) -> Result<(), ConstantsError> {
        self.check(name, &[v], 1)?;
        emit::scalar(&mut self.out, name, doc, v, self.precision);
        self.constants.push(Constant {
            name: name.into(),
            rows: 1,
            cols: 1,
            values: vec![v],
        });
        Ok(())
    }

    fn line(&mut self, text: &str) {
        let _ = writeln!(self.out, "{text}");
    }
}

/// Units of entry (i, j) of a covariance-like matrix over the states.
fn pair_units(plan: &Plan) -> String {
    let u: Vec<String> = plan.states.iter().map(|s| s.unit.clone()).collect();
    format!(
        "Entry (i, j) is in unit(i) x unit(j) with the state units [{}].",
        u.join(", ")
    )
}

/// A time-invariant filter as seen at its measurement instants.
struct Lti {
    /// Transition over one measurement interval, F^every.
    f: DMatrix<f64>,
    /// Process noise gathered over the interval, sum of F^i Q F^i'.
    q: DMatrix<f64>,
    /// The channels' H, stacked.
    h: DMatrix<f64>,
    /// The channels' R, block diagonal.
    r: DMatrix<f64>,
    /// Filter steps per measurement.
    every: usize,
}

/// The measurement instants' time-invariant filter, when the schedule has
/// one: a linear model whose channels share one rate, a whole fraction of
/// the step rate, with no dropouts. With a measurement every k steps the
/// steady state is that of the lifted model (F^k, sum F^i Q F^i').
fn steady_inputs(plan: &Plan) -> Result<Lti, String> {
    let ModelPlan::Linear { f, q, .. } = &plan.model else {
        return Err("the planar pose model is nonlinear: no steady gain".into());
    };
    let Some(first) = plan.channels.first() else {
        return Err("no measurement channel: no gain".into());
    };
    if let Some(c) = plan.channels.iter().find(|c| !c.dropouts.is_empty()) {
        return Err(format!(
            "channel `{}` has dropout windows: the schedule is not time-invariant",
            c.name
        ));
    }
    let rate = first.rate_hz;
    if let Some(c) = plan
        .channels
        .iter()
        .find(|c| (c.rate_hz - rate).abs() > 1e-9 * rate)
    {
        return Err(format!(
            "channels `{}` ({} Hz) and `{}` ({} Hz) run at different rates: the schedule is periodic, not time-invariant",
            first.name, rate, c.name, c.rate_hz
        ));
    }
    let ratio = plan.step_hz / rate;
    let every = ratio.round();
    if !(every >= 1.0 && (ratio - every).abs() <= 1e-9 * ratio && every <= 1e6) {
        return Err(format!(
            "the measurement rate {rate} Hz is not a whole fraction of the {} Hz step",
            plan.step_hz
        ));
    }
    let every = every as usize;
    let n = plan.n();
    let mut fk = DMatrix::identity(n, n);
    let mut qk = DMatrix::zeros(n, n);
    for _ in 0..every {
        qk = f * &qk * f.transpose() + q;
        fk = f * fk;
    }
    let qk = (&qk + qk.transpose()) * 0.5;
    let m: usize = plan.channels.iter().map(|c| c.m).sum();
    let mut h = DMatrix::zeros(m, n);
    let mut r = DMatrix::zeros(m, m);
    let mut row = 0;
    for c in &plan.channels {
        h.view_mut((row, 0), (c.m, n)).copy_from(&c.h(n));
        r.view_mut((row, row), (c.m, c.m)).copy_from(&c.r);
        row += c.m;
    }
    Ok(Lti {
        f: fk,
        q: qk,
        h,
        r,
        every,
    })
}

/// Writes the constants of `plan` in `precision`.
///
/// # Errors
/// [`ConstantsError::NotRepresentable`] for a value the precision cannot
/// hold. A steady state that cannot be solved is not an error: the file
/// says why it is missing.
pub fn generate(plan: &Plan, precision: Precision) -> Result<Generated, ConstantsError> {
    let t = precision.name();
    let mut w = Writer {
        out: String::new(),
        constants: Vec::new(),
        precision,
    };
    let n = plan.n();
    w.line(&format!(
        "// Firmware constants for \"{}\" ({}), written by `cairn constants`.",
        plan.title, plan.file
    ));
    w.line("// Regenerate rather than edit: the spec file is the source of truth.");
    w.line("//");
    w.line(&format!(
        "// Precision: {t}. Every literal is the shortest decimal that reads back to the exact {t}."
    ));
    w.line("// Layout: a matrix is `[[T; ROWS]; COLS]`, one inner array per COLUMN (column-major,");
    w.line("// nalgebra's storage order): build it with");
    w.line("//     nalgebra::SMatrix::<T, ROWS, COLS>::from_array_storage(nalgebra::ArrayStorage(NAME))");
    w.line("// (a `const fn`) or `SMatrix::from(NAME)`; a vector `[T; LEN]` with");
    w.line("// `ArrayStorage([NAME])`. Each matrix's doc comment shows it row by row.");
    w.line("// Include it inside a module to keep the names apart:");
    w.line("//     mod model { include!(\"consts.rs\"); }");
    w.line("//");
    w.line("// States:");
    for (i, s) in plan.states.iter().enumerate() {
        w.line(&format!("//   {i}: {} [{}]", s.name, s.unit));
    }
    if plan.conversions.is_empty() {
        w.line("//");
        w.line("// Noise figures: none converted (the spec gives Q and R directly).");
    } else {
        w.line("//");
        w.line("// Noise figures and their conversion to the filter's numbers:");
        for c in &plan.conversions {
            w.line(&format!("//   {}: {}", c.field, c.given));
            for (k, s) in c.steps.iter().enumerate() {
                w.line(&format!(
                    "//     {}. {}: {} = {:e} {}",
                    k + 1,
                    s.what,
                    s.formula,
                    s.value,
                    s.unit
                ));
            }
            w.line(&format!("//     => {:e} ({})", c.result, c.result_is));
        }
    }
    w.line("");
    emit::size(&mut w.out, "STATES", "Number of states N.", n);
    w.scalar("STEP_S", &["Filter step, s.".into()], plan.dt())?;
    w.vector(
        "X0",
        &[format!("Initial state x0, [{}].", units_list(plan))],
        &plan.x0,
    )?;
    w.matrix(
        "P0",
        &["Initial covariance P0.".into(), pair_units(plan)],
        &plan.p0,
    )?;

    match &plan.model {
        ModelPlan::User { .. } => return Err(ConstantsError::UserModel),
        ModelPlan::Linear { f, q, discretised } => {
            let origin = if *discretised {
                "discretised from the continuous model by Van Loan's method (1978)"
            } else {
                "as given in the spec"
            };
            w.matrix(
                "F",
                &[
                    format!("Transition matrix F over one step, {origin}."),
                    "Entry (i, j) is in unit(i) / unit(j).".into(),
                ],
                f,
            )?;
            w.matrix(
                "Q",
                &[
                    format!("Discrete process noise covariance Q per step, {origin}."),
                    pair_units(plan),
                ],
                q,
            )?;
        }
        ModelPlan::Pose {
            speed_var,
            yaw_rate_var,
            heading_drift_var,
            ..
        } => {
            w.line("// The planar pose model (cairn_core::pose::PlanarOdometry): Q is formed each step");
            w.line("// from these variances and the odometry, so there is no constant F or Q.");
            w.scalar(
                "SPEED_VAR",
                &["Variance of one step's odometry speed reading, (m/s)^2.".into()],
                *speed_var,
            )?;
            w.scalar(
                "YAW_RATE_VAR",
                &["Variance of one step's odometry yaw-rate reading, (rad/s)^2.".into()],
                *yaw_rate_var,
            )?;
            w.scalar(
                "HEADING_DRIFT_VAR",
                &["Extra heading variance per step, rad^2.".into()],
                *heading_drift_var,
            )?;
        }
    }

    let mut used: Vec<String> = Vec::new();
    for c in &plan.channels {
        let mut base = const_name(&c.name);
        if used.contains(&base) {
            base = format!("{base}_{}", used.len());
        }
        used.push(base.clone());
        w.line(&format!(
            "// Channel \"{}\": {} component(s) at {} Hz{}{}.",
            c.name,
            c.m,
            c.rate_hz,
            if c.dropouts.is_empty() {
                ""
            } else {
                ", with dropout windows"
            },
            match c.gate {
                Some(g) => format!(", chi-square gate {g}"),
                None => String::new(),
            }
        ));
        emit::size(
            &mut w.out,
            &format!("{base}_M"),
            "Components of this channel.",
            c.m,
        );
        w.scalar(
            &format!("{base}_RATE_HZ"),
            &["Measurement rate, Hz.".into()],
            c.rate_hz,
        )?;
        let what = match c.kind {
            ChannelKind::Linear(_) => "Measurement matrix H (z = H x + v).",
            ChannelKind::Position => {
                "Measurement matrix H of the pose model's position fix (x, y)."
            }
            ChannelKind::Heading => "Measurement matrix H of the pose model's heading fix.",
            ChannelKind::User => "Measurement matrix H of a user's own model.",
        };
        w.matrix(&format!("{base}_H"), &[what.into()], &c.h(n))?;
        w.matrix(
            &format!("{base}_R"),
            &["Measurement noise covariance R, in the measurement's units squared.".into()],
            &c.r,
        )?;
        if let Some(g) = c.gate {
            w.scalar(
                &format!("{base}_GATE"),
                &["Chi-square gate on the NIS.".into()],
                g,
            )?;
        }
    }

    let steady_note = match steady_inputs(plan) {
        Err(why) => Some(why),
        Ok(Lti { f, q, h, r, every }) => match dare::solve(&f, &h, &q, &r) {
            Err(e) => Some(format!(
                "the Riccati equation has no usable steady state: {e}"
            )),
            Ok(s) => {
                let names: Vec<&str> = plan.channels.iter().map(|c| c.name.as_str()).collect();
                w.line("// Steady state of the discrete algebraic Riccati equation (solved in double-double,");
                w.line(&format!(
                    "// {} doubling steps, relative residual {:.1e}) for the measurement stacking the",
                    s.iterations, s.residual
                ));
                w.line(&format!(
                    "// channels [{}] in that order. For cairn_core::SteadyGain::try_new(x, F, H, K, S).",
                    names.join(", ")
                ));
                if every > 1 {
                    w.line(&format!(
                        "// A measurement arrives every {every} steps: predict with F every step and update at"
                    ));
                    w.line("// steps STEADY_EVERY, 2 STEADY_EVERY, ...; the prior below is the one at those steps,");
                    w.line(&format!(
                        "// the steady state of the lifted model (F^{every}, sum of F^i Q F^i' for i < {every})."
                    ));
                }
                emit::size(
                    &mut w.out,
                    "STEADY_EVERY",
                    "Filter steps per measurement (the steady gain applies at these steps).",
                    every,
                );
                emit::size(
                    &mut w.out,
                    "STEADY_M",
                    "Components of the stacked measurement.",
                    h.nrows(),
                );
                w.matrix("STEADY_H", &["Stacked measurement matrix H.".into()], &h)?;
                w.matrix(
                    "STEADY_GAIN",
                    &["Steady Kalman gain K = P- H' S^-1 (N x M).".into()],
                    &s.gain,
                )?;
                let innovation = &h * &s.prior * h.transpose() + &r;
                let innovation = (&innovation + innovation.transpose()) * 0.5;
                w.matrix(
                    "STEADY_INNOVATION",
                    &["Steady innovation covariance S = H P- H' + R (M x M).".into()],
                    &innovation,
                )?;
                w.matrix(
                    "STEADY_PRIOR",
                    &[
                        "Steady prior covariance P- (at a measurement step).".into(),
                        pair_units(plan),
                    ],
                    &s.prior,
                )?;
                w.matrix(
                    "STEADY_POSTERIOR",
                    &["Steady posterior covariance P+.".into(), pair_units(plan)],
                    &s.posterior,
                )?;
                None
            }
        },
    };
    if let Some(why) = &steady_note {
        w.line(&format!("// No steady-state constants: {why}."));
    }
    Ok(Generated {
        source: w.out,
        constants: w.constants,
        steady_note,
    })
}

fn units_list(plan: &Plan) -> String {
    plan.states
        .iter()
        .map(|s| s.unit.as_str())
        .collect::<Vec<_>>()
        .join(", ")
}
