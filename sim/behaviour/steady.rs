//! Always on, with the power scaled by (1 + jitter·N(0, 1)) held for `every_s`.

use super::{Builder, Clock, Timeline};
use crate::rng::RandomStream;
use rand::Rng;
use rand_distr::StandardNormal;

pub fn generate(jitter: f64, every_s: f64, clock: &Clock, rng: &mut RandomStream) -> Timeline {
    let mut b = Builder::new(clock.steps);
    if jitter == 0.0 {
        return b.finish(0);
    }
    let every = clock.steps_of(every_s);
    let mut len = ((every as f64 * rng.random::<f64>()) as u64).max(1);
    loop {
        let z: f64 = rng.sample(StandardNormal);
        if !b.push(0, len, (1.0 + jitter * z).max(0.0)) {
            break;
        }
        len = every;
    }
    b.finish(0)
}
