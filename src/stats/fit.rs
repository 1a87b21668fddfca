//! Parametric families and their maximum-likelihood fits.
//!
//! [`fit`] estimates the parameters of one [`Family`] from a sample by maximum likelihood
//! and reports the maximised log-likelihood with the information criteria
//! `AIC = 2p - 2 loglik` (Akaike 1974) and `BIC = p ln n - 2 loglik` (Schwarz 1978),
//! p being the number of parameters. [`Parametric`] is a family with its parameters: it
//! evaluates the cdf, density and quantiles through `statrs`.
//!
//! The estimators:
//!
//! - **normal** `(mean, sd)`: the sample mean and the standard deviation with divisor n.
//! - **lognormal** `(mu, sigma)`: the same on `ln x`; mu and sigma are the mean and the
//!   standard deviation of `ln x`.
//! - **exponential** `(rate)`: one over the sample mean.
//! - **gamma** `(shape, scale)`: the shape a solves `ln a - digamma(a) = s` with
//!   `s = ln(mean x) - mean(ln x)`, by Newton's method on a from the approximation of
//!   Minka (2002, "Estimating a Gamma distribution", eq. 3), safeguarded by a bracket;
//!   then `scale = mean / a`. The derivative uses the trigamma function.
//! - **weibull** `(shape, scale)`: the two-parameter Weibull. The shape k solves
//!   `sum(x^k ln x) / sum(x^k) - 1/k - mean(ln x) = 0`, an increasing function of k
//!   (Cohen 1965, "Maximum likelihood estimation in the Weibull distribution based on
//!   complete and on censored samples", Technometrics 7), by safeguarded Newton from the
//!   moment estimate `pi / (sqrt 6 sd(ln x))`; then `scale = (mean x^k)^(1/k)`. The sums
//!   run on `x / max x` in log space, so large k or large x never overflow.
//! - **uniform** `(min, max)`: the sample extremes.
//!
//! Location parameters are fixed at 0 for the positive families (as `floc=0` in scipy).
//!
//! # Errors and NaN policy
//!
//! Values must be finite ([`FitError::NotFinite`]). The positive families need every value
//! `> 0` ([`FitError::NonPositive`]), except the exponential, which takes zeros as long
//! as not every value is 0 (its MLE only needs a positive mean). A family needs at least as many values as it has
//! parameters ([`FitError::TooFewPoints`]). When all values are equal the likelihood of
//! every family but the exponential grows without bound, and the exponential's too when
//! they all equal 0 ([`FitError::AllEqual`]); when
//! they are so nearly equal, or so large, that the estimates leave the range of doubles,
//! [`FitError::Degenerate`]. No fit ever returns a NaN or infinite parameter.

use std::fmt;

use statrs::distribution::{
    Continuous, ContinuousCDF, Exp, Gamma, LogNormal, Normal, Uniform, Weibull,
};
use statrs::function::gamma::{digamma, ln_gamma};
use statrs::statistics::Distribution;

use super::StatsError;
use super::grow;
use super::incomplete_gamma::{self, LARGE_SHAPE};
use super::roots::{invert_cdf, solve_increasing};
use super::sum::NeumaierSum;

/// A parametric family that [`fit`] estimates.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
pub enum Family {
    /// Normal (Gaussian): `mean`, `sd`.
    Normal,
    /// Lognormal: `mu`, `sigma` (the mean and sd of `ln x`).
    LogNormal,
    /// Exponential: `rate`.
    Exponential,
    /// Gamma: `shape`, `scale`.
    Gamma,
    /// Two-parameter Weibull: `shape`, `scale`.
    Weibull,
    /// Continuous uniform: `min`, `max`.
    Uniform,
}

impl Family {
    /// Every family, in the order error messages list them.
    pub const ALL: [Family; 6] = [
        Family::Normal,
        Family::LogNormal,
        Family::Exponential,
        Family::Gamma,
        Family::Weibull,
        Family::Uniform,
    ];

    /// The family's name as SQL and the model JSON spell it.
    ///
    /// # Example
    /// ```
    /// assert_eq!(ogive::stats::fit::Family::LogNormal.name(), "lognormal");
    /// ```
    pub fn name(self) -> &'static str {
        match self {
            Family::Normal => "normal",
            Family::LogNormal => "lognormal",
            Family::Exponential => "exponential",
            Family::Gamma => "gamma",
            Family::Weibull => "weibull",
            Family::Uniform => "uniform",
        }
    }

    /// The family of a name, ignoring case and surrounding spaces.
    ///
    /// # Errors
    /// [`FitError::UnknownFamily`], whose message lists the supported names.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::Family;
    /// assert_eq!(Family::from_name(" Weibull "), Ok(Family::Weibull));
    /// assert!(Family::from_name("poisson").is_err());
    /// ```
    pub fn from_name(name: &str) -> Result<Family, FitError> {
        let wanted = name.trim();
        Family::ALL
            .into_iter()
            .find(|f| f.name().eq_ignore_ascii_case(wanted))
            .ok_or_else(|| FitError::UnknownFamily(name.to_string()))
    }

    /// The supported names, comma separated.
    ///
    /// # Example
    /// ```
    /// assert_eq!(
    ///     ogive::stats::fit::Family::names(),
    ///     "normal, lognormal, exponential, gamma, weibull, uniform"
    /// );
    /// ```
    pub fn names() -> String {
        Family::ALL.map(Family::name).join(", ")
    }

    /// The parameters' names, in the order [`Parametric::new`] takes them.
    ///
    /// # Example
    /// ```
    /// assert_eq!(ogive::stats::fit::Family::Gamma.parameter_names(), ["shape", "scale"]);
    /// ```
    pub fn parameter_names(self) -> &'static [&'static str] {
        match self {
            Family::Normal => &["mean", "sd"],
            Family::LogNormal => &["mu", "sigma"],
            Family::Exponential => &["rate"],
            Family::Gamma | Family::Weibull => &["shape", "scale"],
            Family::Uniform => &["min", "max"],
        }
    }

    /// Whether the family lives on `x > 0`.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::Family;
    /// assert!(Family::Gamma.needs_positive() && !Family::Normal.needs_positive());
    /// ```
    pub fn needs_positive(self) -> bool {
        matches!(
            self,
            Family::LogNormal | Family::Exponential | Family::Gamma | Family::Weibull
        )
    }
}

impl fmt::Display for Family {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(self.name())
    }
}

/// Why a fit or a parameter set was refused.
#[derive(Debug, Clone, PartialEq)]
pub enum FitError {
    /// A family name that is not one of [`Family::ALL`].
    UnknownFamily(String),
    /// Fewer values than the family has parameters.
    TooFewPoints {
        family: Family,
        need: usize,
        got: usize,
    },
    /// An infinite (or NaN) value.
    NotFinite(f64),
    /// A value `<= 0` for a family on `x > 0`.
    NonPositive { family: Family, value: f64 },
    /// Every value is the same, so the likelihood has no maximum.
    AllEqual { family: Family, value: f64 },
    /// The estimates leave the range of doubles (values nearly equal, or huge).
    Degenerate { family: Family },
    /// A parameter outside its domain (when building a [`Parametric`]).
    BadParameter {
        family: Family,
        name: &'static str,
        value: f64,
        rule: &'static str,
    },
    /// The wrong number of parameters (when building a [`Parametric`]).
    ParameterCount { family: Family, got: usize },
    /// A frequency weight that is not finite and `> 0`.
    BadWeight(f64),
    /// A censoring code other than -1, 0 or 1.
    BadCode(i64),
    /// Every reading is censored, so no likelihood pins the family down.
    AllCensored {
        family: Family,
        left: u64,
        right: u64,
    },
    /// The numerical maximisation did not settle within its budget.
    NoConvergence { family: Family },
    /// The engine asked the fit to stop ([`crate::stats::cancel`]).
    Interrupted,
    /// Memory ran out while holding `held` values ([`crate::stats::grow`]).
    OutOfMemory { held: usize },
}

impl From<crate::stats::grow::OutOfMemory> for FitError {
    fn from(e: crate::stats::grow::OutOfMemory) -> FitError {
        FitError::OutOfMemory { held: e.held }
    }
}

impl fmt::Display for FitError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            FitError::UnknownFamily(name) => write!(
                f,
                "unknown family '{}'; supported: {} (for a Gaussian mixture use dist_mixture)",
                crate::stats::echo(name),
                Family::names()
            ),
            FitError::TooFewPoints { family, need, got } => {
                let a = article(*family);
                write!(
                    f,
                    "{a} {family} fit needs at least {need} values, got {got}"
                )
            }
            FitError::NotFinite(v) => {
                write!(f, "values must be finite, got {v}; filter such rows out")
            }
            FitError::NonPositive { family, value } => write!(
                f,
                "{a} {family} fit needs values {bound}, got {value}; filter such rows out or fit \
                 normal or uniform",
                a = article(*family),
                bound = if *family == Family::Exponential {
                    ">= 0"
                } else {
                    "> 0"
                }
            ),
            FitError::AllEqual { family, value } => write!(
                f,
                "all values equal {value}, so {a} {family} fit has no maximum likelihood; \
                 give data with some spread",
                a = article(*family)
            ),
            FitError::Degenerate { family } => write!(
                f,
                "the {family} likelihood has no finite maximum for these values (nearly equal, \
                 or beyond double precision); rescale the data"
            ),
            FitError::BadParameter {
                family,
                name,
                value,
                rule,
            } => write!(f, "{family} {name} must be {rule}, got {value}"),
            FitError::ParameterCount { family, got } => write!(
                f,
                "a {family} model has parameters {}, got {got} values",
                family.parameter_names().join(", ")
            ),
            FitError::BadWeight(w) => write!(
                f,
                "weights must be finite and > 0 to fit, got {w}; drop rows of weight 0"
            ),
            FitError::BadCode(c) => write!(
                f,
                "c must be 0 (exact), -1 (left-censored: at or below x) or 1 (right-censored: \
                 above x), got {c}"
            ),
            FitError::AllCensored {
                family,
                left,
                right,
            } => write!(
                f,
                "every reading is censored ({left} left, {right} right), so {a} {family} fit has \
                 no maximum likelihood; it needs at least one exact reading (c = 0)",
                a = article(*family)
            ),
            FitError::Interrupted => f.write_str("interrupted"),
            FitError::OutOfMemory { held } => write!(
                f,
                "ran out of memory holding {held} values for the fit; fit a smaller group \
                 (GROUP BY, WHERE) or raise the memory limit"
            ),
            FitError::NoConvergence { family } => write!(
                f,
                "the {family} likelihood did not reach its maximum within the evaluation budget; \
                 rescale the data or try another family"
            ),
        }
    }
}

