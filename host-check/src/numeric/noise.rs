//! Datasheet noise figures to the filter's numbers (two-sided white-noise
//! intensities, per-sample variances), with the chain of conversions.
//!
//! # Conventions (stated once, used everywhere)
//! - The filter's continuous noise is white with **two-sided intensity**
//!   `W`: `E[w(t) w(s)] = W delta(t - s)`, in `units^2 * s` (equivalently
//!   a two-sided PSD `S(f) = W` per Hz). This is the `Qc` of
//!   [`super::vanloan::discretize`].
//! - A datasheet **noise density** `ND` (units/sqrt(Hz)) is normally a
//!   one-sided amplitude density: the one-sided PSD is `ND^2`, so
//!   `W = ND^2 / 2`; sampled at `fs` with an ideal cut at Nyquist the
//!   per-sample standard deviation is `ND sqrt(fs/2)` (with a one-pole
//!   filter, use its noise-equivalent bandwidth `(pi/2) f_3dB` instead of
//!   `fs/2`). docs/references.md "Sensor noise figures".
//! - A **random walk coefficient** `N` (angle random walk in units/sqrt(s)
//!   or units/sqrt(h), IEEE Std 952-1997: Allan variance `N^2 / tau`) is the
//!   square root of the two-sided rate PSD: `W = N^2` with `N` per sqrt(s)
//!   (`N [unit/sqrt(h)] / 60`). Equivalently `N [deg/sqrt(h)] =
//!   sqrt(PSD [(deg/h)^2/Hz]) / 60`.
//! - A **PSD per rad/s** is read so that it integrates to the variance over
//!   its stated range: one-sided `G(omega) = S(f) / pi`
//!   (`sigma^2 = integral_0^inf G domega`), so `W = pi G`; two-sided
//!   `Phi(omega) = S(f) / (2 pi)`, so `W = 2 pi Phi`. (Texts that define the
//!   two-sided per-rad/s spectrum as the Fourier transform of the
//!   autocorrelation, with `sigma^2 = (1/2pi) integral Phi domega`, have
//!   `Phi = W`: give such a figure as a two-sided PSD per Hz.)
//! - A **per-sample standard deviation** `sigma` at rate `fs` describes
//!   band-limited white noise held for `Ts = 1/fs`: `W = sigma^2 Ts`, and
//!   conversely [`sample_variance`] `= W / Ts` (common practice).
//! - A Wiener process driven by `W` has variance [`random_walk_variance`]
//!   `= W t` after time `t` (common practice).

use super::NumericError;
use super::units::Unit;
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

