//! What a check prints and writes: the terminal report, the JSON report with
//! every figure, and the SVG plot of drift against time.

mod svg;
mod text;

use serde::Serialize;

use crate::run::RunResult;
use crate::spec::{ConversionRecord, Flash, ModelPlan, Plan, StateInfo, Thresholds};

pub use svg::plot;
pub use text::{render, render_as};

/// The plots' colours, our own: hue and lightness both vary from one to the
/// next (dark blue, light orange, mid teal, dark wine, light olive, mid
/// violet, mid brick, dark grey), so neighbours differ for a reader who does
/// not tell red from green; markers and dash patterns tell them apart too.
pub const PALETTE: [&str; 8] = [
    "#1d3f8a", "#e3902a", "#2f9a8b", "#7d1d47", "#a3b640", "#5a4aa0", "#c0674a", "#444444",
];

/// The sentence every verdict carries.
pub const NOT_A_SAFETY_CASE: &str = "A numerical pass is not a safety case: it says the arithmetic \
tracks an extended-precision reference on this schedule, nothing about your robot. A machine that \
moves can hurt people; its safety rests on a hazard analysis, the applicable functional-safety \
standards (for example IEC 61508, ISO 13849, ISO 10218, ISO 3691-4) and licensed engineering practice.";

/// The whole report, as written to JSON.
#[derive(Debug, Clone, Serialize)]
pub struct Report<'a> {
    /// Format version of this JSON.
    pub format: u32,
    /// Spec title.
    pub title: &'a str,
    /// Spec file.
    pub spec: &'a str,
    /// States.
    pub states: &'a [StateInfo],
    /// Step rate, Hz.
    pub step_hz: f64,
    /// Thresholds used.
    pub thresholds: Thresholds,
    /// The variant to flash.
    pub flash: &'a Flash,
    /// Noise conversions.
    pub conversions: &'a [ConversionRecord],
    /// The filter's matrices as the spec (and its noise figures) made them.
    pub matrices: Matrices,
    /// The run.
    pub run: &'a RunResult,
    /// Decimated relative error per variant (largest in each bucket).
    pub series: Vec<Series<'a>>,
    /// The disclaimer.
    pub note: &'static str,
}

/// The numbers the filter is given: F and Q (linear models) or the pose
/// model's variances, and each channel's R, row-major.
#[derive(Debug, Clone, Serialize)]
pub struct Matrices {
    /// Transition matrix (linear models).
    pub f: Option<Vec<Vec<f64>>>,
    /// Discrete process noise (linear models).
    pub q: Option<Vec<Vec<f64>>>,
    /// Pose model: speed, yaw-rate and heading-drift variances per step.
    pub pose_variances: Option<[f64; 3]>,
    /// Each channel's name and R.
    pub r: Vec<(String, Vec<Vec<f64>>)>,
}

impl Matrices {
    /// The matrices of a plan.
    pub fn of(plan: &Plan) -> Self {
        let rows = |m: &nalgebra::DMatrix<f64>| -> Vec<Vec<f64>> {
            (0..m.nrows())
                .map(|i| (0..m.ncols()).map(|j| m[(i, j)]).collect())
                .collect()
        };
        let (f, q, pose_variances) = match &plan.model {
            ModelPlan::Linear { f, q, .. } => (Some(rows(f)), Some(rows(q)), None),
            ModelPlan::User { .. } => (None, None, None),
            ModelPlan::Pose {
                speed_var,
                yaw_rate_var,
                heading_drift_var,
                ..
            } => (
                None,
                None,
                Some([*speed_var, *yaw_rate_var, *heading_drift_var]),
            ),
        };
        Self {
            f,
            q,
            pose_variances,
            r: plan
                .channels
                .iter()
                .map(|c| (c.name.clone(), rows(&c.r)))
                .collect(),
        }
    }
}

/// One variant's decimated series.
#[derive(Debug, Clone, Serialize)]
pub struct Series<'a> {
    /// Variant name.
    pub variant: &'a str,
    /// Relative error per bucket (null where the variant had stopped).
    pub relative_error: Vec<Option<f64>>,
}

impl<'a> Report<'a> {
    /// Assembles the report of a run.
    pub fn new(plan: &'a Plan, run: &'a RunResult) -> Self {
        let series = run
            .variants
            .iter()
            .map(|v| Series {
                variant: &v.name,
                relative_error: v
                    .figures
                    .series
                    .iter()
                    .map(|x| x.is_finite().then_some(*x))
                    .collect(),
            })
            .collect();
        Self {
            format: 2,
            title: &plan.title,
            spec: &plan.file,
            states: &plan.states,
            step_hz: plan.step_hz,
            thresholds: plan.thresholds,
            flash: &plan.flash,
            conversions: &plan.conversions,
            matrices: Matrices::of(plan),
            run,
            series,
            note: NOT_A_SAFETY_CASE,
        }
    }

    /// The JSON text.
    ///
    /// # Errors
    /// Serialisation errors (none expected: non-finite numbers become null).
    pub fn to_json(&self) -> Result<String, serde_json::Error> {
        serde_json::to_string_pretty(self)
    }
}

#[cfg(test)]
mod tests {
    use super::PALETTE;

    /// Relative luminance of an sRGB colour (WCAG 2.x definition, common
    /// practice).
    fn luminance(hex: &str) -> f64 {
        let channel = |i: usize| {
            let c = f64::from(u8::from_str_radix(&hex[i..i + 2], 16).unwrap()) / 255.0;
            if c <= 0.040_45 {
                c / 12.92
            } else {
                ((c + 0.055) / 1.055).powf(2.4)
            }
        };
        0.2126 * channel(1) + 0.7152 * channel(3) + 0.0722 * channel(5)
    }

    #[test]
    fn neighbouring_colours_differ_in_lightness() {
        // Our own rule for readers who do not tell hues apart: each colour's
        // luminance differs from the next one's by at least 0.1, and no two
        // colours are equal.
        for pair in PALETTE.windows(2) {
            let d = (luminance(pair[0]) - luminance(pair[1])).abs();
            assert!(d >= 0.1, "{} {}: {d}", pair[0], pair[1]);
        }
        for (i, a) in PALETTE.iter().enumerate() {
            assert!(PALETTE[i + 1..].iter().all(|b| b != a), "{a}");
        }
    }
}
