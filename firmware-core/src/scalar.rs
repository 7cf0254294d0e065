//! The scalar types the core runs in (f32 and f64) and the few functions of
//! them it needs beyond field arithmetic, with the same bits on host and target.

use nalgebra::RealField;

/// A floating-point scalar the filter can run in.
///
/// Implemented for `f32` and `f64`. Trigonometry never goes through the
/// platform's maths library, so a host run computes the same bits as the
/// Cortex-M target: `f32` uses the crate's own single-precision kernel (all
/// f32 arithmetic, hardware on a Cortex-M4F), or libm's `sinf`/`cosf` with
/// the `libm-trig` feature (which compute in f64: software on an M4), or
/// micromath's approximations with `fast-trig` (the two features exclude
/// each other); `f64` uses libm.
pub trait Scalar: RealField + Copy {
    /// Machine epsilon (unit roundoff times two) of the type.
    const EPSILON: Self;
    /// Converts an `f64` literal, rounding to nearest.
    fn of(value: f64) -> Self;
    /// Widens to `f64` exactly.
    fn to_f64(self) -> f64;
    /// Sine and cosine of an angle in radians.
    fn sin_cos_rad(self) -> (Self, Self);
    /// `true` when neither NaN nor infinite.
    fn finite(self) -> bool;
}

impl Scalar for f32 {
    const EPSILON: Self = f32::EPSILON;
    #[inline]
    fn of(value: f64) -> Self {
        value as f32
    }
    #[inline]
    fn to_f64(self) -> f64 {
        f64::from(self)
    }
    #[inline]
    fn sin_cos_rad(self) -> (Self, Self) {
        #[cfg(feature = "fast-trig")]
        {
            use micromath::F32Ext;
            (F32Ext::sin(self), F32Ext::cos(self))
        }
        #[cfg(all(feature = "libm-trig", not(feature = "fast-trig")))]
        {
            (libm::sinf(self), libm::cosf(self))
        }
        #[cfg(not(any(feature = "fast-trig", feature = "libm-trig")))]
        {
            crate::trig::sin_cos_f32(self)
        }
    }
    /// `v - v == 0`, tested in the FPU: `is_finite` compiles to a move to
    /// an integer register and a mask on a Cortex-M4F, and with a
    /// neighbouring comparison into a longer class test.
    #[allow(clippy::eq_op)]
    #[inline]
    fn finite(self) -> bool {
        self - self == 0.0
    }
}

impl Scalar for f64 {
    const EPSILON: Self = f64::EPSILON;
    #[inline]
    fn of(value: f64) -> Self {
        value
    }
    #[inline]
    fn to_f64(self) -> f64 {
        self
    }
    #[inline]
    fn sin_cos_rad(self) -> (Self, Self) {
        (libm::sin(self), libm::cos(self))
    }
    #[inline]
    fn finite(self) -> bool {
        self.is_finite()
    }
}

/// Wraps an angle to (-pi, pi], for every finite input.
///
/// Within 65536 rad (every heading a filter meets) one subtraction of a
/// multiple of 2 pi rounded in the scalar type and at most one more turn:
/// exact for inputs within a few turns. Beyond that, the remainder modulo
/// the scalar's 2 pi is taken exactly by binary long division (subtracting
/// 2 pi times powers of two, each subtraction exact by Sterbenz's lemma),
/// at most about 2 x 128 steps in f32 and 2 x 1024 in f64: plain
/// arithmetic, so host and target compute the same bits. (The result is
/// then the angle modulo the rounded 2 pi; for such an input the last bit
/// of the angle is already worth more than a turn in f32 beyond 2^26.)
/// NaN and infinities come back as NaN and infinity unchanged.
#[inline(always)]
pub fn wrap_angle<T: Scalar>(angle: T) -> T {
    let pi = T::pi();
    let two_pi = T::two_pi();
    let mut a = angle;
    // One comparison for the common case (|a| < pi, no change); the
    // boundary -pi, NaN and infinities take the careful path below.
    if a.abs() < pi {
        return a;
    }
    // Rare: the common case above then falls through in the caller's code.
    core::hint::cold_path();
    if a > pi || a <= -pi {
        if a.abs() < T::of(WRAP_DIRECT) {
            let turns = (a / two_pi).round();
            a -= turns * two_pi;
        } else {
            a = remainder_two_pi(a);
        }
        if a <= -pi {
            a += two_pi;
        } else if a > pi {
            a -= two_pi;
        }
    }
    a
}

/// Below this magnitude the rounded quotient leaves at most a turn to
/// correct (the rounding of `turns * 2 pi` is at most half an ulp of the
/// angle, 2^-9 rad in f32).
const WRAP_DIRECT: f64 = 65536.0;

