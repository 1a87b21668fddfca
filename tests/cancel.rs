//! Long fits stop when the connection is interrupted (sqlite3_interrupt, which the shell's
//! Ctrl-C sends), with SQLite's interrupt error naming the function, instead of running
//! to the end (issue 15.3 and 17.2). The interrupt comes from another thread while the
//! fit runs; each query would take far longer than the test's wait uninterrupted (a
//! 16-component mixture over 300,000 distinct values; exact Kolmogorov-Smirnov p-values
//! near their size limits; a Turnbull estimate and a censored fit are quicker, so they
//! are only checked to complete or stop cleanly).

use std::time::Duration;

use rusqlite::Connection;

fn connection() -> Connection {
    let conn = Connection::open_in_memory().unwrap();
    ogive::sqlite::register(&conn).unwrap();
    conn.execute_batch(
        "CREATE TABLE t(x REAL);
         WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c WHERE i < 300000)
         INSERT INTO t SELECT i * 0.6180339887498949 - CAST(i * 0.6180339887498949 AS INTEGER)
             + (i % 7) FROM c;",
    )
    .unwrap();
    conn
}

/// Runs `sql` with an interrupt sent after `after`; the error text, or None when the
/// query finished first. The error must carry SQLite's interrupt code (what hosts such
/// as the shell, apsw and the sqlite3 CLI read as "cancelled").
fn interrupted(conn: &Connection, sql: &str, after: Duration) -> Option<String> {
    let handle = conn.get_interrupt_handle();
    let sender = std::thread::spawn(move || {
        std::thread::sleep(after);
        handle.interrupt();
    });
    let r: rusqlite::Result<Option<String>> = conn.query_row(sql, [], |row| row.get(0));
    sender.join().unwrap();
    let e = r.err()?;
    match &e {
        rusqlite::Error::SqliteFailure(f, _) => assert_eq!(
            f.code,
            rusqlite::ErrorCode::OperationInterrupted,
            "{sql}: {e}"
        ),
        other => panic!("{sql}: not an SQLite failure: {other:?}"),
    }
    Some(e.to_string())
}

/// Runs `sql` with an interrupt after 300 ms, then after twice as long each time the
/// interrupt came while SQLite itself was still reading rows (its own message,
/// "interrupted", before the function's long part began; seen on a loaded machine), up
/// to 10 s; the error text of the first run in which the function `name` stopped.
fn stopped_in(conn: &Connection, sql: &str, name: &str) -> String {
    let mut after = Duration::from_millis(300);
    loop {
        let e = interrupted(conn, sql, after)
            .unwrap_or_else(|| panic!("{sql} finished before an interrupt at {after:?}"));
        if e.contains(&format!("{name}: interrupted")) || after > Duration::from_secs(10) {
            return e;
        }
        after *= 2;
    }
}

#[test]
fn a_long_mixture_fit_stops_on_interrupt() {
    let conn = connection();
    let e = stopped_in(&conn, "SELECT dist_mixture(x, 16) FROM t", "dist_mixture");
    assert!(e.contains("dist_mixture: interrupted"), "{e}");
    // The connection works on afterwards, and so does the same fit on a small table.
    let k: i64 = conn
        .query_row(
            "SELECT dist_mixture(x, 2) ->> '$.k' FROM (SELECT x FROM t LIMIT 200)",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(k, 2);
}

#[test]
fn a_scalar_fit_of_a_stored_value_stops_on_interrupt() {
    let conn = connection();
    conn.execute_batch("CREATE TABLE d AS SELECT dist_empirical(x) AS d FROM t")
        .unwrap();
    let e = stopped_in(
        &conn,
        "SELECT dist_mixture_to(d, 16) FROM d",
        "dist_mixture_to",
    );
    assert!(e.contains("dist_mixture_to: interrupted"), "{e}");
}

/// A table function's rows: dist_curve's density over 300,000 values at 20,000 points is
/// a kernel sum per point (far longer than the wait in a debug build). The rows are made
/// one at a time, so the scan stops with SQLite's interrupt code: between rows SQLite's
/// own check stops it ("interrupted"), before a row ogive's ("dist_curve: interrupted";
/// src/catalogue/dist.rs tests that one alone).
#[test]
fn a_density_curve_stops_on_interrupt() {
    let conn = connection();
    conn.execute_batch("CREATE TABLE d AS SELECT dist_empirical(x) AS d FROM t")
        .unwrap();
    let e = interrupted(
        &conn,
        "SELECT count(*) FROM dist_curve((SELECT d FROM d), 0, 7, 20000)",
        Duration::from_millis(500),
    )
    .expect("the curve finished before the interrupt");
    assert!(
        e == "interrupted" || e.contains("dist_curve: interrupted"),
        "{e}"
    );
    // Without an interrupt the same scan answers (a short grid: 5 points).
    let n: i64 = conn
        .query_row(
            "SELECT count(*) FROM dist_curve((SELECT d FROM d), 0, 7, 5)",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(n, 5);
}

/// Exact p-values near their limits: the two-sample lattice walk over 63,000 + 63,000
/// values with D about 0.3 (2 s in a release build, far longer in a debug one), and the
/// one-sample Durbin matrix of order 995 (29,800 values against their normal fit). The
/// values are stored first, so the interrupt reaches the p-value, not the reading.
#[test]
fn exact_ks_p_values_stop_on_interrupt() {
    let conn = Connection::open_in_memory().unwrap();
    ogive::sqlite::register(&conn).unwrap();
    conn.execute_batch(
        "CREATE TABLE v AS
             WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c WHERE i < 126000)
             SELECT i, i * 0.6180339887 - CAST(i * 0.6180339887 AS INTEGER) AS u,
                 i * 0.41421356 - CAST(i * 0.41421356 AS INTEGER) AS w
             FROM c;
         CREATE TABLE two AS SELECT
             (SELECT dist_empirical(u) FROM v WHERE i % 2 = 0) AS a,
             (SELECT dist_empirical(u + 0.3) FROM v WHERE i % 2 = 1) AS b;
         CREATE TABLE one AS SELECT dist_empirical(u + w) AS d, dist_fit(u + w, 'normal') AS m
             FROM v WHERE i <= 29800;",
    )
    .unwrap();
    let e = stopped_in(
        &conn,
        "SELECT dist_ks(a, b, 'two-sided', 'exact') FROM two",
        "dist_ks",
    );
    assert!(e.contains("dist_ks: interrupted"), "{e}");
    let e = stopped_in(
        &conn,
        "SELECT dist_ks(d, m, 'two-sided', 'exact') FROM one",
        "dist_ks",
    );
    assert!(e.contains("dist_ks: interrupted"), "{e}");
    // Forced exact on a small pair still answers: 2 of the 6 splits of {1,2} vs {3,4}
    // reach D = 1 (enumeration).
    let p: f64 = conn
        .query_row(
            "SELECT dist_ks(dist_empirical(column1), dist_empirical(column2), 'two-sided',
                 'exact') ->> '$.p' FROM (VALUES (1, 3), (2, 4))",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert!((p - 1.0 / 3.0).abs() < 1e-15, "{p}");
}

#[test]
fn without_an_interrupt_nothing_is_cancelled() {
    let conn = connection();
    let n: i64 = conn
        .query_row(
            "SELECT dist_fit_censored(x + 1, x > 6.5, 'weibull') ->> '$.n_right' FROM t",
            [],
            |r| r.get(0),
        )
        .unwrap();
    let want: i64 = conn
        .query_row("SELECT count(*) FROM t WHERE x > 6.5", [], |r| r.get(0))
        .unwrap();
    assert_eq!(n, want);
}
