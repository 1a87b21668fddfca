//! `ogive import FILE.csv --table NAME [--db PATH]`.
//!
//! The file is read whole and parsed twice. The first pass checks the shape (every record
//! has the header's number of fields, every quote is closed) and infers each column's type
//! with [`crate::infer`]: INTEGER when every non-empty cell is an integer, REAL when every
//! one is a number, TEXT otherwise. Only then does the second pass write, in one
//! transaction: a bad file writes nothing, and its error names the line. Empty cells are
//! NULL; blank lines are skipped. The CSV dialect is RFC 4180: comma-separated, fields may
//! be double-quoted, a quote inside one is doubled, and quoted fields may span lines. A
//! UTF-8 byte-order mark is ignored.
//!
//! When the table exists, rows are appended to it (each header name must be one of its
//! columns); otherwise it is created with the inferred types.

use std::borrow::Cow;
use std::io::{IsTerminal, Write};
use std::path::Path;
use std::time::{Duration, Instant};

use rusqlite::Connection;
use rusqlite::types::{ToSqlOutput, Value, ValueRef};
use serde_json::{Map, json};

use crate::Failure;
use crate::db::{self, ResultSet, quote_ident};
use crate::infer::{Class, classify, trim_spaces};
use crate::interrupt;
use crate::output::{Block, Format, Printer};

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
}

