//! From the steps and the declaration to findings, with no training data.
//!
//! 1. Metering. Each way the CTs could really sit is a hypothesis: channel c
//!    reads k·u·S_b, the power of conductor b seen with channel c's voltage
//!    (u = V_c/V_b, a CT clamped on another line than its channel's: −1 on
//!    a split-phase supply, e^{±j120°} on a wye) and sign k (a CT clamped the
//!    wrong way round); or the channels exchanged whole (labels, or CT and
//!    voltage lead together: u = 1). A hypothesis is admissible when the
//!    conductor powers it implies are not negative (a home that only
//!    consumes; stated in the report). Among the admissible ones, the one
//!    under which the declared appliances' steps explain the most observed
//!    steps wins; the declared metering, then the simplest, wins ties.
//! 2. Appliances. Under that metering, each appliance's steps are predicted
//!    for its declared wiring and for every other one; the steps that fit
//!    one and no other declared appliance are counted for each. A wiring
//!    that explains several times more steps than the declared one is a
//!    finding; too few steps, or steps that other appliances would explain
//!    as well, is reported as undecidable.
//! 3. Large recurring steps no declared appliance explains are clustered;
//!    their connection is the one whose split fits them best (least squares
//!    over the channels).

use super::decl::{DeclAppliance, DeclDraw, Declared};
use super::events::{ChannelStats, Event};
use crate::contract::{line_label, line_name, Wiring, C64};
use serde_json::{json, Value};

/// How one channel reads: the conductor, the sign, and whether the power
/// is turned by the angle between the channel's voltage and that conductor's.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChanMap {
    /// The conductor (line index) whose current the channel's CT reads.
    pub src: usize,
    /// The sign it reads with: 1, or −1 for a CT clamped the wrong way round.
    pub k: f64,
    /// Whether the power is turned by the angle between the channel's
    /// voltage and that conductor's (a CT on another line's conductor).
    pub turned: bool,
}

/// A hypothesis of how the monitor's channels read the conductors.
#[derive(Clone, Debug, PartialEq)]
pub struct Metering {
    /// How each channel reads, one per line channel.
    pub map: Vec<ChanMap>,
    /// Channels that read nothing (no CT): left out of every comparison.
    pub absent: Vec<bool>,
}

impl Metering {
    /// Complex factor from conductor power to channel reading.
    fn factor(&self, d: &Declared, c: usize) -> C64 {
        let m = self.map[c];
        let u = if m.turned {
            d.supply.unit(c) / d.supply.unit(m.src)
        } else {
            C64::new(1.0, 0.0)
        };
        u.scale(m.k)
    }
    /// Channel readings of per-conductor powers `t` (None: channel absent).
    pub fn read(&self, d: &Declared, t: &[C64]) -> Vec<Option<C64>> {
        (0..self.map.len())
            .map(|c| {
                (!self.absent[c]).then(|| {
                    let r = t[self.map[c].src] * self.factor(d, c);
                    if d.real_only {
                        C64::new(r.re, 0.0)
                    } else {
                        r
                    }
                })
            })
            .collect()
    }
}

/// A kind of installer mistake, as findings and the fault matrix name them.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Hash)]
pub enum Kind {
    /// A line-to-neutral appliance on another line than declared.
    WrongLine,
    /// Declared line-to-line, seen line-to-neutral.
    DeclaredLlSeenLn,
    /// Declared line-to-neutral, seen line-to-line.
    DeclaredLnSeenLl,
    /// Any other connection than declared (e.g. three-phase declared single).
    WrongConnection,
    /// A CT clamped the wrong way round.
    ReversedCt,
    /// A CT on another line's conductor than its channel's.
    CtOnOtherConductor,
    /// Two channels' CTs on each other's conductors.
    CtsExchanged,
    /// Two channels exchanged whole (CT and voltage lead, or labels).
    ChannelsExchanged,
    /// A channel with a CT declared that reads no current.
    NoCt,
    /// A recurring load no declared appliance explains.
    UndeclaredLoad,
}

impl Kind {
    /// Every kind, in the order reports list them.
    pub const ALL: [Kind; 10] = [
        Kind::WrongLine,
        Kind::DeclaredLlSeenLn,
        Kind::DeclaredLnSeenLl,
        Kind::WrongConnection,
        Kind::ReversedCt,
        Kind::CtOnOtherConductor,
        Kind::CtsExchanged,
        Kind::ChannelsExchanged,
        Kind::NoCt,
        Kind::UndeclaredLoad,
    ];
    /// The kind's name in reports and JSON (`"reversed-ct"`).
    pub fn name(self) -> &'static str {
        match self {
            Kind::WrongLine => "wrong-line",
            Kind::DeclaredLlSeenLn => "declared-ll-seen-ln",
            Kind::DeclaredLnSeenLl => "declared-ln-seen-ll",
            Kind::WrongConnection => "wrong-connection",
            Kind::ReversedCt => "reversed-ct",
            Kind::CtOnOtherConductor => "ct-on-other-conductor",
            Kind::CtsExchanged => "cts-exchanged",
            Kind::ChannelsExchanged => "channels-exchanged",
            Kind::NoCt => "no-ct",
            Kind::UndeclaredLoad => "undeclared-load",
        }
    }
    /// Whether the kind is about the metering (CTs and channels).
    pub fn is_metering(self) -> bool {
        matches!(
            self,
            Kind::ReversedCt
                | Kind::CtOnOtherConductor
                | Kind::CtsExchanged
                | Kind::ChannelsExchanged
                | Kind::NoCt
        )
    }
}

impl std::fmt::Display for Kind {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.pad(self.name())
    }
}

/// What the audit concluded about one declared appliance.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Verdict {
    /// Its steps show where it is declared.
    AsDeclared,
    /// Its steps show on another connection: a finding.
    Finding,
    /// The data cannot place it (the reason says why).
    Undecidable,
}

impl Verdict {
    /// The verdict's name in reports and JSON (`"as declared"`).
    pub fn name(self) -> &'static str {
        match self {
            Verdict::AsDeclared => "as declared",
            Verdict::Finding => "finding",
            Verdict::Undecidable => "undecidable",
        }
    }
}

impl std::fmt::Display for Verdict {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.pad(self.name())
    }
}

/// One thing the data shows that the declaration does not say.
#[derive(Clone, Debug)]
pub struct Finding {
    /// The kind of mistake.
    pub kind: Kind,
    /// The appliance id, channel(s) ("l1", "l1+l2") or cluster the finding is about.
    pub subject: String,
    /// What was found and what to check, in words.
    pub message: String,
    /// Share of the evidence that speaks for it, 0 … 1 (below the possible line, [`Thresholds::possible`]:
    /// listed apart).
    pub confidence: f64,
    /// The figures behind it (step counts, powers), for the JSON report.
    pub evidence: Value,
    /// Why the finding is listed as possible whatever its confidence (the
    /// data allows another account as well), if it is.
    pub doubt: Option<String>,
}

/// The placement check of one declared appliance.
#[derive(Clone, Debug)]
pub struct ApplianceCheck {
    /// The appliance id.
    pub id: String,
    /// Its wiring as declared (`L1-N`).
    pub declared: String,
    /// What the audit concluded about it.
    pub verdict: Verdict,
    /// The wiring the data shows, where it differs from the declared.
    pub seen: Option<String>,
    /// Why the verdict, in words.
    pub reason: String,
    /// Steps that fit it on its declared wiring.
    pub steps_declared: usize,
    /// Steps that fit it on the best other wiring.
    pub steps_best_other: usize,
}

/// What the checks of a declaration against the data concluded.
#[derive(Clone, Debug)]
pub struct Outcome {
    /// The confidence below which findings are listed as possible.
    pub possible_below: f64,
    /// Findings of confidence `POSSIBLE` or more.
    pub findings: Vec<Finding>,
    /// Findings below that: listed apart, as what an installer may look at.
    pub possible: Vec<Finding>,
    /// In a partial declaration, the recurring loads it does not list: not
    /// mistakes, but what the rest of the home is.
    pub unlisted: Vec<Finding>,
    /// The placement check of each declared appliance.
    pub appliances: Vec<ApplianceCheck>,
    /// The metering the data fits best (the declared one unless a fault was found).
    pub metering: Metering,
    /// Steps of 100 VA or more the checks used.
    pub steps: usize,
    /// Of those, the steps the declared appliances explain.
    pub steps_explained: usize,
    /// Remarks on what the data can and cannot tell, in words.
    pub notes: Vec<String>,
}

/// Every cut-off the checks decide by, in one value: `Thresholds::STANDARD`
/// is what `loadloom audit` applies; the validation may try others
/// (`check_with`).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Thresholds {
    /// Findings below this confidence are listed apart as "possible". A
    /// finding's confidence is the share of the evidence that speaks for it
    /// against the declaration (steps or appliances that only the finding
    /// explains, or the share of negative power the declaration implies).
    pub possible: f64,
    /// Largest share of rows with a negative implied power that still counts as
    /// a consuming home (noise around zero, brief export).
    pub negative_ok: f64,
    /// A cluster of steps is a load of its own only when coincidences of
    /// declared appliances its size would make as many with a chance below
    /// this: 0.1 %, as every cluster that behaves as a load is tested, several
    /// in one audit, and at most 2 % of clean audits may raise any false
    /// finding (Bonferroni: 1 % over ten tests). Measured in the fault matrix
    /// at 10 s: a bath heater and a fridge starting together, 8 times where
    /// 3.5 were expected (p 2.7 %), are coincidences; a 4.8 kW heat strip
    /// between a 4.5 kW water heater and a 5.4 kW dryer element, 6 times
    /// where 0.97 were expected (p 0.05 %), is a load.
    pub coincidence_p: f64,
    /// How much better (in tolerances) a step must fit one appliance than
    /// another for the other not to share it. Two steps of about one size from
    /// two appliances each fit both; but a step 0.2 tolerances from one and
    /// 0.8 from the other is, with residuals of about a third of the tolerance
    /// (the tolerance is three standard errors wide), some fifteen times
    /// likelier the first's (Gaussian likelihood ratio exp(4.5 (0.8² − 0.2²));
    /// common practice, no source). Measured in the fault matrix at 10 s: a
    /// hair dryer's half-heat step 10 W from its own and 40 W from a washer's
    /// heater step.
    pub clearly_better: f64,
    /// Steps an appliance declared on a line no working CT reads must show
    /// elsewhere, fitting no other appliance, to be placed there: twice the
    /// fault matrix's bar for a mistake the data exercises (six state changes),
    /// as its absence from the declared line cannot be checked. In the doubt
    /// of the confidence they count as that many steps against.
    pub blind_move: usize,
    /// Steps where declared (a start and a stop: one run) from which steps
    /// elsewhere may be another load's rather than the appliance moved; a
    /// single step there is as likely another load's switching.
    pub seen_where_declared: usize,
    /// Steps that fit an appliance as declared and no other appliance, each
    /// of its main step sizes among them, that keep it where it is declared
    /// however many steps of its size show elsewhere (an undeclared load of the
    /// same size on another line): two runs seen whole where declared (common
    /// practice, no source).
    pub shows_as_declared: usize,
    /// An appliance placed on another wiring must show there, among all the
    /// steps that fit it, each of its step sizes of this share of its largest
    /// or more: a dryer that never ran is not placed on a line by three washer
    /// steps of about its main step's size (measured in the fault matrix with
    /// 1 % noise). Smaller steps (a washer's 150 VA drain pump beside its
    /// 1 kW heater) may hide among other loads' changes.
    pub whole_share: f64,
    /// From this reporting interval (s) on, loads that switch within one
    /// interval are common enough that a step is often two loads' at once
    /// (measured in the outside validation at 1 min with real power only: four
    /// in five placements and most undeclared loads were such composites).
    pub coarse_interval_s: f64,
    /// An appliance whose largest step is under this (W, on every connection
    /// it could be on) is not placed: smaller steps of many loads look alike.
    pub decide_w: f64,
}

impl Thresholds {
    /// The cut-offs `loadloom audit` applies.
    pub const STANDARD: Thresholds = Thresholds {
        possible: 0.5,
        negative_ok: 0.05,
        coincidence_p: 0.001,
        clearly_better: 0.5,
        blind_move: 12,
        seen_where_declared: 2,
        shows_as_declared: 4,
        whole_share: 0.25,
        coarse_interval_s: 30.0,
        decide_w: 300.0,
    };
}

/// Steps smaller than this (largest channel, VA) are not used to decide.
pub const USE_STEP: f64 = 100.0;
/// Tolerance of a predicted step: 30 W plus 10 % of its size per channel
/// (a constant-impedance load moves ±10 % across a ±5 % supply band;
/// common practice, no source).
fn tol(size: f64) -> f64 {
    TOL_ABS_W + TOL_REL * size
}

/// The absolute part of the tolerance of a predicted step ([`TOL_REL`] the
/// relative part), W.
pub const TOL_ABS_W: f64 = 30.0;
/// The relative part of that tolerance, share of the step's size.
pub const TOL_REL: f64 = 0.10;

/// How far a step is from a predicted one, in tolerances (≤ 1 fits),
/// either way round (a start or a stop).
fn dist(e: &Event, r: &[Option<C64>]) -> f64 {
    dist_delta(&e.delta, r)
}

