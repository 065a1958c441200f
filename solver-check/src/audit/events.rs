//! Step changes on the meter channels, found together on all channels at
//! once, so that the steps one switching makes on several conductors come
//! out as one event.
//!
//! The method is steady-state segmentation after Hart (G. W. Hart,
//! "Nonintrusive appliance load monitoring", Proc. IEEE 80(12), 1992): the
//! readings are cut into stretches where every channel's P and Q stay within
//! a tolerance of their recent mean; a change is the difference between the
//! mean of the first rows of a new steady stretch and the mean of the last
//! rows of the one before. Means over the adjacent rows only, so slow drift
//! (supply voltage, thermostatic creep) does not add up into false steps;
//! rows between two stretches (inrush, an interval split by a switching)
//! are left out, except that at intervals of 5 s or more a row that is
//! neither (not on the line from the level before to the row after) is a
//! level of its own, one row long; a lone row off the mean (noise) does not end a stretch;
//! a change across missing rows is dropped, since several may hide in it.

use crate::contract::C64;
use std::collections::VecDeque;

/// One step: when, and the change of complex power on every channel.
#[derive(Clone, Debug)]
pub struct Event {
    /// When the step happened (a row's time), ms since 1970-01-01 UTC.
    pub time_ms: i64,
    /// Each channel's change of complex power, VA (P + jQ).
    pub delta: Vec<C64>,
    /// Each channel's level just before the step.
    pub before: Vec<C64>,
    /// Each channel's voltage before the step, V (NaN: not measured).
    pub v_before: Vec<f64>,
    /// Each channel's voltage after the step, V (NaN: not measured).
    pub v_after: Vec<f64>,
    /// Standard error of each channel's change from the spread of the rows
    /// it is the difference of means of, VA.
    pub se: Vec<f64>,
}

impl Event {
    /// The largest change on any channel, VA.
    pub fn size(&self) -> f64 {
        self.delta.iter().map(|d| d.abs()).fold(0.0, f64::max)
    }
}

/// Tolerance of a steady stretch: a row stays in it while every component
/// is within `ABS_TOL_W + REL_TOL · |S|` of the recent mean (chosen above
/// three standard deviations of a 1 %-noise meter; common practice, no source).
pub const ABS_TOL_W: f64 = 25.0;
/// The relative part of that tolerance, share of the apparent power |S|.
pub const REL_TOL: f64 = 0.025;
/// Steps smaller than this on every channel are not kept, W.
pub const MIN_STEP_W: f64 = 60.0;
/// Tolerance of the row tests (a conductor power clearly negative; two
/// channels reading apart), W, plus [`ROW_TOL_REL`] of the power: above
/// three standard deviations of a 1 %-noise meter with a CT's gain error
/// (common practice, no source).
pub const ROW_TOL_W: f64 = 30.0;
/// The relative part of [`ROW_TOL_W`], share of the apparent power.
pub const ROW_TOL_REL: f64 = 0.05;

/// Per-channel counts for orientation and missing-CT checks.
#[derive(Clone, Debug, Default)]
pub struct ChannelStats {
    /// Rows with any reading.
    pub rows: u64,
    /// Rows where this channel's P is null while another channel reads.
    pub null: u64,
    /// Rows where |S| < 5 VA.
    pub zero: u64,
    /// Sum of P, W (over rows read).
    pub sum_p: f64,
    /// For every conductor b and sign k: rows where the conductor power this
    /// channel would imply, were its CT on b with sign k, is clearly negative.
    pub negative: Vec<[u64; 2]>,
    /// Rows read in the dark hours of the home's clock ([`dark_hour`]).
    pub dark_rows: u64,
    /// [`ChannelStats::negative`] over the dark hours alone, when no PV
    /// array produces.
    pub negative_dark: Vec<[u64; 2]>,
    /// For every channel b and sign k: rows both read in which this
    /// channel's reading is clearly not k · u · S_b, what it would read
    /// were its CT on the conductor b's CT is on (u turning b's reading to
    /// this channel's voltage). Empty: not counted.
    pub apart: Vec<[u64; 2]>,
    /// For every channel b: rows this channel and b both read.
    pub paired: Vec<u64>,
}

