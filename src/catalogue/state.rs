//! Aggregate states, engine-neutral: what one group (or one window frame, or one
//! partition's share of a group) keeps between rows.
//!
//! Every aggregate of the registry has a [`State`]: `step` adds a row, `merge` combines the
//! state of another part of the same group (so an engine may split a group across
//! partitions or machines and combine the parts in any order), `finalize` gives the
//! answer, and window functions add `inverse` (a row leaves the frame) and `value` (the
//! answer for the current frame). `save` and `load` give the state's serialised form, for
//! an engine that ships partial states between processes; its layout is in
//! docs/state-format.md and begins with a magic, a version and the function's name, so a
//! state is never read as another function's.
//!
//! A state that collects values may also ship them apart from its saved form
//! ([`State::take_values`], [`State::adopt`]): an engine with columns of its own (Arrow's
//! lists in DataFusion) then moves the values into a column without a copy, and the state
//! that merges the parts keeps them where the engine holds them ([`Run`]) and answers from
//! them in place. Nothing but speed depends on it: the answer is the same, bit for bit.
//!
//! Engines hold states as [`Aggregator`] trait objects, made by the registry row's
//! [`AggregateImp`].

use std::any::Any;
use std::sync::Arc;

use super::args::{ArgError, Constant, FunctionError, fail};
use super::value::{Arg, Out};
use crate::stats::ecdf::EcdfCounter;
use crate::stats::grow::OutOfMemory;
use crate::stats::sketch::QuantileSketch;
use crate::stats::sorting::{into_sorted, is_sorted_total, merge_sorted};

/// The arguments of one row.
#[derive(Debug, Clone, Copy)]
pub struct Args<'a> {
    values: &'a [Arg<'a>],
}

impl<'a> Args<'a> {
    /// Wraps a row's arguments.
    pub fn new(values: &'a [Arg<'a>]) -> Self {
        Args { values }
    }

    /// How many arguments the call has.
    #[inline]
    pub fn len(&self) -> usize {
        self.values.len()
    }

    /// Whether the call has no arguments.
    pub fn is_empty(&self) -> bool {
        self.values.is_empty()
    }

    /// Argument `i`; a missing argument reads as NULL.
    #[inline]
    pub fn get(&self, i: usize) -> Arg<'a> {
        self.values.get(i).copied().unwrap_or(Arg::Null)
    }

    /// Argument `i` if the call has it.
    #[inline]
    pub fn optional(&self, i: usize) -> Option<Arg<'a>> {
        self.values.get(i).copied()
    }
}

/// The typed state of one aggregate. `NAME` is the SQL name, used in errors and in the
/// saved form.
pub trait State: Default + Send + Sync + 'static {
    /// The SQL name.
    const NAME: &'static str;

    /// Adds a row.
    ///
    /// # Errors
    /// The function's argument errors.
    fn step(&mut self, args: &Args<'_>) -> Result<(), FunctionError>;

    /// Combines the state of another part of the same group.
    ///
    /// # Errors
    /// When the parts disagree on a per-group constant, or memory runs out.
    fn merge(&mut self, other: Self) -> Result<(), FunctionError>;

    /// The answer for the group.
    ///
    /// # Errors
    /// The function's kernel errors.
    fn finalize(&mut self) -> Result<Out, FunctionError>;

    /// Removes a row leaving a window frame. Only window functions have it.
    ///
    /// # Errors
    /// An internal error for an aggregate that is not a window function.
    fn inverse(&mut self, _args: &Args<'_>) -> Result<(), FunctionError> {
        Err(fail(
            Self::NAME,
            ArgError::Internal("not a window function".into()),
        ))
    }

    /// The answer for the current frame; the state lives on.
    ///
    /// # Errors
    /// As [`State::finalize`].
    fn value(&mut self) -> Result<Out, FunctionError> {
        self.finalize()
    }

    /// Writes the state's fields (after the header [`Writer::new`] wrote).
    fn save(&self, w: &mut Writer);

    /// Reads the fields [`State::save`] wrote.
    ///
    /// # Errors
    /// [`ArgError::BadState`] for bytes that are not such a state.
    fn load(r: &mut Reader<'_>) -> Result<Self, ArgError>;

    /// The per-row fast lane an engine may take, if the state offers one now: see [`Lane`].
    fn lane(&mut self) -> Option<Lane<'_>> {
        None
    }

    /// How many lists of values [`State::take_values`] gives: 0 (the default) for a state
    /// whose saved form holds everything.
    const LISTS: usize = 0;

    /// Takes out the values the state collected, as [`State::LISTS`] lists, for an engine
    /// to ship apart from the saved form, which then holds the rest; the state is then
    /// consumed (an engine asks for it once, at the end of a part). A list's order is the
    /// state's to choose.
    fn take_values(&mut self) -> Vec<Vec<f64>> {
        Vec::new()
    }

    /// Adds to the state, read where the engine holds them, the lists of values that
    /// [`State::take_values`] took from another part's state (one run per list); the
    /// state was loaded from that part's saved form.
    ///
    /// # Errors
    /// An internal error for runs of another count; memory running out.
    fn adopt(&mut self, runs: Vec<Arc<dyn Run>>) -> Result<(), FunctionError> {
        if runs.is_empty() {
            return Ok(());
        }
        Err(fail(
            Self::NAME,
            ArgError::Internal(format!("got {} lists of values, keeps none", runs.len())),
        ))
    }
}

