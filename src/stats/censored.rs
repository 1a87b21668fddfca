//! Nonparametric maximum-likelihood estimates of a distribution from censored readings.
//!
//! Each reading is a value `x` with a censoring code: **exact** (the true value is `x`),
//! **left-censored** (the true value is at or below `x`: a reading under a detection
//! limit) or **right-censored** (the true value is above `x`: a logger at the top of its
//! range, an item still running at time `x`). Reading `i` says the true value lies in a set
//! `A_i`: `{x}`, `(-inf, x]` or `(x, +inf)`. The nonparametric maximum-likelihood estimate
//! (NPMLE) is the distribution `F` that maximises `prod_i P_F(A_i)`.
//!
//! # Where the mass can go: Turnbull's intervals
//!
//! B. W. Turnbull, "The empirical distribution function with arbitrarily grouped, censored
//! and truncated data", *Journal of the Royal Statistical Society B* 38(3), 290-295, 1976,
//! shows that the NPMLE puts all its mass on the *innermost intervals*: sort the left
//! ends and the right ends of all the sets `A_i` together (a left end before a right end
//! at the same place); an innermost interval runs from a left end to the right end that
//! immediately follows it. Here the left ends are the exact values (closed), the
//! right-censored values (open: `(x, ...`) and `-inf`; the right ends are the exact values,
//! the left-censored values (both closed) and `+inf`. So every exact value is an interval
//! of its own (a point), and the other intervals have the shapes `(r, l]`, `(-inf, l]` and
//! `(r, +inf)`. The likelihood says how much mass each interval holds, never how it is
//! spread inside: the cdf is determined everywhere except strictly inside an interval of
//! positive mass (`lo < t < hi` for `(lo, hi]`, `lo <= t < hi` for `[lo, hi]`), and
//! [`Censored::cdf`] returns `None` there rather than a guess.
//!
//! # Right-censoring only: Kaplan-Meier
//!
//! E. L. Kaplan and P. Meier, "Nonparametric estimation from incomplete observations",
//! *Journal of the American Statistical Association* 53(282), 457-481, 1958: with `n_i`
//! readings at risk at the i-th distinct exact value (those at or above it, a reading
//! censored at the same value counted as still at risk: censoring happens after the
//! events, as `T > x` says) and `d_i` exact readings there, the survival function is
//! `S(t) = prod_{x_i <= t} (1 - d_i / n_i)` and `F = 1 - S`. The product of ratios of
//! counts is computed directly (its relative error grows by at most one rounding per
//! factor, less than through the exponential of a sum of logarithms), and before the first
//! censored reading `F` is the count ratio itself, so that with no censoring at all the
//! estimate is the empirical distribution bit for bit. When the largest reading is
//! censored, the mass `S` left after the last exact value lies in `(r_max, +inf)`, where
//! the cdf is undefined.
//!
//! # Left-censoring only: the mirror
//!
//! Kaplan-Meier on `-x`: `F(t) = prod_{x_i > t} (1 - d_i / n_i)` with `n_i` the exact
//! readings at or below `x_i` plus the left-censored readings strictly below it (a reading
//! left-censored at `x_i` says `T <= x_i`, which the event at `x_i` satisfies, so it leaves
//! the risk set before the events there). When the smallest reading is left-censored, the
//! mass `F(x_1-)` below the smallest exact value lies in `(-inf, l_min]`, where the cdf is
//! undefined.
//!
//! # Both: Turnbull's self-consistency algorithm
//!
//! With both kinds of censoring there is no closed form. Turnbull's self-consistency
//! equations `p_j = (1/n) sum_i alpha_ij p_j / P_i` (`alpha_ij` = 1 when interval `j` lies
//! in `A_i`, `P_i = sum_j alpha_ij p_j`) are solved by their fixed-point iteration, which
//! is the EM algorithm of A. P. Dempster, N. M. Laird and D. B. Rubin (*JRSS B* 39, 1-38,
//! 1977) for this likelihood and never lowers it. Each set here is one interval, a prefix
//! or a suffix of the sorted intervals, so a pass costs O(intervals + distinct readings)
//! with prefix and suffix sums (compensated, [`NeumaierSum`]). It starts from equal masses
//! and stops when no mass changes by more than [`TOLERANCE`] in a pass and the Kuhn-Tucker
//! conditions hold (`d_j = sum_i alpha_ij / P_i <= n` for every interval, with equality
//! where `p_j > 0`; R. Gentleman and C. J. Geyer, "Maximum likelihood for interval
//! censored data: consistency and computation", *Biometrika* 81(3), 618-623, 1994), or
//! after [`MAX_PASSES`] passes; [`Censored::converged`] says which. EM alone moves a mass
//! that belongs at 0 towards it only slowly (in degenerate cases as 1/passes), so every
//! 100 passes masses below a tenth of one reading's share, on intervals without exact
//! readings, are tried at 0, kept there only when the likelihood does not drop; at the end
//! a zero mass that breaks the Kuhn-Tucker condition is revived and the passes go on.
//! Intervals of zero mass are dropped from the estimate, so the cdf is defined there.
//!
//! # Greenwood's interval
//!
//! M. Greenwood, "The natural duration of cancer", *Reports on Public Health and Medical
//! Subjects* 33, HMSO, 1926: `Var S(t) = S(t)^2 sum_{x_i <= t} d_i / (n_i (n_i - d_i))`
//! (for the mirror, the same with `F` and the sum over `x_i > t`). [`Censored::band`]
//! gives the pointwise interval on the log-log scale (J. D. Kalbfleisch and R. L.
//! Prentice, *The Statistical Analysis of Failure Time Data*, Wiley 1980; Borgan and
//! Liestol, *Scand. J. Statist.* 17, 1990): with `G` the Kaplan-Meier survival (for the
//! mirror, its `F`) and `theta = sqrt(v) / |ln G|`, `G^{exp(+z theta)} <= G <=
//! G^{exp(-z theta)}`, which stays inside `[0, 1]`. Turnbull's estimate has no Greenwood
//! formula, and [`Censored::band`] refuses it.

use std::fmt;

use super::StatsError;
use super::sum::NeumaierSum;

