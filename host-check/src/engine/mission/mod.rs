//! The mission-length verdict: whether each variant's error shows a
//! significant trend, where it would stand at the end of the mission (or
//! that the run cannot decide), which case of theory applies, the
//! steady-gain option's transient loss, and the cheapest form and
//! precision that passes.

pub mod fit;
pub mod gain;
pub mod types;

use crate::engine::plan::{ChannelKind, ModelPlan, Plan};
use crate::engine::result::{RunResult, SteadyResult};
use crate::engine::steady::Lifted;
pub use fit::Trend;
pub use gain::{ConstantGain, GainVariantResult};
pub use types::*;

/// The reference counts as steady when its last posterior is this close
/// (relative, Frobenius) to the Riccati solution.
pub const STEADY_TOLERANCE: f64 = 1e-8;
/// Share of the plot buckets skipped at the start before the trend test
/// (the start-up transient is not growth).
pub const SKIP_SHARE: f64 = 0.1;
/// Largest number of steps the core's steady-gain filter is run for.
const MAX_GAIN_STEPS: u64 = 2_000_000;
/// Points of the geometric grid of horizons searched for the run length
/// that would decide an undecided projection.
const HORIZON_GRID: usize = 400;

/// A tested series projected to the mission (steps throughout).
#[derive(Debug, Clone, Copy)]
pub struct Projection {
    /// The trend test's findings.
    pub trend: Option<Trend>,
    /// The verdict.
    pub outlook: Outlook,
    /// Value at the mission's end (robust line, or the largest seen).
    pub at_end: f64,
    /// Upper end of it.
    pub at_end_high: f64,
    /// Crossing step of the robust line (a significant rise only).
    pub crossing: Option<f64>,
    /// Earliest crossing step the slope interval allows.
    pub crossing_low: Option<f64>,
    /// Latest (`None`: never).
    pub crossing_high: Option<f64>,
    /// For an undecided verdict: the horizon in steps that would decide.
    pub run_at_least: Option<f64>,
}

/// The upper slope of the pass test: the interval's upper half-width above
/// the estimate, counted from max(estimate, 0), so a falling series (a
/// transient decaying inside the tested part) earns no credit against
/// growth to come; `shrink` narrows the half-width.
fn upper_slope(tr: &Trend, shrink: f64) -> f64 {
    tr.slope.max(0.0) + (tr.slope_high - tr.slope).max(0.0) * shrink
}

/// What the slope interval decides at horizon `t` (steps) >= the tested
/// end t0, with the interval narrowed as t0/t around the estimate (the
/// width of a slope interval over a fixed number of blocks of a stationary
/// series goes as one over its span) and the anchors carried on along the
/// estimate. It passes when the upper projection (the largest block
/// maximum carried on at the [`upper_slope`]) stays within the limit
/// to the mission's end; it fails when the rise is significant (lower end
/// above 0) and the lower projection (the robust line carried on at the
/// lower end) reaches the limit; otherwise `None`.
fn decide_at(tr: &Trend, t: f64, limit: f64, mission: f64) -> Option<Outlook> {
    let t0 = tr.end_step;
    let shrink = if t > 0.0 { (t0 / t).min(1.0) } else { 1.0 };
    let b = tr.slope;
    let high = upper_slope(tr, shrink);
    let low = b - (b - tr.slope_low) * shrink;
    let top = tr.largest + b.max(0.0) * (t - t0);
    let line = tr.line_at_end + b * (t - t0);
    let left = (mission - t).max(0.0);
    if top + high.max(0.0) * left <= limit {
        Some(Outlook::Passes)
    } else if low > 0.0 && (t > t0 || tr.rising) && line + low * left >= limit {
        Some(Outlook::Fails)
    } else {
        None
    }
}

