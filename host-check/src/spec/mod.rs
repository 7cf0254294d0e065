//! The model spec: a TOML file of our own design, parsed with spans and
//! validated into one [`Plan`] before any work starts.

mod error;
mod figures;
pub mod raw;
mod validate;

use std::path::{Path, PathBuf};

use nalgebra::DMatrix;
use serde::Serialize;

pub use error::{Locator, SpecError};
pub use figures::{ConversionRecord, convert_standalone};
pub use validate::MAX_MISSION_S;

/// Smallest re-centring distance, m: the lanes move their origin in whole
/// metres, which f32 holds exactly up to 2^24 m, so the shift itself adds
/// no rounding.
pub const MIN_RECENTRE_M: f64 = 1.0;

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
    pub max_state_difference_sigma: f64,
    /// The mission the thresholds must hold for, s (`None`: the horizon).
    pub mission_seconds: Option<f64>,
    /// Largest accepted relative excess of the constant-gain filter's
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
                "--recentre must be a finite distance of at least {MIN_RECENTRE_M} m (the origin moves in whole metres), got {d}"
            ));
        }
        if self.is_linear() {
            return Err("--recentre applies to the planar-pose model only (a linear model's states need not be positions)".into());
        }
        self.recentre_m = Some(d);
        Ok(())
    }

    /// `true` for a linear time-invariant model.
    pub fn is_linear(&self) -> bool {
        matches!(self.model, ModelPlan::Linear { .. })
    }
}

/// Reads and validates a spec file.
///
/// # Errors
/// A [`SpecError`] naming file, line and field for anything malformed or
/// inconsistent, or for a file that cannot be read.
pub fn load(path: &Path) -> Result<Plan, SpecError> {
    let file = path.display().to_string();
    let whole = |message: String| SpecError {
        file: file.clone(),
        line: 0,
        column: 0,
        field: String::new(),
        message,
    };
    let text = read_capped(path, MAX_SPEC_BYTES, "spec file")
        .map_err(|e| whole(format!("cannot read the spec file: {e}")))?;
    parse(&file, &text, path.parent())
}

/// Largest spec file read, bytes (16 MiB: a spec is a page of TOML; the
/// cap stops a device that never ends, such as `/dev/zero`).
pub const MAX_SPEC_BYTES: u64 = 16 << 20;

/// Largest recorded CSV log read whole (a profile), bytes (256 MiB: about
/// ten million rows).
pub const MAX_LOG_BYTES: u64 = 256 << 20;

/// Reads a UTF-8 text file of at most `cap` bytes.
///
/// # Errors
/// The I/O error, or one saying the file is larger than the cap or not
/// UTF-8 text.
pub fn read_capped(path: &Path, cap: u64, what: &str) -> std::io::Result<String> {
    use std::io::Read;
    let mut bytes = Vec::new();
    std::fs::File::open(path)?
        .take(cap + 1)
        .read_to_end(&mut bytes)?;
    if bytes.len() as u64 > cap {
        return Err(std::io::Error::other(format!(
            "larger than {} MiB, the limit for a {what}",
            cap >> 20
        )));
    }
    String::from_utf8(bytes)
        .map_err(|_| std::io::Error::new(std::io::ErrorKind::InvalidData, "not UTF-8 text"))
}

/// Parses and validates spec text; `base` resolves relative file names.
///
/// # Errors
/// A [`SpecError`] naming file, line and field.
pub fn parse(file: &str, text: &str, base: Option<&Path>) -> Result<Plan, SpecError> {
    let loc = Locator::new(file, text);
    let raw: raw::RawSpec = toml::from_str(text).map_err(|e| loc.from_toml(&e))?;
    validate::plan(&loc, raw, base)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn channel(rate_hz: f64, dropouts: Vec<(f64, f64)>) -> ChannelPlan {
        ChannelPlan {
            name: "c".into(),
            m: 1,
            kind: ChannelKind::Heading,
            r: DMatrix::identity(1, 1),
            rate_hz,
            dropouts,
            gate: None,
            line: 0,
        }
    }

    #[test]
    fn a_channel_falls_due_at_its_rate() {
        // 4 Hz at a 200 Hz step: every 50th step, 4 per second (arithmetic).
        let c = channel(4.0, vec![]);
        let due: Vec<u64> = (1..=200).filter(|&k| c.due(k, 200.0)).collect();
        assert_eq!(due, vec![50, 100, 150, 200]);
        // A rate that does not divide the step rate: 3 per second at 200 Hz.
        let c = channel(3.0, vec![]);
        assert_eq!((1..=200).filter(|&k| c.due(k, 200.0)).count(), 3);
        // A dropout window [0.3 s, 0.6 s) removes the measurement at 0.5 s.
        let c = channel(4.0, vec![(0.3, 0.6)]);
        let due: Vec<u64> = (1..=200).filter(|&k| c.due(k, 200.0)).collect();
        assert_eq!(due, vec![50, 150, 200]);
    }

    #[test]
    fn profiles_repeat_and_hold() {
        let p = Profile::Segments(vec![
            Segment {
                seconds: 2.0,
                speed: 1.0,
                yaw_rate: 0.0,
            },
            Segment {
                seconds: 1.0,
                speed: 0.5,
                yaw_rate: 0.1,
            },
        ]);
        assert_eq!(p.at(0.5), (1.0, 0.0));
        assert_eq!(p.at(2.5), (0.5, 0.1));
        assert_eq!(p.at(3.5), (1.0, 0.0));
        let r = Profile::Recorded(vec![[0.0, 1.0, 0.0], [1.0, 2.0, 0.2], [2.0, 3.0, 0.0]]);
        assert_eq!(r.at(0.5), (1.0, 0.0));
        assert_eq!(r.at(1.5), (2.0, 0.2));
        assert_eq!(r.at(2.5), (1.0, 0.0));
    }
}
