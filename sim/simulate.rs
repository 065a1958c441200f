//! The step loop: behaviour timelines → electrical solve → meter and exact
//! truth, emitted in chunks of reporting intervals so memory does not grow
//! with the length of the run.

use crate::behaviour::{Segment, Timeline};
use crate::electrical::settle::{diverged, Diverged};
use crate::electrical::source::SourceVoltage;
use crate::electrical::{Network, StepOut, C64};
use crate::meter::{MeterModel, Readings};
use crate::scenario::{Inrush, Role, Scenario};

/// Exact per-appliance truth for a run of reporting intervals (columnar).
#[derive(Clone, Default)]
pub struct Truth {
    /// `[appliance]`: mean active power over each reporting interval, W.
    pub app_p: Vec<Vec<f32>>,
    /// `[appliance]`: mean reactive power over each reporting interval, var.
    pub app_q: Vec<Vec<f32>>,
    /// `[appliance]`: the state index held for the greater part of each
    /// reporting interval.
    pub app_state: Vec<Vec<u16>>,
    /// `[appliance][k]`: P on the k-th of that appliance's lines.
    pub app_line_p: Vec<Vec<Vec<f32>>>,
    /// `[appliance]`: a store's state of charge at the end of each interval
    /// (fraction); `None` for everything else.
    pub app_soc: Vec<Option<Vec<f32>>>,
    /// Mean active power of the loads nobody listed, W, per reporting interval.
    pub unmetered_p: Vec<f32>,
}

impl Truth {
    /// Columns for the first `metered` loads of the network (the appliances),
    /// with a state-of-charge column for each that is a store.
    fn new(net: &Network, s: &Scenario) -> Self {
        let n = s.appliances.len();
        Truth {
            app_p: vec![Vec::new(); n],
            app_q: vec![Vec::new(); n],
            app_state: vec![Vec::new(); n],
            app_line_p: net.apps[..n]
                .iter()
                .map(|a| vec![Vec::new(); a.lines.len()])
                .collect(),
            app_soc: s
                .appliances
                .iter()
                .map(|a| (a.role == Role::Storage).then(Vec::new))
                .collect(),
            unmetered_p: Vec::new(),
        }
    }
    fn clear(&mut self) {
        self.app_p
            .iter_mut()
            .chain(&mut self.app_q)
            .for_each(Vec::clear);
        self.app_state.iter_mut().for_each(Vec::clear);
        self.app_line_p.iter_mut().flatten().for_each(Vec::clear);
        self.app_soc.iter_mut().flatten().for_each(Vec::clear);
        self.unmetered_p.clear();
    }
}

/// Rows of truth gathered a block at a time before they join the columns
/// of [`Truth`]: a row is written once into `last`, and the rows that
/// repeat it are filled when the row next changes, so a step on which
/// nothing was solved costs no stores. Storing each value straight into
/// its own column touched about a hundred far-apart cache lines per row at
/// one step per interval.
struct TruthRows {
    /// `[column * BLOCK_ROWS + row]`, columns in [`Truth`]'s order but for
    /// the states of charge: per appliance P, Q and P per line; then the
    /// unmetered loads' P.
    values: Vec<f32>,
    /// `[store * BLOCK_ROWS + row]`: the stores' states of charge, which
    /// change every row and are written at once.
    socs: Vec<f32>,
    /// `[appliance * BLOCK_ROWS + row]`: the state held.
    states: Vec<u16>,
    /// The latest row: what the rows from `filled` on repeat.
    last: Vec<f32>,
    /// The latest row's states.
    last_states: Vec<u16>,
    /// Rows in the block so far.
    rows: usize,
    /// Rows of the block written out; rows `filled..rows` repeat `last`.
    filled: usize,
}

/// Rows per block of [`TruthRows`]: a few cache lines per column, and the
/// whole block (about a hundred columns at most in the demos) within the
/// first-level cache.
const BLOCK_ROWS: usize = 64;

impl TruthRows {
    fn new(truth: &Truth) -> Self {
        let columns =
            2 * truth.app_p.len() + truth.app_line_p.iter().map(Vec::len).sum::<usize>() + 1;
        let stores = truth.app_soc.iter().flatten().count();
        let apps = truth.app_state.len();
        TruthRows {
            values: vec![0.0; columns * BLOCK_ROWS],
            socs: vec![0.0; stores * BLOCK_ROWS],
            states: vec![0; apps * BLOCK_ROWS],
            last: vec![0.0; columns],
            last_states: vec![0; apps],
            rows: 0,
            filled: 0,
        }
    }

