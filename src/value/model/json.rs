//! The model JSON: reading and validating it (every field named in errors), and writing it.
//! The type and its evaluation are in the parent module.

use serde_json::{Map, Value, json};

use super::{EM_FIELDS, FIT_FIELDS, Law, MIXTURE_FAMILY, Model, ModelError};
use crate::stats::fit::{Family, FitError, Parametric};
use crate::stats::mixture::{Candidate, Component, MAX_COMPONENTS, Mixture, MixtureError};
use crate::stats::readings::CensorCounts;

/// A JSON object being read: the fields taken so far, so that any left over can be
/// reported as unknown.
struct Reader<'a> {
    what: &'static str,
    scope: String,
    object: &'a Map<String, Value>,
    needs: String,
    taken: Vec<&'a str>,
}

impl<'a> Reader<'a> {
    fn new(
        what: &'static str,
        scope: String,
        object: &'a Map<String, Value>,
        needs: &[&str],
    ) -> Self {
        Reader {
            what,
            scope,
            object,
            needs: needs.join(", "),
            taken: vec!["family"],
        }
    }

    fn bad(&self, field: &str, detail: impl Into<String>) -> ModelError {
        ModelError::BadField {
            what: self.what,
            field: field.to_string(),
            detail: detail.into(),
        }
    }

    /// The value of a field, if present and not null.
    fn optional(&mut self, field: &'a str) -> Option<&'a Value> {
        self.taken.push(field);
        self.object.get(field).filter(|v| !v.is_null())
    }

    fn required(&mut self, field: &'a str) -> Result<&'a Value, ModelError> {
        self.optional(field)
            .ok_or_else(|| ModelError::MissingField {
                what: self.what,
                field: field.to_string(),
                needs: self.needs.clone(),
            })
    }

    fn number(&self, field: &str, v: &Value) -> Result<f64, ModelError> {
        v.as_f64()
            .filter(|x| x.is_finite())
            .ok_or_else(|| self.bad(field, format!("must be a number, got {v}")))
    }

    fn optional_number(&mut self, field: &'a str) -> Result<Option<f64>, ModelError> {
        self.optional(field)
            .map(|v| self.number(field, v))
            .transpose()
    }

    fn optional_count(&mut self, field: &'a str) -> Result<Option<u64>, ModelError> {
        self.optional(field)
            .map(|v| {
                v.as_u64()
                    .ok_or_else(|| self.bad(field, format!("must be a whole number >= 0, got {v}")))
            })
            .transpose()
    }

    /// Fails on the first field not taken.
    fn finish(&self, allowed: &[&str]) -> Result<(), ModelError> {
        match self
            .object
            .keys()
            .find(|k| !self.taken.contains(&k.as_str()))
        {
            Some(field) => Err(ModelError::UnknownField {
                what: self.what,
                field: field.clone(),
                scope: self.scope.clone(),
                allowed: allowed.join(", "),
            }),
            None => Ok(()),
        }
    }
}

/// Parses JSON text into an object.
fn object<'a>(
    what: &'static str,
    text: &str,
    value: &'a mut Value,
) -> Result<&'a Map<String, Value>, ModelError> {
    *value = serde_json::from_str(text).map_err(|e| ModelError::NotJson {
        what,
        detail: e.to_string(),
    })?;
    match value {
        Value::Object(map) => Ok(map),
        other => Err(ModelError::NotObject {
            what,
            got: shorten(&other.to_string()),
        }),
    }
}

fn shorten(s: &str) -> String {
    crate::stats::echo(s)
}

/// What a family is: the mixture or one of the parametric families.
enum Kind {
    Parametric(Family),
    Mixture,
}

fn kind(name: &str) -> Result<Kind, ModelError> {
    if name.trim().eq_ignore_ascii_case(MIXTURE_FAMILY) {
        return Ok(Kind::Mixture);
    }
    Family::from_name(name)
        .map(Kind::Parametric)
        .map_err(|_| ModelError::UnknownFamily(name.to_string()))
}

