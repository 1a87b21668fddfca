//! Two-sample (and k-sample) comparisons beyond Kolmogorov-Smirnov: the Cramer-von Mises test,
//! the Anderson-Darling k-sample test, and the Wasserstein-1 distance. Pure functions on sorted
//! slices.
//!
//! # Cramer-von Mises, two samples (Anderson 1962)
//!
//! With `x` of size `m`, `y` of size `n`, `N = m + n`, and `r_i`, `s_j` the (mid)ranks of the
//! sorted `x` and `y` in the pooled sample,
//! `U = m sum (r_i - i)^2 + n sum (s_j - j)^2` and `T = U / (m n N) - (4 m n - 1) / (6 N)`.
//! Without ties `T = (m n / N^2) sum_k (F1 - F2)^2` over the pooled points. The statistic is
//! held exactly: doubled midranks are integers, so `4U` is an exact integer.
//!
//! - Exact p-value: the share of all `C(N, m)` splits whose path sum `sum_k (i_k n - j_k m)^2`
//!   reaches the observed one (Anderson 1962; counted by a lattice-path recursion over the
//!   attainable sums as in Xiao, Gordon and Yakovlev 2006). It is the distribution without
//!   ties; with ties it is an approximation, as in scipy.
//! - Asymptotic p-value: Anderson's (1962) standardisation
//!   `T* = 1/6 + (T - E T) / sqrt(45 Var T)` referred to the limiting one-sample Cramer-von
//!   Mises distribution, evaluated by the series of Csorgo and Faraway (1996, eq. 1.2) in
//!   modified Bessel functions `K_{1/4}`, which are computed here by the trapezoidal rule on
//!   `K_nu(q) = int_0^inf exp(-q cosh t) cosh(nu t) dt` (exponentially convergent).
//!
//! # Anderson-Darling, k samples (Scholz and Stephens 1987)
//!
//! The midrank statistic `A2akN` of Scholz and Stephens (1987, eq. 7), suited to data with
//! ties, standardised as `(A2akN - (k - 1)) / sigma_N` with their exact finite-sample variance
//! (eq. 4). Its p-value interpolates their table of upper quantiles (Table 2 coefficients
//! `t_m(alpha) = b0 + b1 / sqrt(m) + b2 / m`, `m = k - 1`) by a least-squares quadratic in
//! `ln(alpha)`, as they recommend; outside the table (`alpha` from 0.25 down to 0.001) the
//! p-value is reported as a bound ([`PRange`]), never as a made-up number.
//!
//! # Wasserstein-1
//!
//! `W1 = integral |F1(t) - F2(t)| dt`, the L1 distance between the two (weighted) ECDFs: a sum
//! over the gaps between pooled values, accumulated with a compensated sum. It is in the units
//! of the data: how far mass has to move, on average, to turn one sample into the other.

use std::collections::HashMap;

use super::ks::{TestError, check_sorted, next_pooled};
use super::sum::NeumaierSum;

fn need(xs: &[f64], needed: usize) -> Result<(), TestError> {
    if xs.len() < needed {
        return Err(TestError::TooFewValues {
            needed,
            got: xs.len(),
        });
    }
    Ok(())
}

/// How a p-value relates to the truth.
#[derive(Debug, Clone, Copy, PartialEq, Eq)]
pub enum PRange {
    /// `p` is the p-value (within the method's accuracy).
    Value,
    /// The p-value is at least `p` (beyond the end of a table).
    AtLeast,
    /// The p-value is at most `p` (beyond the other end of a table).
    AtMost,
}

impl PRange {
    /// `value`, `at_least` or `at_most`.
    pub fn name(self) -> &'static str {
        match self {
            PRange::Value => "value",
            PRange::AtLeast => "at_least",
            PRange::AtMost => "at_most",
        }
    }
}

// ---------------------------------------------------------------------------------------
// Cramer-von Mises

