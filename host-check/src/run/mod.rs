//! The check itself: streams the spec's schedule of predicts and updates
//! through every variant and the extended-precision reference, side by side.

mod external;
pub mod lane;
pub mod metrics;
pub(crate) mod synth;
pub mod variants;
mod verdict;

use std::io::IsTerminal;

use cairn_core::pose::{Odometry, PlanarOdometry};
use cairn_core::{ProcessModel, wrap_angle};
use indicatif::{ProgressBar, ProgressDrawTarget, ProgressStyle};
use nalgebra::{DMatrix, DVector, Vector3};
use serde::Serialize;

use crate::numeric::{ReferenceFilter, dare};
use crate::spec::{ChannelKind, Mode, ModelPlan, Plan, Precision};
use external::ExternalStream;
use lane::Lane;
use metrics::{BUCKETS, Failure, Tracker};
use synth::{Noise, sqrt_factor};
pub use verdict::{Verdict, judge};

/// Options from the command line that shape a run.
#[derive(Debug, Clone, Copy, Default)]
pub struct RunOptions {
    /// Show a progress bar on a terminal.
    pub progress: bool,
    /// Overrides the spec's mode for nonlinear models.
    pub mode: Option<Mode>,
}

/// Why a run could not be carried out (bad input, exit code 2).
#[derive(Debug, Clone)]
pub struct RunError(pub String);

impl core::fmt::Display for RunError {
    fn fmt(&self, f: &mut core::fmt::Formatter<'_>) -> core::fmt::Result {
        f.write_str(&self.0)
    }
}

impl std::error::Error for RunError {}

/// The results of one variant.
#[derive(Debug, Clone, Serialize)]
pub struct VariantResult {
    /// "f32 joseph" and so on.
    pub name: String,
    /// Scalar type.
    pub precision: Precision,
    /// Covariance form.
    pub form: String,
    /// Cost rank, cheapest first.
    pub cost_rank: u8,
    /// The figures.
    pub figures: Tracker,
    /// cond(S) times this precision's epsilon, the largest over the run:
    /// at or above 1, rounding S = HPH' + R loses the measurement's
    /// information, whatever the covariance form.
    pub innovation_rounding: f64,
    /// Pass or fail, with reasons.
    pub verdict: Verdict,
    /// Times the lane moved its origin (end-to-end mode with re-centring).
    pub recentres: u64,
    /// The lane's origin at the end, m (x, y; zero without re-centring).
    pub origin: [f64; 2],
}

/// The Riccati steady state of an LTI spec.
#[derive(Debug, Clone, Serialize)]
pub struct SteadyResult {
    /// Steady prior covariance (just before an update), row-major.
    pub prior: Vec<Vec<f64>>,
    /// Steady posterior covariance, row-major.
    pub posterior: Vec<Vec<f64>>,
    /// Steady gain, row-major.
    pub gain: Vec<Vec<f64>>,
    /// Iterations the solver used.
    pub iterations: usize,
    /// Relative residual of the Riccati equation.
    pub residual: f64,
    /// Filter steps between updates (the DARE is solved for that lifted step).
    pub steps_per_update: u64,
    /// Relative distance of the reference's last posterior from it.
    pub reference_distance: Option<f64>,
}

/// Summary of the extended-precision reference run.
#[derive(Debug, Clone, Serialize)]
pub struct ReferenceResult {
    /// Final covariance, row-major.
    pub final_covariance: Vec<Vec<f64>>,
    /// Final state.
    pub final_state: Vec<f64>,
    /// Largest condition number of S = HPH' + R over the run.
    pub max_innovation_condition: f64,
    /// Smallest eigenvalue of the reference covariance at the plot points.
    pub min_eigenvalue: f64,
    /// Updates applied.
    pub updates: u64,
}

