//! The tug's motion model: planar dead reckoning from a yaw-rate gyro and a
//! forward accelerometer, with the gyro bias as a state.

use cairn_core::nalgebra::{SMatrix, SVector};
use cairn_core::{Linearized, Pattern, ProcessModel, Scalar, wrap_angle};

use crate::{GYRO_BIAS, HEADING, SPEED, STATES, X, Y};

/// One inertial sample, the average over the step it ends: the values a
/// predict of length dt uses.
///
/// Field order (also the order of an `input` row in a recorded log):
/// `gyro`, then `accel`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ImuSample<T> {
    /// Yaw rate from the gyro, rad/s (positive counter-clockwise seen from
    /// above), including the gyro's bias.
    pub gyro: T,
    /// Forward specific force from the accelerometer, m/s^2 (the floor is
    /// level, so this is the tug's forward acceleration).
    pub accel: T,
}

/// The Bramble tug's process model over one step dt (first-order Euler):
///
/// ```text
/// x  += v cos(th) dt
/// y  += v sin(th) dt
/// th += (gyro - b) dt        (wrapped to (-pi, pi] by `normalize`)
/// v  += accel dt
/// b  unchanged
/// ```
///
/// The process noise comes from three independent sources, given as the
/// figures a gyro or accelerometer datasheet quotes (IEEE Std 952-1997 terms):
/// the gyro's white noise (angle random walk `gyro_arw`), the
/// accelerometer's white noise (velocity random walk `accel_vrw`) and the
/// gyro bias's random walk (`gyro_bias_rw`). A step's averaged reading then
/// carries white noise of variance N^2 / dt, which the step scales by dt:
/// the heading variance added per step is `gyro_arw^2 dt`, the speed
/// variance `accel_vrw^2 dt`, and the bias variance `gyro_bias_rw^2 dt`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct TugMotion<T> {
    /// Gyro angle random walk N_g, rad/sqrt(s) (a datasheet's deg/sqrt(h)
    /// times pi/180/60).
    pub gyro_arw: T,
    /// Accelerometer velocity random walk N_a, (m/s)/sqrt(s) (a noise
    /// density in m/s^2/sqrt(Hz) read as one-sided, times 1/sqrt(2)).
    pub accel_vrw: T,
    /// Gyro bias random walk K, (rad/s)/sqrt(s).
    pub gyro_bias_rw: T,
}

impl<T: Scalar> TugMotion<T> {
    /// A motion model from the three noise figures: gyro angle random walk
    /// (rad/sqrt(s)), accelerometer velocity random walk ((m/s)/sqrt(s)) and
    /// gyro bias random walk ((rad/s)/sqrt(s)).
    ///
    /// The figures are not checked here: a non-finite figure makes the
    /// filter refuse the predict ([`cairn_core::FilterError`]), and a
    /// negative one counts as its magnitude (only squares are used).
    #[must_use]
    pub const fn new(gyro_arw: T, accel_vrw: T, gyro_bias_rw: T) -> Self {
        Self {
            gyro_arw,
            accel_vrw,
            gyro_bias_rw,
        }
    }

    /// The state after one step, from the heading's sine `s` and cosine `c`.
    #[inline(always)]
    fn next(x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T, s: T, c: T) -> SVector<T, STATES> {
        let mut n = *x;
        let d = x[SPEED] * dt;
        n[X] = x[X] + d * c;
        n[Y] = x[Y] + d * s;
        n[HEADING] = x[HEADING] + (u.gyro - x[GYRO_BIAS]) * dt;
        n[SPEED] = x[SPEED] + u.accel * dt;
        n
    }

    /// The Jacobian of [`TugMotion::next`] with respect to the state.
    #[inline(always)]
    fn jacobian_at(x: &SVector<T, STATES>, dt: T, s: T, c: T) -> SMatrix<T, STATES, STATES> {
        let d = x[SPEED] * dt;
        let mut f = SMatrix::<T, STATES, STATES>::identity();
        f[(X, HEADING)] = -d * s;
        f[(X, SPEED)] = dt * c;
        f[(Y, HEADING)] = d * c;
        f[(Y, SPEED)] = dt * s;
        f[(HEADING, GYRO_BIAS)] = -dt;
        f
    }

