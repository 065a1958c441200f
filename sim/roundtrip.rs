//! Glue of the round trip: generate the dataset with the simulator, then hand
//! it to `solver_check::roundtrip` (which reads files only). The suite runs
//! one solver over many scenarios and a ladder of difficulty.

use crate::dataset::Format;
use crate::pipeline;
use crate::scenario::model::DropMode;
use crate::scenario::{Error, Scenario};
use serde_json::{json, Value};
use solver_check::contract::{line_name, SUITE_FORMAT};
use solver_check::render::Render;
use solver_check::roundtrip::{PreparedTask, Reveal, Solver, SolverRun, Split};
use solver_check::score::Report;
use std::path::{Path, PathBuf};
use std::time::Duration;

/// How to run a round trip: the periods, what the solver is told, which
/// solver, its time limit.
pub struct Plan {
    /// Length of the training period, s.
    pub train_s: f64,
    /// Length of the test period, s (scored).
    pub test_s: f64,
    /// What the solver is told about the test home beyond its meters.
    pub reveal: Reveal,
    /// The solver: a built-in one or a command.
    pub solver: Solver,
    /// Wall-clock time the solver may take before it is stopped.
    pub limit: Duration,
    /// The file the solver must write (`estimate.parquet` or `estimate.csv`).
    pub estimate_name: &'static str,
    /// Folders a confined solver may read besides its own (`--allow-read`).
    pub allow_read: Vec<std::path::PathBuf>,
}

/// The scenario files of a round trip: the one given, or with `suite`
/// every `*.toml` of a folder (default `scenarios/`; a file given to the
/// suite is run alone).
pub fn scenario_paths(scenario: Option<&Path>, suite: bool) -> Result<Vec<PathBuf>, Error> {
    match (scenario, suite) {
        (Some(p), false) => Ok(vec![p.to_path_buf()]),
        (None, false) => Err(Error::option(
            "--solver",
            "nothing to run the solver on",
            "give a SCENARIO (or --dataset DIR), or --suite to run the demo scenarios",
        )),
        (p, true) => {
            let p = p.map_or_else(|| PathBuf::from("scenarios"), Path::to_path_buf);
            if !p.is_dir() {
                return Ok(vec![p]);
            }
            let help = "give --suite a folder of scenarios (*.toml) that can be read";
            let mut v: Vec<PathBuf> = std::fs::read_dir(&p)
                .map_err(|e| {
                    Error::file(&p, "cannot read the folder of scenarios", help).caused_by(&e)
                })?
                .filter_map(|e| e.ok())
                .map(|e| e.path())
                .filter(|x| x.extension().is_some_and(|e| e == "toml"))
                .collect();
            if v.is_empty() {
                return Err(Error::file(&p, "no scenario files (*.toml) here", help));
            }
            v.sort();
            Ok(v)
        }
    }
}

/// The round trip cuts meters and truth at the same rows, so the meters
/// table must keep a row per interval: dropouts written as missing rows
/// are refused before anything is simulated (as null readings they are fine).
pub fn check_meter_rows(scenarios: &[Scenario]) -> Result<(), Error> {
    let gapped = |s: &&Scenario| {
        s.faults
            .dropouts
            .as_ref()
            .is_some_and(|d| d.mode == DropMode::Missing)
    };
    match scenarios.iter().find(gapped) {
        Some(s) => Err(Error::at_place(
            // The scenario's file: the place its supply was read from.
            &s.home.supply_at,
            "faults.dropouts",
            "dropouts with as = \"missing\" leave rows out of the meters table, \
             and a round trip needs a meters row per interval",
            "write the dropouts as = \"null\"",
        )),
        None => Ok(()),
    }
}

