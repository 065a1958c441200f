//! `loadloom audit`: a dataset's loading picture, its declared metering and
//! wiring checked, or (`--matrix`) the checks scored on injected mistakes.

use super::{print, CommandResult, Error};
use loadloom::audit::{load_declaration, MatrixOptions};
use loadloom::matrix;
use loadloom::progress::Progress;
use solver_check::audit::check::Thresholds;
use solver_check::audit::{audit_with, loading};
use solver_check::render::ReportForm;
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Check an installer's declared metering and wiring against the conductors (no training data), and the loading of each line: peak and 15-minute demand current against the service, imbalance, neutral current; --matrix scores the checks on injected mistakes
#[derive(clap::Args)]
pub struct Args {
    /// The dataset folder, or a meters file: a monitor's CSV or Parquet
    /// export with `time` and `l1_p_w`, `l2_p_w`, … (optionally Q, V, I
    /// per line; naive times are read in the declared time zone).
    #[arg(required_unless_present = "matrix")]
    dataset: Option<PathBuf>,
    /// What the installer declares: supply, [metering] and appliances
    /// with their wiring, in the scenario language (a scenario file is
    /// accepted; its [run] may be left out). Without it, only the
    /// loading picture is printed.
    #[arg(long, value_name = "DECLARED.toml")]
    declared: Option<PathBuf>,
    /// Decide by another value of one of the audit's cut-offs: NAME=VALUE,
    /// e.g. possible=0.7 (repeatable; README, "Wiring audit", lists them);
    /// the report names those that differ from the standard ones.
    #[arg(long, value_name = "NAME=VALUE", requires = "declared")]
    cutoff: Vec<String>,
    /// Run the fault matrix instead: inject known mistakes into the demo
    /// scenarios, simulate, audit, and print recall and false alarms.
    #[arg(long, conflicts_with_all = ["dataset", "declared", "cutoff"])]
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
}

/// The loading picture, the audit against a declaration, or the matrix.
pub fn main(a: Args) -> CommandResult {
    let form = ReportForm::from_flags(a.json, a.markdown);
    if a.matrix {
        return run_matrix(&a, form);
    }
    let Some(dataset) = &a.dataset else {
        let help = "give the DATASET folder, or --matrix";
        return Err(Error::option("--matrix", "no dataset to audit", help));
    };
    let Some(declared) = &a.declared else {
        if dataset.is_file() {
            let help = "give --declared DECLARED.toml; [home] alone (supply, timezone, service) is enough, e.g. [home] supply = \"split-phase\", timezone = \"America/Chicago\", service = \"100 A\"";
            let message = "a meters file: its loading picture needs the supply, the service rating and the time zone, which only a dataset folder's manifest gives";
            return Err(Error::file(dataset, message, help));
        }
        print(&loading(dataset)?, form);
        if form == ReportForm::Text {
            print!("\n(give --declared DECLARED.toml to check the wiring and metering too)\n");
        }
        return Ok(ExitCode::SUCCESS);
    };
    let th = Thresholds::with_settings(&a.cutoff).map_err(|e| {
        let given: Vec<String> = a.cutoff.iter().map(|c| format!("--cutoff {c}")).collect();
        Error::option(&given.join(" "), e.message, e.help)
    })?;
    let d = load_declaration(declared)?;
    print(&audit_with(dataset, &d, &th)?, form);
    Ok(ExitCode::SUCCESS)
}

/// `--matrix`: the checks scored on injected mistakes, over the homes of a
/// folder, for each measuring variant asked for.
fn run_matrix(a: &Args, form: ReportForm) -> CommandResult {
    let chosen = matrix::parse_variants(&a.variant)?;
    if !(0.5..=60.0).contains(&a.days) || a.runs == 0 {
        return Err(Error::option(
            &format!("--days {} --runs {}", a.days, a.runs),
            "out of range",
            "the matrix needs 0.5 … 60 days and at least one clean run",
        ));
    }
    let homes = read_homes(&a.scenarios)?;
    let opts = MatrixOptions {
        days: a.days,
        clean_runs: a.runs,
    };
    let bar = Progress::messages();
    let report = matrix::run_variants(&homes, &opts, &chosen, &mut |m| bar.say(m));
    bar.finish();
    // The matrix's text is Markdown already.
    let form = if form == ReportForm::Json {
        ReportForm::Json
    } else {
        ReportForm::Text
    };
    print(&report, form);
    Ok(ExitCode::SUCCESS)
}

/// The scenarios of the matrix: every `*.toml` of `dir`, loaded.
fn read_homes(dir: &Path) -> Result<Vec<(String, loadloom::scenario::Scenario)>, Error> {
    let help = "run from the project folder or give --scenarios DIR";
    let files = matrix::scenario_files(dir)
        .map_err(|e| Error::file(dir, "cannot read the folder of scenarios", help).caused_by(&e))?;
    let homes = matrix::load_homes(&files)?;
    if homes.is_empty() {
        return Err(Error::file(
            dir,
            "the folder holds no scenario (*.toml)",
            help,
        ));
    }
    Ok(homes)
}
