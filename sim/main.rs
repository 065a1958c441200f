//! The `loadloom` binary: parses arguments and calls the libraries.

use clap::{Parser, Subcommand, ValueEnum};
use loadloom::dataset::{self, Format};
use loadloom::electrical::settle::Diverged;
use loadloom::progress::Progress;
use loadloom::scenario::{self, Scenario};
use loadloom::units::{parse_quantity, Kind};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "loadloom",
    version,
    about = "Household load data per conductor, with exact per-appliance truth"
)]
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
        /// Also write a waveform window, START/LENGTH in local time, e.g.
        /// 2027-01-04T18:00/10s (repeatable).
        #[arg(long, value_name = "START/LENGTH")]
        waveform: Vec<String>,
        /// Sample rate of the waveforms, e.g. 12.8kHz.
        #[arg(long, value_name = "RATE")]
        waveform_rate: Option<String>,
        /// Print a JSON summary instead of the table.
        #[arg(long, conflicts_with = "quiet")]
        json: bool,
        /// Print nothing on success (errors still go to stderr).
        #[arg(long)]
        quiet: bool,
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
        /// Also draw truth against estimate per appliance over the busiest
        /// scored day (local time), and bars of the scores, to this file
        /// (.svg or .png, by its extension).
        #[arg(long, value_name = "FILE.svg|FILE.png", conflicts_with = "against")]
        plot: Option<PathBuf>,
    },
    /// Generate a task from a scenario, run a disaggregator on it, score its estimate.
    Roundtrip {
        /// The scenario file (TOML); with --suite, a folder of them (default scenarios/).
        scenario: Option<PathBuf>,
        /// `builtin:training-mean`, `builtin:combinatorial`, `builtin:combinatorial-per-line`, or a command
        /// holding {task} and {estimate}, e.g. "python3 mine.py {task} {estimate}" (run without a shell).
        /// Repeat it to rank several solvers on the same data.
        #[arg(long, required = true)]
        solver: Vec<String>,
        /// Reuse a dataset folder already written instead of simulating: its
        /// first --train is handed over as training, the next --test scored.
        #[arg(long, conflicts_with_all = ["scenario", "suite", "seed"])]
        dataset: Option<PathBuf>,
        /// No progress lines (results still print).
        #[arg(long)]
        quiet: bool,
        /// A file or folder a confined solver may also read (its model, its
        /// packages); repeatable. One holding the --out folder is refused.
        #[arg(long, value_name = "PATH")]
        allow_read: Vec<PathBuf>,
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
        /// Run the solver on every scenario and a ladder of difficulty (more
        /// meter noise, coarser intervals); print how the scores degrade.
        #[arg(long)]
        suite: bool,
    },
    /// Many homes from a population file, in parallel, Hive-partitioned
    /// (OUT/home=00042/…), resumable, shardable across a cluster.
    Fleet {
        /// The population file (TOML).
        population: PathBuf,
        /// How many homes the fleet has.
        #[arg(long)]
        homes: u64,
        /// The fleet's folder.
        #[arg(long)]
        out: PathBuf,
        /// Homes simulated at once (default: the machine's cores).
        #[arg(long)]
        jobs: Option<usize>,
        /// Make only shard I of N (homes with index % N == I), or `auto` from
        /// a Slurm array or a Kubernetes Indexed Job.
        #[arg(long, value_name = "I/N|auto")]
        shard: Option<String>,
    },
    /// Check an installer's declared metering and wiring against the conductors (no training data), and the loading of each line: peak and 15-minute demand current against the service, imbalance, neutral current; --matrix scores the checks on injected mistakes
    Audit {
        /// The dataset folder, or a meters file in the dataset format (real
        /// measurements converted to it work too).
        #[arg(required_unless_present = "matrix")]
        dataset: Option<PathBuf>,
        /// What the installer declares: supply, [metering] and appliances
        /// with their wiring, in the scenario language (a scenario file is
        /// accepted; its [run] may be left out). Without it, only the
        /// loading picture is printed.
        #[arg(long, value_name = "DECLARED.toml")]
        declared: Option<PathBuf>,
        /// Run the fault matrix instead: inject known mistakes into the demo
        /// scenarios, simulate, audit, and print recall and false alarms.
        #[arg(long, conflicts_with_all = ["dataset", "declared"])]
        matrix: bool,
        /// Matrix: folder whose *.toml scenarios are the homes.
        #[arg(long, default_value = "scenarios", requires = "matrix")]
        scenarios: PathBuf,
        /// Matrix: days simulated per case.
        #[arg(long, default_value_t = 3.0, requires = "matrix")]
        days: f64,
        /// Matrix: clean simulations per scenario.
        #[arg(long, default_value_t = 12, requires = "matrix")]
        runs: usize,
        /// Matrix: measuring variants to run (1s, 10s, noise, dropouts, background, all).
        #[arg(long, default_value = "1s", requires = "matrix")]
        variant: Vec<String>,
        /// Print JSON (format loadloom-audit/1).
        #[arg(long, conflicts_with = "markdown")]
        json: bool,
        /// Print Markdown.
        #[arg(long)]
        markdown: bool,
    },
    /// Print shell completions for SHELL (bash, zsh, fish, elvish, powershell).
    Completions { shell: clap_complete::Shell },
    /// Print the man page (roff), generated from the same definition of the flags.
    Man,
    /// Draw a dataset: per conductor its measured power and each appliance's
    /// share; or, with --monthly, its energy per local month by appliance.
    Plot {
        /// The dataset folder.
        dataset: PathBuf,
        /// Window start, local time (default: the busiest local day).
        #[arg(long)]
        from: Option<String>,
        /// Window end, local time.
        #[arg(long)]
        to: Option<String>,
        /// Instead: one bar per local calendar month, stacked by appliance
        /// (kWh, from the truth), the whole dataset.
        #[arg(long, conflicts_with_all = ["from", "to"])]
        monthly: bool,
        /// Output file (.svg or .png, by its extension).
        #[arg(long, default_value = "plot.svg", value_name = "FILE.svg|FILE.png")]
        out: PathBuf,
        /// Picture size in pixels, WIDTHxHEIGHT.
        #[arg(long, default_value = "1400x900")]
        size: String,
    },
    /// Parse and check a scenario; print what it will produce, write nothing.
    Validate {
        /// The scenario file (TOML).
        scenario: PathBuf,
        /// Print the figures as JSON.
        #[arg(long, conflicts_with = "quiet")]
        json: bool,
        /// Print nothing; the exit status says whether the scenario is valid.
        #[arg(long)]
        quiet: bool,
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
        return Err(format!(
            "{text} is not a whole number of reporting intervals ({per} s)"
        ));
    }
    s.run.length_s = len;
    Ok(())
}

