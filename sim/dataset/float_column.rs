//! Float columns (FLOAT and DOUBLE) written straight from their values.
//!
//! The parquet crate's Arrow writer copies every value through its level
//! builder, a generic byte-stream-split encoder and a generic min/max, and
//! opens a zstd context per page: for the demo's 30 days at 1 s that was
//! most of the encoding CPU. Here each page is built in one pass: the
//! definition levels (nullable columns) as runs of the RLE / bit-packing
//! hybrid, then the non-null values in BYTE_STREAM_SPLIT order (byte k of
//! every value, then byte k + 1, …), the page compressed with zstd through
//! one reused context (apache/parquet-format, Encodings.md: "Byte Stream
//! Split" and "Run Length Encoding / Bit-Packing Hybrid"; DataPage v1 puts
//! the levels, with a 4-byte length, before the values). Chunk statistics,
//! a column index (min, max and nulls per page) and an offset index are
//! written as the crate writes them, so readers can skip pages.

use arrow_array::{Array, ArrayRef, PrimitiveArray};
use bytes::Bytes;
use parquet::basic::{Compression, Encoding, Type, ZstdLevel};
use parquet::column::page::{CompressedPage, Page, PageWriter};
use parquet::column::writer::ColumnCloseResult;
use parquet::file::metadata::{ColumnChunkMetaData, ColumnIndexBuilder, OffsetIndexBuilder};
use parquet::file::statistics::{Statistics, ValueStatistics};
use parquet::file::writer::{SerializedPageWriter, TrackedWrite};
use parquet::schema::types::ColumnDescPtr;
use std::io;

fn to_io(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

/// What the column writer needs of f32 and f64.
pub trait Float: arrow_buffer::ArrowNativeType + PartialOrd + Sync + Send + 'static {
    /// Bytes per value.
    const WIDTH: usize;
    /// The Parquet physical type.
    const PHYSICAL: Type;
    /// The Arrow primitive type of the input arrays.
    type Arrow: arrow_array::ArrowPrimitiveType<Native = Self>;
    /// The smallest finite value (where the maximum's fold starts).
    const LOWEST: Self;
    /// The largest finite value (where the minimum's fold starts).
    const HIGHEST: Self;
    /// Positive zero.
    const ZERO: Self;
    /// Writes the value's little-endian bytes to `out`.
    fn put(self, out: &mut [u8]);
    /// Chunk statistics.
    fn statistics(min: Option<Self>, max: Option<Self>, nulls: u64) -> Statistics;
    /// `-0.0` for a zero (the format asks a minimum of zero to be written
    /// as negative zero and a maximum as positive zero, so that a reader
    /// filtering on either finds both).
    fn negative(self) -> Self;
}

macro_rules! float {
    ($t:ty, $width:expr, $physical:expr, $arrow:ty, $stat:ident) => {
        impl Float for $t {
            const WIDTH: usize = $width;
            const PHYSICAL: Type = $physical;
            type Arrow = $arrow;
            const LOWEST: Self = <$t>::MIN;
            const HIGHEST: Self = <$t>::MAX;
            const ZERO: Self = 0.0;
            fn put(self, out: &mut [u8]) {
                out.copy_from_slice(&self.to_le_bytes());
            }
            fn statistics(min: Option<Self>, max: Option<Self>, nulls: u64) -> Statistics {
                Statistics::$stat(ValueStatistics::new(min, max, None, Some(nulls), false))
            }
            fn negative(self) -> Self {
                -self
            }
        }
    };
}

float!(f32, 4, Type::FLOAT, arrow_array::types::Float32Type, Float);
float!(
    f64,
    8,
    Type::DOUBLE,
    arrow_array::types::Float64Type,
    Double
);

/// A zstd context and a page buffer, shared by all float and dictionary
/// columns: a context per column would hold a window per column (about a megabyte each for the
/// truth's hundred columns), and the buffers are reused rather than
/// allocated (and faulted in) per page. Compression does not depend on
/// which context does it, so the bytes do not either.
pub(crate) struct Scratch {
    level: i32,
    compressor: zstd::bulk::Compressor<'static>,
    /// The page being built, before compression.
    pub raw: Vec<u8>,
    out: Vec<u8>,
}

static SCRATCH: std::sync::Mutex<Vec<Scratch>> = std::sync::Mutex::new(Vec::new());

impl Scratch {
    /// A free scratch for zstd `level` (a new one when none is free).
    pub fn take(level: i32) -> io::Result<Scratch> {
        let mut pool = SCRATCH.lock().unwrap_or_else(|e| e.into_inner());
        if let Some(i) = pool.iter().position(|s| s.level == level) {
            return Ok(pool.swap_remove(i));
        }
        drop(pool);
        Ok(Scratch {
            level,
            compressor: zstd::bulk::Compressor::new(level)?,
            raw: Vec::new(),
            out: Vec::new(),
        })
    }

