//! An empirical distribution: a sample sorted ascending, with optional frequency weights.
//!
//! The empirical distribution of `x(1..n)` puts mass `1/n` on each observation (mass
//! `w(i) / W` with frequency weights, `W` the total weight). [`Sample`] keeps the values
//! sorted, so that its cdf and quantiles are binary searches, and keeps the running
//! (compensated) sums of the weights, so that the weighted cdf and quantiles are too.
//! Everything asked of it goes to the kernels the column aggregates use:
//! [`crate::stats::ecdf`], [`crate::stats::quantile`], [`crate::stats::moments`].
//!
//! # Canonical order
//!
//! Values are sorted by [`f64::total_cmp`]; in a weighted sample, equal values are
//! ordered by their weights. Two samples holding the same multiset of observations
//! therefore hold them in the same order, bit for bit, however the observations arrived:
//! merging the samples of shards ([`SampleBuilder::extend`]) gives exactly the sample
//! built from all rows at once, and merging is associative and commutative.
//!
//! # Weighted or not
//!
//! A sample is weighted when it was built with weights (even if every weight is 1).
//! Merging an unweighted sample into a weighted one gives each of its values weight 1.
//! Zero weights are dropped when building: a value with no weight carries no mass.

use std::cmp::Ordering;

use super::ecdf::{ecdf_cumulative, ecdf_sorted};
use super::moments::Profile;
use super::quantile::{QuantileType, quantile_cumulative, quantile_sorted};
use super::{StatsError, check_weight, grow, sum};

/// A sorted sample with optional frequency weights: an empirical distribution.
///
/// # Example
/// ```
/// use ogive::stats::quantile::QuantileType;
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![3.0, 1.0, 2.0, 2.0]).unwrap();
/// assert_eq!(s.values(), &[1.0, 2.0, 2.0, 3.0]);
/// assert_eq!(s.cdf(2.0), Some(0.75));
/// assert_eq!(s.quantile(0.5, QuantileType::DEFAULT).unwrap(), Some(2.0));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Sample {
    values: Vec<f64>,
    weights: Option<Weights>,
}

/// The weights of a weighted sample and their running compensated sums.
#[derive(Debug, Clone, PartialEq)]
struct Weights {
    each: Vec<f64>,
    cumulative: Vec<f64>,
}

/// The canonical order of weighted observations: by value, then by weight.
/// Sorts by a total order in which equal elements are identical, so a stable and an
/// unstable sort give the same result. The stable sort (which merges presorted runs, so
/// merging k sorted samples costs about n log k) needs a scratch buffer of half the
/// length, which the standard library allocates infallibly; when a buffer that size
/// cannot be had, the in-place unstable sort is used instead of aborting.
fn sort_runs<T>(xs: &mut [T], order: impl FnMut(&T, &T) -> Ordering) {
    let mut probe: Vec<T> = Vec::new();
    if probe.try_reserve_exact(xs.len() / 2 + 1).is_ok() {
        drop(probe);
        xs.sort_by(order);
    } else {
        xs.sort_unstable_by(order);
    }
}

fn pair_order(a: &(f64, f64), b: &(f64, f64)) -> Ordering {
    a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1))
}

impl Sample {
    /// An unweighted sample from values in any order.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] when a value is NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_values(vec![2.0, -1.0]).unwrap();
    /// assert_eq!((s.values(), s.len(), s.total_weight()), (&[-1.0, 2.0][..], 2, 2.0));
    /// assert!(!s.is_weighted() && s.weights().is_none());
    /// assert!(Sample::from_values(vec![f64::NAN]).is_err());
    /// ```
    pub fn from_values(values: Vec<f64>) -> Result<Sample, StatsError> {
        let mut b = SampleBuilder::new(false);
        for x in values {
            b.push(x)?;
        }
        b.finish()
    }

