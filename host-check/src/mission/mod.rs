//! The mission-length verdict: how each variant's error grows, where it
//! would stand at the end of the mission, the constant-gain option's
//! transient loss, and the cheapest form and precision that passes.

pub mod fit;
pub mod gain;

use serde::Serialize;

use crate::engine::check::Lifted;
use crate::engine::result::{RunResult, SteadyResult};
use crate::spec::{ModelPlan, Plan};
pub use fit::{Fit, Growth};
pub use gain::{ConstantGain, GainLaneResult};

/// The reference counts as steady when its last posterior is this close
/// (relative, Frobenius) to the Riccati solution.
pub const STEADY_TOLERANCE: f64 = 1e-8;
/// Share of the plot buckets skipped at the start before fitting (the
/// start-up transient is not growth).
const SKIP_SHARE: f64 = 0.1;
/// A series is flat when its change over the last half is within this share
/// of its mean (or of the threshold, whichever is larger).
const FLAT_TOLERANCE: f64 = 0.05;
/// Largest number of steps the core's constant-gain filter is run for.
const MAX_GAIN_STEPS: u64 = 2_000_000;

/// One variant over the mission.
#[derive(Debug, Clone, Serialize)]
pub struct VariantMission {
    /// Variant name.
    pub name: String,
    /// The growth model fitted to its decimated error series (none when it
    /// stopped early or had too few points).
    pub fit: Option<Fit>,
    /// Why the error is taken as level and the horizon as enough, if it is.
    pub level: Option<String>,
    /// Its relative covariance error projected to the end of the mission
    /// (never below the largest over the last half of the horizon).
    pub projected_error: Option<f64>,
    /// The growth model fitted to its state difference from the f64 run
    /// (in standard deviations), when states are compared.
    pub state_fit: Option<Fit>,
    /// That difference projected to the end of the mission.
    pub projected_state_sigma: Option<f64>,
    /// When its relative error or its state difference would cross its
    /// threshold, s from the start, whichever comes first (`None`: never).
    pub crossing_s: Option<f64>,
    /// The crossing in words ("never", "after 3.2 days", "fails within the
    /// horizon", or "no fit (too few points)" when the run is too short to
    /// project).
    pub crossing: String,
    /// `true` when it passes over the horizon and is not projected to cross
    /// the threshold within the mission.
    pub passes_mission: bool,
}

/// The final verdict: what to flash.
#[derive(Debug, Clone, Serialize)]
pub struct FinalVerdict {
    /// The cheapest variant that passes for the whole mission, if any.
    pub choice: Option<String>,
    /// Order tried, cheapest first.
    pub order: Vec<String>,
    /// Estimated cycles per filter step of the choice, when a cost figure
    /// applies.
    pub cycles_per_step: Option<f64>,
    /// Where the cycles came from, or how to get them.
    pub cycles_note: String,
    /// Why cheaper options were passed over.
    pub passed_over: Vec<String>,
}

