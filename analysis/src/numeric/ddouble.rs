//! Double-double arithmetic: a value is the unevaluated sum `hi + lo` of two
//! `f64`s with `|lo| ≤ ulp(hi)/2`, giving about 106 significant bits (≈ 32
//! decimal digits) at roughly ten to twenty times the cost of `f64`.
//!
//! Why our own code rather than a crate: this is the core of the accuracy
//! guarantee (NIST StRD certified digits), the operations needed are few, and
//! each one below is a published algorithm with a proven error bound, written
//! out so that a reviewer can check it line by line:
//!
//! * `two_sum` — Knuth, *TAOCP* vol. 2, §4.2.2 (error-free sum, 6 flops).
//! * `fast_two_sum` — Dekker (1971), "A floating-point technique for extending
//!   the available precision", *Numer. Math.* 18, 224–242 (requires `|a| ≥ |b|`).
//! * `two_prod` — the error-free product via one fused multiply-add.
//! * `add` — Joldes, Muller & Popescu (2017), "Tight and rigorous error bounds
//!   for basic building blocks of double-word arithmetic", *ACM TOMS* 44(2),
//!   Algorithm 6 (AccurateDWPlusDW), relative error ≤ 3u² + 13u³.
//! * `mul` — same paper, Algorithm 12 (DWTimesDW3), relative error ≤ 4u².
//! * `div` — long division with three partial quotients, as in Hida, Li &
//!   Bailey (2001), "Algorithms for quad-double precision floating point
//!   arithmetic", ARITH-15 (the "accurate" double-double division).
//! * `sqrt` — one Newton step from the `f64` root (Karp & Markstein 1997).

use std::cmp::Ordering;
use std::ops::{Add, AddAssign, Div, Mul, MulAssign, Neg, Sub, SubAssign};

/// An unevaluated sum `hi + lo` carrying about 106 significant bits.
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct DoubleDouble {
    /// The leading part: the value rounded to the nearest `f64`.
    pub hi: f64,
    /// The trailing part: what `hi` leaves out, `|lo| ≤ ulp(hi)/2`.
    pub lo: f64,
}

/// Error-free sum: `a + b == s + e` exactly (Knuth).
#[inline]
pub fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

/// Error-free sum assuming `|a| ≥ |b|` (Dekker).
#[inline]
fn fast_two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let e = b - (s - a);
    (s, e)
}

/// Error-free product: `a · b == p + e` exactly, using one fused multiply-add.
#[inline]
pub fn two_prod(a: f64, b: f64) -> (f64, f64) {
    let p = a * b;
    let e = a.mul_add(b, -p);
    (p, e)
}

impl DoubleDouble {
    /// Zero.
    pub const ZERO: Self = Self { hi: 0.0, lo: 0.0 };
    /// One.
    pub const ONE: Self = Self { hi: 1.0, lo: 0.0 };

    /// Builds a value from its two parts, renormalising them.
    #[inline]
    pub fn new(hi: f64, lo: f64) -> Self {
        let (h, l) = two_sum(hi, lo);
        Self { hi: h, lo: l }
    }

    /// The exact product of two doubles as a double-double.
    #[inline]
    pub fn from_product(a: f64, b: f64) -> Self {
        let (hi, lo) = two_prod(a, b);
        Self { hi, lo }
    }

    /// The value rounded to the nearest `f64`.
    #[inline]
    pub fn to_f64(self) -> f64 {
        self.hi + self.lo
    }

    /// Absolute value.
    #[inline]
    pub fn abs(self) -> Self {
        if self.hi < 0.0 || (self.hi == 0.0 && self.lo < 0.0) {
            -self
        } else {
            self
        }
    }

    /// `true` when the value is below zero.
    #[inline]
    pub fn is_negative(self) -> bool {
        self.hi < 0.0 || (self.hi == 0.0 && self.lo < 0.0)
    }

    /// Square root; zero for zero. One Newton correction of the `f64` root.
    pub fn sqrt(self) -> Self {
        if self.hi <= 0.0 {
            return Self::ZERO;
        }
        let q = self.hi.sqrt();
        let residual = self - Self::from_product(q, q);
        let (hi, lo) = fast_two_sum(q, residual.hi / (2.0 * q));
        Self { hi, lo }
    }

    /// `self · 2^k` exactly (no rounding unless it over- or underflows).
    #[inline]
    pub fn scale_pow2(self, factor: f64) -> Self {
        Self { hi: self.hi * factor, lo: self.lo * factor }
    }