/// Two-sample Cramer-von Mises sizes with `max(m, n)` up to this use the exact p-value under
/// `Auto` when there are no ties (scipy uses the same cut).
pub const CVM_AUTO_EXACT_MAX: usize = 20;

/// The largest `m + n` for which an exact Cramer-von Mises p-value is attempted.
pub const CVM_MAX_EXACT_TOTAL: usize = 60;

/// The result of the two-sample Cramer-von Mises test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct CvmResult {
    /// Anderson's `T`.
    pub statistic: f64,
    /// The p-value.
    pub p: f64,
    /// How `p` was computed.
    pub method: super::ks::MethodUsed,
}

/// `4U` exactly, with whether the pooled sample has ties.
fn cvm_u4(x: &[f64], y: &[f64]) -> (i128, bool) {
    let (m, n) = (x.len(), y.len());
    let (mut i, mut j) = (0usize, 0usize);
    let (mut sx, mut sy) = (0i128, 0i128);
    let mut ties = false;
    while i < m || j < n {
        let Some(v) = next_pooled(x, i, y, j) else {
            break;
        };
        let start = i + j; // values before this block
        let (i0, j0) = (i, j);
        while i < m && x[i] == v {
            i += 1;
        }
        while j < n && y[j] == v {
            j += 1;
        }
        let len = (i + j - start) as i128;
        ties |= len > 1;
        // Doubled midrank of the block: 2 start + len + 1.
        let r2 = 2 * start as i128 + len + 1;
        for k in i0..i {
            let diff = r2 - 2 * (k as i128 + 1);
            sx += diff * diff;
        }
        for k in j0..j {
            let diff = r2 - 2 * (k as i128 + 1);
            sy += diff * diff;
        }
    }
    (m as i128 * sx + n as i128 * sy, ties)
}

/// The two-sample Cramer-von Mises test of sorted samples (Anderson 1962).
///
/// `method`: `Auto` is exact when `max(m, n) <= CVM_AUTO_EXACT_MAX` and there are no ties,
/// asymptotic otherwise; `Exact` is refused above `m + n = CVM_MAX_EXACT_TOTAL`.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], [`TestError::TooFewValues`] (each
/// sample needs 2 values), [`TestError::ExactTooLarge`].
///
/// # Example
/// ```
/// use ogive::stats::gof::cramer_von_mises_2samp;
/// use ogive::stats::ks::PMethod;
/// let r = cramer_von_mises_2samp(&[1.0, 2.0, 3.0], &[4.0, 5.0, 6.0], PMethod::Exact)?;
/// // Complete separation: 2 of the 20 splits are as extreme.
/// assert!((r.p - 0.1).abs() < 1e-15);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn cramer_von_mises_2samp(
    x: &[f64],
    y: &[f64],
    method: super::ks::PMethod,
) -> Result<CvmResult, TestError> {
    use super::ks::{MethodUsed, PMethod};
    check_sorted(x)?;
    check_sorted(y)?;
    need(x, 2)?;
    need(y, 2)?;
    let (m, n) = (x.len(), y.len());
    let (u4, ties) = cvm_u4(x, y);
    let (mf, nf) = (m as f64, n as f64);
    let big_n = mf + nf;
    let k = mf * nf;
    let t = u4 as f64 / (4.0 * k * big_n) - (4.0 * k - 1.0) / (6.0 * big_n);
    let exact = match method {
        PMethod::Auto => m.max(n) <= CVM_AUTO_EXACT_MAX && !ties,
        PMethod::Exact => {
            if m + n > CVM_MAX_EXACT_TOTAL {
                return Err(TestError::ExactTooLarge {
                    detail: format!(
                        "the exact Cramer-von Mises count is limited to m + n <= {CVM_MAX_EXACT_TOTAL}, got {}",
                        m + n
                    ),
                });
            }
            true
        }
        PMethod::Asymptotic => false,
    };
    let p = if exact {
        // 12 S >= N (3 (4U) - 2 m n (4 m n - 1)) with S the path sum (see the module docs).
        let (mi, ni) = (m as i128, n as i128);
        let rhs = (mi + ni) * (3 * u4 - 2 * mi * ni * (4 * mi * ni - 1));
        cvm_exact_sf(m, n, rhs)
    } else {
        cvm_asymptotic_sf(t, m, n)
    };
    Ok(CvmResult {
        statistic: t,
        p: p.clamp(0.0, 1.0),
        method: if exact {
            MethodUsed::Exact
        } else {
            MethodUsed::Asymptotic
        },
    })
}

