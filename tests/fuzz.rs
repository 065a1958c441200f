//! Seeded mutation fuzzing of the scenario and population languages
//! (issue 18), in process: every mutated demo scenario or population either
//! is refused with an error, or is accepted and then validated and simulated
//! (a short run) with only finite numbers in every table; never a panic,
//! never a hang (a watchdog aborts a case that runs over a minute).
//!
//! The mutations work on the text with their own scanning and their own
//! random numbers (SplitMix64, Steele, Lea & Flood 2014), sharing no code
//! with the decoder. 10 000 cases by default, on two threads;
//! `LOADLOOM_FUZZ_CASES=200000 cargo test --release --test fuzz` runs more,
//! `LOADLOOM_FUZZ_SEED` another seed.

use arrow_array::cast::AsArray;
use arrow_array::types::{Float32Type, Float64Type};
use arrow_array::{Array, RecordBatch};
use arrow_schema::DataType;
use loadloom::scenario::Scenario;
use solver_check::render::Render;
use std::panic::{catch_unwind, AssertUnwindSafe};
use std::path::{Path, PathBuf};
use std::sync::atomic::{AtomicU64, AtomicUsize, Ordering};
use std::sync::Mutex;
use std::time::{Duration, Instant};

const SCENARIOS: [(&str, &str); 4] = [
    (
        "split-phase-house.toml",
        include_str!("../scenarios/split-phase-house.toml"),
    ),
    (
        "three-phase-house.toml",
        include_str!("../scenarios/three-phase-house.toml"),
    ),
    (
        "apartment-208.toml",
        include_str!("../scenarios/apartment-208.toml"),
    ),
    (
        "solar-bungalow.toml",
        include_str!("../scenarios/solar-bungalow.toml"),
    ),
];
const POPULATION: &str = include_str!("../scenarios/fleet/mixed-street.toml");

/// Cases accepted by the decoder and simulated (the rest were refused).
static ACCEPTED: AtomicUsize = AtomicUsize::new(0);
/// Of those, cases with a section put in or mutated (weather, building, thermostat,
/// PV, battery): the sweep must reach that physics, not only its refusals.
static SECTIONS_ACCEPTED: AtomicUsize = AtomicUsize::new(0);
/// Cases given as bytes with an invalid UTF-8 sequence inserted.
static RAW: AtomicUsize = AtomicUsize::new(0);

/// SplitMix64: a tiny generator of our own, so the cases do not depend on
/// the random streams of the code under test.
struct Rng(u64);

impl Rng {
    fn next(&mut self) -> u64 {
        self.0 = self.0.wrapping_add(0x9E37_79B9_7F4A_7C15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xBF58_476D_1CE4_E5B9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94D0_49BB_1331_11EB);
        z ^ (z >> 31)
    }
    fn below(&mut self, n: usize) -> usize {
        (self.next() % n.max(1) as u64) as usize
    }
    fn pick<'a, T>(&mut self, items: &'a [T]) -> &'a T {
        &items[self.below(items.len())]
    }
}

const EXTREMES: [&str; 20] = [
    "1e308",
    "1e-320",
    "-1",
    "0",
    "-0",
    "1e30",
    "1e-30",
    "nan",
    "inf",
    "4294967296",
    "0.000001",
    "123456789012345678901234567890",
    "5e-324",
    "1.7976931348623157e308",
    "0.5",
    "2",
    "1e6",
    "999999",
    "1e-9",
    "65",
];
/// Values inside most ranges but far from the demo's: they reach the physics.
const ODD: [&str; 12] = [
    "0", "0.001", "0.01", "0.5", "1", "2", "10", "100", "1000", "1e4", "1e5", "0.2",
];
const UNITS: [&str; 21] = [
    "W", "kW", "V", "kV", "A", "s", "ms", "min", "h", "d", "Hz", "%", "ohm", "var", "K", "°C",
    "W/K", "MJ/K", "kWh", "deg", "m²",
];

