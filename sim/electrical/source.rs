//! The source voltage: nominal phasors times (1 + c + d_x), where c is a slow
//! common variation and d_x a smaller per-line one, each an Ornstein–Uhlenbeck
//! process (exact discretisation) held inside the supply's normal band.
//! The processes are updated every period/100 (at least every step) and held
//! in between: the variation is slow, and a held source lets the simulator
//! skip the network solve on steps where nothing changes.

use crate::rng::{stream, RandomStream};
use crate::scenario::Source;
use rand::Rng;
use rand_distr::StandardNormal;

/// The source's slow voltage variation: an Ornstein–Uhlenbeck process per
/// line, held inside the supply's band.
pub(crate) struct SourceVoltage {
    every: u64,
    count: u64,
    held: [f64; 3],
    a: f64,
    kick_c: f64,
    kick_d: f64,
    band: f64,
    c: f64,
    d: [f64; 3],
    rng: RandomStream,
}

impl SourceVoltage {
    pub fn new(src: &Source, step_s: f64, seed: u64) -> Self {
        let every = ((src.variation_time_s / 100.0 / step_s).round() as u64).max(1);
        let a = (-(every as f64 * step_s) / src.variation_time_s).exp();
        let k = (1.0 - a * a).sqrt();
        let mut rng = stream(seed, "source", "voltage");
        // Start from the stationary distribution.
        let c = src.variation * rng.sample::<f64, _>(StandardNormal);
        let d = [0, 1, 2].map(|_| src.variation / 3.0 * rng.sample::<f64, _>(StandardNormal));
        SourceVoltage {
            every,
            count: 0,
            held: [1.0; 3],
            a,
            kick_c: src.variation * k,
            kick_d: src.variation / 3.0 * k,
            band: src.band,
            c,
            d,
            rng,
        }
    }

    /// Advances one step; returns the per-line magnitude factors and whether
    /// they changed since the previous step.
    pub fn next(&mut self, lines: usize) -> ([f64; 3], bool) {
        self.count += 1;
        if self.count > 1 && !(self.count - 1).is_multiple_of(self.every) {
            return (self.held, false);
        }
        self.c = self.a * self.c + self.kick_c * self.rng.sample::<f64, _>(StandardNormal);
        let mut f = [1.0; 3];
        for x in 0..lines {
            self.d[x] =
                self.a * self.d[x] + self.kick_d * self.rng.sample::<f64, _>(StandardNormal);
            f[x] = 1.0 + (self.c + self.d[x]).clamp(-self.band, self.band);
        }
        self.held = f;
        (f, true)
    }
}
