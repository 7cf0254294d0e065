//! Checks a raw spec and turns it into a [`Plan`]: dimensions, symmetry,
//! definiteness, signs, rates and units, each error located in the file.

use std::ops::Range;
use std::path::Path;

use nalgebra::DMatrix;
use toml::Spanned;

use super::error::{Locator, SpecError};
use super::figures::{self, ConversionRecord, Use};
use super::raw::{RawChannel, RawMatrix, RawModel, RawNoise, RawSpec, RawVector};
use super::{
    ChannelKind, ChannelPlan, ExternalReference, Flash, Mode, ModelPlan, Plan, Precision, Profile,
    Segment, StateInfo, Thresholds,
};
use crate::numeric::vanloan;
use crate::output::one_line;

/// Largest supported state dimension.
pub const MAX_STATES: usize = crate::run::MAX_STATES;
/// Largest supported measurement dimension per channel.
pub const MAX_COMPONENTS: usize = crate::run::MAX_COMPONENTS;
/// Largest horizon in steps (about 58 days at 200 Hz).
const MAX_STEPS: f64 = 1e9;

type R<T> = Result<T, SpecError>;

pub(super) fn plan(loc: &Locator<'_>, raw: RawSpec, base: Option<&Path>) -> R<Plan> {
    let mut conversions = Vec::new();

    // States.
    if raw.state.is_empty() {
        return Err(loc.error(0..0, "state", "at least one [[state]] is required"));
    }
    let n = raw.state.len();
    // A user's own model is compiled at its own size.
    let own = raw.model.get_ref().kind.get_ref() == "own";
    if n > MAX_STATES && !own {
        return Err(loc.error(
            raw.state[MAX_STATES].span(),
            "state",
            format!("{n} states: the verifier supports 1 to {MAX_STATES} states"),
        ));
    }
    let mut states = Vec::with_capacity(n);
    for s in &raw.state {
        let s = s.get_ref();
        let name = one_line(s.name.get_ref().trim());
        if name.is_empty() {
            return Err(loc.error(s.name.span(), "state.name", "empty state name"));
        }
        if states.iter().any(|o: &StateInfo| o.name == name) {
            return Err(loc.error(
                s.name.span(),
                "state.name",
                format!("state `{name}` is named twice"),
            ));
        }
        states.push(StateInfo {
            name,
            unit: one_line(s.unit.get_ref()),
        });
    }

    // Step rate and horizon.
    let model = raw.model.get_ref();
    let step_hz = positive(loc, &model.step_hz, "model.step_hz")?;
    if step_hz > 1e6 {
        return Err(loc.error(
            model.step_hz.span(),
            "model.step_hz",
            format!("{step_hz} Hz: the verifier supports step rates up to 1 MHz"),
        ));
    }
    let dt = 1.0 / step_hz;
    let steps = horizon(loc, &raw, step_hz)?;

    // Initial state.
    let start = raw.start.get_ref();
    let x0 = vector(loc, &start.x, "start.x", n)?;
    let p0 = covariance_choice(
        loc,
        raw.start.span(),
        "start",
        n,
        (start.p.as_ref(), "start.p"),
        start.p_diag.as_ref().map(|v| (v, "start.p_diag", false)),
        start.std.as_ref().map(|v| (v, "start.std", true)),
        true,
    )?;

    // Process model.
    let kind = model.kind.get_ref().as_str();
    let mut recentre_m = None;
    let (model_plan, mode) = match kind {
        "discrete" => {
            forbid_pose_fields(loc, model, kind)?;
            forbid(loc, model.a.as_ref().map(Spanned::span), "model.a", kind)?;
            forbid(loc, model.g.as_ref().map(Spanned::span), "model.g", kind)?;
            forbid(
                loc,
                model.noise.as_ref().map(Spanned::span),
                "model.noise",
                kind,
            )?;
            forbid(
                loc,
                model.mode.as_ref().map(Spanned::span),
                "model.mode",
                kind,
            )?;
            let f = need(loc, model.f.as_ref(), raw.model.span(), "model.f", kind)?;
            let f = matrix(loc, f, "model.f", n, n)?;
            let q = covariance_choice(
                loc,
                raw.model.span(),
                "model.q",
                n,
                (model.q.as_ref(), "model.q"),
                model.q_diag.as_ref().map(|v| (v, "model.q_diag", false)),
                None,
                false,
            )?;
            (
                ModelPlan::Linear {
                    f,
                    q,
                    discretised: false,
                },
                Mode::Covariance,
            )
        }
        "continuous" => {
            forbid_pose_fields(loc, model, kind)?;
            forbid(loc, model.f.as_ref().map(Spanned::span), "model.f", kind)?;
            forbid(loc, model.q.as_ref().map(Spanned::span), "model.q", kind)?;
            forbid(
                loc,
                model.q_diag.as_ref().map(Spanned::span),
                "model.q_diag",
                kind,
            )?;
            forbid(
                loc,
                model.mode.as_ref().map(Spanned::span),
                "model.mode",
                kind,
            )?;
            let a = need(loc, model.a.as_ref(), raw.model.span(), "model.a", kind)?;
            let a = matrix(loc, a, "model.a", n, n)?;
            let g_raw = need(loc, model.g.as_ref(), raw.model.span(), "model.g", kind)?;
            let cols = g_raw.get_ref().first().map_or(0, Vec::len);
            if cols == 0 {
                return Err(loc.error(g_raw.span(), "model.g", "the noise-input matrix is empty"));
            }
            let g = matrix(loc, g_raw, "model.g", n, cols)?;
            let noise = need(
                loc,
                model.noise.as_ref(),
                raw.model.span(),
                "model.noise",
                kind,
            )?;
            if noise.get_ref().len() != cols {
                return Err(loc.error(
                    noise.span(),
                    "model.noise",
                    format!(
                        "{} noise figures for {cols} columns of model.g: give one per column",
                        noise.get_ref().len()
                    ),
                ));
            }
            let mut qc = DMatrix::zeros(cols, cols);
            for (i, fig) in noise.get_ref().iter().enumerate() {
                let field = format!("model.noise[{i}]");
                let quantity = selected_state(&g, i, true)
                    .and_then(|r| parsed_unit(&states[r].unit))
                    .map(|u| format!("({u})/s"));
                let (w, rec) = figures::convert(
                    loc,
                    fig,
                    &field,
                    Use::Intensity,
                    step_hz,
                    quantity.as_deref(),
                )?;
                // A bias instability is a Gauss-Markov state: its row of
                // `a` must decay at the figure's correlation time.
                if let (Some(_), Some(c), Some(r)) = (
                    fig.get_ref().bias_instability.as_ref(),
                    fig.get_ref().correlation_s.as_ref(),
                    selected_state(&g, i, true),
                ) {
                    let want = -1.0 / *c.get_ref();
                    if ((a[(r, r)] - want) / want).abs() > 1e-6 {
                        return Err(loc.error(
                            c.span(),
                            &format!("{field}.correlation_s"),
                            format!(
                                "a bias instability drives a Gauss-Markov state: model.a[{r}][{r}] must be -1/correlation_s = {want:e}, it is {:e}",
                                a[(r, r)]
                            ),
                        ));
                    }
                }
                qc[(i, i)] = w;
                conversions.push(rec);
            }
            let (f, q) = vanloan::discretize(&a, &g, &qc, dt).map_err(|e| {
                loc.error(
                    raw.model.span(),
                    "model.a",
                    format!("cannot discretise the continuous model: {e}"),
                )
            })?;
            let q = (&q + q.transpose()) * 0.5;
            (
                ModelPlan::Linear {
                    f,
                    q,
                    discretised: true,
                },
                Mode::Covariance,
            )
        }
        "planar-pose" => {
            for (s, f) in [
                (model.f.as_ref().map(Spanned::span), "model.f"),
                (model.q.as_ref().map(Spanned::span), "model.q"),
                (model.a.as_ref().map(Spanned::span), "model.a"),
                (model.g.as_ref().map(Spanned::span), "model.g"),
            ] {
                forbid(loc, s, f, kind)?;
            }
            forbid(
                loc,
                model.q_diag.as_ref().map(Spanned::span),
                "model.q_diag",
                kind,
            )?;
            forbid(
                loc,
                model.noise.as_ref().map(Spanned::span),
                "model.noise",
                kind,
            )?;
            if n != 3 {
                return Err(loc.error(
                    model.kind.span(),
                    "model.kind",
                    format!(
                        "the planar pose model has 3 states (x, y, heading), the spec lists {n}"
                    ),
                ));
            }
            let speed = need(
                loc,
                model.speed_noise.as_ref(),
                raw.model.span(),
                "model.speed_noise",
                kind,
            )?;
            let (speed_var, rec) = figures::convert(
                loc,
                speed,
                "model.speed_noise",
                Use::SampleVariance(step_hz),
                step_hz,
                Some("m/s"),
            )?;
            conversions.push(rec);
            let yaw = need(
                loc,
                model.yaw_rate_noise.as_ref(),
                raw.model.span(),
                "model.yaw_rate_noise",
                kind,
            )?;
            let (yaw_rate_var, rec) = figures::convert(
                loc,
                yaw,
                "model.yaw_rate_noise",
                Use::SampleVariance(step_hz),
                step_hz,
                Some("rad/s"),
            )?;
            conversions.push(rec);
            let heading_drift_var = match model.heading_drift.as_ref() {
                Some(fig) => {
                    let (v, rec) = figures::convert(
                        loc,
                        fig,
                        "model.heading_drift",
                        Use::WalkVariance(dt),
                        step_hz,
                        Some("rad/s"),
                    )?;
                    conversions.push(rec);
                    v
                }
                None => 0.0,
            };
            let profile = profile(loc, model, raw.model.span(), base)?;
            let mode = nonlinear_mode(loc, model)?;
            recentre_m = origin_shift(loc, model)?;
            (
                ModelPlan::Pose {
                    speed_var,
                    yaw_rate_var,
                    heading_drift_var,
                    profile,
                    profile_csv: model
                        .profile_csv
                        .as_ref()
                        .map(|c| base.map_or_else(|| c.get_ref().into(), |b| b.join(c.get_ref()))),
                },
                mode,
            )
        }
        "own" => {
            for (s, f) in [
                (model.f.as_ref().map(Spanned::span), "model.f"),
                (model.q.as_ref().map(Spanned::span), "model.q"),
                (model.a.as_ref().map(Spanned::span), "model.a"),
                (model.g.as_ref().map(Spanned::span), "model.g"),
                (model.q_diag.as_ref().map(Spanned::span), "model.q_diag"),
                (model.noise.as_ref().map(Spanned::span), "model.noise"),
                (model.profile.as_ref().map(Spanned::span), "model.profile"),
                (
                    model.profile_csv.as_ref().map(Spanned::span),
                    "model.profile_csv",
                ),
            ] {
                forbid(loc, s, f, kind)?;
            }
            for (s, f) in [
                (
                    model.speed_noise.as_ref().map(Spanned::span),
                    "model.speed_noise",
                ),
                (
                    model.yaw_rate_noise.as_ref().map(Spanned::span),
                    "model.yaw_rate_noise",
                ),
                (
                    model.heading_drift.as_ref().map(Spanned::span),
                    "model.heading_drift",
                ),
            ] {
                forbid(loc, s, f, kind)?;
            }
            recentre_m = origin_shift(loc, model)?;
            (
                ModelPlan::User {
                    description: model
                        .description
                        .as_ref()
                        .map_or_else(|| "own model".to_string(), |d| one_line(d.get_ref())),
                },
                nonlinear_mode(loc, model)?,
            )
        }
        other => {
            return Err(loc.error(
                model.kind.span(),
                "model.kind",
                format!("unknown model kind `{other}`: use \"continuous\", \"discrete\", \"planar-pose\" or \"own\""),
            ));
        }
    };
    let pose = matches!(model_plan, ModelPlan::Pose { .. });
    if !own && let Some(d) = &model.description {
        forbid(loc, Some(d.span()), "model.description", kind)?;
    }

    // Channels.
    let mut channels = Vec::with_capacity(raw.channel.len());
    for (ci, ch) in raw.channel.iter().enumerate() {
        let c = if own {
            own_channel(loc, ch, ci, step_hz)?
        } else {
            channel(loc, ch, ci, &states, step_hz, pose, &mut conversions)?
        };
        // A dropout window that starts at or after the end of the horizon
        // never takes effect: most likely a typo (seconds for hours).
        let end_s = steps as f64 / step_hz;
        if let Some(d) = &ch.get_ref().dropouts
            && let Some((w, &(a, _))) = d
                .get_ref()
                .iter()
                .zip(&c.dropouts)
                .find(|(_, w)| w.0 >= end_s)
        {
            return Err(loc.error(
                w.span(),
                &format!("channel[{ci}].dropouts"),
                format!(
                    "the window starts at {a} s, at or after the end of the horizon ({end_s} s): it would never apply"
                ),
            ));
        }
        if channels.iter().any(|o: &ChannelPlan| o.name == c.name) {
            return Err(loc.error(
                ch.get_ref().name.span(),
                "channel.name",
                format!("channel `{}` is named twice", c.name),
            ));
        }
        channels.push(c);
    }

    // Verdict thresholds.
    let mut thresholds = Thresholds::default();
    if let Some(v) = raw.verdict.as_ref() {
        let v = v.get_ref();
        if let Some(t) = &v.max_relative_error {
            thresholds.max_relative_error = positive(loc, t, "verdict.max_relative_error")?;
        }
        if let Some(t) = &v.max_asymmetry {
            thresholds.max_asymmetry = positive(loc, t, "verdict.max_asymmetry")?;
        }
        if let Some(t) = &v.max_gain_error {
            thresholds.max_gain_error = positive(loc, t, "verdict.max_gain_error")?;
        }
        match (&v.max_state_difference_sd, &v.max_state_difference) {
            (Some(_), Some(old)) => {
                return Err(loc.error(
                    old.span(),
                    "verdict.max_state_difference",
                    "give `max_state_difference_sd` only (`max_state_difference` is its old name)"
                        .to_string(),
                ));
            }
            (Some(t), None) => {
                thresholds.max_state_difference_sigma =
                    positive(loc, t, "verdict.max_state_difference_sd")?;
            }
            (None, Some(old)) => {
                deprecated(
                    loc,
                    "verdict.max_state_difference",
                    "verdict.max_state_difference_sd",
                );
                thresholds.max_state_difference_sigma =
                    positive(loc, old, "verdict.max_state_difference")?;
            }
            (None, None) => {}
        }
        if let Some(t) = &v.max_steady_distance {
            thresholds.max_steady_distance = Some(positive(loc, t, "verdict.max_steady_distance")?);
        }
        if let Some(t) = &v.max_transient_excess {
            thresholds.max_transient_excess =
                Some(positive(loc, t, "verdict.max_transient_excess")?);
        }
    }
    if let Some(m) = raw.mission.as_ref() {
        thresholds.mission_seconds = Some(mission(loc, m)?);
    }

    // Variant to flash.
    let mut flash = Flash {
        precision: Precision::F32,
        form: "joseph".into(),
    };
    if let Some(fl) = raw.flash.as_ref() {
        let fl = fl.get_ref();
        let given = match (&fl.precision, &fl.scalar) {
            (Some(_), Some(old)) => {
                return Err(loc.error(
                    old.span(),
                    "flash.scalar",
                    "give `precision` only (`scalar` is its old name)".to_string(),
                ));
            }
            (Some(p), None) => Some((p, "flash.precision")),
            (None, Some(old)) => {
                deprecated(loc, "flash.scalar", "flash.precision");
                Some((old, "flash.scalar"))
            }
            (None, None) => None,
        };
        if let Some((s, field)) = given {
            flash.precision = match s.get_ref().as_str() {
                "f32" => Precision::F32,
                "f64" => Precision::F64,
                other => {
                    return Err(loc.error(
                        s.span(),
                        field,
                        format!("unknown precision `{other}`: use \"f32\" or \"f64\""),
                    ));
                }
            };
        }
        if let Some(f) = &fl.form {
            flash.form = f.get_ref().clone();
        }
        if crate::engine::Variant::find(flash.precision, &flash.form).is_none() {
            let span = fl.form.as_ref().map_or(0..0, Spanned::span);
            return Err(loc.error(
                span,
                "flash.form",
                format!(
                    "no variant `{} {}`; known forms: {}",
                    flash.precision.name(),
                    flash.form,
                    crate::engine::filter::form_names().join(", ")
                ),
            ));
        }
    }

    // External reference.
    let external = match raw.reference.as_ref() {
        None => None,
        Some(r) => {
            let r = r.get_ref();
            let path = base.map_or_else(|| r.csv.get_ref().into(), |b| b.join(r.csv.get_ref()));
            if !path.is_file() {
                return Err(loc.error(
                    r.csv.span(),
                    "reference.csv",
                    format!("no such file: {}", path.display()),
                ));
            }
            let tolerance = match &r.tolerance {
                Some(t) => positive(loc, t, "reference.tolerance")?,
                None => 1e-6,
            };
            Some(ExternalReference { path, tolerance })
        }
    };

    let seed = raw.seed.as_ref().map_or(0x5eed_ca1f, |s| *s.get_ref());

    Ok(Plan {
        title: one_line(raw.title.as_deref().unwrap_or(loc.file())),
        file: one_line(loc.file()),
        states,
        step_hz,
        steps,
        x0,
        p0,
        model: model_plan,
        channels,
        thresholds,
        flash,
        mode,
        recentre_m,
        external,
        conversions,
        seed,
    })
}

