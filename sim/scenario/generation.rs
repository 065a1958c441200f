//! `[pv]` and `[battery]`: a home's own generation and storage, decoded
//! into appliances of their own roles (after the `[[appliance]]` list), so
//! the truth, the events and the manifest carry them like any appliance.

use super::model::*;
use super::reader::{Reader, TableReader};
use super::source::{Error, Node};
use super::values::{check_id, parse_wiring};
use crate::sun::pvwatts;
use crate::units::QuantityKind;

/// The largest single-phase inverter commonly allowed on a three-phase
/// European supply: 4.6 kVA of unbalance per phase (VDE-AR-N 4105:2018,
/// section 5.5, the German low-voltage connection rule; many other grid
/// codes set similar limits). A fact of the trade, checked as a warning.
pub const SINGLE_PHASE_LIMIT_VA: f64 = 4600.0;

/// PVWatts' module types and their temperature coefficients of power
/// (Dobos 2014, "PVWatts Version 5 Manual", table 2).
const MODULES: [(&str, f64); 3] = [
    ("standard", pvwatts::STANDARD_GAMMA),
    ("premium", -0.0035),
    ("thin-film", -0.0020),
];

/// Outdoor air temperature and wind seen by the array: a fixed mild day
/// (20 °C, 1 m/s; illustrative); a home with `[weather]` gives the array
/// its outdoor temperature instead (`behaviour::solar::generate`).
const AIR_C: f64 = 20.0;
const WIND_M_S: f64 = 1.0;

/// A draw of `p_w` (negative: exporting) through an inverter: constant
/// power, unity power factor, no harmonics (grid-tied inverters hold current
/// distortion under 5 % of rated current, IEEE 1547-2018, from memory).
fn inverter_draw(home: &Home, wiring: Wiring, p_w: f64) -> Draw {
    Draw {
        wiring,
        p_w,
        q_var: 0.0,
        load: LoadKind::Electronic,
        zip_p: LoadKind::Electronic.default_zip_p(),
        zip_q: LoadKind::Electronic.default_zip_q(),
        nominal_v: wiring.nominal_v(home.supply, home.voltage_v),
        rated_v: None,
        harmonics: vec![],
    }
}

fn state(home: &Home, wiring: Wiring, name: &str, p_w: f64) -> State {
    State {
        name: name.into(),
        draws: vec![inverter_draw(home, wiring, p_w)],
        inrush: None,
    }
}

/// The inverter's wiring: as written, or the usual one for the supply (a
/// 240 V inverter across L1-L2 in North America, three-phase in Europe).
fn inverter_wiring(ctx: &Reader, t: &TableReader, home: &Home) -> Result<Wiring, Error> {
    match t.opt("wiring") {
        Some(n) => parse_wiring(ctx, n, &t.path_of("wiring"), home.supply),
        None => Ok(match home.supply {
            SupplyKind::SplitPhase => Wiring::LineLine(0, 1),
            SupplyKind::ThreePhase => Wiring::ThreePhase,
            SupplyKind::SinglePhase => Wiring::LineNeutral(0),
        }),
    }
}

fn id_of(ctx: &Reader, t: &TableReader, default: &str) -> Result<String, Error> {
    match t.opt("id") {
        Some(n) => {
            let id = ctx.string(n, &t.path_of("id"))?.to_string();
            check_id(ctx, n, &t.path_of("id"), &id)?;
            Ok(id)
        }
        None => Ok(default.into()),
    }
}

fn angle_or(t: &TableReader, key: &'static str, default: f64) -> Result<f64, Error> {
    Ok(t.non_negative(key, QuantityKind::Angle)?.unwrap_or(default))
}

/// A plain number within `lo ..= hi`, or the default.
fn number_within(
    ctx: &Reader,
    t: &TableReader,
    key: &'static str,
    (lo, hi): (f64, f64),
    default: f64,
) -> Result<f64, Error> {
    let Some(n) = t.opt(key) else {
        return Ok(default);
    };
    let v = ctx.number(n, &t.path_of(key))?;
    if !(lo..=hi).contains(&v) {
        return Err(ctx.err(
            n,
            &t.path_of(key),
            format!("{v} is outside {lo} … {hi}"),
            format!("write a number from {lo} to {hi}"),
        ));
    }
    Ok(v)
}

