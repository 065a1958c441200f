//! The fixed point of V(I) and I(V) settled, or the run stopped: with a
//! large source impedance or a load far beyond the service, the iteration
//! diverges or oscillates and would write voltages of millivolts or
//! kilovolts, or NaN. [`Network::settle`] iterates until the terminals move
//! less than [`SETTLE_TOL`] of nominal, and [`Network::implausible`] finds
//! terminal voltages outside [`BAND`] of nominal.

use super::{Network, StepOut, Terminals, C64};
use crate::scenario::Scenario;
use std::fmt;

/// How far (as a share of nominal voltage) a pass may still move the
/// terminals for the solution to count as settled. The usual single pass
/// moves them by a few hundredths of a volt, far below this, so only a
/// solve that has not converged takes more passes.
pub const SETTLE_TOL: f64 = 0.005;
/// Passes of the fixed-point iteration before it counts as diverged.
pub const MAX_PASSES: usize = 50;
/// The plausible line-to-neutral voltage at the terminals, as shares of nominal.
pub const BAND: (f64, f64) = (0.5, 1.5);

/// Why a run stopped: the voltage solve did not settle, or settled outside
/// [`BAND`]. Bad input (exit status 2): the scenario asks for physics that
/// has no steady answer.
#[derive(Debug, Clone)]
pub struct Diverged {
    /// The error at the scenario's source impedance (or its supply).
    pub error: crate::scenario::Error,
}

impl fmt::Display for Diverged {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        self.error.fmt(f)
    }
}

impl std::error::Error for Diverged {}

impl From<Diverged> for std::io::Error {
    fn from(d: Diverged) -> Self {
        std::io::Error::new(std::io::ErrorKind::InvalidInput, d)
    }
}

/// For in-memory runs whose sink cannot fail: a divergence still stops them.
impl From<Diverged> for () {
    fn from(_: Diverged) -> Self {}
}

/// The largest move of any terminal between `a` and `b`, V.
fn moved(a: &Terminals, b: &Terminals, lines: usize) -> f64 {
    let d = |x: C64, y: C64| (x - y).abs();
    (0..lines)
        .map(|x| d(a.u[x], b.u[x]))
        .fold(d(a.u_n, b.u_n), f64::max)
}

impl Network {
    /// Iterates `t` → currents → terminals until they move less than
    /// [`SETTLE_TOL`] of `v_nominal`; `out` holds the solution at `t`.
    /// Returns the last move in volts if it never settled.
    pub fn settle(
        &self,
        e: &[C64; 3],
        active: &[(usize, f64)],
        v_nominal: f64,
        t: &mut Terminals,
        out: &mut StepOut,
    ) -> Result<(), f64> {
        let mut last = f64::NAN;
        for _ in 0..MAX_PASSES {
            let next = self.terminals(e, &out.i_line);
            last = moved(&next, t, self.lines);
            if last <= SETTLE_TOL * v_nominal {
                return Ok(());
            }
            *t = next;
            self.solve(t, active, out);
        }
        Err(last)
    }

    /// The first line whose terminal voltage lies outside [`BAND`] of
    /// `v_nominal` (or is not a number), with that voltage.
    pub fn implausible(&self, out: &StepOut, v_nominal: f64) -> Option<(usize, f64)> {
        (0..self.lines)
            .map(|x| (x, out.v_ln[x].abs()))
            .find(|(_, v)| !(BAND.0..=BAND.1).contains(&(v / v_nominal)))
    }
}

/// The message of a run stopped at `step`: what happened, where the source
/// impedance is written, the load at that moment, and what would work.
pub fn diverged(
    s: &Scenario,
    net: &Network,
    active: &[(usize, f64)],
    step: u64,
    what: String,
) -> Diverged {
    let v = s.home.voltage_v;
    let loads: Vec<&crate::scenario::Appliance> = s.loads().collect();
    let mut total_va = 0.0;
    let mut largest = (0.0, String::new());
    for (k, &(state, mult)) in active.iter().enumerate() {
        let va: f64 = net.apps[k].states[state]
            .iter()
            .map(|el| mult * el.p_w.hypot(el.q_var))
            .sum();
        total_va += va;
        if va > largest.0 {
            let name = &loads[k].states[state].name;
            largest = (
                va,
                format!("appliance \"{}\" in state \"{name}\"", loads[k].id),
            );
        }
    }
    // A sag under a tenth of nominal at this load: |Z| · S / V < V / 10.
    let z_max = 0.1 * v * v / total_va.max(1.0);
    let src = &s.home.source;
    let message = format!(
        "the voltage solve has no plausible answer {:.2} h into the run: {what}; the load then: {:.1} kVA in all, the largest {} ({:.1} kVA)",
        step as f64 * s.run.step_s / 3600.0,
        total_va / 1e3,
        largest.1,
        largest.0 / 1e3,
    );
    let help = format!(
        "lower the source impedance to at most {z_max:.3} ohm, or reduce the load beyond the service; terminal voltages must stay within {} … {} of nominal ({v} V)",
        BAND.0, BAND.1,
    );
    let place = format!(
        "the source impedance: r = {} ohm, x = {} ohm on each line",
        src.line_r_ohm, src.line_x_ohm
    );
    Diverged {
        error: crate::scenario::Error::at_place(&s.home.source_at, &place, message, help),
    }
}