/// The largest number of EM passes of Turnbull's algorithm.
pub const MAX_PASSES: u64 = 20_000;

/// Turnbull's algorithm stops when no interval's mass changes by more than this in a pass.
pub const TOLERANCE: f64 = 1e-12;

/// The most readings an estimate holds: counts stay exact in an `f64`.
pub const MAX_READINGS: u64 = 1 << 53;

/// What a reading says about the true value.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Code {
    /// Code -1: the true value is at or below the reading.
    Left,
    /// Code 0: the reading is the true value.
    Exact,
    /// Code 1: the true value is above the reading.
    Right,
}

impl Code {
    /// Reads a censoring code: -1, 0 or 1.
    ///
    /// # Errors
    /// [`CensoredError::BadCode`] for any other number.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::Code;
    /// assert_eq!(Code::from_number(-1.0), Ok(Code::Left));
    /// assert!(Code::from_number(2.0).is_err());
    /// ```
    pub fn from_number(c: f64) -> Result<Code, CensoredError> {
        if c == -1.0 {
            Ok(Code::Left)
        } else if c == 0.0 {
            Ok(Code::Exact)
        } else if c == 1.0 {
            Ok(Code::Right)
        } else {
            Err(CensoredError::BadCode(c))
        }
    }
}

/// Which estimate the readings called for.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Method {
    /// Right-censoring only (or none): Kaplan-Meier.
    KaplanMeier,
    /// Left-censoring only: Kaplan-Meier on `-x`.
    Mirror,
    /// Both: Turnbull's self-consistency algorithm.
    Turnbull,
}

impl Method {
    /// The name used in messages and JSON.
    pub fn name(self) -> &'static str {
        match self {
            Method::KaplanMeier => "kaplan-meier",
            Method::Mirror => "kaplan-meier mirror",
            Method::Turnbull => "turnbull",
        }
    }
}

/// Why readings give no estimate, or a stored table is not one.
#[derive(Debug, Clone, PartialEq)]
pub enum CensoredError {
    /// A censoring code other than -1, 0 or 1.
    BadCode(f64),
    /// An infinite reading.
    InfiniteReading(f64),
    /// A NaN reading.
    NotANumber,
    /// No exact reading and censoring on one side only: the likelihood puts all the mass
    /// in one unbounded interval, so nothing is estimated.
    NoExactReading { censored: u64, side: Code },
    /// No readings at all.
    Empty,
    /// More readings than [`MAX_READINGS`].
    TooManyReadings,
    /// Memory ran out.
    OutOfMemory,
    /// A table whose values are not strictly ascending (at row `index`).
    NotSorted { index: usize },
    /// A table row with no readings.
    EmptyRow { index: usize },
    /// A significance level outside `(0, 1)`.
    AlphaOutOfRange(f64),
    /// Greenwood's interval asked of Turnbull's estimate.
    NoGreenwood,
    /// The engine asked the call to stop ([`crate::stats::cancel`]).
    Interrupted,
}

impl fmt::Display for CensoredError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            CensoredError::BadCode(c) => write!(
                f,
                "c must be -1 (left-censored: the value is at or below x), 0 (exact) or 1 \
                 (right-censored: the value is above x), got {c}"
            ),
            CensoredError::InfiniteReading(x) => {
                write!(f, "x must be finite, got {x}; filter such rows out")
            }
            CensoredError::NotANumber => write!(f, "x must not be NaN"),
            CensoredError::NoExactReading { censored, side } => write!(
                f,
                "all {censored} readings are {}-censored and none is exact, so no estimate is \
                 possible; a censored estimate needs at least one exact reading (c = 0)",
                if *side == Code::Left { "left" } else { "right" }
            ),
            CensoredError::Empty => write!(f, "there are no readings"),
            CensoredError::TooManyReadings => {
                write!(f, "more than 2^53 readings; counts would not stay exact")
            }
            CensoredError::OutOfMemory => write!(f, "ran out of memory holding the readings"),
            CensoredError::NotSorted { index } => {
                write!(
                    f,
                    "reading values are not strictly ascending (at row {index})"
                )
            }
            CensoredError::EmptyRow { index } => write!(f, "row {index} holds no readings"),
            CensoredError::AlphaOutOfRange(a) => {
                write!(f, "alpha must be between 0 and 1 (exclusive), got {a}")
            }
            CensoredError::NoGreenwood => write!(
                f,
                "this estimate mixes left- and right-censored readings (Turnbull's estimate), \
                 for which Greenwood's formula does not hold, so no pointwise interval is given; \
                 Greenwood's interval needs readings censored on one side only"
            ),
            CensoredError::Interrupted => f.write_str("interrupted"),
        }
    }
}

impl std::error::Error for CensoredError {}

/// The readings at one distinct value: how many are exact, left- and right-censored.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Row {
    /// The value.
    pub x: f64,
    /// Exact readings at `x`.
    pub exact: u64,
    /// Left-censored readings at `x`.
    pub left: u64,
    /// Right-censored readings at `x`.
    pub right: u64,
}

/// One interval of the estimate's support and the cdf at its right end.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Piece {
    /// The left end (`-inf` for mass below the smallest reading).
    pub lo: f64,
    /// Whether the left end is excluded: `(lo, hi]` rather than `[lo, hi]`.
    pub lo_open: bool,
    /// The right end, included (`+inf` for mass above the largest reading).
    pub hi: f64,
    /// The cdf at `hi`: the mass of this piece and of every piece before it.
    pub cdf: f64,
}

impl Piece {
    /// Whether the piece is a single point.
    pub fn is_point(&self) -> bool {
        self.lo == self.hi && !self.lo_open
    }
}

/// Greenwood's pointwise interval for the cdf at one point (see the module docs).
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct GreenwoodBand {
    /// The estimate's cdf at the point.
    pub cdf: f64,
    /// Greenwood's standard error of the cdf (that of `S` for Kaplan-Meier).
    pub se: f64,
    /// Lower limit for the cdf.
    pub lower: f64,
    /// Upper limit for the cdf.
    pub upper: f64,
}

