//! The cross-home round trip: a solver trains on some homes of a fleet
//! (their meters and truth) and is scored on other homes it has never seen
//! (their meters only), home by home and pooled over the test homes.
//!
//! The work folder holds `task/` (`task.json`, `train/home=…/` with meters
//! and truth, `test/home=…/` with meters only), `test-truth/home=…/` (each
//! test home's scored truth, a dataset of its own with its sha256 in its
//! manifest) and `solver/` (the estimates, one file per test home, and a
//! `scratch/` folder). The guarantees are the single-home round trip's: the
//! truth lies outside every folder the solver is told about, an external
//! solver is confined, every truth file's sha256 is checked before it is
//! scored, and each estimate must cover exactly its home's rows.

use crate::contract::{CROSSHOME_FORMAT, FLEET_TASK_FORMAT};
use crate::dataset::Dataset;
use crate::metrics::{Acc, Scores};
use crate::render::{aligned, Render};
use crate::roundtrip::{
    appliances_revealed, confinement_line, iso, run_command, score_checked, write_test_truth,
    Failure, Reveal, Solver, SolverSite,
};
use crate::score::{overall_scores, ApplianceReport, Report};
use crate::taskio::{create_fresh, parquet_rows, split_rows};
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// A home of the fleet: its name (`home=00003`) and its dataset folder.
pub struct FleetHome {
    /// The home's name (`home=00003`).
    pub name: String,
    /// Its dataset folder.
    pub dataset: PathBuf,
}

/// A test home once its task is written.
pub struct TestHome {
    /// The home's name.
    pub name: String,
    /// Its scored truth (a dataset of its own).
    pub truth_dir: PathBuf,
    /// sha256 of its scored truth as written, kept in memory.
    truth_sha: String,
    /// The estimate's file name inside the solver's estimate folder.
    pub estimate_name: String,
}

/// A cross-home task written once.
pub struct FleetTask {
    /// The work folder holding the task, the scored truths and the solvers' folders.
    pub work: PathBuf,
    /// `task/`: everything a solver may read.
    pub task_dir: PathBuf,
    /// The fleet's datasets (kept from the solver, as the truth is).
    pub homes_dir: PathBuf,
    /// The training homes' names (meters and truth handed over).
    pub train: Vec<String>,
    /// The test homes (meters handed over, truth scored).
    pub test: Vec<TestHome>,
    /// Whether external solvers will be confined.
    pub confine: bool,
}

fn io_other(e: impl std::fmt::Display) -> std::io::Error {
    std::io::Error::other(e.to_string())
}

/// A home's entry in `task.json`: its zone, interval, supply, appliances
/// (as far as `reveal` allows), period and files.
fn home_entry(ds: &Dataset, name: &str, reveal: Reveal, files: Value) -> Value {
    let m = &ds.manifest;
    let t0 = m["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let mut e = json!({
        "home": name,
        "timezone": ds.timezone,
        "interval_s": ds.interval_s,
        "supply": {
            "kind": m["supply"]["kind"], "conductors": m["supply"]["conductors"],
            "voltage_ln_v": m["supply"]["voltage_ln_v"], "voltage_ll_v": m["supply"]["voltage_ll_v"], "frequency_hz": m["supply"]["frequency_hz"],
        },
        "start": iso(t0, &ds.timezone),
        "end": iso(t0 + ds.rows as i64 * dt, &ds.timezone),
        "rows": ds.rows,
        "appliances": appliances_revealed(m, reveal),
    });
    if let (Some(o), Some(f)) = (e.as_object_mut(), files.as_object()) {
        o.extend(f.clone());
    }
    e
}

/// Copies a whole table of a home into `dst` (created anew), as encoded.
fn copy_table(ds: &Dataset, table: &str, dst: &Path) -> std::io::Result<(usize, String, u64)> {
    let src = ds.dir.join(format!("{table}.parquet"));
    if !src.exists() {
        return Err(io_other(format!(
            "{}: a round trip needs Parquet tables",
            src.display()
        )));
    }
    let rows = parquet_rows(&src)?;
    let mut done = split_rows(&src, &[(dst, 0..rows)])?;
    Ok(done.remove(0))
}

