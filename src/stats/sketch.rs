//! A mergeable quantile sketch in bounded memory with a proven rank-error bound: the
//! compactor hierarchy of KLL (Z. Karnin, K. Lang and E. Liberty, "Optimal quantile
//! approximation in streams", FOCS 2016, arXiv:1603.05346).
//!
//! # Why KLL
//!
//! A sketch for SQL has to merge (shards, days, machines: `sketch_merge`), keep a memory
//! bound that does not grow with n, and state its error as a share of n that holds for
//! any input order. KLL does all three with the best known space for a comparison-based
//! mergeable sketch, its analysis is a few lines of probability (below) that this
//! module can apply to its own schedule, and it needs nothing but comparisons, so it
//! works for any mix of magnitudes, ties and infinities. Deterministic alternatives
//! (Greenwald-Khanna) do not merge with the same guarantee; t-digest has no worst-case
//! bound.
//!
//! # Method
//!
//! Values enter level 0. Level `h` holds values that stand for `2^h` input values each.
//! When the sketch holds as many values as its total capacity, the lowest level that is
//! at or above its own capacity is *compacted*: sorted, and every other value (the odd or
//! the even positions, by a fair coin) moves up one level; the others are dropped (an odd
//! value out stays). Level capacities shrink geometrically downward from the top: the
//! top level holds `k`, the one below `ceil(2k/3)`, and so on, never below 2. Merging two
//! sketches concatenates their levels and compacts the same way.
//!
//! # The guarantee, and its proof
//!
//! Let `R(t)` be the number of input values `<= t` and `R^(t)` the sketch's estimate (the
//! weights of the kept values `<= t`). One compaction at level `h` changes the estimate
//! for a fixed `t` by 0 (when an even number of the compacted values are `<= t`) or by
//! `+2^h` or `-2^h` with equal probability (odd: the coin decides whether the middle one
//! is kept). The schedule (which level compacts when) depends only on the counts, never
//! on the values or the coins, so the errors form a martingale with differences bounded
//! by `2^h`, and Azuma-Hoeffding gives, for `S = sum over compactions of 4^h`,
//!
//! `P(|R^(t) - R(t)| >= u) <= 2 exp(-u^2 / (2 S))`.
//!
//! Bounding `S`: each compaction at level `h` consumes at least `C_h - 1` values (`C_h`
//! its capacity when it ran, which is at least its final capacity, since capacities only
//! shrink as levels are added), and at most `n / 2^h` values are ever created at level `h`
//! (each stands for `2^h` inputs). So `S <= n 2^H sum_j 2^-j / (c_j - 1)` with `c_j` the
//! capacity `j` levels below the top `H`. The top level exists because the level below it
//! once compacted while it was the top, holding `k` values of weight `2^(H-1)`: so
//! `2^H <= 2n / k`. Together, `S <= 2 F(k) n^2 / k^2` with
//! `F(k) = k sum_(j>=1) 2^-j / (c_j - 1)` (about 3), and with probability at least
//! `1 - delta`, for any single `t`:
//!
//! `|R^(t) - R(t)| <= eps(k) n`, `eps(k) = sqrt(4 F(k) ln(2 / delta)) / k`.
//!
//! The argument holds verbatim for merged sketches (every compaction anywhere in the
//! merge tree counts once, and the budget `n / 2^h` is over all shards), so a merge of
//! 64 shard sketches carries the same `eps` as one sketch over all rows. ogive fixes
//! `delta` = [`FAILURE_PROBABILITY`] (10^-6) and, for a requested rank error `epsilon`,
//! picks the smallest `k` with `eps(k) <= epsilon` ([`k_for_epsilon`]); the default
//! [`DEFAULT_EPSILON`] = 0.005 gives `k = 2,635`. A sketch also knows its own, usually much
//! smaller, bound from the `S` it accumulated ([`QuantileSketch::instance_error_bound`]).
//!
//! Quantiles inherit the bound: [`QuantileSketch::quantile`] returns the smallest kept
//! value whose estimated rank reaches `p n` (the exact minimum and maximum at `p` = 0 and
//! 1), so its true rank is within `eps n` of `p n` whenever the bound holds at it and just
//! below it.
//!
//! # Memory
//!
//! After every insert or merge the sketch holds fewer values than the sum of its level
//! capacities, `sum_(j=0..H) c_j <= 3k + 3(H + 1)`, with `H <= log2(2n / k)` <= 63. So
//! memory is bounded by a constant for any n below 2^64 ([`max_retained`]): at the
//! default, at most 7,914 values (62 KiB) at n = 10^8, and 7,991 for any n.
//!
//! # Determinism
//!
//! The coins come from a SplitMix64 generator seeded with a fixed constant (or
//! [`QuantileSketch::with_seed`]) and stirred with the bits of every value inserted, so
//! the same values in the same order give the same sketch, and shards holding different
//! data draw different coins (which the independence in the proof asks for).

