//! Model adapters: `dist_fit`, `dist_mixture`, `dist_model`, `dist_component` and the
//! table-valued `dist_components`.
//!
//! Adapters only: they read and check arguments and hand them to
//! [`crate::stats::fit`], [`crate::stats::mixture`] and [`crate::value::model`]. NULL x
//! is skipped; a group with no non-NULL x gives NULL. Models travel as JSON text.

use std::borrow::Cow;
use std::ffi::{CStr, c_int};
use std::marker::PhantomData;
use std::panic::{AssertUnwindSafe, catch_unwind};

use rusqlite::ffi;
use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::{Value, ValueRef};
use rusqlite::vtab::{
    Context as VTabContext, Filters, IndexConstraintOp, IndexInfo, Module, VTab, VTabConfig,
    VTabConnection, VTabCursor,
};

use super::args::{ArgError, Constant, fail, number, text, whole};
use super::dist::dist_arg;
use super::{FunctionDef, Kind, aggregate, flags};
use crate::stats::fit::{Family, fit};
use crate::stats::mixture::{Component, MAX_COMPONENTS, MixtureError, fit_mixture};
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
               variances are floored at 1e-6 times the data's variance. k must be the same on \
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
        register: |c, d| c.create_module(d.name, &COMPONENTS_MODULE, None),
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
// dist_components(model): an eponymous virtual table

const NAME_COMPONENTS: &str = "dist_components";
/// The module; `&COMPONENTS_MODULE` is promoted to a `'static` that SQLite keeps.
const COMPONENTS_MODULE: Module<'static, ComponentsTab> = Module::eponymous_only_module();
/// Column index of the hidden `model` argument.
const MODEL_COLUMN: c_int = 4;

/// Runs a virtual-table method body with panics caught: rusqlite does not catch them
/// there, and a panic must never unwind into SQLite.
fn guarded<T>(body: impl FnOnce() -> Result<T>) -> Result<T> {
    catch_unwind(AssertUnwindSafe(body)).unwrap_or_else(|_| {
        Err(rusqlite::Error::ModuleError(format!(
            "{NAME_COMPONENTS}: internal error"
        )))
    })
}

/// The `dist_components` virtual table.
#[repr(C)]
pub struct ComponentsTab {
    /// Base class; must be first.
    base: ffi::sqlite3_vtab,
}

unsafe impl<'vtab> VTab<'vtab> for ComponentsTab {
    type Aux = ();
    type Cursor = ComponentsCursor<'vtab>;

    fn connect(
        db: &mut VTabConnection,
        _aux: Option<&()>,
        _module_name: &[u8],
        _database_name: &[u8],
        _table_name: &[u8],
        _args: &[&[u8]],
    ) -> Result<(Cow<'static, CStr>, Self)> {
        guarded(|| {
            db.config(VTabConfig::Innocuous)?;
            Ok((
                Cow::Borrowed(c"CREATE TABLE x(component INTEGER, weight REAL, mean REAL, sd REAL, model HIDDEN)"),
                ComponentsTab {
                    base: ffi::sqlite3_vtab::default(),
                },
            ))
        })
    }

    fn best_index(&self, info: &mut IndexInfo) -> Result<bool> {
        guarded(|| {
            let mut usable = None;
            let mut unusable = false;
            for (i, c) in info.constraints().enumerate() {
                if c.column() != MODEL_COLUMN
                    || c.operator() != IndexConstraintOp::SQLITE_INDEX_CONSTRAINT_EQ
                {
                    continue;
                }
                if c.is_usable() {
                    usable = Some(i);
                } else {
                    unusable = true;
                }
            }
            match usable {
                Some(i) => {
                    let mut u = info.constraint_usage(i);
                    u.set_argv_index(1);
                    u.set_omit(true);
                    info.set_idx_num(1);
                    info.set_estimated_cost(1.0);
                    info.set_estimated_rows(MAX_COMPONENTS as i64);
                }
                // The model comes from a table not yet scanned: ask SQLite for another
                // join order.
                None if unusable => {
                    return Err(rusqlite::Error::SqliteFailure(
                        ffi::Error::new(ffi::SQLITE_CONSTRAINT),
                        None,
                    ));
                }
                None => {
                    info.set_idx_num(0);
                    info.set_estimated_cost(1e12);
                }
            }
            Ok(true)
        })
    }

    fn open(&'vtab mut self) -> Result<ComponentsCursor<'vtab>> {
        guarded(|| {
            Ok(ComponentsCursor {
                base: ffi::sqlite3_vtab_cursor::default(),
                rows: Vec::new(),
                at: 0,
                phantom: PhantomData,
            })
        })
    }
}

/// A cursor over one model's components.
#[repr(C)]
pub struct ComponentsCursor<'vtab> {
    /// Base class; must be first.
    base: ffi::sqlite3_vtab_cursor,
    rows: Vec<Component>,
    at: usize,
    phantom: PhantomData<&'vtab ComponentsTab>,
}

unsafe impl VTabCursor for ComponentsCursor<'_> {
    fn filter(&mut self, idx_num: c_int, _idx_str: Option<&str>, args: &Filters<'_>) -> Result<()> {
        guarded(|| {
            self.rows.clear();
            self.at = 0;
            if idx_num != 1 || args.is_empty() {
                return Err(fail(
                    NAME_COMPONENTS,
                    ArgError::BadJson {
                        what: "model",
                        detail: "is required, as in SELECT * FROM dist_components(dist_mixture(x))"
                            .to_string(),
                    },
                ));
            }
            let model = read_model(args[0].get_raw()).map_err(|e| fail(NAME_COMPONENTS, e))?;
            if let Some(m) = model {
                self.rows = m.components();
            }
            Ok(())
        })
    }

    fn next(&mut self) -> Result<()> {
        guarded(|| {
            self.at = self.at.saturating_add(1);
            Ok(())
        })
    }

    fn eof(&self) -> bool {
        catch_unwind(AssertUnwindSafe(|| self.at >= self.rows.len())).unwrap_or(true)
    }

    fn column(&self, ctx: &mut VTabContext, i: c_int) -> Result<()> {
        guarded(|| {
            let Some(c) = self.rows.get(self.at) else {
                return ctx.set_result(rusqlite::types::Null);
            };
            let finite = |v: f64| v.is_finite().then_some(v);
            match i {
                0 => ctx.set_result(self.at as i64 + 1),
                1 => ctx.set_result(c.weight),
                2 => ctx.set_result(finite(c.mean)),
                3 => ctx.set_result(finite(c.sd)),
                _ => ctx.set_result(rusqlite::types::Null),
            }
        })
    }

    fn rowid(&self) -> Result<i64> {
        guarded(|| Ok(self.at as i64 + 1))
    }
}
