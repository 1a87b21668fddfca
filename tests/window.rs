//! `quantile` and `ecdf` as window functions against brute force: for every frame kind
//! SQLite accepts (ROWS, RANGE, GROUPS, with EXCLUDE, with and without PARTITION BY),
//! each row's window result must equal the plain aggregate evaluated by a correlated
//! subquery over exactly that row's frame, written out as a WHERE clause from the
//! definitions in SQLite's window-function documentation. The aggregate path (a vector
//! and selection, or plain counts) shares no code with the window path (an
//! order-statistic tree, removals), so agreement is a real check; equality is exact (bit
//! for bit, NULL for NULL). Data: seeded, with NULLs, heavy ties, and infinities.

use ogive::stats::rng::splitmix64;
use rusqlite::Connection;
use rusqlite::types::Value;

/// SplitMix64, for seeded test data.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        splitmix64(&mut self.0)
    }
    fn below(&mut self, n: u64) -> u64 {
        self.next() % n
    }
}

/// `t(id, g, o, x, w, rn, dr, rn_all, dr_all)`: three partitions of uneven size, an
/// order key `o` with ties, `x` with about 15% NULLs, ties (steps of 0.5) and a few
/// infinities, weights `w` with NULLs and zeros. `rn`/`dr` are the row number and peer
/// group number within the partition (ORDER BY o, id / o), `_all` over the whole table.
fn table(seed: u64) -> Connection {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    conn.execute_batch(
        "CREATE TABLE raw(id INTEGER PRIMARY KEY, g INTEGER, o INTEGER, x REAL, w REAL)",
    )
    .unwrap();
    let mut rng = Rng(seed);
    let mut insert = conn
        .prepare("INSERT INTO raw(id, g, o, x, w) VALUES (?, ?, ?, ?, ?)")
        .unwrap();
    for id in 0..160i64 {
        let g: i64 = [0, 0, 0, 1, 1, 2][rng.below(6) as usize];
        let o = rng.below(40) as i64;
        let x = match rng.below(40) {
            0..=5 => None,
            6 => Some(f64::INFINITY),
            7 => Some(f64::NEG_INFINITY),
            _ => Some((rng.below(21) as f64 - 10.0) * 0.5),
        };
        let w = match rng.below(10) {
            0 => None,
            1 => Some(0.0),
            _ => Some(rng.below(1000) as f64 / 7.0),
        };
        insert.execute(rusqlite::params![id, g, o, x, w]).unwrap();
    }
    drop(insert);
    conn.execute_batch(
        "CREATE TABLE t AS SELECT *,
            row_number() OVER (PARTITION BY g ORDER BY o, id) AS rn,
            dense_rank() OVER (PARTITION BY g ORDER BY o) AS dr,
            row_number() OVER (ORDER BY o, id) AS rn_all,
            dense_rank() OVER (ORDER BY o) AS dr_all
         FROM raw",
    )
    .unwrap();
    conn
}

/// A window clause (after PARTITION BY) and the same frame as a condition on `a` (the
/// frame's row) relative to `b` (the current row); `{rn}` and `{dr}` name the row and
/// group numbers for the partitioning in use.
const FRAMES: &[(&str, &str)] = &[
    (
        "ORDER BY o, id ROWS BETWEEN 4 PRECEDING AND CURRENT ROW",
        "a.{rn} BETWEEN b.{rn} - 4 AND b.{rn}",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN 2 PRECEDING AND 3 FOLLOWING",
        "a.{rn} BETWEEN b.{rn} - 2 AND b.{rn} + 3",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN 6 PRECEDING AND 2 PRECEDING",
        "a.{rn} BETWEEN b.{rn} - 6 AND b.{rn} - 2",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN 1 FOLLOWING AND 5 FOLLOWING",
        "a.{rn} BETWEEN b.{rn} + 1 AND b.{rn} + 5",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW",
        "a.{rn} <= b.{rn}",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN CURRENT ROW AND UNBOUNDED FOLLOWING",
        "a.{rn} >= b.{rn}",
    ),
    (
        "ORDER BY o, id ROWS BETWEEN 4 PRECEDING AND 4 FOLLOWING EXCLUDE CURRENT ROW",
        "a.{rn} BETWEEN b.{rn} - 4 AND b.{rn} + 4 AND a.id <> b.id",
    ),
    (
        "ORDER BY o RANGE BETWEEN 3 PRECEDING AND 1 FOLLOWING",
        "a.o BETWEEN b.o - 3 AND b.o + 1",
    ),
    (
        "ORDER BY o RANGE BETWEEN CURRENT ROW AND CURRENT ROW",
        "a.o = b.o",
    ),
    ("ORDER BY o", "a.o <= b.o"),
    (
        "ORDER BY o DESC RANGE BETWEEN 2 PRECEDING AND CURRENT ROW",
        "a.o BETWEEN b.o AND b.o + 2",
    ),
    (
        "ORDER BY o RANGE BETWEEN 2 PRECEDING AND 2 FOLLOWING EXCLUDE GROUP",
        "a.o BETWEEN b.o - 2 AND b.o + 2 AND a.o <> b.o",
    ),
    (
        "ORDER BY o GROUPS BETWEEN 2 PRECEDING AND 1 FOLLOWING",
        "a.{dr} BETWEEN b.{dr} - 2 AND b.{dr} + 1",
    ),
    (
        "ORDER BY o GROUPS BETWEEN 1 FOLLOWING AND 3 FOLLOWING",
        "a.{dr} BETWEEN b.{dr} + 1 AND b.{dr} + 3",
    ),
    (
        "ORDER BY o GROUPS BETWEEN 1 PRECEDING AND 1 FOLLOWING EXCLUDE TIES",
        "a.{dr} BETWEEN b.{dr} - 1 AND b.{dr} + 1 AND (a.o <> b.o OR a.id = b.id)",
    ),
    ("", "1"),
];