impl<'a> Reader<'a> {
    pub fn new(text: &'a str) -> Self {
        let text = text.strip_prefix('\u{feff}').unwrap_or(text);
        Reader {
            text,
            pos: 0,
            line: 1,
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
        // Skip blank lines.
        loop {
            match b.get(self.pos) {
                None => return Ok(None),
                Some(b'\n') => {
                    self.pos += 1;
                    self.line += 1;
                }
                Some(b'\r') if b.get(self.pos + 1) == Some(&b'\n') => {
                    self.pos += 2;
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
                    None | Some(b',' | b'\n') => {}
                    Some(b'\r') if matches!(b.get(self.pos + 1), None | Some(b'\n')) => {}
                    Some(_) => {
                        return Err(CsvError {
                            line: self.line,
                            message: "a quoted field must end at its closing quote, before the next comma or line end".into(),
                        });
                    }
                }
            } else {
                let from = self.pos;
                let mut i = from;
                while let Some(&c) = b.get(i) {
                    if c == b',' || c == b'\n' {
                        break;
                    }
                    i += 1;
                }
                let mut end = i;
                if end > from && b[end - 1] == b'\r' {
                    end -= 1;
                }
                fields.push(Cow::Borrowed(&self.text[from..end]));
                self.pos = i;
            }
            // After a field: a comma goes on, a line end or the end of the text finishes.
            match b.get(self.pos) {
                Some(b',') => self.pos += 1,
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

/// What the first pass learned.
#[derive(Debug)]
pub struct Shape {
    pub header: Vec<String>,
    pub classes: Vec<Class>,
    pub empty: Vec<u64>,
    pub rows: u64,
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
}

/// Draws a progress line on standard error for long imports (only on a terminal).
struct Progress {
    label: String,
    total: usize,
    start: Instant,
    last: Option<Instant>,
    enabled: bool,
}

impl Progress {
    fn new(label: String, total: usize) -> Self {
        Progress {
            label,
            total: total.max(1),
            start: Instant::now(),
            last: None,
            enabled: std::io::stderr().is_terminal(),
        }
    }

    /// Redraws at most ten times a second, once the work has taken half a second.
    fn tick(&mut self, done: usize, rows: u64) {
        if !self.enabled || self.start.elapsed() < Duration::from_millis(500) {
            return;
        }
        if self
            .last
            .is_some_and(|t| t.elapsed() < Duration::from_millis(100))
        {
            return;
        }
        self.last = Some(Instant::now());
        let frac = done as f64 / self.total as f64;
        let filled = (frac * 24.0).round() as usize;
        let bar: String = "▰".repeat(filled.min(24)) + &"▱".repeat(24 - filled.min(24));
        let mut err = std::io::stderr().lock();
        let _ = write!(
            err,
            "\r  {} {bar} {:>3.0}%  {rows} rows  {:.1} s ",
            self.label,
            frac * 100.0,
            self.start.elapsed().as_secs_f64()
        );
        let _ = err.flush();
    }

    /// Every 65,536 rows: stops on Ctrl-C, else redraws.
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
        if self.last.is_some() {
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
pub fn survey(file: &str, text: &str) -> Result<Shape, Failure> {
    let mut reader = Reader::new(text);
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
                "{file}:1: the header names column '{h}' twice; nothing was imported"
            )));
        }
    }
    let n = header.len();
    let mut classes = vec![Class::Empty; n];
    let mut empty = vec![0u64; n];
    let mut rows = 0u64;
    let mut progress = Progress::new(format!("reading {file}"), text.len());
    while let Some(line) = reader.record(&mut fields).map_err(|e| located(file, e))? {
        if fields.len() != n {
            return Err(located(
                file,
                CsvError {
                    line,
                    message: format!(
                        "expected {n} field{} as in the header, found {}",
                        if n == 1 { "" } else { "s" },
                        fields.len()
                    ),
                },
            ));
        }
        for (c, f) in fields.iter().enumerate() {
            // Once a column is TEXT nothing changes it; only emptiness is still counted.
            if f.is_empty() {
                empty[c] += 1;
            } else if classes[c] != Class::Text {
                classes[c] = classes[c].max(classify(f));
            }
        }
        rows += 1;
        progress.every(reader.position(), rows)?;
    }
    progress.finish();
    Ok(Shape {
        header,
        classes,
        empty,
        rows,
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

/// The second pass: creates or appends to the table in one transaction.
pub fn load(
    conn: &Connection,
    file: &str,
    text: &str,
    table: &str,
    shape: &Shape,
) -> Result<bool, Failure> {
    let sql_err =
        |e: rusqlite::Error| Failure::failed(format!("{file}: {e}; nothing was imported"));
    let tx = conn.unchecked_transaction().map_err(sql_err)?;
    let created = match existing_columns(&tx, table).map_err(sql_err)? {
        Some(cols) => {
            for h in &shape.header {
                if !cols.iter().any(|c| c.eq_ignore_ascii_case(h)) {
                    return Err(Failure::failed(format!(
                        "{file}:1: table {table} has no column '{h}' (it has {}); nothing was imported",
                        cols.join(", ")
                    )));
                }
            }
            false
        }
        None => {
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
            true
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
    let mut reader = Reader::new(text);
    let mut fields = Vec::new();
    reader.record(&mut fields).map_err(|e| located(file, e))?;
    let mut progress = Progress::new(format!("importing {file}"), text.len());
    let mut rows = 0u64;
    while let Some(line) = reader.record(&mut fields).map_err(|e| located(file, e))? {
        for (c, f) in fields.iter().enumerate() {
            let f: &str = f;
            let value = if f.is_empty() {
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
        insert
            .raw_execute()
            .map_err(|e| Failure::failed(format!("{file}:{line}: {e}; nothing was imported")))?;
        rows += 1;
        progress.every(reader.position(), rows)?;
    }
    progress.finish();
    drop(insert);
    tx.commit().map_err(sql_err)?;
    Ok(created)
}

/// The `import` verb.
pub fn import(
    file: &str,
    table: &str,
    db_path: Option<&Path>,
    format: Format,
) -> Result<i32, Failure> {
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
    if table.trim().is_empty() {
        return Err(Failure::usage("--table needs a name"));
    }
    let shape = survey(file, text)?;
    let conn = db::open(db_path, true)?;
    let created = load(&conn, file, text, table, &shape)?;

    let rows = ResultSet {
        columns: ["column", "type", "empty cells"].map(String::from).to_vec(),
        rows: shape
            .header
            .iter()
            .zip(shape.types())
            .zip(&shape.empty)
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
    meta.insert("created".into(), json!(created));
    meta.insert("written".into(), json!(db_path.is_some()));
    let verb = if created { "created" } else { "appended to" };
    let note = match db_path {
        Some(_) => format!(
            "{} rows imported from {file}; {verb} table {table}",
            shape.rows
        ),
        None => format!(
            "{} rows read from {file}; nothing was written (give --db PATH to keep them)",
            shape.rows
        ),
    };
    let mut printer = Printer::new(format, std::io::stdout().lock());
    printer
        .print(&Block::Rows {
            title: Some(format!("{file} → {table}")),
            meta,
            rows,
            count: false,
        })
        .map_err(Failure::output)?;
    printer.print(&Block::note(note)).map_err(Failure::output)?;
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
        let s = survey("t.csv", "i,r,t,e\n1,2,a,\n,2.5,007,\n-3,4,,\n").unwrap();
        assert_eq!(s.types(), vec!["INTEGER", "REAL", "TEXT", "TEXT"]);
        assert_eq!(s.empty, vec![1, 0, 1, 3]);
        assert_eq!(s.rows, 3);
    }

    #[test]
    fn ragged_rows_are_refused_with_their_line() {
        let e = survey("t.csv", "a,b\n1,2\n3\n").unwrap_err();
        assert_eq!(e.code, 1);
        assert!(
            e.message.starts_with("t.csv:3: expected 2 fields"),
            "{}",
            e.message
        );
    }
}
