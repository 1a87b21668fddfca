//! Random SQL calls of every registry function, decoded from a fuzzer's bytes, run through
//! the real registration (`ogive::register` on a bundled in-memory SQLite), and every
//! answer checked: an error must start with the function's name (the convention of
//! `catalogue::args::fail`) and must not be a caught panic; any other answer must lie in the
//! range its registry row documents (`FunctionDef::range`, `Range::check`).
//!
//! Shared by the cargo-fuzz target `fuzz/fuzz_targets/arg_calls.rs` and by the ordinary
//! test `tests/arg_fuzz.rs`, which replays a fixed seeded set of inputs. The functions come
//! from `catalogue::all()`; nothing here names one.
//!
//! One input is one case: a table `t(x, w, c, s, g)` of 0 to 50 rows (ties, NULLs, now and
//! then extreme or non-numeric values), a few calls of the registry's aggregate producers
//! (rows whose range is a distribution BLOB, a sketch BLOB or model JSON) whose answers
//! join the value pool, then a few calls of any function with arguments drawn from the
//! table's columns, that pool (as made and mutated) and a list of special values.

#![allow(dead_code)]

use ogive::catalogue::{self, FunctionDef, Kind, Range, value::Out};
use ogive::rusqlite::types::{Value, ValueRef};
use ogive::rusqlite::{self, Connection};
use ogive::stats::fit::Family;

/// The most rows a call's answer is read to (a table function may have more).
const MAX_ROWS: usize = 600;
/// The longest TEXT argument (one case must stay fast).
const MAX_TEXT: usize = 100_000;

/// The fuzzer's bytes, read front to back; zeros once they run out.
pub struct Bytes<'a> {
    data: &'a [u8],
    pos: usize,
}

impl<'a> Bytes<'a> {
    pub fn new(data: &'a [u8]) -> Self {
        Bytes { data, pos: 0 }
    }

    fn byte(&mut self) -> u8 {
        let b = self.data.get(self.pos).copied().unwrap_or(0);
        self.pos += 1;
        b
    }

    /// A number in 0..n (0 when n is 0).
    fn below(&mut self, n: usize) -> usize {
        if n == 0 {
            return 0;
        }
        let v = usize::from(self.byte()) | usize::from(self.byte()) << 8;
        v % n
    }

    /// True with probability about k/16.
    fn chance(&mut self, k: u8) -> bool {
        self.byte() % 16 < k
    }

    fn pick<'s, T>(&mut self, items: &'s [T]) -> &'s T {
        &items[self.below(items.len())]
    }
}

/// Reals that matter: signed zeros, subnormals, the ends of the doubles, 2^53 and 2^63,
/// the shapes and offsets of issue 17, and the infinities (SQL reaches them as 9e999).
const REALS: &[f64] = &[
    0.0,
    -0.0,
    1.0,
    -1.0,
    0.5,
    2.5,
    0.999,
    1e-9,
    4.9e-324,
    1e-310,
    f64::MIN_POSITIVE,
    1e-300,
    1e300,
    1.7e308,
    -1.7e308,
    f64::MAX,
    9_007_199_254_740_992.0,
    9_223_372_036_854_775_807.0,
    -9_223_372_036_854_775_808.0,
    1e16,
    -1e16,
    3.4e15,
    3801.0,
    300.0,
    1_700_000_000.5,
    100.05,
    99.95,
    f64::INFINITY,
    f64::NEG_INFINITY,
];

const INTS: &[i64] = &[
    0,
    1,
    -1,
    2,
    3,
    5,
    7,
    9,
    10,
    12,
    16,
    50,
    100,
    3000,
    1_000_000,
    1_000_001,
    1_000_000_000,
    2_147_483_647,
    -2_147_483_648,
    1 << 53,
    (1 << 53) + 1,
    -(1 << 53),
    i64::MAX,
    i64::MIN,
    i64::MAX - 1,
];

