//! The built-in demo: an invented survey rover's pose filter, one hour at
//! 200 Hz, shipped as a spec file so users can start from it.

use crate::spec::{self, Plan, SpecError};

/// The demo's spec text (host-check/specs/demo.toml).
pub const SPEC: &str = include_str!("../specs/demo.toml");

/// The name the demo's plan carries as its spec file.
pub const FILE: &str = crate::engine::plan::DEMO_FILE;

/// The demo's validated plan.
///
/// # Errors
/// Never in a released build (the spec is tested); a [`SpecError`] otherwise.
pub fn plan() -> Result<Plan, SpecError> {
    spec::parse(FILE, SPEC, None)
}
