//! The outdoor weather a home's heating and cooling answer to: an hourly
//! series of outdoor temperature (and, when a file gives them, irradiance
//! and cloud cover) over the run.
//!
//! Two sources: a synthetic year from a few climate figures
//! ([`climate::Climate`], deterministic per seed and calendar date, so two
//! windows of one home see the same weather on the same day), or a file of
//! measurements ([`mod@file`]).

pub mod climate;
pub mod file;

use crate::rng::stream;
use rand_distr::{Distribution, StandardNormal};

pub use climate::Climate;
pub use file::Recorded;

/// Where a home's weather comes from.
#[derive(Clone, Debug, serde::Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum WeatherSpec {
    /// A synthetic series from climate figures.
    Synthetic {
        /// The named climate it came from, if any.
        name: Option<String>,
        /// The figures the series is drawn from.
        climate: Climate,
    },
    /// Measurements read from a file (already read and checked).
    File {
        /// The file as the scenario names it.
        path: String,
        /// Its checked rows.
        #[serde(skip)]
        data: Recorded,
    },
}

/// Hourly weather from `start_utc_ms` (a whole UTC hour) on.
#[derive(Clone, Debug)]
pub struct Weather {
    /// The first hour, ms since 1970-01-01 UTC.
    pub start_utc_ms: i64,
    /// Outdoor dry-bulb temperature, °C, one per hour.
    pub temp_c: Vec<f64>,
    /// Global horizontal irradiance, W/m², one per hour, if known.
    pub ghi_w_m2: Option<Vec<f64>>,
}

const HOUR_MS: i64 = 3_600_000;

impl Weather {
    /// The temperature at `t_ms` (UTC), linear between the hourly values.
    pub fn temp_at(&self, t_ms: i64) -> f64 {
        interp(&self.temp_c, self.start_utc_ms, t_ms)
    }
    /// The horizontal irradiance at `t_ms`, 0 when unknown.
    pub fn ghi_at(&self, t_ms: i64) -> f64 {
        self.ghi_w_m2
            .as_ref()
            .map_or(0.0, |g| interp(g, self.start_utc_ms, t_ms).max(0.0))
    }
    /// Heating degree days to `base_c` of the whole hours held (each hour
    /// counts a 24th of a day: degree-hours / 24).
    pub fn degree_days(&self, base_c: f64, heating: bool) -> f64 {
        let sign = if heating { 1.0 } else { -1.0 };
        self.temp_c
            .iter()
            .map(|t| (sign * (base_c - t)).max(0.0))
            .sum::<f64>()
            / 24.0
    }
}

fn interp(v: &[f64], start_ms: i64, t_ms: i64) -> f64 {
    let x = (t_ms - start_ms) as f64 / HOUR_MS as f64;
    if x <= 0.0 {
        return v[0];
    }
    let i = x.floor() as usize;
    if i + 1 >= v.len() {
        return v[v.len() - 1];
    }
    let f = x - i as f64;
    v[i] * (1.0 - f) + v[i + 1] * f
}

/// The hourly weather covering `start_utc_ms .. start_utc_ms + length_s`
/// (from the whole hour at or before the start, one hour past the end).
pub fn series(
    spec: &WeatherSpec,
    start_utc_ms: i64,
    length_s: f64,
    tz: &jiff::tz::TimeZone,
    seed: u64,
) -> Weather {
    let first = start_utc_ms.div_euclid(HOUR_MS) * HOUR_MS;
    let hours = ((start_utc_ms - first) as f64 / 3.6e6 + length_s / 3600.0).ceil() as usize + 2;
    match spec {
        WeatherSpec::Synthetic { climate, .. } => synthetic(climate, first, hours, tz, seed),
        WeatherSpec::File { data, .. } => data.hourly(first, hours),
    }
}

/// 2000-01-01T00:00Z in ms.
const Y2K_MS: i64 = 946_684_800_000;

/// Days since 2000-01-01 UTC of an instant (the anchor of the day-to-day
/// anomaly, so every window of a home sees one history).
fn day_number(t_ms: i64) -> i64 {
    (t_ms - Y2K_MS).div_euclid(86_400_000)
}

/// Daily anomalies (AR(1), unit variance) for days `d0 ..= d1`, drawn from
/// 2000-01-01 on with the stream (seed, "weather", "anomaly").
fn anomalies(seed: u64, d0: i64, d1: i64, persistence: f64) -> Vec<f64> {
    let mut rng = stream(seed, "weather", "anomaly");
    let mut a: f64 = StandardNormal.sample(&mut rng);
    let keep = (1.0 - persistence * persistence).sqrt();
    let mut out = Vec::with_capacity((d1 - d0 + 1).max(0) as usize);
    // Days before 2000 (a run in the 1990s) start the chain at its own day.
    let from = d0.min(0);
    for d in from..=d1 {
        if d > from {
            let e: f64 = StandardNormal.sample(&mut rng);
            a = persistence * a + keep * e;
        }
        if d >= d0 {
            out.push(a);
        }
    }
    out
}

