//! Maximum likelihood from rounded and censored readings.
//!
//! A logger that records to a fixed step `r` reports `x` for any true value in
//! `[x - r/2, x + r/2]`; a lab reports "below the detection limit `x`"; a logger at the
//! top of its range reports its limit. Treating such readings as exact numbers biases a
//! fit (and lets a mixture reward components sitting on single grid values). Here each
//! reading contributes what it actually says:
//!
//! | reading | contribution to the log-likelihood |
//! |---|---|
//! | exact `x` | `ln f(x)` |
//! | rounded `x` to step `r` | `ln (F(x + r/2) - F(x - r/2))` (binned likelihood) |
//! | left-censored at `x` (true value `<= x`) | `ln F(x)` |
//! | right-censored at `x` (true value `> x`) | `ln S(x) = ln (1 - F(x))` |
//!
//! the censored likelihood of, for example, Klein and Moeschberger (2003, *Survival
//! Analysis*, 2nd ed., section 3.5) and the grouped-data likelihood of Fisher (1922) and
//! Lindley (1950, "Grouping corrections and maximum likelihood equations", Proc.
//! Cambridge Philos. Soc. 46). Each term is evaluated in log space and from the tail it
//! lies in ([`Parametric::ln_mass`], [`Parametric::ln_cdf`], [`Parametric::ln_sf`]), so
//! no term loses its digits near 0 or 1. Identical readings are merged into one term
//! with a count first.
//!
//! The maximum is found by the simplex method ([`crate::stats::simplex`]) in
//! coordinates where every parameter is free and the two are nearly uncorrelated: normal
//! and lognormal `(location, ln scale)`; exponential `ln rate`; gamma `(ln shape,
//! ln mean)`; Weibull `(ln shape, ln scale)`; uniform `(min, max)` (outside the
//! readings' reach the likelihood is `-inf`). A censored fit starts from the fit that
//! takes every reading as exact ([`crate::stats::fit::fit`]); a binned fit from the
//! grouped readings' moments (one pass over the distinct values, see `moment_start`).
//! It stops when the log-likelihood is stable to `1e-13` relative (then a restart
//! confirms it).
//!
//! # Errors and NaN policy
//!
//! As [`crate::stats::fit::fit`] ([`FitError::NotFinite`], [`FitError::TooFewPoints`],
//! [`FitError::NonPositive`], [`FitError::AllEqual`], [`FitError::Degenerate`]), and:
//! every reading censored ([`FitError::AllCensored`]); a censored reading that no member
//! of the family can produce, such as a positive family left-censored at a value `<= 0`
//! ([`FitError::NonPositive`]); no maximum reached within the evaluation budget
//! ([`FitError::NoConvergence`]). On rounded readings the positive families accept 0
//! (its interval `[0, r/2]` has mass); no fit returns a NaN or infinite parameter.

use super::fit::{Family, FitError, FitSummary, Parametric, ParametricFit, fit};
use super::simplex::maximise;
use super::sum::NeumaierSum;

/// One reading: what is known of one true value.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Reading {
    /// The value itself.
    Exact(f64),
    /// Somewhere in `(lo, hi]`.
    Within(f64, f64),
    /// At or below the value (left-censored).
    AtMost(f64),
    /// Above the value (right-censored).
    Above(f64),
}

/// How many readings of each kind a censored fit used.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub struct CensorCounts {
    /// Exact readings (code 0).
    pub exact: u64,
    /// Left-censored readings (code -1).
    pub left: u64,
    /// Right-censored readings (code 1).
    pub right: u64,
}

/// Evaluations allowed to the simplex method.
const BUDGET: u32 = 20_000;
/// Relative tolerance on the log-likelihood.
const TOLERANCE: f64 = 1e-13;

/// Fits `family` to readings rounded to `step` (each `x` standing for `[x - step/2,
/// x + step/2]`) by maximising the binned likelihood. The summary's log-likelihood, AIC
/// and BIC are the binned ones (sums of log probabilities, not of log densities).
///
/// # Errors
/// See the [module documentation](self).
///
/// # Example
/// ```
/// use ogive::stats::fit::Family;
/// use ogive::stats::readings::fit_rounded;
/// // Readings to the nearest 1: the binned fit's sd is below the raw sd, which counts
/// // the rounding as spread (Sheppard's correction, to first order).
/// let xs = [9.0, 10.0, 10.0, 11.0, 10.0, 12.0, 9.0, 10.0];
/// let f = fit_rounded(&xs, Family::Normal, 1.0)?;
/// let raw = ogive::stats::fit::fit(&xs, Family::Normal)?;
/// assert!(f.distribution.parameters()[1].1 < raw.distribution.parameters()[1].1);
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit_rounded(xs: &[f64], family: Family, step: f64) -> Result<ParametricFit, FitError> {
    check_values(xs, xs.len() as f64, family, |x| x >= 0.0)?;
    let (values, counts) = distinct(xs);
    fit_grouped(&values, &counts, xs.len() as f64, family, step)
}

