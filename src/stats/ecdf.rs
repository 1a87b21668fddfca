//! The empirical cumulative distribution function.
//!
//! For a sample `x(1..n)` the ECDF is the step function `F(t) = #{i : x(i) <= t} / n`,
//! right-continuous, jumping by `1/n` at each observation (by `w(i) / W` with frequency
//! weights). As an estimator of the true cdf it needs no binning choice, unlike a
//! histogram, and it converges uniformly (Glivenko-Cantelli); the Dvoretzky-Kiefer-Wolfowitz
//! inequality bounds its error for every n.
//!
//! [`EcdfCounter`] evaluates `F(t)` at one fixed `t` in one pass and O(1) memory, which is
//! what the `ecdf(x, t)` aggregate needs. Both counters also remove observations, which is
//! what the window form needs: a row leaving the frame is subtracted, in O(1). The weighted
//! counter keeps its sums exactly ([`ExactSum`]), so removals leave no rounding behind and
//! the result is the correctly rounded ratio of the frame's sums, however long the window
//! has slid.

use super::{StatsError, check_weight, sum::ExactSum};

/// A one-pass evaluator of the ECDF at a fixed threshold.
///
/// # Example
/// ```
/// use ogive::stats::ecdf::EcdfCounter;
/// let mut e = EcdfCounter::new(2.0);
/// for x in [1.0, 2.0, 3.0, 4.0] {
///     e.add(x);
/// }
/// assert_eq!(e.value(), Some(0.5));
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct EcdfCounter {
    t: f64,
    at_or_below: u64,
    total: u64,
}

impl EcdfCounter {
    /// A counter for `F(t)`.
    pub fn new(t: f64) -> Self {
        EcdfCounter {
            t,
            at_or_below: 0,
            total: 0,
        }
    }

    /// The threshold `t`.
    pub fn threshold(&self) -> f64 {
        self.t
    }

    /// Counts one observation.
    #[inline]
    pub fn add(&mut self, x: f64) {
        self.total += 1;
        self.at_or_below += u64::from(x <= self.t);
    }

    /// Removes one observation counted before (for sliding windows).
    #[inline]
    pub fn remove(&mut self, x: f64) {
        self.total -= 1;
        self.at_or_below -= u64::from(x <= self.t);
    }

    /// The number of observations counted.
    pub fn count(&self) -> u64 {
        self.total
    }

    /// `F(t)`, or `None` before any observation.
    pub fn value(&self) -> Option<f64> {
        (self.total > 0).then(|| self.at_or_below as f64 / self.total as f64)
    }

    /// The number of observations at or below `t`.
    pub fn at_or_below(&self) -> u64 {
        self.at_or_below
    }

    /// A counter with given counts; `None` when `at_or_below > total`.
    pub fn from_counts(t: f64, at_or_below: u64, total: u64) -> Option<Self> {
        (at_or_below <= total).then_some(EcdfCounter {
            t,
            at_or_below,
            total,
        })
    }

    /// Adds the counts of another counter (of another part of the same data, with the
    /// same `t`): the result counts both parts, exactly.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::ecdf::EcdfCounter;
    /// let (mut a, mut b) = (EcdfCounter::new(2.0), EcdfCounter::new(2.0));
    /// a.add(1.0);
    /// b.add(3.0);
    /// a.absorb(&b);
    /// assert_eq!(a.value(), Some(0.5));
    /// ```
    pub fn absorb(&mut self, other: &EcdfCounter) {
        self.total += other.total;
        self.at_or_below += other.at_or_below;
    }
}

/// A one-pass evaluator of the weighted ECDF at a fixed threshold, with exact sums: the
/// value is `fl(sum of w where x <= t) / fl(sum of w)`, each sum correctly rounded.
///
/// # Example
/// ```
/// use ogive::stats::ecdf::WeightedEcdfCounter;
/// let mut e = WeightedEcdfCounter::new(2.0);
/// e.add(1.0, 3.0).unwrap();
/// e.add(5.0, 1.0).unwrap();
/// assert_eq!(e.value(), Some(0.75));
/// e.remove(5.0, 1.0).unwrap();
/// assert_eq!(e.value(), Some(1.0));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct WeightedEcdfCounter {
    t: f64,
    at_or_below: ExactSum,
    total: ExactSum,
    /// A running plain sum of the weights, only to tell cheaply when the exact total
    /// may be near the largest double.
    rough: f64,
}

impl WeightedEcdfCounter {
    /// A counter for the weighted `F(t)`.
    pub fn new(t: f64) -> Self {
        WeightedEcdfCounter {
            t,
            at_or_below: ExactSum::default(),
            total: ExactSum::default(),
            rough: 0.0,
        }
    }

    /// The threshold `t`.
    pub fn threshold(&self) -> f64 {
        self.t
    }

    /// Counts one observation with frequency weight `w`.
    ///
    /// # Errors
    /// [`StatsError::BadWeight`] when `w` is negative or not finite;
    /// [`StatsError::WeightOverflow`] when the total weight would pass the largest double
    /// (the observation is then not counted).
    #[inline]
    pub fn add(&mut self, x: f64, w: f64) -> Result<(), StatsError> {
        check_weight(w)?;
        self.total.add(w)?;
        self.rough += w;
        if self.rough > f64::MAX / 4.0 && self.total.value().is_infinite() {
            self.total.remove(w)?;
            self.rough -= w;
            return Err(StatsError::WeightOverflow);
        }
        if x <= self.t {
            self.at_or_below.add(w)?;
        }
        Ok(())
    }

