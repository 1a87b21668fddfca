//! The four output formats and the shell's own table look.
//!
//! Every verb prints a sequence of [`Block`]s: result sets with a title (which file and
//! statement they came from) and notes. The formats:
//!
//! - `table`: a title line starting with `▸`, then the table hanging from a rail down its
//!   left edge: the header, a dashed rule leaving the rail, the rows (numbers
//!   right-aligned, columns three spaces apart), and the row count on the rail's foot
//!   (`╰ 2 rows`). In a locale that is not UTF-8 the same look is drawn in ASCII
//!   (see [`crate::glyphs`]);
//! - `csv`: only CSV: one result set as RFC 4180 rows under a header row, NULL an empty
//!   field. Titles, notes and errors go to standard error. A verb that gives a second result
//!   set stops with an error asking for `--out-dir DIR` ([`CsvSink::Dir`] writes one file
//!   per result set there); only the prompt prints one CSV block per statement;
//! - `json`: one JSON object per block and line (`columns` and `rows` arrays, plus the
//!   block's origin); NULL is null, an infinite REAL is the string `"inf"` or `"-inf"`, a
//!   BLOB is its hex digits as a string;
//! - `markdown`: a bold title line and a pipe table, numbers right-aligned.

use std::io::Write;
use std::path::{Path, PathBuf};

use comfy_table::{
    CellAlignment, ContentArrangement, ContentLineStyle, LineStyle, Table, TableStyle,
};
use ogive::sqlite::render as render_value;
use rusqlite::types::Value;
use serde_json::{Map, Value as Json, json};

use crate::Failure;
use crate::db::ResultSet;
use crate::glyphs;

/// How results are printed.
#[derive(Debug, Clone, Copy, PartialEq, Eq, clap::ValueEnum)]
pub enum Format {
    Table,
    Csv,
    Json,
    Markdown,
}

impl Format {
    /// The format's word, as the command line spells it.
    pub fn word(self) -> &'static str {
        match self {
            Format::Table => "table",
            Format::Csv => "csv",
            Format::Json => "json",
            Format::Markdown => "markdown",
        }
    }

    /// The format named by a word, if any.
    pub fn from_word(word: &str) -> Option<Format> {
        [Format::Table, Format::Csv, Format::Json, Format::Markdown]
            .into_iter()
            .find(|f| f.word().eq_ignore_ascii_case(word))
    }
}

/// One thing a verb prints.
pub enum Block {
    /// A result set. `meta` says where it came from (for JSON); `title` says it for people.
    Rows {
        title: Option<String>,
        meta: Map<String, Json>,
        rows: ResultSet,
        /// Whether the table format prints the row count under the table.
        count: bool,
    },
    /// A line of text; JSON prints `meta` with the text as `message`.
    Note {
        text: String,
        meta: Map<String, Json>,
    },
    /// Something that failed: a title line and the error's text (several lines).
    Error {
        title: String,
        detail: String,
        meta: Map<String, Json>,
    },
    /// A statement that returned no rows: its title and how many rows it changed. CSV
    /// prints nothing for it.
    Done {
        title: String,
        meta: Map<String, Json>,
        changed: u64,
    },
}

impl Block {
    /// A result set with a title and its row count.
    pub fn rows(title: Option<String>, meta: Map<String, Json>, rows: ResultSet) -> Block {
        Block::Rows {
            title,
            meta,
            rows,
            count: true,
        }
    }

    /// A note without JSON fields of its own.
    pub fn note(text: impl Into<String>) -> Block {
        Block::Note {
            text: text.into(),
            meta: Map::new(),
        }
    }
}

/// Where CSV result sets go.
pub enum CsvSink {
    /// Standard output, one result set at most (the verbs).
    One { printed: bool, hint: &'static str },
    /// Standard output, one CSV block per result set, blank lines between (the prompt).
    Many,
    /// One file per result set in a directory (`--out-dir`).
    Dir { dir: PathBuf, written: Vec<PathBuf> },
}

/// Writes blocks in one format, with a blank line between a table and what follows it.
pub struct Printer<W: Write> {
    pub format: Format,
    out: W,
    /// Whether the last block printed was a one-line block (a note or a done line).
    last: Option<bool>,
    csv: CsvSink,
}

impl<W: Write> Printer<W> {
    /// A printer for a verb: CSV allows one result set.
    pub fn new(format: Format, out: W) -> Self {
        Printer {
            format,
            out,
            last: None,
            csv: CsvSink::One {
                printed: false,
                hint: "give --out-dir DIR for one CSV file per result set, or use --format json",
            },
        }
    }

