//! Compensated summation.
//!
//! Neumaier's improvement (1974) of Kahan's compensated sum: the rounding error of each
//! addition is carried in a second accumulator, so the error of a sum of n terms does not
//! grow with n. Used for weights, counts held as `f64`, and moments.

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
/// assert_eq!(ogive::stats::sum::cumulative(&[1.0, 2.0, 0.5]), vec![1.0, 3.0, 3.5]);
/// ```
pub fn cumulative(xs: &[f64]) -> Vec<f64> {
    let mut s = NeumaierSum::default();
    xs.iter()
        .map(|&x| {
            s.add(x);
            s.value()
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

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