/// Longest mission, s (100 years).
pub const MAX_MISSION_S: f64 = 100.0 * 365.25 * 86_400.0;

fn mission(loc: &Locator<'_>, m: &Spanned<super::raw::RawMission>) -> R<f64> {
    let r = m.get_ref();
    let s = match (&r.seconds, &r.hours, &r.days) {
        (Some(s), None, None) => positive(loc, s, "mission.seconds")?,
        (None, Some(h), None) => positive(loc, h, "mission.hours")? * 3600.0,
        (None, None, Some(d)) => positive(loc, d, "mission.days")? * 86_400.0,
        _ => {
            return Err(loc.error(
                m.span(),
                "mission",
                "give exactly one of `seconds`, `hours` or `days`",
            ));
        }
    };
    if s > MAX_MISSION_S {
        return Err(loc.error(
            m.span(),
            "mission",
            format!("a mission of {s:e} s is longer than 100 years"),
        ));
    }
    Ok(s)
}

fn horizon(loc: &Locator<'_>, raw: &RawSpec, step_hz: f64) -> R<u64> {
    let h = raw.horizon.get_ref();
    let given = [h.seconds.is_some(), h.hours.is_some(), h.steps.is_some()]
        .iter()
        .filter(|b| **b)
        .count();
    if given != 1 {
        return Err(loc.error(
            raw.horizon.span(),
            "horizon",
            "give exactly one of `seconds`, `hours` or `steps`",
        ));
    }
    let steps = if let Some(s) = &h.steps {
        let v = *s.get_ref();
        if v <= 0 || v as f64 > MAX_STEPS {
            return Err(loc.error(
                s.span(),
                "horizon.steps",
                format!("{v} steps: use 1 to {MAX_STEPS}"),
            ));
        }
        v as f64
    } else if let Some(s) = &h.seconds {
        (positive(loc, s, "horizon.seconds")? * step_hz).round()
    } else if let Some(s) = &h.hours {
        (positive(loc, s, "horizon.hours")? * 3600.0 * step_hz).round()
    } else {
        0.0
    };
    if !(1.0..=MAX_STEPS).contains(&steps) {
        return Err(loc.error(
            raw.horizon.span(),
            "horizon",
            format!("the horizon is {steps} steps: use 1 to {MAX_STEPS}"),
        ));
    }
    Ok(steps as u64)
}

