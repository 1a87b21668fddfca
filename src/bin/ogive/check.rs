//! `ogive check`: every query of a check file is one check. A check fails when any row's
//! `ok` column is false (0) or NULL (or not a number), and is an error when the query
//! fails or has no `ok` column. Statements without result columns (a temporary view, say)
//! run as setup and appear only when they fail. The comment line directly above a query
//! names its check; without one, the check is named by its file and line.
//!
//! Output: the failing rows of each failed check, each error, the summary table (check,
//! rows, failed rows, status) and a tally line. With `--format csv` standard output holds
//! the summary only (the failing rows are in the JSON format and the JUnit report), and
//! the rest goes to standard error. Exit status 0 when every check passes, 1 otherwise, 2
//! for usage and file problems; `--report` also writes JUnit XML.
//!
//! Checks read: a database file is opened read-only, so a check file that writes to it
//! (a `DELETE` left in by mistake) is an error, not a pass. TEMP tables and views still
//! work, as setup. `--allow-writes` opens the file read-write. An in-memory database (no
//! `--db`) holds only what the check file itself makes, so it stays writable.

use std::path::Path;

use rusqlite::types::Value;
use serde_json::{Map, json};

use crate::Failure;
use crate::db::{Access, Engine, EngineKind, Opened, Outcome, Params, ResultSet};
use crate::output::{Block, Format, Printer, origin};
use crate::run::{Source, Step, step, warn_unused};

/// How a check ended.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum Status {
    Pass,
    Fail,
    Error,
}

impl Status {
    fn word(self) -> &'static str {
        match self {
            Status::Pass => "pass",
            Status::Fail => "FAIL",
            Status::Error => "ERROR",
        }
    }
}

/// One check's result.
pub struct CheckResult {
    pub name: String,
    pub file: String,
    pub line: usize,
    pub status: Status,
    /// Rows the query returned.
    pub rows: usize,
    /// The failing rows, with the query's columns.
    pub failing: ResultSet,
    /// For an error: where and why.
    pub error: Option<String>,
}

impl CheckResult {
    /// The check's name, with its file and line unless the name is just those.
    fn located(&self) -> String {
        let at = format!("{}:{}", self.file, self.line);
        if self.name == at {
            at
        } else {
            format!("{} ({at})", self.name)
        }
    }
}

/// The most failing rows printed per check (the count is always complete).
const SHOWN_ROWS: usize = 50;

/// Whether an `ok` value passes: a non-zero number. NULL, zero, text and BLOBs fail.
fn passes(v: &Value) -> bool {
    match v {
        Value::Integer(i) => *i != 0,
        Value::Real(r) => *r != 0.0,
        _ => false,
    }
}

/// Runs the checks of every file in order.
pub fn run_checks(
    engine: Engine<'_>,
    sources: &[Source],
    params: &mut Params,
) -> Result<Vec<CheckResult>, Failure> {
    let mut results = Vec::new();
    for src in sources {
        for stmt in &src.statements {
            let name = stmt
                .name()
                .map_or_else(|| format!("{}:{}", src.name, stmt.line), str::to_string);
            let mut result = CheckResult {
                name,
                file: src.name.clone(),
                line: stmt.line,
                status: Status::Pass,
                rows: 0,
                failing: ResultSet::default(),
                error: None,
            };
            match step(engine, src, stmt, params)? {
                Step::Failed(description) => {
                    result.status = Status::Error;
                    result.error = Some(description);
                }
                Step::Ran(Outcome::Changed(_)) => continue,
                Step::Ran(Outcome::Rows(rs)) => {
                    let Some(ok) = rs.columns.iter().position(|c| c.eq_ignore_ascii_case("ok"))
                    else {
                        result.status = Status::Error;
                        result.error = Some(src.describe(
                            stmt,
                            "the query has no ok column; return one, for example `count(*) = 0 AS ok`",
                            None,
                        ));
                        results.push(result);
                        continue;
                    };
                    result.rows = rs.rows.len();
                    result.failing.columns = rs.columns;
                    result.failing.rows = rs
                        .rows
                        .into_iter()
                        .filter(|r| !r.get(ok).is_some_and(passes))
                        .collect();
                    if !result.failing.rows.is_empty() {
                        result.status = Status::Fail;
                    }
                }
            }
            results.push(result);
        }
    }
    Ok(results)
}

