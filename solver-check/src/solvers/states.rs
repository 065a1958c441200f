//! Learning an appliance's power levels from its training truth: a 1-D
//! k-means (Lloyd's algorithm) with up to four levels, started at quantiles,
//! levels closer than 15 W merged. Each level keeps its share of time (the
//! prior) and its mean split over the conductors.

#[derive(Clone, Debug)]
pub struct PowerLevel {
    pub p_w: f64,
    pub prior: f64,
    /// Mean power on each conductor while at this level (co-conductor).
    pub split: Vec<f64>,
}

/// Levels of `p` (one value per training row); `per_line[x][t]` the power on
/// conductor x at row t (may be empty).
pub fn learn(p: &[f64], per_line: &[&[f64]]) -> Vec<PowerLevel> {
    if p.is_empty() {
        return vec![PowerLevel {
            p_w: 0.0,
            prior: 1.0,
            split: vec![0.0; per_line.len()],
        }];
    }
    // A sample of at most 200 000 rows keeps learning fast on long training.
    let stride = (p.len() / 200_000).max(1);
    let sample: Vec<f64> = p.iter().step_by(stride).copied().collect();
    let mut sorted = sample.clone();
    sorted.sort_by(|a, b| a.partial_cmp(b).unwrap());
    let q = |f: f64| sorted[((sorted.len() - 1) as f64 * f) as usize];
    let mut c: Vec<f64> = vec![q(0.0), q(0.5), q(0.9), q(1.0)];
    for _ in 0..30 {
        let mut sum = vec![0.0; c.len()];
        let mut n = vec![0usize; c.len()];
        for &x in &sample {
            let k = nearest(&c, x);
            sum[k] += x;
            n[k] += 1;
        }
        let next: Vec<f64> = (0..c.len())
            .map(|k| if n[k] > 0 { sum[k] / n[k] as f64 } else { c[k] })
            .collect();
        if next == c {
            break;
        }
        c = next;
    }
    c.sort_by(|a, b| a.partial_cmp(b).unwrap());
    c.dedup_by(|a, b| (*a - *b).abs() < 15.0);
    let mut levels: Vec<PowerLevel> = c
        .iter()
        .map(|&p| PowerLevel {
            p_w: p,
            prior: 0.0,
            split: vec![0.0; per_line.len()],
        })
        .collect();
    let mut n = vec![0usize; levels.len()];
    for (t, &x) in p.iter().enumerate().step_by(stride) {
        let k = nearest(&c, x);
        n[k] += 1;
        for (j, line) in per_line.iter().enumerate() {
            levels[k].split[j] += line[t];
        }
    }
    let total: usize = n.iter().sum();
    for (k, l) in levels.iter_mut().enumerate() {
        l.prior = (n[k] as f64 / total.max(1) as f64).max(1e-6);
        for s in l.split.iter_mut() {
            *s /= n[k].max(1) as f64;
        }
    }
    levels
}

fn nearest(c: &[f64], x: f64) -> usize {
    let mut best = 0;
    for k in 1..c.len() {
        if (c[k] - x).abs() < (c[best] - x).abs() {
            best = k;
        }
    }
    best
}
