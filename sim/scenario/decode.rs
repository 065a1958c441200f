//! From the `Node` tree (the TOML source with its places) to a resolved
//! [`Scenario`]: units to SI, defaults filled in, templates merged, every
//! rule checked with its place named.

use super::library;

use super::model::*;
use super::reader::{Reader, TableReader};
use super::source::{parse_toml, read_source, At, Entry, Error, Node, Sources, Val};
use super::values::{check_id, parse_hours, parse_wiring, MAX_NAME_CHARS, RATED_MISMATCH, RATED_V};
use crate::units::QuantityKind;
use solver_check::contract::line_label;
use std::path::{Path, PathBuf};

/// Reads and checks a scenario file (and the templates it uses).
///
/// Errors name the file, line and column, the key and the fix; their exit
/// status is 2 (bad input).
///
/// # Example
///
/// ```
/// use std::path::Path;
/// let home = loadloom::scenario::load(Path::new("scenarios/split-phase-house.toml"))?;
/// assert_eq!(home.home.voltage_v, 120.0); // line to neutral, V
/// assert!(home.appliances.iter().any(|a| a.id == "fridge"));
/// # Ok::<(), loadloom::scenario::Error>(())
/// ```
pub fn load(path: &Path) -> Result<Scenario, Error> {
    load_str(path, read_source(path, "scenario")?)
}

/// Like [`load`], with the text given; `path` names it in errors and decides
/// where templates are looked up.
///
/// # Example
///
/// A split-phase home with one kettle, ten minutes long:
///
/// ```
/// use std::path::Path;
/// let text = r#"
/// [home]
/// supply = "split-phase"
/// timezone = "UTC"
/// [run]
/// start = "2027-01-04T00:00"
/// length = "10 min"
/// [[appliance]]
/// id = "kettle"
/// wiring = "L1-N"
/// behaviour = "steady"
/// load = "resistive"
/// states = [{ power = "1500 W", pf = 1.0 }]
/// "#;
/// let home = loadloom::scenario::load_str(Path::new("kettle.toml"), text.to_string())?;
/// assert_eq!(home.run.length_s, 600.0); // SI inside: seconds
/// assert_eq!(home.appliances[0].states[0].p_w(), 1500.0); // watts
/// # Ok::<(), loadloom::scenario::Error>(())
/// ```
pub fn load_str(path: &Path, text: String) -> Result<Scenario, Error> {
    let mut sources = Sources::default();
    let file = sources.add(path, text);
    let root = parse_toml(&sources, file)?;
    let library_dirs = library_dirs(path, &root, &sources)?;
    // Templates are read into `sources` first, so errors can point into them.
    let mut templates: Vec<(String, usize, Node)> = Vec::new();
    collect_templates(&root, &library_dirs, &mut sources, &mut templates)?;
    let ctx = Reader { sources: &sources };
    let name = path
        .file_stem()
        .map(|s| s.to_string_lossy().to_string())
        .unwrap_or_else(|| "scenario".into());
    decode(&ctx, &root, name, &templates)
}

pub(crate) fn library_dirs(
    path: &Path,
    root: &Node,
    sources: &Sources,
) -> Result<Vec<PathBuf>, Error> {
    let base = path.parent().map(Path::to_path_buf).unwrap_or_default();
    let mut dirs = Vec::new();
    if let Val::Table(entries) = &root.v {
        if let Some(e) = entries.iter().find(|e| e.key == "library") {
            let ctx = Reader { sources };
            let dir = base.join(ctx.string(&e.node, "library")?);
            if !dir.is_dir() {
                let what = if dir.exists() {
                    "is not a folder"
                } else {
                    "does not exist"
                };
                return Err(ctx.err(
                    &e.node,
                    "library",
                    format!("the library folder {} {what}", dir.display()),
                    "name a folder of templates (NAME.toml), relative to the scenario, or leave `library` out to use the built-in templates",
                ));
            }
            dirs.push(dir);
        }
    }
    dirs.push(base.join("library"));
    Ok(dirs)
}

pub(crate) fn collect_templates(
    root: &Node,
    dirs: &[PathBuf],
    sources: &mut Sources,
    out: &mut Vec<(String, usize, Node)>,
) -> Result<(), Error> {
    let Val::Table(entries) = &root.v else {
        return Ok(());
    };
    let lists = entries
        .iter()
        .filter(|e| e.key == "appliance" || e.key == "unmetered");
    for (key, app, i) in lists.flat_map(|e| match &e.node.v {
        Val::Arr(list) => list
            .iter()
            .enumerate()
            .map(|(i, a)| (e.key.as_str(), a, i))
            .collect::<Vec<_>>(),
        _ => vec![],
    }) {
        let Val::Table(fields) = &app.v else { continue };
        let Some(t) = fields.iter().find(|e| e.key == "template") else {
            continue;
        };
        let Val::Str(name) = &t.node.v else { continue };
        if out.iter().any(|(n, _, _)| n == name) {
            continue;
        }
        let found = dirs
            .iter()
            .map(|d| d.join(format!("{name}.toml")))
            .find(|p| p.is_file());
        let (tpath, text) = match found {
            Some(p) => {
                let text = read_source(&p, "template")?;
                (p, text)
            }
            None => match library::builtin(name) {
                Some(text) => (
                    PathBuf::from(format!("<built-in library>/{name}.toml")),
                    text.to_string(),
                ),
                None => {
                    let ctx = Reader { sources };
                    return Err(ctx.err(
                        &t.node,
                        &format!("{key}[{i}].template"),
                        format!("no template named \"{name}\""),
                        format!(
                            "templates built in: {}; or put {name}.toml in {}",
                            library::names().join(", "),
                            dirs[0].display()
                        ),
                    ));
                }
            },
        };
        let file = sources.add(&tpath, text);
        let node = parse_toml(sources, file)?;
        out.push((name.clone(), file, node));
    }
    Ok(())
}

/// Overlays `over` on `base`: keys of `over` win; tables merge key by key.
pub(crate) fn merge(base: &Node, over: &Node) -> Node {
    match (&base.v, &over.v) {
        (Val::Table(b), Val::Table(o)) => {
            let mut out: Vec<Entry> = b.clone();
            for e in o {
                if let Some(slot) = out.iter_mut().find(|x| x.key == e.key) {
                    slot.node = merge(&slot.node, &e.node);
                    slot.key_src = e.key_src.clone();
                } else {
                    out.push(e.clone());
                }
            }
            Node {
                v: Val::Table(out),
                src: over.src.clone(),
            }
        }
        _ => over.clone(),
    }
}

fn decode(
    ctx: &Reader,
    root: &Node,
    name: String,
    templates: &[(String, usize, Node)],
) -> Result<Scenario, Error> {
    let top = ctx.table(root, "")?;
    let _ = top.opt("library");
    let home = decode_home(
        ctx,
        top.req("home", "the [home] section: supply, voltage, timezone")?,
    )?;
    let run = decode_run(
        ctx,
        top.req("run", "the [run] section: start and length")?,
        &home,
    )?;
    let meter = match top.opt("meter") {
        Some(n) => decode_meter(ctx, n, &run)?,
        None => Meter {
            interval_s: run.step_s,
            noise_relative: 0.0,
            noise_floor_w: 0.0,
            resolution_w: 0.0,
            total_only: false,
            production: false,
        },
    };
    let (mut appliances, unmetered, mut warnings) = decode_loads(ctx, &top, &home, templates)?;
    let metered = appliances.len();
    decode_generation(ctx, &top, &home, &meter, &mut appliances, &mut warnings)?;
    check_generation_ids(ctx, &top, &appliances, &unmetered, metered)?;
    let waveforms = match top.opt("waveform") {
        Some(n) => decode_waveforms(ctx, n, &home, &run)?,
        None => Waveforms {
            rate_hz: DEFAULT_WAVE_RATE_HZ,
            windows: vec![],
        },
    };
    let faults = match top.opt("faults") {
        Some(n) => decode_faults(ctx, n, &home, &meter)?,
        None => Faults::default(),
    };
    let metering = match top.opt("metering") {
        Some(n) => decode_metering(ctx, n, &home)?,
        None => (0..home.supply.lines())
            .map(|x| MeterChannel {
                conductor: Some(x),
                reversed: false,
            })
            .collect(),
    };
    let (weather, building, references) =
        decode_thermal(ctx, root, &top, &home, &run, &appliances, &unmetered)?;
    top.finish()?;
    Ok(Scenario {
        name,
        home,
        run,
        meter,
        appliances,
        unmetered,
        faults,
        metering,
        waveforms,
        warnings,
        weather,
        building,
        references,
        source_toml: None,
    })
}

/// The appliances, the unmetered loads and the warnings about them.
type Loads = (Vec<Appliance>, Vec<Appliance>, Vec<String>);

/// The appliances and the unmetered loads (both with `home.away` applied),
/// and one supply warning per load that has one.
fn decode_loads(
    ctx: &Reader,
    top: &TableReader,
    home: &Home,
    templates: &[(String, usize, Node)],
) -> Result<Loads, Error> {
    let mut supply_warnings: Vec<(String, String)> = Vec::new();
    let apps_node = top.req("appliance", "one [[appliance]] section per appliance")?;
    if ctx.array(apps_node, "appliance")?.is_empty() {
        return Err(ctx.err(
            apps_node,
            "appliance",
            "a home needs at least one appliance",
            "add an [[appliance]] section",
        ));
    }
    let mut appliances: Vec<Appliance> = Vec::new();
    decode_list(
        ctx,
        apps_node,
        "appliance",
        home,
        templates,
        &mut appliances,
        &mut supply_warnings,
    )?;
    // Unmetered loads: in the meters' aggregate, in truth only as their sum
    // `unmetered_p_w`; the same language as appliances.
    let metered = appliances.len();
    if let Some(n) = top.opt("unmetered") {
        decode_list(
            ctx,
            n,
            "unmetered",
            home,
            templates,
            &mut appliances,
            &mut supply_warnings,
        )?;
    }
    if let Some(away) = home.away {
        for a in appliances.iter_mut() {
            for h in a.behaviour.habits_mut() {
                h.mask_weekdays(&away);
            }
        }
    }
    let unmetered = appliances.split_off(metered);
    // One warning per appliance: a rated draw's (it names the rescaled
    // power), else the template's supply.
    let warnings: Vec<String> = appliances
        .iter()
        .chain(&unmetered)
        .flat_map(|a| {
            rated_voltage_warnings(a).or_else(|| {
                let w = supply_warnings.iter().find(|(id, _)| *id == a.id);
                w.map(|(_, w)| w.clone())
            })
        })
        .collect();
    Ok((appliances, unmetered, warnings))
}

