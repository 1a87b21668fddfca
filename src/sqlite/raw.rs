//! Every function of the registry but the table functions, registered straight through
//! `sqlite3_create_window_function` (aggregates and windows) and
//! `sqlite3_create_function_v2` (scalars).
//!
//! rusqlite's general wrapper builds a `Context` and converts every argument through an
//! out-of-line conversion on every row; over 10M rows a perf profile showed that wrapper
//! as most of the cost above SQLite's own scan (see bench/README.md). These `extern "C"`
//! callbacks read each argument's type and value directly into the catalogue's
//! [`Arg`] and keep the state, a boxed [`Aggregator`] made by the registry row, in
//! SQLite's aggregate context:
//!
//! - `x_step` and `x_inverse` create the state on first use (the aggregate context is
//!   zero-filled, so a null pointer means "no state yet");
//! - `x_value` answers for the current frame and keeps the state;
//! - `x_final` takes the state out (leaving a null pointer) and drops it; SQLite calls it
//!   once per group, also when the statement ends early on an error, so nothing leaks.
//!
//! # The fast lane
//!
//! A state may offer a [`Lane`]: after a row has fixed the group's constant, a
//! two-argument row whose constant is INTEGER or REAL with the same bits (or a
//! one-argument row), and whose `x` is INTEGER, REAL or NULL, only adds `x` to a counter,
//! a list or a sketch. The slot caches where that counter, list or sketch lives (re-read
//! from the state after every call into it), so such a row costs at most five calls into
//! SQLite and no call into the state. Every other row, a TEXT
//! constant among them wherever it sits in the group, takes the general step with its
//! full checks, so errors never depend on row order.
//!
//! # Scalars
//!
//! A scalar's callback reads its arguments the same way, keeps decoded constant arguments
//! in SQLite's auxiliary data (the reader's per-statement [`Memo`]) and sets its error with
//! the message and then the code, so that a call stopped by an interrupt reports
//! SQLITE_INTERRUPT and one out of memory SQLITE_NOMEM, each with the function's name in
//! the message (rusqlite's wrapper sets the code first, which the message then resets).
//!
//! Every body runs under `catch_unwind`: a panic becomes an SQLite error, never an
//! unwind into C. Errors go through [`super::to_sqlite`]'s message and code. In the
//! loadable build `rusqlite::ffi` routes each call through the host's API table, so the
//! same code serves both builds.

use std::ffi::{c_int, c_void};
use std::panic::{AssertUnwindSafe, catch_unwind};

use rusqlite::Connection;
use rusqlite::ffi::{self, sqlite3_context, sqlite3_value};

use super::MAX_ARGS;
use crate::catalogue::args::{ArgError, FunctionError, fail};
use crate::catalogue::reader::{Call, Memo, Shared};
use crate::catalogue::state::{Aggregator, Args, Lane, Sink, try_push};
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, Imp, Kind};
use crate::stats::ecdf::EcdfCounter;
use crate::stats::sketch::QuantileSketch;

/// Reads argument `v` as the catalogue's value.
///
/// # Safety
/// `v` must be one of the argument values SQLite passed to the running callback; the
/// returned borrow must not outlive it.
#[inline(always)]
unsafe fn read<'a>(v: *mut sqlite3_value) -> Arg<'a> {
    // SAFETY: per the contract.
    unsafe {
        match ffi::sqlite3_value_type(v) {
            ffi::SQLITE_FLOAT => Arg::Real(ffi::sqlite3_value_double(v)),
            ffi::SQLITE_INTEGER => Arg::Integer(ffi::sqlite3_value_int64(v)),
            ffi::SQLITE_TEXT => Arg::Text(bytes(ffi::sqlite3_value_text(v).cast(), v)),
            ffi::SQLITE_BLOB => Arg::Blob(bytes(ffi::sqlite3_value_blob(v).cast(), v)),
            _ => Arg::Null,
        }
    }
}

/// The bytes of a TEXT or BLOB value whose data pointer is `p`.
///
/// # Safety
/// `p` must be the pointer SQLite just returned for `v`, before any other call on `v`.
unsafe fn bytes<'a>(p: *const u8, v: *mut sqlite3_value) -> &'a [u8] {
    // SAFETY: per the contract, `p` points at `sqlite3_value_bytes(v)` bytes.
    unsafe {
        let n = ffi::sqlite3_value_bytes(v);
        if p.is_null() || n <= 0 {
            &[]
        } else {
            std::slice::from_raw_parts(p, n as usize)
        }
    }
}