/// Agreement with an external reference.
#[derive(Debug, Clone, Serialize)]
pub struct ExternalResult {
    /// Rows compared.
    pub rows: u64,
    /// Largest relative difference between our reference and the file.
    pub max_difference: f64,
    /// The tolerance.
    pub tolerance: f64,
    /// `true` when within tolerance.
    pub agrees: bool,
}

/// Everything a run found.
#[derive(Debug, Clone, Serialize)]
pub struct RunResult {
    /// Filter steps run.
    pub steps: u64,
    /// Step length, s.
    pub dt: f64,
    /// Mode used.
    pub mode: Mode,
    /// The re-centring distance the lanes used, m (`None`: they kept the
    /// spec's frame).
    pub recentre_m: Option<f64>,
    /// The reference.
    pub reference: ReferenceResult,
    /// Per variant, cheapest first.
    pub variants: Vec<VariantResult>,
    /// Steady state, when the spec is LTI with one update rate.
    pub steady: Option<SteadyResult>,
    /// Why no steady state was computed, if none was.
    pub steady_note: Option<String>,
    /// External reference agreement.
    pub external: Option<ExternalResult>,
    /// Time of each plot bucket's end, s.
    pub series_time: Vec<f64>,
    /// The variant to flash.
    pub flash: String,
    /// `true` when it passes over the horizon and is not projected to
    /// cross the error limit within the mission.
    pub flash_passes: bool,
    /// `true` when it passes over the horizon.
    pub flash_passes_horizon: bool,
    /// The cheapest variant that passes over the horizon, if any.
    pub cheapest_passing: Option<String>,
    /// The mission-length verdict (filled in once the run is over).
    pub mission: Option<crate::mission::MissionResult>,
}

struct Running {
    lane: Option<Box<dyn Lane>>,
    tracker: Tracker,
    p: DMatrix<f64>,
    x: DVector<f64>,
    /// The lane's origin (x, y), m, in f64: the spec's frame is origin +
    /// the lane's own state.
    origin: [f64; 2],
    recentres: u64,
}

impl Running {
    /// The lane's state in the spec's frame, in f64: origin + local state.
    fn global_state(lane: &dyn Lane, origin: [f64; 2], out: &mut DVector<f64>) {
        lane.state(out);
        out[0] += origin[0];
        out[1] += origin[1];
    }
}

/// Moves a lane's origin when |x| or |y| of its state passes `distance`:
/// the offset is x and y rounded to whole metres (exact in f32 and f64, so
/// the shift adds no rounding; heading untouched), and the origin gathers
/// it in f64.
fn recentre(r: &mut Running, distance: f64, k: u64, t: f64) {
    let Some(lane) = r.lane.as_mut() else {
        return;
    };
    lane.state(&mut r.x);
    let Some([ox, oy]) = lane::recentre_offset(r.x[0], r.x[1], distance) else {
        return;
    };
    let offset = [ox, oy, 0.0];
    match lane.shift_origin(&offset) {
        Ok(()) => {
            r.origin[0] += offset[0];
            r.origin[1] += offset[1];
            r.recentres += 1;
        }
        Err(e) => stop(r, k, t, "re-centre", &e.to_string()),
    }
}

fn rows(m: &DMatrix<f64>) -> Vec<Vec<f64>> {
    (0..m.nrows())
        .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
        .collect()
}