    /// `self · b` for a plain double `b` (Joldes et al. 2017, Algorithm 9).
    #[inline]
    pub fn mul_f64(self, b: f64) -> Self {
        let (ch, cl1) = two_prod(self.hi, b);
        let cl3 = self.lo.mul_add(b, cl1);
        let (hi, lo) = fast_two_sum(ch, cl3);
        Self { hi, lo }
    }

    /// Total order on finite values (compares `hi`, then `lo`).
    #[inline]
    pub fn total_cmp(&self, other: &Self) -> Ordering {
        self.hi.total_cmp(&other.hi).then(self.lo.total_cmp(&other.lo))
    }
}

impl From<f64> for DoubleDouble {
    #[inline]
    fn from(hi: f64) -> Self {
        Self { hi, lo: 0.0 }
    }
}

impl Neg for DoubleDouble {
    type Output = Self;
    #[inline]
    fn neg(self) -> Self {
        Self { hi: -self.hi, lo: -self.lo }
    }
}

impl Add for DoubleDouble {
    type Output = Self;
    /// AccurateDWPlusDW (Joldes, Muller & Popescu 2017, Algorithm 6).
    #[inline]
    fn add(self, y: Self) -> Self {
        let (sh, sl) = two_sum(self.hi, y.hi);
        let (th, tl) = two_sum(self.lo, y.lo);
        let c = sl + th;
        let (vh, vl) = fast_two_sum(sh, c);
        let w = tl + vl;
        let (hi, lo) = fast_two_sum(vh, w);
        Self { hi, lo }
    }
}

impl Sub for DoubleDouble {
    type Output = Self;
    #[inline]
    fn sub(self, y: Self) -> Self {
        self + (-y)
    }
}

impl Mul for DoubleDouble {
    type Output = Self;
    /// DWTimesDW3 (Joldes, Muller & Popescu 2017, Algorithm 12).
    #[inline]
    fn mul(self, y: Self) -> Self {
        let (ch, cl1) = two_prod(self.hi, y.hi);
        let tl0 = self.lo * y.lo;
        let tl1 = self.hi.mul_add(y.lo, tl0);
        let cl2 = self.lo.mul_add(y.hi, tl1);
        let cl3 = cl1 + cl2;
        let (hi, lo) = fast_two_sum(ch, cl3);
        Self { hi, lo }
    }
}

impl Div for DoubleDouble {
    type Output = Self;
    /// Long division with three partial quotients (Hida, Li & Bailey 2001).
    #[inline]
    fn div(self, y: Self) -> Self {
        let q1 = self.hi / y.hi;
        let r = self - y.mul_f64(q1);
        let q2 = r.hi / y.hi;
        let r = r - y.mul_f64(q2);
        let q3 = r.hi / y.hi;
        let (h, l) = fast_two_sum(q1, q2);
        Self { hi: h, lo: l } + Self::from(q3)
    }
}

impl AddAssign for DoubleDouble {
    #[inline]
    fn add_assign(&mut self, y: Self) {
        *self = *self + y;
    }
}

impl SubAssign for DoubleDouble {
    #[inline]
    fn sub_assign(&mut self, y: Self) {
        *self = *self - y;
    }
}

impl MulAssign for DoubleDouble {
    #[inline]
    fn mul_assign(&mut self, y: Self) {
        *self = *self * y;
    }
}

impl std::iter::Sum for DoubleDouble {
    fn sum<I: Iterator<Item = Self>>(iter: I) -> Self {
        iter.fold(Self::ZERO, |acc, x| acc + x)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    // Reference: 1/3 and sqrt(2) to 32 digits are textbook constants
    // (sqrt(2) = 1.41421356237309504880168872420969807…, OEIS A002193).
    #[test]
    fn third_times_three_is_one_to_106_bits() {
        let third = DoubleDouble::ONE / DoubleDouble::from(3.0);
        let back = third * DoubleDouble::from(3.0) - DoubleDouble::ONE;
        assert!(back.to_f64().abs() < 1e-31, "{back:?}");
    }

    #[test]
    fn sqrt_two_matches_published_digits() {
        let r = DoubleDouble::from(2.0).sqrt();
        // hi/lo of sqrt(2) as the nearest double-double (from the OEIS digits).
        let square = r * r - DoubleDouble::from(2.0);
        assert!(square.to_f64().abs() < 1e-31, "{square:?}");
        assert_eq!(r.hi, std::f64::consts::SQRT_2);
    }

    #[test]
    fn product_of_doubles_is_exact() {
        let a = 0.1f64;
        let p = DoubleDouble::from_product(a, a);
        // 0.1 as a double is 3602879701896397 / 2^55; its square is exact in 106 bits.
        let m = 3602879701896397u128;
        let exact = (m * m) as f64 / 2f64.powi(110);
        assert_eq!(p.hi, exact);
    }
}
