//! The audit's side in the simulator crate: a declaration read in the
//! scenario language and turned into the auditor's terms, and the fault
//! matrix that injects known installer mistakes into the demo homes,
//! simulates them, audits them and scores the findings against the truth.

use crate::loads::timelines;
use crate::scenario::{self, Behaviour, Dist, DropMode, Dropouts, Scenario};
use crate::simulate::simulate;
use serde_json::{json, Value};
use solver_check::audit::check::{self, Outcome};
use solver_check::audit::decl::{
    DeclAppliance, DeclChannel, DeclDraw, Declared, Inverter, StartHabit, Steps, SunUp, Supply,
};
use solver_check::audit::events::{ChannelStats, Detector, Event};
use solver_check::contract::{line_name, Wiring, C64};
use std::path::Path;

/// Reads a declaration: a scenario file, whose `[run]` may be left out,
/// whose appliances may be short entries (`id`, `power`, `wiring`, and
/// optionally `pf` or `q`, `rated`, `load`, `label`: an appliance that is
/// off or on at that power), and which may say `[declaration] partial =
/// true` when it lists only some appliances.
///
/// # Example
///
/// A 4 kW heater wired L1-L2 (240 V) but declared on L1-N: the audit of
/// twenty minutes of its meters finds the mistake.
///
/// ```
/// use loadloom::{audit::load_declaration, dataset::Format, pipeline, scenario};
/// use std::fs;
/// let dir = std::env::temp_dir().join(format!("loadloom-audit-{}", std::process::id()));
/// fs::create_dir_all(&dir)?;
/// let home = |wiring: &str| {
///     format!(
///         r#"
/// [home]
/// supply = "split-phase"
/// timezone = "UTC"
/// [run]
/// start = "2027-01-04T00:00"
/// length = "20 min"
/// [[appliance]]
/// id = "heater"
/// wiring = "{wiring}"
/// load = "resistive"
/// behaviour = "cycle"
/// states = [{{ name = "off", power = "0 W", dwell = "1 min" }}, {{ name = "on", power = "4 kW", dwell = "1 min" }}]
/// "#
///     )
/// };
/// let real = scenario::load_str(&dir.join("home.toml"), home("L1-L2"))?;
/// let written = pipeline::write(&real, &dir, Format::Parquet, &mut |_share_done| {})?;
///
/// fs::write(dir.join("declared.toml"), home("L1-N"))?;
/// let declared = load_declaration(&dir.join("declared.toml"))?;
/// let audit = solver_check::audit::audit(&written.dir, &declared)?;
/// assert!(audit.outcome.findings.iter().any(|f| f.subject == "heater"));
/// fs::remove_dir_all(&dir)?;
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn load_declaration(path: &Path) -> Result<Declared, scenario::Error> {
    // A regular file of bounded size in UTF-8, as every scenario.
    let text = scenario::source::read_source(path, "declaration")?;
    let prep = crate::declaration::prepare(path, text)?;
    let has_run = prep
        .text
        .parse::<toml_edit::DocumentMut>()
        .map(|d| d.contains_key("run"))
        .unwrap_or(true);
    // A declaration need not say when to simulate: a placeholder run, after
    // the text so every position in errors stays the file's own.
    let mut text = prep.text;
    if !has_run {
        text += "\n[run]\nstart = \"2001-01-01T00:00\"\nlength = \"1 d\"\n";
    }
    let s = scenario::load_str(path, text)?;
    let mut d = declared(&s);
    d.appliances
        .retain(|a| a.id != crate::declaration::PLACEHOLDER);
    for e in &prep.shorts {
        d.appliances.push(e.appliance(&d.supply));
    }
    // A declaration that lists no appliance claims nothing about them: the
    // loads the steps show are the unlisted rest, not mistakes.
    d.partial = prep.partial || d.appliances.is_empty();
    Ok(d)
}

/// A program phase no longer than this may be passed over at long
/// intervals (it can fit inside the rows either side of a step), s.
pub const SHORT_PHASE_S: f64 = 30.0;

/// The declaration a scenario makes: its supply, its `[metering]` and its
/// appliances (not its unmetered loads, which nobody listed, nor its
/// faults, which are what really happened).
pub fn declared(s: &Scenario) -> Declared {
    let supply = Supply {
        kind: s.home.supply,
        voltage_v: s.home.voltage_v,
        service_a: s.home.service_a,
    };
    // The PV and the battery are sources, not loads to place (`generation`).
    let appliances = s
        .consumers()
        .map(|a| DeclAppliance {
            id: a.id.clone(),
            label: a.label.clone(),
            states: declared_states(a),
            steps: declared_steps(a),
            habit: start_habit(a),
        })
        .collect();
    Declared {
        file: s.home.supply_at.split(':').next().unwrap_or("").to_string(),
        supply_at: s.home.supply_at.clone(),
        supply,
        channels: s
            .metering
            .iter()
            .map(|m| DeclChannel {
                conductor: m.conductor,
                reversed: m.reversed,
            })
            .collect(),
        appliances,
        partial: false,
        real_only: false,
        timezone: s.home.timezone.clone(),
        generation: s
            .appliances
            .iter()
            .filter(|a| a.role != crate::scenario::Role::Load)
            .map(inverter)
            .collect(),
    }
}

