//! Climate figures and the named climates of the demos.
//!
//! A climate is twelve monthly mean temperatures (or an annual mean and
//! swing), the daily swing (mean daily maximum minus minimum), the spread of
//! a day's mean about its monthly normal, and the day-to-day persistence of
//! that departure (the lag-1 autocorrelation of an AR(1) process).

use serde::Serialize;

/// Climate figures, °C and K.
#[derive(Clone, Debug, Serialize)]
pub struct Climate {
    /// Mean temperature of each calendar month, January first, °C.
    pub monthly_mean_c: [f64; 12],
    /// Mean daily maximum minus mean daily minimum, K.
    pub daily_swing_k: f64,
    /// Standard deviation of a day's mean about its monthly normal in the
    /// coldest and in the warmest month, K (cosine in between).
    pub spread_k: (f64, f64),
    /// Lag-1 autocorrelation of those daily departures, 0 … 0.99.
    pub persistence: f64,
}

/// A published degree-day figure a named climate is checked against.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct DegreeDays {
    /// Base temperature, °C.
    pub base_c: f64,
    /// Heating degree days a year at that base, K·d.
    pub heating_kd: f64,
    /// Where the figure comes from.
    pub source: &'static str,
}

/// A named climate: figures, where they come from, and a degree-day normal.
pub struct Named {
    /// The name a scenario writes (`climate = "…"`).
    pub name: &'static str,
    /// One line on the place and its climate, for listings.
    pub about: &'static str,
    /// Builds its figures.
    pub climate: fn() -> Climate,
    /// Where the figures come from.
    pub source: &'static str,
    /// The published heating degree days a year, to compare a simulated year with.
    pub normal: DegreeDays,
}

const F: fn(f64) -> f64 = |f| (f - 32.0) * 5.0 / 9.0;

fn lakeshore() -> Climate {
    // NOAA NCEI U.S. Climate Normals 1991–2020 of Chicago O'Hare, as the
    // National Weather Service office Chicago tabulates them ("Chicago
    // Monthly and Yearly Normals (1991-2020)", weather.gov/lot): monthly
    // mean temperature, °F.
    let f = [
        25.2, 28.8, 39.0, 49.7, 60.6, 70.6, 75.4, 73.8, 66.3, 54.0, 41.3, 30.5,
    ];
    Climate {
        monthly_mean_c: f.map(F),
        daily_swing_k: 9.0, // same table: mean high − mean low, 7.1 K in January to 10.1 K in July, 9.2 K over the year
        spread_k: (5.5, 2.8), // from memory (continental winters: cold outbreaks)
        persistence: 0.7,   // lag-1 autocorrelation of daily mean departures, from memory
    }
}

fn harbour() -> Climate {
    // NOAA NCEI U.S. Climate Normals 1991–2020 of New York Central Park
    // (monthly mean temperature, °F). January to March as tabulated from
    // them in Wikipedia's New York climate table (revision of 4 May 2021);
    // April to December from memory (not found in a source).
    let f = [
        33.7, 35.9, 42.8, 53.7, 63.2, 72.0, 77.5, 76.1, 69.2, 57.9, 48.0, 38.1,
    ];
    Climate {
        monthly_mean_c: f.map(F),
        // Mean max − mean min = 2 × (mean max − mean): the same table's
        // mean daily maxima give 6.4 K in January to 7.9 K in March, and
        // with the April to December means above, 8.2 K in July and 7.7 K
        // over the year (62.6 °F mean maximum).
        daily_swing_k: 7.5,
        spread_k: (4.5, 2.5), // from memory
        persistence: 0.7,     // from memory
    }
}

fn rhineland() -> Climate {
    // Deutscher Wetterdienst, area mean of Germany, reference period
    // 1991–2020 (monthly mean temperature, °C; annual 9.3 °C in DWD's
    // "Deutschlandwetter im Jahr 2023"). The monthly values as republished
    // from DWD's 1 km grid by monatsprognose.de and
    // wetterprognose-wettervorhersage.de (DWD's own table not consulted).
    Climate {
        monthly_mean_c: [
            0.9, 1.5, 4.7, 9.0, 13.1, 16.4, 18.3, 17.9, 13.8, 9.4, 4.8, 1.8,
        ],
        daily_swing_k: 8.0, // DWD station normals, mean max − mean min, from memory
        spread_k: (4.5, 2.8), // from memory
        persistence: 0.75,  // from memory
    }
}

