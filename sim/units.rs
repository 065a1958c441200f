//! Quantities written with units (`"1.5 kW"`, `"13 min"`, `"2 %"`), parsed to SI.
//!
//! Everything inside loadloom is SI (W, var, V, A, s, Hz, ohm); units appear
//! only here, at the edge where people write scenarios.

/// What a quantity measures; decides which units are accepted.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum QuantityKind {
    /// Active power: `W kW MW`, held in watts.
    Power,
    /// Reactive power: `var kvar`, held in var.
    Reactive,
    /// Voltage: `V kV`, held in volts.
    Voltage,
    /// Current: `A mA`, held in amperes.
    Current,
    /// Frequency: `Hz`, held in hertz.
    Frequency,
    /// Duration: `ms s min h d w`, held in seconds.
    Duration,
    /// Impedance: `ohm mohm`, held in ohms.
    Impedance,
    /// A share: `"2 %"` or a plain fraction such as `0.02`.
    Fraction,
    /// An angle in degrees.
    Angle,
    /// An energy (a battery's capacity), held in joules.
    Energy,
    /// A temperature in °C (the one quantity not held in SI kelvin: every
    /// figure it meets, setpoints and climate normals, is written in °C).
    Temperature,
    /// A temperature difference, K.
    TempDiff,
    /// A heat transfer coefficient, W/K.
    Conductance,
    /// A heat capacity, J/K.
    HeatCapacity,
    /// An area, m².
    Area,
}

impl QuantityKind {
    /// Units accepted for this kind, with their factor to SI.
    pub fn units(self) -> &'static [(&'static str, f64)] {
        match self {
            QuantityKind::Power => &[("W", 1.0), ("kW", 1e3), ("MW", 1e6)],
            QuantityKind::Reactive => &[("var", 1.0), ("kvar", 1e3), ("VAr", 1.0), ("kVAr", 1e3)],
            QuantityKind::Voltage => &[("V", 1.0), ("kV", 1e3)],
            QuantityKind::Current => &[("A", 1.0), ("mA", 1e-3)],
            QuantityKind::Frequency => &[("Hz", 1.0), ("kHz", 1e3)],
            QuantityKind::Duration => &[
                ("ms", 1e-3),
                ("s", 1.0),
                ("min", 60.0),
                ("h", 3600.0),
                ("d", 86400.0),
                ("w", 604800.0),
            ],
            QuantityKind::Impedance => &[("ohm", 1.0), ("mohm", 1e-3), ("Ω", 1.0), ("mΩ", 1e-3)],
            QuantityKind::Fraction => &[("%", 0.01), ("ppm", 1e-6)],
            QuantityKind::Angle => &[("deg", 1.0), ("°", 1.0)],
            QuantityKind::Energy => &[("Wh", 3600.0), ("kWh", 3.6e6), ("MWh", 3.6e9)],
            QuantityKind::Temperature => &[("°C", 1.0), ("degC", 1.0)],
            QuantityKind::TempDiff => &[("K", 1.0)],
            QuantityKind::Conductance => &[("W/K", 1.0), ("kW/K", 1e3)],
            QuantityKind::HeatCapacity => {
                &[("J/K", 1.0), ("kJ/K", 1e3), ("MJ/K", 1e6), ("kWh/K", 3.6e6)]
            }
            QuantityKind::Area => &[("m²", 1.0), ("m2", 1.0)],
        }
    }

    /// A phrase for error messages: what would be accepted.
    pub fn example(self) -> &'static str {
        match self {
            QuantityKind::Power => "a power such as \"350 W\" or \"1.5 kW\"",
            QuantityKind::Reactive => "a reactive power such as \"120 var\" or \"0.4 kvar\"",
            QuantityKind::Voltage => "a voltage such as \"120 V\" or \"230 V\"",
            QuantityKind::Current => "a current such as \"200 A\"",
            QuantityKind::Frequency => "a frequency such as \"60 Hz\"",
            QuantityKind::Duration => "a duration such as \"90 s\", \"13 min\", \"2 h\" or \"7 d\"",
            QuantityKind::Impedance => "an impedance such as \"0.05 ohm\" or \"40 mohm\"",
            QuantityKind::Fraction => {
                "a share such as \"2 %\", \"20 ppm\" or a fraction such as 0.02"
            }
            QuantityKind::Angle => "an angle such as \"1.5 deg\"",
            QuantityKind::Energy => "an energy such as \"13.5 kWh\"",
            QuantityKind::Temperature => "a temperature such as \"20 °C\" or \"-5 degC\"",
            QuantityKind::TempDiff => "a temperature difference such as \"1 K\"",
            QuantityKind::Conductance => "a heat loss coefficient such as \"250 W/K\"",
            QuantityKind::HeatCapacity => "a heat capacity such as \"30 MJ/K\" or \"8 kWh/K\"",
            QuantityKind::Area => "an area such as \"4 m²\" or \"4 m2\"",
        }
    }

    /// The magnitudes loadloom computes with, in SI: a value other than zero
    /// must lie within `smallest ..= largest` (in size, either sign). Beyond
    /// them no household quantity lives, and the arithmetic downstream (powers
    /// of voltages, ratios of powers) would lose its digits or overflow.
    /// Narrower ranges of single keys (the home's voltage, the step) are
    /// checked where those keys are read.
    pub fn limits(self) -> (f64, f64) {
        match self {
            QuantityKind::Power | QuantityKind::Reactive => (1e-3, 1e6),
            QuantityKind::Voltage => (1e-3, 1e5),
            QuantityKind::Current => (1e-3, 1e5),
            QuantityKind::Frequency => (1e-3, 1e7),
            // The longest run: 3 years of 366 days.
            QuantityKind::Duration => (1e-3, MAX_DURATION_S),
            QuantityKind::Impedance => (1e-6, 1e3),
            QuantityKind::Fraction => (1e-9, 100.0),
            QuantityKind::Angle => (1e-6, 360.0),
            // 1 mWh … 1 GWh.
            QuantityKind::Energy => (3.6, 3.6e12),
            // Beyond the extremes ever measured at the surface.
            QuantityKind::Temperature => (1e-3, 100.0),
            QuantityKind::TempDiff => (1e-3, 100.0),
            QuantityKind::Conductance => (1e-3, 1e6),
            QuantityKind::HeatCapacity => (1.0, 1e12),
            QuantityKind::Area => (1e-3, 1e5),
        }
    }

    /// The SI unit a value of this kind is held in, for messages.
    pub fn si_unit(self) -> &'static str {
        match self {
            QuantityKind::Power => "W",
            QuantityKind::Reactive => "var",
            QuantityKind::Voltage => "V",
            QuantityKind::Current => "A",
            QuantityKind::Frequency => "Hz",
            QuantityKind::Duration => "s",
            QuantityKind::Impedance => "ohm",
            QuantityKind::Fraction => "(as a fraction)",
            QuantityKind::Angle => "deg",
            QuantityKind::Energy => "J",
            QuantityKind::Temperature => "°C",
            QuantityKind::TempDiff => "K",
            QuantityKind::Conductance => "W/K",
            QuantityKind::HeatCapacity => "J/K",
            QuantityKind::Area => "m²",
        }
    }

    /// What the quantity is, in words, for error messages ("power").
    pub fn name(self) -> &'static str {
        match self {
            QuantityKind::Power => "power",
            QuantityKind::Reactive => "reactive power",
            QuantityKind::Voltage => "voltage",
            QuantityKind::Current => "current",
            QuantityKind::Frequency => "frequency",
            QuantityKind::Duration => "duration",
            QuantityKind::Impedance => "impedance",
            QuantityKind::Fraction => "share",
            QuantityKind::Angle => "angle",
            QuantityKind::Energy => "energy",
            QuantityKind::Temperature => "temperature",
            QuantityKind::TempDiff => "temperature difference",
            QuantityKind::Conductance => "heat loss coefficient",
            QuantityKind::HeatCapacity => "heat capacity",
            QuantityKind::Area => "area",
        }
    }
}

