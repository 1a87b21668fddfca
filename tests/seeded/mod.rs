//! The seeded readings that the DataFusion and Ballista tests share: the same rows as
//! Parquet files and as a SQLite table, and the exact queries both engines must answer
//! bit for bit.
#![allow(dead_code)]

use std::path::Path;
use std::sync::Arc;

use datafusion::arrow::array::{ArrayRef, BooleanArray, Float64Array, Int64Array, RecordBatch};
use datafusion::arrow::datatypes::{DataType, Field, Schema};
use datafusion::parquet::arrow::ArrowWriter;
use datafusion::prelude::SessionContext;
use ogive::catalogue::value::Out;
use ogive::stats::rng::Xoshiro256pp;
use rusqlite::Connection;

pub const FILES: usize = 4;
pub const ROWS_PER_FILE: usize = 2_500;
pub const GROUPS: i64 = 7;

/// One reading: group, time, value (rounded to 0.1, so there are ties), weight, flag.
pub type Row = (i64, i64, f64, i64, bool);

pub fn readings() -> Vec<Row> {
    let mut rng = Xoshiro256pp::new(20261202);
    (0..(FILES * ROWS_PER_FILE) as i64)
        .map(|t| {
            let g = (rng.next_u64() % GROUPS as u64) as i64;
            let flag = rng.uniform() < 0.4;
            let shift = if flag { 0.3 } else { 0.0 };
            let x =
                ((3.0 + 0.2 * g as f64 + shift + rng.normal()).abs() * 10.0).round() / 10.0 + 0.1;
            let w = 1 + (rng.next_u64() % 5) as i64;
            (g, t, x, w, flag)
        })
        .collect()
}

pub fn schema() -> Arc<Schema> {
    Arc::new(Schema::new(vec![
        Field::new("g", DataType::Int64, false),
        Field::new("t", DataType::Int64, false),
        Field::new("x", DataType::Float64, true),
        Field::new("w", DataType::Int64, false),
        Field::new("flag", DataType::Boolean, false),
    ]))
}

pub fn batch(rows: &[Row]) -> RecordBatch {
    let cols: Vec<ArrayRef> = vec![
        Arc::new(Int64Array::from_iter_values(rows.iter().map(|r| r.0))),
        Arc::new(Int64Array::from_iter_values(rows.iter().map(|r| r.1))),
        Arc::new(Float64Array::from_iter_values(rows.iter().map(|r| r.2))),
        Arc::new(Int64Array::from_iter_values(rows.iter().map(|r| r.3))),
        Arc::new(BooleanArray::from_iter(rows.iter().map(|r| Some(r.4)))),
    ];
    RecordBatch::try_new(schema(), cols).unwrap()
}

/// The readings as `FILES` Parquet files in `dir`.
pub fn write_parquet(dir: &Path, rows: &[Row]) {
    for (i, part) in rows.chunks(ROWS_PER_FILE).enumerate() {
        let file = std::fs::File::create(dir.join(format!("part-{i}.parquet"))).unwrap();
        let mut w = ArrowWriter::try_new(file, schema(), None).unwrap();
        w.write(&batch(part)).unwrap();
        w.close().unwrap();
    }
}

pub fn sqlite(rows: &[Row]) -> Connection {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    conn.execute_batch("CREATE TABLE t (g INTEGER, t INTEGER, x REAL, w INTEGER, flag INTEGER)")
        .unwrap();
    let mut ins = conn
        .prepare("INSERT INTO t VALUES (?, ?, ?, ?, ?)")
        .unwrap();
    for r in rows {
        ins.execute(rusqlite::params![r.0, r.1, r.2, r.3, r.4])
            .unwrap();
    }
    drop(ins);
    conn
}

pub fn sqlite_rows(conn: &Connection, sql: &str) -> Result<Vec<Vec<Out>>, String> {
    let mut stmt = conn.prepare(sql).map_err(|e| e.to_string())?;
    let n = stmt.column_count();
    let rows = stmt
        .query_map([], |r| {
            (0..n)
                .map(|i| {
                    Ok(match r.get_ref(i)? {
                        rusqlite::types::ValueRef::Null => Out::Null,
                        rusqlite::types::ValueRef::Integer(i) => Out::Integer(i),
                        rusqlite::types::ValueRef::Real(x) => Out::Real(x),
                        rusqlite::types::ValueRef::Text(t) => {
                            Out::Text(String::from_utf8_lossy(t).into())
                        }
                        rusqlite::types::ValueRef::Blob(b) => Out::Blob(b.to_vec()),
                    })
                })
                .collect()
        })
        .map_err(|e| e.to_string())?;
    rows.collect::<Result<_, _>>().map_err(|e| e.to_string())
}

pub async fn fusion_rows(ctx: &SessionContext, sql: &str) -> Result<Vec<Vec<Out>>, String> {
    let df = ctx.sql(sql).await.map_err(|e| e.to_string())?;
    let batches = df.collect().await.map_err(|e| e.to_string())?;
    ogive::datafusion::rows(&batches).map_err(|e| e.to_string())
}

/// Bit-identical: reals by their bits; a count may be an INTEGER in SQLite and a double
/// in DataFusion (its declared type), equal as numbers.
pub fn same(a: &Out, b: &Out) -> bool {
    match (a, b) {
        (Out::Real(x), Out::Real(y)) => x.to_bits() == y.to_bits(),
        (Out::Integer(i), Out::Real(y)) | (Out::Real(y), Out::Integer(i)) => *i as f64 == *y,
        _ => a == b,
    }
}

