//! Column aggregates: `ecdf`, `quantile`, `weighted_quantile`, `quantiles`, `profile`.
//!
//! Adapters only: they read and check arguments, keep the rows a kernel needs, and hand
//! them to [`crate::stats`]. NULL x is skipped, as SQL aggregates do; a group with no
//! non-NULL x gives NULL.
//!
//! `ecdf` and `quantile` are also window functions (`OVER (...)`): SQLite adds each row
//! entering the frame (`step`), removes each row leaving it (`inverse`) and asks for the
//! current answer (`value`). `ecdf` keeps running counts, O(1) per row. `quantile` keeps
//! the frame's values in an order-statistic tree ([`OrderStatistics`]), O(log w) per row
//! for a frame of w rows; as a plain aggregate it never builds the tree and stays O(n)
//! selection: the values are collected in a vector and moved into the tree only when
//! SQLite first calls `value` or `inverse`, which it does only in window use.

use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::{Value, ValueRef};
use serde_json::json;

use super::args::{ArgError, Constant, fail, number, text, whole};
use super::raw::{self, Args, RawWindow};
use super::{FunctionDef, Kind, aggregate};
use crate::stats::ecdf::{EcdfCounter, WeightedEcdfCounter};
use crate::stats::moments::Profile;
use crate::stats::order::OrderStatistics;
use crate::stats::quantile::{
    QuantileType, WeightedSorted, quantile_ranked, quantile_select, quantile_sorted,
};
use crate::stats::{StatsError, check_probability, check_weight};

type Result<T> = rusqlite::Result<T>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "ecdf",
        kind: Kind::Window,
        arities: &[2, 3],
        signature: "ecdf(x, t [, w])",
        summary: "share of x at or below t (weighted by w), in [0, 1]; O(1) memory, O(1) per row in a window",
        help: "The empirical cdf of the group at t: count(x <= t) / count(x), or with frequency \
               weights sum(w where x <= t) / sum(w), each sum exact and rounded once. t must be \
               the same on every row of a group. NULL x (or w) rows are skipped; NULL t gives \
               NULL; no rows gives NULL. Also a window function: ecdf(x, t) OVER (ORDER BY ... \
               ROWS BETWEEN 999 PRECEDING AND CURRENT ROW) is the share of the frame at or \
               below t, for ROWS, RANGE and GROUPS frames; a frame with no non-NULL x gives \
               NULL. Errors: non-numeric x, t or w; a negative or infinite weight.",
        example: "SELECT ecdf(column1, 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        register: raw::window::<EcdfState>,
    },
    FunctionDef {
        name: "quantile",
        kind: Kind::Window,
        arities: &[2, 3],
        signature: "quantile(x, p [, type])",
        summary: "empirical p-quantile of x; type 1..9 (Hyndman and Fan 1996), default 7; O(log w) per row in a window",
        help: "The p-quantile of the group by one of the nine Hyndman-Fan definitions (type 7 is \
               numpy's and R's default 'linear'; type 1 is the inverse of the ECDF). Uses \
               selection, O(n). p and type must be the same on every row of a group. NULL x is \
               skipped; NULL p or type gives NULL. Also a window function: quantile(x, 0.95) \
               OVER (ORDER BY ts ROWS BETWEEN 999 PRECEDING AND CURRENT ROW) is the rolling \
               95th percentile, exactly as if each frame were sorted, in O(log w) per row for \
               ROWS, RANGE and GROUPS frames; a frame with no non-NULL x gives NULL. Errors: p \
               outside [0, 1], type outside 1..9, non-numeric x.",
        example: "SELECT quantile(column1, 0.9) FROM (VALUES (1), (2), (3), (4), (5))",
        example_result: "4.6",
        register: raw::window::<QuantileState>,
    },
    FunctionDef {
        name: "weighted_quantile",
        kind: Kind::Aggregate,
        arities: &[3, 4],
        signature: "weighted_quantile(x, w, p [, type])",
        summary: "p-quantile of x with frequency weights w; equals quantile on replicated rows",
        help: "As quantile, with frequency weights: the total weight plays the part of n and each \
               value counts as often as its weight. With whole-number weights every type equals \
               quantile over the rows repeated that often. Zero weights carry no mass. Rows with \
               NULL x or NULL w are skipped. Errors: a negative or infinite weight, p outside \
               [0, 1], type outside 1..9.",
        example: "SELECT weighted_quantile(column1, column2, 0.5) FROM (VALUES (1, 3), (10, 1))",
        example_result: "1.0",
        register: |c, d| aggregate(c, d, || WeightedQuantile),
    },
    FunctionDef {
        name: "quantiles",
        kind: Kind::Aggregate,
        arities: &[2, 3],
        signature: "quantiles(x, ps [, type])",
        summary: "JSON array of the quantiles of x at each probability of the JSON array ps",
        help: "One sort, many quantiles: ps is a JSON array such as '[0.05, 0.5, 0.95]' and the \
               result is a JSON array of the same length (an undefined or infinite quantile is \
               null). Read it with SQLite's ->> or json_each. Errors: ps not a JSON array of \
               numbers in [0, 1], type outside 1..9.",
        example: "SELECT quantiles(column1, '[0, 0.5, 1]') FROM (VALUES (3), (1), (2))",
        example_result: "[1.0,2.0,3.0]",
        register: |c, d| aggregate(c, d, || Quantiles),
    },
    FunctionDef {
        name: "profile",
        kind: Kind::Aggregate,
        arities: &[1],
        signature: "profile(x)",
        summary: "JSON summary: n, mean, sd, min, q1, median, q3, max, skewness, excess_kurtosis",
        help: "A numeric summary of the group as a JSON object. sd uses the n - 1 divisor; \
               skewness and excess_kurtosis are the adjusted estimators G1 and G2 (Joanes and \
               Gill 1998); quartiles are type 7. A field that is undefined for the sample (sd of \
               one value, skewness of a constant sample) is null.",
        example: "SELECT profile(column1) ->> '$.median' FROM (VALUES (1), (2), (9))",
        example_result: "2.0",
        register: |c, d| aggregate(c, d, || ProfileAgg),
    },
];

