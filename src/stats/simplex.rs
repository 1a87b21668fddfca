//! Derivative-free maximisation in a few dimensions: the Nelder-Mead simplex method.
//!
//! [`maximise`] climbs a function of up to [`MAX_DIM`] variables by the simplex method of
//! Nelder and Mead (1965, "A simplex method for function minimization", Computer
//! Journal 7), with the standard coefficients (reflection 1, expansion 2, contraction
//! 1/2, shrink 1/2) and the ordering and tie rules of Lagarias, Reeds, Wright and Wright
//! (1998, "Convergence properties of the Nelder-Mead simplex method in low dimensions",
//! SIAM J. Optim. 9). A run stops when the values at the simplex's vertices agree to
//! `tolerance` (relative to the best value, plus `tolerance` absolute) and its vertices
//! to `sqrt(tolerance)` relative to their size (or to the first step, when larger); the method is then restarted from the best
//! point with a fresh simplex of the first size, and the result is kept once a restart
//! gains nothing beyond the tolerance, which guards against the simplex collapsing
//! early (the remedy suggested by Nelder and Mead themselves). A value of `-inf` or NaN
//! marks a point outside the domain: such a vertex is always the worst.
//!
//! The likelihoods of rounded and censored readings ([`crate::stats::readings`]) are
//! smooth functions of two parameters at most, where this method is reliable and needs
//! no derivatives of incomplete gamma functions.

/// The most variables.
pub const MAX_DIM: usize = 2;

/// The outcome of [`maximise`].
#[derive(Debug, Clone, Copy, PartialEq)]
pub struct Climb {
    /// The best point, in its first `dim` coordinates.
    pub point: [f64; MAX_DIM],
    /// The function's value there.
    pub value: f64,
    /// Function evaluations made.
    pub evaluations: u32,
    /// Whether the stopping rule was met within the evaluation budget.
    pub converged: bool,
}

/// Restarts after the first run, at most.
const RESTARTS: usize = 6;

/// Maximises `f` over `dim <= MAX_DIM` variables from `start`, with a first simplex of
/// `start` and `start + step_i e_i`, to `tolerance` (see the [module documentation](self)),
/// in at most `budget` evaluations in all. A value that is NaN counts as `-inf`.
///
/// # Example
/// ```
/// use ogive::stats::simplex::maximise;
/// // The peak of -(x - 1)^2 - 10 (y + 2)^2 is at (1, -2).
/// let c = maximise(|p| -(p[0] - 1.0).powi(2) - 10.0 * (p[1] + 2.0).powi(2), &[0.0, 0.0], &[0.5, 0.5], 1e-14, 10_000);
/// assert!(c.converged);
/// assert!((c.point[0] - 1.0).abs() < 1e-6 && (c.point[1] + 2.0).abs() < 1e-6);
/// ```
pub fn maximise(
    mut f: impl FnMut(&[f64]) -> f64,
    start: &[f64],
    step: &[f64],
    tolerance: f64,
    budget: u32,
) -> Climb {
    let dim = start.len().min(MAX_DIM);
    let mut evaluations = 0u32;
    let mut eval = |p: &[f64; MAX_DIM], evaluations: &mut u32| {
        *evaluations += 1;
        let v = f(&p[..dim]);
        if v.is_nan() { f64::NEG_INFINITY } else { v }
    };
    let mut best = [0.0; MAX_DIM];
    best[..dim].copy_from_slice(&start[..dim]);
    let mut best_value = eval(&best, &mut evaluations);
    let mut converged = false;
    for run in 0..=RESTARTS {
        let (point, value, met) = one_run(
            &mut eval,
            &mut evaluations,
            dim,
            best,
            step,
            tolerance,
            budget,
        );
        let gain = value - best_value;
        if value >= best_value {
            best = point;
            best_value = value;
        }
        converged = met;
        let settled = run > 0 && (gain.is_nan() || gain <= tolerance * (best_value.abs() + 1.0));
        if !met || settled || evaluations >= budget {
            break;
        }
    }
    Climb {
        point: best,
        value: best_value,
        evaluations,
        converged,
    }
}

