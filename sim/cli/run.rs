//! `loadloom run`: simulate a scenario and write its dataset folder.

use super::{bad, load, print, report, FormatArg, BAD_INPUT};
use loadloom::dataset::Format;
use loadloom::electrical::settle::Diverged;
use loadloom::pipeline;
use loadloom::progress::Progress;
use loadloom::scenario::{self, overrides};
use loadloom::summary::RunReport;
use solver_check::render::Form;
use std::path::PathBuf;
use std::process::ExitCode;

/// Simulate a scenario and write its dataset folder, OUT/<scenario name>/.
#[derive(clap::Args)]
pub struct Args {
    /// The scenario file (TOML).
    scenario: PathBuf,
    /// Folder that receives the dataset folder.
    #[arg(long, default_value = "out")]
    out: PathBuf,
    /// Replace the scenario's seed.
    #[arg(long)]
    seed: Option<u64>,
    /// Replace the run's start, a local time in the home's zone, e.g.
    /// 2027-03-01T00:00 (the same home and seed: a later window of its one
    /// timeline, never a replay).
    #[arg(long)]
    start: Option<String>,
    /// Replace the run length, e.g. 30d or "12 h".
    #[arg(long)]
    length: Option<String>,
    /// Table format.
    #[arg(long, value_enum, default_value = "parquet")]
    format: FormatArg,
    /// Also write a waveform window, START/LENGTH in local time, e.g.
    /// 2027-01-04T18:00/10s (repeatable).
    #[arg(long, value_name = "START/LENGTH")]
    waveform: Vec<String>,
    /// Sample rate of the waveforms, e.g. 12.8kHz.
    #[arg(long, value_name = "RATE")]
    waveform_rate: Option<String>,
    /// Print a JSON summary instead of the table.
    #[arg(long, conflicts_with = "quiet")]
    json: bool,
    /// Print nothing on success (errors still go to stderr).
    #[arg(long)]
    quiet: bool,
}

/// Loads the scenario, applies the overrides, writes the dataset, prints
/// the summary.
pub fn main(a: Args) -> ExitCode {
    let mut s = match load(&a.scenario) {
        Ok(s) => s,
        Err(c) => return c,
    };
    if let Some(seed) = a.seed {
        s.run.seed = seed;
    }
    if let Some(t) = &a.start {
        if let Err(m) = overrides::set_start(&mut s, t) {
            return bad(format!("error: --start {t}: {m}\n  = help: write a local date-time such as 2027-03-01T00:00, outside any clock change"));
        }
    }
    if let Some(l) = &a.length {
        if let Err(m) = overrides::set_length(&mut s, l) {
            return bad(format!("error: --length {l}: {m}\n  = help: write a duration such as 7d, 30d or \"12 h\" that the reporting interval divides"));
        }
    }
    if let Err(m) = overrides::add_waveforms(&mut s, &a.waveform, a.waveform_rate.as_deref()) {
        return bad(format!("error: {m}\n  = help: give --waveform START/LENGTH inside the run, e.g. {}/10s, and a rate such as 12.8kHz", s.run.start_local));
    }
    let format = match a.format {
        FormatArg::Parquet => Format::Parquet,
        FormatArg::Csv => Format::Csv,
    };
    let bar = if a.quiet || a.json {
        Progress::hidden()
    } else {
        Progress::share("simulating")
    };
    let started = std::time::Instant::now();
    let written = pipeline::write(&s, &a.out, format, &mut |f| bar.fraction(f));
    bar.finish();
    let w = match written {
        Ok(w) => w,
        Err(e) => return write_failed(&e, &a.out),
    };
    if !a.quiet {
        let report = RunReport {
            scenario: &s,
            written: &w,
            seconds: started.elapsed().as_secs_f64(),
        };
        print(&report, Form::from_flags(a.json, false));
    }
    ExitCode::SUCCESS
}

/// Why the dataset was not written: physics with no plausible answer and a
/// setting the run cannot use are bad input (2); anything else failed (1).
fn write_failed(e: &std::io::Error, out: &std::path::Path) -> ExitCode {
    match e.get_ref().and_then(|i| i.downcast_ref::<Diverged>()) {
        Some(d) => bad(format!("{d}\n  = nothing was written")),
        // A setting the run cannot use (LOADLOOM_THREADS).
        None if e.kind() == std::io::ErrorKind::InvalidInput => {
            eprintln!("error: {e}\n  = nothing was written");
            ExitCode::from(BAD_INPUT)
        }
        None => {
            let help = "check free space and permissions; nothing was left behind";
            let e = scenario::Error::file(out, "writing the dataset failed", help).caused_by(e);
            report(&e.failed())
        }
    }
}
