//! The ready planar pose model: x, y (m) and heading (rad) driven by wheel
//! odometry, with a position fix (2 components) and a heading fix (1).

use nalgebra::{Matrix2, SMatrix, SVector, Vector2, Vector3};

use crate::kernel::from_sources;
use crate::model::{Linearized, MeasurementModel, ProcessModel};
use crate::pattern::Pattern;
use crate::scalar::{Scalar, wrap_angle};

/// One odometry sample: forward speed (m/s) and yaw rate (rad/s), averaged
/// over the step.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct Odometry<T> {
    /// Forward speed, m/s.
    pub speed: T,
    /// Yaw rate, rad/s.
    pub yaw_rate: T,
}

/// Unicycle motion over one step with midpoint heading:
/// x += v dt cos(th + w dt / 2), y += v dt sin(th + w dt / 2), th += w dt.
///
/// The odometry readings are noisy: `speed_var` and `yaw_rate_var` are the
/// variances of one step's averaged readings ((m/s)^2 and (rad/s)^2), mapped
/// into the state by the input Jacobian L: Q = L diag(speed_var,
/// yaw_rate_var) L'. `heading_drift_var` (rad^2 per step) adds unmodelled
/// heading drift, such as wheel slip, directly to the heading.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PlanarOdometry<T> {
    /// Variance of one step's speed reading, (m/s)^2.
    pub speed_var: T,
    /// Variance of one step's yaw-rate reading, (rad/s)^2.
    pub yaw_rate_var: T,
    /// Extra heading variance per step, rad^2.
    pub heading_drift_var: T,
}

impl<T: Scalar> PlanarOdometry<T> {
    #[inline(always)]
    fn midpoint(x: &Vector3<T>, u: &Odometry<T>, dt: T) -> (T, T) {
        (x[2] + u.yaw_rate * dt * T::of(0.5)).sin_cos_rad()
    }
}

impl<T: Scalar> ProcessModel<T, 3> for PlanarOdometry<T> {
    type Input = Odometry<T>;

    /// The identity plus the heading's effect on x and y.
    const JACOBIAN_PATTERN: Pattern<3, 3> = Pattern::IDENTITY.free(0, 2).free(1, 2);
    /// Speed and yaw rate drive x and y; yaw rate and drift the heading
    /// (drift with weight one).
    const SOURCES_PATTERN: Pattern<3, 3> =
        Pattern::ZERO.free_block(0, 0, 2, 2).free(2, 1).one(2, 2);

    #[inline(always)]
    fn transition(&self, x: &Vector3<T>, u: &Odometry<T>, dt: T) -> Vector3<T> {
        let (s, c) = Self::midpoint(x, u, dt);
        let d = u.speed * dt;
        Vector3::new(x[0] + d * c, x[1] + d * s, x[2] + u.yaw_rate * dt)
    }

    #[inline(always)]
    fn jacobian(&self, x: &Vector3<T>, u: &Odometry<T>, dt: T) -> SMatrix<T, 3, 3> {
        let (s, c) = Self::midpoint(x, u, dt);
        let d = u.speed * dt;
        let mut f = SMatrix::<T, 3, 3>::identity();
        f[(0, 2)] = -d * s;
        f[(1, 2)] = d * c;
        f
    }

    #[inline(always)]
    fn noise(&self, x: &Vector3<T>, u: &Odometry<T>, dt: T) -> SMatrix<T, 3, 3> {
        let (s, c) = Self::midpoint(x, u, dt);
        let (g, q) = self.sources_at(s, c, u, dt);
        from_sources(&g, &q)
    }

    #[inline(always)]
    fn noise_sources(
        &self,
        x: &Vector3<T>,
        u: &Odometry<T>,
        dt: T,
    ) -> Option<(SMatrix<T, 3, 3>, Vector3<T>)> {
        let (s, c) = Self::midpoint(x, u, dt);
        Some(self.sources_at(s, c, u, dt))
    }

    #[inline(always)]
    fn linearize(&self, x: &Vector3<T>, u: &Odometry<T>, dt: T) -> Linearized<T, 3> {
        // One sine and cosine of the midpoint heading serve all four parts.
        let (s, c) = Self::midpoint(x, u, dt);
        let (g, q) = self.sources_at(s, c, u, dt);
        let d = u.speed * dt;
        let mut f = SMatrix::<T, 3, 3>::identity();
        f[(0, 2)] = -d * s;
        f[(1, 2)] = d * c;
        Linearized {
            next: Vector3::new(x[0] + d * c, x[1] + d * s, x[2] + u.yaw_rate * dt),
            jacobian: f,
            noise: from_sources(&g, &q),
            sources: Some((g, q)),
        }
    }