    /// A new row differs from the last: the last one's repeats are written
    /// out before [`TruthRows::put`] and [`TruthRows::put_state`] replace it.
    fn change(&mut self) {
        let (from, to) = (self.filled, self.rows);
        for r in from..to {
            for (run, &v) in self.values.chunks_exact_mut(BLOCK_ROWS).zip(&self.last) {
                run[r] = v;
            }
            for (run, &st) in self
                .states
                .chunks_exact_mut(BLOCK_ROWS)
                .zip(&self.last_states)
            {
                run[r] = st;
            }
        }
        self.filled = to;
    }

    /// Column `column` of the new row (after [`TruthRows::change`]).
    #[inline]
    fn put(&mut self, column: usize, v: f32) {
        self.last[column] = v;
    }

    /// The state of appliance `app` in the new row.
    #[inline]
    fn put_state(&mut self, app: usize, state: u16) {
        self.last_states[app] = state;
    }

    /// The state of charge of the `store`-th store in the row in progress.
    #[inline]
    fn put_soc(&mut self, store: usize, v: f32) {
        self.socs[store * BLOCK_ROWS + self.rows] = v;
    }

    /// Closes the row (a repeat of the last unless changed).
    #[inline]
    fn end_row(&mut self) {
        self.rows += 1;
    }

    fn full(&self) -> bool {
        self.rows == BLOCK_ROWS
    }

    /// Appends the block's rows to the columns of `truth`; the block starts
    /// again empty.
    fn drain(&mut self, truth: &mut Truth) {
        self.change();
        let n = self.rows;
        let mut columns = self.values.chunks_exact(BLOCK_ROWS).map(|c| &c[..n]);
        let mut next = |to: &mut Vec<f32>| to.extend_from_slice(columns.next().expect("a column"));
        let mut socs = self.socs.chunks_exact(BLOCK_ROWS).map(|c| &c[..n]);
        for k in 0..truth.app_p.len() {
            next(&mut truth.app_p[k]);
            next(&mut truth.app_q[k]);
            truth.app_line_p[k].iter_mut().for_each(&mut next);
            if let Some(col) = truth.app_soc[k].as_mut() {
                col.extend_from_slice(socs.next().expect("a store"));
            }
        }
        next(&mut truth.unmetered_p);
        for (k, col) in truth.app_state.iter_mut().enumerate() {
            col.extend_from_slice(&self.states[k * BLOCK_ROWS..k * BLOCK_ROWS + n]);
        }
        self.rows = 0;
        self.filled = 0;
    }
}

/// One chunk handed to the writers: rows `first_row ..` of meters and truth.
#[derive(Clone)]
pub struct Chunk {
    /// Index of this chunk's first reporting interval in the run.
    pub first_row: u64,
    /// What the meter reports for these intervals.
    pub readings: Readings,
    /// The exact per-appliance truth for the same intervals.
    pub truth: Truth,
}

/// One state segment of one appliance, merged over consecutive segments in
/// the same state.
#[derive(Clone, Debug)]
pub struct StateSpan {
    /// Index of the appliance in the scenario's `appliances`.
    pub app: usize,
    /// Index of the state in the appliance's `states`.
    pub state: u16,
    /// First simulation step in the state.
    pub start_step: u64,
    /// The step after the last one in the state.
    pub end_step: u64,
    /// Energy the appliance drew in the segment, J.
    pub energy_j: f64,
}

/// Figures gathered along the way, for the manifest's summary. Per-load
/// vectors hold the appliances, then the unmetered loads.
#[derive(Clone, Debug, Default)]
pub struct Summary {
    /// Energy each load drew over the run, J.
    pub app_energy_j: Vec<f64>,
    /// Largest active power of each load in any step, W.
    pub app_peak_w: Vec<f64>,
    /// Energy through each line conductor over the run, J.
    pub line_energy_j: [f64; 3],
    /// Largest RMS current in each line conductor as the meter reported it
    /// (interval readings), A.
    pub line_peak_a: [f64; 3],
    /// Largest RMS neutral current as the meter reported it, A.
    pub neutral_peak_a: f64,
}

