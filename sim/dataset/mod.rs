//! The dataset writer: one folder per run with `manifest.json`,
//! `meters.*`, `truth.*` and `events.*` (DESIGN.md, "Dataset contract").
//! Everything is written under a temporary name and renamed when complete,
//! so a failed run leaves nothing half-written.

pub mod dict_column;
pub mod finite;
pub mod folder;
pub mod manifest;
pub mod parquet;
pub mod schema;
pub mod sink;
pub mod tables;

use crate::behaviour::timelines;
use crate::scenario::Scenario;
use crate::simulate::{simulate_with, Outcome};
use arrow_array::RecordBatch;
pub use sink::Format;
use sink::{Sink, Values};
use std::io;
use std::path::{Path, PathBuf};
use tables::Tables;

/// Rows per chunk handed from the simulator to the writers.
pub const CHUNK_ROWS: usize = 65_536;

/// Where a dataset's files go inside the folder being written (paths
/// relative to it), and the form of their tables.
pub struct Layout {
    pub form: schema::Form,
    /// The folders of `meters.*`, `truth.*` and `events.*`, and of
    /// `manifest.json` and `scenario.toml` (waveforms go beside the manifest).
    pub meters: PathBuf,
    pub truth: PathBuf,
    pub events: PathBuf,
    pub manifest: PathBuf,
}

impl Layout {
    /// A home on its own: every file in the dataset's folder.
    pub fn single() -> Layout {
        Layout {
            form: schema::Form::Single,
            meters: PathBuf::new(),
            truth: PathBuf::new(),
            events: PathBuf::new(),
            manifest: PathBuf::new(),
        }
    }

    /// The relative path of table `name` (`meters`, `truth`, `events`).
    fn table(&self, name: &str, format: Format) -> PathBuf {
        let folder = match name {
            "meters" => &self.meters,
            "truth" => &self.truth,
            _ => &self.events,
        };
        folder.join(format!("{name}.{}", format.ext()))
    }
}

/// What happened, for the command-line summary.
pub struct Written {
    pub dir: PathBuf,
    pub rows: u64,
    pub outcome: Outcome,
}

/// Simulates `s` and writes its dataset to `out_root/<scenario name>/`.
/// `progress` is called with the share done (0…1) after every chunk.
pub fn write(
    s: &Scenario,
    out_root: &Path,
    format: Format,
    progress: &mut dyn FnMut(f64),
) -> io::Result<Written> {
    write_cut(s, out_root, format, progress, &[])
}

/// [`write`], with the meters' and truth's Parquet row groups also ending
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

/// Moves `tmp` to `dest`, replacing an older dataset there.
fn replace_dir(tmp: &Path, dest: &Path) -> io::Result<()> {
    if dest.exists() {
        let old = dest.with_file_name(format!(
            ".{}.old-{}",
            dest.file_name().unwrap().to_string_lossy(),
            std::process::id()
        ));
        std::fs::rename(dest, &old)?;
        std::fs::rename(tmp, dest)?;
        std::fs::remove_dir_all(&old)
    } else {
        std::fs::rename(tmp, dest)
    }
}

/// Threads that encode one home's tables: `LOADLOOM_THREADS` if set, else
/// the machine's cores. The bytes written do not depend on it.
pub fn threads() -> io::Result<usize> {
    match std::env::var("LOADLOOM_THREADS") {
        Ok(v) => v
            .trim()
            .parse::<usize>()
            .ok()
            .filter(|n| (1..=1024).contains(n))
            .ok_or_else(|| {
                io::Error::new(
                    io::ErrorKind::InvalidInput,
                    format!("LOADLOOM_THREADS={v:?} is not a number of threads from 1 to 1024; unset it to use every core"),
                )
            }),
        Err(_) => Ok(std::thread::available_parallelism().map_or(1, |n| n.get())),
    }
}

/// Writes each chunk's meters and truth batches as they arrive, then
/// finishes both files.
fn encode_rows(
    rx: std::sync::mpsc::Receiver<[RecordBatch; 2]>,
    mut meters: Sink,
    mut truth: Sink,
    threads: usize,
) -> io::Result<()> {
    for [m, t] in rx {
        sink::write_all(vec![(&mut meters, m), (&mut truth, t)], threads)?;
    }
    meters.close(threads)?;
    truth.close(threads)
}

