//! The large-sample two-sample p-value for tied data: the maximum of a Brownian bridge observed
//! at the pooled sample's distinct values.
//!
//! # The limit with ties
//!
//! Under the null hypothesis both samples come from one distribution `F`, and
//! `sqrt(n1 n2 / (n1 + n2)) (F1 - F2)(t)` converges, as a process in `t`, to `B(F(t))` with `B`
//! a Brownian bridge; so the statistic converges to `sup_t |B(F(t))|`. For a continuous `F` the
//! set `{F(t)}` is all of `[0, 1]` and the limit is Kolmogorov's distribution. For a
//! discontinuous `F` it is the bridge observed only at the values `F` takes (Schmid 1958 for the
//! one-sample statistic with a discontinuous `F`; Noether 1963, "Note on the Kolmogorov
//! statistic in the discrete case", Metrika 7, who shows the continuous tables are then
//! conservative). The two-sample statistic reads the ECDFs only at the distinct pooled values,
//! so with ties the p-value refers `z = sqrt(en) D` to
//!
//! `P(max(0, max_j |B(u_j)|) >= z)` (two-sided) or `P(max(0, max_j B(u_j)) >= z)` (one-sided,
//! the bridge being symmetric in sign), with `u_1 < ... < u_m` the pooled ECDF at the distinct
//! values, the last one (`u = 1`, where `B` is 0) dropped.
//!
//! The `u_j` estimate `F`'s values; given the pooled sample they are fixed, as in the
//! conditional exact test of [`super::exact_2samp_p`].
//!
//! # The recursion
//!
//! `X_j = B(u_j) / sqrt(u_j (1 - u_j))` is a Gaussian Markov chain with standard normal
//! marginals: `X_j` given `X_{j-1} = x` is normal with mean `rho_j x` and variance
//! `1 - rho_j^2`, where `rho_j^2 = u_{j-1} (1 - u_j) / (u_j (1 - u_{j-1}))` and
//! `1 - rho_j^2 = (u_j - u_{j-1}) / (u_j (1 - u_{j-1}))` (both from the bridge's covariance
//! `min(s, t) - s t`). The bound `|B(u_j)| < z` is `|X_j| < c_j = z / sqrt(u_j (1 - u_j))`.
//! The joint density of `(X_{j-1}, X_j)` is symmetric (the chain is reversible), so the
//! surviving density after step `j` is `phi(y) r_j(y)` with `r_1 = 1` on `|y| < c_1` and
//!
//! `r_j(y) = 1{|y| < c_j} E[r_{j-1}(X_{j-1}) | X_j = y]`, the expectation under
//! `X_{j-1} ~ N(rho_j y, 1 - rho_j^2)`.
//!
//! The ratio `r_j` lies in `[0, 1]` and is smooth away from the bounds, unlike the density
//! itself, so it is held on a grid and interpolated linearly; the Gaussian integral against
//! each linear piece is done exactly (closed forms in `Phi` and `phi`, or 4-point
//! Gauss-Legendre on short pieces, where the closed forms would cancel). The p-value is the sum
//! of the mass that leaves at each step, `P(|X_1| >= c_1) = 2 Q(c_1)` and then
//! `int_{|y| >= c_j} phi(y) E[r_{j-1}(X_{j-1}) | X_j = y] dy`, by 8-point Gauss-Legendre on
//! pieces no longer than the step's sd and than `1 / (2 (y + 3))`; a sum of positive terms,
//! so small p-values keep their relative precision.
//!
//! # Errors of the method, and their direction
//!
//! - Truncation (bounded, stated): grids stop at `+-C` with `C = max(8.5, min_j c_j + 3)`;
//!   paths beyond `C` that have not crossed are dropped, which lowers p by at most
//!   `2 m Q(C)`; every Gaussian integral stops 10 sds from its centre (at most `2 Q(10)`,
//!   1.6e-23, per value).
//! - Discretisation (measured): the grid has [`TIE_GRID`] pieces, clustered at the bounds
//!   like Chebyshev points; the recursion runs on it and on one of half as many pieces, and
//!   the two are extrapolated (Richardson: the error falls as the square of the spacing,
//!   measured from 40 to 1280 pieces). A unit test compares the result with the same pair
//!   four times finer over seeded tie patterns and statistics: they agree to 1e-4 relative
//!   plus 1e-12 absolute (worst measured 2e-5, one-sided near p = 0.79 with 150 values and
//!   z = 0.3; the error grows with the number of values at small z).
//! - Size: the limit itself carries no finite-sample correction (the tie-free path corrects
//!   Kolmogorov's limit by the one-sample distribution at size `round(en)`); at the sizes
//!   where this path is used (`n1 n2 > 1e8`) that correction moves p by less than 1e-3
//!   relative in the range that matters.
//! - Many distinct values: above [`MAX_TIE_POINTS`] interior values the p-value is the
//!   tie-free one. The sup over a denser set is larger, so the continuous limit (the sup over
//!   all of `[0, 1]`) is an upper bound: that p-value is conservative (never too small). How
//!   much too large: a bridge watched at spacing `delta` misses about
//!   `0.5826 sqrt(delta)` of its sup (the continuity correction of Broadie, Glasserman and Kou
//!   1997, from memory), so with 20000 values of equal weight the p-value is about 2 to 4
//!   percent high around p = 0.05.

