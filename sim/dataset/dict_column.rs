//! Dictionary-coded string columns (states, appliance ids) written straight
//! from their keys.
//!
//! The parquet crate's Arrow writer turns every key back into its string and
//! interns it again (a hash and a compare per row): for the truth's state
//! columns that was a fifth of a whole run's CPU. The keys already index a
//! dictionary, so the pages are built from them: one PLAIN dictionary page of
//! the names, then RLE_DICTIONARY data pages holding the keys as runs of the
//! RLE / bit-packing hybrid (apache/parquet-format, Encodings.md:
//! "Dictionary Encoding" and "Run Length Encoding / Bit-Packing Hybrid"),
//! each page compressed with zstd like the other columns. A state holds for
//! many rows, so runs are long.

use super::float_column::{uleb128, Scratch};
use arrow_array::cast::AsArray;
use arrow_array::types::Int16Type;
use arrow_array::{Array, ArrayRef};
use bytes::Bytes;
use parquet::basic::{Compression, Encoding, ZstdLevel};
use parquet::column::page::{CompressedPage, Page, PageWriter};
use parquet::column::writer::ColumnCloseResult;
use parquet::data_type::ByteArray;
use parquet::file::metadata::ColumnChunkMetaData;
use parquet::file::statistics::{Statistics, ValueStatistics};
use parquet::file::writer::{SerializedPageWriter, TrackedWrite};
use parquet::schema::types::ColumnDescPtr;
use std::io;

fn to_io(e: impl std::fmt::Display) -> io::Error {
    io::Error::other(e.to_string())
}

/// One dictionary column of one row group.
pub struct DictColumn {
    descr: ColumnDescPtr,
    level: i32,
    page_rows: usize,
    /// The dictionary (taken from the first batch; every batch shares it).
    names: Option<ArrayRef>,
    /// Keys of the page being filled.
    keys: Vec<u16>,
    /// Compressed data pages: (bytes, uncompressed length, values).
    pages: Vec<(Vec<u8>, usize, u32)>,
    /// Which names occur (for the chunk's min and max).
    used: Vec<bool>,
    rows: u64,
}

/// Whether a column of this Arrow type and nullability takes this path.
pub fn applies(field: &arrow_schema::Field) -> bool {
    use arrow_schema::DataType::{Dictionary, Int16, Utf8};
    !field.is_nullable() && *field.data_type() == Dictionary(Box::new(Int16), Box::new(Utf8))
}

impl DictColumn {
    /// A column for `descr`, zstd at `level`, pages of at most `page_rows`.
    pub fn new(descr: ColumnDescPtr, level: i32, page_rows: usize) -> Self {
        DictColumn {
            descr,
            level,
            page_rows: page_rows.max(1),
            names: None,
            keys: Vec::new(),
            pages: Vec::new(),
            used: Vec::new(),
            rows: 0,
        }
    }

    fn bit_width(&self) -> u8 {
        let n = self.used.len().max(2) as u32;
        (32 - (n - 1).leading_zeros()) as u8
    }

    /// Appends a `Dictionary(Int16, Utf8)` array with no nulls.
    pub fn write(&mut self, col: &ArrayRef) -> io::Result<()> {
        let d = col.as_dictionary::<Int16Type>();
        match &self.names {
            None => {
                self.used = vec![false; d.values().len()];
                self.names = Some(d.values().clone());
            }
            Some(names) if names.as_ref() != d.values().as_ref() => {
                return Err(to_io("a dictionary column's names changed between batches"));
            }
            Some(_) => {}
        }
        for &k in d.keys().values().iter() {
            let k = u16::try_from(k).map_err(to_io)?;
            *self
                .used
                .get_mut(k as usize)
                .ok_or_else(|| to_io("key out of range"))? = true;
            self.keys.push(k);
            if self.keys.len() == self.page_rows {
                self.flush_page()?;
            }
        }
        self.rows += d.len() as u64;
        Ok(())
    }

