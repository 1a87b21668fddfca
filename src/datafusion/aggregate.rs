//! Aggregate and window registry rows as DataFusion `AggregateUDF`s.
//!
//! The partial state DataFusion ships between its partial and final aggregation (and
//! between processes) is one BINARY value, the catalogue's saved form of the state
//! (`docs/state-format.md`), merged on arrival by the state's own `merge`; a state that
//! collects values (`quantile`, `median`, `ks_test`, `dist_fit`, `dist_mixture`) ships
//! them beside it as lists of doubles
//! ([`State::take_values`](crate::catalogue::state::State::take_values)), moved into the
//! list column without a copy and read where DataFusion holds them when the final step
//! merges and answers. On one partition DataFusion aggregates in one step and ships
//! nothing. A window row
//! (`Kind::Window`) supports retraction through the state's `inverse`, so sliding frames
//! cost what they cost in SQLite. A window row answers one group by `finalize` (as
//! SQLite's xFinal: `quantile` by selection) and frame after frame by `value`; an
//! aggregate row that has been finalised refuses further rows (it is no window function,
//! though DataFusion would let it run `OVER` a frame) instead of answering from a
//! consumed state.

use std::sync::Arc;

use ::datafusion::arrow::array::{Array, ArrayRef, AsArray, BinaryArray};
use ::datafusion::arrow::datatypes::{DataType, Field, FieldRef};
use ::datafusion::common::ScalarValue;
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::function::{AccumulatorArgs, StateFieldsArgs};
use ::datafusion::logical_expr::{
    Accumulator, AggregateUDF, AggregateUDFImpl, GroupsAccumulator, Signature,
};

use super::convert::{
    Column, columns_of, data_type, number_bits, out_array, read_row, runs_at, stored_number,
    values_list, values_list_type,
};
use super::groups::Groups;
use super::scalar::signature;
use super::{guarded, to_datafusion};
use crate::catalogue::args::{ArgError, FunctionError, fail};
use crate::catalogue::state::{AggregateImp, Aggregator, Args, Lane, Sink, try_extend, try_push};
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, Imp, Kind, MAX_ARGS};

/// The DataFusion function of an aggregate (or window) registry row.
pub fn udaf(def: &'static FunctionDef) -> AggregateUDF {
    AggregateUDF::new_from_impl(Aggregate {
        def,
        signature: signature(def),
    })
}

/// An aggregate registry row.
struct Aggregate {
    def: &'static FunctionDef,
    signature: Signature,
}

by_name!(Aggregate);

impl AggregateUDFImpl for Aggregate {
    fn name(&self) -> &str {
        self.def.name
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _: &[DataType]) -> Result<DataType, DataFusionError> {
        Ok(data_type(self.def.returns))
    }

    fn accumulator(&self, _: AccumulatorArgs) -> Result<Box<dyn Accumulator>, DataFusionError> {
        Ok(Box::new(self.acc(false)?))
    }

    fn groups_accumulator_supported(&self, args: AccumulatorArgs) -> bool {
        !args.is_distinct && self.imp().is_ok()
    }

    fn create_groups_accumulator(
        &self,
        _: AccumulatorArgs,
    ) -> Result<Box<dyn GroupsAccumulator>, DataFusionError> {
        Ok(Box::new(Groups::new(self.def, self.imp()?)))
    }

    fn create_sliding_accumulator(
        &self,
        _: AccumulatorArgs,
    ) -> Result<Box<dyn Accumulator>, DataFusionError> {
        Ok(Box::new(self.acc(true)?))
    }

    fn state_fields(&self, args: StateFieldsArgs) -> Result<Vec<FieldRef>, DataFusionError> {
        let mut fields = vec![Arc::new(Field::new(
            format!("{}[ogive state]", args.name),
            DataType::Binary,
            true,
        ))];
        for i in 0..self.lists() {
            fields.push(Arc::new(Field::new(
                format!("{}[ogive values {i}]", args.name),
                values_list_type(),
                true,
            )));
        }
        Ok(fields)
    }
}

impl Aggregate {
    /// The row's states.
    ///
    /// # Errors
    /// An internal error for a row that is not an aggregate.
    fn imp(&self) -> Result<AggregateImp, DataFusionError> {
        match self.def.imp {
            Imp::Aggregate(imp) => Ok(imp),
            _ => Err(DataFusionError::Internal(format!(
                "{} is not an aggregate",
                self.def.name
            ))),
        }
    }

    /// How many lists of values the row's state ships apart from its saved form.
    fn lists(&self) -> usize {
        self.imp().map_or(0, |imp| imp.lists)
    }