/// Values another part of a group collected, shared read-only with the engine that holds
/// them (for DataFusion, a slice of an Arrow buffer), so that a merge adopts them without
/// a copy. A `Vec<f64>` is one (for engines without buffers of their own, and tests).
///
/// # Example
/// ```
/// use ogive::catalogue::state::Run;
/// assert_eq!(vec![1.5, 2.5].values(), [1.5, 2.5]);
/// ```
pub trait Run: Send + Sync {
    /// The values.
    fn values(&self) -> &[f64];
}

impl Run for Vec<f64> {
    fn values(&self) -> &[f64] {
        self
    }
}

/// The lists a state adopted ([`State::adopt`]), as one list of runs each: each part's
/// values where the engine holds them.
///
/// # Example
/// ```
/// use std::sync::Arc;
/// use ogive::catalogue::state::{Adopted, Run};
/// let mut a = Adopted::default();
/// a.push(Arc::new(vec![3.0, 1.0]) as Arc<dyn Run>);
/// a.push(Arc::new(Vec::<f64>::new()) as Arc<dyn Run>); // an empty run is not kept
/// assert_eq!((a.len(), a.with(&[2.0]).len()), (2, 2));
/// let mut own = vec![2.0];
/// a.absorb_into(&mut own).unwrap();
/// assert_eq!((own, a.is_empty()), (vec![2.0, 3.0, 1.0], true));
///
/// // Sorted runs stay runs; one that is not sorted joins the own values.
/// let mut own = vec![5.0, 0.0];
/// a.push_sorted(Arc::new(vec![1.0, 4.0]), &mut own).unwrap();
/// a.push_sorted(Arc::new(vec![3.0, 2.0]), &mut own).unwrap();
/// assert_eq!((a.len(), own.len()), (2, 4));
/// assert_eq!(a.sorted_with(own).unwrap(), [0.0, 1.0, 2.0, 3.0, 4.0, 5.0]);
/// ```
#[derive(Default, Clone)]
pub struct Adopted(Vec<Arc<dyn Run>>);

impl std::fmt::Debug for Adopted {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        write!(f, "Adopted({} values in {} runs)", self.len(), self.0.len())
    }
}

impl Adopted {
    /// Adds a run.
    pub fn push(&mut self, run: Arc<dyn Run>) {
        if !run.values().is_empty() {
            self.0.push(run);
        }
    }

    /// Adds the runs of another.
    pub fn append(&mut self, other: Adopted) {
        self.0.extend(other.0);
    }

    /// How many values the runs hold.
    pub fn len(&self) -> usize {
        self.0.iter().map(|r| r.values().len()).sum()
    }

    /// Whether there is no run.
    pub fn is_empty(&self) -> bool {
        self.0.is_empty()
    }