fn dist_delta(delta: &[C64], r: &[Option<C64>]) -> f64 {
    let size = r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max);
    if size < USE_STEP {
        return f64::INFINITY;
    }
    let t = tol(size);
    let one = |sign: f64| {
        r.iter()
            .zip(delta)
            .filter_map(|(r, d)| r.map(|r| (*d - r.scale(sign)).abs() / t))
            .fold(0.0, f64::max)
    };
    one(1.0).min(one(-1.0))
}

fn fits(e: &Event, r: &[Option<C64>]) -> bool {
    dist(e, r) <= 1.0
}

fn dist_all(e: &Event, sigs: &[Vec<Option<C64>>]) -> f64 {
    sigs.iter()
        .map(|r| dist(e, r))
        .fold(f64::INFINITY, f64::min)
}

// ---- expected steps at an event's measured voltages ----------------------

/// One draw's part in a jump: its power counts `k` times, at the voltage
/// after the step (`after`) or before it.
#[derive(Clone)]
struct Term {
    draw: DeclDraw,
    k: f64,
    after: bool,
}

/// An appliance's jumps, each as the draws it adds and removes, so its
/// step can be computed at the voltages around any one event.
#[derive(Clone)]
pub(crate) struct Model {
    jumps: Vec<Vec<Term>>,
}

impl Model {
    pub fn of(d: &Declared, a: &DeclAppliance) -> Model {
        let mut jumps: Vec<Vec<Term>> = Vec::new();
        for ((from, to, kt, kf), _) in d.distinct_jumps(a) {
            let mut t: Vec<Term> = a.states[to]
                .iter()
                .map(|dr| Term {
                    draw: dr.clone(),
                    k: kt,
                    after: true,
                })
                .collect();
            t.extend(a.states[from].iter().map(|dr| Term {
                draw: dr.clone(),
                k: -kf,
                after: false,
            }));
            jumps.push(t);
        }
        Model { jumps }
    }
}

/// What an event's voltages say, under a metering: each conductor's
/// voltage before and after (None: not measured), and per channel the
/// change the other loads make as the voltage moves.
pub(crate) struct Ctx {
    vb: Vec<f64>,
    va: Vec<f64>,
    known: bool,
    /// Expected change of the channel's other loads: their level times the
    /// relative voltage change (a constant-current mean of constant
    /// impedance and constant power), and as much again of slack.
    react: Vec<C64>,
    slack: Vec<f64>,
}

impl Ctx {
    pub fn of(d: &Declared, m: &Metering, e: &Event) -> Ctx {
        let n = d.supply.lines();
        // Voltage leads stay on their channels' lines unless the channels
        // are exchanged whole.
        let lead = |b: usize| {
            (0..n)
                .find(|&c| !m.map[c].turned && m.map[c].src == b)
                .unwrap_or(b)
        };
        let vb: Vec<f64> = (0..n)
            .map(|b| e.v_before.get(lead(b)).copied().unwrap_or(f64::NAN))
            .collect();
        let va: Vec<f64> = (0..n)
            .map(|b| e.v_after.get(lead(b)).copied().unwrap_or(f64::NAN))
            .collect();
        let known = vb.iter().chain(&va).all(|v| v.is_finite() && *v > 0.0);
        let (mut react, mut slack) = (vec![C64::ZERO; n], vec![0.0; n]);
        if known {
            for c in 0..n {
                let (b, a) = (
                    e.v_before.get(c).copied().unwrap_or(f64::NAN),
                    e.v_after.get(c).copied().unwrap_or(f64::NAN),
                );
                if b.is_finite() && a.is_finite() && b > 0.0 {
                    let dv = a / b - 1.0;
                    react[c] = e.before[c].scale(dv);
                    slack[c] = e.before[c].abs() * dv.abs();
                }
            }
        }
        Ctx {
            vb,
            va,
            known,
            react,
            slack,
        }
    }

    fn u(&self, d: &Declared, w: Wiring, after: bool) -> f64 {
        if !self.known {
            return 1.0;
        }
        d.supply
            .ratio_across(w, if after { &self.va } else { &self.vb })
            .unwrap_or(1.0)
    }
}

/// Tolerance of an expected step with measured voltages: 20 W plus 3 % of
/// its size (the rest of a constant-impedance load's ±10 % over the
/// supply band is predicted from the voltage; common practice, no source).
pub const TOL_ABS_V_W: f64 = 20.0;
/// The relative part of that tolerance, share of the step's size.
pub const TOL_REL_V: f64 = 0.03;

/// Distance of an event from an appliance's jumps at the event's voltages,
/// in tolerances (≤ 1 fits), either way round.
/// With `shapes`, a jump together with part of the wander of a wandering
/// appliance in the same interval also fits (a step and a modulating
/// load's change a second apart make one event), within half the
/// tolerance: the wander's share is fitted to the step, so a jump of
/// another size must not pass as this one plus whatever wander closes the gap.
/// Returns (alone, with a wander).
fn dist_model(
    d: &Declared,
    m: &Metering,
    e: &Event,
    cx: &Ctx,
    md: &Model,
    shapes: &[Vec<Option<C64>>],
) -> (f64, f64) {
    let n = d.supply.lines();
    let mut best = f64::INFINITY;
    let mut comp = f64::INFINITY;
    for j in &md.jumps {
        for fwd in [true, false] {
            // Forward: the jump's draws as given, "after" at the voltage
            // after. Backward (the jump undone): every sign turned and the
            // voltages exchanged.
            let mut t = vec![C64::ZERO; n];
            for term in j {
                let after = if fwd { term.after } else { !term.after };
                let s = term
                    .draw
                    .at(cx.u(d, term.draw.wiring, after))
                    .scale(if fwd { term.k } else { -term.k });
                for (o, x) in t.iter_mut().zip(d.supply.split(term.draw.wiring, s)) {
                    *o += x;
                }
            }
            let r = m.read(d, &t);
            let size = r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max);
            if size < USE_STEP {
                continue;
            }
            let rel = if cx.known { TOL_REL_V } else { TOL_REL };
            let abs = if cx.known { TOL_ABS_V_W } else { TOL_ABS_W };
            let tol: Vec<f64> = (0..n)
                .map(|c| abs + rel * size + 3.0 * e.se[c] + cx.slack[c])
                .collect();
            let res: Vec<Option<C64>> = (0..n)
                .map(|c| r[c].map(|rc| e.delta[c] - rc - cx.react[c]))
                .collect();
            let worst = (0..n)
                .filter_map(|c| res[c].map(|x| x.abs() / tol[c]))
                .fold(0.0, f64::max);
            best = best.min(worst);
            if worst > 1.0 {
                for sh in shapes {
                    let (mut num, mut den) = (0.0, 0.0);
                    for c in 0..n {
                        if let (Some(x), Some(g)) = (res[c], sh[c]) {
                            num += (g.re * x.re + g.im * x.im) / (tol[c] * tol[c]);
                            den += g.abs().powi(2) / (tol[c] * tol[c]);
                        }
                    }
                    if den == 0.0 {
                        continue;
                    }
                    let lam = (num / den).clamp(-1.0, 1.0);
                    let w = (0..n)
                        .filter_map(|c| {
                            res[c]
                                .map(|x| (x - sh[c].unwrap_or(C64::ZERO).scale(lam)).abs() / tol[c])
                        })
                        .fold(0.0, f64::max);
                    comp = comp.min(2.0 * w);
                }
            }
        }
    }
    (best, comp.min(best))
}

/// An appliance's expected steps under a metering: at nominal voltage (a
/// quick first test) and as a model for the voltages of each event.
struct Pred {
    nom: Vec<Vec<Option<C64>>>,
    model: Model,
}

impl Pred {
    fn of(d: &Declared, m: &Metering, a: &DeclAppliance) -> Pred {
        Pred {
            nom: predicted(d, m, a),
            model: Model::of(d, a),
        }
    }
    /// Distance of event `e` (with its voltages `cx`) from these steps:
    /// alone, and (with `shapes`) alone or together with part of a wander.
    fn dist2(
        &self,
        d: &Declared,
        m: &Metering,
        e: &Event,
        cx: &Ctx,
        shapes: &[Vec<Option<C64>>],
    ) -> (f64, f64) {
        // Far off even at nominal voltage and the wide tolerance: no need
        // to work out the voltages.
        if dist_all(e, &self.nom) > if shapes.is_empty() { 2.5 } else { 5.0 } {
            return (f64::INFINITY, f64::INFINITY);
        }
        dist_model(d, m, e, cx, &self.model, shapes)
    }
    fn dist(&self, d: &Declared, m: &Metering, e: &Event, cx: &Ctx) -> f64 {
        self.dist2(d, m, e, cx, &[]).0
    }
}

/// One appliance's predicted channel steps under a metering.
fn predicted(d: &Declared, m: &Metering, a: &DeclAppliance) -> Vec<Vec<Option<C64>>> {
    d.signatures(a).iter().map(|t| m.read(d, t)).collect()
}

fn any_fits(e: &Event, sigs: &[Vec<Option<C64>>]) -> bool {
    sigs.iter().any(|r| fits(e, r))
}

fn visible(sigs: &[Vec<Option<C64>>]) -> bool {
    sigs.iter()
        .any(|r| r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max) >= USE_STEP)
}

/// The metering as declared.
pub fn declared_metering(d: &Declared, absent: &[bool]) -> Metering {
    let map = d
        .channels
        .iter()
        .enumerate()
        .map(|(c, ch)| ChanMap {
            src: ch.conductor.unwrap_or(c),
            k: if ch.reversed { -1.0 } else { 1.0 },
            turned: true,
        })
        .collect();
    Metering {
        map,
        absent: absent.to_vec(),
    }
}

fn permutations(n: usize) -> Vec<Vec<usize>> {
    match n {
        1 => vec![vec![0]],
        2 => vec![vec![0, 1], vec![1, 0]],
        _ => vec![
            vec![0, 1, 2],
            vec![0, 2, 1],
            vec![1, 0, 2],
            vec![1, 2, 0],
            vec![2, 0, 1],
            vec![2, 1, 0],
        ],
    }
}

/// Every metering hypothesis with its cost (mistakes it supposes against
/// the declaration).
fn hypotheses(d: &Declared, absent: &[bool]) -> Vec<(Metering, usize)> {
    let n = d.supply.lines();
    let decl = declared_metering(d, absent);
    let mut out = Vec::new();
    let per: Vec<(usize, f64)> = (0..n).flat_map(|b| [(b, 1.0), (b, -1.0)]).collect();
    let mut idx = vec![0usize; n];
    loop {
        let map: Vec<ChanMap> = idx
            .iter()
            .map(|&i| ChanMap {
                src: per[i].0,
                k: per[i].1,
                turned: true,
            })
            .collect();
        let cost = map
            .iter()
            .zip(&decl.map)
            .enumerate()
            .filter(|(c, _)| !absent[*c])
            .map(|(_, (m, dm))| (m.src != dm.src) as usize + (m.k != dm.k) as usize)
            .sum();
        out.push((
            Metering {
                map,
                absent: absent.to_vec(),
            },
            cost,
        ));
        let mut c = 0;
        loop {
            if c == n {
                break;
            }
            idx[c] += 1;
            if idx[c] < per.len() {
                break;
            }
            idx[c] = 0;
            c += 1;
        }
        if c == n {
            break;
        }
    }
    for p in permutations(n).into_iter().skip(1) {
        let map = p
            .iter()
            .enumerate()
            .map(|(c, &s)| ChanMap {
                src: s,
                k: decl.map[c].k,
                turned: false,
            })
            .collect();
        out.push((
            Metering {
                map,
                absent: absent.to_vec(),
            },
            1,
        ));
    }
    out
}

/// Share of rows where the conductor power a channel implies under `m` is
/// clearly negative; the largest over channels.
fn negative_share(m: &Metering, stats: &[ChannelStats]) -> f64 {
    (0..m.map.len())
        .filter(|&c| !m.absent[c])
        .map(|c| {
            let mm = m.map[c];
            let st = &stats[c];
            let read = (st.rows - st.null).max(1) as f64;
            let b = if mm.turned { mm.src } else { c };
            st.negative[b][if mm.k > 0.0 { 0 } else { 1 }] as f64 / read
        })
        .fold(0.0, f64::max)
}

/// A wandering appliance's shape under a metering.
fn shape_of(d: &Declared, m: &Metering, a: &DeclAppliance) -> Option<Vec<Option<C64>>> {
    d.shape(a).map(|t| m.read(d, &t))
}

fn fits_shape(e: &Event, r: &[Option<C64>]) -> bool {
    dist_shape(e, r) <= 1.0
}

/// Distance of a step from the nearest real multiple λ ∈ [−1, 1] of a shape.
fn dist_shape(e: &Event, r: &[Option<C64>]) -> f64 {
    let (mut num, mut den) = (0.0, 0.0);
    for (r, x) in r.iter().zip(&e.delta) {
        if let Some(r) = r {
            num += r.re * x.re + r.im * x.im;
            den += r.abs().powi(2);
        }
    }
    if den == 0.0 {
        return f64::INFINITY;
    }
    let lam = (num / den).clamp(-1.0, 1.0);
    let size = r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max) * lam.abs();
    if size < USE_STEP * 0.5 {
        return f64::INFINITY;
    }
    let t = tol(size);
    r.iter()
        .zip(&e.delta)
        .filter_map(|(r, d)| r.map(|r| (*d - r.scale(lam)).abs() / t))
        .fold(0.0, f64::max)
}

