//! The one reader of decoded arguments (distribution values, models and sketches), with
//! one caching policy for every function and every engine.
//!
//! Decoding a distribution BLOB checks every byte, and parsing model JSON checks every
//! field, so a value that repeats from row to row is decoded once: first the engine's own
//! per-statement memory for constant arguments ([`Memo`]; SQLite's auxiliary data), then
//! the last value decoded on this thread, compared byte for byte (a fit in a CTE joined
//! to every row of a scan repeats unchanged, and comparing bytes is far cheaper than
//! decoding). A decoded value is immutable and shared behind an [`Arc`].

use std::any::Any;
use std::cell::RefCell;
use std::sync::Arc;

use super::args::{ArgError, FunctionError, blob, fail, number, whole};
use super::state::Args;
use super::value::Arg;
use crate::stats::sketch::QuantileSketch;
use crate::value::model::Model;
use crate::value::{Dist, ValueError, sketch};

/// A decoded argument, shared.
pub type Shared = Arc<dyn Any + Send + Sync>;

/// An engine's memory of decoded constant arguments for the running statement.
pub trait Memo {
    /// The value remembered for argument `i`, if any.
    fn recall(&self, i: usize) -> Option<Shared>;
    /// Remembers the decoded value of argument `i` (when it is constant in the statement).
    fn remember(&mut self, i: usize, value: Shared);
}

/// A [`Memo`] that remembers nothing (engines without per-statement memory).
#[derive(Debug, Default)]
pub struct NoMemo;

impl Memo for NoMemo {
    fn recall(&self, _: usize) -> Option<Shared> {
        None
    }
    fn remember(&mut self, _: usize, _: Shared) {}
}

/// What a decoded value was read from, for the thread's last-value memory.
type Last = (u8, Box<[u8]>, Shared);

thread_local! {
    /// The last value decoded on this thread: its kind tag, its bytes and the value.
    static LAST: RefCell<Option<Last>> = const { RefCell::new(None) };
}

/// The kind tags of [`LAST`].
const TAG_DIST: u8 = 1;
const TAG_SKETCH: u8 = 2;

/// The functions that make sketch BLOBs, for messages.
pub const SKETCH_MADE_BY: &str = "quantile_sketch or sketch_merge";

/// One call of a scalar or table function: its arguments and the engine's memory.
pub struct Call<'a> {
    name: &'static str,
    args: Args<'a>,
    memo: &'a mut dyn Memo,
}

impl<'a> Call<'a> {
    /// A call of function `name`.
    pub fn new(name: &'static str, args: &'a [Arg<'a>], memo: &'a mut dyn Memo) -> Self {
        Call {
            name,
            args: Args::new(args),
            memo,
        }
    }

    /// The function's name.
    pub fn name(&self) -> &'static str {
        self.name
    }

    /// How many arguments the call has.
    pub fn len(&self) -> usize {
        self.args.len()
    }

    /// Whether the call has no arguments.
    pub fn is_empty(&self) -> bool {
        self.args.is_empty()
    }