/// Reads a parametric family's parameters.
fn read_parametric(r: &mut Reader<'_>, family: Family) -> Result<Parametric, ModelError> {
    let mut values = Vec::with_capacity(2);
    for &name in family.parameter_names() {
        let v = r.required(name)?;
        values.push(r.number(name, v)?);
    }
    Parametric::new(family, &values).map_err(|e| match e {
        FitError::BadParameter {
            name, value, rule, ..
        } => r.bad(name, format!("must be {rule}, got {value}")),
        other => r.bad(family.parameter_names()[0], other.to_string()),
    })
}

/// Reads a mixture's `components`.
fn read_components(r: &mut Reader<'_>) -> Result<Mixture, ModelError> {
    let v = r.required("components")?;
    let items = v
        .as_array()
        .filter(|a| !a.is_empty() && a.len() <= MAX_COMPONENTS)
        .ok_or_else(|| {
            r.bad(
                "components",
                format!(
                    "must be an array of 1 to {MAX_COMPONENTS} objects {{\"weight\", \"mean\", \"sd\"}}"
                ),
            )
        })?;
    let mut components = Vec::with_capacity(items.len());
    for (i, item) in items.iter().enumerate() {
        let path = |field: &str| format!("components[{i}].{field}");
        let obj = item.as_object().ok_or_else(|| {
            r.bad(
                &format!("components[{i}]"),
                format!("must be an object, got {item}"),
            )
        })?;
        let field = |name: &str| -> Result<f64, ModelError> {
            let v =
                obj.get(name)
                    .filter(|v| !v.is_null())
                    .ok_or_else(|| ModelError::MissingField {
                        what: r.what,
                        field: path(name),
                        needs: "weight, mean, sd in every component".to_string(),
                    })?;
            r.number(&path(name), v)
        };
        let c = Component {
            weight: field("weight")?,
            mean: field("mean")?,
            sd: field("sd")?,
        };
        only(r, obj, &["weight", "mean", "sd"], "a component", path)?;
        components.push(c);
    }
    Mixture::new(components).map_err(|e| match e {
        MixtureError::BadComponent {
            index,
            field,
            value,
            rule,
        } => r.bad(
            &format!("components[{index}].{field}"),
            format!("must be {rule}, got {value}"),
        ),
        MixtureError::WeightSum(total) => r.bad(
            "components",
            format!("must have weights that sum to 1, got {total}"),
        ),
        other => r.bad("components", other.to_string()),
    })
}

/// Rejects a field of a nested object (a component, a candidate) outside `allowed`;
/// `path` names a field in messages.
fn only(
    r: &Reader<'_>,
    obj: &Map<String, Value>,
    allowed: &[&str],
    scope: &str,
    path: impl Fn(&str) -> String,
) -> Result<(), ModelError> {
    match obj.keys().find(|k| !allowed.contains(&k.as_str())) {
        Some(extra) => Err(ModelError::UnknownField {
            what: r.what,
            field: path(extra),
            scope: scope.to_string(),
            allowed: allowed.join(", "),
        }),
        None => Ok(()),
    }
}

/// Reads `k_candidates`: an array of `{"k", "loglik", "bic"}`.
fn read_candidates(r: &Reader<'_>, v: &Value) -> Result<Vec<Candidate>, ModelError> {
    let items = v.as_array().ok_or_else(|| {
        r.bad(
            "k_candidates",
            format!("must be an array, got {}", shorten(&v.to_string())),
        )
    })?;
    items
        .iter()
        .enumerate()
        .map(|(i, item)| {
            let path = |f: &str| format!("k_candidates[{i}].{f}");
            let obj = item.as_object().ok_or_else(|| {
                r.bad(
                    &format!("k_candidates[{i}]"),
                    format!("must be an object, got {item}"),
                )
            })?;
            only(r, obj, &["k", "loglik", "bic"], "a k_candidates item", path)?;
            let k = obj
                .get("k")
                .and_then(Value::as_u64)
                .filter(|k| (1..=MAX_COMPONENTS as u64).contains(k))
                .ok_or_else(|| {
                    r.bad(
                        &path("k"),
                        format!("must be a whole number from 1 to {MAX_COMPONENTS}"),
                    )
                })?;
            let opt = |f: &str| -> Result<Option<f64>, ModelError> {
                match obj.get(f) {
                    None | Some(Value::Null) => Ok(None),
                    Some(v) => r.number(&path(f), v).map(Some),
                }
            };
            Ok(Candidate {
                k: k as usize,
                loglik: opt("loglik")?,
                bic: opt("bic")?,
            })
        })
        .collect()
}

