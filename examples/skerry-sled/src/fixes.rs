//! The sled's measurement channels: satellite position and velocity fixes
//! in the local level frame, and magnetometer yaw.

use cairn_core::nalgebra::{Matrix3, SMatrix, SVector, Vector3};
use cairn_core::{MeasurementModel, Pattern, Scalar, wrap_angle};

use crate::strapdown::wrap_attitude;
use crate::{POSITION, STATES, VELOCITY, YAW};

/// H selecting three consecutive states starting at `first`.
#[inline(always)]
/// The structure of [`select`]'s H: ones at (i, first + i).
const fn selection(first: usize) -> Pattern<3, STATES> {
    Pattern::ZERO
        .one(0, first)
        .one(1, first + 1)
        .one(2, first + 2)
}

fn select<T: Scalar>(first: usize) -> SMatrix<T, 3, STATES> {
    let mut h = SMatrix::<T, 3, STATES>::zeros();
    for i in 0..3 {
        h[(i, first + i)] = T::one();
    }
    h
}

/// The structure of [`level_noise`]: a diagonal R.
const INDEPENDENT: Pattern<3, 3> = Pattern::ZERO.free(0, 0).free(1, 1).free(2, 2);

/// R = diag(horizontal^2, horizontal^2, vertical^2).
#[inline(always)]
fn level_noise<T: Scalar>(horizontal: T, vertical: T) -> Matrix3<T> {
    let h2 = horizontal * horizontal;
    Matrix3::from_diagonal(&Vector3::new(h2, h2, vertical * vertical))
}

/// Position fix, z = (north, east, down) in metres, with independent
/// errors: standard deviation `horizontal` on north and east, `vertical`
/// on down. Log channel `position`, three values: north, east, down.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct PositionFix<T> {
    /// Standard deviation of north and of east, m.
    pub horizontal: T,
    /// Standard deviation of down, m.
    pub vertical: T,
}

impl<T: Scalar> PositionFix<T> {
    /// A position fix with standard deviations `horizontal` (north, east)
    /// and `vertical` (down), in metres.
    #[must_use]
    pub const fn new(horizontal: T, vertical: T) -> Self {
        Self {
            horizontal,
            vertical,
        }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 3> for PositionFix<T> {
    const JACOBIAN_PATTERN: Pattern<3, STATES> = selection(POSITION);
    /// Independent north, east and down errors.
    const NOISE_PATTERN: Pattern<3, 3> = INDEPENDENT;

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 3> {
        Vector3::new(x[POSITION], x[POSITION + 1], x[POSITION + 2])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 3, STATES> {
        select(POSITION)
    }
    #[inline(always)]
    fn noise(&self, _x: &SVector<T, STATES>) -> Matrix3<T> {
        level_noise(self.horizontal, self.vertical)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        wrap_attitude(x);
    }
}

/// Velocity fix, z = (north, east, down) velocity in m/s, with independent
/// errors: standard deviation `horizontal` on north and east, `vertical`
/// on down. Log channel `velocity`, three values: north, east, down.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct VelocityFix<T> {
    /// Standard deviation of the north and east velocity, m/s.
    pub horizontal: T,
    /// Standard deviation of the down velocity, m/s.
    pub vertical: T,
}

impl<T: Scalar> VelocityFix<T> {
    /// A velocity fix with standard deviations `horizontal` (north, east)
    /// and `vertical` (down), in m/s.
    #[must_use]
    pub const fn new(horizontal: T, vertical: T) -> Self {
        Self {
            horizontal,
            vertical,
        }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 3> for VelocityFix<T> {
    const JACOBIAN_PATTERN: Pattern<3, STATES> = selection(VELOCITY);
    /// Independent north, east and down errors.
    const NOISE_PATTERN: Pattern<3, 3> = INDEPENDENT;

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 3> {
        Vector3::new(x[VELOCITY], x[VELOCITY + 1], x[VELOCITY + 2])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 3, STATES> {
        select(VELOCITY)
    }
    #[inline(always)]
    fn noise(&self, _x: &SVector<T, STATES>) -> Matrix3<T> {
        level_noise(self.horizontal, self.vertical)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        wrap_attitude(x);
    }
}

/// Yaw from a tilt-compensated magnetometer, corrected for declination,
/// z = yaw (rad, in (-pi, pi]), standard deviation `sigma` (rad). The
/// residual is wrapped to (-pi, pi]. Log channel `mag_yaw`, one value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct MagYaw<T> {
    /// Standard deviation of one yaw reading, rad.
    pub sigma: T,
}

impl<T: Scalar> MagYaw<T> {
    /// A magnetometer yaw channel with standard deviation `sigma` (rad).
    #[must_use]
    pub const fn new(sigma: T) -> Self {
        Self { sigma }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 1> for MagYaw<T> {
    const JACOBIAN_PATTERN: Pattern<1, STATES> = Pattern::ZERO.one(0, YAW);

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 1> {
        SVector::<T, 1>::new(x[YAW])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 1, STATES> {
        let mut h = SMatrix::<T, 1, STATES>::zeros();
        h[(0, YAW)] = T::one();
        h
    }
    #[inline(always)]
    fn noise(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 1, 1> {
        SMatrix::<T, 1, 1>::new(self.sigma * self.sigma)
    }
    #[inline(always)]
    fn residual(&self, z: &SVector<T, 1>, predicted: &SVector<T, 1>) -> SVector<T, 1> {
        SVector::<T, 1>::new(wrap_angle(z[0] - predicted[0]))
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        wrap_attitude(x);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn channels_select_their_states_and_carry_their_noise() {
        let mut x = SVector::<f64, 15>::zeros();
        for i in 0..15 {
            x[i] = i as f64 + 0.5;
        }
        let pos = PositionFix::new(0.02, 0.05);
        let vel = VelocityFix::new(0.05, 0.1);
        let yaw = MagYaw::new(0.03);
        assert_eq!(pos.expected(&x), Vector3::new(0.5, 1.5, 2.5));
        assert_eq!(vel.expected(&x), Vector3::new(3.5, 4.5, 5.5));
        assert_eq!(yaw.expected(&x)[0], 8.5);
        // Linear channels: h(x) = H x.
        assert_eq!(pos.jacobian(&x) * x, pos.expected(&x));
        assert_eq!(vel.jacobian(&x) * x, vel.expected(&x));
        assert_eq!(yaw.jacobian(&x) * x, yaw.expected(&x));
        // R = diag of the squared deviations.
        let r = pos.noise(&x);
        assert_eq!(
            r,
            Matrix3::from_diagonal(&Vector3::new(0.02 * 0.02, 0.02 * 0.02, 0.05 * 0.05))
        );
        assert_eq!(yaw.noise(&x)[(0, 0)], 0.03 * 0.03);
    }

    #[test]
    fn yaw_residual_takes_the_short_way_round() {
        // The residual of wrapped angles is the small angle between them
        // (common practice).
        let pi = core::f64::consts::PI;
        let yaw = MagYaw::new(0.03);
        let z = SVector::<f64, 1>::new(pi - 0.02);
        let predicted = SVector::<f64, 1>::new(-pi + 0.01);
        assert!((yaw.residual(&z, &predicted)[0] + 0.03).abs() < 1e-12);
    }
}
