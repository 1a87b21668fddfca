//! The same functions on a Ballista cluster as in SQLite. The test starts a scheduler and
//! two executors of the built `ogive` binary on 127.0.0.1 (free ports, child processes
//! killed when the test ends), runs the seeded queries of tests/datafusion.rs on them
//! through `ogive::ballista::connect`, each bounded in time, and compares the answers with
//! SQLite's bit for bit; bad input gives SQLite's message, and the sketch stays within its
//! rank error.
#![cfg(feature = "ballista")]

mod seeded;

use std::net::{SocketAddr, TcpListener, TcpStream};
use std::path::Path;
use std::process::{Child, Command, Stdio};
use std::time::{Duration, Instant};

use datafusion::prelude::{ParquetReadOptions, SessionContext};
use ogive::catalogue::value::Out;
use seeded::{EXACT, fusion_rows, readings, same, sqlite, sqlite_rows, tempdir, write_parquet};

/// How long one query may take on the cluster before the test fails.
const QUERY_LIMIT: Duration = Duration::from_secs(120);
/// How long the processes may take to listen.
const START_LIMIT: Duration = Duration::from_secs(60);

/// A scheduler and two executors; killed (and reaped) on drop, also when a test fails.
struct Cluster {
    scheduler: SocketAddr,
    children: Vec<Child>,
}

impl Drop for Cluster {
    fn drop(&mut self) {
        for c in &mut self.children {
            let _ = c.kill();
            let _ = c.wait();
        }
    }
}

/// `n` ports free on 127.0.0.1 just now.
fn free_ports(n: usize) -> Vec<u16> {
    let held: Vec<TcpListener> = (0..n)
        .map(|_| TcpListener::bind("127.0.0.1:0").unwrap())
        .collect();
    held.iter()
        .map(|l| l.local_addr().unwrap().port())
        .collect()
}

fn wait_listening(addr: SocketAddr, what: &str, children: &mut [Child]) {
    let start = Instant::now();
    while TcpStream::connect_timeout(&addr, Duration::from_millis(200)).is_err() {
        for c in children.iter_mut() {
            if let Ok(Some(status)) = c.try_wait() {
                panic!("a cluster process exited ({status}) before the {what} listened on {addr}");
            }
        }
        assert!(
            start.elapsed() < START_LIMIT,
            "the {what} did not listen on {addr} in {START_LIMIT:?}"
        );
        std::thread::sleep(Duration::from_millis(100));
    }
}

fn start(dir: &Path) -> Cluster {
    let exe = env!("CARGO_BIN_EXE_ogive");
    let p = free_ports(5);
    let scheduler: SocketAddr = format!("127.0.0.1:{}", p[0]).parse().unwrap();
    let log = |name: &str| std::fs::File::create(dir.join(name)).unwrap();
    let mut cluster = Cluster {
        scheduler,
        children: Vec::new(),
    };
    cluster.children.push(
        Command::new(exe)
            .args(["scheduler", "--bind", &scheduler.to_string()])
            .stdout(Stdio::null())
            .stderr(log("scheduler.log"))
            .spawn()
            .unwrap(),
    );
    wait_listening(scheduler, "scheduler", &mut cluster.children);
    for (i, (data, control)) in [(p[1], p[2]), (p[3], p[4])].into_iter().enumerate() {
        let bind = format!("127.0.0.1:{data}");
        cluster.children.push(
            Command::new(exe)
                .args([
                    "executor",
                    "--scheduler",
                    &scheduler.to_string(),
                    "--bind",
                    &bind,
                ])
                .args(["--control-port", &control.to_string(), "--slots", "2"])
                .stdout(Stdio::null())
                .stderr(log(&format!("executor-{i}.log")))
                .spawn()
                .unwrap(),
        );
        wait_listening(bind.parse().unwrap(), "executor", &mut cluster.children);
    }
    cluster
}

