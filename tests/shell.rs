//! The `ogive` shell, driven as a user drives it.
//!
//! Golden-output tests run the binary on the inputs in tests/fixtures/shell and compare
//! its exit status, standard output and standard error with tests/golden/*.txt. After an
//! intended change of output, `OGIVE_BLESS=1 cargo test --test shell` rewrites them; read
//! the diff before committing it.
//!
//! The other tests check what a golden file cannot: the JUnit report parses as XML, the
//! function listing matches the registry row for row, `run` and `check` leave a database
//! file byte-for-byte unchanged, a failed import writes nothing, the demo's plots render
//! to PNG (rsvg-convert), Ctrl-C ends a batch run with status 130, and a session at the
//! prompt in a pseudo-terminal (tmux) runs a query, cancels one and leaves cleanly, and the
//! README's "Which model fits?" and series-aware drift examples print their rows on the
//! demo database.

use std::path::{Path, PathBuf};
use std::process::{Command, Output, Stdio};
use std::sync::atomic::{AtomicUsize, Ordering};
use std::time::{Duration, Instant};

const BIN: &str = env!("CARGO_BIN_EXE_ogive");

fn root() -> PathBuf {
    PathBuf::from(env!("CARGO_MANIFEST_DIR"))
}

fn fixtures() -> PathBuf {
    root().join("tests/fixtures/shell")
}

/// A fresh empty directory under the system's temporary directory, removed on drop.
struct TempDir(PathBuf);

impl TempDir {
    fn new(tag: &str) -> TempDir {
        static N: AtomicUsize = AtomicUsize::new(0);
        let p = std::env::temp_dir().join(format!(
            "ogive-shell-test-{}-{}-{tag}",
            std::process::id(),
            N.fetch_add(1, Ordering::SeqCst)
        ));
        let _ = std::fs::remove_dir_all(&p);
        std::fs::create_dir_all(&p).unwrap();
        TempDir(p)
    }

    fn path(&self, name: &str) -> PathBuf {
        self.0.join(name)
    }
}

impl Drop for TempDir {
    fn drop(&mut self) {
        let _ = std::fs::remove_dir_all(&self.0);
    }
}

/// Runs the shell in the fixtures directory with a history file kept out of $HOME.
fn ogive(args: &[&str], stdin: Option<&str>) -> Output {
    ogive_in(args, stdin, "C.UTF-8")
}

/// Runs the shell as [`ogive`] does, under the locale `lang` (LC_ALL and LC_CTYPE unset).
fn ogive_in(args: &[&str], stdin: Option<&str>, lang: &str) -> Output {
    let mut cmd = Command::new(BIN);
    cmd.args(args)
        .current_dir(fixtures())
        .env("LANG", lang)
        .env_remove("LC_ALL")
        .env_remove("LC_CTYPE")
        .env(
            "OGIVE_HISTORY",
            std::env::temp_dir().join("ogive-shell-test-history"),
        )
        .stdin(if stdin.is_some() {
            Stdio::piped()
        } else {
            Stdio::null()
        })
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut child = cmd.spawn().expect("the ogive binary runs");
    if let Some(text) = stdin {
        use std::io::Write;
        child
            .stdin
            .take()
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
    }
    child.wait_with_output().unwrap()
}

/// Compares a run's recorded output with tests/golden/NAME.txt (or rewrites it when blessing).
/// `tmp` is replaced by `$TMP` in the command line shown in the recorded output.
fn golden(name: &str, args: &[&str], stdin: Option<&str>, tmp: Option<&Path>) {
    record(name, args, stdin, tmp, ogive(args, stdin));
}

/// [`golden`] under the locale `lang`, which the recorded command line shows.
fn golden_in(name: &str, args: &[&str], lang: &str) {
    let out = ogive_in(args, None, lang);
    let mut shown = vec![format!("LANG={lang}")];
    shown.extend(args.iter().map(|a| a.to_string()));
    let shown: Vec<&str> = shown.iter().map(String::as_str).collect();
    record(name, &shown, None, None, out);
}

fn record(name: &str, args: &[&str], stdin: Option<&str>, tmp: Option<&Path>, out: Output) {
    let mut shown = args.join(" ");
    if let Some(t) = tmp {
        shown = shown.replace(&t.display().to_string(), "$TMP");
    }
    let recorded = format!(
        "$ ogive {shown}\n{}exit: {}\n--- stdout\n{}--- stderr\n{}",
        stdin.map_or(String::new(), |s| format!("--- stdin\n{s}")),
        out.status.code().map_or("signal".into(), |c| c.to_string()),
        String::from_utf8_lossy(&out.stdout),
        String::from_utf8_lossy(&out.stderr)
    );
    let path = root().join("tests/golden").join(format!("{name}.txt"));
    if std::env::var_os("OGIVE_BLESS").is_some() {
        std::fs::create_dir_all(path.parent().unwrap()).unwrap();
        std::fs::write(&path, &recorded).unwrap();
        return;
    }
    let want = std::fs::read_to_string(&path).unwrap_or_else(|_| {
        panic!(
            "no golden file {}; run `OGIVE_BLESS=1 cargo test --test shell`",
            path.display()
        )
    });
    assert!(
        want == recorded,
        "output of `ogive {shown}` differs from {}\n--- want\n{want}\n--- got\n{recorded}\n\
         (after an intended change: OGIVE_BLESS=1 cargo test --test shell)",
        path.display()
    );
}

const FORMATS: [&str; 4] = ["table", "csv", "json", "markdown"];

#[test]
fn golden_run() {
    for f in FORMATS {
        golden(
            &format!("run_{f}"),
            &[
                "run",
                "queries.sql",
                "--param",
                "limit=4",
                "--param",
                ":probe=a",
                "--format",
                f,
            ],
            None,
            None,
        );
    }
    golden(
        "run_missing_param",
        &["run", "queries.sql", "--param", "limit=4"],
        None,
        None,
    );
    golden("run_syntax_error", &["run", "syntax_error.sql"], None, None);
    golden(
        "run_runtime_error",
        &["run", "runtime_error.sql", "--format", "csv"],
        None,
        None,
    );
    golden(
        "run_missing_file",
        &["run", "queries.sql", "nowhere.sql"],
        None,
        None,
    );
    golden(
        "run_missing_db",
        &["run", "pass.sql", "--db", "nowhere.db"],
        None,
        None,
    );
    assert!(
        !fixtures().join("nowhere.db").exists(),
        "run created a database file"
    );
    golden(
        "run_bad_param",
        &["run", "queries.sql", "--param", "limit"],
        None,
        None,
    );
    golden(
        "run_bad_format",
        &["run", "queries.sql", "--format", "xml"],
        None,
        None,
    );
}

#[test]
fn golden_check() {
    for f in FORMATS {
        golden(
            &format!("check_{f}"),
            &["check", "checks.sql", "--format", f],
            None,
            None,
        );
    }
    golden("check_pass", &["check", "pass.sql"], None, None);
    golden(
        "check_missing_file",
        &["check", "pass.sql", "nowhere.sql"],
        None,
        None,
    );
    golden(
        "check_all_errors",
        &["check", "runtime_error.sql"],
        None,
        None,
    );
    golden("check_no_checks", &["check", "setup_only.sql"], None, None);
}

