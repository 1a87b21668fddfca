//! Column aggregates: `ecdf`, `quantile`, `median`, `weighted_quantile`, `quantiles`,
//! `profile`.
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

use std::sync::Arc;

use serde_json::json;

use super::args::{ArgError, Constant, FunctionError, TextConstant, fail, number, whole};
use super::state::{
    Adopted, AggregateImp, Args, Lane, Reader, Run, Sink, State, Writer, push, runs_of, try_extend,
};
use super::value::{Arg, Out};
use super::{FunctionDef, Imp, Kind, Range, Returns};
use crate::stats::ecdf::{EcdfCounter, WeightedEcdfCounter};
use crate::stats::moments::Profile;
use crate::stats::order::OrderStatistics;
use crate::stats::quantile::{
    QuantileType, WeightedSorted, quantile_ranked, quantile_select, quantile_select_runs,
    quantile_sorted,
};
use crate::stats::sum::ExactSum;
use crate::stats::{StatsError, check_probability, check_weight};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "ecdf",
        kind: Kind::Window,
        returns: Returns::Real,
        range: Range::Probability,
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
        imp: Imp::Aggregate(AggregateImp::of::<EcdfState>()),
    },
    FunctionDef {
        name: "quantile",
        kind: Kind::Window,
        returns: Returns::Real,
        range: Range::Real,
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
        imp: Imp::Aggregate(AggregateImp::of::<QuantileState>()),
    },
    FunctionDef {
        name: "median",
        kind: Kind::Window,
        returns: Returns::Real,
        range: Range::Real,
        arities: &[1],
        signature: "median(x)",
        summary: "the median of x: quantile(x, 0.5), also over window frames",
        help: "Exactly quantile(x, 0.5) with the default type 7 (the mean of the two middle \
               values of an even count), as an aggregate and as a window function (OVER \
               (... ROWS BETWEEN ...), O(log w) per row). NULL x is skipped; no rows gives NULL. \
               Errors: non-numeric x.",
        example: "SELECT median(column1) FROM (VALUES (1), (2), (3), (10))",
        example_result: "2.5",
        imp: Imp::Aggregate(AggregateImp::of::<MedianState>()),
    },
    FunctionDef {
        name: "weighted_quantile",
        kind: Kind::Aggregate,
        returns: Returns::Real,
        range: Range::Real,
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
        imp: Imp::Aggregate(AggregateImp::of::<WeightedQuantileState>()),
    },
    FunctionDef {
        name: "quantiles",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::JsonArray(&Range::Real),
        arities: &[2, 3],
        signature: "quantiles(x, ps [, type])",
        summary: "JSON array of the quantiles of x at each probability of the JSON array ps",
        help: "One sort, many quantiles: ps is a JSON array such as '[0.05, 0.5, 0.95]' and the \
               result is a JSON array of the same length (an undefined or infinite quantile is \
               null). Read it with SQLite's ->> or json_each. Errors: ps not a JSON array of \
               numbers in [0, 1], type outside 1..9.",
        example: "SELECT quantiles(column1, '[0, 0.5, 1]') FROM (VALUES (3), (1), (2))",
        example_result: "[1.0,2.0,3.0]",
        imp: Imp::Aggregate(AggregateImp::of::<QuantilesState>()),
    },
    FunctionDef {
        name: "profile",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::PROFILE),
        arities: &[1],
        signature: "profile(x)",
        summary: "JSON summary: n, mean, sd, min, q1, median, q3, max, skewness, excess_kurtosis",
        help: "A numeric summary of the group as a JSON object. sd uses the n - 1 divisor; \
               skewness and excess_kurtosis are the adjusted estimators G1 and G2 (Joanes and \
               Gill 1998); quartiles are type 7. A field that is undefined for the sample (sd of \
               one value, skewness of a constant sample) is null.",
        example: "SELECT profile(column1) ->> '$.median' FROM (VALUES (1), (2), (9))",
        example_result: "2.0",
        imp: Imp::Aggregate(AggregateImp::of::<ProfileState>()),
    },
];

/// The quantile type of a call: constant per group, default 7 when the call has none.
#[derive(Debug, Clone, Default)]
struct TypeArg {
    seen: Constant<i64>,
    given: bool,
}

