//! ogive on DataFusion, side by side with ogive in SQLite and with DataFusion's own
//! `median` and `approx_percentile_cont`: one run over 10M rows in 8 Parquet files.
//! A measurement, not a test: `cargo bench --features datafusion --bench fusion`
//! writes bench/fusion.md. Words after `--` pick cases by a part of their label
//! (`-- quantile ks`): such a run skips SQLite and the built-in table, prints its
//! timings and writes no file.

use std::fmt::Write as _;
use std::path::Path;
use std::sync::Arc;
use std::time::Instant;

use datafusion::arrow::array::{ArrayRef, Float64Array, Int64Array, RecordBatch};
use datafusion::arrow::datatypes::{DataType, Field, Schema};
use datafusion::parquet::arrow::ArrowWriter;
use datafusion::prelude::{ParquetReadOptions, SessionConfig, SessionContext};
use ogive::catalogue::value::Out;
use ogive::stats::rng::Xoshiro256pp;

const ROWS: usize = 10_000_000;
const FILES: usize = 8;
const GROUPS: i64 = 1_000;
/// Runs per cell; the tables show medians. The engines run in turns within a round, so
/// that the machine's state is shared alike.
const RUNS: usize = 9;

/// The median of a few timings.
fn median(mut v: Vec<f64>) -> f64 {
    v.sort_by(f64::total_cmp);
    let m = v.len() / 2;
    if v.len() % 2 == 1 {
        v[m]
    } else {
        0.5 * (v[m - 1] + v[m])
    }
}

fn data() -> (Vec<i64>, Vec<f64>) {
    let mut rng = Xoshiro256pp::new(13);
    let g = (0..ROWS)
        .map(|_| (rng.next_u64() % GROUPS as u64) as i64)
        .collect();
    let x = (0..ROWS)
        .map(|_| (1.0 + 0.6 * rng.normal()).exp())
        .collect();
    (g, x)
}

fn write_parquet(dir: &Path, g: &[i64], x: &[f64]) {
    let schema = Arc::new(Schema::new(vec![
        Field::new("g", DataType::Int64, false),
        Field::new("x", DataType::Float64, false),
    ]));
    let per = ROWS / FILES;
    for i in 0..FILES {
        let r = i * per..(i + 1) * per;
        let cols: Vec<ArrayRef> = vec![
            Arc::new(Int64Array::from(g[r.clone()].to_vec())),
            Arc::new(Float64Array::from(x[r].to_vec())),
        ];
        let batch = RecordBatch::try_new(Arc::clone(&schema), cols).unwrap();
        let f = std::fs::File::create(dir.join(format!("part-{i}.parquet"))).unwrap();
        let mut w = ArrowWriter::try_new(f, Arc::clone(&schema), None).unwrap();
        w.write(&batch).unwrap();
        w.close().unwrap();
    }
}

fn sqlite(path: &Path, g: &[i64], x: &[f64]) -> rusqlite::Connection {
    let _ = std::fs::remove_file(path);
    let conn = rusqlite::Connection::open(path).unwrap();
    ogive::register(&conn).unwrap();
    conn.execute_batch("PRAGMA journal_mode = OFF; CREATE TABLE t (g INTEGER, x REAL); BEGIN")
        .unwrap();
    {
        let mut ins = conn.prepare("INSERT INTO t VALUES (?, ?)").unwrap();
        for (a, b) in g.iter().zip(x) {
            ins.execute(rusqlite::params![a, b]).unwrap();
        }
    }
    conn.execute_batch("COMMIT").unwrap();
    conn
}

/// Seconds for one run, and the first value of the result.
fn time<T>(f: impl FnOnce() -> T) -> (f64, T) {
    let t = Instant::now();
    let v = f();
    (t.elapsed().as_secs_f64(), v)
}

fn lite(conn: &rusqlite::Connection, sql: &str) -> f64 {
    time(|| {
        let mut stmt = conn.prepare(sql).unwrap();
        let mut rows = stmt.query([]).unwrap();
        while rows.next().unwrap().is_some() {}
    })
    .0
}

fn fusion(rt: &tokio::runtime::Runtime, ctx: &SessionContext, sql: &str) -> (f64, Out) {
    time(|| {
        rt.block_on(async {
            let batches = ctx.sql(sql).await.unwrap().collect().await.unwrap();
            let rows = ogive::datafusion::rows(&batches).unwrap();
            rows.first()
                .and_then(|r| r.first().cloned())
                .unwrap_or(Out::Null)
        })
    })
}

fn session(rt: &tokio::runtime::Runtime, dir: &Path, partitions: usize) -> SessionContext {
    let mut ctx =
        SessionContext::new_with_config(SessionConfig::new().with_target_partitions(partitions));
    ogive::datafusion::register(&mut ctx).unwrap();
    rt.block_on(ctx.register_parquet("t", dir.to_str().unwrap(), ParquetReadOptions::default()))
        .unwrap();
    ctx
}

/// The rank error of `q` as a p-quantile of sorted `xs`, as a share of n.
fn rank_error(sorted: &[f64], q: f64, p: f64) -> f64 {
    let n = sorted.len() as f64;
    let lo = sorted.partition_point(|&v| v < q) as f64;
    let hi = sorted.partition_point(|&v| v <= q) as f64;
    let target = p * n;
    (if target < lo {
        lo - target
    } else if target > hi {
        target - hi
    } else {
        0.0
    }) / n
}

