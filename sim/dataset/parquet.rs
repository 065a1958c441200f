//! Parquet tables whose columns are encoded in parallel.
//!
//! Each column of the open row group has its own `ArrowColumnWriter` (the
//! parquet crate's low-level column API); every batch is cut at row-group
//! boundaries and each column's slice goes to that column's writer, on
//! whichever thread is free. A writer sees the same slices in the same order
//! whatever the number of threads, and finished column chunks are spliced
//! into the file in column order, so the bytes do not depend on it.

use super::dict_column::{self, DictColumn};
use super::float_column::{self, FloatColumn};
use arrow_array::{ArrayRef, RecordBatch};
use arrow_schema::{DataType, FieldRef, SchemaRef};
use bytes::Bytes;
use parquet::arrow::arrow_writer::{
    compute_leaves, ArrowColumnChunk, ArrowColumnWriter, ArrowRowGroupWriterFactory,
};
use parquet::arrow::ArrowWriter;
use parquet::column::writer::ColumnCloseResult;
use parquet::file::properties::WriterProperties;
use parquet::file::writer::SerializedFileWriter;
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::sync::Mutex;

/// Rows per row group: 1 Mi rows (the parquet crate's and pyarrow's
/// default; 12 days at 1 s), so a reader that works a row group per thread
/// has several for a month at 1 s, and the writer buffers at most one.
pub const ROW_GROUP_ROWS: usize = 1 << 20;

/// zstd level 1: chosen by measurement (DEVELOPERS.md, "Parquet writer").
pub(crate) const ZSTD_LEVEL: i32 = 1;

fn to_io(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

/// The writer of one column of the open row group.
enum Column {
    Arrow(Box<ArrowColumnWriter>),
    /// Dictionary-coded strings, from their keys ([`dict_column`]).
    Dict(DictColumn),
    /// Byte-stream-split floats, from their values ([`float_column`]).
    F32(FloatColumn<f32>),
    F64(FloatColumn<f64>),
}

/// A finished column chunk, ready to splice into the row group.
enum Chunk {
    Arrow(ArrowColumnChunk),
    /// Bytes encoded here, with what the row group needs to splice them.
    Spliced(Bytes, ColumnCloseResult),
}

impl Column {
    fn write(&mut self, field: &FieldRef, col: &ArrayRef) -> io::Result<()> {
        match self {
            Column::Arrow(w) => {
                for leaf in compute_leaves(field, col).map_err(to_io)? {
                    w.write(&leaf).map_err(to_io)?;
                }
                Ok(())
            }
            Column::Dict(d) => d.write(col),
            Column::F32(c) => c.write(col),
            Column::F64(c) => c.write(col),
        }
    }

    fn close(self) -> io::Result<Chunk> {
        match self {
            Column::Arrow(w) => w.close().map(Chunk::Arrow).map_err(to_io),
            Column::Dict(d) => d.close().map(|(b, c)| Chunk::Spliced(b, c)),
            Column::F32(c) => c.close().map(|(b, c)| Chunk::Spliced(b, c)),
            Column::F64(c) => c.close().map(|(b, c)| Chunk::Spliced(b, c)),
        }
    }
}

/// One Parquet file being written.
pub struct ParquetFile {
    file: SerializedFileWriter<BufWriter<File>>,
    factory: ArrowRowGroupWriterFactory,
    schema: SchemaRef,
    /// The open row group's column writers; empty when none is open.
    open: Vec<Column>,
    /// Rows per data page of the dictionary columns.
    page_rows: usize,
    /// Bytes per data page (before compression) of the float columns.
    page_bytes: usize,
    row_groups: usize,
    /// Rows in the open row group.
    rows: usize,
    /// Rows in the row groups already written.
    done: usize,
    /// Rows at which a row group must end (besides every
    /// [`ROW_GROUP_ROWS`]), ascending: a round trip cuts at its train/test
    /// boundary so that each period is whole row groups, copied as encoded.
    cuts: Vec<usize>,
}

impl ParquetFile {
    /// Starts the file (its Arrow schema goes into the footer's metadata).
    pub fn create(
        out: BufWriter<File>,
        schema: SchemaRef,
        props: WriterProperties,
    ) -> io::Result<ParquetFile> {
        let page_rows = props.data_page_row_count_limit().min(ROW_GROUP_ROWS);
        let page_bytes = props.data_page_size_limit();
        let writer = ArrowWriter::try_new(out, schema.clone(), Some(props)).map_err(to_io)?;
        let (file, factory) = writer.into_serialized_writer().map_err(to_io)?;
        Ok(ParquetFile {
            file,
            factory,
            schema,
            open: Vec::new(),
            page_rows,
            page_bytes,
            row_groups: 0,
            rows: 0,
            done: 0,
            cuts: Vec::new(),
        })
    }

    /// Ends a row group at each of these rows too (ascending or not).
    pub fn cut_at(&mut self, rows: &[usize]) {
        self.cuts = rows.to_vec();
        self.cuts.sort_unstable();
    }

    /// Rows the open row group still takes: up to [`ROW_GROUP_ROWS`] and
    /// never past the next cut.
    fn room(&self) -> usize {
        let at = self.done + self.rows;
        let to_cut = self
            .cuts
            .iter()
            .find(|c| **c > self.done)
            .map_or(usize::MAX, |c| c - at);
        (ROW_GROUP_ROWS - self.rows).min(to_cut)
    }

    /// Closes the open row group: its column chunks are finished on
    /// `threads` threads and appended in column order.
    fn flush(&mut self, threads: usize) -> io::Result<()> {
        let writers = std::mem::take(&mut self.open);
        let chunks = parallel(writers, threads, |w| w.close());
        let mut group = self.file.next_row_group().map_err(to_io)?;
        for chunk in chunks {
            match chunk? {
                Chunk::Arrow(c) => c.append_to_row_group(&mut group),
                Chunk::Spliced(bytes, close) => group.append_column(&bytes, close),
            }
            .map_err(to_io)?;
        }
        group.close().map_err(to_io)?;
        self.row_groups += 1;
        self.done += self.rows;
        self.rows = 0;
        Ok(())
    }

    /// Opens a row group: a writer per column.
    fn open_row_group(&mut self) -> io::Result<()> {
        let arrow = self
            .factory
            .create_column_writers(self.row_groups)
            .map_err(to_io)?;
        let descr = self.file.schema_descr();
        // A float page ends at whichever comes first, its rows or its bytes.
        let float_rows = |width: usize| self.page_rows.min(self.page_bytes / width);
        self.open = arrow
            .into_iter()
            .zip(self.schema.fields().iter())
            .enumerate()
            .map(|(i, (w, f))| {
                let d = descr.column(i);
                Ok(if dict_column::applies(f) {
                    Column::Dict(DictColumn::new(d, ZSTD_LEVEL, self.page_rows))
                } else if float_column::applies(f) && *f.data_type() == DataType::Float32 {
                    Column::F32(FloatColumn::new(d, ZSTD_LEVEL, float_rows(4))?)
                } else if float_column::applies(f) {
                    Column::F64(FloatColumn::new(d, ZSTD_LEVEL, float_rows(8))?)
                } else {
                    Column::Arrow(Box::new(w))
                })
            })
            .collect::<io::Result<_>>()?;
        Ok(())
    }

    /// Writes the last row group and the footer, and syncs the file.
    pub fn close(mut self, threads: usize) -> io::Result<()> {
        if self.rows > 0 {
            self.flush(threads)?;
        }
        let mut out = self.file.into_inner().map_err(to_io)?;
        out.flush()?;
        out.get_ref().sync_all()
    }
}

/// One column's slice for one column writer.
type Task<'a> = (&'a mut Column, FieldRef, ArrayRef);

