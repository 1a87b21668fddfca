//! Properties of `dist_ks` and `dist_distance` that must hold for every input (proptest),
//! through SQL:
//!
//! - `dist_ks` on two empirical values is `ks_test` on the rows they were built from: the
//!   same JSON text, for every alternative;
//! - with whole-number frequency weights, `dist_ks` and the rank metrics of `dist_distance`
//!   are the unweighted functions on the rows repeated weight times;
//! - swapping the two distributions leaves every two-sided statistic unchanged (each is
//!   symmetric by definition), and `dist_ks` swaps 'less' and 'greater';
//! - against a model, the one-sample test is the same with the model first or second (the
//!   alternatives swapped), `dist_distance(..., 'ks')` is `dist_ks`, and the statistic is
//!   never below half the tallest step of the ECDF (a continuous cdf cannot pass closer to
//!   both ends of a jump), nor above 1.
//!
//! Values come from a coarse grid (many ties), signed zeros, or anywhere in the finite
//! doubles.

use proptest::prelude::*;
use rusqlite::Connection;
use serde_json::Value as Json;

fn value() -> impl Strategy<Value = f64> {
    prop_oneof![
        4 => (-12i32..12).prop_map(|k| f64::from(k) / 4.0),
        1 => Just(-0.0),
        1 => Just(0.0),
        2 => any::<f64>().prop_filter("finite", |x| x.is_finite()),
    ]
}

fn connection() -> Connection {
    let conn = Connection::open_in_memory().unwrap();
    ogive::register(&conn).unwrap();
    conn.execute_batch("CREATE TABLE t(s INTEGER, x REAL, w REAL)")
        .unwrap();
    conn
}

/// A connection holding samples `x` (s = 1) and `y` (s = 2), with weights cycled from `wx`
/// and `wy` when given (1 otherwise).
fn loaded(x: &[f64], y: &[f64], wx: Option<&[u8]>, wy: Option<&[u8]>) -> Connection {
    let conn = connection();
    insert(&conn, 1, x, wx);
    insert(&conn, 2, y, wy);
    conn
}

fn insert(conn: &Connection, s: i64, x: &[f64], w: Option<&[u8]>) {
    for (i, &v) in x.iter().enumerate() {
        let w = w.map_or(1.0, |w| f64::from(w[i % w.len()]));
        conn.execute("INSERT INTO t VALUES (?1, ?2, ?3)", (s, v, w))
            .unwrap();
    }
}

fn text(conn: &Connection, sql: &str, params: impl rusqlite::Params) -> Option<String> {
    conn.query_row(sql, params, |r| r.get(0)).unwrap()
}

const DISTS: &str = "(SELECT dist_empirical(x) FROM t WHERE s = 1), \
                     (SELECT dist_empirical(x) FROM t WHERE s = 2)";