/// Every reporting interval (with `suite`, every rung's, up to 1 min) must
/// divide both the training and the test period.
pub fn check_periods(
    scenarios: &[Scenario],
    train_s: f64,
    test_s: f64,
    suite: bool,
) -> Result<(), Error> {
    for s in scenarios {
        let per = if suite {
            60.0f64.max(s.meter.interval_s)
        } else {
            s.meter.interval_s
        };
        for (name, v) in [("train", train_s), ("test", test_s)] {
            if ((v / per).round() - v / per).abs() > 1e-6 {
                return Err(Error::option(
                    &format!("--{name}"),
                    format!(
                        "not a whole number of reporting intervals ({per} s) of {}",
                        s.name
                    ),
                    format!("give a multiple of {per} s"),
                ));
            }
        }
    }
    Ok(())
}

/// Simulates `s` over train + test and writes the task and the scored
/// truth, for any number of solvers.
pub fn prepare(s: &Scenario, work: &Path, p: &Plan) -> Result<PreparedTask, Error> {
    let mut s = s.clone();
    s.run.length_s = p.train_s + p.test_s;
    let train_rows = (p.train_s / s.meter.interval_s).round() as usize;
    // Row groups end at the train/test boundary too, so each period is
    // copied into the task as encoded (no decoding, no re-encoding).
    let written = pipeline::write_cut(&s, work, Format::Parquet, &mut |_| {}, &[train_rows])
        .map_err(|e| pipeline::write_error(&e, work))?;
    let split = Split {
        train: 0..train_rows,
        test: train_rows..written.rows as usize,
    };
    solver_check::roundtrip::prepare(&written.dir, work, &split, p.reveal, p.estimate_name)
        .map_err(|e| task_failed(work, &e))
}

/// Writing the task under `work` failed (a failed run, exit 1), or refused
/// the dataset (its meters have missing rows: bad input, exit 2).
fn task_failed(work: &Path, e: &std::io::Error) -> Error {
    let error = Error::file(work, "preparing the task failed", "see the cause").caused_by(e);
    if e.kind() == std::io::ErrorKind::InvalidData {
        error
    } else {
        error.failed()
    }
}

/// Reuses a dataset already written: the first `train_s` as training, the
/// next `test_s` as test. Err names the dataset and the fix (bad input).
pub fn prepare_dataset(dir: &Path, work: &Path, p: &Plan) -> Result<PreparedTask, Error> {
    let ds = solver_check::Dataset::open(dir)?;
    ds.verify()?;
    let rows = |secs: f64| (secs / ds.interval_s).round() as usize;
    let (train, test) = (rows(p.train_s), rows(p.test_s));
    if train + test > ds.rows as usize {
        return Err(Error::file(
            dir,
            format!(
                "--train and --test ask for {} rows, the dataset has {}",
                train + test,
                ds.rows
            ),
            format!(
                "shorten the periods (the dataset covers {:.2} d at {} s)",
                ds.rows as f64 * ds.interval_s / 86400.0,
                ds.interval_s
            ),
        ));
    }
    let split = Split {
        train: 0..train,
        test: train..train + test,
    };
    solver_check::roundtrip::prepare(dir, work, &split, p.reveal, p.estimate_name)
        .map_err(|e| task_failed(work, &e))
}

/// Runs every solver on the prepared task, one after another, each in its
/// own folder `work/solvers/N-name/`.
pub fn board(
    prep: &PreparedTask,
    solvers: &[Solver],
    limit: Duration,
    allow_read: &[std::path::PathBuf],
    progress: &mut dyn FnMut(usize, &str),
) -> Result<Vec<SolverRun>, Error> {
    let mut out = Vec::new();
    for (k, solver) in solvers.iter().enumerate() {
        let name = solver.describe();
        progress(k, &name);
        let slug: String = name
            .chars()
            .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
            .take(40)
            .collect();
        let slot = prep.work.join("solvers").join(format!("{}-{slug}", k + 1));
        let failed = |e: std::io::Error| {
            let help = "check free space and permissions of the output folder";
            Error::file(&slot, format!("running {name} failed"), help)
                .caused_by(&e)
                .failed()
        };
        std::fs::create_dir_all(&slot).map_err(failed)?;
        out.push(
            solver_check::roundtrip::run_solver(prep, solver, &slot, limit, allow_read)
                .map_err(failed)?,
        );
    }
    Ok(out)
}

