//! Scalar registry rows as DataFusion `ScalarUDF`s.

use ::datafusion::arrow::datatypes::DataType;
use ::datafusion::error::DataFusionError;
use ::datafusion::logical_expr::{
    ColumnarValue, ScalarFunctionArgs, ScalarUDF, ScalarUDFImpl, Signature, TypeSignature,
    Volatility,
};

use super::convert::{Column, data_type, out_array, read_row};
use super::{guarded, to_datafusion};
use crate::catalogue::args::{ArgError, fail};
use crate::catalogue::reader::{Call, Memo, Shared};
use crate::catalogue::value::Arg;
use crate::catalogue::{FunctionDef, Imp, MAX_ARGS};

/// The DataFusion function of a scalar registry row.
pub fn udf(def: &'static FunctionDef) -> ScalarUDF {
    ScalarUDF::new_from_impl(Scalar::new(def))
}

/// The signature of a registry row: any argument types, at each of its arities.
pub(super) fn signature(def: &FunctionDef) -> Signature {
    let shapes = def
        .arities
        .iter()
        .map(|&n| TypeSignature::Any(n as usize))
        .collect();
    Signature::one_of(shapes, Volatility::Immutable)
}

/// Reads a batch's argument columns.
///
/// # Errors
/// As [`Column::new`].
pub(super) fn columns(
    name: &str,
    args: Vec<ColumnarValue>,
) -> Result<Vec<Column>, DataFusionError> {
    args.into_iter()
        .enumerate()
        .map(|(i, a)| match a {
            ColumnarValue::Array(a) => Column::new(name, i, a, false),
            ColumnarValue::Scalar(s) => Column::new(name, i, s.to_array_of_size(1)?, true),
        })
        .collect()
}

/// A scalar registry row.
struct Scalar {
    def: &'static FunctionDef,
    signature: Signature,
}

by_name!(Scalar);

/// Decoded constant arguments of one batch: a constant column's value is decoded once.
struct BatchMemo<'c> {
    columns: &'c [Column],
    held: [Option<Shared>; MAX_ARGS],
}

impl Memo for BatchMemo<'_> {
    fn recall(&self, i: usize) -> Option<Shared> {
        self.held.get(i).cloned().flatten()
    }

    fn remember(&mut self, i: usize, value: Shared) {
        if self.columns.get(i).is_some_and(Column::is_constant)
            && let Some(slot) = self.held.get_mut(i)
        {
            *slot = Some(value);
        }
    }
}

impl ScalarUDFImpl for Scalar {
    fn name(&self) -> &str {
        self.def.name
    }

    fn signature(&self) -> &Signature {
        &self.signature
    }

    fn return_type(&self, _: &[DataType]) -> Result<DataType, DataFusionError> {
        Ok(data_type(self.def.returns))
    }

    fn invoke_with_args(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue, DataFusionError> {
        guarded(self.def.name, || self.invoke(args))
    }
}

impl Scalar {
    fn new(def: &'static FunctionDef) -> Self {
        Scalar {
            def,
            signature: signature(def),
        }
    }

    fn invoke(&self, args: ScalarFunctionArgs) -> Result<ColumnarValue, DataFusionError> {
        let Imp::Scalar(f) = self.def.imp else {
            return Err(DataFusionError::Internal(format!(
                "{} is not a scalar",
                self.def.name
            )));
        };
        let rows = args.number_rows;
        let cols = columns(self.def.name, args.args)?;
        let mut memo = BatchMemo {
            columns: &cols,
            held: Default::default(),
        };
        let mut outs = Vec::new();
        outs.try_reserve_exact(rows)
            .map_err(|_| to_datafusion(fail(self.def.name, ArgError::OutOfMemory { held: 0 })))?;
        let mut values = [Arg::Null; MAX_ARGS];
        for row in 0..rows {
            let n = read_row(&cols, row, &mut values);
            let mut call = Call::new(self.def.name, &values[..n], &mut memo);
            outs.push(f(&mut call).map_err(to_datafusion)?);
        }
        Ok(ColumnarValue::Array(out_array(
            self.def.name,
            self.def.returns,
            outs,
        )?))
    }
}
