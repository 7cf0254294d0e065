//! Shared pieces of cairn's Cortex-M binaries: the no-panic link proof, a
//! formatting-free semihosting writer, the pose scenario and the cost probes.
//!
//! # The no-panic link proof
//! The panic handler (in the `cairn-probe` harness, shared with user
//! probes) calls a function that no object file defines. If any panic path
//! survives optimisation in a binary of this crate, the handler is linked in and the link fails with an undefined symbol,
//! `cairn_a_panic_path_survived`. A release build that links is therefore a
//! proof that the filter core, as used here, cannot panic.
#![no_std]
#![deny(missing_docs)]

pub mod probe;
pub mod scenario;

// The no-panic link proof, the semihosting line writer and the exit
// come from the probe harness every user probe uses too (one copy).
pub use cairn_probe::{Line, exit};
