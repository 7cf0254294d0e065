//! Noise figures from the spec (density, PSD, random walk, per-sample
//! deviation, each with a unit) converted into the filter's numbers through
//! `numeric::noise`, keeping every step for the report.

use serde::Serialize;
use toml::Spanned;

use super::error::{Locator, SpecError};
use super::raw::RawNoise;
use super::validate::noise_value;
use crate::numeric::noise::{self, NoiseFigure, PerFrequency, Sided};
use crate::numeric::units::{BASE_DIMS, Unit};

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
    quantity: Option<&str>,
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
            Some(x)
        }
        (None, Use::SampleVariance(rate)) => Some(rate),
        (None, _) => None,
    };
    if matches!(kind, "std" | "variance") && rate_hz.is_none() {
        return Err(loc.error(
            fig.span(),
            &format!("{field}.at_hz"),
            format!("a per-sample `{kind}` needs the rate it was measured at (`at_hz`)"),
        ));
    }
    let quantity = raw
        .quantity
        .as_ref()
        .map(|q| (q.get_ref().trim().to_string(), Some(q.span())))
        .or_else(|| quantity.map(|q| (q.to_string(), None)));
    let mut steps = Vec::new();
    let squared = quantity
        .as_ref()
        .map_or_else(|| "SI^2".to_string(), |(q, _)| format!("({q})^2"));
    let conv = if let Some((q, qspan)) = quantity {
        // The quantity's unit is known: the figure's unit must fit the kind
        // the spec names, and numeric::noise scales and converts it.
        let qfield = format!("{field}.quantity");
        let qu = noise::parse_unit(&q)
            .map_err(|e| loc.error(qspan.clone().unwrap_or(fig.span()), &qfield, e.to_string()))?;
        let fits = classify(&unit, &qu, unit_text);
        let wanted = if kind == "variance" { "std" } else { kind };
        let (value, unit_for) = if kind == "variance" {
            (v.sqrt(), format!("sqrt({unit_text})"))
        } else {
            (v, unit_text.to_string())
        };
        let fits_variance = kind == "variance" && unit.same_dimension(&qu.mul(&qu));
        if fits != Some(wanted) && !fits_variance {
            return Err(loc.error(
                raw.unit.span(),
                &ufield,
                format!(
                    "`{unit_text}` does not fit a `{kind}` of a quantity in `{q}`: {}",
                    expected_form(kind, &q)
                ),
            ));
        }
        let per_given = per.map(|p| p == PerFrequency::RadPerSecond);
        if let (Some(true), false) = (per_given, unit_text.contains("rad/s")) {
            return Err(loc.error(
                raw.per.as_ref().map_or(fig.span(), Spanned::span),
                &format!("{field}.per"),
                "`per` contradicts the unit; write the PSD's unit as (q)^2/(rad/s)",
            ));
        }
        noise::convert(value, &unit_for, &q, sided, rate_hz)
            .map_err(|e| loc.error(raw.unit.span(), &ufield, e.to_string()))?
    } else {
        // No quantity known: the field name says the kind, the unit only
        // scales it to coherent units (SI, radians, seconds).
        let scaled = v * unit.scale;
        steps.push(Step {
            what: format!("{kind} in coherent units"),
            formula: format!("{v} {unit_text} x {:.6e}", unit.scale),
            value: scaled,
            unit: "SI".into(),
        });
        let figure = match kind {
            "density" => NoiseFigure::Density {
                value: scaled,
                sided: sided.unwrap_or(Sided::One),
            },
            "psd" => NoiseFigure::Psd {
                value: scaled,
                sided: sided.unwrap_or(Sided::Two),
                per: per.unwrap_or(PerFrequency::Hz),
            },
            "random_walk" => NoiseFigure::RandomWalk {
                value: scaled,
                per_sqrt_hour: false,
            },
            _ => NoiseFigure::SampleStd {
                sigma: if kind == "variance" {
                    scaled.sqrt()
                } else {
                    scaled
                },
                rate_hz: rate_hz.unwrap_or(step_hz),
            },
        };
        noise::to_intensity(&figure).map_err(|e| loc.error(value.span(), &vfield, e.to_string()))?
    };
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
                unit: squared.clone(),
            });
            (r, format!("per-sample variance at {rate} Hz"))
        }
        Use::WalkVariance(t) => {
            let r = noise::random_walk_variance(w, t);
            steps.push(Step {
                what: format!("random-walk variance gained per step ({t} s)"),
                formula: "W t".into(),
                value: r,
                unit: squared.clone(),
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
    if (result == 0.0 && v != 0.0) || (result > 0.0 && result < f64::MIN_POSITIVE) {
        return Err(loc.error(
            value.span(),
            &vfield,
            format!(
                "converts to {result:e}: the value underflows f64 (below {:e}); give a larger figure or a coarser unit",
                f64::MIN_POSITIVE
            ),
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

/// The kind of figure a unit is for a quantity: "std", "density",
/// "random_walk" or "psd" (dimensions as in numeric::noise::convert).
fn classify(fig: &Unit, q: &Unit, text: &str) -> Option<&'static str> {
    let mut half_s = [0; BASE_DIMS];
    half_s[1] = 1;
    let sqrt_s = Unit {
        scale: 1.0,
        dims: half_s,
    };
    let s = sqrt_s.mul(&sqrt_s);
    let mut rad = [0; BASE_DIMS];
    rad[2] = 2;
    let rad = Unit {
        scale: 1.0,
        dims: rad,
    };
    let q2 = q.mul(q);
    if fig.same_dimension(q) {
        Some("std")
    } else if fig.same_dimension(&q.mul(&sqrt_s)) {
        Some(if text.contains("Hz") {
            "density"
        } else {
            "random_walk"
        })
    } else if fig.same_dimension(&q2.mul(&s)) || fig.same_dimension(&q2.mul(&s).div(&rad)) {
        Some("psd")
    } else {
        None
    }
}

/// What a unit of this kind looks like, for error messages.
fn expected_form(kind: &str, q: &str) -> String {
    match kind {
        "density" => format!("a density is in ({q})/sqrt(Hz)"),
        "random_walk" => format!("a random walk is in ({q})*sqrt(s), e.g. deg/sqrt(h) for deg/s"),
        "psd" => format!("a PSD is in ({q})^2/Hz or ({q})^2/(rad/s)"),
        "variance" => format!("a variance is in ({q})^2"),
        _ => format!("a standard deviation is in {q}"),
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
        .map_err(|e| SpecError {
            line: 0,
            column: 0,
            ..loc.from_toml(&e)
        })?;
    let purpose = rate.map_or(Use::Intensity, Use::SampleVariance);
    // The text was put together from the options: a line and column in it
    // would point at nothing the user wrote, so none is printed.
    convert(&loc, &fig, "figure", purpose, rate.unwrap_or(1.0), None)
        .map(|(_, r)| r)
        .map_err(|e| SpecError {
            line: 0,
            column: 0,
            ..e
        })
}