/// A PV array or home battery as the audit sees it: its rating and, for an
/// array, when its sun is up (the simulator's sun position at its site;
/// past [`crate::sun::DARK_ZENITH_DEG`] no light reaches the ground).
fn inverter(a: &crate::scenario::Appliance) -> Inverter {
    let mut inv = Inverter::new(&a.id, a.wiring, false);
    match &a.behaviour {
        Behaviour::Sun(pv) => {
            let site = pv.site;
            inv.rating_w = Some(pv.ac_w);
            inv.sun_up = Some(SunUp(std::sync::Arc::new(move |ms| {
                crate::sun::position(site, ms).zenith_deg <= crate::sun::DARK_ZENITH_DEG
            })));
        }
        Behaviour::Storage(b) => {
            inv.follows_home = true;
            inv.rating_w = Some(b.power_w);
        }
        _ => {}
    }
    inv
}

/// When the appliance's habit starts it (a program, or a modulating load's
/// sessions): the busier of weekdays and weekends, and the share of starts
/// in each local hour over a week (five weekdays, two weekend days).
fn start_habit(a: &crate::scenario::Appliance) -> Option<StartHabit> {
    let habit = match &a.behaviour {
        Behaviour::Program { habit, .. } => habit,
        Behaviour::Modulating {
            session: Some(s), ..
        } => &s.habit,
        _ => return None,
    };
    let (wd, we) = (
        5.0 * habit.starts_per_day,
        2.0 * habit.weekend_starts_per_day,
    );
    let mut hour_share = [1.0 / 24.0; 24];
    if wd + we > 0.0 {
        for (h, share) in hour_share.iter_mut().enumerate() {
            let w = |v: &[f64]| v.get(h).copied().unwrap_or(0.0);
            *share =
                (wd * w(&habit.hour_weights) + we * w(&habit.weekend_hour_weights)) / (wd + we);
        }
    }
    Some(StartHabit {
        per_day: habit.starts_per_day.max(habit.weekend_starts_per_day),
        hour_share,
    })
}

/// Each state's draws as the declaration gives them.
fn declared_states(a: &crate::scenario::Appliance) -> Vec<Vec<DeclDraw>> {
    a.states
        .iter()
        .map(|st| {
            st.draws
                .iter()
                .map(|d| DeclDraw {
                    wiring: d.wiring,
                    s: C64::new(d.p_w, d.q_var),
                    zip_p: d.zip_p,
                    zip_q: d.zip_q,
                    rated_v: d.rated_v,
                })
                .collect()
        })
        .collect()
}

/// The steps an appliance's behaviour can make between its states, as the
/// audit expects to see them.
fn declared_steps(a: &crate::scenario::Appliance) -> Steps {
    let n = a.states.len();
    match &a.behaviour {
        Behaviour::Cycle { dwell, extra } => {
            // The states in order; the extra one after the last.
            let m = dwell.len();
            let mut j: Vec<(usize, usize, f64, f64)> =
                (0..m).map(|i| (i, (i + 1) % m, 1.0, 1.0)).collect();
            if let Some(e) = extra {
                j.push((m - 1, e.state, 1.0, 1.0));
                j.push((e.state, 0, 1.0, 1.0));
            }
            Steps::Jumps(j)
        }
        Behaviour::Program { lengths, .. } => {
            let mut j: Vec<(usize, usize, f64, f64)> =
                (0..n).map(|i| (i, (i + 1) % n, 1.0, 1.0)).collect();
            // A phase of seconds can fall inside a long interval or
            // two: the program is then seen to go past it.
            for (i, d) in lengths.iter().enumerate() {
                if d.upper_s() <= SHORT_PHASE_S {
                    j.push((i, (i + 2) % n, 1.0, 1.0));
                }
            }
            Steps::Jumps(j)
        }
        Behaviour::Markov { next, .. } => Steps::Jumps(
            next.iter()
                .enumerate()
                .flat_map(|(i, row)| {
                    row.iter()
                        .enumerate()
                        .filter(|(_, p)| **p > 0.0)
                        .map(move |(k, _)| (i, k, 1.0, 1.0))
                })
                .collect(),
        ),
        Behaviour::Steady { .. } => Steps::None("always on"),
        Behaviour::Sun(_) | Behaviour::Storage(_) => Steps::None("follows the sun or the home"),
        // A wandering change is a few random-walk steps at most
        // between two steady stretches: 4 standard deviations.
        Behaviour::Modulating {
            session: Some(_),
            min,
            wander,
            ..
        } => Steps::Wanders {
            state: n - 1,
            max: (4.0 * wander).min(1.0),
            jumps: vec![(0, n - 1, 1.0, 1.0), (n - 1, 0, 1.0, *min)],
        },
        Behaviour::Modulating {
            session: None,
            wander,
            ..
        } => Steps::Wanders {
            state: n - 1,
            max: (4.0 * wander).min(1.0),
            jumps: vec![],
        },
        // On and off from and to each running state, at each input
        // a compressor's outdoor temperature can give it.
        Behaviour::Thermostat { role } => Steps::Jumps(
            (1..n)
                .flat_map(|i| {
                    crate::thermal::equipment::input_scales(role, i)
                        .into_iter()
                        .flat_map(move |k| [(0, i, k, 1.0), (i, 0, 1.0, k)])
                })
                .collect(),
        ),
    }
}

