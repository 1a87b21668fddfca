//! `ogive run`: every statement of every file, each result set under a line naming its file
//! and statement. The first failing statement stops the run with its file:line:col.

use std::io::Write;
use std::path::Path;

use rusqlite::Connection;

use crate::Failure;
use crate::db::{self, Outcome, Params, StatementError};
use crate::output::{Block, Format, Printer, origin};
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
            "{} · statement {} (line {})",
            self.name, stmt.index, stmt.line
        )
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
        let mut prev = None;
        for n in shown {
            if prev.is_some_and(|p| n > p + 1) {
                s.push_str(&format!("{:>width$} ┆ …\n", ""));
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
            s.push_str(&format!("{n:>width$} ┆ {}\n", text.trim_end()));
            if offset.is_some() && n == line {
                s.push_str(&format!("{:>width$} ┆ {}^\n", "", " ".repeat(col - 1)));
            }
        }
        if prev.is_some_and(|p| p < last) {
            s.push_str(&format!("{:>width$} ┆ …\n", ""));
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
    conn: &Connection,
    src: &Source,
    stmt: &Statement,
    params: &mut Params,
) -> Result<Step, Failure> {
    match db::execute(conn, &stmt.text, params) {
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

/// The `run` verb.
pub fn run(
    files: &[String],
    db_path: Option<&Path>,
    params: &[String],
    format: Format,
) -> Result<i32, Failure> {
    let mut params = Params::parse(params)?;
    let sources = Source::load_all(files)?;
    let conn = db::open(db_path, false)?;
    let stdout = std::io::stdout();
    let mut printer = Printer::new(format, stdout.lock());
    for src in &sources {
        if src.statements.is_empty() {
            eprintln!("ogive: warning: {} has no statements", src.name);
        }
        for stmt in &src.statements {
            match step(&conn, src, stmt, &mut params)? {
                Step::Ran(out) => printer
                    .print(&outcome_block(src, stmt, out))
                    .map_err(Failure::output)?,
                Step::Failed(description) => {
                    std::io::stdout().flush().ok();
                    eprintln!("ogive: {description}");
                    return Ok(1);
                }
            }
        }
    }
    warn_unused(&params);
    Ok(0)
}
