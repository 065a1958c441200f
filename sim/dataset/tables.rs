//! Simulation chunks and events as Arrow record batches, in the column order
//! of [`super::schema`].

use super::schema::{self, Col, Form};
use crate::scenario::Scenario;
use crate::simulate::{Chunk, StateSpan};
use arrow_array::types::{Float32Type, Float64Type, Int16Type};
use arrow_array::{
    new_null_array, ArrayRef, ArrowPrimitiveType, DictionaryArray, Float32Array, Float64Array,
    Int16Array, PrimitiveArray, RecordBatch, StringArray, TimestampMillisecondArray,
};
use arrow_buffer::{ArrowNativeType, Buffer, NullBuffer, ScalarBuffer};
use arrow_schema::{DataType, Schema};
use std::sync::Arc;

/// The columns and Arrow schemas of a dataset's three tables, with the time
/// labelling of its rows: turns simulator chunks into record batches.
pub struct Tables {
    /// The meters table's columns.
    pub meters: Vec<Col>,
    /// The truth table's columns.
    pub truth: Vec<Col>,
    /// The events table's columns.
    pub events: Vec<Col>,
    /// The meters table's Arrow schema.
    pub meters_schema: Arc<Schema>,
    /// The truth table's Arrow schema.
    pub truth_schema: Arc<Schema>,
    /// The events table's Arrow schema.
    pub events_schema: Arc<Schema>,
    tz: Arc<str>,
    interval_ms: i64,
    start_ms: i64,
    step_ms: i64,
    clock_offset_s: f64,
    clock_drift: f64,
    drop_rows: bool,
    state_names: Vec<ArrayRef>,
    app_ids: ArrayRef,
    form: Form,
    /// Lines the meters table has columns for (the home's own come first).
    lines: usize,
    /// Long truth: every state name of the home once, and per appliance
    /// the key of each of its states in that list.
    all_states: ArrayRef,
    state_keys: Vec<Vec<i16>>,
    /// Per appliance, the lines it draws from (its per-line truth columns).
    app_lines: Vec<Vec<usize>>,
}

fn f32s(v: &[f32]) -> ArrayRef {
    Arc::new(Float32Array::from(v.to_vec()))
}

/// Column vectors a chunk lent to its batches without a copy
/// ([`Tables::lend_batches`]), taken back once the batches are written and
/// dropped, so the simulation fills them again without allocating.
#[derive(Default)]
pub struct Lent {
    f32s: Vec<Buffer>,
    f64s: Vec<Buffer>,
    u16s: Vec<Buffer>,
}

/// `v`'s values as an Arrow buffer, without a copy; `v` is left empty and
/// `to` keeps a handle to take the vector back.
fn lend<T: ArrowNativeType>(v: &mut Vec<T>, to: &mut Vec<Buffer>) -> Buffer {
    let b = Buffer::from_vec(std::mem::take(v));
    to.push(b.clone());
    b
}

/// Fills each column left empty by [`lend`] with a lent vector, cleared. A
/// vector an array still shares (none should) gives way to a new one.
fn refill<'a, T: ArrowNativeType>(
    slots: impl Iterator<Item = &'a mut Vec<T>>,
    from: &mut Vec<Buffer>,
) {
    for slot in slots.filter(|v| v.capacity() == 0) {
        let Some(b) = from.pop() else { return };
        *slot = b.into_vec::<T>().unwrap_or_default();
        slot.clear();
    }
}

impl Lent {
    /// Puts the lent vectors back into `c`'s empty columns (what the
    /// batches were built from; every column of a chunk has its rows, so
    /// any vector fits any column of its type).
    pub fn give_back(mut self, c: &mut Chunk) {
        let (r, t) = (&mut c.readings, &mut c.truth);
        let f32_columns = r
            .line_p
            .iter_mut()
            .chain(&mut r.line_q)
            .chain(&mut r.line_v)
            .chain(&mut r.line_i)
            .chain([&mut r.n_i, &mut r.total_p, &mut r.total_q])
            .chain(&mut t.app_p)
            .chain(&mut t.app_q)
            .chain(t.app_line_p.iter_mut().flatten())
            .chain(t.app_soc.iter_mut().flatten())
            .chain([&mut t.unmetered_p])
            // Last: a home without a production channel never fills it.
            .chain([&mut r.production_p]);
        refill(f32_columns, &mut self.f32s);
        refill(r.energy.iter_mut(), &mut self.f64s);
        refill(t.app_state.iter_mut(), &mut self.u16s);
    }
}

