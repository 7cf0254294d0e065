//! The core's planar pose model and its position and heading fixes as
//! engine models: input row (speed m/s, yaw rate rad/s).

use cairn_core::Scalar;
use cairn_core::pose::{HeadingFix, Odometry, PlanarOdometry, PositionFix};
use nalgebra::{SVector, Vector2};

use crate::engine::{Sensor, System};

/// The pose model with its odometry variances in f64.
#[derive(Debug, Clone, Copy)]
pub struct PoseSystem {
    /// Variance of one step's speed reading, (m/s)^2.
    pub speed_var: f64,
    /// Variance of one step's yaw-rate reading, (rad/s)^2.
    pub yaw_rate_var: f64,
    /// Extra heading variance per step, rad^2.
    pub heading_drift_var: f64,
}

impl System<3> for PoseSystem {
    type Process<T: Scalar> = PlanarOdometry<T>;

    fn process<T: Scalar>(&self) -> PlanarOdometry<T> {
        PlanarOdometry {
            speed_var: T::of(self.speed_var),
            yaw_rate_var: T::of(self.yaw_rate_var),
            heading_drift_var: T::of(self.heading_drift_var),
        }
    }

    fn input_len(&self) -> usize {
        2
    }

    fn input<T: Scalar>(&self, values: &[f64]) -> Odometry<T> {
        Odometry {
            speed: T::of(values[0]),
            yaw_rate: T::of(values[1]),
        }
    }

    fn angle_states(&self) -> &[usize] {
        &[2]
    }

    fn position_states(&self) -> &[usize] {
        &[0, 1]
    }
}

/// A position fix (x, y) with independent errors.
#[derive(Debug, Clone, Copy)]
pub struct PositionSensor {
    /// Noise variances of x and y, m^2.
    pub var: Vector2<f64>,
}

impl Sensor<3, 2> for PositionSensor {
    type Model<T: Scalar> = PositionFix<T>;

    fn model<T: Scalar>(&self) -> PositionFix<T> {
        PositionFix {
            var: self.var.map(T::of),
        }
    }

    fn to_frame(&self, z: &mut [f64], origin: &SVector<f64, 3>) {
        z[0] -= origin[0];
        z[1] -= origin[1];
    }
}

/// A heading fix with noise variance `var`.
#[derive(Debug, Clone, Copy)]
pub struct HeadingSensor {
    /// Noise variance, rad^2.
    pub var: f64,
}

impl Sensor<3, 1> for HeadingSensor {
    type Model<T: Scalar> = HeadingFix<T>;

    fn model<T: Scalar>(&self) -> HeadingFix<T> {
        HeadingFix {
            var: T::of(self.var),
        }
    }
}
