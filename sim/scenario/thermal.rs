//! The scenario language of weather and heating: `[weather]`, `[building]`
//! and the roles of `behaviour = "thermostat"` appliances.

use super::model::{
    Appliance, Building, Equipment, Glazing, HeatPump, Home, Reference, Run, State,
};
use super::reader::{Reader, TableReader};
use super::source::{Error, Node, Val};
use super::values::parse_hours;
use crate::sun::Surface;
use crate::units::QuantityKind;
use crate::weather::{climate::NAMED, Climate, WeatherSpec};
use std::path::Path;

const MONTHS: [&str; 12] = [
    "January",
    "February",
    "March",
    "April",
    "May",
    "June",
    "July",
    "August",
    "September",
    "October",
    "November",
    "December",
];

fn climate_names() -> String {
    NAMED.iter().map(|n| n.name).collect::<Vec<_>>().join(", ")
}

/// `[weather]`: a named climate, climate figures, or a file.
pub fn decode_weather(ctx: &Reader, node: &Node, run: &Run) -> Result<WeatherSpec, Error> {
    let t = ctx.table(node, "weather")?;
    if let Some(f) = t.opt("file") {
        let spec = decode_file(ctx, f, run)?;
        t.finish()?;
        return Ok(spec);
    }
    let (name, mut c) = match t.opt("climate") {
        Some(n) => {
            let name = ctx.string(n, "weather.climate")?;
            let (named, c) = Climate::from_name(name).ok_or_else(|| {
                ctx.err(
                    n,
                    "weather.climate",
                    format!("no climate named \"{name}\""),
                    format!(
                        "named climates: {}; or give `monthly` or `mean` and `swing`",
                        climate_names()
                    ),
                )
            })?;
            (Some(named.name.to_string()), c)
        }
        None => (None, default_figures()),
    };
    decode_means(ctx, &t, &mut c, name.is_some())?;
    if let Some(x) = t.positive("daily_swing", QuantityKind::TempDiff)? {
        c.daily_swing_k = x;
    }
    if let Some(n) = t.opt("spread") {
        let s = ctx.table(n, "weather.spread")?;
        let w = s.non_negative("winter", QuantityKind::TempDiff)?;
        let su = s.non_negative("summer", QuantityKind::TempDiff)?;
        s.finish()?;
        c.spread_k = (w.unwrap_or(c.spread_k.0), su.unwrap_or(c.spread_k.1));
    }
    if let Some(n) = t.opt("persistence") {
        let p = ctx.number(n, "weather.persistence")?;
        if !(0.0..=0.99).contains(&p) {
            return Err(ctx.err(
                n,
                "weather.persistence",
                format!("persistence {p} is outside 0 … 0.99"),
                "write the lag-1 autocorrelation of daily departures, e.g. persistence = 0.7",
            ));
        }
        c.persistence = p;
    }
    t.finish()?;
    Ok(WeatherSpec::Synthetic { name, climate: c })
}

/// Figures for a climate given only by its means (spread and persistence
/// of a temperate mid-latitude site, from memory).
fn default_figures() -> Climate {
    Climate {
        monthly_mean_c: [10.0; 12],
        daily_swing_k: 8.0,
        spread_k: (4.5, 2.8),
        persistence: 0.7,
    }
}

