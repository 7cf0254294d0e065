//! The Jacobian check: each model's own Jacobian against central
//! differences of its own f and h, in f64, along the reference trajectory.

use cairn_core::{Entry, ProcessModel, wrap_angle};
use nalgebra::{DMatrix, SVector};
use serde::Serialize;

use super::channel::Channel;
use super::system::System;

/// Points along the run where the Jacobians are compared.
pub const SAMPLES: u64 = 200;
/// Default largest accepted mismatch, relative to max(1, |numeric entry|).
pub const DEFAULT_TOLERANCE: f64 = 1e-5;

/// The worst entry of one model's Jacobian.
#[derive(Debug, Clone, Serialize)]
pub struct Worst {
    /// Row (the output: a state or a measurement component).
    pub row: usize,
    /// Column (the state differentiated by).
    pub column: usize,
    /// The model's own entry.
    pub analytic: f64,
    /// The central difference.
    pub numeric: f64,
    /// |analytic - numeric| / max(1, |numeric|).
    pub mismatch: f64,
    /// The step it was seen at.
    pub step: u64,
}

/// One model's comparison.
#[derive(Debug, Clone, Serialize)]
pub struct ModelJacobian {
    /// "process" or the channel's name.
    pub model: String,
    /// Points compared.
    pub points: u64,
    /// The largest mismatch of each entry over the points, row-major.
    pub entries: Vec<Vec<f64>>,
    /// The worst entry.
    pub worst: Option<Worst>,
}

/// An entry where a model's matrix breaks the structural pattern the model
/// declares (a declared zero that is not zero, a declared one that is not
/// one): the core's patterned kernels never read it, so the filter would
/// run a different model than the one written.
#[derive(Debug, Clone, Serialize)]
pub struct PatternBreak {
    /// "process" or the channel's name.
    pub model: String,
    /// "F" (the process Jacobian), "G" (its noise sources), "H" or "R"
    /// (a measurement's Jacobian and noise).
    pub matrix: &'static str,
    /// Row of the entry.
    pub row: usize,
    /// Column of the entry.
    pub column: usize,
    /// "zero" or "one": what the pattern declares.
    pub declared: &'static str,
    /// What the model's matrix holds there.
    pub value: f64,
    /// The step it was seen at.
    pub step: u64,
}

/// The whole comparison.
#[derive(Debug, Clone, Serialize)]
pub struct JacobianReport {
    /// The accepted mismatch.
    pub tolerance: f64,
    /// The process model first, then each channel.
    pub models: Vec<ModelJacobian>,
    /// The first break of each model's declared patterns, if any.
    pub pattern_breaks: Vec<PatternBreak>,
    /// `true` when every entry is within the tolerance and every matrix
    /// fits its declared pattern.
    pub passes: bool,
}

/// The pattern's word for a declared entry.
fn declared(entry: Entry) -> &'static str {
    match entry {
        Entry::Zero => "zero",
        Entry::One => "one",
        Entry::Free => "free",
    }
}

impl JacobianReport {
    /// The model and entry of the largest mismatch above the tolerance, in
    /// one line, or `None`.
    #[must_use]
    pub fn failure_line(
        &self,
        row_names: &dyn Fn(&str, usize) -> String,
        col_names: &dyn Fn(usize) -> String,
    ) -> Option<String> {
        if let Some(b) = self.pattern_breaks.first() {
            let what = if b.model == "process" {
                "process model".to_string()
            } else {
                format!("`{}` measurement", b.model)
            };
            return Some(format!(
                "the {what}'s {} entry ({}, {}) is {:.6e} at step {} but its pattern declares it structurally {}: the patterned kernels would not read it",
                b.matrix, b.row, b.column, b.value, b.step, b.declared
            ));
        }
        let (m, w) = self
            .models
            .iter()
            .filter_map(|m| m.worst.as_ref().map(|w| (m, w)))
            .filter(|(_, w)| w.mismatch > self.tolerance || w.mismatch.is_nan())
            .max_by(|a, b| a.1.mismatch.total_cmp(&b.1.mismatch))?;
        Some(format!(
            "the {} Jacobian's entry d {} / d {} is {:.6e} but central differences give {:.6e} (mismatch {:.1e} > {:.0e}, step {})",
            if m.model == "process" {
                "process model".to_string()
            } else {
                format!("`{}` measurement", m.model)
            },
            row_names(&m.model, w.row),
            col_names(w.column),
            w.analytic,
            w.numeric,
            w.mismatch,
            self.tolerance,
            w.step
        ))
    }
}

struct Acc {
    name: String,
    points: u64,
    entries: DMatrix<f64>,
    worst: Option<Worst>,
}

impl Acc {
    fn new(name: String, rows: usize, cols: usize) -> Self {
        Self {
            name,
            points: 0,
            entries: DMatrix::zeros(rows, cols),
            worst: None,
        }
    }

    fn add(&mut self, step: u64, analytic: &DMatrix<f64>, numeric: &DMatrix<f64>) {
        self.points += 1;
        for j in 0..analytic.ncols() {
            for i in 0..analytic.nrows() {
                let (a, d) = (analytic[(i, j)], numeric[(i, j)]);
                let mut e = (a - d).abs() / d.abs().max(1.0);
                if e.is_nan() {
                    e = f64::INFINITY;
                }
                if e > self.entries[(i, j)] {
                    self.entries[(i, j)] = e;
                }
                if self.worst.as_ref().is_none_or(|w| e > w.mismatch) {
                    self.worst = Some(Worst {
                        row: i,
                        column: j,
                        analytic: a,
                        numeric: d,
                        mismatch: e,
                        step,
                    });
                }
            }
        }
    }

