//! EM for grouped data: readings rounded to a step, each standing for an interval.
//!
//! With readings rounded to a step `h`, a merged point `x` with count `c` stands for `c`
//! true values somewhere in `[x - h/2, x + h/2]`. The likelihood is that of grouped data,
//! `sum c ln sum_j w_j (Phi(beta_j) - Phi(alpha_j))` with `alpha_j = (x - h/2 - mu_j) /
//! sd_j` and `beta_j = (x + h/2 - mu_j) / sd_j`, and EM treats the true values as the
//! missing data (McLachlan and Jones 1988, "Fitting mixture models to grouped and
//! truncated data via the EM algorithm", Biometrics 44): the responsibilities are the
//! components' shares of each interval's probability, and the M-step uses each
//! component's conditional moments on the interval, those of a normal truncated to
//! `[alpha, beta]`:
//!
//! ```text
//! E[z] = (phi(alpha) - phi(beta)) / Z,   E[z^2] = 1 + (alpha phi(alpha) - beta phi(beta)) / Z,
//! Z = Phi(beta) - Phi(alpha)
//! ```
//!
//! (Johnson, Kotz and Balakrishnan 1994, *Continuous Univariate Distributions* 1, section
//! 10.1). `Z` is taken from the tail the interval lies in; far in a tail (where `Z`
//! nears the smallest doubles) everything is in log space with Mills' ratio; for an
//! interval narrower than `1e-4` sd the second-order expansions about its midpoint
//! replace the differences, which would cancel. The likelihood is bounded (a probability
//! is at most 1), so a component sitting on one grid value gains at most that value's
//! share, and BIC weighs it as it should.
//!
//! # Cost
//!
//! A pass evaluates each interval end once per component (adjacent grid values share
//! an end), and from the end's tail and density alone, in probabilities rather than
//! logarithms: the responsibility times a moment, `r E[z] = c w (phi(alpha) -
//! phi(beta)) / P`, needs no division by `Z` and no logarithm of it, so a point costs
//! one logarithm (of its probability `P`) and a component at it costs a few
//! multiplications. An end's density is one exponential (`exp_nonpositive`) and its
//! tail is the density times Mills' ratio `R(t) = Q(t) / phi(t)`, a polynomial in a
//! mapped variable (Schonfelder 1978, as in [`MILLS_LOW`]); both are written over
//! arrays of sixteen ends, so that they vectorise (AVX2 where the processor has it, as
//! for the exact pass), and a block's logarithms likewise (`ln_lanes`). A point far in
//! every component's tail, or with a narrow interval, takes the log-space formulas
//! above. On a million readings to 0.1 (88 grid values, k chosen by BIC) the grouped
//! passes then cost about twice the exact ones, where the log-space pass with libm's
//! erfc cost more than ten times.

use super::data::Data;
use super::em::{Params, exp_nonpositive_lanes};
use super::*;
use crate::stats::fit::ln_normal_upper;
use crate::stats::sum::NeumaierSum;

/// Below this width (in sd) an interval's moments come from expansions about its
/// midpoint.
const NARROW: f64 = 1e-4;
/// Below this probability an interval's moments are taken in log space.
const TINY: f64 = 1e-280;

/// `ln phi(z)`.
fn ln_phi(z: f64) -> f64 {
    -0.5 * z * z - 0.5 * (2.0 * std::f64::consts::PI).ln()
}

/// `Q(z) = 1 - Phi(z)`.
fn upper(z: f64) -> f64 {
    0.5 * libm::erfc(z * std::f64::consts::FRAC_1_SQRT_2)
}

/// One end of an interval in standard units, with what the moments need of it: the
/// smaller tail beyond it, `Q(|t|)`, and the density. Adjacent grid values share an end,
/// so a pass evaluates each once.
#[derive(Debug, Clone, Copy)]
struct End {
    t: f64,
    tail: f64,
    phi: f64,
}

impl End {
    fn at(t: f64) -> End {
        End {
            t,
            tail: upper(t.abs()),
            phi: ln_phi(t).exp(),
        }
    }
}

/// The standard normal on `[a, b]` (`a < b`, either may be infinite): `(ln Z, E[z],
/// E[z^2])` with `Z` its probability and the moments conditional on the interval.
#[cfg(test)]
fn interval_moments(a: f64, b: f64) -> (f64, f64, f64) {
    between(&End::at(a), &End::at(b))
}