/// Byte ranges of the quoted strings that start like a number (`"1.5 kW"`).
fn quantities(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    let mut i = 0;
    while i < b.len() {
        if b[i] == b'"' {
            let end = text[i + 1..].find('"').map(|j| i + 1 + j);
            let Some(end) = end else { break };
            let first = b.get(i + 1).copied().unwrap_or(b' ');
            if first.is_ascii_digit() || first == b'-' {
                out.push((i, end + 1));
            }
            i = end + 1;
        } else {
            i += 1;
        }
    }
    out
}

/// Byte ranges of bare numbers written after `= ` (`pf = 0.8`).
fn bare_numbers(text: &str) -> Vec<(usize, usize)> {
    let b = text.as_bytes();
    let mut out = Vec::new();
    for (i, w) in b.windows(2).enumerate() {
        if w == b"= " {
            let s = i + 2;
            let e = s + b[s..]
                .iter()
                .take_while(|c| c.is_ascii_digit() || matches!(c, b'.' | b'-' | b'e' | b'+'))
                .count();
            if e > s && b[s].is_ascii_digit() {
                out.push((s, e));
            }
        }
    }
    out
}

fn splice(text: &str, (s, e): (usize, usize), new: &str) -> String {
    format!("{}{new}{}", &text[..s], &text[e..])
}

/// Sections put in whole, replacing the demo's own where it has one (then often with one value
/// made extreme): the weather, the building and its thermostatic loads, PV
/// and a battery. Written out here from the README's language, not taken
/// from the decoder.
const SECTIONS: [&str; 9] = [
    "[weather]\nclimate = \"lakeshore\"\ndaily_swing = \"9 K\"\nspread = { winter = \"5.5 K\", summer = \"2.8 K\" }\npersistence = 0.7\n",
    "[weather]\nmonthly = [\"-4 °C\", \"-3 °C\", \"2 °C\", \"8 °C\", \"14 °C\", \"20 °C\", \"23 °C\", \"22 °C\", \"18 °C\", \"11 °C\", \"4 °C\", \"-2 °C\"]\ndaily_swing = \"9 K\"\n",
    "[weather]\nmean = \"9 °C\"\nswing = \"18 K\"\ncoldest = \"January\"\n",
    "[building]\nua = \"250 W/K\"\nmass = \"30 MJ/K\"\nair = \"3 MJ/K\"\ndirect = \"40 %\"\ncoupling = \"2500 W/K\"\nheating = \"20.5 °C\"\ncooling = \"24 °C\"\ndeadband = \"1 K\"\nsecond_stage = \"1 K\"\nsetback = { hours = \"23-6\", by = \"2 K\" }\ngains = \"80 %\"\naperture = \"1 m²\"\nglazing = [ { aperture = \"2 m²\", azimuth = \"135 deg\" }, { aperture = \"1 m²\", azimuth = \"0 deg\", tilt = \"30 deg\" } ]\n",
    "[[appliance]]\nid = \"added_heat_pump\"\nwiring = \"L1-L2\"\nload = \"motor\"\nbehaviour = \"thermostat\"\nrole = \"heat-pump\"\ncop = 3.6\nlow_capacity = \"62 %\"\ncooling_cop = 3.8\nlockout = \"-20 °C\"\ndefrost = { every = \"1 h\", length = \"5 min\" }\nstates = [ { name = \"heating\", power = \"2.8 kW\", pf = 0.95 }, { name = \"cooling\", power = \"2.4 kW\", pf = 0.95 } ]\n\n[[appliance]]\nid = \"added_blower\"\nwiring = \"L1-L2\"\nload = \"motor\"\nbehaviour = \"thermostat\"\nrole = \"blower\"\nstates = [ { name = \"running\", power = \"400 W\", pf = 0.8 } ]\n\n[[appliance]]\nid = \"added_strips\"\nwiring = \"L1-L2\"\nbehaviour = \"thermostat\"\nrole = \"backup\"\nstates = [ { name = \"heating\", power = \"7.5 kW\" } ]\n",
    "[[appliance]]\nid = \"added_baseboard\"\nwiring = \"L1-L2\"\nbehaviour = \"thermostat\"\nrole = \"resistance\"\nstates = [ { name = \"heating\", power = \"3 kW\" } ]\n",
    "[[appliance]]\nid = \"added_furnace\"\nwiring = \"L1-N\"\nload = \"motor\"\nbehaviour = \"thermostat\"\nrole = \"furnace\"\ncapacity = \"18 kW\"\nstates = [ { name = \"running\", power = \"500 W\", pf = 0.8 } ]\n\n[[appliance]]\nid = \"added_cooler\"\nwiring = \"L1-L2\"\nload = \"motor\"\nbehaviour = \"thermostat\"\nrole = \"air-conditioner\"\ncop = 3.2\nstates = [ { name = \"cooling\", power = \"3 kW\", pf = 0.9 } ]\n",
    "[pv]\ndc = \"7.2 kW\"\ninverter = \"6 kW\"\ntilt = \"30 deg\"\nazimuth = \"180 deg\"\nalbedo = 0.2\nlosses = \"14.08 %\"\nmodule = \"premium\"\nmount = \"rack\"\n",
    "[battery]\ncapacity = \"13.5 kWh\"\npower = \"5 kW\"\nefficiency = \"90 %\"\nreserve = \"10 %\"\ninitial = \"50 %\"\nresponse = \"2 s\"\n",
];

