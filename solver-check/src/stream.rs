//! Streaming numeric columns of a Parquet or CSV table in batches of rows,
//! so scoring a year at 1 s never holds a whole table in memory.

use crate::contract::columns;
use crate::table::{table_err, Column, Table, TableError};
use crate::wallclock::{WallClock, WallClockUse};
use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type, Int32Type, Int64Type};
use arrow_array::{Array, ArrayRef};
use arrow_schema::{DataType, TimeUnit};
use parquet::arrow::arrow_reader::{ParquetRecordBatchReader, ParquetRecordBatchReaderBuilder};
use parquet::arrow::ProjectionMask;
use std::path::{Path, PathBuf};

/// Rows per batch read from a table: memory stays flat however long it is.
pub const BATCH_ROWS: usize = 1 << 13;

/// Rows `first..first + time_ms.len()` of the requested columns.
pub struct Batch {
    /// Index of the batch's first row in the table.
    pub first: usize,
    /// Each row's time, ms since 1970-01-01 UTC.
    pub time_ms: Vec<i64>,
    /// The numeric columns asked for, in the order asked (null as NaN).
    pub cols: Vec<Vec<f64>>,
    /// The text columns asked for with [`Header::stream_with_text`].
    pub texts: Vec<Vec<String>>,
}

/// What a table holds, read from its schema or header.
pub struct Header {
    /// The table's file.
    pub file: PathBuf,
    /// Every column but `time`, with whether it is text.
    pub columns: Vec<(String, bool)>,
    /// The time zone of the `time` column (Parquet's timestamp type); None for
    /// naive times and for CSV, whose times carry their offsets.
    pub time_zone: Option<String>,
    /// The zone to name when naive times must be localised (the dataset's).
    pub zone_hint: Option<String>,
    /// Read naive times (no UTC offset) as wall-clock times in this IANA
    /// zone instead of refusing them ([`crate::wallclock`]); set by a caller
    /// that knows the home's zone (the audit, from the declaration).
    pub naive_zone: Option<String>,
    kind: FileKind,
}

enum FileKind {
    Parquet {
        time_index: usize,
        unit: TimeUnit,
    },
    Csv {
        time_index: usize,
        header: Vec<String>,
    },
    Mem(Table),
}

impl Header {
    /// The names of every column but `time`.
    pub fn names(&self) -> impl Iterator<Item = &str> {
        self.columns.iter().map(|(n, _)| n.as_str())
    }
    /// Whether the table has a column `name`.
    pub fn has(&self, name: &str) -> bool {
        self.columns.iter().any(|(n, _)| n == name)
    }
}

/// A CSV reader as spreadsheets and data-frame libraries write: quoted
/// fields (commas and quotes inside), a byte-order mark, CRLF or LF.
fn csv_reader(path: &Path) -> Result<csv::Reader<std::fs::File>, TableError> {
    Ok(csv::ReaderBuilder::new()
        .has_headers(true)
        .buffer_capacity(1 << 20)
        .from_reader(open(path)?))
}

fn csv_err(path: &Path, e: csv::Error) -> TableError {
    let row = e
        .position()
        .map(|p| (p.record() as usize).saturating_sub(1));
    let help = match e.kind() {
        csv::ErrorKind::UnequalLengths { .. } => "give every row one value per column",
        csv::ErrorKind::Utf8 { .. } => "save the file as UTF-8",
        _ => "check the file",
    };
    let message = match e.kind() {
        csv::ErrorKind::UnequalLengths {
            expected_len, len, ..
        } => {
            format!("{len} cells, the header has {expected_len}")
        }
        _ => e.to_string(),
    };
    table_err(path, None, row, message, help)
}

/// The one line of pandas that gives naive times their zone.
pub fn localise_hint(zone: Option<&str>) -> String {
    let z = zone.unwrap_or("America/New_York");
    format!("time zones are never guessed; localise the times to the home's zone before writing, e.g. in pandas: df[\"time\"] = pd.to_datetime(df[\"time\"]).dt.tz_localize(\"{z}\")")
}