/// Runs `call OVER (partition frame)` and the brute-force subquery; returns the rows
/// that differ.
fn compare(conn: &Connection, call: &str, partitioned: bool, frame: (&str, &str)) -> Vec<String> {
    let (clause, cond) = frame;
    let (partition, same_partition, rn, dr) = if partitioned {
        ("PARTITION BY g", "a.g = b.g AND ", "rn", "dr")
    } else {
        ("", "", "rn_all", "dr_all")
    };
    let cond = cond.replace("{rn}", rn).replace("{dr}", dr);
    let windowed = format!("SELECT id, {call} OVER ({partition} {clause}) FROM t ORDER BY id");
    let args = call.replace("x,", "a.x,").replace("w)", "a.w)");
    let brute = format!(
        "SELECT b.id, (SELECT {args} FROM t AS a WHERE {same_partition}{cond}) FROM t AS b ORDER BY b.id"
    );
    let run = |sql: &str| -> Vec<(i64, Value)> {
        let mut stmt = conn.prepare(sql).unwrap_or_else(|e| panic!("{sql}: {e}"));
        stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
            .unwrap()
            .map(Result::unwrap)
            .collect()
    };
    let (got, want) = (run(&windowed), run(&brute));
    assert_eq!(got.len(), want.len());
    got.iter()
        .zip(&want)
        .filter(|((_, a), (_, b))| match (a, b) {
            (Value::Real(a), Value::Real(b)) => a.to_bits() != b.to_bits(),
            _ => a != b,
        })
        .map(|((id, a), (_, b))| format!("{windowed}\n  id {id}: window {a:?}, brute force {b:?}"))
        .collect()
}

fn check_calls(calls: &[String]) {
    let mut failures = Vec::new();
    let mut checked = 0;
    for seed in [1, 2] {
        let conn = table(seed);
        for call in calls {
            for partitioned in [true, false] {
                for &frame in FRAMES {
                    failures.extend(compare(&conn, call, partitioned, frame));
                    checked += 1;
                }
            }
        }
    }
    assert!(
        failures.is_empty(),
        "{} rows differ over {checked} queries; the first:\n{}",
        failures.len(),
        failures[..failures.len().min(10)].join("\n")
    );
}

#[test]
fn quantile_window_equals_brute_force() {
    // Every Hyndman-Fan type at least once, the edges p = 0 and 1, and the default type.
    let cases = [
        (7, 0.5),
        (7, 0.9),
        (7, 0.0),
        (7, 1.0),
        (1, 0.25),
        (2, 0.5),
        (3, 0.5),
        (4, 0.7),
        (5, 0.1),
        (6, 0.95),
        (8, 1.0 / 3.0),
        (9, 0.66),
    ];
    let mut calls: Vec<String> = cases
        .iter()
        .map(|(ty, p)| format!("quantile(x, {p:?}, {ty})"))
        .collect();
    calls.push("quantile(x, 0.25)".to_string());
    check_calls(&calls);
}

#[test]
fn ecdf_window_equals_brute_force() {
    let calls: Vec<String> = ["-2.5", "0", "1.5", "1e308"]
        .iter()
        .flat_map(|t| [format!("ecdf(x, {t})"), format!("ecdf(x, {t}, w)")])
        .collect();
    check_calls(&calls);
}

#[test]
fn empty_frames_and_all_null_frames_are_null() {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    let got: Vec<(Option<f64>, Option<f64>)> = conn
        .prepare(
            "SELECT quantile(column2, 0.5) OVER w, ecdf(column2, 2) OVER w
             FROM (VALUES (1, NULL), (2, NULL), (3, 4.0), (4, NULL), (5, NULL))
             WINDOW w AS (ORDER BY column1 ROWS BETWEEN 1 PRECEDING AND CURRENT ROW)",
        )
        .unwrap()
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    // Frames: {1}, {1,2}, {2,3}, {3,4}, {4,5}: only the third and fourth hold a value.
    assert_eq!(
        got,
        vec![
            (None, None),
            (None, None),
            (Some(4.0), Some(0.0)),
            (Some(4.0), Some(0.0)),
            (None, None)
        ]
    );
}

#[test]
fn window_errors_are_named() {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    // The error may come at any row: read them all.
    let err = |sql: &str| {
        let mut stmt = conn.prepare(sql).unwrap();
        stmt.query_map([], |r| r.get::<_, Value>(0))
            .unwrap()
            .collect::<Result<Vec<_>, _>>()
            .unwrap_err()
            .to_string()
    };
    assert!(
        err("SELECT quantile(column1, column1 / 10.0) OVER (ORDER BY column1) FROM (VALUES (1), (2))")
            .starts_with("quantile: p must be the same on every row of a group")
    );
    assert!(
        err("SELECT quantile(column1, 2) OVER (ORDER BY column1) FROM (VALUES (1), (2))")
            .starts_with("quantile: p must be between 0 and 1, got 2")
    );
    assert!(
        err("SELECT ecdf(column1, 0, -1) OVER (ROWS 1 PRECEDING) FROM (VALUES (1), (2))")
            .starts_with("ecdf: weights must be finite and >= 0, got -1")
    );
}
