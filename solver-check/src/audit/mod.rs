//! `loadloom audit`: an installer's declared wiring and metering checked
//! against what the conductors show, with no training data, and the loading
//! picture of the lines against the service.
//!
//! - [`decl`]: the declaration in the audit's terms (and the line split of
//!   a load, the two-wattmeter relation);
//! - [`events`]: step changes found on all channels together;
//! - [`check`]: metering hypotheses, appliance wirings, undeclared loads;
//! - loading: peak and demand current per line, imbalance, neutral.
//!
//! An analysis of data, not an inspection: see [`CAUTION`].

pub mod check;
pub mod decl;
pub mod events;
mod loading;
pub mod running;

pub use loading::*;

use crate::contract::{columns, line_label, line_name, AUDIT_FORMAT};
use crate::dataset::Dataset;
use crate::diagnostic::Error;
use crate::render::Render;
use crate::stream::{header, Header};
use check::{Outcome, Thresholds};
use decl::Declared;
use serde_json::{json, Value};
use std::path::{Path, PathBuf};

/// The meters file of a dataset folder, or the path itself when it is a file.
pub fn meters_file(data: &Path) -> Result<PathBuf, Error> {
    if data.is_file() {
        return Ok(data.to_path_buf());
    }
    ["meters.parquet", "meters.csv"]
        .iter()
        .map(|f| data.join(f))
        .find(|p| p.is_file())
        .ok_or_else(|| {
            Error::file(
                data,
                "no meters.parquet or meters.csv here",
                "give a dataset folder or a meters file in the dataset format",
            )
        })
}

/// What the audit concluded, with the loading picture.
pub struct Audit {
    /// The dataset folder or meters file audited, as given.
    pub data: String,
    /// The declaration file, as given.
    pub declared_file: String,
    /// The meters' reporting interval, s.
    pub interval_s: f64,
    /// Meter rows read.
    pub rows: u64,
    /// The loading picture.
    pub loading: Loading,
    /// The checks' findings and verdicts.
    pub outcome: Outcome,
    /// The declaration as read.
    pub declared: Declared,
    /// The cut-offs the checks decided by.
    pub thresholds: Thresholds,
}

/// Line channels in a meters table: `l1`, `l2`, … in order, as long as
/// their `_p_w` column exists.
fn channels(h: &Header) -> Vec<String> {
    (0..3)
        .map(line_name)
        .take_while(|l| h.has(&columns::p(l)))
        .collect()
}

/// The declaration must describe the channels the data has.
fn fit(d: &Declared, h: &Header, have: &[String]) -> Result<(), Error> {
    let n = d.supply.lines();
    let want: Vec<String> = (0..n)
        .filter(|&c| d.channels[c].conductor.is_some())
        .map(line_name)
        .collect();
    let missing: Vec<&String> = want.iter().filter(|w| !have.contains(w)).collect();
    if missing.is_empty() && have.len() <= n {
        return Ok(());
    }
    let lines: Vec<String> = (0..n).map(line_label).collect();
    let help = if have.len() > n {
        format!(
            "declare the supply the data was measured on: {} channels need a supply with {} lines",
            have.len(),
            have.len()
        )
    } else {
        format!(
            "declare the supply the data was measured on, or declare the channel{} without a CT under [metering], e.g. {} = {{ conductor = \"none\" }}",
            if missing.len() > 1 { "s" } else { "" },
            missing[0]
        )
    };
    let message = format!(
        "the declaration does not fit the data: it has a {} supply, {}, with a CT on {}; {} has channel{} {}",
        d.supply.kind.name(),
        lines.join(", "),
        if want.is_empty() { "none".into() } else { want.join(", ") },
        h.file.display(),
        if have.len() == 1 { "" } else { "s" },
        if have.is_empty() { "none".into() } else { have.join(", ") },
    );
    Err(Error::at_place(&d.supply_at, "home.supply", message, help))
}