impl Model {
    /// Parses and validates model JSON (as `dist_fit`, `dist_mixture` and `dist_model`
    /// write it).
    ///
    /// # Errors
    /// [`ModelError`] naming what is wrong: not JSON, not an object, no or unknown
    /// `family` (listing the supported ones), a missing parameter, an unknown field, or
    /// a value outside its domain (`sd` must be > 0, the mixture weights must sum to 1,
    /// and so on).
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::parse(r#"{"family": "normal", "mean": 0, "sd": 1}"#)?;
    /// assert_eq!(m.cdf(0.0), 0.5);
    /// let e = Model::parse(r#"{"family": "normal", "mean": 0}"#).unwrap_err();
    /// assert_eq!(e.to_string(), "model lacks the field \"sd\" (required: mean, sd)");
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn parse(text: &str) -> Result<Model, ModelError> {
        const WHAT: &str = "model";
        let mut value = Value::Null;
        let obj = object(WHAT, text, &mut value)?;
        let family = match obj.get("family") {
            Some(Value::String(s)) => s.as_str(),
            Some(other) => {
                return Err(ModelError::BadField {
                    what: WHAT,
                    field: "family".to_string(),
                    detail: format!(
                        "must be a family name such as \"normal\", got {}",
                        shorten(&other.to_string())
                    ),
                });
            }
            None => {
                return Err(ModelError::MissingField {
                    what: WHAT,
                    field: "family".to_string(),
                    needs: "family and the family's parameters".to_string(),
                });
            }
        };
        match kind(family)? {
            Kind::Parametric(f) => {
                let mut r = Reader::new(WHAT, format!("a {f} model"), obj, f.parameter_names());
                let law = read_parametric(&mut r, f)?;
                let mut m = Model::of(Law::Parametric(law));
                m.read_fit_fields(&mut r)?;
                let mut allowed = vec!["family"];
                allowed.extend(f.parameter_names());
                allowed.extend(FIT_FIELDS);
                r.finish(&allowed)?;
                Ok(m)
            }
            Kind::Mixture => {
                let mut r = Reader::new(
                    WHAT,
                    format!("a {MIXTURE_FAMILY} model"),
                    obj,
                    &["components"],
                );
                let mixture = read_components(&mut r)?;
                let k = r.optional_count("k")?;
                let len = mixture.components().len();
                if let Some(k) = k
                    && k != len as u64
                {
                    return Err(r.bad(
                        "k",
                        format!("must equal the number of components, {len}, got {k}"),
                    ));
                }
                let mut m = Model::of(Law::Mixture(mixture));
                m.read_fit_fields(&mut r)?;
                m.iterations = r.optional_count("iterations")?;
                m.converged = match r.optional("converged") {
                    None => None,
                    Some(Value::Bool(b)) => Some(*b),
                    Some(other) => {
                        return Err(
                            r.bad("converged", format!("must be true or false, got {other}"))
                        );
                    }
                };
                m.k_candidates = match r.optional("k_candidates") {
                    None => None,
                    Some(v) => Some(read_candidates(&r, v)?),
                };
                let mut allowed = vec!["family", "components"];
                allowed.extend(FIT_FIELDS);
                allowed.extend(EM_FIELDS);
                r.finish(&allowed)?;
                Ok(m)
            }
        }
    }

    fn read_fit_fields<'a>(&mut self, r: &mut Reader<'a>) -> Result<(), ModelError> {
        self.fit.n = r.optional_count("n")?;
        self.fit.loglik = r.optional_number("loglik")?;
        self.fit.aic = r.optional_number("aic")?;
        self.fit.bic = r.optional_number("bic")?;
        self.fit.resolution = r.optional_number("resolution")?;
        if let Some(step) = self.fit.resolution
            && !(step > 0.0 && step.is_finite())
        {
            return Err(r.bad("resolution", format!("must be a number > 0, got {step}")));
        }
        let counts = [
            r.optional_count("n_exact")?,
            r.optional_count("n_left")?,
            r.optional_count("n_right")?,
        ];
        self.fit.censored = match counts {
            [None, None, None] => None,
            [Some(exact), Some(left), Some(right)] => Some(CensorCounts { exact, left, right }),
            _ => {
                return Err(r.bad(
                    "n_exact",
                    "n_exact, n_left and n_right come together (the counts of a censored fit)"
                        .to_string(),
                ));
            }
        };
        Ok(())
    }