fn open(path: &Path) -> Result<std::fs::File, TableError> {
    std::fs::File::open(path).map_err(|e| {
        table_err(
            path,
            None,
            None,
            format!("cannot open it: {e}"),
            "check the path",
        )
    })
}

/// Reads the schema (Parquet) or header (CSV) of `path`.
pub fn header(path: &Path) -> Result<Header, TableError> {
    let h = match path.extension().and_then(|e| e.to_str()) {
        Some("parquet") => parquet_header(path),
        Some("csv") => csv_header(path),
        _ => Err(table_err(
            path,
            None,
            None,
            "unknown file type",
            "give a .parquet or .csv file",
        )),
    }?;
    refuse_repeated_names(&h)?;
    Ok(h)
}

/// A column name written twice (`time` included) would leave it open which
/// of the two is read: refused, naming the name.
fn refuse_repeated_names(h: &Header) -> Result<(), TableError> {
    let mut seen = std::collections::HashSet::from([columns::TIME]);
    for (name, _) in &h.columns {
        if !seen.insert(name.as_str()) {
            return Err(table_err(
                &h.file,
                Some(name),
                None,
                "this column name appears more than once",
                "give each column a name of its own",
            ));
        }
    }
    Ok(())
}

/// A Parquet file's columns (text or not) and its time column's unit and zone.
fn parquet_header(path: &Path) -> Result<Header, TableError> {
    let file = open(path)?;
    let b = ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| {
        table_err(
            path,
            None,
            None,
            format!("not a readable Parquet file: {e}"),
            "write it with pyarrow, pandas or polars (to_parquet)",
        )
    })?;
    let schema = b.schema();
    let ti = schema.index_of(columns::TIME).map_err(|_| {
        table_err(
            path,
            Some(columns::TIME),
            None,
            "there is no `time` column",
            "add a `time` column (timestamps of the interval starts)",
        )
    })?;
    let (unit, tz) = match schema.field(ti).data_type() {
        DataType::Timestamp(u, tz) => (*u, tz.as_ref().map(|t| t.to_string())),
        other => {
            return Err(table_err(
                path,
                Some(columns::TIME),
                None,
                format!("`time` is {other}, not a timestamp"),
                "store `time` as a timestamp with its time zone (pandas: tz-aware datetime64)",
            ))
        }
    };
    let columns = schema
        .fields()
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != ti)
        .map(|(_, f)| {
            (
                f.name().clone(),
                matches!(
                    f.data_type(),
                    DataType::Utf8 | DataType::LargeUtf8 | DataType::Dictionary(_, _)
                ),
            )
        })
        .collect();
    Ok(Header {
        file: path.to_path_buf(),
        columns,
        time_zone: tz,
        zone_hint: None,
        naive_zone: None,
        kind: FileKind::Parquet {
            time_index: ti,
            unit,
        },
    })
}

/// A CSV file's header; every column but `time` read as numbers.
fn csv_header(path: &Path) -> Result<Header, TableError> {
    let mut r = csv_reader(path)?;
    let header: Vec<String> = r
        .headers()
        .map_err(|e| csv_err(path, e))?
        .iter()
        .map(|h| h.trim().trim_start_matches('\u{feff}').to_string())
        .collect();
    let ti = header
        .iter()
        .position(|h| h == columns::TIME)
        .ok_or_else(|| {
            table_err(
                path,
                Some(columns::TIME),
                None,
                "there is no `time` column",
                "add a `time` column of ISO-8601 times with their UTC offset",
            )
        })?;
    let columns = header
        .iter()
        .enumerate()
        .filter(|(i, _)| *i != ti)
        .map(|(_, h)| (h.clone(), false))
        .collect();
    Ok(Header {
        file: path.to_path_buf(),
        columns,
        time_zone: None,
        zone_hint: None,
        naive_zone: None,
        kind: FileKind::Csv {
            time_index: ti,
            header,
        },
    })
}

