//! `ogive import FILE.csv [--table NAME] [--db PATH] [--null TEXT]... [--delimiter C] [--replace]`.
//!
//! The file is read whole and parsed twice. The first pass checks the shape (every record
//! has the header's number of fields, every quote is closed) and infers each column's type
//! with [`crate::infer`]: INTEGER when every non-NULL cell is an integer, REAL when every
//! one is a number, TEXT otherwise. Only then does the second pass write, in one
//! transaction: a bad file writes nothing, and its error names the line. The empty cell is
//! NULL, and so is every `--null` token (compared without surrounding spaces); blank lines
//! are skipped. When a column would be numeric but for a few cells of one to three other
//! words (`NA`, `-`), a warning names them and their counts and the `--null` that reads
//! them as NULL.
//!
//! The dialect is RFC 4180 with a chosen separator (`--delimiter`; a tab for `.tsv` files,
//! else a comma): fields may be double-quoted, a quote inside one is doubled, and quoted
//! fields may span lines. Lines may end in LF, CRLF or a lone CR (old Mac exports). A
//! UTF-8 byte-order mark is ignored.
//!
//! The table is named by `--table`, else by the file's name without its extension. When it
//! exists, rows are appended to it (each header name must be one of its columns), or with
//! `--replace` it is dropped and created anew in the same transaction; otherwise it is
//! created with the inferred types. A file that takes more than a second shows its
//! progress on standard error.

use std::borrow::Cow;
use std::io::{IsTerminal, Write};
use std::path::Path;
use std::time::{Duration, Instant};

use rusqlite::Connection;
use rusqlite::types::{ToSqlOutput, Value, ValueRef};
use serde_json::{Map, json};

use crate::db::{self, Access, ResultSet, quote_ident};
use crate::infer::{Class, classify, trim_spaces};
use crate::output::{Block, Format, Printer};
use crate::{Failure, glyphs, interrupt, shown};

/// A CSV shape error, with the 1-based line where it was found.
#[derive(Debug, PartialEq, Eq)]
pub struct CsvError {
    pub line: usize,
    pub message: String,
}

/// A pull parser over a whole CSV text.
pub struct Reader<'a> {
    text: &'a str,
    pos: usize,
    line: usize,
    delim: u8,
}

/// The separator's name in messages.
pub fn delimiter_name(d: u8) -> String {
    match d {
        b',' => "comma".into(),
        b'\t' => "tab".into(),
        b';' => "semicolon".into(),
        b'|' => "'|'".into(),
        b' ' => "space".into(),
        other => format!("'{}'", other as char),
    }
}

impl<'a> Reader<'a> {
    /// A comma-separated reader.
    #[cfg(test)]
    pub fn new(text: &'a str) -> Self {
        Reader::with_delimiter(text, b',')
    }

