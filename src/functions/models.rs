//! Model adapters: `dist_fit`, `dist_mixture`, `dist_model`, `dist_component` and the
//! table-valued `dist_components`.
//!
//! Adapters only: they read and check arguments and hand them to
//! [`crate::stats::fit`], [`crate::stats::mixture`] and [`crate::value::model`]. NULL x
//! is skipped; a group with no non-NULL x gives NULL. Models travel as JSON text.

use std::ffi::CStr;

use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::{Value, ValueRef};
use rusqlite::vtab::Module;

use super::args::{ArgError, Constant, fail, number, text, whole};
use super::dist::dist_arg;
use super::table::{Table, TableFunction};
use super::{FunctionDef, Kind, aggregate, flags};
use crate::stats::fit::{Family, fit};
use crate::stats::mixture::{MAX_COMPONENTS, MixtureError, fit_mixture};
use crate::value::Dist;
use crate::value::model::Model;

type Result<T> = rusqlite::Result<T>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "dist_fit",
        kind: Kind::Aggregate,
        arities: &[2],
        signature: "dist_fit(x, family)",
        summary: "model JSON: maximum-likelihood fit of normal, lognormal, exponential, gamma, \
                  weibull or uniform, with loglik, aic, bic",
        help: "Fits family to the group's x by maximum likelihood and returns model JSON \
               {family, <parameters>, n, loglik, aic, bic}. Parameters: normal mean, sd (divisor \
               n); lognormal mu, sigma (mean and sd of ln x); exponential rate; gamma and weibull \
               shape, scale; uniform min, max. Locations are fixed at 0. aic = 2p - 2 loglik, bic \
               = p ln n - 2 loglik. Read fields with ->> and pass the model to the dist_ functions. \
               family must be the same on every row of a group. NULL x is skipped; NULL family or \
               no rows gives NULL. Errors: an unknown family (the message lists the supported \
               ones); a value <= 0 for lognormal, exponential, gamma or weibull; an infinite \
               value; fewer values than parameters; all values equal (except for exponential).",
        example: "SELECT dist_fit(column1, 'exponential') ->> '$.rate' FROM (VALUES (1), (2), (3), (2))",
        example_result: "0.5",
        register: |c, d| aggregate(c, d, || DistFit),
    },
    FunctionDef {
        name: "dist_mixture",
        kind: Kind::Aggregate,
        arities: &[1, 2],
        signature: "dist_mixture(x [, k])",
        summary: "model JSON: Gaussian mixture by EM with k components, or k from 1..6 by BIC",
        help: "Fits a mixture of k normal components to the group's x by EM and returns model \
               JSON {family: 'normal_mixture', k, components: [{weight, mean, sd}] sorted by \
               mean, n, loglik, aic, bic, iterations, converged, k_candidates: [{k, loglik, \
               bic}]}. Without k, every k from 1 to 6 (at most the number of distinct values, \
               and with n >= 3k - 1) is fitted and the least BIC wins; k_candidates lists them \
               all. Ten seeded starts per k: the same data always gives the same fit. Component \
               variances are floored at 1e-6 times the data's variance. On values rounded to a \
               coarse grid (0.1 degC readings, whole milliseconds) the likelihood of a continuous \
               density rewards narrow components sitting on single grid values, so BIC can pick \
               a k with such spikes: give k explicitly there. k must be the same on \
               every row of a group; NULL x is skipped; NULL k or no rows gives NULL. Errors: k \
               outside 1..16; fewer than 3k - 1 values; fewer than k distinct values; all values \
               equal; an infinite value.",
        example: "SELECT dist_mixture(column1) ->> '$.k' FROM (VALUES (1.0), (1.2), (0.8), (1.1), \
                  (0.9), (9.0), (9.2), (8.8), (9.1), (8.9))",
        example_result: "2",
        register: |c, d| aggregate(c, d, || DistMixture),
    },
    FunctionDef {
        name: "dist_model",
        kind: Kind::Scalar,
        arities: &[2],
        signature: "dist_model(family, params)",
        summary: "model JSON from a family and a JSON object of its parameters",
        help: "Builds a model from known parameters: family is one of normal, lognormal, \
               exponential, gamma, weibull, uniform, normal_mixture, and params a JSON object \
               with exactly that family's parameters (as dist_fit names them), or for \
               normal_mixture {\"components\": [{\"weight\", \"mean\", \"sd\"}, ...]} with \
               weights summing to 1. The result has no n, loglik, aic or bic. NULL family or \
               params gives NULL. Errors name the missing, unknown or invalid field; an unknown \
               family lists the supported ones.",
        example: "SELECT dist_model('gamma', '{\"shape\": 2, \"scale\": 3}')",
        example_result: "{\"family\":\"gamma\",\"shape\":2.0,\"scale\":3.0}",
        register: |c, d| c.create_scalar_function(d.name, 2, flags(), |ctx| dist_model(ctx)),
    },
    FunctionDef {
        name: "dist_component",
        kind: Kind::Scalar,
        arities: &[2],
        signature: "dist_component(model, t)",
        summary: "number (from 1) of the mixture component most probable for t: clustering",
        help: "The component j (numbered from 1, in the model's order: by mean for a fitted \
               mixture) with the largest weight_j * density_j(t), the most probable origin of a \
               value t. Join it to the rows a mixture was fitted on to label each row with its \
               regime. A parametric model has one component. NULL model or t, or an infinite t, \
               gives NULL. Errors: model that is not valid model JSON (the message names the \
               field).",
        example: "SELECT dist_component(dist_model('normal_mixture', '{\"components\": \
                  [{\"weight\": 0.5, \"mean\": 0, \"sd\": 1}, {\"weight\": 0.5, \"mean\": 10, \
                  \"sd\": 1}]}'), 8)",
        example_result: "2",
        register: |c, d| c.create_scalar_function(d.name, 2, flags(), |ctx| dist_component(ctx)),
    },
    FunctionDef {
        name: "dist_components",
        kind: Kind::Table,
        arities: &[1],
        signature: "dist_components(model)",
        summary: "table (component, weight, mean, sd) of a model's mixture components",
        help: "One row per component of a mixture model: component (numbered from 1, as \
               dist_component numbers them), weight, mean, sd. A parametric model gives one row \
               of weight 1 with the distribution's mean and sd (NULL if they overflow). NULL \
               model gives no rows. Errors: no model argument; model that is not valid model \
               JSON.",
        example: "SELECT sum(weight * mean) FROM dist_components(dist_model('normal_mixture', \
                  '{\"components\": [{\"weight\": 0.25, \"mean\": 0, \"sd\": 1}, {\"weight\": \
                  0.75, \"mean\": 5, \"sd\": 2}]}'))",
        example_result: "3.75",
        register: |c, _| {
            const M: Module<Table<Components>> = Module::eponymous_only_module();
            c.create_module(Components::NAME, &M, None)
        },
    },
];

