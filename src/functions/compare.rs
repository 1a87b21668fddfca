//! Two-sample comparison aggregates: `ks_test`.
//!
//! Adapters only: they read and check arguments, split the rows into the two samples, and
//! hand the sorted samples to [`crate::stats::ks`]. NULL x and NULL `in_second` rows are
//! skipped; a group where either sample has no values gives NULL.

use rusqlite::functions::{Aggregate, Context};
use rusqlite::types::Value;
use serde_json::json;

use super::args::{Constant, fail, number, text};
use super::{FunctionDef, Kind, aggregate};
use crate::stats::ks::{Alternative, KsResult, PMethod, TestError, ks_2samp};

type Result<T> = rusqlite::Result<T>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[FunctionDef {
    name: "ks_test",
    kind: Kind::Aggregate,
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
           Trenkler 1995), so they stay exact for rounded measurements; the asymptotic ones are \
           Kolmogorov's limit corrected by the one-sample distribution at size n1 n2 / (n1 + n2) \
           (two-sided) and Hodges' formula (one-sided). The result's method says which was used. \
           Rows with NULL x or NULL in_second are skipped. NULL when either sample has no \
           values (there is nothing to compare), or when alternative or method is NULL. \
           alternative and method must be the same on every row of a group. Errors: non-numeric \
           x or in_second, an unknown alternative or method, an exact p-value out of reach.",
    example: "SELECT round(ks_test(column1, column1 > 3) ->> '$.p', 4) \
              FROM (VALUES (1), (2), (3), (4), (5), (6))",
    example_result: "0.1",
    register: |c, d| aggregate(c, d, || KsTest),
}];

/// The JSON text of a two-sample result.
pub fn ks_json(r: &KsResult) -> String {
    json!({
        "d": r.d,
        "p": r.p,
        "n1": r.n1,
        "n2": r.n2,
        "method": r.method.name(),
        "alternative": r.alternative.name(),
    })
    .to_string()
}

/// Reads an optional TEXT option at `idx` that must be the same on every row of a group,
/// parsing it once (with `parse`) on the first row; a NULL option sets `null_option`.
fn read_option(
    ctx: &Context<'_>,
    idx: usize,
    what: &'static str,
    seen: &mut Constant<String>,
    null_option: &mut bool,
    parse: impl FnOnce(&str) -> std::result::Result<(), TestError>,
) -> Result<()> {
    const NAME: &str = "ks_test";
    if ctx.len() <= idx {
        return Ok(());
    }
    let v = text(ctx.get_raw(idx), what).map_err(|e| fail(NAME, e))?;
    if seen
        .observe(v.map(str::to_owned), what)
        .map_err(|e| fail(NAME, e))?
    {
        match v {
            Some(v) => parse(v).map_err(|e| fail(NAME, e))?,
            None => *null_option = true,
        }
    }
    Ok(())
}

/// State of `ks_test`: the two samples and the per-group options.
#[derive(Debug, Default)]
pub struct KsTestState {
    first: Vec<f64>,
    second: Vec<f64>,
    alternative: Constant<String>,
    method: Constant<String>,
    parsed_alternative: Option<Alternative>,
    parsed_method: Option<PMethod>,
    null_option: bool,
}

/// `ks_test(x, in_second [, alternative [, method]])`.
pub struct KsTest;

impl Aggregate<KsTestState, Value> for KsTest {
    fn init(&self, _: &mut Context<'_>) -> Result<KsTestState> {
        Ok(KsTestState::default())
    }

    fn step(&self, ctx: &mut Context<'_>, s: &mut KsTestState) -> Result<()> {
        const NAME: &str = "ks_test";
        read_option(
            ctx,
            2,
            "alternative",
            &mut s.alternative,
            &mut s.null_option,
            |a| {
                s.parsed_alternative = Some(Alternative::parse(a)?);
                Ok(())
            },
        )?;
        read_option(ctx, 3, "method", &mut s.method, &mut s.null_option, |m| {
            s.parsed_method = Some(PMethod::parse(m)?);
            Ok(())
        })?;
        let x = number(ctx.get_raw(0), "x").map_err(|e| fail(NAME, e))?;
        let second = number(ctx.get_raw(1), "in_second").map_err(|e| fail(NAME, e))?;
        if let (Some(x), Some(second)) = (x, second) {
            if second != 0.0 {
                s.second.push(x);
            } else {
                s.first.push(x);
            }
        }
        Ok(())
    }

    fn finalize(&self, _: &mut Context<'_>, s: Option<KsTestState>) -> Result<Value> {
        const NAME: &str = "ks_test";
        let Some(mut s) = s else {
            return Ok(Value::Null);
        };
        if s.null_option || s.first.is_empty() || s.second.is_empty() {
            return Ok(Value::Null);
        }
        s.first.sort_unstable_by(f64::total_cmp);
        s.second.sort_unstable_by(f64::total_cmp);
        let r = ks_2samp(
            &s.first,
            &s.second,
            s.parsed_alternative.unwrap_or_default(),
            s.parsed_method.unwrap_or_default(),
        )
        .map_err(|e| fail(NAME, e))?;
        Ok(Value::Text(ks_json(&r)))
    }
}