fn count(results: &[CheckResult], s: Status) -> usize {
    results.iter().filter(|r| r.status == s).count()
}

/// The tally line under the summary.
pub fn tally(results: &[CheckResult]) -> String {
    format!(
        "{} check{}: {} pass, {} fail, {} error",
        results.len(),
        if results.len() == 1 { "" } else { "s" },
        count(results, Status::Pass),
        count(results, Status::Fail),
        count(results, Status::Error)
    )
}

/// Prints the details, the summary table and the tally.
pub fn report(
    results: &[CheckResult],
    printer: &mut Printer<impl std::io::Write>,
) -> Result<(), Failure> {
    let csv = printer.format == Format::Csv;
    for r in results {
        let mut meta = origin(&r.file, 0, r.line);
        meta.remove("statement");
        meta.insert("check".into(), json!(r.name));
        meta.insert("status".into(), json!(r.status.word().to_ascii_lowercase()));
        match r.status {
            Status::Pass => {}
            Status::Fail if csv => {}
            Status::Fail => {
                let n = r.failing.rows.len();
                let mut shown = r.failing.clone();
                shown.rows.truncate(SHOWN_ROWS);
                let more = if n > SHOWN_ROWS {
                    format!(", the first {SHOWN_ROWS} shown")
                } else {
                    String::new()
                };
                let title = format!("{} failed on {n} of {} rows{more}", r.located(), r.rows);
                printer.print(&Block::Rows {
                    title: Some(title),
                    meta,
                    rows: shown,
                    count: false,
                })?;
            }
            Status::Error => {
                printer.print(&Block::Error {
                    title: format!("{} could not run", r.located()),
                    detail: r.error.clone().unwrap_or_default(),
                    meta,
                })?;
            }
        }
    }
    let summary = ResultSet {
        columns: ["check", "rows", "failed rows", "status"]
            .map(String::from)
            .to_vec(),
        rows: results
            .iter()
            .map(|r| {
                let (rows, failed) = if r.status == Status::Error {
                    (Value::Null, Value::Null)
                } else {
                    (
                        Value::Integer(r.rows as i64),
                        Value::Integer(r.failing.rows.len() as i64),
                    )
                };
                vec![
                    Value::Text(r.name.clone()),
                    rows,
                    failed,
                    Value::Text(r.status.word().into()),
                ]
            })
            .collect(),
    };
    let mut meta = Map::new();
    meta.insert("summary".into(), json!(true));
    if csv {
        // CSV's one result set: the summary, without a title.
        printer.print(&Block::rows(None, meta, summary))?;
        eprintln!("{}", tally(results));
        return Ok(());
    }
    printer.print(&Block::Rows {
        title: Some("checks".into()),
        meta,
        rows: summary,
        count: false,
    })?;
    printer.print(&Block::note(tally(results)))
}

/// Text that XML may carry: the five escapes, and characters XML 1.0 forbids dropped.
fn xml_escape(s: &str) -> String {
    let mut out = String::with_capacity(s.len());
    for c in s.chars() {
        match c {
            '&' => out.push_str("&amp;"),
            '<' => out.push_str("&lt;"),
            '>' => out.push_str("&gt;"),
            '"' => out.push_str("&quot;"),
            '\'' => out.push_str("&apos;"),
            '\t' | '\n' | '\r' => out.push(c),
            c if (c as u32) < 0x20 || c == '\u{FFFE}' || c == '\u{FFFF}' => {}
            c => out.push(c),
        }
    }
    out
}