/// A header over a table already in memory (a long estimate turned wide).
pub fn in_memory(t: Table) -> Header {
    Header {
        file: t.file.clone(),
        columns: t
            .columns
            .iter()
            .map(|(n, c)| (n.clone(), matches!(c, Column::Text(_))))
            .collect(),
        time_zone: t.time_zone.clone(),
        zone_hint: None,
        naive_zone: None,
        kind: FileKind::Mem(t),
    }
}

/// The requested columns of one table, read batch by batch on the caller's
/// thread.
pub struct Stream<'h> {
    h: &'h Header,
    cols: Vec<String>,
    texts: Vec<String>,
    row: usize,
    inner: Inner,
    /// Reads naive times when the header names a zone for them.
    clock: Option<WallClock>,
}

/// What to do with a naive CSV time: refuse it (naming the zone to
/// localise to, if known), or read it on a wall clock.
enum Naive<'a> {
    Refuse(Option<&'a str>),
    Read(&'a mut WallClock),
}

/// Where the asked columns sit: Parquet positions in the projected batch
/// (time, numeric..., text...), CSV cell indices (time, numeric..., text...).
enum Inner {
    Parquet(ParquetRecordBatchReader, Vec<usize>),
    Csv(csv::Reader<std::fs::File>, csv::StringRecord, Vec<usize>),
    Mem,
}

/// A text column of a Parquet batch as strings.
fn texts_of(a: &ArrayRef, path: &Path, name: &str) -> Result<Vec<String>, TableError> {
    use arrow_array::types::{Int16Type, Int8Type, UInt8Type};
    use arrow_buffer::ArrowNativeType;
    fn dict<K: arrow_array::types::ArrowDictionaryKeyType>(a: &ArrayRef) -> Vec<String> {
        let d = a.as_dictionary::<K>();
        let s = d.values().as_string::<i32>();
        d.keys()
            .iter()
            .map(|k| {
                k.and_then(|k| k.to_usize())
                    .map(|k| s.value(k).to_string())
                    .unwrap_or_default()
            })
            .collect()
    }
    Ok(match a.data_type() {
        DataType::Utf8 => a
            .as_string::<i32>()
            .iter()
            .map(|v| v.unwrap_or("").to_string())
            .collect(),
        DataType::LargeUtf8 => a
            .as_string::<i64>()
            .iter()
            .map(|v| v.unwrap_or("").to_string())
            .collect(),
        DataType::Dictionary(k, v) if **v == DataType::Utf8 => match **k {
            DataType::Int8 => dict::<Int8Type>(a),
            DataType::Int16 => dict::<Int16Type>(a),
            DataType::Int32 => dict::<Int32Type>(a),
            DataType::UInt8 => dict::<UInt8Type>(a),
            _ => {
                return Err(table_err(
                    path,
                    Some(name),
                    None,
                    format!("unsupported dictionary column {}", a.data_type()),
                    "store it as plain strings",
                ))
            }
        },
        other => {
            return Err(table_err(
                path,
                Some(name),
                None,
                format!("column type {other} is not text"),
                "store it as strings",
            ))
        }
    })
}

fn time_ms(a: &ArrayRef, unit: TimeUnit) -> Vec<i64> {
    use arrow_array::types::*;
    match unit {
        TimeUnit::Second => a
            .as_primitive::<TimestampSecondType>()
            .values()
            .iter()
            .map(|v| v * 1000)
            .collect(),
        TimeUnit::Millisecond => a
            .as_primitive::<TimestampMillisecondType>()
            .values()
            .to_vec(),
        TimeUnit::Microsecond => a
            .as_primitive::<TimestampMicrosecondType>()
            .values()
            .iter()
            .map(|v| v.div_euclid(1000))
            .collect(),
        TimeUnit::Nanosecond => a
            .as_primitive::<TimestampNanosecondType>()
            .values()
            .iter()
            .map(|v| v.div_euclid(1_000_000))
            .collect(),
    }
}

impl Header {
    /// Streams `time` and the numeric columns `cols` (in that order).
    pub fn stream(&self, cols: &[String]) -> Result<Stream<'_>, TableError> {
        self.stream_with_text(cols, &[])
    }

    /// Streams `time`, the numeric columns `cols` and the text columns `texts`.
    pub fn stream_with_text(
        &self,
        cols: &[String],
        texts: &[String],
    ) -> Result<Stream<'_>, TableError> {
        let path = &self.file;
        let all: Vec<&String> = cols.iter().chain(texts).collect();
        let inner = match &self.kind {
            FileKind::Parquet { time_index, .. } => {
                let file = open(path)?;
                let b = ParquetRecordBatchReaderBuilder::try_new(file)
                    .map_err(|e| table_err(path, None, None, e.to_string(), "check the file"))?;
                let schema = b.schema().clone();
                let mut leaves = vec![*time_index];
                for c in &all {
                    leaves.push(schema.index_of(c).map_err(|_| {
                        table_err(
                            path,
                            Some(c),
                            None,
                            "no such column",
                            "check the column names",
                        )
                    })?);
                }
                let mask = ProjectionMask::roots(b.parquet_schema(), leaves.clone());
                let r = b
                    .with_projection(mask)
                    .with_batch_size(BATCH_ROWS)
                    .build()
                    .map_err(|e| table_err(path, None, None, e.to_string(), "check the file"))?;
                // The projected batch keeps the file's column order.
                let mut sorted = leaves.clone();
                sorted.sort();
                let pos = leaves
                    .iter()
                    .map(|l| sorted.iter().position(|s| s == l).unwrap())
                    .collect();
                Inner::Parquet(r, pos)
            }
            FileKind::Csv { time_index, header } => {
                let mut r = csv_reader(path)?;
                r.headers().map_err(|e| csv_err(path, e))?;
                let idx = std::iter::once(Ok(*time_index))
                    .chain(all.iter().map(|c| {
                        header.iter().position(|h| h == *c).ok_or_else(|| {
                            table_err(
                                path,
                                Some(c),
                                None,
                                "no such column",
                                "check the column names",
                            )
                        })
                    }))
                    .collect::<Result<Vec<_>, _>>()?;
                Inner::Csv(r, csv::StringRecord::new(), idx)
            }
            FileKind::Mem(_) => Inner::Mem,
        };
        Ok(Stream {
            h: self,
            cols: cols.to_vec(),
            texts: texts.to_vec(),
            row: 0,
            inner,
            clock: self.naive_zone.as_deref().and_then(WallClock::new),
        })
    }
}

