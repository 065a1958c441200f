//! The rungs of the layout ladder: each one the home's scenario tree with
//! one property of its layout changed (which line each appliance sits on,
//! how much load is line-to-line, loads on part of the phases, the supply,
//! the metering), and a note saying exactly what changed.

use super::doc::{text, Doc, NodeExt};
use super::wire::{each_draw, map_wiring, quantity, split_draws, stated};
use crate::rng::stream;
use crate::scenario::source::Node;
use crate::scenario::{Appliance, Scenario, SupplyKind, Wiring, WiringKind};
use crate::units::QuantityKind;
use rand::seq::SliceRandom;

/// One rung: its family, its name, what it changed, and its scenario tree.
pub struct LayoutRung {
    pub family: &'static str,
    pub name: String,
    pub note: String,
    pub doc: Doc,
}

/// What the rung builders know of the home: its tree, its decoded scenario,
/// and each appliance's expected energy per day and peak over the window the
/// ladder simulates (from `validate`'s figures, its timelines at nominal
/// voltage: the choices do not depend on the electrical solve).
pub struct LadderHome<'a> {
    pub doc: &'a Doc,
    pub s: &'a Scenario,
    pub kwh: Vec<f64>,
    pub peak_w: Vec<f64>,
}

impl LadderHome<'_> {
    fn lines(&self) -> usize {
        self.s.home.supply.lines()
    }
    fn rung(&self, family: &'static str, name: String, note: String) -> LayoutRung {
        LayoutRung {
            family,
            name,
            note,
            doc: self.doc.clone(),
        }
    }
}

/// Appliances drawing line-to-neutral on one line only: the ones a phase
/// assignment moves.
fn single_line(a: &Appliance) -> Option<usize> {
    let ln = a
        .connections()
        .iter()
        .all(|c| WiringKind::of(*c) == WiringKind::LineToNeutral);
    (ln && a.lines().len() == 1).then(|| a.lines()[0])
}

/// The swap of lines `a` and `b`, as a permutation of `n` lines.
fn swap(n: usize, a: usize, b: usize) -> Vec<usize> {
    let mut p: Vec<usize> = (0..n).collect();
    p.swap(a, b);
    p
}

/// Each appliance's energy per line, split evenly over the lines it draws from.
fn per_line(h: &LadderHome, skip: &[usize]) -> Vec<f64> {
    let mut e = vec![0.0; h.lines()];
    for (k, a) in h.s.appliances.iter().enumerate() {
        if skip.contains(&k) {
            continue;
        }
        let lines = a.lines();
        for x in &lines {
            e[*x] += h.kwh[k] / lines.len() as f64;
        }
    }
    e
}

/// Greedy placement, largest first, each on the line with the least so far
/// (longest-processing-time order, Graham 1969).
fn balance(
    h: &LadderHome,
    movable: &[usize],
    weight: &[f64],
    start: Vec<f64>,
) -> Vec<(usize, usize)> {
    let mut load = start;
    let mut order = movable.to_vec();
    order.sort_by(|a, b| weight[*b].total_cmp(&weight[*a]).then(a.cmp(b)));
    let mut out = Vec::new();
    for k in order {
        let x = (0..h.lines())
            .min_by(|a, b| load[*a].total_cmp(&load[*b]))
            .unwrap_or(0);
        load[x] += weight[k];
        out.push((k, x));
    }
    out
}

fn place(r: &mut LayoutRung, h: &LadderHome, moves: &[(usize, usize)]) {
    for &(k, to) in moves {
        let a = &h.s.appliances[k];
        let from = single_line(a).unwrap_or(to);
        let perm = swap(h.lines(), from, to);
        if let Some(n) = r.doc.appliance_mut(&a.id) {
            map_wiring(n, &|w| w.permuted_name(&perm));
        }
    }
}

