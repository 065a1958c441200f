//! Irradiance: above the atmosphere, under a clear sky, split into direct
//! and diffuse, and onto a tilted plane.

use super::Light;

/// A plane receiving light: tilt from horizontal and azimuth clockwise from
/// north (a south-facing roof: 180°), degrees; the ground's albedo.
#[derive(Clone, Copy, Debug, PartialEq, serde::Serialize)]
pub struct Surface {
    /// Tilt from horizontal, degrees (0 flat, 90 vertical).
    pub tilt_deg: f64,
    /// Direction the plane faces, degrees clockwise from north (south 180).
    pub azimuth_deg: f64,
    /// Share of light the ground in front reflects (0 … 1).
    pub albedo: f64,
}

/// Day of the year (1 … 366) of a UTC instant.
pub fn day_of_year(utc_ms: i64) -> u32 {
    let ts = jiff::Timestamp::from_millisecond(utc_ms).unwrap_or(jiff::Timestamp::UNIX_EPOCH);
    ts.to_zoned(jiff::tz::TimeZone::UTC).day_of_year() as u32
}

/// Extraterrestrial irradiance normal to the sun's rays, W/m²: the solar
/// constant 1366.1 W/m² times the Spencer (1971) series for the inverse
/// square of the earth–sun distance ("Fourier series representation of the
/// position of the sun", Search 2(5)).
pub fn extraterrestrial(utc_ms: i64) -> f64 {
    let b = 2.0 * std::f64::consts::PI * (day_of_year(utc_ms) as f64 - 1.0) / 365.0;
    1366.1
        * (1.00011
            + 0.034221 * b.cos()
            + 0.00128 * b.sin()
            + 0.000719 * (2.0 * b).cos()
            + 0.000077 * (2.0 * b).sin())
}

/// Clear-sky global horizontal irradiance, W/m², from the apparent zenith
/// angle: Haurwitz (1945), "Insolation in relation to cloud type", J.
/// Meteorology 3, in the form GHI = 1098·cos z·exp(−0.059 / cos z) given by
/// Reno, Hansen & Stein (2012), "Global horizontal irradiance clear sky
/// models", Sandia report SAND2012-2389. Zero with the sun below the horizon.
pub fn clear_sky_ghi(apparent_zenith_deg: f64) -> f64 {
    let c = apparent_zenith_deg.to_radians().cos();
    if c > 0.0 {
        1098.0 * c * (-0.059 / c).exp()
    } else {
        0.0
    }
}

/// The smallest cosine of the zenith used to form the clearness index, and
/// the zenith above which no direct light is kept (as pvlib's `erbs` does,
/// where the split is unreliable near the horizon).
const MIN_COS_ZENITH: f64 = 0.065;
const MAX_ZENITH_DEG: f64 = 87.0;

/// Splits global horizontal irradiance into direct normal and diffuse
/// horizontal, W/m², with the diffuse fraction of Erbs, Klein & Duffie
/// (1982), "Estimation of the diffuse radiation fraction for hourly, daily
/// and monthly-average global radiation", Solar Energy 28(4), as a function
/// of the clearness index kt = GHI / (I0·cos z).
pub fn decompose(ghi: f64, zenith_deg: f64, utc_ms: i64) -> (f64, f64) {
    if ghi <= 0.0 {
        return (0.0, 0.0);
    }
    let cos_z = zenith_deg.to_radians().cos();
    let kt = (ghi / (extraterrestrial(utc_ms) * cos_z.max(MIN_COS_ZENITH))).clamp(0.0, 1.0);
    let df = if kt <= 0.22 {
        1.0 - 0.09 * kt
    } else if kt <= 0.8 {
        0.9511 - 0.1604 * kt + 4.388 * kt.powi(2) - 16.638 * kt.powi(3) + 12.336 * kt.powi(4)
    } else {
        0.165
    };
    let dhi = df * ghi;
    let dni = (ghi - dhi) / cos_z;
    if zenith_deg > MAX_ZENITH_DEG || dni < 0.0 {
        (0.0, ghi)
    } else {
        (dni, dhi)
    }
}

