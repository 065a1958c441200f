//! `manifest.json`: what a reader needs to trust and use the dataset without
//! the scenario: the resolved scenario, supply, appliances with their nominal
//! per-conductor split, meter settings, faults, files with row counts and
//! sha256, and a summary.

use super::schema::Col;
use super::tables::Tables;
use crate::electrical::split::state_split;
use crate::scenario::{Appliance, Behaviour, Role, Scenario, Wiring};
use crate::simulate::SimulationRecord;
use serde_json::{json, Map, Value};
use sha2::{Digest, Sha256};
use solver_check::contract::{line_name, DATASET_FORMAT, NEUTRAL_NAME};
use std::io::{self, Read};
use std::path::Path;

/// The sha256 of a file's bytes, in hex.
pub fn sha256_file(path: &Path) -> io::Result<String> {
    let mut f = std::fs::File::open(path)?;
    let mut h = Sha256::new();
    let mut buf = vec![0u8; 1 << 20];
    loop {
        let n = f.read(&mut buf)?;
        if n == 0 {
            break;
        }
        h.update(&buf[..n]);
    }
    Ok(h.finalize().iter().map(|b| format!("{b:02x}")).collect())
}

fn appliance_json(s: &Scenario, a: &Appliance, o: &SimulationRecord, k: usize) -> Value {
    let lines = a.lines();
    let states: Vec<Value> = a
        .states
        .iter()
        .map(|st| {
            let mut split = Map::new();
            for (x, p, q) in state_split(s, st) {
                if lines.contains(&x) {
                    split.insert(line_name(x), json!({ "p_w": p, "q_var": q }));
                }
            }
            json!({
                "name": st.name,
                "p_w": st.p_w(),
                "q_var": st.q_var(),
                "draws": st.draws.iter().map(|d| json!({ "wiring": d.wiring.name(), "p_w": d.p_w, "q_var": d.q_var, "load": d.load, "zip_p": d.zip_p, "zip_q": d.zip_q, "nominal_v": d.nominal_v })).collect::<Vec<_>>(),
                "per_conductor": split,
            })
        })
        .collect();
    json!({
        "id": a.id,
        "label": a.label,
        "template": a.template,
        "end_use": a.end_use,
        "behaviour": a.behaviour.name(),
        "wiring": a.wiring.name(),
        "connections": a.connections().iter().map(|c| c.name()).collect::<Vec<_>>(),
        "conductors": lines.iter().map(|&x| line_name(x)).collect::<Vec<_>>(),
        "line_to_line": a.connections().iter().any(|c| c.is_line_to_line() || *c == Wiring::ThreePhase),
        "on_threshold_w": a.on_threshold_w,
        "states": states,
        "energy_kwh": o.summary.app_energy_j[k] / 3.6e6,
        "peak_w": o.summary.app_peak_w[k],
    })
}

fn columns_json(cols: &[Col]) -> Value {
    Value::Array(
        cols.iter()
            .map(|c| json!({ "name": c.name, "unit": c.unit }))
            .collect(),
    )
}

/// A PV system or a battery: its appliance record with its role, its
/// parameters and, for a battery, its state-of-charge column.
fn generation_json(s: &Scenario, a: &Appliance, o: &SimulationRecord, k: usize) -> Value {
    let mut v = appliance_json(s, a, o, k);
    v["role"] = json!(a.role);
    v["model"] = match &a.behaviour {
        Behaviour::Sun(pv) => json!(pv),
        Behaviour::Storage(b) => json!(b),
        _ => Value::Null,
    };
    if a.role == Role::Storage {
        v["soc_column"] = json!(format!("{}_soc", a.id));
    }
    v
}

/// The faults of the scenario as records, with what the dropouts realised.
fn faults_json(s: &Scenario, tables: &Tables, o: &SimulationRecord) -> Value {
    let f = &s.faults;
    let mut v = Vec::new();
    for c in &f.ct {
        v.push(json!({ "kind": "ct", "conductor": line_name(c.line), "gain": c.gain, "phase_deg": c.phase_deg, "reversed": c.reversed, "clamped_on": c.on.map(line_name) }));
    }
    if let Some((a, b)) = f.swap {
        v.push(json!({ "kind": "swap", "conductors": [line_name(a), line_name(b)], "effect": "every column of one line appears under the other's name" }));
    }
    if let Some(x) = f.no_ct {
        v.push(json!({ "kind": "no_ct", "conductor": line_name(x), "effect": "P, Q and I of this line are null; totals lack it" }));
    }
    if let Some(d) = &f.dropouts {
        let lost: u64 = o.dropouts.iter().map(|g| g.1).sum();
        v.push(json!({
            "kind": "dropouts", "rate": d.rate, "length": d.length, "form": d.mode,
            "gaps": o.dropouts.len(), "rows_lost": lost, "share_lost": lost as f64 / s.intervals().max(1) as f64,
            "intervals": o.dropouts.iter().map(|&(r, n)| json!({ "first_row": r, "rows": n, "start_ms": tables.row_time_ms(r) })).collect::<Vec<_>>(),
        }));
    }
    if f.clock_offset_s != 0.0 || f.clock_drift != 0.0 {
        v.push(json!({ "kind": "clock", "offset_s": f.clock_offset_s, "drift": f.clock_drift, "effect": "meters.time = true time + offset + drift × elapsed; truth keeps the true time" }));
    }
    if f.register {
        v.push(json!({ "kind": "register", "effect": "cumulative energy per line, Wh, as the meter counts it (after CT faults)" }));
    }
    Value::Array(v)
}