/// Whether a local clock time (hours since midnight) lies in the hours when
/// no PV array produces anywhere people live below 58° of latitude: from
/// 00:30 to 03:00 on the clock, summer time included, the sun is at least
/// a degree or so below the horizon even at midsummer at the eastern edge
/// of a time zone (sunrise at 58° N at midsummer is near 03:30 solar time;
/// common practice, no source). Its negative rows tell a reversed CT in a
/// home with PV, whose export makes every daytime row's sign moot.
pub fn dark_hour(local_h: f64) -> bool {
    (0.5..3.0).contains(&local_h)
}

/// Mean and variance of some rows (P, Q per channel, then V per channel).
#[derive(Clone)]
struct Level {
    mean: Vec<f64>,
    var: Vec<f64>,
    n: usize,
}

impl Level {
    fn of(sum: &[f64], sq: &[f64], n: usize) -> Level {
        let mean: Vec<f64> = sum.iter().map(|s| s / n as f64).collect();
        let var = sq
            .iter()
            .zip(&mean)
            .map(|(q, m)| {
                if n > 1 {
                    ((q / n as f64 - m * m) * n as f64 / (n - 1) as f64).max(0.0)
                } else {
                    0.0
                }
            })
            .collect();
        Level { mean, var, n }
    }
}

struct Seg {
    tail: VecDeque<Vec<f64>>,
    tail_sum: Vec<f64>,
    tail_sq: Vec<f64>,
    head_sum: Vec<f64>,
    head_sq: Vec<f64>,
    head_n: usize,
    start_ms: i64,
    /// The level before the step into this stretch, waiting for its head mean.
    pending: Option<Level>,
}

impl Seg {
    fn tail_level(&self) -> Level {
        Level::of(&self.tail_sum, &self.tail_sq, self.tail.len())
    }
}

/// Finds steps on all channels at once as the meter rows stream past: steady
/// stretches, and the change of level between two of them.
pub struct Detector {
    n: usize,
    units: Vec<Vec<[C64; 2]>>,
    k: usize,
    l: usize,
    interval_ms: i64,
    last_ms: Option<i64>,
    last_v: Vec<f64>,
    seg: Option<Seg>,
    cand: Vec<Vec<f64>>,
    cand_ms: i64,
    /// At long intervals: the rows between the last stretch and the
    /// candidate, each a split interval, an inrush, or a level of its own.
    inter: Vec<(i64, Vec<f64>)>,
    /// Whether a single row may stand as a level (intervals of 5 s or more,
    /// where an appliance can run for one row and a second one switch in the next).
    one_row_levels: bool,
    /// The steps found so far.
    pub events: Vec<Event>,
    /// Per channel: counts for the orientation and missing-CT checks so far.
    pub stats: Vec<ChannelStats>,
    /// The home's time zone, for the dark hours ([`Detector::with_zone`]).
    zone: Option<jiff::tz::TimeZone>,
    /// The last UTC quarter-hour looked up, and whether it is dark.
    hour_cache: (i64, bool),
    /// Rows with no power read on any channel (gaps, or no CT anywhere).
    blank_rows: u64,
}

/// Whether a row (P, Q per channel; the voltages after them are not
/// compared) stays within the tolerance of a mean.
fn fits(x: &[f64], mean: &[f64]) -> bool {
    let pq = 2 * (x.len() / 3);
    x[..pq].chunks(2).zip(mean[..pq].chunks(2)).all(|(a, m)| {
        let tol = ABS_TOL_W + REL_TOL * m[0].hypot(m[1]);
        (a[0] - m[0]).abs() <= tol && (a[1] - m[1]).abs() <= tol
    })
}