/// The Kolmogorov-Smirnov distances between an estimate and a continuous cdf, taken over
/// the points where the estimate's cdf is defined.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsDistance {
    /// `sup |F_hat - F|`.
    pub d: f64,
    /// `sup (F_hat - F)`.
    pub d_plus: f64,
    /// `sup (F - F_hat)`.
    pub d_minus: f64,
}

/// A nonparametric maximum-likelihood estimate from censored readings.
///
/// # Example
/// ```
/// use ogive::stats::censored::{Censored, Code, Method};
/// // Kaplan-Meier, by hand: 1, 2+ (censored), 3: S(1) = 2/3, S(3) = 2/3 * 0 = 0.
/// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Right), (3.0, Code::Exact)])
///     .unwrap();
/// assert_eq!(e.method(), Method::KaplanMeier);
/// assert_eq!(e.cdf(1.5), Some(1.0 / 3.0));
/// assert_eq!(e.cdf(3.0), Some(1.0));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub struct Censored {
    rows: Vec<Row>,
    n: u64,
    method: Method,
    pieces: Vec<Piece>,
    passes: u64,
    converged: bool,
    /// Greenwood's sum for the stretch before piece 0 (index 0) and after piece j
    /// (index j + 1); empty for Turnbull.
    greenwood: Vec<f64>,
}

/// Sorts readings into the table of distinct values.
///
/// # Errors
/// [`CensoredError::NotANumber`], [`CensoredError::InfiniteReading`],
/// [`CensoredError::OutOfMemory`].
///
/// # Example
/// ```
/// use ogive::stats::censored::{rows_of, Code};
/// let rows = rows_of(&[(2.0, Code::Left), (1.0, Code::Exact), (2.0, Code::Exact)]).unwrap();
/// assert_eq!((rows.len(), rows[1].exact, rows[1].left), (2, 1, 1));
/// ```
pub fn rows_of(readings: &[(f64, Code)]) -> Result<Vec<Row>, CensoredError> {
    let mut sorted: Vec<(f64, Code)> = Vec::new();
    sorted
        .try_reserve_exact(readings.len())
        .map_err(|_| CensoredError::OutOfMemory)?;
    for &(x, c) in readings {
        if x.is_nan() {
            return Err(CensoredError::NotANumber);
        }
        if x.is_infinite() {
            return Err(CensoredError::InfiniteReading(x));
        }
        // -0.0 and 0.0 are one value.
        sorted.push((x + 0.0, c));
    }
    sorted.sort_unstable_by(|a, b| a.0.total_cmp(&b.0));
    let mut rows: Vec<Row> = Vec::new();
    for (x, c) in sorted {
        let fresh = rows.last().is_none_or(|r| r.x != x);
        if fresh {
            rows.try_reserve(1)
                .map_err(|_| CensoredError::OutOfMemory)?;
            rows.push(Row {
                x,
                exact: 0,
                left: 0,
                right: 0,
            });
        }
        if let Some(r) = rows.last_mut() {
            match c {
                Code::Exact => r.exact += 1,
                Code::Left => r.left += 1,
                Code::Right => r.right += 1,
            }
        }
    }
    Ok(rows)
}

impl Censored {
    /// The estimate from readings in any order.
    ///
    /// # Errors
    /// As [`rows_of`] and [`Censored::from_rows`].
    pub fn from_readings(readings: &[(f64, Code)]) -> Result<Censored, CensoredError> {
        Censored::from_rows(rows_of(readings)?)
    }

    /// The estimate from a table of distinct values (ascending) and their counts:
    /// Kaplan-Meier, its mirror or Turnbull's, as the readings call for.
    ///
    /// # Errors
    /// [`CensoredError::Empty`]; [`CensoredError::NotSorted`], [`CensoredError::EmptyRow`],
    /// [`CensoredError::InfiniteReading`], [`CensoredError::TooManyReadings`] for a bad
    /// table; [`CensoredError::NoExactReading`] when no exact reading is there and the
    /// censoring is on one side only.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Row};
    /// let e = Censored::from_rows(vec![Row { x: 1.0, exact: 0, left: 0, right: 2 }]);
    /// assert!(e.unwrap_err().to_string().starts_with("all 2 readings are right-censored"));
    /// ```
    pub fn from_rows(rows: Vec<Row>) -> Result<Censored, CensoredError> {
        let (mut exact, mut left, mut right) = (0u64, 0u64, 0u64);
        for (i, r) in rows.iter().enumerate() {
            if !r.x.is_finite() {
                return Err(if r.x.is_nan() {
                    CensoredError::NotANumber
                } else {
                    CensoredError::InfiniteReading(r.x)
                });
            }
            if i > 0 && rows[i - 1].x >= r.x {
                return Err(CensoredError::NotSorted { index: i });
            }
            if r.exact == 0 && r.left == 0 && r.right == 0 {
                return Err(CensoredError::EmptyRow { index: i });
            }
            let add = |a: u64, b: u64| {
                a.checked_add(b)
                    .filter(|&s| s <= MAX_READINGS)
                    .ok_or(CensoredError::TooManyReadings)
            };
            exact = add(exact, r.exact)?;
            left = add(left, r.left)?;
            right = add(right, r.right)?;
        }
        let n = exact
            .checked_add(left)
            .and_then(|s| s.checked_add(right))
            .filter(|&s| s <= MAX_READINGS)
            .ok_or(CensoredError::TooManyReadings)?;
        if n == 0 {
            return Err(CensoredError::Empty);
        }
        if exact == 0 && (left == 0 || right == 0) {
            let side = if left > 0 { Code::Left } else { Code::Right };
            return Err(CensoredError::NoExactReading { censored: n, side });
        }
        let mut e = Censored {
            rows,
            n,
            method: Method::KaplanMeier,
            pieces: Vec::new(),
            passes: 0,
            converged: true,
            greenwood: Vec::new(),
        };
        if left == 0 {
            e.kaplan_meier();
        } else if right == 0 {
            e.method = Method::Mirror;
            e.mirror();
        } else {
            e.method = Method::Turnbull;
            e.turnbull()?;
        }
        Ok(e)
    }