use std::f64::consts::FRAC_1_SQRT_2;

use super::TestError;
use crate::stats::sum::NeumaierSum;

/// The most interior distinct pooled values the tied limit handles; with more, the two-sample
/// test uses the tie-free asymptotic p-value, which is then conservative (see the module docs).
pub const MAX_TIE_POINTS: usize = 20_000;

/// Pieces of the grid on which the ratio `r_j` is held.
pub const TIE_GRID: usize = 160;

/// How many sds from its centre a Gaussian integral reaches.
const WINDOW: f64 = 10.0;

/// The least half-width of the grid, in units of the standard normal: `Q(8.5) = 9.5e-18`.
const TAIL: f64 = 8.5;

/// The most Gauss-Legendre pieces of one step's exit integral.
const MAX_EXIT_PIECES: usize = 4096;

/// Gauss-Legendre nodes (positive half) and weights on [-1, 1], 4 points.
const GL4: [(f64, f64); 2] = [
    (0.339_981_043_584_856_3, 0.652_145_154_862_546_1),
    (0.861_136_311_594_052_6, 0.347_854_845_137_453_8),
];

/// Gauss-Legendre nodes (positive half) and weights on [-1, 1], 8 points.
const GL8: [(f64, f64); 4] = [
    (0.183_434_642_495_649_8, 0.362_683_783_378_362),
    (0.525_532_409_916_329, 0.313_706_645_877_887_3),
    (0.796_666_477_413_626_7, 0.222_381_034_453_374_5),
    (0.960_289_856_497_536_3, 0.101_228_536_290_376_3),
];

/// The standard normal upper tail `Q(x) = erfc(x / sqrt 2) / 2`.
fn q(x: f64) -> f64 {
    0.5 * libm::erfc(x * FRAC_1_SQRT_2)
}

/// The standard normal density.
fn phi(x: f64) -> f64 {
    const INV_SQRT_2PI: f64 = 0.398_942_280_401_432_7;
    INV_SQRT_2PI * (-0.5 * x * x).exp()
}

/// `Phi(b) - Phi(a)` for `a <= b`, from the tail on the side where it is small.
fn normal_mass(a: f64, b: f64) -> f64 {
    if a >= 0.0 {
        q(a) - q(b)
    } else if b <= 0.0 {
        q(-b) - q(-a)
    } else {
        1.0 - q(-a) - q(b)
    }
}

