//! The spec file exactly as written: serde structures that mirror the TOML
//! layout, with source spans kept for every field a later check may blame.

use serde::Deserialize;
use toml::Spanned;

/// A matrix written as a list of rows.
pub type RawMatrix = Spanned<Vec<Vec<f64>>>;
/// A vector written as a list.
pub type RawVector = Spanned<Vec<f64>>;

/// The whole spec file.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSpec {
    /// A one-line description shown in the report.
    pub title: Option<String>,
    /// Seed of the synthetic measurement and odometry noise.
    pub seed: Option<Spanned<u64>>,
    /// The states, in order.
    #[serde(default)]
    pub state: Vec<Spanned<RawState>>,
    /// The process model.
    pub model: Spanned<RawModel>,
    /// The measurement channels.
    #[serde(default)]
    pub channel: Vec<Spanned<RawChannel>>,
    /// Initial state and covariance.
    pub start: Spanned<RawStart>,
    /// How long to run.
    pub horizon: Spanned<RawHorizon>,
    /// Pass/fail thresholds.
    #[serde(default)]
    pub verdict: Option<Spanned<RawVerdict>>,
    /// The variant that goes on the target.
    #[serde(default)]
    pub flash: Option<Spanned<RawFlash>>,
    /// An external reference trajectory.
    #[serde(default)]
    pub reference: Option<Spanned<RawReference>>,
    /// How long the filter must run on the target (default: the horizon).
    #[serde(default)]
    pub mission: Option<Spanned<RawMission>>,
}

/// The mission length: exactly one of the fields.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawMission {
    /// Duration, s.
    pub seconds: Option<Spanned<f64>>,
    /// Duration, h.
    pub hours: Option<Spanned<f64>>,
    /// Duration, days.
    pub days: Option<Spanned<f64>>,
}

/// One state: its name and unit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawState {
    /// Name used in reports.
    pub name: Spanned<String>,
    /// Unit, free text (shown in reports).
    pub unit: Spanned<String>,
}

/// The process model. Which fields apply depends on `kind`.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawModel {
    /// "continuous", "discrete" or "planar-pose".
    pub kind: Spanned<String>,
    /// Filter step rate, Hz.
    pub step_hz: Spanned<f64>,
    /// "covariance" (default) or "end-to-end"; nonlinear models only.
    pub mode: Option<Spanned<String>>,
    /// Discrete: transition matrix.
    pub f: Option<RawMatrix>,
    /// Discrete: process noise covariance.
    pub q: Option<RawMatrix>,
    /// Discrete: diagonal process noise covariance.
    pub q_diag: Option<RawVector>,
    /// Continuous: system matrix.
    pub a: Option<RawMatrix>,
    /// Continuous: noise-input matrix.
    pub g: Option<RawMatrix>,
    /// Continuous: one noise figure per column of `g`.
    pub noise: Option<Spanned<Vec<Spanned<RawNoise>>>>,
    /// Pose: noise of the odometry speed reading.
    pub speed_noise: Option<Spanned<RawNoise>>,
    /// Pose: noise of the odometry yaw-rate reading.
    pub yaw_rate_noise: Option<Spanned<RawNoise>>,
    /// Pose: extra heading drift (a random walk of the heading).
    pub heading_drift: Option<Spanned<RawNoise>>,
    /// Pose: synthesised odometry, repeated to the horizon.
    pub profile: Option<Spanned<Vec<Spanned<RawSegment>>>>,
    /// Pose: recorded odometry (CSV: time_s, speed, yaw_rate).
    pub profile_csv: Option<Spanned<String>>,
    /// Pose, end-to-end mode: each variant moves its origin to its x, y
    /// whenever |x| or |y| passes this many metres (off by default).
    pub origin_shift_m: Option<Spanned<f64>>,
    /// The old name of `origin_shift_m`, accepted for one release.
    pub recentre_m: Option<Spanned<f64>>,
    /// Own models: what the model is, for reports.
    pub description: Option<Spanned<String>>,
}

/// One segment of a synthesised odometry profile.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawSegment {
    /// Duration, s.
    pub seconds: Spanned<f64>,
    /// Forward speed, m/s.
    pub speed: Spanned<f64>,
    /// Yaw rate, rad/s.
    #[serde(default)]
    pub yaw_rate: Option<Spanned<f64>>,
}

