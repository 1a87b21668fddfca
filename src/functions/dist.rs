//! Distributions as SQL values: building (`dist_empirical`, `dist_merge`), evaluating
//! (`dist_cdf`, `dist_quantile`, `dist_pdf`, `dist_n`, `dist_mean`, `dist_sd`,
//! `dist_profile`, `dist_band`) and drawing (`dist_steps`, `dist_curve`, `dist_histogram`).
//!
//! Adapters only: a distribution argument is read and checked by
//! [`crate::value::Dist::from_sql`], numbers by [`super::args`], and the answers come from
//! [`crate::stats`]. NULL in any argument of a scalar gives NULL; a NULL argument of a
//! table-valued function gives no rows. A constant distribution argument (a literal or a
//! bound parameter) is decoded once per statement, not once per row, and a model that
//! repeats from row to row (a fit joined to every row) is parsed once while it repeats.
//!
//! # Models
//!
//! A distribution argument is an empirical BLOB or model JSON (`dist_fit`, `dist_mixture`,
//! `dist_model`). `dist_cdf`, `dist_pdf`, `dist_quantile`, `dist_mean`, `dist_sd` and
//! `dist_curve` evaluate a model exactly (`dist_quantile`'s type and the bandwidth of
//! `dist_pdf` and `dist_curve` are checked but do not apply to a model); `dist_n` gives the
//! number of values a model was fitted to. `dist_merge`, `dist_profile`, `dist_band`,
//! `dist_steps` and `dist_histogram` describe a sample, so a model there is an error that
//! says which function answers the question for a model. Infinite answers (a quantile at
//! `p = 0` or `1` on an unbounded support, a density at its pole) reach SQL as REAL
//! `-Inf` or `Inf`, as the quantiles of an empirical value holding an infinite reading do;
//! NaN never does.

use std::cell::RefCell;
use std::ffi::{CStr, c_int};
use std::sync::Arc;

use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::{Value, ValueRef};
use rusqlite::vtab::Module;
use serde_json::json;

use super::args::{ArgError, fail, number, whole};
use super::column::profile_json;
use super::table::{Table, TableFunction};
use super::{FunctionDef, Kind, aggregate, scalar};
use crate::stats::band::dkw_band;
use crate::stats::check_probability;
use crate::stats::grid::{check_grid, linspace};
use crate::stats::histogram::{BinRule, histogram};
use crate::stats::kde::Bandwidth;
use crate::stats::quantile::QuantileType;
use crate::stats::sample::{Sample, SampleBuilder};
use crate::value::{Dist, Size, describe, empirical};

