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

use super::quantile::{QuantileType, quantile_sorted};
use super::sum::NeumaierSum;

/// The summary of a sample. Fields that are undefined for the sample (the sd of one
/// value, the skewness of a constant sample, any moment of a sample with an infinity)
/// are `None`.
#[derive(Debug, Clone, PartialEq)]
pub struct Profile {
    /// Number of values.
    pub n: u64,
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
        let n = sorted.len();
        if n == 0 {
            return None;
        }
        let q = |p| {
            quantile_sorted(sorted, p, QuantileType::DEFAULT)
                .ok()
                .flatten()
        };
        let nf = n as f64;
        let finite = sorted.iter().all(|x| x.is_finite());
        let mean = if finite {
            let mut s = NeumaierSum::default();
            sorted.iter().for_each(|&x| s.add(x));
            Some(s.value() / nf).filter(|m| m.is_finite())
        } else {
            None
        };
        let (mut m2, mut m3, mut m4) = (
            NeumaierSum::default(),
            NeumaierSum::default(),
            NeumaierSum::default(),
        );
        if let Some(mean) = mean {
            for &x in sorted {
                let d = x - mean;
                let d2 = d * d;
                m2.add(d2);
                m3.add(d2 * d);
                m4.add(d2 * d2);
            }
        }
        let (m2, m3, m4) = (m2.value() / nf, m3.value() / nf, m4.value() / nf);
        let spread = mean.is_some() && m2 > 0.0 && m2.is_finite();
        let sd = mean
            .filter(|_| n >= 2)
            .map(|_| (m2 * nf / (nf - 1.0)).sqrt())
            .filter(|s| s.is_finite());
        let skewness = (spread && n >= 3)
            .then(|| {
                let g1 = m3 / m2.powf(1.5);
                (nf * (nf - 1.0)).sqrt() / (nf - 2.0) * g1
            })
            .filter(|v| v.is_finite());
        let excess_kurtosis = (spread && n >= 4)
            .then(|| {
                let g2 = m4 / (m2 * m2) - 3.0;
                ((nf + 1.0) * g2 + 6.0) * (nf - 1.0) / ((nf - 2.0) * (nf - 3.0))
            })
            .filter(|v| v.is_finite());
        Some(Profile {
            n: n as u64,
            mean,
            sd,
            min: sorted[0],
            q1: q(0.25)?,
            median: q(0.5)?,
            q3: q(0.75)?,
            max: sorted[n - 1],
            skewness,
            excess_kurtosis,
        })
    }
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
}
