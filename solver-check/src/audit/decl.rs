//! What an installer declares, in the audit's own terms: the supply, the
//! metering (which conductor each channel's CT is on, which way round) and
//! each appliance's states with their believed wiring and power. The
//! simulator's scenario language is turned into this by the `loadloom`
//! crate; this crate never reads scenarios itself.

use crate::contract::{SupplyKind, Wiring, Zip, C64};

/// A declared supply: its kind, nominal voltage and service rating.
#[derive(Clone, Debug)]
pub struct Supply {
    /// Split-phase, three-phase or single-phase.
    pub kind: SupplyKind,
    /// Nominal line-to-neutral voltage, V.
    pub voltage_v: f64,
    /// Service (main breaker) rating, A.
    pub service_a: f64,
}

impl Supply {
    /// How many lines it has.
    pub fn lines(&self) -> usize {
        self.kind.lines()
    }

    /// Line-to-neutral phase angles, degrees, one per line.
    pub fn angles_deg(&self) -> &'static [f64] {
        self.kind.angles_deg()
    }

    /// Unit phasor of line x's voltage.
    pub fn unit(&self, x: usize) -> C64 {
        self.kind.unit(x)
    }

    /// Nominal voltage across a connection ([`Wiring::nominal_v`]).
    pub fn nominal_across(&self, w: Wiring) -> f64 {
        w.nominal_v(self.kind, self.voltage_v)
    }

    /// Voltage across a connection, as a multiple of its nominal, from the
    /// measured line-to-neutral magnitudes `vm` at the supply's nominal
    /// angles; a three-phase load gets the mean over its three line pairs.
    /// None when a voltage it needs is not measured.
    pub fn ratio_across(&self, w: Wiring, vm: &[f64]) -> Option<f64> {
        let pair =
            |a: usize, b: usize| (self.unit(a).scale(vm[a]) - self.unit(b).scale(vm[b])).abs();
        let r = match w {
            Wiring::LineNeutral(a) => vm[a] / self.voltage_v,
            Wiring::LineLine(a, b) => pair(a, b) / self.nominal_across(w),
            Wiring::ThreePhase => {
                (pair(0, 1) + pair(1, 2) + pair(2, 0)) / (3.0 * self.nominal_across(w))
            }
        };
        (r.is_finite() && r > 0.5 && r < 1.5).then_some(r)
    }

    /// How a draw of complex power `s` on `w` shows on each line's meter
    /// channel ([`SupplyKind::split`]).
    pub fn split(&self, w: Wiring, s: C64) -> Vec<C64> {
        self.kind.split(w, s)
    }
}

/// One load inside a state.
#[derive(Clone, Debug)]
pub struct DeclDraw {
    /// The conductors it is connected between.
    pub wiring: Wiring,
    /// Complex power at the connection's nominal voltage, W + j var.
    pub s: C64,
    /// Voltage dependence of P.
    pub zip_p: Zip,
    /// Voltage dependence of Q.
    pub zip_q: Zip,
    /// The voltage its power was given at, when the declaration rates it
    /// (a 240 V element): on another connection it draws what its ZIP
    /// model gives at that connection's voltage, not the same power.
    pub rated_v: Option<f64>,
}

impl DeclDraw {
    /// Its complex power at `u` times the connection's nominal voltage.
    pub fn at(&self, u: f64) -> C64 {
        C64::new(
            self.s.re * self.zip_p.factor(u),
            self.s.im * self.zip_q.factor(u),
        )
    }
}

/// A jump between states: (from, to, scale of `to`'s power, scale of
/// `from`'s power).
pub type Jump = (usize, usize, f64, f64);

