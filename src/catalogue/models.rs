//! Model adapters: `dist_fit`, `dist_fit_censored`, `dist_mixture`, `dist_model`, `dist_component` and the
//! table-valued `dist_components`.
//!
//! Adapters only: they read and check arguments and hand them to
//! [`crate::stats::fit`], [`crate::stats::mixture`] and [`crate::value::model`]. NULL x
//! is skipped; a group with no non-NULL x gives NULL. Models travel as JSON text.

use std::sync::Arc;

use super::args::{
    ArgError, Constant, FunctionError, TextConstant, fail, number, resolution, text, whole,
};
use super::dist::empirical;
use super::reader::{Call, model_of};
use super::scan::{Ready, Scan};
use super::state::{
    Adopted, AggregateImp, Args, Field, Reader, Run, State, Writer, push, runs_of, try_extend,
};
use super::value::{Arg, Out};
use super::{FunctionDef, Imp, Kind, Range, Returns, TableImp};
use crate::stats::fit::{Family, FitError, fit, fit_weighted};
use crate::stats::mixture::{
    MAX_COMPONENTS, MixtureError, fit_mixture_counted, fit_mixture_rounded, fit_mixture_sorted,
    fit_mixture_weighted,
};
use crate::stats::readings::{
    fit_censored, fit_rounded, fit_rounded_counted, fit_rounded_weighted,
};
use crate::stats::resolution::{Resolution, resolve};
use crate::stats::sorting::into_sorted;
use crate::stats::tally::Tally;
use crate::value::model::{Law, Model};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "dist_fit",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::Model,
        arities: &[2, 3],
        signature: "dist_fit(x, family [, resolution])",
        summary: "model JSON: maximum-likelihood fit of normal, lognormal, exponential, gamma, \
                  weibull or uniform, with loglik, aic, bic; on rounded readings with resolution",
        help: "Fits family to the group's x by maximum likelihood and returns model JSON \
               {family, <parameters>, n, loglik, aic, bic}. Parameters: normal mean, sd (divisor \
               n); lognormal mu, sigma (mean and sd of ln x); exponential rate; gamma and weibull \
               shape, scale; uniform min, max. Locations are fixed at 0. aic = 2p - 2 loglik, bic \
               = p ln n - 2 loglik. With resolution (the step the readings were rounded to, a \
               number > 0, or 'auto': the largest step on whose grid every reading lies, to 1e-9 \
               relative, or no rounding if there is none) each x stands for [x - r/2, x + r/2] \
               and the fit maximises the binned likelihood sum ln(F(x + r/2) - F(x - r/2)); the \
               JSON then records resolution, and loglik, aic and bic are the binned ones (log \
               probabilities, not log densities: compare them only with fits of the same \
               resolution). The grid runs through the smallest reading; a reading more than a \
               tenth of a stated step off it is an error. On a grid the positive \
               families accept 0. NULL resolution means exact readings. Read fields with ->> \
               and pass the model to the dist_ functions. family and resolution must be the \
               same on every row of a group. NULL x is skipped; NULL family or no rows gives \
               NULL. Errors: an unknown family (the message lists the supported ones); a value \
               <= 0 for lognormal, exponential, gamma or weibull (< 0 with a resolution); an \
               infinite value; fewer values than parameters; all values equal (except for \
               exponential); a resolution that is not > 0 or 'auto'; a reading off the stated \
               grid.",
        example: "SELECT dist_fit(column1, 'exponential') ->> '$.rate' FROM (VALUES (1), (2), (3), (2))",
        example_result: "0.5",
        imp: Imp::Aggregate(AggregateImp::of::<DistFitState>()),
    },
    FunctionDef {
        name: "dist_fit_censored",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::Model,
        arities: &[3],
        signature: "dist_fit_censored(x, c, family)",
        summary: "model JSON: maximum-likelihood fit to censored readings (c: 0 exact, -1 at or \
                  below x, 1 above x)",
        help: "Fits family (as dist_fit: normal, lognormal, exponential, gamma, weibull, uniform) \
               by maximum likelihood to readings with a censoring code c: 0 the value is exact, \
               -1 left-censored (the true value is at or below x: below a detection limit), 1 \
               right-censored (the true value is above x: a logger at the top of its range, an \
               item still running at time x). Exact readings contribute their log density, \
               left-censored ln F(x), right-censored ln(1 - F(x)); the maximum is found \
               numerically (Nelder-Mead from the fit that takes every x as exact). Returns model \
               JSON as dist_fit, with n_exact, n_left and n_right. family must be the same on \
               every row of a group. A row with NULL x or NULL c is skipped; NULL family or no \
               rows gives NULL. Errors: c other than -1, 0, 1; every reading censored (at least \
               one must be exact); an infinite x; for the positive families an exact or \
               left-censored x <= 0 (exponential: exact x < 0) or a right-censored x < 0; fewer \
               readings than parameters.",
        example: "SELECT round(dist_fit_censored(column1, column2, 'exponential') ->> '$.rate', 6) \
                  FROM (VALUES (1, 0), (2, 0), (3, 0), (6, 1))",
        example_result: "0.25",
        imp: Imp::Aggregate(AggregateImp::of::<DistFitCensoredState>()),
    },
    FunctionDef {
        name: "dist_mixture",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::Model,
        arities: &[1, 2, 3],
        signature: "dist_mixture(x [, k [, resolution]])",
        summary: "model JSON: Gaussian mixture by EM with k components, or k from 1..6 by BIC; \
                  on rounded readings with resolution",
        help: "Fits a mixture of k normal components to the group's x by EM and returns model \
               JSON {family: 'normal_mixture', k, components: [{weight, mean, sd}] sorted by \
               mean, n, loglik, aic, bic, iterations, converged, k_candidates: [{k, loglik, \
               bic}]}. Without k (or with k NULL), every k from 1 to 6 (at most the number of \
               distinct values, and with n >= 3k - 1) is fitted and the least BIC wins; \
               k_candidates lists them all (with a resolution, a k that could not win even \
               at the saturated grouped loglik, every grid value at its observed share, is \
               not fitted: its loglik and bic are null). Fifty seeded starts per k (150 on \
               small exact data: distinct values times k at most 2,048): the same data \
               always gives the same fit. Each EM run has a bounded budget (10,000 passes, and about 4e8 \
               point-component evaluations: 500 passes for 2 components over 400,000 distinct \
               values); a run that ends on it reports converged false, and an interrupt \
               (Ctrl-C in the shell, sqlite3_interrupt; SQLite 3.41 or later) stops the fit \
               within a pass. Component variances are floored at 1e-6 times the data's \
               variance. On readings rounded to a step (0.1 degC, whole milliseconds) the \
               likelihood of a continuous density rewards narrow components sitting on single \
               grid values, so BIC can pick a k with such spikes: give resolution, the step (a \
               number > 0) or 'auto' (the largest step on whose grid every reading lies, or none), \
               and each x stands for [x - r/2, x + r/2]: EM for grouped data (McLachlan and \
               Jones 1988) maximises the binned likelihood, which no spike can inflate, and the \
               JSON records resolution with the binned loglik, aic and bic. NULL resolution \
               means exact readings. k and resolution must be the same on every row of a group; \
               NULL x is skipped; no rows gives NULL. Errors: k outside 1..16; fewer than 3k - 1 \
               values; fewer than k distinct values; all values equal; an infinite value; a \
               resolution that is not > 0 or 'auto'; a reading off the stated grid.",
        example: "SELECT dist_mixture(column1) ->> '$.k' FROM (VALUES (1.0), (1.2), (0.8), (1.1), \
                  (0.9), (9.0), (9.2), (8.8), (9.1), (8.9))",
        example_result: "2",
        imp: Imp::Aggregate(AggregateImp::of::<DistMixtureState>()),
    },
    FunctionDef {
        name: "dist_fit_to",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::Model,
        arities: &[2, 3],
        signature: "dist_fit_to(d, family [, resolution])",
        summary: "model JSON: dist_fit of a stored distribution value (frequency weights \
                  included), without its rows",
        help: "Fits family to the empirical distribution d (from dist_empirical, weighted or \
               not, or dist_merge: a value kept in a table) by maximum likelihood, as dist_fit \
               does to rows: same families, parameters, resolution and model JSON. A weight \
               counts as that many copies of its value, so with whole-number weights the fit \
               equals dist_fit over the replicated rows (to 1e-9 relative; bit for bit for an \
               unweighted d); fractional weights are allowed: the likelihood is weighted, n is \
               the total weight rounded to a whole number and bic uses the exact total. Values \
               of weight 0 take no part. NULL d or family gives NULL. Errors: d that is a model \
               or a censored estimate; as dist_fit.",
        example: "SELECT dist_fit_to(dist_empirical(column1, column2), 'exponential') ->> '$.rate' \
                  FROM (VALUES (1, 3), (5, 1))",
        example_result: "0.5",
        imp: Imp::Scalar(dist_fit_to),
    },
    FunctionDef {
        name: "dist_mixture_to",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::Model,
        arities: &[1, 2, 3],
        signature: "dist_mixture_to(d [, k [, resolution]])",
        summary: "model JSON: dist_mixture of a stored distribution value (frequency weights \
                  included), without its rows",
        help: "Fits a Gaussian mixture to the empirical distribution d (from dist_empirical, \
               weighted or not, or dist_merge) as dist_mixture does to rows: k (NULL or omitted: \
               by BIC from 1..6), resolution and model JSON the same. EM works on distinct \
               values with counts, so with whole-number weights the fit is that of the \
               replicated rows, bit for bit; fractional weights are allowed (n is the total \
               weight rounded, bic and the 3k - 1 rule use the exact total). Values of weight 0 \
               take no part. NULL d gives NULL. Errors: d that is a model or a censored \
               estimate; as dist_mixture.",
        example: "SELECT dist_mixture_to(dist_empirical(column1)) ->> '$.k' FROM (VALUES (1.0), \
                  (1.2), (0.8), (1.1), (0.9), (9.0), (9.2), (8.8), (9.1), (8.9))",
        example_result: "2",
        imp: Imp::Scalar(dist_mixture_to),
    },
    FunctionDef {
        name: "dist_model",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::Model,
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
        range: Range::Ordinal,
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
        range: Range::Rows(&[
            Range::Ordinal,
            Range::Probability,
            Range::Real,
            Range::NonNegative,
        ]),
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
// dist_fit(x, family [, resolution])

impl Field for Resolution {
    fn put(&self, w: &mut Writer) {
        match *self {
            Resolution::Exact => w.u8(0),
            Resolution::Step(r) => {
                w.u8(1);
                w.f64(r);
            }
            Resolution::Auto => w.u8(2),
        }
    }

    fn take(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        match r.u8()? {
            0 => Ok(Resolution::Exact),
            1 => {
                let step = r.f64()?;
                if step > 0.0 && step.is_finite() {
                    Ok(Resolution::Step(step))
                } else {
                    Err(ArgError::BadState(format!("a resolution of {step}")))
                }
            }
            2 => Ok(Resolution::Auto),
            other => Err(ArgError::BadState(format!("a resolution tag {other}"))),
        }
    }
}

/// Reads an optional `resolution` argument (position `i`) into its per-group constant.
#[inline]
fn observe_resolution(
    c: &mut Constant<Resolution>,
    args: &Args<'_>,
    i: usize,
) -> std::result::Result<(), ArgError> {
    if let Some(v) = args.optional(i) {
        // The common row: the same numeric step as the group's first (its bits), which
        // parses to the same resolution; anything else takes the full check.
        if let Some(Resolution::Step(step)) = c.get() {
            let same = match v {
                Arg::Real(x) => x.to_bits() == step.to_bits(),
                Arg::Integer(n) => (n as f64).to_bits() == step.to_bits(),
                _ => false,
            };
            if same {
                return Ok(());
            }
        }
        let r = resolution(v)?.unwrap_or(Resolution::Exact);
        c.observe(Some(r), "resolution")?;
    }
    Ok(())
}

/// The step of sorted values under a resolution (`None` or `Exact`: exact readings).
fn step_of(sorted: &[f64], r: Option<Resolution>) -> std::result::Result<Option<f64>, ArgError> {
    match r {
        None | Some(Resolution::Exact) => Ok(None),
        // The grid rules hold on sorted values with their ties (a tie is on any grid).
        Some(r) => Ok(resolve(sorted, r)?),
    }
}

/// The values of a `dist_fit` or `dist_mixture` group. With a resolution (a stated step
/// or 'auto') the fits need only the distinct values and their counts, so each row is
/// counted as it arrives ([`Tally`]) instead of being kept for a sort of all of them;
/// without one, the values are kept as they come, with the sorted values of merged parts
/// that an engine holds ([`Adopted`]: [`Values::take_sorted`] sorts a part's values in its
/// own step, so the final step merges them instead of sorting all).
#[derive(Debug, Default)]
struct Values {
    /// Values kept one by one (exact readings).
    xs: Vec<f64>,
    /// Sorted runs of exact readings from merged parts.
    adopted: Adopted,
    /// Counts of distinct values (readings with a resolution).
    tally: Tally,
}

/// Whether a group's rows are counted: a resolution that is a step or 'auto'.
fn counted(r: &Constant<Resolution>) -> bool {
    matches!(r.get(), Some(Resolution::Step(_) | Resolution::Auto))
}

impl Values {
    /// One row's value.
    #[inline]
    fn add(&mut self, x: f64, counted: bool) -> std::result::Result<(), ArgError> {
        if counted {
            Ok(self.tally.add(x, 1)?)
        } else {
            push(&mut self.xs, x)
        }
    }

    /// Another part's values (after the parts' constants are merged).
    fn merge(&mut self, other: Values, counted: bool) -> std::result::Result<(), ArgError> {
        self.tally.merge(&other.tally)?;
        self.adopted.append(other.adopted);
        if counted {
            let mut kept = std::mem::take(&mut self.xs);
            self.adopted.absorb_into(&mut kept)?;
            for x in kept.into_iter().chain(other.xs) {
                self.tally.add(x, 1)?;
            }
            Ok(())
        } else {
            try_extend(&mut self.xs, &other.xs)
        }
    }

    fn is_empty(&self) -> bool {
        self.xs.is_empty() && self.adopted.is_empty() && self.tally.is_empty()
    }

    /// The distinct values in increasing order and their counts (the kept values
    /// counted first).
    fn distinct(&mut self) -> std::result::Result<(Vec<f64>, Vec<f64>), ArgError> {
        let mut kept = std::mem::take(&mut self.xs);
        self.adopted.absorb_into(&mut kept)?;
        for x in kept {
            self.tally.add(x, 1)?;
        }
        Ok(self.tally.distinct()?)
    }

    /// The kept values (own and adopted), sorted in the order of `f64::total_cmp`.
    fn sorted(&mut self) -> std::result::Result<Vec<f64>, ArgError> {
        Ok(self.adopted.sorted_with(std::mem::take(&mut self.xs))?)
    }

    /// For [`State::take_values`]: the part's own kept values, sorted (a counted part
    /// keeps its counts in the saved form).
    fn take_sorted(&mut self) -> Vec<Vec<f64>> {
        vec![into_sorted(std::mem::take(&mut self.xs))]
    }

    /// [`State::adopt`] for state `S` (one list): a part's sorted values; counted as they
    /// are with a resolution, and kept as own values if they are not sorted.
    fn adopt<S: State>(&mut self, runs: Vec<Arc<dyn Run>>, counted: bool) -> Result<()> {
        let [run] = runs_of::<S, 1>(runs)?;
        let done = if counted {
            let tally = &mut self.tally;
            run.values().iter().try_for_each(|&x| tally.add(x, 1))
        } else {
            self.adopted.push_sorted(run, &mut self.xs)
        };
        done.map_err(|e| fail(S::NAME, ArgError::from(e)))
    }

    /// The saved form: every value (a counted one as many times as it was counted), as
    /// `f64s`.
    fn save(&self, w: &mut Writer) {
        w.u64(self.xs.len() as u64 + self.adopted.len() as u64 + self.tally.total());
        for run in self.adopted.with(&self.xs) {
            for &x in run {
                w.f64(x);
            }
        }
        self.tally.for_each(|x, c| {
            for _ in 0..c {
                w.f64(x);
            }
        });
    }

    /// Values read from the saved form.
    fn load(xs: Vec<f64>, counted: bool) -> std::result::Result<Values, ArgError> {
        if !counted {
            return Ok(Values {
                xs,
                ..Values::default()
            });
        }
        let mut v = Values::default();
        for x in xs {
            v.tally.add(x, 1)?;
        }
        Ok(v)
    }
}

/// `values[i]` repeated `counts[i]` times: the sorted values themselves.
fn expanded(values: &[f64], counts: &[f64]) -> std::result::Result<Vec<f64>, ArgError> {
    let n: f64 = counts.iter().sum();
    let mut xs = Vec::new();
    crate::stats::grow::room(&mut xs, n as usize)?;
    for (&x, &c) in values.iter().zip(counts) {
        xs.extend(std::iter::repeat_n(x, c as usize));
    }
    Ok(xs)
}

/// State of `dist_fit`: the values, the family and the resolution.
#[derive(Debug, Default)]
pub struct DistFitState {
    values: Values,
    family: TextConstant<Family>,
    resolution: Constant<Resolution>,
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
            observe_resolution(&mut self.resolution, args, 2)?;
            if let Some(x) = number(args.get(0), "x")? {
                self.values.add(x, counted(&self.resolution))?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.family.merge(other.family, "family")?;
            self.resolution.merge(other.resolution, "resolution")?;
            self.values.merge(other.values, counted(&self.resolution))
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let Some(&family) = self.family.get() else {
            return Ok(Out::Null);
        };
        if self.values.is_empty() {
            return Ok(Out::Null);
        }
        let counted = counted(&self.resolution);
        let mut go = || -> std::result::Result<Out, ArgError> {
            if counted {
                // The grid is checked, and the binned fit made, on the distinct values.
                let (values, counts) = self.values.distinct()?;
                let step = step_of(&values, self.resolution.get().copied())?;
                let f = match step {
                    Some(r) => fit_rounded_counted(&values, &counts, family, r)?,
                    // 'auto' found no grid: the exact fit of the sorted values.
                    None => fit(&expanded(&values, &counts)?, family)?,
                };
                return Ok(Out::Text(Model::from(f).rounded_to(step).to_json()));
            }
            // In ascending order, so that the fit's sums do not depend on the order of
            // rows (or of the parts a partitioned engine merged).
            let xs = self.values.sorted()?;
            let step = step_of(&xs, self.resolution.get().copied())?;
            let f = match step {
                Some(r) => fit_rounded(&xs, family, r)?,
                None => fit(&xs, family)?,
            };
            Ok(Out::Text(Model::from(f).rounded_to(step).to_json()))
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.family.raw());
        w.constant(self.resolution.raw());
        self.values.save(w);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let family = TextConstant::from_raw(r.constant()?, parse_family)?;
        let resolution = r.constant_of()?;
        let values = Values::load(r.f64s()?, counted(&resolution))?;
        Ok(DistFitState {
            values,
            family,
            resolution,
        })
    }

    const LISTS: usize = 1;

    fn take_values(&mut self) -> Vec<Vec<f64>> {
        self.values.take_sorted()
    }

    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<()> {
        self.values.adopt::<Self>(runs, counted(&self.resolution))
    }
}

// ---------------------------------------------------------------------------------------
// dist_fit_censored(x, c, family)

/// State of `dist_fit_censored`: the readings, their codes and the family.
#[derive(Debug, Default)]
pub struct DistFitCensoredState {
    xs: Vec<f64>,
    codes: Vec<i8>,
    family: TextConstant<Family>,
}

/// A censoring code: -1, 0 or 1.
fn code(c: i64) -> std::result::Result<i8, ArgError> {
    match c {
        -1..=1 => Ok(c as i8),
        other => Err(FitError::BadCode(other).into()),
    }
}

impl State for DistFitCensoredState {
    const NAME: &'static str = "dist_fit_censored";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            self.family.observe(args.get(2), "family", parse_family)?;
            let c = whole(args.get(1), "c")?.map(code).transpose()?;
            if let (Some(x), Some(c)) = (number(args.get(0), "x")?, c) {
                push(&mut self.xs, x)?;
                try_extend(&mut self.codes, &[c])?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.family.merge(other.family, "family")?;
            try_extend(&mut self.xs, &other.xs)?;
            try_extend(&mut self.codes, &other.codes)
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
        // Sorted by (x, c), so that the fit does not depend on the order of rows.
        let mut pairs: Vec<(f64, i8)> = self
            .xs
            .iter()
            .copied()
            .zip(self.codes.iter().copied())
            .collect();
        pairs.sort_unstable_by(|a, b| a.0.total_cmp(&b.0).then(a.1.cmp(&b.1)));
        let (xs, codes): (Vec<f64>, Vec<i8>) = pairs.into_iter().unzip();
        let (f, counts) = fit_censored(&xs, &codes, family).map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(Model::from(f).censored(counts).to_json()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.family.raw());
        w.f64s(&self.xs);
        let codes: Vec<u8> = self.codes.iter().map(|&c| c as u8).collect();
        w.bytes(&codes);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let family = TextConstant::from_raw(r.constant()?, parse_family)?;
        let xs = r.f64s()?;
        let codes = r
            .bytes()?
            .iter()
            .map(|&b| {
                code(i64::from(b as i8))
                    .map_err(|_| ArgError::BadState(format!("a censoring code {}", b as i8)))
            })
            .collect::<std::result::Result<Vec<i8>, ArgError>>()?;
        if codes.len() != xs.len() {
            return Err(ArgError::BadState(
                "codes and values of different lengths".to_string(),
            ));
        }
        Ok(DistFitCensoredState { xs, codes, family })
    }
}

// ---------------------------------------------------------------------------------------
// dist_mixture(x [, k [, resolution]])

/// State of `dist_mixture`: the values, k (NULL or absent: by BIC) and the resolution.
#[derive(Debug, Default)]
pub struct DistMixtureState {
    values: Values,
    k: Constant<i64>,
    resolution: Constant<Resolution>,
}

impl State for DistMixtureState {
    const NAME: &'static str = "dist_mixture";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            if let Some(v) = args.optional(1) {
                let k = whole(v, "k")?;
                if self.k.observe(k, "k")?
                    && let Some(k) = k
                    && !(1..=MAX_COMPONENTS as i64).contains(&k)
                {
                    return Err(MixtureError::BadK(k).into());
                }
            }
            observe_resolution(&mut self.resolution, args, 2)?;
            if let Some(x) = number(args.get(0), "x")? {
                self.values.add(x, counted(&self.resolution))?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.k.merge(other.k, "k")?;
            self.resolution.merge(other.resolution, "resolution")?;
            self.values.merge(other.values, counted(&self.resolution))
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        // Checked in `step` to lie in 1..=MAX_COMPONENTS; NULL or absent: by BIC.
        let k = self.k.get().map(|&k| k as usize);
        if self.values.is_empty() {
            return Ok(Out::Null);
        }
        let resolution = self.resolution.get().copied().unwrap_or(Resolution::Exact);
        let f = if counted(&self.resolution) {
            // Counted as the rows came: the distinct values in order, with counts.
            let (values, counts) = self.values.distinct().map_err(|e| fail(Self::NAME, e))?;
            fit_mixture_counted(&values, &counts, k, resolution)
        } else if self.values.adopted.is_empty() {
            // The kernel sorts and merges ties itself (and checks the grid on its
            // distinct values), so row order does not matter.
            fit_mixture_rounded(&self.values.xs, k, resolution)
        } else {
            // Parts an engine sorted in their own steps: merged, not sorted again.
            let xs = self.values.sorted().map_err(|e| fail(Self::NAME, e))?;
            fit_mixture_sorted(xs, k, resolution)
        };
        let f = f.map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(Model::from(f).to_json()))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.k.raw());
        w.constant(self.resolution.raw());
        self.values.save(w);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        let k: Constant<i64> = r.constant_of()?;
        if let Some(&k) = k.get()
            && !(1..=MAX_COMPONENTS as i64).contains(&k)
        {
            return Err(MixtureError::BadK(k).into());
        }
        let resolution = r.constant_of()?;
        let values = Values::load(r.f64s()?, counted(&resolution))?;
        Ok(DistMixtureState {
            k,
            resolution,
            values,
        })
    }

    const LISTS: usize = 1;

    fn take_values(&mut self) -> Vec<Vec<f64>> {
        self.values.take_sorted()
    }

    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<()> {
        self.values.adopt::<Self>(runs, counted(&self.resolution))
    }
}

