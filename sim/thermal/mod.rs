//! A home's heat balance, its thermostat, and the timelines of its heating
//! and cooling appliances.
//!
//! The building is a two-node resistance-capacitance model: the "TiTe"
//! model of Bacher & Madsen (2011), "Identifying suitable models for the
//! heat dynamics of buildings", Energy and Buildings 43(7), 1511–1522 (an
//! interior node of air and furnishings, an envelope node of the heavy
//! structure), with a direct interior-to-outdoor conductance added for
//! windows and ventilation, which store no heat (as the H_tr,w and H_ve of
//! ISO 13790's simple hourly method). Heat from equipment, appliances and
//! sun enters the interior node. Each control step (one minute, or the
//! simulation step if longer) is integrated by backward Euler, which keeps
//! the energy balance exact: heat in equals heat lost plus heat stored.

pub mod equipment;

use crate::behaviour::window::{self, Fit, Piece, Reach};
use crate::behaviour::{Clock, Segment, Timeline};
use crate::scenario::{Appliance, Behaviour, Building, Equipment, HeatPump, Scenario};
use crate::weather::Weather;
use equipment::FROST_BELOW_C;
use serde::Serialize;

impl Building {
    /// Conductance of the envelope node to outdoors (the part of `ua` not
    /// direct, in series with the coupling), W/K.
    pub fn envelope_w_k(&self) -> f64 {
        let series = (1.0 - self.direct_share) * self.ua_w_k;
        if series <= 0.0 {
            return 0.0;
        }
        1.0 / (1.0 / series - 1.0 / self.coupling_w_k)
    }
}

/// The two temperatures of the building, °C.
#[derive(Clone, Copy, Debug)]
pub struct Temps {
    /// The interior node (air, furnishings, linings; the thermostat reads it), °C.
    pub interior: f64,
    /// The envelope node (the heavy structure), °C.
    pub envelope: f64,
}

/// One backward-Euler step of `dt` seconds with outdoor `t_out` and heat
/// `q_w` into the interior node.
pub fn step(b: &Building, t: Temps, t_out: f64, q_w: f64, dt: f64) -> Temps {
    let h_ia = b.direct_share * b.ua_w_k;
    let h_ie = b.coupling_w_k;
    let h_ea = b.envelope_w_k();
    let a11 = b.air_j_k / dt + h_ie + h_ia;
    let a22 = b.mass_j_k / dt + h_ie + h_ea;
    let r1 = b.air_j_k / dt * t.interior + h_ia * t_out + q_w;
    let r2 = b.mass_j_k / dt * t.envelope + h_ea * t_out;
    let det = a11 * a22 - h_ie * h_ie;
    Temps {
        interior: (r1 * a22 + h_ie * r2) / det,
        envelope: (a11 * r2 + h_ie * r1) / det,
    }
}

/// What the thermal run adds up to, for the year report.
#[derive(Clone, Debug, Default, Serialize)]
pub struct Record {
    /// Heat delivered to the rooms by heating equipment, J.
    pub heat_j: f64,
    /// Heat removed by cooling equipment, J.
    pub cool_j: f64,
    /// Mean indoor temperature, °C.
    pub mean_indoor_c: f64,
    /// Share of the time the rooms sat over 1 K below the heating setpoint.
    pub cold_share: f64,
    /// The largest difference, K, between the building temperatures (either
    /// node) of two day blocks where one hands over to the next: what is
    /// left of the warm-up's starting guess ([`WARM_UP`]).
    pub handover_k: f64,
}

/// A thermostatic appliance: its load index, role and running powers.
struct Unit<'a> {
    load: usize,
    role: &'a Equipment,
    /// Electric power of each state at nominal voltage, W.
    p: Vec<f64>,
    segs: Vec<Segment>,
    /// The state asked for in the last control step.
    prev: usize,
}

impl Unit<'_> {
    /// [`Unit::push`]; a blower switching on or off does so `delays` (on,
    /// off) steps into the control step.
    fn push_delayed(&mut self, from: u64, to: u64, state: usize, scale: f64, delays: (u64, u64)) {
        let before = self.prev;
        self.prev = state;
        let d = match (self.role, before == 0, state == 0) {
            (Equipment::Blower, true, false) => delays.0,
            (Equipment::Blower, false, true) => delays.1,
            _ => 0,
        };
        // A delay as long as the control step cannot be drawn inside it.
        let d = if d < to - from { d } else { 0 };
        if d > 0 {
            let last_scale = self.segs.last().map_or(1.0, |g| g.scale as f64);
            self.push(from, from + d, before, last_scale);
        }
        if from + d < to {
            self.push(from + d, to, state, scale);
        }
    }

    fn push(&mut self, from: u64, to: u64, state: usize, scale: f64) {
        let scale = (scale * 100.0).round() as f32 / 100.0;
        if let Some(last) = self.segs.last_mut() {
            if last.state as usize == state && last.scale == scale && last.end == from {
                last.end = to;
                return;
            }
        }
        self.segs.push(Segment {
            start: from,
            end: to,
            state: state as u16,
            scale,
        });
    }
}

