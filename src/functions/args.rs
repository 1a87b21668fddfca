//! Argument checking and conversion for the SQL adapters, and the one path by which
//! errors reach SQLite.
//!
//! Every adapter error becomes an SQLite error whose message starts with the SQL function
//! name and says what to change, for example `quantile: p must be between 0 and 1, got 1.5`.

use std::fmt;

use rusqlite::types::ValueRef;

use crate::stats::StatsError;
use crate::stats::fit::FitError;
use crate::stats::ks::TestError;
use crate::stats::mixture::MixtureError;
use crate::stats::sketch::SketchError;
use crate::value::model::ModelError;
use crate::value::{ValueError, describe as show};

/// What an adapter can reject. The SQL function name is added by [`fail`].
#[derive(Debug, Clone, PartialEq)]
pub enum ArgError {
    /// A value that should be a number is TEXT that does not parse, or a BLOB.
    NotNumeric { what: &'static str, shown: String },
    /// A value that should be a whole number is not one.
    NotWhole { what: &'static str, shown: String },
    /// An argument that must be the same on every row of a group changed.
    Changed {
        what: &'static str,
        first: String,
        now: String,
    },
    /// A JSON argument that does not have the required shape.
    BadJson { what: &'static str, detail: String },
    /// A value that should be a BLOB made by ogive is something else.
    NotBlob {
        what: &'static str,
        made_by: &'static str,
        shown: String,
    },
    /// An error from a kernel.
    Stats(StatsError),
    /// A distribution argument that is not a valid distribution value.
    Value(ValueError),
    /// A table-valued function called without its required arguments.
    Missing { signature: &'static str },
    /// A panic caught at the boundary: a bug, reported instead of crashing the host.
    Internal(String),
    /// An error from a test kernel (Kolmogorov-Smirnov and the other comparisons).
    Test(TestError),
    /// A distribution argument of a kind the function does not take (it needs an
    /// empirical one): what it got, and what to do instead.
    NotEmpirical {
        arg: usize,
        got: String,
        instead: &'static str,
    },
    /// A weighted empirical distribution given to a rank test, whose weights are not all
    /// whole numbers (a rank test counts a weight as that many rows).
    FractionalWeight { arg: usize, weight: f64 },
    /// A weighted empirical distribution whose weights stand for more rows than a rank test
    /// replicates.
    TooManyRows { arg: usize, total: f64, limit: u64 },
    /// A parametric fit or parameter set that was refused.
    Fit(FitError),
    /// A mixture fit or mixture that was refused.
    Mixture(MixtureError),
    /// Model JSON that was refused.
    Model(ModelError),
    /// An error from the quantile sketch or its BLOB.
    Sketch(SketchError),
    /// Memory ran out while holding a group's values (`held` of them so far).
    OutOfMemory { held: usize },
}

impl fmt::Display for ArgError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ArgError::NotNumeric { what, shown } => write!(
                f,
                "{what} must be a number (INTEGER or REAL), got {shown}; CAST it or filter such rows out"
            ),
            ArgError::NotWhole { what, shown } => {
                write!(f, "{what} must be a whole number, got {shown}")
            }
            ArgError::Changed { what, first, now } => write!(
                f,
                "{what} must be the same on every row of a group, got {first} and then {now}"
            ),
            ArgError::BadJson { what, detail } => write!(f, "{what} {detail}"),
            ArgError::NotBlob {
                what,
                made_by,
                shown,
            } => write!(f, "{what} must be a BLOB made by {made_by}, got {shown}"),
            ArgError::Stats(e) => e.fmt(f),
            ArgError::Value(e) => e.fmt(f),
            ArgError::Missing { signature } => {
                write!(f, "give the arguments, as in {signature}")
            }
            ArgError::Internal(what) => write!(
                f,
                "internal error: {what}; this is a bug in ogive, please report it"
            ),
            ArgError::Test(e) => e.fmt(f),
            ArgError::NotEmpirical { arg, got, instead } => write!(
                f,
                "argument {arg} must be an empirical distribution (a BLOB from dist_empirical), \
                 not {got}; {instead}"
            ),
            ArgError::FractionalWeight { arg, weight } => write!(
                f,
                "argument {arg} has the fractional weight {weight}; this test counts a weight as \
                 that many rows, so weights must be whole numbers (dist_distance's metric 'wasserstein' \
                 takes any weights)"
            ),
            ArgError::TooManyRows { arg, total, limit } => write!(
                f,
                "argument {arg} has weights summing to {total}; this test counts a weight as that \
                 many rows, up to {limit} per distribution"
            ),
            ArgError::Fit(e) => e.fmt(f),
            ArgError::Mixture(e) => e.fmt(f),
            ArgError::Model(e) => e.fmt(f),
            ArgError::Sketch(e) => e.fmt(f),
            ArgError::OutOfMemory { held } => write!(
                f,
                "ran out of memory holding {held} values of one group; an exact quantile keeps \
                 every value, so group more finely or use sketch_quantile(quantile_sketch(x), p), which \
                 needs 64 KB per group"
            ),
        }
    }
}

impl From<TestError> for ArgError {
    fn from(e: TestError) -> Self {
        ArgError::Test(e)
    }
}

impl From<StatsError> for ArgError {
    fn from(e: StatsError) -> Self {
        ArgError::Stats(e)
    }
}

impl From<ValueError> for ArgError {
    fn from(e: ValueError) -> Self {
        ArgError::Value(e)
    }
}

impl From<FitError> for ArgError {
    fn from(e: FitError) -> Self {
        ArgError::Fit(e)
    }
}

impl From<MixtureError> for ArgError {
    fn from(e: MixtureError) -> Self {
        ArgError::Mixture(e)
    }
}

impl From<ModelError> for ArgError {
    fn from(e: ModelError) -> Self {
        ArgError::Model(e)
    }
}

impl From<SketchError> for ArgError {
    fn from(e: SketchError) -> Self {
        ArgError::Sketch(e)
    }
}

/// An adapter error with the SQL function's name, as SQLite reports it.
#[derive(Debug, Clone, PartialEq)]
pub struct FunctionError {
    /// The SQL function name.
    pub function: &'static str,
    /// What was wrong.
    pub error: ArgError,
}

impl fmt::Display for FunctionError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(f, "{}: {}", self.function, self.error)
    }
}