/// "covariance" (the default) or "end-to-end".
fn nonlinear_mode(loc: &Locator<'_>, model: &RawModel) -> R<Mode> {
    Ok(match model.mode.as_ref() {
        None => Mode::Covariance,
        Some(m) => match m.get_ref().as_str() {
            "covariance" => Mode::Covariance,
            "end-to-end" => Mode::EndToEnd,
            other => {
                return Err(loc.error(
                    m.span(),
                    "model.mode",
                    format!("unknown mode `{other}`: use \"covariance\" or \"end-to-end\""),
                ));
            }
        },
    })
}

/// A channel of a user's own model: its schedule only (the model brings
/// h, H and R).
fn own_channel(
    loc: &Locator<'_>,
    ch: &Spanned<RawChannel>,
    ci: usize,
    step_hz: f64,
) -> R<ChannelPlan> {
    let c = ch.get_ref();
    let at = |f: &str| format!("channel[{ci}].{f}");
    for (s, f) in [
        (c.fix.as_ref().map(Spanned::span), "fix"),
        (c.h.as_ref().map(Spanned::span), "h"),
        (c.r.as_ref().map(Spanned::span), "r"),
        (c.r_diag.as_ref().map(Spanned::span), "r_diag"),
        (c.noise.as_ref().map(Spanned::span), "noise"),
    ] {
        if let Some(span) = s {
            return Err(loc.error(
                span,
                &at(f),
                format!(
                    "`{f}` is not given for an own model's channel: the model brings h, H and R"
                ),
            ));
        }
    }
    let m = match &c.components {
        Some(m) if *m.get_ref() >= 1 => *m.get_ref(),
        Some(m) => {
            return Err(loc.error(m.span(), &at("components"), "at least one component"));
        }
        None => {
            return Err(loc.error(
                ch.span(),
                &at("components"),
                "missing `components` (the measurement's size)",
            ));
        }
    };
    let mut plan = schedule(loc, ch, ci, step_hz)?;
    plan.m = m;
    plan.r = DMatrix::zeros(m, m);
    Ok(plan)
}

