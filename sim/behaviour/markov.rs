//! Semi-Markov states: a sampled dwell in each, then a jump drawn from the
//! state's row of transition probabilities.

use super::dist::{categorical, sample};
use super::{Builder, Clock, Timeline};
use crate::rng::RandomStream;
use crate::scenario::Dist;
use rand::Rng;

pub fn generate(
    dwell: &[Dist],
    next: &[Vec<f64>],
    clock: &Clock,
    rng: &mut RandomStream,
) -> Timeline {
    let mut b = Builder::new(clock.steps);
    let mut idx = 0;
    let mut len = clock.steps_of(sample(&dwell[0], rng) * rng.random::<f64>());
    while b.push(idx, len, 1.0) {
        idx = categorical(&next[idx], rng);
        len = clock.steps_of(sample(&dwell[idx], rng));
    }
    b.finish(0)
}
