//! What a check runs: the scenario as one validated value (states, start,
//! schedule, channels, thresholds, the variant to flash), whether it came
//! from a spec file or was described in Rust.

use std::path::PathBuf;

use nalgebra::DMatrix;
use serde::Serialize;

pub use crate::numeric::conversion::ConversionRecord;

/// Smallest re-centring distance, m: the variants move their origin in whole
/// metres, which f32 holds exactly up to 2^24 m, so the shift itself adds
/// no rounding.
pub const MIN_RECENTRE_M: f64 = 1.0;

/// The spec-file name of the built-in demo's plan (its advice names the
/// `demo` command, not a file).
pub const DEMO_FILE: &str = "<built-in demo: specs/demo.toml>";

/// One state of the model.
#[derive(Debug, Clone, Serialize)]
pub struct StateInfo {
    /// Name, for reports.
    pub name: String,
    /// Unit, for reports.
    pub unit: String,
}

/// Scalar type a variant runs in.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Precision {
    /// Single precision.
    F32,
    /// Double precision.
    F64,
}

impl Precision {
    /// The name used in specs and reports.
    pub fn name(self) -> &'static str {
        match self {
            Precision::F32 => "f32",
            Precision::F64 => "f64",
        }
    }

    /// Machine epsilon.
    pub fn epsilon(self) -> f64 {
        match self {
            Precision::F32 => f64::from(f32::EPSILON),
            Precision::F64 => f64::EPSILON,
        }
    }
}

/// How a nonlinear model's variants are driven.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Mode {
    /// Every variant gets the same Jacobians, taken along the reference
    /// state trajectory: only arithmetic differs.
    Covariance,
    /// Every variant runs its own nonlinear filter end to end.
    EndToEnd,
}

/// The process model, ready to run.
#[derive(Debug, Clone)]
pub enum ModelPlan {
    /// x(k+1) = F x(k) + w, w ~ N(0, Q).
    Linear {
        /// Transition matrix.
        f: DMatrix<f64>,
        /// Discrete process noise covariance.
        q: DMatrix<f64>,
        /// `true` when F and Q came from a continuous model by Van Loan's method.
        discretised: bool,
    },
    /// cairn-core's planar pose model driven by odometry.
    Pose {
        /// Variance of one step's speed reading, (m/s)^2.
        speed_var: f64,
        /// Variance of one step's yaw-rate reading, (rad/s)^2.
        yaw_rate_var: f64,
        /// Extra heading variance per step, rad^2.
        heading_drift_var: f64,
        /// The odometry the robot sees.
        profile: Profile,
        /// The file a recorded profile was read from (so that no report
        /// overwrites it).
        profile_csv: Option<PathBuf>,
    },
    /// A user's own model, checked through the library
    /// ([`crate::scenario::Scenario`]): the engine runs its code; the plan
    /// only carries its description.
    User {
        /// What the model is, for reports.
        description: String,
    },
}

/// An odometry profile: true speed and yaw rate against time.
#[derive(Debug, Clone)]
pub enum Profile {
    /// Segments repeated until the horizon.
    Segments(Vec<Segment>),
    /// Recorded samples (time s, speed, yaw rate), held between samples and
    /// repeated until the horizon.
    Recorded(Vec<[f64; 3]>),
}

/// One segment of constant speed and yaw rate.
#[derive(Debug, Clone, Copy)]
pub struct Segment {
    /// Duration, s.
    pub seconds: f64,
    /// Speed, m/s.
    pub speed: f64,
    /// Yaw rate, rad/s.
    pub yaw_rate: f64,
}

impl Profile {
    /// True (speed, yaw rate) at time `t`.
    pub fn at(&self, t: f64) -> (f64, f64) {
        match self {
            Profile::Segments(segs) => {
                let total: f64 = segs.iter().map(|s| s.seconds).sum();
                let mut t = if total > 0.0 {
                    t.rem_euclid(total)
                } else {
                    0.0
                };
                for s in segs {
                    if t < s.seconds {
                        return (s.speed, s.yaw_rate);
                    }
                    t -= s.seconds;
                }
                segs.last().map_or((0.0, 0.0), |s| (s.speed, s.yaw_rate))
            }
            Profile::Recorded(rows) => {
                let (first, last) = match (rows.first(), rows.last()) {
                    (Some(f), Some(l)) => (f[0], l[0]),
                    _ => return (0.0, 0.0),
                };
                let span = last - first;
                let t = if span > 0.0 {
                    first + (t - first).rem_euclid(span)
                } else {
                    first
                };
                let i = rows.partition_point(|r| r[0] <= t).saturating_sub(1);
                (rows[i][1], rows[i][2])
            }
        }
    }
}

/// What a channel measures.
#[derive(Debug, Clone)]
pub enum ChannelKind {
    /// z = H x + v.
    Linear(DMatrix<f64>),
    /// The pose model's position fix (x, y).
    Position,
    /// The pose model's heading fix.
    Heading,
    /// A user's own measurement model.
    User,
}

/// A measurement channel, ready to run.
#[derive(Debug, Clone)]
pub struct ChannelPlan {
    /// Name, for reports.
    pub name: String,
    /// Number of components.
    pub m: usize,
    /// What it measures.
    pub kind: ChannelKind,
    /// Noise covariance.
    pub r: DMatrix<f64>,
    /// Rate, Hz.
    pub rate_hz: f64,
    /// Windows [start, end) in seconds without measurements.
    pub dropouts: Vec<(f64, f64)>,
    /// Chi-square gate, if any.
    pub gate: Option<f64>,
    /// 1-based line of the channel's `[[channel]]` table in the spec, for
    /// errors found while running it (0: the plan was built in code).
    pub line: usize,
}

