//! The interactive prompt: SQL ending in `;` runs and prints; a few words of the shell's
//! own, alone on a line, do the rest:
//!
//! | word | does |
//! |---|---|
//! | `open PATH` | opens (or creates) a database file; `open` alone, a new in-memory one |
//! | `tables` | lists tables and views with their row counts and columns |
//! | `functions [NAME]` | the catalogue, or one function in full |
//! | `format [table\|csv\|json\|markdown]` | shows or changes the output format |
//! | `help` | this list |
//! | `bye` | leaves (so does Ctrl-D) |
//!
//! A line that starts with `.` or `\\` (a habit from other SQL prompts) is not SQL here: it
//! gets a one-line hint naming the shell's word for it, instead of starting a statement.
//!
//! On a terminal there is line editing and a history file (`$OGIVE_HISTORY`, else
//! `~/.ogive_history`); Ctrl-C clears the line, or cancels the running statement and
//! comes back to the prompt; `tables` fits its table to the terminal's width. From a pipe,
//! lines are read without prompts, the first failing statement or word ends the run with
//! status 1, and Ctrl-C ends it with status 130.

use std::io::{BufRead, IsTerminal, Write};
use std::path::{Path, PathBuf};
use std::time::Instant;

use rusqlite::Connection;
use rustyline::DefaultEditor;
use rustyline::error::ReadlineError;

use crate::Failure;
use crate::db::{self, Outcome, Params, StatementError};
use crate::glyphs;
use crate::interrupt;
use crate::output::{Block, CsvSink, Format, Printer, count_line};
use crate::run::Source;
use crate::script;

const HELP: &str = "\
SQL ending in ; runs on the open database and prints its rows. Words of the shell:
  open PATH          open or create a database file (open alone: a new in-memory one)
  tables             list tables and views, their row counts and columns
  functions [NAME]   list ogive's functions, or show one in full
  format [WORD]      show or change the output: table, csv, json or markdown
  help               this list
  bye                leave (Ctrl-D leaves too; Ctrl-C cancels a running statement)";

struct Session {
    conn: Connection,
    name: String,
    format: Format,
    /// The terminal's width, for `tables` (None from a pipe).
    width: Option<u16>,
}

enum Read {
    Line(String),
    Interrupted,
    End,
}

/// Where lines come from: the line editor on a terminal, plain reads otherwise.
enum Input {
    Editor(Box<DefaultEditor>, Option<PathBuf>),
    Plain(std::io::StdinLock<'static>),
}

impl Input {
    fn read(&mut self, prompt: &str) -> Read {
        match self {
            Input::Editor(ed, _) => match ed.readline(prompt) {
                Ok(l) => Read::Line(l),
                Err(ReadlineError::Interrupted) => Read::Interrupted,
                Err(_) => Read::End,
            },
            Input::Plain(stdin) => {
                let mut l = String::new();
                match stdin.read_line(&mut l) {
                    Ok(0) | Err(_) => Read::End,
                    Ok(_) => Read::Line(l.trim_end_matches(['\n', '\r']).to_string()),
                }
            }
        }
    }

    /// The terminal's width in columns, when there is a terminal.
    fn width(&mut self) -> Option<u16> {
        match self {
            Input::Editor(ed, _) => ed.dimensions().map(|(w, _)| w).filter(|w| *w >= 20),
            Input::Plain(_) => None,
        }
    }

