//! Small helpers shared by the cross-crate tests.

use nalgebra::SMatrix;

/// Largest |a_ij - b_ij| / max(|b|_max, tiny).
pub fn rel_diff<const R: usize, const C: usize>(
    a: &SMatrix<f64, R, C>,
    b: &SMatrix<f64, R, C>,
) -> f64 {
    let scale = b.amax().max(1e-300);
    (a - b).amax() / scale
}
