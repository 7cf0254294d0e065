//! The tug's measurement channels: wheel speed, radio position fix and
//! heading fix from ceiling markers.

use cairn_core::nalgebra::{SMatrix, SVector};
use cairn_core::{MeasurementModel, Pattern, Scalar, wrap_angle};

use crate::{HEADING, SPEED, STATES, X, Y};

/// Wheel-encoder speed, z = v (m/s), with white noise of standard
/// deviation `sigma` (m/s). Log channel `wheel`, one value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct WheelSpeed<T> {
    /// Standard deviation of one reading, m/s.
    pub sigma: T,
}

impl<T: Scalar> WheelSpeed<T> {
    /// A wheel-speed channel with reading standard deviation `sigma` (m/s).
    #[must_use]
    pub const fn new(sigma: T) -> Self {
        Self { sigma }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 1> for WheelSpeed<T> {
    /// H selects the speed.
    const JACOBIAN_PATTERN: Pattern<1, STATES> = Pattern::ZERO.one(0, SPEED);

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 1> {
        SVector::<T, 1>::new(x[SPEED])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 1, STATES> {
        let mut h = SMatrix::<T, 1, STATES>::zeros();
        h[(0, SPEED)] = T::one();
        h
    }
    #[inline(always)]
    fn noise(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 1, 1> {
        SMatrix::<T, 1, 1>::new(self.sigma * self.sigma)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        x[HEADING] = wrap_angle(x[HEADING]);
    }
}

/// Radio position fix (the warehouse's ranging beacons), z = (x, y) in
/// metres, with independent errors of standard deviation `sigma` (m) on
/// each axis. Log channel `radio`, two values: x, then y.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct RadioFix<T> {
    /// Standard deviation of each coordinate, m.
    pub sigma: T,
}

impl<T: Scalar> RadioFix<T> {
    /// A radio fix with per-axis standard deviation `sigma` (m).
    #[must_use]
    pub const fn new(sigma: T) -> Self {
        Self { sigma }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 2> for RadioFix<T> {
    /// H selects x and y.
    const JACOBIAN_PATTERN: Pattern<2, STATES> = Pattern::ZERO.one(0, X).one(1, Y);
    /// Independent x and y errors.
    const NOISE_PATTERN: Pattern<2, 2> = Pattern::ZERO.free(0, 0).free(1, 1);

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 2> {
        SVector::<T, 2>::new(x[X], x[Y])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 2, STATES> {
        let mut h = SMatrix::<T, 2, STATES>::zeros();
        h[(0, X)] = T::one();
        h[(1, Y)] = T::one();
        h
    }
    #[inline(always)]
    fn noise(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 2, 2> {
        SMatrix::<T, 2, 2>::from_diagonal_element(self.sigma * self.sigma)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        x[HEADING] = wrap_angle(x[HEADING]);
    }
}

/// Heading fix from a ceiling marker seen by the upward camera, z = heading
/// (rad, in (-pi, pi]), standard deviation `sigma` (rad). The residual is
/// wrapped to (-pi, pi], so a fix of -3.13 rad against a heading of 3.13 rad
/// is a small correction, not a turn. Log channel `heading`, one value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct HeadingFix<T> {
    /// Standard deviation of one fix, rad.
    pub sigma: T,
}

impl<T: Scalar> HeadingFix<T> {
    /// A heading fix with standard deviation `sigma` (rad).
    #[must_use]
    pub const fn new(sigma: T) -> Self {
        Self { sigma }
    }
}

impl<T: Scalar> MeasurementModel<T, STATES, 1> for HeadingFix<T> {
    /// H selects the heading.
    const JACOBIAN_PATTERN: Pattern<1, STATES> = Pattern::ZERO.one(0, HEADING);

    #[inline(always)]
    fn expected(&self, x: &SVector<T, STATES>) -> SVector<T, 1> {
        SVector::<T, 1>::new(x[HEADING])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &SVector<T, STATES>) -> SMatrix<T, 1, STATES> {
        let mut h = SMatrix::<T, 1, STATES>::zeros();
        h[(0, HEADING)] = T::one();
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
        x[HEADING] = wrap_angle(x[HEADING]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn channels_select_their_states() {
        let x = SVector::<f64, 5>::from([4.0, -2.0, 0.3, 1.25, 0.01]);
        assert_eq!(WheelSpeed::new(0.03).expected(&x)[0], 1.25);
        assert_eq!(
            RadioFix::new(0.1).expected(&x),
            SVector::<f64, 2>::new(4.0, -2.0)
        );
        assert_eq!(HeadingFix::new(0.02).expected(&x)[0], 0.3);
        // A linear channel's Jacobian reproduces its prediction: h(x) = H x.
        assert_eq!(
            WheelSpeed::new(0.03).jacobian(&x) * x,
            WheelSpeed::new(0.03).expected(&x)
        );
        assert_eq!(
            RadioFix::new(0.1).jacobian(&x) * x,
            RadioFix::new(0.1).expected(&x)
        );
        assert_eq!(
            HeadingFix::new(0.02).jacobian(&x) * x,
            HeadingFix::new(0.02).expected(&x)
        );
        // R is sigma^2.
        assert_eq!(
            RadioFix::new(0.5).noise(&x),
            SMatrix::<f64, 2, 2>::identity() * 0.25
        );
        assert_eq!(
            WheelSpeed::new(0.5_f32).noise(&SVector::zeros())[(0, 0)],
            0.25
        );
    }

    #[test]
    fn heading_residual_takes_the_short_way_round() {
        // A residual across +-pi is the small angle between the two (common
        // practice for wrapped angles).
        let pi = core::f64::consts::PI;
        let fix = HeadingFix::new(0.02);
        let z = SVector::<f64, 1>::new(-pi + 0.01);
        let predicted = SVector::<f64, 1>::new(pi - 0.01);
        assert!((fix.residual(&z, &predicted)[0] - 0.02).abs() < 1e-12);
        assert!((fix.residual(&predicted, &z)[0] + 0.02).abs() < 1e-12);
        let zero = SVector::<f64, 1>::new(0.0);
        assert_eq!(fix.residual(&SVector::<f64, 1>::new(0.5), &zero)[0], 0.5);
    }
}
