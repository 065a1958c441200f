//! A battery run for self-consumption: it charges from the home's surplus
//! and discharges to cover its draw, within its power limit and between
//! its reserve and full, following the home's net power after its
//! controller's response time.
//!
//! The net power is what the other loads' timelines give at their nominal
//! voltage (the state's power times the segment's scale); inrush and the
//! voltage dependence of loads are left to the meter to see, as a real
//! controller's slow loop would leave them. Charging and discharging each
//! lose the square root of the round-trip efficiency (common practice, no
//! source).

use super::window::{self, Fit, Piece, Reach};
use super::{Clock, Segment, Timeline};
use crate::scenario::{Appliance, Battery};

/// The run's net nominal power as (first step, watts) pieces, from every
/// load but `skip`.
fn net_power(
    loads: &[&Appliance],
    timelines: &[Timeline],
    skip: usize,
    steps: u64,
) -> Vec<(u64, f64)> {
    let power: Vec<Vec<f64>> = loads
        .iter()
        .map(|a| a.states.iter().map(|s| s.p_w()).collect())
        .collect();
    let mut pos = vec![0usize; loads.len()];
    let mut pieces: Vec<(u64, f64)> = Vec::new();
    let mut t = 0u64;
    while t < steps {
        let mut net = 0.0;
        let mut next = steps;
        for (k, tl) in timelines.iter().enumerate() {
            if k == skip || tl.segments.is_empty() {
                continue;
            }
            while tl.segments[pos[k]].end <= t && pos[k] + 1 < tl.segments.len() {
                pos[k] += 1;
            }
            let seg = &tl.segments[pos[k]];
            net += power[k][seg.state as usize] * seg.scale as f64;
            next = next.min(seg.end);
        }
        if pieces.last().is_none_or(|l| l.1 != net) {
            pieces.push((t, net));
        }
        t = next.max(t + 1);
    }
    pieces
}

/// A state of charge this close to a limit counts as at it (no endless
/// slivers of charge from rounding).
const AT_LIMIT: f64 = 1e-9;

/// What the battery does over at most `len` steps from state of charge
/// `soc` when the home's net power is `net`: (state, power, steps, soc
/// change per step). It stops exactly at a limit: the last step before it
/// runs at the power that reaches it.
fn action(b: &Battery, net: f64, soc: f64, len: u64, dt: f64) -> (u16, f64, u64, f64) {
    let eta = b.efficiency.sqrt();
    let (state, p, per_step, room) = if net > 0.0 && soc > b.reserve + AT_LIMIT {
        let p = net.min(b.power_w);
        (2, p, -p * dt / eta / b.capacity_j, soc - b.reserve)
    } else if net < 0.0 && soc < 1.0 - AT_LIMIT {
        let p = (-net).min(b.power_w);
        (1, p, p * dt * eta / b.capacity_j, 1.0 - soc)
    } else {
        return (0, 0.0, len, 0.0);
    };
    let exact = room / per_step.abs();
    if exact >= len as f64 {
        return (state, p, len, per_step);
    }
    if exact >= 1.0 {
        return (state, p, exact.floor() as u64, per_step);
    }
    (state, p * exact, 1, per_step * exact)
}

/// The battery's timeline over `steps`, with its state of charge at each
/// segment's start and its change per step in `level`.
pub fn generate(
    b: &Battery,
    loads: &[&Appliance],
    timelines: &[Timeline],
    me: usize,
    steps: u64,
    step_s: f64,
) -> Timeline {
    let delay = ((b.response_s / step_s).round() as u64).max(1);
    let net = net_power(loads, timelines, me, steps);
    let mut out = Timeline::default();
    let mut soc = b.initial;
    for (i, &(start, p)) in net.iter().enumerate() {
        // The controller sees each change `delay` steps late.
        let from = if i == 0 {
            0
        } else {
            (start + delay).min(steps)
        };
        let to = net.get(i + 1).map_or(steps, |n| (n.0 + delay).min(steps));
        let mut t = from;
        while t < to {
            let (state, power, len, per_step) = action(b, p, soc, to - t, step_s);
            out.segments.push(Segment {
                start: t,
                end: t + len,
                state,
                scale: (power / b.power_w) as f32,
            });
            out.level.push((soc, per_step));
            soc = (soc + per_step * len as f64).clamp(b.reserve.min(soc), 1.0);
            if (soc - b.reserve).abs() < AT_LIMIT {
                soc = b.reserve;
            } else if 1.0 - soc < AT_LIMIT {
                soc = 1.0;
            }
            t += len;
        }
    }
    if out.segments.is_empty() {
        out.segments.push(Segment {
            start: 0,
            end: steps,
            state: 0,
            scale: 0.0,
        });
        out.level.push((soc, 0.0));
    }
    out
}