/// Where the fast lane adds a number: a raw view of a [`Sink`] into the boxed state.
#[derive(Clone, Copy)]
enum RawSink {
    Count(*mut EcdfCounter),
    Collect(*mut Vec<f64>),
    Sketch(*mut QuantileSketch),
}

/// What SQLite's aggregate context points at: the state and the cached lane.
struct Slot {
    state: Box<dyn Aggregator>,
    /// The lane's key and sink, valid until the next call into `state`.
    lane: Option<(u64, RawSink)>,
    /// The function's name, for errors.
    name: &'static str,
}

impl Slot {
    /// Reads the state's lane again (after any call into it).
    #[inline(always)]
    fn refresh(&mut self) {
        self.lane = self.state.lane().map(|Lane { key, sink }| {
            let raw = match sink {
                Sink::Count(c) => RawSink::Count(c),
                Sink::Collect(v) => RawSink::Collect(v),
                Sink::Sketch(s) => RawSink::Sketch(s),
            };
            (key, raw)
        });
    }
}

/// What the function's user data holds: its registry row.
struct UserData {
    def: &'static FunctionDef,
}

/// Registers an aggregate registry row (a window function when its kind says so) for
/// each of its arities.
pub(crate) fn aggregate(conn: &Connection, def: &'static FunctionDef) -> rusqlite::Result<()> {
    let name = std::ffi::CString::new(def.name)?;
    let window = def.kind == Kind::Window;
    for &n in def.arities {
        let data = Box::into_raw(Box::new(UserData { def })).cast::<c_void>();
        // SAFETY: `conn.handle()` is the open connection; the name is copied by SQLite;
        // the callbacks match the signatures SQLite expects; `data` is owned by SQLite
        // from here on and freed by `destroy` (also when the call fails).
        let rc = unsafe {
            ffi::sqlite3_create_window_function(
                conn.handle(),
                name.as_ptr(),
                n,
                super::flags().bits(),
                data,
                Some(x_step),
                Some(x_final),
                if window { Some(x_value) } else { None },
                if window { Some(x_inverse) } else { None },
                Some(destroy),
            )
        };
        if rc != ffi::SQLITE_OK {
            return Err(rusqlite::Error::SqliteFailure(ffi::Error::new(rc), None));
        }
    }
    Ok(())
}

/// Registers a scalar registry row for each of its arities.
pub(crate) fn scalar(conn: &Connection, def: &'static FunctionDef) -> rusqlite::Result<()> {
    let name = std::ffi::CString::new(def.name)?;
    for &n in def.arities {
        let data = Box::into_raw(Box::new(UserData { def })).cast::<c_void>();
        // SAFETY: as in `aggregate`; `destroy` frees `data`, also when the call fails.
        let rc = unsafe {
            ffi::sqlite3_create_function_v2(
                conn.handle(),
                name.as_ptr(),
                n,
                super::flags().bits(),
                data,
                Some(x_func),
                None,
                None,
                Some(destroy),
            )
        };
        if rc != ffi::SQLITE_OK {
            return Err(rusqlite::Error::SqliteFailure(ffi::Error::new(rc), None));
        }
    }
    Ok(())
}

/// SQLite's auxiliary data as the reader's per-statement memory: SQLite keeps it for an
/// argument that is constant in the statement, and drops it otherwise.
struct AuxMemo {
    ctx: *mut sqlite3_context,
}

/// Frees a value kept by [`AuxMemo::remember`].
unsafe extern "C" fn drop_shared(p: *mut c_void) {
    if !p.is_null() {
        // SAFETY: `p` came from `Box::into_raw` in `remember`; SQLite calls this once.
        drop(unsafe { Box::from_raw(p.cast::<Shared>()) });
    }
}

impl Memo for AuxMemo {
    fn recall(&self, i: usize) -> Option<Shared> {
        let i = c_int::try_from(i).ok()?;
        // SAFETY: `ctx` is the running scalar call's context; the pointer, when set, is a
        // `Shared` boxed by `remember` and owned by SQLite until its destructor runs.
        unsafe {
            let p = ffi::sqlite3_get_auxdata(self.ctx, i).cast::<Shared>();
            (!p.is_null()).then(|| (*p).clone())
        }
    }

    fn remember(&mut self, i: usize, value: Shared) {
        let Ok(i) = c_int::try_from(i) else {
            return;
        };
        let p = Box::into_raw(Box::new(value)).cast::<c_void>();
        // SAFETY: as in `recall`; SQLite owns `p` from here on and frees it with
        // `drop_shared` (at once, when it cannot keep it: then it only costs a decode on
        // the next row).
        unsafe { ffi::sqlite3_set_auxdata(self.ctx, i, p, Some(drop_shared)) };
    }
}

