//! `loadloom validate --year`: a calendar year of the home from its
//! behaviour timelines (at nominal voltage, no electrical solve), each
//! appliance's and the home's energy by month, next to the published
//! figures the scenario cites (`[[reference]]`), and the year's weather
//! against the normal of its climate.

use crate::loads::timelines_with_record;
use crate::scenario::{Reference, Scenario};
use crate::thermal::Record;
use crate::weather::{climate::DegreeDays, WeatherSpec};
use serde::Serialize;

/// One load's year.
#[derive(Clone, Debug, Serialize)]
pub struct LoadYear {
    /// The appliance id.
    pub id: String,
    /// Its energy over the year, kWh.
    pub kwh: f64,
    /// kWh in each calendar month, January first.
    pub monthly_kwh: [f64; 12],
}

/// The year's weather.
#[derive(Clone, Debug, Serialize)]
pub struct WeatherYear {
    /// Mean outdoor temperature over the year, °C.
    pub mean_c: f64,
    /// Mean outdoor temperature of each calendar month, °C, January first.
    pub monthly_mean_c: [f64; 12],
    /// Each local day's mean temperature, °C (hours from local midnight).
    pub daily_mean_c: Vec<f64>,
    /// Heating and cooling degree days, base 18 °C (hourly, K·d).
    pub hdd_18: f64,
    /// Cooling degree days, base 18 °C (hourly, K·d).
    pub cdd_18: f64,
    /// The same to the base of the climate's published normal, and that normal.
    pub normal: Option<(f64, DegreeDays)>,
}

/// A year of a home.
#[derive(Clone, Debug, Serialize)]
pub struct YearReport {
    /// The calendar year (that of the run's start).
    pub year: i16,
    /// Each load's year.
    pub loads: Vec<LoadYear>,
    /// The home's net energy over the year, kWh: the sum over its loads (a PV
    /// inverter's output counts negative).
    pub total_kwh: f64,
    /// The home's energy in each calendar month, kWh, January first.
    pub monthly_kwh: [f64; 12],
    /// Days in each month of that year.
    pub month_days: [f64; 12],
    /// Busiest month over quietest, by energy per day (None: a month of none).
    pub season_ratio: Option<f64>,
    /// Each cited figure with the simulated energy of what it covers.
    pub references: Vec<(Reference, f64)>,
    /// The year's weather, if the home has any.
    pub weather: Option<WeatherYear>,
    /// What the heat balance added up to (heat delivered, hours too cold), if the
    /// home has a building.
    pub thermal: Option<Record>,
}

/// The scenario moved to the calendar year of its start (local 1 January
/// to the next), and the UTC ms at which each month begins.
fn calendar_year(s: &Scenario) -> (Scenario, i16, [i64; 13]) {
    let tz = jiff::tz::TimeZone::get(&s.home.timezone).expect("checked when parsed");
    let start = jiff::Timestamp::from_millisecond(s.run.start_utc_ms)
        .expect("within range")
        .to_zoned(tz.clone());
    let year = start.year();
    let month_ms: [i64; 13] = std::array::from_fn(|m| {
        let (y, mo) = if m == 12 {
            (year + 1, 1)
        } else {
            (year, m as i8 + 1)
        };
        jiff::civil::date(y, mo, 1)
            .to_zoned(tz.clone())
            .map(|z| z.timestamp().as_millisecond())
            .expect("midnight exists on the first of a month")
    });
    let mut y = s.clone();
    y.run.start_utc_ms = month_ms[0];
    y.run.start_local = format!("{year}-01-01T00:00");
    let len = (month_ms[12] - month_ms[0]) as f64 / 1000.0;
    y.run.length_s = (len / s.run.step_s).floor() * s.run.step_s;
    (y, year, month_ms)
}