/// [`interval_moments`] from the interval's ends.
fn between(a: &End, b: &End) -> (f64, f64, f64) {
    if b.t - a.t < NARROW {
        return narrow(a.t, b.t);
    }
    // Z from the tails the ends lie in, so no probability near 1 is subtracted.
    let z = if a.t >= 0.0 {
        a.tail - b.tail
    } else if b.t <= 0.0 {
        b.tail - a.tail
    } else {
        1.0 - a.tail - b.tail
    };
    if z.is_nan() || z <= TINY {
        return if a.t >= 0.0 {
            far_upper(a.t, b.t)
        } else {
            // Mirror: z -> -z maps [a, b] to [-b, -a].
            let (ln_z, e1, e2) = far_upper(-b.t, -a.t);
            (ln_z, -e1, e2)
        };
    }
    let e1 = (a.phi - b.phi) / z;
    let e2 = 1.0 + (times(a.t, a.phi) - times(b.t, b.phi)) / z;
    (z.ln(), e1, e2)
}

/// `x phi`, 0 where phi is 0 (an infinite end).
fn times(x: f64, phi: f64) -> f64 {
    if phi == 0.0 { 0.0 } else { x * phi }
}

/// [`interval_moments`] for `0 <= a < b` far in the upper tail (where `Z` nears the
/// smallest doubles), in log space: `ln Z = ln Q(a) + ln(1 - Q(b) / Q(a))`, and
/// `phi / Z` as exponentials of differences of logs.
fn far_upper(a: f64, b: f64) -> (f64, f64, f64) {
    let (qa, qb) = (ln_normal_upper(a), ln_normal_upper(b));
    let ln_z = qa + (-(qb - qa).exp()).ln_1p();
    let ra = (ln_phi(a) - ln_z).exp();
    let rb = if b == f64::INFINITY {
        0.0
    } else {
        (ln_phi(b) - ln_z).exp()
    };
    let e1 = ra - rb;
    let e2 = 1.0 + a * ra - if rb == 0.0 { 0.0 } else { b * rb };
    (ln_z, e1, e2)
}

/// A narrow interval `[m - w/2, m + w/2]`: `Z = w phi(m) (1 + (m^2 - 1) w^2 / 24)`,
/// `E[z] = m (1 - w^2 / 12)`, `E[z^2] = m^2 (1 - w^2 / 6) + w^2 / 12`, the expansions of
/// `phi(m + u) = phi(m) (1 - m u + (m^2 - 1) u^2 / 2 + ...)` over `|u| <= w / 2`, exact
/// to `O(w^4)`.
fn narrow(a: f64, b: f64) -> (f64, f64, f64) {
    let (m, w) = (0.5 * a + 0.5 * b, b - a);
    let w2 = w * w;
    let ln_z = ln_phi(m) + w.ln() + ((m * m - 1.0) * w2 / 24.0).ln_1p();
    (
        ln_z,
        m * (1.0 - w2 / 12.0),
        m * m * (1.0 - w2 / 6.0) + w2 / 12.0,
    )
}

/// Mills' ratio `R(t) = Q(t) / phi(t)` for `t >= 0` as two polynomials, one for
/// `t < 5` and one for `t >= 5`, each in a variable `u` that runs over `[-1, 1]` on its
/// half: with `y = (t - 5) / (t + 5)`, which maps `[0, inf)` onto `[-1, 1)` and takes
/// R's `1 / t` decay into a function smooth at `y = 1` (the mapping of Schonfelder 1978,
/// "Chebyshev expansions for the error and related functions", Math. Comp. 32),
/// `u = 2y + 1 = (3t - 5) / (t + 5)` below 5 and `u = 2y - 1 = (t - 15) / (t + 5)`
/// above. Each is the Chebyshev interpolant of degree 17 (in u, at 40 nodes) of 60-digit
/// values of R (Python's decimal: the power series of erf below `t = 3 sqrt 2`,
/// Laplace's continued fraction of erfc above), written in powers of u (`p_0 .. p_17`
/// of `R = sum p_k u^k`). The first Chebyshev coefficient left out is below `7e-19`
/// (R is above 0.19 below 5 and above 0.02 up to 40), and the power forms are well
/// conditioned (their `|p_k|` sum to 1.25 and 0.19, the values of R at 0 and 5), so
/// Horner's rule gives R to a few units in the last place;
/// tests/python/test_mills_coefficients.py derives the coefficients again and checks
/// these.
const MILLS_SPLIT: f64 = 5.0;
const MILLS_LOW: [f64; 18] = [
    0.48041542863814607,
    -0.44290581985871824,
    0.2183796989214331,
    -0.08239451818818075,
    0.023618719441096024,
    -0.004928494712199821,
    0.0006556681005813556,
    -2.543539177970641e-05,
    -8.484116333715729e-06,
    1.2836143926729795e-06,
    9.139491971755782e-08,
    -3.2552097272868356e-08,
    -1.4089191544340012e-09,
    8.082556005044228e-10,
    4.6271244945072144e-11,
    -2.018920261595341e-11,
    -1.7866643368551435e-12,
    4.2445654870918043e-13,
];
const MILLS_HIGH: [f64; 18] = [
    0.06637423582325018,
    -0.08772925302494793,
    0.027729957882898417,
    -0.008123477084345418,
    0.0021830922261855718,
    -0.000530344867928494,
    0.00011384187571814746,
    -2.0746913112146015e-05,
    2.9437945268217184e-06,
    -2.406055393794742e-07,
    -1.7800125054835656e-08,
    1.0190558912269712e-08,
    -1.5040721072830575e-09,
    -4.443186445472153e-11,
    6.040418976518318e-11,
    -8.338021517127895e-12,
    -1.1282775736808042e-12,
    4.264527322066303e-13,
];