/// Steps the declared appliances explain under `m`: their jumps, and the
/// wandering of those whose power wanders.
/// Returns (appliances with at least two fitting steps, steps explained).
fn explained(d: &Declared, m: &Metering, events: &[&Event]) -> (usize, usize) {
    let fits: Vec<Fits> = d
        .appliances
        .iter()
        .map(|a| fits_of(d, m, a, events))
        .collect();
    let apps = fits
        .iter()
        .filter(|f| f.jump.iter().filter(|&&x| x).count() >= 2)
        .count();
    (apps, steps_explained(&fits, events.len()))
}

/// Per step, whether one of an appliance's jumps fits it, and whether part
/// of its wander does (an appliance that wanders).
struct Fits {
    jump: Vec<bool>,
    wander: Vec<bool>,
}

fn fits_of(d: &Declared, m: &Metering, a: &DeclAppliance, events: &[&Event]) -> Fits {
    let sig = predicted(d, m, a);
    let shape = shape_of(d, m, a);
    Fits {
        jump: events.iter().map(|e| any_fits(e, &sig)).collect(),
        wander: events
            .iter()
            .map(|e| shape.as_ref().is_some_and(|r| fits_shape(e, r)))
            .collect(),
    }
}

/// Steps some appliance's jump or wander fits.
fn steps_explained<'a>(fits: impl IntoIterator<Item = &'a Fits> + Clone, n: usize) -> usize {
    (0..n)
        .filter(|&k| fits.clone().into_iter().any(|f| f.jump[k] || f.wander[k]))
        .count()
}

/// Least-squares fit of a step to each connection: (wiring, complex power,
/// relative residual), best first.
pub fn connection_of(d: &Declared, m: &Metering, delta: &[C64]) -> Vec<(Wiring, C64, f64)> {
    let n = d.supply.lines();
    let norm: f64 = delta
        .iter()
        .enumerate()
        .filter(|(c, _)| !m.absent[*c])
        .map(|(_, x)| x.abs().powi(2))
        .sum::<f64>()
        .sqrt();
    let mut v: Vec<(Wiring, C64, f64)> = Wiring::all(n)
        .into_iter()
        .map(|w| {
            let g = m.read(d, &d.supply.split(w, C64::new(1.0, 0.0)));
            let (mut num, mut den) = (C64::ZERO, 0.0);
            for (gc, e) in g.iter().zip(delta) {
                if let Some(gc) = gc {
                    num += gc.conj() * *e;
                    den += gc.abs().powi(2);
                }
            }
            if den == 0.0 {
                return (w, C64::ZERO, f64::INFINITY);
            }
            let s = num.scale(1.0 / den);
            let res: f64 = g
                .iter()
                .zip(delta)
                .filter_map(|(gc, e)| gc.map(|gc| (*e - s * gc).abs().powi(2)))
                .sum::<f64>()
                .sqrt();
            (
                w,
                s,
                if norm > 0.0 {
                    res / norm
                } else {
                    f64::INFINITY
                },
            )
        })
        .collect();
    v.sort_by(|a, b| a.2.total_cmp(&b.2));
    v
}

/// Other wirings an appliance could have: for one connection, every other
/// one of the supply; for several, the lines renamed.
fn alternatives(d: &Declared, a: &DeclAppliance) -> Vec<(String, DeclAppliance)> {
    let n = d.supply.lines();
    let ws = a.wirings();
    if ws.len() == 1 {
        Wiring::all(n)
            .into_iter()
            .filter(|w| *w != ws[0])
            .map(|w| (w.name(), a.rewired_on(&d.supply, |_| w)))
            .collect()
    } else {
        permutations(n)
            .into_iter()
            .skip(1)
            .map(|p| {
                let b = a.rewired_on(&d.supply, |w| w.permuted(&p));
                (
                    b.wirings()
                        .iter()
                        .map(|w| w.name())
                        .collect::<Vec<_>>()
                        .join(" + "),
                    b,
                )
            })
            .collect()
    }
}

fn wiring_names(a: &DeclAppliance) -> String {
    a.wirings()
        .iter()
        .map(|w| w.name())
        .collect::<Vec<_>>()
        .join(" + ")
}

fn kind_of(decl: &DeclAppliance, seen: &DeclAppliance) -> Kind {
    let (dw, sw) = (decl.wirings(), seen.wirings());
    let ll = |v: &[Wiring]| v.iter().any(|w| w.is_line_to_line());
    let tp = |v: &[Wiring]| v.contains(&Wiring::ThreePhase);
    if tp(&dw) || tp(&sw) {
        Kind::WrongConnection
    } else if ll(&dw) && !ll(&sw) {
        Kind::DeclaredLlSeenLn
    } else if !ll(&dw) && ll(&sw) {
        Kind::DeclaredLnSeenLl
    } else {
        Kind::WrongLine
    }
}

/// Why an appliance cannot be checked from the declaration alone, if so:
/// no fixed step, or a step too small. (Used to pick fault-matrix targets.)
pub fn uncheckable(a: &DeclAppliance) -> Option<String> {
    match &a.steps {
        super::decl::Steps::None(why) => Some((*why).into()),
        super::decl::Steps::Wanders { jumps, .. } if jumps.is_empty() => {
            Some("its power wanders continuously".into())
        }
        _ if a.largest_step_w() < Thresholds::STANDARD.decide_w => Some(format!(
            "its largest step, {:.0} W, is below the {:.0} W the audit decides on",
            a.largest_step_w(),
            Thresholds::STANDARD.decide_w
        )),
        _ => None,
    }
}

/// Why an appliance of declaration `d` cannot be placed, if so: as
/// [`uncheckable`], except that a draw with a rated voltage counts at its
/// size on every connection it could be on. A 1 kW, 240 V heater declared
/// line-to-neutral is taken at 250 W there, below the size the audit
/// decides on, but it is 1 kW (or 750 W at 208 V) across two lines, where
/// the steps of a heater misdeclared so show.
pub fn uncheckable_in(d: &Declared, a: &DeclAppliance, th: &Thresholds) -> Option<String> {
    let why = uncheckable(a)?;
    if a.steps.jumps().is_empty() {
        return Some(why);
    }
    let anywhere = alternatives(d, a)
        .iter()
        .map(|(_, b)| b.largest_step_w())
        .fold(a.largest_step_w(), f64::max);
    (anywhere < th.decide_w).then_some(why)
}

/// Whether every step of 500 W or more of appliance `j` is, at nominal
/// voltage, within twice the voltage-aware tolerance of a step of one
/// other declared appliance (either way round): then the data cannot tell
/// the two apart, and leaving one out of the declaration cannot be seen.
/// Returns that other appliance's id.
pub fn indistinct(d: &Declared, j: usize) -> Option<String> {
    let own: Vec<Vec<C64>> = d
        .signatures(&d.appliances[j])
        .into_iter()
        .filter(|t| t.iter().map(|c| c.re).sum::<f64>().abs() >= 500.0)
        .collect();
    if own.is_empty() {
        return None;
    }
    let close = |a: &[C64], b: &[C64]| {
        let size = a.iter().map(|c| c.abs()).fold(0.0, f64::max);
        let tol = 2.0 * (TOL_ABS_V_W + TOL_REL_V * size);
        a.iter().zip(b).all(|(x, y)| (*x - *y).abs() <= tol)
            || a.iter().zip(b).all(|(x, y)| (*x + *y).abs() <= tol)
    };
    d.appliances
        .iter()
        .enumerate()
        .filter(|(k, _)| *k != j)
        .find(|(_, o)| {
            let theirs = d.signatures(o);
            own.iter().all(|t| theirs.iter().any(|u| close(t, u)))
        })
        .map(|(_, o)| o.id.clone())
}

/// The channel stats say a channel has no CT: null nearly always, or nothing
/// at all while declared loads draw through its conductor.
fn absent_channels(d: &Declared, stats: &[ChannelStats]) -> Vec<bool> {
    stats
        .iter()
        .enumerate()
        .map(|(c, st)| {
            let read = st.rows.max(1) as f64;
            st.null as f64 / read > 0.9 || d.channels[c].conductor.is_none()
        })
        .collect()
}

/// An appliance's fit on another wiring: (steps it alone fits, steps that
/// fit, who else fits, its steps, the wiring's name, the appliance so wired).
type OtherFit = (
    usize,
    Vec<usize>,
    Vec<usize>,
    Vec<usize>,
    String,
    DeclAppliance,
);

/// The audit's findings with the standard cut-offs (see [`check_with`]).
pub fn check(d: &Declared, events: &[Event], stats: &[ChannelStats], interval_s: f64) -> Outcome {
    check_with(d, events, stats, interval_s, &Thresholds::STANDARD)
}

/// Channels that read nothing: a finding of a missing CT, or a note where
/// every appliance declared through the line shows on another connection.
fn channel_findings(
    d: &Declared,
    events: &[Event],
    stats: &[ChannelStats],
    th: &Thresholds,
) -> (Vec<Finding>, Vec<String>) {
    let n = d.supply.lines();
    let mut findings = Vec::new();
    let mut notes = Vec::new();
    for c in 0..n {
        let st = &stats[c];
        let read = st.rows.max(1) as f64;
        let loaded = d
            .appliances
            .iter()
            .any(|a| a.wirings().iter().any(|w| w.lines(n).contains(&c)));
        let empty = st.null as f64 / read > 0.9;
        let silent = loaded && st.zero as f64 / read > 0.98;
        if d.channels[c].conductor.is_some()
            && silent
            && !empty
            && declared_elsewhere(d, events, c, th)
        {
            notes.push(format!("channel {} reads nothing, and every appliance declared through {} shows on another connection: nothing seems to run on {}, and those appliances are placed from their steps", line_name(c), line_label(c), line_label(c)));
        } else if d.channels[c].conductor.is_some() && (empty || silent) {
            findings.push(Finding {
                kind: Kind::NoCt,
                subject: line_name(c),
                message: format!("channel {} reads no current although a CT on {} is declared: {:.0} % of its rows are empty, {:.0} % read nothing; line-to-line loads show at half power on the other line only", line_name(c), line_label(d.channels[c].conductor.unwrap_or(c)), 100.0 * st.null as f64 / read, 100.0 * st.zero as f64 / read),
                confidence: (st.null.max(st.zero) as f64 / read).min(1.0),
                evidence: json!({ "rows": st.rows, "null_rows": st.null, "zero_rows": st.zero }),
                doubt: None,
            });
        }
    }
    (findings, notes)
}

/// A metering hypothesis as scored: (index, appliances fitted, steps
/// explained, negative share, cost).
type Scored = (usize, usize, usize, f64, usize);

/// The metering hypotheses, each scored, the declared one's index and the
/// one chosen.
struct MeteringChoice {
    hyps: Vec<(Metering, usize)>,
    scored: Vec<Scored>,
    decl_m: Metering,
    decl_i: usize,
    chosen: usize,
}

/// The declared metering while it is admissible and explains at least
/// 90 % of the steps the best admissible one explains; otherwise the
/// cheapest admissible hypothesis within 95 % of the best.
fn best_admissible(scored: &[Scored], decl_i: usize, th: &Thresholds) -> usize {
    let ok = |s: &&Scored| s.3 <= th.negative_ok;
    let (decl_ex, decl_neg) = (scored[decl_i].2, scored[decl_i].3);
    let best_ex = scored.iter().filter(ok).map(|s| s.2).max().unwrap_or(0);
    if decl_neg <= th.negative_ok && decl_ex as f64 >= 0.9 * best_ex as f64 {
        decl_i
    } else {
        scored
            .iter()
            .filter(ok)
            .filter(|s| s.2 as f64 >= 0.95 * best_ex as f64)
            .min_by_key(|s| (s.4, usize::MAX - s.2))
            .map(|s| s.0)
            .unwrap_or(decl_i)
    }
}

/// The most of `big` the declared metering explains with at most one
/// appliance moved to another connection (`decl_ex` with none moved).
fn most_with_one_move(d: &Declared, decl_m: &Metering, big: &[&Event], decl_ex: usize) -> usize {
    // The other appliances' fits stay as they are while one is moved.
    let fits: Vec<Fits> = d
        .appliances
        .iter()
        .map(|a| fits_of(d, decl_m, a, big))
        .collect();
    let mut most = decl_ex;
    for (j, a) in d.appliances.iter().enumerate() {
        for (_, alt) in alternatives(d, a) {
            let moved = fits_of(d, decl_m, &alt, big);
            let others = fits
                .iter()
                .enumerate()
                .filter(|(o, _)| *o != j)
                .map(|(_, f)| f);
            most = most.max(steps_explained(others.chain([&moved]), big.len()));
        }
    }
    most
}

/// Scores every metering hypothesis on the steps `big` and chooses one.
fn choose_metering(
    d: &Declared,
    stats: &[ChannelStats],
    absent: &[bool],
    big: &[&Event],
    th: &Thresholds,
) -> MeteringChoice {
    let decl_m = declared_metering(d, absent);
    let hyps = hypotheses(d, absent);
    let scored: Vec<Scored> = hyps
        .iter()
        .enumerate()
        .map(|(i, (m, cost))| {
            let neg = negative_share(m, stats);
            let (apps, ex) = if neg <= th.negative_ok {
                explained(d, m, big)
            } else {
                (0, 0)
            };
            (i, apps, ex, neg, *cost)
        })
        .collect();
    let decl_i = hyps.iter().position(|(m, _)| *m == decl_m).unwrap_or(0);
    let chosen = best_admissible(&scored, decl_i, th);
    let (decl_ex, decl_neg) = (scored[decl_i].2, scored[decl_i].3);
    // One appliance on another connection is a simpler mistake than a
    // metering fault: the declared metering stands when, with the one
    // appliance moved that helps most, it explains as many steps as the
    // metering chosen above. (A misdeclared appliance that switches often
    // can otherwise tip the choice; a lower bar, 90 %, kept the declared
    // metering where two channels were in fact exchanged.)
    let chosen = if chosen != decl_i
        && decl_neg <= th.negative_ok
        && most_with_one_move(d, &decl_m, big, decl_ex) >= scored[chosen].2
    {
        decl_i
    } else {
        chosen
    };
    MeteringChoice {
        hyps,
        scored,
        decl_m,
        decl_i,
        chosen,
    }
}