/// The meters table of `data`, with naive times read in the declared zone.
fn meters_header(data: &Path, d: &Declared) -> Result<Header, Error> {
    let file = meters_file(data)?;
    let mut h = header(&file)?;
    h.naive_zone = Some(d.timezone.clone());
    Ok(h)
}

/// The line power columns a meters table must have, named in errors.
fn no_line_columns(h: &Header) -> Error {
    let names: Vec<&str> = h.names().collect();
    let near: Vec<String> = names
        .iter()
        .filter(|n| {
            let low = n.to_lowercase();
            low != **n && (0..3).any(|c| low == columns::p(&line_name(c)))
        })
        .map(|n| format!("{n} → {}", n.to_lowercase()))
        .collect();
    let message = format!(
        "no line power column (columns: {}); the audit needs `time` and the real power of each metered line in W: `l1_p_w`, `l2_p_w` (and `l3_p_w` on a three-phase supply); optional per line: `l1_q_var` (reactive power, var), `l1_v_v` (voltage, V), `l1_i_a` (current, A), and `n_i_a` (neutral current, A)",
        if names.is_empty() { "none but time".to_string() } else { names.join(", ") },
    );
    let help = if near.is_empty() {
        "rename the columns to these names (README, \"Wiring audit\", lists them)".to_string()
    } else {
        format!("column names are lower case: rename {}", near.join(", "))
    };
    Error::file(&h.file, message, help)
}

/// What the meters table gives per line, and the columns to stream.
struct Measured {
    n: usize,
    present: Vec<bool>,
    with_q: bool,
    with_v: Vec<bool>,
    cols: Vec<String>,
}

impl Measured {
    fn of(h: &Header, have: &[String], n: usize) -> Measured {
        let with_q = have.iter().all(|l| h.has(&columns::q(l)));
        let present: Vec<bool> = (0..n).map(|c| have.contains(&line_name(c))).collect();
        let with_v: Vec<bool> = (0..n)
            .map(|c| present[c] && h.has(&columns::v(&line_name(c))))
            .collect();
        let mut cols = Vec::new();
        for c in (0..n).filter(|&c| present[c]) {
            cols.push(columns::p(&line_name(c)));
            if with_q {
                cols.push(columns::q(&line_name(c)));
            }
        }
        // Voltages where the table has them (they sharpen the expected steps).
        for c in (0..n).filter(|&c| with_v[c]) {
            cols.push(columns::v(&line_name(c)));
        }
        Measured {
            n,
            present,
            with_q,
            with_v,
            cols,
        }
    }
}

/// What the steps pass gives: the steps, the channels' statistics, the
/// interval, the row count and how naive times were read.
type Detected = (
    Vec<events::Event>,
    Vec<events::ChannelStats>,
    f64,
    u64,
    Option<crate::wallclock::WallClockUse>,
);

/// Streams the table once through the step detector.
fn detect(h: &Header, m: &Measured, d: &Declared) -> Result<Detected, Error> {
    let angles = d.supply.angles_deg();
    let file = &h.file;
    let n = m.n;
    let mut st = h.stream(&m.cols)?;
    let short = |what: &str| {
        let help = "the audit needs a meters table over days";
        Error::file(file, format!("the meters table has {what}"), help)
    };
    let mut det: Option<events::Detector> = None;
    let mut interval_s = 0.0;
    let (mut p, mut q, mut v) = (vec![f64::NAN; n], vec![f64::NAN; n], vec![f64::NAN; n]);
    let (mut rows, mut last) = (0u64, i64::MIN);
    while let Some(b) = st.next_batch()? {
        // Before the interval is taken from the first rows: a reversed
        // export has no forward step to take it from.
        if let Some(k) = goes_back(&b.time_ms, last) {
            return Err(crate::table::table_err(file, Some(columns::TIME), Some(b.first + k), "the time goes back from the row before", "sort the rows by time (a repeated hour at the end of summer time is read in file order, so keep the export's order there)").into());
        }
        if det.is_none() {
            interval_s = interval_of(&b.time_ms)
                .ok_or_else(|| short("fewer than two rows at distinct times"))?;
            let det0 = events::Detector::new(angles, interval_s);
            det = Some(match jiff::tz::TimeZone::get(&d.timezone) {
                Ok(zone) => det0.with_zone(zone),
                Err(_) => det0,
            });
        }
        let det = det.as_mut().expect("made above");
        for (k, &t) in b.time_ms.iter().enumerate() {
            last = t;
            let mut j = 0;
            for c in (0..n).filter(|&c| m.present[c]) {
                p[c] = b.cols[j][k];
                q[c] = if m.with_q { b.cols[j + 1][k] } else { 0.0 };
                j += 1 + usize::from(m.with_q);
            }
            for c in (0..n).filter(|&c| m.with_v[c]) {
                v[c] = b.cols[j][k];
                j += 1;
            }
            det.push(t, &p, &q, &v);
            rows += 1;
        }
    }
    let det = det.ok_or_else(|| short("no rows"))?;
    let (evs, stats) = det.finish();
    Ok((evs, stats, interval_s, rows, st.wall_clock()))
}