/// Readings: NaN stands for null. `keep` (when rows are dropped) says
/// which rows stay: those are copied; otherwise `v` is lent to the array
/// (its nulls' slots set to zero, as an Arrow builder leaves them).
fn readings<T: ArrowPrimitiveType>(
    v: &mut Vec<T::Native>,
    keep: Option<&[bool]>,
    lent: &mut Vec<Buffer>,
) -> ArrayRef
where
    T::Native: Nan,
{
    let (values, nulls) = match keep {
        None => {
            let nulls = nan_nulls(v);
            (lend(v, lent), nulls)
        }
        Some(k) => {
            let mut kept: Vec<T::Native> = v
                .iter()
                .zip(k)
                .filter(|(_, k)| **k)
                .map(|(x, _)| *x)
                .collect();
            let nulls = nan_nulls(&mut kept);
            (Buffer::from_vec(kept), nulls)
        }
    };
    let len = values.len() / std::mem::size_of::<T::Native>();
    Arc::new(PrimitiveArray::<T>::new(
        ScalarBuffer::new(values, 0, len),
        nulls,
    ))
}

/// The null mask of `values` (NaN is null), when one is null; their slots
/// are set to zero.
fn nan_nulls<T: Nan>(values: &mut [T]) -> Option<NullBuffer> {
    values.iter().any(|x| x.nan()).then(|| {
        let mask = NullBuffer::from_iter(values.iter().map(|x| !x.nan()));
        values
            .iter_mut()
            .filter(|x| x.nan())
            .for_each(|x| *x = Default::default());
        mask
    })
}

/// A float column lent to its array.
fn lent_f32s(v: &mut Vec<f32>, lent: &mut Lent) -> ArrayRef {
    let len = v.len();
    let values = ScalarBuffer::new(lend(v, &mut lent.f32s), 0, len);
    Arc::new(Float32Array::new(values, None))
}

/// The one float test [`readings`] needs, for f32 and f64.
trait Nan: Copy + Default {
    fn nan(self) -> bool;
}

impl Nan for f32 {
    fn nan(self) -> bool {
        self.is_nan()
    }
}

impl Nan for f64 {
    fn nan(self) -> bool {
        self.is_nan()
    }
}

/// Every state name of the home once (in order of first use), and per
/// appliance the place of each of its states in that list.
fn state_union(s: &Scenario) -> (Vec<String>, Vec<Vec<i16>>) {
    let mut names: Vec<String> = Vec::new();
    let keys = s
        .appliances
        .iter()
        .map(|a| {
            a.states
                .iter()
                .map(|st| {
                    let at = names.iter().position(|n| *n == st.name).unwrap_or_else(|| {
                        names.push(st.name.clone());
                        names.len() - 1
                    });
                    at as i16
                })
                .collect()
        })
        .collect();
    (names, keys)
}

impl Tables {
    /// The tables of a home on its own ([`Form::Single`]).
    pub fn new(s: &Scenario) -> Self {
        Self::with_form(s, Form::Single)
    }