/// [`fit_rounded`] on frequency-weighted readings: `weights[i]` copies of `values[i]`
/// (whole numbers give the fit of the replicated readings; fractional weights are
/// allowed). `n` in the summary is the total weight rounded, BIC uses the exact total.
///
/// # Errors
/// As [`fit_rounded`], and [`FitError::BadWeight`] for a weight that is not finite and
/// `> 0`.
///
/// # Example
/// ```
/// use ogive::stats::fit::Family;
/// use ogive::stats::readings::{fit_rounded, fit_rounded_weighted};
/// let w = fit_rounded_weighted(&[9.0, 10.0, 11.0], &[1.0, 3.0, 2.0], Family::Normal, 1.0)?;
/// let r = fit_rounded(&[9.0, 10.0, 10.0, 10.0, 11.0, 11.0], Family::Normal, 1.0)?;
/// assert_eq!(w, r);
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit_rounded_weighted(
    values: &[f64],
    weights: &[f64],
    family: Family,
    step: f64,
) -> Result<ParametricFit, FitError> {
    if let Some(&bad) = weights.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        return Err(FitError::BadWeight(bad));
    }
    let (xs, counts) = super::sorting::merge_weighted(values, weights);
    let total = super::sum::sum(&counts);
    check_values(&xs, total, family, |x| x >= 0.0)?;
    fit_grouped(&xs, &counts, total, family, step)
}

/// [`fit_rounded`] on readings already counted: `values` distinct and increasing,
/// `counts[i]` (`> 0`) copies of `values[i]`, as [`crate::stats::tally::Tally::distinct`]
/// gives them. The same fit, bit for bit, and the same errors as [`fit_rounded`] on the
/// replicated readings; values that are not increasing and distinct are sorted and
/// merged first (as [`fit_rounded_weighted`] does).
///
/// # Errors
/// As [`fit_rounded`], and [`FitError::BadWeight`] for a count that is not finite and
/// `> 0`.
///
/// # Example
/// ```
/// use ogive::stats::fit::Family;
/// use ogive::stats::readings::{fit_rounded, fit_rounded_counted};
/// let c = fit_rounded_counted(&[9.0, 10.0, 11.0], &[1.0, 3.0, 2.0], Family::Normal, 1.0)?;
/// let r = fit_rounded(&[9.0, 10.0, 10.0, 10.0, 11.0, 11.0], Family::Normal, 1.0)?;
/// assert_eq!(c, r);
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit_rounded_counted(
    values: &[f64],
    counts: &[f64],
    family: Family,
    step: f64,
) -> Result<ParametricFit, FitError> {
    if !(values.windows(2).all(|w| w[0] < w[1]) && values.len() == counts.len()) {
        return fit_rounded_weighted(values, counts, family, step);
    }
    if let Some(&bad) = counts.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        return Err(FitError::BadWeight(bad));
    }
    let total = super::sum::sum(counts);
    check_values(values, total, family, |x| x >= 0.0)?;
    fit_grouped(values, counts, total, family, step)
}

/// The binned fit of distinct values with counts summing to `total`.
fn fit_grouped(
    values: &[f64],
    counts: &[f64],
    total: f64,
    family: Family,
    step: f64,
) -> Result<ParametricFit, FitError> {
    let grouped: Vec<(Reading, f64)> = values
        .iter()
        .zip(counts)
        .map(|(&x, &c)| (Reading::Within(x - step / 2.0, x + step / 2.0), c))
        .collect();
    let need = family.parameter_names().len();
    let start = moment_start(family, values, counts, step)?;
    climb(family, start, &grouped, need, total)
}

