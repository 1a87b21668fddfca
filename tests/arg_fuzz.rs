//! The argument fuzzer's checks in the ordinary suite: a fixed, seeded set of generated
//! cases (the same decoder and checks as `fuzz/fuzz_targets/arg_calls.rs`, see
//! `fuzz/common/arg_calls.rs`) run without cargo-fuzz. Each case is a table of 0 to 50 rows
//! and a few random calls of registry functions; every error must name its function and
//! every other answer must lie in its row's documented range (`FunctionDef::range`).
//!
//! A failure prints the case's seed and the failing call; `OGIVE_ARG_FUZZ_CASES=N` runs
//! more cases (the default keeps a debug build well under 30 s), `OGIVE_ARG_FUZZ_FROM=S`
//! starts at seed S (`OGIVE_ARG_FUZZ_FROM=S OGIVE_ARG_FUZZ_CASES=1` replays one case).

#[path = "../fuzz/common/arg_calls.rs"]
mod arg_calls;

/// SplitMix64 (Steele, Lea and Flood 2014): the case bytes, reproducible from the seed.
fn bytes(seed: u64, len: usize) -> Vec<u8> {
    let mut state = seed.wrapping_mul(0x9E37_79B9_7F4A_7C15) ^ 0x5EED;
    let mut out = Vec::with_capacity(len + 8);
    while out.len() < len {
        state = state.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = state;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        out.extend_from_slice(&(z ^ (z >> 31)).to_le_bytes());
    }
    out.truncate(len);
    out
}

#[test]
fn seeded_random_calls_answer_in_range_or_name_the_function() {
    let cases: u64 = std::env::var("OGIVE_ARG_FUZZ_CASES")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(10_000);
    let from: u64 = std::env::var("OGIVE_ARG_FUZZ_FROM")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(0);
    let conn = arg_calls::connection();
    let mut failures = Vec::new();
    for seed in from..from + cases {
        let data = bytes(seed, 64 + (seed as usize * 7) % 448);
        if let Err(e) = arg_calls::run_case(&conn, &data) {
            failures.push(format!("seed {seed}: {e}"));
        }
    }
    assert!(
        failures.is_empty(),
        "{} of {cases} cases broke a rule:\n{}",
        failures.len(),
        failures.join("\n")
    );
}

/// Found by the fuzzer: an unknown family, alternative, method, metric, bandwidth or rule
/// echoed the whole TEXT argument (100 KB in, 100 KB of message out), control characters
/// included, and a NUL byte in it turned the error into SQLite's "constraint failed" (the
/// message could not be handed to SQLite). Echoes are now at most 40 characters, escaped.
#[test]
fn unknown_option_texts_are_echoed_short_and_printable() {
    let conn = arg_calls::connection();
    conn.execute_batch("CREATE TABLE v(x); INSERT INTO v VALUES (1), (2), (3), (5), (8);")
        .unwrap();
    let long = "9".repeat(100_000);
    let calls = [
        "SELECT dist_fit(x, ?1) FROM v",
        "SELECT dist_model(?1, '{}')",
        "SELECT dist_fit_to(dist_empirical(x), ?1) FROM v",
        "SELECT ks_test(x, x > 2, ?1) FROM v",
        "SELECT ks_test(x, x > 2, 'two-sided', ?1) FROM v",
        "SELECT dist_distance(dist_empirical(x), dist_empirical(x), ?1) FROM v",
        "SELECT dist_pdf(dist_empirical(x), 1, ?1) FROM v",
        "SELECT count(*) FROM dist_histogram((SELECT dist_empirical(x) FROM v), ?1)",
        "SELECT quantiles(x, ?1) FROM v",
    ];
    for sql in calls {
        let name = sql
            .trim_start_matches("SELECT ")
            .trim_start_matches("count(*) FROM ")
            .split('(')
            .next()
            .unwrap();
        for text in [long.as_str(), "a\0b", "line\nbreak"] {
            let e = conn
                .query_row(sql, [text], |r| {
                    r.get::<_, ogive::rusqlite::types::Value>(0)
                })
                .expect_err(sql);
            let m = e.to_string();
            assert!(m.starts_with(&format!("{name}: ")), "{sql}: {m}");
            assert!(m.len() < 400, "{sql}: {} bytes", m.len());
            assert!(!m.chars().any(char::is_control), "{sql}: {m:?}");
        }
    }
}
