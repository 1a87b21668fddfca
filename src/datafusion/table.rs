//! Table registry rows (`dist_steps`, `dist_curve`, `dist_histogram`, `dist_components`)
//! as DataFusion table functions.
//!
//! DataFusion calls a table function while it plans, before the query runs, with the
//! argument expressions. Each argument is evaluated there on its own:
//!
//! - a literal, a cast or arithmetic on literals (`dist_components('{"family": ...}')`,
//!   `dist_curve(X'...', -1, 12, 30)`) is evaluated on a batch of one row;
//! - an uncorrelated scalar subquery (`dist_steps((SELECT dist_empirical(x) FROM t))`) is
//!   planned and run to its end, on a thread of its own with its own runtime (the caller
//!   is planning inside the session's runtime, which must not be blocked on); it must give
//!   one column (DataFusion's planner checks) and at most one row (none reads as NULL);
//! - a column of another table in the same `FROM` cannot be read (DataFusion has no
//!   lateral table functions). Where SQLite takes `FROM fit, dist_components(fit.m)`, pass
//!   the value as a subquery, `dist_components((SELECT dist_mixture(x, 2) FROM t))`, or
//!   use the scalar functions on each row (`dist_cdf`, `dist_quantile`, `dist_component`).

use std::sync::Arc;

use ::datafusion::arrow::array::{ArrayRef, RecordBatch, RecordBatchOptions, new_null_array};
use ::datafusion::arrow::datatypes::{Field, Schema};
use ::datafusion::catalog::view::ViewTable;
use ::datafusion::catalog::{Session, TableFunctionArgs, TableFunctionImpl, TableProvider};
use ::datafusion::common::{DFSchema, ScalarValue};
use ::datafusion::datasource::MemTable;
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::{
    ColumnarValue, Expr, LogicalPlan, LogicalPlanBuilder, Subquery, cast, col, lit,
};
use ::datafusion::physical_plan::collect;

use super::convert::{Column, data_type, out_array, read_row};
use super::{guarded, to_datafusion};
use crate::catalogue::args::{ArgError, fail};
use crate::catalogue::reader::{Call, NoMemo};
use crate::catalogue::scan::drain;
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, Imp, MAX_ARGS, Returns};

/// Marks a session whose plans are serialised to run elsewhere (a Ballista client, see
/// `crate::ballista::connect`), set as a [`SessionConfig`] extension. There a table
/// function's rows become a `VALUES` plan inside a view, which datafusion-proto carries;
/// an in-memory table, faster to plan and used everywhere else, it cannot carry.
///
/// [`SessionConfig`]: ::datafusion::prelude::SessionConfig
///
/// # Example
/// ```
/// use std::sync::Arc;
/// use datafusion::prelude::SessionConfig;
/// use ogive::datafusion::table::TravellingPlans;
/// let config = SessionConfig::new().with_extension(Arc::new(TravellingPlans));
/// assert!(config.get_extension::<TravellingPlans>().is_some());
/// ```
#[derive(Debug)]
pub struct TravellingPlans;

/// A table registry row.
pub struct TableFn {
    def: &'static FunctionDef,
}

by_name!(TableFn);

impl TableFn {
    /// The table function of a registry row.
    pub fn new(def: &'static FunctionDef) -> Self {
        TableFn { def }
    }
}

/// A declared column type as the result type it stands for: an undeclared column is a
/// count or a total of weights.
fn column_returns(sql_type: &str) -> Returns {
    match sql_type {
        "REAL" => Returns::Real,
        "INTEGER" => Returns::Integer,
        "TEXT" => Returns::Text,
        _ => Returns::Count,
    }
}

impl TableFunctionImpl for TableFn {
    fn call_with_args(
        &self,
        args: TableFunctionArgs,
    ) -> Result<Arc<dyn TableProvider>, DataFusionError> {
        guarded(self.def.name, || self.provider(&args))
    }
}

