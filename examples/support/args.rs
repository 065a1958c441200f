//! The command line of the pvlib cross-check examples: every argument a
//! number, a usage line when there are not the ones expected.

/// The arguments after the program's name, each read as a number; on one
/// that is not, the error on standard error and exit status 2.
pub fn numbers() -> Vec<f64> {
    std::env::args()
        .skip(1)
        .map(|a| a.parse::<f64>())
        .collect::<Result<_, _>>()
        .unwrap_or_else(|e| {
            eprintln!("error: every argument is a number ({e})");
            std::process::exit(2)
        })
}

/// Prints `usage: {usage}` on standard error and exits with status 2.
pub fn usage(usage: &str) -> ! {
    eprintln!("usage: {usage}");
    std::process::exit(2)
}