/// Runs the check a plan describes.
///
/// # Errors
/// [`RunError`] when the reference itself refuses the schedule (the spec is
/// inconsistent) or the external reference file is malformed.
#[allow(clippy::too_many_lines)]
pub fn run(plan: &Plan, opts: RunOptions) -> Result<RunResult, RunError> {
    let n = plan.n();
    let dt = plan.dt();
    let steps = plan.steps;
    let mode = if plan.is_linear() {
        Mode::Covariance
    } else {
        opts.mode.unwrap_or(plan.mode)
    };
    // Re-centring applies where each lane runs its own pose filter.
    let recentre_m = plan
        .recentre_m
        .filter(|_| mode == Mode::EndToEnd && !plan.is_linear());

    // Lanes. With re-centring, a lane that starts far out starts in its own
    // frame: x0 - origin is formed in f64 before it is rounded to the lane's
    // precision, as firmware would initialise it.
    let start = recentre_m.and_then(|d| lane::recentre_offset(plan.x0[0], plan.x0[1], d));
    let (start_origin, start_recentres, lane_x0) = match start {
        Some(o) => {
            let mut x = plan.x0.clone();
            x[0] -= o[0];
            x[1] -= o[1];
            (o, 1, x)
        }
        None => ([0.0; 2], 0, plan.x0.clone()),
    };
    let mut lanes: Vec<Running> = Vec::new();
    for v in variants::VARIANTS {
        let mut tracker = Tracker::new(n);
        let lane = match (v.build)(n, &lane_x0, &plan.p0) {
            Ok(l) => Some(l),
            Err(variants::BuildError::Size(k)) => {
                return Err(RunError(format!(
                    "no variant is built for {k} states (1 to 9 are)"
                )));
            }
            Err(variants::BuildError::Refused(e)) => {
                tracker.failure = Some(Failure {
                    step: 0,
                    time_s: 0.0,
                    operation: "start".into(),
                    error: e.to_string(),
                });
                None
            }
        };
        lanes.push(Running {
            lane,
            tracker,
            p: DMatrix::zeros(n, n),
            x: DVector::zeros(n),
            origin: start_origin,
            recentres: start_recentres,
        });
    }
    let baseline = variants::VARIANTS
        .iter()
        .position(|v| v.precision == Precision::F64 && v.form == "joseph");

    // Reference, truth and noise.
    let x0 = DVector::from_vec(plan.x0.clone());
    let mut reference = ReferenceFilter::new(&x0, &plan.p0);
    let mut noise = Noise::new(plan.seed);
    let mut truth = x0.clone();
    let p0_factor = sqrt_factor(&plan.p0);
    truth += noise.correlated(&p0_factor);
    let hs: Vec<DMatrix<f64>> = plan.channels.iter().map(|c| c.h(n)).collect();
    let r_factors: Vec<DMatrix<f64>> = plan.channels.iter().map(|c| sqrt_factor(&c.r)).collect();
    let q_factor = match &plan.model {
        ModelPlan::Linear { q, .. } => Some(sqrt_factor(q)),
        ModelPlan::Pose { .. } => None,
    };
    let pose_model = match &plan.model {
        ModelPlan::Pose {
            speed_var,
            yaw_rate_var,
            heading_drift_var,
            ..
        } => Some(PlanarOdometry {
            speed_var: *speed_var,
            yaw_rate_var: *yaw_rate_var,
            heading_drift_var: *heading_drift_var,
        }),
        ModelPlan::Linear { .. } => None,
    };

    let mut external = match &plan.external {
        Some(e) => Some(ExternalStream::open(&e.path, n, dt).map_err(RunError)?),
        None => None,
    };
    let mut ext_rows = 0_u64;
    let mut ext_max = 0.0_f64;

    let (steady_setup, steady_note) = steady_setup(plan);

    let bar = if opts.progress && std::io::stderr().is_terminal() && steps >= 50_000 {
        let b = ProgressBar::with_draw_target(Some(steps), ProgressDrawTarget::stderr());
        if let Ok(style) =
            ProgressStyle::with_template("{prefix} [{bar:40}] {percent:>3}% {eta} left")
        {
            b.set_style(style.progress_chars("=> "));
        }
        b.set_prefix("checking");
        b
    } else {
        ProgressBar::hidden()
    };

    let eig_every = (steps / BUCKETS as u64).max(1);
    let mut max_cond = 0.0_f64;
    let mut ref_min_eig = f64::INFINITY;
    let mut ref_updates = 0_u64;
    let mut ref_last_posterior: Option<DMatrix<f64>> = None;
    let mut z = Vec::with_capacity(3);
    let mut dx = DVector::<f64>::zeros(n);

    for k in 1..=steps {
        let t = k as f64 * dt;
        let bucket = (((k - 1) as u128 * BUCKETS as u128) / steps as u128) as usize;

        // Re-centring, before the step's predict moves the state on.
        if let Some(d) = recentre_m {
            for r in lanes.iter_mut().filter(|r| !r.tracker.stopped()) {
                recentre(r, d, k, t);
            }
        }

        // Predict.
        match (&plan.model, &pose_model) {
            (ModelPlan::Linear { f, q, .. }, _) => {
                reference.predict(f, q);
                truth = f * &truth;
                if let Some(l) = &q_factor {
                    truth += noise.correlated(l);
                }
                for r in lanes.iter_mut().filter(|r| !r.tracker.stopped()) {
                    if let Some(lane) = r.lane.as_mut()
                        && let Err(e) = lane.predict(f, q)
                    {
                        stop(r, k, t, "predict", &e.to_string());
                    }
                }
            }
            (ModelPlan::Pose { profile, .. }, Some(model)) => {
                let (v, w) = profile.at(t - dt);
                // Truth: the true odometry, plus heading drift.
                let xt = Vector3::new(truth[0], truth[1], truth[2]);
                let true_u = Odometry {
                    speed: v,
                    yaw_rate: w,
                };
                let mut xt = model.transition(&xt, &true_u, dt);
                xt[2] = wrap_angle(xt[2] + model.heading_drift_var.sqrt() * noise.normal());
                truth.copy_from_slice(xt.as_slice());
                // What the robot measures.
                let u = Odometry {
                    speed: v + model.speed_var.sqrt() * noise.normal(),
                    yaw_rate: w + model.yaw_rate_var.sqrt() * noise.normal(),
                };
                let xr = reference.state();
                let xr = Vector3::new(xr[0], xr[1], xr[2]);
                // The model's own linearisation, in f64, at the reference state.
                let lin = model.linearize(&xr, &u, dt);
                let f = DMatrix::from_fn(3, 3, |i, j| lin.jacobian[(i, j)]);
                let q = DMatrix::from_fn(3, 3, |i, j| lin.noise[(i, j)]);
                let sources = lin.sources.map(|(g, qs)| {
                    (
                        DMatrix::from_fn(3, 3, |i, j| g[(i, j)]),
                        [qs[0], qs[1], qs[2]],
                    )
                });
                reference.predict(&f, &q);
                let mut xn = lin.next;
                model.normalize(&mut xn);
                reference.set_state(&DVector::from_column_slice(xn.as_slice()));
                for r in lanes.iter_mut().filter(|r| !r.tracker.stopped()) {
                    if let Some(lane) = r.lane.as_mut() {
                        let res = match mode {
                            Mode::Covariance => match &sources {
                                Some((g, qs)) => lane.predict_sources(&f, &q, g, qs),
                                None => lane.predict(&f, &q),
                            },
                            Mode::EndToEnd => lane.predict_pose(model, u, dt),
                        };
                        if let Err(e) = res {
                            stop(r, k, t, "predict", &e.to_string());
                        }
                    }
                }
            }
            (ModelPlan::Pose { .. }, None) => {}
        }

        // Updates.
        let mut updated = false;
        for (ci, ch) in plan.channels.iter().enumerate() {
            if !ch.due(k, plan.step_hz) {
                continue;
            }
            updated = true;
            let h = &hs[ci];
            // The measurement.
            let v = noise.correlated(&r_factors[ci]);
            z.clear();
            match &ch.kind {
                ChannelKind::Linear(_) => z.extend((h * &truth + v).iter()),
                ChannelKind::Position => z.extend([truth[0] + v[0], truth[1] + v[1]]),
                ChannelKind::Heading => z.push(wrap_angle(truth[2] + v[0])),
            }
            // The reference.
            let prior = reference.covariance();
            let s = h * &prior * h.transpose() + &ch.r;
            let cond = match metrics::eigen_range(&s) {
                Some((lo, hi)) if lo > 0.0 => hi / lo,
                _ => f64::INFINITY,
            };
            max_cond = max_cond.max(cond);
            let xr = reference.state();
            let mut nu = DVector::from_column_slice(&z) - h * &xr;
            if matches!(ch.kind, ChannelKind::Heading) {
                nu[0] = wrap_angle(nu[0]);
            }
            let ru = reference.update(h, &ch.r, &nu).map_err(|e| {
                RunError(format!(
                    "the extended-precision reference refused the update of channel `{}` at step {k} \
                     (t = {t} s): {e}; the spec's R or H is inconsistent",
                    ch.name
                ))
            })?;
            ref_updates += 1;
            if pose_model.is_some() {
                let mut xs = reference.state();
                xs[2] = wrap_angle(xs[2]);
                reference.set_state(&xs);
            }
            // The variants.
            for r in lanes.iter_mut() {
                let Some(lane) = r.lane.as_mut() else {
                    continue;
                };
                let res = match (&ch.kind, mode) {
                    (ChannelKind::Linear(_), _) => lane.update(&z, h, &ch.r, ch.gate),
                    (_, Mode::Covariance) => {
                        // Same innovation as the reference, same Jacobian.
                        lane.state(&mut r.x);
                        let zl: Vec<f64> = (h * &r.x + &nu).iter().copied().collect();
                        lane.update(&zl, h, &ch.r, ch.gate)
                    }
                    (ChannelKind::Position, Mode::EndToEnd) => {
                        // The fix in the lane's frame, formed in f64.
                        let zl = [z[0] - r.origin[0], z[1] - r.origin[1]];
                        lane.update_pose(&zl, &ch.r, ch.gate)
                    }
                    (_, Mode::EndToEnd) => lane.update_pose(&z, &ch.r, ch.gate),
                };
                match res {
                    Ok(u) => {
                        if u.applied {
                            r.tracker.updates_applied += 1;
                        } else {
                            r.tracker.updates_gated += 1;
                        }
                        r.tracker.min_innovation_pivot_ratio =
                            r.tracker.min_innovation_pivot_ratio.min(u.pivot_ratio);
                        if let Some(g) = &u.gain {
                            r.tracker.gain(k, g, &ru.gain);
                        }
                    }
                    Err(e) => stop(r, k, t, &format!("update `{}`", ch.name), &e.to_string()),
                }
            }
        }

        // Figures.
        let pr = reference.covariance();
        let pr_norm = pr.norm();
        let eig_now = k % eig_every == 0 || k == steps || steps <= 5_000;
        if eig_now && let Some((m, _)) = metrics::eigen_range(&pr) {
            ref_min_eig = ref_min_eig.min(m);
        }
        let ext_p = match external.as_mut() {
            Some(e) => e.at(k).map_err(RunError)?,
            None => None,
        };
        if let Some(pe) = &ext_p {
            ext_rows += 1;
            ext_max = ext_max.max(metrics::relative(&pr, pe, pe.norm()));
        }
        let base_x = match (baseline, mode, plan.is_linear()) {
            (Some(b), Mode::EndToEnd, _) | (Some(b), _, true) => lanes[b].lane.as_ref().map(|l| {
                let mut x = DVector::zeros(n);
                if pose_model.is_some() {
                    Running::global_state(l.as_ref(), lanes[b].origin, &mut x);
                } else {
                    l.state(&mut x);
                }
                x
            }),
            _ => None,
        };
        for r in lanes.iter_mut() {
            let Some(lane) = r.lane.as_ref() else {
                continue;
            };
            lane.covariance(&mut r.p);
            r.tracker.covariance(k, bucket, &r.p, &pr, pr_norm);
            if eig_now || updated && steps <= 5_000 {
                r.tracker.eigen(k, &r.p);
            }
            if updated && !r.tracker.stopped() {
                match r.tracker.last_posterior.as_mut() {
                    Some(lp) => lp.copy_from(&r.p),
                    None => r.tracker.last_posterior = Some(r.p.clone()),
                }
            }
            if let Some(pe) = &ext_p {
                let e = metrics::relative(&r.p, pe, pe.norm());
                let m = r.tracker.max_external_error.get_or_insert(0.0);
                *m = m.max(e);
            }
            if let Some(bx) = &base_x {
                r.tracker.states_compared = true;
                if pose_model.is_some() {
                    Running::global_state(lane.as_ref(), r.origin, &mut r.x);
                } else {
                    lane.state(&mut r.x);
                }
                dx.copy_from(&r.x);
                dx -= bx;
                if pose_model.is_some() {
                    dx[2] = wrap_angle(dx[2]);
                }
                let mut step_sigma = 0.0_f64;
                for i in 0..n {
                    let d = dx[i].abs();
                    let t = &mut r.tracker;
                    t.max_state_difference[i] = t.max_state_difference[i].max(d);
                    let sd = pr[(i, i)].sqrt();
                    if sd > 0.0 {
                        step_sigma = step_sigma.max(d / sd);
                    }
                }
                r.tracker.state_difference(bucket, step_sigma);
            }
        }
        for r in lanes.iter_mut().filter(|r| r.tracker.stopped()) {
            // A refused operation left the lane's P as it was: it was measured
            // above at the step of the refusal; the lane stops here.
            if r.lane.take().is_some() {
                r.tracker.eigen(k, &r.p);
            }
        }
        if updated {
            ref_last_posterior = Some(pr);
        }
        if k % 8192 == 0 {
            bar.set_position(k);
        }
    }
    bar.finish_and_clear();

    // Steady state.
    let mut steady = None;
    let mut steady_note = steady_note;
    if let Some((fl, hl, ql, rl, every)) = &steady_setup {
        let every = *every;
        match dare::solve(fl, hl, ql, rl) {
            Ok(s) => {
                let sn = s.posterior.norm();
                for r in lanes.iter_mut() {
                    r.tracker.steady_distance = r
                        .tracker
                        .last_posterior
                        .as_ref()
                        .filter(|_| r.tracker.failure.is_none())
                        .map(|p| metrics::relative(p, &s.posterior, sn));
                }
                steady = Some(SteadyResult {
                    prior: rows(&s.prior),
                    posterior: rows(&s.posterior),
                    gain: rows(&s.gain),
                    iterations: s.iterations,
                    residual: s.residual,
                    steps_per_update: every,
                    reference_distance: ref_last_posterior
                        .as_ref()
                        .map(|p| metrics::relative(p, &s.posterior, sn)),
                });
            }
            Err(e) => steady_note = Some(format!("no steady state: {e}")),
        }
    }

    // Verdicts.
    let mut variants_out = Vec::new();
    for (v, r) in variants::VARIANTS.iter().zip(lanes) {
        let innovation_rounding = max_cond * v.precision.epsilon();
        let verdict = judge(&r.tracker, &plan.thresholds);
        variants_out.push(VariantResult {
            name: v.name(),
            precision: v.precision,
            form: v.form.to_string(),
            cost_rank: v.cost_rank,
            figures: r.tracker,
            innovation_rounding,
            verdict,
            recentres: r.recentres,
            origin: r.origin,
        });
    }
    let flash = format!("{} {}", plan.flash.precision.name(), plan.flash.form);
    let flash_passes_horizon = variants_out
        .iter()
        .any(|v| v.name == flash && v.verdict.passes);
    let cheapest_passing = variants_out
        .iter()
        .filter(|v| v.verdict.passes)
        .min_by_key(|v| v.cost_rank)
        .map(|v| v.name.clone());
    let external = plan.external.as_ref().map(|e| ExternalResult {
        rows: ext_rows,
        max_difference: ext_max,
        tolerance: e.tolerance,
        agrees: ext_rows > 0 && ext_max <= e.tolerance,
    });
    let series_time = (1..=BUCKETS)
        .map(|b| (b as f64 * steps as f64 / BUCKETS as f64).ceil() * dt)
        .collect();
    let pr = reference.covariance();
    let lifted = steady_setup.filter(|_| steady.is_some());
    let mut result = RunResult {
        steps,
        dt,
        mode,
        recentre_m,
        reference: ReferenceResult {
            final_covariance: rows(&pr),
            final_state: reference.state().iter().copied().collect(),
            max_innovation_condition: max_cond,
            min_eigenvalue: ref_min_eig,
            updates: ref_updates,
        },
        variants: variants_out,
        steady,
        steady_note,
        external,
        series_time,
        flash,
        flash_passes: flash_passes_horizon,
        flash_passes_horizon,
        cheapest_passing,
        mission: None,
    };
    let mission = crate::mission::analyze(
        &crate::mission::MissionInputs {
            plan,
            lifted: lifted.as_ref(),
            lifted_note: result.steady_note.as_deref(),
        },
        &result,
    );
    result.flash_passes = mission
        .variants
        .iter()
        .any(|v| v.name == result.flash && v.passes_mission);
    result.mission = Some(mission);
    Ok(result)
}

