//! `ogive run` under a memory limit (`ulimit -v`): a statement whose function or result
//! outgrows memory fails with a message (naming the function, saying memory ran out) and
//! exit status 1, instead of aborting (Rust's default out-of-memory handler gives SIGABRT,
//! exit 134 from a shell).

use std::process::Command;

/// 300 MB of address space: the shell (bundled SQLite, debug build) starts in well under
/// that, and 30 million values cannot fit.
const LIMIT_KB: u64 = 300_000;

/// The integers 1..=30000000 as `s(value)` (the bundled SQLite has no generate_series).
const SERIES: &str = "WITH RECURSIVE s(value) AS (SELECT 1 UNION ALL SELECT value + 1 FROM s WHERE value < 30000000)";

fn run_limited(sql: &str) -> (Option<i32>, String) {
    let dir = std::env::temp_dir().join(format!("ogive-oom-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let file = dir.join(format!("q{}.sql", sql.len()));
    std::fs::write(&file, format!("{SERIES} {sql};\n")).unwrap();
    let out = Command::new("bash")
        .arg("-c")
        .arg(format!("ulimit -v {LIMIT_KB}; exec \"$0\" run \"$1\""))
        .arg(env!("CARGO_BIN_EXE_ogive"))
        .arg(&file)
        .output()
        .unwrap();
    let _ = std::fs::remove_file(&file);
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn functions_that_outgrow_memory_fail_their_statement() {
    for (name, sql) in [
        (
            "dist_empirical",
            "SELECT length(dist_empirical(value)) FROM s",
        ),
        ("quantile", "SELECT quantile(value, 0.5) FROM s"),
        ("profile", "SELECT profile(value) FROM s"),
        ("dist_fit", "SELECT dist_fit(value, 'normal') FROM s"),
    ] {
        let (code, stderr) = run_limited(sql);
        assert_eq!(code, Some(1), "{name}: {stderr}");
        assert!(
            stderr.contains(&format!("{name}: ran out of memory")),
            "{name}: {stderr}"
        );
    }
}

#[test]
fn a_result_too_large_to_hold_is_an_error() {
    let (code, stderr) = run_limited("SELECT value FROM s");
    assert_eq!(code, Some(1), "{stderr}");
    assert!(
        stderr.contains("out of memory holding the result"),
        "{stderr}"
    );
}
