//! The loading picture of a dataset, from its meters alone, following the
//! metering as declared: each line's current is read on the channel whose
//! CT is declared on that line's conductor (a line no CT is declared on is
//! "not measured"). Per line: the peak current with its local time, the
//! 15-minute demand current (the largest mean over clock quarter-hours, as
//! demand meters integrate), the mean, each against the service rating; the
//! imbalance between lines; and the neutral current, measured and estimated
//! from the line readings when every line is measured.
//!
//! An analysis of data, not an inspection: see [`CAUTION`].

use crate::contract::{columns, line_name, AUDIT_FORMAT};
use crate::dataset::Dataset;
use crate::diagnostic::Error;
use crate::render::{aligned, Render};
use crate::stream::{header, Header};
use crate::wallclock::WallClockUse;
use serde_json::{json, Value};
use std::path::Path;

/// Printed wherever loadloom speaks of wiring, loading or breakers: an
/// analysis of data is not an inspection.
pub const CAUTION: &str = "Caution: this is an analysis of data, not an inspection of the installation. Local electrical codes (for example the NEC in the US, IEC 60364 and national rules in Europe) and a licensed electrician decide what is safe and allowed.";

/// Which channel reads one line's conductor, as declared.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct LineRead {
    /// The channel (0 for `l1`, …) whose CT is on this conductor.
    pub channel: usize,
    /// The CT is declared clamped the wrong way round.
    pub reversed: bool,
}

/// The metering the loading picture follows: per line, the channel that
/// reads it (None: no CT on it), and the phase angle of each channel's
/// voltage.
#[derive(Clone, Debug)]
pub struct MeterPlan {
    /// Per line, the channel that reads it.
    pub reads: Vec<Option<LineRead>>,
    /// Line-to-neutral phase angle of each channel's voltage, degrees.
    pub angles_deg: Vec<f64>,
}

impl MeterPlan {
    /// Each channel on its own line, where the table has the channel.
    pub fn own(h: &Header, angles_deg: &[f64]) -> MeterPlan {
        let reads = (0..angles_deg.len())
            .map(|c| {
                h.has(&columns::p(&line_name(c))).then_some(LineRead {
                    channel: c,
                    reversed: false,
                })
            })
            .collect();
        MeterPlan {
            reads,
            angles_deg: angles_deg.to_vec(),
        }
    }
}

/// One line conductor's loading over the dataset.
pub struct LineLoading {
    /// The line's name (`l1`, …).
    pub line: String,
    /// The channel that reads it, as declared (None: no CT declared on it).
    pub channel: Option<String>,
    /// Whether the line has readings at all (None: why not).
    pub not_measured: Option<String>,
    /// When the peak was read, ms since the epoch.
    pub peak_ms: Option<i64>,
    /// The largest current read in one interval, A.
    pub peak_a: f64,
    /// The largest mean current over a clock quarter hour (a demand reading), A.
    pub demand_15min_a: f64,
    /// Start of the quarter-hour of that demand, ms since the epoch.
    pub demand_ms: Option<i64>,
    /// Mean current over the rows read, A.
    pub mean_a: f64,
    /// Declared appliances running at the peak (filled by the audit).
    pub running_at_peak: Vec<String>,
}

impl LineLoading {
    /// Whether the line has readings.
    pub fn measured(&self) -> bool {
        self.not_measured.is_none()
    }
}

/// The loading picture of a dataset: current per line against the service,
/// imbalance, neutral.
pub struct Loading {
    /// The service rating, A (0 when none is known).
    pub service_a: f64,
    /// Per line conductor.
    pub lines: Vec<LineLoading>,
    /// Largest deviation of a line's mean current from the lines' average,
    /// over that average (common practice, no source).
    pub imbalance: Option<f64>,
    /// The largest neutral current read, A, if the meter reads the neutral.
    pub neutral_peak_measured_a: Option<f64>,
    /// The largest neutral current computed from the line readings (the
    /// phasor sum of the line currents), A; None when a line is not measured (the sum needs every line).
    pub neutral_peak_estimated_a: Option<f64>,
    /// Whether the table has current columns (else currents are from power).
    pub current_measured: bool,
    /// Whether the table has reactive power (else unity power factor is assumed).
    pub reactive_measured: bool,
    /// The home's time zone (IANA), for the local time of each peak.
    pub timezone: String,
    /// Whether the declared appliances running at each peak were looked for.
    pub running_known: bool,
}

