//! How well an observed step fits an appliance's predicted steps: the
//! tolerances, the prediction at an event's measured voltages, and a
//! step's least-squares connection.

use super::hypothesis::Metering;
use crate::audit::decl::{DeclAppliance, DeclDraw, Declared};
use crate::audit::events::Event;
use crate::contract::{Wiring, C64};

/// Steps smaller than this (largest channel, VA) are not used to decide.
pub const USE_STEP: f64 = 100.0;

/// Steps of this size or more (largest channel, VA) judge the metering: a
/// fridge's compressor and larger, above the wander of small electronics.
pub const METERING_STEP: f64 = 150.0;

/// Tolerance of a predicted step: 30 W plus 10 % of its size per channel
/// (a constant-impedance load moves ±10 % across a ±5 % supply band;
/// common practice, no source).
pub(super) fn tol(size: f64) -> f64 {
    TOL_ABS_W + TOL_REL * size
}

/// The absolute part of the tolerance of a predicted step ([`TOL_REL`] the
/// relative part), W.
pub const TOL_ABS_W: f64 = 30.0;

/// The relative part of that tolerance, share of the step's size.
pub const TOL_REL: f64 = 0.10;

/// How far a step is from a predicted one, in tolerances (≤ 1 fits),
/// either way round (a start or a stop).
pub(super) fn dist(e: &Event, r: &[Option<C64>]) -> f64 {
    dist_delta(&e.delta, r)
}

pub(super) fn dist_delta(delta: &[C64], r: &[Option<C64>]) -> f64 {
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

/// How far a step `delta` goes along a predicted step `r`: the sum over
/// the channels read of their dot products (positive: the same way round,
/// a start where `r` is a start).
pub(super) fn projection(delta: &[C64], r: &[Option<C64>]) -> f64 {
    delta
        .iter()
        .zip(r)
        .filter_map(|(x, r)| r.map(|r| x.re * r.re + x.im * r.im))
        .sum()
}

pub(super) fn fits(e: &Event, r: &[Option<C64>]) -> bool {
    dist(e, r) <= 1.0
}

pub(super) fn dist_all(e: &Event, sigs: &[Vec<Option<C64>>]) -> f64 {
    sigs.iter()
        .map(|r| dist(e, r))
        .fold(f64::INFINITY, f64::min)
}

// ---- expected steps at an event's measured voltages ----------------------

/// One draw's part in a jump: its power counts `k` times, at the voltage
/// after the step (`after`) or before it.
#[derive(Clone)]
pub(super) struct Term {
    draw: DeclDraw,
    k: f64,
    after: bool,
}

/// An appliance's jumps, each as the draws it adds and removes, so its
/// step can be computed at the voltages around any one event.
#[derive(Clone)]
pub(crate) struct Model {
    pub(super) jumps: Vec<Vec<Term>>,
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
pub(super) fn dist_model(
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
            let r = jump_reading(d, m, cx, j, fwd);
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
                for w in shapes
                    .iter()
                    .filter_map(|sh| wander_residual(&res, &tol, sh))
                {
                    comp = comp.min(2.0 * w);
                }
            }
        }
    }
    (best, comp.min(best))
}

/// The channel readings of one jump under `m` at the voltages `cx`:
/// forward, its draws as given, "after" at the voltage after; backward
/// (the jump undone), every sign turned and the voltages exchanged.
fn jump_reading(
    d: &Declared,
    m: &Metering,
    cx: &Ctx,
    jump: &[Term],
    fwd: bool,
) -> Vec<Option<C64>> {
    let mut t = vec![C64::ZERO; d.supply.lines()];
    for term in jump {
        let after = if fwd { term.after } else { !term.after };
        let s = term
            .draw
            .at(cx.u(d, term.draw.wiring, after))
            .scale(if fwd { term.k } else { -term.k });
        for (o, x) in t.iter_mut().zip(d.supply.split(term.draw.wiring, s)) {
            *o += x;
        }
    }
    m.read(d, &t)
}

/// What is left of the residuals `res` (tolerances `tol` per channel) once
/// the nearest real multiple λ ∈ [−1, 1] of a wander `shape` is taken off,
/// in tolerances (weighted least squares for λ); None when the shape reads
/// on no channel the residuals do.
fn wander_residual(res: &[Option<C64>], tol: &[f64], shape: &[Option<C64>]) -> Option<f64> {
    let (mut num, mut den) = (0.0, 0.0);
    for c in 0..res.len() {
        if let (Some(x), Some(g)) = (res[c], shape[c]) {
            num += (g.re * x.re + g.im * x.im) / (tol[c] * tol[c]);
            den += g.abs().powi(2) / (tol[c] * tol[c]);
        }
    }
    if den == 0.0 {
        return None;
    }
    let lam = (num / den).clamp(-1.0, 1.0);
    let w = (0..res.len())
        .filter_map(|c| {
            res[c].map(|x| (x - shape[c].unwrap_or(C64::ZERO).scale(lam)).abs() / tol[c])
        })
        .fold(0.0, f64::max);
    Some(w)
}

