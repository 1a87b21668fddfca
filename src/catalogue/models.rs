//! Model adapters: `dist_fit`, `dist_mixture`, `dist_model`, `dist_component` and the
//! table-valued `dist_components`.
//!
//! Adapters only: they read and check arguments and hand them to
//! [`crate::stats::fit`], [`crate::stats::mixture`] and [`crate::value::model`]. NULL x
//! is skipped; a group with no non-NULL x gives NULL. Models travel as JSON text.

use super::args::{ArgError, Constant, FunctionError, TextConstant, fail, number, text, whole};
use super::reader::{Call, model_of};
use super::state::{AggregateImp, Args, Reader, State, Writer, push, try_extend};
use super::value::Out;
use super::{FunctionDef, Imp, Kind, Returns, TableImp};
use crate::stats::fit::{Family, fit};
use crate::stats::mixture::{MAX_COMPONENTS, MixtureError, fit_mixture};
use crate::value::model::{Law, Model};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "dist_fit",
        kind: Kind::Aggregate,
        returns: Returns::Text,
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
        imp: Imp::Aggregate(AggregateImp::of::<DistFitState>()),
    },
    FunctionDef {
        name: "dist_mixture",
        kind: Kind::Aggregate,
        returns: Returns::Text,
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
        imp: Imp::Aggregate(AggregateImp::of::<DistMixtureState>()),
    },
    FunctionDef {
        name: "dist_model",
        kind: Kind::Scalar,
        returns: Returns::Text,
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
        imp: Imp::Scalar(dist_model),
    },
    FunctionDef {
        name: "dist_component",
        kind: Kind::Scalar,
        returns: Returns::Integer,
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
        imp: Imp::Scalar(dist_component),
    },
    FunctionDef {
        name: "dist_components",
        kind: Kind::Table,
        returns: Returns::Rows,
        arities: &[1],
        signature: "dist_components(model)",
        summary: "table (component, weight, mean, sd) of a model's mixture components",
        help: "One row per component of a mixture model: component (numbered from 1, as \
               dist_component numbers them), weight, mean, sd (NULL if they overflow). NULL \
               model gives no rows. Errors: no model argument; model that is not valid model \
               JSON; a one-family model (it has no components: read its parameters with \
               ->>).",
        example: "SELECT sum(weight * mean) FROM dist_components(dist_model('normal_mixture', \
                  '{\"components\": [{\"weight\": 0.25, \"mean\": 0, \"sd\": 1}, {\"weight\": \
                  0.75, \"mean\": 5, \"sd\": 2}]}'))",
        example_result: "3.75",
        imp: Imp::Table(TableImp {
            columns: &[
                ("component", "INTEGER"),
                ("weight", "REAL"),
                ("mean", "REAL"),
                ("sd", "REAL"),
            ],
            args: &["model"],
            rows: components,
        }),
    },
];

// ---------------------------------------------------------------------------------------
// dist_fit(x, family)

/// State of `dist_fit`: the values and the family.
#[derive(Debug, Default)]
pub struct DistFitState {
    xs: Vec<f64>,
    family: TextConstant<Family>,
}

/// Parses a family name.
fn parse_family(s: &str) -> std::result::Result<Family, ArgError> {
    Ok(Family::from_name(s)?)
}

