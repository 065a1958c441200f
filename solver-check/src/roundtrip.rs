//! The round trip: a dataset split into a training period (meters and
//! truth) and a test period (meters only), handed to a solver as a task
//! folder, the solver run as a confined child process (or a built-in one),
//! and its estimate scored on exactly the test period. A solver that
//! crashes, hangs, writes nothing, writes a malformed estimate or touches
//! the truth gets a report, never a score.
//!
//! The work folder holds, side by side, the dataset, `task/` (what the
//! solver may read), `test-truth/` (the scored rows, a dataset of their own
//! with their sha256 in its manifest) and `solver/` (the estimate and a
//! `scratch/` folder: all the solver may write).

use crate::confine::{contains, program_paths, Access, Sandbox};
use crate::contract::TASK_FORMAT;
use crate::dataset::Dataset;
use crate::score::{score, Options, Report, ScoreError};
use crate::taskio::{create_fresh, split_rows};
use serde_json::{json, Value};
use std::ops::Range;
use std::path::{Path, PathBuf};
use std::time::{Duration, Instant};

/// What a solver is told about the home beyond its meters (`--reveal`).
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Reveal {
    /// Appliance ids only.
    Ids,
    /// And labels, wiring and conductors.
    Wiring,
    /// And states with nominal power and per-conductor split, on-thresholds.
    States,
}

impl Reveal {
    /// The name `--reveal` takes and `task.json` records.
    pub fn name(self) -> &'static str {
        match self {
            Reveal::Ids => "ids",
            Reveal::Wiring => "wiring",
            Reveal::States => "states",
        }
    }
}

/// A solver to run: one of the built-in ones, or a program.
#[derive(Clone, Debug)]
pub enum Solver {
    /// A built-in solver by name (`builtin:NAME`).
    Builtin(String),
    /// argv with `{task}` and `{estimate}` placeholders.
    Command(Vec<String>),
}

impl Solver {
    /// `builtin:NAME`, or a command line split like a shell would (quotes,
    /// no expansion); it must hold `{task}` and `{estimate}`.
    pub fn parse(text: &str) -> Result<Solver, crate::diagnostic::Error> {
        let bad = |m: String| {
            let help = format!("give builtin:NAME ({}) or a command line with {{task}} and {{estimate}}, e.g. \"python3 my_solver.py {{task}} {{estimate}}\"", crate::solvers::NAMES.join(", "));
            crate::diagnostic::Error::option(&format!("--solver {text}"), m, help)
        };
        if let Some(name) = text.strip_prefix("builtin:") {
            let name = crate::solvers::OLD_NAMES
                .iter()
                .find(|(old, _)| *old == name)
                .map_or(name, |(_, new)| new);
            if !crate::solvers::NAMES.contains(&name) {
                return Err(bad(format!("no built-in solver \"{name}\"")));
            }
            return Ok(Solver::Builtin(name.to_string()));
        }
        let argv = split_words(text).map_err(bad)?;
        if argv.is_empty() {
            return Err(bad("the solver command is empty".into()));
        }
        if !argv.iter().any(|a| a.contains("{task}"))
            || !argv.iter().any(|a| a.contains("{estimate}"))
        {
            return Err(bad(
                "the solver command must contain {task} and {estimate}".into()
            ));
        }
        Ok(Solver::Command(argv))
    }

    /// The deprecation line for a built-in id of the previous release.
    pub fn deprecation(text: &str) -> Option<String> {
        let name = text.strip_prefix("builtin:")?;
        let (old, new) = crate::solvers::OLD_NAMES.iter().find(|(o, _)| *o == name)?;
        Some(format!("warning: builtin:{old} is renamed builtin:{new}; the old id is accepted in this release only"))
    }

    /// The solver as reports name it (`builtin:NAME`, or the command line).
    pub fn describe(&self) -> String {
        match self {
            Solver::Builtin(n) => format!("builtin:{n}"),
            Solver::Command(a) => a.join(" "),
        }
    }
}