    /// A weighted sample from `(value, weight)` pairs in any order; zero weights are
    /// dropped.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] for a NaN value; [`StatsError::BadWeight`] for a
    /// negative or non-finite weight; [`StatsError::WeightOverflow`] when the weights sum
    /// to more than the largest double.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_pairs(vec![(5.0, 1.0), (1.0, 3.0), (9.0, 0.0)]).unwrap();
    /// assert_eq!((s.values(), s.total_weight()), (&[1.0, 5.0][..], 4.0));
    /// ```
    pub fn from_pairs(pairs: Vec<(f64, f64)>) -> Result<Sample, StatsError> {
        let mut b = SampleBuilder::new(true);
        for (x, w) in pairs {
            b.push_weighted(x, w)?;
        }
        b.finish()
    }

    /// A sample from parts already in canonical order (as a stored value holds them),
    /// checked: no NaN, values ascending by [`f64::total_cmp`], weights (when given)
    /// finite and > 0, one per value, ascending among equal values.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`], [`StatsError::NotSorted`] (with the index of the
    /// first value out of order), [`StatsError::BadWeight`],
    /// [`StatsError::LengthMismatch`] or [`StatsError::WeightOverflow`].
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// assert!(Sample::from_sorted(vec![1.0, 2.0], Some(vec![1.0, 0.5])).is_ok());
    /// assert!(Sample::from_sorted(vec![2.0, 1.0], None).is_err());
    /// ```
    pub fn from_sorted(values: Vec<f64>, weights: Option<Vec<f64>>) -> Result<Sample, StatsError> {
        if values.iter().any(|x| x.is_nan()) {
            return Err(StatsError::NotANumber);
        }
        if let Some(w) = &weights {
            if w.len() != values.len() {
                return Err(StatsError::LengthMismatch {
                    values: values.len(),
                    weights: w.len(),
                });
            }
            if let Some(&bad) = w.iter().find(|&&w| !(w.is_finite() && w > 0.0)) {
                return Err(StatsError::BadWeight(bad));
            }
        }
        let out_of_order = (1..values.len()).find(|&i| {
            let by_value = values[i - 1].total_cmp(&values[i]);
            match &weights {
                None => by_value == Ordering::Greater,
                Some(w) => by_value.then(w[i - 1].total_cmp(&w[i])) == Ordering::Greater,
            }
        });
        if let Some(index) = out_of_order {
            return Err(StatsError::NotSorted { index });
        }
        Sample::assemble(values, weights)?.check_total()
    }

    /// Refuses a total weight that overflowed: every share would be undefined.
    fn check_total(self) -> Result<Sample, StatsError> {
        if self.total_weight().is_finite() {
            Ok(self)
        } else {
            Err(StatsError::WeightOverflow)
        }
    }

    /// Builds the running sums of sorted parts.
    fn assemble(values: Vec<f64>, weights: Option<Vec<f64>>) -> Result<Sample, StatsError> {
        let weights = match weights {
            None => None,
            Some(each) => Some(Weights {
                cumulative: sum::cumulative(&each)?,
                each,
            }),
        };
        Ok(Sample { values, weights })
    }

    /// The values, ascending.
    pub fn values(&self) -> &[f64] {
        &self.values
    }

    /// The weights, one per value, when the sample is weighted.
    pub fn weights(&self) -> Option<&[f64]> {
        self.weights.as_ref().map(|w| w.each.as_slice())
    }

    /// Whether the sample carries weights.
    pub fn is_weighted(&self) -> bool {
        self.weights.is_some()
    }

    /// The number of stored values.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// Whether the sample holds no value.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// The total weight: n when unweighted, the compensated sum of the weights otherwise.
    pub fn total_weight(&self) -> f64 {
        match &self.weights {
            None => self.values.len() as f64,
            Some(w) => w.cumulative.last().copied().unwrap_or(0.0),
        }
    }

