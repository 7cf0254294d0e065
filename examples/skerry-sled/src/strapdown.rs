//! The sled's strapdown inertial process model: position, velocity and ZYX
//! Euler attitude driven by a 3-axis gyro and accelerometer, with biases.

use cairn_core::nalgebra::{Matrix3, SMatrix, SVector, Vector3};
use cairn_core::{Entry, Linearized, Pattern, ProcessModel, Scalar, wrap_angle};

use crate::{ACCEL_BIAS, GYRO_BIAS, PITCH, POSITION, ROLL, STATES, VELOCITY, YAW};

/// One inertial sample in the body frame (x forward, y right, z down), the
/// average over the step it ends: the values a predict of length dt uses.
///
/// Field order (also the order of an `input` row in a recorded log): the
/// three gyro axes x, y, z, then the three accelerometer axes x, y, z.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct ImuSample<T: Scalar> {
    /// Body angular rate from the gyro, rad/s, including the gyro biases.
    pub gyro: Vector3<T>,
    /// Specific force from the accelerometer, m/s^2, including the
    /// accelerometer biases (at rest and level it reads (0, 0, -g)).
    pub accel: Vector3<T>,
}

/// The sines and cosines of the three Euler angles.
#[derive(Clone, Copy)]
struct Trig<T> {
    sr: T,
    cr: T,
    sp: T,
    cp: T,
    sy: T,
    cy: T,
}

impl<T: Scalar> Trig<T> {
    #[inline(always)]
    fn of(x: &SVector<T, STATES>) -> Self {
        let (sr, cr) = x[ROLL].sin_cos_rad();
        let (sp, cp) = x[PITCH].sin_cos_rad();
        let (sy, cy) = x[YAW].sin_cos_rad();
        Self {
            sr,
            cr,
            sp,
            cp,
            sy,
            cy,
        }
    }

    /// The body-to-level rotation C = Rz(yaw) Ry(pitch) Rx(roll).
    #[inline(always)]
    fn body_to_level(&self) -> Matrix3<T> {
        let Self {
            sr,
            cr,
            sp,
            cp,
            sy,
            cy,
        } = *self;
        Matrix3::new(
            cp * cy,
            sr * sp * cy - cr * sy,
            cr * sp * cy + sr * sy,
            cp * sy,
            sr * sp * sy + cr * cy,
            cr * sp * sy - sr * cy,
            -sp,
            sr * cp,
            cr * cp,
        )
    }

    /// The Euler-angle rate matrix E: (roll, pitch, yaw)' = E w for body
    /// rate w. Singular at pitch +-90 degrees (1 / cos(pitch)).
    #[inline(always)]
    fn euler_rates(&self) -> Matrix3<T> {
        let sec = T::one() / self.cp;
        let tp = self.sp * sec;
        Matrix3::new(
            T::one(),
            self.sr * tp,
            self.cr * tp,
            T::zero(),
            self.cr,
            -self.sr,
            T::zero(),
            self.sr * sec,
            self.cr * sec,
        )
    }
}

/// The Skerry sled's strapdown model over one step dt (first-order Euler),
/// in a local level frame (x north, y east, z down) with constant gravity:
///
/// ```text
/// w = gyro - bg,  f = accel - ba
/// p   += v dt
/// v   += (C(roll, pitch, yaw) f + (0, 0, g)) dt
/// att += E(roll, pitch) w dt     (roll and yaw wrapped to (-pi, pi])
/// bg, ba unchanged
/// ```
///
/// C is the ZYX body-to-level rotation and E the Euler-angle rate matrix.
/// E has 1 / cos(pitch) in it: keep the sled well away from pitch +-90
/// degrees (a sled on a slope sees tens of degrees at most). Near the
/// singularity the Jacobian grows without bound, and where it overflows the
/// filter refuses the predict (non-finite transition) instead of using it.
///
/// The process noise is twelve independent sources, from datasheet figures
/// (IEEE Std 952-1997 terms), the same on each axis: gyro white noise (angle
/// random walk `gyro_arw`, mapped into the attitude through E dt),
/// accelerometer white noise (velocity random walk `accel_vrw`, mapped into
/// the velocity through C dt), and the random walks of the gyro biases
/// (`gyro_bias_rw`) and accelerometer biases (`accel_bias_rw`). A step's
/// averaged reading carries variance N^2 / dt; a bias walks by K^2 dt.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct SledInertial<T> {
    /// Gyro angle random walk, rad/sqrt(s), each axis.
    pub gyro_arw: T,
    /// Accelerometer velocity random walk, (m/s)/sqrt(s), each axis.
    pub accel_vrw: T,
    /// Gyro bias random walk, (rad/s)/sqrt(s), each axis.
    pub gyro_bias_rw: T,
    /// Accelerometer bias random walk, (m/s^2)/sqrt(s), each axis.
    pub accel_bias_rw: T,
    /// Gravity, m/s^2, along the level frame's z (down).
    pub gravity: T,
}

