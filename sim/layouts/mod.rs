//! The layout ladder: one solver (or several) on a ladder of layouts
//! derived from one home — phase assignment, line-to-line share,
//! partial-phase loads, supply, metering. Each rung's scenario is written
//! as a file of its own beside its results and is simulated from that file,
//! so `loadloom roundtrip RUNG.toml` rebuilds the rung alone.

pub(crate) mod doc;
mod plot;
mod report;
pub(crate) mod rungs;
pub(crate) mod wire;

pub use plot::plot_svg;

use crate::roundtrip::Plan;
use crate::scenario::{self, Scenario, Wiring};
use doc::{text, Doc, NodeExt};
use rungs::{LadderHome, LayoutRung};
use serde_json::{json, Value};
use solver_check::contract::line_name;
use solver_check::roundtrip::Solver;
use solver_check::score::Report;
use std::path::{Path, PathBuf};

/// The shape of the ladder.
pub struct Shape {
    /// Seeded random phase permutations.
    pub shuffles: usize,
    /// Targets of the line-to-line share of the movable appliances' energy.
    pub shares: Vec<f64>,
    /// Source voltage unbalance factors tried.
    pub unbalances: Vec<f64>,
}

impl Default for Shape {
    fn default() -> Self {
        Shape {
            shuffles: 3,
            shares: vec![0.0, 0.25, 0.5, 0.75, 1.0],
            // 2 %: the EN 50160 limit for 95 % of a week's 10-minute values;
            // 4 %: twice that (from memory).
            unbalances: vec![0.02, 0.04],
        }
    }
}

/// Every rung of the home's ladder, the home as written first; the rungs
/// choose by each appliance's expected energy over the `window_s` seconds
/// each rung simulates (a week's average would misjudge a day of January
/// heating, or a car that charges later in the week).
pub fn build(
    path: &Path,
    seed: Option<u64>,
    shape: &Shape,
    window_s: f64,
) -> Result<(Scenario, Vec<LayoutRung>), scenario::Error> {
    let mut s = scenario::load(path)?;
    let mut d = Doc::load(path)?;
    if let Some(seed) = seed {
        s.run.seed = seed;
        d.section("run")
            .set("seed", doc::node(scenario::source::Val::Int(seed as i64)));
    }
    let mut window = s.clone();
    window.run.length_s = window_s;
    let f = crate::summary::figures(&window);
    let home = LadderHome {
        doc: &d,
        s: &s,
        kwh: f.apps.iter().map(|a| a.kwh_per_day).collect(),
        peak_w: f.apps.iter().map(|a| a.peak_w).collect(),
    };
    let mut out = vec![LayoutRung {
        family: "home",
        name: "as written".into(),
        note: format!(
            "{} on {} {} V, {}",
            s.name,
            s.home.supply.name(),
            s.home.voltage_v,
            if s.meter.total_only {
                "total only"
            } else {
                "a channel per line"
            }
        ),
        doc: d.clone(),
    }];
    out.extend(rungs::phases(&home, s.run.seed, shape.shuffles));
    out.extend(rungs::line_to_line(&home, &shape.shares));
    out.extend(rungs::partial(&home));
    let supplies: Vec<LayoutRung> = rungs::SUPPLIES
        .iter()
        .map(|to| rungs::supply(&home, to))
        .collect();
    // Unbalance needs three phases: on the home's own supply if it has
    // them, otherwise on its 230/400 V form.
    let three = if s.home.supply == scenario::SupplyKind::ThreePhase {
        &out[0]
    } else {
        &supplies[1]
    };
    let unbalanced: Vec<LayoutRung> = shape
        .unbalances
        .iter()
        .map(|u| rungs::unbalance(three, *u))
        .collect();
    out.extend(supplies);
    out.extend(unbalanced);
    out.push(rungs::total_only(&home));
    Ok((s, out))
}

/// A short folder-safe name.
pub fn slug(name: &str) -> String {
    name.to_lowercase()
        .chars()
        .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
        .collect::<String>()
        .split('-')
        .filter(|p| !p.is_empty())
        .collect::<Vec<_>>()
        .join("-")
}

/// One rung's outcome: where it lives, its card and each solver's scores.
pub struct RungResult {
    /// The family of rungs it belongs to (phase assignment, supply, metering, …).
    pub family: &'static str,
    /// The rung's name in reports.
    pub name: String,
    /// What the rung changed in the home, in words.
    pub note: String,
    /// The rung's folder (its scenario file and datasets).
    pub dir: PathBuf,
    /// The self-contained scenario file the rung was simulated from.
    pub scenario_file: PathBuf,
    /// The layout's difficulty card (empty when the rung failed before data).
    pub card: Value,
    /// Each appliance's conductors in this rung (`l1` …).
    pub lines: Vec<(String, Vec<String>)>,
    /// Each solver's scores, or why there are none: a line of the report,
    /// not an error of the command, so a `String`.
    pub scores: Vec<(String, Result<Report, String>)>,
}

