//! Noise figures from the spec (density, PSD, random walk, per-sample
//! deviation, each with a unit) converted into the filter's numbers through
//! `numeric::noise`, keeping every step for the report.

use serde::Serialize;
use toml::Spanned;

use super::error::{Locator, SpecError};
use super::raw::RawNoise;
use super::validate::noise_value;
use crate::numeric::noise::{self, NoiseFigure, PerFrequency, Sided};

/// What the converted figure is for.
#[derive(Debug, Clone, Copy)]
pub enum Use {
    /// A two-sided continuous intensity (continuous models' Qc).
    Intensity,
    /// The variance of one sample held at this rate, Hz: W / Ts.
    SampleVariance(f64),
    /// The variance a random walk gains over this time, s: W t.
    WalkVariance(f64),
}

/// One step of a conversion, for the report.
#[derive(Debug, Clone, Serialize)]
pub struct Step {
    /// What the step computes.
    pub what: String,
    /// The formula.
    pub formula: String,
    /// The value obtained.
    pub value: f64,
    /// Its unit.
    pub unit: String,
}

/// The chain of conversions of one noise figure.
#[derive(Debug, Clone, Serialize)]
pub struct ConversionRecord {
    /// The spec field the figure came from.
    pub field: String,
    /// The figure as written.
    pub given: String,
    /// The steps, in order.
    pub steps: Vec<Step>,
    /// The number the filter uses.
    pub result: f64,
    /// What the result is.
    pub result_is: String,
}

