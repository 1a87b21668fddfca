//! The machinery behind ogive's table-valued functions (eponymous virtual tables).
//!
//! A table-valued function such as `dist_steps(d)` is a virtual table whose arguments are
//! hidden columns: SQLite turns `FROM dist_steps(s.d)` into the constraint `d = s.d` and
//! offers it to [`VTab::best_index`]. Each function implements [`TableFunction`] (its
//! schema, its arguments and how to compute its rows from them) and the generic
//! [`Table`] and [`Cursor`] here do the rest:
//!
//! - `best_index` takes equality constraints on the argument columns, in argument order,
//!   and reports a plan unusable (`SQLITE_CONSTRAINT`) while an argument's value is not yet
//!   available, so in a join SQLite scans the table the argument comes from first;
//! - `filter` computes all rows at once; a NULL argument gives no rows, as SQLite's own
//!   table-valued functions do; a missing required argument is an error naming the function;
//! - every method body runs under [`guard`]: rusqlite does not catch panics in
//!   virtual-table methods, and a panic unwinding into SQLite would abort the host.

use std::borrow::Cow;
use std::ffi::{CStr, c_int};
use std::marker::PhantomData;
use std::panic::{AssertUnwindSafe, catch_unwind};

use rusqlite::types::{FromSql, Value, ValueRef};
use rusqlite::vtab::{
    Context, Filters, IndexConstraintOp, IndexInfo, VTab, VTabConfig, VTabConnection, VTabCursor,
};
use rusqlite::{Result, ffi};

use super::args::{ArgError, fail};

/// One table-valued function: its name, columns, arguments and rows.
pub(crate) trait TableFunction: 'static {
    /// The SQL name.
    const NAME: &'static str;
    /// The declared schema: the output columns, then one HIDDEN column per argument.
    const SCHEMA: &'static CStr;
    /// The number of output columns (before the hidden ones).
    const COLUMNS: usize;
    /// The argument names, in call order.
    const ARGS: &'static [&'static str];
    /// How many leading arguments must be given.
    const REQUIRED: usize;
    /// The call shape, for the error when arguments are missing.
    const SIGNATURE: &'static str;

    /// The rows, `COLUMNS` values each, flattened. `args` holds one entry per argument:
    /// `None` for an optional argument not given; never SQL NULL (that gives no rows
    /// before this is called).
    fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>>;
}

/// Runs a virtual-table method body, turning a panic into an error that names the
/// function instead of letting it unwind into SQLite.
pub(crate) fn guard<T>(name: &'static str, body: impl FnOnce() -> Result<T>) -> Result<T> {
    match catch_unwind(AssertUnwindSafe(body)) {
        Ok(result) => result,
        Err(panic) => {
            let what = panic
                .downcast_ref::<&str>()
                .map(|s| s.to_string())
                .or_else(|| panic.downcast_ref::<String>().cloned())
                .unwrap_or_else(|| "a panic".to_string());
            Err(fail(name, ArgError::Internal(what)))
        }
    }
}

/// The virtual table of a [`TableFunction`].
#[repr(C)]
pub(crate) struct Table<F: TableFunction> {
    /// SQLite's part; must come first.
    base: ffi::sqlite3_vtab,
    function: PhantomData<F>,
}

/// The most arguments a table-valued function may take (bits of the plan number).
const MAX_ARGS: usize = 8;

unsafe impl<'vtab, F: TableFunction> VTab<'vtab> for Table<F> {
    type Aux = ();
    type Cursor = Cursor<'vtab, F>;

    fn connect(
        db: &mut VTabConnection,
        _aux: Option<&()>,
        _module_name: &[u8],
        _database_name: &[u8],
        _table_name: &[u8],
        _args: &[&[u8]],
    ) -> Result<(Cow<'static, CStr>, Self)> {
        guard(F::NAME, || {
            db.config(VTabConfig::Innocuous)?;
            Ok((
                Cow::Borrowed(F::SCHEMA),
                Table {
                    base: ffi::sqlite3_vtab::default(),
                    function: PhantomData,
                },
            ))
        })
    }

    fn best_index(&self, info: &mut IndexInfo) -> Result<bool> {
        guard(F::NAME, || {
            let nargs = F::ARGS.len().min(MAX_ARGS);
            let mut given = [None; MAX_ARGS];
            let mut unusable = 0u32;
            for (i, c) in info.constraints().enumerate() {
                let Some(j) = usize::try_from(c.column())
                    .ok()
                    .and_then(|col| col.checked_sub(F::COLUMNS))
                    .filter(|&j| j < nargs)
                else {
                    continue;
                };
                if !c.is_usable() {
                    unusable |= 1 << j;
                } else if c.operator() == IndexConstraintOp::SQLITE_INDEX_CONSTRAINT_EQ {
                    given[j] = Some(i);
                }
            }
            let mut mask = 0u32;
            let mut argv = 0;
            for (j, slot) in given.iter().enumerate().take(nargs) {
                if let Some(i) = *slot {
                    argv += 1;
                    mask |= 1 << j;
                    let mut usage = info.constraint_usage(i);
                    usage.set_argv_index(argv);
                    usage.set_omit(true);
                }
            }
            if unusable & !mask != 0 {
                // An argument whose value comes from a table not yet scanned: ask SQLite
                // for another join order.
                return Ok(false);
            }
            info.set_idx_num(mask as c_int);
            let required = (1u32 << F::REQUIRED) - 1;
            if mask & required == required {
                info.set_estimated_cost(10.0);
                info.set_estimated_rows(100);
            } else {
                info.set_estimated_cost(1e12);
                info.set_estimated_rows(i64::MAX / 2);
            }
            Ok(true)
        })
    }

