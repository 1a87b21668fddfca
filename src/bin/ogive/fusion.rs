//! `--engine datafusion`: the same run and check files over Parquet and CSV files, on an
//! Apache DataFusion session with every ogive function registered; and `export`, which
//! writes a SQLite table as Parquet so that it can move across.

use std::path::{Path, PathBuf};
use std::sync::Arc;
use std::sync::atomic::{AtomicBool, Ordering};
use std::time::Duration;

use datafusion::arrow::array::{ArrayRef, RecordBatch};
use datafusion::arrow::datatypes::{DataType, Field, Schema};
use datafusion::parquet::arrow::ArrowWriter;
use datafusion::prelude::{CsvReadOptions, ParquetReadOptions, SessionConfig, SessionContext};
use ogive::catalogue::Returns;
use rusqlite::types::Value;

use crate::Failure;
use crate::db::{Outcome, Params, ResultSet, StatementError};
use datafusion::common::ScalarValue;

/// A DataFusion session with ogive's functions and the user's tables.
pub struct Fusion {
    ctx: SessionContext,
    /// Never dropped: dropping a runtime waits for its workers, and after Ctrl-C one may
    /// still be inside a cancelled statement's finalizer or subquery argument for seconds.
    /// The session lasts as long as the process, whose end stops them.
    rt: std::mem::ManuallyDrop<tokio::runtime::Runtime>,
    /// The Ballista scheduler's `HOST:PORT`, when the queries run on one.
    scheduler: Option<String>,
    /// Set when Ctrl-C cancels a statement, so that its work still running on a worker
    /// stops at its next poll ([`ogive::datafusion::stop_when`]); cleared when the next
    /// statement starts.
    stop: Arc<AtomicBool>,
}

/// A statement's error as the user reads it: a Ballista scheduler that cannot be reached
/// is said so, with what to do, instead of the transport library's debug print.
fn statement_message(e: &datafusion::error::DataFusionError, scheduler: Option<&str>) -> String {
    let message = e.to_string();
    match scheduler {
        Some(addr)
            if message.contains("tcp connect error") || message.contains("ConnectionRefused") =>
        {
            format!(
                "cannot reach the Ballista scheduler at {addr}: nothing answers there. Start \
                 one with `ogive scheduler --bind {addr}` and executors with `ogive executor \
                 --scheduler {addr}`, or give --scheduler the address of a running one"
            )
        }
        _ => message,
    }
}

/// What a `--table NAME=PATH` names: Parquet or CSV files.
fn format_of(path: &str) -> Result<&'static str, Failure> {
    let lower = path.to_ascii_lowercase();
    let pick = |name: &str| {
        if name.ends_with(".parquet") {
            Some("parquet")
        } else if name.ends_with(".csv") {
            Some("csv")
        } else {
            None
        }
    };
    if let Some(f) = pick(&lower) {
        return Ok(f);
    }
    let dir = Path::new(path);
    if dir.is_dir() {
        let mut names: Vec<String> = std::fs::read_dir(dir)
            .map_err(|e| Failure::usage(format!("cannot read the folder {path}: {e}")))?
            .filter_map(|e| e.ok())
            .map(|e| e.file_name().to_string_lossy().to_ascii_lowercase())
            .collect();
        names.sort();
        if let Some(f) = names.iter().find_map(|n| pick(n)) {
            return Ok(f);
        }
        return Err(Failure::usage(format!(
            "--table: the folder {path} holds no .parquet or .csv files"
        )));
    }
    Err(Failure::usage(format!(
        "--table: {path} is neither a .parquet or .csv file (or a glob of them) nor a folder \
         of such files"
    )))
}

impl Fusion {
    /// A session with `tables` (`NAME=PATH` each) registered.
    /// With `scheduler` (`HOST:PORT`), the queries run on that Ballista scheduler.
    pub fn open(tables: &[String], scheduler: Option<&str>) -> Result<Fusion, Failure> {
        let rt = tokio::runtime::Builder::new_multi_thread()
            .enable_all()
            .build()
            .map_err(|e| Failure::failed(format!("cannot start DataFusion's runtime: {e}")))?;
        let stop = Arc::new(AtomicBool::new(false));
        ogive::datafusion::stop_when(Arc::clone(&stop));
        let partitions = std::thread::available_parallelism().map_or(1, |n| n.get());
        let ctx = match scheduler {
            None => {
                let mut ctx = SessionContext::new_with_config(
                    SessionConfig::new().with_target_partitions(partitions),
                );
                ogive::datafusion::register(&mut ctx).map_err(|e| {
                    Failure::failed(format!("cannot register ogive's functions: {e}"))
                })?;
                ctx
            }
            Some(s) => remote(s)?,
        };
        for spec in tables {
            let Some((name, path)) = spec.split_once('=') else {
                return Err(Failure::usage(format!(
                    "--table {spec}: write NAME=PATH, for example --table readings=data/readings.parquet"
                )));
            };
            let registered = match format_of(path)? {
                "parquet" => {
                    rt.block_on(ctx.register_parquet(name, path, ParquetReadOptions::default()))
                }
                _ => rt.block_on(ctx.register_csv(
                    name,
                    path,
                    CsvReadOptions::new().has_header(true),
                )),
            };
            registered
                .map_err(|e| Failure::usage(format!("--table {name}: cannot read {path}: {e}")))?;
        }
        Ok(Fusion {
            ctx,
            rt: std::mem::ManuallyDrop::new(rt),
            scheduler: scheduler.map(str::to_string),
            stop,
        })
    }

