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
//!   so that slowly converging runs go on; or after 10 000 passes (then `converged` is
//!   false). The estimate needs two passes (from `p0`, EM gives `p1` and `p2`); when it
//!   is met and EM converges fast (rate at most 1/2, where the estimate is at most 4/3
//!   of the measured rise and so hardly depends on the estimated rate) the run ends at
//!   once with `p1`, which is at least as good as `p0`, so a run that starts next to its
//!   maximum costs two passes; otherwise the SQUAREM cycle is completed and its end
//!   returned. Starts and candidate k are compared at `1e-8` per value; only the winner
//!   continues to `1e-12` (and none does when its last estimate already met that).
//!   `iterations` counts passes over the data (and over the thinned copy below).
//! - **Several starts.** Each k starts from the equal-count blocks of the sorted data (a
//!   quantile start) and from nine k-means++ seedings (Arthur and Vassilvitskii 2007,
//!   "k-means++: the advantages of careful seeding") refined by Lloyd iterations, drawn
//!   from a SplitMix64 generator (Steele, Lea and Flood 2014) with fixed seeds, so the
//!   same input always gives the same fit; identical starts run once. Every start runs
//!   12 passes; the two best continue to the comparison tolerance and the better one
//!   wins (the "short EM" strategy of Biernacki, Celeux and Govaert 2003, "Choosing starting values
//!   for the EM algorithm", CSDA 41).
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
//! - **Cost.** The values are sorted by a bucket sort ([`super::sorting`]) and their
//!   ties merged in place. Lloyd's iterations on sorted values find each part's
//!   boundaries by binary search and its sums from prefix sums; an EM pass works a block
//!   of values one component at a time over arrays, with an inlined exponential the
//!   compiler can vectorise, compiled a second time for AVX2 and chosen at run time
//!   (the same results to the bit). On a million distinct values the sort and the two
//!   passes over all values dominate; everything on the thinned copy costs about as
//!   much as three such passes.
//! - Components are reported sorted by mean.
//!
//! # Errors and NaN policy
//!
//! Values must be finite. A k-component fit needs at least `3k - 1` values (its number
//! of parameters) and at least k distinct values; all values equal is an error; when
//! every start loses a component (its weight falls to nothing) the fit is refused
//! ([`MixtureError::NoFit`]). No fit returns NaN.

use std::fmt;

use statrs::distribution::{Continuous, ContinuousCDF, Normal};

use super::StatsError;
use super::fit::information_criteria;
use super::fit::normal_cdf;
use super::roots::invert_cdf;
use super::sum::NeumaierSum;

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
/// Number of k-means++ starts (besides the quantile start) and of finalists.
const KMEANS_STARTS: u64 = 9;
const FINALISTS: usize = 2;
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
        }
    }
}

impl std::error::Error for MixtureError {}

/// A mixture of normal components.
#[derive(Debug, Clone, PartialEq)]
pub struct Mixture {
    components: Vec<Component>,
    /// The statrs normal law of each component, built once after validation.
    laws: Vec<Normal>,
}

impl Mixture {
    /// A mixture from its components, in the given order.
    ///
    /// # Errors
    /// [`MixtureError::BadK`] for no components or more than [`MAX_COMPONENTS`];
    /// [`MixtureError::BadComponent`] naming the first weight `<= 0`, sd `<= 0` or
    /// non-finite field; [`MixtureError::WeightSum`] when the weights do not sum to 1
    /// within `1e-9`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![
    ///     Component { weight: 0.5, mean: -1.0, sd: 1.0 },
    ///     Component { weight: 0.5, mean: 1.0, sd: 1.0 },
    /// ])?;
    /// assert_eq!(m.cdf(0.0), 0.5);
    /// assert_eq!(m.mean(), 0.0);
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn new(components: Vec<Component>) -> Result<Mixture, MixtureError> {
        if components.is_empty() || components.len() > MAX_COMPONENTS {
            return Err(MixtureError::BadK(components.len() as i64));
        }
        let mut total = NeumaierSum::default();
        let mut laws = Vec::with_capacity(components.len());
        for (index, c) in components.iter().enumerate() {
            let bad = |field, value, rule| MixtureError::BadComponent {
                index,
                field,
                value,
                rule,
            };
            if !(c.weight > 0.0 && c.weight <= 1.0) {
                return Err(bad("weight", c.weight, "in (0, 1]"));
            }
            if !c.mean.is_finite() {
                return Err(bad("mean", c.mean, "finite"));
            }
            if !(c.sd > 0.0 && c.sd.is_finite()) {
                return Err(bad("sd", c.sd, "finite and > 0"));
            }
            laws.push(Normal::new(c.mean, c.sd).map_err(|_| bad("sd", c.sd, "finite and > 0"))?);
            total.add(c.weight);
        }
        if (total.value() - 1.0).abs() > 1e-9 {
            return Err(MixtureError::WeightSum(total.value()));
        }
        Ok(Mixture { components, laws })
    }

    /// The components, in the order given.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let c = Component { weight: 1.0, mean: 2.0, sd: 3.0 };
    /// assert_eq!(Mixture::new(vec![c])?.components(), &[c]);
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn components(&self) -> &[Component] {
        &self.components
    }

    /// The cumulative distribution function at `t`, `sum w_j Phi((t - mu_j) / sd_j)`, in
    /// `[0, 1]`. NaN `t` gives NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![
    ///     Component { weight: 0.25, mean: 0.0, sd: 1.0 },
    ///     Component { weight: 0.75, mean: 100.0, sd: 1.0 },
    /// ])?;
    /// assert_eq!(m.cdf(50.0), 0.25);
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn cdf(&self, t: f64) -> f64 {
        let mut s = NeumaierSum::default();
        for c in &self.components {
            s.add(c.weight * normal_cdf(t, c.mean, c.sd));
        }
        let v = s.value();
        if v.is_nan() { v } else { v.clamp(0.0, 1.0) }
    }

    /// The density at `t`. NaN `t` gives NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![Component { weight: 1.0, mean: 0.0, sd: 1.0 }])?;
    /// assert!((m.pdf(0.0) - 1.0 / (2.0 * std::f64::consts::PI).sqrt()).abs() < 1e-16);
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn pdf(&self, t: f64) -> f64 {
        self.components
            .iter()
            .zip(&self.laws)
            .map(|(c, law)| c.weight * law.pdf(t))
            .sum()
    }