/// `(int (t1 - t) phi(t) dt, int (t - t0) phi(t) dt) / (t1 - t0)` over `[t0, t1]`: the
/// integrals of the two hat functions of a linear piece against the normal density.
fn hat_weights(t0: f64, t1: f64) -> (f64, f64) {
    let len = t1 - t0;
    if len <= 0.0 {
        return (0.0, 0.0);
    }
    let scale = t0.abs().max(t1.abs()) + 3.0;
    if len * scale <= 0.5 {
        // Short piece: 4-point Gauss-Legendre; relative error about 6e-10 (len scale)^8,
        // below 3e-12 here.
        let (mid, half) = (0.5 * (t0 + t1), 0.5 * len);
        let (mut w0, mut w1) = (0.0, 0.0);
        for (node, weight) in GL4 {
            for t in [mid - half * node, mid + half * node] {
                let f = weight * half * phi(t) / len;
                w0 += f * (t1 - t);
                w1 += f * (t - t0);
            }
        }
        return (w0, w1);
    }
    let mass = normal_mass(t0, t1);
    let first = phi(t0) - phi(t1); // int t phi(t) dt
    (
        ((t1 * mass - first) / len).max(0.0),
        ((first - t0 * mass) / len).max(0.0),
    )
}

/// A grid of nodes with the ratio `r` on them.
struct Grid {
    x: Vec<f64>,
    r: Vec<f64>,
}

/// Nodes from `lo` to `hi`: Chebyshev-like, clustered at `hi` and (when `both`) at `lo`,
/// symmetric about 0 when `both` and `lo = -hi`.
fn nodes(lo: f64, hi: f64, both: bool, pieces: usize) -> Vec<f64> {
    let mut x = Vec::with_capacity(pieces + 1);
    let k = pieces as f64;
    if both {
        // hi cos(pi (1 - i / pieces)) for the lower half, mirrored for the upper half.
        let half: Vec<f64> = (0..=pieces / 2)
            .map(|i| -hi * (std::f64::consts::PI * i as f64 / k).cos())
            .collect();
        x.extend_from_slice(&half);
        let skip = usize::from(pieces.is_multiple_of(2));
        x.extend(half.iter().rev().skip(skip).map(|v| -v));
    } else {
        let width = hi - lo;
        x.extend((0..=pieces).map(|i| {
            let s = (0.5 * std::f64::consts::PI * i as f64 / k).sin();
            lo + width * s
        }));
        if let Some(last) = x.last_mut() {
            *last = hi;
        }
    }
    x
}

/// `E[r(X)]` for `X ~ N(centre, sd^2)`, with `r` the linear interpolant of the grid (0 off it).
fn smooth_at(g: &Grid, centre: f64, sd: f64) -> f64 {
    let lo = centre - WINDOW * sd;
    let hi = centre + WINDOW * sd;
    let n = g.x.len();
    if n < 2 || hi <= g.x[0] || lo >= g.x[n - 1] {
        return 0.0;
    }
    let first = g.x.partition_point(|&v| v <= lo).saturating_sub(1);
    let last = g.x.partition_point(|&v| v < hi).min(n - 1);
    let mut acc = 0.0;
    for i in first..last {
        let (t0, t1) = ((g.x[i] - centre) / sd, (g.x[i + 1] - centre) / sd);
        let (w0, w1) = hat_weights(t0, t1);
        acc += g.r[i] * w0 + g.r[i + 1] * w1;
    }
    acc.clamp(0.0, 1.0)
}