/// What a simulation shows the audit, and how often each appliance changed
/// state in truth.
pub struct Observed {
    /// The steps the audit's detector found on the conductors.
    pub events: Vec<Event>,
    /// Per channel: what the readings add up to (for the loading picture).
    pub stats: Vec<ChannelStats>,
    /// Per appliance: how many times it changed state in truth.
    pub changes: Vec<usize>,
    /// The same, counting only changes of 500 W or more of real power (the
    /// smallest step an undeclared load is looked for by).
    pub big_changes: Vec<usize>,
    /// The most of those changes of one size (within 10 %, the same way):
    /// a load whose steps never recur cannot be told from the data as a
    /// recurring load.
    pub recurring: Vec<usize>,
}

/// Simulates `s` in memory and finds its steps, as the audit would from
/// its meters file.
pub fn observe(s: &Scenario) -> Observed {
    let tl = timelines(s, s.run.steps());
    let mut det = Detector::new(s.home.supply.angles_deg(), s.meter.interval_s);
    let interval_ms = (s.meter.interval_s * 1000.0).round() as i64;
    let missing = s
        .faults
        .dropouts
        .as_ref()
        .is_some_and(|d| d.mode == DropMode::Missing);
    let n = s.home.supply.lines();
    let (mut p, mut q, mut v) = (vec![0.0; n], vec![0.0; n], vec![0.0; n]);
    let out = simulate(s, &tl, s.intervals(), 65_536, |c| -> Result<(), ()> {
        let r = &c.readings;
        for i in 0..r.rows() {
            if missing && !r.present[i] {
                continue;
            }
            for x in 0..n {
                p[x] = r.line_p[x][i] as f64;
                q[x] = r.line_q[x][i] as f64;
                v[x] = r.line_v[x][i] as f64;
            }
            det.push(
                s.run.start_utc_ms + (c.first_row + i as u64) as i64 * interval_ms,
                &p,
                &q,
                &v,
            );
        }
        Ok(())
    });
    // Changes of state whose step the audit could use (a level that
    // wanders within one state is not a change).
    let d = declared(s);
    let mut changes = vec![0usize; s.appliances.len()];
    let mut big_changes = vec![0usize; s.appliances.len()];
    let mut jumps: Vec<Vec<f64>> = vec![Vec::new(); s.appliances.len()];
    if let Ok(mut o) = out {
        o.events.sort_by_key(|e| (e.app, e.start_step));
        for w in o.events.windows(2) {
            let (a, b) = (&w[0], &w[1]);
            // Loads only: the PV and the battery follow the declared ones in
            // `s.appliances` and are not part of a declaration.
            if a.app != b.app || b.app >= d.appliances.len() || a.state == b.state {
                continue;
            }
            let app = &d.appliances[b.app];
            let (sa, sb) = (
                d.state_split(app, a.state as usize),
                d.state_split(app, b.state as usize),
            );
            if sa
                .iter()
                .zip(&sb)
                .map(|(x, y)| (*y - *x).abs())
                .fold(0.0, f64::max)
                >= check::USE_STEP
            {
                changes[b.app] += 1;
            }
            if sa
                .iter()
                .zip(&sb)
                .map(|(x, y)| y.re - x.re)
                .sum::<f64>()
                .abs()
                >= 500.0
            {
                big_changes[b.app] += 1;
                jumps[b.app].push(sa.iter().zip(&sb).map(|(x, y)| y.re - x.re).sum::<f64>());
            }
        }
    }
    let recurring = recurring(&jumps);
    let (events, stats) = det.finish();
    Observed {
        events,
        stats,
        changes,
        big_changes,
        recurring,
    }
}

/// Per appliance, the most of its jumps of one size (within 10 %), the
/// same way.
fn recurring(jumps: &[Vec<f64>]) -> Vec<usize> {
    jumps
        .iter()
        .map(|v| {
            v.iter()
                .map(|x| {
                    v.iter()
                        .filter(|y| y.signum() == x.signum() && (*y - x).abs() <= 0.1 * x.abs())
                        .count()
                })
                .max()
                .unwrap_or(0)
        })
        .collect()
}

/// Audits a scenario's simulated meters against a declaration.
pub fn audit_scenario(s: &Scenario, d: &Declared) -> Outcome {
    let o = observe(s);
    check::check(d, &o.events, &o.stats, s.meter.interval_s)
}

// ---- the fault matrix ----------------------------------------------------

/// A way of measuring the homes: the demo's own meter, or one made harder.
pub struct Variant {
    /// The variant's name in reports (`10 s`, `noise 1 %`).
    pub name: &'static str,
    /// Changes a home's scenario into this way of measuring it.
    pub apply: fn(&mut Scenario),
}

/// The variants the matrix runs: the demo's own meter, a 10 s interval, 1 %
/// noise, 5 % dropouts, 20 % unlisted background load.
pub const VARIANTS: [Variant; 5] = [
    Variant {
        name: "1 s",
        apply: |_| {},
    },
    Variant {
        name: "10 s",
        apply: |s| s.meter.interval_s = 10.0,
    },
    Variant {
        name: "noise 1 %",
        apply: |s| {
            s.meter.noise_relative = 0.01;
            s.meter.noise_floor_w = s.meter.noise_floor_w.max(2.0);
        },
    },
    Variant {
        name: "dropouts 5 %",
        apply: |s| {
            s.faults.dropouts = Some(Dropouts {
                rate: 0.05,
                length: Dist::Lognormal {
                    median_s: 60.0,
                    spread: 1.0,
                },
                mode: DropMode::Null,
            })
        },
    },
    Variant {
        name: "background 20 %",
        apply: |s| crate::roundtrip::add_background(s, 0.2),
    },
];

