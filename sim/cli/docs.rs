//! `loadloom completions` and `loadloom man`: generated from the same
//! definition of the commands and flags as the parser.

use super::{CommandResult, Error};
use std::process::ExitCode;

/// Prints shell completions for `shell`.
pub fn completions(shell: clap_complete::Shell, mut cmd: clap::Command) -> CommandResult {
    clap_complete::generate(shell, &mut cmd, "loadloom", &mut std::io::stdout());
    Ok(ExitCode::SUCCESS)
}

/// Prints the man page (roff).
pub fn man(cmd: clap::Command) -> CommandResult {
    clap_mangen::Man::new(cmd)
        .render(&mut std::io::stdout())
        .map_err(|e| {
            let help = "write the man page to a file or a pipe that accepts it";
            Error::file(
                std::path::Path::new("standard output"),
                "cannot write the man page",
                help,
            )
            .caused_by(&e)
            .failed()
        })?;
    Ok(ExitCode::SUCCESS)
}
