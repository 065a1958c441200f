//! The meter: what a whole-home monitor reports per reporting interval.
//! P and Q are interval means (energy-consistent); V and I are true RMS over
//! the interval; then noise (relative + floor, Gaussian) and quantisation are
//! applied to each conductor's reading, and totals are the sums of the
//! conductor readings, as a real monitor adds its channels.

use crate::electrical::C64;
use crate::rng::{stream, Stream};
use crate::scenario::Meter;
use rand::Rng;
use rand_distr::StandardNormal;

/// Meter readings for a run of consecutive reporting intervals (columnar).
#[derive(Default)]
pub struct Readings {
    pub line_p: Vec<Vec<f32>>,
    pub line_q: Vec<Vec<f32>>,
    pub line_v: Vec<Vec<f32>>,
    pub line_i: Vec<Vec<f32>>,
    pub n_i: Vec<f32>,
    pub total_p: Vec<f32>,
    pub total_q: Vec<f32>,
}

impl Readings {
    pub fn new(lines: usize) -> Self {
        Readings {
            line_p: vec![Vec::new(); lines],
            line_q: vec![Vec::new(); lines],
            line_v: vec![Vec::new(); lines],
            line_i: vec![Vec::new(); lines],
            ..Default::default()
        }
    }
    pub fn rows(&self) -> usize {
        self.n_i.len()
    }
    pub fn clear(&mut self) {
        for v in self.line_p.iter_mut().chain(&mut self.line_q).chain(&mut self.line_v).chain(&mut self.line_i) {
            v.clear();
        }
        self.n_i.clear();
        self.total_p.clear();
        self.total_q.clear();
    }
}

pub struct MeterModel {
    lines: usize,
    settings: Meter,
    nominal_v: f64,
    p: [f64; 3],
    q: [f64; 3],
    v2: [f64; 3],
    i2: [f64; 3],
    n2: f64,
    count: u32,
    noise: Vec<Stream>,
    /// Exact (noise-free) energy per line so far, J.
    pub line_energy_j: [f64; 3],
}

impl MeterModel {
    pub fn new(settings: &Meter, lines: usize, nominal_v: f64, seed: u64) -> Self {
        let noise = (0..lines).map(|x| stream(seed, "meter", &format!("noise-l{}", x + 1))).collect();
        MeterModel { lines, settings: settings.clone(), nominal_v, p: [0.0; 3], q: [0.0; 3], v2: [0.0; 3], i2: [0.0; 3], n2: 0.0, count: 0, noise, line_energy_j: [0.0; 3] }
    }

    /// Adds one simulation step of terminal voltages and line currents.
    #[inline]
    pub fn add(&mut self, v: &[C64; 3], i: &[C64; 3], step_s: f64) {
        let mut n = C64::ZERO;
        for x in 0..self.lines {
            let s = v[x] * i[x].conj();
            self.p[x] += s.re;
            self.q[x] += s.im;
            self.v2[x] += v[x].norm_sqr();
            self.i2[x] += i[x].norm_sqr();
            self.line_energy_j[x] += s.re * step_s;
            n += i[x];
        }
        // Kirchhoff: the neutral returns minus the sum of the line currents.
        self.n2 += n.norm_sqr();
        self.count += 1;
    }

    fn noisy(&self, x: f64, floor: f64, rng: &mut Stream) -> f64 {
        let sd = ((self.settings.noise_relative * x).powi(2) + floor * floor).sqrt();
        if sd == 0.0 {
            x
        } else {
            x + sd * rng.sample::<f64, _>(StandardNormal)
        }
    }

    fn quantise(&self, x: f64) -> f64 {
        let r = self.settings.resolution_w;
        if r > 0.0 {
            (x / r).round() * r
        } else {
            x
        }
    }

    /// Closes the interval and appends its readings.
    pub fn emit(&mut self, out: &mut Readings) {
        let k = self.count as f64;
        let (mut tp, mut tq) = (0.0, 0.0);
        let floor_i = self.settings.noise_floor_w / self.nominal_v;
        let mut noise = std::mem::take(&mut self.noise);
        for x in 0..self.lines {
            let rng = &mut noise[x];
            let p = self.quantise(self.noisy(self.p[x] / k, self.settings.noise_floor_w, rng));
            let q = self.quantise(self.noisy(self.q[x] / k, self.settings.noise_floor_w, rng));
            let v = self.noisy((self.v2[x] / k).sqrt(), 0.0, rng);
            let i = self.noisy((self.i2[x] / k).sqrt(), floor_i, rng).abs();
            out.line_p[x].push(p as f32);
            out.line_q[x].push(q as f32);
            out.line_v[x].push(v as f32);
            out.line_i[x].push(i as f32);
            tp += p;
            tq += q;
        }
        let n = (self.n2 / k).sqrt();
        let n = self.noisy(n, floor_i, &mut noise[0]).abs();
        self.noise = noise;
        out.n_i.push(n as f32);
        out.total_p.push(tp as f32);
        out.total_q.push(tq as f32);
        self.p = [0.0; 3];
        self.q = [0.0; 3];
        self.v2 = [0.0; 3];
        self.i2 = [0.0; 3];
        self.n2 = 0.0;
        self.count = 0;
    }
}