/// `--waveform START/LENGTH` and `--waveform-rate`; also re-checks the
/// scenario's own windows against a changed run length.
fn apply_waveforms(s: &mut Scenario, windows: &[String], rate: Option<&str>) -> Result<(), String> {
    if let Some(r) = rate {
        let (num, unit) = match r.find(|c: char| c.is_ascii_alphabetic()) {
            Some(i) => (r[..i].trim(), r[i..].trim()),
            None => (r.trim(), ""),
        };
        let hz = parse_quantity(&format!("{num} {unit}"), Kind::Frequency)
            .map_err(|m| format!("--waveform-rate {r}: {m}"))?;
        scenario::decode::check_wave_rate(hz, &s.run, &s.home)
            .map_err(|m| format!("--waveform-rate {r}: {m}"))?;
        s.waveforms.rate_hz = hz;
    }
    for w in &s.waveforms.windows {
        if w.offset_s + w.length_s > s.run.length_s + 1e-9 {
            return Err(format!(
                "the scenario's waveform window {} + {} s lies outside the run of {} s",
                w.start_local, w.length_s, s.run.length_s
            ));
        }
    }
    for text in windows {
        let (start, len) = text
            .split_once('/')
            .ok_or_else(|| format!("--waveform {text}: expected START/LENGTH"))?;
        let len_s = cli_duration(len).map_err(|m| format!("--waveform {text}: {m}"))?;
        let w = scenario::decode::place_window(start, len_s, &s.run, &s.home)
            .map_err(|m| format!("--waveform {text}: {m}"))?;
        s.waveforms.windows.push(w);
    }
    Ok(())
}

