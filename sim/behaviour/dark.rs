//! Loads that burn only in the dark (`when_dark`): a program's phases are
//! kept from `margin` before sunset to `margin` after sunrise at the home's
//! site, and turned to state 0 (off) in the daylight between. Sunrise and
//! sunset come from the sun's position alone, so the mask depends on the
//! instant, never on the window: every window of a home masks its one
//! timeline alike and stays a slice of it.

use super::window::step_at;
use super::{Clock, Segment, Timeline};
use crate::sun::position::{position, sunrise_sunset};
use crate::sun::Site;

const DAY_MS: i64 = 86_400_000;

/// Spans of daylight `[from, to)` in UTC milliseconds, sunrise + `margin`
/// to sunset − `margin`, of every solar day that touches `from_ms..to_ms`.
/// A polar day is daylight from one solar midnight to the next; a polar
/// night has none.
pub fn daylight_spans(site: Site, from_ms: i64, to_ms: i64, margin_s: f64) -> Vec<(i64, i64)> {
    let m = (margin_s * 1000.0).round() as i64;
    // Local mean solar noon of day d; sunrise_sunset finds the true one.
    let lon_ms = (site.longitude_deg / 360.0 * DAY_MS as f64) as i64;
    let noon = |d: i64| d * DAY_MS + DAY_MS / 2 - lon_ms;
    let first = (from_ms + lon_ms).div_euclid(DAY_MS) - 1;
    let last = (to_ms + lon_ms).div_euclid(DAY_MS) + 1;
    (first..=last)
        .filter_map(|d| match sunrise_sunset(site, noon(d)) {
            Some((rise, set)) => Some((rise + m, set - m)),
            None if position(site, noon(d)).zenith_deg < 90.0 => {
                Some((noon(d) - DAY_MS / 2, noon(d) + DAY_MS / 2))
            }
            None => None,
        })
        .filter(|(a, b)| a < b && *b > from_ms && *a < to_ms)
        .collect()
}

/// `tl` with every step whose start lies in daylight turned off.
pub fn mask(tl: Timeline, clock: &Clock, site: Site, margin_s: f64) -> Timeline {
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    let end_ms = clock.start_utc_ms + clock.steps as i64 * step_ms;
    let light: Vec<(u64, u64)> = daylight_spans(site, clock.start_utc_ms, end_ms, margin_s)
        .into_iter()
        .map(|(a, b)| {
            let at = |ms| step_at(clock, ms).clamp(0, clock.steps as i64) as u64;
            (at(a), at(b))
        })
        .filter(|(a, b)| a < b)
        .collect();
    let mut out = Vec::with_capacity(tl.segments.len());
    for s in tl.segments {
        if s.state == 0 {
            out.push(s);
            continue;
        }
        let mut t = s.start;
        for &(a, b) in light.iter().filter(|(a, b)| *a < s.end && *b > s.start) {
            if a > t {
                out.push(Segment {
                    start: t,
                    end: a,
                    ..s
                });
            }
            let off_end = b.min(s.end);
            out.push(Segment {
                start: a.max(t),
                end: off_end,
                state: 0,
                scale: 1.0,
            });
            t = off_end;
        }
        if t < s.end {
            out.push(Segment { start: t, ..s });
        }
    }
    Timeline {
        segments: out,
        ..tl
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn a_lit_segment_across_sunrise_is_cut_at_sunrise_plus_the_margin() {
        let tz = jiff::tz::TimeZone::get("Europe/Berlin").unwrap();
        let site = Site {
            latitude_deg: 52.5,
            longitude_deg: 13.4,
        };
        let t0 = 1_805_500_800_000; // 2027-03-20T00:00Z
        let clock = Clock {
            steps: 1440,
            step_s: 60.0,
            start_utc_ms: t0,
            tz: &tz,
            site: Some(site),
        };
        let tl = Timeline {
            segments: vec![Segment {
                start: 0,
                end: 1440,
                state: 2,
                scale: 0.5,
            }],
            ..Default::default()
        };
        let out = mask(tl, &clock, site, 1800.0);
        let (rise, set) = sunrise_sunset(site, t0 + DAY_MS / 2).unwrap();
        let lit: Vec<&Segment> = out.segments.iter().filter(|s| s.state == 2).collect();
        assert_eq!(lit.len(), 2);
        let minute = |ms: i64| (ms - t0 + 59_999) / 60_000;
        assert_eq!(lit[0].end as i64, minute(rise + 1_800_000));
        assert_eq!(lit[1].start as i64, minute(set - 1_800_000));
        assert!(out.segments.windows(2).all(|w| w[0].end == w[1].start));
        assert_eq!(out.segments.last().unwrap().end, 1440);
    }

    #[test]
    fn polar_day_is_all_daylight_and_polar_night_has_none() {
        let north = Site {
            latitude_deg: 78.0,
            longitude_deg: 15.0,
        };
        let june = 1_813_622_400_000; // 2027-06-21T00:00Z
        let spans = daylight_spans(north, june, june + DAY_MS, 0.0);
        let covered: i64 = spans
            .iter()
            .map(|(a, b)| b.min(&(june + DAY_MS)) - a.max(&june))
            .sum();
        assert_eq!(covered, DAY_MS);
        let december = june + 183 * DAY_MS;
        assert!(daylight_spans(north, december, december + DAY_MS, 0.0).is_empty());
    }
}
