//! ogive: empirical distributions, quantiles, tests and fits inside SQLite.
//!
//! The crate has four layers, each using only those before it:
//!
//! - [`stats`]: the mathematics, pure functions on slices with no engine in sight;
//! - [`value`]: the SQL values (the empirical-distribution BLOB, the model JSON and the
//!   quantile-sketch BLOB), encoded and checked on plain bytes and text;
//! - [`catalogue`]: every SQL function, engine-neutral: the registry rows, argument
//!   checks on ogive's own value type, aggregate states that step, merge and finalize,
//!   and every error text;
//! - [`sqlite`]: the SQLite adapter; [`register`] installs the catalogue on a
//!   [`rusqlite::Connection`].
//!
//! The loadable extension (`libogive.so`, built from `ext/`) and the `ogive` shell both
//! call [`register`].
//!
//! # Example
//! ```
//! use rusqlite::Connection;
//! let conn = Connection::open_in_memory()?;
//! ogive::register(&conn)?;
//! let median: f64 = conn.query_row(
//!     "SELECT quantile(column1, 0.5) FROM (VALUES (4.0), (1.0), (3.0))",
//!     [],
//!     |row| row.get(0),
//! )?;
//! assert_eq!(median, 3.0);
//! # Ok::<(), rusqlite::Error>(())
//! ```

#![warn(clippy::undocumented_unsafe_blocks)]

#[cfg(feature = "ballista")]
pub mod ballista;
pub mod catalogue;
#[cfg(feature = "datafusion")]
pub mod datafusion;
pub mod sqlite;
pub mod stats;
pub mod value;

#[cfg(feature = "loadable")]
pub use sqlite::extension;

pub use rusqlite;

/// Installs every ogive SQL function on `conn`.
///
/// # Errors
/// Whatever SQLite reports when creating a function (for example, out of memory).
///
/// # Example
/// ```
/// let conn = rusqlite::Connection::open_in_memory()?;
/// ogive::register(&conn)?;
/// let share: f64 = conn.query_row(
///     "SELECT ecdf(column1, 5) FROM (VALUES (3.5), (4.9), (6.2), (7.0))",
///     [],
///     |row| row.get(0),
/// )?;
/// assert_eq!(share, 0.5);
/// # Ok::<(), rusqlite::Error>(())
/// ```
pub fn register(conn: &rusqlite::Connection) -> rusqlite::Result<()> {
    sqlite::register(conn)
}
