//! A dataset folder as the contract (`loadloom-dataset/1`) describes it.

use crate::contract::DATASET_FORMAT;
use serde_json::Value;
use sha2::{Digest, Sha256};
use std::fmt;
use std::io::Read;
use std::path::{Path, PathBuf};

/// What can be wrong with a dataset folder; each names the file and the fix.
#[derive(Debug)]
pub struct DatasetError {
    /// The file at fault (the manifest, or a table it lists).
    pub file: PathBuf,
    /// What is wrong.
    pub message: String,
    /// How to fix it.
    pub help: String,
}

impl fmt::Display for DatasetError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        write!(
            f,
            "error: {}\n  --> {}\n  = help: {}",
            self.message,
            self.file.display(),
            self.help
        )
    }
}

impl std::error::Error for DatasetError {}

fn err(file: &Path, message: impl Into<String>, help: impl Into<String>) -> DatasetError {
    DatasetError {
        file: file.to_path_buf(),
        message: message.into(),
        help: help.into(),
    }
}

/// One appliance as the manifest lists it.
#[derive(Clone, Debug)]
pub struct ApplianceInfo {
    /// The appliance id: its truth columns are `{id}_p_w`, ….
    pub id: String,
    /// The conductors it draws from (`l1`, `l2`).
    pub conductors: Vec<String>,
    /// Power above which it counts as on, W (0 when the manifest gives none).
    pub on_threshold_w: f64,
}

/// An opened dataset folder.
#[derive(Debug)]
pub struct Dataset {
    /// The dataset folder.
    pub dir: PathBuf,
    /// The manifest, parsed.
    pub manifest: Value,
    /// The home's time zone (IANA name); local days follow it.
    pub timezone: String,
    /// The reporting interval, s.
    pub interval_s: f64,
    /// Reporting intervals in the truth (rows of the truth table).
    pub rows: u64,
    /// Line conductors, `l1`, `l2`, … (the neutral is `n`).
    pub lines: Vec<String>,
    /// The appliances the manifest lists, in its order.
    pub appliances: Vec<ApplianceInfo>,
}

/// The manifest at `mpath`, read and parsed as JSON.
fn read_manifest(mpath: &Path) -> Result<Value, DatasetError> {
    let text = std::fs::read_to_string(mpath).map_err(|e| {
        err(
            mpath,
            format!("cannot read the manifest: {e}"),
            "point at a dataset folder written by `loadloom run`",
        )
    })?;
    serde_json::from_str(&text).map_err(|e| {
        err(
            mpath,
            format!("the manifest is not valid JSON: {e}"),
            "rewrite the dataset with `loadloom run`",
        )
    })
}

impl Dataset {
    /// Opens `dir`, reading and checking its manifest.
    pub fn open(dir: &Path) -> Result<Dataset, DatasetError> {
        let mpath = dir.join("manifest.json");
        let manifest = read_manifest(&mpath)?;
        let bad = |what: &str| {
            err(
                &mpath,
                format!("the manifest lacks {what}"),
                format!(
                    "a {DATASET_FORMAT} manifest has it; rewrite the dataset with `loadloom run`"
                ),
            )
        };
        match manifest["format"].as_str() {
            Some(DATASET_FORMAT) => {}
            Some(other) => {
                return Err(err(
                    &mpath,
                    format!("format \"{other}\" is not {DATASET_FORMAT}"),
                    "use a loadloom of the version that wrote it, or rewrite the dataset",
                ))
            }
            None => return Err(bad("`format`")),
        }
        let timezone = manifest["time"]["timezone"]
            .as_str()
            .ok_or_else(|| bad("`time.timezone`"))?
            .to_string();
        let interval_s = manifest["time"]["interval_s"]
            .as_f64()
            .ok_or_else(|| bad("`time.interval_s`"))?;
        let rows = manifest["time"]["rows"]
            .as_u64()
            .ok_or_else(|| bad("`time.rows`"))?;
        let lines = manifest["supply"]["conductors"]
            .as_array()
            .ok_or_else(|| bad("`supply.conductors`"))?
            .iter()
            .filter_map(|c| c.as_str())
            .filter(|c| *c != "n")
            .map(str::to_string)
            .collect();
        let mut appliances = Vec::new();
        for a in manifest["appliances"]
            .as_array()
            .ok_or_else(|| bad("`appliances`"))?
        {
            appliances.push(ApplianceInfo {
                id: a["id"]
                    .as_str()
                    .ok_or_else(|| bad("an appliance `id`"))?
                    .to_string(),
                conductors: a["conductors"]
                    .as_array()
                    .map(|v| {
                        v.iter()
                            .filter_map(|c| c.as_str().map(str::to_string))
                            .collect()
                    })
                    .unwrap_or_default(),
                on_threshold_w: a["on_threshold_w"].as_f64().unwrap_or(0.0),
            });
        }
        Ok(Dataset {
            dir: dir.to_path_buf(),
            manifest,
            timezone,
            interval_s,
            rows,
            lines,
            appliances,
        })
    }