type Result<T> = rusqlite::Result<T>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "dist_empirical",
        kind: Kind::Aggregate,
        arities: &[1, 2],
        signature: "dist_empirical(x [, w])",
        summary: "the empirical distribution of x (with frequency weights w) as a BLOB value",
        help: "Builds the empirical distribution of the group: its values sorted, with their \
               frequency weights when w is given, in a compact versioned BLOB \
               (docs/empirical-blob.md). Store it in a table, join it, merge it with \
               dist_merge, and ask it questions with the dist_ functions. NULL x (or w) rows \
               are skipped and zero weights carry no mass; a group with nothing left gives \
               NULL. Errors: non-numeric x or w, a negative or infinite weight.",
        example: "SELECT dist_n(dist_empirical(column1)) FROM (VALUES (1), (2), (NULL), (4))",
        example_result: "3",
        register: |c, d| aggregate(c, d, || DistEmpirical),
    },
    FunctionDef {
        name: "dist_merge",
        kind: Kind::Aggregate,
        arities: &[1],
        signature: "dist_merge(d)",
        summary: "the union of empirical distributions (shards, days, groups) as one BLOB",
        help: "Merges the empirical distributions of the group into one: the result is the \
               same BLOB, bit for bit, as dist_empirical over all their rows at once, so \
               per-day or per-shard values can be rolled up without the raw data. Merging \
               a weighted with an unweighted distribution gives each unweighted value weight \
               1. NULL d is skipped. Errors: d not a distribution BLOB, or a model (a model \
               is not a set of values; fit the merged values instead).",
        example: "WITH days(d) AS (SELECT dist_empirical(column1) FROM (VALUES (1), (2)) \
                  UNION ALL SELECT dist_empirical(column1) FROM (VALUES (3))) \
                  SELECT dist_quantile(dist_merge(d), 0.5) FROM days",
        example_result: "2.0",
        register: |c, d| aggregate(c, d, || DistMerge),
    },
    FunctionDef {
        name: "dist_cdf",
        kind: Kind::Scalar,
        arities: &[2],
        signature: "dist_cdf(d, t)",
        summary: "cdf of distribution d at t: the share of its mass at or below t",
        help: "For an empirical distribution, the ECDF: count(x <= t) / n, or with weights \
               the weight at or below t over the total weight, by binary search. For a model \
               (JSON from dist_fit, dist_mixture or dist_model), its cdf: statrs and libm's \
               erfc for the families, the weighted sum of normal cdfs for a mixture; 0 at \
               -Inf and 1 at Inf. NULL d or t gives NULL. Errors: d not a distribution (an \
               invalid model names the field), non-numeric t.",
        example: "SELECT dist_cdf(dist_empirical(column1), 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        register: |c, d| scalar(c, d, cdf),
    },
    FunctionDef {
        name: "dist_quantile",
        kind: Kind::Scalar,
        arities: &[2, 3],
        signature: "dist_quantile(d, p [, type])",
        summary: "p-quantile of distribution d; type 1..9 as in quantile, default 7",
        help: "The p-quantile of an empirical distribution by one of the nine Hyndman-Fan \
               definitions, the same kernel as quantile and weighted_quantile (with weights \
               the total weight plays the part of n). For a model, the inverse of its cdf (a \
               mixture's by safeguarded Newton-bisection), so that dist_quantile(m, \
               dist_cdf(m, t)) = t; type is a rule for samples, checked but ignored for a \
               model, so one query serves both kinds. p = 0 and 1 give the ends of a model's \
               support: -Inf or Inf (REAL) where it is unbounded. NULL d, p or type gives \
               NULL. Errors: p outside [0, 1], type outside 1..9, d not a distribution.",
        example: "SELECT dist_quantile(dist_empirical(column1), 0.9) \
                  FROM (VALUES (1), (2), (3), (4), (5))",
        example_result: "4.6",
        register: |c, d| scalar(c, d, quantile),
    },
    FunctionDef {
        name: "dist_pdf",
        kind: Kind::Scalar,
        arities: &[2, 3],
        signature: "dist_pdf(d, t [, bandwidth])",
        summary: "density of d at t: a model's own, or a Gaussian kernel estimate, bandwidth 'scott' (default), 'silverman' or h",
        help: "For an empirical distribution, the Gaussian kernel density estimate at t. \
               bandwidth is 'scott' (the default: sd * n^(-1/5)), 'silverman' \
               (sd * (3n/4)^(-1/5)), or a positive number: the kernel's standard deviation in \
               the units of x. sd has divisor n - 1; weights count as frequencies. NULL when \
               a rule's bandwidth is undefined (fewer than two observations, no spread, an \
               infinite value) and for NULL arguments. For a model, its density (bandwidth \
               checked but ignored); Inf (REAL) at the pole 0 of a gamma or Weibull model \
               with shape below 1. Errors: an unknown bandwidth, d not a distribution.",
        example: "SELECT round(dist_pdf(dist_empirical(column1), 0, 1.0), 6) FROM (VALUES (0))",
        example_result: "0.398942",
        register: |c, d| scalar(c, d, pdf),
    },
    FunctionDef {
        name: "dist_n",
        kind: Kind::Scalar,
        arities: &[1],
        signature: "dist_n(d)",
        summary: "number of observations in d (INTEGER), its total weight (REAL) when weighted, a model's fitted n",
        help: "The count of values an unweighted empirical distribution was built from, as \
               an INTEGER; for a weighted one, the total weight, as a REAL. For a model, the \
               number of values it was fitted to (its n field), NULL for a model built from \
               known parameters. NULL d gives NULL.",
        example: "SELECT dist_n(dist_empirical(column1, column2)) FROM (VALUES (1, 2.5), (3, 0.5))",
        example_result: "3.0",
        register: |c, d| scalar(c, d, size),
    },
    FunctionDef {
        name: "dist_mean",
        kind: Kind::Scalar,
        arities: &[1],
        signature: "dist_mean(d)",
        summary: "mean of distribution d",
        help: "The (weighted) mean, by a compensated sum; for a model, the mean of the \
               distribution. NULL when d holds an infinite value, when a model's mean \
               overflows (a lognormal with a huge sigma), and for NULL d.",
        example: "SELECT dist_mean(dist_empirical(column1)) FROM (VALUES (1), (2), (6))",
        example_result: "3.0",
        register: |c, d| scalar(c, d, mean),
    },
    FunctionDef {
        name: "dist_sd",
        kind: Kind::Scalar,
        arities: &[1],
        signature: "dist_sd(d)",
        summary: "standard deviation of distribution d (divisor n - 1; a model's own sd)",
        help: "The sample standard deviation, divisor n - 1 (W - 1 with weights), computed in \
               two passes with compensated sums; for a model, the standard deviation of the \
               distribution (for a normal fit, its sd: divisor n). NULL for a single \
               observation (total weight at most 1), an infinite value, a model's overflow, \
               or NULL d.",
        example: "SELECT round(dist_sd(dist_empirical(column1)), 4) \
                  FROM (VALUES (2), (4), (4), (4), (5), (5), (7), (9))",
        example_result: "2.1381",
        register: |c, d| scalar(c, d, sd),
    },
    FunctionDef {
        name: "dist_profile",
        kind: Kind::Scalar,
        arities: &[1],
        signature: "dist_profile(d)",
        summary: "JSON summary of d, as profile(x) gives it for the raw values",
        help: "The same JSON object as the profile aggregate over the values d was built \
               from: n, mean, sd, min, q1, median, q3, max, skewness, excess_kurtosis. A \
               weighted distribution adds total_weight, which then plays the part of n in \
               the moments. NULL d gives NULL. Errors: d not an empirical distribution (a \
               model has no sample summary: ask it dist_mean, dist_sd, dist_quantile).",
        example: "SELECT dist_profile(dist_empirical(column1)) ->> '$.median' \
                  FROM (VALUES (1), (2), (9))",
        example_result: "2.0",
        register: |c, d| scalar(c, d, profile),
    },
    FunctionDef {
        name: "dist_band",
        kind: Kind::Scalar,
        arities: &[3],
        signature: "dist_band(d, t, alpha)",
        summary: "JSON {lower, upper}: DKW confidence band of the empirical cdf of d at t",
        help: "The Dvoretzky-Kiefer-Wolfowitz band with Massart's constant: the ECDF at t \
               plus and minus sqrt(ln(2/alpha) / (2n)), clipped to [0, 1]. The band holds the \
               true cdf at every t at once with probability at least 1 - alpha (for \
               continuous data; n is the total weight when weighted). NULL arguments give \
               NULL. Errors: alpha outside (0, 1), d not an empirical distribution (a model \
               is not a sample and has no sampling band).",
        example: "SELECT round(dist_band(dist_empirical(column1), 2, 0.5) ->> '$.lower', 4) \
                  FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.0837",
        register: |c, d| scalar(c, d, band),
    },
    FunctionDef {
        name: "dist_steps",
        kind: Kind::Table,
        arities: &[1],
        signature: "dist_steps(d)",
        summary: "rows (x, cdf): the step points of the empirical cdf of d, for plotting",
        help: "One row per distinct value x of the empirical distribution d, ascending, with \
               the cdf at x (the top of the step). Use in FROM, also in joins: \
               FROM sensors s, dist_steps(s.d). NULL d gives no rows. Errors: d not an \
               empirical distribution (a model's cdf has no steps: draw it with dist_curve).",
        example: "SELECT group_concat(x || ':' || cdf, ' ') FROM dist_steps(\
                  (SELECT dist_empirical(column1) FROM (VALUES (1), (2), (2), (3))))",
        example_result: "1.0:0.25 2.0:0.75 3.0:1.0",
        register: |c, _| {
            const M: Module<Table<Steps>> = Module::eponymous_only_module();
            c.create_module(Steps::NAME, &M, None)
        },
    },
    FunctionDef {
        name: "dist_curve",
        kind: Kind::Table,
        arities: &[4, 5],
        signature: "dist_curve(d, lo, hi, n [, bandwidth])",
        summary: "rows (x, cdf, pdf) of d on n evenly spaced points from lo to hi",
        help: "Evaluates the distribution on the grid lo, lo + (hi - lo)/(n - 1), ..., hi \
               (numpy.linspace's arithmetic): the cdf, and the density (for an empirical \
               distribution the kernel estimate of dist_pdf, bandwidth as there, NULL when \
               undefined; for a model its own cdf and density, as dist_cdf and dist_pdf give \
               them, the bandwidth checked but ignored). Drawn beside dist_steps of the data, \
               it compares a fitted cdf with the ECDF. NULL arguments give no rows. Errors: \
               lo >= hi or not finite, n not a whole number from 2 to 1000000, an unknown \
               bandwidth, d not a distribution.",
        example: "SELECT group_concat(cdf, ' ') FROM dist_curve(\
                  (SELECT dist_empirical(column1) FROM (VALUES (0), (1))), 0, 1, 3)",
        example_result: "0.5 0.5 1.0",
        register: |c, _| {
            const M: Module<Table<Curve>> = Module::eponymous_only_module();
            c.create_module(Curve::NAME, &M, None)
        },
    },
    FunctionDef {
        name: "dist_histogram",
        kind: Kind::Table,
        arities: &[1, 2],
        signature: "dist_histogram(d [, rule])",
        summary: "rows (lo, hi, count, density): equal-width histogram of d; rule sturges, scott, fd, sqrt or a bin count",
        help: "Bins from the smallest to the largest value in equal widths; rule chooses how \
               many: 'sturges' (the default), 'scott', 'fd' (Freedman-Diaconis), 'sqrt', or a \
               whole number of bins. The edges are those of numpy.histogram_bin_edges. A bin \
               holds [lo, hi), the last one also hi. count is an INTEGER (the total weight, a \
               REAL, when weighted); density = count / (hi - lo) / n integrates to 1. Errors: \
               an unknown rule, more than 1000000 bins, an infinite value in d, d not an \
               empirical distribution (a model has no counts: its density is the pdf column \
               of dist_curve).",
        example: "SELECT group_concat(count, ' ') FROM dist_histogram(\
                  (SELECT dist_empirical(column1) FROM (VALUES (0), (1), (2), (4))), 2)",
        example_result: "2 2",
        register: |c, _| {
            const M: Module<Table<Histogram>> = Module::eponymous_only_module();
            c.create_module(Histogram::NAME, &M, None)
        },
    },
];