    pub fn with_delimiter(text: &'a str, delim: u8) -> Self {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        Reader {
            text,
            pos: 0,
            line: 1,
            delim,
        }
    }

    /// Bytes consumed so far (for the progress line).
    pub fn position(&self) -> usize {
        self.pos
    }

    /// Reads the next non-blank record into `fields` and returns its first line, or None
    /// at the end of the text.
    pub fn record(&mut self, fields: &mut Vec<Cow<'a, str>>) -> Result<Option<usize>, CsvError> {
        fields.clear();
        let b = self.text.as_bytes();
        let d = self.delim;
        // Skip blank lines (LF, CRLF or a lone CR).
        loop {
            match b.get(self.pos) {
                None => return Ok(None),
                Some(b'\n') => {
                    self.pos += 1;
                    self.line += 1;
                }
                Some(b'\r') => {
                    self.pos += 1;
                    if b.get(self.pos) == Some(&b'\n') {
                        self.pos += 1;
                    }
                    self.line += 1;
                }
                Some(_) => break,
            }
        }
        let start_line = self.line;
        loop {
            // One field.
            if b.get(self.pos) == Some(&b'"') {
                let open_line = self.line;
                let from = self.pos + 1;
                let mut i = from;
                let mut doubled = false;
                loop {
                    match b.get(i) {
                        None => {
                            return Err(CsvError {
                                line: open_line,
                                message: "a quoted field opened on this line is never closed"
                                    .into(),
                            });
                        }
                        Some(b'"') if b.get(i + 1) == Some(&b'"') => {
                            doubled = true;
                            i += 2;
                        }
                        Some(b'"') => break,
                        Some(b'\n') => {
                            self.line += 1;
                            i += 1;
                        }
                        Some(b'\r') if b.get(i + 1) != Some(&b'\n') => {
                            self.line += 1;
                            i += 1;
                        }
                        Some(_) => i += 1,
                    }
                }
                let inner = &self.text[from..i];
                fields.push(if doubled {
                    Cow::Owned(inner.replace("\"\"", "\""))
                } else {
                    Cow::Borrowed(inner)
                });
                self.pos = i + 1;
                match b.get(self.pos) {
                    None | Some(b'\n' | b'\r') => {}
                    Some(&c) if c == d => {}
                    Some(_) => {
                        return Err(CsvError {
                            line: self.line,
                            message: format!(
                                "a quoted field must end at its closing quote, before the next \
                                 {} or the line end",
                                delimiter_name(d)
                            ),
                        });
                    }
                }
            } else {
                let from = self.pos;
                let mut i = from;
                while let Some(&c) = b.get(i) {
                    if c == d || c == b'\n' || c == b'\r' {
                        break;
                    }
                    i += 1;
                }
                fields.push(Cow::Borrowed(&self.text[from..i]));
                self.pos = i;
            }
            // After a field: a separator goes on, a line end or the end of the text finishes.
            match b.get(self.pos) {
                Some(&c) if c == d => self.pos += 1,
                Some(b'\r') => {
                    self.pos += 1;
                    if b.get(self.pos) == Some(&b'\n') {
                        self.pos += 1;
                    }
                    self.line += 1;
                    return Ok(Some(start_line));
                }
                Some(b'\n') => {
                    self.pos += 1;
                    self.line += 1;
                    return Ok(Some(start_line));
                }
                _ => return Ok(Some(start_line)),
            }
        }
    }
}

/// What the import was asked to do.
pub struct Options<'a> {
    pub file: &'a str,
    pub table: Option<&'a str>,
    pub db: Option<&'a Path>,
    pub nulls: &'a [String],
    pub delimiter: Option<&'a str>,
    pub replace: bool,
    pub format: Format,
}

/// How cells are read: the separator and the words that mean NULL.
pub struct Dialect<'a> {
    pub delim: u8,
    pub nulls: &'a [String],
}

impl Dialect<'_> {
    /// A comma-separated dialect whose only NULL is the empty cell.
    #[cfg(test)]
    pub fn csv() -> Dialect<'static> {
        Dialect {
            delim: b',',
            nulls: &[],
        }
    }

    fn is_null(&self, cell: &str) -> bool {
        cell.is_empty()
            || (!self.nulls.is_empty() && self.nulls.iter().any(|t| trim_spaces(cell) == t))
    }
}

/// The separator: `--delimiter`, else a tab for a `.tsv` file, else a comma.
pub fn delimiter(given: Option<&str>, file: &str) -> Result<u8, Failure> {
    let Some(given) = given else {
        let tsv = Path::new(file)
            .extension()
            .is_some_and(|e| e.eq_ignore_ascii_case("tsv"));
        return Ok(if tsv { b'\t' } else { b',' });
    };
    if given.eq_ignore_ascii_case("tab") || given == "\\t" {
        return Ok(b'\t');
    }
    let mut chars = given.chars();
    match (chars.next(), chars.next()) {
        (Some(c), None) if c.is_ascii() && !matches!(c, '"' | '\n' | '\r') => Ok(c as u8),
        (Some('"' | '\n' | '\r'), None) => Err(Failure::usage(format!(
            "--delimiter {} cannot separate fields (it quotes or ends them): give another character",
            shown(given)
        ))),
        _ => Err(Failure::usage(format!(
            "--delimiter wants one ASCII character (or the word tab), got '{}'",
            shown(given)
        ))),
    }
}

/// The first few words that kept a numeric column from being numeric.
#[derive(Debug, Default)]
pub struct Stray {
    /// Cells that read as numbers.
    pub numbers: u64,
    /// Other words and how many cells held each, in order of first appearance.
    pub words: Vec<(String, u64)>,
    /// Whether there were more than [`STRAY_WORDS`] different ones.
    pub many: bool,
}

