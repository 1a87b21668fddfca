//! The SQL values of ogive: distributions stored in tables and passed between functions.
//!
//! A distribution value is read from SQL once, at the boundary, by [`Dist::from_blob`] or
//! [`Dist::from_text`] (through the catalogue's one reader, `crate::catalogue::reader`),
//! which checks it completely; everything after works on the checked [`Dist`]. A
//! distribution is either empirical, stored as a BLOB ([`empirical`], layout in
//! docs/empirical-blob.md), or a model, stored as JSON text ([`model`]: a parametric
//! family or a Gaussian mixture, as `dist_fit`, `dist_mixture` and `dist_model` write
//! it). Each variant of [`Dist`] answers the same questions (cdf, quantile, density,
//! summaries), so a function written against [`Dist`] works for every kind of
//! distribution; adding a kind means adding a variant, an arm in the readers and an
//! arm in each method here.
//!
//! # Infinities and NaN
//!
//! SQLite's REAL holds `+inf` and `-inf` but no NaN. Infinite answers are real answers and
//! reach SQL as they are: the quantile at `p = 0` or `p = 1` of a model with unbounded
//! support (`-inf` for the normal and mixtures at 0, `+inf` at 1 for every family but the
//! uniform), the density of a gamma or Weibull model with shape below 1 at its pole 0, and
//! the quantiles of an empirical distribution that holds an infinite value. An undefined
//! answer is `None` (SQL NULL), never NaN.

#![deny(unsafe_code)]

pub mod censored;
pub mod empirical;
pub mod model;
pub mod sketch;

use std::fmt;

use crate::stats::StatsError;
use crate::stats::censored::{Censored, Method};
use crate::stats::kde::{Bandwidth, Kde};
use crate::stats::moments::{Moments, Profile};
use crate::stats::quantile::QuantileType;
use crate::stats::sample::Sample;
use empirical::BlobError;
use model::{Model, ModelError};

/// A distribution read from SQL.
///
/// # Example
/// ```
/// use ogive::stats::sample::Sample;
/// use ogive::value::{empirical, Dist};
/// let blob = empirical::encode(&Sample::from_values(vec![1.0, 2.0, 3.0, 4.0]).unwrap());
/// let d = Dist::from_blob(&blob, 1).unwrap();
/// assert_eq!(d.cdf(2.5), Some(0.5));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub enum Dist {
    /// An empirical distribution: a sorted sample with optional frequency weights.
    Empirical(Sample),
    /// A model: a parametric distribution or a Gaussian mixture.
    Model(Model),
    /// A nonparametric maximum-likelihood estimate from censored readings
    /// (`dist_censored`): Kaplan-Meier, its mirror, or Turnbull's.
    Censored(Censored),
    /// An empirical distribution of a series of readings (`dist_series`), with its
    /// effective sample size: the same distribution as [`Dist::Empirical`], answering
    /// every question the same way, plus the n_eff that the tests and the band use.
    Series(Sample, f64),
}

/// Why a SQL value is not a usable distribution. The adapters add the function name.
///
/// # Example
/// ```
/// use ogive::value::Dist;
/// let e = Dist::from_blob(b"short", 1).unwrap_err();
/// assert!(e.to_string().starts_with("argument 1 is not an empirical distribution (bad header)"));
/// ```
#[derive(Debug, Clone, PartialEq)]
pub enum ValueError {
    /// A BLOB that is not a valid empirical distribution.
    BadBlob { arg: usize, problem: BlobError },
    /// A BLOB of the censored kind that is not a valid censored estimate.
    BadCensored { arg: usize, problem: BlobError },
    /// JSON text that is not a valid model (the problem names the field).
    NotAModel { arg: usize, problem: ModelError },
    /// A value of the wrong SQL type, or TEXT that is not JSON.
    NotADistribution { arg: usize, got: String },
}

