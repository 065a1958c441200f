//! `Scenario`: the resolved home, SI units inside, every default filled in.
//! This is the boundary type between the scenario language and the simulator.

use serde::Serialize;
pub use solver_check::contract::{SupplyKind, Wiring, Zip};

/// Kinds of load, each with default ZIP fractions. The defaults are rounded,
/// illustrative values (from memory, in the spirit of the measured fits of
/// Bokhari et al. 2014): heaters are constant impedance, switch-mode supplies
/// hold their power, motors sit in between.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum LoadKind {
    Resistive,
    Motor,
    Electronic,
    Lighting,
}

impl LoadKind {
    pub const ALL: [(&'static str, LoadKind); 4] = [
        ("resistive", LoadKind::Resistive),
        ("motor", LoadKind::Motor),
        ("electronic", LoadKind::Electronic),
        ("lighting", LoadKind::Lighting),
    ];
    pub fn default_zip_p(self) -> Zip {
        match self {
            LoadKind::Resistive => Zip {
                z: 1.0,
                i: 0.0,
                p: 0.0,
            },
            LoadKind::Motor => Zip {
                z: 0.2,
                i: 0.3,
                p: 0.5,
            },
            LoadKind::Electronic => Zip {
                z: 0.0,
                i: 0.0,
                p: 1.0,
            },
            LoadKind::Lighting => Zip {
                z: 0.2,
                i: 0.4,
                p: 0.4,
            },
        }
    }
    /// Default harmonic signature (odd orders: magnitude relative to the
    /// fundamental, phase in degrees). Rounded illustrative shapes, from
    /// memory: a capacitor-input rectifier draws current pulses at the
    /// voltage peaks (strong 3rd and 5th, alternating signs); an LED driver
    /// with partial correction less; a motor almost none.
    pub fn default_harmonics(self) -> Vec<Harmonic> {
        let h = |order: u32, magnitude: f64, phase_deg: f64| Harmonic {
            order,
            magnitude,
            phase_deg,
        };
        match self {
            LoadKind::Resistive => vec![],
            LoadKind::Motor => vec![h(3, 0.03, 0.0), h(5, 0.02, 0.0)],
            LoadKind::Electronic => vec![
                h(3, 0.80, 180.0),
                h(5, 0.55, 0.0),
                h(7, 0.30, 180.0),
                h(9, 0.12, 0.0),
                h(11, 0.06, 180.0),
            ],
            LoadKind::Lighting => vec![h(3, 0.40, 180.0), h(5, 0.20, 0.0), h(7, 0.10, 180.0)],
        }
    }

    pub fn default_zip_q(self) -> Zip {
        match self {
            LoadKind::Resistive => Zip {
                z: 1.0,
                i: 0.0,
                p: 0.0,
            },
            // Magnetising current grows faster than V: a larger z share.
            LoadKind::Motor => Zip {
                z: 0.8,
                i: 0.2,
                p: 0.0,
            },
            LoadKind::Electronic => Zip {
                z: 0.0,
                i: 0.0,
                p: 1.0,
            },
            LoadKind::Lighting => Zip {
                z: 0.2,
                i: 0.4,
                p: 0.4,
            },
        }
    }
}

/// One odd harmonic of a draw's current, relative to its fundamental.
#[derive(Clone, Copy, Debug, PartialEq, Serialize)]
pub struct Harmonic {
    pub order: u32,
    pub magnitude: f64,
    pub phase_deg: f64,
}

/// One load inside a state: complex power at the connection's nominal voltage.
#[derive(Clone, Debug, Serialize)]
pub struct Draw {
    pub wiring: Wiring,
    pub p_w: f64,
    pub q_var: f64,
    pub load: LoadKind,
    pub zip_p: Zip,
    pub zip_q: Zip,
    /// Nominal voltage across this draw's connection, V.
    pub nominal_v: f64,
    /// The voltage `rated` gave its power at, if any (`p_w` is already
    /// rescaled to `nominal_v`); the audit rescales it on other connections.
    #[serde(skip)]
    pub rated_v: Option<f64>,
    /// Harmonic signature of its current (waveforms only).
    pub harmonics: Vec<Harmonic>,
}

#[derive(Clone, Copy, Debug, Serialize)]
pub struct Inrush {
    /// Multiple of the steady power at switch-on.
    pub peak: f64,
    /// Time constant of the exponential decay, s.
    pub decay_s: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct State {
    pub name: String,
    pub draws: Vec<Draw>,
    pub inrush: Option<Inrush>,
}

impl State {
    pub fn p_w(&self) -> f64 {
        self.draws.iter().map(|d| d.p_w).sum()
    }
    pub fn q_var(&self) -> f64 {
        self.draws.iter().map(|d| d.q_var).sum()
    }
}

/// A length or dwell distribution, in seconds.
#[derive(Clone, Copy, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Dist {
    Fixed {
        value_s: f64,
    },
    Uniform {
        min_s: f64,
        max_s: f64,
    },
    /// ln(X) ~ Normal(ln(median), spread²).
    Lognormal {
        median_s: f64,
        spread: f64,
    },
    /// Shape k and mean; scale = mean / k.
    Gamma {
        mean_s: f64,
        shape: f64,
    },
}

impl Dist {
    /// The same shape with every duration multiplied by `k`.
    pub fn scaled(self, k: f64) -> Dist {
        match self {
            Dist::Fixed { value_s } => Dist::Fixed {
                value_s: value_s * k,
            },
            Dist::Uniform { min_s, max_s } => Dist::Uniform {
                min_s: min_s * k,
                max_s: max_s * k,
            },
            Dist::Lognormal { median_s, spread } => Dist::Lognormal {
                median_s: median_s * k,
                spread,
            },
            Dist::Gamma { mean_s, shape } => Dist::Gamma {
                mean_s: mean_s * k,
                shape,
            },
        }
    }