/// Splits a command line into words: whitespace separates, single and
/// double quotes group, a backslash escapes the next character. The error
/// is what is wrong with the text alone (a `String` on purpose): the caller
/// names the option it came from.
pub fn split_words(s: &str) -> Result<Vec<String>, String> {
    let mut out = Vec::new();
    let mut cur = String::new();
    let mut in_word = false;
    let mut quote: Option<char> = None;
    let mut chars = s.chars();
    while let Some(c) = chars.next() {
        match (quote, c) {
            (Some(q), c) if c == q => quote = None,
            (Some(_), '\\') | (None, '\\') => {
                cur.push(
                    chars
                        .next()
                        .ok_or("a trailing backslash in the solver command")?,
                );
                in_word = true;
            }
            (Some(_), c) => cur.push(c),
            (None, '"') | (None, '\'') => {
                quote = Some(c);
                in_word = true;
            }
            (None, c) if c.is_whitespace() => {
                if in_word {
                    out.push(std::mem::take(&mut cur));
                    in_word = false;
                }
            }
            (None, c) => {
                cur.push(c);
                in_word = true;
            }
        }
    }
    if quote.is_some() {
        return Err("an unclosed quote in the solver command".into());
    }
    if in_word {
        out.push(cur);
    }
    Ok(out)
}

/// Why a solver got no score.
#[derive(Debug)]
pub enum Failure {
    /// It could not be started (the operating system's reason).
    Spawn(String),
    /// It exited with a failure.
    Crashed {
        /// Its exit status or signal, in words.
        status: String,
        /// The last lines of its log.
        tail: String,
    },
    /// It ran past its time limit and was stopped.
    TimedOut {
        /// The time limit it ran past.
        after: Duration,
        /// The last lines of its log.
        tail: String,
    },
    /// Its output passed the log's limit and it was stopped.
    Flooded {
        /// The limit in bytes.
        limit: u64,
        /// The last lines of its log.
        tail: String,
    },
    /// It exited without writing its estimate.
    NoEstimate {
        /// The last lines of its log.
        tail: String,
    },
    /// Its estimate breaks a rule of the contract (the scorer's error).
    Malformed(String),
    /// A built-in solver failed (its error).
    Builtin(String),
    /// The scored truth changed while the solver ran.
    Truth(String),
}

impl std::fmt::Display for Failure {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        let tail = |t: &str| {
            if t.trim().is_empty() {
                "(the solver printed nothing)".to_string()
            } else {
                format!("last lines of its log:\n{t}")
            }
        };
        match self {
            Failure::Spawn(e) => write!(f, "the solver could not be started: {e}"),
            Failure::Crashed { status, tail: t } => {
                write!(f, "the solver failed ({status}); {}", tail(t))
            }
            Failure::TimedOut { after, tail: t } => write!(
                f,
                "the solver was stopped after the time limit of {:.0} s; {}",
                after.as_secs_f64(),
                tail(t)
            ),
            Failure::Flooded { limit, tail: t } => write!(
                f,
                "the solver was stopped when its output passed {} MiB (write data to files, not to stdout or stderr); {}",
                limit >> 20,
                tail(t)
            ),
            Failure::NoEstimate { tail: t } => write!(
                f,
                "the solver ended without writing its estimate; {}",
                tail(t)
            ),
            Failure::Malformed(e) => write!(
                f,
                "the solver's estimate is malformed, so it gets no score:\n{e}"
            ),
            Failure::Builtin(e) => write!(f, "the built-in solver failed: {e}"),
            Failure::Truth(e) => write!(
                f,
                "the truth file changed after it was written, so no score is given:\n{e}"
            ),
        }
    }
}

/// One solver's run on a prepared task.
pub struct SolverRun {
    /// The task folder the solver read.
    pub task_dir: PathBuf,
    /// The scored truth (a dataset of the test rows only).
    pub truth_dir: PathBuf,
    /// The estimate file the solver was to write.
    pub estimate: PathBuf,
    /// The solver's log (its standard output and error).
    pub log: PathBuf,
    /// The solver as reports name it.
    pub solver: String,
    /// Wall-clock time the solver ran, s.
    pub seconds: f64,
    /// "confined by Landlock …" or "not confined: …".
    pub confinement: String,
    /// Processes the solver left behind that were stopped.
    pub leftovers: usize,
    /// Its scores on the test period, or why it got none.
    pub result: Result<Report, Failure>,
}

/// An instant as local ISO-8601 with its UTC offset.
pub(crate) fn iso(ms: i64, tz: &str) -> String {
    let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    jiff::Timestamp::from_millisecond(ms)
        .map(|t| t.to_zoned(tz).strftime("%Y-%m-%dT%H:%M:%S%:z").to_string())
        .unwrap_or_default()
}