    /// `own` and then the runs, as slices.
    pub fn with<'a>(&'a self, own: &'a [f64]) -> Vec<&'a [f64]> {
        std::iter::once(own)
            .chain(self.0.iter().map(|r| r.values()))
            .collect()
    }

    /// Moves the runs' values to the end of `own` (the last run first), leaving no run: for
    /// a state that needs them in one list of its own.
    ///
    /// # Errors
    /// [`OutOfMemory`]; the runs not yet moved stay.
    pub fn absorb_into(&mut self, own: &mut Vec<f64>) -> Result<(), OutOfMemory> {
        while let Some(r) = self.0.last() {
            crate::stats::grow::extend(own, r.values())?;
            self.0.pop();
        }
        Ok(())
    }

    /// Adds a run that should come sorted (in the order of `f64::total_cmp`, as a state's
    /// `take_values` sorts it): kept as a run when it is, else its values are added to
    /// `own` (to be sorted with them by [`Adopted::sorted_with`]).
    ///
    /// # Errors
    /// [`OutOfMemory`] when `own` cannot grow.
    pub fn push_sorted(
        &mut self,
        run: Arc<dyn Run>,
        own: &mut Vec<f64>,
    ) -> Result<(), OutOfMemory> {
        if is_sorted_total(run.values()) {
            self.push(run);
            Ok(())
        } else {
            crate::stats::grow::extend(own, run.values())
        }
    }

    /// `own` sorted in place, merged with the runs (sorted, as
    /// [`Adopted::push_sorted`] keeps them) into one sorted list; leaves no run.
    ///
    /// # Errors
    /// [`OutOfMemory`] when the merged list cannot be had.
    pub fn sorted_with(&mut self, own: Vec<f64>) -> Result<Vec<f64>, OutOfMemory> {
        let own = into_sorted(own);
        if self.is_empty() {
            return Ok(own);
        }
        let all = merge_sorted(&self.with(&own))?;
        self.0.clear();
        Ok(all)
    }
}

/// One run from each list, for [`State::adopt`].
///
/// # Errors
/// The internal error of [`State::adopt`] for another count than `N`.
///
/// # Example
/// ```
/// use std::sync::Arc;
/// use ogive::catalogue::column::QuantileState;
/// use ogive::catalogue::state::{Run, runs_of};
/// let runs = vec![Arc::new(vec![1.0]) as Arc<dyn Run>];
/// assert!(runs_of::<QuantileState, 1>(runs.clone()).is_ok());
/// assert!(runs_of::<QuantileState, 2>(runs).is_err());
/// ```
pub fn runs_of<S: State, const N: usize>(
    runs: Vec<Arc<dyn Run>>,
) -> Result<[Arc<dyn Run>; N], FunctionError> {
    let got = runs.len();
    runs.try_into().map_err(|_| {
        fail(
            S::NAME,
            ArgError::Internal(format!("got {got} lists of values, keeps {N}")),
        )
    })
}

/// A state's offer to an engine's per-row fast path: once the group's constant argument
/// (the second) is fixed, a row whose constant is a number (INTEGER or REAL) with the bits
/// `key`, and whose first argument is a number, needs nothing but adding that number to
/// `sink`. A call with one argument (`quantile_sketch(x)`) has no constant to check: its
/// rows need only a number as `x`. Every other row goes through [`State::step`] with its
/// full checks, so errors do not depend on where a row sits in its group.
pub struct Lane<'a> {
    /// The bits of the group's constant, as `f64::to_bits`; never those of 0.0 or -0.0.
    pub key: u64,
    /// Where the number goes.
    pub sink: Sink<'a>,
}

