//! One check, in named stages: start the variants, stream the run through
//! the reference and the variants (in parallel, block by block), solve the
//! steady state, judge, and project over the mission.

use nalgebra::{SMatrix, SVector};
use rayon::prelude::*;

use super::channel::Channel;
use super::filter::{BASELINE, Filter, VARIANTS};
use super::jacobian::{DEFAULT_TOLERANCE, JacobianCheck};
use super::result::{
    ExternalResult, Reach, ReferenceResult, RunError, RunOptions, RunResult, SteadyResult,
    VariantResult,
};
use super::stream::{Record, ReferenceFigures, ReferenceStage};
use super::system::System;
use super::variants::{Context, Drive, VariantRun, compare_states};
use super::world::{Source, World};
use crate::engine::external::ExternalStream;
use crate::engine::metrics;
use crate::engine::plan::{Mode, Plan};
use crate::engine::verdict::judge;
use crate::numeric::dare;

/// Steps recorded by the reference stage per block.
const BLOCK: usize = 1024;

pub use super::steady::{Lifted, Steady};

fn rows(m: &nalgebra::DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
        .collect()
}

/// How the variants are driven for this scenario and mode.
fn drive<const N: usize, S: System<N>>(plan: &Plan, system: &S, mode: Mode, steps: u64) -> Drive {
    let linear = system.is_linear();
    let own = linear || mode == Mode::EndToEnd;
    Drive {
        shared_predict: linear || mode == Mode::Covariance,
        own_updates: own,
        compare_states: own,
        recentre_m: plan
            .recentre_m
            .filter(|_| own && !linear && !system.position_states().is_empty()),
        steps,
    }
}

/// Starts every variant; with re-centring, a variant that starts far out
/// starts in its own frame (x0 - origin formed in f64, then rounded, as
/// firmware would initialise it).
fn start_variants<const N: usize, S: System<N>>(
    system: &S,
    drive: &Drive,
    x0: &SVector<f64, N>,
    p0: &SMatrix<f64, N, N>,
) -> Vec<VariantRun<N>> {
    let mut origin = SVector::<f64, N>::zeros();
    let mut recentres = 0;
    if let Some(d) = drive.recentre_m
        && system.position_states().iter().any(|&i| x0[i].abs() > d)
    {
        for &i in system.position_states() {
            origin[i] = x0[i].round();
        }
        recentres = 1;
    }
    let local = x0 - origin;
    VARIANTS
        .iter()
        .map(|&v| VariantRun::new(v, Filter::start(v, &local, p0), origin, recentres))
        .collect()
}

/// Streams the whole run: the reference stage records block b + 1 while
/// the variants run block b, each variant on its own thread.
fn stream<const N: usize, S: System<N>>(
    stage: &mut ReferenceStage<'_, N, S>,
    runs: &mut [VariantRun<N>],
    cx: &Context<'_, N, S>,
) -> Result<(), RunError> {
    let baseline = VARIANTS.iter().position(|v| *v == BASELINE).unwrap_or(0);
    let angles = cx.system.angle_states();
    let mut current: Vec<Record<N>> = Vec::with_capacity(BLOCK);
    let mut next: Vec<Record<N>> = Vec::with_capacity(BLOCK);
    stage.advance(&mut current, BLOCK)?;
    while !current.is_empty() {
        let (ahead, ()) = rayon::join(
            || stage.advance(&mut next, BLOCK),
            || {
                runs.par_iter_mut()
                    .for_each(|run| run.run_block(cx, &current));
            },
        );
        ahead?;
        if cx.drive.compare_states {
            compare_states(runs, baseline, &current, angles);
        }
        std::mem::swap(&mut current, &mut next);
    }
    Ok(())
}

