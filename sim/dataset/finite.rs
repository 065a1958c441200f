//! The writers' last guard: no table holds a number that is not physics.
//! Every float column of a batch is checked before it is written (in release
//! builds too: a debug assertion would not stand between a bug and a
//! dataset others measure against).

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type};
use arrow_array::{Array, RecordBatch};
use arrow_schema::DataType;
use std::io;

/// The row of the first value of `col` (nulls aside) that is NaN or infinite.
fn first_non_finite(col: &dyn Array) -> Option<(usize, f64)> {
    let valid = |r: usize| col.is_valid(r);
    match col.data_type() {
        DataType::Float32 => {
            let a = col.as_primitive::<Float32Type>();
            (0..a.len())
                .find(|&r| !a.value(r).is_finite() && valid(r))
                .map(|r| (r, a.value(r) as f64))
        }
        DataType::Float64 => {
            let a = col.as_primitive::<Float64Type>();
            (0..a.len())
                .find(|&r| !a.value(r).is_finite() && valid(r))
                .map(|r| (r, a.value(r)))
        }
        _ => None,
    }
}

/// Refuses a batch holding a NaN or an infinity, naming the column and row.
pub fn check(batch: &RecordBatch) -> io::Result<()> {
    for (field, col) in batch.schema().fields().iter().zip(batch.columns()) {
        if let Some((row, v)) = first_non_finite(col.as_ref()) {
            return Err(io::Error::new(
                io::ErrorKind::InvalidData,
                format!(
                    "refused to write {v} in column `{}` (row {row} of its batch): a dataset holds finite numbers only",
                    field.name()
                ),
            ));
        }
    }
    Ok(())
}

#[cfg(test)]
mod tests {
    use super::*;
    use arrow_array::{Float32Array, Float64Array};
    use arrow_schema::{Field, Schema};
    use std::sync::Arc;

    fn batch(a: Vec<Option<f32>>, b: Vec<f64>) -> RecordBatch {
        let schema = Schema::new(vec![
            Field::new("l1_p_w", DataType::Float32, true),
            Field::new("energy_wh", DataType::Float64, false),
        ]);
        RecordBatch::try_new(
            Arc::new(schema),
            vec![
                Arc::new(Float32Array::from(a)),
                Arc::new(Float64Array::from(b)),
            ],
        )
        .unwrap()
    }

    #[test]
    fn non_finite_numbers_are_refused_with_their_column() {
        assert!(check(&batch(vec![Some(1.0), None], vec![2.0, 3.0])).is_ok());
        let e = check(&batch(vec![Some(1.0), Some(f32::INFINITY)], vec![2.0, 3.0])).unwrap_err();
        assert!(e.to_string().contains("`l1_p_w` (row 1"), "{e}");
        let e = check(&batch(vec![Some(1.0), None], vec![2.0, f64::NAN])).unwrap_err();
        assert!(e.to_string().contains("`energy_wh`"), "{e}");
    }
}