    /// A duration rarely exceeded: the largest for fixed and uniform
    /// lengths, about the 98th percentile otherwise (two standard
    /// deviations; for a gamma length, of the normal approximation).
    pub fn upper_s(&self) -> f64 {
        match *self {
            Dist::Fixed { value_s } => value_s,
            Dist::Uniform { max_s, .. } => max_s,
            Dist::Lognormal { median_s, spread } => median_s * (2.0 * spread).exp(),
            Dist::Gamma { mean_s, shape } => mean_s * (1.0 + 2.0 / shape.sqrt()),
        }
    }

    pub fn mean_s(&self) -> f64 {
        match *self {
            Dist::Fixed { value_s } => value_s,
            Dist::Uniform { min_s, max_s } => 0.5 * (min_s + max_s),
            Dist::Lognormal { median_s, spread } => median_s * (0.5 * spread * spread).exp(),
            Dist::Gamma { mean_s, .. } => mean_s,
        }
    }
}

/// When a person starts something: starts per local day and the weight of
/// each local hour.
#[derive(Clone, Debug, Serialize)]
pub struct Habit {
    pub starts_per_day: f64,
    pub weekend_starts_per_day: f64,
    /// 24 non-negative weights, one per local hour, summing to 1 (weekdays).
    pub hour_weights: Vec<f64>,
    /// The same for Saturdays and Sundays.
    pub weekend_hour_weights: Vec<f64>,
}

impl Habit {
    /// Shifts both weight vectors later by `hours` (fractions interpolated).
    pub fn shift(&mut self, hours: f64) {
        let rot = |w: &[f64]| -> Vec<f64> {
            let k = hours.floor();
            let f = hours - k;
            (0..24)
                .map(|h| {
                    let a = (h as i64 - k as i64).rem_euclid(24) as usize;
                    let b = (h as i64 - k as i64 - 1).rem_euclid(24) as usize;
                    (1.0 - f) * w[a] + f * w[b]
                })
                .collect()
        };
        self.hour_weights = rot(&self.hour_weights);
        self.weekend_hour_weights = rot(&self.weekend_hour_weights);
    }

