//! Files of the solver hand-off: slicing dataset tables by rows, and writing
//! an estimate as Parquet or CSV (the built-in solvers use the same contract
//! as any other).

use crate::contract::columns;
use arrow_array::{ArrayRef, Float64Array, RecordBatch, TimestampMillisecondArray};
use arrow_schema::{DataType, Field, Schema, TimeUnit};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::properties::WriterProperties;
use parquet::schema::types::ColumnPath;
use sha2::{Digest, Sha256};
use std::io::{self, Write};
use std::path::Path;
use std::sync::Arc;

/// Creates `path` as a new file: whatever is there (a file, or a symbolic
/// link planted to send our writes elsewhere) is removed first, and the
/// file is opened create-new and without following links, so a write can
/// never land outside the folder.
pub fn create_fresh(path: &Path) -> io::Result<std::fs::File> {
    match std::fs::remove_file(path) {
        Err(e) if e.kind() != io::ErrorKind::NotFound => return Err(e),
        _ => {}
    }
    let mut o = std::fs::OpenOptions::new();
    o.write(true).create_new(true);
    #[cfg(unix)]
    {
        use std::os::unix::fs::OpenOptionsExt;
        o.custom_flags(libc::O_NOFOLLOW);
    }
    o.open(path)
}

/// A writer that hashes (sha256) and counts what passes through it; the
/// tally is shared, so it can be read once the Parquet writer has closed.
struct Hashing<W: Write> {
    inner: W,
    tally: Arc<std::sync::Mutex<(Sha256, u64)>>,
}

impl<W: Write> Write for Hashing<W> {
    fn write(&mut self, buf: &[u8]) -> io::Result<usize> {
        let n = self.inner.write(buf)?;
        let mut t = self
            .tally
            .lock()
            .map_err(|_| io::Error::other("hash poisoned"))?;
        t.0.update(&buf[..n]);
        t.1 += n as u64;
        Ok(n)
    }
    fn flush(&mut self) -> io::Result<()> {
        self.inner.flush()
    }
}

fn io_err(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

/// Rows of a Parquet file, from its footer.
pub fn parquet_rows(path: &Path) -> io::Result<usize> {
    use parquet::file::reader::FileReader;
    let r = parquet::file::reader::SerializedFileReader::new(std::fs::File::open(path)?)
        .map_err(io_err)?;
    Ok(r.metadata().file_metadata().num_rows().max(0) as usize)
}

/// Copies rows `from..to` of a Parquet table to `dst`, schema and units kept.
pub fn copy_rows(src: &Path, dst: &Path, from: usize, to: usize) -> io::Result<usize> {
    let (rows, _, _) = split_rows(src, &[(dst, from..to)])?
        .pop()
        .expect("one output");
    Ok(rows)
}

/// Writer settings for task files: quick to write and to read (Snappy, no
/// dictionary but on text columns, whose values repeat).
fn task_properties(schema: &Schema) -> WriterProperties {
    let mut b = WriterProperties::builder()
        .set_compression(Compression::SNAPPY)
        .set_dictionary_enabled(false);
    for f in schema.fields() {
        if matches!(
            f.data_type(),
            DataType::Utf8 | DataType::LargeUtf8 | DataType::Dictionary(_, _)
        ) {
            b = b.set_column_dictionary_enabled(ColumnPath::from(f.name().as_str()), true);
        }
    }
    b.build()
}

/// One output of [`split_rows`]: where, and which rows of the source.
pub type RowSlice<'a> = (&'a Path, std::ops::Range<usize>);

/// Where raw copying of whole source row groups may start for `r`: the
/// first row-group boundary at or after `r.start`, when every row group
/// from there to `r.end` lies wholly inside `r` (so no row after them needs
/// encoding). `bounds` are the row groups' first rows and the row count.
fn raw_from(bounds: &[usize], r: &std::ops::Range<usize>) -> usize {
    let ends_on_boundary = bounds.contains(&r.end);
    match bounds.iter().find(|b| **b >= r.start) {
        Some(&b) if ends_on_boundary && b < r.end => b,
        _ => r.end,
    }
}

