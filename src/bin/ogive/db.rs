//! Opening databases and running one statement: binding named parameters, collecting its
//! rows, and turning SQLite's errors into positions in the file.

use std::collections::{BTreeMap, BTreeSet};
use std::path::Path;

use rusqlite::types::Value;
use rusqlite::{Connection, OpenFlags};

use crate::Failure;
use crate::infer;
use crate::interrupt;
use crate::script;

/// SQLite's "no such function: X", with the registry's nearest names when there are any.
pub fn with_suggestion(message: String) -> String {
    let Some(name) = message.strip_prefix("no such function: ") else {
        return message;
    };
    let near = crate::catalogue::nearest(name.trim());
    if near.is_empty() {
        message
    } else {
        format!("{message}; did you mean {}?", near.join(" or "))
    }
}

/// A statement's rows, with its column names.
#[derive(Debug, Clone, Default)]
pub struct ResultSet {
    pub columns: Vec<String>,
    pub rows: Vec<Vec<Value>>,
}

/// What a statement gave back.
#[derive(Debug)]
pub enum Outcome {
    /// A statement with result columns (possibly no rows).
    Rows(ResultSet),
    /// A statement without result columns, and how many rows it changed.
    Changed(u64),
}

/// Why a statement failed.
#[derive(Debug)]
pub enum StatementError {
    /// SQLite's message, and the byte offset in the statement's text where known.
    Sql {
        message: String,
        offset: Option<usize>,
    },
    /// Ctrl-C.
    Interrupted,
}

/// Named parameters from the command line (`--param NAME=VALUE`), and which were used.
#[derive(Debug, Default)]
pub struct Params {
    values: BTreeMap<String, Value>,
    used: BTreeSet<String>,
}

impl Params {
    /// Parses `NAME=VALUE` pairs; a value is INTEGER or REAL when it reads as one (by the
    /// same rule as CSV import), else TEXT. A name may carry its SQL prefix (`:`, `@`, `$`).
    pub fn parse(pairs: &[String]) -> Result<Params, Failure> {
        let mut values = BTreeMap::new();
        for pair in pairs {
            let Some((name, value)) = pair.split_once('=') else {
                return Err(Failure::usage(format!(
                    "--param wants NAME=VALUE, got '{pair}'"
                )));
            };
            let name = name.trim().trim_start_matches([':', '@', '$']);
            if name.is_empty() {
                return Err(Failure::usage(format!(
                    "--param wants NAME=VALUE with a name, got '{pair}'"
                )));
            }
            if let Some(bad) = name.chars().find(|c| !is_name_char(*c)) {
                let fixed: String = name
                    .chars()
                    .map(|c| if is_name_char(c) { c } else { '_' })
                    .collect();
                return Err(Failure::usage(format!(
                    "--param {}: '{name}' cannot be a parameter name ({} is not allowed): a name \
                     is letters, digits and _, for example --param {fixed}=... for :{fixed}",
                    crate::shown(pair),
                    crate::shown(&bad.to_string()),
                )));
            }
            values.insert(name.to_string(), infer::value(value));
        }
        Ok(Params {
            values,
            used: BTreeSet::new(),
        })
    }

    /// The value given for `key` (a name without its `:`, `@` or `$`), marked as used.
    pub fn take(&mut self, key: &str) -> Option<&Value> {
        let v = self.values.get(key)?;
        self.used.insert(key.to_string());
        Some(v)
    }

    /// The names given but never asked for by any statement.
    pub fn unused(&self) -> Vec<&str> {
        self.values
            .keys()
            .filter(|k| !self.used.contains(*k))
            .map(String::as_str)
            .collect()
    }
}

/// A character SQLite accepts in a parameter's name after its `:`, `@` or `$`.
fn is_name_char(c: char) -> bool {
    c.is_ascii_alphanumeric() || c == '_' || !c.is_ascii()
}

/// The engine a verb's statements run on.
#[derive(Debug, Clone, Copy, PartialEq, Eq, Default, clap::ValueEnum)]
pub enum EngineKind {
    /// SQLite: the database file of --db, or a new in-memory one.
    #[default]
    Sqlite,
    /// Apache DataFusion over the Parquet and CSV files of --table (needs a build with
    /// `--features datafusion`).
    Datafusion,
    /// DataFusion on an Apache Ballista cluster: the scheduler of --scheduler plans, its
    /// executors read the --table files (needs a build with `--features ballista`).
    Ballista,
}

