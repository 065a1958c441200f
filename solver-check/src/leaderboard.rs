//! Several solvers on one task, ranked: overall MAE decides the order; each
//! solver's difference to the best comes with a 95 % interval from the
//! paired bootstrap over days of [`crate::compare`] (both scored on the same
//! resampled days); per appliance, every solver's MAE with the best marked.

use crate::compare::compare;
use crate::contract::LEADERBOARD_FORMAT;
use crate::render::{aligned, Render};
use crate::roundtrip::SolverRun;
use crate::score::Report;
use serde_json::{json, Value};

/// A ranked solver: its report and its MAE difference to the best.
pub struct Ranked {
    /// The solver's name (built-in name or command).
    pub solver: String,
    /// Wall-clock time the solver took, s.
    pub seconds: f64,
    /// How it was confined (the Landlock rules in force, or why none).
    pub confinement: String,
    /// Its scores on the test period.
    pub report: Report,
    /// (difference, low, high) of overall MAE against the best (W); the
    /// best itself has none.
    pub to_best: Option<(f64, Option<f64>, Option<f64>)>,
}

/// The ranked table, and the solvers that got no score.
pub struct Board {
    /// The scored solvers, best overall MAE first.
    pub ranked: Vec<Ranked>,
    /// (solver, why) for each solver that got no score.
    pub failed: Vec<(String, String)>,
    /// Bootstrap resamples behind the intervals of `to_best`.
    pub resamples: usize,
}

fn mae_interval(
    r: &Report,
    best: &Report,
    resamples: usize,
    seed: u64,
) -> Option<(f64, Option<f64>, Option<f64>)> {
    let c = compare(r, best, resamples, seed).ok()?;
    let (_, diffs) = c.rows.iter().find(|(id, _)| id == "overall")?;
    let d = diffs.iter().find(|d| d.metric == "mae_w")?;
    Some((d.delta?, d.lo, d.hi))
}

/// Ranks the outcomes by overall MAE (lower is better; ties keep the order given).
pub fn rank(outcomes: Vec<SolverRun>, resamples: usize, seed: u64) -> Board {
    let mut ranked = Vec::new();
    let mut failed = Vec::new();
    for o in outcomes {
        match o.result {
            Ok(report) => ranked.push(Ranked {
                solver: o.solver,
                seconds: o.seconds,
                confinement: o.confinement,
                report,
                to_best: None,
            }),
            Err(f) => failed.push((o.solver, f.to_string())),
        }
    }
    ranked.sort_by(|a, b| a.report.overall.mae_w.total_cmp(&b.report.overall.mae_w));
    if let Some((best, rest)) = ranked.split_first_mut() {
        for r in rest {
            r.to_best = mae_interval(&r.report, &best.report, resamples, seed);
        }
    }
    Board {
        ranked,
        failed,
        resamples,
    }
}

fn f3(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.3}")).unwrap_or_else(|| "–".into())
}

const HEAD: [&str; 9] = [
    "rank",
    "solver",
    "MAE W",
    "MAE − best W (95 %)",
    "NDE",
    "F1",
    "accuracy",
    "match",
    "seconds",
];

impl Board {
    fn overall_cells(&self) -> Vec<Vec<String>> {
        self.ranked
            .iter()
            .enumerate()
            .map(|(k, r)| {
                let o = &r.report.overall;
                let diff = match r.to_best {
                    None if k == 0 => "best".to_string(),
                    None => "–".to_string(),
                    Some((d, lo, hi)) => match (lo, hi) {
                        (Some(lo), Some(hi)) => format!("{d:+.1} [{lo:+.1}, {hi:+.1}]"),
                        _ => format!("{d:+.1}"),
                    },
                };
                vec![
                    (k + 1).to_string(),
                    r.solver.clone(),
                    format!("{:.1}", o.mae_w),
                    diff,
                    f3(o.nde),
                    format!("{:.3}", o.f1),
                    f3(o.accuracy),
                    f3(o.match_rate),
                    format!("{:.1}", r.seconds),
                ]
            })
            .collect()
    }

    /// Per appliance: each ranked solver's MAE, the lowest marked `*`.
    fn appliance_cells(&self) -> (Vec<String>, Vec<Vec<String>>) {
        // Columns by rank (the table above names each), so long commands
        // do not stretch them.
        let mut head = vec!["MAE W by rank".to_string()];
        head.extend((1..=self.ranked.len()).map(|k| format!("#{k}")));
        let Some(first) = self.ranked.first() else {
            return (head, Vec::new());
        };
        let rows = first
            .report
            .appliances
            .iter()
            .enumerate()
            .map(|(a, app)| {
                let maes: Vec<f64> = self
                    .ranked
                    .iter()
                    .map(|r| r.report.appliances[a].scores.mae_w)
                    .collect();
                let best = maes.iter().copied().fold(f64::INFINITY, f64::min);
                let mut row = vec![app.id.clone()];
                row.extend(
                    maes.iter()
                        .map(|m| format!("{m:.1}{}", if *m == best { " *" } else { "" })),
                );
                row
            })
            .collect();
        (head, rows)
    }

