//! Comparisons: the `ks_test` aggregate over one column split by a boolean, and the scalars
//! `dist_ks` and `dist_distance` on two distribution values: two-sample when both are
//! empirical, one-sample (the data against the model's cdf) when one is a model.
//!
//! Adapters only: they read and check arguments, turn the rows or the distribution values
//! into sorted samples, and hand them to [`crate::stats::ks`], [`crate::stats::gof`] and
//! [`crate::stats::lilliefors`]. NULL x and NULL `in_second` rows are skipped; a group where
//! either sample has no values gives NULL, as does a NULL distribution argument
//! (`dist_empirical` of an empty group is NULL).
//!
//! # One sample against a model
//!
//! `dist_ks(d, model)` and `dist_ks(model, d)` run [`ks_1samp`] on the rows of `d` against
//! the model's cdf and answer in the two-sample JSON shape, adding `"test": "one-sample"`
//! and the model's `family`, with null for the model's size. Its p-value assumes the model
//! was fixed before the data were seen. For a model fitted to the same data, method
//! `'lilliefors'` refers the same statistic to its null distribution under estimated
//! parameters ([`lilliefors_p`] with the maximum-likelihood sd that `dist_fit` reports),
//! after [`Model::check_fit_of`] has confirmed that the model is exactly that fit: the
//! correction is chosen by the caller, never guessed from the model.
//!
//! # Weighted empirical values in rank tests
//!
//! The weights of an empirical value are frequency weights. The rank tests (Kolmogorov-Smirnov,
//! Cramer-von Mises, Anderson-Darling) count a whole-number weight `w` as `w` rows holding the
//! value, so `dist_ks(dist_empirical(x, w), ...)` is exactly the test on the replicated rows,
//! up to [`MAX_REPLICATED_ROWS`] rows per distribution. A fractional weight has no such
//! reading (the tests' null distributions count rows) and is a named error, never a p-value
//! for some made-up sample size. The Wasserstein distance needs no counts and takes any
//! weights.

use std::borrow::Cow;
use std::sync::Arc;

use serde_json::json;

