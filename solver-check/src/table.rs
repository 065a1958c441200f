//! Reading a table of `time` and numeric columns from Parquet or CSV, the two
//! forms of the dataset contract, into f64 columns and UTC milliseconds.

use arrow_array::cast::AsArray;
use arrow_array::types::{
    Float32Type, Float64Type, Int16Type, Int32Type, Int64Type, TimestampMicrosecondType,
    TimestampMillisecondType, TimestampNanosecondType, TimestampSecondType, UInt8Type,
};
use arrow_array::{Array, ArrayRef};
use arrow_schema::{DataType, TimeUnit};
use parquet::arrow::arrow_reader::ParquetRecordBatchReaderBuilder;
use std::fmt;
use std::path::{Path, PathBuf};

/// A bad table: names the file, the column and the first offending row.
#[derive(Debug, Clone)]
pub struct TableError {
    pub file: PathBuf,
    pub column: Option<String>,
    /// 0-based data row (header excluded).
    pub row: Option<usize>,
    pub message: String,
    pub help: String,
}

impl fmt::Display for TableError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "error: {}", self.message)?;
        write!(f, "  --> {}", self.file.display())?;
        if let Some(c) = &self.column {
            write!(f, ", column `{c}`")?;
        }
        if let Some(r) = self.row {
            write!(f, ", row {r} (counting data rows from 0)")?;
        }
        write!(f, "\n  = help: {}", self.help)
    }
}

impl std::error::Error for TableError {}

pub fn table_err(
    file: &Path,
    column: Option<&str>,
    row: Option<usize>,
    message: impl Into<String>,
    help: impl Into<String>,
) -> TableError {
    TableError {
        file: file.to_path_buf(),
        column: column.map(str::to_string),
        row,
        message: message.into(),
        help: help.into(),
    }
}

/// A column as read: numbers, or text (state names, appliance ids).
#[derive(Clone, Debug)]
pub enum Column {
    Num(Vec<f64>),
    Text(Vec<String>),
}

/// A table with its `time` column in ms since 1970 UTC.
#[derive(Clone, Debug)]
pub struct Table {
    pub file: PathBuf,
    pub time_ms: Vec<i64>,
    /// The time zone in the Parquet time type, if any.
    pub time_zone: Option<String>,
    pub columns: Vec<(String, Column)>,
}

impl Table {
    pub fn num(&self, name: &str) -> Option<&[f64]> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .and_then(|(_, c)| match c {
                Column::Num(v) => Some(v.as_slice()),
                _ => None,
            })
    }
    pub fn text(&self, name: &str) -> Option<&[String]> {
        self.columns
            .iter()
            .find(|(n, _)| n == name)
            .and_then(|(_, c)| match c {
                Column::Text(v) => Some(v.as_slice()),
                _ => None,
            })
    }
    pub fn has(&self, name: &str) -> bool {
        self.columns.iter().any(|(n, _)| n == name)
    }
}

/// Reads `path` (`.parquet` or `.csv`); `wanted` limits the columns read
/// (None: all). The time column is `time`.
pub fn read(path: &Path, wanted: Option<&dyn Fn(&str) -> bool>) -> Result<Table, TableError> {
    match path.extension().and_then(|e| e.to_str()) {
        Some("parquet") => read_parquet(path, wanted),
        Some("csv") => read_csv(path, wanted),
        _ => Err(table_err(
            path,
            None,
            None,
            "unknown file type",
            "give a .parquet or .csv file",
        )),
    }
}