impl State for DistFitState {
    const NAME: &'static str = "dist_fit";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            self.family.observe(args.get(1), "family", parse_family)?;
            if let Some(x) = number(args.get(0), "x")? {
                push(&mut self.xs, x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.family.merge(other.family, "family")?;
            try_extend(&mut self.xs, &other.xs)
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let Some(&family) = self.family.get() else {
            return Ok(Out::Null);
        };
        if self.xs.is_empty() {
            return Ok(Out::Null);
        }
        // In ascending order, so that the fit's sums do not depend on the order of rows
        // (or of the parts a partitioned engine merged).
        self.xs.sort_unstable_by(f64::total_cmp);
        let f = fit(&self.xs, family).map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(Model::from(f).to_json()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.family.raw());
        w.f64s(&self.xs);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(DistFitState {
            family: TextConstant::from_raw(r.constant()?, parse_family)?,
            xs: r.f64s()?,
        })
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

impl State for DistMixtureState {
    const NAME: &'static str = "dist_mixture";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            if let Some(v) = args.optional(1) {
                self.has_k = true;
                let k = whole(v, "k")?;
                if self.k.observe(k, "k")?
                    && let Some(k) = k
                    && !(1..=MAX_COMPONENTS as i64).contains(&k)
                {
                    return Err(MixtureError::BadK(k).into());
                }
            }
            if let Some(x) = number(args.get(0), "x")? {
                push(&mut self.xs, x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.has_k |= other.has_k;
            self.k.merge(other.k, "k")?;
            try_extend(&mut self.xs, &other.xs)
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let k = match (self.has_k, self.k.get()) {
            (false, _) => None,
            (true, None) => return Ok(Out::Null),
            // Checked in `step` to lie in 1..=MAX_COMPONENTS.
            (true, Some(&k)) => Some(k as usize),
        };
        if self.xs.is_empty() {
            return Ok(Out::Null);
        }
        // The kernel sorts and merges ties itself, so row order does not matter.
        let f = fit_mixture(&self.xs, k).map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(Model::from(f).to_json()))
    }

    fn save(&self, w: &mut Writer) {
        w.bool(self.has_k);
        w.constant(self.k.raw());
        w.f64s(&self.xs);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let has_k = r.bool()?;
        let k: Constant<i64> = r.constant_of()?;
        if let Some(&k) = k.get()
            && !(1..=MAX_COMPONENTS as i64).contains(&k)
        {
            return Err(MixtureError::BadK(k).into());
        }
        Ok(DistMixtureState {
            has_k,
            k,
            xs: r.f64s()?,
        })
    }
}

// ---------------------------------------------------------------------------------------
// dist_model(family, params), dist_component(model, t)

fn dist_model(call: &mut Call<'_>) -> Result<Out> {
    let family = text(call.get(0), "family").map_err(|e| call.fail(e))?;
    let params = text(call.get(1), "params").map_err(|e| call.fail(e))?;
    let (Some(family), Some(params)) = (family, params) else {
        return Ok(Out::Null);
    };
    let m = Model::from_parameters(family, params).map_err(|e| call.fail(e))?;
    Ok(Out::Text(m.to_json()))
}

fn dist_component(call: &mut Call<'_>) -> Result<Out> {
    let Some(t) = call.number(1, "t")? else {
        return Ok(Out::Null);
    };
    // The parsed model is reused while the argument stays the same (a constant, or the
    // same fit joined to every row), so a join labels each row without re-parsing.
    let Some(d) = call.model(0)? else {
        return Ok(Out::Null);
    };
    Ok(model_of(&d)
        .and_then(|m| m.component_index(t))
        .map_or(Out::Null, |j| Out::Integer(j as i64 + 1)))
}

// ---------------------------------------------------------------------------------------
// dist_components(model)

/// `dist_components(model)`: one row per component (a parametric model is one component).
fn components(call: &mut Call<'_>) -> Result<Vec<Out>> {
    let Some(d) = call.model(0)? else {
        return Ok(Vec::new());
    };
    let Some(model) = model_of(&d) else {
        return Ok(Vec::new());
    };
    if !matches!(model.law(), Law::Mixture(_)) {
        return Err(call.fail(ArgError::NotAMixture {
            arg: 1,
            got: model.kind(),
        }));
    }
    let finite = |v: f64| {
        if v.is_finite() {
            Out::Real(v)
        } else {
            Out::Null
        }
    };
    Ok(model
        .components()
        .into_iter()
        .enumerate()
        .flat_map(|(i, c)| {
            [
                Out::Integer(i as i64 + 1),
                Out::Real(c.weight),
                finite(c.mean),
                finite(c.sd),
            ]
        })
        .collect())
}
