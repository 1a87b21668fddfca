//! The distribution of the one-sample statistic: exact (Marsaglia, Tsang and Wang 2003;
//! Durbin matrices), Pelz-Good asymptotics, the one-sided Smirnov distribution and
//! Kolmogorov's limit.

use std::f64::consts::PI;

use super::*;
use crate::stats::sum::NeumaierSum;

/// `P(D_n <= d)` for the two-sided one-sample statistic of size `n` (scipy's `kstwo.cdf`),
/// by the Simard and L'Ecuyer (2011) procedure described in the module docs.
///
/// # Example
/// ```
/// // The worked example of Marsaglia, Tsang and Wang (2003): n = 10, d = 0.274.
/// let c = ogive::stats::ks::kolmogorov_cdf(10, 0.274);
/// assert!((c - 0.6284796154565043).abs() < 1e-14);
/// ```
pub fn kolmogorov_cdf(n: u64, d: f64) -> f64 {
    kolmogorov(n, d, true).0
}

/// `P(D_n >= d)` for the two-sided one-sample statistic of size `n` (scipy's `kstwo.sf`),
/// computed directly in the upper tail so that small p-values keep their precision.
///
/// # Example
/// ```
/// let p = ogive::stats::ks::kolmogorov_sf(10, 0.274);
/// assert!((p - (1.0 - 0.6284796154565043)).abs() < 1e-14);
/// ```
pub fn kolmogorov_sf(n: u64, d: f64) -> f64 {
    kolmogorov(n, d, false).0
}

/// Which of cdf or sf to return, clipped; `true` when the value came from an exact formula.
pub(super) fn pick(cdf: f64, sf: f64, want_cdf: bool, exact: bool) -> (f64, bool) {
    let v = if want_cdf { cdf } else { sf };
    (v.clamp(0.0, 1.0), exact)
}

/// Simard and L'Ecuyer (2011), returning (value, exact?).
pub(super) fn kolmogorov(n: u64, x: f64, want_cdf: bool) -> (f64, bool) {
    if n == 0 || x.is_nan() {
        return (f64::NAN, false);
    }
    if x >= 1.0 {
        return pick(1.0, 0.0, want_cdf, true);
    }
    if x <= 0.0 {
        return pick(0.0, 1.0, want_cdf, true);
    }
    let nf = n as f64;
    let t = nf * x;
    if t <= 1.0 {
        // Ruben and Gambino (1982): P(D_n <= d) = n!/n^n (2 n d - 1)^n for 1/(2n) <= d <= 1/n.
        if t <= 0.5 {
            return pick(0.0, 1.0, want_cdf, true);
        }
        let c = if n <= 140 {
            (1..=n).fold(1.0, |acc, i| acc * (i as f64 / nf) * (2.0 * t - 1.0))
        } else {
            (ln_factorial_over_power(n) + nf * (2.0 * t - 1.0).ln()).exp()
        };
        return pick(c, 1.0 - c, want_cdf, true);
    }
    if t >= nf - 1.0 {
        // Ruben and Gambino (1982): P(D_n >= d) = 2 (1 - d)^n for d >= 1 - 1/n.
        let s = 2.0 * (1.0 - x).powf(nf);
        return pick(1.0 - s, s, want_cdf, true);
    }
    if x >= 0.5 {
        // D+ >= d and D- >= d cannot both hold: the tail is exactly twice the one-sided one.
        let s = 2.0 * smirnov_sf(n, x);
        return pick(1.0 - s, s, want_cdf, true);
    }
    let nxx = t * x;
    if n <= 140 {
        if nxx <= 4.0 {
            // Simard and L'Ecuyer use Durbin's matrix below 0.754693 and Pomeranz's
            // recursion up to 4; both are exact, and Durbin's matrix is used for both here.
            // Order at most 2 sqrt(4 n) <= 48 here: not polled, so never an error.
            let c = durbin_cdf(n, x, false).unwrap_or(f64::NAN);
            return pick(c, 1.0 - c, want_cdf, true);
        }
        let s = 2.0 * smirnov_sf(n, x);
        return pick(1.0 - s, s, want_cdf, true);
    }
    if !want_cdf {
        if nxx >= 370.0 {
            return (0.0, true);
        }
        if nxx >= 2.2 {
            return pick(0.0, 2.0 * smirnov_sf(n, x), false, true);
        }
    }
    let (c, exact) = if nxx >= 18.0 {
        (1.0, true)
    } else if n <= 100_000 && nf * x.powf(1.5) <= 1.4 {
        // Order at most about 2.5 n^(1/3) <= 117 here: not polled, so never an error.
        (durbin_cdf(n, x, false).unwrap_or(f64::NAN), true)
    } else {
        (pelz_good_cdf(n, x), false)
    };
    pick(c, 1.0 - c, want_cdf, exact)
}