/// Phase assignment: all single-phase appliances on L1; spread to balance
/// energy; spread to balance peak; and `shuffles` seeded random permutations.
pub fn phases(h: &LadderHome, seed: u64, shuffles: usize) -> Vec<LayoutRung> {
    let n = h.lines();
    if n < 2 {
        return vec![];
    }
    let movable: Vec<usize> = (0..h.s.appliances.len())
        .filter(|k| is_load(&h.s.appliances[*k]) && single_line(&h.s.appliances[*k]).is_some())
        .collect();
    let ids = |ks: &[usize]| ks.len();
    let mut out = Vec::new();
    let mut r = h.rung(
        "phase assignment",
        "all on L1".into(),
        format!("the {} single-phase appliances all on L1-N", ids(&movable)),
    );
    place(
        &mut r,
        h,
        &movable.iter().map(|k| (*k, 0)).collect::<Vec<_>>(),
    );
    out.push(r);
    let fixed = per_line(h, &movable);
    for (name, weight, what) in [
        ("balanced energy", &h.kwh, "expected energy"),
        ("balanced peak", &h.peak_w, "peak power"),
    ] {
        let start = if what == "peak power" {
            vec![0.0; n]
        } else {
            fixed.clone()
        };
        let moves = balance(h, &movable, weight, start);
        let mut r = h.rung(
            "phase assignment",
            name.into(),
            format!("single-phase appliances spread, largest first, each on the line with the least {what} so far"),
        );
        place(&mut r, h, &moves);
        out.push(r);
    }
    for k in 1..=shuffles {
        out.push(shuffle(h, seed, k));
    }
    out
}

/// Every appliance's lines renamed by a random permutation of its own
/// (line-to-line and three-phase loads too), from a seeded stream.
fn shuffle(h: &LadderHome, seed: u64, k: usize) -> LayoutRung {
    let mut rng = stream(seed, "layouts", &format!("shuffle-{k}"));
    let mut r = h.rung(
        "phase assignment",
        format!("shuffle {k}"),
        format!("each appliance's lines permuted at random (stream seed {seed}, shuffle-{k})"),
    );
    for a in &h.s.appliances {
        let mut perm: Vec<usize> = (0..h.lines()).collect();
        perm.shuffle(&mut rng);
        if let Some(n) = r.doc.appliance_mut(&a.id) {
            map_wiring(n, &|w| w.permuted_name(&perm));
        }
    }
    r
}

/// The ladders move loads only: a PV inverter or a battery (`[pv]`,
/// `[battery]`) stays where it is written.
fn is_load(a: &Appliance) -> bool {
    a.role == crate::scenario::Role::Load
}

/// An appliance the line-to-line ladder may move: one connection for all its
/// draws, and among its own kind and its `alternatives` both a
/// line-to-neutral one and a line-to-line or three-phase one this supply has.
fn eligible(a: &Appliance, supply: SupplyKind) -> Option<(WiringKind, WiringKind)> {
    let conns = a.connections();
    if conns.len() != 1 {
        return None;
    }
    let own = WiringKind::of(conns[0]);
    let has = |k: WiringKind| own == k || a.alternatives.contains(&k);
    let high = match supply {
        SupplyKind::ThreePhase if own != WiringKind::LineToNeutral => own,
        SupplyKind::ThreePhase if has(WiringKind::ThreePhase) => WiringKind::ThreePhase,
        SupplyKind::ThreePhase | SupplyKind::SplitPhase if has(WiringKind::LineToLine) => {
            WiringKind::LineToLine
        }
        _ => return None,
    };
    has(WiringKind::LineToNeutral).then_some((own, high))
}

/// The eligible appliances, largest expected energy first, up to the count
/// whose energy comes closest to `target` of theirs. Always a prefix of one
/// order, so a larger target moves a superset: the energy drawn
/// line-to-line can only grow from rung to rung, whatever each
/// appliance's energy turns out to be in the simulated window (a heat pump
/// or a car charger drawing more or less than expected).
fn choose(eligible: &[usize], kwh: &[f64], target: f64) -> Vec<usize> {
    let total: f64 = eligible.iter().map(|k| kwh[*k]).sum();
    let mut order = eligible.to_vec();
    order.sort_by(|a, b| kwh[*b].total_cmp(&kwh[*a]).then(a.cmp(b)));
    let goal = target * total;
    let (mut sum, mut count) = (0.0, 0);
    for (n, k) in order.iter().enumerate() {
        sum += kwh[*k];
        if (sum - goal).abs() < (sum - kwh[*k] - goal).abs() - 1e-12 {
            count = n + 1;
        } else {
            break;
        }
    }
    order.truncate(count);
    order
}

