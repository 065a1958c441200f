//! Hostile input (issue 18): extreme numbers, absurd sizes and names that
//! would make two columns read alike. Each must end in exit status 2 with
//! the file and line named, in `validate`, `validate --quiet` and `run`
//! alike, and leave nothing behind; never a panic (exit 101) or a hang.

use std::path::{Path, PathBuf};
use std::process::Output;

mod common;
use common::bin;

fn scratch(name: &str) -> PathBuf {
    common::scratch("hostile", name)
}

/// A small home; the tests below replace one piece of it.
const BASE: &str = r#"
[home]
supply = "split-phase"
voltage = "120 V"
service = "200 A"
timezone = "America/Chicago"

[run]
start = "2027-03-10T00:00"
length = "1 h"
step = "1 s"
seed = 5

[meter]
interval = "10 s"

[[appliance]]
id = "fridge"
wiring = "L1-N"
behaviour = "cycle"
load = "motor"
states = [
  { name = "idle", power = "3 W", dwell = { median = "25 min", spread = 0.3 } },
  { name = "cooling", power = "110 W", pf = 0.8, dwell = { median = "12 min", spread = 0.2 } },
]

[[appliance]]
id = "heater"
wiring = "L1-L2"
behaviour = "steady"
jitter = 0.01
every = "1 min"
states = [ { name = "on", power = "1.5 kW", load = "resistive", rated = "240 V" } ]
"#;

fn run(args: &[&str]) -> Output {
    bin().args(args).output().unwrap()
}

fn line_of(text: &str, needle: &str) -> usize {
    text.lines().position(|l| l.contains(needle)).unwrap() + 1
}

/// `BASE` with `from` replaced by `to` must be refused with exit 2 by
/// `validate`, `validate --quiet` and `run`, naming the line of `to` and
/// saying `needle`; `run` leaves nothing behind.
fn assert_refused(name: &str, from: &str, to: &str, needle: &str) {
    assert_refused_in(BASE, name, from, to, needle)
}

/// [`assert_refused`] on another base scenario.
fn assert_refused_in(base: &str, name: &str, from: &str, to: &str, needle: &str) {
    assert!(base.contains(from), "{name}: {from} not in the base");
    let text = base.replacen(from, to, 1);
    let d = scratch(name);
    let p = d.join("home.toml");
    std::fs::write(&p, &text).unwrap();
    let place = format!("home.toml:{}:", line_of(&text, to.lines().next().unwrap()));
    let out = d.join("out");
    let path = p.to_str().unwrap();
    for args in [
        vec!["validate", path],
        vec!["validate", "--quiet", path],
        vec!["run", path, "--out", out.to_str().unwrap()],
    ] {
        let o = run(&args);
        let e = String::from_utf8_lossy(&o.stderr);
        assert_eq!(o.status.code(), Some(2), "{name}: {args:?}: {e}");
        if args.contains(&"--quiet") {
            continue;
        }
        assert!(e.contains(&place), "{name}: {place} not named in\n{e}");
        assert!(e.contains(needle), "{name}: `{needle}` not in\n{e}");
    }
    let left = std::fs::read_dir(&out).map(|r| r.count()).unwrap_or(0);
    assert_eq!(left, 0, "{name}: output left behind");
    let _ = std::fs::remove_dir_all(&d);
}

/// Numbers out of range: (case, text replaced, replacement, what the error says).
const EXTREME_NUMBERS: &[(&str, &str, &str, &str)] = &[
    ("volt-huge", "\"120 V\"", "\"1e308 V\"", "outside the range"),
    (
        "volt-tiny",
        "\"120 V\"",
        "\"1e-320 V\"",
        "outside the range",
    ),
    (
        "volt-edge",
        "\"120 V\"",
        "\"1001 V\"",
        "outside 50 … 1000 V",
    ),
    ("volt-low", "\"120 V\"", "\"49 V\"", "outside 50 … 1000 V"),
    (
        "rated-tiny",
        "\"240 V\"",
        "\"1e-320 V\"",
        "outside the range",
    ),
    ("rated-low", "\"240 V\"", "\"20 V\"", "outside 50 … 2000 V"),
    (
        "power-huge",
        "\"1.5 kW\"",
        "\"1e308 W\"",
        "outside the range",
    ),
    (
        "power-overflow",
        "\"1.5 kW\"",
        "\"1e308 kW\"",
        "outside the range",
    ),
    ("pf-tiny", "pf = 0.8", "pf = 1e-320", "outside the range"),
    ("pf-low", "pf = 0.8", "pf = 0.01", "outside 0.05 … 1"),
    (
        "spread-huge",
        "spread = 0.3",
        "spread = 1e5",
        "spread must be",
    ),
    (
        "service-tiny",
        "\"200 A\"",
        "\"1e-320 A\"",
        "outside the range",
    ),
    (
        "service-huge",
        "\"200 A\"",
        "\"20000 A\"",
        "outside 1 … 10000 A",
    ),
    (
        "step-tiny",
        "step = \"1 s\"",
        "step = \"1e-30 s\"",
        "outside the range",
    ),
    (
        "step-10ms",
        "step = \"1 s\"",
        "step = \"10 ms\"",
        "from 100 ms to 1 min",
    ),
    ("length-huge", "\"1 h\"", "\"1e30 h\"", "outside the range"),
    (
        "dwell-over-a-year",
        "median = \"25 min\"",
        "median = \"367 d\"",
        "at most 366 d",
    ),
    (
        "every-over-a-year",
        "every = \"1 min\"",
        "every = \"400 d\"",
        "at most 366 d",
    ),
    (
        "jitter-huge",
        "jitter = 0.01",
        "jitter = 1e300",
        "outside the range",
    ),
];

