//! The Bramble tug's filter as a Cortex-M4F probe built with cairn-probe:
//! the shared run over the recorded shift and the shift's rows.
#![no_std]
#![deny(missing_docs)]

pub mod run;

/// The first predicts of the recorded shift with the fixes between them,
/// `[kind, a, b, c]` with f32 bit patterns (`build.rs`, `src/log_rows.rs`).
pub static SHIFT: &[[u32; 4]] = &include!(concat!(env!("OUT_DIR"), "/shift_rows.rs"));
