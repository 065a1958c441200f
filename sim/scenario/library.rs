//! The appliance library of `scenarios/library/`, built into the binary so a
//! scenario anywhere on disk can use `template = "..."`. A file of the same
//! name beside the scenario (in `library/`) takes precedence. Each template
//! says in its `[template]` table which supply its powers are written for
//! and where its values come from; [`catalogue`] lists them.

use super::decode::{load_str, RATED_MISMATCH, RATED_V};
use super::reader::Reader;
use super::source::{parse_toml, Error, Node, Sources};
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

/// A built-in template as `loadloom templates` lists it.
#[derive(Clone, Debug, serde::Serialize)]
pub struct TemplateEntry {
    /// Its name (`template = "..."`).
    pub name: String,
    /// Its label.
    pub label: String,
    /// What its energy is for.
    pub end_use: String,
    /// Its default connection.
    pub wiring: String,
    /// The line-to-neutral voltages its powers hold on, as written.
    pub voltage: String,
    /// Each state with its power (the sum of its draws at the template's
    /// own voltage), W; the program's `off` is left out.
    pub states: Vec<(String, f64)>,
    /// The largest of the states' powers, W (inrush not counted).
    pub peak_w: f64,
    /// Where its values come from.
    pub source: String,
}

/// Every built-in template, decoded by the scenario reader in a home of its
/// own voltage (so the powers listed are those a run would use).
pub fn catalogue() -> Result<Vec<TemplateEntry>, Error> {
    names().into_iter().map(entry).collect()
}

/// One template, read as a scenario of a home built for it.
fn entry(name: &str) -> Result<TemplateEntry, Error> {
    let text = builtin(name).expect("listed");
    let mut sources = Sources::default();
    let file = sources.add(
        std::path::Path::new(&format!("<built-in library>/{name}.toml")),
        text.to_string(),
    );
    let root = parse_toml(&sources, file)?;
    let ctx = Reader { sources: &sources };
    let about_node = ctx
        .table(&root, name)?
        .req("template", "the [template] table: voltage and source")?;
    let about = decode_about(&ctx, about_node, name)?;
    let s = load_str(
        std::path::Path::new("<built-in library>/home.toml"),
        home_for(name, about.voltage_v.0),
    )?;
    let a = &s.appliances[0];
    let states: Vec<(String, f64)> = a
        .states
        .iter()
        .filter(|st| !(st.name == "off" && st.draws.is_empty()))
        .map(|st| (st.name.clone(), st.draws.iter().map(|d| d.p_w).sum()))
        .collect();
    Ok(TemplateEntry {
        name: name.to_string(),
        label: a.label.clone(),
        end_use: a.end_use.clone(),
        wiring: a.wiring.name(),
        voltage: about.voltage_text(),
        peak_w: states.iter().map(|s| s.1).fold(0.0, f64::max),
        states,
        source: about.source,
    })
}

/// A scenario with one appliance from template `name`: a split-phase home
/// below 150 V, a three-phase one above, with a site, weather and a
/// building so every kind of template can be read.
fn home_for(name: &str, v_ln: f64) -> String {
    let supply = if v_ln < 150.0 {
        "split-phase"
    } else {
        "three-phase"
    };
    format!(
        "[home]\nsupply = \"{supply}\"\nvoltage = \"{v_ln} V\"\ntimezone = \"UTC\"\nlatitude = 50.0\nlongitude = 8.0\n\n\
         [run]\nstart = \"2027-01-04T00:00\"\nlength = \"1 d\"\n\n\
         [weather]\nclimate = \"rhineland\"\n\n\
         [building]\nua = \"150 W/K\"\nmass = \"30 MJ/K\"\n\n\
         [[appliance]]\nid = \"a\"\ntemplate = \"{name}\"\n"
    )
}

/// The built-in templates, as `loadloom templates` prints them.
pub struct Catalogue(pub Vec<TemplateEntry>);

impl solver_check::render::Render for Catalogue {
    fn to_text(&self) -> String {
        let rows: Vec<Vec<String>> = self
            .0
            .iter()
            .map(|e| {
                vec![
                    e.name.clone(),
                    e.voltage.clone(),
                    e.wiring.clone(),
                    format!("{:.0} W", e.peak_w),
                ]
            })
            .collect();
        let table =
            solver_check::render::aligned(&["template", "voltage", "wiring", "peak"], &rows, 3);
        let mut lines = table.lines();
        let mut out = format!("{}\n", lines.next().unwrap_or_default());
        for (e, line) in self.0.iter().zip(lines) {
            let states: Vec<String> = e
                .states
                .iter()
                .map(|(n, p)| format!("{n} {p:.0} W"))
                .collect();
            out += &format!(
                "{line}\n    states: {}\n    source: {}\n",
                states.join(", "),
                e.source
            );
        }
        out.push_str(
            "\nvoltage: line to neutral of the supply the powers are written for; \
             a template used on a supply more than 10 % away gets a `validate` warning\n",
        );
        out
    }

    fn to_json(&self) -> serde_json::Value {
        serde_json::json!({
            "format": "loadloom-templates/1",
            "templates": self.0.iter().map(|e| serde_json::json!({
                "name": e.name,
                "label": e.label,
                "end_use": e.end_use,
                "wiring": e.wiring,
                "voltage": e.voltage,
                "peak_w": e.peak_w,
                "states": e.states.iter().map(|(n, p)| serde_json::json!({ "name": n, "power_w": p })).collect::<Vec<_>>(),
                "source": e.source,
            })).collect::<Vec<_>>(),
        })
    }
}