fn main() {
    // cargo passes `--bench`; other words pick cases.
    let picks: Vec<String> = std::env::args()
        .skip(1)
        .filter(|a| !a.starts_with("--"))
        .collect();
    let dir = std::env::temp_dir().join("ogive-bench-fusion");
    std::fs::create_dir_all(&dir).unwrap();
    let (g, x) = data();
    write_parquet(&dir, &g, &x);
    let conn = picks.is_empty().then(|| sqlite(&dir.join("t.db"), &g, &x));
    drop(g);
    let mut sorted = x;
    sorted.sort_by(f64::total_cmp);
    let rt = tokio::runtime::Runtime::new().unwrap();
    let one = session(&rt, &dir, 1);
    let two = session(&rt, &dir, 2);

    let cases = [
        ("sum(x)", "SELECT sum(x) FROM t"),
        ("quantile(x, 0.5)", "SELECT quantile(x, 0.5) FROM t"),
        ("ecdf(x, 2.7)", "SELECT ecdf(x, 2.7) FROM t"),
        (
            "sum(x) over 1,000 groups",
            "SELECT g, sum(x) FROM t GROUP BY g",
        ),
        (
            "quantile(x, 0.5) over 1,000 groups",
            "SELECT g, quantile(x, 0.5) FROM t GROUP BY g",
        ),
        ("ks_test(x, g < 500)", "SELECT ks_test(x, g < 500) FROM t"),
        ("dist_mixture(x, 2)", "SELECT dist_mixture(x, 2) FROM t"),
        (
            "sketch_quantile(quantile_sketch(x), 0.5)",
            "SELECT sketch_quantile(quantile_sketch(x), 0.5) FROM t",
        ),
    ];
    let mut md = format!(
        "# ogive on DataFusion\n\nWritten by `cargo bench --features datafusion --bench \
         fusion` (release build, medians of {RUNS} runs per cell with the engines in turns, 10M rows \
         of a lognormal in 8 Parquet files, seeded; the SQLite column is ogive in SQLite over \
         the same rows in one file; a shared 2-core machine). Seconds. `sum(x)` is each \
         engine's own, the floor: what reading the rows costs (grouped: what reading and \
         grouping them costs).\n\n| query | SQLite | DataFusion, 1 partition | DataFusion, 2 \
         partitions | 1 / 2 partitions |\n|---|---:|---:|---:|---:|\n",
    );
    for (label, sql) in cases {
        if !picks.is_empty() && !picks.iter().any(|p| label.contains(p.as_str())) {
            continue;
        }
        let (mut ss, mut aa, mut bb) = (Vec::new(), Vec::new(), Vec::new());
        for _ in 0..RUNS {
            if let Some(conn) = &conn {
                ss.push(lite(conn, sql));
            }
            aa.push(fusion(&rt, &one, sql).0);
            bb.push(fusion(&rt, &two, sql).0);
        }
        let s = if ss.is_empty() { f64::NAN } else { median(ss) };
        let (a, b) = (median(aa), median(bb));
        writeln!(
            md,
            "| `{label}` | {s:.3} | {a:.3} | {b:.3} | {:.2}x |",
            a / b
        )
        .unwrap();
        eprintln!("{label}: sqlite {s:.3} df1 {a:.3} df2 {b:.3}");
    }
    if !picks.is_empty() {
        return;
    }

    md.push_str(&format!(
        "\nAgainst DataFusion's own functions on the same data (2 partitions; a first run gives \
         the answer, the time is the median of {RUNS} more). The rank error is |rank - p n| / n \
         of the answer in the sorted data (0 when the answer is an order statistic at rank \
         p n).\n\n| query | seconds | answer | rank error |\n|---|---:|---:|---:|\n",
    ));
    let builtin = [
        (
            "ogive `quantile(x, 0.5)` (exact)",
            "SELECT quantile(x, 0.5) FROM t",
        ),
        ("DataFusion `median(x)`", "SELECT median(x) FROM t"),
        (
            "ogive `sketch_quantile(quantile_sketch(x), 0.5)` (bound 0.005)",
            "SELECT sketch_quantile(quantile_sketch(x), 0.5) FROM t",
        ),
        (
            "DataFusion `approx_percentile_cont(0.5) WITHIN GROUP (ORDER BY x)`",
            "SELECT approx_percentile_cont(0.5) WITHIN GROUP (ORDER BY x) FROM t",
        ),
    ];
    for (label, sql) in builtin {
        let (_, v) = fusion(&rt, &two, sql);
        let s = median((0..RUNS).map(|_| fusion(&rt, &two, sql).0).collect());
        let q = match v {
            Out::Real(q) => q,
            other => panic!("{label}: {other:?}"),
        };
        let e = rank_error(&sorted, q, 0.5);
        writeln!(md, "| {label} | {s:.3} | {q:.6} | {e:.2e} |").unwrap();
        eprintln!("{label}: {s:.3} {q} {e:e}");
    }
    let out = concat!(env!("CARGO_MANIFEST_DIR"), "/bench/fusion.md");
    std::fs::write(out, md).unwrap();
    eprintln!("wrote {out}");
}