/// How an appliance changes state, as far as steps go.
#[derive(Clone, Debug)]
pub enum Steps {
    /// Jumps between states: (from, to, scale of `to`'s power, scale of
    /// `from`'s power), e.g. a modulating load starting at full power and
    /// stopping from its minimum.
    Jumps(Vec<Jump>),
    /// Its power wanders: steps of any size up to the whole of `state`'s
    /// power, always in that state's proportions between the lines; and
    /// the jumps it makes at the start and end of a session, if any.
    /// `max`: the largest single change, as a share of that power.
    Wanders {
        /// The state whose power wanders.
        state: usize,
        /// The largest single change, share of that state's power.
        max: f64,
        /// The jumps at the start and end of a session.
        jumps: Vec<Jump>,
    },
    /// Never switches (always on).
    None(&'static str),
}

impl Steps {
    /// Its jumps between states (none for a load that never switches).
    pub fn jumps(&self) -> &[Jump] {
        match self {
            Steps::Jumps(j) | Steps::Wanders { jumps: j, .. } => j,
            Steps::None(_) => &[],
        }
    }
}

/// One appliance as declared.
#[derive(Clone, Debug)]
pub struct DeclAppliance {
    /// The appliance id.
    pub id: String,
    /// A human name for reports.
    pub label: String,
    /// Draws of each state.
    pub states: Vec<Vec<DeclDraw>>,
    /// How it changes state, as far as steps go.
    pub steps: Steps,
    /// When its declared habit starts it; None for a thermostat, a cycle
    /// or a short entry, whose use the declaration does not give.
    pub habit: Option<StartHabit>,
}

/// How often, and at which hours, a declared habit starts an appliance.
#[derive(Clone, Debug, PartialEq)]
pub struct StartHabit {
    /// Runs a day, the busier of weekdays and weekends.
    pub per_day: f64,
    /// The share of its starts in each local hour (0 to 23), summing to 1.
    pub hour_share: [f64; 24],
}

impl StartHabit {
    /// `per_day` starts a day at any hour alike.
    pub fn any_hour(per_day: f64) -> StartHabit {
        StartHabit {
            per_day,
            hour_share: [1.0 / 24.0; 24],
        }
    }
}

impl DeclAppliance {
    /// Every connection its draws use, first-seen order.
    pub fn wirings(&self) -> Vec<Wiring> {
        let mut v = Vec::new();
        for st in &self.states {
            for d in st {
                if !v.contains(&d.wiring) {
                    v.push(d.wiring);
                }
            }
        }
        v
    }
    /// The same appliance wired otherwise: every draw moved by `f`.
    pub fn rewired(&self, f: impl Fn(Wiring) -> Wiring) -> DeclAppliance {
        let mut a = self.clone();
        for st in a.states.iter_mut() {
            for d in st.iter_mut() {
                d.wiring = f(d.wiring);
            }
        }
        a
    }
    /// The same appliance wired otherwise on `supply`: every draw moved by
    /// `f`, and a rated draw's power rescaled to its new connection's
    /// nominal voltage (a 4.5 kW, 240 V element declared line-to-neutral
    /// at 120 V is taken at 1.1 kW there, and is 4.5 kW again across the
    /// two lines).
    pub fn rewired_on(&self, supply: &Supply, f: impl Fn(Wiring) -> Wiring) -> DeclAppliance {
        let mut a = self.clone();
        for st in a.states.iter_mut() {
            for d in st.iter_mut() {
                let to = f(d.wiring);
                if let Some(r) = d.rated_v {
                    let (u0, u1) = (
                        supply.nominal_across(d.wiring) / r,
                        supply.nominal_across(to) / r,
                    );
                    d.s = C64::new(
                        d.s.re * d.zip_p.factor(u1) / d.zip_p.factor(u0),
                        d.s.im * d.zip_q.factor(u1) / d.zip_q.factor(u0),
                    );
                }
                d.wiring = to;
            }
        }
        a
    }

    /// Whether any of its draws takes reactive power (a motor, a power
    /// supply: its input is what its load asks), where a resistance's,
    /// set by the voltage, takes none.
    pub fn draws_reactive(&self) -> bool {
        self.states.iter().flatten().any(|x| x.s.im != 0.0)
    }

    /// Largest real-power step any of its jumps makes, W.
    pub fn largest_step_w(&self) -> f64 {
        self.largest_step_by(|d| d.s.re)
    }

    /// Largest real-power step any of its jumps makes with each draw rated
    /// at a voltage taken at that voltage (its nameplate), W: what a load
    /// that holds its power (a motor, a power supply) draws on a connection
    /// of another voltage, where [`Self::largest_step_w`] is what its
    /// voltage law gives there.
    pub fn nameplate_step_w(&self, supply: &Supply) -> f64 {
        self.largest_step_by(|d| match d.rated_v {
            Some(r) => {
                let k = d.zip_p.factor(supply.nominal_across(d.wiring) / r);
                if k > 0.0 {
                    d.s.re / k
                } else {
                    d.s.re
                }
            }
            None => d.s.re,
        })
    }

