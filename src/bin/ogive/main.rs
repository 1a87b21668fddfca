//! `ogive`: the companion shell. It opens a database (in memory unless told otherwise),
//! registers every ogive function, and runs saved query and check files, imports CSV,
//! draws plots, lists the functions, builds the demo, or reads SQL at a prompt.
//!
//! Exit status: 0 success; 1 a statement, check or import failed; 2 a usage or file
//! problem (nothing ran); 130 cancelled with Ctrl-C.
//!
//! The shell holds no statistics: every number it shows comes from SQL.

mod catalogue;
mod check;
mod cluster;
mod db;
mod demo;
#[cfg(feature = "datafusion")]
mod fusion;
mod glyphs;
mod import;
mod infer;
mod interrupt;
mod output;
mod plot;
mod repl;
mod run;
mod script;

use std::path::PathBuf;

use clap::{Args, Parser, Subcommand};

use output::Format;

/// Why a verb stopped, and the exit status that says so.
#[derive(Debug)]
pub struct Failure {
    pub code: i32,
    pub message: String,
}

impl Failure {
    /// A usage or file problem: status 2.
    pub fn usage(message: impl Into<String>) -> Failure {
        Failure {
            code: 2,
            message: message.into(),
        }
    }

    /// The work ran and failed: status 1.
    pub fn failed(message: impl Into<String>) -> Failure {
        Failure {
            code: 1,
            message: message.into(),
        }
    }

    /// Ctrl-C: status 130.
    pub fn interrupted() -> Failure {
        Failure {
            code: 130,
            message: "cancelled (Ctrl-C)".to_string(),
        }
    }

    /// Standard output went away or failed. A closed pipe (`ogive run q.sql | head`) is
    /// not an error worth a message.
    pub fn output(e: std::io::Error) -> Failure {
        if e.kind() == std::io::ErrorKind::BrokenPipe {
            Failure {
                code: 0,
                message: String::new(),
            }
        } else {
            Failure::failed(format!("cannot write the output: {e}"))
        }
    }
}

/// Text for a message: control characters (a lone CR, a tab, an escape) shown as escapes,
/// so that an error never moves the cursor or rewrites the terminal.
pub fn shown(text: &str) -> String {
    let mut s = String::with_capacity(text.len());
    for c in text.chars() {
        match c {
            '\r' => s.push_str("\\r"),
            '\n' => s.push_str("\\n"),
            '\t' => s.push_str("\\t"),
            c if c.is_control() => s.push_str(&format!("\\u{{{:x}}}", c as u32)),
            c => s.push(c),
        }
    }
    s
}

#[derive(Parser)]
#[command(
    name = "ogive",
    version,
    about = "Distribution questions in SQL: run saved queries and checks, import CSV, draw plots",
    long_about = "Distribution questions in SQL. Without a verb, ogive reads SQL at a prompt \
                  (type help there). Exit status: 0 success, 1 a statement, check or import \
                  failed, 2 a usage or file problem, 130 cancelled with Ctrl-C."
)]
struct Cli {
    #[command(subcommand)]
    verb: Option<Verb>,
    /// Database file for the prompt (default: a new in-memory database)
    #[arg(long, value_name = "PATH")]
    db: Option<PathBuf>,
    /// Output format at the prompt
    #[arg(long, value_enum, default_value_t = Format::Table)]
    format: Format,
}

/// The database a file runs on, and the values of its named parameters.
#[derive(Args)]
struct On {
    /// Database file (must exist; default: a new in-memory database)
    #[arg(long, value_name = "PATH")]
    db: Option<PathBuf>,
    /// Binds :NAME (or @NAME, $NAME) in the statements; repeat for more
    #[arg(long = "param", value_name = "NAME=VALUE")]
    params: Vec<String>,
}

/// Which engine runs the statements.
#[derive(Args)]
struct EngineArgs {
    /// sqlite (the --db file), datafusion (the --table files; needs a build with
    /// --features datafusion) or ballista (the --table files on the --scheduler's
    /// cluster; needs --features ballista)
    #[arg(long, value_enum, default_value_t = db::EngineKind::Sqlite)]
    engine: db::EngineKind,
    /// With --engine datafusion: a table of Parquet or CSV files (a file, a glob or a
    /// folder); repeat for more
    #[arg(long = "table", value_name = "NAME=PATH")]
    tables: Vec<String>,
    /// With --engine ballista: the scheduler to run on (ogive scheduler starts one)
    #[arg(long, value_name = "HOST:PORT")]
    scheduler: Option<String>,
}