/// TEXT that looks numeric, almost numeric, is an option word, a family, JSON or broken
/// JSON, or holds NUL bytes and other characters that messages must not break on.
const TEXTS: &[&str] = &[
    "",
    " ",
    "0.5",
    " 2 ",
    "1e3",
    "-0",
    "inf",
    "infinity",
    "-Infinity",
    "NaN",
    "9e999",
    "-9e999",
    "0.5abc",
    "abc",
    "0x10",
    "1,5",
    "auto",
    "AUTO",
    "two-sided",
    "two_sided",
    "less",
    "greater",
    "exact",
    "asymp",
    "asymptotic",
    "permutation",
    "scott",
    "silverman",
    "sturges",
    "fd",
    "sqrt",
    "ks",
    "wasserstein",
    "cvm",
    "ad",
    "normal_mixture",
    "[]",
    "[0.5]",
    "[0, 0.5, 1]",
    "[1, 0]",
    "[2]",
    "[-1]",
    "[null]",
    "[\"a\"]",
    "[1e999]",
    "[[0.5]]",
    "{",
    "[1,",
    "{}",
    "null",
    "{\"components\": []}",
    "{\"components\": [{\"weight\": 1, \"mean\": 0, \"sd\": 1}]}",
    "{\"components\": [{\"weight\": 0.5, \"mean\": 0, \"sd\": 1}, {\"weight\": 0.5, \"mean\": 1e308, \"sd\": 1e-308}]}",
    "{\"family\": \"normal_mixture\", \"components\": [{\"weight\": 0.5, \"mean\": -1, \"sd\": 1}, {\"weight\": 0.5, \"mean\": 5, \"sd\": 2}]}",
    "a\0b",
    "\0",
    "0.5\0",
    "line\nbreak\r",
    "\u{e9}\u{1F600}",
];

