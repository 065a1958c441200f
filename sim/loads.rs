//! Every load of a home over a run: the behaviour timelines, the
//! thermostatic loads' from the heat balance ([`crate::thermal::drive`])
//! and a battery's from the net power of the others, made in the order they
//! depend on each other. Above both [`crate::behaviour`] and
//! [`crate::thermal`], which make the parts.

use crate::behaviour::{storage, timeline, window, Clock, Timeline};
use crate::scenario::{Appliance, Behaviour, Scenario};

/// Timelines of every load of a scenario (appliances, then unmetered loads).
pub fn timelines(s: &Scenario, steps: u64) -> Vec<Timeline> {
    timelines_with_record(s, steps).0
}

/// [`timelines`], with what the heat balance added up to.
///
/// A building's heat balance and a battery run in day blocks, each from a
/// warm-up before its day ([`crate::thermal::WARM_UP`],
/// `storage::WARM_UP`), so the other loads are made over a wider clock
/// than the run: the blocks reaching furthest back are the battery's, whose
/// days need the thermostatic loads over their warm-up, whose days need the
/// other loads over theirs.
pub fn timelines_with_record(s: &Scenario, steps: u64) -> (Vec<Timeline>, crate::thermal::Record) {
    let tz = jiff::tz::TimeZone::get(&s.home.timezone).expect("checked when parsed");
    let run = Clock {
        steps,
        step_s: s.run.step_s,
        start_utc_ms: s.run.start_utc_ms,
        tz: &tz,
        site: s.home.site,
    };
    let loads: Vec<&Appliance> = s.loads().collect();
    let has = |f: fn(&Behaviour) -> bool| loads.iter().any(|a| f(&a.behaviour));
    let thermal = s.building.is_some()
        && s.weather.is_some()
        && has(|b| matches!(b, Behaviour::Thermostat { .. }));
    let battery = has(|b| matches!(b, Behaviour::Storage(_)));
    let step_ms = (s.run.step_s * 1000.0).round() as i64;
    let margins = |on: bool, r: window::Reach| if on { r.margins(step_ms) } else { (0, 0) };
    let (b_pre, b_post) = margins(battery, storage::WARM_UP);
    let (t_pre, t_post) = margins(thermal, crate::thermal::WARM_UP);
    let wide = Clock {
        steps: b_pre + t_pre + steps + b_post + t_post,
        start_utc_ms: s.run.start_utc_ms - (b_pre + t_pre) as i64 * step_ms,
        ..run
    };
    // The part the thermostatic loads are stitched over: the battery's reach.
    let cover = Clock {
        steps: b_pre + steps + b_post,
        start_utc_ms: s.run.start_utc_ms - b_pre as i64 * step_ms,
        ..run
    };
    // One outdoor series for the building and the PV modules alike.
    let weather = s.weather.as_ref().map(|w| {
        let length_s = wide.steps as f64 * s.run.step_s;
        crate::weather::series(w, wide.start_utc_ms, length_s, &tz, s.run.seed)
    });
    let mut out: Vec<Timeline> = loads
        .iter()
        .map(|a| timeline(a, &wide, s.run.seed, weather.as_ref()))
        .collect();
    let run_in_cover = b_pre as i64..(b_pre + steps) as i64;
    let record = crate::thermal::drive(
        s,
        &mut out,
        &wide,
        (&cover, t_pre),
        run_in_cover,
        weather.as_ref(),
    );
    // A store follows the net power of everything else, so it comes last.
    let mut batteries = Vec::new();
    for (k, a) in loads.iter().enumerate() {
        if let Behaviour::Storage(b) = &a.behaviour {
            batteries.push((k, storage::history(b, &loads, &out, k, &wide, &run)));
        }
    }
    let at = (b_pre + t_pre) as i64;
    let mut out: Vec<Timeline> = out.iter().map(|t| t.slice(at, steps)).collect();
    for (k, t) in batteries {
        out[k] = t;
    }
    (out, record)
}
