//! Datasheet noise figures to the filter's numbers (two-sided white-noise
//! intensities, per-sample variances), with the chain of conversions.

use super::NumericError;
pub use super::units::parse_unit;

/// One- or two-sided spectral density.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Sided {
    /// One-sided (positive frequencies only).
    One,
    /// Two-sided.
    Two,
}

/// Frequency variable of a PSD.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum PerFrequency {
    /// Per hertz.
    Hz,
    /// Per radian per second.
    RadPerSecond,
}

/// A noise figure as datasheets give it.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum NoiseFigure {
    /// Amplitude density, units/sqrt(Hz).
    Density {
        /// Value.
        value: f64,
        /// Sidedness.
        sided: Sided,
    },
    /// Power spectral density.
    Psd {
        /// Value.
        value: f64,
        /// Sidedness.
        sided: Sided,
        /// Frequency variable.
        per: PerFrequency,
    },
    /// Random walk coefficient.
    RandomWalk {
        /// Value.
        value: f64,
        /// Per sqrt(hour) rather than sqrt(s).
        per_sqrt_hour: bool,
    },
    /// Per-sample standard deviation at a rate.
    SampleStd {
        /// Standard deviation.
        sigma: f64,
        /// Sample rate in Hz.
        rate_hz: f64,
    },
}

/// One step of a conversion.
#[derive(Clone, Debug, PartialEq)]
pub struct ConversionStep {
    /// What the step computes.
    pub what: String,
    /// The formula applied.
    pub formula: String,
    /// The value obtained.
    pub value: f64,
    /// Its unit.
    pub unit: String,
}

/// A conversion's result and steps.
#[derive(Clone, Debug, PartialEq)]
pub struct Conversion {
    /// Two-sided white-noise intensity W (units^2 * s).
    pub intensity: f64,
    /// The steps taken.
    pub steps: Vec<ConversionStep>,
}

/// Converts a figure to a two-sided intensity.
///
/// # Errors
/// [`NumericError`].
pub fn to_intensity(fig: &NoiseFigure) -> Result<Conversion, NumericError> {
    let _ = fig;
    todo!()
}

/// Variance of band-limited white noise held for `sample_time`: W / Ts.
#[must_use]
pub fn sample_variance(intensity: f64, sample_time: f64) -> f64 {
    intensity / sample_time
}

/// Variance of a Wiener process after `elapsed`: W * t.
#[must_use]
pub fn random_walk_variance(intensity: f64, elapsed: f64) -> f64 {
    intensity * elapsed
}

/// Rule-of-thumb sample time for simulating white noise: a hundredth of the
/// inverse of the system bandwidth (common practice).
#[must_use]
pub fn suggested_sample_time(bandwidth_hz: f64) -> f64 {
    0.01 / bandwidth_hz
}
