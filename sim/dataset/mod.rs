//! The dataset writer: one folder per run with `manifest.json`,
//! `meters.*`, `truth.*` and `events.*` (DESIGN.md, "Dataset contract").
//! Everything is written under a temporary name and renamed when complete,
//! so a failed run leaves nothing half-written.

pub mod finite;
pub mod folder;
pub mod manifest;
pub mod schema;
pub mod sink;
pub mod tables;

use crate::behaviour::timelines;
use crate::scenario::Scenario;
use crate::simulate::{simulate_with, Outcome};
pub use sink::Format;
use sink::{Sink, Values};
use std::io;
use std::path::{Path, PathBuf};
use tables::Tables;

/// Rows per chunk handed from the simulator to the writers.
pub const CHUNK_ROWS: usize = 65_536;

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
    std::fs::create_dir_all(out_root)?;
    folder::sweep_stale(out_root);
    let dest = out_root.join(&s.name);
    // Removed on every way out but the rename below (an error, a panic).
    let tmp = folder::PartialDir::create(out_root.join(format!(
        ".{}.partial-{}",
        s.name,
        std::process::id()
    )))?;
    let (rows, outcome) = write_into(s, tmp.path(), format, progress)?;
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

fn write_into(
    s: &Scenario,
    dir: &Path,
    format: Format,
    progress: &mut dyn FnMut(f64),
) -> io::Result<(u64, Outcome)> {
    let tables = Tables::new(s);
    let ext = format.ext();
    let tz = &s.home.timezone;
    let intervals = s.intervals();
    let tl = timelines(s, s.run.steps());
    let mut meters = Sink::create(
        &dir.join(format!("meters.{ext}")),
        format,
        tables.meters_schema.clone(),
        tz,
        Values::Noisy,
    )?;
    let mut truth = Sink::create(
        &dir.join(format!("truth.{ext}")),
        format,
        tables.truth_schema.clone(),
        tz,
        Values::Stepwise,
    )?;
    let mut meter_rows = 0u64;
    let mut recorder = if s.waveforms.windows.is_empty() {
        None
    } else {
        Some(crate::waveform::Recorder::new(s, dir)?)
    };
    let outcome = simulate_with(
        s,
        &tl,
        intervals,
        CHUNK_ROWS,
        |chunk| -> io::Result<()> {
            let batch = tables.meters_batch(chunk);
            meter_rows += batch.num_rows() as u64;
            meters.write(&batch)?;
            truth.write(&tables.truth_batch(chunk))?;
            progress((chunk.first_row + chunk.readings.rows() as u64) as f64 / intervals as f64);
            Ok(())
        },
        recorder.as_mut(),
    )?;
    let waves = match recorder {
        Some(r) => r.finish(s)?,
        None => Vec::new(),
    };
    meters.close()?;
    truth.close()?;
    let mut events = Sink::create(
        &dir.join(format!("events.{ext}")),
        format,
        tables.events_schema.clone(),
        tz,
        Values::Stepwise,
    )?;
    events.write(&tables.events_batch(s, &outcome.events, s.run.step_s))?;
    events.close()?;
    let files = [
        ("meters", meter_rows),
        ("truth", intervals),
        ("events", outcome.events.len() as u64),
    ];
    let card = crate::difficulty::card(s, &tl, &outcome.summary.app_energy_j);
    let mut m = manifest::build(s, &tables, format, &outcome, &card, &files, &waves, dir)?;
    if let Some(toml) = &s.source_toml {
        std::fs::write(dir.join("scenario.toml"), toml)?;
        m["scenario_toml"] = serde_json::Value::String("scenario.toml".into());
    }
    let text = serde_json::to_string_pretty(&m).map_err(io::Error::other)?;
    std::fs::write(dir.join("manifest.json"), text + "\n")?;
    Ok((intervals, outcome))
}