fn decode_means(ctx: &Reader, t: &TableReader, c: &mut Climate, named: bool) -> Result<(), Error> {
    if let Some(n) = t.opt("monthly") {
        let list = ctx.array(n, "weather.monthly")?;
        if list.len() != 12 {
            return Err(ctx.err(
                n,
                "weather.monthly",
                format!("{} monthly means; a year has 12", list.len()),
                "list twelve means, January first, e.g. [\"-4 °C\", …]",
            ));
        }
        for (m, x) in list.iter().enumerate() {
            c.monthly_mean_c[m] = temperature(ctx, x, &format!("weather.monthly[{m}]"))?;
        }
        return Ok(());
    }
    let mean = t.opt("mean");
    let swing = t.quantity("swing", QuantityKind::TempDiff)?;
    match (mean, swing) {
        (Some(m), Some(sw)) => {
            let mean = temperature(ctx, m, "weather.mean")?;
            let coldest = match t.opt("coldest") {
                Some(n) => month(ctx, n)?,
                None => 0,
            };
            c.monthly_mean_c = Climate::monthly_from_swing(mean, sw, coldest);
            Ok(())
        }
        (None, None) if named => Ok(()),
        _ => Err(ctx.err(
            t.node,
            "weather",
            "the weather needs a climate: `climate`, `monthly`, `mean` with `swing`, or `file`",
            format!("write climate = \"{}\", monthly = [twelve means], mean = \"9 °C\" with swing = \"18 K\", or file = \"weather.csv\"", NAMED[0].name),
        )),
    }
}

fn month(ctx: &Reader, n: &Node) -> Result<usize, Error> {
    let s = ctx.string(n, "weather.coldest")?;
    MONTHS
        .iter()
        .position(|m| m.eq_ignore_ascii_case(s))
        .ok_or_else(|| {
            ctx.err(
                n,
                "weather.coldest",
                format!("\"{s}\" is not a month"),
                "write a month's English name, e.g. \"January\"",
            )
        })
}

/// A temperature within the extremes measured at the surface.
pub fn temperature(ctx: &Reader, n: &Node, path: &str) -> Result<f64, Error> {
    let v = ctx.quantity(n, path, QuantityKind::Temperature)?;
    if !(-90.0..=60.0).contains(&v) {
        return Err(ctx.err(
            n,
            path,
            format!("{v} °C is outside -90 … 60 °C"),
            "write a temperature such as \"20 °C\"",
        ));
    }
    Ok(v)
}

fn decode_file(ctx: &Reader, f: &Node, run: &Run) -> Result<WeatherSpec, Error> {
    let name = ctx.string(f, "weather.file")?;
    let base = ctx
        .sources
        .path(f.src.file)
        .parent()
        .map(Path::to_path_buf)
        .unwrap_or_default();
    let path = base.join(name);
    let data = crate::weather::file::read(&path)
        .map_err(|e| ctx.err(f, "weather.file", e.message, e.help))?;
    let end = run.start_utc_ms + (run.length_s * 1000.0) as i64;
    if let Err(missing) = data.covers(run.start_utc_ms, end) {
        let at = |ms: i64| {
            jiff::Timestamp::from_millisecond(ms)
                .map(|t| t.to_string())
                .unwrap_or_default()
        };
        let what = if missing == run.start_utc_ms {
            format!(
                "it starts at {}, after the run's start {}",
                at(data.time_ms[0]),
                at(missing)
            )
        } else {
            format!(
                "it ends at {}, before the run's end {}",
                at(missing),
                at(end)
            )
        };
        return Err(ctx.err(
            f,
            "weather.file",
            format!("{} does not cover the run: {what} (UTC)", path.display()),
            "give weather from the run's start to its end, or move the run inside the file's period",
        ));
    }
    if data.longest_gap_ms() > 6 * 3_600_000 {
        return Err(ctx.err(
            f,
            "weather.file",
            format!(
                "{} has a gap of {:.1} h between rows",
                path.display(),
                data.longest_gap_ms() as f64 / 3.6e6
            ),
            "give at least one row every 6 hours (hourly is usual)",
        ));
    }
    Ok(WeatherSpec::File {
        path: name.to_string(),
        data,
    })
}

/// What light a building's apertures can have: the sun over the home's
/// site, the irradiance of a weather file, both or neither.
#[derive(Clone, Copy, Debug)]
pub struct Sunlit {
    /// The home's site (the sun's path: any plane's irradiance).
    pub site: Option<crate::sun::Site>,
    /// A weather file gives the global horizontal irradiance.
    pub recorded: bool,
}