/// Simulates `s` over train + test, writes the task, runs the solver, scores.
/// Err is an I/O failure of our own (writing the dataset or the task).
pub fn once(s: &Scenario, work: &Path, p: &Plan) -> Result<SolverRun, Error> {
    let prep = prepare(s, work, p)?;
    run_solver(&prep, &p.solver, work, p)
}

/// Runs the solver on a prepared task in `work`; the error is ours (a
/// folder that cannot be written), not the solver's (that is its outcome).
pub fn run_solver(
    prep: &PreparedTask,
    solver: &Solver,
    work: &Path,
    p: &Plan,
) -> Result<SolverRun, Error> {
    solver_check::roundtrip::run_solver(prep, solver, work, p.limit, &p.allow_read).map_err(|e| {
        let help = "check free space and permissions of the output folder";
        Error::file(work, "running the solver failed", help)
            .caused_by(&e)
            .failed()
    })
}

/// A rung of the difficulty ladder: a name and what it changes.
pub struct Rung {
    /// The rung's name in reports (`interval 1 min`).
    pub name: &'static str,
    /// Changes a home's scenario to this rung's difficulty.
    pub apply: fn(&mut Scenario),
}

/// Adds unlisted background loads, one per line, so that they draw `share`
/// of the home's energy: modulating, constant-power, a reflected walk within
/// [50 %, 100 %] of their rating (mean 75 %), updated every 5 min.
pub fn add_background(s: &mut Scenario, share: f64) {
    use crate::scenario::{Appliance, Behaviour, Draw, LoadKind, State, Wiring};
    let f = crate::summary::figures(s);
    let mean_w: f64 = f.apps.iter().map(|a| a.kwh_per_day).sum::<f64>() * 1000.0 / 24.0;
    let target_w = mean_w * share / (1.0 - share);
    let n = s.home.supply.lines();
    for x in 0..n {
        let wiring = Wiring::LineNeutral(x);
        let rated = target_w / n as f64 / 0.75;
        let k = LoadKind::Electronic;
        let draw = Draw {
            wiring,
            p_w: rated,
            q_var: 0.2 * rated,
            load: k,
            zip_p: k.default_zip_p(),
            zip_q: k.default_zip_q(),
            nominal_v: wiring.nominal_v(s.home.supply, s.home.voltage_v),
            rated_v: None,
            harmonics: k.default_harmonics(),
        };
        s.unmetered.push(Appliance {
            id: format!("background_{}", line_name(x)),
            label: "unlisted background loads".into(),
            template: None,
            end_use: "other".into(),
            wiring,
            behaviour: Behaviour::Modulating {
                min: 0.5,
                wander: 0.05,
                every_s: 300.0,
                session: None,
            },
            states: vec![
                State {
                    name: "off".into(),
                    draws: vec![],
                    inrush: None,
                },
                State {
                    name: "on".into(),
                    draws: vec![draw],
                    inrush: None,
                },
            ],
            on_threshold_w: 0.0,
            alternatives: vec![],
            when_dark_s: None,
            role: crate::scenario::Role::Load,
        });
    }
}

/// The ladder: the scenario as written, then more meter noise, a larger
/// unmetered background load, then coarser reporting intervals.
pub const LADDER: [Rung; 6] = [
    Rung {
        name: "as written",
        apply: |_| {},
    },
    Rung {
        name: "noise 1 % + 5 W",
        apply: |s| {
            s.meter.noise_relative = 0.01;
            s.meter.noise_floor_w = 5.0;
        },
    },
    Rung {
        name: "noise 3 % + 15 W",
        apply: |s| {
            s.meter.noise_relative = 0.03;
            s.meter.noise_floor_w = 15.0;
        },
    },
    Rung {
        name: "unmetered 20 %",
        apply: |s| add_background(s, 0.2),
    },
    Rung {
        name: "interval 10 s",
        apply: |s| s.meter.interval_s = s.meter.interval_s.max(10.0),
    },
    Rung {
        name: "interval 1 min",
        apply: |s| s.meter.interval_s = s.meter.interval_s.max(60.0),
    },
];

