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
//! README's "Which model fits?" example prints its rows on the demo database.

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
    let mut cmd = Command::new(BIN);
    cmd.args(args)
        .current_dir(fixtures())
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
    let out = ogive(args, stdin);
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
    let defs: Vec<_> = ogive::functions::all().collect();
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
    assert_eq!(md, ogive::functions::markdown_table());
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
        "5 checks: 4 pass, 1 fail, 0 error",
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

/// The README's "Which model fits?" example runs as printed on the demo database and prints
/// the rows the README shows: its SQL blocks are run with `ogive run --format markdown` and
/// every table line of the output must equal the README's, in order.
#[test]
fn readme_which_model_fits_prints_its_rows_on_the_demo() {
    let tmp = TempDir::new("readme-models");
    let db = tmp.path("fleet.db");
    let out_dir = tmp.path("plots");
    succeed(
        Command::new(BIN)
            .args(["demo", "--db", db.to_str().unwrap()])
            .args(["--out-dir", out_dir.to_str().unwrap()])
            .current_dir(root()),
    );
    let readme = std::fs::read_to_string(root().join("README.md")).unwrap();
    let section = readme
        .split("<!-- models-example:start -->")
        .nth(1)
        .and_then(|rest| rest.split("<!-- models-example:end -->").next())
        .expect("the README has the models example");
    let sql: Vec<&str> = section
        .split("```sql\n")
        .skip(1)
        .filter_map(|block| block.split("```").next())
        .collect();
    assert_eq!(sql.len(), 2, "two SQL blocks");
    let file = tmp.path("readme.sql");
    std::fs::write(&file, sql.concat()).unwrap();
    let stdout = succeed(
        Command::new(BIN)
            .args(["run", file.to_str().unwrap(), "--db", db.to_str().unwrap()])
            .args(["--format", "markdown"]),
    );
    let tables = |text: &str| -> Vec<String> {
        text.lines()
            .filter(|l| l.starts_with('|'))
            .map(str::to_owned)
            .collect()
    };
    let printed = tables(section);
    assert_eq!(printed.len(), 2 + 12 + 2 + 1, "{printed:?}");
    assert_eq!(tables(&stdout), printed);
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
        "trap true INT; OGIVE_HISTORY='{}' '{BIN}'; echo \"ogive exited with $?\"; sleep 60",
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
    tmux.wait_for("┆");
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

    tmux.line("bye");
    let screen = tmux.wait_for("ogive exited with");
    assert!(screen.contains("ogive exited with 0"), "{screen}");
    let history = std::fs::read_to_string(tmp.path("history")).unwrap();
    assert!(history.contains("SELECT 6 * 7 AS answer;"), "{history}");
}
