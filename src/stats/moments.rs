//! A numeric summary of a sample: count, mean, standard deviation, extremes, quartiles,
//! skewness and excess kurtosis.
//!
//! Moments are computed in two passes (mean first, then central sums), each with a
//! compensated sum, which avoids the cancellation of the one-pass textbook formula.
//! Skewness and kurtosis are the adjusted Fisher-Pearson estimators `G1` and `G2` of
//! D. N. Joanes and C. A. Gill, "Comparing measures of sample skewness and kurtosis",
//! *The Statistician* 47(1), 183-189, 1998 (the ones SAS, SPSS and Excel report; in scipy,
//! `skew(x, bias=False)` and `kurtosis(x, fisher=True, bias=False)`). The standard
//! deviation uses the `n - 1` divisor. Quartiles are Hyndman-Fan type 7.
//!
//! With frequency weights the total weight `W` replaces n throughout (`W - 1` divisor,
//! `W` in the G1 and G2 adjustments), so whole-number weights give exactly the summary of
//! the replicated sample.

use super::quantile::{QuantileType, quantile_cumulative, quantile_sorted};
use super::sum::{self, NeumaierSum};

/// The summary of a sample. Fields that are undefined for the sample (the sd of one
/// value, the skewness of a constant sample, any moment of a sample with an infinity)
/// are `None`.
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Number of values.
    pub n: u64,
    /// The total frequency weight `W` of a weighted sample (which then plays the part of
    /// n in the moments); `None` for an unweighted one.
    pub total_weight: Option<f64>,
    /// Arithmetic mean.
    pub mean: Option<f64>,
    /// Sample standard deviation (divisor n - 1); needs n >= 2.
    pub sd: Option<f64>,
    /// Smallest value.
    pub min: f64,
    /// First quartile (type 7).
    pub q1: f64,
    /// Median (type 7).
    pub median: f64,
    /// Third quartile (type 7).
    pub q3: f64,
    /// Largest value.
    pub max: f64,
    /// Adjusted Fisher-Pearson skewness G1; needs n >= 3 and a non-zero spread.
    pub skewness: Option<f64>,
    /// Adjusted excess kurtosis G2; needs n >= 4 and a non-zero spread.
    pub excess_kurtosis: Option<f64>,
}

impl Profile {
    /// Summarises values sorted ascending. `None` for an empty slice.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::moments::Profile;
    /// let p = Profile::from_sorted(&[1.0, 2.0, 3.0, 4.0]).unwrap();
    /// assert_eq!(p.mean, Some(2.5));
    /// assert_eq!(p.median, 2.5);
    /// ```
    pub fn from_sorted(sorted: &[f64]) -> Option<Profile> {
        let q = |p| {
            quantile_sorted(sorted, p, QuantileType::DEFAULT)
                .ok()
                .flatten()
        };
        summarise(sorted, None, q)
    }

    /// Summarises values sorted ascending with frequency weights (finite, > 0, one per
    /// value). The total weight `W` plays the part of n in every formula, so with
    /// whole-number weights the result equals [`Profile::from_sorted`] of the values
    /// repeated as often as their weights say. `n` is the number of values given and
    /// [`Profile::total_weight`] is `W`. `None` for an empty slice or mismatched lengths (or
    /// when memory for the running sums of the weights ran out).
    ///
    /// # Example
    /// ```
    /// use ogive::stats::moments::Profile;
    /// // [1, 1, 1, 5] as two weighted values.
    /// let p = Profile::from_weighted_sorted(&[1.0, 5.0], &[3.0, 1.0]).unwrap();
    /// assert_eq!((p.mean, p.median, p.total_weight), (Some(2.0), 1.0, Some(4.0)));
    /// ```
    pub fn from_weighted_sorted(sorted: &[f64], weights: &[f64]) -> Option<Profile> {
        if sorted.len() != weights.len() {
            return None;
        }
        // Out of memory for the running sums: None as documented.
        let cumulative = sum::cumulative(weights).ok()?;
        Profile::from_weighted_cumulative(sorted, weights, &cumulative)
    }

