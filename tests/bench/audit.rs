//! Benchmark: the wiring audit of 30 days at 1 s of each demo home (the
//! meters file streamed, steps detected, the metering and every appliance
//! placed, the loading picture), declared as simulated; and of the
//! split-phase home with two channels exchanged and its garage door opener
//! declared on the other line (the metering weighed against every single
//! move). Writes each dataset once, then times `audit` in a child process
//! and reports its wall time, peak memory and rows per second. No target is
//! set in the issue; the figures go in the README.
//!
//!     cargo bench --bench audit                  # 30 days (about a minute to prepare)
//!     LOADLOOM_BENCH_DAYS=7 cargo bench --bench audit

use loadloom::dataset::{self, Format};
use std::path::Path;
use std::process::Command;
use std::time::Instant;

fn peak_mb() -> f64 {
    let status = std::fs::read_to_string("/proc/self/status").unwrap_or_default();
    status.lines().find(|l| l.starts_with("VmHWM:")).and_then(|l| l.split_whitespace().nth(1)).and_then(|v| v.parse::<f64>().ok()).unwrap_or(0.0) / 1024.0
}

fn main() {
    let args: Vec<String> = std::env::args().collect();
    if let Some(i) = args.iter().position(|a| a == "--child") {
        let d = loadloom::audit::load_declaration(Path::new(&args[i + 2])).expect("the demo parses");
        let t = Instant::now();
        let a = solver_check::audit::audit(Path::new(&args[i + 1]), &d).expect("audit");
        println!("{} {} {} {}", t.elapsed().as_secs_f64(), peak_mb(), a.rows, a.outcome.findings.len());
        return;
    }
    let days: f64 = std::env::var("LOADLOOM_BENCH_DAYS").ok().and_then(|v| v.parse().ok()).unwrap_or(30.0);
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let dir = std::env::temp_dir().join(format!("loadloom-bench-audit-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    println!("auditing {days} d at 1 s of each demo home, declared as simulated, then one with a fault and a mistake (best of 3):");
    let text = std::fs::read_to_string(root.join("scenarios/split-phase-house.toml")).unwrap();
    let misdeclared = dir.join("misdeclared.toml");
    let moved = text.replace("id = \"garage_door\"\nlabel = \"Garage door opener\"\nwiring = \"L1-N\"", "id = \"garage_door\"\nlabel = \"Garage door opener\"\nwiring = \"L2-N\"");
    assert_ne!(moved, text, "the demo's garage door is on L1-N");
    std::fs::write(&misdeclared, moved).unwrap();
    let cases = [("apartment-208", None), ("split-phase-house", None), ("three-phase-house", None), ("split-phase-house", Some(misdeclared))];
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
        let w = dataset::write(&s, &out, Format::Parquet, &mut |_| {}).expect("write");
        let (mut best, mut mem, mut rows, mut found) = (f64::MAX, 0.0f64, 0.0, 0.0);
        for _ in 0..3 {
            let o = Command::new(std::env::current_exe().unwrap()).args(["--child", w.dir.to_str().unwrap(), declared.to_str().unwrap()]).output().unwrap();
            assert!(o.status.success(), "{}", String::from_utf8_lossy(&o.stderr));
            let v: Vec<f64> = String::from_utf8_lossy(&o.stdout).split_whitespace().map(|x| x.parse().unwrap()).collect();
            best = best.min(v[0]);
            mem = mem.max(v[1]);
            (rows, found) = (v[2], v[3]);
        }
        let what = if faulty { format!("{home}, channels exchanged, one appliance misdeclared") } else { home.to_string() };
        println!("  {what:18} {:2} appliances: {best:6.2} s, peak memory {mem:4.0} MB, {:.2} million rows per second, {found} findings", s.appliances.len(), rows / best / 1e6);
    }
    let _ = std::fs::remove_dir_all(&dir);
}
