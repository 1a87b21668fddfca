//! Statements on DataFusion with SQLite's binding of `->` and `->>`.
//!
//! SQLite binds `->` and `->>` tighter than any other binary operator (at the level of
//! `||`, left to right), so `j ->> '$.p' < 0.05` compares the field with 0.05 and
//! `j ->> '$.mean' * 2` doubles it. DataFusion's SQL parser gives both operators a
//! precedence below comparisons, arithmetic and `IS`, and reads those texts as
//! `j ->> ('$.p' < 0.05)` and `j ->> ('$.mean' * 2)`. [`sql`] parses a statement with
//! DataFusion's parser, re-associates every `->` and `->>` with the operator that caught
//! its left or right operand, as SQLite's grammar would have, and plans the result; a
//! check file written for SQLite then means the same on both engines.
//!
//! An operand caught on both sides (`x < j ->> 'p' + 1`) has no single re-association
//! that is right for every pair of operators; that statement is refused with an error
//! that asks for parentheses, never planned with another meaning.

use std::ops::ControlFlow;

use ::datafusion::dataframe::DataFrame;
use ::datafusion::error::DataFusionError;
use ::datafusion::prelude::SessionContext;
use ::datafusion::sql::parser::{CopyToSource, Statement};
use ::datafusion::sql::sqlparser::ast::{BinaryOperator, Expr, Value, visit_expressions_mut};

/// Runs `text` (one statement) on `ctx` as [`SessionContext::sql`] does, with `->` and
/// `->>` bound as in SQLite (see the module docs).
///
/// # Errors
/// DataFusion's parse and planning errors, and a planning error that asks for
/// parentheses where a JSON read sits between two operators.
///
/// # Example
/// ```
/// # tokio::runtime::Builder::new_current_thread().build().unwrap().block_on(async {
/// use datafusion::prelude::SessionContext;
/// let mut ctx = SessionContext::new();
/// ogive::datafusion::register(&mut ctx).unwrap();
/// let q = r#"SELECT '{"p": 0.01}' ->> '$.p' < 0.05 AS small"#;
/// let batches = ogive::datafusion::sql(&ctx, q).await.unwrap().collect().await.unwrap();
/// let small = ogive::datafusion::rows(&batches).unwrap();
/// assert_eq!(small, vec![vec![ogive::catalogue::value::Out::Integer(1)]]);
/// # });
/// ```
pub async fn sql(ctx: &SessionContext, text: &str) -> Result<DataFrame, DataFusionError> {
    let state = ctx.state();
    let dialect = state.config().options().sql_parser.dialect;
    let mut statement = state.sql_to_statement(text, &dialect)?;
    sqlite_arrows(&mut statement)?;
    let plan = state.statement_to_plan(statement).await?;
    ctx.execute_logical_plan(plan).await
}

/// Re-associates every `->` and `->>` in a statement.
fn sqlite_arrows(statement: &mut Statement) -> Result<(), DataFusionError> {
    let flow = match statement {
        Statement::Statement(s) => visit_expressions_mut(s.as_mut(), rebind_flow),
        Statement::Explain(e) => return sqlite_arrows(&mut e.statement),
        Statement::CopyTo(c) => match &mut c.source {
            CopyToSource::Query(q) => visit_expressions_mut(q.as_mut(), rebind_flow),
            CopyToSource::Relation(_) => ControlFlow::Continue(()),
        },
        Statement::CreateExternalTable(_) | Statement::Reset(_) => ControlFlow::Continue(()),
    };
    match flow {
        ControlFlow::Break(e) => Err(e),
        ControlFlow::Continue(()) => Ok(()),
    }
}

fn rebind_flow(e: &mut Expr) -> ControlFlow<DataFusionError> {
    match rebind(e) {
        Ok(()) => ControlFlow::Continue(()),
        Err(e) => ControlFlow::Break(e),
    }
}

/// Which operand of an operator.
#[derive(Clone, Copy)]
enum Side {
    First,
    Last,
}

