//! The fit for one k or the k of least BIC; the winning start's last run; mapping back to the data's units.

use super::data::Data;
use super::em::{Params, Run};
use super::*;
use crate::stats::fit::FitSummary;
use crate::stats::resolution::Resolution;

/// The outcome of one candidate k when k is chosen by BIC.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Candidate {
    /// Number of components.
    pub k: usize,
    /// The best log-likelihood found, `None` when every start lost a component or, for
    /// grouped data, when even the saturated log-likelihood could not have won.
    pub loglik: Option<f64>,
    /// Its BIC, `None` likewise.
    pub bic: Option<f64>,
}

/// A fitted mixture and how the fit went.
#[derive(Debug, Clone, PartialEq)]
pub struct MixtureFit {
    /// The mixture, components sorted by mean.
    pub mixture: Mixture,
    /// n, log-likelihood, AIC and BIC, with `p = 3k - 1` parameters.
    pub summary: FitSummary,
    /// Passes over the data made by the winning start (its short run included).
    pub iterations: u32,
    /// Whether the winning start met the convergence rule.
    pub converged: bool,
    /// Every k tried, in increasing order (just one when k was given).
    pub candidates: Vec<Candidate>,
    /// The step the values were taken as rounded to (`None`: exact values).
    pub resolution: Option<f64>,
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
    fit_thinned(xs, k, THIN_TO, Resolution::Exact)
}

/// [`fit_mixture`] on values rounded to a step ([`Resolution::Step`], or found with
/// [`Resolution::Auto`]): EM for grouped data, with the grouped log-likelihood, AIC and
/// BIC (see the [module documentation](self)). With [`Resolution::Exact`], or `Auto`
/// finding no grid, it is [`fit_mixture`].
///
/// # Errors
/// As [`fit_mixture`], and [`MixtureError::Grid`] for a step that is not `> 0` or that
/// a value is off.
///
/// # Example
/// ```
/// use ogive::stats::mixture::fit_mixture_rounded;
/// use ogive::stats::resolution::Resolution;
/// let xs = [1.0, 1.0, 2.0, 2.0, 2.0, 3.0, 8.0, 9.0, 9.0, 9.0, 10.0, 10.0];
/// let fit = fit_mixture_rounded(&xs, Some(2), Resolution::Auto)?;
/// assert_eq!(fit.resolution, Some(1.0));
/// assert!(fit.summary.loglik < 0.0); // a sum of log probabilities
/// # Ok::<(), ogive::stats::mixture::MixtureError>(())
/// ```
pub fn fit_mixture_rounded(
    xs: &[f64],
    k: Option<usize>,
    resolution: Resolution,
) -> Result<MixtureFit, MixtureError> {
    fit_thinned(xs, k, THIN_TO, resolution)
}

/// [`fit_mixture_rounded`] on values already sorted in the order of `f64::total_cmp`
/// (as [`crate::stats::sorting::merge_sorted`] gives the sorted parts of a group): the
/// same fit, without sorting again. Values that are not sorted are sorted first. An
/// infinite value is named in increasing order (the smallest first), not in row order.
///
/// # Errors
/// As [`fit_mixture_rounded`].
///
/// # Example
/// ```
/// use ogive::stats::mixture::{fit_mixture_rounded, fit_mixture_sorted};
/// use ogive::stats::resolution::Resolution;
/// let xs = [1.0, 1.2, 0.9, 1.1, 5.0, 5.2, 4.9, 5.1];
/// let mut sorted = xs.to_vec();
/// sorted.sort_by(f64::total_cmp);
/// let a = fit_mixture_sorted(sorted, Some(2), Resolution::Exact)?;
/// assert_eq!(a, fit_mixture_rounded(&xs, Some(2), Resolution::Exact)?);
/// # Ok::<(), ogive::stats::mixture::MixtureError>(())
/// ```
pub fn fit_mixture_sorted(
    xs: Vec<f64>,
    k: Option<usize>,
    resolution: Resolution,
) -> Result<MixtureFit, MixtureError> {
    if !crate::stats::sorting::is_sorted_total(&xs) {
        return fit_mixture_rounded(&xs, k, resolution);
    }
    check_counts(k, &xs)?;
    fit_data(Data::from_sorted(xs, resolution)?, k, THIN_TO)
}