/// A blower starts this long after the equipment it serves and runs on this
/// long after it stops, s (fan-on and fan-off delays that move the coil's
/// heat: common practice, no source), in steps of `dt`.
fn blower_delays(dt: f64) -> (u64, u64) {
    (((30.0 / dt).round() as u64), ((45.0 / dt).round() as u64))
}

/// Loads whose power is not heat given off in the rooms: the thermostatic
/// units (their heat is the balance's own), and a PV inverter or a battery,
/// whose power is exported or stored (a PV's negative power taken as gains
/// would cool the house by the array's output).
fn gains_skipped(s: &Scenario, units: &[Unit]) -> Vec<usize> {
    let not_heat = s
        .loads()
        .enumerate()
        .filter(|(_, a)| a.role != crate::scenario::Role::Load)
        .map(|(k, _)| k);
    units.iter().map(|u| u.load).chain(not_heat).collect()
}

/// The roles of a scenario's loads: (load index, role).
fn units(s: &Scenario) -> Vec<Unit<'_>> {
    s.loads()
        .enumerate()
        .filter_map(|(k, a)| match &a.behaviour {
            Behaviour::Thermostat { role } => Some(Unit {
                load: k,
                role,
                p: a.states.iter().map(|st| st.p_w()).collect(),
                segs: Vec::new(),
                prev: 0,
            }),
            _ => None,
        })
        .collect()
}

/// Mean power of the other loads in each of `n` control steps of `k`
/// steps from step `at` of their timelines, W.
fn appliance_gains(
    loads: &[&Appliance],
    tl: &[Timeline],
    skip: &[usize],
    at: i64,
    k: u64,
    n: usize,
) -> Vec<f64> {
    let mut e = vec![0.0; n];
    let (lo, hi) = (at, at + (n as u64 * k) as i64);
    for (j, (a, t)) in loads.iter().zip(tl).enumerate() {
        if skip.contains(&j) {
            continue;
        }
        let first = t.segments.partition_point(|g| (g.end as i64) <= lo);
        for seg in t.segments[first..]
            .iter()
            .take_while(|g| (g.start as i64) < hi)
        {
            let p = a.states[seg.state as usize].p_w() * seg.scale as f64;
            if p == 0.0 {
                continue;
            }
            let mut x = (seg.start as i64).max(lo) - lo;
            let end = (seg.end as i64).min(hi) - lo;
            while x < end {
                let bin = x / k as i64;
                let edge = ((bin + 1) * k as i64).min(end);
                e[(bin as usize).min(n - 1)] += p * (edge - x) as f64;
                x = edge;
            }
        }
    }
    e.iter_mut().for_each(|x| *x /= k as f64);
    e
}

/// The thermostat's memory between control steps.
#[derive(Default)]
struct Controls {
    heat_call: bool,
    cool_call: bool,
    stage2: bool,
    /// Compressor run time at frosting temperatures since the last defrost, s.
    frost_run_s: f64,
    /// Time left in the current defrost, s.
    defrost_left_s: f64,
    /// Time the compressor has been off, s.
    off_s: f64,
    compressor_on: bool,
}

/// Minimum compressor off time between runs, s (anti-short-cycle delay:
/// common practice, no source).
const MIN_OFF_S: f64 = 300.0;

/// What one control step asks of the equipment.
struct Ask {
    heat: bool,
    stage2: bool,
    cool: bool,
    defrost: bool,
    locked_out: bool,
}

impl Controls {
    fn decide(
        &mut self,
        b: &Building,
        set_h: f64,
        ti: f64,
        t_out: f64,
        hp: Option<&HeatPump>,
    ) -> Ask {
        let half = 0.5 * b.deadband_k;
        if ti <= set_h - half {
            self.heat_call = true;
        } else if ti >= set_h + half {
            self.heat_call = false;
        }
        if let Some(c) = b.cooling_c {
            if ti >= c + half {
                self.cool_call = true;
            } else if ti <= c - half {
                self.cool_call = false;
            }
        }
        if self.heat_call {
            self.cool_call = false;
        }
        if self.heat_call && ti <= set_h - half - b.second_stage_k {
            self.stage2 = true;
        }
        if !self.heat_call || ti >= set_h {
            self.stage2 = false;
        }
        let locked_out = hp.is_some_and(|h| t_out < h.lockout_c);
        Ask {
            heat: self.heat_call,
            stage2: self.stage2,
            cool: self.cool_call,
            defrost: self.defrost_left_s > 0.0,
            locked_out,
        }
    }