/// A noise figure as datasheets give it, its value already in the noise
/// quantity's unit `u` (see the module docs for each convention).
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum NoiseFigure {
    /// Amplitude density `ND`, `u/sqrt(Hz)`; datasheets normally give it
    /// one-sided.
    Density {
        /// Value.
        value: f64,
        /// Sidedness.
        sided: Sided,
    },
    /// Power spectral density, `u^2/Hz` or `u^2/(rad/s)`.
    Psd {
        /// Value.
        value: f64,
        /// Sidedness.
        sided: Sided,
        /// Frequency variable.
        per: PerFrequency,
    },
    /// Random walk coefficient `N`, `u*sqrt(s)` (i.e. the integrated
    /// quantity per sqrt(s)), or per sqrt(h) when `per_sqrt_hour`
    /// (angle random walk style).
    RandomWalk {
        /// Value.
        value: f64,
        /// Per sqrt(hour) rather than sqrt(s).
        per_sqrt_hour: bool,
    },
    /// Per-sample standard deviation `sigma` (`u`) of band-limited white
    /// noise sampled at `rate_hz`.
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

/// A conversion's result and the steps that led to it, for the report.
#[derive(Clone, Debug, PartialEq)]
pub struct Conversion {
    /// Two-sided white-noise intensity `W` (`u^2 * s`).
    pub intensity: f64,
    /// The steps taken.
    pub steps: Vec<ConversionStep>,
}

/// The one number format of a conversion chain: four significant digits in
/// e-notation (`1.200e-2`), for every value and every factor in a formula.
#[must_use]
pub fn number(v: f64) -> String {
    if v == 0.0 {
        "0".to_string()
    } else {
        format!("{v:.3e}")
    }
}

/// A unit squared, in the spec's grammar: `m^2`, `(rad/s)^2`.
#[must_use]
pub fn squared(unit: &str) -> String {
    format!("{}^2", grouped(unit))
}

/// A unit text as one factor: as it is when it is one name (`m`), in
/// parentheses otherwise (`(m/s)`).
fn grouped(unit: &str) -> String {
    if unit.chars().all(char::is_alphanumeric) {
        unit.to_string()
    } else {
        format!("({unit})")
    }
}

fn step(what: &str, formula: &str, value: f64, unit: String) -> ConversionStep {
    ConversionStep {
        what: what.to_string(),
        formula: formula.to_string(),
        value,
        unit,
    }
}

fn non_negative(what: &'static str, v: f64) -> Result<(), NumericError> {
    if v.is_finite() && v >= 0.0 {
        Ok(())
    } else {
        Err(NumericError::NotPositive { what, value: v })
    }
}

/// Converts a figure, already expressed in the noise quantity's unit `u`
/// (see [`NoiseFigure`] for what each variant's value means), to the
/// two-sided white-noise intensity `W` in `u^2 s`, recording each step.
/// The step units are written with `u` standing for the quantity's unit;
/// use [`convert`] to start from a value with a unit text.
///
/// # Errors
/// [`NumericError::NotPositive`] for a negative or non-finite value, or a
/// sample rate that is not positive.
pub fn to_intensity(fig: &NoiseFigure) -> Result<Conversion, NumericError> {
    to_intensity_in(fig, "u")
}

/// [`to_intensity`] with the quantity's unit text used in the steps.
///
/// # Errors
/// As [`to_intensity`].
pub fn to_intensity_in(fig: &NoiseFigure, unit: &str) -> Result<Conversion, NumericError> {
    let q = grouped(unit);
    let w_unit = format!("{q}^2*s");
    let mut steps = Vec::new();
    let w = match *fig {
        NoiseFigure::Density { value, sided } => {
            non_negative("noise density", value)?;
            match sided {
                Sided::One => {
                    steps.push(step(
                        "amplitude density, one-sided (datasheet)",
                        "ND",
                        value,
                        format!("{q}/sqrt(Hz)"),
                    ));
                    steps.push(step(
                        "one-sided PSD",
                        "S1 = ND^2",
                        value * value,
                        format!("{q}^2/Hz"),
                    ));
                    let w = value * value / 2.0;
                    steps.push(step(
                        "two-sided intensity",
                        "W = S1/2 = ND^2/2",
                        w,
                        w_unit.clone(),
                    ));
                    w
                }
                Sided::Two => {
                    steps.push(step(
                        "amplitude density, two-sided",
                        "ND",
                        value,
                        format!("{q}/sqrt(Hz)"),
                    ));
                    let w = value * value;
                    steps.push(step("two-sided intensity", "W = ND^2", w, w_unit.clone()));
                    w
                }
            }
        }
        NoiseFigure::Psd { value, sided, per } => {
            non_negative("power spectral density", value)?;
            let (label, formula, w) = match (sided, per) {
                (Sided::Two, PerFrequency::Hz) => ("PSD, two-sided per Hz", "W = S", value),
                (Sided::One, PerFrequency::Hz) => {
                    ("PSD, one-sided per Hz", "W = S1/2", value / 2.0)
                }
                (Sided::One, PerFrequency::RadPerSecond) => (
                    "PSD, one-sided per rad/s",
                    "W = pi*G (G(omega) = S(f)/pi)",
                    core::f64::consts::PI * value,
                ),
                (Sided::Two, PerFrequency::RadPerSecond) => (
                    "PSD, two-sided per rad/s",
                    "W = 2*pi*Phi (Phi(omega) = S(f)/(2 pi))",
                    2.0 * core::f64::consts::PI * value,
                ),
            };
            let per_text = match per {
                PerFrequency::Hz => format!("{q}^2/Hz"),
                PerFrequency::RadPerSecond => format!("{q}^2/(rad/s)"),
            };
            steps.push(step(label, "S", value, per_text));
            steps.push(step("two-sided intensity", formula, w, w_unit.clone()));
            w
        }
        NoiseFigure::RandomWalk {
            value,
            per_sqrt_hour,
        } => {
            non_negative("random walk coefficient", value)?;
            let n = if per_sqrt_hour {
                steps.push(step(
                    "random walk coefficient",
                    "N",
                    value,
                    format!("{q}*h/sqrt(h)"),
                ));
                let n = value / 60.0;
                steps.push(step(
                    "per sqrt(s)",
                    "N/60 (sqrt(3600 s) = 60 sqrt(s))",
                    n,
                    format!("{q}*sqrt(s)"),
                ));
                n
            } else {
                steps.push(step(
                    "random walk coefficient",
                    "N",
                    value,
                    format!("{q}*sqrt(s)"),
                ));
                value
            };
            let w = n * n;
            steps.push(step(
                "two-sided intensity (IEEE 952: Allan variance N^2/tau)",
                "W = N^2",
                w,
                w_unit.clone(),
            ));
            w
        }
        NoiseFigure::SampleStd { sigma, rate_hz } => {
            non_negative("per-sample standard deviation", sigma)?;
            if !(rate_hz.is_finite() && rate_hz > 0.0) {
                return Err(NumericError::NotPositive {
                    what: "sample rate",
                    value: rate_hz,
                });
            }
            steps.push(step(
                "per-sample standard deviation",
                "sigma",
                sigma,
                q.clone(),
            ));
            steps.push(step(
                "sample time",
                "Ts = 1/fs",
                1.0 / rate_hz,
                "s".to_string(),
            ));
            let w = sigma * sigma / rate_hz;
            steps.push(step(
                "two-sided intensity (white noise held for Ts)",
                "W = sigma^2 * Ts",
                w,
                w_unit.clone(),
            ));
            w
        }
    };
    Ok(Conversion {
        intensity: w,
        steps,
    })
}

/// How a figure's unit relates to the noise quantity's unit.
fn classify(fig_unit: &Unit, quantity: &Unit, unit_text: &str) -> Option<(Kind, f64)> {
    let sqrt_s = Unit {
        scale: 1.0,
        dims: {
            let mut d = [0; super::units::BASE_DIMS];
            d[1] = 1;
            d
        },
    };
    let s = sqrt_s.mul(&sqrt_s);
    let rad = Unit {
        scale: 1.0,
        dims: {
            let mut d = [0; super::units::BASE_DIMS];
            d[2] = 2;
            d
        },
    };
    let q2 = quantity.mul(quantity);
    if fig_unit.same_dimension(quantity) {
        return Some((Kind::SampleStd, fig_unit.scale / quantity.scale));
    }
    let density = quantity.mul(&sqrt_s);
    if fig_unit.same_dimension(&density) {
        let kind = if unit_text.contains("Hz") {
            Kind::Density
        } else {
            Kind::RandomWalk
        };
        return Some((kind, fig_unit.scale / quantity.scale));
    }
    if fig_unit.same_dimension(&q2.mul(&s)) {
        return Some((Kind::PsdHz, fig_unit.scale / q2.scale));
    }
    if fig_unit.same_dimension(&q2.mul(&s).div(&rad)) {
        return Some((Kind::PsdRad, fig_unit.scale / q2.scale));
    }
    None
}

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
enum Kind {
    SampleStd,
    Density,
    RandomWalk,
    PsdHz,
    PsdRad,
}

/// Converts a noise figure given with its unit text, for a noise on a
/// quantity with unit `quantity` (the unit of the white noise `w` itself:
/// for a gyro's angle random walk that is the rate, e.g. `rad/s`; for an
/// accelerometer, `m/s^2`), to the two-sided intensity `W` in
/// `quantity^2 * s`, with every step recorded.
///
/// The kind of figure follows from the dimensions:
///
/// | figure unit / quantity unit | kind                        | needs      |
/// |-----------------------------|-----------------------------|------------|
/// | 1                           | per-sample std at a rate    | `rate_hz`  |
/// | 1/sqrt(Hz) (text has `Hz`)  | amplitude density           | `sided` (default one-sided) |
/// | sqrt(s) (e.g. `deg/sqrt(h)` for `deg/s`) | random walk coefficient |  |
/// | 1/Hz (squared quantity)     | PSD per Hz                  | `sided` (default two-sided) |
/// | 1/(rad/s) (squared quantity)| PSD per rad/s               | `sided` (default one-sided) |
///
/// Defaults follow what each kind of figure usually means: datasheet
/// densities and per-rad/s PSDs are one-sided, per-Hz PSDs in Kalman
/// filtering texts are two-sided; the steps say "assumed" when a default
/// was used, so the report shows it.
///
/// # Errors
/// As [`parse_unit`] for either text; [`NumericError::UnitMismatch`] when
/// the figure's unit is none of the forms above;
/// [`NumericError::MissingInput`] when a per-sample std comes without a
/// rate; [`NumericError::NotPositive`] for negative values or rates.
pub fn convert(
    value: f64,
    unit: &str,
    quantity: &str,
    sided: Option<Sided>,
    rate_hz: Option<f64>,
) -> Result<Conversion, NumericError> {
    let fu = parse_unit(unit)?;
    let qu = parse_unit(quantity)?;
    let (kind, factor) = classify(&fu, &qu, unit).ok_or_else(|| NumericError::UnitMismatch {
        unit: unit.to_string(),
        quantity: quantity.to_string(),
        reason: format!(
            "expected a standard deviation ({q}), a density ({q}/sqrt(Hz)), a random walk \
             coefficient ({q}*sqrt(s)) or a PSD ({q}^2/Hz or {q}^2/(rad/s)); the figure's \
             dimension is {}",
            fu.dimension_text(),
            q = qu.dimension_text()
        ),
    })?;
    non_negative("noise figure", value)?;
    let converted = value * factor;
    let (fig, target, assumed) = match kind {
        Kind::SampleStd => {
            let rate_hz = rate_hz.ok_or(NumericError::MissingInput {
                what: "sample rate for a per-sample standard deviation",
            })?;
            (
                NoiseFigure::SampleStd {
                    sigma: converted,
                    rate_hz,
                },
                quantity.to_string(),
                None,
            )
        }
        Kind::Density => {
            let s = sided.unwrap_or(Sided::One);
            (
                NoiseFigure::Density {
                    value: converted,
                    sided: s,
                },
                format!("({quantity})/sqrt(Hz)"),
                sided.is_none().then_some("one-sided"),
            )
        }
        Kind::RandomWalk => (
            NoiseFigure::RandomWalk {
                value: converted,
                per_sqrt_hour: false,
            },
            format!("{}*sqrt(s)", grouped(quantity)),
            None,
        ),
        Kind::PsdHz => {
            let s = sided.unwrap_or(Sided::Two);
            (
                NoiseFigure::Psd {
                    value: converted,
                    sided: s,
                    per: PerFrequency::Hz,
                },
                format!("{}/Hz", squared(quantity)),
                sided.is_none().then_some("two-sided"),
            )
        }
        Kind::PsdRad => {
            let s = sided.unwrap_or(Sided::One);
            (
                NoiseFigure::Psd {
                    value: converted,
                    sided: s,
                    per: PerFrequency::RadPerSecond,
                },
                format!("{}/(rad/s)", squared(quantity)),
                sided.is_none().then_some("one-sided"),
            )
        }
    };
    let mut steps = vec![step("figure as given", unit, value, unit.to_string())];
    if factor != 1.0 {
        steps.push(step(
            "in the quantity's units",
            &format!("x {}", number(factor)),
            converted,
            target,
        ));
    }
    if let Some(a) = assumed {
        steps.push(step(
            &format!("assumed {a} (not stated)"),
            "default for this kind of figure",
            converted,
            String::new(),
        ));
    }
    let mut c = to_intensity_in(&fig, quantity)?;
    steps.append(&mut c.steps);
    c.steps = steps;
    Ok(c)
}

/// Variance of band-limited white noise of two-sided intensity `W` held for
/// `sample_time`: `W / Ts` (common practice; the discrete `R` of a sensor
/// sampled at `1/Ts`).
#[must_use]
pub fn sample_variance(intensity: f64, sample_time: f64) -> f64 {
    intensity / sample_time
}

/// Variance of a Wiener process driven by white noise of intensity `W`
/// after `elapsed` seconds: `W * t` (common practice).
#[must_use]
pub fn random_walk_variance(intensity: f64, elapsed: f64) -> f64 {
    intensity * elapsed
}

/// `sqrt(2 ln 2 / pi)` = 0.6643: the Allan deviation floor of a bias
/// instability `B` (flicker rate noise of two-sided PSD `B^2 / (2 pi f)`):
/// `sigma(tau) = 0.664 B` on the flat part (IEEE Std 952-1997, Annex C;
/// El-Sheimy, Hou & Niu 2008, Table I).
pub const BIAS_FLOOR: f64 = 0.664_282_470_267_960_1;

/// Largest Allan deviation of a first-order Gauss-Markov process over its
/// steady standard deviation, `max sigma_A(tau) / sigma` = 0.6174, reached
/// at `tau` = [`GAUSS_MARKOV_PEAK_AT`] correlation times (computed here from
/// [`gauss_markov_allan_variance`]; a unit test recomputes both).
pub const GAUSS_MARKOV_PEAK: f64 = 0.617_364_283;

/// Cluster time of the Gauss-Markov Allan-deviation maximum, in correlation
/// times: 1.8926 (computed, see [`GAUSS_MARKOV_PEAK`]).
pub const GAUSS_MARKOV_PEAK_AT: f64 = 1.8926;

/// Allan variance of a first-order Gauss-Markov process of steady variance
/// `variance` and correlation time `correlation_s` at cluster time `tau`:
/// `(2 s^2 Tc / tau) [1 - (Tc / 2 tau)(3 - 4 e^(-tau/Tc) + e^(-2 tau/Tc))]`
/// (IEEE Std 952-1997, Annex C, exponentially correlated noise, written
/// with the driving intensity `2 s^2 / Tc`; from memory, and checked in the
/// tests against the exact variance of sampled cluster averages).
#[must_use]
pub fn gauss_markov_allan_variance(variance: f64, correlation_s: f64, tau: f64) -> f64 {
    let x = tau / correlation_s;
    // Series for small x, where the bracket cancels: 1 - (3 - 4e^-x + e^-2x)/(2x)
    // = x^2/3 - x^3/4 + 7 x^4/60 - x^5/24 + 31 x^6/2520 - x^7/320 ...; the
    // first term is a rate random walk of K^2 = 2 s^2 / Tc at short tau.
    if x < 1e-2 {
        let series =
            1.0 / 3.0 + x * (-0.25 + x * (7.0 / 60.0 + x * (-1.0 / 24.0 + x * 31.0 / 2520.0)));
        return 2.0 * variance * x * series;
    }
    let bracket = 1.0 - (-4.0 * (-x).exp_m1() + (-2.0 * x).exp_m1()) / (2.0 * x);
    2.0 * variance / x * bracket
}

/// One discrete bias or noise state, as a filter step of `step_s` uses it.
#[derive(Clone, Debug, PartialEq)]
pub struct DiscreteTerm {
    /// The state's transition over one step (1 for a random walk).
    pub phi: f64,
    /// The variance the state gains per step: its entry of Qd.
    pub qd: f64,
    /// Its steady variance, when it has one (a Gauss-Markov state).
    pub steady_variance: Option<f64>,
}

/// A rate random walk `K` (units/s/sqrt(s), i.e. the bias's random walk;
/// Allan variance `K^2 tau / 3`, IEEE Std 952-1997) as a random-walk bias
/// state: `phi = 1`, `Qd = K^2 T` per step of `step_s` (Van Loan with
/// `F = 0`, intensity `K^2`; common practice).
#[must_use]
pub fn rate_random_walk_state(k: f64, step_s: f64) -> DiscreteTerm {
    DiscreteTerm {
        phi: 1.0,
        qd: k * k * step_s,
        steady_variance: None,
    }
}

/// The steady standard deviation of the Gauss-Markov bias state that stands
/// for a bias instability `B`: the one whose Allan-deviation maximum
/// ([`GAUSS_MARKOV_PEAK`] sigma) equals the bias-instability floor
/// ([`BIAS_FLOOR`] B), so `sigma = 1.0760 B`.
#[must_use]
pub fn bias_instability_sigma(b: f64) -> f64 {
    b * BIAS_FLOOR / GAUSS_MARKOV_PEAK
}

/// A first-order Gauss-Markov bias state of steady standard deviation
/// `sigma` and correlation time `correlation_s`, stepped by `step_s`:
/// `phi = exp(-T/tau)`, `Qd = sigma^2 (1 - exp(-2T/tau))` (the exact
/// discretisation; Van Loan 1978 with `F = -1/tau` and intensity
/// `2 sigma^2 / tau`), steady variance `sigma^2`.
#[must_use]
pub fn gauss_markov_state(sigma: f64, correlation_s: f64, step_s: f64) -> DiscreteTerm {
    let a = step_s / correlation_s;
    DiscreteTerm {
        phi: (-a).exp(),
        // -expm1(-2a) keeps the digits when T << tau.
        qd: sigma * sigma * -(-2.0 * a).exp_m1(),
        steady_variance: Some(sigma * sigma),
    }
}

/// The two discrete numbers of white rate noise `N` (angle or velocity
/// random walk, per sqrt(s)) at sample time `ts`: the rate's per-sample
/// variance `N^2 / Ts`, and the variance the integrated quantity gains per
/// step, `N^2 Ts` (IEEE Std 952-1997; common practice).
#[must_use]
pub fn white_rate_numbers(n: f64, ts: f64) -> (f64, f64) {
    (n * n / ts, n * n * ts)
}

/// The two discrete numbers of quantization noise `Q` (in the integrated
/// quantity's unit; Allan variance `3 Q^2 / tau^2`, IEEE Std 952-1997) at
/// sample time `ts`: the integrated reading's error variance `Q^2` (white,
/// per reading), and the variance of the rate formed from two readings,
/// `2 Q^2 / Ts^2` (correlated -1/2 between neighbours; common practice).
#[must_use]
pub fn quantization_numbers(q: f64, ts: f64) -> (f64, f64) {
    (q * q, 2.0 * q * q / (ts * ts))
}

/// Rule-of-thumb sample time for simulating white noise: a hundredth of the
/// inverse of the system bandwidth, `0.01 / bandwidth_hz` seconds (common
/// practice). NaN when the bandwidth is not a positive finite number.
#[must_use]
pub fn suggested_sample_time(bandwidth_hz: f64) -> f64 {
    if bandwidth_hz.is_finite() && bandwidth_hz > 0.0 {
        0.01 / bandwidth_hz
    } else {
        f64::NAN
    }
}

#[cfg(test)]
mod tests {
    use super::super::units::STANDARD_GRAVITY as STANDARD_G;
    use super::*;
    use core::f64::consts::PI;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    #[test]
    fn accelerometer_density_example() {
        // docs/references.md "Sensor noise figures" (computed): 100 ug/sqrt(Hz),
        // one-sided, sampled at 100 Hz with an ideal cut at Nyquist:
        // sigma = ND sqrt(fs/2) = 6.93e-3 m/s^2; misread as two-sided 9.81e-3.
        let c = convert(100.0, "ug/sqrt(Hz)", "m/s^2", None, None).unwrap();
        let sigma = sample_variance(c.intensity, 0.01).sqrt();
        assert!((sigma - 6.93e-3).abs() < 5e-6, "{sigma}");
        assert!(rel(sigma, 100e-6 * STANDARD_G * (50.0f64).sqrt()) < 1e-14);
        let wrong = convert(100.0, "ug/sqrt(Hz)", "m/s^2", Some(Sided::Two), None).unwrap();
        let sigma2 = sample_variance(wrong.intensity, 0.01).sqrt();
        assert!((sigma2 - 9.81e-3).abs() < 5e-6, "{sigma2}");
        // The steps record the assumption and end at the intensity.
        assert!(c.steps.iter().any(|s| s.what.contains("assumed one-sided")));
        assert_eq!(c.steps.last().unwrap().value, c.intensity);
        assert!(c.steps.last().unwrap().formula.contains("ND^2/2"));
    }

    #[test]
    fn angle_random_walk_example() {
        // docs/references.md (IEEE Std 952-1997; values computed): 0.1 deg/sqrt(h)
        // = 1.667e-3 deg/s/sqrt(Hz) = 2.909e-5 rad/s/sqrt(Hz); per-sample
        // sigma at 100 Hz = 2.91e-4 rad/s; Qd of the integrated angle = N^2 Ts.
        let c = convert(0.1, "deg/sqrt(h)", "rad/s", None, None).unwrap();
        let n = c.intensity.sqrt();
        assert!((n - 2.909e-5).abs() < 5e-9, "{n}");
        let deg = convert(0.1, "deg/sqrt(h)", "deg/s", None, None).unwrap();
        assert!((deg.intensity.sqrt() - 1.667e-3).abs() < 5e-7);
        let sigma = sample_variance(c.intensity, 0.01).sqrt();
        assert!((sigma - 2.91e-4).abs() < 5e-7, "{sigma}");
        // Angle variance after one sample: N^2 Ts (Wiener process).
        assert!(rel(random_walk_variance(c.intensity, 0.01), n * n * 0.01) < 1e-15);
        // N [deg/sqrt(h)] = sqrt(PSD [(deg/h)^2/Hz]) / 60: the PSD form with
        // sqrt(PSD) = 6 deg/h/sqrt(Hz) gives the same intensity.
        let psd = convert(36.0, "(deg/h)^2/Hz", "rad/s", None, None).unwrap();
        assert!(rel(psd.intensity, c.intensity) < 1e-12);
        // And the explicit per-sqrt-hour figure.
        let rw = to_intensity(&NoiseFigure::RandomWalk {
            value: 0.1,
            per_sqrt_hour: true,
        })
        .unwrap();
        assert!(rel(rw.intensity, (0.1f64 / 60.0).powi(2)) < 1e-15);
    }

    /// Deterministic normal samples (LCG + Box-Muller), for Monte Carlo checks.
    struct Gauss(u64);
    impl Gauss {
        fn uniform(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6_364_136_223_846_793_005)
                .wrapping_add(1_442_695_040_888_963_407);
            ((self.0 >> 11) as f64 + 0.5) / (1u64 << 53) as f64
        }
        fn normal(&mut self) -> f64 {
            let (u1, u2) = (self.uniform(), self.uniform());
            (-2.0 * u1.ln()).sqrt() * (2.0 * PI * u2).cos()
        }
    }

    #[test]
    fn held_white_noise_and_wiener_variance() {
        // Common practice: band-limited white noise of two-sided PSD W held
        // for Ts has variance W/Ts; its integral (a Wiener process) has
        // variance W t. Monte Carlo with a fixed seed: 4000 paths of 50
        // steps; the sample variance of a chi-square(4000) estimate is
        // within 6% at about 3 sigma.
        let (w, ts, steps, paths) = (0.3, 0.02, 50, 4000);
        let sd = sample_variance(w, ts).sqrt();
        assert!(rel(sample_variance(w, ts), 15.0) < 1e-15);
        let mut g = Gauss(11);
        let mut sum2 = 0.0;
        for _ in 0..paths {
            let mut x = 0.0;
            for _ in 0..steps {
                x += sd * g.normal() * ts;
            }
            sum2 += x * x;
        }
        let var = sum2 / paths as f64;
        let t = steps as f64 * ts;
        assert!(
            rel(var, random_walk_variance(w, t)) < 0.06,
            "{var} vs {}",
            w * t
        );
        // Exactly, by the algebra of independent sums: steps * (W/Ts) * Ts^2.
        assert!(rel(steps as f64 * sample_variance(w, ts) * ts * ts, w * t) < 1e-14);
        // And the Van Loan random walk (F = 0) agrees with W t.
        let (_, qd) = super::super::vanloan::discretize(
            &nalgebra::DMatrix::zeros(1, 1),
            &nalgebra::DMatrix::identity(1, 1),
            &nalgebra::DMatrix::from_element(1, 1, w),
            t,
        )
        .unwrap();
        assert!(rel(qd[(0, 0)], random_walk_variance(w, t)) < 1e-14);
    }

    #[test]
    fn two_sided_per_hz_to_one_sided_per_rad_s_is_one_over_pi() {
        // Common practice (docs/references.md): G(omega) = S(f)/pi when
        // sigma^2 = integral_0^inf G domega = integral_-inf^inf S df.
        let s = 2.5;
        let a = to_intensity(&NoiseFigure::Psd {
            value: s,
            sided: Sided::Two,
            per: PerFrequency::Hz,
        })
        .unwrap();
        let b = to_intensity(&NoiseFigure::Psd {
            value: s / PI,
            sided: Sided::One,
            per: PerFrequency::RadPerSecond,
        })
        .unwrap();
        assert!(rel(a.intensity, b.intensity) < 1e-15);
        // Check the convention by integration: a first-order Gauss-Markov
        // process with intensity W and time constant tau has two-sided PSD
        // S(f) = W tau^2 / (1 + (2 pi f tau)^2) and variance W tau / 2
        // (its Van Loan steady state, closed form above). Integrate
        // G(omega) = S(omega / 2pi) / pi over omega in (0, inf) with
        // omega = tan(theta)/tau (midpoint rule).
        let (w, tau) = (0.8, 0.3);
        let n = 20_000;
        let mut integral = 0.0;
        for k in 0..n {
            let theta = (k as f64 + 0.5) / n as f64 * PI / 2.0;
            let omega = theta.tan() / tau;
            let domega = 1.0 / (tau * theta.cos().powi(2)) * (PI / 2.0 / n as f64);
            let f = omega / (2.0 * PI);
            let s_f = w * tau * tau / (1.0 + (2.0 * PI * f * tau).powi(2));
            integral += s_f / PI * domega;
        }
        assert!(rel(integral, w * tau / 2.0) < 1e-6, "{integral}");
    }

    #[test]
    fn suggested_sample_time_rule_of_thumb() {
        // Common practice: simulate white noise with a sample time about a
        // hundredth of the inverse system bandwidth.
        assert!(rel(suggested_sample_time(5.0), 2e-3) < 1e-15);
        // Why: a first-order system (bandwidth fc = 1/(2 pi tau)) driven by
        // held white noise of variance W/Ts has steady variance
        // (W tau / a) tanh(a/2), a = Ts/tau (exact discrete recursion
        // x+ = e^-a x + (1 - e^-a) tau w), versus W tau/2 continuous. At the
        // suggested Ts the difference is a^2/12 ~ 3e-4; ten times coarser it
        // is 3e-2.
        let (w, tau) = (1.0, 0.5);
        let fc = 1.0 / (2.0 * PI * tau);
        let held = |ts: f64| {
            let phi = (-ts / tau).exp();
            let gain = (1.0 - phi) * tau;
            gain * gain * sample_variance(w, ts) / (1.0 - phi * phi)
        };
        let ts = suggested_sample_time(fc);
        assert!(rel(held(ts), w * tau / 2.0) < 1e-3);
        assert!(rel(held(10.0 * ts), w * tau / 2.0) > 1e-2);
        assert!(suggested_sample_time(0.0).is_nan() && suggested_sample_time(-1.0).is_nan());
    }

    #[test]
    fn sample_std_and_psd_forms() {
        // sigma at fs: W = sigma^2 / fs (inverse of W/Ts; common practice).
        let c = convert(0.02, "m", "m", None, Some(50.0)).unwrap();
        assert!(rel(c.intensity, 0.02 * 0.02 / 50.0) < 1e-15);
        assert!(rel(sample_variance(c.intensity, 1.0 / 50.0), 4e-4) < 1e-14);
        // One-sided per-Hz PSD halves (S1 = 2 S for a real process).
        let one = convert(8.0, "m^2/Hz", "m", Some(Sided::One), None).unwrap();
        assert!(rel(one.intensity, 4.0) < 1e-15);
        let two = convert(8.0, "m^2/Hz", "m", None, None).unwrap();
        assert!(rel(two.intensity, 8.0) < 1e-15);
        // Per rad/s defaults to one-sided: W = pi G.
        let g = convert(1.0, "m^2/(rad/s)", "m", None, None).unwrap();
        assert!(rel(g.intensity, PI) < 1e-15);
        // Unit conversion inside the quantity: mm/sqrt(Hz) for a noise in m.
        let d = convert(3.0, "mm/sqrt(Hz)", "m", Some(Sided::Two), None).unwrap();
        assert!(rel(d.intensity, 9e-6) < 1e-14);
    }

    #[test]
    fn gauss_markov_peak_and_floor_constants() {
        // sqrt(2 ln 2 / pi) (IEEE Std 952-1997 Annex C: bias-instability
        // floor 0.664 B).
        assert!(rel(BIAS_FLOOR, (2.0 * 2f64.ln() / PI).sqrt()) < 1e-15);
        // The Gauss-Markov Allan deviation peak, found by a fine scan of the
        // closed form (computed): 0.61736 sigma at 1.8926 tau_c.
        let (mut best, mut at) = (0.0, 0.0);
        for i in 1_000..100_000 {
            let x = f64::from(i) / 10_000.0;
            let v = gauss_markov_allan_variance(1.0, 1.0, x);
            if v > best {
                (best, at) = (v, x);
            }
        }
        assert!(
            rel(best.sqrt(), GAUSS_MARKOV_PEAK) < 1e-8,
            "{}",
            best.sqrt()
        );
        assert!((at - GAUSS_MARKOV_PEAK_AT).abs() < 2e-4, "{at}");
        // The series branch joins the closed form.
        let (a, b) = (
            gauss_markov_allan_variance(1.0, 1.0, 0.999_999e-2),
            gauss_markov_allan_variance(1.0, 1.0, 1.000_001e-2),
        );
        assert!(rel(a / 0.999_999e-2, b / 1.000_001e-2) < 5e-8, "{a} {b}");
        // Short tau: a rate random walk of K^2 = 2 s^2 / Tc, K^2 tau / 3
        // (IEEE Std 952-1997 Annex C).
        assert!(
            rel(
                gauss_markov_allan_variance(1.5, 2.0, 1e-5),
                1.5 * 1e-5 / 3.0
            ) < 1e-5
        );
        // Large tau: the white-noise limit 2 s^2 Tc / tau (Annex C).
        assert!(rel(gauss_markov_allan_variance(2.0, 3.0, 3e4), 4.0 * 3.0 / 3e4) < 1e-3);
        assert!(rel(bias_instability_sigma(1.0), 1.075_997_6) < 1e-6);
    }

    #[test]
    fn discrete_terms_against_closed_forms() {
        // Gauss-Markov: Qd = sigma^2 (1 - exp(-2T/tau)) (closed form;
        // Van Loan 1978 for F = -1/tau, W = 2 sigma^2 / tau:
        // Qd = (W tau / 2)(1 - e^(-2T/tau)), docs/references.md).
        let (sigma, tau, t) = (0.3, 40.0, 0.01);
        let gm = gauss_markov_state(sigma, tau, t);
        assert!(rel(gm.qd, sigma * sigma * (1.0 - (-2.0 * t / tau).exp())) < 1e-12);
        assert!(rel(gm.phi, (-t / tau).exp()) < 1e-15);
        let w = 2.0 * sigma * sigma / tau;
        let (phi, qd) = super::super::vanloan::discretize(
            &nalgebra::DMatrix::from_element(1, 1, -1.0 / tau),
            &nalgebra::DMatrix::identity(1, 1),
            &nalgebra::DMatrix::from_element(1, 1, w),
            t,
        )
        .unwrap();
        assert!(rel(qd[(0, 0)], gm.qd) < 1e-10, "{} {}", qd[(0, 0)], gm.qd);
        assert!(rel(phi[(0, 0)], gm.phi) < 1e-14);
        // Stationary: phi^2 s^2 + Qd = s^2.
        assert!(rel(gm.phi * gm.phi * sigma * sigma + gm.qd, sigma * sigma) < 1e-14);
        // Rate random walk: Qd = K^2 T (Van Loan random walk, W T,
        // docs/references.md: W = 3, T = 0.25 -> 0.75).
        assert!(rel(rate_random_walk_state(3f64.sqrt(), 0.25).qd, 0.75) < 1e-15);
        // The trap of the factor Ts^2: K = 5e-5 deg/s/sqrt(s) at 100 Hz gives
        // Qd = K^2 T = 7.6e-15 (rad/s)^2 per step, not K^2/T = 7.6e-11.
        let k = 5e-5 * PI / 180.0;
        let kq = rate_random_walk_state(k, 0.01).qd;
        assert!((kq - 7.615e-15).abs() < 1e-18, "{kq}");
        // White rate noise: N^2/Ts and N^2 Ts (docs/references.md: 0.1
        // deg/sqrt(h) = 2.909e-5 rad/sqrt(s); sigma at 100 Hz 2.91e-4 rad/s).
        let (rate_var, angle_q) = white_rate_numbers(2.909e-5, 0.01);
        assert!((rate_var.sqrt() - 2.909e-4).abs() < 1e-9);
        assert!(rel(angle_q, 2.909e-5f64.powi(2) * 0.01) < 1e-15);
        // Quantization: a white reading error e of variance Q^2 differenced:
        // var(e1 - e0)/Ts^2 = 2 Q^2 / Ts^2 (common practice).
        let (r_angle, r_rate) = quantization_numbers(1e-3, 0.5);
        assert!(rel(r_angle, 1e-6) < 1e-15 && rel(r_rate, 8e-6) < 1e-15);
    }

    #[test]
    fn bad_figures_are_errors() {
        assert!(matches!(
            convert(1.0, "m/s", "rad/s", None, None),
            Err(NumericError::UnitMismatch { .. })
        ));
        assert!(matches!(
            convert(1.0, "m", "m", None, None),
            Err(NumericError::MissingInput { .. })
        ));
        assert!(matches!(
            convert(1.0, "m", "m", None, Some(0.0)),
            Err(NumericError::NotPositive { .. })
        ));
        assert!(matches!(
            convert(-1.0, "m/sqrt(Hz)", "m", None, None),
            Err(NumericError::NotPositive { .. })
        ));
        assert!(matches!(
            convert(1.0, "parsec", "m", None, None),
            Err(NumericError::UnknownUnit { .. })
        ));
        assert!(matches!(
            to_intensity(&NoiseFigure::Density {
                value: f64::NAN,
                sided: Sided::One
            }),
            Err(NumericError::NotPositive { .. })
        ));
        let msg = convert(1.0, "m/s", "rad/s", None, None)
            .unwrap_err()
            .to_string();
        assert!(msg.contains("m/s") && msg.contains("rad/s"), "{msg}");
    }
}
