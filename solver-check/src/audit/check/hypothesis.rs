//! What a declaration could be instead of what it says: a metering (how
//! each channel reads the conductors; the declared one is one of them) and
//! the other wirings of an appliance. Shared by the stages and the
//! matching of steps, beneath all of them.

use crate::audit::decl::{DeclAppliance, Declared};
use crate::contract::{Wiring, C64};

/// How one channel reads: the conductor, the sign, and whether the power
/// is turned by the angle between the channel's voltage and that conductor's.
#[derive(Clone, Copy, Debug, PartialEq)]
pub struct ChanMap {
    /// The conductor (line index) whose current the channel's CT reads.
    pub src: usize,
    /// The sign it reads with: 1, or −1 for a CT clamped the wrong way round.
    pub k: f64,
    /// Whether the power is turned by the angle between the channel's
    /// voltage and that conductor's (a CT on another line's conductor).
    pub turned: bool,
}

/// A hypothesis of how the monitor's channels read the conductors.
#[derive(Clone, Debug, PartialEq)]
pub struct Metering {
    /// How each channel reads, one per line channel.
    pub map: Vec<ChanMap>,
    /// Channels that read nothing (no CT): left out of every comparison.
    pub absent: Vec<bool>,
}

impl Metering {
    /// Complex factor from conductor power to channel reading.
    pub(super) fn factor(&self, d: &Declared, c: usize) -> C64 {
        let m = self.map[c];
        let u = if m.turned {
            d.supply.unit(c) / d.supply.unit(m.src)
        } else {
            C64::new(1.0, 0.0)
        };
        u.scale(m.k)
    }
    /// Channel readings of per-conductor powers `t` (None: channel absent).
    pub fn read(&self, d: &Declared, t: &[C64]) -> Vec<Option<C64>> {
        (0..self.map.len())
            .map(|c| {
                (!self.absent[c]).then(|| {
                    let r = t[self.map[c].src] * self.factor(d, c);
                    if d.real_only {
                        C64::new(r.re, 0.0)
                    } else {
                        r
                    }
                })
            })
            .collect()
    }
}

/// The metering as declared.
pub fn declared_metering(d: &Declared, absent: &[bool]) -> Metering {
    let map = d
        .channels
        .iter()
        .enumerate()
        .map(|(c, ch)| ChanMap {
            src: ch.conductor.unwrap_or(c),
            k: if ch.reversed { -1.0 } else { 1.0 },
            turned: true,
        })
        .collect();
    Metering {
        map,
        absent: absent.to_vec(),
    }
}

pub(super) fn permutations(n: usize) -> Vec<Vec<usize>> {
    match n {
        1 => vec![vec![0]],
        2 => vec![vec![0, 1], vec![1, 0]],
        _ => vec![
            vec![0, 1, 2],
            vec![0, 2, 1],
            vec![1, 0, 2],
            vec![1, 2, 0],
            vec![2, 0, 1],
            vec![2, 1, 0],
        ],
    }
}

/// Other wirings an appliance could have: for one connection, every other
/// one of the supply; for several, the lines renamed.
pub(super) fn alternatives(d: &Declared, a: &DeclAppliance) -> Vec<(String, DeclAppliance)> {
    let n = d.supply.lines();
    let ws = a.wirings();
    if ws.len() == 1 {
        Wiring::all(n)
            .into_iter()
            .filter(|w| *w != ws[0])
            .map(|w| (w.name(), a.rewired_on(&d.supply, |_| w)))
            .collect()
    } else {
        permutations(n)
            .into_iter()
            .skip(1)
            .map(|p| {
                let b = a.rewired_on(&d.supply, |w| w.permuted(&p));
                (
                    b.wirings()
                        .iter()
                        .map(|w| w.name())
                        .collect::<Vec<_>>()
                        .join(" + "),
                    b,
                )
            })
            .collect()
    }
}

/// Appliance `a` on each connection it could be on: as it is, then each
/// of its [`alternatives`].
pub(super) fn anywhere(d: &Declared, a: &DeclAppliance) -> Vec<DeclAppliance> {
    std::iter::once(a.clone())
        .chain(alternatives(d, a).into_iter().map(|(_, b)| b))
        .collect()
}

pub(super) fn wiring_names(a: &DeclAppliance) -> String {
    a.wirings()
        .iter()
        .map(|w| w.name())
        .collect::<Vec<_>>()
        .join(" + ")
}