/// Whether a line is a table header (`[name]` or `[[name]]`), not an array
/// written across lines.
fn is_header(line: &str) -> bool {
    let inner = line.trim_start_matches('[').trim_end_matches(']');
    line.starts_with('[')
        && line.ends_with(']')
        && !inner.is_empty()
        && inner
            .chars()
            .all(|c| c.is_ascii_alphanumeric() || c == '_' || c == '.')
}

/// The byte span of the table `[name]` in `text`: its header line to the
/// next table header or the end.
fn table_span(text: &str, name: &str) -> Option<(usize, usize)> {
    let header = format!("[{name}]");
    let mut at = 0;
    let mut start = None;
    for line in text.split_inclusive('\n') {
        let bare = line.trim_end();
        if start.is_some() && is_header(bare) {
            return start.map(|s| (s, at));
        }
        if bare == header {
            start = Some(at);
        }
        at += line.len();
    }
    start.map(|s| (s, text.len()))
}

/// `text` with each table of `add` put in: a table the text already has is
/// replaced (a second `[weather]` would only be refused as a duplicate),
/// the rest (and every `[[appliance]]`) appended.
fn put_tables(text: &str, add: &str) -> String {
    let mut out = text.to_string();
    let mut appended = String::new();
    let mut chunks: Vec<String> = Vec::new();
    for line in add.split_inclusive('\n') {
        if is_header(line.trim_end()) || chunks.is_empty() {
            chunks.push(String::new());
        }
        chunks.last_mut().expect("pushed").push_str(line);
    }
    for chunk in chunks {
        let head = chunk.lines().next().unwrap_or("");
        let single = !head.starts_with("[[");
        let name = head.trim_start_matches('[').trim_end_matches(']');
        match table_span(&out, name).filter(|_| single) {
            Some(span) => out = splice(&out, span, &format!("{}\n", chunk.trim_end())),
            None => appended += &format!("\n{chunk}"),
        }
    }
    out + &appended
}

