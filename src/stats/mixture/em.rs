//! EM in standardised units: the parameters, one pass (portable and AVX2), SQUAREM cycles.

use super::data::Data;
use super::*;
use crate::stats::sum::NeumaierSum;

/// Mixture parameters in standardised units, in fixed arrays.
#[derive(Debug, Clone, Copy)]
pub(super) struct Params {
    pub(super) k: usize,
    pub(super) weight: [f64; MAX_COMPONENTS],
    pub(super) mean: [f64; MAX_COMPONENTS],
    pub(super) var: [f64; MAX_COMPONENTS],
}

/// A difference of two [`Params`] in the coordinates SQUAREM extrapolates in: log
/// weights, means, log variances (so that extrapolated weights and variances stay
/// positive).
#[derive(Debug, Clone, Copy)]
pub(super) struct Step {
    pub(super) k: usize,
    pub(super) log_weight: [f64; MAX_COMPONENTS],
    pub(super) mean: [f64; MAX_COMPONENTS],
    pub(super) log_var: [f64; MAX_COMPONENTS],
}

impl Params {
    /// Whether two parameter sets are identical.
    pub(super) fn same_as(&self, other: &Params) -> bool {
        self.k == other.k
            && (0..self.k).all(|j| {
                self.weight[j] == other.weight[j]
                    && self.mean[j] == other.mean[j]
                    && self.var[j] == other.var[j]
            })
    }

    /// `self - other` in extrapolation coordinates.
    pub(super) fn minus(&self, other: &Params) -> Step {
        let mut d = Step {
            k: self.k,
            log_weight: [0.0; MAX_COMPONENTS],
            mean: [0.0; MAX_COMPONENTS],
            log_var: [0.0; MAX_COMPONENTS],
        };
        for j in 0..self.k {
            d.log_weight[j] = (self.weight[j] / other.weight[j]).ln();
            d.mean[j] = self.mean[j] - other.mean[j];
            d.log_var[j] = (self.var[j] / other.var[j]).ln();
        }
        d
    }

    /// `self - 2 alpha r + alpha^2 v` in extrapolation coordinates, weights renormalised
    /// and variances floored; `None` when it leaves the doubles.
    pub(super) fn extrapolate(&self, r: &Step, v: &Step, alpha: f64) -> Option<Params> {
        let mut p = *self;
        let mut total = 0.0;
        for j in 0..self.k {
            let move_by = |r: f64, v: f64| -2.0 * alpha * r + alpha * alpha * v;
            p.weight[j] = self.weight[j] * move_by(r.log_weight[j], v.log_weight[j]).exp();
            p.mean[j] = self.mean[j] + move_by(r.mean[j], v.mean[j]);
            p.var[j] =
                (self.var[j] * move_by(r.log_var[j], v.log_var[j]).exp()).max(VARIANCE_FLOOR);
            total += p.weight[j];
        }
        for w in p.weight.iter_mut().take(self.k) {
            *w /= total;
        }
        let finite =
            (0..self.k).all(|j| p.weight[j] > 0.0 && p.mean[j].is_finite() && p.var[j].is_finite());
        finite.then_some(p)
    }
}

impl Step {
    /// `self - other`.
    pub(super) fn minus(&self, other: &Step) -> Step {
        let mut d = *self;
        for j in 0..self.k {
            d.log_weight[j] -= other.log_weight[j];
            d.mean[j] -= other.mean[j];
            d.log_var[j] -= other.log_var[j];
        }
        d
    }

    /// The Euclidean norm.
    pub(super) fn norm(&self) -> f64 {
        (0..self.k)
            .map(|j| self.log_weight[j].powi(2) + self.mean[j].powi(2) + self.log_var[j].powi(2))
            .sum::<f64>()
            .sqrt()
    }
}

/// An EM run: its parameters and their log-likelihood (standardised units, without the
/// `-n ln(2 pi) / 2` constant).
#[derive(Debug, Clone, Copy)]
pub(super) struct Run {
    pub(super) params: Params,
    pub(super) loglik: f64,
    pub(super) iterations: u32,
    pub(super) converged: bool,
    /// The tolerance it was run to.
    pub(super) tolerance: f64,
}

