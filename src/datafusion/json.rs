//! `->>` and `->` on DataFusion: reading fields of the JSON that ogive's fits, tests and
//! summaries return, with SQLite's path syntax.
//!
//! A path is `'$'` followed by `.key`, `."quoted key"` or `[N]` steps (`'$.bic'`,
//! `'$.components[0].mean'`, `'$[1]'`), or a bare key (`'bic'`) or integer (`1`), which
//! SQLite reads as `'$.bic'` and `'$[1]'`. `j -> path` is the JSON text of the element
//! (strings keep their quotes), as in SQLite. `j ->> path` is the element as an SQL
//! value; DataFusion needs one type per expression, so it is a double, except for the
//! count fields ogive writes (`n`, `n1`, `n2`, `k`, `iterations`, `component`), which are
//! integers as SQLite returns them. A string element under `->>` is an error that says
//! to use `->`; a missing element, or JSON null, is NULL; true and false are 1 and 0.

use std::sync::Arc;

use ::datafusion::arrow::datatypes::DataType;
use ::datafusion::common::{DFSchema, ScalarValue};
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::planner::{ExprPlanner, PlannerResult, RawBinaryExpr};
use ::datafusion::logical_expr::{
    ColumnarValue, Expr, ScalarFunctionArgs, ScalarUDF, ScalarUDFImpl, Signature, Volatility,
};
use ::datafusion::sql::sqlparser::ast::BinaryOperator;
use serde_json::Value;

use super::convert::{data_type, out_array};
use crate::catalogue::Returns;
use crate::catalogue::value::{Arg, Out};

/// The integer-valued fields of ogive's JSON results.
pub const COUNT_FIELDS: &[&str] = &[
    "n",
    "n1",
    "n2",
    "k",
    "iterations",
    "component",
    "n_exact",
    "n_left",
    "n_right",
];

/// What an operator returns.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Hash)]
enum Read {
    /// `->`: JSON text.
    Json,
    /// `->>` on a count field.
    Count,
    /// `->>` elsewhere.
    Number,
}

impl Read {
    fn name(self) -> &'static str {
        match self {
            Read::Json => "ogive_json_element",
            Read::Count => "ogive_json_count",
            Read::Number => "ogive_json_number",
        }
    }

    fn returns(self) -> Returns {
        match self {
            Read::Json => Returns::Text,
            Read::Count => Returns::Integer,
            Read::Number => Returns::Real,
        }
    }

    fn operator(self) -> &'static str {
        match self {
            Read::Json => "->",
            Read::Count | Read::Number => "->>",
        }
    }
}

/// The functions behind the operators.
pub fn udfs() -> Vec<ScalarUDF> {
    [Read::Json, Read::Count, Read::Number]
        .into_iter()
        .map(udf)
        .collect()
}

/// The function behind one operator.
fn udf(read: Read) -> ScalarUDF {
    ScalarUDF::new_from_impl(Element {
        read,
        signature: Signature::any(2, Volatility::Immutable),
    })
}

/// Plans `->>` and `->` as calls of the functions behind them.
#[derive(Debug)]
pub struct JsonOperators;

impl ExprPlanner for JsonOperators {
    fn plan_binary_op(
        &self,
        expr: RawBinaryExpr,
        _schema: &DFSchema,
    ) -> Result<PlannerResult<RawBinaryExpr>, DataFusionError> {
        let read = match expr.op {
            BinaryOperator::Arrow => Read::Json,
            BinaryOperator::LongArrow => {
                let last = match &expr.right {
                    Expr::Literal(ScalarValue::Utf8(Some(p)), _) => {
                        parse_path(p).ok().and_then(|steps| steps.last().cloned())
                    }
                    _ => None,
                };
                match last {
                    Some(Step::Key(k)) if COUNT_FIELDS.contains(&k.as_str()) => Read::Count,
                    _ => Read::Number,
                }
            }
            _ => return Ok(PlannerResult::Original(expr)),
        };
        Ok(PlannerResult::Planned(
            Arc::new(udf(read)).call(vec![expr.left, expr.right]),
        ))
    }
}

/// One step of a path.
#[derive(Debug, Clone, PartialEq)]
enum Step {
    Key(String),
    Index(usize),
}

/// Reads SQLite's path syntax (see the module docs).
fn parse_path(p: &str) -> Result<Vec<Step>, String> {
    let Some(rest) = p.strip_prefix('$') else {
        return Ok(vec![Step::Key(p.to_string())]);
    };
    let bad = || format!("'{p}' is not a JSON path: write '$.key', '$[0]' or '$.a.b[1]'");
    let mut steps = Vec::new();
    let mut s = rest;
    while !s.is_empty() {
        if let Some(r) = s.strip_prefix('.') {
            if let Some(q) = r.strip_prefix('"') {
                let end = q.find('"').ok_or_else(bad)?;
                steps.push(Step::Key(q[..end].to_string()));
                s = &q[end + 1..];
            } else {
                let end = r.find(['.', '[']).unwrap_or(r.len());
                if end == 0 {
                    return Err(bad());
                }
                steps.push(Step::Key(r[..end].to_string()));
                s = &r[end..];
            }
        } else if let Some(r) = s.strip_prefix('[') {
            let end = r.find(']').ok_or_else(bad)?;
            steps.push(Step::Index(r[..end].trim().parse().map_err(|_| bad())?));
            s = &r[end + 1..];
        } else {
            return Err(bad());
        }
    }
    Ok(steps)
}

