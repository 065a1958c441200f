//! Benchmark: a full layout ladder (`roundtrip --layouts`) of each demo home
//! on a week at 10 s (4 days of training, 3 of test; the demo with its
//! reporting interval set to 10 s, the simulation step still 1 s), with
//! builtin:combinatorial, against one plain round trip of the same home in
//! the same run. Prints the ladder's wall time, its rungs, the time per
//! rung and the ratio of the ladder to (rungs × one round trip): what the
//! ladder adds beyond running each rung as a round trip of its own
//! (building the rungs, writing their files, the cards, the reports).
//!
//!     cargo bench --bench layouts

use std::path::Path;
use std::process::Command;
use std::time::Instant;

const BIN: &str = env!("CARGO_BIN_EXE_loadloom");

fn timed(args: &[&str]) -> (f64, String) {
    let t = Instant::now();
    let o = Command::new(BIN)
        .args(args)
        .output()
        .expect("loadloom runs");
    assert!(
        o.status.success(),
        "loadloom {args:?}: {}",
        String::from_utf8_lossy(&o.stderr)
    );
    (
        t.elapsed().as_secs_f64(),
        String::from_utf8_lossy(&o.stdout).to_string(),
    )
}

fn main() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR"));
    let tmp = std::env::temp_dir().join(format!("loadloom-bench-layouts-{}", std::process::id()));
    std::fs::create_dir_all(&tmp).expect("scratch folder");
    println!("home                 rungs  ladder s  per rung s  one round trip s  ladder / (rungs x one)");
    for home in ["apartment-208", "split-phase-house", "three-phase-house"] {
        let text =
            std::fs::read_to_string(root.join(format!("scenarios/{home}.toml"))).expect("demo");
        let text = text.replacen("interval = \"1 s\"", "interval = \"10 s\"", 1);
        let file = tmp.join(format!("{home}.toml"));
        std::fs::write(&file, text).expect("write the 10 s copy");
        let f = file.to_str().expect("utf-8 path");
        let out = tmp.join("out");
        let o = out.to_str().expect("utf-8 path");
        let common = [
            "--solver",
            "builtin:combinatorial",
            "--train",
            "4d",
            "--test",
            "3d",
            "--quiet",
            "--out",
            o,
        ];
        let (one, _) = timed(&[&["roundtrip", f][..], &common[..]].concat());
        let (ladder, json) =
            timed(&[&["roundtrip", f, "--layouts", "--json"][..], &common[..]].concat());
        let v: serde_json::Value = serde_json::from_str(&json).expect("ladder JSON");
        let rungs = v["rungs"].as_array().map_or(0, |r| r.len());
        println!(
            "{home:<20} {rungs:>5}  {ladder:>8.1}  {:>10.2}  {one:>16.2}  {:>22.2}",
            ladder / rungs as f64,
            ladder / (rungs as f64 * one)
        );
    }
    let _ = std::fs::remove_dir_all(&tmp);
}
