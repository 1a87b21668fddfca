//! The mathematics of ogive: pure functions on slices of `f64`, with no SQLite and no I/O.
//!
//! Every kernel here is reached from SQL through an adapter in [`crate::functions`], and
//! from Rust directly. One file per method family:
//!
//! - [`sum`]: compensated (Neumaier) summation, used wherever n can be large, and exact
//!   summation for sums that must also subtract.
//! - [`quantile`]: the nine sample-quantile definitions of Hyndman and Fan (1996),
//!   unweighted by selection and with frequency weights.
//! - [`ecdf`]: the empirical distribution function as a running count.
//! - [`moments`]: the numeric summary behind `profile(x)`.
//! - [`sample`]: an empirical distribution, a sorted sample with optional frequency
//!   weights, evaluated with the kernels above.
//! - [`kde`]: the Gaussian kernel density estimate, bandwidth by Scott's or Silverman's
//!   rule.
//! - [`series`]: the effective sample size of serially correlated readings (Geyer's
//!   initial monotone sequence on the decile indicators).
//! - [`band`]: the Dvoretzky-Kiefer-Wolfowitz confidence band of an empirical cdf.
//! - [`censored`]: nonparametric maximum-likelihood estimates from censored readings
//!   (Kaplan-Meier, its mirror for left-censoring, Turnbull), with Greenwood's interval.
//! - [`histogram`]: equal-width histograms with the usual bin-count rules.
//! - [`grid`]: evenly spaced grids for curves and bin edges.
//! - [`ks`]: Kolmogorov-Smirnov tests, two-sample (exact p-values by lattice paths,
//!   conditional on ties) and one-sample (the exact distribution of Marsaglia, Tsang and Wang).
//! - [`gof`]: two-sample Cramer-von Mises, k-sample Anderson-Darling, Wasserstein-1.
//! - [`lilliefors`]: Kolmogorov-Smirnov with estimated normal or exponential parameters.
//! - [`rng`]: a seeded generator for repeatable simulations.
//! - [`cancel`]: cooperative cancellation, polled by the long kernels.
//! - [`fit`]: parametric families and their maximum-likelihood fits.
//! - [`readings`]: the same fits on rounded (binned) and censored readings.
//! - [`simplex`]: the Nelder-Mead method behind [`readings`].
//! - [`resolution`]: the step readings were rounded to, stated or found.
//! - [`incomplete_gamma`]: the regularised incomplete gamma function for large shapes
//!   (Temme's uniform asymptotic expansion), behind the gamma family of [`fit`].
//! - [`mixture`]: univariate Gaussian mixtures, fitted by EM.
//! - [`roots`]: the safeguarded root finder behind shape equations and mixture quantiles.
//! - [`order`]: a multiset with order statistics in O(log n), behind the window forms of
//!   `quantile`.
//! - [`sorting`]: a bucket sort of doubles in `total_cmp` order, for the large sort of
//!   [`mixture`].
//! - [`tally`]: counts of distinct values kept as rows arrive, for the fits on rounded
//!   readings, which need only the distinct grid values and their counts.
//! - [`sketch`]: a mergeable quantile sketch in bounded memory with a proven rank-error
//!   bound (Karnin, Lang and Liberty 2016).
//!
//! # NaN policy
//!
//! SQLite has no NaN: it stores a NaN result as NULL, so NaN never arrives from a column.
//! The kernels take the same view: inputs must be free of NaN (the adapters skip NULL,
//! and a NaN passed from Rust is a [`StatsError::NotANumber`]), `+inf` and `-inf` are ordered
//! like any other number, and a result that is undefined (for example interpolating between
//! `-inf` and `+inf`) is reported as `None`, which SQL shows as NULL.

// No `unsafe` in the mathematics but the one justified run-time dispatch of
// `mixture::Data::em_pass` (allowed there, item by item).
#![deny(unsafe_code)]

