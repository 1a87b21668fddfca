//! Every aggregate can merge: a group's rows split into random parts, each part stepped
//! into its own state, the states saved (the serialised form an engine ships between
//! processes; for some parts the saved form with the values apart, as DataFusion ships
//! them), loaded and merged in random order, give the same answer as one state over
//! all rows: bit for bit for the exact functions, within the stated rank error for the
//! sketch. The expected value is the single state's own answer (an invariant, not an
//! outside reference).

use std::sync::Arc;

use ogive::catalogue::state::{Aggregator, Args, Run};
use ogive::catalogue::value::{Arg, Out};
use ogive::catalogue::{self, FunctionDef, Imp, Kind};
use ogive::stats::sketch::DEFAULT_EPSILON;
use ogive::value::{empirical, sketch};
use proptest::prelude::*;

/// A row's arguments, owned.
#[derive(Debug, Clone)]
enum V {
    Null,
    I(i64),
    R(f64),
    T(&'static str),
    B(Vec<u8>),
}

impl V {
    fn arg(&self) -> Arg<'_> {
        match self {
            V::Null => Arg::Null,
            V::I(i) => Arg::Integer(*i),
            V::R(r) => Arg::Real(*r),
            V::T(t) => Arg::Text(t.as_bytes()),
            V::B(b) => Arg::Blob(b),
        }
    }
}

/// The rows of one group for function `name`, built from random values `xs` (with ties
/// and NULLs) and flags.
fn rows_for(name: &str, xs: &[Option<f64>], pick: &[u8]) -> Option<Vec<Vec<V>>> {
    let x = |v: &Option<f64>| v.map_or(V::Null, V::R);
    let w = |i: usize| V::R(f64::from(pick[i % pick.len()] % 4));
    let rows: Vec<Vec<V>> = match name {
        "ecdf" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| {
                if pick[0].is_multiple_of(2) {
                    vec![x(v), V::R(3.5)]
                } else {
                    vec![x(v), V::R(3.5), w(i)]
                }
            })
            .collect(),
        "quantile" => xs
            .iter()
            .map(|v| {
                if pick[0].is_multiple_of(2) {
                    vec![x(v), V::R(0.3)]
                } else {
                    vec![x(v), V::R(0.3), V::I(i64::from(pick[0] % 9) + 1)]
                }
            })
            .collect(),
        "median" => xs.iter().map(|v| vec![x(v)]).collect(),
        "weighted_quantile" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| vec![x(v), w(i), V::R(0.7)])
            .collect(),
        "quantiles" => xs
            .iter()
            .map(|v| vec![x(v), V::T("[0, 0.25, 0.5, 0.99]")])
            .collect(),
        "profile" => xs.iter().map(|v| vec![x(v)]).collect(),
        "ks_test" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| vec![x(v), V::I(i64::from(pick[i % pick.len()] % 2))])
            .collect(),
        "dist_empirical" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| {
                if pick[0].is_multiple_of(2) {
                    vec![x(v)]
                } else {
                    vec![x(v), w(i)]
                }
            })
            .collect(),
        "dist_merge" => xs
            .chunks(3)
            .map(|c| {
                let vals: Vec<f64> = c.iter().flatten().copied().collect();
                if vals.is_empty() {
                    vec![V::Null]
                } else {
                    let n = vals.len() as f64;
                    let s = ogive::stats::sample::Sample::from_values(vals).unwrap();
                    // Some parts are series values (dist_series), with n_eff below n.
                    if pick[c.len() % pick.len()].is_multiple_of(3) {
                        vec![V::B(empirical::encode_series(&s, (0.7 * n).max(1.0)))]
                    } else {
                        vec![V::B(empirical::encode(&s))]
                    }
                }
            })
            .collect(),
        "dist_series" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| {
                // Times with ties (the merged result must sort them the same way whatever
                // the order rows arrive in), and a NULL time now and then.
                let t = match pick[i % pick.len()] % 9 {
                    0 => V::Null,
                    k => V::I(i64::from(k) + (i as i64 / 3)),
                };
                vec![x(v), t]
            })
            .collect(),
        "dist_censored" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| {
                // Mostly exact; codes from the picks, with NULL codes now and then.
                let code = match pick[i % pick.len()] % 7 {
                    0 => V::Null,
                    1 | 2 => V::I(1),
                    3 => V::I(-1),
                    _ => V::I(0),
                };
                vec![x(v), code]
            })
            .collect(),
        "dist_fit" => xs
            .iter()
            .map(|v| {
                let shifted = v.map_or(V::Null, |x| V::R(x + 6.0));
                // Half the cases on the readings' grid of 0.5 (binned likelihood).
                if pick[0].is_multiple_of(2) {
                    vec![shifted, V::T("gamma")]
                } else {
                    vec![shifted, V::T("gamma"), V::R(0.5)]
                }
            })
            .collect(),
        "dist_fit_censored" => xs
            .iter()
            .enumerate()
            .map(|(i, v)| {
                let c = i64::from(pick[i % pick.len()] % 3) - 1;
                vec![
                    v.map_or(V::Null, |x| V::R(x + 6.0)),
                    V::I(c),
                    V::T("weibull"),
                ]
            })
            .collect(),
        "dist_mixture" => xs
            .iter()
            .map(|v| {
                if pick[0].is_multiple_of(2) {
                    vec![x(v), V::I(2)]
                } else {
                    vec![x(v), V::Null, V::T("auto")]
                }
            })
            .collect(),
        "quantile_sketch" => xs.iter().map(|v| vec![x(v)]).collect(),
        "sketch_merge" => xs
            .chunks(4)
            .map(|c| {
                let mut s = ogive::stats::sketch::QuantileSketch::new(DEFAULT_EPSILON).unwrap();
                for v in c.iter().flatten() {
                    s.insert(*v).unwrap();
                }
                vec![sketch::encode(&s).map_or(V::Null, V::B)]
            })
            .collect(),
        _ => return None,
    };
    Some(rows)
}