use super::args::{ArgError, FunctionError, TextConstant, fail, number, text};
use super::reader::Call;
use super::state::{
    Adopted, AggregateImp, Args, Reader, Run, State, Writer, push, runs_of, try_extend,
};
use super::value::Out;
use super::{FunctionDef, Imp, Kind, Range, Returns};
use crate::stats::censored::Censored;
use crate::stats::fit::Family;
use crate::stats::gof::{anderson_darling_ksamp, cramer_von_mises_2samp, wasserstein_1};
use crate::stats::ks::{
    Alternative, KsOneResult, KsResult, PMethod, TestError, asymptotic_2samp_p,
    kolmogorov_limit_sf, ks_1samp, ks_2samp, two_sample_statistic,
};
use crate::stats::lilliefors::{self, Scale, lilliefors_p};
use crate::stats::sample::Sample;
use crate::stats::sorting::into_sorted;
use crate::value::Dist;
use crate::value::model::{Law, Model};

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[
    FunctionDef {
        name: "ks_test",
        kind: Kind::Aggregate,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::TEST),
        arities: &[2, 3, 4],
        signature: "ks_test(x, in_second [, alternative [, method]])",
        summary: "two-sample Kolmogorov-Smirnov test of x split by a boolean: JSON {d, p, n1, n2, method, alternative}",
        help: "Compares the rows where in_second is false (sample 1) with those where it is true \
           (sample 2), as in ks_test(temp_c, week = 48). alternative: 'two-sided' (default; \
           d = max |F1 - F2|), 'less' (d = max(F2 - F1): sample 1 tends to be larger) or \
           'greater' (d = max(F1 - F2): sample 1 tends to be smaller), with scipy's meaning. \
           method: 'auto' (default: exact when n1 * n2 <= 1e8, asymptotic beyond), 'exact' \
           (lattice-path count, refused above n1 * n2 = 4e9) or 'asymp'. Exact p-values are \
           conditional on the tie pattern of the pooled values (Hodges 1958; Schroer and \
           Trenkler 1995), so they stay exact for rounded measurements. Asymptotic p-values without \
           ties are Kolmogorov's limit corrected by the one-sample distribution at size \
           n1 n2 / (n1 + n2) (two-sided) and Hodges' formula (one-sided), method 'asymptotic'; \
           with ties they are the limit for discrete data, the Brownian bridge observed only at \
           the pooled sample's distinct values (Schmid 1958; Noether 1963), method \
           'asymptotic, ties' (up to 20000 distinct values; beyond, the tie-free limit, which \
           is then conservative). The result's method says which was used. \
           Rows with NULL x or NULL in_second are skipped. NULL when either sample has no \
           values (there is nothing to compare), or when alternative or method is NULL. \
           alternative and method must be the same on every row of a group. Errors: non-numeric \
           x or in_second, an unknown alternative or method, an exact p-value out of reach.",
        example: "SELECT round(ks_test(column1, column1 > 3) ->> '$.p', 4) \
              FROM (VALUES (1), (2), (3), (4), (5), (6))",
        example_result: "0.1",
        imp: Imp::Aggregate(AggregateImp::of::<KsTestState>()),
    },
    FunctionDef {
        name: "dist_ks",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::TEST),
        arities: &[2, 3, 4],
        signature: "dist_ks(d1, d2 [, alternative [, method]])",
        summary: "Kolmogorov-Smirnov test of two empirical distributions, or of one against a model: JSON {d, p, n1, n2, method, alternative}",
        help: "Two empirical distributions: the two-sample test of ks_test on the values they \
               hold, the same JSON to the last digit as ks_test over the rows they were built \
               from, with the same alternative ('two-sided' default, 'less', 'greater'; d1 \
               plays sample 1) and method ('auto' default, 'exact', 'asymp'; with ties the \
               asymptotic p-value is the discrete-data limit, method 'asymptotic, ties', as \
               in ks_test). An empirical \
               distribution and a model (JSON from dist_fit, dist_mixture or dist_model, \
               either order): the one-sample test of the data against the model's cdf, with \
               test 'one-sample', the model's family, and null for the model's n1 or n2. Its \
               p-value is exact for a fully specified continuous model (Marsaglia, Tsang and \
               Wang 2003, as Simard and L'Ecuyer 2011 organise it; one-sided Birnbaum and \
               Tingey 1951), with 'auto' switching to the Pelz-Good asymptotic series for \
               large n, and 'exact' refusing Durbin matrices above order 1000; the \
               alternative keeps the argument order ('greater': the cdf of d1 lies above \
               that of d2 somewhere). This p-value is NOT valid when the model's parameters \
               were estimated from the same data (Lilliefors 1967): it is then far too large. \
               For a normal or exponential model fitted to the same data, method \
               'lilliefors' gives the corrected p-value (two-sided; Monte Carlo of 10000 \
               replicates with a fixed seed under the fitted family, maximum-likelihood sd \
               as dist_fit reports it; Stephens' 1974 size modification above 500 values); \
               it refuses any model that is not dist_fit's fit of these very values (n and \
               parameters to 1e-9). Weights are frequency weights: a whole-number weight w \
               counts as w rows (n1 and n2 are then the total weights), up to 10000000 rows \
               per distribution; a fractional weight is an error. A censored estimate \
               (dist_censored) and a model: d is the distance sup |F - G| (or the one-sided \
               sup) over the points where the estimate's cdf is defined, and p is null: the \
               Kolmogorov distributions assume complete samples, and no valid p-value under \
               censoring is computed (method 'distance only'). NULL d1 or d2 \
               (dist_empirical of an empty group is NULL, so either sample with fewer than \
               one value), alternative or method gives NULL. Errors: two models, an argument \
               that is not a distribution, an unknown alternative or method, fractional \
               weights, an exact p-value out of reach, 'lilliefors' on a model that is not \
               the sample's normal or exponential fit.",
        example: "SELECT round(dist_ks(a.d, b.d) ->> '$.p', 4) \
                  FROM (SELECT dist_empirical(column1) AS d FROM (VALUES (1), (2), (3))) AS a, \
                  (SELECT dist_empirical(column1) AS d FROM (VALUES (4), (5), (6))) AS b",
        example_result: "0.1",
        imp: Imp::Scalar(dist_ks),
    },
    FunctionDef {
        name: "dist_distance",
        kind: Kind::Scalar,
        returns: Returns::Text,
        range: Range::JsonObject(&super::range::DISTANCE),
        arities: &[3],
        signature: "dist_distance(d1, d2, metric)",
        summary: "how far apart two distributions are: metric 'ks', 'wasserstein', 'cvm' or 'ad' (against a model 'ks'); JSON {metric, statistic, p, method, n1, n2}",
        help: "metric 'ks': the two-sided Kolmogorov-Smirnov statistic max |F1 - F2| and its \
               p-value, as dist_ks (method 'exact', 'asymptotic', or 'asymptotic, ties' for \
               large tied samples). 'wasserstein': the L1 distance between the two cdfs, \
               integral |F1 - F2| dt, in the units of the values (how far, on average, mass \
               must move to turn one into the other); any frequency weights; no p; statistic \
               null when infinite (an infinite value in one distribution only). 'cvm': the \
               two-sample Cramer-von Mises statistic T and p-value of Anderson (1962), exact \
               when neither sample has more than 20 values and there are no ties, asymptotic \
               otherwise. 'ad': the k-sample Anderson-Darling test of Scholz and Stephens \
               (1987), midrank version for ties, with k = 2: statistic is the standardised \
               (A2akN - 1) / sigma, a2akn the raw one, and p is interpolated in their table \
               between 0.001 and 0.25; beyond it p is the table's end and p_range says \
               'at_least' or 'at_most' (otherwise 'value'). method names how p was computed. \
               For 'ks', 'cvm' and 'ad' a whole-number weight w counts as w rows, as in dist_ks, \
               and a fractional weight is an error. NULL for a NULL argument (so for a sample \
               with fewer than one value), and when the samples are too small for the metric: \
               'cvm' needs 2 values in each, 'ad' 4 values in all and two distinct ones. \
               An empirical distribution and a model (either order) take metric 'ks' only: \
               the one-sample test of dist_ks with its default method, plus test \
               'one-sample' and the model's family (its p-value assumes the model was not \
               fitted to these data; see dist_ks for the Lilliefors correction). Errors: an \
               unknown metric, an argument that is not a distribution, two models, a model \
               with 'wasserstein', 'cvm' or 'ad', fractional weights for a rank metric.",
        example: "SELECT dist_distance(a.d, b.d, 'wasserstein') ->> '$.statistic' \
                  FROM (SELECT dist_empirical(column1) AS d FROM (VALUES (0), (1), (5))) AS a, \
                  (SELECT dist_empirical(column1) AS d FROM (VALUES (2), (3), (7))) AS b",
        example_result: "2.0",
        imp: Imp::Scalar(dist_distance),
    },
];