use std::fmt;

use super::rng::splitmix64;
use super::sorting::sort_total;

/// The rank error (as a share of n) of `quantile_sketch` when none is given: 0.5%.
pub const DEFAULT_EPSILON: f64 = 0.005;

/// The probability, for any one query, that the rank error exceeds the stated bound:
/// `delta` in the module's proof.
pub const FAILURE_PROBABILITY: f64 = 1e-6;

/// The smallest rank error accepted: below it the sketch would be larger than the values
/// of any table it could summarise with an advantage; use the exact `quantile` instead.
pub const MIN_EPSILON: f64 = 1e-5;

/// The largest rank error accepted (exclusive): 0.5 would make the answer meaningless.
pub const MAX_EPSILON: f64 = 0.5;

/// The range of the capacity parameter `k` a valid sketch can have.
pub const MIN_K: u32 = 8;
/// See [`MIN_K`].
pub const MAX_K: u32 = 1 << 28;

/// At most this many levels: level `h` holds values standing for `2^h` inputs, and
/// n < 2^64.
pub const MAX_LEVELS: usize = 64;

const DEFAULT_SEED: u64 = 0x6F67_6976_6553_4B31;

/// Merges ascending `src` into ascending `dst` (by `total_cmp`), from the back, in place.
fn merge_sorted(dst: &mut Vec<f64>, src: &[f64]) {
    let mut i = dst.len();
    dst.extend_from_slice(src);
    if i == 0 || src.is_empty() || dst[i - 1].total_cmp(&src[0]).is_le() {
        return;
    }
    let (mut j, mut w) = (src.len(), dst.len());
    while j > 0 {
        w -= 1;
        if i > 0 && dst[i - 1].total_cmp(&src[j - 1]).is_gt() {
            i -= 1;
            dst[w] = dst[i];
        } else {
            j -= 1;
            dst[w] = src[j];
        }
    }
}

/// What can go wrong with a sketch.
#[derive(Debug, Clone, PartialEq)]
pub enum SketchError {
    /// `epsilon` not in `(0, 0.5)`.
    EpsilonOutOfRange(f64),
    /// `epsilon` in `(0, MIN_EPSILON)`.
    EpsilonTooSmall(f64),
    /// Two sketches with different `k` cannot be merged with the guarantee.
    ParameterMismatch {
        /// `k` of the sketch merged into.
        left: u32,
        /// `k` of the sketch merged in.
        right: u32,
    },
    /// A NaN value.
    NotANumber,
    /// More than 2^64 - 1 values.
    TooManyValues,
    /// A state that no sketch can be in (from a damaged or foreign BLOB).
    Corrupt(String),
}

impl fmt::Display for SketchError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            SketchError::EpsilonOutOfRange(e) => write!(
                f,
                "epsilon must be greater than 0 and less than 0.5 (the rank error as a share \
                 of n, for example 0.005), got {e}"
            ),
            SketchError::EpsilonTooSmall(e) => write!(
                f,
                "epsilon must be at least {MIN_EPSILON}: a smaller one needs more memory than \
                 keeping the values (use quantile for exact answers), got {e}"
            ),
            SketchError::ParameterMismatch { left, right } => write!(
                f,
                "cannot merge sketches built with different parameters (k = {left}, rank error \
                 bound {:.3e}, and k = {right}, bound {:.3e}); build every shard with the \
                 same epsilon",
                epsilon_for_k(*left),
                epsilon_for_k(*right)
            ),
            SketchError::NotANumber => write!(f, "values must not be NaN"),
            SketchError::TooManyValues => {
                write!(f, "a sketch can summarise at most 2^64 - 1 values")
            }
            SketchError::Corrupt(why) => write!(
                f,
                "the BLOB is not a valid quantile sketch ({why}); pass a BLOB made by \
                 quantile_sketch or sketch_merge"
            ),
        }
    }
}

impl std::error::Error for SketchError {}

/// Level capacities `c_0 = k`, `c_(j+1) = max(2, ceil(2 c_j / 3))`, for `j` levels below
/// the top.
fn capacity_below_top(k: u32) -> impl Iterator<Item = u32> {
    std::iter::successors(Some(k), |&c| {
        Some(((2 * u64::from(c)).div_ceil(3) as u32).max(2))
    })
}

/// `F(k) = k * sum_(j >= 1) 2^-j / (c_j - 1)`, the schedule constant of the proof.
fn schedule_factor(k: u32) -> f64 {
    let mut sum = 0.0;
    let mut scale = 0.5;
    for c in capacity_below_top(k).skip(1) {
        if c == 2 {
            // From here on every c_j is 2: the tail sum_(i>=j) 2^-i / 1 = 2 * 2^-j.
            sum += 2.0 * scale;
            break;
        }
        sum += scale / f64::from(c - 1);
        scale *= 0.5;
    }
    f64::from(k) * sum
}

