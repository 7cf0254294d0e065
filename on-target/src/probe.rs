//! Cost probes: one never-inlined wrapper per filter operation, so the cost
//! estimator (`cairn cost`) finds each operation by its symbol name in the
//! ELF and attributes every instruction executed under it.
//!
//! The symbols keep Rust's mangling; the estimator demangles them and looks
//! for the paths `cairn_on_target::probe::<name>`.

use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use core::hint::black_box;

use cairn_core::{
    Checked, Conventional, FilterError, Joseph, Kalman, Outcome, ProcessModel, UdKalman,
};
use nalgebra::{SMatrix, SVector, Vector1, Vector2};

use crate::scenario::Lcg;

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

/// Pose filter predict with the definiteness check on: every commit also
/// factors P as LDL' (the `Checked<Joseph>` form).
#[inline(never)]
pub fn pose_predict_checked(
    filter: &mut Kalman<f32, 3, Checked<Joseph>>,
    model: &PlanarOdometry<f32>,
    odo: &Odometry<f32>,
    dt: f32,
) -> Result<(), FilterError> {
    filter.predict_with(model, odo, dt)
}

/// Pose filter position update (m = 2) with the definiteness check on.
#[inline(never)]
pub fn pose_position_update_checked(
    filter: &mut Kalman<f32, 3, Checked<Joseph>>,
    model: &PositionFix<f32>,
    z: &Vector2<f32>,
    gate: Option<f32>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update_with(model, z, gate)
}

/// The definiteness check alone, n = 3: an LDL' factorisation of the
/// stored covariance (`Kalman::check_definiteness`).
#[inline(never)]
pub fn definiteness3(filter: &Kalman<f32, 3, Joseph>) -> Result<(), FilterError> {
    filter.check_definiteness()
}

/// The definiteness check alone, n = 9.
#[inline(never)]
pub fn definiteness9(filter: &Kalman<f32, 9, Joseph>) -> Result<(), FilterError> {
    filter.check_definiteness()
}

/// The pose predict's arithmetic with nothing else: the model's step and
/// Jacobian, then F P F' + Q as plain nalgebra products, with no input or
/// result checks, no transaction and no use of symmetry. Not a filter to
/// flash: a floor that shows how much of `pose_predict`'s cost is call,
/// load and store overhead that any compiled code pays.
#[inline(never)]
pub fn pose_predict_unchecked(
    x: &mut SVector<f32, 3>,
    p: &mut SMatrix<f32, 3, 3>,
    model: &PlanarOdometry<f32>,
    odo: &Odometry<f32>,
    dt: f32,
) {
    let lin = model.linearize(x, odo, dt);
    *x = lin.next;
    model.normalize(x);
    *p = lin.jacobian * *p * lin.jacobian.transpose() + lin.noise;
}

/// The position update's arithmetic with nothing else: S = H P H' + R
/// factored by the core's LDL', K = P H' S^-1, and Joseph's factored order
/// as plain nalgebra products; no checks, no gate, no transaction. The
/// floor for `pose_position_update`, as `pose_predict_unchecked` is for the
/// predict.
#[inline(never)]
pub fn pose_position_update_unchecked(
    x: &mut SVector<f32, 3>,
    p: &mut SMatrix<f32, 3, 3>,
    r: &SMatrix<f32, 2, 2>,
    z: &Vector2<f32>,
) {
    let h = PositionFix::<f32>::h();
    let b = *p * h.transpose();
    let s = h * b + r;
    let Ok(ldl) = cairn_core::Ldl::factor(&s) else {
        return;
    };
    let k = ldl.right_divide(&b);
    *x += k * (z - h * *x);
    let w = *p - k * b.transpose();
    let d = k * r - w * h.transpose();
    *p = w + d * k.transpose();
}

/// U-D pose filter predict: the odometry step through the planar model,
/// Thornton's time update on the model's noise sources (Bierman,
/// *Factorization Methods for Discrete Sequential Estimation*, 1977).
#[inline(never)]
pub fn pose_ud_predict(
    filter: &mut UdKalman<f32, 3>,
    model: &PlanarOdometry<f32>,
    odo: &Odometry<f32>,
    dt: f32,
) -> Result<(), FilterError> {
    filter.predict_with(model, odo, dt)
}

/// U-D pose filter update with a position fix (m = 2): R decorrelated by
/// its LDL' factors, then Bierman's scalar update per component.
#[inline(never)]
pub fn pose_ud_position_update(
    filter: &mut UdKalman<f32, 3>,
    model: &PositionFix<f32>,
    z: &Vector2<f32>,
    gate: Option<f32>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update_with(model, z, gate)
}

/// U-D pose filter update with a heading fix (m = 1): one Bierman scalar
/// update.
#[inline(never)]
pub fn pose_ud_heading_update(
    filter: &mut UdKalman<f32, 3>,
    model: &HeadingFix<f32>,
    z: &Vector1<f32>,
    gate: Option<f32>,
) -> Result<Outcome<f32>, FilterError> {
    filter.update_with(model, z, gate)
}

/// A linear model of `N` states and `M` measurements for the probes: a chain
/// of integrators over 10 ms (F = I plus dt on the superdiagonal), Q = 1e-4 I,
/// a random H and R = 0.01 I.
pub fn linear_model<const N: usize, const M: usize>(
    noise: &mut Lcg,
) -> (
    SMatrix<f32, N, N>,
    SMatrix<f32, N, N>,
    SMatrix<f32, M, N>,
    SMatrix<f32, M, M>,
) {
    let f = SMatrix::<f32, N, N>::from_fn(|i, j| {
        if i == j {
            1.0
        } else if j == i + 1 {
            0.01
        } else {
            0.0
        }
    });
    let q = SMatrix::<f32, N, N>::from_diagonal_element(1e-4);
    let h = SMatrix::<f32, M, N>::from_fn(|_, _| noise.signed_unit());
    let r = SMatrix::<f32, M, M>::from_diagonal_element(1e-2);
    (f, q, h, r)
}

// The linear probes, one set per size in CAIRN_COST_SIZES (build.rs):
// `linear{N}_predict`, `linear{N}_update{M}_joseph`,
// `linear{N}_update{M}_conventional`, their U-D twins `linear{N}_ud_predict`
// and `linear{N}_update{M}_ud`, and `run_linear`, which calls them.
include!(concat!(env!("OUT_DIR"), "/linear_probes.rs"));