pub mod band;
pub mod cancel;
pub mod censored;
pub mod ecdf;
pub mod fit;
#[cfg(test)]
mod fixtures;
pub mod gof;
pub mod grid;
pub mod grow;
pub mod histogram;
pub mod incomplete_gamma;
pub mod kde;
pub mod ks;
pub mod lilliefors;
pub mod mixture;
pub mod moments;
pub mod order;
pub mod quantile;
pub mod readings;
pub mod resolution;
pub mod rng;
pub mod roots;
pub mod sample;
pub mod series;
pub mod simplex;
pub mod sketch;
pub mod sorting;
pub mod sum;
pub mod tally;

use std::fmt;

/// What can go wrong in a kernel. Adapters prefix the SQL function name to these messages.
#[derive(Debug, Clone, PartialEq)]
pub enum StatsError {
    /// A probability outside `[0, 1]` (or NaN).
    ProbabilityOutOfRange(f64),
    /// A quantile type outside `1..=9`.
    UnknownQuantileType(i64),
    /// A weight that is negative, infinite or NaN.
    BadWeight(f64),
    /// A NaN among the data values.
    NotANumber,
    /// Weights and values of different lengths.
    LengthMismatch { values: usize, weights: usize },
    /// Frequency weights whose sum overflows a double.
    WeightOverflow,
    /// Values that should be sorted ascending are not; `index` is the first one out of
    /// order.
    NotSorted { index: usize },
    /// A significance level outside `(0, 1)`.
    AlphaOutOfRange(f64),
    /// A kernel bandwidth that is not a positive finite number.
    BadBandwidth(f64),
    /// A bandwidth rule name that ogive does not know.
    UnknownBandwidthRule(String),
    /// A histogram bin rule name that ogive does not know.
    UnknownBinRule(String),
    /// A bin count outside `1..=histogram::MAX_BINS`.
    BadBinCount(i64),
    /// A bin rule that asks for more than `histogram::MAX_BINS` bins.
    TooManyBins { rule: &'static str, bins: f64 },
    /// A histogram of values that include an infinity (or span more than the doubles).
    InfiniteValues,
    /// More bins than there are doubles between the ends of the range.
    BinsTooNarrow { bins: usize },
    /// A grid whose ends are not finite with `lo < hi`.
    BadGridRange { lo: f64, hi: f64 },
    /// A grid size outside `2..=grid::MAX_POINTS`.
    BadGridSize(i64),
    /// A window removed a value it never added (a broken promise of the host).
    LeftFrameUnseen,
    /// A model's p-quantile (0 < p < 1) lies beyond the largest double.
    QuantileOverflow(f64),
    /// Memory ran out while holding `held` values ([`grow`]).
    OutOfMemory { held: usize },
}

impl From<grow::OutOfMemory> for StatsError {
    fn from(e: grow::OutOfMemory) -> StatsError {
        StatsError::OutOfMemory { held: e.held }
    }
}

impl fmt::Display for StatsError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            StatsError::ProbabilityOutOfRange(p) => {
                write!(f, "p must be between 0 and 1, got {p}")
            }
            StatsError::UnknownQuantileType(t) => write!(
                f,
                "type must be a whole number from 1 to 9 (Hyndman and Fan), got {t}"
            ),
            StatsError::BadWeight(w) => {
                write!(f, "weights must be finite and >= 0, got {w}")
            }
            StatsError::NotANumber => write!(f, "values must not be NaN"),
            StatsError::LengthMismatch { values, weights } => write!(
                f,
                "got {values} values but {weights} weights; give one weight per value"
            ),
            StatsError::WeightOverflow => write!(
                f,
                "the weights sum past the largest REAL (1.8e308); rescale them (divide every weight by the same factor)"
            ),
            StatsError::NotSorted { index } => write!(
                f,
                "values must be sorted ascending, but value {index} is smaller than the one before it"
            ),
            StatsError::AlphaOutOfRange(a) => {
                write!(f, "alpha must be between 0 and 1 (exclusive), got {a}")
            }
            StatsError::BadBandwidth(h) => write!(
                f,
                "bandwidth must be 'scott', 'silverman' or a positive number, got {h}"
            ),
            StatsError::UnknownBandwidthRule(s) => write!(
                f,
                "bandwidth must be 'scott', 'silverman' or a positive number, got '{}'",
                echo(s)
            ),
            StatsError::UnknownBinRule(s) => write!(
                f,
                "rule must be 'sturges', 'scott', 'fd', 'sqrt' or a whole number of bins, got '{}'",
                echo(s)
            ),
            StatsError::BadBinCount(n) => write!(
                f,
                "the number of bins must be a whole number from 1 to {}, got {n}",
                histogram::MAX_BINS
            ),
            StatsError::TooManyBins { rule, bins } => write!(
                f,
                "rule '{rule}' asks for {bins} bins, more than {}; give a whole number of bins instead",
                histogram::MAX_BINS
            ),
            StatsError::InfiniteValues => write!(
                f,
                "the distribution holds an infinite value (or its range overflows a double); a histogram needs a finite range"
            ),
            StatsError::BinsTooNarrow { bins } => write!(
                f,
                "{bins} bins would be narrower than the spacing of doubles over this range; give fewer bins"
            ),
            StatsError::BadGridRange { lo, hi } => write!(
                f,
                "lo and hi must be finite with lo < hi, got lo = {lo} and hi = {hi}"
            ),
            StatsError::BadGridSize(n) => write!(
                f,
                "n must be a whole number from 2 to {}, got {n}",
                grid::MAX_POINTS
            ),
            StatsError::QuantileOverflow(p) => write!(
                f,
                "the {p} quantile of this model lies beyond the largest REAL (1.8e308); \
                 rescale the model's parameters"
            ),
            StatsError::OutOfMemory { held } => write!(
                f,
                "ran out of memory holding {held} values; this function keeps every value of \
                 a group, so group more finely (GROUP BY, WHERE) or raise the memory limit"
            ),
            StatsError::LeftFrameUnseen => write!(
                f,
                "a row left the window frame that never entered it; this is a bug in the \
                 host's window machinery, please report it with the query"
            ),
        }
    }
}