/// Whether row `x` lies, within the stretch tolerance in every P and Q, on
/// the line `a + t · (b − a)` for one `t` in `0 … t_max`.
fn on_line(x: &[f64], a: &[f64], b: &[f64], t_max: f64) -> bool {
    let pq = 2 * (x.len() / 3);
    let (mut lo, mut hi) = (0.0_f64, t_max);
    for c in 0..pq / 2 {
        let tol = ABS_TOL_W + REL_TOL * x[2 * c].hypot(x[2 * c + 1]);
        for i in 2 * c..2 * c + 2 {
            let (off, d) = (x[i] - a[i], b[i] - a[i]);
            if d.abs() < 1e-9 {
                if off.abs() > tol {
                    return false;
                }
                continue;
            }
            let (t1, t2) = ((off - tol) / d, (off + tol) / d);
            lo = lo.max(t1.min(t2));
            hi = hi.min(t1.max(t2));
        }
    }
    lo <= hi
}

fn mean(rows: &[Vec<f64>]) -> Vec<f64> {
    let mut m = vec![0.0; rows[0].len()];
    for r in rows {
        m.iter_mut().zip(r).for_each(|(a, b)| *a += b);
    }
    m.iter_mut().for_each(|a| *a /= rows.len() as f64);
    m
}

/// Rows a new steady stretch needs: 3 at short intervals, 2 at long ones.
/// Two switchings fewer rows apart than this come out as one step.
pub fn level_rows(interval_s: f64) -> usize {
    if interval_s >= 5.0 {
        2
    } else {
        3
    }
}

impl Detector {
    /// `angles_deg`: the supply's line angles (for the orientation counts).
    pub fn new(angles_deg: &[f64], interval_s: f64) -> Detector {
        let n = angles_deg.len();
        // Rows averaged either side of a step: about 20 s, 2 to 10 rows;
        // rows a new stretch needs: 3 at short intervals, 2 at long ones.
        let k = ((20.0 / interval_s).round() as usize).clamp(2, 10);
        let l = level_rows(interval_s);
        let units = (0..n)
            .map(|c| {
                (0..n)
                    .map(|b| {
                        let u = C64::polar_deg(1.0, angles_deg[c] - angles_deg[b]);
                        [u, -u]
                    })
                    .collect()
            })
            .collect();
        Detector {
            n,
            units,
            k,
            l,
            interval_ms: (interval_s * 1000.0).round() as i64,
            last_ms: None,
            last_v: vec![f64::NAN; n],
            seg: None,
            cand: Vec::new(),
            cand_ms: 0,
            inter: Vec::new(),
            one_row_levels: interval_s >= 5.0,
            events: Vec::new(),
            stats: vec![
                ChannelStats {
                    negative: vec![[0, 0]; n],
                    negative_dark: vec![[0, 0]; n],
                    apart: vec![[0, 0]; n],
                    paired: vec![0; n],
                    ..Default::default()
                };
                n
            ],
            zone: None,
            hour_cache: (i64::MIN, false),
            blank_rows: 0,
        }
    }

    /// Reads the rows' clock in `zone` so the dark hours' negative rows are
    /// counted apart ([`ChannelStats::negative_dark`]).
    pub fn with_zone(mut self, zone: jiff::tz::TimeZone) -> Detector {
        self.zone = Some(zone);
        self
    }

    /// Whether the row at `time_ms` (UTC) falls in a [`dark_hour`] of the
    /// home's clock, the zone's offset looked up once per UTC quarter-hour
    /// (offsets change on quarter-hours at most).
    fn dark(&mut self, time_ms: i64) -> bool {
        let Some(zone) = &self.zone else {
            return false;
        };
        const QUARTER_MS: i64 = 900_000;
        let q = time_ms.div_euclid(QUARTER_MS);
        if self.hour_cache.0 != q {
            let Ok(t) = jiff::Timestamp::from_millisecond(q * QUARTER_MS) else {
                return false;
            };
            let off_s = i64::from(zone.to_offset(t).seconds());
            let local_ms = (q * QUARTER_MS + off_s * 1000).rem_euclid(86_400_000);
            self.hour_cache = (q, dark_hour(local_ms as f64 / 3_600_000.0));
        }
        self.hour_cache.1
    }