/// The JUnit XML report: one testsuite per file, one testcase per check, with a failure
/// (the failing rows as CSV) or an error (the SQL error) element.
pub fn junit(results: &[CheckResult], files: &[String]) -> String {
    let mut s = String::from("<?xml version=\"1.0\" encoding=\"UTF-8\"?>\n");
    s.push_str(&format!(
        "<testsuites name=\"ogive check\" tests=\"{}\" failures=\"{}\" errors=\"{}\">\n",
        results.len(),
        count(results, Status::Fail),
        count(results, Status::Error)
    ));
    for file in files {
        let mine: Vec<&CheckResult> = results.iter().filter(|r| &r.file == file).collect();
        let fails = mine.iter().filter(|r| r.status == Status::Fail).count();
        let errors = mine.iter().filter(|r| r.status == Status::Error).count();
        s.push_str(&format!(
            "  <testsuite name=\"{}\" tests=\"{}\" failures=\"{fails}\" errors=\"{errors}\" skipped=\"0\">\n",
            xml_escape(file),
            mine.len()
        ));
        for r in mine {
            s.push_str(&format!(
                "    <testcase name=\"{}\" classname=\"{}\" file=\"{}\" line=\"{}\"",
                xml_escape(&r.name),
                xml_escape(file),
                xml_escape(file),
                r.line
            ));
            match r.status {
                Status::Pass => s.push_str("/>\n"),
                Status::Fail => {
                    let body = crate::output::render(
                        Format::Csv,
                        &Block::rows(None, Map::new(), r.failing.clone()),
                    );
                    s.push_str(&format!(
                        ">\n      <failure type=\"check failed\" message=\"{} of {} rows failed\">{}</failure>\n    </testcase>\n",
                        r.failing.rows.len(),
                        r.rows,
                        xml_escape(&body)
                    ));
                }
                Status::Error => {
                    let e = r.error.as_deref().unwrap_or("");
                    let first = e.lines().next().unwrap_or("");
                    s.push_str(&format!(
                        ">\n      <error type=\"query error\" message=\"{}\">{}</error>\n    </testcase>\n",
                        xml_escape(first),
                        xml_escape(e)
                    ));
                }
            }
        }
        s.push_str("  </testsuite>\n");
    }
    s.push_str("</testsuites>\n");
    s
}

/// The `check` verb.
pub fn check(
    files: &[String],
    db_path: Option<&Path>,
    params: &[String],
    format: Format,
    report_path: Option<&Path>,
    allow_writes: bool,
    engine: (EngineKind, &[String], Option<&str>),
) -> Result<i32, Failure> {
    let mut params = Params::parse(params)?;
    let sources = Source::load_all(files)?;
    for src in &sources {
        if src.statements.is_empty() {
            return Err(Failure::usage(format!(
                "{} has no checks (no SQL statements)",
                src.name
            )));
        }
    }
    let access = if allow_writes {
        Access::Existing
    } else {
        Access::ReadOnly
    };
    let opened = Opened::open(engine.0, engine.1, engine.2, db_path, access)?;
    let results = run_checks(opened.engine(), &sources, &mut params)?;
    let names: Vec<String> = sources.iter().map(|s| s.name.clone()).collect();
    if results.is_empty() {
        return Err(Failure::usage(format!(
            "no checks in {}: a check is a query with an ok column",
            names.join(", ")
        )));
    }
    let mut printer = Printer::new(format, std::io::stdout().lock());
    report(&results, &mut printer)?;
    if let Some(path) = report_path {
        std::fs::write(path, junit(&results, &names)).map_err(|e| {
            Failure::usage(format!("cannot write the report {}: {e}", path.display()))
        })?;
    }
    warn_unused(&params);
    Ok(i32::from(results.iter().any(|r| r.status != Status::Pass)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ok_values() {
        assert!(passes(&Value::Integer(1)));
        assert!(passes(&Value::Real(0.5)));
        assert!(!passes(&Value::Integer(0)));
        assert!(!passes(&Value::Null));
        assert!(!passes(&Value::Text("1".into())));
    }

    #[test]
    fn xml_escapes_markup_and_drops_control_characters() {
        assert_eq!(
            xml_escape("a<b>&\"c'\u{1}\n"),
            "a&lt;b&gt;&amp;&quot;c&apos;\n"
        );
    }
}