/// The share of lattice paths from `(0, 0)` to `(m, n)` with `12 sum_k (i_k n - j_k m)^2 >=
/// rhs`, by a recursion over the attainable sums at each lattice point.
fn cvm_exact_sf(m: usize, n: usize, rhs: i128) -> f64 {
    // row[j]: for the points (i, j) of the current i, counts of each partial sum.
    let mut row: Vec<HashMap<u64, f64>> = vec![HashMap::new(); n + 1];
    let term = |i: usize, j: usize| -> u64 {
        let d = i as i64 * n as i64 - j as i64 * m as i64;
        (d * d) as u64
    };
    row[0].insert(0, 1.0);
    for j in 1..=n {
        let prev: Vec<(u64, f64)> = row[j - 1].iter().map(|(&s, &c)| (s, c)).collect();
        let t = term(0, j);
        row[j] = prev.into_iter().map(|(s, c)| (s + t, c)).collect();
    }
    for i in 1..=m {
        let mut next: Vec<HashMap<u64, f64>> = vec![HashMap::new(); n + 1];
        for j in 0..=n {
            let t = term(i, j);
            let mut cell: HashMap<u64, f64> = HashMap::new();
            for (&s, &c) in &row[j] {
                *cell.entry(s + t).or_insert(0.0) += c;
            }
            if j > 0 {
                for (&s, &c) in &next[j - 1] {
                    *cell.entry(s + t).or_insert(0.0) += c;
                }
            }
            next[j] = cell;
        }
        row = next;
    }
    let (mut hit, mut total) = (NeumaierSum::default(), NeumaierSum::default());
    for (&s, &c) in &row[n] {
        total.add(c);
        if 12 * s as i128 >= rhs {
            hit.add(c);
        }
    }
    hit.value() / total.value()
}

/// Anderson's (1962) asymptotic p-value for `T` with sample sizes `m`, `n`.
fn cvm_asymptotic_sf(t: f64, m: usize, n: usize) -> f64 {
    let (mf, nf) = (m as f64, n as f64);
    let big_n = mf + nf;
    let k = mf * nf;
    let et = (1.0 + 1.0 / big_n) / 6.0;
    let vt = (big_n + 1.0) * (4.0 * k * big_n - 3.0 * (mf * mf + nf * nf) - 2.0 * k)
        / (45.0 * big_n * big_n * 4.0 * k);
    let tn = 1.0 / 6.0 + (t - et) / (45.0 * vt).sqrt();
    if tn < 0.003 {
        // The limiting cdf is below 1e-18 there.
        return 1.0;
    }
    (1.0 - cvm_limit_cdf(tn)).clamp(0.0, 1.0)
}

