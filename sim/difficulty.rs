//! The difficulty card: figures that let people compare datasets and explain
//! scores. From the behaviour timelines and the nominal states, so
//! `validate` and the manifest agree:
//! - how often two or more appliances switch within one reporting interval;
//! - per conductor, pairs of appliance states whose steps in P and Q lie
//!   within the meter noise of each other (a disaggregator cannot tell them
//!   apart by the step alone);
//! - the share of energy drawn line-to-line, and the share unmetered.

use crate::behaviour::Timeline;
use crate::electrical::split::state_split;
use crate::scenario::{Role, Scenario, Wiring};
use serde_json::{json, Value};
use solver_check::contract::line_name;

/// Two appliance steps on one conductor that the meter cannot tell apart: their
/// P and Q differ by less than 2·√2·σ of the meter noise at that level.
pub struct Ambiguous {
    /// The conductor (line index).
    pub line: usize,
    /// The first: appliance id, state name, its step of P on that line, W.
    pub a: (String, String, f64),
    /// The second, the same way.
    pub b: (String, String, f64),
}

/// The difficulty card: how hard a home is to disaggregate from its meters.
pub struct Difficulty {
    /// Reporting intervals in which some appliance switches, share of all.
    pub switching_share: f64,
    /// Of those, the share in which two or more appliances switch.
    pub coincident_share: f64,
    /// Pairs of appliance steps the meter cannot tell apart.
    pub ambiguous: Vec<Ambiguous>,
    /// Share of the loads' energy drawn by appliances with a line-to-line or
    /// three-phase connection.
    pub line_to_line_share: f64,
    /// Share of the energy drawn by loads nobody listed.
    pub unmetered_share: f64,
}

/// The noise of a step read as the difference of two readings: √2 × the
/// meter's standard deviation at that level; two steps closer than two of
/// those are called ambiguous (common practice, no source).
fn tolerance(s: &Scenario, p: f64) -> f64 {
    let sd = ((s.meter.noise_relative * p).powi(2) + s.meter.noise_floor_w.powi(2)).sqrt();
    2.0 * 2f64.sqrt() * sd + s.meter.resolution_w
}

/// `energy_j[k]`: energy of each load (appliances, then unmetered).
pub fn card(s: &Scenario, timelines: &[Timeline], energy_j: &[f64]) -> Difficulty {
    let k = s.steps_per_interval();
    // The loads only: a PV inverter's output and a battery's answer to the
    // home are not appliances to tell apart.
    let is_load = |k: usize| s.appliances.get(k).is_none_or(|a| a.role == Role::Load);
    let (any, multi) = switching(s, timelines, &is_load);
    let intervals = timelines
        .first()
        .and_then(|t| t.segments.last())
        .map(|l| l.end / k)
        .unwrap_or(1)
        .max(1);

    let ambiguous = ambiguous_steps(s, &is_load);
    let total: f64 = energy_j
        .iter()
        .enumerate()
        .filter(|(k, _)| is_load(*k))
        .map(|(_, e)| e)
        .sum();
    let ll: f64 = s
        .appliances
        .iter()
        .zip(energy_j)
        .filter(|(a, _)| a.role == Role::Load)
        .filter(|(a, _)| {
            a.connections()
                .iter()
                .any(|c| c.is_line_to_line() || *c == Wiring::ThreePhase)
        })
        .map(|(_, e)| e)
        .sum();
    let unmetered: f64 = energy_j[s.appliances.len()..].iter().sum();
    // (+ 0.0 turns the −0.0 of an empty float sum into 0.)
    let share = |x: f64| if total > 0.0 { x / total + 0.0 } else { 0.0 };
    Difficulty {
        switching_share: any as f64 / intervals as f64,
        coincident_share: if any > 0 {
            multi as f64 / any as f64
        } else {
            0.0
        },
        ambiguous,
        line_to_line_share: share(ll),
        unmetered_share: share(unmetered),
    }
}

/// Reporting intervals in which any load changes state, and those in which
/// two or more do.
fn switching(s: &Scenario, timelines: &[Timeline], is_load: &dyn Fn(usize) -> bool) -> (u64, u64) {
    let k = s.steps_per_interval();
    let mut changes: Vec<u64> = Vec::new();
    for (_, t) in timelines[..s.appliances.len()]
        .iter()
        .enumerate()
        .filter(|(k, _)| is_load(*k))
    {
        for w in t.segments.windows(2) {
            if w[1].state != w[0].state {
                changes.push(w[1].start / k);
            }
        }
    }
    changes.sort_unstable();
    let (mut any, mut multi) = (0u64, 0u64);
    let mut i = 0;
    while i < changes.len() {
        let j = i + changes[i..]
            .iter()
            .position(|&c| c != changes[i])
            .unwrap_or(changes.len() - i);
        any += 1;
        if j - i >= 2 {
            multi += 1;
        }
        i = j;
    }
    (any, multi)
}

