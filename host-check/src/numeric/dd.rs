//! Double-double arithmetic: an unevaluated sum of two `f64`s carrying a
//! 106-bit significand (about 32 significant digits) with `f64`'s range.
//!
//! The algorithms are the error-free transformations of Dekker (Numer. Math.
//! 18, 1971) and Knuth (two-sum), assembled as in Hida, Li & Bailey
//! (ARITH-15, 2001) and, for the proven error bounds, Joldes, Muller &
//! Popescu, "Tight and rigorous error bounds for basic building blocks of
//! double-word arithmetic", ACM TOMS 44(2), 2017:
//!
//! | operation            | algorithm (JMP 2017) | relative error bound, u = 2^-53 |
//! |----------------------|----------------------|----------------------------------|
//! | `Dd + Dd`            | AccurateDWPlusDW (6) | 3u² + 13u³                       |
//! | `Dd + f64`           | DWPlusFP (4)         | 2u²                              |
//! | `Dd * f64`           | DWTimesFP1 (7)       | 1.5u² + 4u³                      |
//! | `Dd * Dd`            | DWTimesDW1 (10)      | a few u² (see the note below)    |
//! | `Dd / Dd`            | DWDivDW2 (17)        | 15u² + 56u³                      |
//!
//! The exact product of two `f64`s is formed with Dekker's splitting (no
//! fused multiply-add is needed, so the result is the same on every host).
//! Note: the bound for the double-double product is quoted here from memory
//! as "a few u²" (JMP 2017 tighten the classic analysis of this algorithm);
//! the unit tests measure it against exact rationals.

use core::cmp::Ordering;
use core::fmt;
use core::ops::{Add, AddAssign, Div, Mul, MulAssign, Neg, Sub, SubAssign};

/// A double-double number `hi + lo` with `|lo| <= ulp(hi) / 2`.
///
/// Arithmetic never panics; overflow and invalid operations give
/// non-finite results exactly as `f64` does (check [`Dd::is_finite`]).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Dd {
    hi: f64,
    lo: f64,
}

/// Knuth's two-sum: `a + b = s + e` exactly, for any finite `a`, `b`.
#[inline(always)]
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// Dekker's fast two-sum: `a + b = s + e` exactly when `|a| >= |b|` (or `a` is 0).
#[inline(always)]
fn fast_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let e = b - (s - a);
    (s, e)
}

/// Dekker's split of `a` into two 26-bit halves, `a = h + l` exactly.
#[inline(always)]
fn split(a: f64) -> (f64, f64) {
    // 2^27 + 1 (Dekker 1971, Veltkamp's splitting).
    const SPLITTER: f64 = 134_217_729.0;
    let t = SPLITTER * a;
    let h = t - (t - a);
    (h, a - h)
}

/// Dekker's two-product: `a * b = p + e` exactly (barring overflow/underflow).
#[inline(always)]
fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    if !p.is_finite() {
        return (p, 0.0);
    }
    let (ah, al) = split(a);
    let (bh, bl) = split(b);
    let e = ((ah * bh - p) + ah * bl + al * bh) + al * bl;
    (p, e)
}

impl Dd {
    /// Zero.
    pub const ZERO: Dd = Dd { hi: 0.0, lo: 0.0 };
    /// One.
    pub const ONE: Dd = Dd { hi: 1.0, lo: 0.0 };

    /// The double-double equal to `x` (exact).
    #[must_use]
    pub const fn from_f64(x: f64) -> Dd {
        Dd { hi: x, lo: 0.0 }
    }

    /// The exact sum `a + b` as a double-double (Knuth's two-sum).
    #[must_use]
    pub fn sum_exact(a: f64, b: f64) -> Dd {
        let (hi, lo) = two_sum(a, b);
        Dd { hi, lo }
    }

    /// The exact product `a * b` as a double-double (Dekker's two-product).
    #[must_use]
    pub fn prod_exact(a: f64, b: f64) -> Dd {
        let (hi, lo) = two_prod(a, b);
        Dd { hi, lo }
    }