/// Standard gravity, 9.80665 m/s^2 (the conventional value of the 3rd
/// CGPM, 1901).
pub const STANDARD_GRAVITY: f64 = 9.806_65;

impl<T: Scalar> SledInertial<T> {
    /// A strapdown model from the four noise figures, per axis: gyro angle
    /// random walk (rad/sqrt(s)), accelerometer velocity random walk
    /// ((m/s)/sqrt(s)), gyro bias random walk ((rad/s)/sqrt(s)) and
    /// accelerometer bias random walk ((m/s^2)/sqrt(s)), with
    /// [`STANDARD_GRAVITY`]. Set [`SledInertial::gravity`] for local gravity.
    ///
    /// The figures are not checked here: a non-finite figure makes the
    /// filter refuse the predict, and a negative one counts as its magnitude.
    #[must_use]
    pub fn new(gyro_arw: T, accel_vrw: T, gyro_bias_rw: T, accel_bias_rw: T) -> Self {
        Self {
            gyro_arw,
            accel_vrw,
            gyro_bias_rw,
            accel_bias_rw,
            gravity: T::of(STANDARD_GRAVITY),
        }
    }

    /// The bias-corrected body rate and specific force.
    #[inline(always)]
    fn corrected(x: &SVector<T, STATES>, u: &ImuSample<T>) -> (Vector3<T>, Vector3<T>) {
        let w = Vector3::new(
            u.gyro[0] - x[GYRO_BIAS],
            u.gyro[1] - x[GYRO_BIAS + 1],
            u.gyro[2] - x[GYRO_BIAS + 2],
        );
        let f = Vector3::new(
            u.accel[0] - x[ACCEL_BIAS],
            u.accel[1] - x[ACCEL_BIAS + 1],
            u.accel[2] - x[ACCEL_BIAS + 2],
        );
        (w, f)
    }

    /// The state after one step, given the rotation `c` and rate matrix `e`.
    #[inline(always)]
    fn next(
        &self,
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
        c: &Matrix3<T>,
        e: &Matrix3<T>,
    ) -> SVector<T, STATES> {
        let (w, f) = Self::corrected(x, u);
        let a = c * f;
        let rates = e * w;
        let mut n = *x;
        for i in 0..3 {
            n[POSITION + i] = x[POSITION + i] + x[VELOCITY + i] * dt;
            n[ROLL + i] = x[ROLL + i] + rates[i] * dt;
        }
        n[VELOCITY] = x[VELOCITY] + a[0] * dt;
        n[VELOCITY + 1] = x[VELOCITY + 1] + a[1] * dt;
        n[VELOCITY + 2] = x[VELOCITY + 2] + (a[2] + self.gravity) * dt;
        n
    }