fn client(cluster: &Cluster, dir: &Path, rt: &tokio::runtime::Runtime) -> SessionContext {
    let ctx = ogive::ballista::connect(&cluster.scheduler.to_string()).unwrap();
    rt.block_on(ctx.register_parquet("t", dir.to_str().unwrap(), ParquetReadOptions::default()))
        .unwrap();
    ctx
}

fn on_cluster(
    rt: &tokio::runtime::Runtime,
    ctx: &SessionContext,
    sql: &str,
) -> Result<Vec<Vec<Out>>, String> {
    rt.block_on(async { tokio::time::timeout(QUERY_LIMIT, fusion_rows(ctx, sql)).await })
        .unwrap_or_else(|_| panic!("Ballista took over {QUERY_LIMIT:?}: {sql}"))
}

/// Runs a shell command, killed if it takes over `QUERY_LIMIT`: its exit code, stdout,
/// stderr.
fn run_limited(cmd: &mut Command) -> (Option<i32>, String, String) {
    let mut child = cmd
        .stdout(Stdio::piped())
        .stderr(Stdio::piped())
        .spawn()
        .unwrap();
    let start = Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed() > QUERY_LIMIT {
            let _ = child.kill();
            let _ = child.wait();
            panic!("the shell took over {QUERY_LIMIT:?}");
        }
        std::thread::sleep(Duration::from_millis(50));
    }
    let out = child.wait_with_output().unwrap();
    (
        out.status.code(),
        String::from_utf8_lossy(&out.stdout).into(),
        String::from_utf8_lossy(&out.stderr).into(),
    )
}

/// The split readings as Parquet in a new folder, and the cluster's logs beside it.
fn setup(name: &str) -> (std::path::PathBuf, std::path::PathBuf) {
    let root = tempdir(&format!("ballista-{name}"));
    let data = root.join("data");
    std::fs::create_dir_all(&data).unwrap();
    write_parquet(&data, &readings());
    (root, data)
}

