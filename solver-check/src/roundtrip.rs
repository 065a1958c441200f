//! The round trip: a dataset split into a training period (meters and
//! truth) and a test period (meters only), handed to a solver as a task
//! folder, the solver run as a child process (or a built-in one), and its
//! estimate scored on the test period. A solver that crashes, hangs, writes
//! nothing or writes a malformed estimate gets a report, never a score.

use crate::dataset::Dataset;
use crate::score::{score, Options, Report};
use crate::taskio::copy_rows;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};
use std::process::{Command, Stdio};
use std::time::{Duration, Instant};

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
    pub fn name(self) -> &'static str {
        match self {
            Reveal::Ids => "ids",
            Reveal::Wiring => "wiring",
            Reveal::States => "states",
        }
    }
}

#[derive(Clone, Debug)]
pub enum Solver {
    Builtin(String),
    /// argv with `{task}` and `{estimate}` placeholders.
    Command(Vec<String>),
}

impl Solver {
    /// `builtin:NAME`, or a command line split like a shell would (quotes,
    /// no expansion); it must hold `{task}` and `{estimate}`.
    pub fn parse(text: &str) -> Result<Solver, String> {
        if let Some(name) = text.strip_prefix("builtin:") {
            if !crate::solvers::NAMES.contains(&name) {
                return Err(format!(
                    "no built-in solver \"{name}\"; built in: {}",
                    crate::solvers::NAMES.join(", ")
                ));
            }
            return Ok(Solver::Builtin(name.to_string()));
        }
        let argv = split_words(text)?;
        if argv.is_empty() {
            return Err("the solver command is empty".into());
        }
        if !argv.iter().any(|a| a.contains("{task}"))
            || !argv.iter().any(|a| a.contains("{estimate}"))
        {
            return Err(format!("the solver command must contain {{task}} and {{estimate}}, e.g. \"python3 my_solver.py {{task}} {{estimate}}\"; got \"{text}\""));
        }
        Ok(Solver::Command(argv))
    }

    pub fn describe(&self) -> String {
        match self {
            Solver::Builtin(n) => format!("builtin:{n}"),
            Solver::Command(a) => a.join(" "),
        }
    }
}

/// Splits a command line into words: whitespace separates, single and
/// double quotes group, a backslash escapes the next character.
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
    Spawn(String),
    Crashed { status: String, tail: String },
    TimedOut { after: Duration, tail: String },
    NoEstimate { tail: String },
    Malformed(String),
    Builtin(String),
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
        }
    }
}

pub struct Outcome {
    pub task_dir: PathBuf,
    pub estimate: PathBuf,
    pub log: PathBuf,
    pub solver: String,
    pub seconds: f64,
    pub result: Result<Report, Failure>,
}

fn iso(ms: i64, tz: &str) -> String {
    let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    jiff::Timestamp::from_millisecond(ms)
        .map(|t| t.to_zoned(tz).strftime("%Y-%m-%dT%H:%M:%S%:z").to_string())
        .unwrap_or_default()
}