/// A Kolmogorov-Smirnov result, two-sample or one-sample, as the functions report it.
pub struct KsReport<'a> {
    /// The statistic.
    pub d: f64,
    /// The p-value.
    pub p: f64,
    /// The sizes: null on a model's side.
    pub n1: serde_json::Value,
    /// See `n1`.
    pub n2: serde_json::Value,
    /// How p was computed.
    pub method: &'a str,
    /// The alternative.
    pub alternative: Alternative,
    /// For a one-sample test, the model's family.
    pub family: Option<&'a str>,
}

impl KsReport<'_> {
    /// The report of a two-sample result.
    pub fn two_sample(r: &KsResult) -> KsReport<'static> {
        KsReport {
            d: r.d,
            p: r.p,
            n1: json!(r.n1),
            n2: json!(r.n2),
            method: r.method.name(),
            alternative: r.alternative,
            family: None,
        }
    }
}

/// The one JSON form of a Kolmogorov-Smirnov result. As a test (`ks_test`, `dist_ks`):
/// `{d, p, n1, n2, method, alternative}`; as a distance (`dist_distance` with metric
/// 'ks', always two-sided): `{metric, statistic, p, method, n1, n2}`. A one-sample result
/// adds `test: "one-sample"` and the model's `family`.
pub fn ks_json(k: &KsReport<'_>, as_distance: bool) -> serde_json::Value {
    let mut v = if as_distance {
        json!({
            "metric": "ks",
            "statistic": k.d,
            "p": k.p,
            "method": k.method,
            "n1": k.n1,
            "n2": k.n2,
        })
    } else {
        json!({
            "d": k.d,
            "p": k.p,
            "n1": k.n1,
            "n2": k.n2,
            "method": k.method,
            "alternative": k.alternative.name(),
        })
    };
    if let (Some(family), Some(map)) = (k.family, v.as_object_mut()) {
        map.insert("test".into(), json!("one-sample"));
        map.insert("family".into(), json!(family));
    }
    v
}

/// State of `ks_test`: the two samples and the per-group options. Merged parts' samples
/// an engine holds ([`Adopted`]) come sorted ([`State::take_values`] sorts them, in the
/// part's own step), so the answer merges them instead of sorting everything again.
#[derive(Debug, Default)]
pub struct KsTestState {
    first: Vec<f64>,
    second: Vec<f64>,
    /// Sorted runs of each sample, from merged parts.
    adopted: [Adopted; 2],
    alternative: TextConstant<Alternative>,
    method: TextConstant<PMethod>,
}

impl KsTestState {
    /// Sample `i`'s own values and its adopted runs.
    fn sample(&mut self, i: usize) -> (&mut Vec<f64>, &mut Adopted) {
        let own = if i == 0 {
            &mut self.first
        } else {
            &mut self.second
        };
        (own, &mut self.adopted[i])
    }

    /// Sample `i`'s values, sorted: the own values sorted, merged with the adopted runs.
    fn sorted(&mut self, i: usize) -> std::result::Result<Vec<f64>, ArgError> {
        let (own, adopted) = self.sample(i);
        Ok(adopted.sorted_with(std::mem::take(own))?)
    }
}

/// Parses an alternative.
fn parse_alternative(s: &str) -> std::result::Result<Alternative, ArgError> {
    Ok(Alternative::parse(s)?)
}

/// Parses a p-value method.
fn parse_method(s: &str) -> std::result::Result<PMethod, ArgError> {
    Ok(PMethod::parse(s)?)
}

