//! Kolmogorov-Smirnov tests of fit with estimated parameters (Lilliefors 1967, 1969).
//!
//! When the mean and standard deviation of a normal model (or the mean of an exponential one)
//! are estimated from the same data, the fitted cdf follows the data more closely than the true
//! one would, `D` is stochastically smaller, and the p-values of [`crate::stats::ks`] are far
//! too large. Lilliefors' correction refers `D` to its own null distribution, which does not
//! depend on the unknown parameters (they are location and scale), only on `n`.
//!
//! **Method: Monte Carlo with a fixed seed.** The null distribution is simulated: draw
//! [`REPLICATES`] samples of the same size from the standard model, fit them the same way,
//! compute `D` each time, and report `p = (1 + #{D_sim >= D}) / (1 + REPLICATES)` (the
//! Monte Carlo p-value of Davison and Hinkley 1997, never 0). The generator is seeded with
//! [`SEED`], so the same data always give the same p-value; its Monte Carlo standard error is
//! `sqrt(p (1 - p) / REPLICATES)`, 0.0022 at `p = 0.05`. Above [`MAX_SIMULATED_N`] values
//! the simulation runs at that size and the two statistics are compared through Stephens'
//! (1974) size-modified forms, whose null distributions hardly depend on `n`:
//! `D (sqrt(n) - 0.01 + 0.85 / sqrt(n))` (normal) and
//! `(D - 0.2 / n) (sqrt(n) + 0.26 + 0.5 / sqrt(n))` (exponential).
//!
//! The exponential fit is the mean (location 0). The normal fit is the mean and a standard
//! deviation whose divisor [`Scale`] chooses: `n - 1` as Lilliefors (1967) and statsmodels'
//! `lilliefors` use it, or `n`, the maximum-likelihood estimate that `dist_fit` reports.
//! The two statistics differ a little, and so do their null distributions; each is
//! simulated with its own estimator, so a p-value always matches the fit it tests.

use statrs::function::erf::erfc;

use super::ks::{TestError, one_sample_statistic};
use super::rng::Xoshiro256pp;
use super::sum::NeumaierSum;

/// Monte Carlo replicates per p-value.
pub const REPLICATES: usize = 10_000;

/// The seed of the simulation.
pub const SEED: u64 = 0x6f67_6976_655f_6c66;

/// The largest sample size simulated directly.
pub const MAX_SIMULATED_N: usize = 500;

/// The model whose parameters were estimated.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Family {
    /// Normal, mean and standard deviation estimated.
    Normal,
    /// Exponential with location 0, mean estimated.
    Exponential,
}

impl Family {
    /// The smallest sample the test accepts (4 for the normal, 3 for the exponential).
    pub fn min_n(self) -> usize {
        match self {
            Family::Normal => 4,
            Family::Exponential => 3,
        }
    }
}

/// How the standard deviation of a normal model was estimated (the exponential fit has no
/// choice to make).
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default)]
pub enum Scale {
    /// Divisor `n - 1`: Lilliefors (1967), statsmodels' `lilliefors`.
    #[default]
    SampleSd,
    /// Divisor `n`: the maximum-likelihood estimate (`dist_fit`'s normal `sd`).
    MaximumLikelihood,
}

/// The result of a Lilliefors test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct LillieforsResult {
    /// The two-sided statistic against the fitted model.
    pub d: f64,
    /// The Monte Carlo p-value.
    pub p: f64,
    /// The sample size.
    pub n: usize,
    /// The fitted location (the mean; 0 for the exponential).
    pub location: f64,
    /// The fitted scale (standard deviation, or the exponential mean).
    pub scale: f64,
}

/// The standard normal cdf, `erfc(-z / sqrt 2) / 2`.
fn normal_cdf(z: f64) -> f64 {
    0.5 * erfc(-z / std::f64::consts::SQRT_2)
}

/// Fits the family to a sorted sample and returns `(location, scale, D)`.
fn fit_and_d(sorted: &[f64], family: Family, scale: Scale) -> Result<(f64, f64, f64), TestError> {
    let n = sorted.len();
    if n < family.min_n() {
        return Err(TestError::TooFewValues {
            needed: family.min_n(),
            got: n,
        });
    }
    if sorted.iter().any(|x| !x.is_finite()) {
        return Err(TestError::Degenerate(
            "a fitted model needs finite values".into(),
        ));
    }
    let mut s = NeumaierSum::default();
    for &x in sorted {
        s.add(x);
    }
    let mean = s.value() / n as f64;
    match family {
        Family::Normal => {
            let mut ss = NeumaierSum::default();
            for &x in sorted {
                ss.add((x - mean) * (x - mean));
            }
            let divisor = match scale {
                Scale::SampleSd => n - 1,
                Scale::MaximumLikelihood => n,
            };
            let sd = (ss.value() / divisor as f64).sqrt();
            if !(sd > 0.0 && sd.is_finite()) {
                return Err(TestError::Degenerate(
                    "the values are all equal, so no normal model can be fitted".into(),
                ));
            }
            let (plus, minus) = one_sample_statistic(sorted, |x| normal_cdf((x - mean) / sd))?;
            Ok((mean, sd, plus.max(minus)))
        }
        Family::Exponential => {
            if sorted.first().is_some_and(|&x| x < 0.0) {
                return Err(TestError::Degenerate(
                    "an exponential model needs values >= 0".into(),
                ));
            }
            if !(mean > 0.0 && mean.is_finite()) {
                return Err(TestError::Degenerate(
                    "the values are all 0, so no exponential model can be fitted".into(),
                ));
            }
            let (plus, minus) = one_sample_statistic(sorted, |x| -(-x / mean).exp_m1())?;
            Ok((0.0, mean, plus.max(minus)))
        }
    }
}

