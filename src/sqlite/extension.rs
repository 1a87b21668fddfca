//! The body of the loadable extension's entry point, `sqlite3_ogive_init`.
//!
//! SQLite hands a loadable extension a table of function pointers
//! (`sqlite3_api_routines`) that grows at its end with each release. rusqlite's extension
//! layer is compiled against the newest table and refuses any host older than its
//! bindings; it would also read entries past the end of an older host's table. ogive
//! instead:
//!
//! 1. reads the host's version through `libversion_number`, an entry every SQLite has;
//! 2. refuses a host older than [`MIN_SQLITE_VERSION`] with a one-line message, returning
//!    `SQLITE_ERROR` so the host reports it and carries on;
//! 3. copies only the entries the host's table really has into a zero-filled table of the
//!    full size (entries the host lacks stay NULL, and rusqlite turns a call through a
//!    NULL entry into a caught panic, never a jump to garbage), and presents that table to
//!    rusqlite as current;
//! 4. registers every function, with any panic caught before it reaches the host.
//!
//! rusqlite's extension layer calls SQLite through one table per process, so one loaded
//! copy of the extension serves one SQLite library: a second library in the same process
//! (Python's `sqlite3` and apsw's own bundled SQLite, say) would have its calls sent to the
//! first library's code and crash the host. The first library to load the extension is
//! kept; another is refused with a message saying to load a copy of the file from another
//! directory (a separate copy has its own table), which the Python package's `ogive.load`
//! does by itself.
//!
//! The entries ogive calls (functions, aggregates, window functions, eponymous virtual
//! tables, values and results) all exist in [`MIN_SQLITE_VERSION`].

use std::ffi::{CString, c_char, c_int};
use std::mem::{offset_of, size_of};
use std::sync::Mutex;

use rusqlite::Connection;
use rusqlite::ffi::{self, sqlite3, sqlite3_api_routines};

/// The oldest SQLite ogive loads into: 3.31.0, the first with `SQLITE_INNOCUOUS`.
pub const MIN_SQLITE_VERSION: c_int = 3_031_000;

/// For each release that appended entries to the routines table, the byte offset where
/// those entries begin. A host older than the release has the table up to that offset.
/// From the "Version 3.x.y and later" markers of `sqlite3ext.h`. rusqlite's extension
/// bindings end with the 3.44.0 entries; a newer host's longer table is copied up to that
/// length.
const TABLE_GROWTH: &[(c_int, usize)] = &[
    (3_032_000, offset_of!(sqlite3_api_routines, create_filename)),
    (3_034_000, offset_of!(sqlite3_api_routines, txn_state)),
    (3_036_001, offset_of!(sqlite3_api_routines, changes64)),
    (
        3_037_000,
        offset_of!(sqlite3_api_routines, autovacuum_pages),
    ),
    (3_038_000, offset_of!(sqlite3_api_routines, error_offset)),
    (3_039_000, offset_of!(sqlite3_api_routines, deserialize)),
    (3_040_000, offset_of!(sqlite3_api_routines, value_encoding)),
    (3_041_000, offset_of!(sqlite3_api_routines, is_interrupted)),
    (3_043_000, offset_of!(sqlite3_api_routines, stmt_explain)),
    (3_044_000, offset_of!(sqlite3_api_routines, get_clientdata)),
];

/// How many bytes of the routines table a host of `version` provides.
fn table_len(version: c_int) -> usize {
    TABLE_GROWTH
        .iter()
        .find(|&&(since, _)| version < since)
        .map_or(size_of::<sqlite3_api_routines>(), |&(_, offset)| offset)
}

/// Formats a version number such as 3040001 as "3.40.1".
pub fn version_text(v: c_int) -> String {
    format!("{}.{}.{}", v / 1_000_000, (v / 1000) % 1000, v % 1000)
}

/// What rusqlite is told the host's version is, so that its check passes once the table
/// has been adapted.
extern "C" fn bindings_version() -> c_int {
    ffi::SQLITE_VERSION_NUMBER
}

/// The host's own version (its table's `libversion_number`, which the adapted table
/// replaces with the bindings' version): what [`crate::sqlite::host_version`] reports in
/// the loadable build, so that entries the host lacks (`is_interrupted` before 3.41.0)
/// are never called. 0 until the first load.
pub(crate) static HOST_VERSION: std::sync::atomic::AtomicI32 = std::sync::atomic::AtomicI32::new(0);

/// The routines table of the SQLite library that loaded the extension first (0 before
/// then): the only one this copy serves.
static FIRST_HOST: std::sync::atomic::AtomicUsize = std::sync::atomic::AtomicUsize::new(0);

/// The refusal of a second SQLite library in one process.
fn second_library(first: c_int, this: c_int) -> String {
    format!(
        "ogive is already loaded into another SQLite library in this process (SQLite {}; \
         this connection's is SQLite {}), and one copy of the extension serves one library: \
         load a copy of the file, from another directory and with the same name, into this \
         library's connections (in Python, ogive.load does this itself)",
        version_text(first),
        version_text(this)
    )
}

/// Adapted tables, one per distinct host table, kept for the life of the process
/// (rusqlite keeps pointers into them).
static ADAPTED: Mutex<Vec<(usize, usize)>> = Mutex::new(Vec::new());

