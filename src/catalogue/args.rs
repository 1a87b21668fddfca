//! Argument checking and conversion, and the errors of the catalogue, engine-neutral.
//!
//! Every error a function raises is a [`FunctionError`]: the SQL function name and an
//! [`ArgError`], shown as `quantile: p must be between 0 and 1, got 1.5`. The engine
//! adapters turn it into their own error type in one helper each
//! (`crate::sqlite::to_sqlite` for SQLite) and never write an error text themselves.

use std::fmt;

use super::value::Arg;

use super::value::describe as show;
use crate::stats::StatsError;
use crate::stats::censored::CensoredError;
use crate::stats::fit::FitError;
use crate::stats::ks::TestError;
use crate::stats::mixture::MixtureError;
use crate::stats::resolution::{GridError, Resolution};
use crate::stats::sketch::SketchError;
use crate::value::ValueError;
use crate::value::empirical::BlobError;
use crate::value::model::ModelError;

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
    /// An option or JSON argument whose value is not one the function takes (a
    /// bandwidth, a rule, a metric, a method, a probability list); `detail` says which
    /// values are.
    BadOption { what: &'static str, detail: String },
    /// An argument that must be TEXT is another type, or not UTF-8.
    NotText { what: &'static str, shown: String },
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
    /// The engine asked the running call to stop ([`crate::stats::cancel`]) in work of
    /// the catalogue's own (a table function's rows).
    Interrupted,
    /// An error from a test kernel (Kolmogorov-Smirnov and the other comparisons).
    Test(TestError),
    /// A distribution argument of a kind the function does not take (it needs an
    /// empirical one): what it got, and what to do instead.
    NeedsEmpirical {
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
    /// A distribution argument that must be a model is an empirical distribution.
    NeedsModel { arg: usize, got: String },
    /// A model argument that must be a mixture is a one-family model.
    NotAMixture { arg: usize, got: String },
    /// A saved partial state (shipped between an engine's processes) that does not read.
    BadState(String),
    /// A resolution that is not a step > 0 or 'auto', or that the readings are off.
    Grid(GridError),
    /// Censored readings that give no estimate, or a censored estimate that cannot answer.
    Censored(CensoredError),
    /// A censored estimate given to a function that does not take one.
    NotForCensored { arg: usize, got: String },
    /// A time argument that is neither a number nor an ISO-8601 date-time.
    NotTime { what: &'static str, shown: String },
    /// A bad reading or time of a series (`dist_series`).
    Series(crate::stats::series::SeriesError),
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
            ArgError::BadOption { what, detail } => write!(f, "{what} {detail}"),
            ArgError::NotText { what, shown } => write!(f, "{what} must be TEXT, got {shown}"),
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
            ArgError::Interrupted => f.write_str("interrupted"),
            ArgError::Test(e) => e.fmt(f),
            ArgError::NeedsEmpirical { arg, got, instead } => write!(
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
            ArgError::NeedsModel { got, .. } => write!(
                f,
                "model must be model JSON (from dist_mixture, dist_fit or dist_model), not {got}"
            ),
            ArgError::NotAMixture { got, .. } => write!(
                f,
                "model must be a Gaussian mixture (from dist_mixture, or dist_model with \
                 'normal_mixture'), not {got}, which has no components: read its parameters \
                 with ->> (for example m ->> '$.mean')"
            ),
            ArgError::Grid(e) => e.fmt(f),
            ArgError::BadState(what) => write!(
                f,
                "cannot read a partial aggregate state ({what}); the engine's processes must \
                 run the same ogive"
            ),
            ArgError::Censored(e) => e.fmt(f),
            ArgError::NotTime { what, shown } => write!(
                f,
                "{what} must be a number or an ISO-8601 date-time TEXT such as \
                 '2024-09-02 05:00' (a date, then optionally HH:MM[:SS[.fff]] and Z or \
                 +HH:MM), got {shown}"
            ),
            ArgError::Series(e) => e.fmt(f),
            ArgError::NotForCensored { arg, got } => write!(
                f,
                "argument {arg} is {got} (from dist_censored), which this function does not take; \
                 a censored estimate answers dist_cdf, dist_quantile, dist_n, dist_band \
                 (Greenwood), dist_steps, dist_curve and dist_ks against a model"
            ),
            ArgError::OutOfMemory { held } => write!(
                f,
                "ran out of memory holding {held} values of one group; this function keeps \
                 every value, so group more finely (GROUP BY, WHERE) or raise the memory limit \
                 (for a quantile, sketch_quantile(quantile_sketch(x), p) needs 64 KB per group)"
            ),
        }
    }
}

impl std::error::Error for ArgError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        match self {
            ArgError::Stats(e) => Some(e),
            ArgError::Value(e) => Some(e),
            ArgError::Test(e) => Some(e),
            ArgError::Fit(e) => Some(e),
            ArgError::Mixture(e) => Some(e),
            ArgError::Model(e) => Some(e),
            ArgError::Sketch(e) => Some(e),
            ArgError::Grid(e) => Some(e),
            ArgError::Censored(e) => Some(e),
            ArgError::Series(e) => Some(e),
            _ => None,
        }
    }
}