/// What light reaches the home's apertures ([`Sunlit`]).
pub fn sunlit(home: &Home, weather: Option<&WeatherSpec>) -> Sunlit {
    let recorded =
        matches!(weather, Some(WeatherSpec::File { data, .. }) if data.ghi_w_m2.is_some());
    Sunlit {
        site: home.site,
        recorded,
    }
}

/// `[building]`: the envelope, the thermostat and the apertures; `sunlit`:
/// what light the home has for them ([`sunlit`]).
pub fn decode_building(ctx: &Reader, node: &Node, sunlit: Sunlit) -> Result<Building, Error> {
    let t = ctx.table(node, "building")?;
    let ua_w_k = ctx.positive(
        t.req("ua", "the heat loss coefficient, e.g. \"250 W/K\"")?,
        "building.ua",
        QuantityKind::Conductance,
    )?;
    let direct_share = share(ctx, &t, "direct", 0.4)?;
    let mass_j_k = ctx.positive(
        t.req(
            "mass",
            "the heat capacity of the structure, e.g. \"30 MJ/K\"",
        )?,
        "building.mass",
        QuantityKind::HeatCapacity,
    )?;
    // Air, furnishings and linings: a tenth of the structure (common practice, no source).
    let air_j_k = t
        .positive("air", QuantityKind::HeatCapacity)?
        .unwrap_or(mass_j_k / 10.0);
    // Interior surfaces' film conductance: ten times the loss coefficient
    // (common practice, no source).
    let coupling_w_k = t
        .positive("coupling", QuantityKind::Conductance)?
        .unwrap_or(10.0 * ua_w_k);
    if coupling_w_k <= (1.0 - direct_share) * ua_w_k {
        return Err(ctx.err(
            t.opt("coupling").unwrap_or(node),
            "building.coupling",
            "the coupling must exceed the share of `ua` through the structure",
            "raise `coupling` or `direct`, e.g. coupling = \"2500 W/K\"",
        ));
    }
    let th = decode_setpoints(ctx, &t, node)?;
    let gains_share = share(ctx, &t, "gains", 0.8)?;
    let aperture_m2 = t
        .non_negative("aperture", QuantityKind::Area)?
        .unwrap_or(0.0);
    if aperture_m2 > 0.0 && !(sunlit.site.is_some() || sunlit.recorded) {
        return Err(ctx.err(
            t.opt("aperture").unwrap_or(node),
            "building.aperture",
            "an aperture needs sunlight, and this home has neither a site nor measured irradiance",
            "give [home] latitude and longitude (the sun's path; `sky` for clouds), or a weather file with a ghi_w_m2 column",
        ));
    }
    let glazing = match t.opt("glazing") {
        Some(n) => decode_glazing(ctx, n, sunlit)?,
        None => Vec::new(),
    };
    t.finish()?;
    Ok(Building {
        ua_w_k,
        direct_share,
        air_j_k,
        mass_j_k,
        coupling_w_k,
        heating_c: th.heating_c,
        cooling_c: th.cooling_c,
        deadband_k: th.deadband_k,
        second_stage_k: th.second_stage_k,
        setback: th.setback,
        gains_share,
        aperture_m2,
        glazing,
    })
}

/// The light a pane's ground sees reflected: PVWatts' default albedo
/// (from memory), as a `[pv]` array's default.
const GLAZING_ALBEDO: f64 = 0.2;

