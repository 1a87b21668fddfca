//! `ogive demo`: builds the invented refrigerated-trailer database, runs the demo questions
//! (`sql/demo/*.sql`) and checks (`sql/checks/*.sql`), and draws the demo plots
//! (`sql/plots/*.sql`, each query's `-- kind:` comment picks steps, lines or bars) into
//! the output directory. A new file in one of those directories joins the demo; files
//! run in name order.

pub mod generate;

use std::path::Path;

use rusqlite::Connection;
use rusqlite::types::Value;
use serde_json::{Map, json};

use crate::Failure;
use crate::check::{self, Status};
use crate::db::Engine;
use crate::db::{self, Params, ResultSet};
use crate::interrupt;
use crate::output::{Block, Format, Printer};
use crate::plot;
use crate::run::{self, Source, Step};
use generate::{DAYS, DEPOTS, PER_DAY, ROUTE_KINDS, date, route_name, trailer_name};

const SCHEMA: &str = "
CREATE TABLE depots (depot TEXT PRIMARY KEY, name TEXT NOT NULL);
CREATE TABLE trailers (trailer TEXT PRIMARY KEY, depot TEXT NOT NULL REFERENCES depots);
CREATE TABLE routes (route TEXT PRIMARY KEY, depot TEXT NOT NULL REFERENCES depots,
                     kind TEXT NOT NULL, stops INTEGER NOT NULL, hours REAL NOT NULL);
CREATE TABLE readings (
    trailer   TEXT NOT NULL REFERENCES trailers,
    ts        TEXT NOT NULL,     -- local time, 'YYYY-MM-DD HH:MM'
    week      INTEGER NOT NULL,  -- 1 .. 6
    route     TEXT REFERENCES routes,  -- NULL while parked at the depot
    door_open INTEGER NOT NULL,  -- 1 while a cargo door is open
    pallets   INTEGER NOT NULL,  -- pallets aboard
    temp_c    REAL               -- cargo air temperature, degC; NULL when the logger dropped it
);
";

/// Fills the demo tables on `conn` (in one transaction). Ctrl-C stops it.
pub fn build(conn: &Connection) -> Result<u64, Failure> {
    let sql_err =
        |e: rusqlite::Error| Failure::failed(format!("cannot build the demo database: {e}"));
    let tx = conn.unchecked_transaction().map_err(sql_err)?;
    tx.execute_batch(SCHEMA).map_err(sql_err)?;
    for d in &DEPOTS {
        tx.execute("INSERT INTO depots VALUES (?1, ?2)", [d.code, d.name])
            .map_err(sql_err)?;
    }
    for t in 0..12 {
        tx.execute(
            "INSERT INTO trailers VALUES (?1, ?2)",
            [trailer_name(t), DEPOTS[t / 4].code.to_string()],
        )
        .map_err(sql_err)?;
    }
    for r in 0..9 {
        let k = &ROUTE_KINDS[r % 3];
        tx.execute(
            "INSERT INTO routes VALUES (?1, ?2, ?3, ?4, ?5)",
            rusqlite::params![route_name(r), DEPOTS[r / 3].code, k.kind, k.stops, k.hours],
        )
        .map_err(sql_err)?;
    }
    let dates: Vec<String> = (0..DAYS).map(date).collect();
    let times: Vec<String> = (0..PER_DAY)
        .map(|s| format!("{:02}:{:02}", s / 12, (s % 12) * 5))
        .collect();
    let trailers: Vec<String> = (0..12).map(trailer_name).collect();
    let routes: Vec<String> = (0..9).map(route_name).collect();
    let mut n = 0u64;
    {
        let mut insert = tx
            .prepare("INSERT INTO readings VALUES (?1, ?2, ?3, ?4, ?5, ?6, ?7)")
            .map_err(sql_err)?;
        let mut failure = None;
        let finished = generate::generate(
            |r| {
                if failure.is_some() {
                    return;
                }
                let ts = format!("{} {}", dates[r.day], times[r.step]);
                let res = insert.execute(rusqlite::params![
                    trailers[r.trailer],
                    ts,
                    (r.day / 7 + 1) as i64,
                    r.route.map(|i| routes[i].as_str()),
                    i64::from(r.door_open),
                    r.pallets,
                    r.temp_c
                ]);
                match res {
                    Ok(_) => n += 1,
                    Err(e) => failure = Some(e),
                }
            },
            interrupt::requested,
        );
        if let Some(e) = failure {
            return Err(sql_err(e));
        }
        if !finished {
            return Err(Failure::interrupted());
        }
    }
    tx.commit().map_err(sql_err)?;
    Ok(n)
}