impl Data {
    /// Runs EM from `start` until the estimated gap between the log-likelihood and its
    /// maximum is below `tolerance` per value, or `limit` passes in all (counting `done`
    /// already made). `None` when plain EM loses a component.
    ///
    /// Each cycle is accelerated by SQUAREM (Varadhan and Roland 2008, "Simple and
    /// globally convergent methods for accelerating the convergence of any EM
    /// algorithm", Scand. J. Statist. 35, scheme S3): from `p0`, two EM steps give `p1`
    /// and `p2`; with `r = p1 - p0`, `v = p2 - 2 p1 + p0` and `a = -|r| / |v|` the point
    /// `p0 - 2 a r + a^2 v` (in log weights, means and log variances) is tried, and kept
    /// only when its log-likelihood is at least that of `p1`, halving the extrapolation
    /// towards plain EM (`a = -1` gives `p2`) otherwise. One EM step from the kept point
    /// ends the cycle. Every cycle therefore raises the likelihood, as plain EM does, and
    /// the fixed points are those of EM.
    pub(super) fn em(&self, start: Params, done: u32, limit: u32, tolerance: f64) -> Option<Run> {
        let limit = limit.min(done.saturating_add(self.pass_budget(start.k)));
        let mut passes = done;
        let (mut ll0, mut p1) = self.em_pass(&start)?;
        passes += 1;
        let mut p0 = start;
        let stop = |p: Params, loglik: f64, passes: u32, converged: bool, met: f64| {
            Some(Run {
                params: p,
                loglik,
                iterations: passes,
                converged,
                tolerance: met,
            })
        };
        loop {
            // A cancelled fit ends here, unconverged; the caller reports it.
            if passes + 2 > limit || crate::stats::cancel::requested() {
                return stop(p0, ll0, passes, false, tolerance);
            }
            let (ll1, p2) = self.em_pass(&p1)?;
            passes += 1;
            // How far p0 is from the optimum: near it, plain EM converges linearly, its
            // steps shrinking by a rate rho (estimated from two successive steps) and the
            // gaps in log-likelihood by rho^2, so the gap at p0 is about
            // (ll(p1) - ll(p0)) / (1 - rho^2) (the reasoning of Aitken's extrapolation;
            // Bohning, Dietz, Schaub, Schlattmann and Lindsay 1994, Ann. Inst. Statist.
            // Math. 46). A slowly converging run stops only when that is small.
            let first_rise = ll1 - ll0;
            let rho = p2.minus(&p1).norm() / p1.minus(&p0).norm();
            let gap = if first_rise <= 0.0 {
                0.0
            } else if rho < 1.0 {
                first_rise / (1.0 - rho * rho)
            } else {
                f64::INFINITY
            };
            if gap < tolerance * self.total && first_rise > 0.0 && rho <= EARLY_RATE {
                // p0 was within the tolerance, and p1, one EM step on, is at least as
                // good (up to rounding). A run started near its end, as the winner
                // coming from the thinned copy is, stops after two passes. Only when
                // EM converges fast: then the estimate is at most 4/3 of the measured
                // rise, so a misjudged rate matters little. A slow run (a flat ridge of
                // the likelihood, where two steps misjudge the rate) completes the
                // cycle below, whose extrapolation can still gain much. The run is
                // marked with the strict tolerance too when it meets that one.
                let met = if gap < TOLERANCE * self.total {
                    tolerance.min(TOLERANCE)
                } else {
                    tolerance
                };
                return if ll1 >= ll0 {
                    stop(p1, ll1, passes, true, met)
                } else {
                    stop(p0, ll0, passes, true, met)
                };
            }
            let mut next = p2;
            let (r, v) = (p1.minus(&p0), p2.minus(&p1).minus(&p1.minus(&p0)));
            let (nr, nv) = (r.norm(), v.norm());
            let mut alpha = if nv > 0.0 { -nr / nv } else { -1.0 };
            for _ in 0..MAX_BACKTRACKS {
                if alpha.is_nan() || alpha >= -1.0 {
                    break;
                }
                if let Some(trial) = p0.extrapolate(&r, &v, alpha)
                    && let Some((ll, stepped)) = self.em_pass(&trial)
                {
                    passes += 1;
                    if ll >= ll0 {
                        next = stepped;
                        break;
                    }
                }
                alpha = (alpha - 1.0) / 2.0;
            }
            let (ll, after) = self.em_pass(&next)?;
            passes += 1;
            if ll < ll0 {
                // A rounding-level fall keeps the earlier point.
                return stop(p0, ll0, passes, true, tolerance);
            }
            if gap < tolerance * self.total {
                // p0 was within the tolerance; the cycle's end is better still.
                return stop(next, ll, passes, true, tolerance);
            }
            (p0, ll0, p1) = (next, ll, after);
        }
    }

