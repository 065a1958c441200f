//! The electrical model: phasor currents per conductor, neutral current by
//! Kirchhoff, terminal voltages that sag through a source impedance, and
//! voltage-dependent (ZIP) loads.
//!
//! Potentials are taken against the source's neutral. With E_x the source
//! phasor of line x, I_x the current into the home on line x, Z_L and Z_N the
//! line and neutral impedances:
//!   u_x = E_x − Z_L·I_x,   u_N = Z_N·Σ_x I_x,   V_x = u_x − u_N,
//! and the neutral carries I_N = −Σ_x I_x (Kirchhoff's current law).
//! A draw between terminals a and b sees u_a − u_b and takes
//! I = conj(S / (u_a − u_b)). A meter on line x reads S_x = V_x·conj(I_x);
//! then Σ_x S_x = Σ_draws S exactly (Tellegen's theorem), whatever the split.

pub mod settle;
pub mod source;
pub mod split;

use crate::scenario::{Harmonic, Home, Inrush, Scenario, Wiring, Zip};
pub use solver_check::contract::C64;

/// The neutral as a terminal of [`Elem`] (lines are terminals 0, 1, 2).
pub const NEUTRAL: u8 = 9;

/// One draw as the solver uses it. A three-phase draw is held as three
/// line-to-line draws of a third each (the delta equivalent of a balanced
/// load), so its line currents sum to zero and no neutral current flows.
#[derive(Clone, Debug)]
pub struct Elem {
    /// The terminal the current enters (a line index, or [`NEUTRAL`]).
    pub a: u8,
    /// The terminal it returns through (a line index, or [`NEUTRAL`]).
    pub b: u8,
    /// Active power at `nominal_v`, W.
    pub p_w: f64,
    /// Reactive power at `nominal_v`, var.
    pub q_var: f64,
    /// How the active power depends on the voltage across the element.
    pub zip_p: Zip,
    /// How the reactive power depends on the voltage across the element.
    pub zip_q: Zip,
    /// The voltage across `a`–`b` at which `p_w` and `q_var` hold, V.
    pub nominal_v: f64,
    /// Harmonic signature of its current (used by the waveform writer only).
    pub harmonics: Vec<Harmonic>,
}

/// Splits a draw into solver elements.
pub fn elems_of(d: &crate::scenario::Draw) -> Vec<Elem> {
    let el = |a, b, k: f64| Elem {
        a,
        b,
        p_w: d.p_w * k,
        q_var: d.q_var * k,
        zip_p: d.zip_p,
        zip_q: d.zip_q,
        nominal_v: d.nominal_v,
        harmonics: d.harmonics.clone(),
    };
    match d.wiring {
        Wiring::LineNeutral(x) => vec![el(x as u8, NEUTRAL, 1.0)],
        Wiring::LineLine(a, b) => vec![el(a as u8, b as u8, 1.0)],
        Wiring::ThreePhase => [(0u8, 1u8), (1, 2), (2, 0)]
            .iter()
            .map(|&(a, b)| el(a, b, 1.0 / 3.0))
            .collect(),
    }
}

/// One load as the solver sees it: its elements and switch-on surge per state.
pub struct AppModel {
    /// Elements of each state.
    pub states: Vec<Vec<Elem>>,
    /// The switch-on surge of each state, if any.
    pub inrush: Vec<Option<Inrush>>,
    /// The lines this appliance takes current from (its per-conductor truth columns).
    pub lines: Vec<usize>,
    /// Per state: every element draws 0 W and 0 var at any voltage (or
    /// there are none), so the state takes no current (a PV inverter at
    /// night).
    pub idle: Vec<bool>,
}

/// The home's circuit: the source behind the service impedances and every
/// load's elements. Built once per run from the scenario.
pub struct Network {
    /// Number of line conductors (2 split-phase, 3 three-phase, 1 single-phase).
    pub lines: usize,
    /// Source line-to-neutral phasors at nominal magnitude.
    pub e_nominal: [C64; 3],
    /// Impedance of each line conductor from the source to the home, Ω.
    pub z_line: C64,
    /// Impedance of the neutral conductor, Ω.
    pub z_neutral: C64,
    /// Every load, appliances then unmetered loads (the scenario's `loads()` order).
    pub apps: Vec<AppModel>,
}

