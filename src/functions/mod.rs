//! The SQL adapters and the registry that drives them.
//!
//! [`REGISTRY`] has one row per SQL function (kept beside its adapter, one slice per module): its name, kind, arities, signature, one-line
//! summary, longer help, and an example with its expected result. The same rows drive
//! [`crate::register`] (what SQLite sees), the shell's `functions` verb, and the function
//! table in the README ([`markdown_table`]); tests fail when any of them drift apart, and
//! every example is run and its result checked.

pub mod args;
pub mod column;
pub mod compare;
pub mod dist;
pub mod models;
pub(crate) mod raw;
pub mod sketch;
pub(crate) mod table;

use rusqlite::Connection;
use rusqlite::functions::{Aggregate, Context, FunctionFlags};
use rusqlite::types::Value;

/// How a function is used in SQL.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Kind {
    /// One value per row.
    Scalar,
    /// One value per group.
    Aggregate,
    /// One value per group, and usable with `OVER (...)`.
    Window,
    /// A table-valued function, used in `FROM`.
    Table,
}

impl Kind {
    /// The word used in listings.
    pub fn word(self) -> &'static str {
        match self {
            Kind::Scalar => "scalar",
            Kind::Aggregate => "aggregate",
            Kind::Window => "window",
            Kind::Table => "table",
        }
    }
}

/// One SQL function: everything the extension, the shell and the docs say about it.
pub struct FunctionDef {
    /// The SQL name.
    pub name: &'static str,
    /// How it is used.
    pub kind: Kind,
    /// The argument counts it accepts.
    pub arities: &'static [i32],
    /// The call shape, with optional arguments in brackets.
    pub signature: &'static str,
    /// One line: what it returns.
    pub summary: &'static str,
    /// Longer help: arguments, NULL handling, errors.
    pub help: &'static str,
    /// A self-contained SQL query that uses it.
    pub example: &'static str,
    /// The example's result, as the shell prints a single value.
    pub example_result: &'static str,
    /// Installs the function on a connection; called by [`FunctionDef::install`].
    pub register: fn(&Connection, &'static FunctionDef) -> rusqlite::Result<()>,
}

impl FunctionDef {
    /// Installs this function on a connection, for each of its arities.
    ///
    /// # Errors
    /// Whatever SQLite reports when creating the function.
    pub fn install(&'static self, conn: &Connection) -> rusqlite::Result<()> {
        (self.register)(conn, self)
    }
}

/// The flags every ogive function carries: UTF-8, deterministic, harmless in triggers
/// and views.
pub(crate) fn flags() -> FunctionFlags {
    FunctionFlags::SQLITE_UTF8
        | FunctionFlags::SQLITE_DETERMINISTIC
        | FunctionFlags::SQLITE_INNOCUOUS
}

/// Registers an aggregate for each arity of its row.
pub(crate) fn aggregate<S, D>(
    conn: &Connection,
    def: &'static FunctionDef,
    make: fn() -> D,
) -> rusqlite::Result<()>
where
    S: std::panic::RefUnwindSafe + std::panic::UnwindSafe + Send,
    D: Aggregate<S, Value> + Send + 'static,
{
    for &n in def.arities {
        conn.create_aggregate_function(def.name, n, flags(), make())?;
    }
    Ok(())
}

/// Registers a scalar function for each arity of its row.
pub(crate) fn scalar(
    conn: &Connection,
    def: &'static FunctionDef,
    f: fn(&Context<'_>) -> rusqlite::Result<Value>,
) -> rusqlite::Result<()> {
    for &n in def.arities {
        conn.create_scalar_function(def.name, n, flags(), move |ctx| f(ctx))?;
    }
    Ok(())
}

/// The registry: one slice of rows per adapter module, in the order the README lists
/// them. A new module adds its `FUNCTIONS` here.
pub static REGISTRY: &[&[FunctionDef]] = &[
    column::FUNCTIONS,
    dist::FUNCTIONS,
    compare::FUNCTIONS,
    models::FUNCTIONS,
    sketch::FUNCTIONS,
];

/// Every registry row, in listing order.
pub fn all() -> impl Iterator<Item = &'static FunctionDef> {
    REGISTRY.iter().flat_map(|group| group.iter())
}

/// The registry row for a name, if ogive has such a function.
pub fn find(name: &str) -> Option<&'static FunctionDef> {
    all().find(|d| d.name.eq_ignore_ascii_case(name))
}

/// The README's function table, generated from the registry.
pub fn markdown_table() -> String {
    let mut out = String::from("| function | kind | result |\n|---|---|---|\n");
    for d in all() {
        out.push_str(&format!(
            "| `{}` | {} | {} |\n",
            d.signature,
            d.kind.word(),
            d.summary.replace('|', "\\|")
        ));
    }
    out
}

/// Shows one SQL value as the shell and the registry examples print it: integers as
/// digits, reals in Rust's shortest round-trip form (`0.5`, `2.0`, `1e-300`), text as is,
/// NULL as `NULL`, a BLOB by its size.
pub fn render_value(v: &Value) -> String {
    match v {
        Value::Null => "NULL".to_string(),
        Value::Integer(i) => i.to_string(),
        Value::Real(r) => format!("{r:?}"),
        Value::Text(t) => t.clone(),
        Value::Blob(b) => format!("<BLOB {} bytes>", b.len()),
    }
}