/// Writes the cross-home task under `work`: the training homes' meters and
/// truth and the test homes' meters in `task/`, each test home's truth in
/// `test-truth/`. `homes_dir` holds the fleet's datasets.
pub fn prepare(
    train: &[FleetHome],
    test: &[FleetHome],
    work: &Path,
    homes_dir: &Path,
    reveal: Reveal,
    estimate_ext: &str,
) -> std::io::Result<FleetTask> {
    let task_dir = work.join("task");
    for d in [task_dir.clone(), work.join("test-truth")] {
        let _ = std::fs::remove_dir_all(&d);
    }
    let open = |h: &FleetHome| Dataset::open(&h.dataset).map_err(io_other);
    let mut train_json = Vec::new();
    for h in train {
        let ds = open(h)?;
        let rel = format!("train/{}", h.name);
        std::fs::create_dir_all(task_dir.join(&rel))?;
        for t in ["meters", "truth"] {
            copy_table(&ds, t, &task_dir.join(format!("{rel}/{t}.parquet")))?;
        }
        let files = json!({ "meters": format!("{rel}/meters.parquet"), "truth": format!("{rel}/truth.parquet") });
        train_json.push(home_entry(&ds, &h.name, reveal, files));
    }
    let (mut test_json, mut homes) = (Vec::new(), Vec::new());
    for h in test {
        let ds = open(h)?;
        let rel = format!("test/{}", h.name);
        let truth_dir = work.join("test-truth").join(&h.name);
        std::fs::create_dir_all(task_dir.join(&rel))?;
        std::fs::create_dir_all(&truth_dir)?;
        copy_table(
            &ds,
            "meters",
            &task_dir.join(format!("{rel}/meters.parquet")),
        )?;
        let scored = copy_table(&ds, "truth", &truth_dir.join("truth.parquet"))?;
        let rows = scored.0;
        let truth_sha = write_test_truth(&ds, &truth_dir, &(0..rows), scored)?;
        let estimate_name = format!("{}.{estimate_ext}", h.name);
        let files = json!({ "meters": format!("{rel}/meters.parquet"), "estimate": estimate_name });
        test_json.push(home_entry(&ds, &h.name, reveal, files));
        homes.push(TestHome {
            name: h.name.clone(),
            truth_dir,
            truth_sha,
            estimate_name,
        });
    }
    let confine = std::env::var("LOADLOOM_CONFINE").map_or(true, |v| v != "off");
    let task = json!({
        "format": FLEET_TASK_FORMAT,
        "reveal": reveal.name(),
        "train": train_json,
        "test": test_json,
        "estimate": {
            "folder": "the folder given as {estimate} ($LOADLOOM_ESTIMATE): one file per test home, named as its entry's `estimate`",
            "rows": "exactly one per row of that home's meters, with its `time` (interval start, tz-aware); no other rows",
            "columns": "time, then {id}_p_w for every appliance of that home (W, ≥ 0); optional {id}_on (0/1) and {id}_{conductor}_p_w",
            "format": "Parquet or CSV, as the file name's extension says",
            "scratch": "a folder for temporary files: $LOADLOOM_SCRATCH (also $TMPDIR)",
        },
        "log": confinement_line(confine),
    });
    let mut f = create_fresh(&task_dir.join("task.json"))?;
    std::io::Write::write_all(
        &mut f,
        (serde_json::to_string_pretty(&task).map_err(io_other)? + "\n").as_bytes(),
    )?;
    Ok(FleetTask {
        work: work.to_path_buf(),
        task_dir,
        homes_dir: homes_dir.to_path_buf(),
        train: train.iter().map(|h| h.name.clone()).collect(),
        test: homes,
        confine,
    })
}