    /// Encodes the buffered keys as one data page: the bit width, then RLE
    /// runs (ULEB128 header `run << 1`, the key in ceil(width / 8) bytes).
    fn flush_page(&mut self) -> io::Result<()> {
        if self.keys.is_empty() {
            return Ok(());
        }
        let width = self.bit_width();
        let value_bytes = (width as usize).div_ceil(8);
        let mut scratch = Scratch::take(self.level)?;
        let buf = &mut scratch.raw;
        buf.clear();
        buf.push(width);
        let mut i = 0;
        while i < self.keys.len() {
            let k = self.keys[i];
            let run = self.keys[i..].iter().take_while(|&&x| x == k).count();
            uleb128(buf, (run as u64) << 1);
            buf.extend_from_slice(&(k as u32).to_le_bytes()[..value_bytes]);
            i += run;
        }
        let raw = buf.len();
        let compressed = scratch.compressed()?;
        scratch.give_back();
        self.pages.push((compressed, raw, self.keys.len() as u32));
        self.keys.clear();
        Ok(())
    }

    /// The dictionary page's body: each name as a 4-byte length and its bytes.
    fn dictionary(&self) -> (Vec<u8>, u32) {
        let names = self.names.as_ref().map(|n| n.as_string::<i32>());
        let mut buf = Vec::new();
        for s in names.iter().flat_map(|n| n.iter()) {
            let s = s.unwrap_or("");
            buf.extend_from_slice(&(s.len() as u32).to_le_bytes());
            buf.extend_from_slice(s.as_bytes());
        }
        (buf, names.map_or(0, |n| n.len()) as u32)
    }

    /// The smallest and largest name that occurs, bytewise.
    fn statistics(&self) -> Statistics {
        let names = self.names.as_ref().map(|n| n.as_string::<i32>());
        let used = names.iter().flat_map(|n| n.iter().zip(&self.used));
        let present: Vec<&str> = used.filter(|(_, &u)| u).filter_map(|(s, _)| s).collect();
        let min = present.iter().min().map(|s| ByteArray::from(*s));
        let max = present.iter().max().map(|s| ByteArray::from(*s));
        Statistics::ByteArray(ValueStatistics::new(min, max, None, Some(0), false))
    }

    /// Serialises the chunk: its bytes (dictionary page first) and what the
    /// row group needs to splice them in.
    pub fn close(mut self) -> io::Result<(Bytes, ColumnCloseResult)> {
        self.flush_page()?;
        let mut out = TrackedWrite::new(Vec::new());
        let (mut compressed, mut uncompressed) = (0i64, 0i64);
        let (dict, n) = self.dictionary();
        let page = Page::DictionaryPage {
            buf: Bytes::from(zstd::bulk::compress(&dict, self.level)?),
            num_values: n,
            encoding: Encoding::PLAIN,
            is_sorted: false,
        };
        let mut first_data = 0i64;
        {
            let mut writer = SerializedPageWriter::new(&mut out);
            let spec = writer
                .write_page(CompressedPage::new(page, dict.len()))
                .map_err(to_io)?;
            compressed += spec.compressed_size as i64;
            uncompressed += spec.uncompressed_size as i64;
            for (i, (buf, raw, values)) in std::mem::take(&mut self.pages).into_iter().enumerate() {
                let page = Page::DataPage {
                    buf: Bytes::from(buf),
                    num_values: values,
                    encoding: Encoding::RLE_DICTIONARY,
                    def_level_encoding: Encoding::RLE,
                    rep_level_encoding: Encoding::RLE,
                    statistics: None,
                };
                let spec = writer
                    .write_page(CompressedPage::new(page, raw))
                    .map_err(to_io)?;
                if i == 0 {
                    first_data = spec.offset as i64;
                }
                compressed += spec.compressed_size as i64;
                uncompressed += spec.uncompressed_size as i64;
            }
            writer.close().map_err(to_io)?;
        }
        let level = ZstdLevel::try_new(self.level).map_err(to_io)?;
        let metadata = ColumnChunkMetaData::builder(self.descr.clone())
            .set_compression_codec(Compression::ZSTD(level).into())
            .set_encodings(vec![
                Encoding::PLAIN,
                Encoding::RLE,
                Encoding::RLE_DICTIONARY,
            ])
            .set_total_compressed_size(compressed)
            .set_total_uncompressed_size(uncompressed)
            .set_num_values(self.rows as i64)
            .set_data_page_offset(first_data)
            .set_dictionary_page_offset(Some(0))
            .set_statistics(self.statistics())
            .build()
            .map_err(to_io)?;
        let bytes = out.into_inner().map_err(to_io)?;
        let close = ColumnCloseResult {
            bytes_written: bytes.len() as u64,
            rows_written: self.rows,
            metadata,
            bloom_filter: None,
            column_index: None,
            offset_index: None,
        };
        Ok((Bytes::from(bytes), close))
    }
}