impl State for KsTestState {
    const NAME: &'static str = "ks_test";

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            if let Some(v) = args.optional(2) {
                self.alternative
                    .observe(v, "alternative", parse_alternative)?;
            }
            if let Some(v) = args.optional(3) {
                self.method.observe(v, "method", parse_method)?;
            }
            let x = number(args.get(0), "x")?;
            let second = number(args.get(1), "in_second")?;
            if let (Some(x), Some(second)) = (x, second) {
                let side = if second != 0.0 {
                    &mut self.second
                } else {
                    &mut self.first
                };
                push(side, x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let go = || -> std::result::Result<(), ArgError> {
            self.alternative.merge(other.alternative, "alternative")?;
            self.method.merge(other.method, "method")?;
            try_extend(&mut self.first, &other.first)?;
            try_extend(&mut self.second, &other.second)?;
            let [a, b] = other.adopted;
            self.adopted[0].append(a);
            self.adopted[1].append(b);
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        let empty = |own: &[f64], adopted: &Adopted| own.is_empty() && adopted.is_empty();
        if self.alternative.is_null()
            || self.method.is_null()
            || empty(&self.first, &self.adopted[0])
            || empty(&self.second, &self.adopted[1])
        {
            return Ok(Out::Null);
        }
        let first = self.sorted(0).map_err(|e| fail(Self::NAME, e))?;
        let second = self.sorted(1).map_err(|e| fail(Self::NAME, e))?;
        let r = ks_2samp(
            &first,
            &second,
            self.alternative.get().copied().unwrap_or_default(),
            self.method.get().copied().unwrap_or_default(),
        )
        .map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Text(
            ks_json(&KsReport::two_sample(&r), false).to_string(),
        ))
    }

    fn save(&self, w: &mut Writer) {
        w.constant(self.alternative.raw());
        w.constant(self.method.raw());
        w.f64_runs(&self.adopted[0].with(&self.first));
        w.f64_runs(&self.adopted[1].with(&self.second));
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(KsTestState {
            alternative: TextConstant::from_raw(r.constant()?, parse_alternative)?,
            method: TextConstant::from_raw(r.constant()?, parse_method)?,
            first: r.f64s()?,
            second: r.f64s()?,
            adopted: Default::default(),
        })
    }

    const LISTS: usize = 2;

    fn take_values(&mut self) -> Vec<Vec<f64>> {
        // Sorted here, in the part's own step (in parallel with the other parts), so
        // that the final step only merges.
        vec![
            into_sorted(std::mem::take(&mut self.first)),
            into_sorted(std::mem::take(&mut self.second)),
        ]
    }

    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<()> {
        let [a, b] = runs_of::<Self, 2>(runs)?;
        for (i, run) in [a, b].into_iter().enumerate() {
            let (own, adopted) = self.sample(i);
            adopted
                .push_sorted(run, own)
                .map_err(|e| fail(Self::NAME, ArgError::from(e)))?;
        }
        Ok(())
    }
}

// ---------------------------------------------------------------------------------------
// Scalars on distribution values

/// The most rows a weighted empirical distribution stands for in a rank test: each whole
/// weight `w` becomes `w` rows in memory (80 MB at this limit).
pub const MAX_REPLICATED_ROWS: u64 = 10_000_000;

/// The sorted rows of one sample of a rank test, borrowed from the value when unweighted.
type Rows<'a> = Cow<'a, [f64]>;

/// The values of empirical distribution argument `arg` as the rows of a rank test, sorted:
/// an unweighted sample's values as they are, and with whole-number weights each value
/// repeated weight times (the test on the replicated rows, exactly).
///
/// # Errors
/// [`ArgError::FractionalWeight`] for a weight that is not a whole number;
/// [`ArgError::TooManyRows`] when the weights sum to more than [`MAX_REPLICATED_ROWS`].
fn rows_of(s: &Sample, arg: usize) -> std::result::Result<Rows<'_>, ArgError> {
    let Some(weights) = s.weights() else {
        return Ok(Cow::Borrowed(s.values()));
    };
    if let Some(&weight) = weights.iter().find(|w| w.fract() != 0.0) {
        return Err(ArgError::FractionalWeight { arg, weight });
    }
    let total = s.total_weight();
    if total > MAX_REPLICATED_ROWS as f64 {
        return Err(ArgError::TooManyRows {
            arg,
            total,
            limit: MAX_REPLICATED_ROWS,
        });
    }
    let mut rows = Vec::with_capacity(total as usize);
    for (&x, &w) in s.values().iter().zip(weights) {
        rows.extend(std::iter::repeat_n(x, w as usize));
    }
    Ok(Cow::Owned(rows))
}

/// Reads an optional TEXT option of a scalar at `idx`: absent gives the default, NULL gives
/// `None`.
fn scalar_option<T: Default, E: Into<ArgError>>(
    call: &Call<'_>,
    idx: usize,
    what: &'static str,
    parse: impl FnOnce(&str) -> std::result::Result<T, E>,
) -> Result<Option<T>> {
    let Some(v) = call.optional(idx) else {
        return Ok(Some(T::default()));
    };
    match text(v, what).map_err(|e| call.fail(e))? {
        None => Ok(None),
        Some(v) => parse(v).map(Some).map_err(|e| call.fail(e)),
    }
}

/// How `dist_ks` computes its p-value: one of the Kolmogorov-Smirnov methods, or the
/// Lilliefors correction for a model fitted to the same data.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum KsMethod {
    Ks(PMethod),
    Lilliefors,
}

impl Default for KsMethod {
    fn default() -> Self {
        KsMethod::Ks(PMethod::Auto)
    }
}

impl KsMethod {
    fn parse(s: &str) -> std::result::Result<KsMethod, ArgError> {
        if s.trim().eq_ignore_ascii_case("lilliefors") {
            return Ok(KsMethod::Lilliefors);
        }
        PMethod::parse(s)
            .map(KsMethod::Ks)
            .map_err(|_| ArgError::BadOption {
                what: "method",
                detail: format!(
                    "must be 'auto', 'exact', 'asymp' or 'lilliefors', got '{}'",
                    crate::stats::echo(s)
                ),
            })
    }
}

/// An empirical argument: its sample and, for a series value (`dist_series`), its
/// effective size.
#[derive(Debug, Clone, Copy)]
struct Emp<'a> {
    sample: &'a Sample,
    n_eff: Option<f64>,
}