/// Prints a report in the form asked for: JSON, Markdown or the terminal table.
/// `loadloom audit --matrix`.
fn audit_matrix(
    dir: &Path,
    days: f64,
    runs: usize,
    variants: &[String],
    json: bool,
    markdown: bool,
) -> ExitCode {
    use loadloom::audit::{run_matrix, score, MatrixOptions, VARIANTS};
    let keys = ["1s", "10s", "noise", "dropouts", "background"];
    let mut chosen = Vec::new();
    for v in variants {
        if v == "all" {
            chosen.extend(0..VARIANTS.len());
        } else if let Some(i) = keys.iter().position(|k| k == v) {
            chosen.push(i);
        } else {
            eprintln!(
                "error: --variant {v}: unknown variant\n  = help: write one of {}, or all",
                keys.join(", ")
            );
            return ExitCode::from(BAD_INPUT);
        }
    }
    if !(0.5..=60.0).contains(&days) || runs == 0 {
        eprintln!("error: --days {days} --runs {runs}: the matrix needs 0.5 … 60 days and at least one clean run");
        return ExitCode::from(BAD_INPUT);
    }
    let mut files: Vec<PathBuf> = match std::fs::read_dir(dir) {
        Ok(rd) => rd
            .filter_map(|e| e.ok().map(|e| e.path()))
            .filter(|p| p.extension().is_some_and(|x| x == "toml"))
            .collect(),
        Err(e) => {
            eprintln!("error: cannot read {}: {e}\n  = help: run from the project folder or give --scenarios DIR", dir.display());
            return ExitCode::from(BAD_INPUT);
        }
    };
    files.sort();
    let mut homes = Vec::new();
    for f in &files {
        match load(f) {
            Ok(s) => homes.push((f.file_stem().unwrap().to_string_lossy().to_string(), s)),
            Err(c) => return c,
        }
    }
    if homes.is_empty() {
        eprintln!(
            "error: {} holds no scenario (*.toml)\n  = help: give --scenarios DIR",
            dir.display()
        );
        return ExitCode::from(BAD_INPUT);
    }
    let opts = MatrixOptions {
        days,
        clean_runs: runs,
    };
    let mut out_json = Vec::new();
    let mut out_text = String::new();
    let mut base: Option<Vec<loadloom::audit::Case>> = None;
    for &i in &chosen {
        let v = &VARIANTS[i];
        let bar = Progress::messages();
        let cases = run_matrix(&homes, &opts, v, &mut |m| {
            bar.say(format!("{}: {m}", v.name))
        });
        bar.finish();
        let sc = score(&cases);
        let same = base.as_ref().map(|b| {
            b.iter()
                .zip(&cases)
                .filter(|(a, c)| loadloom::audit::same_findings(&a.found, &c.found))
                .count()
        });
        let agree = base.as_ref().map(|b| {
            b.iter()
                .zip(&cases)
                .filter(|(a, c)| loadloom::audit::differ_only_where_undecidable(a, c))
                .count()
        });
        let mut j = sc.to_json(v.name);
        j["cases_with_findings_as_first_variant"] = serde_json::json!(same);
        j["cases_differing_from_first_variant_only_where_undecidable"] =
            serde_json::json!(agree.zip(same).map(|(a, s)| a - s));
        j["case_list"] = serde_json::json!(cases.iter().map(|c| serde_json::json!({
            "scenario": c.scenario, "case": c.name,
            "injected": c.mistakes.iter().map(|m| format!("{} {}", m.kind, m.subject)).collect::<Vec<_>>(),
            "found": c.found.iter().map(|f| format!("{} {}", f.0, f.1)).collect::<Vec<_>>(),
            "undecidable": c.undecidable, "not_exercised": c.unexercised,
            "appliances": c.why,
        })).collect::<Vec<_>>());
        out_json.push(j);
        out_text += &sc.to_markdown(v.name);
        if let (Some(n), Some(a)) = (same, agree) {
            out_text += &format!("\nCases whose findings equal those of the first variant: {n} of {}; differing only where one of the two calls the subject undecidable: {}.\n", cases.len(), a - n);
        }
        out_text += "\n";
        if base.is_none() {
            base = Some(cases);
        }
    }
    if json {
        println!(
            "{}",
            serde_json::to_string_pretty(&serde_json::Value::Array(out_json)).expect("JSON")
        );
    } else {
        let _ = markdown;
        print!("{out_text}");
    }
    ExitCode::SUCCESS
}

fn print_report(
    json: bool,
    markdown: bool,
    as_json: impl FnOnce() -> serde_json::Value,
    as_markdown: impl FnOnce() -> String,
    as_text: impl FnOnce() -> String,
) {
    if json {
        println!(
            "{}",
            serde_json::to_string_pretty(&as_json()).expect("JSON")
        );
    } else if markdown {
        print!("{}", as_markdown());
    } else {
        print!("{}", as_text());
    }
}

