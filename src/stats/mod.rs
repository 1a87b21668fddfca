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
//! - [`order`]: a multiset with order statistics in O(log n), behind the window forms of
//!   `quantile`.
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

pub mod ecdf;
pub mod moments;
pub mod order;
pub mod quantile;
pub mod sketch;
pub mod sum;

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
    /// A window removed a value it never added (a broken promise of the host).
    LeftFrameUnseen,
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
            StatsError::LeftFrameUnseen => write!(
                f,
                "a row left the window frame that never entered it; this is a bug in the \
                 host's window machinery, please report it with the query"
            ),
        }
    }
}

impl std::error::Error for StatsError {}

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
