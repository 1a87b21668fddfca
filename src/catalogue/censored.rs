//! Censored readings: the `dist_censored(x, c)` aggregate, which builds the
//! nonparametric maximum-likelihood estimate ([`crate::stats::censored`]) as a
//! distribution value (the version-2 BLOB of [`crate::value::censored`]).
//!
//! Adapter only: it reads and checks the arguments, keeps the readings of the group, and
//! hands them to the kernel. NULL x or NULL c skips the row; a group with no rows left
//! gives NULL.

use super::args::{ArgError, FunctionError, fail, number};
use super::state::{AggregateImp, Args, Reader, State, Writer, push, try_extend};
use super::value::Out;
use super::{FunctionDef, Imp, Kind, Range, Returns};
use crate::stats::censored::{Censored, CensoredError, Code};
use crate::value::censored::encode;

type Result<T> = std::result::Result<T, FunctionError>;

/// The registry rows of this module.
pub static FUNCTIONS: &[FunctionDef] = &[FunctionDef {
    name: "dist_censored",
    kind: Kind::Aggregate,
    returns: Returns::Blob,
    range: Range::Distribution,
    arities: &[2],
    signature: "dist_censored(x, c)",
    summary: "distribution value from censored readings: Kaplan-Meier, its mirror for left-censoring, or Turnbull's estimate; c = 0 exact, -1 left-, 1 right-censored",
    help: "Builds the nonparametric maximum-likelihood estimate of the distribution of the true \
           values. c = 0: x is exact; c = -1: left-censored, the true value is at or below x \
           (under a detection limit); c = 1: right-censored, the true value is above x (a \
           logger at the top of its range, an item still running at time x). Right-censoring \
           only (or none): Kaplan-Meier (1958); with no censoring at all its cdf is the \
           empirical one. Left-censoring only: Kaplan-Meier on -x (a reading left-censored at \
           an exact value is taken as compatible with it). Both: Turnbull's (1976) \
           self-consistency (EM) estimate over his innermost intervals, stopped when no mass \
           moves by more than 1e-12 in a pass or after 20000 passes (the BLOB records the \
           passes and whether it converged). The value (docs/empirical-blob.md, version 2) \
           answers dist_cdf, dist_quantile (the inverse cdf, inf{t: F(t) >= p}; type is \
           checked but does not apply), dist_n (the number of readings), dist_steps, \
           dist_curve (pdf NULL), dist_band (Greenwood) and dist_ks against a model. Where the \
           estimate leaves mass unassigned (beyond the largest reading when it is \
           right-censored, below the smallest when it is left-censored) the cdf and the \
           quantiles there are NULL; inside a Turnbull interval (r, l] the estimate says how \
           much mass it holds but not where, so the cdf is NULL strictly inside it (defined at \
           its ends) and a quantile falling in it is NULL. dist_mean, dist_sd and dist_pdf give \
           NULL. NULL x or c skips the row; no rows gives NULL. Errors: c not -1, 0 or 1, an \
           infinite x, non-numeric x or c, and readings that are all censored on one side \
           with none exact (nothing to estimate).",
    example: "SELECT dist_quantile(dist_censored(column1, column2), 0.5) \
              FROM (VALUES (1, 0), (2, 1), (3, 0), (4, 0))",
    example_result: "3.0",
    imp: Imp::Aggregate(AggregateImp::of::<DistCensoredState>()),
}];

/// State of `dist_censored(x, c)`: the group's readings, by code.
#[derive(Debug, Default)]
pub struct DistCensoredState {
    exact: Vec<f64>,
    left: Vec<f64>,
    right: Vec<f64>,
}

impl DistCensoredState {
    const NAME: &'static str = "dist_censored";
}

impl State for DistCensoredState {
    const NAME: &'static str = DistCensoredState::NAME;