/// One home on one rung of the suite's ladder.
pub struct SuiteRow {
    /// The home's scenario name.
    pub scenario: String,
    /// The rung's name.
    pub rung: &'static str,
    /// The scores; Err holds why there are none (a failed solver, or a
    /// rung skipped because it would change nothing: see `skipped`): a line
    /// of the report, not an error of the command, so a `String`.
    pub result: Result<Report, String>,
    /// Why the rung was not run, when it would only repeat "as written".
    pub skipped: Option<String>,
}

/// Why a rung that leaves the scenario as it is gets skipped.
fn same_as_written(s: &Scenario, rung: &str) -> String {
    format!(
        "skipped: {} already reports every {} s, so \"{rung}\" would repeat \"as written\"",
        s.name, s.meter.interval_s
    )
}

/// Every scenario at every rung of the ladder: the suite's report.
pub struct Suite {
    /// One row per scenario and rung, in the order run.
    pub rows: Vec<SuiteRow>,
}

impl Suite {
    /// Whether a solver failed on any rung (the command then exits 1).
    pub fn any_failed(&self) -> bool {
        self.rows
            .iter()
            .any(|r| r.result.is_err() && r.skipped.is_none())
    }
}

/// Runs the plan on every scenario at every rung of the ladder.
pub fn suite(
    scenarios: &[Scenario],
    out: &Path,
    p: &Plan,
    progress: &mut dyn FnMut(&str, &str),
) -> Result<Suite, Error> {
    let mut rows = Vec::new();
    for s in scenarios {
        for rung in &LADDER {
            progress(&s.name, rung.name);
            let mut v = s.clone();
            (rung.apply)(&mut v);
            let unchanged = rung.name != LADDER[0].name
                && serde_json::to_value(&v).ok() == serde_json::to_value(s).ok();
            if unchanged {
                let why = same_as_written(s, rung.name);
                rows.push(SuiteRow {
                    scenario: s.name.clone(),
                    rung: rung.name,
                    result: Err(why.clone()),
                    skipped: Some(why),
                });
                continue;
            }
            let slug: String = rung
                .name
                .chars()
                .map(|c| if c.is_ascii_alphanumeric() { c } else { '-' })
                .collect::<String>()
                .split('-')
                .filter(|p| !p.is_empty())
                .collect::<Vec<_>>()
                .join("-");
            let work = out.join(format!("{}-suite", v.name)).join(slug);
            let o = once(&v, &work, p)?;
            rows.push(SuiteRow {
                scenario: s.name.clone(),
                rung: rung.name,
                result: o.result.map_err(|f| f.to_string()),
                skipped: None,
            });
        }
    }
    Ok(Suite { rows })
}

const HEAD: [&str; 8] = [
    "scenario",
    "rung",
    "MAE W",
    "NDE",
    "F1",
    "accuracy",
    "match",
    "accuracy vs as written",
];