/// Reads the optional `type` argument (`None` when the call has none; constant per
/// group), default 7.
fn read_type(
    v: Option<ValueRef<'_>>,
    seen: &mut Constant<i64>,
) -> std::result::Result<(), ArgError> {
    if let Some(v) = v {
        let t = whole(v, "type")?;
        if seen.observe(t, "type")?
            && let Some(t) = t
        {
            QuantileType::new(t)?;
        }
    }
    Ok(())
}

/// Argument `idx` of a rusqlite call, if the call has it.
fn optional<'a>(ctx: &'a Context<'_>, idx: usize) -> Option<ValueRef<'a>> {
    (ctx.len() > idx).then(|| ctx.get_raw(idx))
}

/// The group's quantile type; `None` when the type argument was NULL.
fn chosen_type(ctx_len_had_type: bool, seen: &Constant<i64>) -> Option<QuantileType> {
    if !ctx_len_had_type {
        return Some(QuantileType::DEFAULT);
    }
    seen.get().and_then(|&t| QuantileType::new(t).ok())
}

/// Reads a probability argument that must be constant per group.
#[inline(always)]
fn read_p(v: ValueRef<'_>, seen: &mut Constant<f64>) -> std::result::Result<(), ArgError> {
    let p = number(v, "p")?;
    if seen.observe(p, "p")?
        && let Some(p) = p
    {
        check_probability(p)?;
    }
    Ok(())
}

fn real(x: Option<f64>) -> Value {
    x.map_or(Value::Null, Value::Real)
}

// ---------------------------------------------------------------------------------------
// ecdf(x, t [, w])

/// State of `ecdf(x, t)` and `ecdf(x, t, w)`: a running count, O(1) memory. Registered on
/// the lean path (`functions::raw`).
#[derive(Debug, Default)]
pub struct EcdfState {
    t: Constant<f64>,
    plain: Option<EcdfCounter>,
    weighted: Option<WeightedEcdfCounter>,
}