fn step_all(def: &FunctionDef, rows: &[Vec<V>]) -> Result<Box<dyn Aggregator>, String> {
    let Imp::Aggregate(imp) = def.imp else {
        unreachable!()
    };
    let mut s = (imp.new)();
    for r in rows {
        let args: Vec<Arg<'_>> = r.iter().map(V::arg).collect();
        s.step(&Args::new(&args)).map_err(|e| e.to_string())?;
    }
    Ok(s)
}

/// One state over all rows, and the merge of the parts cut at `cuts`, merged in the
/// order `order` (a permutation seed).
fn both(
    def: &FunctionDef,
    rows: &[Vec<V>],
    cuts: &[usize],
    order: u64,
) -> (Result<Out, String>, Result<Out, String>) {
    let whole = step_all(def, rows).and_then(|mut s| s.finalize().map_err(|e| e.to_string()));
    let mut bounds: Vec<usize> = cuts.iter().map(|&c| c % (rows.len() + 1)).collect();
    bounds.push(0);
    bounds.push(rows.len());
    bounds.sort_unstable();
    let mut parts: Vec<&[Vec<V>]> = bounds.windows(2).map(|w| &rows[w[0]..w[1]]).collect();
    // A random order of the parts (Fisher-Yates with a splitmix64 stream).
    let mut state = order;
    for i in (1..parts.len()).rev() {
        let j = (ogive::stats::rng::splitmix64(&mut state) % (i as u64 + 1)) as usize;
        parts.swap(i, j);
    }
    let Imp::Aggregate(imp) = def.imp else {
        unreachable!()
    };
    let merged = (|| {
        let mut acc = (imp.new)();
        for (i, p) in parts.into_iter().enumerate() {
            let mut part = step_all(def, p)?;
            if (order >> (i % 64)) & 1 == 0 {
                // Through the serialised form, as an engine ships it.
                let restored = (imp.load)(&part.save()).map_err(|e| e.to_string())?;
                acc.merge_saved(&restored.save())
                    .map_err(|e| e.to_string())?;
            } else {
                // The saved form with the values apart, as DataFusion ships it.
                let (saved, lists) = part.save_apart();
                if lists.len() != imp.lists {
                    return Err(format!("{} lists, declared {}", lists.len(), imp.lists));
                }
                let runs = lists
                    .into_iter()
                    .map(|l| Arc::new(l) as Arc<dyn Run>)
                    .collect();
                acc.merge_apart(&saved, runs).map_err(|e| e.to_string())?;
            }
        }
        if order >> 63 == 1 {
            // A merged state (adopted values included) saved and loaded again.
            acc = (imp.load)(&acc.save()).map_err(|e| e.to_string())?;
        }
        acc.finalize().map_err(|e| e.to_string())
    })();
    (whole, merged)
}