    /// The 15 x 15 Jacobian of [`SledInertial::next`] with respect to the
    /// state.
    #[inline(always)]
    fn jacobian_at(
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
        t: &Trig<T>,
        c: &Matrix3<T>,
        e: &Matrix3<T>,
    ) -> SMatrix<T, STATES, STATES> {
        let (w, f) = Self::corrected(x, u);
        let Trig {
            sr,
            cr,
            sp,
            cp,
            sy,
            cy,
        } = *t;
        // d(C f) / d(roll, pitch, yaw), with C f = Rz (Ry (Rx f)).
        let b = Vector3::new(f[0], cr * f[1] - sr * f[2], sr * f[1] + cr * f[2]);
        let cb = Vector3::new(cp * b[0] + sp * b[2], b[1], -sp * b[0] + cp * b[2]);
        let rz = |v: Vector3<T>| Vector3::new(cy * v[0] - sy * v[1], sy * v[0] + cy * v[1], v[2]);
        let ry = |v: Vector3<T>| Vector3::new(cp * v[0] + sp * v[2], v[1], -sp * v[0] + cp * v[2]);
        let d_roll = rz(ry(Vector3::new(
            T::zero(),
            -sr * f[1] - cr * f[2],
            cr * f[1] - sr * f[2],
        )));
        let d_pitch = rz(Vector3::new(
            -sp * b[0] + cp * b[2],
            T::zero(),
            -cp * b[0] - sp * b[2],
        ));
        let d_yaw = Vector3::new(-sy * cb[0] - cy * cb[1], cy * cb[0] - sy * cb[1], T::zero());
        // d(E w) / d(roll, pitch); E does not depend on yaw.
        let sec = T::one() / cp;
        let tp = sp * sec;
        let across = sr * w[1] + cr * w[2];
        let along = cr * w[1] - sr * w[2];
        let e_roll = Vector3::new(tp * along, -across, along * sec);
        let e_pitch = Vector3::new(across * sec * sec, T::zero(), across * sp * sec * sec);

        let mut j = SMatrix::<T, STATES, STATES>::identity();
        for i in 0..3 {
            j[(POSITION + i, VELOCITY + i)] = dt;
            j[(VELOCITY + i, ROLL)] = d_roll[i] * dt;
            j[(VELOCITY + i, PITCH)] = d_pitch[i] * dt;
            j[(VELOCITY + i, YAW)] = d_yaw[i] * dt;
            j[(ROLL + i, ROLL)] += e_roll[i] * dt;
            j[(ROLL + i, PITCH)] += e_pitch[i] * dt;
            for k in 0..3 {
                j[(VELOCITY + i, ACCEL_BIAS + k)] = -c[(i, k)] * dt;
                j[(ROLL + i, GYRO_BIAS + k)] = -e[(i, k)] * dt;
            }
        }
        j
    }

    /// The twelve noise sources as the columns of G with their variances:
    /// columns 0-2 the gyro axes (into the attitude through E dt), 3-5 the
    /// accelerometer axes (into the velocity through C dt), 6-8 the gyro
    /// bias steps, 9-11 the accelerometer bias steps; 12-14 are zero.
    #[inline(always)]
    fn sources_at(
        &self,
        dt: T,
        c: &Matrix3<T>,
        e: &Matrix3<T>,
    ) -> (SMatrix<T, STATES, STATES>, SVector<T, STATES>) {
        let mut g = SMatrix::<T, STATES, STATES>::zeros();
        let mut q = SVector::<T, STATES>::zeros();
        for i in 0..3 {
            for k in 0..3 {
                g[(ROLL + i, k)] = e[(i, k)] * dt;
                g[(VELOCITY + i, 3 + k)] = c[(i, k)] * dt;
            }
            g[(GYRO_BIAS + i, 6 + i)] = T::one();
            g[(ACCEL_BIAS + i, 9 + i)] = T::one();
            // The reading's variance over a step is N^2 / dt, a bias step's
            // K^2 dt (IEEE Std 952-1997).
            q[i] = self.gyro_arw * self.gyro_arw / dt;
            q[3 + i] = self.accel_vrw * self.accel_vrw / dt;
            q[6 + i] = self.gyro_bias_rw * self.gyro_bias_rw * dt;
            q[9 + i] = self.accel_bias_rw * self.accel_bias_rw * dt;
        }
        (g, q)
    }
}

/// Wraps roll and yaw into (-pi, pi]; pitch stays as it is.
#[inline(always)]
pub(crate) fn wrap_attitude<T: Scalar>(x: &mut SVector<T, STATES>) {
    x[ROLL] = wrap_angle(x[ROLL]);
    x[YAW] = wrap_angle(x[YAW]);
}

