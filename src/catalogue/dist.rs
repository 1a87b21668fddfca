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

use std::sync::Arc;

use serde_json::json;

use super::args::{ArgError, FunctionError, fail, number, whole};
use super::column::profile_json;
use super::column::{load_exact, save_exact};
use super::reader::{Call, NoMemo};
use super::scan::{Ready, Scan};
use super::state::{AggregateImp, Args, Reader, State, Writer, push, try_extend};
use super::value::{Arg, Out, describe};

use super::{FunctionDef, Imp, Kind, Range, Returns, TableImp};
use crate::stats::band::dkw_band;
use crate::stats::check_probability;
use crate::stats::grid::{check_grid, grid_point};
use crate::stats::histogram::{BinRule, histogram};
use crate::stats::kde::Bandwidth;
use crate::stats::quantile::QuantileType;
use crate::stats::sample::{Sample, SampleBuilder};
use crate::stats::series;
use crate::stats::sum::ExactSum;
use crate::value::{Dist, Size, empirical};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "dist_empirical",
        kind: Kind::Aggregate,
        returns: Returns::Blob,
        range: Range::Distribution,
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
        imp: Imp::Aggregate(AggregateImp::of::<DistEmpiricalState>()),
    },
    FunctionDef {
        name: "dist_series",
        kind: Kind::Aggregate,
        returns: Returns::Blob,
        range: Range::Distribution,
        arities: &[2],
        signature: "dist_series(x, t)",
        summary: "the empirical distribution of x, as dist_empirical, plus an effective sample size n_eff from the readings in the order of t",
        help: "Builds the same distribution as dist_empirical(x) (every dist_ function takes \
               it) and estimates from the readings in time order (t ascending, ties in t \
               broken by x) how many independent readings they are worth: n_eff = n / tau, \
               tau the integrated autocorrelation time of the indicators 1{x <= q} at the \
               nine deciles q, each cut by Geyer's (1992) initial monotone sequence window \
               (at most 1000 lags) and averaged with weights p(1 - p), clamped to [1, n] \
               (docs: src/stats/series.rs). dist_ks, dist_distance and dist_band then use \
               n_eff in place of n. Limits: it assumes the series is stationary (a trend or \
               a level shift inside the group reads as strong dependence, small n_eff); \
               readings should be evenly spaced in t (only their order is used); short \
               series (a few hundred readings) give noisy n_eff; fewer than 8 readings or \
               no spread give n_eff = n. t is a number in any unit, or ISO-8601 date-time \
               TEXT as SQLite's date functions read it ('2024-09-02 05:00', a T instead \
               of the space, seconds and fractions, Z or +HH:MM: moved to UTC); a time of \
               day without a date, or a day that does not exist, is refused. NULL x or NULL \
               t skips the row; an empty group gives NULL. Errors: x not a number, t \
               neither a number nor such a date-time, an infinite x or t.",
        example: "WITH RECURSIVE r(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM r WHERE i < 20) \
                  SELECT dist_n_eff(dist_series(i % 2, i)) FROM r",
        example_result: "20.0",
        imp: Imp::Aggregate(AggregateImp::of::<DistSeriesState>()),
    },
    FunctionDef {
        name: "dist_n_eff",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::NonNegative,
        arities: &[1],
        signature: "dist_n_eff(d)",
        summary: "effective sample size of d: n_eff of a dist_series value, n (the total weight) of a dist_empirical one",
        help: "The effective sample size that dist_ks, dist_distance and dist_band use: for a \
               value from dist_series the n_eff estimated from its readings' serial \
               dependence (see dist_series), for a merged one the sum of its parts' n_eff; \
               for a value from dist_empirical its n (the total weight when weighted), as a \
               REAL. NULL for a model (not a sample) and for a censored estimate (its \
               sampling error is that of the Kaplan-Meier or Turnbull estimate, which no \
               single size describes; dist_band gives Greenwood's interval), and for NULL d.",
        example: "SELECT dist_n_eff(dist_empirical(column1)) FROM (VALUES (1), (2), (4))",
        example_result: "3.0",
        imp: Imp::Scalar(n_eff),
    },
    FunctionDef {
        name: "dist_merge",
        kind: Kind::Aggregate,
        returns: Returns::Blob,
        range: Range::Distribution,
        arities: &[1],
        signature: "dist_merge(d)",
        summary: "the union of empirical distributions (shards, days, groups) as one BLOB",
        help: "Merges the empirical distributions of the group into one: the result is the \
               same BLOB, bit for bit, as dist_empirical over all their rows at once, so \
               per-day or per-shard values can be rolled up without the raw data. Merging \
               a weighted with an unweighted distribution gives each unweighted value weight \
               1. Merging values from dist_series gives a series value whose n_eff is the \
               sum of the parts' (a plain part counts its n): right when the parts are \
               independent series (different trailers, or days far enough apart), and \
               conservative when they are pieces of one series cut apart. NULL d is \
               skipped. Errors: d not a distribution BLOB, or a model (a model is not a \
               set of values; fit the merged values instead).",
        example: "WITH days(d) AS (SELECT dist_empirical(column1) FROM (VALUES (1), (2)) \
                  UNION ALL SELECT dist_empirical(column1) FROM (VALUES (3))) \
                  SELECT dist_quantile(dist_merge(d), 0.5) FROM days",
        example_result: "2.0",
        imp: Imp::Aggregate(AggregateImp::of::<DistMergeState>()),
    },
    FunctionDef {
        name: "dist_cdf",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Probability,
        arities: &[2],
        signature: "dist_cdf(d, t)",
        summary: "cdf of distribution d at t: the share of its mass at or below t",
        help: "For an empirical distribution, the ECDF: count(x <= t) / n, or with weights \
               the weight at or below t over the total weight, by binary search. For a model \
               (JSON from dist_fit, dist_mixture or dist_model), its cdf: statrs and libm's \
               erfc for the families, the weighted sum of normal cdfs for a mixture; 0 at \
               -Inf and 1 at Inf. For a censored estimate (dist_censored), its cdf where the \
               estimate determines it, NULL inside a Turnbull interval and beyond the last \
               censored reading. NULL d or t gives NULL. Errors: d not a distribution (an \
               invalid model names the field), non-numeric t.",
        example: "SELECT dist_cdf(dist_empirical(column1), 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        imp: Imp::Scalar(cdf),
    },
    FunctionDef {
        name: "dist_quantile",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Quantile,
        arities: &[2, 3],
        signature: "dist_quantile(d, p [, type])",
        summary: "p-quantile of distribution d; type 1..9 as in quantile, default 7",
        help: "The p-quantile of an empirical distribution by one of the nine Hyndman-Fan \
               definitions, the same kernel as quantile and weighted_quantile (with weights \
               the total weight plays the part of n). For a model, the inverse of its cdf (a \
               mixture's by safeguarded Newton-bisection), so that dist_quantile(m, \
               dist_cdf(m, t)) = t; type is a rule for samples, checked but ignored for a \
               model, so one query serves both kinds. p = 0 and 1 give the ends of a model's \
               support: -Inf or Inf (REAL) where it is unbounded. A censored estimate \
               (dist_censored) gives inf{t: F(t) >= p} (type checked but not used), NULL when \
               that mass lies in a Turnbull interval or beyond the last censored reading. NULL d, p or type gives \
               NULL. Errors: p outside [0, 1], type outside 1..9, d not a distribution.",
        example: "SELECT dist_quantile(dist_empirical(column1), 0.9) \
                  FROM (VALUES (1), (2), (3), (4), (5))",
        example_result: "4.6",
        imp: Imp::Scalar(quantile),
    },
    FunctionDef {
        name: "dist_pdf",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Density,
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
        imp: Imp::Scalar(pdf),
    },
    FunctionDef {
        name: "dist_n",
        kind: Kind::Scalar,
        returns: Returns::Count,
        range: Range::NonNegative,
        arities: &[1],
        signature: "dist_n(d)",
        summary: "number of observations in d (INTEGER), its total weight (REAL) when weighted, a model's fitted n",
        help: "The count of values an unweighted empirical distribution was built from, as \
               an INTEGER; for a weighted one, the total weight, as a REAL. For a model, the \
               number of values it was fitted to (its n field), NULL for a model built from \
               known parameters. For a censored estimate, the number of readings (censored \
               ones included). NULL d gives NULL.",
        example: "SELECT dist_n(dist_empirical(column1, column2)) FROM (VALUES (1, 2.5), (3, 0.5))",
        example_result: "3.0",
        imp: Imp::Scalar(size),
    },
    FunctionDef {
        name: "dist_mean",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Real,
        arities: &[1],
        signature: "dist_mean(d)",
        summary: "mean of distribution d",
        help: "The (weighted) mean, by a compensated sum; for a model, the mean of the \
               distribution. NULL when d holds an infinite value, when a model's mean \
               overflows (a lognormal with a huge sigma), and for NULL d.",
        example: "SELECT dist_mean(dist_empirical(column1)) FROM (VALUES (1), (2), (6))",
        example_result: "3.0",
        imp: Imp::Scalar(mean),
    },
    FunctionDef {
        name: "dist_sd",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::NonNegative,
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
        imp: Imp::Scalar(sd),
    },
    FunctionDef {
        name: "dist_profile",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::PROFILE),
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
        imp: Imp::Scalar(profile),
    },
    FunctionDef {
        name: "dist_band",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::BAND),
        arities: &[3],
        signature: "dist_band(d, t, alpha)",
        summary: "JSON {lower, upper}: DKW confidence band of the empirical cdf of d at t; for a Kaplan-Meier estimate, Greenwood's pointwise interval",
        help: "The Dvoretzky-Kiefer-Wolfowitz band with Massart's constant: the ECDF at t \
               plus and minus sqrt(ln(2/alpha) / (2n)), clipped to [0, 1]. The band holds the \
               true cdf at every t at once with probability at least 1 - alpha (for \
               continuous data; n is the total weight when weighted). For a value from \
               dist_series n_eff takes the place of n (an approximation: DKW's bound is \
               proven for independent readings) and the JSON adds n_eff. For a Kaplan-Meier or \
               mirrored estimate (dist_censored) it is instead Greenwood's (1926) POINTWISE \
               1 - alpha interval for the cdf at t, on the log-log scale (S^exp(+-z se / \
               (S |ln S|)), S the Kaplan-Meier survival, for the mirror its cdf), with the \
               JSON adding cdf, se (Greenwood's standard error) and method 'greenwood \
               log-log'; NULL where the cdf is undefined. NULL arguments give NULL. Errors: \
               alpha outside (0, 1), d not an empirical distribution (a model is not a sample \
               and has no sampling band), a Turnbull estimate (no Greenwood formula).",
        example: "SELECT round(dist_band(dist_empirical(column1), 2, 0.5) ->> '$.lower', 4) \
                  FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.0837",
        imp: Imp::Scalar(band),
    },
    FunctionDef {
        name: "dist_steps",
        kind: Kind::Table,
        returns: Returns::Rows,
        range: Range::Rows(&[Range::Real, Range::Probability]),
        arities: &[1],
        signature: "dist_steps(d)",
        summary: "rows (x, cdf): the step points of the empirical cdf of d, for plotting",
        help: "One row per distinct value x of the empirical distribution d, ascending, with \
               the cdf at x (the top of the step). Use in FROM, also in joins: \
               FROM sensors s, dist_steps(s.d). For a censored estimate, one row at each point \
               of mass and at the right end of each Turnbull interval, with the cdf there \
               (between a Turnbull interval's ends the cdf is undefined: dist_cdf gives \
               NULL; no row for mass beyond the last censored reading). NULL d gives no rows. Errors: d not an \
               empirical distribution (a model's cdf has no steps: draw it with dist_curve).",
        example: "SELECT group_concat(x || ':' || cdf, ' ') FROM dist_steps(\
                  (SELECT dist_empirical(column1) FROM (VALUES (1), (2), (2), (3))))",
        example_result: "1.0:0.25 2.0:0.75 3.0:1.0",
        imp: Imp::Table(TableImp {
            columns: &[("x", "REAL"), ("cdf", "REAL")],
            args: &["d"],
            rows: steps,
        }),
    },
    FunctionDef {
        name: "dist_curve",
        kind: Kind::Table,
        returns: Returns::Rows,
        range: Range::Rows(&[Range::Real, Range::Probability, Range::Density]),
        arities: &[4, 5],
        signature: "dist_curve(d, lo, hi, n [, bandwidth])",
        summary: "rows (x, cdf, pdf) of d on n evenly spaced points from lo to hi",
        help: "Evaluates the distribution on the grid lo, lo + (hi - lo)/(n - 1), ..., hi \
               (numpy.linspace's arithmetic): the cdf, and the density (for an empirical \
               distribution the kernel estimate of dist_pdf, bandwidth as there, NULL when \
               undefined; for a model its own cdf and density, as dist_cdf and dist_pdf give \
               them, the bandwidth checked but ignored; for a censored estimate the cdf where \
               defined, NULL elsewhere, and a NULL pdf). Drawn beside dist_steps of the data, \
               it compares a fitted cdf with the ECDF. In SQLite each row is computed as it \
               is read, so LIMIT or an interrupt stops the work (a density point is a kernel \
               sum over the values near it). NULL arguments give no rows. Errors: \
               lo >= hi or not finite, n not a whole number from 2 to 1000000, an unknown \
               bandwidth, d not a distribution.",
        example: "SELECT group_concat(cdf, ' ') FROM dist_curve(\
                  (SELECT dist_empirical(column1) FROM (VALUES (0), (1))), 0, 1, 3)",
        example_result: "0.5 0.5 1.0",
        imp: Imp::Table(TableImp {
            columns: &[("x", "REAL"), ("cdf", "REAL"), ("pdf", "REAL")],
            args: &["d", "lo", "hi", "n", "bandwidth"],
            rows: curve,
        }),
    },
    FunctionDef {
        name: "dist_histogram",
        kind: Kind::Table,
        returns: Returns::Rows,
        range: Range::Rows(&[
            Range::Real,
            Range::Real,
            Range::NonNegative,
            Range::NonNegative,
        ]),
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
        imp: Imp::Table(TableImp {
            columns: &[
                ("lo", "REAL"),
                ("hi", "REAL"),
                ("count", ""),
                ("density", "REAL"),
            ],
            args: &["d", "rule"],
            rows: histogram_rows,
        }),
    },
];