fn stop(r: &mut Running, k: u64, t: f64, op: &str, err: &str) {
    r.tracker.failure = Some(Failure {
        step: k,
        time_s: t,
        operation: op.to_string(),
        error: err.to_string(),
    });
}

/// The LTI model between updates: (F^m, H stacked, sum F^i Q F^i', R
/// block diagonal, m steps per update).
pub type Lifted = (DMatrix<f64>, DMatrix<f64>, DMatrix<f64>, DMatrix<f64>, u64);

/// The lifted LTI model between updates, when the spec has one: a linear
/// model whose channels all update together every m steps without dropouts.
fn steady_setup(plan: &Plan) -> (Option<Lifted>, Option<String>) {
    let ModelPlan::Linear { f, q, .. } = &plan.model else {
        return (None, Some("no steady state for a nonlinear model".into()));
    };
    if plan.channels.is_empty() {
        return (None, Some("no steady state without measurements".into()));
    }
    let ratio = plan.step_hz / plan.channels[0].rate_hz;
    let every = ratio.round();
    if !(1.0..=1e5).contains(&every) {
        return (
            None,
            Some("no steady state: more than 100 000 steps between updates".into()),
        );
    }
    if (ratio - every).abs() > 1e-9 * ratio {
        return (
            None,
            Some("no steady state: the update rate does not divide the step rate".into()),
        );
    }
    if plan.channels.iter().any(|c| {
        (c.rate_hz - plan.channels[0].rate_hz).abs() > 1e-12 * c.rate_hz || !c.dropouts.is_empty()
    }) {
        return (
            None,
            Some("no steady state: channels differ in rate or have dropouts".into()),
        );
    }
    let n = plan.n();
    let mut fl = DMatrix::identity(n, n);
    let mut ql = DMatrix::zeros(n, n);
    for _ in 0..every as u64 {
        ql = f * &ql * f.transpose() + q;
        fl = f * fl;
    }
    let m: usize = plan.channels.iter().map(|c| c.m).sum();
    let mut h = DMatrix::zeros(m, n);
    let mut r = DMatrix::zeros(m, m);
    let mut row = 0;
    for c in &plan.channels {
        h.view_mut((row, 0), (c.m, n)).copy_from(&c.h(n));
        r.view_mut((row, row), (c.m, c.m)).copy_from(&c.r);
        row += c.m;
    }
    (Some((fl, h, ql, r, every as u64)), None)
}