impl std::error::Error for FunctionError {}

/// The one helper that turns an adapter error into the error SQLite reports.
pub fn fail(function: &'static str, error: impl Into<ArgError>) -> rusqlite::Error {
    rusqlite::Error::UserFunctionError(Box::new(FunctionError {
        function,
        error: error.into(),
    }))
}

/// [`fail`] for the callbacks that SQLite calls directly (`functions::raw`): sets the
/// context's result to the same error, with the same message and code, that rusqlite
/// reports for the error [`fail`] returns.
///
/// # Safety
/// `ctx` must be the context of the running SQLite callback.
#[cold]
#[inline(never)]
pub(crate) unsafe fn fail_raw(
    ctx: *mut rusqlite::ffi::sqlite3_context,
    function: &'static str,
    error: impl Into<ArgError>,
) {
    let message = fail(function, error).to_string();
    let len = std::ffi::c_int::try_from(message.len()).unwrap_or(std::ffi::c_int::MAX);
    // SAFETY: per the contract; SQLite copies the message (it is not NUL-terminated, so
    // its length is given).
    unsafe {
        rusqlite::ffi::sqlite3_result_error_code(ctx, rusqlite::ffi::SQLITE_CONSTRAINT_FUNCTION);
        rusqlite::ffi::sqlite3_result_error(ctx, message.as_ptr().cast(), len);
    }
}

/// A numeric argument: NULL gives `None`; INTEGER and REAL convert to `f64`; TEXT that
/// reads as a number in full (surrounding spaces allowed) is accepted, as SQLite's numeric
/// affinity would; other TEXT and any BLOB are errors. SQLite has no NaN, so a NaN REAL
/// (possible only through the C API) is treated as NULL.
#[inline]
pub fn number(v: ValueRef<'_>, what: &'static str) -> Result<Option<f64>, ArgError> {
    match v {
        ValueRef::Real(r) => Ok((!r.is_nan()).then_some(r)),
        ValueRef::Integer(i) => Ok(Some(i as f64)),
        ValueRef::Null => Ok(None),
        ValueRef::Text(_) | ValueRef::Blob(_) => number_from_text(v, what),
    }
}

/// The rare branch of [`number`], kept out of line so the per-row path stays small.
#[cold]
#[inline(never)]
fn number_from_text(v: ValueRef<'_>, what: &'static str) -> Result<Option<f64>, ArgError> {
    let shown = || ArgError::NotNumeric {
        what,
        shown: show(v),
    };
    match v {
        ValueRef::Text(t) => std::str::from_utf8(t)
            .ok()
            .and_then(|s| s.trim().parse::<f64>().ok())
            .filter(|x| !x.is_nan())
            .map(Some)
            .ok_or_else(shown),
        _ => Err(shown()),
    }
}

/// A whole-number argument: INTEGER, or a REAL or numeric TEXT with no fractional part.
/// NULL gives `None`.
pub fn whole(v: ValueRef<'_>, what: &'static str) -> Result<Option<i64>, ArgError> {
    if let ValueRef::Integer(i) = v {
        return Ok(Some(i));
    }
    match number(v, what)? {
        None => Ok(None),
        Some(x) if x.fract() == 0.0 && x.abs() < 9.0e15 => Ok(Some(x as i64)),
        Some(_) => Err(ArgError::NotWhole {
            what,
            shown: show(v),
        }),
    }
}

