//! The commands of the `loadloom` binary, one file each. Every file holds
//! the command's arguments (`Args`, a clap struct) and `main(Args) ->
//! ExitCode`, which reads the arguments, calls the libraries and prints the
//! result through [`print`]. Checks and report shaping live in the
//! libraries, so a command file stays short.

pub mod audit;
pub mod docs;
pub mod fleet;
pub mod plot;
pub mod roundtrip;
pub mod run;
pub mod score;
pub mod templates;
pub mod validate;

use loadloom::scenario::{self, Scenario};
use solver_check::render::{Form, Render};
use std::path::Path;
use std::process::ExitCode;

/// Exit status of bad input (a file, an option, a value the run cannot use).
pub const BAD_INPUT: u8 = 2;
/// Exit status of a run that failed (writing, a solver, a round trip).
pub const FAILED: u8 = 1;

/// A table format on the command line (the variants carry no doc comment:
/// clap would print it beside each value in `--help`).
#[derive(Clone, Copy, clap::ValueEnum)]
pub enum FormatArg {
    Parquet,
    Csv,
}

/// Loads a scenario; on an error prints it and gives exit status 2.
pub fn load(path: &Path) -> Result<Scenario, ExitCode> {
    scenario::load(path).map_err(bad)
}

/// Prints an error message and gives exit status 2.
pub fn bad(message: impl std::fmt::Display) -> ExitCode {
    eprintln!("{message}");
    ExitCode::from(BAD_INPUT)
}

/// Prints an error message and gives exit status 1.
pub fn failed(message: impl std::fmt::Display) -> ExitCode {
    eprintln!("{message}");
    ExitCode::from(FAILED)
}

/// Prints an error and gives its exit status (2 bad input, 1 a failed run).
pub fn report(e: &loadloom::scenario::Error) -> ExitCode {
    eprintln!("{e}");
    ExitCode::from(e.status.code())
}

/// Prints a report in the form asked for.
pub fn print(report: &dyn Render, form: Form) {
    print!("{}", report.render(form));
}
