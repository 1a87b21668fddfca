//! The mixture as a distribution: validation, cdf, density, quantile, moments.

use statrs::distribution::{Continuous, ContinuousCDF, Normal};

use super::{Component, MAX_COMPONENTS, MixtureError};
use crate::stats::StatsError;
use crate::stats::fit::normal_cdf;
use crate::stats::roots::invert_cdf;
use crate::stats::sum::NeumaierSum;

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
        let p = crate::stats::check_probability(p)?;
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
