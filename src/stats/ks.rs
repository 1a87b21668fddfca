//! Kolmogorov-Smirnov tests: two samples, and one sample against a fully specified cdf.
//!
//! # Statistics
//!
//! For samples `x` (size `n1`, ECDF `F1`) and `y` (size `n2`, ECDF `F2`), with `N = n1 + n2`,
//! the one-sided statistics are `D+ = max(F1 - F2)` and `D- = max(F2 - F1)` over the pooled
//! values, and the two-sided one is `D = max(D+, D-)`. The alternatives keep scipy's meaning:
//! `greater` uses `D+` (the cdf of `x` lies above that of `y` somewhere, so `x` tends to be
//! smaller), `less` uses `D-`. Both ECDFs jump at whole multiples of `1/n1` and `1/n2`, so each
//! statistic is held exactly as an integer `h` with `D = h / (n1 n2)`; p-values compare these
//! integers, never rounded reals.
//!
//! # Exact p-values by lattice paths, conditional on ties
//!
//! Under the null hypothesis, given the pooled values, every choice of which `n1` of the `N`
//! pooled values form `x` is equally likely (a permutation distribution). Walk through the
//! pooled sorted values; a value from `x` is a step right, one from `y` a step up, so a split is
//! a lattice path from `(0, 0)` to `(n1, n2)` and at point `(i, j)` the difference
//! `F1 - F2 = (i n2 - j n1) / (n1 n2)`. The statistic is read only where the ECDFs are read:
//! at the end of each block of tied values. So `P(D >= d)` is the share of paths that touch the
//! boundary `|i n2 - j n1| >= h` at a block end (Hodges 1958 for the lattice-path view of the
//! Smirnov test; Schroer and Trenkler 1995 for counting only at the ends of tie blocks, which
//! makes the p-value exact conditional on the observed tie pattern). Without ties every point is
//! a block end and this is the classical exact distribution.
//!
//! The count is done stably, as probabilities instead of binomial coefficients: the path is a
//! walk that steps right from `(i, j)` with probability `(n1 - i) / (N - i - j)` and up
//! otherwise (drawing without replacement), every entry stays in `[0, 1]`, nothing overflows,
//! and the probability of first reaching the boundary is added up, term by positive term, with
//! a compensated sum. So small p-values keep their relative precision (no `1 - (1 - p)`
//! cancellation) and sizes of several thousand per sample work: the work is at most
//! `(n1 + 1)(n2 + 1)` cell updates and the memory `n1 + 1` numbers.
//!
//! # Asymptotic p-values
//!
//! Beyond [`AUTO_EXACT_CELLS`] (or on request) the p-value is asymptotic, with the effective
//! size `en = n1 n2 / (n1 + n2)`:
//!
//! - two-sided: Kolmogorov's limit with its finite-sample correction taken from the one-sample
//!   distribution: `P(D_m >= d)` for a one-sample statistic of size `m = round(en)` (ties to
//!   even), computed by [`kolmogorov_sf`] (Simard and L'Ecuyer 2011: exact Durbin matrix where
//!   it is accurate, the Pelz-Good (1976) expansion of the Kolmogorov limit in powers of
//!   `1/sqrt(m)` elsewhere). This is also what scipy's `ks_2samp(method='asymp')` computes.
//! - one-sided: Smirnov's limit `exp(-2 z^2)`, `z = sqrt(en) d`, with Hodges' (1958,
//!   eq. 5.3) small-sample correction: `exp(-2 z^2 - 2 z (m + 2 n) / (3 sqrt(m n (m + n))))`
//!   with `m >= n` the two sizes.
//!
//! # One sample
//!
//! Against a continuous cdf `F`, `D+ = max(i/n - F(x(i)))`, `D- = max(F(x(i)) - (i-1)/n)`.
//! The two-sided distribution of `D` is evaluated as Simard and L'Ecuyer (2011) recommend:
//! closed forms of Ruben and Gambino (1982) at the extremes, the Durbin (1968) matrix in the
//! formulation of Marsaglia, Tsang and Wang (2003) for small `n d^2`, the one-sided tail
//! doubled (Miller 1956; exact for `d >= 1/2`) in the upper tail, and the Pelz-Good (1976)
//! asymptotic series for large `n`. One-sided p-values use the exact Birnbaum-Tingey (1951)
//! formula for `P(D+ >= d)`. The p-values assume the cdf was fixed before seeing the data; with
//! parameters estimated from the same data they are too large (Lilliefors 1967): see
//! [`crate::stats::lilliefors`].

use std::f64::consts::PI;
use std::fmt;

use super::sum::NeumaierSum;

/// Two-sample sizes with `n1 * n2` up to this use the exact p-value under [`PMethod::Auto`]
/// (one hundred million lattice cells: about a second at most).
pub const AUTO_EXACT_CELLS: u64 = 100_000_000;

/// The largest `n1 * n2` for which [`PMethod::Exact`] is attempted in the two-sample test;
/// beyond it the exact count would take minutes and is refused.
pub const MAX_EXACT_CELLS: u64 = 4_000_000_000;

/// The largest Durbin matrix order (`2 ceil(n d) - 1`) tried for a forced exact one-sample
/// p-value.
pub const MAX_DURBIN_ORDER: usize = 1000;

/// What can go wrong in a test kernel.
#[derive(Debug, Clone, PartialEq)]
pub enum TestError {
    /// An alternative other than `two-sided`, `less` or `greater`.
    UnknownAlternative(String),
    /// A p-value method other than `auto`, `exact` or `asymp`.
    UnknownMethod(String),
    /// A NaN among the values.
    NotANumber,
    /// A slice that should be sorted ascending is not.
    NotSorted,
    /// A sample with too few values for the test.
    TooFewValues {
        /// How many the test needs in each sample.
        needed: usize,
        /// How many the smallest sample has.
        got: usize,
    },
    /// An exact p-value was requested for samples too large to count exactly.
    ExactTooLarge {
        /// What limits it, for the message.
        detail: String,
    },
    /// A weight that is negative, infinite or NaN, or a weight list of the wrong length
    /// (shown as NaN).
    BadWeight(f64),
    /// The data admit no model of the kind asked for (a constant sample, a negative value
    /// for an exponential model); says why.
    Degenerate(String),
    /// The cdf returned something outside `[0, 1]` (or NaN).
    BadCdf {
        /// The argument.
        x: f64,
        /// What the cdf returned.
        value: f64,
    },
}

impl fmt::Display for TestError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            TestError::UnknownAlternative(s) => write!(
                f,
                "alternative must be 'two-sided', 'less' or 'greater', got '{s}'"
            ),
            TestError::UnknownMethod(s) => {
                write!(f, "method must be 'auto', 'exact' or 'asymp', got '{s}'")
            }
            TestError::NotANumber => write!(f, "values must not be NaN"),
            TestError::NotSorted => write!(f, "values must be sorted ascending"),
            TestError::TooFewValues { needed, got } => {
                write!(f, "each sample needs at least {needed} values, got {got}")
            }
            TestError::ExactTooLarge { detail } => write!(
                f,
                "the exact p-value is out of reach here ({detail}); use method 'asymp' or 'auto'"
            ),
            TestError::BadWeight(w) if w.is_nan() => {
                write!(f, "give one finite weight >= 0 per value")
            }
            TestError::BadWeight(w) => write!(f, "weights must be finite and >= 0, got {w}"),
            TestError::Degenerate(why) => write!(f, "{why}"),
            TestError::BadCdf { x, value } => write!(
                f,
                "the cdf must return a probability in [0, 1], got {value} at {x}"
            ),
        }
    }
}

impl std::error::Error for TestError {}

/// The alternative hypothesis, with scipy's meaning.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Alternative {
    /// The distributions differ: statistic `max |F1 - F2|`.
    #[default]
    TwoSided,
    /// The cdf of the first sample is below the second's somewhere (first sample tends to be
    /// larger): statistic `max(F2 - F1)`.
    Less,
    /// The cdf of the first sample is above the second's somewhere (first sample tends to be
    /// smaller): statistic `max(F1 - F2)`.
    Greater,
}

