//! A PV inverter's output: per minute of UTC, the sun's position and the
//! sky's clear-sky index give the plane-of-array irradiance, and PVWatts
//! the AC power (`sim/sun`). The sky is keyed by the day, so any window of
//! the home sees the same output at the same moment.

use super::{window, Clock, Segment, Timeline};
use crate::scenario::Pv;
use crate::sun::pvwatts::{Array, OPEN_RACK, ROOF_MOUNT};
use crate::sun::{light_unless_dark, plane_of_array, Night, Sky, Surface};
use crate::weather::Weather;

const MINUTE_MS: i64 = 60_000;

/// The array's AC output at `utc_ms` with the outdoor air at `air_c()`
/// (asked only while light falls), W. `night`: what is known dark so far
/// (see [`light_unless_dark`]).
pub fn output(
    pv: &Pv,
    array: &Array,
    (sky, night): (&mut Sky, &mut Night),
    utc_ms: i64,
    air_c: impl FnOnce() -> f64,
) -> f64 {
    let Some((pos, l)) = light_unless_dark(pv.site, sky, night, utc_ms) else {
        return 0.0;
    };
    if l.ghi <= 0.0 {
        return 0.0;
    }
    let surface = Surface {
        tilt_deg: pv.tilt_deg,
        azimuth_deg: pv.azimuth_deg,
        albedo: pv.albedo,
    };
    let poa = plane_of_array(&surface, &l, pos.zenith_deg, pos.azimuth_deg);
    array.output(poa, air_c(), pv.wind_m_s)
}

/// The PVWatts array of a `[pv]` section.
pub fn array(pv: &Pv) -> Array {
    Array {
        dc_w: pv.dc_w,
        ac_w: pv.ac_w,
        gamma: pv.gamma,
        losses: pv.losses,
        mount: if pv.mount == "rack" {
            OPEN_RACK
        } else {
            ROOF_MOUNT
        },
    }
}

/// Segments per UTC minute (the output at the minute's middle); state 0
/// (off) while it makes nothing, else state 1 (producing) scaled by the
/// output over the inverter's rating. Equal neighbours are merged. The
/// modules' air is the home's outdoor temperature where it has `[weather]`,
/// else the section's fixed `air_c`.
pub fn generate(pv: &Pv, seed: u64, clock: &Clock, weather: Option<&Weather>) -> Timeline {
    let mut sky = match pv.sky {
        Some(mean) => Sky::new(seed, pv.site.longitude_deg, mean),
        None => Sky::clear(),
    };
    let mut night = Night::default();
    let array = array(pv);
    let step_ms = (clock.step_s * 1000.0).round() as i64;
    let end_ms = clock.start_utc_ms + clock.steps as i64 * step_ms;
    let mut segments: Vec<Segment> = Vec::new();
    let mut minute = clock.start_utc_ms.div_euclid(MINUTE_MS) * MINUTE_MS;
    while minute < end_ms {
        let from = window::step_at(clock, minute).max(0) as u64;
        let to = (window::step_at(clock, minute + MINUTE_MS) as u64).min(clock.steps);
        minute += MINUTE_MS;
        if to <= from {
            continue;
        }
        let mid = minute - MINUTE_MS / 2;
        let air_c = || weather.map_or(pv.air_c, |w| w.temp_at(mid));
        let ac = output(pv, &array, (&mut sky, &mut night), mid, air_c);
        let (state, scale) = if ac > 0.0 {
            (1, (ac / pv.ac_w) as f32)
        } else {
            (0, 1.0)
        };
        match segments.last_mut() {
            Some(l) if l.state == state && l.scale == scale => l.end = to,
            _ => segments.push(Segment {
                start: from,
                end: to,
                state,
                scale,
            }),
        }
    }
    Timeline {
        segments,
        ..Default::default()
    }
}
