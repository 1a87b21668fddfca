//! The Gaussian kernel density estimate of an empirical distribution.
//!
//! The estimate puts a normal density of standard deviation `h` (the bandwidth) on each
//! observation and averages them:
//!
//! `f(t) = 1 / (W h) * sum_i w_i phi((t - x_i) / h)`, with `phi` the standard normal
//! density and `W` the total weight (n unweighted).
//!
//! The bandwidth comes from a rule of thumb for normal data, scaled by the sample standard
//! deviation `s` (divisor `W - 1`):
//!
//! - Scott's rule, `h = s W^(-1/5)`: D. W. Scott, *Multivariate Density Estimation*,
//!   Wiley, 1992 (the default);
//! - Silverman's rule, `h = s (3 W / 4)^(-1/5)`: B. W. Silverman, *Density Estimation for
//!   Statistics and Data Analysis*, Chapman and Hall, 1986 (in the multivariate form
//!   `(n (d + 2) / 4)^(-1/(d + 4))` with d = 1, as `scipy.stats.gaussian_kde` uses it);
//! - or a bandwidth given in the units of x.
//!
//! Weights are frequency weights: the estimate equals the one of the sample with each
//! value repeated as often as its weight says (scipy's own weighted estimate instead uses
//! an effective sample size `(sum w)^2 / sum w^2`; the two agree for unit weights).
//!
//! Terms more than 40 bandwidths from `t` are skipped: `exp(-40^2 / 2)` underflows to
//! zero in double precision, so skipping them changes no bit of the sum and makes each
//! evaluation a binary search plus the nearby terms.

use std::f64::consts::PI;

use super::StatsError;
use super::moments::Moments;
use super::sample::Sample;
use super::sum::NeumaierSum;

/// How the bandwidth is chosen: see [`Bandwidth::parse`] and [`Bandwidth::fixed`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Bandwidth {
    /// Scott's rule, `s W^(-1/5)`.
    Scott,
    /// Silverman's rule, `s (3 W / 4)^(-1/5)`.
    Silverman,
    /// A fixed kernel standard deviation, in the units of x.
    Fixed(f64),
}

impl Bandwidth {
    /// Reads a rule name: `scott` or `silverman` (any case, surrounding spaces ignored).
    ///
    /// # Errors
    /// [`StatsError::UnknownBandwidthRule`] for any other name.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::kde::Bandwidth;
    /// assert_eq!(Bandwidth::parse("Silverman"), Ok(Bandwidth::Silverman));
    /// assert!(Bandwidth::parse("wide").is_err());
    /// ```
    pub fn parse(name: &str) -> Result<Bandwidth, StatsError> {
        let name = name.trim();
        if name.eq_ignore_ascii_case("scott") {
            Ok(Bandwidth::Scott)
        } else if name.eq_ignore_ascii_case("silverman") {
            Ok(Bandwidth::Silverman)
        } else {
            Err(StatsError::UnknownBandwidthRule(name.to_string()))
        }
    }

    /// A fixed bandwidth.
    ///
    /// # Errors
    /// [`StatsError::BadBandwidth`] unless `h` is positive and finite.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::kde::Bandwidth;
    /// assert_eq!(Bandwidth::fixed(0.5), Ok(Bandwidth::Fixed(0.5)));
    /// assert!(Bandwidth::fixed(0.0).is_err());
    /// ```
    pub fn fixed(h: f64) -> Result<Bandwidth, StatsError> {
        if h > 0.0 && h.is_finite() {
            Ok(Bandwidth::Fixed(h))
        } else {
            Err(StatsError::BadBandwidth(h))
        }
    }
}

/// Terms further than this many bandwidths from the evaluation point are exactly zero.
const REACH: f64 = 40.0;

/// A kernel density estimate ready to evaluate.
///
/// # Example
/// ```
/// use ogive::stats::kde::{Bandwidth, Kde};
/// use ogive::stats::sample::Sample;
/// let s = Sample::from_values(vec![0.0]).unwrap();
/// let kde = Kde::new(&s, Bandwidth::Fixed(1.0)).unwrap();
/// // One observation, h = 1: the standard normal density, 1/sqrt(2 pi) at 0.
/// assert!((kde.density(0.0) - 0.3989422804014327).abs() < 1e-16);
/// ```
#[derive(Debug, Clone, Copy)]
pub struct Kde<'a> {
    sample: &'a Sample,
    h: f64,
    /// `1 / (W h sqrt(2 pi))`.
    scale: f64,
}

