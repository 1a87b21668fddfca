//! Compensated and exact summation.
//!
//! Neumaier's improvement (1974) of Kahan's compensated sum: the rounding error of each
//! addition is carried in a second accumulator, so the error of a sum of n terms does not
//! grow with n. Used for weights, counts held as `f64`, and moments.
//!
//! [`ExactSum`] goes further for sums that must also *subtract* (the weights of a
//! sliding window, where a row enters and later leaves): it keeps the sum as an exact
//! fixed-point integer in units of the smallest subnormal, 2^-1074, wide enough for any
//! finite `f64` and 2^63 terms (the "long accumulator" of Kulisch and Miranker, "The
//! arithmetic of the digital computer", *SIAM Review* 28(1), 1-40, 1986). Adding and
//! removing are exact, so the sum never drifts, and [`ExactSum::value`] rounds once, to
//! nearest with ties to even: the correctly rounded sum, the same number Python's
//! `math.fsum` gives.

/// A running compensated sum.
///
/// # Example
/// ```
/// use ogive::stats::sum::NeumaierSum;
/// let mut s = NeumaierSum::default();
/// for x in [1e16, 1.0, -1e16] {
///     s.add(x);
/// }
/// assert_eq!(s.value(), 1.0); // a naive sum gives 0.0
/// ```
#[derive(Debug, Clone, Copy, Default, PartialEq)]
pub struct NeumaierSum {
    sum: f64,
    compensation: f64,
}

impl NeumaierSum {
    /// Adds one term.
    #[inline]
    pub fn add(&mut self, x: f64) {
        let t = self.sum + x;
        if self.sum.abs() >= x.abs() {
            self.compensation += (self.sum - t) + x;
        } else {
            self.compensation += (x - t) + self.sum;
        }
        self.sum = t;
    }

    /// The sum so far.
    #[inline]
    pub fn value(&self) -> f64 {
        self.sum + self.compensation
    }
}

/// The compensated sum of a slice.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::sum::sum(&[0.1; 10]), 1.0);
/// ```
pub fn sum(xs: &[f64]) -> f64 {
    let mut s = NeumaierSum::default();
    for &x in xs {
        s.add(x);
    }
    s.value()
}

/// Running compensated sums: entry `i` is the sum of `xs[..=i]`, each a
/// [`NeumaierSum`] value, so the last entry equals [`sum`] of the whole slice.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::sum::cumulative(&[1.0, 2.0, 0.5])?, vec![1.0, 3.0, 3.5]);
/// # Ok::<(), ogive::stats::grow::OutOfMemory>(())
/// ```
pub fn cumulative(xs: &[f64]) -> Result<Vec<f64>, super::grow::OutOfMemory> {
    let mut s = NeumaierSum::default();
    super::grow::map(xs, |&x| {
        s.add(x);
        s.value()
    })
}

/// 32-bit digits held in `i64` limbs, so each limb absorbs 2^30 unnormalised updates.
/// 68 * 32 = 2176 bits cover 2^-1074 .. 2^1024 (2098 bits) plus 63 bits of count and a
/// sign.
const LIMBS: usize = 68;
const DIGIT: u32 = 32;
const PENDING_LIMIT: u32 = 1 << 30;

/// An exact running sum of finite `f64` terms that supports removing a term added
/// before; [`ExactSum::value`] is the correctly rounded sum.
///
/// # Example
/// ```
/// use ogive::stats::sum::ExactSum;
/// let mut s = ExactSum::default();
/// for x in [1e100, 1.0, 0.1] {
///     s.add(x).unwrap();
/// }
/// s.remove(1e100).unwrap();
/// assert_eq!(s.value(), 1.1); // exactly fl(1 + 0.1): the removal left no trace
/// ```
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct ExactSum {
    limbs: [i64; LIMBS],
    pending: u32,
}

impl Default for ExactSum {
    fn default() -> Self {
        ExactSum {
            limbs: [0; LIMBS],
            pending: 0,
        }
    }
}

