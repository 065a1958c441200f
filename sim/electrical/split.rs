//! A state's nominal power on each line: how the physics splits a draw
//! between the conductors it is wired to, at the source's nominal voltages.
//! The manifest, the difficulty card and `validate` all describe states by
//! it; the arithmetic is the contract's ([`Wiring::add_line_split`]), which
//! the audit uses too.
//!
//! [`Wiring::add_line_split`]: solver_check::contract::Wiring::add_line_split

use super::{nominal_phasors, C64};
use crate::scenario::{Scenario, State};

/// Nominal P and Q of a state on each line, at the source's nominal
/// phasors (with its voltage unbalance, if any): line-to-line draws split
/// by the two-wattmeter relation (equal halves on split-phase),
/// three-phase draws as their delta equivalent (a third on each line when
/// balanced).
pub fn state_split(s: &Scenario, st: &State) -> Vec<(usize, f64, f64)> {
    let e = nominal_phasors(&s.home);
    let mut per = [C64::ZERO; 3];
    for d in &st.draws {
        d.wiring
            .add_line_split(&e, C64::new(d.p_w, d.q_var), &mut per);
    }
    (0..s.home.supply.lines())
        .map(|x| (x, per[x].re, per[x].im))
        .collect()
}