    /// Whether the compressor may run this step (anti-short-cycle).
    fn compressor_may_run(&self) -> bool {
        self.compressor_on || self.off_s >= MIN_OFF_S
    }

    fn after_step(&mut self, running: bool, frosting: bool, dt: f64, hp: Option<&HeatPump>) {
        if running {
            self.off_s = 0.0;
        } else {
            self.off_s += dt;
        }
        self.compressor_on = running;
        if self.defrost_left_s > 0.0 {
            self.defrost_left_s = (self.defrost_left_s - dt).max(0.0);
            return;
        }
        if let Some(h) = hp {
            if frosting && h.defrost_every_s > 0.0 {
                self.frost_run_s += dt;
                if self.frost_run_s >= h.defrost_every_s {
                    self.frost_run_s = 0.0;
                    self.defrost_left_s = h.defrost_length_s;
                }
            }
        }
    }
}

/// Each unit's state, scale and heat this step; returns (heat into the
/// rooms W, whether the compressor runs, whether it is frosting).
fn operate(
    units: &[Unit],
    ask: &Ask,
    may_run: bool,
    t_out: f64,
    ti: f64,
    out: &mut Vec<(usize, f64)>,
) -> (f64, bool, bool) {
    out.clear();
    let mut q = 0.0;
    let has_hp = units
        .iter()
        .any(|u| matches!(u.role, Equipment::HeatPump(_)));
    let mut by_air = false;
    let mut compressor = false;
    let mut frosting = false;
    for u in units {
        let (state, scale, heat) = match u.role {
            Equipment::HeatPump(h) => {
                let cap = u.p[1] * h.cop * h.capacity_share(t_out);
                let p_heat = cap / h.heating_cop(t_out);
                if ask.defrost {
                    // Reverse cycle: the indoor coil is the evaporator.
                    (2, p_heat / u.p[1], -0.5 * cap)
                } else if ask.heat && !ask.locked_out && may_run {
                    frosting = t_out < FROST_BELOW_C;
                    (1, p_heat / u.p[1], cap)
                } else if ask.cool && may_run && h.cooling_cop.is_some() {
                    let rated = h.cooling_cop.unwrap_or(1.0);
                    let capc = u.p[3] * rated * equipment::cooling_capacity_share(t_out);
                    let pc = capc / equipment::cooling_cop(rated, t_out, ti);
                    (3, pc / u.p[3], -capc)
                } else {
                    (0, 1.0, 0.0)
                }
            }
            Equipment::AirConditioner { cop } => {
                if ask.cool && may_run {
                    let capc = u.p[1] * cop * equipment::cooling_capacity_share(t_out);
                    let pc = capc / equipment::cooling_cop(*cop, t_out, ti);
                    (1, pc / u.p[1], -capc)
                } else {
                    (0, 1.0, 0.0)
                }
            }
            Equipment::Resistance { backup } => {
                let on = if *backup {
                    ask.heat && (ask.stage2 || ask.locked_out || !has_hp) || ask.defrost
                } else {
                    ask.heat
                };
                if on {
                    (1, 1.0, u.p[1])
                } else {
                    (0, 1.0, 0.0)
                }
            }
            Equipment::Furnace { capacity_w } => {
                if ask.heat {
                    (1, 1.0, *capacity_w)
                } else {
                    (0, 1.0, 0.0)
                }
            }
            Equipment::Blower => (0, 1.0, 0.0),
        };
        if state != 0 {
            by_air |= !matches!(u.role, Equipment::Resistance { backup: false });
            compressor |= matches!(
                u.role,
                Equipment::HeatPump(_) | Equipment::AirConditioner { .. }
            );
        }
        q += heat;
        out.push((state, scale));
    }
    for (u, o) in units.iter().zip(out.iter_mut()) {
        if matches!(u.role, Equipment::Blower) && by_air {
            // The fan's own power ends up as heat in the air stream.
            *o = (1, 1.0);
            q += u.p[1];
        }
    }
    (q, compressor, frosting)
}