/// One solver's run on a cross-home task.
pub struct FleetOutcome {
    /// The solver as reports name it.
    pub solver: String,
    /// The task folder it read.
    pub task_dir: PathBuf,
    /// The folder it wrote one estimate per test home into.
    pub estimates: PathBuf,
    /// Its log (standard output and error).
    pub log: PathBuf,
    /// Wall-clock time it ran, s.
    pub seconds: f64,
    /// "confined by Landlock …" or "not confined: …".
    pub confinement: String,
    /// Processes it left behind that were stopped.
    pub leftovers: usize,
    /// The training homes' names.
    pub train: Vec<String>,
    /// The test homes' names.
    pub test: Vec<String>,
    /// Each test home's score, or why it got none; empty when the solver
    /// itself failed (see `failure`).
    pub homes: Vec<(String, Result<Report, Failure>)>,
    /// Why the solver itself failed, if it did (then no home is scored).
    pub failure: Option<Failure>,
}

/// Runs a built-in solver on every test home, each with the training
/// homes' truth pooled.
fn run_builtin(name: &str, p: &FleetTask, estimates: &Path) -> Result<(), Failure> {
    let text = std::fs::read_to_string(p.task_dir.join("task.json"))
        .map_err(|e| Failure::Builtin(e.to_string()))?;
    let task: Value = serde_json::from_str(&text).map_err(|e| Failure::Builtin(e.to_string()))?;
    let pool: Vec<PathBuf> = task["train"]
        .as_array()
        .into_iter()
        .flatten()
        .filter_map(|h| h["truth"].as_str().map(|t| p.task_dir.join(t)))
        .collect();
    if pool.is_empty() {
        return Err(Failure::Builtin(
            "a built-in solver needs at least one training home (--train-homes)".into(),
        ));
    }
    for (home, t) in task["test"].as_array().into_iter().flatten().zip(&p.test) {
        let one = crate::solvers::TaskFolder::for_home(&p.task_dir, home, pool.clone());
        crate::solvers::run_task(name, &one, &estimates.join(&t.estimate_name))
            .map_err(|e| Failure::Builtin(format!("{}: {e}", t.name)))?;
    }
    Ok(())
}

/// Runs `solver` on the task (in `work/solver/`, its log `work/solver.log`),
/// then scores every test home's estimate.
pub fn run(
    p: &FleetTask,
    solver: &Solver,
    timeout: Duration,
    extra_read: &[PathBuf],
) -> std::io::Result<FleetOutcome> {
    let out_dir = p.work.join("solver");
    let _ = std::fs::remove_dir_all(&out_dir);
    let estimates = out_dir.join("estimates");
    std::fs::create_dir_all(out_dir.join("scratch"))?;
    std::fs::create_dir_all(&estimates)?;
    let log = p.work.join("solver.log");
    let started = Instant::now();
    let (ran, confinement, leftovers) = match solver {
        Solver::Builtin(name) => {
            let line = "not confined: a built-in solver runs inside loadloom".to_string();
            let mut f = create_fresh(&log)?;
            std::io::Write::write_all(&mut f, format!("builtin:{name}; {line}\n").as_bytes())?;
            (run_builtin(name, p, &estimates), line, 0)
        }
        Solver::Command(argv) => {
            let truth = p.work.join("test-truth");
            let run = SolverSite {
                task_dir: &p.task_dir,
                out_dir: &out_dir,
                estimate: &estimates,
                log: &log,
                protect: &[&truth, &p.homes_dir],
                confine: p.confine,
            };
            run_command(argv, &run, timeout, extra_read)
        }
    };
    let seconds = started.elapsed().as_secs_f64();
    let (homes, failure) = match ran {
        Ok(()) => (
            p.test
                .iter()
                .map(|h| {
                    let est = estimates.join(&h.estimate_name);
                    (
                        h.name.clone(),
                        score_checked(&h.truth_dir, &h.truth_sha, &est, &log),
                    )
                })
                .collect(),
            None,
        ),
        Err(f) => (Vec::new(), Some(f)),
    };
    Ok(FleetOutcome {
        solver: solver.describe(),
        task_dir: p.task_dir.clone(),
        estimates,
        log,
        seconds,
        confinement,
        leftovers,
        train: p.train.clone(),
        test: p.test.iter().map(|h| h.name.clone()).collect(),
        homes,
        failure,
    })
}

