//! The same functions on DataFusion as in SQLite: seeded readings split over several
//! Parquet files give bit-identical results in SQLite and in DataFusion with 1, 2 and 8
//! target partitions (the sketch: within its stated rank error), and bad input gives the
//! same message. Reference: ogive's own SQLite adapter, itself checked against numpy,
//! scipy and statsmodels in tests/python.
#![cfg(feature = "datafusion")]

mod seeded;

use std::path::Path;

use datafusion::prelude::{ParquetReadOptions, SessionConfig, SessionContext};
use ogive::catalogue::value::Out;
use seeded::{EXACT, fusion_rows, readings, same, sqlite, sqlite_rows, tempdir, write_parquet};

async fn session(dir: &Path, partitions: usize) -> SessionContext {
    let mut ctx =
        SessionContext::new_with_config(SessionConfig::new().with_target_partitions(partitions));
    ogive::datafusion::register(&mut ctx).unwrap();
    ctx.register_parquet("t", dir.to_str().unwrap(), ParquetReadOptions::default())
        .await
        .unwrap();
    ctx
}

/// The seeded readings as Parquet files in a new folder `name`, in SQLite, and a runtime
/// and a 2-partition session over the files.
fn on_two_partitions(
    name: &str,
) -> (
    std::path::PathBuf,
    rusqlite::Connection,
    tokio::runtime::Runtime,
    SessionContext,
) {
    let rows = readings();
    let dir = tempdir(name);
    write_parquet(&dir, &rows);
    let conn = sqlite(&rows);
    let rt = tokio::runtime::Runtime::new().unwrap();
    let ctx = rt.block_on(session(&dir, 2));
    (dir, conn, rt, ctx)
}

