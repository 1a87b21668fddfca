//! Table registry rows (`dist_steps`, `dist_curve`, `dist_histogram`, `dist_components`)
//! as DataFusion table functions.
//!
//! DataFusion calls a table function while it plans, before any query runs, with the
//! argument expressions. Each argument is evaluated there on its own: a literal, a cast
//! or arithmetic on literals works (`dist_components('{"family": ...}')`,
//! `dist_curve(X'...', -1, 12, 30)`), a column or a subquery cannot (DataFusion has no
//! lateral table functions). Where SQLite takes `FROM fit, dist_components(fit.m)`,
//! compute the value first and pass it as a literal, or use the scalar functions on each
//! row (`dist_cdf`, `dist_quantile`, `dist_component`).

use std::sync::Arc;

use ::datafusion::arrow::array::{ArrayRef, RecordBatch, RecordBatchOptions};
use ::datafusion::arrow::datatypes::{Field, Schema};
use ::datafusion::catalog::{TableFunctionArgs, TableFunctionImpl, TableProvider};
use ::datafusion::common::DFSchema;
use ::datafusion::datasource::MemTable;
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::ColumnarValue;

use super::convert::{Column, data_type, out_array, read_row};
use super::{guarded, to_datafusion};
use crate::catalogue::args::{ArgError, fail};
use crate::catalogue::reader::{Call, NoMemo};
use crate::catalogue::scan::drain;
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, Imp, MAX_ARGS, Returns};

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
            let value = args
                .session()
                .create_physical_expr(e.clone(), &empty)
                .and_then(|p| p.evaluate(&one_row))
                .map_err(|err| {
                    DataFusionError::Plan(format!(
                        "{}: argument {} ({}) must be a constant on DataFusion, which plans table \
                         functions before any query runs: pass the value as a literal, or use \
                         the scalar functions on each row ({err})",
                        def.name,
                        i + 1,
                        imp.args.get(i).copied().unwrap_or("?"),
                    ))
                })?;
            let array = match value {
                ColumnarValue::Array(a) => a,
                ColumnarValue::Scalar(s) => s.to_array_of_size(1)?,
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
        Ok(Arc::new(MemTable::try_new(schema, vec![vec![batch]])?))
    }
}