proptest! {
    #[test]
    fn dist_ks_is_ks_test_on_the_same_rows(
        x in prop::collection::vec(value(), 1..30),
        y in prop::collection::vec(value(), 1..30),
    ) {
        let conn = loaded(&x, &y, None, None);
        for alt in ["two-sided", "less", "greater"] {
            let via_values = text(&conn, &format!("SELECT dist_ks({DISTS}, ?1)"), [alt]);
            let via_rows = text(&conn, "SELECT ks_test(x, s = 2, ?1) FROM t", [alt]);
            prop_assert!(via_values.is_some());
            prop_assert_eq!(via_values, via_rows);
        }
    }

    #[test]
    fn whole_weights_are_replicated_rows(
        x in prop::collection::vec(value(), 1..15),
        y in prop::collection::vec(value(), 1..15),
        wx in prop::collection::vec(0u8..4, 1..15),
        wy in prop::collection::vec(1u8..4, 1..15),
    ) {
        let conn = loaded(&x, &y, Some(&wx), Some(&wy));
        // The replicated rows, as table r.
        conn.execute_batch(
            "CREATE TABLE r(s INTEGER, x REAL);
             WITH RECURSIVE rep(s, x, k) AS (
                 SELECT s, x, w FROM t WHERE w >= 1
                 UNION ALL SELECT s, x, k - 1 FROM rep WHERE k > 1)
             INSERT INTO r SELECT s, x FROM rep;",
        ).unwrap();
        let weighted = "(SELECT dist_empirical(x, w) FROM t WHERE s = 1), \
                        (SELECT dist_empirical(x, w) FROM t WHERE s = 2)";
        let replicated = "(SELECT dist_empirical(x) FROM r WHERE s = 1), \
                          (SELECT dist_empirical(x) FROM r WHERE s = 2)";
        let got = text(&conn, &format!("SELECT dist_ks({weighted})"), []);
        let want = text(&conn, "SELECT ks_test(x, s = 2) FROM r", []);
        prop_assert_eq!(got, want);
        for metric in ["ks", "cvm", "ad"] {
            let got = text(&conn, &format!("SELECT dist_distance({weighted}, ?1)"), [metric]);
            let want = text(&conn, &format!("SELECT dist_distance({replicated}, ?1)"), [metric]);
            prop_assert_eq!(got, want, "{}", metric);
        }
    }

    #[test]
    fn swapping_the_distributions(
        x in prop::collection::vec(value(), 1..25),
        y in prop::collection::vec(value(), 1..25),
    ) {
        let conn = loaded(&x, &y, None, None);
        let swapped = "(SELECT dist_empirical(x) FROM t WHERE s = 2), \
                       (SELECT dist_empirical(x) FROM t WHERE s = 1)";
        let parse = |t: Option<String>| t.map(|t| serde_json::from_str::<Json>(&t).unwrap());
        for metric in ["ks", "wasserstein", "cvm", "ad"] {
            let a = parse(text(&conn, &format!("SELECT dist_distance({DISTS}, ?1)"), [metric]));
            let b = parse(text(&conn, &format!("SELECT dist_distance({swapped}, ?1)"), [metric]));
            prop_assert_eq!(a.is_some(), b.is_some());
            if let (Some(a), Some(b)) = (a, b) {
                // Exact for the rank statistics (integer arithmetic, or the same sums in
                // another order for ad); the Wasserstein sum is taken in one order either
                // way. Tolerance 1e-12 relative for the floating-point ones.
                for key in ["statistic", "p"] {
                    match (a[key].as_f64(), b[key].as_f64()) {
                        (Some(u), Some(v)) => prop_assert!(
                            (u - v).abs() <= 1e-12 * u.abs().max(v.abs()),
                            "{} {}: {} vs {}", metric, key, u, v
                        ),
                        (u, v) => prop_assert_eq!(u, v),
                    }
                }
            }
        }
        let less = text(&conn, &format!("SELECT dist_ks({DISTS}, 'less', 'exact')"), []);
        let greater = text(&conn, &format!("SELECT dist_ks({swapped}, 'greater', 'exact')"), []);
        let (less, greater) = (parse(less).unwrap(), parse(greater).unwrap());
        prop_assert_eq!(&less["d"], &greater["d"]);
        let (p, q) = (less["p"].as_f64().unwrap(), greater["p"].as_f64().unwrap());
        prop_assert!((p - q).abs() <= 1e-13, "{} vs {}", p, q);
    }

    #[test]
    fn one_sample_against_a_model(
        x in prop::collection::vec(value(), 1..40),
        mean in -3.0f64..3.0,
        sd in 0.05f64..5.0,
    ) {
        let conn = loaded(&x, &[], None, None);
        let params = format!(r#"{{"mean": {mean}, "sd": {sd}}}"#);
        conn.execute(
            "CREATE TABLE v AS SELECT dist_empirical(x) AS d, dist_model('normal', ?1) AS m \
             FROM t WHERE s = 1",
            [&params],
        ).unwrap();
        let parse = |t: Option<String>| serde_json::from_str::<Json>(&t.unwrap()).unwrap();
        for (first, second) in [("two-sided", "two-sided"), ("less", "greater"), ("greater", "less")] {
            let a = parse(text(&conn, "SELECT dist_ks(d, m, ?1) FROM v", [first]));
            let b = parse(text(&conn, "SELECT dist_ks(m, d, ?1) FROM v", [second]));
            prop_assert_eq!(&a["d"], &b["d"]);
            prop_assert_eq!(&a["p"], &b["p"]);
            prop_assert_eq!(&a["n1"], &b["n2"]);
            prop_assert_eq!(&b["n1"], &Json::Null);
        }
        let ks = parse(text(&conn, "SELECT dist_ks(d, m) FROM v", []));
        let dist = parse(text(&conn, "SELECT dist_distance(d, m, 'ks') FROM v", []));
        prop_assert_eq!(&ks["d"], &dist["statistic"]);
        prop_assert_eq!(&ks["p"], &dist["p"]);
        let d = ks["d"].as_f64().unwrap();
        let p = ks["p"].as_f64().unwrap();
        let tallest: f64 = conn.query_row(
            "SELECT max(cdf - prev) FROM (SELECT cdf, lag(cdf, 1, 0) OVER (ORDER BY x) AS prev \
             FROM dist_steps((SELECT d FROM v)))",
            [],
            |r| r.get(0),
        ).unwrap();
        // Half a step, less one unit of rounding in the ECDF's and the cdf's arithmetic.
        prop_assert!(d >= tallest / 2.0 - 1e-15, "d {} below half of {}", d, tallest);
        prop_assert!((0.0..=1.0).contains(&d) && (0.0..=1.0).contains(&p), "d {} p {}", d, p);
    }
}
