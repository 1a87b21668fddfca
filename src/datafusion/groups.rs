//! Aggregate registry rows under `GROUP BY` on DataFusion: one `GroupsAccumulator` that
//! holds every group's state.
//!
//! Without it DataFusion wraps a per-group [`Accumulator`](::datafusion::logical_expr::Accumulator)
//! in its adapter, which copies each batch's rows out group by group and calls the
//! accumulator once per group and batch (with a thousand groups, a few rows a call). Here
//! a batch's columns are read once and each row goes to its group's state: through the
//! state's fast lane (`Lane`) when the row qualifies, as in the ungrouped path, else
//! through the general step. States, errors and results are the catalogue's, the same as
//! the ungrouped accumulator's; the partial state is the same saved form and value lists
//! (see the `aggregate` module), one row per group.

use std::sync::Arc;

use ::datafusion::arrow::array::{Array, ArrayRef, BinaryBuilder, BooleanArray};
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::{EmitTo, GroupsAccumulator};

use super::aggregate::{Partials, add, lane_value};
use super::convert::{Column, Reals, columns_of, number_bits, out_array, read_row, values_column};
use super::{guarded, to_datafusion};
use crate::catalogue::args::{ArgError, fail};
use crate::catalogue::state::{AggregateImp, Aggregator, Args, Lane};
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{FunctionDef, MAX_ARGS};

/// Every group's state of one aggregate call.
pub struct Groups {
    def: &'static FunctionDef,
    imp: AggregateImp,
    /// The states, by DataFusion's group index.
    states: Vec<Box<dyn Aggregator>>,
    /// Rows stepped or values merged in, for the size estimate.
    rows: usize,
}

impl Groups {
    /// No group yet.
    pub fn new(def: &'static FunctionDef, imp: AggregateImp) -> Groups {
        Groups {
            def,
            imp,
            states: Vec::new(),
            rows: 0,
        }
    }

    /// Makes room for groups `0..total`.
    ///
    /// # Errors
    /// The function's out-of-memory error.
    fn grow(&mut self, total: usize) -> Result<(), DataFusionError> {
        if let Some(more) = total.checked_sub(self.states.len())
            && more > 0
        {
            let (name, held) = (self.def.name, self.states.len());
            self.states
                .try_reserve(more)
                .map_err(|_| to_datafusion(fail(name, ArgError::OutOfMemory { held })))?;
            self.states.resize_with(total, self.imp.new);
        }
        Ok(())
    }

    /// The states of the groups `emit_to` names, taken out (the rest shift down).
    fn take(&mut self, emit_to: EmitTo) -> Vec<Box<dyn Aggregator>> {
        let taken = emit_to.take_needed(&mut self.states);
        if self.states.is_empty() {
            self.rows = 0;
        }
        taken
    }

    /// One row into its group's state: through the lane when the row qualifies (see
    /// [`Fast`] for what the batch settled once), else through the general step.
    #[inline]
    fn step_row(
        state: &mut dyn Aggregator,
        cols: &[Column],
        fast: &Fast<'_>,
        row: usize,
        name: &'static str,
    ) -> Result<(), DataFusionError> {
        if let [x, c @ ..] = cols
            && c.len() <= 1
            && let Some(Lane { key, mut sink }) = state.lane()
            && (fast.key == Some(key)
                || c.first()
                    .is_none_or(|c| number_bits(c.get(row)) == Some(key)))
        {
            let v = match fast.reals {
                Some(reals) => Some(reals.at(row)),
                None => lane_value(x.get(row)),
            };
            match v {
                Some(None) => return Ok(()),
                Some(Some(v)) if add(name, &mut sink, v)? => return Ok(()),
                _ => {}
            }
        }
        let mut args = [Arg::Null; MAX_ARGS];
        let n = read_row(cols, row, &mut args);
        state.step(&Args::new(&args[..n])).map_err(to_datafusion)
    }
}

/// What a batch settles once for the lane: `x`'s doubles when it is a REAL column, and the
/// bits of the constant argument when every row of the batch holds the same number (as a
/// literal does), so that a row whose group's lane key is those bits needs no read of it.
struct Fast<'a> {
    reals: Option<Reals<'a>>,
    key: Option<u64>,
}

