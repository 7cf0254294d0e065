//! The spec's check: turns a validated spec's models into engine models
//! (the size chosen at run time among compiled sizes) and runs the engine.

pub mod external;
pub mod metrics;
pub(crate) mod synth;
mod verdict;

use crate::engine::check::Steady;
pub use crate::engine::result::{
    ExternalResult, Reach, ReferenceResult, RunError, RunOptions, RunResult, SteadyResult,
    VariantResult,
};
use crate::engine::{Channel, InputProfile, Source, System, check};
use crate::models::{Visit, with_models};
use crate::spec::Plan;
pub use metrics::{Failure, Tracker};
pub use verdict::{Verdict, judge};

pub use crate::models::{Lifted, MAX_COMPONENTS, MAX_STATES};

struct Check<'a> {
    plan: &'a Plan,
    opts: RunOptions,
}

impl Visit for Check<'_> {
    type Output = Result<RunResult, RunError>;

    fn visit<const N: usize, S: System<N>>(
        self,
        system: &S,
        channels: &[&dyn Channel<N>],
        inputs: &dyn InputProfile,
        steady: Steady,
    ) -> Self::Output {
        check(
            self.plan,
            system,
            channels,
            &Source::Simulated { inputs },
            &steady,
            self.opts,
        )
    }
}

/// Runs the check a plan describes.
///
/// # Errors
/// [`RunError`] when the reference itself refuses the schedule (the spec is
/// inconsistent) or the external reference file is malformed.
pub fn run(plan: &Plan, opts: RunOptions) -> Result<RunResult, RunError> {
    with_models(plan, Check { plan, opts }).map_err(|e| RunError(e.0))?
}