/// Puts in a section (the climate ones with a building and the other
/// climate parts most of the time, so the thermostat is reached), then
/// often makes one of its values extreme; or makes a value extreme in a
/// section the demo has.
fn mutate_section(text: &str, rng: &mut Rng) -> (String, String) {
    if rng.below(3) == 0 {
        if let Some(done) = mutate_own_section(text, rng) {
            return done;
        }
    }
    let k = rng.below(SECTIONS.len());
    let mut add = SECTIONS[k].to_string();
    if (3..=6).contains(&k) && rng.below(4) != 0 {
        add = format!("{}\n{}\n{add}", SECTIONS[rng.below(3)], SECTIONS[3]);
        if k == 3 {
            add += &format!("\n{}", SECTIONS[4 + rng.below(3)]);
        }
    }
    let mut what = format!("section {k} put in");
    if rng.below(2) == 0 {
        let (changed, w) = match rng.below(3) {
            0 | 1 => mutate_quantity_in(&add, rng),
            _ => mutate_type(&add, rng),
        };
        add = changed;
        what += &format!(", {w}");
    }
    // A PV array needs the home's place on the globe.
    let text = if k == 7 && !text.contains("latitude") {
        text.replacen(
            "[home]\n",
            "[home]\nlatitude = 44.6\nlongitude = -63.6\n",
            1,
        )
    } else {
        text.to_string()
    };
    (put_tables(&text, &add), what)
}

/// One value made extreme or of another type inside a `[weather]`,
/// `[building]`, `[pv]` or `[battery]` the demo has; None if it has none.
fn mutate_own_section(text: &str, rng: &mut Rng) -> Option<(String, String)> {
    let own: Vec<(&str, (usize, usize))> = ["weather", "building", "pv", "battery"]
        .into_iter()
        .filter_map(|n| table_span(text, n).map(|s| (n, s)))
        .collect();
    if own.is_empty() {
        return None;
    }
    let (name, span) = *rng.pick(&own);
    let table = &text[span.0..span.1];
    let (changed, w) = match rng.below(3) {
        0 | 1 => mutate_quantity_in(table, rng),
        _ => mutate_type(table, rng),
    };
    Some((
        splice(text, span, &changed),
        format!("section [{name}] of the demo, {w}"),
    ))
}

/// Values of another type, empty or enormous, for any `key = value` line.
const WRONG: [&str; 10] = [
    "\"text\"",
    "42",
    "true",
    "[1, 2]",
    "{ a = 1 }",
    "\"\"",
    "1979-05-27T07:32:00Z",
    "-0.0",
    "\"nan W\"",
    "[]",
];

/// Replaces the value of one `key = value` line by a value of another type,
/// or a string of 200 000 characters.
fn mutate_type(text: &str, rng: &mut Rng) -> (String, String) {
    let starts: Vec<usize> = text
        .match_indices(" = ")
        .map(|(i, m)| i + m.len())
        .collect();
    if starts.is_empty() {
        return (text.to_string(), "none".into());
    }
    let s = *rng.pick(&starts);
    let e = s + text[s..].find('\n').unwrap_or(text.len() - s);
    let new = if rng.below(8) == 0 {
        format!("\"{}\"", "x".repeat(200_000))
    } else {
        rng.pick(&WRONG).to_string()
    };
    let what = format!("{} -> {} chars of another type", &text[s..e], new.len());
    (splice(text, (s, e), &new), what)
}

/// One quoted quantity of `text` with an extreme or odd number.
fn mutate_quantity_in(text: &str, rng: &mut Rng) -> (String, String) {
    match quantities(text) {
        q if q.is_empty() => (text.to_string(), "none".into()),
        q => {
            let at = *rng.pick(&q);
            let unit = text[at.0 + 1..at.1 - 1].trim_start_matches(|c: char| {
                c.is_ascii_digit() || matches!(c, '.' | '-' | 'e' | '+' | ' ')
            });
            let unit = if rng.below(5) == 0 {
                rng.pick(&UNITS)
            } else {
                unit
            };
            let num = if rng.below(2) == 0 {
                rng.pick(&EXTREMES)
            } else {
                rng.pick(&ODD)
            };
            let new = format!("\"{num} {unit}\"");
            let what = format!("{} -> {new}", &text[at.0..at.1]);
            (splice(text, at, &new), what)
        }
    }
}