impl<'a> Emp<'a> {
    fn of(d: &'a Dist) -> Option<Emp<'a>> {
        match d {
            Dist::Empirical(sample) => Some(Emp {
                sample,
                n_eff: None,
            }),
            Dist::Series(sample, n_eff) => Some(Emp {
                sample,
                n_eff: Some(*n_eff),
            }),
            Dist::Model(_) | Dist::Censored(_) => None,
        }
    }

    /// The size the p-value uses: n_eff for a series value, else the row count.
    fn size(&self, rows: usize) -> f64 {
        self.n_eff.unwrap_or(rows as f64)
    }

    /// Whether this side counts for fewer than its rows.
    fn reduced(&self, rows: usize) -> bool {
        self.size(rows) < rows as f64
    }

    /// The reported n_eff: a series value's, else the row count.
    fn n_eff_json(&self, rows: usize) -> serde_json::Value {
        json!(self.size(rows))
    }
}

/// The name of the p-value method when an effective size below n replaces n.
pub const N_EFF_METHOD: &str = "asymptotic with n_eff";

/// A whole effective size for the Kolmogorov distributions, at least 1.
fn whole_size(n_eff: f64) -> usize {
    (n_eff.round_ties_even() as usize).max(1)
}

/// The two-sample Kolmogorov-Smirnov test of two empirical arguments, as `dist_ks`
/// (`as_distance` false) or `dist_distance` reports it. When either is a series value
/// counting for fewer than its rows, the statistic is that of the rows and the p-value the
/// asymptotic one at the effective sizes (the exact lattice count assumes independent
/// rows, so a forced 'exact' is an error); a series value adds `n_eff1` and `n_eff2`.
fn ks_two(
    x: Emp<'_>,
    y: Emp<'_>,
    alternative: Alternative,
    method: PMethod,
    as_distance: bool,
) -> std::result::Result<serde_json::Value, ArgError> {
    let xs = rows_of(x.sample, 1)?;
    let ys = rows_of(y.sample, 2)?;
    let reduced = x.reduced(xs.len()) || y.reduced(ys.len());
    let mut report = if reduced {
        if method == PMethod::Exact {
            return Err(exact_needs_independence());
        }
        let s = two_sample_statistic(&xs, &ys)?;
        let d = s.d(alternative);
        let p = asymptotic_2samp_p(
            whole_size(x.size(xs.len())),
            whole_size(y.size(ys.len())),
            d,
            alternative,
        );
        ks_json(
            &KsReport {
                d,
                p,
                n1: json!(xs.len()),
                n2: json!(ys.len()),
                method: N_EFF_METHOD,
                alternative,
                family: None,
            },
            as_distance,
        )
    } else {
        let r = ks_2samp(&xs, &ys, alternative, method)?;
        ks_json(&KsReport::two_sample(&r), as_distance)
    };
    if x.n_eff.is_some() || y.n_eff.is_some() {
        report["n_eff1"] = x.n_eff_json(xs.len());
        report["n_eff2"] = y.n_eff_json(ys.len());
    }
    Ok(report)
}

/// The method of a Cramer-von Mises or Anderson-Darling result whose p-value is withheld
/// because a series value counts for fewer than its rows.
pub const WITHHELD: &str = "no p-value: serially correlated readings (n_eff below n)";

/// The error for a forced exact p-value on a series value.
fn exact_needs_independence() -> ArgError {
    ArgError::BadOption {
        what: "method",
        detail: "'exact' counts splits of independent rows and does not apply to a series \
                 value whose n_eff is below its n; use 'auto' or 'asymp' (the asymptotic \
                 p-value at n_eff)"
            .to_string(),
    }
}

/// Adds `n_eff1` and `n_eff2` to a two-sample report when either side is a series value.
fn add_n_eff(report: &mut serde_json::Value, x: Emp<'_>, y: Emp<'_>, n1: usize, n2: usize) {
    if x.n_eff.is_some() || y.n_eff.is_some() {
        report["n_eff1"] = x.n_eff_json(n1);
        report["n_eff2"] = y.n_eff_json(n2);
    }
}

/// What a one-sample test against a model needs to know about the call.
struct OneSample<'a> {
    /// The empirical distribution.
    sample: &'a Sample,
    /// Its effective size when it is a series value.
    n_eff: Option<f64>,
    /// Its argument number (1 or 2).
    arg: usize,
    /// The model.
    model: &'a Model,
}

/// The two distribution arguments of a comparison.
enum Pair<'a> {
    /// Two empirical distributions: a two-sample comparison.
    Two(Emp<'a>, Emp<'a>),
    /// An empirical distribution and a model: a one-sample one.
    One(OneSample<'a>),
    /// A censored estimate (argument `arg`) and a model: a distance only.
    Censored {
        estimate: &'a Censored,
        arg: usize,
        model: &'a Model,
    },
}

impl<'a> Pair<'a> {
    /// Sorts the arguments into a comparison; two models are an error (`why` says what
    /// the function compares).
    fn of(d1: &'a Dist, d2: &'a Dist, why: &'static str) -> std::result::Result<Self, ArgError> {
        match (Emp::of(d1), Emp::of(d2), d1, d2) {
            (Some(x), Some(y), ..) => return Ok(Pair::Two(x, y)),
            (Some(x), None, _, Dist::Model(model)) => {
                return Ok(Pair::One(OneSample {
                    sample: x.sample,
                    n_eff: x.n_eff,
                    arg: 1,
                    model,
                }));
            }
            (None, Some(y), Dist::Model(model), _) => {
                return Ok(Pair::One(OneSample {
                    sample: y.sample,
                    n_eff: y.n_eff,
                    arg: 2,
                    model,
                }));
            }
            _ => {}
        }
        match (d1, d2) {
            (Dist::Model(_), Dist::Model(_)) => Err(ArgError::NeedsEmpirical {
                arg: 1,
                got: d1.kind(),
                instead: why,
            }),
            (Dist::Censored(estimate), Dist::Model(model)) => Ok(Pair::Censored {
                estimate,
                arg: 1,
                model,
            }),
            (Dist::Model(model), Dist::Censored(estimate)) => Ok(Pair::Censored {
                estimate,
                arg: 2,
                model,
            }),
            (Dist::Censored(_), _) => Err(ArgError::NotForCensored {
                arg: 1,
                got: d1.kind(),
            }),
            (_, Dist::Censored(_)) => Err(ArgError::NotForCensored {
                arg: 2,
                got: d2.kind(),
            }),
            // Handled above: at least one side is empirical and the other a model.
            _ => Err(ArgError::Internal("an unpaired distribution".into())),
        }
    }
}