    /// The empirical cdf at `t`: the share of the mass at or below `t`. `None` when empty.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_pairs(vec![(1.0, 3.0), (5.0, 1.0)]).unwrap();
    /// assert_eq!(s.cdf(4.0), Some(0.75));
    /// ```
    pub fn cdf(&self, t: f64) -> Option<f64> {
        match &self.weights {
            None => ecdf_sorted(&self.values, t),
            Some(w) => ecdf_cumulative(&self.values, &w.cumulative, t),
        }
    }

    /// The p-quantile by one of the nine Hyndman-Fan definitions (weighted: the total
    /// weight plays the part of n). `Ok(None)` when empty or undefined.
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::{quantile::QuantileType, sample::Sample};
    /// // Weights 3 and 1 are the sample [1, 1, 1, 5]; type 1 at p = 0.8 is 5.
    /// let s = Sample::from_pairs(vec![(1.0, 3.0), (5.0, 1.0)]).unwrap();
    /// assert_eq!(s.quantile(0.8, QuantileType::new(1).unwrap()), Ok(Some(5.0)));
    /// ```
    pub fn quantile(&self, p: f64, ty: QuantileType) -> Result<Option<f64>, StatsError> {
        match &self.weights {
            None => quantile_sorted(&self.values, p, ty),
            Some(w) => quantile_cumulative(&self.values, &w.cumulative, p, ty),
        }
    }

    /// The numeric summary, as `profile(x)` gives it. `None` when empty.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_values(vec![1.0, 2.0, 9.0]).unwrap();
    /// assert_eq!(s.profile().unwrap().median, 2.0);
    /// ```
    pub fn profile(&self) -> Option<Profile> {
        match &self.weights {
            None => Profile::from_sorted(&self.values),
            Some(w) => Profile::from_weighted_cumulative(&self.values, &w.each, &w.cumulative),
        }
    }

    /// The step points of the cdf: each distinct value with the cdf there, ascending.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_values(vec![2.0, 1.0, 2.0, 3.0]).unwrap();
    /// assert_eq!(s.steps(), vec![(1.0, 0.25), (2.0, 0.75), (3.0, 1.0)]);
    /// ```
    pub fn steps(&self) -> Vec<(f64, f64)> {
        let n = self.values.len();
        let total = self.total_weight();
        let mut out = Vec::new();
        for i in 0..n {
            let last_of_run = i + 1 == n || self.values[i + 1] != self.values[i];
            // Keep -0.0 and 0.0 as one step: they are equal numbers.
            if last_of_run {
                let mass = match &self.weights {
                    None => (i + 1) as f64,
                    Some(w) => w.cumulative[i],
                };
                out.push((self.values[i], (mass / total).clamp(0.0, 1.0)));
            }
        }
        out
    }
}

/// Collects observations (and samples to merge) into a [`Sample`] in canonical order.
///
/// # Example
/// ```
/// use ogive::stats::sample::{Sample, SampleBuilder};
/// let a = Sample::from_values(vec![3.0, 1.0]).unwrap();
/// let b = Sample::from_values(vec![2.0]).unwrap();
/// let mut merged = SampleBuilder::new(false);
/// merged.extend(&b)?;
/// merged.extend(&a)?;
/// assert_eq!(merged.finish().unwrap(), Sample::from_values(vec![1.0, 2.0, 3.0]).unwrap());
/// # Ok::<(), ogive::stats::StatsError>(())
/// ```
#[derive(Debug, Clone, Default)]
pub struct SampleBuilder {
    values: Vec<f64>,
    weights: Option<Vec<f64>>,
}

impl SampleBuilder {
    /// Whether the result will be weighted.
    pub fn is_weighted(&self) -> bool {
        self.weights.is_some()
    }

    /// An empty builder; `weighted` makes the result weighted even when every weight is 1.
    pub fn new(weighted: bool) -> SampleBuilder {
        SampleBuilder {
            values: Vec::new(),
            weights: weighted.then(Vec::new),
        }
    }