/// The distinct values of `xs` in increasing order, with their counts (one pass when
/// `xs` is sorted, as the SQL adapter passes it; a sorted copy otherwise).
fn distinct(xs: &[f64]) -> (Vec<f64>, Vec<f64>) {
    let sorted_copy;
    let sorted = if xs.windows(2).all(|w| w[0] <= w[1]) {
        xs
    } else {
        let mut v = xs.to_vec();
        v.sort_unstable_by(f64::total_cmp);
        sorted_copy = v;
        &sorted_copy
    };
    let (mut values, mut counts): (Vec<f64>, Vec<f64>) = (Vec::new(), Vec::new());
    for &x in sorted {
        match (values.last(), counts.last_mut()) {
            (Some(&last), Some(c)) if last == x => *c += 1.0,
            _ => {
                values.push(x);
                counts.push(1.0);
            }
        }
    }
    (values, counts)
}

/// A start for the binned fit from the grouped readings' weighted moments, in one pass
/// over the distinct values: normal mean and sd (less the rounding's `step^2 / 12`,
/// Sheppard's correction); lognormal the same on `ln x`; exponential one over the mean;
/// gamma the method of moments; Weibull the Gumbel moments of `ln x` (shape `pi /
/// (sqrt 6 sd)`, scale `exp(mean + Euler's constant / shape)`); uniform the support that
/// just covers the outer bins (its maximum may cut into an end bin that holds few
/// readings). Zeros count as a quarter step for the logarithms.
fn moment_start(
    family: Family,
    values: &[f64],
    counts: &[f64],
    step: f64,
) -> Result<Parametric, FitError> {
    let moments = |f: &dyn Fn(f64) -> f64| {
        let total: f64 = counts.iter().sum();
        let mut s = NeumaierSum::default();
        for (&x, &c) in values.iter().zip(counts) {
            s.add(c * f(x));
        }
        let mean = s.value() / total;
        let mut v = NeumaierSum::default();
        for (&x, &c) in values.iter().zip(counts) {
            v.add(c * (f(x) - mean).powi(2));
        }
        (mean, (v.value() / total).max(0.0))
    };
    let ln = |x: f64| if x > 0.0 { x.ln() } else { (step / 4.0).ln() };
    let params: Vec<f64> = match family {
        Family::Normal => {
            let (m, var) = moments(&|x| x);
            vec![m, (var - step * step / 12.0).max(var * 1e-4).sqrt()]
        }
        Family::LogNormal => {
            let (m, var) = moments(&ln);
            vec![m, var.sqrt()]
        }
        Family::Exponential => vec![1.0 / moments(&|x| x).0],
        Family::Gamma => {
            let (m, var) = moments(&|x| x);
            vec![m * m / var, var / m]
        }
        Family::Weibull => {
            let (m, var) = moments(&ln);
            let shape = std::f64::consts::PI / (6f64.sqrt() * var.sqrt());
            vec![shape, (m + 0.577_215_664_901_532_9 / shape).exp()]
        }
        Family::Uniform => vec![
            values[0] - step / 2.0,
            values[values.len() - 1] + step / 2.0,
        ],
    };
    Parametric::new(family, &params).map_err(|_| FitError::Degenerate { family })
}

