//! The catalogue of built-in templates (`loadloom templates`): each
//! template of [`super::library`] read by the scenario reader in a home of
//! its own voltage, so the powers listed are those a run would use.

use super::decode::load_str;
use super::library::{builtin, decode_about, names};
use super::reader::Reader;
use super::source::{parse_toml, Error, Sources};

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
