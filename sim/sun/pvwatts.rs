//! A rooftop PV array and its inverter, after PVWatts version 5 (Dobos
//! 2014, "PVWatts Version 5 Manual", NREL/TP-6A20-62641): DC power in
//! proportion to the plane-of-array irradiance with a linear temperature
//! derating, the system's losses as one share, and the inverter's
//! part-load efficiency curve, clipped at its AC rating. Cell temperature
//! from the Sandia array performance model (King, Boyson & Kratochvil 2004,
//! "Photovoltaic array performance model", SAND2004-3535, eqs. 11–12).

/// Module temperature coefficients of the Sandia model: a, b (wind) and the
/// cell–back difference ΔT at 1000 W/m² (SAND2004-3535, table 1).
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Mount {
    /// Coefficient a of the module temperature, ln(°C per W/m²) (negative).
    pub a: f64,
    /// Coefficient b: how wind cools the module, s/m (negative).
    pub b: f64,
    /// Cell temperature above the module's back at 1000 W/m², °C.
    pub delta_t: f64,
}

/// Glass/cell/glass modules close to a roof (SAND2004-3535, table 1).
pub const ROOF_MOUNT: Mount = Mount {
    a: -2.98,
    b: -0.0471,
    delta_t: 1.0,
};
/// Glass/cell/polymer-sheet modules on an open rack (SAND2004-3535, table 1).
pub const OPEN_RACK: Mount = Mount {
    a: -3.56,
    b: -0.075,
    delta_t: 3.0,
};

/// PVWatts' "standard" module: −0.47 %/°C (Dobos 2014, table 2).
pub const STANDARD_GAMMA: f64 = -0.0047;
/// PVWatts' default system losses, 14.08 % (Dobos 2014, table 3: soiling,
/// shading, mismatch, wiring, connections, light-induced degradation,
/// nameplate and availability combined).
pub const DEFAULT_LOSSES: f64 = 0.1408;
/// The inverter's nominal efficiency (PVWatts default 96 %) and the
/// reference efficiency of the curve it scales (96.37 %; Dobos 2014, eq. 10).
pub const INVERTER_NOMINAL: f64 = 0.96;
const INVERTER_REFERENCE: f64 = 0.9637;

/// The parts of a PVWatts system that turn irradiance into AC power.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct Array {
    /// DC nameplate at 1000 W/m² and 25 °C, W.
    pub dc_w: f64,
    /// The inverter's AC rating, W.
    pub ac_w: f64,
    /// Temperature coefficient of power, 1/°C (negative).
    pub gamma: f64,
    /// Share of DC power lost before the inverter.
    pub losses: f64,
    /// How the modules are mounted (their temperature coefficients).
    pub mount: Mount,
}

/// Cell temperature, °C, at plane-of-array irradiance `poa` (W/m²),
/// ambient `air_c` (°C) and wind `wind` (m/s) (SAND2004-3535, eqs. 11–12).
pub fn cell_temperature(mount: &Mount, poa: f64, air_c: f64, wind: f64) -> f64 {
    let module = poa * (mount.a + mount.b * wind).exp() + air_c;
    module + poa / 1000.0 * mount.delta_t
}

impl Array {
    /// DC power before losses, W (Dobos 2014, eq. 9, without the
    /// angle-of-incidence correction of the cover).
    pub fn dc_power(&self, poa: f64, cell_c: f64) -> f64 {
        (poa / 1000.0 * self.dc_w * (1.0 + self.gamma * (cell_c - 25.0))).max(0.0)
    }

    /// AC power from DC power after losses, W: the inverter's efficiency
    /// η = η_nom/η_ref·(−0.0162ζ − 0.0059/ζ + 0.9858) with ζ the DC power
    /// over the inverter's DC rating (AC rating / η_nom), clipped at the AC
    /// rating (Dobos 2014, eqs. 10–11).
    pub fn ac_power(&self, dc_w: f64) -> f64 {
        if dc_w <= 0.0 {
            return 0.0;
        }
        let dc_rating = self.ac_w / INVERTER_NOMINAL;
        let z = dc_w / dc_rating;
        let eta = INVERTER_NOMINAL / INVERTER_REFERENCE * (-0.0162 * z - 0.0059 / z + 0.9858);
        (eta * dc_w).clamp(0.0, self.ac_w)
    }

    /// AC power at plane-of-array irradiance `poa`, ambient `air_c` and
    /// wind `wind`, W.
    pub fn output(&self, poa: f64, air_c: f64, wind: f64) -> f64 {
        let cell = cell_temperature(&self.mount, poa, air_c, wind);
        self.ac_power(self.dc_power(poa, cell) * (1.0 - self.losses))
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn array() -> Array {
        Array {
            dc_w: 6000.0,
            ac_w: 5000.0,
            gamma: STANDARD_GAMMA,
            losses: DEFAULT_LOSSES,
            mount: ROOF_MOUNT,
        }
    }

    #[test]
    fn standard_conditions_give_the_nameplate() {
        let a = array();
        assert!((a.dc_power(1000.0, 25.0) - 6000.0).abs() < 1e-9);
        // 10 °C warmer: 4.7 % less.
        assert!((a.dc_power(1000.0, 35.0) - 6000.0 * 0.953).abs() < 1e-6);
    }

    #[test]
    fn inverter_efficiency_near_its_nominal_at_full_load() {
        let a = array();
        let dc_rating = 5000.0 / INVERTER_NOMINAL;
        let eta = a.ac_power(dc_rating * 0.5) / (dc_rating * 0.5);
        // The curve peaks near 96–97 % of nominal/reference at mid load.
        assert!(eta > 0.95 && eta < 0.97, "{eta}");
        assert_eq!(a.ac_power(dc_rating * 1.3), 5000.0);
        assert_eq!(a.ac_power(0.0), 0.0);
    }

    #[test]
    fn sandia_cell_temperature_at_its_reference_point() {
        // Close roof mount at 1000 W/m², 20 °C, no wind:
        // 1000·e^(−2.98) + 20 + 1 ≈ 71.8 °C.
        let t = cell_temperature(&ROOF_MOUNT, 1000.0, 20.0, 0.0);
        assert!((t - 71.78).abs() < 0.05, "{t}");
    }
}