    /// Argument `i` (NULL when missing).
    pub fn get(&self, i: usize) -> Arg<'a> {
        self.args.get(i)
    }

    /// Argument `i` if the call has it.
    pub fn optional(&self, i: usize) -> Option<Arg<'a>> {
        self.args.optional(i)
    }

    /// Names the function in an error.
    pub fn fail(&self, e: impl Into<ArgError>) -> FunctionError {
        fail(self.name, e)
    }

    /// Numeric argument `i`.
    ///
    /// # Errors
    /// As [`number`].
    pub fn number(&self, i: usize, what: &'static str) -> Result<Option<f64>, FunctionError> {
        number(self.get(i), what).map_err(|e| self.fail(e))
    }

    /// Whole-number argument `i`.
    ///
    /// # Errors
    /// As [`whole`].
    pub fn whole(&self, i: usize, what: &'static str) -> Result<Option<i64>, FunctionError> {
        whole(self.get(i), what).map_err(|e| self.fail(e))
    }

    /// Decodes argument `i` with `decode`, through the memo and the thread's last value.
    fn decoded<T: Any + Send + Sync>(
        &mut self,
        i: usize,
        tag: u8,
        bytes: &[u8],
        decode: impl FnOnce(&[u8]) -> Result<T, ArgError>,
    ) -> Result<Arc<T>, FunctionError> {
        if let Some(v) = self.memo.recall(i).and_then(|v| v.downcast::<T>().ok()) {
            return Ok(v);
        }
        let hit = LAST.with_borrow(|last| match last {
            Some((t, b, v)) if *t == tag && **b == *bytes => Some(Arc::clone(v)),
            _ => None,
        });
        let value: Shared = match hit {
            Some(v) => v,
            None => {
                let v: Shared = Arc::new(decode(bytes).map_err(|e| self.fail(e))?);
                // Only an optimisation: when the copy of the bytes does not fit, the thread
                // keeps no last value (and the next row decodes again).
                let mut copy = Vec::new();
                let kept = copy.try_reserve_exact(bytes.len()).is_ok().then(|| {
                    copy.extend_from_slice(bytes);
                    (tag, copy.into_boxed_slice(), Arc::clone(&v))
                });
                LAST.set(kept);
                v
            }
        };
        self.memo.remember(i, Arc::clone(&value));
        value
            .downcast::<T>()
            .map_err(|_| self.fail(ArgError::Internal("a decoded value of another kind".into())))
    }

    /// Argument `i` as a distribution (empirical BLOB or model JSON). NULL gives `None`.
    ///
    /// # Errors
    /// [`ValueError`] for a value that is not a distribution.
    pub fn dist(&mut self, i: usize) -> Result<Option<Arc<Dist>>, FunctionError> {
        let arg = i + 1;
        match self.get(i) {
            Arg::Null => Ok(None),
            Arg::Blob(b) => self
                .decoded(i, TAG_DIST, b, |b| Ok(Dist::from_blob(b, arg)?))
                .map(Some),
            Arg::Text(t) => self
                .decoded(i, TAG_DIST, t, |t| {
                    Dist::from_text(t, arg).map_err(|e| fill_shown(e, Arg::Text(t)))
                })
                .map(Some),
            other => Err(self.fail(ValueError::NotADistribution {
                arg,
                got: other.to_string(),
            })),
        }
    }

    /// Argument `i` as a model: a distribution that must be model JSON. NULL gives
    /// `None`.
    ///
    /// # Errors
    /// As [`Call::dist`], and [`ArgError::NeedsModel`] for an empirical distribution.
    pub fn model(&mut self, i: usize) -> Result<Option<Arc<Dist>>, FunctionError> {
        let Some(d) = self.dist(i)? else {
            return Ok(None);
        };
        match &*d {
            Dist::Model(_) => Ok(Some(d)),
            Dist::Empirical(_) | Dist::Series(..) | Dist::Censored(_) => {
                Err(self.fail(ArgError::NeedsModel {
                    arg: i + 1,
                    got: d.kind(),
                }))
            }
        }
    }

    /// Argument `i` as a quantile sketch. NULL gives `None`.
    ///
    /// # Errors
    /// [`ArgError::NotBlob`] for a value that is not a BLOB; the sketch's own errors for a
    /// damaged one.
    pub fn sketch(&mut self, i: usize) -> Result<Option<Arc<QuantileSketch>>, FunctionError> {
        let Some(b) = blob(self.get(i), "s", SKETCH_MADE_BY).map_err(|e| self.fail(e))? else {
            return Ok(None);
        };
        self.decoded(i, TAG_SKETCH, b, |b| Ok(sketch::decode(b)?))
            .map(Some)
    }
}

/// The model of a decoded model argument ([`Call::model`] has checked the kind).
pub fn model_of(d: &Dist) -> Option<&Model> {
    match d {
        Dist::Model(m) => Some(m),
        Dist::Empirical(_) | Dist::Series(..) | Dist::Censored(_) => None,
    }
}

/// Puts the shown argument into a "not a distribution" error from the value layer.
fn fill_shown(e: ValueError, v: Arg<'_>) -> ArgError {
    match e {
        ValueError::NotADistribution { arg, .. } => ValueError::NotADistribution {
            arg,
            got: v.to_string(),
        }
        .into(),
        other => other.into(),
    }
}
