//! What a declaration may say beyond the scenario language: short
//! appliance entries, as installers write them (`id`, `power`, `wiring`;
//! optionally `pf` or `q`, `rated`, `load`, `label`; or `states`, a list
//! of powers, for an appliance with several levels), and a `[declaration]`
//! table (`partial = true`: only some appliances are listed).
//!
//! Both are read here and blanked out of the text (every byte but line ends
//! becomes a space) before the rest goes to the scenario reader, so every
//! position in its errors stays the file's own.

use crate::scenario::{Error, LoadKind};
use crate::units::{parse_quantity, QuantityKind};
use solver_check::audit::decl::{DeclAppliance, DeclDraw, Steps, Supply};
use solver_check::contract::{Wiring, C64};
use std::ops::Range;
use std::path::Path;

/// Keys a short entry may carry.
const SHORT_KEYS: [&str; 9] = [
    "id", "label", "power", "states", "pf", "q", "wiring", "rated", "load",
];
/// Keys a state of a short entry may carry.
const STATE_KEYS: [&str; 4] = ["power", "pf", "q", "name"];
/// Keys that make an appliance a full scenario entry (whose `states` are
/// the scenario language's).
const FULL_KEYS: [&str; 3] = ["template", "behaviour", "phases"];
/// The id of the appliance put in when every entry is short (the scenario
/// reader wants one); dropped again after reading.
pub const PLACEHOLDER: &str = "short_entries_only_placeholder";

/// One short entry: an appliance that is off or on at `power`, or at one
/// of the powers of `states`.
pub struct Short {
    id: String,
    label: String,
    /// Each "on" state's power, W + j var, at the rated voltage.
    on: Vec<C64>,
    wiring: Wiring,
    rated_v: Option<f64>,
    load: LoadKind,
}

/// A declaration's text with short entries and `[declaration]` blanked out,
/// and what they said.
pub struct Prepared {
    /// The text for the scenario reader (short entries and `[declaration]` blanked).
    pub text: String,
    /// The short entries, in the order written.
    pub shorts: Vec<Short>,
    /// `[declaration] partial = true`: only some of the home's appliances are listed.
    pub partial: bool,
}

impl Short {
    /// The appliance in the audit's terms on `supply`: off, or on at one
    /// of its powers (rescaled by its load kind's ZIP model from `rated`),
    /// switching between any two of these.
    pub fn appliance(&self, supply: &Supply) -> DeclAppliance {
        let (zp, zq) = (self.load.default_zip_p(), self.load.default_zip_q());
        let u = self
            .rated_v
            .map(|r| supply.nominal_across(self.wiring) / r)
            .unwrap_or(1.0);
        let draw = |s: &C64| DeclDraw {
            wiring: self.wiring,
            s: C64::new(s.re * zp.factor(u), s.im * zq.factor(u)),
            zip_p: zp,
            zip_q: zq,
            rated_v: self.rated_v,
        };
        let states: Vec<Vec<DeclDraw>> = std::iter::once(vec![])
            .chain(self.on.iter().map(|s| vec![draw(s)]))
            .collect();
        let n = states.len();
        let jumps = (0..n)
            .flat_map(|a| {
                (0..n)
                    .filter(move |&b| b != a)
                    .map(move |b| (a, b, 1.0, 1.0))
            })
            .collect();
        DeclAppliance {
            id: self.id.clone(),
            label: self.label.clone(),
            states,
            steps: Steps::Jumps(jumps),
            // A short entry gives no habit: how often it runs is not declared.
            habit: None,
        }
    }
}

/// An error at byte range `span` of `text`, in the scenario reader's form.
fn err_at(
    path: &Path,
    text: &str,
    span: Range<usize>,
    key: &str,
    message: String,
    help: &str,
) -> Error {
    let mut e = Error::file(path, message, help);
    let start = span.start.min(text.len());
    let line_start = text[..start].rfind('\n').map(|i| i + 1).unwrap_or(0);
    let line_end = text[start..]
        .find('\n')
        .map(|i| start + i)
        .unwrap_or(text.len());
    e.line = text[..start].matches('\n').count() + 1;
    e.column = text[line_start..start].chars().count() + 1;
    e.path = key.to_string();
    e.excerpt = text[line_start..line_end].trim_end().to_string();
    let end = span.end.clamp(start, line_end);
    e.underline = (e.column, text[start..end].chars().count().max(1));
    e
}