impl TypeArg {
    /// Reads the optional `type` argument of a row.
    fn observe(&mut self, v: Option<Arg<'_>>) -> std::result::Result<(), ArgError> {
        if let Some(v) = v {
            self.given = true;
            let t = whole(v, "type")?;
            if self.seen.observe(t, "type")?
                && let Some(t) = t
            {
                QuantileType::new(t)?;
            }
        }
        Ok(())
    }

    /// The group's type; `None` when the type argument was NULL.
    fn chosen(&self) -> Option<QuantileType> {
        if !self.given {
            return Some(QuantileType::DEFAULT);
        }
        self.seen.get().and_then(|&t| QuantileType::new(t).ok())
    }

    fn merge(&mut self, other: TypeArg) -> std::result::Result<(), ArgError> {
        self.given |= other.given;
        self.seen.merge(other.seen, "type")
    }

    fn save(&self, w: &mut Writer) {
        w.bool(self.given);
        w.constant(self.seen.raw());
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(TypeArg {
            given: r.bool()?,
            seen: r.constant_of()?,
        })
    }
}

/// Reads a probability argument that must be constant per group.
#[inline(always)]
fn read_p(v: Arg<'_>, seen: &mut Constant<f64>) -> std::result::Result<(), ArgError> {
    let p = number(v, "p")?;
    if seen.observe(p, "p")?
        && let Some(p) = p
    {
        check_probability(p)?;
    }
    Ok(())
}

// ---------------------------------------------------------------------------------------
// ecdf(x, t [, w])

