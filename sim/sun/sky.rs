//! Stochastic cloudiness: a clear-sky index k (global irradiance over its
//! clear-sky value) per day, hour and minute.
//!
//! Structure after the daily-level plus hourly autoregressive Gaussian
//! models of synthetic radiation (Aguiar & Collares-Pereira 1992, "TAG: a
//! time-dependent, autoregressive, Gaussian model for generating synthetic
//! hourly radiation", Solar Energy 49(3)): a day's level is drawn from a
//! Beta distribution with the site's mean; hours wander around it by an
//! AR(1) process, minutes around the hours by another, both with a spread
//! that vanishes on fully clear and fully overcast days, as the variability
//! of measured irradiance does. The coefficients (concentration 3, hourly
//! correlation 0.6 and spread 0.6·√(k(1−k)), minute correlation 0.9 and
//! spread 0.5·√(k(1−k)), k within 0.03 … 1.15, above 1 for the brief
//! cloud-edge enhancement) are illustrative values, from memory, not a fit.
//!
//! Each solar day (from solar midnight at the site's longitude) draws from
//! its own stream, keyed by the seed and the day's number: a run over any
//! window of time sees the same sky on the same day.

use crate::rng::{stream, RandomStream};
use rand::Rng;
use rand_distr::{Beta, Distribution, StandardNormal};

const MS_PER_DAY: i64 = 86_400_000;
const MINUTES: usize = 1440;
const CONCENTRATION: f64 = 3.0;
const HOUR_RHO: f64 = 0.6;
const HOUR_SPREAD: f64 = 0.6;
const MINUTE_RHO: f64 = 0.9;
const MINUTE_SPREAD: f64 = 0.5;
const K_MIN: f64 = 0.03;
const K_MAX: f64 = 1.15;

/// The sky over one site.
#[derive(Clone, Debug)]
pub struct Sky {
    seed: u64,
    /// Mean clear-sky index of a day; `None`: always clear (k = 1).
    mean: Option<f64>,
    /// Solar midnight's offset from UTC midnight, ms (from the longitude).
    offset_ms: i64,
    cached_day: Option<i64>,
    minutes: Vec<f64>,
}

impl Sky {
    /// A sky whose days have clear-sky index `mean` on average (0 < mean < 1).
    pub fn new(seed: u64, longitude_deg: f64, mean: f64) -> Sky {
        Sky {
            seed,
            mean: Some(mean.clamp(0.01, 0.99)),
            offset_ms: (-longitude_deg / 360.0 * MS_PER_DAY as f64) as i64,
            cached_day: None,
            minutes: Vec::new(),
        }
    }

    /// A sky with no clouds at all (k = 1 at every moment).
    pub fn clear() -> Sky {
        Sky {
            seed: 0,
            mean: None,
            offset_ms: 0,
            cached_day: None,
            minutes: Vec::new(),
        }
    }

    /// The clear-sky index at `utc_ms` (constant within each minute).
    pub fn index(&mut self, utc_ms: i64) -> f64 {
        let Some(mean) = self.mean else {
            return 1.0;
        };
        let local = utc_ms - self.offset_ms;
        let day = local.div_euclid(MS_PER_DAY);
        if self.cached_day != Some(day) {
            self.minutes = day_profile(self.seed, day, mean);
            self.cached_day = Some(day);
        }
        let minute = (local.rem_euclid(MS_PER_DAY) / 60_000) as usize;
        self.minutes[minute.min(MINUTES - 1)]
    }
}

/// The day's level, drawn from Beta(m·c, (1 − m)·c).
fn day_level(mean: f64, rng: &mut RandomStream) -> f64 {
    let beta = Beta::new(mean * CONCENTRATION, (1.0 - mean) * CONCENTRATION)
        .expect("mean clamped into (0, 1)");
    beta.sample(rng)
}

/// An AR(1) series of `n` stationary standard normal values.
fn ar1(n: usize, rho: f64, rng: &mut RandomStream) -> Vec<f64> {
    let innov = (1.0 - rho * rho).sqrt();
    let mut z: f64 = rng.sample(StandardNormal);
    (0..n)
        .map(|_| {
            let v = z;
            z = rho * z + innov * rng.sample::<f64, _>(StandardNormal);
            v
        })
        .collect()
}

/// The clear-sky index of each minute of solar day `day`.
fn day_profile(seed: u64, day: i64, mean: f64) -> Vec<f64> {
    let mut rng = stream(seed, "sky", &format!("day {day}"));
    let level = day_level(mean, &mut rng);
    let spread = (level * (1.0 - level)).max(0.0).sqrt();
    // 25 hourly values at the hours' middles −0.5 … 23.5 h, interpolated.
    let hours: Vec<f64> = ar1(25, HOUR_RHO, &mut rng)
        .iter()
        .map(|z| level + HOUR_SPREAD * spread * z)
        .collect();
    let minutes = ar1(MINUTES, MINUTE_RHO, &mut rng);
    (0..MINUTES)
        .map(|m| {
            let h = (m as f64 + 0.5) / 60.0 + 0.5;
            let i = (h.floor() as usize).min(23);
            let f = h - i as f64;
            let hourly = hours[i] * (1.0 - f) + hours[i + 1] * f;
            (hourly + MINUTE_SPREAD * spread * minutes[m]).clamp(K_MIN, K_MAX)
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    const DAY: i64 = MS_PER_DAY;

    #[test]
    fn a_day_is_the_same_whatever_was_asked_before() {
        let mut a = Sky::new(5, -70.0, 0.6);
        let mut b = Sky::new(5, -70.0, 0.6);
        let t = 1_805_500_800_000 + 3 * DAY + 13 * 3_600_000;
        let _ = a.index(t - 40 * DAY);
        assert_eq!(a.index(t), b.index(t));
        let mut c = Sky::new(6, -70.0, 0.6);
        assert_ne!(c.index(t), b.index(t));
    }

    #[test]
    fn the_mean_index_is_the_mean_asked_for() {
        // The Beta level has the requested mean; the clamp and the
        // zero-mean wander around it move the mean by little.
        for mean in [0.4, 0.7] {
            let mut s = Sky::new(1, 0.0, mean);
            let n = 400;
            let avg: f64 = (0..n).map(|d| s.index(d * DAY + DAY / 2)).sum::<f64>() / n as f64;
            assert!((avg - mean).abs() < 0.05, "{mean}: {avg}");
        }
    }

    #[test]
    fn the_index_stays_in_its_bounds_and_a_clear_sky_is_one() {
        let mut s = Sky::new(2, 10.0, 0.5);
        for m in 0..20_000 {
            let k = s.index(m * 60_000);
            assert!((K_MIN..=K_MAX).contains(&k), "{k}");
        }
        assert_eq!(Sky::clear().index(123), 1.0);
    }
}
