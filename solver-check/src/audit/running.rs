//! Which declared appliances were running at a moment, as the steps show:
//! the steps up to then are replayed, each taken for the declared jump it
//! fits best (within [`STEP_TOL_W`] plus [`STEP_TOL_REL`] of its size on
//! every channel, either way round), and each appliance is in the state its
//! last step left it in. Appliances that never switch are always running.
//! A label for the loading picture, not evidence for a finding.

use super::check::Metering;
use super::decl::{Declared, Steps};
use super::events::Event;
use crate::contract::C64;

/// Absolute part of the tolerance of a step against a declared jump, W
/// (the audit's wider tolerance, for data without voltages: a resistive
/// load moves ±10 % across a ±5 % supply band; common practice, no source).
pub const STEP_TOL_W: f64 = 30.0;
/// Relative part of that tolerance, of the jump's size.
pub const STEP_TOL_REL: f64 = 0.10;

/// One declared jump as the channels read it.
struct JumpReading {
    appliance: usize,
    from: usize,
    to: usize,
    reading: Vec<Option<C64>>,
    size: f64,
}

/// Every distinct jump of every appliance, read through metering `m`.
fn jumps(d: &Declared, m: &Metering) -> Vec<JumpReading> {
    let mut v = Vec::new();
    for (j, a) in d.appliances.iter().enumerate() {
        for ((from, to, _, _), split) in d.distinct_jumps(a) {
            let reading = m.read(d, &split);
            let size = reading
                .iter()
                .flatten()
                .map(|c| c.abs())
                .fold(0.0, f64::max);
            if size > 0.0 {
                v.push(JumpReading {
                    appliance: j,
                    from,
                    to,
                    reading,
                    size,
                });
            }
        }
    }
    v
}

/// How far a step is from a jump read `sign` way round, in tolerances
/// (None: a channel the jump needs has no reading).
fn misfit(e: &Event, jump: &JumpReading, sign: f64) -> Option<f64> {
    let tol = STEP_TOL_W + STEP_TOL_REL * jump.size;
    let mut worst = 0.0f64;
    for (c, r) in jump.reading.iter().enumerate() {
        let Some(r) = r else { continue };
        let got = e.delta.get(c).copied()?;
        let off = (got - r.scale(sign)).abs();
        if off.is_nan() {
            return None;
        }
        worst = worst.max(off / tol);
    }
    Some(worst)
}

/// The state index of each appliance in which it draws least (its "off").
fn rest_states(d: &Declared) -> Vec<usize> {
    d.appliances
        .iter()
        .map(|a| {
            let p = |k: usize| a.states[k].iter().map(|x| x.s.abs()).sum::<f64>();
            (0..a.states.len())
                .min_by(|&x, &y| p(x).total_cmp(&p(y)))
                .unwrap_or(0)
        })
        .collect()
}

/// For each time in `at` (None: skipped), the ids of the declared
/// appliances running then that draw on the line paired with it, the steps read
/// through metering `m`. `events` are in time order.
pub fn running(
    d: &Declared,
    m: &Metering,
    events: &[Event],
    at: &[(usize, i64)],
) -> Vec<Vec<String>> {
    let js = jumps(d, m);
    let rest = rest_states(d);
    let mut state = rest.clone();
    let mut order: Vec<usize> = (0..at.len()).collect();
    order.sort_by_key(|&k| at[k].1);
    let mut out = vec![Vec::new(); at.len()];
    let mut next = 0;
    for &k in &order {
        let (line, t) = at[k];
        while next < events.len() && events[next].time_ms <= t {
            apply(&events[next], &js, &mut state);
            next += 1;
        }
        out[k] = on_line(d, &state, &rest, line);
    }
    out
}

