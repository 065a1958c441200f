//! Benchmark, two parts.
//!
//! 1. Against pyarrow: 30 days at 1 s of the split-phase demo, simulated and
//!    written by loadloom (the whole run), then the same tables, read into
//!    memory first, written by pyarrow at loadloom's settings
//!    (`tests/bench/pyarrow_write.py`, the test virtual environment's
//!    python; only its write is timed). Prints per round and overall:
//!    loadloom whole run / pyarrow write alone (target ≤ 1.0) and loadloom
//!    bytes / pyarrow bytes (target ≤ 1.05). Skipped, saying so, without
//!    `.venv`.
//! 2. One year at 1 s (LOADLOOM_BENCH_DAYS), all files written, against a
//!    floor run that writes the same columns and rows of precomputed values;
//!    peak memory (target < 512 MB) and the ratio (target ≤ 1.5).
//! 3. The same year bare (no `[building]`: the thermostatic heat pump,
//!    blower and backup heat stay off; no PV), and with a rooftop PV system
//!    added to the demo's weather (the sun, the sky and PVWatts per minute,
//!    an inverter across L1-L2): CPU time with weather and PV over CPU time
//!    bare (target ≤ 1.10), and the weather alone on over off.
//!
//!    With LOADLOOM_BENCH_PAIRS=n the three runs are made n times over
//!    (each round the three one after the other, so a busy machine slows
//!    a round's runs alike) and the medians of the rounds' ratios printed.
//!
//! ```text
//! cargo bench --bench simulate            # about 5 minutes
//! LOADLOOM_BENCH_DAYS=30 LOADLOOM_BENCH_ROUNDS=5 cargo bench --bench simulate
//! LOADLOOM_BENCH_PARTS=3 LOADLOOM_BENCH_PAIRS=3 cargo bench --bench simulate
//! ```
//!
//! LOADLOOM_BENCH_PARTS picks the parts to run (default `123`).
//!
//! Each run is a child process of its own, so peak memory (VmHWM) is its own.

#[path = "common.rs"]
mod common;

use loadloom::dataset::sink::{Format, Sink, Values};
use loadloom::dataset::tables::Tables;
use loadloom::dataset::CHUNK_ROWS;
use loadloom::pipeline;
use loadloom::scenario::Scenario;
use std::path::{Path, PathBuf};
use std::process::Command;
use std::time::Instant;

fn scenario(days: f64) -> Scenario {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut s = loadloom::scenario::load(&root.join("scenarios/split-phase-house.toml"))
        .expect("demo parses");
    s.run.length_s = days * 86400.0;
    s
}

/// The demo with a 7.6 kW PV system at its site, under its sky.
fn scenario_pv(days: f64) -> Scenario {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let path = root.join("scenarios/split-phase-house.toml");
    let text = std::fs::read_to_string(&path).expect("demo reads")
        + "\n[pv]\ndc = \"8.4 kW\"\ninverter = \"7.6 kW\"\ntilt = \"30 deg\"\n";
    let mut s = loadloom::scenario::load_str(&path, text).expect("demo with PV parses");
    s.run.length_s = days * 86400.0;
    s
}

fn sim(s: &Scenario, out: &Path) {
    pipeline::write(s, out, Format::Parquet, &mut |_| {}).expect("write");
}