/// The first row of `t` earlier than the row before it (`last` before the
/// first row).
fn goes_back(t: &[i64], last: i64) -> Option<usize> {
    let mut before = last;
    t.iter().position(|&x| {
        let back = x < before;
        before = x;
        back
    })
}

/// Audits the meters of `data` (a dataset folder or meters file) against `d`.
///
/// A declaration is read with `loadloom::audit::load_declaration`, whose
/// documentation shows a whole audit (a wiring mistake, found).
pub fn audit(data: &Path, d: &Declared) -> Result<Audit, Error> {
    audit_with(data, d, &Thresholds::STANDARD)
}

/// [`audit`], deciding by the cut-offs `th` (the report lists those that
/// differ from the standard ones).
pub fn audit_with(data: &Path, d: &Declared, th: &Thresholds) -> Result<Audit, Error> {
    if data.is_dir() {
        Dataset::open(data)?;
    }
    let h = meters_header(data, d)?;
    let have = channels(&h);
    if have.is_empty() {
        return Err(no_line_columns(&h));
    }
    fit(d, &h, &have)?;
    let m = Measured::of(&h, &have, d.supply.lines());
    // Many monitors give real power only: then every step is compared on
    // real power alone (the real part of each expected reading).
    let d = &if m.with_q {
        d.clone()
    } else {
        d.real_power_only()
    };
    let (evs, stats, interval_s, rows, clock) = detect(&h, &m, d)?;
    let mut outcome = check::check_with(d, &evs, &stats, interval_s, th);
    outcome
        .notes
        .extend(measured_notes(m.with_q, m.with_v.iter().any(|v| *v)));
    outcome.notes.extend(clock.map(|c| c.note()));
    let loading = loading_as_declared(&h, &have, d, &outcome, &evs)?;
    if outcome.metering != check::declared_metering(d, &outcome.metering.absent) {
        outcome.notes.push("the loading picture follows the metering as declared; if the metering findings are confirmed and corrected, its figures change".into());
    }
    Ok(Audit {
        data: data.display().to_string(),
        declared_file: d.file.clone(),
        interval_s,
        rows,
        loading,
        outcome,
        declared: d.clone(),
        thresholds: *th,
    })
}

/// The loading picture following the declared metering, with the declared
/// appliances running at each line's peak as the steps show them.
fn loading_as_declared(
    h: &Header,
    have: &[String],
    d: &Declared,
    outcome: &Outcome,
    evs: &[events::Event],
) -> Result<Loading, Error> {
    let plan = plan_of(d, have);
    let (mut loading, _) = loading_of(h, &plan, d.supply.service_a, d.supply.voltage_v)?;
    loading.timezone = d.timezone.clone();
    let at: Vec<(usize, i64)> = loading
        .lines
        .iter()
        .enumerate()
        .filter(|(_, l)| l.measured())
        .filter_map(|(x, l)| l.peak_ms.map(|t| (x, t)))
        .collect();
    let names = running::running(d, &outcome.metering, evs, &at);
    for ((x, _), r) in at.iter().zip(names) {
        loading.lines[*x].running_at_peak = r;
    }
    loading.running_known = true;
    Ok(loading)
}