impl EcdfState {
    /// F(t) of the rows counted so far (the group, or the current frame).
    fn current(&self) -> Option<f64> {
        match (&self.plain, &self.weighted) {
            (Some(c), _) => c.value(),
            (_, Some(c)) => c.value(),
            _ => None,
        }
    }
}

impl RawWindow for EcdfState {
    const NAME: &'static str = "ecdf";

    #[inline]
    fn step(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        let t = args.number(1, "t")?;
        self.t.observe(t, "t")?;
        let Some(x) = args.number(0, "x")? else {
            return Ok(());
        };
        let Some(t) = t else { return Ok(()) };
        if args.len() > 2 {
            let Some(w) = args.number(2, "w")? else {
                return Ok(());
            };
            Ok(self
                .weighted
                .get_or_insert_with(|| WeightedEcdfCounter::new(t))
                .add(x, w)?)
        } else {
            self.plain.get_or_insert_with(|| EcdfCounter::new(t)).add(x);
            Ok(())
        }
    }

    fn inverse(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        let Some(x) = args.number(0, "x")? else {
            return Ok(());
        };
        if args.len() > 2 {
            let Some(w) = args.number(2, "w")? else {
                return Ok(());
            };
            if let Some(c) = self.weighted.as_mut() {
                c.remove(x, w)?;
            }
        } else if let Some(c) = self.plain.as_mut() {
            if c.count() == 0 {
                return Err(StatsError::LeftFrameUnseen.into());
            }
            c.remove(x);
        }
        Ok(())
    }

    fn value(&mut self) -> std::result::Result<Option<f64>, ArgError> {
        Ok(self.current())
    }

    fn finalize(&mut self) -> std::result::Result<Option<f64>, ArgError> {
        Ok(self.current())
    }

    #[inline(always)]
    fn lane(&self) -> Option<u64> {
        self.plain.as_ref().map(|c| c.threshold().to_bits())
    }

    #[inline(always)]
    fn push(&mut self, x: f64) -> bool {
        match self.plain.as_mut() {
            Some(c) => {
                c.add(x);
                true
            }
            None => false,
        }
    }
}

// ---------------------------------------------------------------------------------------
// quantile(x, p [, type])

/// State of `quantile(x, p [, type])`: the non-NULL values of the group (or frame), in a
/// vector for the plain aggregate and in an order-statistic tree once SQLite uses it as a
/// window. Registered on the lean path (`functions::raw`).
#[derive(Debug, Default)]
pub struct QuantileState {
    xs: Vec<f64>,
    tree: Option<OrderStatistics>,
    p: Constant<f64>,
    ty: Constant<i64>,
    has_type: bool,
}

impl QuantileState {
    /// The order-statistic tree, built from the collected values on first use.
    fn tree(&mut self) -> std::result::Result<&mut OrderStatistics, StatsError> {
        let tree = match self.tree.take() {
            Some(t) => t,
            None => OrderStatistics::from_values(&std::mem::take(&mut self.xs))?,
        };
        Ok(self.tree.insert(tree))
    }

    /// The quantile of the values held: by the tree in window use, by selection otherwise.
    fn current(&mut self) -> std::result::Result<Option<f64>, StatsError> {
        let (Some(&p), Some(ty)) = (self.p.get(), chosen_type(self.has_type, &self.ty)) else {
            return Ok(None);
        };
        match &self.tree {
            Some(tree) => quantile_ranked(tree.len() as usize, p, ty, |i| {
                tree.kth(i as u64).unwrap_or(f64::NAN)
            }),
            None => quantile_select(&mut self.xs, p, ty),
        }
    }
}

impl RawWindow for QuantileState {
    const NAME: &'static str = "quantile";

    #[inline]
    fn step(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        read_p(args.get(1), &mut self.p)?;
        self.has_type = args.len() > 2;
        if self.has_type {
            read_type(Some(args.get(2)), &mut self.ty)?;
        }
        if let Some(x) = args.number(0, "x")? {
            match self.tree.as_mut() {
                Some(tree) => tree.insert(x)?,
                None => {
                    if !raw::try_push(&mut self.xs, x) {
                        return Err(ArgError::OutOfMemory {
                            held: self.xs.len(),
                        });
                    }
                }
            }
        }
        Ok(())
    }