    fn open(&'vtab mut self) -> Result<Cursor<'vtab, F>> {
        guard(F::NAME, || {
            Ok(Cursor {
                base: ffi::sqlite3_vtab_cursor::default(),
                rows: Vec::new(),
                args: Vec::new(),
                at: 0,
                table: PhantomData,
            })
        })
    }
}

/// A scan of a table-valued function: its rows, computed by `filter`.
#[repr(C)]
pub(crate) struct Cursor<'vtab, F: TableFunction> {
    /// SQLite's part; must come first.
    base: ffi::sqlite3_vtab_cursor,
    /// The rows, `F::COLUMNS` values each.
    rows: Vec<Value>,
    /// The argument values, for reads of the hidden columns.
    args: Vec<Value>,
    /// The current row.
    at: usize,
    table: PhantomData<&'vtab Table<F>>,
}

impl<F: TableFunction> Cursor<'_, F> {
    fn row_count(&self) -> usize {
        self.rows.len() / F::COLUMNS.max(1)
    }
}

unsafe impl<F: TableFunction> VTabCursor for Cursor<'_, F> {
    fn filter(&mut self, idx_num: c_int, _idx_str: Option<&str>, args: &Filters<'_>) -> Result<()> {
        guard(F::NAME, || {
            let mut values = args.iter();
            let given: Vec<Option<ValueRef<'_>>> = (0..F::ARGS.len())
                .map(|j| {
                    if j < MAX_ARGS && idx_num & (1 << j) != 0 {
                        values.next()
                    } else {
                        None
                    }
                })
                .collect();
            self.at = 0;
            self.args = given
                .iter()
                .map(|v| {
                    v.and_then(|v| Value::column_result(v).ok())
                        .unwrap_or(Value::Null)
                })
                .collect();
            self.rows = Vec::new();
            if given.iter().take(F::REQUIRED).any(Option::is_none) {
                return Err(fail(
                    F::NAME,
                    ArgError::Missing {
                        signature: F::SIGNATURE,
                    },
                ));
            }
            if given.iter().flatten().any(|v| matches!(v, ValueRef::Null)) {
                return Ok(());
            }
            self.rows = F::rows(&given)?;
            Ok(())
        })
    }

    fn next(&mut self) -> Result<()> {
        guard(F::NAME, || {
            self.at += 1;
            Ok(())
        })
    }

    fn eof(&self) -> bool {
        guard(F::NAME, || Ok(self.at >= self.row_count())).unwrap_or(true)
    }

    fn column(&self, ctx: &mut Context, i: c_int) -> Result<()> {
        guard(F::NAME, || {
            let i = usize::try_from(i).unwrap_or(usize::MAX);
            let value = if i < F::COLUMNS {
                self.rows.get(self.at * F::COLUMNS + i)
            } else {
                self.args.get(i - F::COLUMNS)
            };
            ctx.set_result(value.unwrap_or(&Value::Null))
        })
    }

    fn rowid(&self) -> Result<i64> {
        guard(F::NAME, || Ok(self.at as i64 + 1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use rusqlite::Connection;
    use rusqlite::vtab::Module;

    /// A table function that panics while computing its rows, to show the panic stays
    /// inside ogive.
    struct Panics;

    impl TableFunction for Panics {
        const NAME: &'static str = "panics";
        const SCHEMA: &'static CStr = c"CREATE TABLE x(v, a HIDDEN)";
        const COLUMNS: usize = 1;
        const ARGS: &'static [&'static str] = &["a"];
        const REQUIRED: usize = 1;
        const SIGNATURE: &'static str = "panics(a)";
        fn rows(args: &[Option<ValueRef<'_>>]) -> Result<Vec<Value>> {
            let n = args[0].map_or(0, |v| v.as_i64().unwrap_or(0));
            if n > 2 {
                panic!("row {n} is too many");
            }
            Ok((0..n).map(Value::Integer).collect())
        }
    }

    #[test]
    fn panics_become_errors_that_name_the_function() {
        let conn = Connection::open_in_memory().unwrap();
        const M: Module<Table<Panics>> = Module::eponymous_only_module();
        conn.create_module(c"panics", &M, None).unwrap();
        let count: i64 = conn
            .query_row("SELECT count(*) FROM panics(2)", [], |r| r.get(0))
            .unwrap();
        assert_eq!(count, 2);
        let e = conn
            .query_row("SELECT count(*) FROM panics(3)", [], |r| r.get::<_, i64>(0))
            .unwrap_err();
        assert_eq!(
            e.to_string(),
            "panics: internal error: row 3 is too many; this is a bug in ogive, please report it"
        );
        let e = conn
            .query_row("SELECT count(*) FROM panics", [], |r| r.get::<_, i64>(0))
            .unwrap_err();
        assert_eq!(e.to_string(), "panics: give the arguments, as in panics(a)");
        // The connection still works after the panic.
        let count: i64 = conn
            .query_row("SELECT count(*) FROM panics(NULL)", [], |r| r.get(0))
            .unwrap();
        assert_eq!(count, 0);
    }

    #[test]
    fn guard_passes_results_through() {
        assert_eq!(guard("f", || Ok(3)).unwrap(), 3);
        let e = guard::<()>("f", || panic!("{}", String::from("boom"))).unwrap_err();
        assert!(e.to_string().starts_with("f: internal error: boom;"));
    }
}