/// A channel's name, rate, dropouts and gate.
fn schedule(
    loc: &Locator<'_>,
    ch: &Spanned<RawChannel>,
    ci: usize,
    step_hz: f64,
) -> R<ChannelPlan> {
    let c = ch.get_ref();
    let name = one_line(c.name.get_ref().trim());
    let at = |f: &str| format!("channel[{ci}].{f}");
    if name.is_empty() {
        return Err(loc.error(c.name.span(), &at("name"), "empty channel name"));
    }
    let rate_hz = positive(loc, &c.rate_hz, &at("rate_hz"))?;
    if rate_hz > step_hz * (1.0 + 1e-12) {
        return Err(loc.error(
            c.rate_hz.span(),
            &at("rate_hz"),
            format!("{rate_hz} Hz is faster than the filter's step rate ({step_hz} Hz)"),
        ));
    }
    let mut dropouts = Vec::new();
    if let Some(d) = &c.dropouts {
        for w in d.get_ref() {
            let v = w.get_ref();
            if v.len() != 2 || !(v[0].is_finite() && v[1].is_finite()) || v[0] < 0.0 || v[1] <= v[0]
            {
                return Err(loc.error(
                    w.span(),
                    &at("dropouts"),
                    "a dropout window is [start_s, end_s] with 0 <= start < end",
                ));
            }
            dropouts.push((v[0], v[1]));
        }
    }
    let gate = match &c.gate {
        Some(g) => Some(positive(loc, g, &at("gate"))?),
        None => None,
    };
    Ok(ChannelPlan {
        name,
        m: 0,
        kind: ChannelKind::User,
        r: DMatrix::zeros(0, 0),
        rate_hz,
        dropouts,
        gate,
        line: loc.line_col(ch.span().start).0,
    })
}