/// `[building] glazing`: apertures facing a direction, each with its
/// `aperture` (m²), `azimuth` (default facing the equator) and `tilt`
/// (default 90°, a wall's window). Their light depends on the sun's
/// direction, so the home needs a site.
fn decode_glazing(ctx: &Reader, node: &Node, sunlit: Sunlit) -> Result<Vec<Glazing>, Error> {
    let items = ctx.array(node, "building.glazing")?;
    let Some(site) = sunlit.site.filter(|_| !items.is_empty()) else {
        if items.is_empty() {
            return Ok(Vec::new());
        }
        return Err(ctx.err(
            node,
            "building.glazing",
            "glazing facing a direction needs the sun's path, and this home has no site",
            "give [home] latitude and longitude (a weather file's ghi_w_m2 then sets the light), or write a horizontal `aperture` instead",
        ));
    };
    let equator = if site.latitude_deg >= 0.0 { 180.0 } else { 0.0 };
    items
        .iter()
        .enumerate()
        .map(|(i, n)| {
            let path = format!("building.glazing[{i}]");
            let g = ctx.table(n, &path)?;
            let aperture_m2 = ctx.positive(
                g.req("aperture", "the area that lets the light on its plane in, e.g. \"2 m²\"")?,
                &g.path_of("aperture"),
                QuantityKind::Area,
            )?;
            let tilt_deg = g.non_negative("tilt", QuantityKind::Angle)?.unwrap_or(90.0);
            if tilt_deg > 90.0 {
                return Err(ctx.err(
                    g.opt("tilt").unwrap_or(n),
                    &g.path_of("tilt"),
                    format!("a tilt of {tilt_deg}° faces the ground"),
                    "write a tilt from \"0 deg\" (a roof light) to \"90 deg\" (a wall's window, the default)",
                ));
            }
            let azimuth_deg = g
                .non_negative("azimuth", QuantityKind::Angle)?
                .unwrap_or(equator);
            g.finish()?;
            Ok(Glazing {
                aperture_m2,
                surface: Surface {
                    tilt_deg,
                    azimuth_deg,
                    albedo: GLAZING_ALBEDO,
                },
            })
        })
        .collect()
}

/// The thermostat's keys of `[building]`.
struct Setpoints {
    heating_c: f64,
    cooling_c: Option<f64>,
    deadband_k: f64,
    second_stage_k: f64,
    setback: Option<([bool; 24], f64)>,
}

fn decode_setpoints(ctx: &Reader, t: &TableReader, node: &Node) -> Result<Setpoints, Error> {
    let heating_c = match t.opt("heating") {
        Some(n) => temperature(ctx, n, "building.heating")?,
        None => 20.0,
    };
    let cooling_c = t
        .opt("cooling")
        .map(|n| temperature(ctx, n, "building.cooling"))
        .transpose()?;
    let deadband_k = t
        .positive("deadband", QuantityKind::TempDiff)?
        .unwrap_or(1.0);
    if let Some(c) = cooling_c {
        if c < heating_c + deadband_k {
            return Err(ctx.err(
                t.opt("cooling").unwrap_or(node),
                "building.cooling",
                format!("cooling at {c} °C would fight heating at {heating_c} °C"),
                "set cooling at least one deadband above heating",
            ));
        }
    }
    let second_stage_k = t
        .positive("second_stage", QuantityKind::TempDiff)?
        .unwrap_or(1.0);
    let setback = match t.opt("setback") {
        Some(n) => {
            let s = ctx.table(n, "building.setback")?;
            let w = parse_hours(
                ctx,
                s.req("hours", "local hours, e.g. \"23-6\"")?,
                "building.setback.hours",
            )?;
            let by = ctx.positive(
                s.req("by", "how far the setpoint drops, e.g. \"3 K\"")?,
                "building.setback.by",
                QuantityKind::TempDiff,
            )?;
            s.finish()?;
            Some((std::array::from_fn(|h| w[h] > 0.0), by))
        }
        None => None,
    };
    Ok(Setpoints {
        heating_c,
        cooling_c,
        deadband_k,
        second_stage_k,
        setback,
    })
}

/// A share 0 … 1 under `key`, or `default`.
fn share(ctx: &Reader, t: &TableReader, key: &'static str, default: f64) -> Result<f64, Error> {
    match t.opt(key) {
        Some(n) => {
            let v = ctx.quantity(n, &t.path_of(key), QuantityKind::Fraction)?;
            if !(0.0..=1.0).contains(&v) {
                return Err(ctx.err(
                    n,
                    &t.path_of(key),
                    format!("a share of {v} is outside 0 … 100 %"),
                    "write a share such as \"40 %\"",
                ));
            }
            Ok(v)
        }
        None => Ok(default),
    }
}