/// At most this many different words count as "a few" for the warning.
const STRAY_WORDS: usize = 3;

impl Stray {
    fn note(&mut self, word: &str) {
        if self.many {
            return;
        }
        let word = trim_spaces(word);
        match self.words.iter().position(|(w, _)| w == word) {
            Some(i) => self.words[i].1 += 1,
            None if self.words.len() < STRAY_WORDS => self.words.push((word.to_string(), 1)),
            None => self.many = true,
        }
    }

    /// The warning for a TEXT column that numbers dominate, if it is one.
    fn warning(&self, column: &str) -> Option<String> {
        let odd: u64 = self.words.iter().map(|(_, n)| n).sum();
        if self.many || self.words.is_empty() || self.numbers == 0 || odd >= self.numbers {
            return None;
        }
        let cells = |n: u64| if n == 1 { "cell" } else { "cells" };
        let list: Vec<String> = self
            .words
            .iter()
            .map(|(w, n)| format!("{n} {} '{}'", cells(*n), shown(w)))
            .collect();
        let flags: Vec<String> = self
            .words
            .iter()
            .map(|(w, _)| format!("--null {}", shell_word(w)))
            .collect();
        Some(format!(
            "column {} is TEXT because of {} among {} number{}; give {} to read {} as NULL",
            shown(column),
            join_and(&list),
            self.numbers,
            if self.numbers == 1 { "" } else { "s" },
            flags.join(" "),
            if odd == 1 { "it" } else { "them" }
        ))
    }
}

/// A word as it can be typed in a shell.
fn shell_word(w: &str) -> String {
    if !w.is_empty()
        && w.chars()
            .all(|c| c.is_ascii_alphanumeric() || "-_./:+".contains(c))
    {
        w.to_string()
    } else {
        format!("'{}'", shown(&w.replace('\'', "'\\''")))
    }
}

fn join_and(items: &[String]) -> String {
    match items {
        [] => String::new(),
        [one] => one.clone(),
        [init @ .., last] => format!("{} and {last}", init.join(", ")),
    }
}

/// What the first pass learned.
#[derive(Debug)]
pub struct Shape {
    pub header: Vec<String>,
    pub classes: Vec<Class>,
    /// NULL cells per column: empty ones and `--null` words.
    pub nulls: Vec<u64>,
    pub rows: u64,
    /// Per column: the numbers and the other words seen.
    pub strays: Vec<Stray>,
}

impl Shape {
    /// The SQL type of each column.
    pub fn types(&self) -> Vec<&'static str> {
        self.classes
            .iter()
            .map(|c| match c {
                Class::Integer => "INTEGER",
                Class::Real => "REAL",
                Class::Empty | Class::Text => "TEXT",
            })
            .collect()
    }

    /// Warnings for columns that a few words turned TEXT.
    pub fn warnings(&self) -> Vec<String> {
        self.header
            .iter()
            .zip(&self.classes)
            .zip(&self.strays)
            .filter(|((_, c), _)| **c == Class::Text)
            .filter_map(|((h, _), s)| s.warning(h))
            .collect()
    }
}

/// "1 row", "2 rows".
fn rows_word(n: u64) -> String {
    format!("{n} row{}", if n == 1 { "" } else { "s" })
}

/// Shows how far an import has got, on standard error, once it has taken a second: a
/// redrawn bar on a terminal, a plain line every ten seconds elsewhere.
pub struct Progress {
    label: String,
    total: usize,
    start: Instant,
    last: Option<Instant>,
    terminal: bool,
    after: Duration,
}

/// How long an import runs before it shows progress.
const PROGRESS_AFTER: Duration = Duration::from_secs(1);

/// [`PROGRESS_AFTER`], or the milliseconds in `OGIVE_PROGRESS_AFTER_MS` (the shell's
/// tests set it to 0 so that they need not depend on the machine's speed).
fn progress_after() -> Duration {
    std::env::var("OGIVE_PROGRESS_AFTER_MS")
        .ok()
        .and_then(|v| v.parse().ok())
        .map_or(PROGRESS_AFTER, Duration::from_millis)
}

