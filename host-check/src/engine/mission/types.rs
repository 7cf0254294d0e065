//! What the mission stage found, as data: per variant, the steady-gain
//! option and the final verdict (the engine's result holds it).

use serde::Serialize;

pub use super::fit::Trend;
pub use super::gain::ConstantGain;

/// What a projection says about the mission.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Outlook {
    /// Within the limit for the whole mission, even at the upper end of
    /// the slope interval (or by the steady-state argument).
    Passes,
    /// Over the limit within the mission: over it within the horizon, or a
    /// significant rise that crosses it even at the lower end of the slope
    /// interval.
    Fails,
    /// The data cannot decide: no significant rise, but the upper end of
    /// the slope interval would cross within the mission (or too few
    /// points to test).
    Undecided,
}

impl Outlook {
    /// "PASS", "FAIL" or "UNDECIDED".
    pub fn word(self) -> &'static str {
        match self {
            Outlook::Passes => "PASS",
            Outlook::Fails => "FAIL",
            Outlook::Undecided => "UNDECIDED",
        }
    }
}

/// Which case of theory applies to a variant's covariance error.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum Case {
    /// Time-invariant and on the Riccati steady state: bounded.
    Bounded,
    /// Time-invariant, but the reference has not reached the steady state.
    NotSteady,
    /// Some modes are not reached by the measurements.
    Unobservable,
    /// Measurements drop out: the covariance runs open loop in the gaps.
    Dropouts,
    /// Time-varying (nonlinear model, or a schedule without a lifted
    /// steady state): no bound to lean on.
    TimeVarying,
    /// No measurements at all.
    OpenLoop,
}

/// One variant over the mission.
#[derive(Debug, Clone, Serialize)]
pub struct VariantMission {
    /// Variant name.
    pub name: String,
    /// Which case of theory applies to its covariance error.
    pub case: Case,
    /// Why, in one sentence.
    pub reason: String,
    /// The trend test and robust slope on its relative covariance error
    /// (none when it stopped early or had too few points).
    pub trend: Option<Trend>,
    /// What the covariance projection alone says (none when it stopped).
    pub outlook_covariance: Option<Outlook>,
    /// Its relative covariance error at the end of the mission: the robust
    /// line when the rise is significant, else the largest block maximum
    /// after the start-up; never below the largest value seen.
    pub projected_error: Option<f64>,
    /// The upper end: the largest block maximum after the start-up plus
    /// the upper slope (the interval's upper half-width above max(slope, 0)) times the steps left (that maximum
    /// itself when bounded); never below the largest value seen.
    pub projected_error_high: Option<f64>,
    /// The same test on its state difference from the f64 run (in standard
    /// deviations), when states are compared.
    pub state_trend: Option<Trend>,
    /// Why the state difference is tested rather than bounded.
    pub state_reason: Option<String>,
    /// What the state projection alone says.
    pub outlook_state: Option<Outlook>,
    /// That difference at the end of the mission (as `projected_error`).
    #[serde(rename = "projected_state_difference_sd")]
    pub projected_state_sigma: Option<f64>,
    /// When its relative error or its state difference would cross its
    /// threshold, s from the start, whichever first (robust line; `None`:
    /// no significant rise, or it fails within the horizon at the time
    /// given).
    pub crossing_s: Option<f64>,
    /// The earliest crossing the slope interval allows, s.
    pub crossing_low_s: Option<f64>,
    /// The latest, s (`None`: the interval reaches a slope of 0: never).
    pub crossing_high_s: Option<f64>,
    /// For an undecided verdict: the horizon that would decide it, s.
    pub run_at_least_s: Option<f64>,
    /// The mission verdict.
    pub outlook: Outlook,
    /// The crossing in words ("never", "after 3.2 days (1.1 to 9.0
    /// days)", "fails within the horizon", "undecided: run at least 6.1 h").
    pub crossing: String,
    /// `true` when it passes over the horizon and the mission outlook is
    /// [`Outlook::Passes`].
    pub passes_mission: bool,
}

/// The final verdict: what to flash.
#[derive(Debug, Clone, Serialize)]
pub struct FinalVerdict {
    /// The cheapest variant that passes for the whole mission, if any.
    pub choice: Option<String>,
    /// Cheaper variants whose mission verdict is undecided, with the
    /// horizon that would decide each ("f32 joseph: run at least 6.1 h").
    pub undecided: Vec<String>,
    /// The longest of those horizons, s.
    pub run_at_least_s: Option<f64>,
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
    /// The steady-gain option, when offered.
    #[serde(rename = "steady_gain")]
    pub constant_gain: Option<ConstantGain>,
    /// Why the steady-gain option is not offered, or a caveat.
    #[serde(rename = "steady_gain_note")]
    pub constant_gain_note: Option<String>,
    /// The final verdict.
    pub verdict: FinalVerdict,
}