/// `1 / sqrt(2 pi)`.
const FRAC_1_SQRT_2PI: f64 = 0.398_942_280_401_432_7;

/// Lanes of [`normal_ends`]: enough independent recurrences for the processor to
/// overlap (a polynomial by Horner's rule is a chain of dependent steps).
const LANES: usize = 16;

/// `sum p_k u^k` by Horner's rule at `LANES` points at once (the coefficient loop
/// outside, the lanes inside, so that the lanes vectorise and their chains of dependent
/// steps interleave).
#[inline(always)]
fn horner(p: &[f64; 18], u: &[f64; LANES]) -> [f64; LANES] {
    let mut r = [p[p.len() - 1]; LANES];
    for &a in p[..p.len() - 1].iter().rev() {
        for l in 0..LANES {
            r[l] = r[l] * u[l] + a;
        }
    }
    r
}

/// Mills' ratio ([`MILLS_LOW`], [`MILLS_HIGH`]) at `LANES` points `t >= 0`: one
/// polynomial when every point lies on its side of [`MILLS_SPLIT`] (sorted ends mostly
/// do), both and a choice per point otherwise.
#[inline(always)]
fn mills(t: &[f64; LANES]) -> [f64; LANES] {
    let (mut low, mut high) = ([0.0; LANES], [0.0; LANES]);
    let mut below = 0;
    for l in 0..LANES {
        let d = t[l] + MILLS_SPLIT;
        low[l] = (3.0 * t[l] - MILLS_SPLIT) / d;
        high[l] = (t[l] - 3.0 * MILLS_SPLIT) / d;
        below += usize::from(t[l] < MILLS_SPLIT);
    }
    if below == LANES {
        return horner(&MILLS_LOW, &low);
    }
    if below == 0 {
        return horner(&MILLS_HIGH, &high);
    }
    let (a, b) = (horner(&MILLS_LOW, &low), horner(&MILLS_HIGH, &high));
    let mut r = [0.0; LANES];
    for l in 0..LANES {
        r[l] = if t[l] < MILLS_SPLIT { a[l] } else { b[l] };
    }
    r
}

/// The smaller tail beyond each `t`, `Q(|t|)`, and the density `phi(t)`, from one
/// exponential: `phi = exp(-t^2 / 2) / sqrt(2 pi)` with `t^2 / 2` split exactly into a
/// part of `|t|` with 26 significant bits squared (exact) and a small rest (so that no
/// rounding of `t^2` reaches the tail), and `Q = R(|t|) phi`. Relative error a few
/// units in the last place wherever `phi` is a normal double; far out (`|t| > 37.6`)
/// both are below `1e-307` (the exponential stops at `exp(-708)`), which only the
/// negligible-interval test below sees.
#[inline(always)]
fn normal_ends(t: &[f64; LANES], tail: &mut [f64; LANES], dens: &mut [f64; LANES]) {
    let mut a = [0.0; LANES];
    let mut e_rest = [0.0; LANES];
    for l in 0..LANES {
        a[l] = t[l].abs();
        let high = f64::from_bits(a[l].to_bits() & !((1u64 << 27) - 1));
        let low = a[l] - high;
        // t^2 / 2 = high^2 / 2 + rest, rest = low (high + low / 2) >= 0.
        let rest = low * (high + 0.5 * low);
        e_rest[l] = (1.0 - rest * (1.0 - rest * (0.5 - rest * (1.0 / 6.0)))).max(0.0);
        dens[l] = -0.5 * (high * high);
    }
    exp_nonpositive_lanes(dens);
    let r = mills(&a);
    for l in 0..LANES {
        dens[l] = dens[l] * e_rest[l] * FRAC_1_SQRT_2PI;
        tail[l] = r[l] * dens[l];
    }
}

