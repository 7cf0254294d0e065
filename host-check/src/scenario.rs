//! Checking your own filter from your crate's tests: describe the scenario
//! in Rust around your own `ProcessModel` and `MeasurementModel` types, and
//! one call runs the whole check (every precision and covariance form of
//! cairn-core against the double-double reference, the Jacobians, the
//! mission) and returns a report with pass/fail, text, JSON and SVG.
//!
//! ```no_run
//! # use cairn_host_check::scenario::Scenario;
//! # fn demo<S: cairn_host_check::engine::System<3>>(system: S) {
//! let report = Scenario::new("my robot", system, [0.0; 3], [1e-2; 3])
//!     .states(&[("x", "m"), ("y", "m"), ("heading", "rad")])
//!     .step_hz(100.0)
//!     .horizon_s(600.0)
//!     .check()
//!     .expect("a consistent scenario");
//! assert!(report.passes(), "{}", report.text());
//! # }
//! ```

use std::path::{Path, PathBuf};

use nalgebra::{DMatrix, SMatrix};

use crate::engine::check::Steady;
use crate::engine::{Channel, Sensor, SensorChannel, Source, System, check};
use crate::run::{RunError, RunOptions, RunResult};
use crate::spec::{
    ChannelKind, ChannelPlan, Flash, Mode, ModelPlan, Plan, Precision, StateInfo, Thresholds,
};

/// A scenario around a user's own models, built step by step.
pub struct Scenario<'a, const N: usize, S: System<N>> {
    plan: Plan,
    system: S,
    channels: Vec<Option<Box<dyn Channel<N> + 'a>>>,
    inputs: Box<dyn crate::engine::InputProfile + 'a>,
    log: Option<PathBuf>,
}

/// Why a scenario could not be checked (the equivalent of exit code 2).
#[derive(Debug, Clone)]
pub struct ScenarioError(pub String);

impl core::fmt::Display for ScenarioError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for ScenarioError {}

impl From<RunError> for ScenarioError {
    fn from(e: RunError) -> Self {
        ScenarioError(e.0)
    }
}

impl<'a, const N: usize, S: System<N>> Scenario<'a, N, S> {
    /// A scenario of `system` starting at `x0` with a diagonal P0 of the
    /// variances `p0_diagonal`; 100 Hz for one minute, no channels, the
    /// default thresholds, f32 Joseph to flash, covariance mode.
    pub fn new(title: &str, system: S, x0: [f64; N], p0_diagonal: [f64; N]) -> Self {
        let p0 = DMatrix::from_fn(N, N, |i, j| if i == j { p0_diagonal[i] } else { 0.0 });
        let plan = Plan {
            title: title.to_string(),
            file: "<scenario in Rust>".into(),
            states: (0..N)
                .map(|i| StateInfo {
                    name: format!("x{i}"),
                    unit: "1".into(),
                })
                .collect(),
            step_hz: 100.0,
            steps: 6000,
            x0: x0.to_vec(),
            p0,
            model: ModelPlan::User {
                description: "own model".into(),
            },
            channels: Vec::new(),
            thresholds: Thresholds::default(),
            flash: Flash {
                precision: Precision::F32,
                form: "joseph".into(),
            },
            mode: Mode::Covariance,
            recentre_m: None,
            external: None,
            conversions: Vec::new(),
            seed: 1,
        };
        Self {
            plan,
            system,
            channels: Vec::new(),
            inputs: Box::new(|_: f64, out: &mut [f64]| out.iter_mut().for_each(|v| *v = 0.0)),
            log: None,
        }
    }

