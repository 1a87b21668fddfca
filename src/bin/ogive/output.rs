//! The four output formats and the shell's own table look.
//!
//! Every verb prints a sequence of [`Block`]s: result sets with a title (which file and
//! statement they came from) and notes. The formats:
//!
//! - `table`: a title line starting with `▸`, a table with dotted column rules and a heavy
//!   rule under the header, numbers right-aligned, and a row count;
//! - `csv`: RFC 4180 rows with a header row; a title is a `#` line above, NULL is an empty
//!   field, and blocks are separated by a blank line;
//! - `json`: one JSON object per block and line (`columns` and `rows` arrays, plus the
//!   block's origin); NULL is null, an infinite REAL is the string `"inf"` or `"-inf"`, a
//!   BLOB is its hex digits as a string;
//! - `markdown`: a bold title line and a pipe table, numbers right-aligned.

use std::io::Write;

use comfy_table::{CellAlignment, ContentLineStyle, LineStyle, Table, TableStyle};
use ogive::functions::render_value;
use rusqlite::types::Value;
use serde_json::{Map, Value as Json, json};

use crate::db::ResultSet;

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

/// Writes blocks in one format, with a blank line between a table and what follows it.
pub struct Printer<W: Write> {
    pub format: Format,
    out: W,
    /// Whether the last block printed was a one-line block (a note or a done line).
    last: Option<bool>,
}

impl<W: Write> Printer<W> {
    pub fn new(format: Format, out: W) -> Self {
        Printer {
            format,
            out,
            last: None,
        }
    }

    /// Prints one block.
    pub fn print(&mut self, block: &Block) -> std::io::Result<()> {
        let text = render(self.format, block);
        if text.is_empty() {
            return Ok(());
        }
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
                s.push_str(&format!("▸ {t}\n"));
            }
            if !rows.columns.is_empty() {
                s.push_str(&table(rows));
                s.push('\n');
            }
            if *count {
                let n = rows.rows.len();
                s.push_str(&format!("{n} row{}\n", if n == 1 { "" } else { "s" }));
            }
            s
        }
        (Format::Table, Block::Note { text, .. }) => format!("{text}\n"),
        (Format::Csv, Block::Rows { title, rows, .. }) => {
            let mut s = String::new();
            if let Some(t) = title {
                s.push_str(&format!("# {t}\n"));
            }
            csv_line(&mut s, rows.columns.iter().map(String::as_str));
            for r in &rows.rows {
                let cells: Vec<String> = r.iter().map(csv_value).collect();
                csv_line(&mut s, cells.iter().map(String::as_str));
            }
            s
        }
        (Format::Csv, Block::Note { text, .. }) => format!("# {text}\n"),
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
        (Format::Table, Block::Error { title, detail, .. }) => format!("▸ {title}\n{detail}\n"),
        (Format::Csv, Block::Error { title, detail, .. }) => {
            let mut s = format!("# {title}\n");
            for l in detail.lines() {
                s.push_str(&format!("# {l}\n"));
            }
            s
        }
        (Format::Markdown, Block::Error { title, detail, .. }) => {
            format!("**{}**\n\n```\n{detail}\n```\n", md_escape(title))
        }
        (Format::Table, Block::Done { title, changed, .. }) => {
            format!("▸ {title} · {}\n", done(*changed))
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

/// The shell's table look: dotted rules between columns, a heavy rule under the header,
/// no outer frame.
const STYLE: TableStyle = TableStyle::new()
    .header_lines(ContentLineStyle::none().junction('┆'))
    .header_separator(LineStyle::none().fill('━').junction('┿'))
    .content_lines(ContentLineStyle::none().junction('┆'));

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
    let mut t = Table::new();
    t.load_style(STYLE);
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
        assert_eq!(s, " k ┆ value\n━━━┿━━━━━━━\n a ┆     1");
    }
}
