//! Programs (washer, dryer, dishwasher): ordered phases started by a habit.
//! A start that falls while the program still runs is dropped, as a person
//! would not start a running machine.

use super::dist::sample;
use super::habit::starts;
use super::{Builder, Clock, Timeline};
use crate::rng::Stream;
use crate::scenario::{Dist, Habit};

pub fn generate(habit: &Habit, lengths: &[Dist], clock: &Clock, rng: &mut Stream) -> Timeline {
    let mut b = Builder::new(clock.steps);
    for s in starts(habit, clock, rng) {
        if s < b.now() {
            continue;
        }
        b.fill_to(0, s, 1.0);
        for (i, d) in lengths.iter().enumerate() {
            let l = clock.steps_of(sample(d, rng));
            b.push(i + 1, l, 1.0);
        }
        if b.done() {
            break;
        }
    }
    b.finish(0)
}
