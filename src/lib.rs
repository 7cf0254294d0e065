//! Root of the cairn workspace: owns the cross-crate tests in `tests/` and
//! the criterion benches in `benches/`. It exports nothing.
#![forbid(unsafe_code)]