    /// Checks every file the manifest lists against its size and sha256.
    pub fn verify(&self) -> Result<(), DatasetError> {
        for (name, entry) in self.files()? {
            self.verify_file(
                name,
                entry,
                "the file was changed or cut short; rewrite the dataset",
            )?;
        }
        Ok(())
    }

    /// Checks the truth files (those a score is computed against) before
    /// scoring: size, sha256 and rows against the manifest, and the
    /// manifest's own row counts against each other. A score against a truth
    /// that changed after it was written would mean nothing.
    pub fn verify_truth(&self) -> Result<(), DatasetError> {
        let mpath = self.dir.join("manifest.json");
        let mut any = false;
        for (name, entry) in self.files()? {
            if !name.starts_with("truth.") {
                continue;
            }
            any = true;
            let path = self.dir.join(name);
            if entry["rows"].as_u64() != Some(self.rows) {
                return Err(err(
                    &mpath,
                    format!(
                        "the manifest's row counts disagree: files.\"{name}\".rows is {}, time.rows is {}",
                        entry["rows"], self.rows
                    ),
                    "the manifest was edited; rewrite the dataset with `loadloom run`",
                ));
            }
            self.verify_file(name, entry, "the truth file changed after it was written; rewrite the dataset with `loadloom run` (a score against it would mean nothing)")?;
            let rows = table_rows(&path)?;
            if rows != self.rows {
                return Err(err(
                    &path,
                    format!("it holds {rows} rows, the manifest says {}", self.rows),
                    "the truth file changed after it was written; rewrite the dataset",
                ));
            }
        }
        if !any {
            return Err(err(
                &mpath,
                "the manifest lists no truth file",
                "point at a dataset folder written by `loadloom run`",
            ));
        }
        Ok(())
    }

    fn files(&self) -> Result<&serde_json::Map<String, Value>, DatasetError> {
        self.manifest["files"].as_object().ok_or_else(|| {
            err(
                &self.dir.join("manifest.json"),
                "the manifest lists no files",
                "rewrite the dataset with `loadloom run`",
            )
        })
    }

    fn verify_file(&self, name: &str, entry: &Value, help: &str) -> Result<(), DatasetError> {
        let path = self.dir.join(name);
        let meta = std::fs::metadata(&path).map_err(|e| {
            err(
                &path,
                format!("cannot read it: {e}"),
                "the dataset is incomplete; rewrite it with `loadloom run`",
            )
        })?;
        if Some(meta.len()) != entry["bytes"].as_u64() {
            return Err(err(
                &path,
                format!(
                    "it has {} bytes, the manifest says {}",
                    meta.len(),
                    entry["bytes"]
                ),
                help,
            ));
        }
        if Some(sha256_hex(&path)?.as_str()) != entry["sha256"].as_str() {
            return Err(err(&path, "its sha256 differs from the manifest's", help));
        }
        Ok(())
    }
}

/// The sha256 of a file, as lowercase hex.
pub fn sha256_hex(path: &Path) -> Result<String, DatasetError> {
    let mut f =
        std::fs::File::open(path).map_err(|e| err(path, e.to_string(), "check permissions"))?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f
            .read(&mut buf)
            .map_err(|e| err(path, e.to_string(), "check the disk"))?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}

/// Rows of a table file: the Parquet footer's count, or a CSV's records.
fn table_rows(path: &Path) -> Result<u64, DatasetError> {
    let bad = |e: String| err(path, e, "rewrite the dataset with `loadloom run`");
    if path.extension().is_some_and(|e| e == "parquet") {
        let f = std::fs::File::open(path).map_err(|e| bad(e.to_string()))?;
        let r = parquet::file::reader::SerializedFileReader::new(f)
            .map_err(|e| bad(format!("not a readable Parquet file: {e}")))?;
        use parquet::file::reader::FileReader;
        return Ok(r.metadata().file_metadata().num_rows().max(0) as u64);
    }
    let mut r = csv::Reader::from_path(path).map_err(|e| bad(e.to_string()))?;
    let mut n = 0u64;
    let mut rec = csv::ByteRecord::new();
    while r
        .read_byte_record(&mut rec)
        .map_err(|e| bad(e.to_string()))?
    {
        n += 1;
    }
    Ok(n)
}

impl From<DatasetError> for crate::diagnostic::Error {
    /// A bad dataset folder or manifest: its file.
    fn from(e: DatasetError) -> crate::diagnostic::Error {
        crate::diagnostic::Error::file(&e.file, e.message, e.help)
    }
}
