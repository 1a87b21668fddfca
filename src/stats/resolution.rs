//! The step readings were rounded to: stated by the user, or found in the data.
//!
//! A grid of step `r` is the set `{x0 + j r}` through the smallest reading `x0` (so a
//! grid offset from 0, as after a calibration shift, is still a grid). For a step the
//! user states, a reading lies on the grid when it is within a tenth of a step of a grid
//! point: readings are often written with fewer digits than their grid needs (whole
//! seconds written as minutes to three decimals sit up to 0.03 of a step off), and a
//! reading farther off says the step is wrong. For [`find_step`] the test is strict, as
//! there is no step to trust yet: within `min(1e-9 max(|x|, |x0|), 1e-3 r)`, 1e-9
//! relative (decimal readings are not exact binary fractions) but never a sizeable share
//! of a step.
//!
//! [`find_step`] (`'auto'` in SQL) returns the largest step on whose grid every reading
//! lies. Every grid step divides the gaps between readings, so it is the smallest gap
//! `g` divided by a whole number: the first of `g, g/2, ..., g/64` that holds is taken.
//! None holds for readings with no rounding; the fit then treats them as exact.

use std::fmt;

/// How the readings were rounded, as the user says it.
#[derive(Debug, Clone, Copy, PartialEq, Default)]
pub enum Resolution {
    /// Not said: the readings are exact.
    #[default]
    Exact,
    /// Rounded to this step.
    Step(f64),
    /// Find the step in the readings ([`find_step`]).
    Auto,
}

/// Why a stated step does not fit the readings.
#[derive(Debug, Clone, Copy, PartialEq)]
pub enum GridError {
    /// A step that is not a finite number above 0.
    BadStep(f64),
    /// A reading off the grid.
    OffGrid {
        /// The reading.
        value: f64,
        /// The stated step.
        step: f64,
        /// The nearest grid point.
        nearest: f64,
    },
}

impl fmt::Display for GridError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            GridError::BadStep(r) => write!(
                f,
                "resolution must be a number > 0 (the step the readings were rounded to) or \
                 'auto', got {r}"
            ),
            GridError::OffGrid {
                value,
                step,
                nearest,
            } => write!(
                f,
                "the reading {value} is off the grid of step {step} through the smallest \
                 reading by more than a tenth of a step (nearest grid point {nearest}); give \
                 the step the readings were rounded to, 'auto' to find it, or omit resolution"
            ),
        }
    }
}

impl std::error::Error for GridError {}

/// Divisors of the smallest gap tried by [`find_step`].
const MAX_DIVISOR: u32 = 64;

/// The step to fit with: `None` for exact readings (stated, or `Auto` finding no grid),
/// `Some(r)` for readings rounded to `r`. `sorted` holds the readings (ties allowed) in
/// increasing order.
///
/// # Errors
/// [`GridError::BadStep`] for a step that is not finite and `> 0`;
/// [`GridError::OffGrid`] naming the first reading off a stated step's grid.
///
/// # Example
/// ```
/// use ogive::stats::resolution::{Resolution, resolve};
/// let xs = [20.1, 20.3, 20.4, 21.0];
/// let step = resolve(&xs, Resolution::Auto)?.unwrap();
/// assert!((step - 0.1).abs() < 1e-12);
/// assert!(resolve(&xs, Resolution::Step(0.2)).is_err());
/// assert_eq!(resolve(&xs, Resolution::Exact), Ok(None));
/// # Ok::<(), ogive::stats::resolution::GridError>(())
/// ```
pub fn resolve(sorted: &[f64], r: Resolution) -> Result<Option<f64>, GridError> {
    match r {
        Resolution::Exact => Ok(None),
        Resolution::Auto => Ok(find_step(sorted)),
        Resolution::Step(step) => {
            if !(step > 0.0 && step.is_finite()) {
                return Err(GridError::BadStep(step));
            }
            match off_grid(sorted, step, STATED) {
                Some((value, nearest)) => Err(GridError::OffGrid {
                    value,
                    step,
                    nearest,
                }),
                None => Ok(Some(step)),
            }
        }
    }
}

