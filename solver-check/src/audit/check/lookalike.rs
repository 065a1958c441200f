//! Stage 3, undeclared loads hidden behind a declared appliance: a load the
//! size of a declared appliance, on its connection, makes steps that fit
//! that appliance and would be taken for it. One appliance that is off or
//! on at one power cannot start again while it is on, nor draw twice its
//! power: two such starts with no stop between, the channels it draws
//! through rising by twice its step, are two loads (common practice, no
//! source: a load's power does not exceed its nameplate). Nor does one
//! appliance run far more often than its declared habit starts it: runs of
//! a declared size beyond what the habits of the appliances of that size
//! start are another load's.

use super::finding::{coarse_doubt, dark_steps_in, Finding, Kind};
use super::fit::{dist, dist_delta, poisson_tail, predicted, shape_of, Ctx, Pred};
use super::hypothesis::{anywhere, wiring_names, Metering};
use super::placement::{alike_sizes, beyond_chance};
use super::thresholds::Thresholds;
use super::undeclared::{first, first_local, start_stop_pairs};
use crate::audit::decl::{DeclAppliance, Declared, Inverter, Jump, StartHabit};
use crate::audit::events::Event;
use crate::contract::C64;
use crate::contract::{line_name, Wiring};
use serde_json::json;

/// Two steps further apart than this are not taken as one overlap, ms.
const OVERLAP_WITHIN_MS: i64 = 12 * 3_600_000;

/// How far two starts (or two stops) must take the appliance's channels,
/// in units of its step: twice it, less a tenth of tolerance on each step
/// (the predicted step's relative tolerance) and as much again for other
/// loads' small changes between them.
const TWICE: f64 = 1.6;

/// The longest span of steps (ms) the habits are weighed over, hour by
/// hour: twenty years.
const MAX_SPAN_MS: i64 = 20 * 366 * 86_400_000;

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
    /// Hours of rows.
    pub hours: f64,
    pub th: &'a Thresholds,
}

/// A step size a declared appliance makes, as the channels read it.
struct Size {
    /// The appliance, among those placed.
    app: usize,
    /// Its reading.
    reading: Vec<Option<C64>>,
    /// Its real power, W.
    p_w: f64,
    /// The connections whose draws make it (a fan running on both sides of
    /// a heater's jump does not).
    wiring: String,
    /// The steps of this size one run makes.
    per_run: usize,
}

/// The starts the declared habits give a size in the rows' span: those of
/// the appliances that make it, and (at a coarse interval) those of the
/// appliances that could make it elsewhere.
#[derive(Clone, Copy)]
struct Starts {
    habits: f64,
    elsewhere: f64,
}

/// The steps of one size, their starts (ms) and the runs they make at
/// least.
struct SizeRuns<'e> {
    steps: Vec<&'e Event>,
    on: Vec<i64>,
    runs: usize,
}

/// The connections of appliance `a` whose draws change by a fifth of the
/// largest change or more in `jump` (as `wiring_names` writes them).
fn jump_wiring(a: &DeclAppliance, (from, to, kt, kf): Jump) -> String {
    let mut change: Vec<(Wiring, f64)> = Vec::new();
    let draws = |k: usize, scale: f64| {
        a.states
            .get(k)
            .into_iter()
            .flatten()
            .map(move |x| (x.wiring, scale * x.s.re))
    };
    for (w, p) in draws(to, kt).chain(draws(from, -kf)) {
        match change.iter_mut().find(|(x, _)| *x == w) {
            Some((_, sum)) => *sum += p,
            None => change.push((w, p)),
        }
    }
    let most = change.iter().map(|(_, p)| p.abs()).fold(0.0, f64::max);
    let names: Vec<String> = change
        .iter()
        .filter(|(_, p)| p.abs() >= 0.2 * most)
        .map(|(w, _)| w.name())
        .collect();
    if names.is_empty() {
        wiring_names(a)
    } else {
        names.join(" + ")
    }
}