    /// Kaplan-Meier (right-censoring only).
    fn kaplan_meier(&mut self) {
        let total = self.n as f64;
        let mut at_risk = self.n;
        let mut events = 0u64;
        let mut censored_seen = false;
        let mut s = 1.0;
        let mut v = Greenwood::default();
        self.greenwood.push(0.0);
        for r in &self.rows {
            if r.exact > 0 {
                let (n_i, d_i) = (at_risk as f64, r.exact as f64);
                events += r.exact;
                let cdf = if censored_seen {
                    s *= (n_i - d_i) / n_i;
                    1.0 - s
                } else {
                    s = (self.n - events) as f64 / total;
                    events as f64 / total
                };
                v.add(n_i, d_i);
                self.pieces.push(Piece {
                    lo: r.x,
                    lo_open: false,
                    hi: r.x,
                    cdf,
                });
                self.greenwood.push(v.value());
            }
            at_risk -= r.exact + r.right;
            censored_seen |= r.right > 0;
        }
        // Mass left after the last exact value lies above the largest censored reading.
        let last_exact = self.pieces.last().map_or(f64::NEG_INFINITY, |p| p.hi);
        if let Some(r) = self.rows.iter().rev().find(|r| r.right > 0)
            && r.x >= last_exact
            && s > 0.0
        {
            self.pieces.push(Piece {
                lo: r.x,
                lo_open: true,
                hi: f64::INFINITY,
                cdf: 1.0,
            });
            self.greenwood.push(v.value());
        }
        if let Some(p) = self.pieces.last_mut() {
            p.cdf = 1.0;
        }
    }

    /// Kaplan-Meier on `-x` (left-censoring only).
    fn mirror(&mut self) {
        let mut at_risk = self.n;
        let mut f = 1.0;
        let mut v = Greenwood::default();
        // Built from the top down, then reversed.
        let mut points: Vec<(Piece, f64)> = Vec::new();
        for r in self.rows.iter().rev() {
            at_risk -= r.left;
            if r.exact > 0 {
                let (n_i, d_i) = (at_risk as f64, r.exact as f64);
                points.push((
                    Piece {
                        lo: r.x,
                        lo_open: false,
                        hi: r.x,
                        cdf: f,
                    },
                    v.value(),
                ));
                f *= (n_i - d_i) / n_i;
                v.add(n_i, d_i);
                at_risk -= r.exact;
            }
        }
        points.reverse();
        // Greenwood's sum for the stretch below everything.
        self.greenwood.push(v.value());
        if f > 0.0
            && let Some(r) = self.rows.iter().find(|r| r.left > 0)
        {
            self.pieces.push(Piece {
                lo: f64::NEG_INFINITY,
                lo_open: false,
                hi: r.x,
                cdf: f,
            });
            self.greenwood.push(v.value());
        }
        for (p, g) in points {
            self.pieces.push(p);
            self.greenwood.push(g);
        }
    }

    /// Turnbull's self-consistency algorithm (both kinds of censoring), with the pruning
    /// and Kuhn-Tucker check described in the module docs.
    fn turnbull(&mut self) -> Result<(), CensoredError> {
        let intervals = innermost(&self.rows)?;
        let m = intervals.len();
        let zeros = || -> Result<Vec<f64>, CensoredError> {
            let mut v = Vec::new();
            v.try_reserve_exact(m)
                .map_err(|_| CensoredError::OutOfMemory)?;
            v.resize(m, 0.0);
            Ok(v)
        };
        // Counts by interval: exact readings in it, left-censored readings whose prefix
        // ends at it, right-censored readings whose suffix starts at it.
        let mut c = Counts {
            exact: zeros()?,
            ends: zeros()?,
            starts: zeros()?,
            prefix: zeros()?,
            suffix: zeros()?,
        };
        for r in &self.rows {
            if r.exact > 0 {
                let j = intervals.partition_point(|iv| iv.hi < r.x);
                c.exact[j.min(m - 1)] += r.exact as f64;
            }
            if r.left > 0 {
                let b = intervals.partition_point(|iv| iv.hi <= r.x);
                c.ends[b.saturating_sub(1)] += r.left as f64;
            }
            if r.right > 0 {
                let a =
                    intervals.partition_point(|iv| iv.lo < r.x || (iv.lo == r.x && !iv.lo_open));
                c.starts[a.min(m - 1)] += r.right as f64;
            }
        }
        let n = self.n as f64;
        let mut p = zeros()?;
        p.fill(1.0 / m as f64);
        let mut d = zeros()?;
        let mut trial = zeros()?;
        self.converged = false;
        for pass in 1..=MAX_PASSES {
            if crate::stats::cancel::requested() {
                return Err(CensoredError::Interrupted);
            }
            self.passes = pass;
            c.gradient(&p, &mut d);
            let mut total = NeumaierSum::default();
            for j in 0..m {
                trial[j] = p[j] * d[j] / n;
                total.add(trial[j]);
            }
            let total = total.value();
            let mut change: f64 = 0.0;
            for j in 0..m {
                let q = trial[j] / total;
                change = change.max((q - p[j]).abs());
                p[j] = q;
            }
            if change <= TOLERANCE {
                // Kuhn-Tucker: a zero mass must have d_j <= n; revive any that has not.
                c.gradient(&p, &mut d);
                let mut revived = false;
                for j in 0..m {
                    if p[j] == 0.0 && d[j] > n * (1.0 + KKT_SLACK) {
                        p[j] = PRUNE_BELOW / n;
                        revived = true;
                    }
                }
                if !revived {
                    self.converged = true;
                    break;
                }
                normalise(&mut p);
                continue;
            }
            if pass % PRUNE_EVERY == 0 {
                // Try setting the tiny masses of intervals without exact readings to 0;
                // keep that only if the likelihood does not drop.
                let before = c.log_likelihood(&p);
                trial.copy_from_slice(&p);
                let mut any = false;
                for (t, &e) in trial.iter_mut().zip(&c.exact) {
                    if *t > 0.0 && *t < PRUNE_BELOW / n && e == 0.0 {
                        *t = 0.0;
                        any = true;
                    }
                }
                if any {
                    normalise(&mut trial);
                    if c.log_likelihood(&trial) >= before {
                        p.copy_from_slice(&trial);
                    }
                }
            }
        }
        let mut acc = NeumaierSum::default();
        for (iv, &mass) in intervals.iter().zip(&p) {
            acc.add(mass);
            if mass > 0.0 {
                self.pieces.push(Piece {
                    cdf: acc.value().min(1.0),
                    ..*iv
                });
            }
        }
        if let Some(last) = self.pieces.last_mut() {
            last.cdf = 1.0;
        }
        Ok(())
    }