#[derive(Subcommand)]
enum Verb {
    /// Run .sql files: every statement, each result set under a line naming its file and statement
    ///
    /// Each file runs in one transaction: when a statement fails, every change the file made
    /// is rolled back (files before it stay committed). --no-transaction commits each
    /// statement as it runs.
    Run {
        /// The .sql files, run in order
        #[arg(required = true, value_name = "FILE.sql")]
        files: Vec<String>,
        #[command(flatten)]
        on: On,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// With --format csv: write each result set to DIR/FILE-STATEMENT.csv
        #[arg(long, value_name = "DIR")]
        out_dir: Option<PathBuf>,
        /// Commit each statement as it runs (default: each file in one transaction)
        #[arg(long)]
        no_transaction: bool,
        #[command(flatten)]
        engine: EngineArgs,
    },
    /// Run check files: each query is a check that fails when a row's ok column is false or NULL
    Check {
        /// The check files; a comment line directly above a query names that check
        #[arg(required = true, value_name = "FILE.sql")]
        files: Vec<String>,
        #[command(flatten)]
        on: On,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
        /// Also write a JUnit XML report for CI servers
        #[arg(long, value_name = "FILE.xml")]
        report: Option<PathBuf>,
        /// Let the checks write to the database file (default: it is opened read-only)
        #[arg(long)]
        allow_writes: bool,
        #[command(flatten)]
        engine: EngineArgs,
    },
    /// Write a SQLite table (or view) as Parquet, for --engine datafusion (needs a build
    /// with --features datafusion)
    Export {
        /// The SQLite database file
        #[arg(long, value_name = "PATH")]
        db: PathBuf,
        /// The table or view to write
        #[arg(long, value_name = "NAME")]
        table: String,
        /// FILE.parquet, or a folder for --files N above 1
        #[arg(long, value_name = "PATH")]
        to: PathBuf,
        /// Split the rows, in order, over this many files in the folder --to
        #[arg(long, value_name = "N", default_value_t = 1)]
        files: usize,
    },
    /// Import a CSV file (header row; INTEGER, REAL or TEXT columns; empty cells NULL) in one transaction
    Import {
        #[arg(value_name = "FILE.csv")]
        file: String,
        /// Table to create, or to append to when it exists (default: the file's name
        /// without its extension)
        #[arg(long, value_name = "NAME")]
        table: Option<String>,
        /// Database file, created if missing (without it, the file is only checked)
        #[arg(long, value_name = "PATH")]
        db: Option<PathBuf>,
        /// A cell that means NULL, besides the empty cell (repeat for more: --null NA --null -)
        #[arg(long = "null", value_name = "TEXT")]
        nulls: Vec<String>,
        /// The field separator: one character, or `tab` (default: a comma; a tab for .tsv files)
        #[arg(long, value_name = "CHAR")]
        delimiter: Option<String>,
        /// Drop the table and create it anew, in the same transaction as the rows
        #[arg(long)]
        replace: bool,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// Draw a query's rows (x, y [, series]) as an SVG plot
    Plot {
        /// The .sql file; its last query gives the rows
        #[arg(value_name = "FILE.sql")]
        file: String,
        /// The SVG file to write (ogive draws SVG only)
        #[arg(long, value_name = "FIG.svg")]
        out: PathBuf,
        /// steps (cdfs), lines (curves) or bars (histograms, categories); default: the
        /// query's `-- kind:` comment, else lines
        #[arg(long, value_enum)]
        kind: Option<plot::Kind>,
        /// Title (default: the comment line above the query)
        #[arg(long)]
        title: Option<String>,
        #[command(flatten)]
        on: On,
    },
    /// List ogive's SQL functions, or show one function's full help and example
    Functions {
        /// A function name
        name: Option<String>,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
    /// Start an Apache Ballista scheduler with ogive's functions, for --engine ballista
    /// (needs a build with --features ballista); runs until stopped
    Scheduler {
        /// Address to listen on
        #[arg(long, value_name = "HOST:PORT", default_value = "127.0.0.1:50050")]
        bind: std::net::SocketAddr,
    },
    /// Start a Ballista executor with ogive's functions, working for a scheduler (needs a
    /// build with --features ballista); runs until stopped
    Executor {
        /// The scheduler to take work from
        #[arg(long, value_name = "HOST:PORT", default_value = "127.0.0.1:50050")]
        scheduler: std::net::SocketAddr,
        /// Address to serve query data on
        #[arg(long, value_name = "HOST:PORT", default_value = "127.0.0.1:50051")]
        bind: std::net::SocketAddr,
        /// The executor's control port (default: the --bind port plus one)
        #[arg(long, value_name = "PORT")]
        control_port: Option<u16>,
        /// Tasks it runs at once (default: the machine's cores)
        #[arg(long, value_name = "N")]
        slots: Option<usize>,
    },
    /// Build the invented refrigerated-trailer demo, run its queries and checks, draw its plots
    Demo {
        /// Directory for the demo plots
        #[arg(long, value_name = "DIR", default_value = "ogive-demo")]
        out_dir: PathBuf,
        /// Also keep the demo database in this new file
        #[arg(long, value_name = "PATH")]
        db: Option<PathBuf>,
        #[arg(long, value_enum, default_value_t = Format::Table)]
        format: Format,
    },
}

#[cfg(feature = "datafusion")]
fn export(
    db: &std::path::Path,
    table: &str,
    to: &std::path::Path,
    files: usize,
) -> Result<i32, Failure> {
    fusion::export(db, table, to, files)
}

#[cfg(not(feature = "datafusion"))]
fn export(_: &std::path::Path, _: &str, _: &std::path::Path, _: usize) -> Result<i32, Failure> {
    Err(Failure::usage(
        "export writes Parquet, which this ogive was built without: build it with \
         `cargo build --release --features datafusion`",
    ))
}

fn main() {
    interrupt::install();
    let cli = Cli::parse();
    let result = match cli.verb {
        None => repl::prompt(cli.db.as_deref(), cli.format),
        Some(Verb::Run {
            files,
            on,
            format,
            out_dir,
            no_transaction,
            engine,
        }) => run::run(
            &files,
            on.db.as_deref(),
            &on.params,
            &run::RunOptions {
                format,
                out_dir: out_dir.as_deref(),
                no_transaction,
                engine: engine.engine,
                tables: &engine.tables,
                scheduler: engine.scheduler.as_deref(),
            },
        ),
        Some(Verb::Check {
            files,
            on,
            format,
            report,
            allow_writes,
            engine,
        }) => check::check(
            &files,
            on.db.as_deref(),
            &on.params,
            format,
            report.as_deref(),
            allow_writes,
            (engine.engine, &engine.tables, engine.scheduler.as_deref()),
        ),
        Some(Verb::Export {
            db,
            table,
            to,
            files,
        }) => export(&db, &table, &to, files),
        Some(Verb::Import {
            file,
            table,
            db,
            nulls,
            delimiter,
            replace,
            format,
        }) => import::import(&import::Options {
            file: &file,
            table: table.as_deref(),
            db: db.as_deref(),
            nulls: &nulls,
            delimiter: delimiter.as_deref(),
            replace,
            format,
        }),
        Some(Verb::Plot {
            file,
            out,
            kind,
            title,
            on,
        }) => plot::plot_file(
            &file,
            &out,
            kind,
            title.as_deref(),
            on.db.as_deref(),
            &on.params,
        ),
        Some(Verb::Functions { name, format }) => catalogue::functions(name.as_deref(), format),
        Some(Verb::Demo {
            out_dir,
            db,
            format,
        }) => demo::demo(&out_dir, db.as_deref(), format),
        Some(Verb::Scheduler { bind }) => cluster::scheduler(bind),
        Some(Verb::Executor {
            scheduler,
            bind,
            control_port,
            slots,
        }) => cluster::executor(scheduler, bind, control_port, slots),
    };
    let code = match result {
        Ok(code) => code,
        Err(f) => {
            if !f.message.is_empty() {
                eprintln!("ogive: {}", f.message);
            }
            f.code
        }
    };
    std::process::exit(code);
}