    /// The p-quantile: the t with `cdf(t) = p`, found by bracketed Newton-bisection
    /// ([`invert_cdf`]) between the smallest and the largest of the components'
    /// p-quantiles, which enclose it (the mixture cdf is a weighted mean of theirs).
    /// `p = 0` gives `-inf` and `p = 1` gives `+inf`.
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] for p outside `[0, 1]` or NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![
    ///     Component { weight: 0.3, mean: 0.0, sd: 1.0 },
    ///     Component { weight: 0.7, mean: 5.0, sd: 2.0 },
    /// ])?;
    /// let t = m.quantile(0.4)?;
    /// assert!((m.cdf(t) - 0.4).abs() < 1e-15);
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn quantile(&self, p: f64) -> Result<f64, StatsError> {
        let p = super::check_probability(p)?;
        if p == 0.0 {
            return Ok(f64::NEG_INFINITY);
        }
        if p == 1.0 {
            return Ok(f64::INFINITY);
        }
        // The components' p-quantiles enclose the root; statrs' standard normal quantile
        // is only approximate, and `invert_cdf` widens the interval if need be.
        let z = Normal::standard().inverse_cdf(p);
        let (mut lo, mut hi) = (f64::INFINITY, f64::NEG_INFINITY);
        for c in &self.components {
            let q = c.mean + c.sd * z;
            lo = lo.min(q);
            hi = hi.max(q);
        }
        Ok(invert_cdf(
            |t| self.cdf(t),
            |t| self.pdf(t),
            p,
            lo,
            hi,
            f64::NEG_INFINITY,
        ))
    }

    /// The mean, `sum w_j mu_j`.
    pub fn mean(&self) -> f64 {
        let mut s = NeumaierSum::default();
        for c in &self.components {
            s.add(c.weight * c.mean);
        }
        s.value()
    }

    /// The standard deviation, `sqrt(sum w_j (sd_j^2 + (mu_j - mean)^2))`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![
    ///     Component { weight: 0.5, mean: -3.0, sd: 4.0 },
    ///     Component { weight: 0.5, mean: 3.0, sd: 4.0 },
    /// ])?;
    /// assert_eq!(m.sd(), 5.0); // sqrt(16 + 9)
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn sd(&self) -> f64 {
        let m = self.mean();
        let mut s = NeumaierSum::default();
        for c in &self.components {
            s.add(c.weight * (c.sd * c.sd + (c.mean - m) * (c.mean - m)));
        }
        s.value().sqrt()
    }

    /// The index (from 0) of the component most probable for `t`, the largest
    /// `w_j phi((t - mu_j) / sd_j) / sd_j` (ties to the lower index); `None` for an
    /// infinite or NaN `t`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::mixture::{Component, Mixture};
    /// let m = Mixture::new(vec![
    ///     Component { weight: 0.5, mean: 0.0, sd: 1.0 },
    ///     Component { weight: 0.5, mean: 10.0, sd: 1.0 },
    /// ])?;
    /// assert_eq!(m.component_index(8.0), Some(1));
    /// # Ok::<(), ogive::stats::mixture::MixtureError>(())
    /// ```
    pub fn component_index(&self, t: f64) -> Option<usize> {
        if !t.is_finite() {
            return None;
        }
        let mut best = (0, f64::NEG_INFINITY);
        for (j, c) in self.components.iter().enumerate() {
            let z = (t - c.mean) / c.sd;
            let score = c.weight.ln() - c.sd.ln() - 0.5 * z * z;
            if score > best.1 {
                best = (j, score);
            }
        }
        Some(best.0)
    }
}

/// The outcome of one candidate k when k is chosen by BIC.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// Number of components.
    pub k: usize,
    /// The best log-likelihood found, `None` when every start lost a component.
    pub loglik: Option<f64>,
    /// Its BIC, `None` likewise.
    pub bic: Option<f64>,
}

/// A fitted mixture and how the fit went.
#[derive(Debug, Clone, PartialEq)]
pub struct MixtureFit {
    /// The mixture, components sorted by mean.
    pub mixture: Mixture,
    /// Number of values.
    pub n: u64,
    /// The maximised log-likelihood.
    pub loglik: f64,
    /// `2p - 2 loglik` with `p = 3k - 1`.
    pub aic: f64,
    /// `p ln n - 2 loglik`.
    pub bic: f64,
    /// Passes over the data made by the winning start (its short run included).
    pub iterations: u32,
    /// Whether the winning start met the convergence rule.
    pub converged: bool,
    /// Every k tried, in increasing order (just one when k was given).
    pub candidates: Vec<Candidate>,
}

/// Fits a Gaussian mixture with `k` components, or with the k in `1..=6` of least BIC
/// when `k` is `None`.
///
/// # Errors
/// [`MixtureError::BadK`], [`MixtureError::NotFinite`], [`MixtureError::TooFewPoints`],
/// [`MixtureError::AllEqual`], [`MixtureError::TooFewDistinct`], [`MixtureError::NoFit`];
/// see the [module documentation](self).
///
/// # Example
/// ```
/// use ogive::stats::mixture::fit_mixture;
/// let xs = [1.0, 1.2, 0.9, 1.1, 5.0, 5.2, 4.9, 5.1];
/// let fit = fit_mixture(&xs, Some(2))?;
/// let c = fit.mixture.components();
/// assert!((c[0].mean - 1.05).abs() < 1e-6 && (c[1].mean - 5.05).abs() < 1e-6);
/// # Ok::<(), ogive::stats::mixture::MixtureError>(())
/// ```
pub fn fit_mixture(xs: &[f64], k: Option<usize>) -> Result<MixtureFit, MixtureError> {
    fit(xs, k, THIN_TO)
}