impl<'a> Kde<'a> {
    /// The estimate for a sample. `None` when the bandwidth is undefined: an empty sample,
    /// or for the rules a total weight of at most 1, an infinite value, or no spread.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::kde::{Bandwidth, Kde};
    /// use ogive::stats::sample::Sample;
    /// let s = Sample::from_values(vec![0.0, 1.0, 2.0, 3.0]).unwrap();
    /// // Scott: sd * n^(-1/5) = sqrt(5/3) * 4^(-1/5).
    /// let h = Kde::new(&s, Bandwidth::Scott).unwrap().bandwidth();
    /// assert!((h - (5.0f64 / 3.0).sqrt() * 4f64.powf(-0.2)).abs() < 1e-15);
    /// assert!(Kde::new(&Sample::from_values(vec![1.0]).unwrap(), Bandwidth::Scott).is_none());
    /// ```
    pub fn new(sample: &'a Sample, bandwidth: Bandwidth) -> Option<Kde<'a>> {
        let h = match bandwidth {
            Bandwidth::Fixed(h) => h,
            rule => rule_bandwidth(sample, rule)?,
        };
        let total = sample.total_weight();
        let scale = 1.0 / (total * h * (2.0 * PI).sqrt());
        (h > 0.0 && h.is_finite() && scale.is_finite() && !sample.is_empty()).then_some(Kde {
            sample,
            h,
            scale,
        })
    }

    /// The bandwidth `h` in use.
    pub fn bandwidth(&self) -> f64 {
        self.h
    }

    /// The estimated density at `t`; 0 at an infinite `t`.
    pub fn density(&self, t: f64) -> f64 {
        if !t.is_finite() {
            return 0.0;
        }
        let values = self.sample.values();
        let reach = REACH * self.h;
        let from = values.partition_point(|&x| x < t - reach);
        let to = values.partition_point(|&x| x <= t + reach);
        let mut s = NeumaierSum::default();
        for i in from..to {
            let x = values[i];
            if !x.is_finite() {
                continue;
            }
            let z = (t - x) / self.h;
            let k = (-0.5 * z * z).exp();
            s.add(self.sample.weights().map_or(k, |w| w[i] * k));
        }
        s.value() * self.scale
    }
}

/// The bandwidth a rule gives: `s` times Scott's or Silverman's factor.
fn rule_bandwidth(sample: &Sample, rule: Bandwidth) -> Option<f64> {
    let m = Moments::of(sample.values(), sample.weights())?;
    let s = m.sample_sd()?;
    let w = m.weight;
    let factor = match rule {
        Bandwidth::Silverman => (w * 3.0 / 4.0).powf(-0.2),
        _ => w.powf(-0.2),
    };
    Some(s * factor).filter(|h| *h > 0.0 && h.is_finite())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rules_by_hand() {
        // x = [0, 1, 2, 3]: s = sqrt(5/3). Scott: s * 4^(-1/5); Silverman: s * 3^(-1/5).
        // Hand arithmetic; tolerance 1e-15 relative.
        let s = Sample::from_values(vec![0.0, 1.0, 2.0, 3.0]).unwrap();
        let sd = (5.0f64 / 3.0).sqrt();
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-15 * b;
        let scott = Kde::new(&s, Bandwidth::Scott).unwrap().bandwidth();
        assert!(close(scott, sd * 4f64.powf(-0.2)));
        let silverman = Kde::new(&s, Bandwidth::Silverman).unwrap().bandwidth();
        assert!(close(silverman, sd * 3f64.powf(-0.2)));
    }

    #[test]
    fn two_points_by_hand() {
        // x = [-1, 1], h = 1: f(0) = 2 phi(1) / 2 = exp(-1/2) / sqrt(2 pi). 1e-15 relative.
        let s = Sample::from_values(vec![-1.0, 1.0]).unwrap();
        let kde = Kde::new(&s, Bandwidth::Fixed(1.0)).unwrap();
        let want = (-0.5f64).exp() / (2.0 * PI).sqrt();
        assert!((kde.density(0.0) - want).abs() <= 1e-15 * want);
        assert_eq!(kde.density(f64::INFINITY), 0.0);
        // Far beyond the reach every term underflows: exactly zero.
        assert_eq!(kde.density(1e6), 0.0);
    }

    #[test]
    fn whole_weights_equal_replication() {
        // Definition of frequency weights. Tolerance 1e-15 relative.
        let w = Sample::from_pairs(vec![(0.0, 2.0), (1.5, 1.0), (4.0, 3.0)]).unwrap();
        let r = Sample::from_values(vec![0.0, 0.0, 1.5, 4.0, 4.0, 4.0]).unwrap();
        for rule in [
            Bandwidth::Scott,
            Bandwidth::Silverman,
            Bandwidth::Fixed(0.7),
        ] {
            let (a, b) = (Kde::new(&w, rule).unwrap(), Kde::new(&r, rule).unwrap());
            for t in [-1.0, 0.0, 0.3, 2.0, 4.0, 6.5] {
                let (x, y) = (a.density(t), b.density(t));
                assert!((x - y).abs() <= 1e-15 * y, "{rule:?} {t}: {x} {y}");
            }
        }
    }

    #[test]
    fn undefined_bandwidths() {
        let one = Sample::from_values(vec![2.0]).unwrap();
        assert!(Kde::new(&one, Bandwidth::Scott).is_none());
        let flat = Sample::from_values(vec![2.0, 2.0]).unwrap();
        assert!(Kde::new(&flat, Bandwidth::Silverman).is_none());
        let inf = Sample::from_values(vec![1.0, 2.0, f64::INFINITY]).unwrap();
        assert!(Kde::new(&inf, Bandwidth::Scott).is_none());
        // A fixed bandwidth still works; the infinite value's mass adds no density.
        let kde = Kde::new(&inf, Bandwidth::Fixed(1.0)).unwrap();
        assert!(kde.density(1.5) > 0.0);
    }
}