impl std::error::Error for FitError {}

/// "a" or "an" before a family's name.
fn article(family: Family) -> &'static str {
    if family == Family::Exponential {
        "an"
    } else {
        "a"
    }
}

/// A family with its parameters: a distribution that can be evaluated.
#[derive(Debug, Clone, PartialEq)]
pub struct Parametric {
    family: Family,
    parameters: [f64; 2],
    law: Law,
}

/// The statrs distribution behind a [`Parametric`], built once after validation.
#[derive(Debug, Clone, PartialEq)]
enum Law {
    Normal(Normal),
    LogNormal(LogNormal),
    Exponential(Exp),
    Gamma(Gamma),
    /// With `scale^-shape` as statrs computes it: statrs' product forms are used while it
    /// is a normal double, the log-space forms of [`weibull_cdf`] and friends otherwise.
    Weibull(Weibull, f64),
    Uniform(Uniform),
}

/// Checks one parameter against a rule.
fn check(
    family: Family,
    name: &'static str,
    value: f64,
    ok: bool,
    rule: &'static str,
) -> Result<f64, FitError> {
    if ok && value.is_finite() {
        Ok(value)
    } else {
        Err(FitError::BadParameter {
            family,
            name,
            value,
            rule,
        })
    }
}

impl Parametric {
    /// A family with parameters given in the order of [`Family::parameter_names`].
    ///
    /// # Errors
    /// [`FitError::ParameterCount`] for the wrong number of values;
    /// [`FitError::BadParameter`] naming the first parameter outside its domain (every
    /// parameter must be finite; scales, rates and shapes `> 0`; uniform `min < max`).
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Exponential, &[2.0])?;
    /// assert_eq!(d.mean(), Some(0.5));
    /// assert!(Parametric::new(Family::Normal, &[0.0, -1.0]).is_err());
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn new(family: Family, parameters: &[f64]) -> Result<Parametric, FitError> {
        let names = family.parameter_names();
        if parameters.len() != names.len() {
            return Err(FitError::ParameterCount {
                family,
                got: parameters.len(),
            });
        }
        let a = parameters[0];
        let b = parameters.get(1).copied().unwrap_or(0.0);
        let positive = |i: usize, v: f64| check(family, names[i], v, v > 0.0, "finite and > 0");
        let finite = |i: usize, v: f64| check(family, names[i], v, true, "finite");
        // Each constructor below succeeds once its parameters pass these checks; the
        // `map_err` is a second line of defence, never reached for checked values.
        let bad = |i: usize, v: f64| FitError::BadParameter {
            family,
            name: names[i],
            value: v,
            rule: "in the family's domain",
        };
        let law = match family {
            Family::Normal => {
                Law::Normal(Normal::new(finite(0, a)?, positive(1, b)?).map_err(|_| bad(1, b))?)
            }
            Family::LogNormal => Law::LogNormal(
                LogNormal::new(finite(0, a)?, positive(1, b)?).map_err(|_| bad(1, b))?,
            ),
            Family::Exponential => {
                Law::Exponential(Exp::new(positive(0, a)?).map_err(|_| bad(0, a))?)
            }
            Family::Gamma => {
                let (shape, scale) = (positive(0, a)?, positive(1, b)?);
                let rate = check(family, "scale", b, (1.0 / scale).is_finite(), "> 1e-308")?;
                Law::Gamma(Gamma::new(shape, 1.0 / rate).map_err(|_| bad(1, b))?)
            }
            Family::Weibull => Law::Weibull(
                Weibull::new(positive(0, a)?, positive(1, b)?).map_err(|_| bad(1, b))?,
                b.powf(-a),
            ),
            Family::Uniform => {
                let min = finite(0, a)?;
                let max = check(family, "max", b, b > min, "finite and greater than min")?;
                Law::Uniform(Uniform::new(min, max).map_err(|_| bad(1, b))?)
            }
        };
        Ok(Parametric {
            family,
            parameters: [a, b],
            law,
        })
    }

    /// The family.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Weibull, &[1.5, 2.0])?;
    /// assert_eq!(d.family(), Family::Weibull);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn family(&self) -> Family {
        self.family
    }

    /// The parameters, named, in the order of [`Family::parameter_names`].
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Normal, &[1.0, 2.0])?;
    /// assert_eq!(d.parameters(), vec![("mean", 1.0), ("sd", 2.0)]);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn parameters(&self) -> Vec<(&'static str, f64)> {
        self.family
            .parameter_names()
            .iter()
            .copied()
            .zip(self.parameters)
            .collect()
    }

    /// The cumulative distribution function at `t`, in `[0, 1]`. NaN `t` gives NaN.
    /// statrs evaluates it, except for the normal and lognormal (through [`normal_cdf`])
    /// and the exponential (`-expm1(-rate t)`, exact for small t).
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Uniform, &[0.0, 4.0])?;
    /// assert_eq!(d.cdf(1.0), 0.25);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn cdf(&self, t: f64) -> f64 {
        // The series and continued fractions behind the gamma cdf (statrs) can round a few
        // ulps past 1 (1 + 1.6e-14 at a subnormal shape): a probability is clamped to
        // [0, 1]. NaN stays NaN.
        self.raw_cdf(t).clamp(0.0, 1.0)
    }

    fn raw_cdf(&self, t: f64) -> f64 {
        let [a, b] = self.parameters;
        match &self.law {
            Law::Normal(_) => normal_cdf(t, a, b),
            Law::LogNormal(_) if t <= 0.0 => 0.0,
            Law::LogNormal(_) => normal_cdf(t.ln(), a, b),
            // statrs computes 1 - exp(-rate t), which loses all digits for small t.
            Law::Exponential(_) if t <= 0.0 => 0.0,
            Law::Exponential(_) => -(-a * t).exp_m1(),
            Law::Gamma(_) if a >= LARGE_SHAPE => incomplete_gamma::regularized(a, t / b).0,
            Law::Gamma(d) => {
                // statrs evaluates P(shape, t / scale) and panics when t / scale
                // underflows to 0 or overflows; those ends are 0 and 1 by definition.
                // It also gives 0 for a subnormal t / scale (as "equal to 0 within four
                // ulps"); there the leading term of the series, x^shape / Gamma(shape +
                // 1), is exact to within a relative 1e-300.
                let x = t * (1.0 / b);
                if t.is_nan() || (f64::MIN_POSITIVE..f64::INFINITY).contains(&x) {
                    d.cdf(t)
                } else if x > 0.0 && x < f64::MIN_POSITIVE {
                    (a * x.ln() - ln_gamma(a + 1.0)).exp().min(1.0)
                } else if x > 0.0 {
                    1.0
                } else {
                    0.0
                }
            }
            Law::Weibull(d, inverse) => weibull_cdf(d, *inverse, a, b, t),
            Law::Uniform(d) if (b - a).is_finite() => d.cdf(t),
            Law::Uniform(_) => wide_uniform_cdf(a, b, t),
        }
    }

    /// The density at `t` (0 outside the support; `+inf` where a gamma or Weibull with
    /// shape below 1 has its pole at 0). NaN `t` gives NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Exponential, &[2.0])?;
    /// assert_eq!(d.pdf(0.0), 2.0);
    /// // Far in the upper tail the density underflows to 0 (statrs alone gives NaN there).
    /// assert_eq!(Parametric::new(Family::Gamma, &[4.0, 2.0])?.pdf(1e300), 0.0);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn pdf(&self, t: f64) -> f64 {
        // statrs' gamma and Weibull densities multiply a power of t by an exponential;
        // far in the upper tail the power overflows while the exponential underflows,
        // inf * 0 = NaN. Their log densities stay finite (or -inf) there.
        let or_log = |v: f64, ln: &dyn Fn() -> f64| {
            if v.is_nan() && !t.is_nan() {
                ln().exp()
            } else {
                v
            }
        };
        match &self.law {
            Law::Normal(d) => or_log(d.pdf(t), &|| d.ln_pdf(t)),
            Law::LogNormal(d) => or_log(d.pdf(t), &|| d.ln_pdf(t)),
            Law::Exponential(d) => d.pdf(t),
            Law::Gamma(_) if self.parameters[0] >= LARGE_SHAPE => {
                let [shape, scale] = self.parameters;
                (incomplete_gamma::ln_density(shape, t / scale) - scale.ln()).exp()
            }
            Law::Gamma(d) => or_log(d.pdf(t), &|| d.ln_pdf(t)),
            // At 0 the density is scale^-1 for shape 1 and 0 or +inf otherwise (the values
            // statrs gives while scale^-shape is finite).
            Law::Weibull(..) if t == 0.0 => match self.parameters[0] {
                1.0 => 1.0 / self.parameters[1],
                k if k > 1.0 => 0.0,
                _ => f64::INFINITY,
            },
            Law::Weibull(d, inverse) if weibull_products_hold(*inverse, self.parameters[0], t) => {
                or_log(d.pdf(t), &|| d.ln_pdf(t))
            }
            Law::Weibull(..) => weibull_log_pdf(self.parameters[0], self.parameters[1], t).exp(),
            Law::Uniform(d) if (self.parameters[1] - self.parameters[0]).is_finite() => d.pdf(t),
            Law::Uniform(_) if t < self.parameters[0] || t > self.parameters[1] => 0.0,
            Law::Uniform(_) => 0.5 / (0.5 * self.parameters[1] - 0.5 * self.parameters[0]),
        }
    }

    /// The survival function `1 - cdf(t)` at `t`, in `[0, 1]`, computed in the upper tail
    /// directly (not as a difference), so that it keeps its relative accuracy where it is
    /// small. NaN `t` gives NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Exponential, &[1.0])?;
    /// // exp(-40): 1 - cdf(40) would be 0.
    /// assert!((d.sf(40.0) / (-40f64).exp() - 1.0).abs() < 1e-15);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn sf(&self, t: f64) -> f64 {
        let [a, b] = self.parameters;
        match &self.law {
            _ if t.is_nan() => f64::NAN,
            Law::Normal(_) => normal_cdf(-t, -a, b),
            Law::LogNormal(_) if t <= 0.0 => 1.0,
            Law::LogNormal(_) => normal_cdf(-t.ln(), -a, b),
            Law::Exponential(_) if t <= 0.0 => 1.0,
            Law::Exponential(_) => (-a * t).exp(),
            Law::Gamma(_) if a >= LARGE_SHAPE => incomplete_gamma::regularized(a, t / b).1,
            Law::Gamma(d) => {
                let x = t * (1.0 / b);
                if (f64::MIN_POSITIVE..f64::INFINITY).contains(&x) {
                    d.sf(t)
                } else {
                    // The ends where statrs' series would panic: the cdf is 0, 1 or the
                    // leading term of its series (see `cdf`), far from the survival's
                    // digits.
                    1.0 - self.cdf(t)
                }
            }
            Law::Weibull(..) if t <= 0.0 => 1.0,
            Law::Weibull(..) if t == f64::INFINITY => 0.0,
            Law::Weibull(..) => (-(a * ln_ratio(t, b)).exp()).exp(),
            Law::Uniform(_) => 1.0 - self.cdf(t),
        }
    }

    /// The natural log of the density at `t` (`-inf` outside the support), computed in
    /// log space so that it stays finite where the density underflows. NaN `t` gives
    /// NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Normal, &[0.0, 1.0])?;
    /// // -z^2 / 2 - ln(2 pi) / 2 at z = 40, where the density itself is 0.
    /// let want = -800.0 - 0.5 * (2.0 * std::f64::consts::PI).ln();
    /// assert!((d.ln_pdf(40.0) - want).abs() < 1e-12);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn ln_pdf(&self, t: f64) -> f64 {
        let [a, b] = self.parameters;
        let half_ln_2pi = 0.5 * (2.0 * std::f64::consts::PI).ln();
        match &self.law {
            _ if t.is_nan() => f64::NAN,
            Law::Normal(_) => {
                let z = (t - a) / b;
                -0.5 * z * z - b.ln() - half_ln_2pi
            }
            Law::LogNormal(_) if t <= 0.0 || t == f64::INFINITY => f64::NEG_INFINITY,
            Law::LogNormal(_) => {
                let l = t.ln();
                let z = (l - a) / b;
                -0.5 * z * z - b.ln() - half_ln_2pi - l
            }
            Law::Exponential(_) if t < 0.0 => f64::NEG_INFINITY,
            Law::Exponential(_) => a.ln() - a * t,
            Law::Gamma(_) | Law::Weibull(..) if t <= 0.0 || t == f64::INFINITY => self.pdf(t).ln(),
            Law::Gamma(_) if a >= LARGE_SHAPE => incomplete_gamma::ln_density(a, t / b) - b.ln(),
            Law::Gamma(d) => d.ln_pdf(t),
            Law::Weibull(..) => weibull_log_pdf(a, b, t),
            Law::Uniform(_) => self.pdf(t).ln(),
        }
    }

    /// The natural log of the probability of `(lo, hi]`, `F(hi) - F(lo)`, taken from the
    /// survival function when `lo` is in the upper half (so neither tail loses its
    /// digits to a difference of numbers near 1). Where even that difference underflows
    /// (an interval far in a tail), the log density at the midpoint plus the log width,
    /// the mass to first order. `-inf` when the interval has no mass.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Uniform, &[0.0, 4.0])?;
    /// assert_eq!(d.ln_mass(1.0, 2.0), 0.25f64.ln());
    /// assert_eq!(d.ln_mass(5.0, 6.0), f64::NEG_INFINITY);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn ln_mass(&self, lo: f64, hi: f64) -> f64 {
        // Two evaluations: the tail is chosen by where lo lies against the centre.
        let mass = if lo > self.centre() {
            self.sf(lo) - self.sf(hi)
        } else {
            self.cdf(hi) - self.cdf(lo)
        };
        if mass > 0.0 {
            return mass.ln();
        }
        let (mid, width) = (0.5 * lo + 0.5 * hi, hi - lo);
        if mass == 0.0 && width.is_finite() && width > 0.0 && self.pdf(mid) == 0.0 {
            // Both ends in a tail where the difference underflowed: first order.
            let ln = self.ln_pdf(mid) + width.ln();
            if ln.is_finite() && ln < -700.0 {
                return ln;
            }
        }
        f64::NEG_INFINITY
    }

    /// The median where it has a closed form, else the mean (the gamma): a point that
    /// splits the mass near evenly, which [`Parametric::ln_mass`] uses to choose a tail.
    fn centre(&self) -> f64 {
        let [a, b] = self.parameters;
        match self.family {
            Family::Normal => a,
            Family::LogNormal => a.exp(),
            Family::Exponential => std::f64::consts::LN_2 / a,
            Family::Weibull => b * std::f64::consts::LN_2.powf(1.0 / a),
            Family::Uniform => 0.5 * a + 0.5 * b,
            Family::Gamma => a * b,
        }
    }

    /// `ln cdf(t)`, from the survival function where the cdf is near 1.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Exponential, &[1.0])?;
    /// assert!((d.ln_cdf(40.0) + (-40f64).exp()).abs() < 1e-30);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn ln_cdf(&self, t: f64) -> f64 {
        let [a, b] = self.parameters;
        match self.law {
            // The normal lower tail, in log space beyond where the cdf underflows.
            Law::Normal(_) if t < a => ln_normal_upper((a - t) / b),
            Law::LogNormal(_) if t > 0.0 && t.ln() < a => ln_normal_upper((a - t.ln()) / b),
            _ => {
                let c = self.cdf(t);
                if c > 0.5 {
                    (-self.sf(t)).ln_1p()
                } else {
                    c.ln()
                }
            }
        }
    }

    /// `ln sf(t)`, from the cdf where the survival function is near 1.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Exponential, &[1.0])?;
    /// assert_eq!(d.ln_sf(3.0), -3.0);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn ln_sf(&self, t: f64) -> f64 {
        let [a, b] = self.parameters;
        match self.law {
            // Closed forms, finite where the survival function underflows.
            Law::Exponential(_) if t > 0.0 => -a * t,
            Law::Weibull(..) if t > 0.0 && t < f64::INFINITY => -(a * ln_ratio(t, b)).exp(),
            Law::Normal(_) if t > a => ln_normal_upper((t - a) / b),
            Law::LogNormal(_) if t > 0.0 && t.ln() > a => ln_normal_upper((t.ln() - a) / b),
            _ => {
                let s = self.sf(t);
                if s > 0.5 {
                    (-self.cdf(t)).ln_1p()
                } else {
                    s.ln()
                }
            }
        }
    }

    /// The p-quantile: the smallest t with `cdf(t) >= p`. `p = 0` gives the lower end of
    /// the support (`-inf` for the normal, 0 for the positive families, min for the
    /// uniform) and `p = 1` the upper end (`+inf` except for the uniform).
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] for p outside `[0, 1]` or NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// let d = Parametric::new(Family::Uniform, &[0.0, 4.0])?;
    /// assert_eq!(d.quantile(0.75)?, 3.0);
    /// # Ok::<(), Box<dyn std::error::Error>>(())
    /// ```
    pub fn quantile(&self, p: f64) -> Result<f64, StatsError> {
        let p = super::check_probability(p)?;
        let [a, b] = self.parameters;
        let (lower, upper) = match self.family {
            Family::Normal => (f64::NEG_INFINITY, f64::INFINITY),
            Family::Uniform => (a, b),
            _ => (0.0, f64::INFINITY),
        };
        if p == 0.0 {
            return Ok(lower);
        }
        if p == 1.0 {
            return Ok(upper);
        }
        // statrs' normal and lognormal quantiles come from its erfc inverse and its gamma
        // quantile from an iteration that may stop some 1e-12 short: each is refined to
        // the root of this cdf, so that quantile(cdf(t)) = t to a few ulps. The
        // exponential, Weibull and uniform quantiles are exact closed forms.
        let polish = |q: f64| invert_cdf(|t| self.cdf(t), |t| self.pdf(t), p, q, q, lower);
        let q = match &self.law {
            Law::Normal(d) => {
                let q = d.inverse_cdf(p);
                if q.is_finite() {
                    polish(q)
                } else {
                    // sd * sqrt 2 or the sum overflowed inside statrs: the same sum in
                    // halves, refined as above.
                    let z = standard_normal_quantile(p);
                    let half = 0.5 * a + 0.5 * b * z;
                    if half.abs() < f64::MAX / 2.0 {
                        polish(2.0 * half)
                    } else {
                        f64::INFINITY.copysign(half)
                    }
                }
            }
            Law::LogNormal(d) => polish(d.inverse_cdf(p)),
            Law::Exponential(d) => d.inverse_cdf(p),
            Law::Gamma(_) if a >= LARGE_SHAPE => {
                // Wilson and Hilferty (1931): (x / a)^(1/3) is nearly normal with mean
                // 1 - 1/(9a) and variance 1/(9a); refined to the root of the cdf.
                let z = standard_normal_quantile(p);
                let c = 1.0 / (9.0 * a);
                let guess = a * (1.0 - c + z * c.sqrt()).powi(3) * b;
                polish(if guess > 0.0 && guess.is_finite() {
                    guess
                } else {
                    a * b
                })
            }
            Law::Gamma(d) => {
                // statrs brackets its quantile by halving from 1 and would reach a t
                // whose t / scale underflows (and panic) when even the cdf there exceeds
                // p; then the search below finds the quantile among the doubles.
                let floor = 4.0 * (f64::from_bits(1) / (1.0 / b)).max(f64::from_bits(1));
                if self.cdf(floor) > p {
                    f64::NAN
                } else {
                    polish(d.inverse_cdf(p))
                }
            }
            Law::Weibull(d, inverse) => {
                let q = d.inverse_cdf(p);
                if inverse.is_normal() && q.is_normal() {
                    q
                } else {
                    // scale (-ln(1 - p))^(1/shape), in log space.
                    b * ((-(-p).ln_1p()).ln() / a).exp()
                }
            }
            Law::Uniform(d) if (b - a).is_finite() => d.inverse_cdf(p),
            Law::Uniform(_) => 2.0 * ((0.5 * b - 0.5 * a) * p + 0.5 * a),
        };
        let (lowest, highest) = (lower.max(f64::MIN), upper.min(f64::MAX));
        if q.is_finite() && self.brackets(q.clamp(lowest, highest), p, lowest, highest) {
            return Ok(q.clamp(lower, upper));
        }
        // The closed form or the iteration missed (an underflow, an overflow, a bracket
        // the refinement could not find): search the doubles themselves.
        if self.cdf(highest) < p {
            // For 0 < p < 1 every family's quantile is finite; here it lies beyond the
            // largest double.
            return Err(StatsError::QuantileOverflow(p));
        }
        Ok(bisect_doubles(|t| self.cdf(t) >= p, lowest, highest))
    }

    /// Whether `q` is a p-quantile to the resolution of doubles: the cdf four doubles
    /// below it is at most p and four doubles above it at least p, each within 1e-9 of
    /// `min(p, 1 - p)` plus four ulps of p (the resolution of a cdf near 1) plus 1e-300.
    fn brackets(&self, q: f64, p: f64, lowest: f64, highest: f64) -> bool {
        let below = (0..4).fold(q, |t, _| t.next_down()).max(lowest);
        let above = (0..4).fold(q, |t, _| t.next_up()).min(highest);
        let tol = 1e-9 * p.min(1.0 - p) + 4.0 * f64::EPSILON * p + 1e-300;
        self.cdf(below) <= p + tol && self.cdf(above) >= p - tol
    }

    /// The mean, `None` when it exceeds the range of doubles (a lognormal with a large
    /// sigma).
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// // Gamma: shape * scale.
    /// assert_eq!(Parametric::new(Family::Gamma, &[2.0, 3.0])?.mean(), Some(6.0));
    /// assert_eq!(Parametric::new(Family::LogNormal, &[0.0, 40.0])?.mean(), None);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn mean(&self) -> Option<f64> {
        let m = match &self.law {
            Law::Normal(d) => d.mean(),
            Law::LogNormal(d) => d.mean(),
            Law::Exponential(d) => d.mean(),
            Law::Gamma(d) => d.mean(),
            Law::Weibull(d, _) => d.mean(),
            Law::Uniform(d) => d.mean(),
        };
        m.filter(|m| m.is_finite())
    }

    /// The standard deviation, `None` when it exceeds the range of doubles.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, Parametric};
    /// // Uniform on [0, 12]: 12 / sqrt(12).
    /// let sd = Parametric::new(Family::Uniform, &[0.0, 12.0])?.sd().unwrap();
    /// assert!((sd - 12f64.sqrt()).abs() < 1e-15);
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn sd(&self) -> Option<f64> {
        let v = match &self.law {
            Law::Normal(d) => d.variance(),
            Law::LogNormal(d) => d.variance(),
            Law::Exponential(d) => d.variance(),
            Law::Gamma(d) => d.variance(),
            Law::Weibull(d, _) => d.variance(),
            Law::Uniform(d) => d.variance(),
        };
        v.map(f64::sqrt).filter(|s| s.is_finite())
    }
}