/// The forced-exact two-sided sf: closed forms where they apply, Durbin's matrix otherwise.
pub(super) fn kolmogorov_sf_exact(n: u64, x: f64) -> Result<f64, TestError> {
    let nf = n as f64;
    let t = nf * x;
    if x <= 0.0 || x >= 0.5 || t <= 1.0 || t >= nf - 1.0 {
        return Ok(kolmogorov(n, x, false).0);
    }
    let order = 2 * (t.ceil() as usize) - 1;
    if order > MAX_DURBIN_ORDER {
        return Err(TestError::ExactTooLarge {
            detail: format!("the Durbin matrix would have order {order}, above {MAX_DURBIN_ORDER}"),
        });
    }
    let s = 1.0 - durbin_cdf(n, x, true)?;
    if s < 1e-6 {
        // Miller (1956): here P(D+ >= d and D- >= d) is negligible next to the tail.
        return Ok(2.0 * smirnov_sf(n, x));
    }
    Ok(s)
}

/// `ln(n! / n^n)` by Stirling's series with the logarithm of `n^n` removed first.
pub(super) fn ln_factorial_over_power(n: u64) -> f64 {
    let nf = n as f64;
    // B_2k / (2k (2k - 1)) for k = 1..8.
    const C: [f64; 8] = [
        1.0 / 12.0,
        -1.0 / 360.0,
        1.0 / 1260.0,
        -1.0 / 1680.0,
        1.0 / 1188.0,
        -691.0 / 360_360.0,
        1.0 / 156.0,
        -3617.0 / 122_400.0,
    ];
    let r = 1.0 / nf;
    let r2 = r * r;
    let series = C.iter().rev().fold(0.0, |acc, &c| acc * r2 + c) * r;
    0.5 * nf.ln() - nf + 0.5 * (2.0 * PI).ln() + series
}

/// `P(D+_n >= d)` for the one-sided one-sample statistic (scipy's `ksone.sf`, also its
/// `special.smirnov`), by the exact Birnbaum and Tingey (1951) sum
/// `d * sum_{j=0}^{floor(n (1 - d))} C(n, j) (1 - d - j/n)^(n - j) (d + j/n)^(j - 1)`,
/// whose terms are all positive; they are summed in log-scaled form.
///
/// # Example
/// ```
/// // n = 1: P(D+ >= d) = 1 - d.
/// assert!((ogive::stats::ks::smirnov_sf(1, 0.3) - 0.7).abs() < 1e-15);
/// ```
pub fn smirnov_sf(n: u64, d: f64) -> f64 {
    if d.is_nan() {
        return f64::NAN;
    }
    if d <= 0.0 {
        return 1.0;
    }
    if d >= 1.0 {
        return 0.0;
    }
    let nf = n as f64;
    let last = (nf * (1.0 - d)).floor().min(nf) as u64;
    let mut logs = Vec::with_capacity(last as usize + 1);
    // ln C(n, j) grows to about n ln 2; a plain running sum would lose ~1e-9 relative over
    // 1e5 steps, so it is compensated.
    let mut ln_binom = NeumaierSum::default();
    for j in 0..=last {
        if j > 0 {
            ln_binom.add(((n - j + 1) as f64 / j as f64).ln());
        }
        let jf = j as f64;
        let a = (n - j) as f64 / nf - d;
        if a <= 0.0 && n > j {
            continue;
        }
        let la = if n == j { 0.0 } else { (n - j) as f64 * a.ln() };
        let lb = (jf - 1.0) * (d + jf / nf).ln();
        logs.push(ln_binom.value() + la + lb);
    }
    let Some(max) = logs.iter().copied().reduce(f64::max) else {
        return 0.0;
    };
    let mut s = NeumaierSum::default();
    for l in &logs {
        s.add((l - max).exp());
    }
    (d * s.value() * max.exp()).clamp(0.0, 1.0)
}

/// `P(K >= z)` for Kolmogorov's limiting distribution `K = lim sqrt(n) D_n` (scipy's
/// `kstwobign.sf`, also `special.kolmogorov`).
///
/// # Example
/// ```
/// // 1.3581 is the familiar 5% critical value of the limit.
/// assert!((ogive::stats::ks::kolmogorov_limit_sf(1.3581) - 0.05).abs() < 1e-4);
/// ```
pub fn kolmogorov_limit_sf(z: f64) -> f64 {
    if z.is_nan() {
        return f64::NAN;
    }
    if z <= 0.0 {
        return 1.0;
    }
    if z < 1.0 {
        1.0 - kolmogorov_limit_cdf_small(z)
    } else {
        // 2 sum_{k>=1} (-1)^(k-1) exp(-2 k^2 z^2)
        let mut s = 0.0;
        let mut sign = 1.0;
        for k in 1..=100 {
            let kf = k as f64;
            let term = (-2.0 * kf * kf * z * z).exp();
            s += sign * term;
            sign = -sign;
            if term < 1e-300 || term < s.abs() * 1e-18 {
                break;
            }
        }
        (2.0 * s).clamp(0.0, 1.0)
    }
}

