//! The appliance library of `scenarios/library/`, built into the binary so a
//! scenario anywhere on disk can use `template = "..."`. A file of the same
//! name beside the scenario (in `library/`) takes precedence. Each template
//! says in its `[template]` table which supply its powers are written for
//! and where its values come from; [`super::catalogue`] lists them.

use super::reader::Reader;
use super::source::{Error, Node};
use super::values::{RATED_MISMATCH, RATED_V};
use crate::units::{parse_quantity, QuantityKind};

macro_rules! templates {
    ($($name:literal),* $(,)?) => {
        const TEMPLATES: &[(&str, &str)] = &[
            $(($name, include_str!(concat!("../../scenarios/library/", $name, ".toml")))),*
        ];
    };
}

templates!(
    "baseboard_heater",
    "clothes_dryer",
    "coffee_maker",
    "coffee_maker_eu",
    "computer",
    "dehumidifier",
    "dishwasher",
    "dishwasher_eu",
    "electric_range",
    "ev_charger",
    "ev_charger_eu_1p",
    "ev_charger_eu_3p",
    "freezer",
    "freezer_eu",
    "fridge",
    "fridge_freezer_eu",
    "furnace_blower",
    "game_console",
    "hair_dryer",
    "hair_dryer_eu",
    "heat_pump",
    "heat_pump_eu",
    "heat_pump_water_heater",
    "induction_hob",
    "induction_hob_eu",
    "kettle",
    "kettle_eu",
    "led_lighting",
    "lighting_eu",
    "microwave",
    "microwave_eu",
    "oven_eu",
    "router",
    "standby",
    "sump_pump",
    "tumble_dryer_eu",
    "tv",
    "washing_machine",
    "washing_machine_eu",
    "water_heater",
    "water_heater_eu",
);

/// The text of a built-in template.
pub fn builtin(name: &str) -> Option<&'static str> {
    TEMPLATES.iter().find(|(n, _)| *n == name).map(|(_, t)| *t)
}

/// Names of the built-in templates.
pub fn names() -> Vec<&'static str> {
    TEMPLATES.iter().map(|(n, _)| *n).collect()
}

/// What a template file says of itself in its `[template]` table: the
/// supply its powers are written for and where its values come from.
#[derive(Clone, Debug, PartialEq)]
pub struct About {
    /// The line-to-neutral voltages of the supplies its powers hold on, V
    /// (`voltage = "230 V"` gives one, `"100-240 V"` a range).
    pub voltage_v: (f64, f64),
    /// The template's sources, as written.
    pub source: String,
}

impl About {
    /// The voltage as written back: "230 V" or "100-240 V".
    pub fn voltage_text(&self) -> String {
        let (lo, hi) = self.voltage_v;
        if lo == hi {
            format!("{lo:.0} V")
        } else {
            format!("{lo:.0}-{hi:.0} V")
        }
    }

    /// Whether a supply of `v_ln` volts (line to neutral) lies more than
    /// [`RATED_MISMATCH`] outside the template's voltages.
    pub fn mismatched(&self, v_ln: f64) -> bool {
        let (lo, hi) = self.voltage_v;
        v_ln < lo * (1.0 - RATED_MISMATCH) || v_ln > hi * (1.0 + RATED_MISMATCH)
    }
}

/// Reads a template's `[template]` table (`voltage`, `source`).
pub(crate) fn decode_about(ctx: &Reader, node: &Node, name: &str) -> Result<About, Error> {
    let path = format!("{name}.template");
    let t = ctx.table(node, &path)?;
    let vnode = t.req(
        "voltage",
        "the line-to-neutral voltage its powers are written for, e.g. \"230 V\" or \"100-240 V\"",
    )?;
    let text = ctx.string(vnode, &t.path_of("voltage"))?;
    let voltage_v = parse_voltages(text).map_err(|m| {
        ctx.err(
            vnode,
            &t.path_of("voltage"),
            m,
            "write one voltage such as \"230 V\", or a range such as \"100-240 V\"",
        )
    })?;
    let source = t
        .string("source")?
        .ok_or_else(|| {
            ctx.err(
                node,
                &path,
                "a template's [template] table names its source",
                "write source = \"...\": where its values come from (mark recalled values \"from memory\")",
            )
        })?
        .to_string();
    t.finish()?;
    Ok(About { voltage_v, source })
}

/// "230 V" or "100-240 V" to volts, within the limits of a rated voltage.
/// The error is the reason alone (a `String` on purpose): the caller places
/// it at the template's `voltage` key.
fn parse_voltages(text: &str) -> Result<(f64, f64), String> {
    let one = |s: &str| -> Result<f64, String> {
        let v = parse_quantity(s, QuantityKind::Voltage)?;
        if (RATED_V.0..=RATED_V.1).contains(&v) {
            Ok(v)
        } else {
            Err(format!(
                "\"{s}\" is outside {} … {} V",
                RATED_V.0, RATED_V.1
            ))
        }
    };
    let t = text.trim();
    let Some((lo, hi)) = t.split_once('-') else {
        let v = one(t)?;
        return Ok((v, v));
    };
    let unit = hi
        .trim()
        .trim_start_matches(|c: char| c.is_ascii_digit() || c == '.');
    let (lo, hi) = (one(&format!("{}{unit}", lo.trim()))?, one(hi)?);
    if lo >= hi {
        return Err(format!("\"{text}\" is not a range from low to high"));
    }
    Ok((lo, hi))
}