impl Progress {
    fn new(label: String, total: usize, start: Instant) -> Self {
        Progress {
            label,
            total: total.max(1),
            start,
            last: None,
            terminal: std::io::stderr().is_terminal(),
            after: progress_after(),
        }
    }

    fn tick(&mut self, done: usize, rows: u64) {
        let elapsed = self.start.elapsed();
        if elapsed < self.after {
            return;
        }
        let every = if self.terminal {
            Duration::from_millis(100)
        } else {
            Duration::from_secs(10)
        };
        if self.last.is_some_and(|t| t.elapsed() < every) {
            return;
        }
        self.last = Some(Instant::now());
        let frac = done as f64 / self.total as f64;
        let mut err = std::io::stderr().lock();
        if self.terminal {
            let g = glyphs::get();
            let filled = ((frac * 24.0).round() as usize).min(24);
            let bar: String = std::iter::repeat_n(g.bar_done, filled)
                .chain(std::iter::repeat_n(g.bar_todo, 24 - filled))
                .collect();
            let _ = write!(
                err,
                "\r  {} {bar} {:>3.0}%  {}  {:.1} s ",
                self.label,
                frac * 100.0,
                rows_word(rows),
                elapsed.as_secs_f64()
            );
        } else {
            let _ = writeln!(
                err,
                "ogive: {}: {:.0}% after {:.1} s ({})",
                self.label,
                frac * 100.0,
                elapsed.as_secs_f64(),
                rows_word(rows)
            );
        }
        let _ = err.flush();
    }

    /// Every 65,536 rows: stops on Ctrl-C, else shows progress.
    fn every(&mut self, done: usize, rows: u64) -> Result<(), Failure> {
        if rows.is_multiple_of(65_536) {
            if interrupt::requested() {
                self.finish();
                return Err(Failure::interrupted());
            }
            self.tick(done, rows);
        }
        Ok(())
    }

    fn finish(&mut self) {
        if self.terminal && self.last.is_some() {
            let mut err = std::io::stderr().lock();
            let _ = write!(err, "\r{:78}\r", "");
            let _ = err.flush();
        }
    }
}

fn located(file: &str, e: CsvError) -> Failure {
    Failure::failed(format!(
        "{file}:{}: {}; nothing was imported",
        e.line, e.message
    ))
}

/// The first pass: shape and types.
pub fn survey(file: &str, text: &str, dialect: &Dialect, start: Instant) -> Result<Shape, Failure> {
    let mut reader = Reader::with_delimiter(text, dialect.delim);
    let mut fields = Vec::new();
    let Some(_) = reader.record(&mut fields).map_err(|e| located(file, e))? else {
        return Err(Failure::failed(format!(
            "{file} is empty: it needs a header row; nothing was imported"
        )));
    };
    let header: Vec<String> = fields.iter().map(|f| f.trim().to_string()).collect();
    for (i, h) in header.iter().enumerate() {
        if h.is_empty() {
            return Err(Failure::failed(format!(
                "{file}:1: column {} of the header has no name; nothing was imported",
                i + 1
            )));
        }
        if header[..i].iter().any(|o| o.eq_ignore_ascii_case(h)) {
            return Err(Failure::failed(format!(
                "{file}:1: the header names column '{}' twice; nothing was imported",
                shown(h)
            )));
        }
    }
    let n = header.len();
    let mut classes = vec![Class::Empty; n];
    let mut nulls = vec![0u64; n];
    let mut strays: Vec<Stray> = (0..n).map(|_| Stray::default()).collect();
    let mut rows = 0u64;
    let mut progress = Progress::new(format!("reading {file}"), text.len(), start);
    while let Some(line) = reader.record(&mut fields).map_err(|e| located(file, e))? {
        if fields.len() != n {
            let hint = if fields.len() == 1 && n > 1 {
                format!(
                    " (no {} in the line: is the separator another one? see --delimiter)",
                    delimiter_name(dialect.delim)
                )
            } else {
                String::new()
            };
            return Err(located(
                file,
                CsvError {
                    line,
                    message: format!(
                        "expected {n} field{} as in the header, found {}{hint}",
                        if n == 1 { "" } else { "s" },
                        fields.len()
                    ),
                },
            ));
        }
        for (c, f) in fields.iter().enumerate() {
            if dialect.is_null(f) {
                nulls[c] += 1;
                continue;
            }
            let class = classify(f);
            classes[c] = classes[c].max(class);
            match class {
                Class::Integer | Class::Real => strays[c].numbers += 1,
                Class::Text => strays[c].note(f),
                Class::Empty => {}
            }
        }
        rows += 1;
        progress.every(reader.position(), rows)?;
    }
    progress.finish();
    Ok(Shape {
        header,
        classes,
        nulls,
        rows,
        strays,
    })
}