impl<'a> Fast<'a> {
    fn of(cols: &'a [Column], rows: usize) -> Fast<'a> {
        let reals = cols.first().and_then(Column::reals);
        let key = match cols {
            [_, c] if rows > 0 => number_bits(c.get(0)).filter(|&k| c.all_bits(k, 0..rows)),
            _ => None,
        };
        Fast { reals, key }
    }
}

impl GroupsAccumulator for Groups {
    fn update_batch(
        &mut self,
        values: &[ArrayRef],
        group_indices: &[usize],
        opt_filter: Option<&BooleanArray>,
        total_num_groups: usize,
    ) -> Result<(), DataFusionError> {
        let name = self.def.name;
        guarded(name, || {
            self.grow(total_num_groups)?;
            let cols = columns_of(name, values)?;
            let fast = Fast::of(&cols, group_indices.len());
            for (row, &g) in group_indices.iter().enumerate() {
                if opt_filter.is_some_and(|f| !(f.is_valid(row) && f.value(row))) {
                    continue;
                }
                let state = self.states.get_mut(g).ok_or_else(|| bad_group(name, g))?;
                Self::step_row(state.as_mut(), &cols, &fast, row, name)?;
            }
            self.rows = self.rows.saturating_add(group_indices.len());
            Ok(())
        })
    }

    fn evaluate(&mut self, emit_to: EmitTo) -> Result<ArrayRef, DataFusionError> {
        let def = self.def;
        guarded(def.name, || {
            let outs = self
                .take(emit_to)
                .into_iter()
                .map(|mut s| s.finalize())
                .collect::<Result<Vec<Out>, _>>()
                .map_err(to_datafusion)?;
            out_array(def.name, def.returns, outs)
        })
    }

    fn state(&mut self, emit_to: EmitTo) -> Result<Vec<ArrayRef>, DataFusionError> {
        let (name, lists) = (self.def.name, self.imp.lists);
        guarded(name, || {
            let states = self.take(emit_to);
            let mut saved = BinaryBuilder::with_capacity(states.len(), 64 * states.len());
            // Each list column's values end to end, and where each group's ends.
            let mut columns: Vec<(Vec<f64>, Vec<i64>)> =
                (0..lists).map(|_| (Vec::new(), vec![0])).collect();
            for mut s in states {
                let (bytes, values) = s.save_apart();
                saved.append_value(bytes);
                if values.len() != lists {
                    return Err(to_datafusion(fail(
                        name,
                        ArgError::Internal(format!(
                            "{} lists of values, declared {lists}",
                            values.len()
                        )),
                    )));
                }
                for ((all, ends), v) in columns.iter_mut().zip(values) {
                    crate::stats::grow::extend(all, &v)
                        .map_err(|e| to_datafusion(fail(name, ArgError::from(e))))?;
                    ends.push(all.len() as i64);
                }
            }
            let mut out: Vec<ArrayRef> = vec![Arc::new(saved.finish())];
            for (all, ends) in columns {
                out.push(Arc::new(values_column(all, ends)));
            }
            Ok(out)
        })
    }

    fn merge_batch(
        &mut self,
        values: &[ArrayRef],
        group_indices: &[usize],
        total_num_groups: usize,
    ) -> Result<(), DataFusionError> {
        let name = self.def.name;
        guarded(name, || {
            self.grow(total_num_groups)?;
            let Some(batch) = Partials::of(name, values)? else {
                return Ok(());
            };
            for (i, &g) in group_indices.iter().enumerate() {
                let state = self.states.get_mut(g).ok_or_else(|| bad_group(name, g))?;
                let added = batch.merge_row(state.as_mut(), i)?;
                self.rows = self.rows.saturating_add(added);
            }
            Ok(())
        })
    }

    fn convert_to_state(
        &self,
        values: &[ArrayRef],
        opt_filter: Option<&BooleanArray>,
    ) -> Result<Vec<ArrayRef>, DataFusionError> {
        // Each row its own group. DataFusion asks only when `supports_convert_to_state`
        // says yes, which it does not: a state per row would cost more than grouping.
        let rows = values.first().map_or(0, |a| a.len());
        let mut each = Groups::new(self.def, self.imp);
        let groups: Vec<usize> = (0..rows).collect();
        each.update_batch(values, &groups, opt_filter, rows)?;
        each.state(EmitTo::All)
    }

    fn size(&self) -> usize {
        // An estimate, as the ungrouped accumulator's: about two doubles per row held.
        size_of::<Self>() + 64 * self.states.capacity() + 16 * self.rows
    }
}

/// A group index DataFusion did not make room for.
fn bad_group(name: &str, g: usize) -> DataFusionError {
    DataFusionError::Internal(format!("{name}: group index {g} beyond the groups made"))
}
