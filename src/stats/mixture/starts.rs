//! Starting points: the quantile start and k-means++ seedings refined by Lloyd iterations.

use super::data::Data;
use super::em::Params;
use super::*;
use crate::stats::rng::SplitMix64;
use crate::stats::sum::NeumaierSum;

impl Data {
    /// Parameters from a hard partition of the merged points (`label[i]` in `0..k`);
    /// `None` when a part is empty.
    pub(super) fn partition_params(&self, k: usize, label: &[usize]) -> Option<Params> {
        let mut p = Params {
            k,
            weight: [0.0; MAX_COMPONENTS],
            mean: [0.0; MAX_COMPONENTS],
            var: [0.0; MAX_COMPONENTS],
        };
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        for ((&x, &c), &j) in self.x.iter().zip(&self.count).zip(label) {
            s0[j].add(c);
            s1[j].add(c * x);
        }
        for j in 0..k {
            let w = s0[j].value();
            if w <= 0.0 {
                return None;
            }
            p.weight[j] = w / self.total;
            p.mean[j] = s1[j].value() / w;
        }
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        for ((&x, &c), &j) in self.x.iter().zip(&self.count).zip(label) {
            s2[j].add(c * (x - p.mean[j]).powi(2));
        }
        for j in 0..k {
            p.var[j] = (s2[j].value() / s0[j].value()).max(VARIANCE_FLOOR);
        }
        Some(p)
    }

    /// The quantile start: k blocks of equal count along the sorted data.
    pub(super) fn quantile_start(&self, k: usize) -> Option<Params> {
        let mut below = 0.0;
        let label: Vec<usize> = self
            .count
            .iter()
            .map(|&c| {
                let middle = below + 0.5 * c;
                below += c;
                ((k as f64 * middle / self.total) as usize).min(k - 1)
            })
            .collect();
        self.partition_params(k, &label)
    }

    /// A k-means++ start: seeded D^2 sampling of k centres, Lloyd iterations, then the
    /// parameters of the final partition.
    pub(super) fn kmeans_start(&self, k: usize, seed: u64) -> Option<Params> {
        let mut rng = SplitMix64::new(0x6f67_6976_655f_656d ^ ((k as u64) << 32) ^ seed);
        let m = self.x.len();
        let mut centres = [0.0; MAX_COMPONENTS];
        // Squared distance to the nearest centre so far, times the count.
        let mut d2: Vec<f64> = vec![f64::INFINITY; m];
        for centre in centres.iter_mut().take(k) {
            let total = if d2[0].is_infinite() {
                self.total
            } else {
                d2.iter().sum::<f64>()
            };
            if total.is_nan() || total <= 0.0 {
                return None;
            }
            let target = rng.next_f64() * total;
            let mut acc = 0.0;
            let mut pick = m - 1;
            for (i, &di) in d2.iter().enumerate() {
                acc += if di.is_infinite() { self.count[i] } else { di };
                if acc > target {
                    pick = i;
                    break;
                }
            }
            *centre = self.x[pick];
            for (i, di) in d2.iter_mut().enumerate() {
                let d = self.x[i] - *centre;
                let v = self.count[i] * d * d;
                *di = if di.is_infinite() { v } else { di.min(v) };
            }
        }
        // Lloyd's iterations. On sorted points each centre's part is a run of consecutive
        // points, so an iteration finds the k - 1 boundaries by binary search and the
        // parts' sums from prefix sums: O(k log m) instead of O(k m).
        let mut bounds = [0usize; MAX_COMPONENTS + 1];
        let mut order = [0usize; MAX_COMPONENTS];
        let mut previous: Option<[usize; MAX_COMPONENTS + 1]> = None;
        for _ in 0..100 {
            self.lloyd_parts(&centres[..k], &mut order[..k], &mut bounds[..=k]);
            for (s, &j) in order[..k].iter().enumerate() {
                let (lo, hi) = (bounds[s], bounds[s + 1]);
                let s0 = self.prefix_count[hi] - self.prefix_count[lo];
                if s0 > 0.0 {
                    centres[j] = (self.prefix_sum[hi] - self.prefix_sum[lo]) / s0;
                }
            }
            if previous == Some(bounds) {
                break;
            }
            previous = Some(bounds);
        }
        let mut label = vec![0usize; m];
        for (s, &j) in order[..k].iter().enumerate() {
            label[bounds[s]..bounds[s + 1]].fill(j);
        }
        self.partition_params(k, &label)
    }

    /// The parts of one Lloyd step: each point goes to its nearest centre (the first by
    /// index among equally near ones), so on sorted points, with the centres in increasing
    /// order (`order`, ties by index), part `s` is `bounds[s]..bounds[s + 1]`.
    pub(super) fn lloyd_parts(&self, centres: &[f64], order: &mut [usize], bounds: &mut [usize]) {
        for (s, o) in order.iter_mut().enumerate() {
            *o = s;
        }
        order.sort_by(|&a, &b| centres[a].total_cmp(&centres[b]).then(a.cmp(&b)));
        bounds[0] = 0;
        for s in 1..order.len() {
            let (a, b) = (order[s - 1], order[s]);
            let (ca, cb) = (centres[a], centres[b]);
            // Moving right, a point turns from nearer to a to nearer to b once; the
            // comparison is the one a direct scan makes.
            let prefers_b = |x: f64| {
                let (da, db) = ((x - ca).abs(), (x - cb).abs());
                db < da || (db == da && b < a)
            };
            let start = bounds[s - 1];
            bounds[s] = start + self.x[start..].partition_point(|&x| !prefers_b(x));
        }
        bounds[order.len()] = self.x.len();
    }
}
