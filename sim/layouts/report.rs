//! The ladder as text, Markdown and JSON (`loadloom-layouts/1`): per rung
//! the layout's difficulty card next to each solver's scores, overall, per
//! appliance and per conductor.

use super::{Ladder, RungResult};
use serde_json::{json, Value};
use solver_check::audit::CAUTION;
use solver_check::contract::LAYOUTS_FORMAT;
use solver_check::render::Render;
use solver_check::score::Report;

/// Per conductor: the mean MAE and mean F1 of the appliances drawing from it.
fn per_conductor(r: &RungResult, rep: &Report) -> Vec<(String, f64, f64)> {
    let mut names: Vec<String> = r.lines.iter().flat_map(|(_, l)| l.clone()).collect();
    names.sort();
    names.dedup();
    names
        .into_iter()
        .map(|c| {
            let on: Vec<&solver_check::score::ApplianceReport> = rep
                .appliances
                .iter()
                .filter(|a| r.lines.iter().any(|(id, l)| *id == a.id && l.contains(&c)))
                .collect();
            let n = on.len().max(1) as f64;
            let mae = on.iter().map(|a| a.scores.mae_w).sum::<f64>() / n;
            let f1 = on.iter().map(|a| a.scores.f1).sum::<f64>() / n;
            (c, mae, f1)
        })
        .collect()
}

fn pct(v: &Value) -> String {
    v.as_f64()
        .map_or("–".into(), |x| format!("{:.1} %", 100.0 * x))
}

fn opt(x: Option<f64>) -> String {
    x.map_or("–".into(), |v| format!("{v:.3}"))
}

/// The card on one line.
fn card_line(c: &Value) -> String {
    if c.is_null() {
        return "no data".into();
    }
    let shares: Vec<String> = c["line_energy_share"]
        .as_object()
        .map(|o| o.iter().map(|(k, v)| format!("{k} {}", pct(v))).collect())
        .unwrap_or_default();
    let partial: Vec<&str> = c["partial_phase"]
        .as_array()
        .map(|a| a.iter().filter_map(Value::as_str).collect())
        .unwrap_or_default();
    format!(
        "{}, {} channels, unbalance {}; energy {}; imbalance {:.2}; line-to-line {}, three-phase {}; partial-phase: {}; coincident switching {}; ambiguous pairs {}",
        c["supply"].as_str().unwrap_or(""),
        c["channels"].as_str().unwrap_or(""),
        pct(&c["voltage_unbalance"]),
        shares.join(" / "),
        c["line_imbalance"].as_f64().unwrap_or(0.0),
        pct(&c["line_to_line_energy_share"]),
        pct(&c["three_phase_energy_share"]),
        if partial.is_empty() { "none".into() } else { partial.join(", ") },
        pct(&c["coincident_switching_share"]),
        c["ambiguous_pairs"]
    )
}

impl Render for Ladder {
    fn to_text(&self) -> String {
        text(self)
    }
    fn to_markdown(&self) -> String {
        markdown(self)
    }
    fn to_json(&self) -> Value {
        json_of(self)
    }
}

/// The ladder as text: a block per rung, then the summary table.
fn text(l: &Ladder) -> String {
    let mut o = format!(
        "layout ladder of {} ({} rungs; train {} s, test {} s)\n\n",
        l.home,
        l.rungs.len(),
        l.train_s,
        l.test_s
    );
    for (k, r) in l.rungs.iter().enumerate() {
        o += &format!("[{k:02}] {} / {}\n", r.family, r.name);
        o += &format!("  what: {}\n  card: {}\n", r.note, card_line(&r.card));
        o += &format!("  scenario: {}\n", r.scenario_file.display());
        for (solver, res) in &r.scores {
            match res {
                Ok(rep) => {
                    let s = &rep.overall;
                    o += &format!(
                        "  {solver}: MAE {:.1} W, NDE {}, F1 {:.3}, accuracy {}\n",
                        s.mae_w,
                        opt(s.nde),
                        s.f1,
                        opt(s.accuracy)
                    );
                    let cond: Vec<String> = per_conductor(r, rep)
                        .iter()
                        .map(|(c, m, f)| format!("{c} {m:.1} W / {f:.2}"))
                        .collect();
                    o += &format!(
                        "    per conductor (mean MAE / F1 of its appliances): {}\n",
                        cond.join(", ")
                    );
                    let apps: Vec<String> = rep
                        .appliances
                        .iter()
                        .map(|a| format!("{} {:.1}", a.id, a.scores.mae_w))
                        .collect();
                    o += &format!("    per appliance MAE W: {}\n", apps.join(", "));
                }
                Err(e) => o += &format!("  {solver}: failed: {}\n", e.lines().next().unwrap_or("")),
            }
        }
        o += "\n";
    }
    o + &render_markdown_summary(l) + &format!("\n{CAUTION}\n")
}