/// A text argument: NULL gives `None`; anything else must be TEXT.
pub fn text<'a>(v: ValueRef<'a>, what: &'static str) -> Result<Option<&'a str>, ArgError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Text(t) => std::str::from_utf8(t)
            .map(Some)
            .map_err(|_| ArgError::BadJson {
                what,
                detail: "must be valid UTF-8 text".to_string(),
            }),
        other => Err(ArgError::BadJson {
            what,
            detail: format!("must be TEXT, got {}", show(other)),
        }),
    }
}

/// A BLOB argument: NULL gives `None`; anything but a BLOB is an error that names the
/// functions that make such BLOBs (`made_by`).
pub fn blob<'a>(
    v: ValueRef<'a>,
    what: &'static str,
    made_by: &'static str,
) -> Result<Option<&'a [u8]>, ArgError> {
    match v {
        ValueRef::Null => Ok(None),
        ValueRef::Blob(b) => Ok(Some(b)),
        other => Err(ArgError::NotBlob {
            what,
            made_by,
            shown: show(other),
        }),
    }
}

/// An argument that must be the same on every row of a group (a probability, a
/// threshold, a type). Remembers the first value, NULL included, and rejects a change.
#[derive(Debug, Clone, Default)]
pub struct Constant<T> {
    first: Option<Option<T>>,
}

impl<T: PartialEq + Clone + fmt::Debug> Constant<T> {
    /// Records `v` for this row. Returns `true` the first time, so the caller can
    /// validate the value once.
    ///
    /// # Errors
    /// [`ArgError::Changed`] when `v` differs from the first row's value.
    #[inline(always)]
    pub fn observe(&mut self, v: Option<T>, what: &'static str) -> Result<bool, ArgError> {
        match &self.first {
            Some(first) if *first == v => Ok(false),
            None => {
                self.first = Some(v);
                Ok(true)
            }
            Some(first) => Err(changed(first, &v, what)),
        }
    }

    /// The value seen, `None` when no row came or the value was NULL.
    pub fn get(&self) -> Option<&T> {
        self.first.as_ref().and_then(Option::as_ref)
    }
}

/// The error of [`Constant::observe`], kept out of the per-row path.
#[cold]
#[inline(never)]
fn changed<T: fmt::Debug>(first: &Option<T>, now: &Option<T>, what: &'static str) -> ArgError {
    ArgError::Changed {
        what,
        first: shown_option(first),
        now: shown_option(now),
    }
}

fn shown_option<T: fmt::Debug>(v: &Option<T>) -> String {
    match v {
        Some(x) => format!("{x:?}"),
        None => "NULL".to_string(),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn numbers_convert_and_reject() {
        assert_eq!(number(ValueRef::Integer(3), "x"), Ok(Some(3.0)));
        assert_eq!(number(ValueRef::Real(2.5), "x"), Ok(Some(2.5)));
        assert_eq!(number(ValueRef::Null, "x"), Ok(None));
        assert_eq!(number(ValueRef::Text(b" 4.5 "), "x"), Ok(Some(4.5)));
        let e = number(ValueRef::Text(b"warm"), "x").unwrap_err();
        assert_eq!(
            fail("quantile", e).to_string(),
            "quantile: x must be a number (INTEGER or REAL), got TEXT 'warm'; CAST it or filter such rows out"
        );
        assert!(number(ValueRef::Text(b"nan"), "x").is_err());
        assert!(number(ValueRef::Blob(&[1, 2]), "x").is_err());
    }

    #[test]
    fn blobs_only() {
        assert_eq!(blob(ValueRef::Blob(&[1]), "s", "f"), Ok(Some(&[1u8][..])));
        assert_eq!(blob(ValueRef::Null, "s", "f"), Ok(None));
        let e = blob(ValueRef::Integer(3), "s", "quantile_sketch").unwrap_err();
        assert_eq!(
            e.to_string(),
            "s must be a BLOB made by quantile_sketch, got 3"
        );
    }

    #[test]
    fn whole_numbers() {
        assert_eq!(whole(ValueRef::Real(7.0), "type"), Ok(Some(7)));
        assert!(whole(ValueRef::Real(7.5), "type").is_err());
    }

    #[test]
    fn constants_must_not_change() {
        let mut c = Constant::default();
        assert_eq!(c.observe(Some(0.5), "p"), Ok(true));
        assert_eq!(c.observe(Some(0.5), "p"), Ok(false));
        let e = c.observe(Some(0.9), "p").unwrap_err();
        assert_eq!(
            e.to_string(),
            "p must be the same on every row of a group, got 0.5 and then 0.9"
        );
        assert_eq!(c.get(), Some(&0.5));
    }
}