/// The starts habit `h` makes from `from` to `to` (UTC ms) in the hours
/// `keep` keeps (each hour judged at its middle), local hours in zone `tz`.
fn habit_starts(
    h: &StartHabit,
    from: i64,
    to: i64,
    tz: &jiff::tz::TimeZone,
    keep: impl Fn(i64) -> bool,
) -> f64 {
    const HOUR: i64 = 3_600_000;
    let mut sum = 0.0;
    let mut t = from;
    while t < to {
        let len = HOUR.min(to - t);
        let mid = t + len / 2;
        if keep(mid) {
            let hour = jiff::Timestamp::from_millisecond(mid)
                .map_or(0, |x| x.to_zoned(tz.clone()).hour() as usize);
            sum += h.per_day * h.hour_share[hour.min(23)] * len as f64 / HOUR as f64;
        }
        t += len;
    }
    sum
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
        let mut out: Vec<Finding> = (0..self.placed.len())
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
            .collect();
        out.extend(self.beyond_habits());
        out
    }

    /// Loads hidden behind declared appliances of their size by how often
    /// that size switches: the steps of one size (the declared jumps within
    /// the wide tolerance of each other, on the same channels, [`alike_sizes`])
    /// make more runs seen whole than the habits of the appliances that make
    /// it start, beyond a Poisson chance of `coincidence_p` and
    /// `habit_margin` times over. Sizes an appliance without a habit makes
    /// (a thermostat, a cycle, a short entry), or a wandering one may make,
    /// are not bounded. A run is a start and the next stop of its size, as
    /// for an undeclared load: several loads starting in one row (a
    /// thermostat's setback ending) and an appliance's step between two of
    /// its states make steps of a size, not runs of it. Where a PV array's
    /// changes have the steps' shape, only the dark hours count, steps and
    /// habits alike: in daylight it changes by any amount.
    fn beyond_habits(&self) -> Vec<Finding> {
        let sizes = self.sizes();
        let readings: Vec<Vec<Option<C64>>> = sizes.iter().map(|s| s.reading.clone()).collect();
        let group = alike_sizes(&readings);
        let groups = group.iter().max().map_or(0, |g| g + 1);
        (0..groups)
            .filter_map(|g| {
                let of = |inside: bool| -> Vec<&Size> {
                    sizes
                        .iter()
                        .zip(&group)
                        .filter(|(_, k)| (**k == g) == inside)
                        .map(|(s, _)| s)
                        .collect()
                };
                self.beyond_habit(&of(true), &of(false))
            })
            .collect()
    }

    /// The step sizes of 500 W or more each placed appliance makes, as the
    /// channels read them, with how many of each one run makes.
    fn sizes(&self) -> Vec<Size> {
        let (d, m) = (self.d, self.m);
        let mut out = Vec::new();
        for (app, a) in self.placed.iter().enumerate() {
            let per_run = d.jumps_per_step(a);
            for ((jump, sig), per_run) in d.distinct_jumps(a).into_iter().zip(per_run) {
                // Each size as a start (its real power rising), whichever
                // way its first jump goes.
                let total = sig.iter().map(|c| c.re).sum::<f64>();
                let sign = if total < 0.0 { -1.0 } else { 1.0 };
                let start: Vec<C64> = sig.iter().map(|c| c.scale(sign)).collect();
                let p_w = total.abs();
                if p_w >= BIG_W {
                    out.push(Size {
                        app,
                        reading: m.read(d, &start),
                        p_w,
                        wiring: jump_wiring(a, jump),
                        per_run,
                    });
                }
            }
        }
        out
    }

    /// Whether a wandering appliance may make steps of size `s`: one whose
    /// changes read on the same channels, as large or larger on the channel
    /// that reads most (within a fifth).
    fn wanders_to(&self, s: &Size) -> bool {
        let peak = |r: &[Option<C64>]| r.iter().flatten().map(|c| c.abs()).fold(0.0, f64::max);
        let strong = |r: &[Option<C64>]| -> Vec<bool> {
            let top = peak(r);
            r.iter()
                .map(|c| c.is_some_and(|c| c.abs() >= 0.2 * top))
                .collect()
        };
        let (mine, size) = (strong(&s.reading), peak(&s.reading));
        self.placed
            .iter()
            .filter_map(|a| shape_of(self.d, self.m, a))
            .any(|r| strong(&r) == mine && peak(&r) >= 0.8 * size)
    }

    /// The declared PV arrays whose changes, at the size of `s`, read as
    /// its steps do (within the tolerance steps are fitted by).
    fn sun_shaped(&self, s: &Size) -> Vec<&Inverter> {
        let (d, m) = (self.d, self.m);
        let units = d.supply.kind.units();
        d.generation
            .iter()
            .filter(|g| !g.follows_home)
            .filter(|g| {
                let mut split = vec![C64::ZERO; d.supply.lines()];
                g.wiring
                    .add_line_split(&units, C64::new(s.p_w, 0.0), &mut split);
                let r: Vec<C64> = m
                    .read(d, &split)
                    .into_iter()
                    .map(|c| c.unwrap_or(C64::ZERO))
                    .collect();
                dist_delta(&r, &s.reading) <= 1.0
            })
            .collect()
    }

    /// The finding for one group of alike sizes (`members`; `others`, the
    /// other sizes), if its runs go beyond the habits that start it.
    fn beyond_habit(&self, members: &[&Size], others: &[&Size]) -> Option<Finding> {
        let first_m = *members.first()?;
        let mut apps: Vec<usize> = members.iter().map(|s| s.app).collect();
        apps.sort_unstable();
        apps.dedup();
        let habits: Vec<&StartHabit> = apps
            .iter()
            .map(|&a| self.placed[a].habit.as_ref())
            .collect::<Option<_>>()?;
        if members.iter().any(|s| self.wanders_to(s)) {
            return None;
        }
        let sun = self.sun_shaped(first_m);
        let dark = |t: i64| sun.iter().all(|g| g.dark_at(t));
        let seen = self.runs_of_size(members, others, &apps, dark);
        // The rows' span, from the first step (the stage is not told where
        // the rows start), and to the last step at least (rows may be
        // missing in between).
        let from = self.events.first()?.time_ms;
        let to = (from + (self.hours * 3_600_000.0) as i64).max(self.events.last()?.time_ms);
        // No export spans decades: times that far apart are not weighed
        // hour by hour.
        if to - from > MAX_SPAN_MS {
            return None;
        }
        let tz = jiff::tz::TimeZone::get(&self.d.timezone).unwrap_or(jiff::tz::TimeZone::UTC);
        let expected: f64 = habits
            .iter()
            .map(|h| habit_starts(h, from, to, &tz, dark))
            .sum();
        let runs = seen.runs;
        // A habit is an assumption: one start at least is allowed for,
        // however few it gives (one declared for the morning, counted in the
        // dark hours of a summer's PV, gives none).
        let beyond = |expected: f64| {
            let allowed = expected.max(1.0);
            runs >= self.th.overlap_runs
                && poisson_tail(allowed, runs) < self.th.coincidence_p
                && runs as f64 >= self.th.habit_margin * allowed
        };
        if !beyond(expected) {
            return None;
        }
        // At a coarse interval a step may be two loads' that switched
        // within one row: the load is possible only, unless its size runs
        // as one load does (`coarse_runs` runs) and beyond the habits of
        // the appliances that could make it elsewhere too, each with one
        // ([`Self::made_elsewhere`]).
        let coarse = self.th.coarse(self.interval_s);
        let elsewhere: Option<f64> = if coarse && runs >= self.th.coarse_runs {
            self.made_elsewhere(first_m, &apps)
                .iter()
                .map(|a| {
                    a.habit
                        .as_ref()
                        .map(|h| habit_starts(h, from, to, &tz, dark))
                })
                .sum()
        } else {
            None
        };
        let lifted = elsewhere.filter(|more| beyond(expected + more));
        let starts = Starts {
            habits: expected,
            elsewhere: lifted.unwrap_or(0.0),
        };
        let mut f = self.habit_finding(first_m, &apps, &seen, starts, !sun.is_empty());
        if coarse && lifted.is_none() {
            f.doubt = f
                .doubt
                .or_else(|| coarse_doubt(Kind::UndeclaredLoad, self.interval_s, self.th));
        }
        Some(f)
    }

    /// The steps of a group of alike sizes (`members`, of appliances
    /// `apps`) that fit no other size (`others`), at moments `keep` keeps,
    /// with their starts and the runs they make at least.
    fn runs_of_size(
        &self,
        members: &[&Size],
        others: &[&Size],
        apps: &[usize],
        keep: impl Fn(i64) -> bool,
    ) -> SizeRuns<'_> {
        let reading = &members[0].reading;
        let steps: Vec<&Event> = self
            .events
            .iter()
            .copied()
            .filter(|e| {
                members.iter().any(|s| dist(e, &s.reading) <= 1.0)
                    && !others.iter().any(|s| dist(e, &s.reading) <= 1.0)
                    && keep(e.time_ms)
            })
            .collect();
        let (mut on, mut off) = (Vec::new(), Vec::new());
        for e in &steps {
            if along(&e.delta, reading).is_some_and(|x| x > 0.0) {
                on.push(e.time_ms);
            } else {
                off.push(e.time_ms);
            }
        }
        // A run of an appliance makes at most half its steps of the size,
        // rounded up, as runs of it.
        let per_run = apps
            .iter()
            .map(|&a| {
                members
                    .iter()
                    .filter(|s| s.app == a)
                    .map(|s| s.per_run)
                    .sum::<usize>()
                    .div_ceil(2)
            })
            .max()
            .unwrap_or(1)
            .max(1);
        let runs = start_stop_pairs(&on, &off).len().div_ceil(per_run);
        SizeRuns { steps, on, runs }
    }

    /// The finding of a load of the size of `size` (of appliances `apps`)
    /// whose runs `seen` go beyond the `starts` of the habits that could
    /// make them (`dark_only`: counted in the dark hours of a PV array).
    fn habit_finding(
        &self,
        size: &Size,
        apps: &[usize],
        seen: &SizeRuns,
        starts: Starts,
        dark_only: bool,
    ) -> Finding {
        let expected = starts.habits;
        let along_size = seen
            .steps
            .iter()
            .filter_map(|e| along(&e.delta, &size.reading))
            .map(f64::abs)
            .sum::<f64>()
            / seen.steps.len().max(1) as f64;
        let p = size.p_w * along_size;
        let (w, runs) = (size.wiring.clone(), seen.runs);
        let names: Vec<&str> = apps.iter().map(|&a| self.placed[a].id.as_str()).collect();
        let like = names.join(", ");
        let habits_start = if names.len() == 1 {
            format!("{like}'s declared habit starts it")
        } else {
            format!("the declared habits of {like} start them")
        };
        let hours = if dark_only {
            let pv: Vec<&str> = self
                .d
                .generation
                .iter()
                .filter(|g| !g.follows_home)
                .map(|g| g.id.as_str())
                .collect();
            format!(
                "the dark hours of {:.0} h (in daylight {} changes by any amount)",
                self.hours,
                pv.join(", ")
            )
        } else {
            format!("{:.0} h", self.hours)
        };
        let times = seen.steps.iter().map(|e| e.time_ms);
        let also = if starts.elsewhere > 0.0 {
            format!(
                " (and the habits of appliances that could make the size elsewhere about {:.1})",
                starts.elsewhere
            )
        } else {
            String::new()
        };
        let all = expected + starts.elsewhere;
        Finding {
            kind: Kind::UndeclaredLoad,
            subject: format!("{p:.0} W on {w}"),
            message: format!("a load of about {p:.0} W on {w}, the size of {like}: steps of that size make {runs} runs in {hours}, where {habits_start} about {expected:.1} times{also}; the runs beyond are another load's, counted as {like}'s"),
            // The share of the runs beyond the habits (one start allowed
            // for at least), and no more than a cluster of as many runs seen
            // whole gets (a tenth each).
            confidence: (1.0 - all.max(1.0) / runs.max(1) as f64).min(runs as f64 / 10.0),
            evidence: json!({ "runs": runs, "runs_expected": expected, "runs_expected_elsewhere": starts.elsewhere, "like": names, "p_w": p, "wiring": w, "energy_share": null, "first_starts": first(&seen.on), "first_starts_local": first_local(&seen.on, &self.d.timezone), "dark_steps": dark_steps_in(self.d, &w, times) }),
            doubt: self.unread_doubt(),
        }
    }

    /// The appliances other than `apps` (as placed) that make steps of
    /// `size` (within twice the tolerance) as placed or as declared, or
    /// would on another connection they could be on, unless they show
    /// where placed beyond chance ([`beyond_chance`]): one declared on the
    /// wrong connection, whose steps at a coarse interval were not placed
    /// (its few steps as declared may be composites), or one moved away
    /// from where declared by a load of its size there, may make the runs
    /// beyond the habits.
    fn made_elsewhere(&self, size: &Size, apps: &[usize]) -> Vec<&DeclAppliance> {
        let v: Vec<C64> = size
            .reading
            .iter()
            .map(|c| c.unwrap_or(C64::ZERO))
            .collect();
        self.placed
            .iter()
            .zip(&self.d.appliances)
            .enumerate()
            .filter(|(j, _)| !apps.contains(j))
            .filter(|(_, (a, b))| {
                let seen = beyond_chance(self.d, self.m, self.events, self.cxs, a, self.th);
                [*a, *b]
                    .into_iter()
                    .flat_map(|x| {
                        if seen {
                            vec![x.clone()]
                        } else {
                            anywhere(self.d, x)
                        }
                    })
                    .flat_map(|x| predicted(self.d, self.m, &x))
                    .any(|r| dist_delta(&v, &r) <= 2.0)
            })
            .map(|(_, (a, _))| a)
            .collect()
    }

    /// Why steps of a size may come from loads of other sizes, where a
    /// channel reads nothing (no CT): a line-to-line load through its
    /// conductor shows as a part of its power on the other lines alone.
    fn unread_doubt(&self) -> Option<String> {
        let c = self.m.absent.iter().position(|a| *a)?;
        Some(format!("channel {} reads nothing, so a line-to-line load through its conductor shows as a part of its power on the other lines, with steps that may have this size", line_name(c)))
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

    /// A 1.5 kW kettle on L1-N declared to start twice a day (any hour)
    /// and a load of its size running 10 min every 90 min for 45 h, 30
    /// runs, never beside it, in two days of rows: 4 starts are expected,
    /// and 30 runs are far beyond (Poisson P(X >= 30) for a mean of 4 is
    /// 9.1e-17, scipy.stats.poisson.sf(29, 4); seven times the starts): a
    /// finding, once, not also a cluster of its own. Declared to start six
    /// a day (12 expected: P = 8.9e-6, scipy.stats.poisson.sf(29, 12),
    /// beyond chance, but 30 runs are within three times 12), or with no
    /// habit (a thermostat's), the kettle accounts for them.
    #[test]
    fn runs_far_beyond_the_declared_habit_are_another_loads() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::StartHabit;
        let kettle = |habit: Option<f64>| {
            let mut a = on_off("kettle", 0, C64::new(1500.0, 0.0));
            a.habit = habit.map(StartHabit::any_hour);
            split_phase(vec![a])
        };
        let ev = runs_of_1500_w(30, 0.0);
        let stats = two_days();
        let o = check(&kettle(Some(2.0)), &ev, &stats, 1.0);
        let found: Vec<&str> = o.findings.iter().map(|f| f.subject.as_str()).collect();
        assert_eq!(found, ["1500 W on L1-N"], "{:?}", o.possible);
        let e = &o.findings[0].evidence;
        assert_eq!(e["runs"], 30);
        let expected = e["runs_expected"].as_f64().unwrap();
        assert!((expected - 4.0).abs() < 1e-9, "{expected}");
        for habit in [Some(6.0), None] {
            let o = check(&kettle(habit), &ev, &stats, 1.0);
            assert!(o.findings.is_empty(), "{habit:?}: {:?}", o.findings);
        }
        // At six a day it is the margin that refuses: with none, a finding.
        let no_margin = crate::audit::check::Thresholds {
            habit_margin: 1.0,
            ..crate::audit::check::Thresholds::STANDARD
        };
        let o = crate::audit::check::check_with(&kettle(Some(6.0)), &ev, &stats, 1.0, &no_margin);
        assert_eq!(o.findings.len(), 1, "{:?}", o.possible);
    }

    /// The same 30 runs where a PV array on L1-N changes by any amount
    /// while its sun is up (here 06:00 to 18:00 UTC): the runs in daylight
    /// do not count, nor do the kettle's habitual starts then; those in the
    /// dark are still far beyond (15 of 30 runs). A PV array across L1-L2
    /// reads on both lines, not as an L1-N step: every run counts.
    #[test]
    fn where_a_pv_array_makes_steps_of_the_size_only_the_dark_hours_count() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::{Inverter, StartHabit, SunUp};
        use crate::contract::Wiring;
        use std::sync::Arc;
        let home = |pv: Wiring| {
            let mut a = on_off("kettle", 0, C64::new(1500.0, 0.0));
            a.habit = Some(StartHabit::any_hour(2.0));
            let mut d = split_phase(vec![a]);
            let mut g = Inverter::new("pv", pv, false);
            g.sun_up = Some(SunUp(Arc::new(|ms| (6..18).contains(&((ms / H) % 24)))));
            d.generation.push(g);
            d
        };
        let ev = runs_of_1500_w(30, 0.0);
        let o = check(&home(Wiring::LineNeutral(0)), &ev, &two_days(), 1.0);
        let runs: Vec<u64> = o
            .findings
            .iter()
            .filter_map(|f| f.evidence["runs"].as_u64())
            .collect();
        let dark = ev
            .iter()
            .filter(|e| e.delta[0].re > 0.0 && !(6..18).contains(&((e.time_ms / H) % 24)))
            .count() as u64;
        assert_eq!(runs, [dark], "{:?}", o.findings);
        // The kettle's habit in the dark: 24 of the 48 h, 2 starts.
        let expected = o.findings[0].evidence["runs_expected"].as_f64();
        assert!(
            expected.is_some_and(|x| (x - 2.0).abs() < 1e-9),
            "{expected:?}"
        );
        let o = check(&home(Wiring::LineLine(0, 1)), &ev, &two_days(), 1.0);
        let runs: Vec<u64> = o
            .findings
            .iter()
            .filter_map(|f| f.evidence["runs"].as_u64())
            .collect();
        assert_eq!(runs, [30], "{:?}", o.findings);
    }

    /// A load beside a declared appliance makes both a cluster and runs
    /// beyond the appliance's habit: one finding of the two.
    #[test]
    fn a_hidden_load_seen_two_ways_is_one_finding() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::StartHabit;
        let mut a = on_off("kettle", 0, C64::new(1500.0, 0.0));
        a.habit = Some(StartHabit::any_hour(1.0));
        let d = split_phase(vec![a]);
        // 1650 W runs: beyond the fit tolerance of 1500 W for some steps
        // (a cluster), within the wide one (alike sizes) for others.
        let ev = runs_of_1500_w(30, 150.0);
        let o = check(&d, &ev, &two_days(), 1.0);
        let all = crate::audit::check::testkit::listed(&o);
        assert_eq!(all.len(), 1, "{all:?}");
    }

    /// The same 30 runs where channel l2 reads nothing (no CT): a
    /// line-to-line load shows as part of its power on L1 alone, so the
    /// load is only possible, saying why.
    #[test]
    fn with_a_channel_unread_a_hidden_load_is_only_possible() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::StartHabit;
        let mut a = on_off("kettle", 0, C64::new(1500.0, 0.0));
        a.habit = Some(StartHabit::any_hour(2.0));
        let d = split_phase(vec![a]);
        let mut stats = two_days();
        stats[1].null = stats[1].rows;
        stats[1].sum_p = 0.0;
        let ev: Vec<Event> = runs_of_1500_w(30, 0.0)
            .into_iter()
            .filter(|e| e.delta[1].re == 0.0)
            .collect();
        let o = check(&d, &ev, &stats, 1.0);
        let hidden: Vec<&Finding> = o
            .possible
            .iter()
            .filter(|f| f.evidence["runs"].as_u64().is_some())
            .collect();
        assert_eq!(hidden.len(), 1, "{:?} {:?}", o.findings, o.possible);
        let why = hidden[0].doubt.as_deref().unwrap_or("");
        assert!(why.contains("channel l2 reads nothing"), "{why}");
    }

    /// The same 30 runs beside a declared charger on L1-N whose power
    /// wanders up to 1.9 kW: its changes may be of the kettle's size, so
    /// the size is not bounded by the kettle's habit; a charger on L2-N
    /// changes nothing on L1 and bounds nothing.
    #[test]
    fn a_wandering_appliance_may_make_any_size_on_its_channels() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::{StartHabit, Steps};
        let home = |line: usize| {
            let mut kettle = on_off("kettle", 0, C64::new(1500.0, 0.0));
            kettle.habit = Some(StartHabit::any_hour(2.0));
            let mut charger = on_off("charger", line, C64::new(1900.0, 0.0));
            charger.steps = Steps::Wanders {
                state: 1,
                max: 1.0,
                jumps: vec![],
            };
            split_phase(vec![kettle, charger])
        };
        let ev = runs_of_1500_w(30, 0.0);
        let hidden = |line: usize| {
            let o = check(&home(line), &ev, &two_days(), 1.0);
            o.findings
                .iter()
                .chain(&o.possible)
                .filter(|f| f.evidence["runs"].as_u64().is_some())
                .count()
        };
        assert_eq!(hidden(0), 0);
        assert_eq!(hidden(1), 1);
    }

    /// A kettle and a dishwasher whose 1.5 kW heater goes on and off twice
    /// a wash, on L1-N, each declared to start once a day: steps of 1.5 kW
    /// are theirs together, a wash making up to two runs of that size. 30
    /// runs in two days are at least 15 of theirs where 4 are expected: a
    /// finding naming both; 20 runs (10 of theirs, under three times 4) are
    /// not.
    #[test]
    fn a_size_several_appliances_make_is_bounded_by_their_habits_together() {
        use crate::audit::check::check;
        use crate::audit::check::testkit::{heater_program, on_off, split_phase};
        use crate::audit::decl::StartHabit;
        let mut kettle = on_off("kettle", 0, C64::new(1500.0, 0.0));
        kettle.habit = Some(StartHabit::any_hour(1.0));
        let mut program = heater_program(0, 65.0, 1500.0, 1, 2);
        program.habit = Some(StartHabit::any_hour(1.0));
        let d = split_phase(vec![kettle, program]);
        let o = check(&d, &runs_of_1500_w(30, 0.0), &two_days(), 1.0);
        let like: Vec<&serde_json::Value> =
            o.findings.iter().map(|f| &f.evidence["like"]).collect();
        assert_eq!(like, [&json!(["kettle", "dishwasher"])], "{:?}", o.possible);
        assert_eq!(o.findings[0].evidence["runs"], 15);
        let o = check(&d, &runs_of_1500_w(20, 0.0), &two_days(), 1.0);
        assert!(o.findings.is_empty(), "{:?}", o.findings);
    }

    /// The 30 runs beyond a kettle's habit of twice a day at 1 min per
    /// row: 30 runs, `coarse_runs` or more, are a finding. Beside a 1.5 kW
    /// heater declared on L2-N that switched there once, no more than
    /// chance, it may be the heater's, on L1-N: weighed with the heater's
    /// habit, once a day (2 more starts expected, 30 runs against 6), still
    /// a finding; with five a day (10 more), 30 runs are within three times
    /// 14, and with no habit nothing bounds the heater: possible only. With
    /// `coarse_runs` raised to 31, the 30 runs are fewer than one load
    /// shows at this interval: possible only. A heater seen on L2 beyond
    /// chance (twelve runs) is there, and bounds nothing on L1.
    #[test]
    fn at_a_coarse_interval_runs_beyond_habits_weigh_what_could_make_them_elsewhere() {
        use crate::audit::check::testkit::{on_off, split_phase};
        use crate::audit::decl::StartHabit;
        let home = |heater: Option<Option<f64>>| {
            let mut kettle = on_off("kettle", 0, C64::new(1500.0, 0.0));
            kettle.habit = Some(StartHabit::any_hour(2.0));
            let mut all = vec![kettle];
            if let Some(habit) = heater {
                let mut h = on_off("heater", 1, C64::new(1500.0, 0.0));
                h.habit = habit.map(StartHabit::any_hour);
                all.push(h);
            }
            split_phase(all)
        };
        // The heater's runs on L2, 10 min each, between the load's.
        let events = |heater_runs: i64| {
            let mut ev = runs_of_1500_w(30, 0.0);
            let w = C64::new(1500.0, 0.0);
            for i in 0..heater_runs {
                let t = 40 * H - i * 3 * H / 2 + 3 * H / 4;
                for (t, s) in [(t, w), (t + H / 6, -w)] {
                    ev.push(Event {
                        time_ms: t,
                        delta: vec![C64::ZERO, s],
                        before: vec![C64::new(200.0, 0.0); 2],
                        v_before: vec![120.0; 2],
                        v_after: vec![120.0; 2],
                        se: vec![1.0; 2],
                    });
                }
            }
            ev.sort_by_key(|e| e.time_ms);
            ev
        };
        let mut stats = two_days();
        for s in stats.iter_mut() {
            s.rows /= 60;
            s.negative = vec![[0, s.rows]; 2];
        }
        let ev = events(1);
        let hidden_in = |ev: &[Event], d: &Declared, th: &Thresholds| {
            let o = crate::audit::check::check_with(d, ev, &stats, 60.0, th);
            let runs = |v: &[Finding]| {
                v.iter()
                    .filter(|f| f.evidence["runs"].as_u64().is_some())
                    .count()
            };
            (runs(&o.findings), runs(&o.possible))
        };
        let hidden = |d: &Declared, th: &Thresholds| hidden_in(&ev, d, th);
        let th = Thresholds::STANDARD;
        assert_eq!(hidden(&home(None), &th), (1, 0));
        assert_eq!(hidden(&home(Some(Some(1.0))), &th), (1, 0));
        assert_eq!(hidden(&home(Some(Some(5.0))), &th), (0, 1));
        assert_eq!(hidden(&home(Some(None)), &th), (0, 1));
        let more_runs = Thresholds {
            coarse_runs: 31,
            ..th
        };
        assert_eq!(hidden(&home(None), &more_runs), (0, 1));
        // Twelve runs of the heater on L2 show it there beyond chance: it
        // makes L1's size nowhere it is placed or declared, habit or none.
        assert_eq!(hidden_in(&events(12), &home(Some(None)), &th), (1, 0));
    }

    /// The element jump of a range whose fan runs on both sides of it is
    /// the element's connection alone; a jump that starts the fan too is
    /// both.
    #[test]
    fn a_jump_is_named_by_the_draws_that_change() {
        use crate::audit::decl::{DeclDraw, Steps};
        use crate::contract::{Wiring, Zip};
        let draw = |wiring, p: f64| DeclDraw {
            wiring,
            s: C64::new(p, 0.0),
            zip_p: Zip::POWER,
            zip_q: Zip::POWER,
            rated_v: None,
        };
        let (ll, ln) = (Wiring::LineLine(0, 1), Wiring::LineNeutral(0));
        let range = DeclAppliance {
            id: "range".into(),
            label: "range".into(),
            states: vec![
                vec![],
                vec![draw(ln, 35.0)],
                vec![draw(ll, 3000.0), draw(ln, 35.0)],
                vec![draw(ll, 2100.0)],
            ],
            steps: Steps::Jumps(vec![]),
            habit: None,
        };
        assert_eq!(jump_wiring(&range, (1, 2, 1.0, 1.0)), "L1-L2");
        assert_eq!(jump_wiring(&range, (0, 2, 1.0, 1.0)), "L1-L2");
        assert_eq!(jump_wiring(&range, (3, 2, 1.0, 1.0)), "L1-L2");
        let big_fan = DeclAppliance {
            states: vec![vec![], vec![draw(ll, 3000.0), draw(ln, 900.0)]],
            ..range
        };
        assert_eq!(jump_wiring(&big_fan, (0, 1, 1.0, 1.0)), "L1-L2 + L1-N");
    }

    /// Two days of 1 s rows on two channels, for the metering checks.
    fn two_days() -> Vec<crate::audit::events::ChannelStats> {
        let mut stats = day_stats(2, 500.0);
        for s in stats.iter_mut() {
            s.rows *= 2;
            s.sum_p *= 2.0;
            s.negative = vec![[0, s.rows]; 2];
        }
        stats
    }

    /// `n` runs of a load of 1500 W (plus `extra_w`) on L1-N, 10 min each,
    /// one every 90 min, and a 300 W change on L2 between them.
    fn runs_of_1500_w(n: i64, extra_w: f64) -> Vec<Event> {
        let w = C64::new(1500.0 + extra_w, 0.0);
        let mut ev = Vec::new();
        let step = |t: i64, l1: C64, l2: C64, before: f64| Event {
            time_ms: t,
            delta: vec![l1, l2],
            before: vec![C64::new(before, 0.0), C64::new(200.0, 0.0)],
            v_before: vec![120.0; 2],
            v_after: vec![120.0; 2],
            se: vec![1.0; 2],
        };
        for i in 0..n {
            let t = i * 3 * H / 2;
            ev.push(step(t, w, C64::ZERO, 200.0));
            ev.push(step(t + H / 6, -w, C64::ZERO, 200.0 + w.re));
            let other = C64::new(if i % 2 == 0 { 300.0 } else { -300.0 }, 0.0);
            ev.push(step(t + H / 2, C64::ZERO, other, 200.0));
        }
        ev
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