/// Line-to-neutral phase angles of the supply, degrees (from the manifest).
fn angles(ds: &Dataset) -> Vec<f64> {
    ds.manifest["supply"]["phase_angles_deg"]
        .as_array()
        .map(|a| a.iter().filter_map(|x| x.as_f64()).collect())
        .unwrap_or_default()
}

/// The loading picture of a dataset folder, each channel on its own line.
pub fn loading(dataset: &Path) -> Result<Loading, Error> {
    let ds = Dataset::open(dataset)?;
    let service_a = ds.manifest["supply"]["service_a"].as_f64().unwrap_or(0.0);
    let h = header(&super::meters_file(dataset)?)?;
    let nominal_v = ds.manifest["supply"]["voltage_ln_v"]
        .as_f64()
        .unwrap_or(f64::NAN);
    let plan = MeterPlan::own(&h, &angles(&ds));
    let (mut l, _) = loading_of(&h, &plan, service_a, nominal_v)?;
    if let Some(tz) = ds.manifest["time"]["timezone"].as_str() {
        l.timezone = tz.to_string();
    }
    Ok(l)
}

/// Where one channel's i, p, q and v columns sit among the streamed ones.
type ChannelCols = [Option<usize>; 4];

/// The columns to stream for `plan`, and where each channel's sit.
fn columns_of(h: &Header, plan: &MeterPlan) -> (Vec<String>, Vec<ChannelCols>) {
    let mut cols = Vec::new();
    let mut at = vec![[None; 4]; plan.angles_deg.len()];
    for r in plan.reads.iter().flatten() {
        let l = line_name(r.channel);
        for (k, q) in ["i_a", "p_w", "q_var", "v_v"].iter().enumerate() {
            let c = format!("{l}_{q}");
            if h.has(&c) && at[r.channel][k].is_none() {
                at[r.channel][k] = Some(cols.len());
                cols.push(c);
            }
        }
    }
    (cols, at)
}

/// Running sums over the rows, per line.
struct LineSums {
    peak: Vec<f64>,
    peak_ms: Vec<Option<i64>>,
    sum: Vec<f64>,
    count: Vec<u64>,
    quarter: i64,
    q_sum: Vec<f64>,
    q_n: Vec<u64>,
    demand: Vec<f64>,
    demand_ms: Vec<Option<i64>>,
    neutral_measured: Option<f64>,
    neutral_estimated: f64,
}

/// A quarter-hour, ms (15-minute demand: UTC quarter-hours are local ones
/// too for every zone offset in whole quarter-hours).
const QUARTER_MS: i64 = 900_000;

impl LineSums {
    fn new(n: usize) -> LineSums {
        LineSums {
            peak: vec![0.0; n],
            peak_ms: vec![None; n],
            sum: vec![0.0; n],
            count: vec![0; n],
            quarter: i64::MIN,
            q_sum: vec![0.0; n],
            q_n: vec![0; n],
            demand: vec![0.0; n],
            demand_ms: vec![None; n],
            neutral_measured: None,
            neutral_estimated: 0.0,
        }
    }

    /// Ends the quarter-hour under way: each line's mean over the rows it
    /// has there is a candidate for its demand.
    fn close_quarter(&mut self) {
        for x in 0..self.q_n.len() {
            if self.q_n[x] > 0 {
                let m = self.q_sum[x] / self.q_n[x] as f64;
                if m > self.demand[x] || self.demand_ms[x].is_none() {
                    self.demand[x] = m;
                    self.demand_ms[x] = Some(self.quarter * QUARTER_MS);
                }
            }
            self.q_sum[x] = 0.0;
            self.q_n[x] = 0;
        }
    }