/// The proven rank-error bound of a sketch with parameter `k`, as a share of n, at
/// failure probability [`FAILURE_PROBABILITY`] per query: `sqrt(4 F(k) ln(2/delta)) / k`.
///
/// # Example
/// ```
/// use ogive::stats::sketch::{epsilon_for_k, k_for_epsilon};
/// let k = k_for_epsilon(0.005).unwrap();
/// assert!(epsilon_for_k(k) <= 0.005 && epsilon_for_k(k - 1) > 0.005);
/// ```
pub fn epsilon_for_k(k: u32) -> f64 {
    (4.0 * schedule_factor(k) * (2.0 / FAILURE_PROBABILITY).ln()).sqrt() / f64::from(k)
}

/// The smallest `k` whose proven bound is at most `epsilon`.
///
/// # Errors
/// [`SketchError::EpsilonOutOfRange`] unless `0 < epsilon < 0.5`;
/// [`SketchError::EpsilonTooSmall`] below [`MIN_EPSILON`].
pub fn k_for_epsilon(epsilon: f64) -> Result<u32, SketchError> {
    if !(epsilon > 0.0 && epsilon < MAX_EPSILON) {
        return Err(SketchError::EpsilonOutOfRange(epsilon));
    }
    if epsilon < MIN_EPSILON {
        return Err(SketchError::EpsilonTooSmall(epsilon));
    }
    // eps(k) decreases in k up to the small wiggles of the ceilings: bisect, then step
    // up until the bound holds.
    let (mut lo, mut hi) = (MIN_K, MAX_K);
    while lo < hi {
        let mid = lo + (hi - lo) / 2;
        if epsilon_for_k(mid) <= epsilon {
            hi = mid;
        } else {
            lo = mid + 1;
        }
    }
    while epsilon_for_k(lo) > epsilon {
        lo += 1;
    }
    Ok(lo)
}

/// The most values a sketch with parameter `k` can hold after summarising `n` values:
/// one less than the total capacity of its levels at the largest height `n` allows
/// (`2^H <= 2n/k`). An upper bound, proven in the module docs.
///
/// # Example
/// ```
/// use ogive::stats::sketch::{k_for_epsilon, max_retained};
/// let k = k_for_epsilon(0.005).unwrap();
/// assert!(max_retained(k, 100_000_000) < 3 * k as u64 + 200);
/// ```
pub fn max_retained(k: u32, n: u64) -> u64 {
    // The largest H with 2^H <= 2n/k (H = 0 when n < k).
    let ratio = (2 * u128::from(n)) / u128::from(k);
    let top = if ratio == 0 {
        0
    } else {
        ratio.ilog2() as usize
    };
    let levels = (top + 1).min(MAX_LEVELS);
    let capacity: u64 = capacity_below_top(k).take(levels).map(u64::from).sum();
    // A sketch never keeps more values than it summarised.
    n.min(capacity - 1)
}

/// A KLL quantile sketch. See the module docs for the method and the guarantee.
///
/// # Example
/// ```
/// use ogive::stats::sketch::QuantileSketch;
/// let mut s = QuantileSketch::new(0.01).unwrap();
/// for i in 0..100_000 {
///     s.insert(f64::from(i)).unwrap();
/// }
/// let median = s.quantile(0.5).unwrap().unwrap();
/// assert!((median - 50_000.0).abs() <= 0.01 * 100_000.0);
/// assert!((s.cdf(25_000.0).unwrap() - 0.25).abs() <= 0.01);
/// assert!(s.retained() < 3 * s.k() as usize + 100);
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct QuantileSketch {
    state: SketchState,
    capacities: Vec<u32>,
    capacity_total: usize,
    retained: usize,
}

/// What a sketch stores (and its BLOB holds); the rest is derived from it.
#[derive(Debug, Clone, PartialEq)]
pub struct SketchState {
    /// The capacity parameter.
    pub k: u32,
    /// Values summarised.
    pub n: u64,
    /// The smallest value summarised (`+inf` when empty).
    pub min: f64,
    /// The largest value summarised (`-inf` when empty).
    pub max: f64,
    /// `S`, the sum of `4^h` over every compaction (the proof's variance term).
    pub variance: f64,
    /// The state of the coin generator.
    pub rng: u64,
    /// The kept values, level by level (level `h` stands for `2^h` values each); level 0
    /// in arrival order, the others ascending.
    pub levels: Vec<Vec<f64>>,
}

