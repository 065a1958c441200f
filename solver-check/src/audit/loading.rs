//! The loading picture of a dataset, from its
//! meters alone. Per line: the peak current, the 15-minute demand current
//! (the largest mean over clock quarter-hours, as demand meters integrate),
//! the mean, each against the service rating; the imbalance between lines;
//! and the neutral current, measured and estimated from the line readings.
//!
//! An analysis of data, not an inspection: see [`CAUTION`].

use crate::contract::columns;
use crate::contract::AUDIT_FORMAT;
use crate::dataset::Dataset;
use crate::render::Render;
use crate::stream::{header, Header};
use serde_json::{json, Value};
use std::path::Path;

/// Printed wherever loadloom speaks of wiring, loading or breakers: an
/// analysis of data is not an inspection.
pub const CAUTION: &str = "Caution: this is an analysis of data, not an inspection of the installation. Local electrical codes (for example the NEC in the US, IEC 60364 and national rules in Europe) and a licensed electrician decide what is safe and allowed.";

/// One line conductor's loading over the dataset.
pub struct LineLoading {
    /// The conductor's label (`L1`).
    pub line: String,
    /// Whether the line has readings at all (a missing CT has none).
    pub measured: bool,
    /// When the peak was read, ms since the epoch.
    pub peak_ms: Option<i64>,
    /// The largest current read in one interval, A.
    pub peak_a: f64,
    /// The largest mean current over a clock quarter hour (a demand reading), A.
    pub demand_15min_a: f64,
    /// Mean current over the rows read, A.
    pub mean_a: f64,
}

/// The loading picture of a dataset: current per line against the service,
/// imbalance, neutral.
pub struct Loading {
    /// The service rating from the manifest, A (0 when it gives none).
    pub service_a: f64,
    /// Per line conductor.
    pub lines: Vec<LineLoading>,
    /// Largest deviation of a line's mean current from the lines' average,
    /// over that average (common practice, no source).
    pub imbalance: Option<f64>,
    /// The largest neutral current read, A, if the meter reads the neutral.
    pub neutral_peak_measured_a: Option<f64>,
    /// The largest neutral current computed from the line readings (the phasor
    /// sum of the line currents at the supply's angles), A.
    pub neutral_peak_estimated_a: f64,
    /// Whether the table has current columns (else currents are from power).
    pub current_measured: bool,
    /// The home's time zone (IANA), for the local time of each peak.
    pub timezone: String,
}

/// Line-to-neutral phase angles of the supply, degrees (from the manifest).
fn angles(ds: &Dataset) -> Vec<f64> {
    ds.manifest["supply"]["phase_angles_deg"]
        .as_array()
        .map(|a| a.iter().filter_map(|x| x.as_f64()).collect())
        .unwrap_or_default()
}

/// The loading picture of the dataset folder `dataset`, from its meters and
/// manifest.
pub fn loading(dataset: &Path) -> Result<Loading, String> {
    let ds = Dataset::open(dataset).map_err(|e| e.to_string())?;
    let service_a = ds.manifest["supply"]["service_a"].as_f64().unwrap_or(0.0);
    let h = header(&super::meters_file(dataset)?).map_err(|e| e.to_string())?;
    let nominal_v = ds.manifest["supply"]["voltage_ln_v"]
        .as_f64()
        .unwrap_or(f64::NAN);
    let mut l = loading_of(&h, &ds.lines, &angles(&ds), service_a, nominal_v)?;
    if let Some(tz) = ds.manifest["time"]["timezone"].as_str() {
        l.timezone = tz.to_string();
    }
    Ok(l)
}