/// [`fit_mixture_rounded`] on frequency-weighted values: `weights[i]` copies of
/// `values[i]`. With whole-number weights it is the fit of the replicated values (EM
/// works on distinct values with counts in any case); fractional weights are allowed.
/// `n` in the summary is the total weight rounded to a whole number; BIC, and the rule
/// that a k needs at least `3k - 1` of it, use the exact total.
///
/// # Errors
/// As [`fit_mixture_rounded`], and [`MixtureError::BadWeight`] for a weight that is not
/// finite and `> 0`.
///
/// # Example
/// ```
/// use ogive::stats::mixture::{fit_mixture, fit_mixture_weighted};
/// use ogive::stats::resolution::Resolution;
/// let w = fit_mixture_weighted(&[1.0, 1.2, 5.0, 5.1], &[2.0, 1.0, 1.0, 3.0], Some(2), Resolution::Exact)?;
/// let r = fit_mixture(&[1.0, 1.0, 1.2, 5.0, 5.1, 5.1, 5.1], Some(2))?;
/// assert_eq!(w.summary.loglik, r.summary.loglik);
/// # Ok::<(), ogive::stats::mixture::MixtureError>(())
/// ```
pub fn fit_mixture_weighted(
    values: &[f64],
    weights: &[f64],
    k: Option<usize>,
    resolution: Resolution,
) -> Result<MixtureFit, MixtureError> {
    if let Some(&bad) = weights.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        return Err(MixtureError::BadWeight(bad));
    }
    check_k_and_values(k, values)?;
    let (x, count) = crate::stats::sorting::merge_weighted(values, weights);
    let total = crate::stats::sum::sum(&count);
    let data = Data::merged(x, count, total, resolution)?;
    fit_data(data, k, THIN_TO)
}

/// [`fit_mixture_rounded`] on values already counted: `values` distinct and increasing,
/// `counts[i]` (whole numbers, `> 0`) copies of `values[i]`, as
/// [`crate::stats::tally::Tally::distinct`] gives them. The same fit, with the same
/// errors in the same order, as [`fit_mixture_rounded`] on the replicated values (which
/// names the first infinite value in increasing order rather than in row order).
///
/// # Errors
/// As [`fit_mixture_rounded`], and [`MixtureError::BadWeight`] for a count that is not
/// finite and `> 0`; values that are not increasing and distinct are sorted and merged
/// first.
///
/// # Example
/// ```
/// use ogive::stats::mixture::{fit_mixture_counted, fit_mixture_rounded};
/// use ogive::stats::resolution::Resolution;
/// let c = fit_mixture_counted(&[1.0, 2.0, 8.0, 9.0], &[2.0, 3.0, 1.0, 4.0], Some(2), Resolution::Step(1.0))?;
/// let xs = [1.0, 1.0, 2.0, 2.0, 2.0, 8.0, 9.0, 9.0, 9.0, 9.0];
/// assert_eq!(c, fit_mixture_rounded(&xs, Some(2), Resolution::Step(1.0))?);
/// # Ok::<(), ogive::stats::mixture::MixtureError>(())
/// ```
pub fn fit_mixture_counted(
    values: &[f64],
    counts: &[f64],
    k: Option<usize>,
    resolution: Resolution,
) -> Result<MixtureFit, MixtureError> {
    if let Some(&bad) = counts.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        return Err(MixtureError::BadWeight(bad));
    }
    check_k_and_values(k, values)?;
    let (x, count) = if values.windows(2).all(|w| w[0] < w[1]) && values.len() == counts.len() {
        (values.to_vec(), counts.to_vec())
    } else {
        crate::stats::sorting::merge_weighted(values, counts)
    };
    let total = crate::stats::sum::sum(&count);
    let need = 3 * k.unwrap_or(1) - 1;
    if total < need as f64 {
        return Err(MixtureError::TooFewPoints {
            k: k.unwrap_or(1),
            need,
            got: total.floor() as u64,
        });
    }
    fit_data(Data::merged(x, count, total, resolution)?, k, THIN_TO)
}

/// The checks shared by every entry: k in range, every value finite.
fn check_k_and_values(k: Option<usize>, xs: &[f64]) -> Result<(), MixtureError> {
    if let Some(k) = k
        && !(1..=MAX_COMPONENTS).contains(&k)
    {
        return Err(MixtureError::BadK(k as i64));
    }
    if let Some(&bad) = xs.iter().find(|x| !x.is_finite()) {
        return Err(MixtureError::NotFinite(bad));
    }
    Ok(())
}

/// [`fit_mixture`], ranking the starts on at most `thin_to` merged values.
pub(super) fn fit_thinned(
    xs: &[f64],
    k: Option<usize>,
    thin_to: usize,
    resolution: Resolution,
) -> Result<MixtureFit, MixtureError> {
    check_counts(k, xs)?;
    let data = Data::new(xs, resolution)?;
    fit_data(data, k, thin_to)
}

/// The checks of the entries that take values one by one: [`check_k_and_values`], and at
/// least `3k - 1` of them.
fn check_counts(k: Option<usize>, xs: &[f64]) -> Result<(), MixtureError> {
    check_k_and_values(k, xs)?;
    let need = 3 * k.unwrap_or(1) - 1;
    if xs.len() < need {
        return Err(MixtureError::TooFewPoints {
            k: k.unwrap_or(1),
            need,
            got: xs.len() as u64,
        });
    }
    Ok(())
}