/// One Nelder-Mead run from `start`: the best vertex, its value, and whether the
/// stopping rule was met.
fn one_run(
    eval: &mut impl FnMut(&[f64; MAX_DIM], &mut u32) -> f64,
    evaluations: &mut u32,
    dim: usize,
    start: [f64; MAX_DIM],
    step: &[f64],
    tolerance: f64,
    budget: u32,
) -> ([f64; MAX_DIM], f64, bool) {
    let n = dim + 1;
    let mut vertex = [[0.0; MAX_DIM]; MAX_DIM + 1];
    let mut value = [f64::NEG_INFINITY; MAX_DIM + 1];
    for (i, v) in vertex.iter_mut().enumerate().take(n) {
        *v = start;
        if i > 0 {
            v[i - 1] += step[i - 1];
        }
    }
    for i in 0..n {
        value[i] = eval(&vertex[i], evaluations);
    }
    let point_at = |centre: &[f64; MAX_DIM], worst: &[f64; MAX_DIM], t: f64| {
        let mut p = [0.0; MAX_DIM];
        for d in 0..dim {
            p[d] = centre[d] + t * (worst[d] - centre[d]);
        }
        p
    };
    loop {
        // Best first; ties keep their order (Lagarias et al.).
        let mut order: [usize; MAX_DIM + 1] = [0, 1, 2];
        order[..n].sort_by(|&a, &b| value[b].total_cmp(&value[a]));
        let (v0, vals0) = (vertex, value);
        for (slot, &i) in order[..n].iter().enumerate() {
            vertex[slot] = v0[i];
            value[slot] = vals0[i];
        }
        let (best, worst) = (value[0], value[n - 1]);
        let spread_ok = best.is_finite() && (best - worst) <= tolerance * (best.abs() + 1.0);
        let size_ok = (1..n).all(|i| {
            (0..dim).all(|d| {
                let size = vertex[0][d].abs().max(step[d].abs());
                (vertex[i][d] - vertex[0][d]).abs() <= tolerance.sqrt() * size
            })
        });
        if spread_ok && size_ok {
            return (vertex[0], best, true);
        }
        if *evaluations >= budget {
            return (vertex[0], best, false);
        }
        let mut centre = [0.0; MAX_DIM];
        for v in vertex.iter().take(n - 1) {
            for d in 0..dim {
                centre[d] += v[d] / (n - 1) as f64;
            }
        }
        let worst_point = vertex[n - 1];
        let reflected = point_at(&centre, &worst_point, -1.0);
        let fr = eval(&reflected, evaluations);
        if fr > value[0] {
            let expanded = point_at(&centre, &worst_point, -2.0);
            let fe = eval(&expanded, evaluations);
            (vertex[n - 1], value[n - 1]) = if fe > fr {
                (expanded, fe)
            } else {
                (reflected, fr)
            };
            continue;
        }
        if fr > value[n - 2] {
            (vertex[n - 1], value[n - 1]) = (reflected, fr);
            continue;
        }
        // Contract: outside when the reflection beat the worst vertex, inside otherwise.
        let (t, bar) = if fr > value[n - 1] {
            (-0.5, fr)
        } else {
            (0.5, value[n - 1])
        };
        let contracted = point_at(&centre, &worst_point, t);
        let fc = eval(&contracted, evaluations);
        if fc >= bar && fc > f64::NEG_INFINITY {
            (vertex[n - 1], value[n - 1]) = (contracted, fc);
            continue;
        }
        // Shrink towards the best vertex.
        #[allow(clippy::needless_range_loop)] // vertex[0] is read while vertex[i] changes
        for i in 1..n {
            for d in 0..dim {
                vertex[i][d] = vertex[0][d] + 0.5 * (vertex[i][d] - vertex[0][d]);
            }
            value[i] = eval(&vertex[i], evaluations);
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn rosenbrock_valley() {
        // The Rosenbrock function (Rosenbrock 1960), maximum 0 at (1, 1): a curved
        // valley where simplex methods are known to be slow but to converge.
        let c = maximise(
            |p| -(100.0 * (p[1] - p[0] * p[0]).powi(2) + (1.0 - p[0]).powi(2)),
            &[-1.2, 1.0],
            &[0.1, 0.1],
            1e-15,
            20_000,
        );
        assert!(c.converged, "{c:?}");
        // Tolerance 1e-5: the stopping rule on values of 1e-15 leaves the point about
        // sqrt(1e-15) from the optimum along the flat valley.
        assert!(
            (c.point[0] - 1.0).abs() < 1e-5 && (c.point[1] - 1.0).abs() < 1e-5,
            "{c:?}"
        );
    }

    #[test]
    fn one_dimension_and_a_domain_edge() {
        // ln x - x has its maximum -1 at x = 1; outside x > 0 the value is NaN (treated
        // as -inf), and the start's simplex reaches into it.
        let c = maximise(|p| p[0].ln() - p[0], &[0.05], &[-0.1], 1e-15, 5_000);
        assert!(c.converged);
        assert!(
            (c.point[0] - 1.0).abs() < 1e-6 && (c.value + 1.0).abs() < 1e-14,
            "{c:?}"
        );
    }

    #[test]
    fn budget_is_honoured() {
        let c = maximise(|p| -(p[0] - 1e6).abs(), &[0.0], &[1.0], 1e-15, 50);
        assert!(!c.converged && c.evaluations <= 52, "{c:?}");
    }
}