/// `[pv]` and `[battery]`, appended to the appliances; a production channel
/// needs a PV to measure.
fn decode_generation(
    ctx: &Reader,
    top: &TableReader,
    home: &Home,
    meter: &Meter,
    appliances: &mut Vec<Appliance>,
    warnings: &mut Vec<String>,
) -> Result<(), Error> {
    if let Some(n) = top.opt("pv") {
        let (pv, w) = super::generation::decode_pv(ctx, n, home)?;
        warnings.extend(w);
        appliances.push(pv);
    }
    if meter.production && !top.has("pv") {
        let m = top.opt("meter").expect("production is a [meter] key");
        let n = ctx.table(m, "meter")?.opt("production").unwrap_or(m);
        return Err(ctx.err(
            n,
            "meter.production",
            "a production channel measures the PV's output, but the home has no [pv]",
            "add a [pv] section, or leave production out",
        ));
    }
    if let Some(n) = top.opt("battery") {
        appliances.push(super::generation::decode_battery(ctx, n, home)?);
    }
    Ok(())
}

/// The PV's and the battery's ids (the appliances from `metered` on) must
/// differ from every other load's.
fn check_generation_ids(
    ctx: &Reader,
    top: &TableReader,
    appliances: &[Appliance],
    unmetered: &[Appliance],
    metered: usize,
) -> Result<(), Error> {
    for (k, a) in appliances.iter().enumerate().skip(metered) {
        let key = if a.role == Role::Generator {
            "pv"
        } else {
            "battery"
        };
        if appliances[..k]
            .iter()
            .chain(unmetered)
            .any(|b| b.id == a.id)
        {
            let n = top.opt(key).expect("decoded above");
            return Err(ctx.err(
                n,
                key,
                format!("id \"{}\" is already used by another load", a.id),
                format!("give the {key} an id of its own: id = \"{key}2\""),
            ));
        }
    }
    Ok(())
}

/// The weather, the building and the cited references of a home.
type Thermal = (
    Option<crate::weather::WeatherSpec>,
    Option<super::model::Building>,
    Vec<Reference>,
);

/// `[weather]`, `[building]` (its sunlight from the weather) and
/// `[[reference]]`, with the thermostats checked against the first two.
fn decode_thermal(
    ctx: &Reader,
    root: &Node,
    top: &TableReader,
    home: &Home,
    run: &Run,
    appliances: &[Appliance],
    unmetered: &[Appliance],
) -> Result<Thermal, Error> {
    let weather = top
        .opt("weather")
        .map(|n| super::thermal::decode_weather(ctx, n, run))
        .transpose()?;
    let building = top
        .opt("building")
        .map(|n| {
            let sunlit = super::thermal::sunlit(home, weather.as_ref());
            super::thermal::decode_building(ctx, n, sunlit)
        })
        .transpose()?;
    check_thermostats(
        ctx,
        root,
        appliances,
        unmetered,
        weather.is_some(),
        building.is_some(),
    )?;
    let references = match top.opt("reference") {
        Some(n) => super::thermal::decode_references(ctx, n, appliances, unmetered)?,
        None => vec![],
    };
    Ok((weather, building, references))
}

/// Keys of an appliance that replace a template's powers: with any of them
/// written, the scenario has made the powers its own.
const OWN_POWERS: [&str; 4] = ["states", "phases", "extra", "power_scale"];

/// The warning for a template written for another supply whose powers a
/// scenario uses as they are (a 120 V refrigerator's in a 230 V home).
fn supply_warning(id: &str, template: &str, about: &library::About, home: &Home) -> String {
    format!(
        "{id}: template \"{template}\" is written for a {} supply (line to neutral) and this home's is {:.0} V: its powers are taken as written (draws with `rated` are rescaled); use a template for this supply (`loadloom templates` lists each with its voltage), or write the powers (or `power_scale`) for this home",
        about.voltage_text(),
        home.voltage_v
    )
}

/// A warning (one per appliance, for its first such draw) when a draw of a
/// template has a rated voltage more than [`RATED_MISMATCH`] from its
/// connection's: its power was rescaled
/// by the ZIP model, perhaps without the writer meaning it (a 4.5 kW, 240 V
/// element on 400 V draws 12.5 kW).
fn rated_voltage_warnings(a: &Appliance) -> Option<String> {
    let template = a.template.as_ref()?;
    for st in &a.states {
        for d in &st.draws {
            let Some(rated) = d.rated_v else { continue };
            let u = d.nominal_v / rated;
            if (u - 1.0).abs() <= RATED_MISMATCH {
                continue;
            }
            let at_rated = d.p_w / d.zip_p.factor(u);
            return Some(format!(
                "{}: template \"{template}\" is rated at {rated:.0} V but its {} draw in state \"{}\" is connected at {:.0} V: its {:.0} W becomes {:.0} W; use a template for this supply (`loadloom templates` lists each with its voltage) or write `power` and `rated` for this connection",
                a.id,
                d.wiring.name(),
                st.name,
                d.nominal_v,
                at_rated,
                d.p_w
            ));
        }
    }
    None
}

/// Thermostatic appliances need the weather and the building, and a home
/// has at most one heat pump (one outdoor unit per thermostat).
fn check_thermostats(
    ctx: &Reader,
    root: &Node,
    apps: &[Appliance],
    unmetered: &[Appliance],
    weather: bool,
    building: bool,
) -> Result<(), Error> {
    let thermo: Vec<&Appliance> = apps
        .iter()
        .chain(unmetered)
        .filter(|a| matches!(a.behaviour, Behaviour::Thermostat { .. }))
        .collect();
    let Some(first) = thermo.first() else {
        return Ok(());
    };
    if !weather || !building {
        let missing = if weather { "[building]" } else { "[weather]" };
        return Err(ctx.err(
            root,
            "",
            format!("appliance {} is thermostatic, but the home has no {missing} section", first.id),
            "add [weather] (e.g. climate = \"lakeshore\") and [building] (e.g. ua = \"250 W/K\", mass = \"30 MJ/K\")",
        ));
    }
    let pumps = thermo
        .iter()
        .filter(|a| {
            matches!(
                a.behaviour,
                Behaviour::Thermostat {
                    role: super::model::Equipment::HeatPump(_)
                }
            )
        })
        .count();
    if pumps > 1 {
        return Err(ctx.err(
            root,
            "",
            format!("{pumps} thermostatic heat pumps; one thermostat drives one outdoor unit"),
            "keep one heat-pump appliance (its power is the whole unit's)",
        ));
    }
    Ok(())
}

/// Decodes the `[[key]]` list into `out`; ids must be unique across all of `out`.
fn decode_list(
    ctx: &Reader,
    list_node: &Node,
    key: &str,
    home: &Home,
    templates: &[(String, usize, Node)],
    out: &mut Vec<Appliance>,
    warnings: &mut Vec<(String, String)>,
) -> Result<(), Error> {
    let list = ctx.array(list_node, key)?;
    for (i, node) in list.iter().enumerate() {
        let path = format!("{key}[{i}]");
        let merged;
        let mut node = node;
        let mut template = None;
        let mut warn_supply = None;
        if let Val::Table(fields) = &node.v {
            if let Some(t) = fields.iter().find(|e| e.key == "template") {
                if let Val::Str(tname) = &t.node.v {
                    let (_, _, tnode) = templates
                        .iter()
                        .find(|(n, _, _)| n == tname)
                        .expect("templates collected");
                    let tt = ctx.table(tnode, tname)?;
                    let inner = tt.req("appliance", "the template's [appliance] section")?;
                    let about = tt
                        .opt("template")
                        .map(|n| library::decode_about(ctx, n, tname))
                        .transpose()?;
                    tt.finish()?;
                    if let Some(about) = about.filter(|a| a.mismatched(home.voltage_v)) {
                        if !fields.iter().any(|e| OWN_POWERS.contains(&e.key.as_str())) {
                            warn_supply = Some((tname.clone(), about));
                        }
                    }
                    merged = merge(inner, node);
                    node = &merged;
                    template = Some(tname.clone());
                }
            }
        }
        let app = decode_appliance(ctx, node, &path, home, template)?;
        if let Some((tname, about)) = warn_supply {
            warnings.push((
                app.id.clone(),
                supply_warning(&app.id, &tname, &about, home),
            ));
        }
        if let Some(prev) = out.iter().position(|a| a.id == app.id) {
            let id_node = ctx.table(node, &path)?.opt("id").unwrap_or(node);
            return Err(ctx.err(
                id_node,
                &format!("{path}.id"),
                format!("id \"{}\" is already used by load {prev}", app.id),
                "give every appliance and unmetered load its own id",
            ));
        }
        out.push(app);
    }
    Ok(())
}

fn decode_home(ctx: &Reader, node: &Node) -> Result<Home, Error> {
    let t = ctx.table(node, "home")?;
    let label = t.string("label")?.unwrap_or("").to_string();
    let supply_node = t.req("supply", "split-phase, three-phase or single-phase")?;
    let supply = decode_supply(ctx, supply_node)?;
    let voltage_v = match t.opt("voltage") {
        Some(n) => in_range(
            ctx,
            n,
            "home.voltage",
            QuantityKind::Voltage,
            LINE_TO_NEUTRAL_V,
        )?,
        None => match supply {
            SupplyKind::SplitPhase => 120.0,
            _ => 230.0,
        },
    };
    let frequency_hz = decode_frequency(ctx, &t, voltage_v)?;
    let service_a = match t.opt("service") {
        Some(n) => in_range(ctx, n, "home.service", QuantityKind::Current, SERVICE_A)?,
        None => 100.0,
    };
    let timezone = decode_timezone(ctx, &t)?;
    let source = decode_source(ctx, t.opt("source"), supply, frequency_hz)?;
    let away = t.opt("away").map(|n| decode_away(ctx, n)).transpose()?;
    let (site, sky) = decode_site(ctx, &t)?;
    let source_node = t.opt("source");
    t.finish()?;
    let place = |n: &Node| {
        let at = ctx.err(n, "", "", "");
        format!("{}:{}:{}", at.file.display(), at.line, at.column)
    };
    let supply_at = place(supply_node);
    let source_at = source_node.map_or_else(|| supply_at.clone(), place);
    Ok(Home {
        label,
        supply,
        voltage_v,
        frequency_hz,
        service_a,
        timezone,
        source,
        away,
        site,
        sky,
        supply_at,
        source_at,
    })
}

/// `home.supply`: one of the three supply names.
fn decode_supply(ctx: &Reader, n: &Node) -> Result<SupplyKind, Error> {
    match ctx.string(n, "home.supply")? {
        "split-phase" => Ok(SupplyKind::SplitPhase),
        "three-phase" => Ok(SupplyKind::ThreePhase),
        "single-phase" => Ok(SupplyKind::SinglePhase),
        other => Err(ctx.err(
            n,
            "home.supply",
            format!("unknown supply \"{other}\""),
            "write \"split-phase\", \"three-phase\" or \"single-phase\"",
        )),
    }
}

