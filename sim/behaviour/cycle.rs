//! Thermostatic cycling: the states in order, each for a sampled dwell, with
//! an optional extra state (defrost) inserted after a full cycle once its
//! period has elapsed.

use super::dist::sample;
use super::{Builder, Clock, Timeline};
use crate::rng::RandomStream;
use crate::scenario::{Dist, Extra};
use rand::Rng;

pub fn generate(
    dwell: &[Dist],
    extra: Option<&Extra>,
    clock: &Clock,
    rng: &mut RandomStream,
) -> Timeline {
    let n = dwell.len();
    let mut b = Builder::new(clock.steps);
    // Start in a state chosen by its share of the mean cycle, part-way through
    // its dwell, so the first hours look like any others.
    let means: Vec<f64> = dwell.iter().map(|d| d.mean_s()).collect();
    let mut idx = super::dist::categorical(&means, rng);
    let mut len = clock.steps_of(sample(&dwell[idx], rng) * rng.random::<f64>());
    let mut since_extra = extra
        .map(|e| e.every_s * rng.random::<f64>())
        .unwrap_or(0.0);
    while b.push(idx, len, 1.0) {
        since_extra += len as f64 * clock.step_s;
        idx = (idx + 1) % n;
        if idx == 0 {
            if let Some(e) = extra {
                if since_extra >= e.every_s {
                    let l = clock.steps_of(sample(&e.length, rng));
                    if !b.push(e.state, l, 1.0) {
                        break;
                    }
                    since_extra = 0.0;
                }
            }
        }
        len = clock.steps_of(sample(&dwell[idx], rng));
    }
    b.finish(0)
}
