//! Benchmark: what the round trip costs beyond simulating and solving, on a
//! month at 1 s of the split-phase demo (7 days of training, 23 of test)
//! with builtin:combinatorial. Each phase is timed in a child process:
//! simulating, writing the task and the scored truth (hashed on the way
//! out), solving, scoring (with the sha256 check of the truth before it),
//! and confinement (a confined start of /bin/true against an unconfined
//! one). Target: overhead (task, truth, scoring, confinement) under 10 % of
//! simulating plus solving; the ratio is printed.
//!
//!     cargo bench --bench roundtrip
//!     LOADLOOM_BENCH_DAYS=7 cargo bench --bench roundtrip   # a shorter test period

use loadloom::dataset::Format;
use loadloom::pipeline;
use solver_check::confine::{Access, Sandbox};
use solver_check::roundtrip::{prepare, Reveal, Split};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

#[path = "common.rs"]
mod common;
use common::peak_mb;

/// Seconds for one start of /bin/true under `sandbox`, averaged over `n`.
fn start_seconds(sandbox: &Sandbox, n: u32) -> f64 {
    let t = Instant::now();
    for _ in 0..n {
        let mut c = Command::new("/bin/true");
        sandbox.apply(&mut c);
        c.status().expect("/bin/true");
    }
    t.elapsed().as_secs_f64() / n as f64
}

fn child(test_days: f64, dir: &Path) {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let mut s = loadloom::scenario::load(&root.join("scenarios/split-phase-house.toml"))
        .expect("demo parses");
    let train_days = 7.0;
    s.run.length_s = (train_days + test_days) * 86400.0;
    let train = (train_days * 86400.0 / s.meter.interval_s) as usize;
    let t = Instant::now();
    // As `loadloom::roundtrip::prepare` writes it: row groups cut at the split.
    let w = pipeline::write_cut(&s, dir, Format::Parquet, &mut |_| {}, &[train]).expect("write");
    let simulate = t.elapsed().as_secs_f64();
    let split = Split {
        train: 0..train,
        test: train..w.rows as usize,
    };
    let t = Instant::now();
    let p = prepare(&w.dir, dir, &split, Reveal::Wiring, "estimate.parquet").expect("task");
    let task = t.elapsed().as_secs_f64();
    let est = dir.join("estimate.parquet");
    let t = Instant::now();
    solver_check::solvers::run("combinatorial", &p.task_dir, &est).expect("solve");
    let solve = t.elapsed().as_secs_f64();
    let t = Instant::now();
    let opts = solver_check::score::Options {
        partial: false,
        thresholds: vec![],
    };
    let r = solver_check::score::score(&p.truth_dir, &est, &opts).expect("score");
    let score = t.elapsed().as_secs_f64();
    let access = Access {
        read: vec![p.task_dir.clone()],
        write: vec![dir.join("solver")],
    };
    let confined = Sandbox::new(&access, &[dir], true);
    let open = Sandbox::new(&access, &[dir], false);
    let t = Instant::now();
    let confined_sandbox = Sandbox::new(&access, &[dir], true);
    let build = t.elapsed().as_secs_f64();
    drop(confined_sandbox);
    let confine = build + (start_seconds(&confined, 20) - start_seconds(&open, 20)).max(0.0);
    println!(
        "{simulate} {task} {solve} {score} {confine} {} {} {}",
        peak_mb(),
        r.plan.rows,
        confined.confined as u8
    );
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        child(args[i + 1].parse().unwrap(), Path::new(&args[i + 2]));
        return;
    }
    let days: f64 = std::env::var("LOADLOOM_BENCH_DAYS")
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(23.0);
    let dir = std::env::temp_dir().join(format!("loadloom-bench-rt-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    let o = Command::new(std::env::current_exe().unwrap())
        .args(["--child", &days.to_string(), dir.to_str().unwrap()])
        .output()
        .unwrap();
    assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
    let v: Vec<f64> = String::from_utf8_lossy(&o.stdout)
        .split_whitespace()
        .map(|x| x.parse().unwrap())
        .collect();
    let (simulate, task, solve, score, confine) = (v[0], v[1], v[2], v[3], v[4]);
    let overhead = task + score + confine;
    let base = simulate + solve;
    println!(
        "round trip of the split-phase demo at 1 s, 7 d training + {days} d test ({} scored rows), builtin:combinatorial:",
        v[6]
    );
    println!("  simulate {simulate:.2} s, solve {solve:.2} s");
    println!(
        "  overhead: task and scored truth {task:.2} s, scoring with the truth's sha256 check {score:.2} s, confinement {:.4} s ({})",
        confine,
        if v[7] > 0.0 { "Landlock" } else { "not confined on this kernel" }
    );
    println!(
        "  overhead / (simulate + solve) = {:.3}  (target < 0.10); peak memory {:.0} MB",
        overhead / base,
        v[5]
    );
    let _ = std::fs::remove_dir_all(&dir);
}
