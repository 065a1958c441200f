//! The meter: what a whole-home monitor reports per reporting interval.
//! P and Q are interval means (energy-consistent); V and I are the RMS over
//! the interval of their fundamental (harmonics live in the waveforms); then noise (relative + floor, Gaussian) and quantisation are
//! applied to each conductor's reading, and totals are the sums of the
//! conductor readings, as a real monitor adds its channels.
//!
//! Faults (`[faults]`, recorded in the manifest) act where they would in a
//! real monitor: CT gain, phase, reversal and placement on the current each
//! step; a missing CT, exchanged channels and dropouts on the readings; a
//! clock error on the time labels (see `dataset::tables`).

use crate::behaviour::dist::sample;
use crate::electrical::C64;
use crate::rng::{stream, RandomStream};
use crate::scenario::{Faults, Meter};
use rand::Rng;
use rand_distr::StandardNormal;

/// Meter readings for a run of consecutive reporting intervals (columnar).
/// A null reading is NaN here and null in the files.
#[derive(Clone, Default)]
pub struct Readings {
    /// `[line]`: mean active power per interval, W.
    pub line_p: Vec<Vec<f32>>,
    /// `[line]`: mean reactive power per interval, var.
    pub line_q: Vec<Vec<f32>>,
    /// `[line]`: RMS line-to-neutral voltage per interval, V.
    pub line_v: Vec<Vec<f32>>,
    /// `[line]`: RMS line current per interval, A.
    pub line_i: Vec<Vec<f32>>,
    /// RMS neutral current per interval, A.
    pub n_i: Vec<f32>,
    /// Sum of the line readings' active power per interval, W.
    pub total_p: Vec<f32>,
    /// Sum of the line readings' reactive power per interval, var.
    pub total_q: Vec<f32>,
    /// Cumulative energy register per line, Wh (with `faults.register`).
    pub energy: Vec<Vec<f64>>,
    /// The production channel's mean power per interval, W, positive while
    /// the PV produces (with `meter.production`).
    pub production_p: Vec<f32>,
    /// False for intervals lost to a dropout.
    pub present: Vec<bool>,
    /// Intervals closed but not yet read through the meter's noise
    /// ([`MeterNoise::read_all`]): the columns above hold none of them yet.
    pub means: Vec<IntervalMeans>,
}

/// One reporting interval as the meter measured it before its noise: the
/// means over the interval (CT faults applied), per line and for the
/// neutral, and the register and production channel at its close.
#[derive(Clone, Copy, Debug, Default)]
pub struct IntervalMeans {
    /// `[line]`: mean active power, W.
    pub p: [f64; 3],
    /// `[line]`: mean reactive power, var.
    pub q: [f64; 3],
    /// `[line]`: RMS line-to-neutral voltage, V.
    pub v: [f64; 3],
    /// `[line]`: RMS current the CT delivers, A.
    pub i: [f64; 3],
    /// RMS neutral current, A.
    pub n: f64,
    /// `[line]`: the energy register, Wh.
    pub register_wh: [f64; 3],
    /// The production channel's mean power, W (zero without one).
    pub production: f64,
}

impl Readings {
    /// Empty columns for a supply of `lines` line conductors.
    pub fn new(lines: usize) -> Self {
        Readings {
            line_p: vec![Vec::new(); lines],
            line_q: vec![Vec::new(); lines],
            line_v: vec![Vec::new(); lines],
            line_i: vec![Vec::new(); lines],
            energy: vec![Vec::new(); lines],
            ..Default::default()
        }
    }
    /// Reporting intervals held (read or not yet read through the noise).
    pub fn rows(&self) -> usize {
        self.n_i.len() + self.means.len()
    }
    /// Empties every column, keeping the allocations for the next chunk.
    pub fn clear(&mut self) {
        for v in self
            .line_p
            .iter_mut()
            .chain(&mut self.line_q)
            .chain(&mut self.line_v)
            .chain(&mut self.line_i)
        {
            v.clear();
        }
        self.energy.iter_mut().for_each(Vec::clear);
        self.n_i.clear();
        self.total_p.clear();
        self.total_q.clear();
        self.production_p.clear();
        self.present.clear();
        self.means.clear();
    }
}