/// The first or last operand of an operator that SQLite binds looser than `->>` and
/// DataFusion's parser tighter, so that it may have caught a JSON read's operand.
/// Parenthesised operands are [`Expr::Nested`] and never match.
fn operand(e: &mut Expr, side: Side) -> Option<&mut Expr> {
    use BinaryOperator as B;
    let pick = |first, last| match side {
        Side::First => Some(first),
        Side::Last => Some(last),
    };
    match e {
        Expr::BinaryOp {
            left,
            op:
                B::Plus
                | B::Minus
                | B::Multiply
                | B::Divide
                | B::Modulo
                | B::StringConcat
                | B::Gt
                | B::Lt
                | B::GtEq
                | B::LtEq
                | B::Eq
                | B::NotEq
                | B::BitwiseOr
                | B::BitwiseAnd
                | B::PGBitwiseShiftLeft
                | B::PGBitwiseShiftRight,
            right,
        } => pick(left.as_mut(), right.as_mut()),
        Expr::IsNull(x)
        | Expr::IsNotNull(x)
        | Expr::IsTrue(x)
        | Expr::IsNotTrue(x)
        | Expr::IsFalse(x)
        | Expr::IsNotFalse(x)
        | Expr::IsUnknown(x)
        | Expr::IsNotUnknown(x)
        | Expr::InList { expr: x, .. }
        | Expr::InSubquery { expr: x, .. } => match side {
            Side::First => Some(x.as_mut()),
            Side::Last => None,
        },
        Expr::IsDistinctFrom(a, b) | Expr::IsNotDistinctFrom(a, b) => pick(a.as_mut(), b.as_mut()),
        Expr::Between { expr, high, .. } => pick(expr.as_mut(), high.as_mut()),
        Expr::Like { expr, pattern, .. }
        | Expr::ILike { expr, pattern, .. }
        | Expr::SimilarTo { expr, pattern, .. } => pick(expr.as_mut(), pattern.as_mut()),
        _ => None,
    }
}

/// `e` with a placeholder left behind.
fn take(e: &mut Expr) -> Expr {
    std::mem::replace(e, Expr::value(Value::Null))
}