/// A finite `f64` as `(negative, m, shift)` with `|x| = m * 2^shift * 2^-1074`, `m < 2^53`.
#[inline]
fn decompose(x: f64) -> (bool, u64, u32) {
    let bits = x.to_bits();
    let exp = ((bits >> 52) & 0x7ff) as u32;
    let frac = bits & ((1u64 << 52) - 1);
    let (m, shift) = if exp == 0 {
        (frac, 0)
    } else {
        (frac | (1u64 << 52), exp - 1)
    };
    (bits >> 63 == 1, m, shift)
}

/// `2^e` for `-1022 <= e <= 1023`.
#[inline]
fn pow2(e: i32) -> f64 {
    f64::from_bits(((e + 1023) as u64) << 52)
}

impl ExactSum {
    /// Adds a term.
    ///
    /// # Errors
    /// [`super::StatsError::NotANumber`] for NaN; [`super::StatsError::BadWeight`] for an
    /// infinity (an exact sum has no room for one).
    #[inline]
    pub fn add(&mut self, x: f64) -> Result<(), super::StatsError> {
        self.update(x, false)
    }

    /// Removes a term added before (adds `-x`).
    ///
    /// # Errors
    /// As [`ExactSum::add`].
    #[inline]
    pub fn remove(&mut self, x: f64) -> Result<(), super::StatsError> {
        self.update(x, true)
    }

    #[inline]
    fn update(&mut self, x: f64, subtract: bool) -> Result<(), super::StatsError> {
        if x.is_nan() {
            return Err(super::StatsError::NotANumber);
        }
        if x.is_infinite() {
            return Err(super::StatsError::BadWeight(x));
        }
        let (negative, m, shift) = decompose(x);
        if m == 0 {
            return Ok(());
        }
        let i = (shift / DIGIT) as usize;
        let v = u128::from(m) << (shift % DIGIT);
        let sign: i64 = if negative != subtract { -1 } else { 1 };
        let mask = u128::from(u32::MAX);
        self.limbs[i] += sign * (v & mask) as i64;
        self.limbs[i + 1] += sign * ((v >> 32) & mask) as i64;
        self.limbs[i + 2] += sign * (v >> 64) as i64;
        self.pending += 1;
        if self.pending >= PENDING_LIMIT {
            self.normalize();
        }
        Ok(())
    }

    /// Propagates carries so that every limb but the last is a digit in `[0, 2^32)`.
    fn normalize(&mut self) {
        for i in 0..LIMBS - 1 {
            let carry = self.limbs[i] >> DIGIT;
            self.limbs[i] -= carry << DIGIT;
            self.limbs[i + 1] += carry;
        }
        self.pending = 0;
    }

    /// The sum's limbs (base 2^32 digits of the sum in units of 2^-1074, the last one
    /// signed), normalised: the same sum always gives the same limbs.
    pub fn limbs(&self) -> Vec<i64> {
        let mut c = self.clone();
        c.normalize();
        c.limbs.to_vec()
    }

    /// A sum from the limbs [`ExactSum::limbs`] gave; `None` for a wrong count or a digit
    /// out of range.
    pub fn from_limbs(limbs: &[i64]) -> Option<ExactSum> {
        let array: [i64; LIMBS] = limbs.try_into().ok()?;
        let digits_ok = array[..LIMBS - 1]
            .iter()
            .all(|&l| (0..1i64 << DIGIT).contains(&l));
        let top_ok = array[LIMBS - 1].unsigned_abs() < 1 << 40;
        (digits_ok && top_ok).then_some(ExactSum {
            limbs: array,
            pending: 0,
        })
    }

    /// Adds another exact sum, exactly.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sum::ExactSum;
    /// let (mut a, mut b) = (ExactSum::default(), ExactSum::default());
    /// a.add(1e100).unwrap();
    /// b.add(0.1).unwrap();
    /// b.remove(1e100).unwrap();
    /// a.absorb(&b);
    /// assert_eq!(a.value(), 0.1);
    /// ```
    pub fn absorb(&mut self, other: &ExactSum) {
        self.normalize();
        let mut o = other.clone();
        o.normalize();
        for (mine, theirs) in self.limbs.iter_mut().zip(o.limbs) {
            *mine += theirs;
        }
        self.pending = 1;
        self.normalize();
    }