/// What the data lacks and which checks that limits.
fn measured_notes(with_q: bool, with_v: bool) -> Vec<String> {
    let mut v = Vec::new();
    if !with_q {
        v.push("the data has real power only (no reactive power): steps are matched on real power alone, so loads of one size but different power factors cannot be told apart, and on a three-phase supply a CT on another line's conductor is judged from real power alone".to_string());
    }
    if !with_v {
        v.push("the data has no voltages: expected steps are taken at nominal voltage, with the wider tolerance that needs".to_string());
    }
    v
}

/// The reporting interval: the most common step between the first rows.
pub fn interval_of(t: &[i64]) -> Option<f64> {
    let mut d: Vec<i64> = t
        .windows(2)
        .take(4000)
        .map(|w| w[1] - w[0])
        .filter(|&x| x > 0)
        .collect();
    if d.is_empty() {
        return None;
    }
    d.sort();
    let (mut best, mut run, mut best_run) = (d[0], 0, 0);
    for (i, &x) in d.iter().enumerate() {
        run = if i > 0 && d[i - 1] == x { run + 1 } else { 1 };
        if run > best_run {
            best_run = run;
            best = x;
        }
    }
    Some(best as f64 / 1000.0)
}

/// What the audit takes for granted, printed with every report.
pub const ASSUMPTIONS: [&str; 3] = [
    "the home only consumes, but for its declared PV and battery: a conductor power the metering implies must not be negative, on a conductor with declared PV only in the dark hours of the home's clock (00:30-03:00), on one with a declared battery never judged (a metering there is told by its steps, and one that fits with every reading negated as well is only possible)",
    "appliances switch between the declared states; loads whose power wanders or never switches cannot be placed from steps and are reported as undecidable",
    "steps are matched within 20 W plus 3 % of their size per channel where the voltages are measured (the expected step follows them), else within 30 W plus 10 %, widened by three standard errors of the rows either side of the step and, where the voltage changed, by the other loads' possible response to it",
];

fn finding_json(f: &check::Finding) -> Value {
    json!({ "kind": f.kind.name(), "subject": f.subject, "message": f.message, "advice": advice(f), "confidence": (f.confidence * 100.0).round() / 100.0, "possible_because": f.doubt, "evidence": f.evidence })
}

/// What to check on site for a finding.
pub fn advice(f: &check::Finding) -> String {
    let ev = &f.evidence;
    let text = |k: &str| ev[k].as_str().unwrap_or("?").to_string();
    let chans = f.subject.replace('+', " and ");
    match f.kind.name() {
        "reversed-ct" => format!("turn the CT of channel {chans} round (its arrow toward the load), or declare it reversed"),
        "ct-on-other-conductor" => format!("move the CT of channel {chans} onto its own line's conductor, or declare where it sits"),
        "cts-exchanged" => format!("exchange the CTs of channels {chans} (each sits on the other's conductor)"),
        "channels-exchanged" => format!("exchange the leads of channels {chans} (CT and voltage together) or their labels in the monitor"),
        "no-ct" => format!("check that a CT is fitted for channel {chans}, and its lead and connector"),
        "undeclared-load" => {
            let when: Vec<String> = ev["first_starts_local"]
                .as_array()
                .map(|a| a.iter().filter_map(|x| x.as_str().map(String::from)).collect())
                .unwrap_or_default();
            format!(
                "find the load of about {:.0} W on {} (it started {}, local time) and add it to the declaration",
                ev["p_w"].as_f64().unwrap_or(0.0),
                text("wiring"),
                if when.is_empty() { "at times listed in the evidence".into() } else { when.join(", ") }
            )
        }
        _ => format!(
            "check which breaker feeds {} and how it is connected: declared {}, the data shows {}; correct the declaration or the wiring",
            f.subject,
            text("declared"),
            text("found")
        ),
    }
}

