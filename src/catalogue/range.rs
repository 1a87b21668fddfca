//! The documented range of every function's answers, as data beside its registry row
//! ([`super::FunctionDef::range`]), and the one check of an answer against it.
//!
//! The help texts say it in words ("a share in [0, 1]", "model JSON"); a [`Range`] says it
//! so that a machine can check it. The argument fuzzer (`fuzz/fuzz_targets/arg_calls.rs`)
//! and its replay in the ordinary test suite (`tests/arg_fuzz.rs`) check every answer that
//! is not an error with [`Range::check`] (table functions row by row with
//! [`Range::check_row`]). NULL is in every range: each function documents when it answers
//! NULL, and the check does not second-guess that.

use super::value::Out;
use crate::value::Dist;
use crate::value::model::Model;

/// What a function's non-NULL answer may be.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Range {
    /// A real (or integer), never NaN; finite whenever every input value is finite (an
    /// infinite reading may give an infinite quantile or mean).
    Real,
    /// A quantile of a distribution value: a real, never NaN, and -Inf or Inf allowed even
    /// from finite inputs, since p = 0 and 1 give the ends of a model's support, unbounded
    /// for most families (`dist_quantile`).
    Quantile,
    /// A real in [0, 1]: a probability, a share, a cdf value, a p-value.
    Probability,
    /// A real (or integer) >= 0: a density, a standard deviation, a count or total weight;
    /// finite whenever every input value is finite.
    NonNegative,
    /// A density: a real >= 0, never NaN, and +Inf allowed even from finite inputs, at the
    /// pole 0 of a gamma or Weibull model with shape below 1 (`dist_pdf`, `dist_curve`).
    Density,
    /// An INTEGER >= 1: a component number.
    Ordinal,
    /// A BLOB that reads back as a distribution value (`Dist::from_blob`: empirical,
    /// series or censored).
    Distribution,
    /// A BLOB that reads back as a quantile sketch (`value::sketch::decode`).
    Sketch,
    /// TEXT that reads back as a model (`Model::parse`).
    Model,
    /// TEXT: a JSON array whose elements are null or numbers in the given range.
    JsonArray(&'static Range),
    /// TEXT: a JSON object whose fields are as [`Fields`] says.
    JsonObject(&'static Fields),
    /// Rows of a table function: one range per output column, in column order.
    Rows(&'static [Range]),
}

/// The numeric fields of a JSON object answer. Each field, where present (a field may be
/// left out where it does not apply, as `p` for the Wasserstein distance), is null or a
/// number in its range; the `ascending` ones, where present and not null, are in
/// ascending order (a minimum at most a median, a band's lower end at most its upper).
#[derive(Debug, PartialEq)]
pub struct Fields {
    /// The fields and their ranges.
    pub each: &'static [(&'static str, Range)],
    /// Fields whose values must not decrease in this order.
    pub ascending: &'static [&'static str],
}

/// The fields of `profile` and `dist_profile`.
pub const PROFILE: Fields = Fields {
    each: &[
        ("n", Range::NonNegative),
        ("mean", Range::Real),
        ("sd", Range::NonNegative),
        ("min", Range::Real),
        ("q1", Range::Real),
        ("median", Range::Real),
        ("q3", Range::Real),
        ("max", Range::Real),
        ("skewness", Range::Real),
        ("excess_kurtosis", Range::Real),
    ],
    ascending: &["min", "q1", "median", "q3", "max"],
};

/// The fields of the Kolmogorov-Smirnov results (`ks_test`, `dist_ks`).
pub const TEST: Fields = Fields {
    each: &[
        ("d", Range::Probability),
        ("p", Range::Probability),
        ("n1", Range::NonNegative),
        ("n2", Range::NonNegative),
        ("n_eff1", Range::NonNegative),
        ("n_eff2", Range::NonNegative),
    ],
    ascending: &[],
};

/// The fields of `dist_distance`. Its statistic is a real, not a non-negative one: for
/// 'ad' it is the standardised (A2akN - 1) / sigma of Scholz and Stephens, negative for
/// samples more alike than chance; the raw a2akn is >= 0.
pub const DISTANCE: Fields = Fields {
    each: &[
        ("statistic", Range::Real),
        ("a2akn", Range::NonNegative),
        ("p", Range::Probability),
        ("n1", Range::NonNegative),
        ("n2", Range::NonNegative),
        ("n_eff1", Range::NonNegative),
        ("n_eff2", Range::NonNegative),
    ],
    ascending: &[],
};

/// The fields of `dist_band`.
pub const BAND: Fields = Fields {
    each: &[("lower", Range::Probability), ("upper", Range::Probability)],
    ascending: &["lower", "upper"],
};