/// What the fast lane adds a number to.
pub enum Sink<'a> {
    /// A running count at or below a threshold (`ecdf`).
    Count(&'a mut EcdfCounter),
    /// A list of values (`quantile`); pushing must not abort on out-of-memory.
    Collect(&'a mut Vec<f64>),
    /// A quantile sketch (`quantile_sketch`); a value it refuses (NaN) goes to the
    /// general step, which reports it.
    Sketch(&'a mut QuantileSketch),
}

/// A state as engines hold it: [`State`] behind a trait object.
pub trait Aggregator: Send + Sync {
    /// [`State::step`].
    ///
    /// # Errors
    /// As [`State::step`].
    fn step(&mut self, args: &Args<'_>) -> Result<(), FunctionError>;
    /// [`State::inverse`].
    ///
    /// # Errors
    /// As [`State::inverse`].
    fn inverse(&mut self, args: &Args<'_>) -> Result<(), FunctionError>;
    /// [`State::value`].
    ///
    /// # Errors
    /// As [`State::value`].
    fn value(&mut self) -> Result<Out, FunctionError>;
    /// [`State::finalize`].
    ///
    /// # Errors
    /// As [`State::finalize`].
    fn finalize(&mut self) -> Result<Out, FunctionError>;
    /// The serialised state.
    fn save(&self) -> Vec<u8>;
    /// Merges a state of the same function given in its serialised form.
    ///
    /// # Errors
    /// Bytes that are not this function's state; a failed [`State::merge`].
    fn merge_saved(&mut self, bytes: &[u8]) -> Result<(), FunctionError>;
    /// Merges another state of the same function.
    ///
    /// # Errors
    /// A state of another function; a failed [`State::merge`].
    fn merge_boxed(&mut self, other: Box<dyn Aggregator>) -> Result<(), FunctionError>;
    /// [`State::lane`].
    fn lane(&mut self) -> Option<Lane<'_>>;
    /// The saved form without the values [`State::take_values`] takes, and those values;
    /// consumes the state. For a state with no such lists, the saved form and no list.
    fn save_apart(&mut self) -> (Vec<u8>, Vec<Vec<f64>>);
    /// Merges a state given as [`Aggregator::save_apart`] gave it, its lists of values
    /// read where the engine holds them.
    ///
    /// # Errors
    /// As [`Aggregator::merge_saved`]; [`State::adopt`]'s errors.
    fn merge_apart(&mut self, bytes: &[u8], runs: Vec<Arc<dyn Run>>) -> Result<(), FunctionError>;
    /// For [`Aggregator::merge_boxed`].
    fn into_any(self: Box<Self>) -> Box<dyn Any>;
    /// The SQL name of the state's function.
    fn name(&self) -> &'static str;
}

impl<S: State> Aggregator for S {
    #[inline]
    fn step(&mut self, args: &Args<'_>) -> Result<(), FunctionError> {
        State::step(self, args)
    }
    fn inverse(&mut self, args: &Args<'_>) -> Result<(), FunctionError> {
        State::inverse(self, args)
    }
    fn value(&mut self) -> Result<Out, FunctionError> {
        State::value(self)
    }
    fn finalize(&mut self) -> Result<Out, FunctionError> {
        State::finalize(self)
    }
    fn save(&self) -> Vec<u8> {
        let mut w = Writer::new(S::NAME);
        State::save(self, &mut w);
        w.finish()
    }
    fn merge_saved(&mut self, bytes: &[u8]) -> Result<(), FunctionError> {
        let other = load::<S>(bytes)?;
        State::merge(self, other)
    }
    fn merge_boxed(&mut self, other: Box<dyn Aggregator>) -> Result<(), FunctionError> {
        match other.into_any().downcast::<S>() {
            Ok(other) => State::merge(self, *other),
            Err(_) => Err(fail(
                S::NAME,
                ArgError::Internal("merged with a state of another function".into()),
            )),
        }
    }
    #[inline]
    fn lane(&mut self) -> Option<Lane<'_>> {
        State::lane(self)
    }
    fn save_apart(&mut self) -> (Vec<u8>, Vec<Vec<f64>>) {
        let lists = State::take_values(self);
        (Aggregator::save(self), lists)
    }
    fn merge_apart(&mut self, bytes: &[u8], runs: Vec<Arc<dyn Run>>) -> Result<(), FunctionError> {
        let mut other = load::<S>(bytes)?;
        other.adopt(runs)?;
        State::merge(self, other)
    }
    fn into_any(self: Box<Self>) -> Box<dyn Any> {
        self
    }
    fn name(&self) -> &'static str {
        S::NAME
    }
}

/// Reads a saved state of `S`.
///
/// # Errors
/// [`ArgError::BadState`] for bytes that are not a state of `S`, of this version.
pub fn load<S: State>(bytes: &[u8]) -> Result<S, FunctionError> {
    let mut r = Reader::new(bytes, S::NAME).map_err(|e| fail(S::NAME, e))?;
    let s = S::load(&mut r).map_err(|e| fail(S::NAME, e))?;
    r.end().map_err(|e| fail(S::NAME, e))?;
    Ok(s)
}

/// Restores a state from its saved form.
pub type LoadFn = fn(&[u8]) -> Result<Box<dyn Aggregator>, FunctionError>;

/// How an engine makes and restores the states of one aggregate: the registry row's part.
#[derive(Clone, Copy)]
pub struct AggregateImp {
    /// A new, empty state.
    pub new: fn() -> Box<dyn Aggregator>,
    /// A state restored from its saved form.
    pub load: LoadFn,
    /// How many lists of values the state ships apart from its saved form
    /// ([`State::LISTS`]).
    pub lists: usize,
}

impl AggregateImp {
    /// The implementation of `S`.
    pub const fn of<S: State>() -> AggregateImp {
        AggregateImp {
            new: new_boxed::<S>,
            load: load_boxed::<S>,
            lists: S::LISTS,
        }
    }
}

fn new_boxed<S: State>() -> Box<dyn Aggregator> {
    Box::new(S::default())
}

fn load_boxed<S: State>(bytes: &[u8]) -> Result<Box<dyn Aggregator>, FunctionError> {
    Ok(Box::new(load::<S>(bytes)?))
}

// ---------------------------------------------------------------------------------------
// The saved form

/// The first four bytes of a saved state.
pub const STATE_MAGIC: [u8; 4] = [0x89, b'O', b'G', b'S'];
/// The version of the saved form this build writes and reads.
pub const STATE_VERSION: u8 = 3;

/// Writes a saved state: the header, then fields in the order the state's `save` puts
/// them, all little-endian.
#[derive(Debug)]
pub struct Writer {
    out: Vec<u8>,
}

impl Writer {
    /// A writer with the header for function `name`.
    pub fn new(name: &str) -> Writer {
        let mut out = Vec::with_capacity(64);
        out.extend_from_slice(&STATE_MAGIC);
        out.push(STATE_VERSION);
        let mut w = Writer { out };
        w.bytes(name.as_bytes());
        w
    }

    /// A byte.
    pub fn u8(&mut self, v: u8) {
        self.out.push(v);
    }

    /// A `u64`.
    pub fn u64(&mut self, v: u64) {
        self.out.extend_from_slice(&v.to_le_bytes());
    }

    /// An `i64`.
    pub fn i64(&mut self, v: i64) {
        self.out.extend_from_slice(&v.to_le_bytes());
    }

    /// An `f64`, by its bits.
    pub fn f64(&mut self, v: f64) {
        self.u64(v.to_bits());
    }

    /// A length-prefixed byte string.
    pub fn bytes(&mut self, b: &[u8]) {
        self.u64(b.len() as u64);
        self.out.extend_from_slice(b);
    }

    /// A length-prefixed list of `f64`.
    pub fn f64s(&mut self, xs: &[f64]) {
        self.f64_runs(&[xs]);
    }

    /// A length-prefixed list of `f64`, given in runs: the same bytes as
    /// [`Writer::f64s`] of their concatenation.
    pub fn f64_runs(&mut self, runs: &[&[f64]]) {
        let n: usize = runs.iter().map(|r| r.len()).sum();
        self.u64(n as u64);
        self.out.reserve(n * 8);
        for r in runs {
            for &x in *r {
                self.f64(x);
            }
        }
    }

    /// A flag.
    pub fn bool(&mut self, b: bool) {
        self.u8(u8::from(b));
    }

    /// A per-group constant: 0 unseen, 1 NULL, 2 then the value.
    pub fn constant<T: Field>(&mut self, c: Option<Option<&T>>) {
        match c {
            None => self.u8(0),
            Some(None) => self.u8(1),
            Some(Some(v)) => {
                self.u8(2);
                v.put(self);
            }
        }
    }

    /// An optional byte string (0 absent, 1 then the bytes).
    pub fn opt_bytes(&mut self, b: Option<&[u8]>) {
        match b {
            None => self.u8(0),
            Some(b) => {
                self.u8(1);
                self.bytes(b);
            }
        }
    }

    /// The saved bytes.
    pub fn finish(self) -> Vec<u8> {
        self.out
    }
}

/// A value a per-group constant can hold.
pub trait Field: Sized {
    /// Writes it.
    fn put(&self, w: &mut Writer);
    /// Reads it.
    ///
    /// # Errors
    /// [`ArgError::BadState`] on short or invalid bytes.
    fn take(r: &mut Reader<'_>) -> Result<Self, ArgError>;
}

impl Field for f64 {
    fn put(&self, w: &mut Writer) {
        w.f64(*self);
    }
    fn take(r: &mut Reader<'_>) -> Result<Self, ArgError> {
        r.f64()
    }
}

impl Field for i64 {
    fn put(&self, w: &mut Writer) {
        w.i64(*self);
    }
    fn take(r: &mut Reader<'_>) -> Result<Self, ArgError> {
        r.i64()
    }
}

impl Field for String {
    fn put(&self, w: &mut Writer) {
        w.bytes(self.as_bytes());
    }
    fn take(r: &mut Reader<'_>) -> Result<Self, ArgError> {
        String::from_utf8(r.bytes()?.to_vec()).map_err(|_| bad("text that is not UTF-8"))
    }
}

/// The error of a saved state that does not read.
fn bad(what: &str) -> ArgError {
    ArgError::BadState(what.to_string())
}

/// Reads a saved state.
#[derive(Debug)]
pub struct Reader<'a> {
    rest: &'a [u8],
}

impl<'a> Reader<'a> {
    /// Checks the header for function `name`.
    ///
    /// # Errors
    /// [`ArgError::BadState`] for another magic, version or function.
    pub fn new(bytes: &'a [u8], name: &str) -> Result<Reader<'a>, ArgError> {
        let mut r = Reader { rest: bytes };
        if r.take(4)? != STATE_MAGIC {
            return Err(bad("not a saved ogive state"));
        }
        let version = r.u8()?;
        if version != STATE_VERSION {
            return Err(ArgError::BadState(format!(
                "a saved state of version {version}; this ogive reads version {STATE_VERSION}"
            )));
        }
        if r.bytes()? != name.as_bytes() {
            return Err(bad("a saved state of another function"));
        }
        Ok(r)
    }

    fn take(&mut self, n: usize) -> Result<&'a [u8], ArgError> {
        if self.rest.len() < n {
            return Err(bad("truncated"));
        }
        let (head, tail) = self.rest.split_at(n);
        self.rest = tail;
        Ok(head)
    }

    /// A byte.
    ///
    /// # Errors
    /// [`ArgError::BadState`] when the bytes run out.
    pub fn u8(&mut self) -> Result<u8, ArgError> {
        Ok(self.take(1)?[0])
    }

    /// A `u64`.
    ///
    /// # Errors
    /// As [`Reader::u8`].
    pub fn u64(&mut self) -> Result<u64, ArgError> {
        let b = self.take(8)?;
        let mut a = [0u8; 8];
        a.copy_from_slice(b);
        Ok(u64::from_le_bytes(a))
    }

    /// An `i64`.
    ///
    /// # Errors
    /// As [`Reader::u8`].
    pub fn i64(&mut self) -> Result<i64, ArgError> {
        Ok(self.u64()? as i64)
    }

    /// An `f64`.
    ///
    /// # Errors
    /// As [`Reader::u8`].
    pub fn f64(&mut self) -> Result<f64, ArgError> {
        Ok(f64::from_bits(self.u64()?))
    }

    /// A flag.
    ///
    /// # Errors
    /// As [`Reader::u8`], and for a byte other than 0 or 1.
    pub fn bool(&mut self) -> Result<bool, ArgError> {
        match self.u8()? {
            0 => Ok(false),
            1 => Ok(true),
            _ => Err(bad("a flag that is not 0 or 1")),
        }
    }

    /// A length-prefixed byte string.
    ///
    /// # Errors
    /// As [`Reader::u8`].
    pub fn bytes(&mut self) -> Result<&'a [u8], ArgError> {
        let n = usize::try_from(self.u64()?).map_err(|_| bad("a length beyond memory"))?;
        self.take(n)
    }

    /// A length-prefixed list of `f64`, NaN refused.
    ///
    /// # Errors
    /// As [`Reader::u8`]; [`ArgError::OutOfMemory`] when the list does not fit.
    pub fn f64s(&mut self) -> Result<Vec<f64>, ArgError> {
        let n = usize::try_from(self.u64()?).map_err(|_| bad("a length beyond memory"))?;
        let bytes = self.take(
            n.checked_mul(8)
                .ok_or_else(|| bad("a length beyond memory"))?,
        )?;
        let mut out = Vec::new();
        out.try_reserve_exact(n)
            .map_err(|_| ArgError::OutOfMemory { held: 0 })?;
        for c in bytes.chunks_exact(8) {
            let mut a = [0u8; 8];
            a.copy_from_slice(c);
            let x = f64::from_le_bytes(a);
            if x.is_nan() {
                return Err(bad("a NaN value"));
            }
            out.push(x);
        }
        Ok(out)
    }

    /// A per-group constant written by [`Writer::constant`].
    ///
    /// # Errors
    /// As [`Reader::u8`], and for an unknown tag.
    pub fn constant<T: Field>(&mut self) -> Result<Option<Option<T>>, ArgError> {
        match self.u8()? {
            0 => Ok(None),
            1 => Ok(Some(None)),
            2 => Ok(Some(Some(T::take(self)?))),
            _ => Err(bad("an unknown constant tag")),
        }
    }

    /// A [`Constant`] written by [`Writer::constant`].
    ///
    /// # Errors
    /// As [`Reader::constant`].
    pub fn constant_of<T: Field + PartialEq + Clone + std::fmt::Debug>(
        &mut self,
    ) -> Result<Constant<T>, ArgError> {
        Ok(Constant::from_raw(self.constant()?))
    }

    /// An optional byte string written by [`Writer::opt_bytes`].
    ///
    /// # Errors
    /// As [`Reader::u8`], and for an unknown tag.
    pub fn opt_bytes(&mut self) -> Result<Option<&'a [u8]>, ArgError> {
        match self.u8()? {
            0 => Ok(None),
            1 => Ok(Some(self.bytes()?)),
            _ => Err(bad("an unknown tag")),
        }
    }

    /// Checks that nothing is left.
    ///
    /// # Errors
    /// [`ArgError::BadState`] for trailing bytes.
    pub fn end(&self) -> Result<(), ArgError> {
        if self.rest.is_empty() {
            Ok(())
        } else {
            Err(bad("trailing bytes"))
        }
    }
}

/// Appends `x`, asking the allocator instead of aborting: `false` when memory ran out
/// (the vector is unchanged). The fast lane's form of [`crate::stats::grow::push`].
#[inline(always)]
pub fn try_push(xs: &mut Vec<f64>, x: f64) -> bool {
    crate::stats::grow::push(xs, x).is_ok()
}

/// [`crate::stats::grow::push`] with the catalogue's error.
///
/// # Errors
/// [`ArgError::OutOfMemory`].
#[inline]
pub fn push(xs: &mut Vec<f64>, x: f64) -> Result<(), ArgError> {
    Ok(crate::stats::grow::push(xs, x)?)
}

/// Appends all of `more` to `xs` without aborting on out-of-memory
/// ([`crate::stats::grow::extend`]).
///
/// # Errors
/// [`ArgError::OutOfMemory`] when memory ran out.
pub fn try_extend<T: Copy>(xs: &mut Vec<T>, more: &[T]) -> Result<(), ArgError> {
    Ok(crate::stats::grow::extend(xs, more)?)
}
