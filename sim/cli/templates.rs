//! `loadloom templates`: the built-in appliance templates, each with the
//! supply voltage its powers are written for, its power per state and its
//! source.

use super::{print, CommandResult};
use loadloom::scenario::catalogue::{catalogue, Catalogue};
use solver_check::render::ReportForm;
use std::process::ExitCode;

/// List the built-in appliance templates: voltage, power per state, peak
/// and source.
#[derive(clap::Args)]
pub struct Args {
    /// Print the list as JSON (format loadloom-templates/1).
    #[arg(long)]
    json: bool,
}

/// Reads every built-in template as a run would and prints the list.
pub fn main(a: Args) -> CommandResult {
    print(
        &Catalogue(catalogue()?),
        ReportForm::from_flags(a.json, false),
    );
    Ok(ExitCode::SUCCESS)
}