/// Rows of the dataset handed over with truth (train) and scored (test).
#[derive(Clone, Debug)]
pub struct Split {
    /// Rows of the training period (meters and truth handed over).
    pub train: Range<usize>,
    /// Rows of the test period (meters handed over, truth scored).
    pub test: Range<usize>,
}

/// A task written once, for any number of solvers.
pub struct PreparedTask {
    /// The dataset the task was cut from.
    pub dataset: PathBuf,
    /// The work folder holding the task, the scored truth and the solvers' folders.
    pub work: PathBuf,
    /// `task/`: everything the solver may read.
    pub task_dir: PathBuf,
    /// `test-truth/`: the scored rows, a dataset of their own.
    pub truth_dir: PathBuf,
    /// sha256 of `truth_dir/truth.parquet` as written, kept in memory.
    truth_sha: String,
    /// The file the solver must write (`estimate.parquet` or `estimate.csv`).
    pub estimate_name: String,
    /// Whether external solvers will be confined (LOADLOOM_CONFINE=off turns it off).
    pub confine: bool,
}

/// The manifest's appliances, described as far as `reveal` allows.
pub(crate) fn appliances_revealed(m: &Value, reveal: Reveal) -> Vec<Value> {
    m["appliances"]
        .as_array()
        .map(|list| {
            list.iter()
                .map(|a| match reveal {
                    Reveal::Ids => json!({ "id": a["id"] }),
                    Reveal::Wiring => json!({ "id": a["id"], "label": a["label"], "wiring": a["wiring"], "connections": a["connections"], "conductors": a["conductors"] }),
                    Reveal::States => json!({
                        "id": a["id"], "label": a["label"], "wiring": a["wiring"], "connections": a["connections"], "conductors": a["conductors"],
                        "on_threshold_w": a["on_threshold_w"],
                        "states": a["states"].as_array().map(|s| s.iter().map(|st| json!({ "name": st["name"], "p_w": st["p_w"], "q_var": st["q_var"], "per_conductor": st["per_conductor"] })).collect::<Vec<_>>()),
                    }),
                })
                .collect()
        })
        .unwrap_or_default()
}

/// What external solvers will get, for task.json and the reports.
pub fn confinement_line(confine: bool) -> String {
    let abi = crate::confine::landlock_abi();
    if !confine {
        "not confined: confinement was turned off (LOADLOOM_CONFINE=off)".into()
    } else if abi == 0 {
        "not confined: this system offers no Landlock".into()
    } else {
        format!("confined by Landlock (ABI {abi}): reads its task folder, its program and the system's libraries; writes only its estimate folder")
    }
}

/// Borrowed row slices for [`split_rows`].
fn slices(v: &[(PathBuf, Range<usize>)]) -> Vec<(&Path, Range<usize>)> {
    v.iter().map(|(p, r)| (p.as_path(), r.clone())).collect()
}

/// Writes the tables of the task folder `task` (training meters and
/// truth, test meters) and the scored truth `truth/truth.parquet` (test
/// rows), one pass over each source table, meters and truth on two
/// threads. Returns the scored truth's rows, sha256 and bytes.
fn write_tables(
    ds: &Dataset,
    task: &Path,
    truth: &Path,
    split: &Split,
) -> std::io::Result<(usize, String, u64)> {
    for d in [task.to_path_buf(), truth.to_path_buf()] {
        let _ = std::fs::remove_dir_all(&d);
    }
    std::fs::create_dir_all(task.join("test"))?;
    std::fs::create_dir_all(task.join("train"))?;
    std::fs::create_dir_all(truth)?;
    let src = |t: &str| ds.dir.join(format!("{t}.parquet"));
    if !src("truth").exists() || !src("meters").exists() {
        return Err(std::io::Error::other(format!(
            "{}: a round trip needs a Parquet dataset (write it with --format parquet)",
            ds.dir.display()
        )));
    }
    let (train, test) = (split.train.clone(), split.test.clone());
    let (m_train, m_test) = (
        task.join("train/meters.parquet"),
        task.join("test/meters.parquet"),
    );
    let (t_train, t_test) = (
        task.join("train/truth.parquet"),
        truth.join("truth.parquet"),
    );
    let with_train = !train.is_empty();
    let outs = |tr: &Path, te: &Path| -> Vec<(PathBuf, Range<usize>)> {
        let mut v = vec![(te.to_path_buf(), test.clone())];
        if with_train {
            v.push((tr.to_path_buf(), train.clone()));
        }
        v
    };
    let (mo, to) = (outs(&m_train, &m_test), outs(&t_train, &t_test));
    let (meters, truth_out) = std::thread::scope(|sc| {
        let m = sc.spawn(|| split_rows(&src("meters"), &slices(&mo)));
        let t = split_rows(&src("truth"), &slices(&to));
        (
            m.join()
                .unwrap_or_else(|_| Err(std::io::Error::other("the meters copy panicked"))),
            t,
        )
    });
    meters?;
    let mut t = truth_out?;
    Ok(t.swap_remove(0))
}

