//! `loadloom completions` and `loadloom man`: generated from the same
//! definition of the commands and flags as the parser.

use super::FAILED;
use std::process::ExitCode;

/// Prints shell completions for `shell`.
pub fn completions(shell: clap_complete::Shell, mut cmd: clap::Command) -> ExitCode {
    clap_complete::generate(shell, &mut cmd, "loadloom", &mut std::io::stdout());
    ExitCode::SUCCESS
}

/// Prints the man page (roff).
pub fn man(cmd: clap::Command) -> ExitCode {
    match clap_mangen::Man::new(cmd).render(&mut std::io::stdout()) {
        Ok(()) => ExitCode::SUCCESS,
        Err(e) => {
            eprintln!("error: {e}");
            ExitCode::from(FAILED)
        }
    }
}
