//! `loadloom roundtrip`: generate a task, run solvers on it, score them;
//! one solver's report, a leaderboard of several, or the suite's ladder.

use super::{print, status, CommandResult, Error, FormatArg};
use loadloom::progress::Progress;
use loadloom::roundtrip::{self as rt, Plan};
use loadloom::scenario::overrides::duration_arg;
use loadloom::scenario::{self, Scenario};
use solver_check::leaderboard::{failure_message, rank, SolverReport};
use solver_check::render::ReportForm;
use solver_check::roundtrip::{PreparedTask, Reveal, Solver, SolverRun};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// How much of the appliances' description a task reveals (the variants
/// carry no doc comment: clap would print it beside each value in `--help`).
#[derive(Clone, Copy, clap::ValueEnum)]
pub enum RevealArg {
    Ids,
    Wiring,
    States,
}

/// Generate a task from a scenario, run a disaggregator on it, score its estimate.
#[derive(clap::Args)]
pub struct Args {
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
    /// The previous spelling of --train (a number of days or a duration);
    /// accepted in this release only.
    #[arg(long, hide = true, conflicts_with = "train")]
    train_days: Option<String>,
    /// The previous spelling of --test; accepted in this release only.
    #[arg(long, hide = true, conflicts_with = "test")]
    test_days: Option<String>,
    /// Unseen homes: a population file (TOML). The solver trains on its
    /// first --train-homes homes (meters and truth, --train each) and is
    /// scored on the next --test-homes (meters only, --test each), per home
    /// and pooled.
    #[arg(long, value_name = "POPULATION", conflicts_with_all = ["scenario", "dataset", "suite"])]
    fleet: Option<PathBuf>,
    /// With --fleet: how many homes train the solver (default 4).
    #[arg(long, requires = "fleet")]
    train_homes: Option<u64>,
    /// With --fleet: how many homes it is scored on (default 2).
    #[arg(long, requires = "fleet")]
    test_homes: Option<u64>,
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
    /// Run the solvers on a ladder of layouts derived from SCENARIO (phase
    /// assignment, line-to-line share, partial-phase loads, supply,
    /// metering), each rung's scenario written beside its results; print
    /// each layout's difficulty card next to the scores; write
    /// OUT/<scenario>-layouts/ladder.json and scores.svg.
    #[arg(long, conflicts_with_all = ["suite", "dataset"])]
    layouts: bool,
}

/// Checks the options, then runs the round trip asked for.
pub fn main(mut a: Args) -> CommandResult {
    respell(&mut a);
    if a.fleet.is_none() && (a.train_homes.is_some() || a.test_homes.is_some()) {
        let help = "give --fleet POPULATION, or leave out --train-homes and --test-homes";
        return Err(Error::option("--train-homes", "it goes with --fleet", help));
    }
    // Orphans of a solver (even one that called setsid) are handed to this
    // process, so none outlives the round trip.
    solver_check::child::become_subreaper();
    let solvers = parse_solvers(&a)?;
    if a.fleet.is_some() {
        return crosshome(&a, &solvers);
    }
    let scenarios = scenarios(&a)?;
    let plan = plan(&a, &scenarios, solvers[0].clone())?;
    let form = ReportForm::from_flags(a.json, a.markdown);
    if a.layouts {
        return layouts(&a, &plan, &solvers, form);
    }
    if a.dataset.is_some() || solvers.len() > 1 {
        return leaderboard(&a, scenarios.first(), &plan, &solvers, form);
    }
    if a.suite {
        return suite(&scenarios, &a.out, &plan, form);
    }
    single(&a, &scenarios[0], &plan, form)
}

/// One solver on one scenario: a progress line on a terminal (what is
/// being done and for how long, so a long solver is seen to be running),
/// then its report.
fn single(a: &Args, s: &Scenario, plan: &Plan, form: ReportForm) -> CommandResult {
    let work = a.out.join(format!("{}-roundtrip", s.name));
    let bar = if a.quiet || a.json {
        Progress::hidden()
    } else {
        Progress::messages().ticking()
    };
    bar.say(format!("simulating {} and writing the task", s.name));
    let prep = rt::prepare(s, &work, plan);
    let prep = prep.inspect_err(|_| bar.finish())?;
    bar.say(format!(
        "solver running (time limit {:.0} s), then scoring: {}",
        plan.limit.as_secs_f64(),
        plan.solver.describe()
    ));
    let o = rt::run_solver(&prep, &plan.solver, &work, plan);
    bar.finish();
    Ok(single_report(&o?, form))
}