unsafe extern "C" fn x_func(ctx: *mut sqlite3_context, argc: c_int, argv: *mut *mut sqlite3_value) {
    // SAFETY: called by SQLite as xFunc of a function registered by `scalar`: `argv` holds
    // `argc` values, the user data is its `UserData`.
    unsafe {
        let Some(def) = def_of(ctx) else {
            return;
        };
        let Imp::Scalar(f) = def.imp else {
            return;
        };
        let argv: &[*mut sqlite3_value] = if argv.is_null() || argc <= 0 {
            &[]
        } else {
            std::slice::from_raw_parts(argv, argc as usize)
        };
        let db = ffi::sqlite3_context_db_handle(ctx);
        let r = catch_unwind(AssertUnwindSafe(|| {
            // Every ogive function takes at most MAX_ARGS arguments (the registry test
            // checks it).
            let mut values = [Arg::Null; MAX_ARGS];
            let n = argv.len().min(MAX_ARGS);
            for (v, &p) in values.iter_mut().zip(argv) {
                *v = read(p);
            }
            let mut memo = AuxMemo { ctx };
            let mut call = Call::new(def.name, &values[..n], &mut memo);
            super::cancellable(db, || f(&mut call))
        }));
        if let Some(out) = report(ctx, def.name, r) {
            answer(ctx, out);
        }
    }
}

unsafe extern "C" fn destroy(p: *mut c_void) {
    if !p.is_null() {
        // SAFETY: `p` came from `Box::into_raw` in `aggregate`; SQLite calls this once.
        drop(unsafe { Box::from_raw(p.cast::<UserData>()) });
    }
}

/// Sets the context's result to a catalogue error, with the message and code rusqlite
/// gives the error [`super::to_sqlite`] returns (out of memory as SQLITE_NOMEM).
///
/// # Safety
/// `ctx` must be the context of the running SQLite callback.
#[cold]
#[inline(never)]
unsafe fn fail_raw(ctx: *mut sqlite3_context, error: FunctionError) {
    let nomem = error.is_out_of_memory();
    let interrupted = error.is_interrupted();
    let message = error.to_string();
    let len = c_int::try_from(message.len()).unwrap_or(c_int::MAX);
    // SAFETY: per the contract; SQLite copies the message (not NUL-terminated, so its
    // length is given).
    // The message is set last, as rusqlite does, except out of memory, whose code must
    // survive the message.
    unsafe {
        if nomem || interrupted {
            ffi::sqlite3_result_error(ctx, message.as_ptr().cast(), len);
            let code = if nomem {
                ffi::SQLITE_NOMEM
            } else {
                ffi::SQLITE_INTERRUPT
            };
            ffi::sqlite3_result_error_code(ctx, code);
        } else {
            ffi::sqlite3_result_error_code(ctx, ffi::SQLITE_CONSTRAINT_FUNCTION);
            ffi::sqlite3_result_error(ctx, message.as_ptr().cast(), len);
        }
    }
}

/// The registry row of the running function.
///
/// # Safety
/// `ctx` must be the context of a callback registered by [`aggregate`] or [`scalar`].
#[inline(always)]
unsafe fn def_of(ctx: *mut sqlite3_context) -> Option<&'static FunctionDef> {
    // SAFETY: per the contract, the user data is a `UserData` that lives as long as the
    // function.
    unsafe {
        let p = ffi::sqlite3_user_data(ctx).cast::<UserData>();
        (!p.is_null()).then(|| (*p).def)
    }
}

/// The slot in SQLite's aggregate context; with `create`, the context and a state are
/// made if missing. `None` when SQLite is out of memory, or without `create` when no row
/// has come.
///
/// # Safety
/// `ctx` must be the context of a callback registered by [`aggregate`].
#[inline(always)]
unsafe fn slot(ctx: *mut sqlite3_context, create: bool) -> Option<*mut Slot> {
    let size = if create {
        size_of::<*mut Slot>() as c_int
    } else {
        0
    };
    // SAFETY: per the contract; SQLite zero-fills a new context, a null slot pointer.
    unsafe {
        let p = ffi::sqlite3_aggregate_context(ctx, size).cast::<*mut Slot>();
        if p.is_null() {
            return None;
        }
        if create && (*p).is_null() {
            let def = def_of(ctx)?;
            let Imp::Aggregate(imp) = def.imp else {
                return None;
            };
            *p = Box::into_raw(Box::new(Slot {
                state: (imp.new)(),
                lane: None,
                name: def.name,
            }));
        }
        (!(*p).is_null()).then_some(*p)
    }
}

