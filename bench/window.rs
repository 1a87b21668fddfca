//! Rolling quantiles and sketch memory, measured (not a test: timings never enter the
//! test suite). Run with
//!
//! ```sh
//! cargo bench --bench window            # writes its report to standard output
//! ```
//!
//! 1. A rolling quantile, `quantile(x, 0.95) OVER (ORDER BY id ROWS BETWEEN w-1 PRECEDING
//!    AND CURRENT ROW)`, over 1,000,000 rows for w = 100, 1,000 and 10,000, against the
//!    same query with a window function that re-sorts every frame (what a naive
//!    implementation does). The re-sort baseline is run on fewer rows and its per-row
//!    cost extrapolated to 1,000,000 rows; both results are compared row by row on the
//!    small run. `sum(x) OVER` the same frame gives the cost of SQLite's window machinery
//!    alone.
//! 2. The same rolling quantile on the kernel alone (no SQLite): the order-statistic tree
//!    sliding over 1,000,000 values for w = 100 .. 100,000, against sorting each frame.
//!    Without SQLite's per-row cost this shows the O(log w) growth plainly.
//! 3. The plain aggregate `quantile(x, 0.5)` over 1,000,000 rows (selection, O(n)).
//! 4. Memory of `quantile_sketch` at the default epsilon for n = 10^4 .. 10^8 (the Rust
//!    kernel, the same code the SQL aggregate runs), with the proven bound beside it.

use std::time::Instant;

use ogive::catalogue::args::{fail, number};
use ogive::rusqlite::functions::{Aggregate, Context, FunctionFlags, WindowAggregate};
use ogive::rusqlite::{Connection, params};
use ogive::sqlite::{arg, to_sqlite};
use ogive::stats::order::OrderStatistics;
use ogive::stats::quantile::{QuantileType, quantile_ranked, quantile_sorted};
use ogive::stats::rng::splitmix64;
use ogive::stats::sketch::{DEFAULT_EPSILON, QuantileSketch, max_retained};
use ogive::value::sketch::encode;

const ROWS: usize = 1_000_000;

/// The naive rolling quantile: keeps the frame's values in a vector and sorts a copy of
/// the whole frame for every row.
struct Resort;

impl Aggregate<Vec<f64>, Option<f64>> for Resort {
    fn init(&self, _: &mut Context<'_>) -> ogive::rusqlite::Result<Vec<f64>> {
        Ok(Vec::new())
    }
    fn step(&self, ctx: &mut Context<'_>, xs: &mut Vec<f64>) -> ogive::rusqlite::Result<()> {
        if let Some(x) =
            number(arg(ctx.get_raw(0)), "x").map_err(|e| to_sqlite(fail("resort", e)))?
        {
            xs.push(x);
        }
        Ok(())
    }
    fn finalize(
        &self,
        _: &mut Context<'_>,
        xs: Option<Vec<f64>>,
    ) -> ogive::rusqlite::Result<Option<f64>> {
        Ok(xs.and_then(|xs| resorted(&xs)))
    }
}

fn resorted(xs: &[f64]) -> Option<f64> {
    let mut frame = xs.to_vec();
    frame.sort_unstable_by(f64::total_cmp);
    quantile_sorted(&frame, 0.95, QuantileType::DEFAULT)
        .ok()
        .flatten()
}

impl WindowAggregate<Vec<f64>, Option<f64>> for Resort {
    fn value(&self, xs: Option<&mut Vec<f64>>) -> ogive::rusqlite::Result<Option<f64>> {
        Ok(xs.and_then(|xs| resorted(xs)))
    }
    fn inverse(&self, ctx: &mut Context<'_>, xs: &mut Vec<f64>) -> ogive::rusqlite::Result<()> {
        if let Some(x) =
            number(arg(ctx.get_raw(0)), "x").map_err(|e| to_sqlite(fail("resort", e)))?
            && let Some(i) = xs.iter().position(|&y| y == x)
        {
            xs.remove(i);
        }
        Ok(())
    }
}

/// A cargo temperature in degC, unrounded: every value distinct, the worst case for the
/// order-statistic tree (a sensor's 0.1 degC resolution would leave a few hundred
/// distinct values and a tree of that size, whatever w is).
fn reading(state: &mut u64) -> f64 {
    let u = |s: &mut u64| (splitmix64(s) >> 11) as f64 / (1u64 << 53) as f64;
    let steady = 3.0 + 2.0 * (u(state) + u(state) + u(state) - 1.5);
    let door = if u(state) < 0.03 { 6.0 * u(state) } else { 0.0 };
    steady + door
}