/// One mutation of `text`, and what it did.
fn mutate(text: &str, rng: &mut Rng) -> (String, String) {
    match rng.below(12) {
        0..=2 => mutate_quantity_in(text, rng),
        3 | 4 => match bare_numbers(text) {
            q if q.is_empty() => (text.to_string(), "none".into()),
            q => {
                let at = *rng.pick(&q);
                let new = if rng.below(2) == 0 {
                    *rng.pick(&EXTREMES)
                } else {
                    *rng.pick(&ODD)
                };
                let new = if new == "nan" || new == "inf" {
                    "+inf"
                } else {
                    new
                };
                (
                    splice(text, at, new),
                    format!("{} -> {new}", &text[at.0..at.1]),
                )
            }
        },
        5 => mutate_name(text, rng),
        6 => mutate_setting(text, rng),
        7 | 8 => mutate_section(text, rng),
        9 => mutate_type(text, rng),
        _ => mutate_lines(text, rng),
    }
}

fn mutate_name(text: &str, rng: &mut Rng) -> (String, String) {
    let starts: Vec<usize> = text
        .match_indices("id = \"")
        .chain(text.match_indices("name = \""))
        .map(|(i, m)| i + m.len())
        .collect();
    if starts.is_empty() {
        return (text.to_string(), "none".into());
    }
    let s = *rng.pick(&starts);
    let e = s + text[s..].find('"').unwrap_or(0);
    let old = &text[s..e];
    let new = match rng.below(6) {
        0 => "a".repeat(70_000),
        1 => format!("{old}{}", rng.pick(&["_l1", "_l2", "_l3", "_n"])),
        2 => rng.pick(&["unmetered", "total", "time"]).to_string(),
        3 => String::new(),
        4 => "a".repeat(65),
        _ => "kühl\u{202e}".into(),
    };
    let what = format!("name {old} -> {} chars", new.chars().count());
    (splice(text, (s, e), &new), what)
}

fn mutate_setting(text: &str, rng: &mut Rng) -> (String, String) {
    let line = *rng.pick(&[
        "step = \"10 ms\"",
        "step = \"100 ms\"",
        "start = \"2027-03-14T02:30\"",
        "start = \"2027-01-04T00:00+05:00\"",
        "start = \"9999-12-31T23:00\"",
        "timezone = \"Nowhere/Atlantis\"",
        "service = \"1 A\"",
        "source = { r = \"50 ohm\", x = \"50 ohm\" }",
        "source = { r = \"2 ohm\", x = \"1 ohm\" }",
        "voltage = \"1e-320 V\"",
        "library = \"nowhere\"",
    ]);
    let key = &line[..line.find(' ').unwrap_or(0) + 1];
    let out = match text.find(&format!("\n{key}")) {
        Some(i) => {
            let e = text[i + 1..].find('\n').map_or(text.len(), |j| i + 1 + j);
            splice(text, (i + 1, e), line)
        }
        None => text.replacen("[home]\n", &format!("[home]\n{line}\n"), 1),
    };
    (out, line.to_string())
}

fn mutate_lines(text: &str, rng: &mut Rng) -> (String, String) {
    let mut lines: Vec<&str> = text.lines().collect();
    let k = rng.below(lines.len());
    let what = match rng.below(4) {
        0 => {
            lines.remove(k);
            format!("delete line {}", k + 1)
        }
        1 => {
            lines.insert(k, lines[k]);
            format!("duplicate line {}", k + 1)
        }
        2 => {
            lines.truncate(k);
            format!("truncate at line {}", k + 1)
        }
        _ => {
            let j = rng.below(lines.len());
            lines.swap(k, j);
            format!("swap lines {} and {}", k + 1, j + 1)
        }
    };
    (lines.join("\n") + "\n", what)
}

/// The first non-finite valid float of a batch, as "column".
fn non_finite(batch: &RecordBatch) -> Option<String> {
    for (f, col) in batch.schema().fields().iter().zip(batch.columns()) {
        let bad = match col.data_type() {
            DataType::Float32 => {
                let a = col.as_primitive::<Float32Type>();
                (0..a.len()).any(|r| a.is_valid(r) && !a.value(r).is_finite())
            }
            DataType::Float64 => {
                let a = col.as_primitive::<Float64Type>();
                (0..a.len()).any(|r| a.is_valid(r) && !a.value(r).is_finite())
            }
            _ => false,
        };
        if bad {
            return Some(f.name().clone());
        }
    }
    None
}