/// One injected mistake: its kind and subject as a finding would name them.
#[derive(Clone, Debug, PartialEq)]
pub struct Mistake {
    /// The finding kind that would name it (one of `solver_check::audit::check::KINDS`).
    pub kind: &'static str,
    /// What it is about (an appliance id or a channel), as a finding names it.
    pub subject: String,
    /// For an undeclared load: its connections and the real power of each
    /// of its steps of 500 W or more (a finding names one of them).
    pub load: Option<(Vec<String>, Vec<f64>)>,
}

impl Mistake {
    /// A mistake of `kind` about appliance or channel `subject`.
    fn about(kind: &'static str, subject: &str) -> Self {
        Mistake {
            kind,
            subject: subject.to_string(),
            load: None,
        }
    }
}

/// State changes with a step the audit uses (100 VA or more on a line) an
/// appliance needs in a run before a mistake about it counts as shown by
/// the data (three starts and three stops).
pub const EXERCISED: usize = 6;

/// A left-out load also needs this many of its changes of 500 W or more
/// to be of one size (within 10 %, the same way): the audit looks for loads
/// that recur, and a load whose steps are all different (a hob turned on
/// twice, each time through other settings) does not recur in the data.
pub const RECURS: usize = 3;

/// One home, simulated and audited against a declaration with the mistakes
/// injected into it.
pub struct Case {
    /// The home's scenario name.
    pub scenario: String,
    /// The case's name (which mistakes were injected).
    pub name: String,
    /// The mistakes injected into the declaration (empty: a clean case).
    pub mistakes: Vec<Mistake>,
    /// (kind, subject) of every finding.
    pub found: Vec<(String, String, Value)>,
    /// Targets the audit called undecidable.
    pub undecidable: Vec<String>,
    /// Mistakes about appliances that changed state fewer than
    /// [`EXERCISED`] times in the run (a left-out load: or repeated none of
    /// its big changes [`RECURS`] times): not counted in recall.
    pub unexercised: Vec<String>,
    /// The audit's verdict and reason for each appliance a mistake is about.
    pub why: Vec<String>,
}

/// Lines some declared appliance draws through.
fn loaded_lines(d: &Declared) -> Vec<usize> {
    let n = d.supply.lines();
    (0..n)
        .filter(|&c| {
            d.appliances
                .iter()
                .any(|a| a.wirings().iter().any(|w| w.lines(n).contains(&c)))
        })
        .collect()
}

/// A meter fault to inject: (name, mistake, how).
type Injection = (String, Mistake, Box<dyn Fn(&mut Scenario)>);

/// Meter faults to inject.
fn meter_faults(d: &Declared) -> Vec<Injection> {
    use crate::scenario::CtFault;
    let lines = loaded_lines(d);
    let mut v: Vec<Injection> = Vec::new();
    let ct = |line: usize, reversed: bool, on: Option<usize>| CtFault {
        line,
        gain: 0.0,
        phase_deg: 0.0,
        reversed,
        on,
    };
    for &x in &lines {
        v.push((
            format!("CT {} reversed", line_name(x)),
            Mistake {
                kind: "reversed-ct",
                subject: line_name(x),
                load: None,
            },
            Box::new(move |s| s.faults.ct.push(ct(x, true, None))),
        ));
    }
    for &a in &lines {
        for &b in &lines {
            if a != b {
                v.push((
                    format!("CT {} on L{}", line_name(a), b + 1),
                    Mistake {
                        kind: "ct-on-other-conductor",
                        subject: line_name(a),
                        load: None,
                    },
                    Box::new(move |s| s.faults.ct.push(ct(a, false, Some(b)))),
                ));
            }
        }
    }
    for (i, &a) in lines.iter().enumerate() {
        for &b in &lines[i + 1..] {
            let pair = format!("{}+{}", line_name(a), line_name(b));
            v.push((
                format!("CTs {pair} exchanged"),
                Mistake {
                    kind: "cts-exchanged",
                    subject: pair.clone(),
                    load: None,
                },
                Box::new(move |s| {
                    s.faults.ct.push(ct(a, false, Some(b)));
                    s.faults.ct.push(ct(b, false, Some(a)));
                }),
            ));
            v.push((
                format!("channels {pair} exchanged"),
                Mistake {
                    kind: "channels-exchanged",
                    subject: pair,
                    load: None,
                },
                Box::new(move |s| s.faults.swap = Some((a, b))),
            ));
        }
    }
    for &x in &lines {
        v.push((
            format!("no CT on {}", line_name(x)),
            Mistake {
                kind: "no-ct",
                subject: line_name(x),
                load: None,
            },
            Box::new(move |s| s.faults.no_ct = Some(x)),
        ));
    }
    v
}