/// The named climates (invented names; figures from published normals).
pub const NAMED: [Named; 3] = [
    Named {
        name: "lakeshore",
        about: "cold continental winters, warm humid summers (Great Lakes)",
        climate: lakeshore,
        source: "NOAA NCEI U.S. Climate Normals 1991-2020, Chicago O'Hare (NWS Chicago's table)",
        // 5 974 °F·d base 65 °F: the annual heating degree days of the same
        // NWS Chicago table.
        normal: DegreeDays {
            base_c: 18.333,
            heating_kd: 5974.0 * 5.0 / 9.0,
            source: "NOAA NCEI 1991-2020 normals, Chicago O'Hare: 5974 heating degree days (base 65 F), NWS Chicago's monthly and yearly normals table",
        },
    },
    Named {
        name: "harbour",
        about: "mild coastal winters, hot humid summers (Mid-Atlantic coast)",
        climate: harbour,
        source: "NOAA NCEI U.S. Climate Normals 1991-2020, New York Central Park (January to March; the rest from memory)",
        // NWS New York's Central Park climate report for 24 May 2023
        // (CLINYC, normals 1991–2020): 4 522 °F·d from 1 July to 24 May,
        // 3 a day by then; the five weeks to 30 June add a few tens.
        normal: DegreeDays {
            base_c: 18.333,
            heating_kd: 4600.0 * 5.0 / 9.0,
            source: "NOAA NCEI 1991-2020 normals, New York Central Park: about 4600 heating degree days (base 65 F); 4522 from 1 July to 24 May in NWS New York's climate report of 25 May 2023",
        },
    },
    Named {
        name: "rhineland",
        about: "temperate central European (German area mean)",
        climate: rhineland,
        source: "Deutscher Wetterdienst, German area mean 1991-2020",
        // Eurostat's heating degree days: 18 °C − daily mean on days whose
        // mean is below 15 °C (the definition as the European Environment
        // Agency's indicator CLIM 047, 2012, quotes it); Germany, recent
        // decades about 3 100, from memory (the EU as a whole: 3 126 in
        // 2021, 2 858 in 2022, Eurostat news releases of 2022 and 2023).
        normal: DegreeDays {
            base_c: 18.0,
            heating_kd: 3100.0,
            source: "Eurostat heating degree days (18 C base, days under 15 C), Germany: about 3100, from memory",
        },
    },
];

impl Climate {
    /// A named climate, or None.
    pub fn from_name(name: &str) -> Option<(&'static Named, Climate)> {
        NAMED
            .iter()
            .find(|n| n.name == name)
            .map(|n| (n, (n.climate)()))
    }

    /// Twelve monthly means from an annual mean and a swing (warmest month
    /// minus coldest), coldest in `coldest_month` (0 = January): a cosine.
    pub fn monthly_from_swing(mean_c: f64, swing_k: f64, coldest_month: usize) -> [f64; 12] {
        std::array::from_fn(|m| {
            let x = (m as f64 - coldest_month as f64) / 12.0 * std::f64::consts::TAU;
            mean_c - 0.5 * swing_k * x.cos()
        })
    }

    /// The smooth annual course through the monthly means.
    pub fn annual_course(&self) -> Course {
        Course::new(self)
    }
}

/// Day of year (0-based, 365-day year) of each month's middle.
fn mid_month_days() -> [f64; 12] {
    const LEN: [f64; 12] = [
        31.0, 28.0, 31.0, 30.0, 31.0, 30.0, 31.0, 31.0, 30.0, 31.0, 30.0, 31.0,
    ];
    let mut start = 0.0;
    std::array::from_fn(|m| {
        let mid = start + LEN[m] / 2.0;
        start += LEN[m];
        mid
    })
}

/// A periodic piecewise-linear curve through one node per mid-month, the
/// nodes set so each month's mean over the curve equals its monthly mean.
pub struct Course {
    mid: [f64; 12],
    node: [f64; 12],
    cold: (usize, f64),
    warm: (usize, f64),
    spread: (f64, f64),
}

