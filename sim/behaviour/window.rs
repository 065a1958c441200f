//! A run is a window onto the home's one timeline.
//!
//! The home's time is cut into blocks of a day (starting at 04:00 of the
//! zone's standard time, when little runs). Each block is generated alone,
//! from its own random stream `(seed, appliance, "behaviour <block>")`,
//! starting some hours before the block so it is in its steady regime, and
//! running some hours past it. One block hands over to the next at the
//! first moment, from the block's start on, when both are in the same state
//! (a fridge cooling in both, a washer off in both), so the hand-over is a
//! state that simply goes on. Which block covers which moment depends on
//! the blocks alone, never on the window: a run of days 1–28 equals runs of
//! days 1–21 and 22–28 joined, and two windows that do not overlap share no
//! draws.

use super::{Clock, Segment, Timeline};

/// Length of a block.
const BLOCK_MS: i64 = 86_400_000;
/// A block's start in the zone's standard time (04:00).
const BLOCK_HOUR_MS: i64 = 4 * 3_600_000;

/// How long each block's generation runs before the block starts and after
/// it ends, ms.
#[derive(Clone, Copy, Debug)]
pub struct Reach {
    /// Before the block's start: long enough to reach the steady regime.
    pub warm_ms: i64,
    /// After the block's end: room to find a hand-over.
    pub horizon_ms: i64,
}

/// An appliance's behaviour: 12 h before (longer than any program or
/// session) and 12 h after.
pub const BEHAVIOUR: Reach = Reach {
    warm_ms: 12 * 3_600_000,
    horizon_ms: 12 * 3_600_000,
};

impl Reach {
    /// Steps before a run's start and after its end that the blocks of a
    /// run may cover (the block before the start's, its warm-up; the block
    /// after the end's, its horizon), at a step of `step_ms`.
    pub fn margins(&self, step_ms: i64) -> (u64, u64) {
        let steps = |ms: i64| (ms.div_euclid(step_ms) + 2) as u64;
        (
            steps(2 * BLOCK_MS + self.warm_ms),
            steps(BLOCK_MS + self.horizon_ms),
        )
    }
}

/// One block's generated timelines, placed on the run's steps, with what
/// else its generation kept (`X`).
pub struct Piece<X> {
    /// Run step of the timelines' step 0 (may be negative).
    offset: i64,
    /// The block's timelines, all over the same steps.
    timelines: Vec<Timeline>,
    /// What else the block's generation gave.
    pub extra: X,
}

/// How well two blocks agree at a moment: a block hands over to the next
/// at the first moment they agree `Tight`ly, else where they agree
/// `Loose`ly and least apart.
#[derive(Clone, Copy, Debug, PartialEq)]
pub enum Fit {
    /// Not here.
    No,
    /// Here, if nowhere better: the blocks are this far apart.
    Loose(f64),
    /// Here.
    Tight,
}

impl<X> Piece<X> {
    /// Run step of the piece's step 0.
    pub fn offset(&self) -> i64 {
        self.offset
    }
    /// Index of the segment of timeline `j` in force at run step `t`
    /// (clamped to the piece's range).
    fn index(&self, j: usize, t: i64) -> usize {
        let segs = &self.timelines[j].segments;
        let local = (t - self.offset).max(0) as u64;
        segs.partition_point(|s| s.end <= local).min(segs.len() - 1)
    }
    /// The state of timeline `j` at run step `t`.
    pub fn state(&self, j: usize, t: i64) -> u16 {
        self.timelines[j].segments[self.index(j, t)].state
    }
    /// The level (a store's state of charge) of timeline `j` at run step `t`.
    pub fn level(&self, j: usize, t: i64) -> Option<f64> {
        let i = self.index(j, t);
        let local = (t - self.offset).max(0) as u64;
        let tl = &self.timelines[j];
        tl.level_at(i, local.max(tl.segments[i].start))
    }
    /// Run steps where a segment of any timeline starts, within `(from, to)`.
    fn starts_within(&self, from: i64, to: i64) -> impl Iterator<Item = i64> + '_ {
        self.timelines
            .iter()
            .flat_map(|tl| tl.segments.iter())
            .map(move |s| s.start as i64 + self.offset)
            .filter(move |&t| t > from && t < to)
    }
    /// The run step after the piece's last.
    fn end(&self) -> i64 {
        self.offset
            + self
                .timelines
                .iter()
                .filter_map(|tl| tl.segments.last())
                .map(|s| s.end as i64)
                .max()
                .unwrap_or(0)
    }
}