/// `fridge=20` or `fridge=20W`.
fn parse_threshold(t: &str) -> Result<(String, f64), String> {
    let (id, w) = t
        .split_once('=')
        .ok_or_else(|| format!("--threshold {t}: expected ID=WATTS, e.g. fridge=20"))?;
    let w = w.trim().trim_end_matches('W').trim();
    let v: f64 = w
        .parse()
        .map_err(|_| format!("--threshold {t}: \"{w}\" is not a number of watts"))?;
    if !(v >= 0.0 && v.is_finite()) {
        return Err(format!(
            "--threshold {t}: the threshold must be zero or more"
        ));
    }
    Ok((id.to_string(), v))
}

fn main() -> ExitCode {
    // Output piped into `head` should end the program quietly, as other
    // command-line tools do, not panic on a broken pipe.
    #[cfg(unix)]
    // SAFETY: restoring the default action of SIGPIPE before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let cli = Cli::parse();
    match cli.command {
        Command::Audit {
            dataset,
            declared,
            matrix,
            scenarios,
            days,
            runs,
            variant,
            json,
            markdown,
        } => {
            if matrix {
                return audit_matrix(&scenarios, days, runs, &variant, json, markdown);
            }
            let dataset = dataset.expect("clap requires it");
            let result = match &declared {
                None => solver_check::audit::loading(&dataset).map(|l| {
                    print_report(json, markdown, || l.to_json(), || l.to_markdown(), || l.to_text() + "\n(give --declared DECLARED.toml to check the wiring and metering too)\n");
                }),
                Some(p) => match loadloom::audit::load_declaration(p) {
                    Err(e) => Err(e.to_string()),
                    Ok(d) => solver_check::audit::audit(&dataset, &d).map(|a| print_report(json, markdown, || a.to_json(), || a.to_markdown(), || a.to_text())),
                },
            };
            match result {
                Ok(()) => ExitCode::SUCCESS,
                Err(m) => {
                    eprintln!("{m}");
                    ExitCode::from(BAD_INPUT)
                }
            }
        }
        Command::Fleet {
            population,
            homes,
            out,
            jobs,
            shard,
        } => {
            let pop = match loadloom::fleet::load(&population) {
                Ok(p) => p,
                Err(e) => {
                    eprintln!("{e}");
                    return ExitCode::from(BAD_INPUT);
                }
            };
            if homes == 0 || homes > 99_999 {
                eprintln!("error: --homes {homes}: a fleet has 1 … 99 999 homes");
                return ExitCode::from(BAD_INPUT);
            }
            let shard = match shard
                .as_deref()
                .map(|t| loadloom::fleet::Shard::parse(t, &|k| std::env::var(k).ok()))
            {
                None => loadloom::fleet::Shard { index: 0, count: 1 },
                Some(Ok(s)) => s,
                Some(Err(m)) => {
                    eprintln!("error: {m}");
                    return ExitCode::from(BAD_INPUT);
                }
            };
            let jobs = jobs.unwrap_or_else(|| {
                std::thread::available_parallelism()
                    .map(|n| n.get())
                    .unwrap_or(1)
            });
            let bar = Progress::counter("homes");
            let started = std::time::Instant::now();
            let progress = |done: u64, total: u64| bar.count(done, total);
            match loadloom::fleet::run(&pop, homes, &out, jobs, shard, &progress) {
                Ok(r) => {
                    bar.finish();
                    println!(
                        "fleet {}: made {} homes, {} already complete (shard {}/{}), in {:.1} s{}",
                        out.display(),
                        r.made,
                        r.skipped,
                        shard.index,
                        shard.count,
                        started.elapsed().as_secs_f64(),
                        if r.index_written {
                            "; homes.parquet and fleet.json written"
                        } else {
                            "; the index waits for the other shards"
                        }
                    );
                    ExitCode::SUCCESS
                }
                Err(f) => {
                    bar.finish();
                    eprintln!("{}", f.error);
                    ExitCode::from(if f.bad_input { BAD_INPUT } else { FAILED })
                }
            }
        }
        Command::Completions { shell } => {
            let mut cmd = <Cli as clap::CommandFactory>::command();
            clap_complete::generate(shell, &mut cmd, "loadloom", &mut std::io::stdout());
            ExitCode::SUCCESS
        }
        Command::Man => {
            let cmd = <Cli as clap::CommandFactory>::command();
            match clap_mangen::Man::new(cmd).render(&mut std::io::stdout()) {
                Ok(()) => ExitCode::SUCCESS,
                Err(e) => {
                    eprintln!("error: {e}");
                    ExitCode::from(FAILED)
                }
            }
        }
        Command::Plot {
            dataset,
            from,
            to,
            monthly,
            out,
            size,
        } => {
            let dims = size
                .split_once('x')
                .and_then(|(w, h)| Some((w.parse::<u32>().ok()?, h.parse::<u32>().ok()?)));
            let Some((w, h)) =
                dims.filter(|(w, h)| (300..=10000).contains(w) && (200..=10000).contains(h))
            else {
                eprintln!("error: --size {size}: expected WIDTHxHEIGHT in pixels, e.g. 1400x900 (300 … 10000 by 200 … 10000)");
                return ExitCode::from(BAD_INPUT);
            };
            if monthly {
                return plot_monthly(&dataset, &out, (w, h));
            }
            let opts = solver_check::plot::PlotOptions {
                from,
                to,
                width: w,
                height: h,
            };
            match solver_check::plot::plot(&dataset, &out, &opts) {
                Ok(p) => {
                    println!(
                        "wrote {} ({}x{} px, {} to {}, {} appliances in the legend)",
                        out.display(),
                        w,
                        h,
                        p.from,
                        p.to,
                        p.legend.len()
                    );
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("{e}");
                    ExitCode::from(BAD_INPUT)
                }
            }
        }
        Command::Roundtrip {
            scenario,
            solver,
            dataset,
            quiet,
            allow_read,
            train,
            test,
            reveal,
            timeout,
            out,
            seed,
            estimate_format,
            json,
            markdown,
            suite,
        } => {
            let bad = |m: String| {
                eprintln!("error: {m}");
                ExitCode::from(BAD_INPUT)
            };
            // Orphans of a solver (even one that called setsid) are handed
            // to this process, so none outlives the round trip.
            solver_check::child::become_subreaper();
            let mut solvers = Vec::new();
            for text in &solver {
                if let Some(w) = solver_check::roundtrip::Solver::deprecation(text) {
                    eprintln!("{w}");
                }
                match solver_check::roundtrip::Solver::parse(text) {
                    Ok(s) => solvers.push(s),
                    Err(m) => return bad(format!("--solver: {m}")),
                }
            }
            if suite && solvers.len() > 1 {
                return bad(
                    "--suite runs one --solver; rank several on one scenario without --suite"
                        .into(),
                );
            }
            let solver = solvers[0].clone();
            // The suite takes every scenario of a folder (default scenarios/).
            let paths: Vec<PathBuf> =
                match (&scenario, suite) {
                    _ if dataset.is_some() => vec![],
                    (Some(p), false) => vec![p.clone()],
                    (None, false) => return bad(
                        "give a SCENARIO (or --dataset DIR), or --suite to run the demo scenarios"
                            .into(),
                    ),
                    (p, true) => {
                        let p = p.clone().unwrap_or_else(|| PathBuf::from("scenarios"));
                        if p.is_dir() {
                            let mut v: Vec<PathBuf> = std::fs::read_dir(&p)
                                .map(|r| {
                                    r.filter_map(|e| e.ok())
                                        .map(|e| e.path())
                                        .filter(|x| x.extension().is_some_and(|e| e == "toml"))
                                        .collect()
                                })
                                .unwrap_or_default();
                            v.sort();
                            v
                        } else {
                            vec![p]
                        }
                    }
                };
            let mut scenarios = Vec::new();
            for p in &paths {
                match load(p) {
                    Ok(mut s) => {
                        if let Some(seed) = seed {
                            s.run.seed = seed;
                        }
                        scenarios.push(s);
                    }
                    Err(c) => return c,
                }
            }
            if scenarios.is_empty() && dataset.is_none() {
                return bad("no scenario files found for the suite".into());
            }
            let (train_s, test_s, limit) = match (cli_duration(&train), cli_duration(&test), cli_duration(&timeout)) {
                (Ok(a), Ok(b), Ok(t)) if a >= 0.0 && b > 0.0 && t > 0.0 => (a, b, t),
                _ => return bad(format!("--train {train} --test {test} --timeout {timeout}: write durations such as 14d, 7d and 10m (test and timeout above zero)")),
            };
            for s in &scenarios {
                // Every rung's interval (up to 1 min) must divide both periods.
                let per = if suite {
                    60.0f64.max(s.meter.interval_s)
                } else {
                    s.meter.interval_s
                };
                for (name, v) in [("train", train_s), ("test", test_s)] {
                    if ((v / per).round() - v / per).abs() > 1e-6 {
                        return bad(format!("--{name}: must be a whole number of reporting intervals ({per} s) for {}", s.name));
                    }
                }
            }
            let out_abs = std::path::absolute(&out).unwrap_or_else(|_| out.clone());
            if let Some(p) = allow_read
                .iter()
                .find(|p| solver_check::confine::contains(p, &out_abs))
            {
                return bad(format!("--allow-read {}: it holds the output folder {} with the truth; allow a folder beside it", p.display(), out.display()));
            }
            let plan = loadloom::roundtrip::Plan {
                train_s,
                test_s,
                reveal: match reveal {
                    RevealArg::Ids => solver_check::roundtrip::Reveal::Ids,
                    RevealArg::Wiring => solver_check::roundtrip::Reveal::Wiring,
                    RevealArg::States => solver_check::roundtrip::Reveal::States,
                },
                solver,
                limit: std::time::Duration::from_secs_f64(limit),
                allow_read: allow_read.clone(),
                estimate_name: match estimate_format {
                    FormatArg::Parquet => "estimate.parquet",
                    FormatArg::Csv => "estimate.csv",
                },
            };
            if dataset.is_some() || solvers.len() > 1 {
                let view = View {
                    json,
                    markdown,
                    quiet,
                };
                return leaderboard(
                    dataset.as_deref(),
                    scenarios.first(),
                    &out,
                    &plan,
                    &solvers,
                    view,
                );
            }
            if suite {
                let bar = Progress::messages();
                let rows = loadloom::roundtrip::suite(&scenarios, &out, &plan, &mut |s, r| {
                    bar.say(format!("{s}: {r}"))
                });
                bar.finish();
                return match rows {
                    Ok(rows) => {
                        print_report(
                            json,
                            markdown,
                            || loadloom::roundtrip::render_json(&rows),
                            || loadloom::roundtrip::render_markdown(&rows),
                            || loadloom::roundtrip::render_text(&rows),
                        );
                        if rows.iter().any(|r| r.result.is_err()) {
                            ExitCode::from(FAILED)
                        } else {
                            ExitCode::SUCCESS
                        }
                    }
                    Err(m) => {
                        eprintln!("error: {m}");
                        ExitCode::from(FAILED)
                    }
                };
            }
            let s = &scenarios[0];
            let work = out.join(format!("{}-roundtrip", s.name));
            let o = match loadloom::roundtrip::once(s, &work, &plan) {
                Ok(o) => o,
                Err(m) => {
                    eprintln!("error: {m}");
                    return ExitCode::from(FAILED);
                }
            };
            single_report(
                o,
                View {
                    json,
                    markdown,
                    quiet,
                },
            )
        }
        Command::Score {
            truth,
            estimate,
            json,
            markdown,
            partial,
            threshold,
            against,
            resamples,
            bootstrap_seed,
            plot,
        } => {
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
            let opts = solver_check::score::Options {
                partial,
                thresholds,
            };
            if let Some(other) = against {
                let scored = solver_check::score::score(&truth, &estimate, &opts)
                    .and_then(|a| Ok((a, solver_check::score::score(&truth, &other, &opts)?)));
                let (a, b) = match scored {
                    Ok(x) => x,
                    Err(e) => {
                        eprintln!("{e}");
                        return ExitCode::from(BAD_INPUT);
                    }
                };
                return match solver_check::compare::compare(
                    &a,
                    &b,
                    resamples.max(1),
                    bootstrap_seed,
                ) {
                    Ok(c) => {
                        print_report(
                            json,
                            markdown,
                            || c.to_json(),
                            || c.to_markdown(),
                            || c.to_text(),
                        );
                        ExitCode::SUCCESS
                    }
                    Err(m) => {
                        eprintln!(
                            "error: {m}\n  --> {} and {}",
                            estimate.display(),
                            other.display()
                        );
                        ExitCode::from(BAD_INPUT)
                    }
                };
            }
            match solver_check::score::score(&truth, &estimate, &opts) {
                Ok(r) => {
                    if let Some(p) = &plot {
                        if let Err(m) = solver_check::plot::plot_scores(&r, &truth, &estimate, p) {
                            eprintln!("{m}");
                            return ExitCode::from(FAILED);
                        }
                    }
                    print_report(
                        json,
                        markdown,
                        || r.to_json(),
                        || r.to_markdown(),
                        || r.to_text(),
                    );
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    eprintln!("{e}");
                    ExitCode::from(BAD_INPUT)
                }
            }
        }
        Command::Validate {
            scenario,
            json,
            quiet,
        } => {
            let s = match load(&scenario) {
                Ok(s) => s,
                Err(c) => return c,
            };
            // `--quiet` computes everything plain `validate` does, so it
            // accepts no scenario that `validate` would refuse.
            let f = loadloom::summary::figures(&s);
            if quiet {
                return ExitCode::SUCCESS;
            }
            if json {
                println!(
                    "{}",
                    serde_json::to_string_pretty(&loadloom::summary::to_json(&s, &f))
                        .expect("JSON")
                );
            } else {
                print!("{}", loadloom::summary::render(&s, &f));
            }
            ExitCode::SUCCESS
        }
        Command::Run {
            scenario,
            out,
            seed,
            length,
            format,
            waveform,
            waveform_rate,
            json,
            quiet,
        } => {
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
            if let Err(m) = apply_waveforms(&mut s, &waveform, waveform_rate.as_deref()) {
                eprintln!("error: {m}\n  = help: give --waveform START/LENGTH inside the run, e.g. {}/10s, and a rate such as 12.8kHz", s.run.start_local);
                return ExitCode::from(BAD_INPUT);
            }
            let format = match format {
                FormatArg::Parquet => Format::Parquet,
                FormatArg::Csv => Format::Csv,
            };
            let bar = if quiet || json {
                Progress::hidden()
            } else {
                Progress::share("simulating")
            };
            let started = std::time::Instant::now();
            let mut progress = |f: f64| bar.fraction(f);
            match dataset::write(&s, &out, format, &mut progress) {
                Ok(w) => {
                    bar.finish();
                    let secs = started.elapsed().as_secs_f64();
                    if quiet {
                        return ExitCode::SUCCESS;
                    }
                    if json {
                        let apps: Vec<serde_json::Value> = s.appliances.iter().enumerate().map(|(k, a)| serde_json::json!({ "id": a.id, "energy_kwh": w.outcome.summary.app_energy_j[k] / 3.6e6, "peak_w": w.outcome.summary.app_peak_w[k] })).collect();
                        println!("{}", serde_json::to_string_pretty(&serde_json::json!({ "dataset": w.dir, "rows": w.rows, "events": w.outcome.events.len(), "seconds": secs, "appliances": apps })).expect("JSON"));
                        return ExitCode::SUCCESS;
                    }
                    println!(
                        "wrote {} ({} rows, {} events) in {:.1} s",
                        w.dir.display(),
                        w.rows,
                        w.outcome.events.len(),
                        secs
                    );
                    let width = s
                        .appliances
                        .iter()
                        .map(|a| a.id.len())
                        .max()
                        .unwrap_or(9)
                        .max(9);
                    println!("{:<width$}  {:>10}  {:>9}", "appliance", "kWh", "peak W");
                    for (k, a) in s.appliances.iter().enumerate() {
                        println!(
                            "{:<width$}  {:>10.3}  {:>9.0}",
                            a.id,
                            w.outcome.summary.app_energy_j[k] / 3.6e6,
                            w.outcome.summary.app_peak_w[k]
                        );
                    }
                    ExitCode::SUCCESS
                }
                Err(e) => {
                    bar.finish();
                    match e.get_ref().and_then(|i| i.downcast_ref::<Diverged>()) {
                        // Physics with no plausible answer: bad input, said as such.
                        Some(d) => {
                            eprintln!("{d}\n  = nothing was written");
                            ExitCode::from(BAD_INPUT)
                        }
                        // A setting the run cannot use (LOADLOOM_THREADS).
                        None if e.kind() == std::io::ErrorKind::InvalidInput => {
                            eprintln!("error: {e}\n  = nothing was written");
                            ExitCode::from(BAD_INPUT)
                        }
                        None => {
                            let help = "check free space and permissions; nothing was left behind";
                            let d = scenario::Error::file(&out, "writing the dataset failed", help);
                            eprintln!("{}", d.caused_by(&e));
                            ExitCode::from(FAILED)
                        }
                    }
                }
            }
        }
    }
}

