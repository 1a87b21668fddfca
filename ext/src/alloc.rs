//! A global allocator that takes the extension's memory from the host SQLite
//! (`sqlite3_malloc64`), so that `PRAGMA hard_heap_limit` and `sqlite3_soft_heap_limit64`
//! count the values an aggregate holds. Built only with the `sqlite-alloc` feature.
//!
//! Every block, from either source, carries one header word just before the pointer it
//! hands out: the distance back to the start of the underlying block (a multiple of 8,
//! at least 8) with the low bit set when the block came from SQLite. So:
//!
//! - Alignment: SQLite and the system allocator (asked for alignment 8) give 8-aligned
//!   blocks; a request for alignment `a` takes `size + max(a, 8)` bytes and hands out the
//!   first `max(a, 8)`-aligned address at least 8 bytes in ([`offset`]).
//! - Before the entry point has run, and in a process that never loads the extension into
//!   a host (the unit tests), memory comes from the system allocator. [`install`] records
//!   the host's `malloc64`, `realloc64` and `free` once; the allocator only reads its own
//!   copies, so it never panics and never calls into SQLite before they are set (rusqlite's
//!   wrappers assert on an unset table, and a second host library in the process would
//!   replace their pointers; the first host's stay here, so a block always goes back to
//!   the library it came from).
//! - Free: the header's tag says which allocator gets the block back.
//! - Realloc: with alignment at most 8 the offset is always 8, so a block is resized by its
//!   own source (`sqlite3_realloc64` or the system's realloc); a larger alignment moves
//!   the block (allocate, copy, free), since the new base may need another offset.
//! - When SQLite refuses (a heap limit), a request of at most [`SMALL`] bytes is served by
//!   the system allocator instead: Rust aborts the process when an infallible allocation
//!   fails, and the small bookkeeping allocations (an error message, a state struct) are
//!   infallible. Data-sized buffers grow fallibly (`stats::grow`) far beyond that size, so
//!   the limit stops them and the statement fails with SQLITE_NOMEM.
//!
//! Memory from SQLite may be freed after the connection that loaded the extension has
//! closed (`sqlite3_free` needs no connection), and after `sqlite3_shutdown` (SQLite's
//! default allocator frees without its mutex then).

use std::alloc::{GlobalAlloc, Layout, System};
use std::ffi::c_void;
use std::sync::OnceLock;

use ogive_core::rusqlite::ffi;

/// Bytes of the header word in front of every block.
const HEADER: usize = 8;
/// Tag bit of the header: the block came from SQLite.
const FROM_SQLITE: usize = 1;
/// Largest request served by the system allocator when SQLite refuses it.
pub const SMALL: usize = 64 * 1024;

/// The host's allocation entries, copied once from its routines table.
struct Host {
    malloc64: unsafe extern "C" fn(ffi::sqlite3_uint64) -> *mut c_void,
    realloc64: unsafe extern "C" fn(*mut c_void, ffi::sqlite3_uint64) -> *mut c_void,
    free: unsafe extern "C" fn(*mut c_void),
}

static HOST: OnceLock<Host> = OnceLock::new();

/// Routes later allocations to the host SQLite whose table is `p_api`. Only the first call
/// that finds all three entries has an effect.
///
/// # Safety
/// `p_api` is null or the routines table of a SQLite (3.8.7 or newer) that stays loaded
/// for the rest of the process.
pub unsafe fn install(p_api: *const ffi::sqlite3_api_routines) {
    if p_api.is_null() {
        return;
    }
    // SAFETY: the caller guarantees a live table holding these entries.
    let (m, r, f) = unsafe { ((*p_api).malloc64, (*p_api).realloc64, (*p_api).free) };
    if let (Some(malloc64), Some(realloc64), Some(free)) = (m, r, f) {
        let _ = HOST.set(Host {
            malloc64,
            realloc64,
            free,
        });
    }
}

/// The alignment blocks are laid out for: `align`, at least 8.
#[inline]
fn unit(align: usize) -> usize {
    align.max(HEADER)
}

/// Bytes to ask of the underlying allocator for `layout`, or None if that overflows.
#[inline]
pub fn total(layout: Layout) -> Option<usize> {
    layout.size().checked_add(unit(layout.align()))
}

/// Distance from an 8-aligned `base` to the pointer handed out for alignment `align`:
/// the first multiple of `max(align, 8)` at least 8 bytes past `base`. Lies in
/// `8..=max(align, 8)` and is a multiple of 8.
#[inline]
pub fn offset(base: usize, align: usize) -> usize {
    let u = unit(align);
    // base + 8 does not overflow: base is the start of a block of at least u + 8 bytes.
    let start = base + HEADER;
    start.next_multiple_of(u) - base
}

/// The system allocator's layout for a block of `n` bytes.
#[inline]
fn system_layout(n: usize) -> Option<Layout> {
    Layout::from_size_align(n, HEADER).ok()
}

/// The allocator; see the module documentation.
pub struct SqliteAlloc;