/// The cdf of the limiting one-sample Cramer-von Mises statistic (Csorgo and Faraway 1996,
/// eq. 1.2): `sum_k Gamma(k + 1/2) / (Gamma(k + 1) pi^(3/2) sqrt(x)) sqrt(4k + 1)
/// exp(-q_k) K_{1/4}(q_k)`, `q_k = (4k + 1)^2 / (16 x)`.
///
/// # Example
/// ```
/// // The familiar 5% point of the limiting statistic is 0.46136 (Anderson and Darling 1952).
/// let c = ogive::stats::gof::cvm_limit_cdf(0.46136);
/// assert!((c - 0.95).abs() < 1e-4);
/// ```
pub fn cvm_limit_cdf(x: f64) -> f64 {
    if x.is_nan() {
        return f64::NAN;
    }
    if x <= 0.0 {
        return 0.0;
    }
    let sx = x.sqrt();
    // Gamma(k + 1/2) / Gamma(k + 1), starting from Gamma(1/2) = sqrt(pi).
    let mut ratio = std::f64::consts::PI.sqrt();
    let mut total = NeumaierSum::default();
    for k in 0..200 {
        let y = (4 * k + 1) as f64;
        let q = y * y / (16.0 * x);
        // exp(-q) K_{1/4}(q) = exp(-2q) * I(q), I the scaled integral.
        let term = ratio / (std::f64::consts::PI.powf(1.5) * sx)
            * y.sqrt()
            * (-2.0 * q).exp()
            * bessel_k_scaled(0.25, q);
        total.add(term);
        if term < 1e-17 * total.value().abs() || term == 0.0 {
            break;
        }
        ratio *= (k as f64 + 0.5) / (k as f64 + 1.0);
    }
    total.value().clamp(0.0, 1.0)
}

/// `exp(q) K_nu(q)` for `q > 0`, by the trapezoidal rule on
/// `int_0^inf exp(-q (cosh t - 1)) cosh(nu t) dt` (the integrand is analytic in a strip, so
/// the rule converges exponentially in the step; the step follows the width `1/sqrt(q)` of the
/// integrand's peak).
fn bessel_k_scaled(nu: f64, q: f64) -> f64 {
    let h = 0.1 * (1.0 / q.sqrt()).min(1.0);
    let mut sum = NeumaierSum::default();
    sum.add(0.5);
    let mut i = 1u32;
    loop {
        let t = i as f64 * h;
        // cosh t - 1 = 2 sinh(t/2)^2, without cancellation for small t.
        let e = q * 2.0 * (t / 2.0).sinh().powi(2);
        if e > 745.0 {
            break;
        }
        let v = (-e).exp() * (nu * t).cosh();
        sum.add(v);
        if v < 1e-18 * sum.value() && i > 10 {
            break;
        }
        i += 1;
    }
    sum.value() * h
}

// ---------------------------------------------------------------------------------------
// Anderson-Darling, k samples

/// The result of the k-sample Anderson-Darling test.
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct AdResult {
    /// The standardised statistic `(A2akN - (k - 1)) / sigma_N` (what scipy reports).
    pub statistic: f64,
    /// The midrank statistic `A2akN` itself.
    pub a2akn: f64,
    /// The interpolated p-value, or the table bound (see `p_range`).
    pub p: f64,
    /// Whether `p` is the value or a bound.
    pub p_range: PRange,
}

/// Scholz and Stephens (1987), Table 2 interpolation coefficients for the upper quantiles
/// `t_m(alpha) = b0 + b1 / sqrt(m) + b2 / m` at the levels `AD_LEVELS`.
const AD_B0: [f64; 7] = [0.675, 1.281, 1.645, 1.96, 2.326, 2.573, 3.085];
const AD_B1: [f64; 7] = [-0.245, 0.25, 0.678, 1.149, 1.822, 2.364, 3.615];
const AD_B2: [f64; 7] = [-0.105, -0.305, -0.362, -0.391, -0.396, -0.345, -0.154];
const AD_LEVELS: [f64; 7] = [0.25, 0.1, 0.05, 0.025, 0.01, 0.005, 0.001];

