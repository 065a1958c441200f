//! The `loadloom` binary: parses arguments and calls the libraries.

use clap::{Parser, Subcommand, ValueEnum};
use loadloom::dataset::{self, Format};
use loadloom::scenario::{self, Scenario};
use loadloom::units::{parse_quantity, Kind};
use std::io::IsTerminal;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(name = "loadloom", version, about = "Household load data per conductor, with exact per-appliance truth")]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

#[derive(Clone, Copy, ValueEnum)]
enum FormatArg {
    Parquet,
    Csv,
}

#[derive(Clone, Copy, ValueEnum)]
enum RevealArg {
    Ids,
    Wiring,
    States,
}

#[derive(Subcommand)]
enum Command {
    /// Simulate a scenario and write its dataset folder, OUT/<scenario name>/.
    Run {
        /// The scenario file (TOML).
        scenario: PathBuf,
        /// Folder that receives the dataset folder.
        #[arg(long, default_value = "out")]
        out: PathBuf,
        /// Replace the scenario's seed.
        #[arg(long)]
        seed: Option<u64>,
        /// Replace the run length, e.g. 30d or "12 h".
        #[arg(long)]
        length: Option<String>,
        /// Table format.
        #[arg(long, value_enum, default_value = "parquet")]
        format: FormatArg,
    },
    /// Score an estimate (Parquet or CSV, wide or long) against a dataset's truth.
    Score {
        /// The dataset folder (from `loadloom run`).
        #[arg(long)]
        truth: PathBuf,
        /// The estimate: `time` and `{id}_p_w` per appliance (optional
        /// `{id}_on`, `{id}_{conductor}_p_w`), or long `time, appliance, p_w`.
        #[arg(long)]
        estimate: PathBuf,
        /// Print the JSON report (format loadloom-score/1).
        #[arg(long, conflicts_with = "markdown")]
        json: bool,
        /// Print a Markdown table.
        #[arg(long)]
        markdown: bool,
        /// Score only the appliances the estimate gives.
        #[arg(long)]
        partial: bool,
        /// On-threshold for an appliance, replacing the manifest's: ID=WATTS (repeatable).
        #[arg(long, value_name = "ID=W")]
        threshold: Vec<String>,
        /// Another estimate: report each score's difference with a 95 %
        /// interval from a paired bootstrap over days.
        #[arg(long, value_name = "OTHER_ESTIMATE")]
        against: Option<PathBuf>,
        /// Bootstrap resamples for --against.
        #[arg(long, default_value_t = 1000, requires = "against")]
        resamples: usize,
        /// Seed of the bootstrap for --against.
        #[arg(long, default_value_t = 0, requires = "against")]
        bootstrap_seed: u64,
    },
    /// Generate a task from a scenario, run a disaggregator on it, score its estimate.
    Roundtrip {
        /// The scenario file (TOML).
        scenario: PathBuf,
        /// `builtin:mean`, `builtin:co`, `builtin:co-conductor`, or a command
        /// holding {task} and {estimate}, e.g. "python3 mine.py {task} {estimate}" (run without a shell).
        #[arg(long)]
        solver: String,
        /// Length of the training period (meters and truth handed over).
        #[arg(long, default_value = "14d")]
        train: String,
        /// Length of the test period (meters only; scored).
        #[arg(long, default_value = "7d")]
        test: String,
        /// How much of the appliances' description the task reveals.
        #[arg(long, value_enum, default_value = "wiring")]
        reveal: RevealArg,
        /// Time limit for the solver.
        #[arg(long, default_value = "10m")]
        timeout: String,
        /// Folder that receives OUT/<scenario name>-roundtrip/.
        #[arg(long, default_value = "out")]
        out: PathBuf,
        /// Replace the scenario's seed.
        #[arg(long)]
        seed: Option<u64>,
        /// The estimate file the solver writes: Parquet or CSV.
        #[arg(long, value_enum, default_value = "parquet")]
        estimate_format: FormatArg,
        /// Print the JSON score report.
        #[arg(long, conflicts_with = "markdown")]
        json: bool,
        /// Print a Markdown table.
        #[arg(long)]
        markdown: bool,
    },
    /// Parse and check a scenario; print what it will produce, write nothing.
    Validate {
        /// The scenario file (TOML).
        scenario: PathBuf,
    },
}

/// Exit codes (DESIGN.md): 0 success, 1 a run that failed, 2 bad input.
const BAD_INPUT: u8 = 2;
const FAILED: u8 = 1;

fn load(path: &Path) -> Result<Scenario, ExitCode> {
    scenario::load(path).map_err(|e| {
        eprintln!("{e}");
        ExitCode::from(BAD_INPUT)
    })
}