/// `home.frequency`: 50 or 60 Hz; when not written, the one that goes with
/// the voltage.
fn decode_frequency(ctx: &Reader, t: &TableReader, voltage_v: f64) -> Result<f64, Error> {
    match t.opt("frequency") {
        Some(n) => {
            let f = ctx.positive(n, "home.frequency", QuantityKind::Frequency)?;
            if f != 50.0 && f != 60.0 {
                return Err(ctx.err(
                    n,
                    "home.frequency",
                    format!("{f} Hz is not a mains frequency"),
                    "write \"50 Hz\" or \"60 Hz\"",
                ));
            }
            Ok(f)
        }
        // 120 V and 277 V systems are North American (60 Hz); 230 V ones 50 Hz.
        None if voltage_v < 200.0 || (voltage_v - 277.0).abs() < 1.0 => Ok(60.0),
        None => Ok(50.0),
    }
}

/// `home.timezone`: an IANA time zone name that jiff knows.
fn decode_timezone(ctx: &Reader, t: &TableReader) -> Result<String, Error> {
    let tz_node = t.req(
        "timezone",
        "an IANA time zone such as \"America/Chicago\" or \"Europe/Berlin\"",
    )?;
    let timezone = ctx.string(tz_node, "home.timezone")?.to_string();
    if jiff::tz::TimeZone::get(&timezone).is_err() {
        return Err(ctx.err(
            tz_node,
            "home.timezone",
            format!("unknown time zone \"{timezone}\""),
            "write an IANA time zone name such as \"America/Chicago\" or \"Europe/Berlin\"",
        ));
    }
    Ok(timezone)
}

/// `home.source`: the supply's variation, normal band and impedance, each
/// defaulting by the mains frequency when not written.
fn decode_source(
    ctx: &Reader,
    node: Option<&Node>,
    supply: SupplyKind,
    frequency_hz: f64,
) -> Result<Source, Error> {
    // Normal band: ANSI C84.1 Range A is ±5 % around 120 V (114–126 V); IEC 60038
    // allows ±10 % around 230 V (both from memory).
    let band_default = if frequency_hz == 60.0 { 0.05 } else { 0.10 };
    // Source impedance defaults: for 230 V the IEC 60725 reference impedance
    // (0.24 + j0.15 Ω phase, 0.16 + j0.10 Ω neutral, from memory); for 60 Hz
    // services a stiffer illustrative 0.05 + j0.03 Ω (common practice, no source).
    let (lr, lx, nr, nx) = if frequency_hz == 50.0 {
        (0.24, 0.15, 0.16, 0.10)
    } else {
        (0.05, 0.03, 0.05, 0.03)
    };
    let Some(n) = node else {
        return Ok(Source {
            variation: 0.01,
            variation_time_s: 1800.0,
            band: band_default,
            line_r_ohm: lr,
            line_x_ohm: lx,
            neutral_r_ohm: nr,
            neutral_x_ohm: nx,
            unbalance: 0.0,
        });
    };
    let s = ctx.table(n, "home.source")?;
    let src = Source {
        variation: s
            .non_negative("variation", QuantityKind::Fraction)?
            .unwrap_or(0.01),
        variation_time_s: s
            .positive("period", QuantityKind::Duration)?
            .unwrap_or(1800.0),
        band: s
            .non_negative("band", QuantityKind::Fraction)?
            .unwrap_or(band_default),
        line_r_ohm: s.non_negative("r", QuantityKind::Impedance)?.unwrap_or(lr),
        line_x_ohm: s.non_negative("x", QuantityKind::Impedance)?.unwrap_or(lx),
        neutral_r_ohm: s
            .non_negative("neutral_r", QuantityKind::Impedance)?
            .unwrap_or(nr),
        neutral_x_ohm: s
            .non_negative("neutral_x", QuantityKind::Impedance)?
            .unwrap_or(nx),
        unbalance: decode_unbalance(ctx, &s, supply)?,
    };
    s.finish()?;
    Ok(src)
}

/// `home.away`: the hours nobody is home, as a mask of the day's 24 hours;
/// at least one hour must be left.
fn decode_away(ctx: &Reader, n: &Node) -> Result<[bool; 24], Error> {
    let w = parse_hours(ctx, n, "home.away")?;
    let mut a = [false; 24];
    for h in 0..24 {
        a[h] = w[h] > 0.0;
    }
    if a.iter().all(|x| *x) {
        return Err(ctx.err(
            n,
            "home.away",
            "away all day leaves no hour to start anything",
            "write the hours nobody is home, e.g. away = \"8-17\"",
        ));
    }
    Ok(a)
}

/// `source.unbalance`: the negative- over positive-sequence voltage of a
/// three-phase source, at most 10 % (EN 50160 sets 2 % for 95 % of a
/// week's 10-minute values, from memory; 10 % is far beyond any supply).
fn decode_unbalance(ctx: &Reader, s: &TableReader, supply: SupplyKind) -> Result<f64, Error> {
    let Some(n) = s.opt("unbalance") else {
        return Ok(0.0);
    };
    let u = ctx.non_negative(n, &s.path_of("unbalance"), QuantityKind::Fraction)?;
    if supply != SupplyKind::ThreePhase && u > 0.0 {
        return Err(ctx.err(
            n,
            &s.path_of("unbalance"),
            format!(
                "a {} supply has no negative-sequence voltage",
                supply.name()
            ),
            "leave `unbalance` out, or make the supply \"three-phase\"",
        ));
    }
    if u > 0.1 {
        return Err(ctx.err(
            n,
            &s.path_of("unbalance"),
            format!("an unbalance of {:.1} % is beyond any supply", u * 100.0),
            "write at most \"10 %\" (power-quality limits are about 2 %)",
        ));
    }
    Ok(u)
}

/// A day's mean clear-sky index when `sky` is not written (illustrative: a
/// mix of clear and cloudy days).
pub const DEFAULT_SKY: f64 = 0.65;

/// `latitude`, `longitude` (degrees, north and east positive; both or
/// neither) and `sky` (a day's mean clear-sky index, or "clear").
fn decode_site(
    ctx: &Reader,
    t: &TableReader,
) -> Result<(Option<crate::sun::Site>, Option<f64>), Error> {
    let degrees = |key: &'static str, limit: f64| -> Result<Option<f64>, Error> {
        let Some(n) = t.opt(key) else { return Ok(None) };
        let v = ctx.number(n, &t.path_of(key))?;
        if v.abs() > limit {
            return Err(ctx.err(
                n,
                &t.path_of(key),
                format!("{v}° is beyond ±{limit}°"),
                format!(
                    "write the {key} in degrees from −{limit} to {limit} (north and east positive)"
                ),
            ));
        }
        Ok(Some(v))
    };
    let site = match (degrees("latitude", 90.0)?, degrees("longitude", 180.0)?) {
        (Some(latitude_deg), Some(longitude_deg)) => Some(crate::sun::Site {
            latitude_deg,
            longitude_deg,
        }),
        (None, None) => None,
        _ => {
            let n = t
                .opt("latitude")
                .or(t.opt("longitude"))
                .expect("one is written");
            return Err(ctx.err(
                n,
                "home",
                "a site needs both its latitude and its longitude",
                "write both, e.g. latitude = 44.65 and longitude = -63.57",
            ));
        }
    };
    let sky = match t.opt("sky") {
        None => Some(DEFAULT_SKY),
        Some(n) if matches!(n.v, Val::Str(_)) => {
            if ctx.string(n, "home.sky")? != "clear" {
                return Err(ctx.err(
                    n,
                    "home.sky",
                    "unknown sky",
                    "write \"clear\" or a day's mean clear-sky index such as 0.6",
                ));
            }
            None
        }
        Some(n) => {
            let v = ctx.number(n, "home.sky")?;
            if !(0.05..=0.95).contains(&v) {
                return Err(ctx.err(n, "home.sky", format!("a mean clear-sky index of {v} is outside 0.05 … 0.95"), "write a number from 0.05 (overcast) to 0.95 (nearly always clear), or \"clear\""));
            }
            Some(v)
        }
    };
    Ok((site, sky))
}

/// Whether a date-time's time part carries a UTC offset or `Z`.
pub(super) fn has_offset(text: &str) -> bool {
    let time = text.split_once(['T', 't', ' ']).map_or("", |(_, t)| t);
    time.contains(['+', '-', 'Z', 'z'])
}

/// `start` is a local time in the home's zone, whose rules give its UTC
/// offset: a written offset (`+05:00`) or `Z` would either repeat those rules
/// or contradict them, so both are refused alike.
fn refuse_offset(ctx: &Reader, n: &Node, start: &str, zone: &str) -> Result<(), Error> {
    if !has_offset(start) {
        return Ok(());
    }
    Err(ctx.err(
        n,
        "run.start",
        format!("\"{start}\" carries a UTC offset; `start` is the local time in the home's time zone ({zone}), whose rules give the offset"),
        "write the local time without an offset or Z, e.g. \"2027-01-04T00:00\"",
    ))
}

/// The local start placed in the home's zone; a time that the zone skips
/// (a daylight-saving gap) or shows twice (the hour repeated in autumn) is
/// refused, since the run would otherwise start at a time not asked for.
fn place_start(
    ctx: &Reader,
    n: &Node,
    civil: jiff::civil::DateTime,
    zone: &str,
) -> Result<jiff::Zoned, Error> {
    let tz = jiff::tz::TimeZone::get(zone).expect("checked in home");
    let amb = tz.to_ambiguous_zoned(civil);
    let why = match amb.offset() {
        jiff::tz::AmbiguousOffset::Unambiguous { .. } => None,
        jiff::tz::AmbiguousOffset::Gap { .. } => {
            Some("does not exist there: the clocks skip it (a daylight-saving gap)")
        }
        jiff::tz::AmbiguousOffset::Fold { .. } => {
            Some("happens twice there: the clocks repeat it (the end of daylight saving)")
        }
    };
    match why {
        None => amb.unambiguous().map_err(|e| {
            ctx.err(
                n,
                "run.start",
                format!("cannot place {civil} in {zone}: {e}"),
                "choose another start time",
            )
        }),
        Some(why) => Err(ctx.err(
            n,
            "run.start",
            format!("the local time {civil} in {zone} {why}"),
            "start an hour earlier or later, or at midnight",
        )),
    }
}

