//! Heating and cooling equipment: what each role delivers and draws at an
//! outdoor temperature.
//!
//! Heat pump heating: capacity linear in outdoor temperature through its
//! two rating points, 8.33 °C (47 °F) and −8.33 °C (17 °F), as the bin
//! method of AHRI Standard 210/240 rates it (from memory); COP along the
//! published quadratic fit for air-source heat pumps of Staffell, Brett,
//! Brandon & Hawkes (2012), "A review of domestic heat pumps", Energy &
//! Environmental Science 5, 9291: COP = 6.81 − 0.121·ΔT + 0.000630·ΔT²,
//! ΔT = sink − outdoor temperature (coefficients from memory), scaled by
//! one factor so it passes through the unit's rated COP at 8.33 °C.
//!
//! Cooling (air conditioners, heat pumps in cooling): a fixed fraction of
//! the Carnot COP between an evaporator 10 K below the indoor air and a
//! condenser 12 K above the outdoor air (approach temperatures common
//! practice, no source), the fraction set by the rated COP at 35 °C outdoor
//! and 26.7 °C indoor (AHRI 210/240 "A" conditions, from memory); capacity
//! falling 1 % per K above 35 °C (from memory).

use crate::scenario::{Equipment, HeatPump};

/// The heating rating point, °C (47 °F).
pub const RATING_HIGH_C: f64 = 8.333;
/// The low-temperature heating rating point, °C (17 °F).
pub const RATING_LOW_C: f64 = -8.333;
/// The cooling rating point: outdoor and indoor, °C (95 °F, 80 °F).
pub const RATING_COOL_C: (f64, f64) = (35.0, 26.667);

impl Equipment {
    /// The role's name as written in the scenario (`heat-pump`, `blower`, …).
    pub fn name(&self) -> &'static str {
        match self {
            Equipment::HeatPump(_) => "heat-pump",
            Equipment::AirConditioner { .. } => "air-conditioner",
            Equipment::Resistance { backup: false } => "resistance",
            Equipment::Resistance { backup: true } => "backup",
            Equipment::Furnace { .. } => "furnace",
            Equipment::Blower => "blower",
        }
    }
}

/// Below this outdoor temperature an outdoor coil frosts (common practice,
/// no source: frost forms on the coil from about +5 °C down).
pub const FROST_BELOW_C: f64 = 5.0;

/// The published quadratic COP fit for air-source heat pumps (Staffell et
/// al. 2012), for a temperature lift `dt` in K (held at its fitted range
/// 15 … 60 K ends).
pub fn staffell_ashp(dt: f64) -> f64 {
    let dt = dt.clamp(15.0, 60.0);
    6.81 - 0.121 * dt + 0.000630 * dt * dt
}

impl HeatPump {
    /// Heating COP at outdoor temperature `t_out` °C.
    pub fn heating_cop(&self, t_out: f64) -> f64 {
        let k = self.cop / staffell_ashp(self.sink_c - RATING_HIGH_C);
        k * staffell_ashp(self.sink_c - t_out)
    }
    /// Heating capacity at `t_out`, as a share of the capacity at 8.33 °C:
    /// linear through the two rating points, held between 10 % and 130 %.
    pub fn capacity_share(&self, t_out: f64) -> f64 {
        let slope = (1.0 - self.low_capacity) / (RATING_HIGH_C - RATING_LOW_C);
        (1.0 + slope * (t_out - RATING_HIGH_C)).clamp(0.1, 1.3)
    }
}

/// Cooling COP at outdoor `t_out` and indoor `t_in` (°C) for a unit rated
/// `rated_cop` at the cooling rating point: a constant share of Carnot.
pub fn cooling_cop(rated_cop: f64, t_out: f64, t_in: f64) -> f64 {
    let carnot = |o: f64, i: f64| {
        let te = i - 10.0 + 273.15;
        let tc = o + 12.0 + 273.15;
        te / (tc - te).max(5.0)
    };
    let share = rated_cop / carnot(RATING_COOL_C.0, RATING_COOL_C.1);
    (share * carnot(t_out, t_in)).min(3.0 * rated_cop)
}

/// Cooling capacity at `t_out` as a share of the rated one.
pub fn cooling_capacity_share(t_out: f64) -> f64 {
    (1.0 - 0.01 * (t_out - RATING_COOL_C.0)).clamp(0.5, 1.2)
}

/// The inputs, as shares of state `state`'s rated one, that a role may
/// draw at outdoor temperatures from −25 °C to 40 °C, in steps of 5 %
/// (what a wiring check must expect a switching to look like).
pub fn input_scales(role: &Equipment, state: usize) -> Vec<f64> {
    let mut k: Vec<f64> = (-25..=40)
        .filter_map(|t| {
            let t = t as f64;
            match (role, state) {
                (Equipment::HeatPump(h), 1 | 2) => {
                    Some(h.capacity_share(t) * h.cop / h.heating_cop(t))
                }
                (Equipment::HeatPump(h), 3) => h
                    .cooling_cop
                    .map(|c| cooling_capacity_share(t) * c / cooling_cop(c, t, 24.0)),
                (Equipment::AirConditioner { cop }, 1) => {
                    Some(cooling_capacity_share(t) * cop / cooling_cop(*cop, t, 24.0))
                }
                _ => None,
            }
        })
        .map(|x| (x * 20.0).round() / 20.0)
        .collect();
    k.push(1.0);
    k.sort_by(f64::total_cmp);
    k.dedup();
    k
}

#[cfg(test)]
mod tests {
    use super::*;

    fn hp() -> HeatPump {
        HeatPump {
            cop: 3.6,
            low_capacity: 0.62,
            sink_c: 35.0,
            lockout_c: -20.0,
            cooling_cop: Some(3.8),
            defrost_every_s: 3600.0,
            defrost_length_s: 300.0,
        }
    }

    #[test]
    fn curves_pass_through_their_rating_points() {
        let h = hp();
        assert!((h.heating_cop(RATING_HIGH_C) - 3.6).abs() < 1e-12);
        assert!((h.capacity_share(RATING_HIGH_C) - 1.0).abs() < 1e-12);
        assert!((h.capacity_share(RATING_LOW_C) - 0.62).abs() < 1e-12);
        assert!((cooling_cop(3.8, 35.0, 26.667) - 3.8).abs() < 1e-12);
    }

    #[test]
    fn colder_air_gives_less_heat_at_a_lower_cop() {
        let h = hp();
        assert!(h.heating_cop(-15.0) < h.heating_cop(0.0));
        assert!(h.heating_cop(0.0) < h.heating_cop(10.0));
        assert!(h.capacity_share(-15.0) < h.capacity_share(0.0));
        assert!(cooling_cop(3.8, 40.0, 24.0) < cooling_cop(3.8, 30.0, 24.0));
    }
}