/// The structure of [`SledInertial::jacobian_at`]'s F: the identity; dt from
/// velocity to position; attitude and accelerometer bias into velocity (the
/// down velocity does not depend on yaw); roll and pitch into the attitude
/// rates; gyro bias into the attitude. 48 of 225 entries are not
/// structurally zero, 13 of them ones.
const JACOBIAN: Pattern<STATES, STATES> = {
    let mut p = Pattern::IDENTITY
        .free_block(VELOCITY, ROLL, 3, 3)
        .zero(VELOCITY + 2, YAW)
        .free_block(VELOCITY, ACCEL_BIAS, 3, 3)
        .free_block(ROLL, ROLL, 3, 2)
        .free_block(ROLL, GYRO_BIAS, 3, 3);
    let mut i = 0;
    while i < 3 {
        p = p.free(POSITION + i, VELOCITY + i);
        i += 1;
    }
    p
};

/// The structure of [`SledInertial::sources_at`]'s G: gyro noise into the
/// attitude, accelerometer noise into the velocity, each bias step into its
/// own bias with weight one.
const SOURCES: Pattern<STATES, STATES> = {
    let mut p = Pattern::ZERO
        .free_block(ROLL, 0, 3, 3)
        .free_block(VELOCITY, 3, 3, 3);
    let mut i = 0;
    while i < 3 {
        p = p
            .with(GYRO_BIAS + i, 6 + i, Entry::One)
            .with(ACCEL_BIAS + i, 9 + i, Entry::One);
        i += 1;
    }
    p
};

impl<T: Scalar> ProcessModel<T, STATES> for SledInertial<T> {
    type Input = ImuSample<T>;

    const JACOBIAN_PATTERN: Pattern<STATES, STATES> = JACOBIAN;
    const SOURCES_PATTERN: Pattern<STATES, STATES> = SOURCES;