    /// The noise sources as the columns of G with their variances q:
    /// column 0 the gyro reading (into the heading), 1 the accelerometer
    /// reading (into the speed), 2 the bias step; columns 3 and 4 are zero.
    #[inline(always)]
    fn sources_at(&self, dt: T) -> (SMatrix<T, STATES, STATES>, SVector<T, STATES>) {
        let mut g = SMatrix::<T, STATES, STATES>::zeros();
        g[(HEADING, 0)] = dt;
        g[(SPEED, 1)] = dt;
        g[(GYRO_BIAS, 2)] = T::one();
        let mut q = SVector::<T, STATES>::zeros();
        // The reading's variance over a step: N^2 / dt (IEEE Std 952-1997).
        q[0] = self.gyro_arw * self.gyro_arw / dt;
        q[1] = self.accel_vrw * self.accel_vrw / dt;
        q[2] = self.gyro_bias_rw * self.gyro_bias_rw * dt;
        (g, q)
    }
}

impl<T: Scalar> ProcessModel<T, STATES> for TugMotion<T> {
    type Input = ImuSample<T>;

    /// The identity plus the heading's and the speed's effect on x and y
    /// and the bias's on the heading (as `jacobian_at` forms it).
    const JACOBIAN_PATTERN: Pattern<STATES, STATES> = Pattern::IDENTITY
        .free(X, HEADING)
        .free(X, SPEED)
        .free(Y, HEADING)
        .free(Y, SPEED)
        .free(HEADING, GYRO_BIAS);
    /// The gyro reading drives the heading, the accelerometer reading the
    /// speed, the bias step the bias with weight one
    /// (as `sources_at` forms them).
    const SOURCES_PATTERN: Pattern<STATES, STATES> = Pattern::ZERO
        .free(HEADING, 0)
        .free(SPEED, 1)
        .one(GYRO_BIAS, 2);