/// An appliance's expected steps under a metering: at nominal voltage (a
/// quick first test) and as a model for the voltages of each event.
pub(super) struct Pred {
    pub(super) nom: Vec<Vec<Option<C64>>>,
    model: Model,
}

impl Pred {
    pub(super) fn of(d: &Declared, m: &Metering, a: &DeclAppliance) -> Pred {
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
    pub(super) fn dist(&self, d: &Declared, m: &Metering, e: &Event, cx: &Ctx) -> f64 {
        self.dist2(d, m, e, cx, &[]).0
    }
}

/// One appliance's predicted channel steps under a metering.
pub(super) fn predicted(d: &Declared, m: &Metering, a: &DeclAppliance) -> Vec<Vec<Option<C64>>> {
    d.signatures(a).iter().map(|t| m.read(d, t)).collect()
}

pub(super) fn any_fits(e: &Event, sigs: &[Vec<Option<C64>>]) -> bool {
    sigs.iter().any(|r| fits(e, r))
}

pub(super) fn visible(sigs: &[Vec<Option<C64>>]) -> bool {
    sigs.iter()
        .any(|r| r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max) >= USE_STEP)
}

/// A wandering appliance's shape under a metering.
pub(super) fn shape_of(d: &Declared, m: &Metering, a: &DeclAppliance) -> Option<Vec<Option<C64>>> {
    d.shape(a).map(|t| m.read(d, &t))
}

pub(super) fn fits_shape(e: &Event, r: &[Option<C64>]) -> bool {
    dist_shape(e, r) <= 1.0
}