/// Tests `series` (bucket maxima at `steps`) for a trend and projects it to
/// `mission_steps` along the Theil-Sen line. `bounded`: theory bounds the
/// series (the steady-state argument), so only a significant rise that
/// crosses can fail it and an undecided projection passes.
pub fn project(
    steps: &[f64],
    series: &[f64],
    limit: f64,
    mission_steps: f64,
    run_steps: f64,
    bounded: bool,
) -> Projection {
    let trend = fit::trend(steps, series, SKIP_SHARE);
    let largest = series
        .iter()
        .copied()
        .filter(|e| e.is_finite())
        .fold(f64::NAN, f64::max);
    let level = |outlook, run_at_least| Projection {
        trend,
        outlook,
        at_end: largest,
        at_end_high: largest,
        crossing: None,
        crossing_low: None,
        crossing_high: None,
        run_at_least,
    };
    if mission_steps <= run_steps {
        // The horizon covers the mission: the run itself decides.
        return level(Outlook::Passes, None);
    }
    let Some(tr) = trend else {
        // Too few points to test: enough buckets for MIN_BLOCKS blocks
        // after the start-up share.
        let need = (fit::MIN_BLOCKS as f64 / (1.0 - SKIP_SHARE)).ceil() + 1.0;
        return if bounded {
            level(Outlook::Passes, None)
        } else {
            level(Outlook::Undecided, Some(need.max(run_steps + 1.0)))
        };
    };
    let t0 = tr.end_step;
    let left = mission_steps - t0;
    let crosses_at =
        |from: f64, slope: f64| (slope > 0.0).then(|| t0 + ((limit - from) / slope).max(0.0));
    let (crossing, crossing_low, crossing_high) = if tr.rising {
        (
            crosses_at(tr.line_at_end, tr.slope),
            crosses_at(tr.largest, tr.slope_high),
            crosses_at(tr.line_at_end, tr.slope_low),
        )
    } else {
        (None, None, None)
    };
    // The mission contains the horizon: neither end value is below the
    // largest value seen, start-up included.
    let at_end = if tr.rising {
        (tr.line_at_end + tr.slope * left).max(tr.largest)
    } else {
        tr.largest
    }
    .max(largest);
    let at_end_high = if bounded && !tr.rising {
        tr.largest
    } else {
        tr.largest + upper_slope(&tr, 1.0) * left
    }
    .max(largest);
    let mut p = Projection {
        trend,
        outlook: Outlook::Undecided,
        at_end,
        at_end_high,
        crossing,
        crossing_low,
        crossing_high,
        run_at_least: None,
    };
    match decide_at(&tr, t0, limit, mission_steps) {
        Some(o) => p.outlook = o,
        None if bounded => p.outlook = Outlook::Passes,
        None => {
            // The shortest horizon on a geometric grid up to the mission at
            // which the narrowed interval decides (the mission itself when
            // none does before).
            let ratio = (mission_steps / t0).ln();
            let h = (1..=HORIZON_GRID)
                .map(|i| t0 * (ratio * i as f64 / HORIZON_GRID as f64).exp())
                .find(|&t| decide_at(&tr, t, limit, mission_steps).is_some())
                .unwrap_or(mission_steps);
            p.run_at_least = Some(h.min(mission_steps).ceil());
        }
    }
    p
}

/// An observability rank test of (F, H): the rank of [H; HF; ...;
/// HF^(n-1)] by its singular values (relative tolerance n eps times the
/// largest; common practice). (rank, n).
fn observability_rank(f: &nalgebra::DMatrix<f64>, h: &nalgebra::DMatrix<f64>) -> (usize, usize) {
    let n = f.nrows();
    let m = h.nrows();
    let mut o = nalgebra::DMatrix::zeros(m * n, n);
    let mut block = h.clone();
    for i in 0..n {
        o.view_mut((i * m, 0), (m, n)).copy_from(&block);
        block = &block * f;
    }
    let sv = o.singular_values();
    let top = sv.iter().copied().fold(0.0_f64, f64::max);
    let tol = (m * n).max(n) as f64 * f64::EPSILON * top;
    (sv.iter().filter(|s| **s > tol).count(), n)
}

/// The longest dropout window of any channel, s, and its channel's name.
fn longest_dropout(plan: &Plan) -> Option<(f64, &str, usize)> {
    plan.channels
        .iter()
        .flat_map(|c| {
            c.dropouts
                .iter()
                .map(move |&(a, b)| (b - a, c.name.as_str(), c.dropouts.len()))
        })
        .max_by(|a, b| a.0.total_cmp(&b.0))
}

/// Which case of theory applies to the covariance error, and why.
fn covariance_case(inputs: &MissionInputs<'_>, run: &RunResult) -> (Case, String) {
    let plan = inputs.plan;
    let tail = "the trend test decides";
    if let Some(d) = run.steady.as_ref().and_then(|s| s.reference_distance)
        && d <= STEADY_TOLERANCE
    {
        return (
            Case::Bounded,
            format!(
                "bounded: time-invariant and the reference sits on the Riccati steady state \
                 (relative distance {d:.1e}), so each step repeats the same arithmetic on the same \
                 covariance and the stable, observable closed loop forgets the rounding it injects"
            ),
        );
    }
    if plan.channels.is_empty() {
        return (
            Case::OpenLoop,
            format!("no measurements: the covariance and its rounding follow F open loop; {tail}"),
        );
    }
    let gaps = longest_dropout(plan).map(|(len, name, count)| {
        format!(
            "channel `{name}` drops out ({count} gap{}, longest {}), where the covariance grows \
             open loop",
            if count == 1 { "" } else { "s" },
            duration_words(len)
        )
    });
    match &plan.model {
        ModelPlan::User { .. } => {
            let mut why = String::from(
                "no bound from theory: a user's own nonlinear model is taken as time-varying",
            );
            if let Some(g) = gaps {
                why.push_str(", and ");
                why.push_str(&g);
            }
            why.push_str("; ");
            why.push_str(tail);
            (Case::TimeVarying, why)
        }
        ModelPlan::Pose { .. } => {
            let fixes = plan
                .channels
                .iter()
                .any(|c| matches!(c.kind, ChannelKind::Position));
            let mut why = String::from(
                "no bound from theory: the pose filter is time-varying (its Jacobians follow the \
                 heading), ",
            );
            why.push_str(if fixes {
                "its position is unmeasured between fixes"
            } else {
                "its position is never measured"
            });
            if let Some(g) = gaps {
                why.push_str(" and ");
                why.push_str(&g);
            }
            why.push_str("; ");
            why.push_str(tail);
            (
                if fixes {
                    Case::TimeVarying
                } else {
                    Case::Unobservable
                },
                why,
            )
        }
        ModelPlan::Linear { f, .. } => {
            let n = plan.n();
            let m: usize = plan.channels.iter().map(|c| c.m).sum();
            let mut h = nalgebra::DMatrix::zeros(m, n);
            let mut row = 0;
            for c in &plan.channels {
                h.view_mut((row, 0), (c.m, n)).copy_from(&c.h(n));
                row += c.m;
            }
            let (rank, n) = observability_rank(f, &h);
            if rank < n {
                return (
                    Case::Unobservable,
                    format!(
                        "growth possible: the measurements reach {rank} of {n} modes (observability \
                         rank); the others, and their rounding, follow F open loop; {tail}"
                    ),
                );
            }
            if let Some(g) = gaps {
                return (Case::Dropouts, format!("growth possible: {g}; {tail}"));
            }
            match run.steady.as_ref().and_then(|s| s.reference_distance) {
                Some(d) => (
                    Case::NotSteady,
                    format!(
                        "not yet steady: the reference is {d:.1e} from the Riccati solution (bound \
                         {STEADY_TOLERANCE:.0e}) at the end of the run; {tail}"
                    ),
                ),
                None => (
                    Case::TimeVarying,
                    format!(
                        "no steady-state argument ({}); {tail}",
                        inputs
                            .lifted_note
                            .or(run.steady_note.as_deref())
                            .unwrap_or("no steady state computed")
                            .trim_start_matches("no steady state: ")
                    ),
                ),
            }
        }
    }
}