/// Reports a callback's outcome; `Some` on success.
///
/// # Safety
/// `ctx` must be the context of the running callback.
#[inline(always)]
unsafe fn report<T>(
    ctx: *mut sqlite3_context,
    name: &'static str,
    r: std::thread::Result<Result<T, FunctionError>>,
) -> Option<T> {
    match r {
        Ok(Ok(v)) => Some(v),
        Ok(Err(e)) => {
            // SAFETY: per the contract.
            unsafe { fail_raw(ctx, e) };
            None
        }
        Err(_) => {
            // SAFETY: per the contract.
            unsafe {
                fail_raw(
                    ctx,
                    fail(name, ArgError::Internal("a panic was caught".into())),
                )
            };
            None
        }
    }
}

/// Sets the result to a catalogue value.
///
/// # Safety
/// `ctx` must be the context of the running callback.
unsafe fn answer(ctx: *mut sqlite3_context, out: Out) {
    if cfg!(debug_assertions)
        // SAFETY: per the contract.
        && let Some(def) = unsafe { def_of(ctx) }
        && let Some(e) = crate::catalogue::Returns::drift(def.name, &out)
    {
        // SAFETY: per the contract; SQLite copies the message.
        unsafe { ffi::sqlite3_result_error(ctx, e.as_ptr().cast(), e.len() as c_int) };
        return;
    }
    // SAFETY: per the contract; SQLite copies TEXT and BLOB results (SQLITE_TRANSIENT).
    unsafe {
        match out {
            Out::Null => ffi::sqlite3_result_null(ctx),
            Out::Integer(i) => ffi::sqlite3_result_int64(ctx, i),
            Out::Real(r) => ffi::sqlite3_result_double(ctx, r),
            Out::Text(t) => match c_int::try_from(t.len()) {
                Ok(n) => {
                    ffi::sqlite3_result_text(ctx, t.as_ptr().cast(), n, ffi::SQLITE_TRANSIENT())
                }
                Err(_) => ffi::sqlite3_result_error_toobig(ctx),
            },
            Out::Blob(b) => match c_int::try_from(b.len()) {
                Ok(n) => {
                    ffi::sqlite3_result_blob(ctx, b.as_ptr().cast(), n, ffi::SQLITE_TRANSIENT())
                }
                Err(_) => ffi::sqlite3_result_error_toobig(ctx),
            },
        }
    }
}

