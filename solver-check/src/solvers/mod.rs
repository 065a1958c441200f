//! Reference solvers behind the same task-folder contract as any other
//! (`builtin:NAME`): they read `task.json`, the training files and the test
//! meters, and write an estimate file. Their errors are a `String` on
//! purpose: a built-in solver's failure is a line of the round trip's report
//! (`Failure::Builtin`), as an outside solver's is its log, not an error of
//! the command.

mod co;
mod mean;
mod states;

use crate::stream::read_table;
use crate::table::TableError;
use serde_json::Value;
use std::path::{Path, PathBuf};

/// A task folder as a solver sees it.
pub struct TaskFolder {
    /// The task folder.
    pub dir: PathBuf,
    /// `task.json`, parsed.
    pub json: Value,
    /// The appliance ids to estimate.
    pub ids: Vec<String>,
    /// The home's time zone (IANA name).
    pub timezone: String,
    /// The line conductors the meters read (`l1`, `l2`, …).
    pub lines: Vec<String>,
    /// Training truths of other homes (a cross-home task), pooled by
    /// [`TaskFolder::train_truth`]; empty for a task of one home.
    pub pool: Vec<PathBuf>,
}

impl TaskFolder {
    /// Opens the task folder `dir` and reads its `task.json`.
    pub fn open(dir: &Path) -> Result<TaskFolder, String> {
        let text = std::fs::read_to_string(dir.join("task.json"))
            .map_err(|e| format!("cannot read {}: {e}", dir.join("task.json").display()))?;
        let json: Value = serde_json::from_str(&text).map_err(|e| format!("task.json: {e}"))?;
        Ok(TaskFolder::of(dir, json, Vec::new()))
    }

    /// One test home of a cross-home task (`loadloom-fleet-task/1`): its
    /// entry of `test` describes the home and names its meters; `pool` are
    /// the training homes' truth files.
    pub fn for_home(dir: &Path, home: &Value, pool: Vec<PathBuf>) -> TaskFolder {
        let json = serde_json::json!({
            "timezone": home["timezone"], "supply": home["supply"],
            "appliances": home["appliances"], "test": { "meters": home["meters"] },
        });
        TaskFolder::of(dir, json, pool)
    }

    fn of(dir: &Path, json: Value, pool: Vec<PathBuf>) -> TaskFolder {
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
        TaskFolder {
            dir: dir.to_path_buf(),
            json,
            ids,
            timezone,
            lines,
            pool,
        }
    }

    fn file(&self, part: &str, table: &str) -> Option<PathBuf> {
        self.json[part][table].as_str().map(|f| self.dir.join(f))
    }

    /// Training truth columns (whole), or an error if the task has no training period.
    pub fn train_truth(&self, cols: &[String]) -> Result<crate::table::Table, String> {
        if !self.pool.is_empty() {
            return self.pooled_truth(cols);
        }
        let p = self
            .file("train", "truth")
            .ok_or("this solver needs a training period (--train)")?;
        let keep = |n: &str| cols.iter().any(|c| c == n);
        read_table(&p, Some(&keep), &[]).map_err(|e: TableError| e.to_string())
    }

    /// The training truth of a cross-home task: for each appliance id of
    /// this home, the rows of every training home that has it, one after
    /// another (its per-line columns with them, 0 where that home's
    /// appliance draws nothing on the line). An id no training home has
    /// gets one row of 0 W: never seen, so estimated off.
    fn pooled_truth(&self, cols: &[String]) -> Result<crate::table::Table, String> {
        let tables = self
            .pool
            .iter()
            .map(|p| {
                let keep = |n: &str| cols.iter().any(|c| c == n);
                read_table(p, Some(&keep), &[]).map_err(|e: TableError| e.to_string())
            })
            .collect::<Result<Vec<_>, _>>()?;
        let mut columns = Vec::new();
        for id in &self.ids {
            let main = format!("{id}_p_w");
            let mut own: Vec<String> = vec![main.clone()];
            own.extend(self.lines.iter().map(|l| format!("{id}_{l}_p_w")));
            own.retain(|c| cols.contains(c));
            let with: Vec<&crate::table::Table> = tables.iter().filter(|t| t.has(&main)).collect();
            for c in &own {
                let mut v: Vec<f64> = Vec::new();
                let mut any = false;
                for t in &with {
                    match t.num(c) {
                        Some(x) => {
                            v.extend_from_slice(x);
                            any = true;
                        }
                        None => v.extend(std::iter::repeat_n(0.0, t.time_ms.len())),
                    }
                }
                if with.is_empty() && *c == main {
                    (v, any) = (vec![0.0], true);
                }
                if any {
                    columns.push((c.clone(), crate::table::Column::Num(v)));
                }
            }
        }
        Ok(crate::table::Table {
            file: self.dir.join("train"),
            time_ms: Vec::new(),
            time_zone: None,
            columns,
        })
    }

    /// The test period's meters, columns `cols` only (a small table, read whole).
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
    run_task(name, &TaskFolder::open(task_dir)?, estimate)
}

/// Runs built-in solver `name` on `task`, writing `estimate`.
pub fn run_task(name: &str, task: &TaskFolder, estimate: &Path) -> Result<(), String> {
    let (time, cols) = match name {
        "training-mean" => mean::solve(task)?,
        "combinatorial" => co::solve(task, false)?,
        "combinatorial-per-line" => co::solve(task, true)?,
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
