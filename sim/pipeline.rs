//! A run from end to end: scenario → timelines → simulation → sinks →
//! manifest. The simulation runs on the caller's thread and hands each
//! chunk's tables to a writer thread; [`crate::dataset`] only writes what
//! it is given.

use crate::dataset::tables::Tables;
use crate::dataset::{encode_rows, folder, replace_dir, Files, Format, Layout, CHUNK_ROWS};
use crate::loads::timelines;
use crate::meter::MeterNoise;
use crate::scenario::Scenario;
use crate::simulate::{simulate_with, Chunk, SimulationRecord};
use std::io;
use std::path::{Path, PathBuf};

/// What a run wrote, for the command-line summary.
pub struct Written {
    /// The dataset folder.
    pub dir: PathBuf,
    /// Reporting intervals (rows of the meters table).
    pub rows: u64,
    /// Events and the per-appliance summary of the simulation.
    pub outcome: SimulationRecord,
}

/// Simulates `s` and writes its dataset to `out_root/<scenario name>/`.
/// `progress` is called with the share done (0…1) after every chunk.
///
/// The folder appears whole or not at all: the files are written into a
/// partial folder beside it, renamed into place once every file, the
/// manifest last, is written.
///
/// # Example
///
/// Five minutes of a 1 kW toaster, written as Parquet into a temporary folder
/// and opened again as a reader of the contract would:
///
/// ```
/// use loadloom::{dataset::Format, pipeline, scenario};
/// let out = std::env::temp_dir().join(format!("loadloom-write-{}", std::process::id()));
/// let text = r#"
/// [home]
/// supply = "split-phase"
/// timezone = "UTC"
/// [run]
/// start = "2027-01-04T00:00"
/// length = "5 min"
/// [[appliance]]
/// id = "toaster"
/// wiring = "L2-N"
/// behaviour = "steady"
/// load = "resistive"
/// states = [{ power = "1 kW", pf = 1.0 }]
/// "#;
/// let home = scenario::load_str(std::path::Path::new("toast.toml"), text.into())?;
/// let written = pipeline::write(&home, &out, Format::Parquet, &mut |_share_done| {})?;
/// assert_eq!(written.rows, 300); // one row per second
/// assert!(written.dir.join("meters.parquet").is_file());
///
/// let dataset = solver_check::Dataset::open(&written.dir)?;
/// dataset.verify()?; // every file's size and sha256 as the manifest says
/// assert_eq!(dataset.lines, ["l1", "l2"]);
/// assert_eq!(dataset.appliances[0].conductors, ["l2"]);
/// std::fs::remove_dir_all(&out)?;
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn write(
    s: &Scenario,
    out_root: &Path,
    format: Format,
    progress: &mut dyn FnMut(f64),
) -> io::Result<Written> {
    write_cut(s, out_root, format, progress, &[])
}

/// [`write()`], with the meters' and truth's Parquet row groups also ending
/// at each row of `cuts` (a round trip's train/test boundary, so that each
/// period is made of whole row groups and is copied without re-encoding).
pub fn write_cut(
    s: &Scenario,
    out_root: &Path,
    format: Format,
    progress: &mut dyn FnMut(f64),
    cuts: &[usize],
) -> io::Result<Written> {
    std::fs::create_dir_all(out_root)?;
    folder::sweep_stale(out_root);
    let dest = out_root.join(&s.name);
    // Removed on every way out but the rename below (an error, a panic).
    let tmp = folder::PartialDir::create(out_root.join(format!(
        ".{}.partial-{}",
        s.name,
        std::process::id()
    )))?;
    let (rows, outcome) = write_into_cut(s, tmp.path(), format, &Layout::single(), progress, cuts)?;
    replace_dir(tmp.path(), &dest)?;
    tmp.keep();
    Ok(Written {
        dir: dest,
        rows,
        outcome,
    })
}

/// Simulates `s` and writes its files into `dir` as `layout` places them
/// (creating the layout's folders). Returns the rows and the outcome.
pub fn write_into(
    s: &Scenario,
    dir: &Path,
    format: Format,
    layout: &Layout,
    progress: &mut dyn FnMut(f64),
) -> io::Result<(u64, SimulationRecord)> {
    write_into_cut(s, dir, format, layout, progress, &[])
}

