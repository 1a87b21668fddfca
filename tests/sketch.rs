//! The quantile sketch's guarantee, checked by enumeration: for 200 seeded streams
//! (uniform, normal, lognormal, heavily tied, sorted and reverse-sorted), the exact rank
//! of every point comes from a sorted copy of the stream, and the sketch's rank error,
//! maximised over *every* point (a sweep over all jumps of both step functions, which is
//! stronger than the per-query statement), must not exceed the stated bound epsilon * n.
//! The same for merges of 64 shard sketches. The reference is exact sorting, which the
//! issue accepts as the outside reference by enumeration.

use ogive::stats::rng::splitmix64;
use ogive::stats::sketch::{DEFAULT_EPSILON, QuantileSketch, epsilon_for_k, max_retained};
use ogive::value::sketch::{decode, encode};

/// SplitMix64 with uniform and normal draws, for seeded streams.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        splitmix64(&mut self.0)
    }
    /// Uniform in (0, 1).
    fn uniform(&mut self) -> f64 {
        ((self.next() >> 11) as f64 + 0.5) / (1u64 << 53) as f64
    }
    /// Standard normal by Box-Muller.
    fn normal(&mut self) -> f64 {
        let (u, v) = (self.uniform(), self.uniform());
        (-2.0 * u.ln()).sqrt() * (std::f64::consts::TAU * v).cos()
    }
}

const KINDS: [&str; 6] = [
    "uniform",
    "normal",
    "lognormal",
    "heavily tied",
    "sorted",
    "reverse-sorted",
];

/// Stream `i` of the 200: its kind cycles through [`KINDS`]; n ranges over 5,000..=105,000.
fn stream(i: u64) -> (&'static str, Vec<f64>) {
    let mut rng = Rng(0x5EED_0000 + i);
    let n = 5_000 + (i * 7_919 % 100_001) as usize;
    let kind = KINDS[(i % 6) as usize];
    let xs = (0..n)
        .map(|j| match kind {
            "uniform" => rng.uniform() * 100.0,
            "normal" => 20.0 + 5.0 * rng.normal(),
            "lognormal" => rng.normal().exp(),
            // Seven distinct values, one of them holding half the mass.
            "heavily tied" => {
                if rng.uniform() < 0.5 {
                    3.0
                } else {
                    (rng.next() % 7) as f64
                }
            }
            "sorted" => j as f64 * 0.25,
            _ => (n - j) as f64 * 0.25,
        })
        .collect();
    (kind, xs)
}

/// The largest |estimated rank - true rank| over all t, by a sweep over the union of the
/// jump points of the two step functions (both are right-continuous, so the difference
/// is constant between consecutive jump points).
fn max_rank_error(s: &QuantileSketch, sorted: &[f64]) -> u64 {
    let mut kept: Vec<(f64, u64)> = s
        .levels()
        .iter()
        .enumerate()
        .flat_map(|(h, l)| l.iter().map(move |&x| (x, 1u64 << h)))
        .collect();
    kept.sort_by(|a, b| a.0.total_cmp(&b.0));
    let (mut i, mut j) = (0, 0);
    let (mut exact, mut estimate) = (0u64, 0u64);
    let mut worst = 0;
    while i < sorted.len() || j < kept.len() {
        let t = match (sorted.get(i), kept.get(j)) {
            (Some(&a), Some(&(b, _))) => a.min(b),
            (Some(&a), None) => a,
            (None, Some(&(b, _))) => b,
            (None, None) => unreachable!(),
        };
        while i < sorted.len() && sorted[i] <= t {
            exact += 1;
            i += 1;
        }
        while j < kept.len() && kept[j].0 <= t {
            estimate += kept[j].1;
            j += 1;
        }
        worst = worst.max(exact.abs_diff(estimate));
    }
    worst
}

/// Checks one sketch against the sorted stream: the cdf error at every point, and the
/// true rank of each returned quantile, within `epsilon * n`. Returns the worst cdf
/// error as a share of n.
fn check(s: &QuantileSketch, sorted: &[f64], epsilon: f64, what: &str) -> f64 {
    let n = sorted.len() as f64;
    assert_eq!(s.n() as usize, sorted.len(), "{what}");
    assert!(s.epsilon() <= epsilon, "{what}");
    // The bound the sketch's own compaction history proves is never above the stated one
    // (the lemma bounding S in the module docs).
    assert!(
        s.instance_error_bound() <= s.epsilon(),
        "{what}: {} > {}",
        s.instance_error_bound(),
        s.epsilon()
    );
    assert!(
        s.retained() as u64 <= max_retained(s.k(), s.n()),
        "{what}: memory"
    );
    let worst = max_rank_error(s, sorted) as f64;
    assert!(
        worst <= epsilon * n,
        "{what}: rank error {worst} > {}",
        epsilon * n
    );
    let ps: Vec<f64> = (0..=200).map(|i| f64::from(i) / 200.0).collect();
    let qs = s.quantiles(&ps).unwrap();
    for p in [0.0, 0.05, 0.5, 0.995, 1.0] {
        assert_eq!(
            s.quantile(p).unwrap(),
            qs[(p * 200.0).round() as usize],
            "{what}"
        );
    }
    for (&p, q) in ps.iter().zip(qs) {
        let q = q.unwrap();
        let below = sorted.partition_point(|&x| x < q) as f64;
        let at_or_below = sorted.partition_point(|&x| x <= q) as f64;
        assert!(
            below <= p * n + epsilon * n && at_or_below >= p * n - epsilon * n,
            "{what}: quantile({p}) = {q} has true ranks {below}..{at_or_below}, n = {n}"
        );
    }
    worst / n
}