    /// The tables of `s` in `form`.
    pub fn with_form(s: &Scenario, form: Form) -> Self {
        let lines = form.lines(s);
        let truth = match form {
            Form::Single => schema::truth(s),
            Form::Fleet => schema::truth_long(),
        };
        let (meters, events) = (schema::meters(s, lines), schema::events());
        let tz = form.timezone(s);
        let (all_states, state_keys) = state_union(s);
        Tables {
            meters_schema: schema::arrow_schema(&meters, tz),
            truth_schema: schema::arrow_schema(&truth, tz),
            events_schema: schema::arrow_schema(&events, tz),
            meters,
            truth,
            events,
            tz: tz.into(),
            interval_ms: (s.meter.interval_s * 1000.0).round() as i64,
            start_ms: s.run.start_utc_ms,
            step_ms: (s.run.step_s * 1000.0).round() as i64,
            clock_offset_s: s.faults.clock_offset_s,
            clock_drift: s.faults.clock_drift,
            drop_rows: s
                .faults
                .dropouts
                .as_ref()
                .is_some_and(|d| d.mode == crate::scenario::DropMode::Missing),
            state_names: s
                .appliances
                .iter()
                .map(|a| {
                    Arc::new(StringArray::from(
                        a.states
                            .iter()
                            .map(|st| st.name.clone())
                            .collect::<Vec<_>>(),
                    )) as ArrayRef
                })
                .collect(),
            app_ids: Arc::new(StringArray::from(
                s.appliances
                    .iter()
                    .map(|a| a.id.clone())
                    .collect::<Vec<_>>(),
            )),
            form,
            lines,
            all_states: Arc::new(StringArray::from(all_states)),
            state_keys,
            app_lines: s.appliances.iter().map(|a| a.lines()).collect(),
        }
    }

    fn times(&self, ms: impl Iterator<Item = i64>) -> ArrayRef {
        Arc::new(
            TimestampMillisecondArray::from(ms.collect::<Vec<_>>()).with_timezone(self.tz.clone()),
        )
    }

    /// Start of reporting interval `row`, ms since 1970 UTC.
    pub fn row_time_ms(&self, row: u64) -> i64 {
        self.start_ms + row as i64 * self.interval_ms
    }

    /// The meter's label for row `row`: its clock's offset and drift added.
    pub fn meter_time_ms(&self, row: u64) -> i64 {
        let elapsed_s = row as f64 * self.interval_ms as f64 / 1000.0;
        self.row_time_ms(row)
            + ((self.clock_offset_s + self.clock_drift * elapsed_s) * 1000.0).round() as i64
    }

    /// The instant simulation step `step` begins, ms since 1970-01-01 UTC.
    pub fn step_time_ms(&self, step: u64) -> i64 {
        self.start_ms + step as i64 * self.step_ms
    }

    /// The meters and truth batches of a chunk the simulation keeps: its
    /// columns are copied.
    pub fn batches(&self, c: &Chunk) -> [RecordBatch; 2] {
        self.lend_batches(&mut c.clone(), &mut Lent::default())
    }

    /// The meters and truth batches of a chunk handed over: its columns are
    /// lent to the batches without a copy, and `lent` takes them back
    /// ([`Lent::give_back`]) once the batches are dropped.
    pub fn lend_batches(&self, c: &mut Chunk, lent: &mut Lent) -> [RecordBatch; 2] {
        let truth = match self.form {
            Form::Single => self.truth_wide(c, lent),
            Form::Fleet => self.truth_long(c),
        };
        [self.meters_batch(c, lent), truth]
    }

    /// The meters rows of a chunk (rows lost in the `missing` dropout form
    /// left out).
    fn meters_batch(&self, c: &mut Chunk, lent: &mut Lent) -> RecordBatch {
        let r = &mut c.readings;
        // Rows lost to a dropout in the "missing" form are left out.
        let keep = self.drop_rows.then_some(r.present.as_slice());
        let times = (0..r.rows() as u64)
            .filter(|&i| keep.is_none_or(|k| k[i as usize]))
            .map(|i| self.meter_time_ms(c.first_row + i));
        let mut cols = vec![self.times(times)];
        let f = &mut lent.f32s;
        for x in 0..r.line_p.len() {
            cols.extend([
                readings::<Float32Type>(&mut r.line_p[x], keep, f),
                readings::<Float32Type>(&mut r.line_q[x], keep, f),
                readings::<Float32Type>(&mut r.line_v[x], keep, f),
                readings::<Float32Type>(&mut r.line_i[x], keep, f),
            ]);
        }
        let rows = cols[0].len();
        let absent = self.lines - r.line_p.len();
        cols.extend((0..4 * absent).map(|_| new_null_array(&DataType::Float32, rows)));
        cols.extend([
            readings::<Float32Type>(&mut r.n_i, keep, f),
            readings::<Float32Type>(&mut r.total_p, keep, f),
            readings::<Float32Type>(&mut r.total_q, keep, f),
        ]);
        if self.meters.iter().any(|c| c.name == schema::PRODUCTION_P) {
            cols.push(readings::<Float32Type>(&mut r.production_p, keep, f));
        }
        if self.meters.iter().any(|c| c.name.ends_with("_energy_wh")) {
            for e in &mut r.energy {
                cols.push(readings::<Float64Type>(e, keep, &mut lent.f64s));
            }
            cols.extend((0..absent).map(|_| new_null_array(&DataType::Float64, rows)));
        }
        RecordBatch::try_new(self.meters_schema.clone(), cols)
            .expect("columns follow the meters schema")
    }

