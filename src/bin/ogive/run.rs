//! `ogive run`: every statement of every file, each result set under a line naming its file
//! and statement. The first failing statement stops the run with its file:line:col.
//!
//! Each file runs in one transaction: a failing statement (or Ctrl-C) rolls back every
//! change the file made, so a file is kept whole or not at all. Files before it stay
//! committed. `--no-transaction` commits each statement as it runs. A file that manages
//! transactions itself (BEGIN, COMMIT, END, ROLLBACK) or runs a statement SQLite refuses
//! inside one (VACUUM, ATTACH, DETACH) is refused before anything runs, unless
//! `--no-transaction` is given.

use std::io::Write;
use std::path::{Path, PathBuf};

use crate::Failure;
use crate::db::{self, Access, Engine, EngineKind, Opened, Outcome, Params, StatementError};
use crate::glyphs;
use crate::output::{Block, CsvSink, Format, Printer, origin};
use crate::script::{self, Statement, line_col};

/// A `.sql` file and its statements.
pub struct Source {
    /// The path as the user wrote it (it names the file in every message).
    pub name: String,
    pub text: String,
    pub statements: Vec<Statement>,
}

impl Source {
    /// Reads and splits a file. A missing, unreadable or non-UTF-8 file is a usage error.
    pub fn load(path: &str) -> Result<Source, Failure> {
        let bytes =
            std::fs::read(path).map_err(|e| Failure::usage(format!("cannot read {path}: {e}")))?;
        let text = String::from_utf8(bytes).map_err(|e| {
            Failure::usage(format!(
                "{path} is not UTF-8 text (byte {})",
                e.utf8_error().valid_up_to()
            ))
        })?;
        Ok(Source::from_text(path, text))
    }

    /// Splits text that did not come from a file (the prompt's input).
    pub fn from_text(name: &str, text: String) -> Source {
        Source {
            name: name.to_string(),
            statements: script::split(&text),
            text,
        }
    }

    /// Reads every file before anything runs, so a missing one stops the verb early.
    pub fn load_all(paths: &[String]) -> Result<Vec<Source>, Failure> {
        paths.iter().map(|p| Source::load(p)).collect()
    }

    /// The title of a statement's result: file, statement number and line.
    pub fn title(&self, stmt: &Statement) -> String {
        format!(
            "{} {} statement {} (line {})",
            self.name,
            glyphs::get().dot,
            stmt.index,
            stmt.line
        )
    }

    /// The first statement that cannot run inside ogive's transaction: its line and word.
    pub fn manages_transactions(&self) -> Option<(usize, String)> {
        self.statements.iter().find_map(|st| {
            let word: String = st
                .text
                .trim_start()
                .chars()
                .take_while(|c| c.is_ascii_alphabetic())
                .collect::<String>()
                .to_ascii_uppercase();
            let rest = st.text.trim_start()[word.len()..].trim_start();
            let own = match word.as_str() {
                "BEGIN" | "COMMIT" | "END" | "VACUUM" | "ATTACH" | "DETACH" => true,
                // ROLLBACK TO a savepoint is fine inside a transaction.
                "ROLLBACK" => !rest
                    .split_whitespace()
                    .find(|w| !w.eq_ignore_ascii_case("transaction"))
                    .is_some_and(|w| w.eq_ignore_ascii_case("to")),
                _ => false,
            };
            own.then_some((st.line, word))
        })
    }

    /// Where a statement failed, with the statement's lines and a caret under the
    /// offending token when SQLite says where it is.
    pub fn describe(&self, stmt: &Statement, message: &str, offset: Option<usize>) -> String {
        let at = offset.map_or(stmt.offset, |o| stmt.offset + o.min(stmt.text.len()));
        let (line, col) = line_col(&self.text, at);
        let mut s = format!(
            "{}:{line}:{col}: {message} (statement {})\n",
            self.name, stmt.index
        );
        let first = stmt.line;
        let lines: Vec<&str> = stmt.text.lines().collect();
        let last = first + lines.len().saturating_sub(1);
        // Long statements: the first two lines, then the lines around the error (or, with
        // no position, the next four), and `…` for what is left out.
        let shown: Vec<usize> = if lines.len() <= 8 {
            (first..=last).collect()
        } else {
            let focus = if offset.is_some() { line } else { first + 4 };
            let mut v: Vec<usize> = (first..first + 2).collect();
            let from = focus.saturating_sub(2).max(first + 2);
            v.extend(from..=(focus + 1).min(last));
            v
        };
        let width = last.to_string().len();
        let g = glyphs::get();
        let (rail, more) = (g.rail, g.ellipsis);
        let mut prev = None;
        for n in shown {
            if prev.is_some_and(|p| n > p + 1) {
                s.push_str(&format!("{:>width$} {rail} {more}\n", ""));
            }
            prev = Some(n);
            let mut text = lines
                .get(n - first)
                .copied()
                .unwrap_or("")
                .replace('\t', " ");
            if n == first {
                // The first line of a statement may start mid-line in the file.
                text = format!("{}{}", " ".repeat(stmt.col - 1), text);
            }
            s.push_str(&format!("{n:>width$} {rail} {}\n", text.trim_end()));
            if offset.is_some() && n == line {
                s.push_str(&format!("{:>width$} {rail} {}^\n", "", " ".repeat(col - 1)));
            }
        }
        if prev.is_some_and(|p| p < last) {
            s.push_str(&format!("{:>width$} {rail} {more}\n", ""));
        }
        s.trim_end().to_string()
    }
}