/// Every `--solver`, with a word on deprecated spellings; the suite takes one.
fn parse_solvers(a: &Args) -> Result<Vec<Solver>, Error> {
    let mut solvers = Vec::new();
    for text in &a.solver {
        if let Some(w) = Solver::deprecation(text) {
            eprintln!("{w}");
        }
        solvers.push(Solver::parse(text)?);
    }
    if a.suite && solvers.len() > 1 {
        return Err(Error::option(
            "--suite",
            "the suite runs one --solver",
            "rank several solvers on one scenario without --suite",
        ));
    }
    Ok(solvers)
}

/// The scenarios to simulate (none when a dataset is reused), with `--seed`.
fn scenarios(a: &Args) -> Result<Vec<Scenario>, Error> {
    if a.dataset.is_some() {
        return Ok(Vec::new());
    }
    let paths = rt::scenario_paths(a.scenario.as_deref(), a.suite)?;
    let mut scenarios = Vec::new();
    for p in &paths {
        let mut s = scenario::load(p)?;
        if let Some(seed) = a.seed {
            s.run.seed = seed;
        }
        scenarios.push(s);
    }
    Ok(scenarios)
}

/// The periods, time limit, reveal level and confinement of the round trip.
fn plan(a: &Args, scenarios: &[Scenario], solver: Solver) -> Result<Plan, Error> {
    let (train_s, test_s, limit) = match (
        duration_arg(&a.train),
        duration_arg(&a.test),
        duration_arg(&a.timeout),
    ) {
        (Ok(x), Ok(y), Ok(t)) if x >= 0.0 && y > 0.0 && t > 0.0 => (x, y, t),
        _ => {
            return Err(Error::option(
                &format!(
                    "--train {} --test {} --timeout {}",
                    a.train, a.test, a.timeout
                ),
                "not durations the round trip can use",
                "write durations such as 14d, 7d and 10m (test and timeout above zero)",
            ))
        }
    };
    rt::check_periods(scenarios, train_s, test_s, a.suite)?;
    rt::check_meter_rows(scenarios)?;
    let out_abs = std::path::absolute(&a.out).unwrap_or_else(|_| a.out.clone());
    if let Some(p) = a
        .allow_read
        .iter()
        .find(|p| solver_check::confine::contains(p, &out_abs))
    {
        return Err(Error::option(
            &format!("--allow-read {}", p.display()),
            format!(
                "it holds the output folder {} with the truth",
                a.out.display()
            ),
            "allow a folder beside the output folder",
        ));
    }
    Ok(Plan {
        train_s,
        test_s,
        reveal: match a.reveal {
            RevealArg::Ids => Reveal::Ids,
            RevealArg::Wiring => Reveal::Wiring,
            RevealArg::States => Reveal::States,
        },
        solver,
        limit: std::time::Duration::from_secs_f64(limit),
        allow_read: a.allow_read.clone(),
        estimate_name: match a.estimate_format {
            FormatArg::Parquet => "estimate.parquet",
            FormatArg::Csv => "estimate.csv",
        },
    })
}

/// The suite: every scenario at every rung; exit 1 if a solver failed on any.
fn suite(scenarios: &[Scenario], out: &Path, plan: &Plan, form: ReportForm) -> CommandResult {
    let bar = Progress::messages();
    let result = rt::suite(scenarios, out, plan, &mut |s, r| {
        bar.say(format!("{s}: {r}"))
    });
    bar.finish();
    let suite = result?;
    print(&suite, form);
    Ok(status(!suite.any_failed()))
}

/// The layout ladder of one home: every rung with every solver; the report,
/// and `ladder.json` and `scores.svg` in the ladder's folder.
fn layouts(a: &Args, plan: &Plan, solvers: &[Solver], form: ReportForm) -> CommandResult {
    let Some(path) = a.scenario.as_deref() else {
        let help = "give the SCENARIO whose layouts to run";
        return Err(Error::option("--layouts", "no scenario", help));
    };
    let bar = if a.quiet || a.json {
        Progress::hidden()
    } else {
        Progress::messages()
    };
    let shape = loadloom::layouts::Shape::default();
    let ladder = loadloom::layouts::run(path, a.seed, &shape, &a.out, plan, solvers, &mut |m| {
        bar.say(m.to_string())
    });
    bar.finish();
    let ladder = ladder?;
    let dir = a.out.join(format!("{}-layouts", ladder.home));
    loadloom::layouts::write_reports(&ladder, &dir)?;
    print(&ladder, form);
    if form != ReportForm::Json {
        eprintln!(
            "the scores across the rungs: {}",
            dir.join("scores.svg").display()
        );
    }
    Ok(status(!ladder.any_failed()))
}

