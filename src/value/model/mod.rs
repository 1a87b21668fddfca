//! The model JSON value: a fitted or given parametric distribution or Gaussian mixture.
//!
//! `dist_fit`, `dist_mixture` and `dist_model` return a model as JSON text, so that
//! SQLite's own `->>` and `json_each` read it and fit results join against other
//! tables. A parametric model:
//!
//! ```json
//! {"family": "gamma", "shape": 2.1, "scale": 1.7, "n": 272, "loglik": -421.3, "aic": 846.6, "bic": 853.8}
//! ```
//!
//! Its parameters, by family: normal `mean`, `sd`; lognormal `mu`, `sigma` (the mean and
//! sd of `ln x`); exponential `rate`; gamma and weibull `shape`, `scale`; uniform `min`,
//! `max`. A Gaussian mixture has the family `normal_mixture`:
//!
//! ```json
//! {"family": "normal_mixture", "k": 2,
//!  "components": [{"weight": 0.35, "mean": 2.04, "sd": 0.27}, {"weight": 0.65, "mean": 4.29, "sd": 0.41}],
//!  "n": 272, "loglik": -276.4, "aic": 562.7, "bic": 580.7, "iterations": 31, "converged": true,
//!  "k_candidates": [{"k": 1, "loglik": -421.4, "bic": 854.0}, {"k": 2, "loglik": -276.4, "bic": 580.7}]}
//! ```
//!
//! `n`, `loglik`, `aic`, `bic` (and for a mixture `k`, `iterations`, `converged`,
//! `k_candidates`) describe the fit; a model built from known parameters has none of
//! them. A fit to rounded readings adds `resolution` (the step; its `loglik`, `aic` and
//! `bic` are then the binned ones, sums of log probabilities), and a fit to censored
//! readings `n_exact`, `n_left` and `n_right`. [`Model::parse`] accepts exactly these fields: a missing parameter, an unknown
//! field or a value outside its domain is an error naming the field, and an unknown
//! family lists the supported ones. Serialising with [`Model::to_json`] and parsing again
//! gives the same model (numbers are written in their shortest round-trip form).
//!
//! Evaluation ([`Model::cdf`], [`Model::pdf`], [`Model::quantile`], [`Model::mean`],
//! [`Model::sd`], [`Model::component_index`], [`Model::components`]) is done by
//! [`crate::stats::fit::Parametric`] and [`crate::stats::mixture::Mixture`].

mod json;

use std::fmt;

use crate::stats::StatsError;
use crate::stats::fit::{Family, FitSummary, Parametric, ParametricFit};
use crate::stats::mixture::{Candidate, Component, Mixture, MixtureFit};
use crate::stats::readings::CensorCounts;

/// The family name of a Gaussian mixture.
pub const MIXTURE_FAMILY: &str = "normal_mixture";

/// How closely a model's parameters must match a refit in [`Model::check_fit_of`]:
/// relative, with locations measured against the spread.
pub const FIT_MATCH: f64 = 1e-9;

/// Fit metadata every model may carry.
const FIT_FIELDS: [&str; 8] = [
    "n",
    "loglik",
    "aic",
    "bic",
    "resolution",
    "n_exact",
    "n_left",
    "n_right",
];
/// Further metadata of a fitted mixture.
const EM_FIELDS: [&str; 4] = ["k", "iterations", "converged", "k_candidates"];