    /// A new state; `framed` for sliding window frames.
    fn acc(&self, framed: bool) -> Result<Acc, DataFusionError> {
        let imp = self.imp()?;
        Ok(Acc {
            def: self.def,
            state: (imp.new)(),
            rows: 0,
            finished: false,
            framed,
        })
    }
}

/// One group's state.
struct Acc {
    def: &'static FunctionDef,
    state: Box<dyn Aggregator>,
    /// Rows stepped in, for the size estimate.
    rows: usize,
    /// An aggregate row's state after `finalize`.
    finished: bool,
    /// A window row answering frame after frame: by `value` (which may build an index
    /// for the next frames) instead of `finalize` (one answer, by selection). Set for
    /// sliding frames, and from the second answer on for growing ones.
    framed: bool,
}

by_name!(Acc);

impl Acc {
    /// Runs `body` on every row of a batch; with `lane`, rows the state's fast lane takes
    /// (see [`Lane`]) skip the general step, as in the SQLite adapter: a numeric constant
    /// with the group's bits (or no constant, in a one-argument call) and a numeric or
    /// NULL `x` only add `x`.
    fn each_row(
        &mut self,
        values: &[ArrayRef],
        lane: bool,
        body: fn(&mut dyn Aggregator, &Args<'_>) -> Result<(), FunctionError>,
    ) -> Result<(), DataFusionError> {
        if self.finished {
            return Err(self.finished_error());
        }
        let cols = columns_of(self.def.name, values)?;
        let rows = values.first().map_or(0, |a| a.len());
        let mut args = [Arg::Null; MAX_ARGS];
        let mut row = 0;
        while row < rows {
            if lane
                && let [x, c @ ..] = cols.as_slice()
                && c.len() <= 1
            {
                row = self.lane_rows(x, c.first(), row, rows)?;
                if row == rows {
                    break;
                }
            }
            let n = read_row(&cols, row, &mut args);
            body(self.state.as_mut(), &Args::new(&args[..n])).map_err(to_datafusion)?;
            row += 1;
        }
        self.rows = self.rows.saturating_add(rows);
        Ok(())
    }

    /// Adds rows `from..` through the state's lane while they qualify; returns the first
    /// row it did not take.
    #[inline]
    fn lane_rows(
        &mut self,
        x: &Column,
        c: Option<&Column>,
        from: usize,
        rows: usize,
    ) -> Result<usize, DataFusionError> {
        let Some(Lane { key, mut sink }) = self.state.lane() else {
            return Ok(from);
        };
        let name = self.def.name;
        // The whole rest of the batch at once: a REAL x, and the group's constant on every
        // row (or none). The same rows as one by one below: NULL and NaN skipped.
        if let Some(reals) = x.reals()
            && c.is_none_or(|c| c.all_bits(key, from..rows))
        {
            let values = &reals.values[from..rows];
            if let Sink::Collect(xs) = &mut sink
                && reals.nulls.is_none()
                && !values.iter().any(|v| v.is_nan())
            {
                try_extend(xs, values).map_err(|e| to_datafusion(fail(name, e)))?;
                return Ok(rows);
            }
            for row in from..rows {
                if let Some(v) = reals.at(row)
                    && !add(name, &mut sink, v)?
                {
                    return Ok(row);
                }
            }
            return Ok(rows);
        }
        let mut row = from;
        while row < rows {
            if let Some(c) = c
                && number_bits(c.get(row)) != Some(key)
            {
                break;
            }
            match lane_value(x.get(row)) {
                Some(None) => {}
                Some(Some(v)) if add(name, &mut sink, v)? => {}
                _ => break,
            }
            row += 1;
        }
        Ok(row)
    }

    fn finished_error(&self) -> DataFusionError {
        DataFusionError::Execution(format!(
            "{}: is an aggregate, not a window function: use it with GROUP BY, or on a \
             frame through a subquery",
            self.def.name
        ))
    }
}

/// What the lane does with a row's `x`: `Some(None)` skips it (NULL), `Some(Some(v))`
/// adds `v` (a number), `None` leaves the row to the general step (text, BLOB).
#[inline(always)]
pub(super) fn lane_value(x: Arg<'_>) -> Option<Option<f64>> {
    match x {
        Arg::Null => Some(None),
        other => stored_number(other).map(Some),
    }
}

/// Adds `v` to a lane's sink; `false` when the sink refuses it (the sketch refuses NaN),
/// for the general step to report.
///
/// # Errors
/// The function's out-of-memory error when a list cannot grow.
#[inline(always)]
pub(super) fn add(
    name: &'static str,
    sink: &mut Sink<'_>,
    v: f64,
) -> Result<bool, DataFusionError> {
    match sink {
        Sink::Count(counter) => counter.add(v),
        Sink::Sketch(s) => return Ok(s.insert(v).is_ok()),
        Sink::Collect(xs) => {
            if !try_push(xs, v) {
                let held = xs.len();
                return Err(to_datafusion(fail(name, ArgError::OutOfMemory { held })));
            }
        }
    }
    Ok(true)
}

/// A result as a DataFusion scalar of the row's declared type.
fn scalar_of(def: &FunctionDef, out: Out) -> Result<ScalarValue, DataFusionError> {
    let a = out_array(def.name, def.returns, vec![out])?;
    ScalarValue::try_from_array(&a, 0)
}

impl Accumulator for Acc {
    fn update_batch(&mut self, values: &[ArrayRef]) -> Result<(), DataFusionError> {
        guarded(self.def.name, || {
            self.each_row(values, true, |s, a| s.step(a))
        })
    }