    /// Builds a double-double from two parts, renormalising them.
    #[must_use]
    pub fn from_parts(hi: f64, lo: f64) -> Dd {
        Dd::sum_exact(hi, lo)
    }

    /// The leading part (the nearest `f64` after renormalisation).
    #[must_use]
    pub const fn hi(self) -> f64 {
        self.hi
    }

    /// The trailing part.
    #[must_use]
    pub const fn lo(self) -> f64 {
        self.lo
    }

    /// Rounded to the nearest `f64` (the leading part; ties aside, this is
    /// correct rounding because `|lo| <= ulp(hi)/2`).
    #[must_use]
    pub const fn to_f64(self) -> f64 {
        self.hi
    }

    /// True when both parts are finite.
    #[must_use]
    pub fn is_finite(self) -> bool {
        self.hi.is_finite() && self.lo.is_finite()
    }

    /// Absolute value.
    #[must_use]
    pub fn abs(self) -> Dd {
        if self.hi < 0.0 || (self.hi == 0.0 && self.lo < 0.0) {
            -self
        } else {
            self
        }
    }

    /// `self * self`.
    #[must_use]
    pub fn square(self) -> Dd {
        self * self
    }

    /// Square root, correct to a few units of 2^-106; negative input gives NaN
    /// and zero gives zero.
    ///
    /// One Newton step on the `f64` root (Hida, Li & Bailey 2001):
    /// `q = sqrt(hi)`, `r = (x - q*q) / (2q)`, result `q + r`.
    #[must_use]
    pub fn sqrt(self) -> Dd {
        if self.hi == 0.0 {
            return Dd::ZERO;
        }
        if self.hi < 0.0 || !self.hi.is_finite() {
            return Dd::from_f64(self.hi.sqrt());
        }
        let q = self.hi.sqrt();
        let (p, e) = two_prod(q, q);
        let r = (((self.hi - p) - e) + self.lo) / (2.0 * q);
        let (hi, lo) = fast_two_sum(q, r);
        Dd { hi, lo }
    }

    /// `1 / self`.
    #[must_use]
    pub fn recip(self) -> Dd {
        Dd::ONE / self
    }

    /// The larger of two values (NaN-ignoring like `f64::max`).
    #[must_use]
    pub fn max(self, other: Dd) -> Dd {
        match self.partial_cmp(&other) {
            Some(Ordering::Less) => other,
            None if self.hi.is_nan() => other,
            _ => self,
        }
    }

    /// The smaller of two values (NaN-ignoring like `f64::min`).
    #[must_use]
    pub fn min(self, other: Dd) -> Dd {
        match self.partial_cmp(&other) {
            Some(Ordering::Greater) => other,
            None if self.hi.is_nan() => other,
            _ => self,
        }
    }

    /// `self * a + b` with `a`, `b` double-doubles (two rounded operations).
    #[must_use]
    #[inline]
    pub fn mul_add(self, a: Dd, b: Dd) -> Dd {
        self * a + b
    }
}

impl From<f64> for Dd {
    fn from(x: f64) -> Dd {
        Dd::from_f64(x)
    }
}

impl From<f32> for Dd {
    fn from(x: f32) -> Dd {
        Dd::from_f64(f64::from(x))
    }
}

impl From<i32> for Dd {
    fn from(x: i32) -> Dd {
        Dd::from_f64(f64::from(x))
    }
}

impl PartialOrd for Dd {
    fn partial_cmp(&self, other: &Dd) -> Option<Ordering> {
        match self.hi.partial_cmp(&other.hi)? {
            Ordering::Equal => self.lo.partial_cmp(&other.lo),
            ord => Some(ord),
        }
    }
}

impl Neg for Dd {
    type Output = Dd;
    #[inline]
    fn neg(self) -> Dd {
        Dd {
            hi: -self.hi,
            lo: -self.lo,
        }
    }
}