impl RungResult {
    /// The rung with the same failure for every solver: its file could
    /// not be written or simulated, so no solver ran.
    fn failed(mut self, solvers: &[Solver], m: &scenario::Error) -> RungResult {
        self.scores = solvers
            .iter()
            .map(|x| (x.describe(), Err(one_line(m))))
            .collect();
        self
    }
}

/// An error as one line of a report: what, where, and its causes.
fn one_line(e: &scenario::Error) -> String {
    let mut line = format!("{} ({})", e.message, e.file.display());
    for c in &e.causes {
        line += &format!(": {c}");
    }
    line
}

/// The whole ladder of one home.
pub struct Ladder {
    /// The home's scenario name.
    pub home: String,
    /// The solvers' names, in the order given.
    pub solvers: Vec<String>,
    /// Length of each rung's training period, s.
    pub train_s: f64,
    /// Length of each rung's test period, s.
    pub test_s: f64,
    /// The rungs in ladder order, the home as written first.
    pub rungs: Vec<RungResult>,
}

impl Ladder {
    /// Whether a rung failed for any solver (the command then exits 1).
    pub fn any_failed(&self) -> bool {
        self.rungs
            .iter()
            .any(|r| r.scores.iter().any(|s| s.1.is_err()))
    }
}

/// Writes `ladder.json` (the JSON report) and `scores.svg` (each score
/// across the rungs) into the ladder's folder.
pub fn write_reports(l: &Ladder, dir: &Path) -> Result<(), scenario::Error> {
    use solver_check::render::{Render, ReportForm};
    let json = dir.join("ladder.json");
    std::fs::write(&json, l.render(ReportForm::Json)).map_err(|e| not_written(&json, &e))?;
    let svg = dir.join("scores.svg");
    std::fs::write(&svg, plot_svg(l)).map_err(|e| not_written(&svg, &e))
}

/// A file of the ladder that could not be written (a failed run, exit 1).
fn not_written(file: &Path, e: &std::io::Error) -> scenario::Error {
    let help = "check free space and permissions of the output folder";
    scenario::Error::file(file, "cannot write this file", help)
        .caused_by(e)
        .failed()
}

/// The command that rebuilds a rung alone.
pub fn rerun_command(file: &Path, solvers: &[Solver], p: &Plan) -> String {
    let mut c = format!("loadloom roundtrip {}", file.display());
    for s in solvers {
        c += &format!(" --solver {:?}", s.describe());
    }
    c + &format!(
        " --train {} --test {}",
        wire::duration(p.train_s),
        wire::duration(p.test_s)
    )
}

/// Writes the rung's scenario file (header, then the tree) and reads it back.
fn write_rung(
    r: &LayoutRung,
    k: usize,
    home: &str,
    out: &Path,
    solvers: &[Solver],
    p: &Plan,
) -> Result<(PathBuf, Scenario), scenario::Error> {
    let dir = out
        .join(format!("{home}-layouts"))
        .join(format!("{k:02}-{}", slug(&r.name)));
    std::fs::create_dir_all(&dir).map_err(|e| not_written(&dir, &e))?;
    let file = dir.join(format!("{home}-{}.toml", slug(&r.name)));
    let mut d = r.doc.clone();
    let length = wire::duration(p.train_s + p.test_s).replace(['d', 'h', 's'], "");
    let unit = wire::duration(p.train_s + p.test_s)
        .chars()
        .last()
        .unwrap_or('s');
    d.section("run")
        .set("length", text(&format!("{length} {unit}")));
    let header = format!(
        "Rung {k} of the layout ladder of {home}: {} / {}.\n{}\nRebuild this rung alone:\n  {}",
        r.family,
        r.name,
        r.note,
        rerun_command(&file, solvers, p)
    );
    std::fs::write(&file, d.render(&header)).map_err(|e| not_written(&file, &e))?;
    let s = scenario::load(&file).map_err(|mut e| {
        e.message = format!(
            "rung \"{}\" made a scenario loadloom refuses (a bug): {}",
            r.name, e.message
        );
        e
    })?;
    Ok((file, s))
}

/// Runs every rung: writes its scenario, simulates it from that file,
/// hands the task to each solver and scores it.
pub fn run(
    path: &Path,
    seed: Option<u64>,
    shape: &Shape,
    out: &Path,
    p: &Plan,
    solvers: &[Solver],
    progress: &mut dyn FnMut(&str),
) -> Result<Ladder, scenario::Error> {
    let (s, all) = build(path, seed, shape, p.train_s + p.test_s)?;
    let mut rows = Vec::new();
    for (k, r) in all.iter().enumerate() {
        progress(&format!("{}: {} / {}", s.name, r.family, r.name));
        rows.push(run_rung(r, k, &s.name, out, p, solvers)?);
    }
    Ok(Ladder {
        home: s.name,
        solvers: solvers.iter().map(Solver::describe).collect(),
        train_s: p.train_s,
        test_s: p.test_s,
        rungs: rows,
    })
}