/// [`write_into`], with Parquet row groups also ending at each row of
/// `cuts` (see [`write_cut`]).
pub fn write_into_cut(
    s: &Scenario,
    dir: &Path,
    format: Format,
    layout: &Layout,
    progress: &mut dyn FnMut(f64),
    cuts: &[usize],
) -> io::Result<(u64, SimulationRecord)> {
    let tables = Tables::with_form(s, layout.form);
    let intervals = s.intervals();
    let tl = timelines(s, s.run.steps());
    let (files, mut meters, mut truth) = Files::open(s, &tables, dir, format, layout)?;
    meters.cut_at(cuts);
    truth.cut_at(cuts);
    let mut recorder = if s.waveforms.windows.is_empty() {
        None
    } else {
        Some(crate::waveform::Recorder::new(s, &files.meta)?)
    };
    let threads = files.threads;
    // The simulation runs on this thread; a second one takes each chunk's
    // columns and encodes them on `threads` threads meanwhile, then sends
    // the emptied chunk back to be filled again.
    let (outcome, meter_rows) = std::thread::scope(|sc| -> io::Result<(SimulationRecord, u64)> {
        let (tx, rx) = std::sync::mpsc::sync_channel::<Chunk>(1);
        // One being filled, one waiting, one being written: enough to keep
        // both sides busy (each chunk of the demo at 1 s holds about 35 MB).
        const CHUNKS: usize = 3;
        let mut made = 1;
        let (back, spare) = std::sync::mpsc::channel::<Chunk>();
        let tables = &tables;
        // The meter's noise is read on the writer's thread too.
        let noise = MeterNoise::new(s, s.home.supply.lines(), intervals);
        let sinks = [meters, truth];
        let writer = sc.spawn(move || encode_rows(rx, back, tables, noise, sinks, threads));
        let simulated = simulate_with(
            s,
            &tl,
            intervals,
            CHUNK_ROWS,
            |chunk| -> io::Result<()> {
                progress(
                    (chunk.first_row + chunk.readings.rows() as u64) as f64 / intervals as f64,
                );
                // A chunk the writer is done with; while none is back and
                // fewer than CHUNKS exist, a copy whose columns have the
                // room the rows need.
                let next = match spare.try_recv() {
                    Ok(c) => Some(c),
                    Err(_) if made < CHUNKS => {
                        made += 1;
                        Some(chunk.clone())
                    }
                    Err(_) => spare.recv().ok(),
                };
                let stopped = || io::Error::other("the table writer stopped");
                let next = next.ok_or_else(stopped)?;
                tx.send(std::mem::replace(chunk, next))
                    .map_err(|_| stopped())
            },
            recorder.as_mut(),
            true,
        );
        drop(tx);
        // The writer's error first: when sending failed, it is the cause.
        let (meter_rows, noise) = writer
            .join()
            .unwrap_or_else(|panic| std::panic::resume_unwind(panic))?;
        let mut outcome = simulated?;
        let summary = &mut outcome.summary;
        (summary.line_peak_a, summary.neutral_peak_a) = (noise.line_peak_a, noise.neutral_peak_a);
        Ok((outcome, meter_rows))
    })?;
    let waves = match recorder {
        Some(r) => r.finish(s)?,
        None => Vec::new(),
    };
    files.write_events(s, &tables, &outcome.events)?;
    let truth_rows = match layout.form {
        crate::dataset::schema::Form::Single => intervals,
        crate::dataset::schema::Form::Fleet => intervals * s.appliances.len() as u64,
    };
    let rows = [meter_rows, truth_rows, outcome.events.len() as u64];
    let card = crate::difficulty::card(s, &tl, &outcome.summary.app_energy_j);
    files.finish(s, &tables, &outcome, &card, rows, &waves)?;
    Ok((intervals, outcome))
}

/// Why a dataset under `out` was not written, as the error a command ends
/// with: physics with no plausible answer (the scenario's place) and a
/// setting the run cannot use (`LOADLOOM_THREADS`) are bad input, exit 2;
/// anything else is a failed run, exit 1. Nothing is left behind either way.
pub fn write_error(e: &io::Error, out: &Path) -> crate::scenario::Error {
    use crate::scenario::Error;
    let diverged = e
        .get_ref()
        .and_then(|i| i.downcast_ref::<crate::electrical::settle::Diverged>());
    match diverged {
        Some(d) => {
            let mut error = d.error.clone();
            error.help.push_str("; nothing was written");
            error
        }
        None if e.kind() == io::ErrorKind::InvalidInput => {
            let help = "unset LOADLOOM_THREADS to use every core; nothing was written";
            Error::option("LOADLOOM_THREADS", e.to_string(), help)
        }
        None => {
            let help = "check free space and permissions; nothing was left behind";
            Error::file(out, "writing the dataset failed", help)
                .caused_by(e)
                .failed()
        }
    }
}