/// Scores pooled over the test homes: overall (errors and energies pooled
/// over every home's appliances and rows; precision, recall and F1 averaged
/// over every home's appliances) and per appliance id (pooled over the
/// homes that have it).
pub struct Pooled {
    /// Test homes scored.
    pub homes: usize,
    /// Scores pooled over every test home.
    pub overall: Scores,
    /// (id, homes that have it, scores).
    pub appliances: Vec<(String, usize, Scores)>,
}

/// Pools the scored homes; None when none was scored. Homes are pooled
/// only at one reporting interval (the energies would not add up
/// otherwise); a fleet has one.
pub fn pool(reports: &[&Report]) -> Option<Pooled> {
    let first = reports.first()?;
    let interval_s = first.plan.interval_ms as f64 / 1000.0;
    let mut all = Acc::default();
    let mut apps: Vec<ApplianceReport> = Vec::new();
    let mut by_id: Vec<(String, usize, Acc)> = Vec::new();
    let mut rows = 0;
    // Each home's local days stay days of their own (appended, not
    // merged by index), so the daily scores count home-days.
    for r in reports {
        all.days.extend(r.overall_acc.days.iter().copied());
        rows += r.plan.rows;
        for a in &r.appliances {
            match by_id.iter_mut().find(|(id, _, _)| *id == a.id) {
                Some((_, n, acc)) => {
                    *n += 1;
                    acc.days.extend(a.acc.days.iter().copied());
                }
                None => by_id.push((a.id.clone(), 1, a.acc.clone())),
            }
            apps.push(ApplianceReport {
                id: a.id.clone(),
                threshold_w: a.threshold_w,
                scores: a.scores.clone(),
                acc: Acc::default(),
                conductors: Vec::new(),
            });
        }
    }
    by_id.sort_by(|a, b| a.0.cmp(&b.0));
    Some(Pooled {
        homes: reports.len(),
        overall: overall_scores(&all, &apps, interval_s, rows),
        appliances: by_id
            .into_iter()
            .map(|(id, n, acc)| (id, n, acc.scores(interval_s)))
            .collect(),
    })
}

impl FleetOutcome {
    /// Whether every test home got a score.
    pub fn all_scored(&self) -> bool {
        self.failure.is_none() && self.homes.iter().all(|(_, r)| r.is_ok())
    }

    fn scored(&self) -> Vec<&Report> {
        self.homes
            .iter()
            .filter_map(|(_, r)| r.as_ref().ok())
            .collect()
    }
}

const HEAD: [&str; 8] = [
    "home", "rows", "MAE W", "NDE", "F1", "accuracy", "match", "energy %",
];

fn row(name: &str, s: &Scores) -> Vec<String> {
    let f = |x: Option<f64>| x.map_or_else(|| "–".into(), |v| format!("{v:.3}"));
    vec![
        name.to_string(),
        s.n.to_string(),
        format!("{:.1}", s.mae_w),
        f(s.nde),
        format!("{:.3}", s.f1),
        f(s.accuracy),
        f(s.match_rate),
        s.energy_error_pct
            .map_or_else(|| "–".into(), |v| format!("{v:+.1}")),
    ]
}

