//! Fuzzes the argument paths of every SQL function: the input decodes into a small table
//! and random calls of every registry row (scalar, aggregate, window form, table function)
//! with random arguments (NULL, extreme integers and reals, odd and long TEXT, made and
//! mutated BLOBs and model JSON), run through `ogive::register` on an in-memory SQLite.
//! A panic or abort is a finding (libFuzzer catches it), so is an input that runs past
//! `-timeout` (fuzz/run.sh sets it), and so is any answer that breaks the rules checked in
//! `fuzz/common/arg_calls.rs`: an error must start with the function's name and not be a
//! caught panic; any other answer must lie in its registry row's documented range.
//! `tests/arg_fuzz.rs` replays a seeded set of inputs through the same checks.

#![no_main]

#[path = "../common/arg_calls.rs"]
mod arg_calls;

use libfuzzer_sys::fuzz_target;
use ogive::rusqlite::Connection;

thread_local! {
    static CONN: Connection = arg_calls::connection();
}

fuzz_target!(|data: &[u8]| {
    CONN.with(|conn| {
        if let Err(finding) = arg_calls::run_case(conn, data) {
            panic!("{finding}");
        }
    });
});