/// What a confidence means, printed with the findings.
pub const CONFIDENCE: &str = "confidence: for metering and wiring, the share of the evidence (steps, appliances, negative power) that only the finding explains and the declaration does not; for an undeclared load, a tenth for each run seen whole (a start, then its stop), or a fifth for each time it started while a declared appliance of its size was already on, or the share of its size's runs beyond what the declared habits of the appliances of that size start (at a coarse interval, and of those that could make it elsewhere; no more than a tenth a run)";

impl Audit {
    fn channel_rows(&self) -> Vec<[String; 3]> {
        let m = &self.outcome.metering;
        (0..m.map.len())
            .map(|c| {
                let dc = &self.declared.channels[c];
                let declared = match dc.conductor {
                    None => "no CT".to_string(),
                    Some(b) => format!(
                        "CT on {}{}",
                        line_label(b),
                        if dc.reversed { ", reversed" } else { "" }
                    ),
                };
                let found = if m.absent[c] {
                    "reads nothing".to_string()
                } else {
                    let mm = m.map[c];
                    let mut s = if mm.turned {
                        format!("CT on {}", line_label(mm.src))
                    } else {
                        format!("channel of {}", line_label(mm.src))
                    };
                    if mm.k < 0.0 {
                        s += ", reversed";
                    }
                    s
                };
                [line_name(c), declared, found]
            })
            .collect()
    }

    /// The cut-offs set otherwise than the standard ones, in words.
    fn cutoffs_text(&self) -> Option<String> {
        let changed = self.thresholds.changed();
        (!changed.is_empty()).then(|| {
            let list: Vec<String> = changed
                .iter()
                .map(|c| {
                    let v = c.of(&self.thresholds);
                    format!("{} = {v} (standard {})", c.name, c.standard())
                })
                .collect();
            format!(
                "cut-offs changed from the standard ones: {}; findings and verdicts differ from a standard audit's",
                list.join(", ")
            )
        })
    }

    fn findings_text(&self, bullet: &str) -> String {
        let f = &self.outcome.findings;
        let mut o = if f.is_empty() {
            "no findings: the data fits the declaration\n".to_string()
        } else {
            format!(
                "{} finding{}\n",
                f.len(),
                if f.len() == 1 { "" } else { "s" }
            )
        };
        for x in f {
            o += &format!(
                "{bullet}[{}] {} (confidence {:.2})\n{bullet}  to check: {}\n",
                x.kind,
                x.message,
                x.confidence,
                advice(x)
            );
        }
        let p = &self.outcome.possible;
        if !p.is_empty() {
            o += &format!(
                "{} possible (confidence below {:.2}, or another account fits the data as well; worth a look, not a finding)\n",
                p.len(),
                self.outcome.possible_below
            );
            for x in p {
                o += &format!(
                    "{bullet}[possible {}] {} (confidence {:.2}{})\n{bullet}  to check: {}\n",
                    x.kind,
                    x.message,
                    x.confidence,
                    x.doubt
                        .as_ref()
                        .map(|w| format!("; possible only: {w}"))
                        .unwrap_or_default(),
                    advice(x)
                );
            }
        }
        let u = &self.outcome.unlisted;
        if !u.is_empty() {
            o += &format!(
                "{} recurring load{} the partial declaration does not list (not mistakes)\n",
                u.len(),
                if u.len() == 1 { "" } else { "s" }
            );
            for x in u {
                o += &format!("{bullet}[unlisted] {}\n", x.message);
            }
        }
        o += &format!("{CONFIDENCE}\n");
        if let Some(c) = self.cutoffs_text() {
            o += &format!("{bullet}{c}\n");
        }
        for n in &self.outcome.notes {
            o += &format!("{bullet}note: {n}\n");
        }
        o
    }
}