/// Nominal line-to-neutral phasors of a supply. With a voltage unbalance u
/// a negative-sequence set of u times the nominal voltage is added (L1 at
/// 0°, L2 at +120°, L3 at −120°), so |V₂|/|V₁| = u by Fortescue's
/// symmetrical components (Fortescue 1918).
pub fn nominal_phasors(home: &Home) -> [C64; 3] {
    let mut e = [C64::ZERO; 3];
    let u = home.source.unbalance;
    for (k, deg) in home.supply.angles_deg().iter().enumerate() {
        e[k] = C64::polar_deg(home.voltage_v, *deg);
        if u > 0.0 {
            e[k] += C64::polar_deg(home.voltage_v * u, -*deg);
        }
    }
    e
}

impl Network {
    /// The circuit of a scenario's home.
    pub fn new(s: &Scenario) -> Network {
        let apps = s
            .loads()
            .map(|a| {
                let states: Vec<Vec<Elem>> = a
                    .states
                    .iter()
                    .map(|st| st.draws.iter().flat_map(elems_of).collect())
                    .collect();
                AppModel {
                    idle: states
                        .iter()
                        .map(|els| els.iter().all(Elem::idle))
                        .collect(),
                    states,
                    inrush: a.states.iter().map(|st| st.inrush).collect(),
                    lines: a.lines(),
                }
            })
            .collect();
        let src = &s.home.source;
        Network {
            lines: s.home.supply.lines(),
            e_nominal: nominal_phasors(&s.home),
            z_line: C64::new(src.line_r_ohm, src.line_x_ohm),
            z_neutral: C64::new(src.neutral_r_ohm, src.neutral_x_ohm),
            apps,
        }
    }
}

/// Terminal potentials of the home against the source neutral.
#[derive(Clone, Copy, Debug, Default)]
pub struct Terminals {
    /// Potential of each line terminal, V (phasor).
    pub u: [C64; 3],
    /// Potential of the neutral terminal, V (phasor).
    pub u_n: C64,
}

impl Terminals {
    /// The potential of terminal `t` (a line index or [`NEUTRAL`]), V.
    pub fn at(&self, t: u8) -> C64 {
        if t == NEUTRAL {
            self.u_n
        } else {
            self.u[t as usize]
        }
    }
    /// Whether every potential is below 1e50 V in both parts, so that an
    /// [`Elem::idle`] element's power factors stay finite and it takes
    /// exactly no current (it may be skipped). A NaN fails.
    pub fn bounded(&self) -> bool {
        let ok = |c: C64| c.re.abs() < 1e50 && c.im.abs() < 1e50;
        self.u.iter().all(|&u| ok(u)) && ok(self.u_n)
    }

    /// Whether `other` is within a nanovolt of these potentials on every terminal.
    pub fn settled(&self, other: &Terminals, lines: usize) -> bool {
        let near = |a: C64, b: C64| (a - b).norm_sqr() < 1e-18;
        (0..lines).all(|x| near(self.u[x], other.u[x])) && near(self.u_n, other.u_n)
    }

    /// Line-to-neutral voltage at the home's terminals.
    pub fn v_ln(&self, x: usize) -> C64 {
        self.u[x] - self.u_n
    }
}

/// What one step of the solver yields.
pub struct StepOut {
    /// Current in each line conductor, A (phasor; unused lines zero).
    pub i_line: [C64; 3],
    /// Line-to-neutral voltage at the home's terminals, V (phasor).
    pub v_ln: [C64; 3],
    /// Per appliance: active power, W.
    pub app_p: Vec<f64>,
    /// Per appliance: reactive power, var.
    pub app_q: Vec<f64>,
    /// Per appliance: active power on each of its lines, W (in `AppModel::lines` order).
    pub app_line_p: Vec<[f64; 3]>,
}

impl StepOut {
    /// Zeroed output for `n_apps` loads, reused step after step.
    pub fn new(n_apps: usize) -> Self {
        StepOut {
            i_line: [C64::ZERO; 3],
            v_ln: [C64::ZERO; 3],
            app_p: vec![0.0; n_apps],
            app_q: vec![0.0; n_apps],
            app_line_p: vec![[0.0; 3]; n_apps],
        }
    }
}