fn decode_run(ctx: &Reader, node: &Node, home: &Home) -> Result<Run, Error> {
    let t = ctx.table(node, "run")?;
    let start_node = t.req("start", "the local start time, e.g. \"2027-01-04T00:00\"")?;
    let start_local = match &start_node.v {
        Val::Str(s) | Val::Date(s) => s.clone(),
        _ => {
            return Err(ctx.err(
                start_node,
                "run.start",
                "expected a local date-time",
                "write \"2027-01-04T00:00\"",
            ))
        }
    };
    refuse_offset(ctx, start_node, &start_local, &home.timezone)?;
    let civil: jiff::civil::DateTime = start_local.parse().map_err(|e| {
        ctx.err(
            start_node,
            "run.start",
            format!("\"{start_local}\" is not a local date-time ({e})"),
            "write \"YYYY-MM-DDTHH:MM\", in the home's time zone, without an offset",
        )
    })?;
    let zoned = place_start(ctx, start_node, civil, &home.timezone)?;
    let start_utc_ms = zoned.timestamp().as_millisecond();
    let step_s = t.positive("step", QuantityKind::Duration)?.unwrap_or(1.0);
    let step_node = t.opt("step").unwrap_or(node);
    if (step_s * 1000.0).fract().abs() > 1e-9 || !(STEP_S.0..=STEP_S.1).contains(&step_s) {
        return Err(ctx.err(
            step_node,
            "run.step",
            format!("step {step_s} s is not a whole number of milliseconds from 100 ms to 1 min"),
            "write \"1 s\" (the usual) or another step from \"100 ms\" to \"1 min\"",
        ));
    }
    let length_node = t.req("length", "how long to simulate, e.g. \"7 d\"")?;
    let length_s = ctx.positive(length_node, "run.length", QuantityKind::Duration)?;
    if ((length_s / step_s).round() - length_s / step_s).abs() > 1e-6 {
        return Err(ctx.err(
            length_node,
            "run.length",
            "the length is not a whole number of steps",
            format!("make it a multiple of the step ({step_s} s)"),
        ));
    }
    let seed = t
        .opt("seed")
        .map(|n| ctx.whole(n, "run.seed"))
        .transpose()?
        .unwrap_or(1);
    t.finish()?;
    Ok(Run {
        start_local,
        start_utc_ms,
        length_s,
        step_s,
        seed,
    })
}

fn decode_meter(ctx: &Reader, node: &Node, run: &Run) -> Result<Meter, Error> {
    let t = ctx.table(node, "meter")?;
    let interval_s = t
        .positive("interval", QuantityKind::Duration)?
        .unwrap_or(run.step_s);
    let inode = t.opt("interval").unwrap_or(node);
    let k = interval_s / run.step_s;
    if k < 1.0 - 1e-9 || (k.round() - k).abs() > 1e-9 || interval_s > 3600.0 {
        return Err(ctx.err(inode, "meter.interval", format!("reporting interval {interval_s} s must be a whole number of steps ({} s), at most 1 h", run.step_s), "write \"1 s\", \"10 s\", \"1 min\", \"15 min\" or \"1 h\""));
    }
    if ((run.length_s / interval_s).round() - run.length_s / interval_s).abs() > 1e-6 {
        return Err(ctx.err(
            inode,
            "meter.interval",
            "the run length is not a whole number of reporting intervals",
            "choose an interval that divides the run length",
        ));
    }
    let (mut rel, mut floor) = (0.0, 0.0);
    if let Some(n) = t.opt("noise") {
        let nt = ctx.table(n, "meter.noise")?;
        rel = nt
            .non_negative("relative", QuantityKind::Fraction)?
            .unwrap_or(0.0);
        floor = nt
            .non_negative("floor", QuantityKind::Power)?
            .unwrap_or(0.0);
        nt.finish()?;
    }
    let resolution_w = t
        .non_negative("resolution", QuantityKind::Power)?
        .unwrap_or(0.0);
    let total_only =
        match t.opt("channels") {
            None => false,
            Some(n) => match ctx.string(n, "meter.channels")? {
                "per-line" => false,
                "total" => true,
                other => return Err(ctx.err(
                    n,
                    "meter.channels",
                    format!("unknown channels \"{other}\""),
                    "write \"per-line\" (a reading per line) or \"total\" (only the home's total)",
                )),
            },
        };
    let production = match t.opt("production") {
        None => false,
        Some(n) => match n.v {
            Val::Bool(b) => b,
            _ => {
                return Err(ctx.err(
                    n,
                    "meter.production",
                    format!("expected true or false, found {}", n.type_name()),
                    "write production = true for a channel on the PV's output",
                ))
            }
        },
    };
    t.finish()?;
    Ok(Meter {
        interval_s,
        noise_relative: rel,
        noise_floor_w: floor,
        resolution_w,
        total_only,
        production,
    })
}

/// Waveform sample rate when the scenario names none, Hz.
pub const DEFAULT_WAVE_RATE_HZ: f64 = 12_800.0;

/// Checks a waveform rate: whole samples per step, at least 20 per cycle.
/// The error is the reason alone (a `String` on purpose): the scenario's
/// key or the command's option is placed by the caller.
pub fn check_wave_rate(rate: f64, run: &Run, home: &Home) -> Result<(), String> {
    let per_step = rate * run.step_s;
    if (per_step.round() - per_step).abs() > 1e-6 || rate < 20.0 * home.frequency_hz || rate > 1e6 {
        return Err(format!("{rate} Hz is not a usable waveform rate here: it needs a whole number of samples per {} s step and at least 20 per cycle, at most 1 MHz", run.step_s));
    }
    Ok(())
}

/// Places a waveform window (local start, length) in the run; the error,
/// the reason alone, is placed by the caller (as for [`check_wave_rate`]).
pub fn place_window(
    start_local: &str,
    length_s: f64,
    run: &Run,
    home: &Home,
) -> Result<WaveWindow, String> {
    if has_offset(start_local) {
        return Err(format!("\"{start_local}\" carries a UTC offset; a window starts at a local time in the home's time zone ({}), without an offset or Z", home.timezone));
    }
    let civil: jiff::civil::DateTime = start_local
        .parse()
        .map_err(|e| format!("\"{start_local}\" is not a local date-time ({e})"))?;
    let tz = jiff::tz::TimeZone::get(&home.timezone).map_err(|e| e.to_string())?;
    let ms = civil
        .to_zoned(tz)
        .map_err(|e| e.to_string())?
        .timestamp()
        .as_millisecond();
    let offset_s = (ms - run.start_utc_ms) as f64 / 1000.0;
    if offset_s < 0.0 || offset_s + length_s > run.length_s + 1e-9 {
        return Err(format!(
            "the window {start_local} + {length_s} s lies outside the run ({} for {} s)",
            run.start_local, run.length_s
        ));
    }
    if ((offset_s / run.step_s).round() - offset_s / run.step_s).abs() > 1e-9
        || ((length_s / run.step_s).round() - length_s / run.step_s).abs() > 1e-9
    {
        return Err(format!(
            "the window must start and end on whole steps ({} s)",
            run.step_s
        ));
    }
    if length_s <= 0.0 || length_s > 3600.0 {
        return Err("a window is longer than zero and at most 1 h".into());
    }
    Ok(WaveWindow {
        start_local: start_local.to_string(),
        offset_s,
        length_s,
    })
}

fn decode_waveforms(ctx: &Reader, node: &Node, home: &Home, run: &Run) -> Result<Waveforms, Error> {
    let t = ctx.table(node, "waveform")?;
    let rate_hz = t
        .positive("rate", QuantityKind::Frequency)?
        .unwrap_or(DEFAULT_WAVE_RATE_HZ);
    check_wave_rate(rate_hz, run, home).map_err(|m| {
        ctx.err(
            t.opt("rate").unwrap_or(node),
            "waveform.rate",
            m,
            "write e.g. rate = \"12.8 kHz\"",
        )
    })?;
    let mut windows = Vec::new();
    if let Some(list) = t.opt("windows") {
        for (i, n) in ctx.array(list, "waveform.windows")?.iter().enumerate() {
            let path = format!("waveform.windows[{i}]");
            let w = ctx.table(n, &path)?;
            let sn = w.req("start", "the local start time, e.g. \"2027-01-04T18:00\"")?;
            let start = match &sn.v {
                Val::Str(s) | Val::Date(s) => s.clone(),
                _ => {
                    return Err(ctx.err(
                        sn,
                        &w.path_of("start"),
                        "expected a local date-time",
                        "write \"2027-01-04T18:00\"",
                    ))
                }
            };
            let length = ctx.positive(
                w.req("length", "how long, e.g. \"10 s\"")?,
                &w.path_of("length"),
                QuantityKind::Duration,
            )?;
            w.finish()?;
            windows.push(
                place_window(&start, length, run, home)
                    .map_err(|m| ctx.err(n, &path, m, "choose a window inside the run"))?,
            );
        }
    }
    t.finish()?;
    Ok(Waveforms { rate_hz, windows })
}

fn decode_harmonics(ctx: &Reader, t: &TableReader, load: LoadKind) -> Result<Vec<Harmonic>, Error> {
    let Some(n) = t.opt("harmonics") else {
        return Ok(load.default_harmonics());
    };
    let path = t.path_of("harmonics");
    let help = "write a preset (\"resistive\", \"motor\", \"rectifier\", \"led\") or a list [ { order = 3, magnitude = \"80 %\", phase = \"180 deg\" }, … ]";
    match &n.v {
        Val::Str(s) => match s.as_str() {
            "resistive" | "none" => Ok(vec![]),
            "motor" => Ok(LoadKind::Motor.default_harmonics()),
            "rectifier" | "electronic" => Ok(LoadKind::Electronic.default_harmonics()),
            "led" | "lighting" => Ok(LoadKind::Lighting.default_harmonics()),
            other => Err(ctx.err(
                n,
                &path,
                format!("unknown harmonic preset \"{other}\""),
                help,
            )),
        },
        Val::Arr(list) => {
            let mut out = Vec::new();
            for (i, h) in list.iter().enumerate() {
                let ht = ctx.table(h, &format!("{path}[{i}]"))?;
                let on = ht.req("order", "an odd order, 3 … 49")?;
                let order = match on.v {
                    Val::Int(o) if (3..=49).contains(&o) && o % 2 == 1 => o as u32,
                    _ => {
                        return Err(ctx.err(
                            on,
                            &ht.path_of("order"),
                            "the order must be an odd whole number from 3 to 49",
                            help,
                        ))
                    }
                };
                let mn = ht.req("magnitude", "relative to the fundamental, e.g. \"80 %\"")?;
                let magnitude =
                    ctx.non_negative(mn, &ht.path_of("magnitude"), QuantityKind::Fraction)?;
                if magnitude > 2.0 {
                    return Err(ctx.err(
                        mn,
                        &ht.path_of("magnitude"),
                        "a harmonic above 200 % of the fundamental",
                        help,
                    ));
                }
                let phase_deg = ht.quantity("phase", QuantityKind::Angle)?.unwrap_or(0.0);
                ht.finish()?;
                out.push(Harmonic {
                    order,
                    magnitude,
                    phase_deg,
                });
            }
            Ok(out)
        }
        _ => Err(ctx.err(
            n,
            &path,
            format!("expected a preset or a list, found {}", n.type_name()),
            help,
        )),
    }
}

