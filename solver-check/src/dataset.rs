//! A dataset folder as the contract (`loadloom-dataset/1`) describes it.

use serde_json::Value;
use sha2::{Digest, Sha256};
use std::fmt;
use std::io::Read;
use std::path::{Path, PathBuf};

pub const FORMAT: &str = "loadloom-dataset/1";

/// What can be wrong with a dataset folder; each names the file and the fix.
#[derive(Debug)]
pub struct DatasetError {
    pub file: PathBuf,
    pub message: String,
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
    pub id: String,
    pub conductors: Vec<String>,
    pub on_threshold_w: f64,
}

/// An opened dataset folder.
#[derive(Debug)]
pub struct Dataset {
    pub dir: PathBuf,
    pub manifest: Value,
    pub timezone: String,
    pub interval_s: f64,
    pub rows: u64,
    /// Line conductors, `l1`, `l2`, … (the neutral is `n`).
    pub lines: Vec<String>,
    pub appliances: Vec<ApplianceInfo>,
}

impl Dataset {
    /// Opens `dir`, reading and checking its manifest.
    pub fn open(dir: &Path) -> Result<Dataset, DatasetError> {
        let mpath = dir.join("manifest.json");
        let text = std::fs::read_to_string(&mpath).map_err(|e| {
            err(
                &mpath,
                format!("cannot read the manifest: {e}"),
                "point at a dataset folder written by `loadloom run`",
            )
        })?;
        let manifest: Value = serde_json::from_str(&text).map_err(|e| {
            err(
                &mpath,
                format!("the manifest is not valid JSON: {e}"),
                "rewrite the dataset with `loadloom run`",
            )
        })?;
        let bad = |what: &str| {
            err(
                &mpath,
                format!("the manifest lacks {what}"),
                format!("a {FORMAT} manifest has it; rewrite the dataset with `loadloom run`"),
            )
        };
        match manifest["format"].as_str() {
            Some(FORMAT) => {}
            Some(other) => {
                return Err(err(
                    &mpath,
                    format!("format \"{other}\" is not {FORMAT}"),
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
        let files = self.manifest["files"].as_object().ok_or_else(|| {
            err(
                &self.dir.join("manifest.json"),
                "the manifest lists no files",
                "rewrite the dataset with `loadloom run`",
            )
        })?;
        for (name, entry) in files {
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
                    "the file was changed or cut short; rewrite the dataset",
                ));
            }
            let mut f = std::fs::File::open(&path)
                .map_err(|e| err(&path, e.to_string(), "check permissions"))?;
            let mut h = Sha256::new();
            let mut buf = vec![0u8; 1 << 20];
            loop {
                let n = f
                    .read(&mut buf)
                    .map_err(|e| err(&path, e.to_string(), "check the disk"))?;
                if n == 0 {
                    break;
                }
                h.update(&buf[..n]);
            }
            let hex: String = h.finalize().iter().map(|b| format!("{b:02x}")).collect();
            if Some(hex.as_str()) != entry["sha256"].as_str() {
                return Err(err(
                    &path,
                    "its sha256 differs from the manifest's",
                    "the file was changed after it was written; rewrite the dataset",
                ));
            }
        }
        Ok(())
    }
}