fn real(x: Option<f64>) -> Value {
    x.map_or(Value::Null, Value::Real)
}

/// The sample of an empirical distribution argument (number `arg`, from 1); a model is an
/// error saying what to do `instead`.
pub(crate) fn empirical<'a>(
    d: &'a Dist,
    arg: usize,
    instead: &'static str,
) -> std::result::Result<&'a Sample, ArgError> {
    match d {
        Dist::Empirical(s) => Ok(s),
        Dist::Model(_) => Err(ArgError::NotEmpirical {
            arg,
            got: d.kind(),
            instead,
        }),
    }
}

/// A model's text and the distribution read from it.
type ParsedModel = (Box<[u8]>, Arc<Dist>);

thread_local! {
    /// The last model read from TEXT on this thread, with its text. SQLite keeps auxiliary
    /// data only for constant arguments, but a model usually comes from a joined row (a
    /// fit in a CTE or a table) and repeats, unchanged, on every row of a scan; comparing
    /// the bytes is far cheaper than parsing and checking the JSON again.
    static LAST_MODEL: RefCell<Option<ParsedModel>> = const { RefCell::new(None) };
}

/// Reads argument `idx` as a distribution. When SQLite keeps auxiliary data for the
/// argument (a constant), the decoded value is reused on later rows; a model equal, byte
/// for byte, to the last one read on this thread is reused too.
pub(crate) fn dist_arg(
    ctx: &Context<'_>,
    idx: usize,
    name: &'static str,
) -> Result<Option<Arc<Dist>>> {
    let arg = idx as c_int;
    if let Ok(Some(d)) = ctx.get_aux::<Dist>(arg) {
        return Ok(Some(d));
    }
    let raw = ctx.get_raw(idx);
    let text = match raw {
        ValueRef::Text(t) => Some(t),
        _ => None,
    };
    if let Some(t) = text {
        let hit = LAST_MODEL.with_borrow(|last| match last {
            Some((bytes, d)) if **bytes == *t => Some(Arc::clone(d)),
            _ => None,
        });
        if hit.is_some() {
            return Ok(hit);
        }
    }
    match Dist::from_sql(raw, idx + 1).map_err(|e| fail(name, e))? {
        None => Ok(None),
        Some(d) => {
            let d = ctx.set_aux(arg, d)?;
            if let Some(t) = text {
                LAST_MODEL.set(Some((t.into(), Arc::clone(&d))));
            }
            Ok(Some(d))
        }
    }
}