/// Writes `task.json` into the task folder (its tables are written by
/// `write_tables`): training rows `split.train` with truth, test rows
/// `split.test` with meters only; returns the folder.
pub fn write_task(
    ds: &Dataset,
    dir: &Path,
    split: &Split,
    reveal: Reveal,
    estimate_name: &str,
    confinement: &str,
) -> std::io::Result<PathBuf> {
    let m = &ds.manifest;
    let t0 = m["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let at = |r: usize| iso(t0 + r as i64 * dt, &ds.timezone);
    let (train, test) = (&split.train, &split.test);
    let train_json = if !train.is_empty() {
        json!({ "meters": "train/meters.parquet", "truth": "train/truth.parquet", "start": at(train.start), "end": at(train.end), "rows": train.len() })
    } else {
        Value::Null
    };
    let task = json!({
        "format": TASK_FORMAT,
        "reveal": reveal.name(),
        "timezone": ds.timezone,
        "interval_s": ds.interval_s,
        "supply": {
            "kind": m["supply"]["kind"], "conductors": m["supply"]["conductors"],
            "voltage_ln_v": m["supply"]["voltage_ln_v"], "voltage_ll_v": m["supply"]["voltage_ll_v"], "frequency_hz": m["supply"]["frequency_hz"],
        },
        "train": train_json,
        "test": { "meters": "test/meters.parquet", "start": at(test.start), "end": at(test.end), "rows": test.len() },
        "appliances": appliances_revealed(m, reveal),
        "estimate": {
            "file": estimate_name,
            "rows": "exactly one per row of test/meters.parquet, with its `time` (interval start, tz-aware); no other rows",
            "columns": "time, then {id}_p_w for every appliance (W, ≥ 0); optional {id}_on (0/1) and {id}_{conductor}_p_w",
            "format": "Parquet or CSV, as the file name's extension says",
            "scratch": "a folder for temporary files: $LOADLOOM_SCRATCH (also $TMPDIR)",
        },
        "log": confinement,
    });
    let mut f = create_fresh(&dir.join("task.json"))?;
    std::io::Write::write_all(
        &mut f,
        (serde_json::to_string_pretty(&task).expect("JSON") + "\n").as_bytes(),
    )?;
    Ok(dir.to_path_buf())
}

/// Writes the manifest of the scored truth (rows `test` of the dataset's
/// truth, a dataset of their own): their time, rows and sha256.
pub(crate) fn write_test_truth(
    ds: &Dataset,
    dir: &Path,
    test: &Range<usize>,
    (rows, sha, bytes): (usize, String, u64),
) -> std::io::Result<String> {
    let mut m = ds.manifest.clone();
    let t0 = m["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let start = t0 + test.start as i64 * (ds.interval_s * 1000.0).round() as i64;
    m["time"]["start_utc_ms"] = json!(start);
    m["time"]["start_local"] = json!(iso(start, &ds.timezone));
    m["time"]["rows"] = json!(rows);
    m["files"] = json!({ "truth.parquet": { "rows": rows, "bytes": bytes, "sha256": sha } });
    if let Some(o) = m.as_object_mut() {
        // Energies of the whole run would not describe these rows.
        o.remove("summary");
        o.insert(
            "test_period_of".into(),
            json!({ "dataset": ds.dir, "first_row": test.start }),
        );
    }
    let mut f = create_fresh(&dir.join("manifest.json"))?;
    std::io::Write::write_all(
        &mut f,
        (serde_json::to_string_pretty(&m).expect("JSON") + "\n").as_bytes(),
    )?;
    Ok(sha)
}

/// Writes the task and the scored truth under `work`, for any number of solvers.
pub fn prepare(
    dataset: &Path,
    work: &Path,
    split: &Split,
    reveal: Reveal,
    estimate_name: &str,
) -> std::io::Result<PreparedTask> {
    let ds = Dataset::open(dataset).map_err(|e| std::io::Error::other(e.to_string()))?;
    if split.test.is_empty()
        || split.test.end > ds.rows as usize
        || split.train.end > split.test.start
    {
        return Err(std::io::Error::other(format!(
            "rows {:?} (train) and {:?} (test) do not fit the dataset's {} rows",
            split.train, split.test, ds.rows
        )));
    }
    refuse_gapped_meters(&ds)?;
    let confine = std::env::var("LOADLOOM_CONFINE").map_or(true, |v| v != "off");
    let truth_dir = work.join("test-truth");
    let scored = write_tables(&ds, &work.join("task"), &truth_dir, split)?;
    let task_dir = write_task(
        &ds,
        &work.join("task"),
        split,
        reveal,
        estimate_name,
        &confinement_line(confine),
    )?;
    let truth_sha = write_test_truth(&ds, &truth_dir, &split.test, scored)?;
    Ok(PreparedTask {
        dataset: dataset.to_path_buf(),
        work: work.to_path_buf(),
        task_dir,
        truth_dir,
        truth_sha,
        estimate_name: estimate_name.to_string(),
        confine,
    })
}

/// The task's periods are cut by row, the same rows of meters and truth;
/// a meters table with fewer rows than the truth (dropouts written as
/// missing rows) would cut the meters at the wrong times, so it is refused.
fn refuse_gapped_meters(ds: &Dataset) -> std::io::Result<()> {
    let path = ds.dir.join("meters.parquet");
    let rows = crate::taskio::parquet_rows(&path)?;
    if rows as u64 == ds.rows {
        return Ok(());
    }
    // InvalidData: bad input (exit status 2), not a failed run.
    Err(std::io::Error::new(
        std::io::ErrorKind::InvalidData,
        format!(
            "{}: {rows} meter rows for {} truth rows (dropouts written as missing rows); \
         a round trip needs a meters row per interval: write the dropouts with \
         `as = \"null\"` in [faults]",
            path.display(),
            ds.rows
        ),
    ))
}

/// The last `lines` lines of a log, indented.
/// Only the log's last 16 KiB are read (a flooded log can be large), each
/// line cut to 300 characters, bytes that are not UTF-8 shown as U+FFFD.
pub(crate) fn tail(path: &Path, lines: usize) -> String {
    const LAST: u64 = 16 << 10;
    let mut bytes = Vec::new();
    if let Ok(mut f) = std::fs::File::open(path) {
        use std::io::{Read, Seek, SeekFrom};
        let len = f.metadata().map(|m| m.len()).unwrap_or(0);
        let _ = f.seek(SeekFrom::Start(len.saturating_sub(LAST)));
        let _ = f.take(LAST).read_to_end(&mut bytes);
    }
    let text = String::from_utf8_lossy(&bytes);
    let all: Vec<&str> = text.lines().collect();
    all[all.len().saturating_sub(lines)..]
        .iter()
        .map(|l| format!("    {}", l.chars().take(300).collect::<String>()))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Runs the solver on the task, then scores its estimate on the test rows.
pub fn run(
    dataset: &Path,
    work: &Path,
    split: &Split,
    reveal: Reveal,
    solver: &Solver,
    timeout: Duration,
    estimate_name: &str,
) -> std::io::Result<SolverRun> {
    let p = prepare(dataset, work, split, reveal, estimate_name)?;
    run_solver(&p, solver, work, timeout, &[])
}

/// Runs one solver on a prepared task with its own folder `slot` (the log
/// `slot/solver.log`, the estimate and scratch under `slot/solver/`), then
/// scores it. `extra_read` are folders the solver may read besides its own.
pub fn run_solver(
    p: &PreparedTask,
    solver: &Solver,
    slot: &Path,
    timeout: Duration,
    extra_read: &[PathBuf],
) -> std::io::Result<SolverRun> {
    let out_dir = slot.join("solver");
    let _ = std::fs::remove_dir_all(&out_dir);
    std::fs::create_dir_all(out_dir.join("scratch"))?;
    let estimate = out_dir.join(&p.estimate_name);
    let log = slot.join("solver.log");
    let started = Instant::now();
    let (ran, confinement, leftovers) = match solver {
        Solver::Builtin(name) => {
            let line = "not confined: a built-in solver runs inside loadloom".to_string();
            let mut f = create_fresh(&log)?;
            std::io::Write::write_all(&mut f, format!("builtin:{name}; {line}\n").as_bytes())?;
            let r = crate::solvers::run(name, &p.task_dir, &estimate).map_err(Failure::Builtin);
            (r, line, 0)
        }
        Solver::Command(argv) => {
            let run = SolverSite {
                task_dir: &p.task_dir,
                out_dir: &out_dir,
                estimate: &estimate,
                log: &log,
                protect: &[&p.work, &p.dataset],
                confine: p.confine,
            };
            run_command(argv, &run, timeout, extra_read)
        }
    };
    let seconds = started.elapsed().as_secs_f64();
    let result = ran.and_then(|_| score_checked(&p.truth_dir, &p.truth_sha, &estimate, &log));
    Ok(SolverRun {
        task_dir: p.task_dir.clone(),
        truth_dir: p.truth_dir.clone(),
        estimate,
        log,
        solver: solver.describe(),
        seconds,
        confinement,
        leftovers,
        result,
    })
}

/// Where an external solver runs: the folder it reads, the one it writes,
/// its estimate (a file, or a folder of them), its log, and the folders
/// holding truth it must never reach.
pub(crate) struct SolverSite<'a> {
    pub task_dir: &'a Path,
    pub out_dir: &'a Path,
    pub estimate: &'a Path,
    pub log: &'a Path,
    pub protect: &'a [&'a Path],
    pub confine: bool,
}

/// Runs an external solver confined (as far as the system allows) to its
/// task folder, its program, `extra_read` and `run.out_dir`. Returns how it
/// ended, the confinement line and how many processes it left behind.
pub(crate) fn run_command(
    argv: &[String],
    run: &SolverSite,
    timeout: Duration,
    extra_read: &[PathBuf],
) -> (Result<(), Failure>, String, usize) {
    let mut access = Access {
        read: vec![run.task_dir.to_path_buf()],
        write: vec![run.out_dir.to_path_buf()],
    };
    // A command word or an allowed path inside the truth's folders (a
    // `--dataset` folder's truth.parquet, say) would open the truth to the
    // solver: there only the task folder is granted.
    let apart = |p: &PathBuf| !run.protect.iter().any(|x| contains(x, p));
    access.read.extend(
        program_paths(argv)
            .into_iter()
            .chain(extra_read.iter().cloned())
            .filter(apart),
    );
    let sandbox = Sandbox::new(&access, run.protect, run.confine);
    let (r, left) = match run_child(argv, run, &sandbox, timeout) {
        Ok(left) => (Ok(()), left),
        Err((f, left)) => (Err(f), left),
    };
    (r, sandbox.status.clone(), left)
}

/// Scores the estimate against the scored truth in `truth_dir`, once both
/// are checked: the estimate a plain file of its own (not a link to
/// anything), the truth unchanged since it was written (its manifest's
/// sha256 `truth_sha`, the one kept in memory, and the file's the
/// manifest's).
pub(crate) fn score_checked(
    truth_dir: &Path,
    truth_sha: &str,
    estimate: &Path,
    log: &Path,
) -> Result<Report, Failure> {
    let meta = match std::fs::symlink_metadata(estimate) {
        Err(_) => {
            return Err(Failure::NoEstimate {
                tail: tail(log, 10),
            })
        }
        Ok(m) => m,
    };
    #[cfg(unix)]
    let links = std::os::unix::fs::MetadataExt::nlink(&meta);
    #[cfg(not(unix))]
    let links = 1;
    if !meta.file_type().is_file() || links != 1 {
        let what = if meta.file_type().is_symlink() || (meta.file_type().is_file() && links != 1) {
            "a link, not a file of its own"
        } else {
            "not a regular file (a folder, FIFO or device)"
        };
        return Err(Failure::Malformed(format!("error: the estimate is {what}\n  --> {}\n  = help: write the estimate itself to the path given", estimate.display())));
    }
    let mpath = truth_dir.join("manifest.json");
    let recorded = std::fs::read_to_string(&mpath)
        .ok()
        .and_then(|t| serde_json::from_str::<Value>(&t).ok())
        .and_then(|m| {
            m["files"]["truth.parquet"]["sha256"]
                .as_str()
                .map(str::to_string)
        });
    if recorded.as_deref() != Some(truth_sha) {
        return Err(Failure::Truth(format!(
            "  --> {}: its sha256 is not the one written",
            mpath.display()
        )));
    }
    let opts = Options {
        partial: false,
        thresholds: vec![],
    };
    score(truth_dir, estimate, &opts).map_err(|e| match e {
        ScoreError::Dataset(d) => Failure::Truth(d.to_string()),
        ScoreError::Table(t) => Failure::Malformed(t.to_string()),
    })
}

/// Replaces `{task}`, `{estimate}` and `{scratch}` in one pass, so a path
/// that itself holds a placeholder's text is never substituted again.
pub fn substitute(arg: &str, values: &[(&str, &str)]) -> String {
    let mut out = String::with_capacity(arg.len());
    let mut rest = arg;
    'scan: while !rest.is_empty() {
        for (key, value) in values {
            if let Some(after) = rest.strip_prefix(key) {
                out.push_str(value);
                rest = after;
                continue 'scan;
            }
        }
        let c = rest.chars().next().expect("not empty");
        out.push(c);
        rest = &rest[c.len_utf8()..];
    }
    out
}