/// `30d`, `"12 h"` or `90s`: a duration with its unit, in seconds.
fn cli_duration(text: &str) -> Result<f64, String> {
    let (num, unit) = match text.find(|c: char| c.is_ascii_alphabetic()) {
        Some(i) => (text[..i].trim(), text[i..].trim()),
        None => (text.trim(), ""),
    };
    // On the command line `10m` means ten minutes, as in most tools.
    let unit = if unit == "m" { "min" } else { unit };
    parse_quantity(&format!("{num} {unit}"), Kind::Duration)
}

/// `--length 30d` or `--length "12 h"`.
fn apply_length(s: &mut Scenario, text: &str) -> Result<(), String> {
    let len = cli_duration(text)?;
    if len <= 0.0 {
        return Err("the length must be greater than zero".into());
    }
    let per = s.meter.interval_s;
    if ((len / per).round() - len / per).abs() > 1e-6 {
        return Err(format!("{text} is not a whole number of reporting intervals ({per} s)"));
    }
    s.run.length_s = len;
    Ok(())
}

/// `fridge=20` or `fridge=20W`.
fn parse_threshold(t: &str) -> Result<(String, f64), String> {
    let (id, w) = t.split_once('=').ok_or_else(|| format!("--threshold {t}: expected ID=WATTS, e.g. fridge=20"))?;
    let w = w.trim().trim_end_matches('W').trim();
    let v: f64 = w.parse().map_err(|_| format!("--threshold {t}: \"{w}\" is not a number of watts"))?;
    if !(v >= 0.0 && v.is_finite()) {
        return Err(format!("--threshold {t}: the threshold must be zero or more"));
    }
    Ok((id.to_string(), v))
}

