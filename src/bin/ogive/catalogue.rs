//! `ogive functions [NAME]`: the catalogue, read from the library's registry (the same rows
//! that register the functions and write the README's table).

use std::io::Write;

use ogive::catalogue::{self as functions, FunctionDef};
use rusqlite::types::Value;
use serde_json::{Map, json};

use crate::Failure;
use crate::db::ResultSet;
use crate::output::{Block, Format};

fn text(s: &str) -> Value {
    Value::Text(s.to_string())
}

fn arities(d: &FunctionDef) -> String {
    d.arities
        .iter()
        .map(i32::to_string)
        .collect::<Vec<_>>()
        .join(",")
}

/// "1 argument", "2 or 3 arguments".
fn arg_count(d: &FunctionDef) -> String {
    let n = arities(d).replace(',', " or ");
    format!("{n} argument{}", if d.arities == [1] { "" } else { "s" })
}

/// The catalogue as printed: the table and markdown formats show the signature (which
/// holds the name); CSV and JSON give the name, kind, signature, arities and summary.
pub fn listing(format: Format) -> String {
    match format {
        Format::Markdown => functions::markdown_table(),
        Format::Table => {
            let rows = ResultSet {
                columns: ["function", "kind", "summary"].map(String::from).to_vec(),
                rows: functions::all()
                    .map(|d| vec![text(d.signature), text(d.kind.word()), text(d.summary)])
                    .collect(),
            };
            let n = rows.rows.len();
            format!(
                "{}\n{n} functions; `ogive functions NAME` shows one in full\n",
                crate::output::table(&rows)
            )
        }
        Format::Csv | Format::Json => {
            let rows = ResultSet {
                columns: ["name", "kind", "signature", "arities", "summary"]
                    .map(String::from)
                    .to_vec(),
                rows: functions::all()
                    .map(|d| {
                        vec![
                            text(d.name),
                            text(d.kind.word()),
                            text(d.signature),
                            text(&arities(d)),
                            text(d.summary),
                        ]
                    })
                    .collect(),
            };
            crate::output::render(format, &Block::rows(None, Map::new(), rows))
        }
    }
}

/// Wraps text at `width` columns, indenting every line by `indent` spaces.
fn wrap(text: &str, width: usize, indent: usize) -> String {
    let mut out = String::new();
    let mut line = String::new();
    for word in text.split_whitespace() {
        if !line.is_empty() && indent + line.chars().count() + 1 + word.chars().count() > width {
            out.push_str(&format!("{}{line}\n", " ".repeat(indent)));
            line.clear();
        }
        if !line.is_empty() {
            line.push(' ');
        }
        line.push_str(word);
    }
    if !line.is_empty() {
        out.push_str(&format!("{}{line}\n", " ".repeat(indent)));
    }
    out
}

/// One function's full entry.
pub fn entry(d: &FunctionDef, format: Format) -> String {
    match format {
        Format::Table => format!(
            "{}  ({}, {})\n\n{}\n{}\nexample\n  {}\n  {} {}\n",
            d.signature,
            d.kind.word(),
            arg_count(d),
            wrap(d.summary, 88, 2),
            wrap(d.help, 88, 2),
            d.example,
            crate::glyphs::get().gives,
            d.example_result
        ),
        Format::Markdown => format!(
            "### `{}`\n\n{}, {}: {}\n\n{}\n\n```sql\n{}\n```\n\nresult: `{}`\n",
            d.signature,
            d.kind.word(),
            arg_count(d),
            d.summary,
            d.help.split_whitespace().collect::<Vec<_>>().join(" "),
            d.example,
            d.example_result
        ),
        Format::Json => format!(
            "{}\n",
            json!({
                "name": d.name,
                "kind": d.kind.word(),
                "signature": d.signature,
                "arities": d.arities,
                "summary": d.summary,
                "help": d.help.split_whitespace().collect::<Vec<_>>().join(" "),
                "example": d.example,
                "example_result": d.example_result,
            })
        ),
        Format::Csv => {
            let rows = ResultSet {
                columns: [
                    "name",
                    "kind",
                    "signature",
                    "arities",
                    "summary",
                    "help",
                    "example",
                    "example_result",
                ]
                .map(String::from)
                .to_vec(),
                rows: vec![vec![
                    text(d.name),
                    text(d.kind.word()),
                    text(d.signature),
                    text(&arities(d)),
                    text(d.summary),
                    text(&d.help.split_whitespace().collect::<Vec<_>>().join(" ")),
                    text(d.example),
                    text(d.example_result),
                ]],
            };
            crate::output::render(format, &Block::rows(None, Map::new(), rows))
        }
    }
}

/// Edit distance between two names (insertions, deletions, substitutions and swaps of
/// neighbours each count one), ignoring case.
pub fn distance(a: &str, b: &str) -> usize {
    let a: Vec<char> = a.to_lowercase().chars().collect();
    let b: Vec<char> = b.to_lowercase().chars().collect();
    let mut d = vec![vec![0usize; b.len() + 1]; a.len() + 1];
    for (i, row) in d.iter_mut().enumerate() {
        row[0] = i;
    }
    for (j, cell) in d[0].iter_mut().enumerate() {
        *cell = j;
    }
    for i in 1..=a.len() {
        for j in 1..=b.len() {
            let cost = usize::from(a[i - 1] != b[j - 1]);
            let mut v = (d[i - 1][j] + 1)
                .min(d[i][j - 1] + 1)
                .min(d[i - 1][j - 1] + cost);
            if i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1] {
                v = v.min(d[i - 2][j - 2] + 1);
            }
            d[i][j] = v;
        }
    }
    d[a.len()][b.len()]
}

/// The registry's names closest to `name` (up to three, closest first): within one edit for
/// short names, two up to eight letters, three beyond.
pub fn nearest(name: &str) -> Vec<&'static str> {
    let len = name.chars().count();
    let limit = match len {
        0..=4 => 1,
        5..=8 => 2,
        _ => 3,
    };
    let mut near: Vec<(usize, &'static str)> = functions::all()
        .map(|d| (distance(name, d.name), d.name))
        .filter(|(k, _)| *k <= limit && *k > 0)
        .collect();
    near.sort();
    near.into_iter().take(3).map(|(_, n)| n).collect()
}

/// The page for `functions NAME`, or a usage error naming close matches.
pub fn lookup(name: &str, format: Format) -> Result<String, Failure> {
    match functions::find(name) {
        Some(d) => Ok(entry(d, format)),
        None => {
            let lower = name.to_ascii_lowercase();
            let mut near: Vec<&str> = functions::all()
                .map(|d| d.name)
                .filter(|n| n.contains(&lower) || lower.contains(n))
                .collect();
            for n in nearest(name) {
                if !near.contains(&n) {
                    near.push(n);
                }
            }
            let hint = if near.is_empty() {
                "; `ogive functions` lists them all".to_string()
            } else {
                format!("; did you mean {}?", near.join(", "))
            };
            Err(Failure::usage(format!(
                "ogive has no function named '{name}'{hint}"
            )))
        }
    }
}

/// The `functions` verb.
pub fn functions(name: Option<&str>, format: Format) -> Result<i32, Failure> {
    let page = match name {
        None => listing(format),
        Some(n) => lookup(n, format)?,
    };
    std::io::stdout()
        .lock()
        .write_all(page.as_bytes())
        .map_err(Failure::output)?;
    Ok(0)
}
