//! Reference solvers behind the same task-folder contract as any other
//! (`builtin:NAME`): they read `task.json`, the training files and the test
//! meters, and write an estimate file.

mod co;
mod mean;
mod states;

use crate::stream::read_table;
use crate::table::TableError;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// A task folder as a solver sees it.
pub struct Task {
    pub dir: PathBuf,
    pub json: Value,
    pub ids: Vec<String>,
    pub timezone: String,
    pub lines: Vec<String>,
}

impl Task {
    pub fn open(dir: &Path) -> Result<Task, String> {
        let text = std::fs::read_to_string(dir.join("task.json"))
            .map_err(|e| format!("cannot read {}: {e}", dir.join("task.json").display()))?;
        let json: Value = serde_json::from_str(&text).map_err(|e| format!("task.json: {e}"))?;
        let ids = json["appliances"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|x| x["id"].as_str().map(str::to_string))
                    .collect()
            })
            .unwrap_or_default();
        let timezone = json["timezone"].as_str().unwrap_or("UTC").to_string();
        let lines = json["supply"]["conductors"]
            .as_array()
            .map(|a| {
                a.iter()
                    .filter_map(|c| c.as_str())
                    .filter(|c| *c != "n")
                    .map(str::to_string)
                    .collect()
            })
            .unwrap_or_default();
        Ok(Task {
            dir: dir.to_path_buf(),
            json,
            ids,
            timezone,
            lines,
        })
    }

    fn file(&self, part: &str, table: &str) -> Option<PathBuf> {
        self.json[part][table].as_str().map(|f| self.dir.join(f))
    }

    /// Training truth columns (whole), or an error if the task has no training period.
    pub fn train_truth(&self, cols: &[String]) -> Result<crate::table::Table, String> {
        let p = self
            .file("train", "truth")
            .ok_or("this solver needs a training period (--train)")?;
        let keep = |n: &str| cols.iter().any(|c| c == n);
        read_table(&p, Some(&keep), &[]).map_err(|e: TableError| e.to_string())
    }

    pub fn test_meters(&self, cols: &[String]) -> Result<crate::table::Table, String> {
        let p = self
            .file("test", "meters")
            .ok_or("task.json names no test meters")?;
        let keep = |n: &str| cols.iter().any(|c| c == n);
        read_table(&p, Some(&keep), &[]).map_err(|e: TableError| e.to_string())
    }
}

/// Names of the built-in solvers.
pub const NAMES: [&str; 3] = ["training-mean", "combinatorial", "combinatorial-per-line"];

/// Ids of the previous release, accepted for one more with a deprecation
/// line: (old, new).
pub const OLD_NAMES: [(&str, &str); 3] = [
    ("mean", "training-mean"),
    ("co", "combinatorial"),
    ("co-conductor", "combinatorial-per-line"),
];

/// Runs built-in solver `name` on the task folder, writing `estimate`.
pub fn run(name: &str, task_dir: &Path, estimate: &Path) -> Result<(), String> {
    let task = Task::open(task_dir)?;
    let (time, cols) = match name {
        "training-mean" => mean::solve(&task)?,
        "combinatorial" => co::solve(&task, false)?,
        "combinatorial-per-line" => co::solve(&task, true)?,
        _ => {
            return Err(format!(
                "no built-in solver \"{name}\"; built in: {}",
                NAMES.join(", ")
            ))
        }
    };
    crate::taskio::write_estimate(estimate, &task.timezone, &time, &cols)
        .map_err(|e| format!("writing {}: {e}", estimate.display()))
}
