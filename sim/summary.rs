//! `loadloom validate`: what a scenario will produce, without writing data.
//! Per appliance: expected energy per day, duty and peak, from its behaviour
//! over up to 28 days at nominal voltage; per conductor: the coincident peak
//! current (every appliance in its largest state at once, an upper bound)
//! against the service rating.

use crate::electrical::split::state_split;
use crate::loads::timelines;
use crate::pipeline::Written;
use crate::scenario::Scenario;
use solver_check::contract::line_label;
use solver_check::render::Render;

/// Printed wherever loadloom speaks of wiring, loading or breakers (one text
/// for the whole project, kept with the audit).
pub use solver_check::audit::CAUTION;

/// One load's expected figures for `validate`.
pub struct AppFigures {
    /// The appliance id (`… (unmetered)` for a load nobody listed).
    pub id: String,
    /// Its behaviour's name (`cycle`, `program`, …).
    pub behaviour: &'static str,
    /// Every connection its draws use, joined by `+` (`L1-N+L1-L2`).
    pub wiring: String,
    /// Expected energy per day, kWh (from its timeline at nominal voltage).
    pub kwh_per_day: f64,
    /// Share of time it is on (above its on threshold), 0 … 1.
    pub duty: f64,
    /// Its largest nominal power, W.
    pub peak_w: f64,
}

/// One line conductor's bound for `validate`.
pub struct LineFigures {
    /// The conductor's label (`L1`).
    pub name: String,
    /// The coincident peak current if every load drew its largest state at once,
    /// A (nominal voltage); compared with the service rating.
    pub peak_a: f64,
}

/// What `validate` prints about a scenario: per appliance, per conductor, and
/// the difficulty card.
pub struct Figures {
    /// Days simulated for the figures (the run's length, at most 28).
    pub days: f64,
    /// How hard the home is to disaggregate.
    pub difficulty: crate::difficulty::Difficulty,
    /// Per load: appliances, then unmetered loads.
    pub apps: Vec<AppFigures>,
    /// Per line conductor.
    pub lines: Vec<LineFigures>,
    /// The service rating, A.
    pub service_a: f64,
    /// What the scenario does that is allowed but unusual.
    pub scenario_warnings: Vec<String>,
}

/// The figures of a scenario, from its behaviour timelines (at most 28 days)
/// at nominal voltage; nothing is written.
pub fn figures(s: &Scenario) -> Figures {
    let days = (s.run.length_s / 86400.0).min(28.0);
    let steps = ((days * 86400.0) / s.run.step_s).round() as u64;
    let tl = timelines(s, steps);
    let mut apps = Vec::new();
    let mut energy_j = Vec::new();
    for (k, (a, t)) in s.loads().zip(&tl).enumerate() {
        let (mut e, mut on, mut peak) = (0.0, 0u64, 0.0f64);
        for seg in &t.segments {
            let p = a.states[seg.state as usize].p_w() * seg.scale as f64;
            let len = seg.end - seg.start;
            e += p * len as f64 * s.run.step_s;
            if p > a.on_threshold_w {
                on += len;
            }
            peak = peak.max(p);
        }
        energy_j.push(e);
        apps.push(AppFigures {
            id: if k < s.appliances.len() {
                a.id.clone()
            } else {
                format!("{} (unmetered)", a.id)
            },
            behaviour: a.behaviour.name(),
            wiring: a
                .connections()
                .iter()
                .map(|c| c.name())
                .collect::<Vec<_>>()
                .join("+"),
            kwh_per_day: e / 3.6e6 / days,
            duty: on as f64 / steps as f64,
            peak_w: peak,
        });
    }
    let n = s.home.supply.lines();
    let mut peak_a = vec![0.0; n];
    // A PV inverter or a battery works against the loads' import (it
    // exports, or charges only from a surplus): not part of the bound.
    for a in s.loads().filter(|a| a.role == crate::scenario::Role::Load) {
        let mut worst = vec![0.0f64; n];
        for st in &a.states {
            for (x, p, q) in state_split(s, st) {
                // |I_x| = |S_x| / V_LN at nominal voltage.
                worst[x] = worst[x].max((p * p + q * q).sqrt() / s.home.voltage_v);
            }
        }
        for x in 0..n {
            peak_a[x] += worst[x];
        }
    }
    Figures {
        days,
        difficulty: crate::difficulty::card(s, &tl, &energy_j),
        apps,
        lines: (0..n)
            .map(|x| LineFigures {
                name: line_label(x),
                peak_a: peak_a[x],
            })
            .collect(),
        service_a: s.home.service_a,
        scenario_warnings: s.warnings.clone(),
    }
}