/// Line-to-line share: the eligible appliances moved, by energy, to their
/// line-to-line or three-phase form (the rest to their line-to-neutral form).
pub fn line_to_line(h: &LadderHome, shares: &[f64]) -> Vec<LayoutRung> {
    let supply = h.s.home.supply;
    let el: Vec<usize> = (0..h.s.appliances.len())
        .filter(|k| is_load(&h.s.appliances[*k]) && eligible(&h.s.appliances[*k], supply).is_some())
        .collect();
    if el.is_empty() {
        return vec![];
    }
    let total: f64 = el.iter().map(|k| h.kwh[*k]).sum();
    shares
        .iter()
        .map(|&t| {
            let high = choose(&el, &h.kwh, t);
            let low: Vec<usize> = el.iter().copied().filter(|k| !high.contains(k)).collect();
            let moved: f64 = high.iter().map(|k| h.kwh[*k]).sum();
            let name = |ks: &[usize]| {
                let v: Vec<&str> = ks.iter().map(|k| h.s.appliances[*k].id.as_str()).collect();
                if v.is_empty() { "none".to_string() } else { v.join(", ") }
            };
            let mut r = h.rung(
                "line-to-line share",
                format!("line-to-line {:.0} %", t * 100.0),
                format!(
                    "{:.0} % of the movable appliances' energy line-to-line or three-phase ({}); line-to-neutral: {}",
                    if total > 0.0 { 100.0 * moved / total + 0.0 } else { 0.0 },
                    name(&high),
                    name(&low)
                ),
            );
            rewire_kinds(&mut r, h, &high, &low);
            r
        })
        .collect()
}

/// Puts `high` on their line-to-line or three-phase form and `low` on their
/// line-to-neutral form, the latter balanced over the lines by energy.
fn rewire_kinds(r: &mut LayoutRung, h: &LadderHome, high: &[usize], low: &[usize]) {
    let supply = h.s.home.supply;
    let movers: Vec<usize> = high.iter().chain(low).copied().collect();
    let lines_of = balance(h, low, &h.kwh, per_line(h, &movers));
    for &k in high.iter().chain(low) {
        let a = &h.s.appliances[k];
        let (own, hi) = eligible(a, supply).expect("eligible");
        let want = if high.contains(&k) {
            hi
        } else {
            WiringKind::LineToNeutral
        };
        if want == own && !(want == WiringKind::LineToNeutral) {
            continue;
        }
        let first = a.lines()[0];
        let to = match want {
            WiringKind::ThreePhase => Wiring::ThreePhase,
            WiringKind::LineToLine => Wiring::line_line(first, (first + 1) % h.lines(), h.lines()),
            WiringKind::LineToNeutral => {
                let x = lines_of.iter().find(|(j, _)| *j == k).map_or(0, |p| p.1);
                Wiring::LineNeutral(x)
            }
        };
        if let Some(n) = r.doc.appliance_mut(&a.id) {
            let changed = want != own;
            map_wiring(n, &|_| to.name());
            if changed {
                // Its other form is another model, rated for that connection.
                each_draw(n, None, &mut |d, _| d.remove("rated"));
            }
        }
    }
}

/// The home's appliance made from template `t` (or whose id says so).
fn find<'a>(h: &'a LadderHome, t: &str) -> Option<&'a Appliance> {
    h.s.appliances
        .iter()
        .find(|a| h.doc.template_of(&a.id) == Some(t) || a.id.contains(t))
}