/// Stephens' (1974) size-modified statistic.
fn modified(d: f64, n: usize, family: Family) -> f64 {
    let r = (n as f64).sqrt();
    match family {
        Family::Normal => d * (r - 0.01 + 0.85 / r),
        Family::Exponential => (d - 0.2 / n as f64) * (r + 0.26 + 0.5 / r),
    }
}

/// The Lilliefors test of a sorted sample: fit (the normal sd by `scale`), statistic, Monte
/// Carlo p-value.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], [`TestError::TooFewValues`] (below
/// [`Family::min_n`]), [`TestError::Degenerate`] for a constant sample, an infinite value, or
/// a negative value under the exponential model.
///
/// # Example
/// ```
/// use ogive::stats::lilliefors::{lilliefors, Family, Scale};
/// // Far from normal: many equal values and one far outlier.
/// let xs = [1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.1, 1.2, 9.0];
/// let r = lilliefors(&xs, Family::Normal, Scale::SampleSd)?;
/// assert!(r.p < 0.01);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn lilliefors(
    sorted: &[f64],
    family: Family,
    scale: Scale,
) -> Result<LillieforsResult, TestError> {
    let (location, fitted_scale, d) = fit_and_d(sorted, family, scale)?;
    let n = sorted.len();
    Ok(LillieforsResult {
        d,
        p: lilliefors_p(d, n, family, scale),
        n,
        location,
        scale: fitted_scale,
    })
}

/// The Monte Carlo p-value of a Lilliefors statistic `d` for sample size `n`, the normal sd
/// estimated by `scale` (see the module docs). NaN for NaN `d` or `n` below
/// [`Family::min_n`].
///
/// # Example
/// ```
/// use ogive::stats::lilliefors::{lilliefors_p, Family, Scale};
/// // Lilliefors (1967, table; quoted from memory): the 5% critical value for n = 20 is 0.190.
/// let p = lilliefors_p(0.19, 20, Family::Normal, Scale::SampleSd);
/// assert!((p - 0.05).abs() < 0.01);
/// ```
pub fn lilliefors_p(d: f64, n: usize, family: Family, scale: Scale) -> f64 {
    if d.is_nan() || n < family.min_n() {
        return f64::NAN;
    }
    let n_sim = n.min(MAX_SIMULATED_N);
    let observed = modified(d, n, family);
    let mut rng = Xoshiro256pp::new(SEED ^ (n_sim as u64) ^ ((family as u64) << 32));
    let mut buf = vec![0.0f64; n_sim];
    let mut at_least = 0usize;
    for _ in 0..REPLICATES {
        for v in buf.iter_mut() {
            *v = match family {
                Family::Normal => rng.normal(),
                Family::Exponential => rng.exponential(),
            };
        }
        buf.sort_unstable_by(f64::total_cmp);
        // Simulated samples are continuous and non-degenerate, so the fit cannot fail.
        if let Ok((_, _, ds)) = fit_and_d(&buf, family, scale)
            && modified(ds, n_sim, family) >= observed
        {
            at_least += 1;
        }
    }
    (1 + at_least) as f64 / (1 + REPLICATES) as f64
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_statsmodels_and_an_independent_simulation() {
        // Fixture records from tests/fixtures/gen_compare.py:
        // - d: statsmodels.stats.diagnostic.lilliefors(x, dist=F, pvalmethod='table'); 1e-9
        //   relative (statrs' erfc and scipy's ndtr differ near 1e-11);
        // - p_mc: an independent numpy Monte Carlo of the same null distribution (B = 1e5
        //   replicates up to n = 300, 2e4 above, at the actual n). Tolerance: 4 standard
        //   errors of the difference of the two estimates, plus 0.005 above n = 500 for
        //   Stephens' size modification.
        // statsmodels' own table p-value is not the reference for p: it interpolates linearly
        // between tabulated sizes and is off by up to 0.05 here (n = 60, 150, 250, 700).
        let f = crate::stats::fixtures::compare();
        let mut compared = 0;
        for case in f["lilliefors"].as_array().unwrap() {
            let x = crate::stats::fixtures::floats(&case["x"]);
            let family = match case["dist"].as_str().unwrap() {
                "norm" => Family::Normal,
                _ => Family::Exponential,
            };
            let r = lilliefors(&x, family, Scale::SampleSd).unwrap();
            let d = case["d"].as_f64().unwrap();
            assert!((r.d - d).abs() <= 1e-9 * d, "d {} vs {d}", r.d);
            let p = case["p_mc"].as_f64().unwrap();
            let b = case["mc_replicates"].as_f64().unwrap();
            let se = (p * (1.0 - p) * (1.0 / REPLICATES as f64 + 1.0 / b)).sqrt();
            let extra = if x.len() > MAX_SIMULATED_N {
                0.005
            } else {
                0.0
            };
            assert!(
                (r.p - p).abs() <= 4.0 * se + extra,
                "n={} {family:?}: {} vs {p}",
                x.len(),
                r.p
            );
            compared += 1;
        }
        assert_eq!(compared, 14);
    }

    #[test]
    fn rejects_degenerate_samples() {
        assert!(matches!(
            lilliefors(&[2.0, 2.0, 2.0, 2.0], Family::Normal, Scale::SampleSd),
            Err(TestError::Degenerate(_))
        ));
        assert!(matches!(
            lilliefors(&[-1.0, 2.0, 3.0], Family::Exponential, Scale::SampleSd),
            Err(TestError::Degenerate(_))
        ));
        assert!(matches!(
            lilliefors(&[1.0, 2.0, 3.0], Family::Normal, Scale::SampleSd),
            Err(TestError::TooFewValues { needed: 4, got: 3 })
        ));
    }
}