impl<'a> OneSample<'a> {
    /// The sample's rows: whole weights replicated, as in the two-sample tests.
    fn rows(&self) -> std::result::Result<Rows<'a>, ArgError> {
        rows_of(self.sample, self.arg)
    }

    /// The one-sample Kolmogorov-Smirnov test of the rows against the model's cdf.
    /// `alternative` is meant with the arguments in the order given: with the model first,
    /// `greater` says the model's cdf lies above the ECDF, the kernel's `less`.
    fn ks(
        &self,
        rows: &[f64],
        alternative: Alternative,
        method: PMethod,
    ) -> std::result::Result<KsOneResult, TestError> {
        let kernel_alternative = match (self.arg, alternative) {
            (2, Alternative::Less) => Alternative::Greater,
            (2, Alternative::Greater) => Alternative::Less,
            (_, a) => a,
        };
        let reduced = self.n_eff.is_some_and(|e| e < rows.len() as f64);
        if reduced && method == PMethod::Exact {
            return Err(TestError::ExactTooLarge {
                detail: "'exact' assumes independent rows; a series value whose n_eff is \
                         below its n gets the asymptotic p-value at n_eff ('auto' or 'asymp')"
                    .to_string(),
            });
        }
        let mut r = ks_1samp(rows, |t| self.model.cdf(t), kernel_alternative, method)?;
        r.alternative = alternative;
        if let (true, Some(n_eff)) = (reduced, self.n_eff) {
            // Kolmogorov's limit (two-sided) or Smirnov's exp(-2 z^2) (one-sided), z =
            // sqrt(n_eff) d.
            let z = n_eff.sqrt() * r.d;
            r.p = match alternative {
                Alternative::TwoSided => kolmogorov_limit_sf(z),
                _ => (-2.0 * z * z).exp(),
            }
            .clamp(0.0, 1.0);
        }
        Ok(r)
    }

    /// The p-value method's name for a result of [`OneSample::ks`].
    fn method_name(&self, r: &KsOneResult) -> &'static str {
        if self.n_eff.is_some_and(|e| e < r.n as f64) {
            N_EFF_METHOD
        } else {
            r.method.name()
        }
    }

    /// Adds `n_eff1` and `n_eff2` (null on the model's side) for a series value.
    fn add_n_eff(&self, report: &mut serde_json::Value, rows: usize) {
        if let Some(n_eff) = self.n_eff {
            let (a, b) = if self.arg == 1 {
                (json!(n_eff.min(rows as f64)), serde_json::Value::Null)
            } else {
                (serde_json::Value::Null, json!(n_eff.min(rows as f64)))
            };
            report["n_eff1"] = a;
            report["n_eff2"] = b;
        }
    }

    /// `(n1, n2)` for a result: the sample's size on its side, null on the model's.
    fn sizes(&self, n: usize) -> (serde_json::Value, serde_json::Value) {
        if self.arg == 1 {
            (json!(n), serde_json::Value::Null)
        } else {
            (serde_json::Value::Null, json!(n))
        }
    }

    /// The report of a one-sample result, its p-value computed by `method`.
    fn report<'r>(&'r self, r: &KsOneResult, method: &'r str) -> KsReport<'r> {
        let (n1, n2) = self.sizes(r.n);
        KsReport {
            d: r.d,
            p: r.p,
            n1,
            n2,
            method,
            alternative: r.alternative,
            family: Some(self.model.family_name()),
        }
    }

    /// The Lilliefors test: the statistic against the model, which must be the sample's
    /// normal or exponential maximum-likelihood fit, and its Monte Carlo p-value.
    fn lilliefors(
        &self,
        alternative: Alternative,
    ) -> std::result::Result<serde_json::Value, ArgError> {
        let wrong = |detail: String| ArgError::BadOption {
            what: "method",
            detail,
        };
        if alternative != Alternative::TwoSided {
            return Err(wrong(format!(
                "'lilliefors' is two-sided; drop the alternative '{}' or use 'two-sided'",
                alternative.name()
            )));
        }
        let family = match self.model.law() {
            Law::Parametric(p) if p.family() == Family::Normal => lilliefors::Family::Normal,
            Law::Parametric(p) if p.family() == Family::Exponential => {
                lilliefors::Family::Exponential
            }
            _ => {
                return Err(wrong(format!(
                    "'lilliefors' needs a normal or exponential model fitted to the sample, \
                     got {}",
                    self.model.kind()
                )));
            }
        };
        let rows = self.rows()?;
        if self.n_eff.is_some_and(|e| e < rows.len() as f64) {
            return Err(wrong(
                "'lilliefors' simulates independent rows and does not apply to a series value \
                 whose n_eff is below its n; use 'auto' (the asymptotic p-value at n_eff)"
                    .to_string(),
            ));
        }
        if rows.len() < family.min_n() {
            return Err(TestError::TooFewValues {
                needed: family.min_n(),
                got: rows.len(),
            }
            .into());
        }
        self.model.check_fit_of(&rows)?;
        let mut r = self.ks(&rows, Alternative::TwoSided, PMethod::Auto)?;
        r.p = lilliefors_p(r.d, r.n, family, Scale::MaximumLikelihood);
        let mut out = ks_json(&self.report(&r, "lilliefors"), false);
        out["replicates"] = json!(lilliefors::REPLICATES);
        Ok(out)
    }
}

