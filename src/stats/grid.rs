//! Evenly spaced grids, for curves (`dist_curve`) and histogram bin edges.
//!
//! [`linspace`] does the arithmetic of `numpy.linspace(lo, hi, n)` step for step (point
//! `i` is `i * step + lo` with `step = (hi - lo) / (n - 1)`, and the last point is `hi`
//! exactly), so grids and bin edges agree with numpy's to the last bit.

use super::StatsError;

/// The most points a grid may have.
pub const MAX_POINTS: i64 = 1_000_000;

/// Checks the ends and size of a grid and returns the size.
///
/// # Errors
/// [`StatsError::BadGridRange`] unless `lo` and `hi` are finite with `lo < hi` and a finite
/// difference; [`StatsError::BadGridSize`] unless `2 <= n <= MAX_POINTS`.
///
/// # Example
/// ```
/// use ogive::stats::grid::check_grid;
/// assert_eq!(check_grid(0.0, 1.0, 5), Ok(5));
/// assert!(check_grid(1.0, 0.0, 5).is_err());
/// assert!(check_grid(0.0, 1.0, 1).is_err());
/// ```
pub fn check_grid(lo: f64, hi: f64, n: i64) -> Result<usize, StatsError> {
    if !(lo < hi && (hi - lo).is_finite()) {
        return Err(StatsError::BadGridRange { lo, hi });
    }
    if !(2..=MAX_POINTS).contains(&n) {
        return Err(StatsError::BadGridSize(n));
    }
    Ok(n as usize)
}

/// `n` evenly spaced points from `lo` to `hi`, both included, by numpy's arithmetic.
/// One point gives `[lo]`; none gives an empty vector.
///
/// # Example
/// ```
/// assert_eq!(ogive::stats::grid::linspace(0.0, 1.0, 5), vec![0.0, 0.25, 0.5, 0.75, 1.0]);
/// ```
pub fn linspace(lo: f64, hi: f64, n: usize) -> Vec<f64> {
    (0..n).map(|i| grid_point(lo, hi, n, i)).collect()
}

/// Point `i` of [`linspace`]`(lo, hi, n)`, computed alone (for a curve drawn one row at a
/// time); `hi` for `i >= n - 1` when `n > 1`, `lo` when `n <= 1`.
///
/// # Example
/// ```
/// use ogive::stats::grid::{grid_point, linspace};
/// assert_eq!(grid_point(0.0, 1.0, 5, 3), 0.75);
/// let all = linspace(-1.0, 12.0, 3000);
/// assert!((0..3000).all(|i| grid_point(-1.0, 12.0, 3000, i).to_bits() == all[i].to_bits()));
/// ```
pub fn grid_point(lo: f64, hi: f64, n: usize, i: usize) -> f64 {
    if n <= 1 {
        return lo;
    }
    if i >= n - 1 {
        return hi;
    }
    let div = (n - 1) as f64;
    let delta = hi - lo;
    let step = delta / div;
    let i = i as f64;
    // numpy falls back to (i / div) * delta when the step underflows to zero.
    let offset = if step == 0.0 {
        i / div * delta
    } else {
        i * step
    };
    offset + lo
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn matches_hand_arithmetic() {
        // numpy.linspace(-1, 2, 4) is [-1, 0, 1, 2] (exact in binary).
        assert_eq!(linspace(-1.0, 2.0, 4), vec![-1.0, 0.0, 1.0, 2.0]);
        assert_eq!(linspace(3.0, 9.0, 1), vec![3.0]);
        // numpy 2.4.6, numpy.linspace(0, 0.3, 4), printed with repr:
        // [0.0, 0.09999999999999999, 0.19999999999999998, 0.3]. Exact equality: the last
        // point is hi itself, the others are i * (0.3 / 3).
        assert_eq!(
            linspace(0.0, 0.3, 4),
            vec![0.0, 0.09999999999999999, 0.19999999999999998, 0.3]
        );
    }

    #[test]
    fn checks() {
        assert_eq!(
            check_grid(f64::NEG_INFINITY, 0.0, 3),
            Err(StatsError::BadGridRange {
                lo: f64::NEG_INFINITY,
                hi: 0.0
            })
        );
        assert!(check_grid(-1e308, 1e308, 3).is_err());
        assert_eq!(
            check_grid(0.0, 1.0, MAX_POINTS + 1),
            Err(StatsError::BadGridSize(MAX_POINTS + 1))
        );
    }
}