/// What a finished simulation hands back besides its chunks.
pub struct SimulationRecord {
    /// Every appliance's state segments, by appliance, then start.
    pub events: Vec<StateSpan>,
    /// Energies and peaks for the manifest's summary.
    pub summary: Summary,
    /// Reporting intervals lost to dropouts: (first row, rows).
    pub dropouts: Vec<(u64, u64)>,
}

/// Mean inrush multiple over step k after switch-on: the step average of
/// 1 + (peak − 1)·exp(−t/τ) over [k·dt, (k+1)·dt), so energy is exact.
fn inrush_mult(peak: f64, tau: f64, k: u64, dt: f64) -> f64 {
    let t0 = k as f64 * dt;
    1.0 + (peak - 1.0) * tau / dt * ((-t0 / tau).exp() - (-(t0 + dt) / tau).exp())
}

/// Settles the step's solution and checks its voltages are plausible;
/// otherwise the run stops with what went wrong and what would work.
fn check_solution(
    s: &Scenario,
    net: &Network,
    e: &[C64; 3],
    active: &[(usize, f64)],
    step: u64,
    t: &mut crate::electrical::Terminals,
    out: &mut StepOut,
) -> Result<(), Diverged> {
    let v = s.home.voltage_v;
    if let Err(last) = net.settle(e, active, v, t, out) {
        let what = format!("the terminals still move by {last:.3e} V after {} passes (the iteration diverges or oscillates)", crate::electrical::settle::MAX_PASSES);
        return Err(diverged(s, net, active, step, what));
    }
    if let Some((x, vx)) = net.implausible(out, v) {
        let what = format!(
            "the L{} voltage would be {vx:.4e} V against {v} V nominal",
            x + 1
        );
        return Err(diverged(s, net, active, step, what));
    }
    Ok(())
}

/// Runs the simulation over `intervals` reporting intervals, handing each
/// chunk of at most `chunk_rows` rows to `sink`.
///
/// `timelines` come from [`crate::loads::timelines`]; `sink` returns an
/// error of the caller's own type to stop the run (writing failed, …), and a
/// solve that does not settle stops it with [`Diverged`].
///
/// # Example
///
/// Ten minutes of a 1500 W kettle on L1 of a split-phase home, read every
/// second:
///
/// ```
/// use loadloom::{electrical::settle::Diverged, loads, scenario, simulate};
/// let text = r#"
/// [home]
/// supply = "split-phase"
/// timezone = "UTC"
/// [run]
/// start = "2027-01-04T00:00"
/// length = "10 min"
/// [[appliance]]
/// id = "kettle"
/// wiring = "L1-N"
/// behaviour = "steady"
/// load = "resistive"
/// states = [{ power = "1500 W", pf = 1.0 }]
/// "#;
/// let home = scenario::load_str(std::path::Path::new("kettle.toml"), text.into())?;
/// let timelines = loads::timelines(&home, home.run.steps());
/// let mut kettle_w = Vec::new();
/// let outcome = simulate::simulate(&home, &timelines, home.intervals(), 65_536, |chunk| {
///     kettle_w.extend_from_slice(&chunk.truth.app_p[0]); // W, one per interval
///     Ok::<(), Diverged>(())
/// })?;
/// assert_eq!(kettle_w.len(), 600);
/// // Near 1500 W: the default source sags and varies the voltage a little.
/// assert!(kettle_w.iter().all(|&p| (p - 1500.0).abs() < 100.0));
/// let kwh = outcome.summary.app_energy_j[0] / 3.6e6;
/// assert!((kwh - 0.25).abs() < 0.02); // 1.5 kW for 1/6 h
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn simulate<E>(
    s: &Scenario,
    timelines: &[Timeline],
    intervals: u64,
    chunk_rows: usize,
    mut sink: impl FnMut(&Chunk) -> Result<(), E>,
) -> Result<SimulationRecord, E>
where
    E: From<Diverged>,
{
    simulate_with(
        s,
        timelines,
        intervals,
        chunk_rows,
        |c| sink(c),
        None,
        false,
    )
}

