//! `loadloom run`: simulate a scenario and write its dataset folder.

use super::{print, CommandResult, FormatArg};
use loadloom::dataset::Format;
use loadloom::pipeline;
use loadloom::progress::Progress;
use loadloom::scenario::{self, overrides};
use loadloom::summary::RunReport;
use solver_check::render::ReportForm;
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
pub fn main(a: Args) -> CommandResult {
    let mut s = scenario::load(&a.scenario)?;
    if let Some(seed) = a.seed {
        s.run.seed = seed;
    }
    if let Some(t) = &a.start {
        overrides::set_start(&mut s, t)?;
    }
    if let Some(l) = &a.length {
        overrides::set_length(&mut s, l)?;
    }
    overrides::add_waveforms(&mut s, &a.waveform, a.waveform_rate.as_deref())?;
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
    let w = written.map_err(|e| pipeline::write_error(&e, &a.out))?;
    if !a.quiet {
        let report = RunReport {
            scenario: &s,
            written: &w,
            seconds: started.elapsed().as_secs_f64(),
        };
        print(&report, ReportForm::from_flags(a.json, false));
    }
    Ok(ExitCode::SUCCESS)
}