/// A line of the supply, `L1` … `L3`, as an index.
fn parse_line(ctx: &Reader, node: &Node, path: &str, supply: SupplyKind) -> Result<usize, Error> {
    let text = ctx.string(node, path)?;
    let lines: Vec<String> = (0..supply.lines()).map(line_label).collect();
    lines.iter().position(|l| l == text).ok_or_else(|| {
        ctx.err(
            node,
            path,
            format!("\"{text}\" is not a line of this {} supply", supply.name()),
            format!("write one of {}", lines.join(", ")),
        )
    })
}

/// `[metering]`: per channel `l1 = { conductor = "L1", orientation = "to-load" }`;
/// conductor "none" for a channel with no CT. Channels not written have
/// their own line's CT, facing the load.
fn decode_metering(ctx: &Reader, node: &Node, home: &Home) -> Result<Vec<MeterChannel>, Error> {
    let t = ctx.table(node, "metering")?;
    let n = home.supply.lines();
    let mut out: Vec<MeterChannel> = (0..n)
        .map(|x| MeterChannel {
            conductor: Some(x),
            reversed: false,
        })
        .collect();
    for (x, key) in ["l1", "l2", "l3"].into_iter().enumerate() {
        let Some(cn) = t.opt(key) else { continue };
        let path = format!("metering.{key}");
        if x >= n {
            return Err(ctx.err(
                cn,
                &path,
                format!("a {} supply has no channel {key}", home.supply.name()),
                format!("declare channels l1 … l{n} only"),
            ));
        }
        let c = ctx.table(cn, &path)?;
        if let Some(v) = c.opt("conductor") {
            out[x].conductor = if ctx.string(v, &c.path_of("conductor"))? == "none" {
                None
            } else {
                Some(parse_line(ctx, v, &c.path_of("conductor"), home.supply)?)
            };
        }
        if let Some(v) = c.opt("orientation") {
            out[x].reversed = match ctx.string(v, &c.path_of("orientation"))? {
                "to-load" => false,
                "to-source" => true,
                other => return Err(ctx.err(
                    v,
                    &c.path_of("orientation"),
                    format!("unknown orientation \"{other}\""),
                    "write \"to-load\" (the arrow on the CT points at the load) or \"to-source\"",
                )),
            };
        }
        c.finish()?;
    }
    t.finish()?;
    Ok(out)
}

fn decode_faults(ctx: &Reader, node: &Node, home: &Home, meter: &Meter) -> Result<Faults, Error> {
    let t = ctx.table(node, "faults")?;
    let supply = home.supply;
    let mut f = Faults::default();
    if let Some(list) = t.opt("ct") {
        for (i, n) in ctx.array(list, "faults.ct")?.iter().enumerate() {
            let ct = decode_ct_fault(ctx, n, &format!("faults.ct[{i}]"), supply, &f.ct)?;
            f.ct.push(ct);
        }
    }
    if let Some(n) = t.opt("swap") {
        f.swap = Some(decode_swap(ctx, n, supply)?);
    }
    if let Some(n) = t.opt("no_ct") {
        f.no_ct = Some(parse_line(ctx, n, "faults.no_ct", supply)?);
    }
    if let Some(n) = t.opt("dropouts") {
        f.dropouts = Some(decode_dropouts(ctx, n, meter)?);
    }
    if let Some(n) = t.opt("clock") {
        (f.clock_offset_s, f.clock_drift) = decode_clock(ctx, n)?;
    }
    if let Some(n) = t.opt("register") {
        f.register = decode_bool(ctx, n, "faults.register", "write register = true")?;
    }
    t.finish()?;
    Ok(f)
}

/// A boolean key; anything else is an error with `fix`.
fn decode_bool(ctx: &Reader, n: &Node, path: &str, fix: &str) -> Result<bool, Error> {
    match n.v {
        Val::Bool(b) => Ok(b),
        _ => Err(ctx.err(n, path, "expected true or false", fix)),
    }
}

/// One `[[faults.ct]]` entry; `earlier` are the entries before it (one per
/// channel).
fn decode_ct_fault(
    ctx: &Reader,
    n: &Node,
    path: &str,
    supply: SupplyKind,
    earlier: &[CtFault],
) -> Result<CtFault, Error> {
    let c = ctx.table(n, path)?;
    let line = parse_line(
        ctx,
        c.req("conductor", "the channel's line, e.g. \"L1\"")?,
        &c.path_of("conductor"),
        supply,
    )?;
    let (gain, phase_deg) = decode_ct_errors(ctx, &c)?;
    let reversed = match c.opt("reversed") {
        Some(n) => decode_bool(ctx, n, &c.path_of("reversed"), "write reversed = true")?,
        None => false,
    };
    let on = match c.opt("on") {
        Some(n) => {
            let x = parse_line(ctx, n, &c.path_of("on"), supply)?;
            if x == line {
                return Err(ctx.err(
                    n,
                    &c.path_of("on"),
                    "the CT is on its own conductor",
                    "name another line, or leave `on` out",
                ));
            }
            Some(x)
        }
        None => None,
    };
    c.finish()?;
    if earlier.iter().any(|x| x.line == line) {
        return Err(ctx.err(
            n,
            path,
            "this channel already has a CT fault",
            "give each channel one entry",
        ));
    }
    Ok(CtFault {
        line,
        gain,
        phase_deg,
        reversed,
        on,
    })
}

/// A CT's gain error (a fraction) and phase error (deg), each 0 when not
/// written.
fn decode_ct_errors(ctx: &Reader, c: &TableReader) -> Result<(f64, f64), Error> {
    let gain = c.quantity("gain", QuantityKind::Fraction)?.unwrap_or(0.0);
    if gain.abs() > 0.5 {
        return Err(ctx.err(
            c.opt("gain").unwrap(),
            &c.path_of("gain"),
            format!(
                "a gain error of {:.0} % is not a CT that works",
                gain * 100.0
            ),
            "write an error within ±50 %, e.g. gain = \"1.5 %\"",
        ));
    }
    let phase_deg = c.quantity("phase", QuantityKind::Angle)?.unwrap_or(0.0);
    if phase_deg.abs() > 30.0 {
        return Err(ctx.err(
            c.opt("phase").unwrap(),
            &c.path_of("phase"),
            format!("a phase error of {phase_deg} deg is outside ±30 deg"),
            "write e.g. phase = \"1.2 deg\"",
        ));
    }
    Ok((gain, phase_deg))
}

/// `faults.swap`: two different lines, lower first.
fn decode_swap(ctx: &Reader, n: &Node, supply: SupplyKind) -> Result<(usize, usize), Error> {
    let l = ctx.array(n, "faults.swap")?;
    if l.len() != 2 {
        return Err(ctx.err(
            n,
            "faults.swap",
            "a swap names two lines",
            "write swap = [\"L1\", \"L2\"]",
        ));
    }
    let (a, b) = (
        parse_line(ctx, &l[0], "faults.swap[0]", supply)?,
        parse_line(ctx, &l[1], "faults.swap[1]", supply)?,
    );
    if a == b {
        return Err(ctx.err(
            n,
            "faults.swap",
            "a line cannot be swapped with itself",
            "name two different lines",
        ));
    }
    Ok((a.min(b), a.max(b)))
}

/// `faults.dropouts`: a rate, a length (one meter interval unless written)
/// and whether lost rows are kept as nulls.
fn decode_dropouts(ctx: &Reader, n: &Node, meter: &Meter) -> Result<Dropouts, Error> {
    let d = ctx.table(n, "faults.dropouts")?;
    let rn = d.req("rate", "the share of intervals lost, e.g. \"1 %\"")?;
    let rate = ctx.quantity(rn, "faults.dropouts.rate", QuantityKind::Fraction)?;
    if !(0.0..=0.5).contains(&rate) {
        return Err(ctx.err(
            rn,
            "faults.dropouts.rate",
            format!("a dropout rate of {} % is outside 0 … 50 %", rate * 100.0),
            "write e.g. rate = \"1 %\"",
        ));
    }
    let length = match d.opt("length") {
        Some(n) => decode_dist(ctx, n, "faults.dropouts.length")?,
        None => Dist::Fixed {
            value_s: meter.interval_s,
        },
    };
    let mode = match d.string("as")? {
        None | Some("null") => DropMode::Null,
        Some("missing") => DropMode::Missing,
        Some(other) => {
            return Err(ctx.err(
                d.opt("as").unwrap(),
                "faults.dropouts.as",
                format!("unknown dropout form \"{other}\""),
                "write as = \"null\" (rows kept, values null) or \"missing\" (rows absent)",
            ))
        }
    };
    d.finish()?;
    Ok(Dropouts { rate, length, mode })
}

/// `faults.clock`: the meter clock's offset (s) and drift (a fraction).
fn decode_clock(ctx: &Reader, n: &Node) -> Result<(f64, f64), Error> {
    let c = ctx.table(n, "faults.clock")?;
    let offset_s = c.quantity("offset", QuantityKind::Duration)?.unwrap_or(0.0);
    let drift = c.quantity("drift", QuantityKind::Fraction)?.unwrap_or(0.0);
    if offset_s.abs() > 86400.0 || drift.abs() > 0.01 {
        return Err(ctx.err(
            n,
            "faults.clock",
            "a clock off by more than a day, or drifting by more than 1 %, is not a meter clock",
            "write e.g. clock = { offset = \"2.5 s\", drift = \"20 ppm\" }",
        ));
    }
    c.finish()?;
    Ok((offset_s, drift))
}

/// The home's line-to-neutral voltage, V.
pub const LINE_TO_NEUTRAL_V: (f64, f64) = (50.0, 1000.0);
/// The service rating, A.
pub const SERVICE_A: (f64, f64) = (1.0, 10_000.0);
/// The simulation step, s.
pub const STEP_S: (f64, f64) = (0.1, 60.0);
/// The largest lognormal spread (σ of ln): beyond it one draw in a few
/// spans more than the longest run.
pub const MAX_SPREAD: f64 = 5.0;
/// The range of a gamma shape k.
pub const MIN_SHAPE: f64 = 0.05;
/// See [`MIN_SHAPE`].
pub const MAX_SHAPE: f64 = 1000.0;
/// The lowest power factor a draw may have.
pub const MIN_PF: f64 = 0.05;