/// Computes the year report of `s`.
pub fn report(s: &Scenario) -> YearReport {
    let (y, year, month_ms) = calendar_year(s);
    let steps = y.run.steps();
    let (tl, record) = timelines_with_record(&y, steps);
    let step_of = |ms: i64| (((ms - month_ms[0]) as f64 / 1000.0) / y.run.step_s).round() as u64;
    let bounds: Vec<u64> = month_ms.iter().map(|&m| step_of(m).min(steps)).collect();
    let mut loads = Vec::new();
    for (a, t) in y.loads().zip(&tl) {
        let mut monthly = [0.0; 12];
        for seg in &t.segments {
            let p = a.states[seg.state as usize].p_w() * seg.scale as f64;
            if p == 0.0 {
                continue;
            }
            for m in 0..12 {
                let (lo, hi) = (seg.start.max(bounds[m]), seg.end.min(bounds[m + 1]));
                if hi > lo {
                    monthly[m] += p * (hi - lo) as f64 * y.run.step_s / 3.6e6;
                }
            }
        }
        loads.push(LoadYear {
            id: a.id.clone(),
            kwh: monthly.iter().sum(),
            monthly_kwh: monthly,
        });
    }
    let monthly_kwh: [f64; 12] =
        std::array::from_fn(|m| loads.iter().map(|l| l.monthly_kwh[m]).sum());
    let month_days: [f64; 12] =
        std::array::from_fn(|m| ((month_ms[m + 1] - month_ms[m]) as f64 / 86.4e6).round());
    let per_day: Vec<f64> = (0..12).map(|m| monthly_kwh[m] / month_days[m]).collect();
    let lo = per_day.iter().cloned().fold(f64::MAX, f64::min);
    let hi = per_day.iter().cloned().fold(0.0, f64::max);
    let references = y
        .references
        .iter()
        .map(|r| {
            let kwh = loads
                .iter()
                .filter(|l| r.ids.is_empty() || r.ids.contains(&l.id))
                .map(|l| l.kwh)
                .sum();
            (r.clone(), kwh)
        })
        .collect();
    YearReport {
        year,
        total_kwh: loads.iter().map(|l| l.kwh).sum(),
        loads,
        monthly_kwh,
        month_days,
        season_ratio: (lo > 0.0).then(|| hi / lo),
        references,
        weather: weather_year(&y, &month_ms),
        thermal: y.building.as_ref().map(|_| record),
    }
}

fn weather_year(y: &Scenario, month_ms: &[i64; 13]) -> Option<WeatherYear> {
    let spec = y.weather.as_ref()?;
    let tz = jiff::tz::TimeZone::get(&y.home.timezone).expect("checked when parsed");
    let w = crate::weather::series(spec, y.run.start_utc_ms, y.run.length_s, &tz, y.run.seed);
    let hours = ((month_ms[12] - month_ms[0]) / 3_600_000) as usize;
    let first = ((month_ms[0] - w.start_utc_ms) / 3_600_000) as usize;
    let year = crate::weather::Weather {
        start_utc_ms: month_ms[0],
        temp_c: w.temp_c[first..first + hours].to_vec(),
        ghi_w_m2: None,
    };
    let monthly_mean_c = std::array::from_fn(|m| {
        let a = ((month_ms[m] - month_ms[0]) / 3_600_000) as usize;
        let b = ((month_ms[m + 1] - month_ms[0]) / 3_600_000) as usize;
        year.temp_c[a..b].iter().sum::<f64>() / (b - a) as f64
    });
    let normal = match spec {
        WeatherSpec::Synthetic { name: Some(n), .. } => crate::weather::Climate::from_name(n)
            .map(|(named, _)| (degree_days_like(&year, &named.normal), named.normal)),
        _ => None,
    };
    Some(WeatherYear {
        mean_c: year.temp_c.iter().sum::<f64>() / hours as f64,
        monthly_mean_c,
        daily_mean_c: year
            .temp_c
            .chunks(24)
            .map(|d| d.iter().sum::<f64>() / d.len() as f64)
            .collect(),
        hdd_18: year.degree_days(18.0, true),
        cdd_18: year.degree_days(18.0, false),
        normal,
    })
}

/// Heating degree days as the normal counts them: from daily mean
/// temperatures, each day below the base counting base − mean. The
/// European figure (base 18 °C) counts only days under 15 °C (Eurostat's
/// rule); the American one (base 65 °F) every day below the base.
fn degree_days_like(w: &crate::weather::Weather, n: &DegreeDays) -> f64 {
    let threshold = if n.base_c < 18.2 { 15.0 } else { n.base_c };
    w.temp_c
        .chunks(24)
        .map(|d| d.iter().sum::<f64>() / d.len() as f64)
        .filter(|&t| t < threshold)
        .map(|t| (n.base_c - t).max(0.0))
        .sum()
}

