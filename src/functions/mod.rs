//! The SQL adapters and the registry that drives them.
//!
//! [`REGISTRY`] has one row per SQL function: its name, kind, arities, signature, one-line
//! summary, longer help, and an example with its expected result. The same rows drive
//! [`crate::register`] (what SQLite sees), the shell's `functions` verb, and the function
//! table in the README ([`markdown_table`]); tests fail when any of them drift apart, and
//! every example is run and its result checked.

pub mod args;
pub mod column;

use rusqlite::Connection;
use rusqlite::functions::{Aggregate, FunctionFlags};
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
    register: fn(&Connection, &'static FunctionDef) -> rusqlite::Result<()>,
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
fn flags() -> FunctionFlags {
    FunctionFlags::SQLITE_UTF8 | FunctionFlags::SQLITE_DETERMINISTIC | FunctionFlags::SQLITE_INNOCUOUS
}

/// Registers an aggregate for each arity of its row.
fn aggregate<S, D>(conn: &Connection, def: &'static FunctionDef, make: fn() -> D) -> rusqlite::Result<()>
where
    S: std::panic::RefUnwindSafe + std::panic::UnwindSafe + Send,
    D: Aggregate<S, Value> + Send + 'static,
{
    for &n in def.arities {
        conn.create_aggregate_function(def.name, n, flags(), make())?;
    }
    Ok(())
}

/// Every SQL function ogive provides.
pub static REGISTRY: &[FunctionDef] = &[
    FunctionDef {
        name: "ecdf",
        kind: Kind::Aggregate,
        arities: &[2, 3],
        signature: "ecdf(x, t [, w])",
        summary: "share of x at or below t (weighted by w), in [0, 1]; one pass, O(1) memory",
        help: "The empirical cdf of the group at t: count(x <= t) / count(x), or with frequency \
               weights sum(w where x <= t) / sum(w). t must be the same on every row of a group. \
               NULL x (or w) rows are skipped; NULL t gives NULL; no rows gives NULL. Errors: \
               non-numeric x, t or w; a negative or infinite weight.",
        example: "SELECT ecdf(column1, 2.5) FROM (VALUES (1), (2), (3), (4))",
        example_result: "0.5",
        register: |c, d| aggregate(c, d, || column::Ecdf),
    },
    FunctionDef {
        name: "quantile",
        kind: Kind::Aggregate,
        arities: &[2, 3],
        signature: "quantile(x, p [, type])",
        summary: "empirical p-quantile of x; type 1..9 (Hyndman and Fan 1996), default 7",
        help: "The p-quantile of the group by one of the nine Hyndman-Fan definitions (type 7 is \
               numpy's and R's default 'linear'; type 1 is the inverse of the ECDF). Uses \
               selection, O(n). p and type must be the same on every row of a group. NULL x is \
               skipped; NULL p or type gives NULL. Errors: p outside [0, 1], type outside 1..9, \
               non-numeric x.",
        example: "SELECT quantile(column1, 0.9) FROM (VALUES (1), (2), (3), (4), (5))",
        example_result: "4.6",
        register: |c, d| aggregate(c, d, || column::Quantile),
    },
    FunctionDef {
        name: "weighted_quantile",
        kind: Kind::Aggregate,
        arities: &[3, 4],
        signature: "weighted_quantile(x, w, p [, type])",
        summary: "p-quantile of x with frequency weights w; equals quantile on replicated rows",
        help: "As quantile, with frequency weights: the total weight plays the part of n and each \
               value counts as often as its weight. With whole-number weights every type equals \
               quantile over the rows repeated that often. Zero weights carry no mass. Rows with \
               NULL x or NULL w are skipped. Errors: a negative or infinite weight, p outside \
               [0, 1], type outside 1..9.",
        example: "SELECT weighted_quantile(column1, column2, 0.5) FROM (VALUES (1, 3), (10, 1))",
        example_result: "1.0",
        register: |c, d| aggregate(c, d, || column::WeightedQuantile),
    },
    FunctionDef {
        name: "quantiles",
        kind: Kind::Aggregate,
        arities: &[2, 3],
        signature: "quantiles(x, ps [, type])",
        summary: "JSON array of the quantiles of x at each probability of the JSON array ps",
        help: "One sort, many quantiles: ps is a JSON array such as '[0.05, 0.5, 0.95]' and the \
               result is a JSON array of the same length (an undefined or infinite quantile is \
               null). Read it with SQLite's ->> or json_each. Errors: ps not a JSON array of \
               numbers in [0, 1], type outside 1..9.",
        example: "SELECT quantiles(column1, '[0, 0.5, 1]') FROM (VALUES (3), (1), (2))",
        example_result: "[1.0,2.0,3.0]",
        register: |c, d| aggregate(c, d, || column::Quantiles),
    },
    FunctionDef {
        name: "profile",
        kind: Kind::Aggregate,
        arities: &[1],
        signature: "profile(x)",
        summary: "JSON summary: n, mean, sd, min, q1, median, q3, max, skewness, excess_kurtosis",
        help: "A numeric summary of the group as a JSON object. sd uses the n - 1 divisor; \
               skewness and excess_kurtosis are the adjusted estimators G1 and G2 (Joanes and \
               Gill 1998); quartiles are type 7. A field that is undefined for the sample (sd of \
               one value, skewness of a constant sample) is null.",
        example: "SELECT profile(column1) ->> '$.median' FROM (VALUES (1), (2), (9))",
        example_result: "2.0",
        register: |c, d| aggregate(c, d, || column::ProfileAgg),
    },
];

/// The registry row for a name, if ogive has such a function.
pub fn find(name: &str) -> Option<&'static FunctionDef> {
    REGISTRY.iter().find(|d| d.name.eq_ignore_ascii_case(name))
}

/// The README's function table, generated from the registry.
pub fn markdown_table() -> String {
    let mut out = String::from("| function | kind | result |\n|---|---|---|\n");
    for d in REGISTRY {
        out.push_str(&format!(
            "| `{}` | {} | {} |\n",
            d.signature,
            d.kind.word(),
            d.summary.replace('|', "\\|")
        ));
    }
    out
}