    /// Sets where CSV result sets go.
    pub fn csv_sink(mut self, sink: CsvSink) -> Self {
        self.csv = sink;
        self
    }

    /// The files written to the `--out-dir` directory so far.
    pub fn written(&self) -> &[PathBuf] {
        match &self.csv {
            CsvSink::Dir { written, .. } => written,
            _ => &[],
        }
    }

    /// Prints one block. In CSV everything but result sets goes to standard error.
    pub fn print(&mut self, block: &Block) -> Result<(), Failure> {
        if self.format == Format::Csv {
            return self.print_csv(block);
        }
        let text = render(self.format, block);
        if text.is_empty() {
            return Ok(());
        }
        self.write(block, &text).map_err(Failure::output)
    }

    fn write(&mut self, block: &Block, text: &str) -> std::io::Result<()> {
        let one_line = match block {
            Block::Rows { .. } => false,
            Block::Note { text, .. } => !text.contains('\n'),
            Block::Done { .. } => true,
            Block::Error { .. } => false,
        };
        let gap = match self.last {
            None => false,
            Some(prev) => match self.format {
                Format::Json => false,
                Format::Table | Format::Csv => !(prev && one_line),
                Format::Markdown => true,
            },
        };
        if gap {
            writeln!(self.out)?;
        }
        self.out.write_all(text.as_bytes())?;
        self.out.flush()?;
        self.last = Some(one_line);
        Ok(())
    }