impl Alternative {
    /// Reads `two-sided` (also `two_sided`, `two.sided`), `less` or `greater`, ignoring case
    /// and surrounding spaces.
    ///
    /// # Errors
    /// [`TestError::UnknownAlternative`] for anything else.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::ks::Alternative;
    /// assert_eq!(Alternative::parse("Greater"), Ok(Alternative::Greater));
    /// assert!(Alternative::parse("bigger").is_err());
    /// ```
    pub fn parse(s: &str) -> Result<Self, TestError> {
        match s.trim().to_ascii_lowercase().as_str() {
            "two-sided" | "two_sided" | "two.sided" | "twosided" => Ok(Alternative::TwoSided),
            "less" => Ok(Alternative::Less),
            "greater" => Ok(Alternative::Greater),
            _ => Err(TestError::UnknownAlternative(s.to_string())),
        }
    }

    /// The name used in results: `two-sided`, `less` or `greater`.
    pub fn name(self) -> &'static str {
        match self {
            Alternative::TwoSided => "two-sided",
            Alternative::Less => "less",
            Alternative::Greater => "greater",
        }
    }
}

/// How to compute a p-value.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum PMethod {
    /// Exact where it is feasible, asymptotic beyond.
    #[default]
    Auto,
    /// Exact, or an error when it is out of reach.
    Exact,
    /// Asymptotic.
    Asymptotic,
}

impl PMethod {
    /// Reads `auto`, `exact`, or `asymp` (also `asymptotic`), ignoring case.
    ///
    /// # Errors
    /// [`TestError::UnknownMethod`] for anything else.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::ks::PMethod;
    /// assert_eq!(PMethod::parse("asymp"), Ok(PMethod::Asymptotic));
    /// ```
    pub fn parse(s: &str) -> Result<Self, TestError> {
        match s.trim().to_ascii_lowercase().as_str() {
            "auto" => Ok(PMethod::Auto),
            "exact" => Ok(PMethod::Exact),
            "asymp" | "asymptotic" => Ok(PMethod::Asymptotic),
            _ => Err(TestError::UnknownMethod(s.to_string())),
        }
    }
}

/// How a p-value was computed.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum MethodUsed {
    /// Exact (lattice-path count, or an exact evaluation of the one-sample distribution).
    Exact,
    /// An asymptotic formula.
    Asymptotic,
}

impl MethodUsed {
    /// `exact` or `asymptotic`.
    pub fn name(self) -> &'static str {
        match self {
            MethodUsed::Exact => "exact",
            MethodUsed::Asymptotic => "asymptotic",
        }
    }
}

/// The result of a two-sample test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsResult {
    /// The statistic for the alternative.
    pub d: f64,
    /// The p-value, in `[0, 1]`.
    pub p: f64,
    /// Size of the first sample.
    pub n1: usize,
    /// Size of the second sample.
    pub n2: usize,
    /// The alternative tested.
    pub alternative: Alternative,
    /// How the p-value was computed.
    pub method: MethodUsed,
}

/// The two-sample statistics in exact integer form, with the tie pattern of the pooled sample.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TwoSampleStatistic {
    /// Size of the first sample.
    pub n1: usize,
    /// Size of the second sample.
    pub n2: usize,
    /// `D+ * n1 * n2`: the largest `i n2 - j n1` (at least 0).
    pub plus: u64,
    /// `D- * n1 * n2`: the largest `j n1 - i n2` (at least 0).
    pub minus: u64,
    /// Sizes of the blocks of equal values in the pooled sorted sample; they sum to `n1 + n2`.
    pub blocks: Vec<usize>,
}

impl TwoSampleStatistic {
    /// The integer numerator `h` of the statistic for an alternative (`D = h / (n1 n2)`).
    pub fn numerator(&self, alternative: Alternative) -> u64 {
        match alternative {
            Alternative::TwoSided => self.plus.max(self.minus),
            Alternative::Less => self.minus,
            Alternative::Greater => self.plus,
        }
    }

    /// The statistic for an alternative.
    pub fn d(&self, alternative: Alternative) -> f64 {
        self.numerator(alternative) as f64 / (self.n1 as f64 * self.n2 as f64)
    }

    /// Whether the pooled sample has tied values.
    pub fn has_ties(&self) -> bool {
        self.blocks.len() < self.n1 + self.n2
    }
}

/// Checks that a slice is free of NaN and sorted ascending.
pub(crate) fn check_sorted(xs: &[f64]) -> Result<(), TestError> {
    if xs.iter().any(|x| x.is_nan()) {
        return Err(TestError::NotANumber);
    }
    if xs.windows(2).any(|w| w[0] > w[1]) {
        return Err(TestError::NotSorted);
    }
    Ok(())
}

/// The next pooled value of two sorted slices read up to `i` and `j`: the smaller of `x[i]`
/// and `y[j]`, `None` when both are used up.
pub(crate) fn next_pooled(x: &[f64], i: usize, y: &[f64], j: usize) -> Option<f64> {
    match (x.get(i), y.get(j)) {
        (Some(&a), Some(&b)) => Some(a.min(b)),
        (Some(&a), None) => Some(a),
        (None, Some(&b)) => Some(b),
        (None, None) => None,
    }
}

/// Computes the two-sample statistics of sorted samples `x` and `y`.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], or [`TestError::TooFewValues`] when a
/// sample is empty.
///
/// # Example
/// ```
/// use ogive::stats::ks::{two_sample_statistic, Alternative};
/// let s = two_sample_statistic(&[1.0, 2.0, 3.0], &[2.0, 4.0])?;
/// // F1 - F2 at 1, 2, 3, 4: 1/3, 1/6, 1/2, 0.
/// assert_eq!((s.plus, s.minus), (3, 0));
/// assert_eq!(s.d(Alternative::TwoSided), 0.5);
/// assert_eq!(s.blocks, vec![1, 2, 1, 1]);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn two_sample_statistic(x: &[f64], y: &[f64]) -> Result<TwoSampleStatistic, TestError> {
    check_sorted(x)?;
    check_sorted(y)?;
    let (n1, n2) = (x.len(), y.len());
    if n1 == 0 || n2 == 0 {
        return Err(TestError::TooFewValues { needed: 1, got: 0 });
    }
    let (mut i, mut j) = (0usize, 0usize);
    let (mut plus, mut minus) = (0i128, 0i128);
    let mut blocks = Vec::new();
    while i < n1 || j < n2 {
        let Some(v) = next_pooled(x, i, y, j) else {
            break;
        };
        let start = i + j;
        while i < n1 && x[i] == v {
            i += 1;
        }
        while j < n2 && y[j] == v {
            j += 1;
        }
        blocks.push(i + j - start);
        let diff = i as i128 * n2 as i128 - j as i128 * n1 as i128;
        plus = plus.max(diff);
        minus = minus.max(-diff);
    }
    Ok(TwoSampleStatistic {
        n1,
        n2,
        plus: plus as u64,
        minus: minus as u64,
        blocks,
    })
}

/// The two-sample Kolmogorov-Smirnov test on sorted samples.
///
/// With [`PMethod::Auto`] the p-value is exact (conditional on ties) when
/// `n1 * n2 <= AUTO_EXACT_CELLS`, asymptotic otherwise; [`PMethod::Exact`] counts exactly up to
/// [`MAX_EXACT_CELLS`]. See the module docs for both methods.
///
/// # Errors
/// As [`two_sample_statistic`], and [`TestError::ExactTooLarge`] for a forced exact p-value
/// beyond [`MAX_EXACT_CELLS`].
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_2samp, Alternative, PMethod, MethodUsed};
/// let r = ks_2samp(&[1.0, 2.0, 3.0], &[4.0, 5.0, 6.0], Alternative::TwoSided, PMethod::Auto)?;
/// // Complete separation: 2 of the C(6, 3) = 20 splits are as extreme.
/// assert_eq!(r.d, 1.0);
/// assert!((r.p - 0.1).abs() < 1e-15);
/// assert_eq!(r.method, MethodUsed::Exact);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_2samp(
    x: &[f64],
    y: &[f64],
    alternative: Alternative,
    method: PMethod,
) -> Result<KsResult, TestError> {
    let s = two_sample_statistic(x, y)?;
    ks_2samp_from_statistic(&s, alternative, method)
}