/// The report as aligned text.
pub fn render(s: &Scenario, r: &YearReport) -> String {
    let mut o = format!(
        "a year of {} ({}): {} local calendar year, behaviour timelines at nominal voltage\n\n",
        s.name, s.home.label, r.year
    );
    let w = r
        .loads
        .iter()
        .map(|l| l.id.len())
        .max()
        .unwrap_or(4)
        .max(10);
    o += &format!("{:<w$}  {:>9}  {:>6}\n", "load", "kWh/yr", "share");
    for l in &r.loads {
        o += &format!(
            "{:<w$}  {:>9.0}  {:>5.1}%\n",
            l.id,
            l.kwh,
            100.0 * l.kwh / r.total_kwh.max(1e-9)
        );
    }
    o += &format!("{:<w$}  {:>9.0}\n\n", "home", r.total_kwh);
    o += "month     kWh    kWh/day\n";
    for m in 0..12 {
        o += &format!(
            "{:>5}  {:>6.0}  {:>9.1}\n",
            m + 1,
            r.monthly_kwh[m],
            r.monthly_kwh[m] / r.month_days[m]
        );
    }
    if let Some(k) = r.season_ratio {
        o += &format!("busiest month over quietest (energy per day): {k:.2}\n");
    }
    o += "\n";
    if !r.references.is_empty() {
        let nw = r
            .references
            .iter()
            .map(|(x, _)| x.name.len())
            .max()
            .unwrap_or(4)
            .max(9);
        o += &format!(
            "{:<nw$}  {:>10}  {:>10}  {:>6}  source\n",
            "reference", "simulated", "published", "ratio"
        );
        for (x, kwh) in &r.references {
            o += &format!(
                "{:<nw$}  {:>10.0}  {:>10.0}  {:>6.2}  {}\n",
                x.name,
                kwh,
                x.kwh,
                kwh / x.kwh,
                x.source
            );
        }
        o += "(kWh a year; ratio simulated / published)\n\n";
    }
    o += &render_climate(r);
    o
}

/// The weather and heat balance lines of the report.
fn render_climate(r: &YearReport) -> String {
    let mut o = String::new();
    if let Some(wy) = &r.weather {
        o += &format!(
            "weather: mean {:.1} °C, heating degree days {:.0} K·d and cooling {:.0} K·d (base 18 °C, hourly)\n",
            wy.mean_c, wy.hdd_18, wy.cdd_18
        );
        if let Some((dd, n)) = &wy.normal {
            o += &format!(
                "  heating degree days as the normal counts them: {dd:.0} K·d against {:.0} ({:.2}); {}\n",
                n.heating_kd,
                dd / n.heating_kd,
                n.source
            );
        }
    }
    if let Some(t) = &r.thermal {
        o += &format!(
            "heat delivered {:.0} kWh, removed {:.0} kWh; mean indoor {:.1} °C; over 1 K below the setpoint {:.1} % of the time\n",
            t.heat_j / 3.6e6,
            t.cool_j / 3.6e6,
            t.mean_indoor_c,
            100.0 * t.cold_share
        );
        o += &format!(
            "day blocks of the heat balance: temperatures at most {:.2} K apart where one hands over to the next\n",
            t.handover_k
        );
    }
    o
}

/// The report as JSON.
pub fn to_json(s: &Scenario, r: &YearReport) -> serde_json::Value {
    serde_json::json!({
        "scenario": s.name,
        "year": r.year,
        "total_kwh": r.total_kwh,
        "monthly_kwh": r.monthly_kwh,
        "season_ratio": r.season_ratio,
        "loads": r.loads,
        "references": r.references.iter().map(|(x, kwh)| serde_json::json!({
            "name": x.name, "ids": x.ids, "published_kwh": x.kwh, "simulated_kwh": kwh,
            "ratio": kwh / x.kwh, "source": x.source,
        })).collect::<Vec<_>>(),
        "weather": r.weather,
        "thermal": r.thermal,
    })
}