/// The normal cdf, `erfc((mean - t) / (sd sqrt 2)) / 2`, with the complementary error
/// function of the `libm` crate (a port of FreeBSD's msun, itself Sun's fdlibm, accurate
/// to within one unit in the last place). statrs 0.19's `erfc` was measured 1e-10 off
/// (relative) over much of its range against C's `erfc`, too coarse for round trips
/// through the quantile.
///
/// # Example
/// ```
/// use ogive::stats::fit::normal_cdf;
/// assert_eq!(normal_cdf(3.0, 3.0, 2.0), 0.5);
/// // Phi(-1) = 0.15865525393145707 (scipy 1.17.1, scipy.stats.norm.cdf(-1)).
/// assert!((normal_cdf(-1.0, 0.0, 1.0) - 0.15865525393145707).abs() < 1e-16);
/// ```
pub fn normal_cdf(t: f64, mean: f64, sd: f64) -> f64 {
    let (num, den) = (mean - t, sd * std::f64::consts::SQRT_2);
    if num.is_finite() && den.is_normal() {
        0.5 * libm::erfc(num / den)
    } else if num.is_finite() && den.is_finite() {
        // A subnormal sd: scale by 2^600 (exact) so that sd sqrt 2 keeps its digits.
        let k = 2f64.powi(600);
        0.5 * libm::erfc((num * k) / (sd * k * std::f64::consts::SQRT_2))
    } else {
        // mean - t or sd sqrt 2 overflowed: the same ratio in halves (an infinite t
        // still gives 0 or 1).
        let z = (0.5 * mean - 0.5 * t) / (0.5 * sd) * std::f64::consts::FRAC_1_SQRT_2;
        0.5 * libm::erfc(z)
    }
}