    /// A model from a family name and a JSON object of its parameters only, such as
    /// `{"shape": 2, "scale": 3}` for `gamma` or `{"components": [...]}` for
    /// `normal_mixture`.
    ///
    /// # Errors
    /// As [`Model::parse`], with `params` in the messages; fields other than the
    /// parameters (fit statistics included) are unknown here.
    ///
    /// # Example
    /// ```
    /// use ogive::value::model::Model;
    /// let m = Model::from_parameters("weibull", r#"{"shape": 1, "scale": 2}"#)?;
    /// assert_eq!(m.to_json(), r#"{"family":"weibull","shape":1.0,"scale":2.0}"#);
    /// # Ok::<(), ogive::value::model::ModelError>(())
    /// ```
    pub fn from_parameters(family: &str, params: &str) -> Result<Model, ModelError> {
        const WHAT: &str = "params";
        let kind = kind(family)?;
        let mut value = Value::Null;
        let obj = object(WHAT, params, &mut value)?;
        let law = match kind {
            Kind::Parametric(f) => {
                let mut r = Reader::new(WHAT, format!("{f} params"), obj, f.parameter_names());
                r.taken.clear();
                let law = read_parametric(&mut r, f)?;
                r.finish(f.parameter_names())?;
                Law::Parametric(law)
            }
            Kind::Mixture => {
                let mut r = Reader::new(
                    WHAT,
                    format!("{MIXTURE_FAMILY} params"),
                    obj,
                    &["components"],
                );
                r.taken.clear();
                let law = read_components(&mut r)?;
                r.finish(&["components"])?;
                Law::Mixture(law)
            }
        };
        Ok(Model::of(law))
    }

    /// The model as JSON text: `family`, the parameters (or `k` and `components`), then
    /// whichever fit statistics it has. Non-finite numbers never occur.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::fit::{Family, fit};
    /// use ogive::value::model::Model;
    /// let m = Model::from(fit(&[1.0, 3.0], Family::Uniform)?);
    /// assert!(m.to_json().starts_with(r#"{"family":"uniform","min":1.0,"max":3.0,"n":2,"#));
    /// # Ok::<(), ogive::stats::fit::FitError>(())
    /// ```
    pub fn to_json(&self) -> String {
        let mut out = Map::new();
        out.insert("family".into(), json!(self.family_name()));
        match &self.law {
            Law::Parametric(p) => {
                for (name, v) in p.parameters() {
                    out.insert(name.into(), json!(v));
                }
            }
            Law::Mixture(m) => {
                out.insert("k".into(), json!(m.components().len()));
                let comps: Vec<Value> = m
                    .components()
                    .iter()
                    .map(|c| json!({"weight": c.weight, "mean": c.mean, "sd": c.sd}))
                    .collect();
                out.insert("components".into(), Value::Array(comps));
            }
        }
        if let Some(n) = self.fit.n {
            out.insert("n".into(), json!(n));
        }
        for (name, v) in [
            ("loglik", self.fit.loglik),
            ("aic", self.fit.aic),
            ("bic", self.fit.bic),
            ("resolution", self.fit.resolution),
        ] {
            if let Some(v) = v {
                out.insert(name.into(), json!(v));
            }
        }
        if let Some(c) = self.fit.censored {
            out.insert("n_exact".into(), json!(c.exact));
            out.insert("n_left".into(), json!(c.left));
            out.insert("n_right".into(), json!(c.right));
        }
        if let Some(i) = self.iterations {
            out.insert("iterations".into(), json!(i));
        }
        if let Some(c) = self.converged {
            out.insert("converged".into(), json!(c));
        }
        if let Some(cands) = &self.k_candidates {
            let items: Vec<Value> = cands
                .iter()
                .map(|c| json!({"k": c.k, "loglik": c.loglik, "bic": c.bic}))
                .collect();
            out.insert("k_candidates".into(), Value::Array(items));
        }
        Value::Object(out).to_string()
    }
}
