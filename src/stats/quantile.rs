//! Sample quantiles: the nine definitions of Hyndman and Fan (1996).
//!
//! R. J. Hyndman and Y. Fan, "Sample quantiles in statistical packages", *The American
//! Statistician* 50(4), 361-365, 1996. Each definition picks a real position `h` among
//! the order statistics `x(1) <= ... <= x(n)` as a function of `n` and `p`, then either
//! takes one order statistic (types 1-3, discontinuous) or interpolates linearly between
//! `x(floor(h))` and `x(floor(h) + 1)` (types 4-9, continuous). Type 7 is the default.
//!
//! | type | position (1-based) | note |
//! |---|---|---|
//! | 1 | `x(ceil(np))` | inverse of the ECDF (see below) |
//! | 2 | as 1, averaging at the jumps | |
//! | 3 | nearest order statistic `np - 1/2`, ties to the even one | |
//! | 4 | `np` | linear interpolation of the ECDF |
//! | 5 | `np + 1/2` | |
//! | 6 | `(n + 1)p` | |
//! | 7 | `(n - 1)p + 1` | the mode of the order statistic's distribution |
//! | 8 | `(n + 1/3)p + 1/3` | approximately median-unbiased |
//! | 9 | `(n + 1/4)p + 3/8` | approximately unbiased for normal data |
//!
//! The arithmetic follows the one in `numpy.quantile` step for step (the same virtual
//! index and the same two-sided linear interpolation), so results agree with it to the
//! last bit in the cases the tests cover, not only to a tolerance. The one deliberate
//! difference: type 1 picks the smallest `k` with `k / n >= p` computed in floating point,
//! as the ECDF computes `k / n`, instead of `ceil(n p)`. The two differ only when `n p`
//! rounds across a whole number (for example n = 25, p = 0.28: `25 * 0.28` is
//! `7.000000000000001` in floating point, so `ceil` gives 8, while `F(x(7)) = 7 / 25` is
//! exactly the double `0.28`), and the search keeps type 1 the exact inverse of the ECDF: `Q(p) <= t` exactly when
//! `p <= F(t)`.
//!
//! # Frequency weights
//!
//! With weights, `n` becomes the total weight `W` and the order statistic `x(k)` at a
//! position `k` becomes the smallest value whose cumulative weight reaches `k`. With
//! whole-number weights this is exactly the quantile of the data with each value repeated
//! as often as its weight says; with fractional weights it is the natural extension, and
//! type 1 equals `numpy.quantile(x, p, weights=w, method="inverted_cdf")`.

use super::{StatsError, check_probability, check_weight, grow, sum};

/// One of the nine Hyndman-Fan quantile definitions.
///
/// # Example
/// ```
/// use ogive::stats::quantile::QuantileType;
/// assert_eq!(QuantileType::new(7).unwrap(), QuantileType::DEFAULT);
/// assert!(QuantileType::new(10).is_err());
/// ```
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub struct QuantileType(u8);

impl QuantileType {
    /// Type 7, the default of R, numpy and most spreadsheets.
    pub const DEFAULT: QuantileType = QuantileType(7);

    /// Checks a type number.
    ///
    /// # Errors
    /// [`StatsError::UnknownQuantileType`] unless `t` is in `1..=9`.
    pub fn new(t: i64) -> Result<Self, StatsError> {
        if (1..=9).contains(&t) {
            Ok(QuantileType(t as u8))
        } else {
            Err(StatsError::UnknownQuantileType(t))
        }
    }

    /// The type number, 1 to 9.
    pub fn get(self) -> u8 {
        self.0
    }
}

/// Where a quantile sits among the order statistics, independent of the data.
#[derive(Debug, Clone, Copy, PartialEq)]
enum Plan {
    /// The order statistic at 1-based real position `k`: the smallest value whose
    /// cumulative count (or weight) reaches `k`.
    At(f64),
    /// Interpolate between the order statistics at whole positions `lo` and `lo + 1`.
    Lerp { lo: f64, t: f64 },
}

/// The position plan for `n` observations (or total weight) and probability `p`.
fn plan(n: f64, p: f64, ty: QuantileType) -> Plan {
    let continuous = |virtual_index: f64, n: f64| {
        // 0-based virtual index, as in numpy's `_get_indexes`.
        if virtual_index < 0.0 {
            Plan::At(1.0)
        } else if virtual_index >= n - 1.0 {
            Plan::At(n)
        } else {
            let below = virtual_index.floor();
            Plan::Lerp {
                lo: below + 1.0,
                t: virtual_index - below,
            }
        }
    };
    let alpha_beta = |alpha: f64, beta: f64| n * p + (alpha + p * (1.0 - alpha - beta)) - 1.0;
    match ty.0 {
        1 => Plan::At(inverse_cdf_position(n, p)),
        2 => {
            let v = n * p - 1.0;
            let below = v.floor();
            let g = v - below;
            if g == 0.0 {
                continuous_fixed(v, n, 0.5)
            } else {
                continuous_fixed(v, n, 1.0)
            }
        }
        3 => {
            let v = n * p - 1.0 - 0.5;
            let below = v.floor();
            let g = v - below;
            let index0 = if g == 0.0 && below.rem_euclid(2.0) == 1.0 {
                below
            } else {
                below + 1.0
            };
            Plan::At(index0.max(0.0) + 1.0)
        }
        4 => continuous(alpha_beta(0.0, 1.0), n),
        5 => continuous(alpha_beta(0.5, 0.5), n),
        6 => continuous(alpha_beta(0.0, 0.0), n),
        7 => continuous((n - 1.0) * p, n),
        8 => continuous(alpha_beta(1.0 / 3.0, 1.0 / 3.0), n),
        _ => continuous(alpha_beta(3.0 / 8.0, 3.0 / 8.0), n),
    }
}