    /// One row's line currents (NaN: no reading), at time `t`.
    fn add(&mut self, t: i64, current: &[f64]) {
        let key = t.div_euclid(QUARTER_MS);
        if key != self.quarter {
            self.close_quarter();
            self.quarter = key;
        }
        for (x, &i) in current.iter().enumerate() {
            if i.is_nan() {
                continue;
            }
            if i > self.peak[x] || self.peak_ms[x].is_none() {
                self.peak[x] = i;
                self.peak_ms[x] = Some(t);
            }
            self.sum[x] += i;
            self.count[x] += 1;
            self.q_sum[x] += i;
            self.q_n[x] += 1;
        }
    }
}

/// One line's current magnitude and phasor (re, im; None without P) from
/// its channel's readings `get(k)` (k: i, p, q, v), the channel's voltage
/// angle `ang` (rad) and the declared CT orientation.
fn line_current(
    get: impl Fn(usize) -> Option<f64>,
    nominal_v: f64,
    ang: f64,
    rev: bool,
) -> (f64, Option<(f64, f64)>) {
    let p = get(1).unwrap_or(f64::NAN);
    let q = get(2).unwrap_or(0.0);
    let v = get(3).unwrap_or(nominal_v);
    let i = get(0).unwrap_or(p.hypot(q) / v);
    if v.is_nan() || v <= 0.0 || p.is_nan() || q.is_nan() {
        return (i, None);
    }
    // The channel reads S = V·conj(I) of its conductor against its own
    // voltage, so I = conj(S / V), whichever conductor it is on; a CT
    // declared reversed reads −S.
    let k = if rev { -1.0 } else { 1.0 };
    let (ir, ii) = (k * p / v, -k * q / v);
    (
        i,
        Some((
            ir * ang.cos() - ii * ang.sin(),
            ir * ang.sin() + ii * ang.cos(),
        )),
    )
}

/// Streams the table once into [`LineSums`].
fn sums_of(
    h: &Header,
    plan: &MeterPlan,
    nominal_v: f64,
) -> Result<(LineSums, Option<WallClockUse>), Error> {
    let n = plan.reads.len();
    let (mut cols, at) = columns_of(h, plan);
    let has_n = h.has(columns::NEUTRAL_I);
    if has_n {
        cols.push(columns::NEUTRAL_I.into());
    }
    let every_line = plan.reads.iter().all(|r| r.is_some());
    let mut s = LineSums::new(n);
    let mut current = vec![f64::NAN; n];
    let mut st = h.stream(&cols)?;
    while let Some(b) = st.next_batch()? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            let (mut re, mut im, mut whole) = (0.0, 0.0, every_line);
            for (x, r) in plan.reads.iter().enumerate() {
                current[x] = f64::NAN;
                let Some(r) = r else { continue };
                let get = |j: usize| at[r.channel][j].map(|c| b.cols[c][k]);
                let ang = plan.angles_deg.get(r.channel).copied().unwrap_or(0.0);
                let (i, phasor) = line_current(get, nominal_v, ang.to_radians(), r.reversed);
                current[x] = i;
                match phasor {
                    Some((a, b)) => (re, im) = (re + a, im + b),
                    None => whole = false,
                }
            }
            s.add(t, &current);
            // Kirchhoff: the neutral returns minus the sum of the line currents.
            if whole {
                s.neutral_estimated = s.neutral_estimated.max(re.hypot(im));
            }
            if has_n {
                let v = b.cols[cols.len() - 1][k];
                if !v.is_nan() {
                    s.neutral_measured = Some(s.neutral_measured.unwrap_or(0.0).max(v));
                }
            }
        }
    }
    s.close_quarter();
    Ok((s, st.wall_clock()))
}

