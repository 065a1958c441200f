//! Benchmark: a 10-minute three-phase waveform at 12.8 kHz (the three-phase
//! demo, 7 channels), against the same run without it. Prints the time the
//! waveform adds, its size and its sample rate of writing.
//!
//!     cargo bench --bench waveform

use loadloom::dataset::Format;
use loadloom::pipeline;
use std::path::Path;
use std::time::Instant;

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut s = loadloom::scenario::load(&root.join("scenarios/three-phase-house.toml"))
        .expect("demo parses");
    s.run.length_s = 3600.0;
    let dir = std::env::temp_dir().join(format!("loadloom-bench-wave-{}", std::process::id()));
    let time = |s: &loadloom::scenario::Scenario| {
        (0..3)
            .map(|_| {
                let t = Instant::now();
                pipeline::write(s, &dir, Format::Parquet, &mut |_| {}).expect("write");
                t.elapsed().as_secs_f64()
            })
            .fold(f64::MAX, f64::min)
    };
    let plain = time(&s);
    let w = loadloom::scenario::decode::place_window(
        &format!("{}:00", s.run.start_local),
        600.0,
        &s.run,
        &s.home,
    )
    .expect("window");
    s.waveforms.windows.push(w);
    s.waveforms.rate_hz = 12_800.0;
    let with = time(&s);
    let bytes = std::fs::metadata(dir.join(&s.name).join("waveform-1.wav"))
        .map(|m| m.len())
        .unwrap_or(0);
    let frames = 600.0 * 12_800.0;
    println!("three-phase demo, 1 h at 1 s, plus a 10-minute waveform at 12.8 kHz (7 channels), best of 3:");
    println!(
        "  without the waveform: {plain:.2} s; with it: {with:.2} s; the waveform adds {:.2} s",
        with - plain
    );
    println!(
        "  waveform file: {:.1} MB, {:.1} million frames per second of writing",
        bytes as f64 / 1e6,
        frames / (with - plain).max(1e-9) / 1e6
    );
    let _ = std::fs::remove_dir_all(&dir);
}