/// Why the state difference is tested, not bounded.
const STATE_REASON: &str = "the state difference follows the trajectory (f32 resolves a state ever \
                            more coarsely as it moves away from zero): no bound from theory; the \
                            trend test decides";

/// "after 3.2 days (1.1 days to never)"; a crossing past
/// [`FAR_MISSIONS`] times the mission is "no crossing in sight (beyond 100 x
/// the mission)".
fn crossing_words(p: &Projection, dt: f64, mission_s: f64) -> Option<String> {
    let c = p.crossing?;
    if c * dt > FAR_MISSIONS * mission_s {
        return Some(format!(
            "no crossing in sight (beyond {FAR_MISSIONS:.0} x the mission)"
        ));
    }
    Some(format!(
        "after {} ({} to {})",
        crossing_time_words(c * dt, mission_s),
        crossing_time_words(p.crossing_low.unwrap_or(c) * dt, mission_s),
        p.crossing_high.map_or_else(
            || "never".to_string(),
            |h| crossing_time_words(h * dt, mission_s)
        )
    ))
}

/// How many missions ahead a projected crossing is still worth a time: a
/// straight line carried further says nothing a reader can use.
pub const FAR_MISSIONS: f64 = 100.0;

/// A projected crossing time, s, in words: [`duration_words`] up to
/// [`FAR_MISSIONS`] times the mission, "beyond 100 x the mission" past it.
pub fn crossing_time_words(s: f64, mission_s: f64) -> String {
    if s.is_finite() && s > FAR_MISSIONS * mission_s {
        format!("beyond {FAR_MISSIONS:.0} x the mission")
    } else {
        duration_words(s)
    }
}

