//! Univariate Gaussian mixtures: evaluation, and maximum likelihood by EM.
//!
//! A [`Mixture`] of k normal components has the density
//! `f(t) = sum_j w_j phi((t - mu_j) / sd_j) / sd_j`. [`fit_mixture`] estimates it by the
//! EM algorithm of Dempster, Laird and Rubin (1977, "Maximum likelihood from incomplete
//! data via the EM algorithm", JRSS B 39), for a given k or for the k in 1..=6 with the
//! smallest BIC (Schwarz 1978; `BIC = (3k - 1) ln n - 2 loglik`).
//!
//! How the fit is made:
//!
//! - **Exact binning.** The values are sorted and identical values merged into one point
//!   with a count. The responsibilities of a value depend only on the value, so EM on the
//!   merged points with counts as weights is exactly EM on the data; tied data (rounded
//!   measurements) get much faster.
//! - **Standardisation.** EM runs on `z = (x - mean) / sd`; the result is mapped back and
//!   the log-likelihood corrected by `-n ln sd`.
//! - **One pass per EM step.** Each step is one pass over the merged points that computes
//!   the log-likelihood of the current parameters (by log-sum-exp, so no density
//!   underflows) and accumulates the weighted counts and the first and second moments
//!   about the current means, from which the next parameters follow. Sums run in blocks
//!   of 64 points whose totals go into compensated (Neumaier) sums. The pass allocates
//!   nothing: at most [`MAX_COMPONENTS`] components live in fixed arrays.
//! - **Acceleration.** Steps are grouped in SQUAREM cycles (Varadhan and Roland 2008),
//!   an extrapolation along the EM path that is kept only when it does not lower the
//!   likelihood; see `Data::em`. The fixed points and the ascent property are EM's.
//! - **Variance floor.** A component's variance never drops below `1e-6` times the data's
//!   variance, so no component collapses onto a tie and the likelihood stays bounded.
//! - **Convergence.** A run stops when the log-likelihood is within `1e-12` per value of
//!   its maximum, as estimated from the rise of one EM step and the rate at which EM
//!   steps shrink (`rise / (1 - rate^2)`, Aitken's reasoning as in Bohning et al. 1994),
//!   so that slowly converging runs go on; or after 10 000 passes, or once a run has made
//!   `4e8` point-component evaluations (at least 100 passes: on 400,000 distinct values
//!   with two components, 500 passes, about a second), and then `converged` is false.
//!   Two nearly identical components make EM crawl along a flat ridge of the
//!   likelihood; the cap bounds that work, and the result says it stopped short.
//! - **Cancellation.** Every pass polls [`crate::stats::cancel`]; a cancelled fit stops
//!   within a pass with [`MixtureError::Interrupted`]. The estimate needs two passes (from `p0`, EM gives `p1` and `p2`); when it
//!   is met and EM converges fast (rate at most 1/2, where the estimate is at most 4/3
//!   of the measured rise and so hardly depends on the estimated rate) the run ends at
//!   once with `p1`, which is at least as good as `p0`, so a run that starts next to its
//!   maximum costs two passes; otherwise the SQUAREM cycle is completed and its end
//!   returned. Starts and candidate k are compared at `1e-8` per value; only the winner
//!   continues to `1e-12` (and none does when its last estimate already met that).
//!   `iterations` counts passes over the data (and over the thinned copy below).
//! - **Several starts.** Each k starts from the equal-count blocks of the sorted data (a
//!   quantile start) and from 49 k-means++ seedings (Arthur and Vassilvitskii 2007,
//!   "k-means++: the advantages of careful seeding") refined by Lloyd iterations, drawn
//!   from a SplitMix64 generator (Steele, Lea and Flood 2014) with fixed seeds, so the
//!   same input always gives the same fit; identical starts run once. Every start runs
//!   12 passes; the four best continue to the comparison tolerance and the best one
//!   wins (the "short EM" strategy of Biernacki, Celeux and Govaert 2003, "Choosing
//!   starting values for the EM algorithm", CSDA 41), on the thinned copy for large data
//!   (1M rows, k = 3: 0.14 s).
//! - **Small fits search further.** Twelve passes say little about where a start ends:
//!   on Old Faithful's whole-minute waiting times at k = 5 and 6 the start that reaches
//!   the best optimum ranked 30th of 50 after them, and on its eruption times at k = 6
//!   fifty seedings held no start that reaches it. So when a pass is cheap (exact
//!   values, at most 2,048 distinct values times k: 341 distinct values at k = 6) a fit
//!   draws 149 seedings, and every start, in the order of its short run, continues to
//!   `1e-6` per value (until the starts so continued have made `1e8` point-component
//!   evaluations, about half a second on such data; the first four always do) before the four best
//!   continue to the comparison tolerance. With that the fit reaches the optimum of
//!   scikit-learn's `GaussianMixture` with 50 restarts at tolerance `1e-10` at every k
//!   from 1 to 6 on the four public data sets of tests/python/test_mixture_optimum.py
//!   (and beyond it on some: MASS's geyser durations at k = 3 and 6, its galaxies at
//!   k = 4 and 6) and picks the same k by BIC. Its cost, measured in bench/optimum.md
//!   (release build, through apsw): on 82 to 299 values a fit at k = 4 to 6 takes 1 to
//!   122 ms, up to 18 times what fifty short-ranked starts took (faithful eruptions at
//!   k = 6: 7 ms before, 122 ms now), and `dist_mixture(x)` over k = 1..6 0.04 to 0.22 s;
//!   scikit-learn's reference fit takes 0.45 to 79 s, 300 to 57,000 times as long. Larger
//!   data (more distinct values than the rule admits, and every fit ranked on the
//!   thinned copy) and grouped data (rounded readings, below) keep the short-EM ranking
//!   above, unchanged.
//! - **Thinned copy.** Above 16,384 distinct values the starts are drawn, ranked and the
//!   finalists compared on a thinned copy: consecutive sorted values merged into their
//!   count-weighted mean with the total count kept, a merged run holding at most
//!   `ceil(m / 16,384)` values and spanning at most `2e-3` standardised units (or the
//!   range over 16,384 when that is wider), so at most 32,769 points. Merging a run
//!   loses only its inner spread, at most `span^2 / 4` in variance, so the thinned
//!   copy's maximum lies next to the data's: the span bound keeps the sparse tails,
//!   where runs of equal count are wide, from biasing the variances. The winner is
//!   taken on the thinned copy to `1e-15` per value (at most 100 more passes, which cost
//!   a sixtieth of a pass over a million values each), and only then runs on all the
//!   values (for a given k; with k chosen by BIC, each candidate's winner does). There
//!   it typically meets the convergence rule in the first two passes; every pass on all
//!   the values is a plain EM step or an accepted SQUAREM step, and the reported
//!   log-likelihood is that of the reported parameters on all the values.
//! - **Cost.** The values are sorted by a bucket sort ([`crate::stats::sorting`]) and their
//!   ties merged in place. Lloyd's iterations on sorted values find each part's
//!   boundaries by binary search and its sums from prefix sums; an EM pass works a block
//!   of values one component at a time over arrays, with an inlined exponential the
//!   compiler can vectorise, compiled a second time for AVX2 and chosen at run time
//!   (the same results to the bit). On a million distinct values the sort and the two
//!   passes over all values dominate; everything on the thinned copy costs about as
//!   much as three such passes.
//! - **Rounded readings.** Given the step the values were rounded to
//!   ([`fit_mixture_rounded`]), each merged point stands for the interval of that width
//!   around it and every pass is one of EM for grouped data (McLachlan and Jones 1988;
//!   see `binned.rs`), on the same merged points, starts, acceleration and rules as
//!   above. The log-likelihood, AIC and BIC are then those of the grouped data (sums of
//!   log probabilities), bounded, so BIC does not reward narrow components sitting on
//!   single grid values. The one-component fit is the grouped MLE too (not the sample
//!   mean and sd, which count the rounding as spread). With k chosen by BIC, a k whose
//!   BIC would lose even at the saturated grouped log-likelihood `sum c ln(c / n)` (an
//!   upper bound for any model when the intervals do not overlap) is not fitted, nor
//!   any larger k; its candidate has no log-likelihood. A grouped pass works in
//!   probabilities, with each end's tail from one exponential and Mills' ratio, over
//!   arrays that vectorise (see `binned.rs`); values already counted (as the SQL
//!   aggregate counts rows with a resolution, [`crate::stats::tally`]) go in through
//!   [`fit_mixture_counted`] without a sort.
//! - Components are reported sorted by mean.
//!
//! # Errors and NaN policy
//!
//! Values must be finite. A k-component fit needs at least `3k - 1` values (its number
//! of parameters) and at least k distinct values; all values equal is an error; when
//! every start loses a component (its weight falls to nothing) the fit is refused
//! ([`MixtureError::NoFit`]). No fit returns NaN.