/// Exact functions, written in SQL both engines read.
pub const EXACT: &[&str] = &[
    "SELECT g, ecdf(x, 3.0), ecdf(x, 3.0, w) FROM t GROUP BY g ORDER BY g",
    "SELECT g, quantile(x, 0.5), quantile(x, 0.9, 6), median(x), weighted_quantile(x, w, 0.3) \
     FROM t GROUP BY g ORDER BY g",
    "SELECT g, quantiles(x, '[0.1, 0.5, 0.99]'), profile(x) FROM t GROUP BY g ORDER BY g",
    "SELECT g, ks_test(x, flag) FROM t GROUP BY g ORDER BY g",
    "SELECT g, quantile(x, 0.5) FILTER (WHERE flag), ecdf(x, 3.0) FILTER (WHERE t % 3 = 0), \
     quantile_sketch(x) FILTER (WHERE t < 0) IS NULL FROM t GROUP BY g ORDER BY g",
    "SELECT g, dist_empirical(x), dist_empirical(x, w) FROM t GROUP BY g ORDER BY g",
    "SELECT dist_merge(d) FROM (SELECT g, dist_empirical(x) AS d FROM t GROUP BY g)",
    "SELECT g, dist_fit(x, 'gamma'), dist_fit(x, 'normal') FROM t GROUP BY g ORDER BY g",
    "SELECT dist_mixture(x, 2) FROM t",
    "SELECT g, dist_fit(x, 'normal', 0.1), dist_fit(x, 'gamma', 'auto'), \
     dist_fit_censored(x, CASE WHEN x > 5 THEN 1 WHEN x < 1 THEN -1 ELSE 0 END, 'weibull') \
     FROM t GROUP BY g ORDER BY g",
    "SELECT dist_mixture(x, NULL, 0.1), dist_mixture(x, 2, 'auto') FROM t",
    "SELECT g, dist_cdf(d, 3.0), dist_quantile(d, 0.5), dist_n(d), dist_band(d, 3.0, 0.05) \
     FROM (SELECT g, dist_censored(x, CASE WHEN x > 5 THEN 1 ELSE 0 END) AS d FROM t GROUP BY g) \
     ORDER BY g",
    "SELECT m ->> '$.n_right', m ->> '$.resolution' \
     FROM (SELECT dist_fit_censored(x, CASE WHEN x > 5 THEN 1 ELSE 0 END, 'normal') AS m FROM t)",
    "SELECT g, dist_cdf(d, 3.0), dist_quantile(d, 0.25), dist_n(d), dist_mean(d), dist_sd(d), \
     dist_profile(d), dist_band(d, 3.0, 0.05) FROM (SELECT g, dist_empirical(x) AS d FROM t GROUP BY g) \
     ORDER BY g",
    "SELECT a.g, dist_ks(a.d, b.d), dist_distance(a.d, b.d, 'wasserstein') \
     FROM (SELECT g, dist_empirical(x) AS d FROM t GROUP BY g) AS a, \
          (SELECT dist_empirical(x) AS d FROM t) AS b ORDER BY a.g",
    "SELECT m ->> '$.n', m ->> '$.shape', m -> '$.family' FROM (SELECT dist_fit(x, 'gamma') AS m FROM t)",
    "SELECT dist_component(m, 2.0), dist_component(m, 6.0) FROM (SELECT dist_mixture(x, 2) AS m FROM t)",
    "SELECT t, quantile(x, 0.5) OVER (ORDER BY t ROWS BETWEEN 20 PRECEDING AND CURRENT ROW), \
     ecdf(x, 3.0) OVER (ORDER BY t ROWS BETWEEN 20 PRECEDING AND 5 FOLLOWING) FROM t \
     WHERE g = 3 ORDER BY t",
    "SELECT g, t, median(x) OVER (PARTITION BY g ORDER BY t ROWS BETWEEN UNBOUNDED PRECEDING \
     AND CURRENT ROW) FROM t WHERE t < 400 ORDER BY g, t",
    "SELECT component, weight, mean, sd FROM dist_components('{\"family\": \"normal_mixture\", \
     \"components\": [{\"weight\": 0.25, \"mean\": 1, \"sd\": 0.5}, {\"weight\": 0.75, \"mean\": 4, \"sd\": 1}]}') \
     ORDER BY component",
    "SELECT x, cdf, pdf FROM dist_curve('{\"family\": \"gamma\", \"shape\": 2, \"scale\": 1.5}', 0, 10, 11)",
    "SELECT component, weight, mean, sd FROM dist_components((SELECT dist_mixture(x, 2) FROM t)) \
     ORDER BY component",
    "SELECT count(*), sum(cdf) FROM dist_steps((SELECT dist_empirical(x) FROM t WHERE g < 0))",
    // Above 32,768 values, so that merged parts' values are selected where the engine
    // holds them (the sampled path) and sorted parts merged, not re-sorted.
    "SELECT quantile(t.x * v.column1 + t.t, 0.37), median(t.x - v.column1), \
     ks_test(t.x + v.column1 * t.t, t.flag), dist_fit(t.x * v.column1, 'gamma') \
     FROM t, (VALUES (1.0), (2.0), (3.0), (4.5)) AS v",
];

pub fn tempdir(name: &str) -> std::path::PathBuf {
    let dir = std::env::temp_dir().join(format!("ogive-df-{name}-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    dir
}