/// [`simulate`], also writing the waveform windows to `recorder`; `sink`
/// may take the chunk's columns, leaving a chunk of the same shape (whose
/// columns are cleared before the next rows go in). With `noise_later`,
/// the readings' columns stay empty: each interval waits in
/// [`Readings::means`] for a [`crate::meter::MeterNoise`] of the caller's,
/// and the summary's current peaks are left at zero for it to fill.
pub(crate) fn simulate_with<E>(
    s: &Scenario,
    timelines: &[Timeline],
    intervals: u64,
    chunk_rows: usize,
    mut sink: impl FnMut(&mut Chunk) -> Result<(), E>,
    mut recorder: Option<&mut crate::waveform::Recorder>,
    noise_later: bool,
) -> Result<SimulationRecord, E>
where
    E: From<Diverged>,
{
    let net = Network::new(s);
    let lines = net.lines;
    let dt = s.run.step_s;
    let k_int = s.steps_per_interval();
    let mut source = SourceVoltage::new(&s.home.source, dt, s.run.seed);
    let mut meter = MeterModel::new(s, lines, intervals, !noise_later);
    // The PV inverter, which a production channel measures.
    let pv = s.appliances.iter().position(|a| a.role == Role::Generator);
    let mut chunk = Chunk {
        first_row: 0,
        readings: Readings::new(lines),
        truth: Truth::new(&net, s),
    };
    let mut out = StepOut::new(net.apps.len());
    let mut walk = Walk::new(&net, timelines);
    let mut sums = IntervalSums::new(&net, k_int, &chunk.truth, timelines);
    let mut summary = Summary {
        app_energy_j: vec![0.0; net.apps.len()],
        app_peak_w: vec![0.0; net.apps.len()],
        ..Default::default()
    };
    let mut solution = Solution::new(s, &net);
    let mut rows = TruthRows::new(&chunk.truth);
    let total_steps = intervals * k_int;
    for step in 0..total_steps {
        let (f, source_moved) = source.next(lines);
        if source_moved {
            solution.set_source(&f);
        }
        let changed = walk.advance(step, &net, timelines, dt) || step == 0;
        let solved = solution.update(&walk.active, changed, source_moved, step, &mut out)?;
        if let Some(rec) = recorder.as_deref_mut() {
            if rec.wants(step) {
                let ir = walk.inrush_windows(&net);
                rec.record(step, &net, &solution.t_prev, &walk.state, &walk.scale, &ir);
            }
        }
        meter.add(&out.v_ln, &out.i_line, dt);
        if let Some(k) = pv {
            meter.add_production(out.app_p[k]);
        }
        sums.add(&out, &mut walk, &mut summary, dt);
        if (step + 1) % k_int == 0 {
            meter.emit(&mut chunk.readings);
            sums.flush(&mut rows, &out, &walk, step, solved);
            let last = chunk.readings.rows() == chunk_rows || step + 1 == total_steps;
            if rows.full() || last {
                rows.drain(&mut chunk.truth);
            }
            if last {
                let next = chunk.first_row + chunk.readings.rows() as u64;
                // The sink may swap the columns for empty ones to fill next.
                sink(&mut chunk)?;
                chunk.first_row = next;
                chunk.readings.clear();
                chunk.truth.clear();
            }
        }
    }
    summary.line_energy_j = meter.line_energy_j;
    (summary.line_peak_a, summary.neutral_peak_a) = meter.peaks();
    Ok(SimulationRecord {
        events: walk.finish(total_steps, s.appliances.len()),
        summary,
        dropouts: meter.gaps().to_vec(),
    })
}

/// Where each load is along its timeline (segment, state, scale, inrush),
/// what the solve is handed for it, and its state spans so far.
struct Walk {
    pos: Vec<usize>,
    state: Vec<usize>,
    scale: Vec<f64>,
    /// The step the current state was entered, if it has inrush.
    inrush_from: Vec<Option<u64>>,
    /// Per load: (state, power multiple) for the solve.
    active: Vec<(usize, f64)>,
    /// The span each load is in now.
    open: Vec<StateSpan>,
    /// The spans already closed.
    closed: Vec<StateSpan>,
    /// The first step at which some load enters its next segment.
    next_change: u64,
    /// Loads whose inrush is still decaying.
    surging: usize,
}