/// The confidence that the metering found (`ch`) and not the declared one
/// (`decl`) is right: the share of the `n_big` steps the declared metering
/// leaves unexplained that the metering found explains, of the appliances
/// only it fits, of the `replaced` appliance moves it replaces, or of
/// negative power the declared one implies: whichever says most.
fn metering_confidence(
    decl: &Scored,
    ch: &Scored,
    n_big: usize,
    replaced: usize,
    th: &Thresholds,
) -> f64 {
    let (decl_apps, decl_ex, decl_neg) = (decl.1, decl.2, decl.3);
    let (ch_apps, ch_ex) = (ch.1, ch.2);
    let by_apps = 1.0 - (decl_apps as f64 + 1.0) / (ch_apps as f64 + 1.0);
    let by_steps =
        ch_ex.saturating_sub(decl_ex) as f64 / (n_big.saturating_sub(decl_ex) as f64).max(1.0);
    let by_moves = if replaced > 0 {
        1.0 - 1.0 / replaced as f64
    } else {
        0.0
    };
    let mut conf = by_apps.max(by_steps).max(by_moves);
    if decl_neg > th.negative_ok {
        conf = conf.max(decl_neg);
    }
    conf.clamp(0.0, 1.0)
}

/// Which of the steps `used` an appliance as placed explains.
fn steps_fit(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    placed: &[DeclAppliance],
    interval_s: f64,
) -> Vec<bool> {
    let explain: Vec<Pred> = placed.iter().map(|a| Pred::of(d, m, a)).collect();
    let own: Vec<Option<Vec<Option<C64>>>> = placed.iter().map(|a| shape_of(d, m, a)).collect();
    let dj = distances(d, m, used, cxs, &explain, &own, interval_s);
    let mut fit: Vec<bool> = dj.iter().map(|r| r.iter().any(|x| *x <= 1.0)).collect();
    // A step whose part on the channels it mainly changes (a quarter of its
    // largest or more) fits a declared appliance, the rest being a smaller
    // change on another channel in the same interval, is that appliance's
    // and another load's (common at 10 s): explained, not a load of its own.
    for (k, e) in used.iter().enumerate() {
        if fit[k] || e.size() < 400.0 {
            continue;
        }
        let top = e.size();
        let mut main = (*e).clone();
        let mut minor = false;
        for x in main.delta.iter_mut() {
            if x.abs() < 0.25 * top && x.abs() > 0.0 {
                *x = C64::ZERO;
                minor = true;
            }
        }
        fit[k] = minor && explain.iter().any(|p| p.dist(d, m, &main, &cxs[k]) <= 1.0);
    }
    fit
}

/// The energy the working channels read under the metering `m`, in Wh.
fn metered_energy_wh(
    stats: &[ChannelStats],
    absent: &[bool],
    m: &Metering,
    interval_s: f64,
) -> f64 {
    stats
        .iter()
        .enumerate()
        .filter(|(c, _)| !absent[*c])
        // Under the metering found: a reversed CT's sum counts as the
        // conductor's (positive) energy, not against the others'.
        .map(|(c, s)| m.map[c].k * s.sum_p)
        .sum::<f64>()
        * interval_s
        / 3600.0
}

/// The findings, with their doubts, sorted into those listed, those
/// listed as possible, and undeclared loads a partial declaration leaves
/// unlisted.
fn sort_findings(
    d: &Declared,
    mut findings: Vec<Finding>,
    placed: &[DeclAppliance],
    checks: &[ApplianceCheck],
    interval_s: f64,
    th: &Thresholds,
) -> (Vec<Finding>, Vec<Finding>, Vec<Finding>) {
    for f in findings.iter_mut() {
        f.doubt = f
            .doubt
            .take()
            .or_else(|| coarse_doubt(f.kind, interval_s, th))
            .or_else(|| undeclared_doubt(d, placed, checks, f));
    }
    let (findings, possible): (Vec<Finding>, Vec<Finding>) = findings
        .into_iter()
        .partition(|f| f.confidence >= th.possible && f.doubt.is_none());
    let (unlisted, findings) = findings
        .into_iter()
        .partition(|f| d.partial && f.kind == Kind::UndeclaredLoad);
    (findings, possible, unlisted)
}

/// A note for each appliance whose large steps are another's as well.
fn indistinct_notes(d: &Declared) -> Vec<String> {
    (0..d.appliances.len())
        .filter_map(|j| {
            indistinct(d, j).map(|o| {
                format!("{}: its steps of 500 W or more are those of {o} as well; the data cannot tell the two apart", d.appliances[j].id)
            })
        })
        .collect()
}

/// Metering, placement and undeclared loads, from the steps `events` and
/// channel statistics of a meters table at `interval_s`, against
/// declaration `d`, deciding by the cut-offs `th`.
pub fn check_with(
    d: &Declared,
    events: &[Event],
    stats: &[ChannelStats],
    interval_s: f64,
    th: &Thresholds,
) -> Outcome {
    let n = d.supply.lines();
    let absent = absent_channels(d, stats);
    let (mut findings, mut notes) = channel_findings(d, events, stats, th);
    let absent: Vec<bool> = (0..n)
        .map(|c| absent[c] || findings.iter().any(|f| f.subject == line_name(c)))
        .collect();
    let big: Vec<&Event> = events.iter().filter(|e| e.size() >= 150.0).collect();
    // 1. Metering.
    let mc = choose_metering(d, stats, &absent, &big, th);
    let (decl_i, mut chosen) = (mc.decl_i, mc.chosen);
    let (decl_apps, decl_ex, decl_neg) = (
        mc.scored[decl_i].1,
        mc.scored[decl_i].2,
        mc.scored[decl_i].3,
    );
    // 2. Appliances, under the metering chosen; several appliances moved
    // where one metering fault explains as much is the less simple account.
    let used: Vec<&Event> = events.iter().filter(|e| e.size() >= USE_STEP).collect();
    let mut m = mc.hyps[chosen].0.clone();
    let mut cxs: Vec<Ctx> = used.iter().map(|e| Ctx::of(d, &m, e)).collect();
    let mut moves = Vec::new();
    let (mut checks, mut placed) = place(d, &m, &used, &cxs, interval_s, &mut moves, th);
    let mut replaced = 0;
    if chosen == decl_i && moves.len() >= 2 {
        if let Some(alt) = simpler_metering(d, &mc.decl_m, &placed, &big, &mc.scored, decl_i, th) {
            (chosen, replaced) = (alt, moves.len());
            m = mc.hyps[chosen].0.clone();
            cxs = used.iter().map(|e| Ctx::of(d, &m, e)).collect();
            moves.clear();
            (checks, placed) = place(d, &m, &used, &cxs, interval_s, &mut moves, th);
        }
    }
    let (ch_apps, ch_ex) = (mc.scored[chosen].1, mc.scored[chosen].2);
    if chosen != decl_i {
        let conf = metering_confidence(
            &mc.scored[decl_i],
            &mc.scored[chosen],
            big.len(),
            replaced,
            th,
        );
        let ev = json!({ "steps_used": big.len(), "explained_as_declared": decl_ex, "explained_as_found": ch_ex, "appliances_fitting_as_declared": decl_apps, "appliances_fitting_as_found": ch_apps, "negative_share_as_declared": decl_neg, "appliance_moves_replaced": replaced });
        metering_findings(d, &mc.decl_m, &m, conf, ev, &mut findings);
        silent_channel_accounts(&m, &mut findings, &mut notes);
    }
    findings.extend(moves);
    notes.push(format!("metering: {ch_apps} appliances and {ch_ex} of {} steps of 150 VA or more fit under the metering found ({decl_apps} and {decl_ex} as declared)", big.len()));
    notes.extend(indistinct_notes(d));
    // 3. Undeclared recurring loads.
    let fit = steps_fit(d, &m, &used, &cxs, &placed, interval_s);
    let total_wh = metered_energy_wh(stats, &absent, &m, interval_s);
    let hours = stats.iter().map(|s| s.rows).max().unwrap_or(0) as f64 * interval_s / 3600.0;
    let sums = coincidences(d, &m, &placed, &used, interval_s, hours);
    undeclared(d, &m, &used, &fit, &sums, total_wh, &mut findings, th);
    let steps_explained = fit.iter().filter(|x| **x).count();
    let (findings, possible, unlisted) =
        sort_findings(d, findings, &placed, &checks, interval_s, th);
    if steps_explained * 2 < used.len() {
        notes.push(format!("the declaration explains {steps_explained} of {} steps of 100 VA or more: many loads are not declared{}", used.len(), if d.partial { " (it says it is partial); the metering and placement checks rest on the declared appliances alone" } else { "; if it lists only some appliances, say so with [declaration] partial = true" }));
    }
    Outcome {
        possible_below: th.possible,
        findings,
        possible,
        unlisted,
        appliances: checks,
        metering: m,
        steps: used.len(),
        steps_explained,
        notes,
    }
}

/// The metering hypothesis (index into `scored`: index, appliances,
/// steps explained, negative share, cost) that explains, with every
/// appliance as declared, at least as many of `big` as the declared
/// metering does with the appliances `placed` (moved): one metering fault
/// is a simpler account than several appliances moved.
fn simpler_metering(
    d: &Declared,
    decl_m: &Metering,
    placed: &[DeclAppliance],
    big: &[&Event],
    scored: &[(usize, usize, usize, f64, usize)],
    decl_i: usize,
    th: &Thresholds,
) -> Option<usize> {
    let dp = Declared {
        appliances: placed.to_vec(),
        ..d.clone()
    };
    let (_, with_moves) = explained(&dp, decl_m, big);
    scored
        .iter()
        .filter(|s| s.0 != decl_i && s.3 <= th.negative_ok)
        .max_by_key(|s| (s.2, usize::MAX - s.4))
        .filter(|s| s.2 >= with_moves)
        .map(|s| s.0)
}

fn metering_findings(
    d: &Declared,
    decl: &Metering,
    m: &Metering,
    confidence: f64,
    evidence: Value,
    out: &mut Vec<Finding>,
) {
    let n = d.supply.lines();
    let mut push = |kind: Kind, subject: String, message: String| {
        out.push(Finding {
            kind,
            subject,
            message,
            confidence,
            evidence: evidence.clone(),
            doubt: None,
        })
    };
    if m.map.iter().any(|c| !c.turned) {
        let moved: Vec<usize> = (0..n).filter(|&c| m.map[c].src != c).collect();
        let names: Vec<String> = moved.iter().map(|&c| line_name(c)).collect();
        let reads: Vec<String> = moved
            .iter()
            .map(|&c| format!("{} reads {}", line_name(c), line_label(m.map[c].src)))
            .collect();
        push(
            Kind::ChannelsExchanged,
            names.join("+"),
            format!(
                "channels {} are exchanged, CT and voltage together (or their labels): {}",
                names.join(" and "),
                reads.join(", ")
            ),
        );
        return;
    }
    let mut done = vec![false; n];
    for a in 0..n {
        let b = m.map[a].src;
        if done[a] || m.absent[a] || b == decl.map[a].src {
            continue;
        }
        if b != a && m.map[b].src == a && decl.map[b].src == b && !m.absent[b] {
            done[a] = true;
            done[b] = true;
            push(Kind::CtsExchanged, format!("{}+{}", line_name(a.min(b)), line_name(a.max(b))), format!("the CTs of channels {} and {} are exchanged: each sits on the other's conductor", line_name(a), line_name(b)));
        } else {
            done[a] = true;
            push(
                Kind::CtOnOtherConductor,
                line_name(a),
                format!(
                    "the CT of channel {} is on conductor {}, not {}",
                    line_name(a),
                    line_label(b),
                    line_label(decl.map[a].src)
                ),
            );
        }
    }
    for c in 0..n {
        if !m.absent[c] && m.map[c].k != decl.map[c].k {
            push(
                Kind::ReversedCt,
                line_name(c),
                format!(
                    "the CT of channel {} reads reversed: the power it implies is negative{}",
                    line_name(c),
                    if decl.map[c].k < 0.0 {
                        " unless it is clamped as it should be (declared reversed)"
                    } else {
                        ""
                    }
                ),
            );
        }
    }
}

/// The first few of some event times, as UTC timestamps (evidence a user
/// can look up in the data).
fn first(ms: &[i64]) -> Vec<String> {
    ms.iter()
        .take(5)
        .map(|&t| {
            jiff::Timestamp::from_millisecond(t)
                .map(|t| t.to_string())
                .unwrap_or_default()
        })
        .collect()
}