/// The k-sample Anderson-Darling test, midrank version (Scholz and Stephens 1987), of sorted
/// samples.
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`]; [`TestError::TooFewValues`] when
/// there are fewer than 2 samples, an empty sample, fewer than 4 values in all, or a single
/// distinct value overall.
///
/// # Example
/// ```
/// use ogive::stats::gof::{anderson_darling_ksamp, PRange};
/// let a: Vec<f64> = (0..20).map(|i| i as f64).collect();
/// let b: Vec<f64> = (0..20).map(|i| i as f64 + 0.5).collect();
/// let r = anderson_darling_ksamp(&[&a, &b])?;
/// assert_eq!(r.p_range, PRange::AtLeast); // no evidence of a difference
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn anderson_darling_ksamp(samples: &[&[f64]]) -> Result<AdResult, TestError> {
    let k = samples.len();
    if k < 2 {
        return Err(TestError::TooFewValues { needed: 2, got: k });
    }
    for s in samples {
        check_sorted(s)?;
        need(s, 1)?;
    }
    let mut pooled: Vec<f64> = samples.iter().flat_map(|s| s.iter().copied()).collect();
    pooled.sort_unstable_by(f64::total_cmp);
    let big_n = pooled.len();
    if big_n < 4 || pooled[0] == pooled[big_n - 1] {
        return Err(TestError::TooFewValues {
            needed: 4,
            got: big_n,
        });
    }
    let nf = big_n as f64;
    // Distinct values with their multiplicities and B_j = (# below) + l_j / 2.
    let mut distinct: Vec<(f64, f64, f64)> = Vec::new();
    let mut idx = 0;
    while idx < big_n {
        let v = pooled[idx];
        let mut end = idx;
        while end < big_n && pooled[end] == v {
            end += 1;
        }
        let l = (end - idx) as f64;
        distinct.push((v, l, idx as f64 + l / 2.0));
        idx = end;
    }
    let mut total = NeumaierSum::default();
    for s in samples {
        let ni = s.len() as f64;
        let mut inner = NeumaierSum::default();
        let mut pos = 0usize;
        for &(v, l, b) in &distinct {
            let below = pos;
            while pos < s.len() && s[pos] == v {
                pos += 1;
            }
            let f = (pos - below) as f64;
            let mij = pos as f64 - f / 2.0;
            let num = nf * mij - b * ni;
            let den = b * (nf - b) - nf * l / 4.0;
            inner.add(l / nf * num * num / den);
        }
        total.add(inner.value() / ni);
    }
    let a2 = total.value() * (nf - 1.0) / nf;
    // Variance, Scholz and Stephens (1987) eq. 4.
    let kf = k as f64;
    let hh: f64 = samples.iter().map(|s| 1.0 / s.len() as f64).sum();
    let mut h = NeumaierSum::default();
    for i in 1..big_n {
        h.add(1.0 / i as f64);
    }
    let h = h.value();
    let mut g = NeumaierSum::default();
    let mut inner = 0.0; // sum_{i=1}^{j-1} 1 / (N - i)
    for j in 2..big_n {
        inner += 1.0 / (nf - (j - 1) as f64);
        g.add(inner / j as f64);
    }
    let g = g.value();
    let a = (4.0 * g - 6.0) * (kf - 1.0) + (10.0 - 6.0 * g) * hh;
    let b = (2.0 * g - 4.0) * kf * kf + 8.0 * h * kf + (2.0 * g - 14.0 * h - 4.0) * hh - 8.0 * h
        + 4.0 * g
        - 6.0;
    let c = (6.0 * h + 2.0 * g - 2.0) * kf * kf
        + (4.0 * h - 4.0 * g + 6.0) * kf
        + (2.0 * h - 6.0) * hh
        + 4.0 * h;
    let d = (2.0 * h + 6.0) * kf * kf - 4.0 * h * kf;
    let sigma2 =
        (a * nf.powi(3) + b * nf * nf + c * nf + d) / ((nf - 1.0) * (nf - 2.0) * (nf - 3.0));
    let m = kf - 1.0;
    let stat = (a2 - m) / sigma2.sqrt();
    let crit: Vec<f64> = (0..7)
        .map(|i| AD_B0[i] + AD_B1[i] / m.sqrt() + AD_B2[i] / m)
        .collect();
    let lo = crit.iter().copied().fold(f64::INFINITY, f64::min);
    let hi = crit.iter().copied().fold(f64::NEG_INFINITY, f64::max);
    let (p, p_range) = if stat < lo {
        (AD_LEVELS[0], PRange::AtLeast)
    } else if stat > hi {
        (AD_LEVELS[6], PRange::AtMost)
    } else {
        let logs: Vec<f64> = AD_LEVELS.iter().map(|a| a.ln()).collect();
        let coef = quadratic_fit(&crit, &logs);
        (
            (coef[0] + coef[1] * stat + coef[2] * stat * stat).exp(),
            PRange::Value,
        )
    };
    Ok(AdResult {
        statistic: stat,
        a2akn: a2,
        p,
        p_range,
    })
}

