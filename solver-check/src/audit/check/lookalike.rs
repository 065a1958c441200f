//! Stage 3, undeclared loads hidden behind a declared appliance: a load the
//! size of a declared appliance, on its connection, makes steps that fit
//! that appliance and would be taken for it. One appliance that is off or
//! on at one power cannot start again while it is on, nor draw twice its
//! power: two such starts with no stop between, the channels it draws
//! through rising by twice its step, are two loads (common practice, no
//! source: a load's power does not exceed its nameplate).

use super::finding::{coarse_doubt, Finding, Kind};
use super::fit::{Ctx, Pred};
use super::hypothesis::{wiring_names, Metering};
use super::thresholds::Thresholds;
use super::undeclared::{first, first_local};
use crate::audit::decl::{DeclAppliance, Declared};
use crate::audit::events::Event;
use crate::contract::C64;
use serde_json::json;

/// Two steps further apart than this are not taken as one overlap, ms.
const OVERLAP_WITHIN_MS: i64 = 12 * 3_600_000;

/// How far two starts (or two stops) must take the appliance's channels,
/// in units of its step: twice it, less a tenth of tolerance on each step
/// (the predicted step's relative tolerance) and as much again for other
/// loads' small changes between them.
const TWICE: f64 = 1.6;

/// Appliances of smaller steps are not weighed: a look-alike is a
/// recurring load of 500 W or more, as for the other undeclared loads.
const BIG_W: f64 = 500.0;

/// A change between two steps, along the appliance's start, from which the
/// two are not taken as one overlap: a stop of the appliance that fell
/// among other changes, or another load's change, may be in it.
const QUIET: f64 = 0.3;

/// A step that fits a declared appliance and no other as placed: when,
/// whether it is a start, its real power, the level of the channels the
/// appliance draws through before and after it, along its start (in units
/// of its start), and the largest change along its start among the steps
/// since the appliance's previous one.
#[derive(Clone, Copy, Debug, PartialEq)]
pub(super) struct OwnStep {
    /// When, ms.
    pub t: i64,
    /// A start (its power rising).
    pub start: bool,
    /// Its size in units of the appliance's start (positive).
    pub size: f64,
    /// The channels' level before it, in units of its start.
    pub before: f64,
    /// The channels' level after it, in units of its start.
    pub after: f64,
    /// The largest change along its start among the other steps since the
    /// appliance's previous step, in units of its start.
    pub between: f64,
    /// The changes of about twice its start among those steps: one load
    /// of twice its size switching at once.
    pub twice: Twice,
}

/// Among the other loads' steps between two of an appliance's own, those
/// of about twice its start ([`about_twice`]): whether the first and the
/// last of them rose (None: there was none).
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub(super) struct Twice {
    /// Whether the first such change rose.
    pub first_rose: Option<bool>,
    /// Whether the last such change rose.
    pub last_rose: Option<bool>,
}

impl Twice {
    /// Counts a change `x` along the start, in units of it.
    fn add(&mut self, x: f64) {
        if about_twice(x) {
            self.first_rose.get_or_insert(x > 0.0);
            self.last_rose = Some(x > 0.0);
        }
    }
}

/// A change along an appliance's start, in units of it, that is about
/// twice it (from [`TWICE`] to as far above two): one load of twice its
/// size, or two of its size at once.
fn about_twice(x: f64) -> bool {
    (TWICE..=4.0 - TWICE).contains(&x.abs())
}

/// The second step of each pair of steps of one way, with no other change
/// of a third of its size on its channels between them, that take the
/// channels through twice the step or more: a start while it was already
/// on, or a stop after it had stopped. Not so when the last change of
/// about twice the step before the two stops was a rise, or the first
/// after the two starts (before the appliance's next step; `tail`: the
/// changes after its last one) a fall: a load of twice its size started
/// at once and stopped in two steps, or started in two and stopped at once
/// (a 1.9 kW hair dryer whose lower setting draws what a 950 W coffee
/// maker does, beside that coffee maker).
pub(super) fn overlaps(steps: &[OwnStep], tail: Twice) -> Vec<OwnStep> {
    (0..steps.len().saturating_sub(1))
        .filter(|&i| {
            let (a, b) = (steps[i], steps[i + 1]);
            let span = if a.start {
                b.after - a.before
            } else {
                a.before - b.after
            };
            let staged = if a.start {
                steps.get(i + 2).map_or(tail, |c| c.twice).first_rose == Some(false)
            } else {
                a.twice.last_rose == Some(true)
            };
            a.start == b.start
                && b.t - a.t <= OVERLAP_WITHIN_MS
                && b.between < QUIET
                && span >= TWICE
                && !staged
        })
        .map(|i| steps[i + 1])
        .collect()
}