impl Render for Audit {
    fn to_json(&self) -> Value {
        let mut loading = self.loading.to_json();
        if let Some(o) = loading.as_object_mut() {
            o.remove("format");
            o.remove("caution");
        }
        json!({
            "format": AUDIT_FORMAT,
            "data": self.data,
            "declared": self.declared_file,
            "interval_s": self.interval_s,
            "rows": self.rows,
            "metering": self.channel_rows().iter().map(|r| json!({ "channel": r[0], "declared": r[1], "found": r[2] })).collect::<Vec<_>>(),
            "findings": self.outcome.findings.iter().map(finding_json).collect::<Vec<_>>(),
            "possible": self.outcome.possible.iter().map(finding_json).collect::<Vec<_>>(),
            "possible_below": self.outcome.possible_below,
            "cutoffs_changed": self.thresholds.changed().iter().map(|c| json!({ "name": c.name, "value": c.of(&self.thresholds), "standard": c.standard(), "meaning": c.meaning })).collect::<Vec<_>>(),
            "unlisted_loads": self.outcome.unlisted.iter().map(finding_json).collect::<Vec<_>>(),
            "appliances": self.outcome.appliances.iter().map(|a| json!({ "id": a.id, "declared": a.declared, "verdict": a.verdict.name(), "seen": a.seen, "reason": a.reason, "steps_as_declared": a.steps_declared, "steps_best_other": a.steps_best_other })).collect::<Vec<_>>(),
            "steps": { "used": self.outcome.steps, "explained": self.outcome.steps_explained, "explained_share": self.outcome.steps_explained as f64 / self.outcome.steps.max(1) as f64 },
            "notes": self.outcome.notes,
            "assumptions": ASSUMPTIONS,
            "loading": loading,
            "caution": CAUTION,
        })
    }

    fn to_text(&self) -> String {
        let mut o = format!(
            "audit of {} against {} ({} rows at {} s)\n\n",
            self.data, self.declared_file, self.rows, self.interval_s
        );
        o += &self.findings_text("  ");
        o += "\nmetering (channel, declared, found):\n";
        for r in self.channel_rows() {
            o += &format!("  {:<4} {:<22} {}\n", r[0], r[1], r[2]);
        }
        o += "\nappliances:\n";
        let w = self
            .outcome
            .appliances
            .iter()
            .map(|a| a.id.len())
            .max()
            .unwrap_or(2);
        for a in &self.outcome.appliances {
            o += &format!(
                "  {:<w$}  {:<14} {:<12} {}\n",
                a.id, a.declared, a.verdict, a.reason
            );
        }
        o += &format!(
            "\n{} of {} steps of 100 VA or more ({:.0} %) are explained by the appliances as found\n",
            self.outcome.steps_explained,
            self.outcome.steps,
            100.0 * self.outcome.steps_explained as f64 / self.outcome.steps.max(1) as f64
        );
        o += "assumptions:\n";
        for a in ASSUMPTIONS {
            o += &format!("  - {a}\n");
        }
        o += "\n";
        o += &self.loading.to_text();
        o
    }

    fn to_markdown(&self) -> String {
        let mut o = format!(
            "## Audit of `{}` against `{}`\n\n{} rows at {} s.\n\n",
            self.data, self.declared_file, self.rows, self.interval_s
        );
        o += &self.findings_text("- ");
        o += "\n| channel | declared | found |\n|---|---|---|\n";
        for r in self.channel_rows() {
            o += &format!("| {} | {} | {} |\n", r[0], r[1], r[2]);
        }
        o += "\n| appliance | declared | verdict | why |\n|---|---|---|---|\n";
        for a in &self.outcome.appliances {
            o += &format!(
                "| {} | {} | {} | {} |\n",
                a.id, a.declared, a.verdict, a.reason
            );
        }
        o += "\nAssumptions:\n\n";
        for a in ASSUMPTIONS {
            o += &format!("- {a}\n");
        }
        o += "\n";
        o += &self.loading.to_markdown();
        o
    }
}