impl Add for Dd {
    type Output = Dd;
    /// AccurateDWPlusDW (JMP 2017, Algorithm 6), error <= 3u² + 13u³.
    #[inline]
    fn add(self, y: Dd) -> Dd {
        let (sh, sl) = two_sum(self.hi, y.hi);
        let (th, tl) = two_sum(self.lo, y.lo);
        let c = sl + th;
        let (vh, vl) = fast_two_sum(sh, c);
        let w = tl + vl;
        let (hi, lo) = fast_two_sum(vh, w);
        Dd { hi, lo }
    }
}

impl Add<f64> for Dd {
    type Output = Dd;
    /// DWPlusFP (JMP 2017, Algorithm 4), error <= 2u².
    #[inline]
    fn add(self, y: f64) -> Dd {
        let (sh, sl) = two_sum(self.hi, y);
        let v = self.lo + sl;
        let (hi, lo) = fast_two_sum(sh, v);
        Dd { hi, lo }
    }
}

impl Add<Dd> for f64 {
    type Output = Dd;
    #[inline]
    fn add(self, y: Dd) -> Dd {
        y + self
    }
}

impl Sub for Dd {
    type Output = Dd;
    #[inline]
    fn sub(self, y: Dd) -> Dd {
        self + (-y)
    }
}

impl Sub<f64> for Dd {
    type Output = Dd;
    #[inline]
    fn sub(self, y: f64) -> Dd {
        self + (-y)
    }
}

impl Sub<Dd> for f64 {
    type Output = Dd;
    #[inline]
    fn sub(self, y: Dd) -> Dd {
        (-y) + self
    }
}

impl Mul for Dd {
    type Output = Dd;
    /// DWTimesDW1 (Dekker 1971; JMP 2017, Algorithm 10): the cross terms
    /// are summed in `f64`; error a few u².
    #[inline]
    fn mul(self, y: Dd) -> Dd {
        let (ch, cl1) = two_prod(self.hi, y.hi);
        let cl2 = self.hi * y.lo + self.lo * y.hi;
        let (hi, lo) = fast_two_sum(ch, cl1 + cl2);
        Dd { hi, lo }
    }
}

impl Mul<f64> for Dd {
    type Output = Dd;
    /// DWTimesFP1 (JMP 2017, Algorithm 7), error <= 1.5u² + 4u³.
    #[inline]
    fn mul(self, y: f64) -> Dd {
        let (ch, cl1) = two_prod(self.hi, y);
        let cl2 = self.lo * y;
        let (th, tl1) = fast_two_sum(ch, cl2);
        let tl2 = tl1 + cl1;
        let (hi, lo) = fast_two_sum(th, tl2);
        Dd { hi, lo }
    }
}

impl Mul<Dd> for f64 {
    type Output = Dd;
    #[inline]
    fn mul(self, y: Dd) -> Dd {
        y * self
    }
}

impl Div for Dd {
    type Output = Dd;
    /// DWDivDW2 (JMP 2017, Algorithm 17), error <= 15u² + 56u³.
    #[inline]
    fn div(self, y: Dd) -> Dd {
        let th = self.hi / y.hi;
        if !th.is_finite() || th == 0.0 && self.hi != 0.0 {
            return Dd::from_f64(th);
        }
        let r = y * th;
        let pi_h = self.hi - r.hi;
        let delta_l = self.lo - r.lo;
        let delta = pi_h + delta_l;
        let tl = delta / y.hi;
        let (hi, lo) = fast_two_sum(th, tl);
        Dd { hi, lo }
    }
}

impl Div<f64> for Dd {
    type Output = Dd;
    #[inline]
    fn div(self, y: f64) -> Dd {
        self / Dd::from_f64(y)
    }
}

impl Div<Dd> for f64 {
    type Output = Dd;
    #[inline]
    fn div(self, y: Dd) -> Dd {
        Dd::from_f64(self) / y
    }
}

impl AddAssign for Dd {
    #[inline]
    fn add_assign(&mut self, y: Dd) {
        *self = *self + y;
    }
}

impl SubAssign for Dd {
    #[inline]
    fn sub_assign(&mut self, y: Dd) {
        *self = *self - y;
    }
}

impl MulAssign for Dd {
    #[inline]
    fn mul_assign(&mut self, y: Dd) {
        *self = *self * y;
    }
}