impl QuantileSketch {
    /// An empty sketch whose rank error is at most `epsilon * n` (per query, with
    /// probability at least `1 -` [`FAILURE_PROBABILITY`]).
    ///
    /// # Errors
    /// As [`k_for_epsilon`].
    pub fn new(epsilon: f64) -> Result<Self, SketchError> {
        Ok(Self::with_k(k_for_epsilon(epsilon)?))
    }

    /// An empty sketch with capacity parameter `k` (clamped to `MIN_K..=MAX_K`).
    pub fn with_k(k: u32) -> Self {
        let mut s = QuantileSketch {
            state: SketchState {
                k: k.clamp(MIN_K, MAX_K),
                n: 0,
                min: f64::INFINITY,
                max: f64::NEG_INFINITY,
                variance: 0.0,
                rng: DEFAULT_SEED,
                levels: vec![Vec::new()],
            },
            capacities: Vec::new(),
            capacity_total: 0,
            retained: 0,
        };
        s.refresh_capacities();
        s
    }

    /// The same sketch with another seed for its coins (before any value is inserted).
    pub fn with_seed(mut self, seed: u64) -> Self {
        self.state.rng = seed;
        self
    }

    fn refresh_capacities(&mut self) {
        let levels = self.state.levels.len();
        let mut caps: Vec<u32> = capacity_below_top(self.state.k).take(levels).collect();
        caps.reverse();
        self.capacity_total = caps.iter().map(|&c| c as usize).sum();
        self.capacities = caps;
    }

    /// The capacity parameter `k`.
    pub fn k(&self) -> u32 {
        self.state.k
    }

    /// The number of values summarised.
    pub fn n(&self) -> u64 {
        self.state.n
    }

    /// The smallest value summarised (`+inf` when empty).
    pub fn min(&self) -> f64 {
        self.state.min
    }

    /// The largest value summarised (`-inf` when empty).
    pub fn max(&self) -> f64 {
        self.state.max
    }

    /// `S`, the sum of `4^h` over every compaction so far (the proof's variance term).
    pub fn variance(&self) -> f64 {
        self.state.variance
    }

    /// The state of the coin generator.
    pub fn rng_state(&self) -> u64 {
        self.state.rng
    }

    /// The kept values, level by level (level `h` stands for `2^h` values each); level 0
    /// in arrival order, the others ascending.
    pub fn levels(&self) -> &[Vec<f64>] {
        &self.state.levels
    }

    /// How many values the sketch keeps.
    pub fn retained(&self) -> usize {
        self.retained
    }

    /// The proven rank-error bound as a share of n for this sketch's `k` (see
    /// [`epsilon_for_k`]).
    pub fn epsilon(&self) -> f64 {
        epsilon_for_k(self.state.k)
    }

    /// The bound this sketch's own history proves, as a share of n, at failure
    /// probability [`FAILURE_PROBABILITY`] per query: `sqrt(2 S ln(2/delta)) / n`. At
    /// most [`QuantileSketch::epsilon`]; 0 while nothing was compacted (exact).
    pub fn instance_error_bound(&self) -> f64 {
        if self.state.n == 0 {
            return 0.0;
        }
        (2.0 * self.state.variance * (2.0 / FAILURE_PROBABILITY).ln()).sqrt() / self.state.n as f64
    }

    /// Adds one value.
    ///
    /// # Errors
    /// [`SketchError::NotANumber`] for NaN; [`SketchError::TooManyValues`] past 2^64 - 1.
    #[inline]
    pub fn insert(&mut self, x: f64) -> Result<(), SketchError> {
        if x.is_nan() {
            return Err(SketchError::NotANumber);
        }
        self.state.n = self
            .state
            .n
            .checked_add(1)
            .ok_or(SketchError::TooManyValues)?;
        self.state.min = self.state.min.min(x);
        self.state.max = self.state.max.max(x);
        self.state.rng = self.state.rng.rotate_left(7) ^ x.to_bits();
        self.state.levels[0].push(x);
        self.retained += 1;
        if self.retained >= self.capacity_total {
            self.compress();
        }
        Ok(())
    }

