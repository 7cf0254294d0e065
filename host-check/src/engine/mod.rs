//! The check engine: runs a model's own code, every precision and
//! covariance form of cairn-core, against the double-double reference, on a
//! simulated truth or a recorded log, and gathers the figures the verdicts
//! and reports use. Nothing here knows whose models it runs: the spec's
//! linear and pose models and a user's own implement the same traits.
//!
//! | module     | job                                                     |
//! |------------|---------------------------------------------------------|
//! | [`plan`]   | the scenario a check runs, as one validated value       |
//! | [`system`] | the traits a user's models implement ([`System`], [`Sensor`]) |
//! | [`channel`] | a sensor with its size erased, for the list of channels |
//! | [`filter`] | the catalogue of variants and one running core filter each |
//! | [`world`]  | the steps: a seeded truth, or a log's rows              |
//! | [`log`]    | the recorded-log reader (docs/log-format.md)            |
//! | [`stream`] | the reference stage, block by block                     |
//! | [`variants`] | the variants' stage                                   |
//! | [`jacobian`] | each model's Jacobian against central differences     |
//! | [`mod@check`] | the stages of one check, in order                       |
//! | [`trials`] | Monte Carlo NEES/NIS runs on the same world             |
//! | [`result`] | what a check found                                      |
//! | [`mission`] | the stage after a run: growth over the mission, what to flash |
//!
//! Gate decisions: the reference decides each gated measurement on its own
//! (double-double) innovation covariance, and every variant applies exactly
//! what the reference applies; each variant's own gate decision is tried on
//! a copy and counted when it differs, so covariances are always compared
//! on the same decisions.

pub mod channel;
pub mod check;
pub mod external;
pub mod filter;
pub mod jacobian;
pub mod log;
pub mod metrics;
pub mod mission;
pub mod plan;
pub mod result;
pub mod steady;
pub mod stream;
pub(crate) mod synth;
pub mod system;
pub mod trials;
pub mod variants;
pub mod verdict;
pub mod world;

pub use channel::{Channel, Evaluation, SensorChannel};
pub use check::{Steady, check, f32_spacing};
pub use filter::UpdateInput;
pub use filter::{Filter, Form, VARIANTS, Variant};
pub use jacobian::JacobianReport;
pub use result::RunResult;
pub use system::{Sensor, System};
pub use world::{InputProfile, Source};