/// Every table header's start, in order (the end of the table before it).
fn header_starts(t: &toml_edit::Table, out: &mut Vec<usize>) {
    for (_, item) in t.iter() {
        match item {
            toml_edit::Item::Table(s) => {
                out.extend(s.span().map(|r| r.start));
                header_starts(s, out);
            }
            toml_edit::Item::ArrayOfTables(a) => {
                for s in a.iter() {
                    out.extend(s.span().map(|r| r.start));
                    header_starts(s, out);
                }
            }
            _ => {}
        }
    }
}

/// Blanks `text` from a table's header to the next header.
fn blank(text: &mut [u8], start: usize, starts: &[usize]) {
    let end = starts
        .iter()
        .copied()
        .find(|&s| s > start)
        .unwrap_or(text.len());
    for b in &mut text[start..end] {
        if *b != b'\n' {
            *b = b' ';
        }
    }
}

/// Reads short entries and `[declaration]`, and blanks them out of `text`.
/// A text that is not TOML goes through untouched (the scenario reader
/// reports where).
pub fn prepare(path: &Path, text: String) -> Result<Prepared, Error> {
    let Ok(doc) = toml_edit::ImDocument::parse(text.clone()) else {
        return Ok(Prepared {
            text,
            shorts: vec![],
            partial: false,
        });
    };
    let mut starts = Vec::new();
    header_starts(doc.as_table(), &mut starts);
    starts.sort_unstable();
    let lines = match doc
        .get("home")
        .and_then(|h| h.get("supply"))
        .and_then(|s| s.as_str())
    {
        Some("three-phase") => 3,
        Some("single-phase") => 1,
        _ => 2,
    };
    let mut bytes = text.clone().into_bytes();
    let mut partial = false;
    if let Some(t) = doc.get("declaration").and_then(|i| i.as_table()) {
        partial = read_declaration(path, &text, t)?;
        blank(&mut bytes, t.span().map(|r| r.start).unwrap_or(0), &starts);
    }
    let mut shorts = Vec::new();
    let mut full = 0;
    if let Some(apps) = doc.get("appliance").and_then(|i| i.as_array_of_tables()) {
        for (k, t) in apps.iter().enumerate() {
            if FULL_KEYS.iter().any(|f| t.contains_key(f))
                || !(t.contains_key("power") || t.contains_key("states"))
            {
                full += 1;
                continue;
            }
            shorts.push(read_short(path, &text, t, k, lines)?);
            blank(&mut bytes, t.span().map(|r| r.start).unwrap_or(0), &starts);
        }
    }
    let mut text = String::from_utf8(bytes).unwrap_or(text);
    // No full entry (only short ones, or none: a declaration of the supply
    // and metering alone): the scenario reader still wants an appliance.
    let appliances_ok = doc
        .get("appliance")
        .is_none_or(|i| i.as_array_of_tables().is_some());
    if full == 0 && appliances_ok {
        text += &format!(
            "\n[[appliance]]\nid = \"{PLACEHOLDER}\"\nwiring = \"L1-N\"\nbehaviour = \"steady\"\nstates = [ {{ power = \"1 W\" }} ]\n"
        );
    }
    Ok(Prepared {
        text,
        shorts,
        partial,
    })
}