/// Reads numeric argument `idx`.
fn num(
    ctx: &Context<'_>,
    idx: usize,
    what: &'static str,
    name: &'static str,
) -> Result<Option<f64>> {
    number(ctx.get_raw(idx), what).map_err(|e| fail(name, e))
}

/// Reads a bandwidth: 'scott', 'silverman' or a positive number (also as numeric TEXT).
/// NULL gives `None`.
fn bandwidth(v: ValueRef<'_>) -> std::result::Result<Option<Bandwidth>, ArgError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Text(t) => {
            let s = String::from_utf8_lossy(t);
            match Bandwidth::parse(&s) {
                Ok(b) => Ok(Some(b)),
                Err(e) => match s.trim().parse::<f64>() {
                    Ok(h) => Ok(Some(Bandwidth::fixed(h)?)),
                    Err(_) => Err(e.into()),
                },
            }
        }
        ValueRef::Blob(_) => Err(ArgError::BadJson {
            what: "bandwidth",
            detail: format!(
                "must be 'scott', 'silverman' or a positive number, got {}",
                describe(v)
            ),
        }),
        other => match number(other, "bandwidth")? {
            None => Ok(None),
            Some(h) => Ok(Some(Bandwidth::fixed(h)?)),
        },
    }
}

/// Reads a histogram rule: a rule name or a whole number of bins. NULL gives `None`.
fn bin_rule(v: ValueRef<'_>) -> std::result::Result<Option<BinRule>, ArgError> {
    match v {
        ValueRef::Text(t) => {
            let s = String::from_utf8_lossy(t);
            match BinRule::parse(&s) {
                Ok(r) => Ok(Some(r)),
                Err(e) => match whole(v, "rule") {
                    Ok(Some(k)) => Ok(Some(BinRule::count(k)?)),
                    _ => Err(e.into()),
                },
            }
        }
        ValueRef::Blob(_) => Err(ArgError::BadJson {
            what: "rule",
            detail: format!(
                "must be 'sturges', 'scott', 'fd', 'sqrt' or a whole number of bins, got {}",
                describe(v)
            ),
        }),
        other => match whole(other, "rule")? {
            None => Ok(None),
            Some(k) => Ok(Some(BinRule::count(k)?)),
        },
    }
}