/// Validates and simulates an accepted scenario over at most ten minutes,
/// checking every table it would write. Err: what was not finite.
fn exercise(mut s: Scenario) -> Result<(), String> {
    ACCEPTED.fetch_add(1, Ordering::Relaxed);
    let per = s.meter.interval_s;
    s.run.length_s = per * (600.0 / per).floor().max(1.0);
    s.waveforms.windows.clear();
    let preview = loadloom::summary::Preview::of(&s);
    let _ = preview.to_text();
    let _ = preview.to_json();
    let tl = loadloom::loads::timelines(&s, s.run.steps());
    let tables = loadloom::dataset::tables::Tables::new(&s);
    let mut bad = None;
    let outcome = loadloom::simulate::simulate(&s, &tl, s.intervals(), 4096, |c| {
        for b in tables.batches(c) {
            bad = bad.take().or_else(|| non_finite(&b));
        }
        Ok::<(), ()>(())
    });
    let Ok(outcome) = outcome else {
        return Ok(()); // stopped: the voltage solve had no plausible answer
    };
    let events = tables.events_batch(&s, &outcome.events, s.run.step_s);
    match bad.or_else(|| non_finite(&events)) {
        Some(col) => Err(format!("non-finite value in `{col}`")),
        None => Ok(()),
    }
}

/// One case: a mutated scenario, or (one case in eight) a mutated population.
fn case(seed: u64, index: u64, dir: &Path) -> Result<(), String> {
    let mut rng = Rng(seed ^ index.wrapping_mul(0xA24B_AED4_963E_E407));
    let population = rng.below(8) == 0;
    let (name, base) = if population {
        (
            "street.toml",
            POPULATION.replace("length = \"1 d\"", "length = \"1 h\""),
        )
    } else {
        let (n, t) = *rng.pick(&SCENARIOS);
        (n, t.replacen("length = \"7 d\"", "length = \"1 h\"", 1))
    };
    let mut text = base;
    let mut what = vec![name.to_string()];
    for _ in 0..1 + rng.below(3) {
        let (t, w) = mutate(&text, &mut rng);
        text = t;
        what.push(w);
    }
    let sectioned = what.iter().any(|w| w.starts_with("section"));
    // One scenario in sixteen as bytes with an invalid UTF-8 sequence.
    let raw = (!population && rng.below(16) == 0).then(|| {
        let mut bytes = text.clone().into_bytes();
        let at = rng.below(bytes.len());
        bytes.insert(at, 0xff);
        what.push(format!("byte 0xff at {at}"));
        bytes
    });
    let run = || -> Result<(), String> {
        if population {
            let p = dir.join(format!("street-{index}.toml"));
            std::fs::write(&p, &text).map_err(|e| e.to_string())?;
            let pop = loadloom::fleet::load(&p);
            let _ = std::fs::remove_file(&p);
            match pop.map(|pop| pop.home(index % 5)) {
                Ok(Ok((s, _))) => exercise(s),
                _ => Ok(()),
            }
        } else {
            let loaded = match &raw {
                Some(bytes) => {
                    RAW.fetch_add(1, Ordering::Relaxed);
                    let p = dir.join(format!("raw-{index}.toml"));
                    std::fs::write(&p, bytes).map_err(|e| e.to_string())?;
                    let s = loadloom::scenario::load(&p);
                    let _ = std::fs::remove_file(&p);
                    s
                }
                None => loadloom::scenario::load_str(&dir.join(name), text.clone()),
            };
            match loaded {
                Ok(s) => {
                    if sectioned {
                        SECTIONS_ACCEPTED.fetch_add(1, Ordering::Relaxed);
                    }
                    exercise(s)
                }
                Err(_) => Ok(()),
            }
        }
    };
    match catch_unwind(AssertUnwindSafe(run)) {
        Ok(r) => r.map_err(|m| format!("case {index} {what:?}: {m}")),
        Err(p) => {
            let msg = p
                .downcast_ref::<String>()
                .cloned()
                .or_else(|| p.downcast_ref::<&str>().map(|s| s.to_string()))
                .unwrap_or_default();
            Err(format!("case {index} {what:?}: panic: {msg}"))
        }
    }
}