    /// The table of distinct values and counts the estimate was made from.
    pub fn rows(&self) -> &[Row] {
        &self.rows
    }

    /// The number of readings.
    pub fn n(&self) -> u64 {
        self.n
    }

    /// Which estimate this is.
    pub fn method(&self) -> Method {
        self.method
    }

    /// The intervals holding the mass, ascending, with the cdf at each right end.
    pub fn pieces(&self) -> &[Piece] {
        &self.pieces
    }

    /// The EM passes Turnbull's algorithm ran (0 for the closed forms).
    pub fn passes(&self) -> u64 {
        self.passes
    }

    /// Whether Turnbull's algorithm met [`TOLERANCE`] within [`MAX_PASSES`] (always
    /// `true` for the closed forms).
    pub fn converged(&self) -> bool {
        self.converged
    }

    /// Whether any reading is censored.
    pub fn has_censoring(&self) -> bool {
        self.rows.iter().any(|r| r.left > 0 || r.right > 0)
    }

    /// The index of the first piece whose right end lies above `t`.
    fn above(&self, t: f64) -> usize {
        self.pieces.partition_point(|p| p.hi <= t)
    }

    /// The cdf at `t`; `None` where the estimate does not determine it (strictly inside
    /// an interval of positive mass, including the unassigned mass beyond the last
    /// censored reading) and for NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Code};
    /// // 1, 2+: half the mass lies somewhere above 2.
    /// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Right)]).unwrap();
    /// assert_eq!((e.cdf(0.0), e.cdf(2.0), e.cdf(2.5)), (Some(0.0), Some(0.5), None));
    /// ```
    pub fn cdf(&self, t: f64) -> Option<f64> {
        if t.is_nan() {
            return None;
        }
        if t == f64::INFINITY {
            return Some(1.0);
        }
        let k = self.above(t);
        if let Some(p) = self.pieces.get(k)
            && (p.lo < t || (p.lo == t && !p.lo_open))
        {
            return None;
        }
        Some(if k == 0 { 0.0 } else { self.pieces[k - 1].cdf })
    }

    /// The p-quantile `inf {t : F(t) >= p}`: the point that carries the mass where the
    /// cdf reaches `p`; `Ok(None)` when that mass lies in an interval (its place inside is
    /// not determined) or beyond the last censored reading.
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] for `p` outside `[0, 1]`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Code};
    /// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Right)]).unwrap();
    /// assert_eq!(e.quantile(0.5), Ok(Some(1.0)));
    /// assert_eq!(e.quantile(0.6), Ok(None));
    /// ```
    pub fn quantile(&self, p: f64) -> Result<Option<f64>, StatsError> {
        let p = super::check_probability(p)?;
        let j = self.pieces.partition_point(|piece| piece.cdf < p);
        Ok(self
            .pieces
            .get(j)
            .filter(|piece| piece.is_point())
            .map(|piece| piece.lo))
    }

    /// Greenwood's pointwise `1 - alpha` interval for the cdf at `t`, on the log-log scale
    /// (see the module docs); `Ok(None)` where the cdf is undefined.
    ///
    /// # Errors
    /// [`CensoredError::AlphaOutOfRange`]; [`CensoredError::NoGreenwood`] for Turnbull's
    /// estimate.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Code};
    /// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Exact), (3.0, Code::Right)])
    ///     .unwrap();
    /// let b = e.band(1.0, 0.05).unwrap().unwrap();
    /// // S = 2/3, Greenwood: se = S sqrt(1 / (3 * 2)).
    /// assert!((b.se - 2.0 / 3.0 * (1.0f64 / 6.0).sqrt()).abs() < 1e-15);
    /// assert!(b.lower < 1.0 / 3.0 && 1.0 / 3.0 < b.upper);
    /// ```
    pub fn band(&self, t: f64, alpha: f64) -> Result<Option<GreenwoodBand>, CensoredError> {
        if !(alpha > 0.0 && alpha < 1.0) {
            return Err(CensoredError::AlphaOutOfRange(alpha));
        }
        if self.method == Method::Turnbull {
            return Err(CensoredError::NoGreenwood);
        }
        let Some(cdf) = self.cdf(t) else {
            return Ok(None);
        };
        let k = if t == f64::INFINITY {
            self.pieces.len()
        } else {
            self.above(t)
        };
        let v = self.greenwood.get(k).copied().unwrap_or(0.0);
        // G is the Kaplan-Meier survival on its own scale: S for Kaplan-Meier, F for the
        // mirror.
        let mirror = self.method == Method::Mirror;
        let g = if mirror { cdf } else { 1.0 - cdf };
        let z = normal_upper_quantile(alpha / 2.0);
        let (lo_g, hi_g, se) = if g <= 0.0 || g >= 1.0 || v == 0.0 || !v.is_finite() {
            let se = if g <= 0.0 || g >= 1.0 {
                0.0
            } else {
                g * v.sqrt()
            };
            (g, g, if se.is_finite() { se } else { 0.0 })
        } else {
            let theta = v.sqrt() / g.ln().abs();
            (
                g.powf((z * theta).exp()),
                g.powf((-z * theta).exp()),
                g * v.sqrt(),
            )
        };
        let (lower, upper) = if mirror {
            (lo_g, hi_g)
        } else {
            (1.0 - hi_g, 1.0 - lo_g)
        };
        Ok(Some(GreenwoodBand {
            cdf,
            se,
            lower: lower.clamp(0.0, 1.0),
            upper: upper.clamp(0.0, 1.0),
        }))
    }

    /// The Kolmogorov-Smirnov distances to a continuous cdf `f`, over the points where
    /// the estimate's cdf is defined: on each stretch between pieces the estimate is a
    /// constant `c`, and the largest gaps to the increasing `f` are at the stretch's ends.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Code};
    /// let e = Censored::from_readings(&[(0.5, Code::Exact), (0.7, Code::Right)]).unwrap();
    /// // Against the uniform on [0, 1]: below 0.5 the gap reaches 0.5; at 0.7 it is 0.2.
    /// let k = e.ks_distance(|t| t.clamp(0.0, 1.0));
    /// assert_eq!((k.d, k.d_minus), (0.5, 0.5));
    /// assert!((k.d_plus - 0.0).abs() < 1e-15);
    /// ```
    pub fn ks_distance(&self, f: impl Fn(f64) -> f64) -> KsDistance {
        let cdf_at = |t: f64| {
            if t == f64::NEG_INFINITY {
                0.0
            } else if t == f64::INFINITY {
                1.0
            } else {
                f(t)
            }
        };
        let (mut d_plus, mut d_minus) = (0.0f64, 0.0f64);
        let m = self.pieces.len();
        for j in 0..=m {
            let (c, a) = if j == 0 {
                (0.0, f64::NEG_INFINITY)
            } else {
                (self.pieces[j - 1].cdf, self.pieces[j - 1].hi)
            };
            let b = self.pieces.get(j).map_or(f64::INFINITY, |p| p.lo);
            for e in [a, b] {
                let gap = c - cdf_at(e);
                if !gap.is_nan() {
                    d_plus = d_plus.max(gap);
                    d_minus = d_minus.max(-gap);
                }
            }
        }
        KsDistance {
            d: d_plus.max(d_minus),
            d_plus,
            d_minus,
        }
    }

    /// The log-likelihood of the readings under the estimate: exact readings by the mass
    /// of their point, left-censored by `F(x)`, right-censored by `1 - F(x)`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::censored::{Censored, Code};
    /// let e = Censored::from_readings(&[(1.0, Code::Exact), (2.0, Code::Right)]).unwrap();
    /// assert!((e.log_likelihood() - 2.0 * 0.5f64.ln()).abs() < 1e-15);
    /// ```
    pub fn log_likelihood(&self) -> f64 {
        let mut ll = NeumaierSum::default();
        for r in &self.rows {
            if r.exact > 0 {
                let k = self.pieces.partition_point(|p| p.hi < r.x);
                let below = if k == 0 { 0.0 } else { self.pieces[k - 1].cdf };
                let mass = self.pieces.get(k).map_or(0.0, |p| p.cdf - below);
                ll.add(r.exact as f64 * mass.ln());
            }
            if r.left > 0 {
                let f = self.cdf(r.x).unwrap_or(f64::NAN);
                ll.add(r.left as f64 * f.ln());
            }
            if r.right > 0 {
                let f = self.cdf(r.x).unwrap_or(f64::NAN);
                ll.add(r.right as f64 * (1.0 - f).ln());
            }
        }
        ll.value()
    }
}

