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
/// How long a block runs before its start (to reach its steady regime:
/// longer than any program or session) and after its end (to find a
/// hand-over).
const WARM_MS: i64 = 12 * 3_600_000;
const HORIZON_MS: i64 = 12 * 3_600_000;

/// One block's generated timeline, placed on the run's steps.
struct Piece {
    /// Run step of the timeline's step 0 (may be negative).
    offset: i64,
    timeline: Timeline,
}

impl Piece {
    /// The segment in force at run step `t` (clamped to the piece's range).
    fn at(&self, t: i64) -> &Segment {
        let segs = &self.timeline.segments;
        let local = (t - self.offset).max(0) as u64;
        let i = segs.partition_point(|s| s.end <= local);
        &segs[i.min(segs.len() - 1)]
    }
    /// Run steps where a segment starts, within `(from, to)`.
    fn starts_within(&self, from: i64, to: i64) -> impl Iterator<Item = i64> + '_ {
        self.timeline
            .segments
            .iter()
            .map(move |s| s.start as i64 + self.offset)
            .filter(move |&t| t > from && t < to)
    }
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
/// (at `from`, or where either changes segment) when both are in the same
/// state; `from` when none is found before `prev` ends.
fn hand_over(prev: &Piece, next: &Piece, from: i64, to: i64) -> i64 {
    let mut candidates: Vec<i64> = std::iter::once(from)
        .chain(prev.starts_within(from, to))
        .chain(next.starts_within(from, to))
        .collect();
    candidates.sort_unstable();
    candidates
        .into_iter()
        .find(|&t| prev.at(t).state == next.at(t).state)
        .unwrap_or(from)
}

/// The run's timeline of one appliance: `generate(clock, block)` makes the
/// timeline of a block from the block's own clock and stream number.
pub fn assemble(clock: &Clock, mut generate: impl FnMut(&Clock, i64) -> Timeline) -> Timeline {
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    let anchor = BLOCK_HOUR_MS - standard_offset_ms(clock.tz);
    let end_ms = clock.start_utc_ms + clock.steps as i64 * step_ms;
    let first = (clock.start_utc_ms - anchor).div_euclid(BLOCK_MS) - 1;
    let last = (end_ms - 1 - anchor).div_euclid(BLOCK_MS);
    let block_step = |k: i64| step_at(clock, anchor + k * BLOCK_MS);
    let warm = WARM_MS / step_ms;
    let horizon = HORIZON_MS / step_ms;
    let pieces: Vec<Piece> = (first..=last)
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
            Piece {
                offset,
                timeline: generate(&c, k),
            }
        })
        .collect();
    // Piece i covers run steps [cut[i], cut[i + 1]).
    let mut cut = vec![i64::MIN];
    for (i, w) in pieces.windows(2).enumerate() {
        let from = block_step(first + i as i64 + 1);
        let to = w[0].offset + w[0].timeline.segments.last().map_or(0, |s| s.end as i64);
        cut.push(hand_over(&w[0], &w[1], from, to));
    }
    cut.push(i64::MAX);
    let n = clock.steps as i64;
    let mut segments: Vec<Segment> = Vec::new();
    for (i, p) in pieces.iter().enumerate() {
        let (lo, hi) = (cut[i].max(0), cut[i + 1].min(n));
        for s in &p.timeline.segments {
            let (a, b) = (
                (s.start as i64 + p.offset).max(lo),
                (s.end as i64 + p.offset).min(hi),
            );
            if a < b {
                segments.push(Segment {
                    start: a as u64,
                    end: b as u64,
                    ..*s
                });
            }
        }
    }
    Timeline {
        segments,
        ..Default::default()
    }
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