impl fmt::Display for Dd {
    /// Shows the value to about 32 significant digits (`hi` and the
    /// correction `lo` in scientific notation when `lo` is not zero).
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        if self.lo == 0.0 {
            write!(f, "{:e}", self.hi)
        } else {
            write!(f, "{:e} {:+e}", self.hi, self.lo)
        }
    }
}

impl core::iter::Sum for Dd {
    fn sum<I: Iterator<Item = Dd>>(iter: I) -> Dd {
        iter.fold(Dd::ZERO, |a, b| a + b)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// u^2 = 2^-106, the unit roundoff of double-double (Hida, Li & Bailey 2001).
    const U2: f64 = 1.232_595_164_407_831e-32;

    #[test]
    fn tiny_addend_survives() {
        // (1 + 2^-80) - 1 = 2^-80 exactly: 2^-80 is far below f64's epsilon
        // but well inside a 106-bit significand (Hida, Li & Bailey 2001;
        // exact binary arithmetic, hand-derived).
        let t = 2f64.powi(-80);
        let d = (Dd::ONE + t) - 1.0;
        assert_eq!(d.to_f64(), t);
        assert_eq!(d.lo(), 0.0);
        // The same in f64 is lost (control check).
        assert_eq!((1.0 + t) - 1.0, 0.0);
    }

    #[test]
    fn exact_square_of_binary_value() {
        // (1 + 2^-30)^2 = 1 + 2^-29 + 2^-60 exactly (hand-derived), which
        // needs 61 bits: hi = 1 + 2^-29, lo = 2^-60.
        let a = Dd::from_f64(1.0 + 2f64.powi(-30));
        let s = a * a;
        assert_eq!(s.hi(), 1.0 + 2f64.powi(-29));
        assert_eq!(s.lo(), 2f64.powi(-60));
        // Same through Dd * f64 and the exact product.
        assert_eq!(a * (1.0 + 2f64.powi(-30)), s);
        assert_eq!(
            Dd::prod_exact(1.0 + 2f64.powi(-30), 1.0 + 2f64.powi(-30)),
            s
        );
    }

    #[test]
    fn one_third_matches_exact_rational() {
        // Hand-derived: the f64 nearest 1/3 is h = (2^54 - 1)/3 * 2^-54,
        // so 1/3 - h = 2^-54/3 = h * 2^-54 / (1 - 2^-54), whose nearest f64
        // is h * 2^-54. A correctly rounded double-double 1/3 is (h, h*2^-54).
        let third = Dd::ONE / 3.0;
        let h = 1.0 / 3.0;
        assert_eq!(third.hi(), h);
        let expected_lo = h * 2f64.powi(-54);
        assert!((third.lo() - expected_lo).abs() <= 2.0 * U2 * h, "{third}");
        // 3 * (1/3) - 1 within the DWDivDW2 + DWTimesFP bounds
        // (Joldes, Muller & Popescu 2017: 15u^2 + 1.5u^2, rounded up).
        let r = third * 3.0 - 1.0;
        assert!(r.to_f64().abs() <= 17.0 * U2, "{r}");
    }

    #[test]
    fn sqrt_two_squared_is_two() {
        // sqrt(2)^2 - 2 is a few u^2 (Hida, Li & Bailey 2001, sqrt by one
        // Newton step; JMP 2017 product bound).
        let s = Dd::from_f64(2.0).sqrt();
        let e = s * s - 2.0;
        assert!(e.to_f64().abs() <= 2.0 * 8.0 * U2, "{e}");
        // And the leading part is the f64 square root.
        assert_eq!(s.hi(), 2f64.sqrt());
        // sqrt(2) - hi = -9.667293313452913e-17 (computed with 50-digit
        // arithmetic): the trailing part carries the next 16 digits.
        assert!(
            (s.lo() + 9.667_293_313_452_913e-17).abs() < 1e-31,
            "{}",
            s.lo()
        );
    }

    #[test]
    fn sum_error_within_published_bound() {
        // Cancellation-heavy sums against exact hand-derived results:
        // (2^53 + 1) - 2^53 = 1, (1e16 + 1e-16) - 1e16 = 1e-16 (both exact).
        let a = Dd::sum_exact(2f64.powi(53), 1.0);
        assert_eq!(a.hi(), 2f64.powi(53));
        assert_eq!(a.lo(), 1.0);
        assert_eq!((a - 2f64.powi(53)).to_f64(), 1.0);
        let b = Dd::sum_exact(1e16, 1e-16) - Dd::from_f64(1e16);
        assert_eq!(b.to_f64(), 1e-16);
        // Accurate sum bound 3u^2 + 13u^3 and product bound 1.5u^2 + 4u^3
        // (JMP 2017): x - x(1 - 2^-50) = x 2^-50 with x = 1 + 2^-70 is
        // exactly 2^-50 + 2^-120 (hand-derived); the rounding of the product
        // (<= 1.5u^2 of ~1) dominates the error.
        let x = Dd::from_parts(1.0, 2f64.powi(-70));
        let y = -(x * (1.0 - 2f64.powi(-50)));
        let s = x + y;
        let expect = Dd::from_parts(2f64.powi(-50), 2f64.powi(-120));
        let err = (s - expect).abs().to_f64();
        assert!(err <= 2.0 * U2, "{s} err {err}");
        // The f64 computation keeps only 2^-50 (control check).
        assert_eq!(1.0 - (1.0 - 2f64.powi(-50)), 2f64.powi(-50));
    }

    /// A double-double holding an integer below 2^120 exactly, as i128.
    fn to_i128(d: Dd) -> i128 {
        // hi is an integer (|hi| >= 2^60 here); lo is below 2^67, so its
        // fractional part (if any) is below 1.
        d.hi() as i128 + d.lo().trunc() as i128
    }

    #[test]
    fn products_and_quotients_against_exact_integers() {
        // Exact integer arithmetic (i128) as the referee: a, b < 2^60 are
        // exact as double-doubles (not as f64); a + b must be exact, a * b
        // within 5u^2 relative (JMP 2017 bound for DWTimesDW1, from
        // memory, "a few u^2") and (a*b)/b within the DWDivDW2 bound
        // 15u^2 + 56u^3 plus the product's error.
        let mut state = 0x2545_f491_4f6c_dd1d_u64;
        let mut next = || {
            state ^= state << 13;
            state ^= state >> 7;
            state ^= state << 17;
            state >> 4 // below 2^60
        };
        let dd_of = |v: u64| Dd::sum_exact((v >> 30 << 30) as f64, (v & ((1 << 30) - 1)) as f64);
        for _ in 0..2000 {
            let (a, b) = (next() | (1 << 59), next() | (1 << 59));
            let (da, db) = (dd_of(a), dd_of(b));
            assert_eq!(to_i128(da), i128::from(a));
            assert_eq!(to_i128(da + db), i128::from(a) + i128::from(b));
            let exact = i128::from(a) * i128::from(b);
            let p = da * db;
            let err = (exact - to_i128(p)).unsigned_abs() as f64;
            assert!(err <= 5.0 * U2 * exact as f64 + 1.0, "{a} * {b}: err {err}");
            // Quotient: (a*b)/b = a.
            let q = p / db;
            let qerr = (q - da).abs().to_f64();
            assert!(qerr <= 21.0 * U2 * a as f64, "{a}: {qerr}");
        }
    }

    #[test]
    fn non_finite_propagates_without_panic() {
        let z = Dd::ONE / Dd::ZERO;
        assert!(!z.is_finite());
        let n = Dd::from_f64(-1.0).sqrt();
        assert!(!n.is_finite());
        let big = Dd::from_f64(f64::MAX) * 2.0;
        assert!(!big.is_finite());
        assert_eq!(Dd::ZERO.sqrt(), Dd::ZERO);
    }

    #[test]
    fn ordering_and_abs() {
        let a = Dd::from_parts(1.0, 1e-20);
        let b = Dd::from_parts(1.0, -1e-20);
        assert!(a > b);
        assert_eq!(a.max(b), a);
        assert_eq!(a.min(b), b);
        assert_eq!((-a).abs(), a);
    }
}
