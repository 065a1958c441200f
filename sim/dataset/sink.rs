//! Table writers: Parquet (Arrow schema embedded, units in field metadata)
//! and CSV (the same columns; `time` as local ISO-8601 with its UTC offset).

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type, Int16Type, TimestampMillisecondType};
use arrow_array::{Array, RecordBatch};
use arrow_schema::{DataType, Schema};
use parquet::arrow::ArrowWriter;
use parquet::basic::Compression;
use parquet::file::properties::WriterProperties;
use std::fs::File;
use std::io::{self, BufWriter, Write};
use std::path::Path;
use std::sync::Arc;

#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Format {
    Parquet,
    Csv,
}

impl Format {
    pub fn ext(self) -> &'static str {
        match self {
            Format::Parquet => "parquet",
            Format::Csv => "csv",
        }
    }
}

pub enum Sink {
    Parquet(Box<ArrowWriter<BufWriter<File>>>),
    Csv {
        out: BufWriter<File>,
        tz: jiff::tz::TimeZone,
    },
}

fn to_io(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

impl Sink {
    pub fn create(
        path: &Path,
        format: Format,
        schema: Arc<Schema>,
        timezone: &str,
    ) -> io::Result<Sink> {
        let file = BufWriter::with_capacity(1 << 20, File::create(path)?);
        match format {
            Format::Parquet => {
                // Row groups of 128 Ki rows keep the writer's buffers small
                // (memory independent of the run length).
                let props = WriterProperties::builder()
                    .set_compression(Compression::SNAPPY)
                    .set_max_row_group_row_count(Some(128 * 1024))
                    .build();
                Ok(Sink::Parquet(Box::new(
                    ArrowWriter::try_new(file, schema, Some(props)).map_err(to_io)?,
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

    pub fn write(&mut self, batch: &RecordBatch) -> io::Result<()> {
        match self {
            Sink::Parquet(w) => w.write(batch).map_err(to_io),
            Sink::Csv { out, tz } => write_csv(out, tz, batch),
        }
    }

    pub fn close(self) -> io::Result<()> {
        match self {
            Sink::Parquet(w) => {
                let mut inner = w.into_inner().map_err(to_io)?;
                inner.flush()?;
                inner.get_ref().sync_all()
            }
            Sink::Csv { mut out, .. } => {
                out.flush()?;
                out.get_ref().sync_all()
            }
        }
    }
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