/// Time, numeric and text cells of one CSV batch.
type CsvCells = (Vec<i64>, Vec<Vec<f64>>, Vec<Vec<String>>);

/// Reads up to [`BATCH_ROWS`] records: the time (an instant: any UTC
/// offset; naive times refused), numbers, texts.
fn csv_batch(
    path: &Path,
    first: usize,
    r: &mut csv::Reader<std::fs::File>,
    rec: &mut csv::StringRecord,
    idx: &[usize],
    n_num: usize,
    mut naive: Naive<'_>,
) -> Result<CsvCells, TableError> {
    let (ti, nums, txts) = (idx[0], &idx[1..1 + n_num], &idx[1 + n_num..]);
    let header = r.headers().map_err(|e| csv_err(path, e))?.clone();
    let mut time = Vec::new();
    let mut cols: Vec<Vec<f64>> = vec![Vec::new(); nums.len()];
    let mut texts: Vec<Vec<String>> = vec![Vec::new(); txts.len()];
    while time.len() < BATCH_ROWS && r.read_record(rec).map_err(|e| csv_err(path, e))? {
        let row = first + time.len();
        if rec.len() == 1 && rec[0].trim().is_empty() {
            continue;
        }
        time.push(csv_time(path, row, rec[ti].trim(), &mut naive)?);
        for (j, &i) in txts.iter().enumerate() {
            texts[j].push(rec[i].trim().to_string());
        }
        for (j, &i) in nums.iter().enumerate() {
            let s = rec[i].trim();
            let v = match s {
                "" => f64::NAN,
                "true" | "True" | "TRUE" => 1.0,
                "false" | "False" | "FALSE" => 0.0,
                _ => s.parse().map_err(|_| {
                    table_err(
                        path,
                        Some(&header[i]),
                        Some(row),
                        format!("\"{s}\" is not a number"),
                        "give powers as numbers in W",
                    )
                })?,
            };
            cols[j].push(v);
        }
    }
    Ok((time, cols, texts))
}

