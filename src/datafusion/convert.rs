//! Arrow arrays to the catalogue's [`Arg`], and [`Out`] back to arrays; a state's lists of
//! values to list columns and back, uncopied.

use std::ops::Range;
use std::sync::Arc;

use ::datafusion::arrow::array::{
    Array, ArrayRef, AsArray, BinaryArray, Float64Array, Int64Array, LargeListArray, RecordBatch,
    StringArray,
};
use ::datafusion::arrow::buffer::{NullBuffer, OffsetBuffer, ScalarBuffer};
use ::datafusion::arrow::compute::{CastOptions, cast_with_options};
use ::datafusion::arrow::datatypes::{DataType, Field, FieldRef, Float64Type, Int64Type};
use ::datafusion::common::ScalarValue;
use ::datafusion::error::DataFusionError;

use crate::catalogue::state::Run;
use crate::catalogue::value::{Arg, Out};
use crate::catalogue::{MAX_ARGS, Returns};

/// One argument column of a batch, in the form SQLite would see it: integers, reals,
/// text, BLOBs or NULL.
pub struct Column {
    array: ArrayRef,
    /// Which reader applies.
    shape: Shape,
    /// A constant column (one value for every row).
    constant: bool,
}

#[derive(Clone, Copy)]
enum Shape {
    Null,
    Integer,
    Real,
    Text,
    LargeText,
    TextView,
    Blob,
    LargeBlob,
    BlobView,
}

impl Column {
    /// Wraps an argument array; `constant` when it holds one value for every row.
    ///
    /// # Errors
    /// An Arrow type that SQLite has no storage class for (dates, lists, structs):
    /// the message names the function and the argument and says to cast it.
    pub fn new(
        name: &str,
        i: usize,
        array: ArrayRef,
        constant: bool,
    ) -> Result<Column, DataFusionError> {
        use DataType as T;
        let to = |array: &ArrayRef, ty: &DataType| {
            cast_with_options(
                array,
                ty,
                &CastOptions {
                    safe: false,
                    ..Default::default()
                },
            )
        };
        let (array, shape) = match array.data_type() {
            T::Null => (array, Shape::Null),
            T::Int64 => (array, Shape::Integer),
            T::Float64 => (array, Shape::Real),
            T::Boolean
            | T::Int8
            | T::Int16
            | T::Int32
            | T::UInt8
            | T::UInt16
            | T::UInt32
            | T::UInt64 => (to(&array, &T::Int64)?, Shape::Integer),
            T::Float16 | T::Float32 | T::Decimal128(..) | T::Decimal256(..) => {
                (to(&array, &T::Float64)?, Shape::Real)
            }
            T::Utf8 => (array, Shape::Text),
            T::LargeUtf8 => (array, Shape::LargeText),
            T::Utf8View => (array, Shape::TextView),
            T::Binary => (array, Shape::Blob),
            T::LargeBinary => (array, Shape::LargeBlob),
            T::BinaryView => (array, Shape::BlobView),
            T::FixedSizeBinary(_) => (to(&array, &T::Binary)?, Shape::Blob),
            T::Dictionary(_, v) if v.is_string() => (to(&array, &T::Utf8)?, Shape::Text),
            other => {
                return Err(DataFusionError::Execution(format!(
                    "{name}: argument {} has type {other}, which ogive does not read; cast it \
                     to a number or to text (for example CAST(... AS DOUBLE))",
                    i + 1
                )));
            }
        };
        Ok(Column {
            array,
            shape,
            constant,
        })
    }

    /// Whether the column is one value for every row.
    pub fn is_constant(&self) -> bool {
        self.constant
    }