/// Takes step `e` for the jump it fits best, if any, and moves that
/// appliance's state.
fn apply(e: &Event, js: &[JumpReading], state: &mut [usize]) {
    let best = js
        .iter()
        .flat_map(|j| [(j, 1.0), (j, -1.0)])
        .filter_map(|(j, s)| misfit(e, j, s).map(|f| (j, s, f)))
        .filter(|(_, _, f)| *f <= 1.0)
        .min_by(|x, y| x.2.total_cmp(&y.2));
    if let Some((j, s, _)) = best {
        state[j.appliance] = if s > 0.0 { j.to } else { j.from };
    }
}

/// The appliances whose current state draws on `line`.
fn on_line(d: &Declared, state: &[usize], rest: &[usize], line: usize) -> Vec<String> {
    d.appliances
        .iter()
        .enumerate()
        .filter(|(j, a)| {
            let always = matches!(a.steps, Steps::None(_));
            (always || state[*j] != rest[*j])
                && d.state_split(a, state[*j])
                    .get(line)
                    .is_some_and(|s| s.abs() > 0.0)
        })
        .map(|(_, a)| a.id.clone())
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;
    use crate::audit::check::declared_metering;
    use crate::audit::decl::{DeclAppliance, DeclChannel, DeclDraw, Supply};
    use crate::contract::{SupplyKind, Wiring, Zip};

    fn draw(wiring: Wiring, p: f64) -> DeclDraw {
        let z = Zip {
            z: 1.0,
            i: 0.0,
            p: 0.0,
        };
        DeclDraw {
            wiring,
            s: C64::new(p, 0.0),
            zip_p: z,
            zip_q: z,
            rated_v: None,
        }
    }

    fn onoff(id: &str, wiring: Wiring, p: f64) -> DeclAppliance {
        DeclAppliance {
            id: id.into(),
            label: id.into(),
            states: vec![vec![], vec![draw(wiring, p)]],
            steps: Steps::Jumps(vec![(0, 1, 1.0, 1.0), (1, 0, 1.0, 1.0)]),
            habit: None,
        }
    }

    fn step(t: i64, l1: f64, l2: f64) -> Event {
        Event {
            time_ms: t,
            delta: vec![C64::new(l1, 0.0), C64::new(l2, 0.0)],
            before: vec![C64::ZERO; 2],
            v_before: vec![f64::NAN; 2],
            v_after: vec![f64::NAN; 2],
            se: vec![0.0; 2],
        }
    }

    /// A 1.5 kW kettle on L1-N and a 4.5 kW heater across L1-L2 (half on
    /// each leg of a split-phase supply): the steps start the heater, then
    /// the kettle, then stop the heater; L1 at each moment has what is on.
    #[test]
    fn the_steps_replayed_give_what_runs_on_each_line() {
        let d = Declared {
            file: "d.toml".into(),
            supply_at: String::new(),
            supply: Supply {
                kind: SupplyKind::SplitPhase,
                voltage_v: 120.0,
                service_a: 100.0,
            },
            channels: (0..2)
                .map(|c| DeclChannel {
                    conductor: Some(c),
                    reversed: false,
                })
                .collect(),
            appliances: vec![
                onoff("kettle", Wiring::LineNeutral(0), 1500.0),
                onoff("heater", Wiring::LineLine(0, 1), 4500.0),
            ],
            partial: false,
            real_only: false,
            timezone: "UTC".into(),
            generation: vec![],
        };
        let m = declared_metering(&d, &[false, false]);
        let ev = [
            step(1_000, 2250.0, 2250.0),
            step(2_000, 1480.0, 0.0),
            step(3_000, -2240.0, -2260.0),
            // 700 W on L2 fits nothing declared: no state moves.
            step(4_000, 0.0, 700.0),
        ];
        let at = [
            (0, 500),
            (0, 1_500),
            (0, 2_500),
            (1, 2_500),
            (1, 3_500),
            (0, 4_500),
        ];
        let got = running(&d, &m, &ev, &at);
        let want: Vec<Vec<&str>> = vec![
            vec![],
            vec!["heater"],
            vec!["kettle", "heater"],
            vec!["heater"],
            vec![],
            vec!["kettle"],
        ];
        assert_eq!(got, want);
    }
}