/// Where statements run: a SQLite connection, or a DataFusion session.
#[derive(Clone, Copy)]
pub enum Engine<'a> {
    Sqlite(&'a Connection),
    #[cfg(feature = "datafusion")]
    Fusion(&'a crate::fusion::Fusion),
}

impl Engine<'_> {
    /// Runs one statement (see [`execute`]).
    pub fn execute(self, sql: &str, params: &mut Params) -> Result<Outcome, StatementError> {
        match self {
            Engine::Sqlite(conn) => execute(conn, sql, params),
            #[cfg(feature = "datafusion")]
            Engine::Fusion(f) => f.execute(sql, params),
        }
    }
}

/// An opened engine.
pub enum Opened {
    Sqlite(Connection),
    #[cfg(feature = "datafusion")]
    Fusion(crate::fusion::Fusion),
}

impl Opened {
    /// Opens the engine a `run` or `check` asked for: SQLite on `db` (see [`open`]), or
    /// DataFusion on the `--table` files.
    pub fn open(
        kind: EngineKind,
        tables: &[String],
        scheduler: Option<&str>,
        db: Option<&Path>,
        access: Access,
    ) -> Result<Opened, Failure> {
        if let (Some(s), false) = (scheduler, kind == EngineKind::Ballista) {
            return Err(Failure::usage(format!(
                "--scheduler {s} is for --engine ballista; give --engine ballista too"
            )));
        }
        match kind {
            EngineKind::Sqlite => {
                if let Some(t) = tables.first() {
                    return Err(Failure::usage(format!(
                        "--table {t} is for --engine datafusion; SQLite reads the tables of --db \
                         (ogive import loads a CSV file into one)"
                    )));
                }
                open(db, access).map(Opened::Sqlite)
            }
            EngineKind::Datafusion => {
                if db.is_some() {
                    return Err(Failure::usage(
                        "--db is SQLite's; DataFusion reads files given as --table NAME=PATH \
                         (ogive export writes a SQLite table as Parquet)",
                    ));
                }
                Opened::fusion(tables)
            }
            EngineKind::Ballista => {
                if db.is_some() {
                    return Err(Failure::usage(
                        "--db is SQLite's; Ballista reads files given as --table NAME=PATH \
                         (ogive export writes a SQLite table as Parquet)",
                    ));
                }
                let Some(scheduler) = scheduler else {
                    return Err(Failure::usage(
                        "--engine ballista needs --scheduler HOST:PORT (ogive scheduler starts one)",
                    ));
                };
                Opened::ballista(tables, scheduler)
            }
        }
    }

    #[cfg(feature = "datafusion")]
    fn fusion(tables: &[String]) -> Result<Opened, Failure> {
        crate::fusion::Fusion::open(tables, None).map(Opened::Fusion)
    }

    #[cfg(feature = "ballista")]
    fn ballista(tables: &[String], scheduler: &str) -> Result<Opened, Failure> {
        crate::fusion::Fusion::open(tables, Some(scheduler)).map(Opened::Fusion)
    }

    #[cfg(not(feature = "ballista"))]
    fn ballista(_: &[String], _: &str) -> Result<Opened, Failure> {
        Err(Failure::usage(
            "this ogive was built without Ballista: build it with \
             `cargo build --release --features ballista`",
        ))
    }

    #[cfg(not(feature = "datafusion"))]
    fn fusion(_: &[String]) -> Result<Opened, Failure> {
        Err(Failure::usage(
            "this ogive was built without DataFusion: build it with \
             `cargo build --release --features datafusion`",
        ))
    }

    /// The engine to run statements on.
    pub fn engine(&self) -> Engine<'_> {
        match self {
            Opened::Sqlite(c) => Engine::Sqlite(c),
            #[cfg(feature = "datafusion")]
            Opened::Fusion(f) => Engine::Fusion(f),
        }
    }

    /// The SQLite connection, when the engine is SQLite (transactions are SQLite's).
    pub fn sqlite(&self) -> Option<&Connection> {
        match self {
            Opened::Sqlite(c) => Some(c),
            #[cfg(feature = "datafusion")]
            Opened::Fusion(_) => None,
        }
    }
}