    /// Runs one statement, cancelled by Ctrl-C.
    pub fn execute(&self, sql: &str, params: &mut Params) -> Result<Outcome, StatementError> {
        let fail = |e: datafusion::error::DataFusionError| {
            let message = statement_message(&e, self.scheduler.as_deref());
            StatementError::Sql {
                offset: crate::script::failing_call(sql, &message),
                message,
            }
        };
        let work = async {
            let (ctx, text) = (self.ctx.clone(), sql.to_string());
            let mut df = on_worker(async move { ogive::datafusion::sql(&ctx, &text).await })
                .await?
                .map_err(fail)?;
            // Named parameters are DataFusion's `$name`; bound, never pasted into the text.
            let mut names: Vec<String> = df
                .logical_plan()
                .get_parameter_names()
                .map_err(fail)?
                .into_iter()
                .collect();
            names.sort();
            if !names.is_empty() {
                let mut bound = Vec::with_capacity(names.len());
                for name in &names {
                    let key = name.trim_start_matches('$');
                    let Some(v) = params.take(key) else {
                        return Err(StatementError::Sql {
                            message: format!(
                                "the statement uses {name}; give it with --param {key}=VALUE"
                            ),
                            offset: sql.find(name.as_str()),
                        });
                    };
                    bound.push((key.to_string(), scalar(v)));
                }
                df = df.with_param_values(bound).map_err(fail)?;
            }
            let columns: Vec<String> = df
                .schema()
                .fields()
                .iter()
                .map(|f| f.name().clone())
                .collect();
            let batches = on_worker(df.collect()).await?.map_err(fail)?;
            if columns.is_empty() {
                return Ok(Outcome::Changed(0));
            }
            let rows = ogive::datafusion::rows(&batches)
                .map_err(fail)?
                .into_iter()
                .map(|row| row.into_iter().map(ogive::sqlite::value).collect())
                .collect();
            Ok(Outcome::Rows(ResultSet { columns, rows }))
        };
        // Ctrl-C is watched by a plain thread, not a timer of the runtime, so that the watch
        // does not wait for a worker that a finalizer or a subquery argument keeps busy.
        self.stop.store(false, Ordering::Relaxed);
        let (tell, told) = tokio::sync::oneshot::channel::<()>();
        let done = AtomicBool::new(false);
        std::thread::scope(|scope| {
            scope.spawn(|| {
                while !done.load(Ordering::Relaxed) {
                    if crate::interrupt::requested() {
                        let _ = tell.send(());
                        return;
                    }
                    std::thread::sleep(Duration::from_millis(20));
                }
            });
            let r = self.rt.block_on(async {
                tokio::select! {
                    r = work => r,
                    _ = told => {
                        self.stop.store(true, Ordering::Relaxed);
                        Err(StatementError::Interrupted)
                    }
                }
            });
            done.store(true, Ordering::Relaxed);
            r
        })
    }
}

/// A `--param` value as DataFusion's literal.
fn scalar(v: &Value) -> ScalarValue {
    match v {
        Value::Null => ScalarValue::Null,
        Value::Integer(i) => ScalarValue::Int64(Some(*i)),
        Value::Real(r) => ScalarValue::Float64(Some(*r)),
        Value::Text(t) => ScalarValue::Utf8(Some(t.clone())),
        Value::Blob(b) => ScalarValue::Binary(Some(b.clone())),
    }
}

/// Runs `work` on a worker of the runtime, not on the thread that waits for Ctrl-C:
/// planning may run a table function's subquery argument to its end, and the last step of
/// a query (a finalizer) runs where it is polled. Dropped (a cancelled statement), the
/// task is aborted at its next await.
///
/// # Errors
/// The statement error for a task that panicked or was aborted.
async fn on_worker<T: Send + 'static>(
    work: impl Future<Output = T> + Send + 'static,
) -> Result<T, StatementError> {
    let task = tokio::spawn(work);
    let _abort = AbortOnDrop(task.abort_handle());
    task.await.map_err(|e| StatementError::Sql {
        message: format!("the statement stopped: {e}"),
        offset: None,
    })
}

/// Aborts a spawned task when dropped.
struct AbortOnDrop(tokio::task::AbortHandle);

impl Drop for AbortOnDrop {
    fn drop(&mut self) {
        self.0.abort();
    }
}