/// The table's columns, when it exists.
fn existing_columns(conn: &Connection, table: &str) -> rusqlite::Result<Option<Vec<String>>> {
    let cols: Vec<String> = conn
        .prepare("SELECT name FROM pragma_table_info(?1)")?
        .query_map([table], |r| r.get(0))?
        .collect::<rusqlite::Result<_>>()?;
    Ok((!cols.is_empty()).then_some(cols))
}

/// What the second pass did to the table.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Done {
    Created,
    Appended,
    Replaced,
}

/// The second pass: creates, replaces or appends to the table in one transaction.
#[allow(clippy::too_many_arguments)]
pub fn load(
    conn: &Connection,
    file: &str,
    text: &str,
    table: &str,
    shape: &Shape,
    dialect: &Dialect,
    replace: bool,
    start: Instant,
) -> Result<Done, Failure> {
    let sql_err = |e: rusqlite::Error| {
        if db::is_locked(&e) {
            Failure::failed(format!(
                "{file}: the database is locked by another connection; nothing was imported"
            ))
        } else {
            Failure::failed(format!("{file}: {e}; nothing was imported"))
        }
    };
    let tx = conn.unchecked_transaction().map_err(sql_err)?;
    let existing = existing_columns(&tx, table).map_err(sql_err)?;
    let done = match existing {
        Some(cols) if !replace => {
            for h in &shape.header {
                if !cols.iter().any(|c| c.eq_ignore_ascii_case(h)) {
                    return Err(Failure::failed(format!(
                        "{file}:1: table {table} has no column '{}' (it has {}); give --replace \
                         to drop the table and create it from the file; nothing was imported",
                        shown(h),
                        cols.join(", ")
                    )));
                }
            }
            Done::Appended
        }
        _ => {
            if existing.is_some() {
                tx.execute_batch(&format!("DROP TABLE {}", quote_ident(table)))
                    .map_err(sql_err)?;
            }
            let cols: Vec<String> = shape
                .header
                .iter()
                .zip(shape.types())
                .map(|(h, t)| format!("{} {t}", quote_ident(h)))
                .collect();
            tx.execute_batch(&format!(
                "CREATE TABLE {} ({})",
                quote_ident(table),
                cols.join(", ")
            ))
            .map_err(sql_err)?;
            if existing.is_some() {
                Done::Replaced
            } else {
                Done::Created
            }
        }
    };
    let names: Vec<String> = shape.header.iter().map(|h| quote_ident(h)).collect();
    let marks: Vec<String> = (1..=names.len()).map(|i| format!("?{i}")).collect();
    let mut insert = tx
        .prepare(&format!(
            "INSERT INTO {} ({}) VALUES ({})",
            quote_ident(table),
            names.join(", "),
            marks.join(", ")
        ))
        .map_err(sql_err)?;
    let mut reader = Reader::with_delimiter(text, dialect.delim);
    let mut fields = Vec::new();
    reader.record(&mut fields).map_err(|e| located(file, e))?;
    let mut progress = Progress::new(format!("importing {file}"), text.len(), start);
    let mut rows = 0u64;
    while let Some(line) = reader.record(&mut fields).map_err(|e| located(file, e))? {
        for (c, f) in fields.iter().enumerate() {
            let f: &str = f;
            let value = if dialect.is_null(f) {
                ValueRef::Null
            } else {
                match shape.classes[c] {
                    Class::Integer => trim_spaces(f)
                        .parse::<i64>()
                        .map_or(ValueRef::Text(f.as_bytes()), ValueRef::Integer),
                    Class::Real => trim_spaces(f)
                        .parse::<f64>()
                        .map_or(ValueRef::Text(f.as_bytes()), ValueRef::Real),
                    Class::Empty | Class::Text => ValueRef::Text(f.as_bytes()),
                }
            };
            insert
                .raw_bind_parameter(c + 1, ToSqlOutput::Borrowed(value))
                .map_err(sql_err)?;
        }
        insert.raw_execute().map_err(|e| {
            Failure::failed(format!(
                "{file}:{line}: {}; nothing was imported",
                shown(&e.to_string())
            ))
        })?;
        rows += 1;
        progress.every(reader.position(), rows)?;
    }
    progress.finish();
    drop(insert);
    tx.commit().map_err(sql_err)?;
    Ok(done)
}

