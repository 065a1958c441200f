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
use std::sync::{mpsc, Mutex};

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
    /// The open row group's column writers; empty when none is open (or
    /// while a [`Pending`] round has them).
    open: Vec<Column>,
    /// Row groups closed but not yet appended to the file, in order: each
    /// one's column chunks in column order.
    closed: Vec<Vec<Chunk>>,
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
            closed: Vec::new(),
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

    /// Counts the open row group's rows as done (its writers are closed
    /// by whoever holds them).
    fn end_row_group(&mut self) {
        self.row_groups += 1;
        self.done += self.rows;
        self.rows = 0;
    }

    /// Closes the open row group: its column chunks are finished on
    /// `threads` threads and queued to be appended.
    fn flush(&mut self, threads: usize) -> io::Result<()> {
        let writers = std::mem::take(&mut self.open);
        let chunks = parallel(writers, threads, |w| w.close());
        self.closed
            .push(chunks.into_iter().collect::<io::Result<_>>()?);
        self.end_row_group();
        Ok(())
    }

    /// Appends the closed row groups to the file, in order, their column
    /// chunks in column order.
    pub fn append_closed(&mut self) -> io::Result<()> {
        for chunks in std::mem::take(&mut self.closed) {
            let mut group = self.file.next_row_group().map_err(to_io)?;
            for chunk in chunks {
                match chunk {
                    Chunk::Arrow(c) => c.append_to_row_group(&mut group),
                    Chunk::Spliced(bytes, close) => group.append_column(&bytes, close),
                }
                .map_err(to_io)?;
            }
            group.close().map_err(to_io)?;
        }
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
        self.append_closed()?;
        let mut out = self.file.into_inner().map_err(to_io)?;
        out.flush()?;
        out.get_ref().sync_all()
    }
}

/// What an encoding job leaves: the column writer, still open, or its
/// finished chunk when the job also closed the row group.
enum Done {
    Open(Column),
    Closed(Box<Chunk>),
}

/// Writes `col` to `w`, then closes `w` when `close` (the slice fills the
/// row group). The slice is dropped before the job ends, so the chunk's
/// vectors it was lent from are free again once every job is done.
fn encode(mut w: Column, field: FieldRef, col: ArrayRef, close: bool) -> io::Result<Done> {
    w.write(&field, &col)?;
    drop(col);
    if close {
        w.close().map(|c| Done::Closed(Box::new(c)))
    } else {
        Ok(Done::Open(w))
    }
}

/// Threads that encode column slices, kept for a whole write (rather
/// than spawned per batch): a batch's columns are handed to them and the
/// caller goes on (the next chunk's meter noise) until it needs them back.
pub struct Pool {
    jobs: Option<mpsc::Sender<Job>>,
    workers: Vec<std::thread::JoinHandle<()>>,
}

type Job = Box<dyn FnOnce() + Send>;

impl Pool {
    /// `threads` encoding threads (at least one).
    pub fn new(threads: usize) -> io::Result<Pool> {
        let (tx, rx) = mpsc::channel::<Job>();
        let rx = std::sync::Arc::new(Mutex::new(rx));
        let workers = (0..threads.max(1))
            .map(|i| {
                let rx = rx.clone();
                std::thread::Builder::new()
                    .name(format!("encode-{i}"))
                    .spawn(move || loop {
                        let job = rx.lock().unwrap_or_else(|e| e.into_inner()).recv();
                        match job {
                            Ok(job) => job(),
                            Err(_) => return,
                        }
                    })
            })
            .collect::<io::Result<_>>()?;
        Ok(Pool {
            jobs: Some(tx),
            workers,
        })
    }

    fn run(&self, job: Job) {
        // The workers only stop when the pool is dropped.
        let sent = self.jobs.as_ref().map(|j| j.send(job));
        debug_assert!(matches!(sent, Some(Ok(()))));
    }
}

impl Drop for Pool {
    fn drop(&mut self) {
        self.jobs = None;
        for w in self.workers.drain(..) {
            // A job that panicked has already lost its result, which the
            // waiting side reports.
            let _ = w.join();
        }
    }
}

