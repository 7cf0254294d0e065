//! The Skerry sled's 15-state inertial models checked by cairn from the
//! crate's own host tests: every precision and covariance form against the
//! double-double reference, and the Jacobians against central differences.

mod common;

use skerry_sled::STATES;

#[test]
fn the_fifteen_state_sled_passes_its_own_check() {
    let report = common::scenario(60.0)
        .check()
        .expect("a consistent scenario");
    let text = report.text();
    // The f64 forms track the double-double reference to rounding level
    // (common practice), and the sled's own analytic 15 x 15 Jacobian and
    // its measurement Jacobians match central differences.
    let f64j = report.variant("f64 joseph").expect("ran");
    assert!(f64j.figures.max_relative_error < 1e-8, "{text}");
    let jac = report.run.jacobians.as_ref().expect("compared");
    assert!(jac.passes, "{text}");
    assert_eq!(jac.models.len(), 4);
    assert!(jac.models.iter().all(|m| m.points > 0), "{text}");
    assert_eq!(report.run.reach.len(), STATES);
    assert!(report.passes(), "{text}");
}