fn main() -> ExitCode {
    let cli = Cli::parse();
    match cli.command {
        Command::Roundtrip { scenario, solver, train, test, reveal, timeout, out, seed, estimate_format, json, markdown } => {
            let bad = |m: String| {
                eprintln!("error: {m}");
                ExitCode::from(BAD_INPUT)
            };
            let solver = match solver_check::roundtrip::Solver::parse(&solver) {
                Ok(s) => s,
                Err(m) => return bad(format!("--solver: {m}")),
            };
            let mut s = match load(&scenario) {
                Ok(s) => s,
                Err(c) => return c,
            };
            if let Some(seed) = seed {
                s.run.seed = seed;
            }
            let per = s.meter.interval_s;
            let whole = |name: &str, text: &str, min: f64| -> Result<f64, String> {
                let v = cli_duration(text).map_err(|m| format!("--{name} {text}: {m}"))?;
                if v < min || ((v / per).round() - v / per).abs() > 1e-6 {
                    return Err(format!("--{name} {text}: must be a whole number of reporting intervals ({per} s){}", if min > 0.0 { ", more than zero" } else { "" }));
                }
                Ok(v)
            };
            let (train_s, test_s, limit) = match (whole("train", &train, 0.0), whole("test", &test, per), cli_duration(&timeout)) {
                (Ok(a), Ok(b), Ok(t)) if t > 0.0 => (a, b, t),
                (Err(m), _, _) | (_, Err(m), _) => return bad(m),
                _ => return bad(format!("--timeout {timeout}: write a duration such as 10m or 90s")),
            };
            s.run.length_s = train_s + test_s;
            let work = out.join(format!("{}-roundtrip", s.name));
            let written = match dataset::write(&s, &work, Format::Parquet, &mut |_| {}) {
                Ok(w) => w,
                Err(e) => {
                    eprintln!("error: writing the dataset under {} failed: {e}", work.display());
                    return ExitCode::from(FAILED);
                }
            };
            let reveal = match reveal {
                RevealArg::Ids => solver_check::roundtrip::Reveal::Ids,
                RevealArg::Wiring => solver_check::roundtrip::Reveal::Wiring,
                RevealArg::States => solver_check::roundtrip::Reveal::States,
            };
            let est_name = match estimate_format {
                FormatArg::Parquet => "estimate.parquet",
                FormatArg::Csv => "estimate.csv",
            };
            let train_rows = (train_s / per).round() as usize;
            let o = match solver_check::roundtrip::run(&written.dir, &work, train_rows, reveal, &solver, std::time::Duration::from_secs_f64(limit), est_name) {
                Ok(o) => o,
                Err(e) => {
                    eprintln!("error: preparing the task under {} failed: {e}", work.display());
                    return ExitCode::from(FAILED);
                }
            };
            match o.result {
                Ok(r) => {
                    if json {
                        let mut v = r.to_json();
                        v["solver"] = serde_json::json!({ "command": o.solver, "seconds": o.seconds, "task": o.task_dir, "log": o.log });
                        println!("{}", serde_json::to_string_pretty(&v).expect("JSON"));
                    } else {
                        println!("solver {} finished in {:.1} s (task {}, log {})", o.solver, o.seconds, o.task_dir.display(), o.log.display());
                        print!("{}", if markdown { r.to_markdown() } else { r.to_text() });
                    }
                    ExitCode::SUCCESS
                }
                Err(f) => {
                    eprintln!("error: solver {}: {f}\n  --> task {}, log {}\n  = help: run the solver by hand on the task folder to see what went wrong; no score was given", o.solver, o.task_dir.display(), o.log.display());
                    ExitCode::from(FAILED)
                }
            }
        }
        Command::Score { truth, estimate, json, markdown, partial, threshold, against, resamples, bootstrap_seed } => {
            let mut thresholds = Vec::new();
            for t in &threshold {
                match parse_threshold(t) {
                    Ok(x) => thresholds.push(x),
                    Err(m) => {
                        eprintln!("error: {m}");
                        return ExitCode::from(BAD_INPUT);
                    }
                }
            }
            let opts = solver_check::score::Options { partial, thresholds, window: None };
            if let Some(other) = against {
                let scored = solver_check::score::score(&truth, &estimate, &opts).and_then(|a| Ok((a, solver_check::score::score(&truth, &other, &opts)?)));
                let (a, b) = match scored {
                    Ok(x) => x,
                    Err(e) => {
                        eprintln!("{e}");
                        return ExitCode::from(BAD_INPUT);
                    }
                };
                return match solver_check::compare::compare(&a, &b, resamples.max(1), bootstrap_seed) {
                    Ok(c) => {
                        if json {
                            println!("{}", serde_json::to_string_pretty(&c.to_json()).expect("JSON"));
                        } else if markdown {
                            print!("{}", c.to_markdown());
                        } else {
                            print!("{}", c.to_text());
                        }
                        ExitCode::SUCCESS
                    }
                    Err(m) => {
                        eprintln!("error: {m}\n  --> {} and {}", estimate.display(), other.display());
                        ExitCode::from(BAD_INPUT)
                    }
                };
            }
            match solver_check::score::score(&truth, &estimate, &opts) {
                Ok(r) => {
                    if json {
                        println!("{}", serde_json::to_string_pretty(&r.to_json()).expect("JSON"));
                    } else if markdown {
                        print!("{}", r.to_markdown());
                    } else {
                        print!("{}", r.to_text());
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("{e}");
                    ExitCode::from(BAD_INPUT)
                }
            }
        }
        Command::Validate { scenario } => {
            let s = match load(&scenario) {
                Ok(s) => s,
                Err(c) => return c,
            };
            let f = loadloom::summary::figures(&s);
            print!("{}", loadloom::summary::render(&s, &f));
            ExitCode::SUCCESS
        }
        Command::Run { scenario, out, seed, length, format } => {
            let mut s = match load(&scenario) {
                Ok(s) => s,
                Err(c) => return c,
            };
            if let Some(seed) = seed {
                s.run.seed = seed;
            }
            if let Some(l) = length {
                if let Err(m) = apply_length(&mut s, &l) {
                    eprintln!("error: --length {l}: {m}\n  = help: write a duration such as 7d, 30d or \"12 h\" that the reporting interval divides");
                    return ExitCode::from(BAD_INPUT);
                }
            }
            let format = match format {
                FormatArg::Parquet => Format::Parquet,
                FormatArg::Csv => Format::Csv,
            };
            let tty = std::io::stderr().is_terminal();
            let started = std::time::Instant::now();
            let mut progress = |f: f64| {
                if tty {
                    let el = started.elapsed().as_secs_f64();
                    let left = if f > 0.0 { el * (1.0 - f) / f } else { 0.0 };
                    eprint!("\r  simulating {:5.1}%  {:6.1} s elapsed, ~{:.0} s left   ", 100.0 * f, el, left);
                }
            };
            match dataset::write(&s, &out, format, &mut progress) {
                Ok(w) => {
                    if tty {
                        eprintln!();
                    }
                    let secs = started.elapsed().as_secs_f64();
                    println!("wrote {} ({} rows, {} events) in {:.1} s", w.dir.display(), w.rows, w.outcome.events.len(), secs);
                    let width = s.appliances.iter().map(|a| a.id.len()).max().unwrap_or(9).max(9);
                    println!("{:<width$}  {:>10}  {:>9}", "appliance", "kWh", "peak W");
                    for (k, a) in s.appliances.iter().enumerate() {
                        println!("{:<width$}  {:>10.3}  {:>9.0}", a.id, w.outcome.summary.app_energy_j[k] / 3.6e6, w.outcome.summary.app_peak_w[k]);
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("error: writing the dataset under {} failed: {e}\n  = help: check free space and permissions; nothing was left behind", out.display());
                    ExitCode::from(FAILED)
                }
            }
        }
    }
}