impl From<TestError> for ArgError {
    fn from(e: TestError) -> Self {
        ArgError::Test(e)
    }
}

impl From<crate::stats::grow::OutOfMemory> for ArgError {
    fn from(e: crate::stats::grow::OutOfMemory) -> ArgError {
        ArgError::OutOfMemory { held: e.held }
    }
}

impl From<StatsError> for ArgError {
    /// Out of memory in a kernel becomes [`ArgError::OutOfMemory`], whose text says what
    /// to do.
    fn from(e: StatsError) -> Self {
        match e {
            StatsError::OutOfMemory { held } => ArgError::OutOfMemory { held },
            e => ArgError::Stats(e),
        }
    }
}

impl From<ValueError> for ArgError {
    /// A BLOB that could not be read for want of memory is no bad BLOB: it becomes
    /// [`ArgError::OutOfMemory`].
    fn from(e: ValueError) -> Self {
        match e {
            ValueError::BadBlob {
                problem: BlobError::Parts(StatsError::OutOfMemory { held }),
                ..
            } => ArgError::OutOfMemory { held },
            e => ArgError::Value(e),
        }
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

impl From<GridError> for ArgError {
    fn from(e: GridError) -> Self {
        ArgError::Grid(e)
    }
}

impl From<CensoredError> for ArgError {
    fn from(e: CensoredError) -> Self {
        ArgError::Censored(e)
    }
}

impl From<crate::stats::series::SeriesError> for ArgError {
    fn from(e: crate::stats::series::SeriesError) -> Self {
        ArgError::Series(e)
    }
}

impl From<SketchError> for ArgError {
    fn from(e: SketchError) -> Self {
        ArgError::Sketch(e)
    }
}

/// An error of a SQL function: its name and what was wrong. Engines show it as
/// `name: message`.
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

impl std::error::Error for FunctionError {
    fn source(&self) -> Option<&(dyn std::error::Error + 'static)> {
        Some(&self.error)
    }
}

impl FunctionError {
    /// Whether memory ran out (engines report this with their out-of-memory code).
    pub fn is_out_of_memory(&self) -> bool {
        use crate::stats::series::SeriesError;
        let value = |p: &BlobError| {
            matches!(
                p,
                BlobError::Parts(StatsError::OutOfMemory { .. })
                    | BlobError::Readings(CensoredError::OutOfMemory)
            )
        };
        match &self.error {
            ArgError::OutOfMemory { .. }
            | ArgError::Stats(StatsError::OutOfMemory { .. })
            | ArgError::Fit(FitError::OutOfMemory { .. })
            | ArgError::Test(TestError::OutOfMemory { .. })
            | ArgError::Censored(CensoredError::OutOfMemory)
            | ArgError::Series(SeriesError::OutOfMemory { .. }) => true,
            ArgError::Value(ValueError::BadBlob { problem, .. })
            | ArgError::Value(ValueError::BadCensored { problem, .. }) => value(problem),
            _ => false,
        }
    }

    /// Whether the engine's cancellation stopped the call ([`crate::stats::cancel`]);
    /// engines report this with their interrupt code.
    pub fn is_interrupted(&self) -> bool {
        matches!(
            self.error,
            ArgError::Fit(FitError::Interrupted)
                | ArgError::Mixture(MixtureError::Interrupted)
                | ArgError::Censored(CensoredError::Interrupted)
                | ArgError::Test(TestError::Interrupted)
                | ArgError::Interrupted
        )
    }
}

/// The one helper that names the function in an error.
///
/// # Example
/// ```
/// use ogive::catalogue::args::{fail, ArgError};
/// let e = fail("quantile", ArgError::Missing { signature: "quantile(x, p)" });
/// assert_eq!(e.to_string(), "quantile: give the arguments, as in quantile(x, p)");
/// ```
#[cold]
pub fn fail(function: &'static str, error: impl Into<ArgError>) -> FunctionError {
    FunctionError {
        function,
        error: error.into(),
    }
}

/// A numeric argument: NULL gives `None`; INTEGER and REAL convert to `f64`; TEXT that
/// reads as a number in full (surrounding spaces allowed) is accepted, as SQLite's numeric
/// affinity would; other TEXT and any BLOB are errors. SQLite has no NaN, so a NaN REAL
/// (possible only through the C API) is treated as NULL.
#[inline]
pub fn number(v: Arg<'_>, what: &'static str) -> Result<Option<f64>, ArgError> {
    match v {
        Arg::Real(r) => Ok((!r.is_nan()).then_some(r)),
        Arg::Integer(i) => Ok(Some(i as f64)),
        Arg::Null => Ok(None),
        Arg::Text(_) | Arg::Blob(_) => number_from_text(v, what),
    }
}

/// The rare branch of [`number`], kept out of line so the per-row path stays small.
#[cold]
#[inline(never)]
fn number_from_text(v: Arg<'_>, what: &'static str) -> Result<Option<f64>, ArgError> {
    let shown = || ArgError::NotNumeric {
        what,
        shown: show(v),
    };
    match v {
        Arg::Text(t) => std::str::from_utf8(t)
            .ok()
            .map(str::trim)
            // SQLite's own reading of numeric TEXT knows digits, a sign, a point and an
            // exponent; words such as 'inf' or 'nan' are text to it, so they are here.
            .filter(|s| {
                s.bytes()
                    .all(|b| b.is_ascii_digit() || b"+-.eE".contains(&b))
            })
            .and_then(|s| s.parse::<f64>().ok())
            .filter(|x| !x.is_nan())
            .map(Some)
            .ok_or_else(shown),
        _ => Err(shown()),
    }
}

/// A whole-number argument: INTEGER, or a REAL or numeric TEXT with no fractional part.
/// NULL gives `None`.
pub fn whole(v: Arg<'_>, what: &'static str) -> Result<Option<i64>, ArgError> {
    if let Arg::Integer(i) = v {
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

/// A `resolution` argument: a number `> 0` (the step readings were rounded to) or the
/// TEXT `'auto'` (any case, spaces allowed). NULL gives `None`: the readings are exact.
///
/// # Errors
/// [`ArgError::Grid`] for a number that is not `> 0`, other TEXT, or a BLOB.
pub fn resolution(v: Arg<'_>) -> Result<Option<Resolution>, ArgError> {
    if let Arg::Text(t) = v
        && std::str::from_utf8(t).is_ok_and(|s| s.trim().eq_ignore_ascii_case("auto"))
    {
        return Ok(Some(Resolution::Auto));
    }
    let step = number(v, "resolution").map_err(|_| ArgError::BadOption {
        what: "resolution",
        detail: format!(
            "must be a number > 0 (the step the readings were rounded to) or 'auto', got {}",
            show(v)
        ),
    })?;
    match step {
        None => Ok(None),
        Some(r) if r > 0.0 && r.is_finite() => Ok(Some(Resolution::Step(r))),
        Some(r) => Err(GridError::BadStep(r).into()),
    }
}

/// A text argument: NULL gives `None`; anything else must be TEXT.
pub fn text<'a>(v: Arg<'a>, what: &'static str) -> Result<Option<&'a str>, ArgError> {
    match v {
        Arg::Null => Ok(None),
        Arg::Text(t) => std::str::from_utf8(t)
            .map(Some)
            .map_err(|_| ArgError::NotText {
                what,
                shown: "text that is not valid UTF-8".to_string(),
            }),
        other => Err(ArgError::NotText {
            what,
            shown: show(other),
        }),
    }
}

/// A BLOB argument: NULL gives `None`; anything but a BLOB is an error that names the
/// functions that make such BLOBs (`made_by`).
pub fn blob<'a>(
    v: Arg<'a>,
    what: &'static str,
    made_by: &'static str,
) -> Result<Option<&'a [u8]>, ArgError> {
    match v {
        Arg::Null => Ok(None),
        Arg::Blob(b) => Ok(Some(b)),
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

    /// Whether a row has fixed the value (NULL included).
    pub fn is_seen(&self) -> bool {
        self.first.is_some()
    }

    /// Whether the value was fixed as NULL.
    pub fn is_null(&self) -> bool {
        matches!(self.first, Some(None))
    }

    /// Combines the constant of another part of the same group: the parts must agree.
    ///
    /// # Errors
    /// [`ArgError::Changed`] when both parts fixed different values.
    pub fn merge(&mut self, other: Constant<T>, what: &'static str) -> Result<(), ArgError> {
        match (&self.first, other.first) {
            (_, None) => Ok(()),
            (None, theirs) => {
                self.first = theirs;
                Ok(())
            }
            (Some(mine), Some(theirs)) if *mine == theirs => Ok(()),
            (Some(mine), Some(theirs)) => Err(changed(mine, &theirs, what)),
        }
    }

    /// The raw state, for saving: unseen, NULL, or a value.
    pub fn raw(&self) -> Option<Option<&T>> {
        self.first.as_ref().map(Option::as_ref)
    }

    /// A constant restored from [`Constant::raw`].
    pub fn from_raw(first: Option<Option<T>>) -> Self {
        Constant { first }
    }
}

/// A TEXT argument that must be the same on every row of a group and is parsed once: the
/// first row's text is parsed by the caller's parser, later rows compare bytes only.
#[derive(Debug, Clone)]
pub struct TextConstant<T> {
    text: Constant<String>,
    parsed: Option<T>,
}

impl<T> Default for TextConstant<T> {
    fn default() -> Self {
        TextConstant {
            text: Constant::default(),
            parsed: None,
        }
    }
}

impl<T: Clone> TextConstant<T> {
    /// Records this row's value; on the first row a non-NULL text is parsed with `parse`.
    ///
    /// # Errors
    /// [`ArgError::NotText`] for a value that is not TEXT, [`ArgError::Changed`] when it
    /// differs from the first row's, and whatever `parse` reports.
    #[inline]
    pub fn observe(
        &mut self,
        v: Arg<'_>,
        what: &'static str,
        parse: impl FnOnce(&str) -> Result<T, ArgError>,
    ) -> Result<(), ArgError> {
        let now = text(v, what)?;
        if let (Some(first), Some(now)) = (self.text.get(), now)
            && first == now
        {
            return Ok(());
        }
        if self.text.observe(now.map(str::to_owned), what)?
            && let Some(now) = now
        {
            self.parsed = Some(parse(now)?);
        }
        Ok(())
    }

    /// The parsed value; `None` when no row came or the text was NULL.
    pub fn get(&self) -> Option<&T> {
        self.parsed.as_ref()
    }

    /// Whether the text was NULL.
    pub fn is_null(&self) -> bool {
        self.text.is_null()
    }

    /// The text as first seen (for saving).
    pub fn raw(&self) -> Option<Option<&String>> {
        self.text.raw()
    }

    /// Restores a constant from its text, parsing it again.
    ///
    /// # Errors
    /// Whatever `parse` reports.
    pub fn from_raw(
        first: Option<Option<String>>,
        parse: impl FnOnce(&str) -> Result<T, ArgError>,
    ) -> Result<Self, ArgError> {
        let parsed = match &first {
            Some(Some(t)) => Some(parse(t)?),
            _ => None,
        };
        Ok(TextConstant {
            text: Constant::from_raw(first),
            parsed,
        })
    }

    /// Combines the constant of another part of the same group.
    ///
    /// # Errors
    /// [`ArgError::Changed`] when the parts saw different texts.
    pub fn merge(&mut self, other: TextConstant<T>, what: &'static str) -> Result<(), ArgError> {
        if self.parsed.is_none() {
            self.parsed = other.parsed.clone();
        }
        self.text.merge(other.text, what)
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
        assert_eq!(number(Arg::Integer(3), "x"), Ok(Some(3.0)));
        assert_eq!(number(Arg::Real(2.5), "x"), Ok(Some(2.5)));
        assert_eq!(number(Arg::Null, "x"), Ok(None));
        assert_eq!(number(Arg::Text(b" 4.5 "), "x"), Ok(Some(4.5)));
        let e = number(Arg::Text(b"warm"), "x").unwrap_err();
        assert_eq!(
            fail("quantile", e).to_string(),
            "quantile: x must be a number (INTEGER or REAL), got TEXT 'warm'; CAST it or filter such rows out"
        );
        assert!(number(Arg::Text(b"nan"), "x").is_err());
        // SQLite reads these as text, not as infinities.
        for word in ["inf", "infinity", "-Infinity", " INF "] {
            assert!(number(Arg::Text(word.as_bytes()), "x").is_err(), "{word}");
        }
        assert_eq!(number(Arg::Text(b"-1e3"), "x"), Ok(Some(-1000.0)));
        assert!(number(Arg::Blob(&[1, 2]), "x").is_err());
    }

    #[test]
    fn blobs_only() {
        assert_eq!(blob(Arg::Blob(&[1]), "s", "f"), Ok(Some(&[1u8][..])));
        assert_eq!(blob(Arg::Null, "s", "f"), Ok(None));
        let e = blob(Arg::Integer(3), "s", "quantile_sketch").unwrap_err();
        assert_eq!(
            e.to_string(),
            "s must be a BLOB made by quantile_sketch, got 3"
        );
    }

    #[test]
    fn whole_numbers() {
        assert_eq!(whole(Arg::Real(7.0), "type"), Ok(Some(7)));
        assert!(whole(Arg::Real(7.5), "type").is_err());
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
