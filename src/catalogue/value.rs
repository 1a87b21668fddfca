//! ogive's own small SQL value type, the one every engine adapter converts to and from.
//!
//! [`Arg`] is an argument as a function receives it (borrowed from the engine's row), and
//! [`Out`] a result as a function returns it. Both have the five SQL storage classes and
//! nothing else, so the catalogue never sees an engine's types.

/// One argument of a call: NULL, INTEGER, REAL, TEXT (UTF-8 bytes as the engine holds
/// them) or BLOB, borrowed for the duration of the call.
///
/// # Example
/// ```
/// use ogive::catalogue::value::Arg;
/// assert_eq!(Arg::Text(b"0.5").to_string(), "TEXT '0.5'");
/// ```
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum Arg<'a> {
    /// SQL NULL.
    Null,
    /// A 64-bit integer.
    Integer(i64),
    /// A double (never NaN from SQLite; the readers treat NaN as NULL).
    Real(f64),
    /// Text, as bytes (UTF-8 unless the engine was given something else).
    Text(&'a [u8]),
    /// A BLOB.
    Blob(&'a [u8]),
}

/// A result: the same five storage classes, owned.
///
/// # Example
/// ```
/// use ogive::catalogue::value::Out;
/// assert_eq!(Out::real(None), Out::Null);
/// assert_eq!(Out::Real(0.5).render(), "0.5");
/// ```
#[derive(Debug, Clone, PartialEq)]
pub enum Out {
    /// SQL NULL.
    Null,
    /// A 64-bit integer.
    Integer(i64),
    /// A double. Engines store a NaN as NULL; the catalogue never returns one.
    Real(f64),
    /// Text.
    Text(String),
    /// A BLOB.
    Blob(Vec<u8>),
}

impl Out {
    /// A REAL, or NULL for `None`.
    pub fn real(x: Option<f64>) -> Out {
        x.map_or(Out::Null, Out::Real)
    }

    /// Shows the value as the shell and the registry examples print it: integers as
    /// digits, reals in Rust's shortest round-trip form (`0.5`, `2.0`, `1e-300`), text as
    /// is, NULL as `NULL`, a BLOB by its size.
    pub fn render(&self) -> String {
        match self {
            Out::Null => "NULL".to_string(),
            Out::Integer(i) => i.to_string(),
            Out::Real(r) => format!("{r:?}"),
            Out::Text(t) => t.clone(),
            Out::Blob(b) => format!("<BLOB {} bytes>", b.len()),
        }
    }
}

/// An argument as an owned result (text that is not UTF-8 is read lossily).
///
/// # Example
/// ```
/// use ogive::catalogue::value::{Arg, Out};
/// assert_eq!(Out::from(Arg::Text(b"ok")), Out::Text("ok".into()));
/// ```
impl From<Arg<'_>> for Out {
    fn from(a: Arg<'_>) -> Out {
        match a {
            Arg::Null => Out::Null,
            Arg::Integer(i) => Out::Integer(i),
            Arg::Real(r) => Out::Real(r),
            Arg::Text(t) => Out::Text(String::from_utf8_lossy(t).into_owned()),
            Arg::Blob(b) => Out::Blob(b.to_vec()),
        }
    }
}

impl std::fmt::Display for Arg<'_> {
    /// Shows an argument in an error message: its type and, shortened, its content. NUL
    /// and other control characters are escaped so a message stays one printable line.
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        match self {
            Arg::Null => write!(f, "NULL"),
            Arg::Integer(i) => write!(f, "{i}"),
            Arg::Real(r) => write!(f, "{r}"),
            Arg::Text(t) => {
                let s = String::from_utf8_lossy(t);
                write!(f, "TEXT '{}'", crate::stats::echo(&s))
            }
            Arg::Blob(b) => write!(f, "a BLOB of {} bytes", b.len()),
        }
    }
}

/// Shows a SQL value in an error message (see the [`Display`](std::fmt::Display) of
/// [`Arg`]).
///
/// # Example
/// ```
/// use ogive::catalogue::value::{Arg, describe};
/// assert_eq!(describe(Arg::Text(b"warm")), "TEXT 'warm'");
/// assert_eq!(describe(Arg::Blob(&[0, 1])), "a BLOB of 2 bytes");
/// assert_eq!(describe(Arg::Text(b"a\0b")), "TEXT 'a\\u{0}b'");
/// ```
pub fn describe(v: Arg<'_>) -> String {
    v.to_string()
}
