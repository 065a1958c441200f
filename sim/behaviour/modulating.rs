//! Modulating loads (inverter heat pump, EV charger): the running state's
//! power scaled by a reflected random walk within [min, 1], updated every
//! `every_s`; optionally only during sessions started by a habit, with the
//! scale falling linearly to `min` over the last `taper_s` of a session.

use super::dist::sample;
use super::habit::starts;
use super::{Builder, Clock, Timeline};
use crate::rng::RandomStream;
use crate::scenario::Session;
use rand::Rng;
use rand_distr::StandardNormal;

fn reflect(x: f64, lo: f64) -> f64 {
    let mut x = x;
    for _ in 0..4 {
        if x > 1.0 {
            x = 2.0 - x;
        } else if x < lo {
            x = 2.0 * lo - x;
        } else {
            break;
        }
    }
    x.clamp(lo, 1.0)
}

pub fn generate(
    run: usize,
    min: f64,
    wander: f64,
    every_s: f64,
    session: Option<&Session>,
    clock: &Clock,
    rng: &mut RandomStream,
) -> Timeline {
    let every = clock.steps_of(every_s);
    let mut b = Builder::new(clock.steps);
    let mut x = rng.random_range(min..=1.0);
    let step = |x: f64, rng: &mut RandomStream| {
        reflect(x + wander * rng.sample::<f64, _>(StandardNormal), min)
    };
    let Some(sess) = session else {
        while b.push(run, every, x) {
            x = step(x, rng);
        }
        return b.finish(run);
    };
    let rest = 0;
    for s in starts(&sess.habit, clock, rng) {
        // A start during a session waits for it to end (see `program`).
        b.fill_to(rest, s.max(b.now()), 1.0);
        let total = clock.steps_of(sample(&sess.length, rng));
        let taper = clock.steps_of(sess.taper_s).min(total);
        let flat = if sess.taper_s > 0.0 {
            total - taper
        } else {
            total
        };
        x = 1.0;
        let mut done = 0;
        while done < flat {
            let l = every.min(flat - done);
            b.push(run, l, x);
            done += l;
            x = step(x, rng);
        }
        if sess.taper_s > 0.0 {
            let parts = taper.div_ceil(every).max(1);
            let x0 = x;
            for k in 0..parts {
                let l = every.min(taper - k * every);
                let f = (k as f64 + 1.0) / parts as f64;
                b.push(run, l, x0 + (min - x0) * f);
            }
        }
        if b.done() {
            break;
        }
    }
    b.finish(rest)
}