/// Runs a check of `system` with `channels` (in the order of
/// `plan.channels`) on the steps `source` gives.
///
/// # Errors
/// [`RunError`] when the scenario is inconsistent (sizes), a log row is
/// bad, a model returns non-finite values, or the reference refuses the
/// schedule.
#[allow(clippy::too_many_lines)]
pub fn check<const N: usize, S: System<N>>(
    plan: &Plan,
    system: &S,
    channels: &[&dyn Channel<N>],
    source: &Source<'_>,
    steady: &Steady,
    opts: RunOptions,
) -> Result<RunResult, RunError> {
    if plan.x0.len() != N || plan.p0.shape() != (N, N) {
        return Err(RunError(format!(
            "the scenario has {} states and a {}x{} P0, the model {N}",
            plan.x0.len(),
            plan.p0.nrows(),
            plan.p0.ncols()
        )));
    }
    if channels.len() != plan.channels.len() {
        return Err(RunError(format!(
            "the scenario schedules {} channels, {} models were given",
            plan.channels.len(),
            channels.len()
        )));
    }
    for (c, p) in channels.iter().zip(&plan.channels) {
        if c.dim() != p.m {
            return Err(RunError(format!(
                "channel `{}` is scheduled with {} components, its model has {}",
                p.name,
                p.m,
                c.dim()
            )));
        }
    }
    let x0 = SVector::<f64, N>::from_column_slice(&plan.x0);
    let p0 = SMatrix::<f64, N, N>::from_fn(|i, j| plan.p0[(i, j)]);
    let mode = if system.is_linear() {
        Mode::Covariance
    } else {
        opts.mode.unwrap_or(plan.mode)
    };

    // The run's length: the plan's steps, or the log's input rows.
    let (steps, dt, source_name) = match source {
        Source::Simulated { .. } => (plan.steps, plan.dt(), "simulated".to_string()),
        Source::Log { path } => {
            let layout = super::log::Layout {
                input_len: system.input_len(),
                channels: plan
                    .channels
                    .iter()
                    .map(|c| (c.name.clone(), c.m))
                    .collect(),
                states: N,
            };
            let s = super::log::survey(path, &layout).map_err(|e| RunError(e.to_string()))?;
            let steps = s.input_rows - 1;
            (
                steps,
                (s.span.1 - s.span.0) / steps as f64,
                path.display().to_string(),
            )
        }
    };
    let drive = drive(plan, system, mode, steps);
    let mut runs = start_variants(system, &drive, &x0, &p0);

    let world = World::new(
        system,
        channels,
        &plan.channels,
        source,
        &x0,
        &p0,
        plan.seed,
        plan.step_hz,
        steps,
    )
    .map_err(|e| match e {
        super::world::WorldError::Log(l) => RunError(l.to_string()),
        super::world::WorldError::Model(m) => RunError(m),
    })?;
    let external = match &plan.external {
        Some(e) => Some(ExternalStream::open(&e.path, N, dt).map_err(RunError)?),
        None => None,
    };
    let names: Vec<(String, usize)> = plan
        .channels
        .iter()
        .map(|c| (c.name.clone(), c.m))
        .collect();
    let jac_tolerance = plan
        .thresholds
        .max_jacobian_mismatch
        .unwrap_or(DEFAULT_TOLERANCE);
    let jacobians = JacobianCheck::new::<N>(steps, &names, jac_tolerance);
    let mut stage = ReferenceStage::new(
        world,
        system,
        channels,
        &plan.channels,
        &x0,
        &p0,
        external,
        jacobians,
        steps,
    )?;
    let cx = Context {
        system,
        channels,
        schedule: &plan.channels,
        drive,
    };
    let _ = opts.progress;
    stream(&mut stage, &mut runs, &cx)?;
    let (jacobians, figures, reference) = stage.into_jacobians();
    let jacobians = (!system.is_linear()).then(|| jacobians.finish());

    // Steady state.
    let (steady_result, steady_note) = solve_steady(steady, &mut runs, &figures);

    // Verdicts.
    let variants = judge_all(plan, runs, &figures, jacobians.as_ref());
    let flash = format!("{} {}", plan.flash.precision.name(), plan.flash.form);
    let flash_passes_horizon = variants.iter().any(|v| v.name == flash && v.verdict.passes);
    let cheapest_passing = variants
        .iter()
        .filter(|v| v.verdict.passes)
        .min_by_key(|v| v.cost_rank)
        .map(|v| v.name.clone());
    let external = plan.external.as_ref().map(|e| ExternalResult {
        rows: figures.external_rows,
        max_difference: figures.external_max,
        tolerance: e.tolerance,
        agrees: figures.external_rows > 0 && figures.external_max <= e.tolerance,
    });
    let mut last_t = 0.0;
    let series_time = figures
        .bucket_end
        .iter()
        .map(|&t| {
            if t.is_finite() {
                last_t = t;
            }
            last_t
        })
        .collect();
    let reach = plan
        .states
        .iter()
        .zip(&figures.reach)
        .map(|(s, &m)| Reach {
            state: s.name.clone(),
            max_abs: m,
            f32_spacing: f32_spacing(m),
        })
        .collect();
    let pr = reference.covariance();
    let result = RunResult {
        steps,
        dt,
        mode,
        recentre_m: drive.recentre_m,
        reference: ReferenceResult {
            final_covariance: rows(&pr),
            final_state: reference.state().iter().copied().collect(),
            max_innovation_condition: figures.max_cond,
            min_eigenvalue: figures.min_eig,
            updates: figures.updates,
            gated: figures.gated,
        },
        variants,
        steady: steady_result,
        steady_note,
        external,
        series_time,
        flash,
        flash_passes: flash_passes_horizon,
        flash_passes_horizon,
        cheapest_passing,
        jacobians,
        reach,
        source: source_name,
        mission: None,
    };
    Ok(result)
}