impl fmt::Display for ValueError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ValueError::BadBlob { arg, problem } => write!(
                f,
                "argument {arg} is not an empirical distribution ({problem}); build one with dist_empirical(x)"
            ),
            ValueError::BadCensored { arg, problem } => write!(
                f,
                "argument {arg} is not a valid censored estimate ({problem}); build one with \
                 dist_censored(x, c)"
            ),
            ValueError::NotAModel { arg, problem } => {
                write!(f, "argument {arg} is not a valid model: {problem}")
            }
            ValueError::NotADistribution { arg, got } => write!(
                f,
                "argument {arg} must be a distribution value (a BLOB from dist_empirical, or \
                 model JSON from dist_fit, dist_mixture or dist_model); got {got}"
            ),
        }
    }
}

impl std::error::Error for ValueError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            ValueError::BadBlob { problem, .. } | ValueError::BadCensored { problem, .. } => {
                Some(problem)
            }
            ValueError::NotAModel { problem, .. } => Some(problem),
            ValueError::NotADistribution { .. } => None,
        }
    }
}

impl Dist {
    /// Reads argument number `arg` (1-based, for messages) of a SQL function, given as a
    /// BLOB: an empirical distribution (format version 1) or a censored estimate
    /// (version 2, kind 2).
    ///
    /// # Errors
    /// [`ValueError::BadBlob`] for a BLOB that fails [`empirical::decode`];
    /// [`ValueError::BadCensored`] for a version-2 BLOB that fails [`censored::decode`].
    ///
    /// # Example
    /// ```
    /// use ogive::value::Dist;
    /// let e = Dist::from_blob(b"short", 1).unwrap_err();
    /// assert!(e.to_string().starts_with("argument 1 is not an empirical distribution (bad header)"));
    /// ```
    pub fn from_blob(b: &[u8], arg: usize) -> Result<Dist, ValueError> {
        if b.len() > 4 && empirical::looks_like_ogive(b) && b[4] == empirical::VERSION_SERIES {
            return empirical::decode_series(b)
                .map(|(s, n_eff)| Dist::Series(s, n_eff))
                .map_err(|problem| ValueError::BadBlob { arg, problem });
        }
        if b.len() > 4 && empirical::looks_like_ogive(b) && b[4] == censored::VERSION {
            return censored::decode(b)
                .map(Dist::Censored)
                .map_err(|problem| ValueError::BadCensored { arg, problem });
        }
        empirical::decode(b)
            .map(Dist::Empirical)
            .map_err(|problem| ValueError::BadBlob { arg, problem })
    }

    /// Reads argument number `arg` of a SQL function, given as TEXT, as a model.
    ///
    /// # Errors
    /// [`ValueError::NotAModel`] for JSON text that fails [`Model::parse`] (a missing,
    /// unknown or invalid field, named); [`ValueError::NotADistribution`] (with `got`
    /// left for the caller to fill) for text that is not JSON at all.
    ///
    /// # Example
    /// ```
    /// use ogive::value::Dist;
    /// let m = br#"{"family": "exponential", "rate": 2}"#;
    /// assert_eq!(Dist::from_text(m, 1).unwrap().mean(), Some(0.5));
    /// let e = Dist::from_text(br#"{"family": "exponential"}"#, 2).unwrap_err();
    /// assert!(e.to_string().starts_with(r#"argument 2 is not a valid model: model lacks the field "rate""#));
    /// ```
    pub fn from_text(t: &[u8], arg: usize) -> Result<Dist, ValueError> {
        let not_json = || ValueError::NotADistribution {
            arg,
            got: String::new(),
        };
        let text = std::str::from_utf8(t).map_err(|_| not_json())?;
        match Model::parse(text) {
            Ok(m) => Ok(Dist::Model(m)),
            // Not JSON at all: most likely not meant as a model.
            Err(ModelError::NotJson { .. }) => Err(not_json()),
            Err(problem) => Err(ValueError::NotAModel { arg, problem }),
        }
    }