impl Range {
    /// Checks one answer. `finite_inputs` says that every input value of the call was
    /// finite (then a [`Range::Real`] or [`Range::NonNegative`] answer must be finite too).
    ///
    /// # Errors
    /// What is out of range, in words.
    ///
    /// # Example
    /// ```
    /// use ogive::catalogue::{range::Range, value::Out};
    /// assert!(Range::Probability.check(&Out::Real(0.25), true).is_ok());
    /// assert!(Range::Probability.check(&Out::Real(1.5), true).is_err());
    /// assert!(Range::Real.check(&Out::Real(f64::INFINITY), true).is_err());
    /// assert!(Range::Real.check(&Out::Real(f64::INFINITY), false).is_ok());
    /// assert!(Range::JsonArray(&Range::Real).check(&Out::Text("[1, null]".into()), true).is_ok());
    /// let band = Range::JsonObject(&ogive::catalogue::range::BAND);
    /// assert!(band.check(&Out::Text(r#"{"lower": 0.2, "upper": 0.4}"#.into()), true).is_ok());
    /// assert!(band.check(&Out::Text(r#"{"lower": 0.6, "upper": 0.4}"#.into()), true).is_err());
    /// ```
    pub fn check(&self, out: &Out, finite_inputs: bool) -> Result<(), String> {
        let number = match out {
            Out::Null => return Ok(()),
            Out::Integer(i) => Some(*i as f64),
            Out::Real(r) => Some(*r),
            _ => None,
        };
        match (self, number) {
            (Range::Real, Some(x)) => real(x, finite_inputs),
            (Range::Quantile, Some(x)) => real(x, false),
            (Range::Probability, Some(x)) if (0.0..=1.0).contains(&x) => Ok(()),
            (Range::Probability, Some(x)) => Err(format!("{x:e} is not in [0, 1]")),
            (Range::NonNegative, Some(x)) if x >= 0.0 => real(x, finite_inputs),
            (Range::NonNegative, Some(x)) => Err(format!("{x:e} is not >= 0")),
            (Range::Density, Some(x)) if x >= 0.0 => Ok(()),
            (Range::Density, Some(x)) => Err(format!("{x:e} is not >= 0")),
            (Range::Ordinal, _) => match out {
                Out::Integer(i) if *i >= 1 => Ok(()),
                other => Err(format!("{other:?} is not an INTEGER >= 1")),
            },
            (Range::Distribution, _) => match out {
                Out::Blob(b) => Dist::from_blob(b, 1).map(|_| ()).map_err(|e| e.to_string()),
                other => Err(format!("{other:?} is not a BLOB")),
            },
            (Range::Sketch, _) => match out {
                Out::Blob(b) => crate::value::sketch::decode(b)
                    .map(|_| ())
                    .map_err(|e| e.to_string()),
                other => Err(format!("{other:?} is not a BLOB")),
            },
            (Range::Model, _) => match out {
                Out::Text(t) => Model::parse(t).map(|_| ()).map_err(|e| e.to_string()),
                other => Err(format!("{other:?} is not TEXT")),
            },
            (Range::JsonArray(each), _) => match json(out)? {
                serde_json::Value::Array(items) => items
                    .iter()
                    .try_for_each(|v| each.check_json(v, finite_inputs)),
                other => Err(format!("{other} is not a JSON array")),
            },
            (Range::JsonObject(fields), _) => match json(out)? {
                serde_json::Value::Object(map) => {
                    fields.each.iter().try_for_each(|(key, r)| {
                        map.get(*key).map_or(Ok(()), |v| {
                            r.check_json(v, finite_inputs)
                                .map_err(|e| format!("field {key:?}: {e}"))
                        })
                    })?;
                    let ordered: Vec<(&str, f64)> = fields
                        .ascending
                        .iter()
                        .filter_map(|k| map.get(*k).and_then(|v| v.as_f64()).map(|x| (*k, x)))
                        .collect();
                    match ordered.windows(2).find(|w| w[1].1 < w[0].1) {
                        Some(w) => Err(format!(
                            "{} = {:e} is above {} = {:e}",
                            w[0].0, w[0].1, w[1].0, w[1].1
                        )),
                        None => Ok(()),
                    }
                }
                other => Err(format!("{other} is not a JSON object")),
            },
            (Range::Rows(_), _) => Err("a table function's rows are checked by check_row".into()),
            (_, None) => Err(format!("{out:?} is not a number")),
        }
    }

    /// Checks one row of a table function against [`Range::Rows`].
    ///
    /// # Errors
    /// A row of the wrong width, or the first column out of its range.
    ///
    /// # Example
    /// ```
    /// use ogive::catalogue::{range::Range, value::Out};
    /// let steps = Range::Rows(&[Range::Real, Range::Probability]);
    /// assert!(steps.check_row(&[Out::Real(3.0), Out::Real(0.5)], true).is_ok());
    /// assert!(steps.check_row(&[Out::Real(3.0), Out::Real(-0.5)], true).is_err());
    /// ```
    pub fn check_row(&self, row: &[Out], finite_inputs: bool) -> Result<(), String> {
        let Range::Rows(columns) = self else {
            return Err("only a table function's range has rows".into());
        };
        if row.len() != columns.len() {
            return Err(format!("{} columns, not {}", row.len(), columns.len()));
        }
        for (i, (r, v)) in columns.iter().zip(row).enumerate() {
            r.check(v, finite_inputs)
                .map_err(|e| format!("column {}: {e}", i + 1))?;
        }
        Ok(())
    }

    fn check_json(&self, v: &serde_json::Value, finite_inputs: bool) -> Result<(), String> {
        match v {
            serde_json::Value::Null => Ok(()),
            serde_json::Value::Number(n) => match n.as_f64() {
                Some(x) => self.check(&Out::Real(x), finite_inputs),
                None => Err(format!("{n} is not a double")),
            },
            other => Err(format!("{other} is not a number")),
        }
    }
}

fn real(x: f64, finite_inputs: bool) -> Result<(), String> {
    if x.is_nan() {
        Err("NaN".into())
    } else if finite_inputs && !x.is_finite() {
        Err(format!("{x} from finite inputs"))
    } else {
        Ok(())
    }
}

fn json(out: &Out) -> Result<serde_json::Value, String> {
    match out {
        Out::Text(t) => serde_json::from_str(t).map_err(|e| format!("not JSON ({e}): {t}")),
        other => Err(format!("{other:?} is not TEXT")),
    }
}