/// Parses `"<number> <unit>"` (the space is optional) into SI. The error is
/// the reason alone (a `String` on purpose): the scenario reader adds the
/// file, line and column of the value, a command its option.
///
/// ```
/// use loadloom::units::{parse_quantity, QuantityKind};
/// assert_eq!(parse_quantity("1.5 kW", QuantityKind::Power), Ok(1500.0));
/// assert_eq!(parse_quantity("13 min", QuantityKind::Duration), Ok(780.0));
/// assert!(parse_quantity("1.5 kw", QuantityKind::Power).unwrap_err().contains("kW"));
/// ```
pub fn parse_quantity(text: &str, kind: QuantityKind) -> Result<f64, String> {
    let t = text.trim();
    let split = number_prefix_len(t);
    let (num, unit) = t.split_at(split);
    let unit = unit.trim();
    let value: f64 = num.replace('_', "").parse().map_err(|_| {
        format!(
            "\"{text}\" does not start with a number; expected {}",
            kind.example()
        )
    })?;
    if !value.is_finite() {
        return Err(format!("\"{text}\" is not a finite number"));
    }
    if unit.is_empty() {
        return Err(format!(
            "\"{text}\" has no unit; expected {}",
            kind.example()
        ));
    }
    for &(u, f) in kind.units() {
        if u == unit {
            return within_limits(text, value * f, kind);
        }
    }
    let known: Vec<&str> = kind.units().iter().map(|u| u.0).collect();
    let near = kind
        .units()
        .iter()
        .find(|u| u.0.eq_ignore_ascii_case(unit))
        .map(|u| format!(" (did you mean \"{}\"?)", u.0))
        .unwrap_or_default();
    Err(format!(
        "\"{unit}\" is not a unit of {}{near}; accepted: {}",
        kind.name(),
        known.join(", ")
    ))
}