// ---------------------------------------------------------------------------------------
// dist_model(family, params), dist_component(model, t)

// ---------------------------------------------------------------------------------------
// dist_fit_to(d, family [, resolution]), dist_mixture_to(d [, k [, resolution]])

/// A sample's values and, when it is weighted, their weights.
type Weighted = (Vec<f64>, Option<Vec<f64>>);

/// The values and frequency weights of a stored empirical distribution (weights `None`
/// when it is unweighted), without the values of weight 0.
fn weighted_values(call: &mut Call<'_>, instead: &'static str) -> Result<Option<Weighted>> {
    let Some(d) = call.dist(0)? else {
        return Ok(None);
    };
    let s = empirical(&d, 1, instead).map_err(|e| call.fail(e))?;
    Ok(Some(match s.weights() {
        None => (s.values().to_vec(), None),
        Some(ws) => {
            let (xs, ws): (Vec<f64>, Vec<f64>) = s
                .values()
                .iter()
                .zip(ws)
                .filter(|(_, w)| **w > 0.0)
                .map(|(&x, &w)| (x, w))
                .unzip();
            (xs, Some(ws))
        }
    }))
}

/// An optional `resolution` argument of a scalar (NULL or absent: exact).
fn resolution_at(call: &Call<'_>, i: usize) -> Result<Option<Resolution>> {
    call.optional(i)
        .map(resolution)
        .transpose()
        .map(Option::flatten)
        .map_err(|e| call.fail(e))
}