    /// The argument at `row` (row 0 for a constant column).
    #[inline]
    pub fn get(&self, row: usize) -> Arg<'_> {
        let row = if self.constant { 0 } else { row };
        let a = &self.array;
        if a.is_null(row) {
            return Arg::Null;
        }
        match self.shape {
            Shape::Null => Arg::Null,
            Shape::Integer => Arg::Integer(a.as_primitive::<Int64Type>().value(row)),
            Shape::Real => {
                let v = a.as_primitive::<Float64Type>().value(row);
                if v.is_nan() { Arg::Null } else { Arg::Real(v) }
            }
            Shape::Text => Arg::Text(a.as_string::<i32>().value(row).as_bytes()),
            Shape::LargeText => Arg::Text(a.as_string::<i64>().value(row).as_bytes()),
            Shape::TextView => Arg::Text(a.as_string_view().value(row).as_bytes()),
            Shape::Blob => Arg::Blob(a.as_binary::<i32>().value(row)),
            Shape::LargeBlob => Arg::Blob(a.as_binary::<i64>().value(row)),
            Shape::BlobView => Arg::Blob(a.as_binary_view().value(row)),
        }
    }

    /// A REAL column's doubles and validity, for reading many rows at once; `None` for any
    /// other column or a constant one.
    pub fn reals(&self) -> Option<Reals<'_>> {
        match (self.shape, self.constant) {
            (Shape::Real, false) => {
                let a = self.array.as_primitive::<Float64Type>();
                Some(Reals {
                    values: a.values(),
                    nulls: a.nulls(),
                })
            }
            _ => None,
        }
    }

    /// Whether every row of `rows` holds a number (INTEGER or REAL, an INTEGER as its
    /// double) whose bits (`f64::to_bits`) are `key`.
    pub fn all_bits(&self, key: u64, rows: Range<usize>) -> bool {
        if rows.is_empty() {
            return true;
        }
        if self.constant {
            return number_bits(self.get(0)) == Some(key);
        }
        if let Some(nulls) = self.array.nulls()
            && rows.clone().any(|i| nulls.is_null(i))
        {
            return false;
        }
        match self.shape {
            Shape::Real => self.array.as_primitive::<Float64Type>().values()[rows]
                .iter()
                .all(|v| v.to_bits() == key),
            Shape::Integer => self.array.as_primitive::<Int64Type>().values()[rows]
                .iter()
                .all(|&i| (i as f64).to_bits() == key),
            _ => false,
        }
    }
}

/// A number stored as INTEGER or REAL, as a double (an INTEGER converted); `None` for any
/// other value, TEXT that reads as a number included (unlike `catalogue::args::number`).
#[inline]
pub fn stored_number(a: Arg<'_>) -> Option<f64> {
    match a {
        Arg::Real(v) => Some(v),
        Arg::Integer(i) => Some(i as f64),
        _ => None,
    }
}

/// A REAL column's doubles and validity ([`Column::reals`]).
#[derive(Clone, Copy)]
pub struct Reals<'a> {
    /// Every row's double, NULL rows included (their bits are unspecified).
    pub values: &'a [f64],
    /// Which rows are NULL, if any are.
    pub nulls: Option<&'a NullBuffer>,
}

impl Reals<'_> {
    /// Row `row` as [`Column::get`] reads it: `None` for NULL and for NaN.
    #[inline]
    pub fn at(&self, row: usize) -> Option<f64> {
        let v = self.values[row];
        (!v.is_nan() && self.nulls.is_none_or(|n| n.is_valid(row))).then_some(v)
    }
}

/// The bits (`f64::to_bits`) of a number argument ([`stored_number`]).
#[inline]
pub fn number_bits(a: Arg<'_>) -> Option<u64> {
    stored_number(a).map(f64::to_bits)
}

/// The argument columns of a batch (none constant).
///
/// # Errors
/// As [`Column::new`].
pub fn columns_of(name: &str, arrays: &[ArrayRef]) -> Result<Vec<Column>, DataFusionError> {
    arrays
        .iter()
        .enumerate()
        .map(|(i, a)| Column::new(name, i, Arc::clone(a), false))
        .collect()
}

/// Reads row `row` of `cols` into `into`; returns how many arguments the row has.
#[inline]
pub fn read_row<'c>(cols: &'c [Column], row: usize, into: &mut [Arg<'c>; MAX_ARGS]) -> usize {
    for (slot, c) in into.iter_mut().zip(cols) {
        *slot = c.get(row);
    }
    cols.len().min(MAX_ARGS)
}

/// The rows of query results, each value as the catalogue reads it, owned: how the
/// shell and the tests read DataFusion's results.
///
/// # Errors
/// As [`Column::new`].
///
/// # Example
/// ```
/// use std::sync::Arc;
/// use datafusion::arrow::array::{ArrayRef, Float64Array, RecordBatch};
/// use ogive::catalogue::value::Out;
/// let a: ArrayRef = Arc::new(Float64Array::from(vec![Some(1.5), None]));
/// let b = RecordBatch::try_from_iter([("x", a)]).unwrap();
/// assert_eq!(ogive::datafusion::rows(&[b]).unwrap(), vec![vec![Out::Real(1.5)], vec![Out::Null]]);
/// ```
pub fn rows(batches: &[RecordBatch]) -> Result<Vec<Vec<Out>>, DataFusionError> {
    let mut out = Vec::new();
    for b in batches {
        let cols = columns_of("rows", b.columns())?;
        out.extend((0..b.num_rows()).map(|r| cols.iter().map(|c| Out::from(c.get(r))).collect()));
    }
    Ok(out)
}