/// `ln Q(z)`, the log of the standard normal upper tail `Q(z) = erfc(z / sqrt 2) / 2`,
/// for any `z` (NaN gives NaN): from `erfc` up to `z = 30`, beyond (where `Q` nears the
/// smallest doubles) `ln phi(z) + ln R(z)` with Mills' ratio `R(z) = Q(z) / phi(z)` from
/// Laplace's continued fraction `1 / (z + 1 / (z + 2 / (z + 3 / (z + ...))))`, forty
/// terms deep (Abramowitz and Stegun 26.2.14), which at `z >= 30` is exact to the last
/// digit.
///
/// # Example
/// ```
/// use ogive::stats::fit::ln_normal_upper;
/// // scipy 1.17.1: scipy.stats.norm.logsf(40) = -804.6084420137539.
/// assert!((ln_normal_upper(40.0) - -804.6084420137539).abs() < 1e-12);
/// assert!((ln_normal_upper(0.0) - 0.5f64.ln()).abs() < 1e-16);
/// ```
pub fn ln_normal_upper(z: f64) -> f64 {
    if z.is_nan() || z < 30.0 {
        return (0.5 * libm::erfc(z * std::f64::consts::FRAC_1_SQRT_2)).ln();
    }
    if z == f64::INFINITY {
        return f64::NEG_INFINITY;
    }
    let mut tail = 0.0;
    for i in (1..=40).rev() {
        tail = f64::from(i) / (z + tail);
    }
    let ratio = 1.0 / (z + tail);
    -0.5 * z * z - 0.5 * (2.0 * std::f64::consts::PI).ln() + ratio.ln()
}

/// The order-preserving integer key of a finite double (`key(a) < key(b)` exactly when
/// `a < b`, with -0 just below +0).
fn order_key(x: f64) -> i64 {
    let b = x.to_bits() as i64;
    b ^ (((b >> 63) as u64) >> 1) as i64
}

/// The double of an [`order_key`].
fn from_order_key(k: i64) -> f64 {
    f64::from_bits((k ^ (((k >> 63) as u64) >> 1) as i64) as u64)
}

/// The smallest double `t` in `[lo, hi]` with `reached(t)`, for a predicate that is false
/// then true along the doubles and true at `hi`: bisection on the doubles' order keys, at
/// most 64 evaluations whatever the range.
fn bisect_doubles(reached: impl Fn(f64) -> bool, lo: f64, hi: f64) -> f64 {
    let (mut a, mut b) = (i128::from(order_key(lo)), i128::from(order_key(hi)));
    if reached(lo) {
        return lo;
    }
    // Invariant: reached(from(a)) is false, reached(from(b)) is true.
    while b - a > 1 {
        let m = a + (b - a) / 2;
        if reached(from_order_key(m as i64)) {
            b = m;
        } else {
            a = m;
        }
    }
    from_order_key(b as i64)
}

/// The standard normal quantile (statrs' inverse of its erfc), finite for `0 < p < 1`.
fn standard_normal_quantile(p: f64) -> f64 {
    Normal::standard().inverse_cdf(p)
}

/// The cdf of a uniform law on `[min, max]` whose width overflows a double: the ratio
/// taken in halves, which are exact.
fn wide_uniform_cdf(min: f64, max: f64, t: f64) -> f64 {
    if t <= min {
        0.0
    } else if t >= max {
        1.0
    } else {
        ((0.5 * t - 0.5 * min) / (0.5 * max - 0.5 * min)).clamp(0.0, 1.0)
    }
}

/// Whether statrs' Weibull product forms, `t^shape * scale^-shape`, are exact enough at
/// `t`: both factors normal doubles (neither overflowed, underflowed nor went subnormal).
/// `t <= 0`, infinite or NaN also go to statrs, which handles them by definition.
fn weibull_products_hold(inverse: f64, shape: f64, t: f64) -> bool {
    !(t > 0.0 && t.is_finite()) || (inverse.is_normal() && t.powf(shape).is_normal())
}

/// `ln(t / scale)` for `t > 0`, from the ratio when it is a normal double and from the
/// difference of logs otherwise (the ratio overflowed, underflowed or went subnormal).
fn ln_ratio(t: f64, scale: f64) -> f64 {
    let r = t / scale;
    if r.is_normal() {
        r.ln()
    } else {
        t.ln() - scale.ln()
    }
}

/// The Weibull cdf `1 - exp(-(t / scale)^shape)`: statrs' product form where
/// [`weibull_products_hold`], else `-expm1(-exp(shape ln(t / scale)))`, which neither
/// overflows nor underflows for any shape.
fn weibull_cdf(d: &Weibull, inverse: f64, shape: f64, scale: f64, t: f64) -> f64 {
    if t <= 0.0 {
        // statrs computes 0^shape * scale^-shape, NaN when the second factor overflowed.
        0.0
    } else if t == f64::INFINITY {
        1.0
    } else if weibull_products_hold(inverse, shape, t) {
        d.cdf(t)
    } else {
        -(-(shape * ln_ratio(t, scale)).exp()).exp_m1()
    }
}