/// A quantity within `range` (inclusive, SI), or an error naming the range.
fn in_range(
    ctx: &Reader,
    n: &Node,
    path: &str,
    kind: QuantityKind,
    range: (f64, f64),
) -> Result<f64, Error> {
    let v = ctx.quantity(n, path, kind)?;
    if !(range.0..=range.1).contains(&v) {
        return Err(ctx.err(
            n,
            path,
            format!(
                "{v} {} is outside {} … {} {}",
                kind.si_unit(),
                range.0,
                range.1,
                kind.si_unit()
            ),
            format!("write {} within that range", kind.example()),
        ));
    }
    Ok(v)
}

struct DrawDefaults {
    wiring: Wiring,
    load: LoadKind,
}

fn decode_app_load(ctx: &Reader, t: &TableReader, default: LoadKind) -> Result<LoadKind, Error> {
    match t.opt("load") {
        None => Ok(default),
        Some(n) => {
            let s = ctx.string(n, &t.path_of("load"))?;
            LoadKind::ALL.iter().find(|(name, _)| *name == s).map(|x| x.1).ok_or_else(|| {
                ctx.err(n, &t.path_of("load"), format!("unknown load kind \"{s}\""), "write \"resistive\", \"motor\", \"electronic\" or \"lighting\" (or give zip = { z, i, p })")
            })
        }
    }
}

fn decode_zip(
    ctx: &Reader,
    t: &TableReader,
    key: &'static str,
    default: Zip,
) -> Result<Zip, Error> {
    let Some(n) = t.opt(key) else {
        return Ok(default);
    };
    let path = t.path_of(key);
    let zt = ctx.table(n, &path)?;
    let z = zt.number("z")?.unwrap_or(0.0);
    let i = zt.number("i")?.unwrap_or(0.0);
    let p = zt.number("p")?.unwrap_or(0.0);
    zt.finish()?;
    if (z + i + p - 1.0).abs() > 1e-6 {
        return Err(ctx.err(
            n,
            &path,
            format!("ZIP fractions sum to {}, not 1", z + i + p),
            "make z + i + p = 1 (for example { z = 0.5, i = 0.2, p = 0.3 })",
        ));
    }
    Ok(Zip { z, i, p })
}

/// Reads the keys of one draw (power, pf or q, wiring, load, zip, rated) from `t`.
fn decode_draw_fields(
    ctx: &Reader,
    t: &TableReader,
    home: &Home,
    defaults: &DrawDefaults,
) -> Result<Draw, Error> {
    let wiring = match t.opt("wiring") {
        Some(n) => parse_wiring(ctx, n, &t.path_of("wiring"), home.supply)?,
        None => defaults.wiring,
    };
    let load = decode_app_load(ctx, t, defaults.load)?;
    let zip_p = decode_zip(ctx, t, "zip", load.default_zip_p())?;
    let zip_q = decode_zip(
        ctx,
        t,
        "zip_q",
        if t.has("zip") {
            zip_p
        } else {
            load.default_zip_q()
        },
    )?;
    let pnode = t.req("power", "the real power, e.g. \"1.5 kW\"")?;
    let mut p_w = ctx.non_negative(pnode, &t.path_of("power"), QuantityKind::Power)?;
    let mut q_var = match (t.opt("pf"), t.opt("q")) {
        (Some(n), Some(_)) => {
            return Err(ctx.err(
                n,
                &t.path_of("pf"),
                "both pf and q are given",
                "give either pf (0 < pf ≤ 1, lagging) or q (reactive power with its sign)",
            ))
        }
        (Some(n), None) => {
            let pf = ctx.number(n, &t.path_of("pf"))?;
            if !(MIN_PF..=1.0).contains(&pf) {
                return Err(ctx.err(n, &t.path_of("pf"), format!("power factor {pf} is outside {MIN_PF} … 1"), "write a power factor such as 0.85 (lagging); for a leading load give q with a negative sign"));
            }
            p_w * (1.0 - pf * pf).sqrt() / pf
        }
        (None, Some(n)) => ctx.quantity(n, &t.path_of("q"), QuantityKind::Reactive)?,
        (None, None) => 0.0,
    };
    let nominal_v = wiring.nominal_v(home.supply, home.voltage_v);
    let harmonics = decode_harmonics(ctx, t, load)?;
    // A draw rated at another voltage (a 240 V water heater on a 208 V
    // apartment's two lines) gives its power at that voltage; at this
    // connection's nominal voltage it draws what its ZIP model says.
    let mut rated_v = None;
    if let Some(n) = t.opt("rated") {
        let rated = in_range(ctx, n, &t.path_of("rated"), QuantityKind::Voltage, RATED_V)?;
        let u = nominal_v / rated;
        p_w *= zip_p.factor(u);
        q_var *= zip_q.factor(u);
        rated_v = Some(rated);
    }
    Ok(Draw {
        wiring,
        p_w,
        q_var,
        load,
        zip_p,
        zip_q,
        nominal_v,
        rated_v,
        harmonics,
    })
}

/// Reads a state's draws: either a `draws` array or the draw keys on the state itself.
fn decode_draws(
    ctx: &Reader,
    t: &TableReader,
    home: &Home,
    defaults: &DrawDefaults,
) -> Result<Vec<Draw>, Error> {
    if let Some(n) = t.opt("draws") {
        for k in [
            "power",
            "pf",
            "q",
            "wiring",
            "zip",
            "zip_q",
            "rated",
            "load",
            "harmonics",
        ] {
            if t.has(k) {
                let e = t.entries().iter().find(|e| e.key == k).unwrap();
                return Err(Error::at(
                    ctx.sources,
                    &e.key_src,
                    &t.path_of(k),
                    format!("`{k}` given beside `draws`"),
                    "put it inside each entry of `draws`",
                ));
            }
        }
        let list = ctx.array(n, &t.path_of("draws"))?;
        if list.is_empty() {
            return Err(ctx.err(
                n,
                &t.path_of("draws"),
                "`draws` is empty",
                "list at least one draw, or write power = \"0 W\"",
            ));
        }
        let mut out = Vec::new();
        for (j, d) in list.iter().enumerate() {
            let dt = ctx.table(d, &format!("{}[{j}]", t.path_of("draws")))?;
            out.push(decode_draw_fields(ctx, &dt, home, defaults)?);
            dt.finish()?;
        }
        Ok(out)
    } else {
        Ok(vec![decode_draw_fields(ctx, t, home, defaults)?])
    }
}

fn decode_inrush(ctx: &Reader, t: &TableReader) -> Result<Option<Inrush>, Error> {
    let Some(n) = t.opt("inrush") else {
        return Ok(None);
    };
    let path = t.path_of("inrush");
    let it = ctx.table(n, &path)?;
    let pnode = it.req(
        "peak",
        "the multiple of steady power at switch-on, e.g. 5.0",
    )?;
    let peak = ctx.number(pnode, &it.path_of("peak"))?;
    if !(1.0..=20.0).contains(&peak) {
        return Err(ctx.err(
            pnode,
            &it.path_of("peak"),
            format!("inrush peak {peak} is outside 1 … 20"),
            "write the multiple of steady power, e.g. peak = 5.0",
        ));
    }
    let decay_s = ctx.positive(
        it.req("decay", "the decay time constant, e.g. \"1.5 s\"")?,
        &it.path_of("decay"),
        QuantityKind::Duration,
    )?;
    it.finish()?;
    Ok(Some(Inrush { peak, decay_s }))
}

pub(crate) fn decode_dist(ctx: &Reader, node: &Node, path: &str) -> Result<Dist, Error> {
    if let Val::Str(_) = node.v {
        return Ok(Dist::Fixed {
            value_s: ctx.positive(node, path, QuantityKind::Duration)?,
        });
    }
    let t = ctx.table(node, path)?;
    let help = "write a duration (\"13 min\"), { median = \"13 min\", spread = 0.25 } (lognormal), { min = \"5 min\", max = \"9 min\" } (uniform) or { mean = \"40 min\", shape = 4 } (gamma)";
    let d = if t.has("median") {
        let median_s = t.positive("median", QuantityKind::Duration)?.unwrap();
        let sn = t.req(
            "spread",
            "the standard deviation of ln(duration), e.g. 0.25",
        )?;
        let spread = ctx.number(sn, &t.path_of("spread"))?;
        if !(spread > 0.0 && spread <= MAX_SPREAD) {
            return Err(ctx.err(
                sn,
                &t.path_of("spread"),
                format!("spread must be greater than zero and at most {MAX_SPREAD}"),
                "write the standard deviation of ln(duration), e.g. spread = 0.25",
            ));
        }
        Dist::Lognormal { median_s, spread }
    } else if t.has("min") || t.has("max") {
        let min_s = t
            .positive("min", QuantityKind::Duration)?
            .ok_or_else(|| ctx.err(node, path, "uniform needs `min`", help))?;
        let max_s = t
            .positive("max", QuantityKind::Duration)?
            .ok_or_else(|| ctx.err(node, path, "uniform needs `max`", help))?;
        if max_s <= min_s {
            return Err(ctx.err(node, path, "max must be greater than min", help));
        }
        Dist::Uniform { min_s, max_s }
    } else if t.has("mean") {
        let mean_s = t.positive("mean", QuantityKind::Duration)?.unwrap();
        let sn = t.req("shape", "the gamma shape k, e.g. 4")?;
        let shape = ctx.number(sn, &t.path_of("shape"))?;
        if !(MIN_SHAPE..=MAX_SHAPE).contains(&shape) {
            return Err(ctx.err(
                sn,
                &t.path_of("shape"),
                format!("shape must lie within {MIN_SHAPE} … {MAX_SHAPE}"),
                "write the gamma shape k, e.g. shape = 4",
            ));
        }
        Dist::Gamma { mean_s, shape }
    } else if t.has("fixed") {
        Dist::Fixed {
            value_s: t.positive("fixed", QuantityKind::Duration)?.unwrap(),
        }
    } else {
        return Err(ctx.err(node, path, "not a duration distribution", help));
    };
    t.finish()?;
    Ok(d)
}