fn channel(
    loc: &Locator<'_>,
    ch: &Spanned<RawChannel>,
    ci: usize,
    states: &[StateInfo],
    step_hz: f64,
    pose: bool,
    conversions: &mut Vec<ConversionRecord>,
) -> R<ChannelPlan> {
    let c = ch.get_ref();
    let n = states.len();
    let at = |f: &str| format!("channel[{ci}].{f}");
    let sched = schedule(loc, ch, ci, step_hz)?;
    let rate_hz = sched.rate_hz;
    if let Some(m) = &c.components {
        return Err(loc.error(
            m.span(),
            &at("components"),
            "`components` is for an own model's channel; this model's channels give `h` or `fix`",
        ));
    }
    let kind = if pose {
        if let Some(h) = &c.h {
            return Err(loc.error(h.span(), &at("h"), "pose-model channels use `fix`, not `h`"));
        }
        let fix = c.fix.as_ref().ok_or_else(|| {
            loc.error(
                ch.span(),
                &at("fix"),
                "missing `fix` (\"position\" or \"heading\")",
            )
        })?;
        match fix.get_ref().as_str() {
            "position" => ChannelKind::Position,
            "heading" => ChannelKind::Heading,
            other => {
                return Err(loc.error(
                    fix.span(),
                    &at("fix"),
                    format!("unknown fix `{other}`: use \"position\" or \"heading\""),
                ));
            }
        }
    } else {
        if let Some(f) = &c.fix {
            return Err(loc.error(
                f.span(),
                &at("fix"),
                "`fix` is for planar-pose models; give `h`",
            ));
        }
        let h =
            c.h.as_ref()
                .ok_or_else(|| loc.error(ch.span(), &at("h"), "missing measurement matrix `h`"))?;
        let m = h.get_ref().len();
        if !(1..=MAX_COMPONENTS).contains(&m) {
            return Err(loc.error(
                h.span(),
                &at("h"),
                format!(
                    "{m} rows: the verifier supports 1 to {MAX_COMPONENTS} components per channel"
                ),
            ));
        }
        ChannelKind::Linear(matrix(loc, h, &at("h"), m, n)?)
    };
    let m = match &kind {
        ChannelKind::Linear(h) => h.nrows(),
        ChannelKind::Position => 2,
        ChannelKind::Heading => 1,
        ChannelKind::User => 0,
    };
    let given = [c.r.is_some(), c.r_diag.is_some(), c.noise.is_some()]
        .iter()
        .filter(|b| **b)
        .count();
    if given != 1 {
        return Err(loc.error(
            ch.span(),
            &at("r"),
            "give exactly one of `r`, `r_diag` or `noise`",
        ));
    }
    let r = if let Some(noise) = &c.noise {
        if noise.get_ref().len() != m {
            return Err(loc.error(
                noise.span(),
                &at("noise"),
                format!("{} noise figures for {m} components", noise.get_ref().len()),
            ));
        }
        let mut r = DMatrix::zeros(m, m);
        for (i, fig) in noise.get_ref().iter().enumerate() {
            let field = at(&format!("noise[{i}]"));
            let quantity = match &kind {
                ChannelKind::Position => Some("m".to_string()),
                ChannelKind::Heading => Some("rad".to_string()),
                ChannelKind::User => None,
                ChannelKind::Linear(h) => {
                    selected_state(h, i, false).and_then(|j| parsed_unit(&states[j].unit))
                }
            };
            let (v, rec) = figures::convert(
                loc,
                fig,
                &field,
                Use::SampleVariance(rate_hz),
                step_hz,
                quantity.as_deref(),
            )?;
            if v <= 0.0 {
                return Err(loc.error(
                    fig.span(),
                    &field,
                    "the measurement variance must be positive",
                ));
            }
            if let Some(why) = unusable_variance(v, v, false, true) {
                return Err(loc.error(fig.span(), &field, why));
            }
            r[(i, i)] = v;
            conversions.push(rec);
        }
        r
    } else {
        covariance_choice(
            loc,
            ch.span(),
            &at("r"),
            m,
            (c.r.as_ref(), "r"),
            c.r_diag.as_ref().map(|v| (v, "r_diag", false)),
            None,
            true,
        )
        .map_err(|mut e| {
            if !e.field.starts_with("channel") {
                e.field = at(&e.field);
            }
            e
        })?
    };
    if matches!(kind, ChannelKind::Position) && (r[(0, 1)] != 0.0 || r[(1, 0)] != 0.0) {
        let span = c.r.as_ref().map_or(ch.span(), Spanned::span);
        return Err(loc.error(
            span,
            &at("r"),
            "the planar pose model's position fix has independent x and y errors: give `r_diag` or a diagonal `r` (a correlated fix needs a model of its own)",
        ));
    }
    Ok(ChannelPlan {
        m,
        kind,
        r,
        ..sched
    })
}