    /// Largest real-power step any of its jumps makes, each draw's power
    /// read by `p`, W.
    fn largest_step_by(&self, p: impl Fn(&DeclDraw) -> f64) -> f64 {
        self.steps
            .jumps()
            .iter()
            .map(|&(a, b, kb, ka)| {
                let pa: f64 = self.states[a].iter().map(&p).sum();
                let pb: f64 = self.states[b].iter().map(&p).sum();
                (pb * kb - pa * ka).abs()
            })
            .fold(0.0, f64::max)
    }
}

/// One meter channel as declared: the conductor its CT is on (None: no CT
/// fitted) and whether it is declared clamped the wrong way round.
#[derive(Clone, Debug)]
pub struct DeclChannel {
    /// The line index its CT is declared on; None: no CT.
    pub conductor: Option<usize>,
    /// Declared clamped facing the source (reads −I).
    pub reversed: bool,
}

/// An installer's declaration: supply, metering channels and appliances.
#[derive(Clone, Debug)]
pub struct Declared {
    /// The declaration's file, for messages.
    pub file: String,
    /// Where the supply is declared ("file:line:col").
    pub supply_at: String,
    /// The supply: kind, nominal voltage, service rating.
    pub supply: Supply,
    /// The metering channels, one per line.
    pub channels: Vec<DeclChannel>,
    /// The appliances declared.
    pub appliances: Vec<DeclAppliance>,
    /// The declaration lists only some of the appliances (`[declaration]
    /// partial = true`): loads it does not list are expected, not mistakes.
    pub partial: bool,
    /// The meter reads real power only: expected readings are compared by
    /// their real parts.
    pub real_only: bool,
    /// The home's time zone (IANA name), for the local times of examples.
    pub timezone: String,
    /// The rooftop PV and home battery the declaration gives: sources whose
    /// power follows the sun or the home, not steps to place.
    pub generation: Vec<Inverter>,
}

/// A PV inverter or a home battery as declared.
#[derive(Clone, Debug)]
pub struct Inverter {
    /// Its id (`pv`, `battery`).
    pub id: String,
    /// The conductors it is connected between.
    pub wiring: Wiring,
    /// Whether it follows the home's power (a battery run for
    /// self-consumption answers every step within seconds) rather than the sun.
    pub follows_home: bool,
    /// The most it can deliver, W (a PV inverter's AC rating, a battery's
    /// power), if declared: a PV array's power changes by no more than this
    /// (a battery's answers are doubted whatever their size).
    pub rating_w: Option<f64>,
    /// For a PV inverter whose site is known: whether its sun may be up at
    /// a moment (UTC ms); a step when it is not cannot be the array's.
    pub sun_up: Option<SunUp>,
}

impl Inverter {
    /// An inverter with nothing known but its id, wiring and kind.
    pub fn new(id: &str, wiring: Wiring, follows_home: bool) -> Inverter {
        Inverter {
            id: id.to_string(),
            wiring,
            follows_home,
            rating_w: None,
            sun_up: None,
        }
    }

    /// Whether it cannot produce at `time_ms` (UTC): a PV array whose sun is
    /// known to be below the horizon then. Unknown (no site, or a battery):
    /// `false`.
    pub fn dark_at(&self, time_ms: i64) -> bool {
        !self.follows_home && self.sun_up.as_ref().is_some_and(|up| !(up.0)(time_ms))
    }
}

/// Whether the sun may be up at a PV array's site at a moment (UTC ms):
/// the simulator's sun position, handed to the audit (which has no
/// astronomy of its own).
#[derive(Clone)]
pub struct SunUp(pub std::sync::Arc<dyn Fn(i64) -> bool + Send + Sync>);

impl std::fmt::Debug for SunUp {
    fn fmt(&self, f: &mut std::fmt::Formatter<'_>) -> std::fmt::Result {
        f.write_str("SunUp(..)")
    }
}

/// Whether two per-line steps are one step size: alike on every line up
/// to that line's sign (a jump and its return among them), to within
/// rounding.
fn same_step(a: &[C64], b: &[C64]) -> bool {
    a.iter()
        .zip(b)
        .all(|(x, y)| (*x - *y).abs() < 1e-6 || (*x + *y).abs() < 1e-6)
}

impl Declared {
    /// Per-line complex power of state `k` of appliance `a`, at nominal voltage.
    pub fn state_split(&self, a: &DeclAppliance, k: usize) -> Vec<C64> {
        let (e, mut out) = (
            self.supply.kind.units(),
            vec![C64::ZERO; self.supply.lines()],
        );
        for d in &a.states[k] {
            d.wiring.add_line_split(&e, d.s, &mut out);
        }
        out
    }

