//! The commands of the `loadloom` binary, one file each. Every file holds
//! the command's arguments (`Args`, a clap struct) and `main(Args) ->
//! Result<ExitCode, Error>`, which reads the arguments, calls the libraries
//! and prints the result through [`print`]; an error is printed once, by
//! `sim/main.rs`, and ends the process with its status (2 bad input, 1 a
//! failed run). Checks and report shaping live in the libraries, so a
//! command file stays short.

pub mod audit;
pub mod docs;
pub mod fleet;
pub mod plot;
pub mod roundtrip;
pub mod run;
pub mod score;
pub mod templates;
pub mod validate;

pub use loadloom::scenario::Error;
use solver_check::render::{Render, ReportForm};
use std::process::ExitCode;

/// What every command returns: its exit status when it ran (0, or 1 when a
/// report says that some part failed), or the error that stopped it.
pub type CommandResult = Result<ExitCode, Error>;

/// Exit status of a run whose report says that some part failed (a solver,
/// a rung): the report is printed, then the process ends with it.
pub const FAILED: u8 = 1;

/// A table format on the command line (the variants carry no doc comment:
/// clap would print it beside each value in `--help`).
#[derive(Clone, Copy, clap::ValueEnum)]
pub enum FormatArg {
    Parquet,
    Csv,
}

/// Exit status 0, or 1 when `ok` is false (a report with a failed part).
pub fn status(ok: bool) -> ExitCode {
    if ok {
        ExitCode::SUCCESS
    } else {
        ExitCode::from(FAILED)
    }
}

/// Prints an error and gives its exit status: the one place a command's
/// error reaches standard error.
pub fn finish(outcome: CommandResult) -> ExitCode {
    outcome.unwrap_or_else(|e| {
        eprintln!("{e}");
        ExitCode::from(e.status.code())
    })
}

/// Prints a report in the form asked for.
pub fn print(report: &dyn Render, form: ReportForm) {
    print!("{}", report.render(form));
}
