//! The SQLite adapter: installs every registry row on a connection.
//!
//! It only converts: SQLite's values to the catalogue's [`Arg`] and back from [`Out`],
//! catalogue errors to SQLite errors ([`to_sqlite`], the one place), and registry rows to
//! the lean callbacks of [`raw`] (scalars through `sqlite3_create_function_v2`, with
//! SQLite's auxiliary data as the reader's per-statement memory; every aggregate through
//! `sqlite3_create_window_function`) and eponymous virtual tables ([`table`]). The name,
//! arities and columns of each function come from its row.

pub(crate) mod raw;
pub(crate) mod table;

#[cfg(feature = "loadable")]
pub mod extension;

use rusqlite::Connection;
use rusqlite::functions::FunctionFlags;
use rusqlite::types::{Value, ValueRef};

use crate::catalogue::args::FunctionError;
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, Imp};

/// Installs every ogive SQL function on `conn`.
///
/// # Errors
/// Whatever SQLite reports when creating a function (for example, out of memory).
///
/// # Example
/// ```
/// let conn = rusqlite::Connection::open_in_memory()?;
/// ogive::sqlite::register(&conn)?;
/// let share: f64 = conn.query_row(
///     "SELECT ecdf(column1, 5) FROM (VALUES (3.5), (4.9), (6.2), (7.0))",
///     [],
///     |row| row.get(0),
/// )?;
/// assert_eq!(share, 0.5);
/// # Ok::<(), rusqlite::Error>(())
/// ```
pub fn register(conn: &Connection) -> rusqlite::Result<()> {
    for def in crate::catalogue::all() {
        install(conn, def)?;
    }
    Ok(())
}

/// Installs one registry row.
///
/// # Errors
/// Whatever SQLite reports when creating the function.
pub fn install(conn: &Connection, def: &'static FunctionDef) -> rusqlite::Result<()> {
    match def.imp {
        Imp::Scalar(_) => raw::scalar(conn, def),
        Imp::Aggregate(_) => raw::aggregate(conn, def),
        Imp::Table(_) => table::install(conn, def),
    }
}

/// The flags every ogive function carries: UTF-8, deterministic, harmless in triggers
/// and views.
pub(crate) fn flags() -> FunctionFlags {
    FunctionFlags::SQLITE_UTF8
        | FunctionFlags::SQLITE_DETERMINISTIC
        | FunctionFlags::SQLITE_INNOCUOUS
}

/// A SQLite value as the catalogue's argument.
#[inline(always)]
pub fn arg(v: ValueRef<'_>) -> Arg<'_> {
    match v {
        ValueRef::Null => Arg::Null,
        ValueRef::Integer(i) => Arg::Integer(i),
        ValueRef::Real(r) => Arg::Real(r),
        ValueRef::Text(t) => Arg::Text(t),
        ValueRef::Blob(b) => Arg::Blob(b),
    }
}

/// A catalogue result as a SQLite value (also how the shell holds DataFusion's results).
///
/// # Example
/// ```
/// use ogive::catalogue::value::Out;
/// use ogive::rusqlite::types::Value;
/// assert_eq!(ogive::sqlite::value(Out::Integer(3)), Value::Integer(3));
/// ```
pub fn value(o: Out) -> Value {
    match o {
        Out::Null => Value::Null,
        Out::Integer(i) => Value::Integer(i),
        Out::Real(r) => Value::Real(r),
        Out::Text(t) => Value::Text(t),
        Out::Blob(b) => Value::Blob(b),
    }
}

/// Shows a SQLite value as the shell and the registry examples print it (see
/// [`Out::render`]).
///
/// # Example
/// ```
/// use ogive::rusqlite::types::Value;
/// assert_eq!(ogive::sqlite::render(&Value::Real(2.0)), "2.0");
/// ```
pub fn render(v: &Value) -> String {
    out(v).render()
}

/// A SQLite value as a catalogue result, copied.
///
/// # Example
/// ```
/// use ogive::catalogue::value::Out;
/// use ogive::rusqlite::types::Value;
/// assert_eq!(ogive::sqlite::out(&Value::Real(0.5)), Out::Real(0.5));
/// ```
pub fn out(v: &Value) -> Out {
    match v {
        Value::Null => Out::Null,
        Value::Integer(i) => Out::Integer(*i),
        Value::Real(r) => Out::Real(*r),
        Value::Text(t) => Out::Text(t.clone()),
        Value::Blob(b) => Out::Blob(b.clone()),
    }
}

/// The version of the SQLite library running ogive's callbacks (3041000 for 3.41.0).
///
/// In the loadable build this is the host's own number, recorded when the extension was
/// loaded: the adapted API table reports the bindings' version instead, so asking it
/// would promise entries (such as `sqlite3_is_interrupted`) that an older host lacks.
///
/// # Example
/// ```
/// assert!(ogive::sqlite::host_version() >= 3_031_000);
/// ```
pub fn host_version() -> std::ffi::c_int {
    #[cfg(feature = "loadable")]
    {
        extension::HOST_VERSION.load(std::sync::atomic::Ordering::SeqCst)
    }
    #[cfg(not(feature = "loadable"))]
    {
        // SAFETY: sqlite3_libversion_number exists in every SQLite and takes no state.
        #[allow(unsafe_code)]
        unsafe {
            rusqlite::ffi::sqlite3_libversion_number()
        }
    }
}

/// Runs `f` with the connection's interrupt flag as the kernels' cancellation check
/// ([`crate::stats::cancel`]), where the host has `sqlite3_is_interrupted` (3.41.0 and
/// later); on older hosts nothing is cancelled before the statement's next row.
pub(crate) fn cancellable<R>(db: *mut rusqlite::ffi::sqlite3, f: impl FnOnce() -> R) -> R {
    // `db` is the handle of the connection running the callback, alive for the callback's
    // duration, and the check is removed before `f` returns.
    let has_flag = host_version() >= 3_041_000;
    if db.is_null() || !has_flag {
        return f();
    }
    let db = db as usize;
    crate::stats::cancel::with_check(
        Box::new(move || {
            // SAFETY: as above; the pointer is only used while the callback runs.
            #[allow(unsafe_code)]
            unsafe {
                rusqlite::ffi::sqlite3_is_interrupted(db as *mut rusqlite::ffi::sqlite3) != 0
            }
        }),
        f,
    )
}

/// The one helper that turns a catalogue error into the error SQLite reports (through
/// rusqlite: the table functions' errors). An interrupted call carries SQLITE_INTERRUPT
/// and running out of memory SQLITE_NOMEM, each with the message naming the function.
pub fn to_sqlite(e: FunctionError) -> rusqlite::Error {
    let code = if e.is_interrupted() {
        rusqlite::ffi::SQLITE_INTERRUPT
    } else if e.is_out_of_memory() {
        rusqlite::ffi::SQLITE_NOMEM
    } else {
        return rusqlite::Error::UserFunctionError(Box::new(e));
    };
    rusqlite::Error::SqliteFailure(rusqlite::ffi::Error::new(code), Some(e.to_string()))
}

pub use crate::catalogue::MAX_ARGS;
