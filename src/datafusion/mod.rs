//! The catalogue on Apache DataFusion: every registry row as a DataFusion function.
//!
//! Like the SQLite adapter, this module only converts: Arrow arrays to the catalogue's
//! [`Arg`] row by row, and the catalogue's [`Out`] back to an Arrow array of the row's
//! declared type ([`Returns`]). Argument rules, states and error texts are the
//! catalogue's, so a query gives the same numbers and the same messages as in SQLite.
//!
//! - **Scalars** become `ScalarUDF`s ([`scalar`]); a constant argument (a literal, or a
//!   fit broadcast from a CTE) is decoded once per batch.
//! - **Aggregates** become `AggregateUDF`s ([`aggregate`]) whose partial state is the
//!   catalogue's versioned saved form (`docs/state-format.md`) in one BINARY column, so
//!   DataFusion's partial and final aggregation split a group over partitions and merge
//!   the parts; window rows (`quantile`, `ecdf`, `median` over a sliding frame) retract
//!   through the state's `inverse`.
//! - **Table functions** ([`table`]) take a constant or a scalar subquery that stands
//!   alone (`dist_steps((SELECT dist_empirical(x) FROM t))`), both evaluated while the
//!   query is planned; a column of another table cannot be their argument (DataFusion
//!   has no lateral table functions).
//! - **JSON fields**: `j ->> 'path'` (a number, as a double) and `j -> 'path'` (JSON
//!   text) read the JSON that the fits and tests return, with SQLite's path syntax
//!   (`'$.bic'`, `'$[0]'`, `'bic'`); see [`json`].
//!
//! Types: SQLite is dynamically typed, DataFusion is not. Arguments of any Arrow type
//! that SQLite would store are read as SQLite would see them (booleans as 0 and 1,
//! unsigned and small integers as integers, floats as reals, NaN as NULL, strings as
//! TEXT, binaries as BLOBs). Results take the row's declared type; `dist_n`, an INTEGER
//! count in SQLite or a REAL total of weights, is a double here.

/// Debug, equality and hashing of an adapter by its registry row's name (DataFusion
/// compares functions when it simplifies plans).
macro_rules! by_name {
    ($t:ty) => {
        impl std::fmt::Debug for $t {
            fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
                f.write_str(self.def.name)
            }
        }
        impl PartialEq for $t {
            fn eq(&self, other: &Self) -> bool {
                self.def.name == other.def.name
            }
        }
        impl Eq for $t {}
        impl std::hash::Hash for $t {
            fn hash<H: std::hash::Hasher>(&self, state: &mut H) {
                self.def.name.hash(state);
            }
        }
    };
}

pub mod aggregate;
pub mod convert;
mod groups;
pub mod json;
pub mod scalar;
pub mod sql;
pub mod table;

use std::sync::atomic::{AtomicBool, Ordering};
use std::sync::{Arc, OnceLock};

use ::datafusion::error::DataFusionError;
use ::datafusion::execution::FunctionRegistry;
use ::datafusion::prelude::SessionContext;

use crate::catalogue::args::{ArgError, FunctionError, fail};
use crate::catalogue::{self, Imp};

pub use convert::{out_array, rows};
pub use sql::sql;

/// The one helper that turns a catalogue error into the error DataFusion reports: the
/// same text as in SQLite (`quantile: p must be ...`); running out of memory is
/// DataFusion's resources-exhausted error.
pub fn to_datafusion(e: FunctionError) -> DataFusionError {
    if e.is_out_of_memory() {
        DataFusionError::ResourcesExhausted(e.to_string())
    } else {
        DataFusionError::Execution(e.to_string())
    }
}

/// Runs adapter work for the function `name` so that a panic inside it becomes that
/// function's error (the same text as in SQLite), never an unwind through DataFusion's
/// worker threads.
pub(crate) fn guarded<T>(
    name: &'static str,
    work: impl FnOnce() -> Result<T, DataFusionError>,
) -> Result<T, DataFusionError> {
    let run = || {
        std::panic::catch_unwind(std::panic::AssertUnwindSafe(work)).unwrap_or_else(|_| {
            Err(to_datafusion(fail(
                name,
                ArgError::Internal("a panic was caught".into()),
            )))
        })
    };
    match STOP.get() {
        Some(flag) => {
            let flag = Arc::clone(flag);
            crate::stats::cancel::with_check(Box::new(move || flag.load(Ordering::Relaxed)), run)
        }
        None => run(),
    }
}

/// The flag of [`stop_when`].
static STOP: OnceLock<Arc<AtomicBool>> = OnceLock::new();

/// Lets this process stop ogive's long work on DataFusion: while `flag` is set, a kernel
/// that polls for cancellation (an EM pass of a mixture, an exact p-value's lattice walk,
/// a curve's next point) stops with its function's "interrupted" error, as a Ctrl-C does
/// in SQLite. The shell sets it when Ctrl-C cancels a statement, whose finalizer would
/// otherwise run to its end on a worker. One flag per process: `false` when one was given
/// before (which stays). Without a flag nothing is cancelled.
///
/// # Example
/// ```
/// use std::sync::Arc;
/// use std::sync::atomic::AtomicBool;
/// let flag = Arc::new(AtomicBool::new(false));
/// assert!(ogive::datafusion::stop_when(Arc::clone(&flag)));
/// assert!(!ogive::datafusion::stop_when(flag));
/// ```
pub fn stop_when(flag: Arc<AtomicBool>) -> bool {
    STOP.set(flag).is_ok()
}

/// Registers every function of the registry, and the `->>` and `->` JSON operators, on
/// a DataFusion session.
///
/// # Errors
/// What DataFusion reports when registering the operators.
///
/// # Example
/// ```
/// # tokio::runtime::Builder::new_current_thread().build().unwrap().block_on(async {
/// use datafusion::prelude::SessionContext;
/// let mut ctx = SessionContext::new();
/// ogive::datafusion::register(&mut ctx).unwrap();
/// let batches = ctx
///     .sql("SELECT quantile(column1, 0.5) FROM (VALUES (1.0), (2.0), (4.0))")
///     .await
///     .unwrap()
///     .collect()
///     .await
///     .unwrap();
/// let v = ogive::datafusion::rows(&batches).unwrap();
/// assert_eq!(v, vec![vec![ogive::catalogue::value::Out::Real(2.0)]]);
/// # });
/// ```
pub fn register(ctx: &mut SessionContext) -> Result<(), DataFusionError> {
    for def in catalogue::all() {
        match def.imp {
            Imp::Scalar(_) => SessionContext::register_udf(ctx, scalar::udf(def)),
            Imp::Aggregate(_) => SessionContext::register_udaf(ctx, aggregate::udaf(def)),
            Imp::Table(_) => ctx.register_udtf(def.name, Arc::new(table::TableFn::new(def))),
        }
    }
    for f in json::udfs() {
        SessionContext::register_udf(ctx, f);
    }
    FunctionRegistry::register_expr_planner(ctx, Arc::new(json::JsonOperators))?;
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_panic_becomes_the_functions_error() {
        let r: Result<(), _> = guarded("quantile", || panic!("deliberate, for the test"));
        let e = r.unwrap_err().to_string();
        assert!(
            e.contains("quantile: ") && e.contains("a panic was caught"),
            "{e}"
        );
    }
}
