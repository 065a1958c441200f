//! `loadloom templates`: the built-in appliance templates, each with the
//! supply voltage its powers are written for, its power per state and its
//! source.

use super::{print, report};
use loadloom::scenario::library::{catalogue, Catalogue};
use solver_check::render::Form;
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
pub fn main(a: Args) -> ExitCode {
    match catalogue() {
        Ok(list) => {
            print(&Catalogue(list), Form::from_flags(a.json, false));
            ExitCode::SUCCESS
        }
        Err(e) => report(&e),
    }
}