    /// Folds `other` into this sketch. The result carries the same guarantee as one
    /// sketch over both inputs.
    ///
    /// # Errors
    /// [`SketchError::ParameterMismatch`] when the two `k` differ;
    /// [`SketchError::TooManyValues`] past 2^64 - 1 values.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sketch::QuantileSketch;
    /// let mut a = QuantileSketch::new(0.01).unwrap();
    /// let mut b = QuantileSketch::new(0.01).unwrap();
    /// (0..5000).for_each(|i| a.insert(f64::from(i)).unwrap());
    /// (5000..10000).for_each(|i| b.insert(f64::from(i)).unwrap());
    /// a.merge(&b).unwrap();
    /// assert_eq!(a.n(), 10_000);
    /// assert!(a.merge(&QuantileSketch::new(0.05).unwrap()).is_err());
    /// ```
    pub fn merge(&mut self, other: &QuantileSketch) -> Result<(), SketchError> {
        if self.state.k != other.state.k {
            return Err(SketchError::ParameterMismatch {
                left: self.state.k,
                right: other.state.k,
            });
        }
        if other.state.n == 0 {
            return Ok(());
        }
        self.state.n = self
            .state
            .n
            .checked_add(other.state.n)
            .ok_or(SketchError::TooManyValues)?;
        self.state.min = self.state.min.min(other.state.min);
        self.state.max = self.state.max.max(other.state.max);
        self.state.variance += other.state.variance;
        let mut mixed = self.state.rng ^ other.state.rng.rotate_left(32);
        self.state.rng = splitmix64(&mut mixed);
        if other.state.levels.len() > self.state.levels.len() {
            self.state
                .levels
                .resize_with(other.state.levels.len(), Vec::new);
            self.refresh_capacities();
        }
        for (h, (mine, theirs)) in self
            .state
            .levels
            .iter_mut()
            .zip(&other.state.levels)
            .enumerate()
        {
            if h == 0 {
                mine.extend_from_slice(theirs);
            } else {
                merge_sorted(mine, theirs);
            }
        }
        self.retained += other.retained;
        self.compress();
        Ok(())
    }

    /// Compacts until the sketch holds fewer values than its total capacity.
    fn compress(&mut self) {
        while self.retained >= self.capacity_total {
            // Some level is at or above its capacity, since the total is.
            let Some(h) = (0..self.state.levels.len())
                .find(|&h| self.state.levels[h].len() >= self.capacities[h] as usize)
            else {
                break;
            };
            self.compact(h);
        }
    }

    /// Sorts level `h` and moves every other value up one level, by a fair coin.
    ///
    /// Levels above 0 are kept ascending (a compaction merges its sorted half into the
    /// level above instead of appending it), so only level 0, which takes values in
    /// arrival order and is the smallest, is ever sorted: before, re-sorting the upper
    /// levels was most of the cost of an insert. The kept values, and so every answer,
    /// are the same either way; only their order within a level differs.
    fn compact(&mut self, h: usize) {
        if h + 1 == self.state.levels.len() {
            self.state.levels.push(Vec::new());
            self.refresh_capacities();
        }
        let mut buf = std::mem::take(&mut self.state.levels[h]);
        if h == 0 {
            sort_total(&mut buf);
        }
        let odd_one_out = if buf.len() % 2 == 1 { buf.pop() } else { None };
        let offset = (splitmix64(&mut self.state.rng) & 1) as usize;
        let moved = buf.len() / 2;
        for i in 0..moved {
            buf[i] = buf[offset + 2 * i];
        }
        buf.truncate(moved);
        merge_sorted(&mut self.state.levels[h + 1], &buf);
        self.retained -= moved;
        self.state.variance += 4f64.powi(h as i32);
        buf.clear();
        buf.extend(odd_one_out);
        self.state.levels[h] = buf;
    }

    /// The estimated number of values `<= t`.
    pub fn rank(&self, t: f64) -> u64 {
        self.state
            .levels
            .iter()
            .enumerate()
            .map(|(h, level)| (level.iter().filter(|&&x| x <= t).count() as u64) << h)
            .sum()
    }

    /// The estimated share of values `<= t`; `None` when the sketch is empty or `t` is
    /// NaN.
    pub fn cdf(&self, t: f64) -> Option<f64> {
        (self.state.n > 0 && !t.is_nan()).then(|| self.rank(t) as f64 / self.state.n as f64)
    }

    /// The estimated p-quantile: the smallest kept value whose estimated rank reaches
    /// `p n`; the exact minimum at `p = 0` and maximum at `p = 1`. `Ok(None)` when empty.
    ///
    /// # Errors
    /// [`super::StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
    pub fn quantile(&self, p: f64) -> Result<Option<f64>, super::StatsError> {
        Ok(self.quantiles(&[p])?.pop().flatten())
    }