/// What happened to one statement.
pub enum Step {
    Ran(Outcome),
    Failed(String),
}

/// Runs one statement of a source, describing a failure. Ctrl-C is a [`Failure`].
pub fn step(
    engine: Engine<'_>,
    src: &Source,
    stmt: &Statement,
    params: &mut Params,
) -> Result<Step, Failure> {
    match engine.execute(&stmt.text, params) {
        Ok(out) if crate::interrupt::requested() => {
            drop(out);
            Err(Failure::interrupted())
        }
        Ok(out) => Ok(Step::Ran(out)),
        Err(StatementError::Interrupted) => Err(Failure::interrupted()),
        Err(StatementError::Sql { message, offset }) => {
            Ok(Step::Failed(src.describe(stmt, &message, offset)))
        }
    }
}

/// Prints a statement's outcome as a block.
pub fn outcome_block(src: &Source, stmt: &Statement, out: Outcome) -> Block {
    let meta = origin(&src.name, stmt.index, stmt.line);
    match out {
        Outcome::Rows(rows) => Block::rows(Some(src.title(stmt)), meta, rows),
        Outcome::Changed(changed) => Block::Done {
            title: src.title(stmt),
            meta,
            changed,
        },
    }
}

/// Warns about `--param` values that no statement used.
pub fn warn_unused(params: &Params) {
    for name in params.unused() {
        eprintln!("ogive: warning: --param {name} is not used by any statement");
    }
}

/// How `run` prints and commits.
pub struct RunOptions<'a> {
    pub format: Format,
    /// One CSV file per result set in this directory.
    pub out_dir: Option<&'a Path>,
    /// Commit each statement as it runs instead of each file as a whole.
    pub no_transaction: bool,
    /// The engine, and its tables when it is DataFusion.
    pub engine: EngineKind,
    pub tables: &'a [String],
    /// The Ballista scheduler, with `--engine ballista`.
    pub scheduler: Option<&'a str>,
}

/// Checks `--out-dir` before anything runs, creating the directory when missing.
pub fn csv_dir(out_dir: Option<&Path>, format: Format) -> Result<Option<PathBuf>, Failure> {
    let Some(dir) = out_dir else {
        return Ok(None);
    };
    if format != Format::Csv {
        return Err(Failure::usage(format!(
            "--out-dir writes CSV files: give --format csv with it (the format is {})",
            format.word()
        )));
    }
    std::fs::create_dir_all(dir)
        .map_err(|e| Failure::usage(format!("cannot create {}: {e}", dir.display())))?;
    Ok(Some(dir.to_path_buf()))
}

/// The `run` verb.
pub fn run(
    files: &[String],
    db_path: Option<&Path>,
    params: &[String],
    options: &RunOptions,
) -> Result<i32, Failure> {
    let mut params = Params::parse(params)?;
    let sources = Source::load_all(files)?;
    if !options.no_transaction && options.engine == EngineKind::Sqlite {
        for src in &sources {
            if let Some((line, word)) = src.manages_transactions() {
                return Err(Failure::usage(format!(
                    "{}:{line}: {word} cannot run inside the transaction ogive run puts around \
                     each file; give --no-transaction to run the file's statements as they are",
                    src.name
                )));
            }
        }
    }
    let dir = csv_dir(options.out_dir, options.format)?;
    let opened = Opened::open(
        options.engine,
        options.tables,
        options.scheduler,
        db_path,
        Access::Existing,
    )?;
    let stdout = std::io::stdout();
    let mut printer = Printer::new(options.format, stdout.lock());
    if let Some(dir) = dir {
        printer = printer.csv_sink(CsvSink::Dir {
            dir,
            written: Vec::new(),
        });
    }
    for src in &sources {
        if src.statements.is_empty() {
            eprintln!("ogive: warning: {} has no statements", src.name);
            continue;
        }
        let tx = match opened.sqlite() {
            Some(conn) if !options.no_transaction => Some(
                conn.unchecked_transaction()
                    .map_err(|e| Failure::failed(format!("{}: cannot begin: {e}", src.name)))?,
            ),
            _ => None,
        };
        for stmt in &src.statements {
            match step(opened.engine(), src, stmt, &mut params)? {
                Step::Ran(out) => printer.print(&outcome_block(src, stmt, out))?,
                Step::Failed(description) => {
                    std::io::stdout().flush().ok();
                    eprintln!("ogive: {description}");
                    if let Some(tx) = tx {
                        let kept = match tx.rollback() {
                            Ok(()) => "rolled back: none of its changes were kept".to_string(),
                            Err(e) => format!("could not be rolled back: {e}"),
                        };
                        eprintln!("ogive: {} {kept}", src.name);
                    }
                    return Ok(1);
                }
            }
        }
        if let Some(tx) = tx {
            tx.commit().map_err(|e| {
                if db::is_locked(&e) {
                    Failure::failed(format!(
                        "{}: cannot commit: the database is locked by another connection; \
                         nothing of the file was kept",
                        src.name
                    ))
                } else {
                    Failure::failed(format!(
                        "{}: cannot commit: {e}; nothing of the file was kept",
                        src.name
                    ))
                }
            })?;
        }
    }
    for path in printer.written() {
        eprintln!("ogive: wrote {}", path.display());
    }
    warn_unused(&params);
    Ok(0)
}