/// The demo's SQL files, compiled into the binary so that an installed `ogive demo` needs
/// no source tree: (name, text), in name order within each folder. A test checks that the
/// list is exactly the `.sql` files under sql/.
pub const EMBEDDED: &[(&str, &str)] = &[
    (
        "sql/demo/01_depot_profiles.sql",
        include_str!("../../../../sql/demo/01_depot_profiles.sql"),
    ),
    (
        "sql/demo/02_share_above_limit.sql",
        include_str!("../../../../sql/demo/02_share_above_limit.sql"),
    ),
    (
        "sql/demo/03_route_percentiles.sql",
        include_str!("../../../../sql/demo/03_route_percentiles.sql"),
    ),
    (
        "sql/demo/04_drift_this_week.sql",
        include_str!("../../../../sql/demo/04_drift_this_week.sql"),
    ),
    (
        "sql/demo/05_pallet_weighted.sql",
        include_str!("../../../../sql/demo/05_pallet_weighted.sql"),
    ),
    (
        "sql/demo/06_two_regimes.sql",
        include_str!("../../../../sql/demo/06_two_regimes.sql"),
    ),
    (
        "sql/demo/07_which_model_fits.sql",
        include_str!("../../../../sql/demo/07_which_model_fits.sql"),
    ),
    (
        "sql/checks/cold_chain.sql",
        include_str!("../../../../sql/checks/cold_chain.sql"),
    ),
    (
        "sql/checks/logger.sql",
        include_str!("../../../../sql/checks/logger.sql"),
    ),
    (
        "sql/checks/regimes.sql",
        include_str!("../../../../sql/checks/regimes.sql"),
    ),
    (
        "sql/plots/ecdf_week6.sql",
        include_str!("../../../../sql/plots/ecdf_week6.sql"),
    ),
    (
        "sql/plots/model_vs_ecdf.sql",
        include_str!("../../../../sql/plots/model_vs_ecdf.sql"),
    ),
    (
        "sql/plots/share_above_limit.sql",
        include_str!("../../../../sql/plots/share_above_limit.sql"),
    ),
    (
        "sql/plots/weekly_p95.sql",
        include_str!("../../../../sql/plots/weekly_p95.sql"),
    ),
];

/// The embedded files of one folder of sql/ (`demo`, `checks` or `plots`).
fn sql_files(folder: &str) -> Vec<Source> {
    let prefix = format!("sql/{folder}/");
    EMBEDDED
        .iter()
        .filter(|(name, _)| name.starts_with(&prefix))
        .map(|(name, text)| Source::from_text(name, (*text).to_string()))
        .collect()
}