/// The mass that leaves above `c` in one step:
/// `int_c^inf phi(y) E[r(X_prev) | X = y] dy`, `X_prev | X = y ~ N(rho y, sd^2)`.
fn exit_mass(g: &Grid, rho: f64, sd: f64, c: f64) -> f64 {
    let Some(&top) = g.x.last() else {
        return 0.0;
    };
    // Beyond (top + WINDOW sd) / rho the expectation is below 2 Q(WINDOW); beyond c + 9 the
    // density is below exp(-9 c - 40.5) of its value at c.
    let end = ((top + WINDOW * sd) / rho).min(c.max(0.0) + 9.0);
    if end <= c {
        return 0.0;
    }
    let mut piece = sd.min(0.5 / (c.abs() + 3.0));
    let mut count = ((end - c) / piece).ceil() as usize;
    if count > MAX_EXIT_PIECES {
        count = MAX_EXIT_PIECES;
    }
    count = count.max(1);
    piece = (end - c) / count as f64;
    let mut total = NeumaierSum::default();
    for k in 0..count {
        let mid = c + (k as f64 + 0.5) * piece;
        let half = 0.5 * piece;
        let mut s = 0.0;
        for (node, weight) in GL8 {
            for y in [mid - half * node, mid + half * node] {
                s += weight * phi(y) * smooth_at(g, rho * y, sd);
            }
        }
        total.add(s * half);
    }
    total.value()
}

/// `P(max(0, max_j |B(u_j)|) >= z)` (two-sided) or `P(max(0, max_j B(u_j)) >= z)` for a
/// Brownian bridge `B` observed at `0 < u_1 < ... < u_m < 1`, by the recursion of the module
/// docs. `z <= 0` gives 1; no points give 0 for `z > 0`.
///
/// # Errors
/// [`TestError::NotANumber`] for a NaN, [`TestError::NotSorted`] when the points are not
/// strictly increasing, [`TestError::BadPoint`] for a point outside `(0, 1)`, and
/// [`TestError::TooManyPoints`] for more than [`MAX_TIE_POINTS`] of them.
///
/// # Example
/// ```
/// use ogive::stats::ks::bridge_max_sf;
/// // One point: B(1/2) is normal with sd 1/2, so P(|B(1/2)| >= 1) = 2 Q(2) = 0.0455.
/// let p = bridge_max_sf(&[0.5], 1.0, true)?;
/// assert!((p - 0.04550026389635839).abs() < 1e-15);
/// // Watched at more points the maximum is larger, but stays below Kolmogorov's limit.
/// let u: Vec<f64> = (1..100).map(|k| k as f64 / 100.0).collect();
/// let dense = bridge_max_sf(&u, 1.0, true)?;
/// assert!(p < dense && dense < ogive::stats::ks::kolmogorov_limit_sf(1.0));
/// # Ok::<(), ogive::stats::ks::TestError>(())
/// ```
pub fn bridge_max_sf(u: &[f64], z: f64, two_sided: bool) -> Result<f64, TestError> {
    bridge_max_sf_with(u, z, two_sided, TIE_GRID)
}

/// [`bridge_max_sf`] from grids of `pieces / 2` and `pieces` pieces, extrapolated (the error
/// of one grid falls as the square of its spacing, so `p + (p - p_half) / 3` removes its
/// leading term; Richardson).
pub(super) fn bridge_max_sf_with(
    u: &[f64],
    z: f64,
    two_sided: bool,
    pieces: usize,
) -> Result<f64, TestError> {
    let fine = bridge_max_sf_on(u, z, two_sided, pieces)?;
    let coarse = bridge_max_sf_on(u, z, two_sided, pieces / 2)?;
    let p = fine + (fine - coarse) / 3.0;
    // Far out in the tail the two may differ in relative terms; never extrapolate past 0.
    Ok(if p > 0.0 { p.min(1.0) } else { fine })
}