    /// The most passes one run may make over these points with k components: enough for
    /// [`WORK_PER_RUN`] point-component evaluations, and at least [`MIN_RUN_PASSES`]. A
    /// run that reaches it ends unconverged (`converged: false`), so a slowly converging
    /// fit over many distinct values (two nearly identical components) ends in bounded
    /// time and says so.
    pub(super) fn pass_budget(&self, k: usize) -> u32 {
        let per_pass = (self.x.len() * k.max(1)) as f64;
        (WORK_PER_RUN / per_pass).clamp(f64::from(MIN_RUN_PASSES), f64::from(u32::MAX)) as u32
    }

    /// One pass: the log-likelihood of `p` and the EM update of `p`. Sums run in blocks
    /// of [`BLOCK`] points, each block's plain sum added to a compensated total.
    ///
    /// On x86-64 processors with AVX2 the same code runs compiled for AVX2, four lanes
    /// of doubles instead of SSE2's two. The result is the same to the bit: the lanes
    /// only carry element-wise operations (IEEE 754 rounds each the same way at any
    /// width), sums stay in their written order, and Rust never fuses a multiply and an
    /// add on its own.
    pub(super) fn em_pass(&self, p: &Params) -> Option<(f64, Params)> {
        if let Some(width) = self.width {
            return self.em_pass_binned(p, width);
        }
        #[cfg(target_arch = "x86_64")]
        if std::arch::is_x86_feature_detected!("avx2") {
            // The one justified `unsafe` of the mathematics: a run-time dispatch.
            #[allow(unsafe_code)]
            // SAFETY: `em_pass_avx2` requires only AVX2, which this processor has.
            return unsafe { self.em_pass_avx2(p) };
        }
        self.em_pass_portable(p)
    }

    /// [`Data::em_pass`] compiled for AVX2.
    #[cfg(target_arch = "x86_64")]
    #[target_feature(enable = "avx2")]
    pub(super) fn em_pass_avx2(&self, p: &Params) -> Option<(f64, Params)> {
        self.em_pass_portable(p)
    }

    /// The body of [`Data::em_pass`], inlined into each compiled form.
    #[inline(always)]
    pub(super) fn em_pass_portable(&self, p: &Params) -> Option<(f64, Params)> {
        let k = p.k;
        let mut log_norm = [0.0; MAX_COMPONENTS];
        let mut precision = [0.0; MAX_COMPONENTS];
        for j in 0..k {
            log_norm[j] = p.weight[j].ln() - 0.5 * p.var[j].ln();
            precision[j] = 1.0 / p.var[j];
        }
        let mut loglik = NeumaierSum::default();
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        // The block is worked component by component over arrays, so that the compiler
        // can run the exponentials of several points at once.
        let mut e = [[0.0; BLOCK]; MAX_COMPONENTS];
        for (xs, cs) in self.x.chunks(BLOCK).zip(self.count.chunks(BLOCK)) {
            let len = xs.len();
            let mut top = [f64::NEG_INFINITY; BLOCK];
            for j in 0..k {
                let (mean, norm, prec) = (p.mean[j], log_norm[j], precision[j]);
                for ((ej, t), &x) in e[j][..len].iter_mut().zip(&mut top).zip(xs) {
                    let d = x - mean;
                    *ej = norm - 0.5 * d * d * prec;
                    *t = t.max(*ej);
                }
            }
            let mut total = [0.0; BLOCK];
            for ej in e.iter_mut().take(k) {
                for ((v, t), sum) in ej[..len].iter_mut().zip(&top).zip(&mut total) {
                    *v = exp_nonpositive(*v - t);
                    *sum += *v;
                }
            }
            let mut b_ll = 0.0;
            // The product of the normalisers of single points: one logarithm per block
            // instead of one per point.
            let mut product = 1.0;
            let mut share = [0.0; BLOCK];
            for (((&c, &t), &sum), sh) in cs.iter().zip(&top).zip(&total).zip(&mut share) {
                if c == 1.0 {
                    b_ll += t;
                    product *= sum;
                } else {
                    b_ll += c * (t + sum.ln());
                }
                *sh = c / sum;
            }
            loglik.add(b_ll + product.ln());
            for j in 0..k {
                let mean = p.mean[j];
                let (mut b0, mut b1, mut b2) = (0.0, 0.0, 0.0);
                for ((&v, &sh), &x) in e[j][..len].iter().zip(&share).zip(xs) {
                    let r = v * sh;
                    let d = x - mean;
                    b0 += r;
                    b1 += r * d;
                    b2 += r * d * d;
                }
                s0[j].add(b0);
                s1[j].add(b1);
                s2[j].add(b2);
            }
        }
        self.m_step(p, &s0, &s1, &s2, loglik.value())
    }

