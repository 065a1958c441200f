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