/// [`fit_mixture`], ranking the starts on at most `thin_to` merged values.
fn fit(xs: &[f64], k: Option<usize>, thin_to: usize) -> Result<MixtureFit, MixtureError> {
    if let Some(k) = k
        && !(1..=MAX_COMPONENTS).contains(&k)
    {
        return Err(MixtureError::BadK(k as i64));
    }
    if let Some(&bad) = xs.iter().find(|x| !x.is_finite()) {
        return Err(MixtureError::NotFinite(bad));
    }
    let n = xs.len() as u64;
    let need = |k: usize| 3 * k - 1;
    let first_k = k.unwrap_or(1);
    if n < need(first_k) as u64 {
        return Err(MixtureError::TooFewPoints {
            k: first_k,
            need: need(first_k),
            got: n,
        });
    }
    let data = Data::new(xs)?;
    let distinct = data.x.len();
    if distinct < first_k {
        return Err(MixtureError::TooFewDistinct {
            k: first_k,
            distinct,
        });
    }
    let ks: Vec<usize> = match k {
        Some(k) => vec![k],
        None => (1..=MAX_BIC_K)
            .filter(|&k| k <= distinct && need(k) as u64 <= n)
            .collect(),
    };
    let thin = data.thinned(thin_to);
    let mut candidates = Vec::with_capacity(ks.len());
    let mut best: Option<(f64, usize, Run)> = None;
    for &k in &ks {
        let run = data.best_run(k, thin.as_ref());
        let scored = run.map(|r| {
            let loglik = data.loglik_in_x(r.loglik);
            let (_, bic) = information_criteria(loglik, need(k), n);
            (loglik, bic, r)
        });
        candidates.push(Candidate {
            k,
            loglik: scored.map(|s| s.0),
            bic: scored.map(|s| s.1),
        });
        if let Some((_, bic, r)) = scored
            && best.as_ref().is_none_or(|(b, _, _)| bic < *b)
        {
            best = Some((bic, candidates.len() - 1, r));
        }
    }
    let k_last = *ks.last().unwrap_or(&first_k);
    let Some((_, slot, run)) = best else {
        return Err(MixtureError::NoFit { k: k_last });
    };
    let run = data.resume(run, TOLERANCE).unwrap_or(run);
    let k = run.params.k;
    let mixture = if k == 1 {
        // One component's MLE is the sample mean and the sd with divisor n: exactly the
        // centre and scale of the standardisation (compensated sums over the values
        // themselves). Mapping the EM's standardised mean back would add the rounding
        // of every (x - centre) / scale, of the order of 1e-16 max |x - centre|.
        Mixture::new(vec![Component {
            weight: 1.0,
            mean: data.centre,
            sd: data.scale,
        }])
        .map_err(|_| MixtureError::NoFit { k })?
    } else {
        data.to_mixture(&run.params)
            .ok_or(MixtureError::NoFit { k })?
    };
    let loglik = data.loglik_in_x(run.loglik);
    let (aic, bic) = information_criteria(loglik, need(k), n);
    candidates[slot] = Candidate {
        k,
        loglik: Some(loglik),
        bic: Some(bic),
    };
    Ok(MixtureFit {
        mixture,
        n,
        loglik,
        aic,
        bic,
        iterations: run.iterations,
        converged: run.converged,
        candidates,
    })
}

/// Mixture parameters in standardised units, in fixed arrays.
#[derive(Debug, Clone, Copy)]
struct Params {
    k: usize,
    weight: [f64; MAX_COMPONENTS],
    mean: [f64; MAX_COMPONENTS],
    var: [f64; MAX_COMPONENTS],
}

/// A difference of two [`Params`] in the coordinates SQUAREM extrapolates in: log
/// weights, means, log variances (so that extrapolated weights and variances stay
/// positive).
#[derive(Debug, Clone, Copy)]
struct Step {
    k: usize,
    log_weight: [f64; MAX_COMPONENTS],
    mean: [f64; MAX_COMPONENTS],
    log_var: [f64; MAX_COMPONENTS],
}

impl Params {
    /// Whether two parameter sets are identical.
    fn same_as(&self, other: &Params) -> bool {
        self.k == other.k
            && (0..self.k).all(|j| {
                self.weight[j] == other.weight[j]
                    && self.mean[j] == other.mean[j]
                    && self.var[j] == other.var[j]
            })
    }

    /// `self - other` in extrapolation coordinates.
    fn minus(&self, other: &Params) -> Step {
        let mut d = Step {
            k: self.k,
            log_weight: [0.0; MAX_COMPONENTS],
            mean: [0.0; MAX_COMPONENTS],
            log_var: [0.0; MAX_COMPONENTS],
        };
        for j in 0..self.k {
            d.log_weight[j] = (self.weight[j] / other.weight[j]).ln();
            d.mean[j] = self.mean[j] - other.mean[j];
            d.log_var[j] = (self.var[j] / other.var[j]).ln();
        }
        d
    }

    /// `self - 2 alpha r + alpha^2 v` in extrapolation coordinates, weights renormalised
    /// and variances floored; `None` when it leaves the doubles.
    fn extrapolate(&self, r: &Step, v: &Step, alpha: f64) -> Option<Params> {
        let mut p = *self;
        let mut total = 0.0;
        for j in 0..self.k {
            let move_by = |r: f64, v: f64| -2.0 * alpha * r + alpha * alpha * v;
            p.weight[j] = self.weight[j] * move_by(r.log_weight[j], v.log_weight[j]).exp();
            p.mean[j] = self.mean[j] + move_by(r.mean[j], v.mean[j]);
            p.var[j] =
                (self.var[j] * move_by(r.log_var[j], v.log_var[j]).exp()).max(VARIANCE_FLOOR);
            total += p.weight[j];
        }
        for w in p.weight.iter_mut().take(self.k) {
            *w /= total;
        }
        let finite =
            (0..self.k).all(|j| p.weight[j] > 0.0 && p.mean[j].is_finite() && p.var[j].is_finite());
        finite.then_some(p)
    }
}

impl Step {
    /// `self - other`.
    fn minus(&self, other: &Step) -> Step {
        let mut d = *self;
        for j in 0..self.k {
            d.log_weight[j] -= other.log_weight[j];
            d.mean[j] -= other.mean[j];
            d.log_var[j] -= other.log_var[j];
        }
        d
    }

    /// The Euclidean norm.
    fn norm(&self) -> f64 {
        (0..self.k)
            .map(|j| self.log_weight[j].powi(2) + self.mean[j].powi(2) + self.log_var[j].powi(2))
            .sum::<f64>()
            .sqrt()
    }
}

/// An EM run: its parameters and their log-likelihood (standardised units, without the
/// `-n ln(2 pi) / 2` constant).
#[derive(Debug, Clone, Copy)]
struct Run {
    params: Params,
    loglik: f64,
    iterations: u32,
    converged: bool,
    /// The tolerance it was run to.
    tolerance: f64,
}

/// The merged, standardised data.
struct Data {
    /// Distinct standardised values, increasing.
    x: Vec<f64>,
    /// Their counts.
    count: Vec<f64>,
    /// `prefix_count[i]`: the count of points before `i` (length m + 1).
    prefix_count: Vec<f64>,
    /// `prefix_sum[i]`: the sum of count times value of the points before `i`.
    prefix_sum: Vec<f64>,
    /// Total count n.
    total: f64,
    /// Mean and standard deviation used to standardise.
    centre: f64,
    scale: f64,
}

impl Data {
    fn new(xs: &[f64]) -> Result<Data, MixtureError> {
        // Ties are merged in place: the distinct values move to the front of the
        // sorted copy, their counts alongside.
        let mut x = super::sorting::sorted_total(xs);
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
        let total = xs.len() as f64;
        if x.len() == 1 {
            return Err(MixtureError::AllEqual(x[0]));
        }
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
        Ok(Data::with_prefixes(x, count, total, centre, scale))
    }