/// The first few of some event times as local times in zone `tz`
/// ("Mon 2027-01-04 09:01"), what an installer can ask the household about.
fn first_local(ms: &[i64], tz: &str) -> Vec<String> {
    let zone = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    ms.iter()
        .take(3)
        .filter_map(|&t| jiff::Timestamp::from_millisecond(t).ok())
        .map(|t| {
            t.to_zoned(zone.clone())
                .strftime("%a %Y-%m-%d %H:%M")
                .to_string()
        })
        .collect()
}

/// Each start (ms, in order) paired with the next stop within 12 h.
fn start_stop_pairs(on: &[i64], off: &[i64]) -> Vec<(i64, i64)> {
    let mut out = Vec::new();
    let mut j = 0;
    for (i, &t) in on.iter().enumerate() {
        while j < off.len() && off[j] <= t {
            j += 1;
        }
        // The stop must come before the load's next start: a start whose
        // stop was not seen (it fell among other changes) does not borrow
        // a later cycle's stop.
        let next = on.get(i + 1).copied().unwrap_or(i64::MAX);
        if j < off.len() && off[j] - t <= 12 * 3_600_000 && off[j] < next {
            out.push((t, off[j]));
            j += 1;
        }
    }
    out
}

/// The energy of a load of `p_w` started at `on` and stopped at `off`,
/// Wh, as a share of `total_wh` (None when no start pairs with a stop):
/// the mean length of the runs seen whole, for every start.
fn energy_share(p_w: f64, on: &[i64], off: &[i64], total_wh: f64) -> Option<f64> {
    let pairs = start_stop_pairs(on, off);
    if pairs.is_empty() || total_wh <= 0.0 {
        return None;
    }
    let mean_h =
        pairs.iter().map(|(a, b)| (b - a) as f64).sum::<f64>() / pairs.len() as f64 / 3_600_000.0;
    Some((p_w * mean_h * on.len() as f64 / total_wh).clamp(0.0, 1.0))
}

/// Whether recurring steps behave as one load's: started or stopped three
/// times or more, and stopping after starting (two starts each followed
/// by a stop within 12 h) unless seen mostly one way (at most one the
/// other way for every four: a load that tapers off shows its starts alone, and at
/// 10 s a declared appliance with part of a wander may pass for most of
/// its stops). Steps of two appliances that happened to switch together,
/// or of one with a wander, fall in any order.
fn behaves_as_a_load(on: &[i64], off: &[i64]) -> bool {
    let (most, fewest) = (on.len().max(off.len()), on.len().min(off.len()));
    most >= 3 && (4 * fewest <= most || start_stop_pairs(on, off).len() >= 2)
}

#[allow(clippy::too_many_arguments)]
/// Two declared appliances switching in one interval make one step, their
/// sum. Each sum of two jumps of two appliances (either the same way or
/// opposite ways), with how often such a coincidence is expected in the
/// run: n₁ n₂ w / 2T for jumps seen n₁ and n₂ times (starts and stops)
/// in T, with a window w as wide as two steps merge in the detector
/// (closer than `level_rows` either way), and half the pairs the same way
/// round (independent switching: the rate of Poisson coincidences; common
/// practice, no source).
fn coincidences(
    d: &Declared,
    m: &Metering,
    placed: &[DeclAppliance],
    events: &[&Event],
    interval_s: f64,
    hours: f64,
) -> Vec<(Vec<Option<C64>>, f64)> {
    let jumps: Vec<(usize, Vec<Option<C64>>, usize)> = placed
        .iter()
        .enumerate()
        .flat_map(|(j, a)| predicted(d, m, a).into_iter().map(move |r| (j, r)))
        .map(|(j, r)| {
            let n = events.iter().filter(|e| fits(e, &r)).count();
            (j, r, n)
        })
        .filter(|(_, _, n)| *n > 0)
        .collect();
    let t_s = hours * 3600.0;
    if t_s <= 0.0 {
        return vec![];
    }
    let w = 2.0 * super::events::level_rows(interval_s) as f64 * interval_s;
    let mut out = Vec::new();
    for (i, (ja, ra, na)) in jumps.iter().enumerate() {
        for (jb, rb, nb) in &jumps[i + 1..] {
            if ja == jb {
                continue;
            }
            let rate = (*na * *nb) as f64 * w / (2.0 * t_s);
            for sign in [1.0, -1.0] {
                let sum: Vec<Option<C64>> = ra
                    .iter()
                    .zip(rb)
                    .map(|(a, b)| match (a, b) {
                        (Some(a), Some(b)) => Some(*a + b.scale(sign)),
                        _ => None,
                    })
                    .collect();
                out.push((sum, rate));
            }
        }
    }
    out
}

/// P(X ≥ k) for X Poisson with mean `mean`.
fn poisson_tail(mean: f64, k: usize) -> f64 {
    let (mut term, mut below) = ((-mean).exp(), 0.0);
    for i in 0..k {
        below += term;
        term *= mean / (i + 1) as f64;
    }
    (1.0 - below).max(0.0)
}

/// Steps of one connection and size that nothing declared explains, gathered
/// as the runs of one possible load.
struct Cluster {
    wiring: String,
    /// Mean channel step, as a start.
    v: Vec<C64>,
    s: C64,
    on: Vec<i64>,
    off: Vec<i64>,
}

impl Cluster {
    /// Whether a step `v` on connection `label` is alike on the channels the
    /// cluster's load draws through (a quarter of its largest channel step
    /// or more); a change on another channel in the same interval is another
    /// load's (at 10 s a heater's stop often shares its row with a change on
    /// the other line).
    fn close(&self, label: &str, v: &[C64]) -> bool {
        let top = self.v.iter().map(|a| a.abs()).fold(0.0, f64::max);
        self.wiring == label
            && self
                .v
                .iter()
                .zip(v)
                .filter(|(a, _)| a.abs() >= 0.25 * top)
                .all(|(a, b)| (*a - *b).abs() <= 0.1 * a.abs() + 50.0)
    }

    /// Adds a step (its start form `v`, power `s`) at `time_ms` to the
    /// running means.
    fn add(&mut self, v: &[C64], s: C64, on: bool, time_ms: i64) {
        let cnt = (self.on.len() + self.off.len()) as f64;
        self.s = (self.s.scale(cnt) + s).scale(1.0 / (cnt + 1.0));
        for (a, b) in self.v.iter_mut().zip(v) {
            *a = (a.scale(cnt) + *b).scale(1.0 / (cnt + 1.0));
        }
        if on {
            self.on.push(time_ms);
        } else {
            self.off.push(time_ms);
        }
    }
}

/// The connection a step nothing explains is drawn through and its power:
/// one connection, or (an appliance with draws on several lines) its part
/// on each line, each as a line-to-neutral draw. `None` when it fits
/// neither.
fn step_connection(d: &Declared, m: &Metering, e: &Event) -> Option<(String, C64)> {
    let fit = connection_of(d, m, &e.delta);
    let (w, s, res) = fit[0];
    if res <= 0.2 {
        return Some((w.name(), s));
    }
    let parts: Vec<(Wiring, C64)> = fit
        .iter()
        .filter(|f| matches!(f.0, Wiring::LineNeutral(_)) && f.1.abs() >= USE_STEP)
        .map(|f| (f.0, f.1))
        .collect();
    if parts.len() < 2 {
        return None;
    }
    let mut ws: Vec<Wiring> = parts.iter().map(|p| p.0).collect();
    ws.sort_by_key(|w| w.name());
    Some((
        ws.iter().map(|w| w.name()).collect::<Vec<_>>().join(" + "),
        parts.iter().fold(C64::ZERO, |a, p| a + p.1),
    ))
}

/// Steps of 500 W or more that nothing declared explains, clustered by
/// connection and size (a stop counts as its start turned around).
fn unexplained_clusters(
    d: &Declared,
    m: &Metering,
    events: &[&Event],
    explained: &[bool],
) -> Vec<Cluster> {
    let mut cl: Vec<Cluster> = Vec::new();
    for (e, _) in events
        .iter()
        .zip(explained)
        .filter(|(e, x)| e.size() >= 400.0 && !**x)
    {
        let Some((label, s)) = step_connection(d, m, e) else {
            continue;
        };
        let on = s.re >= 0.0;
        let (s, v): (C64, Vec<C64>) = if on {
            (s, e.delta.clone())
        } else {
            (-s, e.delta.iter().map(|x| -*x).collect())
        };
        if s.re < 500.0 {
            continue;
        }
        let k = match cl.iter().position(|c| c.close(&label, &v)) {
            Some(k) => k,
            None => {
                cl.push(Cluster {
                    wiring: label.clone(),
                    v: v.clone(),
                    s,
                    on: vec![],
                    off: vec![],
                });
                cl.len() - 1
            }
        };
        cl[k].add(&v, s, on, e.time_ms);
    }
    cl
}

/// The finding for cluster `c` when it is no likely coincidence of two
/// declared appliances (their step sums and rates `sums`).
fn undeclared_finding(
    d: &Declared,
    c: &Cluster,
    sums: &[(Vec<Option<C64>>, f64)],
    total_wh: f64,
    th: &Thresholds,
) -> Option<Finding> {
    // As many coincidences of two declared appliances this size as
    // seen are not unlikely: not a load of its own.
    let expected: f64 = sums
        .iter()
        .filter(|(r, _)| dist_delta(&c.v, r) <= 1.0)
        .map(|(_, rate)| rate)
        .sum();
    if poisson_tail(expected, c.on.len() + c.off.len()) > th.coincidence_p {
        return None;
    }
    let share = energy_share(c.s.re, &c.on, &c.off, total_wh);
    let share_text = match share {
        Some(x) => format!("about {:.1} % of the energy", 100.0 * x),
        None => "its share of the energy unknown (no run seen whole)".into(),
    };
    // `+ 0.0` turns a negative zero into zero (never "-0.0" printed).
    let expected = expected.max(0.0) + 0.0;
    Some(Finding {
        kind: Kind::UndeclaredLoad,
        subject: format!("{:.0} W on {}", c.s.re, c.wiring),
        message: format!("a recurring load of about {:.0} W (pf {:.2}) on {} that no declared appliance explains: started {} times, stopped {} times (two declared appliances switching together would make about {:.1} such steps), {share_text}", c.s.re, c.s.re / c.s.abs(), c.wiring, c.on.len(), c.off.len(), expected),
        // Runs seen whole (a start, then its stop before the next
        // start), a tenth each: steps seen one way only count for
        // nothing (at 10 s, starts of declared loads straddling rows).
        confidence: (start_stop_pairs(&c.on, &c.off).len() as f64 / 10.0).min(1.0),
        evidence: json!({ "starts": c.on.len(), "stops": c.off.len(), "coincidences_expected": expected, "p_w": c.s.re, "q_var": c.s.im, "wiring": c.wiring, "energy_share": share, "first_starts": first(&c.on), "first_stops": first(&c.off), "first_starts_local": first_local(&c.on, &d.timezone) }),
        doubt: None,
    })
}

/// Recurring steps nothing declared explains, clustered by connection and
/// size; a cluster that behaves as one load and is no likely coincidence of
/// two declared appliances is a finding.
#[allow(clippy::too_many_arguments)]
fn undeclared(
    d: &Declared,
    m: &Metering,
    events: &[&Event],
    explained: &[bool],
    sums: &[(Vec<Option<C64>>, f64)],
    total_wh: f64,
    out: &mut Vec<Finding>,
    th: &Thresholds,
) {
    // Recurring, and as one load behaves.
    // A cluster with no run seen whole (a start, then its stop) has no
    // confidence at all: at 10 s, starts of declared loads that straddle
    // two rows gather so; it is not listed, not even as possible.
    let cl = unexplained_clusters(d, m, events, explained);
    out.extend(
        cl.iter()
            .filter(|c| {
                behaves_as_a_load(&c.on, &c.off) && !start_stop_pairs(&c.on, &c.off).is_empty()
            })
            .filter_map(|c| undeclared_finding(d, c, sums, total_wh, th)),
    );
}

/// How often, against its steps that fit alone, an appliance's steps may
/// need part of a wander to fit: a quarter at 1 s, growing with the
/// interval (the chance that a wander change falls into the rows either
/// side of a step grows with their length) up to a half from 2 s. At 10 s
/// a 750 W heater beside a heat pump and a blower that change every minute
/// needs one about a third as often as not (measured in the fault
/// matrix); a load nobody declared that passes as a rarely used declared
/// one plus a wander each time needs one far more often.
fn coincidence_share(interval_s: f64) -> f64 {
    (0.25 * interval_s).clamp(0.25, 0.5)
}

/// Each event's distance from each appliance's steps (rows: events). A
/// jump together with part of a wander in the same interval is a
/// coincidence, so it counts only for an appliance that needs it rarely:
/// at most `coincidence_share` as often as its steps fit alone, plus two (a load
/// nobody declared must not pass as a declared one plus a wander each
/// time). An appliance that wanders also fits its own wander steps.
fn distances(
    d: &Declared,
    m: &Metering,
    events: &[&Event],
    cxs: &[Ctx],
    preds: &[Pred],
    own: &[Option<Vec<Option<C64>>>],
    interval_s: f64,
) -> Vec<Vec<f64>> {
    let share = coincidence_share(interval_s);
    let shapes: Vec<Vec<Option<C64>>> = own.iter().flatten().cloned().collect();
    let na = preds.len();
    let pairs: Vec<Vec<(f64, f64)>> = events
        .iter()
        .zip(cxs)
        .map(|(e, cx)| {
            preds
                .iter()
                .map(|p| p.dist2(d, m, e, cx, &shapes))
                .collect()
        })
        .collect();
    let plausible: Vec<bool> = (0..na)
        .map(|j| {
            let alone = pairs.iter().filter(|r| r[j].0 <= 1.0).count();
            let with = pairs
                .iter()
                .filter(|r| r[j].0 > 1.0 && r[j].1 <= 1.0)
                .count();
            with as f64 <= share * alone as f64 + 2.0
        })
        .collect();
    pairs
        .iter()
        .zip(events)
        .map(|(r, e)| {
            (0..na)
                .map(|j| {
                    if plausible[j] { r[j].1 } else { r[j].0 }.min(
                        own[j]
                            .as_ref()
                            .map(|sh| dist_shape(e, sh))
                            .unwrap_or(f64::INFINITY),
                    )
                })
                .collect()
        })
        .collect()
}

