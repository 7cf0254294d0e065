//! cairn host-check: runs cairn-core's own code in f32 and f64 against an
//! extended-precision reference and judges whether the filter is safe to flash.
//!
//! | module      | job                                                          |
//! |-------------|--------------------------------------------------------------|
//! | [`scenario`] | checking your own models from your crate's tests          |
//! | [`spec`]    | the TOML model spec, parsed with spans and validated         |
//! | [`engine`]  | the check engine: any model, every variant, the reference    |
//! | [`run`]     | the spec's check: the spec's models through the engine       |
//! | [`report`]  | terminal text, JSON and the SVG drift plot                   |
//! | [`allan`]   | Allan deviation of a recorded log, the inertial noise terms  |
//! | [`cli`]     | the `cairn` command line                                     |
//! | [`cost`]    | cycles per predict/update on a Cortex-M4F from QEMU traces   |
//! | [`consistency`] | Monte Carlo NEES/NIS against chi-square intervals   |
//! | [`constants`] | the spec's matrices as `const` arrays for firmware    |
//! | [`demo`]    | the built-in demo spec                                       |
//! | [`mission`] | growth over the mission, steady-gain transient, what to flash |
//! | [`numeric`] | double-double, Van Loan, Riccati, noise figures              |
//! | [`output`]  | standard output and whole-or-nothing file writes             |

pub mod allan;
pub mod cli;
pub mod consistency;
pub mod constants;
pub mod cost;
pub mod demo;
pub mod engine;
pub use engine::mission;
pub mod exit;
pub mod models;
pub mod numeric;
pub mod output;
pub mod report;
pub mod run;
pub mod scenario;
pub mod spec;
