//! The sun: where it stands, how much light reaches a surface, and what a
//! rooftop PV array makes of it.
//!
//! Physics only, with no dependency on the scenario language, so any model
//! of the home (PV, solar gains through windows, daylight for lighting) can
//! use it:
//!
//! - [`position()`]: solar zenith and azimuth from the NOAA solar position
//!   equations ([`position::position`]);
//! - [`irradiance`]: extraterrestrial irradiance (Spencer 1971), clear-sky
//!   global horizontal irradiance (Haurwitz 1945), the Erbs et al. (1982)
//!   split into direct and diffuse, and the isotropic-sky transposition
//!   (Liu & Jordan 1963) onto a tilted plane;
//! - [`sky`]: a stochastic clear-sky index per day, hour and minute,
//!   deterministic per seed and keyed by the day, so any window of time sees
//!   the same sky;
//! - [`pvwatts`]: module temperature (King et al. 2004), DC power with its
//!   temperature derating and the inverter's efficiency curve (PVWatts
//!   version 5, Dobos 2014).
//!
//! Angles are in degrees at the boundary, times in milliseconds since
//! 1970-01-01 UTC.

pub mod irradiance;
pub mod position;
pub mod pvwatts;
pub mod sky;

pub use irradiance::{clear_sky_ghi, decompose, extraterrestrial, plane_of_array, Surface};
pub use position::{position, Position};
pub use sky::Sky;

/// Where the home stands on the earth.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Site {
    /// Degrees, north positive (−90 … 90).
    pub latitude_deg: f64,
    /// Degrees, east positive (−180 … 180).
    pub longitude_deg: f64,
}

/// Irradiance on a surface and its parts, W/m².
#[derive(Clone, Copy, Debug, Default, PartialEq)]
pub struct Light {
    /// Global horizontal irradiance.
    pub ghi: f64,
    /// Direct normal irradiance.
    pub dni: f64,
    /// Diffuse horizontal irradiance.
    pub dhi: f64,
}

/// Global, direct and diffuse light at a moment: the clear-sky global
/// irradiance (Haurwitz) times the sky's clear-sky index, split by Erbs.
pub fn light(site: Site, sky: &mut Sky, utc_ms: i64) -> (Position, Light) {
    let pos = position(site, utc_ms);
    let ghi = clear_sky_ghi(pos.apparent_zenith_deg) * sky.index(utc_ms);
    let (dni, dhi) = decompose(ghi, pos.zenith_deg, utc_ms);
    (pos, Light { ghi, dni, dhi })
}

/// The geometric zenith angle beyond which no light reaches the ground,
/// degrees: at 91° NOAA's refraction lifts the sun by about 0.33°, leaving
/// it below the horizon, so the clear-sky irradiance is exactly zero.
pub const DARK_ZENITH_DEG: f64 = 91.0;

/// A bound on how fast the sun's zenith angle changes, degrees per
/// millisecond. The zenith angle changes no faster than the sun moves
/// across the sky, at most 0.2507°/min on its diurnal circle (360° per
/// solar day times cos δ ≤ 1, the equation of time's drift included) plus
/// under 0.0003°/min of declination (common practice, no source);
/// 0.3°/min leaves room.
const ZENITH_RATE_DEG_PER_MS: f64 = 0.3 / 60_000.0;

/// A span of time known to be dark at a site, learnt from the last moment
/// whose sun stood more than a degree below the horizon: the sun cannot
/// climb back over it faster than 0.3°/min (`ZENITH_RATE_DEG_PER_MS`).
#[derive(Clone, Copy, Debug)]
pub struct Night {
    from_ms: i64,
    to_ms: i64,
}

impl Default for Night {
    fn default() -> Self {
        Night {
            from_ms: 1,
            to_ms: 0,
        }
    }
}

/// [`light`], or `None` at a moment of a known [`Night`], where its global
/// irradiance would be exactly zero: the sun's position is not computed
/// again there. Each dark moment computed widens what `night` knows.
pub fn light_unless_dark(
    site: Site,
    sky: &mut Sky,
    night: &mut Night,
    utc_ms: i64,
) -> Option<(Position, Light)> {
    if (night.from_ms..=night.to_ms).contains(&utc_ms) {
        return None;
    }
    let (pos, l) = light(site, sky, utc_ms);
    let below = pos.zenith_deg - DARK_ZENITH_DEG;
    if below > 0.0 {
        let reach = (below / ZENITH_RATE_DEG_PER_MS) as i64;
        *night = Night {
            from_ms: utc_ms - reach,
            to_ms: utc_ms + reach,
        };
    }
    Some((pos, l))
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Every minute of a year at sites from the equator to beyond the polar
    /// circles: where a known night says dark, the sun's light is exactly
    /// zero, and the night is known over most of the dark minutes.
    #[test]
    fn a_known_night_is_dark_at_every_minute() {
        const START: i64 = 1_798_761_600_000; // 2027-01-01T00:00Z
        for (lat, lon) in [
            (0.0, 0.0),
            (41.98, -87.9),
            (-33.9, 151.2),
            (69.6, 18.9),
            (-77.8, 166.7),
        ] {
            let site = Site {
                latitude_deg: lat,
                longitude_deg: lon,
            };
            let mut sky = Sky::new(3, lon, 0.5);
            let mut night = Night::default();
            let (mut dark, mut known) = (0, 0);
            for minute in 0..525_600 {
                let t = START + minute * 60_000 + 30_000;
                let exact = light(site, &mut sky, t).1.ghi;
                if exact == 0.0 {
                    dark += 1;
                }
                match light_unless_dark(site, &mut sky, &mut night, t) {
                    None => {
                        assert_eq!(exact.to_bits(), 0.0f64.to_bits(), "{lat} {lon} {t}");
                        known += 1;
                    }
                    Some((_, l)) => assert_eq!(l.ghi.to_bits(), exact.to_bits()),
                }
            }
            assert!(known as f64 > 0.8 * dark as f64, "{lat}: {known} of {dark}");
        }
    }
}