impl Walk {
    fn new(net: &Network, timelines: &[Timeline]) -> Self {
        let n_apps = net.apps.len();
        let state: Vec<usize> = timelines
            .iter()
            .map(|t| t.segments[0].state as usize)
            .collect();
        let scale = timelines
            .iter()
            .map(|t| t.segments[0].scale as f64)
            .collect();
        let inrush_from = (0..n_apps)
            .map(|k| net.apps[k].inrush[state[k]].map(|_| 0))
            .collect();
        let open = (0..n_apps)
            .map(|k| StateSpan {
                app: k,
                state: state[k] as u16,
                start_step: 0,
                end_step: 0,
                energy_j: 0.0,
            })
            .collect();
        Walk {
            pos: vec![0; n_apps],
            state,
            scale,
            inrush_from,
            active: vec![(0, 1.0); n_apps],
            open,
            closed: Vec::new(),
            next_change: 0,
            surging: 0,
        }
    }

    /// Moves every load to `step`: into its next segment where the current
    /// one ended (closing its span when the state changes), its inrush
    /// decayed by one more step. True when any load's draw changed. Until
    /// the next segment begins and while nothing surges, nothing moves.
    #[inline]
    fn advance(&mut self, step: u64, net: &Network, timelines: &[Timeline], dt: f64) -> bool {
        if step < self.next_change && self.surging == 0 {
            return false;
        }
        let mut changed = false;
        let (mut next_change, mut surging) = (u64::MAX, 0);
        for k in 0..net.apps.len() {
            let segs = &timelines[k].segments;
            if step >= segs[self.pos[k]].end {
                self.enter_next(k, step, segs, net);
                changed = true;
            }
            next_change = next_change.min(segs[self.pos[k]].end);
            let mut m = self.scale[k];
            if let Some(from) = self.inrush_from[k] {
                let ir = net.apps[k].inrush[self.state[k]].expect("set with inrush");
                let j = step - from;
                if j as f64 * dt > 12.0 * ir.decay_s {
                    self.inrush_from[k] = None;
                } else {
                    m *= inrush_mult(ir.peak, ir.decay_s, j, dt);
                    surging += 1;
                }
                changed = true;
            }
            self.active[k] = (self.state[k], m);
        }
        self.next_change = next_change;
        self.surging = surging;
        changed
    }

    /// Load `k` enters its next segment at `step`, closing its span when the
    /// state changes.
    fn enter_next(&mut self, k: usize, step: u64, segs: &[Segment], net: &Network) {
        self.pos[k] += 1;
        let seg = segs[self.pos[k]];
        if seg.state as usize != self.state[k] {
            let mut ev = self.open[k].clone();
            ev.end_step = step;
            self.closed.push(ev);
            self.open[k] = StateSpan {
                app: k,
                state: seg.state,
                start_step: step,
                end_step: 0,
                energy_j: 0.0,
            };
            self.state[k] = seg.state as usize;
            self.inrush_from[k] = net.apps[k].inrush[self.state[k]].map(|_| step);
        }
        self.scale[k] = seg.scale as f64;
    }

    /// Per load, the step its inrush began and the inrush, while it lasts
    /// (for the waveform recorder).
    fn inrush_windows(&self, net: &Network) -> Vec<Option<(u64, Inrush)>> {
        (0..net.apps.len())
            .map(|k| {
                self.inrush_from[k].and_then(|f| net.apps[k].inrush[self.state[k]].map(|i| (f, i)))
            })
            .collect()
    }

    /// Every span of the metered loads, the open ones closed at the end of
    /// the run, by appliance and start.
    fn finish(mut self, total_steps: u64, metered: usize) -> Vec<StateSpan> {
        for mut ev in self.open {
            ev.end_step = total_steps;
            self.closed.push(ev);
        }
        let mut events = self.closed;
        events.retain(|e| e.app < metered);
        events.sort_by_key(|e| (e.app, e.start_step));
        events
    }
}

/// The source's voltages and the last solution of the network, solved again
/// only where something moved.
struct Solution<'a> {
    s: &'a Scenario,
    net: &'a Network,
    /// The source's open-circuit phasors this step.
    e: [C64; 3],
    i_prev: [C64; 3],
    t_prev: crate::electrical::Terminals,
}

impl<'a> Solution<'a> {
    fn new(s: &'a Scenario, net: &'a Network) -> Self {
        Solution {
            s,
            net,
            e: [C64::ZERO; 3],
            i_prev: [C64::ZERO; 3],
            t_prev: crate::electrical::Terminals::default(),
        }
    }

    /// The source moved: its phasors at the new per-line factors.
    fn set_source(&mut self, f: &[f64]) {
        for x in 0..self.net.lines {
            self.e[x] = self.net.e_nominal[x].scale(f[x]);
        }
    }