fn choice<'a>(
    ctx: &Reader,
    t: &TableReader,
    key: &'static str,
    options: &[&'a str],
) -> Result<Option<&'a str>, Error> {
    let Some(n) = t.opt(key) else {
        return Ok(None);
    };
    let v = ctx.string(n, &t.path_of(key))?;
    options
        .iter()
        .find(|o| **o == v)
        .map(|o| Some(*o))
        .ok_or_else(|| {
            ctx.err(
                n,
                &t.path_of(key),
                format!("unknown {key} \"{v}\""),
                format!("write one of: {}", options.join(", ")),
            )
        })
}

/// `losses`: the share of the array's output lost before the inverter
/// (PVWatts' default when not given); all of it is refused.
fn decode_losses(ctx: &Reader, t: &TableReader, node: &Node) -> Result<f64, Error> {
    match t.non_negative("losses", QuantityKind::Fraction)? {
        Some(x) if x >= 1.0 => Err(ctx.err(
            t.opt("losses").unwrap_or(node),
            "pv.losses",
            "the losses take every watt",
            "write a share under 100 %, e.g. \"14 %\"",
        )),
        Some(x) => Ok(x),
        None => Ok(pvwatts::DEFAULT_LOSSES),
    }
}

/// The warning for a single-phase inverter above the usual per-phase limit
/// on a three-phase supply.
fn single_phase_warning(home: &Home, wiring: Wiring, ac_w: f64) -> Option<String> {
    (home.supply == SupplyKind::ThreePhase
        && !wiring.is_line_to_line()
        && wiring != Wiring::ThreePhase
        && ac_w > SINGLE_PHASE_LIMIT_VA)
        .then(|| format!(
            "pv: a single-phase inverter of {:.1} kW on a three-phase supply is above the usual limit of 4.6 kVA per phase (VDE-AR-N 4105; grid codes elsewhere are similar): such arrays are connected three-phase (wiring = \"3P\")",
            ac_w / 1000.0
        ))
}

/// `[pv]`: the array, its inverter and where it is wired.
pub fn decode_pv(
    ctx: &Reader,
    node: &Node,
    home: &Home,
) -> Result<(Appliance, Vec<String>), Error> {
    let t = TableReader::rebase(ctx.table(node, "pv")?, "pv".into());
    let site = home.site.ok_or_else(|| {
        ctx.err(
            node,
            "pv",
            "a PV array needs to know where the home stands",
            "add `latitude` and `longitude` (degrees, north and east positive) to [home]",
        )
    })?;
    let id = id_of(ctx, &t, "pv")?;
    let label = t.string("label")?.unwrap_or("Rooftop PV").to_string();
    let (dc_w, ac_w) = required_pair(
        ctx,
        node,
        &t,
        "pv",
        [
            ("dc", QuantityKind::Power),
            ("inverter", QuantityKind::Power),
        ],
        "a PV system needs its array's DC nameplate and its inverter's AC rating",
        "write e.g. dc = \"7.2 kW\" and inverter = \"6 kW\"",
    )?;
    let wiring = inverter_wiring(ctx, &t, home)?;
    let gamma = match choice(ctx, &t, "module", &["standard", "premium", "thin-film"])? {
        Some(m) => MODULES.iter().find(|(n, _)| *n == m).map_or(0.0, |x| x.1),
        None => pvwatts::STANDARD_GAMMA,
    };
    let mount = choice(ctx, &t, "mount", &["roof", "rack"])?.unwrap_or("roof");
    // Facing the equator by default, at PVWatts' default 20° tilt and 0.2
    // albedo (from memory).
    let facing = if site.latitude_deg >= 0.0 { 180.0 } else { 0.0 };
    let pv = Pv {
        site,
        sky: home.sky,
        dc_w,
        ac_w,
        tilt_deg: number_or_angle_tilt(ctx, &t)?,
        azimuth_deg: angle_or(&t, "azimuth", facing)?,
        albedo: number_within(ctx, &t, "albedo", (0.0, 1.0), 0.2)?,
        losses: decode_losses(ctx, &t, node)?,
        gamma,
        mount: mount.into(),
        air_c: AIR_C,
        wind_m_s: WIND_M_S,
    };
    t.finish()?;
    let warnings = single_phase_warning(home, wiring, ac_w)
        .into_iter()
        .collect();
    let app = Appliance {
        id,
        label,
        template: None,
        end_use: "other".into(),
        wiring,
        states: vec![
            state(home, wiring, "off", 0.0),
            state(home, wiring, "producing", -ac_w),
        ],
        behaviour: Behaviour::Sun(pv),
        on_threshold_w: 0.0,
        role: Role::Generator,
        alternatives: vec![],
        when_dark_s: None,
    };
    Ok((app, warnings))
}