/// Declaration mistakes possible for appliance `j`: (name, mistake, declaration).
fn declaration_mistakes(d: &Declared, j: usize) -> Vec<(String, Mistake, Declared)> {
    let a = &d.appliances[j];
    let n = d.supply.lines();
    let lines = loaded_lines(d);
    let mut v = Vec::new();
    if check::uncheckable(a).is_some() {
        return v;
    }
    let ws = a.wirings();
    let with = |w: Wiring| {
        let mut e = d.clone();
        e.appliances[j] = a.rewired(|_| w);
        e
    };
    let next =
        |x: usize| lines[(lines.iter().position(|&l| l == x).unwrap_or(0) + 1) % lines.len()];
    if ws.len() == 1 {
        match ws[0] {
            Wiring::LineNeutral(x) if lines.len() > 1 => {
                let y = next(x);
                v.push((
                    format!("{} declared on {}", a.id, Wiring::LineNeutral(y).name()),
                    Mistake::about("wrong-line", &a.id),
                    with(Wiring::LineNeutral(y)),
                ));
                let w = Wiring::line_line(x, y, n);
                v.push((
                    format!("{} declared {}", a.id, w.name()),
                    Mistake::about("declared-ll-seen-ln", &a.id),
                    with(w),
                ));
            }
            Wiring::LineLine(x, y) => {
                v.push((
                    format!("{} declared {}", a.id, Wiring::LineNeutral(x).name()),
                    Mistake::about("declared-ln-seen-ll", &a.id),
                    with(Wiring::LineNeutral(x)),
                ));
                if n == 3 && lines.len() == 3 {
                    let z = 3 - x - y;
                    let w = Wiring::line_line(y, z, n);
                    v.push((
                        format!("{} declared {}", a.id, w.name()),
                        Mistake::about("wrong-line", &a.id),
                        with(w),
                    ));
                }
            }
            _ => {}
        }
    }
    if a.largest_step_w() >= 1000.0 {
        let mut e = d.clone();
        e.appliances.remove(j);
        let steps: Vec<f64> = d
            .signatures(a)
            .iter()
            .map(|t| t.iter().map(|c| c.re).sum::<f64>().abs())
            .filter(|p| *p >= 500.0)
            .collect();
        v.push((
            format!("{} left out of the declaration", a.id),
            Mistake {
                kind: "undeclared-load",
                subject: a.id.clone(),
                load: Some((ws.iter().map(|w| w.name()).collect(), steps)),
            },
            e,
        ));
    }
    v
}

fn found_of(o: &Outcome) -> Vec<(String, String, Value)> {
    o.findings
        .iter()
        .map(|f| (f.kind.to_string(), f.subject.clone(), f.evidence.clone()))
        .collect()
}

/// Two findings alike: the same kind about the same subject, a left-out load
/// being the same on the same connection within 10 % of its power (its
/// measured size moves with noise and voltage).
fn alike(x: &(String, String, Value), y: &(String, String, Value)) -> bool {
    x.0 == y.0
        && if x.0 == "undeclared-load" {
            let (px, py) = (
                x.2["p_w"].as_f64().unwrap_or(f64::NAN),
                y.2["p_w"].as_f64().unwrap_or(f64::NAN),
            );
            x.2["wiring"] == y.2["wiring"] && (px - py).abs() <= 0.1 * px.abs().max(py.abs())
        } else {
            x.1 == y.1
        }
}

/// The findings of `a` and of `b` left over once as many as can be are
/// matched one to one with an alike finding of the other (a maximum
/// matching by augmenting paths: the 10 % size rule is not transitive, so
/// first fit could leave a pair unmatched that another order matches).
fn unmatched(
    a: &[(String, String, Value)],
    b: &[(String, String, Value)],
) -> (Vec<usize>, Vec<usize>) {
    fn augment(
        i: usize,
        a: &[(String, String, Value)],
        b: &[(String, String, Value)],
        seen: &mut [bool],
        owner: &mut [Option<usize>],
    ) -> bool {
        for k in 0..b.len() {
            if !seen[k] && alike(&a[i], &b[k]) {
                seen[k] = true;
                if owner[k].is_none_or(|o| augment(o, a, b, seen, owner)) {
                    owner[k] = Some(i);
                    return true;
                }
            }
        }
        false
    }
    let mut owner: Vec<Option<usize>> = vec![None; b.len()];
    let left_a = (0..a.len())
        .filter(|&i| !augment(i, a, b, &mut vec![false; b.len()], &mut owner))
        .collect();
    (
        left_a,
        (0..b.len()).filter(|&k| owner[k].is_none()).collect(),
    )
}

/// Whether two cases' findings are the same (see `alike`).
pub fn same_findings(a: &[(String, String, Value)], b: &[(String, String, Value)]) -> bool {
    let (x, y) = unmatched(a, b);
    x.is_empty() && y.is_empty()
}

/// Whether two runs of one case differ only in what one of them calls
/// undecidable: every finding the other lacks is an injected mistake (for
/// a left-out load: the left-out appliance, on its connection and of one
/// of its sizes) whose subject the other reports as undecidable, with its
/// reason. The data of one way of measuring may not show what another
/// does; saying so is not a changed finding.
pub fn differ_only_where_undecidable(a: &Case, b: &Case) -> bool {
    let (left_a, left_b) = unmatched(&a.found, &b.found);
    let excused = |f: &(String, String, Value), other: &Case| {
        other
            .mistakes
            .iter()
            .any(|m| hits(m, f) && other.undecidable.contains(&m.subject))
    };
    left_a.iter().all(|&i| excused(&a.found[i], b))
        && left_b.iter().all(|&k| excused(&b.found[k], a))
}

/// Whether a finding is the injected mistake.
fn hits(m: &Mistake, f: &(String, String, Value)) -> bool {
    if f.0 != m.kind {
        return false;
    }
    match &m.load {
        None => f.1 == m.subject,
        Some((ws, ps)) => {
            f.2["wiring"]
                .as_str()
                .is_some_and(|w| w.split(" + ").all(|part| ws.iter().any(|x| x == part)))
                && f.2["p_w"]
                    .as_f64()
                    .is_some_and(|x| ps.iter().any(|p| (x - p).abs() <= 0.2 * p))
        }
    }
}