fn decode_habit(ctx: &Reader, node: &Node, path: &str) -> Result<Habit, Error> {
    let t = ctx.table(node, path)?;
    let sn = t.req(
        "starts_per_day",
        "the mean number of starts per day, e.g. 0.6",
    )?;
    let starts = ctx.number(sn, &t.path_of("starts_per_day"))?;
    if !(0.0..=100.0).contains(&starts) {
        return Err(ctx.err(
            sn,
            &t.path_of("starts_per_day"),
            "starts per day must be within 0 … 100",
            "write e.g. starts_per_day = 0.6",
        ));
    }
    let weekend = match t.opt("weekend_starts_per_day") {
        Some(n) => {
            let w = ctx.number(n, &t.path_of("weekend_starts_per_day"))?;
            if !(0.0..=100.0).contains(&w) {
                return Err(ctx.err(
                    n,
                    &t.path_of("weekend_starts_per_day"),
                    "starts per day must be within 0 … 100",
                    "write e.g. weekend_starts_per_day = 1.2",
                ));
            }
            w
        }
        None => starts,
    };
    let hour_weights = match t.opt("hours") {
        Some(n) => parse_hours(ctx, n, &t.path_of("hours"))?,
        None => vec![1.0 / 24.0; 24],
    };
    t.finish()?;
    Ok(Habit {
        starts_per_day: starts,
        weekend_starts_per_day: weekend,
        weekend_hour_weights: hour_weights.clone(),
        hour_weights,
    })
}

fn state_name(ctx: &Reader, t: &TableReader, fallback: &str) -> Result<String, Error> {
    let name = t.string("name")?.unwrap_or(fallback).to_string();
    if name.is_empty() || name.chars().count() > MAX_NAME_CHARS {
        let at = t.opt("name").unwrap_or(t.node);
        return Err(ctx.err(
            at,
            &t.path_of("name"),
            format!("a state name has 1 … {MAX_NAME_CHARS} characters"),
            "write a short name such as name = \"on\"",
        ));
    }
    Ok(name)
}

fn read_state<'n, 's, 'c>(
    ctx: &'c Reader<'s>,
    n: &'n Node,
    p: String,
    fallback: &str,
    home: &Home,
    defaults: &DrawDefaults,
) -> Result<(State, TableReader<'n, 's, 'c>), Error> {
    let st = ctx.table(n, &p)?;
    let name = state_name(ctx, &st, fallback)?;
    let draws = decode_draws(ctx, &st, home, defaults)?;
    let inrush = decode_inrush(ctx, &st)?;
    Ok((
        State {
            name,
            draws,
            inrush,
        },
        st,
    ))
}

fn decode_appliance(
    ctx: &Reader,
    node: &Node,
    path: &str,
    home: &Home,
    template: Option<String>,
) -> Result<Appliance, Error> {
    let t = ctx.table(node, path)?;
    let _ = t.opt("template");
    let id_node = t.req("id", "a short id such as \"fridge\"")?;
    let id = ctx.string(id_node, &t.path_of("id"))?.to_string();
    check_id(ctx, id_node, &t.path_of("id"), &id)?;
    let path = format!("appliance[{id}]");
    let t = TableReader::rebase(t, path.clone());
    let label = t.string("label")?.unwrap_or(&id).to_string();
    let end_use = decode_end_use(ctx, &t)?;
    let wnode = t.req(
        "wiring",
        "where it is connected, e.g. \"L1-N\", \"L1-L2\" or \"3P\"",
    )?;
    let wiring = parse_wiring(ctx, wnode, &t.path_of("wiring"), home.supply)?;
    let load = decode_app_load(ctx, &t, LoadKind::Resistive)?;
    let defaults = DrawDefaults { wiring, load };
    let bnode = t.req(
        "behaviour",
        "cycle, program, markov, steady, modulating or thermostat",
    )?;
    let bname = ctx.string(bnode, &t.path_of("behaviour"))?;
    let reader = ApplianceReader {
        ctx,
        t: &t,
        path: &path,
        home,
        defaults: &defaults,
    };
    let (mut behaviour, mut states) = reader.behaviour(bname, bnode)?;
    decode_variation(ctx, &t, &mut behaviour, &mut states)?;
    let on_threshold_w = match t.non_negative("on_threshold", QuantityKind::Power)? {
        Some(x) => x,
        None => default_threshold(&states),
    };
    let alternatives = decode_alternatives(ctx, &t)?;
    let when_dark_s = decode_when_dark(ctx, &t, &behaviour, home)?;
    t.finish()?;
    Ok(Appliance {
        id,
        label,
        template,
        end_use,
        wiring,
        behaviour,
        states,
        on_threshold_w,
        alternatives,
        role: Role::Load,
        when_dark_s,
    })
}

/// An appliance's table while its behaviour and states are read: each
/// behaviour has its own method, and every state is read with the
/// appliance's defaults.
struct ApplianceReader<'a, 'n, 's, 'c> {
    ctx: &'c Reader<'s>,
    t: &'a TableReader<'n, 's, 'c>,
    path: &'a str,
    home: &'a Home,
    defaults: &'a DrawDefaults,
}

/// A behaviour and the states it moves between, in the order it names them.
type BehaviourStates = (Behaviour, Vec<State>);

impl<'n, 's, 'c> ApplianceReader<'_, 'n, 's, 'c> {
    fn behaviour(&self, name: &str, node: &Node) -> Result<BehaviourStates, Error> {
        match name {
            "cycle" => self.cycle(),
            "program" => self.program(),
            "markov" => self.markov(),
            "steady" => self.steady(),
            "modulating" => self.modulating(),
            "thermostat" => self.thermostat(),
            other => Err(self.ctx.err(
                node,
                &self.t.path_of("behaviour"),
                format!("unknown behaviour \"{other}\""),
                "write \"cycle\", \"program\", \"markov\", \"steady\", \"modulating\" or \"thermostat\"",
            )),
        }
    }

    fn state<'m>(
        &self,
        n: &'m Node,
        p: String,
        fallback: &str,
    ) -> Result<(State, TableReader<'m, 's, 'c>), Error> {
        read_state(self.ctx, n, p, fallback, self.home, self.defaults)
    }

    /// The list of states under `key`, which may not be empty.
    fn list(&self, key: &'static str) -> Result<&'n [Node], Error> {
        let n = self.t.req(key, "a list of states")?;
        let l = self.ctx.array(n, &self.t.path_of(key))?;
        if l.is_empty() {
            return Err(self.ctx.err(
                n,
                &self.t.path_of(key),
                format!("`{key}` is empty"),
                "list at least one",
            ));
        }
        Ok(l)
    }

    /// A state's `dwell` (cycle and markov).
    fn dwell(&self, st: &TableReader) -> Result<Dist, Error> {
        decode_dist(
            self.ctx,
            st.req("dwell", "how long it stays in this state")?,
            &st.path_of("dwell"),
        )
    }

    fn cycle(&self) -> Result<BehaviourStates, Error> {
        let path = self.path;
        let mut states = Vec::new();
        let mut dwell = Vec::new();
        for (i, n) in self.list("states")?.iter().enumerate() {
            let (s, st) = self.state(n, format!("{path}.states[{i}]"), &format!("s{i}"))?;
            dwell.push(self.dwell(&st)?);
            st.finish()?;
            states.push(s);
        }
        let extra = match self.t.opt("extra") {
            None => None,
            Some(n) => Some(self.extra(n, &mut states)?),
        };
        Ok((Behaviour::Cycle { dwell, extra }, states))
    }

    /// A cycle's extra state (a defrost, say), appended to `states`.
    fn extra(&self, n: &Node, states: &mut Vec<State>) -> Result<Extra, Error> {
        let (s, st) = self.state(n, self.t.path_of("extra"), "extra")?;
        let length = decode_dist(
            self.ctx,
            st.req("length", "how long the extra state lasts")?,
            &st.path_of("length"),
        )?;
        let every_s = self.ctx.positive(
            st.req("every", "how often it comes, e.g. \"8 h\"")?,
            &st.path_of("every"),
            QuantityKind::Duration,
        )?;
        st.finish()?;
        states.push(s);
        Ok(Extra {
            state: states.len() - 1,
            length,
            every_s,
        })
    }

    fn program(&self) -> Result<BehaviourStates, Error> {
        let (ctx, t, path) = (self.ctx, self.t, self.path);
        let habit = decode_habit(
            ctx,
            t.req(
                "use",
                "the usage habit, e.g. { starts_per_day = 0.6, hours = \"17-22\" }",
            )?,
            &t.path_of("use"),
        )?;
        let mut states = vec![off_state()];
        let mut lengths = Vec::new();
        for (i, n) in self.list("phases")?.iter().enumerate() {
            let (s, st) = self.state(n, format!("{path}.phases[{i}]"), &format!("phase{i}"))?;
            lengths.push(decode_dist(
                ctx,
                st.req("length", "how long this phase lasts")?,
                &st.path_of("length"),
            )?);
            st.finish()?;
            states.push(s);
        }
        Ok((Behaviour::Program { habit, lengths }, states))
    }

    fn markov(&self) -> Result<BehaviourStates, Error> {
        let path = self.path;
        let mut states = Vec::new();
        let mut dwell = Vec::new();
        let mut next_nodes = Vec::new();
        for (i, n) in self.list("states")?.iter().enumerate() {
            let (s, st) = self.state(n, format!("{path}.states[{i}]"), &format!("s{i}"))?;
            dwell.push(self.dwell(&st)?);
            let nn = st.req(
                "next",
                "the probabilities of the next state, e.g. { idle = 0.7, busy = 0.3 }",
            )?;
            next_nodes.push((nn, st.path_of("next")));
            st.finish()?;
            states.push(s);
        }
        let mut next = Vec::new();
        for (nn, p) in next_nodes {
            next.push(next_row(self.ctx, nn, &p, &states)?);
        }
        Ok((Behaviour::Markov { dwell, next }, states))
    }

    fn steady(&self) -> Result<BehaviourStates, Error> {
        let (ctx, t) = (self.ctx, self.t);
        let list = self.list("states")?;
        if list.len() != 1 {
            return Err(ctx.err(
                t.opt("states").unwrap(),
                &t.path_of("states"),
                "a steady appliance has exactly one state",
                "list one state, or use behaviour = \"cycle\" or \"markov\"",
            ));
        }
        let (s, st) = self.state(&list[0], format!("{}.states[0]", self.path), "on")?;
        st.finish()?;
        let jitter = t
            .non_negative("jitter", QuantityKind::Fraction)?
            .unwrap_or(0.0);
        let every_s = t.positive("every", QuantityKind::Duration)?.unwrap_or(60.0);
        Ok((Behaviour::Steady { jitter, every_s }, vec![s]))
    }

    fn modulating(&self) -> Result<BehaviourStates, Error> {
        let t = self.t;
        let states = self.modulating_states()?;
        let min = t
            .non_negative("min", QuantityKind::Fraction)?
            .unwrap_or(0.3);
        if min > 1.0 {
            return Err(self.ctx.err(
                t.opt("min").unwrap(),
                &t.path_of("min"),
                "min is a share of full power and cannot exceed 100 %",
                "write e.g. min = \"30 %\"",
            ));
        }
        let wander = t
            .non_negative("wander", QuantityKind::Fraction)?
            .unwrap_or(0.05);
        let every_s = t.positive("every", QuantityKind::Duration)?.unwrap_or(60.0);
        let session = match t.opt("use") {
            None => None,
            Some(u) => Some(self.session(u)?),
        };
        let behaviour = Behaviour::Modulating {
            min,
            wander,
            every_s,
            session,
        };
        Ok((behaviour, states))
    }

    /// A modulating appliance's states: running, or resting and running
    /// (with one state listed, an empty "off" comes first).
    fn modulating_states(&self) -> Result<Vec<State>, Error> {
        let list = self.list("states")?;
        if list.len() > 2 {
            return Err(self.ctx.err(
                self.t.opt("states").unwrap(),
                &self.t.path_of("states"),
                "a modulating appliance has one state (running) or two (resting, running)",
                "list the running state last",
            ));
        }
        let mut states = Vec::new();
        if list.len() == 1 {
            states.push(off_state());
        }
        for (i, n) in list.iter().enumerate() {
            let fallback = if i + 1 == list.len() { "run" } else { "rest" };
            let (s, st) = self.state(n, format!("{}.states[{i}]", self.path), fallback)?;
            st.finish()?;
            states.push(s);
        }
        Ok(states)
    }

    /// A modulating appliance's sessions of use (`use`, `session`, `taper`).
    fn session(&self, u: &Node) -> Result<Session, Error> {
        let (ctx, t) = (self.ctx, self.t);
        let habit = decode_habit(ctx, u, &t.path_of("use"))?;
        let length = decode_dist(
            ctx,
            t.req("session", "how long a session lasts")?,
            &t.path_of("session"),
        )?;
        let taper_s = t
            .non_negative("taper", QuantityKind::Duration)?
            .unwrap_or(0.0);
        Ok(Session {
            habit,
            length,
            taper_s,
        })
    }

    fn thermostat(&self) -> Result<BehaviourStates, Error> {
        let mut read = Vec::new();
        for (i, n) in self.list("states")?.iter().enumerate() {
            let (s, st) = self.state(n, format!("{}.states[{i}]", self.path), &format!("s{i}"))?;
            st.finish()?;
            read.push(s);
        }
        let (role, ordered) = super::thermal::decode_role(self.ctx, self.t, read)?;
        Ok((Behaviour::Thermostat { role }, ordered))
    }
}