    /// Nobody is home on weekdays in the `away` hours: nothing starts then
    /// (unless nothing else remains).
    pub fn mask_weekdays(&mut self, away: &[bool; 24]) {
        let w: Vec<f64> = self
            .hour_weights
            .iter()
            .enumerate()
            .map(|(h, x)| if away[h] { 0.0 } else { *x })
            .collect();
        let sum: f64 = w.iter().sum();
        if sum > 0.0 {
            self.hour_weights = w.iter().map(|x| x / sum).collect();
        }
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Extra {
    /// Index into the appliance's states.
    pub state: usize,
    pub length: Dist,
    pub every_s: f64,
}

#[derive(Clone, Debug, Serialize)]
pub struct Session {
    pub habit: Habit,
    pub length: Dist,
    pub taper_s: f64,
}

/// A rooftop PV system: where it stands, how its array faces the sky, and
/// its PVWatts parameters (`sim/sun/pvwatts.rs`).
#[derive(Clone, Debug, Serialize)]
pub struct Pv {
    pub site: crate::sun::Site,
    /// Mean clear-sky index of a day; `None`: a sky without clouds.
    pub sky: Option<f64>,
    /// DC nameplate at standard test conditions, W.
    pub dc_w: f64,
    /// The inverter's AC rating, W.
    pub ac_w: f64,
    pub tilt_deg: f64,
    /// Clockwise from north (south 180°).
    pub azimuth_deg: f64,
    pub albedo: f64,
    /// Share of DC power lost before the inverter.
    pub losses: f64,
    /// Temperature coefficient of power, 1/°C.
    pub gamma: f64,
    /// `roof` (close roof mount) or `rack` (open rack).
    pub mount: String,
    /// Outdoor air temperature, °C, and wind speed, m/s.
    pub air_c: f64,
    pub wind_m_s: f64,
}

/// A home battery run for self-consumption: it charges from what the home
/// would export and discharges to cover what it would import.
#[derive(Clone, Debug, Serialize)]
pub struct Battery {
    /// Usable energy between empty and full, J.
    pub capacity_j: f64,
    /// Largest charging and discharging power, W.
    pub power_w: f64,
    /// Round-trip efficiency (energy out over energy in).
    pub efficiency: f64,
    /// State of charge it never discharges below, fraction.
    pub reserve: f64,
    /// State of charge at the start of the run, fraction.
    pub initial: f64,
    /// How long its controller takes to follow a change of the home's
    /// power, s.
    pub response_s: f64,
}

/// What an appliance is to the home.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum Role {
    /// Draws power (every `[[appliance]]`).
    Load,
    /// Makes power: its P is negative while it exports (`[pv]`).
    Generator,
    /// Stores energy: P positive charging, negative discharging (`[battery]`).
    Storage,
}

/// How an appliance moves between its states.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Behaviour {
    /// Thermostatic: visits the listed states in order, each for a dwell,
    /// with an optional periodic extra state (defrost).
    Cycle {
        dwell: Vec<Dist>,
        extra: Option<Extra>,
    },
    /// Ordered phases started by a habit; state 0 is the implicit `off`.
    Program { habit: Habit, lengths: Vec<Dist> },
    /// Dwell per state, then a jump with the given probabilities.
    Markov {
        dwell: Vec<Dist>,
        next: Vec<Vec<f64>>,
    },
    /// Always on, power scaled by (1 + jitter·N(0,1)) every `every_s`.
    Steady { jitter: f64, every_s: f64 },
    /// Power wanders in [min, 1] of the running state's draws, updated every
    /// `every_s` by a reflected random walk of step `wander`; optionally only
    /// during sessions started by a habit, tapering to `min` at their end.
    Modulating {
        min: f64,
        wander: f64,
        every_s: f64,
        session: Option<Session>,
    },
    /// A PV inverter's output, from the sun and the sky (states off and
    /// producing; the scale is the output over the inverter's rating).
    Sun(Pv),
    /// A battery following the home's net power (states idle, charging,
    /// discharging; the scale is the power over its limit).
    Storage(Battery),
    /// Driven by the home's thermostat (`[building]`, `[weather]`): its
    /// timeline comes from the heat balance, not from draws of its own.
    Thermostat {
        role: crate::thermal::equipment::Role,
    },
}

impl Behaviour {
    /// The habits of this behaviour (programs, sessions).
    pub fn habits_mut(&mut self) -> Vec<&mut Habit> {
        match self {
            Behaviour::Program { habit, .. } => vec![habit],
            Behaviour::Modulating {
                session: Some(s), ..
            } => vec![&mut s.habit],
            _ => vec![],
        }
    }