/// The states a role needs, by name, in the order the simulator uses
/// (state 0, `off`, is added).
fn needed(role: &str) -> Option<(&'static [&'static str], &'static [&'static str])> {
    Some(match role {
        "heat-pump" => (&["heating"], &["cooling"]),
        "air-conditioner" => (&["cooling"], &[]),
        "resistance" | "backup" => (&["heating"], &[]),
        "furnace" | "blower" => (&["running"], &[]),
        _ => return None,
    })
}

/// The role of a thermostatic appliance and its states in simulator order:
/// off, then the role's states (a heat pump: heating, defrost, cooling).
pub fn decode_role(
    ctx: &Reader,
    t: &TableReader,
    states: Vec<State>,
) -> Result<(Equipment, Vec<State>), Error> {
    let rnode = t.req(
        "role",
        "heat-pump, air-conditioner, resistance, backup, furnace or blower",
    )?;
    let rname = ctx.string(rnode, &t.path_of("role"))?;
    let (req, opt) = needed(rname).ok_or_else(|| {
        ctx.err(rnode, &t.path_of("role"), format!("unknown role \"{rname}\""), "write \"heat-pump\", \"air-conditioner\", \"resistance\", \"backup\", \"furnace\" or \"blower\"")
    })?;
    let snode = t.opt("states").unwrap_or(t.node);
    let find = |name: &str| states.iter().find(|s| s.name == name).cloned();
    for s in &states {
        if !req.contains(&s.name.as_str()) && !opt.contains(&s.name.as_str()) {
            return Err(ctx.err(
                snode,
                &t.path_of("states"),
                format!("a {rname} has no state \"{}\"", s.name),
                format!(
                    "name its states: {}",
                    req.iter()
                        .chain(opt)
                        .copied()
                        .collect::<Vec<_>>()
                        .join(", ")
                ),
            ));
        }
    }
    let mut out = vec![State {
        name: "off".into(),
        draws: vec![],
        inrush: None,
    }];
    for r in req {
        let s = find(r).ok_or_else(|| {
            ctx.err(
                snode,
                &t.path_of("states"),
                format!("a {rname} needs a state \"{r}\""),
                format!("add {{ name = \"{r}\", power = \"…\" }}"),
            )
        })?;
        if s.p_w() <= 0.0 {
            return Err(ctx.err(
                snode,
                &t.path_of("states"),
                format!("state \"{r}\" draws no power"),
                "give its electric input at full output",
            ));
        }
        out.push(s);
    }
    let role = role_of(ctx, t, rname, &states, &mut out, snode)?;
    Ok((role, out))
}

/// The role's ratings; a heat pump's defrost (and cooling) states appended to `out`.
fn role_of(
    ctx: &Reader,
    t: &TableReader,
    rname: &str,
    states: &[State],
    out: &mut Vec<State>,
    snode: &Node,
) -> Result<Equipment, Error> {
    Ok(match rname {
        "heat-pump" => {
            let mut defrost = out[1].clone();
            defrost.name = "defrost".into();
            defrost.inrush = None;
            out.push(defrost);
            let hp = heat_pump(ctx, t)?;
            match (
                states.iter().find(|s| s.name == "cooling").cloned(),
                hp.cooling_cop,
            ) {
                (Some(c), Some(_)) => out.push(c),
                (None, None) => {}
                _ => {
                    return Err(ctx.err(
                        snode,
                        &t.path_of("states"),
                        "a heat pump that cools needs both a \"cooling\" state and `cooling_cop`",
                        "add both, or neither",
                    ))
                }
            }
            Equipment::HeatPump(hp)
        }
        "air-conditioner" => Equipment::AirConditioner {
            cop: cop(ctx, t, "cop")?.unwrap_or(3.5),
        },
        "resistance" => Equipment::Resistance { backup: false },
        "backup" => Equipment::Resistance { backup: true },
        "furnace" => Equipment::Furnace {
            capacity_w: ctx.positive(
                t.req("capacity", "the heat it delivers, e.g. \"18 kW\"")?,
                &t.path_of("capacity"),
                QuantityKind::Power,
            )?,
        },
        _ => Equipment::Blower,
    })
}