    /// The step's solution into `out`; true when it was solved again (false:
    /// `out` holds the last step's solution unchanged).
    #[inline]
    fn update(
        &mut self,
        active: &[(usize, f64)],
        changed: bool,
        source_moved: bool,
        step: u64,
        out: &mut StepOut,
    ) -> Result<bool, Diverged> {
        let net = self.net;
        // Fixed point of V(I) and I(V): one pass normally; a second when a
        // load switched, so the sag at a switching step is already in it.
        let mut t = net.terminals(&self.e, &self.i_prev);
        if changed {
            let i = net.currents(&t, active);
            t = net.terminals(&self.e, &i);
        }
        // When no load or source moved and the terminals have settled (within
        // a nanovolt), the last step's solution still holds: skip the solve.
        if changed || source_moved || !self.t_prev.settled(&t, net.lines) {
            net.solve(&t, active, out);
            check_solution(self.s, net, &self.e, active, step, &mut t, out)?;
            self.i_prev = out.i_line;
            self.t_prev = t;
            return Ok(true);
        }
        Ok(false)
    }
}

/// Per-load sums over the reporting interval in progress, and how many
/// steps each load spent in each state.
struct IntervalSums<'a> {
    p: Vec<f64>,
    q: Vec<f64>,
    line_p: Vec<[f64; 3]>,
    /// `[load * max_states + state]`: steps in that state this interval.
    occupancy: Vec<u32>,
    max_states: usize,
    /// Steps per reporting interval.
    k_int: u64,
    /// Loads before this index are the appliances, the rest unmetered.
    metered: usize,
    /// Per appliance: the lines of its per-line truth columns.
    lines: Vec<Vec<usize>>,
    /// Per appliance: its timeline if it is a store (a state-of-charge column).
    stores: Vec<Option<&'a Timeline>>,
    /// The stores, in the order of their state-of-charge columns.
    soc_apps: Vec<usize>,
}

impl<'a> IntervalSums<'a> {
    fn new(net: &Network, k_int: u64, truth: &Truth, timelines: &'a [Timeline]) -> Self {
        let n_apps = net.apps.len();
        let soc_apps = (0..truth.app_p.len())
            .filter(|&k| truth.app_soc[k].is_some())
            .collect();
        let max_states = net.apps.iter().map(|a| a.states.len()).max().unwrap_or(1);
        IntervalSums {
            p: vec![0.0; n_apps],
            q: vec![0.0; n_apps],
            line_p: vec![[0.0; 3]; n_apps],
            occupancy: vec![0; n_apps * max_states],
            max_states,
            k_int,
            metered: truth.app_p.len(),
            lines: net.apps.iter().map(|a| a.lines.clone()).collect(),
            stores: truth
                .app_soc
                .iter()
                .zip(timelines)
                .map(|(soc, tl)| soc.as_ref().map(|_| tl))
                .collect(),
            soc_apps,
        }
    }

    /// Adds the step's per-load powers to the sums, the spans' energy and
    /// the summary's energy and peaks. At one step per interval the step is
    /// the interval: [`IntervalSums::flush`] reads it from `out` itself.
    #[inline]
    fn add(&mut self, out: &StepOut, walk: &mut Walk, summary: &mut Summary, dt: f64) {
        for k in 0..self.p.len() {
            let p = out.app_p[k];
            walk.open[k].energy_j += p * dt;
            summary.app_energy_j[k] += p * dt;
            if p > summary.app_peak_w[k] {
                summary.app_peak_w[k] = p;
            }
        }
        if self.k_int == 1 {
            return;
        }
        for k in 0..self.p.len() {
            self.p[k] += out.app_p[k];
            self.q[k] += out.app_q[k];
            for x in 0..3 {
                self.line_p[k][x] += out.app_line_p[k][x];
            }
            self.occupancy[k * self.max_states + walk.state[k]] += 1;
        }
    }

    /// Ends the interval that closes at `step`: each appliance's means and
    /// state into the truth row, the unmetered loads as their sum; the sums
    /// start again from zero. `solved`: the network was solved this step.
    fn flush(&mut self, rows: &mut TruthRows, out: &StepOut, walk: &Walk, step: u64, solved: bool) {
        if self.k_int > 1 {
            self.flush_means(rows, walk, step);
        } else if solved {
            self.flush_step(rows, out, walk, step);
        } else {
            // Neither the powers nor the states moved: the last row again.
            self.put_socs(rows, walk, step);
            rows.end_row();
        }
    }