/// Distance of a step from the nearest real multiple λ ∈ [−1, 1] of a shape.
pub(super) fn dist_shape(e: &Event, r: &[Option<C64>]) -> f64 {
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
pub(super) fn explained(d: &Declared, m: &Metering, events: &[&Event]) -> (usize, usize) {
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
pub(super) struct Fits {
    jump: Vec<bool>,
    wander: Vec<bool>,
}

impl Fits {
    /// Per step, whether a jump or the wander fits it.
    pub(super) fn steps(&self) -> Vec<bool> {
        self.jump
            .iter()
            .zip(&self.wander)
            .map(|(j, w)| *j || *w)
            .collect()
    }

    /// Steps one of the jumps fits.
    pub(super) fn jumps_fitting(&self) -> usize {
        self.jump.iter().filter(|x| **x).count()
    }
}

pub(super) fn fits_of(d: &Declared, m: &Metering, a: &DeclAppliance, events: &[&Event]) -> Fits {
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
pub(super) fn steps_explained<'a>(
    fits: impl IntoIterator<Item = &'a Fits> + Clone,
    n: usize,
) -> usize {
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

/// How often, against its steps that fit alone, an appliance's steps may
/// need part of a wander to fit: a quarter at 1 s, growing with the
/// interval (the chance that a wander change falls into the rows either
/// side of a step grows with their length) up to a half from 2 s. At 10 s
/// a 750 W heater beside a heat pump and a blower that change every minute
/// needs one about a third as often as not (measured in the fault
/// matrix); a load nobody declared that passes as a rarely used declared
/// one plus a wander each time needs one far more often.
pub(super) fn coincidence_share(interval_s: f64) -> f64 {
    (0.25 * interval_s).clamp(0.25, 0.5)
}

/// P(X ≥ k) for X Poisson with mean `mean`.
pub(super) fn poisson_tail(mean: f64, k: usize) -> f64 {
    let (mut term, mut below) = ((-mean).exp(), 0.0);
    for i in 0..k {
        below += term;
        term *= mean / (i + 1) as f64;
    }
    (1.0 - below).max(0.0)
}

/// Each event's distance from each appliance's steps (rows: events). A
/// jump together with part of a wander in the same interval is a
/// coincidence, so it counts only for an appliance that needs it rarely:
/// at most `coincidence_share` as often as its steps fit alone, plus two (a load
/// nobody declared must not pass as a declared one plus a wander each
/// time). An appliance that wanders also fits its own wander steps.
pub(super) fn distances(
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

/// The declared jumps as placed, each read under a metering with how
/// many steps it was seen in (`(appliance, reading, n)`; a step counts
/// once in all, shared among the appliances it fits, [`jumps_seen`]), and
/// the factor
/// `w / 2T` that turns two counts n₁, n₂ into the expected number of
/// their coincidences of each shape (the sum, or the difference: n₁ n₂ w
/// / T in all, half each; [`SeenJumps::sums`]).
pub(super) struct SeenJumps {
    seen: Vec<(usize, Vec<Option<C64>>, f64)>,
    per_pair: f64,
}

/// The jumps of the appliances `placed` seen in `events` under `m`, in a
/// run of `hours` at `interval_s` ([`SeenJumps`]).
pub(super) fn jumps_seen(
    d: &Declared,
    m: &Metering,
    placed: &[DeclAppliance],
    events: &[&Event],
    interval_s: f64,
    hours: f64,
) -> SeenJumps {
    let jumps: Vec<(usize, Vec<Option<C64>>)> = placed
        .iter()
        .enumerate()
        .flat_map(|(j, a)| predicted(d, m, a).into_iter().map(move |r| (j, r)))
        .collect();
    // A step is one switching: it counts once in all. Within an appliance
    // it counts for the jump it fits best (near-equal states); among the
    // k appliances it fits (look-alikes), 1/k for each, so that twins
    // seen n times together expect their two-at-once steps at the rate of
    // n/2 and n/2, not of n and n, nor of n and none.
    let mut counts = vec![0.0; jumps.len()];
    for e in events {
        let mut best: Vec<(usize, usize, f64)> = Vec::new();
        for (k, (j, r)) in jumps.iter().enumerate() {
            let x = dist(e, r);
            if x > 1.0 {
                continue;
            }
            match best.iter_mut().find(|b| b.0 == *j) {
                Some(b) if x < b.2 => *b = (*j, k, x),
                Some(_) => {}
                None => best.push((*j, k, x)),
            }
        }
        for (_, k, _) in &best {
            counts[*k] += 1.0 / best.len() as f64;
        }
    }
    let seen = jumps
        .into_iter()
        .zip(counts)
        .map(|((j, r), n)| (j, r, n))
        .filter(|(_, _, n)| *n > 0.0)
        .collect();
    let t_s = hours * 3600.0;
    let w = 2.0 * crate::audit::events::level_rows(interval_s) as f64 * interval_s;
    let per_pair = if t_s > 0.0 { w / (2.0 * t_s) } else { 0.0 };
    SeenJumps { seen, per_pair }
}

/// `a` plus `b` (`sign` 1) or less it (−1), channel by channel; unread
/// where either is.
fn combine(a: &[Option<C64>], b: &[Option<C64>], sign: f64) -> Vec<Option<C64>> {
    a.iter()
        .zip(b)
        .map(|(a, b)| match (a, b) {
            (Some(a), Some(b)) => Some(*a + b.scale(sign)),
            _ => None,
        })
        .collect()
}

impl SeenJumps {
    /// Two declared appliances switching in one interval make one step,
    /// their sum. Each sum of two jumps of two appliances (either the same
    /// way or opposite ways), with how often such a coincidence is expected
    /// in the run: n₁ n₂ w / 2T for jumps seen n₁ and n₂ times (starts and
    /// stops) in T, with a window w as wide as two steps merge in the
    /// detector (closer than `level_rows` either way), and half the pairs
    /// the same way round (independent switching: the rate of Poisson
    /// coincidences; common practice, no source).
    pub(super) fn sums(&self) -> Vec<(Vec<Option<C64>>, f64)> {
        let mut out = Vec::new();
        for (i, (ja, ra, na)) in self.seen.iter().enumerate() {
            for (jb, rb, nb) in &self.seen[i + 1..] {
                if ja == jb {
                    continue;
                }
                let rate = na * nb * self.per_pair;
                for sign in [1.0, -1.0] {
                    out.push((combine(ra, rb, sign), rate));
                }
            }
        }
        out
    }

    /// Sums and differences of a step `v`, seen `n` times, with each
    /// declared jump but those of its own size, with their expected counts
    /// in the run: a load nobody declared switching in one interval with a
    /// declared one. (Steps of a declared jump's size left unexplained are
    /// likelier that appliance's own; pairing them with it would make
    /// phantom composites of twice its size.)
    pub(super) fn with(&self, v: &[Option<C64>], n: usize) -> Vec<(Vec<Option<C64>>, f64)> {
        let mut out = Vec::new();
        let step: Vec<C64> = v.iter().map(|x| x.unwrap_or(C64::ZERO)).collect();
        for (_, r, nr) in self
            .seen
            .iter()
            .filter(|(_, r, _)| dist_delta(&step, r) > 1.0)
        {
            let rate = n as f64 * nr * self.per_pair;
            for sign in [1.0, -1.0] {
                out.push((combine(v, r, sign), rate));
            }
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// The tolerance the report states is the one the matching applies.
    #[test]
    fn the_printed_tolerance_is_the_applied_one() {
        let text = crate::audit::ASSUMPTIONS[2];
        let with_v = format!("{TOL_ABS_V_W:.0} W plus {:.0} %", 100.0 * TOL_REL_V);
        let without = format!("{TOL_ABS_W:.0} W plus {:.0} %", 100.0 * TOL_REL);
        assert!(text.contains(&with_v) && text.contains(&without), "{text}");
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
}