    /// The M-step shared by the exact and the grouped passes: from each component's
    /// weighted count `s0`, first and second moments about its current mean `s1`, `s2`,
    /// the next parameters (variances floored), with the pass's log-likelihood; `None`
    /// when a component is lost or the log-likelihood is not finite.
    pub(super) fn m_step(
        &self,
        p: &Params,
        s0: &[NeumaierSum; MAX_COMPONENTS],
        s1: &[NeumaierSum; MAX_COMPONENTS],
        s2: &[NeumaierSum; MAX_COMPONENTS],
        loglik: f64,
    ) -> Option<(f64, Params)> {
        let mut next = *p;
        for j in 0..p.k {
            let w = s0[j].value();
            if w.is_nan() || w <= LOST_WEIGHT * self.total {
                return None;
            }
            let shift = s1[j].value() / w;
            next.weight[j] = w / self.total;
            next.mean[j] = p.mean[j] + shift;
            next.var[j] = (s2[j].value() / w - shift * shift).max(VARIANCE_FLOOR);
        }
        loglik.is_finite().then_some((loglik, next))
    }
}

/// `exp(x)` for `x <= 0`, inlined so that loops over arrays vectorise: `x = n ln 2 + r`
/// with `|r| <= ln 2 / 2` (Cody and Waite's two-part ln 2), `exp(r)` by its Taylor
/// series to degree 13 (truncation below 4e-18 relative), scaled by `2^n` through the
/// exponent bits. Within a few units in the last place of the exact value; below
/// `-708` (where `exp` nears the smallest normal number) it returns `exp(-708)`, which
/// next to the term `exp(0) = 1` that every use adds is nothing.
#[inline(always)]
pub(super) fn exp_nonpositive(x: f64) -> f64 {
    let mut v = [x];
    exp_nonpositive_lanes(&mut v);
    v[0]
}

/// [`exp_nonpositive`] of every element, in place, the same to the bit: the loop over
/// the series' coefficients outside, the one over the elements inside, so that the
/// elements' chains of dependent steps interleave.
#[inline(always)]
pub(super) fn exp_nonpositive_lanes<const L: usize>(xs: &mut [f64; L]) {
    // ln 2 split as in fdlibm's e_exp.c: the high part has trailing zero bits, so
    // n * LN2_HI is exact for the n that occur here.
    const LN2_HI: f64 = f64::from_bits(0x3fe6_2e42_fee0_0000);
    const LN2_LO: f64 = f64::from_bits(0x3dea_39ef_3579_3c76);
    // 1.5 * 2^52: adding it rounds to an integer held in the low bits of the mantissa.
    const SHIFTER: f64 = 6_755_399_441_055_744.0;
    let (mut t, mut r) = ([0.0; L], [0.0; L]);
    for l in 0..L {
        let x = xs[l].max(-708.0);
        t[l] = x * std::f64::consts::LOG2_E + SHIFTER;
        let n = t[l] - SHIFTER;
        r[l] = (x - n * LN2_HI) - n * LN2_LO;
    }
    let mut poly = [1.0 / 6_227_020_800.0; L];
    for d in [
        479_001_600.0,
        39_916_800.0,
        3_628_800.0,
        362_880.0,
        40_320.0,
        5_040.0,
        720.0,
        120.0,
        24.0,
        6.0,
        2.0,
        1.0,
        1.0,
    ] {
        for l in 0..L {
            poly[l] = poly[l] * r[l] + 1.0 / d;
        }
    }
    for l in 0..L {
        let scale = f64::from_bits(
            (t[l]
                .to_bits()
                .wrapping_sub(SHIFTER.to_bits())
                .wrapping_add(1023))
                << 52,
        );
        xs[l] = poly[l] * scale;
    }
}