// ---------------------------------------------------------------------------------------
// Scalars

fn cdf(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_cdf";
    let d = dist_arg(ctx, 0, NAME)?;
    let t = num(ctx, 1, "t", NAME)?;
    let (Some(d), Some(t)) = (d, t) else {
        return Ok(Value::Null);
    };
    Ok(real(d.cdf(t)))
}

fn quantile(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_quantile";
    let d = dist_arg(ctx, 0, NAME)?;
    let p = num(ctx, 1, "p", NAME)?;
    if let Some(p) = p {
        check_probability(p).map_err(|e| fail(NAME, e))?;
    }
    let ty = if ctx.len() > 2 {
        match whole(ctx.get_raw(2), "type").map_err(|e| fail(NAME, e))? {
            None => return Ok(Value::Null),
            Some(t) => QuantileType::new(t).map_err(|e| fail(NAME, e))?,
        }
    } else {
        QuantileType::DEFAULT
    };
    let (Some(d), Some(p)) = (d, p) else {
        return Ok(Value::Null);
    };
    Ok(real(d.quantile(p, ty).map_err(|e| fail(NAME, e))?))
}

fn pdf(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_pdf";
    let d = dist_arg(ctx, 0, NAME)?;
    let t = num(ctx, 1, "t", NAME)?;
    let bw = if ctx.len() > 2 {
        match bandwidth(ctx.get_raw(2)).map_err(|e| fail(NAME, e))? {
            None => return Ok(Value::Null),
            Some(b) => b,
        }
    } else {
        Bandwidth::Scott
    };
    let (Some(d), Some(t)) = (d, t) else {
        return Ok(Value::Null);
    };
    Ok(real(d.density(bw).map(|k| k.at(t))))
}