/// One unit in the last place of an f32 at magnitude `x`.
#[must_use]
pub fn f32_spacing(x: f64) -> f64 {
    let x = x.abs();
    if !x.is_finite() {
        return f64::INFINITY;
    }
    let f = (x as f32).max(f32::MIN_POSITIVE);
    let e = f.log2().floor();
    f64::from(2.0_f32.powf(e)) * f64::from(f32::EPSILON)
}

fn solve_steady<const N: usize>(
    steady: &Steady,
    runs: &mut [VariantRun<N>],
    figures: &ReferenceFigures,
) -> (Option<SteadyResult>, Option<String>) {
    let mut note = steady.note.clone();
    let Some((fl, hl, ql, rl, every)) = &steady.lifted else {
        return (None, note);
    };
    match dare::solve(fl, hl, ql, rl) {
        Ok(s) => {
            let sn = s.posterior.norm();
            for run in runs.iter_mut() {
                let t = &mut run.tracker;
                t.steady_distance = t
                    .last_posterior
                    .as_ref()
                    .filter(|_| t.failure.is_none())
                    .map(|p| metrics::relative(p, &s.posterior, sn));
            }
            (
                Some(SteadyResult {
                    prior: rows(&s.prior),
                    posterior: rows(&s.posterior),
                    gain: rows(&s.gain),
                    iterations: s.iterations,
                    residual: s.residual,
                    steps_per_update: *every,
                    reference_distance: figures
                        .last_posterior
                        .as_ref()
                        .map(|p| metrics::relative(p, &s.posterior, sn)),
                }),
                None,
            )
        }
        Err(e) => {
            note = Some(format!("no steady state: {e}"));
            (None, note)
        }
    }
}

fn judge_all<const N: usize>(
    plan: &Plan,
    runs: Vec<VariantRun<N>>,
    figures: &ReferenceFigures,
    jacobians: Option<&super::jacobian::JacobianReport>,
) -> Vec<VariantResult> {
    let jac_line = jacobians.and_then(|j| {
        j.failure_line(
            &|model, row| {
                if model == "process" {
                    plan.states
                        .get(row)
                        .map_or(row.to_string(), |s| s.name.clone())
                } else {
                    format!("{model}[{row}]")
                }
            },
            &|col| {
                plan.states
                    .get(col)
                    .map_or(col.to_string(), |s| s.name.clone())
            },
        )
    });
    runs.into_iter()
        .map(|run| {
            let v = run.variant;
            let innovation_rounding = figures.max_cond * v.precision.epsilon();
            let mut verdict = judge(&run.tracker, &plan.thresholds);
            if let Some(line) = &jac_line {
                verdict.passes = false;
                verdict.reasons.push(line.clone());
            }
            let why = verdict.reasons.first().cloned();
            VariantResult {
                name: v.name(),
                precision: v.precision,
                form: v.form.name().to_string(),
                cost_rank: v.cost_rank,
                figures: run.tracker,
                innovation_rounding,
                verdict,
                recentres: run.recentres,
                origin: [run.origin[0], if N > 1 { run.origin[1] } else { 0.0 }],
                gate_differences: run.gate_differences,
                first_gate_difference: run.first_gate_difference,
                max_nees: (run.nees.1 > 0).then_some(run.nees.0),
                why,
            }
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn f32_spacing_is_one_ulp() {
        // IEEE 754 binary32: 24-bit significand (common practice).
        assert_eq!(f32_spacing(1.0), f64::from(f32::EPSILON));
        assert_eq!(f32_spacing(1750.0), 1024.0 * f64::from(f32::EPSILON));
        assert_eq!(f32_spacing(3.8e6), 2_097_152.0 * f64::from(f32::EPSILON));
    }
}