#[test]
fn golden_import() {
    let tmp = TempDir::new("import");
    for f in FORMATS {
        let db = tmp.path(&format!("{f}.db"));
        let db = db.to_str().unwrap();
        golden(
            &format!("import_{f}"),
            &[
                "import",
                "readings.csv",
                "--table",
                "readings",
                "--db",
                db,
                "--format",
                f,
            ],
            None,
            Some(&tmp.0),
        );
    }
    // What the table holds afterwards: types, NULLs, quotes and a line break kept.
    let db = tmp.path("kept.db");
    let db = db.to_str().unwrap();
    golden(
        "import_check_only",
        &["import", "readings.csv", "--table", "readings"],
        None,
        None,
    );
    golden(
        "import_keep",
        &["import", "readings.csv", "--table", "readings", "--db", db],
        None,
        Some(&tmp.0),
    );
    golden(
        "import_stored_values",
        &["run", "stored.sql", "--db", db, "--format", "json"],
        None,
        Some(&tmp.0),
    );
    golden(
        "import_ragged",
        &["import", "ragged.csv", "--table", "readings", "--db", db],
        None,
        Some(&tmp.0),
    );
    golden(
        "import_unclosed",
        &["import", "unclosed.csv", "--table", "u", "--db", db],
        None,
        Some(&tmp.0),
    );
    golden(
        "import_missing_file",
        &["import", "nowhere.csv", "--table", "t", "--db", db],
        None,
        Some(&tmp.0),
    );
}

#[test]
fn golden_functions() {
    for f in FORMATS {
        golden(
            &format!("functions_{f}"),
            &["functions", "--format", f],
            None,
            None,
        );
        golden(
            &format!("functions_quantile_{f}"),
            &["functions", "quantile", "--format", f],
            None,
            None,
        );
    }
    golden("functions_unknown", &["functions", "quant"], None, None);
}

#[test]
fn golden_prompt_from_a_pipe() {
    golden(
        "prompt_pipe",
        &["--format", "csv"],
        Some(
            "SELECT quantile(column1, 0.5) AS median\n  FROM (VALUES (1), (2), (7));\nformat table\ntables\nSELECT 1 AS a; SELECT quantile(1, 2);\nSELECT 'not reached';\n",
        ),
        None,
    );
}

/// Habits of other prompts get a hint naming ogive's word; an unknown function gets the
/// registry's nearest names; a runtime error points at the failing call.
#[test]
fn golden_prompt_habits() {
    golden(
        "prompt_habits",
        &[],
        Some(".tables\n\\dt\n.mode csv\n\\q\n.frobnicate\nSELECT 2 AS two,\n  ecfd(1, 2) AS e;\n"),
        None,
    );
    golden(
        "prompt_runtime_error",
        &[],
        Some("SELECT 1 AS one,\n       ecdf(1, 2) AS e, dist_quantile('{}', 0.5) AS q;\n"),
        None,
    );
}