fn database(rows: usize) -> Connection {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    conn.create_window_function(
        "resort_quantile",
        1,
        FunctionFlags::SQLITE_UTF8 | FunctionFlags::SQLITE_DETERMINISTIC,
        Resort,
    )
    .unwrap();
    conn.execute_batch("CREATE TABLE t(id INTEGER PRIMARY KEY, x REAL); BEGIN")
        .unwrap();
    let mut state = 20_261_202;
    {
        let mut insert = conn.prepare("INSERT INTO t VALUES (?, ?)").unwrap();
        for i in 0..rows {
            insert
                .execute(params![i as i64, reading(&mut state)])
                .unwrap();
        }
    }
    conn.execute_batch("COMMIT").unwrap();
    conn
}

/// Runs a query returning one value per row; returns (seconds, values).
fn rolling(conn: &Connection, call: &str, w: usize) -> (f64, Vec<Option<f64>>) {
    let sql = format!(
        "SELECT {call} OVER (ORDER BY id ROWS BETWEEN {} PRECEDING AND CURRENT ROW) FROM t",
        w - 1
    );
    let start = Instant::now();
    let mut stmt = conn.prepare(&sql).unwrap();
    let out: Vec<Option<f64>> = stmt
        .query_map([], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect();
    (start.elapsed().as_secs_f64(), out)
}

/// The median of five runs, in seconds.
fn median5(mut f: impl FnMut() -> f64) -> f64 {
    let mut t = [f(), f(), f(), f(), f()];
    t.sort_by(f64::total_cmp);
    t[2]
}

/// The kernel's rolling 0.95-quantile over `xs` with frames of `w` values: insert the new
/// value, remove the one leaving, look up the order statistics. Returns (seconds, the
/// result for every row).
fn kernel_tree(xs: &[f64], w: usize) -> (f64, Vec<f64>) {
    let start = Instant::now();
    let mut tree = OrderStatistics::new();
    let mut out = Vec::with_capacity(xs.len());
    for (i, &x) in xs.iter().enumerate() {
        tree.insert(x).unwrap();
        if i >= w {
            tree.remove(xs[i - w]).unwrap();
        }
        let q = quantile_ranked(tree.len() as usize, 0.95, QuantileType::DEFAULT, |k| {
            tree.kth(k as u64).unwrap()
        });
        out.push(q.unwrap().unwrap());
    }
    (start.elapsed().as_secs_f64(), out)
}

/// The same by copying and sorting each frame, for `rows` rows whose frames are full
/// (rows w-1 .. w-1+rows). Returns (seconds, results).
fn kernel_resort(xs: &[f64], w: usize, rows: usize) -> (f64, Vec<f64>) {
    let start = Instant::now();
    let out = (w - 1..w - 1 + rows)
        .map(|i| resorted(&xs[i + 1 - w..=i]).unwrap())
        .collect();
    (start.elapsed().as_secs_f64(), out)
}

fn main() {
    println!(
        "Data: seeded invented cargo temperatures, all distinct (see `reading`). Medians of 5 runs \
         unless noted; the machine is shared, so timings carry noise of tens of percent.\n"
    );
    println!(
        "## Rolling quantile: quantile(x, 0.95) OVER (ORDER BY id ROWS BETWEEN w-1 PRECEDING AND CURRENT ROW)\n"
    );
    let big = database(ROWS);
    println!(
        "| w | rows | ogive quantile, s | ns per row | sum(x) OVER (SQLite floor), s | ogive minus floor, ns per row |"
    );
    println!("|---|---|---|---|---|---|");
    let mut per_row = Vec::new();
    for w in [100, 1_000, 10_000] {
        let ours = median5(|| rolling(&big, "quantile(x, 0.95)", w).0);
        let floor = median5(|| rolling(&big, "sum(x)", w).0);
        let ns = |s: f64| s * 1e9 / ROWS as f64;
        println!(
            "| {w} | {ROWS} | {ours:.3} | {:.0} | {floor:.3} | {:.0} |",
            ns(ours),
            ns(ours - floor)
        );
        per_row.push((w, ns(ours - floor)));
    }
    println!();
    for pair in per_row.windows(2) {
        let ((w0, a), (w1, b)) = (pair[0], pair[1]);
        println!(
            "- w {w0} -> {w1}: per-row cost (above the floor) x{:.2}; log2(w) x{:.2}; w x{}",
            b / a,
            (w1 as f64).log2() / (w0 as f64).log2(),
            w1 / w0
        );
    }

    println!("\n## Against re-sorting each frame (run on fewer rows, extrapolated to {ROWS})\n");
    println!(
        "The re-sort time per row is (T(n2) - T(n1)) / (n2 - n1) with n1 >= w, so every row counted has a full frame; both runs' results are compared with ogive's on the same rows.\n"
    );
    println!(
        "| w | rows run (n1, n2) | re-sort ns per row | re-sort extrapolated to 1,000,000 rows, s | ogive on 1,000,000 rows, s | speed-up | results equal |"
    );
    println!("|---|---|---|---|---|---|---|");
    for (w, n1, n2) in [
        (100, 20_000, 120_000),
        (1_000, 5_000, 25_000),
        (10_000, 10_000, 14_000),
    ] {
        let mut t = [0.0; 2];
        let mut equal = true;
        for (slot, rows) in [n1, n2].into_iter().enumerate() {
            let small = database(rows);
            let (secs, a) = rolling(&small, "resort_quantile(x)", w);
            let (_, b) = rolling(&small, "quantile(x, 0.95)", w);
            t[slot] = secs;
            equal &= a == b;
        }
        let per = (t[1] - t[0]) / (n2 - n1) as f64;
        let ours = median5(|| rolling(&big, "quantile(x, 0.95)", w).0);
        println!(
            "| {w} | {n1}, {n2} | {:.0} | {:.1} | {ours:.3} | {:.0}x | {equal} |",
            per * 1e9,
            per * ROWS as f64,
            per * ROWS as f64 / ours
        );
    }

    println!("\n## The kernel alone: a rolling 0.95-quantile over {ROWS} values, no SQLite\n");
    println!(
        "| w | tree, ns per row | tree ns per row / log2(w) | re-sort, rows run | re-sort, ns per row | speed-up | same results |"
    );
    println!("|---|---|---|---|---|---|---|");
    let mut state = 99;
    let xs: Vec<f64> = (0..ROWS).map(|_| reading(&mut state)).collect();
    for (w, resort_rows) in [
        (100, 100_000),
        (1_000, 20_000),
        (10_000, 3_000),
        (100_000, 300),
    ] {
        let tree = median5(|| kernel_tree(&xs, w).0) * 1e9 / ROWS as f64;
        let (t_resort, a) = kernel_resort(&xs, w, resort_rows);
        let (_, b) = kernel_tree(&xs[..w - 1 + resort_rows], w);
        let resort = t_resort * 1e9 / resort_rows as f64;
        println!(
            "| {w} | {tree:.0} | {:.1} | {resort_rows} | {resort:.0} | {:.0}x | {} |",
            tree / (w as f64).log2(),
            resort / tree,
            a[..] == b[w - 1..]
        );
    }

    println!("\n## Plain aggregate (selection, O(n)) over {ROWS} rows\n");
    let aggregate = |sql: &str| {
        median5(|| {
            let start = Instant::now();
            let _: f64 = big.query_row(sql, [], |r| r.get(0)).unwrap();
            start.elapsed().as_secs_f64()
        })
    };
    let t = aggregate("SELECT quantile(x, 0.5) FROM t");
    let floor = aggregate("SELECT avg(x) FROM t");
    println!("- quantile(x, 0.5): {t:.3} s; avg(x) over the same rows: {floor:.3} s");

    println!("\n## quantile_sketch memory at the default epsilon {DEFAULT_EPSILON}\n");
    println!(
        "| n | kept values | BLOB bytes | proven bound on kept values | instance error bound | insert ns per value |"
    );
    println!("|---|---|---|---|---|---|");
    let mut state = 7;
    let mut s = QuantileSketch::new(DEFAULT_EPSILON).unwrap();
    let mut n = 0u64;
    let mut elapsed = 0.0;
    for target in [10_000u64, 100_000, 1_000_000, 10_000_000, 100_000_000] {
        let start = Instant::now();
        while n < target {
            s.insert(reading(&mut state)).unwrap();
            n += 1;
        }
        elapsed += start.elapsed().as_secs_f64();
        let bytes = encode(&s).map_or(0, |b| b.len());
        println!(
            "| {target} | {} | {bytes} | {} | {:.5} | {:.0} |",
            s.retained(),
            max_retained(s.k(), target),
            s.instance_error_bound(),
            elapsed * 1e9 / n as f64
        );
    }
}