/// How long each day block of a battery runs before its day, from
/// `initial`, and after it: a block hands over to the next where both hold
/// the same charge, which they do from the first time both reach full or
/// the reserve (the charge then no longer depends on where it started).
pub const WARM_UP: Reach = Reach {
    warm_ms: 86_400_000,
    horizon_ms: 2 * 86_400_000,
};

/// Whether two blocks of a battery are in the same state with the same
/// charge at run step `t`.
fn same_charge(a: &Piece<()>, b: &Piece<()>, t: i64) -> Fit {
    if a.state(0, t) == b.state(0, t) && a.level(0, t) == b.level(0, t) {
        Fit::Tight
    } else {
        Fit::No
    }
}

/// The battery's timeline over `run` (a part of `wide`, the clock of the
/// other loads' `timelines`), made in day blocks
/// ([`window::assemble_group`]) so a run is a slice of the battery's one
/// history.
pub fn history(
    b: &Battery,
    loads: &[&Appliance],
    timelines: &[Timeline],
    me: usize,
    wide: &Clock,
    run: &Clock,
) -> Timeline {
    let step_ms = (wide.step_s * 1000.0).round() as i64;
    let joined = window::assemble_group(
        run,
        WARM_UP,
        |c, _| {
            let from = (c.start_utc_ms - wide.start_utc_ms) / step_ms;
            let part: Vec<Timeline> = timelines.iter().map(|t| t.slice(from, c.steps)).collect();
            (vec![generate(b, loads, &part, me, c.steps, c.step_s)], ())
        },
        same_charge,
    );
    joined.timelines.into_iter().next().unwrap_or_default()
}

#[cfg(test)]
mod tests {
    use super::*;

    fn battery() -> Battery {
        Battery {
            capacity_j: 10_000.0 * 3600.0,
            power_w: 5000.0,
            efficiency: 0.81,
            reserve: 0.1,
            initial: 0.1,
            response_s: 1.0,
        }
    }

    #[test]
    fn charging_stops_when_full_and_stores_the_efficiency() {
        // 4 kW of surplus for 3 h into a 10 kWh battery from 10 %:
        // 9 kWh of room takes 9 / (4 · 0.9) = 2.5 h.
        let b = battery();
        let (state, p, len, per) = action(&b, -4000.0, 0.1, 3 * 3600, 1.0);
        assert_eq!((state, p), (1, 4000.0));
        assert!(len == 8999 || len == 9000, "{len}");
        let soc = 0.1 + per * len as f64;
        // Then the step that lands exactly on full, if any is left.
        let (_, _, last, per2) = action(&b, -4000.0, soc, 100, 1.0);
        let full = if soc < 1.0 - AT_LIMIT {
            soc + per2 * last as f64
        } else {
            soc
        };
        assert!((full - 1.0).abs() < 1e-12, "{full}");
    }

    #[test]
    fn discharge_is_capped_by_power_and_stops_at_the_reserve() {
        let b = battery();
        let (state, p, len, per) = action(&b, 8000.0, 0.5, 10 * 3600, 1.0);
        assert_eq!((state, p), (2, 5000.0));
        // 4 kWh above the reserve, drawn at 5 kW / 0.9 from the cells.
        assert_eq!(len, (0.4f64 * 36e6 / (5000.0 / 0.9)).floor() as u64);
        assert!(per < 0.0);
        assert_eq!(action(&b, 8000.0, 0.1, 100, 1.0).0, 0);
        assert_eq!(action(&b, -8000.0, 1.0, 100, 1.0).0, 0);
    }
}