    /// Records the step into `seg`, if it waits, from the head seen so far.
    fn emit(&mut self, seg: &mut Seg) {
        if let Some(b) = seg.pending.take() {
            if seg.head_n > 0 {
                let h = Level::of(&seg.head_sum, &seg.head_sq, seg.head_n);
                self.step(seg.start_ms, &b, &h);
            }
        }
    }

    /// Records the step from level `b` to level `h` at `time_ms`, unless
    /// it is below `MIN_STEP_W` on every channel.
    fn step(&mut self, time_ms: i64, b: &Level, h: &Level) {
        let n = self.n;
        let delta: Vec<C64> = (0..n)
            .map(|c| {
                C64::new(
                    h.mean[2 * c] - b.mean[2 * c],
                    h.mean[2 * c + 1] - b.mean[2 * c + 1],
                )
            })
            .collect();
        if delta.iter().any(|d| d.abs() >= MIN_STEP_W) {
            let se = (0..n)
                .map(|c| {
                    (2 * c..2 * c + 2)
                        .map(|i| h.var[i] / h.n as f64 + b.var[i] / b.n as f64)
                        .sum::<f64>()
                        .sqrt()
                })
                .collect();
            let before = (0..n)
                .map(|c| C64::new(b.mean[2 * c], b.mean[2 * c + 1]))
                .collect();
            self.events.push(Event {
                time_ms,
                delta,
                before,
                v_before: b.mean[2 * n..].to_vec(),
                v_after: h.mean[2 * n..].to_vec(),
                se,
            });
        }
    }

    /// The one-row levels among the rows between the stretch `before` and
    /// the new one starting at `next`: a row on the line from the level
    /// before it to the row after it (between them: an interval the
    /// switching split; up to three times past: the inrush of a starting
    /// motor) is no level; any other row is one. Each one-row level takes
    /// its spread from the stretch before (the meter's noise is the same).
    fn short_levels(&self, before: &Level, next: &[f64]) -> Vec<(i64, Level)> {
        let mut out: Vec<(i64, Level)> = Vec::new();
        for (i, (t, r)) in self.inter.iter().enumerate() {
            let prev = out.last().map(|(_, l)| &l.mean).unwrap_or(&before.mean);
            let after = self
                .inter
                .get(i + 1)
                .map(|(_, r)| r.as_slice())
                .unwrap_or(next);
            if !on_line(r, prev, after, 3.0) {
                out.push((
                    *t,
                    Level {
                        mean: r.clone(),
                        var: before.var.clone(),
                        n: 1,
                    },
                ));
            }
        }
        out
    }

    fn close(&mut self) {
        if let Some(mut seg) = self.seg.take() {
            self.emit(&mut seg);
        }
        self.cand.clear();
        self.inter.clear();
    }

    fn start(&mut self, rows: Vec<Vec<f64>>, start_ms: i64, before: Option<Level>) {
        let dim = rows[0].len();
        let mut seg = Seg {
            tail: VecDeque::new(),
            tail_sum: vec![0.0; dim],
            tail_sq: vec![0.0; dim],
            head_sum: vec![0.0; dim],
            head_sq: vec![0.0; dim],
            head_n: 0,
            start_ms,
            pending: before,
        };
        for r in rows {
            self.push_into(&mut seg, r);
        }
        self.seg = Some(seg);
    }