    fn retract_batch(&mut self, values: &[ArrayRef]) -> Result<(), DataFusionError> {
        guarded(self.def.name, || {
            self.each_row(values, false, |s, a| s.inverse(a))
        })
    }

    fn supports_retract_batch(&self) -> bool {
        self.def.kind == Kind::Window
    }

    fn evaluate(&mut self) -> Result<ScalarValue, DataFusionError> {
        guarded(self.def.name, || self.answer())
    }

    fn size(&self) -> usize {
        // An estimate: DataFusion calls this often, so it must not serialise the state;
        // the states that grow keep about one double (and a tree node in window use)
        // per row.
        size_of::<Self>() + 16 * self.rows
    }

    fn state(&mut self) -> Result<Vec<ScalarValue>, DataFusionError> {
        guarded(self.def.name, || {
            if self.finished {
                return Err(self.finished_error());
            }
            // DataFusion asks once, at the end of a partial step: the state is consumed.
            self.finished = true;
            let (saved, lists) = self.state.save_apart();
            let mut out = vec![ScalarValue::Binary(Some(saved))];
            out.extend(lists.into_iter().map(values_list));
            Ok(out)
        })
    }

    fn merge_batch(&mut self, states: &[ArrayRef]) -> Result<(), DataFusionError> {
        guarded(self.def.name, || self.merge_saved(states))
    }
}

impl Acc {
    /// The answer for the rows held (see the module docs for finalize against value).
    fn answer(&mut self) -> Result<ScalarValue, DataFusionError> {
        if self.finished {
            return Err(self.finished_error());
        }
        let out = if self.def.kind == Kind::Window {
            if self.framed {
                self.state.value()
            } else {
                self.framed = true;
                self.state.finalize()
            }
        } else {
            self.finished = true;
            self.state.finalize()
        };
        scalar_of(self.def, out.map_err(to_datafusion)?)
    }

    /// Merges a batch of partial states in their saved form, with their lists of values.
    fn merge_saved(&mut self, states: &[ArrayRef]) -> Result<(), DataFusionError> {
        let Some(batch) = Partials::of(self.def.name, states)? else {
            return Ok(());
        };
        for i in 0..batch.saved.len() {
            let added = batch.merge_row(self.state.as_mut(), i)?;
            self.rows = self.rows.saturating_add(added);
        }
        Ok(())
    }
}

/// A batch of partial states, as [`Accumulator::state`] gave them: the saved forms, and the
/// value lists beside them.
pub(super) struct Partials<'a> {
    name: &'static str,
    /// The saved forms.
    pub saved: &'a BinaryArray,
    lists: &'a [ArrayRef],
}

impl<'a> Partials<'a> {
    /// The batch's columns; `None` for no column.
    ///
    /// # Errors
    /// An internal error when the first column is not BINARY.
    pub(super) fn of(
        name: &'static str,
        states: &'a [ArrayRef],
    ) -> Result<Option<Partials<'a>>, DataFusionError> {
        let Some((saved, lists)) = states.split_first() else {
            return Ok(None);
        };
        let saved = saved.as_binary_opt::<i32>().ok_or_else(|| {
            DataFusionError::Internal(format!("{name}: partial state is not BINARY"))
        })?;
        Ok(Some(Partials { name, saved, lists }))
    }

    /// Merges row `i` (unless NULL) into `state`; gives what it adds to a size estimate
    /// counted in rows of 16 bytes.
    ///
    /// # Errors
    /// As [`runs_at`] and [`Aggregator::merge_apart`].
    pub(super) fn merge_row(
        &self,
        state: &mut dyn Aggregator,
        i: usize,
    ) -> Result<usize, DataFusionError> {
        if !self.saved.is_valid(i) {
            return Ok(0);
        }
        let runs = runs_at(self.name, self.lists, i)?;
        let held: usize = runs.iter().map(|r| r.values().len()).sum();
        let bytes = self.saved.value(i);
        state.merge_apart(bytes, runs).map_err(to_datafusion)?;
        Ok((bytes.len() / 16).saturating_add(held / 2))
    }
}