/// Where the light on the building's apertures comes from.
enum Sunlight<'a> {
    /// No aperture: no solar gains to compute.
    None,
    /// A weather file's measured global horizontal irradiance; with a site,
    /// split by Erbs for the glazing's planes.
    Recorded(&'a Weather, Option<crate::sun::Site>),
    /// The sun over the home's site and its sky (`sim/sun`: NOAA position,
    /// Haurwitz clear sky times the stochastic clear-sky index), the same
    /// sky a `[pv]` array sees.
    Sun(crate::sun::Site, crate::sun::Sky, crate::sun::Night),
}

impl<'a> Sunlight<'a> {
    fn of(s: &Scenario, weather: &'a Weather, b: &Building) -> Sunlight<'a> {
        if b.aperture_m2 <= 0.0 && b.glazing.is_empty() {
            return Sunlight::None;
        }
        if weather.ghi_w_m2.is_some() {
            return Sunlight::Recorded(weather, s.home.site);
        }
        match s.home.site {
            Some(site) => Sunlight::Sun(
                site,
                match s.home.sky {
                    Some(mean) => crate::sun::Sky::new(s.run.seed, site.longitude_deg, mean),
                    None => crate::sun::Sky::clear(),
                },
                crate::sun::Night::default(),
            ),
            None => Sunlight::None,
        }
    }

    /// The solar gains of `b`'s apertures at `t_ms` (UTC), W: the horizontal
    /// aperture times the global horizontal irradiance, each glazing's
    /// aperture times the irradiance on its plane (isotropic sky, Liu &
    /// Jordan, `sun::plane_of_array`).
    fn gains_w(&mut self, b: &Building, t_ms: i64) -> f64 {
        let (pos, light) = match self {
            Sunlight::None => return 0.0,
            Sunlight::Recorded(w, site) => {
                let ghi = w.ghi_at(t_ms);
                match site.filter(|_| !b.glazing.is_empty() && ghi > 0.0) {
                    Some(site) => {
                        let pos = crate::sun::position(site, t_ms);
                        let (dni, dhi) = crate::sun::decompose(ghi, pos.zenith_deg, t_ms);
                        (pos, crate::sun::Light { ghi, dni, dhi })
                    }
                    None => return b.aperture_m2 * ghi,
                }
            }
            // A known night lights no plane: every term below is a zero.
            Sunlight::Sun(site, sky, night) => {
                match crate::sun::light_unless_dark(*site, sky, night, t_ms) {
                    Some(lit) => lit,
                    None => return 0.0,
                }
            }
        };
        b.glazing.iter().fold(b.aperture_m2 * light.ghi, |q, g| {
            let poa =
                crate::sun::plane_of_array(&g.surface, &light, pos.zenith_deg, pos.azimuth_deg);
            q + g.aperture_m2 * poa
        })
    }
}

/// The solar gains of every whole minute from a first instant, computed once:
/// the day blocks overlap, and the sun's position is most of the heat
/// balance's cost.
struct Memo {
    /// The first instant, ms (the phase of the first instant asked for).
    base_ms: Option<i64>,
    /// From `wide_start_ms` over `span_ms` (the clock of the run's blocks).
    wide_start_ms: i64,
    span_ms: i64,
    /// Per minute from `base_ms`; NaN until computed.
    values: Vec<f64>,
}

impl Memo {
    fn new(wide: &Clock) -> Memo {
        Memo {
            base_ms: None,
            wide_start_ms: wide.start_utc_ms,
            span_ms: (wide.steps as f64 * wide.step_s * 1000.0) as i64,
            values: Vec::new(),
        }
    }