    #[inline(always)]
    fn transition(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> SVector<T, STATES> {
        let t = Trig::of(x);
        self.next(x, u, dt, &t.body_to_level(), &t.euler_rates())
    }

    #[inline(always)]
    fn jacobian(
        &self,
        x: &SVector<T, STATES>,
        u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let t = Trig::of(x);
        Self::jacobian_at(x, u, dt, &t, &t.body_to_level(), &t.euler_rates())
    }

    #[inline(always)]
    fn noise(
        &self,
        x: &SVector<T, STATES>,
        _u: &ImuSample<T>,
        dt: T,
    ) -> SMatrix<T, STATES, STATES> {
        let t = Trig::of(x);
        let (g, q) = self.sources_at(dt, &t.body_to_level(), &t.euler_rates());
        cairn_core::noise_from_sources(&g, &q)
    }

    #[inline(always)]
    fn noise_sources(
        &self,
        x: &SVector<T, STATES>,
        _u: &ImuSample<T>,
        dt: T,
    ) -> Option<(SMatrix<T, STATES, STATES>, SVector<T, STATES>)> {
        let t = Trig::of(x);
        Some(self.sources_at(dt, &t.body_to_level(), &t.euler_rates()))
    }

    #[inline(always)]
    fn linearize(&self, x: &SVector<T, STATES>, u: &ImuSample<T>, dt: T) -> Linearized<T, STATES> {
        // One set of sines and cosines, one C and one E serve every part.
        let t = Trig::of(x);
        let c = t.body_to_level();
        let e = t.euler_rates();
        let (g, q) = self.sources_at(dt, &c, &e);
        Linearized {
            next: self.next(x, u, dt, &c, &e),
            jacobian: Self::jacobian_at(x, u, dt, &t, &c, &e),
            noise: cairn_core::noise_from_sources(&g, &q),
            sources: Some((g, q)),
        }
    }

    #[inline(always)]
    fn normalize(&self, x: &mut SVector<T, STATES>) {
        wrap_attitude(x);
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn model() -> SledInertial<f64> {
        // Invented tactical-MEMS figures.
        SledInertial::new(1.5e-4, 1.0e-3, 1.0e-5, 5.0e-5)
    }

    fn state(att: [f64; 3], seed: f64) -> SVector<f64, 15> {
        let mut x = SVector::<f64, 15>::zeros();
        for i in 0..15 {
            // Distinct, non-round values in every slot.
            x[i] = 0.37 * seed * ((i as f64) * 1.3 + seed).sin();
        }
        x[GYRO_BIAS] *= 0.01;
        x[GYRO_BIAS + 1] *= 0.01;
        x[GYRO_BIAS + 2] *= 0.01;
        x[ROLL] = att[0];
        x[PITCH] = att[1];
        x[YAW] = att[2];
        x
    }

    fn imu(seed: f64) -> ImuSample<f64> {
        ImuSample {
            gyro: Vector3::new(0.2 * seed, -0.35, 0.5 * seed.cos()),
            accel: Vector3::new(0.8, -0.3 * seed, -9.7),
        }
    }

    #[test]
    fn jacobian_matches_central_differences() {
        // Central differences, error O(h^2) (common practice): with h = 1e-6
        // truncation is about 1e-12 and rounding about 1e-10 of the entries
        // (at most about 10 dt); a sign error is off by twice an entry.
        let m = model();
        let cases = [
            ([0.0, 0.0, 0.0], 1.0),
            ([0.3, -0.2, 1.1], 2.0),
            ([-1.2, 0.9, -2.8], 0.5),
            ([2.9, -1.1, 3.0], -1.5),
            ([0.05, 0.6, -0.4], 3.0),
        ];
        for (att, seed) in cases {
            let x = state(att, seed);
            let u = imu(seed);
            for dt in [0.01, 0.5] {
                let f = m.jacobian(&x, &u, dt);
                let h = 1e-6;
                for j in 0..15 {
                    let mut xp = x;
                    let mut xm = x;
                    xp[j] += h;
                    xm[j] -= h;
                    let col = (m.transition(&xp, &u, dt) - m.transition(&xm, &u, dt)) / (2.0 * h);
                    for i in 0..15 {
                        let tol = 1e-8 * (1.0 + f[(i, j)].abs());
                        assert!(
                            (f[(i, j)] - col[i]).abs() < tol,
                            "F[{i},{j}] = {} but central difference {} at attitude {att:?}, dt {dt}",
                            f[(i, j)],
                            col[i]
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn rotation_is_orthonormal_and_turns_the_right_way() {
        // A rotation matrix satisfies C C' = I and det C = 1 (common
        // practice); with yaw 90 degrees the body's forward axis points east.
        for att in [[0.3, -0.2, 1.1], [-1.2, 0.9, -2.8], [2.9, -1.1, 3.0]] {
            let c = Trig::of(&state(att, 1.0)).body_to_level();
            assert!((c * c.transpose() - Matrix3::identity()).abs().max() < 1e-15);
            assert!((c.determinant() - 1.0).abs() < 1e-15);
        }
        let half_pi = core::f64::consts::FRAC_PI_2;
        let c = Trig::of(&state([0.0, 0.0, half_pi], 1.0)).body_to_level();
        assert!((c * Vector3::new(1.0, 0.0, 0.0) - Vector3::new(0.0, 1.0, 0.0)).norm() < 1e-15);
        // Pitch up 90 degrees: forward points up (-z, the level frame's z is down).
        let c = Trig::of(&state([0.0, half_pi, 0.0], 1.0)).body_to_level();
        assert!((c * Vector3::new(1.0, 0.0, 0.0) - Vector3::new(0.0, 0.0, -1.0)).norm() < 1e-15);
        // Roll right 90 degrees: the right wing points down.
        let c = Trig::of(&state([half_pi, 0.0, 0.0], 1.0)).body_to_level();
        assert!((c * Vector3::new(0.0, 1.0, 0.0) - Vector3::new(0.0, 0.0, 1.0)).norm() < 1e-15);
    }

    #[test]
    fn euler_rate_matrix_inverts_the_body_rate_relation() {
        // Body rates from Euler-angle rates, w = W (roll, pitch, yaw)' with
        // W = [[1, 0, -sin p], [0, cos r, sin r cos p], [0, -sin r, cos r cos p]]
        // (Titterton and Weston, Strapdown Inertial Navigation Technology,
        // 2nd ed., 2004; from memory). E must be its inverse.
        for att in [[0.3, -0.2, 1.1], [-1.2, 0.9, -2.8], [2.9, -1.4, 3.0]] {
            let (r, p): (f64, f64) = (att[0], att[1]);
            let w = Matrix3::new(
                1.0,
                0.0,
                -p.sin(),
                0.0,
                r.cos(),
                r.sin() * p.cos(),
                0.0,
                -r.sin(),
                r.cos() * p.cos(),
            );
            let e = Trig::of(&state(att, 1.0)).euler_rates();
            assert!((e * w - Matrix3::identity()).abs().max() < 1e-13);
        }
    }

    #[test]
    fn a_level_sled_at_rest_stays_at_rest() {
        // At rest and level the accelerometer reads -g along z (its specific
        // force holds the sled up; common practice): velocity and attitude
        // do not move over a step.
        let m = model();
        let x = SVector::<f64, 15>::zeros();
        let u = ImuSample {
            gyro: Vector3::zeros(),
            accel: Vector3::new(0.0, 0.0, -STANDARD_GRAVITY),
        };
        assert_eq!(m.transition(&x, &u, 0.01), x);
        // Free fall (zero specific force) gains g dt downwards.
        let u = ImuSample {
            gyro: Vector3::zeros(),
            accel: Vector3::zeros(),
        };
        assert!((m.transition(&x, &u, 0.5)[VELOCITY + 2] - 0.5 * STANDARD_GRAVITY).abs() < 1e-15);
    }

    #[test]
    fn noise_is_g_diag_q_g_transposed_with_datasheet_variances() {
        let m = model();
        let u = imu(1.0);
        for att in [[0.0, 0.0, 0.0], [0.3, -0.2, 1.1], [-1.2, 0.9, -2.8]] {
            let x = state(att, 2.0);
            for dt in [0.01, 0.011, 2.0] {
                let (g, q) = m.noise_sources(&x, &u, dt).unwrap();
                let q_mat = m.noise(&x, &u, dt);
                // The plain product, nalgebra's (a general-purpose library).
                let reference = g * SMatrix::<f64, 15, 15>::from_diagonal(&q) * g.transpose();
                let scale = reference.abs().max();
                assert!((q_mat - reference).abs().max() <= 16.0 * f64::EPSILON * scale);
                // Velocity noise goes through a rotation, so it stays
                // isotropic: Na^2 dt I at any attitude (C C' = I). Biases
                // walk by K^2 dt (IEEE Std 952-1997 terms).
                let rel = |a: f64, b: f64| ((a - b) / b).abs();
                for i in 0..3 {
                    for k in 0..3 {
                        let expected = if i == k { 1.0e-6 * dt } else { 0.0 };
                        assert!((q_mat[(VELOCITY + i, VELOCITY + k)] - expected).abs() < 1e-20);
                    }
                    assert!(rel(q_mat[(GYRO_BIAS + i, GYRO_BIAS + i)], 1.0e-10 * dt) < 1e-14);
                    assert!(rel(q_mat[(ACCEL_BIAS + i, ACCEL_BIAS + i)], 2.5e-9 * dt) < 1e-14);
                    // Position takes no noise within one Euler step.
                    assert_eq!(q_mat[(POSITION + i, POSITION + i)], 0.0);
                }
                // Level: the attitude gets Ng^2 dt on each axis.
                if att == [0.0, 0.0, 0.0] {
                    for i in 0..3 {
                        assert!(rel(q_mat[(ROLL + i, ROLL + i)], 2.25e-8 * dt) < 1e-14);
                    }
                }
            }
        }
        let x = state([0.3, -0.2, 1.1], 2.0);
        let lin = m.linearize(&x, &u, 0.01);
        assert_eq!(lin.next, m.transition(&x, &u, 0.01));
        assert_eq!(lin.jacobian, m.jacobian(&x, &u, 0.01));
        assert_eq!(lin.noise, m.noise(&x, &u, 0.01));
        assert_eq!(lin.sources, m.noise_sources(&x, &u, 0.01));
    }

    #[test]
    fn roll_and_yaw_wrap_and_pitch_does_not() {
        // (-pi, pi] for the wrapped angles (common practice).
        let pi = core::f64::consts::PI;
        let m = model();
        let mut x = state([pi - 0.001, 0.2, pi - 0.002], 1.0);
        x[ROLL] += 0.01;
        x[YAW] += 0.01;
        x[PITCH] = 1.4;
        m.normalize(&mut x);
        assert!((x[ROLL] - (-pi + 0.009)).abs() < 1e-12);
        assert!((x[YAW] - (-pi + 0.008)).abs() < 1e-12);
        assert_eq!(x[PITCH], 1.4);
    }
}