impl SqliteAlloc {
    /// An underlying block of `n` bytes and its tag, from SQLite when installed (or from
    /// the system when SQLite refuses a small one).
    #[inline]
    unsafe fn raw_alloc(n: usize) -> (*mut u8, usize) {
        if let Some(host) = HOST.get() {
            // SAFETY: the host's malloc64 accepts any size and returns null on failure.
            let p = unsafe { (host.malloc64)(n as ffi::sqlite3_uint64) } as *mut u8;
            if !p.is_null() || n > SMALL {
                return (p, FROM_SQLITE);
            }
        }
        match system_layout(n) {
            // SAFETY: n > 0 (it includes the header).
            Some(l) => (unsafe { System.alloc(l) }, 0),
            None => (std::ptr::null_mut(), 0),
        }
    }

    /// Frees an underlying block given its start, tag and size.
    #[inline]
    unsafe fn raw_free(base: *mut u8, tag: usize, n: usize) {
        if tag == FROM_SQLITE {
            // A block tagged SQLite exists only once the host is installed.
            if let Some(host) = HOST.get() {
                unsafe { (host.free)(base.cast()) };
            }
        } else if let Some(l) = system_layout(n) {
            unsafe { System.dealloc(base, l) };
        }
    }

    /// Start, tag and underlying size of the block behind `ptr`.
    #[inline]
    unsafe fn header(ptr: *mut u8, layout: Layout) -> (*mut u8, usize, usize) {
        // SAFETY: ptr was handed out by `alloc`, which wrote the header 8 bytes before it.
        let word = unsafe { (ptr.sub(HEADER) as *const usize).read() };
        let tag = word & FROM_SQLITE;
        let back = word & !FROM_SQLITE;
        // total() succeeded when the block was made with this layout.
        let n = layout.size() + unit(layout.align());
        (unsafe { ptr.sub(back) }, tag, n)
    }

    /// Writes the header for a block at `base` with `tag` and returns the user pointer.
    #[inline]
    unsafe fn finish(base: *mut u8, tag: usize, align: usize) -> *mut u8 {
        let off = offset(base as usize, align);
        unsafe {
            let p = base.add(off);
            (p.sub(HEADER) as *mut usize).write(off | tag);
            p
        }
    }
}

unsafe impl GlobalAlloc for SqliteAlloc {
    #[inline]
    unsafe fn alloc(&self, layout: Layout) -> *mut u8 {
        let Some(n) = total(layout) else {
            return std::ptr::null_mut();
        };
        let (base, tag) = unsafe { Self::raw_alloc(n) };
        if base.is_null() {
            return base;
        }
        unsafe { Self::finish(base, tag, layout.align()) }
    }

    #[inline]
    unsafe fn dealloc(&self, ptr: *mut u8, layout: Layout) {
        let (base, tag, n) = unsafe { Self::header(ptr, layout) };
        unsafe { Self::raw_free(base, tag, n) };
    }