use std::fmt;

use crate::stats::resolution::GridError;

mod binned;
mod data;
mod em;
mod fit;
mod model;
mod starts;
#[cfg(test)]
mod tests;

pub use fit::{
    Candidate, MixtureFit, fit_mixture, fit_mixture_counted, fit_mixture_rounded,
    fit_mixture_sorted, fit_mixture_weighted,
};
pub use model::Mixture;

/// The most components a mixture may have.
pub const MAX_COMPONENTS: usize = 16;
/// The largest k tried when k is chosen by BIC.
pub const MAX_BIC_K: usize = 6;
/// Variance floor, relative to the data's variance.
const VARIANCE_FLOOR: f64 = 1e-6;
/// Convergence: the estimated gap to the maximum log-likelihood, per value, below which
/// EM stops; a looser one while comparing starts and candidate k (the winner then
/// continues to the strict one).
const TOLERANCE: f64 = 1e-12;
const SELECTION_TOLERANCE: f64 = 1e-8;
/// The winner of the starts on the thinned copy is taken closer to the thinned copy's
/// maximum (this tolerance, at most this many passes) before it moves to all the data.
const POLISH_TOLERANCE: f64 = 1e-15;
const POLISH_PASSES: u32 = 100;
/// A run may stop after the first two passes of a cycle only when EM's rate of
/// convergence is at most this (see `Data::em`).
const EARLY_RATE: f64 = 0.5;
/// Halvings of a SQUAREM extrapolation before falling back to plain EM.
const MAX_BACKTRACKS: usize = 8;
/// Points per block of plain summation inside a pass.
/// At most 64, so that a block's product of per-point normalisers (each in `[1, 16]`)
/// stays below `2^256`.
const BLOCK: usize = 64;
/// Iteration limits: all starts, then the finalists.
const SHORT_ITERATIONS: u32 = 12;
const MAX_ITERATIONS: u32 = 10_000;
/// Point-component evaluations one EM run may make (about a second of passes), and the
/// fewest passes a run is allowed whatever the size (see `Data::pass_budget`).
const WORK_PER_RUN: f64 = 4e8;
const MIN_RUN_PASSES: u32 = 100;
/// Number of k-means++ starts (besides the quantile start) and of finalists.
const KMEANS_STARTS: u64 = 49;
const FINALISTS: usize = 4;
/// A fit of at most this many point-component evaluations per pass (distinct values
/// times k) on exact values is small: it draws [`KMEANS_STARTS_SMALL`] k-means++ starts
/// and continues every start (within [`LOOSE_WORK`]) to [`LOOSE_TOLERANCE`] per value
/// before choosing the finalists (see `Data::best_run`).
const SMALL_FIT: usize = 2048;
const KMEANS_STARTS_SMALL: u64 = 149;
const LOOSE_TOLERANCE: f64 = 1e-6;
const LOOSE_WORK: f64 = 1e8;
/// Above this many distinct points the short runs rank the starts on a thinned copy of
/// the data (`Data::thinned`).
const THIN_TO: usize = 1 << 14;
/// The widest run of standardised values the thinned copy merges into one point
/// (unless the data's range over `THIN_TO` is wider).
const THIN_SPAN: f64 = 2e-3;
/// A component whose weighted count falls below this share of n is lost.
const LOST_WEIGHT: f64 = 1e-12;