    /// Turns the builder weighted, giving the values so far weight 1.
    fn make_weighted(&mut self) -> Result<&mut Vec<f64>, StatsError> {
        if self.weights.is_none() {
            self.weights = Some(grow::filled(self.values.len(), 1.0)?);
        }
        Ok(self.weights.get_or_insert_with(Vec::new))
    }

    /// Adds one observation with weight 1.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] when `x` is NaN; [`StatsError::OutOfMemory`].
    pub fn push(&mut self, x: f64) -> Result<(), StatsError> {
        if x.is_nan() {
            return Err(StatsError::NotANumber);
        }
        if let Some(w) = &mut self.weights {
            grow::push(w, 1.0)?;
        }
        if let Err(e) = grow::push(&mut self.values, x) {
            if let Some(w) = &mut self.weights {
                w.pop();
            }
            return Err(e.into());
        }
        Ok(())
    }

    /// Adds one observation with frequency weight `w` (dropped when `w` is 0) and makes
    /// the result weighted.
    ///
    /// # Errors
    /// [`StatsError::NotANumber`] when `x` is NaN; [`StatsError::BadWeight`] when `w`
    /// is negative or not finite; [`StatsError::OutOfMemory`].
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sample::SampleBuilder;
    /// let mut b = SampleBuilder::new(false);
    /// b.push(3.0).unwrap();
    /// b.push_weighted(1.0, 2.0).unwrap(); // the 3.0 before it now has weight 1
    /// b.push_weighted(7.0, 0.0).unwrap(); // no weight, no mass: dropped
    /// assert_eq!(b.len(), 2);
    /// let s = b.finish().unwrap();
    /// assert_eq!((s.values(), s.weights()), (&[1.0, 3.0][..], Some(&[2.0, 1.0][..])));
    /// ```
    pub fn push_weighted(&mut self, x: f64, w: f64) -> Result<(), StatsError> {
        if x.is_nan() {
            return Err(StatsError::NotANumber);
        }
        check_weight(w)?;
        self.make_weighted()?;
        if w > 0.0 {
            grow::push(&mut self.values, x)?;
            if let Some(weights) = &mut self.weights
                && let Err(e) = grow::push(weights, w)
            {
                self.values.pop();
                return Err(e.into());
            }
        }
        Ok(())
    }

    /// Adds every observation of a sample (the merge of empirical distributions).
    ///
    /// # Errors
    /// [`StatsError::OutOfMemory`] when the union does not fit (the builder is unchanged).
    pub fn extend(&mut self, s: &Sample) -> Result<(), StatsError> {
        if s.is_weighted() {
            self.make_weighted()?;
        }
        let n = self.values.len();
        if let Some(w) = &mut self.weights {
            let grown = match s.weights() {
                Some(each) => grow::extend(w, each),
                None => grow::filled(s.values.len(), 1.0).and_then(|ones| grow::extend(w, &ones)),
            };
            grown?;
        }
        if let Err(e) = grow::extend(&mut self.values, &s.values) {
            if let Some(w) = &mut self.weights {
                w.truncate(n);
            }
            return Err(e.into());
        }
        Ok(())
    }