    /// [`Profile::from_weighted_sorted`] given also the running compensated sums of the
    /// weights ([`sum::cumulative`]), which a sample keeps: no allocation. `None` for an
    /// empty slice or mismatched lengths.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::moments::Profile;
    /// let p = Profile::from_weighted_cumulative(&[1.0, 5.0], &[3.0, 1.0], &[3.0, 4.0]).unwrap();
    /// assert_eq!((p.mean, p.median), (Some(2.0), 1.0));
    /// ```
    pub fn from_weighted_cumulative(
        sorted: &[f64],
        weights: &[f64],
        cumulative: &[f64],
    ) -> Option<Profile> {
        if sorted.len() != weights.len() || cumulative.len() != weights.len() {
            return None;
        }
        let q = |p| {
            quantile_cumulative(sorted, cumulative, p, QuantileType::DEFAULT)
                .ok()
                .flatten()
        };
        summarise(sorted, Some(weights), q)
    }
}

/// The weighted central moments of a sample: total weight `W`, mean and the central
/// moments `m_k = sum(w (x - mean)^k) / W` for k = 2, 3, 4, each by a compensated sum in a
/// second pass over the data.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Moments {
    /// The total weight `W` (n when unweighted).
    pub weight: f64,
    /// The (weighted) mean.
    pub mean: f64,
    /// Second central moment, divisor `W`.
    pub m2: f64,
    /// Third central moment, divisor `W`.
    pub m3: f64,
    /// Fourth central moment, divisor `W`.
    pub m4: f64,
    /// The power of two the values were multiplied by before `m2`, `m3` and `m4` were
    /// taken: 1 unless a sum or a power overflowed (values near 1.8e308), so that the
    /// moments are those of `x * scale`. Ratios such as `m3 / m2^1.5` do not depend on
    /// it; [`Moments::population_sd`] and [`Moments::sample_sd`] divide it out.
    pub scale: f64,
}

impl Moments {
    /// The moments of `values` (any order) with optional frequency weights (one per
    /// value). `None` when there is no weight, the lengths differ, a value is infinite or
    /// the mean overflows.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::moments::Moments;
    /// let m = Moments::of(&[1.0, 3.0], None).unwrap();
    /// assert_eq!((m.mean, m.m2, m.population_sd()), (2.0, 1.0, 1.0));
    /// ```
    pub fn of(values: &[f64], weights: Option<&[f64]>) -> Option<Moments> {
        if weights.is_some_and(|w| w.len() != values.len()) {
            return None;
        }
        let weight = match weights {
            None => values.len() as f64,
            Some(w) => sum::sum(w),
        };
        if !(weight > 0.0 && weight.is_finite()) || values.iter().any(|x| !x.is_finite()) {
            return None;
        }
        let plain = Moments::scaled(values, weights, weight, 1.0);
        if plain.is_some_and(|m| m.m2.is_finite() && m.m3.is_finite() && m.m4.is_finite()) {
            return plain;
        }
        // A sum or a power overflowed: the same moments of x * 2^-e with 2^e above the
        // largest |x|, so that every scaled value is at most 1 (exact but for values
        // below 2^-1022 times 2^e, far below the rounding of the sums).
        let top = values.iter().fold(0.0f64, |a, x| a.max(x.abs()));
        let e = top.log2().ceil() as i32 + 1;
        Moments::scaled(values, weights, weight, 2f64.powi(-e.clamp(0, 1022)))
    }

