//! Quantile sketches in SQL: `quantile_sketch`, `sketch_merge`, `sketch_quantile`,
//! `sketch_cdf`.
//!
//! Adapters only: the sketch is [`crate::stats::sketch`], its BLOB is
//! [`crate::value::sketch`]. NULL x (or a NULL sketch) is skipped; a group with nothing to
//! summarise gives NULL.

use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::Value;

use super::args::{Constant, blob, fail, number};
use super::{FunctionDef, Kind, aggregate, scalar};
use crate::stats::check_probability;
use crate::stats::sketch::{DEFAULT_EPSILON, QuantileSketch, k_for_epsilon};
use crate::value::sketch::{decode, encode};

type Result<T> = rusqlite::Result<T>;

const MADE_BY: &str = "quantile_sketch or sketch_merge";

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "quantile_sketch",
        kind: Kind::Aggregate,
        arities: &[1, 2],
        signature: "quantile_sketch(x [, epsilon])",
        summary: "BLOB: a mergeable quantile sketch of x, rank error at most epsilon n (default 0.005); bounded memory",
        help: "A KLL sketch (Karnin, Lang and Liberty 2016) of the group's x in memory that does \
               not grow with n: at the default epsilon 0.005 at most 7,991 values (62 KiB) for \
               any n. For any one query, sketch_cdf and sketch_quantile are within epsilon * n \
               ranks of the exact answer with probability at least 1 - 1e-6, and so is the \
               merge of any number of sketches (sketch_merge). Same rows in the same order give \
               the same BLOB. epsilon must be the same on every row of a group; NULL x is \
               skipped; NULL epsilon or no rows gives NULL. Layout: docs/sketch-format.md. \
               Errors: epsilon outside (0, 0.5) or below 1e-5, non-numeric x.",
        example: "SELECT length(quantile_sketch(column1)) FROM (VALUES (1), (2), (3))",
        example_result: "92",
        register: |c, d| aggregate(c, d, || QuantileSketchAgg),
    },
    FunctionDef {
        name: "sketch_merge",
        kind: Kind::Aggregate,
        arities: &[1],
        signature: "sketch_merge(s)",
        summary: "BLOB: the merge of quantile sketches (shards, days, machines), with the same error bound",
        help: "Merges the group's sketches into one that summarises all their values, with the \
               same rank-error guarantee as one sketch built over all of them. The sketches must \
               have been built with the same epsilon. NULL s is skipped; no sketch gives NULL. \
               Errors: s not a BLOB made by quantile_sketch or sketch_merge, a damaged BLOB, \
               sketches built with different epsilon.",
        example: "SELECT sketch_quantile(sketch_merge(s), 0.5) FROM (SELECT quantile_sketch(column1) AS s FROM (VALUES (1), (2), (3)) UNION ALL SELECT quantile_sketch(column1) FROM (VALUES (4), (5)))",
        example_result: "3.0",
        register: |c, d| aggregate(c, d, || SketchMerge),
    },
    FunctionDef {
        name: "sketch_quantile",
        kind: Kind::Scalar,
        arities: &[2],
        signature: "sketch_quantile(s, p)",
        summary: "approximate p-quantile from a sketch: true rank within epsilon n of p n",
        help: "The smallest value kept by the sketch whose estimated rank reaches p * n (the \
               inverse of the sketch's cdf, like quantile type 1); p = 0 and p = 1 give the exact \
               minimum and maximum. Its true rank is within epsilon * n of p * n with \
               probability at least 1 - 2e-6. NULL s or p gives NULL. Errors: p outside [0, 1], \
               s not a sketch BLOB or damaged.",
        example: "SELECT sketch_quantile(quantile_sketch(column1), 0.9) FROM (VALUES (1), (2), (3), (4), (5))",
        example_result: "5.0",
        register: |c, d| scalar(c, d, sketch_quantile),
    },
    FunctionDef {
        name: "sketch_cdf",
        kind: Kind::Scalar,
        arities: &[2],
        signature: "sketch_cdf(s, t)",
        summary: "approximate share of values at or below t from a sketch, within epsilon",
        help: "The sketch's estimate of the share of the summarised values that are <= t; within \
               epsilon of the exact ecdf with probability at least 1 - 1e-6 (exact while the \
               sketch has kept every value). NULL s or t gives NULL. Errors: s not a sketch BLOB \
               or damaged, non-numeric t.",
        example: "SELECT sketch_cdf(quantile_sketch(column1), 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        register: |c, d| scalar(c, d, sketch_cdf),
    },
];

