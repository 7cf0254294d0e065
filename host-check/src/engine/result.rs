//! What a check found: per variant, for the reference, the steady state,
//! the Jacobians and the mission, as one serialisable value.

use serde::Serialize;

use super::jacobian::JacobianReport;
use super::metrics::Tracker;
pub use super::verdict::{Verdict, judge};
use crate::engine::plan::{Mode, Precision};

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
    /// Times the variant moved its origin (end-to-end mode with an origin
    /// shift).
    #[serde(rename = "origin_shifts")]
    pub recentres: u64,
    /// Gate decisions of this variant that differ from the reference's
    /// (every variant applies exactly what the reference applies, so that
    /// covariances are compared on the same decisions).
    pub gate_differences: u64,
    /// The first step where its gate decided otherwise.
    pub first_gate_difference: Option<u64>,
    /// Largest NEES against the known truth (end-to-end with a simulated
    /// truth or a log's truth rows), and the steps it was computed at.
    pub max_nees: Option<f64>,
    /// Why it fails, in one line (`None` when it passes).
    pub why: Option<String>,
    /// The variant's origin at the end, m (x, y; zero without re-centring).
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
    /// Updates the reference's gate refused.
    pub gated: u64,
}

/// How far one state wandered, and what f32 resolves there.
#[derive(Debug, Clone, Serialize)]
pub struct Reach {
    /// The state's name.
    pub state: String,
    /// Largest |x| reached by the reference (and the simulated truth).
    pub max_abs: f64,
    /// The spacing of f32 numbers there (one unit in the last place).
    pub f32_spacing: f64,
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
    /// The origin-shift distance the variants used, m (`None`: they kept
    /// the spec's frame).
    #[serde(rename = "origin_shift_m")]
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
    /// The Jacobian comparison (nonlinear models).
    pub jacobians: Option<JacobianReport>,
    /// How far each state wandered.
    pub reach: Vec<Reach>,
    /// Where the steps came from ("simulated" or the log's path).
    pub source: String,
    /// The mission-length verdict (filled in once the run is over).
    pub mission: Option<crate::engine::mission::types::MissionResult>,
}