    fn inverse(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        if let Some(x) = args.number(0, "x")? {
            self.tree()?
                .remove(x)
                .map_err(|_| StatsError::LeftFrameUnseen)?;
        }
        Ok(())
    }

    fn value(&mut self) -> std::result::Result<Option<f64>, ArgError> {
        self.tree()?;
        Ok(self.current()?)
    }

    fn finalize(&mut self) -> std::result::Result<Option<f64>, ArgError> {
        Ok(self.current()?)
    }

    #[inline(always)]
    fn lane(&self) -> Option<u64> {
        match (self.tree.is_none() && !self.has_type, self.p.get()) {
            (true, Some(p)) => Some(p.to_bits()),
            _ => None,
        }
    }

    #[inline(always)]
    fn push(&mut self, x: f64) -> bool {
        raw::try_push(&mut self.xs, x)
    }
}

// ---------------------------------------------------------------------------------------
// weighted_quantile(x, w, p [, type])

/// State of `weighted_quantile`: the (value, weight) pairs of the group.
#[derive(Debug, Default)]
pub struct WeightedQuantileState {
    pairs: Vec<(f64, f64)>,
    p: Constant<f64>,
    ty: Constant<i64>,
    has_type: bool,
}

/// `weighted_quantile(x, w, p [, type])`.
pub struct WeightedQuantile;

impl Aggregate<WeightedQuantileState, Value> for WeightedQuantile {
    fn init(&self, _: &mut Context<'_>) -> Result<WeightedQuantileState> {
        Ok(WeightedQuantileState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut WeightedQuantileState) -> Result<()> {
        const NAME: &str = "weighted_quantile";
        read_p(ctx.get_raw(2), &mut s.p).map_err(|e| fail(NAME, e))?;
        read_type(optional(ctx, 3), &mut s.ty).map_err(|e| fail(NAME, e))?;
        s.has_type = ctx.len() > 3;
        let x = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))?;
        let w = number(ctx.get_raw(1), "w").map_err(|e| fail(NAME, e))?;
        if let Some(w) = w {
            check_weight(w).map_err(|e| fail(NAME, e))?;
        }
        if let (Some(x), Some(w)) = (x, w) {
            s.pairs.push((x, w));
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<WeightedQuantileState>) -> Result<Value> {
        const NAME: &str = "weighted_quantile";
        let Some(s) = s else { return Ok(Value::Null) };
        let (Some(&p), Some(ty)) = (s.p.get(), chosen_type(s.has_type, &s.ty)) else {
            return Ok(Value::Null);
        };
        let sorted = WeightedSorted::new(s.pairs).map_err(|e| fail(NAME, e))?;
        Ok(real(sorted.quantile(p, ty).map_err(|e| fail(NAME, e))?))
    }
}

// ---------------------------------------------------------------------------------------
// quantiles(x, ps [, type])

/// Parses a JSON array of probabilities.
///
/// # Errors
/// [`ArgError::BadJson`] unless `s` is a JSON array of numbers, each in `[0, 1]`.
pub fn parse_probabilities(s: &str) -> std::result::Result<Vec<f64>, ArgError> {
    let bad = |detail: String| ArgError::BadJson { what: "ps", detail };
    let v: serde_json::Value = serde_json::from_str(s).map_err(|e| {
        bad(format!(
            "must be a JSON array of probabilities such as '[0.05, 0.5, 0.95]', got '{s}' ({e})"
        ))
    })?;
    let arr = v.as_array().ok_or_else(|| {
        bad(format!(
            "must be a JSON array of probabilities such as '[0.05, 0.5, 0.95]', got '{s}'"
        ))
    })?;
    arr.iter()
        .enumerate()
        .map(|(i, item)| {
            let p = item
                .as_f64()
                .ok_or_else(|| bad(format!("item {i} must be a number, got {item}")))?;
            check_probability(p)
                .map_err(|_| bad(format!("item {i} must be between 0 and 1, got {p}")))
        })
        .collect()
}