    fn print_csv(&mut self, block: &Block) -> Result<(), Failure> {
        let Block::Rows { rows, meta, .. } = block else {
            // Notes and errors are for people: standard error, in the table's words.
            let text = match block {
                Block::Note { text, .. } => format!("ogive: {text}\n"),
                Block::Done { .. } => String::new(),
                other => render(Format::Table, other),
            };
            if !text.is_empty() {
                let _ = self.out.flush();
                eprint!("{text}");
            }
            return Ok(());
        };
        let text = csv_rows(rows);
        match &mut self.csv {
            CsvSink::One { printed, hint } => {
                if *printed {
                    let at = match (meta.get("file"), meta.get("line")) {
                        (Some(Json::String(f)), Some(l)) => format!(" ({f}, line {l})"),
                        _ => String::new(),
                    };
                    return Err(Failure::usage(format!(
                        "a second result set{at}: --format csv prints one result set on \
                         standard output; {hint}"
                    )));
                }
                *printed = true;
                self.write(block, &text).map_err(Failure::output)
            }
            CsvSink::Many => self.write(block, &text).map_err(Failure::output),
            CsvSink::Dir { dir, written } => {
                let path = csv_file_name(dir, meta, written.len());
                if written.contains(&path) {
                    return Err(Failure::usage(format!(
                        "two result sets would both be written to {}: give the files \
                         different names",
                        path.display()
                    )));
                }
                std::fs::write(&path, text)
                    .map_err(|e| Failure::usage(format!("cannot write {}: {e}", path.display())))?;
                written.push(path);
                Ok(())
            }
        }
    }
}

/// The file for a result set in `--out-dir`: the source file's stem and the statement
/// number (`queries-3.csv`), else its position among the result sets.
fn csv_file_name(dir: &Path, meta: &Map<String, Json>, seen: usize) -> PathBuf {
    let stem = meta
        .get("file")
        .and_then(Json::as_str)
        .and_then(|f| Path::new(f).file_stem())
        .map(|s| s.to_string_lossy().into_owned());
    let n = meta
        .get("statement")
        .and_then(Json::as_u64)
        .filter(|n| *n > 0);
    let name = match (stem, n) {
        (Some(s), Some(n)) => format!("{s}-{n}.csv"),
        (Some(s), None) => format!("{s}.csv"),
        _ => format!("result-{}.csv", seen + 1),
    };
    dir.join(name)
}

/// A result set as CSV: the header row, then the rows.
pub fn csv_rows(rows: &ResultSet) -> String {
    let mut s = String::new();
    csv_line(&mut s, rows.columns.iter().map(String::as_str));
    for r in &rows.rows {
        let cells: Vec<String> = r.iter().map(csv_value).collect();
        csv_line(&mut s, cells.iter().map(String::as_str));
    }
    s
}

/// The row-count line under a table: on the rail's foot in the table format.
pub fn count_line(n: usize, extra: &str) -> String {
    format!(
        "{} {n} row{}{extra}",
        glyphs::get().foot,
        if n == 1 { "" } else { "s" }
    )
}

/// One block in one format, ending with a newline.
pub fn render(format: Format, block: &Block) -> String {
    match (format, block) {
        (Format::Json, Block::Rows { meta, rows, .. }) => {
            let mut obj = meta.clone();
            obj.insert("columns".into(), json!(rows.columns));
            let data: Vec<Json> = rows
                .rows
                .iter()
                .map(|r| Json::Array(r.iter().map(json_value).collect()))
                .collect();
            obj.insert("rows".into(), Json::Array(data));
            format!("{}\n", Json::Object(obj))
        }
        (Format::Json, Block::Note { text, meta }) => {
            let mut obj = meta.clone();
            obj.insert("message".into(), json!(text));
            format!("{}\n", Json::Object(obj))
        }
        (
            Format::Table,
            Block::Rows {
                title, rows, count, ..
            },
        ) => {
            let mut s = String::new();
            if let Some(t) = title {
                s.push_str(&format!("{} {t}\n", glyphs::get().title));
            }
            if !rows.columns.is_empty() {
                s.push_str(&table(rows));
                s.push('\n');
            }
            if *count {
                s.push_str(&count_line(rows.rows.len(), ""));
                s.push('\n');
            }
            s
        }
        (Format::Table, Block::Note { text, .. }) => format!("{text}\n"),
        (Format::Csv, Block::Rows { rows, .. }) => csv_rows(rows),
        (Format::Csv, Block::Note { .. }) => String::new(),
        (Format::Markdown, Block::Rows { title, rows, .. }) => {
            let mut s = String::new();
            if let Some(t) = title {
                s.push_str(&format!("**{}**\n\n", md_escape(t)));
            }
            s.push_str(&markdown(rows));
            s
        }
        (Format::Markdown, Block::Note { text, .. }) => format!("{}\n", md_escape(text)),
        (Format::Json, Block::Done { meta, changed, .. }) => {
            let mut obj = meta.clone();
            obj.insert("changed".into(), json!(changed));
            format!("{}\n", Json::Object(obj))
        }
        (Format::Csv, Block::Done { .. }) => String::new(),
        (Format::Json, Block::Error { detail, meta, .. }) => {
            let mut obj = meta.clone();
            obj.insert("error".into(), json!(detail));
            format!("{}\n", Json::Object(obj))
        }
        (Format::Table, Block::Error { title, detail, .. }) => {
            format!("{} {title}\n{detail}\n", glyphs::get().title)
        }
        (Format::Csv, Block::Error { .. }) => String::new(),
        (Format::Markdown, Block::Error { title, detail, .. }) => {
            format!("**{}**\n\n```\n{detail}\n```\n", md_escape(title))
        }
        (Format::Table, Block::Done { title, changed, .. }) => {
            let g = glyphs::get();
            format!("{} {title} {} {}\n", g.title, g.dot, done(*changed))
        }
        (Format::Markdown, Block::Done { title, changed, .. }) => {
            format!("**{}**: {}\n", md_escape(title), done(*changed))
        }
    }
}

fn done(changed: u64) -> String {
    match changed {
        0 => "done".to_string(),
        1 => "done, 1 row changed".to_string(),
        n => format!("done, {n} rows changed"),
    }
}

/// The shell's table look: a rail down the left edge, a dashed rule under the header that
/// leaves the rail, columns three spaces apart, no frame on the other sides.
fn style() -> TableStyle {
    let g = glyphs::get();
    TableStyle::new()
        .header_lines(ContentLineStyle::none().left(g.rail))
        .header_separator(
            LineStyle::none()
                .left(g.rule_start)
                .fill(g.rule)
                .junction(g.rule),
        )
        .content_lines(ContentLineStyle::none().left(g.rail))
}

/// Whether every non-NULL value of column `c` is a number (and there is one).
fn numeric_column(rows: &ResultSet, c: usize) -> bool {
    let mut any = false;
    for r in &rows.rows {
        match r.get(c) {
            Some(Value::Integer(_) | Value::Real(_)) => any = true,
            Some(Value::Null) | None => {}
            Some(_) => return false,
        }
    }
    any
}

/// A result set as a table in the shell's style.
pub fn table(rows: &ResultSet) -> String {
    table_within(rows, None)
}

/// A table no wider than `width` columns when given: long cells wrap onto more lines,
/// so a terminal never breaks the rule.
pub fn table_within(rows: &ResultSet, width: Option<u16>) -> String {
    let mut t = Table::new();
    t.load_style(style());
    if let Some(w) = width {
        t.set_width(w);
        t.set_content_arrangement(ContentArrangement::Dynamic);
    }
    t.set_header(rows.columns.clone());
    for r in &rows.rows {
        t.add_row(r.iter().map(render_value).collect::<Vec<_>>());
    }
    for c in 0..rows.columns.len() {
        if numeric_column(rows, c)
            && let Some(col) = t.column_mut(c)
        {
            col.set_cell_alignment(CellAlignment::Right);
        }
    }
    // Trailing spaces carry nothing and upset diff tools.
    t.lines()
        .map(|l| l.trim_end().to_string())
        .collect::<Vec<_>>()
        .join("\n")
}

fn markdown(rows: &ResultSet) -> String {
    let mut s = String::new();
    let header: Vec<String> = rows.columns.iter().map(|c| md_escape(c)).collect();
    s.push_str(&format!("| {} |\n", header.join(" | ")));
    let rules: Vec<&str> = (0..rows.columns.len())
        .map(|c| {
            if numeric_column(rows, c) {
                "---:"
            } else {
                "---"
            }
        })
        .collect();
    s.push_str(&format!("|{}|\n", rules.join("|")));
    for r in &rows.rows {
        let cells: Vec<String> = r.iter().map(|v| md_escape(&render_value(v))).collect();
        s.push_str(&format!("| {} |\n", cells.join(" | ")));
    }
    s
}

fn md_escape(text: &str) -> String {
    text.replace('|', "\\|").replace('\n', "<br>")
}

fn csv_line<'a>(s: &mut String, cells: impl Iterator<Item = &'a str>) {
    let mut first = true;
    for c in cells {
        if !first {
            s.push(',');
        }
        first = false;
        if c.contains([',', '"', '\n', '\r']) || c.starts_with(' ') || c.ends_with(' ') {
            s.push('"');
            s.push_str(&c.replace('"', "\"\""));
            s.push('"');
        } else {
            s.push_str(c);
        }
    }
    s.push('\n');
}