/// One normal component of a mixture.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Component {
    /// Mixing weight, in `(0, 1]`; the weights sum to 1.
    pub weight: f64,
    /// Mean.
    pub mean: f64,
    /// Standard deviation, `> 0`.
    pub sd: f64,
}

/// Why a mixture was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum MixtureError {
    /// k outside `1..=MAX_COMPONENTS`.
    BadK(i64),
    /// An infinite (or NaN) value.
    NotFinite(f64),
    /// Fewer values than the model has parameters (`3k - 1`).
    TooFewPoints { k: usize, need: usize, got: u64 },
    /// Fewer distinct values than components.
    TooFewDistinct { k: usize, distinct: usize },
    /// Every value is the same.
    AllEqual(f64),
    /// Every start lost a component.
    NoFit { k: usize },
    /// A component field outside its domain (when building a [`Mixture`]).
    BadComponent {
        index: usize,
        field: &'static str,
        value: f64,
        rule: &'static str,
    },
    /// The weights do not sum to 1 (within 1e-9).
    WeightSum(f64),
    /// A stated resolution that does not fit the values.
    Grid(GridError),
    /// A frequency weight that is not finite and `> 0`.
    BadWeight(f64),
    /// The engine asked the fit to stop ([`crate::stats::cancel`]).
    Interrupted,
}

impl fmt::Display for MixtureError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            MixtureError::BadK(k) => write!(
                f,
                "k must be a whole number from 1 to {MAX_COMPONENTS}, got {k}; omit it to choose k \
                 by BIC"
            ),
            MixtureError::NotFinite(v) => {
                write!(f, "values must be finite, got {v}; filter such rows out")
            }
            MixtureError::TooFewPoints { k, need, got } => write!(
                f,
                "a {k}-component mixture has {need} parameters and needs at least {need} values, \
                 got {got}; use a smaller k"
            ),
            MixtureError::TooFewDistinct { k, distinct } => write!(
                f,
                "k = {k} is more than the {distinct} distinct values; use k <= {distinct}"
            ),
            MixtureError::AllEqual(v) => write!(
                f,
                "all values equal {v}, so a mixture has no maximum likelihood; give data with some \
                 spread"
            ),
            MixtureError::NoFit { k } => write!(
                f,
                "every start of the {k}-component fit lost a component; use a smaller k"
            ),
            MixtureError::BadComponent {
                index,
                field,
                value,
                rule,
            } => write!(f, "components[{index}].{field} must be {rule}, got {value}"),
            MixtureError::WeightSum(s) => write!(f, "the component weights must sum to 1, got {s}"),
            MixtureError::Grid(e) => e.fmt(f),
            MixtureError::Interrupted => f.write_str("interrupted"),
            MixtureError::BadWeight(w) => write!(
                f,
                "weights must be finite and > 0 to fit, got {w}; drop rows of weight 0"
            ),
        }
    }
}

impl std::error::Error for MixtureError {}
