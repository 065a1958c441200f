//! Value rules of the scenario language that several section readers share
//! (appliances, `[pv]`, `[battery]`, thermostats, fleets): ids, wirings,
//! hours of the day, and the voltage limits of a draw's rating.

use super::model::SupplyKind;
use super::reader::Reader;
use super::source::{Error, Node, Val};
use solver_check::contract::{line_label, Wiring, WiringError};

/// Ids that name a column of their own in the truth table (`time`,
/// `unmetered_p_w`) or of the meters (`total_p_w`).
const RESERVED_IDS: [&str; 3] = ["unmetered", "total", "time"];

/// Endings of truth columns that name a conductor (`dryer_l1_p_w`): an id
/// ending so would make two columns read alike.
const CONDUCTOR_ENDINGS: [&str; 4] = ["_l1", "_l2", "_l3", "_n"];

/// The longest id or state name, in characters.
pub const MAX_NAME_CHARS: usize = 64;

/// A draw's rated voltage (line to neutral or line to line), V.
pub const RATED_V: (f64, f64) = (50.0, 2000.0);

/// How far a template's rated voltage may lie from its connection before
/// `validate` says so: 10 % (the usual tolerance band of a supply, ANSI
/// C84.1 and IEC 60038 give ±5 % and ±10 %; common practice).
pub const RATED_MISMATCH: f64 = 0.10;

/// Checks an appliance id: a lower-case name of at most [`MAX_NAME_CHARS`]
/// characters that no truth or meter column of its own would read alike.
pub(crate) fn check_id(ctx: &Reader, node: &Node, path: &str, id: &str) -> Result<(), Error> {
    let ok = id.chars().next().is_some_and(|c| c.is_ascii_lowercase())
        && id
            .chars()
            .all(|c| c.is_ascii_lowercase() || c.is_ascii_digit() || c == '_');
    if !ok {
        return Err(ctx.err(node, path, format!("\"{id}\" is not a valid id"), "ids start with a lower-case letter and hold only a-z, 0-9 and _ (e.g. \"water_heater\")"));
    }
    if id.len() > MAX_NAME_CHARS {
        return Err(ctx.err(
            node,
            path,
            format!(
                "an id has at most {MAX_NAME_CHARS} characters, this one {}",
                id.len()
            ),
            "choose a shorter id such as \"water_heater\"",
        ));
    }
    if RESERVED_IDS.contains(&id) {
        return Err(ctx.err(
            node,
            path,
            format!("\"{id}\" is reserved: the truth table has a column `{id}` or `{id}_p_w` of its own"),
            "choose another id, e.g. \"{id}_load\"",
        ));
    }
    if let Some(end) = CONDUCTOR_ENDINGS.iter().find(|e| id.ends_with(*e)) {
        let stem = &id[..id.len() - end.len()];
        return Err(ctx.err(
            node,
            path,
            format!("\"{id}\" ends like a conductor ({end}): its truth column {id}_p_w would read as appliance \"{stem}\"'s share on {}", end[1..].to_uppercase()),
            format!("choose an id that does not end in _l1, _l2, _l3 or _n, e.g. \"{stem}_{}\"", if end == &"_n" { "neutral".to_string() } else { format!("leg{}", &end[2..]) }),
        ));
    }
    Ok(())
}

/// Parses a wiring such as `L1-N`, `L2-L3` or `3P` and checks the supply has it.
pub fn parse_wiring(
    ctx: &Reader,
    node: &Node,
    path: &str,
    supply: SupplyKind,
) -> Result<Wiring, Error> {
    let text = ctx.string(node, path)?;
    let n = supply.lines();
    let accepted = accepted_wirings(supply);
    let bad = |msg: String| {
        ctx.err(
            node,
            path,
            msg,
            format!(
                "a {} supply accepts: {}",
                supply.name(),
                accepted.join(", ")
            ),
        )
    };
    Wiring::parse(text, n).map_err(|e| {
        bad(match e {
            WiringError::NotThreePhase => format!(
                "\"3P\" needs a three-phase supply; this home is {}",
                supply.name()
            ),
            WiringError::NotAWiring => format!("\"{text}\" is not a wiring"),
            WiringError::SelfConnection => format!("\"{text}\" connects a terminal to itself"),
            WiringError::NoSuchLine(x) => format!(
                "{} does not exist on a {} supply",
                line_label(x),
                supply.name()
            ),
        })
    })
}

/// The wirings a supply has, as the scenario writes them.
fn accepted_wirings(supply: SupplyKind) -> Vec<&'static str> {
    match supply {
        SupplyKind::SinglePhase => vec!["L1-N"],
        SupplyKind::SplitPhase => vec!["L1-N", "L2-N", "L1-L2"],
        SupplyKind::ThreePhase => vec!["L1-N", "L2-N", "L3-N", "L1-L2", "L2-L3", "L3-L1", "3P"],
    }
}

/// Hours of the day a habit uses: ranges (`"6-9,17-22"`, one that wraps
/// past midnight allowed) or 24 weights, normalised to sum 1.
pub(crate) fn parse_hours(ctx: &Reader, node: &Node, path: &str) -> Result<Vec<f64>, Error> {
    let help = "write hours = \"17-22\" (local hours 17:00 to 22:00), \"6-9,17-22\", or 24 weights [w0, …, w23]";
    let mut w = [0.0; 24];
    match &node.v {
        Val::Str(s) => {
            for part in s.split(',') {
                let (a, b) = part.trim().split_once('-').ok_or_else(|| {
                    ctx.err(node, path, format!("\"{part}\" is not an hour range"), help)
                })?;
                let a: usize = a
                    .trim()
                    .parse()
                    .map_err(|_| ctx.err(node, path, format!("\"{a}\" is not an hour"), help))?;
                let b: usize = b
                    .trim()
                    .parse()
                    .map_err(|_| ctx.err(node, path, format!("\"{b}\" is not an hour"), help))?;
                if a > 23 || b > 24 || a == b {
                    return Err(ctx.err(
                        node,
                        path,
                        format!("\"{part}\" is not a range of hours within 0 … 24"),
                        help,
                    ));
                }
                // A range that wraps past midnight ("22-6") is allowed.
                let len = if b > a { b - a } else { b + 24 - a };
                for k in 0..len {
                    w[(a + k) % 24] = 1.0;
                }
            }
        }
        Val::Arr(list) => {
            if list.len() != 24 {
                return Err(ctx.err(
                    node,
                    path,
                    format!("{} weights given, 24 needed", list.len()),
                    help,
                ));
            }
            for (i, n) in list.iter().enumerate() {
                let x = ctx.number(n, &format!("{path}[{i}]"))?;
                if x < 0.0 {
                    return Err(ctx.err(
                        n,
                        &format!("{path}[{i}]"),
                        "a weight cannot be negative",
                        help,
                    ));
                }
                w[i] = x;
            }
        }
        _ => {
            return Err(ctx.err(
                node,
                path,
                format!(
                    "expected an hour range or 24 weights, found {}",
                    node.type_name()
                ),
                help,
            ))
        }
    }
    let sum: f64 = w.iter().sum();
    if sum <= 0.0 {
        return Err(ctx.err(node, path, "no hour has any weight", help));
    }
    Ok(w.iter().map(|x| x / sum).collect())
}