/// The validate report as aligned text.
fn text(s: &Scenario, f: &Figures) -> String {
    let mut o = String::new();
    let label = if s.home.label.is_empty() {
        s.name.clone()
    } else {
        format!("{} ({})", s.home.label, s.name)
    };
    o += &format!(
        "{label}: {} supply, {} V line-to-neutral, {} Hz, {} A service, {} appliances\n",
        s.home.supply.name(),
        s.home.voltage_v,
        s.home.frequency_hz,
        s.home.service_a,
        s.appliances.len()
    );
    o += &format!(
        "run: {} ({}) for {}, step {} s, meter interval {} s, seed {}\n\n",
        s.run.start_local,
        s.home.timezone,
        crate::units::human_duration(s.run.length_s),
        s.run.step_s,
        s.meter.interval_s,
        s.run.seed
    );
    let w = f.apps.iter().map(|a| a.id.len()).max().unwrap_or(2).max(9);
    let ww = f
        .apps
        .iter()
        .map(|a| a.wiring.len())
        .max()
        .unwrap_or(6)
        .max(6);
    o += &format!(
        "{:<w$}  {:<10}  {:<ww$}  {:>10}  {:>6}  {:>9}\n",
        "appliance", "behaviour", "wiring", "kWh/day", "duty", "peak W"
    );
    let mut total = 0.0;
    for a in &f.apps {
        total += a.kwh_per_day;
        o += &format!(
            "{:<w$}  {:<10}  {:<ww$}  {:>10.3}  {:>5.1}%  {:>9.0}\n",
            a.id,
            a.behaviour,
            a.wiring,
            a.kwh_per_day,
            100.0 * a.duty,
            a.peak_w
        );
    }
    o += &format!(
        "{:<w$}  {:<10}  {:<ww$}  {:>10.3}\n",
        "total", "", "", total
    );
    o += &format!(
        "(expected from {:.0} simulated days of behaviour at nominal voltage)\n\n",
        f.days
    );
    o += &format!(
        "{:<9}  {:>22}  {:>15}\n",
        "conductor", "coincident peak (A)", "of service"
    );
    for l in &f.lines {
        o += &format!(
            "{:<9}  {:>22.1}  {:>14.0}%\n",
            l.name,
            l.peak_a,
            100.0 * l.peak_a / f.service_a
        );
    }
    o += "(coincident peak: every appliance in its largest state at once, an upper bound)\n";
    for w in warnings(f) {
        o += &format!("warning: {w}\n");
    }
    o += "\n";
    o += &f.difficulty.render(s);
    o += "\n";
    o += CAUTION;
    o += "\n";
    o
}

/// What a run would rather not meet: a conductor whose coincident peak
/// exceeds the service rating (the terminal voltage sags with it; a run
/// stops if it leaves 0.5 … 1.5 of nominal).
pub fn warnings(f: &Figures) -> Vec<String> {
    f.scenario_warnings
        .iter()
        .cloned()
        .chain(f.lines.iter()
        .filter(|l| l.peak_a > f.service_a)
        .map(|l| {
            format!(
                "{}'s coincident peak of {:.1} A exceeds the {} A service: if these loads ran at once the voltage would sag through the source impedance; raise `service`, or give fewer or smaller loads on {}",
                l.name, l.peak_a, f.service_a, l.name
            )
        }))
        .collect()
}