fn cop(ctx: &Reader, t: &TableReader, key: &'static str) -> Result<Option<f64>, Error> {
    match t.opt(key) {
        Some(n) => {
            let v = ctx.number(n, &t.path_of(key))?;
            if !(1.0..=10.0).contains(&v) {
                return Err(ctx.err(
                    n,
                    &t.path_of(key),
                    format!("a COP of {v} is outside 1 … 10"),
                    "write the rated coefficient of performance, e.g. 3.5",
                ));
            }
            Ok(Some(v))
        }
        None => Ok(None),
    }
}

fn heat_pump(ctx: &Reader, t: &TableReader) -> Result<HeatPump, Error> {
    let low_capacity = share(ctx, t, "low_capacity", 0.6)?;
    let sink_c = match t.opt("sink") {
        Some(n) => temperature(ctx, n, &t.path_of("sink"))?,
        None => 35.0,
    };
    let lockout_c = match t.opt("lockout") {
        Some(n) => temperature(ctx, n, &t.path_of("lockout"))?,
        None => -20.0,
    };
    let (every, length) = match t.opt("defrost") {
        Some(n) if matches!(n.v, Val::Bool(false)) => (0.0, 0.0),
        Some(n) => {
            let d = ctx.table(n, &t.path_of("defrost"))?;
            let e = d
                .positive("every", QuantityKind::Duration)?
                .unwrap_or(3600.0);
            let l = d
                .positive("length", QuantityKind::Duration)?
                .unwrap_or(300.0);
            d.finish()?;
            (e, l)
        }
        // Every hour of frosting run time, five minutes (from memory:
        // demand defrost controls allow 30 … 90 min between defrosts).
        None => (3600.0, 300.0),
    };
    Ok(HeatPump {
        cop: cop(ctx, t, "cop")?.unwrap_or(3.5),
        low_capacity,
        sink_c,
        lockout_c,
        cooling_cop: cop(ctx, t, "cooling_cop")?,
        defrost_every_s: every,
        defrost_length_s: length,
    })
}

/// `[[reference]]`: published annual energy figures, each naming the loads
/// it covers (none: the whole home) and its source.
pub fn decode_references(
    ctx: &Reader,
    node: &Node,
    apps: &[Appliance],
    unmetered: &[Appliance],
) -> Result<Vec<Reference>, Error> {
    let mut out = Vec::new();
    for (i, n) in ctx.array(node, "reference")?.iter().enumerate() {
        let path = format!("reference[{i}]");
        let t = ctx.table(n, &path)?;
        let name = ctx
            .string(
                t.req("name", "what it covers, e.g. \"space heating\"")?,
                &t.path_of("name"),
            )?
            .to_string();
        let kwh = ctx.positive(
            t.req("annual", "the published energy a year, e.g. \"450 kWh\"")?,
            &t.path_of("annual"),
            QuantityKind::Energy,
        )? / 3.6e6;
        let source = ctx
            .string(
                t.req("source", "where the figure comes from")?,
                &t.path_of("source"),
            )?
            .to_string();
        let mut ids = Vec::new();
        if let Some(l) = t.opt("ids") {
            for (j, x) in ctx.array(l, &t.path_of("ids"))?.iter().enumerate() {
                let id = ctx.string(x, &format!("{path}.ids[{j}]"))?;
                if !apps.iter().chain(unmetered).any(|a| a.id == id) {
                    return Err(ctx.err(
                        x,
                        &format!("{path}.ids[{j}]"),
                        format!("no appliance or unmetered load \"{id}\""),
                        "name loads of this home, or leave `ids` out for the whole home",
                    ));
                }
                ids.push(id.to_string());
            }
        }
        t.finish()?;
        out.push(Reference {
            name,
            ids,
            kwh,
            source,
        });
    }
    Ok(out)
}
