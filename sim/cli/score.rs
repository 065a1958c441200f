//! `loadloom score`: an estimate scored against a dataset's truth, or two
//! estimates compared.

use super::{bad, failed, print};
use solver_check::compare::compare;
use solver_check::render::Form;
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

/// Scores the estimate (and the other one with `--against`) and prints the report.
pub fn main(a: Args) -> ExitCode {
    let mut thresholds = Vec::new();
    for t in &a.threshold {
        match parse_threshold(t) {
            Ok(x) => thresholds.push(x),
            Err(m) => return bad(format!("error: {m}")),
        }
    }
    let opts = Options {
        partial: a.partial,
        thresholds,
    };
    let form = Form::from_flags(a.json, a.markdown);
    if let Some(other) = &a.against {
        return against(&a, other, &opts, form);
    }
    let r = match score(&a.truth, &a.estimate, &opts) {
        Ok(r) => r,
        Err(e) => return bad(e),
    };
    if let Some(p) = &a.plot {
        if let Err(m) = solver_check::plot::plot_scores(&r, &a.truth, &a.estimate, p) {
            return failed(m);
        }
    }
    print(&r, form);
    ExitCode::SUCCESS
}

/// `--against OTHER`: both scored, each score's difference with its interval.
fn against(a: &Args, other: &Path, opts: &Options, form: Form) -> ExitCode {
    let scored =
        score(&a.truth, &a.estimate, opts).and_then(|x| Ok((x, score(&a.truth, other, opts)?)));
    let (x, y) = match scored {
        Ok(pair) => pair,
        Err(e) => return bad(e),
    };
    match compare(&x, &y, a.resamples.max(1), a.bootstrap_seed) {
        Ok(c) => {
            print(&c, form);
            ExitCode::SUCCESS
        }
        Err(m) => bad(format!(
            "error: {m}\n  --> {} and {}",
            a.estimate.display(),
            other.display()
        )),
    }
}