    /// The kind of distribution, for messages: `"an empirical distribution"` or
    /// `"a <family> model"`.
    ///
    /// # Example
    /// ```
    /// use ogive::value::{Dist, model::Model};
    /// let m = Model::from_parameters("gamma", r#"{"shape": 2, "scale": 1}"#).unwrap();
    /// assert_eq!(Dist::Model(m).kind(), "a gamma model");
    /// ```
    pub fn kind(&self) -> String {
        match self {
            Dist::Empirical(_) => "an empirical distribution".to_string(),
            Dist::Series(..) => "an empirical distribution of a series".to_string(),
            Dist::Model(m) => m.kind(),
            Dist::Censored(c) => match c.method() {
                Method::KaplanMeier => "a Kaplan-Meier estimate".to_string(),
                Method::Mirror => "a mirrored Kaplan-Meier estimate".to_string(),
                Method::Turnbull => "a Turnbull estimate".to_string(),
            },
        }
    }

    /// The cdf at `t`. `None` when undefined (for a censored estimate: inside an interval
    /// whose mass the estimate does not spread, or beyond the last censored reading).
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::Dist};
    /// let d = Dist::Empirical(Sample::from_values(vec![1.0, 2.0]).unwrap());
    /// assert_eq!(d.cdf(1.5), Some(0.5));
    /// ```
    pub fn cdf(&self, t: f64) -> Option<f64> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => s.cdf(t),
            Dist::Model(m) => Some(m.cdf(t)).filter(|c| !c.is_nan()),
            Dist::Censored(c) => c.cdf(t),
        }
    }

    /// The p-quantile. For an empirical distribution, `ty` picks the Hyndman-Fan
    /// definition. A model's quantile is the inverse of its continuous cdf, the same under
    /// every definition, so `ty` does not apply to it; at `p = 0` and `p = 1` it is the end
    /// of the support, infinite where the support is unbounded. A censored estimate's
    /// quantile is the inverse of its cdf, `inf {t : F(t) >= p}` (`ty` does not apply),
    /// `None` where that point is not determined. `Ok(None)` when undefined.
    ///
    /// # Errors
    /// [`StatsError::ProbabilityOutOfRange`] when `p` is not in `[0, 1]`.
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::quantile::QuantileType, stats::sample::Sample, value::Dist};
    /// use ogive::value::model::Model;
    /// let d = Dist::Empirical(Sample::from_values(vec![1.0, 2.0, 3.0]).unwrap());
    /// assert_eq!(d.quantile(0.5, QuantileType::DEFAULT), Ok(Some(2.0)));
    /// let m = Dist::Model(Model::from_parameters("normal", r#"{"mean": 2, "sd": 1}"#).unwrap());
    /// assert_eq!(m.quantile(0.5, QuantileType::DEFAULT), Ok(Some(2.0)));
    /// assert_eq!(m.quantile(1.0, QuantileType::DEFAULT), Ok(Some(f64::INFINITY)));
    /// ```
    pub fn quantile(&self, p: f64, ty: QuantileType) -> Result<Option<f64>, StatsError> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => s.quantile(p, ty),
            Dist::Model(m) => {
                let p = crate::stats::check_probability(p)?;
                // With p checked, a model's quantile cannot fail.
                Ok(m.quantile(p).ok().filter(|q| !q.is_nan()))
            }
            Dist::Censored(c) => c.quantile(p),
        }
    }

    /// A density evaluator. For an empirical distribution, the Gaussian kernel density
    /// estimate with the given bandwidth; for a model, its own density (the bandwidth does
    /// not apply). `None` when the density is undefined (for example, a bandwidth rule on
    /// fewer than two distinct values), and for a censored estimate, which has none.
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::kde::Bandwidth, stats::sample::Sample, value::Dist};
    /// let d = Dist::Empirical(Sample::from_values(vec![0.0]).unwrap());
    /// assert!(d.density(Bandwidth::Scott).is_none()); // one value: no spread
    /// let f = d.density(Bandwidth::Fixed(1.0)).unwrap();
    /// assert!((f.at(0.0) - 0.3989422804014327).abs() < 1e-16);
    /// ```
    pub fn density(&self, bandwidth: Bandwidth) -> Option<Density<'_>> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => Kde::new(s, bandwidth).map(Density::Kernel),
            Dist::Model(m) => Some(Density::Model(m)),
            Dist::Censored(_) => None,
        }
    }

    /// The number of observations: n of an unweighted sample, or the total weight; for a
    /// fitted model, the number of values it was fitted to (its `n`), and `None` for a
    /// model built from known parameters; for a censored estimate, its number of readings.
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::{Dist, Size}, value::model::Model};
    /// let d = Dist::Empirical(Sample::from_pairs(vec![(1.0, 2.5)]).unwrap());
    /// assert_eq!(d.size(), Some(Size::Weight(2.5)));
    /// let m = Model::parse(r#"{"family": "exponential", "rate": 2, "n": 40}"#).unwrap();
    /// assert_eq!(Dist::Model(m).size(), Some(Size::Count(40)));
    /// ```
    pub fn size(&self) -> Option<Size> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) if s.is_weighted() => {
                Some(Size::Weight(s.total_weight()))
            }
            Dist::Empirical(s) | Dist::Series(s, _) => Some(Size::Count(s.len() as u64)),
            Dist::Model(m) => m.n().map(Size::Count),
            Dist::Censored(c) => Some(Size::Count(c.n())),
        }
    }

    /// The effective sample size: a series value's n_eff (`dist_series`), the total weight
    /// (n when unweighted) of a plain empirical distribution; `None` for a model (not a
    /// sample) and for a censored estimate (its sampling error is that of the
    /// Kaplan-Meier or Turnbull estimate, which no single size describes; its band is
    /// Greenwood's).
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::Dist};
    /// let s = Sample::from_values(vec![1.0, 2.0, 3.0]).unwrap();
    /// assert_eq!(Dist::Empirical(s.clone()).n_eff(), Some(3.0));
    /// assert_eq!(Dist::Series(s, 1.5).n_eff(), Some(1.5));
    /// ```
    pub fn n_eff(&self) -> Option<f64> {
        match self {
            Dist::Empirical(s) => Some(s.total_weight()),
            Dist::Series(_, n_eff) => Some(*n_eff),
            Dist::Model(_) | Dist::Censored(_) => None,
        }
    }

    /// The mean (of a model, the mean of the distribution). `None` when undefined (an
    /// infinite value, an overflow, a censored estimate).
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::Dist};
    /// let d = Dist::Empirical(Sample::from_values(vec![1.0, 2.0, 6.0]).unwrap());
    /// assert_eq!((d.mean(), d.sd()), (Some(3.0), Some(7f64.sqrt())));
    /// ```
    pub fn mean(&self) -> Option<f64> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => {
                Moments::of(s.values(), s.weights()).map(|m| m.mean)
            }
            Dist::Model(m) => m.mean(),
            Dist::Censored(_) => None,
        }
    }

    /// The standard deviation; for an empirical distribution the sample one (divisor
    /// n - 1, or W - 1 with weights), for a model that of the distribution. `None` when
    /// undefined (one observation, an infinite value, an overflow, a censored estimate).
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::Dist};
    /// let one = Dist::Empirical(Sample::from_values(vec![4.0]).unwrap());
    /// assert_eq!(one.sd(), None);
    /// ```
    pub fn sd(&self) -> Option<f64> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => {
                Moments::of(s.values(), s.weights())?.sample_sd()
            }
            Dist::Model(m) => m.sd(),
            Dist::Censored(_) => None,
        }
    }

    /// The numeric summary of a sample (mean, sd, quartiles, ...). `None` when undefined,
    /// and for a model, which is not a sample (its moments and quantiles are
    /// [`Dist::mean`], [`Dist::sd`] and [`Dist::quantile`]).
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::sample::Sample, value::Dist};
    /// let d = Dist::Empirical(Sample::from_values(vec![1.0, 2.0, 9.0]).unwrap());
    /// assert_eq!(d.profile().unwrap().median, 2.0);
    /// ```
    pub fn profile(&self) -> Option<Profile> {
        match self {
            Dist::Empirical(s) | Dist::Series(s, _) => s.profile(),
            Dist::Model(_) | Dist::Censored(_) => None,
        }
    }
}

