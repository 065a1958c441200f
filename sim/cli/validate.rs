//! `loadloom validate`: check a scenario and print what it will produce.

use super::{print, CommandResult};
use loadloom::scenario;
use loadloom::summary::Preview;
use solver_check::render::ReportForm;
use std::path::PathBuf;
use std::process::ExitCode;

/// Parse and check a scenario; print what it will produce, write nothing.
#[derive(clap::Args)]
pub struct Args {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Print the figures as JSON.
    #[arg(long, conflicts_with = "quiet")]
    json: bool,
    /// Print nothing; the exit status says whether the scenario is valid.
    #[arg(long)]
    quiet: bool,
    /// Also report a calendar year of the home (the year of its start): each
    /// load's and the home's energy by month, next to the published figures
    /// the scenario cites, and the year's weather.
    #[arg(long)]
    year: bool,
}

/// Loads the scenario and computes its figures; prints them unless quiet.
pub fn main(a: Args) -> CommandResult {
    let s = scenario::load(&a.scenario)?;
    // `--quiet` computes everything plain `validate` does, so it accepts no
    // scenario that `validate` would refuse.
    let mut preview = Preview::of(&s);
    if a.year {
        preview = preview.with_year();
    }
    if !a.quiet {
        print(&preview, ReportForm::from_flags(a.json, false));
    }
    Ok(ExitCode::SUCCESS)
}