/// Pairs of steps of two loads on one line that the meter cannot tell apart.
fn ambiguous_steps(s: &Scenario, is_load: &dyn Fn(usize) -> bool) -> Vec<Ambiguous> {
    // Steps of every non-lowest state on each line it draws from.
    let mut steps: Vec<(usize, usize, String, f64, f64)> = Vec::new(); // (line, app, state, ΔP, ΔQ)
    for (ai, a) in s.appliances.iter().enumerate().filter(|(k, _)| is_load(*k)) {
        let splits: Vec<Vec<(usize, f64, f64)>> =
            a.states.iter().map(|st| state_split(s, st)).collect();
        for x in a.lines() {
            let base = splits
                .iter()
                .map(|sp| sp[x])
                .min_by(|u, v| u.1.abs().partial_cmp(&v.1.abs()).unwrap())
                .unwrap();
            for (si, sp) in splits.iter().enumerate() {
                let (dp, dq) = (sp[x].1 - base.1, sp[x].2 - base.2);
                if dp.abs() > 1.0 {
                    steps.push((x, ai, a.states[si].name.clone(), dp, dq));
                }
            }
        }
    }
    let mut ambiguous = Vec::new();
    for i in 0..steps.len() {
        for j in i + 1..steps.len() {
            let (u, v) = (&steps[i], &steps[j]);
            if u.0 != v.0 || u.1 == v.1 {
                continue;
            }
            let tol = tolerance(s, u.3.abs().max(v.3.abs()));
            if (u.3 - v.3).abs() <= tol && (u.4 - v.4).abs() <= tol {
                ambiguous.push(Ambiguous {
                    line: u.0,
                    a: (s.appliances[u.1].id.clone(), u.2.clone(), u.3),
                    b: (s.appliances[v.1].id.clone(), v.2.clone(), v.3),
                });
            }
        }
    }
    ambiguous
}

impl Difficulty {
    /// The card as the manifest's `difficulty` object.
    pub fn to_json(&self, s: &Scenario) -> Value {
        let per_line: serde_json::Map<String, Value> = (0..s.home.supply.lines())
            .map(|x| {
                (
                    line_name(x),
                    json!(self.ambiguous.iter().filter(|a| a.line == x).count()),
                )
            })
            .collect();
        json!({
            "switching_interval_share": self.switching_share,
            "coincident_switching_share": self.coincident_share,
            "ambiguous_pairs_per_conductor": per_line,
            "ambiguous_pairs": self.ambiguous.iter().take(200).map(|a| json!({
                "conductor": line_name(a.line),
                "a": { "appliance": a.a.0, "state": a.a.1, "step_w": a.a.2 },
                "b": { "appliance": a.b.0, "state": a.b.1, "step_w": a.b.2 },
            })).collect::<Vec<_>>(),
            "line_to_line_energy_share": self.line_to_line_share,
            "unmetered_energy_share": self.unmetered_share,
            "ambiguity_rule": "steps in P and Q on one conductor within 2·√2·σ of each other, σ the meter noise at that level (plus its resolution)",
        })
    }

    /// The card as text, for `validate`.
    pub fn render(&self, s: &Scenario) -> String {
        let mut o = String::from("difficulty:\n");
        o += &format!(
            "  intervals with a switch        {:>6.2} %  (of all reporting intervals)\n",
            100.0 * self.switching_share
        );
        o += &format!(
            "  ... with two or more switching {:>6.2} %  (of those)\n",
            100.0 * self.coincident_share
        );
        o += &format!(
            "  energy drawn line-to-line      {:>6.1} %\n",
            100.0 * self.line_to_line_share
        );
        o += &format!(
            "  energy unmetered               {:>6.1} %\n",
            100.0 * self.unmetered_share
        );
        for x in 0..s.home.supply.lines() {
            let here: Vec<&Ambiguous> = self.ambiguous.iter().filter(|a| a.line == x).collect();
            o += &format!("  ambiguous state pairs on L{}    {:>6}", x + 1, here.len());
            let show: Vec<String> = here
                .iter()
                .take(3)
                .map(|a| {
                    format!(
                        "{}:{} {:.0} W ~ {}:{} {:.0} W",
                        a.a.0, a.a.1, a.a.2, a.b.0, a.b.1, a.b.2
                    )
                })
                .collect();
            if !show.is_empty() {
                o += &format!("  e.g. {}", show.join("; "));
            }
            o += "\n";
        }
        o
    }
}