    /// The moments of `x * scale` (mean reported unscaled).
    fn scaled(values: &[f64], weights: Option<&[f64]>, weight: f64, scale: f64) -> Option<Moments> {
        let w = |i: usize| weights.map_or(1.0, |w| w[i]);
        let mut s = NeumaierSum::default();
        match weights {
            None => values.iter().for_each(|&x| s.add(x * scale)),
            Some(ws) => values
                .iter()
                .zip(ws)
                .for_each(|(&x, &w)| s.add(w * (x * scale))),
        }
        let mean = s.value() / weight;
        if !mean.is_finite() {
            return None;
        }
        let (mut m1, mut m2, mut m3, mut m4) = (
            NeumaierSum::default(),
            NeumaierSum::default(),
            NeumaierSum::default(),
            NeumaierSum::default(),
        );
        for (i, &x) in values.iter().enumerate() {
            let wi = w(i);
            let d = x * scale - mean;
            let d2 = d * d;
            m1.add(wi * d);
            m2.add(wi * d2);
            m3.add(wi * (d2 * d));
            m4.add(wi * (d2 * d2));
        }
        // The moments about the rounded mean, moved to the true one (the corrected two-pass
        // algorithm; Chan, Golub and LeVeque 1983): `c` is the mean's rounding error, which
        // near 2^63 is up to 1024 and would otherwise add `c^2` to m2.
        let c = m1.value() / weight;
        let (e2, e3, e4) = (
            m2.value() / weight,
            m3.value() / weight,
            m4.value() / weight,
        );
        Some(Moments {
            weight,
            mean: mean / scale,
            m2: (e2 - c * c).max(0.0),
            m3: e3 - 3.0 * c * e2 + 2.0 * c * c * c,
            m4: e4 - 4.0 * c * e3 + 6.0 * c * c * e2 - 3.0 * c * c * c * c,
            scale,
        })
    }

    /// The standard deviation with divisor `W` (numpy's `std(x)`, ddof 0).
    pub fn population_sd(&self) -> f64 {
        self.m2.sqrt() / self.scale
    }

    /// The sample standard deviation with divisor `W - 1`; `None` unless `W > 1` and the
    /// result is finite.
    ///
    /// # Example
    /// ```
    /// use ogive::stats::moments::Moments;
    /// // [2, 4, 4, 4, 5, 5, 7, 9]: population sd 2, sample sd sqrt(32 / 7).
    /// let m = Moments::of(&[2.0, 4.0, 5.0, 7.0, 9.0], Some(&[1.0, 3.0, 2.0, 1.0, 1.0])).unwrap();
    /// assert_eq!(m.population_sd(), 2.0);
    /// assert!((m.sample_sd().unwrap() - (32.0f64 / 7.0).sqrt()).abs() < 1e-15);
    /// ```
    pub fn sample_sd(&self) -> Option<f64> {
        let w = self.weight;
        (w > 1.0)
            .then(|| (self.m2 * w / (w - 1.0)).sqrt() / self.scale)
            .filter(|s| s.is_finite())
    }
}