/// Whether every timeline of two pieces is in the same state at run step
/// `t`: the hand-over rule of behaviours.
pub fn same_states<X>(a: &Piece<X>, b: &Piece<X>, t: i64) -> bool {
    (0..a.timelines.len()).all(|j| a.state(j, t) == b.state(j, t))
}

/// The zone's standard offset from UTC, ms, taken at one fixed instant so
/// every window places the blocks alike.
fn standard_offset_ms(tz: &jiff::tz::TimeZone) -> i64 {
    let fixed = jiff::Timestamp::from_second(946_684_800).expect("2000-01-01 is valid");
    tz.to_offset(fixed).seconds() as i64 * 1000
}

/// The first run step at or after instant `ms`.
pub fn step_at(clock: &Clock, ms: i64) -> i64 {
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    (ms - clock.start_utc_ms).div_euclid(step_ms)
        + i64::from((ms - clock.start_utc_ms).rem_euclid(step_ms) != 0)
}

/// The hand-over from `prev` to `next`: the first run step from `from` on
/// (at `from`, or where either changes segment) where they agree
/// [`Fit::Tight`]ly, else the first of the least apart where
/// [`Fit::Loose`]ly; `from` when none is found before `prev` ends.
fn hand_over<X>(
    prev: &Piece<X>,
    next: &Piece<X>,
    from: i64,
    agree: &impl Fn(&Piece<X>, &Piece<X>, i64) -> Fit,
) -> i64 {
    let to = prev.end();
    let mut candidates: Vec<i64> = std::iter::once(from)
        .chain(prev.starts_within(from, to))
        .chain(next.starts_within(from, to))
        .collect();
    candidates.sort_unstable();
    let mut loose: Option<(f64, i64)> = None;
    for t in candidates {
        match agree(prev, next, t) {
            Fit::Tight => return t,
            Fit::Loose(apart) if loose.is_none_or(|(best, _)| apart < best) => {
                loose = Some((apart, t))
            }
            _ => {}
        }
    }
    loose.map_or(from, |(_, t)| t)
}

/// The run's timeline of one appliance: `generate(clock, block)` makes the
/// timeline of a block from the block's own clock and stream number.
pub fn assemble(clock: &Clock, mut generate: impl FnMut(&Clock, i64) -> Timeline) -> Timeline {
    let joined = assemble_group(
        clock,
        BEHAVIOUR,
        |c, k| (vec![generate(c, k)], ()),
        |a, b, t| match same_states(a, b, t) {
            true => Fit::Tight,
            false => Fit::No,
        },
    );
    joined.timelines.into_iter().next().unwrap_or_default()
}

/// Timelines made together, block by block, and where each block's piece
/// covers the run.
pub struct Joined<X> {
    /// The run's timelines, in the order `generate` gives them.
    pub timelines: Vec<Timeline>,
    /// Piece `i` (the block `first + i`) covers run steps
    /// `cuts[i] .. cuts[i + 1]` (clipped to the run).
    pub cuts: Vec<i64>,
    /// Run step of each piece's step 0.
    pub offsets: Vec<i64>,
    /// What else each piece's generation gave.
    pub extras: Vec<X>,
}