/// Fits `family` to readings with censoring codes (0 exact, -1 left-censored: the true
/// value is at or below x, 1 right-censored: the true value is above x) by maximising
/// the censored likelihood. Returns the fit and the counts of each kind.
///
/// # Errors
/// See the [module documentation](self); `codes` must hold -1, 0 or 1
/// ([`FitError::BadCode`]) and be as long as `xs`.
///
/// # Example
/// ```
/// use ogive::stats::fit::Family;
/// use ogive::stats::readings::fit_censored;
/// // Right-censored exponential: the MLE of the rate is (exact readings) / (sum of all
/// // readings) (Klein and Moeschberger 2003, section 3.5), here 3 / 12.
/// let (f, counts) = fit_censored(&[1.0, 2.0, 3.0, 6.0], &[0, 0, 0, 1], Family::Exponential)?;
/// assert!((f.distribution.parameters()[0].1 - 0.25).abs() < 1e-7);
/// assert_eq!((counts.exact, counts.right), (3, 1));
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit_censored(
    xs: &[f64],
    codes: &[i8],
    family: Family,
) -> Result<(ParametricFit, CensorCounts), FitError> {
    let mut counts = CensorCounts::default();
    let mut readings = Vec::with_capacity(xs.len());
    for (&x, &c) in xs.iter().zip(codes) {
        let r = match c {
            0 => {
                counts.exact += 1;
                Reading::Exact(x)
            }
            -1 => {
                counts.left += 1;
                Reading::AtMost(x)
            }
            1 => {
                counts.right += 1;
                Reading::Above(x)
            }
            other => return Err(FitError::BadCode(i64::from(other))),
        };
        readings.push((r, x));
    }
    if let Some(&bad) = xs.iter().find(|x| !x.is_finite()) {
        return Err(FitError::NotFinite(bad));
    }
    let need = family.parameter_names().len();
    if xs.len() < need {
        return Err(FitError::TooFewPoints {
            family,
            need,
            got: xs.len(),
        });
    }
    if counts.exact == 0 {
        return Err(FitError::AllCensored {
            family,
            left: counts.left,
            right: counts.right,
        });
    }
    if family.needs_positive() {
        // Exact readings as for an exact fit; a left-censored reading <= 0 has
        // probability 0, a right-censored one below 0 is a data error.
        let zero_ok = family == Family::Exponential;
        let bad = readings.iter().find(|(r, _)| match *r {
            Reading::Exact(x) => !(x > 0.0 || (zero_ok && x == 0.0)),
            Reading::AtMost(x) => x <= 0.0,
            Reading::Above(x) => x < 0.0,
            Reading::Within(..) => false,
        });
        if let Some(&(_, value)) = bad {
            return Err(FitError::NonPositive { family, value });
        }
    }
    let n = xs.len() as f64;
    let grouped = group(readings.into_iter());
    let start = censored_start(xs, family)?;
    Ok((climb(family, start, &grouped, need, n)?, counts))
}

/// The start of a censored fit: the exact fit of all readings taken as exact, or for the
/// uniform a support a little wider than the readings (so every censored reading has
/// mass).
fn censored_start(xs: &[f64], family: Family) -> Result<Parametric, FitError> {
    if family == Family::Uniform {
        let (lo, hi) = extremes(xs);
        let margin = 0.05 * (hi - lo).max(lo.abs().max(hi.abs()) * 1e-6).max(1e-300);
        return Parametric::new(family, &[lo - margin, hi + margin])
            .map_err(|_| FitError::Degenerate { family });
    }
    fit(xs, family).map(|f| f.distribution)
}

/// Checks finiteness and the support: every value finite, and for the positive families
/// `allowed(x)`.
fn check_values(
    xs: &[f64],
    total: f64,
    family: Family,
    allowed: impl Fn(f64) -> bool,
) -> Result<(), FitError> {
    if let Some(&bad) = xs.iter().find(|x| !x.is_finite()) {
        return Err(FitError::NotFinite(bad));
    }
    let need = family.parameter_names().len();
    if total < need as f64 || xs.is_empty() {
        return Err(FitError::TooFewPoints {
            family,
            need,
            got: total.floor() as usize,
        });
    }
    if family.needs_positive()
        && let Some(&value) = xs.iter().find(|&&x| !allowed(x))
    {
        return Err(FitError::NonPositive { family, value });
    }
    let (lo, hi) = extremes(xs);
    if lo == hi && family != Family::Exponential {
        return Err(FitError::AllEqual { family, value: lo });
    }
    Ok(())
}

/// The smallest and largest value.
fn extremes(xs: &[f64]) -> (f64, f64) {
    xs.iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        })
}

/// Identical readings merged, with counts; `key` orders them.
fn group(readings: impl Iterator<Item = (Reading, f64)>) -> Vec<(Reading, f64)> {
    let mut all: Vec<(Reading, f64)> = readings.collect();
    let rank = |r: &Reading| match r {
        Reading::Exact(_) => 0,
        Reading::Within(..) => 1,
        Reading::AtMost(_) => 2,
        Reading::Above(_) => 3,
    };
    all.sort_by(|a, b| rank(&a.0).cmp(&rank(&b.0)).then(a.1.total_cmp(&b.1)));
    let mut out: Vec<(Reading, f64)> = Vec::with_capacity(all.len().min(1 << 16));
    for (r, _) in all {
        match out.last_mut() {
            Some((last, count)) if *last == r => *count += 1.0,
            _ => out.push((r, 1.0)),
        }
    }
    out
}