/// Intervals lost to dropouts: (first row, rows), sorted, from the stream
/// (seed, "meter", "dropouts"). Up-times are exponential with the mean that
/// makes the expected lost share equal `rate`; gap lengths follow the
/// declared distribution, rounded to whole intervals (at least one).
pub fn dropout_gaps(faults: &Faults, interval_s: f64, rows: u64, seed: u64) -> Vec<(u64, u64)> {
    let Some(d) = &faults.dropouts else {
        return Vec::new();
    };
    if d.rate <= 0.0 {
        return Vec::new();
    }
    let mut rng = stream(seed, "meter", "dropouts");
    let mean_gap_rows = (d.length.mean_s() / interval_s).max(1.0);
    let mean_up_rows = mean_gap_rows * (1.0 - d.rate) / d.rate;
    let mut gaps = Vec::new();
    // Positions in rows kept as reals and rounded, so rounding adds no bias.
    let mut t = mean_up_rows * -(1.0 - rng.random::<f64>()).ln();
    loop {
        let start = t.round() as u64;
        if start >= rows {
            break;
        }
        let len =
            (((sample(&d.length, &mut rng) / interval_s).round() as u64).max(1)).min(rows - start);
        gaps.push((start, len));
        t = (start + len) as f64 + (mean_up_rows * -(1.0 - rng.random::<f64>()).ln()).max(1.0);
    }
    gaps
}

/// The monitor at work: accumulates each step's phasors and closes each
/// interval into its [`IntervalMeans`]; its [`MeterNoise`] (here, or on
/// the writer's side) turns those into readings.
pub(crate) struct MeterModel {
    lines: usize,
    /// Per line: (conductor whose current the CT sees, factor applied).
    ct: [(usize, C64); 3],
    p: [f64; 3],
    q: [f64; 3],
    v2: [f64; 3],
    i2: [f64; 3],
    n2: f64,
    count: u32,
    /// The production channel's power summed over the interval (with
    /// `meter.production`).
    production: Option<f64>,
    /// Exact (noise-free, fault-free) energy per line so far, J.
    pub line_energy_j: [f64; 3],
    /// What the meter's register counts (after CT faults), J.
    register_j: [f64; 3],
    gaps: Vec<(u64, u64)>,
    /// The noise read into each interval as it closes; `None` when the
    /// intervals are left in [`Readings::means`] for a noise stage elsewhere.
    noise: Option<MeterNoise>,
}

impl MeterModel {
    /// The meter of a home with `lines` line conductors over `rows`
    /// reporting intervals; `noise_here` reads each interval through its
    /// noise as it closes.
    pub fn new(s: &crate::scenario::Scenario, lines: usize, rows: u64, noise_here: bool) -> Self {
        let mut ct = [
            (0, C64::new(1.0, 0.0)),
            (1, C64::new(1.0, 0.0)),
            (2, C64::new(1.0, 0.0)),
        ];
        for f in &s.faults.ct {
            let sign = if f.reversed { -1.0 } else { 1.0 };
            ct[f.line] = (
                f.on.unwrap_or(f.line),
                C64::polar_deg(sign * (1.0 + f.gain), f.phase_deg),
            );
        }
        MeterModel {
            lines,
            ct,
            p: [0.0; 3],
            q: [0.0; 3],
            v2: [0.0; 3],
            i2: [0.0; 3],
            n2: 0.0,
            count: 0,
            production: s.meter.production.then_some(0.0),
            line_energy_j: [0.0; 3],
            register_j: [0.0; 3],
            gaps: dropout_gaps(&s.faults, s.meter.interval_s, rows, s.run.seed),
            noise: noise_here.then(|| MeterNoise::new(s, lines, rows)),
        }
    }

    pub fn gaps(&self) -> &[(u64, u64)] {
        &self.gaps
    }

    /// The largest line and neutral currents read so far (zero when the
    /// noise stage is elsewhere).
    pub fn peaks(&self) -> ([f64; 3], f64) {
        self.noise
            .as_ref()
            .map_or(([0.0; 3], 0.0), |n| (n.line_peak_a, n.neutral_peak_a))
    }

