//! High-rate waveforms for windows of the run, as float WAV files: one
//! channel per line voltage and line current, and the neutral current.
//!
//! Within each simulation step the terminal voltages are the step's phasors
//! (pure 50/60 Hz), and each draw's current is its fundamental phasor plus
//! its odd harmonics: i(t) = √2·|I|·Σ_h m_h·cos(h·(ωt + arg I) + φ_h). With a
//! sinusoidal voltage the harmonics carry no real power, so the mean of v·i
//! over whole cycles is the step's P. Inrush decays continuously,
//! 1 + (peak − 1)·e^(−t/τ), whose step mean is what the meter sees. The
//! neutral current is minus the sum of the line currents, sample by sample.

use crate::electrical::{Network, Terminals, C64, NEUTRAL};
use crate::scenario::{Inrush, Scenario};
use serde_json::{json, Value};
use solver_check::contract::{line_name, NEUTRAL_NAME};
use std::io::{self, BufWriter};
use std::path::{Path, PathBuf};

struct Window {
    first: u64,
    end: u64,
    file: PathBuf,
    name: String,
    start_local: String,
    out: WavOut,
    samples: u64,
}

pub(crate) struct Recorder {
    windows: Vec<Window>,
    rate: f64,
    omega: f64,
    step_s: f64,
    lines: usize,
    per_step: usize,
    scale_v: f64,
    scale_i: f64,
    max_order: usize,
    error: Option<io::Error>,
    buf: Vec<f32>,
}

/// One WAV file being written: 32-bit IEEE float samples, interleaved, one
/// channel per conductor quantity (`hound` writes the header and completes
/// the sizes when finalized).
type WavOut = hound::WavWriter<BufWriter<std::fs::File>>;

fn wav_error(e: hound::Error) -> io::Error {
    match e {
        hound::Error::IoError(e) => e,
        other => io::Error::other(other.to_string()),
    }
}

/// An inrushing appliance's harmonic phasors: when its inrush began (s),
/// its shape, and `[line][order]` phasors at full envelope.
type Inrushing = (f64, Inrush, Vec<Vec<C64>>);

impl Recorder {
    /// Opens one WAV file per window of the scenario in `dir`.
    pub fn new(s: &Scenario, dir: &Path) -> io::Result<Recorder> {
        let lines = s.home.supply.lines();
        let mut windows = Vec::new();
        for (k, w) in s.waveforms.windows.iter().enumerate() {
            let name = format!("waveform-{}.wav", k + 1);
            let file = dir.join(&name);
            let spec = hound::WavSpec {
                channels: (2 * lines + 1) as u16,
                sample_rate: s.waveforms.rate_hz as u32,
                bits_per_sample: 32,
                sample_format: hound::SampleFormat::Float,
            };
            let sink = BufWriter::with_capacity(1 << 20, std::fs::File::create(&file)?);
            let out = hound::WavWriter::new(sink, spec).map_err(wav_error)?;
            let first = (w.offset_s / s.run.step_s).round() as u64;
            windows.push(Window {
                first,
                end: first + (w.length_s / s.run.step_s).round() as u64,
                file,
                name,
                start_local: w.start_local.clone(),
                out,
                samples: 0,
            });
        }
        let max_order = s
            .loads()
            .flat_map(|a| a.states.iter())
            .flat_map(|st| st.draws.iter())
            .flat_map(|d| d.harmonics.iter().map(|h| h.order as usize))
            .max()
            .unwrap_or(1);
        Ok(Recorder {
            windows,
            rate: s.waveforms.rate_hz,
            omega: 2.0 * std::f64::consts::PI * s.home.frequency_hz,
            step_s: s.run.step_s,
            lines,
            per_step: (s.waveforms.rate_hz * s.run.step_s).round() as usize,
            // Full scale: 1.5 × the nominal voltage peak; 2 × the service's current peak.
            scale_v: 1.5 * 2f64.sqrt() * s.home.voltage_v,
            scale_i: 2.0 * 2f64.sqrt() * s.home.service_a,
            max_order,
            error: None,
            buf: Vec::new(),
        })
    }

    pub fn wants(&self, step: u64) -> bool {
        self.windows.iter().any(|w| step >= w.first && step < w.end)
    }

    /// Writes the samples of `step`: the terminals `t` it was solved at, each
    /// appliance's state and scale (without inrush), and its inrush (the step
    /// it began, its shape) if any.
    pub fn record(
        &mut self,
        step: u64,
        net: &Network,
        t: &Terminals,
        state: &[usize],
        scale: &[f64],
        inrush: &[Option<(u64, Inrush)>],
    ) {
        if self.error.is_some() {
            return;
        }
        let (steady, moving) = self.harmonics(net, t, state, scale, inrush);
        self.synthesize(step, t, &steady, &moving);
        for w in self
            .windows
            .iter_mut()
            .filter(|w| step >= w.first && step < w.end)
        {
            if let Some(err) = self.buf.iter().find_map(|&x| w.out.write_sample(x).err()) {
                self.error = Some(wav_error(err));
                return;
            }
            w.samples += self.per_step as u64;
        }
    }