    fn finish(self) -> ModelJacobian {
        let e = &self.entries;
        ModelJacobian {
            model: self.name,
            points: self.points,
            entries: (0..e.nrows())
                .map(|i| (0..e.ncols()).map(|j| e[(i, j)]).collect())
                .collect(),
            worst: self.worst,
        }
    }
}

/// The step of a central difference along state `j` at `x`: the cube root
/// of the unit roundoff times max(1, |x_j|) (common practice: it balances
/// truncation and rounding error for a second-order difference).
fn step_for(x: f64) -> f64 {
    6.0e-6 * x.abs().max(1.0)
}

/// Gathers the comparison over a run.
pub struct JacobianCheck {
    pattern_breaks: Vec<PatternBreak>,
    process: Acc,
    channels: Vec<Acc>,
    due: Vec<bool>,
    every: u64,
    tolerance: f64,
}

impl JacobianCheck {
    /// A check over `steps` steps for `channels` (name, dimension).
    #[must_use]
    pub fn new<const N: usize>(steps: u64, channels: &[(String, usize)], tolerance: f64) -> Self {
        Self {
            pattern_breaks: Vec::new(),
            process: Acc::new("process".into(), N, N),
            channels: channels
                .iter()
                .map(|(n, m)| Acc::new(n.clone(), *m, N))
                .collect(),
            due: vec![true; channels.len()],
            every: (steps / SAMPLES).max(1),
            tolerance,
        }
    }

    /// Compares the process model at step `k` (1-based) if it is a sample
    /// point; marks every channel due for its next update.
    pub fn process<const N: usize, S: System<N>>(
        &mut self,
        k: u64,
        system: &S,
        model: &S::Process<f64>,
        x: &SVector<f64, N>,
        input: &[f64],
        dt: f64,
    ) {
        if !(k - 1).is_multiple_of(self.every) {
            return;
        }
        self.due.iter_mut().for_each(|d| *d = true);
        let u = system.input::<f64>(input);
        let analytic = model.jacobian(x, &u, dt);
        let angles = system.angle_states();
        let mut numeric = DMatrix::zeros(N, N);
        for j in 0..N {
            let h = step_for(x[j]);
            let (mut xp, mut xm) = (*x, *x);
            xp[j] += h;
            xm[j] -= h;
            let d = model.transition(&xp, &u, dt) - model.transition(&xm, &u, dt);
            for i in 0..N {
                let di = if angles.contains(&i) {
                    wrap_angle(d[i])
                } else {
                    d[i]
                };
                numeric[(i, j)] = di / (xp[j] - xm[j]);
            }
        }
        let a = DMatrix::from_fn(N, N, |i, j| analytic[(i, j)]);
        self.process.add(k, &a, &numeric);
        if !self.pattern_breaks.iter().any(|b| b.model == "process") {
            let f_pattern = <S::Process<f64> as ProcessModel<f64, N>>::JACOBIAN_PATTERN;
            let g_pattern = <S::Process<f64> as ProcessModel<f64, N>>::SOURCES_PATTERN;
            let f_break = f_pattern
                .first_violation(&analytic)
                .map(|(i, j)| ("F", i, j, f_pattern.entry(i, j), analytic[(i, j)]));
            let g_break = || {
                let (g, _) = model.noise_sources(x, &u, dt)?;
                let (i, j) = g_pattern.first_violation(&g)?;
                Some(("G", i, j, g_pattern.entry(i, j), g[(i, j)]))
            };
            if let Some((matrix, row, column, entry, value)) = f_break.or_else(g_break) {
                self.pattern_breaks.push(PatternBreak {
                    model: "process".into(),
                    matrix,
                    row,
                    column,
                    declared: declared(entry),
                    value,
                    step: k,
                });
            }
        }
    }

    /// Compares channel `c`'s model at `x` if it is due.
    pub fn channel<const N: usize>(
        &mut self,
        k: u64,
        c: usize,
        channel: &dyn Channel<N>,
        x: &SVector<f64, N>,
    ) {
        if !self.due[c] {
            return;
        }
        self.due[c] = false;
        let ev = channel.evaluate(x);
        let m = channel.dim();
        let mut numeric = DMatrix::zeros(m, N);
        for j in 0..N {
            let h = step_for(x[j]);
            let (mut xp, mut xm) = (*x, *x);
            xp[j] += h;
            xm[j] -= h;
            let hp = channel.evaluate(&xp).predicted;
            let hm = channel.evaluate(&xm).predicted;
            let d = channel.residual(&hp, &hm);
            for i in 0..m {
                numeric[(i, j)] = d[i] / (xp[j] - xm[j]);
            }
        }
        self.channels[c].add(k, &ev.jacobian, &numeric);
        let name = &self.channels[c].name;
        if !self.pattern_breaks.iter().any(|b| &b.model == name)
            && let Some((matrix, row, column, entry)) = channel.pattern_break(&ev)
        {
            let value = if matrix == "R" {
                ev.noise[(row, column)]
            } else {
                ev.jacobian[(row, column)]
            };
            self.pattern_breaks.push(PatternBreak {
                model: name.clone(),
                matrix,
                row,
                column,
                declared: declared(entry),
                value,
                step: k,
            });
        }
    }

    /// The report.
    #[must_use]
    pub fn finish(self) -> JacobianReport {
        let tolerance = self.tolerance;
        let mut models = vec![self.process.finish()];
        models.extend(self.channels.into_iter().map(Acc::finish));
        let passes = self.pattern_breaks.is_empty()
            && models
                .iter()
                .all(|m| m.worst.as_ref().is_none_or(|w| w.mismatch <= tolerance));
        JacobianReport {
            tolerance,
            models,
            pattern_breaks: self.pattern_breaks,
            passes,
        }
    }
}