/// One argument source for a call: a column of `t`, or a bound value.
#[derive(Clone)]
enum Source {
    Column(&'static str),
    Bound(Value),
}

/// A value in the pool, and whether every input behind it was finite.
#[derive(Clone)]
struct Made {
    value: Value,
    finite: bool,
    range: Range,
}

/// One case's state: the values made so far.
struct Case {
    pool: Vec<Made>,
    table_finite: bool,
    literals: Vec<String>,
}

/// A connection with ogive registered, as the loadable extension installs it.
///
/// # Panics
/// When SQLite cannot open or register (not a finding of the fuzzer).
pub fn connection() -> Connection {
    let conn = Connection::open_in_memory().expect("in-memory SQLite");
    ogive::register(&conn).expect("ogive registers");
    conn
}

/// Runs one case. `Err` describes the first call that broke a rule.
pub fn run_case(conn: &Connection, data: &[u8]) -> Result<(), String> {
    let mut b = Bytes::new(data);
    let mut case = Case {
        pool: Vec::new(),
        table_finite: true,
        literals: literals(),
    };
    fill_table(conn, &mut b, &mut case).map_err(|e| format!("setting up the table: {e}"))?;

    let producers: Vec<&'static FunctionDef> = catalogue::all()
        .filter(|d| {
            matches!(d.kind, Kind::Aggregate | Kind::Window)
                && matches!(d.range, Range::Distribution | Range::Sketch | Range::Model)
        })
        .collect();
    let everything: Vec<&'static FunctionDef> = catalogue::all().collect();
    for _ in 0..2 + b.below(4) {
        let d = *b.pick(&producers);
        call(conn, &mut b, &mut case, d, true)?;
    }
    for _ in 0..1 + b.below(3) {
        let d = *b.pick(&everything);
        call(conn, &mut b, &mut case, d, false)?;
    }
    Ok(())
}

/// The string literals of every registry example (families, options, JSON parameters).
fn literals() -> Vec<String> {
    let mut out = Vec::new();
    for d in catalogue::all() {
        let mut rest = d.example;
        while let Some(a) = rest.find('\'') {
            let after = &rest[a + 1..];
            let Some(z) = after.find('\'') else { break };
            out.push(after[..z].to_string());
            rest = &after[z + 1..];
        }
    }
    out
}

fn fill_table(conn: &Connection, b: &mut Bytes<'_>, case: &mut Case) -> rusqlite::Result<()> {
    conn.execute_batch("DROP TABLE IF EXISTS t; CREATE TABLE t(x, w, c, s, g)")?;
    let n = b.below(51);
    // A few distinct values per case, so that ties are common.
    let distinct = 1 + b.below(8);
    let mut values = Vec::with_capacity(distinct);
    let dirty = b.chance(3);
    for _ in 0..distinct {
        let v = match b.below(8) {
            0 if dirty => special(b, case),
            1 | 2 => Value::Real(*b.pick(REALS)),
            3 => Value::Integer(*b.pick(INTS)),
            _ => Value::Real(f64::from(b.byte()) / 8.0 - 4.0),
        };
        values.push(v);
    }
    let mut stmt = conn.prepare("INSERT INTO t VALUES (?1, ?2, ?3, ?4, ?5)")?;
    for i in 0..n {
        let x = if b.chance(2) {
            Value::Null
        } else {
            b.pick(&values).clone()
        };
        let w = match b.below(16) {
            0 => Value::Null,
            1 if dirty => Value::Real(*b.pick(REALS)),
            2 if dirty => Value::Integer(*b.pick(INTS)),
            3 => Value::Real(0.5),
            4 => Value::Integer(0),
            5 => Value::Integer(3),
            _ => Value::Integer(1),
        };
        let c = match b.below(16) {
            0 if dirty => special(b, case),
            1..=4 => Value::Integer(-1),
            5..=8 => Value::Integer(1),
            _ => Value::Integer(0),
        };
        let s = match b.below(8) {
            0 => Value::Integer((i / 2) as i64),
            1 if dirty => special(b, case),
            _ => Value::Integer(i as i64),
        };
        let g = Value::Integer(i64::from(b.chance(8)));
        for v in [&x, &w, &c, &s] {
            if !finite_value(v) {
                case.table_finite = false;
            }
        }
        stmt.execute(ogive::rusqlite::params![x, w, c, s, g])?;
    }
    Ok(())
}

/// Whether a value, read as a number the way SQLite might, is finite (TEXT that parses to
/// an infinity, such as '9e999', counts as infinite).
fn finite_value(v: &Value) -> bool {
    match v {
        Value::Real(r) => r.is_finite(),
        Value::Text(t) => t.trim().parse::<f64>().map_or(true, f64::is_finite),
        _ => true,
    }
}

/// A special value: NULL, an extreme number, odd TEXT, a long TEXT, a pool value or a
/// mutated copy of one, model JSON with extreme parameters, or a stray BLOB.
fn special(b: &mut Bytes<'_>, case: &Case) -> Value {
    match b.below(16) {
        0 => Value::Null,
        1 | 2 => Value::Integer(*b.pick(INTS)),
        3 | 4 => Value::Real(*b.pick(REALS)),
        5 | 6 => Value::Text(b.pick(TEXTS).to_string()),
        7 if !case.literals.is_empty() => Value::Text(b.pick(&case.literals).clone()),
        8 => Value::Text(model_json(b)),
        9 => {
            let unit = *b.pick(&["9", "a", "1 ", "\0", "[", "0.5,"]);
            let len = *b.pick(&[100, 1000, MAX_TEXT]);
            let mut t = unit.repeat(len / unit.len());
            t.truncate(MAX_TEXT);
            Value::Text(t)
        }
        10 => Value::Blob((0..b.below(40)).map(|_| b.byte()).collect()),
        11 => Value::Real(f64::from(b.byte()) / 16.0 - 8.0),
        _ if !case.pool.is_empty() => {
            let made = b.pick(&case.pool).clone();
            if b.chance(6) {
                mutate(b, made.value)
            } else {
                made.value
            }
        }
        _ => Value::Integer(i64::from(b.byte())),
    }
}

/// Model JSON (a `dist_model` family with random parameters, or a whole model with its
/// family field) with parameters drawn from the special reals.
fn model_json(b: &mut Bytes<'_>) -> String {
    let family = *b.pick(&Family::ALL);
    let mut names: Vec<&str> = family.parameter_names().to_vec();
    if b.chance(2) {
        // A wrong or extra name now and then.
        let other = *b.pick(&Family::ALL);
        names.push(*b.pick(other.parameter_names()));
    }
    let mut fields: Vec<String> = Vec::new();
    if b.chance(8) {
        fields.push(format!("\"family\": \"{}\"", family.name()));
    }
    for name in names {
        if b.chance(1) {
            continue;
        }
        let v = match b.below(4) {
            0 => *b.pick(REALS),
            1 => *b.pick(INTS) as f64,
            _ => f64::from(b.byte()) / 16.0,
        };
        let text = if v.is_finite() {
            format!("{v:e}")
        } else if v > 0.0 {
            "1e999".to_string()
        } else {
            "-1e999".to_string()
        };
        fields.push(format!("\"{name}\": {text}"));
    }
    format!("{{{}}}", fields.join(", "))
}

/// A mutated copy of a made value: bytes flipped, cut or added (a BLOB's checksum resealed
/// now and then, so that the checks after it see the change), or a digit of JSON changed.
fn mutate(b: &mut Bytes<'_>, v: Value) -> Value {
    match v {
        Value::Blob(mut bytes) => {
            match b.below(4) {
                0 if !bytes.is_empty() => {
                    let keep = b.below(bytes.len());
                    bytes.truncate(keep);
                }
                1 => bytes.extend((0..1 + b.below(16)).map(|_| b.byte())),
                _ => {
                    for _ in 0..2 + b.below(4) {
                        if bytes.is_empty() {
                            break;
                        }
                        let i = b.below(bytes.len());
                        bytes[i] ^= 1 << (b.byte() % 8);
                    }
                }
            }
            if bytes.len() >= 32 && b.chance(8) {
                let sum = ogive::value::empirical::checksum(&bytes);
                bytes[24..32].copy_from_slice(&sum.to_le_bytes());
            }
            Value::Blob(bytes)
        }
        Value::Text(t) => {
            let mut chars: Vec<char> = t.chars().collect();
            if !chars.is_empty() {
                let i = b.below(chars.len());
                chars[i] = *b.pick(&['0', '9', '-', 'e', '.', '"', '}', ']', ',', ' ']);
            }
            Value::Text(chars.into_iter().collect())
        }
        other => other,
    }
}

/// Calls `d` once with random arguments and checks every answer. `producer` keeps its
/// answers in the pool.
fn call(
    conn: &Connection,
    b: &mut Bytes<'_>,
    case: &mut Case,
    d: &'static FunctionDef,
    producer: bool,
) -> Result<(), String> {
    let arity = usize::try_from(*b.pick(d.arities)).unwrap_or(0);
    let names = argument_names(d);
    let mut sources = Vec::with_capacity(arity);
    for i in 0..arity {
        let name = names.get(i).map_or("", String::as_str);
        let source = if b.chance(13) {
            typed(b, case, d, i, name)
        } else if d.kind != Kind::Table && b.chance(4) {
            Source::Column(COLUMNS[b.below(COLUMNS.len())])
        } else {
            Source::Bound(special(b, case))
        };
        sources.push(source);
    }
    let mut finite = true;
    let mut bound = Vec::new();
    let mut args = Vec::with_capacity(arity);
    let mut uses_table = false;
    for s in &sources {
        match s {
            Source::Column(c) => {
                uses_table = true;
                finite &= case.table_finite;
                args.push((*c).to_string());
            }
            Source::Bound(v) => {
                finite &= finite_value(v) && pool_finite(case, v);
                bound.push(v.clone());
                args.push(format!("?{}", bound.len()));
            }
        }
    }
    let args = args.join(", ");
    let name = d.name;
    let sql = match d.kind {
        Kind::Table => format!("SELECT * FROM {name}({args}) LIMIT {MAX_ROWS}"),
        Kind::Scalar if uses_table => format!("SELECT {name}({args}) FROM t"),
        Kind::Scalar => format!("SELECT {name}({args})"),
        Kind::Aggregate | Kind::Window => match b.below(if d.kind == Kind::Window { 8 } else { 3 })
        {
            0 => format!("SELECT {name}({args}) FROM t GROUP BY g"),
            1 => format!("SELECT {name}({args}) FROM t WHERE s < {}", b.below(40)),
            2 | 3 => format!("SELECT {name}({args}) FROM t"),
            4 => format!(
                "SELECT {name}({args}) OVER (ORDER BY s ROWS BETWEEN {} PRECEDING AND {} FOLLOWING) FROM t",
                b.below(6),
                b.below(6)
            ),
            5 => format!("SELECT {name}({args}) OVER (PARTITION BY g ORDER BY x) FROM t"),
            6 => format!(
                "SELECT {name}({args}) OVER (ORDER BY s GROUPS BETWEEN {} PRECEDING AND CURRENT ROW EXCLUDE TIES) FROM t",
                b.below(4)
            ),
            _ => format!(
                "SELECT {name}({args}) OVER (ORDER BY s ROWS BETWEEN UNBOUNDED PRECEDING AND CURRENT ROW EXCLUDE CURRENT ROW) FROM t"
            ),
        },
    };
    let shown = || format!("{sql} with {}", show_params(&bound));
    let answers = match run(conn, &sql, &bound) {
        Ok(rows) => rows,
        Err(message) => {
            return check_error(d, &message).map_err(|e| format!("{}: {e}", shown()));
        }
    };
    for row in &answers {
        let checked = match d.range {
            Range::Rows(_) => d.range.check_row(row, finite),
            r => r.check(&row[0], finite),
        };
        checked.map_err(|e| {
            format!(
                "{}: answer {} is outside the documented range ({:?}): {e}",
                shown(),
                row.iter().map(Out::render).collect::<Vec<_>>().join(" | "),
                d.range
            )
        })?;
        if producer && !row.is_empty() && row[0] != Out::Null && case.pool.len() < 16 {
            let value = match &row[0] {
                Out::Blob(x) => Value::Blob(x.clone()),
                Out::Text(x) => Value::Text(x.clone()),
                _ => continue,
            };
            case.pool.push(Made {
                value,
                finite,
                range: d.range,
            });
        }
    }
    Ok(())
}

/// The columns of `t`.
const COLUMNS: [&str; 5] = ["x", "w", "c", "s", "g"];

/// The argument names of a row's signature, in order (`quantile(x, p [, type])` gives x,
/// p, type).
fn argument_names(d: &FunctionDef) -> Vec<String> {
    let inner = d
        .signature
        .split_once('(')
        .map_or("", |(_, rest)| rest.trim_end_matches(')'));
    inner
        .split(|c: char| c == ',' || c == '[' || c == ']' || c.is_whitespace())
        .filter(|w| !w.is_empty())
        .map(str::to_string)
        .collect()
}

/// The single-quoted words of a row's help text: its option values.
fn options(d: &FunctionDef) -> Vec<String> {
    let mut out = Vec::new();
    let mut rest = d.help;
    while let Some(a) = rest.find('\'') {
        let after = &rest[a + 1..];
        let Some(z) = after.find('\'') else { break };
        if z < 24 {
            out.push(after[..z].to_string());
        }
        rest = &after[z + 1..];
    }
    out
}

/// A value of the kind the argument's name in the signature suggests (a column for the
/// per-row arguments of an aggregate, a made value for a distribution, a probability for
/// p, a family name, one of the row's option words...), so that many calls get past the
/// first argument check and reach the mathematics.
fn typed(b: &mut Bytes<'_>, case: &Case, d: &FunctionDef, i: usize, name: &str) -> Source {
    let per_row = matches!(d.kind, Kind::Aggregate | Kind::Window);
    let number = |b: &mut Bytes<'_>| Value::Real(f64::from(b.byte()) / 16.0 - 4.0);
    let value = match name {
        "x" if per_row => return Source::Column("x"),
        "w" if per_row => return Source::Column("w"),
        "c" if per_row => return Source::Column("c"),
        "in_second" if per_row => return Source::Column("g"),
        "t" if per_row && i > 0 && b.chance(4) => return Source::Column("s"),
        "d" | "d1" | "d2" | "model" | "s" => {
            let want_sketch = name == "s";
            let fitting: Vec<&Made> = case
                .pool
                .iter()
                .filter(|m| (m.range == Range::Sketch) == want_sketch)
                .collect();
            if fitting.is_empty() {
                special(b, case)
            } else {
                let m = (*b.pick(&fitting)).clone();
                if b.chance(2) {
                    mutate(b, m.value)
                } else {
                    m.value
                }
            }
        }
        "p" | "alpha" | "epsilon" => match b.below(3) {
            0 => {
                Value::Real(*b.pick(&[0.0, 1e-300, 0.001, 0.05, 0.25, 0.5, 0.9, 0.999, 1.0, 1e-9]))
            }
            1 => Value::Real(f64::from(b.byte()) / 255.0),
            _ => Value::Integer(i64::from(b.byte() % 2)),
        },
        "type" => Value::Integer(i64::from(b.byte() % 10)),
        "k" => Value::Integer(i64::from(b.byte() % 8)),
        "n" => Value::Integer(*b.pick(&[0, 1, 2, 3, 5, 12, 100, 3000, 1_000_000, -1, i64::MAX])),
        "family" => {
            let names: Vec<&str> = Family::ALL.iter().map(|f| f.name()).collect();
            if b.chance(2) {
                Value::Text("normal_mixture".into())
            } else {
                Value::Text(b.pick(&names).to_string())
            }
        }
        "ps" => Value::Text(
            b.pick(&[
                "[0.5]",
                "[0, 0.25, 0.5, 0.75, 1]",
                "[]",
                "[0.999, 1e-300]",
                "[1, 0]",
            ])
            .to_string(),
        ),
        "params" => Value::Text(model_json(b)),
        "lo" | "hi" | "t" => number(b),
        _ => {
            let words = options(d);
            if !words.is_empty() && b.chance(10) {
                Value::Text(b.pick(&words).clone())
            } else {
                number(b)
            }
        }
    };
    Source::Bound(value)
}

/// Whether a bound value that came from the pool was made from finite inputs only (a
/// mutated one is taken as not: its bytes may hold anything).
fn pool_finite(case: &Case, v: &Value) -> bool {
    match v {
        Value::Blob(_) | Value::Text(_) => case
            .pool
            .iter()
            .find(|m| &m.value == v)
            .map_or(!matches!(v, Value::Blob(_)), |m| m.finite),
        _ => true,
    }
}

/// Runs a query, reading at most `MAX_ROWS` rows; `Err` holds SQLite's message.
fn run(conn: &Connection, sql: &str, bound: &[Value]) -> Result<Vec<Vec<Out>>, String> {
    let mut stmt = conn.prepare(sql).map_err(message)?;
    let width = stmt.column_count();
    let mut rows = stmt
        .query(rusqlite::params_from_iter(bound.iter()))
        .map_err(message)?;
    let mut out = Vec::new();
    while out.len() < MAX_ROWS {
        let Some(row) = rows.next().map_err(message)? else {
            break;
        };
        let mut values = Vec::with_capacity(width);
        for i in 0..width {
            values.push(match row.get_ref(i).map_err(message)? {
                ValueRef::Null => Out::Null,
                ValueRef::Integer(i) => Out::Integer(i),
                ValueRef::Real(r) => Out::Real(r),
                ValueRef::Text(t) => Out::Text(String::from_utf8_lossy(t).into_owned()),
                ValueRef::Blob(b) => Out::Blob(b.to_vec()),
            });
        }
        out.push(values);
    }
    Ok(out)
}

fn message(e: rusqlite::Error) -> String {
    match e {
        rusqlite::Error::SqliteFailure(_, Some(m)) => m,
        other => other.to_string(),
    }
}

/// An error must start with `name: `, must not be a panic caught at the boundary, and
/// must be printable (no NUL or other control characters) and short.
fn check_error(d: &FunctionDef, message: &str) -> Result<(), String> {
    if !message.starts_with(&format!("{}: ", d.name)) {
        return Err(format!(
            "the error {message:?} does not start with the function's name"
        ));
    }
    if message.contains("internal error") {
        return Err(format!("a panic was caught: {message}"));
    }
    if message.chars().any(char::is_control) {
        return Err(format!("the error holds control characters: {message:?}"));
    }
    if message.len() > 2000 {
        return Err(format!("the error is {} bytes long", message.len()));
    }
    Ok(())
}

fn show_params(bound: &[Value]) -> String {
    let shown: Vec<String> = bound
        .iter()
        .map(|v| match v {
            Value::Text(t) if t.len() > 400 => format!("TEXT of {} bytes", t.len()),
            Value::Text(t) => format!("{t:?}"),
            Value::Blob(x) => format!(
                "BLOB {}",
                x.iter().map(|b| format!("{b:02x}")).collect::<String>()
            ),
            Value::Real(r) => format!("{r:e}"),
            Value::Integer(i) => i.to_string(),
            Value::Null => "NULL".into(),
        })
        .collect();
    format!("[{}]", shown.join(", "))
}