/// `[declaration]`: `partial = true | false`.
fn read_declaration(path: &Path, text: &str, t: &toml_edit::Table) -> Result<bool, Error> {
    let mut partial = false;
    for (k, item) in t.iter() {
        let span = item.span().unwrap_or(0..0);
        match (k, item.as_bool()) {
            ("partial", Some(b)) => partial = b,
            ("partial", None) => {
                return Err(err_at(
                    path,
                    text,
                    span,
                    "declaration.partial",
                    "`partial` is not true or false".into(),
                    "write partial = true when the declaration lists only some appliances",
                ));
            }
            _ => {
                return Err(err_at(
                    path,
                    text,
                    span,
                    &format!("declaration.{k}"),
                    format!("unknown key `{k}` in [declaration]"),
                    "[declaration] takes only partial = true | false",
                ));
            }
        }
    }
    Ok(partial)
}

/// A string value of a short entry, with its span.
fn string<'a>(
    path: &Path,
    text: &str,
    t: &'a dyn toml_edit::TableLike,
    key: &str,
    at: &str,
) -> Result<Option<(&'a str, Range<usize>)>, Error> {
    let Some(item) = t.get(key) else {
        return Ok(None);
    };
    let span = item.span().unwrap_or(0..0);
    match item.as_str() {
        Some(s) => Ok(Some((s, span))),
        None => Err(err_at(
            path,
            text,
            span,
            &format!("{at}.{key}"),
            format!("`{key}` is not a string"),
            "write it in quotes, e.g. power = \"1.5 kW\"",
        )),
    }
}

/// A quantity of a short entry (`power`, `q`, `rated`).
fn quantity(
    path: &Path,
    text: &str,
    t: &dyn toml_edit::TableLike,
    key: &str,
    at: &str,
    kind: QuantityKind,
) -> Result<Option<f64>, Error> {
    let Some((s, span)) = string(path, text, t, key, at)? else {
        return Ok(None);
    };
    parse_quantity(s, kind).map(Some).map_err(|m| {
        err_at(
            path,
            text,
            span,
            &format!("{at}.{key}"),
            m,
            "write a quantity with its unit, e.g. \"1.5 kW\", \"240 V\"",
        )
    })
}

/// One short entry, appliance number `k` of the file.
fn read_short(
    path: &Path,
    text: &str,
    t: &toml_edit::Table,
    k: usize,
    lines: usize,
) -> Result<Short, Error> {
    let at = format!("appliance[{k}]");
    for (key, item) in t.iter() {
        if !SHORT_KEYS.contains(&key) {
            return Err(err_at(path, text, item.span().unwrap_or(0..0), &format!("{at}.{key}"), format!("`{key}` in a short entry"), "a short entry takes id, power (or states, a list of powers), wiring and optionally pf or q, rated, load, label; for a behaviour write a full entry (with behaviour = ... or template = ...)"));
        }
    }
    let head = t.span().unwrap_or(0..0);
    let id = string(path, text, t, "id", &at)?
        .map(|s| s.0.to_string())
        .ok_or_else(|| {
            err_at(
                path,
                text,
                head.clone(),
                &at,
                "a short entry without `id`".into(),
                "add id = \"kettle\"",
            )
        })?;
    let on = powers(path, text, t, &at)?;
    let rated_v = quantity(path, text, t, "rated", &at, QuantityKind::Voltage)?;
    let (ws, wspan) = string(path, text, t, "wiring", &at)?.ok_or_else(|| {
        err_at(
            path,
            text,
            head.clone(),
            &at,
            format!("short entry `{id}` without `wiring`"),
            "add wiring = \"L1-N\" (or L2-N, L1-L2, 3P ...)",
        )
    })?;
    let wiring = Wiring::parse(ws, lines).map_err(|_| {
        err_at(
            path,
            text,
            wspan,
            &format!("{at}.wiring"),
            format!("\"{ws}\" is not a connection of this supply"),
            "write L1-N, L2-N, L1-L2 (and L3-N, L2-L3, L3-L1, 3P on a three-phase supply)",
        )
    })?;
    let load = match string(path, text, t, "load", &at)? {
        None => LoadKind::Resistive,
        Some((s, span)) => LoadKind::ALL
            .iter()
            .find(|(n, _)| *n == s)
            .map(|(_, l)| *l)
            .ok_or_else(|| {
                err_at(
                    path,
                    text,
                    span,
                    &format!("{at}.load"),
                    format!("\"{s}\" is not a load kind"),
                    "write resistive, motor, electronic or lighting",
                )
            })?,
    };
    let label = string(path, text, t, "label", &at)?
        .map(|s| s.0.to_string())
        .unwrap_or_else(|| id.clone());
    Ok(Short {
        id,
        label,
        on,
        wiring,
        rated_v,
        load,
    })
}