type ChildResult = Result<usize, (Failure, usize)>;

fn run_child(
    argv: &[String],
    run: &SolverSite,
    sandbox: &Sandbox,
    timeout: Duration,
) -> ChildResult {
    let (estimate, log) = (run.estimate, run.log);
    let scratch = run.out_dir.join("scratch");
    let (t, e, s) = (
        run.task_dir.display().to_string(),
        estimate.display().to_string(),
        scratch.display().to_string(),
    );
    let values = [
        ("{task}", t.as_str()),
        ("{estimate}", e.as_str()),
        ("{scratch}", s.as_str()),
    ];
    let args: Vec<String> = argv.iter().map(|a| substitute(a, &values)).collect();
    let mut f = create_fresh(log).map_err(|e| {
        (
            Failure::Spawn(format!("cannot create {}: {e}", log.display())),
            0,
        )
    })?;
    let head = format!("loadloom: solver {}; {}\n", argv.join(" "), sandbox.status);
    std::io::Write::write_all(&mut f, head.as_bytes())
        .map_err(|e| (Failure::Spawn(e.to_string()), 0))?;
    let env = [
        ("LOADLOOM_TASK", run.task_dir),
        ("LOADLOOM_ESTIMATE", estimate),
        ("LOADLOOM_SCRATCH", scratch.as_path()),
        ("TMPDIR", scratch.as_path()),
    ];
    let (ended, left) =
        crate::child::run(&args, &env, f, sandbox, timeout).map_err(|e| (Failure::Spawn(e), 0))?;
    match ended {
        crate::child::Ended::Exited(status) if status.success() => Ok(left),
        crate::child::Ended::Exited(status) => Err((
            Failure::Crashed {
                status: status.to_string(),
                tail: tail(log, 10),
            },
            left,
        )),
        crate::child::Ended::TimedOut => Err((
            Failure::TimedOut {
                after: timeout,
                tail: tail(log, 10),
            },
            left,
        )),
        crate::child::Ended::Flooded => Err((
            Failure::Flooded {
                limit: crate::child::LOG_LIMIT,
                tail: tail(log, 10),
            },
            left,
        )),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn placeholders_are_substituted_in_one_pass() {
        let v = [
            ("{task}", "/w/{estimate}/task"),
            ("{estimate}", "/o/{task}.parquet"),
        ];
        assert_eq!(substitute("{task}", &v), "/w/{estimate}/task");
        assert_eq!(
            substitute("--out={estimate},{task}", &v),
            "--out=/o/{task}.parquet,/w/{estimate}/task"
        );
        assert_eq!(substitute("{tas}k {}", &v), "{tas}k {}");
    }
}