/// The log-likelihood of `d` on grouped readings (a compensated sum; `-inf` when a
/// reading is impossible).
fn loglik(d: &Parametric, grouped: &[(Reading, f64)]) -> f64 {
    let mut s = NeumaierSum::default();
    for &(r, count) in grouped {
        let term = match r {
            Reading::Exact(x) => d.ln_pdf(x),
            Reading::Within(lo, hi) => d.ln_mass(lo, hi),
            Reading::AtMost(x) => d.ln_cdf(x),
            Reading::Above(x) => d.ln_sf(x),
        };
        if term.is_nan() || term == f64::NEG_INFINITY {
            return f64::NEG_INFINITY;
        }
        s.add(count * term);
    }
    s.value()
}

/// The free coordinates of a distribution (see the [module documentation](self)).
fn to_free(d: &Parametric) -> [f64; 2] {
    let p: Vec<f64> = d.parameters().into_iter().map(|(_, v)| v).collect();
    match d.family() {
        Family::Normal | Family::LogNormal => [p[0], p[1].ln()],
        Family::Exponential => [p[0].ln(), 0.0],
        Family::Gamma => [p[0].ln(), (p[0] * p[1]).ln()],
        Family::Weibull => [p[0].ln(), p[1].ln()],
        Family::Uniform => [p[0], p[1]],
    }
}

/// The distribution at free coordinates, `None` outside the family's domain.
fn from_free(family: Family, t: &[f64]) -> Option<Parametric> {
    let params: Vec<f64> = match family {
        Family::Normal | Family::LogNormal => vec![t[0], t[1].exp()],
        Family::Exponential => vec![t[0].exp()],
        Family::Gamma => {
            let shape = t[0].exp();
            vec![shape, (t[1] - t[0]).exp()]
        }
        Family::Weibull => vec![t[0].exp(), t[1].exp()],
        Family::Uniform => vec![t[0], t[1]],
    };
    Parametric::new(family, &params).ok()
}

/// Maximises the likelihood of `grouped` from `start`.
fn climb(
    family: Family,
    start: Parametric,
    grouped: &[(Reading, f64)],
    need: usize,
    n: f64,
) -> Result<ParametricFit, FitError> {
    let free = to_free(&start);
    let step: [f64; 2] = match family {
        Family::Normal | Family::LogNormal => {
            let scale = start.parameters()[1].1;
            [0.1 * scale, 0.1]
        }
        Family::Uniform => {
            let [lo, hi] = free;
            let w = 0.01 * (hi - lo);
            [-w, w]
        }
        _ => [0.1, 0.1],
    };
    let objective =
        |t: &[f64]| from_free(family, t).map_or(f64::NEG_INFINITY, |d| loglik(&d, grouped));
    let c = maximise(objective, &free[..need], &step[..need], TOLERANCE, BUDGET);
    if crate::stats::cancel::requested() {
        return Err(FitError::Interrupted);
    }
    if !c.converged {
        return Err(FitError::NoConvergence { family });
    }
    let distribution =
        from_free(family, &c.point[..need]).ok_or(FitError::Degenerate { family })?;
    finish(distribution, c.value, need, n)
}