    fn step(&mut self, args: &Args<'_>) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            let x = number(args.get(0), "x")?;
            let c = number(args.get(1), "c")?;
            let code = c.map(Code::from_number).transpose()?;
            if let Some(x) = x.filter(|x| x.is_infinite()) {
                return Err(CensoredError::InfiniteReading(x).into());
            }
            if let (Some(x), Some(code)) = (x, code) {
                let side = match code {
                    Code::Exact => &mut self.exact,
                    Code::Left => &mut self.left,
                    Code::Right => &mut self.right,
                };
                push(side, x)?;
            }
            Ok(())
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn merge(&mut self, other: Self) -> Result<()> {
        let mut go = || -> std::result::Result<(), ArgError> {
            try_extend(&mut self.exact, &other.exact)?;
            try_extend(&mut self.left, &other.left)?;
            try_extend(&mut self.right, &other.right)
        };
        go().map_err(|e| fail(Self::NAME, e))
    }

    fn finalize(&mut self) -> Result<Out> {
        if self.exact.is_empty() && self.left.is_empty() && self.right.is_empty() {
            return Ok(Out::Null);
        }
        let mut readings = Vec::new();
        let held = self.exact.len() + self.left.len() + self.right.len();
        readings
            .try_reserve_exact(held)
            .map_err(|_| fail(Self::NAME, ArgError::OutOfMemory { held }))?;
        for (xs, code) in [
            (&self.exact, Code::Exact),
            (&self.left, Code::Left),
            (&self.right, Code::Right),
        ] {
            readings.extend(xs.iter().map(|&x| (x, code)));
        }
        let e = Censored::from_readings(&readings).map_err(|e| fail(Self::NAME, e))?;
        Ok(Out::Blob(encode(&e)))
    }

    fn save(&self, w: &mut Writer) {
        w.f64s(&self.exact);
        w.f64s(&self.left);
        w.f64s(&self.right);
    }

    fn load(r: &mut Reader<'_>) -> std::result::Result<Self, ArgError> {
        Ok(DistCensoredState {
            exact: r.f64s()?,
            left: r.f64s()?,
            right: r.f64s()?,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::catalogue::value::Arg;

    fn run(rows: &[(Arg<'_>, Arg<'_>)]) -> Result<Out> {
        let mut s = DistCensoredState::default();
        for &(x, c) in rows {
            State::step(&mut s, &Args::new(&[x, c]))?;
        }
        State::finalize(&mut s)
    }

    #[test]
    fn bad_input_is_named() {
        let e = run(&[(Arg::Real(1.0), Arg::Integer(2))]).unwrap_err();
        assert_eq!(
            e.to_string(),
            "dist_censored: c must be -1 (left-censored: the value is at or below x), 0 (exact) \
             or 1 (right-censored: the value is above x), got 2"
        );
        let e = run(&[(Arg::Real(f64::INFINITY), Arg::Integer(0))]).unwrap_err();
        assert_eq!(
            e.to_string(),
            "dist_censored: x must be finite, got inf; filter such rows out"
        );
        let e = run(&[
            (Arg::Real(1.0), Arg::Integer(1)),
            (Arg::Real(2.0), Arg::Integer(1)),
        ])
        .unwrap_err();
        assert!(
            e.to_string()
                .starts_with("dist_censored: all 2 readings are right-censored and none is exact"),
            "{e}"
        );
        let e = run(&[(Arg::Text(b"warm"), Arg::Integer(0))]).unwrap_err();
        assert!(
            e.to_string()
                .starts_with("dist_censored: x must be a number")
        );
    }

    #[test]
    fn nulls_skip_and_empty_is_null() {
        assert_eq!(run(&[]).unwrap(), Out::Null);
        assert_eq!(
            run(&[(Arg::Null, Arg::Integer(0)), (Arg::Real(1.0), Arg::Null)]).unwrap(),
            Out::Null
        );
        assert!(matches!(
            run(&[
                (Arg::Real(1.0), Arg::Integer(0)),
                (Arg::Null, Arg::Integer(1))
            ])
            .unwrap(),
            Out::Blob(_)
        ));
    }
}