/// A CSV time as an instant (ms since 1970 UTC); a time without its UTC
/// offset is read on the wall clock when there is one, else refused with
/// the line of pandas that localises it.
fn csv_time(path: &Path, row: usize, s: &str, naive: &mut Naive<'_>) -> Result<i64, TableError> {
    if let Ok(t) = s.parse::<jiff::Timestamp>() {
        return Ok(t.as_millisecond());
    }
    if let Ok(dt) = s.parse::<jiff::civil::DateTime>() {
        return match naive {
            Naive::Read(clock) => clock
                .instant(dt)
                .map_err(|m| table_err(path, Some(columns::TIME), Some(row), m, NAIVE_HELP)),
            Naive::Refuse(zone) => Err(table_err(
                path,
                Some(columns::TIME),
                Some(row),
                format!("\"{s}\" is a naive time (no UTC offset)"),
                localise_hint(*zone),
            )),
        };
    }
    Err(table_err(path, Some(columns::TIME), Some(row), format!("\"{s}\" is not a time with its UTC offset"), "write ISO-8601 with an offset, e.g. 2027-03-13T00:00:00-06:00 or 2027-03-13T06:00:00Z (time zones are never guessed)"))
}

/// What to do about a naive time that does not exist in the zone.
const NAIVE_HELP: &str = "the export's times seem to be in standard time all year: write each time with its UTC offset (e.g. 2027-03-14T02:30:00-06:00), or declare a fixed-offset zone such as \"Etc/GMT+6\" (UTC-6) under [home] timezone";

impl Stream<'_> {
    /// How naive times were read so far (None: none were read on a wall
    /// clock, because none were naive or no zone was named).
    pub fn wall_clock(&self) -> Option<WallClockUse> {
        self.clock.as_ref().map(|c| c.used()).filter(|u| u.rows > 0)
    }

    /// The next batch, or None at the end.
    pub fn next_batch(&mut self) -> Result<Option<Batch>, TableError> {
        let path = &self.h.file;
        let first = self.row;
        let batch = match &mut self.inner {
            Inner::Parquet(r, pos) => {
                let Some(b) = r.next() else { return Ok(None) };
                let b = b.map_err(|e| {
                    table_err(path, None, Some(first), e.to_string(), "check the file")
                })?;
                let FileKind::Parquet { unit, .. } = &self.h.kind else {
                    unreachable!()
                };
                let mut batch =
                    parquet_batch(path, first, &b, pos, *unit, &self.cols, &self.texts)?;
                if let (None, Some(clock)) = (&self.h.time_zone, self.clock.as_mut()) {
                    for (k, ms) in batch.time_ms.iter_mut().enumerate() {
                        *ms = clock.instant_of_naive_ms(*ms).map_err(|m| {
                            table_err(path, Some(columns::TIME), Some(first + k), m, NAIVE_HELP)
                        })?;
                    }
                }
                batch
            }
            Inner::Csv(r, rec, idx) => {
                let naive = match self.clock.as_mut() {
                    Some(c) => Naive::Read(c),
                    None => Naive::Refuse(self.h.zone_hint.as_deref()),
                };
                let (time, cols, texts) =
                    csv_batch(path, first, r, rec, idx, self.cols.len(), naive)?;
                if time.is_empty() {
                    return Ok(None);
                }
                Batch {
                    first,
                    time_ms: time,
                    cols,
                    texts,
                }
            }
            Inner::Mem => {
                let FileKind::Mem(t) = &self.h.kind else {
                    unreachable!()
                };
                let Some(batch) = mem_batch(t, path, first, &self.cols, &self.texts)? else {
                    return Ok(None);
                };
                batch
            }
        };
        refuse_wild_values(path, &batch, &self.cols)?;
        self.row += batch.time_ms.len();
        Ok(Some(batch))
    }
}

