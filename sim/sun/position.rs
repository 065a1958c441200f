//! Solar position from the NOAA solar position equations (NOAA Global
//! Monitoring Laboratory, "Solar Calculation Details" and its spreadsheet,
//! after Meeus, "Astronomical Algorithms", 1991). Stated accuracy: about
//! 0.01° in the years 1800–2100 against the full ephemeris, with the
//! spreadsheet's approximate atmospheric refraction.

use super::Site;

/// Where the sun stands, degrees.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Position {
    /// Geometric zenith angle (no refraction).
    pub zenith_deg: f64,
    /// Zenith angle as seen through the atmosphere (refraction applied).
    pub apparent_zenith_deg: f64,
    /// Azimuth, clockwise from north (east 90°, south 180°).
    pub azimuth_deg: f64,
    /// Declination of the sun.
    pub declination_deg: f64,
    /// Equation of time, minutes.
    pub equation_of_time_min: f64,
}

impl Position {
    /// Apparent elevation above the horizon.
    pub fn elevation_deg(&self) -> f64 {
        90.0 - self.apparent_zenith_deg
    }
}

const MS_PER_DAY: f64 = 86_400_000.0;

fn sind(x: f64) -> f64 {
    x.to_radians().sin()
}
fn cosd(x: f64) -> f64 {
    x.to_radians().cos()
}

/// Declination (degrees) and equation of time (minutes) for Julian
/// centuries `t` since J2000.0 (NOAA, spreadsheet columns G–V).
fn declination_and_eot(t: f64) -> (f64, f64) {
    let l0 = (280.46646 + t * (36000.76983 + t * 0.0003032)).rem_euclid(360.0);
    let m = 357.52911 + t * (35999.05029 - 0.0001537 * t);
    let e = 0.016708634 - t * (0.000042037 + 0.0000001267 * t);
    let c = sind(m) * (1.914602 - t * (0.004817 + 0.000014 * t))
        + sind(2.0 * m) * (0.019993 - 0.000101 * t)
        + sind(3.0 * m) * 0.000289;
    let omega = 125.04 - 1934.136 * t;
    let lambda = l0 + c - 0.00569 - 0.00478 * sind(omega);
    let eps0 = 23.0 + (26.0 + (21.448 - t * (46.815 + t * (0.00059 - t * 0.001813))) / 60.0) / 60.0;
    let eps = eps0 + 0.00256 * cosd(omega);
    let decl = (sind(eps) * sind(lambda)).asin().to_degrees();
    let y = (eps / 2.0).to_radians().tan().powi(2);
    let (l0r, mr) = (l0.to_radians(), m.to_radians());
    let eot = 4.0
        * (y * (2.0 * l0r).sin() - 2.0 * e * mr.sin() + 4.0 * e * y * mr.sin() * (2.0 * l0r).cos()
            - 0.5 * y * y * (4.0 * l0r).sin()
            - 1.25 * e * e * (2.0 * mr).sin())
        .to_degrees();
    (decl, eot)
}

/// Atmospheric refraction in degrees at a geometric elevation (NOAA's
/// approximation, in three ranges of elevation).
fn refraction_deg(elev: f64) -> f64 {
    let arcsec = if elev > 85.0 {
        0.0
    } else if elev > 5.0 {
        let t = elev.to_radians().tan();
        58.1 / t - 0.07 / t.powi(3) + 0.000086 / t.powi(5)
    } else if elev > -0.575 {
        1735.0 + elev * (-518.2 + elev * (103.4 + elev * (-12.79 + elev * 0.711)))
    } else {
        -20.772 / elev.to_radians().tan()
    };
    arcsec / 3600.0
}

/// The sun's position seen from `site` at `utc_ms`.
///
/// ```
/// use loadloom::sun::{position, Site};
/// // Near solar noon on the June solstice at 40° N on the Greenwich meridian:
/// // the sun stands about 40° − 23.44° = 16.6° from the zenith, due south.
/// let p = position(Site { latitude_deg: 40.0, longitude_deg: 0.0 }, 1_782_043_200_000 + 90_000);
/// assert!((p.zenith_deg - 16.56).abs() < 0.1, "{}", p.zenith_deg);
/// assert!((p.azimuth_deg - 180.0).abs() < 2.0, "{}", p.azimuth_deg);
/// ```
pub fn position(site: Site, utc_ms: i64) -> Position {
    let jd = utc_ms as f64 / MS_PER_DAY + 2_440_587.5;
    let t = (jd - 2_451_545.0) / 36_525.0;
    let (decl, eot) = declination_and_eot(t);
    let minutes = (utc_ms as f64).rem_euclid(MS_PER_DAY) / 60_000.0;
    let true_solar = (minutes + eot + 4.0 * site.longitude_deg).rem_euclid(1440.0);
    let hour_angle = true_solar / 4.0 - 180.0;
    let (phi, d, h) = (
        site.latitude_deg.to_radians(),
        decl.to_radians(),
        hour_angle.to_radians(),
    );
    let cos_z = (phi.sin() * d.sin() + phi.cos() * d.cos() * h.cos()).clamp(-1.0, 1.0);
    let zenith = cos_z.acos().to_degrees();
    // Azimuth from north, clockwise: the atan2 form of NOAA's arccos pair,
    // defined at the poles and at the zenith too.
    let azimuth = (180.0
        + h.sin()
            .atan2(h.cos() * phi.sin() - d.tan() * phi.cos())
            .to_degrees())
    .rem_euclid(360.0);
    let apparent = zenith - refraction_deg(90.0 - zenith);
    Position {
        zenith_deg: zenith,
        apparent_zenith_deg: apparent,
        azimuth_deg: azimuth,
        declination_deg: decl,
        equation_of_time_min: eot,
    }
}