/// The Weibull log density `ln k - ln scale + (k - 1) ln(t / scale) - (t / scale)^k` for
/// `t > 0` finite, in log space.
fn weibull_log_pdf(shape: f64, scale: f64, t: f64) -> f64 {
    let lr = ln_ratio(t, scale);
    shape.ln() - scale.ln() + (shape - 1.0) * lr - (shape * lr).exp()
}

/// What every maximum-likelihood fit reports (parametric and mixture fits alike): the
/// number of values, the maximised log-likelihood and the two information criteria.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct FitSummary {
    /// The number of values.
    pub n: u64,
    /// The maximised log-likelihood.
    pub loglik: f64,
    /// Akaike's information criterion (Akaike 1974), `2p - 2 loglik`.
    pub aic: f64,
    /// Schwarz's Bayesian information criterion (Schwarz 1978), `p ln n - 2 loglik`.
    pub bic: f64,
}

impl FitSummary {
    /// The summary of a log-likelihood reached with `parameters` free parameters on `n`
    /// values.
    ///
    /// # Example
    /// ```
    /// let s = ogive::stats::fit::FitSummary::new(-10.0, 2, 100);
    /// assert_eq!(s.aic, 24.0);
    /// assert_eq!(s.bic, 2.0 * 100f64.ln() + 20.0);
    /// ```
    pub fn new(loglik: f64, parameters: usize, n: u64) -> FitSummary {
        FitSummary::weighted(loglik, parameters, n as f64)
    }

    /// The summary of a fit to frequency-weighted values of total weight `total`: `n` is
    /// the total rounded to a whole number, BIC uses the exact total (the same as
    /// [`FitSummary::new`] for a whole total).
    ///
    /// # Example
    /// ```
    /// let s = ogive::stats::fit::FitSummary::weighted(-10.0, 2, 99.5);
    /// assert_eq!(s.n, 100);
    /// assert_eq!(s.bic, 2.0 * 99.5f64.ln() + 20.0);
    /// ```
    pub fn weighted(loglik: f64, parameters: usize, total: f64) -> FitSummary {
        let p = parameters as f64;
        FitSummary {
            n: total.round() as u64,
            loglik,
            aic: 2.0 * p - 2.0 * loglik,
            bic: p * total.ln() - 2.0 * loglik,
        }
    }
}

/// A maximum-likelihood fit: the fitted distribution and how well it fits.
#[derive(Debug, Clone, PartialEq)]
pub struct ParametricFit {
    /// The fitted distribution.
    pub distribution: Parametric,
    /// n, log-likelihood, AIC and BIC.
    pub summary: FitSummary,
}

/// Fits `family` to `xs` by maximum likelihood.
///
/// # Errors
/// See the [module documentation](self): [`FitError::NotFinite`],
/// [`FitError::TooFewPoints`], [`FitError::NonPositive`], [`FitError::AllEqual`],
/// [`FitError::Degenerate`].
///
/// # Example
/// ```
/// use ogive::stats::fit::{Family, fit};
/// let f = fit(&[1.0, 2.0, 3.0, 2.0], Family::Exponential)?;
/// let rate = f.distribution.parameters()[0].1;
/// assert_eq!(rate, 0.5); // one over the mean
/// assert_eq!(f.summary.loglik, 4.0 * (0.5f64.ln() - 1.0));
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit(xs: &[f64], family: Family) -> Result<ParametricFit, FitError> {
    fit_with(xs, None, family)
}

/// [`fit`] with frequency weights: `ws[i]` copies of `xs[i]` (any positive finite weight;
/// whole numbers make it the fit of the replicated values). The log-likelihood is the
/// weighted one, `n` in the summary the total weight rounded to the nearest whole number,
/// and BIC uses the exact total.
///
/// # Errors
/// As [`fit`], counting weight instead of values for [`FitError::TooFewPoints`];
/// [`FitError::BadWeight`] for a weight that is not finite and `> 0`.
///
/// # Example
/// ```
/// use ogive::stats::fit::{Family, fit, fit_weighted};
/// let w = fit_weighted(&[1.0, 2.0, 3.0], &[2.0, 1.0, 3.0], Family::Gamma)?;
/// let r = fit(&[1.0, 1.0, 2.0, 3.0, 3.0, 3.0], Family::Gamma)?;
/// let (a, b) = (w.distribution.parameters()[0].1, r.distribution.parameters()[0].1);
/// assert!((a - b).abs() < 1e-12 * b);
/// # Ok::<(), ogive::stats::fit::FitError>(())
/// ```
pub fn fit_weighted(xs: &[f64], ws: &[f64], family: Family) -> Result<ParametricFit, FitError> {
    if let Some(&bad) = ws.iter().find(|w| !(w.is_finite() && **w > 0.0)) {
        return Err(FitError::BadWeight(bad));
    }
    fit_with(
        &xs[..xs.len().min(ws.len())],
        Some(&ws[..xs.len().min(ws.len())]),
        family,
    )
}

/// The body of [`fit`] and [`fit_weighted`]; `ws` is `None` for unit weights.
fn fit_with(xs: &[f64], ws: Option<&[f64]>, family: Family) -> Result<ParametricFit, FitError> {
    let need = family.parameter_names().len();
    if let Some(&bad) = xs.iter().find(|x| !x.is_finite()) {
        return Err(FitError::NotFinite(bad));
    }
    let n = ws.map_or(xs.len() as f64, |w| compensated(w.iter().copied()));
    if n < need as f64 || xs.is_empty() {
        return Err(FitError::TooFewPoints {
            family,
            need,
            got: n.floor() as usize,
        });
    }
    // The exponential's MLE, rate = 1 / mean, needs only a positive mean (scipy's
    // expon.fit(x, floc=0) takes zeros too); the other positive families take ln x.
    let allowed = |x: f64| x > 0.0 || (family == Family::Exponential && x == 0.0);
    if family.needs_positive()
        && let Some(&value) = xs.iter().find(|&&x| !allowed(x))
    {
        return Err(FitError::NonPositive { family, value });
    }
    let (lo, hi) = xs
        .iter()
        .fold((f64::INFINITY, f64::NEG_INFINITY), |(lo, hi), &x| {
            (lo.min(x), hi.max(x))
        });
    if lo == hi && (family != Family::Exponential || lo == 0.0) {
        return Err(FitError::AllEqual { family, value: lo });
    }
    let w = Weights { ws, total: n };
    let (parameters, loglik) = match family {
        Family::Normal => {
            let (mean, sd) = mean_and_sd(xs, &w, |x| x);
            ([mean, sd], normal_loglik(n, sd))
        }
        Family::LogNormal => {
            let (mu, sigma) = mean_and_sd(xs, &w, f64::ln);
            let sum_ln = w.sum(xs.iter().map(|x| x.ln()));
            ([mu, sigma], normal_loglik(n, sigma) - sum_ln)
        }
        Family::Exponential => {
            let rate = 1.0 / mean(xs, &w);
            ([rate, 0.0], n * (rate.ln() - 1.0))
        }
        Family::Gamma => fit_gamma(xs, &w),
        Family::Weibull => fit_weibull(xs, &w)?,
        Family::Uniform => ([lo, hi], -n * (hi - lo).ln()),
    };
    if !loglik.is_finite() || parameters.iter().any(|p| !p.is_finite()) {
        return Err(FitError::Degenerate { family });
    }
    let distribution = Parametric::new(family, &parameters[..need])
        .map_err(|_| FitError::Degenerate { family })?;
    Ok(ParametricFit {
        distribution,
        summary: FitSummary::weighted(loglik, need, n),
    })
}

/// Frequency weights of a sample (`None`: one each) and their total.
struct Weights<'a> {
    ws: Option<&'a [f64]>,
    total: f64,
}

impl Weights<'_> {
    /// The compensated sum of `w_i v_i` (of `v_i` for unit weights).
    fn sum(&self, values: impl Iterator<Item = f64>) -> f64 {
        match self.ws {
            None => compensated(values),
            Some(ws) => compensated(values.zip(ws).map(|(v, &w)| w * v)),
        }
    }
}

/// The compensated sum of an iterator.
fn compensated(xs: impl Iterator<Item = f64>) -> f64 {
    let mut s = NeumaierSum::default();
    xs.for_each(|x| s.add(x));
    s.value()
}

/// The weighted mean of a non-empty slice, by a compensated sum (falling back to summing
/// `x / n` when the sum overflows).
fn mean(xs: &[f64], w: &Weights<'_>) -> f64 {
    let n = w.total;
    let m = w.sum(xs.iter().copied()) / n;
    if m.is_finite() {
        m
    } else {
        w.sum(xs.iter().map(|x| x / n))
    }
}

/// The weighted mean and standard deviation (divisor the total weight) of `f(x)`: two
/// passes, the squares scaled by the largest deviation so they cannot overflow.
fn mean_and_sd(xs: &[f64], w: &Weights<'_>, f: impl Fn(f64) -> f64) -> (f64, f64) {
    // f is applied on every pass rather than kept in a copy: the same values, no buffer
    // the size of the data.
    let values = || xs.iter().map(|&x| f(x));
    let n = w.total;
    let m = {
        let m = w.sum(values()) / n;
        if m.is_finite() {
            m
        } else {
            w.sum(values().map(|x| x / n))
        }
    };
    let scale = values().fold(0.0f64, |a, x| a.max((x - m).abs()));
    if scale == 0.0 {
        return (m, 0.0);
    }
    if !scale.is_finite() {
        // x - m overflowed (values of both signs near 1.8e308): the same on halves.
        let half = values().fold(0.0f64, |a, x| a.max((0.5 * x - 0.5 * m).abs()));
        let ss = w.sum(values().map(|x| ((0.5 * x - 0.5 * m) / half).powi(2)));
        return (m, 2.0 * half * (ss / w.total).sqrt());
    }
    // About the rounded mean, moved to the true one as Moments does (the corrected
    // two-pass algorithm): `c` is the mean's rounding error in units of `scale`.
    let c = w.sum(values().map(|x| (x - m) / scale)) / w.total;
    let ss = w.sum(values().map(|x| ((x - m) / scale).powi(2)));
    (m, scale * (ss / w.total - c * c).max(0.0).sqrt())
}