    /// The data from merged standardised points, with their prefix sums.
    fn with_prefixes(x: Vec<f64>, count: Vec<f64>, total: f64, centre: f64, scale: f64) -> Data {
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
        }
    }

    /// For many distinct points, a thinned copy on which the short runs rank the starts:
    /// the sorted points in consecutive runs of at most `g` (so that at most `thin_to`
    /// runs are full) spanning at most `span` (so that at most `thin_to + 1` runs end
    /// early, their starts being more than `span` apart), each replaced by its
    /// count-weighted mean carrying the run's total count. The total
    /// count, and so the scale of the log-likelihood, is unchanged. `None` when there are
    /// at most `thin_to` distinct points (then the starts are ranked on the data).
    fn thinned(&self, thin_to: usize) -> Option<Data> {
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
        Some(Data::with_prefixes(
            x,
            count,
            self.total,
            self.centre,
            self.scale,
        ))
    }

    /// The log-likelihood in the data's units from a standardised one.
    fn loglik_in_x(&self, standardised: f64) -> f64 {
        standardised - self.total * (0.5 * (2.0 * std::f64::consts::PI).ln() + self.scale.ln())
    }

    /// The mixture in the data's units, components sorted by mean.
    fn to_mixture(&self, p: &Params) -> Option<Mixture> {
        let mut components: Vec<Component> = (0..p.k)
            .map(|j| Component {
                weight: p.weight[j],
                mean: self.centre + self.scale * p.mean[j],
                sd: self.scale * p.var[j].sqrt(),
            })
            .collect();
        components.sort_by(|a, b| a.mean.total_cmp(&b.mean).then(a.sd.total_cmp(&b.sd)));
        let total: f64 = components.iter().map(|c| c.weight).sum();
        for c in &mut components {
            c.weight /= total;
        }
        Mixture::new(components).ok()
    }

    /// The best EM run for k components over all starts, converged to the selection
    /// tolerance. When `thin` is given (see [`Data::thinned`]) the starts are drawn,
    /// ranked and the finalists compared on it; the winner is polished there (to
    /// [`POLISH_TOLERANCE`], at most [`POLISH_PASSES`] more passes) and then continues
    /// on these data.
    fn best_run(&self, k: usize, thin: Option<&Data>) -> Option<Run> {
        let tolerance = SELECTION_TOLERANCE;
        let ranking = thin.unwrap_or(self);
        let mut starts: Vec<Params> = Vec::new();
        if let Some(p) = ranking.quantile_start(k) {
            starts.push(p);
        }
        if k > 1 {
            for seed in 0..KMEANS_STARTS {
                // k-means often settles on the same partition from different seeds;
                // each distinct start runs once.
                if let Some(p) = ranking.kmeans_start(k, seed)
                    && !starts.iter().any(|q| q.same_as(&p))
                {
                    starts.push(p);
                }
            }
        }
        let mut short: Vec<Run> = starts
            .into_iter()
            .filter_map(|p| ranking.em(p, 0, SHORT_ITERATIONS, tolerance))
            .collect();
        short.sort_by(|a, b| b.loglik.total_cmp(&a.loglik));
        let best = short
            .into_iter()
            .take(FINALISTS)
            .filter_map(|r| ranking.resume(r, tolerance))
            .max_by(|a, b| a.loglik.total_cmp(&b.loglik))?;
        match thin {
            // The winner on the thinned points continues here, on all of them.
            Some(thin) => {
                let best = thin
                    .em(
                        best.params,
                        best.iterations,
                        best.iterations + POLISH_PASSES,
                        POLISH_TOLERANCE,
                    )
                    .unwrap_or(best);
                self.em(best.params, best.iterations, MAX_ITERATIONS, tolerance)
            }
            None => Some(best),
        }
    }

    /// Continues a run to `tolerance` (at most [`MAX_ITERATIONS`] passes in all).
    fn resume(&self, run: Run, tolerance: f64) -> Option<Run> {
        if run.converged && run.tolerance <= tolerance {
            Some(run)
        } else {
            self.em(run.params, run.iterations, MAX_ITERATIONS, tolerance)
        }
    }

    /// Runs EM from `start` until the estimated gap between the log-likelihood and its
    /// maximum is below `tolerance` per value, or `limit` passes in all (counting `done`
    /// already made). `None` when plain EM loses a component.
    ///
    /// Each cycle is accelerated by SQUAREM (Varadhan and Roland 2008, "Simple and
    /// globally convergent methods for accelerating the convergence of any EM
    /// algorithm", Scand. J. Statist. 35, scheme S3): from `p0`, two EM steps give `p1`
    /// and `p2`; with `r = p1 - p0`, `v = p2 - 2 p1 + p0` and `a = -|r| / |v|` the point
    /// `p0 - 2 a r + a^2 v` (in log weights, means and log variances) is tried, and kept
    /// only when its log-likelihood is at least that of `p1`, halving the extrapolation
    /// towards plain EM (`a = -1` gives `p2`) otherwise. One EM step from the kept point
    /// ends the cycle. Every cycle therefore raises the likelihood, as plain EM does, and
    /// the fixed points are those of EM.
    fn em(&self, start: Params, done: u32, limit: u32, tolerance: f64) -> Option<Run> {
        let mut passes = done;
        let (mut ll0, mut p1) = self.em_pass(&start)?;
        passes += 1;
        let mut p0 = start;
        let stop = |p: Params, loglik: f64, passes: u32, converged: bool, met: f64| {
            Some(Run {
                params: p,
                loglik,
                iterations: passes,
                converged,
                tolerance: met,
            })
        };
        loop {
            if passes + 2 > limit {
                return stop(p0, ll0, passes, false, tolerance);
            }
            let (ll1, p2) = self.em_pass(&p1)?;
            passes += 1;
            // How far p0 is from the optimum: near it, plain EM converges linearly, its
            // steps shrinking by a rate rho (estimated from two successive steps) and the
            // gaps in log-likelihood by rho^2, so the gap at p0 is about
            // (ll(p1) - ll(p0)) / (1 - rho^2) (the reasoning of Aitken's extrapolation;
            // Bohning, Dietz, Schaub, Schlattmann and Lindsay 1994, Ann. Inst. Statist.
            // Math. 46). A slowly converging run stops only when that is small.
            let first_rise = ll1 - ll0;
            let rho = p2.minus(&p1).norm() / p1.minus(&p0).norm();
            let gap = if first_rise <= 0.0 {
                0.0
            } else if rho < 1.0 {
                first_rise / (1.0 - rho * rho)
            } else {
                f64::INFINITY
            };
            if gap < tolerance * self.total && first_rise > 0.0 && rho <= EARLY_RATE {
                // p0 was within the tolerance, and p1, one EM step on, is at least as
                // good (up to rounding). A run started near its end, as the winner
                // coming from the thinned copy is, stops after two passes. Only when
                // EM converges fast: then the estimate is at most 4/3 of the measured
                // rise, so a misjudged rate matters little. A slow run (a flat ridge of
                // the likelihood, where two steps misjudge the rate) completes the
                // cycle below, whose extrapolation can still gain much. The run is
                // marked with the strict tolerance too when it meets that one.
                let met = if gap < TOLERANCE * self.total {
                    tolerance.min(TOLERANCE)
                } else {
                    tolerance
                };
                return if ll1 >= ll0 {
                    stop(p1, ll1, passes, true, met)
                } else {
                    stop(p0, ll0, passes, true, met)
                };
            }
            let mut next = p2;
            let (r, v) = (p1.minus(&p0), p2.minus(&p1).minus(&p1.minus(&p0)));
            let (nr, nv) = (r.norm(), v.norm());
            let mut alpha = if nv > 0.0 { -nr / nv } else { -1.0 };
            for _ in 0..MAX_BACKTRACKS {
                if alpha.is_nan() || alpha >= -1.0 {
                    break;
                }
                if let Some(trial) = p0.extrapolate(&r, &v, alpha)
                    && let Some((ll, stepped)) = self.em_pass(&trial)
                {
                    passes += 1;
                    if ll >= ll0 {
                        next = stepped;
                        break;
                    }
                }
                alpha = (alpha - 1.0) / 2.0;
            }
            let (ll, after) = self.em_pass(&next)?;
            passes += 1;
            if ll < ll0 {
                // A rounding-level fall keeps the earlier point.
                return stop(p0, ll0, passes, true, tolerance);
            }
            if gap < tolerance * self.total {
                // p0 was within the tolerance; the cycle's end is better still.
                return stop(next, ll, passes, true, tolerance);
            }
            (p0, ll0, p1) = (next, ll, after);
        }
    }

    /// One pass: the log-likelihood of `p` and the EM update of `p`. Sums run in blocks
    /// of [`BLOCK`] points, each block's plain sum added to a compensated total.
    ///
    /// On x86-64 processors with AVX2 the same code runs compiled for AVX2, four lanes
    /// of doubles instead of SSE2's two. The result is the same to the bit: the lanes
    /// only carry element-wise operations (IEEE 754 rounds each the same way at any
    /// width), sums stay in their written order, and Rust never fuses a multiply and an
    /// add on its own.
    fn em_pass(&self, p: &Params) -> Option<(f64, Params)> {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // The one justified `unsafe` of the mathematics: a run-time dispatch.
            #[allow(unsafe_code)]
            // SAFETY: `em_pass_avx2` requires only AVX2, which this processor has.
            return unsafe { self.em_pass_avx2(p) };
        }
        self.em_pass_portable(p)
    }

    /// [`Data::em_pass`] compiled for AVX2.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    fn em_pass_avx2(&self, p: &Params) -> Option<(f64, Params)> {
        self.em_pass_portable(p)
    }

    /// The body of [`Data::em_pass`], inlined into each compiled form.
    #[inline(always)]
    fn em_pass_portable(&self, p: &Params) -> Option<(f64, Params)> {
        let k = p.k;
        let mut log_norm = [0.0; MAX_COMPONENTS];
        let mut precision = [0.0; MAX_COMPONENTS];
        for j in 0..k {
            log_norm[j] = p.weight[j].ln() - 0.5 * p.var[j].ln();
            precision[j] = 1.0 / p.var[j];
        }
        let mut loglik = NeumaierSum::default();
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        // The block is worked component by component over arrays, so that the compiler
        // can run the exponentials of several points at once.
        let mut e = [[0.0; BLOCK]; MAX_COMPONENTS];
        for (xs, cs) in self.x.chunks(BLOCK).zip(self.count.chunks(BLOCK)) {
            let len = xs.len();
            let mut top = [f64::NEG_INFINITY; BLOCK];
            for j in 0..k {
                let (mean, norm, prec) = (p.mean[j], log_norm[j], precision[j]);
                for ((ej, t), &x) in e[j][..len].iter_mut().zip(&mut top).zip(xs) {
                    let d = x - mean;
                    *ej = norm - 0.5 * d * d * prec;
                    *t = t.max(*ej);
                }
            }
            let mut total = [0.0; BLOCK];
            for ej in e.iter_mut().take(k) {
                for ((v, t), sum) in ej[..len].iter_mut().zip(&top).zip(&mut total) {
                    *v = exp_nonpositive(*v - t);
                    *sum += *v;
                }
            }
            let mut b_ll = 0.0;
            // The product of the normalisers of single points: one logarithm per block
            // instead of one per point.
            let mut product = 1.0;
            let mut share = [0.0; BLOCK];
            for (((&c, &t), &sum), sh) in cs.iter().zip(&top).zip(&total).zip(&mut share) {
                if c == 1.0 {
                    b_ll += t;
                    product *= sum;
                } else {
                    b_ll += c * (t + sum.ln());
                }
                *sh = c / sum;
            }
            loglik.add(b_ll + product.ln());
            for j in 0..k {
                let mean = p.mean[j];
                let (mut b0, mut b1, mut b2) = (0.0, 0.0, 0.0);
                for ((&v, &sh), &x) in e[j][..len].iter().zip(&share).zip(xs) {
                    let r = v * sh;
                    let d = x - mean;
                    b0 += r;
                    b1 += r * d;
                    b2 += r * d * d;
                }
                s0[j].add(b0);
                s1[j].add(b1);
                s2[j].add(b2);
            }
        }
        let mut next = *p;
        for j in 0..k {
            let w = s0[j].value();
            if w.is_nan() || w <= LOST_WEIGHT * self.total {
                return None;
            }
            let shift = s1[j].value() / w;
            next.weight[j] = w / self.total;
            next.mean[j] = p.mean[j] + shift;
            next.var[j] = (s2[j].value() / w - shift * shift).max(VARIANCE_FLOOR);
        }
        let ll = loglik.value();
        ll.is_finite().then_some((ll, next))
    }

    /// Parameters from a hard partition of the merged points (`label[i]` in `0..k`);
    /// `None` when a part is empty.
    fn partition_params(&self, k: usize, label: &[usize]) -> Option<Params> {
        let mut p = Params {
            k,
            weight: [0.0; MAX_COMPONENTS],
            mean: [0.0; MAX_COMPONENTS],
            var: [0.0; MAX_COMPONENTS],
        };
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        for ((&x, &c), &j) in self.x.iter().zip(&self.count).zip(label) {
            s0[j].add(c);
            s1[j].add(c * x);
        }
        for j in 0..k {
            let w = s0[j].value();
            if w <= 0.0 {
                return None;
            }
            p.weight[j] = w / self.total;
            p.mean[j] = s1[j].value() / w;
        }
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        for ((&x, &c), &j) in self.x.iter().zip(&self.count).zip(label) {
            s2[j].add(c * (x - p.mean[j]).powi(2));
        }
        for j in 0..k {
            p.var[j] = (s2[j].value() / s0[j].value()).max(VARIANCE_FLOOR);
        }
        Some(p)
    }

    /// The quantile start: k blocks of equal count along the sorted data.
    fn quantile_start(&self, k: usize) -> Option<Params> {
        let mut below = 0.0;
        let label: Vec<usize> = self
            .count
            .iter()
            .map(|&c| {
                let middle = below + 0.5 * c;
                below += c;
                ((k as f64 * middle / self.total) as usize).min(k - 1)
            })
            .collect();
        self.partition_params(k, &label)
    }

    /// A k-means++ start: seeded D^2 sampling of k centres, Lloyd iterations, then the
    /// parameters of the final partition.
    fn kmeans_start(&self, k: usize, seed: u64) -> Option<Params> {
        let mut rng = SplitMix64(0x6f67_6976_655f_656d ^ ((k as u64) << 32) ^ seed);
        let m = self.x.len();
        let mut centres = [0.0; MAX_COMPONENTS];
        // Squared distance to the nearest centre so far, times the count.
        let mut d2: Vec<f64> = vec![f64::INFINITY; m];
        for centre in centres.iter_mut().take(k) {
            let total = if d2[0].is_infinite() {
                self.total
            } else {
                d2.iter().sum::<f64>()
            };
            if total.is_nan() || total <= 0.0 {
                return None;
            }
            let target = rng.next_f64() * total;
            let mut acc = 0.0;
            let mut pick = m - 1;
            for (i, &di) in d2.iter().enumerate() {
                acc += if di.is_infinite() { self.count[i] } else { di };
                if acc > target {
                    pick = i;
                    break;
                }
            }
            *centre = self.x[pick];
            for (i, di) in d2.iter_mut().enumerate() {
                let d = self.x[i] - *centre;
                let v = self.count[i] * d * d;
                *di = if di.is_infinite() { v } else { di.min(v) };
            }
        }
        // Lloyd's iterations. On sorted points each centre's part is a run of consecutive
        // points, so an iteration finds the k - 1 boundaries by binary search and the
        // parts' sums from prefix sums: O(k log m) instead of O(k m).
        let mut bounds = [0usize; MAX_COMPONENTS + 1];
        let mut order = [0usize; MAX_COMPONENTS];
        let mut previous: Option<[usize; MAX_COMPONENTS + 1]> = None;
        for _ in 0..100 {
            self.lloyd_parts(&centres[..k], &mut order[..k], &mut bounds[..=k]);
            for (s, &j) in order[..k].iter().enumerate() {
                let (lo, hi) = (bounds[s], bounds[s + 1]);
                let s0 = self.prefix_count[hi] - self.prefix_count[lo];
                if s0 > 0.0 {
                    centres[j] = (self.prefix_sum[hi] - self.prefix_sum[lo]) / s0;
                }
            }
            if previous == Some(bounds) {
                break;
            }
            previous = Some(bounds);
        }
        let mut label = vec![0usize; m];
        for (s, &j) in order[..k].iter().enumerate() {
            label[bounds[s]..bounds[s + 1]].fill(j);
        }
        self.partition_params(k, &label)
    }

    /// The parts of one Lloyd step: each point goes to its nearest centre (the first by
    /// index among equally near ones), so on sorted points, with the centres in increasing
    /// order (`order`, ties by index), part `s` is `bounds[s]..bounds[s + 1]`.
    fn lloyd_parts(&self, centres: &[f64], order: &mut [usize], bounds: &mut [usize]) {
        for (s, o) in order.iter_mut().enumerate() {
            *o = s;
        }
        order.sort_by(|&a, &b| centres[a].total_cmp(&centres[b]).then(a.cmp(&b)));
        bounds[0] = 0;
        for s in 1..order.len() {
            let (a, b) = (order[s - 1], order[s]);
            let (ca, cb) = (centres[a], centres[b]);
            // Moving right, a point turns from nearer to a to nearer to b once; the
            // comparison is the one a direct scan makes.
            let prefers_b = |x: f64| {
                let (da, db) = ((x - ca).abs(), (x - cb).abs());
                db < da || (db == da && b < a)
            };
            let start = bounds[s - 1];
            bounds[s] = start + self.x[start..].partition_point(|&x| !prefers_b(x));
        }
        bounds[order.len()] = self.x.len();
    }
}