    /// The per-line steps an appliance makes (one vector per jump), at the
    /// conductors (before any metering).
    pub fn signatures(&self, a: &DeclAppliance) -> Vec<Vec<C64>> {
        self.distinct_jumps(a).into_iter().map(|(_, d)| d).collect()
    }

    /// Per-line step of jump `j` of appliance `a`, at nominal voltage.
    pub fn jump_step(&self, a: &DeclAppliance, (from, to, kt, kf): Jump) -> Vec<C64> {
        let (sf, st) = (self.state_split(a, from), self.state_split(a, to));
        st.iter()
            .zip(&sf)
            .map(|(t, f)| t.scale(kt) - f.scale(kf))
            .collect()
    }

    /// The jumps that make a step of their own (a jump and its reverse, or
    /// two jumps with the same step, count once), each with its per-line
    /// step at nominal voltage.
    pub fn distinct_jumps(&self, a: &DeclAppliance) -> Vec<(Jump, Vec<C64>)> {
        let mut v: Vec<(Jump, Vec<C64>)> = Vec::new();
        for &jump in a.steps.jumps() {
            let d = self.jump_step(a, jump);
            let size = d.iter().map(|c| c.abs()).fold(0.0, f64::max);
            if size > 0.0 && !v.iter().any(|(_, w)| same_step(w, &d)) {
                v.push((jump, d));
            }
        }
        v
    }
}

impl Declared {
    /// How many of appliance `a`'s jumps make each of its distinct steps
    /// ([`Declared::distinct_jumps`], in that order; a jump and its reverse
    /// alike): the steps of that size one of its runs makes.
    pub fn jumps_per_step(&self, a: &DeclAppliance) -> Vec<usize> {
        let distinct = self.distinct_jumps(a);
        let mut per = vec![0; distinct.len()];
        for &jump in a.steps.jumps() {
            let d = self.jump_step(a, jump);
            if let Some(i) = distinct.iter().position(|(_, w)| same_step(w, &d)) {
                per[i] += 1;
            }
        }
        per
    }

    /// The same declaration checked against a meter that reads real power
    /// only: every expected reading is its real part.
    pub fn real_power_only(&self) -> Declared {
        let mut d = self.clone();
        d.real_only = true;
        d
    }

