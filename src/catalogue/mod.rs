//! The catalogue: every SQL function of ogive, engine-neutral, and the registry that
//! drives every engine.
//!
//! [`REGISTRY`] has one row per SQL function (kept beside its entry, one slice per module):
//! its name, kind, arities, signature, one-line summary, longer help, an example with its
//! expected result, and its implementation ([`Imp`]): a scalar body, an aggregate state
//! ([`state::State`]: step, merge, finalize, and for window functions inverse and value),
//! or a table function's columns and rows. Arguments arrive as ogive's own
//! [`value::Arg`] and results leave as [`value::Out`]; error texts are built here, once
//! ([`args`]). The same rows drive the SQLite adapter ([`crate::sqlite`]), the shell's
//! `functions` verb and the README's function table ([`markdown_table`]); tests fail when
//! any of them drift apart, and every example is run and its result checked.
//!
//! Nothing here knows an engine: a new SQL function is one row and its kernel.

#![deny(unsafe_code)]

pub mod args;
pub mod censored;
pub mod column;
pub mod compare;
pub mod dist;
pub mod models;
pub mod range;
pub mod reader;
pub mod scan;
pub mod sketch;
pub mod state;
pub mod time;
pub mod value;

pub use range::Range;

use args::FunctionError;
use reader::Call;
use scan::Scan;
use state::AggregateImp;
use value::Out;

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

/// The most arguments an ogive function takes (adapters read a row's arguments into a
/// fixed array of this size).
pub const MAX_ARGS: usize = 8;

/// The SQL type of a function's result: SQLite ignores it; engines with static types
/// (DataFusion) declare it. Debug builds of the SQLite adapter check every result against
/// it ([`Returns::drift`]), and the DataFusion adapter refuses a result of another type, so
/// a row whose declaration drifts from its body fails the tests.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Returns {
    /// A double (or NULL).
    Real,
    /// A 64-bit integer (or NULL).
    Integer,
    /// Text: JSON for every ogive function that returns text.
    Text,
    /// A BLOB value (a distribution or a sketch).
    Blob,
    /// A count: INTEGER, or REAL when it is a total of frequency weights (`dist_n`).
    /// Engines with static types declare it a double.
    Count,
    /// Rows: a table function (its columns say their types).
    Rows,
}

impl Returns {
    /// Whether a result fits the declared type (NULL fits every type). The adapters
    /// check every result in debug builds, so a row whose declaration drifts from its
    /// body fails the tests.
    ///
    /// # Example
    /// ```
    /// use ogive::catalogue::{Returns, value::Out};
    /// assert!(Returns::Count.admits(&Out::Real(2.5)));
    /// assert!(!Returns::Blob.admits(&Out::Text("{}".into())));
    /// ```
    pub fn admits(self, out: &Out) -> bool {
        matches!(
            (self, out),
            (_, Out::Null)
                | (Returns::Real, Out::Real(_))
                | (Returns::Integer, Out::Integer(_))
                | (Returns::Count, Out::Integer(_) | Out::Real(_))
                | (Returns::Text, Out::Text(_))
                | (Returns::Blob, Out::Blob(_))
        )
    }

    /// In debug builds, a message when a result does not fit the declared type of the
    /// row named `name`; always `None` in release builds.
    ///
    /// # Example
    /// ```
    /// use ogive::catalogue::{Returns, value::Out};
    /// assert_eq!(Returns::drift("dist_mean", &Out::Real(1.0)), None);
    /// ```
    #[inline(always)]
    pub fn drift(name: &str, out: &Out) -> Option<String> {
        if cfg!(debug_assertions) && find(name).is_some_and(|d| !d.returns.admits(out)) {
            Some(format!("{name} returned {out:?}, not its declared type"))
        } else {
            None
        }
    }
}

/// One SQL function: everything the extension, the shell and the docs say about it.
pub struct FunctionDef {
    /// The SQL name.
    pub name: &'static str,
    /// How it is used.
    pub kind: Kind,
    /// The type of its result.
    pub returns: Returns,
    /// The documented range of its answers ([`Range::check`]), which the argument
    /// fuzzer checks every answer against.
    pub range: Range,
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
    /// What runs.
    pub imp: Imp,
}

/// The body of a scalar function.
pub type ScalarFn = fn(&mut Call<'_>) -> Result<Out, FunctionError>;

/// A table-valued function: its output columns, its arguments, and its rows.
#[derive(Clone, Copy)]
pub struct TableImp {
    /// The output columns: name and declared SQL type.
    pub columns: &'static [(&'static str, &'static str)],
    /// The argument names, in call order; the row's least arity says how many are
    /// required.
    pub args: &'static [&'static str],
    /// Reads the arguments and returns the scan of the rows, `columns.len()` values
    /// each ([`scan`]). The call holds the arguments given, in order (none is NULL: a
    /// NULL argument gives no rows before this runs).
    pub rows: fn(&mut Call<'_>) -> Result<Box<dyn Scan>, FunctionError>,
}

/// How a function is implemented.
#[derive(Clone, Copy)]
pub enum Imp {
    /// A scalar function.
    Scalar(ScalarFn),
    /// An aggregate (or window) function's state.
    Aggregate(AggregateImp),
    /// A table-valued function.
    Table(TableImp),
}

impl FunctionDef {
    /// How many arguments a table function requires (its least arity).
    pub fn required(&self) -> usize {
        self.arities
            .iter()
            .min()
            .and_then(|&n| usize::try_from(n).ok())
            .unwrap_or(0)
    }
}

/// The registry: one slice of rows per adapter module, in the order the README lists
/// them. A new module adds its `FUNCTIONS` here.
pub static REGISTRY: &[&[FunctionDef]] = &[
    column::FUNCTIONS,
    dist::FUNCTIONS,
    censored::FUNCTIONS,
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

/// Shows one SQL value as the shell and the registry examples print it (see
/// [`Out::render`]).
pub fn render_value(v: &Out) -> String {
    v.render()
}
