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
/// The last quarter turn k the three-part reduction serves (|x| below about
/// 8043); beyond it libm takes over. The accuracy was measured to 8192 and
/// y DP1 2 stays exact up to k = 2^16 (DP1 2 has 8 significant bits). 5120
/// is an immediate a Thumb-2 compare encodes, so the test is one compare.
const LAST_QUARTER_TURN: u32 = 5120;

/// Sine and cosine of `x` (radians), both from one range reduction, with
/// minimax polynomials on [-pi/4, pi/4] (coefficients of Cephes `sinf` and
/// `cosf`, Moshier 1989). Accurate to about 2 ulp near the origin and to
/// 2^-23 absolute elsewhere for |x| below about 8043 (worst measured 7.7e-8
/// against f64 in the tests); larger arguments go to libm (measured 3.0e-8
/// up to 1e7). Only f32 adds and multiplies are
/// used, so host and target compute identical bits.
// The coefficients are written as published; f32 rounds them.
#[allow(clippy::excessive_precision)]
#[inline]
pub fn sin_cos_f32(x: f32) -> (f32, f32) {
    let ax = x.abs();
    // Octant j = floor(|x| 4/pi) rounded up to even, as j = 2k with
    // k = floor(|x| 2/pi + 1/2): one conversion each way and no integer
    // arithmetic. The halved and doubled constants are exact.
    let k = (ax * (FOUR_OVER_PI * 0.5) + 0.5) as u32;
    // The range test on k, an integer compare with an immediate (no
    // constant load, no FP status transfer). The conversion saturates:
    // infinity gives u32::MAX and goes to libm; NaN gives 0 and stays here,
    // where r, and so both results, are NaN.
    if k > LAST_QUARTER_TURN {
        return sin_cos_far(x);
    }
    let y = k as f32;
    let r = ((ax - y * (DP1 * 2.0)) - y * (DP2 * 2.0)) - y * (DP3 * 2.0);
    let z = r * r;
    let s = ((-1.951_529_6e-4 * z + 8.332_160_9e-3) * z - 1.666_665_5e-1) * z * r + r;
    let c = ((2.443_315_7e-5 * z - 1.388_731_6e-3) * z + 4.166_664_6e-2) * z * z - 0.5 * z + 1.0;
    // Quadrant q = j / 2 of |x|: (sin, cos) = (s, c), (c, -s), (-s, -c), (-c, s).
    let (sin_abs, cos) = match k & 3 {
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

/// Arguments beyond the Cody-Waite range (and NaN, infinities): libm's
/// Payne-Hanek reduction, out of line and cold.
#[cold]
#[inline(never)]
fn sin_cos_far(x: f32) -> (f32, f32) {
    (libm::sinf(x), libm::cosf(x))
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
        // The hand-over, pinned from both sides at arguments where the
        // kernel's last bit and libm's differ (found by a scan): 8043.201 is
        // quarter turn 5120, still the kernel's; 8043.2627 is 5121, libm's.
        let (last, first) = (f32::from_bits(0x45fb_599c), f32::from_bits(0x45fb_5a1a));
        assert_ne!(sin_cos_f32(last), (libm::sinf(last), libm::cosf(last)));
        assert_eq!(sin_cos_f32(first), (libm::sinf(first), libm::cosf(first)));
    }

    /// Largest absolute error of sin and cos over `count` evenly spaced f32
    /// arguments in [lo, hi], against the platform's f64 sin/cos of the
    /// same (exactly widened) argument.
    fn worst(lo: f64, hi: f64, count: u32) -> f64 {
        let mut worst = 0.0f64;
        for i in 0..=count {
            let xf = (lo + (hi - lo) * f64::from(i) / f64::from(count)) as f32;
            let xd = f64::from(xf);
            let (s, c) = sin_cos_f32(xf);
            worst = worst
                .max((f64::from(s) - xd.sin()).abs())
                .max((f64::from(c) - xd.cos()).abs());
        }
        worst
    }

    #[test]
    fn accurate_over_the_whole_range_it_serves() {
        // Reference: the platform's f64 sin/cos of the exactly widened f32
        // argument (far more accurate than an f32 ulp for these arguments).
        // Within the Cody-Waite range (|x| below about 8043) the worst
        // absolute error measured here is 7.7e-8 (0.65 x 2^-23) anywhere, the
        // top of the range included (the reduction was also measured inline
        // to 8192); beyond it libm's `sinf`/`cosf` take over
        // (Payne-Hanek reduction), measured 2.99e-8, half an ulp near 1
        // (2^-25 = 2.98e-8) plus the reference's own rounding. The bounds
        // below are 2^-23 and 2^-24 (one ulp near 1).
        let near = worst(-50.0, 50.0, 200_000);
        let mid = worst(50.0, 1024.0, 400_000);
        let top = worst(1024.0, 8191.99, 800_000);
        let above = worst(8192.0, 1.0e4, 100_000);
        let far = worst(1.0e4, 1.0e7, 200_000);
        println!(
            "sin/cos worst absolute error: |x| <= 50 {near:e}, to 1024 {mid:e}, to 8192 {top:e}, to 1e4 {above:e}, to 1e7 {far:e}"
        );
        assert!(near <= 2f64.powi(-23), "{near}");
        assert!(mid <= 2f64.powi(-23), "{mid}");
        assert!(top <= 2f64.powi(-23), "{top}");
        assert!(above <= 2f64.powi(-24), "{above}");
        assert!(far <= 2f64.powi(-24), "{far}");
        // Negative arguments mirror the positive ones exactly (sine odd,
        // cosine even: common practice, and the kernel works on |x|).
        for x in [0.7_f32, 100.25, 5000.5, 8191.0, 9000.0, 3.0e6] {
            let (s, c) = sin_cos_f32(x);
            let (sn, cn) = sin_cos_f32(-x);
            assert_eq!((s.to_bits(), c.to_bits()), ((-sn).to_bits(), cn.to_bits()));
        }
        // The largest finite argument: finite and in [-1, 1].
        let (s, c) = sin_cos_f32(f32::MAX);
        assert!(s.abs() <= 1.0 && c.abs() <= 1.0);
    }
}