impl Network {
    /// Terminal potentials for source phasors `e` and line currents `i`.
    pub fn terminals(&self, e: &[C64; 3], i: &[C64; 3]) -> Terminals {
        let mut t = Terminals::default();
        let mut sum = C64::ZERO;
        for x in 0..self.lines {
            t.u[x] = e[x] - self.z_line * i[x];
            sum += i[x];
        }
        t.u_n = self.z_neutral * sum;
        t
    }

    /// Line currents of the active states at terminal potentials `t`.
    /// `active[k] = (state, multiplier)` for appliance k.
    pub fn currents(&self, t: &Terminals, active: &[(usize, f64)]) -> [C64; 3] {
        let mut i = [C64::ZERO; 3];
        let skip_idle = t.bounded();
        for (app, &(state, mult)) in self.apps.iter().zip(active) {
            if skip_idle && app.idle[state] && mult.is_finite() {
                continue;
            }
            for el in &app.states[state] {
                let (cur, _, _) = el.current(t, mult);
                add_current(&mut i, el, cur);
            }
        }
        i
    }

    /// Full step: currents, and each appliance's P, Q and per-line P.
    ///
    /// An idle state (see [`AppModel::idle`]) at a finite multiple is
    /// skipped while the terminals are [`Terminals::bounded`]: its elements would add zero
    /// currents to line currents that are never −0 (sums from +0), and
    /// its P, Q and per-line P would be sums of zeros from +0, so +0.
    pub fn solve(&self, t: &Terminals, active: &[(usize, f64)], out: &mut StepOut) {
        out.i_line = [C64::ZERO; 3];
        for x in 0..self.lines {
            out.v_ln[x] = t.v_ln(x);
        }
        let skip_idle = t.bounded();
        for (k, (app, &(state, mult))) in self.apps.iter().zip(active).enumerate() {
            if skip_idle && app.idle[state] && mult.is_finite() {
                out.app_p[k] = 0.0;
                out.app_q[k] = 0.0;
                out.app_line_p[k] = [0.0; 3];
                continue;
            }
            let (mut p, mut q) = (0.0, 0.0);
            let mut lp = [0.0; 3];
            for el in &app.states[state] {
                let (cur, pe, qe) = el.current(t, mult);
                add_current(&mut out.i_line, el, cur);
                p += pe;
                q += qe;
                // This draw's share of each line's reading: Re(V_x · conj(±I)).
                if el.a != NEUTRAL {
                    lp[el.a as usize] += (out.v_ln[el.a as usize] * cur.conj()).re;
                }
                if el.b != NEUTRAL {
                    lp[el.b as usize] -= (out.v_ln[el.b as usize] * cur.conj()).re;
                }
            }
            out.app_p[k] = p;
            out.app_q[k] = q;
            out.app_line_p[k] = lp;
        }
    }
}

fn add_current(i: &mut [C64; 3], el: &Elem, cur: C64) {
    if el.a != NEUTRAL {
        i[el.a as usize] += cur;
    }
    if el.b != NEUTRAL {
        i[el.b as usize] += -cur;
    }
}

impl Elem {
    /// Draws 0 W and 0 var at any voltage below 1e50 V: no power, a
    /// nominal voltage of a millivolt or more and ZIP fractions below 1e100,
    /// so that `mult · 0 · factor(u)` is a zero.
    pub fn idle(&self) -> bool {
        let small = |z: &Zip| [z.z, z.i, z.p].iter().all(|c| c.abs() < 1e100);
        self.p_w == 0.0
            && self.q_var == 0.0
            && self.nominal_v >= 1e-3
            && small(&self.zip_p)
            && small(&self.zip_q)
    }

    /// Current from terminal a to b, and the P, Q drawn, at potentials `t`.
    #[inline]
    pub fn current(&self, t: &Terminals, mult: f64) -> (C64, f64, f64) {
        let v = t.at(self.a) - t.at(self.b);
        let u = v.abs() / self.nominal_v;
        let p = mult * self.p_w * self.zip_p.factor(u);
        let q = mult * self.q_var * self.zip_q.factor(u);
        if p == 0.0 && q == 0.0 {
            return (C64::ZERO, 0.0, 0.0);
        }
        ((C64::new(p, q) / v).conj(), p, q)
    }
}
