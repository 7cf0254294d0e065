//! The spec's check: turns a validated spec's models into engine models
//! (the size chosen at run time among compiled sizes) and runs the engine.

use crate::engine::check::Steady;
pub use crate::engine::external;
pub use crate::engine::metrics::{self, Failure, Tracker};
pub use crate::engine::result::{
    ExternalResult, Reach, ReferenceResult, RunError, RunOptions, RunResult, SteadyResult,
    VariantResult,
};
pub use crate::engine::verdict::{Verdict, judge};
use crate::engine::{Channel, InputProfile, Source, System, check};
use crate::models::{Visit, with_models};
use crate::spec::Plan;

pub use crate::engine::check::Lifted;
pub use crate::models::{MAX_COMPONENTS, MAX_STATES};

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
        let mut result = check(
            self.plan,
            system,
            channels,
            &Source::Simulated { inputs },
            &steady,
            self.opts,
        )?;
        crate::engine::mission::complete(self.plan, &steady, &mut result);
        Ok(result)
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