    /// Adds one simulation step of terminal voltages and line currents.
    #[inline]
    pub fn add(&mut self, v: &[C64; 3], i: &[C64; 3], step_s: f64) {
        let mut n = C64::ZERO;
        for x in 0..self.lines {
            let exact = v[x] * i[x].conj();
            self.line_energy_j[x] += exact.re * step_s;
            // What the CT of channel x delivers: the current of the conductor
            // it is clamped on, with its gain, phase and orientation.
            let (on, k) = self.ct[x];
            let im = i[on] * k;
            let s = v[x] * im.conj();
            self.p[x] += s.re;
            self.q[x] += s.im;
            self.v2[x] += v[x].norm_sqr();
            self.i2[x] += im.norm_sqr();
            self.register_j[x] += s.re * step_s;
            n += i[x];
        }
        // Kirchhoff: the neutral returns minus the sum of the line currents.
        self.n2 += n.norm_sqr();
        self.count += 1;
    }

    /// Adds one step of the PV's power (W, negative while it produces) to
    /// the production channel.
    #[inline]
    pub fn add_production(&mut self, pv_p_w: f64) {
        if let Some(sum) = &mut self.production {
            *sum -= pv_p_w;
        }
    }

    /// Closes the interval: its readings appended to `out`, or its means
    /// when the noise stage is elsewhere.
    pub fn emit(&mut self, out: &mut Readings) {
        let k = self.count as f64;
        let mut m = IntervalMeans {
            n: (self.n2 / k).sqrt(),
            production: self.production.map_or(0.0, |sum| sum / k),
            ..Default::default()
        };
        for x in 0..self.lines {
            m.p[x] = self.p[x] / k;
            m.q[x] = self.q[x] / k;
            m.v[x] = (self.v2[x] / k).sqrt();
            m.i[x] = (self.i2[x] / k).sqrt();
            m.register_wh[x] = self.register_j[x] / 3600.0;
        }
        match &mut self.noise {
            Some(noise) => noise.read(&m, out),
            None => out.means.push(m),
        }
        self.p = [0.0; 3];
        self.q = [0.0; 3];
        self.v2 = [0.0; 3];
        self.i2 = [0.0; 3];
        self.n2 = 0.0;
        self.count = 0;
        if let Some(sum) = &mut self.production {
            *sum = 0.0;
        }
    }
}

/// What the monitor reports of each interval's means: noise (relative +
/// floor, Gaussian) and quantisation, then the faults on the readings
/// (missing CT, exchanged channels, dropouts, a whole-home meter) and the
/// totals. Each interval draws from the same streams in the same order
/// wherever this runs, so the readings do not depend on it.
pub struct MeterNoise {
    lines: usize,
    settings: Meter,
    faults: Faults,
    nominal_v: f64,
    noise: Vec<RandomStream>,
    /// The production channel's own stream (so the line channels draw as
    /// without it).
    production: Option<RandomStream>,
    gaps: Vec<(u64, u64)>,
    gap: usize,
    row: u64,
    /// Largest RMS current in each line conductor as read, A.
    pub line_peak_a: [f64; 3],
    /// Largest RMS neutral current as read, A.
    pub neutral_peak_a: f64,
}

impl MeterNoise {
    /// The noise stage of `s`'s meter on `lines` line conductors over
    /// `rows` reporting intervals, from the first.
    pub fn new(s: &crate::scenario::Scenario, lines: usize, rows: u64) -> Self {
        let seed = s.run.seed;
        MeterNoise {
            lines,
            settings: s.meter.clone(),
            faults: s.faults.clone(),
            nominal_v: s.home.voltage_v,
            noise: (0..lines)
                .map(|x| stream(seed, "meter", &format!("noise-l{}", x + 1)))
                .collect(),
            production: s
                .meter
                .production
                .then(|| stream(seed, "meter", "noise-production")),
            gaps: dropout_gaps(&s.faults, s.meter.interval_s, rows, seed),
            gap: 0,
            row: 0,
            line_peak_a: [0.0; 3],
            neutral_peak_a: 0.0,
        }
    }

    /// Reads every interval waiting in `out.means` into its columns.
    pub fn read_all(&mut self, out: &mut Readings) {
        let mut means = std::mem::take(&mut out.means);
        for m in &means {
            self.read(m, out);
        }
        means.clear();
        out.means = means;
    }