    /// The number of observations collected so far.
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// Whether no observation has been collected.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// Sorts into canonical order. A stable sort that merges presorted runs, so merging
    /// k sorted samples costs about n log k.
    ///
    /// # Errors
    /// [`StatsError::WeightOverflow`] when the weights sum to more than the largest double.
    pub fn finish(self) -> Result<Sample, StatsError> {
        let SampleBuilder {
            mut values,
            weights,
        } = self;
        let sample = match weights {
            None => {
                sort_runs(&mut values, f64::total_cmp);
                Sample::assemble(values, None)?
            }
            Some(mut weights) => {
                let mut pairs: Vec<(f64, f64)> = Vec::new();
                pairs
                    .try_reserve_exact(values.len())
                    .map_err(|_| StatsError::OutOfMemory { held: values.len() })?;
                pairs.extend(values.iter().copied().zip(weights.iter().copied()));
                sort_runs(&mut pairs, pair_order);
                // Written back into the buffers they came from: no third copy.
                for ((v, w), &(x, m)) in values.iter_mut().zip(weights.iter_mut()).zip(&pairs) {
                    (*v, *w) = (x, m);
                }
                drop(pairs);
                Sample::assemble(values, Some(weights))?
            }
        };
        sample.check_total()
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn merge_equals_building_at_once() {
        // Definition of the merge; exact equality required.
        let all = [5.0, -1.0, 3.0, 3.0, 0.0, -0.0, 7.5, 3.0];
        let whole = Sample::from_values(all.to_vec()).unwrap();
        let mut b = SampleBuilder::new(false);
        for chunk in all.chunks(3).rev() {
            b.extend(&Sample::from_values(chunk.to_vec()).unwrap())
                .unwrap();
        }
        assert_eq!(b.finish().unwrap(), whole);
        // -0.0 sorts before 0.0 under total_cmp, and the two are one cdf step.
        assert_eq!(whole.values()[1].to_bits(), (-0.0f64).to_bits());
        assert_eq!(whole.steps()[1], (0.0, 0.375));
    }

    #[test]
    fn weighted_ties_are_ordered_by_weight() {
        let s = Sample::from_pairs(vec![(1.0, 2.0), (1.0, 0.5), (0.0, 1.0)]).unwrap();
        assert_eq!(s.weights(), Some(&[1.0, 0.5, 2.0][..]));
        assert_eq!(
            Sample::from_sorted(vec![1.0, 1.0], Some(vec![2.0, 0.5])),
            Err(StatsError::NotSorted { index: 1 })
        );
    }

    #[test]
    fn mixing_weighted_and_plain_gives_unit_weights() {
        let mut b = SampleBuilder::new(false);
        b.push(4.0).unwrap();
        b.extend(&Sample::from_pairs(vec![(1.0, 2.5)]).unwrap())
            .unwrap();
        b.push(2.0).unwrap();
        let s = b.finish().unwrap();
        assert_eq!(s.values(), &[1.0, 2.0, 4.0]);
        assert_eq!(s.weights(), Some(&[2.5, 1.0, 1.0][..]));
        assert_eq!(s.total_weight(), 4.5);
        // Weighted cdf by hand: 3.5 of 4.5 at or below 2.
        assert_eq!(s.cdf(2.0), Some(3.5 / 4.5));
    }

    #[test]
    fn checks_parts() {
        assert_eq!(
            Sample::from_sorted(vec![1.0, f64::NAN], None),
            Err(StatsError::NotANumber)
        );
        assert_eq!(
            Sample::from_sorted(vec![1.0], Some(vec![0.0])),
            Err(StatsError::BadWeight(0.0))
        );
        assert_eq!(
            Sample::from_sorted(vec![1.0], Some(vec![])),
            Err(StatsError::LengthMismatch {
                values: 1,
                weights: 0
            })
        );
        assert!(SampleBuilder::new(true).push_weighted(1.0, -1.0).is_err());
        // Two finite weights whose sum overflows.
        assert_eq!(
            Sample::from_pairs(vec![(1.0, f64::MAX), (2.0, f64::MAX)]),
            Err(StatsError::WeightOverflow)
        );
        assert_eq!(
            Sample::from_sorted(vec![1.0, 2.0], Some(vec![f64::MAX, f64::MAX])),
            Err(StatsError::WeightOverflow)
        );
        assert!(SampleBuilder::new(false).push(f64::NAN).is_err());
    }

    #[test]
    fn empty_sample_answers_none() {
        let s = SampleBuilder::new(true).finish().unwrap();
        assert!(s.is_empty());
        assert_eq!(s.cdf(0.0), None);
        assert_eq!(s.quantile(0.5, QuantileType::DEFAULT), Ok(None));
        assert_eq!(s.profile(), None);
        assert!(s.steps().is_empty());
    }
}