/// A synthetic hourly series: the climate's smooth annual course, a daily
/// anomaly (AR(1) with the month's day-to-day spread), and the diurnal
/// swing (a cosine, lowest at 03:00 and highest at 15:00 local time: a
/// common idealisation, no source).
fn synthetic(
    c: &Climate,
    first_ms: i64,
    hours: usize,
    tz: &jiff::tz::TimeZone,
    seed: u64,
) -> Weather {
    let d0 = day_number(first_ms) - 1;
    let d1 = day_number(first_ms + hours as i64 * HOUR_MS) + 1;
    let anom = anomalies(seed, d0, d1, c.persistence);
    let course = c.annual_course();
    let mut temp = Vec::with_capacity(hours);
    for h in 0..hours {
        let t_ms = first_ms + h as i64 * HOUR_MS;
        let ts = jiff::Timestamp::from_millisecond(t_ms).expect("within jiff's range");
        let zoned = ts.to_zoned(tz.clone());
        let doy = zoned.day_of_year() as f64 - 1.0;
        let hour = zoned.hour() as f64 + zoned.minute() as f64 / 60.0;
        let day_pos = doy + hour / 24.0;
        let mean = course.at(day_pos);
        let sd = course.spread_at(day_pos);
        // A day's anomaly holds at its middle (12:00 UTC); linear between.
        let u = (t_ms - Y2K_MS) as f64 / 86_400_000.0 - 0.5;
        let i = ((u.floor() as i64) - d0).clamp(0, anom.len() as i64 - 2) as usize;
        let w = (u - u.floor()).clamp(0.0, 1.0);
        let a = anom[i] * (1.0 - w) + anom[i + 1] * w;
        let diurnal = -0.5 * c.daily_swing_k * (std::f64::consts::TAU * (hour - 3.0) / 24.0).cos();
        temp.push(mean + sd * a + diurnal);
    }
    Weather {
        start_utc_ms: first_ms,
        temp_c: temp,
        ghi_w_m2: None,
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn chicago_like() -> Climate {
        Climate::from_name("lakeshore").expect("named climate").1
    }

    #[test]
    fn the_same_day_has_the_same_weather_in_any_window() {
        let tz = jiff::tz::TimeZone::get("America/Chicago").unwrap();
        let spec = WeatherSpec::Synthetic {
            name: None,
            climate: chicago_like(),
        };
        let start = 1_798_869_600_000; // a whole UTC hour in January 2027
        let a = series(&spec, start, 30.0 * 86400.0, &tz, 5);
        let b = series(&spec, start + 10 * 86_400_000, 5.0 * 86400.0, &tz, 5);
        for h in 0..100 {
            assert_eq!(a.temp_c[240 + h], b.temp_c[h]);
        }
        let c = series(&spec, start, 30.0 * 86400.0, &tz, 6);
        assert_ne!(a.temp_c, c.temp_c);
    }

    #[test]
    fn a_year_keeps_its_monthly_means() {
        let tz = jiff::tz::TimeZone::get("UTC").unwrap();
        let c = chicago_like();
        let spec = WeatherSpec::Synthetic {
            name: None,
            climate: c.clone(),
        };
        // 2027-01-01T00:00Z, 30 seeds: the anomalies average out.
        let start = 1_798_761_600_000;
        let mut jan = 0.0;
        let mut jul = 0.0;
        for seed in 0..30 {
            let w = series(&spec, start, 365.0 * 86400.0, &tz, seed);
            jan += w.temp_c[..744].iter().sum::<f64>() / 744.0 / 30.0;
            jul += w.temp_c[4344..4344 + 744].iter().sum::<f64>() / 744.0 / 30.0;
        }
        assert!((jan - c.monthly_mean_c[0]).abs() < 0.6, "{jan}");
        assert!((jul - c.monthly_mean_c[6]).abs() < 0.6, "{jul}");
    }

    #[test]
    fn interpolation_is_linear_between_hours() {
        let w = Weather {
            start_utc_ms: 0,
            temp_c: vec![0.0, 10.0],
            ghi_w_m2: None,
        };
        assert_eq!(w.temp_at(1_800_000), 5.0);
        assert_eq!(w.temp_at(-5), 0.0);
        assert_eq!(w.temp_at(9_000_000), 10.0);
        assert!((w.degree_days(18.0, true) - (18.0 + 8.0) / 24.0).abs() < 1e-12);
    }
}