/// Cosine of the angle of incidence of the sun's rays on a surface.
pub fn cos_incidence(surface: &Surface, zenith_deg: f64, azimuth_deg: f64) -> f64 {
    let (z, t) = (zenith_deg.to_radians(), surface.tilt_deg.to_radians());
    let daz = (azimuth_deg - surface.azimuth_deg).to_radians();
    (z.cos() * t.cos() + z.sin() * t.sin() * daz.cos()).clamp(-1.0, 1.0)
}

/// Irradiance on the plane of a tilted surface, W/m²: direct light by the
/// angle of incidence, sky diffuse by the isotropic view factor
/// (1 + cos β)/2 and ground-reflected light by albedo·(1 − cos β)/2 (Liu &
/// Jordan 1963, "A rational procedure for predicting the long-term average
/// performance of flat-plate solar-energy collectors", Solar Energy 7(2);
/// Duffie & Beckman, Solar Engineering of Thermal Processes, eq. 2.15.1).
pub fn plane_of_array(surface: &Surface, light: &Light, zenith_deg: f64, azimuth_deg: f64) -> f64 {
    let beam = (light.dni * cos_incidence(surface, zenith_deg, azimuth_deg)).max(0.0);
    let c = surface.tilt_deg.to_radians().cos();
    beam + light.dhi * (1.0 + c) / 2.0 + light.ghi * surface.albedo * (1.0 - c) / 2.0
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn extraterrestrial_peaks_at_perihelion() {
        // Early January (perihelion) about 1412 W/m², early July about
        // 1321 W/m² (Duffie & Beckman, eq. 1.4.1: ±3.3 % around 1367).
        let jan = extraterrestrial(1_798_761_600_000); // 2027-01-01
        let jul = extraterrestrial(1_814_486_400_000); // 2027-07-02
        assert!(
            (jan - 1412.0).abs() < 3.0 && (jul - 1321.0).abs() < 3.0,
            "{jan} {jul}"
        );
    }

    #[test]
    fn haurwitz_at_the_zenith_and_below_the_horizon() {
        // 1098·exp(−0.059) at z = 0.
        assert!((clear_sky_ghi(0.0) - 1035.1).abs() < 0.1);
        assert_eq!(clear_sky_ghi(95.0), 0.0);
    }

    #[test]
    fn erbs_keeps_the_global_irradiance() {
        // GHI = DNI·cos z + DHI whenever direct light is kept.
        for (ghi, z) in [(800.0, 30.0f64), (300.0, 60.0), (50.0, 80.0), (900.0, 20.0)] {
            let (dni, dhi) = decompose(ghi, z, 1_805_500_800_000);
            let back = dni * z.to_radians().cos() + dhi;
            assert!((back - ghi).abs() < 1e-9, "{ghi} {z}: {back}");
        }
        // An overcast sky is all diffuse (kt ≤ 0.22: fraction 1 − 0.09 kt).
        let (dni, dhi) = decompose(100.0, 30.0, 1_805_500_800_000);
        assert!(dhi > 97.0 && dni < 4.0, "{dni} {dhi}");
    }

    #[test]
    fn a_horizontal_plane_sees_the_global_irradiance() {
        let flat = Surface {
            tilt_deg: 0.0,
            azimuth_deg: 180.0,
            albedo: 0.2,
        };
        let l = Light {
            ghi: 700.0,
            dni: 600.0,
            dhi: 700.0 - 600.0 * 0.5,
        };
        let poa = plane_of_array(&flat, &l, 60.0, 150.0);
        assert!((poa - 700.0).abs() < 1e-9, "{poa}");
    }

    #[test]
    fn a_plane_facing_the_sun_gets_the_full_beam() {
        let s = Surface {
            tilt_deg: 40.0,
            azimuth_deg: 180.0,
            albedo: 0.0,
        };
        assert!((cos_incidence(&s, 40.0, 180.0) - 1.0).abs() < 1e-12);
        // A vertical north wall never sees a sun in the south.
        let n = Surface {
            tilt_deg: 90.0,
            azimuth_deg: 0.0,
            albedo: 0.0,
        };
        assert!(cos_incidence(&n, 40.0, 180.0) < 0.0);
    }
}
