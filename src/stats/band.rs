//! The Dvoretzky-Kiefer-Wolfowitz confidence band of an empirical cdf.
//!
//! A. Dvoretzky, J. Kiefer and J. Wolfowitz, "Asymptotic minimax character of the sample
//! distribution function and of the classical multinomial estimator", *Annals of
//! Mathematical Statistics* 27(3), 642-669, 1956, bound the chance that the empirical cdf
//! `F_n` of n independent draws strays from the true cdf `F` anywhere:
//! `P(sup_t |F_n(t) - F(t)| > e) <= C exp(-2 n e^2)`. P. Massart, "The tight constant in
//! the Dvoretzky-Kiefer-Wolfowitz inequality", *Annals of Probability* 18(3), 1269-1283,
//! 1990, showed that `C = 2` holds for every n (for `exp(-2 n e^2) <= 1/2`). Setting the
//! right side to `alpha` gives
//!
//! `e = sqrt(ln(2 / alpha) / (2 n))`,
//!
//! and `[F_n(t) - e, F_n(t) + e]`, clipped to `[0, 1]`, holds `F(t)` for every t at once
//! with probability at least `1 - alpha`, whatever the continuous `F`. The band needs no
//! assumption about the shape of `F`; the price is that it is wider than pointwise
//! intervals. With frequency weights, n is the total weight.

use super::StatsError;

/// The half-width `e = sqrt(ln(2 / alpha) / (2 n))` of the DKW band with Massart's
/// constant.
///
/// # Errors
/// [`StatsError::AlphaOutOfRange`] unless `0 < alpha < 1`.
///
/// # Example
/// ```
/// // n = 100, alpha = 0.05: e = sqrt(ln(40) / 200) = 0.1358...
/// let e = ogive::stats::band::dkw_epsilon(100.0, 0.05).unwrap();
/// assert!((e - (40f64.ln() / 200.0).sqrt()).abs() < 1e-15);
/// ```
pub fn dkw_epsilon(n: f64, alpha: f64) -> Result<f64, StatsError> {
    if !(alpha > 0.0 && alpha < 1.0) {
        return Err(StatsError::AlphaOutOfRange(alpha));
    }
    Ok(((2.0 / alpha).ln() / (2.0 * n)).sqrt())
}

/// A confidence band at one point: `lower <= F(t) <= upper`.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Band {
    /// Lower limit, at least 0.
    pub lower: f64,
    /// Upper limit, at most 1.
    pub upper: f64,
}

/// The DKW band around an empirical cdf value `cdf` from n observations (or total weight
/// n), clipped to `[0, 1]`. With `n <= 0` the band is all of `[0, 1]`.
///
/// # Errors
/// [`StatsError::AlphaOutOfRange`] unless `0 < alpha < 1`.
///
/// # Example
/// ```
/// use ogive::stats::band::dkw_band;
/// let b = dkw_band(0.95, 100.0, 0.05).unwrap();
/// assert_eq!(b.upper, 1.0); // 0.95 + 0.1358 is clipped
/// assert!((b.lower - (0.95 - (40f64.ln() / 200.0).sqrt())).abs() < 1e-15);
/// ```
pub fn dkw_band(cdf: f64, n: f64, alpha: f64) -> Result<Band, StatsError> {
    let e = dkw_epsilon(n, alpha)?;
    if n.is_nan() || n <= 0.0 || e.is_nan() {
        return Ok(Band {
            lower: 0.0,
            upper: 1.0,
        });
    }
    Ok(Band {
        lower: (cdf - e).clamp(0.0, 1.0),
        upper: (cdf + e).clamp(0.0, 1.0),
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn formula_and_limits() {
        // Massart (1990) with alpha = 0.1, n = 50: e = sqrt(ln(20) / 100), by hand.
        let e = dkw_epsilon(50.0, 0.1).unwrap();
        assert!((e - (20f64.ln() / 100.0).sqrt()).abs() < 1e-15);
        for bad in [0.0, 1.0, -0.5, 1.5, f64::NAN] {
            assert!(dkw_epsilon(10.0, bad).is_err(), "{bad}");
        }
        let b = dkw_band(0.02, 50.0, 0.1).unwrap();
        assert_eq!(b.lower, 0.0);
        assert_eq!(
            dkw_band(0.5, 0.0, 0.1).unwrap(),
            Band {
                lower: 0.0,
                upper: 1.0
            }
        );
    }
}
