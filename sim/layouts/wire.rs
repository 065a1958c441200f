//! Wiring strings as the scenario language writes them, and the walks that
//! rewrite them inside one appliance's table.

use super::doc::{node, text, NodeExt};
use crate::scenario::source::{Node, Val};
use crate::scenario::{Wiring, WiringKind};
use crate::units::{parse_quantity, QuantityKind};

/// The wiring a table states, if any. Read as on a three-line supply (the
/// most lines a supply has): the ladder reads texts the scenario reader
/// has accepted for the home's own supply and texts it has itself just
/// rewritten for another supply.
pub fn stated(n: &Node) -> Option<Wiring> {
    n.get("wiring").and_then(Node::as_str).and_then(read)
}

/// A wiring's text read as [`stated`] reads it.
fn read(text: &str) -> Option<Wiring> {
    Wiring::parse(text, 3).ok()
}

/// Rewrites every `wiring` string inside an appliance's table with the
/// text `f` gives for the wiring it states.
pub fn map_wiring(n: &mut Node, f: &dyn Fn(Wiring) -> String) {
    match &mut n.v {
        Val::Table(entries) => {
            for e in entries.iter_mut() {
                if e.key == "wiring" {
                    if let Some(w) = e.node.as_str().and_then(read) {
                        e.node = text(&f(w));
                    }
                } else {
                    map_wiring(&mut e.node, f);
                }
            }
        }
        Val::Arr(items) => items.iter_mut().for_each(|i| map_wiring(i, f)),
        _ => {}
    }
}

/// Calls `f` on every draw of an appliance (a table with `power`) with the
/// wiring it inherits or states.
pub fn each_draw(n: &mut Node, inherited: Option<Wiring>, f: &mut dyn FnMut(&mut Node, Wiring)) {
    let own = stated(n).or(inherited);
    if n.get("power").is_some() {
        if let Some(w) = own {
            f(n, w);
        }
    }
    match &mut n.v {
        Val::Table(entries) => entries
            .iter_mut()
            .filter(|e| matches!(e.node.v, Val::Table(_) | Val::Arr(_)))
            .for_each(|e| each_draw(&mut e.node, own, f)),
        Val::Arr(items) => items.iter_mut().for_each(|i| each_draw(i, own, f)),
        _ => {}
    }
}

/// Keys a draw may carry (the rest of a state's keys stay with the state).
const DRAW_KEYS: [&str; 9] = [
    "power",
    "pf",
    "q",
    "wiring",
    "load",
    "zip",
    "zip_q",
    "rated",
    "harmonics",
];

/// Replaces every draw of an appliance with the draws `split` makes of it:
/// (wiring, share of its power). A draw written in a state becomes that
/// state's `draws` list.
pub fn split_draws(app: &mut Node, split: &dyn Fn(Wiring) -> Vec<(Wiring, f64)>) {
    let Some(top) = stated(app) else { return };
    for key in ["states", "phases"] {
        let Some(Val::Arr(states)) = app.get_mut(key).map(|n| &mut n.v) else {
            continue;
        };
        for st in states.iter_mut() {
            split_state(st, top, split);
        }
    }
    if let Some(extra) = app.get_mut("extra") {
        split_state(extra, top, split);
    }
    if let Some(w) = split(top).first() {
        app.set("wiring", text(&w.0.name()));
    }
}

fn split_state(st: &mut Node, inherited: Wiring, split: &dyn Fn(Wiring) -> Vec<(Wiring, f64)>) {
    let own = stated(st).unwrap_or(inherited);
    let old: Vec<Node> = if st.get("power").is_some() {
        let mut d = node(Val::Table(vec![]));
        for k in DRAW_KEYS {
            if let Some(v) = st.get(k).cloned() {
                d.set(k, v);
            }
            st.remove(k);
        }
        vec![d]
    } else if let Some(Val::Arr(ds)) = st.get("draws").map(|n| n.v.clone()) {
        ds
    } else {
        return;
    };
    let mut new = Vec::new();
    for d in old {
        let w = stated(&d).unwrap_or(own);
        for (to, share) in split(w) {
            let mut c = d.clone();
            c.set("wiring", text(&to.name()));
            if WiringKind::of(to) != WiringKind::of(w) {
                // Another connection is another model, rated for it.
                c.remove("rated");
            }
            scale_key(&mut c, "power", QuantityKind::Power, "W", share);
            scale_key(&mut c, "q", QuantityKind::Reactive, "var", share);
            new.push(c);
        }
    }
    st.remove("wiring");
    st.set("draws", node(Val::Arr(new)));
}

/// Multiplies a quantity written as text by `k`, writing it in SI units.
pub fn scale_key(n: &mut Node, key: &str, kind: QuantityKind, unit: &str, k: f64) {
    if k == 1.0 {
        return;
    }
    if let Some(v) = n.get(key).and_then(Node::as_str) {
        if let Ok(x) = parse_quantity(v, kind) {
            n.set(key, text(&format!("{} {unit}", tidy(x * k))));
        }
    }
}

/// A number with at most six decimals, trailing zeros dropped (what a
/// person would write; the file, not this value, is what gets simulated).
pub fn tidy(x: f64) -> String {
    let t = format!("{x:.6}");
    let t = t.trim_end_matches('0').trim_end_matches('.');
    if t == "-0" {
        "0".into()
    } else {
        t.to_string()
    }
}

/// A duration as the command line takes it: whole days, hours or seconds.
pub fn duration(s: f64) -> String {
    if s > 0.0 && s % 86400.0 == 0.0 {
        format!("{}d", s / 86400.0)
    } else if s > 0.0 && s % 3600.0 == 0.0 {
        format!("{}h", s / 3600.0)
    } else {
        format!("{}s", tidy(s))
    }
}

/// A quantity written as text, in SI units.
pub fn quantity(n: &Node, key: &str, kind: QuantityKind) -> Option<f64> {
    n.get(key)
        .and_then(Node::as_str)
        .and_then(|v| parse_quantity(v, kind).ok())
}