/// Type 1's position: the smallest whole `k` in `1..=n` with `k / n >= p`, the division
/// done in floating point exactly as the ECDF computes `F = k / n`. Taking `ceil(n p)`
/// alone (numpy's arithmetic) can land one position off when `n p` rounds across a
/// whole number, and then `quantile(ecdf(t))` would exceed `t`; with this search type 1
/// is the exact inverse of the ECDF ogive computes: `Q(p) <= t` if and only if
/// `p <= F(t)`.
fn inverse_cdf_position(n: f64, p: f64) -> f64 {
    let mut k = (n * p).ceil().clamp(1.0, n.max(1.0));
    while k > 1.0 && (k - 1.0) / n >= p {
        k -= 1.0;
    }
    while k < n && k / n < p {
        k += 1.0;
    }
    k
}

/// Type 2's plan: a virtual index with a fixed interpolation weight.
fn continuous_fixed(v: f64, n: f64, t: f64) -> Plan {
    if v < 0.0 {
        Plan::At(1.0)
    } else if v >= n - 1.0 {
        Plan::At(n)
    } else {
        Plan::Lerp {
            lo: v.floor() + 1.0,
            t,
        }
    }
}

/// Linear interpolation written as numpy's `_lerp`, which is exact at both ends.
#[inline]
fn lerp(a: f64, b: f64, t: f64) -> f64 {
    let diff = b - a;
    if t >= 0.5 {
        b - diff * (1.0 - t)
    } else {
        a + diff * t
    }
}

/// Applies a plan given a lookup of the order statistic at a 1-based position.
/// `None` when the answer is undefined (interpolating between -inf and +inf).
fn evaluate(plan: Plan, mut at: impl FnMut(f64) -> f64) -> Option<f64> {
    let q = match plan {
        Plan::At(k) => at(k),
        Plan::Lerp { lo, t } => {
            let a = at(lo);
            if t == 0.0 {
                a
            } else {
                let b = at(lo + 1.0);
                if a == b || t == 1.0 {
                    b
                } else if a.is_finite() && b.is_finite() {
                    if (b - a).is_finite() {
                        lerp(a, b, t)
                    } else {
                        // b - a overflows (ends of opposite signs beyond 8.9e307): the
                        // same interpolation on halves, which are exact at this size,
                        // and doubled back; the result lies between a and b.
                        2.0 * lerp(0.5 * a, 0.5 * b, t)
                    }
                } else {
                    // An infinite end: the weighted mean is that infinity, or undefined
                    // (NaN, reported as None) between -inf and +inf.
                    (1.0 - t) * a + t * b
                }
            }
        }
    };
    (!q.is_nan()).then_some(q)
}

/// 0-based index of the order statistic at 1-based real position `k` among `n` values.
#[inline]
fn index_of(k: f64, n: usize) -> usize {
    let i = k.ceil() - 1.0;
    if i <= 0.0 { 0 } else { (i as usize).min(n - 1) }
}

/// The quantile of already sorted values (ascending by `f64::total_cmp`).
///
/// Returns `Ok(None)` for an empty slice or an undefined result.
///
/// # Errors
/// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{quantile_sorted, QuantileType};
/// let q = quantile_sorted(&[1.0, 2.0, 3.0, 4.0], 0.5, QuantileType::DEFAULT).unwrap();
/// assert_eq!(q, Some(2.5));
/// ```
pub fn quantile_sorted(
    sorted: &[f64],
    p: f64,
    ty: QuantileType,
) -> Result<Option<f64>, StatsError> {
    quantile_ranked(sorted.len(), p, ty, |i| sorted[i])
}

/// The quantile of `n` values known only through their order statistics:
/// `order_statistic(i)` must return the `i`-th smallest value (0-based, `i < n`). It is
/// called once or twice. This is how an order-statistic structure (for example
/// [`super::order::OrderStatistics`]) answers a quantile without sorting, with exactly
/// the arithmetic of [`quantile_sorted`].
///
/// Returns `Ok(None)` when `n` is 0 or the result is undefined.
///
/// # Errors
/// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{quantile_ranked, QuantileType};
/// let sorted = [10.0, 20.0, 30.0];
/// let q = quantile_ranked(3, 0.25, QuantileType::DEFAULT, |i| sorted[i]).unwrap();
/// assert_eq!(q, Some(15.0));
/// ```
pub fn quantile_ranked(
    n: usize,
    p: f64,
    ty: QuantileType,
    mut order_statistic: impl FnMut(usize) -> f64,
) -> Result<Option<f64>, StatsError> {
    check_probability(p)?;
    if n == 0 {
        return Ok(None);
    }
    Ok(evaluate(plan(n as f64, p, ty), |k| {
        order_statistic(index_of(k, n))
    }))
}