fn size(ctx: &Context<'_>) -> Result<Value> {
    Ok(match dist_arg(ctx, 0, "dist_n")?.and_then(|d| d.size()) {
        None => Value::Null,
        Some(Size::Count(n)) => Value::Integer(i64::try_from(n).unwrap_or(i64::MAX)),
        Some(Size::Weight(w)) => Value::Real(w),
    })
}

fn mean(ctx: &Context<'_>) -> Result<Value> {
    Ok(real(dist_arg(ctx, 0, "dist_mean")?.and_then(|d| d.mean())))
}

fn sd(ctx: &Context<'_>) -> Result<Value> {
    Ok(real(dist_arg(ctx, 0, "dist_sd")?.and_then(|d| d.sd())))
}

fn profile(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_profile";
    let Some(d) = dist_arg(ctx, 0, NAME)? else {
        return Ok(Value::Null);
    };
    let s = empirical(
        &d,
        1,
        "for a model use dist_mean, dist_sd and dist_quantile",
    )
    .map_err(|e| fail(NAME, e))?;
    Ok(s.profile()
        .map_or(Value::Null, |p| Value::Text(profile_json(&p))))
}

fn band(ctx: &Context<'_>) -> Result<Value> {
    const NAME: &str = "dist_band";
    let d = dist_arg(ctx, 0, NAME)?;
    let t = num(ctx, 1, "t", NAME)?;
    let alpha = num(ctx, 2, "alpha", NAME)?;
    let (Some(d), Some(t), Some(alpha)) = (d, t, alpha) else {
        return Ok(Value::Null);
    };
    let s = empirical(
        &d,
        1,
        "a model is not a sample and has no sampling band; compare it with the data by dist_ks",
    )
    .map_err(|e| fail(NAME, e))?;
    let Some(f) = s.cdf(t) else {
        return Ok(Value::Null);
    };
    let b = dkw_band(f, s.total_weight(), alpha).map_err(|e| fail(NAME, e))?;
    Ok(Value::Text(
        json!({"lower": b.lower, "upper": b.upper}).to_string(),
    ))
}