/// Timelines that are made together (a building's thermostatic loads, a
/// battery): `generate(clock, block)` makes a block's timelines over its
/// own clock, which runs `reach` before and after the block, with anything
/// else it keeps (`X`); each block hands over to the next at the first
/// moment from its start where they agree (`hand_over`). Which block
/// covers which moment depends on the blocks alone, never on the run.
pub fn assemble_group<X>(
    clock: &Clock,
    reach: Reach,
    mut generate: impl FnMut(&Clock, i64) -> (Vec<Timeline>, X),
    agree: impl Fn(&Piece<X>, &Piece<X>, i64) -> Fit,
) -> Joined<X> {
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    let anchor = BLOCK_HOUR_MS - standard_offset_ms(clock.tz);
    let end_ms = clock.start_utc_ms + clock.steps as i64 * step_ms;
    let first = (clock.start_utc_ms - anchor).div_euclid(BLOCK_MS) - 1;
    let last = (end_ms - 1 - anchor).div_euclid(BLOCK_MS);
    let block_step = |k: i64| step_at(clock, anchor + k * BLOCK_MS);
    let warm = reach.warm_ms / step_ms;
    let horizon = reach.horizon_ms / step_ms;
    let pieces: Vec<Piece<X>> = (first..=last)
        .map(|k| {
            let offset = block_step(k) - warm;
            let steps = (block_step(k + 1) + horizon - offset) as u64;
            let c = Clock {
                steps,
                step_s: clock.step_s,
                start_utc_ms: clock.start_utc_ms + offset * step_ms,
                tz: clock.tz,
                site: clock.site,
            };
            let (timelines, extra) = generate(&c, k);
            Piece {
                offset,
                timelines,
                extra,
            }
        })
        .collect();
    let mut cuts = vec![i64::MIN];
    for (i, w) in pieces.windows(2).enumerate() {
        cuts.push(hand_over(
            &w[0],
            &w[1],
            block_step(first + i as i64 + 1),
            &agree,
        ));
    }
    cuts.push(i64::MAX);
    let count = pieces.first().map_or(0, |p| p.timelines.len());
    let timelines = (0..count)
        .map(|j| stitch(&pieces, &cuts, j, clock.steps as i64))
        .collect();
    Joined {
        timelines,
        cuts,
        offsets: pieces.iter().map(|p| p.offset).collect(),
        extras: pieces.into_iter().map(|p| p.extra).collect(),
    }
}

/// Timeline `j` of the run from the pieces, piece `i` over
/// `cuts[i] .. cuts[i + 1]`; a store's level follows each clipped segment.
fn stitch<X>(pieces: &[Piece<X>], cuts: &[i64], j: usize, n: i64) -> Timeline {
    let mut out = Timeline::default();
    for (i, p) in pieces.iter().enumerate() {
        let (lo, hi) = (cuts[i].max(0), cuts[i + 1].min(n));
        let tl = &p.timelines[j];
        for (k, s) in tl.segments.iter().enumerate() {
            let (a, b) = (
                (s.start as i64 + p.offset).max(lo),
                (s.end as i64 + p.offset).min(hi),
            );
            if a >= b {
                continue;
            }
            out.segments.push(Segment {
                start: a as u64,
                end: b as u64,
                ..*s
            });
            if let Some(&(_, per_step)) = tl.level.get(k) {
                let at = tl.level_at(k, (a - p.offset) as u64).unwrap_or(0.0);
                out.level.push((at, per_step));
            }
        }
    }
    out
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::behaviour::Builder;

    /// A toy behaviour: alternates states 0 and 1 every `k`+3 steps from a
    /// phase set by the block, so blocks disagree unless handed over.
    fn toy(c: &Clock, k: i64) -> Timeline {
        let mut b = Builder::new(c.steps);
        let mut st = (k.rem_euclid(2)) as usize;
        b.push(st, (k.rem_euclid(5) + 1) as u64, 1.0);
        while !b.done() {
            st = 1 - st;
            b.push(st, (k.rem_euclid(7) + 3) as u64, k as f64);
        }
        b.finish(0)
    }

    fn run(start_ms: i64, steps: u64, tz: &jiff::tz::TimeZone) -> Timeline {
        let c = Clock {
            steps,
            step_s: 60.0,
            start_utc_ms: start_ms,
            tz,
            site: None,
        };
        assemble(&c, toy)
    }

    #[test]
    fn a_window_is_a_slice_of_the_one_timeline() {
        let tz = jiff::tz::TimeZone::get("Europe/Berlin").unwrap();
        let t0 = 1_805_500_800_000; // 2027-03-20T00:00Z
        let whole = run(t0, 10 * 1440, &tz);
        let tail = run(t0 + 6 * 86_400_000, 4 * 1440, &tz);
        let state_at = |tl: &Timeline, t: u64| {
            tl.segments
                .iter()
                .find(|s| s.start <= t && t < s.end)
                .map(|s| (s.state, s.scale))
                .unwrap()
        };
        for t in 0..4 * 1440 {
            assert_eq!(state_at(&whole, t + 6 * 1440), state_at(&tail, t), "{t}");
        }
        // Contiguous and complete.
        assert_eq!(whole.segments[0].start, 0);
        assert_eq!(whole.segments.last().unwrap().end, 10 * 1440);
        assert!(whole.segments.windows(2).all(|w| w[0].end == w[1].start));
    }
}