/// `ln x` of every element (in place) for `x` a positive normal double, written so
/// that a loop over the elements vectorises: `x = 2^e m` with `m` in `[sqrt(1/2),
/// sqrt 2)` (from the bits), `ln m = 2 atanh(s) = 2 (s + s^3 / 3 + ... + s^21 / 21)`
/// with `s = (m - 1) / (m + 1)`, `|s| <= 0.172` (the first term left out is below
/// `1e-18` of the sum), and `e ln 2` in two parts (fdlibm's split of ln 2) so that it
/// adds no rounding. Within a few units in the last place. Other inputs give
/// meaningless but finite or infinite values, never a trap: callers use only the
/// elements they know are normal.
#[inline(always)]
fn ln_lanes<const L: usize>(xs: &mut [f64; L]) {
    const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
    const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
    const MANTISSA: u64 = (1 << 52) - 1;
    let (mut e, mut s) = ([0.0; L], [0.0; L]);
    for l in 0..L {
        let bits = xs[l].to_bits();
        let m = f64::from_bits((bits & MANTISSA) | (1023 << 52));
        let exponent = ((bits >> 52) & 0x7ff) as i64 - 1023;
        let over = m > std::f64::consts::SQRT_2;
        let m = if over { 0.5 * m } else { m };
        e[l] = (exponent + i64::from(over)) as f64;
        s[l] = (m - 1.0) / (m + 1.0);
    }
    let mut poly = [1.0 / 21.0; L];
    for d in [19.0, 17.0, 15.0, 13.0, 11.0, 9.0, 7.0, 5.0, 3.0] {
        for l in 0..L {
            poly[l] = poly[l] * (s[l] * s[l]) + 1.0 / d;
        }
    }
    for l in 0..L {
        let s2 = s[l] * s[l];
        let ln_m = 2.0 * s[l] + 2.0 * s[l] * (s2 * poly[l]);
        xs[l] = e[l] * LN2_HI + (e[l] * LN2_LO + ln_m);
    }
}

/// Below this probability of the whole interval a point is evaluated in log space.
const FLOOR: f64 = 1e-250;
/// Points per block of the grouped pass (fewer than [`BLOCK`], so that its per-interval
/// arrays for every component stay small), and the most ends (and intervals) a block
/// has: two per point, a whole number of [`LANES`].
const CELLS: usize = 15;
const ENDS: usize = 2 * (CELLS + 1);