/// Whether a rival `rival` tolerances from a step shares it with an
/// appliance `me` tolerances from it.
fn shares(me: f64, rival: f64, th: &Thresholds) -> bool {
    rival <= 1.0 && rival < me + th.clearly_better
}

/// The finding that appliance `a` is on `alt` (named `found`): `n_a` steps
/// fit it there, `n_d` as declared (None: the declared wiring goes through
/// a conductor no working CT reads, and counts as `BLIND_MOVE` steps of
/// doubt in the confidence).
fn move_finding(
    d: &Declared,
    a: &DeclAppliance,
    alt: &DeclAppliance,
    found: &str,
    n_d: Option<usize>,
    n_a: usize,
    th: &Thresholds,
) -> Finding {
    let declared = wiring_names(a);
    let step_w = d
        .signatures(alt)
        .iter()
        .map(|t| t.iter().map(|c| c.re).sum::<f64>().abs())
        .fold(0.0, f64::max);
    let name = if a.label.is_empty() || a.label == a.id {
        a.id.clone()
    } else {
        format!("{} ({})", a.id, a.label)
    };
    let message = match n_d {
        Some(_) => format!("{name} is declared on {declared} but {n_a} steps of its size that no other appliance explains show on {found}"),
        None => format!("{name} is declared on {declared}, which no working CT reads, but {n_a} steps of its size that no other appliance explains show on {found}"),
    };
    // Either account stays open when its declared wiring cannot be seen,
    // or when it also shows where declared: the steps elsewhere may be
    // another load of its size (measured in the outside validation: such
    // moves were wrong four times in five).
    let doubt = match n_d {
        None => Some(format!("{declared} cannot be checked, so a load of its size on {found} that is not {} would look the same", a.id)),
        _ if d.partial => Some(format!("the declaration is partial, so a load it does not list, of this size on {found}, would look the same while {} was not used", a.id)),
        Some(k) if k >= th.seen_where_declared => Some(format!("{k} of its steps show where declared too, so the steps on {found} may be another load of its size")),
        Some(_) => None,
    };
    Finding {
        kind: kind_of(a, alt),
        subject: a.id.clone(),
        message,
        confidence: n_a as f64 / (n_a + n_d.unwrap_or(th.blind_move) + 1) as f64,
        doubt,
        evidence: json!({ "steps_as_declared": n_d, "steps_as_found": n_a, "declared": declared, "found": found, "step_w": step_w }),
    }
}

/// Share of an appliance's step sizes (its distinct jumps of `USE_STEP`
/// or more, and of `share` of its largest or more) that at least one of
/// `steps` fits, under `a`'s wiring:
/// a hair dryer whose half-heat steps fit but whose full-heat step is never
/// seen is a poor account of those steps.
fn coverage(
    d: &Declared,
    m: &Metering,
    a: &DeclAppliance,
    used: &[&Event],
    cxs: &[Ctx],
    steps: &[usize],
    share: f64,
) -> f64 {
    let model = Model::of(d, a);
    let sizes: Vec<f64> = d
        .signatures(a)
        .iter()
        .map(|t| t.iter().map(|c| c.abs()).fold(0.0, f64::max))
        .collect();
    let top = sizes.iter().cloned().fold(0.0, f64::max);
    let (mut big, mut seen) = (0, 0);
    for (jump, size) in model.jumps.iter().zip(sizes) {
        if size < USE_STEP || size < share * top {
            continue;
        }
        big += 1;
        let one = Model {
            jumps: vec![jump.clone()],
        };
        seen += steps
            .iter()
            .any(|&k| dist_model(d, m, used[k], &cxs[k], &one, &[]).0 <= 1.0)
            as usize;
    }
    if big == 0 {
        1.0
    } else {
        seen as f64 / big as f64
    }
}

/// The move to make first among candidate findings (appliance, steps,
/// wiring, finding, the steps, coverage): the one with the most steps,
/// unless another claims mostly the same steps (half of the fewer or more)
/// and shows more of its own step sizes among them. Two appliances with a
/// step of one size, one misdeclared, both fit the misdeclared one's steps
/// on its true line; the one whose other steps are there too is the one
/// that is there (common practice, no source).
fn contest(mut c: Vec<Candidate>) -> Option<Candidate> {
    // Most steps first; the earlier appliance on a tie.
    c.sort_by_key(|x| (usize::MAX - x.1, x.0));
    let top = c.first()?;
    let overlap = |x: &[usize], y: &[usize]| {
        x.iter().filter(|k| y.contains(k)).count() * 2 >= x.len().min(y.len())
    };
    let pick = (0..c.len())
        .filter(|&i| i == 0 || overlap(&c[i].4, &top.4))
        .max_by(|&i, &k| c[i].5.total_cmp(&c[k].5).then(k.cmp(&i)))?;
    Some(c.swap_remove(pick))
}

/// A candidate move: (appliance, steps, wiring, finding, the steps, share
/// of its step sizes among them).
type Candidate = (usize, usize, DeclAppliance, Finding, Vec<usize>, f64);

/// One round of placement: the appliances as placed so far and each step's
/// distance from them, against which every appliance is weighed.
struct Round<'a> {
    d: &'a Declared,
    m: &'a Metering,
    used: &'a [&'a Event],
    cxs: &'a [Ctx],
    th: &'a Thresholds,
    /// Conductors some working channel reads.
    seen: &'a [bool],
    placed: &'a [DeclAppliance],
    sigs: Vec<Pred>,
    /// Each step's distance from each appliance as placed.
    dj: Vec<Vec<f64>>,
}

impl Round<'_> {
    /// A conductor the wiring of `a` goes through that no working channel
    /// reads: a wiring through it cannot be told from the data.
    fn blind(&self, a: &DeclAppliance) -> Option<usize> {
        let n = self.d.supply.lines();
        a.wirings()
            .iter()
            .flat_map(|w| w.lines(n))
            .find(|&x| !self.seen[x])
    }

    /// Steps that fit a wiring `sg` of appliance `j` and no other appliance
    /// as placed nearly as well (exclusive), all that fit, who else fits,
    /// and the exclusive steps.
    fn excl(&self, j: usize, sg: &Pred) -> (usize, Vec<usize>, Vec<usize>, Vec<usize>) {
        let na = self.d.appliances.len();
        let (mut x, mut all, mut who, mut mine) = (0, Vec::new(), Vec::new(), Vec::new());
        for (k, e) in self.used.iter().enumerate() {
            let me = sg.dist(self.d, self.m, e, &self.cxs[k]);
            if me <= 1.0 {
                all.push(k);
                let dk = &self.dj[k];
                let rival = (0..na)
                    .filter(|&o| o != j && shares(me, dk[o], self.th))
                    .min_by(|&a, &b| dk[a].total_cmp(&dk[b]));
                match rival {
                    Some(o) => who.push(o),
                    None => {
                        x += 1;
                        mine.push(k);
                    }
                }
            }
        }
        (x, all, who, mine)
    }

    /// The best other wiring of appliance `j` (as placed, `a`) that a
    /// working CT reads.
    fn best_other(&self, j: usize, a: &DeclAppliance) -> OtherFit {
        let mut best: Option<OtherFit> = None;
        for (name, alt) in alternatives(self.d, a) {
            let sg = Pred::of(self.d, self.m, &alt);
            if !visible(&sg.nom) || self.blind(&alt).is_some() {
                continue;
            }
            let (x, all, who, mine) = self.excl(j, &sg);
            if best
                .as_ref()
                .is_none_or(|b| (x, all.len()) > (b.0, b.1.len()))
            {
                best = Some((x, all, who, mine, name, alt));
            }
        }
        best.unwrap_or((0, vec![], vec![], vec![], String::new(), a.clone()))
    }

    /// The check of appliance `j` (`moved` once a finding has moved it), and
    /// the move the steps support, if any.
    fn check(&self, j: usize, moved: bool) -> (ApplianceCheck, Option<Candidate>) {
        let a = &self.placed[j];
        let declared = wiring_names(&self.d.appliances[j]);
        let mut ck = ApplianceCheck {
            id: a.id.clone(),
            declared: declared.clone(),
            verdict: Verdict::Undecidable,
            seen: None,
            reason: String::new(),
            steps_declared: 0,
            steps_best_other: 0,
        };
        if a.steps.jumps().is_empty() {
            ck.reason = match &a.steps {
                super::decl::Steps::None(why) => format!("{why}: no step to recognise"),
                _ => "its power wanders continuously: no fixed step to place it by".into(),
            };
            return (ck, None);
        }
        if moved {
            let seen = wiring_names(a);
            let (n_a, ..) = self.excl(j, &self.sigs[j]);
            ck.verdict = Verdict::Finding;
            ck.reason = format!("{n_a} steps fit it on {seen}");
            ck.seen = Some(seen);
            ck.steps_best_other = n_a;
            return (ck, None);
        }
        if let Some(x) = self.blind(a) {
            let cand = self.check_blind(j, a, x, &mut ck);
            return (ck, cand);
        }
        if let Some(why) = uncheckable_in(self.d, a, self.th) {
            ck.reason = why;
            return (ck, None);
        }
        if !visible(&self.sigs[j].nom) {
            ck.reason = "its steps are too small to see".into();
            return (ck, None);
        }
        let cand = self.weigh(j, a, &declared, &mut ck);
        (ck, cand)
    }

    /// Appliance `j` declared through conductor `x`, which no working CT
    /// reads: its absence there cannot be seen, but its steps elsewhere
    /// can: many of them, fitting no other appliance, place it.
    fn check_blind(
        &self,
        j: usize,
        a: &DeclAppliance,
        x: usize,
        ck: &mut ApplianceCheck,
    ) -> Option<Candidate> {
        let (d, m, th) = (self.d, self.m, self.th);
        ck.reason = format!(
            "its wiring goes through L{}, which no working CT reads",
            x + 1
        );
        if uncheckable_in(d, a, th).is_some() {
            return None;
        }
        let (n_a, all_a, _, mine, name_a, alt) = self.best_other(j, a);
        ck.steps_best_other = n_a;
        let whole = n_a >= th.blind_move
            && coverage(d, m, &alt, self.used, self.cxs, &all_a, th.whole_share) >= 1.0;
        if whole {
            let f = move_finding(d, a, &alt, &name_a, None, n_a, th);
            let cover = coverage(d, m, &alt, self.used, self.cxs, &mine, 0.0);
            ck.reason = format!("{n_a} steps fit it on {name_a}; its declared wiring goes through L{}, which no working CT reads", x + 1);
            return Some((j, n_a, alt, f, mine, cover));
        }
        if n_a >= th.blind_move {
            ck.reason += &format!(" ({n_a} steps fit it on {name_a} and no other appliance, but not every one of its main step sizes shows there)");
        } else if n_a > 0 {
            ck.reason += &format!(
                " ({n_a} steps fit it on {name_a} and no other appliance; {} would place it there)",
                th.blind_move
            );
        }
        None
    }

    /// Appliance `j` (as placed, `a`; wired `declared`) weighed as declared
    /// against its best other wiring.
    fn weigh(
        &self,
        j: usize,
        a: &DeclAppliance,
        declared: &str,
        ck: &mut ApplianceCheck,
    ) -> Option<Candidate> {
        let (d, m, th) = (self.d, self.m, self.th);
        let (n_d, ..) = self.excl(j, &self.sigs[j]);
        ck.steps_declared = n_d;
        let (n_a, all_a, who, mine, name_a, alt) = self.best_other(j, a);
        ck.steps_best_other = n_a;
        // An appliance that shows where declared, each of its main
        // step sizes there, stays there: steps of its size elsewhere
        // are another load's (left to the undeclared loads), not a
        // reason to move it.
        let stays = n_d >= th.shows_as_declared && {
            let (.., mine_d) = self.excl(j, &self.sigs[j]);
            coverage(d, m, a, self.used, self.cxs, &mine_d, th.whole_share) >= 1.0
        };
        let moves = !stays && n_a >= 3 && n_a >= 3 * n_d + 2;
        let whole =
            moves && coverage(d, m, &alt, self.used, self.cxs, &all_a, th.whole_share) >= 1.0;
        if whole {
            let f = move_finding(d, a, &alt, &name_a, Some(n_d), n_a, th);
            let cover = coverage(d, m, &alt, self.used, self.cxs, &mine, 0.0);
            ck.reason = format!("{n_a} steps fit it on {name_a}, {n_d} on {declared}");
            return Some((j, n_a, alt, f, mine, cover));
        }
        if moves {
            ck.reason = format!("{n_a} steps fit it on {name_a} and no other appliance, {n_d} on {declared}, but not every one of its main step sizes shows there: too little to place it");
        } else if n_d >= 2 {
            ck.verdict = Verdict::AsDeclared;
            ck.reason =
                format!("{n_d} steps fit it as declared, at most {n_a} on any other connection");
        } else if all_a.len() >= 3 {
            let mut who: Vec<String> = who.iter().map(|&o| self.placed[o].id.clone()).collect();
            who.sort();
            who.dedup();
            ck.reason = format!(
                "{} steps would fit it on {name_a}, but they fit {} as well",
                all_a.len(),
                who.join(", ")
            );
        } else {
            ck.reason = format!("seen switching {n_d} times as declared and {n_a} times otherwise: too few to decide");
        }
        None
    }
}

