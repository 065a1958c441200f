//! Programs (washer, dryer, dishwasher): ordered phases started by a habit.
//! A start that falls while the program still runs waits for it to end (the
//! next load goes in when the machine is free), so every start the habit
//! draws happens and `starts_per_day` is the rate of starts that happen.

use super::dist::sample;
use super::habit::starts;
use super::{Builder, Clock, Timeline};
use crate::rng::RandomStream;
use crate::scenario::{Dist, Habit};

pub fn generate(
    habit: &Habit,
    lengths: &[Dist],
    clock: &Clock,
    rng: &mut RandomStream,
) -> Timeline {
    let mut b = Builder::new(clock.steps);
    for s in starts(habit, clock, rng) {
        b.fill_to(0, s.max(b.now()), 1.0);
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