/// Runs `body` on a row's arguments and the group's state (made on first use).
///
/// # Safety
/// SQLite's contract for xStep/xInverse: `argv` holds `argc` values.
#[inline(always)]
unsafe fn on_row(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
    body: impl FnOnce(&mut dyn Aggregator, &Args<'_>) -> Result<(), FunctionError>,
) {
    // SAFETY: per the contract.
    unsafe {
        let Some(slot) = slot(ctx, true) else {
            ffi::sqlite3_result_error_nomem(ctx);
            return;
        };
        let argv: &[*mut sqlite3_value] = if argv.is_null() || argc <= 0 {
            &[]
        } else {
            std::slice::from_raw_parts(argv, argc as usize)
        };
        let mut values = [Arg::Null; MAX_ARGS];
        let n = argv.len().min(MAX_ARGS);
        for (v, &p) in values.iter_mut().zip(argv) {
            *v = read(p);
        }
        let slot = &mut *slot;
        let name = slot.name;
        let r = catch_unwind(AssertUnwindSafe(|| {
            slot.lane = None;
            let r = body(&mut *slot.state, &Args::new(&values[..n]));
            slot.refresh();
            r
        }));
        report(ctx, name, r);
    }
}

/// Whether SQLite's type code is INTEGER or REAL.
#[inline(always)]
fn numeric(ty: c_int) -> bool {
    ty == ffi::SQLITE_FLOAT || ty == ffi::SQLITE_INTEGER
}

/// The fast lane of `x_step` (see the module docs). Returns `false` for any row it does
/// not take, which then goes through the general step.
///
/// # Safety
/// SQLite's contract for xStep: `argv` holds `argc` values.
#[inline(always)]
unsafe fn fast_row(ctx: *mut sqlite3_context, argc: c_int, argv: *mut *mut sqlite3_value) -> bool {
    if !(argc == 1 || argc == 2) || argv.is_null() {
        return false;
    }
    // SAFETY: per the contract, `argv` holds `argc` (one or two) valid values; a context
    // that has a state holds a pointer to its slot; the cached sink points into the boxed
    // state, which no other reference touches while the lane runs.
    unsafe {
        let Some(slot) = slot(ctx, false) else {
            return false;
        };
        let Some((key, sink)) = (*slot).lane else {
            return false;
        };
        let x = *argv;
        if argc == 2 {
            let c = *argv.add(1);
            if !numeric(ffi::sqlite3_value_type(c)) || ffi::sqlite3_value_double(c).to_bits() != key
            {
                return false;
            }
        }
        match ffi::sqlite3_value_type(x) {
            ffi::SQLITE_NULL => true,
            ty if numeric(ty) => {
                let v = ffi::sqlite3_value_double(x);
                match sink {
                    RawSink::Count(counter) => {
                        (*counter).add(v);
                        true
                    }
                    RawSink::Collect(xs) => try_push(&mut *xs, v),
                    RawSink::Sketch(s) => (*s).insert(v).is_ok(),
                }
            }
            _ => false,
        }
    }
}

unsafe extern "C" fn x_step(ctx: *mut sqlite3_context, argc: c_int, argv: *mut *mut sqlite3_value) {
    // SAFETY: called by SQLite as xStep. The lane is small and inlined here; every other
    // row takes the out-of-line general path.
    unsafe {
        match catch_unwind(AssertUnwindSafe(|| fast_row(ctx, argc, argv))) {
            Ok(true) => {}
            Ok(false) => general_step(ctx, argc, argv),
            Err(_) => panicked(ctx),
        }
    }
}

/// `x_step` for the rows the fast lane does not take.
///
/// # Safety
/// SQLite's contract for xStep: `argv` holds `argc` values.
#[inline(never)]
unsafe fn general_step(ctx: *mut sqlite3_context, argc: c_int, argv: *mut *mut sqlite3_value) {
    // SAFETY: per the contract.
    unsafe { on_row(ctx, argc, argv, |s, a| s.step(a)) }
}

/// Reports a panic caught in the fast lane.
///
/// # Safety
/// `ctx` must be the context of the running callback.
#[cold]
#[inline(never)]
unsafe fn panicked(ctx: *mut sqlite3_context) {
    // SAFETY: per the contract.
    unsafe {
        let name = def_of(ctx).map_or("ogive", |d| d.name);
        fail_raw(
            ctx,
            fail(name, ArgError::Internal("a panic was caught".into())),
        )
    }
}

unsafe extern "C" fn x_inverse(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
) {
    // SAFETY: called by SQLite as xInverse.
    unsafe { on_row(ctx, argc, argv, |s, a| s.inverse(a)) }
}

unsafe extern "C" fn x_value(ctx: *mut sqlite3_context) {
    // SAFETY: called by SQLite as xValue; the state stays in the context.
    unsafe {
        let Some(slot) = slot(ctx, false) else {
            return answer(ctx, Out::Null);
        };
        let slot = &mut *slot;
        let r = catch_unwind(AssertUnwindSafe(|| {
            slot.lane = None;
            let r = slot.state.value();
            slot.refresh();
            r
        }));
        if let Some(out) = report(ctx, slot.name, r) {
            answer(ctx, out);
        }
    }
}

unsafe extern "C" fn x_final(ctx: *mut sqlite3_context) {
    // SAFETY: called by SQLite as xFinal; the slot is taken out and dropped here, once.
    unsafe {
        let p = ffi::sqlite3_aggregate_context(ctx, 0).cast::<*mut Slot>();
        if p.is_null() || (*p).is_null() {
            // No row came: the answer of an empty state.
            let Some(def) = def_of(ctx) else {
                return answer(ctx, Out::Null);
            };
            let Imp::Aggregate(imp) = def.imp else {
                return answer(ctx, Out::Null);
            };
            let r = catch_unwind(AssertUnwindSafe(|| (imp.new)().finalize()));
            if let Some(out) = report(ctx, def.name, r) {
                answer(ctx, out);
            }
            return;
        }
        let slot = Box::from_raw(*p);
        *p = std::ptr::null_mut();
        let name = slot.name;
        let db = ffi::sqlite3_context_db_handle(ctx);
        let r = catch_unwind(AssertUnwindSafe(move || {
            let mut slot = slot;
            slot.lane = None;
            super::cancellable(db, || slot.state.finalize())
        }));
        if let Some(out) = report(ctx, name, r) {
            answer(ctx, out);
        }
    }
}