/// Least-squares `y ~ c0 + c1 x + c2 x^2`, solved on centred and scaled `x` for stability.
fn quadratic_fit(x: &[f64], y: &[f64]) -> [f64; 3] {
    let n = x.len() as f64;
    let mean = x.iter().sum::<f64>() / n;
    let scale = x
        .iter()
        .map(|v| (v - mean).abs())
        .fold(0.0, f64::max)
        .max(1e-300);
    let u: Vec<f64> = x.iter().map(|v| (v - mean) / scale).collect();
    // Normal equations in u: [sum u^(i+j)] c = [sum u^i y].
    let mut a = [[0.0f64; 4]; 3];
    for (ui, yi) in u.iter().zip(y) {
        let pw = [1.0, *ui, ui * ui];
        for r in 0..3 {
            for c in 0..3 {
                a[r][c] += pw[r] * pw[c];
            }
            a[r][3] += pw[r] * yi;
        }
    }
    // Gaussian elimination with partial pivoting.
    for col in 0..3 {
        let piv = (col..3)
            .max_by(|&i, &j| a[i][col].abs().total_cmp(&a[j][col].abs()))
            .unwrap_or(col);
        a.swap(col, piv);
        let pivot_row = a[col];
        for (r, row) in a.iter_mut().enumerate() {
            if r != col {
                let f = row[col] / pivot_row[col];
                for (v, p) in row.iter_mut().zip(pivot_row).skip(col) {
                    *v -= f * p;
                }
            }
        }
    }
    let cu = [a[0][3] / a[0][0], a[1][3] / a[1][1], a[2][3] / a[2][2]];
    // Back to x: u = (x - mean) / scale.
    let (c0, c1, c2) = (cu[0], cu[1] / scale, cu[2] / (scale * scale));
    [c0 - c1 * mean + c2 * mean * mean, c1 - 2.0 * c2 * mean, c2]
}

// ---------------------------------------------------------------------------------------
// Wasserstein-1

