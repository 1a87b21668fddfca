//! A safeguarded one-dimensional root finder.
//!
//! [`solve_increasing`] finds the zero of an increasing function from a bracket
//! `[lo, hi]` with `f(lo) <= 0 <= f(hi)`, taking Newton steps where they stay inside the
//! bracket and shrink fast enough, and bisection steps otherwise. Every evaluation moves
//! one end of the bracket, so it converges whatever the shape of the function: the Newton
//! steps only make it fast. This is the method of `rtsafe` in Press, Teukolsky, Vetterling
//! and Flannery, *Numerical Recipes* (3rd ed., 2007), section 9.4.
//!
//! It solves the shape equations of the gamma and Weibull maximum-likelihood fits
//! ([`crate::stats::fit`]); [`invert_cdf`] builds on it to compute quantiles of mixtures
//! ([`crate::stats::mixture`]) and to refine approximate quantiles to the root of their
//! own cdf.

/// At most this many evaluations; bisection alone halves a bracket of doubles to one ulp
/// in far fewer (about 2100 halvings separate the largest double from the smallest, but
/// every bracket used here is finite and the Newton steps converge long before).
const MAX_EVALUATIONS: usize = 400;

/// Finds `x` in `[lo, hi]` with `f(x) = 0` for an increasing `f`.
///
/// `f` returns the value and the derivative at `x`. The caller guarantees
/// `f(lo) <= 0 <= f(hi)` and that both ends are finite; `start` is a first guess (a guess
/// outside the bracket is replaced by its midpoint). The result is within a few units in
/// the last place of the root, or the best point found after 400 evaluations. A NaN value
/// or derivative is treated as "take a bisection step", so the result is never NaN when
/// the bracket is finite.
///
/// # Example
/// ```
/// use ogive::stats::roots::solve_increasing;
/// // The cube root of 2: x^3 - 2 = 0 on [0, 2].
/// let x = solve_increasing(|x| (x * x * x - 2.0, 3.0 * x * x), 0.0, 2.0, 1.0);
/// assert!((x - 2f64.cbrt()).abs() <= 1e-15);
/// ```
pub fn solve_increasing<F>(mut f: F, mut lo: f64, mut hi: f64, start: f64) -> f64
where
    F: FnMut(f64) -> (f64, f64),
{
    if lo >= hi {
        return lo;
    }
    let mut x = if start > lo && start < hi {
        start
    } else {
        lo + 0.5 * (hi - lo)
    };
    // Length of the step before last: a Newton step must at least halve it.
    let mut step_before = hi - lo;
    let mut step = step_before;
    for _ in 0..MAX_EVALUATIONS {
        let (value, slope) = f(x);
        if value == 0.0 {
            return x;
        }
        if value < 0.0 {
            lo = x;
        } else if value > 0.0 {
            hi = x;
        }
        let newton = x - value / slope;
        let newton_ok =
            newton > lo && newton < hi && (2.0 * value).abs() <= (step_before * slope).abs();
        step_before = step;
        let next = if newton_ok {
            newton
        } else {
            lo + 0.5 * (hi - lo)
        };
        step = (next - x).abs();
        let tolerance = 2.0 * f64::EPSILON * next.abs().max(f64::MIN_POSITIVE);
        if step <= tolerance || next <= lo || next >= hi {
            return next.clamp(lo, hi);
        }
        x = next;
    }
    x
}

/// Solves `cdf(t) = p` for an increasing `cdf` with density `pdf`, starting from an
/// interval `[lo, hi]` believed to hold the root (`lo = hi` for a single guess). The
/// interval is widened geometrically until the cdf brackets p, never below `floor` (the
/// lower end of the support, where the cdf is 0), then [`solve_increasing`] finishes.
/// When no bracket is found within the doubles the midpoint of the guess is returned.
///
/// # Example
/// ```
/// use ogive::stats::roots::invert_cdf;
/// // The exponential cdf 1 - exp(-t) from a rough guess: the root is ln 2.
/// let t = invert_cdf(|t| -(-t).exp_m1(), |t| (-t).exp(), 0.5, 0.6, 0.6, 0.0);
/// assert!((t - 2f64.ln()).abs() < 1e-15);
/// ```
pub fn invert_cdf<C, D>(cdf: C, pdf: D, p: f64, lo: f64, hi: f64, floor: f64) -> f64
where
    C: Fn(f64) -> f64,
    D: Fn(f64) -> f64,
{
    let guess = lo + 0.5 * (hi - lo);
    let first = (hi - lo)
        .max(1e-9 * (lo.abs() + hi.abs()))
        .max(f64::MIN_POSITIVE);
    let (mut a, mut width) = (lo, first);
    let mut steps = 0;
    while a > floor && cdf(a) > p && steps < 1100 {
        a = (lo - width).max(floor);
        width *= 16.0;
        steps += 1;
    }
    let (mut b, mut width) = (hi, first);
    steps = 0;
    while b.is_finite() && cdf(b) < p && steps < 1100 {
        b = hi + width;
        width *= 16.0;
        steps += 1;
    }
    if !(a.is_finite() && b.is_finite()) || cdf(a) > p || cdf(b) < p {
        return guess;
    }
    solve_increasing(|t| (cdf(t) - p, pdf(t)), a, b, guess)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn finds_square_root_to_the_last_bit() {
        // Expected value: the correctly rounded sqrt(2) of IEEE 754 (exact arithmetic).
        let x = solve_increasing(|x| (x * x - 2.0, 2.0 * x), 0.0, 4.0, 3.9);
        assert!((x - 2f64.sqrt()).abs() <= 2.0 * f64::EPSILON);
    }

    #[test]
    fn survives_a_flat_function_by_bisection() {
        // A step function has zero slope everywhere: only bisection can find the jump
        // at 0.3 (exact by construction); tolerance: one part in 1e15 of the bracket.
        let x = solve_increasing(|x| (if x < 0.3 { -1.0 } else { 1.0 }, 0.0), 0.0, 1.0, 0.9);
        assert!((x - 0.3).abs() <= 1e-15, "{x}");
    }

    #[test]
    fn root_at_zero() {
        // f(x) = x^3 + x has its only root at 0 (exact).
        let x = solve_increasing(|x| (x * x * x + x, 3.0 * x * x + 1.0), -1.0, 3.0, 2.5);
        assert!(x.abs() <= 1e-300, "{x}");
    }

    #[test]
    fn nan_derivative_falls_back_to_bisection() {
        // Root of x - 0.25 (exact); the derivative is useless.
        let x = solve_increasing(|x| (x - 0.25, f64::NAN), 0.0, 1.0, 0.5);
        assert!((x - 0.25).abs() <= 1e-15, "{x}");
    }
}