/// The round trip's note on processes a solver left running.
fn leftovers_note(n: usize) -> String {
    match n {
        0 => String::new(),
        1 => "; 1 process it left running was stopped".into(),
        n => format!("; {n} processes it left running were stopped"),
    }
}

/// `plot --monthly`: the picture, then one line saying what it shows.
fn plot_monthly(dataset: &Path, out: &Path, (w, h): (u32, u32)) -> ExitCode {
    match solver_check::plot::plot_monthly(dataset, out, w, h) {
        Ok(m) => {
            println!(
                "wrote {} ({}x{} px, {} months from {} to {}, {} appliances{})",
                out.display(),
                w,
                h,
                m.months.len(),
                m.months.first().map(String::as_str).unwrap_or("-"),
                m.months.last().map(String::as_str).unwrap_or("-"),
                m.shown.len(),
                if m.others > 0 {
                    format!(" and {} others together", m.others)
                } else {
                    String::new()
                }
            );
            ExitCode::SUCCESS
        }
        Err(e) => {
            eprintln!("{e}");
            ExitCode::from(BAD_INPUT)
        }
    }
}

/// How a report is printed.
#[derive(Clone, Copy)]
struct View {
    json: bool,
    markdown: bool,
    quiet: bool,
}

/// Where the round trip's data comes from: a reused dataset, or a scenario
/// simulated now. Err is the exit status, the message printed.
fn prepare_task(
    dataset: Option<&std::path::Path>,
    scenario: Option<&loadloom::scenario::Scenario>,
    out: &std::path::Path,
    plan: &loadloom::roundtrip::Plan,
) -> Result<solver_check::roundtrip::Prepared, ExitCode> {
    match (dataset, scenario) {
        (Some(d), _) => {
            let name = d
                .file_name()
                .map(|n| n.to_string_lossy().to_string())
                .unwrap_or_else(|| "dataset".into());
            let work = out.join(format!("{name}-roundtrip"));
            loadloom::roundtrip::prepare_dataset(d, &work, plan).map_err(|m| {
                eprintln!("{m}");
                ExitCode::from(BAD_INPUT)
            })
        }
        (None, Some(s)) => {
            let work = out.join(format!("{}-roundtrip", s.name));
            loadloom::roundtrip::prepare(s, &work, plan).map_err(|m| {
                eprintln!("error: {m}");
                ExitCode::from(FAILED)
            })
        }
        (None, None) => Err(ExitCode::from(BAD_INPUT)),
    }
}