/// The loading picture of a meters table metered as `plan` says. A table
/// without current columns (a monitor giving P, or P and V, only) gets each
/// line's current from its apparent power over its voltage (measured, else
/// `nominal_v`), with unity power factor when Q is missing: a lower bound.
/// Also returns how naive times were read, if they were.
pub fn loading_of(
    h: &Header,
    plan: &MeterPlan,
    service_a: f64,
    nominal_v: f64,
) -> Result<(Loading, Option<WallClockUse>), Error> {
    let (s, clock) = sums_of(h, plan, nominal_v)?;
    let lines: Vec<LineLoading> = (0..plan.reads.len())
        .map(|x| line_of(&s, plan, x))
        .collect();
    let means: Vec<f64> = lines
        .iter()
        .filter(|l| l.measured())
        .map(|l| l.mean_a)
        .collect();
    let imbalance = (means.len() >= 2 && means.iter().any(|m| *m > 0.0)).then(|| {
        let avg = means.iter().sum::<f64>() / means.len() as f64;
        means.iter().map(|m| (m - avg).abs()).fold(0.0, f64::max) / avg
    });
    let channel_has = |q: &str| {
        plan.reads
            .iter()
            .flatten()
            .all(|r| h.has(&format!("{}_{q}", line_name(r.channel))))
    };
    let every_line = lines.iter().all(|l| l.measured());
    Ok((
        Loading {
            service_a,
            lines,
            imbalance,
            neutral_peak_measured_a: s.neutral_measured,
            neutral_peak_estimated_a: every_line.then_some(s.neutral_estimated),
            current_measured: channel_has("i_a"),
            reactive_measured: channel_has("q_var"),
            timezone: "UTC".into(),
            running_known: false,
        },
        clock,
    ))
}