    fn push_into(&mut self, seg: &mut Seg, r: Vec<f64>) {
        if seg.head_n < self.k {
            seg.head_sum.iter_mut().zip(&r).for_each(|(a, b)| *a += b);
            seg.head_sq
                .iter_mut()
                .zip(&r)
                .for_each(|(a, b)| *a += b * b);
            seg.head_n += 1;
            if seg.head_n == self.k {
                self.emit(seg);
            }
        }
        seg.tail_sum.iter_mut().zip(&r).for_each(|(a, b)| *a += b);
        seg.tail_sq
            .iter_mut()
            .zip(&r)
            .for_each(|(a, b)| *a += b * b);
        seg.tail.push_back(r);
        if seg.tail.len() > self.k {
            let old = seg.tail.pop_front().unwrap();
            seg.tail_sum.iter_mut().zip(&old).for_each(|(a, b)| *a -= b);
            seg.tail_sq
                .iter_mut()
                .zip(&old)
                .for_each(|(a, b)| *a -= b * b);
        }
    }

    /// Adds one reporting interval: P, Q and voltage per channel, NaN when
    /// null (voltage NaN: not measured).
    pub fn push(&mut self, time_ms: i64, p: &[f64], q: &[f64], v: &[f64]) {
        let n = self.n;
        if p.iter().all(|x| x.is_nan()) {
            self.blank_rows += 1;
            self.close();
            self.last_ms = None;
            return;
        }
        if let Some(last) = self.last_ms {
            if time_ms - last > self.interval_ms * 3 / 2 {
                self.close();
            }
        }
        self.last_ms = Some(time_ms);
        let dark = self.dark(time_ms);
        let mut row = vec![0.0; 3 * n];
        // A voltage missing from a row is the last one read (a sum with a
        // NaN in it would stay NaN); never read, NaN throughout.
        for c in 0..n {
            if v[c].is_finite() {
                self.last_v[c] = v[c];
            }
            row[2 * n + c] = self.last_v[c];
        }
        for c in 0..n {
            let st = &mut self.stats[c];
            st.rows += 1;
            if p[c].is_nan() || q[c].is_nan() {
                st.null += 1;
                continue;
            }
            row[2 * c] = p[c];
            row[2 * c + 1] = q[c];
            let s = C64::new(p[c], q[c]);
            st.sum_p += p[c];
            st.dark_rows += u64::from(dark);
            if s.abs() < 5.0 {
                st.zero += 1;
            }
            let thr = -(ROW_TOL_W + ROW_TOL_REL * s.abs());
            for (b, us) in self.units[c].iter().enumerate() {
                for (k, u) in us.iter().enumerate() {
                    // The conductor's power if this channel reads u · S_b.
                    if (s * u.conj()).re < thr {
                        st.negative[b][k] += 1;
                        st.negative_dark[b][k] += u64::from(dark);
                    }
                }
            }
        }
        self.count_pairs(p, q);
        let Some(mut seg) = self.seg.take() else {
            // No stretch yet: build a candidate.
            self.candidate(row, time_ms, None);
            return;
        };
        let tail = seg.tail_level();
        if fits(&row, &tail.mean) {
            // Back on the stretch: whatever was pending was a transient.
            self.cand.clear();
            self.inter.clear();
            self.push_into(&mut seg, row);
            self.seg = Some(seg);
            return;
        }
        self.seg = Some(seg);
        self.candidate(row, time_ms, Some(tail));
    }

    fn candidate(&mut self, row: Vec<f64>, time_ms: i64, before: Option<Level>) {
        if !self.cand.is_empty() && !fits(&row, &mean(&self.cand)) {
            if self.one_row_levels && self.seg.is_some() && self.cand.len() == 1 {
                let r = self.cand.pop().expect("one row");
                self.inter.push((self.cand_ms, r));
            } else {
                self.inter.clear();
            }
            self.cand.clear();
        }
        if self.cand.is_empty() {
            self.cand_ms = time_ms;
        }
        self.cand.push(row);
        if self.cand.len() >= self.l {
            let rows = std::mem::take(&mut self.cand);
            let before = match (self.seg.take(), before) {
                (Some(mut old), Some(before)) => {
                    self.emit(&mut old);
                    let mut last = before;
                    for (t, level) in self.short_levels(&last, &mean(&rows)) {
                        self.step(t, &last, &level);
                        last = level;
                    }
                    Some(last)
                }
                (Some(mut old), None) => {
                    self.emit(&mut old);
                    None
                }
                (None, _) => None,
            };
            self.inter.clear();
            self.start(rows, self.cand_ms, before);
        }
    }

