//! The machinery behind ogive's table-valued functions (eponymous virtual tables).
//!
//! A table-valued function such as `dist_steps(d)` is a virtual table whose arguments are
//! hidden columns: SQLite turns `FROM dist_steps(s.d)` into the constraint `d = s.d` and
//! offers it to [`VTab::best_index`]. The registry row gives the name, the output columns
//! and the arguments ([`TableImp`]), from which the schema is written, and the rows; the
//! one [`Table`] and [`Cursor`] here do the rest:
//!
//! - `best_index` takes equality constraints on the argument columns, in argument order,
//!   and reports a plan unusable (`SQLITE_CONSTRAINT`) while an argument's value is not yet
//!   available, so in a join SQLite scans the table the argument comes from first;
//! - `filter` reads the arguments and computes the first row, `next` each further one
//!   ([`crate::catalogue::scan`]), each under the connection's interrupt check, so a
//!   `LIMIT` or an interrupt stops the work; a NULL argument gives no rows, as SQLite's
//!   own table-valued functions do; a missing required argument is an error naming the
//!   function;
//! - every method body runs under [`guard`]: rusqlite does not catch panics in
//!   virtual-table methods, and a panic unwinding into SQLite would abort the host.

use std::borrow::Cow;
use std::ffi::{CStr, CString, c_int};
use std::marker::PhantomData;
use std::panic::{AssertUnwindSafe, catch_unwind};

use rusqlite::types::{FromSql, Value, ValueRef};
use rusqlite::vtab::{
    Context, Filters, IndexConstraintOp, IndexInfo, Module, VTab, VTabConfig, VTabConnection,
    VTabCursor,
};
use rusqlite::{Connection, Result, ffi};

use super::{arg, to_sqlite, value};
use crate::catalogue::args::{ArgError, fail};
use crate::catalogue::reader::{Call, NoMemo};
use crate::catalogue::scan::{Ready, Scan};
use crate::catalogue::value::Out;
use crate::catalogue::{FunctionDef, Imp, TableImp};

/// Registers a table-function registry row as an eponymous virtual table.
pub(crate) fn install(conn: &Connection, def: &'static FunctionDef) -> Result<()> {
    const M: Module<'static, Table> = Module::eponymous_only_module();
    conn.create_module(def.name, &M, Some(def))
}

/// The table function's part of its row.
fn imp(def: &FunctionDef) -> Result<TableImp> {
    match def.imp {
        Imp::Table(t) => Ok(t),
        _ => Err(to_sqlite(fail(
            def.name,
            ArgError::Internal("not a table function".into()),
        ))),
    }
}

/// The declared schema: the output columns, then one HIDDEN column per argument.
pub(crate) fn schema(t: &TableImp) -> String {
    let columns = t
        .columns
        .iter()
        .map(|(name, ty)| format!("{name} {ty}").trim_end().to_string())
        .chain(t.args.iter().map(|a| format!("{a} HIDDEN")));
    format!("CREATE TABLE x({})", columns.collect::<Vec<_>>().join(", "))
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
            Err(to_sqlite(fail(name, ArgError::Internal(what))))
        }
    }
}

/// The virtual table of a table function.
#[repr(C)]
pub(crate) struct Table {
    /// SQLite's part; must come first.
    base: ffi::sqlite3_vtab,
    def: &'static FunctionDef,
    t: TableImp,
    /// The connection, for the cancellation check while rows are computed.
    db: *mut ffi::sqlite3,
}

/// The most arguments a table-valued function may take (bits of the plan number).
const MAX_ARGS: usize = 8;

// SAFETY: `Table` is `repr(C)` with SQLite's `sqlite3_vtab` as its first field, as
// rusqlite requires.
unsafe impl<'vtab> VTab<'vtab> for Table {
    type Aux = &'static FunctionDef;
    type Cursor = Cursor<'vtab>;

    fn connect(
        db: &mut VTabConnection,
        aux: Option<&&'static FunctionDef>,
        _module_name: &[u8],
        _database_name: &[u8],
        _table_name: &[u8],
        _args: &[&[u8]],
    ) -> Result<(Cow<'static, CStr>, Self)> {
        let Some(&def) = aux else {
            return Err(rusqlite::Error::ModuleError(
                "ogive: a table function without its registry row".into(),
            ));
        };
        guard(def.name, || {
            db.config(VTabConfig::Innocuous)?;
            // SAFETY: the handle is only read, by `cancellable`, while a scan of this table
            // runs on its connection.
            let handle = unsafe { db.handle() };
            let t = imp(def)?;
            let sql = CString::new(schema(&t))?;
            Ok((
                Cow::Owned(sql),
                Table {
                    base: ffi::sqlite3_vtab::default(),
                    def,
                    t,
                    db: handle,
                },
            ))
        })
    }