/// Writes the task folder for `ds` with the first `train_rows` rows as
/// training; returns its path.
pub fn write_task(
    ds: &Dataset,
    dir: &Path,
    train_rows: usize,
    reveal: Reveal,
    estimate_name: &str,
) -> std::io::Result<PathBuf> {
    let _ = std::fs::remove_dir_all(dir);
    std::fs::create_dir_all(dir.join("test"))?;
    let rows = ds.rows as usize;
    let m = &ds.manifest;
    let t0 = m["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let at = |r: usize| iso(t0 + r as i64 * dt, &ds.timezone);
    let train = if train_rows > 0 {
        std::fs::create_dir_all(dir.join("train"))?;
        copy_rows(
            &ds.dir.join("meters.parquet"),
            &dir.join("train/meters.parquet"),
            0,
            train_rows,
        )?;
        copy_rows(
            &ds.dir.join("truth.parquet"),
            &dir.join("train/truth.parquet"),
            0,
            train_rows,
        )?;
        json!({ "meters": "train/meters.parquet", "truth": "train/truth.parquet", "start": at(0), "end": at(train_rows), "rows": train_rows })
    } else {
        Value::Null
    };
    copy_rows(
        &ds.dir.join("meters.parquet"),
        &dir.join("test/meters.parquet"),
        train_rows,
        rows,
    )?;
    let apps: Vec<Value> = m["appliances"]
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
        .unwrap_or_default();
    let task = json!({
        "format": "loadloom-task/1",
        "reveal": reveal.name(),
        "timezone": ds.timezone,
        "interval_s": ds.interval_s,
        "supply": {
            "kind": m["supply"]["kind"], "conductors": m["supply"]["conductors"],
            "voltage_ln_v": m["supply"]["voltage_ln_v"], "voltage_ll_v": m["supply"]["voltage_ll_v"], "frequency_hz": m["supply"]["frequency_hz"],
        },
        "train": train,
        "test": { "meters": "test/meters.parquet", "start": at(train_rows), "end": at(rows), "rows": rows - train_rows },
        "appliances": apps,
        "estimate": {
            "file": estimate_name,
            "rows": "one per row of test/meters.parquet, with its `time` (interval start, tz-aware)",
            "columns": "time, then {id}_p_w for every appliance (W, ≥ 0); optional {id}_on (0/1) and {id}_{conductor}_p_w",
            "format": "Parquet or CSV, as the file name's extension says",
        },
    });
    std::fs::write(
        dir.join("task.json"),
        serde_json::to_string_pretty(&task).expect("JSON") + "\n",
    )?;
    Ok(dir.to_path_buf())
}

fn tail(path: &Path, lines: usize) -> String {
    let text = std::fs::read_to_string(path).unwrap_or_default();
    let all: Vec<&str> = text.lines().collect();
    all[all.len().saturating_sub(lines)..]
        .iter()
        .map(|l| format!("    {l}"))
        .collect::<Vec<_>>()
        .join("\n")
}

/// Runs the solver on the task, then scores its estimate on the test rows.
pub fn run(
    dataset: &Path,
    work: &Path,
    train_rows: usize,
    reveal: Reveal,
    solver: &Solver,
    timeout: Duration,
    estimate_name: &str,
) -> std::io::Result<Outcome> {
    let ds = Dataset::open(dataset).map_err(|e| std::io::Error::other(e.to_string()))?;
    let task_dir = write_task(&ds, &work.join("task"), train_rows, reveal, estimate_name)?;
    let estimate = work.join(estimate_name);
    let log = work.join("solver.log");
    let _ = std::fs::remove_file(&estimate);
    let started = Instant::now();
    let ran: Result<(), Failure> = match solver {
        Solver::Builtin(name) => {
            std::fs::write(&log, format!("builtin:{name}\n"))?;
            crate::solvers::run(name, &task_dir, &estimate).map_err(Failure::Builtin)
        }
        Solver::Command(argv) => run_child(argv, &task_dir, &estimate, &log, timeout),
    };
    let seconds = started.elapsed().as_secs_f64();
    let result = ran.and_then(|_| {
        if !estimate.exists() {
            return Err(Failure::NoEstimate {
                tail: tail(&log, 10),
            });
        }
        let opts = Options {
            partial: false,
            thresholds: vec![],
            window: Some((train_rows, ds.rows as usize - train_rows)),
        };
        score(dataset, &estimate, &opts).map_err(|e| Failure::Malformed(e.to_string()))
    });
    Ok(Outcome {
        task_dir,
        estimate,
        log,
        solver: solver.describe(),
        seconds,
        result,
    })
}

/// Stops the child and every process of its group (it was made leader of
/// its own group when spawned, so this reaches nothing else).
fn stop_group(child: &mut std::process::Child) {
    #[cfg(unix)]
    {
        let pgid = child.id() as i32;
        if pgid > 1 {
            // SAFETY: kill(2) with a negative pid signals exactly that
            // process group; pgid > 1 rules out "every process" (-1).
            unsafe {
                libc::kill(-pgid, libc::SIGKILL);
            }
        }
    }
    let _ = child.kill();
}

fn run_child(
    argv: &[String],
    task: &Path,
    estimate: &Path,
    log: &Path,
    timeout: Duration,
) -> Result<(), Failure> {
    let sub = |a: &String| {
        a.replace("{task}", &task.display().to_string())
            .replace("{estimate}", &estimate.display().to_string())
    };
    let args: Vec<String> = argv.iter().map(sub).collect();
    let out = std::fs::File::create(log)
        .map_err(|e| Failure::Spawn(format!("cannot create {}: {e}", log.display())))?;
    let err = out.try_clone().map_err(|e| Failure::Spawn(e.to_string()))?;
    let mut cmd = Command::new(&args[0]);
    cmd.args(&args[1..])
        .stdin(Stdio::null())
        .stdout(out)
        .stderr(err)
        .env("LOADLOOM_TASK", task)
        .env("LOADLOOM_ESTIMATE", estimate);
    #[cfg(unix)]
    {
        use std::os::unix::process::CommandExt;
        // Its own process group, so a time-out stops its children too.
        cmd.process_group(0);
    }
    let mut child = cmd
        .spawn()
        .map_err(|e| Failure::Spawn(format!("{}: {e}", args[0])))?;
    let started = Instant::now();
    loop {
        match child.try_wait() {
            Ok(Some(status)) => {
                return if status.success() {
                    Ok(())
                } else {
                    Err(Failure::Crashed {
                        status: status.to_string(),
                        tail: tail(log, 10),
                    })
                };
            }
            Ok(None) if started.elapsed() >= timeout => {
                stop_group(&mut child);
                let _ = child.wait();
                return Err(Failure::TimedOut {
                    after: timeout,
                    tail: tail(log, 10),
                });
            }
            Ok(None) => std::thread::sleep(Duration::from_millis(20)),
            Err(e) => return Err(Failure::Spawn(e.to_string())),
        }
    }
}