    /// Counts, for every two channels c < b that read this row, whether
    /// they read as two CTs on one conductor would ([`ChannelStats::apart`],
    /// kept on the first of the two): alike up to the sign and the ratio of
    /// their voltages (the angle between them, and their magnitudes where
    /// measured: a load on one leg sags it), within [`ROW_TOL_W`] plus
    /// [`ROW_TOL_REL`] of the larger (two CTs differ by their gain errors
    /// and the meter's noise).
    fn count_pairs(&mut self, p: &[f64], q: &[f64]) {
        let n = self.n;
        let read = |c: usize| (!p[c].is_nan() && !q[c].is_nan()).then(|| C64::new(p[c], q[c]));
        for c in 0..n {
            let Some(sc) = read(c) else { continue };
            for b in c + 1..n {
                let Some(sb) = read(b) else { continue };
                let (vc, vb) = (self.last_v[c], self.last_v[b]);
                let ratio = if vc > 0.0 && vb > 0.0 { vc / vb } else { 1.0 };
                let tol = ROW_TOL_W + ROW_TOL_REL * sc.abs().max(sb.abs());
                let st = &mut self.stats[c];
                st.paired[b] += 1;
                for (k, u) in self.units[c][b].iter().enumerate() {
                    if (sc - sb * u.scale(ratio)).abs() > tol {
                        st.apart[b][k] += 1;
                    }
                }
            }
        }
    }