/// Why a model (or a parameter object) was refused.
///
/// `what` is the text being read: `"model"` for [`Model::parse`], `"params"` for
/// [`Model::from_parameters`].
#[derive(Debug, Clone, PartialEq)]
pub enum ModelError {
    /// Not JSON at all.
    NotJson { what: &'static str, detail: String },
    /// JSON, but not an object.
    NotObject { what: &'static str, got: String },
    /// A required field is absent.
    MissingField {
        what: &'static str,
        field: String,
        needs: String,
    },
    /// A field that does not belong (`scope` says where: "a normal model").
    UnknownField {
        what: &'static str,
        field: String,
        scope: String,
        allowed: String,
    },
    /// A field with a value outside its domain.
    BadField {
        what: &'static str,
        field: String,
        detail: String,
    },
    /// A family ogive does not know.
    UnknownFamily(String),
    /// A probability outside `[0, 1]`.
    Probability(f64),
    /// A model that is not the maximum-likelihood fit of the values it is checked against
    /// ([`Model::check_fit_of`]); says how it differs.
    NotTheFit(String),
}

impl fmt::Display for ModelError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ModelError::NotJson { what, detail } => write!(
                f,
                "{what} must be JSON text as dist_fit, dist_mixture or dist_model make it; this is \
                 not JSON ({detail})"
            ),
            ModelError::NotObject { what, got } => {
                write!(f, "{what} must be a JSON object, got {got}")
            }
            ModelError::MissingField { what, field, needs } => {
                write!(f, "{what} lacks the field \"{field}\" (required: {needs})")
            }
            ModelError::UnknownField {
                what,
                field,
                scope,
                allowed,
            } => write!(
                f,
                "{what} has an unknown field \"{field}\"; the fields of {scope} are {allowed}"
            ),
            ModelError::BadField {
                what,
                field,
                detail,
            } => write!(f, "{what} field \"{field}\" {detail}"),
            ModelError::UnknownFamily(name) => write!(
                f,
                "unknown family '{}'; supported: {}, {MIXTURE_FAMILY}",
                crate::stats::echo(name),
                Family::names()
            ),
            ModelError::Probability(p) => write!(f, "p must be between 0 and 1, got {p}"),
            ModelError::NotTheFit(detail) => write!(
                f,
                "the model is not dist_fit's fit of these values ({detail}); the correction \
                 holds only for the maximum-likelihood fit of the same data"
            ),
        }
    }
}

impl std::error::Error for ModelError {}

impl From<StatsError> for ModelError {
    fn from(e: StatsError) -> Self {
        match e {
            StatsError::ProbabilityOutOfRange(p) => ModelError::Probability(p),
            other => ModelError::BadField {
                what: "model",
                field: "p".to_string(),
                detail: other.to_string(),
            },
        }
    }
}

/// The distribution a model describes.
#[derive(Debug, Clone, PartialEq)]
pub enum Law {
    /// One of the parametric families.
    Parametric(Parametric),
    /// A Gaussian mixture.
    Mixture(Mixture),
}

/// A model: a distribution with, when it was fitted, the fit's statistics.
#[derive(Debug, Clone, PartialEq)]
pub struct Model {
    law: Law,
    fit: FitFields,
    iterations: Option<u64>,
    converged: Option<bool>,
    k_candidates: Option<Vec<Candidate>>,
}

/// A model's fit statistics: all of a [`FitSummary`] when ogive fitted it; any of them,
/// or none, when it was read from JSON.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
struct FitFields {
    n: Option<u64>,
    loglik: Option<f64>,
    aic: Option<f64>,
    bic: Option<f64>,
    /// The step the readings were taken as rounded to (then the likelihood is binned).
    resolution: Option<f64>,
    /// The counts of exact, left- and right-censored readings of a censored fit.
    censored: Option<CensorCounts>,
}

impl From<FitSummary> for FitFields {
    fn from(s: FitSummary) -> Self {
        FitFields {
            n: Some(s.n),
            loglik: Some(s.loglik),
            aic: Some(s.aic),
            bic: Some(s.bic),
            resolution: None,
            censored: None,
        }
    }
}

impl From<ParametricFit> for Model {
    fn from(f: ParametricFit) -> Self {
        Model {
            fit: f.summary.into(),
            ..Model::of(Law::Parametric(f.distribution))
        }
    }
}

impl From<MixtureFit> for Model {
    fn from(f: MixtureFit) -> Self {
        Model {
            fit: FitFields {
                resolution: f.resolution,
                ..f.summary.into()
            },
            iterations: Some(u64::from(f.iterations)),
            converged: Some(f.converged),
            k_candidates: Some(f.candidates),
            ..Model::of(Law::Mixture(f.mixture))
        }
    }
}

impl Model {
    /// The same model, recorded as fitted to readings rounded to `step` (the `resolution`
    /// field), when there is a step.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::Family;
    /// use ogive::stats::readings::fit_rounded;
    /// use ogive::value::model::Model;
    /// let m = Model::from(fit_rounded(&[1.0, 2.0, 2.0, 3.0], Family::Normal, 1.0)?).rounded_to(Some(1.0));
    /// assert_eq!(m.resolution(), Some(1.0));
    /// assert!(m.to_json().contains(r#""resolution":1.0"#));
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn rounded_to(mut self, step: Option<f64>) -> Model {
        self.fit.resolution = step;
        self
    }

