//! End-to-end tests of the `loadloom` binary: bad input, determinism, and the
//! written folder. Each test works in a throw-away folder of its own.

use std::path::{Path, PathBuf};
use std::process::Output;

mod common;
use common::bin;

fn scratch(name: &str) -> PathBuf {
    common::scratch("cli", name)
}

const BASE: &str = r#"
[home]
supply = "split-phase"
timezone = "America/Chicago"

[run]
start = "2027-03-13T00:00"
length = "2 d"
seed = 11

[meter]
interval = "10 s"
noise = { relative = "0.5 %", floor = "1 W" }

[[appliance]]
id = "fridge"
wiring = "L1-N"
behaviour = "cycle"
load = "motor"
states = [
  { name = "idle", power = "3 W", dwell = { median = "25 min", spread = 0.3 } },
  { name = "cooling", power = "110 W", pf = 0.8, dwell = { median = "12 min", spread = 0.2 }, inrush = { peak = 5, decay = "1 s" } },
]

[[appliance]]
id = "washer"
wiring = "L2-N"
behaviour = "program"
use = { starts_per_day = 1.5, hours = "8-20" }
phases = [
  { name = "wash", length = { min = "20 min", max = "30 min" }, power = "400 W", pf = 0.7, load = "motor" },
  { name = "spin", length = "8 min", power = "600 W", pf = 0.75, load = "motor" },
]

[[appliance]]
id = "tv"
wiring = "L2-N"
behaviour = "markov"
load = "electronic"
states = [
  { name = "standby", power = "1 W", dwell = { mean = "3 h", shape = 2 }, next = { on = 1.0 } },
  { name = "on", power = "95 W", dwell = { median = "1 h", spread = 0.5 }, next = { standby = 1.0 } },
]
"#;

fn write(dir: &Path, name: &str, text: &str) -> PathBuf {
    let p = dir.join(name);
    std::fs::write(&p, text).unwrap();
    p
}

fn run(args: &[&str]) -> Output {
    bin().args(args).output().unwrap()
}

fn stderr(o: &Output) -> String {
    String::from_utf8_lossy(&o.stderr).to_string()
}