fn run_rung(
    r: &LayoutRung,
    k: usize,
    home: &str,
    out: &Path,
    p: &Plan,
    solvers: &[Solver],
) -> Result<RungResult, scenario::Error> {
    let mut res = RungResult {
        family: r.family,
        name: r.name.clone(),
        note: r.note.clone(),
        dir: PathBuf::new(),
        scenario_file: PathBuf::new(),
        card: Value::Null,
        lines: vec![],
        scores: vec![],
    };
    let (file, s) = match write_rung(r, k, home, out, solvers, p) {
        Ok(x) => x,
        Err(m) => return Ok(res.failed(solvers, &m)),
    };
    let dir = file.parent().expect("in its folder").to_path_buf();
    res.dir = dir.clone();
    res.scenario_file = file.clone();
    // A rung the simulator refuses (a voltage solve that does not settle
    // with every load on one line, say) is reported, and the ladder goes on.
    let prep = match crate::roundtrip::prepare(&s, &dir, p) {
        Ok(prep) => prep,
        Err(m) => return Ok(res.failed(solvers, &m)),
    };
    let outcomes = crate::roundtrip::board(&prep, solvers, p.limit, &p.allow_read, &mut |_, _| {})?;
    let manifest: Value = std::fs::read_to_string(prep.dataset.join("manifest.json"))
        .ok()
        .and_then(|t| serde_json::from_str(&t).ok())
        .unwrap_or(Value::Null);
    res.card = card(&s, &manifest);
    res.lines = s
        .appliances
        .iter()
        .map(|a| (a.id.clone(), a.lines().into_iter().map(line_name).collect()))
        .collect();
    res.scores = outcomes
        .into_iter()
        .map(|o| (o.solver.clone(), o.result.map_err(|f| f.to_string())))
        .collect();
    Ok(res)
}

/// The layout's difficulty card: the dataset's own card (coincident
/// switching, ambiguous pairs) and the layout's figures — supply, metering,
/// source unbalance, each line's share of the energy and their imbalance
/// (largest deviation from the mean over the mean; common practice, no
/// source), the energy drawn line-to-line and three-phase, and the
/// appliances drawing on part of the phases.
pub fn card(s: &Scenario, m: &Value) -> Value {
    let lines = s.home.supply.lines();
    let e: Vec<f64> = (0..lines)
        .map(|x| {
            m["summary"]["conductor_energy_kwh"][line_name(x)]
                .as_f64()
                .unwrap_or(0.0)
        })
        .collect();
    let total: f64 = e.iter().sum();
    let mean = total / lines as f64;
    let imbalance = if mean > 0.0 {
        e.iter().map(|x| (x - mean).abs()).fold(0.0, f64::max) / mean
    } else {
        0.0
    };
    let energy = |pred: &dyn Fn(&scenario::Appliance) -> bool| -> f64 {
        let all: f64 = m["appliances"].as_array().map_or(0.0, |v| {
            v.iter().filter_map(|a| a["energy_kwh"].as_f64()).sum()
        });
        let some: f64 = s
            .appliances
            .iter()
            .zip(m["appliances"].as_array().into_iter().flatten())
            .filter(|(a, _)| pred(a))
            .filter_map(|(_, j)| j["energy_kwh"].as_f64())
            .sum();
        // (+ 0.0 turns the −0.0 of an empty float sum into 0.)
        if all > 0.0 {
            some / all + 0.0
        } else {
            0.0
        }
    };
    let d = &m["summary"]["difficulty"];
    let ambiguous: u64 = d["ambiguous_pairs_per_conductor"]
        .as_object()
        .map_or(0, |o| o.values().filter_map(Value::as_u64).sum());
    json!({
        "supply": format!("{} {} V", s.home.supply.name(), s.home.voltage_v),
        "channels": if s.meter.total_only { "total" } else { "per-line" },
        "voltage_unbalance": s.home.source.unbalance,
        "line_energy_share": (0..lines).map(|x| (line_name(x), json!(if total > 0.0 { e[x] / total } else { 0.0 }))).collect::<serde_json::Map<_, _>>(),
        "line_imbalance": imbalance,
        "line_to_line_energy_share": energy(&|a| a.connections().iter().any(|c| c.is_line_to_line())),
        "three_phase_energy_share": energy(&|a| a.connections().contains(&Wiring::ThreePhase)),
        "partial_phase": s.appliances.iter().filter(|a| partial_phase(a, lines)).map(|a| a.id.clone()).collect::<Vec<_>>(),
        "coincident_switching_share": d["coincident_switching_share"],
        "ambiguous_pairs": ambiguous,
    })
}

/// Draws on some of the supply's lines by more than one connection, or
/// three-phase with a single-phase part.
fn partial_phase(a: &scenario::Appliance, lines: usize) -> bool {
    let c = a.connections();
    c.len() > 1
        && (a.lines().len() < lines
            || c.iter()
                .any(|x| !x.is_line_to_line() && *x != Wiring::ThreePhase))
}