/// The Arrow type of one SQLite column, from its values: INTEGER, REAL (integers
/// among reals become reals), TEXT or BLOB; NULLs fit any.
fn column_type(
    table: &str,
    column: &str,
    values: impl Iterator<Item = Value>,
) -> Result<DataType, Failure> {
    let mut ty: Option<DataType> = None;
    for v in values {
        let this = match v {
            Value::Null => continue,
            Value::Integer(_) => DataType::Int64,
            Value::Real(_) => DataType::Float64,
            Value::Text(_) => DataType::Utf8,
            Value::Blob(_) => DataType::Binary,
        };
        ty = Some(match (ty, this) {
            (None, t) => t,
            (Some(a), b) if a == b => a,
            (Some(DataType::Int64), DataType::Float64)
            | (Some(DataType::Float64), DataType::Int64) => DataType::Float64,
            (Some(a), b) => {
                return Err(Failure::failed(format!(
                    "export: {table}.{column} holds both {a} and {b} values; Parquet needs one type \
                     per column: CAST the column in a view and export the view"
                )));
            }
        });
    }
    Ok(ty.unwrap_or(DataType::Utf8))
}

/// One column of rows as an array of its type (integers in a REAL column become reals).
fn array(table: &str, ty: &DataType, values: &[Value]) -> Result<ArrayRef, Failure> {
    let returns = match ty {
        DataType::Int64 => Returns::Integer,
        DataType::Float64 => Returns::Count,
        DataType::Binary => Returns::Blob,
        _ => Returns::Text,
    };
    let outs = values.iter().map(ogive::sqlite::out).collect();
    ogive::datafusion::out_array(table, returns, outs)
        .map_err(|e| Failure::failed(format!("export: {e}")))
}

/// The `export` verb: a SQLite table (or view) as one Parquet file, or as `files` files
/// of consecutive rows in a folder.
pub fn export(db: &Path, table: &str, to: &Path, files: usize) -> Result<i32, Failure> {
    if files == 0 {
        return Err(Failure::usage("export: --files must be at least 1"));
    }
    let conn = crate::db::open(Some(db), crate::db::Access::ReadOnly)?;
    let sql = format!("SELECT * FROM {}", crate::db::quote_ident(table));
    let mut stmt = conn
        .prepare(&sql)
        .map_err(|e| Failure::usage(format!("export: cannot read {table}: {e}")))?;
    let names: Vec<String> = stmt.column_names().map(String::from).collect();
    let n = names.len();
    let rows: Vec<Vec<Value>> = stmt
        .query_map([], |r| (0..n).map(|i| r.get::<_, Value>(i)).collect())
        .and_then(|it| it.collect())
        .map_err(|e| Failure::failed(format!("export: cannot read {table}: {e}")))?;
    let mut fields = Vec::with_capacity(n);
    for (i, name) in names.iter().enumerate() {
        let ty = column_type(table, name, rows.iter().map(|r| r[i].clone()))?;
        fields.push(Field::new(name, ty, true));
    }
    let schema = Arc::new(Schema::new(fields));
    let targets: Vec<PathBuf> = if files == 1 && to.extension().is_some_and(|e| e == "parquet") {
        vec![to.to_path_buf()]
    } else {
        std::fs::create_dir_all(to)
            .map_err(|e| Failure::usage(format!("export: cannot create {}: {e}", to.display())))?;
        (1..=files)
            .map(|i| to.join(format!("{table}-{i}.parquet")))
            .collect()
    };
    let per = rows.len().div_ceil(files).max(1);
    let mut chunks = rows.chunks(per);
    for path in &targets {
        let part = chunks.next().unwrap_or(&[]);
        let cols: Vec<ArrayRef> = schema
            .fields()
            .iter()
            .enumerate()
            .map(|(i, f)| {
                let values: Vec<Value> = part.iter().map(|r| r[i].clone()).collect();
                array(table, f.data_type(), &values)
            })
            .collect::<Result<_, _>>()?;
        let batch = RecordBatch::try_new(Arc::clone(&schema), cols)
            .map_err(|e| Failure::failed(format!("export: {e}")))?;
        let file = std::fs::File::create(path)
            .map_err(|e| Failure::usage(format!("export: cannot write {}: {e}", path.display())))?;
        let mut w = ArrowWriter::try_new(file, Arc::clone(&schema), None)
            .map_err(|e| Failure::failed(format!("export: {e}")))?;
        w.write(&batch)
            .map_err(|e| Failure::failed(format!("export: {e}")))?;
        w.close()
            .map_err(|e| Failure::failed(format!("export: {e}")))?;
    }
    let rows_word = if rows.len() == 1 { "row" } else { "rows" };
    eprintln!(
        "ogive: wrote {} {rows_word} of {table} to {}",
        rows.len(),
        if targets.len() == 1 {
            targets[0].display().to_string()
        } else {
            format!("{} files in {}", targets.len(), to.display())
        }
    );
    Ok(0)
}

/// A client context on the Ballista scheduler at `scheduler`.
#[cfg(feature = "ballista")]
fn remote(scheduler: &str) -> Result<SessionContext, Failure> {
    ogive::ballista::connect(scheduler).map_err(|e| Failure::usage(format!("--scheduler: {e}")))
}

#[cfg(not(feature = "ballista"))]
fn remote(_: &str) -> Result<SessionContext, Failure> {
    Err(Failure::usage(
        "this ogive was built without Ballista: build it with `cargo build --release --features ballista`",
    ))
}