/// The validate figures as JSON (for scripts), with the caution.
fn json(s: &Scenario, f: &Figures) -> serde_json::Value {
    serde_json::json!({
        "scenario": s.name,
        "supply": s.home.supply.name(),
        "days_simulated": f.days,
        "appliances": f.apps.iter().map(|a| serde_json::json!({ "id": a.id, "behaviour": a.behaviour, "wiring": a.wiring, "kwh_per_day": a.kwh_per_day, "duty": a.duty, "peak_w": a.peak_w })).collect::<Vec<_>>(),
        "conductors": f.lines.iter().map(|l| serde_json::json!({ "conductor": l.name, "coincident_peak_a": l.peak_a, "share_of_service": l.peak_a / f.service_a })).collect::<Vec<_>>(),
        "service_a": f.service_a,
        "warnings": warnings(f),
        "difficulty": f.difficulty.to_json(s),
        "caution": CAUTION,
    })
}

/// What `validate` prints: a scenario and its figures.
pub struct Preview<'a> {
    /// The scenario checked.
    pub scenario: &'a Scenario,
    /// What it will produce ([`figures`]).
    pub figures: Figures,
    /// A calendar year of it (`validate --year`).
    pub year: Option<crate::year::YearReport>,
}

impl<'a> Preview<'a> {
    /// Computes the figures of `s` (every check that `validate` runs).
    pub fn of(s: &'a Scenario) -> Preview<'a> {
        Preview {
            scenario: s,
            figures: figures(s),
            year: None,
        }
    }

    /// The same, with a calendar year of the home ([`crate::year::report`]).
    pub fn with_year(mut self) -> Self {
        self.year = Some(crate::year::report(self.scenario));
        self
    }
}

impl Render for Preview<'_> {
    fn to_text(&self) -> String {
        let mut o = text(self.scenario, &self.figures);
        if let Some(y) = &self.year {
            o += "\n";
            o += &crate::year::render(self.scenario, y);
        }
        o
    }
    fn to_json(&self) -> serde_json::Value {
        let mut v = json(self.scenario, &self.figures);
        if let Some(y) = &self.year {
            v["year"] = crate::year::to_json(self.scenario, y);
        }
        v
    }
}

/// What `run` prints: where the dataset went and each appliance's energy and peak.
pub struct RunReport<'a> {
    /// The scenario simulated.
    pub scenario: &'a Scenario,
    /// The dataset written.
    pub written: &'a Written,
    /// Wall-clock seconds of the run.
    pub seconds: f64,
}

impl Render for RunReport<'_> {
    fn to_text(&self) -> String {
        let (s, w) = (self.scenario, self.written);
        let sum = &w.outcome.summary;
        let mut o = format!(
            "wrote {} ({} rows, {} events) in {:.1} s\n",
            w.dir.display(),
            w.rows,
            w.outcome.events.len(),
            self.seconds
        );
        let width = s
            .appliances
            .iter()
            .map(|a| a.id.len())
            .max()
            .unwrap_or(9)
            .max(9);
        o += &format!("{:<width$}  {:>10}  {:>9}\n", "appliance", "kWh", "peak W");
        for (k, a) in s.appliances.iter().enumerate() {
            o += &format!(
                "{:<width$}  {:>10.3}  {:>9.0}\n",
                a.id,
                sum.app_energy_j[k] / 3.6e6,
                sum.app_peak_w[k]
            );
        }
        o
    }
    fn to_json(&self) -> serde_json::Value {
        let (s, w) = (self.scenario, self.written);
        let sum = &w.outcome.summary;
        let apps: Vec<serde_json::Value> = s
            .appliances
            .iter()
            .enumerate()
            .map(|(k, a)| serde_json::json!({ "id": a.id, "energy_kwh": sum.app_energy_j[k] / 3.6e6, "peak_w": sum.app_peak_w[k] }))
            .collect();
        serde_json::json!({ "dataset": w.dir, "rows": w.rows, "events": w.outcome.events.len(), "seconds": self.seconds, "appliances": apps })
    }
}
