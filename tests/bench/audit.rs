//! Benchmark: the wiring audit of 30 days at 1 s of each demo home (the
//! meters file streamed, steps detected, the metering and every appliance
//! placed, the loading picture), declared as simulated; and of the
//! split-phase home with two channels exchanged and its garage door opener
//! declared on the other line (the metering weighed against every single
//! move). Writes each dataset once, then times `audit` in a child process
//! against a floor, one read of the columns the audit reads (P, Q and V of
//! every channel), and reports the ratio, the wall time, peak memory and
//! rows per second. No target is set in the issue; the figures go in the
//! README.
//!
//!     cargo bench --bench audit                  # 30 days (about a minute to prepare)
//!     LOADLOOM_BENCH_DAYS=7 cargo bench --bench audit

use loadloom::dataset::Format;
use loadloom::pipeline;
use std::path::Path;
use std::process::Command;
use std::time::Instant;

#[path = "common.rs"]
mod common;
use common::peak_mb;

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--floor") {
        floor_child(&args[i + 1]);
        return;
    }
    if let Some(i) = args.iter().position(|a| a == "--child") {
        audit_child(&args[i + 1], &args[i + 2]);
        return;
    }
    let days: f64 = std::env::var("LOADLOOM_BENCH_DAYS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(30.0);
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = std::env::temp_dir().join(format!("loadloom-bench-audit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!("auditing {days} d at 1 s of each demo home, declared as simulated, then one with a fault and a mistake (best of 3):");
    let text = std::fs::read_to_string(root.join("scenarios/split-phase-house.toml")).unwrap();
    let misdeclared = dir.join("misdeclared.toml");
    let moved = text.replace(
        "id = \"garage_door\"\nlabel = \"Garage door opener\"\nwiring = \"L1-N\"",
        "id = \"garage_door\"\nlabel = \"Garage door opener\"\nwiring = \"L2-N\"",
    );
    assert_ne!(moved, text, "the demo's garage door is on L1-N");
    std::fs::write(&misdeclared, moved).unwrap();
    let cases = [
        ("apartment-208", None),
        ("split-phase-house", None),
        ("three-phase-house", None),
        ("split-phase-house", Some(misdeclared)),
    ];
    let mut secs = Vec::new();
    for (home, declared) in cases {
        let file = root.join(format!("scenarios/{home}.toml"));
        let mut s = loadloom::scenario::load(&file).expect("demo parses");
        s.run.length_s = days * 86400.0;
        s.waveforms.windows.clear();
        let faulty = declared.is_some();
        if faulty {
            s.faults.swap = Some((0, 1));
        }
        let declared = declared.unwrap_or(file);
        let out = dir.join(if faulty { "faulty" } else { "as-simulated" });
        let w = pipeline::write(&s, &out, Format::Parquet, &mut |_| {}).expect("write");
        // Best of 3 of (seconds, peak MB, rows, findings), the runs
        // alternating between the audit and the floor.
        let (mut audit, mut floor) = (vec![f64::MAX, 0.0, 0.0, 0.0], vec![f64::MAX, 0.0, 0.0, 0.0]);
        for _ in 0..3 {
            for (best, args) in [
                (
                    &mut audit,
                    vec![
                        "--child",
                        w.dir.to_str().unwrap(),
                        declared.to_str().unwrap(),
                    ],
                ),
                (&mut floor, vec!["--floor", w.dir.to_str().unwrap()]),
            ] {
                let v = run_child(&args);
                best[0] = best[0].min(v[0]);
                best[1] = best[1].max(v[1]);
                (best[2], best[3]) = (v[2], v[3]);
            }
        }
        assert_eq!(audit[2], floor[2], "the floor reads every row");
        secs.push(audit[0]);
        let what = if faulty {
            format!("{home}, channels exchanged, one appliance misdeclared")
        } else {
            home.to_string()
        };
        println!("  {what}, {} appliances: {:.2} s against a floor of {:.2} s, ratio {:.2}; peak memory {:.0} MB (floor {:.0} MB); {:.2} million rows per second; {} findings", s.appliances.len(), audit[0], floor[0], audit[0] / floor[0], audit[1], floor[1], audit[2] / audit[0] / 1e6, audit[3]);
    }
    println!(
        "  split-phase-house faulted and misdeclared against as simulated: ratio {:.2}",
        secs[3] / secs[1]
    );
    let _ = std::fs::remove_dir_all(&dir);
}

/// The floor, in a child process: reads every line column of `data`'s
/// meters and prints seconds, peak MB, rows and whether the sum is finite.
fn floor_child(data: &str) {
    let h = solver_check::stream::header(&Path::new(data).join("meters.parquet")).expect("meters");
    let cols: Vec<String> = (1..=3)
        .flat_map(|c| ["p_w", "q_var", "v_v"].map(|x| format!("l{c}_{x}")))
        .filter(|c| h.has(c))
        .collect();
    let t = Instant::now();
    let mut st = h.stream(&cols).expect("stream");
    let (mut rows, mut sum) = (0usize, 0.0);
    while let Some(b) = st.next_batch().expect("read") {
        rows += b.time_ms.len();
        sum += b.cols.iter().flatten().sum::<f64>();
    }
    println!(
        "{} {} {rows} {}",
        t.elapsed().as_secs_f64(),
        peak_mb(),
        sum.is_finite() as u8
    );
}

/// The audit, in a child process: audits `data` against `declared` and
/// prints seconds, peak MB, rows and findings.
fn audit_child(data: &str, declared: &str) {
    let d = loadloom::audit::load_declaration(Path::new(declared)).expect("the demo parses");
    let t = Instant::now();
    let a = solver_check::audit::audit(Path::new(data), &d).expect("audit");
    println!(
        "{} {} {} {}",
        t.elapsed().as_secs_f64(),
        peak_mb(),
        a.rows,
        a.outcome.findings.len()
    );
}

/// Runs this benchmark as a child with `args`; the numbers it printed.
fn run_child(args: &[&str]) -> Vec<f64> {
    let o = Command::new(std::env::current_exe().unwrap())
        .args(args)
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    String::from_utf8_lossy(&o.stdout)
        .split_whitespace()
        .map(|x| x.parse().unwrap())
        .collect()
}