    /// [`QuantileSketch::quantile`] at each of `ps`, sorting the kept values once.
    ///
    /// # Errors
    /// [`super::StatsError::ProbabilityOutOfRange`] when a `p` is not in `[0, 1]`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::sketch::QuantileSketch;
    /// let mut s = QuantileSketch::new(0.01).unwrap();
    /// (1..=4).for_each(|i| s.insert(f64::from(i)).unwrap());
    /// assert_eq!(s.quantiles(&[0.0, 0.5, 1.0]).unwrap(), vec![Some(1.0), Some(2.0), Some(4.0)]);
    /// ```
    pub fn quantiles(&self, ps: &[f64]) -> Result<Vec<Option<f64>>, super::StatsError> {
        for &p in ps {
            super::check_probability(p)?;
        }
        if self.state.n == 0 {
            return Ok(vec![None; ps.len()]);
        }
        let mut weighted: Vec<(f64, u64)> = self
            .state
            .levels
            .iter()
            .enumerate()
            .flat_map(|(h, level)| level.iter().map(move |&x| (x, 1u64 << h)))
            .collect();
        weighted.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
        let mut cumulative = Vec::with_capacity(weighted.len());
        let mut acc = 0u64;
        for &(_, w) in &weighted {
            acc += w;
            cumulative.push(acc);
        }
        let n = self.state.n as f64;
        Ok(ps
            .iter()
            .map(|&p| {
                Some(if p == 0.0 {
                    self.state.min
                } else if p == 1.0 {
                    self.state.max
                } else {
                    let target = p * n;
                    let i = cumulative.partition_point(|&c| (c as f64) < target);
                    weighted.get(i).map_or(self.state.max, |&(x, _)| x)
                })
            })
            .collect())
    }

    /// The stored state (what the BLOB holds).
    pub fn state(&self) -> &SketchState {
        &self.state
    }