fn env_u64(key: &str, default: u64) -> u64 {
    std::env::var(key)
        .ok()
        .and_then(|v| v.parse().ok())
        .unwrap_or(default)
}

#[test]
fn mutated_scenarios_and_populations_never_panic_hang_or_write_non_finite_numbers() {
    let cases = env_u64("LOADLOOM_FUZZ_CASES", 10_000);
    let seed = env_u64("LOADLOOM_FUZZ_SEED", 18);
    let dir: PathBuf = std::env::temp_dir().join(format!("loadloom-fuzz-{}", std::process::id()));
    std::fs::create_dir_all(&dir).unwrap();
    // Panics are caught and reported below; their default messages would
    // drown the report.
    std::panic::set_hook(Box::new(|_| {}));
    let next = AtomicU64::new(0);
    let started = Instant::now();
    let running: Vec<(AtomicU64, AtomicU64)> = (0..2)
        .map(|_| (AtomicU64::new(u64::MAX), AtomicU64::new(0)))
        .collect();
    let failures = Mutex::new(Vec::new());
    let done = AtomicUsize::new(0);
    std::thread::scope(|sc| {
        for (w, slot) in running.iter().enumerate() {
            let (next, failures, dir, done) = (&next, &failures, &dir, &done);
            sc.spawn(move || {
                loop {
                    let i = next.fetch_add(1, Ordering::Relaxed);
                    if i >= cases {
                        break;
                    }
                    slot.1
                        .store(started.elapsed().as_millis() as u64, Ordering::Relaxed);
                    slot.0.store(i, Ordering::Relaxed);
                    if let Err(m) = case(seed, i, dir) {
                        failures.lock().unwrap().push(m);
                    }
                }
                slot.0.store(u64::MAX, Ordering::Relaxed);
                done.fetch_add(1, Ordering::Relaxed);
                let _ = w;
            });
        }
        // The watchdog: a case running over a minute is a hang.
        sc.spawn(|| {
            while done.load(Ordering::Relaxed) < running.len() {
                std::thread::sleep(Duration::from_millis(200));
                let now = started.elapsed().as_millis() as u64;
                for slot in &running {
                    let i = slot.0.load(Ordering::Relaxed);
                    if i != u64::MAX && now.saturating_sub(slot.1.load(Ordering::Relaxed)) > 60_000
                    {
                        eprintln!("fuzz case {i} (seed {seed}) hangs: over a minute");
                        std::process::abort();
                    }
                }
            }
        });
    });
    let _ = std::panic::take_hook();
    let _ = std::fs::remove_dir_all(&dir);
    let failures = failures.into_inner().unwrap();
    let sectioned = SECTIONS_ACCEPTED.load(Ordering::Relaxed);
    eprintln!(
        "fuzz: {cases} cases (seed {seed}) in {:.1} s, {} accepted and simulated ({sectioned} with a section put in or mutated), {} as invalid UTF-8 bytes, {} failures",
        started.elapsed().as_secs_f64(),
        ACCEPTED.load(Ordering::Relaxed),
        RAW.load(Ordering::Relaxed),
        failures.len()
    );
    // The sections put in or mutated must reach the simulation in a share of the
    // cases, or the sweep would only test their refusals.
    assert!(
        sectioned as u64 >= cases / 100,
        "only {sectioned} of {cases} cases simulated a section put in or mutated"
    );
    assert!(
        failures.is_empty(),
        "{}",
        failures[..failures.len().min(10)].join("\n")
    );
}