/// Several solvers (or a reused dataset): the task written once, every
/// solver run on it in turn, one ranked table. A single solver prints its
/// full score report instead.
fn leaderboard(
    dataset: Option<&std::path::Path>,
    scenario: Option<&loadloom::scenario::Scenario>,
    out: &std::path::Path,
    plan: &loadloom::roundtrip::Plan,
    solvers: &[solver_check::roundtrip::Solver],
    view: View,
) -> ExitCode {
    let prep = match prepare_task(dataset, scenario, out, plan) {
        Ok(p) => p,
        Err(code) => return code,
    };
    let bar = if view.quiet || view.json {
        Progress::hidden()
    } else {
        Progress::messages()
    };
    let n = solvers.len();
    let outcomes = loadloom::roundtrip::board(
        &prep,
        solvers,
        plan.limit,
        &plan.allow_read,
        &mut |k, name| bar.say(format!("solver {}/{n}: {name}", k + 1)),
    );
    bar.finish();
    let outcomes = match outcomes {
        Ok(o) => o,
        Err(m) => {
            eprintln!("error: {m}");
            return ExitCode::from(FAILED);
        }
    };
    if n == 1 {
        let o = outcomes.into_iter().next().expect("one solver");
        return single_report(o, view);
    }
    let board = solver_check::leaderboard::rank(outcomes, 1000, 0);
    print_report(
        view.json,
        view.markdown,
        || board.to_json(),
        || board.to_markdown(),
        || board.to_text(),
    );
    if board.failed.is_empty() {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(FAILED)
    }
}