/// The sketch BLOB, or NULL for an empty one.
fn blob_value(s: Option<&QuantileSketch>) -> Value {
    s.and_then(encode).map_or(Value::Null, Value::Blob)
}

/// Reads and decodes the sketch argument at `idx`; `None` for NULL.
fn sketch_arg(name: &'static str, ctx: &Context<'_>, idx: usize) -> Result<Option<QuantileSketch>> {
    blob(ctx.get_raw(idx), "s", MADE_BY)
        .map_err(|e| fail(name, e))?
        .map(|b| decode(b).map_err(|e| fail(name, e)))
        .transpose()
}

// ---------------------------------------------------------------------------------------
// quantile_sketch(x [, epsilon])

/// State of `quantile_sketch`.
#[derive(Debug, Default)]
pub struct QuantileSketchState {
    epsilon: Constant<f64>,
    k: Option<u32>,
    sketch: Option<QuantileSketch>,
}

/// `quantile_sketch(x [, epsilon])`.
pub struct QuantileSketchAgg;

impl Aggregate<QuantileSketchState, Value> for QuantileSketchAgg {
    fn init(&self, _: &mut Context<'_>) -> Result<QuantileSketchState> {
        Ok(QuantileSketchState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut QuantileSketchState) -> Result<()> {
        const NAME: &str = "quantile_sketch";
        let epsilon = if ctx.len() > 1 {
            number(ctx.get_raw(1), "epsilon").map_err(|e| fail(NAME, e))?
        } else {
            Some(DEFAULT_EPSILON)
        };
        if s.epsilon
            .observe(epsilon, "epsilon")
            .map_err(|e| fail(NAME, e))?
            && let Some(eps) = epsilon
        {
            s.k = Some(k_for_epsilon(eps).map_err(|e| fail(NAME, e))?);
        }
        let Some(k) = s.k else { return Ok(()) };
        if let Some(x) = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))? {
            s.sketch
                .get_or_insert_with(|| QuantileSketch::with_k(k))
                .insert(x)
                .map_err(|e| fail(NAME, e))?;
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<QuantileSketchState>) -> Result<Value> {
        Ok(blob_value(s.as_ref().and_then(|s| s.sketch.as_ref())))
    }
}

// ---------------------------------------------------------------------------------------
// sketch_merge(s)

/// `sketch_merge(s)`.
pub struct SketchMerge;

impl Aggregate<Option<QuantileSketch>, Value> for SketchMerge {
    fn init(&self, _: &mut Context<'_>) -> Result<Option<QuantileSketch>> {
        Ok(None)
    }

    fn step(&self, ctx: &mut Context<'_>, acc: &mut Option<QuantileSketch>) -> Result<()> {
        const NAME: &str = "sketch_merge";
        let Some(s) = sketch_arg(NAME, ctx, 0)? else {
            return Ok(());
        };
        match acc {
            Some(a) => a.merge(&s).map_err(|e| fail(NAME, e)),
            None => {
                *acc = Some(s);
                Ok(())
            }
        }
    }

    fn finalize(&self, _: &mut Context<'_>, acc: Option<Option<QuantileSketch>>) -> Result<Value> {
        Ok(blob_value(acc.flatten().as_ref()))
    }
}

// ---------------------------------------------------------------------------------------
// sketch_quantile(s, p), sketch_cdf(s, t)

fn sketch_quantile(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "sketch_quantile";
    let p = number(ctx.get_raw(1), "p").map_err(|e| fail(NAME, e))?;
    if let Some(p) = p {
        check_probability(p).map_err(|e| fail(NAME, e))?;
    }
    let (Some(s), Some(p)) = (sketch_arg(NAME, ctx, 0)?, p) else {
        return Ok(Value::Null);
    };
    let q = s.quantile(p).map_err(|e| fail(NAME, e))?;
    Ok(q.map_or(Value::Null, Value::Real))
}

fn sketch_cdf(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "sketch_cdf";
    let t = number(ctx.get_raw(1), "t").map_err(|e| fail(NAME, e))?;
    let (Some(s), Some(t)) = (sketch_arg(NAME, ctx, 0)?, t) else {
        return Ok(Value::Null);
    };
    Ok(s.cdf(t).map_or(Value::Null, Value::Real))
}