    #[inline(always)]
    fn normalize(&self, x: &mut Vector3<T>) {
        x[2] = wrap_angle(x[2]);
    }
}

impl<T: Scalar> PlanarOdometry<T> {
    /// Noise sources at the midpoint heading (sine `s`, cosine `c`): the
    /// speed reading, the yaw-rate reading and heading drift, as the columns
    /// of the input Jacobian G with their variances.
    #[inline(always)]
    fn sources_at(&self, s: T, c: T, u: &Odometry<T>, dt: T) -> (SMatrix<T, 3, 3>, Vector3<T>) {
        // (v dt) dt / 2, shared by both entries (the same products in the
        // same order as writing each out).
        let half_step = u.speed * dt * dt * T::of(0.5);
        let g = SMatrix::<T, 3, 3>::new(
            dt * c,
            -(half_step * s),
            T::zero(),
            dt * s,
            half_step * c,
            T::zero(),
            T::zero(),
            dt,
            T::one(),
        );
        let q = Vector3::new(self.speed_var, self.yaw_rate_var, self.heading_drift_var);
        (g, q)
    }
}

/// A position fix (x, y) in metres with independent x and y errors of
/// variances `var` (m^2): R = diag(var), declared diagonal
/// ([`MeasurementModel::NOISE_PATTERN`]), so the update tests the two
/// variances instead of factoring R and skips its zero products. A fix with
/// correlated errors (a rotated error ellipse) is a model of its own with a
/// full R.
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct PositionFix<T> {
    /// Noise variances of x and y, m^2.
    pub var: Vector2<T>,
}

impl<T: Scalar> PositionFix<T> {
    /// The measurement matrix H, selecting x and y.
    #[must_use]
    pub fn h() -> SMatrix<T, 2, 3> {
        SMatrix::<T, 2, 3>::new(
            T::one(),
            T::zero(),
            T::zero(),
            T::zero(),
            T::one(),
            T::zero(),
        )
    }
}

impl<T: Scalar> MeasurementModel<T, 3, 2> for PositionFix<T> {
    /// H selects x and y.
    const JACOBIAN_PATTERN: Pattern<2, 3> = Pattern::IDENTITY;
    /// Independent x and y errors.
    const NOISE_PATTERN: Pattern<2, 2> = Pattern::ZERO.free(0, 0).free(1, 1);

    #[inline(always)]
    fn expected(&self, x: &Vector3<T>) -> Vector2<T> {
        Vector2::new(x[0], x[1])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &Vector3<T>) -> SMatrix<T, 2, 3> {
        Self::h()
    }
    #[inline(always)]
    fn noise(&self, _x: &Vector3<T>) -> Matrix2<T> {
        Matrix2::from_diagonal(&self.var)
    }
    #[inline(always)]
    fn normalize(&self, x: &mut Vector3<T>) {
        x[2] = wrap_angle(x[2]);
    }
}

/// A heading fix (compass, magnetometer or a map match) in radians, noise
/// variance `var` (rad^2). The residual is wrapped to (-pi, pi].
#[derive(Debug, Clone, Copy, PartialEq)]
#[cfg_attr(feature = "defmt", derive(defmt::Format))]
pub struct HeadingFix<T> {
    /// Noise variance of the fix, rad^2.
    pub var: T,
}

impl<T: Scalar> MeasurementModel<T, 3, 1> for HeadingFix<T> {
    /// H selects the heading.
    const JACOBIAN_PATTERN: Pattern<1, 3> = Pattern::ZERO.one(0, 2);