/// Partial-phase loads on a three-phase home: the charger charging a car on
/// one, two or three phases (a third of its three-phase power per phase),
/// and a three-phase heat pump whose fan, pump and controller (a tenth of
/// its power) sit on L1-N.
pub fn partial(h: &LadderHome) -> Vec<LayoutRung> {
    if h.s.home.supply != SupplyKind::ThreePhase {
        return vec![];
    }
    let mut out = Vec::new();
    if let Some(c) = find(h, "ev_charger") {
        for k in 1..=3u8 {
            let mut r = h.rung(
                "partial-phase loads",
                format!("charger on {k} phase{}", if k > 1 { "s" } else { "" }),
                format!(
                    "{} charges on {}: a third of its power per phase{}",
                    c.id,
                    (1..=k)
                        .map(|x| format!("L{x}"))
                        .collect::<Vec<_>>()
                        .join(", "),
                    if k == 3 {
                        " (balanced, 3P)"
                    } else {
                        ", line-to-neutral"
                    }
                ),
            );
            let split = move |_: Wiring| -> Vec<(Wiring, f64)> {
                if k == 3 {
                    vec![(Wiring::ThreePhase, 1.0)]
                } else {
                    (0..k as usize)
                        .map(|x| (Wiring::LineNeutral(x), 1.0 / 3.0))
                        .collect()
                }
            };
            if let Some(n) = r.doc.appliance_mut(&c.id) {
                split_draws(n, &split);
            }
            out.push(r);
        }
    }
    if let Some(p) = find(h, "heat_pump").filter(|a| !a.id.contains("water")) {
        let mut r = h.rung(
            "partial-phase loads",
            "heat pump, 1-phase controls".into(),
            format!(
                "{}: compressor 3P (90 % of its power), fan, pump and controller on L1-N (10 %)",
                p.id
            ),
        );
        if let Some(n) = r.doc.appliance_mut(&p.id) {
            split_draws(n, &|_| {
                vec![(Wiring::ThreePhase, 0.9), (Wiring::LineNeutral(0), 0.1)]
            });
        }
        out.push(r);
    }
    out
}

/// A supply the ladder can put a home on.
#[derive(Clone, Copy)]
pub struct LadderSupply {
    pub name: &'static str,
    pub kind: SupplyKind,
    pub v_ln: f64,
}

pub const SUPPLIES: [LadderSupply; 3] = [
    LadderSupply {
        name: "split-phase 120/240 V",
        kind: SupplyKind::SplitPhase,
        v_ln: 120.0,
    },
    LadderSupply {
        name: "three-phase 230/400 V",
        kind: SupplyKind::ThreePhase,
        v_ln: 230.0,
    },
    LadderSupply {
        name: "three-phase 120/208 V",
        kind: SupplyKind::ThreePhase,
        v_ln: 120.0,
    },
];

/// How far a connection's voltage may lie from an appliance's rating for
/// it to be the same model, running off-nominal (a 240 V element on 208 V):
/// ±15 % (our choice; beyond it the home would have the model for its
/// own supply).
pub const SAME_MODEL: f64 = 0.15;

impl LadderSupply {
    fn lines(&self) -> usize {
        self.kind.lines()
    }
    fn v_ll(&self) -> f64 {
        match self.kind {
            SupplyKind::SplitPhase => 2.0 * self.v_ln,
            _ => 3f64.sqrt() * self.v_ln,
        }
    }
    fn voltage(&self, w: Wiring) -> f64 {
        match w {
            Wiring::LineNeutral(_) => self.v_ln,
            _ => self.v_ll(),
        }
    }
    /// Whether it is the home's own supply.
    pub fn is(&self, s: &Scenario) -> bool {
        s.home.supply == self.kind && (s.home.voltage_v - self.v_ln).abs() < 0.5
    }
}

/// The connection on `to` nearest the draw's rating: three-phase stays
/// three-phase where it can; single-phase draws go line-to-neutral or
/// line-to-line, whichever voltage is nearer, keeping their first line
/// (`line` for a draw that changes kind).
fn reconnect(to: &LadderSupply, w: Wiring, rated_v: f64, line: usize) -> Wiring {
    let n = to.lines();
    let first = match w {
        Wiring::LineNeutral(x) | Wiring::LineLine(x, _) => x % n,
        Wiring::ThreePhase => 0,
    };
    let ll = |x: usize| {
        if n == 2 {
            Wiring::LineLine(0, 1)
        } else {
            Wiring::LineLine(x, (x + 1) % n)
        }
    };
    if w == Wiring::ThreePhase {
        return if n == 3 { Wiring::ThreePhase } else { ll(0) };
    }
    let near_ll = (to.v_ll() - rated_v).abs() < (to.v_ln - rated_v).abs();
    match (w, near_ll) {
        (Wiring::LineNeutral(_), false) => Wiring::LineNeutral(first),
        (Wiring::LineLine(..), true) => ll(first),
        (Wiring::LineNeutral(_), true) => ll(line % n),
        _ => Wiring::LineNeutral(line % n),
    }
}