/// Rows of the per-home table, the pooled row last; the failures apart.
fn cells(o: &FleetOutcome) -> (Vec<Vec<String>>, Vec<String>) {
    let mut rows = Vec::new();
    let mut failed = Vec::new();
    for (name, r) in &o.homes {
        match r {
            Ok(rep) => rows.push(row(name, &rep.overall)),
            Err(f) => failed.push(format!("{name}: {f}")),
        }
    }
    if let Some(p) = pool(&o.scored()) {
        rows.push(row(&format!("pooled ({} homes)", p.homes), &p.overall));
    }
    if let Some(f) = &o.failure {
        failed.push(f.to_string());
    }
    (rows, failed)
}

fn markdown(head: &[&str], rows: &[Vec<String>]) -> String {
    let mut out = format!("| {} |\n|", head.join(" | "));
    for k in 0..head.len() {
        out += if k == 0 { "---|" } else { "---:|" };
    }
    out.push('\n');
    for r in rows {
        out += &format!("| {} |\n", r.join(" | "));
    }
    out
}

const APP_HEAD: [&str; 6] = ["appliance", "homes", "MAE W", "NDE", "F1", "accuracy"];

fn app_rows(o: &FleetOutcome) -> Vec<Vec<String>> {
    let f = |x: Option<f64>| x.map_or_else(|| "–".into(), |v| format!("{v:.3}"));
    pool(&o.scored())
        .map(|p| {
            p.appliances
                .iter()
                .map(|(id, n, s)| {
                    vec![
                        id.clone(),
                        n.to_string(),
                        format!("{:.1}", s.mae_w),
                        f(s.nde),
                        format!("{:.3}", s.f1),
                        f(s.accuracy),
                    ]
                })
                .collect()
        })
        .unwrap_or_default()
}

impl FleetOutcome {
    fn heading(&self) -> String {
        format!(
            "solver {} trained on {} homes ({}), tested on {} it never saw, in {:.1} s; {}\n",
            self.solver,
            self.train.len(),
            self.train.join(", "),
            self.test.len(),
            self.seconds,
            self.confinement
        )
    }

    fn failures_text(failed: &[String]) -> String {
        failed.iter().map(|f| format!("no score: {f}\n")).collect()
    }
}

impl Render for FleetOutcome {
    fn to_text(&self) -> String {
        let (rows, failed) = cells(self);
        let mut out = self.heading();
        out += &aligned(&HEAD, &rows, 1);
        let apps = app_rows(self);
        if !apps.is_empty() {
            out += "\npooled per appliance:\n";
            out += &aligned(&APP_HEAD, &apps, 1);
        }
        out + &Self::failures_text(&failed)
    }

    fn to_markdown(&self) -> String {
        let (rows, failed) = cells(self);
        let mut out = self.heading() + "\n" + &markdown(&HEAD, &rows);
        let apps = app_rows(self);
        if !apps.is_empty() {
            out += "\n";
            out += &markdown(&APP_HEAD, &apps);
        }
        out + &Self::failures_text(&failed)
    }

    fn to_json(&self) -> Value {
        let pooled = pool(&self.scored()).map(|p| {
            json!({
                "homes": p.homes,
                "overall": p.overall.to_json(),
                "appliances": p.appliances.iter().map(|(id, n, s)| {
                    let mut v = s.to_json();
                    v["id"] = json!(id);
                    v["homes"] = json!(n);
                    v
                }).collect::<Vec<_>>(),
            })
        });
        json!({
            "format": CROSSHOME_FORMAT,
            "solver": {
                "command": self.solver, "seconds": self.seconds, "task": self.task_dir,
                "estimates": self.estimates, "log": self.log, "confinement": self.confinement,
                "leftovers_stopped": self.leftovers,
            },
            "train_homes": self.train,
            "test_homes": self.homes.iter().map(|(name, r)| match r {
                Ok(rep) => json!({ "home": name, "report": rep.to_json() }),
                Err(f) => json!({ "home": name, "failure": f.to_string() }),
            }).collect::<Vec<_>>(),
            "failure": self.failure.as_ref().map(|f| f.to_string()),
            "pooled": pooled,
        })
    }
}