fn cells(rows: &[SuiteRow]) -> Vec<Vec<String>> {
    let f = |x: Option<f64>| x.map(|v| format!("{v:.3}")).unwrap_or_else(|| "–".into());
    let mut base: Option<f64> = None;
    rows.iter()
        .map(|r| match &r.result {
            Ok(rep) => {
                let o = &rep.overall;
                if r.rung == LADDER[0].name {
                    base = o.accuracy;
                }
                let delta = match (o.accuracy, base) {
                    (Some(a), Some(b)) if r.rung != LADDER[0].name => format!("{:+.3}", a - b),
                    _ => String::new(),
                };
                vec![
                    r.scenario.clone(),
                    r.rung.to_string(),
                    format!("{:.1}", o.mae_w),
                    f(o.nde),
                    format!("{:.3}", o.f1),
                    f(o.accuracy),
                    f(o.match_rate),
                    delta,
                ]
            }
            Err(e) => vec![
                r.scenario.clone(),
                r.rung.to_string(),
                if r.skipped.is_some() {
                    "skipped"
                } else {
                    "failed"
                }
                .into(),
                String::new(),
                String::new(),
                String::new(),
                String::new(),
                e.lines().next().unwrap_or("").to_string(),
            ],
        })
        .collect()
}

/// Per scenario, the MAE of every appliance on every rung (W).
fn appliance_tables(rows: &[SuiteRow], markdown: bool) -> String {
    let mut o = String::new();
    let mut names: Vec<&str> = rows.iter().map(|r| r.scenario.as_str()).collect();
    names.dedup();
    for name in names {
        let mine: Vec<&SuiteRow> = rows.iter().filter(|r| r.scenario == name).collect();
        let Some(ids) = mine.iter().find_map(|r| r.result.as_ref().ok()).map(|rep| {
            rep.appliances
                .iter()
                .map(|a| a.id.clone())
                .collect::<Vec<_>>()
        }) else {
            continue;
        };
        let rungs: Vec<&str> = mine.iter().map(|r| r.rung).collect();
        o += &format!("\n{name}: MAE W per appliance and rung\n\n");
        if markdown {
            o += &format!(
                "| appliance | {} |\n|---|{}\n",
                rungs.join(" | "),
                "---:|".repeat(rungs.len())
            );
        } else {
            o += &format!(
                "{:<20}{}\n",
                "appliance",
                rungs.iter().map(|r| format!("{r:>18}")).collect::<String>()
            );
        }
        for id in &ids {
            let cells: Vec<String> = mine
                .iter()
                .map(|r| match &r.result {
                    Ok(rep) => rep
                        .appliances
                        .iter()
                        .find(|a| a.id == *id)
                        .map_or("–".into(), |a| format!("{:.1}", a.scores.mae_w)),
                    Err(_) => "–".into(),
                })
                .collect();
            o += &if markdown {
                format!("| {id} | {} |\n", cells.join(" | "))
            } else {
                format!(
                    "{id:<20}{}\n",
                    cells.iter().map(|c| format!("{c:>18}")).collect::<String>()
                )
            };
        }
    }
    o
}

impl Render for Suite {
    fn to_text(&self) -> String {
        let c = cells(&self.rows);
        solver_check::render::aligned(&HEAD, &c, 2) + &appliance_tables(&self.rows, false)
    }

    fn to_markdown(&self) -> String {
        let mut o = format!(
            "| {} |\n|{}\n",
            HEAD.join(" | "),
            HEAD.iter()
                .enumerate()
                .map(|(k, _)| if k < 2 { "---|" } else { "---:|" })
                .collect::<String>()
        );
        for r in cells(&self.rows) {
            o += &format!("| {} |\n", r.join(" | "));
        }
        o + &appliance_tables(&self.rows, true)
    }

    fn to_json(&self) -> Value {
        json!({
            "format": SUITE_FORMAT,
            "rows": self.rows.iter().map(|r| match (&r.result, &r.skipped) {
                (Ok(rep), _) => json!({ "scenario": r.scenario, "rung": r.rung, "overall": rep.overall.to_json(), "report": rep.to_json() }),
                (Err(_), Some(why)) => json!({ "scenario": r.scenario, "rung": r.rung, "skipped": why }),
                (Err(e), None) => json!({ "scenario": r.scenario, "rung": r.rung, "failure": e }),
            }).collect::<Vec<_>>(),
        })
    }
}