/// The quantile of unsorted values by selection, in O(n) expected time.
///
/// The slice is reordered (partially sorted) but keeps its values.
///
/// # Errors
/// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`;
/// [`StatsError::NotANumber`] when the values contain NaN.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{quantile_select, QuantileType};
/// let mut xs = vec![9.0, 1.0, 5.0, 3.0, 7.0];
/// assert_eq!(quantile_select(&mut xs, 0.5, QuantileType::DEFAULT).unwrap(), Some(5.0));
/// ```
pub fn quantile_select(
    xs: &mut [f64],
    p: f64,
    ty: QuantileType,
) -> Result<Option<f64>, StatsError> {
    by_adjacent(xs.len(), p, ty, |first| select_adjacent(xs, first))
}

/// The `p` quantile of type `ty` of `n` values from the order statistics `x(first)` and
/// `x(first + 1)` (0-based; as [`select_adjacent`] gives them) that `select` finds.
fn by_adjacent(
    n: usize,
    p: f64,
    ty: QuantileType,
    select: impl FnOnce(usize) -> Result<(f64, f64), StatsError>,
) -> Result<Option<f64>, StatsError> {
    check_probability(p)?;
    if n == 0 {
        return Ok(None);
    }
    let plan = plan(n as f64, p, ty);
    let first = match plan {
        Plan::At(k) | Plan::Lerp { lo: k, .. } => index_of(k, n),
    };
    let (a, next) = select(first)?;
    Ok(evaluate(plan, |k| {
        if index_of(k, n) == first { a } else { next }
    }))
}

/// Below this many values [`select_adjacent`] goes straight to the standard library's
/// selection: sampling would not pay for itself.
const SAMPLED_SELECTION_FROM: usize = 1 << 15;

/// The order-preserving integer key of a double: `key(a) < key(b)` exactly when
/// `a.total_cmp(&b)` is `Less` (the transformation `f64::total_cmp` itself uses).
#[inline(always)]
fn order_key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ ((((b >> 63) as u64) >> 1) as i64)
}

/// The order statistics `x(first)` and `x(first + 1)` (0-based, by `f64::total_cmp`;
/// the second is the first again when `first` is the last index), reordering `xs`.
///
/// Above [`SAMPLED_SELECTION_FROM`] values this is the sampling step of Floyd and Rivest
/// (R. W. Floyd and R. L. Rivest, "Expected time bounds for selection", *Communications
/// of the ACM* 18(3), 165-172, 1975): a sorted sample of about `n^(2/3)` values (see
/// [`sample_size`]) names two
/// bounds that bracket the wanted rank with high probability; one pass counts the values
/// below the lower bound and moves those between the bounds (a few percent) to the front,
/// and the standard library's selection finishes on that short front part. The sample is
/// drawn at fixed, scattered positions, so the result never depends on chance: when the
/// bounds miss (possible only for unlucky orderings), the whole slice is selected as
/// below, which is only slower. The same pass checks for NaN.
///
/// # Errors
/// [`StatsError::NotANumber`] when the values contain NaN.
fn select_adjacent(xs: &mut [f64], first: usize) -> Result<(f64, f64), StatsError> {
    let n = xs.len();
    if n >= SAMPLED_SELECTION_FROM
        && let Some(pair) = select_sampled(xs, first)?
    {
        return Ok(pair);
    }
    if xs.iter().any(|x| x.is_nan()) {
        return Err(StatsError::NotANumber);
    }
    Ok(select_pair(xs, first))
}

/// `x(k)` and `x(k + 1)` of `xs` by the standard library's selection (the second is the
/// first again when `k` is the last index).
fn select_pair(xs: &mut [f64], k: usize) -> (f64, f64) {
    let (_, nth, right) = xs.select_nth_unstable_by(k, f64::total_cmp);
    let a = *nth;
    // The next order statistic is the smallest value to the right of the selected one.
    let next = right.iter().copied().min_by(f64::total_cmp).unwrap_or(a);
    (a, next)
}

/// The sample size of [`select_sampled`]: Floyd and Rivest's `n^(2/3)`, capped at
/// 16,384 (128 KiB of keys) so that the memory an exact quantile needs stays the values'
/// 8 bytes each plus a constant; the wider gap a capped sample needs only widens the part
/// between the bounds (about 6% of the values at 10M).
fn sample_size(n: usize) -> usize {
    ((n as f64).powf(2.0 / 3.0) as usize)
        .clamp(1024, 1 << 14)
        .min(n)
}

/// Where the `i`-th sample value of [`select_sampled`] is taken: in the `i`-th stride,
/// at an offset scattered by a fixed multiplicative hash.
#[inline]
fn sample_position(i: usize, stride: usize) -> usize {
    let jitter = (i as u64).wrapping_mul(0x9E37_79B9_7F4A_7C15) >> 32;
    i * stride + (jitter as usize % stride)
}

