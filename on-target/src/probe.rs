//! Cost probes: one never-inlined wrapper per filter operation, so the cost
//! estimator (`cairn cost`) finds each operation by its symbol name in the
//! ELF and attributes every instruction executed under it.
//!
//! The symbols keep Rust's mangling; the estimator demangles them and looks
//! for the paths `cairn_on_target::probe::<name>`.

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use cairn_core::{Conventional, FilterError, Joseph, Kalman, Outcome};
use nalgebra::{SMatrix, SVector, Vector1, Vector2};

/// Pose filter predict: odometry step through the planar model.
#[inline(never)]
pub fn pose_predict(
    filter: &mut Kalman<f32, 3, Joseph>,
    model: &PlanarOdometry<f32>,
    odo: &Odometry<f32>,
    dt: f32,
) -> Result<(), FilterError> {
    filter.predict_with(model, odo, dt)
}

/// Pose filter update with a position fix (m = 2).
#[inline(never)]
pub fn pose_position_update(
    filter: &mut Kalman<f32, 3, Joseph>,
    model: &PositionFix<f32>,
    z: &Vector2<f32>,
    gate: Option<f32>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update_with(model, z, gate)
}

/// Pose filter update with a heading fix (m = 1).
#[inline(never)]
pub fn pose_heading_update(
    filter: &mut Kalman<f32, 3, Joseph>,
    model: &HeadingFix<f32>,
    z: &Vector1<f32>,
    gate: Option<f32>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update_with(model, z, gate)
}

/// Linear predict, n = 9.
#[inline(never)]
pub fn linear9_predict(
    filter: &mut Kalman<f32, 9, Joseph>,
    f: &SMatrix<f32, 9, 9>,
    q: &SMatrix<f32, 9, 9>,
) -> Result<(), FilterError> {
    filter.predict(f, q)
}

/// Linear Joseph update, n = 9, m = 3.
#[inline(never)]
pub fn linear9_update3_joseph(
    filter: &mut Kalman<f32, 9, Joseph>,
    z: &SVector<f32, 3>,
    h: &SMatrix<f32, 3, 9>,
    r: &SMatrix<f32, 3, 3>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update(z, h, r, None)
}

/// Linear conventional update, n = 9, m = 3.
#[inline(never)]
pub fn linear9_update3_conventional(
    filter: &mut Kalman<f32, 9, Conventional>,
    z: &SVector<f32, 3>,
    h: &SMatrix<f32, 3, 9>,
    r: &SMatrix<f32, 3, 3>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update(z, h, r, None)
}

/// The probe names, in the order the cost probe binary runs them.
pub const NAMES: [&str; 6] = [
    "pose_predict",
    "pose_position_update",
    "pose_heading_update",
    "linear9_predict",
    "linear9_update3_joseph",
    "linear9_update3_conventional",
];
