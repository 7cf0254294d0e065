//! The spec's check: turns a validated spec's models into engine models
//! (the size chosen at run time among compiled sizes) and runs the engine.

pub mod external;
pub mod metrics;
pub(crate) mod synth;
mod verdict;

use nalgebra::DMatrix;

use crate::engine::check::Steady;
pub use crate::engine::result::{
    ExternalResult, Reach, ReferenceResult, RunError, RunOptions, RunResult, SteadyResult,
    VariantResult,
};
use crate::engine::{Channel, SensorChannel, Source, check};
use crate::models::{HeadingSensor, LinearSensor, LinearSystem, PoseSystem, PositionSensor};
use crate::spec::{ChannelKind, ModelPlan, Plan};
pub use metrics::{Failure, Tracker};
pub use verdict::{Verdict, judge};

/// The largest number of states a spec's linear model may have.
pub const MAX_STATES: usize = 24;
/// The largest number of components of a spec's linear channel.
pub const MAX_COMPONENTS: usize = 3;

/// A linear channel of `m` components over `N` states, as an engine channel.
fn linear_channel<const N: usize>(
    h: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<Box<dyn Channel<N>>, RunError> {
    Ok(match h.nrows() {
        1 => Box::new(SensorChannel::<_, 1>(LinearSensor::<N, 1>::new(h, r))),
        2 => Box::new(SensorChannel::<_, 2>(LinearSensor::<N, 2>::new(h, r))),
        3 => Box::new(SensorChannel::<_, 3>(LinearSensor::<N, 3>::new(h, r))),
        m => {
            return Err(RunError(format!(
                "a channel of {m} components: 1 to {MAX_COMPONENTS} are supported"
            )));
        }
    })
}

fn run_linear<const N: usize>(
    plan: &Plan,
    f: &DMatrix<f64>,
    q: &DMatrix<f64>,
    opts: RunOptions,
) -> Result<RunResult, RunError> {
    let system = LinearSystem::<N>::new(f, q);
    let channels = plan
        .channels
        .iter()
        .map(|c| linear_channel::<N>(&c.h(N), &c.r))
        .collect::<Result<Vec<_>, _>>()?;
    let refs: Vec<&dyn Channel<N>> = channels.iter().map(AsRef::as_ref).collect();
    let (lifted, note) = steady_setup(plan);
    let no_input = |_: f64, _: &mut [f64]| {};
    check(
        plan,
        &system,
        &refs,
        &Source::Simulated { inputs: &no_input },
        &Steady { lifted, note },
        opts,
    )
}

/// Picks the compiled size for a linear model of `n` states.
macro_rules! linear_sizes {
    ($n:expr, $plan:expr, $f:expr, $q:expr, $opts:expr; $($k:literal)*) => {
        match $n {
            $( $k => run_linear::<$k>($plan, $f, $q, $opts), )*
            other => Err(RunError(format!(
                "{other} states: the spec's linear models run with 1 to {MAX_STATES} states"
            ))),
        }
    };
}

/// Runs the check a plan describes.
///
/// # Errors
/// [`RunError`] when the reference itself refuses the schedule (the spec is
/// inconsistent) or the external reference file is malformed.
pub fn run(plan: &Plan, opts: RunOptions) -> Result<RunResult, RunError> {
    match &plan.model {
        ModelPlan::Linear { f, q, .. } => linear_sizes!(plan.n(), plan, f, q, opts;
            1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24),
        ModelPlan::User { .. } => Err(RunError(
            "a user's own model is checked through the library (cairn_host_check::scenario)".into(),
        )),
        ModelPlan::Pose {
            speed_var,
            yaw_rate_var,
            heading_drift_var,
            profile,
            ..
        } => {
            let system = PoseSystem {
                speed_var: *speed_var,
                yaw_rate_var: *yaw_rate_var,
                heading_drift_var: *heading_drift_var,
            };
            let channels = plan
                .channels
                .iter()
                .map(|c| -> Result<Box<dyn Channel<3>>, RunError> {
                    Ok(match &c.kind {
                        ChannelKind::Position => Box::new(SensorChannel::<_, 2>(PositionSensor {
                            r: nalgebra::Matrix2::from_fn(|i, j| c.r[(i, j)]),
                        })),
                        ChannelKind::Heading => {
                            Box::new(SensorChannel::<_, 1>(HeadingSensor { var: c.r[(0, 0)] }))
                        }
                        ChannelKind::Linear(h) => linear_channel::<3>(h, &c.r)?,
                        ChannelKind::User => {
                            return Err(RunError("a user's own channel needs its model".into()));
                        }
                    })
                })
                .collect::<Result<Vec<_>, _>>()?;
            let refs: Vec<&dyn Channel<3>> = channels.iter().map(AsRef::as_ref).collect();
            let inputs = |t: f64, out: &mut [f64]| {
                let (v, w) = profile.at(t);
                out[0] = v;
                out[1] = w;
            };
            check(
                plan,
                &system,
                &refs,
                &Source::Simulated { inputs: &inputs },
                &Steady {
                    lifted: None,
                    note: Some("no steady state for a nonlinear model".into()),
                },
                opts,
            )
        }
    }
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