/// The maximised normal log-likelihood of n values with MLE standard deviation `sd`.
fn normal_loglik(n: f64, sd: f64) -> f64 {
    -0.5 * n * ((2.0 * std::f64::consts::PI).ln() + 2.0 * sd.ln() + 1.0)
}

/// `(ln a - digamma(a), d/da of it)`: the left side of the gamma shape equation and its
/// derivative `1/a - trigamma(a)`. For `a >= 10` both come from their asymptotic series
/// (Abramowitz and Stegun 6.3.18 and 6.4.12), which avoids the cancellation of
/// subtracting two nearly equal numbers when the shape is large.
///
/// # Example
/// ```
/// // ln 1 - digamma(1) = Euler's constant 0.5772156649015329 (A&S 6.3.2; numpy's
/// // numpy.euler_gamma). statrs' digamma is good to a few 1e-15 here.
/// let (g, _) = ogive::stats::fit::ln_minus_digamma(1.0);
/// assert!((g - 0.5772156649015329).abs() < 1e-14);
/// ```
pub fn ln_minus_digamma(a: f64) -> (f64, f64) {
    if a >= 10.0 {
        let r = 1.0 / a;
        let r2 = r * r;
        let value = r / 2.0
            + r2 * (1.0 / 12.0
                - r2 * (1.0 / 120.0
                    - r2 * (1.0 / 252.0
                        - r2 * (1.0 / 240.0
                            - r2 * (1.0 / 132.0 - r2 * (691.0 / 32760.0 - r2 / 12.0))))));
        let slope = -(r2 / 2.0 + r * r2 * trigamma_tail(r2));
        (value, slope)
    } else {
        (a.ln() - digamma(a), 1.0 / a - trigamma(a))
    }
}

/// `1/6 - r2/30 + r2^2/42 - ...`: the Bernoulli-number tail of the asymptotic series of
/// trigamma, `trigamma(z) = 1/z + 1/(2 z^2) + r^3 * tail` with `r = 1/z`, `r2 = r^2`.
fn trigamma_tail(r2: f64) -> f64 {
    1.0 / 6.0
        - r2 * (1.0 / 30.0
            - r2 * (1.0 / 42.0
                - r2 * (1.0 / 30.0 - r2 * (5.0 / 66.0 - r2 * (691.0 / 2730.0 - r2 * 7.0 / 6.0)))))
}

/// The trigamma function, the second derivative of `ln Gamma`, for `x > 0`: the
/// recurrence `trigamma(x) = trigamma(x + 1) + 1/x^2` up to 10, then the asymptotic
/// series (Abramowitz and Stegun 6.4.12).
///
/// # Example
/// ```
/// // trigamma(1) = pi^2 / 6 (Abramowitz and Stegun 6.4.2).
/// let t = ogive::stats::fit::trigamma(1.0);
/// assert!((t - std::f64::consts::PI.powi(2) / 6.0).abs() < 1e-15);
/// ```
pub fn trigamma(x: f64) -> f64 {
    let mut acc = 0.0;
    let mut z = x;
    while z < 10.0 {
        acc += 1.0 / (z * z);
        z += 1.0;
    }
    let r = 1.0 / z;
    let r2 = r * r;
    acc + r + r2 / 2.0 + r * r2 * trigamma_tail(r2)
}

/// Gamma MLE: `([shape, scale], loglik)`.
fn fit_gamma(xs: &[f64], w: &Weights<'_>) -> ([f64; 2], f64) {
    let n = w.total;
    let m = mean(xs, w);
    // s = ln(mean) - mean(ln x), computed as -mean(ln(x / mean)) to avoid cancellation.
    let s = -w.sum(xs.iter().map(|x| (x / m).ln())) / n;
    if !(s > 0.0 && s.is_finite()) {
        return ([f64::NAN, f64::NAN], f64::NAN);
    }
    // Minka (2002), eq. 3: within 1.5% of the root.
    let start = (3.0 - s + ((s - 3.0).powi(2) + 24.0 * s).sqrt()) / (12.0 * s);
    // F(a) = s - (ln a - digamma(a)) increases with a.
    let equation = |a: f64| {
        let (g, dg) = ln_minus_digamma(a);
        (s - g, -dg)
    };
    let shape = match bracket(|a| equation(a).0, start) {
        Some((lo, hi)) => solve_increasing(equation, lo, hi, start),
        None => f64::NAN,
    };
    let scale = m / shape;
    let loglik = if shape >= LARGE_SHAPE {
        // The closed form below subtracts terms of size n * shape; the log density of
        // incomplete_gamma::ln_density has no such cancellation.
        w.sum(
            xs.iter()
                .map(|x| incomplete_gamma::ln_density(shape, x / scale)),
        ) - n * scale.ln()
    } else {
        let sum_ln = w.sum(xs.iter().map(|x| x.ln()));
        (shape - 1.0) * sum_ln - n * shape - n * shape * scale.ln() - n * ln_gamma(shape)
    };
    ([shape, scale], loglik)
}

/// Weibull MLE: `([shape, scale], loglik)`; [`FitError::OutOfMemory`] when its two
/// buffers of logarithms do not fit.
fn fit_weibull(xs: &[f64], wts: &Weights<'_>) -> Result<([f64; 2], f64), FitError> {
    let n = wts.total;
    let logs: Vec<f64> = grow::map(xs, |x| x.ln())?;
    let top = logs.iter().fold(f64::NEG_INFINITY, |a, &l| a.max(l));
    // l = ln(x / max x) <= 0, so exp(k l) <= 1 never overflows.
    let l: Vec<f64> = grow::map(&logs, |&v| v - top)?;
    let (mean_l, sd_l) = mean_and_sd(&l, wts, |v| v);
    // A unit weight multiplies exactly, so unweighted fits are unchanged by it.
    let weight = |i: usize| wts.ws.map_or(1.0, |ws| ws[i]);
    // h(k) = sum(w l) / sum(w) - 1/k - mean(l), w = exp(k l); h'(k) = var_w(l) + 1/k^2.
    let equation = |k: f64| {
        let (mut sw, mut swl, mut swl2) = (
            NeumaierSum::default(),
            NeumaierSum::default(),
            NeumaierSum::default(),
        );
        for (i, &li) in l.iter().enumerate() {
            let w = weight(i) * (k * li).exp();
            sw.add(w);
            swl.add(w * li);
            swl2.add(w * li * li);
        }
        let a = swl.value() / sw.value();
        let var = (swl2.value() / sw.value() - a * a).max(0.0);
        (a - 1.0 / k - mean_l, var + 1.0 / (k * k))
    };
    // The moment estimate from the Gumbel law of ln x: sd(ln x) = pi / (sqrt(6) k).
    let start = std::f64::consts::PI / (6f64.sqrt() * sd_l);
    let shape = match bracket(|k| equation(k).0, start) {
        Some((lo, hi)) => solve_increasing(equation, lo, hi, start),
        None => f64::NAN,
    };
    let sum_w = wts.sum(l.iter().map(|&li| (shape * li).exp()));
    let ln_scale = top + (sum_w / n).ln() / shape;
    let sum_ln = wts.sum(logs.iter().copied());
    let sum_pow = wts.sum(logs.iter().map(|&v| (shape * (v - ln_scale)).exp()));
    let loglik = n * shape.ln() - n * shape * ln_scale + (shape - 1.0) * sum_ln - sum_pow;
    Ok(([shape, ln_scale.exp()], loglik))
}

/// A bracket `[lo, hi]` around `start` with `f(lo) <= 0 <= f(hi)` for an increasing `f`
/// on `(0, inf)`, by halving and doubling; `None` when none is found within the range of
/// doubles.
fn bracket(f: impl Fn(f64) -> f64, start: f64) -> Option<(f64, f64)> {
    if !(start > 0.0 && start.is_finite()) {
        return None;
    }
    let (mut lo, mut hi) = (start, start);
    for _ in 0..1100 {
        if f(lo) <= 0.0 {
            break;
        }
        lo /= 2.0;
    }
    for _ in 0..1100 {
        if f(hi) >= 0.0 {
            break;
        }
        hi *= 2.0;
    }
    (f(lo) <= 0.0 && f(hi) >= 0.0 && lo > 0.0 && hi.is_finite()).then_some((lo, hi))
}