/// The Wasserstein-1 distance between the ECDFs of two sorted samples, optionally with
/// frequency weights (one per value; `None` means all 1).
///
/// # Errors
/// [`TestError::NotANumber`], [`TestError::NotSorted`], [`TestError::TooFewValues`] for an
/// empty sample or one whose weights sum to zero; [`TestError::BadWeight`] for a negative,
/// infinite or NaN weight or a weight list of the wrong length.
///
/// # Example
/// ```
/// use ogive::stats::gof::wasserstein_1;
/// // Shifting every value by 2 moves all the mass 2 units.
/// let w = wasserstein_1(&[0.0, 1.0, 5.0], None, &[2.0, 3.0, 7.0], None)?;
/// assert_eq!(w, 2.0);
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn wasserstein_1(
    x: &[f64],
    wx: Option<&[f64]>,
    y: &[f64],
    wy: Option<&[f64]>,
) -> Result<f64, TestError> {
    check_sorted(x)?;
    check_sorted(y)?;
    need(x, 1)?;
    need(y, 1)?;
    let totals = |xs: &[f64], w: Option<&[f64]>| -> Result<f64, TestError> {
        match w {
            None => Ok(xs.len() as f64),
            Some(w) => {
                if w.len() != xs.len() {
                    return Err(TestError::BadWeight(f64::NAN));
                }
                let mut s = NeumaierSum::default();
                for &v in w {
                    if !(v.is_finite() && v >= 0.0) {
                        return Err(TestError::BadWeight(v));
                    }
                    s.add(v);
                }
                Ok(s.value())
            }
        }
    };
    let (tx, ty) = (totals(x, wx)?, totals(y, wy)?);
    if tx <= 0.0 || ty <= 0.0 {
        return Err(TestError::TooFewValues { needed: 1, got: 0 });
    }
    let weight = |w: Option<&[f64]>, i: usize| w.map_or(1.0, |w| w[i]);
    let (mut i, mut j) = (0usize, 0usize);
    let (mut cx, mut cy) = (NeumaierSum::default(), NeumaierSum::default());
    let mut dist = NeumaierSum::default();
    let mut prev: Option<f64> = None;
    while i < x.len() || j < y.len() {
        let Some(v) = next_pooled(x, i, y, j) else {
            break;
        };
        if let Some(p) = prev {
            let gap = v - p;
            let diff = (cx.value() / tx - cy.value() / ty).abs();
            // A gap between two equal infinities is NaN and carries no mass.
            if diff > 0.0 && gap > 0.0 {
                dist.add(diff * gap);
            }
        }
        while i < x.len() && x[i] == v {
            cx.add(weight(wx, i));
            i += 1;
        }
        while j < y.len() && y[j] == v {
            cy.add(weight(wy, j));
            j += 1;
        }
        prev = Some(v);
    }
    Ok(dist.value())
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::stats::fixtures::{compare as fixture, floats, rel_close};
    use crate::stats::ks::{MethodUsed, PMethod};

    #[test]
    fn cvm_matches_scipy() {
        // scipy.stats.cramervonmises_2samp(x, y, method=M). Statistic: 1e-12 relative.
        // Exact p: 1e-12 relative. Asymptotic p: 1e-7 absolute, because scipy stops its
        // series once a term drops below 1e-7 while this one sums to convergence.
        let f = fixture();
        let mut n = 0;
        for case in f["cvm"].as_array().unwrap() {
            let (x, y) = (floats(&case["x"]), floats(&case["y"]));
            let method = match case["method"].as_str().unwrap() {
                "exact" => PMethod::Exact,
                _ => PMethod::Asymptotic,
            };
            let r = cramer_von_mises_2samp(&x, &y, method).unwrap();
            let (t, p) = (
                case["statistic"].as_f64().unwrap(),
                case["p"].as_f64().unwrap(),
            );
            assert!(rel_close(r.statistic, t, 1e-12), "{} vs {t}", r.statistic);
            if method == PMethod::Exact {
                assert_eq!(r.method, MethodUsed::Exact);
                assert!(rel_close(r.p, p, 1e-12), "exact {} vs {p}", r.p);
            } else {
                assert!((r.p - p).abs() < 1e-7, "asymptotic {} vs {p}", r.p);
            }
            n += 1;
        }
        assert_eq!(n, 16);
    }

    #[test]
    fn ad_matches_scipy_midrank() {
        // scipy.stats.anderson_ksamp(samples, variant='midrank'): statistic 1e-10 relative;
        // p 1e-9 relative where interpolated, and the same bound where scipy caps it.
        let f = fixture();
        for case in f["ad"].as_array().unwrap() {
            let samples: Vec<Vec<f64>> = case["samples"]
                .as_array()
                .unwrap()
                .iter()
                .map(floats)
                .collect();
            let refs: Vec<&[f64]> = samples.iter().map(Vec::as_slice).collect();
            let r = anderson_darling_ksamp(&refs).unwrap();
            let (t, p) = (
                case["statistic"].as_f64().unwrap(),
                case["p"].as_f64().unwrap(),
            );
            assert!(rel_close(r.statistic, t, 1e-10), "{} vs {t}", r.statistic);
            assert!(rel_close(r.p, p, 1e-9), "{} vs {p} ({:?})", r.p, r.p_range);
        }
    }

    #[test]
    fn wasserstein_matches_scipy() {
        // scipy.stats.wasserstein_distance(x, y); tolerance 1e-13 relative.
        let f = fixture();
        for case in f["wasserstein"].as_array().unwrap() {
            let (x, y) = (floats(&case["x"]), floats(&case["y"]));
            let want = case["distance"].as_f64().unwrap();
            let got = wasserstein_1(&x, None, &y, None).unwrap();
            assert!(rel_close(got, want, 1e-13), "{got} vs {want}");
        }
    }

    #[test]
    fn weighted_wasserstein_equals_replicated() {
        // Whole-number weights must equal repeating each value that often (definition of
        // frequency weights); tolerance 1e-14 relative.
        let x = [0.0, 1.5, 4.0];
        let wx = [2.0, 1.0, 3.0];
        let y = [1.0, 2.0];
        let wy = [1.0, 4.0];
        let xr = [0.0, 0.0, 1.5, 4.0, 4.0, 4.0];
        let yr = [1.0, 2.0, 2.0, 2.0, 2.0];
        let a = wasserstein_1(&x, Some(&wx), &y, Some(&wy)).unwrap();
        let b = wasserstein_1(&xr, None, &yr, None).unwrap();
        assert!(rel_close(a, b, 1e-14), "{a} vs {b}");
    }

    #[test]
    fn cvm_exact_equals_enumeration() {
        // Exhaustive enumeration of all C(9, 4) splits of 9 distinct values, computing T by
        // Anderson's rank formula for each; tolerance 1e-14.
        let pooled: Vec<f64> = (0..9).map(|i| i as f64).collect();
        let x = [0.0, 2.0, 3.0, 7.0];
        let y: Vec<f64> = pooled.iter().copied().filter(|v| !x.contains(v)).collect();
        let obs = cvm_u4(&x, &y).0;
        let (mut hits, mut total) = (0, 0);
        for mask in 0u32..(1 << 9) {
            if mask.count_ones() != 4 {
                continue;
            }
            let a: Vec<f64> = (0..9)
                .filter(|k| mask >> k & 1 == 1)
                .map(|k| k as f64)
                .collect();
            let b: Vec<f64> = (0..9)
                .filter(|k| mask >> k & 1 == 0)
                .map(|k| k as f64)
                .collect();
            total += 1;
            hits += i32::from(cvm_u4(&a, &b).0 >= obs);
        }
        let r = cramer_von_mises_2samp(&x, &y, PMethod::Exact).unwrap();
        assert!((r.p - hits as f64 / total as f64).abs() < 1e-14);
    }

    #[test]
    fn bessel_k_known_value() {
        // K_{1/2}(q) = sqrt(pi / (2q)) exp(-q) exactly (closed form of the half-order Bessel
        // function); tolerance 1e-14 relative.
        for q in [0.01, 0.3, 1.0, 7.5, 200.0, 5.0e4] {
            let want = (std::f64::consts::PI / (2.0 * q)).sqrt();
            let got = bessel_k_scaled(0.5, q);
            assert!(rel_close(got, want, 1e-14), "{q}: {got} vs {want}");
        }
    }

    #[test]
    fn bad_input_is_rejected() {
        assert!(matches!(
            cramer_von_mises_2samp(&[1.0], &[1.0, 2.0], PMethod::Auto),
            Err(TestError::TooFewValues { needed: 2, .. })
        ));
        assert!(matches!(
            anderson_darling_ksamp(&[&[1.0, 1.0], &[1.0, 1.0]]),
            Err(TestError::TooFewValues { .. })
        ));
        assert_eq!(
            wasserstein_1(&[1.0], Some(&[-1.0]), &[2.0], None),
            Err(TestError::BadWeight(-1.0))
        );
    }
}
