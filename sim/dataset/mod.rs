//! The dataset writer: one folder per run with `manifest.json`,
//! `meters.*`, `truth.*` and `events.*` (README, "Dataset contract").
//! Everything is written under a temporary name and renamed when complete,
//! so a failed run leaves nothing half-written. This module only writes:
//! [`crate::pipeline`] runs the simulation and hands its rows here.

pub mod dict_column;
pub mod finite;
pub mod float_column;
pub mod folder;
pub mod manifest;
pub mod parquet;
pub mod schema;
pub mod sink;
pub mod tables;

use crate::difficulty::Difficulty;
use crate::meter::MeterNoise;
use crate::scenario::Scenario;
use crate::simulate::{Chunk, SimulationRecord, StateSpan};
use serde_json::Value;
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
    /// A home on its own, or one home of a fleet.
    pub form: schema::Form,
    /// The folder of `meters.*`.
    pub meters: PathBuf,
    /// The folder of `truth.*`.
    pub truth: PathBuf,
    /// The folder of `events.*`.
    pub events: PathBuf,
    /// The folder of `manifest.json` and `scenario.toml` (waveforms go
    /// beside the manifest).
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

/// Moves `tmp` to `dest`, replacing an older dataset there.
pub fn replace_dir(tmp: &Path, dest: &Path) -> io::Result<()> {
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

/// Writes each chunk's meters and truth as it arrives: its intervals read
/// through the meter's `noise` here, off the simulation's thread, and its
/// columns lent to the batches (no copy), which `threads` encoding threads
/// take while this thread reads the next chunk's noise. Sends each chunk
/// back through `back`, once encoded, for the simulation to fill again,
/// then finishes both files. Returns the meters rows written and the
/// noise stage, which holds the current peaks read.
pub fn encode_rows(
    rx: std::sync::mpsc::Receiver<Chunk>,
    back: std::sync::mpsc::Sender<Chunk>,
    tables: &Tables,
    mut noise: MeterNoise,
    [mut meters, mut truth]: [Sink; 2],
    threads: usize,
) -> io::Result<(u64, MeterNoise)> {
    let pool = parquet::Pool::new(threads)?;
    let mut rows = 0;
    // The chunk being encoded, with what its columns were lent as.
    let mut encoding: Option<(Chunk, tables::Lent, sink::Started)> = None;
    for mut chunk in rx {
        noise.read_all(&mut chunk.readings);
        let mut lent = tables::Lent::default();
        let [m, t] = tables.lend_batches(&mut chunk, &mut lent);
        rows += m.num_rows() as u64;
        if let Some(before) = encoding.take() {
            give_back(before, [&mut meters, &mut truth], &back)?;
        }
        let started = sink::start_all(vec![(&mut meters, m), (&mut truth, t)], &pool)?;
        // Row groups the last round closed go to the files while the
        // encoding threads work on this one.
        meters.append_closed()?;
        truth.append_closed()?;
        encoding = Some((chunk, lent, started));
    }
    if let Some(last) = encoding {
        give_back(last, [&mut meters, &mut truth], &back)?;
    }
    drop(pool);
    meters.close(threads)?;
    truth.close(threads)?;
    Ok((rows, noise))
}

/// Waits for a chunk's encoding, puts its lent vectors back and sends it
/// to the simulation.
fn give_back(
    (mut chunk, lent, started): (Chunk, tables::Lent, sink::Started),
    sinks: [&mut Sink; 2],
    back: &std::sync::mpsc::Sender<Chunk>,
) -> io::Result<()> {
    started.finish(sinks)?;
    lent.give_back(&mut chunk);
    // The simulation may have ended already; the chunk is then dropped.
    let _ = back.send(chunk);
    Ok(())
}

/// The files of a dataset being written into a folder, placed by a
/// [`Layout`]: the table paths (relative to `dir`), the folder of the
/// manifest, and how they are encoded.
pub struct Files {
    /// The folder being written (a partial folder until renamed).
    pub dir: PathBuf,
    /// Where `manifest.json`, `scenario.toml` and the waveforms go.
    pub meta: PathBuf,
    /// `meters.*`, `truth.*` and `events.*`, relative to `dir`.
    pub tables: [PathBuf; 3],
    /// Parquet or CSV.
    pub format: Format,
    /// Threads that encode each table's columns ([`threads`]).
    pub threads: usize,
    /// The time zone written into the time columns.
    tz: String,
}

impl Files {
    /// Creates the layout's folders in `dir` and opens the meters and truth
    /// tables, which take the simulation's rows as they come.
    pub fn open(
        s: &Scenario,
        tables: &Tables,
        dir: &Path,
        format: Format,
        layout: &Layout,
    ) -> io::Result<(Files, Sink, Sink)> {
        let paths = ["meters", "truth", "events"].map(|t| layout.table(t, format));
        for f in &paths {
            std::fs::create_dir_all(dir.join(f).parent().unwrap_or(dir))?;
        }
        let meta = dir.join(&layout.manifest);
        std::fs::create_dir_all(&meta)?;
        let tz = layout.form.timezone(s).to_string();
        let sink = |k: usize, schema: &arrow_schema::SchemaRef, values| {
            Sink::create(&dir.join(&paths[k]), format, schema.clone(), &tz, values)
        };
        let meters = sink(0, &tables.meters_schema, Values::Noisy)?;
        let truth = sink(1, &tables.truth_schema, Values::Stepwise)?;
        let files = Files {
            dir: dir.to_path_buf(),
            meta,
            tables: paths,
            format,
            threads: threads()?,
            tz,
        };
        Ok((files, meters, truth))
    }

    /// Writes `events.*` whole.
    pub fn write_events(
        &self,
        s: &Scenario,
        tables: &Tables,
        events: &[StateSpan],
    ) -> io::Result<()> {
        let mut sink = Sink::create(
            &self.dir.join(&self.tables[2]),
            self.format,
            tables.events_schema.clone(),
            &self.tz,
            Values::Stepwise,
        )?;
        sink.write(&tables.events_batch(s, events, s.run.step_s), self.threads)?;
        sink.close(self.threads)
    }

    /// Writes `manifest.json` (with each table's rows and hash, and the
    /// difficulty card) and the scenario's own text beside it.
    pub fn finish(
        &self,
        s: &Scenario,
        tables: &Tables,
        outcome: &SimulationRecord,
        card: &Difficulty,
        rows: [u64; 3],
        waves: &[(String, Value)],
    ) -> io::Result<()> {
        let files: Vec<(String, u64)> = self
            .tables
            .iter()
            .zip(rows)
            .map(|(f, r)| (f.to_string_lossy().to_string(), r))
            .collect();
        let mut m = manifest::build(
            s, tables, outcome, card, &files, waves, &self.dir, &self.meta,
        )?;
        if let Some(toml) = &s.source_toml {
            std::fs::write(self.meta.join("scenario.toml"), toml)?;
            m["scenario_toml"] = Value::String("scenario.toml".into());
        }
        let text = serde_json::to_string_pretty(&m).map_err(io::Error::other)?;
        std::fs::write(self.meta.join("manifest.json"), text + "\n")
    }
}