/// The element at `steps`, if present.
fn element<'v>(mut v: &'v Value, steps: &[Step]) -> Option<&'v Value> {
    for step in steps {
        v = match step {
            Step::Key(k) => v.as_object()?.get(k)?,
            Step::Index(i) => v.as_array()?.get(*i)?,
        };
    }
    Some(v)
}

/// A function behind an operator.
#[derive(Debug, PartialEq, Eq, Hash)]
struct Element {
    read: Read,
    signature: Signature,
}

impl Element {
    fn row(
        &self,
        json: Arg<'_>,
        path: Arg<'_>,
        parsed: &mut Option<(Vec<u8>, Value)>,
    ) -> Result<Out, DataFusionError> {
        let op = self.read.operator();
        let fail = |m: String| DataFusionError::Execution(format!("{op}: {m}"));
        let text = match json {
            Arg::Null => return Ok(Out::Null),
            Arg::Text(t) => t,
            other => {
                return Err(fail(format!(
                    "the left side must be JSON text, not {other}"
                )));
            }
        };
        let steps = match path {
            Arg::Null => return Ok(Out::Null),
            Arg::Text(p) => parse_path(&String::from_utf8_lossy(p)).map_err(fail)?,
            Arg::Integer(i) if i >= 0 => vec![Step::Index(i as usize)],
            other => {
                return Err(fail(format!(
                    "the path must be text such as '$.bic', not {other}"
                )));
            }
        };
        if parsed.as_ref().is_none_or(|(b, _)| b.as_slice() != text) {
            let v: Value = serde_json::from_slice(text)
                .map_err(|e| fail(format!("the left side is not JSON ({e})")))?;
            *parsed = Some((text.to_vec(), v));
        }
        let Some((_, root)) = parsed.as_ref() else {
            return Ok(Out::Null);
        };
        let Some(v) = element(root, &steps) else {
            return Ok(Out::Null);
        };
        Ok(match (self.read, v) {
            (Read::Json, v) => Out::Text(v.to_string()),
            (_, Value::Null) => Out::Null,
            (Read::Count, Value::Number(n)) => match n.as_f64() {
                Some(x) if x.fract() == 0.0 && x.abs() < 9.2e18 => Out::Integer(x as i64),
                _ => return Err(fail(format!("the count field is {n}, not an integer"))),
            },
            (Read::Count, Value::Bool(b)) => Out::Integer(i64::from(*b)),
            (_, Value::Bool(b)) => Out::Real(f64::from(u8::from(*b))),
            (_, Value::Number(n)) => Out::real(n.as_f64()),
            (_, Value::String(s)) => {
                return Err(fail(format!(
                    "the element is the text \"{s}\"; on DataFusion ->> reads numbers: use -> for \
                     text"
                )));
            }
            (_, other) => {
                return Err(fail(format!(
                    "the element is {}; ->> reads numbers: use -> for JSON",
                    if other.is_array() {
                        "an array"
                    } else {
                        "an object"
                    }
                )));
            }
        })
    }
}

impl ScalarUDFImpl for Element {
    fn name(&self) -> &str {
        self.read.name()
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _: &[DataType]) -> Result<DataType, DataFusionError> {
        Ok(data_type(self.read.returns()))
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue, DataFusionError> {
        super::guarded(self.read.operator(), || self.invoke(args))
    }
}

impl Element {
    fn invoke(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue, DataFusionError> {
        let rows = args.number_rows;
        let cols = super::scalar::columns(self.read.operator(), args.args)?;
        let [json, path] = cols.as_slice() else {
            return Err(DataFusionError::Internal(
                "json operator takes two sides".into(),
            ));
        };
        let mut parsed = None;
        let outs = (0..rows)
            .map(|row| self.row(json.get(row), path.get(row), &mut parsed))
            .collect::<Result<Vec<_>, _>>()?;
        let array = out_array(self.read.operator(), self.read.returns(), outs)?;
        Ok(ColumnarValue::Array(array))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn paths_read_like_sqlite() {
        assert_eq!(parse_path("$.bic").unwrap(), vec![Step::Key("bic".into())]);
        assert_eq!(parse_path("bic").unwrap(), vec![Step::Key("bic".into())]);
        assert_eq!(
            parse_path("$.components[1].mean").unwrap(),
            vec![
                Step::Key("components".into()),
                Step::Index(1),
                Step::Key("mean".into())
            ]
        );
        assert_eq!(parse_path("$[0]").unwrap(), vec![Step::Index(0)]);
        assert_eq!(
            parse_path("$.\"a b\"").unwrap(),
            vec![Step::Key("a b".into())]
        );
        assert!(parse_path("$.").is_err());
        assert!(parse_path("$[x]").is_err());
    }
}