/// The two-sample test from statistics already computed (for callers that hold the pooled
/// tie pattern in another form).
///
/// # Errors
/// [`TestError::ExactTooLarge`] for a forced exact p-value beyond [`MAX_EXACT_CELLS`].
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_2samp_from_statistic, two_sample_statistic, Alternative, PMethod};
/// let s = two_sample_statistic(&[1.0, 2.0], &[3.0])?;
/// let r = ks_2samp_from_statistic(&s, Alternative::Greater, PMethod::Exact)?;
/// assert_eq!(r.d, 1.0);
/// assert!((r.p - 1.0 / 3.0).abs() < 1e-15);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_2samp_from_statistic(
    s: &TwoSampleStatistic,
    alternative: Alternative,
    method: PMethod,
) -> Result<KsResult, TestError> {
    let cells = s.n1 as u64 * s.n2 as u64;
    let exact = match method {
        PMethod::Auto => cells <= AUTO_EXACT_CELLS,
        PMethod::Exact => {
            if cells > MAX_EXACT_CELLS {
                return Err(TestError::ExactTooLarge {
                    detail: format!("n1 * n2 = {cells} is above {MAX_EXACT_CELLS} lattice cells"),
                });
            }
            true
        }
        PMethod::Asymptotic => false,
    };
    let h = s.numerator(alternative);
    let d = s.d(alternative);
    let p = if exact {
        exact_2samp_p(s.n1, s.n2, h, &s.blocks, alternative)
    } else {
        asymptotic_2samp_p(s.n1, s.n2, d, alternative)
    };
    Ok(KsResult {
        d,
        p,
        n1: s.n1,
        n2: s.n2,
        alternative,
        method: if exact {
            MethodUsed::Exact
        } else {
            MethodUsed::Asymptotic
        },
    })
}

/// The exact p-value `P(D >= h / (n1 n2))` over all splits of a pooled sample whose tie
/// blocks have the sizes `blocks` (in sorted order; all ones when there are no ties), by the
/// lattice-path walk of the module docs.
///
/// `blocks` must sum to `n1 + n2`; a block list that does not is treated as untied.
/// A p-value below the smallest normal double (about 2.2e-308) is returned as 0.
///
/// # Example
/// ```
/// use ogive::stats::ks::{exact_2samp_p, Alternative};
/// // n1 = n2 = 2, no ties: D = 1 happens for 2 of the 6 splits.
/// let p = exact_2samp_p(2, 2, 4, &[1, 1, 1, 1], Alternative::TwoSided);
/// assert!((p - 2.0 / 6.0).abs() < 1e-15);
/// ```
pub fn exact_2samp_p(
    n1: usize,
    n2: usize,
    h: u64,
    blocks: &[usize],
    alternative: Alternative,
) -> f64 {
    let n = n1 + n2;
    if h == 0 || n1 == 0 || n2 == 0 {
        return 1.0;
    }
    // checked[s]: whether the ECDFs are compared after s pooled values.
    let mut checked = vec![false; n + 1];
    if blocks.iter().sum::<usize>() == n {
        let mut s = 0;
        for &b in blocks {
            s += b;
            checked[s] = true;
        }
    } else {
        checked.iter_mut().for_each(|c| *c = true);
    }
    let h = h as i128;
    let (nn, nn1) = (n as i128, n1 as i128);
    // At step s the cell with i values of x has i n2 - j n1 = i N - s n1, increasing in i.
    let out_high = |i: usize, s: usize| -> bool {
        let diff = i as i128 * nn - s as i128 * nn1;
        match alternative {
            Alternative::Greater => diff >= h,
            Alternative::Less => false,
            Alternative::TwoSided => diff >= h,
        }
    };
    let out_low = |i: usize, s: usize| -> bool {
        let diff = i as i128 * nn - s as i128 * nn1;
        match alternative {
            Alternative::Greater => false,
            Alternative::Less | Alternative::TwoSided => -diff >= h,
        }
    };
    let mut cur = vec![0.0f64; n1 + 1];
    cur[0] = 1.0;
    let (mut lo, mut hi) = (0usize, 0usize);
    let mut exited = NeumaierSum::default();
    for s in 0..n {
        let inv = 1.0 / (n - s) as f64;
        let new_lo = lo.max((s + 1).saturating_sub(n2));
        let new_hi = (hi + 1).min(n1);
        // Descending, so cur[i - 1] is still the old value when cur[i] is rewritten.
        let mut i = new_hi;
        loop {
            let from_left = if i > lo && i - 1 <= hi {
                cur[i - 1] * (n1 - (i - 1)) as f64
            } else {
                0.0
            };
            let stay = if i <= hi && i >= lo {
                cur[i] * (n2 - (s - i)) as f64
            } else {
                0.0
            };
            cur[i] = (from_left + stay) * inv;
            if i == new_lo {
                break;
            }
            i -= 1;
        }
        for c in &mut cur[lo..new_lo] {
            *c = 0.0;
        }
        lo = new_lo;
        hi = new_hi;
        if checked[s + 1] {
            let mut empty = false;
            while out_high(hi, s + 1) {
                exited.add(cur[hi]);
                cur[hi] = 0.0;
                if hi == lo {
                    empty = true;
                    break;
                }
                hi -= 1;
            }
            while !empty && out_low(lo, s + 1) {
                exited.add(cur[lo]);
                cur[lo] = 0.0;
                if lo == hi {
                    empty = true;
                    break;
                }
                lo += 1;
            }
            if empty {
                return normal_or_zero(exited.value());
            }
        }
    }
    normal_or_zero(exited.value())
}

/// A probability from the lattice walk, clamped to [0, 1]. Below the smallest normal
/// double (about 2.2e-308) the walk's masses have underflowed and the digits that remain
/// are rounding noise, so such a p is reported as 0: the true value is smaller still.
fn normal_or_zero(p: f64) -> f64 {
    if p < f64::MIN_POSITIVE {
        0.0
    } else {
        p.min(1.0)
    }
}

/// The asymptotic two-sample p-value for statistic `d` (see the module docs).
///
/// # Example
/// ```
/// use ogive::stats::ks::{asymptotic_2samp_p, Alternative};
/// let p = asymptotic_2samp_p(1000, 1000, 0.05, Alternative::TwoSided);
/// assert!(p > 0.1 && p < 0.2);
/// ```
pub fn asymptotic_2samp_p(n1: usize, n2: usize, d: f64, alternative: Alternative) -> f64 {
    let (m, n) = if n1 >= n2 {
        (n1 as f64, n2 as f64)
    } else {
        (n2 as f64, n1 as f64)
    };
    let en = m * n / (m + n);
    let p = match alternative {
        Alternative::TwoSided => {
            let size = (en.round_ties_even() as u64).max(1);
            kolmogorov_sf(size, d)
        }
        Alternative::Less | Alternative::Greater => {
            let z = en.sqrt() * d;
            (-2.0 * z * z - 2.0 * z * (m + 2.0 * n) / (m * n * (m + n)).sqrt() / 3.0).exp()
        }
    };
    p.clamp(0.0, 1.0)
}

// ---------------------------------------------------------------------------------------
// One sample

/// The result of a one-sample test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsOneResult {
    /// The statistic for the alternative.
    pub d: f64,
    /// The p-value, in `[0, 1]`.
    pub p: f64,
    /// The sample size.
    pub n: usize,
    /// The alternative tested.
    pub alternative: Alternative,
    /// How the p-value was computed.
    pub method: MethodUsed,
}

/// The one-sample statistics `(D+, D-)` of a sorted sample against `cdf`.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], [`TestError::TooFewValues`] for an
/// empty sample, [`TestError::BadCdf`] when `cdf` leaves `[0, 1]`.
///
/// # Example
/// ```
/// use ogive::stats::ks::one_sample_statistic;
/// let (plus, minus) = one_sample_statistic(&[0.1, 0.6], |t| t.clamp(0.0, 1.0))?;
/// assert!((plus - 0.4).abs() < 1e-15 && (minus - 0.1).abs() < 1e-15);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn one_sample_statistic<F: Fn(f64) -> f64>(
    sorted: &[f64],
    cdf: F,
) -> Result<(f64, f64), TestError> {
    check_sorted(sorted)?;
    let n = sorted.len();
    if n == 0 {
        return Err(TestError::TooFewValues { needed: 1, got: 0 });
    }
    let nf = n as f64;
    let (mut plus, mut minus) = (0.0f64, 0.0f64);
    for (i, &x) in sorted.iter().enumerate() {
        let c = cdf(x);
        if !(0.0..=1.0).contains(&c) {
            return Err(TestError::BadCdf { x, value: c });
        }
        plus = plus.max((i + 1) as f64 / nf - c);
        minus = minus.max(c - i as f64 / nf);
    }
    Ok((plus, minus))
}