    /// The per-line proportions of a wandering appliance's steps, if it wanders.
    pub fn shape(&self, a: &DeclAppliance) -> Option<Vec<C64>> {
        match a.steps {
            Steps::Wanders { state, max, .. } => Some(
                self.state_split(a, state)
                    .iter()
                    .map(|c| c.scale(max))
                    .collect(),
            ),
            _ => None,
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// A 4.5 kW element rated at 240 V declared line-to-neutral on a
    /// 120/240 V supply draws (120/240)² of that at 120 V (P = V²/R, Ohm's
    /// law); moved across the two lines it is 4.5 kW again. A draw with no
    /// rated voltage keeps its power wherever it is moved.
    #[test]
    fn a_rated_draw_moved_to_another_connection_draws_what_its_voltage_gives() {
        let sp = Supply {
            kind: SupplyKind::SplitPhase,
            voltage_v: 120.0,
            service_a: 100.0,
        };
        let r = Zip {
            z: 1.0,
            i: 0.0,
            p: 0.0,
        };
        let draw = |rated_v| DeclDraw {
            wiring: Wiring::LineNeutral(0),
            s: C64::new(4500.0 * 0.25, 0.0),
            zip_p: r,
            zip_q: r,
            rated_v,
        };
        let app = |rated_v| DeclAppliance {
            id: "wh".into(),
            label: "wh".into(),
            states: vec![vec![], vec![draw(rated_v)]],
            steps: Steps::Jumps(vec![(0, 1, 1.0, 1.0)]),
            habit: None,
        };
        let moved = app(Some(240.0)).rewired_on(&sp, |_| Wiring::LineLine(0, 1));
        assert!((moved.states[1][0].s.re - 4500.0).abs() < 1e-9);
        assert_eq!(moved.states[1][0].wiring, Wiring::LineLine(0, 1));
        let kept = app(None).rewired_on(&sp, |_| Wiring::LineLine(0, 1));
        assert!((kept.states[1][0].s.re - 1125.0).abs() < 1e-9);
        // Its nameplate: the 4.5 kW it draws at its rated 240 V (the
        // 1125 W at 120 V over (120/240)²); unrated, what it is declared at.
        let rated = app(Some(240.0));
        assert!((rated.largest_step_w() - 1125.0).abs() < 1e-9);
        assert!((rated.nameplate_step_w(&sp) - 4500.0).abs() < 1e-9);
        assert!((app(None).nameplate_step_w(&sp) - 1125.0).abs() < 1e-9);
    }

    fn supply(kind: SupplyKind) -> Supply {
        Supply {
            kind,
            voltage_v: 230.0,
            service_a: 63.0,
        }
    }

    /// Two-wattmeter method (Blondel's theorem; any textbook on three-phase
    /// power measurement): two meters with the line currents of L1 and L2
    /// read P = W1 + W2 and Q = √3 (W1 − W2) of a load between those lines
    /// (with the meters referred to the neutral, each reads a third of that
    /// imbalance: W1 − W2 = Q/√3).
    #[test]
    fn a_line_to_line_load_on_a_wye_splits_as_two_wattmeters_read() {
        let s = supply(SupplyKind::ThreePhase);
        let load = C64::new(2000.0, 900.0);
        let r = s.split(Wiring::LineLine(0, 1), load);
        assert!((r[0].re + r[1].re - 2000.0).abs() < 1e-9);
        assert!((r[0].im + r[1].im - 900.0).abs() < 1e-9);
        assert!(((r[0].re - r[1].re) * 3f64.sqrt() - 900.0).abs() < 1e-9);
        assert_eq!(r[2], C64::ZERO);
        // Each line carries |S|/√3 at ∓30° from the load's angle.
        assert!((r[0].abs() - load.abs() / 3f64.sqrt()).abs() < 1e-9);
    }

    /// Voltage across a connection: between the legs of a split-phase
    /// supply twice the line-to-neutral voltage, between two lines of a wye
    /// √3 times it (textbook relations of the 120/240 V and 230/400 V
    /// supplies).
    #[test]
    fn voltage_across_a_connection_follows_the_supply() {
        let sp = Supply {
            voltage_v: 120.0,
            ..supply(SupplyKind::SplitPhase)
        };
        assert!((sp.nominal_across(Wiring::LineLine(0, 1)) - 240.0).abs() < 1e-9);
        let wye = supply(SupplyKind::ThreePhase);
        assert!((wye.nominal_across(Wiring::LineLine(0, 1)) - 230.0 * 3f64.sqrt()).abs() < 1e-9);
        // 2 % low on L1 and 2 % high on L2: the line-to-line magnitude
        // |0.98∠0° − 1.02∠−120°| = √(0.98² + 0.98·1.02 + 1.02²) / √3.
        let r = wye
            .ratio_across(Wiring::LineLine(0, 1), &[0.98 * 230.0, 1.02 * 230.0, 230.0])
            .unwrap();
        assert!(
            (r - (0.98f64 * 0.98 + 0.98 * 1.02 + 1.02 * 1.02).sqrt() / 3f64.sqrt()).abs() < 1e-12
        );
        assert!(
            (wye.ratio_across(Wiring::LineNeutral(2), &[230.0, 230.0, 0.95 * 230.0])
                .unwrap()
                - 0.95)
                .abs()
                < 1e-12
        );
        assert_eq!(
            wye.ratio_across(Wiring::LineNeutral(0), &[f64::NAN, 230.0, 230.0]),
            None
        );
    }

    /// Split-phase: the legs are 180° apart, so a 240 V load shows half its
    /// power on each leg (common practice, no source).
    #[test]
    fn a_line_to_line_load_on_split_phase_splits_equally() {
        let s = supply(SupplyKind::SplitPhase);
        let r = s.split(Wiring::LineLine(0, 1), C64::new(4500.0, 300.0));
        for x in &r {
            assert!((x.re - 2250.0).abs() < 1e-9 && (x.im - 150.0).abs() < 1e-9);
        }
    }
}