    /// [`IntervalSums::flush`] at one step per interval: the interval's
    /// means are the step's own powers. `0.0 + x` is what a sum started at
    /// zero holds after one step (it turns −0 into +0), and `x / 1` is `x`.
    fn flush_step(&mut self, rows: &mut TruthRows, out: &StepOut, walk: &Walk, step: u64) {
        let mut unmetered = 0.0;
        for k in self.metered..self.p.len() {
            unmetered += 0.0 + out.app_p[k];
        }
        rows.change();
        let mut c = 0;
        for k in 0..self.metered {
            rows.put(c, (0.0 + out.app_p[k]) as f32);
            rows.put(c + 1, (0.0 + out.app_q[k]) as f32);
            c += 2;
            for &x in &self.lines[k] {
                rows.put(c, (0.0 + out.app_line_p[k][x]) as f32);
                c += 1;
            }
            rows.put_state(k, walk.state[k] as u16);
        }
        rows.put(c, unmetered as f32);
        self.put_socs(rows, walk, step);
        rows.end_row();
    }

    /// The stores' states of charge at the end of the interval that closes
    /// at `step`, into the row in progress.
    fn put_socs(&self, rows: &mut TruthRows, walk: &Walk, step: u64) {
        for (store, &k) in self.soc_apps.iter().enumerate() {
            let tl = self.stores[k].expect("a store");
            rows.put_soc(store, self.soc(tl, walk, k, step));
        }
    }

    /// [`IntervalSums::flush`] over several steps per interval.
    fn flush_means(&mut self, rows: &mut TruthRows, walk: &Walk, step: u64) {
        let kf = self.k_int as f64;
        let ms = self.max_states;
        // Unmetered loads are in the meters; in truth only as their sum.
        let mut unmetered = 0.0;
        for k in self.metered..self.p.len() {
            unmetered += self.p[k] / kf;
            self.reset(k);
            self.occupancy[k * ms..(k + 1) * ms]
                .iter_mut()
                .for_each(|c| *c = 0);
        }
        rows.change();
        let mut c = 0;
        for k in 0..self.metered {
            rows.put(c, (self.p[k] / kf) as f32);
            rows.put(c + 1, (self.q[k] / kf) as f32);
            c += 2;
            for j in 0..self.lines[k].len() {
                rows.put(c, (self.line_p[k][self.lines[k][j]] / kf) as f32);
                c += 1;
            }
            let st = self.held_state(k);
            rows.put_state(k, st as u16);
            self.reset(k);
        }
        rows.put(c, unmetered as f32);
        self.put_socs(rows, walk, step);
        rows.end_row();
    }

    /// A store's state of charge at the end of the interval that closes at
    /// `step`.
    fn soc(&self, timeline: &Timeline, walk: &Walk, k: usize, step: u64) -> f32 {
        let soc = timeline.level_at(walk.pos[k], step + 1);
        soc.unwrap_or(0.0) as f32
    }

    /// The state load `k` held for the greater part of the interval (the
    /// lower one on a tie); its counts start again from zero.
    fn held_state(&mut self, k: usize) -> usize {
        let ms = self.max_states;
        let occ = &mut self.occupancy[k * ms..(k + 1) * ms];
        let best = (0..ms)
            .max_by_key(|&j| (occ[j], std::cmp::Reverse(j)))
            .unwrap_or(0);
        occ.iter_mut().for_each(|c| *c = 0);
        best
    }

    fn reset(&mut self, k: usize) {
        self.p[k] = 0.0;
        self.q[k] = 0.0;
        self.line_p[k] = [0.0; 3];
    }
}

#[cfg(test)]
mod tests {
    use super::inrush_mult;

    #[test]
    fn inrush_step_means_integrate_to_the_exponential() {
        // ∫0^∞ (peak − 1)·e^(−t/τ) dt = (peak − 1)·τ.
        let (peak, tau, dt) = (6.0, 1.5, 1.0);
        let extra: f64 = (0..200)
            .map(|k| (inrush_mult(peak, tau, k, dt) - 1.0) * dt)
            .sum();
        assert!((extra - (peak - 1.0) * tau).abs() < 1e-9);
    }
}