#[test]
fn two_hundred_streams_stay_within_the_stated_bound() {
    // Each stream at the default epsilon (0.005) and at 0.05, where k is ten times
    // smaller and the level hierarchy deeper.
    let mut worst = [0.0f64; 2];
    for i in 0..200 {
        let (kind, xs) = stream(i);
        let mut sorted = xs.clone();
        sorted.sort_by(f64::total_cmp);
        for (slot, epsilon) in [DEFAULT_EPSILON, 0.05].into_iter().enumerate() {
            let mut s = QuantileSketch::new(epsilon).unwrap();
            xs.iter().for_each(|&x| s.insert(x).unwrap());
            let what = format!("stream {i} ({kind}, n = {}), epsilon {epsilon}", xs.len());
            worst[slot] = worst[slot].max(check(&s, &sorted, epsilon, &what));
        }
    }
    eprintln!(
        "worst observed rank error over 200 streams: {:.5} (bound 0.005), {:.5} (bound 0.05)",
        worst[0], worst[1]
    );
}

#[test]
fn merging_64_shards_keeps_the_guarantee() {
    // 40 of the streams, each cut into 64 shards of uneven sizes: contiguous runs (sorted
    // input then gives each shard its own range) or dealt out at random; merged one by
    // one, or pairwise as a tree. Same checks as one sketch over all rows.
    let mut worst = 0.0f64;
    for i in 0..40 {
        let (kind, xs) = stream(i * 3 + 1);
        let mut sorted = xs.clone();
        sorted.sort_by(f64::total_cmp);
        let mut rng = Rng(i);
        let epsilon = if i % 2 == 0 { DEFAULT_EPSILON } else { 0.05 };
        let mut shards: Vec<QuantileSketch> = (0..64)
            .map(|_| QuantileSketch::new(epsilon).unwrap())
            .collect();
        if i % 4 < 2 {
            // Contiguous: 63 random cut points.
            let mut cuts: Vec<usize> = (0..63)
                .map(|_| (rng.next() % xs.len() as u64) as usize)
                .collect();
            cuts.push(0);
            cuts.push(xs.len());
            cuts.sort_unstable();
            for (shard, w) in shards.iter_mut().zip(cuts.windows(2)) {
                xs[w[0]..w[1]]
                    .iter()
                    .for_each(|&x| shard.insert(x).unwrap());
            }
        } else {
            for &x in &xs {
                // Skewed dealing: low-numbered shards get more rows.
                let a = rng.next() % 64;
                let b = rng.next() % 64;
                shards[a.min(b) as usize].insert(x).unwrap();
            }
        }
        let merged = if i % 3 == 0 {
            let mut level = shards;
            while level.len() > 1 {
                level = level
                    .chunks(2)
                    .map(|pair| {
                        let mut a = pair[0].clone();
                        if let Some(b) = pair.get(1) {
                            a.merge(b).unwrap();
                        }
                        a
                    })
                    .collect();
            }
            level.pop().unwrap()
        } else {
            let mut acc = QuantileSketch::new(epsilon).unwrap();
            for s in &shards {
                // Through the BLOB, as sketch_merge does (an empty shard has none).
                if let Some(blob) = encode(s) {
                    acc.merge(&decode(&blob).unwrap()).unwrap();
                }
            }
            acc
        };
        let what = format!(
            "merge of 64 shards of stream {} ({kind}), epsilon {epsilon}",
            i * 3 + 1
        );
        worst = worst.max(check(&merged, &sorted, epsilon, &what) / epsilon);
    }
    eprintln!("worst observed rank error of a 64-shard merge, as a share of its bound: {worst:.4}");
}

#[test]
fn same_input_same_bytes_and_different_shards_draw_different_coins() {
    let (_, xs) = stream(7);
    let build = |xs: &[f64]| {
        let mut s = QuantileSketch::new(0.01).unwrap();
        xs.iter().for_each(|&x| s.insert(x).unwrap());
        s
    };
    assert_eq!(encode(&build(&xs)), encode(&build(&xs)));
    // Two halves with different data end with different coin states.
    let (a, b) = xs.split_at(xs.len() / 2);
    assert_ne!(build(a).rng_state(), build(b).rng_state());
}

#[test]
fn stated_bound_is_the_proven_one() {
    // The parameter chosen for the default is the smallest k meeting it.
    let k = QuantileSketch::new(DEFAULT_EPSILON).unwrap().k();
    assert!(epsilon_for_k(k) <= DEFAULT_EPSILON);
    assert!(epsilon_for_k(k - 1) > DEFAULT_EPSILON);
}