/// The loading picture of a meters table with these line channels. A table
/// without current columns (a monitor giving P, or P and V, only) gets each
/// line's current from its apparent power over its voltage (measured, else
/// `nominal_v`), with unity power factor when Q is missing: a lower bound.
pub fn loading_of(
    h: &Header,
    lines: &[String],
    ang: &[f64],
    service_a: f64,
    nominal_v: f64,
) -> Result<Loading, String> {
    let n = lines.len();
    let mut cols = Vec::new();
    // Per line, the index of its i, p, q and v columns among `cols`.
    let mut at = vec![[None::<usize>; 4]; n];
    for (x, l) in lines.iter().enumerate() {
        for (k, q) in ["i_a", "p_w", "q_var", "v_v"].iter().enumerate() {
            let c = format!("{l}_{q}");
            if h.has(&c) {
                at[x][k] = Some(cols.len());
                cols.push(c);
            }
        }
    }
    let current_measured = at.iter().all(|a| a[0].is_some());
    let has_n = h.has(columns::NEUTRAL_I);
    if has_n {
        cols.push(columns::NEUTRAL_I.into());
    }
    let (mut peak, mut sum, mut count) = (vec![0.0f64; n], vec![0.0f64; n], vec![0u64; n]);
    let mut peak_ms = vec![None::<i64>; n];
    let (mut n_peak, mut n_est_peak) = (None::<f64>, 0.0f64);
    // 15-minute demand: means over clock quarter-hours (UTC quarter-hours are
    // local ones too for every zone offset in whole quarter-hours).
    let (mut q_key, mut q_sum, mut q_n, mut demand) =
        (i64::MIN, vec![0.0f64; n], 0u64, vec![0.0f64; n]);
    let mut st = h.stream(&cols).map_err(|e| e.to_string())?;
    while let Some(b) = st.next_batch().map_err(|e| e.to_string())? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            let key = t.div_euclid(900_000);
            if key != q_key {
                if q_n > 0 {
                    for x in 0..n {
                        demand[x] = demand[x].max(q_sum[x] / q_n as f64);
                    }
                }
                q_key = key;
                q_sum.iter_mut().for_each(|v| *v = 0.0);
                q_n = 0;
            }
            let (mut re, mut im, mut any) = (0.0, 0.0, false);
            for x in 0..n {
                let get = |j: usize, or: f64| at[x][j].map(|c| b.cols[c][k]).unwrap_or(or);
                let (p, q, v) = (get(1, f64::NAN), get(2, 0.0), get(3, nominal_v));
                let i = get(0, p.hypot(q) / v);
                if i.is_nan() {
                    continue;
                }
                any = true;
                if i > peak[x] || peak_ms[x].is_none() {
                    peak[x] = peak[x].max(i);
                    peak_ms[x] = Some(t);
                }
                sum[x] += i;
                count[x] += 1;
                q_sum[x] += i;
                // The line's current phasor from its readings: I = conj(S / V),
                // with V at the supply's angle for that line.
                if v > 0.0 && !p.is_nan() && !q.is_nan() {
                    let a = ang.get(x).copied().unwrap_or(0.0).to_radians();
                    let (ir, ii) = (p / v, -q / v); // conj(S)/|V| relative to V
                    re += ir * a.cos() - ii * a.sin();
                    im += ir * a.sin() + ii * a.cos();
                }
            }
            if any {
                q_n += 1;
                // Kirchhoff: the neutral returns minus the sum of the line currents.
                n_est_peak = n_est_peak.max((re * re + im * im).sqrt());
            }
            if has_n {
                let v = b.cols[cols.len() - 1][k];
                if !v.is_nan() {
                    n_peak = Some(n_peak.unwrap_or(0.0).max(v));
                }
            }
        }
    }
    if q_n > 0 {
        for x in 0..n {
            demand[x] = demand[x].max(q_sum[x] / q_n as f64);
        }
    }
    let lines: Vec<LineLoading> = (0..n)
        .map(|x| LineLoading {
            line: lines[x].clone(),
            measured: count[x] > 0,
            peak_ms: peak_ms[x],
            peak_a: peak[x],
            demand_15min_a: demand[x],
            mean_a: if count[x] > 0 {
                sum[x] / count[x] as f64
            } else {
                0.0
            },
        })
        .collect();
    let means: Vec<f64> = lines
        .iter()
        .filter(|l| l.mean_a > 0.0)
        .map(|l| l.mean_a)
        .collect();
    let imbalance = (means.len() >= 2).then(|| {
        let avg = means.iter().sum::<f64>() / means.len() as f64;
        means.iter().map(|m| (m - avg).abs()).fold(0.0, f64::max) / avg
    });
    Ok(Loading {
        service_a,
        lines,
        imbalance,
        neutral_peak_measured_a: n_peak,
        neutral_peak_estimated_a: n_est_peak,
        current_measured,
        timezone: "UTC".into(),
    })
}

impl Loading {
    fn rows(&self) -> Vec<[String; 6]> {
        let pct = |a: f64| {
            if self.service_a > 0.0 {
                format!("{:.0} %", 100.0 * a / self.service_a)
            } else {
                "–".into()
            }
        };
        self.lines
            .iter()
            .map(|l| {
                if !l.measured {
                    let mut r: [String; 6] = Default::default();
                    r[0] = l.line.to_uppercase();
                    r[1] = "not measured".into();
                    return r;
                }
                [
                    l.line.to_uppercase(),
                    format!("{:.1}", l.peak_a),
                    pct(l.peak_a),
                    format!("{:.1}", l.demand_15min_a),
                    pct(l.demand_15min_a),
                    format!("{:.1}", l.mean_a),
                ]
            })
            .collect()
    }