    /// The same model, recorded as fitted to censored readings with these counts (the
    /// `n_exact`, `n_left` and `n_right` fields).
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::Family;
    /// use ogive::stats::readings::fit_censored;
    /// use ogive::value::model::Model;
    /// let (f, counts) = fit_censored(&[1.0, 2.0, 3.0, 6.0], &[0, 0, 0, 1], Family::Exponential)?;
    /// let m = Model::from(f).censored(counts);
    /// assert!(m.to_json().contains(r#""n_exact":3,"n_left":0,"n_right":1"#));
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn censored(mut self, counts: CensorCounts) -> Model {
        self.fit.censored = Some(counts);
        self
    }

    /// The step the model's readings were taken as rounded to, when it was so fitted.
    ///
    /// # Example
    /// ```
    /// let m = ogive::value::model::Model::parse(r#"{"family": "exponential", "rate": 2, "resolution": 0.5}"#)?;
    /// assert_eq!(m.resolution(), Some(0.5));
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn resolution(&self) -> Option<f64> {
        self.fit.resolution
    }

    /// A model of a distribution, with no fit statistics.
    fn of(law: Law) -> Model {
        Model {
            law,
            fit: FitFields::default(),
            iterations: None,
            converged: None,
            k_candidates: None,
        }
    }

    /// The family name: one of [`Family::names`] or [`MIXTURE_FAMILY`].
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::parse(r#"{"family": "Gamma", "shape": 2, "scale": 1}"#)?;
    /// assert_eq!(m.family_name(), "gamma");
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn family_name(&self) -> &'static str {
        match &self.law {
            Law::Parametric(p) => p.family().name(),
            Law::Mixture(_) => MIXTURE_FAMILY,
        }
    }

    /// The kind of model, for messages: `"a gamma model"`.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("uniform", r#"{"min": 0, "max": 1}"#)?;
    /// assert_eq!(m.kind(), "a uniform model");
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn kind(&self) -> String {
        format!("a {} model", self.family_name())
    }

    /// The distribution.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::{Law, Model};
    /// let m = Model::from_parameters("normal", r#"{"mean": 0, "sd": 1}"#)?;
    /// assert!(matches!(m.law(), Law::Parametric(_)));
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn law(&self) -> &Law {
        &self.law
    }

    /// The number of values fitted, when the model was fitted.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::parse(r#"{"family": "exponential", "rate": 2, "n": 40}"#)?;
    /// assert_eq!(m.n(), Some(40));
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn n(&self) -> Option<u64> {
        self.fit.n
    }

    /// The maximised log-likelihood, when the model was fitted.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("exponential", r#"{"rate": 2}"#)?;
    /// assert_eq!(m.loglik(), None);
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn loglik(&self) -> Option<f64> {
        self.fit.loglik
    }

