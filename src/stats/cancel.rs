//! Cooperative cancellation of long kernels.
//!
//! A fit can run for seconds (a mixture over a million distinct values, a Turnbull
//! estimate, a censored likelihood over many readings). The kernels poll [`requested`]
//! once per pass over the data (an EM pass, a simplex step, a self-consistency pass) and
//! stop with their `Interrupted` error when it says so. What "cancel" means belongs to
//! the engine: an adapter installs a check for the duration of one call with
//! [`with_check`] (the SQLite adapter asks `sqlite3_is_interrupted`, which the shell's
//! Ctrl-C and any host's `sqlite3_interrupt` set). Without a check installed, nothing is
//! ever cancelled and a poll costs one thread-local read.

use std::cell::RefCell;

type Check = Box<dyn Fn() -> bool>;

thread_local! {
    static CHECK: RefCell<Option<Check>> = const { RefCell::new(None) };
}

/// Runs `f` with `check` as the cancellation test of this thread, restoring the previous
/// one afterwards (also when `f` unwinds).
///
/// # Example
/// ```
/// use ogive::stats::cancel::{requested, with_check};
/// assert!(!requested());
/// assert!(with_check(Box::new(|| true), requested));
/// assert!(!requested());
/// ```
pub fn with_check<R>(check: Check, f: impl FnOnce() -> R) -> R {
    struct Restore(Option<Check>);
    impl Drop for Restore {
        fn drop(&mut self) {
            let previous = self.0.take();
            CHECK.with(|c| {
                if let Ok(mut slot) = c.try_borrow_mut() {
                    *slot = previous;
                }
            });
        }
    }
    let previous = CHECK.with(|c| c.try_borrow_mut().ok().and_then(|mut s| s.replace(check)));
    let _restore = Restore(previous);
    f()
}

/// Whether the engine asked the running call to stop.
///
/// # Example
/// ```
/// assert!(!ogive::stats::cancel::requested());
/// ```
pub fn requested() -> bool {
    CHECK.with(|c| {
        c.try_borrow()
            .ok()
            .and_then(|s| s.as_ref().map(|check| check()))
            .unwrap_or(false)
    })
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::cell::Cell;
    use std::rc::Rc;

    #[test]
    fn checks_nest_and_restore() {
        let calls = Rc::new(Cell::new(0));
        let seen = calls.clone();
        let inner = with_check(
            Box::new(move || {
                seen.set(seen.get() + 1);
                false
            }),
            || {
                let nested = with_check(Box::new(|| true), requested);
                (nested, requested())
            },
        );
        assert_eq!(inner, (true, false));
        assert_eq!(calls.get(), 1);
        assert!(!requested());
    }
}