/// State of `ecdf(x, t)` and `ecdf(x, t, w)`: a running count, O(1) memory.
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

    fn step_checked(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        let t = number(args.get(1), "t")?;
        self.t.observe(t, "t")?;
        let Some(x) = number(args.get(0), "x")? else {
            return Ok(());
        };
        let Some(t) = t else { return Ok(()) };
        if args.len() > 2 {
            let Some(w) = number(args.get(2), "w")? else {
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

    fn inverse_checked(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        let Some(x) = number(args.get(0), "x")? else {
            return Ok(());
        };
        if args.len() > 2 {
            let Some(w) = number(args.get(2), "w")? else {
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
}

impl State for EcdfState {
    const NAME: &'static str = "ecdf";

    #[inline]
    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        self.step_checked(args).map_err(|e| fail(Self::NAME, e))
    }

    fn inverse(&mut self, args: &Args<'_>) -> Result<()> {
        self.inverse_checked(args).map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        self.t
            .merge(other.t, "t")
            .map_err(|e| fail(Self::NAME, e))?;
        if let Some(o) = other.plain {
            match &mut self.plain {
                Some(c) => c.absorb(&o),
                None => self.plain = Some(o),
            }
        }
        if let Some(o) = other.weighted {
            match &mut self.weighted {
                Some(c) => c.absorb(&o).map_err(|e| fail(Self::NAME, e))?,
                None => self.weighted = Some(o),
            }
        }
        Ok(())
    }

    fn value(&mut self) -> Result<Out> {
        Ok(Out::real(self.current()))
    }

    fn finalize(&mut self) -> Result<Out> {
        Ok(Out::real(self.current()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.t.raw());
        match &self.plain {
            None => w.u8(0),
            Some(c) => {
                w.u8(1);
                w.f64(c.threshold());
                w.u64(c.at_or_below());
                w.u64(c.count());
            }
        }
        match &self.weighted {
            None => w.u8(0),
            Some(c) => {
                w.u8(1);
                w.f64(c.threshold());
                let (below, total) = c.sums();
                save_exact(w, below);
                save_exact(w, total);
            }
        }
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let t = r.constant_of()?;
        let plain = match r.u8()? {
            0 => None,
            _ => {
                let (t, below, total) = (r.f64()?, r.u64()?, r.u64()?);
                Some(
                    EcdfCounter::from_counts(t, below, total)
                        .ok_or_else(|| ArgError::BadState("counts out of order".into()))?,
                )
            }
        };
        let weighted = match r.u8()? {
            0 => None,
            _ => {
                let t = r.f64()?;
                let below = load_exact(r)?;
                let total = load_exact(r)?;
                Some(WeightedEcdfCounter::from_sums(t, below, total))
            }
        };
        Ok(EcdfState { t, plain, weighted })
    }

    #[inline(always)]
    fn lane(&mut self) -> Option<Lane<'_>> {
        let c = self.plain.as_mut()?;
        let key = c.threshold().to_bits();
        (c.threshold() != 0.0).then_some(Lane {
            key,
            sink: Sink::Count(c),
        })
    }
}

/// Writes an exact sum by its limbs.
pub(crate) fn save_exact(w: &mut Writer, s: &ExactSum) {
    let limbs = s.limbs();
    w.u64(limbs.len() as u64);
    for l in limbs {
        w.i64(l);
    }
}

/// Reads an exact sum written by [`save_exact`].
pub(crate) fn load_exact(r: &mut Reader<'_>) -> std::result::Result<ExactSum, ArgError> {
    let n = r.u64()?;
    let mut limbs = Vec::new();
    for _ in 0..n.min(1 << 12) {
        limbs.push(r.i64()?);
    }
    ExactSum::from_limbs(&limbs).ok_or_else(|| ArgError::BadState("an exact sum".into()))
}

// ---------------------------------------------------------------------------------------
// quantile(x, p [, type])

/// State of `quantile(x, p [, type])`: the non-NULL values of the group (or frame), in a
/// vector for the plain aggregate (with the values of merged parts that an engine holds,
/// [`Adopted`]) and in an order-statistic tree once the engine uses it as a window.
#[derive(Debug, Default)]
pub struct QuantileState {
    xs: Vec<f64>,
    adopted: Adopted,
    tree: Option<OrderStatistics>,
    p: Constant<f64>,
    ty: TypeArg,
}

impl QuantileState {
    /// The order-statistic tree, built from the collected values on first use.
    fn tree(&mut self) -> std::result::Result<&mut OrderStatistics, StatsError> {
        let tree = match self.tree.take() {
            Some(t) => t,
            None => {
                self.adopted.absorb_into(&mut self.xs)?;
                OrderStatistics::from_values(&std::mem::take(&mut self.xs))?
            }
        };
        Ok(self.tree.insert(tree))
    }

    /// The quantile of the values held: by the tree in window use, by selection otherwise.
    fn current(&mut self) -> std::result::Result<Option<f64>, StatsError> {
        let (Some(&p), Some(ty)) = (self.p.get(), self.ty.chosen()) else {
            return Ok(None);
        };
        match &self.tree {
            Some(tree) => quantile_ranked(tree.len() as usize, p, ty, |i| {
                tree.kth(i as u64).unwrap_or(f64::NAN)
            }),
            None if self.adopted.is_empty() => quantile_select(&mut self.xs, p, ty),
            None => quantile_select_runs(&self.adopted.with(&self.xs), p, ty),
        }
    }

    fn step_checked(&mut self, args: &Args<'_>) -> std::result::Result<(), ArgError> {
        read_p(args.get(1), &mut self.p)?;
        self.ty.observe(args.optional(2))?;
        if let Some(x) = number(args.get(0), "x")? {
            match self.tree.as_mut() {
                Some(tree) => tree.insert(x)?,
                None => push(&mut self.xs, x)?,
            }
        }
        Ok(())
    }
}

impl State for QuantileState {
    const NAME: &'static str = "quantile";

    #[inline]
    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        self.step_checked(args).map_err(|e| fail(Self::NAME, e))
    }

    fn inverse(&mut self, args: &Args<'_>) -> Result<()> {
        let x = number(args.get(0), "x").map_err(|e| fail(Self::NAME, e))?;
        if let Some(x) = x {
            self.tree()
                .map_err(|e| fail(Self::NAME, e))?
                .remove(x)
                .map_err(|_| fail(Self::NAME, StatsError::LeftFrameUnseen))?;
        }
        Ok(())
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let name = Self::NAME;
        self.p
            .merge(other.p.clone(), "p")
            .map_err(|e| fail(name, e))?;
        self.ty.merge(other.ty.clone()).map_err(|e| fail(name, e))?;
        // Theirs by value: a tree's multiset is read in order without a copy of it.
        let mut theirs = other.xs;
        if let Some(t) = &other.tree {
            t.try_for_each(|x| push(&mut theirs, x))
                .map_err(|e| fail(name, e))?;
        }
        let mut adopted = other.adopted;
        match self.tree.as_mut() {
            Some(tree) => {
                adopted
                    .absorb_into(&mut theirs)
                    .map_err(|e| fail(name, ArgError::from(e)))?;
                for x in theirs {
                    tree.insert(x).map_err(|e| fail(name, e))?;
                }
            }
            // The first part merged into an empty state is taken as it is, uncopied.
            None if self.xs.is_empty() => self.xs = theirs,
            None => try_extend(&mut self.xs, &theirs).map_err(|e| fail(name, e))?,
        }
        if self.tree.is_none() {
            self.adopted.append(adopted);
        }
        Ok(())
    }

    fn value(&mut self) -> Result<Out> {
        self.tree().map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::real(self.current().map_err(|e| fail(Self::NAME, e))?))
    }

    fn finalize(&mut self) -> Result<Out> {
        Ok(Out::real(self.current().map_err(|e| fail(Self::NAME, e))?))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.p.raw());
        self.ty.save(w);
        match &self.tree {
            Some(t) => w.f64s(&t.to_sorted_vec()),
            None => w.f64_runs(&self.adopted.with(&self.xs)),
        }
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(QuantileState {
            p: r.constant_of()?,
            ty: TypeArg::load(r)?,
            xs: r.f64s()?,
            adopted: Adopted::default(),
            tree: None,
        })
    }

    const LISTS: usize = 1;

    fn take_values(&mut self) -> Vec<Vec<f64>> {
        // A window's tree stays in the saved form; so do adopted runs (a part that was
        // itself merged).
        vec![std::mem::take(&mut self.xs)]
    }

    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<()> {
        let [run] = runs_of::<Self, 1>(runs)?;
        match self.tree.as_mut() {
            Some(tree) => {
                for &x in run.values() {
                    tree.insert(x).map_err(|e| fail(Self::NAME, e))?;
                }
            }
            None => self.adopted.push(run),
        }
        Ok(())
    }

    #[inline(always)]
    fn lane(&mut self) -> Option<Lane<'_>> {
        if self.tree.is_some() || self.ty.given {
            return None;
        }
        let p = *self.p.get()?;
        (p != 0.0).then(|| Lane {
            key: p.to_bits(),
            sink: Sink::Collect(&mut self.xs),
        })
    }
}