impl std::error::Error for StatsError {}

/// The most characters of an argument an error message repeats ([`echo`]).
pub const ECHO_CHARS: usize = 40;

/// An argument as an error message repeats it: at most [`ECHO_CHARS`] characters (then
/// `...`), control characters such as NUL or a line break escaped (`\u{0}`, `\n`), so that
/// a message stays one short printable line whatever TEXT it echoes (a NUL would also
/// cut the message short in SQLite's C API).
///
/// # Example
/// ```
/// use ogive::stats::echo;
/// assert_eq!(echo("a\0b"), "a\\u{0}b");
/// assert_eq!(echo(&"x".repeat(100)), format!("{}...", "x".repeat(40)));
/// ```
pub fn echo(s: &str) -> String {
    let mut out: String = s
        .chars()
        .take(ECHO_CHARS)
        .flat_map(|c| {
            let escaped: Vec<char> = if c.is_control() {
                c.escape_default().collect()
            } else {
                vec![c]
            };
            escaped
        })
        .collect();
    if s.chars().nth(ECHO_CHARS).is_some() {
        out.push_str("...");
    }
    out
}

/// Checks that `p` is a probability.
///
/// # Errors
/// [`StatsError::ProbabilityOutOfRange`] when `p` is outside `[0, 1]` or NaN.
///
/// # Example
/// ```
/// assert!(ogive::stats::check_probability(0.5).is_ok());
/// assert!(ogive::stats::check_probability(1.5).is_err());
/// ```
pub fn check_probability(p: f64) -> Result<f64, StatsError> {
    if (0.0..=1.0).contains(&p) {
        Ok(p)
    } else {
        Err(StatsError::ProbabilityOutOfRange(p))
    }
}

/// Checks that `w` is a usable frequency weight.
///
/// # Errors
/// [`StatsError::BadWeight`] when `w` is negative, infinite or NaN.
///
/// # Example
/// ```
/// assert!(ogive::stats::check_weight(2.0).is_ok());
/// assert!(ogive::stats::check_weight(-1.0).is_err());
/// ```
pub fn check_weight(w: f64) -> Result<f64, StatsError> {
    if w.is_finite() && w >= 0.0 {
        Ok(w)
    } else {
        Err(StatsError::BadWeight(w))
    }
}
