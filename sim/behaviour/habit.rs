//! Usage habits: when, in the home's local time, a person starts something.

use super::dist::categorical;
use super::Clock;
use crate::rng::RandomStream;
use crate::scenario::Habit;
use rand::Rng;
use rand_distr::{Distribution, Poisson};

/// Start steps over the run, sorted. Each local day draws a Poisson number
/// of starts (weekday or weekend rate), each at an hour drawn from the
/// habit's weights and a uniform time within that hour. Local times are
/// placed with the time zone's rules (a start in a skipped DST hour moves
/// forward).
pub fn starts(h: &Habit, clock: &Clock, rng: &mut RandomStream) -> Vec<u64> {
    let start = jiff::Timestamp::from_millisecond(clock.start_utc_ms)
        .expect("valid start")
        .to_zoned(clock.tz.clone());
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    let end_ms = clock.start_utc_ms + clock.steps as i64 * step_ms;
    let mut day = start.date();
    let mut out = Vec::new();
    loop {
        let midnight = day.to_zoned(clock.tz.clone()).expect("a day has a start");
        if midnight.timestamp().as_millisecond() >= end_ms {
            break;
        }
        let weekend = matches!(
            day.weekday(),
            jiff::civil::Weekday::Saturday | jiff::civil::Weekday::Sunday
        );
        let rate = if weekend {
            h.weekend_starts_per_day
        } else {
            h.starts_per_day
        };
        let n = if rate > 0.0 {
            Poisson::new(rate).expect("rate checked").sample(rng) as u64
        } else {
            0
        };
        for _ in 0..n {
            let hour = categorical(
                if weekend {
                    &h.weekend_hour_weights
                } else {
                    &h.hour_weights
                },
                rng,
            );
            let secs = rng.random_range(0.0..3600.0);
            let local = day.at(hour as i8, 0, 0, 0);
            let Ok(z) = local.to_zoned(clock.tz.clone()) else {
                continue;
            };
            let ms = z.timestamp().as_millisecond() + (secs * 1000.0) as i64;
            if ms >= clock.start_utc_ms && ms < end_ms {
                out.push(((ms - clock.start_utc_ms) / step_ms) as u64);
            }
        }
        day = day.tomorrow().expect("within the calendar");
    }
    out.sort_unstable();
    out
}