fn profile(
    loc: &Locator<'_>,
    model: &RawModel,
    model_span: Range<usize>,
    base: Option<&Path>,
) -> R<Profile> {
    match (&model.profile, &model.profile_csv) {
        (Some(p), None) => {
            if p.get_ref().is_empty() {
                return Err(loc.error(p.span(), "model.profile", "the profile has no segments"));
            }
            let mut segs = Vec::new();
            for (i, s) in p.get_ref().iter().enumerate() {
                let s = s.get_ref();
                let seconds = positive(loc, &s.seconds, &format!("model.profile[{i}].seconds"))?;
                let speed = finite(loc, &s.speed, &format!("model.profile[{i}].speed"))?;
                let yaw_rate = match &s.yaw_rate {
                    Some(y) => finite(loc, y, &format!("model.profile[{i}].yaw_rate"))?,
                    None => 0.0,
                };
                segs.push(Segment {
                    seconds,
                    speed,
                    yaw_rate,
                });
            }
            Ok(Profile::Segments(segs))
        }
        (None, Some(csv)) => {
            let path = base.map_or_else(|| csv.get_ref().into(), |b| b.join(csv.get_ref()));
            let text =
                super::read_capped(&path, super::MAX_LOG_BYTES, "recorded log").map_err(|e| {
                    loc.error(
                        csv.span(),
                        "model.profile_csv",
                        format!("cannot read {}: {e}", path.display()),
                    )
                })?;
            let mut rows: Vec<[f64; 3]> = Vec::new();
            for (li, line) in text.lines().enumerate() {
                let line = line.trim();
                if line.is_empty() || line.starts_with('#') {
                    continue;
                }
                let cells: Vec<&str> = line.split(',').map(str::trim).collect();
                let parsed: Option<Vec<f64>> =
                    cells.iter().map(|c| c.parse::<f64>().ok()).collect();
                match parsed {
                    None if rows.is_empty() && li == 0 => continue, // header
                    Some(v) if v.len() == 3 && v.iter().all(|x| x.is_finite()) => {
                        if rows.last().is_some_and(|r| r[0] >= v[0]) {
                            return Err(loc.error(
                                csv.span(),
                                "model.profile_csv",
                                format!("{}:{}: times must increase", path.display(), li + 1),
                            ));
                        }
                        rows.push([v[0], v[1], v[2]]);
                    }
                    _ => {
                        return Err(loc.error(
                            csv.span(),
                            "model.profile_csv",
                            format!(
                                "{}:{}: expected three numbers `time_s, speed, yaw_rate`",
                                path.display(),
                                li + 1
                            ),
                        ));
                    }
                }
            }
            if rows.is_empty() {
                return Err(loc.error(
                    csv.span(),
                    "model.profile_csv",
                    "the recorded profile is empty",
                ));
            }
            Ok(Profile::Recorded(rows))
        }
        _ => Err(loc.error(
            model_span,
            "model.profile",
            "give exactly one of `profile` (segments) or `profile_csv` (recorded odometry)",
        )),
    }
}

fn forbid_pose_fields(loc: &Locator<'_>, model: &RawModel, kind: &str) -> R<()> {
    forbid(
        loc,
        model.speed_noise.as_ref().map(Spanned::span),
        "model.speed_noise",
        kind,
    )?;
    forbid(
        loc,
        model.yaw_rate_noise.as_ref().map(Spanned::span),
        "model.yaw_rate_noise",
        kind,
    )?;
    forbid(
        loc,
        model.heading_drift.as_ref().map(Spanned::span),
        "model.heading_drift",
        kind,
    )?;
    forbid(
        loc,
        model.profile.as_ref().map(Spanned::span),
        "model.profile",
        kind,
    )?;
    forbid(
        loc,
        model.profile_csv.as_ref().map(Spanned::span),
        "model.profile_csv",
        kind,
    )?;
    forbid(
        loc,
        model.origin_shift_m.as_ref().map(Spanned::span),
        "model.origin_shift_m",
        kind,
    )?;
    forbid(
        loc,
        model.recentre_m.as_ref().map(Spanned::span),
        "model.recentre_m",
        kind,
    )
}