/// Places every appliance: its wiring as declared, or another one the
/// steps support much better. Greedy: the best-supported finding is taken
/// first and the appliance moved before the others are weighed again, so
/// steps one misdeclared appliance leaves behind are not pinned on another.
/// Returns the checks and the appliances as placed.
fn place(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    interval_s: f64,
    findings: &mut Vec<Finding>,
    th: &Thresholds,
) -> (Vec<ApplianceCheck>, Vec<DeclAppliance>) {
    let n = d.supply.lines();
    let seen: Vec<bool> = (0..n)
        .map(|b| (0..n).any(|c| !m.absent[c] && m.map[c].src == b))
        .collect();
    let mut placed: Vec<DeclAppliance> = d.appliances.clone();
    let mut moved = vec![false; placed.len()];
    loop {
        let sigs: Vec<Pred> = placed.iter().map(|a| Pred::of(d, m, a)).collect();
        let shapes: Vec<Option<Vec<Option<C64>>>> =
            placed.iter().map(|a| shape_of(d, m, a)).collect();
        let dj = distances(d, m, used, cxs, &sigs, &shapes, interval_s);
        let round = Round {
            d,
            m,
            used,
            cxs,
            th,
            seen: &seen,
            placed: &placed,
            sigs,
            dj,
        };
        let mut checks = Vec::new();
        let mut candidates: Vec<Candidate> = Vec::new();
        for (j, was_moved) in moved.iter().enumerate() {
            let (ck, cand) = round.check(j, *was_moved);
            checks.push(ck);
            candidates.extend(cand);
        }
        match contest(candidates) {
            Some((j, _, alt, f, ..)) => {
                placed[j] = alt;
                moved[j] = true;
                findings.push(f);
            }
            None => return (checks, placed),
        }
    }
}

/// Whether every appliance declared through conductor `c` that has a step
/// to place it by shows at its full size, three times or more, on a
/// wiring that does not go through `c`: then a channel that reads nothing
/// says that nothing runs on that line (the appliances are declared there
/// by mistake), not that its CT is missing.
fn declared_elsewhere(d: &Declared, events: &[Event], c: usize, th: &Thresholds) -> bool {
    let n = d.supply.lines();
    let through_c = |a: &DeclAppliance| a.wirings().iter().any(|w| w.lines(n).contains(&c));
    let absent: Vec<bool> = (0..n)
        .map(|x| x == c || d.channels[x].conductor.is_none())
        .collect();
    let m = declared_metering(d, &absent);
    let there: Vec<&DeclAppliance> = d
        .appliances
        .iter()
        .filter(|a| through_c(a) && uncheckable_in(d, a, th).is_none())
        .collect();
    !there.is_empty()
        && there.iter().all(|a| {
            alternatives(d, a)
                .iter()
                .filter(|(_, alt)| !through_c(alt))
                .any(|(_, alt)| {
                    let sigs = predicted(d, &m, alt);
                    events.iter().filter(|e| any_fits(e, &sigs)).count() >= 3
                })
        })
}

/// At a coarse interval, placements and undeclared loads rest on steps
/// that may be composites: listed as possible, with why.
fn coarse_doubt(kind: Kind, interval_s: f64, th: &Thresholds) -> Option<String> {
    (interval_s >= th.coarse_interval_s && !kind.is_metering()).then(|| {
        format!("at {interval_s:.0} s per row, loads that switch within one row make one step together, so a step of this size may be two loads'")
    })
}

/// Whether two wiring names are the same connection (`L1-L2` and `L2-L1`).
fn same_wiring_name(a: &str, b: &str) -> bool {
    fn parts(x: &str) -> Vec<&str> {
        let mut v: Vec<&str> = x.split('-').collect();
        v.sort();
        v
    }
    a == b || (!a.contains('+') && !b.contains('+') && parts(a) == parts(b))
}

/// Why an undeclared load `f` may be a declared appliance after all: it has
/// the size of a one-power appliance that was not seen switching where declared, on a
/// connection that one could be on (either it is wired there, or it was
/// not used and this is another load); or it is smaller than an appliance
/// declared by one power only on the same connection (it may be one of
/// that appliance's elements or settings, which its entry does not give).
fn undeclared_doubt(
    d: &Declared,
    placed: &[DeclAppliance],
    checks: &[ApplianceCheck],
    f: &Finding,
) -> Option<String> {
    if f.kind != Kind::UndeclaredLoad {
        return None;
    }
    let p = f.evidence["p_w"].as_f64()?;
    let w = f.evidence["wiring"].as_str()?;
    for (a, ck) in placed.iter().zip(checks) {
        // Only its size can tell a one-power appliance (an appliance with
        // several step sizes is told by whether its others show there too).
        let nameplate = a.states.len() == 2 && a.states.iter().all(|st| st.len() <= 1);
        if nameplate && ck.verdict == Verdict::Undecidable && ck.steps_declared < 2 {
            let like = alternatives(d, a).into_iter().find(|(name, alt)| {
                same_wiring_name(name, w) && (alt.largest_step_w() - p).abs() <= tol(p)
            });
            if let Some((name, _)) = like {
                return Some(format!("it has the size of {} on {name}, which was not seen switching where declared: either {} is wired on {name}, or this is another load", a.id, a.id));
            }
        }
        if nameplate && same_wiring_name(&wiring_names(a), w) && a.largest_step_w() > 1.2 * p {
            return Some(format!("it is smaller than {} ({:.0} W on the same connection, declared by one power only): it may be one of its elements or a lower setting", a.id, a.largest_step_w()));
        }
    }
    None
}

