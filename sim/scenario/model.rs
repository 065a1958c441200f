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
    /// Heating elements, kettles, incandescent lamps: constant impedance.
    Resistive,
    /// Induction motors (compressors, pumps, fans): part impedance, part constant power.
    Motor,
    /// Switch-mode supplies (computers, TVs, chargers): constant power, strong odd harmonics.
    Electronic,
    /// LED and fluorescent lamps with their drivers: a mix, with moderate harmonics.
    Lighting,
}

impl LoadKind {
    /// Every kind with the name the scenario language writes it with.
    pub const ALL: [(&'static str, LoadKind); 4] = [
        ("resistive", LoadKind::Resistive),
        ("motor", LoadKind::Motor),
        ("electronic", LoadKind::Electronic),
        ("lighting", LoadKind::Lighting),
    ];
    /// The default voltage dependence of this kind's active power (ZIP shares
    /// summing to 1).
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

    /// The default voltage dependence of this kind's reactive power (ZIP shares
    /// summing to 1); motors' magnetising current gives a larger impedance share.
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
    /// Harmonic order: 3, 5, 7, … (multiples of the fundamental frequency).
    pub order: u32,
    /// Current magnitude relative to the fundamental's (0.8 = 80 %).
    pub magnitude: f64,
    /// Phase relative to the fundamental, degrees.
    pub phase_deg: f64,
}

/// One load inside a state: complex power at the connection's nominal voltage.
#[derive(Clone, Debug, Serialize)]
pub struct Draw {
    /// The conductors this draw is connected between.
    pub wiring: Wiring,
    /// Active power at the connection's nominal voltage, W.
    pub p_w: f64,
    /// Reactive power at the connection's nominal voltage, var (positive: inductive).
    pub q_var: f64,
    /// The kind of load, which gave the defaults of the ZIP shares and harmonics.
    pub load: LoadKind,
    /// How the active power depends on the terminal voltage.
    pub zip_p: Zip,
    /// How the reactive power depends on the terminal voltage.
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

/// A switch-on surge: the power starts at `peak` times the steady power and
/// decays exponentially to it.
#[derive(Clone, Copy, Debug, Serialize)]
pub struct Inrush {
    /// Multiple of the steady power at switch-on.
    pub peak: f64,
    /// Time constant of the exponential decay, s.
    pub decay_s: f64,
}

/// One operating state of an appliance (off, heating, spinning, …): the loads
/// it switches on and its switch-on surge.
#[derive(Clone, Debug, Serialize)]
pub struct State {
    /// The state's name as written in the scenario ("off", "heat", …).
    pub name: String,
    /// The loads on in this state (several for an appliance with elements on
    /// different connections); empty for off.
    pub draws: Vec<Draw>,
    /// The surge when this state begins, if any.
    pub inrush: Option<Inrush>,
}

impl State {
    /// Nominal active power of the state, W: the sum over its draws.
    pub fn p_w(&self) -> f64 {
        self.draws.iter().map(|d| d.p_w).sum()
    }
    /// Nominal reactive power of the state, var: the sum over its draws.
    pub fn q_var(&self) -> f64 {
        self.draws.iter().map(|d| d.q_var).sum()
    }
}

/// A length or dwell distribution, in seconds.
#[derive(Clone, Copy, Debug, Serialize)]
#[serde(tag = "kind", rename_all = "lowercase")]
pub enum Dist {
    /// Always the same length.
    Fixed {
        /// The length, s.
        value_s: f64,
    },
    /// Equally likely anywhere between two lengths.
    Uniform {
        /// The shortest length, s.
        min_s: f64,
        /// The longest length, s.
        max_s: f64,
    },
    /// ln(X) ~ Normal(ln(median), spread²).
    Lognormal {
        /// The median length, s.
        median_s: f64,
        /// Standard deviation of ln(length) (dimensionless).
        spread: f64,
    },
    /// Shape k and mean; scale = mean / k.
    Gamma {
        /// The mean length, s.
        mean_s: f64,
        /// The shape parameter k (dimensionless; larger is less spread).
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

    /// The mean duration, s.
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
    /// Expected starts per weekday (Monday to Friday).
    pub starts_per_day: f64,
    /// Expected starts per Saturday or Sunday.
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

/// A periodic extra state of a cycling appliance (a refrigerator's defrost).
#[derive(Clone, Debug, Serialize)]
pub struct Extra {
    /// Index into the appliance's states.
    pub state: usize,
    /// How long the extra state lasts.
    pub length: Dist,
    /// Running time between two extra states, s.
    pub every_s: f64,
}

/// A period of use of a modulating appliance, started by a habit.
#[derive(Clone, Debug, Serialize)]
pub struct Session {
    /// When sessions start.
    pub habit: Habit,
    /// How long a session lasts.
    pub length: Dist,
    /// The last part of a session over which power falls to its minimum, s.
    pub taper_s: f64,
}

/// A rooftop PV system: where it stands, how its array faces the sky, and
/// its PVWatts parameters (`sim/sun/pvwatts.rs`).
#[derive(Clone, Debug, Serialize)]
pub struct Pv {
    /// Where the array stands (latitude, longitude, elevation).
    pub site: crate::sun::Site,
    /// Mean clear-sky index of a day; `None`: a sky without clouds.
    pub sky: Option<f64>,
    /// DC nameplate at standard test conditions, W.
    pub dc_w: f64,
    /// The inverter's AC rating, W.
    pub ac_w: f64,
    /// The array's tilt from horizontal, degrees (0 flat, 90 vertical).
    pub tilt_deg: f64,
    /// Clockwise from north (south 180°).
    pub azimuth_deg: f64,
    /// Share of sunlight the ground reflects (0 … 1).
    pub albedo: f64,
    /// Share of DC power lost before the inverter.
    pub losses: f64,
    /// Temperature coefficient of power, 1/°C.
    pub gamma: f64,
    /// `roof` (close roof mount) or `rack` (open rack).
    pub mount: String,
    /// Outdoor air temperature, °C, where the home has no `[weather]`.
    pub air_c: f64,
    /// Wind speed, m/s (cools the modules).
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
        /// How long it stays in each state, one per state.
        dwell: Vec<Dist>,
        /// A periodic extra state (defrost), if any.
        extra: Option<Extra>,
    },
    /// Ordered phases started by a habit; state 0 is the implicit `off`.
    Program {
        /// When a run of the program starts.
        habit: Habit,
        /// How long each phase lasts, one per state after `off`.
        lengths: Vec<Dist>,
    },
    /// Dwell per state, then a jump with the given probabilities.
    Markov {
        /// How long it stays in each state, one per state.
        dwell: Vec<Dist>,
        /// Transition probabilities: `next[i][j]` from state i to state j (rows sum to 1).
        next: Vec<Vec<f64>>,
    },
    /// Always on, power scaled by (1 + jitter·N(0,1)) every `every_s`.
    Steady {
        /// Standard deviation of the power's relative variation (0.05 = 5 %).
        jitter: f64,
        /// How long each drawn power is held, s.
        every_s: f64,
    },
    /// Power wanders in [min, 1] of the running state's draws, updated every
    /// `every_s` by a reflected random walk of step `wander`; optionally only
    /// during sessions started by a habit, tapering to `min` at their end.
    Modulating {
        /// The lowest share of the running state's power (0 … 1).
        min: f64,
        /// Standard deviation of one step of the walk, share of full power.
        wander: f64,
        /// Time between two steps of the walk, s.
        every_s: f64,
        /// Sessions of use; `None`: running all the time.
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
        /// Which part of the heating or cooling plant it is.
        role: Equipment,
    },
}

/// What a thermostatic appliance is, with its ratings.
#[derive(Clone, Debug, Serialize)]
#[serde(tag = "role", rename_all = "kebab-case")]
pub enum Equipment {
    /// Air-source heat pump; states off, heating, defrost (and cooling).
    HeatPump(HeatPump),
    /// Cooling only; states off, cooling.
    AirConditioner {
        /// Coefficient of performance at the cooling rating point (heat
        /// moved over electricity drawn).
        cop: f64,
    },
    /// Electric resistance (baseboards, a furnace's strips); states off,
    /// heating. `backup`: the heat pump's second stage, not a heater of its own.
    Resistance {
        /// The heat pump's second stage rather than a heater of its own.
        backup: bool,
    },
    /// A fuel-fired furnace: delivers `capacity_w` of heat; its electric
    /// draw (blower, inducer) is the running state's.
    Furnace {
        /// Heat delivered while running, W.
        capacity_w: f64,
    },
    /// An air handler's fan: runs whenever heat or cooling is delivered by air.
    Blower,
}

/// An air-source heat pump's ratings.
#[derive(Clone, Debug, Serialize)]
pub struct HeatPump {
    /// Heating COP at 8.33 °C outdoor.
    pub cop: f64,
    /// Heating capacity at −8.33 °C as a share of that at 8.33 °C.
    pub low_capacity: f64,
    /// Sink temperature of the published COP fit, °C (the condensing side:
    /// about 35 °C for warm air or floor heating, 45–55 °C for radiators).
    pub sink_c: f64,
    /// Below this outdoor temperature the compressor is locked out, °C.
    pub lockout_c: f64,
    /// Cooling COP at the cooling rating point, if it also cools.
    pub cooling_cop: Option<f64>,
    /// Run time between defrosts when it is frosting, s (0: no defrost).
    pub defrost_every_s: f64,
    /// Length of a defrost, s.
    pub defrost_length_s: f64,
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