/// Settings of a matrix run.
pub struct MatrixOptions {
    /// Days simulated per home.
    pub days: f64,
    /// Clean simulations per scenario (each also carries declaration mistakes).
    pub clean_runs: usize,
}

/// Runs the matrix over `scenarios` under `variant`.
pub fn run_matrix(
    scenarios: &[(String, Scenario)],
    opts: &MatrixOptions,
    variant: &Variant,
    progress: &mut dyn FnMut(&str),
) -> Vec<Case> {
    let mut cases = Vec::new();
    // Homes with PV or a battery are left out: the audit does not model
    // generation yet, so its recall there would measure that, not it.
    for (name, base) in scenarios
        .iter()
        .filter(|(_, s)| s.consumers().count() == s.appliances.len())
    {
        let mut base = base.clone();
        base.run.length_s = opts.days * 86_400.0;
        base.unmetered.clear();
        base.faults = Default::default();
        base.waveforms.windows.clear();
        (variant.apply)(&mut base);
        let d = declared(&base);
        let targets: Vec<usize> = (0..d.appliances.len())
            .filter(|&j| !declaration_mistakes(&d, j).is_empty())
            .collect();
        let all_mistakes: Vec<(String, Mistake, Declared)> = targets
            .iter()
            .flat_map(|&j| declaration_mistakes(&d, j))
            .collect();
        let mut next_mistake = 0usize;
        let mut take = |k: usize| -> Vec<(String, Mistake, Declared)> {
            (0..k)
                .map(|_| {
                    let m = all_mistakes[next_mistake % all_mistakes.len()].clone();
                    next_mistake += 1;
                    m
                })
                .collect()
        };
        let per_clean = (all_mistakes.len() as f64 / opts.clean_runs as f64)
            .ceil()
            .max(1.0) as usize;
        for r in 0..opts.clean_runs {
            let mut s = base.clone();
            s.run.seed = base.run.seed.wrapping_add(1000 + r as u64);
            progress(&format!("{name}: clean run {}", r + 1));
            let ob = observe(&s);
            let o = check::check(&d, &ob.events, &ob.stats, s.meter.interval_s);
            cases.push(case_of(
                name,
                &format!("clean, seed {}", s.run.seed),
                vec![],
                &o,
                &d,
                &ob,
            ));
            for (mname, m, dm) in take(per_clean) {
                let o = check::check(&dm, &ob.events, &ob.stats, s.meter.interval_s);
                cases.push(case_of(name, &mname, vec![m], &o, &d, &ob));
            }
        }
        for (i, (fname, fm, apply)) in meter_faults(&d).into_iter().enumerate() {
            let mut s = base.clone();
            s.run.seed = base.run.seed.wrapping_add(2000 + i as u64);
            apply(&mut s);
            progress(&format!("{name}: {fname}"));
            let ob = observe(&s);
            let o = check::check(&d, &ob.events, &ob.stats, s.meter.interval_s);
            cases.push(case_of(name, &fname, vec![fm.clone()], &o, &d, &ob));
            // The same fault with a declaration mistake on top.
            for (mname, m, dm) in take(1) {
                let o = check::check(&dm, &ob.events, &ob.stats, s.meter.interval_s);
                cases.push(case_of(
                    name,
                    &format!("{fname}; {mname}"),
                    vec![fm.clone(), m],
                    &o,
                    &d,
                    &ob,
                ));
            }
        }
    }
    cases
}

fn case_of(
    scenario: &str,
    name: &str,
    mistakes: Vec<Mistake>,
    o: &Outcome,
    d: &Declared,
    ob: &Observed,
) -> Case {
    // A load left out of the declaration cannot be seen when it draws
    // through a conductor no working CT reads, or when its steps are those
    // of another declared appliance.
    let n = d.supply.lines();
    let read: Vec<bool> = (0..n)
        .map(|b| (0..n).any(|c| !o.metering.absent[c] && o.metering.map[c].src == b))
        .collect();
    let hidden = |m: &Mistake| {
        m.kind == "undeclared-load"
            && d.appliances
                .iter()
                .position(|a| a.id == m.subject)
                .is_some_and(|j| {
                    d.appliances[j]
                        .wirings()
                        .iter()
                        .any(|w| w.lines(n).iter().any(|&x| !read[x]))
                        || check::indistinct(d, j).is_some()
                })
    };
    let undecidable = mistakes
        .iter()
        .filter(|m| {
            hidden(m)
                || o.appliances
                    .iter()
                    .any(|a| a.id == m.subject && a.verdict == check::Verdict::Undecidable)
        })
        .map(|m| m.subject.clone())
        .collect();
    let unexercised = mistakes
        .iter()
        .filter(|m| {
            d.appliances
                .iter()
                .position(|a| a.id == m.subject)
                .is_some_and(|j| {
                    if m.kind == "undeclared-load" {
                        ob.big_changes[j] < EXERCISED || ob.recurring[j] < RECURS
                    } else {
                        ob.changes[j] < EXERCISED
                    }
                })
        })
        .map(|m| m.subject.clone())
        .collect();
    let why = mistakes
        .iter()
        .filter_map(|m| o.appliances.iter().find(|a| a.id == m.subject))
        .map(|a| {
            format!(
                "{}: {}: {} (state changes with a usable step in the run: {})",
                a.id,
                a.verdict,
                a.reason,
                d.appliances
                    .iter()
                    .position(|x| x.id == a.id)
                    .map(|j| ob.changes[j])
                    .unwrap_or(0)
            )
        })
        .collect();
    Case {
        scenario: scenario.into(),
        name: name.into(),
        mistakes,
        found: found_of(o),
        undecidable,
        unexercised,
        why,
    }
}