/// Reads a model argument: NULL gives `None`; TEXT is parsed and validated.
fn read_model(v: ValueRef<'_>) -> std::result::Result<Option<Model>, ArgError> {
    match text(v, "model")? {
        None => Ok(None),
        Some(t) => Ok(Some(Model::parse(t)?)),
    }
}

// ---------------------------------------------------------------------------------------
// dist_fit(x, family)

/// State of `dist_fit`: the values and the family.
#[derive(Debug, Default)]
pub struct DistFitState {
    xs: Vec<f64>,
    family_text: Constant<String>,
    family: Option<Family>,
}

/// `dist_fit(x, family)`.
pub struct DistFit;

impl Aggregate<DistFitState, Value> for DistFit {
    fn init(&self, _: &mut Context<'_>) -> Result<DistFitState> {
        Ok(DistFitState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut DistFitState) -> Result<()> {
        const NAME: &str = "dist_fit";
        let family = text(ctx.get_raw(1), "family").map_err(|e| fail(NAME, e))?;
        let same = matches!((s.family_text.get(), family), (Some(a), Some(b)) if a == b);
        if !same
            && s.family_text
                .observe(family.map(str::to_owned), "family")
                .map_err(|e| fail(NAME, e))?
            && let Some(name) = family
        {
            s.family = Some(Family::from_name(name).map_err(|e| fail(NAME, e))?);
        }
        if let Some(x) = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))? {
            s.xs.push(x);
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<DistFitState>) -> Result<Value> {
        let Some(s) = s else { return Ok(Value::Null) };
        let Some(family) = s.family else {
            return Ok(Value::Null);
        };
        if s.xs.is_empty() {
            return Ok(Value::Null);
        }
        let f = fit(&s.xs, family).map_err(|e| fail("dist_fit", e))?;
        Ok(Value::Text(Model::from(f).to_json()))
    }
}

// ---------------------------------------------------------------------------------------
// dist_mixture(x [, k])

