//! Properties of distribution values that must hold for every input (proptest):
//!
//! - the cdf is monotone and right-continuous;
//! - type-1 quantiles and the cdf form a Galois connection: `Q(p) <= t` exactly when
//!   `p <= F(t)`, so `F(Q(p)) >= p` and `Q(F(t)) <= t` (the definition of the inverse of
//!   a step cdf, Hyndman and Fan 1996, definition 1);
//! - `dist_merge` is associative and commutative, bit for bit, through SQL;
//! - selection (`quantile_select`, sampled above 32,768 values) picks exactly what a full
//!   sort picks, for every type and any order of the values.
//!
//! Values come from a small grid (many ties) or anywhere in the finite doubles, with and
//! without frequency weights.

use ogive::stats::quantile::{QuantileType, quantile_select, quantile_sorted};
use ogive::stats::sample::Sample;
use ogive::value::{Dist, empirical};
use proptest::prelude::*;
use rusqlite::Connection;

/// A value: on a coarse grid (ties), a signed zero, or any finite double.
fn value() -> impl Strategy<Value = f64> {
    prop_oneof![
        4 => (-40i32..40).prop_map(|k| f64::from(k) / 4.0),
        1 => Just(-0.0),
        2 => any::<f64>().prop_filter("finite", |x| x.is_finite()),
    ]
}

/// A sample, unweighted or with weights (whole, fractional, or zero: dropped).
fn sample() -> impl Strategy<Value = Sample> {
    let weight = prop_oneof![(0u8..4).prop_map(f64::from), (0.001f64..10.0),];
    prop_oneof![
        prop::collection::vec(value(), 1..40).prop_map(|v| Sample::from_values(v).unwrap()),
        prop::collection::vec((value(), weight), 1..40)
            .prop_map(|p| Sample::from_pairs(p).unwrap())
            .prop_filter("some weight", |s| !s.is_empty()),
    ]
}

/// The sample after a trip through its BLOB, as the SQL functions see it.
fn through_blob(s: &Sample) -> Sample {
    let blob = empirical::encode(s);
    match Dist::from_blob(&blob, 1).unwrap() {
        Dist::Empirical(s) => s,
        other => panic!("a BLOB decodes to an empirical distribution, got {other:?}"),
    }
}

/// Points to probe: each value, its neighbours in the doubles, and some others.
fn probes(s: &Sample, extra: &[f64]) -> Vec<f64> {
    let mut ts: Vec<f64> = s
        .values()
        .iter()
        .flat_map(|&x| [x, x.next_up(), x.next_down()])
        .chain(extra.iter().copied())
        .chain([f64::NEG_INFINITY, f64::INFINITY, f64::MAX, f64::MIN])
        .collect();
    ts.sort_by(f64::total_cmp);
    ts
}

proptest! {
    #[test]
    fn cdf_is_monotone_and_right_continuous(
        s in sample(),
        extra in prop::collection::vec(value(), 0..10),
    ) {
        let s = through_blob(&s);
        let ts = probes(&s, &extra);
        let f: Vec<f64> = ts.iter().map(|&t| s.cdf(t).unwrap()).collect();
        for (i, w) in f.windows(2).enumerate() {
            prop_assert!(w[0] <= w[1], "not monotone at {} -> {}", ts[i], ts[i + 1]);
        }
        prop_assert_eq!(s.cdf(f64::NEG_INFINITY).unwrap(), 0.0);
        prop_assert_eq!(s.cdf(f64::INFINITY).unwrap(), 1.0);
        for &t in &ts {
            // Right-continuity of a step function: F(t) = F(t+) where t+ is the next
            // double, unless a value sits exactly there (then F jumps at t+, not at t).
            let up = t.next_up();
            if up.is_finite() && !s.values().contains(&up) {
                prop_assert_eq!(s.cdf(t), s.cdf(up), "at {}", t);
            }
        }
    }

    #[test]
    fn type_1_quantile_and_cdf_are_a_galois_connection(
        s in sample(),
        ps in prop::collection::vec(0.0f64..=1.0, 0..20),
        extra in prop::collection::vec(value(), 0..10),
    ) {
        let s = through_blob(&s);
        let ty = QuantileType::new(1).unwrap();
        let ts = probes(&s, &extra);
        // Probe p at the cdf's own levels (where rounding bites) and at random levels.
        let mut levels: Vec<f64> = ts.iter().map(|&t| s.cdf(t).unwrap()).collect();
        levels.extend(ps.iter().copied());
        for &p in levels.iter().filter(|&&p| p > 0.0) {
            let q = s.quantile(p, ty).unwrap().unwrap();
            prop_assert!(s.cdf(q).unwrap() >= p, "F(Q({})) = {} < p", p, s.cdf(q).unwrap());
            for &t in &ts {
                let f = s.cdf(t).unwrap();
                prop_assert_eq!(q <= t, p <= f, "p {} t {} Q(p) {} F(t) {}", p, t, q, f);
            }
        }
        for &t in &ts {
            let f = s.cdf(t).unwrap();
            if f > 0.0 {
                let q = s.quantile(f, ty).unwrap().unwrap();
                prop_assert!(q <= t, "Q(F({})) = {} > t", t, q);
            }
        }
    }

    #[test]
    fn merge_is_associative_and_commutative_in_sql(
        a in sample(), b in sample(), c in sample(),
    ) {
        let conn = Connection::open_in_memory().unwrap();
        ogive::register(&conn).unwrap();
        let (a, b, c) = (empirical::encode(&a), empirical::encode(&b), empirical::encode(&c));
        let merge = |x: &[u8], y: &[u8]| -> Vec<u8> {
            conn.query_row(
                "SELECT dist_merge(d) FROM (SELECT ?1 AS d UNION ALL SELECT ?2)",
                [x, y],
                |r| r.get(0),
            )
            .unwrap()
        };
        prop_assert_eq!(merge(&a, &b), merge(&b, &a));
        let left = merge(&merge(&a, &b), &c);
        let right = merge(&a, &merge(&b, &c));
        prop_assert_eq!(&left, &right);
        // And the same as merging all three at once.
        let all: Vec<u8> = conn
            .query_row(
                "SELECT dist_merge(d) FROM (SELECT ?1 AS d UNION ALL SELECT ?2 UNION ALL SELECT ?3)",
                [&a, &b, &c],
                |r| r.get(0),
            )
            .unwrap();
        prop_assert_eq!(&left, &all);
    }

    #[test]
    fn large_selection_equals_sorting(
        pattern in prop::collection::vec(value(), 1..300),
        n in 32_768usize..45_000,
        order in 0u8..3,
        p in 0.0f64..=1.0,
        ty in 1i64..=9,
    ) {
        // Many copies of a short pattern: heavy ties, and sorted, reversed or cycled
        // orders, where a sample taken at fixed positions could be misled.
        let mut data: Vec<f64> = pattern.iter().copied().cycle().take(n).collect();
        match order {
            0 => data.sort_by(f64::total_cmp),
            1 => data.sort_by(|a, b| b.total_cmp(a)),
            _ => {}
        }
        let mut sorted = data.clone();
        sorted.sort_by(f64::total_cmp);
        let ty = QuantileType::new(ty).unwrap();
        let want = quantile_sorted(&sorted, p, ty).unwrap().map(f64::to_bits);
        let got = quantile_select(&mut data, p, ty).unwrap().map(f64::to_bits);
        prop_assert_eq!(got, want);
    }
}