/// The one-sample Kolmogorov-Smirnov test of a sorted sample against a fully specified
/// continuous cdf.
///
/// Two-sided p-values: [`PMethod::Auto`] follows Simard and L'Ecuyer (2011) through
/// [`kolmogorov_sf`] and reports `asymptotic` only where that uses the Pelz-Good series;
/// [`PMethod::Exact`] evaluates the exact distribution (Durbin matrix of Marsaglia, Tsang and
/// Wang 2003; in the far upper tail, where `1 - cdf` would lose its digits, the doubled
/// one-sided tail, whose error there is far below the p-value) and refuses sizes whose matrix
/// order would exceed [`MAX_DURBIN_ORDER`]; [`PMethod::Asymptotic`] is Kolmogorov's limit
/// `P(K >= sqrt(n) d)`. One-sided p-values are exact (Birnbaum and Tingey 1951) unless
/// [`PMethod::Asymptotic`] asks for Smirnov's limit `exp(-2 n d^2)`.
///
/// # Errors
/// As [`one_sample_statistic`], and [`TestError::ExactTooLarge`] as described.
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_1samp, Alternative, PMethod};
/// let xs = [0.05, 0.2, 0.35, 0.5, 0.65, 0.8, 0.95];
/// let r = ks_1samp(&xs, |t| t.clamp(0.0, 1.0), Alternative::TwoSided, PMethod::Auto)?;
/// assert!(r.d < 0.1 && r.p > 0.99);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_1samp<F: Fn(f64) -> f64>(
    sorted: &[f64],
    cdf: F,
    alternative: Alternative,
    method: PMethod,
) -> Result<KsOneResult, TestError> {
    let (plus, minus) = one_sample_statistic(sorted, cdf)?;
    ks_1samp_from_statistic(sorted.len(), plus, minus, alternative, method)
}

/// The one-sample test from `(D+, D-)` already computed for a sample of size `n`.
///
/// # Errors
/// [`TestError::ExactTooLarge`] for a forced exact p-value whose Durbin matrix would be
/// larger than [`MAX_DURBIN_ORDER`]; [`TestError::TooFewValues`] when `n == 0`.
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_1samp_from_statistic, Alternative, PMethod};
/// let r = ks_1samp_from_statistic(10, 0.274, 0.1, Alternative::TwoSided, PMethod::Exact)?;
/// // Marsaglia, Tsang and Wang (2003): P(D_10 < 0.274) = 0.6284796154565043.
/// assert!((1.0 - r.p - 0.6284796154565043).abs() < 1e-14);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_1samp_from_statistic(
    n: usize,
    plus: f64,
    minus: f64,
    alternative: Alternative,
    method: PMethod,
) -> Result<KsOneResult, TestError> {
    if n == 0 {
        return Err(TestError::TooFewValues { needed: 1, got: 0 });
    }
    let nu = n as u64;
    let d = match alternative {
        Alternative::TwoSided => plus.max(minus),
        Alternative::Less => minus,
        Alternative::Greater => plus,
    };
    let (p, used) = match (alternative, method) {
        (Alternative::TwoSided, PMethod::Auto) => {
            let (p, exact) = kolmogorov(nu, d, false);
            let used = if exact {
                MethodUsed::Exact
            } else {
                MethodUsed::Asymptotic
            };
            (p, used)
        }
        (Alternative::TwoSided, PMethod::Exact) => (kolmogorov_sf_exact(nu, d)?, MethodUsed::Exact),
        (Alternative::TwoSided, PMethod::Asymptotic) => (
            kolmogorov_limit_sf((n as f64).sqrt() * d),
            MethodUsed::Asymptotic,
        ),
        (_, PMethod::Asymptotic) => ((-2.0 * n as f64 * d * d).exp(), MethodUsed::Asymptotic),
        (_, _) => (smirnov_sf(nu, d), MethodUsed::Exact),
    };
    Ok(KsOneResult {
        d,
        p: p.clamp(0.0, 1.0),
        n,
        alternative,
        method: used,
    })
}

// ---------------------------------------------------------------------------------------
// The distribution of the one-sample statistic

/// `P(D_n <= d)` for the two-sided one-sample statistic of size `n` (scipy's `kstwo.cdf`),
/// by the Simard and L'Ecuyer (2011) procedure described in the module docs.
///
/// # Example
/// ```
/// // The worked example of Marsaglia, Tsang and Wang (2003): n = 10, d = 0.274.
/// let c = ogive::stats::ks::kolmogorov_cdf(10, 0.274);
/// assert!((c - 0.6284796154565043).abs() < 1e-14);
/// ```
pub fn kolmogorov_cdf(n: u64, d: f64) -> f64 {
    kolmogorov(n, d, true).0
}

/// `P(D_n >= d)` for the two-sided one-sample statistic of size `n` (scipy's `kstwo.sf`),
/// computed directly in the upper tail so that small p-values keep their precision.
///
/// # Example
/// ```
/// let p = ogive::stats::ks::kolmogorov_sf(10, 0.274);
/// assert!((p - (1.0 - 0.6284796154565043)).abs() < 1e-14);
/// ```
pub fn kolmogorov_sf(n: u64, d: f64) -> f64 {
    kolmogorov(n, d, false).0
}

/// Which of cdf or sf to return, clipped; `true` when the value came from an exact formula.
fn pick(cdf: f64, sf: f64, want_cdf: bool, exact: bool) -> (f64, bool) {
    let v = if want_cdf { cdf } else { sf };
    (v.clamp(0.0, 1.0), exact)
}

/// Simard and L'Ecuyer (2011), returning (value, exact?).
fn kolmogorov(n: u64, x: f64, want_cdf: bool) -> (f64, bool) {
    if n == 0 || x.is_nan() {
        return (f64::NAN, false);
    }
    if x >= 1.0 {
        return pick(1.0, 0.0, want_cdf, true);
    }
    if x <= 0.0 {
        return pick(0.0, 1.0, want_cdf, true);
    }
    let nf = n as f64;
    let t = nf * x;
    if t <= 1.0 {
        // Ruben and Gambino (1982): P(D_n <= d) = n!/n^n (2 n d - 1)^n for 1/(2n) <= d <= 1/n.
        if t <= 0.5 {
            return pick(0.0, 1.0, want_cdf, true);
        }
        let c = if n <= 140 {
            (1..=n).fold(1.0, |acc, i| acc * (i as f64 / nf) * (2.0 * t - 1.0))
        } else {
            (ln_factorial_over_power(n) + nf * (2.0 * t - 1.0).ln()).exp()
        };
        return pick(c, 1.0 - c, want_cdf, true);
    }
    if t >= nf - 1.0 {
        // Ruben and Gambino (1982): P(D_n >= d) = 2 (1 - d)^n for d >= 1 - 1/n.
        let s = 2.0 * (1.0 - x).powf(nf);
        return pick(1.0 - s, s, want_cdf, true);
    }
    if x >= 0.5 {
        // D+ >= d and D- >= d cannot both hold: the tail is exactly twice the one-sided one.
        let s = 2.0 * smirnov_sf(n, x);
        return pick(1.0 - s, s, want_cdf, true);
    }
    let nxx = t * x;
    if n <= 140 {
        if nxx <= 4.0 {
            // Simard and L'Ecuyer use Durbin's matrix below 0.754693 and Pomeranz's
            // recursion up to 4; both are exact, and Durbin's matrix is used for both here.
            let c = durbin_cdf(n, x);
            return pick(c, 1.0 - c, want_cdf, true);
        }
        let s = 2.0 * smirnov_sf(n, x);
        return pick(1.0 - s, s, want_cdf, true);
    }
    if !want_cdf {
        if nxx >= 370.0 {
            return (0.0, true);
        }
        if nxx >= 2.2 {
            return pick(0.0, 2.0 * smirnov_sf(n, x), false, true);
        }
    }
    let (c, exact) = if nxx >= 18.0 {
        (1.0, true)
    } else if n <= 100_000 && nf * x.powf(1.5) <= 1.4 {
        (durbin_cdf(n, x), true)
    } else {
        (pelz_good_cdf(n, x), false)
    };
    pick(c, 1.0 - c, want_cdf, exact)
}

