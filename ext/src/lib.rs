//! The loadable SQLite extension. SQLite finds `sqlite3_ogive_init` from the file name
//! `libogive.so`, so `.load path/to/libogive` needs no entry-point argument.

use std::ffi::{c_char, c_int};

use ogive_core::rusqlite::ffi;

#[cfg(any(test, feature = "sqlite-alloc"))]
mod alloc;

/// With the `sqlite-alloc` feature, the extension's memory comes from the host SQLite once
/// it has loaded the extension (see `alloc.rs`).
#[cfg(feature = "sqlite-alloc")]
#[global_allocator]
static GLOBAL: alloc::SqliteAlloc = alloc::SqliteAlloc;

/// The entry point SQLite calls when the extension is loaded.
///
/// # Safety
/// Called by SQLite's extension loader with its own arguments.
#[unsafe(no_mangle)]
pub unsafe extern "C" fn sqlite3_ogive_init(
    db: *mut ffi::sqlite3,
    pz_err_msg: *mut *mut c_char,
    p_api: *mut ffi::sqlite3_api_routines,
) -> c_int {
    let rc = unsafe { ogive_core::extension::init(db, pz_err_msg, p_api) };
    // A successful load proves a host of at least 3.31.0, whose table has malloc64,
    // realloc64 and free.
    #[cfg(feature = "sqlite-alloc")]
    if rc == ffi::SQLITE_OK {
        unsafe { alloc::install(p_api) };
    }
    rc
}

#[cfg(test)]
mod tests {
    use super::*;
    use std::ffi::CStr;

    extern "C" fn old_host_version() -> c_int {
        3_030_000
    }

    unsafe extern "C" {
        fn malloc(n: usize) -> *mut std::ffi::c_void;
        fn free(p: *mut std::ffi::c_void);
    }

    extern "C" fn host_malloc(n: c_int) -> *mut std::ffi::c_void {
        unsafe { malloc(n as usize) }
    }

    /// A host older than the minimum is refused with SQLITE_ERROR and a one-line message,
    /// without touching any other entry of its table (all other entries are NULL here).
    #[test]
    fn refuses_an_old_host_cleanly() {
        let mut api: ffi::sqlite3_api_routines = unsafe { std::mem::zeroed() };
        api.libversion_number = Some(old_host_version);
        api.malloc = Some(host_malloc);
        let mut msg: *mut c_char = std::ptr::null_mut();
        // Any non-null pointer will do for the database: a refused load never uses it.
        let db = std::ptr::NonNull::<ffi::sqlite3>::dangling().as_ptr();
        let rc = unsafe { sqlite3_ogive_init(db, &mut msg, &mut api) };
        assert_eq!(rc, ffi::SQLITE_ERROR);
        assert!(!msg.is_null());
        let text = unsafe { CStr::from_ptr(msg) }.to_str().unwrap().to_owned();
        unsafe { free(msg.cast()) };
        assert_eq!(
            text,
            "ogive needs SQLite 3.31.0 or newer; this host is SQLite 3.30.0"
        );
    }
}