    /// The solar gains of `b` at `t_ms`, W, from the memo where `t_ms` falls
    /// on its minutes, else from `sun`.
    fn gains_w(&mut self, sun: &mut Sunlight, b: &Building, t_ms: i64) -> f64 {
        const MINUTE_MS: i64 = 60_000;
        let base = *self.base_ms.get_or_insert_with(|| {
            t_ms - ((t_ms - self.wide_start_ms).div_euclid(MINUTE_MS) + 1) * MINUTE_MS
        });
        if self.values.is_empty() {
            self.values = vec![f64::NAN; (self.span_ms / MINUTE_MS + 3) as usize];
        }
        let d = t_ms - base;
        let slot = (d.rem_euclid(MINUTE_MS) == 0)
            .then(|| d.div_euclid(MINUTE_MS))
            .filter(|&i| i >= 0 && (i as usize) < self.values.len());
        match slot {
            Some(i) if !self.values[i as usize].is_nan() => self.values[i as usize],
            Some(i) => {
                let v = sun.gains_w(b, t_ms);
                self.values[i as usize] = v;
                v
            }
            None => sun.gains_w(b, t_ms),
        }
    }
}

/// Local hour (0 … 23) of each UTC hour of the weather series.
fn local_hours(w: &Weather, tz: &jiff::tz::TimeZone) -> Vec<u8> {
    (0..w.temp_c.len() as i64)
        .map(|h| {
            let ts = jiff::Timestamp::from_millisecond(w.start_utc_ms + h * 3_600_000)
                .expect("within jiff's range");
            ts.to_zoned(tz.clone()).hour() as u8
        })
        .collect()
}

/// How long each day block's heat balance runs before its day in hourly
/// steps with an ideal thermostat ([`Run::coarse`]): the slowest mode of
/// the demo buildings, free-running between the setpoints, has a time
/// constant of about (air + mass) / ua, 40–80 h, so two weeks leave under
/// 1 % of the first guess.
const COARSE_MS: i64 = 14 * 86_400_000;

/// How long each day block's heat balance runs before its day (two weeks
/// coarse, then two days of minute steps that bring the thermostat's
/// cycle) and after it (to find a hand-over). `validate --year` reports
/// how far apart two blocks' temperatures are at their hand-overs
/// (`Record::handover_k`).
pub const WARM_UP: Reach = Reach {
    warm_ms: COARSE_MS + 2 * 86_400_000,
    horizon_ms: 12 * 3_600_000,
};

/// One control step of a block's heat balance, for the record.
#[derive(Clone, Copy)]
struct Logged {
    /// The control step's first step, on the block's clock.
    from: u64,
    /// Heat delivered (positive) or removed (negative), J.
    q_j: f64,
    /// The building's temperatures at the step's start.
    temps: Temps,
    /// Whether the rooms sat over 1 K below the heating setpoint.
    cold: bool,
}

/// What every block of a run shares: the scenario, its building, weather
/// and sunlight, the other loads' timelines (on the clock `wide`) and the
/// control step.
struct Run<'a> {
    b: &'a Building,
    weather: &'a Weather,
    hours: Vec<u8>,
    sun: Sunlight<'a>,
    memo: Memo,
    loads: Vec<&'a Appliance>,
    skip: Vec<usize>,
    hp: Option<HeatPump>,
    /// Steps per control step.
    k: u64,
    /// Start of the clock the other loads' timelines are on, ms.
    wide_start_ms: i64,
    /// Steps of that clock.
    wide_steps: u64,
    /// The other loads' hourly mean power over that clock, from its step
    /// (the first bin), once computed.
    hourly: Option<(i64, Vec<f64>)>,
}