const FIT_A_MODEL: &str = "a model is a fit already: read its parameters with ->>, or fit the \
                           rows it came from";

fn dist_fit_to(call: &mut Call<'_>) -> Result<Out> {
    let family = text(call.get(1), "family").map_err(|e| call.fail(e))?;
    let family = family
        .map(|f| Family::from_name(f).map_err(|e| call.fail(e)))
        .transpose()?;
    let resolution = resolution_at(call, 2)?;
    let Some(family) = family else {
        return Ok(Out::Null);
    };
    let Some((xs, ws)) = weighted_values(call, FIT_A_MODEL)? else {
        return Ok(Out::Null);
    };
    let go = || -> std::result::Result<Out, ArgError> {
        // The values of an empirical distribution are sorted, as dist_fit sorts its rows.
        let step = step_of(&xs, resolution)?;
        let f = match (&ws, step) {
            (None, Some(r)) => fit_rounded(&xs, family, r)?,
            (None, None) => fit(&xs, family)?,
            (Some(ws), Some(r)) => fit_rounded_weighted(&xs, ws, family, r)?,
            (Some(ws), None) => fit_weighted(&xs, ws, family)?,
        };
        Ok(Out::Text(Model::from(f).rounded_to(step).to_json()))
    };
    go().map_err(|e| call.fail(e))
}

fn dist_mixture_to(call: &mut Call<'_>) -> Result<Out> {
    let k = match call.optional(1) {
        None => None,
        Some(_) => call.whole(1, "k")?,
    };
    if let Some(k) = k
        && !(1..=MAX_COMPONENTS as i64).contains(&k)
    {
        return Err(call.fail(MixtureError::BadK(k)));
    }
    let resolution = resolution_at(call, 2)?.unwrap_or(Resolution::Exact);
    let Some((xs, ws)) = weighted_values(call, FIT_A_MODEL)? else {
        return Ok(Out::Null);
    };
    let k = k.map(|k| k as usize);
    let f = match ws {
        None => fit_mixture_rounded(&xs, k, resolution),
        Some(ws) => fit_mixture_weighted(&xs, &ws, k, resolution),
    }
    .map_err(|e| call.fail(e))?;
    Ok(Out::Text(Model::from(f).to_json()))
}

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
fn components(call: &mut Call<'_>) -> Result<Box<dyn Scan>> {
    let Some(d) = call.model(0)? else {
        return Ok(Ready::empty());
    };
    let Some(model) = model_of(&d) else {
        return Ok(Ready::empty());
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
    let rows = model
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
        .collect();
    Ok(Ready::rows(rows, 4))
}