/// The two bounds of [`select_sampled`] for the 0-based rank `first` among `n` values, as
/// order keys, from a sample of the values taken by `at` (a value by its position).
fn sampled_bounds(n: usize, first: usize, at: impl Fn(usize) -> f64) -> (i64, i64) {
    let s = sample_size(n);
    // A period in the data should not line up with the sample: see `sample_position`.
    let stride = n / s;
    let mut sample: Vec<i64> = (0..s)
        .map(|i| order_key(at(sample_position(i, stride))))
        .collect();
    sample.sort_unstable();
    // Floyd and Rivest's gap: sqrt(s ln n) sample ranks each side of the expected rank
    // (the rank's binomial sd is at most sqrt(s) / 2, so the gap is 2 sqrt(ln n) sds: 7.4 at
    // n = 1e6, 8.0 at n = 1e7).
    let gap = ((s as f64) * (n as f64).ln()).sqrt() as usize + 1;
    let centre = ((first as f64 + 0.5) / n as f64 * s as f64) as usize;
    let lo = if centre > gap {
        sample[centre - gap]
    } else {
        i64::MIN
    };
    let hi = sample.get(centre + gap + 1).copied().unwrap_or(i64::MAX);
    (lo, hi)
}

/// Whether the key `k` lies in `[lo, lo + span]`, as one unsigned comparison: the branch
/// on it is taken for a few percent of the values and predicts well, while a branch on
/// `k < lo` would miss half the time.
#[inline(always)]
fn between(k: i64, lo: i64, span: u64) -> bool {
    k.wrapping_sub(lo) as u64 <= span
}

/// Whether both wanted ranks, `first` and the one after it (when it exists among `n`),
/// fall in the middle part: after the `below` values under the lower bound, within the
/// `middle` values between the bounds.
#[inline]
fn brackets(first: usize, n: usize, below: usize, middle: usize) -> bool {
    let last = (first + 1).min(n - 1);
    first >= below && last < below + middle
}

/// The sampled path of [`select_adjacent`]; `Ok(None)` when the bounds missed (the slice
/// holds the same values, in another order).
fn select_sampled(xs: &mut [f64], first: usize) -> Result<Option<(f64, f64)>, StatsError> {
    let n = xs.len();
    let (lo, hi) = sampled_bounds(n, first, |i| xs[i]);
    // One pass: count the values below `lo`, move those in [lo, hi] to the front.
    let span = hi.wrapping_sub(lo) as u64;
    let mut below = 0usize;
    let mut middle = 0usize;
    let mut nan = false;
    for i in 0..n {
        let x = xs[i];
        nan |= x.is_nan();
        let k = order_key(x);
        below += usize::from(k < lo);
        if between(k, lo, span) {
            xs.swap(middle, i);
            middle += 1;
        }
    }
    if nan {
        return Err(StatsError::NotANumber);
    }
    if !brackets(first, n, below, middle) {
        return Ok(None);
    }
    Ok(Some(select_pair(&mut xs[..middle], first - below)))
}

/// The quantile of values held in several read-only runs, taken together: the answer of
/// [`quantile_select`] on their concatenation, without concatenating them. This is how a
/// state that merged the parts of a group an engine computed apart (each part's values in
/// the engine's own buffer) answers without first copying every value into one list.
///
/// Above [`SAMPLED_SELECTION_FROM`] values in all, the sampling step of
/// [`select_adjacent`] runs over the runs in turn and copies only the values between its
/// bounds (a few percent); when the bounds miss, or below that size, the runs are copied
/// into one list and selected as [`quantile_select`] does.
///
/// # Errors
/// As [`quantile_select`]; [`StatsError::OutOfMemory`] when the copy cannot be had.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{quantile_select_runs, QuantileType};
/// let q = quantile_select_runs(&[&[9.0, 1.0], &[5.0, 3.0, 7.0]], 0.5, QuantileType::DEFAULT);
/// assert_eq!(q.unwrap(), Some(5.0));
/// ```
pub fn quantile_select_runs(
    runs: &[&[f64]],
    p: f64,
    ty: QuantileType,
) -> Result<Option<f64>, StatsError> {
    let n: usize = runs.iter().map(|r| r.len()).sum();
    by_adjacent(n, p, ty, |first| {
        if let Some(pair) = select_sampled_runs(runs, n, first)? {
            return Ok(pair);
        }
        let mut all = Vec::new();
        for r in runs {
            super::grow::extend(&mut all, r)?;
        }
        select_adjacent(&mut all, first)
    })
}

/// [`select_sampled`] over runs (of `n` values in all) that it may not reorder: the values
/// between the bounds are copied out. `Ok(None)` below [`SAMPLED_SELECTION_FROM`] values
/// or when the bounds missed.
fn select_sampled_runs(
    runs: &[&[f64]],
    n: usize,
    first: usize,
) -> Result<Option<(f64, f64)>, StatsError> {
    if n < SAMPLED_SELECTION_FROM {
        return Ok(None);
    }
    // Where each run starts among all the values, to find a sample position's run.
    let mut starts = Vec::with_capacity(runs.len());
    let mut at = 0;
    for r in runs {
        starts.push(at);
        at += r.len();
    }
    let (lo, hi) = sampled_bounds(n, first, |i| {
        let r = starts.partition_point(|&s| s <= i) - 1;
        runs[r][i - starts[r]]
    });
    let span = hi.wrapping_sub(lo) as u64;
    let mut below = 0usize;
    let mut middle = Vec::new();
    let mut nan = false;
    for r in runs {
        for &x in *r {
            nan |= x.is_nan();
            let k = order_key(x);
            below += usize::from(k < lo);
            if between(k, lo, span) {
                super::grow::push(&mut middle, x)?;
            }
        }
    }
    if nan {
        return Err(StatsError::NotANumber);
    }
    if !brackets(first, n, below, middle.len()) {
        return Ok(None);
    }
    Ok(Some(select_pair(&mut middle, first - below)))
}