/// `dist_ks(d1, d2 [, alternative [, method]])`: two-sample on two empirical values,
/// one-sample when one of them is a model.
fn dist_ks(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_ks";
    let d1 = call.dist(0)?;
    let d2 = call.dist(1)?;
    let alternative = scalar_option(call, 2, "alternative", Alternative::parse)?;
    let method = scalar_option(call, 3, "method", KsMethod::parse)?;
    let (Some(d1), Some(d2), Some(alternative), Some(method)) = (d1, d2, alternative, method)
    else {
        return Ok(Out::Null);
    };
    let pair = Pair::of(
        &d1,
        &d2,
        "dist_ks compares data with data or with a model, so one argument must be empirical",
    )
    .map_err(|e| fail(NAME, e))?;
    let out = match (pair, method) {
        (Pair::Two(x, y), KsMethod::Ks(method)) => {
            ks_two(x, y, alternative, method, false).map_err(|e| fail(NAME, e))?
        }
        (Pair::Two(..), KsMethod::Lilliefors) => {
            return Err(fail(
                NAME,
                ArgError::BadOption {
                    what: "method",
                    detail: "'lilliefors' tests one empirical distribution against the normal \
                             or exponential model dist_fit fitted to it; one argument must be \
                             that model"
                        .to_string(),
                },
            ));
        }
        (Pair::One(one), KsMethod::Ks(method)) => {
            let rows = one.rows().map_err(|e| fail(NAME, e))?;
            let r = one
                .ks(&rows, alternative, method)
                .map_err(|e| fail(NAME, e))?;
            let mut out = ks_json(&one.report(&r, one.method_name(&r)), false);
            one.add_n_eff(&mut out, rows.len());
            out
        }
        (Pair::One(one), KsMethod::Lilliefors) => {
            one.lilliefors(alternative).map_err(|e| fail(NAME, e))?
        }
        (Pair::Censored { .. }, KsMethod::Lilliefors) => {
            return Err(fail(
                NAME,
                ArgError::BadOption {
                    what: "method",
                    detail: "'lilliefors' needs an empirical distribution; a censored estimate \
                             gets the distance only (p null)"
                        .to_string(),
                },
            ));
        }
        (
            Pair::Censored {
                estimate,
                arg,
                model,
            },
            KsMethod::Ks(_),
        ) => censored_ks(estimate, arg, model, alternative),
    };
    Ok(Out::Text(out.to_string()))
}

/// `dist_ks` between a censored estimate (argument `arg`) and a model: the distance over
/// the points where the estimate's cdf is defined, and no p-value (the Kolmogorov
/// distributions assume complete samples; under censoring they do not hold).
fn censored_ks(
    estimate: &Censored,
    arg: usize,
    model: &Model,
    alternative: Alternative,
) -> serde_json::Value {
    let k = estimate.ks_distance(|t| model.cdf(t));
    // 'greater': the cdf of argument 1 lies above that of argument 2 somewhere.
    let d = match (alternative, arg) {
        (Alternative::TwoSided, _) => k.d,
        (Alternative::Greater, 1) | (Alternative::Less, 2) => k.d_plus,
        _ => k.d_minus,
    };
    let (n1, n2) = if arg == 1 {
        (json!(estimate.n()), serde_json::Value::Null)
    } else {
        (serde_json::Value::Null, json!(estimate.n()))
    };
    json!({
        "d": d,
        "p": null,
        "n1": n1,
        "n2": n2,
        "method": "distance only",
        "alternative": alternative.name(),
        "test": "one-sample",
        "family": model.family_name(),
        "estimate": estimate.method().name(),
    })
}

/// The metrics of `dist_distance`.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
enum Metric {
    Ks,
    Wasserstein,
    Cvm,
    Ad,
}

impl Metric {
    fn parse(s: &str) -> std::result::Result<Metric, ArgError> {
        match s.trim().to_ascii_lowercase().as_str() {
            "ks" => Ok(Metric::Ks),
            "wasserstein" => Ok(Metric::Wasserstein),
            "cvm" => Ok(Metric::Cvm),
            "ad" => Ok(Metric::Ad),
            _ => Err(ArgError::BadOption {
                what: "metric",
                detail: format!(
                    "must be 'ks', 'wasserstein', 'cvm' or 'ad', got '{}'",
                    crate::stats::echo(s)
                ),
            }),
        }
    }

    fn name(self) -> &'static str {
        match self {
            Metric::Ks => "ks",
            Metric::Wasserstein => "wasserstein",
            Metric::Cvm => "cvm",
            Metric::Ad => "ad",
        }
    }
}

/// How many observations a sample stands for in a result: its count, or its total weight
/// when weighted.
fn size_json(s: &Sample) -> serde_json::Value {
    if s.is_weighted() {
        json!(s.total_weight())
    } else {
        json!(s.len())
    }
}

