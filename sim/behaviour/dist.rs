//! Sampling of the duration distributions declared in scenarios.

use crate::rng::RandomStream;
use crate::scenario::Dist;
use rand::Rng;
use rand_distr::{Distribution, Gamma, LogNormal};

/// One duration in seconds.
pub fn sample(d: &Dist, rng: &mut RandomStream) -> f64 {
    match *d {
        Dist::Fixed { value_s } => value_s,
        Dist::Uniform { min_s, max_s } => rng.random_range(min_s..max_s),
        Dist::Lognormal { median_s, spread } => LogNormal::new(median_s.ln(), spread)
            .expect("checked when parsed")
            .sample(rng),
        Dist::Gamma { mean_s, shape } => Gamma::new(shape, mean_s / shape)
            .expect("checked when parsed")
            .sample(rng),
    }
}

/// Index drawn with probability proportional to `weights`.
pub fn categorical(weights: &[f64], rng: &mut RandomStream) -> usize {
    let total: f64 = weights.iter().sum();
    let mut u = rng.random::<f64>() * total;
    for (i, w) in weights.iter().enumerate() {
        if u < *w {
            return i;
        }
        u -= w;
    }
    weights.iter().rposition(|w| *w > 0.0).unwrap_or(0)
}