/// [`bridge_max_sf`] on one grid of `pieces` pieces.
pub(super) fn bridge_max_sf_on(
    u: &[f64],
    z: f64,
    two_sided: bool,
    pieces: usize,
) -> Result<f64, TestError> {
    if z.is_nan() || u.iter().any(|v| v.is_nan()) {
        return Err(TestError::NotANumber);
    }
    if let Some(&bad) = u.iter().find(|&&v| !(v > 0.0 && v < 1.0)) {
        return Err(TestError::BadPoint(bad));
    }
    if u.windows(2).any(|w| w[0] >= w[1]) {
        return Err(TestError::NotSorted);
    }
    if u.len() > MAX_TIE_POINTS {
        return Err(TestError::TooManyPoints {
            got: u.len(),
            limit: MAX_TIE_POINTS,
        });
    }
    if z <= 0.0 {
        return Ok(1.0);
    }
    if u.is_empty() || z.is_infinite() {
        return Ok(0.0);
    }
    let sides = if two_sided { 2.0 } else { 1.0 };
    let bound: Vec<f64> = u.iter().map(|&v| z / (v * (1.0 - v)).sqrt()).collect();
    let least = bound.iter().copied().fold(f64::INFINITY, f64::min);
    let big = (least + 3.0).clamp(TAIL, 40.0);
    let pieces = pieces.max(4);
    let grid_for = |c: f64| -> Grid {
        let hi = c.min(big);
        let x = if two_sided {
            nodes(-hi, hi, true, pieces)
        } else {
            nodes(-big, hi, false, pieces)
        };
        let r = vec![1.0; x.len()];
        Grid { x, r }
    };
    let mut left = NeumaierSum::default();
    left.add(sides * q(bound[0]));
    let mut g = grid_for(bound[0]);
    for j in 1..u.len() {
        let (u0, u1) = (u[j - 1], u[j]);
        let rho = (u0 * (1.0 - u1) / (u1 * (1.0 - u0))).sqrt();
        let sd = ((u1 - u0) / (u1 * (1.0 - u0))).sqrt();
        let c = bound[j];
        // Two-sided, r is even, so the lower exit equals the upper one.
        left.add(sides * exit_mass(&g, rho, sd, c));
        let mut next = grid_for(c);
        let n = next.x.len();
        let upto = if two_sided { n.div_ceil(2) } else { n };
        for k in 0..upto {
            next.r[k] = smooth_at(&g, rho * next.x[k], sd);
        }
        if two_sided {
            for k in upto..n {
                next.r[k] = next.r[n - 1 - k];
            }
        }
        if next.r.iter().all(|&v| v == 0.0) {
            break;
        }
        g = next;
    }
    Ok(left.value().clamp(0.0, 1.0))
}

/// The two-sample p-value of the Brownian-bridge limit with ties: `z = sqrt(en) d` referred to
/// [`bridge_max_sf`] at the pooled ECDF's values at the ends of the tie `blocks` (the last one
/// dropped). `None` when the blocks do not sum to `n1 + n2` or when there are more than
/// [`MAX_TIE_POINTS`] interior values (the caller then uses the tie-free limit).
///
/// # Example
/// ```
/// use ogive::stats::ks::{ties_2samp_p, Alternative};
/// // Two values, 1000 + 1000 readings: u_1 = 1/2 and D = 0.05, z = sqrt(500) 0.05.
/// let p = ties_2samp_p(1000, 1000, &[1000, 1000], 0.05, Alternative::TwoSided).unwrap();
/// let z = 500f64.sqrt() * 0.05;
/// // One point: the normal tail 2 Q(2 z) = 0.0253.
/// assert!((p - 0.025347318677468252).abs() < 1e-12, "{p} {z}");
/// ```
pub fn ties_2samp_p(
    n1: usize,
    n2: usize,
    blocks: &[usize],
    d: f64,
    alternative: super::Alternative,
) -> Option<f64> {
    let n = n1 + n2;
    if n1 == 0 || n2 == 0 || blocks.iter().sum::<usize>() != n || blocks.len() > MAX_TIE_POINTS + 1
    {
        return None;
    }
    let mut u = Vec::with_capacity(blocks.len());
    let mut s = 0usize;
    for &b in blocks {
        s += b;
        if s < n && b > 0 {
            u.push(s as f64 / n as f64);
        }
    }
    let en = n1 as f64 * n2 as f64 / n as f64;
    let z = en.sqrt() * d;
    let two_sided = alternative == super::Alternative::TwoSided;
    bridge_max_sf(&u, z, two_sided).ok()
}

