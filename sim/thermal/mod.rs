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

use crate::behaviour::{Segment, Timeline};
use crate::scenario::{Appliance, Behaviour, Scenario};
use crate::weather::Weather;
use equipment::{Equipment, FROST_BELOW_C};
use serde::Serialize;

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
    /// Solar aperture: area that lets the horizontal irradiance in, m².
    pub aperture_m2: f64,
}

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

/// Mean power of the other loads in each control step, W.
fn appliance_gains(
    loads: &[&Appliance],
    tl: &[Timeline],
    skip: &[usize],
    k: u64,
    n: usize,
) -> Vec<f64> {
    let mut e = vec![0.0; n];
    for (j, (a, t)) in loads.iter().zip(tl).enumerate() {
        if skip.contains(&j) {
            continue;
        }
        for seg in &t.segments {
            let p = a.states[seg.state as usize].p_w() * seg.scale as f64;
            if p == 0.0 {
                continue;
            }
            let mut x = seg.start;
            while x < seg.end {
                let bin = (x / k) as usize;
                let edge = ((bin as u64 + 1) * k).min(seg.end);
                e[bin.min(n - 1)] += p * (edge - x) as f64;
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
        hp: Option<&equipment::HeatPump>,
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

    fn after_step(
        &mut self,
        running: bool,
        frosting: bool,
        dt: f64,
        hp: Option<&equipment::HeatPump>,
    ) {
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

/// Where the horizontal irradiance on the building's aperture comes from.
enum Sunlight<'a> {
    /// No aperture: no solar gains to compute.
    None,
    /// A weather file's measured irradiance.
    Recorded(&'a Weather),
    /// The sun over the home's site and its sky (`sim/sun`: NOAA position,
    /// Haurwitz clear sky times the stochastic clear-sky index), the same
    /// sky a `[pv]` array sees.
    Sun(crate::sun::Site, crate::sun::Sky),
}

impl<'a> Sunlight<'a> {
    fn of(s: &Scenario, weather: &'a Weather, b: &Building) -> Sunlight<'a> {
        if b.aperture_m2 <= 0.0 {
            return Sunlight::None;
        }
        if weather.ghi_w_m2.is_some() {
            return Sunlight::Recorded(weather);
        }
        match s.home.site {
            Some(site) => Sunlight::Sun(
                site,
                match s.home.sky {
                    Some(mean) => crate::sun::Sky::new(s.run.seed, site.longitude_deg, mean),
                    None => crate::sun::Sky::clear(),
                },
            ),
            None => Sunlight::None,
        }
    }

    /// Global horizontal irradiance at `t_ms` (UTC), W/m².
    fn ghi(&mut self, t_ms: i64) -> f64 {
        match self {
            Sunlight::None => 0.0,
            Sunlight::Recorded(w) => w.ghi_at(t_ms),
            Sunlight::Sun(site, sky) => crate::sun::light(*site, sky, t_ms).1.ghi,
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

/// Fills the timelines of the thermostatic loads of `s` (indices of
/// `s.loads()`) from `weather` (the home's outdoor series over the run) and
/// the other loads' timelines, which give the internal gains. Returns the
/// thermal record.
pub fn drive(
    s: &Scenario,
    tl: &mut [Timeline],
    steps: u64,
    tz: &jiff::tz::TimeZone,
    weather: Option<&Weather>,
) -> Record {
    let mut units = units(s);
    let (Some(b), Some(weather)) = (&s.building, weather) else {
        return Record::default();
    };
    if units.is_empty() || steps == 0 {
        return Record::default();
    }
    let dt_step = s.run.step_s;
    let k = ((60.0 / dt_step).round() as u64).max(1);
    let dt = k as f64 * dt_step;
    let n = steps.div_ceil(k) as usize;
    let hours = local_hours(weather, tz);
    let mut sun = Sunlight::of(s, weather, b);
    let loads: Vec<&Appliance> = s.loads().collect();
    let skip: Vec<usize> = units.iter().map(|u| u.load).collect();
    let gains = appliance_gains(&loads, tl, &skip, k, n);
    let hp = units.iter().find_map(|u| match u.role {
        Equipment::HeatPump(h) => Some(h.clone()),
        _ => None,
    });
    let t0 = weather.temp_at(s.run.start_utc_ms);
    let start_c = t0.clamp(b.heating_c, b.cooling_c.unwrap_or(f64::MAX));
    let mut temps = Temps {
        interior: start_c,
        envelope: start_c,
    };
    let mut ctl = Controls {
        off_s: MIN_OFF_S,
        ..Default::default()
    };
    let mut rec = Record::default();
    let mut ops = Vec::with_capacity(units.len());
    let mut cold = 0usize;
    for i in 0..n {
        let from = i as u64 * k;
        let to = (from + k).min(steps);
        let t_ms = s.run.start_utc_ms
            + ((from as f64 + 0.5 * (to - from) as f64) * dt_step * 1000.0) as i64;
        let t_out = weather.temp_at(t_ms);
        let hour_idx = ((t_ms - weather.start_utc_ms) / 3_600_000).clamp(0, hours.len() as i64 - 1);
        let set_h = b.heating_c
            - b.setback.map_or(0.0, |(h, by)| {
                if h[hours[hour_idx as usize] as usize] {
                    by
                } else {
                    0.0
                }
            });
        let ask = ctl.decide(b, set_h, temps.interior, t_out, hp.as_ref());
        let may_run = ctl.compressor_may_run();
        let (q_hvac, running, frosting) =
            operate(&units, &ask, may_run, t_out, temps.interior, &mut ops);
        let delays = blower_delays(dt_step);
        for (u, &(state, scale)) in units.iter_mut().zip(&ops) {
            u.push_delayed(from, to, state, scale, delays);
        }
        if q_hvac > 0.0 {
            rec.heat_j += q_hvac * dt;
        } else {
            rec.cool_j -= q_hvac * dt;
        }
        let q = q_hvac + b.gains_share * gains[i] + b.aperture_m2 * sun.ghi(t_ms);
        let span = (to - from) as f64 * dt_step;
        temps = step(b, temps, t_out, q, span);
        ctl.after_step(running, frosting, span, hp.as_ref());
        rec.mean_indoor_c += temps.interior / n as f64;
        if temps.interior < set_h - 1.0 {
            cold += 1;
        }
    }
    rec.cold_share = cold as f64 / n as f64;
    for u in units {
        tl[u.load] = Timeline {
            segments: u.segs,
            level: Vec::new(),
        };
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
