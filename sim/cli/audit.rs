//! `loadloom audit`: a dataset's loading picture, its declared metering and
//! wiring checked, or (`--matrix`) the checks scored on injected mistakes.

use super::{bad, print};
use loadloom::audit::{load_declaration, MatrixOptions};
use loadloom::matrix;
use loadloom::progress::Progress;
use solver_check::audit::{audit, loading};
use solver_check::render::Form;
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
}

/// The loading picture, the audit against a declaration, or the matrix.
pub fn main(a: Args) -> ExitCode {
    let form = Form::from_flags(a.json, a.markdown);
    if a.matrix {
        return run_matrix(&a, form);
    }
    let Some(dataset) = &a.dataset else {
        return bad("error: give the DATASET folder (or --matrix)");
    };
    let Some(declared) = &a.declared else {
        if dataset.is_file() {
            return bad(format!("error: {} is a meters file: its loading picture needs the supply, the service rating and the time zone, which only a dataset folder's manifest gives\n  = help: give --declared DECLARED.toml; [home] alone (supply, timezone, service) is enough, e.g. [home] supply = \"split-phase\", timezone = \"America/Chicago\", service = \"100 A\"", dataset.display()));
        }
        return match loading(dataset) {
            Ok(l) => {
                print(&l, form);
                if form == Form::Text {
                    print!(
                        "\n(give --declared DECLARED.toml to check the wiring and metering too)\n"
                    );
                }
                ExitCode::SUCCESS
            }
            Err(m) => bad(m),
        };
    };
    let d = match load_declaration(declared) {
        Ok(d) => d,
        Err(e) => return bad(e),
    };
    match audit(dataset, &d) {
        Ok(report) => {
            print(&report, form);
            ExitCode::SUCCESS
        }
        Err(m) => bad(m),
    }
}

/// `audit --matrix`: the homes of a folder under each chosen variant.
fn run_matrix(a: &Args, form: Form) -> ExitCode {
    let chosen = match matrix::parse_variants(&a.variant) {
        Ok(c) => c,
        Err(m) => return bad(m),
    };
    if !(0.5..=60.0).contains(&a.days) || a.runs == 0 {
        return bad(format!(
            "error: --days {} --runs {}: the matrix needs 0.5 … 60 days and at least one clean run",
            a.days, a.runs
        ));
    }
    let homes = match read_homes(&a.scenarios) {
        Ok(h) => h,
        Err(c) => return c,
    };
    let opts = MatrixOptions {
        days: a.days,
        clean_runs: a.runs,
    };
    let bar = Progress::messages();
    let report = matrix::run_variants(&homes, &opts, &chosen, &mut |m| bar.say(m));
    bar.finish();
    // The matrix's text is Markdown already.
    let form = if form == Form::Json {
        Form::Json
    } else {
        Form::Text
    };
    print(&report, form);
    ExitCode::SUCCESS
}

/// The matrix's homes: every scenario of `dir`.
fn read_homes(dir: &Path) -> Result<Vec<(String, loadloom::scenario::Scenario)>, ExitCode> {
    let files = matrix::scenario_files(dir).map_err(|e| {
        bad(format!("error: cannot read {}: {e}\n  = help: run from the project folder or give --scenarios DIR", dir.display()))
    })?;
    let homes = matrix::load_homes(&files).map_err(bad)?;
    if homes.is_empty() {
        return Err(bad(format!(
            "error: {} holds no scenario (*.toml)\n  = help: give --scenarios DIR",
            dir.display()
        )));
    }
    Ok(homes)
}