/// Tilt from horizontal, 0 … 90°, default 20°.
fn number_or_angle_tilt(ctx: &Reader, t: &TableReader) -> Result<f64, Error> {
    let tilt = angle_or(t, "tilt", 20.0)?;
    if tilt > 90.0 {
        return Err(ctx.err(
            t.opt("tilt").expect("read above"),
            &t.path_of("tilt"),
            format!("a tilt of {tilt}° faces the ground"),
            "write a tilt from \"0 deg\" (flat) to \"90 deg\" (a wall)",
        ));
    }
    Ok(tilt)
}

/// The two positive quantities a section cannot do without (`keys`, each
/// with its kind), read from `t`, the table of section `name` at `node`;
/// without either, the error `what` with the fix `help`, at the section.
fn required_pair(
    ctx: &Reader,
    node: &Node,
    t: &TableReader,
    name: &str,
    keys: [(&'static str, QuantityKind); 2],
    what: &str,
    help: &str,
) -> Result<(f64, f64), Error> {
    let first = t.positive(keys[0].0, keys[0].1)?;
    let second = t.positive(keys[1].0, keys[1].1)?;
    match (first, second) {
        (Some(a), Some(b)) => Ok((a, b)),
        _ => Err(ctx.err(node, name, what, help)),
    }
}

/// `[battery]`: capacity, power limit, efficiency, and where it is wired.
pub fn decode_battery(ctx: &Reader, node: &Node, home: &Home) -> Result<Appliance, Error> {
    let t = TableReader::rebase(ctx.table(node, "battery")?, "battery".into());
    let id = id_of(ctx, &t, "battery")?;
    let label = t.string("label")?.unwrap_or("Home battery").to_string();
    let (capacity_j, power_w) = required_pair(
        ctx,
        node,
        &t,
        "battery",
        [
            ("capacity", QuantityKind::Energy),
            ("power", QuantityKind::Power),
        ],
        "a battery needs its usable capacity and its power limit",
        "write e.g. capacity = \"13.5 kWh\" and power = \"5 kW\"",
    )?;
    let share = |key: &'static str, default: f64| -> Result<f64, Error> {
        match t.non_negative(key, QuantityKind::Fraction)? {
            Some(x) if x > 1.0 => Err(ctx.err(
                t.opt(key).unwrap_or(node),
                &t.path_of(key),
                format!("{} % is more than all of it", x * 100.0),
                "write a share from 0 to 100 %",
            )),
            Some(x) => Ok(x),
            None => Ok(default),
        }
    };
    // A lithium-ion home battery: about 90 % round trip (common practice,
    // no source); a 10 % reserve kept for outages (common practice).
    let efficiency = share("efficiency", 0.9)?;
    if efficiency == 0.0 {
        return Err(ctx.err(
            t.opt("efficiency").unwrap_or(node),
            "battery.efficiency",
            "a battery with no round-trip efficiency gives nothing back",
            "write e.g. efficiency = \"90 %\"",
        ));
    }
    let reserve = share("reserve", 0.1)?;
    let initial = share("initial", reserve)?.max(reserve);
    let response_s = t
        .non_negative("response", QuantityKind::Duration)?
        .unwrap_or(2.0);
    let wiring = inverter_wiring(ctx, &t, home)?;
    t.finish()?;
    Ok(Appliance {
        id,
        label,
        template: None,
        end_use: "other".into(),
        wiring,
        states: vec![
            state(home, wiring, "idle", 0.0),
            state(home, wiring, "charging", power_w),
            state(home, wiring, "discharging", -power_w),
        ],
        behaviour: Behaviour::Storage(Battery {
            capacity_j,
            power_w,
            efficiency,
            reserve,
            initial,
            response_s,
        }),
        on_threshold_w: 0.0,
        role: Role::Storage,
        alternatives: vec![],
        when_dark_s: None,
    })
}