/// The Arrow type of a declared result.
pub fn data_type(returns: Returns) -> DataType {
    match returns {
        Returns::Real | Returns::Count => DataType::Float64,
        Returns::Integer => DataType::Int64,
        Returns::Text | Returns::Rows => DataType::Utf8,
        Returns::Blob => DataType::Binary,
    }
}

/// Results as an array of the declared type.
///
/// # Errors
/// A result of another type than declared (a registry row that drifted from its body).
///
/// # Example
/// ```
/// use ogive::catalogue::{Returns, value::Out};
/// let a = ogive::datafusion::out_array("f", Returns::Count, vec![Out::Integer(3), Out::Null]).unwrap();
/// assert_eq!(a.len(), 2);
/// ```
pub fn out_array(
    name: &str,
    returns: Returns,
    outs: Vec<Out>,
) -> Result<ArrayRef, DataFusionError> {
    if let Some(o) = outs.iter().find(|o| !returns.admits(o)) {
        return Err(DataFusionError::Internal(format!(
            "{name} returned {o:?}, not its declared {returns:?}"
        )));
    }
    let outs = outs.iter();
    Ok(match returns {
        Returns::Real | Returns::Count => {
            Arc::new(Float64Array::from_iter(outs.map(|o| match o {
                Out::Real(r) => Some(*r),
                Out::Integer(i) => Some(*i as f64),
                _ => None,
            })))
        }
        Returns::Integer => Arc::new(Int64Array::from_iter(outs.map(|o| match o {
            Out::Integer(i) => Some(*i),
            _ => None,
        }))),
        Returns::Text | Returns::Rows => Arc::new(StringArray::from_iter(outs.map(|o| match o {
            Out::Text(t) => Some(t.as_str()),
            _ => None,
        }))),
        Returns::Blob => Arc::new(BinaryArray::from_iter(outs.map(|o| match o {
            Out::Blob(b) => Some(b.as_slice()),
            _ => None,
        }))),
    })
}

/// The Arrow type of a list of values a state ships apart from its saved form
/// ([`crate::catalogue::state::State::take_values`]): a list of non-null doubles, with
/// 64-bit offsets (a group's list, or a batch of them, may hold more than 2^31 values).
pub fn values_list_type() -> DataType {
    DataType::LargeList(item_field())
}

/// The items of [`values_list_type`].
fn item_field() -> FieldRef {
    Arc::new(Field::new_list_field(DataType::Float64, false))
}

/// A state's list of values as a one-row list scalar of [`values_list_type`], without a
/// copy: the vector becomes the Arrow buffer.
pub fn values_list(values: Vec<f64>) -> ScalarValue {
    let ends = vec![0, values.len() as i64];
    ScalarValue::LargeList(Arc::new(values_column(values, ends)))
}

/// A column of [`values_list_type`] from its values end to end and the offsets where each
/// row's start and end (`ends[0] = 0`, one more than the rows), without a copy of either.
pub fn values_column(values: Vec<f64>, ends: Vec<i64>) -> LargeListArray {
    LargeListArray::new(
        item_field(),
        OffsetBuffer::new(ScalarBuffer::from(ends)),
        Arc::new(Float64Array::new(ScalarBuffer::from(values), None)),
        None,
    )
}

/// A row's values in a list column of [`values_list_type`], shared with the column's
/// buffer.
struct Shared(ScalarBuffer<f64>);

impl Run for Shared {
    fn values(&self) -> &[f64] {
        &self.0
    }
}

/// Row `row` of each list column, as runs that share the columns' buffers.
///
/// # Errors
/// A column that is not such a list, or a NULL value in it (a state's values are never
/// NULL): an internal error naming the function.
pub fn runs_at(
    name: &str,
    lists: &[ArrayRef],
    row: usize,
) -> Result<Vec<Arc<dyn Run>>, DataFusionError> {
    let bad = || {
        DataFusionError::Internal(format!(
            "{name}: a partial state's values are not a list of doubles"
        ))
    };
    lists
        .iter()
        .map(|col| {
            let list = col.as_list_opt::<i64>().ok_or_else(bad)?;
            if row >= list.len() {
                return Err(bad());
            }
            let items = list.value(row);
            let items = items.as_primitive_opt::<Float64Type>().ok_or_else(bad)?;
            if items.null_count() > 0 {
                return Err(bad());
            }
            Ok(Arc::new(Shared(items.values().clone())) as Arc<dyn Run>)
        })
        .collect()
}