    /// The step's harmonic current phasors per line and odd order: the
    /// steady part, and apart from it each inrushing appliance's (its
    /// envelope moves within the step).
    fn harmonics(
        &self,
        net: &Network,
        t: &Terminals,
        state: &[usize],
        scale: &[f64],
        inrush: &[Option<(u64, Inrush)>],
    ) -> (Vec<Vec<C64>>, Vec<Inrushing>) {
        let n_orders = self.max_order.div_ceil(2);
        let idx = |h: u32| (h as usize - 1) / 2;
        // H[line][order]: harmonic phasors of the steady part; inrushing
        // appliances apart, as their envelope moves within the step.
        let mut steady = vec![vec![C64::ZERO; n_orders]; 3];
        let mut moving: Vec<(f64, Inrush, Vec<Vec<C64>>)> = Vec::new();
        for (k, app) in net.apps.iter().enumerate() {
            let target = match inrush[k] {
                Some((from, ir)) => {
                    moving.push((
                        from as f64 * self.step_s,
                        ir,
                        vec![vec![C64::ZERO; n_orders]; 3],
                    ));
                    &mut moving.last_mut().unwrap().2
                }
                None => &mut steady,
            };
            for el in &app.states[state[k]] {
                let (i, _, _) = el.current(t, scale[k]);
                if i == C64::ZERO {
                    continue;
                }
                let (mag, ang) = (i.abs(), i.im.atan2(i.re));
                let mut add = |h: u32, m: f64, phi: f64| {
                    let c = C64::polar_deg(m * mag, (h as f64 * ang).to_degrees() + phi);
                    if el.a != NEUTRAL {
                        target[el.a as usize][idx(h)] += c;
                    }
                    if el.b != NEUTRAL {
                        target[el.b as usize][idx(h)] += -c;
                    }
                };
                add(1, 1.0, 0.0);
                for h in &el.harmonics {
                    add(h.order, h.magnitude, h.phase_deg);
                }
            }
        }
        (steady, moving)
    }

    /// The step's samples into `buf`: per sample the line voltages, the
    /// line currents and the neutral current, scaled for the file.
    fn synthesize(&mut self, step: u64, t: &Terminals, steady: &[Vec<C64>], moving: &[Inrushing]) {
        let n_orders = self.max_order.div_ceil(2);
        let v: Vec<C64> = (0..self.lines).map(|x| t.v_ln(x)).collect();
        let r2 = 2f64.sqrt();
        let t0 = step as f64 * self.step_s;
        let mut e = vec![C64::ZERO; n_orders];
        self.buf.clear();
        for s in 0..self.per_step {
            let tau = t0 + s as f64 / self.rate;
            let e1 = C64::polar_deg(1.0, (self.omega * tau).to_degrees());
            let e2 = e1 * e1;
            e[0] = e1;
            for o in 1..n_orders {
                e[o] = e[o - 1] * e2;
            }
            let mut i_sum = 0.0;
            for x in 0..self.lines {
                self.buf.push((r2 * (v[x] * e1).re / self.scale_v) as f32);
            }
            for x in 0..self.lines {
                let mut i = 0.0;
                for o in 0..n_orders {
                    i += (steady[x][o] * e[o]).re;
                }
                for (from, ir, h) in moving {
                    let m = 1.0 + (ir.peak - 1.0) * (-(tau - from) / ir.decay_s).exp();
                    let mut j = 0.0;
                    for o in 0..n_orders {
                        j += (h[x][o] * e[o]).re;
                    }
                    i += m * j;
                }
                i *= r2;
                i_sum += i;
                self.buf.push((i / self.scale_i) as f32);
            }
            // Kirchhoff, sample by sample: the neutral returns the rest.
            self.buf.push((-i_sum / self.scale_i) as f32);
        }
    }

    /// Completes the files (sizes in their headers); returns their manifest records.
    pub fn finish(self, s: &Scenario) -> io::Result<Vec<(String, Value)>> {
        if let Some(e) = self.error {
            return Err(e);
        }
        let mut names: Vec<(String, &str, f64)> = Vec::new();
        for x in 0..self.lines {
            names.push((format!("{}_v", line_name(x)), "V", self.scale_v));
        }
        for x in 0..self.lines {
            names.push((format!("{}_i", line_name(x)), "A", self.scale_i));
        }
        names.push((format!("{NEUTRAL_NAME}_i"), "A", self.scale_i));
        let mut out = Vec::new();
        for w in self.windows {
            w.out.finalize().map_err(wav_error)?;
            std::fs::File::open(&w.file)?.sync_all()?;
            out.push((
                w.name.clone(),
                json!({
                    "file": w.name,
                    "start_local": w.start_local,
                    "start_ms": s.run.start_utc_ms + (w.first as f64 * s.run.step_s * 1000.0).round() as i64,
                    "length_s": (w.end - w.first) as f64 * s.run.step_s,
                    "rate_hz": self.rate,
                    "frames": w.samples,
                    "sample_format": "32-bit IEEE float, little-endian, interleaved",
                    "channels": names.iter().map(|(n, u, sc)| json!({ "name": n, "unit": u, "scale": sc })).collect::<Vec<_>>(),
                    "scale_means": "physical value = sample × scale",
                }),
            ));
        }
        Ok(out)
    }
}