/// State of `quantiles`: the values and the probabilities.
#[derive(Debug, Default)]
pub struct QuantilesState {
    xs: Vec<f64>,
    ps_text: Constant<String>,
    ps: Option<Vec<f64>>,
    ty: Constant<i64>,
    has_type: bool,
}

/// `quantiles(x, ps [, type])`.
pub struct Quantiles;

impl Aggregate<QuantilesState, Value> for Quantiles {
    fn init(&self, _: &mut Context<'_>) -> Result<QuantilesState> {
        Ok(QuantilesState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut QuantilesState) -> Result<()> {
        const NAME: &str = "quantiles";
        let ps = text(ctx.get_raw(1), "ps").map_err(|e| fail(NAME, e))?;
        let same = match (s.ps_text.get(), ps) {
            (Some(first), Some(now)) => first == now,
            _ => false,
        };
        if !same
            && s.ps_text
                .observe(ps.map(str::to_owned), "ps")
                .map_err(|e| fail(NAME, e))?
            && let Some(ps) = ps
        {
            s.ps = Some(parse_probabilities(ps).map_err(|e| fail(NAME, e))?);
        }
        read_type(optional(ctx, 2), &mut s.ty).map_err(|e| fail(NAME, e))?;
        s.has_type = ctx.len() > 2;
        if let Some(x) = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))? {
            s.xs.push(x);
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<QuantilesState>) -> Result<Value> {
        const NAME: &str = "quantiles";
        let Some(mut s) = s else {
            return Ok(Value::Null);
        };
        let (Some(ps), Some(ty)) = (s.ps.as_ref(), chosen_type(s.has_type, &s.ty)) else {
            return Ok(Value::Null);
        };
        if s.xs.is_empty() {
            return Ok(Value::Null);
        }
        if s.xs.iter().any(|x| x.is_nan()) {
            return Err(fail(NAME, StatsError::NotANumber));
        }
        s.xs.sort_unstable_by(f64::total_cmp);
        let out: Vec<serde_json::Value> = ps
            .iter()
            .map(|&p| quantile_sorted(&s.xs, p, ty).map(|q| json!(q)))
            .collect::<std::result::Result<_, _>>()
            .map_err(|e| fail(NAME, e))?;
        Ok(Value::Text(serde_json::Value::Array(out).to_string()))
    }
}

// ---------------------------------------------------------------------------------------
// profile(x)

/// The JSON text of a [`Profile`]; undefined fields and infinities are JSON null. A
/// weighted profile (from `dist_profile` of a weighted distribution) adds
/// `total_weight` after `n`.
pub fn profile_json(p: &Profile) -> String {
    let mut v = json!({
        "n": p.n,
        "mean": p.mean,
        "sd": p.sd,
        "min": p.min,
        "q1": p.q1,
        "median": p.median,
        "q3": p.q3,
        "max": p.max,
        "skewness": p.skewness,
        "excess_kurtosis": p.excess_kurtosis,
    });
    if let (Some(w), Some(map)) = (p.total_weight, v.as_object_mut()) {
        map.shift_insert(1, "total_weight".to_string(), json!(w));
    }
    v.to_string()
}

/// `profile(x)`.
pub struct ProfileAgg;

impl Aggregate<Vec<f64>, Value> for ProfileAgg {
    fn init(&self, _: &mut Context<'_>) -> Result<Vec<f64>> {
        Ok(Vec::new())
    }

    fn step(&self, ctx: &mut Context<'_>, xs: &mut Vec<f64>) -> Result<()> {
        if let Some(x) = number(ctx.get_raw(0), "x").map_err(|e| fail("profile", e))? {
            xs.push(x);
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, xs: Option<Vec<f64>>) -> Result<Value> {
        let Some(mut xs) = xs else {
            return Ok(Value::Null);
        };
        xs.sort_unstable_by(f64::total_cmp);
        Ok(Profile::from_sorted(&xs).map_or(Value::Null, |p| Value::Text(profile_json(&p))))
    }
}