/// Converts one figure for `purpose`; returns the number and its record.
///
/// # Errors
/// A located [`SpecError`] for a missing or doubled value, a negative
/// value, an unknown or unfit unit, or a missing sample rate.
pub fn convert(
    loc: &Locator<'_>,
    fig: &Spanned<RawNoise>,
    field: &str,
    purpose: Use,
    step_hz: f64,
) -> Result<(f64, ConversionRecord), SpecError> {
    let raw = fig.get_ref();
    let values = noise_value(raw);
    let (kind, value) = match values.as_slice() {
        [one] => *one,
        [] => {
            return Err(loc.error(
                fig.span(),
                field,
                "give one of `density`, `psd`, `random_walk`, `std` or `variance`",
            ));
        }
        [_, (second, s), ..] => {
            return Err(loc.error(
                s.span(),
                &format!("{field}.{second}"),
                "give only one value per noise figure",
            ));
        }
    };
    let vfield = format!("{field}.{kind}");
    let v = *value.get_ref();
    if !(v.is_finite() && v >= 0.0) {
        return Err(loc.error(
            value.span(),
            &vfield,
            format!("a noise figure must be a non-negative number, got {v}"),
        ));
    }
    let unit_text = raw.unit.get_ref().trim();
    let ufield = format!("{field}.unit");
    let unit = noise::parse_unit(unit_text)
        .map_err(|e| loc.error(raw.unit.span(), &ufield, e.to_string()))?;
    let sided = match raw.sided.as_ref() {
        None => None,
        Some(s) => Some(match s.get_ref().as_str() {
            "one" => Sided::One,
            "two" => Sided::Two,
            other => {
                return Err(loc.error(
                    s.span(),
                    &format!("{field}.sided"),
                    format!("unknown `{other}`: use \"one\" or \"two\""),
                ));
            }
        }),
    };
    let per = match raw.per.as_ref() {
        None => None,
        Some(s) => Some(match s.get_ref().as_str() {
            "Hz" | "hz" => PerFrequency::Hz,
            "rad/s" => PerFrequency::RadPerSecond,
            other => {
                return Err(loc.error(
                    s.span(),
                    &format!("{field}.per"),
                    format!("unknown `{other}`: use \"Hz\" or \"rad/s\""),
                ));
            }
        }),
    };
    let misplaced = |what: &str, span: std::ops::Range<usize>| {
        Err(loc.error(
            span,
            &format!("{field}.{what}"),
            format!("not used by a `{kind}` figure"),
        ))
    };
    if !matches!(kind, "density" | "psd")
        && let Some(s) = &raw.sided
    {
        return misplaced("sided", s.span());
    }
    if kind != "psd"
        && let Some(s) = &raw.per
    {
        return misplaced("per", s.span());
    }
    if !matches!(kind, "std" | "variance")
        && let Some(s) = &raw.at_hz
    {
        return misplaced("at_hz", s.span());
    }

    // The value in coherent units (SI, radians, seconds).
    let scaled = v * unit.scale;
    let mut steps = vec![Step {
        what: format!("{kind} in coherent units"),
        formula: format!("{v} {unit_text} x {}", unit.scale),
        value: scaled,
        unit: "SI".into(),
    }];
    let figure = match kind {
        "density" => NoiseFigure::Density {
            value: scaled,
            sided: sided.unwrap_or(Sided::One),
        },
        "psd" => NoiseFigure::Psd {
            value: scaled,
            sided: sided.unwrap_or(Sided::One),
            per: per.unwrap_or(PerFrequency::Hz),
        },
        "random_walk" => NoiseFigure::RandomWalk {
            value: scaled,
            per_sqrt_hour: false,
        },
        "std" | "variance" => {
            let rate_hz = match (&raw.at_hz, purpose) {
                (Some(r), _) => {
                    let x = *r.get_ref();
                    if !(x.is_finite() && x > 0.0) {
                        return Err(loc.error(
                            r.span(),
                            &format!("{field}.at_hz"),
                            format!("a sample rate must be positive, got {x}"),
                        ));
                    }
                    x
                }
                (None, Use::SampleVariance(rate)) => rate,
                (None, _) => {
                    return Err(loc.error(
                        fig.span(),
                        &format!("{field}.at_hz"),
                        format!(
                            "a per-sample `{kind}` needs the rate it was measured at (`at_hz`)"
                        ),
                    ));
                }
            };
            let sigma = if kind == "variance" {
                scaled.sqrt()
            } else {
                scaled
            };
            NoiseFigure::SampleStd { sigma, rate_hz }
        }
        _ => unreachable_kind(),
    };
    let conv = noise::to_intensity(&figure)
        .map_err(|e| loc.error(value.span(), &vfield, e.to_string()))?;
    steps.extend(conv.steps.iter().map(|s| Step {
        what: s.what.clone(),
        formula: s.formula.clone(),
        value: s.value,
        unit: s.unit.clone(),
    }));
    let w = conv.intensity;
    let (result, result_is) = match purpose {
        Use::Intensity => (w, "two-sided intensity W (continuous Qc entry)".to_string()),
        Use::SampleVariance(rate) => {
            let r = noise::sample_variance(w, 1.0 / rate);
            steps.push(Step {
                what: format!("variance of one sample at {rate} Hz"),
                formula: "W / Ts".into(),
                value: r,
                unit: "SI^2".into(),
            });
            (r, format!("per-sample variance at {rate} Hz"))
        }
        Use::WalkVariance(t) => {
            let r = noise::random_walk_variance(w, t);
            steps.push(Step {
                what: format!("random-walk variance gained per step ({t} s)"),
                formula: "W t".into(),
                value: r,
                unit: "SI^2".into(),
            });
            (r, format!("variance per filter step at {step_hz} Hz"))
        }
    };
    if !(result.is_finite() && result >= 0.0) {
        return Err(loc.error(
            value.span(),
            &vfield,
            format!("converts to an unusable value {result}"),
        ));
    }
    let mut given = format!("{kind} = {v} {unit_text}");
    if let Some(s) = &raw.sided {
        given.push_str(&format!(", {}-sided", s.get_ref()));
    }
    if let Some(s) = &raw.at_hz {
        given.push_str(&format!(" at {} Hz", s.get_ref()));
    }
    Ok((
        result,
        ConversionRecord {
            field: field.to_string(),
            given,
            steps,
            result,
            result_is,
        },
    ))
}

fn unreachable_kind() -> NoiseFigure {
    // noise_value only returns the five names matched above.
    NoiseFigure::SampleStd {
        sigma: f64::NAN,
        rate_hz: f64::NAN,
    }
}

/// Converts a figure written as a standalone TOML table body (the `cairn
/// noise` subcommand): to a per-sample variance at `rate` when given, to a
/// two-sided intensity otherwise.
///
/// # Errors
/// A [`SpecError`] located in the command-line text.
pub fn convert_standalone(doc: &str, rate: Option<f64>) -> Result<ConversionRecord, SpecError> {
    let loc = Locator::new("<command line>", doc);
    let fig: Spanned<RawNoise> = toml::from_str::<RawNoise>(doc)
        .map(|r| Spanned::new(0..doc.len(), r))
        .map_err(|e| loc.from_toml(&e))?;
    let purpose = rate.map_or(Use::Intensity, Use::SampleVariance);
    convert(&loc, &fig, "figure", purpose, rate.unwrap_or(1.0)).map(|(_, r)| r)
}