/// The shared body of the two constructors: `weights` is `None` for unit weights.
fn summarise(
    sorted: &[f64],
    weights: Option<&[f64]>,
    q: impl Fn(f64) -> Option<f64>,
) -> Option<Profile> {
    let n = sorted.len();
    if n == 0 {
        return None;
    }
    let m = Moments::of(sorted, weights);
    let nf = m.map_or(0.0, |m| m.weight);
    let spread = m.is_some_and(|m| m.m2 > 0.0 && m.m2.is_finite());
    let (m2, m3, m4) = m.map_or((0.0, 0.0, 0.0), |m| (m.m2, m.m3, m.m4));
    let skewness = (spread && nf > 2.0)
        .then(|| {
            let g1 = m3 / m2.powf(1.5);
            (nf * (nf - 1.0)).sqrt() / (nf - 2.0) * g1
        })
        .filter(|v| v.is_finite());
    let excess_kurtosis = (spread && nf > 3.0)
        .then(|| {
            let g2 = m4 / (m2 * m2) - 3.0;
            ((nf + 1.0) * g2 + 6.0) * (nf - 1.0) / ((nf - 2.0) * (nf - 3.0))
        })
        .filter(|v| v.is_finite());
    Some(Profile {
        n: n as u64,
        total_weight: weights.map(sum::sum),
        mean: m.map(|m| m.mean),
        sd: m.and_then(|m| m.sample_sd()),
        min: sorted[0],
        q1: q(0.25)?,
        median: q(0.5)?,
        q3: q(0.75)?,
        max: sorted[n - 1],
        skewness,
        excess_kurtosis,
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn small_sample_by_hand() {
        // x = [1, 2, 3, 4, 10]: mean 4, deviations -3 -2 -1 0 6, m2 = 50/5 = 10,
        // m3 = (-27 - 8 - 1 + 0 + 216)/5 = 36, m4 = (81 + 16 + 1 + 0 + 1296)/5 = 278.8.
        // sd = sqrt(50/4); g1 = 36 / 10^1.5; G1 = sqrt(20)/3 * g1;
        // g2 = 278.8/100 - 3; G2 = ((6) g2 + 6) * 4 / (3 * 2). Hand arithmetic, 1e-12 relative.
        let p = Profile::from_sorted(&[1.0, 2.0, 3.0, 4.0, 10.0]).unwrap();
        let close = |a: f64, b: f64| (a - b).abs() <= 1e-12 * b.abs();
        assert_eq!(p.mean, Some(4.0));
        assert!(close(p.sd.unwrap(), 12.5f64.sqrt()));
        let g1 = 36.0 / 10f64.powf(1.5);
        assert!(close(p.skewness.unwrap(), 20f64.sqrt() / 3.0 * g1));
        let g2 = 278.8 / 100.0 - 3.0;
        assert!(close(
            p.excess_kurtosis.unwrap(),
            (6.0 * g2 + 6.0) * 4.0 / 6.0
        ));
        assert_eq!(
            (p.min, p.q1, p.median, p.q3, p.max),
            (1.0, 2.0, 3.0, 4.0, 10.0)
        );
    }

    #[test]
    fn whole_weights_equal_replication() {
        // Definition of frequency weights: [1, 2, 2, 3, 10, 10, 10] written with weights.
        // Tolerance 1e-14 relative (the two paths add in different orders).
        let w =
            Profile::from_weighted_sorted(&[1.0, 2.0, 3.0, 10.0], &[1.0, 2.0, 1.0, 3.0]).unwrap();
        let r = Profile::from_sorted(&[1.0, 2.0, 2.0, 3.0, 10.0, 10.0, 10.0]).unwrap();
        let close = |a: Option<f64>, b: Option<f64>| {
            let (a, b) = (a.unwrap(), b.unwrap());
            (a - b).abs() <= 1e-14 * b.abs()
        };
        assert!(close(w.mean, r.mean));
        assert!(close(w.sd, r.sd));
        assert!(close(w.skewness, r.skewness));
        assert!(close(w.excess_kurtosis, r.excess_kurtosis));
        assert_eq!((w.q1, w.median, w.q3), (r.q1, r.median, r.q3));
        assert_eq!((w.n, w.total_weight, r.total_weight), (4, Some(7.0), None));
    }

    #[test]
    fn undefined_fields_are_none() {
        let one = Profile::from_sorted(&[5.0]).unwrap();
        assert_eq!(
            (one.sd, one.skewness, one.excess_kurtosis),
            (None, None, None)
        );
        let flat = Profile::from_sorted(&[2.0; 6]).unwrap();
        assert_eq!(flat.sd, Some(0.0));
        assert_eq!(flat.skewness, None);
        let inf = Profile::from_sorted(&[1.0, f64::INFINITY]).unwrap();
        assert_eq!(inf.mean, None);
        assert_eq!(inf.max, f64::INFINITY);
        assert!(Profile::from_sorted(&[]).is_none());
    }

    #[test]
    fn values_near_the_largest_double_have_a_mean_and_sd() {
        // Exact arithmetic: mean of [1.7e308, 1.6e308] is 1.65e308, the sample sd is
        // 0.1e308 / sqrt 2 = 7.071067811865475e306; tolerance 1e-15 relative.
        let m = Moments::of(&[1.7e308, 1.6e308], None).unwrap();
        assert!((m.mean - 1.65e308).abs() <= 1e-15 * 1.65e308, "{}", m.mean);
        let sd = m.sample_sd().unwrap();
        assert!((sd - 7.071067811865475e306).abs() <= 1e-15 * sd, "{sd}");
        // Ordinary data keep scale 1 (so the same bits as before).
        assert_eq!(Moments::of(&[1.0, 3.0], None).unwrap().scale, 1.0);
    }
}