#[cfg(test)]
mod tests {
    use super::super::{Alternative, kolmogorov_limit_sf};
    use super::*;

    fn rel_close(a: f64, b: f64, rel: f64, abs: f64) -> bool {
        (a - b).abs() <= rel * a.abs().max(b.abs()) + abs
    }

    #[test]
    fn gauss_legendre_rules_are_exact_on_polynomials() {
        // An n-point rule integrates x^k exactly for k < 2n: int_{-1}^{1} x^k = 2 / (k + 1)
        // for even k; tolerance 1e-15.
        for k in (0..16).step_by(2) {
            let gl8: f64 = GL8.iter().map(|(x, w)| 2.0 * w * x.powi(k)).sum();
            assert!((gl8 - 2.0 / (k as f64 + 1.0)).abs() < 1e-15, "GL8 x^{k}");
            if k < 8 {
                let gl4: f64 = GL4.iter().map(|(x, w)| 2.0 * w * x.powi(k)).sum();
                assert!((gl4 - 2.0 / (k as f64 + 1.0)).abs() < 1e-15, "GL4 x^{k}");
            }
        }
    }

    #[test]
    fn hat_weights_agree_between_closed_form_and_quadrature() {
        // The two forms of hat_weights where both are accurate: the closed form against
        // 4-point Gauss-Legendre on 64 sub-pieces (exact to 1e-15 relative for these
        // lengths); tolerance 1e-11 relative.
        for &(t0, len) in &[
            (-3.0, 0.7),
            (0.2, 1.5),
            (4.0, 0.4),
            (-9.0, 2.0),
            (-0.5, 1.0),
        ] {
            let (w0, w1) = hat_weights(t0, t0 + len);
            let (mut a, mut b) = (0.0, 0.0);
            let sub = len / 64.0;
            for k in 0..64 {
                let lo = t0 + k as f64 * sub;
                for (node, weight) in GL4 {
                    for t in [lo + sub * (0.5 - 0.5 * node), lo + sub * (0.5 + 0.5 * node)] {
                        let f = weight * 0.5 * sub * phi(t) / len;
                        a += f * (t0 + len - t);
                        b += f * (t - t0);
                    }
                }
            }
            assert!(rel_close(w0, a, 1e-11, 0.0), "{t0} {len}: {w0} vs {a}");
            assert!(rel_close(w1, b, 1e-11, 0.0), "{t0} {len}: {w1} vs {b}");
        }
    }

    #[test]
    fn one_point_is_a_normal_tail() {
        // m = 1: B(u) ~ N(0, u (1 - u)), so the two-sided p is 2 (1 - Phi(z / sqrt(u (1 - u))))
        // and the one-sided one half of it. Expected values by that formula with libm's erfc
        // (the normal tail is exact there); tolerance 1e-15 relative.
        for &(u, z) in &[(0.5f64, 1.0f64), (0.01, 0.2), (0.93, 0.4), (0.3, 3.0)] {
            let tail = 0.5 * libm::erfc(z / (u * (1.0 - u)).sqrt() / 2f64.sqrt());
            let two = bridge_max_sf(&[u], z, true).unwrap();
            let one = bridge_max_sf(&[u], z, false).unwrap();
            assert!(rel_close(two, 2.0 * tail, 1e-13, 0.0), "{u} {z}: {two}");
            assert!(rel_close(one, tail, 1e-13, 0.0), "{u} {z}: {one}");
        }
    }