/// The table name for a file: its name without the extension.
pub fn default_table(file: &str) -> Result<String, Failure> {
    Path::new(file)
        .file_stem()
        .map(|s| s.to_string_lossy().trim().to_string())
        .filter(|s| !s.is_empty())
        .ok_or_else(|| {
            Failure::usage(format!(
                "cannot name a table after {file}: give --table NAME"
            ))
        })
}

/// The `import` verb.
pub fn import(o: &Options) -> Result<i32, Failure> {
    let file = o.file;
    let start = Instant::now();
    let table = match o.table {
        Some(t) if t.trim().is_empty() => return Err(Failure::usage("--table needs a name")),
        Some(t) => t.to_string(),
        None => default_table(file)?,
    };
    let dialect = Dialect {
        delim: delimiter(o.delimiter, file)?,
        nulls: o.nulls,
    };
    let bytes =
        std::fs::read(file).map_err(|e| Failure::usage(format!("cannot read {file}: {e}")))?;
    let text = std::str::from_utf8(&bytes).map_err(|e| {
        let line = bytes[..e.valid_up_to()]
            .iter()
            .filter(|&&b| b == b'\n')
            .count()
            + 1;
        Failure::failed(format!(
            "{file}:{line}: not UTF-8 text; nothing was imported"
        ))
    })?;
    let shape = survey(file, text, &dialect, start)?;
    for w in shape.warnings() {
        eprintln!("ogive: warning: {w}");
    }
    let done = match o.db {
        Some(path) => {
            let conn = db::open(Some(path), Access::Create)?;
            Some(load(
                &conn, file, text, &table, &shape, &dialect, o.replace, start,
            )?)
        }
        None => None,
    };

    let rows = ResultSet {
        columns: ["column", "type", "null cells"].map(String::from).to_vec(),
        rows: shape
            .header
            .iter()
            .zip(shape.types())
            .zip(&shape.nulls)
            .map(|((h, t), e)| {
                vec![
                    Value::Text(h.clone()),
                    Value::Text(t.into()),
                    Value::Integer(*e as i64),
                ]
            })
            .collect(),
    };
    let mut meta = Map::new();
    meta.insert("file".into(), json!(file));
    meta.insert("table".into(), json!(table));
    meta.insert("records".into(), json!(shape.rows));
    meta.insert(
        "created".into(),
        json!(done.is_some_and(|d| d != Done::Appended)),
    );
    meta.insert("replaced".into(), json!(done == Some(Done::Replaced)));
    meta.insert("written".into(), json!(done.is_some()));
    let n = rows_word(shape.rows);
    let note = match done {
        Some(d) => {
            let verb = match d {
                Done::Created => "created",
                Done::Appended => "appended to",
                Done::Replaced => "replaced",
            };
            format!("{n} imported from {file}; {verb} table {table}")
        }
        None => format!(
            "{n} read from {file}; nothing was written (give --db PATH to keep {})",
            if shape.rows == 1 { "it" } else { "them" }
        ),
    };
    let mut printer = Printer::new(o.format, std::io::stdout().lock());
    printer.print(&Block::Rows {
        title: Some(format!("{file} {} {table}", glyphs::get().arrow)),
        meta,
        rows,
        count: false,
    })?;
    printer.print(&Block::note(note))?;
    Ok(0)
}

#[cfg(test)]
mod tests {
    use super::*;

    fn records(text: &str) -> Result<Vec<(usize, Vec<String>)>, CsvError> {
        let mut r = Reader::new(text);
        let mut f = Vec::new();
        let mut out = Vec::new();
        while let Some(line) = r.record(&mut f)? {
            out.push((line, f.iter().map(|x| x.to_string()).collect()));
        }
        Ok(out)
    }