#[test]
fn extreme_numbers_are_refused_with_their_place() {
    for &(name, from, to, needle) in EXTREME_NUMBERS {
        assert_refused(name, from, to, needle);
    }
}

#[test]
fn the_edges_of_the_ranges_are_accepted() {
    let d = scratch("edges");
    let text = BASE
        .replace("\"120 V\"", "\"50 V\"")
        .replace("step = \"1 s\"", "step = \"100 ms\"")
        .replace("pf = 0.8", "pf = 0.05")
        .replace("\"200 A\"", "\"10000 A\"")
        .replace("median = \"25 min\"", "median = \"366 d\"");
    let p = d.join("home.toml");
    std::fs::write(&p, text).unwrap();
    let o = run(&["validate", "--quiet", p.to_str().unwrap()]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn long_ids_and_state_names_are_refused() {
    let long = "a".repeat(70_000);
    assert_refused(
        "long-id",
        "id = \"fridge\"",
        &format!("id = \"{long}\""),
        "at most 64 characters",
    );
    assert_refused(
        "long-state",
        "name = \"idle\"",
        &format!("name = \"{}\"", "b".repeat(65)),
        "1 … 64 characters",
    );
}

#[test]
fn ids_that_read_as_a_conductor_or_a_column_are_refused() {
    for (id, needle) in [
        ("standby_l1", "ends like a conductor (_l1)"),
        ("fridge_l3", "ends like a conductor (_l3)"),
        ("pump_n", "ends like a conductor (_n)"),
        ("unmetered", "reserved"),
        ("total", "reserved"),
        ("time", "reserved"),
    ] {
        assert_refused(
            &format!("id-{id}"),
            "id = \"fridge\"",
            &format!("id = \"{id}\""),
            needle,
        );
    }
}

#[test]
fn the_demo_scenarios_have_no_conductor_like_ids() {
    let root = Path::new(env!("CARGO_MANIFEST_DIR")).join("scenarios");
    for f in std::fs::read_dir(&root).unwrap() {
        let p = f.unwrap().path();
        if p.extension().is_some_and(|e| e == "toml") {
            let o = run(&["validate", "--quiet", p.to_str().unwrap()]);
            assert_eq!(o.status.code(), Some(0), "{}", p.display());
        }
    }
}

/// Runs loadloom with `args`, asserting exit 2 within 20 s (a FIFO would
/// block a reader forever); returns its stderr.
fn refused_quickly_with(args: &[&str]) -> String {
    let mut child = bin()
        .args(args)
        .stderr(std::process::Stdio::piped())
        .spawn()
        .unwrap();
    let start = std::time::Instant::now();
    while child.try_wait().unwrap().is_none() {
        if start.elapsed().as_secs() > 20 {
            child.kill().unwrap();
            panic!("{args:?} hangs");
        }
        std::thread::sleep(std::time::Duration::from_millis(20));
    }
    let o = child.wait_with_output().unwrap();
    assert_eq!(o.status.code(), Some(2), "{args:?}");
    String::from_utf8_lossy(&o.stderr).to_string()
}

/// `validate PATH`, refused at once.
fn refused_quickly(path: &Path) -> String {
    refused_quickly_with(&["validate", path.to_str().unwrap()])
}

/// Makes a FIFO at `path`.
fn mkfifo(path: &Path) {
    let c = std::ffi::CString::new(path.to_str().unwrap()).unwrap();
    // SAFETY: a valid NUL-terminated path.
    assert_eq!(unsafe { libc::mkfifo(c.as_ptr(), 0o600) }, 0);
}

#[test]
fn absurd_files_fail_fast() {
    let d = scratch("files");
    // A FIFO: opening it for reading would wait for a writer forever.
    let fifo = d.join("pipe.toml");
    mkfifo(&fifo);
    assert!(refused_quickly(&fifo).contains("not a regular file"));
    assert!(refused_quickly(Path::new("/dev/zero")).contains("not a regular file"));
    assert!(refused_quickly(&d).contains("not a regular file"));
    // Larger than 4 MiB: refused before it is parsed.
    let big = d.join("big.toml");
    let pad = format!("{BASE}\n{}", "# padding\n".repeat(500_000));
    std::fs::write(&big, pad).unwrap();
    assert!(refused_quickly(&big).contains("larger than 4 MiB"));
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn a_library_that_is_not_a_folder_is_refused() {
    let d = scratch("library");
    std::fs::write(d.join("lib.toml"), "").unwrap();
    for (value, needle) in [
        ("nowhere", "does not exist"),
        ("lib.toml", "is not a folder"),
    ] {
        let text = format!("library = \"{value}\"\n{BASE}");
        let p = d.join("home.toml");
        std::fs::write(&p, &text).unwrap();
        let e = refused_quickly(&p);
        assert!(e.contains(needle) && e.contains("home.toml:1:"), "{e}");
    }
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn invalid_utf8_is_reported_with_line_and_column() {
    let d = scratch("utf8");
    let p = d.join("home.toml");
    let mut bytes = BASE.as_bytes().to_vec();
    // `id = "fr<0xff>idge"`: line of the fridge's id, column 9 (after `id = "fr`).
    let at = BASE.find("id = \"fridge\"").unwrap() + "id = \"fr".len();
    bytes.insert(at, 0xff);
    std::fs::write(&p, bytes).unwrap();
    let e = refused_quickly(&p);
    let line = line_of(BASE, "id = \"fridge\"");
    assert!(e.contains(&format!("home.toml:{line}:9")), "{e}");
    assert!(e.contains("not valid UTF-8"), "{e}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn a_voltage_solve_without_a_plausible_answer_stops_with_its_place() {
    // 50 ohm in each line: the fixed point of V(I) and I(V) oscillates once
    // the fridge cools (before: NaN and kV-sized voltages with exit 0).
    let line = "source = { r = \"50 ohm\", x = \"50 ohm\" }";
    let text = BASE.replacen(
        "timezone = \"America/Chicago\"",
        &format!("timezone = \"America/Chicago\"\n{line}"),
        1,
    );
    let d = scratch("diverge");
    let p = d.join("home.toml");
    std::fs::write(&p, &text).unwrap();
    let out = d.join("out");
    let o = run(&["run", p.to_str().unwrap(), "--out", out.to_str().unwrap()]);
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(
        e.contains(&format!("home.toml:{}:", line_of(&text, line))),
        "{e}"
    );
    assert!(e.contains("lower the source impedance to at most"), "{e}");
    assert_eq!(std::fs::read_dir(&out).map(|r| r.count()).unwrap_or(0), 0);
    // A plausible impedance still runs.
    let ok = text.replace("50 ohm", "0.1 ohm");
    std::fs::write(&p, ok).unwrap();
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        out.to_str().unwrap(),
        "--quiet",
    ]);
    assert_eq!(
        o.status.code(),
        Some(0),
        "{}",
        String::from_utf8_lossy(&o.stderr)
    );
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn validate_warns_when_the_coincident_peak_exceeds_the_service() {
    let d = scratch("service");
    let p = d.join("home.toml");
    // The 1.5 kW heater across 240 V draws 6.25 A per leg: over a 5 A service.
    std::fs::write(&p, BASE.replace("\"200 A\"", "\"5 A\"")).unwrap();
    let o = run(&["validate", p.to_str().unwrap()]);
    let text = String::from_utf8_lossy(&o.stdout);
    assert_eq!(o.status.code(), Some(0));
    assert!(
        text.contains("warning: L1's coincident peak") && text.contains("exceeds the 5 A service"),
        "{text}"
    );
    let o = run(&["validate", "--json", p.to_str().unwrap()]);
    let v: serde_json::Value = serde_json::from_slice(&o.stdout).unwrap();
    assert_eq!(v["warnings"].as_array().unwrap().len(), 2);
    std::fs::write(&p, BASE).unwrap();
    let o = run(&["validate", p.to_str().unwrap()]);
    assert!(!String::from_utf8_lossy(&o.stdout).contains("warning:"));
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn a_start_with_an_offset_or_in_a_clock_change_is_refused() {
    let from = "start = \"2027-03-10T00:00\"";
    for (name, to, needle) in [
        (
            "offset",
            "start = \"2027-03-10T00:00+05:00\"",
            "carries a UTC offset",
        ),
        (
            "zulu",
            "start = \"2027-03-10T00:00Z\"",
            "carries a UTC offset",
        ),
        (
            "toml-offset",
            "start = 2027-03-10T00:00:00-06:00",
            "carries a UTC offset",
        ),
        // America/Chicago skips 02:00-03:00 on 14 March 2027 and repeats
        // 01:00-02:00 on 7 November 2027 (US rule since 2007, from memory).
        ("gap", "start = \"2027-03-14T02:30\"", "daylight-saving gap"),
        ("fold", "start = \"2027-11-07T01:30\"", "repeat it"),
    ] {
        assert_refused(name, from, to, needle);
    }
}

#[test]
fn a_declaration_that_is_a_fifo_is_refused_at_once() {
    let d = scratch("declared");
    let fifo = d.join("declared.toml");
    mkfifo(&fifo);
    let e = refused_quickly_with(&[
        "audit",
        d.to_str().unwrap(),
        "--declared",
        fifo.to_str().unwrap(),
    ]);
    assert!(e.contains("not a regular file"), "{e}");
    let _ = std::fs::remove_dir_all(&d);
}

#[test]
fn a_failed_write_names_the_folder_and_keeps_its_cause() {
    let d = scratch("write-fails");
    let p = d.join("home.toml");
    std::fs::write(&p, BASE).unwrap();
    let blocker = d.join("out");
    std::fs::write(&blocker, "").unwrap();
    let o = run(&[
        "run",
        p.to_str().unwrap(),
        "--out",
        blocker.to_str().unwrap(),
    ]);
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(1), "{e}");
    assert!(e.contains(&format!("--> {}", blocker.display())), "{e}");
    assert!(e.contains("= cause: ") && e.contains("os error"), "{e}");
    let _ = std::fs::remove_dir_all(&d);
}

/// `BASE` with weather, a building and a thermostatic heater.
fn heated() -> String {
    BASE.replace(
        "[meter]",
        r#"[weather]
climate = "lakeshore"

[building]
ua = "250 W/K"
mass = "30 MJ/K"
heating = "20 °C"

[[appliance]]
id = "baseboards"
wiring = "L1-L2"
behaviour = "thermostat"
role = "resistance"
states = [ { name = "heating", power = "6 kW" } ]

[meter]"#,
    )
}

#[test]
fn weather_and_building_keys_are_checked_with_their_place() {
    let base = heated();
    for (name, from, to, needle) in [
        (
            "ua-huge",
            "\"250 W/K\"",
            "\"1e308 W/K\"",
            "outside the range",
        ),
        (
            "ua-unit",
            "\"250 W/K\"",
            "\"250 W\"",
            "not a unit of heat loss",
        ),
        ("mass-zero", "\"30 MJ/K\"", "\"0 J/K\"", "greater than zero"),
        ("setpoint-hot", "\"20 °C\"", "\"75 °C\"", "outside -90 … 60"),
        (
            "climate-unknown",
            "\"lakeshore\"",
            "\"atlantis\"",
            "no climate named",
        ),
        (
            "role-unknown",
            "\"resistance\"",
            "\"geyser\"",
            "unknown role",
        ),
        (
            "state-unknown",
            "name = \"heating\"",
            "name = \"warming\"",
            "has no state",
        ),
        (
            "weather-file-missing",
            "climate = \"lakeshore\"",
            "file = \"nowhere.csv\"",
            "nowhere.csv",
        ),
    ] {
        assert_refused_in(&base, name, from, to, needle);
    }
}

#[test]
fn a_thermostat_without_weather_is_refused() {
    let text = heated().replace("[weather]\nclimate = \"lakeshore\"\n", "");
    let d = scratch("no-weather");
    let p = d.join("home.toml");
    std::fs::write(&p, &text).unwrap();
    let o = run(&["validate", p.to_str().unwrap()]);
    let e = String::from_utf8_lossy(&o.stderr);
    assert_eq!(o.status.code(), Some(2), "{e}");
    assert!(e.contains("no [weather] section"), "{e}");
    let _ = std::fs::remove_dir_all(&d);
}
