//! The registry drives registration, the README table and the shell's listing; these
//! tests fail when they drift apart, and run every registry example.

use std::collections::BTreeSet;

use ogive::catalogue::{self as functions, Kind};
use rusqlite::Connection;
use rusqlite::types::Value;

fn function_list(conn: &Connection) -> BTreeSet<(String, i64, String)> {
    let mut stmt = conn
        .prepare("SELECT name, narg, type FROM pragma_function_list")
        .unwrap();
    stmt.query_map([], |r| Ok((r.get(0)?, r.get(1)?, r.get(2)?)))
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

fn module_list(conn: &Connection) -> BTreeSet<String> {
    let mut stmt = conn.prepare("SELECT name FROM pragma_module_list").unwrap();
    stmt.query_map([], |r| r.get(0))
        .unwrap()
        .map(Result::unwrap)
        .collect()
}

#[test]
fn registration_installs_exactly_the_registry() {
    let plain = Connection::open_in_memory().unwrap();
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    let added: BTreeSet<_> = function_list(&conn)
        .difference(&function_list(&plain))
        .cloned()
        .collect();
    let mut expected = BTreeSet::new();
    for d in functions::all() {
        let ty = match d.kind {
            Kind::Scalar => "s",
            Kind::Aggregate => "a",
            Kind::Window => "w",
            Kind::Table => continue,
        };
        for &n in d.arities {
            expected.insert((d.name.to_string(), i64::from(n), ty.to_string()));
        }
    }
    assert_eq!(added, expected);

    let modules: BTreeSet<_> = module_list(&conn)
        .difference(&module_list(&plain))
        .cloned()
        .collect();
    let tables: BTreeSet<_> = functions::all()
        .filter(|d| d.kind == Kind::Table)
        .map(|d| d.name.to_string())
        .collect();
    assert_eq!(modules, tables);
}

#[test]
fn names_are_unique_and_rows_complete() {
    let mut seen = BTreeSet::new();
    for d in functions::all() {
        assert!(seen.insert(d.name), "{} is registered twice", d.name);
        assert!(
            d.signature.starts_with(&format!("{}(", d.name)),
            "{}",
            d.name
        );
        assert!(!d.summary.is_empty() && !d.help.is_empty(), "{}", d.name);
        assert!(
            !d.summary.contains('\n'),
            "{}: summary must be one line",
            d.name
        );
    }
}

#[test]
fn every_example_runs_and_gives_its_documented_result() {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    for d in functions::all() {
        let v: Value = conn
            .query_row(d.example, [], |r| r.get(0))
            .unwrap_or_else(|e| panic!("example of {} failed: {e}", d.name));
        assert_eq!(
            ogive::sqlite::render(&v),
            d.example_result,
            "example of {}",
            d.name
        );
        assert!(
            d.example.contains(d.name),
            "example of {} must use it",
            d.name
        );
    }
}

/// The README's function table is generated from the registry. After changing a row,
/// run `OGIVE_BLESS=1 cargo test --test registry` to rewrite it.
#[test]
fn readme_table_matches_registry() {
    const START: &str = "<!-- functions:start (generated from the registry) -->\n";
    const END: &str = "<!-- functions:end -->";
    let path = concat!(env!("CARGO_MANIFEST_DIR"), "/README.md");
    let readme = std::fs::read_to_string(path).unwrap();
    let (Some(a), Some(b)) = (readme.find(START), readme.find(END)) else {
        panic!("README.md lacks the function table markers");
    };
    let current = &readme[a + START.len()..b];
    let wanted = functions::markdown_table();
    if current != wanted {
        if std::env::var_os("OGIVE_BLESS").is_some() {
            let updated = format!("{}{}{}", &readme[..a + START.len()], wanted, &readme[b..]);
            std::fs::write(path, updated).unwrap();
        } else {
            panic!(
                "README.md's function table is out of date; run \
                 `OGIVE_BLESS=1 cargo test --test registry`"
            );
        }
    }
}

/// Table functions are checked like the others: each row's arities, argument names and
/// columns are what SQLite sees (hidden argument columns after the output columns), and
/// every aggregate state carries its row's name.
#[test]
fn table_functions_and_states_follow_their_rows() {
    use ogive::catalogue::Imp;
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    for d in functions::all() {
        assert!(
            d.arities
                .iter()
                .all(|&n| (0..=ogive::sqlite::MAX_ARGS as i32).contains(&n)),
            "{}: too many arguments",
            d.name
        );
        match d.imp {
            Imp::Table(t) => {
                assert_eq!(d.kind, Kind::Table, "{}", d.name);
                let mut stmt = conn
                    .prepare(&format!(
                        "SELECT name, hidden FROM pragma_table_xinfo('{}')",
                        d.name
                    ))
                    .unwrap();
                let cols: Vec<(String, i64)> = stmt
                    .query_map([], |r| Ok((r.get(0)?, r.get(1)?)))
                    .unwrap()
                    .map(Result::unwrap)
                    .collect();
                let want: Vec<(String, i64)> = t
                    .columns
                    .iter()
                    .map(|(c, _)| (c.to_string(), 0))
                    .chain(t.args.iter().map(|a| (a.to_string(), 1)))
                    .collect();
                assert_eq!(cols, want, "{}", d.name);
                let most = *d.arities.iter().max().unwrap() as usize;
                assert_eq!(most, t.args.len(), "{}: arities and arguments", d.name);
                assert!(
                    d.signature
                        .starts_with(&format!("{}({}", d.name, t.args[0])),
                    "{}",
                    d.name
                );
            }
            Imp::Aggregate(a) => {
                assert!(
                    matches!(d.kind, Kind::Aggregate | Kind::Window),
                    "{}",
                    d.name
                );
                assert_eq!((a.new)().name(), d.name, "state name of {}", d.name);
            }
            Imp::Scalar(_) => assert_eq!(d.kind, Kind::Scalar, "{}", d.name),
        }
    }
}

/// Every row documents the range of its answers ([`functions::Range`], checked on every
/// answer by the argument fuzzer), and the range fits the row's declared type: a table
/// function's has one range per output column, a BLOB's says which decoder reads it back,
/// TEXT (always JSON) a model or a JSON shape, a REAL a real range, an INTEGER a whole one.
#[test]
fn every_row_documents_a_range_that_fits_its_type() {
    use ogive::catalogue::{Imp, Range, Returns};
    let numeric = |r: &Range| {
        matches!(
            r,
            Range::Real
                | Range::Quantile
                | Range::Probability
                | Range::NonNegative
                | Range::Density
                | Range::Ordinal
        )
    };
    for d in functions::all() {
        let fits = match (d.returns, &d.range) {
            (Returns::Rows, Range::Rows(cols)) => match d.imp {
                Imp::Table(t) => cols.len() == t.columns.len() && cols.iter().all(numeric),
                _ => false,
            },
            (Returns::Blob, r) => matches!(r, Range::Distribution | Range::Sketch),
            (Returns::Text, r) => {
                matches!(r, Range::Model | Range::JsonArray(_) | Range::JsonObject(_))
            }
            (Returns::Real, r) => {
                matches!(
                    r,
                    Range::Real
                        | Range::Quantile
                        | Range::Probability
                        | Range::NonNegative
                        | Range::Density
                )
            }
            (Returns::Integer, r) => matches!(r, Range::Ordinal | Range::NonNegative | Range::Real),
            (Returns::Count, r) => matches!(r, Range::NonNegative),
            _ => false,
        };
        assert!(
            fits,
            "{}: range {:?} does not fit {:?}",
            d.name, d.range, d.returns
        );
        // The example's own answer lies in the range.
        if d.kind != Kind::Table {
            let conn = Connection::open_in_memory().unwrap();
            ogive::register(&conn).unwrap();
            let v: Value = conn.query_row(d.example, [], |r| r.get(0)).unwrap();
            // Only where the example selects the call itself (not a field of its JSON).
            if d.example.starts_with(&format!("SELECT {}(", d.name)) && !d.example.contains("->") {
                let out = match v {
                    Value::Null => ogive::catalogue::value::Out::Null,
                    Value::Integer(i) => ogive::catalogue::value::Out::Integer(i),
                    Value::Real(r) => ogive::catalogue::value::Out::Real(r),
                    Value::Text(t) => ogive::catalogue::value::Out::Text(t),
                    Value::Blob(b) => ogive::catalogue::value::Out::Blob(b),
                };
                d.range
                    .check(&out, true)
                    .unwrap_or_else(|e| panic!("example of {}: {e}", d.name));
            }
        }
    }
}