/// A round of column slices handed to a [`Pool`]: each table's open
/// column writers are out until [`Pending::finish`] takes them back.
#[must_use = "the column writers come back only through finish"]
pub struct Pending {
    results: mpsc::Receiver<(usize, io::Result<Done>)>,
    /// Per table, in the order given: its columns in the round (none when
    /// the table had no rows for it).
    tables: Vec<usize>,
}

impl Pending {
    /// Waits for the round and gives each table its column writers back,
    /// or, for a row group the round closed, queues its finished chunks
    /// to be appended ([`ParquetFile::append_closed`]). `tables` are the
    /// ones the round was started with, in the same order.
    pub fn finish(self, tables: &mut [&mut ParquetFile]) -> io::Result<()> {
        let n: usize = self.tables.iter().sum();
        let mut done: Vec<Option<io::Result<Done>>> = (0..n).map(|_| None).collect();
        for _ in 0..n {
            let (i, r) = self
                .results
                .recv()
                .map_err(|_| to_io("an encoding thread stopped"))?;
            done[i] = Some(r);
        }
        let mut done = done.into_iter().map(|d| d.expect("every job answered"));
        for (t, &columns) in tables.iter_mut().zip(&self.tables) {
            if columns == 0 {
                // Not in the round: its writers never left.
                continue;
            }
            let mut open = Vec::with_capacity(columns);
            let mut closed = Vec::new();
            for d in done.by_ref().take(columns) {
                match d? {
                    Done::Open(w) => open.push(w),
                    Done::Closed(c) => closed.push(*c),
                }
            }
            t.open = open;
            if !closed.is_empty() {
                t.closed.push(closed);
            }
        }
        Ok(())
    }
}

/// Hands each batch's columns to `pool`, as much of each as its open row
/// group takes. Slices that would pass a row group's end wait for the
/// round before them here; the last round is returned unfinished, for
/// [`Pending::finish`] (with the same tables, in the same order).
pub fn start(tables: &mut [(&mut ParquetFile, RecordBatch)], pool: &Pool) -> io::Result<Pending> {
    loop {
        let round = start_round(tables, pool)?;
        if tables.iter().all(|(_, b)| b.num_rows() == 0) {
            return Ok(round);
        }
        let mut files: Vec<&mut ParquetFile> = tables.iter_mut().map(|(t, _)| &mut **t).collect();
        round.finish(&mut files)?;
    }
}

/// One round: each table's open row group takes what fits of its batch
/// (the rest is left in the batch); a row group the round fills is closed
/// by the same jobs.
fn start_round(tables: &mut [(&mut ParquetFile, RecordBatch)], pool: &Pool) -> io::Result<Pending> {
    let (tx, results) = mpsc::channel();
    let mut next = 0;
    let mut round = Vec::with_capacity(tables.len());
    for (t, batch) in tables.iter_mut() {
        let n = batch.num_rows().min(t.room());
        if n == 0 {
            round.push(0);
            continue;
        }
        let piece = batch.slice(0, n);
        *batch = batch.slice(n, batch.num_rows() - n);
        if t.open.is_empty() {
            t.open_row_group()?;
        }
        t.rows += n;
        let close = t.room() == 0;
        if close {
            t.end_row_group();
        }
        let writers = std::mem::take(&mut t.open);
        round.push(writers.len());
        let fields = t.schema.fields().iter().cloned();
        for ((w, f), c) in writers
            .into_iter()
            .zip(fields)
            .zip(piece.columns().iter().cloned())
        {
            let (tx, i) = (tx.clone(), next);
            next += 1;
            pool.run(Box::new(move || {
                // The receiver is gone only when the write has failed.
                let _ = tx.send((i, encode(w, f, c, close)));
            }));
        }
    }
    Ok(Pending {
        results,
        tables: round,
    })
}

/// Writes each batch to its table; the columns of all of them are encoded
/// on `threads` threads.
pub fn write(tables: &mut [(&mut ParquetFile, RecordBatch)], threads: usize) -> io::Result<()> {
    let pool = Pool::new(threads)?;
    let round = start(tables, &pool)?;
    let mut files: Vec<&mut ParquetFile> = tables.iter_mut().map(|(t, _)| &mut **t).collect();
    round.finish(&mut files)?;
    files.iter_mut().try_for_each(|t| t.append_closed())
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