    #[test]
    fn two_points_match_a_bivariate_normal() {
        // 1 - P(-z < B(a) < z, -z < B(b) < z) with cov(B(s), B(t)) = min(s, t) - s t, from
        // scipy 1.17.1:
        //   multivariate_normal.cdf([z, z], mean=[0, 0], cov=[[a - a*a, a - a*b],
        //       [a - a*b, b - b*b]], lower_limit=[-z, -z], abseps=1e-12, releps=1e-12,
        //       maxpts=10**7)
        // and the one-sided value without lower_limit; both confirmed to 1e-15 by
        // scipy.integrate.quad over the conditional normal. Tolerance 1e-9 relative.
        let cases = [
            (0.3, 0.7, 0.6, 0.3260862131593929, 0.1641868650632866),
            (0.1, 0.15, 0.5, 0.19581691503080556, 0.09790850476689317),
            (0.5, 0.9, 0.9, 0.07394173827042094, 0.03697237211611615),
        ];
        for (a, b, z, two, one) in cases {
            let got2 = bridge_max_sf(&[a, b], z, true).unwrap();
            let got1 = bridge_max_sf(&[a, b], z, false).unwrap();
            assert!(
                rel_close(got2, two, 1e-9, 0.0),
                "{a} {b} {z}: {got2} vs {two}"
            );
            assert!(
                rel_close(got1, one, 1e-9, 0.0),
                "{a} {b} {z}: {got1} vs {one}"
            );
        }
    }

    #[test]
    fn dense_points_approach_kolmogorovs_limit_from_below() {
        // Nested dyadic sets u = k / 2^e: the sup over a larger set is larger, so p must not
        // decrease with e, and every value lies below the continuous limit (Kolmogorov's,
        // kolmogorov_limit_sf, checked against scipy's kstwobign.sf in mod.rs; one-sided
        // Smirnov's exp(-2 z^2)). How far below: a bridge watched at spacing delta misses
        // about 0.5826 sqrt(delta) of its sup (Broadie, Glasserman and Kou 1997, from memory),
        // so at delta = 2^-8 p should be the limit at z + 0.5826 / 16; tolerance 1% relative
        // (an approximation, not an identity).
        for z in [0.8, 1.36] {
            let mut last = (0.0, 0.0);
            for e in 1..=8 {
                let m = 1usize << e;
                let u: Vec<f64> = (1..m).map(|k| k as f64 / m as f64).collect();
                let two = bridge_max_sf(&u, z, true).unwrap();
                let one = bridge_max_sf(&u, z, false).unwrap();
                assert!(two >= last.0 - 1e-12 && one >= last.1 - 1e-12, "{z} {e}");
                assert!(two < kolmogorov_limit_sf(z) && one < (-2.0 * z * z).exp());
                last = (two, one);
            }
            let shifted = z + 0.5826 / 16.0;
            let (k, s) = (
                kolmogorov_limit_sf(shifted),
                (-2.0 * shifted * shifted).exp(),
            );
            assert!(rel_close(last.0, k, 0.01, 0.0), "{z}: {last:?} vs {k}");
            assert!(rel_close(last.1, s, 0.01, 0.0), "{z}: {last:?} vs {s}");
        }
    }

    /// Seeded tie patterns: pooled ECDF values of `m` distinct values with random weights.
    fn patterns() -> Vec<Vec<f64>> {
        let mut rng = crate::stats::rng::Xoshiro256pp::new(15);
        let mut out = Vec::new();
        for &m in &[2usize, 5, 12, 40, 150] {
            for shape in 0..3 {
                let w: Vec<f64> = (0..m)
                    .map(|k| {
                        let x = (k as f64 + 0.5) / m as f64 * 6.0 - 3.0;
                        match shape {
                            0 => (-0.5 * x * x).exp(),
                            1 => 1.0,
                            _ => rng.uniform() + 0.01,
                        }
                    })
                    .collect();
                let total: f64 = w.iter().sum();
                let mut s = 0.0;
                let mut u = Vec::new();
                for v in &w[..m - 1] {
                    s += v;
                    u.push(s / total);
                }
                out.push(u);
            }
        }
        out
    }