/// State of `dist_mixture`: the values and k.
#[derive(Debug, Default)]
pub struct DistMixtureState {
    xs: Vec<f64>,
    k: Constant<i64>,
    has_k: bool,
}

/// `dist_mixture(x [, k])`.
pub struct DistMixture;

impl Aggregate<DistMixtureState, Value> for DistMixture {
    fn init(&self, _: &mut Context<'_>) -> Result<DistMixtureState> {
        Ok(DistMixtureState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut DistMixtureState) -> Result<()> {
        const NAME: &str = "dist_mixture";
        if ctx.len() > 1 {
            s.has_k = true;
            let k = whole(ctx.get_raw(1), "k").map_err(|e| fail(NAME, e))?;
            if s.k.observe(k, "k").map_err(|e| fail(NAME, e))?
                && let Some(k) = k
                && !(1..=MAX_COMPONENTS as i64).contains(&k)
            {
                return Err(fail(NAME, MixtureError::BadK(k)));
            }
        }
        if let Some(x) = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))? {
            s.xs.push(x);
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<DistMixtureState>) -> Result<Value> {
        let Some(s) = s else { return Ok(Value::Null) };
        let k = match (s.has_k, s.k.get()) {
            (false, _) => None,
            (true, None) => return Ok(Value::Null),
            // Checked in `step` to lie in 1..=MAX_COMPONENTS.
            (true, Some(&k)) => Some(k as usize),
        };
        if s.xs.is_empty() {
            return Ok(Value::Null);
        }
        let f = fit_mixture(&s.xs, k).map_err(|e| fail("dist_mixture", e))?;
        Ok(Value::Text(Model::from(f).to_json()))
    }
}

// ---------------------------------------------------------------------------------------
// dist_model(family, params), dist_component(model, t)

fn dist_model(ctx: &rusqlite::functions::Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_model";
    let family = text(ctx.get_raw(0), "family").map_err(|e| fail(NAME, e))?;
    let params = text(ctx.get_raw(1), "params").map_err(|e| fail(NAME, e))?;
    let (Some(family), Some(params)) = (family, params) else {
        return Ok(Value::Null);
    };
    let m = Model::from_parameters(family, params).map_err(|e| fail(NAME, e))?;
    Ok(Value::Text(m.to_json()))
}

fn dist_component(ctx: &rusqlite::functions::Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_component";
    let Some(t) = number(ctx.get_raw(1), "t").map_err(|e| fail(NAME, e))? else {
        return Ok(Value::Null);
    };
    // The parsed model is reused while the argument stays the same (a constant, or the
    // same fit joined to every row), so a join labels each row without re-parsing.
    let Some(d) = dist_arg(ctx, 0, NAME)? else {
        return Ok(Value::Null);
    };
    let Dist::Model(model) = &*d else {
        return Err(fail(
            NAME,
            ArgError::BadJson {
                what: "model",
                detail: format!(
                    "must be model JSON (from dist_mixture, dist_fit or dist_model), not {}",
                    d.kind()
                ),
            },
        ));
    };
    Ok(model
        .component_index(t)
        .map_or(Value::Null, |j| Value::Integer(j as i64 + 1)))
}

// ---------------------------------------------------------------------------------------
// dist_components(model): a table-valued function on the shared virtual-table layer

/// `dist_components(model)`: one row per component (a parametric model is one component).
pub(crate) struct Components;

impl TableFunction for Components {
    const NAME: &'static str = "dist_components";
    const SCHEMA: &'static CStr =
        c"CREATE TABLE x(component INTEGER, weight REAL, mean REAL, sd REAL, model HIDDEN)";
    const COLUMNS: usize = 4;
    const ARGS: &'static [&'static str] = &["model"];
    const REQUIRED: usize = 1;
    const SIGNATURE: &'static str = "dist_components(model)";

    fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>> {
        let arg = args.first().copied().flatten().unwrap_or(ValueRef::Null);
        let Some(model) = read_model(arg).map_err(|e| fail(Self::NAME, e))? else {
            return Ok(Vec::new());
        };
        let finite = |v: f64| {
            if v.is_finite() {
                Value::Real(v)
            } else {
                Value::Null
            }
        };
        Ok(model
            .components()
            .into_iter()
            .enumerate()
            .flat_map(|(i, c)| {
                [
                    Value::Integer(i as i64 + 1),
                    Value::Real(c.weight),
                    finite(c.mean),
                    finite(c.sd),
                ]
            })
            .collect())
    }
}