#[test]
fn exact_functions_agree_bit_for_bit_with_sqlite_on_two_executors() {
    let (root, data) = setup("exact");
    let conn = sqlite(&readings());
    let rt = tokio::runtime::Runtime::new().unwrap();
    let cluster = start(&root);
    let ctx = client(&cluster, &data, &rt);
    for sql in EXACT {
        let want = sqlite_rows(&conn, sql).unwrap_or_else(|e| panic!("SQLite: {sql}: {e}"));
        let got = on_cluster(&rt, &ctx, sql).unwrap_or_else(|e| panic!("Ballista: {sql}: {e}"));
        assert!(!want.is_empty(), "{sql} gave no rows");
        assert_eq!(want.len(), got.len(), "{sql}");
        for (w, g) in want.iter().zip(&got) {
            assert!(
                w.len() == g.len() && w.iter().zip(g).all(|(a, b)| same(a, b)),
                "{sql}\n SQLite:   {w:?}\n Ballista: {g:?}"
            );
        }
    }
    // The sketch merges in the cluster's order; its rank error stays within epsilon n.
    let mut xs: Vec<f64> = readings().iter().map(|r| r.2).collect();
    xs.sort_by(f64::total_cmp);
    let n = xs.len() as f64;
    for p in [0.1, 0.5, 0.9] {
        let sql = format!("SELECT sketch_quantile(quantile_sketch(x, 0.01), {p}) FROM t");
        let got = on_cluster(&rt, &ctx, &sql).unwrap();
        let Out::Real(q) = got[0][0] else {
            panic!("{got:?}")
        };
        let below = xs.partition_point(|&v| v < q) as f64;
        let at_or_below = xs.partition_point(|&v| v <= q) as f64;
        let (target, tol) = (p * n, 0.01 * n);
        assert!(
            below - tol <= target && target <= at_or_below + tol,
            "p {p}: {q} has ranks {below}..{at_or_below}, want {target} +- {tol}"
        );
    }
    // Bad input: SQLite's message, from an executor, and the executors live on.
    for sql in [
        "SELECT quantile(x, 1.5) FROM t",
        "SELECT ecdf(x, 'abc') FROM t",
        "SELECT dist_cdf(X'00010203', 1.0) FROM t",
        "SELECT dist_fit(x, 'cauchy') FROM t",
    ] {
        let want = sqlite_rows(&conn, sql).expect_err(sql);
        let got = on_cluster(&rt, &ctx, sql).expect_err(sql);
        assert!(
            got.contains(&want),
            "{sql}\n SQLite:   {want}\n Ballista: {got}"
        );
    }
    let missing = rt.block_on(ctx.register_parquet(
        "m",
        "/nonexistent/ogive/none.parquet",
        ParquetReadOptions::default(),
    ));
    assert!(missing.is_err());
    let again = on_cluster(&rt, &ctx, "SELECT median(x) FROM t").unwrap();
    assert_eq!(again.len(), 1);
    // The shell: a check file with --engine ballista --scheduler, one check passing and
    // one failing, with the same verdicts as on SQLite's copy of the rows.
    let checks = root.join("checks.sql");
    std::fs::write(
        &checks,
        "-- every group's median lies between its quartiles\n\
         SELECT g, quantile(x, 0.25) <= median(x) AND median(x) <= quantile(x, 0.75) AS ok \
         FROM t GROUP BY g;\n\
         -- no group's 90th percentile is above 4 (false on these rows)\n\
         SELECT g, quantile(x, 0.9) <= 4 AS ok FROM t GROUP BY g;\n",
    )
    .unwrap();
    let out = run_limited(
        Command::new(env!("CARGO_BIN_EXE_ogive"))
            .args([
                "check",
                "--format",
                "csv",
                "--engine",
                "ballista",
                "--scheduler",
            ])
            .arg(cluster.scheduler.to_string())
            .arg(format!("--table=t={}", data.display()))
            .arg(&checks),
    );
    assert_eq!(out.0, Some(1), "{}", out.2);
    assert!(
        out.1
            .contains("every group's median lies between its quartiles")
            && out.1.contains("pass"),
        "{}",
        out.1
    );
    assert!(out.1.contains("fail"), "{}", out.1);
    drop(cluster);
    std::fs::remove_dir_all(&root).ok();
}

#[test]
fn engine_flags_and_an_unreachable_scheduler_give_clear_errors() {
    let root = tempdir("ballista-flags");
    let q = root.join("q.sql");
    std::fs::write(
        &q,
        "SELECT median(column1) AS m FROM (VALUES (1.0), (3.0));\n",
    )
    .unwrap();
    let shell =
        |args: &[&str]| run_limited(Command::new(env!("CARGO_BIN_EXE_ogive")).args(args).arg(&q));
    let (code, _, err) = shell(&["run", "--engine", "ballista"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(
        err.contains("--engine ballista needs --scheduler HOST:PORT"),
        "{err}"
    );
    let (code, _, err) = shell(&[
        "run",
        "--engine",
        "datafusion",
        "--scheduler",
        "127.0.0.1:1",
    ]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("is for --engine ballista"), "{err}");
    let (code, _, err) = shell(&["check", "--engine", "ballista", "--scheduler", "nohost"]);
    assert_eq!(code, Some(2), "{err}");
    assert!(err.contains("\"nohost\" is not HOST:PORT"), "{err}");
    // Nobody listens on the port: the statement fails, in time, saying so and what to start.
    let port = free_ports(1)[0].to_string();
    let addr = format!("127.0.0.1:{port}");
    let (code, _, err) = shell(&["run", "--engine", "ballista", "--scheduler", &addr]);
    assert_eq!(code, Some(1), "{err}");
    assert!(
        err.contains(&format!(
            "cannot reach the Ballista scheduler at {addr}: nothing answers there"
        )) && err.contains(&format!("ogive scheduler --bind {addr}"))
            && !err.contains("tonic"),
        "{err}"
    );
    std::fs::remove_dir_all(&root).ok();
}