/// The fit, refusing a non-finite log-likelihood.
fn finish(
    distribution: Parametric,
    loglik: f64,
    need: usize,
    n: f64,
) -> Result<ParametricFit, FitError> {
    let family = distribution.family();
    if !loglik.is_finite() {
        return Err(FitError::Degenerate { family });
    }
    Ok(ParametricFit {
        distribution,
        summary: FitSummary::weighted(loglik, need, n),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The binned log-likelihood written directly from the cdf, for the checks below.
    fn binned(d: &Parametric, xs: &[f64], r: f64) -> f64 {
        xs.iter()
            .map(|&x| (d.cdf(x + r / 2.0) - d.cdf(x - r / 2.0)).ln())
            .sum()
    }

    #[test]
    fn binned_loglik_is_the_sum_of_log_bin_probabilities() {
        let xs = [9.0, 10.0, 10.0, 11.0, 10.0, 12.0, 9.0, 10.0];
        for family in [
            Family::Normal,
            Family::Gamma,
            Family::Weibull,
            Family::LogNormal,
        ] {
            let f = fit_rounded(&xs, family, 1.0).unwrap();
            let direct = binned(&f.distribution, &xs, 1.0);
            // Tolerance 1e-12 relative: the same sum, taken once from tails and merged.
            assert!(
                (f.summary.loglik - direct).abs() < 1e-12 * direct.abs(),
                "{family}"
            );
        }
    }

    #[test]
    fn binned_fit_is_a_maximum() {
        // Moving any parameter by 1e-4 relative lowers the binned likelihood: a local
        // maximum (checked against the direct sum, not the optimiser's own).
        let xs = [3.0, 4.0, 4.0, 5.0, 5.0, 5.0, 6.0, 7.0, 7.0, 9.0];
        for family in Family::ALL {
            let f = fit_rounded(&xs, family, 1.0).unwrap();
            let p: Vec<f64> = f
                .distribution
                .parameters()
                .into_iter()
                .map(|(_, v)| v)
                .collect();
            let at = binned(&f.distribution, &xs, 1.0);
            for i in 0..p.len() {
                for s in [1.0 + 1e-4, 1.0 - 1e-4] {
                    let mut q = p.clone();
                    q[i] *= s;
                    if let Ok(d) = Parametric::new(family, &q) {
                        assert!(binned(&d, &xs, 1.0) <= at + 1e-12, "{family} {i} {s}");
                    }
                }
            }
        }
    }

    #[test]
    fn uniform_on_rounded_readings_may_cut_an_end_bin() {
        // One reading in the lowest bin [2.5, 3.5], one in the highest [8.5, 9.5], eight
        // between: the binned likelihood ln((3.5 - min) / W) + ln((max - 8.5) / W) +
        // 8 ln(1 / W), W = max - min, has zero derivatives at 3.5 - min = max - 8.5 =
        // W / 10, so W = 5 + W / 5 = 6.25: min = 2.875, max = 9.125, inside the end bins.
        let xs = [3.0, 4.0, 4.0, 5.0, 5.0, 5.0, 6.0, 7.0, 7.0, 9.0];
        let f = fit_rounded(&xs, Family::Uniform, 1.0).unwrap();
        let p = f.distribution.parameters();
        // Tolerance 1e-6: the simplex stops on the log-likelihood at 1e-13 relative,
        // which leaves the parameters about sqrt(1e-13) from the maximum.
        assert!(
            (p[0].1 - 2.875).abs() < 1e-6 && (p[1].1 - 9.125).abs() < 1e-6,
            "{p:?}"
        );
    }

    #[test]
    fn zeros_are_readings_on_a_grid() {
        let f = fit_rounded(&[0.0, 1.0, 1.0, 2.0, 3.0], Family::Gamma, 1.0).unwrap();
        assert!(f.summary.loglik.is_finite());
        assert!(matches!(
            fit_rounded(&[-1.0, 1.0], Family::Gamma, 1.0),
            Err(FitError::NonPositive { .. })
        ));
    }

    #[test]
    fn uncensored_readings_give_the_exact_fit() {
        // With every code 0 the censored likelihood is the ordinary one; the simplex
        // reaches the closed-form and Newton maxima (tolerance 1e-9 relative on the
        // log-likelihood, 1e-5 on parameters: the simplex stops on the values).
        let xs = [0.8, 1.7, 2.2, 2.9, 3.1, 4.6, 5.3, 7.7];
        for family in Family::ALL {
            let exact = fit(&xs, family).unwrap();
            let (c, counts) = fit_censored(&xs, &[0; 8], family).unwrap();
            assert_eq!(counts.exact, 8);
            let (a, b) = (c.summary.loglik, exact.summary.loglik);
            assert!(a >= b - 1e-9 * b.abs(), "{family}: {a} < {b}");
            if family != Family::Uniform {
                for ((_, u), (_, v)) in c
                    .distribution
                    .parameters()
                    .into_iter()
                    .zip(exact.distribution.parameters())
                {
                    assert!((u - v).abs() < 1e-5 * v.abs(), "{family}: {u} vs {v}");
                }
            }
        }
    }

    #[test]
    fn bad_censored_input_is_named() {
        let fam = Family::Normal;
        assert_eq!(
            fit_censored(&[1.0, 2.0], &[0, 2], fam).unwrap_err(),
            FitError::BadCode(2)
        );
        assert!(matches!(
            fit_censored(&[1.0, 2.0], &[1, -1], fam).unwrap_err(),
            FitError::AllCensored {
                left: 1,
                right: 1,
                ..
            }
        ));
        assert!(matches!(
            fit_censored(&[1.0, 0.0, 2.0], &[0, -1, 0], Family::Weibull).unwrap_err(),
            FitError::NonPositive { value: 0.0, .. }
        ));
    }
}
