//! Prints the sun module's figures as CSV, one row per time step, for the
//! cross-check against pvlib (`tests/python/test_sun.py`).
//!
//! `sun_table LAT LON TILT AZIMUTH ALBEDO START_MS STEP_S ROWS DC_W AC_W AIR_C WIND`
//! (a clear sky: the clear-sky index is 1).

use loadloom::sun::pvwatts::{Array, DEFAULT_LOSSES, ROOF_MOUNT, STANDARD_GAMMA};
use loadloom::sun::{decompose, plane_of_array, position, Light, Site, Surface};

#[path = "support/args.rs"]
mod args;

fn main() {
    let numbers = args::numbers();
    let [lat, lon, tilt, az, albedo, start, step, rows, dc, ac, air, wind] = numbers[..] else {
        args::usage(
            "sun_table LAT LON TILT AZIMUTH ALBEDO START_MS STEP_S ROWS DC_W AC_W AIR_C WIND",
        )
    };
    let site = Site {
        latitude_deg: lat,
        longitude_deg: lon,
    };
    let surface = Surface {
        tilt_deg: tilt,
        azimuth_deg: az,
        albedo,
    };
    let array = Array {
        dc_w: dc,
        ac_w: ac,
        gamma: STANDARD_GAMMA,
        losses: DEFAULT_LOSSES,
        mount: ROOF_MOUNT,
    };
    println!("utc_ms,zenith,apparent_zenith,azimuth,ghi,dni,dhi,poa,ac_w");
    for k in 0..rows as i64 {
        let t = start as i64 + k * (step * 1000.0) as i64;
        let p = position(site, t);
        let ghi = loadloom::sun::clear_sky_ghi(p.apparent_zenith_deg);
        let (dni, dhi) = decompose(ghi, p.zenith_deg, t);
        let poa = plane_of_array(
            &surface,
            &Light { ghi, dni, dhi },
            p.zenith_deg,
            p.azimuth_deg,
        );
        let out = array.output(poa, air, wind);
        println!(
            "{t},{},{},{},{ghi},{dni},{dhi},{poa},{out}",
            p.zenith_deg, p.apparent_zenith_deg, p.azimuth_deg
        );
    }
}