    /// A scenario read from a spec file whose model is `kind = "own"`
    /// (docs/spec-format.md): states, start, step rate, horizon, channels'
    /// schedules, mission, verdict and variant to flash come from the file;
    /// the models from `system` and [`Scenario::sensor`].
    ///
    /// # Errors
    /// [`ScenarioError`] naming file, line and field for a bad spec, a spec
    /// of another model kind, or a state count other than `N`.
    pub fn from_spec(path: &Path, system: S) -> Result<Self, ScenarioError> {
        let plan = crate::spec::load(path).map_err(|e| ScenarioError(e.to_string()))?;
        if !matches!(plan.model, ModelPlan::User { .. }) {
            return Err(ScenarioError(format!(
                "{}: the spec's model is not `kind = \"own\"`: run it with `cairn check`",
                path.display()
            )));
        }
        if plan.n() != N {
            return Err(ScenarioError(format!(
                "{}: the spec lists {} states, the model has {N}",
                path.display(),
                plan.n()
            )));
        }
        let channels = plan.channels.iter().map(|_| None).collect();
        Ok(Self {
            plan,
            system,
            channels,
            inputs: Box::new(|_: f64, out: &mut [f64]| out.iter_mut().for_each(|v| *v = 0.0)),
            log: None,
        })
    }