    fn best_index(&self, info: &mut IndexInfo) -> Result<bool> {
        let (def, t) = (self.def, self.t);
        guard(def.name, || {
            let columns = t.columns.len();
            let nargs = t.args.len().min(MAX_ARGS);
            let mut given = [None; MAX_ARGS];
            let mut unusable = 0u32;
            for (i, c) in info.constraints().enumerate() {
                let Some(j) = usize::try_from(c.column())
                    .ok()
                    .and_then(|col| col.checked_sub(columns))
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
            let required = (1u32 << def.required().min(MAX_ARGS)) - 1;
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

    fn open(&'vtab mut self) -> Result<Cursor<'vtab>> {
        let (def, t, db) = (self.def, self.t, self.db);
        guard(def.name, || {
            Ok(Cursor {
                base: ffi::sqlite3_vtab_cursor::default(),
                def,
                t,
                db,
                scan: Ready::empty(),
                row: Vec::new(),
                done: true,
                args: Vec::new(),
                at: 0,
                table: PhantomData,
            })
        })
    }
}

/// A scan of a table-valued function: its current row, computed by `filter` (the first)
/// or `next`.
#[repr(C)]
pub(crate) struct Cursor<'vtab> {
    /// SQLite's part; must come first.
    base: ffi::sqlite3_vtab_cursor,
    def: &'static FunctionDef,
    t: TableImp,
    db: *mut ffi::sqlite3,
    /// The rows still to come.
    scan: Box<dyn Scan>,
    /// The current row, `t.columns.len()` values.
    row: Vec<Value>,
    /// Whether the scan has ended (no current row).
    done: bool,
    /// The argument values, for reads of the hidden columns.
    args: Vec<Value>,
    /// The current row's number, from 0.
    at: usize,
    table: PhantomData<&'vtab Table>,
}

impl Cursor<'_> {
    /// Computes the next row under the connection's interrupt check (after an error the
    /// scan has ended).
    fn advance(&mut self) -> Result<()> {
        self.done = true;
        let mut row: Vec<Out> = Vec::new();
        let scan = &mut self.scan;
        let more = super::cancellable(self.db, || scan.next_row(&mut row)).map_err(to_sqlite)?;
        self.done = !more;
        self.row = row.into_iter().map(value).collect();
        Ok(())
    }
}

// SAFETY: `Cursor` is `repr(C)` with SQLite's `sqlite3_vtab_cursor` as its first field,
// as rusqlite requires.
unsafe impl VTabCursor for Cursor<'_> {
    fn filter(&mut self, idx_num: c_int, _idx_str: Option<&str>, args: &Filters<'_>) -> Result<()> {
        let (def, t) = (self.def, self.t);
        guard(def.name, || {
            let mut values = args.iter();
            let given: Vec<Option<ValueRef<'_>>> = (0..t.args.len())
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
            self.scan = Ready::empty();
            self.row = Vec::new();
            self.done = true;
            if given.iter().take(def.required()).any(Option::is_none) {
                return Err(to_sqlite(fail(
                    def.name,
                    ArgError::Missing {
                        signature: def.signature,
                    },
                )));
            }
            if given.iter().flatten().any(|v| matches!(v, ValueRef::Null)) {
                return Ok(());
            }
            // The arguments given, in order, up to the first one not given.
            let call_args: Vec<_> = given.iter().map_while(|v| v.map(arg)).collect();
            let mut memo = NoMemo;
            let mut call = Call::new(def.name, &call_args, &mut memo);
            self.scan = super::cancellable(self.db, || (t.rows)(&mut call)).map_err(to_sqlite)?;
            self.advance()
        })
    }

    fn next(&mut self) -> Result<()> {
        guard(self.def.name, || {
            self.at += 1;
            self.advance()
        })
    }

    fn eof(&self) -> bool {
        self.done
    }

    fn column(&self, ctx: &mut Context, i: c_int) -> Result<()> {
        guard(self.def.name, || {
            let i = usize::try_from(i).unwrap_or(usize::MAX);
            let columns = self.t.columns.len();
            let value = if i < columns {
                self.row.get(i)
            } else {
                self.args.get(i - columns)
            };
            ctx.set_result(value.unwrap_or(&Value::Null))
        })
    }

    fn rowid(&self) -> Result<i64> {
        guard(self.def.name, || Ok(self.at as i64 + 1))
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::Kind;
    use crate::catalogue::args::FunctionError;

    /// A table function that panics while computing its rows, to show the panic stays
    /// inside ogive.
    fn panicking_rows(call: &mut Call<'_>) -> std::result::Result<Box<dyn Scan>, FunctionError> {
        let n = call.whole(0, "a")?.unwrap_or(0);
        if n > 2 {
            panic!("row {n} is too many");
        }
        Ok(Ready::rows((0..n).map(Out::Integer).collect(), 1))
    }

    static PANICS: FunctionDef = FunctionDef {
        name: "panics",
        kind: Kind::Table,
        returns: crate::catalogue::Returns::Rows,
        range: crate::catalogue::Range::Rows(&[crate::catalogue::Range::Real]),
        arities: &[1],
        signature: "panics(a)",
        summary: "test",
        help: "test",
        example: "",
        example_result: "",
        imp: Imp::Table(TableImp {
            columns: &[("v", "")],
            args: &["a"],
            rows: panicking_rows,
        }),
    };

    #[test]
    fn panics_become_errors_that_name_the_function() {
        let conn = Connection::open_in_memory().unwrap();
        install(&conn, &PANICS).unwrap();
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
    fn schemas_come_from_the_row() {
        let Imp::Table(t) = PANICS.imp else { panic!() };
        assert_eq!(schema(&t), "CREATE TABLE x(v, a HIDDEN)");
    }

    #[test]
    fn guard_passes_results_through() {
        assert_eq!(guard("f", || Ok(3)).unwrap(), 3);
        let e = guard::<()>("f", || panic!("{}", String::from("boom"))).unwrap_err();
        assert!(e.to_string().starts_with("f: internal error: boom;"));
    }
}