impl Run<'_> {
    /// The heating setpoint at `t_ms`, with the night setback.
    fn setpoint(&self, t_ms: i64) -> f64 {
        let idx = ((t_ms - self.weather.start_utc_ms) / 3_600_000)
            .clamp(0, self.hours.len() as i64 - 1) as usize;
        self.b.heating_c
            - self.b.setback.map_or(
                0.0,
                |(h, by)| {
                    if h[self.hours[idx] as usize] {
                        by
                    } else {
                        0.0
                    }
                },
            )
    }

    /// A guess of the building's state from the mean outdoor temperature,
    /// internal and solar gains over `gains` (mean powers of steps of
    /// `dt_ms` from `start_ms`, the weather and sun sampled `mid_ms` into
    /// each): its steady state, the rooms held within the setpoints.
    fn guess(&mut self, (start_ms, dt_ms, mid_ms): (i64, i64, i64), gains: &[f64]) -> Temps {
        let b = self.b;
        let n = gains.len().max(1);
        let (mut out, mut q) = (0.0, 0.0);
        for (i, gain) in gains.iter().enumerate() {
            let t_ms = start_ms + i as i64 * dt_ms + mid_ms;
            out += self.weather.temp_at(t_ms);
            q += b.gains_share * gain + self.solar_w(t_ms);
        }
        let (out, q) = (out / n as f64, q / n as f64);
        let interior = (out + q / b.ua_w_k).clamp(b.heating_c, b.cooling_c.unwrap_or(f64::MAX));
        let (h_ie, h_ea) = (b.coupling_w_k, b.envelope_w_k());
        Temps {
            interior,
            envelope: (h_ie * interior + h_ea * out) / (h_ie + h_ea),
        }
    }

    /// Mean power of the other loads in `n` bins of `bin` steps from step
    /// `at` of their timelines, W: from one pass over the whole clock where
    /// the bins fall on its bins (the blocks start whole days apart), else
    /// on their own.
    fn hourly_gains(&mut self, tl: &[Timeline], at: i64, bin: i64, n: usize) -> Vec<f64> {
        let (base, all) = self.hourly.get_or_insert_with(|| {
            let base = at.rem_euclid(bin);
            let count = ((self.wide_steps as i64 - base) / bin).max(0) as usize;
            let all = appliance_gains(&self.loads, tl, &self.skip, base, bin as u64, count);
            (base, all)
        });
        let d = at - *base;
        if d.rem_euclid(bin) == 0 && d >= 0 && (d / bin) as usize + n <= all.len() {
            let i = (d / bin) as usize;
            return all[i..i + n].to_vec();
        }
        appliance_gains(&self.loads, tl, &self.skip, at, bin as u64, n)
    }

    /// The solar gains of the building's apertures at `t_ms`, W.
    fn solar_w(&mut self, t_ms: i64) -> f64 {
        match self.sun {
            Sunlight::None => 0.0,
            _ => self.memo.gains_w(&mut self.sun, self.b, t_ms),
        }
    }

    /// The building's state after [`COARSE_MS`] from the start of `clock`
    /// (at step `at` of the other loads' timelines `tl`): hourly steps from
    /// the guess of the first week, the rooms held at the setpoints by as
    /// much heating or cooling as that takes (an ideal thermostat). It
    /// brings the slow mode of the structure (days) near the home's history;
    /// the block's minute steps that follow bring the thermostat's cycle.
    fn coarse(&mut self, tl: &[Timeline], clock: &Clock, at: i64) -> Temps {
        let b = self.b;
        let step_ms = (clock.step_s * 1000.0).round() as i64;
        let bin = (3_600_000 / step_ms).max(1);
        let dt_ms = bin * step_ms;
        let n = (COARSE_MS / dt_ms).max(1) as usize;
        let gains = self.hourly_gains(tl, at, bin, n);
        let dt = dt_ms as f64 / 1000.0;
        // Sampled at the middle of the control step nearest the hour's
        // middle, an instant the minute steps ask for too (the memo).
        let control_ms = self.k as i64 * step_ms;
        let mid_ms = (dt_ms / 2).div_euclid(control_ms) * control_ms + control_ms / 2;
        let week = gains.len().min((7 * 86_400_000 / dt_ms).max(1) as usize);
        let mut temps = self.guess((clock.start_utc_ms, dt_ms, mid_ms), &gains[..week]);
        for (i, gain) in gains.iter().enumerate() {
            let t_ms = clock.start_utc_ms + i as i64 * dt_ms + mid_ms;
            let t_out = self.weather.temp_at(t_ms);
            let q = b.gains_share * gain + self.solar_w(t_ms);
            let free = step(b, temps, t_out, q, dt);
            // The step is linear in the heat: what one more watt does.
            let per_w = step(b, temps, t_out, q + 1.0, dt).interior - free.interior;
            let set_h = self.setpoint(t_ms);
            let target = if free.interior < set_h {
                set_h
            } else {
                b.cooling_c
                    .filter(|&c| free.interior > c)
                    .unwrap_or(free.interior)
            };
            temps = step(b, temps, t_out, q + (target - free.interior) / per_w, dt);
        }
        temps
    }

    /// One block's heat balance over `clock` (a block's own, on the run's
    /// steps): [`Run::coarse`] over its first [`COARSE_MS`], then minute
    /// control steps; the units' timelines (off over the coarse part) and
    /// the log from the block's day on.
    fn block(&mut self, units: &mut [Unit], tl: &[Timeline], clock: &Clock) -> Vec<Logged> {
        let b = self.b;
        let (k, dt_step, steps) = (self.k, clock.step_s, clock.steps);
        let step_ms = (dt_step * 1000.0).round() as i64;
        let at = (clock.start_utc_ms - self.wide_start_ms) / step_ms;
        let mut temps = self.coarse(tl, clock, at);
        let coarse = ((COARSE_MS / step_ms) as u64).min(steps);
        units.iter_mut().for_each(|u| {
            u.segs.clear();
            u.prev = 0;
            u.push(0, coarse, 0, 1.0);
        });
        let n = (steps - coarse).div_ceil(k) as usize;
        let gains = appliance_gains(&self.loads, tl, &self.skip, at + coarse as i64, k, n);
        let mut ctl = Controls {
            off_s: MIN_OFF_S,
            ..Default::default()
        };
        let delays = blower_delays(dt_step);
        let mut ops = Vec::with_capacity(units.len());
        // The record counts a block from its day on (a hand-over is never
        // earlier); the control step in force at the day's start is kept.
        let warm = (WARM_UP.warm_ms / step_ms) as u64;
        let mut log = Vec::with_capacity(n);
        for (i, gain) in gains.iter().enumerate() {
            let from = coarse + i as u64 * k;
            let to = (from + k).min(steps);
            let t_ms = clock.start_utc_ms + ((2 * from + (to - from)) as i64 * step_ms) / 2;
            let t_out = self.weather.temp_at(t_ms);
            let set_h = self.setpoint(t_ms);
            let ask = ctl.decide(b, set_h, temps.interior, t_out, self.hp.as_ref());
            let may_run = ctl.compressor_may_run();
            let (q_hvac, running, frosting) =
                operate(units, &ask, may_run, t_out, temps.interior, &mut ops);
            for (u, &(state, scale)) in units.iter_mut().zip(&ops) {
                u.push_delayed(from, to, state, scale, delays);
            }
            let q = q_hvac + b.gains_share * gain + self.solar_w(t_ms);
            let span = (to - from) as f64 * dt_step;
            let before = temps;
            temps = step(b, temps, t_out, q, span);
            ctl.after_step(running, frosting, span, self.hp.as_ref());
            if to <= warm {
                continue;
            }
            log.push(Logged {
                from,
                q_j: q_hvac * span,
                temps: before,
                cold: temps.interior < set_h - 1.0,
            });
        }
        log
    }
}