#[test]
fn plot_writes_an_svg_with_title_axes_and_legend() {
    let tmp = TempDir::new("plot");
    let svg = tmp.path("fig.svg");
    let out = ogive(&["plot", "plot.sql", "--out", svg.to_str().unwrap()], None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let text = std::fs::read_to_string(&svg).unwrap();
    let doc = roxmltree::Document::parse(&text).expect("well-formed SVG");
    let texts: Vec<&str> = doc.descendants().filter_map(|n| n.text()).collect();
    for want in [
        "Invented curve points for the plot verb's test",
        "x",
        "y",
        "up",
        "down",
        "0.5",
    ] {
        assert!(texts.contains(&want), "{want:?} missing from {texts:?}");
    }
    let paths = doc.descendants().filter(|n| n.has_tag_name("path")).count();
    assert_eq!(paths, 2, "one line per series");

    // Text x draws as bars only.
    let bars = tmp.path("bars.svg");
    let out = ogive(
        &[
            "plot",
            "plot_text_x.sql",
            "--out",
            bars.to_str().unwrap(),
            "--kind",
            "bars",
            "--title",
            "Counts",
        ],
        None,
    );
    assert!(out.status.success());
    let text = std::fs::read_to_string(&bars).unwrap();
    assert!(text.contains(">Counts</text>"));
    let lines = tmp.path("lines.svg");
    let out = ogive(
        &["plot", "plot_text_x.sql", "--out", lines.to_str().unwrap()],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert!(String::from_utf8_lossy(&out.stderr).contains("only --kind bars draws categories"));
    assert!(!lines.exists());
}

/// `ogive functions` lists every registry row with its name, signature and summary, so the
/// registry, the README table (tests/registry.rs) and the shell cannot drift apart.
#[test]
fn functions_lists_every_registry_row() {
    let out = ogive(&["functions", "--format", "json"], None);
    assert!(out.status.success());
    let v: serde_json::Value = serde_json::from_slice(&out.stdout).unwrap();
    let rows = v["rows"].as_array().unwrap();
    let defs: Vec<_> = ogive::catalogue::all().collect();
    assert_eq!(rows.len(), defs.len());
    for (row, d) in rows.iter().zip(&defs) {
        assert_eq!(row[0], d.name);
        assert_eq!(row[1], d.kind.word());
        assert_eq!(row[2], d.signature);
        assert_eq!(row[4], d.summary);
    }
    let table = String::from_utf8(ogive(&["functions"], None).stdout).unwrap();
    for d in &defs {
        assert!(
            table.contains(d.signature) && table.contains(d.summary),
            "{}",
            d.name
        );
        let page = ogive(&["functions", d.name], None);
        assert!(page.status.success(), "{}", d.name);
        let page = String::from_utf8(page.stdout).unwrap();
        assert!(
            page.contains(d.example) && page.contains(d.example_result),
            "{}",
            d.name
        );
    }
    let md = String::from_utf8(ogive(&["functions", "--format", "markdown"], None).stdout).unwrap();
    assert_eq!(md, ogive::catalogue::markdown_table());
}

#[test]
fn junit_report_is_xml_and_lists_each_check() {
    let tmp = TempDir::new("junit");
    let report = tmp.path("report.xml");
    let out = ogive(
        &[
            "check",
            "checks.sql",
            "pass.sql",
            "--report",
            report.to_str().unwrap(),
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    let xml = std::fs::read_to_string(&report).unwrap();
    let doc = roxmltree::Document::parse(&xml).expect("the report is well-formed XML");
    let rootel = doc.root_element();
    assert_eq!(rootel.tag_name().name(), "testsuites");
    assert_eq!(rootel.attribute("tests"), Some("7"));
    assert_eq!(rootel.attribute("failures"), Some("2"));
    assert_eq!(rootel.attribute("errors"), Some("2"));
    let suites: Vec<_> = rootel
        .children()
        .filter(|n| n.has_tag_name("testsuite"))
        .collect();
    assert_eq!(suites.len(), 2);
    assert_eq!(suites[0].attribute("name"), Some("checks.sql"));
    let cases: Vec<(String, &str)> = doc
        .descendants()
        .filter(|n| n.has_tag_name("testcase"))
        .map(|c| {
            let status = if c.children().any(|n| n.has_tag_name("failure")) {
                "failure"
            } else if c.children().any(|n| n.has_tag_name("error")) {
                "error"
            } else {
                "pass"
            };
            (c.attribute("name").unwrap().to_string(), status)
        })
        .collect();
    let want = [
        ("every lot's median is at or below 5 degC", "failure"),
        ("no lot has a reading above 6 degC", "failure"),
        ("at least 70% of readings are at or below 5 degC", "pass"),
        ("checks.sql:15", "error"),
        ("a check whose query fails", "error"),
        ("the median of 1, 2, 3 is 2", "pass"),
        ("ecdf at the maximum is 1", "pass"),
    ];
    let want: Vec<(String, &str)> = want.iter().map(|(n, s)| (n.to_string(), *s)).collect();
    assert_eq!(cases, want);
    let failure = doc
        .descendants()
        .find(|n| n.has_tag_name("failure"))
        .unwrap();
    assert_eq!(failure.text(), Some("lot,median,ok\nL3,,\n"));
}

fn file_bytes(p: &Path) -> Vec<u8> {
    std::fs::read(p).unwrap()
}

#[test]
fn run_and_check_leave_the_database_unchanged() {
    let tmp = TempDir::new("readonly");
    let db = tmp.path("fleet.db");
    {
        let conn = rusqlite::Connection::open(&db).unwrap();
        conn.execute_batch(
            "CREATE TABLE lots (lot TEXT, temp REAL);
             INSERT INTO lots VALUES ('L1', 3.0), ('L1', 4.0), ('L2', 6.5), ('L2', 2.0), ('L3', NULL);",
        )
        .unwrap();
    }
    let before = file_bytes(&db);
    let files: Vec<PathBuf> = std::fs::read_dir(&tmp.0)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    let dbs = db.to_str().unwrap();
    let out = ogive(&["run", "pass.sql", "--db", dbs], None);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    let out = ogive(&["check", "pass.sql", "--db", dbs], None);
    assert!(out.status.success());
    // The check file makes a TEMP table: that lives outside the file.
    let out = ogive(&["check", "checks.sql", "--db", dbs], None);
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(file_bytes(&db), before, "the database file changed");
    let after: Vec<PathBuf> = std::fs::read_dir(&tmp.0)
        .unwrap()
        .map(|e| e.unwrap().path())
        .collect();
    assert_eq!(after, files, "files appeared beside the database");
}

fn count_rows(db: &Path, table: &str) -> i64 {
    let conn = rusqlite::Connection::open(db).unwrap();
    conn.query_row(&format!("SELECT count(*) FROM {table}"), [], |r| r.get(0))
        .unwrap()
}

#[test]
fn a_failed_import_writes_nothing() {
    let tmp = TempDir::new("import-atomic");
    let db = tmp.path("t.db");
    let dbs = db.to_str().unwrap();
    let out = ogive(
        &["import", "readings.csv", "--table", "readings", "--db", dbs],
        None,
    );
    assert!(out.status.success());
    assert_eq!(count_rows(&db, "readings"), 4);

    // A shape error is found before anything is written.
    let out = ogive(
        &["import", "ragged.csv", "--table", "readings", "--db", dbs],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(count_rows(&db, "readings"), 4);

    // A constraint failing on line 4 rolls back the rows of lines 2 and 3, and the line
    // is named.
    {
        let conn = rusqlite::Connection::open(&db).unwrap();
        conn.execute_batch("CREATE TABLE strict (probe TEXT NOT NULL, temp REAL)")
            .unwrap();
    }
    let csv = tmp.path("nulls.csv");
    std::fs::write(&csv, "probe,temp\na,1\nb,2\n,3\nd,4\n").unwrap();
    let out = ogive(
        &[
            "import",
            csv.to_str().unwrap(),
            "--table",
            "strict",
            "--db",
            dbs,
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    let err = String::from_utf8_lossy(&out.stderr);
    assert!(
        err.contains("nulls.csv:4: NOT NULL constraint failed"),
        "{err}"
    );
    assert_eq!(count_rows(&db, "strict"), 0);

    // A new table that fails is not left behind either.
    let out = ogive(
        &["import", "unclosed.csv", "--table", "fresh", "--db", dbs],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    let conn = rusqlite::Connection::open(&db).unwrap();
    let n: i64 = conn
        .query_row(
            "SELECT count(*) FROM sqlite_schema WHERE name = 'fresh'",
            [],
            |r| r.get(0),
        )
        .unwrap();
    assert_eq!(n, 0);
}

/// Width and height from a PNG's IHDR chunk.
fn png_size(bytes: &[u8]) -> (u32, u32) {
    assert_eq!(&bytes[..8], b"\x89PNG\r\n\x1a\n", "not a PNG");
    assert_eq!(&bytes[12..16], b"IHDR");
    let w = u32::from_be_bytes(bytes[16..20].try_into().unwrap());
    let h = u32::from_be_bytes(bytes[20..24].try_into().unwrap());
    (w, h)
}

fn rsvg(svg: &Path, png: &Path) {
    let status = Command::new("rsvg-convert")
        .arg(svg)
        .arg("-o")
        .arg(png)
        .status()
        .expect("rsvg-convert runs (Debian: apt-get install librsvg2-bin; .ci/run installs it)");
    assert!(status.success(), "rsvg-convert failed on {}", svg.display());
}

/// Runs a command that must succeed and returns its standard output.
fn succeed(cmd: &mut Command) -> String {
    let out = cmd.output().unwrap();
    let stdout = String::from_utf8_lossy(&out.stdout).into_owned();
    assert!(
        out.status.success(),
        "{stdout}\n{}",
        String::from_utf8_lossy(&out.stderr)
    );
    stdout
}

/// The README's demo: it builds the database, prints the demo tables and the checks, and
/// writes plots that render. A PNG of a plot must be much larger than the PNG of an empty
/// canvas of the same size (a blank or broken drawing compresses to almost nothing).
#[test]
fn demo_prints_its_tables_and_its_plots_render() {
    let tmp = TempDir::new("demo");
    let out_dir = tmp.path("plots");
    let stdout = succeed(
        Command::new(BIN)
            .args(["demo", "--out-dir", out_dir.to_str().unwrap()])
            .current_dir(root()),
    );
    for want in [
        "145152 cargo temperature readings",
        "sql/demo/02_share_above_limit.sql · statement 1",
        "share_above_5c",
        "TR07",
        "6 checks: 5 pass, 1 fail, 0 error",
        "plots written to",
    ] {
        assert!(
            stdout.contains(want),
            "demo output lacks {want:?}:\n{stdout}"
        );
    }

    let blank_svg = tmp.path("blank.svg");
    std::fs::write(
        &blank_svg,
        r##"<svg xmlns="http://www.w3.org/2000/svg" width="820" height="500"><rect width="820" height="500" fill="#fbf8f1"/></svg>"##,
    )
    .unwrap();
    let blank_png = tmp.path("blank.png");
    rsvg(&blank_svg, &blank_png);
    let blank = std::fs::metadata(&blank_png).unwrap().len();

    let mut svgs: Vec<PathBuf> = std::fs::read_dir(&out_dir)
        .unwrap()
        .map(|e| e.unwrap().path())
        .filter(|p| p.extension().is_some_and(|x| x == "svg"))
        .collect();
    svgs.sort();
    let plot_files = std::fs::read_dir(root().join("sql/plots")).unwrap().count();
    assert_eq!(svgs.len(), plot_files, "one SVG per file in sql/plots");
    for svg in svgs {
        let text = std::fs::read_to_string(&svg).unwrap();
        roxmltree::Document::parse(&text).expect("the SVG is well-formed XML");
        let png = svg.with_extension("png");
        rsvg(&svg, &png);
        let bytes = std::fs::read(&png).unwrap();
        assert_eq!(png_size(&bytes), (820, 500), "{}", svg.display());
        assert!(
            bytes.len() as u64 > 10 * blank,
            "{} renders to {} bytes, an empty canvas to {blank}",
            svg.display(),
            bytes.len()
        );
    }
}

/// The README's examples on the demo database ("Which model fits?" and the series-aware
/// drift question) run as printed and print the rows the README shows: each section's SQL
/// blocks are run with `ogive run --format markdown` and every table line of the output
/// must equal the README's, in order. The drift question's SQL is also the demo's own
/// (`sql/demo/04_drift_this_week.sql`, its last statement), so the two cannot drift apart.
#[test]
fn readme_examples_print_their_rows_on_the_demo() {
    let tmp = TempDir::new("readme-demo");
    let db = tmp.path("fleet.db");
    let out_dir = tmp.path("plots");
    succeed(
        Command::new(BIN)
            .args(["demo", "--db", db.to_str().unwrap()])
            .args(["--out-dir", out_dir.to_str().unwrap()])
            .current_dir(root()),
    );
    let readme = std::fs::read_to_string(root().join("README.md")).unwrap();
    let tables = |text: &str| -> Vec<String> {
        text.lines()
            .filter(|l| l.starts_with('|'))
            .map(str::to_owned)
            .collect()
    };
    for (marker, blocks, lines) in [("models", 2, 2 + 12 + 2 + 1), ("series", 1, 2 + 12)] {
        let section = readme
            .split(&format!("<!-- {marker}-example:start -->"))
            .nth(1)
            .and_then(|rest| rest.split(&format!("<!-- {marker}-example:end -->")).next())
            .unwrap_or_else(|| panic!("the README has the {marker} example"));
        let sql: Vec<&str> = section
            .split("```sql\n")
            .skip(1)
            .filter_map(|block| block.split("```").next())
            .collect();
        assert_eq!(sql.len(), blocks, "{marker}: SQL blocks");
        if marker == "series" {
            let demo =
                std::fs::read_to_string(root().join("sql/demo/04_drift_this_week.sql")).unwrap();
            assert!(
                demo.ends_with(sql[0]),
                "README's series query is the demo's last"
            );
        }
        let file = tmp.path(&format!("{marker}.sql"));
        std::fs::write(&file, sql.concat()).unwrap();
        let stdout = succeed(
            Command::new(BIN)
                .args(["run", file.to_str().unwrap(), "--db", db.to_str().unwrap()])
                .args(["--format", "markdown"]),
        );
        let printed = tables(section);
        assert_eq!(printed.len(), lines, "{marker}: {printed:?}");
        assert_eq!(tables(&stdout), printed, "{marker}");
    }
}

#[cfg(unix)]
#[test]
fn ctrl_c_cancels_a_batch_run_with_status_130() {
    let tmp = TempDir::new("sigint");
    let long = tmp.path("long.sql");
    std::fs::write(
        &long,
        "WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT count(*) FROM c;\n",
    )
    .unwrap();
    let child = Command::new(BIN)
        .args(["run", long.to_str().unwrap()])
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    std::thread::sleep(Duration::from_millis(800));
    let killed = Command::new("kill")
        .args(["-INT", &child.id().to_string()])
        .status()
        .unwrap();
    assert!(killed.success());
    let out = child.wait_with_output().unwrap();
    assert_eq!(out.status.code(), Some(130));
    assert!(String::from_utf8_lossy(&out.stderr).contains("cancelled (Ctrl-C)"));
}

#[cfg(unix)]
/// A tmux server of our own (its own socket), killed on drop.
struct Tmux(String);

#[cfg(unix)]
impl Tmux {
    fn cmd(&self, args: &[&str]) -> Output {
        Command::new("tmux")
            .arg("-L")
            .arg(&self.0)
            .args(args)
            .output()
            .expect("tmux runs (Debian: apt-get install tmux; .ci/run installs it)")
    }

    fn screen(&self) -> String {
        String::from_utf8_lossy(&self.cmd(&["capture-pane", "-p", "-S", "-200"]).stdout)
            .into_owned()
    }

    /// Types a line. tmux reads a trailing `;` as a command separator, so a space follows.
    fn line(&self, text: &str) {
        self.cmd(&["send-keys", "-l", &format!("{text} ")]);
        self.cmd(&["send-keys", "Enter"]);
    }

    fn wait_for(&self, what: &str) -> String {
        self.wait_for_count(what, 1)
    }

    /// Waits until `what` shows at least `n` times. Waiting for the n-th prompt before
    /// typing matters: keys typed while the line editor is not in raw mode can be lost.
    fn wait_for_count(&self, what: &str, n: usize) -> String {
        let start = Instant::now();
        loop {
            let screen = self.screen();
            if screen.matches(what).count() >= n {
                return screen;
            }
            assert!(
                start.elapsed() < Duration::from_secs(30),
                "the screen never showed {what:?} {n} times:\n{screen}"
            );
            std::thread::sleep(Duration::from_millis(50));
        }
    }
}

#[cfg(unix)]
impl Drop for Tmux {
    fn drop(&mut self) {
        let _ = self.cmd(&["kill-server"]);
    }
}

#[cfg(unix)]
#[test]
fn a_session_at_the_prompt_runs_a_query_cancels_one_and_leaves() {
    let tmp = TempDir::new("tmux");
    let tmux = Tmux(format!("ogive-test-{}", std::process::id()));
    let script = format!(
        // The shell around ogive shares its process group and would die of the Ctrl-C
        // meant for ogive; a trap keeps it alive to report ogive's exit status.
        "trap true INT; LANG=C.UTF-8 LC_ALL= LC_CTYPE= OGIVE_HISTORY='{}' '{BIN}'; echo \"ogive exited with $?\"; sleep 60",
        tmp.path("history").display()
    );
    let out = tmux.cmd(&[
        "new-session",
        "-d",
        "-x",
        "110",
        "-y",
        "45",
        "sh",
        "-c",
        &script,
    ]);
    assert!(
        out.status.success(),
        "{}",
        String::from_utf8_lossy(&out.stderr)
    );
    const PROMPT: &str = "ogive:memory ▸";
    tmux.wait_for_count(PROMPT, 1);

    // A two-line query: the continuation prompt, then the table.
    tmux.line("SELECT quantile(column1, 0.5) AS median");
    // Wait for the continuation prompt: keys typed before the line editor is back in raw
    // mode can be discarded by the terminal.
    tmux.wait_for("│");
    tmux.line("FROM (VALUES (1), (2), (7));");
    let screen = tmux.wait_for("1 row");
    assert!(screen.contains(" median"), "{screen}");
    assert!(screen.contains("    2.0"), "{screen}");
    tmux.wait_for_count(PROMPT, 2);

    // The shell's own words.
    tmux.line("functions ecdf");
    tmux.wait_for("ecdf(x, t [, w])  (window, 2 or 3 arguments)");
    tmux.wait_for_count(PROMPT, 3);
    tmux.line("format csv");
    tmux.wait_for_count(PROMPT, 4);
    tmux.line("SELECT 6 * 7 AS answer;");
    tmux.wait_for("answer\n42");
    tmux.wait_for_count(PROMPT, 5);

    // A statement that runs until cancelled: elapsed time after a second, then Ctrl-C.
    tmux.line(
        "WITH RECURSIVE c(i) AS (SELECT 1 UNION ALL SELECT i + 1 FROM c) SELECT count(*) FROM c;",
    );
    tmux.wait_for("running for");
    tmux.cmd(&["send-keys", "C-c"]);
    tmux.wait_for("cancelled after");
    tmux.wait_for_count(PROMPT, 6);

    // Habits of other prompts get a hint, not a continued statement.
    tmux.line(".tables");
    tmux.wait_for(".tables is not a word of ogive's; type tables");
    tmux.wait_for_count(PROMPT, 7);

    // A table wider than the terminal: `tables` wraps its column list inside the cell, so
    // its rule stays one line no wider than the terminal.
    let cols: Vec<String> = (1..=12)
        .map(|i| format!("measurement_channel_{i:02} REAL"))
        .collect();
    tmux.line("format table");
    tmux.wait_for_count(PROMPT, 8);
    tmux.line(&format!(
        "CREATE TABLE wide_sensor_log ({});",
        cols.join(", ")
    ));
    tmux.wait_for_count(PROMPT, 9);
    tmux.line("tables");
    let screen = tmux.wait_for("1 table in memory");
    tmux.wait_for_count(PROMPT, 10);
    let screen = tmux
        .screen()
        .split("1 table in memory")
        .nth(1)
        .map_or(screen.clone(), str::to_owned);
    let listing: Vec<&str> = screen.lines().take_while(|l| !l.contains(PROMPT)).collect();
    let rules: Vec<&&str> = listing.iter().filter(|l| l.contains('╌')).collect();
    assert_eq!(rules.len(), 1, "one rule line:\n{}", listing.join("\n"));
    assert!(rules[0].starts_with('├'), "{}", rules[0]);
    for l in &listing {
        assert!(
            l.chars().count() <= 110,
            "a line wider than the terminal: {l}"
        );
    }
    assert!(
        listing.iter().filter(|l| l.starts_with('│')).count() > 3,
        "the column list wraps onto several lines:\n{}",
        listing.join("\n")
    );
    assert!(listing.join("\n").contains("measurement_channel_12"));

    tmux.line("bye");
    let screen = tmux.wait_for("ogive exited with");
    assert!(screen.contains("ogive exited with 0"), "{screen}");
    let history = std::fs::read_to_string(tmp.path("history")).unwrap();
    assert!(history.contains("SELECT 6 * 7 AS answer;"), "{history}");
}

/// Runs the shell in `dir` (not the fixtures) under a UTF-8 locale.
fn ogive_at(dir: &Path, args: &[&str], stdin: Option<&str>) -> Output {
    ogive_at_with(dir, args, stdin, &[])
}

/// [`ogive_at`] with extra environment variables.
fn ogive_at_with(dir: &Path, args: &[&str], stdin: Option<&str>, env: &[(&str, &str)]) -> Output {
    let mut cmd = Command::new(BIN);
    cmd.args(args)
        .envs(env.iter().copied())
        .current_dir(dir)
        .env("LANG", "C.UTF-8")
        .env_remove("LC_ALL")
        .env_remove("LC_CTYPE")
        .stdin(if stdin.is_some() {
            Stdio::piped()
        } else {
            Stdio::null()
        })
        .stdout(Stdio::piped())
        .stderr(Stdio::piped());
    let mut child = cmd.spawn().unwrap();
    if let Some(text) = stdin {
        use std::io::Write;
        child
            .stdin
            .take()
            .unwrap()
            .write_all(text.as_bytes())
            .unwrap();
    }
    child.wait_with_output().unwrap()
}

fn stdout_of(o: &Output) -> String {
    String::from_utf8_lossy(&o.stdout).into_owned()
}

fn stderr_of(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).into_owned()
}

fn query_i64(db: &Path, sql: &str) -> i64 {
    let conn = rusqlite::Connection::open(db).unwrap();
    conn.query_row(sql, [], |r| r.get(0)).unwrap()
}

// --- issue 16 item 4: the look -------------------------------------------------------

/// The table look is ogive's own (a rail on the left, a dashed rule leaving it, the count
/// on its foot); in a locale that is not UTF-8 the same look is ASCII, byte for byte; the
/// shell never colours, so NO_COLOR changes nothing.
#[test]
fn tables_have_a_rail_and_an_ascii_fallback() {
    golden_in(
        "run_table_ascii",
        &[
            "run",
            "queries.sql",
            "--param",
            "limit=4",
            "--param",
            "probe=a",
        ],
        "C",
    );
    let utf8 = ogive(
        &[
            "run",
            "queries.sql",
            "--param",
            "limit=4",
            "--param",
            "probe=a",
        ],
        None,
    );
    let text = stdout_of(&utf8);
    assert!(text.contains("│ probe   n"), "{text}");
    assert!(text.contains("├╌╌╌"), "{text}");
    assert!(text.contains("╰ 2 rows"), "{text}");
    for lang in ["C", "POSIX", "en_US.ISO-8859-1", ""] {
        for args in [
            &[
                "run",
                "queries.sql",
                "--param",
                "limit=4",
                "--param",
                "probe=a",
            ][..],
            &["check", "checks.sql"][..],
            &["run", "runtime_error.sql"][..],
            &["import", "readings.csv"][..],
            &["functions", "quantile"][..],
        ] {
            let out = ogive_in(args, None, lang);
            assert!(
                out.stdout.is_ascii(),
                "LANG={lang:?} {args:?}:\n{}",
                stdout_of(&out)
            );
            assert!(
                out.stderr.is_ascii(),
                "LANG={lang:?} {args:?}:\n{}",
                stderr_of(&out)
            );
        }
    }
    // LC_ALL wins over LANG.
    let mut cmd = Command::new(BIN);
    let out = cmd
        .args(["run", "pass.sql"])
        .current_dir(fixtures())
        .env("LANG", "C.UTF-8")
        .env("LC_ALL", "C")
        .output()
        .unwrap();
    assert!(out.stdout.is_ascii(), "{}", stdout_of(&out));
    let mut cmd = Command::new(BIN);
    let plain = cmd
        .args([
            "run",
            "queries.sql",
            "--param",
            "limit=4",
            "--param",
            "probe=a",
        ])
        .current_dir(fixtures())
        .env("LANG", "C.UTF-8")
        .env_remove("LC_ALL")
        .env_remove("LC_CTYPE")
        .env("NO_COLOR", "1")
        .output()
        .unwrap();
    assert_eq!(plain.stdout, utf8.stdout);
    assert!(
        !plain.stdout.contains(&0x1b),
        "an escape sequence in the output"
    );
}

// --- issue 16 item 3: machine-readable output is pure ---------------------------------

/// One result set: stdout is only CSV. Several: a clear error (golden run_csv), or one file
/// per result set with --out-dir; --out-dir wants --format csv.
#[test]
fn csv_is_only_csv_and_several_results_go_to_files() {
    let one = ogive(&["run", "pass.sql", "--format", "csv"], None);
    assert_eq!(one.status.code(), Some(2), "pass.sql has two queries");
    let tmp = TempDir::new("csv");
    let q = tmp.path("one.sql");
    std::fs::write(
        &q,
        "CREATE TEMP TABLE t (x);\nINSERT INTO t VALUES (1), (2), (3);\n-- the median\nSELECT quantile(x, 0.5) AS median, 'a, b' AS s FROM t;\n",
    )
    .unwrap();
    let out = ogive_at(&tmp.0, &["run", "one.sql", "--format", "csv"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert_eq!(stdout_of(&out), "median,s\n2.0,\"a, b\"\n");

    let dir = tmp.path("results");
    let out = ogive(
        &[
            "run",
            "queries.sql",
            "--param",
            "limit=4",
            "--param",
            "probe=a",
            "--format",
            "csv",
            "--out-dir",
            dir.to_str().unwrap(),
        ],
        None,
    );
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert_eq!(stdout_of(&out), "", "stdout stays empty with --out-dir");
    let mut names: Vec<String> = std::fs::read_dir(&dir)
        .unwrap()
        .map(|e| e.unwrap().file_name().to_string_lossy().into_owned())
        .collect();
    names.sort();
    assert_eq!(names, ["queries-3.csv", "queries-4.csv", "queries-5.csv"]);
    assert_eq!(
        std::fs::read_to_string(dir.join("queries-4.csv")).unwrap(),
        "note,temp,limit_type\nsteady,2.5,integer\n,3.5,integer\n\"door, \"\"open\"\"\",7.0,integer\n"
    );
    assert_eq!(
        std::fs::read_to_string(dir.join("queries-5.csv")).unwrap(),
        "none_here\n"
    );
    assert!(stderr_of(&out).contains("wrote"), "{}", stderr_of(&out));

    let out = ogive(
        &["run", "pass.sql", "--out-dir", dir.to_str().unwrap()],
        None,
    );
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr_of(&out).contains("give --format csv"),
        "{}",
        stderr_of(&out)
    );

    // JSON stays one object per line; nothing else on stdout.
    let out = ogive(&["check", "checks.sql", "--format", "json"], None);
    for line in stdout_of(&out).lines() {
        serde_json::from_str::<serde_json::Value>(line).expect("one JSON object per line");
    }
    // The demo refuses CSV rather than mixing result sets.
    let out = ogive(&["demo", "--format", "csv"], None);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr_of(&out).contains("--format csv prints one"),
        "{}",
        stderr_of(&out)
    );
}

// --- issue 16 item 2: CSV as people export it -------------------------------------------

#[test]
fn import_reads_null_words_and_warns_about_them() {
    let tmp = TempDir::new("nulls");
    std::fs::write(
        tmp.path("lab.csv"),
        "sample,assay,flag\ns1,1.5,ok\ns2,NA,ok\ns3,2.25,\ns4,NA,bad\ns5,-,ok\ns6,3,ok\ns7,4.5,ok\ns8,5,ok\n",
    )
    .unwrap();
    // Without --null: the column turns TEXT and the warning names the words and counts.
    let out = ogive_at(&tmp.0, &["import", "lab.csv", "--db", "lab.db"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert_eq!(
        stderr_of(&out),
        "ogive: warning: column assay is TEXT because of 2 cells 'NA' and 1 cell '-' among 5 \
         numbers; give --null NA --null - to read them as NULL\n"
    );
    assert!(
        stdout_of(&out).contains("8 rows imported from lab.csv; created table lab"),
        "the table is named after the file: {}",
        stdout_of(&out)
    );
    let db = tmp.path("lab.db");
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lab WHERE typeof(assay) = 'text'"),
        8
    );
    // With --null (repeated) and --replace: REAL, NULLs, no warning, in the same table.
    let out = ogive_at(
        &tmp.0,
        &[
            "import",
            "lab.csv",
            "--db",
            "lab.db",
            "--null",
            "NA",
            "--null",
            "-",
            "--replace",
        ],
        None,
    );
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert_eq!(stderr_of(&out), "");
    let shown = stdout_of(&out);
    assert!(shown.contains("replaced table lab"), "{shown}");
    assert!(shown.contains("│ assay    REAL            3"), "{shown}");
    assert_eq!(query_i64(&db, "SELECT count(*) FROM lab"), 8);
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lab WHERE assay IS NULL"),
        3
    );
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lab WHERE typeof(assay) = 'real'"),
        5
    );
    // The empty cell stays NULL alongside the words.
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lab WHERE flag IS NULL"),
        1
    );
}

#[test]
fn import_separators_replace_and_one_row() {
    let tmp = TempDir::new("tsv");
    std::fs::write(tmp.path("w.tsv"), "k\tv\na, b\t1\n").unwrap();
    let out = ogive_at(&tmp.0, &["import", "w.tsv", "--db", "t.db"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert!(
        stdout_of(&out).contains("1 row imported from w.tsv; created table w"),
        "{}",
        stdout_of(&out)
    );
    let db = tmp.path("t.db");
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM w WHERE k = 'a, b' AND v = 1"),
        1
    );

    std::fs::write(tmp.path("semi.csv"), "k;v\nx;2.5\ny;3\n").unwrap();
    let out = ogive_at(
        &tmp.0,
        &[
            "import",
            "semi.csv",
            "--db",
            "t.db",
            "--delimiter",
            ";",
            "--table",
            "w",
            "--replace",
        ],
        None,
    );
    assert!(out.status.success(), "{}", stderr_of(&out));
    assert_eq!(query_i64(&db, "SELECT count(*) FROM w"), 2);
    assert_eq!(
        query_i64(
            &db,
            "SELECT count(*) FROM pragma_table_info('w') WHERE type = 'REAL'"
        ),
        1
    );
    // The wrong separator: the error says which one was used and points at --delimiter.
    let out = ogive_at(
        &tmp.0,
        &["import", "semi.csv", "--db", "t.db", "--table", "z"],
        None,
    );
    assert_eq!(
        out.status.code(),
        Some(0),
        "one column k;v is a valid reading"
    );
    std::fs::write(tmp.path("mixed.csv"), "a,b\n1;2\n").unwrap();
    let out = ogive_at(&tmp.0, &["import", "mixed.csv", "--db", "t.db"], None);
    assert_eq!(out.status.code(), Some(1));
    assert!(
        stderr_of(&out).contains("see --delimiter"),
        "{}",
        stderr_of(&out)
    );
    let out = ogive_at(&tmp.0, &["import", "semi.csv", "--delimiter", "ab"], None);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr_of(&out).contains("one ASCII character"),
        "{}",
        stderr_of(&out)
    );

    // A --replace that fails keeps the old table whole: the drop is rolled back too.
    std::fs::write(tmp.path("bad.csv"), "k,v\nx,1\ny\n").unwrap();
    let out = ogive_at(
        &tmp.0,
        &[
            "import",
            "bad.csv",
            "--db",
            "t.db",
            "--table",
            "w",
            "--replace",
        ],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(query_i64(&db, "SELECT count(*) FROM w"), 2);
    {
        let conn = rusqlite::Connection::open(&db).unwrap();
        conn.execute_batch("CREATE TABLE strict (k TEXT NOT NULL, v REAL)")
            .unwrap();
        conn.execute_batch("INSERT INTO strict VALUES ('old', 1)")
            .unwrap();
    }
    std::fs::write(tmp.path("nul.csv"), "k,v\nx,1\n,2\n").unwrap();
    let out = ogive_at(
        &tmp.0,
        &["import", "nul.csv", "--db", "t.db", "--table", "strict"],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(query_i64(&db, "SELECT count(*) FROM strict"), 1);
}

/// Lone-CR files (old spreadsheet exports) import with the right lines, and an error about
/// them carries no raw control characters.
#[test]
fn lone_cr_files_import() {
    let tmp = TempDir::new("cr");
    std::fs::write(tmp.path("mac.csv"), "id,temp\r1,2.5\r2,3.5\r\r3,\"x\ry\"\r").unwrap();
    let out = ogive_at(&tmp.0, &["import", "mac.csv", "--db", "m.db"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
    let db = tmp.path("m.db");
    assert_eq!(query_i64(&db, "SELECT count(*) FROM mac"), 3);
    assert_eq!(
        query_i64(
            &db,
            "SELECT count(*) FROM mac WHERE temp = 'x' || char(13) || 'y'"
        ),
        1
    );
    std::fs::write(tmp.path("bad.csv"), "id,temp\r1,2.5\r2\r").unwrap();
    let out = ogive_at(&tmp.0, &["import", "bad.csv", "--db", "m.db"], None);
    assert_eq!(out.status.code(), Some(1));
    let err = stderr_of(&out);
    assert!(
        err.starts_with("ogive: bad.csv:3: expected 2 fields"),
        "{err}"
    );
    assert!(
        !err.trim_end().chars().any(|c| c.is_control() && c != '\n'),
        "{err:?}"
    );
    // A header with a control character is named with it escaped.
    std::fs::write(tmp.path("dup.csv"), "a\u{1b}[2J,a\u{1b}[2J\n1,2\n").unwrap();
    let out = ogive_at(&tmp.0, &["import", "dup.csv"], None);
    let err = stderr_of(&out);
    assert_eq!(out.status.code(), Some(1));
    assert!(err.contains("a\\u{1b}[2J"), "{err:?}");
    assert!(!err.contains('\u{1b}'), "{err:?}");
}

/// A file that takes more than a second shows its progress on standard error; the others
/// (every golden import) show none.
#[test]
fn long_imports_show_progress() {
    // Progress shows after a second; OGIVE_PROGRESS_AFTER_MS=0 makes it show at once, so
    // the test does not depend on the machine's speed.
    let tmp = TempDir::new("progress");
    let mut text = String::from("id,x,label\n");
    for i in 0..200_000u32 {
        use std::fmt::Write;
        let _ = writeln!(text, "{i},{}.25,t{}", i % 977, i % 13);
    }
    std::fs::write(tmp.path("big.csv"), text).unwrap();
    let out = ogive_at_with(
        &tmp.0,
        &["import", "big.csv", "--db", "big.db"],
        None,
        &[("OGIVE_PROGRESS_AFTER_MS", "0")],
    );
    assert!(out.status.success(), "{}", stderr_of(&out));
    let err = stderr_of(&out);
    assert!(
        err.lines().any(|l| l.starts_with("ogive: ")
            && (l.contains("reading big.csv") || l.contains("importing big.csv"))
            && l.contains("% after")),
        "{err}"
    );
    assert!(stdout_of(&out).contains("200000 rows imported"));
}

// --- issue 17 item 6: the shell must not write or half-write silently ----------------

fn lots_db(tmp: &TempDir) -> PathBuf {
    let db = tmp.path("lots.db");
    let conn = rusqlite::Connection::open(&db).unwrap();
    conn.execute_batch(
        "CREATE TABLE lots (lot TEXT, temp REAL);
         INSERT INTO lots VALUES ('L1', 3.0), ('L1', 4.0), ('L2', 6.5);",
    )
    .unwrap();
    db
}

#[test]
fn checks_are_read_only_unless_allowed() {
    let tmp = TempDir::new("check-ro");
    let db = lots_db(&tmp);
    std::fs::write(
        tmp.path("sneaky.sql"),
        "-- a setup table may be TEMP\nCREATE TEMP TABLE hot AS SELECT * FROM lots WHERE temp > 5;\nDELETE FROM lots WHERE temp > 5;\n-- nothing too hot\nSELECT count(*) = 0 AS ok FROM lots WHERE temp > 5;\n",
    )
    .unwrap();
    let before = file_bytes(&db);
    let out = ogive_at(&tmp.0, &["check", "sneaky.sql", "--db", "lots.db"], None);
    assert_eq!(out.status.code(), Some(1), "{}", stdout_of(&out));
    let text = stdout_of(&out);
    assert!(text.contains("readonly database"), "{text}");
    assert!(text.contains("--allow-writes"), "{text}");
    assert_eq!(file_bytes(&db), before, "the check wrote to the database");
    let out = ogive_at(
        &tmp.0,
        &["check", "sneaky.sql", "--db", "lots.db", "--allow-writes"],
        None,
    );
    assert!(out.status.success(), "{}", stdout_of(&out));
    assert_eq!(query_i64(&db, "SELECT count(*) FROM lots"), 2);
}

#[test]
fn run_keeps_a_file_whole_or_not_at_all() {
    let tmp = TempDir::new("run-tx");
    let db = lots_db(&tmp);
    std::fs::write(
        tmp.path("half.sql"),
        "INSERT INTO lots VALUES ('L3', 1.0);\nDELETE FROM lots WHERE lot = 'L1';\nSELECT quantile(temp, 2) FROM lots;\n",
    )
    .unwrap();
    let out = ogive_at(&tmp.0, &["run", "half.sql", "--db", "lots.db"], None);
    assert_eq!(out.status.code(), Some(1));
    assert!(
        stderr_of(&out).contains("half.sql rolled back: none of its changes were kept"),
        "{}",
        stderr_of(&out)
    );
    assert_eq!(query_i64(&db, "SELECT count(*) FROM lots"), 3);
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lots WHERE lot = 'L1'"),
        2
    );
    let out = ogive_at(
        &tmp.0,
        &["run", "half.sql", "--db", "lots.db", "--no-transaction"],
        None,
    );
    assert_eq!(out.status.code(), Some(1));
    assert_eq!(
        query_i64(&db, "SELECT count(*) FROM lots"),
        2,
        "statements 1-2 kept"
    );
    // A file with its own BEGIN is refused before anything runs.
    std::fs::write(
        tmp.path("own.sql"),
        "DELETE FROM lots;\nBEGIN;\nSELECT 1;\nCOMMIT;\n",
    )
    .unwrap();
    let out = ogive_at(&tmp.0, &["run", "own.sql", "--db", "lots.db"], None);
    assert_eq!(out.status.code(), Some(2));
    assert!(
        stderr_of(&out).contains("own.sql:2: BEGIN"),
        "{}",
        stderr_of(&out)
    );
    assert_eq!(query_i64(&db, "SELECT count(*) FROM lots"), 2);
    // The help says which.
    let help = ogive(&["run", "--help"], None);
    let help = stdout_of(&help);
    assert!(help.contains("one transaction"), "{help}");
    assert!(help.contains("--no-transaction"), "{help}");
}

#[test]
fn a_locked_database_is_reported_as_locked() {
    let tmp = TempDir::new("locked");
    let db = lots_db(&tmp);
    let holder = rusqlite::Connection::open(&db).unwrap();
    holder
        .execute_batch("BEGIN EXCLUSIVE; INSERT INTO lots VALUES ('L9', 9);")
        .unwrap();
    let out = ogive_at(&tmp.0, &["run", "q.sql", "--db", "lots.db"], None);
    // q.sql does not exist: files are read first, so this is about the file...
    assert_eq!(out.status.code(), Some(2));
    std::fs::write(tmp.path("q.sql"), "SELECT count(*) AS n FROM lots;\n").unwrap();
    let out = ogive_at(&tmp.0, &["run", "q.sql", "--db", "lots.db"], None);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr_of(&out);
    assert!(err.contains("lots.db is locked"), "{err}");
    assert!(!err.contains("as an SQLite database"), "{err}");
    drop(holder);
    let out = ogive_at(&tmp.0, &["run", "q.sql", "--db", "lots.db"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
}

#[test]
fn bad_parameter_names_are_usage_errors() {
    for bad in ["na-me=a", "a b=1", "x.y=2"] {
        let out = ogive(&["run", "pass.sql", "--param", bad], None);
        assert_eq!(out.status.code(), Some(2), "{bad}");
        let err = stderr_of(&out);
        assert!(err.contains("cannot be a parameter name"), "{err}");
    }
    let out = ogive(&["run", "pass.sql", "--param", "na-me=a"], None);
    assert!(
        stderr_of(&out).contains("--param na_me="),
        "{}",
        stderr_of(&out)
    );
}

#[test]
fn piped_sql_exits_1_after_a_failure() {
    for (input, code) in [
        ("SELECT 1;\nSELECT quantile(1, 2);\n", 1),
        ("SELECT quantile(1, 2)", 1),
        ("functions nosuch\nSELECT 1;\n", 1),
        ("format xml\nSELECT 1;\n", 1),
        ("SELECT 1;\n", 0),
    ] {
        let out = ogive(&[], Some(input));
        assert_eq!(
            out.status.code(),
            Some(code),
            "{input:?}: {}",
            stderr_of(&out)
        );
    }
}

/// Data whose span overflows, or a non-SVG output, is refused: no NaN in any SVG.
#[test]
fn plot_refuses_what_it_cannot_draw() {
    let tmp = TempDir::new("plot-bad");
    std::fs::write(
        tmp.path("huge.sql"),
        "SELECT column1 AS x, column2 AS y FROM (VALUES (-1.7e308, 1), (1.7e308, 2));\n",
    )
    .unwrap();
    std::fs::write(
        tmp.path("tall.sql"),
        "SELECT column1 AS x, column2 AS y FROM (VALUES (1, -1.7e308), (2, 1.7e308));\n",
    )
    .unwrap();
    for (file, kind) in [
        ("huge.sql", "lines"),
        ("tall.sql", "bars"),
        ("tall.sql", "steps"),
    ] {
        let out = ogive_at(
            &tmp.0,
            &["plot", file, "--out", "f.svg", "--kind", kind],
            None,
        );
        assert_eq!(out.status.code(), Some(1), "{file} {kind}");
        let err = stderr_of(&out);
        assert!(err.contains("overflows"), "{err}");
        assert!(!tmp.path("f.svg").exists(), "{file} {kind} wrote an SVG");
    }
    let out = ogive(&["plot", "plot.sql", "--out", "fig.png"], None);
    assert_eq!(out.status.code(), Some(2));
    let err = stderr_of(&out);
    assert!(err.contains("SVG only") && err.contains("fig.svg"), "{err}");
    assert!(!fixtures().join("fig.png").exists());
}

/// Histogram edges print as the shortest decimal that reads back as the same double, in
/// the table, CSV and JSON formats alike (the values are those the library computes).
#[test]
fn histogram_edges_print_as_shortest_round_trip_decimals() {
    let sql = "SELECT lo, hi FROM dist_histogram((SELECT dist_empirical(column1) FROM \
               (VALUES (90.1), (90.5), (90.7), (91.4), (92.2), (93.05))), 7);";
    let conn = rusqlite::Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    let want: Vec<f64> = conn
        .prepare(sql)
        .unwrap()
        .query_map([], |r| Ok([r.get::<_, f64>(0)?, r.get::<_, f64>(1)?]))
        .unwrap()
        .flat_map(|r| r.unwrap())
        .collect();
    assert_eq!(want.len(), 14);
    let tmp = TempDir::new("edges");
    std::fs::write(tmp.path("h.sql"), sql).unwrap();
    let csv = stdout_of(&ogive_at(
        &tmp.0,
        &["run", "h.sql", "--format", "csv"],
        None,
    ));
    let got: Vec<&str> = csv.lines().skip(1).flat_map(|l| l.split(',')).collect();
    let shortest: Vec<String> = want.iter().map(|v| format!("{v:?}")).collect();
    assert_eq!(got, shortest);
    for (text, v) in got.iter().zip(&want) {
        assert_eq!(text.parse::<f64>().unwrap().to_bits(), v.to_bits());
    }
    let table = stdout_of(&ogive_at(&tmp.0, &["run", "h.sql"], None));
    for s in &shortest {
        assert!(table.contains(s.as_str()), "{s} missing from\n{table}");
    }
    let json = stdout_of(&ogive_at(
        &tmp.0,
        &["run", "h.sql", "--format", "json"],
        None,
    ));
    let v: serde_json::Value = serde_json::from_str(json.lines().next().unwrap()).unwrap();
    let from_json: Vec<f64> = v["rows"]
        .as_array()
        .unwrap()
        .iter()
        .flat_map(|r| r.as_array().unwrap().iter().map(|x| x.as_f64().unwrap()))
        .collect();
    assert_eq!(from_json, want);
    // The plot's tick labels are decimals of the tick step, never float noise.
    std::fs::write(
        tmp.path("p.sql"),
        format!(
            "-- kind: bars\nSELECT (lo + hi) / 2 AS x, count AS n FROM ({});",
            sql.trim_end_matches(';').replace("lo, hi", "lo, hi, count")
        ),
    )
    .unwrap();
    let out = ogive_at(&tmp.0, &["plot", "p.sql", "--out", "p.svg"], None);
    assert!(out.status.success(), "{}", stderr_of(&out));
    let svg = std::fs::read_to_string(tmp.path("p.svg")).unwrap();
    let doc = roxmltree::Document::parse(&svg).unwrap();
    for t in doc.descendants().filter_map(|n| n.text()) {
        if let Ok(x) = t.parse::<f64>() {
            assert!(t.len() <= 6, "tick label {t} ({x})");
        }
    }
}