fn csv_value(v: &Value) -> String {
    match v {
        Value::Null => String::new(),
        Value::Blob(b) => hex(b),
        other => render_value(other),
    }
}

fn hex(b: &[u8]) -> String {
    b.iter().map(|x| format!("{x:02x}")).collect()
}

/// One SQL value as JSON.
pub fn json_value(v: &Value) -> Json {
    match v {
        Value::Null => Json::Null,
        Value::Integer(i) => json!(i),
        Value::Real(r) if r.is_finite() => json!(r),
        Value::Real(r) => json!(if *r > 0.0 { "inf" } else { "-inf" }),
        Value::Text(t) => json!(t),
        Value::Blob(b) => json!(hex(b)),
    }
}

/// JSON fields naming a statement of a file.
pub fn origin(file: &str, statement: usize, line: usize) -> Map<String, Json> {
    let mut m = Map::new();
    m.insert("file".into(), json!(file));
    m.insert("statement".into(), json!(statement));
    m.insert("line".into(), json!(line));
    m
}

#[cfg(test)]
mod tests {
    use super::*;

    fn sample() -> ResultSet {
        ResultSet {
            columns: vec!["name".into(), "x".into()],
            rows: vec![
                vec![Value::Text("a, \"b\"".into()), Value::Real(0.5)],
                vec![Value::Text("c|d".into()), Value::Null],
                vec![Value::Blob(vec![1, 255]), Value::Real(f64::INFINITY)],
            ],
        }
    }

    #[test]
    fn csv_quotes_and_nulls() {
        let s = render(Format::Csv, &Block::rows(None, Map::new(), sample()));
        assert_eq!(s, "name,x\n\"a, \"\"b\"\"\",0.5\nc|d,\n01ff,inf\n");
    }

    #[test]
    fn json_rows() {
        let s = render(
            Format::Json,
            &Block::rows(None, origin("f.sql", 2, 7), sample()),
        );
        let v: Json = serde_json::from_str(&s).unwrap();
        assert_eq!(v["file"], "f.sql");
        assert_eq!(v["rows"][1][1], Json::Null);
        assert_eq!(v["rows"][2][1], "inf");
        assert_eq!(v["rows"][0][1], 0.5);
    }

    #[test]
    fn markdown_escapes_pipes_and_aligns_numbers() {
        let s = render(Format::Markdown, &Block::rows(None, Map::new(), sample()));
        assert!(s.contains("|---|---:|"), "{s}");
        assert!(s.contains("c\\|d"), "{s}");
    }

    #[test]
    fn table_right_aligns_numbers() {
        let rs = ResultSet {
            columns: vec!["k".into(), "value".into()],
            rows: vec![vec![Value::Text("a".into()), Value::Integer(1)]],
        };
        let s = table(&rs);
        let g = glyphs::get();
        let (r, s0, f) = (g.rail, g.rule_start, g.rule.to_string());
        assert_eq!(
            s,
            format!("{r} k   value\n{s0}{}\n{r} a       1", f.repeat(11))
        );
    }
}
