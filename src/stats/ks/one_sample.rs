//! The one-sample test of data against a continuous cdf.

use super::*;

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