    /// The behaviour's name as written in the scenario (`behaviour = "cycle"`).
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

/// One load of the home: its connection, states, behaviour and role.
#[derive(Clone, Debug, Serialize)]
pub struct Appliance {
    /// Unique identifier: the truth columns are named after it.
    pub id: String,
    /// A human name for reports and plots.
    pub label: String,
    /// The library template it was made from, if any.
    pub template: Option<String>,
    /// What the energy is for, one of [`END_USES`] (for reports that sum
    /// appliances by use).
    pub end_use: String,
    /// The appliance's connection as written (`wiring`); its draws take it
    /// unless they name their own.
    pub wiring: Wiring,
    /// How it moves between its states over time.
    pub behaviour: Behaviour,
    /// Its operating states; state 0 is off where the behaviour has one.
    pub states: Vec<State>,
    /// Power above which the appliance counts as on, W.
    pub on_threshold_w: f64,
    /// The kinds of connection real models of this appliance are sold for
    /// besides its own (`alternatives`); the layout ladder moves it between them.
    #[serde(skip_serializing_if = "Vec::is_empty")]
    pub alternatives: Vec<WiringKind>,
    /// Whether it draws, makes or stores power.
    pub role: Role,
    /// `when_dark`: a program runs its phases only from this long before
    /// sunset to this long after sunrise at the home's site, s.
    #[serde(skip_serializing_if = "Option::is_none")]
    pub when_dark_s: Option<f64>,
}

/// A kind of connection, regardless of which lines it uses.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "kebab-case")]
pub enum WiringKind {
    /// Between one line and the neutral (120 V or 230 V loads).
    LineToNeutral,
    /// Between two lines (240 V or 208 V loads).
    LineToLine,
    /// Across all three lines of a three-phase supply.
    ThreePhase,
}

impl WiringKind {
    /// Every kind with the name the scenario language writes it with.
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
    /// The kind's name as written in the scenario (`line-to-line`).
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

/// The supply behind the meter: its slow voltage variation and the impedance
/// of the service conductors.
#[derive(Clone, Debug, Serialize)]
pub struct Source {
    /// Standard deviation of the slow source-voltage variation, fraction of nominal.
    pub variation: f64,
    /// Correlation time of that variation, s.
    pub variation_time_s: f64,
    /// Limit of the variation, fraction of nominal (the supply's normal band).
    pub band: f64,
    /// Resistance of each line conductor from the source to the home, Ω.
    pub line_r_ohm: f64,
    /// Reactance of each line conductor at the supply frequency, Ω.
    pub line_x_ohm: f64,
    /// Resistance of the neutral conductor, Ω.
    pub neutral_r_ohm: f64,
    /// Reactance of the neutral conductor at the supply frequency, Ω.
    pub neutral_x_ohm: f64,
    /// Voltage unbalance factor of the source: the negative-sequence over
    /// the positive-sequence voltage (IEC 61000-4-30), three-phase only.
    #[serde(skip_serializing_if = "is_zero")]
    pub unbalance: f64,
}

fn is_zero(x: &f64) -> bool {
    *x == 0.0
}

/// The home's supply and place: kind of service, voltages, rating, time zone
/// and the source behind the meter.
#[derive(Clone, Debug, Serialize)]
pub struct Home {
    /// A human name for the home.
    pub label: String,
    /// Split-phase, three-phase or single-phase.
    pub supply: SupplyKind,
    /// Line-to-neutral nominal voltage, V.
    pub voltage_v: f64,
    /// Supply frequency, Hz (50 or 60).
    pub frequency_hz: f64,
    /// Rating of the service (main breaker), A.
    pub service_a: f64,
    /// IANA time zone name (`America/Winnipeg`): local time for habits and the run's start.
    pub timezone: String,
    /// The source's voltage variation and impedance.
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

/// What to simulate: the start, the length, the step and the seed.
#[derive(Clone, Debug, Serialize)]
pub struct Run {
    /// Local start time as written, in the home's time zone.
    pub start_local: String,
    /// The same instant in milliseconds since 1970-01-01 UTC.
    pub start_utc_ms: i64,
    /// Length of the run, s.
    pub length_s: f64,
    /// Simulation step, s (100 ms … 1 min).
    pub step_s: f64,
    /// The seed of every random stream of the run.
    pub seed: u64,
}

impl Run {
    /// The number of simulation steps in the run.
    pub fn steps(&self) -> u64 {
        (self.length_s / self.step_s).round() as u64
    }
}

/// The monitor: how often it reports and how it errs.
#[derive(Clone, Debug, Serialize)]
pub struct Meter {
    /// Reporting interval, s (a whole number of steps).
    pub interval_s: f64,
    /// Standard deviation of the reading noise, share of the reading.
    pub noise_relative: f64,
    /// Standard deviation of the noise that does not scale with the reading, W.
    pub noise_floor_w: f64,
    /// Quantisation step of P and Q readings, W (0 = none).
    pub resolution_w: f64,
    /// A meter that reports only the home's total (`channels = "total"`):
    /// per-line P, Q and I and the neutral current are null.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub total_only: bool,
    /// A production channel (`production = true`): a CT on the PV
    /// inverter's output, reported as `production_p_w` (positive while it
    /// produces), with the same noise and resolution as the line channels.
    #[serde(skip_serializing_if = "std::ops::Not::not")]
    pub production: bool,
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

/// What a lost reporting interval looks like in the meters table.
#[derive(Clone, Copy, Debug, PartialEq, Eq, Serialize)]
#[serde(rename_all = "lowercase")]
pub enum DropMode {
    /// Rows kept, meter values null.
    Null,
    /// Rows absent from the meters table (truth keeps every row).
    Missing,
}

/// Reporting intervals the meter loses, in bursts.
#[derive(Clone, Debug, Serialize)]
pub struct Dropouts {
    /// Expected share of reporting intervals lost.
    pub rate: f64,
    /// How long a burst of lost reporting lasts.
    pub length: Dist,
    /// Whether lost intervals are null rows or absent rows.
    pub mode: DropMode,
}

/// Meter faults, each recorded in the manifest.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Faults {
    /// CTs that misread their conductor.
    pub ct: Vec<CtFault>,
    /// Two channels exchanged (CT and voltage reference, or their labels).
    pub swap: Option<(usize, usize)>,
    /// A line with no CT: its P, Q and I are null; totals lack it.
    pub no_ct: Option<usize>,
    /// Lost reporting intervals, if any.
    pub dropouts: Option<Dropouts>,
    /// The meter's clock: offset (s) and drift (fraction, e.g. 20e-6).
    pub clock_offset_s: f64,
    /// The meter clock's rate error, fraction (20e-6 = 20 ppm fast).
    pub clock_drift: f64,
    /// Cumulative energy register per line, Wh.
    pub register: bool,
}

impl Faults {
    /// True when no fault is set (the meter reports what flows).
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
    /// The line index its CT is declared on; `None`: no CT declared.
    pub conductor: Option<usize>,
    /// Declared clamped facing the source (reads −I).
    pub reversed: bool,
}

/// A window of high-rate waveforms to write.
#[derive(Clone, Debug, Serialize)]
pub struct WaveWindow {
    /// Local start time of the window as written, in the home's zone.
    pub start_local: String,
    /// Offset from the start of the run, s.
    pub offset_s: f64,
    /// Length of the window, s.
    pub length_s: f64,
}

/// High-rate waveforms to write: their sample rate and windows.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Waveforms {
    /// Sample rate of the waveform files, Hz.
    pub rate_hz: f64,
    /// The windows of time to write (empty: no waveforms).
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

/// The building's heat-loss and storage figures and its thermostat.
#[derive(Clone, Debug, Serialize)]
pub struct Building {
    /// Heat loss coefficient in steady state (transmission and air change), W/K.
    pub ua_w_k: f64,
    /// Share of `ua_w_k` through windows and ventilation (no storage).
    pub direct_share: f64,
    /// Heat capacity of the interior node (air, furnishings, linings), J/K.
    pub air_j_k: f64,
    /// Heat capacity of the envelope node (the heavy structure), J/K.
    pub mass_j_k: f64,
    /// Conductance between the interior and the envelope node, W/K.
    pub coupling_w_k: f64,
    /// Heating setpoint, °C.
    pub heating_c: f64,
    /// Cooling setpoint, °C (None: no cooling).
    pub cooling_c: Option<f64>,
    /// Thermostat deadband (on below setpoint − half, off above + half), K.
    pub deadband_k: f64,
    /// Droop below the band that brings on the second stage (backup), K.
    pub second_stage_k: f64,
    /// Local hours of the night setback and its depth, K.
    pub setback: Option<([bool; 24], f64)>,
    /// Share of the other appliances' energy that warms the rooms.
    pub gains_share: f64,
    /// Horizontal solar aperture: area that lets the global horizontal
    /// irradiance in, m².
    pub aperture_m2: f64,
    /// Apertures facing a direction (windows), each lit by the irradiance
    /// on its own plane.
    pub glazing: Vec<Glazing>,
}

/// An aperture facing a direction: a window, a roof light.
#[derive(Clone, Debug, Serialize)]
pub struct Glazing {
    /// Area that lets the irradiance on its plane in (glass area times its
    /// solar transmittance), m².
    pub aperture_m2: f64,
    /// Its plane: tilt, azimuth and the albedo of the ground in front.
    pub surface: crate::sun::Surface,
}

/// A home and everything to simulate about it, resolved: SI units inside,
/// every default filled in.
#[derive(Clone, Debug, Serialize)]
pub struct Scenario {
    /// The scenario's name (its file stem or `name`): the dataset folder is named after it.
    pub name: String,
    /// The home's supply and place.
    pub home: Home,
    /// What to simulate: start, length, step, seed.
    pub run: Run,
    /// The monitor's reporting and errors.
    pub meter: Meter,
    /// The listed loads, then the PV and the battery (roles `generator`, `storage`).
    pub appliances: Vec<Appliance>,
    /// Loads nobody listed: in the meters, in truth only as `unmetered_p_w`.
    pub unmetered: Vec<Appliance>,
    /// What the meter really does wrong (recorded in the manifest).
    pub faults: Faults,
    /// The metering as declared, one entry per line channel.
    pub metering: Vec<MeterChannel>,
    /// High-rate waveform windows to write.
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
    pub building: Option<Building>,
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
    /// Simulation steps per reporting interval.
    pub fn steps_per_interval(&self) -> u64 {
        (self.meter.interval_s / self.run.step_s).round() as u64
    }
    /// Reporting intervals in the run: the meters table's rows without dropouts.
    pub fn intervals(&self) -> u64 {
        self.run.steps() / self.steps_per_interval()
    }
}