/// Asserts exit 2, that the message names `file:line`, contains `needle`,
/// and that no output was left behind.
fn assert_bad(name: &str, text: &str, line: usize, needle: &str) {
    let d = scratch(name);
    let p = write(&d, "home.toml", text);
    let out = d.join("out");
    let o = run(&["run", p.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    let e = stderr(&o);
    assert_eq!(o.status.code(), Some(2), "{name}: {e}");
    assert!(
        e.contains(&format!("home.toml:{line}:")),
        "{name}: place not named in\n{e}"
    );
    assert!(e.contains(needle), "{name}: `{needle}` not in\n{e}");
    assert!(e.contains("help:"), "{name}: no fix suggested in\n{e}");
    assert!(
        !out.exists() || std::fs::read_dir(&out).unwrap().next().is_none(),
        "{name}: output left behind"
    );
    let v = run(&["validate", p.to_str().unwrap()]);
    assert_eq!(v.status.code(), Some(2), "{name}: validate");
}

fn line_of(text: &str, needle: &str) -> usize {
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

#[test]
fn bad_input_syntax() {
    let t = BASE.replace("length = \"2 d\"", "length = \"2 d");
    assert_bad(
        "syntax",
        &t,
        line_of(&t, "length = \"2 d"),
        "not valid TOML",
    );
}

#[test]
fn bad_input_unknown_key() {
    let t = BASE.replace("seed = 11", "seed = 11\nsede = 12");
    assert_bad("unknown-key", &t, line_of(&t, "sede"), "unknown key `sede`");
}

#[test]
fn bad_input_bad_unit() {
    let t = BASE.replace("\"110 W\"", "\"110 kw\"");
    assert_bad("unit", &t, line_of(&t, "110 kw"), "did you mean \"kW\"");
}

#[test]
fn bad_input_wiring_the_supply_lacks() {
    let t = BASE.replace(
        "wiring = \"L2-N\"\nbehaviour = \"program\"",
        "wiring = \"L3-N\"\nbehaviour = \"program\"",
    );
    assert_bad(
        "wiring",
        &t,
        line_of(&t, "L3-N"),
        "L3 does not exist on a split-phase supply",
    );
}

#[test]
fn bad_input_zero_and_negative_durations() {
    let t = BASE.replace("length = \"8 min\"", "length = \"0 min\"");
    assert_bad(
        "zero-duration",
        &t,
        line_of(&t, "\"0 min\""),
        "greater than zero",
    );
    let t = BASE.replace("median = \"1 h\"", "median = \"-1 h\"");
    assert_bad(
        "negative-duration",
        &t,
        line_of(&t, "-1 h"),
        "greater than zero",
    );
}

#[test]
fn bad_input_duplicate_ids() {
    let t = BASE.replace("id = \"tv\"", "id = \"fridge\"");
    let second = t
        .lines()
        .collect::<Vec<_>>()
        .iter()
        .rposition(|l| l.contains("id = \"fridge\""))
        .unwrap()
        + 1;
    assert_bad("duplicate", &t, second, "already used");
}

#[test]
fn bad_input_probabilities_that_do_not_sum_to_one() {
    let t = BASE.replace("next = { on = 1.0 }", "next = { on = 0.7, standby = 0.2 }");
    assert_bad(
        "probabilities",
        &t,
        line_of(&t, "on = 0.7"),
        "sum to 0.8999",
    );
}

#[test]
fn bad_length_option() {
    let d = scratch("length-option");
    let p = write(&d, "home.toml", BASE);
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        d.join("out").to_str().unwrap(),
        "--length",
        "7 s",
    ]);
    assert_eq!(o.status.code(), Some(2));
    assert!(stderr(&o).contains("--length 7 s"), "{}", stderr(&o));
}

fn files(dir: &Path) -> Vec<(String, Vec<u8>)> {
    let mut v: Vec<_> = std::fs::read_dir(dir)
        .unwrap()
        .map(|e| e.unwrap())
        .map(|e| {
            (
                e.file_name().to_string_lossy().to_string(),
                std::fs::read(e.path()).unwrap(),
            )
        })
        .collect();
    v.sort();
    v
}

#[test]
fn same_seed_identical_bytes_other_seed_differs() {
    // Determinism (README, "Tests and what they are checked against"): same scenario and seed, identical file bytes.
    let d = scratch("determinism");
    let p = write(&d, "home.toml", BASE);
    for (out, seed) in [("a", "11"), ("b", "11"), ("c", "12")] {
        let o = run(&[
            "run",
            p.to_str().unwrap(),
            "--out",
            d.join(out).to_str().unwrap(),
            "--seed",
            seed,
        ]);
        assert!(o.status.success(), "{}", stderr(&o));
    }
    let a = files(&d.join("a/home"));
    assert_eq!(
        a.iter().map(|f| f.0.as_str()).collect::<Vec<_>>(),
        [
            "events.parquet",
            "manifest.json",
            "meters.parquet",
            "truth.parquet"
        ]
    );
    assert!(
        a == files(&d.join("b/home")),
        "same seed must give identical bytes"
    );
    assert!(
        a[2] != files(&d.join("c/home"))[2],
        "another seed must give other meter data"
    );
    // No temporary folders are left beside the dataset.
    assert_eq!(std::fs::read_dir(d.join("a")).unwrap().count(), 1);
}

#[test]
fn csv_format_writes_the_same_tables() {
    let d = scratch("csv");
    let p = write(&d, "home.toml", BASE);
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        d.join("out").to_str().unwrap(),
        "--format",
        "csv",
        "--length",
        "1d",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let meters = std::fs::read_to_string(d.join("out/home/meters.csv")).unwrap();
    let mut lines = meters.lines();
    assert_eq!(lines.next().unwrap(), "time,l1_p_w,l1_q_var,l1_v_v,l1_i_a,l2_p_w,l2_q_var,l2_v_v,l2_i_a,n_i_a,total_p_w,total_q_var");
    assert!(lines
        .next()
        .unwrap()
        .starts_with("2027-03-13T00:00:00.000-06:00,"));
    assert_eq!(meters.lines().count(), 1 + 8640);
}

#[test]
fn validate_prints_figures_and_the_caution() {
    let d = scratch("validate");
    let p = write(&d, "home.toml", BASE);
    let o = run(&["validate", p.to_str().unwrap()]);
    assert!(o.status.success(), "{}", stderr(&o));
    let s = String::from_utf8_lossy(&o.stdout);
    for needle in [
        "fridge",
        "washer",
        "tv",
        "kWh/day",
        "coincident peak",
        "not an inspection",
        "licensed electrician",
    ] {
        assert!(s.contains(needle), "`{needle}` missing from\n{s}");
    }
    assert!(!d.join("out").exists(), "validate writes nothing");
}

#[test]
fn solver_check_opens_and_verifies_a_written_dataset() {
    let d = scratch("solver-check");
    let p = write(&d, "home.toml", BASE);
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        d.join("out").to_str().unwrap(),
        "--length",
        "6h",
    ]);
    assert!(o.status.success(), "{}", stderr(&o));
    let ds = solver_check::Dataset::open(&d.join("out/home")).unwrap();
    assert_eq!(ds.rows, 6 * 360);
    assert_eq!(ds.lines, ["l1", "l2"]);
    assert_eq!(
        ds.appliances
            .iter()
            .map(|a| a.id.as_str())
            .collect::<Vec<_>>(),
        ["fridge", "washer", "tv"]
    );
    ds.verify().unwrap();
    // A changed file is caught.
    let truth = d.join("out/home/truth.parquet");
    let mut bytes = std::fs::read(&truth).unwrap();
    let mid = bytes.len() / 2;
    bytes[mid] ^= 0xff;
    std::fs::write(&truth, bytes).unwrap();
    let e = ds.verify().unwrap_err();
    assert!(e.to_string().contains("sha256"), "{e}");
    assert!(e.to_string().contains("truth.parquet"), "{e}");
}