/// The forced-exact two-sided sf: closed forms where they apply, Durbin's matrix otherwise.
fn kolmogorov_sf_exact(n: u64, x: f64) -> Result<f64, TestError> {
    let nf = n as f64;
    let t = nf * x;
    if x <= 0.0 || x >= 0.5 || t <= 1.0 || t >= nf - 1.0 {
        return Ok(kolmogorov(n, x, false).0);
    }
    let order = 2 * (t.ceil() as usize) - 1;
    if order > MAX_DURBIN_ORDER {
        return Err(TestError::ExactTooLarge {
            detail: format!("the Durbin matrix would have order {order}, above {MAX_DURBIN_ORDER}"),
        });
    }
    let s = 1.0 - durbin_cdf(n, x);
    if s < 1e-6 {
        // Miller (1956): here P(D+ >= d and D- >= d) is negligible next to the tail.
        return Ok(2.0 * smirnov_sf(n, x));
    }
    Ok(s)
}

/// `ln(n! / n^n)` by Stirling's series with the logarithm of `n^n` removed first.
fn ln_factorial_over_power(n: u64) -> f64 {
    let nf = n as f64;
    // B_2k / (2k (2k - 1)) for k = 1..8.
    const C: [f64; 8] = [
        1.0 / 12.0,
        -1.0 / 360.0,
        1.0 / 1260.0,
        -1.0 / 1680.0,
        1.0 / 1188.0,
        -691.0 / 360_360.0,
        1.0 / 156.0,
        -3617.0 / 122_400.0,
    ];
    let r = 1.0 / nf;
    let r2 = r * r;
    let series = C.iter().rev().fold(0.0, |acc, &c| acc * r2 + c) * r;
    0.5 * nf.ln() - nf + 0.5 * (2.0 * PI).ln() + series
}

/// `P(D+_n >= d)` for the one-sided one-sample statistic (scipy's `ksone.sf`, also its
/// `special.smirnov`), by the exact Birnbaum and Tingey (1951) sum
/// `d * sum_{j=0}^{floor(n (1 - d))} C(n, j) (1 - d - j/n)^(n - j) (d + j/n)^(j - 1)`,
/// whose terms are all positive; they are summed in log-scaled form.
///
/// # Example
/// ```
/// // n = 1: P(D+ >= d) = 1 - d.
/// assert!((ogive::stats::ks::smirnov_sf(1, 0.3) - 0.7).abs() < 1e-15);
/// ```
pub fn smirnov_sf(n: u64, d: f64) -> f64 {
    if d.is_nan() {
        return f64::NAN;
    }
    if d <= 0.0 {
        return 1.0;
    }
    if d >= 1.0 {
        return 0.0;
    }
    let nf = n as f64;
    let last = (nf * (1.0 - d)).floor().min(nf) as u64;
    let mut logs = Vec::with_capacity(last as usize + 1);
    // ln C(n, j) grows to about n ln 2; a plain running sum would lose ~1e-9 relative over
    // 1e5 steps, so it is compensated.
    let mut ln_binom = NeumaierSum::default();
    for j in 0..=last {
        if j > 0 {
            ln_binom.add(((n - j + 1) as f64 / j as f64).ln());
        }
        let jf = j as f64;
        let a = (n - j) as f64 / nf - d;
        if a <= 0.0 && n > j {
            continue;
        }
        let la = if n == j { 0.0 } else { (n - j) as f64 * a.ln() };
        let lb = (jf - 1.0) * (d + jf / nf).ln();
        logs.push(ln_binom.value() + la + lb);
    }
    let Some(max) = logs.iter().copied().reduce(f64::max) else {
        return 0.0;
    };
    let mut s = NeumaierSum::default();
    for l in &logs {
        s.add((l - max).exp());
    }
    (d * s.value() * max.exp()).clamp(0.0, 1.0)
}

/// `P(K >= z)` for Kolmogorov's limiting distribution `K = lim sqrt(n) D_n` (scipy's
/// `kstwobign.sf`, also `special.kolmogorov`).
///
/// # Example
/// ```
/// // 1.3581 is the familiar 5% critical value of the limit.
/// assert!((ogive::stats::ks::kolmogorov_limit_sf(1.3581) - 0.05).abs() < 1e-4);
/// ```
pub fn kolmogorov_limit_sf(z: f64) -> f64 {
    if z.is_nan() {
        return f64::NAN;
    }
    if z <= 0.0 {
        return 1.0;
    }
    if z < 1.0 {
        1.0 - kolmogorov_limit_cdf_small(z)
    } else {
        // 2 sum_{k>=1} (-1)^(k-1) exp(-2 k^2 z^2)
        let mut s = 0.0;
        let mut sign = 1.0;
        for k in 1..=100 {
            let kf = k as f64;
            let term = (-2.0 * kf * kf * z * z).exp();
            s += sign * term;
            sign = -sign;
            if term < 1e-300 || term < s.abs() * 1e-18 {
                break;
            }
        }
        (2.0 * s).clamp(0.0, 1.0)
    }
}

/// `P(K <= z)` by the series that converges fast for small z:
/// `sqrt(2 pi) / z * sum_{k>=1} exp(-(2k - 1)^2 pi^2 / (8 z^2))`.
fn kolmogorov_limit_cdf_small(z: f64) -> f64 {
    let w = -PI * PI / (8.0 * z * z);
    let mut s = 0.0;
    for k in 1..=100 {
        let m = (2 * k - 1) as f64;
        let term = (w * m * m).exp();
        s += term;
        if term < 1e-300 || term < s * 1e-18 {
            break;
        }
    }
    ((2.0 * PI).sqrt() / z * s).clamp(0.0, 1.0)
}

/// Durbin's (1968) matrix formula for `P(D_n < d)` as Marsaglia, Tsang and Wang (2003) evaluate
/// it: with `k = ceil(n d)`, `h = k - n d` and `m = 2k - 1`, the answer is `n!/n^n` times the
/// central entry of `H^n`, raised by repeated squaring with explicit binary exponents so that
/// nothing overflows.
fn durbin_cdf(n: u64, d: f64) -> f64 {
    let nd = n as f64 * d;
    if d >= 1.0 {
        return 1.0;
    }
    if nd <= 0.5 {
        return 0.0;
    }
    let k = nd.ceil() as usize;
    let h = k as f64 - nd;
    let m = 2 * k - 1;
    // inv_fact[j] = 1 / j!
    let mut inv_fact = vec![1.0f64; m + 1];
    for j in 1..=m {
        inv_fact[j] = inv_fact[j - 1] / j as f64;
    }
    let mut hm = vec![0.0f64; m * m];
    for r in 0..m {
        for c in 0..m {
            if r + 1 >= c {
                hm[r * m + c] = inv_fact[r + 1 - c];
            }
        }
    }
    for r in 0..m {
        // First column: (1 - h^(r+1)) / (r+1)!
        hm[r * m] -= h.powi(r as i32 + 1) * inv_fact[r + 1];
        // Last row: (1 - h^(m-c)) / (m-c)!
        hm[(m - 1) * m + r] -= h.powi((m - r) as i32) * inv_fact[m - r];
    }
    if 2.0 * h - 1.0 > 0.0 {
        hm[(m - 1) * m] += (2.0 * h - 1.0).powi(m as i32) * inv_fact[m];
    }
    let center = (k - 1) * m + (k - 1);
    let (mut result, mut result_exp) = (identity(m), 0i64);
    let (mut base, mut base_exp) = (hm, 0i64);
    let mut e = n;
    while e > 0 {
        if e & 1 == 1 {
            result = matmul(&result, &base, m);
            result_exp += base_exp;
            rescale(&mut result, &mut result_exp);
        }
        e >>= 1;
        if e > 0 {
            base = matmul(&base, &base, m);
            base_exp *= 2;
            rescale(&mut base, &mut base_exp);
        }
    }
    // Multiply by n!/n^n, keeping the mantissa in range.
    let mut p = result[center];
    let mut exp = result_exp;
    let nf = n as f64;
    for i in 1..=n {
        p *= i as f64 / nf;
        if p != 0.0 && p.abs() < 1e-140 {
            let (mant, e2) = frexp(p);
            p = mant;
            exp += e2;
        }
    }
    ldexp(p, exp).clamp(0.0, 1.0)
}