    /// `raw` compressed, in a buffer of its own size: a fresh buffer per
    /// page would keep zstd's bound (the raw size) allocated until the
    /// chunk closes.
    pub fn compressed(&mut self) -> io::Result<Vec<u8>> {
        let bound = zstd::zstd_safe::compress_bound(self.raw.len());
        self.out.clear();
        self.out.reserve(bound);
        self.compressor
            .compress_to_buffer(&self.raw, &mut self.out)?;
        Ok(self.out.clone())
    }

    /// Returns the scratch to the pool.
    pub fn give_back(self) {
        SCRATCH.lock().unwrap_or_else(|e| e.into_inner()).push(self);
    }
}

/// One encoded data page waiting for the chunk to close.
struct EncodedPage {
    bytes: Vec<u8>,
    /// Length before compression.
    raw: usize,
    rows: u32,
    nulls: u32,
    /// Min and max of the non-null values (`None` when every row is null).
    range: Option<(Vec<u8>, Vec<u8>)>,
}

/// One float column of one row group.
pub struct FloatColumn<T: Float> {
    descr: ColumnDescPtr,
    level: i32,
    page_rows: usize,
    nullable: bool,
    /// The page being filled: its non-null values, and its definition
    /// levels as runs (valid, rows).
    values: Vec<T>,
    runs: Vec<(bool, u32)>,
    page_filled: usize,
    pages: Vec<EncodedPage>,
    min: Option<T>,
    max: Option<T>,
    nulls: u64,
    rows: u64,
}

/// Whether a column of this Arrow type takes this path.
pub fn applies(field: &arrow_schema::Field) -> bool {
    use arrow_schema::DataType::{Float32, Float64};
    matches!(field.data_type(), Float32 | Float64)
}

impl<T: Float> FloatColumn<T> {
    /// A column for `descr`, zstd at `level`, pages of at most `page_rows`
    /// rows.
    pub fn new(descr: ColumnDescPtr, level: i32, page_rows: usize) -> io::Result<Self> {
        Ok(FloatColumn {
            nullable: descr.max_def_level() > 0,
            descr,
            level,
            page_rows: page_rows.max(1),
            values: Vec::new(),
            runs: Vec::new(),
            page_filled: 0,
            pages: Vec::new(),
            min: None,
            max: None,
            nulls: 0,
            rows: 0,
        })
    }

    /// Appends an array of `T` (nulls allowed when the column is nullable).
    pub fn write(&mut self, col: &ArrayRef) -> io::Result<()> {
        let a = col
            .as_any()
            .downcast_ref::<PrimitiveArray<T::Arrow>>()
            .ok_or_else(|| to_io("a float column got another type"))?;
        if a.null_count() > 0 && !self.nullable {
            return Err(to_io("a null in a column that allows none"));
        }
        let values: &[T] = a.values();
        let mut at = 0;
        while at < a.len() {
            let n = (self.page_rows - self.page_filled).min(a.len() - at);
            self.take(a, &values[at..at + n], at);
            at += n;
            if self.page_filled == self.page_rows {
                self.flush_page()?;
            }
        }
        self.rows += a.len() as u64;
        Ok(())
    }

    /// Adds rows `at .. at + values.len()` of `a` to the open page.
    fn take(&mut self, a: &PrimitiveArray<T::Arrow>, values: &[T], at: usize) {
        self.page_filled += values.len();
        match a.nulls().filter(|n| n.null_count() > 0) {
            None => {
                self.values.extend_from_slice(values);
                self.run(true, values.len());
            }
            Some(nulls) => {
                let mut row = 0;
                for (start, end) in nulls.inner().slice(at, values.len()).set_slices() {
                    self.run(false, start - row);
                    self.values.extend_from_slice(&values[start..end]);
                    self.run(true, end - start);
                    row = end;
                }
                self.run(false, values.len() - row);
            }
        }
    }

    /// Extends the page's definition levels by `n` rows of `valid`.
    fn run(&mut self, valid: bool, n: usize) {
        if n == 0 {
            return;
        }
        match self.runs.last_mut() {
            Some((v, len)) if *v == valid => *len += n as u32,
            _ => self.runs.push((valid, n as u32)),
        }
    }