/// A full-size copy of the host's table, with the missing tail zeroed.
unsafe fn adapt(p_api: *const sqlite3_api_routines, version: c_int) -> *mut sqlite3_api_routines {
    let mut cache = ADAPTED.lock().unwrap_or_else(|e| e.into_inner());
    if let Some(&(_, copy)) = cache.iter().find(|&&(src, _)| src == p_api as usize) {
        return copy as *mut sqlite3_api_routines;
    }
    let len = table_len(version);
    // SAFETY: sqlite3_api_routines is a struct of Option<fn> fields, for which all-zero
    // bytes are valid (None). The host's table is at least `len` bytes long, since `len`
    // is the offset of the first entry added after the host's release.
    let copy: &'static mut sqlite3_api_routines = unsafe {
        let table = Box::leak(Box::new(std::mem::zeroed::<sqlite3_api_routines>()));
        std::ptr::copy_nonoverlapping(
            p_api as *const u8,
            table as *mut sqlite3_api_routines as *mut u8,
            len,
        );
        table
    };
    copy.libversion_number = Some(bindings_version);
    cache.push((p_api as usize, copy as *mut sqlite3_api_routines as usize));
    copy
}

/// Writes `msg` to `*pz_err_msg` with the host's allocator, as SQLite expects.
unsafe fn report(pz_err_msg: *mut *mut c_char, p_api: *const sqlite3_api_routines, msg: &str) {
    if pz_err_msg.is_null() {
        return;
    }
    // SAFETY: p_api is the host's non-null table; `malloc` exists in every version.
    unsafe {
        let Some(malloc) = (*p_api).malloc else {
            return;
        };
        let Ok(c) = CString::new(msg) else { return };
        let bytes = c.as_bytes_with_nul();
        let buf = malloc(bytes.len() as c_int) as *mut u8;
        if !buf.is_null() {
            std::ptr::copy_nonoverlapping(bytes.as_ptr(), buf, bytes.len());
            *pz_err_msg = buf as *mut c_char;
        }
    }
}

fn init_connection(conn: Connection) -> rusqlite::Result<bool> {
    crate::sqlite::register(&conn)?;
    Ok(false)
}

/// The body of `sqlite3_ogive_init`.
///
/// # Safety
/// Must be called by SQLite's extension loader with its own arguments.
///
/// # Errors
/// Returns `SQLITE_ERROR` with a message in `*pz_err_msg` when the host is older than
/// [`MIN_SQLITE_VERSION`] or registration fails.
pub unsafe fn init(
    db: *mut sqlite3,
    pz_err_msg: *mut *mut c_char,
    p_api: *mut sqlite3_api_routines,
) -> c_int {
    if p_api.is_null() || db.is_null() {
        return ffi::SQLITE_ERROR;
    }
    let outcome = std::panic::catch_unwind(|| {
        // SAFETY: p_api is the host's table; libversion_number exists in every version.
        let version = match unsafe { (*p_api).libversion_number } {
            Some(f) => unsafe { f() },
            None => return ffi::SQLITE_ERROR,
        };
        if version < MIN_SQLITE_VERSION {
            let msg = format!(
                "ogive needs SQLite {} or newer; this host is SQLite {}",
                version_text(MIN_SQLITE_VERSION),
                version_text(version)
            );
            unsafe { report(pz_err_msg, p_api, &msg) };
            return ffi::SQLITE_ERROR;
        }
        use std::sync::atomic::Ordering::SeqCst;
        if let Err(first) = FIRST_HOST.compare_exchange(0, p_api as usize, SeqCst, SeqCst)
            && first != p_api as usize
        {
            let msg = second_library(HOST_VERSION.load(SeqCst), version);
            unsafe { report(pz_err_msg, p_api, &msg) };
            return ffi::SQLITE_ERROR;
        }
        HOST_VERSION.store(version, SeqCst);
        unsafe {
            let table = adapt(p_api, version);
            Connection::extension_init2(db, pz_err_msg, table, init_connection)
        }
    });
    match outcome {
        Ok(rc) => rc,
        Err(_) => {
            unsafe { report(pz_err_msg, p_api, "ogive: internal error while loading") };
            ffi::SQLITE_ERROR
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn table_lengths_follow_releases() {
        // Debian 12's 3.40.1 has everything before is_interrupted (added in 3.41.0).
        assert_eq!(
            table_len(3_040_001),
            offset_of!(sqlite3_api_routines, is_interrupted)
        );
        assert_eq!(
            table_len(3_031_000),
            offset_of!(sqlite3_api_routines, create_filename)
        );
        assert_eq!(
            table_len(ffi::SQLITE_VERSION_NUMBER),
            size_of::<sqlite3_api_routines>()
        );
        assert_eq!(version_text(3_040_001), "3.40.1");
    }

    #[test]
    fn a_second_library_is_told_what_to_do() {
        let m = second_library(3_040_001, 3_054_001);
        assert!(
            m.contains("(SQLite 3.40.1; this connection's is SQLite 3.54.1)"),
            "{m}"
        );
        assert!(
            m.contains("load a copy of the file, from another directory"),
            "{m}"
        );
    }
}
