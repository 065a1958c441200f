//! Stage 2, placement: each declared appliance on its declared wiring or
//! on another the steps support much better (wrong line or phase, line-to-line
//! declared line-to-neutral and back), rated draws at their size on every
//! connection, and the moves made one at a time.

use super::finding::{
    coarse_doubt, dark_steps_in, same_wiring_name, ApplianceCheck, Finding, Kind, Verdict,
};
use super::fit::{
    dist, dist_delta, dist_model, distances, jumps_seen, poisson_tail, predicted, shape_of, tol,
    visible, Ctx, Model, Pred, TOL_ABS_V_W, TOL_REL_V, USE_STEP,
};
use super::hypothesis::{alternatives, wiring_names, Metering};
use super::thresholds::Thresholds;

use crate::audit::decl::{DeclAppliance, Declared};
use crate::audit::events::Event;
use crate::contract::{Wiring, C64};
use serde_json::json;

pub(super) fn kind_of(decl: &DeclAppliance, seen: &DeclAppliance) -> Kind {
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
    uncheckable_below(a, Thresholds::STANDARD.decide_w)
}

/// [`uncheckable`], with `decide_w` the size the audit decides on.
fn uncheckable_below(a: &DeclAppliance, decide_w: f64) -> Option<String> {
    match &a.steps {
        crate::audit::decl::Steps::None(why) => Some((*why).into()),
        crate::audit::decl::Steps::Wanders { jumps, .. } if jumps.is_empty() => {
            Some("its power wanders continuously".into())
        }
        _ if a.largest_step_w() < decide_w => Some(format!(
            "its largest step, {:.0} W, is below the {decide_w:.0} W the audit decides on",
            a.largest_step_w(),
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
    let why = uncheckable_below(a, th.decide_w)?;
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

/// An appliance's fit on another wiring: (steps it alone fits, steps that
/// fit, who else fits, its steps, the wiring's name, the appliance so wired).
pub(super) type OtherFit = (
    usize,
    Vec<usize>,
    Vec<usize>,
    Vec<usize>,
    String,
    DeclAppliance,
);

/// A note for each appliance whose large steps are another's as well.
pub(super) fn indistinct_notes(d: &Declared) -> Vec<String> {
    (0..d.appliances.len())
        .filter_map(|j| {
            indistinct(d, j).map(|o| {
                format!("{}: its steps of 500 W or more are those of {o} as well; the data cannot tell the two apart", d.appliances[j].id)
            })
        })
        .collect()
}

/// Whether a rival `rival` tolerances from a step shares it with an
/// appliance `me` tolerances from it.
pub(super) fn shares(me: f64, rival: f64, th: &Thresholds) -> bool {
    rival <= 1.0 && rival < me + th.clearly_better
}

/// What an appliance's declared wiring shows of it, for a move's finding.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) enum AsDeclared {
    /// Its wiring goes through a conductor no working CT reads.
    Unread,
    /// This many steps fit it there.
    Steps(usize),
    /// This many steps fit it there, no more than loads switching within
    /// one row make by chance (at a coarse interval, where
    /// [`Round::coarse_move_doubt`] weighs them): they do not keep it there.
    Chance(usize),
}

impl AsDeclared {
    /// The steps that fit it there (None: not read).
    fn steps(self) -> Option<usize> {
        match self {
            AsDeclared::Unread => None,
            AsDeclared::Steps(k) | AsDeclared::Chance(k) => Some(k),
        }
    }
}

/// The finding that appliance `a` is on `alt` (named `found`): `n_a` steps
/// fit it there, `there` shows what fits it as declared (not read: its
/// wiring counts as `BLIND_MOVE` steps of doubt in the confidence).
pub(super) fn move_finding(
    d: &Declared,
    a: &DeclAppliance,
    alt: &DeclAppliance,
    found: &str,
    there: AsDeclared,
    n_a: usize,
    th: &Thresholds,
) -> Finding {
    let n_d = there.steps();
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
        Some(k) if d.partial && (k > 0 || n_a < th.partial_move) => Some(format!("the declaration is partial, so a load it does not list, of this size on {found}, would look the same while {} was not used", a.id)),
        Some(k) if k >= th.seen_where_declared && !matches!(there, AsDeclared::Chance(_)) => Some(format!("{k} of its steps show where declared too, so the steps on {found} may be another load of its size")),
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

/// Which of an appliance's distinct jumps (as [`Declared::distinct_jumps`]
/// lists them) are one step at different inputs, as a group index per jump.
/// A thermostat's compressor switches on at an input its outdoor temperature
/// sets and off from the same input, so a jump between two states made both
/// ways at a scale is one step of a size the weather picks: a few days show
/// one or two of those sizes, not all. A jump made one way only (a
/// modulating load starting at full power and stopping from its minimum) is
/// a step of its own, which every run shows.
pub(super) fn step_groups(d: &Declared, a: &DeclAppliance) -> Vec<usize> {
    let all = a.steps.jumps();
    let two_way = |&(f, t, kt, kf): &crate::audit::decl::Jump| {
        all.iter()
            .any(|&(g, u, ku, kg)| (g, u) == (t, f) && ku == kf && kg == kt)
    };
    let keys: Vec<Option<(usize, usize)>> = d
        .distinct_jumps(a)
        .iter()
        .map(|(j, _)| two_way(j).then_some((j.0.min(j.1), j.0.max(j.1))))
        .collect();
    (0..keys.len())
        .map(|i| match keys[i] {
            Some(k) => keys.iter().position(|x| *x == Some(k)).unwrap_or(i),
            None => i,
        })
        .collect()
}

/// Share of an appliance's step sizes (its distinct jumps of `USE_STEP`
/// or more, and of `share` of its largest or more) that at least one of
/// `steps` fits, under `a`'s wiring:
/// a hair dryer whose half-heat steps fit but whose full-heat step is never
/// seen is a poor account of those steps. The sizes of one step at the
/// inputs the weather gives it ([`step_groups`]) count as one, seen when
/// any of them is.
pub(super) fn coverage(
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
    let groups = step_groups(d, a);
    let top = sizes.iter().cloned().fold(0.0, f64::max);
    let (mut big, mut seen) = (vec![false; groups.len()], vec![false; groups.len()]);
    for ((jump, &size), &g) in model.jumps.iter().zip(&sizes).zip(&groups) {
        if size < USE_STEP {
            continue;
        }
        big[g] |= size >= share * top;
        let one = Model {
            jumps: vec![jump.clone()],
        };
        seen[g] = seen[g]
            || steps
                .iter()
                .any(|&k| dist_model(d, m, used[k], &cxs[k], &one, &[]).0 <= 1.0);
    }
    let n_big = big.iter().filter(|&&b| b).count();
    let n_seen = big.iter().zip(&seen).filter(|(&b, &s)| b && s).count();
    if n_big == 0 {
        1.0
    } else {
        n_seen as f64 / n_big as f64
    }
}

/// The move to make first among candidate findings (appliance, steps,
/// wiring, finding, the steps, coverage): the one with the most steps,
/// unless another claims mostly the same steps (half of the fewer or more)
/// and shows more of its own step sizes among them. Two appliances with a
/// step of one size, one misdeclared, both fit the misdeclared one's steps
/// on its true line; the one whose other steps are there too is the one
/// that is there (common practice, no source).
pub(super) fn contest(mut c: Vec<Candidate>) -> Option<Candidate> {
    // Most steps first; the earlier appliance on a tie.
    c.sort_by_key(|x| (usize::MAX - x.steps, x.app));
    let top = c.first()?;
    let overlap = |x: &[usize], y: &[usize]| {
        x.iter().filter(|k| y.contains(k)).count() * 2 >= x.len().min(y.len())
    };
    let pick = (0..c.len())
        .filter(|&i| i == 0 || overlap(&c[i].mine, &top.mine))
        .max_by(|&i, &k| c[i].cover.total_cmp(&c[k].cover).then(k.cmp(&i)))?;
    Some(c.swap_remove(pick))
}

/// A candidate move of one appliance.
pub(super) struct Candidate {
    /// The appliance, among those placed.
    pub app: usize,
    /// The steps it alone fits on the wiring it moves to.
    pub steps: usize,
    /// The appliance so wired.
    pub alt: DeclAppliance,
    /// The finding the move makes.
    pub finding: Finding,
    /// The steps that fit it there.
    pub mine: Vec<usize>,
    /// The share of its step sizes among them.
    pub cover: f64,
    /// Another declared appliance that fits those steps as well, if one
    /// does (the move is then possible only).
    pub rival: Option<Rival>,
}

/// The steps a move stands on: the appliance moved (among those placed),
/// the wiring they show on, their size there (W) and the steps.
#[derive(Clone, Copy)]
struct MovedSteps<'s> {
    app: usize,
    found: &'s str,
    size: f64,
    steps: &'s [usize],
}

/// A move whose steps a rival accounts for as well ([`Rival`]): the moved
/// appliance, the rival, the wiring the steps show on and how many.
#[derive(Clone, Debug, PartialEq)]
pub(super) struct Contested {
    /// The moved appliance, among those placed.
    pub app: usize,
    /// The appliance that fits its steps as well.
    pub rival: Rival,
    /// The wiring the steps show on (`L2-N`).
    pub found: String,
    /// How many steps.
    pub steps: usize,
}

/// A declared one-power appliance that fits the steps a move stands on as
/// well as the moved one does.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct Rival {
    /// The rival, among those placed.
    pub app: usize,
    /// Whether it is declared with the moved one (either of the two may be
    /// the one whose steps show elsewhere), rather than where they show.
    pub alongside: bool,
}

/// One round of placement: the appliances as placed so far and each step's
/// distance from them, against which every appliance is weighed.
pub(super) struct Round<'a> {
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
    /// How long the data runs, h.
    hours: f64,
    /// Seconds per row.
    interval_s: f64,
}

/// Whether an appliance is declared by one power only (off, or on at that
/// power: a short entry), which may leave its other settings' steps unknown.
pub(super) fn one_power(a: &DeclAppliance) -> bool {
    a.states.len() == 2 && a.states.iter().all(|st| st.len() <= 1)
}

/// The data's reporting interval and how long it runs.
#[derive(Clone, Copy, Debug)]
pub(super) struct Window {
    /// Seconds per row.
    pub interval_s: f64,
    /// Hours of rows.
    pub hours: f64,
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
                crate::audit::decl::Steps::None(why) => format!("{why}: no step to recognise"),
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

    /// The move of appliance `j` to `alt`, where `steps` steps fit it alone
    /// (`mine`, those that fit it), making finding `f`.
    fn candidate(
        &self,
        j: usize,
        steps: usize,
        alt: DeclAppliance,
        f: Finding,
        mine: Vec<usize>,
        rival: Option<Rival>,
    ) -> Candidate {
        let cover = coverage(self.d, self.m, &alt, self.used, self.cxs, &mine, 0.0);
        Candidate {
            app: j,
            steps,
            alt,
            finding: f,
            mine,
            cover,
            rival,
        }
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
            let mut f = move_finding(d, a, &alt, &name_a, AsDeclared::Unread, n_a, th);
            self.count_dark(&mut f, &name_a, &mine);
            ck.reason = format!("{n_a} steps fit it on {name_a}; its declared wiring goes through L{}, which no working CT reads", x + 1);
            return Some(self.candidate(j, n_a, alt, f, mine, None));
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

    /// Adds to move finding `f` how many of its steps `steps` (the
    /// exclusive ones on wiring `found`) came while a PV array on that
    /// wiring was dark (evidence `dark_steps`, for the doubt a PV raises).
    fn count_dark(&self, f: &mut Finding, found: &str, steps: &[usize]) {
        let times = steps.iter().map(|&k| self.used[k].time_ms);
        f.evidence["dark_steps"] = json!(dark_steps_in(self.d, found, times));
    }

    /// Why moving appliance `j` (as placed, `a`) from one line to neutral to
    /// another (`alt`) may be two channels exchanged instead, in a partial
    /// declaration (where the metering checks have few appliances to go
    /// by): an appliance declared on the line it moves to is not seen there
    /// (fewer than two steps) but two or more of its steps fit it on the
    /// line it moves from. An exchange moves every appliance of both lines.
    /// That appliance must be one the audit places ([`uncheckable_in`]: a
    /// step of `decide_w` or more somewhere): steps of a 100 W television
    /// or of lights show on every line, many loads' alike, and say nothing
    /// of where it is.
    fn exchange_doubt(&self, j: usize, a: &DeclAppliance, alt: &DeclAppliance) -> Option<String> {
        let (aw, bw) = (a.wirings(), alt.wirings());
        let (from, to) = match (aw.as_slice(), bw.as_slice()) {
            ([Wiring::LineNeutral(x)], [Wiring::LineNeutral(y)]) => (*x, *y),
            _ => return None,
        };
        let other = (0..self.placed.len()).find(|&k| {
            let b = &self.placed[k];
            k != j
                && b.wirings() == [Wiring::LineNeutral(to)]
                && uncheckable_in(self.d, b, self.th).is_none()
                && self.excl(k, &self.sigs[k]).0 < self.th.seen_where_declared
                && {
                    let there = b.rewired_on(&self.d.supply, |_| Wiring::LineNeutral(from));
                    let sg = Pred::of(self.d, self.m, &there);
                    self.excl(k, &sg).1.len() >= self.th.seen_where_declared
                }
        })?;
        let b = &self.placed[other].id;
        Some(format!("{b}, declared on L{}-N, shows on L{}-N instead, so channels l{} and l{} may be exchanged rather than {} moved", to + 1, from + 1, from + 1, to + 1, a.id))
    }

    /// Why the steps `mine` of appliance `a` wired as `alt` on `found` may
    /// be another load's: they make more runs than its declared habit starts
    /// in the data's span, beyond a Poisson chance of `coincidence_p` (habit
    /// starts are random; the same cut-off as a coincidence of two
    /// appliances). A run makes each of its step sizes as many times as its
    /// jumps of that size ([`Declared::jumps_per_step`]; a dishwasher's
    /// heater switches on and off in each of its heating phases), sizes
    /// within the wide tolerance of each other taken as one (a step between
    /// them may be either's), so the steps of each size, over that, are
    /// runs at least.
    fn habit_doubt(
        &self,
        a: &DeclAppliance,
        alt: &DeclAppliance,
        found: &str,
        mine: &[usize],
    ) -> Option<String> {
        let per_day = a.habit.as_ref()?.per_day;
        let sizes = predicted(self.d, self.m, alt);
        let per_run = self.d.jumps_per_step(alt);
        let group = alike_sizes(&sizes);
        let groups = group.iter().max().map_or(0, |g| g + 1);
        let (mut seen, mut per) = (vec![0usize; groups], vec![0usize; groups]);
        for (i, n) in per_run.iter().enumerate() {
            per[group[i]] += n;
        }
        // Each step counts for the size it fits best (were none of `alt`'s
        // sizes visible, every distance would be infinite and it would
        // fall to the first, harmlessly: a move needs visible sizes).
        for &k in mine {
            let e = self.used[k];
            let nearest =
                (0..sizes.len()).min_by(|&x, &y| dist(e, &sizes[x]).total_cmp(&dist(e, &sizes[y])));
            if let Some(i) = nearest {
                seen[group[i]] += 1;
            }
        }
        let runs = seen
            .iter()
            .zip(&per)
            .map(|(n, per_run)| n.div_ceil((*per_run).max(1)))
            .max()
            .unwrap_or(0);
        let n_a = mine.len();
        let expected = per_day * self.hours / 24.0;
        (poisson_tail(expected, runs) < self.th.coincidence_p).then(|| {
            format!("{n_a} steps of its size on {found} make at least {runs} runs in {:.0} h, where it is declared to start about {per_day:.1} times a day: they are likelier another load's", self.hours)
        })
    }

    /// Why the steps of a one-power appliance moved (`mv`) may be another
    /// one-power appliance's: one declared on `found`, not seen switching there
    /// (fewer than `seen_where_declared` steps), with its size within
    /// `nameplate_band` of theirs (it is there, drawing other than its
    /// nameplate: no mistake at all); or, for a move from one line to
    /// another (`line_to_line`), one that could be on `found` by a move of
    /// that kind (at the same voltage): declared with `j` and fitting half
    /// of those steps or more (either of the two may be the one on
    /// `found`), or declared elsewhere, not seen switching there either,
    /// with its size within `nameplate_band` of theirs. A one-power entry
    /// gives a nameplate, not what the appliance draws (a washer's heater
    /// step is not its entry's total; a kettle draws with the square of the
    /// voltage; a heat pump's input follows the weather), so only its size
    /// tells it, and entries of about one size account for the steps alike.
    /// One that fits the steps ([`Rival`]) is named before one that has
    /// only about their size.
    fn lookalike_doubt(
        &self,
        mv: &MovedSteps,
        line_to_line: bool,
    ) -> Option<(String, Option<Rival>)> {
        let mut first = None;
        for y in (0..self.placed.len()).filter(|&y| y != mv.app) {
            let Some(doubt) = self.lookalike(mv, y, line_to_line) else {
                continue;
            };
            if doubt.1.is_some() {
                return Some(doubt);
            }
            first.get_or_insert(doubt);
        }
        first
    }

    /// Whether appliance `y` may make the steps of a move (`mv`,
    /// [`Self::lookalike_doubt`]): why, and whether it fits them.
    fn lookalike(
        &self,
        mv: &MovedSteps,
        y: usize,
        line_to_line: bool,
    ) -> Option<(String, Option<Rival>)> {
        let b = &self.placed[y];
        if !one_power(b) || b.steps.jumps().is_empty() {
            return None;
        }
        let there = same_wiring_name(&wiring_names(b), mv.found);
        let (why, fits) = if there {
            self.unseen_there(mv, y)
        } else if line_to_line {
            self.moved_lookalike(mv, y)
        } else {
            None
        }?;
        let rival = fits.then_some(Rival {
            app: y,
            alongside: !there,
        });
        Some((
            format!("{why}, declared by one power only: the steps may be its own"),
            rival,
        ))
    }

    /// Whether appliance `y`, declared where the steps of a move (`mv`)
    /// show, accounts for them as they are: it fits half of them or more
    /// (true with the reason), or it was not seen switching there and has
    /// about their size (false).
    fn unseen_there(&self, mv: &MovedSteps, y: usize) -> Option<(String, bool)> {
        let MovedSteps {
            found, size, steps, ..
        } = *mv;
        let b = &self.placed[y];
        let w = b.largest_step_w();
        if 2 * self.fitting(b, steps) >= steps.len() {
            Some((
                format!("{} is declared on {found} and fits them as well", b.id),
                true,
            ))
        } else if (w - size).abs() <= self.th.nameplate_band * w
            && self.excl(y, &self.sigs[y]).0 < self.th.seen_where_declared
        {
            Some((format!("{} is declared on {found}, was not seen switching there and has about their size ({w:.0} W)", b.id), false))
        } else {
            None
        }
    }

    /// Whether appliance `y` could be the one whose steps are taken for an
    /// appliance moved from one line to another (`mv`): moved there by a
    /// move of that kind, declared with the moved one and fitting half of
    /// the steps or more (true with the reason), or not seen where declared
    /// and within `nameplate_band` of their size (false).
    fn moved_lookalike(&self, mv: &MovedSteps, y: usize) -> Option<(String, bool)> {
        let MovedSteps {
            app: j,
            found,
            size,
            steps,
        } = *mv;
        let b = &self.placed[y];
        let own = wiring_names(b);
        let (_, there) = alternatives(self.d, b)
            .into_iter()
            .find(|(n, _)| same_wiring_name(n, found))?;
        if kind_of(b, &there) != Kind::WrongLine {
            return None;
        }
        let w = there.largest_step_w();
        if own == wiring_names(&self.placed[j]) && 2 * self.fitting(&there, steps) >= steps.len() {
            Some((format!("{} is declared with it on {own} and fits them as well, so either may be the one on {found}", b.id), true))
        } else if (w - size).abs() <= self.th.nameplate_band * w
            && self.excl(y, &self.sigs[y]).0 < self.th.seen_where_declared
        {
            Some((format!("{} was not seen switching where declared either and has about their size there ({w:.0} W)", b.id), false))
        } else {
            None
        }
    }

    /// Why a move of appliance `j` to `found` in a partial declaration may
    /// be a load it does not list: `seen_where_declared` steps or more
    /// where declared fit `j` and another appliance alike, so it may have
    /// run there unseen, its steps taken for the other's (the one sharing
    /// the most named).
    fn shared_doubt(&self, j: usize, found: &str) -> Option<String> {
        let (_, _, who, _) = self.excl(j, &self.sigs[j]);
        if who.len() < self.th.seen_where_declared {
            return None;
        }
        let most = who
            .iter()
            .max_by_key(|&&o| who.iter().filter(|&&x| x == o).count())
            .map(|&o| self.placed[o].id.as_str())?;
        Some(format!("the declaration is partial, and {} steps where declared fit {} and {most} alike, so it may have run there: a load the declaration does not list, of its size on {found}, would look the same", who.len(), self.placed[j].id))
    }

    /// How many of `steps` fit appliance `b` as wired.
    fn fitting(&self, b: &DeclAppliance, steps: &[usize]) -> usize {
        let sg = Pred::of(self.d, self.m, b);
        steps
            .iter()
            .filter(|&&k| sg.dist(self.d, self.m, self.used[k], &self.cxs[k]) <= 1.0)
            .count()
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
        let stays = n_d >= th.shows_as_declared
            && {
                let (.., mine_d) = self.excl(j, &self.sigs[j]);
                coverage(d, m, a, self.used, self.cxs, &mine_d, th.whole_share) >= 1.0
            }
            && (!self.coarse() || self.beyond_chance(a));
        // As many steps to move it as to keep it where declared: two runs.
        let moves = !stays && n_a >= th.shows_as_declared && n_a >= 3 * n_d + 2;
        let whole =
            moves && coverage(d, m, &alt, self.used, self.cxs, &all_a, th.whole_share) >= 1.0;
        if whole {
            let there = if self.coarse() && self.at_chance(a) {
                AsDeclared::Chance(n_d)
            } else {
                AsDeclared::Steps(n_d)
            };
            let mut f = move_finding(d, a, &alt, &name_a, there, n_a, th);
            self.count_dark(&mut f, &name_a, &mine);
            // A partial declaration or a one-power entry leaves steps the
            // declaration does not give: a move may then be two channels
            // exchanged that the metering checks had too little to find.
            if (d.partial || one_power(a)) && f.doubt.is_none() {
                f.doubt = self.exchange_doubt(j, a, &alt);
            }
            if d.partial && f.doubt.is_none() {
                f.doubt = self.shared_doubt(j, &name_a);
            }
            // A look-alike that fits the steps leaves the move undecidable
            // whichever doubt is given first.
            let mut rival = None;
            if one_power(a) {
                let line_to_line = f.kind == Kind::WrongLine;
                let size = alt.largest_step_w();
                let mv = MovedSteps {
                    app: j,
                    found: &name_a,
                    size,
                    steps: &all_a,
                };
                if let Some((why, r)) = self.lookalike_doubt(&mv, line_to_line) {
                    f.doubt.get_or_insert(why);
                    rival = r;
                }
            }
            // Steps far beyond its habit are another load's: left to the
            // undeclared loads, not a move.
            if let Some(why) = self.habit_doubt(a, &alt, &name_a, &mine) {
                ck.reason = why;
                return None;
            }
            if f.doubt.is_none() {
                f.doubt = self.coarse_move_doubt(a, &alt, n_a, f.kind);
            }
            ck.reason = format!("{n_a} steps fit it on {name_a}, {n_d} on {declared}");
            return Some(self.candidate(j, n_a, alt, f, mine, rival));
        }
        if moves {
            ck.reason = format!("{n_a} steps fit it on {name_a} and no other appliance, {n_d} on {declared}, but not every one of its main step sizes shows there: too little to place it");
        } else if n_d >= 2 {
            ck.verdict = Verdict::AsDeclared;
            ck.reason =
                format!("{n_d} steps fit it as declared, at most {n_a} on any other connection");
        } else if all_a.len() >= 3 && !who.is_empty() {
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

/// Appliance `a` with every draw's power scaled by `k`: a load of another
/// size drawn the same way.
fn scaled(a: &DeclAppliance, k: f64) -> DeclAppliance {
    let mut b = a.clone();
    for x in b.states.iter_mut().flatten() {
        x.s = x.s.scale(k);
    }
    b
}

/// Which of the steps `used` fit appliance `b` as wired (its voltages `cxs`).
fn steps_fitting(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    b: &DeclAppliance,
) -> Vec<bool> {
    let sg = Pred::of(d, m, b);
    used.iter()
        .zip(cxs)
        .map(|(e, cx)| sg.dist(d, m, e, cx) <= 1.0)
        .collect()
}

/// Steps among `used` that fit appliance `b` as wired, and how many steps
/// a window that wide gets by chance: the mean of the steps that fit it
/// scaled to the sizes just below and just above its tolerance (its
/// largest step scaled by two relative tolerances either way; the window
/// above may reach into its own, so the steps that fit it unscaled are
/// left out of both neighbours: one of its other step
/// sizes, or a weather-driven input, may fall there). A load of its size
/// makes a peak over its neighbours; other loads' steps and their sums at
/// a coarse interval fill every size about alike.
fn against_background(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    b: &DeclAppliance,
) -> (usize, f64) {
    let size = b.largest_step_w().abs().max(USE_STEP);
    let h = tol(size) / size;
    let own = steps_fitting(d, m, used, cxs, b);
    let side = |k: f64| {
        let there = steps_fitting(d, m, used, cxs, &scaled(b, k));
        there.iter().zip(&own).filter(|(t, o)| **t && !**o).count() as f64
    };
    let n = own.iter().filter(|x| **x).count();
    (n, 0.5 * (side(1.0 - 2.0 * h) + side(1.0 + 2.0 * h)))
}

/// Whether more steps fit appliance `b` as wired than its neighbouring
/// sizes get by chance ([`against_background`]), beyond a Poisson chance
/// of `coincidence_p` (the cut-off a cluster of steps is a load of its own
/// by): a load of its size switches there. The background is taken as half
/// a step at least: estimated from two windows, none seen in them does not
/// make a chance step impossible (with none, five steps are needed).
pub(super) fn beyond_chance(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    b: &DeclAppliance,
    th: &Thresholds,
) -> bool {
    let (n, background) = against_background(d, m, used, cxs, b);
    poisson_tail(background.max(0.5), n) < th.coincidence_p
}

/// The checks a coarse interval needs: at a row a minute or more, loads
/// switching within one row make one step together, so steps of any size
/// come by chance, and a count of steps that fit an appliance is evidence
/// only beyond what its neighbouring sizes get.
impl Round<'_> {
    /// Whether the rows are `coarse_interval_s` or more apart.
    fn coarse(&self) -> bool {
        self.th.coarse(self.interval_s)
    }

    /// Whether more steps fit appliance `b` as wired than its neighbouring
    /// sizes get by chance ([`beyond_chance`]).
    fn beyond_chance(&self, b: &DeclAppliance) -> bool {
        beyond_chance(self.d, self.m, self.used, self.cxs, b, self.th)
    }

    /// Whether no more steps fit appliance `b` as wired than its
    /// neighbouring sizes get ([`against_background`]): what fits it there
    /// is what chance makes of any size, no sign of it.
    fn at_chance(&self, b: &DeclAppliance) -> bool {
        let (n, background) = against_background(self.d, self.m, self.used, self.cxs, b);
        n as f64 <= background
    }

    /// How many steps of the size of appliance `alt` two declared
    /// appliances switching within one row are expected to make in the
    /// run: the Poisson rates of the sums and differences of their jumps
    /// that have its size ([`SeenJumps::sums`](super::fit::SeenJumps::sums)).
    fn composites_expected(&self, alt: &DeclAppliance) -> f64 {
        let own = predicted(self.d, self.m, alt);
        jumps_seen(
            self.d,
            self.m,
            self.placed,
            self.used,
            self.interval_s,
            self.hours,
        )
        .sums()
        .iter()
        .filter(|(sum, _)| {
            let delta: Vec<C64> = sum.iter().map(|x| x.unwrap_or(C64::ZERO)).collect();
            own.iter().any(|r| dist_delta(&delta, r) <= 1.0)
        })
        .map(|(_, rate)| rate)
        .sum()
    }

    /// Why a move of appliance `a` to `alt` (`n_a` steps fit it there, of
    /// kind `kind`) may rest on composite steps at a coarse interval
    /// ([`coarse_doubt`]), unless the steps rule that out: `coarse_runs`
    /// steps or more (half as many runs) fit it where found, beyond what
    /// the neighbouring sizes get there by chance (a load of its size
    /// switches there); those as declared are not beyond chance (it does
    /// not switch there); and two declared appliances switching together
    /// make steps of its size too seldom to account for them (`n_a` or more
    /// under the Poisson rate of such coincidences has a chance below
    /// `coincidence_p`). The two chances carry the weight; the count only
    /// keeps a handful of steps from standing on them.
    fn coarse_move_doubt(
        &self,
        a: &DeclAppliance,
        alt: &DeclAppliance,
        n_a: usize,
        kind: Kind,
    ) -> Option<String> {
        let doubt = coarse_doubt(kind, self.interval_s, self.th)?;
        let stands = n_a >= self.th.coarse_runs
            && self.beyond_chance(alt)
            && !self.beyond_chance(a)
            && poisson_tail(self.composites_expected(alt), n_a) < self.th.coincidence_p;
        (!stands).then_some(doubt)
    }
}

/// Which group each of the step sizes `sizes` (an appliance's readings)
/// falls in: sizes within the wide fit tolerance (30 W + 10 %) of each
/// other on every channel read, directly or through others, make one group
/// (numbered from 0 in order of first member), since a step between them
/// may be either's. (Not [`step_groups`], one step at the inputs the
/// weather gives it.)
pub(super) fn alike_sizes(sizes: &[Vec<Option<C64>>]) -> Vec<usize> {
    // One sign for every channel (a jump and its reverse are one size);
    // channels read by neither are passed over, and two readings with no
    // channel in common are not near.
    let near = |a: &[Option<C64>], b: &[Option<C64>]| {
        let pairs: Vec<(C64, C64)> = a
            .iter()
            .zip(b)
            .filter_map(|(x, y)| Some(((*x)?, (*y)?)))
            .collect();
        let within = |sign: f64| {
            pairs
                .iter()
                .all(|(x, y)| (*x - y.scale(sign)).abs() <= tol(x.abs().max(y.abs())))
        };
        !pairs.is_empty() && (within(1.0) || within(-1.0))
    };
    let mut group: Vec<usize> = (0..sizes.len()).collect();
    // Join until nothing changes: each size takes the smallest group of
    // those near it, so chains of near sizes end in one group.
    loop {
        let mut changed = false;
        for i in 0..sizes.len() {
            for j in 0..sizes.len() {
                if group[j] < group[i] && near(&sizes[i], &sizes[j]) {
                    group[i] = group[j];
                    changed = true;
                }
            }
        }
        if !changed {
            break;
        }
    }
    let mut ids: Vec<usize> = group.clone();
    ids.sort_unstable();
    ids.dedup();
    group
        .iter()
        .map(|g| ids.iter().position(|x| x == g).unwrap_or(0))
        .collect()
}

/// The lines an appliance drawn from one line to neutral moves between
/// (from, to), if `alt` is it drawn from another line to neutral.
fn line_move(a: &DeclAppliance, alt: &DeclAppliance) -> Option<(usize, usize)> {
    match (a.wirings().as_slice(), alt.wirings().as_slice()) {
        ([Wiring::LineNeutral(x)], [Wiring::LineNeutral(y)]) if x != y => Some((*x, *y)),
        _ => None,
    }
}

/// Records move `new` (its finding's index, and from and to which line)
/// among `moves`, and doubts it and an earlier one the other way between
/// the same two lines: two channels exchanged (or their CTs) move every
/// appliance of both lines, one mistake where two moves are two, and the
/// metering checks may have missed it when lookalikes on the two lines
/// speak for the declared metering.
fn swapped_moves(
    moves: &mut Vec<(usize, (usize, usize))>,
    findings: &mut [Finding],
    new: (usize, (usize, usize)),
) {
    let (k, (from, to)) = new;
    if let Some(&(i, _)) = moves.iter().find(|(_, w)| *w == (to, from)) {
        let why = |other: &Finding, (x, y): (usize, usize)| {
            format!("{} moved the other way, from L{}-N to L{}-N: channels l{} and l{} exchanged (or their CTs) would account for both, one mistake rather than two", other.subject, x + 1, y + 1, from.min(to) + 1, from.max(to) + 1)
        };
        let (a, b) = (why(&findings[k], (from, to)), why(&findings[i], (to, from)));
        findings[i].doubt.get_or_insert(a);
        findings[k].doubt.get_or_insert(b);
    }
    moves.push(new);
}

/// Places every appliance: its wiring as declared, or another one the
/// steps support much better. Greedy: the best-supported finding is taken
/// first and the appliance moved before the others are weighed again, so
/// steps one misdeclared appliance leaves behind are not pinned on another.
/// Returns the checks, the appliances as placed and the moves a rival
/// accounts for as well.
pub(super) fn place(
    d: &Declared,
    m: &Metering,
    used: &[&Event],
    cxs: &[Ctx],
    window: Window,
    findings: &mut Vec<Finding>,
    th: &Thresholds,
) -> (Vec<ApplianceCheck>, Vec<DeclAppliance>, Vec<Contested>) {
    let interval_s = window.interval_s;
    let n = d.supply.lines();
    let seen: Vec<bool> = (0..n)
        .map(|b| (0..n).any(|c| !m.absent[c] && m.map[c].src == b))
        .collect();
    let mut placed: Vec<DeclAppliance> = d.appliances.clone();
    let mut moved = vec![false; placed.len()];
    let mut moves: Vec<(usize, (usize, usize))> = Vec::new();
    let mut contested = Vec::new();
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
            hours: window.hours,
            interval_s,
        };
        let mut checks = Vec::new();
        let mut candidates: Vec<Candidate> = Vec::new();
        for (j, was_moved) in moved.iter().enumerate() {
            let (ck, cand) = round.check(j, *was_moved);
            checks.push(ck);
            candidates.extend(cand);
        }
        match contest(candidates) {
            Some(Candidate {
                app: j,
                steps,
                alt,
                finding: f,
                rival,
                ..
            }) => {
                let way = line_move(&placed[j], &alt);
                // A rival moved before is no longer where it was declared.
                if let Some(rival) = rival.filter(|r| !moved[r.app]) {
                    contested.push(Contested {
                        app: j,
                        rival,
                        found: wiring_names(&alt),
                        steps,
                    });
                }
                placed[j] = alt;
                moved[j] = true;
                findings.push(f);
                if let Some(w) = way {
                    let k = findings.len() - 1;
                    swapped_moves(&mut moves, findings, (k, w));
                }
            }
            None => {
                let n_moved = moved.iter().filter(|&&x| x).count();
                if th.coarse(interval_s) {
                    several_moves_doubt(findings, n_moved, interval_s);
                }
                return (checks, placed, contested);
            }
        }
    }
}

/// The checks of the appliances whose placement a rival makes undecidable
/// ([`Contested`]): the moved one, its steps there fitting the rival as
/// well, and a rival declared with it (either of the two may be the one
/// whose steps show elsewhere) that stood as declared, its reason naming
/// each moved appliance it rivals. A rival moved itself in a later round
/// was placed by steps of its own, and leaves the move it rivalled as it
/// is. Applied once the placement has been used (the later stages weigh
/// the appliances as placed, the move included); `placed` names them.
pub(super) fn settle_contested(
    checks: &mut [ApplianceCheck],
    contested: &[Contested],
    placed: &[DeclAppliance],
) {
    // Which appliances the placement moved, before any verdict here changes.
    let was_moved: Vec<bool> = checks
        .iter()
        .map(|c| c.verdict == Verdict::Finding)
        .collect();
    let mut rivals_settled: Vec<usize> = Vec::new();
    for c in contested {
        if was_moved[c.rival.app] {
            continue;
        }
        let (moved, rival) = (&placed[c.app].id, &placed[c.rival.app].id);
        let (found, n) = (&c.found, c.steps);
        let ck = &mut checks[c.app];
        ck.verdict = Verdict::Undecidable;
        ck.seen = None;
        if c.rival.alongside {
            let own = ck.declared.clone();
            ck.reason = format!("{n} steps would fit it on {found}, but {rival}, declared with it on {own}, fits them as well: one of the two is on {found}, the data cannot tell which");
            let why = format!("{n} steps of its size show on {found}, and {moved}, declared with it on {own}, fits them as well: one of the two is on {found}, the data cannot tell which");
            let other = &mut checks[c.rival.app];
            if rivals_settled.contains(&c.rival.app) {
                other.reason = format!("{}; {why}", other.reason);
            } else if other.verdict == Verdict::AsDeclared {
                other.verdict = Verdict::Undecidable;
                other.reason = why;
                rivals_settled.push(c.rival.app);
            }
        } else {
            ck.reason = format!(
                "{n} steps would fit it on {found}, but they fit {rival}, declared there, as well"
            );
        }
    }
}

/// At a coarse interval, a move that stands on its own steps
/// (`coarse_move_doubt`) is only possible when `n_moved` appliances (two or
/// more) moved in one placement: two CTs or channels exchanged move every
/// appliance on the channels they concern, one mistake where the moves
/// are several, and with a row a minute or more apart the metering checks
/// may not tell it from the declared metering.
fn several_moves_doubt(findings: &mut [Finding], n_moved: usize, interval_s: f64) {
    if n_moved < 2 {
        return;
    }
    for f in findings.iter_mut().filter(|f| !f.kind.is_metering()) {
        f.doubt.get_or_insert_with(|| format!("{n_moved} appliances show moved at once: two CTs or channels exchanged would move them all, one mistake rather than {n_moved}, and at {interval_s:.0} s per row the data may not tell"));
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::check::testkit::{day_stats, heater_program, on_off, split_phase, H};
    use crate::audit::decl::StartHabit;

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

    /// Steps on line `on` (of `lines`): `n` runs of `w` W, an hour apart,
    /// each stopping ten minutes after it starts, at 1 s.
    fn runs_on(lines: usize, on: usize, w: f64, n: i64, at: i64) -> Vec<Event> {
        use crate::audit::check::testkit::H;
        let v = if lines == 3 { 230.0 } else { 120.0 };
        let step = |t: i64, p: f64| {
            let mut delta = vec![C64::ZERO; lines];
            delta[on] = C64::new(p, 0.0);
            Event {
                time_ms: t,
                delta,
                before: vec![C64::new(200.0, 0.0); lines],
                v_before: vec![v; lines],
                v_after: vec![v; lines],
                se: vec![1.0; lines],
            }
        };
        (0..n)
            .flat_map(|i| [step(at + i * H, w), step(at + i * H + H / 6, -w)])
            .collect()
    }

    /// A 2 kW heat pump on L1-N whose compressor starts at two inputs the
    /// outdoor temperature gives it (0.8 and 1 of its power), stopping from
    /// either.
    fn weather_heat_pump() -> DeclAppliance {
        let mut hp = on_off("heat_pump", 0, C64::new(2000.0, 0.0));
        hp.steps = crate::audit::decl::Steps::Jumps(vec![
            (0, 1, 0.8, 1.0),
            (1, 0, 1.0, 0.8),
            (0, 1, 1.0, 1.0),
            (1, 0, 1.0, 1.0),
        ]);
        hp
    }

    /// A dishwasher-like program, its pump (65 W) on, its heater (1.1 kW)
    /// on and off twice, then all off (1165 W): its distinct steps are
    /// made once, three times and once a run; the heater's step and the
    /// last one, 65 W apart (within 30 W + 10 %), are one size; the pump's
    /// is another.
    #[test]
    fn a_run_makes_each_step_size_as_often_as_its_jumps_of_that_size() {
        use crate::audit::decl::Steps;
        let d = split_phase(vec![]);
        let mut dw = heater_program(0, 65.0, 1100.0, 1, 2);
        // All off from the heater's state at the end: 1165 W, not 65 W.
        let Steps::Jumps(jumps) = &mut dw.steps else {
            unreachable!("a program's steps are jumps")
        };
        jumps.truncate(4);
        jumps.push((2, 0, 1.0, 1.0));
        assert_eq!(d.jumps_per_step(&dw), [1, 3, 1]);
        let m = crate::audit::check::hypothesis::declared_metering(&d, &[false, false]);
        assert_eq!(alike_sizes(&predicted(&d, &m, &dw)), [0, 1, 1]);
    }

    /// A heat pump's compressor switched at two inputs the outdoor
    /// temperature gives it (0.8 and 1 of 2 kW, on and off at each): one
    /// step size the weather picks, so its jumps make one group; a
    /// modulating load starting at full power and stopping from 40 % makes
    /// two steps, each seen every run.
    #[test]
    fn a_steps_sizes_at_the_weathers_inputs_count_as_one() {
        use crate::audit::decl::Steps;
        let d = split_phase(vec![]);
        let hp = weather_heat_pump();
        assert_eq!(step_groups(&d, &hp), [0, 0]);
        let mut ev = on_off("ev", 0, C64::new(2000.0, 0.0));
        ev.steps = Steps::Jumps(vec![(0, 1, 1.0, 1.0), (1, 0, 1.0, 0.4)]);
        assert_eq!(step_groups(&d, &ev), [0, 1]);
        assert_eq!(
            step_groups(&d, &on_off("kettle", 0, C64::new(1500.0, 0.0))),
            [0]
        );
    }

    /// Placement stage, at 1 s: the heat pump above, declared on L1-N,
    /// switches four times on L2-N at 1.6 kW (0.8 of its input, a mild
    /// day) and never at 2 kW: it is on L2-N, although its 2 kW step never
    /// shows (the weather did not ask for it).
    #[test]
    fn a_heat_pump_is_placed_by_the_input_the_weather_gave_it() {
        use crate::audit::check::check;
        let hp = weather_heat_pump();
        let d = split_phase(vec![hp]);
        let o = check(&d, &runs_on(2, 1, 1600.0, 4, 0), &day_stats(2, 200.0), 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["heat_pump"], "{:?} {:?}", o.possible, o.appliances);
    }

    /// Placement stage, at 1 s: a 1500 W kettle and a 1450 W microwave,
    /// each declared by one power on L1-N; 1450 W steps show on L1-N and
    /// 1500 W steps on L2-N. Either may be the one on L2-N (the microwave
    /// fits those steps too), so the kettle's move is only possible, and
    /// neither appliance is said to be as declared: both are undecidable,
    /// each reason naming the other. Beside a 1165 W dishwasher instead, a
    /// fifth and more away, the move is certain.
    #[test]
    fn a_move_a_lookalike_declared_with_it_accounts_for_is_only_possible() {
        use crate::audit::check::check;
        let kettle = on_off("kettle", 0, C64::new(1500.0, 0.0));
        let mut events = runs_on(2, 1, 1500.0, 4, 0);
        events.extend(runs_on(2, 0, 1450.0, 4, H / 2));
        let d = split_phase(vec![
            kettle.clone(),
            on_off("microwave", 0, C64::new(1450.0, 0.0)),
        ]);
        let o = check(&d, &events, &day_stats(2, 200.0), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        assert!(
            moved.doubt.as_ref().unwrap().contains("either may be"),
            "{moved:?}"
        );
        for (ck, rival) in o.appliances.iter().zip(["microwave", "kettle"]) {
            assert_eq!(ck.verdict, Verdict::Undecidable, "{ck:?}");
            assert!(ck.reason.contains(rival), "{ck:?}");
            assert!(ck.reason.contains("one of the two is on L2-N"), "{ck:?}");
        }
        // Declared as partial, the move's first doubt is another (the steps
        // where declared fit both alike); the look-alike still leaves both
        // undecidable.
        let mut partial = d.clone();
        partial.partial = true;
        let o = check(&partial, &events, &day_stats(2, 200.0), 1.0);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        assert!(
            !moved.doubt.as_ref().unwrap().contains("either may be"),
            "{moved:?}"
        );
        for ck in &o.appliances {
            assert_eq!(ck.verdict, Verdict::Undecidable, "{ck:?}");
        }
        let d = split_phase(vec![kettle, on_off("dishwasher", 0, C64::new(1165.0, 0.0))]);
        let o = check(&d, &runs_on(2, 1, 1500.0, 4, 0), &day_stats(2, 200.0), 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["kettle"], "{:?}", o.possible);
        assert_eq!(o.appliances[0].verdict, Verdict::Finding);
    }

    /// Placement stage, three-phase at 1 s: a 2 kW kettle declared on
    /// L1-N switches four times on L2-N. A 2.1 kW washer declared on L3-N
    /// by one power, not seen there, may be what switches on L2-N (drawing
    /// 5 % under its nameplate), so the move is only possible; once the
    /// washer shows where declared, the move is certain.
    #[test]
    fn a_move_an_unseen_lookalike_accounts_for_is_only_possible() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::three_phase;
        let d = three_phase(vec![
            on_off("kettle", 0, C64::new(2000.0, 0.0)),
            on_off("washer", 2, C64::new(2100.0, 0.0)),
        ]);
        let mut events = runs_on(3, 1, 2000.0, 4, 0);
        let o = check(&d, &events, &day_stats(3, 200.0), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        assert!(
            moved
                .doubt
                .as_ref()
                .unwrap()
                .contains("washer was not seen"),
            "{moved:?}"
        );
        events.extend(runs_on(3, 2, 2100.0, 3, H / 2));
        let o = check(&d, &events, &day_stats(3, 200.0), 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["kettle"], "{:?}", o.possible);
    }

    /// Placement stage, three-phase at 1 s: the kettle's move of the test
    /// above, with a 2 kW microwave declared beside it on L1-N as well. The
    /// washer, first in the declaration, has only about the size of the
    /// steps; the microwave fits them: it is the one named, and the
    /// kettle's placement is undecidable, its reason naming the microwave.
    #[test]
    fn a_lookalike_that_fits_the_steps_is_named_before_one_of_about_their_size() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::three_phase;
        let d = three_phase(vec![
            on_off("kettle", 0, C64::new(2000.0, 0.0)),
            on_off("washer", 2, C64::new(2100.0, 0.0)),
            on_off("microwave", 0, C64::new(2000.0, 0.0)),
        ]);
        let o = check(&d, &runs_on(3, 1, 2000.0, 4, 0), &day_stats(3, 200.0), 1.0);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        let why = moved.doubt.as_deref().unwrap();
        assert!(why.contains("microwave is declared with it"), "{why}");
        let kettle = &o.appliances[0];
        assert_eq!(kettle.verdict, Verdict::Undecidable, "{kettle:?}");
        assert!(kettle.reason.contains("microwave"), "{kettle:?}");
    }

    /// Placement stage: a fridge moved from L1-N to L2-N, then a kettle from
    /// L2-N to L1-N, are one mistake (two channels exchanged) as likely as
    /// two: both moves are only possible, each naming the other. A third
    /// move, from L1-N to L3-N, has no move the other way and stays.
    #[test]
    fn two_moves_the_opposite_ways_between_two_lines_are_an_exchange() {
        let f = |who: &str| Finding {
            kind: Kind::WrongLine,
            subject: who.into(),
            message: String::new(),
            confidence: 0.9,
            evidence: json!({}),
            doubt: None,
        };
        let mut findings = vec![f("fridge"), f("kettle"), f("dryer")];
        let mut moves = Vec::new();
        swapped_moves(&mut moves, &mut findings, (0, (0, 1)));
        assert!(findings[0].doubt.is_none(), "one move alone");
        swapped_moves(&mut moves, &mut findings, (1, (1, 0)));
        swapped_moves(&mut moves, &mut findings, (2, (0, 2)));
        let why = findings[0].doubt.as_deref().unwrap();
        assert!(
            why.starts_with("kettle moved the other way, from L2-N to L1-N"),
            "{why}"
        );
        assert!(why.contains("channels l1 and l2 exchanged"), "{why}");
        let why = findings[1].doubt.as_deref().unwrap();
        assert!(
            why.starts_with("fridge moved the other way, from L1-N to L2-N"),
            "{why}"
        );
        assert!(findings[2].doubt.is_none());
    }

    /// Placement stage, at 1 s: a 1500 W kettle declared on L1-N, a
    /// 1450 W heater on L2-N, each by one power; 1500 W steps show on L2-N
    /// only. They fit the kettle better, but the heater, declared there,
    /// fits them too (50 W off, within the tolerance): no mistake at all
    /// accounts for them, so the kettle's move is only possible and its
    /// placement undecidable; the heater's check is its own.
    #[test]
    fn a_move_onto_a_lookalike_declared_there_is_only_possible() {
        use crate::audit::check::check;
        let d = split_phase(vec![
            on_off("kettle", 0, C64::new(1500.0, 0.0)),
            on_off("heater", 1, C64::new(1450.0, 0.0)),
        ]);
        let o = check(&d, &runs_on(2, 1, 1500.0, 4, 0), &day_stats(2, 200.0), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        let why = moved.doubt.as_deref().unwrap();
        assert!(
            why.contains("heater is declared on L2-N and fits them as well"),
            "{why}"
        );
        let (kettle, heater) = (&o.appliances[0], &o.appliances[1]);
        assert_eq!(kettle.verdict, Verdict::Undecidable, "{kettle:?}");
        assert!(
            kettle
                .reason
                .contains("they fit heater, declared there, as well"),
            "{kettle:?}"
        );
        assert!(!heater.reason.contains("kettle"), "{heater:?}");
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
    /// declared wiring cannot be read, or when a run shows where declared
    /// too; not when nothing shows there, nor when what shows there is no
    /// more than chance makes (at a coarse interval, where the coarse test
    /// weighs the move instead). In a partial declaration, also
    /// when anything shows where declared or fewer than three runs elsewhere.
    #[test]
    fn a_move_another_account_fits_is_only_possible() {
        let th = &Thresholds::STANDARD;
        let a = on_off("kettle", 0, C64::new(1500.0, 0.0));
        let alt = on_off("kettle", 1, C64::new(1500.0, 0.0));
        let mut d = split_phase(vec![a.clone()]);
        let f = |d: &Declared, there: AsDeclared| move_finding(d, &a, &alt, "L2-N", there, 20, th);
        assert!(f(&d, AsDeclared::Steps(0)).doubt.is_none());
        assert!(
            f(&d, AsDeclared::Steps(1)).doubt.is_none(),
            "one step is as likely another load's"
        );
        assert!(f(&d, AsDeclared::Steps(2)).doubt.is_some());
        assert!(
            f(&d, AsDeclared::Chance(2)).doubt.is_none(),
            "steps where declared no more than chance"
        );
        assert!(f(&d, AsDeclared::Unread).doubt.is_some());
        d.partial = true;
        assert!(
            f(&d, AsDeclared::Steps(0)).doubt.is_none(),
            "20 steps, none where declared"
        );
        assert!(f(&d, AsDeclared::Steps(1)).doubt.is_some());
        let few = move_finding(
            &d,
            &a,
            &alt,
            "L2-N",
            AsDeclared::Steps(0),
            th.partial_move - 1,
            th,
        );
        assert!(few.doubt.is_some(), "fewer than three runs");
        assert_eq!(f(&d, AsDeclared::Steps(0)).kind, Kind::WrongLine);
    }

    /// Placement stage, a partial declaration at 1 s: a 1.5 kW kettle
    /// declared on L1-N switches eight times on L2, never on L1 (a 600 W
    /// pump on L1-N shows where declared, so the channels are as declared):
    /// the kettle is on L2-N, for certain. When an 800 W heater declared on
    /// L2-N shows only on L1 instead, two channels exchanged would account
    /// for both, and the move is only possible; a 150 W television there
    /// does not make it so.
    #[test]
    fn a_partial_declarations_move_is_certain_unless_channels_may_be_exchanged() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::H;
        use crate::audit::events::{ChannelStats, Event};
        let mut d = split_phase(vec![
            on_off("kettle", 0, C64::new(1500.0, 0.0)),
            on_off("heater", 1, C64::new(800.0, 0.0)),
            on_off("pump", 0, C64::new(600.0, 450.0)),
        ]);
        d.partial = true;
        let step = |t: i64, l1: C64, l2: C64| Event {
            time_ms: t,
            delta: vec![l1, l2],
            before: vec![C64::new(200.0, 0.0); 2],
            v_before: vec![120.0; 2],
            v_after: vec![120.0; 2],
            se: vec![1.0; 2],
        };
        let run = |t: i64, l1: C64, l2: C64| [step(t, l1, l2), step(t + H / 10, -l1, -l2)];
        let (kettle, heater, pump) = (
            C64::new(1500.0, 0.0),
            C64::new(800.0, 0.0),
            C64::new(600.0, 450.0),
        );
        let mut events: Vec<Event> = (0..4)
            .flat_map(|i| run(i * 5 * H, C64::ZERO, kettle))
            .collect();
        events.extend((0..3).flat_map(|i| run(i * 5 * H + 2 * H, pump, C64::ZERO)));
        let stats = vec![
            ChannelStats {
                rows: 86_400,
                null: 0,
                zero: 0,
                sum_p: 200.0 * 86_400.0,
                negative: vec![[0, 86_400]; 2],
                ..Default::default()
            };
            2
        ];
        let o = check(&d, &events, &stats, 1.0);
        let subjects: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(subjects, ["kettle"], "{:?}", o.possible);
        events.extend(run(3 * H, heater, C64::ZERO));
        let o = check(&d, &events, &stats, 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let kettle = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        assert!(kettle.doubt.as_ref().unwrap().contains("exchanged"));
        // A 150 W television in the heater's place says nothing of where
        // it is (below the 300 W the audit places by): the move stands.
        d.appliances[1] = on_off("tv", 1, C64::new(150.0, 0.0));
        events.extend(run(4 * H, C64::new(150.0, 0.0), C64::ZERO));
        let o = check(&d, &events, &stats, 1.0);
        let subjects: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(subjects, ["kettle"], "{:?}", o.possible);
    }

    /// Placement stage, a partial declaration: a 1.5 kW kettle declared on
    /// L1-N switches eight times on L2. Where its size shows on L1 as well,
    /// in steps a program's 1.5 kW heater declared there fits alike, the
    /// kettle may have run where declared: the steps on L2-N may be a load
    /// the declaration does not list, and the move is only possible.
    #[test]
    fn a_partial_declarations_move_is_possible_where_its_size_shows_shared() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{day_stats, heater_program, H};
        let mut d = split_phase(vec![
            on_off("kettle", 0, C64::new(1500.0, 0.0)),
            heater_program(0, 65.0, 1500.0, 1, 1),
        ]);
        d.partial = true;
        let mut events = runs_on(2, 1, 1500.0, 4, 0);
        let o = check(&d, &events, &day_stats(2, 200.0), 1.0);
        let subjects: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(subjects, ["kettle"], "{:?}", o.possible);
        events.extend(runs_on(2, 0, 1500.0, 3, H / 2));
        events.sort_by_key(|e| e.time_ms);
        let o = check(&d, &events, &day_stats(2, 200.0), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let kettle = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        let why = kettle.doubt.as_deref().unwrap_or_default();
        assert!(why.contains("may have run there"), "{why}");
    }

    /// Three steps of a kettle's size on L2, fitting no other appliance,
    /// are too few to move it (four are needed), and the reason says so
    /// rather than naming rivals it does not have.
    #[test]
    fn too_few_steps_elsewhere_are_too_few_to_decide() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{day_stats, H};
        let d = split_phase(vec![on_off("kettle", 0, C64::new(1500.0, 0.0))]);
        let events = vec![
            l2_step(0, 1500.0),
            l2_step(H / 10, -1500.0),
            l2_step(H, 1500.0),
        ];
        let o = check(&d, &events, &day_stats(2, 200.0), 1.0);
        let reason = &o.appliances[0].reason;
        assert!(reason.contains("too few to decide"), "{reason}");
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
            Candidate {
                app: j,
                steps: steps.len(),
                alt: a,
                finding: f,
                mine: steps,
                cover,
                rival: None,
            }
        };
        let pick = |c: Vec<Candidate>| contest(c).map(|x| x.app);
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

    /// A step of `w` watts on L2 alone at `t` (ms), at 1 s over a steady
    /// 200 W on each line at 120 V.
    fn l2_step(t: i64, w: f64) -> crate::audit::events::Event {
        crate::audit::events::Event {
            time_ms: t,
            delta: vec![C64::ZERO, C64::new(w, 0.0)],
            before: vec![C64::new(200.0, 0.0); 2],
            v_before: vec![120.0; 2],
            v_after: vec![120.0; 2],
            se: vec![1.0; 2],
        }
    }

    /// Placement stage: a 1.9 kW dishwasher declared on L1-N, to start once
    /// a day, whose steps show six times on L2-N in two days (three runs) is
    /// on L2-N; forty steps there (twenty runs where two are expected: a
    /// Poisson chance far below 0.1 %) are likelier another load's: not a
    /// move, but a load nobody declared (the size of an entry not seen where
    /// declared, but running beyond that entry's habit, so a finding).
    #[test]
    fn steps_far_beyond_the_declared_habit_are_likelier_another_loads() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::H;
        use crate::audit::events::{ChannelStats, Event};
        let mut dishwasher = on_off("dishwasher", 0, C64::new(1900.0, 0.0));
        dishwasher.habit = Some(StartHabit::any_hour(1.0));
        let d = split_phase(vec![dishwasher]);
        let runs = |n: i64| -> Vec<Event> {
            (0..n)
                .flat_map(|i| [l2_step(i * H, 1900.0), l2_step(i * H + H / 4, -1900.0)])
                .collect()
        };
        let stats = vec![
            ChannelStats {
                rows: 172_800,
                null: 0,
                zero: 0,
                sum_p: 200.0 * 172_800.0,
                negative: vec![[0, 172_800]; 2],
                ..Default::default()
            };
            2
        ];
        let o = check(&d, &runs(3), &stats, 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["dishwasher"], "{:?}", o.possible);
        let o = check(&d, &runs(20), &stats, 1.0);
        assert!(o.appliances[0].reason.contains("likelier another load"));
        let subjects: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(subjects, ["1900 W on L2-N"], "{:?}", o.possible);
        // A program whose 1.1 kW heater goes on and off twice a run (six
        // jumps: its pump's 65 W on and off besides): forty heater steps
        // are ten runs (forty over four heater jumps a run), not seven
        // (forty over all six jumps); ten where two are expected is beyond
        // the habit, seven would not be (Poisson tails 5e-5 and 4.5e-3).
        let mut program = heater_program(0, 65.0, 1100.0, 1, 2);
        program.habit = Some(StartHabit::any_hour(1.0));
        let d = split_phase(vec![program]);
        let heater = |n: i64| -> Vec<Event> {
            (0..n)
                .flat_map(|i| {
                    let t = i * H;
                    [
                        l2_step(t, 1100.0),
                        l2_step(t + H / 8, -1100.0),
                        l2_step(t + H / 4, 1100.0),
                        l2_step(t + 3 * H / 8, -1100.0),
                    ]
                })
                .collect()
        };
        let o = check(&d, &heater(3), &stats, 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["dishwasher"], "{:?}", o.appliances[0].reason);
        let o = check(&d, &heater(10), &stats, 1.0);
        assert!(
            o.appliances[0].reason.contains("likelier another load"),
            "{}",
            o.appliances[0].reason
        );
    }

    /// Placement stage, at 1 s: a 1.5 kW kettle declared on L1-N that
    /// switches on L2-N is moved there on four steps (two runs, as many as
    /// keep an appliance where declared), not on three.
    #[test]
    fn a_move_needs_as_many_steps_as_staying() {
        use crate::audit::check::check;
        use crate::audit::events::Event;
        let d = split_phase(vec![on_off("kettle", 0, C64::new(1500.0, 0.0))]);
        let steps = |n: i64| -> Vec<Event> {
            (0..n)
                .map(|i| l2_step(i * H, if i % 2 == 0 { 1500.0 } else { -1500.0 }))
                .collect()
        };
        let stats = day_stats(2, 200.0);
        let found = |n: i64| -> Vec<String> {
            check(&d, &steps(n), &stats, 1.0)
                .findings
                .iter()
                .map(|f| f.subject.clone())
                .collect()
        };
        assert!(found(3).is_empty(), "{:?}", found(3));
        assert_eq!(found(4), ["kettle"]);
    }

    /// Placement stage, at 1 min: a 1.5 kW kettle declared on L1-N
    /// switches 10 times on L2-N (5 runs, `coarse_runs` steps) and never
    /// where declared, and no two declared appliances make steps of its
    /// size: the move stands whatever the interval. Four runs at 1 min are
    /// only possible (loads switching within one row may have made them).
    #[test]
    fn a_coarse_move_of_many_steps_none_where_declared_is_a_finding() {
        use crate::audit::check::check;
        let d = split_phase(vec![on_off("kettle", 0, C64::new(1500.0, 0.0))]);
        let o = check(&d, &runs_on(2, 1, 1500.0, 5, 0), &day_stats(2, 200.0), 60.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["kettle"], "{:?}", o.possible);
        let o = check(&d, &runs_on(2, 1, 1500.0, 4, 0), &day_stats(2, 200.0), 60.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        let moved = o.possible.iter().find(|f| f.subject == "kettle").unwrap();
        assert!(
            moved.doubt.as_ref().unwrap().contains("per row"),
            "{moved:?}"
        );
    }

    /// Placement stage: a 1 kW kettle declared on L1-N, where 1 kW steps
    /// show five runs, and as many at 740 W and at 1260 W (the sizes just
    /// beside its tolerance: 30 W + 10 % is 13 %, so 1 ∓ 2 · 13 %); twenty
    /// runs of 1 kW on L2-N (40 steps, three times its 10 where declared
    /// and two more). At 10 s its steps where declared keep it there; at
    /// 1 min they are no more than its neighbouring sizes get by chance, so
    /// they neither keep it there nor doubt its move: a finding. With
    /// nothing beside its size where declared, its steps there are beyond
    /// chance at 1 min too, and keep it there.
    #[test]
    fn at_a_coarse_interval_steps_where_declared_count_beyond_chance_only() {
        use crate::audit::check::check;
        let d = split_phase(vec![on_off("kettle", 0, C64::new(1000.0, 0.0))]);
        let events = |neighbours: bool| {
            let mut events = runs_on(2, 1, 1000.0, 20, 0);
            events.extend(runs_on(2, 0, 1000.0, 5, H / 4));
            if neighbours {
                events.extend(runs_on(2, 0, 740.0, 5, H / 2));
                events.extend(runs_on(2, 0, 1260.0, 5, 3 * H / 4));
            }
            events.sort_by_key(|e| e.time_ms);
            events
        };
        let o = check(&d, &events(true), &day_stats(2, 200.0), 10.0);
        assert_eq!(o.appliances[0].verdict, Verdict::AsDeclared);
        assert!(!o.possible.iter().any(|f| f.subject == "kettle"));
        let o = check(&d, &events(true), &day_stats(2, 200.0), 60.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["kettle"], "{:?} {:?}", o.appliances, o.possible);
        let o = check(&d, &events(false), &day_stats(2, 200.0), 60.0);
        assert_eq!(o.appliances[0].verdict, Verdict::AsDeclared);
        assert!(!o.possible.iter().any(|f| f.subject == "kettle"));
    }

    /// At a coarse interval, moves standing on their own steps are only
    /// possible when two appliances or more moved in one placement (two
    /// CTs exchanged would move them all); one moved alone stands, and a
    /// metering finding is not touched.
    #[test]
    fn several_moves_at_a_coarse_interval_are_only_possible() {
        let f = |kind: Kind| Finding {
            kind,
            subject: String::new(),
            message: String::new(),
            confidence: 1.0,
            evidence: json!({}),
            doubt: None,
        };
        let mut fs = vec![f(Kind::WrongLine), f(Kind::ReversedCt)];
        several_moves_doubt(&mut fs, 1, 60.0);
        assert!(fs.iter().all(|f| f.doubt.is_none()));
        several_moves_doubt(&mut fs, 3, 60.0);
        assert!(fs[0].doubt.as_ref().unwrap().contains("3 appliances"));
        assert!(fs[1].doubt.is_none());
    }

    /// A heat pump switched at 0.8 and 1 of 2 kW (the weather's inputs):
    /// ten steps of 1.6 kW and four of 2 kW, nothing else. Its 1.6 kW steps
    /// fall in the window below its tolerance (2 kW ∓ 2 · 11.5 %) but fit it
    /// as declared, so they are its own, not chance: its 14 steps against a
    /// background of none. Counted as background (ten below, and the four
    /// 2 kW steps above, where the scaled 0.8 input is 1968 W), seven a
    /// window, 14 would be within chance (P(X ≥ 14) for a Poisson mean of 7
    /// is 1.3 %).
    #[test]
    fn an_appliances_own_other_sizes_are_no_background() {
        use crate::audit::check::hypothesis::declared_metering;
        let hp = weather_heat_pump();
        let d = split_phase(vec![hp.clone()]);
        let m = declared_metering(&d, &[false, false]);
        let mut events = runs_on(2, 0, 1600.0, 5, 0);
        events.extend(runs_on(2, 0, 2000.0, 2, 10 * H));
        let used: Vec<&Event> = events.iter().collect();
        let cxs: Vec<Ctx> = used.iter().map(|e| Ctx::of(&d, &m, e)).collect();
        let th = &Thresholds::STANDARD;
        assert_eq!(against_background(&d, &m, &used, &cxs, &hp), (14, 0.0));
        assert!(beyond_chance(&d, &m, &used, &cxs, &hp, th));
        assert!(poisson_tail(7.0, 14) > th.coincidence_p);
    }
}