fn variant_mission(
    v: &crate::engine::result::VariantResult,
    run: &RunResult,
    mission_steps: f64,
    thresholds: &crate::engine::plan::Thresholds,
    case: &(Case, String),
) -> VariantMission {
    let limit = thresholds.max_relative_error;
    let dt = run.dt;
    let steps: Vec<f64> = run.series_time.iter().map(|t| (t / dt).round()).collect();
    let stopped = v.figures.failure.is_some();
    let run_steps = run.steps as f64;
    let cov = (!stopped).then(|| {
        project(
            &steps,
            &v.figures.series,
            limit,
            mission_steps,
            run_steps,
            case.0 == Case::Bounded,
        )
    });
    let state = (!stopped && v.figures.states_compared).then(|| {
        project(
            &steps,
            &v.figures.state_series,
            thresholds.max_state_difference_sigma,
            mission_steps,
            run_steps,
            false,
        )
    });
    // Where the error first exceeded a threshold within the horizon.
    let first_over = |series: &[f64], lim: f64| {
        series
            .iter()
            .zip(&run.series_time)
            .find(|(e, _)| e.is_finite() && **e > lim)
            .map(|(_, t)| *t)
    };
    let outcomes: Vec<(&Projection, &str)> = cov
        .iter()
        .map(|p| (p, ""))
        .chain(state.iter().map(|p| (p, " (state)")))
        .collect();
    let outlook = if !v.verdict.passes || outcomes.iter().any(|(p, _)| p.outlook == Outlook::Fails)
    {
        Outlook::Fails
    } else if outcomes
        .iter()
        .any(|(p, _)| p.outlook == Outlook::Undecided)
    {
        Outlook::Undecided
    } else {
        Outlook::Passes
    };
    // The projection that crosses first (robust line).
    let first = outcomes
        .iter()
        .filter(|(p, _)| p.crossing.is_some())
        .min_by(|a, b| {
            a.0.crossing
                .unwrap_or(0.0)
                .total_cmp(&b.0.crossing.unwrap_or(0.0))
        });
    let run_at_least = outcomes
        .iter()
        .filter(|(p, _)| p.outlook == Outlook::Undecided)
        .filter_map(|(p, _)| p.run_at_least)
        .fold(None, |m: Option<f64>, h| Some(m.map_or(h, |m| m.max(h))));
    let (crossing_s, crossing_low_s, crossing_high_s, crossing) = if !v.verdict.passes {
        let at = first_over(&v.figures.series, limit)
            .or_else(|| {
                first_over(
                    &v.figures.state_series,
                    thresholds.max_state_difference_sigma,
                )
            })
            .or(v.figures.failure.as_ref().map(|f| f.time_s))
            .or(Some(0.0));
        (at, at, at, "fails within the run".to_string())
    } else {
        let (c, lo, hi, words) = match first {
            Some((p, what)) => (
                p.crossing.map(|k| k * dt),
                p.crossing_low.map(|k| k * dt),
                p.crossing_high.map(|k| k * dt),
                crossing_words(p, dt, mission_steps * dt).map(|w| format!("{w}{what}")),
            ),
            None => (None, None, None, None),
        };
        let words = match outlook {
            Outlook::Undecided => {
                let what = outcomes
                    .iter()
                    .find(|(p, _)| p.outlook == Outlook::Undecided)
                    .map_or("", |(_, w)| *w);
                match run_at_least {
                    Some(h) => format!("undecided: run at least {}{what}", duration_words(h * dt)),
                    None => format!("undecided{what}"),
                }
            }
            _ => words.unwrap_or_else(|| "never".to_string()),
        };
        (c, lo, hi, words)
    };
    let passes_mission = v.verdict.passes && outlook == Outlook::Passes;
    let passes = v.verdict.passes;
    VariantMission {
        name: v.name.clone(),
        case: case.0,
        reason: case.1.clone(),
        trend: cov.as_ref().and_then(|p| p.trend),
        outlook_covariance: cov.as_ref().map(|p| p.outlook),
        projected_error: cov
            .as_ref()
            .filter(|_| passes)
            .map(|p| p.at_end)
            .filter(|e| e.is_finite()),
        projected_error_high: cov
            .as_ref()
            .filter(|_| passes)
            .map(|p| p.at_end_high)
            .filter(|e| e.is_finite()),
        state_trend: state.as_ref().and_then(|p| p.trend),
        state_reason: state.as_ref().map(|_| STATE_REASON.to_string()),
        outlook_state: state.as_ref().map(|p| p.outlook),
        projected_state_sigma: state
            .as_ref()
            .filter(|_| passes)
            .map(|p| p.at_end)
            .filter(|e| e.is_finite()),
        crossing_s,
        crossing_low_s,
        crossing_high_s,
        run_at_least_s: (outlook == Outlook::Undecided)
            .then(|| run_at_least.map(|h| h * dt))
            .flatten(),
        outlook,
        crossing,
        passes_mission,
    }
}

/// Inputs of the mission analysis besides the run.
pub struct MissionInputs<'a> {
    /// The spec.
    pub plan: &'a Plan,
    /// The lifted LTI model, when the schedule has one.
    pub lifted: Option<&'a Lifted>,
    /// Why there is none.
    pub lifted_note: Option<&'a str>,
}