/// `P(K <= z)` by the series that converges fast for small z:
/// `sqrt(2 pi) / z * sum_{k>=1} exp(-(2k - 1)^2 pi^2 / (8 z^2))`.
pub(super) fn kolmogorov_limit_cdf_small(z: f64) -> f64 {
    let w = -PI * PI / (8.0 * z * z);
    let mut s = 0.0;
    for k in 1..=100 {
        let m = (2 * k - 1) as f64;
        let term = (w * m * m).exp();
        s += term;
        if term < 1e-300 || term < s * 1e-18 {
            break;
        }
    }
    ((2.0 * PI).sqrt() / z * s).clamp(0.0, 1.0)
}

/// Durbin's (1968) matrix formula for `P(D_n < d)` as Marsaglia, Tsang and Wang (2003) evaluate
/// it: with `k = ceil(n d)`, `h = k - n d` and `m = 2k - 1`, the answer is `n!/n^n` times the
/// central entry of `H^n`, raised by repeated squaring with explicit binary exponents so that
/// nothing overflows. With `poll`, the products poll for cancellation
/// ([`crate::stats::cancel`]); without it the result is never an error.
pub(super) fn durbin_cdf(n: u64, d: f64, poll: bool) -> Result<f64, TestError> {
    let nd = n as f64 * d;
    if d >= 1.0 {
        return Ok(1.0);
    }
    if nd <= 0.5 {
        return Ok(0.0);
    }
    let k = nd.ceil() as usize;
    let h = k as f64 - nd;
    let m = 2 * k - 1;
    // inv_fact[j] = 1 / j!
    let mut inv_fact = vec![1.0f64; m + 1];
    for j in 1..=m {
        inv_fact[j] = inv_fact[j - 1] / j as f64;
    }
    let mut hm = vec![0.0f64; m * m];
    for r in 0..m {
        for c in 0..m {
            if r + 1 >= c {
                hm[r * m + c] = inv_fact[r + 1 - c];
            }
        }
    }
    for r in 0..m {
        // First column: (1 - h^(r+1)) / (r+1)!
        hm[r * m] -= h.powi(r as i32 + 1) * inv_fact[r + 1];
        // Last row: (1 - h^(m-c)) / (m-c)!
        hm[(m - 1) * m + r] -= h.powi((m - r) as i32) * inv_fact[m - r];
    }
    if 2.0 * h - 1.0 > 0.0 {
        hm[(m - 1) * m] += (2.0 * h - 1.0).powi(m as i32) * inv_fact[m];
    }
    let center = (k - 1) * m + (k - 1);
    let (mut result, mut result_exp) = (identity(m), 0i64);
    let (mut base, mut base_exp) = (hm, 0i64);
    let mut e = n;
    while e > 0 {
        if e & 1 == 1 {
            result = matmul(&result, &base, m, poll)?;
            result_exp += base_exp;
            rescale(&mut result, &mut result_exp);
        }
        e >>= 1;
        if e > 0 {
            base = matmul(&base, &base, m, poll)?;
            base_exp *= 2;
            rescale(&mut base, &mut base_exp);
        }
    }
    // Multiply by n!/n^n, keeping the mantissa in range.
    let mut p = result[center];
    let mut exp = result_exp;
    let nf = n as f64;
    for i in 1..=n {
        p *= i as f64 / nf;
        if p != 0.0 && p.abs() < 1e-140 {
            let (mant, e2) = frexp(p);
            p = mant;
            exp += e2;
        }
    }
    Ok(ldexp(p, exp).clamp(0.0, 1.0))
}

pub(super) fn identity(m: usize) -> Vec<f64> {
    let mut a = vec![0.0; m * m];
    for i in 0..m {
        a[i * m + i] = 1.0;
    }
    a
}

/// `a b` for square matrices of order `m`; with `poll`, asks for cancellation every 16
/// rows (a product of order 1000 takes about a quarter of a second in a release build).
pub(super) fn matmul(a: &[f64], b: &[f64], m: usize, poll: bool) -> Result<Vec<f64>, TestError> {
    let mut c = vec![0.0; m * m];
    for i in 0..m {
        if poll && i % 16 == 15 && crate::stats::cancel::requested() {
            return Err(TestError::Interrupted);
        }
        for l in 0..m {
            let x = a[i * m + l];
            if x == 0.0 {
                continue;
            }
            let row = &b[l * m..(l + 1) * m];
            let out = &mut c[i * m..(i + 1) * m];
            for (o, &y) in out.iter_mut().zip(row) {
                *o += x * y;
            }
        }
    }
    Ok(c)
}