/// Writes several row ranges of one Parquet table, each to its own file,
/// created anew. Whole row groups of the source inside a range are copied
/// as they are (no decoding); the rest is decoded once, in one pass, and
/// encoded quickly. Returns per output its rows, sha256 (hex, hashed on the
/// way out) and bytes.
pub fn split_rows(src: &Path, outs: &[RowSlice]) -> io::Result<Vec<(usize, String, u64)>> {
    let file = std::fs::File::open(src)?;
    let b = ParquetRecordBatchReaderBuilder::try_new(file.try_clone()?).map_err(io_err)?;
    let schema = b.schema().clone();
    let meta = b.metadata().clone();
    let mut bounds = vec![0usize];
    for rg in meta.row_groups() {
        bounds.push(bounds.last().copied().unwrap_or(0) + rg.num_rows().max(0) as usize);
    }
    let raw: Vec<usize> = outs.iter().map(|(_, r)| raw_from(&bounds, r)).collect();
    let mut writers = Vec::new();
    for (dst, _) in outs {
        let tally = Arc::new(std::sync::Mutex::new((Sha256::new(), 0u64)));
        let out = Hashing {
            inner: std::io::BufWriter::with_capacity(1 << 20, create_fresh(dst)?),
            tally: tally.clone(),
        };
        let w = ArrowWriter::try_new(out, schema.clone(), Some(task_properties(&schema)))
            .map_err(io_err)?;
        writers.push((w, tally, 0usize));
    }
    // The rows that must be decoded: those before each range's first whole
    // row group. Only the row groups holding them are read.
    let decode: Vec<std::ops::Range<usize>> = outs
        .iter()
        .zip(&raw)
        .map(|((_, r), &x)| r.start..x.min(r.end))
        .filter(|r| !r.is_empty())
        .collect();
    if let (Some(lo), Some(hi)) = (
        decode.iter().map(|r| r.start).min(),
        decode.iter().map(|r| r.end).max(),
    ) {
        let first = bounds.partition_point(|&b| b <= lo) - 1;
        let last = bounds.partition_point(|&b| b < hi) - 1;
        let reader = b
            .with_row_groups((first..=last).collect())
            .with_batch_size(1 << 16)
            .build()
            .map_err(io_err)?;
        let mut row = bounds[first];
        for batch in reader {
            let batch = batch.map_err(io_err)?;
            let (lo, hi) = (row, row + batch.num_rows());
            for (((w, _, written), (_, r)), &x) in writers.iter_mut().zip(outs).zip(&raw) {
                let (a, z) = (r.start.max(lo), r.end.min(hi).min(x));
                if a < z {
                    w.write(&batch.slice(a - lo, z - a)).map_err(io_err)?;
                    *written += z - a;
                }
            }
            row = hi;
        }
    }
    let mut done = Vec::new();
    for ((w, tally, written), ((_, r), &x)) in writers.into_iter().zip(outs.iter().zip(&raw)) {
        let copied = copy_row_groups(w, &file, &meta, &bounds, x..r.end)?;
        let (hash, bytes) =
            std::mem::take(&mut *tally.lock().map_err(|_| io_err("hash poisoned"))?);
        let hex = hash.finalize().iter().map(|b| format!("{b:02x}")).collect();
        done.push((written + copied, hex, bytes));
    }
    Ok(done)
}

/// Appends the source's whole row groups covering `rows` (on row-group
/// boundaries) to the writer, column chunk by column chunk as they are
/// encoded, then closes the file. Returns the rows copied.
fn copy_row_groups<W: Write + Send>(
    w: ArrowWriter<W>,
    src: &std::fs::File,
    meta: &parquet::file::metadata::ParquetMetaData,
    bounds: &[usize],
    rows: std::ops::Range<usize>,
) -> io::Result<usize> {
    use parquet::column::writer::ColumnCloseResult;
    let (mut fw, _) = w.into_serialized_writer().map_err(io_err)?;
    let mut copied = 0;
    for (k, rg) in meta.row_groups().iter().enumerate() {
        if bounds[k] < rows.start || bounds[k + 1] > rows.end {
            continue;
        }
        let mut rw = fw.next_row_group().map_err(io_err)?;
        for chunk in rg.columns() {
            let close = ColumnCloseResult {
                bytes_written: chunk.compressed_size().max(0) as u64,
                rows_written: rg.num_rows().max(0) as u64,
                metadata: chunk.clone(),
                bloom_filter: None,
                column_index: None,
                offset_index: None,
            };
            rw.append_column(src, close).map_err(io_err)?;
        }
        rw.close().map_err(io_err)?;
        copied += bounds[k + 1] - bounds[k];
    }
    // Closing writes the footer through the hashing writer, then drops it.
    fw.close().map_err(io_err)?;
    Ok(copied)
}

/// A column of an estimate, produced row by row (so a month at 1 s is never
/// held as f64 columns).
pub type EstimateColumn = (String, Box<dyn Fn(usize) -> f64>);

/// Writes a wide estimate: `time` (ms UTC, in `tz`) and one column per name.
pub fn write_estimate(
    path: &Path,
    tz: &str,
    time_ms: &[i64],
    cols: &[EstimateColumn],
) -> io::Result<()> {
    let tmp = path.with_extension("partial");
    if path.extension().is_some_and(|e| e == "csv") {
        let mut f = std::io::BufWriter::new(create_fresh(&tmp)?);
        let tzz = jiff::tz::TimeZone::get(tz).map_err(io_err)?;
        write!(f, "{}", columns::TIME)?;
        for (n, _) in cols {
            write!(f, ",{n}")?;
        }
        writeln!(f)?;
        for (r, &t) in time_ms.iter().enumerate() {
            let z = jiff::Timestamp::from_millisecond(t)
                .map_err(io_err)?
                .to_zoned(tzz.clone());
            write!(f, "{}", z.strftime("%Y-%m-%dT%H:%M:%S%.3f%:z"))?;
            for (_, v) in cols {
                write!(f, ",{}", v(r))?;
            }
            writeln!(f)?;
        }
        f.flush()?;
    } else {
        let mut fields = vec![Field::new(
            columns::TIME,
            DataType::Timestamp(TimeUnit::Millisecond, Some(tz.into())),
            false,
        )];
        fields.extend(
            cols.iter()
                .map(|(n, _)| Field::new(n, DataType::Float64, false)),
        );
        let schema = Arc::new(Schema::new(fields));
        let mut w =
            ArrowWriter::try_new(create_fresh(&tmp)?, schema.clone(), None).map_err(io_err)?;
        let step = 1 << 16;
        let mut a = 0;
        while a < time_ms.len() {
            let z = (a + step).min(time_ms.len());
            let mut arrays: Vec<ArrayRef> = vec![Arc::new(
                TimestampMillisecondArray::from(time_ms[a..z].to_vec()).with_timezone(tz),
            )];
            arrays.extend(
                cols.iter()
                    .map(|(_, v)| Arc::new((a..z).map(v).collect::<Float64Array>()) as ArrayRef),
            );
            w.write(&RecordBatch::try_new(schema.clone(), arrays).map_err(io_err)?)
                .map_err(io_err)?;
            a = z;
        }
        w.close().map_err(io_err)?;
    }
    std::fs::rename(&tmp, path)
}