/// The sketch's answers: for each p, the rank of the sketch's quantile in the sorted
/// data must be within epsilon * n of p * n (its stated bound, with probability at least
/// 1 - 2e-6 per query).
fn sketch_within_bound(blob: &Out, xs: &[f64]) {
    let Out::Blob(b) = blob else {
        assert!(xs.is_empty(), "no sketch for {} values", xs.len());
        return;
    };
    let s = sketch::decode(b).unwrap();
    let mut sorted = xs.to_vec();
    sorted.sort_by(f64::total_cmp);
    let n = sorted.len() as f64;
    for p in [0.01, 0.25, 0.5, 0.75, 0.99] {
        let q = s.quantile(p).unwrap().unwrap();
        let below = sorted.partition_point(|&x| x < q) as f64;
        let at_or_below = sorted.partition_point(|&x| x <= q) as f64;
        let target = p * n;
        let err = if target < below {
            below - target
        } else if target > at_or_below {
            target - at_or_below
        } else {
            0.0
        };
        assert!(
            err <= DEFAULT_EPSILON * n + 1.0,
            "p {p}: rank error {err} of n {n}"
        );
    }
}

fn values() -> impl Strategy<Value = Vec<Option<f64>>> {
    // Halves from -5 to 15 (many ties) and some NULLs.
    proptest::collection::vec(
        prop_oneof![1 => Just(None), 9 => (-10i32..30).prop_map(|i| Some(f64::from(i) / 2.0))],
        0..60,
    )
}

proptest! {
    #![proptest_config(ProptestConfig::with_cases(48))]

    #[test]
    fn every_aggregate_merges(
        xs in values(),
        pick in proptest::collection::vec(any::<u8>(), 1..8),
        cuts in proptest::collection::vec(any::<usize>(), 0..5),
        order in any::<u64>(),
    ) {
        for def in catalogue::all().filter(|d| matches!(d.kind, Kind::Aggregate | Kind::Window)) {
            let rows = rows_for(def.name, &xs, &pick)
                .unwrap_or_else(|| panic!("no merge test rows for aggregate {}", def.name));
            let (whole, merged) = both(def, &rows, &cuts, order);
            match def.name {
                "quantile_sketch" | "sketch_merge" => {
                    let data: Vec<f64> = xs.iter().flatten().copied().collect();
                    sketch_within_bound(&merged.clone().unwrap(), &data);
                    sketch_within_bound(&whole.clone().unwrap(), &data);
                }
                _ => prop_assert_eq!(&whole, &merged, "{}", def.name),
            }
        }
    }
}

#[test]
fn states_of_another_function_or_version_are_refused() {
    let find = |n: &str| catalogue::find(n).unwrap();
    let (Imp::Aggregate(q), Imp::Aggregate(p)) = (find("quantile").imp, find("profile").imp) else {
        unreachable!()
    };
    let saved = (p.new)().save();
    let e = match (q.load)(&saved) {
        Err(e) => e.to_string(),
        Ok(_) => panic!("a profile state read as a quantile state"),
    };
    assert_eq!(
        e,
        "quantile: cannot read a partial aggregate state (a saved state of another function); \
         the engine's processes must run the same ogive"
    );
    let mut newer = (q.new)().save();
    newer[4] = ogive::catalogue::state::STATE_VERSION + 1;
    assert!((q.load)(&newer).is_err());
    let mut truncated = (q.new)().save();
    truncated.pop();
    assert!((q.load)(&truncated).is_err());
}

#[test]
fn constants_that_differ_between_parts_are_refused() {
    let Imp::Aggregate(imp) = catalogue::find("quantile").unwrap().imp else {
        unreachable!()
    };
    let mut a = (imp.new)();
    a.step(&Args::new(&[Arg::Real(1.0), Arg::Real(0.5)]))
        .unwrap();
    let mut b = (imp.new)();
    b.step(&Args::new(&[Arg::Real(2.0), Arg::Real(0.9)]))
        .unwrap();
    let e = a.merge_saved(&b.save()).unwrap_err();
    assert_eq!(
        e.to_string(),
        "quantile: p must be the same on every row of a group, got 0.5 and then 0.9"
    );
}
