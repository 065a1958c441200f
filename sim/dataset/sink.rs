//! Table writers: Parquet (Arrow schema embedded, units in field metadata)
//! and CSV (the same columns; `time` as local ISO-8601 with its UTC offset).

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type, Int16Type, TimestampMillisecondType};
use arrow_array::{Array, RecordBatch};
use arrow_schema::{DataType, Schema};
use parquet::basic::{Compression, Encoding, ZstdLevel};
use parquet::file::properties::WriterProperties;
use parquet::schema::types::ColumnPath;
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::Path;
use std::sync::Arc;

use super::parquet::{ROW_GROUP_ROWS, ZSTD_LEVEL};

/// The file format of a dataset's tables.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    /// Apache Parquet.
    Parquet,
    /// Comma-separated text with a header row; times as local ISO 8601 with
    /// their UTC offset.
    Csv,
}

impl Format {
    /// The file extension without its dot: `parquet` or `csv`.
    pub fn ext(self) -> &'static str {
        match self {
            Format::Parquet => "parquet",
            Format::Csv => "csv",
        }
    }
}

/// One table being written, in either format.
pub enum Sink {
    /// A Parquet file, row group by row group.
    Parquet(Box<super::parquet::ParquetFile>),
    /// A CSV file, with times written in the home's zone.
    Csv {
        /// The buffered file.
        out: BufWriter<File>,
        /// The home's time zone, for the time column.
        tz: jiff::tz::TimeZone,
    },
}

fn to_io(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

impl Sink {
    /// Creates the file at `path` and writes its header (CSV) or opens its
    /// writer (Parquet) for tables of `schema`.
    pub fn create(
        path: &Path,
        format: Format,
        schema: Arc<Schema>,
        timezone: &str,
        values: Values,
    ) -> io::Result<Sink> {
        let file = BufWriter::with_capacity(1 << 20, File::create(path)?);
        match format {
            Format::Parquet => {
                let props = writer_properties(&schema, values);
                Ok(Sink::Parquet(Box::new(
                    super::parquet::ParquetFile::create(file, schema, props)?,
                )))
            }
            Format::Csv => {
                let mut out = file;
                let names: Vec<&str> = schema.fields().iter().map(|f| f.name().as_str()).collect();
                writeln!(out, "{}", names.join(","))?;
                Ok(Sink::Csv {
                    out,
                    tz: jiff::tz::TimeZone::get(timezone).map_err(to_io)?,
                })
            }
        }
    }

    /// Ends a Parquet row group at each of these rows too (see
    /// [`super::parquet::ParquetFile::cut_at`]); CSV has no row groups.
    pub fn cut_at(&mut self, rows: &[usize]) {
        if let Sink::Parquet(t) = self {
            t.cut_at(rows);
        }
    }

    /// Writes `batch`; a Parquet table's columns are encoded on `threads`
    /// threads.
    pub fn write(&mut self, batch: &RecordBatch, threads: usize) -> io::Result<()> {
        write_all(vec![(self, batch.clone())], threads)
    }

    /// Appends the Parquet row groups closed by finished rounds to the
    /// file (CSV is written as it comes).
    pub fn append_closed(&mut self) -> io::Result<()> {
        match self {
            Sink::Parquet(t) => t.append_closed(),
            Sink::Csv { .. } => Ok(()),
        }
    }

    /// Finishes the file (Parquet: the last row group and the footer) and
    /// syncs it.
    pub fn close(self, threads: usize) -> io::Result<()> {
        match self {
            Sink::Parquet(t) => t.close(threads),
            Sink::Csv { mut out, .. } => {
                out.flush()?;
                out.get_ref().sync_all()
            }
        }
    }
}

/// Writes each batch to its sink: the columns of all the Parquet tables
/// among them are encoded together on `threads` threads; CSV is written
/// as text, one sink after the other.
pub fn write_all(writes: Vec<(&mut Sink, RecordBatch)>, threads: usize) -> io::Result<()> {
    let mut tables = parquet_tables(writes)?;
    super::parquet::write(&mut tables, threads)
}

/// Each batch checked ([`super::finite::check`]); CSV written here, the
/// Parquet tables with their batches returned in the given order.
fn parquet_tables(
    writes: Vec<(&mut Sink, RecordBatch)>,
) -> io::Result<Vec<(&mut super::parquet::ParquetFile, RecordBatch)>> {
    let mut tables = Vec::new();
    for (sink, batch) in writes {
        super::finite::check(&batch)?;
        match sink {
            Sink::Parquet(t) => tables.push((&mut **t, batch)),
            Sink::Csv { out, tz } => write_csv(out, tz, &batch)?,
        }
    }
    Ok(tables)
}

/// [`write_all`] without waiting for the encoding: the Parquet tables'
/// columns go to `pool`, and [`Started::finish`] (with the same sinks, in
/// the same order) takes their writers back. CSV is written at once.
pub fn start_all(
    writes: Vec<(&mut Sink, RecordBatch)>,
    pool: &super::parquet::Pool,
) -> io::Result<Started> {
    let mut tables = parquet_tables(writes)?;
    super::parquet::start(&mut tables, pool).map(Started)
}

/// Batches handed to the encoding threads by [`start_all`].
#[must_use = "the column writers come back only through finish"]
pub struct Started(super::parquet::Pending);

impl Started {
    /// Waits for the encoding and gives the sinks their column writers
    /// back; row groups it closed are appended later
    /// ([`Sink::append_closed`]).
    pub fn finish(self, sinks: [&mut Sink; 2]) -> io::Result<()> {
        let mut tables: Vec<_> = sinks
            .into_iter()
            .filter_map(|s| match s {
                Sink::Parquet(t) => Some(&mut **t),
                Sink::Csv { .. } => None,
            })
            .collect();
        self.0.finish(&mut tables)
    }
}

/// How a table's values vary, which decides its Parquet page size.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Values {
    /// Meter readings: noise in every row. Pages of up to 1 MiB let zstd
    /// give each byte-stream-split stream its own entropy table
    /// (30 d at 1 s of the split-phase demo: meters 62.6 MB, against
    /// 68.2 MB in pages of 20 000 rows).
    Noisy,
    /// Exact truth and events: long runs of one value. Pages of 20 000 rows
    /// (80 kB of f32) fall in zstd's small-input parameters, which find
    /// those runs better (same run: truth 17.8 MB, against 20.4 MB in
    /// 1 MiB pages).
    Stepwise,
}

