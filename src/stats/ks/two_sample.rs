//! The two-sample test: the statistic, the exact p-value by lattice paths (conditional on
//! ties) and the asymptotic one.

use super::*;
use crate::stats::grow;
use crate::stats::sum::NeumaierSum;

/// The result of a two-sample test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct KsResult {
    /// The statistic for the alternative.
    pub d: f64,
    /// The p-value, in `[0, 1]`.
    pub p: f64,
    /// Size of the first sample.
    pub n1: usize,
    /// Size of the second sample.
    pub n2: usize,
    /// The alternative tested.
    pub alternative: Alternative,
    /// How the p-value was computed.
    pub method: MethodUsed,
}

/// The two-sample statistics in exact integer form, with the tie pattern of the pooled sample.
#[derive(Debug, Clone, PartialEq, Eq)]
pub struct TwoSampleStatistic {
    /// Size of the first sample.
    pub n1: usize,
    /// Size of the second sample.
    pub n2: usize,
    /// `D+ * n1 * n2`: the largest `i n2 - j n1` (at least 0).
    pub plus: u64,
    /// `D- * n1 * n2`: the largest `j n1 - i n2` (at least 0).
    pub minus: u64,
    /// Sizes of the blocks of equal values in the pooled sorted sample; they sum to `n1 + n2`.
    pub blocks: Vec<usize>,
}

impl TwoSampleStatistic {
    /// The integer numerator `h` of the statistic for an alternative (`D = h / (n1 n2)`).
    pub fn numerator(&self, alternative: Alternative) -> u64 {
        match alternative {
            Alternative::TwoSided => self.plus.max(self.minus),
            Alternative::Less => self.minus,
            Alternative::Greater => self.plus,
        }
    }

    /// The statistic for an alternative.
    pub fn d(&self, alternative: Alternative) -> f64 {
        self.numerator(alternative) as f64 / (self.n1 as f64 * self.n2 as f64)
    }

    /// Whether the pooled sample has tied values.
    pub fn has_ties(&self) -> bool {
        self.blocks.len() < self.n1 + self.n2
    }
}

/// Checks that a slice is free of NaN and sorted ascending.
pub(crate) fn check_sorted(xs: &[f64]) -> Result<(), TestError> {
    if xs.iter().any(|x| x.is_nan()) {
        return Err(TestError::NotANumber);
    }
    if xs.windows(2).any(|w| w[0] > w[1]) {
        return Err(TestError::NotSorted);
    }
    Ok(())
}

/// The next pooled value of two sorted slices read up to `i` and `j`: the smaller of `x[i]`
/// and `y[j]`, `None` when both are used up.
pub(crate) fn next_pooled(x: &[f64], i: usize, y: &[f64], j: usize) -> Option<f64> {
    match (x.get(i), y.get(j)) {
        (Some(&a), Some(&b)) => Some(a.min(b)),
        (Some(&a), None) => Some(a),
        (None, Some(&b)) => Some(b),
        (None, None) => None,
    }
}

/// Computes the two-sample statistics of sorted samples `x` and `y`.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], or [`TestError::TooFewValues`] when a
/// sample is empty.
///
/// # Example
/// ```
/// use ogive::stats::ks::{two_sample_statistic, Alternative};
/// let s = two_sample_statistic(&[1.0, 2.0, 3.0], &[2.0, 4.0])?;
/// // F1 - F2 at 1, 2, 3, 4: 1/3, 1/6, 1/2, 0.
/// assert_eq!((s.plus, s.minus), (3, 0));
/// assert_eq!(s.d(Alternative::TwoSided), 0.5);
/// assert_eq!(s.blocks, vec![1, 2, 1, 1]);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn two_sample_statistic(x: &[f64], y: &[f64]) -> Result<TwoSampleStatistic, TestError> {
    let mut blocks = Vec::new();
    walk(x, y, |size| {
        Ok(crate::stats::grow::push(&mut blocks, size)?)
    })
    .map(|s| TwoSampleStatistic { blocks, ..s })
}