/// Writes each batch to its table; the columns of all of them are encoded
/// on `threads` threads.
pub fn write(tables: &mut [(&mut ParquetFile, RecordBatch)], threads: usize) -> io::Result<()> {
    loop {
        // A round: each table takes what fits in its open row group.
        let mut tasks: Vec<Task> = Vec::new();
        for (t, batch) in tables.iter_mut() {
            if t.rows > 0 && t.room() == 0 {
                t.flush(threads)?;
            }
            let n = batch.num_rows().min(t.room());
            if n == 0 {
                continue;
            }
            let piece = batch.slice(0, n);
            *batch = batch.slice(n, batch.num_rows() - n);
            if t.open.is_empty() {
                t.open_row_group()?;
            }
            t.rows += n;
            let fields = t.schema.fields().iter().cloned();
            for ((w, f), c) in t.open.iter_mut().zip(fields).zip(piece.columns()) {
                tasks.push((w, f, c.clone()));
            }
        }
        if tasks.is_empty() {
            return Ok(());
        }
        let done = parallel(tasks, threads, |(w, f, c)| w.write(&f, &c));
        done.into_iter().collect::<io::Result<()>>()?;
        for (t, _) in tables.iter_mut() {
            if t.rows > 0 && t.room() == 0 {
                t.flush(threads)?;
            }
        }
    }
}

/// `f` applied to every item on `threads` threads (the caller's thread when
/// 1); results in the order of the items.
pub fn parallel<T: Send, R: Send>(
    items: Vec<T>,
    threads: usize,
    f: impl Fn(T) -> R + Sync,
) -> Vec<R> {
    let n = items.len();
    if threads <= 1 || n <= 1 {
        return items.into_iter().map(f).collect();
    }
    let queue = Mutex::new(items.into_iter().enumerate());
    let results: Mutex<Vec<Option<R>>> = Mutex::new((0..n).map(|_| None).collect());
    std::thread::scope(|s| {
        for _ in 0..threads.min(n) {
            s.spawn(|| loop {
                let next = queue.lock().expect("no worker panics").next();
                let Some((i, item)) = next else { break };
                let r = f(item);
                results.lock().expect("no worker panics")[i] = Some(r);
            });
        }
    });
    results
        .into_inner()
        .expect("no worker panics")
        .into_iter()
        .map(|r| r.expect("every item ran"))
        .collect()
}