    pub fn name(&self) -> &'static str {
        match self {
            Behaviour::Cycle { .. } => "cycle",
            Behaviour::Program { .. } => "program",
            Behaviour::Markov { .. } => "markov",
            Behaviour::Steady { .. } => "steady",
            Behaviour::Modulating { .. } => "modulating",
            Behaviour::Sun(_) => "sun",
            Behaviour::Storage(_) => "storage",
            Behaviour::Thermostat { .. } => "thermostat",
        }
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Appliance {
    pub id: String,
    pub label: String,
    pub template: Option<String>,
    /// What the energy is for, one of [`END_USES`] (for reports that sum
    /// appliances by use).
    pub end_use: String,
    pub wiring: Wiring,
    pub behaviour: Behaviour,
    pub states: Vec<State>,
    /// Power above which the appliance counts as on, W.
    pub on_threshold_w: f64,
    /// The kinds of connection real models of this appliance are sold for
    /// besides its own (`alternatives`); the layout ladder moves it between them.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub alternatives: Vec<WiringKind>,
    pub role: Role,
}

/// A kind of connection, regardless of which lines it uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum WiringKind {
    LineToNeutral,
    LineToLine,
    ThreePhase,
}

impl WiringKind {
    pub const ALL: [(&'static str, WiringKind); 3] = [
        ("line-to-neutral", WiringKind::LineToNeutral),
        ("line-to-line", WiringKind::LineToLine),
        ("three-phase", WiringKind::ThreePhase),
    ];
    /// The kind of a connection.
    pub fn of(c: Wiring) -> WiringKind {
        match c {
            Wiring::ThreePhase => WiringKind::ThreePhase,
            c if c.is_line_to_line() => WiringKind::LineToLine,
            _ => WiringKind::LineToNeutral,
        }
    }
    pub fn name(self) -> &'static str {
        WiringKind::ALL.iter().find(|(_, k)| *k == self).unwrap().0
    }
}

/// The end uses an appliance may name: the usual residential categories,
/// a few merged (common practice, no source). "other" is the default.
pub const END_USES: &[&str] = &[
    "heating and cooling",
    "water heating",
    "refrigeration",
    "cooking",
    "laundry and dishes",
    "lighting",
    "electronics",
    "ev charging",
    "other",
];

impl Appliance {
    /// Every connection any of its draws uses, in first-seen order.
    pub fn connections(&self) -> Vec<Wiring> {
        let mut v: Vec<Wiring> = Vec::new();
        for s in &self.states {
            for d in &s.draws {
                if !v.contains(&d.wiring) {
                    v.push(d.wiring);
                }
            }
        }
        v
    }
    /// Line indices any of its draws takes current from, sorted.
    pub fn lines(&self) -> Vec<usize> {
        // Only a three-phase supply offers `3P`, so its lines are all three.
        let mut v: Vec<usize> = self.connections().iter().flat_map(|c| c.lines(3)).collect();
        v.sort();
        v.dedup();
        v
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Source {
    /// Standard deviation of the slow source-voltage variation, fraction of nominal.
    pub variation: f64,
    /// Correlation time of that variation, s.
    pub variation_time_s: f64,
    /// Limit of the variation, fraction of nominal (the supply's normal band).
    pub band: f64,
    pub line_r_ohm: f64,
    pub line_x_ohm: f64,
    pub neutral_r_ohm: f64,
    pub neutral_x_ohm: f64,
    /// Voltage unbalance factor of the source: the negative-sequence over
    /// the positive-sequence voltage (IEC 61000-4-30), three-phase only.
    #[serde(skip_serializing_if = "is_zero")]
    pub unbalance: f64,
}

fn is_zero(x: &f64) -> bool {
    *x == 0.0
}

#[derive(Clone, Debug, Serialize)]
pub struct Home {
    pub label: String,
    pub supply: SupplyKind,
    /// Line-to-neutral nominal voltage, V.
    pub voltage_v: f64,
    pub frequency_hz: f64,
    pub service_a: f64,
    pub timezone: String,
    pub source: Source,
    /// Weekday hours when nobody is home (an occupancy pattern).
    pub away: Option<[bool; 24]>,
    /// Where the home stands (`latitude`, `longitude`), if written.
    pub site: Option<crate::sun::Site>,
    /// Mean clear-sky index of a day (`sky`); `None`: no clouds.
    pub sky: Option<f64>,
    /// Where the supply is written ("file:line:col"), for messages.
    #[serde(skip)]
    pub supply_at: String,
    /// Where the source impedance is written (or, when it is the default,
    /// the supply), "file:line:col", for messages.
    #[serde(skip)]
    pub source_at: String,
}

#[derive(Clone, Debug, Serialize)]
pub struct Run {
    /// Local start time as written, in the home's time zone.
    pub start_local: String,
    /// The same instant in milliseconds since 1970-01-01 UTC.
    pub start_utc_ms: i64,
    pub length_s: f64,
    pub step_s: f64,
    pub seed: u64,
}

impl Run {
    pub fn steps(&self) -> u64 {
        (self.length_s / self.step_s).round() as u64
    }
}

#[derive(Clone, Debug, Serialize)]
pub struct Meter {
    pub interval_s: f64,
    pub noise_relative: f64,
    pub noise_floor_w: f64,
    /// Quantisation step of P and Q readings, W (0 = none).
    pub resolution_w: f64,
    /// A meter that reports only the home's total (`channels = "total"`):
    /// per-line P, Q and I and the neutral current are null.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub total_only: bool,
}

/// A current transformer that misreads its conductor.
#[derive(Clone, Debug, Serialize)]
pub struct CtFault {
    /// The monitor's channel (line index).
    pub line: usize,
    /// Relative gain error: reads I·(1 + gain).
    pub gain: f64,
    /// Phase-angle error, degrees: reads I rotated by this angle.
    pub phase_deg: f64,
    /// Clamped the wrong way round: reads −I.
    pub reversed: bool,
    /// Clamped on another conductor (line index) than its channel's.
    pub on: Option<usize>,
}

#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DropMode {
    /// Rows kept, meter values null.
    Null,
    /// Rows absent from the meters table (truth keeps every row).
    Missing,
}

#[derive(Clone, Debug, Serialize)]
pub struct Dropouts {
    /// Expected share of reporting intervals lost.
    pub rate: f64,
    pub length: Dist,
    pub mode: DropMode,
}

/// Meter faults, each recorded in the manifest.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Faults {
    pub ct: Vec<CtFault>,
    /// Two channels exchanged (CT and voltage reference, or their labels).
    pub swap: Option<(usize, usize)>,
    /// A line with no CT: its P, Q and I are null; totals lack it.
    pub no_ct: Option<usize>,
    pub dropouts: Option<Dropouts>,
    /// The meter's clock: offset (s) and drift (fraction, e.g. 20e-6).
    pub clock_offset_s: f64,
    pub clock_drift: f64,
    /// Cumulative energy register per line, Wh.
    pub register: bool,
}

impl Faults {
    pub fn is_empty(&self) -> bool {
        self.ct.is_empty()
            && self.swap.is_none()
            && self.no_ct.is_none()
            && self.dropouts.is_none()
            && self.clock_offset_s == 0.0
            && self.clock_drift == 0.0
            && !self.register
    }
}

/// One monitor channel as the installer declares it (`[metering]`): the
/// conductor its CT is clamped on (None: no CT fitted) and whether it is
/// clamped facing the source instead of the load. The simulator does not
/// use it (what really happens is `[faults]`); the audit checks it.
#[derive(Clone, Debug, Serialize)]
pub struct MeterChannel {
    pub conductor: Option<usize>,
    pub reversed: bool,
}

/// A window of high-rate waveforms to write.
#[derive(Clone, Debug, Serialize)]
pub struct WaveWindow {
    pub start_local: String,
    /// Offset from the start of the run, s.
    pub offset_s: f64,
    pub length_s: f64,
}

#[derive(Clone, Debug, Default, Serialize)]
pub struct Waveforms {
    pub rate_hz: f64,
    pub windows: Vec<WaveWindow>,
}

/// A published annual energy figure for part of the home (`[[reference]]`).
#[derive(Clone, Debug, Serialize)]
pub struct Reference {
    /// What it covers ("space heating", "refrigerator", "home").
    pub name: String,
    /// The loads it covers (ids); empty: the whole home.
    pub ids: Vec<String>,
    /// The published energy a year, kWh.
    pub kwh: f64,
    /// Where the figure comes from.
    pub source: String,
}

#[derive(Clone, Debug, Serialize)]
pub struct Scenario {
    pub name: String,
    pub home: Home,
    pub run: Run,
    pub meter: Meter,
    pub appliances: Vec<Appliance>,
    /// Loads nobody listed: in the meters, in truth only as `unmetered_p_w`.
    pub unmetered: Vec<Appliance>,
    pub faults: Faults,
    /// The metering as declared, one entry per line channel.
    pub metering: Vec<MeterChannel>,
    pub waveforms: Waveforms,
    /// What the scenario does that is allowed but unusual (printed by
    /// `validate`).
    #[serde(skip)]
    pub warnings: Vec<String>,
    /// The outdoor weather (`[weather]`), if the home has any.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub weather: Option<crate::weather::WeatherSpec>,
    /// The building's heat balance and thermostat (`[building]`).
    #[serde(skip_serializing_if = "Option::is_none")]
    pub building: Option<crate::thermal::Building>,
    /// Published figures the scenario cites for a year of the home.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub references: Vec<Reference>,
    /// The scenario text itself when it was generated (a fleet's home), so
    /// the dataset carries what rebuilds it alone with `loadloom run`.
    #[serde(skip)]
    pub source_toml: Option<String>,
}

impl Scenario {
    /// Every load the simulator drives: the appliances, then the unmetered ones.
    pub fn loads(&self) -> impl Iterator<Item = &Appliance> {
        self.appliances.iter().chain(&self.unmetered)
    }
    /// The appliances that draw power (not the PV or the battery, which
    /// follow the `[[appliance]]` list in `appliances`).
    pub fn consumers(&self) -> impl Iterator<Item = &Appliance> {
        self.appliances.iter().filter(|a| a.role == Role::Load)
    }
    pub fn steps_per_interval(&self) -> u64 {
        (self.meter.interval_s / self.run.step_s).round() as u64
    }
    pub fn intervals(&self) -> u64 {
        self.run.steps() / self.steps_per_interval()
    }
}