/// Greenwood's running sum `sum d_i / (n_i (n_i - d_i))`, compensated, and +inf once a
/// term is (all at risk have their event: the survival is 0 from there on).
#[derive(Debug, Default, Clone, Copy)]
struct Greenwood {
    sum: NeumaierSum,
    infinite: bool,
}

impl Greenwood {
    fn add(&mut self, n: f64, d: f64) {
        if n > d {
            self.sum.add(d / (n * (n - d)));
        } else {
            self.infinite = true;
        }
    }

    fn value(&self) -> f64 {
        if self.infinite {
            f64::INFINITY
        } else {
            self.sum.value()
        }
    }
}

/// How often Turnbull's algorithm tries to set tiny masses to 0 (every this many passes).
const PRUNE_EVERY: u64 = 100;

/// A mass below this share of one reading (`PRUNE_BELOW / n`) is a candidate for 0.
const PRUNE_BELOW: f64 = 0.1;

/// The relative slack of the Kuhn-Tucker check `d_j <= n` on zero masses.
const KKT_SLACK: f64 = 1e-9;

/// Scales masses to sum to 1 (compensated).
fn normalise(p: &mut [f64]) {
    let mut t = NeumaierSum::default();
    for &x in p.iter() {
        t.add(x);
    }
    let t = t.value();
    for x in p.iter_mut() {
        *x /= t;
    }
}

/// The readings of a Turnbull problem by interval, and scratch space for its sums.
struct Counts {
    /// Exact readings in interval j.
    exact: Vec<f64>,
    /// Left-censored readings whose set is intervals 0..=j.
    ends: Vec<f64>,
    /// Right-censored readings whose set is intervals j...
    starts: Vec<f64>,
    prefix: Vec<f64>,
    suffix: Vec<f64>,
}

impl Counts {
    /// Fills the prefix and suffix sums of the masses (compensated).
    fn sums(&mut self, p: &[f64]) {
        let mut acc = NeumaierSum::default();
        for (j, &x) in p.iter().enumerate() {
            acc.add(x);
            self.prefix[j] = acc.value();
        }
        let mut acc = NeumaierSum::default();
        for (j, &x) in p.iter().enumerate().rev() {
            acc.add(x);
            self.suffix[j] = acc.value();
        }
    }

    /// `d_j = sum_i w_i alpha_ij / P_i` for every interval j: the self-consistency map is
    /// `p_j d_j / n`, and the Kuhn-Tucker condition of the NPMLE is `d_j <= n`, with
    /// equality where `p_j > 0`.
    fn gradient(&mut self, p: &[f64], d: &mut [f64]) {
        self.sums(p);
        let m = p.len();
        let mut g = NeumaierSum::default();
        for j in (0..m).rev() {
            if self.ends[j] > 0.0 {
                g.add(self.ends[j] / self.prefix[j]);
            }
            d[j] = g.value();
        }
        let mut h = NeumaierSum::default();
        for j in 0..m {
            if self.starts[j] > 0.0 {
                h.add(self.starts[j] / self.suffix[j]);
            }
            let own = if self.exact[j] > 0.0 {
                self.exact[j] / p[j]
            } else {
                0.0
            };
            d[j] += h.value() + own;
        }
    }

