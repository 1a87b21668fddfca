//! A lean per-row path for the hottest window functions (`ecdf`, `quantile`).
//!
//! rusqlite's general wrapper (`create_window_function`) builds a `Context` and converts
//! every argument through an out-of-line `ValueRef::from_value` on every row; over 10M
//! rows a perf profile showed that wrapper, plus the argument conversion, as most of the
//! cost above SQLite's own scan (see bench/README.md). This module registers the same
//! SQL functions straight through `sqlite3_create_window_function`, with `extern "C"`
//! callbacks that read each argument's type and number directly and keep the state in
//! SQLite's aggregate context as a pointer to a `Box`:
//!
//! - `x_step` and `x_inverse` create the state on first use (the aggregate context is
//!   zero-filled, so a null pointer means "no state yet");
//! - `x_value` answers for the current frame and keeps the state;
//! - `x_final` takes the state out (leaving a null pointer) and drops it; SQLite calls it
//!   once per group, also when the statement ends early on an error, so nothing leaks.
//!
//! Every body runs under `catch_unwind`: a panic becomes an SQLite error, never an
//! unwind into C. Errors go through [`args::fail_raw`], so they read exactly as the
//! errors of every other ogive function. In the loadable build `rusqlite::ffi` routes each
//! call through the host's API table, so the same code serves both builds.

use std::ffi::{c_int, c_void};
use std::panic::{AssertUnwindSafe, catch_unwind};

use rusqlite::Connection;
use rusqlite::ffi::{self, sqlite3_context, sqlite3_value};
use rusqlite::types::ValueRef;

use super::FunctionDef;
use super::args::{self, ArgError};

/// The arguments of one call, read straight from SQLite.
pub(crate) struct Args<'a> {
    argv: &'a [*mut sqlite3_value],
}