    fn remember(&mut self, entry: &str) {
        if let Input::Editor(ed, path) = self {
            let _ = ed.add_history_entry(entry.trim());
            if let Some(p) = path {
                let _ = ed.save_history(p);
            }
        }
    }
}

fn history_path() -> Option<PathBuf> {
    if let Some(p) = std::env::var_os("OGIVE_HISTORY") {
        return Some(PathBuf::from(p));
    }
    std::env::var_os("HOME").map(|h| PathBuf::from(h).join(".ogive_history"))
}

fn open(path: Option<&Path>) -> Result<Session, Failure> {
    let conn = db::open(path, db::Access::Create)?;
    let name = path.map_or("memory".to_string(), |p| {
        p.file_name().map_or_else(
            || p.display().to_string(),
            |n| n.to_string_lossy().into_owned(),
        )
    });
    Ok(Session {
        conn,
        name,
        format: Format::Table,
        width: None,
    })
}

/// The prompt (no verb given).
pub fn prompt(db_path: Option<&Path>, format: Format) -> Result<i32, Failure> {
    let mut session = open(db_path)?;
    session.format = format;
    let interactive = std::io::stdin().is_terminal();
    let mut input = if interactive {
        let mut ed = DefaultEditor::new()
            .map_err(|e| Failure::usage(format!("cannot start the line editor: {e}")))?;
        let path = history_path();
        if let Some(p) = &path {
            let _ = ed.load_history(p);
        }
        let dot = glyphs::get().dot;
        println!(
            "ogive {} {dot} {} {dot} help lists the shell's words, bye leaves",
            env!("CARGO_PKG_VERSION"),
            if db_path.is_some() {
                format!("database {}", session.name)
            } else {
                "in-memory database".to_string()
            }
        );
        Input::Editor(Box::new(ed), path)
    } else {
        Input::Plain(std::io::stdin().lock())
    };
    let mut pending = String::new();
    loop {
        if interactive {
            interrupt::clear();
        }
        let head = format!("ogive:{}", session.name);
        let g = glyphs::get();
        let prompt = if pending.is_empty() {
            format!("{head} {} ", g.prompt)
        } else {
            format!("{} {} ", " ".repeat(head.chars().count()), g.more)
        };
        let line = match input.read(&prompt) {
            Read::Line(l) => l,
            Read::Interrupted => {
                pending.clear();
                continue;
            }
            Read::End => break,
        };
        if pending.is_empty() {
            if line.trim().is_empty() {
                continue;
            }
            if let Some(hint) = habit(&line) {
                input.remember(&line);
                eprintln!("ogive: {hint}");
                continue;
            }
            session.width = input.width();
            match command(&mut session, &line) {
                Some(Ok(true)) => {
                    input.remember(&line);
                    continue;
                }
                Some(Ok(false)) => {
                    input.remember(&line);
                    return Ok(0);
                }
                Some(Err(f)) => {
                    input.remember(&line);
                    if !interactive {
                        // From a pipe, a failed word ends the run as a failed statement does.
                        return Err(Failure {
                            code: if f.code == 130 { 130 } else { 1 },
                            message: f.message,
                        });
                    }
                    eprintln!("ogive: {}", f.message);
                    continue;
                }
                None => {}
            }
        }
        pending.push_str(&line);
        pending.push('\n');
        if script::is_complete(&pending) {
            input.remember(&pending);
            let text = std::mem::take(&mut pending);
            execute(&session, text, interactive)?;
        }
    }
    if !pending.trim().is_empty() {
        execute(&session, pending, interactive)?;
    }
    if interactive {
        println!();
    }
    Ok(0)
}

/// Runs the statements of one entry. A failing statement is reported and the rest of the
/// entry skipped; Ctrl-C cancels (and, from a pipe, ends the run with status 130).
fn execute(session: &Session, text: String, interactive: bool) -> Result<(), Failure> {
    let src = Source::from_text("input", text);
    let mut params = Params::default();
    let stdout = std::io::stdout();
    let mut printer = Printer::new(session.format, stdout.lock()).csv_sink(CsvSink::Many);
    for stmt in &src.statements {
        let start = Instant::now();
        let result = db::execute(&session.conn, &stmt.text, &mut params);
        let elapsed = start.elapsed().as_secs_f64();
        match result {
            Ok(_) if interrupt::requested() && !interactive => return Err(Failure::interrupted()),
            Ok(Outcome::Rows(rows)) => {
                let n = rows.rows.len();
                printer.print(&Block::Rows {
                    title: None,
                    meta: serde_json::Map::new(),
                    rows,
                    count: false,
                })?;
                if session.format == Format::Table {
                    println!("{}", count_line(n, &took(interactive, elapsed)));
                }
            }
            Ok(Outcome::Changed(n)) => {
                if session.format == Format::Table {
                    println!(
                        "done, {n} row{} changed{}",
                        if n == 1 { "" } else { "s" },
                        took(interactive, elapsed)
                    );
                }
            }
            Err(StatementError::Interrupted) => {
                if !interactive {
                    return Err(Failure::interrupted());
                }
                eprintln!("cancelled after {elapsed:.1} s");
                interrupt::clear();
                return Ok(());
            }
            Err(StatementError::Sql { message, offset }) => {
                let _ = std::io::stdout().flush();
                eprintln!("{}", src.describe(stmt, &message, offset));
                if !interactive {
                    // A script fed through a pipe stops at its first error, as `run` does.
                    return Err(Failure {
                        code: 1,
                        message: String::new(),
                    });
                }
                return Ok(());
            }
        }
    }
    Ok(())
}

/// The time a statement took, shown at a terminal only (piped output stays reproducible).
fn took(interactive: bool, seconds: f64) -> String {
    if interactive {
        format!(" {} {seconds:.3} s", glyphs::get().dot)
    } else {
        String::new()
    }
}

/// The hint for a line in the manner of other SQL prompts (`.tables`, `\\dt`, `.quit`), or
/// None for a line that does not start with `.` or `\\`.
fn habit(line: &str) -> Option<String> {
    let line = line.trim_start();
    let rest = line.strip_prefix('.').or_else(|| line.strip_prefix('\\'))?;
    let word: String = rest
        .chars()
        .take_while(|c| !c.is_whitespace())
        .collect::<String>()
        .to_ascii_lowercase();
    let arg = rest[word.len()..].trim();
    let ours = match word.as_str() {
        "tables" | "table" | "schema" | "dt" | "d" | "d+" | "dt+" | "l" | "databases" => {
            "tables".to_string()
        }
        "help" | "h" | "?" => "help".to_string(),
        "quit" | "exit" | "q" | "bye" => "bye".to_string(),
        "open" | "c" | "connect" => format!("open {}", if arg.is_empty() { "PATH" } else { arg }),
        "mode" | "format" | "x" => "format table|csv|json|markdown".to_string(),
        "functions" | "df" => "functions".to_string(),
        _ => {
            return Some(format!(
                "a line starting with {} is not SQL or a word of ogive's; type help for the \
                 shell's words",
                &line[..1]
            ));
        }
    };
    Some(format!(
        "{} is not a word of ogive's; type {ours}",
        crate::shown(line.split_whitespace().next().unwrap_or(line))
    ))
}

/// Handles a line that is one of the shell's words. Some(Ok(true)): handled, go on;
/// Some(Ok(false)): leave; None: not a word of the shell (so it is SQL).
fn command(session: &mut Session, line: &str) -> Option<Result<bool, Failure>> {
    let line = line.trim().trim_end_matches(';').trim();
    let (word, rest) = match line.split_once(char::is_whitespace) {
        Some((w, r)) => (w, r.trim()),
        None => (line, ""),
    };
    let out = |s: String| {
        let mut o = std::io::stdout().lock();
        o.write_all(s.as_bytes()).map_err(Failure::output)
    };
    let r = match word.to_ascii_lowercase().as_str() {
        "help" if rest.is_empty() => out(format!("{HELP}\n")),
        "bye" if rest.is_empty() => return Some(Ok(false)),
        "quit" | "exit" if rest.is_empty() => out("type bye (or press Ctrl-D) to leave\n".into()),
        "tables" if rest.is_empty() => match db::tables(&session.conn) {
            Ok(rows) => {
                let n = rows.rows.len();
                let title = format!(
                    "{n} table{} in {}",
                    if n == 1 { "" } else { "s" },
                    session.name
                );
                if session.format == Format::Table {
                    // Fitted to the terminal: long column lists wrap inside their cell.
                    let g = glyphs::get();
                    let table = crate::output::table_within(&rows, session.width);
                    out(format!("{} {title}\n{table}\n", g.title))
                } else {
                    let mut p = Printer::new(session.format, std::io::stdout().lock())
                        .csv_sink(CsvSink::Many);
                    p.print(&Block::Rows {
                        title: Some(title),
                        meta: serde_json::Map::new(),
                        rows,
                        count: false,
                    })
                }
            }
            Err(e) => Err(Failure::failed(format!("cannot list the tables: {e}"))),
        },
        "functions" => {
            let page = if rest.is_empty() {
                Ok(crate::catalogue::listing(session.format))
            } else {
                crate::catalogue::lookup(rest, session.format)
            };
            page.and_then(out)
        }
        "format" => {
            if rest.is_empty() {
                out(format!("format {}\n", session.format.word()))
            } else {
                match Format::from_word(rest) {
                    Some(f) => {
                        session.format = f;
                        out(format!("format {}\n", f.word()))
                    }
                    None => Err(Failure::usage(format!(
                        "unknown format '{rest}': table, csv, json or markdown"
                    ))),
                }
            }
        }
        "open" => {
            let path = (!rest.is_empty()).then(|| PathBuf::from(rest));
            let existed = path.as_ref().is_some_and(|p| p.exists());
            match open(path.as_deref()) {
                Ok(mut s) => {
                    s.format = session.format;
                    *session = s;
                    let what = match &path {
                        None => "a new in-memory database".to_string(),
                        Some(p) if existed => format!("opened {}", p.display()),
                        Some(p) => format!("created {}", p.display()),
                    };
                    out(format!("{what}\n"))
                }
                Err(f) => Err(f),
            }
        }
        _ => return None,
    };
    Some(r.map(|()| true))
}