#[allow(clippy::too_many_arguments)]
/// The manifest of the dataset written into `dir`: `files` are the tables
/// (paths relative to `dir`, with their rows), `waves` the waveform files
/// in `meta` (the manifest's own folder).
pub fn build(
    s: &Scenario,
    tables: &Tables,
    o: &SimulationRecord,
    card: &crate::difficulty::Difficulty,
    files: &[(String, u64)],
    waves: &[(String, Value)],
    dir: &Path,
    meta: &Path,
) -> io::Result<Value> {
    let lines = s.home.supply.lines();
    let mut file_map = Map::new();
    for (name, rows) in files {
        let path = dir.join(name);
        file_map.insert(name.clone(), json!({ "rows": rows, "bytes": std::fs::metadata(&path)?.len(), "sha256": sha256_file(&path)? }));
    }
    for (name, w) in waves {
        let path = meta.join(name);
        file_map.insert(name.clone(), json!({ "frames": w["frames"], "bytes": std::fs::metadata(&path)?.len(), "sha256": sha256_file(&path)? }));
    }
    let ll_v = match s.home.supply {
        crate::scenario::SupplyKind::SplitPhase => 2.0 * s.home.voltage_v,
        crate::scenario::SupplyKind::ThreePhase => 3f64.sqrt() * s.home.voltage_v,
        crate::scenario::SupplyKind::SinglePhase => s.home.voltage_v,
    };
    let days = s.run.length_s / 86400.0;
    // What the home's loads drew (appliances and unmetered loads; the PV's
    // and the battery's energy are under `generation`).
    let is_load = |k: usize| s.appliances.get(k).is_none_or(|a| a.role == Role::Load);
    let total_kwh: f64 = o
        .summary
        .app_energy_j
        .iter()
        .enumerate()
        .filter(|(k, _)| is_load(*k))
        .map(|(_, e)| e)
        .sum::<f64>()
        / 3.6e6;
    Ok(json!({
        "format": DATASET_FORMAT,
        "generator": { "name": "loadloom", "version": env!("CARGO_PKG_VERSION") },
        "seed": s.run.seed,
        "scenario": s,
        "supply": {
            "kind": s.home.supply.name(),
            "conductors": (0..lines).map(line_name).chain(std::iter::once(NEUTRAL_NAME.to_string())).collect::<Vec<_>>(),
            "voltage_ln_v": s.home.voltage_v,
            "voltage_ll_v": ll_v,
            "frequency_hz": s.home.frequency_hz,
            "service_a": s.home.service_a,
            "phase_angles_deg": s.home.supply.angles_deg(),
            "source_phasors_v": crate::electrical::nominal_phasors(&s.home)[..lines].iter().map(|e| [e.re, e.im]).collect::<Vec<_>>(),
            "voltage_unbalance": s.home.source.unbalance,
        },
        "time": {
            "timezone": s.home.timezone,
            "start_local": s.run.start_local,
            "start_utc_ms": s.run.start_utc_ms,
            "step_s": s.run.step_s,
            "interval_s": s.meter.interval_s,
            "rows": s.intervals(),
            "row_time": "start of the reporting interval",
        },
        "meter": s.meter,
        "faults": faults_json(s, tables, o),
        "waveforms": waves.iter().map(|(_, w)| w.clone()).collect::<Vec<_>>(),
        "appliances": s.appliances.iter().enumerate().filter(|(k, _)| is_load(*k)).map(|(k, a)| appliance_json(s, a, o, k)).collect::<Vec<_>>(),
        "generation": s.appliances.iter().enumerate().filter(|(k, _)| !is_load(*k)).map(|(k, a)| generation_json(s, a, o, k)).collect::<Vec<_>>(),
        "unmetered": s.unmetered.iter().enumerate().map(|(j, a)| {
            let k = s.appliances.len() + j;
            json!({ "id": a.id, "label": a.label, "behaviour": a.behaviour.name(), "connections": a.connections().iter().map(|c| c.name()).collect::<Vec<_>>(), "energy_kwh": o.summary.app_energy_j[k] / 3.6e6, "peak_w": o.summary.app_peak_w[k] })
        }).collect::<Vec<_>>(),
        "columns": {
            "meters": columns_json(&tables.meters),
            "truth": columns_json(&tables.truth),
            "events": columns_json(&tables.events),
        },
        "files": file_map,
        "summary": {
            "days": days,
            "energy_kwh": total_kwh,
            "energy_kwh_per_day": total_kwh / days,
            "line_to_line_energy_share": card.line_to_line_share,
            "unmetered_energy_share": card.unmetered_share,
            "difficulty": card.to_json(s),
            "conductor_energy_kwh": (0..lines).map(|x| (line_name(x), json!(o.summary.line_energy_j[x] / 3.6e6))).collect::<Map<_, _>>(),
            "conductor_peak_current_a": (0..lines).map(|x| (line_name(x), json!(o.summary.line_peak_a[x]))).chain(std::iter::once((NEUTRAL_NAME.to_string(), json!(o.summary.neutral_peak_a)))).collect::<Map<_, _>>(),
            "events": o.events.len(),
        },
    }))
}