/// The fit of merged data.
fn fit_data(data: Data, k: Option<usize>, thin_to: usize) -> Result<MixtureFit, MixtureError> {
    let total = data.total;
    let need = |k: usize| 3 * k - 1;
    let first_k = k.unwrap_or(1);
    if total < need(first_k) as f64 {
        return Err(MixtureError::TooFewPoints {
            k: first_k,
            need: need(first_k),
            got: total.floor() as u64,
        });
    }
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
            .filter(|&k| k <= distinct && need(k) as f64 <= total)
            .collect(),
    };
    let thin = data.thinned(thin_to);
    let mut candidates = Vec::with_capacity(ks.len());
    let mut best: Option<(f64, usize, Run)> = None;
    // Grouped data: no k can have a log-likelihood above the saturated one, so a k
    // whose BIC would lose even there is not fitted (nor, its penalty being larger, any
    // later k); its candidate has no loglik or BIC.
    let ceiling = if k.is_none() { data.saturated() } else { None };
    for &k in &ks {
        if let (Some(ceiling), Some((b, _, _))) = (ceiling, best.as_ref())
            && FitSummary::weighted(ceiling, need(k), total).bic > *b + 1e-9 * b.abs()
        {
            candidates.push(Candidate {
                k,
                loglik: None,
                bic: None,
            });
            continue;
        }
        let run = data.best_run(k, thin.as_ref());
        if crate::stats::cancel::requested() {
            return Err(MixtureError::Interrupted);
        }
        let scored = run.map(|r| {
            let loglik = data.loglik_in_x(r.loglik);
            (loglik, FitSummary::weighted(loglik, need(k), total).bic, r)
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
    if crate::stats::cancel::requested() {
        return Err(MixtureError::Interrupted);
    }
    let k = run.params.k;
    let mixture = if k == 1 && data.width.is_none() {
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
    let summary = FitSummary::weighted(loglik, need(k), total);
    candidates[slot] = Candidate {
        k,
        loglik: Some(loglik),
        bic: Some(summary.bic),
    };
    Ok(MixtureFit {
        mixture,
        summary,
        iterations: run.iterations,
        converged: run.converged,
        candidates,
        resolution: data.step,
    })
}

impl Data {
    /// The log-likelihood in the data's units from a standardised one.
    pub(super) fn loglik_in_x(&self, standardised: f64) -> f64 {
        if self.width.is_some() {
            // Grouped data: probabilities, the same in any units.
            return standardised;
        }
        standardised - self.total * (0.5 * (2.0 * std::f64::consts::PI).ln() + self.scale.ln())
    }

    /// The mixture in the data's units, components sorted by mean.
    pub(super) fn to_mixture(&self, p: &Params) -> Option<Mixture> {
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
    ///
    /// A small fit ([`Data::is_small_fit`]) draws [`KMEANS_STARTS_SMALL`] k-means++
    /// seedings instead of [`KMEANS_STARTS`], and every start, in the order of its short
    /// run, continues to [`LOOSE_TOLERANCE`] (while the runs so continued have made at
    /// most [`LOOSE_WORK`] point-component evaluations; the first [`FINALISTS`] always
    /// do) before the finalists are chosen: after twelve passes the ranking of the starts
    /// says little about where they end.
    pub(super) fn best_run(&self, k: usize, thin: Option<&Data>) -> Option<Run> {
        let tolerance = SELECTION_TOLERANCE;
        let ranking = thin.unwrap_or(self);
        let small = ranking.is_small_fit(k);
        let seeds = if small {
            KMEANS_STARTS_SMALL
        } else {
            KMEANS_STARTS
        };
        let mut starts: Vec<Params> = Vec::new();
        if let Some(p) = ranking.quantile_start(k) {
            starts.push(p);
        }
        if k > 1 {
            for seed in 0..seeds {
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
        if small {
            let per_pass = (ranking.x.len() * k) as f64;
            let mut work = 0.0;
            let mut loose: Vec<Run> = Vec::with_capacity(short.len());
            for (rank, run) in short.into_iter().enumerate() {
                if rank >= FINALISTS && work > LOOSE_WORK {
                    break;
                }
                if let Some(r) = ranking.resume(run, LOOSE_TOLERANCE) {
                    work += f64::from(r.iterations - run.iterations) * per_pass;
                    loose.push(r);
                }
            }
            loose.sort_by(|a, b| b.loglik.total_cmp(&a.loglik));
            short = loose;
        }
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

    /// Whether a fit of k components on these points is small enough for the thorough
    /// search of [`Data::best_run`]: exact values (not grouped ones) and at most
    /// [`SMALL_FIT`] point-component evaluations per pass.
    pub(super) fn is_small_fit(&self, k: usize) -> bool {
        self.width.is_none() && self.x.len() * k <= SMALL_FIT
    }

    /// Continues a run to `tolerance` (at most [`MAX_ITERATIONS`] passes in all).
    pub(super) fn resume(&self, run: Run, tolerance: f64) -> Option<Run> {
        if run.converged && run.tolerance <= tolerance {
            Some(run)
        } else {
            self.em(run.params, run.iterations, MAX_ITERATIONS, tolerance)
        }
    }
}