    /// Whether the sum is exactly zero.
    pub fn is_zero(&self) -> bool {
        let mut c = self.clone();
        c.normalize();
        c.limbs.iter().all(|&l| l == 0)
    }

    /// The sum rounded to the nearest `f64` (ties to even); `+-inf` when it exceeds the
    /// `f64` range.
    pub fn value(&self) -> f64 {
        let mut c = self.clone();
        c.normalize();
        let negative = c.limbs[LIMBS - 1] < 0;
        if negative {
            for l in &mut c.limbs {
                *l = -*l;
            }
            c.normalize();
        }
        let magnitude = c.magnitude();
        if negative { -magnitude } else { magnitude }
    }

    /// The (normalised, non-negative) integer in the limbs, rounded to `f64`.
    fn magnitude(&self) -> f64 {
        let Some(h) = self.limbs.iter().rposition(|&l| l != 0) else {
            return 0.0;
        };
        // Bit length of the integer U (value = U * 2^-1074).
        let top = self.limbs[h] as u64;
        let bits = h as u32 * DIGIT + (64 - top.leading_zeros());
        if bits <= 53 {
            // U < 2^53: exact in f64, and U * 2^-1074 is exact (a subnormal or the
            // smallest normals).
            let u = self.extract(0, bits);
            return u as f64 * f64::from_bits(1);
        }
        let mut significand = self.extract(bits - 53, 53);
        let round = self.extract(bits - 54, 1) == 1;
        let sticky = self.any_below(bits - 54);
        if round && (sticky || significand & 1 == 1) {
            significand += 1;
        }
        // value = significand * 2^(bits - 53 - 1074); the significand (<= 2^53) is exact
        // in f64, and scaling by a power of two in two steps is exact until it overflows.
        let e = bits as i32 - 53 - 1074;
        let half = e / 2;
        significand as f64 * pow2(half) * pow2(e - half)
    }

    /// `len <= 64` bits of the normalised integer starting at bit `lo`.
    fn extract(&self, lo: u32, len: u32) -> u64 {
        let i = (lo / DIGIT) as usize;
        let mut window: u128 = 0;
        for j in 0..4 {
            if let Some(&l) = self.limbs.get(i + j) {
                window += (l as u64 as u128) << (DIGIT as usize * j);
            }
        }
        let shifted = window >> (lo % DIGIT);
        (shifted & ((1u128 << len) - 1)) as u64
    }