/// Where the round trip's data comes from: a reused dataset, or a scenario
/// simulated now.
fn prepare_task(a: &Args, scenario: Option<&Scenario>, plan: &Plan) -> Result<PreparedTask, Error> {
    match (&a.dataset, scenario) {
        (Some(d), _) => {
            let name = d
                .file_name()
                .map(|n| n.to_string_lossy().to_string())
                .unwrap_or_else(|| "dataset".into());
            let work = a.out.join(format!("{name}-roundtrip"));
            rt::prepare_dataset(d, &work, plan)
        }
        (None, Some(s)) => {
            let work = a.out.join(format!("{}-roundtrip", s.name));
            rt::prepare(s, &work, plan)
        }
        (None, None) => Err(Error::option(
            "--dataset",
            "nothing to run the solvers on",
            "give a SCENARIO or --dataset DIR",
        )),
    }
}

/// Several solvers (or a reused dataset): the task written once, every
/// solver run on it in turn, one ranked table. A single solver prints its
/// full score report instead.
fn leaderboard(
    a: &Args,
    scenario: Option<&Scenario>,
    plan: &Plan,
    solvers: &[Solver],
    form: ReportForm,
) -> CommandResult {
    let prep = prepare_task(a, scenario, plan)?;
    let bar = if a.quiet || a.json {
        Progress::hidden()
    } else {
        Progress::messages().ticking()
    };
    let n = solvers.len();
    let outcomes = rt::board(
        &prep,
        solvers,
        plan.limit,
        &plan.allow_read,
        &mut |k, name| bar.say(format!("solver {}/{n}: {name}", k + 1)),
    );
    bar.finish();
    let outcomes = outcomes?;
    if let [o] = outcomes.as_slice() {
        return Ok(single_report(o, form));
    }
    let board = rank(outcomes, 1000, 0);
    print(&board, form);
    Ok(status(board.failed.is_empty()))
}

/// One solver's outcome: its score report, or why it got none (printed to
/// standard error, exit status 1: the round trip ran, the solver failed).
fn single_report(o: &SolverRun, form: ReportForm) -> ExitCode {
    match &o.result {
        Ok(report) => {
            print(&SolverReport { outcome: o, report }, form);
            ExitCode::SUCCESS
        }
        Err(f) => {
            eprintln!("{}", failure_message(o, f));
            status(false)
        }
    }
}

/// `--train-days` and `--test-days` (the previous spelling) become `--train`
/// and `--test`, with a deprecation line; a bare number is days.
fn respell(a: &mut Args) {
    for (old, new, value, slot) in [
        ("--train-days", "--train", a.train_days.take(), &mut a.train),
        ("--test-days", "--test", a.test_days.take(), &mut a.test),
    ] {
        if let Some(v) = value {
            eprintln!("warning: {old} is spelled {new} now (a duration such as 14d); {old} is accepted in this release only");
            *slot = if v.trim().parse::<f64>().is_ok() {
                format!("{}d", v.trim())
            } else {
                v
            };
        }
    }
}

/// Unseen homes: train on some homes of a fleet, score on others.
fn crosshome(a: &Args, solvers: &[Solver]) -> CommandResult {
    if solvers.len() != 1 {
        let help = "give one --solver with --fleet";
        return Err(Error::option("--fleet", "it runs one --solver", help));
    }
    let Some(path) = &a.fleet else {
        let help = "give --fleet POPULATION";
        return Err(Error::option("--fleet", "no population file", help));
    };
    let pop = loadloom::fleet::load(path)?;
    let plan = plan(a, &[], solvers[0].clone())?;
    let stem = path
        .file_stem()
        .map_or("fleet".into(), |n| n.to_string_lossy().to_string());
    let work = a.out.join(format!("{stem}-crosshome"));
    let bar = if a.quiet || a.json {
        Progress::hidden()
    } else {
        Progress::counter("homes")
    };
    let homes = (a.train_homes.unwrap_or(4), a.test_homes.unwrap_or(2));
    let result =
        loadloom::crosshome::run(&pop, homes, &work, &plan, &|done, all| bar.count(done, all));
    bar.finish();
    let o = result?;
    print(&o, ReportForm::from_flags(a.json, a.markdown));
    Ok(status(o.all_scored()))
}