    fn truth_wide(&self, c: &mut Chunk, lent: &mut Lent) -> RecordBatch {
        let t = &mut c.truth;
        let rows = c.readings.rows() as u64;
        let mut cols = vec![self.times((0..rows).map(|i| self.row_time_ms(c.first_row + i)))];
        for k in 0..t.app_p.len() {
            cols.push(lent_f32s(&mut t.app_p[k], lent));
            cols.push(lent_f32s(&mut t.app_q[k], lent));
            // A state index is far below i16::MAX: the u16 keys are read as
            // i16 in place.
            let n = t.app_state[k].len();
            let keys = ScalarBuffer::new(lend(&mut t.app_state[k], &mut lent.u16s), 0, n);
            cols.push(Arc::new(
                DictionaryArray::<Int16Type>::try_new(
                    Int16Array::new(keys, None),
                    self.state_names[k].clone(),
                )
                .expect("state index in range"),
            ));
            for lp in &mut t.app_line_p[k] {
                cols.push(lent_f32s(lp, lent));
            }
            if let Some(soc) = &mut t.app_soc[k] {
                cols.push(lent_f32s(soc, lent));
            }
        }
        cols.push(lent_f32s(&mut t.unmetered_p, lent));
        RecordBatch::try_new(self.truth_schema.clone(), cols)
            .expect("columns follow the truth schema")
    }

    /// Long truth: the chunk's rows once per appliance, appliance after
    /// appliance (long runs of one value, which the Parquet encodings keep
    /// small).
    fn truth_long(&self, c: &Chunk) -> RecordBatch {
        let t = &c.truth;
        let n = c.readings.rows();
        let apps = t.app_p.len();
        let times =
            (0..apps).flat_map(|_| (0..n as u64).map(|i| self.row_time_ms(c.first_row + i)));
        let app_keys = (0..apps).flat_map(|k| std::iter::repeat_n(k as i16, n));
        let state_keys = (0..apps).flat_map(|k| {
            t.app_state[k]
                .iter()
                .map(move |&s| self.state_keys[k][s as usize])
        });
        let concat = |v: &[Vec<f32>]| f32s(&v.concat());
        let mut cols = vec![
            self.times(times),
            Arc::new(
                DictionaryArray::<Int16Type>::try_new(
                    Int16Array::from_iter_values(app_keys),
                    self.app_ids.clone(),
                )
                .expect("appliance index in range"),
            ) as ArrayRef,
            concat(&t.app_p),
            concat(&t.app_q),
            Arc::new(
                DictionaryArray::<Int16Type>::try_new(
                    Int16Array::from_iter_values(state_keys),
                    self.all_states.clone(),
                )
                .expect("state index in range"),
            ),
        ];
        for x in 0..schema::FLEET_LINES {
            let mut values = Vec::with_capacity(apps * n);
            let mut valid = Vec::with_capacity(apps * n);
            for k in 0..apps {
                match self.app_lines[k].iter().position(|&l| l == x) {
                    Some(j) => values.extend_from_slice(&t.app_line_p[k][j]),
                    None => values.resize(values.len() + n, 0.0),
                }
                valid.resize(valid.len() + n, self.app_lines[k].contains(&x));
            }
            let nulls = valid.iter().any(|v| !v).then(|| NullBuffer::from(valid));
            cols.push(Arc::new(PrimitiveArray::<Float32Type>::new(
                values.into(),
                nulls,
            )));
        }
        RecordBatch::try_new(self.truth_schema.clone(), cols)
            .expect("columns follow the long truth schema")
    }