impl Data {
    /// [`Data::em_pass`] for grouped data: one pass over the merged points, each an
    /// interval of width `width` around it, giving the grouped log-likelihood of `p` (a
    /// sum of `count ln P`, no constant left out) and the EM update of McLachlan and
    /// Jones.
    ///
    /// On x86-64 processors with AVX2 the same code runs compiled for AVX2, as
    /// [`Data::em_pass`] does, with the same results to the bit.
    pub(super) fn em_pass_binned(&self, p: &Params, width: f64) -> Option<(f64, Params)> {
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            #[allow(unsafe_code)]
            // SAFETY: `em_pass_binned_avx2` requires only AVX2, which this processor has.
            return unsafe { self.em_pass_binned_avx2(p, width) };
        }
        self.em_pass_binned_portable(p, width)
    }

    /// [`Data::em_pass_binned`] compiled for AVX2.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    pub(super) fn em_pass_binned_avx2(&self, p: &Params, width: f64) -> Option<(f64, Params)> {
        self.em_pass_binned_portable(p, width)
    }

    /// The body of [`Data::em_pass_binned`], inlined into each compiled form.
    ///
    /// The points go in blocks of [`BLOCK`]. A block's interval ends are listed once
    /// (adjacent grid values share an end, to rounding: the grid check allows readings
    /// a little off it, and the standardisation rounds); then, component by component,
    /// every end's tail and density come from one exponential and Mills' ratio
    /// ([`normal_end`], over an array, so it vectorises), and each interval's
    /// probability `w Z` and the sums the M-step needs follow without a logarithm or a
    /// division: with `r = c w Z / P` the responsibility of a point of count `c` and
    /// interval probability `P`, `r E[z] = c w (phi(alpha) - phi(beta)) / P` and
    /// `r E[z^2] = c w (Z + alpha phi(alpha) - beta phi(beta)) / P`. One logarithm per
    /// point gives the likelihood. A point with a narrow interval (below [`NARROW`] sd
    /// for some component), or whose probability is below [`FLOOR`], is evaluated in
    /// log space instead ([`Data::cell_in_logs`]); where `P >= FLOOR`, a component whose
    /// own probability is below [`TINY`] is left out, a change below `1e-30` of `P`.
    #[inline(always)]
    pub(super) fn em_pass_binned_portable(&self, p: &Params, width: f64) -> Option<(f64, Params)> {
        let k = p.k;
        let mut sd = [0.0; MAX_COMPONENTS];
        let mut ln_w = [0.0; MAX_COMPONENTS];
        for j in 0..k {
            sd[j] = p.var[j].sqrt();
            ln_w[j] = p.weight[j].ln();
        }
        let half = 0.5 * width;
        let mut loglik = NeumaierSum::default();
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        // The block's ends in increasing order; interval e runs from end e to end e + 1
        // and holds `weight[e]` readings: a point's count, or 0 for the gap between two
        // points that do not share an end.
        let mut edge = [0.0; ENDS];
        let mut weight = [0.0; ENDS];
        // One component's ends: standard units, tail, density.
        let (mut t, mut tail, mut dens) = ([0.0; ENDS], [0.0; ENDS], [0.0; ENDS]);
        // Per component and interval: w Z, w sd (phi(a) - phi(b)), w var (Z + a phi(a) -
        // b phi(b)).
        let mut mass = [[0.0; ENDS]; MAX_COMPONENTS];
        let mut first = [[0.0; ENDS]; MAX_COMPONENTS];
        let mut second = [[0.0; ENDS]; MAX_COMPONENTS];
        let mut last_top = f64::NAN;
        for (xs, cs) in self.x.chunks(CELLS).zip(self.count.chunks(CELLS)) {
            let mut ends = 0;
            for (&x, &c) in xs.iter().zip(cs) {
                let lower = x - half;
                // Adjacent grid values share an end (to rounding: the grid check allows
                // readings a little off it, and the standardisation rounds).
                let shared = (lower - last_top).abs() <= 1e-9 * width;
                if ends == 0 {
                    edge[0] = if shared { last_top } else { lower };
                    ends = 1;
                } else if !shared {
                    weight[ends - 1] = 0.0;
                    edge[ends] = lower;
                    ends += 1;
                }
                last_top = x + half;
                weight[ends - 1] = c;
                edge[ends] = last_top;
                ends += 1;
            }
            let intervals = ends - 1;
            // Some component negligible (left out), some interval narrow.
            let mut narrow = [false; ENDS];
            let mut total = [0.0; ENDS];
            for j in 0..k {
                let (mean, s) = (p.mean[j], sd[j]);
                // Whole groups of lanes (the ends past `ends` are left-overs: finite,
                // and unused).
                for g in 0..ends.div_ceil(LANES) {
                    let at = g * LANES..(g + 1) * LANES;
                    let mut tg = [0.0; LANES];
                    for (tl, &v) in tg.iter_mut().zip(&edge[at.clone()]) {
                        *tl = (v - mean) / s;
                    }
                    let (mut q, mut f) = ([0.0; LANES], [0.0; LANES]);
                    normal_ends(&tg, &mut q, &mut f);
                    t[at.clone()].copy_from_slice(&tg);
                    tail[at.clone()].copy_from_slice(&q);
                    dens[at].copy_from_slice(&f);
                }
                let w = p.weight[j];
                let (w_sd, w_var) = (w * s, w * p.var[j]);
                let (mj, fj, sj) = (&mut mass[j], &mut first[j], &mut second[j]);
                for e in 0..intervals {
                    let (a, b) = (t[e], t[e + 1]);
                    let (qa, qb) = (tail[e], tail[e + 1]);
                    let (fa, fb) = (dens[e], dens[e + 1]);
                    // Z from the tails the ends lie in, so no probability near 1 is
                    // subtracted.
                    let z = if a >= 0.0 {
                        qa - qb
                    } else if b <= 0.0 {
                        qb - qa
                    } else {
                        1.0 - qa - qb
                    };
                    let is_narrow = b - a < NARROW;
                    narrow[e] |= is_narrow;
                    let keep = !is_narrow && z > TINY;
                    let m = if keep { w * z } else { 0.0 };
                    mj[e] = m;
                    fj[e] = if keep { w_sd * (fa - fb) } else { 0.0 };
                    sj[e] = if keep {
                        w_var * (z + a * fa - b * fb)
                    } else {
                        0.0
                    };
                    total[e] += m;
                }
            }
            let mut b_ll = 0.0;
            let (mut b0, mut b1, mut b2) = (
                [0.0; MAX_COMPONENTS],
                [0.0; MAX_COMPONENTS],
                [0.0; MAX_COMPONENTS],
            );
            let mut share = [0.0; ENDS];
            let mut ln_total = total;
            ln_lanes(&mut ln_total);
            for e in 0..intervals {
                let c = weight[e];
                if c == 0.0 {
                    continue;
                }
                if !narrow[e] && total[e] >= FLOOR {
                    b_ll += c * ln_total[e];
                    share[e] = c / total[e];
                } else {
                    let (ll, r, m1, m2) = self.cell_in_logs(p, &sd, &ln_w, edge[e], edge[e + 1])?;
                    b_ll += c * ll;
                    for j in 0..k {
                        let rj = c * r[j];
                        b0[j] += rj;
                        b1[j] += rj * m1[j];
                        b2[j] += rj * m2[j];
                    }
                }
            }
            for j in 0..k {
                for ((&m, &f), (&s, &sh)) in mass[j][..intervals]
                    .iter()
                    .zip(&first[j][..intervals])
                    .zip(second[j][..intervals].iter().zip(&share[..intervals]))
                {
                    b0[j] += m * sh;
                    b1[j] += f * sh;
                    b2[j] += s * sh;
                }
            }
            loglik.add(b_ll);
            for j in 0..k {
                s0[j].add(b0[j]);
                s1[j].add(b1[j]);
                s2[j].add(b2[j]);
            }
        }
        self.m_step(p, &s0, &s1, &s2, loglik.value())
    }

    /// One point's interval `[lower, upper]` in log space: the log of its probability,
    /// each component's share of it, and the component's moments about its mean on the
    /// interval (in the data's units); `None` when no component gives it a finite log
    /// probability.
    #[allow(clippy::type_complexity)]
    fn cell_in_logs(
        &self,
        p: &Params,
        sd: &[f64; MAX_COMPONENTS],
        ln_w: &[f64; MAX_COMPONENTS],
        lower: f64,
        upper: f64,
    ) -> Option<(
        f64,
        [f64; MAX_COMPONENTS],
        [f64; MAX_COMPONENTS],
        [f64; MAX_COMPONENTS],
    )> {
        let k = p.k;
        let mut ln_p = [0.0; MAX_COMPONENTS];
        let mut m1 = [0.0; MAX_COMPONENTS];
        let mut m2 = [0.0; MAX_COMPONENTS];
        let mut top = f64::NEG_INFINITY;
        for j in 0..k {
            let a = End::at((lower - p.mean[j]) / sd[j]);
            let b = End::at((upper - p.mean[j]) / sd[j]);
            let (ln_z, e1, e2) = between(&a, &b);
            ln_p[j] = ln_w[j] + ln_z;
            m1[j] = sd[j] * e1;
            m2[j] = p.var[j] * e2;
            top = top.max(ln_p[j]);
        }
        if !top.is_finite() {
            return None;
        }
        let mut share = [0.0; MAX_COMPONENTS];
        let mut total = 0.0;
        for j in 0..k {
            share[j] = (ln_p[j] - top).exp();
            total += share[j];
        }
        for v in share.iter_mut().take(k) {
            *v /= total;
        }
        Some((top + total.ln(), share, m1, m2))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The moments by the midpoint rule on a fine grid, for comparison.
    fn quadrature(a: f64, b: f64) -> (f64, f64, f64) {
        let steps = 200_000;
        let h = (b - a) / steps as f64;
        let (mut z, mut s1, mut s2) = (0.0, 0.0, 0.0);
        for i in 0..steps {
            let t = a + (i as f64 + 0.5) * h;
            let f = ln_phi(t).exp() * h;
            z += f;
            s1 += f * t;
            s2 += f * t * t;
        }
        (z.ln(), s1 / z, s2 / z)
    }

    #[test]
    fn moments_agree_with_quadrature_in_every_regime() {
        // Straddling 0, each tail, moderately far out, and narrow intervals; the midpoint
        // rule with 200,000 steps is exact to about 1e-11 relative here.
        for (a, b) in [
            (-0.5, 0.7),
            (0.3, 1.4),
            (-3.0, -2.0),
            (5.0, 5.5),
            (-9.0, -8.7),
            (1.0, 1.00005),
            (-0.00002, 0.00003),
        ] {
            let (l, e1, e2) = interval_moments(a, b);
            let (ql, q1, q2) = quadrature(a, b);
            assert!(
                (l - ql).abs() < 1e-9 * ql.abs().max(1.0),
                "ln Z on [{a}, {b}]: {l} vs {ql}"
            );
            assert!(
                (e1 - q1).abs() < 1e-9 * q1.abs().max(1.0),
                "E[z] on [{a}, {b}]: {e1} vs {q1}"
            );
            assert!(
                (e2 - q2).abs() < 1e-9 * q2.abs().max(1.0),
                "E[z^2] on [{a}, {b}]: {e2} vs {q2}"
            );
        }
    }

    #[test]
    fn far_tails_stay_finite_and_continuous() {
        // Across the switch to log space (Z near 1e-280, a about 35.8) the values move
        // continuously; at a = 60 the conditional mean is just above a (the interval's
        // mass sits at its lower end: E[z] - a is about 1 / a).
        let (l1, e1, _) = interval_moments(35.7, 36.2);
        let (l2, e2, _) = interval_moments(35.8, 36.3);
        assert!(l1.is_finite() && l2.is_finite() && l2 < l1);
        assert!((e2 - e1 - 0.1).abs() < 1e-3, "{e1} {e2}");
        let (l, e, v) = interval_moments(60.0, 61.0);
        // scipy 1.17.1: scipy.stats.norm.logsf(60) = -1805.0135606805675, and Q(61) / Q(60)
        // is below exp(-60), so ln Z equals it to double precision.
        assert!((l - -1805.0135606805675).abs() < 1e-9, "{l}");
        assert!(e > 60.0 && e - 60.0 < 1.0 / 59.0, "{e}");
        assert!(v.is_finite() && v > e * e);
        let (l, e, _) = interval_moments(-61.0, -60.0);
        assert!((l - -1805.0135606805675).abs() < 1e-9 && e < -60.0);
    }

    /// `normal_ends` at one point.
    fn one_end(t: f64) -> (f64, f64) {
        let (mut q, mut f) = ([0.0; LANES], [0.0; LANES]);
        normal_ends(&[t; LANES], &mut q, &mut f);
        (q[0], f[0])
    }

    #[test]
    fn mills_ratio_matches_high_precision_values() {
        // R(t) = Q(t) / phi(t) to 60 digits (Python's decimal, `mills` in
        // tests/python/test_mills_coefficients.py), rounded to doubles; tolerance 4e-16
        // relative (a few units in the last place).
        for (t, r) in [
            (0.0, 1.2533141373155003),
            (0.5, 0.8763644564536923),
            (1.0, 0.6556795424187984),
            (2.0, 0.4213692292880545),
            (5.0, 0.19280810471531576),
            (8.0, 0.1231319632579323),
            (20.0, 0.04987592598183679),
            (37.0, 0.027007327965128336),
        ] {
            let got = mills(&[t; LANES])[0];
            assert!((got - r).abs() <= 4e-16 * r, "R({t}) = {got}, want {r}");
        }
    }

    #[test]
    fn tails_and_densities_match_libm() {
        // Q(|t|) against 0.5 erfc(|t| / sqrt 2) and phi(t) against exp(-t^2 / 2) /
        // sqrt(2 pi), both by the libm crate (a port of FreeBSD's msun, accurate to
        // about 1 ulp; its exp of a rounded -t^2/2 is off by up to t^2 ulps, so the
        // tolerance grows with t: 1e-15 (1 + t^2) relative), at 20,001 points of
        // [-37.5, 37.5] (where phi is a normal double), both signs, and across the
        // split at 5.
        for i in 0..=20_000 {
            let t = -37.5 + 75.0 * f64::from(i) / 20_000.0;
            let (q, f) = one_end(t);
            let want_q = upper(t.abs());
            let want_f = libm::exp(-0.5 * t * t) * FRAC_1_SQRT_2PI;
            let tol = 1e-15 * (1.0 + t * t);
            assert!(
                (q - want_q).abs() <= tol * want_q,
                "Q at {t}: {q} vs {want_q}"
            );
            assert!(
                (f - want_f).abs() <= tol * want_f,
                "phi at {t}: {f} vs {want_f}"
            );
        }
        // Far out both are tiny and finite, never negative.
        for t in [40.0, -60.0, 1e4, -1e300] {
            let (q, f) = one_end(t);
            assert!(
                (0.0..1e-300).contains(&q) && (0.0..1e-300).contains(&f),
                "{t}: {q} {f}"
            );
        }
    }

    #[test]
    fn vector_logarithm_matches_the_standard_one() {
        // Against std's f64::ln (the platform's libm), within 2 ulps of the result, on
        // 10,000 seeded values spread over [1e-250, 2] by their exponent, and on the
        // points where the mantissa crosses sqrt 2.
        let mut rng = crate::stats::rng::SplitMix64::new(3);
        let mut xs: Vec<f64> = (0..10_000)
            .map(|_| 10f64.powf(-250.0 * rng.next_f64()) * (1.0 + rng.next_f64()))
            .collect();
        xs.extend([
            1.0,
            2.0,
            0.5,
            std::f64::consts::SQRT_2,
            std::f64::consts::FRAC_1_SQRT_2,
            1e-250,
        ]);
        for chunk in xs.chunks(LANES) {
            let mut v = [1.0; LANES];
            v[..chunk.len()].copy_from_slice(chunk);
            ln_lanes(&mut v);
            for (&x, &got) in chunk.iter().zip(&v) {
                let want = x.ln();
                let ulp = f64::EPSILON * want.abs().max(f64::MIN_POSITIVE);
                assert!((got - want).abs() <= 2.0 * ulp, "ln {x}: {got} vs {want}");
            }
        }
    }

    /// The grouped pass with every point evaluated in log space (`cell_in_logs`, the
    /// formulas of `between` as the pass used them before it had a direct form).
    fn pass_in_logs(d: &Data, p: &Params, width: f64) -> (f64, Params) {
        let mut sd = [0.0; MAX_COMPONENTS];
        let mut ln_w = [0.0; MAX_COMPONENTS];
        for j in 0..p.k {
            sd[j] = p.var[j].sqrt();
            ln_w[j] = p.weight[j].ln();
        }
        let mut loglik = NeumaierSum::default();
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        for (&x, &c) in d.x.iter().zip(&d.count) {
            let (ll, r, m1, m2) = d
                .cell_in_logs(p, &sd, &ln_w, x - 0.5 * width, x + 0.5 * width)
                .unwrap();
            loglik.add(c * ll);
            for j in 0..p.k {
                s0[j].add(c * r[j]);
                s1[j].add(c * r[j] * m1[j]);
                s2[j].add(c * r[j] * m2[j]);
            }
        }
        d.m_step(p, &s0, &s1, &s2, loglik.value()).unwrap()
    }

    /// Rounded readings for the pass tests: two regimes to 0.1, a wide and a narrow
    /// one, and a far reading so that the grid has gaps and far tails.
    fn rounded_data() -> Data {
        let mut rng = crate::stats::rng::SplitMix64::new(11);
        let mut xs: Vec<f64> = (0..5_000)
            .map(|i| {
                let u = 1.0 - rng.next_f64();
                let z =
                    (-2.0 * u.ln()).sqrt() * (2.0 * std::f64::consts::PI * rng.next_f64()).cos();
                let x = if i % 5 == 0 { 5.0 + z } else { 3.0 + 0.3 * z };
                (x * 10.0).round() / 10.0
            })
            .collect();
        xs.push(40.0);
        Data::new(&xs, crate::stats::resolution::Resolution::Step(0.1)).unwrap()
    }

    /// Parameters of k components spread over the data, one of them narrow.
    fn spread(d: &Data, k: usize) -> Params {
        let mut p = d.quantile_start(k).unwrap();
        p.var[0] = 1e-4;
        p
    }

    #[test]
    fn direct_pass_equals_the_pass_in_log_space() {
        // The direct form (probabilities, one logarithm per point) against every point
        // in log space: the same likelihood and update to 1e-12 relative (rounding
        // only), for k from 1 to 6, along a few EM steps, with a narrow component (its
        // far points fall back to log space) and gaps in the grid.
        let d = rounded_data();
        let width = d.width.unwrap();
        for k in 1..=6 {
            let mut p = spread(&d, k);
            for _ in 0..4 {
                let (ll, next) = d.em_pass_binned(&p, width).unwrap();
                let (ll_ref, next_ref) = pass_in_logs(&d, &p, width);
                assert!(
                    (ll - ll_ref).abs() <= 1e-12 * ll_ref.abs(),
                    "k = {k}: {ll} vs {ll_ref}"
                );
                for j in 0..k {
                    for (a, b) in [
                        (next.weight[j], next_ref.weight[j]),
                        (next.mean[j], next_ref.mean[j]),
                        (next.var[j], next_ref.var[j]),
                    ] {
                        assert!(
                            (a - b).abs() <= 1e-12 * b.abs().max(1.0),
                            "k = {k}: {a} vs {b}"
                        );
                    }
                }
                p = next;
            }
        }
    }

    #[cfg(target_arch = "x86_64")]
    #[test]
    fn avx2_grouped_pass_is_bit_identical() {
        // As `avx2_pass_is_bit_identical` for the exact pass. Skipped without AVX2.
        if !std::arch::is_x86_feature_detected!("avx2") {
            return;
        }
        let d = rounded_data();
        let width = d.width.unwrap();
        for k in 1..=6 {
            let mut p = spread(&d, k);
            for _ in 0..3 {
                #[allow(unsafe_code)]
                // SAFETY: AVX2 was detected above.
                let fast = unsafe { d.em_pass_binned_avx2(&p, width) }.unwrap();
                let plain = d.em_pass_binned_portable(&p, width).unwrap();
                assert_eq!(fast.0.to_bits(), plain.0.to_bits());
                for j in 0..k {
                    assert_eq!(fast.1.weight[j].to_bits(), plain.1.weight[j].to_bits());
                    assert_eq!(fast.1.mean[j].to_bits(), plain.1.mean[j].to_bits());
                    assert_eq!(fast.1.var[j].to_bits(), plain.1.var[j].to_bits());
                }
                p = plain.1;
            }
        }
    }
}
