//! A state's nominal power on each line: how the physics splits a draw
//! between the conductors it is wired to, at nominal balanced voltage. The
//! manifest, the difficulty card and `validate` all describe states by it.

use super::{elems_of, nominal_phasors, C64, NEUTRAL};
use crate::scenario::{Scenario, State};

/// Nominal P and Q of a state on each line (at nominal, balanced voltage):
/// line-to-line draws split by the two-wattmeter relation (equal halves on
/// split-phase), three-phase draws a third on each line.
pub fn state_split(s: &Scenario, st: &State) -> Vec<(usize, f64, f64)> {
    let e = nominal_phasors(&s.home);
    let mut per = [C64::ZERO; 3];
    for d in &st.draws {
        for el in elems_of(d) {
            let ua = if el.a == NEUTRAL {
                C64::ZERO
            } else {
                e[el.a as usize]
            };
            let ub = if el.b == NEUTRAL {
                C64::ZERO
            } else {
                e[el.b as usize]
            };
            let i = (C64::new(el.p_w, el.q_var) / (ua - ub)).conj();
            if el.a != NEUTRAL {
                per[el.a as usize] += ua * i.conj();
            }
            if el.b != NEUTRAL {
                per[el.b as usize] += -(ub * i.conj());
            }
        }
    }
    (0..s.home.supply.lines())
        .map(|x| (x, per[x].re, per[x].im))
        .collect()
}
