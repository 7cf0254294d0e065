//! The spec's own models as engine models: a linear model (continuous
//! models arrive here already discretised) and the core's planar pose
//! model, each with its measurement channels.

pub mod dispatch;
pub mod linear;
pub mod pose;

pub use dispatch::{MAX_COMPONENTS, MAX_STATES, ModelError, Visit, with_models};
pub use linear::{Lifted, LinearMeasurement, LinearProcess, LinearSensor, LinearSystem};
pub use pose::{HeadingSensor, PoseSystem, PositionSensor};