/// The largest reading, in size, any table may hold: above every quantity
/// of a home's dataset (an energy register of 3 years at 1 MW is 2.6e10 Wh),
/// and small enough that sums and squares over any table stay finite.
pub const MAX_READING: f64 = 1e15;

/// An infinity or a number beyond [`MAX_READING`] in a numeric column is
/// refused where it is read, naming the column and row, so no plot, score
/// or audit computes with it. NaN (a missing reading) passes.
fn refuse_wild_values(path: &Path, b: &Batch, cols: &[String]) -> Result<(), TableError> {
    for (c, v) in b.cols.iter().enumerate() {
        if v.iter().all(|x| x.abs() <= MAX_READING || x.is_nan()) {
            continue;
        }
        let r = v
            .iter()
            .position(|x| x.abs() > MAX_READING)
            .expect("one is beyond");
        let what = if v[r].is_infinite() {
            format!("value {} is not a finite number", v[r])
        } else {
            format!("value {:e} is beyond any reading (1e15 in size)", v[r])
        };
        return Err(table_err(
            path,
            Some(&cols[c]),
            Some(b.first + r),
            what,
            "give every row a finite value in its column's unit (a missing reading empty or null)",
        ));
    }
    Ok(())
}

/// One Parquet record batch as a [`Batch`]: `pos` holds where time, the
/// numeric columns `cols` and the text columns `texts` sit in it.
fn parquet_batch(
    path: &Path,
    first: usize,
    b: &arrow_array::RecordBatch,
    pos: &[usize],
    unit: TimeUnit,
    cols: &[String],
    texts: &[String],
) -> Result<Batch, TableError> {
    let t = b.column(pos[0]);
    if t.null_count() > 0 {
        let r = (0..t.len()).find(|&r| t.is_null(r)).unwrap();
        return Err(table_err(
            path,
            Some(columns::TIME),
            Some(first + r),
            "a time is missing (null)",
            "give every row its time",
        ));
    }
    let mut numbers = Vec::with_capacity(cols.len());
    for (j, name) in cols.iter().enumerate() {
        numbers.push(numbers_of(b.column(pos[j + 1]), path, name)?);
    }
    let n = cols.len();
    let texts = texts
        .iter()
        .enumerate()
        .map(|(j, name)| texts_of(b.column(pos[1 + n + j]), path, name))
        .collect::<Result<Vec<_>, _>>()?;
    Ok(Batch {
        first,
        time_ms: time_ms(t, unit),
        cols: numbers,
        texts,
    })
}

/// A numeric column of a Parquet batch as f64 (nulls as NaN, booleans 0/1).
fn numbers_of(a: &ArrayRef, path: &Path, name: &str) -> Result<Vec<f64>, TableError> {
    Ok(match a.data_type() {
        // Without nulls, straight from the values buffer (the hot path).
        DataType::Float64 if a.null_count() == 0 => {
            a.as_primitive::<Float64Type>().values().to_vec()
        }
        DataType::Float32 if a.null_count() == 0 => a
            .as_primitive::<Float32Type>()
            .values()
            .iter()
            .map(|&x| x as f64)
            .collect(),
        DataType::Float64 => a
            .as_primitive::<Float64Type>()
            .iter()
            .map(|v| v.unwrap_or(f64::NAN))
            .collect(),
        DataType::Float32 => a
            .as_primitive::<Float32Type>()
            .iter()
            .map(|v| v.map_or(f64::NAN, |x| x as f64))
            .collect(),
        DataType::Int64 => a
            .as_primitive::<Int64Type>()
            .iter()
            .map(|v| v.map_or(f64::NAN, |x| x as f64))
            .collect(),
        DataType::Int32 => a
            .as_primitive::<Int32Type>()
            .iter()
            .map(|v| v.map_or(f64::NAN, |x| x as f64))
            .collect(),
        DataType::Boolean => a
            .as_boolean()
            .iter()
            .map(|v| v.map_or(f64::NAN, |b| b as u8 as f64))
            .collect(),
        other => {
            return Err(table_err(
                path,
                Some(name),
                None,
                format!("column type {other} is not numeric"),
                "store powers as float32 or float64",
            ))
        }
    })
}

