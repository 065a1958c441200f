//! The `loadloom` binary: parses the command line and hands each command to
//! its file in `sim/cli/` (arguments and a `main` each); everything else is
//! in the libraries.

mod cli;

use clap::{CommandFactory, Parser, Subcommand};
use std::process::ExitCode;

#[derive(Parser)]
#[command(
    name = "loadloom",
    version,
    about = "Household load data per conductor, with exact per-appliance truth"
)]
struct Cli {
    #[command(subcommand)]
    command: Command,
}

/// The commands, in the order of `--help`; each one's help text is the doc
/// comment of its `Args`.
#[derive(Subcommand)]
enum Command {
    Run(cli::run::Args),
    Score(cli::score::Args),
    Roundtrip(cli::roundtrip::Args),
    Fleet(cli::fleet::Args),
    Audit(cli::audit::Args),
    /// Print shell completions for SHELL (bash, zsh, fish, elvish, powershell).
    Completions {
        shell: clap_complete::Shell,
    },
    /// Print the man page (roff), generated from the same definition of the flags.
    Man,
    Plot(cli::plot::Args),
    Validate(cli::validate::Args),
    Templates(cli::templates::Args),
}

fn main() -> ExitCode {
    // Output piped into `head` should end the program quietly, as other
    // command-line tools do, not panic on a broken pipe.
    #[cfg(unix)]
    // SAFETY: restoring the default action of SIGPIPE before any thread starts.
    unsafe {
        libc::signal(libc::SIGPIPE, libc::SIG_DFL);
    }
    let outcome = match Cli::parse().command {
        Command::Run(a) => cli::run::main(a),
        Command::Score(a) => cli::score::main(a),
        Command::Roundtrip(a) => cli::roundtrip::main(a),
        Command::Fleet(a) => cli::fleet::main(a),
        Command::Audit(a) => cli::audit::main(a),
        Command::Completions { shell } => cli::docs::completions(shell, Cli::command()),
        Command::Man => cli::docs::man(Cli::command()),
        Command::Plot(a) => cli::plot::main(a),
        Command::Validate(a) => cli::validate::main(a),
        Command::Templates(a) => cli::templates::main(a),
    };
    cli::finish(outcome)
}