impl Course {
    fn new(c: &Climate) -> Course {
        let mid = mid_month_days();
        let target = c.monthly_mean_c;
        let mut node = target;
        // Jacobi steps on "mean of the curve over month m = target m":
        // diagonally dominant (about (x[m-1] + 6 x[m] + x[m+1]) / 8), so it
        // converges geometrically; 60 passes leave well under 1e-9 K.
        for _ in 0..60 {
            let probe = Course {
                mid,
                node,
                cold: (0, 0.0),
                warm: (0, 0.0),
                spread: (0.0, 0.0),
            };
            let means = probe.monthly_means();
            for m in 0..12 {
                node[m] += target[m] - means[m];
            }
        }
        let (mut cold, mut warm) = ((0, f64::MAX), (0, f64::MIN));
        for (m, &t) in target.iter().enumerate() {
            if t < cold.1 {
                cold = (m, t);
            }
            if t > warm.1 {
                warm = (m, t);
            }
        }
        Course {
            mid,
            node,
            cold,
            warm,
            spread: c.spread_k,
        }
    }

    /// The temperature of the smooth course at day-of-year `d` (0 … 365).
    pub fn at(&self, d: f64) -> f64 {
        let d = d.rem_euclid(365.0);
        let j = self.mid.iter().rposition(|&m| m <= d);
        let (a, b) = match j {
            Some(11) | None => (11, 0),
            Some(j) => (j, j + 1),
        };
        let (da, db) = (self.mid[a], self.mid[b]);
        let span = (db - da).rem_euclid(365.0);
        let w = (d - da).rem_euclid(365.0) / span;
        self.node[a] * (1.0 - w) + self.node[b] * w
    }

    /// The spread of daily departures at day-of-year `d`: the coldest
    /// month's at its middle, the warmest month's at its, a half cosine
    /// between. Twelve equal months have no coldest and warmest month
    /// apart: the mean of the two spreads all year.
    pub fn spread_at(&self, d: f64) -> f64 {
        let (c, w) = (self.mid[self.cold.0], self.mid[self.warm.0]);
        let half = (w - c).rem_euclid(365.0);
        if half == 0.0 {
            return 0.5 * (self.spread.0 + self.spread.1);
        }
        let x = (d - c).rem_euclid(365.0);
        let phase = if x <= half {
            x / half
        } else {
            1.0 - (x - half) / (365.0 - half)
        };
        let k = 0.5 - 0.5 * (std::f64::consts::PI * phase).cos();
        self.spread.0 * (1.0 - k) + self.spread.1 * k
    }

    /// Each month's mean of the curve (hourly samples).
    fn monthly_means(&self) -> [f64; 12] {
        const LEN: [usize; 12] = [31, 28, 31, 30, 31, 30, 31, 31, 30, 31, 30, 31];
        let mut out = [0.0; 12];
        let mut day = 0usize;
        for m in 0..12 {
            let n = LEN[m] * 24;
            let sum: f64 = (0..n)
                .map(|h| self.at(day as f64 + (h as f64 + 0.5) / 24.0))
                .sum();
            out[m] = sum / n as f64;
            day += LEN[m];
        }
        out
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn the_course_keeps_every_monthly_mean() {
        for n in &NAMED {
            let c = (n.climate)();
            let means = c.annual_course().monthly_means();
            for m in 0..12 {
                assert!(
                    (means[m] - c.monthly_mean_c[m]).abs() < 1e-6,
                    "{} {m}",
                    n.name
                );
            }
        }
    }

    #[test]
    fn a_swing_gives_a_cosine_year() {
        let m = Climate::monthly_from_swing(10.0, 20.0, 0);
        assert!((m[0] - 0.0).abs() < 1e-12);
        assert!((m[6] - 20.0).abs() < 1e-12);
        assert!((m.iter().sum::<f64>() / 12.0 - 10.0).abs() < 1e-9);
    }

    #[test]
    fn twelve_equal_months_give_a_finite_spread() {
        // Hostile input: `monthly` with one value twelve times made the
        // coldest and warmest month the same one, and the spread NaN.
        let c = Climate {
            monthly_mean_c: [10.0; 12],
            ..Climate::from_name("lakeshore").unwrap().1
        };
        let course = c.annual_course();
        for d in 0..365 {
            let s = course.spread_at(d as f64 + 0.5);
            assert!(s.is_finite() && s > 0.0, "day {d}: {s}");
        }
    }

    #[test]
    fn spread_runs_from_winter_to_summer() {
        let c = (NAMED[0].climate)();
        let course = c.annual_course();
        assert!((course.spread_at(15.5) - 5.5).abs() < 1e-9);
        assert!((course.spread_at(196.5) - 2.8).abs() < 1e-9);
        let mid = course.spread_at(105.0);
        assert!(mid > 2.8 && mid < 5.5);
    }
}