    #[inline(always)]
    fn transition(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SVector<T, STATES> {
        let (s, c) = x[HEADING].sin_cos_rad();
        Self::next(x, u, dt, s, c)
    }

    #[inline(always)]
    fn jacobian(
        &self,
        x: &SVector<T, STATES>,
        _u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let (s, c) = x[HEADING].sin_cos_rad();
        Self::jacobian_at(x, dt, s, c)
    }

    #[inline(always)]
    fn noise(
        &self,
        _x: &SVector<T, STATES>,
        _u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let (g, q) = self.sources_at(dt);
        cairn_core::noise_from_sources(&g, &q)
    }

    #[inline(always)]
    fn noise_sources(
        &self,
        _x: &SVector<T, STATES>,
        _u: &ImuSample<T>,
        dt: T,
    ) -> Option<(SMatrix<T, STATES, STATES>, SVector<T, STATES>)> {
        Some(self.sources_at(dt))
    }

    #[inline(always)]
    fn linearize(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> Linearized<T, STATES> {
        // One sine and cosine of the heading serve the state and the Jacobian.
        let (s, c) = x[HEADING].sin_cos_rad();
        let (g, q) = self.sources_at(dt);
        Linearized {
            next: Self::next(x, u, dt, s, c),
            jacobian: Self::jacobian_at(x, dt, s, c),
            noise: cairn_core::noise_from_sources(&g, &q),
            sources: Some((g, q)),
        }
    }

    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        x[HEADING] = wrap_angle(x[HEADING]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use cairn_core::nalgebra::Matrix5;

    fn state(x: f64, y: f64, th: f64, v: f64, b: f64) -> SVector<f64, 5> {
        SVector::<f64, 5>::from([x, y, th, v, b])
    }

    fn model() -> TugMotion<f64> {
        // Invented MEMS-grade figures.
        TugMotion::new(2.9e-4, 4.0e-3, 2.0e-5)
    }

    #[test]
    fn jacobian_matches_central_differences() {
        // Central differences, error O(h^2) (common practice): with h = 1e-6
        // the truncation error is about 1e-12 and rounding about 1e-10.
        let m = model();
        let u = ImuSample {
            gyro: 0.31,
            accel: -0.4,
        };
        let dt = 0.01;
        let states = [
            state(0.0, 0.0, 0.0, 0.0, 0.0),
            state(12.0, -3.5, 0.7, 1.4, 0.002),
            state(-40.0, 8.0, -2.9, -0.6, -0.01),
            state(3.0, 3.0, 3.1, 2.0, 0.05),
        ];
        for x in &states {
            let f = m.jacobian(x, &u, dt);
            let h = 1e-6;
            for j in 0..5 {
                let mut xp = *x;
                let mut xm = *x;
                xp[j] += h;
                xm[j] -= h;
                let col = (m.transition(&xp, &u, dt) - m.transition(&xm, &u, dt)) / (2.0 * h);
                for i in 0..5 {
                    assert!(
                        (f[(i, j)] - col[i]).abs() < 1e-8,
                        "F[{i},{j}] = {} but central difference {} at {x:?}",
                        f[(i, j)],
                        col[i]
                    );
                }
            }
        }
        // A longer step (a log gap) too: the model is linear in v and b.
        let x = state(1.0, 2.0, 1.2, 0.9, 0.004);
        let dt = 2.0;
        let f = m.jacobian(&x, &u, dt);
        assert!((f[(0, 2)] - (-0.9 * 1.2_f64.sin() * 2.0)).abs() < 1e-15);
        assert!((f[(1, 3)] - 1.2_f64.sin() * 2.0).abs() < 1e-15);
    }

    #[test]
    fn noise_is_g_diag_q_g_transposed_with_datasheet_variances() {
        let m = model();
        let x = state(1.0, 2.0, 0.4, 1.0, 0.0);
        let u = ImuSample {
            gyro: 0.0,
            accel: 0.0,
        };
        for dt in [0.009, 0.01, 0.011, 2.0] {
            let (g, q) = m.noise_sources(&x, &u, dt).unwrap();
            let q_mat = m.noise(&x, &u, dt);
            // The plain matrix product, nalgebra's (a general-purpose library).
            let reference: Matrix5<f64> = g * Matrix5::from_diagonal(&q) * g.transpose();
            assert!((q_mat - reference).abs().max() <= 4.0 * f64::EPSILON * reference.abs().max());
            // Per-step variances from the noise terms: angle random walk
            // N adds N^2 T to the integrated angle (IEEE Std 952-1997; the
            // same N^2 T for velocity and the bias random walk).
            let rel = |a: f64, b: f64| ((a - b) / b).abs();
            assert!(rel(q_mat[(2, 2)], 2.9e-4 * 2.9e-4 * dt) < 1e-14);
            assert!(rel(q_mat[(3, 3)], 4.0e-3 * 4.0e-3 * dt) < 1e-14);
            assert!(rel(q_mat[(4, 4)], 2.0e-5 * 2.0e-5 * dt) < 1e-14);
            // The sources are independent and touch neither x nor y.
            for i in 0..5 {
                for j in 0..5 {
                    if i != j || i < 2 {
                        assert_eq!(q_mat[(i, j)], 0.0);
                    }
                }
            }
        }
        // linearize gives the same pieces as the separate calls, bit for bit.
        let lin = m.linearize(&x, &u, 0.01);
        assert_eq!(lin.next, m.transition(&x, &u, 0.01));
        assert_eq!(lin.jacobian, m.jacobian(&x, &u, 0.01));
        assert_eq!(lin.noise, m.noise(&x, &u, 0.01));
        assert_eq!(lin.sources, m.noise_sources(&x, &u, 0.01));
    }

    #[test]
    fn f32_linearize_matches_the_separate_calls_bit_for_bit() {
        let m = TugMotion::<f32>::new(2.9e-4, 4.0e-3, 2.0e-5);
        let x = SVector::<f32, 5>::from([3.0, -1.0, 2.5, 1.2, 0.003]);
        let u = ImuSample {
            gyro: 0.2_f32,
            accel: 0.1,
        };
        let lin = m.linearize(&x, &u, 0.01);
        assert_eq!(lin.next, m.transition(&x, &u, 0.01));
        assert_eq!(lin.jacobian, m.jacobian(&x, &u, 0.01));
        assert_eq!(lin.noise, m.noise(&x, &u, 0.01));
    }

    #[test]
    fn heading_wraps_into_the_half_open_interval() {
        // (-pi, pi] is the common-practice range for a heading.
        let pi = core::f64::consts::PI;
        let m = model();
        let u = ImuSample {
            gyro: 1.0,
            accel: 0.0,
        };
        let mut x = m.transition(&state(0.0, 0.0, pi - 0.005, 1.0, 0.0), &u, 0.01);
        assert!(x[2] > pi);
        m.normalize(&mut x);
        assert!((x[2] - (-pi + 0.005)).abs() < 1e-12);
        let mut at_minus_pi = state(0.0, 0.0, -pi, 0.0, 0.0);
        m.normalize(&mut at_minus_pi);
        assert_eq!(at_minus_pi[2], pi);
    }
}