/// The same appliances on another supply. Each draw keeps its rating (its
/// `rated` voltage, or the voltage it was written at) and goes to the
/// nearest connection; within ±`SAME_MODEL` of its rating it is the same
/// model off-nominal (`rated` kept, so the ZIP model gives what that
/// voltage draws); beyond, the model for that supply (same power).
pub fn supply(h: &LadderHome, to: &LadderSupply) -> LayoutRung {
    let mut r = h.rung("supply", to.name.into(), String::new());
    let home = &h.s.home;
    let from = LadderSupply {
        name: "",
        kind: home.supply,
        v_ln: home.voltage_v,
    };
    let (mut kept, mut regional, mut turn) = (Vec::new(), Vec::new(), 0usize);
    for n in r.doc.appliances_mut() {
        let id = n.get("id").and_then(Node::as_str).unwrap_or("").to_string();
        let mut changed_kind = false;
        let line = turn;
        each_draw(n, None, &mut |d, w| {
            let rated = quantity(d, "rated", QuantityKind::Voltage).unwrap_or(from.voltage(w));
            let new = reconnect(to, w, rated, line);
            changed_kind |= WiringKind::of(new) != WiringKind::of(w);
            d.set("wiring", text(&new.name()));
            let v = to.voltage(new);
            if (v / rated - 1.0).abs() <= SAME_MODEL {
                if (v - rated).abs() > 1e-9 {
                    d.set("rated", text(&format!("{rated} V")));
                    kept.push(format!("{id} ({rated:.0} V on {v:.0} V)"));
                }
            } else {
                d.remove("rated");
                regional.push(id.clone());
            }
        });
        if changed_kind {
            turn += 1;
        }
        if let Some(w) = stated(n) {
            n.set(
                "wiring",
                text(&reconnect(to, w, from.voltage(w), line).name()),
            );
        }
    }
    kept.dedup();
    regional.dedup();
    let home_t = r.doc.section("home");
    home_t.set("supply", text(to.kind.name()));
    home_t.set("voltage", text(&format!("{} V", to.v_ln)));
    home_t.remove("frequency");
    r.doc.root.remove("faults");
    r.doc.root.remove("metering");
    r.note = format!(
        "{}; off-nominal: {}; the model for this supply: {}",
        if to.is(h.s) {
            "the home's own supply"
        } else {
            "the same appliances on another supply"
        },
        if kept.is_empty() {
            "none".into()
        } else {
            kept.join(", ")
        },
        if regional.is_empty() {
            "none".into()
        } else {
            regional.join(", ")
        }
    );
    r
}

/// A three-phase source with a voltage unbalance factor `u` (negative over
/// positive sequence).
pub fn unbalance(base: &LayoutRung, u: f64) -> LayoutRung {
    let mut doc = base.doc.clone();
    let source = doc.section("home").entry("source");
    source.set("unbalance", text(&format!("{} %", u * 100.0)));
    LayoutRung {
        family: "supply",
        name: format!("unbalance {} %", u * 100.0),
        note: format!(
            "{}, source voltage unbalance {} % (negative- over positive-sequence voltage)",
            base.name,
            u * 100.0
        ),
        doc,
    }
}

/// A meter that reports only the home's total.
pub fn total_only(h: &LadderHome) -> LayoutRung {
    let mut r = h.rung(
        "metering",
        "total only".into(),
        "a whole-home meter: only total P and Q (per-line P, Q, I and neutral current null)".into(),
    );
    r.doc.section("meter").set("channels", text("total"));
    r
}

#[cfg(test)]
mod tests {
    use super::choose;

    #[test]
    fn a_larger_share_moves_a_superset() {
        // Energies where the nearest subset is not nested (11.3 alone is
        // nearest 50 %, 6.4 alone nearest 25 %): the choice must stay a
        // prefix of the largest-first order.
        let kwh = [6.4, 0.2, 11.3, 3.0, 3.0, 0.0];
        let all: Vec<usize> = (0..kwh.len()).collect();
        let mut last: Vec<usize> = vec![];
        for t in 0..=20 {
            let now = choose(&all, &kwh, t as f64 / 20.0);
            assert!(
                last.iter().all(|k| now.contains(k)),
                "{last:?} then {now:?}"
            );
            last = now;
        }
        assert_eq!(choose(&all, &kwh, 0.0), Vec::<usize>::new());
        assert_eq!(choose(&all, &kwh, 0.5), vec![2]);
        assert_eq!(choose(&all, &kwh, 1.0).len(), 5, "all with energy");
    }
}