    /// Whether any bit below bit `lo` is set.
    fn any_below(&self, lo: u32) -> bool {
        let i = (lo / DIGIT) as usize;
        let partial = self.limbs[i] as u64 & ((1u64 << (lo % DIGIT)) - 1);
        partial != 0 || self.limbs[..i].iter().any(|&l| l != 0)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use proptest::prelude::*;

    fn exact(xs: &[f64]) -> f64 {
        let mut s = ExactSum::default();
        xs.iter().for_each(|&x| s.add(x).unwrap());
        s.value()
    }

    #[test]
    fn exact_sum_worked_examples() {
        // Python documentation of math.fsum: fsum([.1] * 10) == 1.0 while the naive
        // sum is 0.9999999999999999.
        assert_eq!(exact(&[0.1; 10]), 1.0);
        // Exact arithmetic: 1e100 + 1 - 1e100 = 1; 2^1023 + 2^1023 - 2^1023 = 2^1023,
        // where a naive left-to-right sum overflows.
        assert_eq!(exact(&[1e100, 1.0, -1e100]), 1.0);
        let big = pow2(1023);
        assert_eq!(exact(&[big, big, -big]), big);
        assert_eq!(exact(&[big, big]), f64::INFINITY);
        assert_eq!(exact(&[-big, -big]), f64::NEG_INFINITY);
        // Subnormals: 3 * 2^-1074 exactly; and the sign of an exact zero is +.
        let tiny = f64::from_bits(1);
        assert_eq!(exact(&[tiny, tiny, tiny]), 3.0 * tiny);
        assert_eq!(exact(&[1.5, -1.5]).to_bits(), 0.0f64.to_bits());
        assert_eq!(
            exact(&[f64::MAX, -f64::MAX, f64::MIN_POSITIVE]),
            f64::MIN_POSITIVE
        );
        // Ties to even: 2^53 + 1 is halfway between 2^53 and 2^53 + 2: rounds to 2^53;
        // 2^53 + 3 is halfway between 2^53 + 2 and 2^53 + 4: rounds to 2^53 + 4.
        let two53 = 9_007_199_254_740_992.0;
        assert_eq!(exact(&[two53, 1.0]), two53);
        assert_eq!(exact(&[two53, 3.0]), two53 + 4.0);
        // Just above halfway rounds up: 2^53 + 1 + 2^-20.
        assert_eq!(exact(&[two53, 1.0, pow2(-20)]), two53 + 2.0);
        let mut s = ExactSum::default();
        assert!(s.add(f64::NAN).is_err() && s.add(f64::INFINITY).is_err());
        assert!(s.is_zero());
    }

    proptest! {
        /// Exact arithmetic is independent of order and removal leaves no trace: adding
        /// everything then removing a subset equals adding only the rest (bit for bit),
        /// and small integers (exact in f64 at every step) sum to their integer sum.
        #[test]
        fn removal_and_order_are_exact(
            xs in proptest::collection::vec(-1e300f64..1e300, 0..40),
            scales in proptest::collection::vec(-300i32..300, 40),
            keep in proptest::collection::vec(any::<bool>(), 40),
        ) {
            let xs: Vec<f64> = xs.iter().zip(&scales).map(|(x, &s)| x * 10f64.powi(s)).filter(|x| x.is_finite()).collect();
            let mut all = ExactSum::default();
            xs.iter().for_each(|&x| all.add(x).unwrap());
            let mut rest = ExactSum::default();
            for (i, &x) in xs.iter().enumerate() {
                if keep[i] {
                    rest.add(x).unwrap();
                } else {
                    all.remove(x).unwrap();
                }
            }
            prop_assert_eq!(all.value().to_bits(), rest.value().to_bits());
            let mut reversed = ExactSum::default();
            xs.iter().rev().for_each(|&x| reversed.add(x).unwrap());
            prop_assert_eq!(reversed.value().to_bits(), exact(&xs).to_bits());
        }

        #[test]
        fn integers_sum_exactly(xs in proptest::collection::vec(-1_000_000i64..1_000_000, 0..100)) {
            let want: i64 = xs.iter().sum();
            let fs: Vec<f64> = xs.iter().map(|&x| x as f64).collect();
            prop_assert_eq!(exact(&fs), want as f64);
        }

        /// Against the compensated sum on same-sign terms, where both are accurate to an
        /// ulp or so: they must agree to 2 ulps (relative 4.5e-16).
        #[test]
        fn agrees_with_neumaier_on_positive_terms(xs in proptest::collection::vec(0.0f64..1e6, 1..200)) {
            let a = exact(&xs);
            let b = sum(&xs);
            prop_assert!((a - b).abs() <= 4.5e-16 * a.abs(), "{} vs {}", a, b);
        }
    }

    #[test]
    fn cancels_large_terms() {
        // Expected value by exact arithmetic: 1e100 + 1 - 1e100 = 1.
        assert_eq!(sum(&[1e100, 1.0, -1e100]), 1.0);
    }

    #[test]
    fn tenths_sum_exactly() {
        // Exact decimal arithmetic gives 1000; the compensated sum must land on it
        // to within one ulp (tolerance 0, since 1000.0 is the nearest double).
        assert_eq!(sum(&[0.1; 10_000]), 1000.0);
    }
}