/// The same tables, rows and columns, from one precomputed chunk.
fn floor(s: &Scenario, out: &Path) {
    let mut short = s.clone();
    short.run.length_s = CHUNK_ROWS as f64 * s.meter.interval_s;
    let tl = loadloom::loads::timelines(&short, short.run.steps());
    let mut kept = None;
    let outcome = loadloom::simulate::simulate(
        &short,
        &tl,
        short.intervals(),
        CHUNK_ROWS,
        |c| -> Result<(), ()> {
            kept = Some(loadloom::simulate::Chunk {
                first_row: 0,
                ..c.clone()
            });
            Ok(())
        },
    )
    .unwrap();
    let mut chunk = kept.unwrap();
    let started = Instant::now();
    let threads = loadloom::dataset::threads().unwrap();
    std::fs::create_dir_all(out).unwrap();
    let tables = Tables::new(s);
    let tz = &s.home.timezone;
    let mut meters = Sink::create(
        &out.join("meters.parquet"),
        Format::Parquet,
        tables.meters_schema.clone(),
        tz,
        Values::Noisy,
    )
    .unwrap();
    let mut truth = Sink::create(
        &out.join("truth.parquet"),
        Format::Parquet,
        tables.truth_schema.clone(),
        tz,
        Values::Stepwise,
    )
    .unwrap();
    let rows = s.intervals();
    while chunk.first_row < rows {
        let n = (rows - chunk.first_row).min(CHUNK_ROWS as u64) as usize;
        if n < CHUNK_ROWS {
            truncate_chunk(&mut chunk, n);
        }
        let [m, t] = tables.batches(&chunk);
        loadloom::dataset::sink::write_all(vec![(&mut meters, m), (&mut truth, t)], threads)
            .unwrap();
        chunk.first_row += n as u64;
    }
    meters.close(threads).unwrap();
    truth.close(threads).unwrap();
    let mut events = Sink::create(
        &out.join("events.parquet"),
        Format::Parquet,
        tables.events_schema.clone(),
        tz,
        Values::Stepwise,
    )
    .unwrap();
    events
        .write(
            &tables.events_batch(s, &outcome.events, s.run.step_s),
            threads,
        )
        .unwrap();
    events.close(threads).unwrap();
    eprintln!(
        "floor: precomputing took no part in the {:.1} s",
        started.elapsed().as_secs_f64()
    );
}

/// Cuts every column of `chunk` to its first `n` rows (the run's last chunk).
fn truncate_chunk(chunk: &mut loadloom::simulate::Chunk, n: usize) {
    for v in chunk
        .readings
        .line_p
        .iter_mut()
        .chain(&mut chunk.readings.line_q)
        .chain(&mut chunk.readings.line_v)
        .chain(&mut chunk.readings.line_i)
    {
        v.truncate(n);
    }
    for v in [
        &mut chunk.readings.n_i,
        &mut chunk.readings.total_p,
        &mut chunk.readings.total_q,
        &mut chunk.truth.unmetered_p,
    ] {
        v.truncate(n);
    }
    chunk.readings.energy.iter_mut().for_each(|v| v.truncate(n));
    chunk.readings.present.truncate(n);
    chunk
        .truth
        .app_p
        .iter_mut()
        .chain(&mut chunk.truth.app_q)
        .chain(chunk.truth.app_line_p.iter_mut().flatten())
        .chain(chunk.truth.app_soc.iter_mut().flatten())
        .for_each(|v| v.truncate(n));
    chunk.truth.app_state.iter_mut().for_each(|v| v.truncate(n));
}

/// CPU time of this process, all threads, user + system (getrusage(2)).
fn cpu_seconds() -> f64 {
    // SAFETY: getrusage fills the struct it is given; a zeroed one is valid.
    let mut u: libc::rusage = unsafe { std::mem::zeroed() };
    unsafe { libc::getrusage(libc::RUSAGE_SELF, &mut u) };
    let t = |v: libc::timeval| v.tv_sec as f64 + v.tv_usec as f64 / 1e6;
    t(u.ru_utime) + t(u.ru_stime)
}

fn child(mode: &str, days: f64, dir: &Path) {
    let s = if mode == "sim-pv" {
        scenario_pv(days)
    } else {
        scenario(days)
    };
    let started = Instant::now();
    match mode {
        "sim" | "sim-pv" => sim(&s, dir),
        "sim-bare" => {
            let mut bare = s.clone();
            bare.building = None;
            sim(&bare, &dir.join("bare"))
        }
        _ => floor(&s, &dir.join("floor")),
    }
    let wall = started.elapsed().as_secs_f64();
    println!("{wall} {} {}", common::peak_mb(), cpu_seconds());
}