/// How a verb opens its database file.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Access {
    /// An existing file, read-write (`run`, `plot`, `check --allow-writes`).
    Existing,
    /// An existing file, read-only (`check`).
    ReadOnly,
    /// Read-write, created when missing (`import`, `demo`, the prompt).
    Create,
}

/// How long a statement waits for another connection's lock before it reports one.
const BUSY_WAIT: std::time::Duration = std::time::Duration::from_secs(2);

/// Whether an error is another connection's lock.
pub fn is_locked(e: &rusqlite::Error) -> bool {
    matches!(
        e.sqlite_error_code(),
        Some(rusqlite::ErrorCode::DatabaseBusy | rusqlite::ErrorCode::DatabaseLocked)
    )
}

/// Opens the database a verb works on: in memory when `path` is None. A missing file is
/// created only with [`Access::Create`] (the `import` and `demo` verbs and the prompt's
/// `open`), so `run` and `check` never leave a file behind that their statements did not
/// ask for. Every ogive function is registered.
pub fn open(path: Option<&Path>, access: Access) -> Result<Connection, Failure> {
    let create = access == Access::Create;
    let conn = match path {
        None => Connection::open_in_memory(),
        Some(p) => {
            if !create && !p.exists() {
                return Err(Failure::usage(format!(
                    "no database at {}: run and check open existing databases only (leave out \
                     --db for an empty in-memory one, or create it with ogive import)",
                    p.display()
                )));
            }
            let mut flags = OpenFlags::SQLITE_OPEN_URI | OpenFlags::SQLITE_OPEN_NO_MUTEX;
            flags |= match access {
                Access::ReadOnly => OpenFlags::SQLITE_OPEN_READ_ONLY,
                Access::Existing => OpenFlags::SQLITE_OPEN_READ_WRITE,
                Access::Create => OpenFlags::SQLITE_OPEN_READ_WRITE | OpenFlags::SQLITE_OPEN_CREATE,
            };
            Connection::open_with_flags(p, flags)
        }
    };
    let where_ = path.map_or("the in-memory database".to_string(), |p| {
        p.display().to_string()
    });
    let conn = conn.map_err(|e| Failure::usage(format!("cannot open {where_}: {e}")))?;
    conn.busy_timeout(BUSY_WAIT)
        .map_err(|e| Failure::usage(format!("cannot open {where_}: {e}")))?;
    // Reading the schema is the first real access: a file that is not a database fails here,
    // and so does one that another connection holds locked.
    conn.query_row("SELECT count(*) FROM sqlite_schema", [], |_| Ok(()))
        .map_err(|e| {
            if is_locked(&e) {
                Failure::usage(format!(
                    "{where_} is locked: another connection is writing to it (waited {} s); \
                     try again when it has finished",
                    BUSY_WAIT.as_secs()
                ))
            } else {
                Failure::usage(format!("cannot read {where_} as an SQLite database: {e}"))
            }
        })?;
    ogive::register(&conn)
        .map_err(|e| Failure::usage(format!("cannot register ogive's functions: {e}")))?;
    Ok(conn)
}