/// The walk of [`two_sample_statistic`] over the pooled sample: checks both samples,
/// calls `block` with each tie block's size in order, and gives the statistics with an
/// empty block list.
fn walk(
    x: &[f64],
    y: &[f64],
    mut block: impl FnMut(usize) -> Result<(), TestError>,
) -> Result<TwoSampleStatistic, TestError> {
    check_sorted(x)?;
    check_sorted(y)?;
    let (n1, n2) = (x.len(), y.len());
    if n1 == 0 || n2 == 0 {
        return Err(TestError::TooFewValues { needed: 1, got: 0 });
    }
    let (mut i, mut j) = (0usize, 0usize);
    let (mut plus, mut minus) = (0i128, 0i128);
    while i < n1 || j < n2 {
        let Some(v) = next_pooled(x, i, y, j) else {
            break;
        };
        let start = i + j;
        while i < n1 && x[i] == v {
            i += 1;
        }
        while j < n2 && y[j] == v {
            j += 1;
        }
        block(i + j - start)?;
        let diff = i as i128 * n2 as i128 - j as i128 * n1 as i128;
        plus = plus.max(diff);
        minus = minus.max(-diff);
    }
    Ok(TwoSampleStatistic {
        n1,
        n2,
        plus: plus as u64,
        minus: minus as u64,
        blocks: Vec::new(),
    })
}

/// The two-sample Kolmogorov-Smirnov test on sorted samples.
///
/// With [`PMethod::Auto`] the p-value is exact (conditional on ties) when
/// `n1 * n2 <= AUTO_EXACT_CELLS`, asymptotic otherwise; [`PMethod::Exact`] counts exactly up to
/// [`MAX_EXACT_CELLS`]. See the module docs for both methods.
///
/// # Errors
/// As [`two_sample_statistic`], and [`TestError::ExactTooLarge`] for a forced exact p-value
/// beyond [`MAX_EXACT_CELLS`].
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_2samp, Alternative, PMethod, MethodUsed};
/// let r = ks_2samp(&[1.0, 2.0, 3.0], &[4.0, 5.0, 6.0], Alternative::TwoSided, PMethod::Auto)?;
/// // Complete separation: 2 of the C(6, 3) = 20 splits are as extreme.
/// assert_eq!(r.d, 1.0);
/// assert!((r.p - 0.1).abs() < 1e-15);
/// assert_eq!(r.method, MethodUsed::Exact);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_2samp(
    x: &[f64],
    y: &[f64],
    alternative: Alternative,
    method: PMethod,
) -> Result<KsResult, TestError> {
    let cells = x.len() as u64 * y.len() as u64;
    let exact = match method {
        PMethod::Auto => cells <= AUTO_EXACT_CELLS,
        PMethod::Exact => true,
        PMethod::Asymptotic => false,
    };
    if !exact {
        // The block list matters only for an exact p-value or with ties: a walk that
        // notes whether there is a tie spares the list (8 bytes a distinct value) when
        // there is none, and the test is then the same as with the all-ones list.
        let mut tied = false;
        let s = walk(x, y, |size| {
            tied |= size > 1;
            Ok(())
        })?;
        if !tied {
            return test_of(&s, false, alternative, method);
        }
    }
    let s = two_sample_statistic(x, y)?;
    ks_2samp_from_statistic(&s, alternative, method)
}

/// The two-sample test from statistics already computed (for callers that hold the pooled
/// tie pattern in another form).
///
/// # Errors
/// [`TestError::ExactTooLarge`] for a forced exact p-value beyond [`MAX_EXACT_CELLS`].
///
/// # Example
/// ```
/// use ogive::stats::ks::{ks_2samp_from_statistic, two_sample_statistic, Alternative, PMethod};
/// let s = two_sample_statistic(&[1.0, 2.0], &[3.0])?;
/// let r = ks_2samp_from_statistic(&s, Alternative::Greater, PMethod::Exact)?;
/// assert_eq!(r.d, 1.0);
/// assert!((r.p - 1.0 / 3.0).abs() < 1e-15);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn ks_2samp_from_statistic(
    s: &TwoSampleStatistic,
    alternative: Alternative,
    method: PMethod,
) -> Result<KsResult, TestError> {
    test_of(s, s.has_ties(), alternative, method)
}