/// How many observations a distribution stands for (see [`Dist::size`]).
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Size {
    /// The count of an unweighted sample.
    Count(u64),
    /// The total frequency weight of a weighted sample.
    Weight(f64),
}

/// A density, ready to evaluate at many points (see [`Dist::density`]).
#[derive(Debug, Clone, Copy)]
pub enum Density<'a> {
    /// A kernel density estimate of an empirical distribution.
    Kernel(Kde<'a>),
    /// The density of a model.
    Model(&'a Model),
}

impl Density<'_> {
    /// The kernel's bandwidth `h` for an estimate; `None` for a model's own density.
    ///
    /// # Example
    /// ```
    /// use ogive::{stats::kde::Bandwidth, stats::sample::Sample, value::Dist};
    /// let d = Dist::Empirical(Sample::from_values(vec![0.0, 2.0]).unwrap());
    /// assert_eq!(d.density(Bandwidth::Fixed(0.5)).unwrap().bandwidth(), Some(0.5));
    /// ```
    pub fn bandwidth(&self) -> Option<f64> {
        match self {
            Density::Kernel(k) => Some(k.bandwidth()),
            Density::Model(_) => None,
        }
    }

    /// The density at `t`: finite, or `+inf` at the pole of a gamma or Weibull model with
    /// shape below 1. NaN only for NaN `t`.
    pub fn at(&self, t: f64) -> f64 {
        match self {
            Density::Kernel(k) => k.density(t),
            Density::Model(m) => m.pdf(t),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_version_1_blob_still_decodes_bit_identically() {
        // The original layout written by hand (docs/empirical-blob.md, version 1): the
        // unweighted values 1.5 and 4, n = 2, total 2, checksum over the other words.
        let mut b = vec![0x89, b'O', b'G', b'V', 1, 1, 0, 0];
        b.extend_from_slice(&2u64.to_le_bytes());
        b.extend_from_slice(&2.0f64.to_le_bytes());
        b.extend_from_slice(&[0; 8]);
        b.extend_from_slice(&1.5f64.to_le_bytes());
        b.extend_from_slice(&4.0f64.to_le_bytes());
        let sum = empirical::checksum(&b);
        b[24..32].copy_from_slice(&sum.to_le_bytes());
        let Dist::Empirical(s) = Dist::from_blob(&b, 1).unwrap() else {
            panic!("a version-1 BLOB must read as an empirical distribution");
        };
        assert_eq!(s.values(), &[1.5, 4.0]);
        assert_eq!(empirical::encode(&s), b);
        // A series BLOB (version 3) reads as a series value with its n_eff.
        let v3 = empirical::encode_series(&s, 1.25);
        assert_eq!(Dist::from_blob(&v3, 1), Ok(Dist::Series(s.clone(), 1.25)));
        // A censored BLOB reads as a censored estimate; a damaged one names its kind.
        let e = crate::stats::censored::Censored::from_readings(&[(
            1.0,
            crate::stats::censored::Code::Exact,
        )])
        .unwrap();
        let c = censored::encode(&e);
        assert_eq!(Dist::from_blob(&c, 1).unwrap(), Dist::Censored(e));
        let e = Dist::from_blob(&c[..50], 2).unwrap_err();
        assert!(
            e.to_string()
                .starts_with("argument 2 is not a valid censored estimate (truncated or corrupted")
        );
    }

    #[test]
    fn values_are_checked() {
        let e = Dist::from_text(b"{\"family\": \"normal\"}", 1).unwrap_err();
        assert_eq!(
            e.to_string(),
            "argument 1 is not a valid model: model lacks the field \"mean\" (required: mean, sd)"
        );
        let e = Dist::from_blob(b"\x00\xff", 2).unwrap_err();
        assert_eq!(
            e.to_string(),
            "argument 2 is not an empirical distribution (bad header); build one with dist_empirical(x)"
        );
        assert!(matches!(
            Dist::from_text(b"warm", 1),
            Err(ValueError::NotADistribution { arg: 1, .. })
        ));
    }
}