/// `exp(x)` for `x <= 0`, inlined so that loops over arrays vectorise: `x = n ln 2 + r`
/// with `|r| <= ln 2 / 2` (Cody and Waite's two-part ln 2), `exp(r)` by its Taylor
/// series to degree 13 (truncation below 4e-18 relative), scaled by `2^n` through the
/// exponent bits. Within a few units in the last place of the exact value; below
/// `-708` (where `exp` nears the smallest normal number) it returns `exp(-708)`, which
/// next to the term `exp(0) = 1` that every use adds is nothing.
#[inline(always)]
fn exp_nonpositive(x: f64) -> f64 {
    // ln 2 split as in fdlibm's e_exp.c: the high part has trailing zero bits, so
    // n * LN2_HI is exact for the n that occur here.
    const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
    const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
    // 1.5 * 2^52: adding it rounds to an integer held in the low bits of the mantissa.
    const SHIFTER: f64 = 6_755_399_441_055_744.0;
    let x = x.max(-708.0);
    let t = x * std::f64::consts::LOG2_E + SHIFTER;
    let n = t - SHIFTER;
    let r = (x - n * LN2_HI) - n * LN2_LO;
    let mut poly = 1.0 / 6_227_020_800.0;
    for d in [
        479_001_600.0,
        39_916_800.0,
        3_628_800.0,
        362_880.0,
        40_320.0,
        5_040.0,
        720.0,
        120.0,
        24.0,
        6.0,
        2.0,
        1.0,
        1.0,
    ] {
        poly = poly * r + 1.0 / d;
    }
    let scale = f64::from_bits(
        (t.to_bits()
            .wrapping_sub(SHIFTER.to_bits())
            .wrapping_add(1023))
            << 52,
    );
    poly * scale
}