/// The whole mission analysis.
#[derive(Debug, Clone, Serialize)]
pub struct MissionResult {
    /// Mission length, s.
    pub seconds: f64,
    /// Mission length in filter steps.
    pub steps: f64,
    /// `true` when no mission was stated (the horizon is the mission).
    pub is_horizon: bool,
    /// The horizon the projections start from, s.
    pub horizon_seconds: f64,
    /// Per variant, in the run's order.
    pub variants: Vec<VariantMission>,
    /// The constant-gain option, when offered.
    pub constant_gain: Option<ConstantGain>,
    /// Why the constant-gain option is not offered, or a caveat.
    pub constant_gain_note: Option<String>,
    /// The final verdict.
    pub verdict: FinalVerdict,
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

/// Cost order of the final verdict: constant gain, conventional, Joseph,
/// U-D, every f32 form before any f64 one (f64 is software arithmetic on a
/// Cortex-M4F, about 75x the f32 cost: docs/references.md, measured here).
pub fn cost_order() -> Vec<String> {
    let mut v = Vec::new();
    for p in ["f32", "f64"] {
        for f in ["constant gain", "conventional", "joseph", "u-d"] {
            v.push(format!("{p} {f}"));
        }
    }
    v
}

/// A fitted series projected to the mission: (fit, value at the end,
/// crossing step).
struct Projection {
    fit: Option<Fit>,
    flat_level: bool,
    at_end: f64,
    crossing_step: Option<f64>,
}

/// Fits `series` (bucket maxima at `steps`), skipping the start-up share,
/// and projects it: the end value is never below the largest value over the
/// last half of the horizon; a level (forced or fitted on a flat last half)
/// never crosses.
fn project(
    steps: &[f64],
    series: &[f64],
    limit: f64,
    mission_steps: f64,
    run_steps: f64,
    level_forced: bool,
) -> Projection {
    let skip = (series.len() as f64 * SKIP_SHARE) as usize;
    let fit = fit::fit(&steps[skip..], &series[skip..]);
    let flat = fit::flat_last_half(steps, series, FLAT_TOLERANCE, limit * 1e-3);
    let late = series[series.len() / 2..]
        .iter()
        .copied()
        .filter(|e| e.is_finite())
        .fold(f64::NAN, f64::max);
    // Too short a run for a last half: the largest value seen (NaN: none).
    let late = if late.is_nan() {
        series
            .iter()
            .copied()
            .filter(|e| e.is_finite())
            .fold(f64::NAN, f64::max)
    } else {
        late
    };
    let flat_level = flat && fit.is_some_and(|f| f.growth == Growth::Level);
    match fit {
        Some(f) if !(flat_level || level_forced && flat) => Projection {
            fit,
            flat_level,
            at_end: f.at(mission_steps).max(late),
            crossing_step: f.crossing(limit).map(|k| k.max(run_steps)),
        },
        _ => Projection {
            fit,
            flat_level,
            at_end: late,
            crossing_step: None,
        },
    }
}

fn variant_mission(
    v: &crate::engine::result::VariantResult,
    run: &RunResult,
    mission_steps: f64,
    thresholds: &crate::spec::Thresholds,
    steady_reason: Option<&str>,
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
            steady_reason.is_some(),
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
    let level = match &cov {
        Some(p) if p.crossing_step.is_none() && p.fit.is_some() => {
            steady_reason.map(str::to_string).or_else(|| {
                p.flat_level.then(|| {
                    "covariance error is level: flat over the last half of the horizon and best \
                     fitted by a constant; no growth mechanism seen"
                        .to_string()
                })
            })
        }
        _ => None,
    };
    // Where the error first exceeded a threshold within the horizon.
    let first_over = |series: &[f64], lim: f64| {
        series
            .iter()
            .zip(&run.series_time)
            .find(|(e, _)| e.is_finite() && **e > lim)
            .map(|(_, t)| *t)
    };
    let (crossing_s, crossing_what) = if v.verdict.passes {
        let c = cov
            .as_ref()
            .and_then(|p| p.crossing_step)
            .map(|k| (k * dt, "covariance"));
        let s = state
            .as_ref()
            .and_then(|p| p.crossing_step)
            .map(|k| (k * dt, "state"));
        match (c, s) {
            (Some(a), Some(b)) => Some(if a.0 <= b.0 { a } else { b }),
            (a, b) => a.or(b),
        }
        .map_or((None, ""), |(t, w)| (Some(t), w))
    } else {
        let at = first_over(&v.figures.series, limit)
            .or_else(|| {
                first_over(
                    &v.figures.state_series,
                    thresholds.max_state_difference_sigma,
                )
            })
            .or(v.figures.failure.as_ref().map(|f| f.time_s));
        (at.or(Some(0.0)), "")
    };
    let mission_s = mission_steps * dt;
    let crossing = match crossing_s {
        _ if !v.verdict.passes => "fails within the horizon".to_string(),
        None if cov.as_ref().is_some_and(|p| p.fit.is_none()) && mission_s > run_steps * dt => {
            "no fit (too few points)".to_string()
        }
        None => "never".to_string(),
        Some(s) if crossing_what == "state" => match state.as_ref().and_then(|p| p.fit) {
            // Which growth model the state projection took.
            Some(f) => format!("after {} (state, {})", duration_words(s), f.label()),
            None => format!("after {} (state)", duration_words(s)),
        },
        Some(s) => format!("after {}", duration_words(s)),
    };
    let passes_mission = v.verdict.passes && crossing_s.is_none_or(|s| s > mission_s);
    VariantMission {
        name: v.name.clone(),
        fit: cov.as_ref().and_then(|p| p.fit),
        level,
        projected_error: v
            .verdict
            .passes
            .then(|| cov.as_ref().map(|p| p.at_end))
            .flatten()
            .filter(|e| e.is_finite()),
        state_fit: state.as_ref().and_then(|p| p.fit),
        projected_state_sigma: v
            .verdict
            .passes
            .then(|| state.as_ref().map(|p| p.at_end))
            .flatten()
            .filter(|e| e.is_finite()),
        crossing_s,
        crossing,
        passes_mission,
    }
}

/// Why the reference's steady state justifies stopping early, if it does.
fn steady_reason(steady: Option<&SteadyResult>) -> Option<String> {
    let s = steady?;
    let d = s.reference_distance?;
    (d <= STEADY_TOLERANCE).then(|| {
        format!(
            "covariance error is level: no growth mechanism. The model is time-invariant and the \
             reference sits on the Riccati steady state (relative distance {d:.1e}), so every \
             later step repeats the same arithmetic on the same covariance: rounding is \
             re-injected at a fixed level and the stable closed loop forgets it; the horizon run \
             is enough for the covariance (the state difference, which follows the trajectory, \
             is fitted on its own)"
        )
    })
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
    let reason = steady_reason(run.steady.as_ref());
    let variants: Vec<VariantMission> = run
        .variants
        .iter()
        .map(|v| variant_mission(v, run, mission_steps, &plan.thresholds, reason.as_deref()))
        .collect();

    // The constant-gain option.
    let (constant_gain, constant_gain_note) = match (inputs.lifted, &run.steady) {
        (Some(lifted), Some(steady)) => constant_gain(plan, run, lifted, steady),
        (None, _) => (
            None,
            Some(format!(
                "constant gain not offered: {}",
                inputs
                    .lifted_note
                    .unwrap_or("the schedule is not time-invariant")
                    .trim_start_matches("no steady state: ")
            )),
        ),
        (Some(_), None) => (
            None,
            Some(format!(
                "constant gain not offered: {}",
                run.steady_note
                    .as_deref()
                    .unwrap_or("the Riccati equation has no steady state")
            )),
        ),
    };

    // The final verdict.
    let order = cost_order();
    let mut passed_over = Vec::new();
    let mut choice = None;
    for name in &order {
        let (passes, why) = if name.ends_with("constant gain") {
            constant_gain_passes(name, constant_gain.as_ref(), plan, seconds)
        } else {
            match variants.iter().find(|v| &v.name == name) {
                Some(v) if v.passes_mission => (true, String::new()),
                Some(v) if !v.passes_mission && run_passes(run, name) => {
                    (false, format!("projected to cross a limit {}", v.crossing))
                }
                Some(_) => (false, "fails over the horizon".to_string()),
                None => (false, "not run".to_string()),
            }
        };
        if passes {
            choice = Some(name.clone());
            break;
        }
        passed_over.push(format!("{name}: {why}"));
    }
    let cycles_per_step = None;
    let cycles_note = format!(
        "run `cairn cost --spec {}` (or `cairn check --cycles`) for cycles",
        plan.file
    );
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
) -> (bool, String) {
    let Some(cg) = cg else {
        return (false, "not offered for this schedule".into());
    };
    let Some(lane) = cg.lanes.iter().find(|l| l.name == name) else {
        return (
            false,
            cg.lanes_note
                .clone()
                .unwrap_or_else(|| "the core's filter was not run".into()),
        );
    };
    if let Some(r) = &lane.refused {
        return (false, format!("refused at {r}"));
    }
    if cg.closed_loop_radius >= 1.0 {
        return (false, "its closed loop is not stable".into());
    }
    let sigma = plan.thresholds.max_state_difference_sigma;
    if let Some(t) = lane.crossing_s.filter(|t| *t <= mission_s) {
        return (
            false,
            format!(
                "its state is projected to differ from the f64 constant-gain run by more than \
                 {sigma} standard deviations after {}",
                duration_words(t)
            ),
        );
    }
    if lane.max_state_difference_sigma > sigma {
        return (
            false,
            format!(
                "its state differs from the f64 constant-gain run by {:.2} standard deviations > {sigma}",
                lane.max_state_difference_sigma
            ),
        );
    }
    let limit = plan
        .thresholds
        .max_transient_excess
        .unwrap_or(plan.thresholds.max_relative_error);
    if cg.max_excess <= limit {
        (true, String::new())
    } else {
        (
            false,
            format!(
                "its transient raises the covariance up to {:.3e} (relative) above the optimal \
                 one > {limit:.1e} (set [verdict] max_transient_excess to accept more)",
                cg.max_excess
            ),
        )
    }
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
            Some("constant gain not offered: nonlinear model".into()),
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
        Err(e) => return (None, Some(format!("constant gain not offered: {e}"))),
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
    match gain::run_lanes(&sched, lifted, &k, &prior, &posterior) {
        Ok(mut lanes) => {
            for l in &mut lanes {
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
                l.crossing_s = p.crossing_step.map(|k| k / plan.step_hz);
            }
            cg.lanes = lanes;
        }
        Err(e) => cg.lanes_note = Some(e),
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
        assert_eq!(probe_form("f32 constant gain"), None);
        assert_eq!(probe_form("f64 conventional"), None);
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

    #[test]
    fn the_cost_order_puts_every_f32_form_first() {
        let order = cost_order();
        assert_eq!(order[0], "f32 constant gain");
        assert_eq!(order[3], "f32 u-d");
        assert_eq!(order[4], "f64 constant gain");
        assert_eq!(order.len(), 8);
    }
}