#[test]
fn exact_functions_agree_bit_for_bit_with_sqlite_at_1_2_and_8_partitions() {
    let rows = readings();
    let dir = tempdir("exact");
    write_parquet(&dir, &rows);
    let conn = sqlite(&rows);
    let rt = tokio::runtime::Runtime::new().unwrap();
    for partitions in [1, 2, 8] {
        let ctx = rt.block_on(session(&dir, partitions));
        for sql in EXACT {
            let want = sqlite_rows(&conn, sql).unwrap_or_else(|e| panic!("SQLite: {sql}: {e}"));
            let got = rt
                .block_on(fusion_rows(&ctx, sql))
                .unwrap_or_else(|e| panic!("DataFusion ({partitions}): {sql}: {e}"));
            assert!(!want.is_empty(), "{sql} gave no rows");
            assert_eq!(want.len(), got.len(), "{partitions} partitions: {sql}");
            for (w, g) in want.iter().zip(&got) {
                assert!(
                    w.len() == g.len() && w.iter().zip(g).all(|(a, b)| same(a, b)),
                    "{partitions} partitions: {sql}\n SQLite:     {w:?}\n DataFusion: {g:?}"
                );
            }
        }
    }
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn the_sketch_keeps_its_rank_error_over_partitions() {
    // quantile_sketch merges in the engine's order, so its answer may differ from
    // SQLite's; its rank error stays within epsilon n (the sketch's stated bound).
    let rows = readings();
    let dir = tempdir("sketch");
    write_parquet(&dir, &rows);
    let mut xs: Vec<f64> = rows.iter().map(|r| r.2).collect();
    xs.sort_by(f64::total_cmp);
    let n = xs.len() as f64;
    let rt = tokio::runtime::Runtime::new().unwrap();
    for partitions in [1, 2, 8] {
        let ctx = rt.block_on(session(&dir, partitions));
        for p in [0.1, 0.5, 0.9] {
            let sql = format!("SELECT sketch_quantile(quantile_sketch(x, 0.01), {p}) FROM t");
            let got = rt.block_on(fusion_rows(&ctx, &sql)).unwrap();
            let Out::Real(q) = got[0][0] else {
                panic!("{got:?}")
            };
            let below = xs.partition_point(|&v| v < q) as f64;
            let at_or_below = xs.partition_point(|&v| v <= q) as f64;
            let target = p * n;
            let tol = 0.01 * n;
            assert!(
                below - tol <= target && target <= at_or_below + tol,
                "{partitions} partitions, p {p}: {q} has ranks {below}..{at_or_below}, want {target} +- {tol}"
            );
        }
    }
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn bad_input_gives_the_same_message_as_sqlite() {
    let (dir, conn, rt, ctx) = on_two_partitions("errors");
    for sql in [
        "SELECT quantile(x, 1.5) FROM t",
        "SELECT ecdf(x, 'abc') FROM t",
        "SELECT dist_cdf(X'00010203', 1.0)",
        "SELECT dist_fit(x, 'cauchy') FROM t",
        "SELECT dist_mixture(x, 40) FROM t",
        "SELECT dist_quantile('{\"family\": \"normal\", \"mean\": 0}', 0.5)",
    ] {
        let want = sqlite_rows(&conn, sql).expect_err(sql);
        let got = rt.block_on(fusion_rows(&ctx, sql)).expect_err(sql);
        assert!(
            got.contains(&want),
            "{sql}\n SQLite:     {want}\n DataFusion: {got}"
        );
    }
    // A missing file is DataFusion's own error, not a panic.
    let missing = rt.block_on(async {
        let ctx = SessionContext::new();
        ctx.register_parquet(
            "m",
            "/nonexistent/ogive/none.parquet",
            ParquetReadOptions::default(),
        )
        .await
    });
    assert!(missing.is_err());
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn a_batch_at_once_skips_null_and_nan_and_checks_the_constant_on_every_row() {
    // The adapter reads a REAL column's batch at once when the group's constant holds on
    // every row (with GROUP BY: a REAL column's doubles, and a constant the same on every
    // row); NULL and NaN (which SQLite stores as NULL) are skipped as row by row.
    // Reference: the same values in SQLite, NaN written as NULL there.
    let conn = rusqlite::Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    let rt = tokio::runtime::Runtime::new().unwrap();
    let mut ctx = SessionContext::new();
    ogive::datafusion::register(&mut ctx).unwrap();
    // The NaN comes after its group's first row, so that the lane takes it.
    let lite = "(SELECT column1 AS x, column2 AS g FROM (VALUES (1.0, 1), (3.0, 2), (NULL, 1), \
                (NULL, 2), (2.5, 1), (5.0, 2), (2.0, 1)))";
    let fusion = "(SELECT column1 AS x, column2 AS g FROM (VALUES (1.0, 1), (3.0, 2), (NULL, 1), \
                  (CAST('NaN' AS DOUBLE), 2), (2.5, 1), (5.0, 2), (2.0, 1)))";
    // Each also with GROUP BY, where one state per group takes the batch's rows.
    let grouped = " GROUP BY g ORDER BY g";
    for (select, end) in [
        ("SELECT quantile(x, 0.5), ecdf(x, 2.5), median(x) FROM", ""),
        (
            "SELECT g, quantile(x, 0.5), ecdf(x, 2.5), median(x) FROM",
            grouped,
        ),
        (
            "SELECT sketch_quantile(quantile_sketch(x), 0.5), sketch_cdf(quantile_sketch(x, 0.01), 2.5) FROM",
            "",
        ),
        (
            "SELECT g, sketch_quantile(quantile_sketch(x), 0.5), sketch_cdf(quantile_sketch(x, 0.01), 2.5) FROM",
            grouped,
        ),
        // A constant that is a column, equal on every row: still one group constant.
        (
            "SELECT ecdf(x, CASE WHEN x > 2 THEN 2.5 ELSE 2.5 END), \
             quantile(x, CASE WHEN x IS NULL THEN 0.5 ELSE 0.5 END) FROM",
            "",
        ),
        // One constant per group, different between groups.
        (
            "SELECT g, ecdf(x, CASE WHEN g = 1 THEN 2.5 ELSE 3.0 END), \
             quantile(x, CASE WHEN g = 1 THEN 0.5 ELSE 0.25 END) FROM",
            grouped,
        ),
        ("SELECT ecdf(x, x) FROM", ""),
        ("SELECT g, ecdf(x, x) FROM", grouped),
    ] {
        let want = sqlite_rows(&conn, &format!("{select} {lite}{end}"));
        let got = rt.block_on(fusion_rows(&ctx, &format!("{select} {fusion}{end}")));
        match (&want, &got) {
            (Ok(w), Ok(g)) => assert!(
                w.len() == g.len()
                    && w.iter()
                        .zip(g)
                        .all(|(a, b)| a.iter().zip(b).all(|(a, b)| same(a, b))),
                "{select}\n SQLite:     {w:?}\n DataFusion: {g:?}"
            ),
            (Err(w), Err(g)) => assert!(g.contains(w.as_str()), "{select}\n{w}\n{g}"),
            _ => panic!("{select}\n SQLite:     {want:?}\n DataFusion: {got:?}"),
        }
    }
}

#[test]
fn table_functions_take_a_subquery_and_refuse_what_they_cannot_read() {
    let (dir, conn, rt, ctx) = on_two_partitions("subquery");
    // An uncorrelated subquery is run while the query is planned: the same rows as SQLite
    // (also in EXACT, at 1, 2 and 8 partitions); none of its rows reads as NULL.
    for sql in [
        "SELECT x, cdf FROM dist_steps((SELECT dist_empirical(x) FROM t WHERE g = 1)) ORDER BY x",
        "SELECT count(*) FROM dist_steps((SELECT dist_empirical(x) FROM t WHERE g < 0))",
    ] {
        let want = sqlite_rows(&conn, sql).unwrap();
        let got = rt.block_on(fusion_rows(&ctx, sql)).unwrap();
        assert_eq!(want.len(), got.len(), "{sql}");
        for (w, g) in want.iter().zip(&got) {
            assert!(
                w.iter().zip(g).all(|(a, b)| same(a, b)),
                "{sql}\n{w:?}\n{g:?}"
            );
        }
    }
    // A value of the wrong type from a subquery: SQLite's message.
    let sql = "SELECT * FROM dist_steps((SELECT 1))";
    let want = sqlite_rows(&conn, sql).unwrap_err();
    let got = rt.block_on(fusion_rows(&ctx, sql)).unwrap_err();
    assert!(got.contains(&want), "SQLite: {want}\nDataFusion: {got}");
    // What only DataFusion refuses: ogive's errors name the function and say what to
    // write; DataFusion's planner refuses a subquery of two columns itself.
    for (sql, says) in [
        (
            "SELECT * FROM dist_steps((SELECT dist_empirical(x) FROM t GROUP BY g))",
            "dist_steps: argument 1 (d) is a subquery that gave 7 rows; it must give one value",
        ),
        (
            "SELECT * FROM dist_steps((SELECT dist_empirical(x), 1 FROM t))",
            "The subquery should only return one column",
        ),
        (
            "SELECT g, (SELECT count(*) FROM dist_steps((SELECT a.d))) \
             FROM (SELECT g, dist_empirical(x) AS d FROM t GROUP BY g) AS a",
            "dist_steps: argument 1 (d) is a subquery that reads the outer query's columns",
        ),
        (
            "SELECT * FROM dist_steps(EXISTS (SELECT 1 FROM t))",
            "dist_steps: argument 1 (d) must be a constant or an uncorrelated subquery",
        ),
    ] {
        let e = rt.block_on(fusion_rows(&ctx, sql)).unwrap_err();
        assert!(e.contains(says), "{sql}: {e}");
    }
    // A column of another table in the same FROM (no lateral table functions): the same
    // error, which says what to write instead.
    let e = rt
        .block_on(fusion_rows(
            &ctx,
            "SELECT s.x FROM (SELECT dist_empirical(x) AS d FROM t) AS a, dist_steps(a.d) AS s",
        ))
        .unwrap_err();
    assert!(
        e.contains("dist_steps: argument 1 (d) must be a constant or an uncorrelated subquery")
            && e.contains("pass the value as a literal or as (SELECT ...)"),
        "{e}"
    );
    std::fs::remove_dir_all(&dir).ok();
}