/// A channel that reads nothing (a "no CT" finding) while the metering found
/// has another channel reading its conductor: its CT is not on its own
/// conductor, and where the conductor it would sit on carries nothing the
/// data cannot tell a missing CT from one on that idle conductor. One
/// mistake is the simpler account: a channel already named by another
/// metering finding loses its "no CT" finding, and a CT found on the
/// silent channel's conductor with nothing reading its own is reported as
/// the two CTs exchanged.
fn silent_channel_accounts(m: &Metering, findings: &mut Vec<Finding>, notes: &mut Vec<String>) {
    let n = m.map.len();
    let silent: Vec<usize> = (0..n)
        .filter(|&a| {
            findings
                .iter()
                .any(|f| f.kind == Kind::NoCt && f.subject == line_name(a))
        })
        .collect();
    for a in silent {
        let Some(b) = (0..n).find(|&b| b != a && !m.absent[b] && m.map[b].src == a) else {
            continue;
        };
        let idle = !(0..n).any(|x| !m.absent[x] && m.map[x].src == b);
        let named = |f: &Finding| {
            f.kind != Kind::NoCt
                && f.kind.is_metering()
                && f.subject.split('+').any(|x| x == line_name(a))
        };
        if findings.iter().any(named) {
            findings.retain(|f| !(f.kind == Kind::NoCt && f.subject == line_name(a)));
        } else if idle {
            let Some(k) = findings
                .iter()
                .position(|f| f.kind == Kind::CtOnOtherConductor && f.subject == line_name(b))
            else {
                continue;
            };
            let mut f = findings.remove(k);
            findings.retain(|f| !(f.kind == Kind::NoCt && f.subject == line_name(a)));
            f.kind = Kind::CtsExchanged;
            f.subject = format!("{}+{}", line_name(a.min(b)), line_name(a.max(b)));
            f.message = format!("the CTs of channels {} and {} are exchanged: {} reads {}, and {} reads nothing, as a CT on {}, which carries nothing, would (or it has no CT)", line_name(a), line_name(b), line_name(b), line_label(a), line_name(a), line_label(b));
            findings.push(f);
        } else {
            continue;
        }
        notes.push(format!("channel {} reads nothing while {} reads {}: taken as one metering mistake, not a missing CT as well", line_name(a), line_name(b), line_label(a)));
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    const H: i64 = 3_600_000;

    /// Starts each followed by a stop within 12 h pair up; a stop before
    /// any start, or one more than 12 h later, does not.
    #[test]
    fn starts_pair_with_the_next_stop_within_twelve_hours() {
        assert_eq!(
            start_stop_pairs(&[0, 2 * H, 30 * H], &[H, 3 * H, 50 * H]),
            vec![(0, H), (2 * H, 3 * H)]
        );
        assert_eq!(start_stop_pairs(&[5 * H], &[H]), vec![]);
        // A start whose stop was not seen does not take the next run's stop.
        assert_eq!(
            start_stop_pairs(&[0, 2 * H], &[2 * H + H / 2]),
            vec![(2 * H, 2 * H + H / 2)]
        );
    }

    /// A load of 1 kW seen to start four times, with two runs of 30 min
    /// seen whole, used 4 × 0.5 h × 1 kW = 2 kWh (the mean run for every
    /// start); never more than all the energy, nothing when no run is whole.
    #[test]
    fn energy_share_counts_every_start_at_the_mean_run() {
        let on = [0, 2 * H, 4 * H, 6 * H];
        let off = [H / 2, 6 * H + H / 2];
        let s = energy_share(1000.0, &on, &off, 20_000.0).unwrap();
        assert!((s - 0.1).abs() < 1e-12, "{s}");
        assert_eq!(energy_share(1000.0, &on, &off, 100.0), Some(1.0));
        assert_eq!(energy_share(1000.0, &on, &[], 20_000.0), None);
    }

    /// A load stops after it starts: three stops then two starts are no
    /// load's; a load seen one way only (it tapers off) still is.
    #[test]
    fn steps_in_any_order_do_not_make_a_load() {
        assert!(!behaves_as_a_load(&[40 * H, 45 * H], &[H, 10 * H, 20 * H]));
        assert!(behaves_as_a_load(
            &[0, 10 * H, 20 * H],
            &[H, 11 * H, 21 * H]
        ));
        assert!(behaves_as_a_load(&[0, 10 * H, 20 * H], &[]));
        assert!(!behaves_as_a_load(&[0, 10 * H], &[H, 11 * H]));
        // Mostly one way: five starts, one stop (at 10 s a heat strip's
        // stops pass for a declared dryer element's with a wander).
        assert!(behaves_as_a_load(
            &[0, 10 * H, 20 * H, 30 * H, 40 * H],
            &[45 * H]
        ));
        assert!(!behaves_as_a_load(&[0, 10 * H, 20 * H], &[45 * H]));
    }

    /// The fault-matrix case the rule was made for (10 s): a hair dryer's
    /// half-heat step 0.22 tolerances from its own and 0.81 from a
    /// washer's heater step is the dryer's; 0.35 against 0.39 is shared.
    #[test]
    fn a_step_is_shared_only_with_a_rival_that_fits_nearly_as_well() {
        let th = &Thresholds::STANDARD;
        assert!(!shares(0.22, 0.81, th));
        assert!(shares(0.35, 0.39, th));
        assert!(shares(0.9, 0.2, th));
        assert!(!shares(0.2, 1.05, th));
    }

    /// An appliance that is off or draws `s` from line `line` to neutral.
    fn on_off(id: &str, line: usize, s: C64) -> DeclAppliance {
        use super::super::decl::{DeclDraw, Steps};
        use crate::contract::Zip;
        DeclAppliance {
            id: id.into(),
            label: id.into(),
            states: vec![
                vec![],
                vec![DeclDraw {
                    wiring: Wiring::LineNeutral(line),
                    s,
                    zip_p: Zip::POWER,
                    zip_q: Zip::POWER,
                    rated_v: None,
                }],
            ],
            steps: Steps::Jumps(vec![(0, 1, 1.0, 1.0), (1, 0, 1.0, 1.0)]),
        }
    }

    /// A 120/240 V home, a CT on each line as labelled.
    fn split_phase(appliances: Vec<DeclAppliance>) -> Declared {
        use super::super::decl::{DeclChannel, Supply};
        Declared {
            file: "t.toml".into(),
            supply_at: "t.toml:1:1".into(),
            supply: Supply {
                kind: crate::contract::SupplyKind::SplitPhase,
                voltage_v: 120.0,
                service_a: 200.0,
            },
            channels: vec![
                DeclChannel {
                    conductor: Some(0),
                    reversed: false,
                },
                DeclChannel {
                    conductor: Some(1),
                    reversed: false,
                },
            ],
            appliances,
            partial: false,
            real_only: false,
            timezone: "UTC".into(),
        }
    }

    /// Two 120 V heaters on L1-N, each switched 100 times in 100 h of 10 s
    /// rows. Among n₁ and n₂ independent uniform times in T, the expected
    /// number of pairs closer than τ is n₁ n₂ 2τ / T (τ ≪ T; any text on
    /// Poisson coincidences), half of them the same way round; two steps
    /// merge when closer than two 10 s rows, so 2τ = 40 s:
    /// 100 · 100 · 40 / (2 · 360 000) = 0.556 for the 1.5 kW sum.
    #[test]
    fn coincidences_of_two_heaters_are_expected_at_the_poisson_rate() {
        let heater = |id: &str, w: f64| on_off(id, 0, C64::new(w, 0.0));
        let d = split_phase(vec![heater("a", 1000.0), heater("b", 500.0)]);
        let m = declared_metering(&d, &[false, false]);
        let step = |t: i64, w: f64| Event {
            time_ms: t,
            delta: vec![C64::new(w, 0.0), C64::ZERO],
            before: vec![C64::ZERO; 2],
            v_before: vec![120.0; 2],
            v_after: vec![120.0; 2],
            se: vec![0.0; 2],
        };
        let events: Vec<Event> = (0..100)
            .flat_map(|i| {
                [
                    step(i * H, if i % 2 == 0 { 1000.0 } else { -1000.0 }),
                    step(i * H + H / 2, if i % 2 == 0 { 500.0 } else { -500.0 }),
                ]
            })
            .collect();
        let refs: Vec<&Event> = events.iter().collect();
        let sums = coincidences(&d, &m, &d.appliances, &refs, 10.0, 100.0);
        let rate = |w: f64| {
            sums.iter()
                .filter(|(r, _)| dist_delta(&[C64::new(w, 0.0), C64::ZERO], r) <= 0.2)
                .map(|(_, x)| *x)
                .sum::<f64>()
        };
        assert!(
            (rate(1500.0) - 100.0 * 100.0 * 40.0 / (2.0 * 360_000.0)).abs() < 1e-9,
            "{}",
            rate(1500.0)
        );
        assert!(
            (rate(500.0) - rate(1500.0)).abs() < 1e-9,
            "the opposite way round: {}",
            rate(500.0)
        );
        assert_eq!(rate(2000.0), 0.0);
    }

    /// A left-out 1100 W load on L1-N whose stops share their interval with
    /// a 140 W change on L2 is still one load; a declared 600 W pump on L2-N
    /// whose starts share theirs with a 100 W change on L1 is still the pump.
    #[test]
    fn a_change_on_another_channel_in_the_same_interval_is_another_loads() {
        let d = split_phase(vec![on_off("pump", 1, C64::new(600.0, 450.0))]);
        let step = |t: i64, l1: C64, l2: C64| Event {
            time_ms: t,
            delta: vec![l1, l2],
            before: vec![C64::new(300.0, 0.0); 2],
            v_before: vec![120.0; 2],
            v_after: vec![120.0; 2],
            se: vec![2.0; 2],
        };
        let (heat, other) = (C64::new(1100.0, 0.0), C64::new(140.0, 0.0));
        let (run, blip) = (C64::new(600.0, 450.0), C64::new(100.0, 0.0));
        let mut events = Vec::new();
        for i in 0..10 {
            let t = i * 6 * H;
            events.push(step(t, heat, C64::ZERO));
            events.push(step(
                t + H / 4,
                -heat,
                if i % 2 == 0 { -other } else { other },
            ));
            events.push(step(t + 3 * H, blip, run));
            events.push(step(t + 3 * H + H / 8, C64::ZERO, -run));
        }
        let stats = vec![
            ChannelStats {
                rows: 86_400,
                null: 0,
                zero: 0,
                sum_p: 300.0 * 86_400.0,
                negative: vec![[0, 86_400]; 2]
            };
            2
        ];
        let o = check(&d, &events, &stats, 10.0);
        let found: Vec<(&str, &str)> = o
            .findings
            .iter()
            .map(|f| (f.kind.name(), f.subject.as_str()))
            .collect();
        assert_eq!(
            found,
            [("undeclared-load", "1100 W on L1-N")],
            "{:?}",
            o.findings.iter().map(|f| &f.message).collect::<Vec<_>>()
        );
        assert_eq!(
            (
                o.findings[0].evidence["starts"].as_u64(),
                o.findings[0].evidence["stops"].as_u64()
            ),
            (Some(10), Some(10))
        );
        assert_eq!(o.steps_explained, 20, "the pump's starts and stops");
        // The cut-offs are one value: above its confidence, it is possible.
        let th = Thresholds {
            possible: 1.01,
            ..Thresholds::STANDARD
        };
        let o = check_with(&d, &events, &stats, 10.0, &th);
        assert!(o.findings.is_empty());
        assert_eq!(o.possible.len(), 1);
        assert_eq!(o.possible_below, 1.01);
    }

    /// Metering stage: a channel that reads nothing while another channel's
    /// CT is found on its conductor, and nothing reads the other's, is one
    /// mistake (the two CTs exchanged), not a missing CT as well.
    #[test]
    fn a_silent_channel_beside_a_ct_on_its_conductor_is_one_exchange() {
        let m = Metering {
            map: vec![
                ChanMap {
                    src: 0,
                    k: 1.0,
                    turned: true,
                },
                ChanMap {
                    src: 1,
                    k: 1.0,
                    turned: true,
                },
                ChanMap {
                    src: 1,
                    k: 1.0,
                    turned: true,
                },
            ],
            absent: vec![false, true, false],
        };
        let f = |kind: Kind, subject: &str| Finding {
            kind,
            subject: subject.into(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({}),
            doubt: None,
        };
        let mut findings = vec![f(Kind::NoCt, "l2"), f(Kind::CtOnOtherConductor, "l3")];
        let mut notes = Vec::new();
        silent_channel_accounts(&m, &mut findings, &mut notes);
        let got: Vec<(Kind, &str)> = findings
            .iter()
            .map(|f| (f.kind, f.subject.as_str()))
            .collect();
        assert_eq!(got, [(Kind::CtsExchanged, "l2+l3")]);
        assert_eq!(notes.len(), 1);
        // Already named by a finding about both channels: only the "no CT" goes.
        let mut findings = vec![f(Kind::NoCt, "l2"), f(Kind::ChannelsExchanged, "l2+l3")];
        silent_channel_accounts(&m, &mut findings, &mut notes);
        assert_eq!(findings.len(), 1);
        assert_eq!(findings[0].kind, Kind::ChannelsExchanged);
    }

    /// Placement stage: a 1 kW, 240 V heater declared on L1-N is taken at
    /// 250 W there, (120/240)² of its power (P = V²/R), but it is placed by
    /// its 1 kW across the two lines.
    #[test]
    fn a_rated_draw_is_placed_by_its_size_on_every_connection() {
        let mut a = on_off("heater", 0, C64::new(1000.0, 0.0));
        a.states[1][0].wiring = Wiring::LineLine(0, 1);
        a.states[1][0].rated_v = Some(240.0);
        a.states[1][0].zip_p = crate::contract::Zip {
            z: 1.0,
            i: 0.0,
            p: 0.0,
        };
        let d0 = split_phase(vec![]);
        let on_ln = a.rewired_on(&d0.supply, |_| Wiring::LineNeutral(0));
        assert!((on_ln.largest_step_w() - 250.0).abs() < 1e-6);
        let d = split_phase(vec![on_ln.clone()]);
        assert!(uncheckable(&on_ln).is_some(), "250 W alone is too small");
        assert_eq!(uncheckable_in(&d, &on_ln, &Thresholds::STANDARD), None);
    }

    /// Placement stage: a move is doubted (listed as possible) when the
    /// declaration is partial, when the declared wiring cannot be read, or
    /// when a run shows where declared too; not when nothing shows there.
    #[test]
    fn a_move_another_account_fits_is_only_possible() {
        let th = &Thresholds::STANDARD;
        let a = on_off("kettle", 0, C64::new(1500.0, 0.0));
        let alt = on_off("kettle", 1, C64::new(1500.0, 0.0));
        let mut d = split_phase(vec![a.clone()]);
        let f = |d: &Declared, n_d: Option<usize>| move_finding(d, &a, &alt, "L2-N", n_d, 20, th);
        assert!(f(&d, Some(0)).doubt.is_none());
        assert!(
            f(&d, Some(1)).doubt.is_none(),
            "one step is as likely another load's"
        );
        assert!(f(&d, Some(2)).doubt.is_some());
        assert!(f(&d, None).doubt.is_some());
        d.partial = true;
        assert!(f(&d, Some(0)).doubt.is_some());
        assert_eq!(f(&d, Some(0)).kind, Kind::WrongLine);
    }

    /// Undeclared-load stage: at a coarse interval placements and undeclared
    /// loads are only possible, metering findings stand; a load smaller than
    /// a one-power entry on its connection may be part of it.
    #[test]
    fn undeclared_loads_another_account_fits_are_only_possible() {
        let th = &Thresholds::STANDARD;
        assert!(coarse_doubt(Kind::UndeclaredLoad, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::WrongLine, 60.0, th).is_some());
        assert!(coarse_doubt(Kind::ReversedCt, 60.0, th).is_none());
        assert!(coarse_doubt(Kind::UndeclaredLoad, 10.0, th).is_none());
        let range = on_off("range", 0, C64::new(3000.0, 0.0));
        let d = split_phase(vec![range.clone()]);
        let ck = ApplianceCheck {
            id: "range".into(),
            declared: "L1-N".into(),
            verdict: Verdict::AsDeclared,
            seen: None,
            reason: String::new(),
            steps_declared: 9,
            steps_best_other: 0,
        };
        let load = |p: f64, w: &str| Finding {
            kind: Kind::UndeclaredLoad,
            subject: String::new(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({ "p_w": p, "wiring": w }),
            doubt: None,
        };
        let doubt = |f: &Finding| {
            undeclared_doubt(
                &d,
                std::slice::from_ref(&range),
                std::slice::from_ref(&ck),
                f,
            )
        };
        assert!(doubt(&load(900.0, "L1-N")).is_some());
        assert!(doubt(&load(900.0, "L2-N")).is_none(), "another connection");
        assert!(
            doubt(&load(2900.0, "L1-N")).is_none(),
            "about its size: not a part"
        );
    }

    /// The tolerance the report states is the one the matching applies.
    #[test]
    fn the_printed_tolerance_is_the_applied_one() {
        let text = super::super::ASSUMPTIONS[2];
        let with_v = format!("{TOL_ABS_V_W:.0} W plus {:.0} %", 100.0 * TOL_REL_V);
        let without = format!("{TOL_ABS_W:.0} W plus {:.0} %", 100.0 * TOL_REL);
        assert!(text.contains(&with_v) && text.contains(&without), "{text}");
    }

    /// Of moves claiming mostly the same steps, the one showing more of its
    /// own step sizes is made; otherwise the one with the most steps, the
    /// earlier appliance on a tie.
    #[test]
    fn the_move_made_first() {
        let cand = |j: usize, steps: Vec<usize>, cover: f64| {
            let a = on_off(&format!("a{j}"), 0, C64::new(1000.0, 0.0));
            let f = Finding {
                kind: Kind::WrongLine,
                subject: a.id.clone(),
                message: String::new(),
                confidence: 0.5,
                evidence: json!({}),
                doubt: None,
            };
            (j, steps.len(), a, f, steps, cover)
        };
        let pick = |c: Vec<(usize, usize, DeclAppliance, Finding, Vec<usize>, f64)>| {
            contest(c).map(|x| x.0)
        };
        assert_eq!(pick(vec![]), None);
        assert_eq!(
            pick(vec![
                cand(0, vec![1, 2, 3], 1.0),
                cand(1, vec![4, 5, 6, 7], 1.0)
            ]),
            Some(1),
            "most steps"
        );
        assert_eq!(
            pick(vec![
                cand(0, vec![1, 2, 3], 1.0),
                cand(1, vec![4, 5, 6], 1.0)
            ]),
            Some(0),
            "a tie: the earlier"
        );
        assert_eq!(
            pick(vec![
                cand(0, vec![1, 2, 3, 4, 5, 6], 2.0 / 3.0),
                cand(1, vec![1, 2, 3, 4, 5, 6], 1.0)
            ]),
            Some(1),
            "the same steps: the whole account"
        );
        assert_eq!(
            pick(vec![
                cand(0, vec![1, 2, 3, 4, 5, 6], 0.5),
                cand(1, vec![4, 5, 6, 9], 1.0)
            ]),
            Some(1),
            "half of the fewer shared"
        );
        assert_eq!(
            pick(vec![
                cand(0, vec![1, 2, 3, 4, 5, 6], 0.5),
                cand(1, vec![6, 7, 8, 9], 1.0)
            ]),
            Some(0),
            "other steps: not a rival"
        );
    }

    /// Reference: scipy.stats.poisson.sf(k - 1, mean), scipy 1.14.1.
    #[test]
    fn the_poisson_tail_is_scipys() {
        for (mean, k, sf) in [
            (1.0, 1, 0.6321205588285577),
            (3.5, 8, 0.026738922091319697),
            (0.844, 5, 0.0017794855370407824),
            (0.968, 6, 0.000502179831641417),
            (20.0, 10, 0.9950045876916924),
        ] {
            assert!(
                (poisson_tail(mean, k) - sf).abs() < 1e-12,
                "{mean} {k}: {}",
                poisson_tail(mean, k)
            );
        }
        assert_eq!(poisson_tail(0.0, 1), 0.0);
        assert_eq!(poisson_tail(2.0, 0), 1.0);
    }

    /// The allowance for steps that need a wander to fit grows with the
    /// interval and stays within a quarter and a half.
    #[test]
    fn the_wander_allowance_grows_with_the_interval() {
        assert_eq!(coincidence_share(1.0), 0.25);
        assert_eq!(coincidence_share(2.0), 0.5);
        assert_eq!(coincidence_share(10.0), 0.5);
        assert_eq!(coincidence_share(0.1), 0.25);
    }
}