/// Fills the timelines of the thermostatic loads of `s` (indices of
/// `s.loads()`, on the clock `wide`) over `cover` (a part of `wide`, whose
/// step 0 is `wide`'s step `cover_at`), from `weather` (the home's outdoor
/// series over `wide`) and the other loads' timelines, which give the
/// internal gains. The heat balance runs in day blocks
/// ([`window::assemble_group`]), each from [`WARM_UP`] before its day, so a
/// run is a slice of the home's one thermal history. Returns the thermal
/// record over `run` (steps of `cover`).
pub fn drive(
    s: &Scenario,
    tl: &mut [Timeline],
    wide: &Clock,
    (cover, cover_at): (&Clock, u64),
    run: std::ops::Range<i64>,
    weather: Option<&Weather>,
) -> Record {
    let mut units = units(s);
    let (Some(b), Some(weather)) = (&s.building, weather) else {
        return Record::default();
    };
    if units.is_empty() || cover.steps == 0 {
        return Record::default();
    }
    let mut ctx = Run {
        b,
        weather,
        hours: local_hours(weather, wide.tz),
        sun: Sunlight::of(s, weather, b),
        memo: Memo::new(wide),
        loads: s.loads().collect(),
        skip: gains_skipped(s, &units),
        hp: units.iter().find_map(|u| match u.role {
            Equipment::HeatPump(h) => Some(h.clone()),
            _ => None,
        }),
        k: ((60.0 / wide.step_s).round() as u64).max(1),
        wide_start_ms: wide.start_utc_ms,
        wide_steps: wide.steps,
        hourly: None,
    };
    let joined = {
        let others: &[Timeline] = tl;
        window::assemble_group(
            cover,
            WARM_UP,
            |c, _| {
                let log = ctx.block(&mut units, others, c);
                let timelines = units
                    .iter_mut()
                    .map(|u| Timeline {
                        segments: std::mem::take(&mut u.segs),
                        level: Vec::new(),
                    })
                    .collect();
                (timelines, log)
            },
            same_building,
        )
    };
    for (u, t) in units.iter().zip(joined.timelines.iter()) {
        tl[u.load] = padded(t, cover_at, wide.steps);
    }
    record(&joined, run)
}

/// Two blocks' building temperatures this close count as one state, K: a
/// tenth of the narrowest deadband of the demos (0.6 K).
const SAME_TEMPS_K: f64 = 0.06;

/// The building's temperatures at run step `t` of a block (at the start of
/// the control step holding it).
fn temps_at(p: &Piece<Vec<Logged>>, t: i64) -> Temps {
    let log = &p.extra;
    let j = log.partition_point(|l| l.from as i64 + p.offset() <= t);
    log[j.saturating_sub(1)].temps
}

/// The larger difference of two blocks' node temperatures at run step `t`.
fn temps_apart(a: &Piece<Vec<Logged>>, b: &Piece<Vec<Logged>>, t: i64) -> f64 {
    let (x, y) = (temps_at(a, t), temps_at(b, t));
    (x.interior - y.interior)
        .abs()
        .max((x.envelope - y.envelope).abs())
}

