//! Quantile sketches in SQL: `quantile_sketch`, `sketch_merge`, `sketch_quantile`,
//! `sketch_cdf`.
//!
//! Adapters only: the sketch is [`crate::stats::sketch`], its BLOB is
//! [`crate::value::sketch`]. NULL x (or a NULL sketch) is skipped; a group with nothing to
//! summarise gives NULL.

use super::args::{ArgError, Constant, FunctionError, fail, number};
use super::reader::{Call, NoMemo};
use super::state::{AggregateImp, Args, Lane, Reader, Sink, State, Writer};
use super::value::Out;
use super::{FunctionDef, Imp, Kind, Range, Returns};
use crate::stats::check_probability;
use crate::stats::sketch::{DEFAULT_EPSILON, QuantileSketch, k_for_epsilon};
use crate::value::sketch::{decode, encode};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "quantile_sketch",
        kind: Kind::Aggregate,
        returns: Returns::Blob,
        range: Range::Sketch,
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
        imp: Imp::Aggregate(AggregateImp::of::<QuantileSketchState>()),
    },
    FunctionDef {
        name: "sketch_merge",
        kind: Kind::Aggregate,
        returns: Returns::Blob,
        range: Range::Sketch,
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
        imp: Imp::Aggregate(AggregateImp::of::<SketchMergeState>()),
    },
    FunctionDef {
        name: "sketch_quantile",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Real,
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
        imp: Imp::Scalar(sketch_quantile),
    },
    FunctionDef {
        name: "sketch_cdf",
        kind: Kind::Scalar,
        returns: Returns::Real,
        range: Range::Probability,
        arities: &[2],
        signature: "sketch_cdf(s, t)",
        summary: "approximate share of values at or below t from a sketch, within epsilon",
        help: "The sketch's estimate of the share of the summarised values that are <= t; within \
               epsilon of the exact ecdf with probability at least 1 - 1e-6 (exact while the \
               sketch has kept every value). NULL s or t gives NULL. Errors: s not a sketch BLOB \
               or damaged, non-numeric t.",
        example: "SELECT sketch_cdf(quantile_sketch(column1), 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        imp: Imp::Scalar(sketch_cdf),
    },
];

/// The sketch BLOB, or NULL for an empty one.
fn blob_value(s: Option<&QuantileSketch>) -> Out {
    s.and_then(encode).map_or(Out::Null, Out::Blob)
}

/// Saves an optional sketch as its BLOB (docs/sketch-format.md).
fn save_sketch(w: &mut Writer, s: Option<&QuantileSketch>) {
    w.opt_bytes(s.and_then(encode).as_deref());
}

/// Reads a sketch saved by [`save_sketch`].
fn load_sketch(r: &mut Reader<'_>) -> std::result::Result<Option<QuantileSketch>, ArgError> {
    r.opt_bytes()?
        .map(|b| decode(b).map_err(|e| ArgError::BadState(format!("its sketch: {e}"))))
        .transpose()
}

/// Merges `theirs` into `mine`.
fn merge_into(
    mine: &mut Option<QuantileSketch>,
    theirs: Option<QuantileSketch>,
) -> std::result::Result<(), ArgError> {
    match (mine.as_mut(), theirs) {
        (_, None) => Ok(()),
        (None, t) => {
            *mine = t;
            Ok(())
        }
        (Some(a), Some(b)) => Ok(a.merge(&b)?),
    }
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

impl State for QuantileSketchState {
    const NAME: &'static str = "quantile_sketch";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            let epsilon = match args.optional(1) {
                Some(v) => number(v, "epsilon")?,
                None => Some(DEFAULT_EPSILON),
            };
            if self.epsilon.observe(epsilon, "epsilon")?
                && let Some(eps) = epsilon
            {
                self.k = Some(k_for_epsilon(eps)?);
            }
            let Some(k) = self.k else { return Ok(()) };
            if let Some(x) = number(args.get(0), "x")? {
                self.sketch
                    .get_or_insert_with(|| QuantileSketch::with_k(k))
                    .insert(x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.epsilon.merge(other.epsilon, "epsilon")?;
            if self.k.is_none() {
                self.k = other.k;
            }
            merge_into(&mut self.sketch, other.sketch)
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        Ok(blob_value(self.sketch.as_ref()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.epsilon.raw());
        save_sketch(w, self.sketch.as_ref());
    }

    #[inline(always)]
    fn lane(&mut self) -> Option<Lane<'_>> {
        let key = self.epsilon.get()?.to_bits();
        Some(Lane {
            key,
            sink: Sink::Sketch(self.sketch.as_mut()?),
        })
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let epsilon: Constant<f64> = r.constant_of()?;
        let k = epsilon.get().map(|&e| k_for_epsilon(e)).transpose()?;
        Ok(QuantileSketchState {
            epsilon,
            k,
            sketch: load_sketch(r)?,
        })
    }
}

// ---------------------------------------------------------------------------------------
// sketch_merge(s)

/// State of `sketch_merge`: the merge so far.
#[derive(Debug, Default)]
pub struct SketchMergeState {
    acc: Option<QuantileSketch>,
}

impl State for SketchMergeState {
    const NAME: &'static str = "sketch_merge";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let row = [args.get(0)];
        let mut memo = NoMemo;
        let Some(s) = Call::new(Self::NAME, &row, &mut memo).sketch(0)? else {
            return Ok(());
        };
        merge_into(&mut self.acc, Some((*s).clone())).map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        merge_into(&mut self.acc, other.acc).map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        Ok(blob_value(self.acc.as_ref()))
    }

    fn save(&self, w: &mut Writer) {
        save_sketch(w, self.acc.as_ref());
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(SketchMergeState {
            acc: load_sketch(r)?,
        })
    }
}

// ---------------------------------------------------------------------------------------
// sketch_quantile(s, p), sketch_cdf(s, t)

fn sketch_quantile(call: &mut Call<'_>) -> Result<Out> {
    let p = call.number(1, "p")?;
    if let Some(p) = p {
        check_probability(p).map_err(|e| call.fail(e))?;
    }
    let (Some(s), Some(p)) = (call.sketch(0)?, p) else {
        return Ok(Out::Null);
    };
    let q = s.quantile(p).map_err(|e| call.fail(e))?;
    Ok(Out::real(q))
}

fn sketch_cdf(call: &mut Call<'_>) -> Result<Out> {
    let t = call.number(1, "t")?;
    let (Some(s), Some(t)) = (call.sketch(0)?, t) else {
        return Ok(Out::Null);
    };
    Ok(Out::real(s.cdf(t)))
}
