//! Behaviour: from an appliance's description to its [`Timeline`], the
//! event-driven list of (start, end, state, scale) segments over the run.
//!
//! Each behaviour kind is one file with one `generate` function; `timeline`
//! below is its registration.

mod cycle;
pub mod dark;
pub mod dist;
pub mod habit;
mod markov;
mod modulating;
mod program;
pub mod solar;
mod steady;
pub(crate) mod storage;
pub mod window;

use crate::rng::stream;
use crate::scenario::{Appliance, Behaviour};

/// A run of steps in one state. Steps are counted from the start of the run.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Segment {
    /// First step of the segment.
    pub start: u64,
    /// The step after its last (segments are half-open: `start..end`).
    pub end: u64,
    /// Index of the state in the appliance's `states`.
    pub state: u16,
    /// Multiplies every draw of the state (jitter, modulation, taper).
    pub scale: f32,
}

/// Contiguous segments covering steps `0..steps` of the run.
#[derive(Clone, Debug, Default)]
pub struct Timeline {
    /// The segments in order, each starting where the previous ends.
    pub segments: Vec<Segment>,
    /// A store's state of charge (fraction) at each segment's start and its
    /// change per step; empty for everything else.
    pub level: Vec<(f64, f64)>,
}

impl Timeline {
    /// The state of charge at step `t` within segment `i` (a store only).
    pub fn level_at(&self, i: usize, t: u64) -> Option<f64> {
        let (soc, per_step) = *self.level.get(i)?;
        Some(soc + per_step * (t - self.segments[i].start) as f64)
    }

    /// Steps `from .. from + steps` of the timeline as a timeline of their
    /// own (step `from` its step 0); the first segment is held before the
    /// timeline starts and the last after it ends.
    pub fn slice(&self, from: i64, steps: u64) -> Timeline {
        let to = from + steps as i64;
        let first = self.segments.partition_point(|g| (g.end as i64) <= from);
        let last = self.segments.partition_point(|g| (g.start as i64) < to);
        let last = last.max(first + 1).min(self.segments.len());
        let first = first.min(last.saturating_sub(1));
        let mut out = Timeline::default();
        for i in first..last {
            let g = self.segments[i];
            let a = if i == first { from } else { g.start as i64 };
            let b = if i + 1 == last { to } else { g.end as i64 };
            out.segments.push(Segment {
                start: (a - from) as u64,
                end: (b - from) as u64,
                ..g
            });
            if let Some(&(_, per_step)) = self.level.get(i) {
                let at = self.level_at(i, a.max(g.start as i64) as u64);
                out.level.push((at.unwrap_or(0.0), per_step));
            }
        }
        out
    }
}

/// What a behaviour needs to know of the run, in steps.
pub struct Clock<'a> {
    /// Steps in the run.
    pub steps: u64,
    /// Length of a step, s.
    pub step_s: f64,
    /// The run's start, ms since 1970-01-01 UTC.
    pub start_utc_ms: i64,
    /// The home's time zone (habits follow local hours).
    pub tz: &'a jiff::tz::TimeZone,
    /// The home's site, for loads that follow the sun (`when_dark`).
    pub site: Option<crate::sun::Site>,
}

impl Clock<'_> {
    /// A duration in whole steps, at least one.
    pub fn steps_of(&self, seconds: f64) -> u64 {
        ((seconds / self.step_s).round() as u64).max(1)
    }
}

/// Collects segments, merging nothing, clipping at the end of the run.
pub(crate) struct Builder {
    steps: u64,
    t: u64,
    segments: Vec<Segment>,
}

impl Builder {
    /// An empty timeline for a run of `steps` steps.
    pub fn new(steps: u64) -> Self {
        Builder {
            steps,
            t: 0,
            segments: Vec::new(),
        }
    }
    /// The first step not yet covered.
    pub fn now(&self) -> u64 {
        self.t
    }
    /// Whether the run is covered to its end.
    pub fn done(&self) -> bool {
        self.t >= self.steps
    }
    /// Appends `len` steps of `state`; returns false once the run is full.
    pub fn push(&mut self, state: usize, len: u64, scale: f64) -> bool {
        if self.t >= self.steps || len == 0 {
            return !self.done();
        }
        let end = (self.t + len).min(self.steps);
        self.segments.push(Segment {
            start: self.t,
            end,
            state: state as u16,
            scale: scale as f32,
        });
        self.t = end;
        !self.done()
    }
    /// Fills up to step `until` (clipped) with `state`.
    pub fn fill_to(&mut self, state: usize, until: u64, scale: f64) {
        if until > self.t {
            self.push(state, until - self.t, scale);
        }
    }
    /// Fills what remains of the run with `state` and hands back the timeline.
    pub fn finish(mut self, state: usize) -> Timeline {
        let n = self.steps;
        self.fill_to(state, n, 1.0);
        Timeline {
            segments: self.segments,
            ..Default::default()
        }
    }
}

/// Generates the timeline of one appliance over the run, as a window onto
/// the home's one timeline ([`window`]). Draws come from the streams
/// (seed, appliance id, `"behaviour <block>"`) only.
///
/// A PV inverter's timeline comes from the sun and the sky alone; a store
/// idles here (with no other loads to follow) and is made from the others
/// in [`crate::loads::timelines`].
///
/// `weather`, when the home has one, gives a PV array its outdoor air
/// temperature.
pub fn timeline(
    app: &Appliance,
    clock: &Clock,
    seed: u64,
    weather: Option<&crate::weather::Weather>,
) -> Timeline {
    if let Behaviour::Sun(pv) = &app.behaviour {
        return solar::generate(pv, seed, clock, weather);
    }
    let tl = window::assemble(clock, |c, block| {
        let mut rng = stream(seed, &app.id, &format!("behaviour {block}"));
        generate(app, c, &mut rng)
    });
    match (app.when_dark_s, clock.site) {
        (Some(margin), Some(site)) => dark::mask(tl, clock, site, margin),
        _ => tl,
    }
}

/// The timeline of one appliance over `clock`, from `rng`.
fn generate(app: &Appliance, clock: &Clock, rng: &mut crate::rng::RandomStream) -> Timeline {
    match &app.behaviour {
        Behaviour::Cycle { dwell, extra } => cycle::generate(dwell, extra.as_ref(), clock, rng),
        Behaviour::Program { habit, lengths } => program::generate(habit, lengths, clock, rng),
        Behaviour::Markov { dwell, next } => markov::generate(dwell, next, clock, rng),
        Behaviour::Steady { jitter, every_s } => steady::generate(*jitter, *every_s, clock, rng),
        Behaviour::Modulating {
            min,
            wander,
            every_s,
            session,
        } => modulating::generate(
            app.states.len() - 1,
            *min,
            *wander,
            *every_s,
            session.as_ref(),
            clock,
            rng,
        ),
        // Made whole, not per block (`timeline`, `loads::timelines`): the sun's
        // output from the sky's own streams, a store from the other loads.
        Behaviour::Sun(_) | Behaviour::Storage(_) => Builder::new(clock.steps).finish(0),
        // Filled by `thermal::drive` from the heat balance (see `loads::timelines`).
        Behaviour::Thermostat { .. } => Builder::new(clock.steps).finish(0),
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn builder_clips_and_covers_the_run() {
        let mut b = Builder::new(10);
        assert!(b.push(1, 4, 1.0));
        assert!(!b.push(0, 100, 1.0));
        let t = b.finish(0);
        assert_eq!(t.segments.len(), 2);
        assert_eq!(t.segments[1].end, 10);
    }
}