/// The reactive power of `p_w` from a `pf` or `q` key of `t` (none: 0).
fn reactive(
    path: &Path,
    text: &str,
    t: &dyn toml_edit::TableLike,
    at: &str,
    p_w: f64,
) -> Result<Option<f64>, Error> {
    let q = quantity(path, text, t, "q", at, QuantityKind::Reactive)?;
    let Some(item) = t.get("pf") else {
        return Ok(q);
    };
    let pf = item
        .as_float()
        .or(item.as_integer().map(|i| i as f64))
        .filter(|pf| *pf > 0.0 && *pf <= 1.0);
    let pf = pf.ok_or_else(|| {
        err_at(
            path,
            text,
            item.span().unwrap_or(0..0),
            &format!("{at}.pf"),
            "a power factor must be a number in (0, 1]".into(),
            "write pf = 0.85 (lagging)",
        )
    })?;
    Ok(Some(p_w * (1.0 - pf * pf).sqrt() / pf))
}

/// A short entry's "on" powers: `power`, or each of `states` (a power
/// such as "1.2 kW", or { power, pf or q }); an entry's own `pf` or `q`
/// applies to the states that give none.
fn powers(path: &Path, text: &str, t: &toml_edit::Table, at: &str) -> Result<Vec<C64>, Error> {
    let Some(item) = t.get("states") else {
        let p = quantity(path, text, t, "power", at, QuantityKind::Power)?.unwrap_or(0.0);
        let q = reactive(path, text, t, at, p)?.unwrap_or(0.0);
        return Ok(vec![C64::new(p, q)]);
    };
    let span = item.span().unwrap_or(0..0);
    let bad = |span, m: &str| {
        err_at(path, text, span, &format!("{at}.states"), m.into(), "write states = [\"1.2 kW\", \"2.4 kW\"] or states = [ { power = \"1.2 kW\", pf = 0.9 }, ... ]")
    };
    if t.contains_key("power") {
        return Err(bad(
            span,
            "a short entry gives `power` or `states`, not both",
        ));
    }
    let list = item.as_array().filter(|a| !a.is_empty());
    let list = list.ok_or_else(|| bad(span.clone(), "`states` is not a list of powers"))?;
    let mut on = Vec::new();
    for (k, v) in list.iter().enumerate() {
        let here = format!("{at}.states[{k}]");
        let vspan = v.span().unwrap_or(span.clone());
        let s = match (v.as_str(), v.as_inline_table()) {
            (Some(p), _) => {
                let p = parse_quantity(p, QuantityKind::Power).map_err(|m| bad(vspan, &m))?;
                C64::new(p, reactive(path, text, t, at, p)?.unwrap_or(0.0))
            }
            (None, Some(it)) => {
                if let Some((key, x)) = it.iter().find(|(key, _)| !STATE_KEYS.contains(key)) {
                    let m = format!(
                        "`{key}` in a state of a short entry (it takes power, pf or q, name)"
                    );
                    return Err(bad(x.span().unwrap_or(vspan), &m));
                }
                let p = quantity(path, text, it, "power", &here, QuantityKind::Power)?;
                let p = p.ok_or_else(|| bad(vspan, "a state without `power`"))?;
                let q = match reactive(path, text, it, &here, p)? {
                    Some(q) => q,
                    None => reactive(path, text, t, at, p)?.unwrap_or(0.0),
                };
                C64::new(p, q)
            }
            _ => return Err(bad(vspan, "a state is not a power or { power = ... }")),
        };
        on.push(s);
    }
    Ok(on)
}