/// Rows `first ..` (a batch's worth) of a table in memory, or None past
/// its end.
fn mem_batch(
    t: &Table,
    path: &Path,
    first: usize,
    cols: &[String],
    texts: &[String],
) -> Result<Option<Batch>, TableError> {
    if first >= t.time_ms.len() {
        return Ok(None);
    }
    let end = (first + BATCH_ROWS).min(t.time_ms.len());
    let numbers = cols
        .iter()
        .map(|c| {
            t.num(c).map(|v| v[first..end].to_vec()).ok_or_else(|| {
                table_err(
                    path,
                    Some(c),
                    None,
                    "not a numeric column",
                    "store powers as numbers in W",
                )
            })
        })
        .collect::<Result<Vec<_>, _>>()?;
    let texts = texts
        .iter()
        .map(|c| {
            t.text(c)
                .map(|v| v[first..end].to_vec())
                .unwrap_or_default()
        })
        .collect();
    Ok(Some(Batch {
        first,
        time_ms: t.time_ms[first..end].to_vec(),
        cols: numbers,
        texts,
    }))
}

/// Where a cursor gets its batches: a stream read here, or one read by
/// another thread (so truth and estimate decode on two cores).
pub trait Batches {
    /// The next batch, or None at the end of the table.
    fn next_batch(&mut self) -> Result<Option<Batch>, TableError>;
    /// The table's file, for errors.
    fn file(&self) -> &Path;
}

impl Batches for Stream<'_> {
    fn next_batch(&mut self) -> Result<Option<Batch>, TableError> {
        Stream::next_batch(self)
    }
    fn file(&self) -> &Path {
        &self.h.file
    }
}

/// Batches read ahead by another thread (see [`read_ahead`]).
pub struct ReadAhead {
    rx: std::sync::mpsc::Receiver<Result<Option<Batch>, TableError>>,
    file: PathBuf,
}

impl Batches for ReadAhead {
    fn next_batch(&mut self) -> Result<Option<Batch>, TableError> {
        self.rx.recv().unwrap_or(Ok(None))
    }
    fn file(&self) -> &Path {
        &self.file
    }
}

/// Moves `stream` to a thread of `scope` that reads a few batches ahead.
pub fn read_ahead<'scope, 'h: 'scope>(
    scope: &'scope std::thread::Scope<'scope, '_>,
    mut stream: Stream<'h>,
) -> ReadAhead {
    let (tx, rx) = std::sync::mpsc::sync_channel(4);
    let file = stream.h.file.clone();
    scope.spawn(move || loop {
        let r = stream.next_batch();
        let end = !matches!(r, Ok(Some(_)));
        // A closed receiver means the reader stopped early (an error): stop too.
        if tx.send(r).is_err() || end {
            break;
        }
    });
    ReadAhead { rx, file }
}

/// Pulls means over groups of rows from a stream, batch by batch.
pub struct Cursor<'h> {
    stream: Box<dyn Batches + 'h>,
    row: usize,
    batch: Option<Batch>,
    pos: usize,
    /// Called on every batch as it arrives (validation of raw values).
    check: BatchCheck<'h>,
}

/// A check run on every batch as it arrives.
pub type BatchCheck<'h> = Box<dyn Fn(&Batch) -> Result<(), TableError> + 'h>;

impl<'h> Cursor<'h> {
    /// A cursor over `stream`, running `check` on every batch as it arrives.
    pub fn new(stream: Box<dyn Batches + 'h>, check: BatchCheck<'h>) -> Self {
        Cursor {
            stream,
            row: 0,
            batch: None,
            pos: 0,
            check,
        }
    }