    #[inline]
    unsafe fn realloc(&self, ptr: *mut u8, layout: Layout, new_size: usize) -> *mut u8 {
        let align = layout.align();
        let (base, tag, old_n) = unsafe { Self::header(ptr, layout) };
        if align <= HEADER {
            let Some(new_n) = new_size.checked_add(HEADER) else {
                return std::ptr::null_mut();
            };
            let moved = if tag == FROM_SQLITE {
                match HOST.get() {
                    // SAFETY: base came from this host's malloc64/realloc64; on failure
                    // realloc64 returns null and leaves the block as it was.
                    Some(host) => unsafe {
                        (host.realloc64)(base.cast(), new_n as ffi::sqlite3_uint64) as *mut u8
                    },
                    None => std::ptr::null_mut(),
                }
            } else {
                match system_layout(old_n) {
                    Some(l) if system_layout(new_n).is_some() => unsafe {
                        System.realloc(base, l, new_n)
                    },
                    _ => std::ptr::null_mut(),
                }
            };
            if !moved.is_null() {
                // The offset stays 8 and the header moved with the data.
                return unsafe { moved.add(HEADER) };
            }
            if tag != FROM_SQLITE || new_n > SMALL {
                return std::ptr::null_mut();
            }
            // SQLite refused a small block: fall through to move it to the system.
        }
        // SAFETY: the new layout is valid: the caller guarantees new_size rounded up to
        // align does not overflow isize.
        let new_layout = unsafe { Layout::from_size_align_unchecked(new_size, align) };
        let Some(new_n) = total(new_layout) else {
            return std::ptr::null_mut();
        };
        let (new_base, new_tag) = if align <= HEADER {
            match system_layout(new_n) {
                Some(l) => (unsafe { System.alloc(l) }, 0),
                None => (std::ptr::null_mut(), 0),
            }
        } else {
            unsafe { Self::raw_alloc(new_n) }
        };
        if new_base.is_null() {
            return new_base;
        }
        unsafe {
            let p = Self::finish(new_base, new_tag, align);
            std::ptr::copy_nonoverlapping(ptr, p, layout.size().min(new_size));
            Self::raw_free(base, tag, old_n);
            p
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// For every alignment 1..=4096 and every 8-aligned base residue, the pointer is
    /// aligned, leaves room for the header, and the block's end covers the request.
    #[test]
    fn offsets_align_and_fit() {
        let mut align = 1;
        while align <= 4096 {
            let u = unit(align);
            for k in 0..(u / 8).max(1) * 2 {
                let base = 0x1000_0000 + 8 * k;
                let off = offset(base, align);
                assert_eq!((base + off) % align, 0, "align {align} base {base:#x}");
                assert_eq!(off % 8, 0);
                assert!(off >= HEADER && off <= u, "align {align} off {off}");
                for size in [0usize, 1, 7, 8, 9, 100, 4095, 4096, 4097, 1 << 20] {
                    let l = Layout::from_size_align(size, align).unwrap();
                    let n = total(l).unwrap();
                    assert!(off + size <= n, "align {align} size {size}");
                }
            }
            align *= 2;
        }
        let huge = Layout::from_size_align(isize::MAX as usize - 4095, 4096).unwrap();
        assert!(total(huge).is_some());
        assert!(system_layout(total(huge).unwrap()).is_none());
    }

    unsafe extern "C" {
        fn malloc(n: usize) -> *mut c_void;
        fn realloc(p: *mut c_void, n: usize) -> *mut c_void;
        fn free(p: *mut c_void);
    }
    /// Underlying sizes the fake host refuses, as a heap limit would.
    const REFUSED_SMALL: usize = 12_345 + 8;
    const REFUSED_LARGE: usize = 1_234_567 + 8;
    unsafe extern "C" fn host_malloc64(n: ffi::sqlite3_uint64) -> *mut c_void {
        let n = n as usize;
        if n == REFUSED_SMALL || n == REFUSED_LARGE {
            return std::ptr::null_mut();
        }
        unsafe { malloc(n) }
    }
    unsafe extern "C" fn host_realloc64(p: *mut c_void, n: ffi::sqlite3_uint64) -> *mut c_void {
        let n = n as usize;
        if n == REFUSED_SMALL || n == REFUSED_LARGE {
            return std::ptr::null_mut();
        }
        unsafe { realloc(p, n) }
    }
    unsafe extern "C" fn host_free(p: *mut c_void) {
        unsafe { free(p) }
    }

    fn tag_of(p: *mut u8) -> usize {
        unsafe { (p.sub(HEADER) as *const usize).read() & FROM_SQLITE }
    }

    /// Blocks of many layouts, from the system (before install) and from a host (after):
    /// aligned, writable, contents kept across realloc up and down, freed by their own
    /// source; a refused small block falls back to the system, a refused large one is null.
    #[test]
    fn blocks_round_trip() {
        let a = SqliteAlloc;
        let run = |want_tag: usize| {
            let mut align = 1;
            while align <= 4096 {
                for size in [1usize, 3, 8, 24, 1000, 70_000] {
                    let l = Layout::from_size_align(size, align).unwrap();
                    unsafe {
                        let mut p = a.alloc(l);
                        assert!(!p.is_null());
                        assert_eq!(p as usize % align, 0);
                        assert_eq!(tag_of(p), want_tag);
                        for i in 0..size {
                            p.add(i).write(i as u8);
                        }
                        let mut cur = size;
                        for new_size in [size * 3 + 5, (size / 2).max(1)] {
                            let q = a.realloc(
                                p,
                                Layout::from_size_align(cur, align).unwrap(),
                                new_size,
                            );
                            assert!(!q.is_null());
                            assert_eq!(q as usize % align, 0);
                            for i in 0..cur.min(new_size) {
                                assert_eq!(q.add(i).read(), i as u8, "align {align} size {size}");
                            }
                            for i in 0..new_size {
                                q.add(i).write(i as u8);
                            }
                            p = q;
                            cur = new_size;
                        }
                        a.dealloc(p, Layout::from_size_align(cur, align).unwrap());
                    }
                }
                align *= 2;
            }
        };
        run(0);
        let mut api: ffi::sqlite3_api_routines = unsafe { std::mem::zeroed() };
        api.malloc64 = Some(host_malloc64);
        api.realloc64 = Some(host_realloc64);
        api.free = Some(host_free);
        // The table must outlive the process's allocations; the allocator copies it anyway.
        unsafe { install(Box::leak(Box::new(api))) };
        run(FROM_SQLITE);
        unsafe {
            let l = Layout::from_size_align(12_345, 8).unwrap();
            let p = a.alloc(l);
            assert!(!p.is_null());
            assert_eq!(tag_of(p), 0);
            a.dealloc(p, l);
            let l = Layout::from_size_align(1_234_567, 8).unwrap();
            assert!(a.alloc(l).is_null());
            // A host block grown to a refused small size moves to the system, intact.
            let l = Layout::from_size_align(100, 8).unwrap();
            let p = a.alloc(l);
            assert_eq!(tag_of(p), FROM_SQLITE);
            p.write_bytes(7, 100);
            let q = a.realloc(p, l, 12_345);
            assert!(!q.is_null());
            assert_eq!(tag_of(q), 0);
            assert_eq!(q.add(99).read(), 7);
            a.dealloc(q, Layout::from_size_align(12_345, 8).unwrap());
        }
    }
}