impl TableFn {
    /// The rows of one call, as an in-memory table.
    fn provider(
        &self,
        args: &TableFunctionArgs,
    ) -> Result<Arc<dyn TableProvider>, DataFusionError> {
        let def = self.def;
        let Imp::Table(imp) = def.imp else {
            return Err(DataFusionError::Internal(format!(
                "{} is not a table function",
                def.name
            )));
        };
        let exprs = args.exprs();
        if !def.arities.contains(&(exprs.len() as i32)) {
            return Err(DataFusionError::Plan(
                fail(
                    def.name,
                    ArgError::Missing {
                        signature: def.signature,
                    },
                )
                .to_string(),
            ));
        }
        // Each argument on its own, on a batch of one row with no columns.
        let empty = DFSchema::empty();
        let one_row = RecordBatch::try_new_with_options(
            Arc::new(Schema::empty()),
            vec![],
            &RecordBatchOptions::new().with_row_count(Some(1)),
        )?;
        let mut cols = Vec::with_capacity(exprs.len());
        for (i, e) in exprs.iter().enumerate() {
            let what = imp.args.get(i).copied().unwrap_or("?");
            let array = if let Expr::ScalarSubquery(q) = e {
                self.subquery_value(args.session(), i, what, q)?
            } else {
                let value = args
                    .session()
                    .create_physical_expr(e.clone(), &empty)
                    .and_then(|p| p.evaluate(&one_row))
                    .map_err(|err| {
                        DataFusionError::Plan(format!(
                            "{}: argument {} ({what}) must be a constant or an uncorrelated \
                             subquery on DataFusion, which plans table functions before the \
                             query runs: pass the value as a literal or as (SELECT ...), or \
                             use the scalar functions on each row ({err})",
                            def.name,
                            i + 1,
                        ))
                    })?;
                match value {
                    ColumnarValue::Array(a) => a,
                    ColumnarValue::Scalar(s) => s.to_array_of_size(1)?,
                }
            };
            cols.push(Column::new(def.name, i, array, true)?);
        }
        let mut values = [Arg::Null; MAX_ARGS];
        let n = read_row(&cols, 0, &mut values);
        // As in SQLite: a NULL argument gives no rows.
        let flat: Vec<Out> = if values[..n].contains(&Arg::Null) {
            Vec::new()
        } else {
            let mut memo = NoMemo;
            let mut call = Call::new(def.name, &values[..n], &mut memo);
            // DataFusion plans the rows as one batch: all of them are computed here.
            (imp.rows)(&mut call)
                .and_then(|scan| drain(def.name, scan))
                .map_err(to_datafusion)?
        };
        let width = imp.columns.len();
        let fields: Vec<Field> = imp
            .columns
            .iter()
            .map(|(name, ty)| Field::new(*name, data_type(column_returns(ty)), true))
            .collect();
        let schema = Arc::new(Schema::new(fields));
        let mut arrays: Vec<ArrayRef> = Vec::with_capacity(width);
        for (j, (_, ty)) in imp.columns.iter().enumerate() {
            let column: Vec<Out> = flat.iter().skip(j).step_by(width.max(1)).cloned().collect();
            arrays.push(out_array(def.name, column_returns(ty), column)?);
        }
        let batch = if flat.is_empty() {
            RecordBatch::new_empty(Arc::clone(&schema))
        } else {
            RecordBatch::try_new(Arc::clone(&schema), arrays)?
        };
        if args
            .session()
            .config()
            .get_extension::<TravellingPlans>()
            .is_some()
        {
            return Ok(Arc::new(ViewTable::new(values_plan(&batch)?, None)));
        }
        Ok(Arc::new(MemTable::try_new(schema, vec![vec![batch]])?))
    }

    /// The value of a scalar subquery argument (argument `i`, named `what`): its plan run
    /// to the end on a thread of its own, as a one-row array (NULL when it gives no row).
    ///
    /// # Errors
    /// A plan error naming the function when the subquery reads the outer query's columns
    /// or gives more than one row; DataFusion's error when running it fails. (DataFusion's
    /// planner itself refuses a subquery of more than one column.)
    fn subquery_value(
        &self,
        session: &dyn Session,
        i: usize,
        what: &str,
        q: &Subquery,
    ) -> Result<ArrayRef, DataFusionError> {
        let name = self.def.name;
        let wrong = |why: String| {
            DataFusionError::Plan(format!("{name}: argument {} ({what}) {why}", i + 1))
        };
        if !q.outer_ref_columns.is_empty() {
            return Err(wrong(
                "is a subquery that reads the outer query's columns; on DataFusion a table \
                 function's subquery must stand alone (no lateral table functions)"
                    .into(),
            ));
        }
        let plan = q.subquery.as_ref();
        // The caller plans inside the session's runtime: run the subquery on a runtime of
        // its own, on another thread, and wait for it.
        let batches = std::thread::scope(|scope| {
            scope
                .spawn(|| {
                    let runtime = tokio::runtime::Builder::new_current_thread()
                        .enable_all()
                        .build()
                        .map_err(|e| DataFusionError::External(Box::new(e)))?;
                    runtime.block_on(async {
                        let physical = session.create_physical_plan(plan).await?;
                        collect(physical, session.task_ctx()).await
                    })
                })
                .join()
        })
        .map_err(|_| {
            to_datafusion(fail(
                name,
                ArgError::Internal("a panic was caught in a subquery argument".into()),
            ))
        })??;
        let rows: usize = batches.iter().map(RecordBatch::num_rows).sum();
        match batches.iter().find(|b| b.num_rows() > 0) {
            _ if rows > 1 => Err(wrong(format!(
                "is a subquery that gave {rows} rows; it must give one value"
            ))),
            Some(b) => Ok(b.column(0).slice(0, 1)),
            None => Ok(new_null_array(q.subquery.schema().field(0).data_type(), 1)),
        }
    }
}

/// The rows of `batch` as a `VALUES` plan with its column names and types: literals,
/// which a serialised plan carries. No rows is one row of NULLs that a filter drops
/// (`VALUES` needs a row).
///
/// # Errors
/// DataFusion's, if it refuses the plan.
fn values_plan(batch: &RecordBatch) -> Result<LogicalPlan, DataFusionError> {
    let schema = batch.schema();
    let row = |i: usize| -> Result<Vec<Expr>, DataFusionError> {
        batch
            .columns()
            .iter()
            .map(|a| ScalarValue::try_from_array(a, i).map(lit))
            .collect()
    };
    let rows = if batch.num_rows() == 0 {
        vec![
            schema
                .fields()
                .iter()
                .map(|f| ScalarValue::try_from(f.data_type()).map(lit))
                .collect::<Result<Vec<_>, _>>()?,
        ]
    } else {
        (0..batch.num_rows()).map(row).collect::<Result<_, _>>()?
    };
    let mut plan = LogicalPlanBuilder::values(rows)?;
    if batch.num_rows() == 0 {
        // Not `WHERE false`: the optimizer turns that into an empty relation, whose
        // serialised form loses the columns.
        plan = plan.filter(col("column1").is_not_null())?;
    }
    let names = schema.fields().iter().enumerate().map(|(i, f)| {
        let column = col(format!("column{}", i + 1));
        cast(column, f.data_type().clone()).alias(f.name())
    });
    plan.project(names)?.build()
}
