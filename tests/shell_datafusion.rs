//! The shell on DataFusion: the demo database exported to Parquet, and its check files
//! and query files run with `--engine datafusion`, print exactly what they print
//! on SQLite (the reference: the SQLite engine, checked by tests/shell.rs).
#![cfg(feature = "datafusion")]

use std::path::Path;
use std::process::Command;

const BIN: &str = env!("CARGO_BIN_EXE_ogive");
const ROOT: &str = env!("CARGO_MANIFEST_DIR");

fn ogive(args: &[&str], dir: &Path) -> (i32, String, String) {
    let out = Command::new(BIN)
        .args(args)
        .current_dir(dir)
        .env("NO_COLOR", "1")
        .output()
        .unwrap();
    (
        out.status.code().unwrap_or(-1),
        String::from_utf8_lossy(&out.stdout).into_owned(),
        String::from_utf8_lossy(&out.stderr).into_owned(),
    )
}

#[test]
fn demo_checks_and_queries_print_the_same_on_both_engines() {
    let dir = std::env::temp_dir().join(format!("ogive-shell-df-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let (code, _, err) = ogive(&["demo", "--db", "demo.db", "--out-dir", "plots"], &dir);
    assert_eq!(code, 0, "demo: {err}");
    let (code, _, err) = ogive(
        &[
            "export", "--db", "demo.db", "--table", "readings", "--to", "readings", "--files", "3",
        ],
        &dir,
    );
    assert_eq!(code, 0, "{err}");
    assert!(err.contains("to 3 files in readings"), "{err}");
    for t in ["trailers", "routes"] {
        let to = format!("{t}.parquet");
        let (code, _, err) = ogive(
            &["export", "--db", "demo.db", "--table", t, "--to", &to],
            &dir,
        );
        assert_eq!(code, 0, "{err}");
    }
    let tables = [
        "--engine",
        "datafusion",
        "--table",
        "readings=readings",
        "--table",
        "trailers=trailers.parquet",
        "--table",
        "routes=routes.parquet",
    ];
    let checks =
        ["cold_chain.sql", "logger.sql", "regimes.sql"].map(|f| format!("{ROOT}/sql/checks/{f}"));
    let mut files: Vec<String> = [
        "01_depot_profiles.sql",
        "02_share_above_limit.sql",
        "03_route_percentiles.sql",
        "04_drift_this_week.sql",
        "05_pallet_weighted.sql",
        "06_two_regimes.sql",
        "07_which_model_fits.sql",
    ]
    .iter()
    .map(|f| format!("{ROOT}/sql/demo/{f}"))
    .collect();
    for (verb, list) in [
        ("check", checks.to_vec()),
        ("run", std::mem::take(&mut files)),
    ] {
        for format in ["table", "csv", "json"] {
            let mut lite: Vec<&str> = vec![verb, "--db", "demo.db", "--format", format];
            lite.extend(list.iter().map(String::as_str));
            let mut fusion: Vec<&str> = vec![verb, "--format", format];
            fusion.extend(tables);
            fusion.extend(list.iter().map(String::as_str));
            let a = ogive(&lite, &dir);
            let b = ogive(&fusion, &dir);
            assert_eq!(
                a.0, b.0,
                "{verb} --format {format}: exit codes; DataFusion said {}",
                b.2
            );
            assert_eq!(a.1, b.1, "{verb} --format {format}: output");
            assert!(!a.1.is_empty());
        }
    }
    // Named parameters ($name, which both engines read) bind the same way.
    std::fs::write(
        dir.join("param.sql"),
        "-- enough readings\nSELECT count(*) AS n, count(*) > $least AS ok FROM readings;\n",
    )
    .unwrap();
    let lite = ogive(
        &[
            "check",
            "--db",
            "demo.db",
            "--param",
            "least=1000",
            "param.sql",
        ],
        &dir,
    );
    let mut args = vec!["check", "--param", "least=1000", "param.sql"];
    args.extend(tables);
    let fusion = ogive(&args, &dir);
    assert_eq!((lite.0, &lite.1), (fusion.0, &fusion.1), "{}", fusion.2);
    assert!(lite.1.contains("1 check: 1 pass"), "{}", lite.1);
    let mut args = vec!["run", "param.sql"];
    args.extend(tables);
    let (code, _, err) = ogive(&args, &dir);
    assert_eq!(code, 1);
    assert!(
        err.contains("the statement uses $least; give it with --param least=VALUE"),
        "{err}"
    );
    // The JUnit report is the same too.
    let mut lite = vec!["check", "--db", "demo.db", "--report", "lite.xml"];
    lite.extend(checks.iter().map(String::as_str));
    let mut fusion = vec!["check", "--report", "fusion.xml"];
    fusion.extend(tables);
    fusion.extend(checks.iter().map(String::as_str));
    ogive(&lite, &dir);
    ogive(&fusion, &dir);
    let strip_times = |s: String| {
        s.lines()
            .map(|l| l.split(" time=").next().unwrap_or(l).to_string())
            .collect::<Vec<_>>()
    };
    assert_eq!(
        strip_times(std::fs::read_to_string(dir.join("lite.xml")).unwrap()),
        strip_times(std::fs::read_to_string(dir.join("fusion.xml")).unwrap())
    );
    std::fs::remove_dir_all(&dir).ok();
}

#[test]
fn engine_flags_are_checked_before_anything_runs() {
    let dir = std::env::temp_dir();
    let q = format!("{ROOT}/sql/checks/logger.sql");
    let (code, _, err) = ogive(
        &["run", "--engine", "datafusion", "--table", "readings", &q],
        &dir,
    );
    assert_eq!(code, 2);
    assert!(err.contains("write NAME=PATH"), "{err}");
    let (code, _, err) = ogive(
        &[
            "run",
            "--engine",
            "datafusion",
            "--table",
            "r=/nonexistent/x.parquet",
            &q,
        ],
        &dir,
    );
    assert_eq!(code, 2);
    assert!(
        err.contains("--table r: cannot read /nonexistent/x.parquet"),
        "{err}"
    );
    let (code, _, err) = ogive(&["run", "--table", "r=x.parquet", &q], &dir);
    assert_eq!(code, 2);
    assert!(err.contains("is for --engine datafusion"), "{err}");
    let (code, _, err) = ogive(
        &["check", "--engine", "datafusion", "--db", "x.db", &q],
        &dir,
    );
    assert_eq!(code, 2);
    assert!(err.contains("--db is SQLite's"), "{err}");
}

/// One Ctrl-C stops a DataFusion statement while it runs: in its finalizer (the last step,
/// which DataFusion runs where the query is polled) and in a table function's subquery
/// argument (run while the query is planned). Each statement joins a 4,000-row CSV with
/// itself (16M values into one distribution value), about 10 s of work in this debug
/// build; the shell must exit with 130 and say "cancelled" within 5 s of the signal (it
/// takes milliseconds; before the fix it waited for the finalizer or the subquery).
#[cfg(unix)]
#[test]
fn one_ctrl_c_stops_a_long_statement() {
    use std::time::{Duration, Instant};
    let dir = std::env::temp_dir().join(format!("ogive-shell-df-int-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let mut csv = String::from("x\n");
    for i in 0..4000 {
        csv.push_str(&format!("{}\n", (i * 7919 % 4000) as f64 / 100.0));
    }
    std::fs::write(dir.join("t.csv"), csv).unwrap();
    for (name, sql) in [
        (
            "finalizer.sql",
            "SELECT dist_n(dist_empirical(a.x)) FROM t AS a, t AS b;",
        ),
        (
            "subquery.sql",
            "SELECT count(*) FROM dist_steps((SELECT dist_empirical(a.x) FROM t AS a, t AS b));",
        ),
    ] {
        std::fs::write(dir.join(name), format!("-- long\n{sql}\n")).unwrap();
        let mut child = Command::new(BIN)
            .args(["run", "--engine", "datafusion", "--table", "t=t.csv", name])
            .current_dir(&dir)
            .env("NO_COLOR", "1")
            .stdout(std::process::Stdio::null())
            .stderr(std::process::Stdio::piped())
            .spawn()
            .unwrap();
        std::thread::sleep(Duration::from_millis(1500));
        assert!(
            child.try_wait().unwrap().is_none(),
            "{name} ended before the signal"
        );
        let sent = Command::new("kill")
            .args(["-INT", &child.id().to_string()])
            .status()
            .unwrap();
        assert!(sent.success());
        let since = Instant::now();
        let status = loop {
            if let Some(s) = child.try_wait().unwrap() {
                break s;
            }
            if since.elapsed() > Duration::from_secs(5) {
                child.kill().ok();
                panic!("{name}: still running 5 s after Ctrl-C");
            }
            std::thread::sleep(Duration::from_millis(20));
        };
        let mut err = String::new();
        std::io::Read::read_to_string(&mut child.stderr.take().unwrap(), &mut err).unwrap();
        assert_eq!(status.code(), Some(130), "{name}: {err}");
        assert!(err.contains("cancelled (Ctrl-C)"), "{name}: {err}");
    }
    std::fs::remove_dir_all(&dir).ok();
}

/// With the process's stop flag set (as the shell sets it on Ctrl-C), a long fit on
/// DataFusion stops at its next poll with its function's error; cleared, fits run again.
/// (In-process: this file's other tests run the shell in child processes.)
#[test]
fn the_stop_flag_stops_a_long_fit_with_its_error() {
    use std::sync::Arc;
    use std::sync::atomic::{AtomicBool, Ordering};

    use datafusion::arrow::array::{Float64Array, RecordBatch};
    use datafusion::arrow::datatypes::{DataType, Field, Schema};
    use datafusion::datasource::MemTable;
    use datafusion::prelude::SessionContext;

    let flag = Arc::new(AtomicBool::new(true));
    assert!(ogive::datafusion::stop_when(Arc::clone(&flag)));
    let schema = Arc::new(Schema::new(vec![Field::new("x", DataType::Float64, false)]));
    let xs: Vec<f64> = (0..200_000)
        .map(|i| (f64::from(i) * 0.618_033_988_749_895).fract() + f64::from(i % 7))
        .collect();
    let batch =
        RecordBatch::try_new(Arc::clone(&schema), vec![Arc::new(Float64Array::from(xs))]).unwrap();
    let mut ctx = SessionContext::new();
    ogive::datafusion::register(&mut ctx).unwrap();
    ctx.register_table(
        "t",
        Arc::new(MemTable::try_new(schema, vec![vec![batch]]).unwrap()),
    )
    .unwrap();
    let rt = tokio::runtime::Runtime::new().unwrap();
    let run = |sql: &str| {
        rt.block_on(async { ctx.sql(sql).await?.collect().await })
            .map(|b| b.iter().map(|b| b.num_rows()).sum::<usize>())
            .map_err(|e| e.to_string())
    };
    let e = run("SELECT dist_mixture(x, 8) FROM t").unwrap_err();
    assert!(e.contains("dist_mixture: interrupted"), "{e}");
    flag.store(false, Ordering::Relaxed);
    assert_eq!(
        run("SELECT dist_mixture(x, 2) FROM (SELECT x FROM t LIMIT 500)"),
        Ok(1)
    );
}
