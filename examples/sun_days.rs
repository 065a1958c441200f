//! Prints the sun module's sunrise and sunset as CSV, for the cross-check
//! against pvlib (`tests/python/test_daylight.py`).
//!
//! `sun_days LAT LON MS...`: for each instant (ms since 1970 UTC), the
//! sunrise and sunset of the solar day around it (empty in polar day or
//! night).

use loadloom::sun::position::sunrise_sunset;
use loadloom::sun::Site;

#[path = "support/args.rs"]
mod args;

fn main() {
    let numbers = args::numbers();
    let [lat, lon, ref instants @ ..] = numbers[..] else {
        args::usage("sun_days LAT LON MS...")
    };
    let site = Site {
        latitude_deg: lat,
        longitude_deg: lon,
    };
    println!("utc_ms,sunrise_ms,sunset_ms");
    for &ms in instants {
        let ms = ms as i64;
        match sunrise_sunset(site, ms) {
            Some((rise, set)) => println!("{ms},{rise},{set}"),
            None => println!("{ms},,"),
        }
    }
}