/// Runs a child: (wall s, peak MB, CPU s).
fn measure(mode: &str, days: f64, dir: &Path) -> (f64, f64, f64) {
    let exe = std::env::current_exe().unwrap();
    let o = Command::new(exe)
        .args(["--child", mode, &days.to_string(), dir.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "{mode}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let line = String::from_utf8_lossy(&o.stdout)
        .lines()
        .last()
        .unwrap()
        .to_string();
    let mut it = line.split_whitespace();
    let mut next = || it.next().unwrap().parse::<f64>().unwrap();
    (next(), next(), next())
}

fn dir_bytes(d: &Path) -> u64 {
    std::fs::read_dir(d)
        .map(|r| {
            r.filter_map(|e| e.ok())
                .filter_map(|e| e.metadata().ok())
                .filter(|m| m.is_file())
                .map(|m| m.len())
                .sum()
        })
        .unwrap_or(0)
}

/// Bytes of the dataset's Parquet files (the tables both writers write).
fn parquet_bytes(d: &Path) -> u64 {
    ["meters", "truth", "events"]
        .iter()
        .map(|t| {
            std::fs::metadata(d.join(format!("{t}.parquet")))
                .unwrap()
                .len()
        })
        .sum()
}

/// pyarrow writing the tables of `dataset` again: (wall s, CPU s, bytes).
fn pyarrow(python: &Path, dataset: &Path, out: &Path) -> (f64, f64, u64) {
    let script = Path::new(env!("CARGO_MANIFEST_DIR")).join("tests/bench/pyarrow_write.py");
    let o = Command::new(python)
        .arg(script)
        .args([dataset, out])
        .output()
        .unwrap();
    assert!(
        o.status.success(),
        "pyarrow: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    (
        v["seconds"].as_f64().unwrap(),
        v["cpu_seconds"].as_f64().unwrap(),
        v["bytes"].as_u64().unwrap(),
    )
}

/// Part 1: rounds of loadloom's whole run then pyarrow's write alone.
fn against_pyarrow(dir: &Path) {
    let python = Path::new(env!("CARGO_MANIFEST_DIR")).join(".venv/bin/python");
    if !python.exists() {
        println!(
            "against pyarrow: SKIPPED, {} not found (make it: python3 -m venv .venv && .venv/bin/pip install -r tests/requirements.txt)",
            python.display()
        );
        return;
    }
    let rounds: usize = setting("LOADLOOM_BENCH_ROUNDS", 3);
    let threads = loadloom::dataset::threads().unwrap();
    let days = 30.0;
    let s = scenario(days);
    println!(
        "against pyarrow: split-phase demo, {days} d at 1 s, {} rows, {threads} encoding threads, {rounds} rounds",
        s.intervals()
    );
    let (mut time_ratios, mut byte_ratios) = (Vec::new(), Vec::new());
    for r in 0..rounds {
        let d = dir.join(format!("round{r}"));
        let (t_sim, m_sim, c_sim) = measure("sim", days, &d);
        let b_sim = parquet_bytes(&d.join(&s.name));
        let (t_pa, c_pa, b_pa) = pyarrow(&python, &d.join(&s.name), &d.join("pyarrow"));
        let (tr, br) = (t_sim / t_pa, b_sim as f64 / b_pa as f64);
        println!(
            "  round {}: loadloom {t_sim:5.2} s (CPU {c_sim:5.2} s, peak {m_sim:4.0} MB) {:5.1} MB | pyarrow write {t_pa:5.2} s (CPU {c_pa:5.2} s) {:5.1} MB | time {tr:4.2}  bytes {br:5.3}",
            r + 1,
            b_sim as f64 / 1e6,
            b_pa as f64 / 1e6
        );
        time_ratios.push(tr);
        byte_ratios.push(br);
        let _ = std::fs::remove_dir_all(&d);
    }
    time_ratios.sort_by(f64::total_cmp);
    println!(
        "ratio loadloom whole run / pyarrow write alone: median {:.2}, best {:.2}, worst {:.2}   (target ≤ 1.0)",
        time_ratios[time_ratios.len() / 2],
        time_ratios[0],
        time_ratios[time_ratios.len() - 1]
    );
    println!(
        "ratio loadloom bytes / pyarrow bytes:           {:.3}   (target ≤ 1.05)",
        byte_ratios[0]
    );
}

/// An environment setting, or its default.
fn setting<T: std::str::FromStr>(name: &str, default: T) -> T {
    std::env::var(name)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

/// Part 2: the year against its floor; the year's run (wall s, CPU s).
fn against_floor(days: f64, dir: &Path) -> (f64, f64) {
    let s = scenario(days);
    let samples = s.run.steps() as f64 * s.appliances.len() as f64;
    let (t_floor, m_floor, _) = measure("floor", days, dir);
    let floor_bytes = dir_bytes(&dir.join("floor"));
    let (t_sim, m_sim, c_sim) = measure("sim", days, dir);
    let sim_bytes = dir_bytes(&dir.join(&s.name));
    let _ = std::fs::remove_dir_all(dir.join(&s.name));
    println!(
        "split-phase demo, {days} d at 1 s, {} appliances, {} rows",
        s.appliances.len(),
        s.intervals()
    );
    println!("simulate + write all files: {t_sim:8.1} s  peak {m_sim:6.0} MB  {:.1} MB written  {:.2e} appliance-samples/s", sim_bytes as f64 / 1e6, samples / t_sim);
    println!(
        "floor (precomputed values): {t_floor:8.1} s  peak {m_floor:6.0} MB  {:.1} MB written",
        floor_bytes as f64 / 1e6
    );
    println!(
        "ratio simulate / floor:     {:8.2}   (target ≤ 1.5; peak memory target < 512 MB)",
        t_sim / t_floor
    );
    (t_sim, c_sim)
}

/// Part 3 in `pairs` rounds, each the demo as is (the first round may take
/// part 2's run, `first`), with PV and bare, one after the other; the
/// medians of the rounds' ratios.
fn weather_and_pv(days: f64, dir: &Path, pairs: usize, mut first: Option<(f64, f64)>) {
    let s = scenario(days);
    let (mut on_off, mut pv_bare) = (Vec::new(), Vec::new());
    for r in 0..pairs {
        let (t_sim, c_sim) = first.take().unwrap_or_else(|| {
            let (t, _, c) = measure("sim", days, dir);
            let _ = std::fs::remove_dir_all(dir.join(&s.name));
            (t, c)
        });
        let (t_pv, _, c_pv) = measure("sim-pv", days, dir);
        let _ = std::fs::remove_dir_all(dir.join(&s.name));
        let (t_bare, _, c_bare) = measure("sim-bare", days, dir);
        let _ = std::fs::remove_dir_all(dir.join("bare"));
        println!("round {} of {pairs}, {days} d at 1 s", r + 1);
        println!("bare (no weather, no PV):   {t_bare:8.1} s  CPU {c_bare:.1} s");
        println!("weather (the demo as is):   {t_sim:8.1} s  CPU {c_sim:.1} s");
        println!("weather + 7.6 kW PV system: {t_pv:8.1} s  CPU {c_pv:.1} s");
        on_off.push(c_sim / c_bare);
        pv_bare.push(c_pv / c_bare);
    }
    let median = |v: &mut Vec<f64>| {
        v.sort_by(f64::total_cmp);
        v[v.len() / 2]
    };
    let range = |v: &[f64]| format!("rounds {:.3} … {:.3}", v[0], v[v.len() - 1]);
    let (m_on, m_pv) = (median(&mut on_off), median(&mut pv_bare));
    println!(
        "ratio CPU weather on / off:            {m_on:6.3}   (median; {})",
        range(&on_off)
    );
    println!(
        "ratio CPU weather + PV / bare:         {m_pv:6.3}   (median; {}; target ≤ 1.10)",
        range(&pv_bare)
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        child(
            &args[i + 1],
            args[i + 2].parse().unwrap(),
            Path::new(&args[i + 3]),
        );
        return;
    }
    let days: f64 = setting("LOADLOOM_BENCH_DAYS", 365.0);
    let parts: String = setting("LOADLOOM_BENCH_PARTS", "123".to_string());
    let pairs: usize = setting("LOADLOOM_BENCH_PAIRS", 1).max(1);
    let dir: PathBuf = std::env::temp_dir().join(format!("loadloom-bench-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    if parts.contains('1') {
        against_pyarrow(&dir);
    }
    let year = parts.contains('2').then(|| against_floor(days, &dir));
    if parts.contains('3') {
        weather_and_pv(days, &dir, pairs, year);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