    #[test]
    fn grid_is_converged() {
        // The discretisation check of the module docs: the default extrapolated pair of grids
        // against the pair four times finer, over seeded tie patterns and statistics from p
        // near 1 to p near 1e-10; tolerance 1e-4 relative plus 1e-12 absolute (worst measured
        // 2e-5 one-sided at p near 0.79 and 1.1e-6 two-sided at p near 0.9997, both m = 150,
        // z = 0.3: the error grows with m at small z, not yet understood). (A single
        // grid of 640 pieces is itself 3e-6 off one-sided at p near 0.6: measured, the error
        // falling by 4 per doubling from 40 to 640 pieces.)
        for u in patterns() {
            for z in [0.3, 1.2, 2.2, 3.0] {
                for two in [true, false] {
                    let coarse = bridge_max_sf_with(&u, z, two, TIE_GRID).unwrap();
                    let fine = bridge_max_sf_with(&u, z, two, 4 * TIE_GRID).unwrap();
                    assert!(
                        rel_close(coarse, fine, 1e-4, 1e-12),
                        "m={} z={z} two={two}: {coarse} vs {fine}",
                        u.len() + 1
                    );
                }
            }
        }
    }

    #[test]
    fn bad_points_are_errors_and_results_are_probabilities() {
        assert_eq!(
            bridge_max_sf(&[0.5, 0.4], 1.0, true),
            Err(TestError::NotSorted)
        );
        assert_eq!(
            bridge_max_sf(&[0.5, 0.5], 1.0, true),
            Err(TestError::NotSorted)
        );
        assert_eq!(
            bridge_max_sf(&[0.0, 0.5], 1.0, true),
            Err(TestError::BadPoint(0.0))
        );
        assert_eq!(
            bridge_max_sf(&[0.5, 1.0], 1.0, true),
            Err(TestError::BadPoint(1.0))
        );
        assert_eq!(
            bridge_max_sf(&[f64::NAN], 1.0, true),
            Err(TestError::NotANumber)
        );
        assert_eq!(
            bridge_max_sf(&[0.5], f64::NAN, true),
            Err(TestError::NotANumber)
        );
        let many: Vec<f64> = (1..=MAX_TIE_POINTS + 1)
            .map(|k| k as f64 / (MAX_TIE_POINTS + 2) as f64)
            .collect();
        assert!(matches!(
            bridge_max_sf(&many, 1.0, true),
            Err(TestError::TooManyPoints { .. })
        ));
        assert_eq!(bridge_max_sf(&[], 1.0, true), Ok(0.0));
        assert_eq!(bridge_max_sf(&[0.5], 0.0, false), Ok(1.0));
        assert_eq!(bridge_max_sf(&[0.5], f64::INFINITY, false), Ok(0.0));
        for u in patterns() {
            for z in [1e-9, 1.0, 20.0, 1e6] {
                for two in [true, false] {
                    let p = bridge_max_sf(&u, z, two).unwrap();
                    assert!((0.0..=1.0).contains(&p), "{z}: {p}");
                }
            }
        }
    }

    #[test]
    fn two_sample_wrapper_reads_the_blocks() {
        // Blocks 3, 1, 4 of 8 pooled values give u = 3/8, 4/8; a block list that does not sum
        // to n1 + n2 is refused. Expected: the kernel on those points (same code path), and
        // the one-point normal tail for two blocks, as in one_point_is_a_normal_tail.
        let p = ties_2samp_p(4, 4, &[3, 1, 4], 0.5, Alternative::Less).unwrap();
        let want = bridge_max_sf(&[0.375, 0.5], 2f64.sqrt() * 0.5, false).unwrap();
        assert_eq!(p, want);
        assert_eq!(ties_2samp_p(4, 4, &[3, 1], 0.5, Alternative::Less), None);
    }
}