/// The longest duration anywhere in a scenario (and the longest run): three
/// years of 366 days.
pub const MAX_DURATION_S: f64 = 3.0 * 366.0 * 86400.0;

/// The longest duration inside an appliance (a dwell, a session, a period,
/// `every`, a distribution's median, mean, minimum or maximum): one year of
/// 366 days. A load that holds a state longer than that within a run of at
/// most three years is no behaviour the data could show.
pub const MAX_APPLIANCE_DURATION_S: f64 = 366.0 * 86400.0;

/// `si` if it is zero or within [`QuantityKind::limits`], else the reason (a
/// `String`, placed by the caller as for [`parse_quantity`]).
fn within_limits(text: &str, si: f64, kind: QuantityKind) -> Result<f64, String> {
    let (lo, hi) = kind.limits();
    let size = si.abs();
    if si == 0.0 || (lo..=hi).contains(&size) {
        return Ok(si);
    }
    Err(format!(
        "\"{text}\" is outside the range of a {}: zero, or {lo:e} … {hi:e} {} in size",
        kind.name(),
        kind.si_unit()
    ))
}

/// Length in bytes of the leading number: sign, digits, `_`, `.`, exponent.
fn number_prefix_len(t: &str) -> usize {
    let b = t.as_bytes();
    let mut i = 0;
    if i < b.len() && (b[i] == b'-' || b[i] == b'+') {
        i += 1;
    }
    while i < b.len() && (b[i].is_ascii_digit() || b[i] == b'.' || b[i] == b'_') {
        i += 1;
    }
    // An exponent only when digits follow it, so "5 e" stays a unit error.
    if i > 0 && i < b.len() && (b[i] == b'e' || b[i] == b'E') {
        let mut j = i + 1;
        if j < b.len() && (b[j] == b'-' || b[j] == b'+') {
            j += 1;
        }
        if j < b.len() && b[j].is_ascii_digit() {
            while j < b.len() && b[j].is_ascii_digit() {
                j += 1;
            }
            i = j;
        }
    }
    i
}

/// Formats seconds as a short human duration for reports.
pub fn human_duration(s: f64) -> String {
    if s >= 86400.0 && (s / 86400.0).fract() == 0.0 {
        format!("{} d", s / 86400.0)
    } else if s >= 3600.0 {
        format!("{:.1} h", s / 3600.0)
    } else if s >= 60.0 {
        format!("{:.1} min", s / 60.0)
    } else {
        format!("{s} s")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn parses_units_to_si() {
        assert_eq!(parse_quantity("118 W", QuantityKind::Power).unwrap(), 118.0);
        assert_eq!(
            parse_quantity("0.4 kvar", QuantityKind::Reactive).unwrap(),
            400.0
        );
        assert_eq!(
            parse_quantity("7 d", QuantityKind::Duration).unwrap(),
            604800.0
        );
        assert_eq!(
            parse_quantity("230V", QuantityKind::Voltage).unwrap(),
            230.0
        );
        assert!((parse_quantity("2 %", QuantityKind::Fraction).unwrap() - 0.02).abs() < 1e-15);
        assert_eq!(
            parse_quantity("-350 W", QuantityKind::Power).unwrap(),
            -350.0
        );
        assert_eq!(
            parse_quantity("1e3 W", QuantityKind::Power).unwrap(),
            1000.0
        );
    }

    #[test]
    fn rejects_bad_units_with_a_hint() {
        let e = parse_quantity("1.5 kw", QuantityKind::Power).unwrap_err();
        assert!(e.contains("did you mean \"kW\""), "{e}");
        assert!(parse_quantity("fast", QuantityKind::Duration).is_err());
        assert!(parse_quantity("12", QuantityKind::Duration)
            .unwrap_err()
            .contains("no unit"));
        assert!(parse_quantity("3 V", QuantityKind::Power).is_err());
    }

    #[test]
    fn refuses_magnitudes_beyond_the_limits() {
        // Issue 18: these reached the physics and came out as inf or NaN.
        for (text, kind) in [
            ("1e308 kW", QuantityKind::Power),
            ("1e-320 V", QuantityKind::Voltage),
            ("1e30 h", QuantityKind::Duration),
            ("1e-30 s", QuantityKind::Duration),
            ("5e-324 ohm", QuantityKind::Impedance),
            ("1e308 %", QuantityKind::Fraction),
        ] {
            let e = parse_quantity(text, kind).unwrap_err();
            assert!(e.contains("outside the range"), "{text}: {e}");
        }
        assert_eq!(parse_quantity("0 W", QuantityKind::Power), Ok(0.0));
        assert_eq!(parse_quantity("-0.5 MW", QuantityKind::Power), Ok(-5e5));
        assert_eq!(parse_quantity("100 ms", QuantityKind::Duration), Ok(0.1));
    }
}