/// Simulates `s` and writes its files into `dir` as `layout` places them
/// (creating the layout's folders). Returns the rows and the outcome.
pub fn write_into(
    s: &Scenario,
    dir: &Path,
    format: Format,
    layout: &Layout,
    progress: &mut dyn FnMut(f64),
) -> io::Result<(u64, Outcome)> {
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
) -> io::Result<(u64, Outcome)> {
    let tables = Tables::with_form(s, layout.form);
    let tz = layout.form.timezone(s);
    let intervals = s.intervals();
    let tl = timelines(s, s.run.steps());
    let files = ["meters", "truth", "events"].map(|t| layout.table(t, format));
    for f in &files {
        std::fs::create_dir_all(dir.join(f).parent().unwrap_or(dir))?;
    }
    let meta = dir.join(&layout.manifest);
    std::fs::create_dir_all(&meta)?;
    let mut meters = Sink::create(
        &dir.join(&files[0]),
        format,
        tables.meters_schema.clone(),
        tz,
        Values::Noisy,
    )?;
    let mut truth = Sink::create(
        &dir.join(&files[1]),
        format,
        tables.truth_schema.clone(),
        tz,
        Values::Stepwise,
    )?;
    meters.cut_at(cuts);
    truth.cut_at(cuts);
    let mut recorder = if s.waveforms.windows.is_empty() {
        None
    } else {
        Some(crate::waveform::Recorder::new(s, &meta)?)
    };
    let threads = threads()?;
    // The simulation runs on this thread; a second one takes each chunk's
    // tables and encodes their columns on `threads` threads meanwhile.
    let (outcome, meter_rows) = std::thread::scope(|sc| -> io::Result<(Outcome, u64)> {
        let (tx, rx) = std::sync::mpsc::sync_channel::<[RecordBatch; 2]>(2);
        let writer = sc.spawn(move || encode_rows(rx, meters, truth, threads));
        let mut meter_rows = 0u64;
        let simulated = simulate_with(
            s,
            &tl,
            intervals,
            CHUNK_ROWS,
            |chunk| -> io::Result<()> {
                let batch = tables.meters_batch(chunk);
                meter_rows += batch.num_rows() as u64;
                tx.send([batch, tables.truth_batch(chunk)])
                    .map_err(|_| io::Error::other("the table writer stopped"))?;
                progress(
                    (chunk.first_row + chunk.readings.rows() as u64) as f64 / intervals as f64,
                );
                Ok(())
            },
            recorder.as_mut(),
        );
        drop(tx);
        // The writer's error first: when sending failed, it is the cause.
        writer
            .join()
            .unwrap_or_else(|panic| std::panic::resume_unwind(panic))?;
        Ok((simulated?, meter_rows))
    })?;
    let waves = match recorder {
        Some(r) => r.finish(s)?,
        None => Vec::new(),
    };
    let mut events = Sink::create(
        &dir.join(&files[2]),
        format,
        tables.events_schema.clone(),
        tz,
        Values::Stepwise,
    )?;
    events.write(
        &tables.events_batch(s, &outcome.events, s.run.step_s),
        threads,
    )?;
    events.close(threads)?;
    let truth_rows = match layout.form {
        schema::Form::Single => intervals,
        schema::Form::Fleet => intervals * s.appliances.len() as u64,
    };
    let rows = [meter_rows, truth_rows, outcome.events.len() as u64];
    let files: Vec<(String, u64)> = files
        .iter()
        .zip(rows)
        .map(|(f, r)| (f.to_string_lossy().to_string(), r))
        .collect();
    let card = crate::difficulty::card(s, &tl, &outcome.summary.app_energy_j);
    let mut m = manifest::build(s, &tables, &outcome, &card, &files, &waves, dir, &meta)?;
    if let Some(toml) = &s.source_toml {
        std::fs::write(meta.join("scenario.toml"), toml)?;
        m["scenario_toml"] = serde_json::Value::String("scenario.toml".into());
    }
    let text = serde_json::to_string_pretty(&m).map_err(io::Error::other)?;
    std::fs::write(meta.join("manifest.json"), text + "\n")?;
    Ok((intervals, outcome))
}
