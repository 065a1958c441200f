//! The writers' last guard: no table holds a number that is not physics.
//! Every float column of a batch is checked before it is written (in release
//! builds too: a debug assertion would not stand between a bug and a
//! dataset others measure against).

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type};
use arrow_array::{Array, RecordBatch};
use arrow_schema::DataType;
use std::io;

/// Values scanned at a time: a block with no NaN or infinity (the usual
/// case) is passed in one branch-free pass that the compiler vectorises.
const BLOCK: usize = 256;

/// The row of the first value of `values` that is NaN or infinite and not
/// null (`valid`).
fn first_in<T: Copy + Into<f64> + Finite>(
    values: &[T],
    valid: impl Fn(usize) -> bool,
) -> Option<(usize, f64)> {
    values
        .chunks(BLOCK)
        .enumerate()
        .filter(|(_, b)| b.iter().fold(false, |bad, x| bad | !x.finite()))
        .find_map(|(k, b)| {
            let at = b
                .iter()
                .enumerate()
                .position(|(r, x)| !x.finite() && valid(k * BLOCK + r))?;
            Some((k * BLOCK + at, b[at].into()))
        })
}

/// The finiteness test of f32 and f64, as a comparison of the exponent
/// bits (all ones for NaN and infinity), which vectorises.
trait Finite {
    fn finite(self) -> bool;
}

impl Finite for f32 {
    fn finite(self) -> bool {
        self.to_bits() & 0x7f80_0000 != 0x7f80_0000
    }
}

impl Finite for f64 {
    fn finite(self) -> bool {
        self.to_bits() & 0x7ff0_0000_0000_0000 != 0x7ff0_0000_0000_0000
    }
}

/// The row of the first value of `col` (nulls aside) that is NaN or infinite.
fn first_non_finite(col: &dyn Array) -> Option<(usize, f64)> {
    let valid = |r: usize| col.is_valid(r);
    match col.data_type() {
        DataType::Float32 => first_in(col.as_primitive::<Float32Type>().values(), valid),
        DataType::Float64 => first_in(col.as_primitive::<Float64Type>().values(), valid),
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
    use arrow_buffer::NullBuffer;
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
        // Past the first block of values, and after a null whose slot is not
        // finite (a null's slot may hold anything).
        let mut values = vec![0.5f32; 700];
        values[3] = f32::NAN;
        values[600] = f32::NEG_INFINITY;
        let valid: Vec<bool> = (0..700).map(|r| r != 3).collect();
        let a = Float32Array::new(values.into(), Some(NullBuffer::from(valid)));
        assert_eq!(first_non_finite(&a), Some((600, f64::NEG_INFINITY)));
        for bad in [f64::INFINITY, f64::NAN, -f64::INFINITY] {
            assert!(!bad.finite() && !(bad as f32).finite());
        }
        for good in [0.0, -0.0, f64::MAX, f64::MIN_POSITIVE, 1e-310] {
            assert!(good.finite());
        }
    }
}