    /// Closes the last stretch and hands back the steps and the channels' figures.
    ///
    /// A row with no power on any channel is a gap in the meter's record
    /// and counts for no channel, unless no row reads power at all: then
    /// no channel has a working CT (one with a single channel writes only
    /// such rows), and every row counts as an empty one of every channel.
    pub fn finish(mut self) -> (Vec<Event>, Vec<ChannelStats>) {
        self.close();
        if self.stats.iter().all(|st| st.rows == 0) {
            for st in &mut self.stats {
                st.rows = self.blank_rows;
                st.null = self.blank_rows;
            }
        }
        (self.events, self.stats)
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    /// Runs a split-phase detector over rows of (L1 P, L2 P), Q zero, and
    /// returns the steps as (row index, L1 ΔP, L2 ΔP).
    fn steps(interval_s: f64, rows: &[(f64, f64)]) -> Vec<(i64, f64, f64)> {
        let mut d = Detector::new(&[0.0, 180.0], interval_s);
        let ms = (interval_s * 1000.0) as i64;
        for (i, (a, b)) in rows.iter().enumerate() {
            d.push(i as i64 * ms, &[*a, *b], &[0.0, 0.0], &[120.0, 120.0]);
        }
        let (ev, _) = d.finish();
        ev.iter()
            .map(|e| (e.time_ms / ms, e.delta[0].re, e.delta[1].re))
            .collect()
    }

    fn run(parts: &[(f64, f64, usize)]) -> Vec<(f64, f64)> {
        parts
            .iter()
            .flat_map(|&(a, b, n)| std::iter::repeat_n((a, b), n))
            .collect()
    }

    fn near(x: f64, y: f64) -> bool {
        (x - y).abs() < 1e-6
    }

    /// A 10 s row the switching splits (part old, part new level on both
    /// lines alike) is neither level: one step, the whole of it.
    #[test]
    fn a_split_interval_is_left_out_of_both_levels() {
        let rows = run(&[(100.0, 50.0, 8), (600.0, 550.0, 1), (1100.0, 1050.0, 8)]);
        let s = steps(10.0, &rows);
        assert_eq!(s.len(), 1, "{s:?}");
        assert_eq!(s[0].0, 9);
        assert!(near(s[0].1, 1000.0) && near(s[0].2, 1000.0), "{s:?}");
    }

    /// At 10 s a load that starts one row after another is a level of its
    /// own for that row: two steps, not their sum.
    #[test]
    fn a_one_row_level_between_two_switchings_gives_two_steps() {
        let rows = run(&[(100.0, 50.0, 8), (1100.0, 50.0, 1), (1100.0, 500.0, 8)]);
        let s = steps(10.0, &rows);
        assert_eq!(s.len(), 2, "{s:?}");
        assert_eq!((s[0].0, s[1].0), (8, 9));
        assert!(near(s[0].1, 1000.0) && near(s[0].2, 0.0), "{s:?}");
        assert!(near(s[1].1, 0.0) && near(s[1].2, 450.0), "{s:?}");
    }

    /// A row above the new level in the step's own proportions is a
    /// starting motor's inrush, not a level.
    #[test]
    fn an_inrush_row_is_no_level() {
        let rows = run(&[(100.0, 50.0, 8), (1400.0, 50.0, 1), (1100.0, 50.0, 8)]);
        let s = steps(10.0, &rows);
        assert_eq!(s.len(), 1, "{s:?}");
        assert!(near(s[0].1, 1000.0), "{s:?}");
    }

    /// At 1 s a single row is too short to stand as a level (three rows
    /// start a stretch): the two switchings make one step.
    #[test]
    fn at_one_second_a_single_row_is_no_level() {
        let rows = run(&[(100.0, 50.0, 30), (1100.0, 50.0, 1), (1100.0, 500.0, 30)]);
        let s = steps(1.0, &rows);
        assert_eq!(s.len(), 1, "{s:?}");
        assert!(near(s[0].1, 1000.0) && near(s[0].2, 450.0), "{s:?}");
    }

    /// Rows with no power on any channel are gaps while another row reads
    /// power; when no row does, every channel is empty in every row (a
    /// one-channel meter with no CT writes nothing else).
    #[test]
    fn rows_with_no_power_anywhere_are_gaps_unless_no_row_reads_power() {
        let nan = [f64::NAN, f64::NAN];
        let stats = |rows: &[[f64; 2]]| {
            let mut d = Detector::new(&[0.0, 180.0], 10.0);
            for (i, p) in rows.iter().enumerate() {
                d.push(i as i64 * 10_000, p, &[0.0, 0.0], &[120.0, 120.0]);
            }
            d.finish().1
        };
        let gap = stats(&[[100.0, 50.0], nan, nan, [100.0, 50.0]]);
        assert_eq!((gap[0].rows, gap[0].null, gap[1].rows), (2, 0, 2));
        let never = stats(&[nan, nan, nan]);
        for st in &never {
            assert_eq!((st.rows, st.null), (3, 3));
        }
    }

    /// Two channels whose CTs sit on one conductor of a split-phase supply
    /// read opposite powers (their voltages are out of phase) row by row;
    /// two on their own conductors read apart wherever either carries a
    /// load.
    #[test]
    fn two_cts_on_one_conductor_read_alike_row_by_row() {
        let pairs = |rows: &[[f64; 2]]| {
            let mut d = Detector::new(&[0.0, 180.0], 10.0);
            for (i, p) in rows.iter().enumerate() {
                d.push(i as i64 * 10_000, p, &[0.0, 0.0], &[120.0, 120.0]);
            }
            let st = d.finish().1;
            (
                st[0].paired[1],
                st[0].apart[1],
                st[1].apart.first().copied(),
            )
        };
        let one = pairs(&[[500.0, -505.0], [1500.0, -1490.0], [200.0, -190.0]]);
        assert_eq!(
            one,
            (3, [0, 3], Some([0, 0])),
            "in sign: alike; the other sign: apart"
        );
        let two = pairs(&[
            [500.0, 100.0],
            [1500.0, 100.0],
            [20.0, 900.0],
            [0.0, f64::NAN],
        ]);
        assert_eq!(
            two,
            (3, [3, 3], Some([0, 0])),
            "a row one channel misses is no pair; each pair is kept once"
        );
    }
}