/// One solver's outcome: its score report, or why it got none (exit 1).
fn single_report(o: solver_check::roundtrip::Outcome, view: View) -> ExitCode {
    match o.result {
        Ok(r) => {
            if view.json {
                let mut v = r.to_json();
                v["solver"] = serde_json::json!({ "command": o.solver, "seconds": o.seconds, "task": o.task_dir, "estimate": o.estimate, "log": o.log, "confinement": o.confinement, "leftovers_stopped": o.leftovers });
                println!("{}", serde_json::to_string_pretty(&v).expect("JSON"));
            } else {
                println!(
                    "solver {} finished in {:.1} s (task {}, log {}); {}{}",
                    o.solver,
                    o.seconds,
                    o.task_dir.display(),
                    o.log.display(),
                    o.confinement,
                    leftovers_note(o.leftovers)
                );
                print!(
                    "{}",
                    if view.markdown {
                        r.to_markdown()
                    } else {
                        r.to_text()
                    }
                );
            }
            ExitCode::SUCCESS
        }
        Err(f) => {
            eprintln!("error: solver {}: {f}\n  --> task {}, log {} ({}{})\n  = help: run the solver by hand on the task folder to see what went wrong; no score was given", o.solver, o.task_dir.display(), o.log.display(), o.confinement, leftovers_note(o.leftovers));
            ExitCode::from(FAILED)
        }
    }
}