/// Re-associates one `->` or `->>` node whose operands the parser gave to a neighbour.
/// Operands are already re-associated (the visit is bottom-up).
fn rebind(e: &mut Expr) -> Result<(), DataFusionError> {
    if !matches!(
        e,
        Expr::BinaryOp {
            op: BinaryOperator::Arrow | BinaryOperator::LongArrow,
            ..
        }
    ) {
        return Ok(());
    }
    let Expr::BinaryOp {
        mut left,
        op,
        mut right,
    } = take(e)
    else {
        return Ok(());
    };
    let caught_left = operand(&mut left, Side::Last).is_some();
    let caught_right = operand(&mut right, Side::First).is_some();
    if caught_left && caught_right {
        return Err(DataFusionError::Plan(format!(
            "`{op}` sits between two operators here ({left} {op} {right}); SQLite binds \
             it tighter than either, DataFusion's parser looser: put the JSON read in \
             parentheses, e.g. (j {op} '$.p')"
        )));
    }
    *e = if let Some(slot) = operand(&mut left, Side::Last) {
        // (a OP x) ->> p  becomes  a OP (x ->> p)
        let mut inner = Expr::BinaryOp {
            left: Box::new(take(slot)),
            op,
            right,
        };
        rebind(&mut inner)?;
        *slot = inner;
        *left
    } else if let Some(slot) = operand(&mut right, Side::First) {
        // j ->> (p OP b)  becomes  (j ->> p) OP b
        let mut inner = Expr::BinaryOp {
            left,
            op,
            right: Box::new(take(slot)),
        };
        rebind(&mut inner)?;
        *slot = inner;
        *right
    } else {
        Expr::BinaryOp { left, op, right }
    };
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use ::datafusion::sql::sqlparser::dialect::GenericDialect;
    use ::datafusion::sql::sqlparser::parser::Parser;

    /// The expression `text` after re-association, its tree spelled out by [`shape`].
    fn rebound(text: &str) -> Result<String, DataFusionError> {
        let mut e = Parser::new(&GenericDialect {})
            .try_with_sql(text)
            .and_then(|mut p| p.parse_expr())
            .map_err(|e| DataFusionError::Plan(e.to_string()))?;
        let flow = ::datafusion::sql::sqlparser::ast::visit_expressions_mut(&mut e, rebind_flow);
        if let ControlFlow::Break(err) = flow {
            return Err(err);
        }
        Ok(shape(&e))
    }

    /// A tree with every operator's operands in brackets.
    fn shape(e: &Expr) -> String {
        match e {
            Expr::BinaryOp { left, op, right } => {
                format!("[{} {op} {}]", shape(left), shape(right))
            }
            Expr::IsNull(x) => format!("[{} IS NULL]", shape(x)),
            Expr::Between {
                expr, low, high, ..
            } => format!(
                "[{} BETWEEN {} AND {}]",
                shape(expr),
                shape(low),
                shape(high)
            ),
            Expr::InList { expr, list, .. } => format!(
                "[{} IN ({})]",
                shape(expr),
                list.iter().map(shape).collect::<Vec<_>>().join(", ")
            ),
            Expr::Like { expr, pattern, .. } => {
                format!("[{} LIKE {}]", shape(expr), shape(pattern))
            }
            Expr::Nested(x) => format!("({})", shape(x)),
            other => other.to_string(),
        }
    }

    /// Expected trees: SQLite's grammar (lang_expr.html, "Operators, and Parse-Affecting
    /// Attributes": `->` and `->>` with `||` above `*`, `+`, comparisons, `IS`, `BETWEEN`,
    /// `IN`, `LIKE`), checked against the Debian sqlite3 CLI where marked.
    #[test]
    fn json_reads_bind_as_in_sqlite() {
        let cases = [
            // sqlite3: SELECT '{"p":0.01}' ->> '$.p' < 0.05  -> 1
            ("j ->> '$.p' < 0.05", "[[j ->> '$.p'] < 0.05]"),
            // sqlite3: SELECT '{"m":2}' ->> 'm' * 3 + 1  -> 7
            ("j ->> 'm' * 3 + 1", "[[[j ->> 'm'] * 3] + 1]"),
            ("x < j ->> 'p'", "[x < [j ->> 'p']]"),
            ("x < y + j ->> 'p'", "[x < [y + [j ->> 'p']]]"),
            ("j -> 'a' ->> 'b' = 2", "[[[j -> 'a'] ->> 'b'] = 2]"),
            ("x = j -> 'a' ->> 'b'", "[x = [[j -> 'a'] ->> 'b']]"),
            ("j ->> 'p' IS NULL", "[[j ->> 'p'] IS NULL]"),
            ("j ->> 'p' BETWEEN 1 AND 2", "[[j ->> 'p'] BETWEEN 1 AND 2]"),
            ("x BETWEEN 1 AND j ->> 'p'", "[x BETWEEN 1 AND [j ->> 'p']]"),
            ("j ->> 'p' IN (1, 2)", "[[j ->> 'p'] IN (1, 2)]"),
            ("j ->> 'f' LIKE 'g%'", "[[j ->> 'f'] LIKE 'g%']"),
            ("j ->> 'p' || 'x'", "[[j ->> 'p'] || 'x']"),
            (
                "a AND j ->> 'p' < 1 OR b",
                "[[a AND [[j ->> 'p'] < 1]] OR b]",
            ),
            // Parentheses are the user's: kept as written.
            ("j ->> ('p' || 'q')", "[j ->> (['p' || 'q'])]"),
            ("(j ->> 'p') < 0.05", "[([j ->> 'p']) < 0.05]"),
        ];
        for (text, want) in cases {
            let got = rebound(text).unwrap();
            assert_eq!(got, want, "{text}");
        }
    }

    #[test]
    fn a_json_read_between_two_operators_asks_for_parentheses() {
        for text in ["x < j ->> 'p' + 1", "1 + j ->> 'm' * 3"] {
            let e = rebound(text).unwrap_err().to_string();
            assert!(e.contains("parentheses"), "{e}");
            assert!(e.contains("->>"), "{e}");
        }
    }
}