    const HEAD: [&'static str; 6] = [
        "line",
        "peak A",
        "of service",
        "15-min demand A",
        "of service",
        "mean A",
    ];

    /// A time as local time in the home's zone ("Mon 2027-01-04 18:02").
    fn local(&self, ms: Option<i64>) -> Option<String> {
        let zone = jiff::tz::TimeZone::get(&self.timezone).unwrap_or(jiff::tz::TimeZone::UTC);
        let t = jiff::Timestamp::from_millisecond(ms?).ok()?;
        Some(t.to_zoned(zone).strftime("%a %Y-%m-%d %H:%M").to_string())
    }

    fn tail(&self) -> String {
        let mut o = String::new();
        for l in self.lines.iter().filter(|l| l.measured) {
            if let Some(t) = self.local(l.peak_ms) {
                o += &format!(
                    "{} peaks at {t} ({})\n",
                    l.line.to_uppercase(),
                    self.timezone
                );
            }
            if self.service_a > 0.0 && l.demand_15min_a > self.service_a {
                o += &format!(
                    "{}: the 15-minute demand, {:.1} A, is above the service rating of {:.0} A\n",
                    l.line.to_uppercase(),
                    l.demand_15min_a,
                    self.service_a
                );
            }
        }
        if !self.current_measured {
            o += "currents are estimated from power over voltage (the data has no current columns; without reactive power, unity power factor): a lower bound\n";
        }
        if let Some(i) = self.imbalance {
            o += &format!(
                "imbalance between lines (largest deviation of a mean from the average): {:.0} %\n",
                100.0 * i
            );
        }
        match self.neutral_peak_measured_a {
            Some(m) => o += &format!("neutral current: peak {m:.1} A measured, {:.1} A estimated from the line readings\n", self.neutral_peak_estimated_a),
            None => o += &format!("neutral current: peak {:.1} A estimated from the line readings\n", self.neutral_peak_estimated_a),
        }
        o
    }
}

impl Render for Loading {
    fn to_json(&self) -> Value {
        json!({
            "format": AUDIT_FORMAT,
            "service_a": self.service_a,
            "lines": self.lines.iter().map(|l| json!({
                "conductor": l.line, "measured": l.measured, "peak_time_local": self.local(l.peak_ms), "peak_a": l.peak_a, "demand_15min_a": l.demand_15min_a, "mean_a": l.mean_a,
                "peak_share_of_service": if self.service_a > 0.0 { l.peak_a / self.service_a } else { 0.0 },
                "demand_share_of_service": if self.service_a > 0.0 { l.demand_15min_a / self.service_a } else { 0.0 },
            })).collect::<Vec<_>>(),
            "imbalance": self.imbalance,
            "neutral_peak_measured_a": self.neutral_peak_measured_a,
            "neutral_peak_estimated_a": self.neutral_peak_estimated_a,
            "current_measured": self.current_measured,
            "caution": CAUTION,
        })
    }

    fn to_text(&self) -> String {
        let rows = self.rows();
        let w: Vec<usize> = (0..6)
            .map(|c| {
                rows.iter()
                    .map(|r| r[c].len())
                    .chain([Self::HEAD[c].len()])
                    .max()
                    .unwrap()
            })
            .collect();
        let line = |r: &[String]| {
            r.iter()
                .enumerate()
                .map(|(c, s)| {
                    if c == 0 {
                        format!("{s:<w$}", w = w[c])
                    } else {
                        format!("{s:>w$}", w = w[c])
                    }
                })
                .collect::<Vec<_>>()
                .join("  ")
                + "\n"
        };
        let mut o = format!(
            "loading against the {} A service rating\n\n",
            self.service_a
        );
        o += &line(&Self::HEAD.map(String::from));
        for r in &rows {
            o += &line(r);
        }
        o += "\n";
        o += &self.tail();
        o += "\n";
        o += CAUTION;
        o += "\n";
        o
    }

    fn to_markdown(&self) -> String {
        let mut o = format!(
            "Loading against the {} A service rating.\n\n| {} |\n|---|---:|---:|---:|---:|---:|\n",
            self.service_a,
            Self::HEAD.join(" | ")
        );
        for r in self.rows() {
            o += &format!("| {} |\n", r.join(" | "));
        }
        o += "\n";
        o += &self.tail().replace('\n', "\n\n");
        o += &format!("> {CAUTION}\n");
        o
    }
}
