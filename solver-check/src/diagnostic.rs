//! The one error type of every command: where (file, and where known line,
//! column and key path, or a table's column and row), what is wrong, what
//! would be accepted, the chain of causes, and the exit status it ends in
//! (2 bad input, 1 a run that failed). The scenario reader builds it with
//! the offending text underlined; the table readers, the scorer, the plots
//! and the round trip build it about a file.

use std::fmt;
use std::path::{Path, PathBuf};

/// What an error's exit status says.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Status {
    /// The input cannot be used (a file, a value, an option): exit status 2.
    BadInput,
    /// The input was fine but the run failed (writing, a solver, a round
    /// trip): exit status 1.
    Failed,
}

impl Status {
    /// The process exit status.
    pub fn code(self) -> u8 {
        match self {
            Status::BadInput => 2,
            Status::Failed => 1,
        }
    }
}

/// A bad-input error that names the file, line, column and key path, shows the
/// offending text and says what would be accepted. Boxed, so a `Result` carrying
/// it stays one pointer wide on the happy path.
#[derive(Debug, Clone)]
pub struct Error(Box<Diagnostic>);

/// What an [`Error`] says: where, what, and how to fix it.
#[derive(Debug, Clone)]
pub struct Diagnostic {
    /// The file the error is in.
    pub file: PathBuf,
    /// 1-based line, or 0 for an error about the whole file.
    pub line: usize,
    /// 1-based column in characters, or 0 for an error about the whole file.
    pub column: usize,
    /// The key path inside the file (`appliance[2].states[0].power`), or empty.
    pub path: String,
    /// What is wrong.
    pub message: String,
    /// What would be accepted.
    pub help: String,
    /// The offending line of text.
    pub excerpt: String,
    /// Column and width of the underline below the excerpt.
    pub underline: (usize, usize),
    /// What caused it (an operating-system error, a library's message),
    /// outermost first: kept, not dropped, when an error is passed on.
    pub causes: Vec<String>,
    /// What the command's exit status says: bad input (2) or a failed run (1).
    pub status: Status,
}

impl std::ops::Deref for Error {
    type Target = Diagnostic;
    fn deref(&self) -> &Diagnostic {
        &self.0
    }
}

impl std::ops::DerefMut for Error {
    fn deref_mut(&mut self) -> &mut Diagnostic {
        &mut self.0
    }
}

impl Error {
    /// The error of a diagnostic built field by field.
    pub fn new(d: Diagnostic) -> Error {
        Error(Box::new(d))
    }

    /// The same error, as a run that failed (exit status 1) rather than bad input.
    pub fn failed(mut self) -> Error {
        self.status = Status::Failed;
        self
    }

    /// An error about a whole file (it cannot be read, say), with no place inside.
    pub fn file(path: &Path, message: impl Into<String>, help: impl Into<String>) -> Error {
        Error::new(Diagnostic {
            file: path.to_path_buf(),
            line: 0,
            column: 0,
            path: String::new(),
            message: message.into(),
            help: help.into(),
            excerpt: String::new(),
            underline: (0, 0),
            causes: Vec::new(),
            status: Status::BadInput,
        })
    }

    /// An error at a place written `file:line:column` (the place a decoded
    /// key remembers, such as a scenario's `supply_at`), at key path `path`;
    /// about the whole file when the place has no line and column.
    pub fn at_place(
        place: &str,
        path: &str,
        message: impl Into<String>,
        help: impl Into<String>,
    ) -> Error {
        let mut parts = place.rsplitn(3, ':');
        let (column, line) = (parts.next(), parts.next());
        let numbers = line
            .and_then(|l| l.parse::<usize>().ok())
            .zip(column.and_then(|c| c.parse::<usize>().ok()));
        let (file, line, column) = match (numbers, parts.next()) {
            (Some((l, c)), Some(f)) => (f, l, c),
            _ => (place, 0, 0),
        };
        let mut e = Error::file(Path::new(file), message, help);
        e.line = line;
        e.column = column;
        e.path = path.to_string();
        e
    }

    /// An error in a command-line option (`--size 10x10`) or an environment
    /// variable (`LOADLOOM_THREADS`), the place named instead of a file: the
    /// error says "the command line" (for `given` starting with `-`) or "the
    /// environment", and shows `given`.
    pub fn option(given: &str, message: impl Into<String>, help: impl Into<String>) -> Error {
        let mut e = Error::file(Path::new(""), message, help);
        e.path = given.to_string();
        e
    }

    /// The same error with `cause` added to its source chain, and the
    /// causes of `cause` after it.
    pub fn caused_by(mut self, cause: &dyn std::error::Error) -> Error {
        self.causes.push(cause.to_string());
        let mut next = cause.source();
        while let Some(c) = next {
            self.causes.push(c.to_string());
            next = c.source();
        }
        self
    }
}

impl fmt::Display for Error {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        writeln!(f, "error: {}", self.message)?;
        if self.file.as_os_str().is_empty() {
            // No file: an option (`--size …`) or an environment variable.
            let place = if self.path.starts_with('-') {
                "the command line"
            } else {
                "the environment"
            };
            write!(f, "  --> {place}")?;
        } else if self.line == 0 {
            write!(f, "  --> {}", self.file.display())?;
        } else {
            write!(
                f,
                "  --> {}:{}:{}",
                self.file.display(),
                self.line,
                self.column
            )?;
        }
        if !self.path.is_empty() {
            write!(f, " (at {})", self.path)?;
        }
        writeln!(f)?;
        if self.line > 0 && !self.excerpt.is_empty() {
            let n = self.line.to_string();
            let pad = " ".repeat(n.len());
            writeln!(f, "{pad} |")?;
            writeln!(f, "{n} | {}", self.excerpt)?;
            writeln!(
                f,
                "{pad} | {}{}",
                " ".repeat(self.underline.0.saturating_sub(1)),
                "^".repeat(self.underline.1)
            )?;
        }
        for c in &self.causes {
            writeln!(f, "  = cause: {c}")?;
        }
        if !self.help.is_empty() {
            write!(f, "  = help: {}", self.help)?;
        }
        Ok(())
    }
}

impl std::error::Error for Error {}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_place_gives_file_line_and_column_and_a_bare_file_stays_whole() {
        let e = Error::at_place("dir:x/home.toml:3:10", "home.supply", "m", "h");
        assert_eq!(
            (e.file.to_str(), e.line, e.column),
            (Some("dir:x/home.toml"), 3, 10)
        );
        assert!(e
            .to_string()
            .contains("--> dir:x/home.toml:3:10 (at home.supply)\n"));
        let e = Error::at_place("home.toml", "", "m", "h");
        assert_eq!((e.file.to_str(), e.line), (Some("home.toml"), 0));
    }

    #[test]
    fn an_option_error_names_the_command_line_and_the_option_as_given() {
        let shown = Error::option("--size 10x10", "too small", "write 1400x900").to_string();
        assert_eq!(
            shown,
            "error: too small\n  --> the command line (at --size 10x10)\n  = help: write 1400x900"
        );
    }
}