    /// Removes an observation counted before with the same weight (for sliding windows).
    ///
    /// # Errors
    /// [`StatsError::BadWeight`] when `w` is negative or not finite.
    #[inline]
    pub fn remove(&mut self, x: f64, w: f64) -> Result<(), StatsError> {
        check_weight(w)?;
        self.total.remove(w)?;
        self.rough -= w;
        if x <= self.t {
            self.at_or_below.remove(w)?;
        }
        Ok(())
    }

    /// The exact sums: the weight at or below `t`, and the total weight.
    pub fn sums(&self) -> (&ExactSum, &ExactSum) {
        (&self.at_or_below, &self.total)
    }

    /// A counter with given exact sums (as [`WeightedEcdfCounter::sums`] gave them).
    pub fn from_sums(t: f64, at_or_below: ExactSum, total: ExactSum) -> Self {
        let rough = total.value();
        WeightedEcdfCounter {
            t,
            at_or_below,
            total,
            rough,
        }
    }

    /// Adds the sums of another counter of the same `t`, exactly.
    ///
    /// # Errors
    /// [`StatsError::WeightOverflow`] when the total weight passes the largest double.
    pub fn absorb(&mut self, other: &WeightedEcdfCounter) -> Result<(), StatsError> {
        let mut total = self.total.clone();
        total.absorb(&other.total);
        if total.value().is_infinite() {
            return Err(StatsError::WeightOverflow);
        }
        self.total = total;
        self.at_or_below.absorb(&other.at_or_below);
        self.rough += other.rough;
        Ok(())
    }

    /// `F(t)`, or `None` while the total weight is zero. The total can overflow `f64`
    /// only beyond 1.8e308, which [`WeightedEcdfCounter::add`] refuses.
    pub fn value(&self) -> Option<f64> {
        let total = self.total.value();
        (total > 0.0 && total.is_finite())
            .then(|| (self.at_or_below.value() / total).clamp(0.0, 1.0))
    }
}

/// `F(t)` of sorted values, by binary search: O(log n).
///
/// Returns `None` for an empty slice.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::ecdf::ecdf_sorted(&[1.0, 2.0, 2.0, 7.0], 2.0), Some(0.75));
/// ```
pub fn ecdf_sorted(sorted: &[f64], t: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let k = sorted.partition_point(|&x| x <= t);
    Some(k as f64 / sorted.len() as f64)
}

/// The weighted `F(t)` of sorted values with cumulative frequency weights
/// (`cumulative[i]` is the weight of `values[..=i]`): the weight at or below `t` over the
/// total weight, by binary search. `None` when there is no weight or the slices differ
/// in length.
///
/// # Example
/// ```
/// use ogive::stats::ecdf::ecdf_cumulative;
/// // Weights 3 and 1: three quarters of the mass is at 1.0.
/// assert_eq!(ecdf_cumulative(&[1.0, 5.0], &[3.0, 4.0], 2.0), Some(0.75));
/// ```
pub fn ecdf_cumulative(values: &[f64], cumulative: &[f64], t: f64) -> Option<f64> {
    if values.len() != cumulative.len() {
        return None;
    }
    let total = *cumulative.last()?;
    if total <= 0.0 {
        return None;
    }
    let k = values.partition_point(|&x| x <= t);
    let below = if k == 0 { 0.0 } else { cumulative[k - 1] };
    Some((below / total).clamp(0.0, 1.0))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn counter_matches_definition() {
        // Expected values by counting by hand: of [3, 1, 2, 2, 5], two are <= 1.5 ...
        let xs = [3.0, 1.0, 2.0, 2.0, 5.0];
        let mut sorted = xs.to_vec();
        sorted.sort_by(f64::total_cmp);
        for (t, expected) in [(0.0, 0.0), (1.0, 0.2), (2.0, 0.6), (4.9, 0.8), (5.0, 1.0)] {
            let mut c = EcdfCounter::new(t);
            xs.iter().for_each(|&x| c.add(x));
            assert_eq!(c.value(), Some(expected), "t = {t}");
            assert_eq!(ecdf_sorted(&sorted, t), Some(expected), "t = {t}");
        }
        assert_eq!(EcdfCounter::new(1.0).value(), None);
    }

    #[test]
    fn infinities_are_ordered() {
        let mut c = EcdfCounter::new(f64::MAX);
        for x in [f64::NEG_INFINITY, 0.0, f64::INFINITY] {
            c.add(x);
        }
        // Two of three values are <= f64::MAX (exact count).
        assert_eq!(c.value(), Some(2.0 / 3.0));
    }

    #[test]
    fn weighted_rejects_bad_weights() {
        let mut c = WeightedEcdfCounter::new(0.0);
        assert!(c.add(1.0, -0.5).is_err());
        assert!(c.add(1.0, f64::NAN).is_err());
        assert_eq!(c.value(), None);
    }

    #[test]
    fn weight_total_past_the_largest_double_is_an_error() {
        // 1e308 + 1e308 exceeds f64::MAX = 1.797e308 (exact arithmetic): the second
        // add is refused with the typed error and leaves the counter as it was.
        let mut e = WeightedEcdfCounter::new(0.0);
        e.add(-1.0, 1e308).unwrap();
        assert_eq!(e.add(1.0, 1e308), Err(StatsError::WeightOverflow));
        assert_eq!(e.value(), Some(1.0));
        e.add(1.0, 1e308 / 4.0).unwrap();
        assert_eq!(e.value(), Some(0.8));
    }
}
