//! Noise figures from the spec (density, PSD, random walk, per-sample
//! deviation, each with a unit) converted into the filter's numbers through
//! `numeric::noise`, keeping every step for the report.

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
    /// The term's own discrete number at this filter step rate, Hz (`cairn
    /// noise --rate`): a white noise's per-sample variance W / Ts (and what
    /// the integrated quantity gains per step), a rate random walk's
    /// Qd = K^2 T, a Gauss-Markov bias's Qd, a quantized reading's Q^2.
    Discrete(f64),
}

/// The terms of the inertial noise model beside white noise, each with its
/// own discrete model (IEEE Std 952-1997 names: B, K, Q).
const TERM_KINDS: [&str; 3] = ["bias_instability", "rate_random_walk", "quantization"];

pub use crate::numeric::conversion::{ConversionRecord, Step};

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
                "give one of `density`, `psd`, `random_walk`, `bias_instability`, `rate_random_walk`, `quantization`, `std` or `variance`",
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

    if kind != "bias_instability"
        && let Some(s) = &raw.correlation_s
    {
        return misplaced("correlation_s", s.span());
    }
    let known = raw
        .quantity
        .as_ref()
        .map(|q| (q.get_ref().trim().to_string(), Some(q.span())))
        .or_else(|| quantity.map(|q| (q.to_string(), None)));
    if kind == "random_walk" {
        refuse_bias_walk(loc, raw, field, v, &unit, known.as_ref(), purpose, step_hz)?;
    }
    if TERM_KINDS.contains(&kind) {
        return term(
            loc,
            fig,
            field,
            (kind, v, value.span()),
            &unit,
            known,
            purpose,
        );
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
        (None, Use::SampleVariance(rate) | Use::Discrete(rate)) => Some(rate),
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
    // The noisy quantity's unit: the one given, or (none given) the one the
    // figure's unit implies for its kind, in coherent base units.
    let q_text = match &quantity {
        Some((q, _)) => q.clone(),
        None => implied_quantity(loc, raw, field, kind, &unit, unit_text, per)?,
    };
    let squared = noise::squared(&q_text);
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
        // No quantity known: the field name says the kind, the unit scales
        // it to coherent units (m, s, rad, ...) and names the quantity's.
        let scaled = v * unit.scale;
        if unit.scale != 1.0 {
            let g = if q_text.chars().all(char::is_alphanumeric) {
                q_text.clone()
            } else {
                format!("({q_text})")
            };
            let per_text = if per == Some(PerFrequency::RadPerSecond) || unit_text.contains("rad/s")
            {
                "(rad/s)"
            } else {
                "Hz"
            };
            steps.push(Step {
                what: format!("{kind} in coherent units"),
                formula: format!("{unit_text} x {}", noise::number(unit.scale)),
                value: scaled,
                unit: match kind {
                    "density" => format!("{g}/sqrt(Hz)"),
                    "psd" => format!("{}/{per_text}", noise::squared(&q_text)),
                    "random_walk" => format!("{g}*sqrt(s)"),
                    "variance" => noise::squared(&q_text),
                    _ => q_text.clone(),
                },
            });
        }
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
        noise::to_intensity_in(&figure, &q_text)
            .map_err(|e| loc.error(value.span(), &vfield, e.to_string()))?
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
        Use::SampleVariance(rate) | Use::Discrete(rate) => {
            let r = noise::sample_variance(w, 1.0 / rate);
            steps.push(Step {
                what: format!("variance of one sample at {rate} Hz"),
                formula: "W / Ts".into(),
                value: r,
                unit: squared.clone(),
            });
            if matches!(purpose, Use::Discrete(_)) {
                // White noise on a rate: the integrated quantity is a
                // Wiener process, W T per step (IEEE Std 952-1997: N^2 T).
                steps.push(Step {
                    what: "if on a rate: the integrated quantity gains per step".into(),
                    formula: "W T (N^2 T: its Q entry)".into(),
                    value: noise::random_walk_variance(w, 1.0 / rate),
                    unit: format!("{squared}*s^2"),
                });
                (
                    r,
                    format!(
                        "per-sample variance at {rate} Hz (white noise: R of a reading, or a predict's input noise on the rate)"
                    ),
                )
            } else {
                (r, format!("per-sample variance at {rate} Hz"))
            }
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
    let mut given = format!("{kind} = {v:?} {unit_text}");
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

fn sqrt_second() -> Unit {
    let mut d = [0; BASE_DIMS];
    d[1] = 1;
    Unit {
        scale: 1.0,
        dims: d,
    }
}

/// Refuses a `random_walk` whose unit is that of a rate random walk K (the
/// random walk of a bias, per sqrt(s) of the rate) where the figure would
/// become a per-sample variance: K^2/Ts there is Ts^2 times the K^2 T a
/// bias state needs per step. In a continuous model the same unit on the
/// column into a bias state is right (W = K^2) and passes.
#[allow(clippy::too_many_arguments)]
fn refuse_bias_walk(
    loc: &Locator<'_>,
    raw: &RawNoise,
    field: &str,
    v: f64,
    unit: &Unit,
    quantity: Option<&(String, Option<std::ops::Range<usize>>)>,
    purpose: Use,
    step_hz: f64,
) -> Result<(), SpecError> {
    let looks_like_k = match quantity {
        Some((q, _)) => match noise::parse_unit(q) {
            Ok(qu) => {
                !matches!(purpose, Use::Intensity) && unit.same_dimension(&qu.div(&sqrt_second()))
            }
            Err(_) => false,
        },
        None => {
            // An angle per s^(3/2) (a gyro's K) or a length per s^(5/2)
            // (an accelerometer's K); dims are twice the exponents.
            let mut gyro = [0; BASE_DIMS];
            gyro[1] = -3;
            gyro[2] = 2;
            let mut accel = [0; BASE_DIMS];
            accel[0] = 2;
            accel[1] = -5;
            unit.dims == gyro || unit.dims == accel
        }
    };
    if !looks_like_k {
        return Ok(());
    }
    let k = v * unit.scale;
    let t = 1.0 / step_hz;
    Err(loc.error(
        raw.unit.span(),
        &format!("{field}.random_walk"),
        format!(
            "`{}` is the unit of a rate random walk K (the random walk of the sensor's bias, Allan slope +1/2), \
             not of the white-noise random walk N that `random_walk` means (angle or velocity random walk, \
             e.g. deg/sqrt(h) or deg/s/sqrt(Hz) for a gyro). Write `rate_random_walk = {v}`: it drives a \
             random-walk bias state with Qd = K^2 T per step ({:e} in coherent units at T = {t} s), \
             not a per-sample variance (K^2/T = {:e}, {:e} times too large)",
            raw.unit.get_ref(),
            k * k * t,
            k * k / t,
            1.0 / (t * t)
        ),
    ))
}

/// Converts a bias instability B, a rate random walk K or a quantization
/// noise Q for `purpose`, each by its own discrete model
/// ([`noise::gauss_markov_state`], [`noise::rate_random_walk_state`],
/// [`noise::quantization_numbers`]).
fn term(
    loc: &Locator<'_>,
    fig: &Spanned<RawNoise>,
    field: &str,
    (kind, v, vspan): (&str, f64, std::ops::Range<usize>),
    unit: &Unit,
    quantity: Option<(String, Option<std::ops::Range<usize>>)>,
    purpose: Use,
) -> Result<(f64, ConversionRecord), SpecError> {
    let raw = fig.get_ref();
    let vfield = format!("{field}.{kind}");
    let ufield = format!("{field}.unit");
    let unit_text = raw.unit.get_ref().trim();
    let symbol = match kind {
        "bias_instability" => "B",
        "rate_random_walk" => "K",
        _ => "Q",
    };
    let second = sqrt_second().mul(&sqrt_second());
    // The rate the term belongs to: the reading itself, or in a continuous
    // model the state the column drives (the white noise's unit times s).
    let rate = match &quantity {
        Some((q, qspan)) => {
            let qu = noise::parse_unit(q).map_err(|e| {
                loc.error(
                    qspan.clone().unwrap_or(fig.span()),
                    &format!("{field}.quantity"),
                    e.to_string(),
                )
            })?;
            Some(match purpose {
                Use::Intensity => (qu.mul(&second), format!("({q})*s")),
                _ => (qu, q.clone()),
            })
        }
        None => None,
    };
    // The value in the rate's units (coherent base units when no quantity
    // is known: the rate's unit then follows from the figure's); for Q,
    // whether it is the integrated quantity's (the reading is a rate).
    let (value, of_integral, in_units, factor) = match &rate {
        Some((b, text)) => {
            let expected = match kind {
                "bias_instability" => b.clone(),
                "rate_random_walk" => b.div(&sqrt_second()),
                _ => b.mul(&second),
            };
            let f = unit.scale / b.scale;
            if unit.same_dimension(&expected) {
                (v * f, true, text.clone(), f)
            } else if kind == "quantization" && unit.same_dimension(b) {
                (v * f, false, text.clone(), f)
            } else {
                let form = match kind {
                    "bias_instability" => {
                        format!("a bias instability is in {text}, the unit of the rate it offsets")
                    }
                    "rate_random_walk" => format!(
                        "a rate random walk is in ({text})/sqrt(s), e.g. deg/s/sqrt(s) or deg/h/sqrt(h) for deg/s"
                    ),
                    _ => format!(
                        "a quantization noise is in ({text})*s, the integrated quantity (deg for a rate in deg/s), or in {text} for a reading of it"
                    ),
                };
                return Err(loc.error(
                    raw.unit.span(),
                    &ufield,
                    format!(
                        "`{unit_text}` does not fit a `{kind}` of a quantity in `{text}`: {form}"
                    ),
                ));
            }
        }
        None => {
            let q = if kind == "rate_random_walk" {
                unit.mul(&sqrt_second())
            } else {
                unit.clone()
            };
            (v * unit.scale, false, q.coherent_text(), unit.scale)
        }
    };
    let squared = noise::squared(&in_units);
    let p = if in_units.chars().all(char::is_alphanumeric) {
        in_units.clone()
    } else {
        format!("({in_units})")
    };
    let term_unit = match (kind, of_integral) {
        ("rate_random_walk", _) => format!("{p}/sqrt(s)"),
        ("quantization", true) => format!("{p}*s"),
        _ => in_units.clone(),
    };
    let mut steps = vec![Step {
        what: format!("{symbol} in the quantity's units"),
        formula: format!("{unit_text} x {}", noise::number(factor)),
        value,
        unit: term_unit,
    }];
    let refuse = |why: String| Err(loc.error(fig.span(), field, why));
    let (result, result_is) = match (kind, purpose) {
        ("rate_random_walk", Use::Intensity) => {
            let w = value * value;
            steps.push(Step {
                what: "two-sided intensity of the bias's random walk".into(),
                formula: "W = K^2".into(),
                value: w,
                unit: format!("{squared}/s"),
            });
            (w, "two-sided intensity W = K^2 driving a random-walk bias state (Qc entry; Qd = K^2 T per step)".to_string())
        }
        ("rate_random_walk", Use::Discrete(hz)) => {
            let t = 1.0 / hz;
            let rw = noise::rate_random_walk_state(value, t);
            steps.push(Step {
                what: format!("variance a random-walk bias state gains per step (T = {t} s)"),
                formula: "Qd = K^2 T (phi = 1)".into(),
                value: rw.qd,
                unit: squared.clone(),
            });
            steps.push(Step {
                what: "not a per-sample variance: K^2/T would be".into(),
                formula: "K^2 / T (wrong here)".into(),
                value: value * value / t,
                unit: squared.clone(),
            });
            (
                rw.qd,
                format!("Qd of a random-walk bias state per step at {hz} Hz (phi = 1)"),
            )
        }
        ("rate_random_walk", _) => {
            return refuse(
                "a rate random walk K drives a random-walk bias state (Qd = K^2 T per step), it is not the white noise of a reading: \
                 put the bias in the model as a state and give `rate_random_walk` as the `noise` of the column of `g` that drives it"
                    .to_string(),
            );
        }
        ("bias_instability", Use::Intensity | Use::Discrete(_)) => {
            let Some(c) = &raw.correlation_s else {
                return refuse(
                    "a bias instability is modelled as a first-order Gauss-Markov bias state: give its correlation time \
                     `correlation_s` in seconds (`cairn allan` estimates one from a recorded log)"
                        .to_string(),
                );
            };
            let tc = *c.get_ref();
            if !(tc.is_finite() && tc > 0.0) {
                return Err(loc.error(
                    c.span(),
                    &format!("{field}.correlation_s"),
                    format!("a correlation time must be positive, got {tc}"),
                ));
            }
            let sigma = noise::bias_instability_sigma(value);
            steps.push(Step {
                what:
                    "steady sigma of the Gauss-Markov bias (Allan peak 0.617 sigma = floor 0.664 B)"
                        .into(),
                formula: "sigma = 0.664 B / 0.617".into(),
                value: sigma,
                unit: in_units.clone(),
            });
            if let Use::Discrete(hz) = purpose {
                let t = 1.0 / hz;
                let gm = noise::gauss_markov_state(sigma, tc, t);
                steps.push(Step {
                    what: format!("transition over one step (T = {t} s)"),
                    formula: "phi = exp(-T/tau_c)".into(),
                    value: gm.phi,
                    unit: String::new(),
                });
                steps.push(Step {
                    what: "variance the bias state gains per step".into(),
                    formula: "Qd = sigma^2 (1 - exp(-2T/tau_c))".into(),
                    value: gm.qd,
                    unit: squared.clone(),
                });
                (
                    gm.qd,
                    format!(
                        "Qd of a Gauss-Markov bias state per step at {hz} Hz (phi = 1 - {}, steady variance {})",
                        noise::number(1.0 - gm.phi),
                        noise::number(sigma * sigma)
                    ),
                )
            } else {
                let w = 2.0 * sigma * sigma / tc;
                steps.push(Step {
                    what: "two-sided intensity driving it".into(),
                    formula: "W = 2 sigma^2 / tau_c".into(),
                    value: w,
                    unit: format!("{squared}/s"),
                });
                (
                    w,
                    format!(
                        "two-sided intensity W = 2 sigma^2 / tau_c driving a Gauss-Markov bias state (Qc entry; its diagonal of `a` is -1/tau_c = {})",
                        noise::number(-1.0 / tc)
                    ),
                )
            }
        }
        ("bias_instability", _) => {
            return refuse(
                "a bias instability B drives a Gauss-Markov bias state (Qd = sigma^2 (1 - exp(-2T/tau_c))), it is not the white noise of a reading: \
                 put the bias in a continuous model as a state with a = -1/correlation_s and give `bias_instability` as the `noise` of the column of `g` that drives it"
                    .to_string(),
            );
        }
        ("quantization", Use::SampleVariance(hz) | Use::Discrete(hz)) => {
            let (reading, rate_var) = noise::quantization_numbers(value, 1.0 / hz);
            if of_integral {
                steps.push(Step {
                    what: format!("variance of a rate formed from two readings at {hz} Hz"),
                    formula: "2 Q^2 / Ts^2".into(),
                    value: rate_var,
                    unit: squared.clone(),
                });
                (
                    rate_var,
                    format!(
                        "per-sample variance at {hz} Hz of a rate from quantized readings (white approximation: neighbours correlate -1/2)"
                    ),
                )
            } else {
                steps.push(Step {
                    what: "variance of one quantized reading".into(),
                    formula: "Q^2".into(),
                    value: reading,
                    unit: squared.clone(),
                });
                (
                    reading,
                    "variance of one quantized reading of the integrated quantity (R entry)"
                        .to_string(),
                )
            }
        }
        _ => {
            return refuse(
                "quantization noise is the error of each reading, not white noise driving a state: give it as a channel's noise \
                 (R = Q^2 for a reading of the integrated quantity)"
                    .to_string(),
            );
        }
    };
    if !(result.is_finite() && result >= 0.0)
        || (result == 0.0 && v != 0.0)
        || (result > 0.0 && result < f64::MIN_POSITIVE)
    {
        return Err(loc.error(
            vspan,
            &vfield,
            format!(
                "converts to an unusable value {result:e}; give a larger figure or a coarser unit"
            ),
        ));
    }
    let mut given = format!("{kind} = {v:?} {unit_text}");
    if let Some(c) = &raw.correlation_s {
        given.push_str(&format!(", correlation {} s", c.get_ref()));
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

/// The noisy quantity's unit a figure's own unit implies for its kind, in
/// coherent base units ("deg/s/sqrt(Hz)" for a density: "rad/s"), when no
/// quantity is given; a unit that leaves a half power (a density in "m",
/// with no per-root-hertz) does not fit the kind and is refused.
fn implied_quantity(
    loc: &Locator<'_>,
    raw: &RawNoise,
    field: &str,
    kind: &str,
    unit: &Unit,
    unit_text: &str,
    per: Option<PerFrequency>,
) -> Result<String, SpecError> {
    let sqrt_s = sqrt_second();
    let s = sqrt_s.mul(&sqrt_s);
    let mut rad_dims = [0; BASE_DIMS];
    rad_dims[2] = 2;
    let rad = Unit {
        scale: 1.0,
        dims: rad_dims,
    };
    let q = match kind {
        "density" | "random_walk" => Some(unit.div(&sqrt_s)),
        "psd" if per == Some(PerFrequency::RadPerSecond) || unit_text.contains("rad/s") => {
            unit.mul(&rad).div(&s).powh(1)
        }
        "psd" => unit.div(&s).powh(1),
        "variance" => unit.powh(1),
        _ => Some(unit.clone()),
    };
    match q {
        Some(q) if q.is_whole() => Ok(q.coherent_text()),
        _ => Err(loc.error(
            raw.unit.span(),
            &format!("{field}.unit"),
            format!(
                "`{unit_text}` does not fit a `{kind}`: {}",
                expected_form(kind, "quantity")
            ),
        )),
    }
}

/// What a unit of this kind looks like, for error messages.
fn expected_form(kind: &str, q: &str) -> String {
    match kind {
        "density" => format!("a density is in ({q})/sqrt(Hz), e.g. deg/s/sqrt(Hz) for deg/s"),
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
    let purpose = rate.map_or(Use::Intensity, Use::Discrete);
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