/// [`ks_2samp_from_statistic`], told whether the pooled sample has ties (`s.blocks` is
/// read only for an exact p-value or with ties).
fn test_of(
    s: &TwoSampleStatistic,
    ties: bool,
    alternative: Alternative,
    method: PMethod,
) -> Result<KsResult, TestError> {
    let cells = s.n1 as u64 * s.n2 as u64;
    let exact = match method {
        PMethod::Auto => cells <= AUTO_EXACT_CELLS,
        PMethod::Exact => {
            if cells > MAX_EXACT_CELLS {
                return Err(TestError::ExactTooLarge {
                    detail: format!("n1 * n2 = {cells} is above {MAX_EXACT_CELLS} lattice cells"),
                });
            }
            true
        }
        PMethod::Asymptotic => false,
    };
    let h = s.numerator(alternative);
    let d = s.d(alternative);
    let (p, method) = if exact {
        (
            exact_2samp_p(s.n1, s.n2, h, &s.blocks, alternative)?,
            MethodUsed::Exact,
        )
    } else if let Some(p) = ties
        .then(|| ties_2samp_p(s.n1, s.n2, &s.blocks, d, alternative))
        .flatten()
    {
        (p, MethodUsed::AsymptoticTies)
    } else {
        (
            asymptotic_2samp_p(s.n1, s.n2, d, alternative),
            MethodUsed::Asymptotic,
        )
    };
    Ok(KsResult {
        d,
        p,
        n1: s.n1,
        n2: s.n2,
        alternative,
        method,
    })
}