/// Checks that `p` is the maximum-likelihood fit [`fit`] makes of `xs`: its `n` (when
/// known) is the number of values and its parameters equal those of `fit(xs, family)`
/// within `tolerance` relative (a location, the normal mean, lognormal mu or uniform
/// ends, within `tolerance` times its size plus the spread). Tests whose null
/// distribution assumes the parameters were estimated from the same data (Lilliefors)
/// use it to refuse any other model.
///
/// # Errors
/// A sentence saying what differs: another `n`, values that admit no fit of the family,
/// or a parameter.
///
/// # Example
/// ```
/// use ogive::stats::fit::{Family, check_is_fit_of, fit};
/// let xs = [0.5, 1.5, 2.0, 4.0];
/// let f = fit(&xs, Family::Exponential).unwrap();
/// assert!(check_is_fit_of(&f.distribution, Some(4), &xs, 1e-9).is_ok());
/// assert!(check_is_fit_of(&f.distribution, None, &[0.5, 1.5, 2.0, 5.0], 1e-9).is_err());
/// ```
pub fn check_is_fit_of(
    p: &Parametric,
    n: Option<u64>,
    xs: &[f64],
    tolerance: f64,
) -> Result<(), String> {
    let family = p.family();
    if let Some(n) = n
        && n != xs.len() as u64
    {
        return Err(format!(
            "it was fitted to {n} values, the sample has {}",
            xs.len()
        ));
    }
    let refit = fit(xs, family).map_err(|e| format!("the values admit no {family} fit: {e}"))?;
    let theirs = refit.distribution.parameters();
    let spread = match family {
        Family::Normal | Family::LogNormal => theirs[1].1,
        Family::Uniform => theirs[1].1 - theirs[0].1,
        _ => 0.0,
    };
    for ((name, mine), (_, want)) in p.parameters().into_iter().zip(theirs) {
        let location = matches!(name, "mean" | "mu" | "min" | "max");
        let size = want.abs() + if location { spread } else { 0.0 };
        if (mine - want).abs() > tolerance * size {
            return Err(format!(
                "its {name} is {mine}; the fit of the sample gives {want}"
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    fn rel(a: f64, b: f64) -> f64 {
        ((a - b) / b).abs()
    }

    /// Found by the argument fuzzer: statrs' gamma cdf at a subnormal-sized shape gave
    /// 1.0000000000000164. Expected value: for shape a -> 0, P(a, x) = 1 - a E1(x) + O(a^2)
    /// (E1 the exponential integral, E1(8.3125 / 13.5625) = 0.42 by scipy.special.exp1),
    /// which is 1 exactly in doubles at a = 2.2e-308; tolerance 0.
    #[test]
    fn gamma_cdf_at_a_tiny_shape_is_a_probability() {
        let d = Parametric::new(Family::Gamma, &[f64::MIN_POSITIVE, 13.5625]).unwrap();
        assert_eq!(d.cdf(8.3125), 1.0);
        for t in [1e-300, 1e-10, 0.5, 1.0, 8.3125, 1e10, 1e300] {
            let f = d.cdf(t);
            assert!((0.0..=1.0).contains(&f), "cdf({t}) = {f}");
        }
        assert!(d.cdf(f64::NAN).is_nan());
    }

    #[test]
    fn trigamma_matches_scipy() {
        // Expected: scipy 1.17.1, scipy.special.polygamma(1, x) for each x.
        for (x, want) in [
            (1e-3, 1000001.6425331959),
            (0.5, 4.93480220054468),
            (1.0, 1.6449340668482266),
            (3.7, 0.31003785767003833),
            (10.0, 0.10516633568168576),
            (123.4, 0.008136651610865263),
        ] {
            assert!(
                rel(trigamma(x), want) < 1e-14,
                "{x}: {} vs {want}",
                trigamma(x)
            );
        }
    }

    #[test]
    fn shape_equation_is_continuous_across_the_switch() {
        // Both branches compute ln a - digamma(a); at a = 10 they must agree to 1e-14
        // relative (the series' truncation error there is below 1e-16).
        let below = 10f64.ln() - digamma(10.0);
        let (above, _) = ln_minus_digamma(10.0);
        assert!(rel(above, below) < 1e-13, "{above} vs {below}");
        let slope_below = 0.1 - trigamma(10.0);
        let (_, slope_above) = ln_minus_digamma(10.0);
        assert!(rel(slope_above, slope_below) < 1e-12);
    }

    #[test]
    fn normal_closed_form() {
        // Exact by hand: mean 5, deviations -3, -1, 1, 3, squared mean 5, sd sqrt(5).
        let f = fit(&[2.0, 4.0, 6.0, 8.0], Family::Normal).unwrap();
        assert_eq!(
            f.distribution.parameters(),
            vec![("mean", 5.0), ("sd", 5f64.sqrt())]
        );
        let ll = -2.0 * ((2.0 * std::f64::consts::PI).ln() + 5f64.ln() + 1.0);
        assert!(rel(f.summary.loglik, ll) < 1e-15);
        assert!(rel(f.summary.aic, 4.0 - 2.0 * ll) < 1e-15);
        assert!(rel(f.summary.bic, 2.0 * 4f64.ln() - 2.0 * ll) < 1e-15);
    }

    #[test]
    fn loglik_equals_sum_of_log_densities() {
        // The closed-form log-likelihoods against summing statrs' ln_pdf over the data,
        // tolerance 1e-12 relative.
        let xs = [0.7, 1.3, 2.2, 2.9, 3.1, 4.8, 5.5, 7.9, 0.2, 1.1];
        for family in Family::ALL {
            let f = fit(&xs, family).unwrap();
            let direct: f64 = xs
                .iter()
                .map(|&x| match &f.distribution.law {
                    Law::Normal(d) => d.ln_pdf(x),
                    Law::LogNormal(d) => d.ln_pdf(x),
                    Law::Exponential(d) => d.ln_pdf(x),
                    Law::Gamma(d) => d.ln_pdf(x),
                    Law::Weibull(d, _) => d.ln_pdf(x),
                    Law::Uniform(d) => d.ln_pdf(x),
                })
                .sum();
            assert!(
                rel(f.summary.loglik, direct) < 1e-12,
                "{family}: {} vs {direct}",
                f.summary.loglik
            );
        }
    }

    #[test]
    fn scores_vanish_at_the_estimates() {
        // The first-order conditions of the MLE (exact calculus): for the gamma,
        // sum(ln x) - n ln(scale) - n digamma(shape) = 0; for the Weibull,
        // n/k + sum ln(x/l) - sum (x/l)^k ln(x/l) = 0. Tolerance 1e-10 relative to n.
        let xs = [0.7, 1.3, 2.2, 2.9, 3.1, 4.8, 5.5, 7.9, 0.2, 1.1];
        let n = xs.len() as f64;
        let g = fit(&xs, Family::Gamma).unwrap().distribution.parameters();
        let (a, th) = (g[0].1, g[1].1);
        let score: f64 = xs.iter().map(|x| x.ln()).sum::<f64>() - n * th.ln() - n * digamma(a);
        assert!(score.abs() < 1e-10 * n, "{score}");
        let w = fit(&xs, Family::Weibull).unwrap().distribution.parameters();
        let (k, l) = (w[0].1, w[1].1);
        let score: f64 = n / k
            + xs.iter()
                .map(|x| (x / l).ln() - (x / l).powf(k) * (x / l).ln())
                .sum::<f64>();
        assert!(score.abs() < 1e-10 * n, "{score}");
    }

    #[test]
    fn bad_input_is_named() {
        assert_eq!(
            fit(&[1.0, -2.0], Family::Gamma),
            Err(FitError::NonPositive {
                family: Family::Gamma,
                value: -2.0
            })
        );
        assert_eq!(
            fit(&[3.0, 3.0, 3.0], Family::Weibull),
            Err(FitError::AllEqual {
                family: Family::Weibull,
                value: 3.0
            })
        );
        assert_eq!(
            fit(&[3.0], Family::Normal),
            Err(FitError::TooFewPoints {
                family: Family::Normal,
                need: 2,
                got: 1
            })
        );
        assert_eq!(
            fit(&[1.0, f64::INFINITY], Family::Normal),
            Err(FitError::NotFinite(f64::INFINITY))
        );
        // The exponential has a finite maximum even for equal values: rate = 1 / value.
        let e = fit(&[4.0, 4.0], Family::Exponential).unwrap();
        assert_eq!(e.distribution.parameters(), vec![("rate", 0.25)]);
        // Zeros are values of an exponential sample (scipy 1.17.1:
        // scipy.stats.expon.fit([0, 0, 1, 3], floc=0) = (0, 1.0), scale 1, rate 1);
        // the log-likelihood n (ln rate - 1) = -4 by the closed form. Only zeros: no MLE.
        let z = fit(&[0.0, 0.0, 1.0, 3.0], Family::Exponential).unwrap();
        assert_eq!(z.distribution.parameters(), vec![("rate", 1.0)]);
        assert_eq!(z.summary.loglik, -4.0);
        assert_eq!(
            fit(&[0.0, 0.0], Family::Exponential),
            Err(FitError::AllEqual {
                family: Family::Exponential,
                value: 0.0
            })
        );
        assert!(matches!(
            fit(&[0.0, 1.0], Family::Gamma),
            Err(FitError::NonPositive { value: 0.0, .. })
        ));
        assert!(matches!(
            fit(&[-1.0, 1.0], Family::Exponential),
            Err(FitError::NonPositive { value: -1.0, .. })
        ));
        assert!(
            FitError::UnknownFamily("poisson".into())
                .to_string()
                .contains("normal, lognormal, exponential, gamma, weibull, uniform")
        );
    }

    #[test]
    fn nearly_equal_values_give_huge_but_finite_shapes() {
        // Spread 1e-9 around 1: the gamma shape is about 1 / (2 s) with s ~ var / 2, so
        // of order 1e18; it must come out finite and positive, not NaN.
        let xs = [1.0, 1.0 + 1e-9, 1.0 - 1e-9, 1.0 + 2e-9];
        for family in [Family::Gamma, Family::Weibull] {
            match fit(&xs, family) {
                Ok(f) => assert!(
                    f.distribution
                        .parameters()
                        .iter()
                        .all(|p| p.1 > 0.0 && p.1.is_finite())
                ),
                Err(e) => assert_eq!(e, FitError::Degenerate { family }),
            }
        }
    }

    #[test]
    fn parameters_are_validated() {
        assert!(matches!(
            Parametric::new(Family::Uniform, &[2.0, 1.0]),
            Err(FitError::BadParameter { name: "max", .. })
        ));
        assert!(matches!(
            Parametric::new(Family::Gamma, &[f64::INFINITY, 1.0]),
            Err(FitError::BadParameter { name: "shape", .. })
        ));
        assert!(matches!(
            Parametric::new(Family::Exponential, &[1.0, 2.0]),
            Err(FitError::ParameterCount { got: 2, .. })
        ));
    }

    #[test]
    fn quantile_ends_and_round_trip() {
        // Ends of the supports, by definition; round trips to 1e-12 relative.
        let d = Parametric::new(Family::Gamma, &[2.5, 1.5]).unwrap();
        assert_eq!(d.quantile(0.0), Ok(0.0));
        assert_eq!(d.quantile(1.0), Ok(f64::INFINITY));
        assert!(d.quantile(1.5).is_err());
        for t in [0.01, 0.5, 3.0, 12.0] {
            let back = d.quantile(d.cdf(t)).unwrap();
            assert!(rel(back, t) < 1e-12, "{t}: {back}");
        }
        let n = Parametric::new(Family::Normal, &[1.0, 2.0]).unwrap();
        assert_eq!(n.quantile(0.0), Ok(f64::NEG_INFINITY));
        assert_eq!(n.quantile(0.5), Ok(1.0));
    }

    /// Parameter sets at the edges of what a fit or `dist_model` can produce, per family.
    fn extreme_models() -> Vec<Parametric> {
        let big = 1.7e308;
        let mut out = Vec::new();
        let mut push = |family, params: &[f64]| {
            out.push(Parametric::new(family, params).expect("valid parameters"))
        };
        for (m, s) in [
            (0.0, 1.0),
            (0.0, 1e-300),
            (1e308, 1e-300),
            (-1e308, 1e308),
            (big, big),
            (0.0, 5e-324),
            (1.7e9, 29.0),
        ] {
            push(Family::Normal, &[m, s]);
        }
        for (m, s) in [
            (0.0, 1.0),
            (0.0, 1e-10),
            (700.0, 1e-3),
            (-700.0, 50.0),
            (0.0, 1e3),
            (4.6, 1e-4),
        ] {
            push(Family::LogNormal, &[m, s]);
        }
        for rate in [1e-300, 1e-10, 1.0, 1e10, 1e300] {
            push(Family::Exponential, &[rate]);
        }
        for shape in [
            1e-3, 0.5, 2.0, 999.9, 1000.0, 1e4, 3.4e15, 1e16, 1e100, 1e300,
        ] {
            for scale in [1e-300, 4.9e-7, 1.0, 1e300] {
                if shape * scale < f64::MAX {
                    push(Family::Gamma, &[shape, scale]);
                }
            }
        }
        for shape in [1e-2, 1.0, 3.7, 300.0, 3801.0, 1e6, 1e15] {
            for scale in [1e-300, 1e-8, 100.0, 1e300] {
                push(Family::Weibull, &[shape, scale]);
            }
        }
        for (lo, hi) in [
            (-big, big),
            (0.0, 1.0),
            (1e-300, 2e-300),
            (1e308, big),
            (-5e-324, 5e-324),
        ] {
            push(Family::Uniform, &[lo, hi]);
        }
        out
    }

    #[test]
    fn every_family_is_a_distribution_at_extreme_parameters() {
        // A property check over the parameter sets above (exact expectations by the
        // definition of a cdf and its inverse, no outside values): the cdf is a
        // probability and non-decreasing, the density is >= 0 and not NaN, and for p in
        // (0, 1) the quantile is finite, inside the support, and a root of cdf(t) = p to
        // the resolution of doubles: cdf just below it is <= p and cdf just above it is
        // >= p, each within 1e-9 of min(p, 1 - p) plus four ulps of p plus 1e-300 (the
        // resolution of a computed cdf near 1). A quantile beyond
        // the largest double must be the typed error instead.
        let ps = [
            1e-300,
            1e-100,
            1e-12,
            1e-6,
            0.001,
            0.1,
            0.3,
            0.5,
            0.7,
            0.9,
            0.999,
            1.0 - 1e-9,
            1.0 - 1e-15,
        ];
        for d in extreme_models() {
            let name = format!("{} {:?}", d.family(), d.parameters());
            let (lower, upper) = match d.family() {
                Family::Normal => (f64::NEG_INFINITY, f64::INFINITY),
                Family::Uniform => (d.parameters[0], d.parameters[1]),
                _ => (0.0, f64::INFINITY),
            };
            let mut last = (f64::NEG_INFINITY, 0.0);
            for &p in &ps {
                let q = match d.quantile(p) {
                    Ok(q) => q,
                    Err(StatsError::QuantileOverflow(_)) => continue,
                    Err(e) => panic!("{name}: quantile({p}) failed: {e}"),
                };
                assert!(
                    q.is_finite() && q >= lower && q <= upper,
                    "{name}: q({p}) = {q}"
                );
                let (c, f) = (d.cdf(q), d.pdf(q));
                assert!((0.0..=1.0).contains(&c), "{name}: cdf({q}) = {c}");
                assert!(f >= 0.0, "{name}: pdf({q}) = {f}");
                let below = (0..4).fold(q, |t, _| t.next_down()).max(lower);
                let above = (0..4).fold(q, |t, _| t.next_up()).min(upper);
                let tol = 1e-9 * p.min(1.0 - p) + 4.0 * f64::EPSILON * p + 1e-300;
                assert!(
                    d.cdf(below) <= p + tol && d.cdf(above) >= p - tol,
                    "{name}: p = {p}, q = {q}, cdf below {} above {}",
                    d.cdf(below),
                    d.cdf(above)
                );
                assert!(
                    q >= last.0 && c >= last.1,
                    "{name}: not monotone at p = {p}: {last:?} then {q} {c}"
                );
                last = (q, c);
            }
            for t in [
                -f64::MAX,
                -1.0,
                0.0,
                5e-324,
                1e-300,
                1.0,
                1e300,
                f64::MAX,
                f64::INFINITY,
            ] {
                let c = d.cdf(t);
                assert!((0.0..=1.0).contains(&c), "{name}: cdf({t}) = {c}");
                assert!(d.pdf(t) >= 0.0, "{name}: pdf({t}) = {}", d.pdf(t));
            }
        }
    }

    #[test]
    fn gamma_with_a_huge_shape_is_evaluated_stably() {
        // The fit of 1700000000 + (1..=100): shape 3.468e15. Expected values: scipy
        // 1.17.1, scipy.stats.gamma.cdf(t, a=3468347037933996.0,
        // scale=4.901470446603999e-07) for t = 1700000050 and 1700000000, and
        // scipy.stats.gamma.ppf(0.5, a=..., scale=...) = 1700000050.4999998. Tolerances:
        // 1e-8 absolute on the cdf (one ulp of t moves it by 3e-9) and 1e-6 on the
        // quantile (4 ulps of 1.7e9).
        let xs: Vec<f64> = (1..=100).map(|i| 1_700_000_000.0 + f64::from(i)).collect();
        let f = fit(&xs, Family::Gamma).unwrap();
        let d = &f.distribution;
        assert!(d.parameters[0] > 3e15, "{:?}", d.parameters());
        let d =
            Parametric::new(Family::Gamma, &[3468347037933996.0, 4.901470446603999e-07]).unwrap();
        assert!((d.cdf(1700000050.0) - 0.49309011954947835).abs() < 1e-8);
        assert!((d.cdf(1700000000.0) - 0.040105872126969686).abs() < 1e-8);
        let median = d.quantile(0.5).unwrap();
        assert!((median - 1700000050.4999998).abs() < 1e-6, "{median}");
        // Shape 1e16, scale 1: scipy.stats.gamma.cdf(1e16 + 1e8, a=1e16) =
        // 0.8413447460685428 and scipy.stats.gamma.ppf(0.3, a=1e16) = 9999999947559948.0
        // (ulp 2 there; tolerance 4).
        let e = Parametric::new(Family::Gamma, &[1e16, 1.0]).unwrap();
        assert!((e.cdf(1e16 + 1e8) - 0.8413447460685428).abs() < 1e-8);
        assert!((e.quantile(0.3).unwrap() - 9999999947559948.0).abs() <= 4.0);
        // The log-likelihood of a gamma this close to normal is the normal fit's to
        // within the skewness, 2 / sqrt(shape) < 1e-7 (normal limit); before the stable
        // form it came out as 0.
        let normal = fit(&xs, Family::Normal).unwrap();
        assert!(
            (f.summary.loglik - normal.summary.loglik).abs() < 1e-4 * normal.summary.loglik.abs(),
            "{} vs {}",
            f.summary.loglik,
            normal.summary.loglik
        );
    }

    #[test]
    fn weibull_with_a_large_shape_is_evaluated_in_log_space() {
        // Part sizes 100 +- 0.05 give shape ~3800. Expected: scipy 1.17.1,
        // scipy.stats.weibull_min.cdf(100.01, 3801.0, scale=100.0) = 0.7683211268978118,
        // .ppf(0.5, 3801.0, scale=100.0) = 99.99035792553083 and .pdf(100.01, 3801.0,
        // scale=100.0) = 12.876800100964363. Tolerances 1e-12 relative (the cdf's
        // condition number is shape, so one ulp of t moves it by 4e-13 relative).
        let d = Parametric::new(Family::Weibull, &[3801.0, 100.0]).unwrap();
        assert!(
            rel(d.cdf(100.01), 0.7683211268978118) < 1e-12,
            "{}",
            d.cdf(100.01)
        );
        assert!(rel(d.quantile(0.5).unwrap(), 99.99035792553083) < 1e-12);
        assert!(
            rel(d.pdf(100.01), 12.876800100964363) < 1e-12,
            "{}",
            d.pdf(100.01)
        );
        // The fit of such parts: finite parameters and a finite, in-range median.
        let xs: Vec<f64> = (0..=100).map(|i| 99.95 + f64::from(i) * 0.001).collect();
        let w = fit(&xs, Family::Weibull).unwrap().distribution;
        let m = w.quantile(0.5).unwrap();
        assert!(m > 99.95 && m < 100.05, "{m}");
        assert!((0.0..=1.0).contains(&w.cdf(100.0)));
    }

    #[test]
    fn normal_fit_of_values_near_the_largest_double() {
        // Exact arithmetic: [-1.7e308, 1.7e308] has mean 0 and sd (divisor n) 1.7e308;
        // tolerance 1e-15 relative.
        let f = fit(&[-1.7e308, 1.7e308], Family::Normal).unwrap();
        let p = f.distribution.parameters();
        assert_eq!(p[0].1, 0.0);
        assert!(rel(p[1].1, 1.7e308) < 1e-15, "{p:?}");
    }

    #[test]
    fn normal_fit_near_two_to_the_63_agrees_with_exact_arithmetic() {
        // The four doubles nearest 9223372036854775000, ...5800, ...4000, ...2000 (spaced
        // 1024 and 2048 apart). Python 3.11 `statistics.pstdev` of them, which sums in exact
        // fractions: 1514.5164244735017. The rounded mean alone gave 1536. 1e-12 relative.
        let xs = [
            9223372036854775000.0,
            9223372036854775800.0,
            9223372036854774000.0,
            9223372036854772000.0,
        ];
        let f = fit(&xs, Family::Normal).unwrap();
        let sd = f.distribution.parameters()[1].1;
        assert!(rel(sd, 1514.5164244735017) < 1e-12, "{sd}");
        // profile's sd (divisor n - 1) is the same spread: statistics.stdev gives
        // 1748.8129307237714.
        let mut sorted = xs;
        sorted.sort_by(f64::total_cmp);
        let p = crate::stats::moments::Profile::from_sorted(&sorted).unwrap();
        assert!(rel(p.sd.unwrap(), 1748.8129307237714) < 1e-12, "{:?}", p.sd);
    }
}