    /// The measurement model of the spec's channel `name`.
    ///
    /// # Errors
    /// [`ScenarioError`] when the spec has no such channel or its size is
    /// not `M`.
    pub fn sensor<const M: usize, Se: Sensor<N, M> + 'a>(
        mut self,
        name: &str,
        sensor: Se,
    ) -> Result<Self, ScenarioError> {
        let Some(i) = self.plan.channels.iter().position(|c| c.name == name) else {
            return Err(ScenarioError(format!("the spec has no channel `{name}`")));
        };
        let m = self.plan.channels[i].m;
        if m != M {
            return Err(ScenarioError(format!(
                "channel `{name}` has {m} components in the spec, its model {M}"
            )));
        }
        self.channels[i] = Some(Box::new(SensorChannel::<Se, M>(sensor)));
        Ok(self)
    }

    /// Names and units of the states, for reports.
    #[must_use]
    pub fn states(mut self, names: &[(&str, &str)]) -> Self {
        for (s, (n, u)) in self.plan.states.iter_mut().zip(names) {
            s.name = (*n).to_string();
            s.unit = (*u).to_string();
        }
        self
    }

    /// What the model is, for reports.
    #[must_use]
    pub fn describe(mut self, description: &str) -> Self {
        self.plan.model = ModelPlan::User {
            description: description.to_string(),
        };
        self
    }

    /// A full initial covariance.
    #[must_use]
    pub fn p0(mut self, p0: &SMatrix<f64, N, N>) -> Self {
        self.plan.p0 = DMatrix::from_fn(N, N, |i, j| p0[(i, j)]);
        self
    }

    /// The filter's step rate, Hz (a simulated run).
    #[must_use]
    pub fn step_hz(mut self, hz: f64) -> Self {
        let horizon = self.plan.steps as f64 / self.plan.step_hz;
        self.plan.step_hz = hz;
        self.plan.steps = (horizon * hz).round().max(1.0) as u64;
        self
    }

    /// The horizon of a simulated run, s.
    #[must_use]
    pub fn horizon_s(mut self, seconds: f64) -> Self {
        self.plan.steps = (seconds * self.plan.step_hz).round().max(1.0) as u64;
        self
    }

    /// The mission the verdict must hold for, days.
    #[must_use]
    pub fn mission_days(mut self, days: f64) -> Self {
        self.plan.thresholds.mission_seconds = Some(days * 86_400.0);
        self
    }

    /// The pass/fail thresholds.
    #[must_use]
    pub fn thresholds(mut self, thresholds: Thresholds) -> Self {
        let mission = self.plan.thresholds.mission_seconds;
        self.plan.thresholds = thresholds;
        if self.plan.thresholds.mission_seconds.is_none() {
            self.plan.thresholds.mission_seconds = mission;
        }
        self
    }

    /// The variant to flash (precision and form name: "conventional",
    /// "joseph" or "u-d").
    #[must_use]
    pub fn flash(mut self, precision: Precision, form: &str) -> Self {
        self.plan.flash = Flash {
            precision,
            form: form.to_string(),
        };
        self
    }

    /// Covariance mode (shared Jacobians along the reference trajectory)
    /// or end-to-end (each variant runs its own filter).
    #[must_use]
    pub fn mode(mut self, mode: Mode) -> Self {
        self.plan.mode = mode;
        self
    }

    /// End-to-end: each variant moves its origin along the model's position
    /// states when one passes `metres`.
    #[must_use]
    pub fn recentre_m(mut self, metres: f64) -> Self {
        self.plan.recentre_m = Some(metres);
        self
    }

    /// The seed of the simulated truth.
    #[must_use]
    pub fn seed(mut self, seed: u64) -> Self {
        self.plan.seed = seed;
        self
    }

    /// The true input of a simulated run against time (the values the
    /// model's `System::input` reads); zero by default.
    #[must_use]
    pub fn inputs(mut self, profile: impl Fn(f64, &mut [f64]) + Sync + 'a) -> Self {
        self.inputs = Box::new(profile);
        self
    }

    /// Drive the check from a recorded log instead (docs/log-format.md).
    #[must_use]
    pub fn log(mut self, path: &Path) -> Self {
        self.log = Some(path.to_path_buf());
        self
    }

    /// A measurement channel of `M` components at `rate_hz` (simulated
    /// runs; a log brings its own times).
    #[must_use]
    pub fn channel<const M: usize, Se: Sensor<N, M> + 'a>(
        mut self,
        name: &str,
        sensor: Se,
        rate_hz: f64,
    ) -> Self {
        self.plan.channels.push(ChannelPlan {
            name: name.to_string(),
            m: M,
            kind: ChannelKind::User,
            r: DMatrix::zeros(M, M),
            rate_hz,
            dropouts: Vec::new(),
            gate: None,
            line: 0,
        });
        self.channels
            .push(Some(Box::new(SensorChannel::<Se, M>(sensor))));
        self
    }

    /// A chi-square gate on the last channel added.
    #[must_use]
    pub fn gate(mut self, threshold: f64) -> Self {
        if let Some(c) = self.plan.channels.last_mut() {
            c.gate = Some(threshold);
        }
        self
    }

    /// A window [start, end) s without measurements on the last channel.
    #[must_use]
    pub fn dropout(mut self, start_s: f64, end_s: f64) -> Self {
        if let Some(c) = self.plan.channels.last_mut() {
            c.dropouts.push((start_s, end_s));
        }
        self
    }

    /// The plan the report is written from.
    #[must_use]
    pub fn plan(&self) -> &Plan {
        &self.plan
    }

    fn validate(&self) -> Result<(), ScenarioError> {
        let p = &self.plan;
        let bad = |m: String| Err(ScenarioError(m));
        if !(p.step_hz.is_finite() && p.step_hz > 0.0) {
            return bad(format!(
                "the step rate {} Hz is not a positive number",
                p.step_hz
            ));
        }
        if p.x0.iter().chain(p.p0.iter()).any(|v| !v.is_finite()) {
            return bad("x0 or P0 holds NaN or infinity".into());
        }
        if p.p0.clone().cholesky().is_none() {
            return bad("P0 is not positive definite".into());
        }
        for c in &p.channels {
            if !(c.rate_hz.is_finite() && c.rate_hz > 0.0) {
                return bad(format!(
                    "channel `{}`: the rate {} Hz is not a positive number",
                    c.name, c.rate_hz
                ));
            }
            if let Some(g) = c.gate
                && !(g.is_finite() && g > 0.0)
            {
                return bad(format!(
                    "channel `{}`: the gate {g} is not a positive number",
                    c.name
                ));
            }
            if c.dropouts
                .iter()
                .any(|&(a, b)| !(a.is_finite() && b.is_finite() && a < b))
            {
                return bad(format!(
                    "channel `{}`: a dropout window is empty or not finite",
                    c.name
                ));
            }
            if p.channels.iter().filter(|d| d.name == c.name).count() > 1 {
                return bad(format!("two channels are named `{}`", c.name));
            }
        }
        for (c, model) in p.channels.iter().zip(&self.channels) {
            if model.is_none() {
                return bad(format!(
                    "channel `{}` has no measurement model: give it with `.sensor(\"{}\", ...)`",
                    c.name, c.name
                ));
            }
        }
        if crate::engine::Variant::find(p.flash.precision, &p.flash.form).is_none() {
            return bad(format!(
                "the variant to flash `{} {}` is not one the check runs (forms: conventional, joseph, u-d)",
                p.flash.precision.name(),
                p.flash.form
            ));
        }
        Ok(())
    }

    /// Runs the check.
    ///
    /// # Errors
    /// [`ScenarioError`] for an inconsistent scenario, a bad log row (file,
    /// line, column), a model that returns non-finite values (the step and
    /// the function), or a reference that refuses the schedule.
    pub fn check(&self) -> Result<Report, ScenarioError> {
        self.validate()?;
        let refs: Vec<&dyn Channel<N>> = self
            .channels
            .iter()
            .filter_map(|c| c.as_deref().map(|c| c as &dyn Channel<N>))
            .collect();
        let source = match &self.log {
            Some(path) => Source::Log { path: path.clone() },
            None => Source::Simulated {
                inputs: &*self.inputs,
            },
        };
        let mut plan = self.plan.clone();
        let steady = Steady {
            lifted: None,
            note: Some("no steady state for a nonlinear model".into()),
        };
        let mut run = check(
            &plan,
            &self.system,
            &refs,
            &source,
            &steady,
            RunOptions::default(),
        )?;
        plan.steps = run.steps;
        if self.log.is_some() && run.dt > 0.0 {
            plan.step_hz = 1.0 / run.dt;
        }
        crate::engine::mission::complete(&plan, &steady, &mut run);
        Ok(Report { plan, run })
    }
}

