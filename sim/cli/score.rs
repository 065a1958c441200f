//! `loadloom score`: an estimate scored against a dataset's truth, or two
//! estimates compared.

use super::{print, CommandResult, Error};
use solver_check::compare::compare;
use solver_check::render::ReportForm;
use solver_check::score::{parse_threshold, score, Options};
use std::path::{Path, PathBuf};
use std::process::ExitCode;

/// Score an estimate (Parquet or CSV, wide or long) against a dataset's truth.
#[derive(clap::Args)]
pub struct Args {
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
}

/// Scores the estimate (or compares it with another) and prints the report.
pub fn main(a: Args) -> CommandResult {
    let thresholds = a
        .threshold
        .iter()
        .map(|t| parse_threshold(t))
        .collect::<Result<Vec<_>, _>>()?;
    let opts = Options {
        partial: a.partial,
        thresholds,
    };
    let form = ReportForm::from_flags(a.json, a.markdown);
    if let Some(other) = &a.against {
        return against(&a, other, &opts, form);
    }
    let r = score(&a.truth, &a.estimate, &opts)?;
    if let Some(p) = &a.plot {
        // The tables were just read: what fails here is drawing or writing.
        solver_check::plot::plot_scores(&r, &a.truth, &a.estimate, p).map_err(Error::failed)?;
    }
    print(&r, form);
    Ok(ExitCode::SUCCESS)
}

/// `--against`: both estimates scored, then compared day by day.
fn against(a: &Args, other: &Path, opts: &Options, form: ReportForm) -> CommandResult {
    let x = score(&a.truth, &a.estimate, opts)?;
    let y = score(&a.truth, other, opts)?;
    let c = compare(&x, &y, a.resamples.max(1), a.bootstrap_seed)?;
    print(&c, form);
    Ok(ExitCode::SUCCESS)
}