/// The `demo` verb.
pub fn demo(out_dir: &Path, db_path: Option<&Path>, format: Format) -> Result<i32, Failure> {
    if let Some(p) = db_path
        && p.exists()
    {
        return Err(Failure::usage(format!(
            "{} exists; the demo writes its database only to a new file",
            p.display()
        )));
    }
    if format == Format::Csv {
        return Err(Failure::usage(
            "the demo prints many result sets and --format csv prints one: use --format table, \
             json or markdown (or `ogive run --format csv --out-dir DIR` on the demo's files)",
        ));
    }
    let questions = sql_files("demo");
    let checks = sql_files("checks");
    let plots = sql_files("plots");

    let conn = db::open(db_path, db::Access::Create)?;
    let n = build(&conn)?;
    let mut printer = Printer::new(format, std::io::stdout().lock());
    let mut meta = Map::new();
    meta.insert("readings".into(), json!(n));
    meta.insert("seed".into(), json!(generate::SEED));
    printer.print(&Block::Note {
        text: format!(
            "ogive demo: an invented fleet of 12 refrigerated trailers at 3 depots, {n} cargo \
                 temperature readings (every 5 minutes for 6 weeks from {}), made by a seeded \
                 generator (seed {}); see demo-data/README.md",
            date(0),
            generate::SEED
        ),
        meta,
    })?;
    let tables = db::tables(&conn).map_err(|e| Failure::failed(e.to_string()))?;
    printer.print(&Block::Rows {
        title: Some("demo tables".into()),
        meta: Map::new(),
        rows: tables,
        count: false,
    })?;

    // The questions.
    let mut params = Params::default();
    let mut failed = false;
    for src in &questions {
        for stmt in &src.statements {
            match run::step(Engine::Sqlite(&conn), src, stmt, &mut params)? {
                Step::Ran(out) => printer.print(&run::outcome_block(src, stmt, out))?,
                Step::Failed(description) => {
                    eprintln!("ogive: {description}");
                    failed = true;
                }
            }
        }
    }

    // The checks.
    if !checks.is_empty() {
        let results = check::run_checks(Engine::Sqlite(&conn), &checks, &mut params)?;
        check::report(&results, &mut printer)?;
        failed |= results.iter().any(|r| r.status == Status::Error);
    }

    // The plots.
    if !plots.is_empty() {
        std::fs::create_dir_all(out_dir)
            .map_err(|e| Failure::usage(format!("cannot create {}: {e}", out_dir.display())))?;
        let mut drawn = ResultSet {
            columns: ["plot", "file", "rows"].map(String::from).to_vec(),
            rows: Vec::new(),
        };
        for src in &plots {
            let stem = Path::new(&src.name)
                .file_stem()
                .map_or_else(|| "plot".to_string(), |s| s.to_string_lossy().into_owned());
            let out = out_dir.join(format!("{stem}.svg"));
            match plot::plot_source(&conn, src, &out, None, None, &mut params) {
                Ok(rows) => drawn.rows.push(vec![
                    Value::Text(src.name.clone()),
                    Value::Text(out.display().to_string()),
                    Value::Integer(rows as i64),
                ]),
                Err(f) if f.code == 130 => return Err(f),
                Err(f) => {
                    eprintln!("ogive: {}", f.message);
                    failed = true;
                }
            }
        }
        printer.print(&Block::Rows {
            title: Some(format!("plots written to {}", out_dir.display())),
            meta: Map::new(),
            rows: drawn,
            count: false,
        })?;
    }
    let explore = match db_path {
        Some(p) => format!("the demo database is in {}: explore it with `ogive --db {}`", p.display(), p.display()),
        None => "keep the demo database with `ogive demo --db fleet.db`, then explore it with `ogive --db fleet.db`".into(),
    };
    printer.print(&Block::note(explore))?;
    Ok(i32::from(failed))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn embedded_files_are_the_sql_folder() {
        let root = Path::new(env!("CARGO_MANIFEST_DIR"));
        let mut on_disk = Vec::new();
        for folder in ["demo", "checks", "plots"] {
            let mut names: Vec<String> = std::fs::read_dir(root.join("sql").join(folder))
                .unwrap()
                .filter_map(Result::ok)
                .map(|e| e.file_name().to_string_lossy().into_owned())
                .filter(|n| n.ends_with(".sql"))
                .map(|n| format!("sql/{folder}/{n}"))
                .collect();
            names.sort();
            on_disk.extend(names);
        }
        let embedded: Vec<String> = EMBEDDED.iter().map(|(n, _)| n.to_string()).collect();
        assert_eq!(embedded, on_disk, "add new demo files to demo::EMBEDDED");
        for (name, text) in EMBEDDED {
            assert_eq!(std::fs::read_to_string(root.join(name)).unwrap(), *text);
        }
    }
}