    /// The events table: one row per state segment of each appliance.
    pub fn events_batch(&self, s: &Scenario, events: &[StateSpan], step_s: f64) -> RecordBatch {
        let keys = Int16Array::from(events.iter().map(|e| e.app as i16).collect::<Vec<_>>());
        let cols: Vec<ArrayRef> = vec![
            Arc::new(
                DictionaryArray::<Int16Type>::try_new(keys, self.app_ids.clone())
                    .expect("app index in range"),
            ),
            Arc::new(StringArray::from(
                events
                    .iter()
                    .map(|e| s.appliances[e.app].states[e.state as usize].name.clone())
                    .collect::<Vec<_>>(),
            )),
            self.times(events.iter().map(|e| self.step_time_ms(e.start_step))),
            self.times(events.iter().map(|e| self.step_time_ms(e.end_step))),
            Arc::new(Float64Array::from(
                events
                    .iter()
                    .map(|e| e.energy_j / ((e.end_step - e.start_step) as f64 * step_s))
                    .collect::<Vec<_>>(),
            )),
            Arc::new(Float64Array::from(
                events
                    .iter()
                    .map(|e| e.energy_j / 3600.0)
                    .collect::<Vec<_>>(),
            )),
        ];
        RecordBatch::try_new(self.events_schema.clone(), cols)
            .expect("columns follow the events schema")
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn home() -> Scenario {
        let text = r#"
[home]
supply = "split-phase"
timezone = "UTC"
[run]
start = "2027-01-04T00:00"
length = "10 min"
[[appliance]]
id = "kettle"
wiring = "L1-N"
behaviour = "steady"
load = "resistive"
states = [{ power = "1500 W", pf = 1.0 }]
[[appliance]]
id = "dryer"
wiring = "L1-L2"
behaviour = "steady"
load = "resistive"
states = [{ power = "4 kW", pf = 1.0 }]
"#;
        crate::scenario::load_str(std::path::Path::new("two.toml"), text.into()).unwrap()
    }

    /// Lent batches hold what copied ones hold, and once they are dropped
    /// every column is back in the chunk, empty, with its room kept.
    #[test]
    fn lent_columns_come_back_with_their_room() {
        let s = home();
        let tables = Tables::new(&s);
        let tl = crate::loads::timelines(&s, s.run.steps());
        let mut chunks = 0;
        crate::simulate::simulate(&s, &tl, s.intervals(), 256, |c| {
            let rows = c.readings.rows();
            let copied = tables.batches(c);
            let mut owned = c.clone();
            let mut lent = Lent::default();
            let batches = tables.lend_batches(&mut owned, &mut lent);
            assert_eq!(batches, copied);
            drop(batches);
            lent.give_back(&mut owned);
            let r = &owned.readings;
            let t = &owned.truth;
            let f32s = r
                .line_p
                .iter()
                .chain(&r.line_q)
                .chain(&r.line_v)
                .chain(&r.line_i)
                .chain([&r.n_i, &r.total_p, &r.total_q, &t.unmetered_p])
                .chain(&t.app_p)
                .chain(&t.app_q)
                .chain(t.app_line_p.iter().flatten());
            for v in f32s {
                assert!(v.is_empty() && v.capacity() >= rows);
            }
            for v in &t.app_state {
                assert!(v.is_empty() && v.capacity() >= rows);
            }
            chunks += 1;
            Ok::<(), crate::electrical::settle::Diverged>(())
        })
        .unwrap();
        assert_eq!(chunks, 3); // 600 rows in chunks of 256
    }
}