    fn period(&self) -> String {
        self.ranked.first().map_or(String::new(), |r| {
            format!(
                "{} intervals of {} s",
                r.report.plan.rows,
                r.report.plan.interval_ms as f64 / 1000.0
            )
        })
    }

    fn failures(&self) -> String {
        self.failed
            .iter()
            .map(|(s, f)| format!("no score for {s}: {}\n", f.lines().next().unwrap_or("")))
            .collect()
    }
}

impl Render for Board {
    /// Text: the ranked table, the per-appliance table, the failures.
    fn to_text(&self) -> String {
        let (ah, ar) = self.appliance_cells();
        let mut o = format!("ranked by overall MAE on the test period ({}); difference to the best with a 95 % paired bootstrap interval over days ({} resamples)\n\n", self.period(), self.resamples);
        o += &aligned(&HEAD.map(String::from), &self.overall_cells(), 2);
        o += "\n";
        o += &aligned(&ah, &ar, 1);
        o + &self.failures()
    }

    /// Markdown: the same two tables.
    fn to_markdown(&self) -> String {
        let (ah, ar) = self.appliance_cells();
        let mut o = format!("Ranked by overall MAE on the test period ({}); difference to the best with a 95 % paired bootstrap interval over days.\n\n", self.period());
        o += &markdown(&HEAD.map(String::from), &self.overall_cells(), 2);
        o += "\n";
        o += &markdown(&ah, &ar, 1);
        o + &self.failures()
    }

    /// JSON (`loadloom-leaderboard/1`).
    fn to_json(&self) -> Value {
        json!({
            "format": LEADERBOARD_FORMAT,
            "ranked_by": "mae_w",
            "resamples": self.resamples,
            "solvers": self.ranked.iter().enumerate().map(|(k, r)| {
                let mut v = r.report.to_json();
                v["rank"] = json!(k + 1);
                v["solver"] = json!({ "command": r.solver, "seconds": r.seconds, "confinement": r.confinement });
                v["mae_to_best_w"] = match r.to_best {
                    Some((d, lo, hi)) => json!({ "delta": d, "ci_low": lo, "ci_high": hi }),
                    None => Value::Null,
                };
                v
            }).collect::<Vec<_>>(),
            "failed": self.failed.iter().map(|(s, f)| json!({ "solver": s, "failure": f })).collect::<Vec<_>>(),
        })
    }
}

fn markdown(head: &[String], rows: &[Vec<String>], left: usize) -> String {
    let rule: String = (0..head.len())
        .map(|k| if k < left { "---|" } else { "---:|" })
        .collect();
    let mut o = format!("| {} |\n|{rule}\n", head.join(" | "));
    for r in rows {
        o += &format!("| {} |\n", r.join(" | "));
    }
    o
}

/// The round trip's note on processes a solver left running.
pub fn leftovers_note(n: usize) -> String {
    match n {
        0 => String::new(),
        1 => "; 1 process it left running was stopped".into(),
        n => format!("; {n} processes it left running were stopped"),
    }
}

/// One solver's scored outcome: the line about its run, then its score
/// report (JSON: the score report with a `solver` object).
pub struct SolverReport<'a> {
    /// The solver's run.
    pub outcome: &'a SolverRun,
    /// Its score.
    pub report: &'a Report,
}

impl SolverReport<'_> {
    /// The line about the run: time, task, log, confinement, leftovers.
    fn run_line(&self) -> String {
        let o = self.outcome;
        format!(
            "solver {} finished in {:.1} s (task {}, log {}); {}{}\n",
            o.solver,
            o.seconds,
            o.task_dir.display(),
            o.log.display(),
            o.confinement,
            leftovers_note(o.leftovers)
        )
    }
}

impl Render for SolverReport<'_> {
    fn to_text(&self) -> String {
        self.run_line() + &self.report.to_text()
    }
    fn to_markdown(&self) -> String {
        self.run_line() + &self.report.to_markdown()
    }
    fn to_json(&self) -> Value {
        let o = self.outcome;
        let mut v = self.report.to_json();
        v["solver"] = json!({ "command": o.solver, "seconds": o.seconds, "task": o.task_dir, "estimate": o.estimate, "log": o.log, "confinement": o.confinement, "leftovers_stopped": o.leftovers });
        v
    }
}

/// Why a solver got no score, with where to look (the command exits 1).
pub fn failure_message(o: &SolverRun, f: &crate::roundtrip::Failure) -> String {
    format!("error: solver {}: {f}\n  --> task {}, log {} ({}{})\n  = help: run the solver by hand on the task folder to see what went wrong; no score was given", o.solver, o.task_dir.display(), o.log.display(), o.confinement, leftovers_note(o.leftovers))
}
