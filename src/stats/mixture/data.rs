//! The merged, standardised data and its thinned copy.

use super::*;
use crate::stats::resolution::{Resolution, resolve};
use crate::stats::sum::NeumaierSum;

/// The merged, standardised data.
pub(super) struct Data {
    /// Distinct standardised values, increasing.
    pub(super) x: Vec<f64>,
    /// Their counts.
    pub(super) count: Vec<f64>,
    /// `prefix_count[i]`: the count of points before `i` (length m + 1).
    pub(super) prefix_count: Vec<f64>,
    /// `prefix_sum[i]`: the sum of count times value of the points before `i`.
    pub(super) prefix_sum: Vec<f64>,
    /// Total count n.
    pub(super) total: f64,
    /// Mean and standard deviation used to standardise.
    pub(super) centre: f64,
    pub(super) scale: f64,
    /// For readings rounded to a step: the step in standardised units (each point
    /// stands for the interval of this width around it, and EM is that for grouped
    /// data, `super::binned`); `None` for exact values.
    pub(super) width: Option<f64>,
    /// That step in the data's units, as stated or found.
    pub(super) step: Option<f64>,
}

impl Data {
    /// The data of `xs`, with the step of `resolution` checked against the distinct
    /// values (or found, for [`Resolution::Auto`]).
    pub(super) fn new(xs: &[f64], resolution: Resolution) -> Result<Data, MixtureError> {
        Data::from_sorted(crate::stats::sorting::sorted_total(xs), resolution)
    }

    /// [`Data::new`] of values already sorted in the order of `f64::total_cmp`.
    pub(super) fn from_sorted(
        mut x: Vec<f64>,
        resolution: Resolution,
    ) -> Result<Data, MixtureError> {
        let n = x.len() as f64;
        // Ties are merged in place: the distinct values move to the front of the
        // sorted list, their counts alongside.
        let mut count: Vec<f64> = Vec::with_capacity(x.len());
        let mut distinct = 0;
        for i in 0..x.len() {
            let v = x[i];
            if distinct > 0 && x[distinct - 1] == v {
                count[distinct - 1] += 1.0;
            } else {
                x[distinct] = v;
                count.push(1.0);
                distinct += 1;
            }
        }
        x.truncate(distinct);
        count.shrink_to_fit();
        Data::merged(x, count, n, resolution)
    }

    /// The data of distinct values in increasing order with positive counts (frequency
    /// weights, whole or not) summing to `total`.
    pub(super) fn merged(
        mut x: Vec<f64>,
        count: Vec<f64>,
        total: f64,
        resolution: Resolution,
    ) -> Result<Data, MixtureError> {
        if x.len() == 1 {
            return Err(MixtureError::AllEqual(x[0]));
        }
        let step = resolve(&x, resolution).map_err(MixtureError::Grid)?;
        let centre = weighted_sum(&x, &count, |v| v) / total;
        // The values are sorted, so the farthest from the centre is an end.
        let spread = (x[0] - centre).abs().max((x[x.len() - 1] - centre).abs());
        let var = weighted_sum(&x, &count, |v| ((v - centre) / spread).powi(2)) / total;
        let scale = spread * var.sqrt();
        if !(scale > 0.0 && scale.is_finite()) {
            return Err(MixtureError::AllEqual(x[0]));
        }
        for v in &mut x {
            *v = (*v - centre) / scale;
        }
        let mut data = Data::with_prefixes(x, count, total, centre, scale);
        data.width = step.map(|r| r / scale);
        data.step = step;
        Ok(data)
    }

    /// The data from merged standardised points, with their prefix sums.
    pub(super) fn with_prefixes(
        x: Vec<f64>,
        count: Vec<f64>,
        total: f64,
        centre: f64,
        scale: f64,
    ) -> Data {
        let mut prefix_count = Vec::with_capacity(x.len() + 1);
        let mut prefix_sum = Vec::with_capacity(x.len() + 1);
        let (mut pc, mut ps) = (0.0, NeumaierSum::default());
        prefix_count.push(0.0);
        prefix_sum.push(0.0);
        for (&v, &c) in x.iter().zip(&count) {
            pc += c;
            ps.add(c * v);
            prefix_count.push(pc);
            prefix_sum.push(ps.value());
        }
        Data {
            x,
            count,
            prefix_count,
            prefix_sum,
            total,
            centre,
            scale,
            width: None,
            step: None,
        }
    }

    /// For many distinct points, a thinned copy on which the short runs rank the starts:
    /// the sorted points in consecutive runs of at most `g` (so that at most `thin_to`
    /// runs are full) spanning at most `span` (so that at most `thin_to + 1` runs end
    /// early, their starts being more than `span` apart), each replaced by its
    /// count-weighted mean carrying the run's total count. The total
    /// count, and so the scale of the log-likelihood, is unchanged. `None` when there are
    /// at most `thin_to` distinct points (then the starts are ranked on the data).
    pub(super) fn thinned(&self, thin_to: usize) -> Option<Data> {
        let m = self.x.len();
        if m <= thin_to {
            return None;
        }
        let g = m.div_ceil(thin_to);
        let range = self.x[m - 1] - self.x[0];
        let span = THIN_SPAN.max(range / thin_to as f64);
        let (mut x, mut count) = (Vec::with_capacity(thin_to), Vec::with_capacity(thin_to));
        let mut start = 0;
        while start < m {
            let limit = (start + g).min(m);
            let reach = self.x[start] + span;
            let end = start + 1 + self.x[start + 1..limit].partition_point(|&v| v <= reach);
            let (xs, cs) = (&self.x[start..end], &self.count[start..end]);
            let c: f64 = cs.iter().sum();
            let weighted: f64 = xs.iter().zip(cs).map(|(&v, &w)| v * w).sum();
            x.push(weighted / c);
            count.push(c);
            start = end;
        }
        let mut thin = Data::with_prefixes(x, count, self.total, self.centre, self.scale);
        thin.width = self.width;
        thin.step = self.step;
        Some(thin)
    }
}

impl Data {
    /// For grouped data whose intervals do not overlap (consecutive points at least a
    /// step apart, to 1e-9 of it), the saturated grouped log-likelihood
    /// `sum c ln(c / n)`: the points' probabilities sum to at most 1, and by Gibbs'
    /// inequality no probabilities give `sum c ln P` more, so no mixture does. `None`
    /// for exact values and for overlapping intervals (readings off the grid).
    pub(super) fn saturated(&self) -> Option<f64> {
        let width = self.width?;
        if !self
            .x
            .windows(2)
            .all(|w| w[1] - w[0] >= width * (1.0 - 1e-9))
        {
            return None;
        }
        let total = self.total;
        Some(weighted_sum(&self.count, &self.count, |c| (c / total).ln()))
    }
}

/// `sum count_i f(x_i)`, compensated.
pub(super) fn weighted_sum(x: &[f64], count: &[f64], f: impl Fn(f64) -> f64) -> f64 {
    let mut s = NeumaierSum::default();
    for (&v, &c) in x.iter().zip(count) {
        s.add(c * f(v));
    }
    s.value()
}
