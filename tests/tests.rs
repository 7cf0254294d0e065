//! Cross-crate tests of the cairn workspace, one module per area.

mod util;

mod core_closed_form;
