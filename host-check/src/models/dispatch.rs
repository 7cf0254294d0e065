//! The one place where a spec's model becomes engine models, and where the
//! run-time size picks one of the compiled sizes.

use nalgebra::{DMatrix, Vector2};

use super::{HeadingSensor, LinearSensor, LinearSystem, PoseSystem, PositionSensor};
use crate::engine::check::Steady;
use crate::engine::{Channel, InputProfile, SensorChannel, System};
use crate::spec::{ChannelKind, ModelPlan, Plan};

/// The largest number of states a spec's linear model may have.
pub const MAX_STATES: usize = 24;
/// The largest number of components of a spec's linear channel.
pub const MAX_COMPONENTS: usize = 3;

/// What to do with the spec's models once their size is a type.
pub trait Visit {
    /// The result.
    type Output;

    /// Runs with the models.
    fn visit<const N: usize, S: System<N>>(
        self,
        system: &S,
        channels: &[&dyn Channel<N>],
        inputs: &dyn InputProfile,
        steady: Steady,
    ) -> Self::Output;
}

/// Why a spec's models could not be built.
#[derive(Debug, Clone)]
pub struct ModelError(pub String);

/// A linear channel over `N` states.
fn linear_channel<const N: usize>(
    h: &DMatrix<f64>,
    r: &DMatrix<f64>,
) -> Result<Box<dyn Channel<N>>, ModelError> {
    Ok(match h.nrows() {
        1 => Box::new(SensorChannel::<_, 1>(LinearSensor::<N, 1>::new(h, r))),
        2 => Box::new(SensorChannel::<_, 2>(LinearSensor::<N, 2>::new(h, r))),
        3 => Box::new(SensorChannel::<_, 3>(LinearSensor::<N, 3>::new(h, r))),
        m => {
            return Err(ModelError(format!(
                "a channel of {m} components: 1 to {MAX_COMPONENTS} are supported"
            )));
        }
    })
}

fn linear<const N: usize, V: Visit>(
    plan: &Plan,
    f: &DMatrix<f64>,
    q: &DMatrix<f64>,
    v: V,
) -> Result<V::Output, ModelError> {
    let system = LinearSystem::<N>::new(f, q);
    let channels = plan
        .channels
        .iter()
        .map(|c| linear_channel::<N>(&c.h(N), &c.r))
        .collect::<Result<Vec<_>, _>>()?;
    let refs: Vec<&dyn Channel<N>> = channels.iter().map(AsRef::as_ref).collect();
    let (lifted, note) = super::linear::steady_setup(plan, f, q);
    let no_input = |_: f64, _: &mut [f64]| {};
    Ok(v.visit(&system, &refs, &no_input, Steady { lifted, note }))
}

macro_rules! linear_sizes {
    ($n:expr, $plan:expr, $f:expr, $q:expr, $v:expr; $($k:literal)*) => {
        match $n {
            $( $k => linear::<$k, _>($plan, $f, $q, $v), )*
            other => Err(ModelError(format!(
                "{other} states: the spec's linear models run with 1 to {MAX_STATES} states"
            ))),
        }
    };
}

/// Builds the spec's models and hands them to `v`.
///
/// # Errors
/// [`ModelError`] for a size with no compiled instance, a channel that
/// does not fit the model, or a user model (which has no spec form).
pub fn with_models<V: Visit>(plan: &Plan, v: V) -> Result<V::Output, ModelError> {
    match &plan.model {
        ModelPlan::Linear { f, q, .. } => linear_sizes!(plan.n(), plan, f, q, v;
            1 2 3 4 5 6 7 8 9 10 11 12 13 14 15 16 17 18 19 20 21 22 23 24),
        ModelPlan::User { .. } => Err(ModelError(
            "a user's own model is checked through the library (cairn_host_check::scenario)".into(),
        )),
        ModelPlan::Pose {
            speed_var,
            yaw_rate_var,
            heading_drift_var,
            profile,
            ..
        } => {
            if plan.n() != 3 {
                return Err(ModelError(format!(
                    "the planar pose model has 3 states, the spec {}",
                    plan.n()
                )));
            }
            let system = PoseSystem {
                speed_var: *speed_var,
                yaw_rate_var: *yaw_rate_var,
                heading_drift_var: *heading_drift_var,
            };
            let channels = plan
                .channels
                .iter()
                .map(|c| -> Result<Box<dyn Channel<3>>, ModelError> {
                    Ok(match &c.kind {
                        ChannelKind::Position => Box::new(SensorChannel::<_, 2>(PositionSensor {
                            var: Vector2::new(c.r[(0, 0)], c.r[(1, 1)]),
                        })),
                        ChannelKind::Heading => {
                            Box::new(SensorChannel::<_, 1>(HeadingSensor { var: c.r[(0, 0)] }))
                        }
                        ChannelKind::Linear(h) => linear_channel::<3>(h, &c.r)?,
                        ChannelKind::User => {
                            return Err(ModelError(format!(
                                "channel `{}`: a user's own channel needs its model",
                                c.name
                            )));
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
            Ok(v.visit(
                &system,
                &refs,
                &inputs,
                Steady {
                    lifted: None,
                    note: Some("no steady state for a nonlinear model".into()),
                },
            ))
        }
    }
}