/// Analyses a finished run for the mission the spec (or the command line)
/// states.
pub fn analyze(inputs: &MissionInputs<'_>, run: &RunResult) -> MissionResult {
    let plan = inputs.plan;
    let horizon_s = run.steps as f64 * run.dt;
    let (seconds, is_horizon) = match plan.thresholds.mission_seconds {
        Some(s) => (s, false),
        None => (horizon_s, true),
    };
    let mission_steps = (seconds * plan.step_hz).round().max(1.0);
    let case = covariance_case(inputs, run);
    let variants: Vec<VariantMission> = run
        .variants
        .iter()
        .map(|v| variant_mission(v, run, mission_steps, &plan.thresholds, &case))
        .collect();

    // The steady-gain option.
    let (constant_gain, constant_gain_note) = match (inputs.lifted, &run.steady) {
        (Some(lifted), Some(steady)) => constant_gain(plan, run, lifted, steady),
        (None, _) => (
            None,
            Some(format!(
                "steady gain not offered: {}",
                inputs
                    .lifted_note
                    .unwrap_or("the schedule is not time-invariant")
                    .trim_start_matches("no steady state: ")
            )),
        ),
        (Some(_), None) => (
            None,
            Some(format!(
                "steady gain not offered: {}",
                run.steady_note
                    .as_deref()
                    .unwrap_or("the Riccati equation has no steady state")
            )),
        ),
    };

    // The final verdict: the cheapest that passes; cheaper undecided ones
    // are named with the horizon that would decide them.
    let order = cost_order();
    let mut passed_over = Vec::new();
    let mut undecided = Vec::new();
    let mut run_at_least_s: Option<f64> = None;
    let mut choice = None;
    for name in &order {
        let (passes, why, wait) = if name.ends_with("steady gain") {
            constant_gain_passes(name, constant_gain.as_ref(), plan, seconds)
        } else {
            match variants.iter().find(|v| &v.name == name) {
                Some(v) if v.passes_mission => (true, String::new(), None),
                Some(v) if v.outlook == Outlook::Undecided => {
                    (false, v.crossing.clone(), v.run_at_least_s)
                }
                Some(v) if run_passes(run, name) => (
                    false,
                    format!("projected to cross a limit {}", v.crossing),
                    None,
                ),
                Some(_) => (false, "fails over the run".to_string(), None),
                None => (false, "not run".to_string(), None),
            }
        };
        if passes {
            choice = Some(name.clone());
            break;
        }
        if why.starts_with("undecided") {
            undecided.push(format!("{name}: {why}"));
            if let Some(h) = wait {
                run_at_least_s = Some(run_at_least_s.map_or(h, |m| m.max(h)));
            }
        }
        passed_over.push(format!("{name}: {why}"));
    }
    let cycles_per_step = None;
    let cycles_note = if matches!(plan.model, ModelPlan::User { .. }) {
        "price your own predict and updates on the target with a probe of your crate (README: price it on the target)".to_string()
    } else if plan.file == crate::engine::plan::DEMO_FILE {
        "run `cairn cost` (the demo's rates) or `cairn demo --cycles` for cycles".to_string()
    } else {
        format!(
            "run `cairn cost --spec {}` (or `cairn check --cycles`) for cycles",
            plan.file
        )
    };
    MissionResult {
        seconds,
        steps: mission_steps,
        is_horizon,
        horizon_seconds: horizon_s,
        variants,
        constant_gain,
        constant_gain_note,
        verdict: FinalVerdict {
            choice,
            undecided,
            run_at_least_s,
            order,
            cycles_per_step,
            cycles_note,
            passed_over,
        },
    }
}

/// Fails every verdict when the spec's external reference disagrees with
/// ours or gave no row to compare: one of the two references is wrong, so
/// no figure measured against ours can be trusted. The reason goes into
/// every variant's verdict and the final verdict's passed-over list.
pub fn fail_on_external(run: &mut RunResult) {
    let Some(e) = run.external.as_ref().filter(|e| !e.agrees) else {
        return;
    };
    let reason = if e.rows == 0 {
        "the external reference has no row at any step of the run: nothing was compared".to_string()
    } else {
        format!(
            "the external reference disagrees with ours: largest relative difference {:.3e} > tolerance {:.1e} over {} rows",
            e.max_difference, e.tolerance, e.rows
        )
    };
    for v in &mut run.variants {
        v.verdict.passes = false;
        v.verdict.reasons.push(reason.clone());
    }
    run.flash_passes = false;
    run.flash_passes_horizon = false;
    run.cheapest_passing = None;
    if let Some(m) = run.mission.as_mut() {
        for v in &mut m.variants {
            v.passes_mission = false;
        }
        if let Some(c) = m.verdict.choice.take() {
            m.verdict.passed_over.push(format!("{c}: {reason}"));
        }
        m.verdict
            .passed_over
            .push(format!("every option: {reason}"));
    }
}

/// The cost probes' form for a variant name, when they price it (f32
/// conventional, Joseph and U-D), as a spec's `flash.form` names it.
pub fn probe_form(name: &str) -> Option<&'static str> {
    match name {
        "f32 conventional" => Some("conventional"),
        "f32 joseph" => Some("joseph"),
        "f32 u-d" => Some("u-d"),
        _ => None,
    }
}

/// Cycles per filter step from a cost report whose probes and rates came
/// from this spec ([`crate::cost::plan_probes`]): the sum over operations
/// of rate x Cortex-M4F cycles per call, over the step rate.
pub fn cycles_per_step(report: &crate::cost::CostReport, step_hz: f64) -> Option<f64> {
    let per_s: f64 = report
        .operations
        .iter()
        .filter_map(|o| o.rate_hz.map(|r| r * o.m4_cycles))
        .sum();
    (per_s > 0.0 && step_hz > 0.0).then(|| per_s / step_hz)
}

/// Puts a cost estimate into the verdict (or says why none applies).
pub fn attach_cycles(
    m: &mut MissionResult,
    report: Result<&crate::cost::CostReport, String>,
    step_hz: f64,
) {
    let v = &mut m.verdict;
    match report {
        Ok(r) => match cycles_per_step(r, step_hz) {
            Some(c) => {
                v.cycles_per_step = Some(c);
                v.cycles_note = format!(
                    "Cortex-M4F at zero wait states, from QEMU's executed instructions weighted by \
                     the published cycle table; {:.3}% of a {} MHz core",
                    100.0 * c * step_hz / (r.clock_mhz * 1e6),
                    r.clock_mhz
                );
            }
            None => v.cycles_note = "the cost report priced no operation at a rate".into(),
        },
        Err(e) => v.cycles_note = e,
    }
}

fn run_passes(run: &RunResult, name: &str) -> bool {
    run.variants
        .iter()
        .any(|v| v.name == name && v.verdict.passes)
}