/// A noise figure as a datasheet gives it: exactly one of the value fields,
/// plus its unit.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawNoise {
    /// Amplitude spectral density (one-sided unless `sided = "two"`).
    pub density: Option<Spanned<f64>>,
    /// Power spectral density.
    pub psd: Option<Spanned<f64>>,
    /// Random-walk coefficient N of the integrated quantity: white noise on
    /// the rate (angle or velocity random walk, IEEE Std 952-1997).
    pub random_walk: Option<Spanned<f64>>,
    /// Bias instability B (the Allan floor 0.664 B), modelled as a
    /// first-order Gauss-Markov bias state; needs `correlation_s`.
    pub bias_instability: Option<Spanned<f64>>,
    /// Rate random walk K: the random walk of a bias state (Allan variance
    /// K^2 tau / 3), units of the rate per sqrt(s).
    pub rate_random_walk: Option<Spanned<f64>>,
    /// Quantization noise Q, in the integrated quantity's unit (Allan
    /// variance 3 Q^2 / tau^2).
    pub quantization: Option<Spanned<f64>>,
    /// Correlation time of a `bias_instability` Gauss-Markov state, s.
    pub correlation_s: Option<Spanned<f64>>,
    /// Standard deviation of one sample at `at_hz`.
    pub std: Option<Spanned<f64>>,
    /// Variance of one sample at `at_hz`.
    pub variance: Option<Spanned<f64>>,
    /// The unit of the value, e.g. "m/s/sqrt(Hz)".
    pub unit: Spanned<String>,
    /// "one" or "two" for densities and PSDs.
    pub sided: Option<Spanned<String>>,
    /// Frequency variable of a PSD: "Hz" (default) or "rad/s".
    pub per: Option<Spanned<String>>,
    /// Sample rate a `std` or `variance` was measured at, Hz.
    pub at_hz: Option<Spanned<f64>>,
    /// Unit of the noisy quantity itself (e.g. "m/s^2" for an
    /// accelerometer); the figure's unit is checked against it. Defaults to
    /// what the model knows (see docs/spec-format.md).
    pub quantity: Option<Spanned<String>>,
}

/// A measurement channel.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawChannel {
    /// Name used in reports.
    pub name: Spanned<String>,
    /// Measurement rate, Hz.
    pub rate_hz: Spanned<f64>,
    /// Pose models: "position" or "heading".
    pub fix: Option<Spanned<String>>,
    /// Linear models: measurement matrix.
    pub h: Option<RawMatrix>,
    /// Noise covariance.
    pub r: Option<RawMatrix>,
    /// Diagonal noise covariance.
    pub r_diag: Option<RawVector>,
    /// Noise figures, one per component.
    pub noise: Option<Spanned<Vec<Spanned<RawNoise>>>>,
    /// Windows [start_s, end_s) without measurements.
    #[serde(default)]
    pub dropouts: Option<Spanned<Vec<Spanned<Vec<f64>>>>>,
    /// Chi-square gate threshold (none by default).
    pub gate: Option<Spanned<f64>>,
    /// Own models: the number of components (the model brings H and R).
    pub components: Option<Spanned<usize>>,
}

/// Initial state and covariance.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawStart {
    /// Initial state x0.
    pub x: RawVector,
    /// Initial covariance P0 (full).
    pub p: Option<RawMatrix>,
    /// Initial covariance P0 (diagonal).
    pub p_diag: Option<RawVector>,
    /// Initial standard deviations (P0 diagonal = std^2).
    pub std: Option<RawVector>,
}

/// How long to run: exactly one of the fields.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawHorizon {
    /// Duration, s.
    pub seconds: Option<Spanned<f64>>,
    /// Duration, h.
    pub hours: Option<Spanned<f64>>,
    /// Number of filter steps.
    pub steps: Option<Spanned<i64>>,
}

/// Verdict thresholds; each has a default.
#[derive(Debug, Default, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawVerdict {
    /// Largest relative covariance error (Frobenius).
    pub max_relative_error: Option<Spanned<f64>>,
    /// Largest relative asymmetry.
    pub max_asymmetry: Option<Spanned<f64>>,
    /// Largest relative gain error.
    pub max_gain_error: Option<Spanned<f64>>,
    /// Largest relative distance of the late-run covariance from the steady state.
    pub max_steady_distance: Option<Spanned<f64>>,
    /// Largest state difference from the f64 run, in standard deviations.
    pub max_state_difference_sd: Option<Spanned<f64>>,
    /// The old name of `max_state_difference_sd`, accepted for one release.
    pub max_state_difference: Option<Spanned<f64>>,
    /// Largest accepted relative excess of a steady-gain filter's
    /// covariance over the optimal one during its transient.
    pub max_transient_excess: Option<Spanned<f64>>,
}

/// The variant to flash.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawFlash {
    /// "f32" or "f64".
    pub precision: Option<Spanned<String>>,
    /// The old name of `precision`, accepted for one release.
    pub scalar: Option<Spanned<String>>,
    /// "joseph" or "conventional".
    pub form: Option<Spanned<String>>,
}

/// An external reference trajectory.
#[derive(Debug, Deserialize)]
#[serde(deny_unknown_fields)]
pub struct RawReference {
    /// CSV file, relative to the spec file.
    pub csv: Spanned<String>,
    /// Relative tolerance for the agreement with our own reference.
    pub tolerance: Option<Spanned<f64>>,
}
