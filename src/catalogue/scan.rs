//! Table functions' rows, produced one at a time as the engine reads them.
//!
//! A table function's body ([`super::TableImp::rows`]) reads its arguments and returns a
//! [`Scan`]; the engine asks it for one row after another. A scan whose rows are costly
//! (a density curve: a kernel sum over every value per point) computes each row only when
//! asked, so `LIMIT 1` costs one row and an interrupt between rows stops it. A scan whose
//! rows cost no more than reading the argument holds them ready ([`Ready`]).

use super::args::FunctionError;
use super::value::Out;
use crate::stats::grow;

/// A table function's rows, one at a time.
pub trait Scan {
    /// Appends the next row's values, one per output column, to `row` (which the caller
    /// has emptied); `Ok(false)` after the last row.
    ///
    /// # Errors
    /// The function's error for a row that cannot be computed, for example
    /// [`super::args::ArgError::Interrupted`] when the engine asks it to stop.
    fn next_row(&mut self, row: &mut Vec<Out>) -> Result<bool, FunctionError>;
}

/// A scan of rows computed up front: `width` values a row, flattened.
///
/// # Example
/// ```
/// use ogive::catalogue::scan::{Ready, Scan};
/// use ogive::catalogue::value::Out;
/// let mut scan = Ready::rows(vec![Out::Integer(1), Out::Real(0.5)], 1);
/// let mut row = Vec::new();
/// assert!(scan.next_row(&mut row).unwrap());
/// assert_eq!(row, vec![Out::Integer(1)]);
/// ```
pub struct Ready {
    values: std::vec::IntoIter<Out>,
    width: usize,
}

impl Ready {
    /// The rows in `values`, `width` values each (a short last row is filled with NULL).
    pub fn rows(values: Vec<Out>, width: usize) -> Box<dyn Scan> {
        Box::new(Ready {
            values: values.into_iter(),
            width: width.max(1),
        })
    }

    /// No rows: what a NULL argument gives.
    pub fn empty() -> Box<dyn Scan> {
        Ready::rows(Vec::new(), 1)
    }
}

impl Scan for Ready {
    fn next_row(&mut self, row: &mut Vec<Out>) -> Result<bool, FunctionError> {
        let Some(first) = self.values.next() else {
            return Ok(false);
        };
        row.push(first);
        for _ in 1..self.width {
            row.push(self.values.next().unwrap_or(Out::Null));
        }
        Ok(true)
    }
}

/// Every row of a scan, flattened: for an engine that plans a table function's rows as
/// one batch (DataFusion).
///
/// # Errors
/// The scan's first error, or [`grow::OutOfMemory`] (as the function's error) when the
/// rows do not fit in memory.
///
/// # Example
/// ```
/// use ogive::catalogue::scan::{Ready, drain};
/// use ogive::catalogue::value::Out;
/// let rows = drain("f", Ready::rows(vec![Out::Integer(1), Out::Integer(2)], 1)).unwrap();
/// assert_eq!(rows, vec![Out::Integer(1), Out::Integer(2)]);
/// ```
pub fn drain(function: &'static str, mut scan: Box<dyn Scan>) -> Result<Vec<Out>, FunctionError> {
    let mut all = Vec::new();
    let mut row = Vec::new();
    while scan.next_row(&mut row)? {
        for v in row.drain(..) {
            grow::push(&mut all, v).map_err(|e| super::args::fail(function, e))?;
        }
    }
    Ok(all)
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn ready_rows_come_back_in_order_and_end() {
        let mut scan = Ready::rows((1..=5).map(Out::Integer).collect(), 2);
        let mut row = Vec::new();
        let mut rows = Vec::new();
        while scan.next_row(&mut row).unwrap() {
            rows.push(std::mem::take(&mut row));
        }
        // Five values in rows of two: the last row is filled with NULL.
        assert_eq!(
            rows,
            vec![
                vec![Out::Integer(1), Out::Integer(2)],
                vec![Out::Integer(3), Out::Integer(4)],
                vec![Out::Integer(5), Out::Null],
            ]
        );
        assert!(!scan.next_row(&mut row).unwrap());
        assert!(drain("f", Ready::empty()).unwrap().is_empty());
    }
}