/// The sample of an empirical distribution argument (number `arg`, from 1); a model is an
/// error saying what to do `instead`.
pub(crate) fn empirical<'a>(
    d: &'a Dist,
    arg: usize,
    instead: &'static str,
) -> std::result::Result<&'a Sample, ArgError> {
    match d {
        Dist::Empirical(s) | Dist::Series(s, _) => Ok(s),
        Dist::Model(_) => Err(ArgError::NeedsEmpirical {
            arg,
            got: d.kind(),
            instead,
        }),
        Dist::Censored(_) => Err(ArgError::NotForCensored { arg, got: d.kind() }),
    }
}

/// Reads a bandwidth: 'scott', 'silverman' or a positive number (also as numeric TEXT).
/// NULL gives `None`.
fn bandwidth(v: Arg<'_>) -> std::result::Result<Option<Bandwidth>, ArgError> {
    match v {
        Arg::Null => Ok(None),
        Arg::Text(t) => {
            let s = String::from_utf8_lossy(t);
            match Bandwidth::parse(&s) {
                Ok(b) => Ok(Some(b)),
                Err(e) => match s.trim().parse::<f64>() {
                    Ok(h) => Ok(Some(Bandwidth::fixed(h)?)),
                    Err(_) => Err(e.into()),
                },
            }
        }
        Arg::Blob(_) => Err(ArgError::BadOption {
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
fn bin_rule(v: Arg<'_>) -> std::result::Result<Option<BinRule>, ArgError> {
    match v {
        Arg::Text(t) => {
            let s = String::from_utf8_lossy(t);
            match BinRule::parse(&s) {
                Ok(r) => Ok(Some(r)),
                Err(e) => match whole(v, "rule") {
                    Ok(Some(k)) => Ok(Some(BinRule::count(k)?)),
                    _ => Err(e.into()),
                },
            }
        }
        Arg::Blob(_) => Err(ArgError::BadOption {
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

fn cdf(call: &mut Call<'_>) -> Result<Out> {
    let d = call.dist(0)?;
    let t = call.number(1, "t")?;
    let (Some(d), Some(t)) = (d, t) else {
        return Ok(Out::Null);
    };
    Ok(Out::real(d.cdf(t)))
}

fn quantile(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_quantile";
    let d = call.dist(0)?;
    let p = call.number(1, "p")?;
    if let Some(p) = p {
        check_probability(p).map_err(|e| fail(NAME, e))?;
    }
    let ty = if call.len() > 2 {
        match whole(call.get(2), "type").map_err(|e| fail(NAME, e))? {
            None => return Ok(Out::Null),
            Some(t) => QuantileType::new(t).map_err(|e| fail(NAME, e))?,
        }
    } else {
        QuantileType::DEFAULT
    };
    let (Some(d), Some(p)) = (d, p) else {
        return Ok(Out::Null);
    };
    Ok(Out::real(d.quantile(p, ty).map_err(|e| fail(NAME, e))?))
}

fn pdf(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_pdf";
    let d = call.dist(0)?;
    let t = call.number(1, "t")?;
    let bw = if call.len() > 2 {
        match bandwidth(call.get(2)).map_err(|e| fail(NAME, e))? {
            None => return Ok(Out::Null),
            Some(b) => b,
        }
    } else {
        Bandwidth::Scott
    };
    let (Some(d), Some(t)) = (d, t) else {
        return Ok(Out::Null);
    };
    Ok(Out::real(d.density(bw).map(|k| k.at(t))))
}

fn size(call: &mut Call<'_>) -> Result<Out> {
    Ok(match call.dist(0)?.and_then(|d| d.size()) {
        None => Out::Null,
        Some(Size::Count(n)) => Out::Integer(i64::try_from(n).unwrap_or(i64::MAX)),
        Some(Size::Weight(w)) => Out::Real(w),
    })
}

fn n_eff(call: &mut Call<'_>) -> Result<Out> {
    Ok(Out::real(call.dist(0)?.and_then(|d| d.n_eff())))
}

fn mean(call: &mut Call<'_>) -> Result<Out> {
    Ok(Out::real(call.dist(0)?.and_then(|d| d.mean())))
}

fn sd(call: &mut Call<'_>) -> Result<Out> {
    Ok(Out::real(call.dist(0)?.and_then(|d| d.sd())))
}

fn profile(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_profile";
    let Some(d) = call.dist(0)? else {
        return Ok(Out::Null);
    };
    let s = empirical(
        &d,
        1,
        "for a model use dist_mean, dist_sd and dist_quantile",
    )
    .map_err(|e| fail(NAME, e))?;
    Ok(s.profile()
        .map_or(Out::Null, |p| Out::Text(profile_json(&p))))
}

fn band(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_band";
    let d = call.dist(0)?;
    let t = call.number(1, "t")?;
    let alpha = call.number(2, "alpha")?;
    let (Some(d), Some(t), Some(alpha)) = (d, t, alpha) else {
        return Ok(Out::Null);
    };
    if let Dist::Censored(c) = &*d {
        return Ok(match c.band(t, alpha).map_err(|e| fail(NAME, e))? {
            None => Out::Null,
            Some(b) => Out::Text(
                json!({
                    "lower": b.lower,
                    "upper": b.upper,
                    "cdf": b.cdf,
                    "se": b.se,
                    "method": "greenwood log-log",
                })
                .to_string(),
            ),
        });
    }
    let s = empirical(
        &d,
        1,
        "a model is not a sample and has no sampling band; compare it with the data by dist_ks",
    )
    .map_err(|e| fail(NAME, e))?;
    let Some(f) = s.cdf(t) else {
        return Ok(Out::Null);
    };
    if let Dist::Series(_, n_eff) = &*d {
        let b = dkw_band(f, *n_eff, alpha).map_err(|e| fail(NAME, e))?;
        return Ok(Out::Text(
            json!({"lower": b.lower, "upper": b.upper, "n_eff": n_eff}).to_string(),
        ));
    }
    let b = dkw_band(f, s.total_weight(), alpha).map_err(|e| fail(NAME, e))?;
    Ok(Out::Text(
        json!({"lower": b.lower, "upper": b.upper}).to_string(),
    ))
}

// ---------------------------------------------------------------------------------------
// Aggregates

/// The state of an aggregate that builds an empirical distribution: the values (and
/// weights) so far. `K` says how a row adds to it.
#[derive(Debug)]
pub struct BuilderState<K> {
    b: Option<SampleBuilder>,
    /// `dist_merge`: the exact sum of the parts' effective sizes (a plain part's total
    /// weight), and whether any part was a series value.
    n_eff: ExactSum,
    series: bool,
    kind: std::marker::PhantomData<K>,
}

impl<K> Default for BuilderState<K> {
    fn default() -> Self {
        BuilderState {
            b: None,
            n_eff: ExactSum::default(),
            series: false,
            kind: std::marker::PhantomData,
        }
    }
}

/// A merged value's effective size: the parts' sum, kept within
/// `[min(1, total weight), total weight]` (rounding may carry the sum just past the total).
fn merged_n_eff(sum: f64, total: f64) -> f64 {
    sum.min(total).max(total.min(1.0))
}

/// How a row adds to a [`BuilderState`].
pub trait BuildRow: Send + Sync + 'static {
    /// The SQL name.
    const NAME: &'static str;
    /// Adds a row.
    ///
    /// # Errors
    /// The function's argument errors.
    fn step(b: &mut Option<SampleBuilder>, n_eff: &mut NEff<'_>, args: &Args<'_>) -> Result<()>;
}

/// Where a row of `dist_merge` adds its effective size.
pub struct NEff<'a> {
    sum: &'a mut ExactSum,
    series: &'a mut bool,
}

impl<K: BuildRow> State for BuilderState<K> {
    const NAME: &'static str = K::NAME;

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut n_eff = NEff {
            sum: &mut self.n_eff,
            series: &mut self.series,
        };
        K::step(&mut self.b, &mut n_eff, args)
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        self.series |= other.series;
        self.n_eff.absorb(&other.n_eff);
        let Some(theirs) = other.b else {
            return Ok(());
        };
        let Some(b) = self.b.as_mut() else {
            self.b = Some(theirs);
            return Ok(());
        };
        let part = theirs.finish().map_err(|e| fail(K::NAME, e))?;
        b.extend(&part).map_err(|e| fail(K::NAME, e))?;
        Ok(())
    }

    fn finalize(&mut self) -> Result<Out> {
        let Some(b) = self.b.take() else {
            return Ok(Out::Null);
        };
        let s = b.finish().map_err(|e| fail(K::NAME, e))?;
        Ok(if s.is_empty() {
            Out::Null
        } else if self.series {
            let n_eff = merged_n_eff(self.n_eff.value(), s.total_weight());
            Out::Blob(empirical::try_encode_series(&s, n_eff).map_err(|e| fail(K::NAME, e))?)
        } else {
            Out::Blob(empirical::try_encode(&s).map_err(|e| fail(K::NAME, e))?)
        })
    }

    /// The saved form: a flag for "weighted" (a builder of `dist_empirical(x, w)` whose
    /// rows all had zero weight holds nothing, yet stays weighted), then the existing BLOB
    /// (docs/empirical-blob.md) of what the part holds; then whether a series part was
    /// seen and the exact sum of the parts' effective sizes.
    fn save(&self, w: &mut Writer) {
        match &self.b {
            None => w.u8(0),
            Some(b) => {
                w.u8(if b.is_weighted() { 2 } else { 1 });
                let blob = b.clone().finish().ok().filter(|s| !s.is_empty());
                w.opt_bytes(blob.as_ref().map(empirical::encode).as_deref());
            }
        }
        w.bool(self.series);
        save_exact(w, &self.n_eff);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let tag = r.u8()?;
        let mut state = Self::default();
        if tag > 2 {
            return Err(ArgError::BadState(format!("a builder tag {tag}")));
        }
        if tag != 0 {
            let mut b = SampleBuilder::new(tag == 2);
            if let Some(bytes) = r.opt_bytes()? {
                let s = empirical::decode(bytes)
                    .map_err(|e| ArgError::BadState(format!("its distribution BLOB: {e}")))?;
                b.extend(&s)?;
            }
            state.b = Some(b);
        }
        state.series = r.bool()?;
        state.n_eff = load_exact(r)?;
        Ok(state)
    }
}

/// `dist_empirical(x [, w])`: rows of values (and weights).
#[derive(Debug)]
pub struct FromRows;

impl BuildRow for FromRows {
    const NAME: &'static str = "dist_empirical";

    fn step(b: &mut Option<SampleBuilder>, _: &mut NEff<'_>, args: &Args<'_>) -> Result<()> {
        let weighted = args.len() > 1;
        let b = b.get_or_insert_with(|| SampleBuilder::new(weighted));
        let mut go = || -> std::result::Result<(), ArgError> {
            let x = number(args.get(0), "x")?;
            if weighted {
                let w = number(args.get(1), "w")?;
                if let Some(w) = w {
                    crate::stats::check_weight(w)?;
                }
                if let (Some(x), Some(w)) = (x, w) {
                    b.push_weighted(x, w)?;
                }
            } else if let Some(x) = x {
                b.push(x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }
}

/// `dist_merge(d)`: rows of empirical distributions.
#[derive(Debug)]
pub struct FromDists;

impl BuildRow for FromDists {
    const NAME: &'static str = "dist_merge";

    fn step(b: &mut Option<SampleBuilder>, n_eff: &mut NEff<'_>, args: &Args<'_>) -> Result<()> {
        let b = b.get_or_insert_with(|| SampleBuilder::new(false));
        let row = [args.get(0)];
        let mut memo = NoMemo;
        let Some(d) = Call::new(Self::NAME, &row, &mut memo).dist(0)? else {
            return Ok(());
        };
        let s = empirical(
            &d,
            1,
            "only samples merge: fit a model to the merged values instead",
        )
        .map_err(|e| fail(Self::NAME, e))?;
        *n_eff.series |= matches!(&*d, Dist::Series(..));
        let part = d.n_eff().unwrap_or(s.total_weight());
        n_eff.sum.add(part).map_err(|e| fail(Self::NAME, e))?;
        b.extend(s).map_err(|e| fail(Self::NAME, e))?;
        Ok(())
    }
}

/// State of `dist_empirical(x [, w])`.
pub type DistEmpiricalState = BuilderState<FromRows>;

/// State of `dist_merge(d)`.
pub type DistMergeState = BuilderState<FromDists>;

/// State of `dist_series(x, t)`: the readings as (t, x) pairs, in arrival order until
/// `finalize` sorts them by t (ties by x), so the answer never depends on row order.
#[derive(Debug, Default)]
pub struct DistSeriesState {
    t: Vec<f64>,
    x: Vec<f64>,
}

impl State for DistSeriesState {
    const NAME: &'static str = "dist_series";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            let x = number(args.get(0), "x")?;
            let t = super::time::time(args.get(1), "t")?;
            let (Some(x), Some(t)) = (x, t) else {
                return Ok(());
            };
            series::check_reading(x)?;
            series::check_time(t)?;
            push(&mut self.t, t)?;
            if let Err(e) = push(&mut self.x, x) {
                self.t.pop();
                return Err(e);
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        try_extend(&mut self.t, &other.t).map_err(|e| fail(Self::NAME, e))?;
        try_extend(&mut self.x, &other.x).map_err(|e| {
            self.t.truncate(self.x.len());
            fail(Self::NAME, e)
        })
    }

    fn finalize(&mut self) -> Result<Out> {
        if self.x.is_empty() {
            return Ok(Out::Null);
        }
        let mut pairs: Vec<(f64, f64)> = Vec::new();
        pairs
            .try_reserve_exact(self.x.len())
            .map_err(|_| fail(Self::NAME, ArgError::OutOfMemory { held: self.x.len() }))?;
        pairs.extend(self.t.iter().copied().zip(self.x.iter().copied()));
        pairs.sort_by(series::time_order);
        let in_order: Vec<f64> = pairs.iter().map(|p| p.1).collect();
        let sample = Sample::from_values(in_order.clone()).map_err(|e| fail(Self::NAME, e))?;
        let e =
            series::effective_size(&in_order, sample.values()).map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Blob(
            empirical::try_encode_series(&sample, e.n_eff).map_err(|e| fail(Self::NAME, e))?,
        ))
    }

    /// The saved form: the times, then the readings, each as f64s, in arrival order.
    fn save(&self, w: &mut Writer) {
        w.f64s(&self.t);
        w.f64s(&self.x);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let t = r.f64s()?;
        let x = r.f64s()?;
        if t.len() != x.len() {
            return Err(ArgError::BadState(format!(
                "{} times for {} readings",
                t.len(),
                x.len()
            )));
        }
        for (&t, &x) in t.iter().zip(&x) {
            series::check_time(t)?;
            series::check_reading(x)?;
        }
        Ok(DistSeriesState { t, x })
    }
}

// ---------------------------------------------------------------------------------------
// Table-valued functions

/// `dist_steps(d)`.
fn steps(call: &mut Call<'_>) -> Result<Box<dyn Scan>> {
    let Some(d) = call.dist(0)? else {
        return Ok(Ready::empty());
    };
    if let Dist::Censored(c) = &*d {
        // Where the estimate's cdf is defined: at the right end of each piece.
        let rows = c
            .pieces()
            .iter()
            .filter(|p| p.hi.is_finite())
            .flat_map(|p| [Out::Real(p.hi), Out::Real(p.cdf)])
            .collect();
        return Ok(Ready::rows(rows, 2));
    }
    let s = empirical(
        &d,
        1,
        "a model's cdf has no steps: draw it with dist_curve(model, lo, hi, n)",
    )
    .map_err(|e| call.fail(e))?;
    let rows = s
        .steps()
        .into_iter()
        .flat_map(|(x, f)| [Out::Real(x), Out::Real(f)])
        .collect();
    Ok(Ready::rows(rows, 2))
}

/// `dist_curve(d, lo, hi, n [, bandwidth])`: the rows are computed one at a time as the
/// engine reads them ([`CurveScan`]).
fn curve(call: &mut Call<'_>) -> Result<Box<dyn Scan>> {
    let d = call.dist(0)?;
    let lo = call.number(1, "lo")?;
    let hi = call.number(2, "hi")?;
    let n = call.whole(3, "n")?;
    let bw = match call.optional(4) {
        None => Some(Bandwidth::Scott),
        Some(v) => bandwidth(v).map_err(|e| call.fail(e))?,
    };
    let (Some(d), Some(lo), Some(hi), Some(n), Some(bw)) = (d, lo, hi, n, bw) else {
        return Ok(Ready::empty());
    };
    let n = check_grid(lo, hi, n).map_err(|e| call.fail(e))?;
    // The rule's bandwidth, chosen once for the whole grid; `None` where d has no
    // density (the pdf column is NULL).
    let bandwidth = d
        .density(bw)
        .map(|k| k.bandwidth().map_or(bw, Bandwidth::Fixed));
    Ok(Box::new(CurveScan {
        name: call.name(),
        d,
        lo,
        hi,
        n,
        at: 0,
        bandwidth,
    }))
}

/// The rows of `dist_curve`: point `at` of the grid, its cdf and its density.
struct CurveScan {
    name: &'static str,
    d: Arc<Dist>,
    lo: f64,
    hi: f64,
    n: usize,
    at: usize,
    bandwidth: Option<Bandwidth>,
}

impl Scan for CurveScan {
    fn next_row(&mut self, row: &mut Vec<Out>) -> Result<bool> {
        if self.at >= self.n {
            return Ok(false);
        }
        // A density point is a kernel sum over the values near it (seconds for thousands
        // of points over a million values): ask the engine before each one.
        if self.bandwidth.is_some() && crate::stats::cancel::requested() {
            return Err(fail(self.name, ArgError::Interrupted));
        }
        let x = grid_point(self.lo, self.hi, self.n, self.at);
        self.at += 1;
        let pdf = self
            .bandwidth
            .and_then(|bw| self.d.density(bw))
            .map(|k| k.at(x));
        row.extend([Out::Real(x), Out::real(self.d.cdf(x)), Out::real(pdf)]);
        Ok(true)
    }
}

/// `dist_histogram(d [, rule])`.
fn histogram_rows(call: &mut Call<'_>) -> Result<Box<dyn Scan>> {
    let rule = match call.optional(1) {
        None => Some(BinRule::Sturges),
        Some(v) => bin_rule(v).map_err(|e| call.fail(e))?,
    };
    let d = call.dist(0)?;
    let (Some(d), Some(rule)) = (d, rule) else {
        return Ok(Ready::empty());
    };
    let s = empirical(
        &d,
        1,
        "a model has no counts: its density is the pdf column of dist_curve(model, lo, hi, n)",
    )
    .map_err(|e| call.fail(e))?;
    let bins = histogram(s, rule).map_err(|e| call.fail(e))?;
    let weighted = s.is_weighted();
    let rows = bins
        .into_iter()
        .flat_map(|b| {
            let count = if weighted {
                Out::Real(b.count)
            } else {
                Out::Integer(b.count as i64)
            };
            [
                Out::Real(b.lo),
                Out::Real(b.hi),
                count,
                Out::Real(b.density),
            ]
        })
        .collect();
    Ok(Ready::rows(rows, 4))
}

#[cfg(test)]
mod tests {
    use std::cell::Cell;
    use std::rc::Rc;

    use super::*;
    use crate::stats::cancel::with_check;
    use crate::stats::grid::linspace;

    /// `dist_curve` computes a row only when asked: reading the arguments evaluates no
    /// density, each row asks for cancellation once, and an interrupt between rows stops
    /// the scan with the function's error. The rows are those of the whole grid at once
    /// (numpy's linspace arithmetic, the kernel density at each point) bit for bit.
    #[test]
    fn curve_rows_are_computed_one_at_a_time() {
        let s = Sample::from_values((0..2000).map(|i| f64::from(i % 37) * 0.25).collect()).unwrap();
        let blob = crate::value::empirical::encode(&s);
        let args = [
            Arg::Blob(&blob),
            Arg::Real(0.0),
            Arg::Real(9.0),
            Arg::Integer(50),
        ];
        let asked = Rc::new(Cell::new(0));
        let count = Rc::clone(&asked);
        let mut memo = NoMemo;
        let mut call = Call::new("dist_curve", &args, &mut memo);
        let (rows, err) = with_check(
            Box::new(move || {
                count.set(count.get() + 1);
                count.get() > 3
            }),
            || {
                let mut scan = curve(&mut call).unwrap();
                assert_eq!(
                    asked.get(),
                    0,
                    "no density before the first row is asked for"
                );
                let mut rows = Vec::new();
                let mut row = Vec::new();
                let err = loop {
                    match scan.next_row(&mut row) {
                        Ok(true) => rows.push(std::mem::take(&mut row)),
                        Ok(false) => break None,
                        Err(e) => break Some(e),
                    }
                };
                (rows, err)
            },
        );
        assert_eq!(rows.len(), 3);
        assert_eq!(err.unwrap().to_string(), "dist_curve: interrupted");
        let d = Dist::Empirical(s);
        let kde = d.density(Bandwidth::Scott).unwrap();
        for (row, x) in rows.iter().zip(linspace(0.0, 9.0, 50)) {
            assert_eq!(
                row,
                &vec![Out::Real(x), Out::real(d.cdf(x)), Out::Real(kde.at(x))]
            );
        }
    }
}
