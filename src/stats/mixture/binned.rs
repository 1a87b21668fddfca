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

use super::data::Data;
use super::em::Params;
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

impl Data {
    /// [`Data::em_pass`] for grouped data: one pass over the merged points, each an
    /// interval of width `width` around it, giving the grouped log-likelihood of `p` (a
    /// sum of `count ln P`, no constant left out) and the EM update of McLachlan and
    /// Jones.
    pub(super) fn em_pass_binned(&self, p: &Params, width: f64) -> Option<(f64, Params)> {
        let k = p.k;
        let mut sd = [0.0; MAX_COMPONENTS];
        let mut ln_w = [0.0; MAX_COMPONENTS];
        for j in 0..k {
            sd[j] = p.var[j].sqrt();
            ln_w[j] = p.weight[j].ln();
        }
        let mut loglik = NeumaierSum::default();
        let mut s0 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s1 = [NeumaierSum::default(); MAX_COMPONENTS];
        let mut s2 = [NeumaierSum::default(); MAX_COMPONENTS];
        let half = 0.5 * width;
        let mut ln_p = [0.0; MAX_COMPONENTS];
        let mut m1 = [0.0; MAX_COMPONENTS];
        let mut m2 = [0.0; MAX_COMPONENTS];
        let blank = End {
            t: 0.0,
            tail: 0.5,
            phi: 0.0,
        };
        let mut last_upper = [blank; MAX_COMPONENTS];
        let mut last_top = f64::NAN;
        for (&x, &c) in self.x.iter().zip(&self.count) {
            let mut top = f64::NEG_INFINITY;
            // Adjacent grid values share an end (to rounding: the grid check allows
            // readings a little off it, and the standardisation rounds).
            let shared = (x - half - last_top).abs() <= 1e-9 * width;
            last_top = x + half;
            for j in 0..k {
                let lower = if shared {
                    last_upper[j]
                } else {
                    End::at((x - half - p.mean[j]) / sd[j])
                };
                let upper_end = End::at((x + half - p.mean[j]) / sd[j]);
                last_upper[j] = upper_end;
                let (ln_z, e1, e2) = between(&lower, &upper_end);
                ln_p[j] = ln_w[j] + ln_z;
                // Moments about the component's mean, in the data's units.
                m1[j] = sd[j] * e1;
                m2[j] = p.var[j] * e2;
                top = top.max(ln_p[j]);
            }
            if !top.is_finite() {
                return None;
            }
            let total: f64 = ln_p[..k].iter().map(|&l| (l - top).exp()).sum();
            loglik.add(c * (top + total.ln()));
            for j in 0..k {
                let r = c * (ln_p[j] - top).exp() / total;
                s0[j].add(r);
                s1[j].add(r * m1[j]);
                s2[j].add(r * m2[j]);
            }
        }
        let mut next = *p;
        for j in 0..k {
            let w = s0[j].value();
            if w.is_nan() || w <= LOST_WEIGHT * self.total {
                return None;
            }
            let shift = s1[j].value() / w;
            next.weight[j] = w / self.total;
            next.mean[j] = p.mean[j] + shift;
            next.var[j] = (s2[j].value() / w - shift * shift).max(VARIANCE_FLOOR);
        }
        let ll = loglik.value();
        ll.is_finite().then_some((ll, next))
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
}