/// Line `x`'s figures from the sums.
fn line_of(s: &LineSums, plan: &MeterPlan, x: usize) -> LineLoading {
    let read = plan.reads[x];
    let not_measured = match read {
        None => Some("no CT is declared on it".to_string()),
        Some(_) if s.count[x] == 0 || s.peak[x] <= 0.0 => {
            Some("its channel reads nothing".to_string())
        }
        Some(_) => None,
    };
    LineLoading {
        line: line_name(x),
        channel: read.map(|r| line_name(r.channel)),
        not_measured,
        peak_ms: s.peak_ms[x],
        peak_a: s.peak[x],
        demand_15min_a: s.demand[x],
        demand_ms: s.demand_ms[x],
        mean_a: if s.count[x] > 0 {
            s.sum[x] / s.count[x] as f64
        } else {
            0.0
        },
        running_at_peak: Vec::new(),
    }
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
                let name = line_label_of(l);
                if !l.measured() {
                    let mut r: [String; 6] = Default::default();
                    r[0] = name;
                    r[1] = "not measured".into();
                    return r;
                }
                [
                    name,
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

    /// What was running at a line's peak, as a phrase.
    fn running_text(&self, l: &LineLoading) -> String {
        if !self.running_known {
            return String::new();
        }
        if l.running_at_peak.is_empty() {
            "; no declared appliance was seen running then".into()
        } else {
            format!(
                "; running then, as the steps show: {}",
                l.running_at_peak.join(", ")
            )
        }
    }

    fn tail(&self) -> String {
        let mut o = String::new();
        for l in &self.lines {
            let name = l.line.to_uppercase();
            if let Some(why) = &l.not_measured {
                o += &format!("{name}: not measured ({why}); its loading is unknown\n");
                continue;
            }
            if let Some(t) = self.local(l.peak_ms) {
                o += &format!(
                    "{name} peaks at {t} ({}){}\n",
                    self.timezone,
                    self.running_text(l)
                );
            }
            if self.service_a > 0.0 && l.demand_15min_a > self.service_a {
                o += &format!(
                    "{name}: the 15-minute demand, {:.1} A (the quarter-hour from {}), is above the service rating of {:.0} A\n",
                    l.demand_15min_a,
                    self.local(l.demand_ms).unwrap_or_default(),
                    self.service_a
                );
            }
        }
        o += &self.current_note();
        if let Some(i) = self.imbalance {
            o += &format!(
                "imbalance between lines (largest deviation of a mean from the average): {:.0} %\n",
                100.0 * i
            );
        }
        o += &self.neutral_text();
        o
    }

    fn current_note(&self) -> String {
        let mut o = String::new();
        if !self.current_measured {
            o += "currents are estimated from power over voltage (the data has no current columns";
            o += if self.reactive_measured {
                "): a lower bound\n"
            } else {
                "; without reactive power, unity power factor): a lower bound\n"
            };
        }
        o
    }

    fn neutral_text(&self) -> String {
        let est = match self.neutral_peak_estimated_a {
            Some(e) if self.reactive_measured => {
                format!("{e:.1} A estimated from the line readings")
            }
            Some(e) => {
                format!("{e:.1} A estimated from the line readings (unity power factor assumed)")
            }
            None => {
                "not estimated (a line is not measured, and the estimate needs every line)".into()
            }
        };
        match self.neutral_peak_measured_a {
            Some(m) => format!("neutral current: peak {m:.1} A measured; {est}\n"),
            None => format!("neutral current: peak {est}\n"),
        }
    }
}

/// A line's name for tables: `L1`, or `L1 (channel l2)` when another
/// channel's CT is declared on it.
fn line_label_of(l: &LineLoading) -> String {
    match &l.channel {
        Some(c) if *c != l.line => format!("{} (channel {c})", l.line.to_uppercase()),
        _ => l.line.to_uppercase(),
    }
}

impl Render for Loading {
    fn to_json(&self) -> Value {
        json!({
            "format": AUDIT_FORMAT,
            "service_a": self.service_a,
            "lines": self.lines.iter().map(|l| json!({
                "conductor": l.line, "channel": l.channel, "measured": l.measured(), "not_measured_because": l.not_measured,
                "peak_time_local": self.local(l.peak_ms), "peak_a": l.peak_a, "demand_15min_a": l.demand_15min_a,
                "demand_quarter_local": self.local(l.demand_ms), "mean_a": l.mean_a,
                "demand_above_service": self.service_a > 0.0 && l.demand_15min_a > self.service_a,
                "running_at_peak": if self.running_known { json!(l.running_at_peak) } else { Value::Null },
                "peak_share_of_service": if self.service_a > 0.0 { l.peak_a / self.service_a } else { 0.0 },
                "demand_share_of_service": if self.service_a > 0.0 { l.demand_15min_a / self.service_a } else { 0.0 },
            })).collect::<Vec<_>>(),
            "timezone": self.timezone,
            "imbalance": self.imbalance,
            "neutral_peak_measured_a": self.neutral_peak_measured_a,
            "neutral_peak_estimated_a": self.neutral_peak_estimated_a,
            "current_measured": self.current_measured,
            "reactive_measured": self.reactive_measured,
            "caution": CAUTION,
        })
    }

    fn to_text(&self) -> String {
        let mut o = format!(
            "loading against the {} A service rating\n\n",
            self.service_a
        );
        o += &aligned(&Self::HEAD, &self.rows(), 1);
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

/// The plan a declaration's metering makes: for each line, the first
/// channel the table has whose CT is declared on that line's conductor.
pub fn plan_of(d: &super::decl::Declared, have: &[String]) -> MeterPlan {
    let n = d.supply.lines();
    let reads = (0..n)
        .map(|x| {
            (0..n)
                .find(|&c| d.channels[c].conductor == Some(x) && have.contains(&line_name(c)))
                .map(|c| LineRead {
                    channel: c,
                    reversed: d.channels[c].reversed,
                })
        })
        .collect();
    MeterPlan {
        reads,
        angles_deg: d.supply.angles_deg().to_vec(),
    }
}