/// Sunrise and sunset of the local solar day around `utc_ms`, in UTC
/// milliseconds, found where the geometric elevation crosses −0.833° (the
/// sun's upper limb on the horizon: 34′ of standard refraction plus the
/// sun's 16′ radius; NOAA).
/// `None` in polar day or night.
pub fn sunrise_sunset(site: Site, utc_ms: i64) -> Option<(i64, i64)> {
    // Solar noon of that solar day, then bisection on either side.
    let offset = (-site.longitude_deg / 360.0 * MS_PER_DAY) as i64;
    let day = (utc_ms - offset).div_euclid(MS_PER_DAY as i64);
    let noon = day * MS_PER_DAY as i64 + offset + MS_PER_DAY as i64 / 2;
    let up = |ms: i64| 90.0 - position(site, ms).zenith_deg > -0.833;
    let half = MS_PER_DAY as i64 / 2;
    if !up(noon) || up(noon - half) || up(noon + half) {
        return None;
    }
    let cross = |mut a: i64, mut b: i64| {
        // up(a) != up(b); 30 halvings of half a day: below 0.1 s.
        for _ in 0..30 {
            let m = a + (b - a) / 2;
            if up(m) == up(a) {
                a = m;
            } else {
                b = m;
            }
        }
        a + (b - a) / 2
    };
    Some((cross(noon - half, noon), cross(noon, noon + half)))
}

#[cfg(test)]
mod tests {
    use super::*;

    const DAY: i64 = 86_400_000;
    // 2027-03-20T00:00Z (an equinox day) in ms.
    const MAR20: i64 = 1_805_500_800_000;

    #[test]
    fn equinox_noon_zenith_is_the_latitude() {
        // At an equinox the declination is near 0°: the noon zenith angle
        // equals the latitude (textbook: Duffie & Beckman, eq. 1.6.5).
        let site = Site {
            latitude_deg: 45.0,
            longitude_deg: 0.0,
        };
        let best = (0..24 * 60)
            .map(|m| position(site, MAR20 + m * 60_000).zenith_deg)
            .fold(f64::MAX, f64::min);
        assert!((best - 45.0).abs() < 0.5, "{best}");
    }

    #[test]
    fn declination_spans_the_obliquity_over_a_year() {
        let site = Site {
            latitude_deg: 0.0,
            longitude_deg: 0.0,
        };
        let d: Vec<f64> = (0..366)
            .map(|k| position(site, MAR20 + k * DAY).declination_deg)
            .collect();
        let (lo, hi) = d
            .iter()
            .fold((f64::MAX, f64::MIN), |(a, b), &x| (a.min(x), b.max(x)));
        // Obliquity of the ecliptic about 23.44° (IAU; textbook).
        assert!(
            (hi - 23.44).abs() < 0.02 && (lo + 23.44).abs() < 0.02,
            "{lo} {hi}"
        );
    }

    #[test]
    fn equation_of_time_stays_within_its_known_bounds() {
        // Textbook range: about −14.2 min (February) to +16.4 min (November).
        let site = Site {
            latitude_deg: 0.0,
            longitude_deg: 0.0,
        };
        let e: Vec<f64> = (0..366)
            .map(|k| position(site, MAR20 + k * DAY).equation_of_time_min)
            .collect();
        let lo = e.iter().cloned().fold(f64::MAX, f64::min);
        let hi = e.iter().cloned().fold(f64::MIN, f64::max);
        assert!(
            (lo + 14.2).abs() < 0.3 && (hi - 16.4).abs() < 0.3,
            "{lo} {hi}"
        );
    }

    #[test]
    fn equinox_day_is_about_twelve_hours_long() {
        let site = Site {
            latitude_deg: 50.0,
            longitude_deg: 10.0,
        };
        let (rise, set) = sunrise_sunset(site, MAR20 + DAY / 2).expect("not polar");
        let hours = (set - rise) as f64 / 3.6e6;
        // Refraction and the solar disc lengthen the day by some minutes.
        assert!(hours > 12.0 && hours < 12.4, "{hours}");
    }

    #[test]
    fn polar_night_has_no_sunrise() {
        let site = Site {
            latitude_deg: 80.0,
            longitude_deg: 0.0,
        };
        // 2026-12-21 at noon UTC.
        assert!(sunrise_sunset(site, 1_797_854_400_000).is_none());
    }
}