fn forbid(loc: &Locator<'_>, span: Option<Range<usize>>, field: &str, kind: &str) -> R<()> {
    match span {
        Some(s) => Err(loc.error(s, field, format!("not used by kind = \"{kind}\""))),
        None => Ok(()),
    }
}

fn need<'a, T>(
    loc: &Locator<'_>,
    v: Option<&'a T>,
    span: Range<usize>,
    field: &str,
    kind: &str,
) -> R<&'a T> {
    v.ok_or_else(|| loc.error(span, field, format!("required by kind = \"{kind}\"")))
}

/// Notes on standard error that a spec uses a key's old name (accepted for
/// one release).
fn deprecated(loc: &Locator<'_>, old: &str, new: &str) {
    crate::output::note(&format!(
        "note: {}: `{old}` is deprecated, write `{new}` (the old name is accepted in this release only)",
        loc.file()
    ));
}

fn positive(loc: &Locator<'_>, v: &Spanned<f64>, field: &str) -> R<f64> {
    let x = *v.get_ref();
    if x.is_finite() && x > 0.0 {
        Ok(x)
    } else {
        Err(loc.error(
            v.span(),
            field,
            format!("must be a positive number, got {x}"),
        ))
    }
}

/// The origin-shift distance under its name or its old one (`recentre_m`,
/// with a note); both at once are refused.
fn origin_shift(loc: &Locator<'_>, model: &RawModel) -> R<Option<f64>> {
    match (&model.origin_shift_m, &model.recentre_m) {
        (Some(_), Some(old)) => Err(loc.error(
            old.span(),
            "model.recentre_m",
            "give `origin_shift_m` only (`recentre_m` is its old name)".to_string(),
        )),
        (Some(d), None) => Ok(Some(recentre(loc, d, "model.origin_shift_m")?)),
        (None, Some(old)) => {
            deprecated(loc, "model.recentre_m", "model.origin_shift_m");
            Ok(Some(recentre(loc, old, "model.recentre_m")?))
        }
        (None, None) => Ok(None),
    }
}

/// An origin-shift distance: finite and at least [`super::MIN_RECENTRE_M`]
/// (the origin moves in whole metres).
fn recentre(loc: &Locator<'_>, v: &Spanned<f64>, field: &str) -> R<f64> {
    let x = *v.get_ref();
    if x.is_finite() && x >= super::MIN_RECENTRE_M {
        Ok(x)
    } else {
        Err(loc.error(
            v.span(),
            field,
            format!(
                "must be a finite distance of at least {} m (the origin moves in whole metres), got {x}",
                super::MIN_RECENTRE_M
            ),
        ))
    }
}

fn finite(loc: &Locator<'_>, v: &Spanned<f64>, field: &str) -> R<f64> {
    let x = *v.get_ref();
    if x.is_finite() {
        Ok(x)
    } else {
        Err(loc.error(v.span(), field, format!("must be finite, got {x}")))
    }
}

fn vector(loc: &Locator<'_>, v: &RawVector, field: &str, len: usize) -> R<Vec<f64>> {
    let x = v.get_ref();
    if x.len() != len {
        return Err(loc.error(
            v.span(),
            field,
            format!("has {} entries, expected {len}", x.len()),
        ));
    }
    if let Some(i) = x.iter().position(|e| !e.is_finite()) {
        return Err(loc.error(v.span(), field, format!("entry {i} is not finite")));
    }
    Ok(x.clone())
}

fn matrix(
    loc: &Locator<'_>,
    m: &RawMatrix,
    field: &str,
    rows: usize,
    cols: usize,
) -> R<DMatrix<f64>> {
    let v = m.get_ref();
    if v.len() != rows {
        return Err(loc.error(
            m.span(),
            field,
            format!("has {} rows, expected {rows} ({rows} x {cols})", v.len()),
        ));
    }
    for (i, row) in v.iter().enumerate() {
        if row.len() != cols {
            return Err(loc.error(
                m.span(),
                field,
                format!(
                    "row {i} has {} entries, expected {cols} ({rows} x {cols})",
                    row.len()
                ),
            ));
        }
        if let Some(j) = row.iter().position(|e| !e.is_finite()) {
            return Err(loc.error(m.span(), field, format!("entry ({i}, {j}) is not finite")));
        }
    }
    Ok(DMatrix::from_fn(rows, cols, |i, j| v[i][j]))
}

/// A covariance given as a full matrix, a diagonal or standard deviations
/// (exactly one), checked for symmetry and definiteness (`strict`: positive
/// definite, otherwise positive semidefinite).
#[allow(clippy::too_many_arguments)]
fn covariance_choice(
    loc: &Locator<'_>,
    span: Range<usize>,
    field: &str,
    n: usize,
    full: (Option<&RawMatrix>, &str),
    diag: Option<(&RawVector, &str, bool)>,
    std: Option<(&RawVector, &str, bool)>,
    strict: bool,
) -> R<DMatrix<f64>> {
    let count =
        usize::from(full.0.is_some()) + usize::from(diag.is_some()) + usize::from(std.is_some());
    if count != 1 {
        return Err(loc.error(
            span,
            field,
            "give the covariance exactly once (full matrix, `_diag` variances or `std`)",
        ));
    }
    if let Some(m) = full.0 {
        let p = matrix(loc, m, full.1, n, n)?;
        for i in 0..n {
            if let Some(why) = unusable_variance(p[(i, i)], p[(i, i)], false, strict) {
                return Err(loc.error(m.span(), full.1, format!("diagonal entry {i}: {why}")));
            }
        }
        check_covariance(loc, m.span(), full.1, &p, strict)?;
        return Ok(p);
    }
    let (v, name, is_std) = diag
        .or(std)
        .ok_or_else(|| loc.error(span.clone(), field, "missing"))?;
    let d = vector(loc, v, name, n)?;
    let mut p = DMatrix::zeros(n, n);
    for (i, &e) in d.iter().enumerate() {
        if e < 0.0 || (strict && e == 0.0) {
            let what = if is_std {
                "standard deviation"
            } else {
                "variance"
            };
            let need = if strict { "positive" } else { "non-negative" };
            return Err(loc.error(
                v.span(),
                name,
                format!("entry {i}: a {what} must be {need}, got {e}"),
            ));
        }
        let var = if is_std { e * e } else { e };
        if let Some(why) = unusable_variance(var, e, is_std, strict) {
            return Err(loc.error(v.span(), name, format!("entry {i}: {why}")));
        }
        p[(i, i)] = var;
    }
    Ok(p)
}