impl<const N: usize, S: System<N>> Scenario<'_, N, S> {
    /// Monte Carlo consistency trials of the models: each variant runs its
    /// own filter on `options.runs` seeded truths simulated from the
    /// models' own noise, and average NEES and NIS are judged against their
    /// chi-square intervals (a recorded log has one truth only: trials
    /// always simulate).
    ///
    /// # Errors
    /// [`ScenarioError`] for an inconsistent scenario or bad options.
    pub fn trials(
        &self,
        options: &crate::consistency::Options,
    ) -> Result<crate::consistency::Report, ScenarioError> {
        self.validate()?;
        let refs: Vec<&dyn Channel<N>> = self
            .channels
            .iter()
            .filter_map(|c| c.as_deref().map(|c| c as &dyn Channel<N>))
            .collect();
        crate::consistency::run_models(&self.plan, options, &self.system, &refs, &*self.inputs)
            .map_err(|e| ScenarioError(e.to_string()))
    }
}

/// What a check of a scenario found.
#[derive(Debug, Clone)]
pub struct Report {
    /// The scenario as run.
    pub plan: Plan,
    /// Every figure.
    pub run: RunResult,
}

impl Report {
    /// `true` when the variant to flash passes over the horizon and the
    /// mission, and the Jacobians match.
    #[must_use]
    pub fn passes(&self) -> bool {
        self.run.flash_passes && self.run.jacobians.as_ref().is_none_or(|j| j.passes)
    }

    /// The exit code `cairn check` would give: 0 pass, 1 fail.
    #[must_use]
    pub fn exit_code(&self) -> u8 {
        u8::from(!self.passes())
    }

    /// The terminal report.
    #[must_use]
    pub fn text(&self) -> String {
        crate::report::render(&self.plan, &self.run)
    }

    /// The JSON report.
    ///
    /// # Errors
    /// Serialisation errors (non-finite numbers are written as null).
    pub fn json(&self) -> Result<String, serde_json::Error> {
        crate::report::Report::new(&self.plan, &self.run).to_json()
    }

    /// The SVG plot.
    #[must_use]
    pub fn svg(&self) -> String {
        crate::report::plot(
            &self.plan.title,
            &self.run,
            self.plan.thresholds.max_relative_error,
        )
    }

    /// The result of one variant by name ("f32 joseph").
    #[must_use]
    pub fn variant(&self, name: &str) -> Option<&crate::run::VariantResult> {
        self.run.variants.iter().find(|v| v.name == name)
    }
}