    #[inline(always)]
    fn expected(&self, x: &Vector3<T>) -> SVector<T, 1> {
        SVector::<T, 1>::new(x[2])
    }
    #[inline(always)]
    fn jacobian(&self, _x: &Vector3<T>) -> SMatrix<T, 1, 3> {
        SMatrix::<T, 1, 3>::new(T::zero(), T::zero(), T::one())
    }
    #[inline(always)]
    fn noise(&self, _x: &Vector3<T>) -> SMatrix<T, 1, 1> {
        SMatrix::<T, 1, 1>::new(self.var)
    }
    #[inline(always)]
    fn residual(&self, z: &SVector<T, 1>, expected: &SVector<T, 1>) -> SVector<T, 1> {
        SVector::<T, 1>::new(wrap_angle(z[0] - expected[0]))
    }
    #[inline(always)]
    fn normalize(&self, x: &mut Vector3<T>) {
        x[2] = wrap_angle(x[2]);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Central difference of `f` along `e`, step `h`: error O(h^2) (common
    /// practice for checking Jacobians).
    fn central(f: impl Fn(f64) -> Vector3<f64>, h: f64) -> Vector3<f64> {
        (f(h) - f(-h)) / (2.0 * h)
    }

    fn motion() -> PlanarOdometry<f64> {
        PlanarOdometry {
            speed_var: 4e-4,
            yaw_rate_var: 1e-4,
            heading_drift_var: 2e-6,
        }
    }

    #[test]
    fn jacobians_match_central_differences_of_the_model() {
        // Step 1e-5: truncation error about h^2 |f'''| ~ 1e-10 for these
        // magnitudes, rounding about eps / h ~ 2e-11; the check allows 1e-8.
        let h = 1e-5;
        let m = motion();
        for (x, u, dt) in [
            (Vector3::new(1.0, -2.0, 0.3), (0.8, 0.4), 0.01),
            (Vector3::new(-5.0, 3.0, 3.1), (1.5, -2.0), 0.05),
            (Vector3::new(0.0, 0.0, -1.7), (-0.5, 0.1), 0.2),
        ] {
            let odo = Odometry {
                speed: u.0,
                yaw_rate: u.1,
            };
            let lin = m.linearize(&x, &odo, dt);
            assert_eq!(lin.jacobian, m.jacobian(&x, &odo, dt));
            // State Jacobian: column c is d f / d x_c.
            for c in 0..3 {
                let num = central(
                    |s| {
                        let mut xs = x;
                        xs[c] += s;
                        m.transition(&xs, &odo, dt)
                    },
                    h,
                );
                let col = lin.jacobian.column(c).into_owned();
                assert!((num - col).amax() < 1e-8, "F column {c}: {num} vs {col}");
            }
            // Noise input Jacobian: the first two columns of G are d f / d
            // speed and d f / d yaw rate; the third drives the heading alone.
            let (g, q) = lin.sources.expect("the pose model gives sources");
            let by_speed = central(
                |s| {
                    let o = Odometry {
                        speed: u.0 + s,
                        yaw_rate: u.1,
                    };
                    m.transition(&x, &o, dt)
                },
                h,
            );
            let by_rate = central(
                |s| {
                    let o = Odometry {
                        speed: u.0,
                        yaw_rate: u.1 + s,
                    };
                    m.transition(&x, &o, dt)
                },
                h,
            );
            assert!((by_speed - g.column(0)).amax() < 1e-8, "G speed {by_speed}");
            assert!(
                (by_rate - g.column(1)).amax() < 1e-8,
                "G yaw rate {by_rate}"
            );
            assert_eq!(g.column(2).into_owned(), Vector3::new(0.0, 0.0, 1.0));
            assert_eq!(q, Vector3::new(4e-4, 1e-4, 2e-6));
            // And Q is G diag(q) G', the model's `noise`.
            let full = g * SMatrix::<f64, 3, 3>::from_diagonal(&q) * g.transpose();
            assert!((full - lin.noise).amax() < 1e-18);
        }
        // Measurement Jacobians: h is linear, so differences are exact up
        // to rounding.
        let x = Vector3::new(0.4, -0.9, 2.0);
        let fix = PositionFix {
            var: Vector2::new(0.01, 0.01),
        };
        let heading = HeadingFix { var: 1e-3 };
        for c in 0..3 {
            let step = |s: f64| {
                let mut xs = x;
                xs[c] += s;
                xs
            };
            let dpos = (fix.expected(&step(h)) - fix.expected(&step(-h))) / (2.0 * h);
            let hp = MeasurementModel::<f64, 3, 2>::jacobian(&fix, &x);
            assert!((dpos - hp.column(c)).amax() < 1e-9, "position column {c}");
            let dh = (heading.expected(&step(h)) - heading.expected(&step(-h))) / (2.0 * h);
            let hh = MeasurementModel::<f64, 3, 1>::jacobian(&heading, &x);
            assert!((dh - hh.column(c)).amax() < 1e-9, "heading column {c}");
        }
    }
}