    /// The log-likelihood of masses `p` (minus infinity where a reading gets no mass).
    fn log_likelihood(&mut self, p: &[f64]) -> f64 {
        self.sums(p);
        let mut ll = NeumaierSum::default();
        for (j, &x) in p.iter().enumerate() {
            if self.exact[j] > 0.0 {
                ll.add(self.exact[j] * x.ln());
            }
            if self.ends[j] > 0.0 {
                ll.add(self.ends[j] * self.prefix[j].ln());
            }
            if self.starts[j] > 0.0 {
                ll.add(self.starts[j] * self.suffix[j].ln());
            }
        }
        let v = ll.value();
        if v.is_nan() { f64::NEG_INFINITY } else { v }
    }
}

/// Turnbull's innermost intervals of the readings' sets (see the module docs), ascending,
/// with `cdf` left at 0.
fn innermost(rows: &[Row]) -> Result<Vec<Piece>, CensoredError> {
    // An end: its place (value, then 0 at the value or 1 just above it) and whether it is
    // a right end. Left ends sort before right ends at the same place.
    let mut ends: Vec<(f64, u8, bool)> = Vec::new();
    ends.try_reserve(3 * rows.len() + 2)
        .map_err(|_| CensoredError::OutOfMemory)?;
    if rows.iter().any(|r| r.left > 0) {
        ends.push((f64::NEG_INFINITY, 0, false));
    }
    for r in rows {
        if r.exact > 0 {
            ends.push((r.x, 0, false));
            ends.push((r.x, 0, true));
        }
        if r.left > 0 {
            ends.push((r.x, 0, true));
        }
        if r.right > 0 {
            ends.push((r.x, 1, false));
        }
    }
    if rows.iter().any(|r| r.right > 0) {
        ends.push((f64::INFINITY, 0, true));
    }
    ends.sort_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)).then(a.2.cmp(&b.2)));
    let mut out = Vec::new();
    for w in ends.windows(2) {
        if !w[0].2 && w[1].2 {
            out.push(Piece {
                lo: w[0].0,
                lo_open: w[0].1 == 1,
                hi: w[1].0,
                cdf: 0.0,
            });
        }
    }
    Ok(out)
}