// ---------------------------------------------------------------------------------------
// median(x)

/// State of `median(x)`: the state of `quantile(x, 0.5)`, under its own name.
#[derive(Debug, Default)]
pub struct MedianState(QuantileState);

/// The row `(x, 0.5)` of the quantile state.
fn median_row<'a>(args: &Args<'a>) -> [Arg<'a>; 2] {
    [args.get(0), Arg::Real(0.5)]
}

/// Renames an error of the quantile state.
fn as_median(e: FunctionError) -> FunctionError {
    fail(MedianState::NAME, e.error)
}

impl State for MedianState {
    const NAME: &'static str = "median";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let row = median_row(args);
        self.0.step(&Args::new(&row)).map_err(as_median)
    }

    fn inverse(&mut self, args: &Args<'_>) -> Result<()> {
        let row = median_row(args);
        self.0.inverse(&Args::new(&row)).map_err(as_median)
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        self.0.merge(other.0).map_err(as_median)
    }

    fn value(&mut self) -> Result<Out> {
        self.0.value().map_err(as_median)
    }

    fn finalize(&mut self) -> Result<Out> {
        self.0.finalize().map_err(as_median)
    }

    fn save(&self, w: &mut Writer) {
        self.0.save(w);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        QuantileState::load(r).map(MedianState)
    }

    const LISTS: usize = QuantileState::LISTS;

    fn take_values(&mut self) -> Vec<Vec<f64>> {
        self.0.take_values()
    }

    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<()> {
        self.0.adopt(runs).map_err(as_median)
    }
}

// ---------------------------------------------------------------------------------------
// weighted_quantile(x, w, p [, type])

/// State of `weighted_quantile`: the (value, weight) pairs of the group.
#[derive(Debug, Default)]
pub struct WeightedQuantileState {
    pairs: Vec<(f64, f64)>,
    p: Constant<f64>,
    ty: TypeArg,
}