fn time_ms(a: &ArrayRef, unit: &TimeUnit) -> Vec<i64> {
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

fn read_parquet(path: &Path, wanted: Option<&dyn Fn(&str) -> bool>) -> Result<Table, TableError> {
    let file = std::fs::File::open(path).map_err(|e| {
        table_err(
            path,
            None,
            None,
            format!("cannot open it: {e}"),
            "check the path",
        )
    })?;
    let builder = ParquetRecordBatchReaderBuilder::try_new(file).map_err(|e| {
        table_err(
            path,
            None,
            None,
            format!("not a readable Parquet file: {e}"),
            "write the estimate with pyarrow, pandas or polars (to_parquet)",
        )
    })?;
    let schema = builder.schema().clone();
    let reader = builder
        .with_batch_size(1 << 16)
        .build()
        .map_err(|e| table_err(path, None, None, e.to_string(), "check the file"))?;
    let ti = schema.index_of("time").map_err(|_| {
        table_err(
            path,
            Some("time"),
            None,
            "there is no `time` column",
            "add a `time` column (timestamps of the interval starts)",
        )
    })?;
    let (unit, time_zone) = match schema.field(ti).data_type() {
        DataType::Timestamp(u, tz) => (u.clone(), tz.as_ref().map(|t| t.to_string())),
        other => {
            return Err(table_err(
                path,
                Some("time"),
                None,
                format!("`time` is {other}, not a timestamp"),
                "store `time` as a timestamp with its time zone (pandas: tz-aware datetime64)",
            ))
        }
    };
    let names: Vec<(usize, String)> = schema
        .fields()
        .iter()
        .enumerate()
        .filter(|(i, f)| *i != ti && wanted.is_none_or(|w| w(f.name())))
        .map(|(i, f)| (i, f.name().clone()))
        .collect();
    let mut t = Table {
        file: path.to_path_buf(),
        time_ms: Vec::new(),
        time_zone,
        columns: names
            .iter()
            .map(|(_, n)| (n.clone(), Column::Num(Vec::new())))
            .collect(),
    };
    let mut row0 = 0usize;
    for batch in reader {
        let batch = batch
            .map_err(|e| table_err(path, None, Some(row0), e.to_string(), "check the file"))?;
        let tcol = batch.column(ti);
        if tcol.null_count() > 0 {
            let r = (0..tcol.len()).find(|&r| tcol.is_null(r)).unwrap();
            return Err(table_err(
                path,
                Some("time"),
                Some(row0 + r),
                "a time is missing (null)",
                "give every row its time",
            ));
        }
        t.time_ms.extend(time_ms(tcol, &unit));
        for (j, (i, name)) in names.iter().enumerate() {
            let a = batch.column(*i);
            let text = |t: &mut Table, vals: Vec<String>| {
                if let Column::Num(v) = &t.columns[j].1 {
                    if v.is_empty() {
                        t.columns[j].1 = Column::Text(Vec::new());
                    }
                }
                if let Column::Text(v) = &mut t.columns[j].1 {
                    v.extend(vals);
                }
            };
            let nums: Option<Vec<f64>> = match a.data_type() {
                DataType::Float64 => Some(
                    a.as_primitive::<Float64Type>()
                        .iter()
                        .map(|v| v.unwrap_or(f64::NAN))
                        .collect(),
                ),
                DataType::Float32 => Some(
                    a.as_primitive::<Float32Type>()
                        .iter()
                        .map(|v| v.map(|x| x as f64).unwrap_or(f64::NAN))
                        .collect(),
                ),
                DataType::Int64 => Some(
                    a.as_primitive::<Int64Type>()
                        .iter()
                        .map(|v| v.map(|x| x as f64).unwrap_or(f64::NAN))
                        .collect(),
                ),
                DataType::Int32 => Some(
                    a.as_primitive::<Int32Type>()
                        .iter()
                        .map(|v| v.map(|x| x as f64).unwrap_or(f64::NAN))
                        .collect(),
                ),
                DataType::Boolean => Some(
                    a.as_boolean()
                        .iter()
                        .map(|v| v.map(|b| b as u8 as f64).unwrap_or(f64::NAN))
                        .collect(),
                ),
                DataType::Utf8 => {
                    text(
                        &mut t,
                        a.as_string::<i32>()
                            .iter()
                            .map(|v| v.unwrap_or("").to_string())
                            .collect(),
                    );
                    None
                }
                DataType::LargeUtf8 => {
                    text(
                        &mut t,
                        a.as_string::<i64>()
                            .iter()
                            .map(|v| v.unwrap_or("").to_string())
                            .collect(),
                    );
                    None
                }
                DataType::Dictionary(k, v) if **v == DataType::Utf8 => {
                    let vals: Vec<String> = match **k {
                        DataType::Int16 => {
                            let d = a.as_dictionary::<Int16Type>();
                            let s = d.values().as_string::<i32>();
                            d.keys()
                                .iter()
                                .map(|k| {
                                    k.map(|k| s.value(k as usize).to_string())
                                        .unwrap_or_default()
                                })
                                .collect()
                        }
                        DataType::Int32 => {
                            let d = a.as_dictionary::<Int32Type>();
                            let s = d.values().as_string::<i32>();
                            d.keys()
                                .iter()
                                .map(|k| {
                                    k.map(|k| s.value(k as usize).to_string())
                                        .unwrap_or_default()
                                })
                                .collect()
                        }
                        DataType::UInt8 => {
                            let d = a.as_dictionary::<UInt8Type>();
                            let s = d.values().as_string::<i32>();
                            d.keys()
                                .iter()
                                .map(|k| {
                                    k.map(|k| s.value(k as usize).to_string())
                                        .unwrap_or_default()
                                })
                                .collect()
                        }
                        _ => {
                            return Err(table_err(
                                path,
                                Some(name),
                                None,
                                format!("unsupported dictionary column {}", a.data_type()),
                                "store it as plain strings",
                            ))
                        }
                    };
                    text(&mut t, vals);
                    None
                }
                other => {
                    return Err(table_err(
                        path,
                        Some(name),
                        None,
                        format!("column type {other} is not numeric"),
                        "store powers as float32 or float64",
                    ))
                }
            };
            if let Some(n) = nums {
                if let Column::Num(v) = &mut t.columns[j].1 {
                    v.extend(n);
                }
            }
        }
        row0 += batch.num_rows();
    }
    Ok(t)
}

fn read_csv(path: &Path, wanted: Option<&dyn Fn(&str) -> bool>) -> Result<Table, TableError> {
    let text = std::fs::read_to_string(path).map_err(|e| {
        table_err(
            path,
            None,
            None,
            format!("cannot read it: {e}"),
            "check the path",
        )
    })?;
    let mut lines = text.lines();
    let header: Vec<String> = lines
        .next()
        .unwrap_or("")
        .split(',')
        .map(|h| h.trim().trim_matches('"').to_string())
        .collect();
    let ti = header.iter().position(|h| h == "time").ok_or_else(|| {
        table_err(
            path,
            Some("time"),
            None,
            "there is no `time` column",
            "add a `time` column of ISO-8601 times with their UTC offset",
        )
    })?;
    let keep: Vec<usize> = (0..header.len())
        .filter(|&i| i != ti && wanted.is_none_or(|w| w(&header[i])))
        .collect();
    let mut cols: Vec<Vec<String>> = vec![Vec::new(); keep.len()];
    let mut time_ms = Vec::new();
    for (r, line) in lines.enumerate() {
        if line.trim().is_empty() {
            continue;
        }
        let cells: Vec<&str> = line.split(',').collect();
        if cells.len() != header.len() {
            return Err(table_err(
                path,
                None,
                Some(r),
                format!("{} cells, the header has {}", cells.len(), header.len()),
                "give every row one value per column",
            ));
        }
        let ts: jiff::Timestamp = cells[ti].trim().parse().map_err(|_| {
            table_err(path, Some("time"), Some(r), format!("\"{}\" is not a time with its UTC offset", cells[ti]), "write ISO-8601 with an offset, e.g. 2027-03-13T00:00:00-06:00 or 2027-03-13T06:00:00Z (time zones are never guessed)")
        })?;
        time_ms.push(ts.as_millisecond());
        for (j, &i) in keep.iter().enumerate() {
            cols[j].push(cells[i].trim().trim_matches('"').to_string());
        }
    }
    let columns = keep
        .iter()
        .zip(cols)
        .map(|(&i, v)| {
            let nums: Option<Vec<f64>> = v
                .iter()
                .map(|s| {
                    if s.is_empty() {
                        Some(f64::NAN)
                    } else {
                        s.parse::<f64>().ok()
                    }
                })
                .collect();
            (
                header[i].clone(),
                match nums {
                    Some(n) => Column::Num(n),
                    None => Column::Text(v),
                },
            )
        })
        .collect();
    Ok(Table {
        file: path.to_path_buf(),
        time_ms,
        time_zone: None,
        columns,
    })
}