const HEAD: [&str; 12] = [
    "rung",
    "family",
    "solver",
    "line-to-line",
    "three-phase",
    "imbalance",
    "unbalance",
    "channels",
    "MAE W",
    "NDE",
    "F1",
    "accuracy",
];

/// One row per rung and solver: the main figures of the card and the scores.
fn render_markdown_summary(l: &Ladder) -> String {
    let mut o = format!(
        "| {} |\n|{}\n",
        HEAD.join(" | "),
        HEAD.iter()
            .enumerate()
            .map(|(k, _)| if k < 3 || k == 7 { "---|" } else { "---:|" })
            .collect::<String>()
    );
    for r in &l.rungs {
        for (solver, res) in &r.scores {
            let c = &r.card;
            let scores = match res {
                Ok(rep) => {
                    let s = &rep.overall;
                    format!(
                        "{:.1} | {} | {:.3} | {}",
                        s.mae_w,
                        opt(s.nde),
                        s.f1,
                        opt(s.accuracy)
                    )
                }
                Err(_) => "failed | | | ".into(),
            };
            o += &format!(
                "| {} | {} | {} | {} | {} | {:.2} | {} | {} | {} |\n",
                r.name,
                r.family,
                solver,
                pct(&c["line_to_line_energy_share"]),
                pct(&c["three_phase_energy_share"]),
                c["line_imbalance"].as_f64().unwrap_or(0.0),
                pct(&c["voltage_unbalance"]),
                c["channels"].as_str().unwrap_or("–"),
                scores
            );
        }
    }
    o
}

/// The summary table, then per solver the MAE of every appliance and the
/// per-conductor figures on every rung.
fn markdown(l: &Ladder) -> String {
    let mut o = format!("### Layout ladder of {}\n\n{CAUTION}\n\n", l.home);
    o += &render_markdown_summary(l);
    for (k, solver) in l.solvers.iter().enumerate() {
        o += &format!("\n#### {solver}: MAE W per appliance and rung\n\n");
        let ids: Vec<String> = l
            .rungs
            .iter()
            .find_map(|r| r.scores.get(k).and_then(|s| s.1.as_ref().ok()))
            .map(|rep| rep.appliances.iter().map(|a| a.id.clone()).collect())
            .unwrap_or_default();
        o += &format!(
            "| rung | {} |\n|---|{}\n",
            ids.join(" | "),
            "---:|".repeat(ids.len())
        );
        for r in &l.rungs {
            let cells: Vec<String> = match r.scores.get(k).map(|s| &s.1) {
                Some(Ok(rep)) => ids
                    .iter()
                    .map(|id| {
                        rep.appliances
                            .iter()
                            .find(|a| a.id == *id)
                            .map_or("–".into(), |a| format!("{:.1}", a.scores.mae_w))
                    })
                    .collect(),
                _ => vec!["–".into(); ids.len()],
            };
            o += &format!("| {} | {} |\n", r.name, cells.join(" | "));
        }
        o += &format!(
            "\n#### {solver}: per conductor (mean MAE W / mean F1 of the appliances on it)\n\n"
        );
        for r in &l.rungs {
            if let Some(Ok(rep)) = r.scores.get(k).map(|s| &s.1) {
                let cond: Vec<String> = per_conductor(r, rep)
                    .iter()
                    .map(|(c, m, f)| format!("{c} {m:.1} / {f:.2}"))
                    .collect();
                o += &format!("- {}: {}\n", r.name, cond.join(", "));
            }
        }
    }
    o
}

/// The whole ladder as JSON.
fn json_of(l: &Ladder) -> Value {
    json!({
        "format": LAYOUTS_FORMAT,
        "caution": CAUTION,
        "home": l.home,
        "solvers": l.solvers,
        "train_s": l.train_s,
        "test_s": l.test_s,
        "rungs": l.rungs.iter().map(|r| json!({
            "family": r.family,
            "name": r.name,
            "note": r.note,
            "folder": r.dir.display().to_string(),
            "scenario": r.scenario_file.display().to_string(),
            "card": r.card,
            "appliance_conductors": r.lines.iter().map(|(id, l)| (id.clone(), json!(l))).collect::<serde_json::Map<_, _>>(),
            "scores": r.scores.iter().map(|(solver, res)| match res {
                Ok(rep) => json!({
                    "solver": solver,
                    "report": rep.to_json(),
                    "per_conductor": per_conductor(r, rep).iter().map(|(c, m, f)| json!({ "conductor": c, "mean_mae_w": m, "mean_f1": f })).collect::<Vec<_>>(),
                }),
                Err(e) => json!({ "solver": solver, "failure": e }),
            }).collect::<Vec<_>>(),
        })).collect::<Vec<_>>(),
    })
}