    fn fill(&mut self) -> Result<bool, TableError> {
        while self
            .batch
            .as_ref()
            .is_none_or(|b| self.pos >= b.time_ms.len())
        {
            match self.stream.next_batch()? {
                Some(b) => {
                    (self.check)(&b)?;
                    self.row = b.first + b.time_ms.len();
                    self.batch = Some(b);
                    self.pos = 0;
                }
                None => return Ok(false),
            }
        }
        Ok(true)
    }

    /// Skips `n` rows (fewer if the table ends first).
    pub fn skip(&mut self, mut n: usize) -> Result<(), TableError> {
        while n > 0 {
            if !self.fill()? {
                return Ok(());
            }
            let b = self.batch.as_ref().unwrap();
            let k = n.min(b.time_ms.len() - self.pos);
            self.pos += k;
            n -= k;
        }
        Ok(())
    }

    /// Appends to `out[c]` the means of `count` groups of `per` rows.
    pub fn means(
        &mut self,
        per: usize,
        count: usize,
        out: &mut [Vec<f64>],
    ) -> Result<(), TableError> {
        let mut acc = vec![0.0; out.len()];
        let mut k = 0;
        let mut groups = 0;
        while groups < count {
            if !self.fill()? {
                return Err(table_err(
                    self.stream.file(),
                    None,
                    Some(self.row),
                    "the table ended early",
                    "rewrite it",
                ));
            }
            let b = self.batch.as_ref().unwrap();
            let avail = b.time_ms.len() - self.pos;
            if per == 1 {
                let take = avail.min(count - groups);
                for (c, o) in out.iter_mut().enumerate() {
                    o.extend_from_slice(&b.cols[c][self.pos..self.pos + take]);
                }
                self.pos += take;
                groups += take;
                continue;
            }
            for (c, a) in acc.iter_mut().enumerate() {
                *a += b.cols[c][self.pos];
            }
            self.pos += 1;
            k += 1;
            if k == per {
                for (c, o) in out.iter_mut().enumerate() {
                    o.push(acc[c] / per as f64);
                    acc[c] = 0.0;
                }
                k = 0;
                groups += 1;
            }
        }
        Ok(())
    }
}

/// Reads `path` (`.parquet` or `.csv`) whole; `wanted` limits the columns
/// read (None: all). Text columns are those the Parquet schema says are
/// strings, or, in CSV, those named in `csv_text`. For small tables (long
/// estimates, a solver's training data); scoring streams instead.
pub fn read_table(
    path: &Path,
    wanted: Option<&dyn Fn(&str) -> bool>,
    csv_text: &[&str],
) -> Result<Table, TableError> {
    let h = header(path)?;
    let is_csv = path.extension().is_some_and(|e| e == "csv");
    let pick = |n: &str| wanted.is_none_or(|w| w(n));
    let (mut nums, mut texts) = (Vec::new(), Vec::new());
    for (name, text) in &h.columns {
        if !pick(name) {
            continue;
        }
        if *text || (is_csv && csv_text.contains(&name.as_str())) {
            texts.push(name.clone());
        } else {
            nums.push(name.clone());
        }
    }
    let mut num_cols: Vec<Vec<f64>> = vec![Vec::new(); nums.len()];
    let mut text_cols: Vec<Vec<String>> = vec![Vec::new(); texts.len()];
    let mut time_ms = Vec::new();
    let mut st = h.stream_with_text(&nums, &texts)?;
    while let Some(b) = st.next_batch()? {
        time_ms.extend_from_slice(&b.time_ms);
        for (c, v) in num_cols.iter_mut().zip(b.cols) {
            c.extend(v);
        }
        for (c, v) in text_cols.iter_mut().zip(b.texts) {
            c.extend(v);
        }
    }
    let columns = nums
        .into_iter()
        .zip(num_cols.into_iter().map(Column::Num))
        .chain(
            texts
                .into_iter()
                .zip(text_cols.into_iter().map(Column::Text)),
        )
        .collect();
    Ok(Table {
        file: path.to_path_buf(),
        time_ms,
        time_zone: h.time_zone.clone(),
        columns,
    })
}