/// Values sorted ascending with their cumulative frequency weights, ready for repeated
/// quantile and cdf lookups.
///
/// Zero weights are dropped: a value with no weight carries no probability.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{QuantileType, WeightedSorted};
/// // 1.0 counted twice and 5.0 once is the sample [1, 1, 5].
/// let w = WeightedSorted::new(vec![(5.0, 1.0), (1.0, 2.0)]).unwrap();
/// assert_eq!(w.quantile(0.5, QuantileType::DEFAULT).unwrap(), Some(1.0));
/// assert_eq!(w.total_weight(), 3.0);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct WeightedSorted {
    values: Vec<f64>,
    cumulative: Vec<f64>,
}

impl WeightedSorted {
    /// Sorts `(value, weight)` pairs by value and accumulates the weights with a
    /// compensated sum.
    ///
    /// # Errors
    /// [`StatsError::BadWeight`] for a negative or non-finite weight;
    /// [`StatsError::NotANumber`] for a NaN value; [`StatsError::WeightOverflow`] when
    /// the weights sum past the largest double.
    pub fn new(mut pairs: Vec<(f64, f64)>) -> Result<Self, StatsError> {
        for &(x, w) in &pairs {
            if x.is_nan() {
                return Err(StatsError::NotANumber);
            }
            check_weight(w)?;
        }
        pairs.retain(|&(_, w)| w > 0.0);
        // By value, then weight: a total order, so the cumulative weights (and so the
        // answer, to the bit) do not depend on the order the pairs came in.
        pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.total_cmp(&b.1)));
        let n = pairs.len();
        let oom = |_| StatsError::OutOfMemory { held: n };
        let values = grow::map(&pairs, |&(x, _)| x).map_err(oom)?;
        let weights = grow::map(&pairs, |&(_, w)| w).map_err(oom)?;
        drop(pairs);
        let cumulative = sum::cumulative(&weights).map_err(oom)?;
        if cumulative.last().is_some_and(|w| !w.is_finite()) {
            return Err(StatsError::WeightOverflow);
        }
        Ok(WeightedSorted { values, cumulative })
    }

    /// The total weight `W` (0 when empty).
    pub fn total_weight(&self) -> f64 {
        self.cumulative.last().copied().unwrap_or(0.0)
    }

    /// Whether no value carries weight.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// The weighted quantile. `Ok(None)` when there is no weight or the result is
    /// undefined.
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
    pub fn quantile(&self, p: f64, ty: QuantileType) -> Result<Option<f64>, StatsError> {
        quantile_cumulative(&self.values, &self.cumulative, p, ty)
    }
}

/// The weighted quantile of values sorted ascending, given their cumulative frequency
/// weights (`cumulative[i]` is the total weight of `values[..=i]`, non-decreasing, its
/// last entry the total weight `W`). This is the kernel behind [`WeightedSorted`] and the
/// weighted empirical distributions of [`crate::stats::sample`].
///
/// Returns `Ok(None)` when there are no values or the result is undefined.
///
/// # Errors
/// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`;
/// [`StatsError::LengthMismatch`] when the two slices differ in length;
/// [`StatsError::WeightOverflow`] when the total weight is infinite.
///
/// # Example
/// ```
/// use ogive::stats::quantile::{quantile_cumulative, QuantileType};
/// // 1.0 with weight 2 and 5.0 with weight 1 is the sample [1, 1, 5].
/// let q = quantile_cumulative(&[1.0, 5.0], &[2.0, 3.0], 1.0, QuantileType::DEFAULT);
/// assert_eq!(q.unwrap(), Some(5.0));
/// ```
pub fn quantile_cumulative(
    values: &[f64],
    cumulative: &[f64],
    p: f64,
    ty: QuantileType,
) -> Result<Option<f64>, StatsError> {
    check_probability(p)?;
    if values.len() != cumulative.len() {
        return Err(StatsError::LengthMismatch {
            values: values.len(),
            weights: cumulative.len(),
        });
    }
    let Some(&total) = cumulative.last() else {
        return Ok(None);
    };
    if !total.is_finite() {
        return Err(StatsError::WeightOverflow);
    }
    if ty.0 == 1 {
        // The inverse of the weighted ECDF as ecdf_cumulative computes it: the first value
        // whose cumulative share reaches p (numpy's weighted inverted_cdf searches the
        // same normalised cumulative weights).
        let i = cumulative.partition_point(|&c| c / total < p);
        return Ok(Some(values[i.min(values.len() - 1)]));
    }
    // The order statistic at 1-based real position `k`: the smallest value whose
    // cumulative weight reaches `k`, clamped to the first and last values.
    let at = |k: f64| {
        let i = cumulative.partition_point(|&c| c < k);
        values[i.min(values.len() - 1)]
    };
    Ok(evaluate(plan(total, p, ty), at))
}