    /// The cumulative distribution function at `t`, in `[0, 1]`: 0 at `-inf`, 1 at
    /// `+inf`; NaN `t` gives NaN (SQL adapters never pass NaN: they read it as NULL).
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("exponential", r#"{"rate": 1}"#)?;
    /// assert_eq!(m.cdf(0.0), 0.0);
    /// assert_eq!(m.cdf(f64::INFINITY), 1.0);
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn cdf(&self, t: f64) -> f64 {
        if t.is_infinite() {
            return if t > 0.0 { 1.0 } else { 0.0 };
        }
        match &self.law {
            Law::Parametric(p) => p.cdf(t),
            Law::Mixture(m) => m.cdf(t),
        }
    }

    /// The density at `t`; `+inf` at 0 for a gamma or Weibull with shape below 1; 0 at
    /// `-inf` and `+inf`; NaN `t` gives NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("uniform", r#"{"min": 0, "max": 4}"#)?;
    /// assert_eq!(m.pdf(1.0), 0.25);
    /// assert_eq!(m.pdf(f64::NEG_INFINITY), 0.0);
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn pdf(&self, t: f64) -> f64 {
        if t.is_infinite() {
            return 0.0;
        }
        match &self.law {
            Law::Parametric(p) => p.pdf(t),
            Law::Mixture(m) => m.pdf(t),
        }
    }

    /// The p-quantile. `p = 0` and `p = 1` give the ends of the support, which are
    /// infinite for the normal (both), the positive families and mixtures (`+inf` at
    /// `p = 1`; mixtures `-inf` at 0). A mixture's quantile is found by bracketed
    /// Newton-bisection on its cdf.
    ///
    /// # Errors
    /// [`ModelError::Probability`] for p outside `[0, 1]` or NaN.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("uniform", r#"{"min": 0, "max": 10}"#)?;
    /// assert_eq!(m.quantile(0.3)?, 3.0);
    /// assert!(m.quantile(1.2).is_err());
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn quantile(&self, p: f64) -> Result<f64, ModelError> {
        Ok(match &self.law {
            Law::Parametric(d) => d.quantile(p)?,
            Law::Mixture(m) => m.quantile(p)?,
        })
    }

    /// The mean; `None` when it overflows (a lognormal with a very large sigma).
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("weibull", r#"{"shape": 1, "scale": 2}"#)?;
    /// assert_eq!(m.mean(), Some(2.0)); // shape 1 is the exponential with mean 2
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn mean(&self) -> Option<f64> {
        match &self.law {
            Law::Parametric(p) => p.mean(),
            Law::Mixture(m) => Some(m.mean()).filter(|v| v.is_finite()),
        }
    }

    /// The standard deviation; `None` when it overflows.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("normal", r#"{"mean": 1, "sd": 3}"#)?;
    /// assert_eq!(m.sd(), Some(3.0));
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn sd(&self) -> Option<f64> {
        match &self.law {
            Law::Parametric(p) => p.sd(),
            Law::Mixture(m) => Some(m.sd()).filter(|v| v.is_finite()),
        }
    }

    /// The index (from 0) of the mixture component most probable for `t`; a parametric
    /// model has one component, index 0. `None` for an infinite or NaN `t`.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters(
    ///     "normal_mixture",
    ///     r#"{"components": [{"weight": 0.5, "mean": 0, "sd": 1}, {"weight": 0.5, "mean": 10, "sd": 1}]}"#,
    /// )?;
    /// assert_eq!(m.component_index(7.5), Some(1));
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn component_index(&self, t: f64) -> Option<usize> {
        match &self.law {
            Law::Parametric(_) => t.is_finite().then_some(0),
            Law::Mixture(m) => m.component_index(t),
        }
    }

    /// The components, sorted by mean for a fitted mixture. A parametric model is one
    /// component of weight 1 with the distribution's mean and sd (infinite when they
    /// overflow).
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters(
    ///     "normal_mixture",
    ///     r#"{"components": [{"weight": 0.4, "mean": 0, "sd": 1}, {"weight": 0.6, "mean": 5, "sd": 2}]}"#,
    /// )?;
    /// assert_eq!(m.components()[1].mean, 5.0);
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn components(&self) -> Vec<Component> {
        match &self.law {
            Law::Parametric(p) => vec![Component {
                weight: 1.0,
                mean: p.mean().unwrap_or(f64::INFINITY),
                sd: p.sd().unwrap_or(f64::INFINITY),
            }],
            Law::Mixture(m) => m.components().to_vec(),
        }
    }
}

impl Model {
    /// Checks that this model is the maximum-likelihood fit that `dist_fit` makes of `xs`:
    /// a parametric model whose `n` (when it has one) is the number of values and whose
    /// parameters equal those of `fit(xs, family)` within [`FIT_MATCH`] relative (a
    /// location, the normal mean, lognormal mu or uniform ends, within [`FIT_MATCH`] times
    /// its size plus the spread). Tests whose null distribution assumes the parameters
    /// were estimated from the same data (Lilliefors) use it to refuse any other model.
    ///
    /// # Errors
    /// [`ModelError::NotTheFit`] saying what differs: a mixture, another `n`, values that
    /// admit no fit of the family, or a parameter.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, fit};
    /// use ogive::value::model::Model;
    /// let xs = [0.5, 1.5, 2.0, 4.0];
    /// let m = Model::from(fit(&xs, Family::Exponential).unwrap());
    /// assert!(m.check_fit_of(&xs).is_ok());
    /// assert!(m.check_fit_of(&[0.5, 1.5, 2.0, 5.0]).is_err());
    /// ```
    pub fn check_fit_of(&self, xs: &[f64]) -> Result<(), ModelError> {
        let Law::Parametric(p) = &self.law else {
            return Err(ModelError::NotTheFit(format!(
                "a {MIXTURE_FAMILY} is not a maximum-likelihood fit of one family"
            )));
        };
        if self.fit.resolution.is_some() || self.fit.censored.is_some() {
            return Err(ModelError::NotTheFit(
                "it was fitted to rounded or censored readings, not to the values as exact"
                    .to_string(),
            ));
        }
        crate::stats::fit::check_is_fit_of(p, self.fit.n, xs, FIT_MATCH)
            .map_err(ModelError::NotTheFit)
    }
}

impl fmt::Display for Model {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        f.write_str(&self.to_json())
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::fit::fit;
    use crate::stats::mixture::fit_mixture;

    #[test]
    fn fitted_models_round_trip() {
        let xs = [0.7, 1.3, 2.2, 2.9, 3.1, 4.8, 5.5, 7.9, 0.2, 1.1];
        for family in Family::ALL {
            let m = Model::from(fit(&xs, family).unwrap());
            let text = m.to_json();
            assert_eq!(Model::parse(&text), Ok(m.clone()), "{text}");
            assert_eq!(Model::parse(&text).unwrap().to_json(), text);
        }
        let m = Model::from(fit_mixture(&xs, None).unwrap());
        let text = m.to_json();
        assert_eq!(Model::parse(&text).unwrap(), m);
    }

    fn err(text: &str) -> String {
        Model::parse(text).unwrap_err().to_string()
    }

    #[test]
    fn rounded_and_censored_fits_round_trip_and_are_no_exact_fit() {
        use crate::stats::readings::{fit_censored, fit_rounded};
        let xs = [1.0, 2.0, 2.0, 3.0, 5.0];
        let m = Model::from(fit_rounded(&xs, Family::Gamma, 1.0).unwrap()).rounded_to(Some(1.0));
        assert_eq!(Model::parse(&m.to_json()).unwrap(), m);
        // Lilliefors needs the exact fit of the values: a binned fit is refused.
        assert!(matches!(m.check_fit_of(&xs), Err(ModelError::NotTheFit(_))));
        let (f, counts) = fit_censored(&xs, &[0, 0, 1, 0, -1], Family::Normal).unwrap();
        let c = Model::from(f).censored(counts);
        assert_eq!(Model::parse(&c.to_json()).unwrap(), c);
        assert!(matches!(c.check_fit_of(&xs), Err(ModelError::NotTheFit(_))));
        assert!(
            err(r#"{"family": "normal", "mean": 0, "sd": 1, "n_left": 2}"#)
                .contains("come together")
        );
        assert!(
            err(r#"{"family": "normal", "mean": 0, "sd": 1, "resolution": 0}"#)
                .contains("resolution")
        );
    }

    #[test]
    fn errors_name_the_field() {
        assert_eq!(
            err(r#"{"family": "normal", "mean": 0, "sd": 1, "scale": 2}"#),
            "model has an unknown field \"scale\"; the fields of a normal model are family, mean, \
             sd, n, loglik, aic, bic, resolution, n_exact, n_left, n_right"
        );
        assert_eq!(
            err(r#"{"family": "gamma", "shape": -1, "scale": 2}"#),
            "model field \"shape\" must be finite and > 0, got -1"
        );
        assert_eq!(
            err(r#"{"family": "poisson", "rate": 1}"#),
            "unknown family 'poisson'; supported: normal, lognormal, exponential, gamma, weibull, \
             uniform, normal_mixture"
        );
        assert_eq!(
            err(r#"{"mean": 1}"#),
            "model lacks the field \"family\" (required: family and the family's parameters)"
        );
        assert!(err("[1, 2]").starts_with("model must be a JSON object, got [1,2]"));
        assert!(err("nope").starts_with("model must be JSON text"));
        assert_eq!(
            err(
                r#"{"family": "normal_mixture", "components": [{"weight": 1, "mean": 0, "sd": 1, "w": 2}]}"#
            ),
            "model has an unknown field \"components[0].w\"; the fields of a component are \
             weight, mean, sd"
        );
        assert_eq!(
            err(r#"{"family": "normal_mixture", "components": [{"weight": 1, "mean": 0}]}"#),
            "model lacks the field \"components[0].sd\" (required: weight, mean, sd in every \
             component)"
        );
        assert_eq!(
            err(
                r#"{"family": "normal_mixture", "k": 3, "components": [{"weight": 1, "mean": 0, "sd": 1}]}"#
            ),
            "model field \"k\" must equal the number of components, 1, got 3"
        );
        assert_eq!(
            err(r#"{"family": "uniform", "min": 3, "max": 1}"#),
            "model field \"max\" must be finite and greater than min, got 1"
        );
        assert_eq!(
            err(r#"{"family": "normal", "mean": "zero", "sd": 1}"#),
            "model field \"mean\" must be a number, got \"zero\""
        );
        let e = Model::from_parameters("normal", r#"{"mean": 0, "sd": 1, "n": 5}"#).unwrap_err();
        assert_eq!(
            e.to_string(),
            "params has an unknown field \"n\"; the fields of normal params are mean, sd"
        );
    }

    #[test]
    fn evaluation_never_gives_nan() {
        // Every family, with shapes on both sides of 1, at the ends of the support, the
        // poles, far in the tails and at the infinities: cdf in [0, 1], pdf >= 0 (possibly
        // +inf), no NaN.
        let models = [
            ("normal", r#"{"mean": 1, "sd": 2}"#),
            ("lognormal", r#"{"mu": 0.5, "sigma": 1.5}"#),
            ("exponential", r#"{"rate": 3}"#),
            ("gamma", r#"{"shape": 0.5, "scale": 2}"#),
            ("gamma", r#"{"shape": 1, "scale": 2}"#),
            ("gamma", r#"{"shape": 4, "scale": 2}"#),
            ("weibull", r#"{"shape": 0.5, "scale": 2}"#),
            ("weibull", r#"{"shape": 1, "scale": 2}"#),
            ("weibull", r#"{"shape": 3, "scale": 2}"#),
            ("uniform", r#"{"min": -1, "max": 2}"#),
            (
                "normal_mixture",
                r#"{"components": [{"weight": 0.3, "mean": 0, "sd": 1}, {"weight": 0.7, "mean": 9, "sd": 2}]}"#,
            ),
        ];
        let ts = [
            f64::NEG_INFINITY,
            f64::MIN,
            -1.0,
            -f64::MIN_POSITIVE,
            0.0,
            f64::MIN_POSITIVE,
            1.0,
            2.0,
            1e300,
            f64::MAX,
            f64::INFINITY,
        ];
        for (family, params) in models {
            let m = Model::from_parameters(family, params).unwrap();
            for t in ts {
                let (c, d) = (m.cdf(t), m.pdf(t));
                assert!(
                    (0.0..=1.0).contains(&c),
                    "{family} {params} cdf({t:e}) = {c}"
                );
                assert!(d >= 0.0, "{family} {params} pdf({t:e}) = {d}");
            }
            assert_eq!((m.cdf(f64::NEG_INFINITY), m.cdf(f64::INFINITY)), (0.0, 1.0));
            for p in [0.0, 1e-300, 0.5, 1.0 - 1e-16, 1.0] {
                assert!(!m.quantile(p).unwrap().is_nan(), "{family} quantile({p})");
            }
        }
        // The poles: shape below 1 at 0 (scipy.stats.gamma(0.5, scale=2).pdf(0) and
        // scipy.stats.weibull_min(0.5, scale=2).pdf(0) are inf).
        for family in ["gamma", "weibull"] {
            let m = Model::from_parameters(family, r#"{"shape": 0.5, "scale": 2}"#).unwrap();
            assert_eq!(m.pdf(0.0), f64::INFINITY, "{family}");
        }
    }

    #[test]
    fn parametric_components_and_index() {
        let m = Model::from_parameters("normal", r#"{"mean": 3, "sd": 2}"#).unwrap();
        assert_eq!(
            m.components(),
            vec![Component {
                weight: 1.0,
                mean: 3.0,
                sd: 2.0
            }]
        );
        assert_eq!(m.component_index(100.0), Some(0));
        assert_eq!(m.component_index(f64::INFINITY), None);
    }
}