/// Why a variance (`from`, its standard deviation when `is_std`) cannot be
/// used, if it cannot: its square overflowed, it is subnormal (too small for
/// f64 to hold it with full precision: its square root, inverse and
/// products lose digits or overflow), or it is zero where a positive
/// variance is required (`strict`) although the figure given was not.
fn unusable_variance(v: f64, from: f64, is_std: bool, strict: bool) -> Option<String> {
    let subject = if is_std {
        format!("the standard deviation {from:e} gives the variance {v:e}, which")
    } else {
        format!("the variance {v:e}")
    };
    if !v.is_finite() {
        Some(format!(
            "the standard deviation {from:e} squares to more than f64 holds"
        ))
    } else if v != 0.0 && v.abs() < f64::MIN_POSITIVE {
        Some(format!(
            "{subject} is below the smallest normal f64 ({:e})",
            f64::MIN_POSITIVE
        ))
    } else if v == 0.0 && from != 0.0 && strict {
        Some(format!(
            "the standard deviation {from:e} squares to zero in f64 (it underflows); give a positive variance"
        ))
    } else if v.abs() > MAX_VARIANCE {
        Some(format!(
            "{subject} is above {MAX_VARIANCE:e}: products with the filter's matrices would overflow f64"
        ))
    } else {
        None
    }
}

/// Largest variance accepted: its square must still fit f64 (P P' and
/// (H P H')^2 appear in the update), with room to spare.
const MAX_VARIANCE: f64 = 1e150;

fn check_covariance(
    loc: &Locator<'_>,
    span: Range<usize>,
    field: &str,
    p: &DMatrix<f64>,
    strict: bool,
) -> R<()> {
    let n = p.nrows();
    let scale = p.iter().fold(0.0_f64, |a, v| a.max(v.abs()));
    for i in 0..n {
        if p[(i, i)] < 0.0 {
            return Err(loc.error(
                span,
                field,
                format!("diagonal entry {i} is a negative variance ({})", p[(i, i)]),
            ));
        }
        for j in 0..i {
            if (p[(i, j)] - p[(j, i)]).abs() > 1e-12 * scale {
                return Err(loc.error(
                    span,
                    field,
                    format!(
                        "not symmetric: entry ({i}, {j}) = {} but ({j}, {i}) = {}",
                        p[(i, j)],
                        p[(j, i)]
                    ),
                ));
            }
        }
    }
    let min = crate::run::metrics::eigen_range(p).map_or(f64::NAN, |(lo, _)| lo);
    if strict {
        if p.clone().cholesky().is_none() || min.is_nan() || min <= 0.0 {
            return Err(loc.error(
                span,
                field,
                format!("not positive definite (smallest eigenvalue {min:.3e})"),
            ));
        }
    } else if min.is_nan() || min < -1e-12 * scale.max(f64::MIN_POSITIVE) {
        return Err(loc.error(
            span,
            field,
            format!("not positive semidefinite (smallest eigenvalue {min:.3e})"),
        ));
    }
    Ok(())
}

/// A noise figure's raw fields, for the figures module.
pub(super) fn noise_value(fig: &RawNoise) -> Vec<(&'static str, &Spanned<f64>)> {
    let mut v = Vec::new();
    for (name, f) in [
        ("density", &fig.density),
        ("psd", &fig.psd),
        ("random_walk", &fig.random_walk),
        ("bias_instability", &fig.bias_instability),
        ("rate_random_walk", &fig.rate_random_walk),
        ("quantization", &fig.quantization),
        ("std", &fig.std),
        ("variance", &fig.variance),
    ] {
        if let Some(s) = f {
            v.push((name, s));
        }
    }
    v
}

/// The one state a column (`by_column`, of G) or a row (of H) touches with
/// coefficient 1, if it touches exactly one.
fn selected_state(m: &DMatrix<f64>, index: usize, by_column: bool) -> Option<usize> {
    let line: Vec<f64> = if by_column {
        m.column(index).iter().copied().collect()
    } else {
        m.row(index).iter().copied().collect()
    };
    let nonzero: Vec<usize> = (0..line.len()).filter(|&k| line[k] != 0.0).collect();
    match nonzero.as_slice() {
        [k] if line[*k] == 1.0 => Some(*k),
        _ => None,
    }
}

/// A state's unit text when the unit grammar reads it (free-text units such
/// as "1" or "counts" give no dimension check).
fn parsed_unit(text: &str) -> Option<String> {
    let t = text.trim();
    (!t.is_empty() && crate::numeric::units::parse_unit(t).is_ok()).then(|| t.to_string())
}