/// Blocks of the heat balance hand over where their equipment is in the
/// same states, at best where their temperatures are alike too, else where
/// they are least apart (a thermostat's cycle whose phase differs between
/// the blocks keeps its temperatures apart until, say, the morning's
/// recovery from the setback runs both to the same setpoint).
fn same_building(a: &Piece<Vec<Logged>>, b: &Piece<Vec<Logged>>, t: i64) -> Fit {
    if !window::same_states(a, b, t) {
        return Fit::No;
    }
    match temps_apart(a, b, t) {
        apart if apart <= SAME_TEMPS_K => Fit::Tight,
        apart => Fit::Loose(apart),
    }
}

/// `t` (over steps `at ..` of a clock of `steps`) with the steps before
/// and after it off.
fn padded(t: &Timeline, at: u64, steps: u64) -> Timeline {
    let mut segments = Vec::with_capacity(t.segments.len() + 2);
    let off = |start, end| Segment {
        start,
        end,
        state: 0,
        scale: 1.0,
    };
    if at > 0 {
        segments.push(off(0, at));
    }
    segments.extend(t.segments.iter().map(|g| Segment {
        start: g.start + at,
        end: g.end + at,
        ..*g
    }));
    let end = segments.last().map_or(0, |g| g.end);
    if end < steps {
        segments.push(off(end, steps));
    }
    Timeline {
        segments,
        level: Vec::new(),
    }
}

/// The record over `run` from the blocks' logs, each block's over the
/// steps it covers, and the temperature differences at the hand-overs.
fn record(joined: &window::Joined<Vec<Logged>>, run: std::ops::Range<i64>) -> Record {
    let mut rec = Record::default();
    let (mut n, mut cold) = (0usize, 0usize);
    let logs = &joined.extras;
    for (i, log) in logs.iter().enumerate() {
        let off = joined.offsets[i];
        let lo = joined.cuts[i].max(run.start);
        let hi = joined.cuts[i + 1].min(run.end);
        for l in log
            .iter()
            .filter(|l| (lo..hi).contains(&(l.from as i64 + off)))
        {
            if l.q_j > 0.0 {
                rec.heat_j += l.q_j;
            } else {
                rec.cool_j -= l.q_j;
            }
            rec.mean_indoor_c += l.temps.interior;
            n += 1;
            cold += usize::from(l.cold);
        }
        let cut = joined.cuts[i + 1];
        if i + 1 < logs.len() && run.contains(&cut) {
            let before = |log: &[Logged], off: i64| {
                let j = log.partition_point(|l| l.from as i64 + off <= cut);
                log[j.saturating_sub(1)].temps
            };
            let (a, b) = (
                before(log, off),
                before(&logs[i + 1], joined.offsets[i + 1]),
            );
            let d = (a.interior - b.interior)
                .abs()
                .max((a.envelope - b.envelope).abs());
            rec.handover_k = rec.handover_k.max(d);
        }
    }
    if n > 0 {
        rec.mean_indoor_c /= n as f64;
        rec.cold_share = cold as f64 / n as f64;
    }
    rec
}

#[cfg(test)]
mod tests {
    use super::*;

    fn house() -> Building {
        Building {
            ua_w_k: 250.0,
            direct_share: 0.4,
            air_j_k: 2e6,
            mass_j_k: 30e6,
            coupling_w_k: 2500.0,
            heating_c: 20.0,
            cooling_c: Some(24.0),
            deadband_k: 1.0,
            second_stage_k: 1.0,
            setback: None,
            gains_share: 1.0,
            aperture_m2: 0.0,
            glazing: Vec::new(),
        }
    }

    #[test]
    fn steady_state_loses_ua_times_the_difference() {
        // Held long enough, the heat that keeps 20 °C against 0 °C is UA·ΔT.
        let b = house();
        let mut t = Temps {
            interior: 0.0,
            envelope: 0.0,
        };
        for _ in 0..20_000 {
            t = step(&b, t, 0.0, 250.0 * 20.0, 600.0);
        }
        assert!((t.interior - 20.0).abs() < 1e-6, "{}", t.interior);
    }

    #[test]
    fn backward_euler_keeps_the_energy_balance() {
        let b = house();
        let mut t = Temps {
            interior: 20.0,
            envelope: 15.0,
        };
        let (h_ia, h_ea) = (b.direct_share * b.ua_w_k, b.envelope_w_k());
        for _ in 0..100 {
            let n = step(&b, t, -5.0, 3000.0, 60.0);
            let stored =
                b.air_j_k * (n.interior - t.interior) + b.mass_j_k * (n.envelope - t.envelope);
            let lost = 60.0 * (h_ia * (n.interior + 5.0) + h_ea * (n.envelope + 5.0));
            assert!((3000.0 * 60.0 - stored - lost).abs() < 1e-6 * 3000.0 * 60.0);
            t = n;
        }
    }
}