fn identity(m: usize) -> Vec<f64> {
    let mut a = vec![0.0; m * m];
    for i in 0..m {
        a[i * m + i] = 1.0;
    }
    a
}

fn matmul(a: &[f64], b: &[f64], m: usize) -> Vec<f64> {
    let mut c = vec![0.0; m * m];
    for i in 0..m {
        for l in 0..m {
            let x = a[i * m + l];
            if x == 0.0 {
                continue;
            }
            let row = &b[l * m..(l + 1) * m];
            let out = &mut c[i * m..(i + 1) * m];
            for (o, &y) in out.iter_mut().zip(row) {
                *o += x * y;
            }
        }
    }
    c
}

/// Scales a matrix by a power of two so that its largest entry is near 1.
fn rescale(a: &mut [f64], exp: &mut i64) {
    let big = a.iter().fold(0.0f64, |acc, x| acc.max(x.abs()));
    if big == 0.0 || !big.is_finite() {
        return;
    }
    let (_, e) = frexp(big);
    if e.abs() > 256 {
        let f = ldexp(1.0, -e);
        a.iter_mut().for_each(|x| *x *= f);
        *exp += e;
    }
}

/// `x = mant * 2^exp` with `0.5 <= |mant| < 1` for finite non-zero `x`, read from the bits.
fn frexp(x: f64) -> (f64, i64) {
    if x == 0.0 || !x.is_finite() {
        return (x, 0);
    }
    let bits = x.to_bits();
    let biased = ((bits >> 52) & 0x7ff) as i64;
    if biased == 0 {
        // Subnormal: scale into the normal range first.
        let (m, e) = frexp(x * 2f64.powi(54));
        return (m, e - 54);
    }
    let mant = f64::from_bits((bits & !(0x7ffu64 << 52)) | (1022u64 << 52));
    (mant, biased - 1022)
}

/// `x * 2^e` in steps that never overflow or underflow before the end.
fn ldexp(mut x: f64, mut e: i64) -> f64 {
    while e > 1000 {
        x *= 2f64.powi(1000);
        e -= 1000;
    }
    while e < -1000 {
        x *= 2f64.powi(-1000);
        e += 1000;
    }
    x * 2f64.powi(e as i32)
}