#[cfg(test)]
mod tests {
    /// All nine types at interior p against numpy 2.4.6, so that `cargo test` alone
    /// catches a swapped type. Expected values from
    /// `numpy.quantile([3.1, -0.4, 7.25, 2.0, 2.0, 9.5, 0.0, 5.5], p, method=M)` for
    /// p in (0.1, 0.3, 0.62, 0.8); tolerance 1e-12 (numpy's own arithmetic differs in the
    /// last bits).
    #[test]
    fn nine_types_match_numpy_at_interior_p() {
        let mut xs = vec![3.1, -0.4, 7.25, 2.0, 2.0, 9.5, 0.0, 5.5];
        xs.sort_by(f64::total_cmp);
        let numpy: [(i64, &str, [f64; 4]); 9] = [
            (1, "inverted_cdf", [-0.4, 2.0, 3.1, 7.25]),
            (2, "averaged_inverted_cdf", [-0.4, 2.0, 3.1, 7.25]),
            (3, "closest_observation", [-0.4, 0.0, 3.1, 5.5]),
            (
                4,
                "interpolated_inverted_cdf",
                [-0.4, 0.7999999999999998, 3.056, 6.200000000000001],
            ),
            (
                5,
                "hazen",
                [-0.28, 1.7999999999999998, 4.204, 7.075000000000001],
            ),
            (6, "weibull", [-0.4, 1.3999999999999995, 4.492, 7.7]),
            (
                7,
                "linear",
                [
                    -0.11999999999999998,
                    2.0,
                    3.9159999999999995,
                    6.550000000000001,
                ],
            ),
            (
                8,
                "median_unbiased",
                [-0.3333333333333333, 1.666666666666666, 4.3, 7.25],
            ),
            (
                9,
                "normal_unbiased",
                [
                    -0.31999999999999995,
                    1.7000000000000002,
                    4.276000000000001,
                    7.206250000000001,
                ],
            ),
        ];
        for (t, method, want) in numpy {
            let ty = QuantileType::new(t).unwrap();
            for (p, w) in [0.1, 0.3, 0.62, 0.8].into_iter().zip(want) {
                let got = quantile_sorted(&xs, p, ty).unwrap().unwrap();
                assert!(
                    (got - w).abs() <= 1e-12,
                    "type {t} ({method}) at {p}: {got} vs {w}"
                );
            }
        }
    }

    use super::*;

    fn all_types() -> impl Iterator<Item = QuantileType> {
        (1..=9).map(|t| QuantileType::new(t).unwrap())
    }

    /// Hyndman and Fan (1996), Table 1 defines each type by its position; these expected
    /// values are worked by hand from those definitions for x = [1, 2, 3, 4], p = 0.5 and
    /// p = 0.1 (exact decimal arithmetic; tolerance 1e-15 absolute).
    #[test]
    fn hand_worked_positions() {
        let x = [1.0, 2.0, 3.0, 4.0];
        // p = 0.5, n = 4: np = 2 exactly.
        let expected_half = [2.0, 2.5, 2.0, 2.0, 2.5, 2.5, 2.5, 2.5, 2.5];
        // p = 0.1: np = 0.4. Type 4: h = 0.4 -> x(1) = 1. Type 5: h = 0.9 -> 1.
        // Type 6: h = 0.5 -> 1. Type 7: h = 1.3 -> 1.3. Type 8: h = 0.5 -> 1.
        // Type 9: h = 0.4 + 0.025 + 0.375 = 0.8 -> 1.
        let expected_tenth = [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.3, 1.0, 1.0];
        for (ty, (&half, &tenth)) in all_types().zip(expected_half.iter().zip(&expected_tenth)) {
            let q = quantile_sorted(&x, 0.5, ty).unwrap().unwrap();
            assert!((q - half).abs() < 1e-15, "type {} p=0.5: {q}", ty.get());
            let q = quantile_sorted(&x, 0.1, ty).unwrap().unwrap();
            assert!((q - tenth).abs() < 1e-15, "type {} p=0.1: {q}", ty.get());
        }
    }

    #[test]
    fn selection_equals_sorting() {
        // Internal consistency, exact: selection and full sort must pick the same values.
        let data = [5.0, -1.0, 3.0, 3.0, f64::INFINITY, 0.0, -7.5, 3.0, 2.0];
        let mut sorted = data.to_vec();
        sorted.sort_by(f64::total_cmp);
        for ty in all_types() {
            for i in 0..=40 {
                let p = i as f64 / 40.0;
                let mut scratch = data.to_vec();
                assert_eq!(
                    quantile_select(&mut scratch, p, ty).unwrap(),
                    quantile_sorted(&sorted, p, ty).unwrap(),
                    "type {} p {p}",
                    ty.get()
                );
            }
        }
    }

    /// `n` test values made by `f` from the project's generator (not a statistical claim).
    fn scrambled(n: usize, seed: u64, f: impl Fn(u64) -> f64) -> Vec<f64> {
        let mut rng = crate::stats::rng::Xoshiro256pp::new(seed);
        (0..n).map(|_| f(rng.next_u64())).collect()
    }