/// Writer settings per column kind: delta-coded `time`, byte-stream-split
/// floats, dictionaries only on the categorical (string) columns, zstd for
/// all, statistics per page (the parquet crate's default: chunk statistics
/// and a column index).
fn writer_properties(schema: &Schema, values: Values) -> WriterProperties {
    let page_rows = match values {
        Values::Noisy => usize::MAX,
        Values::Stepwise => 20_000,
    };
    let mut b = WriterProperties::builder()
        .set_compression(Compression::ZSTD(
            ZstdLevel::try_new(ZSTD_LEVEL).expect("a valid zstd level"),
        ))
        .set_max_row_group_row_count(Some(ROW_GROUP_ROWS))
        .set_data_page_row_count_limit(page_rows)
        .set_dictionary_enabled(false);
    for f in schema.fields() {
        let c = ColumnPath::from(f.name().as_str());
        b = match f.data_type() {
            DataType::Timestamp(_, _) => b.set_column_encoding(c, Encoding::DELTA_BINARY_PACKED),
            DataType::Float32 | DataType::Float64 => {
                b.set_column_encoding(c, Encoding::BYTE_STREAM_SPLIT)
            }
            _ => b.set_column_dictionary_enabled(c, true),
        };
    }
    b.build()
}

fn csv_text(out: &mut impl Write, s: &str) -> io::Result<()> {
    if s.contains([',', '"', '\n']) {
        write!(out, "\"{}\"", s.replace('"', "\"\""))
    } else {
        out.write_all(s.as_bytes())
    }
}

fn write_csv(
    out: &mut BufWriter<File>,
    tz: &jiff::tz::TimeZone,
    b: &RecordBatch,
) -> io::Result<()> {
    let cols = b.columns();
    for r in 0..b.num_rows() {
        for (j, c) in cols.iter().enumerate() {
            if j > 0 {
                out.write_all(b",")?;
            }
            // A null reading is an empty cell.
            if c.is_null(r) {
                continue;
            }
            match c.data_type() {
                DataType::Timestamp(_, _) => {
                    let ms = c.as_primitive::<TimestampMillisecondType>().value(r);
                    let z = jiff::Timestamp::from_millisecond(ms)
                        .map_err(to_io)?
                        .to_zoned(tz.clone());
                    write!(out, "{}", z.strftime("%Y-%m-%dT%H:%M:%S%.3f%:z"))?;
                }
                DataType::Float32 => write!(out, "{}", c.as_primitive::<Float32Type>().value(r))?,
                DataType::Float64 => write!(out, "{}", c.as_primitive::<Float64Type>().value(r))?,
                DataType::Utf8 => csv_text(out, c.as_string::<i32>().value(r))?,
                DataType::Dictionary(_, _) => {
                    let d = c.as_dictionary::<Int16Type>();
                    let key = d.keys().value(r) as usize;
                    csv_text(out, d.values().as_string::<i32>().value(key))?
                }
                other => return Err(to_io(format!("no CSV form for {other}"))),
            }
        }
        out.write_all(b"\n")?;
    }
    Ok(())
}