/// The Pelz and Good (1976) approximation of `P(D_n <= d)`: Kolmogorov's limit plus the
/// Li-Chien and Korolyuk correction terms in `1/sqrt(n)`, `1/n`, `1/n^(3/2)`, each rewritten
/// with the Jacobi theta transformation into series that converge quickly for small
/// `z = sqrt(n) d` (as in Simard and L'Ecuyer 2011, section 2.2).
fn pelz_good_cdf(n: u64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let nf = n as f64;
    let z = nf.sqrt() * x;
    let z2 = z * z;
    let (z3, z4, z6) = (z2 * z, z2 * z2, z2 * z2 * z2);
    let qlog = -PI * PI / 8.0 / z2;
    if qlog < -708.0 {
        return 0.0;
    }
    let (pi2, pi4, pi6) = (PI * PI, PI.powi(4), PI.powi(6));
    let maxk = (16.0 * z / PI).ceil().max(1.0) as u64;
    // Sums over odd m = 2k - 1 of c(m) exp(-m^2 pi^2 / (8 z^2)).
    let mut k = [0.0f64; 4];
    for kk in 1..=maxk {
        let m = (2 * kk - 1) as f64;
        let (m2, m4, m6) = (m * m, m.powi(4), m.powi(6));
        let w = (qlog * m2).exp();
        k[0] += w;
        k[1] += (pi2 * m2 / 4.0 - z2) * w;
        k[2] += (6.0 * z6
            + 2.0 * z4
            + (2.0 * z4 - 5.0 * z2) * pi2 * m2 / 4.0
            + pi4 * (1.0 - 2.0 * z2) * m4 / 16.0)
            * w;
        k[3] += (pi6 * (5.0 - 30.0 * z2) * m6 / 64.0
            + pi4 * (-60.0 * z2 + 212.0 * z4) * m4 / 16.0
            + pi2 * (135.0 * z4 - 96.0 * z6) * m2 / 4.0
            - 30.0 * z6
            - 90.0 * z4 * z4)
            * w;
    }
    let s2p = (2.0 * PI).sqrt();
    k[0] *= s2p / z;
    k[1] *= s2p / (6.0 * z4);
    k[2] *= s2p / (72.0 * z6 * z);
    k[3] *= s2p / (6480.0 * z4 * z6);
    // Sums over all k of k^2 exp(-pi^2 k^2 / (2 z^2)).
    let (mut e2, mut e3) = (0.0, 0.0);
    for kk in 1..=maxk {
        let kf = kk as f64;
        let w = kf * kf * (-pi2 * kf * kf / 2.0 / z2).exp();
        e2 += w;
        e3 += (3.0 * z2 - pi2 * kf * kf) * w;
    }
    k[2] += e2 * pi2 * s2p / (-36.0 * z3);
    k[3] += e3 * pi2 * s2p / (216.0 * z6);
    let sn = nf.sqrt();
    (k[0] + k[1] / sn + k[2] / nf + k[3] / (nf * sn)).clamp(0.0, 1.0)
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::fixtures::{compare as fixture, floats, rel_close};

    /// Exhaustive enumeration of every split of the pooled sample: the share of splits whose
    /// statistic is at least the observed one. The reference for the exact p-value with ties.
    fn enumerate_p(x: &[f64], y: &[f64], alternative: Alternative) -> f64 {
        let mut pooled: Vec<f64> = x.iter().chain(y).copied().collect();
        pooled.sort_by(f64::total_cmp);
        let n = pooled.len();
        let n1 = x.len();
        let observed = two_sample_statistic(x, y).unwrap().numerator(alternative);
        let (mut hits, mut total) = (0u64, 0u64);
        for mask in 0u32..(1 << n) {
            if mask.count_ones() as usize != n1 {
                continue;
            }
            let (mut a, mut b) = (Vec::new(), Vec::new());
            for (k, &v) in pooled.iter().enumerate() {
                if mask >> k & 1 == 1 {
                    a.push(v);
                } else {
                    b.push(v);
                }
            }
            let s = two_sample_statistic(&a, &b).unwrap().numerator(alternative);
            total += 1;
            hits += u64::from(s >= observed);
        }
        hits as f64 / total as f64
    }

    struct Lcg(u64);
    impl Lcg {
        fn next(&mut self) -> f64 {
            self.0 = self
                .0
                .wrapping_mul(6364136223846793005)
                .wrapping_add(1442695040888963407);
            (self.0 >> 11) as f64 / (1u64 << 53) as f64
        }
    }

    #[test]
    fn exact_with_ties_equals_enumeration() {
        // Reference: exhaustive enumeration of all C(n1 + n2, n1) splits (n1 + n2 <= 16),
        // written above; tolerance 1e-12 absolute, as the issue requires.
        let mut rng = Lcg(7);
        let alts = [
            Alternative::TwoSided,
            Alternative::Less,
            Alternative::Greater,
        ];
        let mut cases = 0;
        for &(n1, n2, levels) in &[
            (3, 4, 3),
            (5, 5, 4),
            (8, 8, 5),
            (6, 10, 3),
            (1, 9, 2),
            (7, 9, 6),
            (4, 12, 4),
            (2, 2, 1),
            (8, 7, 16),
        ] {
            for _ in 0..4 {
                let mut x: Vec<f64> = (0..n1)
                    .map(|_| (rng.next() * levels as f64).floor())
                    .collect();
                let mut y: Vec<f64> = (0..n2)
                    .map(|_| (rng.next() * levels as f64 + 0.7).floor())
                    .collect();
                x.sort_by(f64::total_cmp);
                y.sort_by(f64::total_cmp);
                for alt in alts {
                    let got = ks_2samp(&x, &y, alt, PMethod::Exact).unwrap();
                    let want = enumerate_p(&x, &y, alt);
                    assert!(
                        (got.p - want).abs() <= 1e-12,
                        "{x:?} {y:?} {alt:?}: {} vs {want}",
                        got.p
                    );
                    cases += 1;
                }
            }
        }
        assert_eq!(cases, 9 * 4 * 3);
    }

    #[test]
    fn exact_is_symmetric_under_swapping_samples() {
        // By definition D+ of (x, y) is D- of (y, x), so p-values swap; tolerance 1e-13.
        let x = [0.1, 0.5, 0.9, 1.3, 2.0, 2.0, 3.1];
        let y = [0.2, 0.3, 1.0, 1.1, 2.0, 4.0, 4.5, 5.0, 6.0];
        let a = ks_2samp(&x, &y, Alternative::Greater, PMethod::Exact).unwrap();
        let b = ks_2samp(&y, &x, Alternative::Less, PMethod::Exact).unwrap();
        assert!((a.p - b.p).abs() < 1e-13);
        let a = ks_2samp(&x, &y, Alternative::TwoSided, PMethod::Exact).unwrap();
        let b = ks_2samp(&y, &x, Alternative::TwoSided, PMethod::Exact).unwrap();
        assert!((a.p - b.p).abs() < 1e-13);
    }

    #[test]
    fn equal_sizes_match_the_closed_form() {
        // For n1 = n2 = n without ties, P(D+ >= h/n) = C(2n, n - h) / C(2n, n) (Gnedenko and
        // Korolyuk 1951, as in Hodges 1958); computed here as a product, tolerance 1e-13 rel.
        let n = 30usize;
        for h in 1..=n {
            let want: f64 = (0..h)
                .map(|j| (n - j) as f64 / (n + j + 1) as f64)
                .product();
            let got = exact_2samp_p(n, n, (h * n) as u64, &vec![1; 2 * n], Alternative::Greater);
            assert!((got - want).abs() <= 1e-13 * want, "{h}: {got} vs {want}");
        }
    }

    #[test]
    fn marsaglia_tsang_wang_worked_example() {
        // Marsaglia, Tsang and Wang (2003), section 3: P(D_10 < 0.274) = 0.6284796154565043
        // (also scipy.stats.kstwo.cdf(0.274, 10)); tolerance 1e-14 absolute.
        assert!((durbin_cdf(10, 0.274) - 0.6284796154565043).abs() < 1e-14);
        assert!((kolmogorov_cdf(10, 0.274) - 0.6284796154565043).abs() < 1e-14);
    }

    #[test]
    fn limit_series_agree_where_both_converge() {
        // The two classical series for Kolmogorov's limit must agree (same function,
        // Jacobi theta identity); tolerance 1e-14.
        for z in [0.8, 0.9, 1.0, 1.1, 1.2] {
            let small = 1.0 - kolmogorov_limit_cdf_small(z);
            let mut large = 0.0;
            for k in 1..50 {
                let kf = k as f64;
                large += 2.0 * (-1f64).powi(k - 1) * (-2.0 * kf * kf * z * z).exp();
            }
            assert!((small - large).abs() < 1e-14, "{z}");
        }
    }

    #[test]
    fn frexp_and_ldexp_round_trip() {
        for x in [1.0, 0.75, 3.0e-200, 7.0e250, 1.0e-310] {
            let (m, e) = frexp(x);
            assert!((0.5..1.0).contains(&m.abs()), "{x}");
            assert_eq!(ldexp(m, e), x);
        }
    }

    #[test]
    fn stirling_matches_direct_product() {
        // ln(n!/n^n) against a direct log-sum for n = 150; tolerance 1e-11 relative.
        let n = 150u64;
        let direct: f64 = (1..=n).map(|i| (i as f64 / n as f64).ln()).sum();
        assert!((ln_factorial_over_power(n) - direct).abs() < 1e-11 * direct.abs());
    }

    #[test]
    fn two_sample_matches_scipy_ks_2samp() {
        // scipy.stats.ks_2samp(x, y, alternative=A, method=M) for M in exact, asymp and all
        // three alternatives, on samples without ties; tolerance 1e-10 relative on p and
        // 1e-14 relative on d.
        let f = fixture();
        let mut checked = 0;
        for case in f["ks2"].as_array().unwrap() {
            let (x, y) = (floats(&case["x"]), floats(&case["y"]));
            for r in case["results"].as_array().unwrap() {
                let alt = Alternative::parse(r["alternative"].as_str().unwrap()).unwrap();
                let method = PMethod::parse(r["method"].as_str().unwrap()).unwrap();
                let got = ks_2samp(&x, &y, alt, method).unwrap();
                let (d, p) = (r["d"].as_f64().unwrap(), r["p"].as_f64().unwrap());
                assert!(rel_close(got.d, d, 1e-14), "d {} vs {d}", got.d);
                assert!(
                    rel_close(got.p, p, 1e-10),
                    "n1={} n2={} {alt:?} {method:?}: p {} vs {p}",
                    x.len(),
                    y.len(),
                    got.p
                );
                checked += 1;
            }
        }
        assert_eq!(checked, 33 * 6);
    }

    #[test]
    fn kolmogorov_distribution_matches_scipy_kstwo() {
        // scipy.stats.kstwo.cdf(d, n) and kstwo.sf(d, n) over every regime of Simard and
        // L'Ecuyer (n from 1 to 400000); tolerance 1e-10 relative on each of cdf and sf.
        let f = fixture();
        for case in f["kstwo"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            let (cdf, sf) = (case["cdf"].as_f64().unwrap(), case["sf"].as_f64().unwrap());
            let (gc, gs) = (kolmogorov_cdf(n, d), kolmogorov_sf(n, d));
            assert!(rel_close(gc, cdf, 1e-10), "cdf n={n} d={d}: {gc} vs {cdf}");
            assert!(rel_close(gs, sf, 1e-10), "sf n={n} d={d}: {gs} vs {sf}");
        }
    }

    #[test]
    fn forced_exact_one_sample_matches_scipy_where_scipy_is_exact() {
        // scipy.stats.kstwo.sf(d, n) for n <= 140, where scipy's evaluation is exact (Durbin,
        // Pomeranz, or the doubled one-sided tail); tolerance 1e-9 relative (the doubled tail
        // is Miller's approximation when d < 1/2 and n d^2 > 4).
        let f = fixture();
        for case in f["kstwo"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            if n > 140 {
                continue;
            }
            let sf = case["sf"].as_f64().unwrap();
            let got = kolmogorov_sf_exact(n, d).unwrap();
            assert!(rel_close(got, sf, 1e-9), "n={n} d={d}: {got} vs {sf}");
        }
    }

    #[test]
    fn smirnov_matches_scipy_ksone() {
        // scipy.stats.ksone.sf(d, n); tolerance 1e-11 relative.
        let f = fixture();
        for case in f["ksone"].as_array().unwrap() {
            let n = case["n"].as_u64().unwrap();
            let d = case["d"].as_f64().unwrap();
            let want = case["sf"].as_f64().unwrap();
            let got = smirnov_sf(n, d);
            assert!(rel_close(got, want, 1e-11), "n={n} d={d}: {got} vs {want}");
        }
    }

    #[test]
    fn limit_matches_scipy_kstwobign() {
        // scipy.stats.kstwobign.sf(z); tolerance 1e-12 relative.
        let f = fixture();
        for case in f["kstwobign"].as_array().unwrap() {
            let z = case["z"].as_f64().unwrap();
            let want = case["sf"].as_f64().unwrap();
            let got = kolmogorov_limit_sf(z);
            assert!(rel_close(got, want, 1e-12), "z={z}: {got} vs {want}");
        }
    }

    #[test]
    fn one_sample_test_matches_scipy_ks_1samp() {
        // scipy.stats.ks_1samp(x, scipy.stats.expon(scale=1.0).cdf, alternative=A, method=M);
        // the cdf here is the same formula, -expm1(-x) for x >= 0. Tolerance 1e-10 relative
        // on p, 1e-13 relative on d.
        let f = fixture();
        for case in f["ks1"].as_array().unwrap() {
            let x = floats(&case["x"]);
            let cdf = |t: f64| if t <= 0.0 { 0.0 } else { -(-t).exp_m1() };
            for r in case["results"].as_array().unwrap() {
                let alt = Alternative::parse(r["alternative"].as_str().unwrap()).unwrap();
                // scipy's one-sided p-value is exact (ksone.sf) whatever the method.
                let method = match (r["method"].as_str().unwrap(), alt) {
                    ("asymp", Alternative::TwoSided) => PMethod::Asymptotic,
                    _ => PMethod::Auto,
                };
                let got = ks_1samp(&x, cdf, alt, method).unwrap();
                let (d, p) = (r["d"].as_f64().unwrap(), r["p"].as_f64().unwrap());
                assert!(rel_close(got.d, d, 1e-13), "d {} vs {d}", got.d);
                assert!(
                    rel_close(got.p, p, 1e-10),
                    "n={} {alt:?} {method:?}: {} vs {p}",
                    x.len(),
                    got.p
                );
            }
        }
    }

    fn sorted_draws(rng: &mut crate::stats::rng::Xoshiro256pp, n: usize, shift: f64) -> Vec<f64> {
        let mut v: Vec<f64> = (0..n).map(|_| rng.normal() + shift).collect();
        v.sort_by(f64::total_cmp);
        v
    }

    #[test]
    fn large_samples_exact_agrees_with_asymptotic() {
        // n1 = 3000, n2 = 2500 (the issue's size): the exact count must run (Auto picks it)
        // and agree with the asymptotic p-value to 1e-3 absolute (two-sided; see below for
        // one-sided); and neither may give 0 or 1 where the other is strictly between.
        // Reference: the asymptotic formulas of the module docs, checked against scipy above.
        let mut rng = crate::stats::rng::Xoshiro256pp::new(3000);
        for shift in [0.0, 0.03, 0.06, 0.1, 0.2, 0.6] {
            let x = sorted_draws(&mut rng, 3000, shift);
            let y = sorted_draws(&mut rng, 2500, 0.0);
            for alt in [
                Alternative::TwoSided,
                Alternative::Less,
                Alternative::Greater,
            ] {
                let e = ks_2samp(&x, &y, alt, PMethod::Auto).unwrap();
                let a = ks_2samp(&x, &y, alt, PMethod::Asymptotic).unwrap();
                assert_eq!(e.method, MethodUsed::Exact);
                // Hodges' one-sided approximation is itself off by up to 2.2e-3 at this size
                // (measured here; the exact value is checked by integer counting below), so
                // the one-sided comparison allows 3e-3.
                let tol = if alt == Alternative::TwoSided {
                    1e-3
                } else {
                    3e-3
                };
                assert!(
                    (e.p - a.p).abs() < tol,
                    "shift {shift} {alt:?}: exact {} asymptotic {}",
                    e.p,
                    a.p
                );
                let strictly_inside = |p: f64| p > 0.0 && p < 1.0;
                assert_eq!(
                    strictly_inside(e.p),
                    strictly_inside(a.p),
                    "{} {}",
                    e.p,
                    a.p
                );
            }
        }
    }

    #[test]
    fn large_exact_matches_integer_path_count() {
        // n1 = 3000, n2 = 2500, all three alternatives, p from 0.0013 to 0.64: the share of
        // boundary-touching paths counted in exact integer arithmetic by
        // tests/fixtures/gen_compare.py (count_outside); tolerance 1e-12 relative. (Its
        // two-sided values also equal scipy.stats.ks_2samp(..., method='exact'), which
        // cannot do the one-sided case at this size.)
        let f = fixture();
        for case in f["ks2_large"].as_array().unwrap() {
            let h = case["h"].as_u64().unwrap();
            let alt = Alternative::parse(case["alternative"].as_str().unwrap()).unwrap();
            let want = case["p"].as_f64().unwrap();
            let got = exact_2samp_p(3000, 2500, h, &[], alt);
            assert!(
                rel_close(got, want, 1e-12),
                "h={h} {alt:?}: {got} vs {want}"
            );
        }
    }

    #[test]
    fn calibration_under_the_null() {
        // 2000 seeded tests with both samples from one distribution. The exact p-value is
        // discrete, so the check uses the randomised p-value P(D > d) + U P(D = d), which is
        // exactly uniform when the exact distribution is right (P(D > d) is the p-value at
        // numerator h + 1). Uniformity by the one-sample KS test of this module at the 0.001
        // level (its p-values are checked against scipy above). One run with continuous data,
        // one with heavy ties (values rounded to 0.5), where the conditional p-value must be
        // just as uniform. Also the plain p-value must not be anti-conservative: the share
        // with p <= alpha is at most alpha plus 3 binomial standard errors.
        let mut rng = crate::stats::rng::Xoshiro256pp::new(2000);
        for rounding in [0.0, 0.5] {
            let mut rand_p = Vec::with_capacity(2000);
            let mut plain = Vec::with_capacity(2000);
            for t in 0..2000 {
                let alt = [
                    Alternative::TwoSided,
                    Alternative::Less,
                    Alternative::Greater,
                ][t % 3];
                let round = |v: f64| {
                    if rounding > 0.0 {
                        (v / rounding).round() * rounding
                    } else {
                        v
                    }
                };
                let mut x: Vec<f64> = (0..37).map(|_| round(rng.normal())).collect();
                let mut y: Vec<f64> = (0..53).map(|_| round(rng.normal())).collect();
                x.sort_by(f64::total_cmp);
                y.sort_by(f64::total_cmp);
                let s = two_sample_statistic(&x, &y).unwrap();
                let h = s.numerator(alt);
                let p_ge = exact_2samp_p(37, 53, h, &s.blocks, alt);
                let p_gt = exact_2samp_p(37, 53, h + 1, &s.blocks, alt);
                rand_p.push(p_gt + rng.uniform() * (p_ge - p_gt));
                plain.push(p_ge);
            }
            rand_p.sort_by(f64::total_cmp);
            let r = ks_1samp(
                &rand_p,
                |u| u.clamp(0.0, 1.0),
                Alternative::TwoSided,
                PMethod::Auto,
            )
            .unwrap();
            assert!(r.p > 0.001, "rounding {rounding}: D = {}, p = {}", r.d, r.p);
            for alpha in [0.01, 0.05, 0.1] {
                let share = plain.iter().filter(|&&p| p <= alpha).count() as f64 / 2000.0;
                let se = (alpha * (1.0 - alpha) / 2000.0).sqrt();
                assert!(share <= alpha + 3.0 * se, "{alpha}: {share}");
            }
        }
    }

    #[test]
    fn statistic_rejects_bad_input() {
        assert_eq!(
            two_sample_statistic(&[2.0, 1.0], &[1.0]),
            Err(TestError::NotSorted)
        );
        assert_eq!(
            two_sample_statistic(&[], &[1.0]),
            Err(TestError::TooFewValues { needed: 1, got: 0 })
        );
        assert_eq!(
            two_sample_statistic(&[f64::NAN], &[1.0]),
            Err(TestError::NotANumber)
        );
        assert!(matches!(
            one_sample_statistic(&[0.5], |_| 1.5),
            Err(TestError::BadCdf { .. })
        ));
    }

    #[test]
    fn complete_separation_far_below_the_double_range_is_zero() {
        // Complete separation: only the two splits that put all of one sample first reach
        // D = 1, so p = 2 / C(n1 + n2, n1) by counting. For 700 + 700 that is about 1e-420,
        // far below f64::MIN_POSITIVE: expected exactly 0 rather than subnormal noise.
        let blocks = vec![1usize; 1400];
        let p = exact_2samp_p(700, 700, 700 * 700, &blocks, Alternative::TwoSided);
        assert_eq!(p, 0.0);
        // And at 500 + 500 the value is still representable and positive: 2 / C(1000, 500)
        // = 3.7e-299 (log10 C(1000, 500) = 298.43..., from lgamma; tolerance 1e-6 relative).
        let blocks = vec![1usize; 1000];
        let p = exact_2samp_p(500, 500, 500 * 500, &blocks, Alternative::TwoSided);
        let log10_c = (ln_choose(1000, 500)) / std::f64::consts::LN_10;
        let expected = 2.0 * 10f64.powf(-log10_c);
        assert!((p - expected).abs() <= 1e-6 * expected, "{p} vs {expected}");
    }

    fn ln_choose(n: u64, k: u64) -> f64 {
        (1..=k)
            .map(|i| ((n - k + i) as f64).ln() - (i as f64).ln())
            .sum()
    }
}