    /// `select_adjacent` against a full sort by `total_cmp` (exhaustive over the checked
    /// ranks; exact equality of bits required).
    fn check_adjacent(data: &[f64], firsts: &[usize]) {
        let mut sorted = data.to_vec();
        sorted.sort_by(f64::total_cmp);
        let n = data.len();
        for &first in firsts {
            let mut scratch = data.to_vec();
            let (a, b) = select_adjacent(&mut scratch, first).unwrap();
            let want_b = sorted[(first + 1).min(n - 1)];
            assert_eq!(
                (a.to_bits(), b.to_bits()),
                (sorted[first].to_bits(), want_b.to_bits()),
                "n {n} first {first}"
            );
            let mut kept = scratch;
            kept.sort_by(f64::total_cmp);
            assert_eq!(kept, sorted, "the slice keeps its values");
        }
    }

    #[test]
    fn sampled_selection_equals_sorting() {
        let n = SAMPLED_SELECTION_FROM * 3 + 17;
        let firsts = [0, 1, 2, n / 3, n / 2, n / 2 + 1, n - 3, n - 2, n - 1];
        let unit = |s: u64| (s >> 11) as f64 / (1u64 << 53) as f64;
        let random = scrambled(n, 1, unit);
        check_adjacent(&random, &firsts);
        let mut ascending = random.clone();
        ascending.sort_by(f64::total_cmp);
        check_adjacent(&ascending, &firsts);
        ascending.reverse();
        check_adjacent(&ascending, &firsts);
        // Heavy ties, signed zeros and infinities: total_cmp puts -0.0 before 0.0.
        let tied = scrambled(n, 2, |s| match s % 7 {
            0 => -0.0,
            1 => 0.0,
            2 => f64::INFINITY,
            3 => f64::NEG_INFINITY,
            k => k as f64,
        });
        check_adjacent(&tied, &firsts);
        check_adjacent(&vec![4.25; n], &firsts);
    }

    /// `n` values in which every position the sample reads holds a huge value, so that
    /// the sampled bounds bracket the wrong ranks.
    fn sample_defeating(n: usize) -> Vec<f64> {
        let s = sample_size(n);
        let stride = n / s;
        let mut data = scrambled(n, 3, |x| (x % 1000) as f64);
        for i in 0..s {
            data[sample_position(i, stride)] = 1e9 + i as f64;
        }
        data
    }

    #[test]
    fn sampled_selection_survives_a_missed_bracket() {
        // Adversarial order: every sampled position holds a huge value, so the bounds
        // bracket the wrong ranks and the sampled path must report a miss, after which
        // the full selection still gives the exact answer.
        let n = SAMPLED_SELECTION_FROM * 2;
        let data = sample_defeating(n);
        let mut scratch = data.clone();
        assert_eq!(select_sampled(&mut scratch, n / 2).unwrap(), None);
        check_adjacent(&data, &[n / 2, 0, n - 1]);
    }

    #[test]
    fn sampled_selection_rejects_nan() {
        let mut data = vec![1.0; SAMPLED_SELECTION_FROM + 5];
        data[SAMPLED_SELECTION_FROM] = f64::NAN;
        assert_eq!(
            quantile_select(&mut data, 0.5, QuantileType::DEFAULT),
            Err(StatsError::NotANumber)
        );
    }