/// `a` minus the multiple of the scalar's 2 pi that leaves it in
/// (-2 pi, 2 pi) with the sign of `a`, exactly. Infinity and NaN pass
/// through.
///
/// Inlined although rarely taken: a call here makes every caller save the
/// callee-saved FPU registers on its common path too (a heading fix costs
/// 239 M4 cycles with the call, 214 without). The price is flash: the
/// loops are copied into every caller (the cost probe binary's text grows
/// from 89 456 to 91 736 bytes).
#[inline(always)]
fn remainder_two_pi<T: Scalar>(a: T) -> T {
    let two_pi = T::two_pi();
    let half = T::of(0.5);
    let mut r = a.abs();
    if !r.finite() {
        return a;
    }
    // The largest 2 pi 2^k not above r (doubling is exact).
    let mut m = two_pi;
    while m <= r * half {
        m += m;
    }
    // Invariant 0 <= r < 2 m: subtracting m when r >= m is exact
    // (m <= r < 2 m, Sterbenz 1974), halving m is exact.
    while m >= two_pi {
        if r >= m {
            r -= m;
        }
        m *= half;
    }
    if a < T::zero() { -r } else { r }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn wrap_keeps_the_half_open_interval() {
        // The interval (-pi, pi] is common practice for heading residuals.
        let pi = core::f64::consts::PI;
        assert_eq!(wrap_angle(0.5_f64), 0.5);
        assert!((wrap_angle(3.0 * pi) - pi).abs() < 1e-12);
        assert!((wrap_angle(-3.0 * pi) - pi).abs() < 1e-12);
        assert!((wrap_angle(-pi) - pi).abs() < 1e-15);
        assert!((wrap_angle(7.0_f64) - (7.0 - 2.0 * pi)).abs() < 1e-12);
        assert!(wrap_angle(-7.0_f32) > -core::f32::consts::PI);
    }

    /// The reference: the exact remainder of `a` modulo the scalar's own
    /// 2 pi, by the platform's f64 `%` (fmod, exact by definition, IEEE 754
    /// section 5.3.1), moved into (-pi, pi].
    fn reference_f32(a: f32) -> f64 {
        let two_pi = f64::from(core::f32::consts::TAU);
        let pi = f64::from(core::f32::consts::PI);
        let mut r = f64::from(a) % two_pi;
        if r > pi {
            r -= two_pi;
        } else if r <= -pi {
            r += two_pi;
        }
        r
    }

    #[test]
    fn large_angles_land_in_the_interval() {
        // Before, 1e9 came back as -57.7: the rounded multiple of 2 pi was
        // off by several turns.
        let got = wrap_angle(1e9_f32);
        assert_eq!(f64::from(got), reference_f32(1e9));
        assert!(got > -core::f32::consts::PI && got <= core::f32::consts::PI);
        for a in [f32::MAX, -f32::MAX, 65536.0, -65536.0, 1.0e20, -3.0e38] {
            let w = wrap_angle(a);
            assert_eq!(f64::from(w), reference_f32(a), "{a}");
        }
        let w = wrap_angle(1e300_f64);
        assert!(w > -core::f64::consts::PI && w <= core::f64::consts::PI);
        // Every finite f32 in a sweep of bit patterns (all exponents): in
        // (-pi, pi]; from 65536 up, equal to the exact remainder; below,
        // within the rounding of the one subtraction (half an ulp of the
        // angle, plus an ulp of the result).
        let (pi32, pi64) = (core::f32::consts::PI, core::f64::consts::PI);
        let mut bits = 0x9e37_79b9_u32;
        for _ in 0..400_000 {
            bits = bits.wrapping_mul(1_664_525).wrapping_add(1_013_904_223);
            let a = f32::from_bits(bits);
            if !a.is_finite() {
                continue;
            }
            let w = wrap_angle(a);
            assert!(w > -pi32 && w <= pi32, "{a} -> {w}");
            let want = reference_f32(a);
            if a.abs() >= 65536.0 {
                assert_eq!(f64::from(w), want, "{a}");
            } else {
                let ulp = |v: f32| f64::from(f32::from_bits(v.abs().to_bits() + 1) - v.abs());
                let err = (f64::from(w) - want).abs();
                // The seam: pi and -pi are the same angle.
                let err = err.min((err - 2.0 * f64::from(pi32)).abs());
                assert!(err <= ulp(a) + ulp(pi32), "{a}: {w} vs {want}");
            }
            let a64 = f64::from_bits(u64::from(bits) << 32 | u64::from(bits.rotate_left(7)));
            if a64.is_finite() {
                let w = wrap_angle(a64);
                assert!(w > -pi64 && w <= pi64, "{a64} -> {w}");
            }
        }
        // Exact in f64 beyond the direct range too (std's `%` as reference).
        for a in [1e10_f64, -7.5e15, 1e300, f64::MAX] {
            let tau = core::f64::consts::TAU;
            let mut r = a % tau;
            if r > pi64 {
                r -= tau;
            } else if r <= -pi64 {
                r += tau;
            }
            assert_eq!(wrap_angle(a), r, "{a}");
        }
        assert!(wrap_angle(f32::NAN).is_nan());
    }
}