/// `dist_distance(d1, d2, metric)`.
fn dist_distance(call: &mut Call<'_>) -> Result<Out> {
    const NAME: &str = "dist_distance";
    let d1 = call.dist(0)?;
    let d2 = call.dist(1)?;
    let metric = text(call.get(2), "metric")
        .and_then(|m| m.map(Metric::parse).transpose())
        .map_err(|e| fail(NAME, e))?;
    let (Some(d1), Some(d2), Some(metric)) = (d1, d2, metric) else {
        return Ok(Out::Null);
    };
    let pair = Pair::of(
        &d1,
        &d2,
        "dist_distance measures data against data or against a model, so one argument must \
         be empirical",
    )
    .map_err(|e| fail(NAME, e))?;
    let (x, y) = match pair {
        Pair::Two(x, y) => (x, y),
        Pair::One(one) => return one_sample_distance(&one, metric).map_err(|e| fail(NAME, e)),
        Pair::Censored { arg, .. } => {
            let got = if arg == 1 { d1.kind() } else { d2.kind() };
            return Err(fail(NAME, ArgError::NotForCensored { arg, got }));
        }
    };
    // The rank metrics read whole weights as replicated rows.
    let (ex, ey) = (x, y);
    let (x, y) = (ex.sample, ey.sample);
    let rows = || -> Result<(Rows<'_>, Rows<'_>)> {
        let xs = rows_of(x, 1).map_err(|e| fail(NAME, e))?;
        let ys = rows_of(y, 2).map_err(|e| fail(NAME, e))?;
        Ok((xs, ys))
    };
    // Whether a series value counts for fewer than its rows: the Cramer-von Mises and
    // Anderson-Darling p-values have no effective-size form here, so they are withheld.
    let reduced = |xs: &[f64], ys: &[f64]| ex.reduced(xs.len()) || ey.reduced(ys.len());
    let out = match metric {
        Metric::Wasserstein => {
            wasserstein_1(x.values(), x.weights(), y.values(), y.weights()).map(|w| {
                let mut v = json!({
                    "metric": metric.name(),
                    "statistic": w,
                    "n1": size_json(x),
                    "n2": size_json(y),
                });
                let (n1, n2) = (x.total_weight() as usize, y.total_weight() as usize);
                add_n_eff(&mut v, ex, ey, n1, n2);
                v
            })
        }
        Metric::Ks => {
            return ks_two(ex, ey, Alternative::TwoSided, PMethod::Auto, true)
                .map(|v| Out::Text(v.to_string()))
                .map_err(|e| fail(NAME, e));
        }
        Metric::Cvm => {
            let (xs, ys) = rows()?;
            let withheld = reduced(&xs, &ys);
            cramer_von_mises_2samp(&xs, &ys, PMethod::Auto).map(|r| {
                let mut v = json!({
                    "metric": metric.name(),
                    "statistic": r.statistic,
                    "p": if withheld { None } else { Some(r.p) },
                    "method": if withheld { WITHHELD } else { r.method.name() },
                    "n1": xs.len(),
                    "n2": ys.len(),
                });
                add_n_eff(&mut v, ex, ey, xs.len(), ys.len());
                v
            })
        }
        Metric::Ad => {
            let (xs, ys) = rows()?;
            let withheld = reduced(&xs, &ys);
            anderson_darling_ksamp(&[&xs, &ys]).map(|r| {
                let mut v = json!({
                    "metric": metric.name(),
                    "statistic": r.statistic,
                    "a2akn": r.a2akn,
                    "p": if withheld { None } else { Some(r.p) },
                    "p_range": r.p_range.name(),
                    "method": if withheld { WITHHELD } else { "interpolated" },
                    "n1": xs.len(),
                    "n2": ys.len(),
                });
                add_n_eff(&mut v, ex, ey, xs.len(), ys.len());
                v
            })
        }
    };
    match out {
        Ok(v) => Ok(Out::Text(v.to_string())),
        // Too small for the metric: no statistic to report (documented).
        Err(TestError::TooFewValues { .. }) => Ok(Out::Null),
        Err(e) => Err(fail(NAME, e)),
    }
}

/// `dist_distance` between an empirical distribution and a model: the one-sample
/// Kolmogorov-Smirnov test for 'ks'; the other metrics compare two samples.
fn one_sample_distance(one: &OneSample<'_>, metric: Metric) -> std::result::Result<Out, ArgError> {
    if metric != Metric::Ks {
        return Err(ArgError::NeedsEmpirical {
            arg: 3 - one.arg,
            got: one.model.kind(),
            instead: match metric {
                Metric::Wasserstein => {
                    "metric 'wasserstein' compares two samples; against a model use metric 'ks' \
                     (or dist_ks)"
                }
                _ => {
                    "metrics 'cvm' and 'ad' are two-sample tests here; against a model use \
                     metric 'ks' (or dist_ks)"
                }
            },
        });
    }
    let rows = one.rows()?;
    let r = one.ks(&rows, Alternative::TwoSided, PMethod::Auto)?;
    let mut out = ks_json(&one.report(&r, one.method_name(&r)), true);
    one.add_n_eff(&mut out, rows.len());
    Ok(Out::Text(out.to_string()))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn whole_weights_become_replicated_rows() {
        // By the definition of frequency weights: a value with weight w stands for w rows.
        let s = Sample::from_pairs(vec![(2.0, 3.0), (1.0, 1.0), (5.0, 2.0)]).unwrap();
        assert_eq!(&*rows_of(&s, 1).unwrap(), &[1.0, 2.0, 2.0, 2.0, 5.0, 5.0]);
        let plain = Sample::from_values(vec![3.0, 1.0]).unwrap();
        assert!(matches!(rows_of(&plain, 1), Ok(Cow::Borrowed(&[1.0, 3.0]))));
        let fractional = Sample::from_pairs(vec![(1.0, 2.0), (4.0, 0.5)]).unwrap();
        assert_eq!(
            rows_of(&fractional, 2).unwrap_err(),
            ArgError::FractionalWeight {
                arg: 2,
                weight: 0.5
            }
        );
        let heavy = Sample::from_pairs(vec![(1.0, 2e7)]).unwrap();
        assert!(matches!(
            rows_of(&heavy, 1),
            Err(ArgError::TooManyRows { arg: 1, .. })
        ));
    }

    #[test]
    fn metrics_are_named() {
        for name in ["ks", "wasserstein", "cvm", "ad"] {
            assert_eq!(Metric::parse(&name.to_uppercase()).unwrap().name(), name);
        }
        assert_eq!(
            fail("dist_distance", Metric::parse("energy").unwrap_err()).to_string(),
            "dist_distance: metric must be 'ks', 'wasserstein', 'cvm' or 'ad', got 'energy'"
        );
    }
}
