//! Cross-crate tests of the cairn workspace, one module per area.

mod core_bad_input;
mod core_closed_form;
mod core_definiteness;
mod core_factored;
mod core_invariants;
mod readme_example;
mod target;
mod target_user;