/// The upper `a` quantile of the standard normal, `z` with `P(Z > z) = a`.
fn normal_upper_quantile(a: f64) -> f64 {
    use statrs::distribution::{ContinuousCDF, Normal};
    Normal::standard().inverse_cdf(1.0 - a)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::sample::Sample;
    use proptest::prelude::*;

    fn readings(xs: &[(f64, i8)]) -> Vec<(f64, Code)> {
        xs.iter()
            .map(|&(x, c)| (x, Code::from_number(f64::from(c)).unwrap()))
            .collect()
    }

    #[test]
    fn kaplan_meier_by_hand() {
        // Kaplan and Meier (1958) product, worked by hand for 1, 2, 2+, 3, 4+, 5: at 1,
        // 6 at risk: S = 5/6; at 2, 5 at risk: S = 5/6 * 4/5 = 2/3; the 2+ leaves; at 3,
        // 3 at risk (3, 4+, 5): S = 2/3 * 2/3 = 4/9; at 5, 1 at risk: S = 0.
        let e = Censored::from_readings(&readings(&[
            (1.0, 0),
            (2.0, 0),
            (2.0, 1),
            (3.0, 0),
            (4.0, 1),
            (5.0, 0),
        ]))
        .unwrap();
        assert_eq!(e.method(), Method::KaplanMeier);
        let close = |a: Option<f64>, b: f64| (a.unwrap() - b).abs() < 1e-15;
        assert!(close(e.cdf(1.0), 1.0 / 6.0));
        assert!(close(e.cdf(2.5), 1.0 / 3.0));
        assert!(close(e.cdf(4.5), 5.0 / 9.0));
        assert_eq!(e.cdf(5.0), Some(1.0));
        assert_eq!(e.pieces().len(), 4);
        assert_eq!(e.quantile(0.5).unwrap(), Some(3.0));
        // Greenwood at 3 (by hand): v = 1/(6*5) + 1/(5*4) + 1/(3*2).
        let b = e.band(3.0, 0.05).unwrap().unwrap();
        let v = 1.0 / 30.0 + 1.0 / 20.0 + 1.0 / 6.0;
        assert!((b.se - 4.0 / 9.0 * f64::sqrt(v)).abs() < 1e-15);
    }

    #[test]
    fn unassigned_mass_is_undefined() {
        // Largest reading censored: mass 1/2 above 3.
        let e = Censored::from_readings(&readings(&[(1.0, 0), (3.0, 1)])).unwrap();
        assert_eq!(e.cdf(3.0), Some(0.5));
        assert_eq!(e.cdf(3.5), None);
        assert_eq!(e.cdf(f64::INFINITY), Some(1.0));
        assert_eq!(e.quantile(0.75).unwrap(), None);
        assert_eq!(e.band(4.0, 0.1).unwrap(), None);
        // The mirror: smallest reading left-censored, mass 1/2 below 1.
        let m = Censored::from_readings(&readings(&[(1.0, -1), (3.0, 0)])).unwrap();
        assert_eq!(m.method(), Method::Mirror);
        assert_eq!(
            (m.cdf(0.5), m.cdf(1.0), m.cdf(2.9)),
            (None, Some(0.5), Some(0.5))
        );
        assert_eq!(m.quantile(0.25).unwrap(), None);
        assert_eq!(m.quantile(0.75).unwrap(), Some(3.0));
    }

    #[test]
    fn mirror_ties_follow_at_or_below() {
        // An exact 2 and a reading "at or below 2": all the mass can sit at 2.
        let e = Censored::from_readings(&readings(&[(2.0, 0), (2.0, -1)])).unwrap();
        assert_eq!(e.cdf(1.9), Some(0.0));
        assert_eq!(e.cdf(2.0), Some(1.0));
        // KM: an exact 2 and a reading above 2: half the mass above 2.
        let k = Censored::from_readings(&readings(&[(2.0, 0), (2.0, 1)])).unwrap();
        assert_eq!((k.cdf(2.0), k.cdf(2.1)), (Some(0.5), None));
    }

    /// Whether piece `p` lies inside the set of a reading at `x` with code `c`.
    fn inside(p: &Piece, x: f64, c: Code) -> bool {
        match c {
            Code::Exact => p.is_point() && p.lo == x,
            Code::Left => p.hi <= x,
            Code::Right => p.lo > x || (p.lo == x && p.lo_open),
        }
    }

    /// Turnbull's conditions, checked by brute force over every innermost interval:
    /// self-consistency `p_j = (1/n) sum_i alpha_ij p_j / P_i` where `p_j > 0`, and the
    /// Kuhn-Tucker condition `sum_i alpha_ij / P_i <= n` everywhere (Gentleman and Geyer,
    /// *Biometrika* 81, 618-623, 1994, Theorem 1).
    fn check_npmle(e: &Censored, tol: f64) {
        let all = innermost(e.rows()).unwrap();
        let mass = |iv: &Piece| {
            let k = e.pieces().partition_point(|p| p.hi < iv.hi);
            match e.pieces().get(k) {
                Some(p) if p.lo == iv.lo && p.hi == iv.hi => {
                    p.cdf - if k == 0 { 0.0 } else { e.pieces()[k - 1].cdf }
                }
                _ => 0.0,
            }
        };
        let n = e.n() as f64;
        let sets: Vec<(f64, Code, f64)> = e
            .rows()
            .iter()
            .flat_map(|r| {
                [
                    (Code::Exact, r.exact),
                    (Code::Left, r.left),
                    (Code::Right, r.right),
                ]
                .into_iter()
                .filter(|&(_, w)| w > 0)
                .map(move |(c, w)| (r.x, c, w as f64))
            })
            .collect();
        let prob: Vec<f64> = sets
            .iter()
            .map(|&(x, c, _)| all.iter().filter(|iv| inside(iv, x, c)).map(mass).sum())
            .collect();
        for iv in &all {
            let d: f64 = sets
                .iter()
                .zip(&prob)
                .filter(|((x, c, _), _)| inside(iv, *x, *c))
                .map(|((_, _, w), p)| w / p)
                .sum();
            assert!(d <= n * (1.0 + tol), "Kuhn-Tucker: {d} > {n} at {iv:?}");
            let p = mass(iv);
            assert!((p * d / n - p).abs() <= tol, "self-consistency at {iv:?}");
        }
    }

    #[test]
    fn turnbull_is_self_consistent_and_bounded() {
        let e = Censored::from_readings(&readings(&[
            (1.0, 0),
            (2.0, 1),
            (3.0, -1),
            (4.0, 0),
            (2.5, 0),
            (5.0, -1),
            (0.5, -1),
            (6.0, 1),
        ]))
        .unwrap();
        assert_eq!(e.method(), Method::Turnbull);
        assert!(e.converged() && e.passes() <= MAX_PASSES);
        // The interval (2.5, 3] lies between the exact 2.5 and the left-censored 3.
        assert!(e.cdf(2.5).is_some() && e.cdf(3.0).is_some());
        assert_eq!(e.pieces().last().unwrap().cdf, 1.0);
        check_npmle(&e, 1e-9);
        // Kaplan-Meier and the mirror meet the same conditions (they are NPMLEs).
        for r in [
            readings(&[(1.0, 0), (2.0, 1), (2.0, 0), (3.0, 0), (5.0, 1)]),
            readings(&[(1.0, -1), (2.0, -1), (2.0, 0), (3.0, 0), (0.5, 0)]),
        ] {
            check_npmle(&Censored::from_readings(&r).unwrap(), 1e-12);
        }
    }

    #[test]
    fn errors_are_named() {
        assert_eq!(Code::from_number(0.5), Err(CensoredError::BadCode(0.5)));
        assert_eq!(
            Censored::from_readings(&[(f64::INFINITY, Code::Exact)]),
            Err(CensoredError::InfiniteReading(f64::INFINITY))
        );
        assert_eq!(
            Censored::from_readings(&readings(&[(1.0, -1), (2.0, -1)])),
            Err(CensoredError::NoExactReading {
                censored: 2,
                side: Code::Left
            })
        );
        assert_eq!(Censored::from_readings(&[]), Err(CensoredError::Empty));
        // Mixed censoring without exact readings is current-status data: an estimate.
        let e = Censored::from_readings(&readings(&[(1.0, -1), (2.0, 1), (3.0, -1)])).unwrap();
        assert_eq!(e.method(), Method::Turnbull);
        let t = Censored::from_readings(&readings(&[(1.0, 0), (2.0, -1), (3.0, 1)])).unwrap();
        assert_eq!(t.band(1.0, 0.05), Err(CensoredError::NoGreenwood));
    }

    proptest! {
        #[test]
        fn no_censoring_is_the_empirical_distribution(
            xs in proptest::collection::vec((-20i32..20).prop_map(|i| f64::from(i) / 4.0), 1..40),
            ts in proptest::collection::vec(-6.0f64..6.0, 1..10),
            ps in proptest::collection::vec(0.0f64..=1.0, 1..10),
        ) {
            let r: Vec<(f64, Code)> = xs.iter().map(|&x| (x, Code::Exact)).collect();
            let e = Censored::from_readings(&r).unwrap();
            let s = Sample::from_values(xs.clone()).unwrap();
            for t in ts.iter().chain(&xs) {
                prop_assert_eq!(e.cdf(*t), s.cdf(*t));
            }
            let one = crate::stats::quantile::QuantileType::new(1).unwrap();
            for p in ps {
                prop_assert_eq!(e.quantile(p).unwrap(), s.quantile(p, one).unwrap());
            }
        }

        #[test]
        fn turnbull_passes_the_kkt_check(
            xs in proptest::collection::vec(((-10i32..10), (-1i8..=1)), 2..30),
        ) {
            let r: Vec<(f64, Code)> = xs
                .iter()
                .map(|&(x, c)| (f64::from(x), Code::from_number(f64::from(c)).unwrap()))
                .collect();
            let Ok(e) = Censored::from_readings(&r) else { return Ok(()); };
            // Monotone cdf ending at 1, never NaN.
            let mut prev = 0.0;
            for p in e.pieces() {
                prop_assert!(p.cdf >= prev && p.cdf <= 1.0);
                prev = p.cdf;
            }
            prop_assert_eq!(prev, 1.0);
            prop_assert!(e.log_likelihood().is_finite());
            if e.converged() {
                check_npmle(&e, 1e-7);
            }
        }
    }
}