/// The largest step on whose grid every reading lies, `None` when there is none (or
/// fewer than two distinct readings). `sorted` holds the readings (ties allowed) in
/// increasing order.
///
/// # Example
/// ```
/// use ogive::stats::resolution::find_step;
/// // Gaps 2 and 3: the grid of step 1 (= 2 / 2).
/// assert_eq!(find_step(&[1.0, 3.0, 6.0]), Some(1.0));
/// assert_eq!(find_step(&[0.0, 0.5f64.sqrt(), 1.0]), None);
/// ```
pub fn find_step(sorted: &[f64]) -> Option<f64> {
    let gap = sorted
        .windows(2)
        .map(|w| w[1] - w[0])
        .filter(|&g| g > 0.0)
        .min_by(f64::total_cmp)?;
    (1..=MAX_DIVISOR)
        .map(|q| gap / f64::from(q))
        .find(|&step| off_grid(sorted, step, FOUND).is_none())
}

/// How far off its grid a reading may lie: for a stated step, a share of the step.
const STATED: Slack = Slack {
    relative: f64::INFINITY,
    of_step: 0.1,
};
/// For a step being found: 1e-9 relative, at most 1e-3 of the step.
const FOUND: Slack = Slack {
    relative: 1e-9,
    of_step: 1e-3,
};

/// A tolerance: `min(relative max(|x|, |x0|), of_step step)`.
#[derive(Debug, Clone, Copy)]
struct Slack {
    relative: f64,
    of_step: f64,
}

/// The first reading off the grid of `step` through `sorted[0]` by more than `slack`,
/// with its nearest grid point; `None` when every reading lies on it.
fn off_grid(sorted: &[f64], step: f64, slack: Slack) -> Option<(f64, f64)> {
    let x0 = *sorted.first()?;
    sorted.iter().find_map(|&x| {
        let j = ((x - x0) / step).round();
        let nearest = x0 + j * step;
        let tolerance = (slack.relative * x.abs().max(x0.abs())).min(slack.of_step * step);
        ((x - nearest).abs() > tolerance).then_some((x, nearest))
    })
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn decimal_grids_are_found() {
        // Readings to 0.1 as a database holds them (decimal text read as doubles).
        let xs: Vec<f64> = [183, 190, 201, 202, 215, 240]
            .iter()
            .map(|&t| format!("{}.{}", t / 10, t % 10).parse().unwrap())
            .collect();
        let step = find_step(&xs).unwrap();
        assert!((step - 0.1).abs() < 1e-12, "{step}");
        assert_eq!(resolve(&xs, Resolution::Step(0.1)), Ok(Some(0.1)));
        // Whole milliseconds with gaps of 2 and 3: the grid of 1.
        assert_eq!(find_step(&[10.0, 12.0, 15.0]), Some(1.0));
        // An offset grid (every reading + 0.05).
        let shifted: Vec<f64> = xs.iter().map(|x| x + 0.05).collect();
        assert!((find_step(&shifted).unwrap() - 0.1).abs() < 1e-12);
    }

    #[test]
    fn continuous_readings_have_no_grid() {
        let mut rng = crate::stats::rng::SplitMix64::new(7);
        for m in [5, 100, 10_000] {
            let mut xs: Vec<f64> = (0..m).map(|_| 1000.0 * rng.next_f64()).collect();
            xs.sort_by(f64::total_cmp);
            assert_eq!(find_step(&xs), None, "m = {m}");
        }
    }

    #[test]
    fn stated_steps_are_checked() {
        assert_eq!(
            resolve(&[1.0, 2.0], Resolution::Step(0.0)),
            Err(GridError::BadStep(0.0))
        );
        assert!(matches!(
            resolve(&[1.0, 2.0], Resolution::Step(-1.0)),
            Err(GridError::BadStep(_))
        ));
        assert!(matches!(
            resolve(&[1.0, 2.0], Resolution::Step(f64::NAN)),
            Err(GridError::BadStep(_))
        ));
        // Whole seconds written as minutes to three decimals: on the grid of 1/60.
        let minutes = [1.6, 1.667, 1.733, 1.75, 4.533];
        assert_eq!(
            resolve(&minutes, Resolution::Step(1.0 / 60.0)),
            Ok(Some(1.0 / 60.0))
        );
        let e = resolve(&[1.0, 2.0, 2.2], Resolution::Step(0.5)).unwrap_err();
        assert_eq!(
            e,
            GridError::OffGrid {
                value: 2.2,
                step: 0.5,
                nearest: 2.0
            }
        );
        assert!(e.to_string().contains("off the grid of step 0.5"));
    }
}