/// `sum count_i f(x_i)`, compensated.
fn weighted_sum(x: &[f64], count: &[f64], f: impl Fn(f64) -> f64) -> f64 {
    let mut s = NeumaierSum::default();
    for (&v, &c) in x.iter().zip(count) {
        s.add(c * f(v));
    }
    s.value()
}

/// SplitMix64 (Steele, Lea and Flood 2014): a small, fast, seedable generator, enough
/// for choosing starting points.
struct SplitMix64(u64);

impl SplitMix64 {
    fn next_u64(&mut self) -> u64 {
        super::rng::splitmix64(&mut self.0)
    }

    /// Uniform on `[0, 1)`.
    fn next_f64(&mut self) -> f64 {
        (self.next_u64() >> 11) as f64 * (1.0 / (1u64 << 53) as f64)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A deterministic stream of standard normal draws (Box-Muller on SplitMix64).
    fn normals(seed: u64, n: usize) -> Vec<f64> {
        let mut rng = SplitMix64(seed);
        (0..n)
            .map(|_| {
                let u = 1.0 - rng.next_f64();
                let v = rng.next_f64();
                (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * v).cos()
            })
            .collect()
    }

    #[test]
    fn one_component_is_the_normal_mle() {
        // With k = 1 EM must land on the closed form (mean, sd with divisor n) and its
        // log-likelihood, as stats::fit computes it; tolerance 1e-12 relative.
        let xs: Vec<f64> = normals(7, 500).iter().map(|z| 3.0 + 2.0 * z).collect();
        let m = fit_mixture(&xs, Some(1)).unwrap();
        let f = super::super::fit::fit(&xs, super::super::fit::Family::Normal).unwrap();
        let p = f.distribution.parameters();
        let c = m.mixture.components()[0];
        assert!((c.mean - p[0].1).abs() < 1e-12 * p[0].1.abs());
        assert!((c.sd - p[1].1).abs() < 1e-12 * p[1].1);
        assert!((m.loglik - f.loglik).abs() < 1e-12 * f.loglik.abs());
        assert_eq!(c.weight, 1.0);
    }

    #[test]
    fn ranking_on_thinned_values_loses_nothing() {
        // Two overlapping components, 8,000 values; starts ranked on 1,024 merged values
        // against the same fit with the starts ranked on all values (the reference).
        let z = normals(11, 8_000);
        let xs: Vec<f64> = z
            .iter()
            .enumerate()
            .map(|(i, &v)| if i % 3 == 0 { 2.5 + 0.7 * v } else { v })
            .collect();
        for k in [2, 3] {
            let thinned = fit(&xs, Some(k), 1024).unwrap();
            let full = fit(&xs, Some(k), usize::MAX).unwrap();
            assert!(thinned.converged && full.converged);
            // Tolerance: the resolution at which the method compares runs at all
            // (SELECTION_TOLERANCE, 1e-8 per value) times n; with k = 3 on two-component
            // data the likelihood is flat along a ridge and runs stop at slightly
            // different points of it.
            assert!(
                thinned.loglik >= full.loglik - SELECTION_TOLERANCE * 8_000.0,
                "k = {k}: {} < {}",
                thinned.loglik,
                full.loglik
            );
        }
    }

    #[test]
    fn fast_exp_is_within_a_few_ulps_of_libm() {
        // Reference: Rust's f64::exp (the platform libm), over [-745, 0].
        let mut worst = 0.0f64;
        for i in 0..=200_000 {
            let x = -708.0 * f64::from(i) / 200_000.0;
            let (got, want) = (exp_nonpositive(x), x.exp());
            worst = worst.max(((got - want) / want).abs());
        }
        assert!(worst <= 4.0 * f64::EPSILON, "{worst:e}");
        assert_eq!(exp_nonpositive(0.0), 1.0);
        assert!(exp_nonpositive(f64::NEG_INFINITY) <= 1e-307);
    }

    #[test]
    fn binning_is_exact() {
        // Repeating every value three times must give, from the same parameters, three
        // times the log-likelihood and the same EM update (EM with counts is EM on the
        // data). Tolerance 1e-12 relative: the two differ only by rounding.
        let base: Vec<f64> = normals(3, 200)
            .iter()
            .enumerate()
            .map(|(i, z)| if i % 3 == 0 { 6.0 + z } else { *z })
            .map(|v| (v * 10.0f64).round() / 10.0)
            .collect();
        let tripled: Vec<f64> = base.iter().flat_map(|&v| [v, v, v]).collect();
        let (a, b) = (Data::new(&base).unwrap(), Data::new(&tripled).unwrap());
        assert!(a.x.len() < base.len(), "the rounded data must have ties");
        assert!(a.x.iter().zip(&b.x).all(|(u, v)| (u - v).abs() < 1e-14));
        assert!(a.count.iter().zip(&b.count).all(|(u, v)| 3.0 * u == *v));
        let p = a.quantile_start(2).unwrap();
        let (la, na) = a.em_pass(&p).unwrap();
        let (lb, nb) = b.em_pass(&p).unwrap();
        assert!((3.0 * la - lb).abs() < 1e-12 * lb.abs());
        for j in 0..2 {
            assert!((na.weight[j] - nb.weight[j]).abs() < 1e-12);
            assert!((na.mean[j] - nb.mean[j]).abs() < 1e-12);
            assert!((na.var[j] - nb.var[j]).abs() < 1e-12 * na.var[j]);
        }
        // And the fitted mixtures agree to the convergence tolerance (1e-6 relative).
        let (fa, fb) = (
            fit_mixture(&base, Some(2)).unwrap(),
            fit_mixture(&tripled, Some(2)).unwrap(),
        );
        assert!((3.0 * fa.loglik - fb.loglik).abs() < 1e-9 * fb.loglik.abs());
        for (x, y) in fa.mixture.components().iter().zip(fb.mixture.components()) {
            assert!((x.mean - y.mean).abs() < 1e-6 * (1.0 + x.mean.abs()));
            assert!((x.sd - y.sd).abs() < 1e-6 * x.sd);
        }
    }

    #[test]
    fn deterministic_and_sorted() {
        // An idealised sample: normal quantiles at (i + 0.5) / n, so no two draws
        // crowd together by chance (a random sample may hold a close pair in a tail,
        // which a spurious narrow component fits: a true local maximum of the likelihood
        // that BIC can prefer).
        let grid = |n: usize, mean: f64, sd: f64| -> Vec<f64> {
            let d = Normal::new(mean, sd).unwrap();
            (0..n)
                .map(|i| d.inverse_cdf((i as f64 + 0.5) / n as f64))
                .collect()
        };
        let mut xs = grid(450, -3.0, 1.0);
        xs.extend(grid(150, 10.0, 0.5));
        let a = fit_mixture(&xs, None).unwrap();
        let b = fit_mixture(&xs, None).unwrap();
        assert_eq!(a, b);
        assert_eq!(a.mixture.components().len(), 2);
        assert!(a.mixture.components()[0].mean < a.mixture.components()[1].mean);
        assert_eq!(a.candidates.len(), MAX_BIC_K);
        let best = a
            .candidates
            .iter()
            .filter_map(|c| c.bic.map(|b| (c.k, b)))
            .min_by(|x, y| x.1.total_cmp(&y.1))
            .unwrap();
        assert_eq!(best.0, 2);
        assert!(a.converged);
    }

    #[cfg(target_arch = "x86_64")]
    #[test]
    fn avx2_pass_is_bit_identical() {
        // The AVX2 form of a pass against the portable one (SSE2 on x86-64), bit for bit:
        // merged data with and without ties (counts of 1 and above, which take different
        // branches), a thinned copy, and k from 1 to 5. Skipped where AVX2 is missing.
        if !std::arch::is_x86_feature_detected!("avx2") {
            return;
        }
        let xs: Vec<f64> = normals(13, 3_000)
            .iter()
            .enumerate()
            .map(|(i, &z)| match i % 3 {
                0 => 4.0 + 0.5 * z,
                1 => (z * 20.0).round() / 20.0,
                _ => z,
            })
            .collect();
        let data = Data::new(&xs).unwrap();
        let thin = data.thinned(256).unwrap();
        assert!(data.count.iter().any(|&c| c > 1.0) && data.count.contains(&1.0));
        for d in [&data, &thin] {
            for k in 1..=5 {
                let mut p = d.quantile_start(k).unwrap();
                for _ in 0..5 {
                    #[allow(unsafe_code)]
                    // SAFETY: AVX2 was detected above.
                    let fast = unsafe { d.em_pass_avx2(&p) }.unwrap();
                    let plain = d.em_pass_portable(&p).unwrap();
                    assert_eq!(fast.0.to_bits(), plain.0.to_bits());
                    for j in 0..k {
                        for (a, b) in [
                            (fast.1.weight[j], plain.1.weight[j]),
                            (fast.1.mean[j], plain.1.mean[j]),
                            (fast.1.var[j], plain.1.var[j]),
                        ] {
                            assert_eq!(a.to_bits(), b.to_bits());
                        }
                    }
                    p = plain.1;
                }
            }
        }
    }

    #[test]
    fn em_never_decreases_the_likelihood() {
        // The EM ascent property (Dempster, Laird and Rubin 1977, theorem 1), up to
        // rounding (1e-12 relative).
        let xs: Vec<f64> = normals(5, 400)
            .iter()
            .enumerate()
            .map(|(i, z)| if i % 2 == 0 { z + 1.0 } else { 2.0 * z })
            .collect();
        let data = Data::new(&xs).unwrap();
        let mut p = data.quantile_start(3).unwrap();
        let mut last = f64::NEG_INFINITY;
        for _ in 0..200 {
            let (ll, next) = data.em_pass(&p).unwrap();
            assert!(ll >= last - 1e-12 * ll.abs(), "{ll} < {last}");
            last = ll;
            p = next;
        }
    }

    #[test]
    fn bad_input_is_named() {
        assert_eq!(
            fit_mixture(&[1.0, 2.0], Some(0)),
            Err(MixtureError::BadK(0))
        );
        assert_eq!(
            fit_mixture(&[1.0, 2.0], Some(17)),
            Err(MixtureError::BadK(17))
        );
        assert_eq!(
            fit_mixture(&[2.0; 10], None),
            Err(MixtureError::AllEqual(2.0))
        );
        assert_eq!(
            fit_mixture(&[1.0, 2.0, 3.0, 4.0], Some(2)),
            Err(MixtureError::TooFewPoints {
                k: 2,
                need: 5,
                got: 4
            })
        );
        assert_eq!(
            fit_mixture(&[1.0, 1.0, 1.0, 2.0, 2.0, 2.0, 2.0, 2.0], Some(3)),
            Err(MixtureError::TooFewDistinct { k: 3, distinct: 2 })
        );
        assert_eq!(
            fit_mixture(&[1.0, f64::NEG_INFINITY], None),
            Err(MixtureError::NotFinite(f64::NEG_INFINITY))
        );
        assert!(matches!(
            fit_mixture(&[], None),
            Err(MixtureError::TooFewPoints { got: 0, .. })
        ));
    }

    #[test]
    fn validation_names_the_field() {
        let c = |weight, mean, sd| Component { weight, mean, sd };
        assert!(matches!(
            Mixture::new(vec![c(0.5, 0.0, 1.0), c(0.5, 1.0, 0.0)]),
            Err(MixtureError::BadComponent {
                index: 1,
                field: "sd",
                ..
            })
        ));
        assert_eq!(
            Mixture::new(vec![c(0.5, 0.0, 1.0), c(0.6, 1.0, 1.0)]),
            Err(MixtureError::WeightSum(1.1))
        );
    }

    #[test]
    fn quantile_inverts_cdf() {
        // Round trip to 1e-12 relative, including a point in the gap between components
        // where the density is tiny.
        let m = Mixture::new(vec![
            Component {
                weight: 0.9,
                mean: 0.0,
                sd: 0.1,
            },
            Component {
                weight: 0.1,
                mean: 50.0,
                sd: 3.0,
            },
        ])
        .unwrap();
        // (Between about 0.8 and 30 the cdf equals 0.9 to double precision: there every
        // t is an equally good answer, so those points are not tested.)
        for t in [-0.3, 0.0, 0.05, 0.3, 40.0, 45.0, 50.0, 55.0] {
            let back = m.quantile(m.cdf(t)).unwrap();
            assert!((back - t).abs() <= 1e-12 * t.abs().max(1.0), "{t}: {back}");
        }
        assert_eq!(m.quantile(0.0), Ok(f64::NEG_INFINITY));
        assert!(m.quantile(-0.1).is_err());
    }

    #[test]
    fn moments_by_hand() {
        // Exact: mean 0.5*0 + 0.5*2 = 1; variance 0.5*(1 + 1) + 0.5*(4 + 1) = 3.5.
        let m = Mixture::new(vec![
            Component {
                weight: 0.5,
                mean: 0.0,
                sd: 1.0,
            },
            Component {
                weight: 0.5,
                mean: 2.0,
                sd: 2.0,
            },
        ])
        .unwrap();
        assert_eq!(m.mean(), 1.0);
        assert!((m.sd() - 3.5f64.sqrt()).abs() < 1e-15);
    }

    #[test]
    fn one_component_mean_is_the_compensated_mean() {
        // Exact arithmetic: (1e16 + 1 - 1e16 + 2) / 4 = 0.75 (the standardised EM mean
        // mapped back gave 1.5175). The sd with divisor n is sqrt(5e31 + 0.6875) =
        // 7071067811865475.244 (by hand; the 0.6875 moves it by 5e-17), tolerance 1e-15
        // relative.
        let f = fit_mixture(&[1e16, 1.0, -1e16, 2.0], Some(1)).unwrap();
        let c = f.mixture.components()[0];
        assert_eq!(c.mean, 0.75);
        assert!(
            (c.sd - 7071067811865475.244).abs() / c.sd < 1e-15,
            "{}",
            c.sd
        );
    }
}