    #[test]
    fn rfc4180_fields() {
        let got = records("a,b,c\r\n1,\"x, \"\"y\"\"\",\n\n\"multi\nline\",2,3").unwrap();
        assert_eq!(
            got,
            vec![
                (1, vec!["a".into(), "b".into(), "c".into()]),
                (2, vec!["1".into(), "x, \"y\"".into(), "".into()]),
                (4, vec!["multi\nline".into(), "2".into(), "3".into()]),
            ]
        );
    }

    #[test]
    fn trailing_comma_is_an_empty_field_and_bom_is_ignored() {
        let got = records("\u{feff}a,b\n1,\n").unwrap();
        assert_eq!(got[0].1, vec!["a", "b"]);
        assert_eq!(got[1].1, vec!["1", ""]);
    }

    #[test]
    fn unclosed_quote_names_its_line() {
        let e = records("a,b\n1,2\n3,\"open\n4,5\n").unwrap_err();
        assert_eq!(e.line, 3);
        assert!(e.message.contains("never closed"));
    }

    #[test]
    fn text_after_a_closing_quote_is_an_error() {
        let e = records("a\n\"x\"y\n").unwrap_err();
        assert_eq!(e.line, 2);
    }

    #[test]
    fn survey_infers_types_and_counts_empty_cells() {
        let s = survey(
            "t.csv",
            "i,r,t,e\n1,2,a,\n,2.5,007,\n-3,4,,\n",
            &Dialect::csv(),
            Instant::now(),
        )
        .unwrap();
        assert_eq!(s.types(), vec!["INTEGER", "REAL", "TEXT", "TEXT"]);
        assert_eq!(s.nulls, vec![1, 0, 1, 3]);
        assert_eq!(s.rows, 3);
    }

    #[test]
    fn ragged_rows_are_refused_with_their_line() {
        let e = survey("t.csv", "a,b\n1,2\n3\n", &Dialect::csv(), Instant::now()).unwrap_err();
        assert_eq!(e.code, 1);
        assert!(
            e.message.starts_with("t.csv:3: expected 2 fields"),
            "{}",
            e.message
        );
    }

    #[test]
    fn lone_cr_ends_lines() {
        let got = records("a,b\r1,2\r\r\"x\ry\",3\r").unwrap();
        assert_eq!(
            got,
            vec![
                (1, vec!["a".into(), "b".into()]),
                (2, vec!["1".into(), "2".into()]),
                (4, vec!["x\ry".into(), "3".into()]),
            ]
        );
    }

    #[test]
    fn other_separators() {
        let mut r = Reader::with_delimiter("a\tb\n\"x\ty\"\t2\n", b'\t');
        let mut f = Vec::new();
        r.record(&mut f).unwrap();
        r.record(&mut f).unwrap();
        assert_eq!(f, vec!["x\ty", "2"]);
        assert_eq!(delimiter(None, "d/x.TSV").unwrap(), b'\t');
        assert_eq!(delimiter(None, "x.csv").unwrap(), b',');
        assert_eq!(delimiter(Some(";"), "x.tsv").unwrap(), b';');
        assert_eq!(delimiter(Some("tab"), "x.csv").unwrap(), b'\t');
        assert!(delimiter(Some("\""), "x.csv").is_err());
        assert!(delimiter(Some(";;"), "x.csv").is_err());
    }

    #[test]
    fn null_words_and_the_stray_warning() {
        let text = "x,y,code\n1,a,007\nNA,b,012\n3,NA,013\n4,-,014\n";
        let s = survey("t.csv", text, &Dialect::csv(), Instant::now()).unwrap();
        assert_eq!(s.types(), vec!["TEXT", "TEXT", "TEXT"]);
        let w = s.warnings();
        assert_eq!(w.len(), 1, "{w:?}");
        assert_eq!(
            w[0],
            "column x is TEXT because of 1 cell 'NA' among 3 numbers; give --null NA to read it as NULL"
        );
        let nulls = ["NA".to_string()];
        let d = Dialect {
            delim: b',',
            nulls: &nulls,
        };
        let s = survey("t.csv", text, &d, Instant::now()).unwrap();
        assert_eq!(s.types()[0], "INTEGER");
        assert_eq!(s.nulls, vec![1, 1, 0]);
        assert!(s.warnings().is_empty());
    }
}