/// Runs one statement's text with named parameters bound (never pasted into the text),
/// cancelling on Ctrl-C.
pub fn execute(
    conn: &Connection,
    sql: &str,
    params: &mut Params,
) -> Result<Outcome, StatementError> {
    let sql_error = |e: rusqlite::Error| match e {
        rusqlite::Error::SqliteFailure(f, _)
            if f.code == rusqlite::ErrorCode::OperationInterrupted =>
        {
            StatementError::Interrupted
        }
        rusqlite::Error::SqlInputError { msg, offset, .. } => StatementError::Sql {
            message: with_suggestion(msg),
            offset: usize::try_from(offset).ok(),
        },
        rusqlite::Error::SqliteFailure(f, Some(msg)) => {
            let message = if f.code == rusqlite::ErrorCode::ReadOnly
                && conn.is_readonly("main").unwrap_or(false)
            {
                format!(
                    "{msg}: ogive check opens the database read-only; give --allow-writes to let \
                     its statements change it, or make setup tables TEMP"
                )
            } else {
                with_suggestion(msg)
            };
            // SQLite gives no position for errors raised while a statement runs; ogive's
            // functions name themselves first, so the call can be found in the text.
            let offset = script::failing_call(sql, &message);
            StatementError::Sql { message, offset }
        }
        other => StatementError::Sql {
            message: other.to_string(),
            offset: None,
        },
    };
    interrupt::watch(conn, || {
        let mut stmt = conn.prepare(sql).map_err(sql_error)?;
        for i in 1..=stmt.parameter_count() {
            let Some(name) = stmt.parameter_name(i).map(str::to_string) else {
                return Err(StatementError::Sql {
                    message: "positional parameters (?) cannot be bound; name the parameter, \
                              for example :limit, and give --param limit=VALUE"
                        .to_string(),
                    offset: sql.find('?'),
                });
            };
            let key = name.trim_start_matches([':', '@', '$']).to_string();
            let Some(value) = params.take(&key) else {
                return Err(StatementError::Sql {
                    message: format!("the statement uses {name}; give it with --param {key}=VALUE"),
                    offset: sql.find(&name),
                });
            };
            stmt.raw_bind_parameter(i, value).map_err(sql_error)?;
        }
        let ncol = stmt.column_count();
        if ncol == 0 {
            let before = conn.total_changes();
            let mut rows = stmt.raw_query();
            while rows.next().map_err(sql_error)?.is_some() {}
            return Ok(Outcome::Changed(
                conn.total_changes().saturating_sub(before),
            ));
        }
        let columns: Vec<String> = stmt.column_names().map(String::from).collect();
        let mut out: Vec<Vec<Value>> = Vec::new();
        let mut rows = stmt.raw_query();
        // The rows are held fallibly: a result too large for memory is a statement error,
        // not an abort.
        let too_large = |n: usize| StatementError::Sql {
            message: format!(
                "out of memory holding the result ({n} rows so far); add a LIMIT, filter \
                 with WHERE or aggregate the rows"
            ),
            offset: None,
        };
        while let Some(row) = rows.next().map_err(sql_error)? {
            let mut values = Vec::new();
            values
                .try_reserve_exact(ncol)
                .map_err(|_| too_large(out.len()))?;
            for c in 0..ncol {
                values.push(row.get::<_, Value>(c).map_err(sql_error)?);
            }
            ogive::stats::grow::push(&mut out, values).map_err(|_| too_large(out.len()))?;
        }
        Ok(Outcome::Rows(ResultSet { columns, rows: out }))
    })
}

/// The user's tables and views, with their row counts, for the prompt's `tables`.
pub fn tables(conn: &Connection) -> rusqlite::Result<ResultSet> {
    let mut stmt = conn.prepare(
        "SELECT name, type FROM sqlite_schema WHERE type IN ('table', 'view') \
         AND name NOT LIKE 'sqlite\\_%' ESCAPE '\\' ORDER BY name",
    )?;
    let names: Vec<(String, String)> = stmt
        .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))?
        .collect::<rusqlite::Result<_>>()?;
    let mut rows = Vec::new();
    for (name, kind) in names {
        let quoted = quote_ident(&name);
        let columns: Vec<String> = conn
            .prepare(&format!(
                "SELECT name FROM pragma_table_info({})",
                quote_text(&name)
            ))?
            .query_map([], |r| r.get(0))?
            .collect::<rusqlite::Result<_>>()?;
        let count: i64 =
            conn.query_row(&format!("SELECT count(*) FROM {quoted}"), [], |r| r.get(0))?;
        rows.push(vec![
            Value::Text(name),
            Value::Text(kind),
            Value::Integer(count),
            Value::Text(columns.join(", ")),
        ]);
    }
    Ok(ResultSet {
        columns: ["name", "kind", "rows", "columns"]
            .map(String::from)
            .to_vec(),
        rows,
    })
}

/// An SQL identifier in double quotes.
pub fn quote_ident(name: &str) -> String {
    format!("\"{}\"", name.replace('"', "\"\""))
}

/// An SQL string literal.
pub fn quote_text(text: &str) -> String {
    format!("'{}'", text.replace('\'', "''"))
}