impl Args<'_> {
    /// How many arguments the call has.
    #[inline]
    pub(crate) fn len(&self) -> usize {
        self.argv.len()
    }

    /// Argument `i` as a [`ValueRef`]; a missing argument reads as NULL.
    #[inline(always)]
    pub(crate) fn get(&self, i: usize) -> ValueRef<'_> {
        let Some(&v) = self.argv.get(i) else {
            return ValueRef::Null;
        };
        // SAFETY: `v` is one of the argument values SQLite passed to this callback; it is
        // valid for the callback's duration, which bounds the returned borrow.
        unsafe {
            match ffi::sqlite3_value_type(v) {
                ffi::SQLITE_FLOAT => ValueRef::Real(ffi::sqlite3_value_double(v)),
                ffi::SQLITE_INTEGER => ValueRef::Integer(ffi::sqlite3_value_int64(v)),
                ffi::SQLITE_TEXT => ValueRef::Text(bytes(ffi::sqlite3_value_text(v).cast(), v)),
                ffi::SQLITE_BLOB => ValueRef::Blob(bytes(ffi::sqlite3_value_blob(v).cast(), v)),
                _ => ValueRef::Null,
            }
        }
    }

    /// Argument `i` as a number, by [`args::number`].
    #[inline(always)]
    pub(crate) fn number(&self, i: usize, what: &'static str) -> Result<Option<f64>, ArgError> {
        args::number(self.get(i), what)
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

/// The state of a window function on the lean path: what one group or frame keeps.
pub(crate) trait RawWindow: Default {
    /// The SQL name, for error messages.
    const NAME: &'static str;

    /// Adds a row (entering the group or the frame).
    fn step(&mut self, args: &Args<'_>) -> Result<(), ArgError>;

    /// Removes a row leaving the frame.
    fn inverse(&mut self, args: &Args<'_>) -> Result<(), ArgError>;

    /// The answer for the current frame; the state lives on.
    fn value(&mut self) -> Result<Option<f64>, ArgError>;

    /// The answer for the whole group, after which the state is dropped.
    fn finalize(&mut self) -> Result<Option<f64>, ArgError>;

    /// The fast lane's key: for a state whose calls have two arguments, `(x, c)` with `c`
    /// constant per group, the bits of `c` as the first row fixed it, once [`step`] has
    /// accepted that row and a row whose `c` has these bits and whose `x` is a number needs
    /// nothing but [`push`]. `None` (the default) sends every row through [`step`].
    ///
    /// [`step`]: RawWindow::step
    /// [`push`]: RawWindow::push
    #[inline(always)]
    fn lane(&self) -> Option<u64> {
        None
    }

    /// Adds the number `x` of a row the fast lane checked (never NaN, never NULL);
    /// `false` when it could not (memory ran out), and the row goes to [`step`] instead,
    /// which reports the error.
    ///
    /// [`step`]: RawWindow::step
    #[inline(always)]
    fn push(&mut self, _x: f64) -> bool {
        false
    }
}

/// Registers `S` as a window function (also a plain aggregate) for each arity of `def`.
pub(crate) fn window<S: RawWindow>(
    conn: &Connection,
    def: &'static FunctionDef,
) -> rusqlite::Result<()> {
    let name = std::ffi::CString::new(def.name)?;
    for &n in def.arities {
        // SAFETY: `conn.handle()` is the open connection; the name is copied by SQLite;
        // the callbacks match the signatures SQLite expects and take no user data.
        let rc = unsafe {
            ffi::sqlite3_create_window_function(
                conn.handle(),
                name.as_ptr(),
                n,
                super::flags().bits(),
                std::ptr::null_mut::<c_void>(),
                Some(x_step::<S>),
                Some(x_final::<S>),
                Some(x_value::<S>),
                Some(x_inverse::<S>),
                None,
            )
        };
        if rc != ffi::SQLITE_OK {
            return Err(rusqlite::Error::SqliteFailure(ffi::Error::new(rc), None));
        }
    }
    Ok(())
}

/// The slot in SQLite's aggregate context that holds the state's pointer; with `create`,
/// the context (and a state) is made if missing. `None` when SQLite is out of memory, or
/// without `create` when no row has come.
///
/// # Safety
/// `ctx` must be the context of an aggregate or window callback.
#[inline(always)]
unsafe fn slot<S: RawWindow>(ctx: *mut sqlite3_context, create: bool) -> Option<*mut *mut S> {
    let size = if create {
        size_of::<*mut S>() as c_int
    } else {
        0
    };
    // SAFETY: per the contract; SQLite zero-fills a new context, a null state pointer.
    unsafe {
        let slot = ffi::sqlite3_aggregate_context(ctx, size).cast::<*mut S>();
        if slot.is_null() {
            return None;
        }
        if create && (*slot).is_null() {
            *slot = Box::into_raw(Box::<S>::default());
        }
        (!(*slot).is_null()).then_some(slot)
    }
}

/// A callback's outcome: `Some` on success; otherwise the error is reported through
/// [`args::fail_raw`] (a caught panic as an internal error) and the result is `None`.
///
/// # Safety
/// `ctx` must be the context of the running callback.
#[inline(always)]
unsafe fn report<T>(
    ctx: *mut sqlite3_context,
    name: &'static str,
    r: std::thread::Result<Result<T, ArgError>>,
) -> Option<T> {
    match r {
        Ok(Ok(v)) => Some(v),
        Ok(Err(e)) => {
            // SAFETY: per the contract.
            unsafe { args::fail_raw(ctx, name, e) };
            None
        }
        Err(_) => {
            // SAFETY: per the contract.
            unsafe { args::fail_raw(ctx, name, ArgError::Internal("a panic was caught".into())) };
            None
        }
    }
}

/// Sets the result to `x`, NULL for `None`.
///
/// # Safety
/// `ctx` must be the context of the running callback.
unsafe fn answer(ctx: *mut sqlite3_context, x: Option<f64>) {
    // SAFETY: per the contract. SQLite itself turns a NaN double into NULL.
    unsafe {
        match x {
            Some(x) => ffi::sqlite3_result_double(ctx, x),
            None => ffi::sqlite3_result_null(ctx),
        }
    }
}

/// Runs `body` on a row's arguments and the group's state (made on first use).
///
/// # Safety
/// SQLite's contract for xStep/xInverse: `argv` holds `argc` values.
#[inline(always)]
unsafe fn on_row<S: RawWindow>(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
    body: impl FnOnce(&mut S, &Args<'_>) -> Result<(), ArgError>,
) {
    // SAFETY: per the contract.
    unsafe {
        let Some(slot) = slot::<S>(ctx, true) else {
            ffi::sqlite3_result_error_nomem(ctx);
            return;
        };
        let argv: &[*mut sqlite3_value] = if argv.is_null() || argc <= 0 {
            &[]
        } else {
            std::slice::from_raw_parts(argv, argc as usize)
        };
        let r = catch_unwind(AssertUnwindSafe(|| body(&mut **slot, &Args { argv })));
        report(ctx, S::NAME, r);
    }
}

/// Whether SQLite's type code is INTEGER or REAL: a value `sqlite3_value_double` reads
/// exactly as ogive's own conversion does (`i as f64`).
#[inline(always)]
fn numeric(ty: c_int) -> bool {
    ty == ffi::SQLITE_FLOAT || ty == ffi::SQLITE_INTEGER
}

/// The fast lane of `x_step`: with the state's constant fixed (see [`RawWindow::lane`]),
/// a two-argument row whose constant reads as that same number and whose `x` is a number
/// or NULL is taken here with four calls into SQLite and no other checks. Returns `false`
/// for any other row (and for the first row of a group), which then goes through
/// [`RawWindow::step`] and its full checks and errors.
///
/// The constant is read only as a double (SQLite's own reading, `sqlite3_value_double`),
/// and the row stays in the lane when its bits equal those of the first row's value,
/// which the full checks accepted. A NULL, or TEXT that is not a number, reads as `+0.0`,
/// so a zero constant always takes the full path. What the lane lets through without the
/// full checks is therefore only a TEXT or BLOB constant that SQLite reads as exactly the
/// group's nonzero constant: the same number, so the answer is the same. Skipping its type
/// saves a fifth call per row; `bench/README.md` has the measurement.
///
/// # Safety
/// SQLite's contract for xStep: `argv` holds `argc` values.
#[inline(always)]
unsafe fn fast_row<S: RawWindow>(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
) -> bool {
    if argc != 2 || argv.is_null() {
        return false;
    }
    // SAFETY: per the contract, `argv` holds two valid values; a context of this callback
    // that has a state holds a pointer to it (see `slot`).
    unsafe {
        let Some(slot) = slot::<S>(ctx, false) else {
            return false;
        };
        let state = &mut **slot;
        let Some(bits) = state.lane() else {
            return false;
        };
        let (x, c) = (*argv, *argv.add(1));
        if bits == 0 || ffi::sqlite3_value_double(c).to_bits() != bits {
            return false;
        }
        match ffi::sqlite3_value_type(x) {
            ffi::SQLITE_NULL => true,
            ty if numeric(ty) => {
                let v = ffi::sqlite3_value_double(x);
                v.is_nan() || state.push(v)
            }
            _ => false,
        }
    }
}

unsafe extern "C" fn x_step<S: RawWindow>(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
) {
    // SAFETY: called by SQLite as xStep. The lane is small and inlined here; every other
    // row takes the out-of-line general path.
    unsafe {
        match catch_unwind(AssertUnwindSafe(|| fast_row::<S>(ctx, argc, argv))) {
            Ok(true) => {}
            Ok(false) => general_step::<S>(ctx, argc, argv),
            Err(_) => panicked::<S>(ctx),
        }
    }
}

/// `x_step` for the rows the fast lane does not take.
///
/// # Safety
/// SQLite's contract for xStep: `argv` holds `argc` values.
#[inline(never)]
unsafe fn general_step<S: RawWindow>(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
) {
    // SAFETY: per the contract.
    unsafe { on_row::<S>(ctx, argc, argv, S::step) }
}

/// Reports a panic caught in the fast lane.
///
/// # Safety
/// `ctx` must be the context of the running callback.
#[cold]
#[inline(never)]
unsafe fn panicked<S: RawWindow>(ctx: *mut sqlite3_context) {
    // SAFETY: per the contract.
    unsafe {
        args::fail_raw(
            ctx,
            S::NAME,
            ArgError::Internal("a panic was caught".into()),
        )
    }
}

/// Appends `x` to `xs`, asking the allocator instead of aborting: `false` when memory ran
/// out (the vector is unchanged), so that the caller can report an error to SQLite and the
/// host process lives on.
#[inline(always)]
pub(crate) fn try_push(xs: &mut Vec<f64>, x: f64) -> bool {
    if xs.len() == xs.capacity() && !grow(xs) {
        return false;
    }
    xs.push(x);
    true
}

/// Grows a full vector (amortised doubling); `false` when memory ran out.
#[cold]
#[inline(never)]
fn grow(xs: &mut Vec<f64>) -> bool {
    xs.try_reserve(1).is_ok()
}

unsafe extern "C" fn x_inverse<S: RawWindow>(
    ctx: *mut sqlite3_context,
    argc: c_int,
    argv: *mut *mut sqlite3_value,
) {
    // SAFETY: called by SQLite as xInverse.
    unsafe { on_row::<S>(ctx, argc, argv, S::inverse) }
}

unsafe extern "C" fn x_value<S: RawWindow>(ctx: *mut sqlite3_context) {
    // SAFETY: called by SQLite as xValue; the state stays in the context.
    unsafe {
        let Some(slot) = slot::<S>(ctx, false) else {
            return answer(ctx, None);
        };
        let r = catch_unwind(AssertUnwindSafe(|| (**slot).value()));
        if let Some(x) = report(ctx, S::NAME, r) {
            answer(ctx, x);
        }
    }
}

unsafe extern "C" fn x_final<S: RawWindow>(ctx: *mut sqlite3_context) {
    // SAFETY: called by SQLite as xFinal; the state is taken out and dropped here, once.
    unsafe {
        let Some(slot) = slot::<S>(ctx, false) else {
            return answer(ctx, None);
        };
        let state = Box::from_raw(*slot);
        *slot = std::ptr::null_mut();
        let r = catch_unwind(AssertUnwindSafe(move || {
            let mut state = state;
            state.finalize()
        }));
        if let Some(x) = report(ctx, S::NAME, r) {
            answer(ctx, x);
        }
    }
}