    /// Rebuilds a sketch from its stored state, checking every invariant a sketch keeps.
    ///
    /// # Errors
    /// [`SketchError::Corrupt`] naming the first invariant that fails.
    pub fn from_state(state: SketchState) -> Result<Self, SketchError> {
        let bad = |why: String| Err(SketchError::Corrupt(why));
        let SketchState {
            k,
            n,
            min,
            max,
            variance,
            ref levels,
            ..
        } = state;
        if !(MIN_K..=MAX_K).contains(&k) {
            return bad(format!("k = {k} is outside {MIN_K}..={MAX_K}"));
        }
        if levels.is_empty() || levels.len() > MAX_LEVELS {
            return bad(format!(
                "{} levels, expected 1 to {MAX_LEVELS}",
                levels.len()
            ));
        }
        if n == 0 {
            return bad("it summarises no values".into());
        }
        if levels.last().is_some_and(Vec::is_empty) {
            return bad("its top level is empty".into());
        }
        let weight: u128 = levels
            .iter()
            .enumerate()
            .map(|(h, l)| (l.len() as u128) << h)
            .sum();
        if weight != u128::from(n) {
            return bad(format!(
                "its levels stand for {weight} values but it says n = {n}"
            ));
        }
        if min.is_nan() || max.is_nan() || min > max {
            return bad(format!("min {min} and max {max} are not ordered numbers"));
        }
        if levels.iter().flatten().any(|&x| !(min <= x && x <= max)) {
            return bad("a kept value is NaN or outside [min, max]".into());
        }
        if !(variance.is_finite() && variance >= 0.0) || (variance == 0.0) != (levels.len() == 1) {
            return bad(format!(
                "its compaction record {variance} does not fit {} levels",
                levels.len()
            ));
        }
        let retained = levels.iter().map(Vec::len).sum();
        let mut s = QuantileSketch {
            state,
            capacities: Vec::new(),
            capacity_total: 0,
            retained,
        };
        s.refresh_capacities();
        if s.retained >= s.capacity_total {
            return bad(format!(
                "it keeps {} values, more than its capacity {}",
                s.retained, s.capacity_total
            ));
        }
        // Levels above 0 are kept ascending; a BLOB need not hold them so.
        for level in s.state.levels.iter_mut().skip(1) {
            if !level.is_sorted_by(|a, b| a.total_cmp(b).is_le()) {
                sort_total(level);
            }
        }
        Ok(s)
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::rng::Xoshiro256pp;

    /// The compaction as docs/sketch-format.md words it: values are appended to a level
    /// and the level is sorted when it compacts. The sketch keeps its upper levels sorted
    /// instead; this is the check that doing so changes no kept value and no coin.
    struct Appending {
        k: u32,
        levels: Vec<Vec<f64>>,
        rng: u64,
        variance: f64,
    }

    impl Appending {
        fn new(k: u32) -> Self {
            Appending {
                k,
                levels: vec![Vec::new()],
                rng: DEFAULT_SEED,
                variance: 0.0,
            }
        }

        fn insert(&mut self, x: f64) {
            self.rng = self.rng.rotate_left(7) ^ x.to_bits();
            self.levels[0].push(x);
            self.compress();
        }

        fn merge(&mut self, other: &Appending) {
            self.variance += other.variance;
            let mut mixed = self.rng ^ other.rng.rotate_left(32);
            self.rng = splitmix64(&mut mixed);
            if other.levels.len() > self.levels.len() {
                self.levels.resize_with(other.levels.len(), Vec::new);
            }
            for (mine, theirs) in self.levels.iter_mut().zip(&other.levels) {
                mine.extend_from_slice(theirs);
            }
            self.compress();
        }

        fn compress(&mut self) {
            loop {
                let mut caps: Vec<usize> = capacity_below_top(self.k)
                    .take(self.levels.len())
                    .map(|c| c as usize)
                    .collect();
                caps.reverse();
                let held: usize = self.levels.iter().map(Vec::len).sum();
                if held < caps.iter().sum::<usize>() {
                    return;
                }
                let h = (0..self.levels.len())
                    .find(|&h| self.levels[h].len() >= caps[h])
                    .unwrap();
                if h + 1 == self.levels.len() {
                    self.levels.push(Vec::new());
                }
                let mut buf = std::mem::take(&mut self.levels[h]);
                buf.sort_unstable_by(f64::total_cmp);
                let odd = if buf.len() % 2 == 1 { buf.pop() } else { None };
                let offset = (splitmix64(&mut self.rng) & 1) as usize;
                self.levels[h + 1].extend(buf.iter().skip(offset).step_by(2));
                self.variance += 4f64.powi(h as i32);
                self.levels[h] = odd.into_iter().collect();
            }
        }
    }

    /// Same kept values level by level (as multisets), same coins, same record; and the
    /// sketch's levels above 0 ascending.
    fn assert_same(s: &QuantileSketch, r: &Appending) {
        let st = s.state();
        assert_eq!(st.levels.len(), r.levels.len());
        assert_eq!(st.rng, r.rng);
        assert_eq!(st.variance.to_bits(), r.variance.to_bits());
        for (h, (mine, theirs)) in st.levels.iter().zip(&r.levels).enumerate() {
            let mut a = mine.clone();
            let mut b = theirs.clone();
            if h > 0 {
                assert!(a.is_sorted_by(|x, y| x.total_cmp(y).is_le()), "level {h}");
            }
            a.sort_by(f64::total_cmp);
            b.sort_by(f64::total_cmp);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&a), bits(&b), "level {h}");
        }
    }

    #[test]
    fn sorted_upper_levels_keep_the_documented_values() {
        // Reference: the documented append-then-sort compaction above (exhaustive over
        // each step of a seeded stream: every insert and merge is compared).
        let mut rng = Xoshiro256pp::new(7);
        for k in [8, 16, 200] {
            let mut shards: Vec<(QuantileSketch, Appending)> = Vec::new();
            for shard in 0..6 {
                let mut s = QuantileSketch::with_k(k);
                let mut r = Appending::new(s.k());
                let n = 500 + 1_700 * shard;
                for i in 0..n {
                    // Ties (a 0.5 grid), signed zeros and infinities among the values.
                    let x = match i % 97 {
                        0 => -0.0,
                        1 => 0.0,
                        2 => f64::INFINITY,
                        _ => (rng.normal() * 8.0).round() / 2.0,
                    };
                    s.insert(x).unwrap();
                    r.insert(x);
                    if i % 211 == 0 {
                        assert_same(&s, &r);
                    }
                }
                assert_same(&s, &r);
                shards.push((s, r));
            }
            let (mut s, mut r) = shards.remove(0);
            for (t, u) in &shards {
                s.merge(t).unwrap();
                r.merge(u);
                assert_same(&s, &r);
            }
        }
    }

    #[test]
    fn a_stored_state_with_unsorted_upper_levels_reads_as_sorted() {
        // Older BLOBs may hold upper levels in any order (docs/sketch-format.md). Reference:
        // the same state read back, whose ranks it must keep (enumerated over every value).
        let mut s = QuantileSketch::with_k(16);
        (0..500).for_each(|i| s.insert(f64::from((i * 37) % 101)).unwrap());
        let mut state = s.state().clone();
        assert!(state.levels.len() > 2 && state.levels[1].len() > 1);
        state.levels.iter_mut().skip(1).for_each(|l| l.reverse());
        let read = QuantileSketch::from_state(state).unwrap();
        for level in read.state().levels.iter().skip(1) {
            assert!(level.is_sorted_by(|a, b| a.total_cmp(b).is_le()));
        }
        for t in 0..=101 {
            assert_eq!(read.rank(f64::from(t)), s.rank(f64::from(t)), "t = {t}");
        }
    }

    #[test]
    fn merge_sorted_merges() {
        // Reference: a full sort of the concatenation.
        let cases: [(&[f64], &[f64]); 5] = [
            (&[], &[1.0, 2.0]),
            (&[1.0, 2.0], &[]),
            (&[1.0, 3.0, 5.0], &[2.0, 3.0, 6.0]),
            (&[4.0, 5.0], &[1.0, 2.0]),
            (&[0.0, 1.0], &[-0.0, 0.0]),
        ];
        for (a, b) in cases {
            let mut got = a.to_vec();
            merge_sorted(&mut got, b);
            let mut want = [a, b].concat();
            want.sort_by(f64::total_cmp);
            let bits = |v: &[f64]| v.iter().map(|x| x.to_bits()).collect::<Vec<_>>();
            assert_eq!(bits(&got), bits(&want), "{a:?} + {b:?}");
        }
    }

    /// Exact rank by enumeration of a sorted copy.
    fn true_rank(sorted: &[f64], t: f64) -> u64 {
        sorted.partition_point(|&x| x <= t) as u64
    }

    #[test]
    fn default_parameters() {
        let k = k_for_epsilon(DEFAULT_EPSILON).unwrap();
        assert_eq!(k, 2635);
        // F(k) is close to 3 = sum_(j>=1) (3/4)^j, its value without the ceilings and the
        // floor of 2 (geometric series).
        let f = schedule_factor(k);
        assert!((2.9..3.1).contains(&f), "{f}");
        assert_eq!(max_retained(k, 100_000_000), 7914);
        assert_eq!(max_retained(k, u64::MAX), 7991);
        assert!(max_retained(k, u64::MAX) <= 3 * u64::from(k) + 3 * 64);
        assert_eq!(k_for_epsilon(0.5), Err(SketchError::EpsilonOutOfRange(0.5)));
        assert_eq!(k_for_epsilon(0.0), Err(SketchError::EpsilonOutOfRange(0.0)));
        assert!(k_for_epsilon(f64::NAN).is_err());
        assert_eq!(k_for_epsilon(1e-7), Err(SketchError::EpsilonTooSmall(1e-7)));
        assert!(k_for_epsilon(0.4999).unwrap() >= MIN_K);
        assert!(k_for_epsilon(MIN_EPSILON).unwrap() <= MAX_K);
    }

    #[test]
    fn exact_until_first_compaction() {
        let mut s = QuantileSketch::new(0.01).unwrap();
        let xs: Vec<f64> = (0..100).map(|i| f64::from(i % 7)).collect();
        xs.iter().for_each(|&x| s.insert(x).unwrap());
        let mut sorted = xs.clone();
        sorted.sort_by(f64::total_cmp);
        for t in [-1.0, 0.0, 3.5, 6.0] {
            assert_eq!(s.rank(t), true_rank(&sorted, t));
        }
        assert_eq!(s.instance_error_bound(), 0.0);
        assert_eq!(s.quantile(0.0).unwrap(), Some(0.0));
        assert_eq!(s.quantile(1.0).unwrap(), Some(6.0));
        assert!(s.quantile(1.5).is_err());
        assert_eq!(
            QuantileSketch::new(0.01).unwrap().quantile(0.5).unwrap(),
            None
        );
        assert_eq!(QuantileSketch::new(0.01).unwrap().cdf(0.5), None);
        assert_eq!(s.insert(f64::NAN), Err(SketchError::NotANumber));
    }

    #[test]
    fn memory_stays_within_the_proven_bound() {
        let mut s = QuantileSketch::with_k(64);
        for i in 0..200_000u32 {
            s.insert(f64::from(i.wrapping_mul(2_654_435_761) % 1000))
                .unwrap();
            if i % 1000 == 0 {
                assert!(
                    s.retained() as u64 <= max_retained(64, s.n()),
                    "n {}",
                    s.n()
                );
            }
        }
        // Weight conservation (the invariant the decoder checks): exact.
        let weight: u64 = s
            .levels()
            .iter()
            .enumerate()
            .map(|(h, l)| (l.len() as u64) << h)
            .sum();
        assert_eq!(weight, s.n());
        assert!(s.instance_error_bound() <= s.epsilon());
    }

    #[test]
    fn same_input_same_sketch_and_parts_round_trip() {
        let build = || {
            let mut s = QuantileSketch::with_k(32);
            (0..10_000).for_each(|i| s.insert(f64::from(i % 313) * 0.5).unwrap());
            s
        };
        let a = build();
        assert_eq!(a, build());
        let b = QuantileSketch::from_state(a.state().clone()).unwrap();
        assert_eq!(a, b);
        let mut state = a.state().clone();
        state.n += 1;
        let err = QuantileSketch::from_state(state).unwrap_err();
        assert!(err.to_string().contains("but it says n ="), "{err}");
    }

    #[test]
    fn mismatched_parameters_are_refused() {
        let mut a = QuantileSketch::with_k(100);
        let b = QuantileSketch::with_k(200);
        let e = a.merge(&b).unwrap_err();
        assert_eq!(
            e,
            SketchError::ParameterMismatch {
                left: 100,
                right: 200
            }
        );
        assert!(
            e.to_string()
                .starts_with("cannot merge sketches built with different parameters")
        );
    }
}