// ---------------------------------------------------------------------------------------
// Aggregates

/// `dist_empirical(x [, w])`.
pub struct DistEmpirical;

impl Aggregate<Option<SampleBuilder>, Value> for DistEmpirical {
    fn init(&self, _: &mut Context<'_>) -> Result<Option<SampleBuilder>> {
        Ok(None)
    }

    fn step(&self, ctx: &mut Context<'_>, b: &mut Option<SampleBuilder>) -> Result<()> {
        const NAME: &str = "dist_empirical";
        let weighted = ctx.len() > 1;
        let b = b.get_or_insert_with(|| SampleBuilder::new(weighted));
        let x = num(ctx, 0, "x", NAME)?;
        if weighted {
            let w = num(ctx, 1, "w", NAME)?;
            if let Some(w) = w {
                crate::stats::check_weight(w).map_err(|e| fail(NAME, e))?;
            }
            if let (Some(x), Some(w)) = (x, w) {
                b.push_weighted(x, w).map_err(|e| fail(NAME, e))?;
            }
        } else if let Some(x) = x {
            b.push(x).map_err(|e| fail(NAME, e))?;
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, b: Option<Option<SampleBuilder>>) -> Result<Value> {
        blob("dist_empirical", b.flatten())
    }
}

/// The BLOB of a finished builder, NULL when it holds nothing.
fn blob(name: &'static str, b: Option<SampleBuilder>) -> Result<Value> {
    let Some(b) = b else { return Ok(Value::Null) };
    let s = b.finish().map_err(|e| fail(name, e))?;
    Ok(if s.is_empty() {
        Value::Null
    } else {
        Value::Blob(empirical::encode(&s))
    })
}

/// `dist_merge(d)`.
pub struct DistMerge;

impl Aggregate<SampleBuilder, Value> for DistMerge {
    fn init(&self, _: &mut Context<'_>) -> Result<SampleBuilder> {
        Ok(SampleBuilder::new(false))
    }

    fn step(&self, ctx: &mut Context<'_>, b: &mut SampleBuilder) -> Result<()> {
        const NAME: &str = "dist_merge";
        let d = Dist::from_sql(ctx.get_raw(0), 1).map_err(|e| fail(NAME, e))?;
        if let Some(d) = d {
            let s = empirical(
                &d,
                1,
                "only samples merge: fit a model to the merged values instead",
            )
            .map_err(|e| fail(NAME, e))?;
            b.extend(s);
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, b: Option<SampleBuilder>) -> Result<Value> {
        blob("dist_merge", b)
    }
}

// ---------------------------------------------------------------------------------------
// Table-valued functions

/// Reads the distribution argument of a table-valued function.
fn table_dist(name: &'static str, v: Option<ValueRef<'_>>) -> Result<Option<Dist>> {
    v.map_or(Ok(None), |v| {
        Dist::from_sql(v, 1).map_err(|e| fail(name, e))
    })
}

/// `dist_steps(d)`.
pub(crate) struct Steps;

impl TableFunction for Steps {
    const NAME: &'static str = "dist_steps";
    const SCHEMA: &'static CStr = c"CREATE TABLE x(x REAL, cdf REAL, d HIDDEN)";
    const COLUMNS: usize = 2;
    const ARGS: &'static [&'static str] = &["d"];
    const REQUIRED: usize = 1;
    const SIGNATURE: &'static str = "dist_steps(d)";

    fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>> {
        let Some(d) = table_dist(Self::NAME, args.first().copied().flatten())? else {
            return Ok(Vec::new());
        };
        let s = empirical(
            &d,
            1,
            "a model's cdf has no steps: draw it with dist_curve(model, lo, hi, n)",
        )
        .map_err(|e| fail(Self::NAME, e))?;
        Ok(s.steps()
            .into_iter()
            .flat_map(|(x, f)| [Value::Real(x), Value::Real(f)])
            .collect())
    }
}

/// `dist_curve(d, lo, hi, n [, bandwidth])`.
pub(crate) struct Curve;

impl TableFunction for Curve {
    const NAME: &'static str = "dist_curve";
    const SCHEMA: &'static CStr = c"CREATE TABLE x(x REAL, cdf REAL, pdf REAL, \
        d HIDDEN, lo HIDDEN, hi HIDDEN, n HIDDEN, bandwidth HIDDEN)";
    const COLUMNS: usize = 3;
    const ARGS: &'static [&'static str] = &["d", "lo", "hi", "n", "bandwidth"];
    const REQUIRED: usize = 4;
    const SIGNATURE: &'static str = "dist_curve(d, lo, hi, n [, bandwidth])";

    fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>> {
        let name = Self::NAME;
        let arg = |i: usize| args.get(i).copied().flatten().unwrap_or(ValueRef::Null);
        let d = table_dist(name, Some(arg(0)))?;
        let lo = number(arg(1), "lo").map_err(|e| fail(name, e))?;
        let hi = number(arg(2), "hi").map_err(|e| fail(name, e))?;
        let n = whole(arg(3), "n").map_err(|e| fail(name, e))?;
        let bw = match args.get(4).copied().flatten() {
            None => Some(Bandwidth::Scott),
            Some(v) => bandwidth(v).map_err(|e| fail(name, e))?,
        };
        let (Some(d), Some(lo), Some(hi), Some(n), Some(bw)) = (d, lo, hi, n, bw) else {
            return Ok(Vec::new());
        };
        let n = check_grid(lo, hi, n).map_err(|e| fail(name, e))?;
        let density = d.density(bw);
        Ok(linspace(lo, hi, n)
            .into_iter()
            .flat_map(|x| {
                [
                    Value::Real(x),
                    real(d.cdf(x)),
                    real(density.map(|k| k.at(x))),
                ]
            })
            .collect())
    }
}

/// `dist_histogram(d [, rule])`.
pub(crate) struct Histogram;

impl TableFunction for Histogram {
    const NAME: &'static str = "dist_histogram";
    const SCHEMA: &'static CStr =
        c"CREATE TABLE x(lo REAL, hi REAL, count, density REAL, d HIDDEN, rule HIDDEN)";
    const COLUMNS: usize = 4;
    const ARGS: &'static [&'static str] = &["d", "rule"];
    const REQUIRED: usize = 1;
    const SIGNATURE: &'static str = "dist_histogram(d [, rule])";

    fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>> {
        let name = Self::NAME;
        let rule = match args.get(1).copied().flatten() {
            None => Some(BinRule::Sturges),
            Some(v) => bin_rule(v).map_err(|e| fail(name, e))?,
        };
        let d = table_dist(name, args.first().copied().flatten())?;
        let (Some(d), Some(rule)) = (d, rule) else {
            return Ok(Vec::new());
        };
        let s = empirical(
            &d,
            1,
            "a model has no counts: its density is the pdf column of dist_curve(model, lo, hi, n)",
        )
        .map_err(|e| fail(name, e))?;
        let bins = histogram(s, rule).map_err(|e| fail(name, e))?;
        let weighted = s.is_weighted();
        Ok(bins
            .into_iter()
            .flat_map(|b| {
                let count = if weighted {
                    Value::Real(b.count)
                } else {
                    Value::Integer(b.count as i64)
                };
                [
                    Value::Real(b.lo),
                    Value::Real(b.hi),
                    count,
                    Value::Real(b.density),
                ]
            })
            .collect())
    }
}