    /// Encodes and compresses the open page.
    fn flush_page(&mut self) -> io::Result<()> {
        if self.page_filled == 0 {
            return Ok(());
        }
        let rows = self.page_filled;
        let nulls = rows - self.values.len();
        let mut scratch = Scratch::take(self.level)?;
        let raw = &mut scratch.raw;
        raw.clear();
        if self.nullable {
            levels(&self.runs, raw);
        }
        let start = raw.len();
        raw.resize(start + self.values.len() * T::WIDTH, 0);
        split_streams(&self.values, &mut raw[start..]);
        let range = min_max(&self.values);
        if let Some((lo, hi)) = range {
            self.min = Some(self.min.map_or(lo, |m| if lo < m { lo } else { m }));
            self.max = Some(self.max.map_or(hi, |m| if hi > m { hi } else { m }));
        }
        let bytes = scratch.compressed()?;
        let raw_len = scratch.raw.len();
        scratch.give_back();
        let le = |v: T| {
            let mut b = vec![0; T::WIDTH];
            v.put(&mut b);
            b
        };
        self.pages.push(EncodedPage {
            bytes,
            raw: raw_len,
            rows: rows as u32,
            nulls: nulls as u32,
            range: range.map(|(lo, hi)| (le(signed_zero(lo, true)), le(signed_zero(hi, false)))),
        });
        self.nulls += nulls as u64;
        self.values.clear();
        self.runs.clear();
        self.page_filled = 0;
        Ok(())
    }

    /// Serialises the chunk: its bytes and what the row group needs to
    /// splice them in (statistics, column index, offset index).
    pub fn close(mut self) -> io::Result<(Bytes, ColumnCloseResult)> {
        self.flush_page()?;
        let mut out = TrackedWrite::new(Vec::new());
        let (mut compressed, mut uncompressed) = (0i64, 0i64);
        let mut column_index = ColumnIndexBuilder::new(T::PHYSICAL);
        let mut offset_index = OffsetIndexBuilder::new();
        {
            let mut writer = SerializedPageWriter::new(&mut out);
            for p in std::mem::take(&mut self.pages) {
                let page = Page::DataPage {
                    buf: Bytes::from(p.bytes),
                    num_values: p.rows,
                    encoding: Encoding::BYTE_STREAM_SPLIT,
                    def_level_encoding: Encoding::RLE,
                    rep_level_encoding: Encoding::RLE,
                    statistics: None,
                };
                let spec = writer
                    .write_page(CompressedPage::new(page, p.raw))
                    .map_err(to_io)?;
                compressed += spec.compressed_size as i64;
                uncompressed += spec.uncompressed_size as i64;
                offset_index.append_row_count(p.rows as i64);
                offset_index
                    .append_offset_and_size(spec.offset as i64, spec.compressed_size as i32);
                let (lo, hi) = p.range.clone().unwrap_or_default();
                column_index.append(p.range.is_none(), lo, hi, p.nulls as i64, Some(0));
            }
            writer.close().map_err(to_io)?;
        }
        let level = ZstdLevel::try_new(self.level).map_err(to_io)?;
        let mut encodings = vec![Encoding::BYTE_STREAM_SPLIT];
        if self.nullable {
            encodings.push(Encoding::RLE);
        }
        let statistics = T::statistics(
            self.min.map(|v| signed_zero(v, true)),
            self.max.map(|v| signed_zero(v, false)),
            self.nulls,
        );
        let metadata = ColumnChunkMetaData::builder(self.descr.clone())
            .set_compression_codec(Compression::ZSTD(level).into())
            .set_encodings(encodings)
            .set_total_compressed_size(compressed)
            .set_total_uncompressed_size(uncompressed)
            .set_num_values(self.rows as i64)
            .set_data_page_offset(0)
            .set_statistics(statistics)
            .build()
            .map_err(to_io)?;
        let bytes = out.into_inner().map_err(to_io)?;
        let close = ColumnCloseResult {
            bytes_written: bytes.len() as u64,
            rows_written: self.rows,
            metadata,
            bloom_filter: None,
            column_index: Some(column_index.build().map_err(to_io)?),
            offset_index: Some(offset_index.build()),
        };
        Ok((Bytes::from(bytes), close))
    }
}

/// A zero minimum as `-0.0`, a zero maximum as `+0.0` ([`Float::negative`]).
fn signed_zero<T: Float>(v: T, minimum: bool) -> T {
    if v == T::ZERO {
        if minimum {
            T::ZERO.negative()
        } else {
            T::ZERO
        }
    } else {
        v
    }
}