    fn noisy(&self, x: f64, floor: f64, rng: &mut RandomStream) -> f64 {
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

    /// Whether the interval being read was lost to a dropout.
    fn lost(&mut self) -> bool {
        while self.gap < self.gaps.len()
            && self.gaps[self.gap].0 + self.gaps[self.gap].1 <= self.row
        {
            self.gap += 1;
        }
        self.gaps
            .get(self.gap)
            .is_some_and(|&(a, l)| self.row >= a && self.row < a + l)
    }

    /// Each line's reading [p, q, v, i] and the neutral's, with noise,
    /// quantisation, a missing CT and exchanged channels.
    fn channels(&mut self, m: &IntervalMeans) -> ([[f64; 4]; 3], [f64; 3], f64) {
        let floor_w = self.settings.noise_floor_w;
        let floor_i = floor_w / self.nominal_v;
        let mut noise = std::mem::take(&mut self.noise);
        let mut vals = [[0.0f64; 4]; 3];
        for x in 0..self.lines {
            let rng = &mut noise[x];
            let p = self.quantise(self.noisy(m.p[x], floor_w, rng));
            let q = self.quantise(self.noisy(m.q[x], floor_w, rng));
            let v = self.noisy(m.v[x], 0.0, rng);
            let i = self.noisy(m.i[x], floor_i, rng).abs();
            vals[x] = [p, q, v, i];
        }
        let n = self.noisy(m.n, floor_i, &mut noise[0]).abs();
        self.noise = noise;
        let mut energy = m.register_wh;
        if let Some(x) = self.faults.no_ct {
            vals[x] = [f64::NAN, f64::NAN, vals[x][2], f64::NAN];
            energy[x] = f64::NAN;
        }
        if let Some((a, b)) = self.faults.swap {
            vals.swap(a, b);
            energy.swap(a, b);
        }
        (vals, energy, n)
    }

    /// Reads one interval and appends its readings.
    fn read(&mut self, m: &IntervalMeans, out: &mut Readings) {
        let (vals, energy, n) = self.channels(m);
        // A dropout loses the whole interval.
        let lost = self.lost();
        let (mut tp, mut tq) = (0.0, 0.0);
        for x in 0..self.lines {
            let [p, q, v, i] = if lost { [f64::NAN; 4] } else { vals[x] };
            out.line_p[x].push(p as f32);
            out.line_q[x].push(q as f32);
            out.line_v[x].push(v as f32);
            out.line_i[x].push(i as f32);
            out.energy[x].push(if lost { f64::NAN } else { energy[x] });
            // The total adds the channels that read something.
            if !p.is_nan() {
                tp += p;
                tq += q;
            }
        }
        if self.settings.total_only {
            // A whole-home meter: the channels are summed inside it and
            // only the total leaves it.
            for x in 0..self.lines {
                for col in [&mut out.line_p[x], &mut out.line_q[x], &mut out.line_i[x]] {
                    *col.last_mut().expect("pushed above") = f32::NAN;
                }
            }
        }
        let n = if self.settings.total_only {
            f64::NAN
        } else {
            n
        };
        out.n_i.push(if lost { f32::NAN } else { n as f32 });
        out.total_p.push(if lost { f32::NAN } else { tp as f32 });
        out.total_q.push(if lost { f32::NAN } else { tq as f32 });
        out.present.push(!lost);
        if let Some(p) = self.production_reading(m.production, lost) {
            out.production_p.push(p);
        }
        self.note_peaks(out);
        self.row += 1;
    }

    /// The production channel's reading of the interval.
    fn production_reading(&mut self, mean: f64, lost: bool) -> Option<f32> {
        let mut rng = self.production.take()?;
        let p = self.quantise(self.noisy(mean, self.settings.noise_floor_w, &mut rng));
        self.production = Some(rng);
        Some(if lost { f32::NAN } else { p as f32 })
    }

    /// The line and neutral currents of the last reading, into the peaks
    /// (a null reading, NaN, leaves them).
    fn note_peaks(&mut self, out: &Readings) {
        for x in 0..self.lines {
            let i = *out.line_i[x].last().expect("pushed by read") as f64;
            self.line_peak_a[x] = self.line_peak_a[x].max(i);
        }
        let n = *out.n_i.last().expect("pushed by read") as f64;
        self.neutral_peak_a = self.neutral_peak_a.max(n);
    }
}