    /// Splits `xs` into runs at the given cut points.
    fn runs_of<'a>(xs: &'a [f64], cuts: &[usize]) -> Vec<&'a [f64]> {
        let mut out = Vec::new();
        let mut from = 0;
        for &c in cuts.iter().chain([xs.len()].iter()) {
            out.push(&xs[from..c]);
            from = c;
        }
        out
    }

    #[test]
    fn runs_give_the_quantile_of_their_concatenation() {
        // Reference: quantile_sorted on the sorted concatenation (itself checked against
        // numpy above); equal bits, every type, small p grid, runs cut anywhere
        // (empty runs included), below and above the sampled path's size.
        for n in [0, 1, 2, 7, SAMPLED_SELECTION_FROM * 2 + 3] {
            let data = scrambled(n, 5, |s| match s % 11 {
                0 => -0.0,
                1 => 0.0,
                k => (s >> 20) as f64 * 1e-6 - k as f64,
            });
            let mut sorted = data.clone();
            sorted.sort_by(f64::total_cmp);
            for cuts in [
                vec![],
                vec![0],
                vec![n / 2],
                vec![n / 3, n / 3, 2 * n / 3],
                vec![n],
            ] {
                let runs = runs_of(&data, &cuts);
                for ty in all_types() {
                    for i in 0..=8 {
                        let p = i as f64 / 8.0;
                        assert_eq!(
                            quantile_select_runs(&runs, p, ty)
                                .unwrap()
                                .map(f64::to_bits),
                            quantile_sorted(&sorted, p, ty).unwrap().map(f64::to_bits),
                            "n {n} cuts {cuts:?} type {} p {p}",
                            ty.get()
                        );
                    }
                }
            }
        }
    }

    #[test]
    fn runs_survive_a_missed_bracket_and_reject_nan() {
        // The adversarial order of `sampled_selection_survives_a_missed_bracket`, cut in
        // two: the sampled path misses and the copy still gives the exact answer.
        let n = SAMPLED_SELECTION_FROM * 2;
        let mut data = sample_defeating(n);
        let runs = runs_of(&data, &[n / 3]);
        assert_eq!(select_sampled_runs(&runs, n, n / 2).unwrap(), None);
        let mut sorted = data.clone();
        sorted.sort_by(f64::total_cmp);
        assert_eq!(
            quantile_select_runs(&runs, 0.5, QuantileType::DEFAULT).unwrap(),
            quantile_sorted(&sorted, 0.5, QuantileType::DEFAULT).unwrap()
        );
        data[n - 1] = f64::NAN;
        for cut in [0, n / 2] {
            assert_eq!(
                quantile_select_runs(&runs_of(&data, &[cut]), 0.5, QuantileType::DEFAULT),
                Err(StatsError::NotANumber)
            );
        }
        assert_eq!(
            quantile_select_runs(&[&[1.0], &[f64::NAN]], 0.5, QuantileType::DEFAULT),
            Err(StatsError::NotANumber)
        );
    }

    #[test]
    fn integer_weights_equal_replication() {
        // Definition of frequency weights; exact equality required.
        let pairs = vec![(3.0, 2.0), (1.0, 1.0), (2.0, 3.0), (10.0, 1.0)];
        let replicated = [1.0, 2.0, 2.0, 2.0, 3.0, 3.0, 10.0];
        let w = WeightedSorted::new(pairs).unwrap();
        for ty in all_types() {
            for i in 0..=70 {
                let p = i as f64 / 70.0;
                assert_eq!(
                    w.quantile(p, ty).unwrap(),
                    quantile_sorted(&replicated, p, ty).unwrap(),
                    "type {} p {p}",
                    ty.get()
                );
            }
        }
    }

    #[test]
    fn type_1_inverts_the_ecdf_exactly() {
        // n = 25, p = 0.28 = fl(7 / 25): the ECDF reaches 0.28 at x(7), so type 1 is x(7)
        // by its definition (Hyndman and Fan 1996: the inverse of the ECDF). Here
        // numpy.quantile(numpy.arange(1, 26), 0.28, method="inverted_cdf") gives 8.0,
        // because 25 * 0.28 rounds to 7.000000000000001 (checked with numpy 2.4.6).
        let x: Vec<f64> = (1..=25).map(f64::from).collect();
        let ty = QuantileType::new(1).unwrap();
        assert_eq!(quantile_sorted(&x, 0.28, ty), Ok(Some(7.0)));
        assert_eq!(crate::stats::ecdf::ecdf_sorted(&x, 7.0), Some(0.28));
        let mut scratch = x.clone();
        assert_eq!(quantile_select(&mut scratch, 0.28, ty), Ok(Some(7.0)));
        // The weighted path with unit weights agrees.
        let w = WeightedSorted::new(x.iter().map(|&v| (v, 1.0)).collect()).unwrap();
        assert_eq!(w.quantile(0.28, ty), Ok(Some(7.0)));
    }

    #[test]
    fn errors_and_edges() {
        let ty = QuantileType::DEFAULT;
        assert_eq!(
            quantile_sorted(&[1.0], 1.5, ty),
            Err(StatsError::ProbabilityOutOfRange(1.5))
        );
        assert_eq!(quantile_sorted(&[], 0.5, ty), Ok(None));
        assert_eq!(
            quantile_select(&mut [f64::NAN], 0.5, ty),
            Err(StatsError::NotANumber)
        );
        // -inf and +inf: the midpoint is undefined, reported as None.
        assert_eq!(
            quantile_sorted(&[f64::NEG_INFINITY, f64::INFINITY], 0.5, ty),
            Ok(None)
        );
        // Equal infinite neighbours are that infinity, not NaN.
        assert_eq!(
            quantile_sorted(&[f64::INFINITY, f64::INFINITY], 0.3, ty),
            Ok(Some(f64::INFINITY))
        );
        assert!(WeightedSorted::new(vec![(1.0, -1.0)]).is_err());
        assert!(WeightedSorted::new(vec![(1.0, f64::INFINITY)]).is_err());
        let empty = WeightedSorted::new(vec![(1.0, 0.0)]).unwrap();
        assert_eq!(empty.quantile(0.5, ty), Ok(None));
    }

    #[test]
    fn interpolation_between_the_largest_doubles_does_not_overflow() {
        // Exact arithmetic: the type 7 median of [-1.7e308, 1.7e308] is 0 and the 0.75
        // quantile is 0.85e308 (halving and doubling are exact here; tolerance 0).
        let xs = [-1.7e308, 1.7e308];
        assert_eq!(
            quantile_sorted(&xs, 0.5, QuantileType::DEFAULT),
            Ok(Some(0.0))
        );
        assert_eq!(
            quantile_sorted(&xs, 0.75, QuantileType::DEFAULT),
            Ok(Some(0.85e308))
        );
        assert_eq!(
            quantile_sorted(&[-f64::MAX, f64::MAX], 0.25, QuantileType::DEFAULT),
            Ok(Some(-f64::MAX / 2.0))
        );
    }

    #[test]
    fn weights_summing_past_the_largest_double_are_an_error() {
        // 1e308 + 1e308 > f64::MAX (exact arithmetic): one typed error, not a 1.0 at
        // every p.
        let pairs = vec![(1.0, 1e308), (2.0, 1e308)];
        assert_eq!(WeightedSorted::new(pairs), Err(StatsError::WeightOverflow));
        let q = quantile_cumulative(
            &[1.0, 2.0],
            &[1e308, f64::INFINITY],
            0.5,
            QuantileType::DEFAULT,
        );
        assert_eq!(q, Err(StatsError::WeightOverflow));
    }
}