fn constant_gain_passes(
    name: &str,
    cg: Option<&ConstantGain>,
    plan: &Plan,
    mission_s: f64,
) -> (bool, String, Option<f64>) {
    let Some(cg) = cg else {
        return (false, "not offered for this schedule".into(), None);
    };
    let Some(variant) = cg.variants.iter().find(|l| l.name == name) else {
        return (
            false,
            cg.variants_note
                .clone()
                .unwrap_or_else(|| "the core's filter was not run".into()),
            None,
        );
    };
    if let Some(r) = &variant.refused {
        return (false, format!("refused at {r}"), None);
    }
    if cg.closed_loop_radius >= 1.0 {
        return (false, "its closed loop is not stable".into(), None);
    }
    // The transient is decided by the run itself: checked before the
    // projection, whose undecided verdict it would otherwise hide.
    let limit = plan
        .thresholds
        .max_transient_excess
        .unwrap_or(plan.thresholds.max_relative_error);
    if cg.max_excess > limit {
        return (
            false,
            format!(
                "its transient raises the covariance up to {:.3e} (relative) above the optimal \
                 one > {limit:.1e} (set [verdict] max_transient_excess to accept more)",
                cg.max_excess
            ),
            None,
        );
    }
    let sigma = plan.thresholds.max_state_difference_sigma;
    if variant.max_state_difference_sigma > sigma {
        return (
            false,
            format!(
                "its state differs from the f64 steady-gain run by {:.2} standard deviations > {sigma}",
                variant.max_state_difference_sigma
            ),
            None,
        );
    }
    if variant.outlook == Some(Outlook::Fails) {
        return (
            false,
            format!(
                "its state is projected to differ from the f64 steady-gain run by more than \
                 {sigma} standard deviations {}",
                variant.crossing_s.filter(|t| *t <= mission_s).map_or_else(
                    || "within the mission".to_string(),
                    |t| format!("after {}", duration_words(t))
                )
            ),
            None,
        );
    }
    if variant.outlook == Some(Outlook::Undecided) {
        return (
            false,
            format!(
                "undecided: run at least {} (its state difference from the f64 steady-gain run)",
                variant
                    .run_at_least_s
                    .map_or_else(|| "longer".to_string(), duration_words)
            ),
            variant.run_at_least_s,
        );
    }
    (true, String::new(), None)
}

fn constant_gain(
    plan: &Plan,
    run: &RunResult,
    lifted: &Lifted,
    steady: &SteadyResult,
) -> (Option<ConstantGain>, Option<String>) {
    let ModelPlan::Linear { f, q, .. } = &plan.model else {
        return (
            None,
            Some("steady gain not offered: nonlinear model".into()),
        );
    };
    let m = |rows: &Vec<Vec<f64>>| {
        nalgebra::DMatrix::from_fn(rows.len(), rows.first().map_or(0, Vec::len), |i, j| {
            rows[i][j]
        })
    };
    let (k, prior, posterior) = (m(&steady.gain), m(&steady.prior), m(&steady.posterior));
    let every = lifted.4;
    let horizon_intervals = (run.steps / every).max(1) as usize;
    let mut cg = match gain::transient(
        lifted,
        &k,
        &plan.p0,
        horizon_intervals,
        run.dt,
        plan.thresholds.max_relative_error,
    ) {
        Ok(c) => c,
        Err(e) => return (None, Some(format!("steady gain not offered: {e}"))),
    };
    let sched = gain::GainSchedule {
        f,
        q,
        x0: &plan.x0,
        p0: &plan.p0,
        steps: run.steps.min(MAX_GAIN_STEPS),
        seed: plan.seed,
        step_hz: plan.step_hz,
    };
    let mission_steps = (plan.thresholds.mission_seconds.unwrap_or(0.0) * plan.step_hz)
        .max(run.steps as f64)
        .round();
    match gain::run_variants(&sched, lifted, &k, &prior, &posterior) {
        Ok(mut runs) => {
            for l in &mut runs {
                let steps: Vec<f64> = l
                    .series_time
                    .iter()
                    .map(|t| (t * plan.step_hz).round())
                    .collect();
                let p = project(
                    &steps,
                    &l.state_series,
                    plan.thresholds.max_state_difference_sigma,
                    mission_steps,
                    l.steps as f64,
                    false,
                );
                l.crossing_s = p.crossing.map(|k| k / plan.step_hz);
                l.crossing_low_s = p.crossing_low.map(|k| k / plan.step_hz);
                l.crossing_high_s = p.crossing_high.map(|k| k / plan.step_hz);
                l.outlook = Some(p.outlook);
                l.run_at_least_s = p.run_at_least.map(|k| k / plan.step_hz);
                l.trend = p.trend;
            }
            cg.variants = runs;
        }
        Err(e) => cg.variants_note = Some(e),
    }
    (Some(cg), None)
}

/// The mission stage of a check, after the engine's run: projects every
/// variant over the mission and settles whether the variant to flash
/// passes for all of it.
pub fn complete(plan: &Plan, steady: &crate::engine::Steady, result: &mut RunResult) {
    let lifted = steady.lifted.as_ref().filter(|_| result.steady.is_some());
    let mission = analyze(
        &MissionInputs {
            plan,
            lifted,
            lifted_note: result.steady_note.as_deref(),
        },
        result,
    );
    result.flash_passes = mission
        .variants
        .iter()
        .any(|v| v.name == result.flash && v.passes_mission);
    result.mission = Some(mission);
}