/// Per kind: injected, found, undecidable; findings of the kind, true ones.
#[derive(Default, Clone)]
pub struct KindScore {
    /// Mistakes of the kind injected.
    pub injected: usize,
    /// Injected about appliances the run hardly switched (not in recall).
    pub unexercised: usize,
    /// Of those, the ones the audit reported.
    pub found: usize,
    /// Of those, the ones the audit called undecidable.
    pub undecidable: usize,
    /// Findings of the kind the audit reported.
    pub reported: usize,
    /// Of those, the ones that match an injected mistake.
    pub correct: usize,
}

/// The fault matrix's score over all its cases.
pub struct MatrixScore {
    /// Cases run.
    pub cases: usize,
    /// Cases with no mistake injected.
    pub clean: usize,
    /// Clean cases in which the audit reported something (false alarms).
    pub clean_with_findings: usize,
    /// Per finding kind: recall and precision counts.
    pub kinds: Vec<(&'static str, KindScore)>,
}

/// Scores the cases: per kind, injected mistakes found (recall) and findings
/// that were true (precision); false alarms on clean cases.
pub fn score(cases: &[Case]) -> MatrixScore {
    let mut kinds: Vec<(&'static str, KindScore)> = check::Kind::ALL
        .iter()
        .map(|k| (k.name(), KindScore::default()))
        .collect();
    let (mut clean, mut clean_bad) = (0, 0);
    for c in cases {
        if c.mistakes.is_empty() {
            clean += 1;
            clean_bad += (!c.found.is_empty()) as usize;
        }
        for m in &c.mistakes {
            let k = &mut kinds.iter_mut().find(|k| k.0 == m.kind).unwrap().1;
            if c.unexercised.contains(&m.subject) {
                k.unexercised += 1;
                continue;
            }
            k.injected += 1;
            if c.found.iter().any(|f| hits(m, f)) {
                k.found += 1;
            } else if c.undecidable.contains(&m.subject) {
                k.undecidable += 1;
            }
        }
        for f in &c.found {
            if let Some(k) = kinds.iter_mut().find(|k| k.0 == f.0) {
                k.1.reported += 1;
                // A finding about an appliance whose mistake the run did not
                // exercise, if right, is neither counted for nor against.
                let right = c.mistakes.iter().any(|m| hits(m, f));
                if right && c.unexercised.contains(&f.1) {
                    k.1.reported -= 1;
                }
                k.1.correct += (right && !c.unexercised.contains(&f.1)) as usize;
            }
        }
    }
    MatrixScore {
        cases: cases.len(),
        clean,
        clean_with_findings: clean_bad,
        kinds,
    }
}

/// Fraction, or None for 0/0.
fn ratio(a: usize, b: usize) -> Option<f64> {
    (b > 0).then(|| a as f64 / b as f64)
}

impl MatrixScore {
    /// The score as JSON, with recall, precision and the false-alarm rate.
    pub fn to_json(&self, variant: &str) -> Value {
        json!({
            "variant": variant,
            "cases": self.cases,
            "clean_cases": self.clean,
            "clean_cases_with_findings": self.clean_with_findings,
            "false_alarm_rate": ratio(self.clean_with_findings, self.clean),
            "kinds": self.kinds.iter().filter(|k| k.1.injected + k.1.reported > 0).map(|(k, s)| json!({
                "kind": k, "injected": s.injected, "not_exercised": s.unexercised, "found": s.found, "undecidable": s.undecidable,
                "decided": s.injected - s.undecidable, "recall": ratio(s.found, s.injected - s.undecidable), "found_of_injected": ratio(s.found, s.injected),
                "reported": s.reported, "precision": ratio(s.correct, s.reported),
            })).collect::<Vec<_>>(),
        })
    }

    /// The score as a Markdown table, one row per finding kind.
    pub fn to_markdown(&self, variant: &str) -> String {
        let pct = |x: Option<f64>| {
            x.map(|v| format!("{:.1} %", 100.0 * v))
                .unwrap_or_else(|| "–".into())
        };
        let mut o = format!("Fault matrix, {variant}: {} cases, {} clean; clean cases with a false finding: {} ({}).\n\n", self.cases, self.clean, self.clean_with_findings, pct(ratio(self.clean_with_findings, self.clean)));
        o += "| mistake | injected | not exercised | undecidable | decided | found | recall | findings | precision |\n|---|---:|---:|---:|---:|---:|---:|---:|---:|\n";
        for (k, s) in self
            .kinds
            .iter()
            .filter(|k| k.1.injected + k.1.reported > 0)
        {
            let decided = s.injected - s.undecidable;
            o += &format!(
                "| {k} | {} | {} | {} | {decided} | {} | {} | {} | {} |\n",
                s.injected,
                s.unexercised,
                s.undecidable,
                s.found,
                pct(ratio(s.found, decided)),
                s.reported,
                pct(ratio(s.correct, s.reported))
            );
        }
        o
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn f(kind: &str, subject: &str, ev: Value) -> (String, String, Value) {
        (kind.into(), subject.into(), ev)
    }

    /// A length rarely exceeded: two standard deviations up (Φ(2) = 0.977,
    /// any table of the normal distribution) of ln X for a lognormal, of
    /// the normal approximation for a gamma; the bound for the others.
    #[test]
    fn a_phase_length_rarely_exceeded() {
        assert_eq!(Dist::Fixed { value_s: 5.0 }.upper_s(), 5.0);
        assert_eq!(
            Dist::Uniform {
                min_s: 10.0,
                max_s: 14.0
            }
            .upper_s(),
            14.0
        );
        assert!(
            (Dist::Lognormal {
                median_s: 10.0,
                spread: 0.5
            }
            .upper_s()
                - 10.0 * 1.0_f64.exp())
            .abs()
                < 1e-9
        );
        assert!(
            (Dist::Gamma {
                mean_s: 20.0,
                shape: 4.0
            }
            .upper_s()
                - 40.0)
                .abs()
                < 1e-9
        );
        assert!(
            Dist::Fixed { value_s: 5.0 }.upper_s() <= SHORT_PHASE_S
                && Dist::Uniform {
                    min_s: 60.0,
                    max_s: 180.0
                }
                .upper_s()
                    > SHORT_PHASE_S
        );
    }

    /// Left-out loads are the same on the same connection within 10 % of
    /// their power; other findings by kind and subject, in any order.
    #[test]
    fn findings_compare_by_kind_subject_and_left_out_load_size() {
        let a = vec![
            f("reversed-ct", "l1", json!({})),
            f(
                "undeclared-load",
                "4862 W on L1-L2",
                json!({ "p_w": 4862.0, "wiring": "L1-L2" }),
            ),
        ];
        let b = vec![
            f(
                "undeclared-load",
                "4780 W on L1-L2",
                json!({ "p_w": 4780.0, "wiring": "L1-L2" }),
            ),
            f("reversed-ct", "l1", json!({})),
        ];
        assert!(same_findings(&a, &b));
        let c = vec![
            f("reversed-ct", "l1", json!({})),
            f(
                "undeclared-load",
                "4000 W on L1-L2",
                json!({ "p_w": 4000.0, "wiring": "L1-L2" }),
            ),
        ];
        assert!(!same_findings(&a, &c));
        let e = vec![
            f("reversed-ct", "l1", json!({})),
            f(
                "undeclared-load",
                "4862 W on L1-N",
                json!({ "p_w": 4862.0, "wiring": "L1-N" }),
            ),
        ];
        assert!(!same_findings(&a, &e));
        assert!(!same_findings(&a, &a[..1]));
        assert!(!same_findings(
            &[f("reversed-ct", "l1", json!({}))],
            &[f("reversed-ct", "l2", json!({}))]
        ));
        // 1050 W is alike both 1000 and 1140 W, 960 W only 1000 W: first fit
        // would pair 1050 with 1000 and leave 960 alone.
        let load = |w: f64| {
            f(
                "undeclared-load",
                &format!("{w} W on L1-N"),
                json!({ "p_w": w, "wiring": "L1-N" }),
            )
        };
        assert!(same_findings(
            &[load(1050.0), load(960.0)],
            &[load(1000.0), load(1140.0)]
        ));
    }

    /// A finding one run lacks is excused only where that run calls the
    /// subject undecidable; a left-out load where it calls the left-out
    /// appliance undecidable.
    #[test]
    fn cases_differ_only_where_undecidable() {
        let case = |found: Vec<(String, String, Value)>,
                    undecidable: &[&str],
                    mistakes: Vec<Mistake>| Case {
            scenario: "s".into(),
            name: "c".into(),
            mistakes,
            found,
            undecidable: undecidable.iter().map(|s| s.to_string()).collect(),
            unexercised: vec![],
            why: vec![],
        };
        let m = || {
            vec![Mistake {
                kind: "wrong-line",
                subject: "washer".into(),
                load: None,
            }]
        };
        let found = case(vec![f("wrong-line", "washer", json!({}))], &[], m());
        assert!(differ_only_where_undecidable(
            &found,
            &case(vec![], &["washer"], m())
        ));
        assert!(differ_only_where_undecidable(
            &case(vec![], &["washer"], m()),
            &found
        ));
        assert!(
            !differ_only_where_undecidable(&found, &case(vec![], &[], m())),
            "missed, not undecidable"
        );
        assert!(
            !differ_only_where_undecidable(
                &found,
                &case(vec![f("wrong-line", "dryer", json!({}))], &["washer"], m())
            ),
            "a finding of its own"
        );
        let other_kind = case(
            vec![f("declared-ll-seen-ln", "washer", json!({}))],
            &[],
            m(),
        );
        assert!(
            !differ_only_where_undecidable(&other_kind, &case(vec![], &["washer"], m())),
            "not the injected mistake"
        );
        let u = || {
            vec![Mistake {
                kind: "undeclared-load",
                subject: "range".into(),
                load: Some((vec!["L1-L2".into()], vec![1550.0, 2160.0])),
            }]
        };
        let load = |w: f64, on: &str| {
            f(
                "undeclared-load",
                &format!("{w} W on {on}"),
                json!({ "p_w": w, "wiring": on }),
            )
        };
        let two = case(vec![load(1550.0, "L1-L2"), load(2160.0, "L1-L2")], &[], u());
        let one = |und: &[&str]| case(vec![load(2182.0, "L1-L2")], und, u());
        assert!(differ_only_where_undecidable(&two, &one(&["range"])));
        assert!(!differ_only_where_undecidable(&two, &one(&[])));
        let elsewhere = case(vec![load(1550.0, "L1-N"), load(2160.0, "L1-L2")], &[], u());
        assert!(
            !differ_only_where_undecidable(&elsewhere, &one(&["range"])),
            "a load on another connection is not the range"
        );
    }
}