impl State for WeightedQuantileState {
    const NAME: &'static str = "weighted_quantile";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            read_p(args.get(2), &mut self.p)?;
            self.ty.observe(args.optional(3))?;
            let x = number(args.get(0), "x")?;
            let w = number(args.get(1), "w")?;
            if let Some(w) = w {
                check_weight(w)?;
            }
            if let (Some(x), Some(w)) = (x, w) {
                self.pairs
                    .try_reserve(1)
                    .map_err(|_| ArgError::OutOfMemory {
                        held: self.pairs.len(),
                    })?;
                self.pairs.push((x, w));
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let name = Self::NAME;
        self.p.merge(other.p, "p").map_err(|e| fail(name, e))?;
        self.ty.merge(other.ty).map_err(|e| fail(name, e))?;
        try_extend(&mut self.pairs, &other.pairs).map_err(|e| fail(name, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let (Some(&p), Some(ty)) = (self.p.get(), self.ty.chosen()) else {
            return Ok(Out::Null);
        };
        let sorted = WeightedSorted::new(std::mem::take(&mut self.pairs))
            .map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::real(
            sorted.quantile(p, ty).map_err(|e| fail(Self::NAME, e))?,
        ))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.p.raw());
        self.ty.save(w);
        let (xs, ws): (Vec<f64>, Vec<f64>) = self.pairs.iter().copied().unzip();
        w.f64s(&xs);
        w.f64s(&ws);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let p = r.constant_of()?;
        let ty = TypeArg::load(r)?;
        let xs = r.f64s()?;
        let ws = r.f64s()?;
        if xs.len() != ws.len() {
            return Err(ArgError::BadState(
                "values and weights differ in length".into(),
            ));
        }
        Ok(WeightedQuantileState {
            pairs: xs.into_iter().zip(ws).collect(),
            p,
            ty,
        })
    }
}

// ---------------------------------------------------------------------------------------
// quantiles(x, ps [, type])

/// Parses a JSON array of probabilities.
///
/// # Errors
/// [`ArgError::BadOption`] unless `s` is a JSON array of numbers, each in `[0, 1]`.
pub fn parse_probabilities(s: &str) -> std::result::Result<Vec<f64>, ArgError> {
    let bad = |detail: String| ArgError::BadOption { what: "ps", detail };
    let v: serde_json::Value = serde_json::from_str(s).map_err(|e| {
        bad(format!(
            "must be a JSON array of probabilities such as '[0.05, 0.5, 0.95]', got '{}' ({e})",
            crate::stats::echo(s)
        ))
    })?;
    let arr = v.as_array().ok_or_else(|| {
        bad(format!(
            "must be a JSON array of probabilities such as '[0.05, 0.5, 0.95]', got '{}'",
            crate::stats::echo(s)
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
    ps: TextConstant<Vec<f64>>,
    ty: TypeArg,
}

impl State for QuantilesState {
    const NAME: &'static str = "quantiles";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            self.ps.observe(args.get(1), "ps", parse_probabilities)?;
            self.ty.observe(args.optional(2))?;
            if let Some(x) = number(args.get(0), "x")? {
                push(&mut self.xs, x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let name = Self::NAME;
        self.ps.merge(other.ps, "ps").map_err(|e| fail(name, e))?;
        self.ty.merge(other.ty).map_err(|e| fail(name, e))?;
        try_extend(&mut self.xs, &other.xs).map_err(|e| fail(name, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let (Some(ps), Some(ty)) = (self.ps.get(), self.ty.chosen()) else {
            return Ok(Out::Null);
        };
        if self.xs.is_empty() {
            return Ok(Out::Null);
        }
        if self.xs.iter().any(|x| x.is_nan()) {
            return Err(fail(Self::NAME, StatsError::NotANumber));
        }
        self.xs.sort_unstable_by(f64::total_cmp);
        let out: Vec<serde_json::Value> = ps
            .iter()
            .map(|&p| quantile_sorted(&self.xs, p, ty).map(|q| json!(q)))
            .collect::<std::result::Result<_, _>>()
            .map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(serde_json::Value::Array(out).to_string()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.ps.raw());
        self.ty.save(w);
        w.f64s(&self.xs);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(QuantilesState {
            ps: TextConstant::from_raw(r.constant()?, parse_probabilities)?,
            ty: TypeArg::load(r)?,
            xs: r.f64s()?,
        })
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

/// State of `profile(x)`: the values.
#[derive(Debug, Default)]
pub struct ProfileState {
    xs: Vec<f64>,
}

impl State for ProfileState {
    const NAME: &'static str = "profile";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        if let Some(x) = number(args.get(0), "x").map_err(|e| fail(Self::NAME, e))? {
            push(&mut self.xs, x).map_err(|e| fail(Self::NAME, e))?;
        }
        Ok(())
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        try_extend(&mut self.xs, &other.xs).map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        self.xs.sort_unstable_by(f64::total_cmp);
        Ok(Profile::from_sorted(&self.xs).map_or(Out::Null, |p| Out::Text(profile_json(&p))))
    }

    fn save(&self, w: &mut Writer) {
        w.f64s(&self.xs);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(ProfileState { xs: r.f64s()? })
    }
}