/// The exact p-value `P(D >= h / (n1 n2))` over all splits of a pooled sample whose tie
/// blocks have the sizes `blocks` (in sorted order; all ones when there are no ties), by the
/// lattice-path walk of the module docs.
///
/// `blocks` must sum to `n1 + n2`; a block list that does not is treated as untied.
/// A p-value below the smallest normal double (about 2.2e-308) is returned as 0. The walk
/// takes `n1 + n2` steps over up to `n1 + 1` cells (seconds at [`super::MAX_EXACT_CELLS`])
/// and polls for cancellation ([`crate::stats::cancel`]) every 256 steps.
///
/// # Errors
/// [`TestError::Interrupted`] when the engine asked the call to stop;
/// [`TestError::OutOfMemory`] when the walk's two buffers (`n1 + n2 + 1` flags and
/// `n1 + 1` doubles) do not fit.
///
/// # Example
/// ```
/// use ogive::stats::ks::{exact_2samp_p, Alternative};
/// // n1 = n2 = 2, no ties: D = 1 happens for 2 of the 6 splits.
/// let p = exact_2samp_p(2, 2, 4, &[1, 1, 1, 1], Alternative::TwoSided)?;
/// assert!((p - 2.0 / 6.0).abs() < 1e-15);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn exact_2samp_p(
    n1: usize,
    n2: usize,
    h: u64,
    blocks: &[usize],
    alternative: Alternative,
) -> Result<f64, TestError> {
    let n = n1 + n2;
    if h == 0 || n1 == 0 || n2 == 0 {
        return Ok(1.0);
    }
    // checked[s]: whether the ECDFs are compared after s pooled values.
    let mut checked = grow::filled(n + 1, false)?;
    if blocks.iter().sum::<usize>() == n {
        let mut s = 0;
        for &b in blocks {
            s += b;
            checked[s] = true;
        }
    } else {
        checked.iter_mut().for_each(|c| *c = true);
    }
    let h = h as i128;
    let (nn, nn1) = (n as i128, n1 as i128);
    // At step s the cell with i values of x has i n2 - j n1 = i N - s n1, increasing in i.
    let out_high = |i: usize, s: usize| -> bool {
        let diff = i as i128 * nn - s as i128 * nn1;
        match alternative {
            Alternative::Greater => diff >= h,
            Alternative::Less => false,
            Alternative::TwoSided => diff >= h,
        }
    };
    let out_low = |i: usize, s: usize| -> bool {
        let diff = i as i128 * nn - s as i128 * nn1;
        match alternative {
            Alternative::Greater => false,
            Alternative::Less | Alternative::TwoSided => -diff >= h,
        }
    };
    let mut cur = grow::filled(n1 + 1, 0.0f64)?;
    cur[0] = 1.0;
    let (mut lo, mut hi) = (0usize, 0usize);
    let mut exited = NeumaierSum::default();
    for s in 0..n {
        if s % 256 == 255 && crate::stats::cancel::requested() {
            return Err(TestError::Interrupted);
        }
        let inv = 1.0 / (n - s) as f64;
        let new_lo = lo.max((s + 1).saturating_sub(n2));
        let new_hi = (hi + 1).min(n1);
        // Descending, so cur[i - 1] is still the old value when cur[i] is rewritten.
        let mut i = new_hi;
        loop {
            let from_left = if i > lo && i - 1 <= hi {
                cur[i - 1] * (n1 - (i - 1)) as f64
            } else {
                0.0
            };
            let stay = if i <= hi && i >= lo {
                cur[i] * (n2 - (s - i)) as f64
            } else {
                0.0
            };
            cur[i] = (from_left + stay) * inv;
            if i == new_lo {
                break;
            }
            i -= 1;
        }
        for c in &mut cur[lo..new_lo] {
            *c = 0.0;
        }
        lo = new_lo;
        hi = new_hi;
        if checked[s + 1] {
            let mut empty = false;
            while out_high(hi, s + 1) {
                exited.add(cur[hi]);
                cur[hi] = 0.0;
                if hi == lo {
                    empty = true;
                    break;
                }
                hi -= 1;
            }
            while !empty && out_low(lo, s + 1) {
                exited.add(cur[lo]);
                cur[lo] = 0.0;
                if lo == hi {
                    empty = true;
                    break;
                }
                lo += 1;
            }
            if empty {
                return Ok(normal_or_zero(exited.value()));
            }
        }
    }
    Ok(normal_or_zero(exited.value()))
}

/// A probability from the lattice walk, clamped to [0, 1]. Below the smallest normal
/// double (about 2.2e-308) the walk's masses have underflowed and the digits that remain
/// are rounding noise, so such a p is reported as 0: the true value is smaller still.
fn normal_or_zero(p: f64) -> f64 {
    if p < f64::MIN_POSITIVE {
        0.0
    } else {
        p.min(1.0)
    }
}

/// The asymptotic two-sample p-value for statistic `d` (see the module docs).
///
/// # Example
/// ```
/// use ogive::stats::ks::{asymptotic_2samp_p, Alternative};
/// let p = asymptotic_2samp_p(1000, 1000, 0.05, Alternative::TwoSided);
/// assert!(p > 0.1 && p < 0.2);
/// ```
pub fn asymptotic_2samp_p(n1: usize, n2: usize, d: f64, alternative: Alternative) -> f64 {
    let (m, n) = if n1 >= n2 {
        (n1 as f64, n2 as f64)
    } else {
        (n2 as f64, n1 as f64)
    };
    let en = m * n / (m + n);
    let p = match alternative {
        Alternative::TwoSided => {
            let size = (en.round_ties_even() as u64).max(1);
            kolmogorov_sf(size, d)
        }
        Alternative::Less | Alternative::Greater => {
            let z = en.sqrt() * d;
            (-2.0 * z * z - 2.0 * z * (m + 2.0 * n) / (m * n * (m + n)).sqrt() / 3.0).exp()
        }
    };
    p.clamp(0.0, 1.0)
}