/// Definition levels (bit width 1) as RLE runs of the hybrid encoding, after
/// their length in 4 bytes: each run a ULEB128 header `rows << 1` and the
/// level in one byte.
fn levels(runs: &[(bool, u32)], out: &mut Vec<u8>) {
    let at = out.len();
    out.extend_from_slice(&[0; 4]);
    for &(valid, n) in runs {
        uleb128(out, (n as u64) << 1);
        out.push(valid as u8);
    }
    let len = (out.len() - at - 4) as u32;
    out[at..at + 4].copy_from_slice(&len.to_le_bytes());
}

/// Appends `v` as an unsigned LEB128 varint (the RLE/bit-packed hybrid's
/// run headers in Parquet's encoding spec).
pub(super) fn uleb128(out: &mut Vec<u8>, mut v: u64) {
    loop {
        let b = (v & 0x7f) as u8;
        v >>= 7;
        if v == 0 {
            out.push(b);
            return;
        }
        out.push(b | 0x80);
    }
}

/// BYTE_STREAM_SPLIT: byte k of value i goes to `out[k * n + i]`.
fn split_streams<T: Float>(values: &[T], out: &mut [u8]) {
    let n = values.len();
    let mut bytes = [0u8; 8];
    // Blocks of 64 values: each value's bytes once, then each stream's
    // 64 bytes written together.
    const BLOCK: usize = 64;
    let mut block = [[0u8; BLOCK]; 8];
    for (b, chunk) in values.chunks(BLOCK).enumerate() {
        for (i, v) in chunk.iter().enumerate() {
            v.put(&mut bytes[..T::WIDTH]);
            for k in 0..T::WIDTH {
                block[k][i] = bytes[k];
            }
        }
        for k in 0..T::WIDTH {
            let at = k * n + b * BLOCK;
            out[at..at + chunk.len()].copy_from_slice(&block[k][..chunk.len()]);
        }
    }
}

/// The smallest and largest of finite `values` (`None` for none), folded
/// in eight lanes so the compiler can keep them in vector registers.
fn min_max<T: Float>(values: &[T]) -> Option<(T, T)> {
    if values.is_empty() {
        return None;
    }
    let mut lo = [T::HIGHEST; 8];
    let mut hi = [T::LOWEST; 8];
    let mut chunks = values.chunks_exact(8);
    for c in &mut chunks {
        for j in 0..8 {
            lo[j] = if c[j] < lo[j] { c[j] } else { lo[j] };
            hi[j] = if c[j] > hi[j] { c[j] } else { hi[j] };
        }
    }
    for (j, &v) in chunks.remainder().iter().enumerate() {
        lo[j] = if v < lo[j] { v } else { lo[j] };
        hi[j] = if v > hi[j] { v } else { hi[j] };
    }
    let pick = |a: [T; 8], less: bool| {
        a.into_iter()
            .reduce(|x, y| if (y < x) == less { y } else { x })
            .expect("eight lanes")
    };
    Some((pick(lo, true), pick(hi, false)))
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn streams_hold_each_byte_position_in_turn() {
        // Parquet format, Encodings.md "Byte Stream Split": for values
        // 0xDDCCBBAA and 0x44332211 (little-endian) the streams are
        // AA 11 | BB 22 | CC 33 | DD 44.
        let v = [f32::from_bits(0xDDCC_BBAA), f32::from_bits(0x4433_2211)];
        let mut out = [0u8; 8];
        split_streams(&v, &mut out);
        assert_eq!(out, [0xAA, 0x11, 0xBB, 0x22, 0xCC, 0x33, 0xDD, 0x44]);
        // Longer than a block, f64: stream k of value i at k * n + i.
        let v: Vec<f64> = (0..200).map(|i| i as f64 * 1.25 - 7.0).collect();
        let mut out = vec![0u8; 200 * 8];
        split_streams(&v, &mut out);
        for (i, x) in v.iter().enumerate() {
            for (k, b) in x.to_le_bytes().iter().enumerate() {
                assert_eq!(out[k * 200 + i], *b);
            }
        }
    }

    #[test]
    fn min_max_finds_the_extremes_in_any_lane() {
        let v: Vec<f32> = (0..37).map(|i| ((i * 17) % 37) as f32 - 5.0).collect();
        assert_eq!(min_max(&v), Some((-5.0, 31.0)));
        assert_eq!(min_max::<f32>(&[]), None);
        assert_eq!(min_max(&[2.5f64]), Some((2.5, 2.5)));
    }

    #[test]
    fn levels_are_rle_runs_after_their_length() {
        let mut out = Vec::new();
        levels(&[(true, 3), (false, 200)], &mut out);
        // 3 << 1 = 6; 200 << 1 = 400 = ULEB128 0x90 0x03.
        assert_eq!(out, [5, 0, 0, 0, 6, 1, 0x90, 0x03, 0]);
    }
}