impl ChannelPlan {
    /// `true` when the channel delivers a measurement at step `k` (1-based)
    /// of a filter stepping at `step_hz`.
    pub fn due(&self, k: u64, step_hz: f64) -> bool {
        let ratio = self.rate_hz / step_hz;
        let now = (k as f64 * ratio + 1e-9).floor();
        let before = ((k - 1) as f64 * ratio + 1e-9).floor();
        if now <= before {
            return false;
        }
        let t = k as f64 / step_hz;
        !self.dropouts.iter().any(|&(a, b)| t >= a && t < b)
    }

    /// The measurement matrix H for a pose-model channel or the given one.
    pub fn h(&self, n: usize) -> DMatrix<f64> {
        match &self.kind {
            ChannelKind::Linear(h) => h.clone(),
            ChannelKind::Position => DMatrix::from_fn(2, n, |i, j| f64::from(u8::from(i == j))),
            ChannelKind::Heading => DMatrix::from_fn(1, n, |_, j| f64::from(u8::from(j == 2))),
            ChannelKind::User => DMatrix::zeros(self.m, n),
        }
    }
}

/// Pass/fail thresholds.
#[derive(Debug, Clone, Copy, Serialize)]
pub struct Thresholds {
    /// Largest relative covariance error (Frobenius) against the reference.
    pub max_relative_error: f64,
    /// Largest asymmetry relative to the covariance's Frobenius norm.
    pub max_asymmetry: f64,
    /// Largest relative gain error against the reference gain.
    pub max_gain_error: f64,
    /// Largest relative distance of the late covariance from the Riccati
    /// steady state, when one is checked.
    pub max_steady_distance: Option<f64>,
    /// Largest state difference from the f64 Joseph run, in the reference's
    /// standard deviations (judged when states are compared).
    #[serde(rename = "max_state_difference_sd")]
    pub max_state_difference_sigma: f64,
    /// The mission the thresholds must hold for, s (`None`: the horizon).
    pub mission_seconds: Option<f64>,
    /// Largest accepted relative excess of the steady-gain filter's
    /// covariance over the optimal one during its transient (`None`: the
    /// largest relative covariance error applies).
    pub max_transient_excess: Option<f64>,
    /// Largest accepted mismatch of a model's Jacobian against central
    /// differences, relative to max(1, |entry|) (`None`: the engine's
    /// default, 1e-5).
    pub max_jacobian_mismatch: Option<f64>,
}

impl Default for Thresholds {
    fn default() -> Self {
        Self {
            max_relative_error: 1e-3,
            max_asymmetry: 1e-6,
            max_gain_error: 1e-2,
            max_steady_distance: None,
            max_state_difference_sigma: 1.0,
            mission_seconds: None,
            max_transient_excess: None,
            max_jacobian_mismatch: None,
        }
    }
}

/// The variant that goes on the target.
#[derive(Debug, Clone, PartialEq, Eq, Serialize)]
pub struct Flash {
    /// Its scalar type.
    pub precision: Precision,
    /// Its covariance form's name.
    pub form: String,
}

/// An external reference trajectory file.
#[derive(Debug, Clone)]
pub struct ExternalReference {
    /// The CSV file.
    pub path: PathBuf,
    /// Relative tolerance for agreement with our own reference.
    pub tolerance: f64,
}

/// A validated spec: everything the runner needs, nothing left to check.
#[derive(Debug, Clone)]
pub struct Plan {
    /// One-line description.
    pub title: String,
    /// Where the spec came from.
    pub file: String,
    /// The states.
    pub states: Vec<StateInfo>,
    /// Filter step rate, Hz.
    pub step_hz: f64,
    /// Number of filter steps.
    pub steps: u64,
    /// Initial state.
    pub x0: Vec<f64>,
    /// Initial covariance.
    pub p0: DMatrix<f64>,
    /// The process model.
    pub model: ModelPlan,
    /// The measurement channels.
    pub channels: Vec<ChannelPlan>,
    /// Verdict thresholds.
    pub thresholds: Thresholds,
    /// The variant to flash.
    pub flash: Flash,
    /// Covariance-only or end-to-end (nonlinear models).
    pub mode: Mode,
    /// Pose model, end-to-end mode: each variant re-centres its x, y when
    /// either passes this distance, m (`None`: never).
    pub recentre_m: Option<f64>,
    /// External reference, if given.
    pub external: Option<ExternalReference>,
    /// Every noise-figure conversion, in order.
    pub conversions: Vec<ConversionRecord>,
    /// Seed of the synthetic noise.
    pub seed: u64,
}

impl Plan {
    /// Number of states.
    pub fn n(&self) -> usize {
        self.states.len()
    }

    /// Step length, s.
    pub fn dt(&self) -> f64 {
        1.0 / self.step_hz
    }

    /// Sets the re-centring distance of `--recentre M`: a finite distance
    /// of at least [`MIN_RECENTRE_M`], for a model with positions.
    ///
    /// # Errors
    /// The message for the command line.
    pub fn set_recentre(&mut self, distance: Option<f64>) -> Result<(), String> {
        let Some(d) = distance else {
            return Ok(());
        };
        if !(d.is_finite() && d >= MIN_RECENTRE_M) {
            return Err(format!(
                "--origin-shift must be a finite distance of at least {MIN_RECENTRE_M} m (the origin moves in whole metres), got {d}"
            ));
        }
        if self.is_linear() {
            return Err("--origin-shift applies to the planar-pose model only (a linear model's states need not be positions)".into());
        }
        self.recentre_m = Some(d);
        Ok(())
    }

    /// `true` for a linear time-invariant model.
    pub fn is_linear(&self) -> bool {
        matches!(self.model, ModelPlan::Linear { .. })
    }
}