/// "after 3.2 days" and so on.
pub fn duration_words(s: f64) -> String {
    if !s.is_finite() {
        "never".into()
    } else if s >= 1000.0 * 31_557_600.0 {
        format!("{:.1e} years", s / 31_557_600.0)
    } else if s >= 2.0 * 31_557_600.0 {
        format!("{:.0} years", s / 31_557_600.0)
    } else if s >= 2.0 * 86_400.0 {
        format!("{:.1} days", s / 86_400.0)
    } else if s >= 2.0 * 3600.0 {
        format!("{:.1} h", s / 3600.0)
    } else if s >= 120.0 {
        format!("{:.1} min", s / 60.0)
    } else {
        format!("{s:.3} s")
    }
}

/// Cost order of the final verdict: steady gain, conventional, Joseph,
/// U-D, every f32 form before any f64 one (f64 is software arithmetic on a
/// Cortex-M4F, about 75x the f32 cost: docs/references.md, measured here).
pub fn cost_order() -> Vec<String> {
    let mut v = Vec::new();
    for p in ["f32", "f64"] {
        for f in ["steady gain", "conventional", "joseph", "u-d"] {
            v.push(format!("{p} {f}"));
        }
    }
    v
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::cost::{CostReport, OperationCost};

    fn op(name: &str, cycles: f64, rate_hz: Option<f64>) -> OperationCost {
        OperationCost {
            name: name.into(),
            calls: 10,
            instructions: cycles,
            m4_cycles: cycles,
            m7_cycles: cycles,
            fp_total: crate::cost::estimate::FpOps::default(),
            bound: 0.0,
            rate_hz,
            hot: Vec::new(),
            callees: Vec::new(),
            soft_share: 0.0,
            mix: [0.0; 6],
            profile: Vec::new(),
        }
    }

    #[test]
    fn cycles_per_step_weights_each_operation_by_its_rate() {
        // A predict of 300 cycles every 50 Hz step and an update of 120
        // cycles at 10 Hz: 300 + 120 x 10/50 = 324 cycles per step
        // (arithmetic); an operation without a rate is left out.
        let report = CostReport {
            elf: "probe.elf".into(),
            clock_mhz: 100.0,
            operations: vec![
                op("linear2_predict", 300.0, Some(50.0)),
                op("linear2_update1_joseph", 120.0, Some(10.0)),
                op("pose_predict", 5000.0, None),
            ],
            warnings: Vec::new(),
        };
        let c = cycles_per_step(&report, 50.0).expect("priced");
        assert!((c - 324.0).abs() < 1e-9, "{c}");
        assert_eq!(probe_form("f32 joseph"), Some("joseph"));
        assert_eq!(probe_form("f32 u-d"), Some("u-d"));
        assert_eq!(probe_form("f32 steady gain"), None);
        assert_eq!(probe_form("f64 conventional"), None);
    }

    #[test]
    fn crossings_far_past_the_mission_have_no_time() {
        // Our own wording rule: up to 100 missions a time, past it none
        // (a day's mission: 100 days is 8.64e6 s).
        let day = 86_400.0;
        assert_eq!(crossing_time_words(99.0 * day, day), "99.0 days");
        assert_eq!(
            crossing_time_words(1.9e115, day),
            "beyond 100 x the mission"
        );
        assert_eq!(crossing_time_words(f64::INFINITY, day), "never");
    }

    #[test]
    fn a_ud_choice_is_priced_with_the_ud_probes() {
        // As `check --cycles` does: the chosen variant's form goes into the
        // spec, the spec picks the probes and their rates. Cycle figures are
        // invented; the arithmetic: 600 + 900 x 4/200 + 500 x 1/200 = 620.5
        // per 200 Hz step for U-D, with none of the Joseph probes' 100s.
        let mut plan = crate::demo::plan().expect("demo spec");
        plan.flash.form = probe_form("f32 u-d").expect("priced").into();
        let wanted = crate::cost::plan_probes(&plan);
        let rate = |name: &str| wanted.rates.iter().find(|r| r.0 == name).map(|r| r.1);
        let ops = [
            ("pose_predict", 100.0),
            ("pose_ud_predict", 600.0),
            ("pose_position_update", 100.0),
            ("pose_ud_position_update", 900.0),
            ("pose_heading_update", 100.0),
            ("pose_ud_heading_update", 500.0),
        ];
        let report = CostReport {
            elf: "probe.elf".into(),
            clock_mhz: 168.0,
            operations: ops.iter().map(|&(n, c)| op(n, c, rate(n))).collect(),
            warnings: Vec::new(),
        };
        assert!(rate("pose_predict").is_none() && rate("pose_ud_predict").is_some());
        // The demo spec's rates: 200 Hz steps, 4 Hz position, 1 Hz heading.
        assert_eq!(plan.step_hz, 200.0);
        let c = cycles_per_step(&report, plan.step_hz).expect("priced");
        assert!((c - 620.5).abs() < 1e-9, "{c}");
    }

    /// Invented bucket maxima (tests of our own projection code): a level
    /// with a deterministic irregular wobble, plus `slope` per step.
    fn series(level: f64, slope: f64) -> (Vec<f64>, Vec<f64>) {
        let k: Vec<f64> = (1..=400).map(|i| f64::from(i) * 100.0).collect();
        let mut u: u64 = 99;
        let e = k
            .iter()
            .map(|&k| {
                u = u.wrapping_mul(6_364_136_223_846_793_005).wrapping_add(1);
                let w = (u >> 11) as f64 / (1u64 << 53) as f64 - 0.5;
                level * (1.0 + 0.2 * w) + slope * k
            })
            .collect();
        (k, e)
    }

    #[test]
    fn a_level_series_far_below_the_limit_passes_and_a_close_one_is_undecided() {
        // 40 000 steps of noise about 1e-6: projected 10x, even the upper
        // slope stays far below 1e-3.
        let (k, e) = series(1e-6, 0.0);
        let p = project(&k, &e, 1e-3, 4e5, 4e4, false);
        assert!(!p.trend.expect("tested").rising);
        assert_eq!(p.outlook, Outlook::Passes, "{p:?}");
        assert_eq!(p.crossing, None);
        // The same noise about 4e-4, projected 10 000x: the interval cannot
        // exclude a crossing, so it is undecided, with a horizon between
        // the run and the mission that would decide.
        let (k, e) = series(4e-4, 0.0);
        let p = project(&k, &e, 1e-3, 4e8, 4e4, false);
        assert_eq!(p.outlook, Outlook::Undecided, "{p:?}");
        let h = p.run_at_least.expect("a horizon");
        assert!(h > 4e4 && h <= 4e8, "{h}");
        // ... where the narrowed interval decides, one way or the other
        // (the rule itself), and not a grid step before.
        let tr = p.trend.expect("tested");
        assert!(decide_at(&tr, h, 1e-3, 4e8).is_some());
        assert!(decide_at(&tr, h / 1.03, 1e-3, 4e8).is_none());
        // Bounded by theory: the same data pass.
        assert_eq!(
            project(&k, &e, 1e-3, 4e8, 4e4, true).outlook,
            Outlook::Passes
        );
        // A mission within the horizon is the run's to decide.
        assert_eq!(
            project(&k, &e, 1e-3, 4e4, 4e4, false).outlook,
            Outlook::Passes
        );
    }

    #[test]
    fn a_significant_rise_fails_with_an_interval_around_its_crossing() {
        // 1e-5 + 1e-9 k reaches 1e-3 at k = 9.9e5 (arithmetic); 5% noise.
        let (k, e) = series(1e-5, 1e-9);
        let p = project(&k, &e, 1e-3, 4e6, 4e4, false);
        let tr = p.trend.expect("tested");
        assert!(tr.rising && tr.slope_low > 0.0, "{tr:?}");
        assert_eq!(p.outlook, Outlook::Fails, "{p:?}");
        let (lo, c, hi) = (
            p.crossing_low.expect("low"),
            p.crossing.expect("point"),
            p.crossing_high.expect("high"),
        );
        assert!(lo <= c && c <= hi, "{lo} {c} {hi}");
        assert!(lo <= 9.9e5 && 9.9e5 <= hi, "{lo} {hi}");
        // A mission that ends before the interval starts passes.
        assert_eq!(
            project(&k, &e, 1e-3, 2e5, 4e4, false).outlook,
            Outlook::Passes
        );
        // Too few points: undecided, not passed.
        let p = project(&k[..8], &e[..8], 1e-3, 4e6, 800.0, false);
        assert_eq!(p.outlook, Outlook::Undecided);
        assert!(p.run_at_least.is_some());
    }

    #[test]
    fn observability_ranks_by_hand() {
        use nalgebra::DMatrix;
        // Common practice: a double integrator observed in position is
        // observable (rank 2); F = I with the Dyer-McReynolds H (two rows)
        // reaches only 2 of 3 directions (by hand: HF^i = H).
        let f = DMatrix::from_row_slice(2, 2, &[1.0, 0.1, 0.0, 1.0]);
        let h = DMatrix::from_row_slice(1, 2, &[1.0, 0.0]);
        assert_eq!(observability_rank(&f, &h), (2, 2));
        let h = DMatrix::from_row_slice(2, 3, &[1.0, 1.0, 1.0, 1.0, 1.0, 1.0001]);
        assert_eq!(observability_rank(&DMatrix::identity(3, 3), &h), (2, 3));
        // A velocity-only measurement never sees the position: rank 1.
        let h = DMatrix::from_row_slice(1, 2, &[0.0, 1.0]);
        assert_eq!(observability_rank(&f, &h), (1, 2));
    }

    #[test]
    fn the_cost_order_puts_every_f32_form_first() {
        let order = cost_order();
        assert_eq!(order[0], "f32 steady gain");
        assert_eq!(order[3], "f32 u-d");
        assert_eq!(order[4], "f64 steady gain");
        assert_eq!(order.len(), 8);
    }
}