/// Scales a matrix by a power of two so that its largest entry is near 1.
pub(super) fn rescale(a: &mut [f64], exp: &mut i64) {
    let big = a.iter().fold(0.0f64, |acc, x| acc.max(x.abs()));
    if big == 0.0 || !big.is_finite() {
        return;
    }
    let (_, e) = frexp(big);
    if e.abs() > 256 {
        let f = ldexp(1.0, -e);
        a.iter_mut().for_each(|x| *x *= f);
        *exp += e;
    }
}

/// `x = mant * 2^exp` with `0.5 <= |mant| < 1` for finite non-zero `x`, read from the bits.
pub(super) fn frexp(x: f64) -> (f64, i64) {
    if x == 0.0 || !x.is_finite() {
        return (x, 0);
    }
    let bits = x.to_bits();
    let biased = ((bits >> 52) & 0x7ff) as i64;
    if biased == 0 {
        // Subnormal: scale into the normal range first.
        let (m, e) = frexp(x * 2f64.powi(54));
        return (m, e - 54);
    }
    let mant = f64::from_bits((bits & !(0x7ffu64 << 52)) | (1022u64 << 52));
    (mant, biased - 1022)
}

/// `x * 2^e` in steps that never overflow or underflow before the end.
pub(super) fn ldexp(mut x: f64, mut e: i64) -> f64 {
    while e > 1000 {
        x *= 2f64.powi(1000);
        e -= 1000;
    }
    while e < -1000 {
        x *= 2f64.powi(-1000);
        e += 1000;
    }
    x * 2f64.powi(e as i32)
}

/// The Pelz and Good (1976) approximation of `P(D_n <= d)`: Kolmogorov's limit plus the
/// Li-Chien and Korolyuk correction terms in `1/sqrt(n)`, `1/n`, `1/n^(3/2)`, each rewritten
/// with the Jacobi theta transformation into series that converge quickly for small
/// `z = sqrt(n) d` (as in Simard and L'Ecuyer 2011, section 2.2).
pub(super) fn pelz_good_cdf(n: u64, x: f64) -> f64 {
    if x <= 0.0 {
        return 0.0;
    }
    if x >= 1.0 {
        return 1.0;
    }
    let nf = n as f64;
    let z = nf.sqrt() * x;
    let z2 = z * z;
    let (z3, z4, z6) = (z2 * z, z2 * z2, z2 * z2 * z2);
    let qlog = -PI * PI / 8.0 / z2;
    if qlog < -708.0 {
        return 0.0;
    }
    let (pi2, pi4, pi6) = (PI * PI, PI.powi(4), PI.powi(6));
    let maxk = (16.0 * z / PI).ceil().max(1.0) as u64;
    // Sums over odd m = 2k - 1 of c(m) exp(-m^2 pi^2 / (8 z^2)).
    let mut k = [0.0f64; 4];
    for kk in 1..=maxk {
        let m = (2 * kk - 1) as f64;
        let (m2, m4, m6) = (m * m, m.powi(4), m.powi(6));
        let w = (qlog * m2).exp();
        k[0] += w;
        k[1] += (pi2 * m2 / 4.0 - z2) * w;
        k[2] += (6.0 * z6
            + 2.0 * z4
            + (2.0 * z4 - 5.0 * z2) * pi2 * m2 / 4.0
            + pi4 * (1.0 - 2.0 * z2) * m4 / 16.0)
            * w;
        k[3] += (pi6 * (5.0 - 30.0 * z2) * m6 / 64.0
            + pi4 * (-60.0 * z2 + 212.0 * z4) * m4 / 16.0
            + pi2 * (135.0 * z4 - 96.0 * z6) * m2 / 4.0
            - 30.0 * z6
            - 90.0 * z4 * z4)
            * w;
    }
    let s2p = (2.0 * PI).sqrt();
    k[0] *= s2p / z;
    k[1] *= s2p / (6.0 * z4);
    k[2] *= s2p / (72.0 * z6 * z);
    k[3] *= s2p / (6480.0 * z4 * z6);
    // Sums over all k of k^2 exp(-pi^2 k^2 / (2 z^2)).
    let (mut e2, mut e3) = (0.0, 0.0);
    for kk in 1..=maxk {
        let kf = kk as f64;
        let w = kf * kf * (-pi2 * kf * kf / 2.0 / z2).exp();
        e2 += w;
        e3 += (3.0 * z2 - pi2 * kf * kf) * w;
    }
    k[2] += e2 * pi2 * s2p / (-36.0 * z3);
    k[3] += e3 * pi2 * s2p / (216.0 * z6);
    let sn = nf.sqrt();
    (k[0] + k[1] / sn + k[2] / nf + k[3] / (nf * sn)).clamp(0.0, 1.0)
}