/// Real part of `v` along the real parts of `r`, in units of `r`.
fn along(v: &[C64], r: &[Option<C64>]) -> Option<f64> {
    let (num, den) = r
        .iter()
        .zip(v)
        .filter_map(|(r, x)| r.map(|r| (x.re * r.re, r.re * r.re)))
        .fold((0.0, 0.0), |(n, d), (a, b)| (n + a, d + b));
    (den > 0.0).then(|| num / den)
}

/// What the look-alike check weighs: the steps, with the appliances as
/// placed.
pub(super) struct LookAlikes<'a> {
    pub d: &'a Declared,
    pub m: &'a Metering,
    pub events: &'a [&'a Event],
    pub cxs: &'a [Ctx],
    pub placed: &'a [DeclAppliance],
    pub interval_s: f64,
    pub th: &'a Thresholds,
}

impl LookAlikes<'_> {
    /// A finding for each declared appliance of one power (off, or on at one
    /// power) seen starting while already on: a load of its size beside it.
    pub fn findings(&self) -> Vec<Finding> {
        let preds: Vec<Pred> = self
            .placed
            .iter()
            .map(|a| Pred::of(self.d, self.m, a))
            .collect();
        (0..self.placed.len())
            .filter(|&j| {
                // Two states, off and on: it cannot draw more than on.
                let a = &self.placed[j];
                a.states.len() == 2 && !a.steps.jumps().is_empty() && a.largest_step_w() >= BIG_W
            })
            .filter_map(|j| {
                let (steps, tail) = self.own_steps(j, &preds);
                let seen = overlaps(&steps, tail);
                (!seen.is_empty()).then(|| self.finding(&self.placed[j], &seen))
            })
            .collect()
    }

    /// The steps that fit appliance `j` and no other appliance as placed,
    /// and the changes of about twice its start after the last of them
    /// ([`OwnStep::twice`]).
    fn own_steps(&self, j: usize, preds: &[Pred]) -> (Vec<OwnStep>, Twice) {
        let (d, m) = (self.d, self.m);
        let Some(r) = preds[j].nom.first() else {
            return (vec![], Twice::default());
        };
        // The start: the jump with its real power rising.
        let sign = if r.iter().flatten().map(|c| c.re).sum::<f64>() < 0.0 {
            -1.0
        } else {
            1.0
        };
        let start: Vec<Option<C64>> = r.iter().map(|c| c.map(|c| c.scale(sign))).collect();
        let mut out = Vec::new();
        let mut between: f64 = 0.0;
        let mut twice = Twice::default();
        for (k, e) in self.events.iter().enumerate() {
            let cx = &self.cxs[k];
            let (Some(step), Some(before)) = (along(&e.delta, &start), along(&e.before, &start))
            else {
                continue;
            };
            if preds[j].dist(d, m, e, cx) > 1.0
                || preds
                    .iter()
                    .enumerate()
                    .any(|(o, p)| o != j && p.dist(d, m, e, cx) <= 1.0)
            {
                between = between.max(step.abs());
                twice.add(step);
                continue;
            }
            out.push(OwnStep {
                t: e.time_ms,
                start: step > 0.0,
                size: step.abs(),
                before,
                after: before + step,
                between,
                twice,
            });
            between = 0.0;
            twice = Twice::default();
        }
        (out, twice)
    }

    /// The finding that a load of the size of `a` runs beside it, from the
    /// steps `seen` that came while it was already on (or already off).
    fn finding(&self, a: &DeclAppliance, seen: &[OwnStep]) -> Finding {
        let n = seen.len();
        // Its real power: the declared step's, scaled as the channels read
        // it (a channel sum would cancel on a CT the wrong way round).
        let p = a.largest_step_w() * seen.iter().map(|s| s.size).sum::<f64>() / n as f64;
        let w = wiring_names(a);
        let times: Vec<i64> = seen.iter().map(|s| s.t).collect();
        let starts: Vec<i64> = seen.iter().filter(|s| s.start).map(|s| s.t).collect();
        // At a coarse interval a lost stop is likelier (another load's
        // change in its row takes it), so more overlaps are needed:
        // `coarse_runs` of them, the count of whole runs a load of its own
        // needs there (a run beside the appliance makes up to two).
        let doubt = if n < self.th.overlap_runs {
            Some(format!("{n} such overlaps only: a stop of {} lost among other loads' changes, then its next start, with another load coming on between, would look the same", a.id))
        } else if n < self.th.coarse_runs {
            coarse_doubt(Kind::UndeclaredLoad, self.interval_s, self.th)
        } else {
            None
        };
        Finding {
            kind: Kind::UndeclaredLoad,
            subject: format!("{p:.0} W on {w}"),
            message: format!("a load of about {p:.0} W on {w}, the size of {} and drawn beside it: {n} times a step of its size came while {} was already on (or stopped after it had stopped), taking {w} through twice its power, which {} alone cannot do; the steps of both are counted as {}'s", a.id, a.id, a.id, a.id),
            confidence: (n as f64 / 5.0).min(1.0),
            evidence: json!({ "overlaps": n, "like": a.id, "p_w": p, "wiring": w, "energy_share": null, "first_overlaps": first(&times), "first_starts_local": first_local(&starts, &self.d.timezone) }),
            doubt,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::check::testkit::{day_stats, H};

    fn step(t: i64, start: bool, before: f64) -> OwnStep {
        let after = if start { before + 1.0 } else { before - 1.0 };
        OwnStep {
            t,
            start,
            size: 1.0,
            before,
            after,
            between: 0.0,
            twice: Twice::default(),
        }
    }

    /// Start, stop, start, stop: one appliance. Start, start (the level
    /// rising to twice its step), stop, stop: two loads, seen twice. A start
    /// after a stop that was lost (the level back at zero before it) is no
    /// overlap; nor two starts 13 h apart.
    #[test]
    fn two_starts_through_twice_the_step_are_two_loads() {
        let one = [
            step(0, true, 0.0),
            step(H, false, 1.0),
            step(2 * H, true, 0.0),
            step(3 * H, false, 1.0),
        ];
        assert!(overlaps(&one, Twice::default()).is_empty());
        let two = [
            step(0, true, 0.0),
            step(H / 10, true, 1.0),
            step(H / 5, false, 2.0),
            step(H / 4, false, 1.0),
        ];
        let seen = overlaps(&two, Twice::default());
        assert_eq!(seen.len(), 2);
        assert!(seen[0].start && !seen[1].start);
        let lost_stop = [step(0, true, 0.0), step(H, true, 0.05)];
        assert!(overlaps(&lost_stop, Twice::default()).is_empty());
        let far = [step(0, true, 0.0), step(13 * H, true, 1.0)];
        assert!(overlaps(&far, Twice::default()).is_empty());
        // Another change of half its size on its channels between the two
        // starts: the stop may have fallen in it.
        let mut busy = [step(0, true, 0.0), step(H, true, 1.0)];
        busy[1].between = 0.5;
        assert!(overlaps(&busy, Twice::default()).is_empty());
        // Two stops after a rise of twice its size: a load of twice it
        // stopping in two steps; two starts, then a fall of twice it before
        // the next step: one starting in two. Neither is an overlap.
        let rose = |first: bool, last: bool| Twice {
            first_rose: Some(first),
            last_rose: Some(last),
        };
        let mut staged_stop = [step(H, false, 2.0), step(H + H / 60, false, 1.0)];
        staged_stop[0].twice = rose(true, true);
        assert!(overlaps(&staged_stop, Twice::default()).is_empty());
        // A load of twice its size that came and went before them hides
        // nothing.
        staged_stop[0].twice = rose(true, false);
        assert_eq!(overlaps(&staged_stop, Twice::default()).len(), 1);
        let mut staged_start = [
            step(0, true, 0.0),
            step(H / 60, true, 1.0),
            step(3 * H, true, 0.0),
        ];
        staged_start[2].twice = rose(false, false);
        assert!(overlaps(&staged_start, Twice::default()).is_empty());
        staged_start[2].twice = rose(true, false);
        assert_eq!(
            overlaps(&staged_start, Twice::default()).len(),
            1,
            "a load of twice its size that came and went after them"
        );
        // The fall after the appliance's last steps counts too.
        assert!(overlaps(&staged_start[..2], rose(false, false)).is_empty());
        // Only changes of about twice its start count, first and last.
        let mut t = Twice::default();
        for x in [0.5, 2.1, 1.0, -1.7, 3.0] {
            t.add(x);
        }
        assert_eq!(t, rose(true, false));
    }

    /// A 1.5 kW heater declared by one power on L1-N, and a left-out load of
    /// its size on the same line that runs four times while the heater is
    /// on (at 1 s): the load is a finding, of the heater's size, on L1-N.
    /// With one such overlap it is only possible; the heater's runs alone
    /// give nothing.
    #[test]
    fn a_load_of_a_declared_appliances_size_beside_it_is_seen_when_they_overlap() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        let d = split_phase(vec![on_off("heater", 0, C64::new(1500.0, 0.0))]);
        let o = check(&d, &heater_with_load(0), &day_stats(2, 500.0), 1.0);
        assert!(
            o.findings.is_empty() && o.possible.is_empty(),
            "{:?}",
            o.findings
        );
        let o = check(&d, &heater_with_load(4), &day_stats(2, 500.0), 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["1500 W on L1-N"], "{:?}", o.possible);
        assert_eq!(
            o.findings[0].evidence["overlaps"], 8,
            "four starts and four stops"
        );
        let o = check(&d, &heater_with_load(1), &day_stats(2, 500.0), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        assert_eq!(o.possible.len(), 1);
    }

    /// The same at 1 min, where another load's change in the row of a stop
    /// takes it: eight overlaps (four runs beside the heater) leave the load
    /// possible; ten (five runs) and sixteen, `coarse_runs` or more, make it
    /// a finding.
    #[test]
    fn at_a_coarse_interval_a_look_alike_needs_as_many_overlaps_as_a_load_needs_runs() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        let d = split_phase(vec![on_off("heater", 0, C64::new(1500.0, 0.0))]);
        let o = check(&d, &heater_with_load(4), &day_stats(2, 500.0), 60.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
        assert!(o.possible.iter().any(|f| f.subject == "1500 W on L1-N"));
        for n in [5, 8] {
            let o = check(&d, &heater_with_load(n), &day_stats(2, 500.0), 60.0);
            let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
            assert_eq!(found, ["1500 W on L1-N"], "{n} runs: {:?}", o.possible);
        }
    }

    /// A 1.5 kW heater on L1-N running 30 min every 3 h, eight times, and
    /// another load of its size starting 10 min into `n` of its runs and
    /// stopping 10 min after it.
    fn heater_with_load(n: i64) -> Vec<Event> {
        let w = C64::new(1500.0, 0.0);
        let mut level = 200.0;
        let mut ev = Vec::new();
        let mut push = |t: i64, dw: f64, ev: &mut Vec<Event>| {
            ev.push(Event {
                time_ms: t,
                delta: vec![w.scale(dw), C64::ZERO],
                before: vec![C64::new(level, 0.0), C64::new(200.0, 0.0)],
                v_before: vec![120.0; 2],
                v_after: vec![120.0; 2],
                se: vec![1.0; 2],
            });
            level += 1500.0 * dw;
        };
        for i in 0..8 {
            let t = i * 3 * H;
            push(t, 1.0, &mut ev);
            if i < n {
                push(t + H / 6, 1.0, &mut ev);
                push(t + H / 2, -1.0, &mut ev);
                push(t + H / 2 + H / 6, -1.0, &mut ev);
            } else {
                push(t + H / 2, -1.0, &mut ev);
            }
        }
        ev
    }
}