/// The state a program or a one-state modulating appliance rests in: no draw.
fn off_state() -> State {
    State {
        name: "off".into(),
        draws: vec![],
        inrush: None,
    }
}

/// One markov state's `next`: the probability of each state following it,
/// in the order of `states`; they must add up to 1.
fn next_row(ctx: &Reader, nn: &Node, p: &str, states: &[State]) -> Result<Vec<f64>, Error> {
    let nt = ctx.table(nn, p)?;
    nt.all_keys_known();
    let mut row = vec![0.0; states.len()];
    for e in nt.entries() {
        let j = states.iter().position(|s| s.name == e.key).ok_or_else(|| {
            Error::at(
                ctx.sources,
                &e.key_src,
                &format!("{p}.{}", e.key),
                format!("no state named \"{}\"", e.key),
                format!(
                    "states here: {}",
                    states
                        .iter()
                        .map(|s| s.name.as_str())
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            )
        })?;
        let x = ctx.number(&e.node, &format!("{p}.{}", e.key))?;
        if !(0.0..=1.0).contains(&x) {
            return Err(ctx.err(
                &e.node,
                &format!("{p}.{}", e.key),
                format!("probability {x} is outside 0 … 1"),
                "write a probability between 0 and 1",
            ));
        }
        row[j] = x;
    }
    let sum: f64 = row.iter().sum();
    if (sum - 1.0).abs() > 1e-6 {
        return Err(ctx.err(
            nn,
            p,
            format!("the probabilities sum to {sum}, not 1"),
            "make the probabilities of the next state add up to 1",
        ));
    }
    nt.finish()?;
    Ok(row)
}

/// Home-to-home variation (fleets): `habit_shift` moves every habit's hours,
/// `power_scale` multiplies every draw's power and `time_scale` every
/// duration of the behaviour.
fn decode_variation(
    ctx: &Reader,
    t: &TableReader,
    behaviour: &mut Behaviour,
    states: &mut [State],
) -> Result<(), Error> {
    if let Some(n) = t.opt("habit_shift") {
        let hours = ctx.number(n, &t.path_of("habit_shift"))?;
        if hours.abs() > 12.0 {
            return Err(ctx.err(
                n,
                &t.path_of("habit_shift"),
                "a habit shifted by more than 12 hours",
                "write hours within ±12, e.g. habit_shift = 1.5",
            ));
        }
        for h in behaviour.habits_mut() {
            h.shift(hours);
        }
    }
    for (key, what) in [("power_scale", "power"), ("time_scale", "time")] {
        if let Some(n) = t.opt(key) {
            let k = ctx.number(n, &t.path_of(key))?;
            if !(0.1..=10.0).contains(&k) {
                return Err(ctx.err(
                    n,
                    &t.path_of(key),
                    format!("a {what} scale of {k} is outside 0.1 … 10"),
                    "write a factor such as 1.1",
                ));
            }
            if key == "power_scale" {
                for d in states.iter_mut().flat_map(|s| s.draws.iter_mut()) {
                    d.p_w *= k;
                    d.q_var *= k;
                }
            } else {
                scale_times(behaviour, k);
            }
        }
    }
    Ok(())
}

/// The longest `when_dark` margin: three hours either side of sunset and
/// sunrise (beyond it the rule no longer speaks of daylight).
pub const MAX_DARK_MARGIN_S: f64 = 3.0 * 3600.0;

/// `when_dark = "30 min"`: a program's phases run only from that long
/// before sunset to that long after sunrise at the home's site; `false`
/// turns off a template's.
fn decode_when_dark(
    ctx: &Reader,
    t: &TableReader,
    behaviour: &Behaviour,
    home: &Home,
) -> Result<Option<f64>, Error> {
    let Some(n) = t.opt("when_dark") else {
        return Ok(None);
    };
    let path = t.path_of("when_dark");
    if let Val::Bool(on) = n.v {
        if on {
            return Err(ctx.err(n, &path, "when_dark = true says no margin", "write a margin such as when_dark = \"30 min\" (from 30 minutes before sunset to 30 minutes after sunrise), or when_dark = false"));
        }
        return Ok(None);
    }
    let margin = ctx.non_negative(n, &path, QuantityKind::Duration)?;
    if margin > MAX_DARK_MARGIN_S {
        return Err(ctx.err(
            n,
            &path,
            format!(
                "a margin of {} is longer than 3 h",
                crate::units::human_duration(margin)
            ),
            "write a margin of at most \"3 h\", such as \"30 min\"",
        ));
    }
    if !matches!(behaviour, Behaviour::Program { .. }) {
        return Err(ctx.err(
            n,
            &path,
            "when_dark applies to programs only (their phases are what burns in the dark)",
            "use behaviour = \"program\", or leave when_dark out",
        ));
    }
    if home.site.is_none() {
        return Err(ctx.err(
            n,
            &path,
            "when_dark follows sunset and sunrise, but the home has no site",
            "add latitude and longitude to [home], or write when_dark = false",
        ));
    }
    Ok(Some(margin))
}

/// `alternatives = ["line-to-neutral", "three-phase"]`: the other kinds of
/// connection real models of the appliance are sold for.
fn decode_alternatives(ctx: &Reader, t: &TableReader) -> Result<Vec<WiringKind>, Error> {
    let Some(n) = t.opt("alternatives") else {
        return Ok(vec![]);
    };
    let path = t.path_of("alternatives");
    let mut out = Vec::new();
    for (i, item) in ctx.array(n, &path)?.iter().enumerate() {
        let p = format!("{path}[{i}]");
        let text = ctx.string(item, &p)?;
        match WiringKind::ALL.iter().find(|(name, _)| *name == text) {
            Some((_, k)) if !out.contains(k) => out.push(*k),
            Some(_) => {
                return Err(ctx.err(
                    item,
                    &p,
                    format!("\"{text}\" is listed twice"),
                    "list each kind once",
                ))
            }
            None => {
                return Err(ctx.err(
                    item,
                    &p,
                    format!("unknown kind of connection \"{text}\""),
                    "write \"line-to-neutral\", \"line-to-line\" or \"three-phase\"",
                ))
            }
        }
    }
    Ok(out)
}

/// `end_use`: one of [`crate::scenario::model::END_USES`], "other" when absent.
fn decode_end_use(ctx: &Reader, t: &TableReader) -> Result<String, Error> {
    let uses = crate::scenario::model::END_USES;
    match t.opt("end_use") {
        None => Ok("other".into()),
        Some(n) => {
            let v = ctx.string(n, &t.path_of("end_use"))?;
            if uses.contains(&v) {
                Ok(v.to_string())
            } else {
                Err(ctx.err(
                    n,
                    &t.path_of("end_use"),
                    format!("unknown end use \"{v}\""),
                    format!("write one of: {}", uses.join(", ")),
                ))
            }
        }
    }
}

fn scale_times(b: &mut Behaviour, k: f64) {
    match b {
        Behaviour::Cycle { dwell, extra } => {
            dwell.iter_mut().for_each(|d| *d = d.scaled(k));
            if let Some(e) = extra {
                e.length = e.length.scaled(k);
                e.every_s *= k;
            }
        }
        Behaviour::Program { lengths, .. } => lengths.iter_mut().for_each(|d| *d = d.scaled(k)),
        Behaviour::Markov { dwell, .. } => dwell.iter_mut().for_each(|d| *d = d.scaled(k)),
        Behaviour::Steady { every_s, .. } => *every_s *= k,
        Behaviour::Modulating {
            every_s, session, ..
        } => {
            *every_s *= k;
            if let Some(s) = session {
                s.length = s.length.scaled(k);
                s.taper_s *= k;
            }
        }
        // Made by `[pv]` and `[battery]`, never by an appliance's keys.
        Behaviour::Sun(_) | Behaviour::Storage(_) => {}
        Behaviour::Thermostat { .. } => {}
    }
}

/// Default on/off threshold: halfway from the lowest state's power to the
/// lowest state above it, but never more than 30 W above the lowest
/// (common practice in on/off scoring, no source).
fn default_threshold(states: &[State]) -> f64 {
    let mut p: Vec<f64> = states.iter().map(|s| s.p_w()).collect();
    p.sort_by(|a, b| a.partial_cmp(b).unwrap());
    let low = p[0];
    match p.iter().find(|&&x| x > low + 1e-9) {
        Some(&next) => low + (0.5 * (next - low)).min(30.0),
        None => low.max(0.0) * 0.5,
    }
}
