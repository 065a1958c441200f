//! The scores of one appliance (or of all pooled), each formula with its source.

use serde_json::{json, Value};

/// Scores of one series against its truth. `None` where a score is undefined
/// (for example NDE of an appliance that never drew power).
#[derive(Clone, Debug, Default)]
pub struct Scores {
    /// Rows (scored intervals) the scores cover.
    pub n: usize,
    /// Energy in truth over the scored period, kWh.
    pub truth_kwh: f64,
    /// Energy in the estimate over the scored period, kWh.
    pub estimate_kwh: f64,
    /// Mean absolute error, W.
    pub mae_w: f64,
    /// Root mean squared error, W.
    pub rmse_w: f64,
    /// Normalised disaggregation error.
    pub nde: Option<f64>,
    /// Signal aggregate error over the whole period.
    pub sae: Option<f64>,
    /// Signal aggregate error of daily energies.
    pub sae_day: Option<f64>,
    /// Relative energy error, percent (signed).
    pub energy_error_pct: Option<f64>,
    /// Of the intervals estimated on, the share truly on.
    pub precision: f64,
    /// Of the intervals truly on, the share estimated on.
    pub recall: f64,
    /// Harmonic mean of precision and recall.
    pub f1: f64,
    /// Estimated accuracy.
    pub accuracy: Option<f64>,
    /// Match rate: Σ min(y, ŷ) / Σ max(y, ŷ).
    pub match_rate: Option<f64>,
}

fn ratio(a: f64, b: f64) -> Option<f64> {
    (b > 0.0).then(|| a / b)
}

/// Precision, recall and F1 from counts; 0 where a denominator is 0, as
/// scikit-learn's `precision_recall_fscore_support` does (zero_division=0).
pub fn prf(tp: u64, fp: u64, fneg: u64) -> (f64, f64, f64) {
    let p = if tp + fp > 0 {
        tp as f64 / (tp + fp) as f64
    } else {
        0.0
    };
    let r = if tp + fneg > 0 {
        tp as f64 / (tp + fneg) as f64
    } else {
        0.0
    };
    let f = if p + r > 0.0 {
        2.0 * p * r / (p + r)
    } else {
        0.0
    };
    (p, r, f)
}

/// The sums every score is computed from; adding them pools rows, days or
/// appliances, so a bootstrap over days needs only these per day.
#[derive(Clone, Copy, Debug, Default)]
pub struct Sums {
    /// Rows summed.
    pub n: u64,
    /// Σ y: truth power summed over the rows, W·rows.
    pub sum_y: f64,
    /// Σ ŷ: estimated power summed over the rows, W·rows.
    pub sum_yhat: f64,
    /// Σ |ŷ − y|, W·rows.
    pub abs_err: f64,
    /// Σ (ŷ − y)², W²·rows.
    pub sq_err: f64,
    /// Σ y², W²·rows.
    pub sq_y: f64,
    /// Σ min(y, ŷ), W·rows.
    pub sum_min: f64,
    /// Σ max(y, ŷ), W·rows.
    pub sum_max: f64,
    /// Rows on in both truth and estimate.
    pub tp: u64,
    /// Rows on in the estimate only.
    pub fp: u64,
    /// Rows on in truth only.
    pub fneg: u64,
}

impl Sums {
    /// Adds `o`'s sums to these (pooling rows).
    pub fn merge(&mut self, o: &Sums) {
        self.n += o.n;
        self.sum_y += o.sum_y;
        self.sum_yhat += o.sum_yhat;
        self.abs_err += o.abs_err;
        self.sq_err += o.sq_err;
        self.sq_y += o.sq_y;
        self.sum_min += o.sum_min;
        self.sum_max += o.sum_max;
        self.tp += o.tp;
        self.fp += o.fp;
        self.fneg += o.fneg;
    }
}

/// Per local day sums of one series (or of several pooled).
#[derive(Clone, Debug, Default)]
pub struct Acc {
    /// The sums of each local day, by day index from the first scored day.
    pub days: Vec<Sums>,
}

impl Acc {
    /// Accumulates `y` (truth) and `yhat` (estimate); `day[t]` is the local
    /// day index of row t; `on` the on-states of truth and estimate, if scored.
    pub fn add(&mut self, y: &[f64], yhat: &[f64], on: Option<(&[bool], &[bool])>, day: &[u32]) {
        if let Some(&last) = day.last() {
            if self.days.len() <= last as usize {
                self.days.resize(last as usize + 1, Sums::default());
            }
        }
        // Runs of rows on the same local day, summed in registers.
        let mut start = 0;
        while start < y.len() {
            let d = day[start];
            let end = start
                + day[start..]
                    .iter()
                    .position(|&x| x != d)
                    .unwrap_or(y.len() - start);
            let mut s = sums_of(&y[start..end], &yhat[start..end]);
            if let Some((on_y, on_hat)) = on {
                let (tp, fp, fneg) = on_counts(&on_y[start..end], &on_hat[start..end]);
                s.tp += tp;
                s.fp += fp;
                s.fneg += fneg;
            }
            self.days[d as usize].merge(&s);
            start = end;
        }
    }

    /// Adds `o`'s sums day by day (pooling appliances).
    pub fn merge(&mut self, o: &Acc) {
        if self.days.len() < o.days.len() {
            self.days.resize(o.days.len(), Sums::default());
        }
        for (a, b) in self.days.iter_mut().zip(&o.days) {
            a.merge(b);
        }
    }

    /// The scores over all days; `interval_s` (s) turns power sums into energy.
    pub fn scores(&self, interval_s: f64) -> Scores {
        scores_of(self.days.iter(), interval_s)
    }
}

/// True positives, false positives and false negatives of on-states, counted
/// in runs of up to 255 rows in bytes (a loop the compiler vectorises).
fn on_counts(y: &[bool], yhat: &[bool]) -> (u64, u64, u64) {
    let (mut tp, mut fp, mut fneg) = (0u64, 0u64, 0u64);
    for (a, b) in y.chunks(255).zip(yhat.chunks(255)) {
        let (mut t, mut f, mut n) = (0u8, 0u8, 0u8);
        for (&a, &b) in a.iter().zip(b) {
            t += (a & b) as u8;
            f += (!a & b) as u8;
            n += (a & !b) as u8;
        }
        tp += t as u64;
        fp += f as u64;
        fneg += n as u64;
    }
    (tp, fp, fneg)
}

/// Lanes of the running sums in [`sums_of`]: independent accumulators the
/// compiler can keep in vector registers.
const LANES: usize = 4;

/// The error and energy sums of `y` (truth) against `yhat`, without the
/// on-state counts. The rows are summed in [`LANES`] interleaved partial
/// sums (then added), so the loop vectorises; the result differs from a
/// row-by-row sum only by rounding. Σmin(y, ŷ) and Σmax(y, ŷ) come from
/// min(a, b) = (a + b − |a − b|) / 2 and max(a, b) = (a + b + |a − b|) / 2
/// (exact for finite numbers, which the readers ensure; the sum is held at
/// 0 or above, where rounding could leave a tiny negative: the match rate
/// is a score of non-negative appliance power).
fn sums_of(y: &[f64], yhat: &[f64]) -> Sums {
    let (mut sy, mut sh, mut se, mut se2, mut sy2) = (
        [0.0f64; LANES],
        [0.0; LANES],
        [0.0; LANES],
        [0.0; LANES],
        [0.0; LANES],
    );
    let whole = y.len() / LANES * LANES;
    for (a, b) in y[..whole]
        .chunks_exact(LANES)
        .zip(yhat[..whole].chunks_exact(LANES))
    {
        for l in 0..LANES {
            let e = b[l] - a[l];
            sy[l] += a[l];
            sh[l] += b[l];
            se[l] += e.abs();
            se2[l] += e * e;
            sy2[l] += a[l] * a[l];
        }
    }
    for (l, (&a, &b)) in y[whole..].iter().zip(&yhat[whole..]).enumerate() {
        let e = b - a;
        sy[l] += a;
        sh[l] += b;
        se[l] += e.abs();
        se2[l] += e * e;
        sy2[l] += a * a;
    }
    let total = |v: [f64; LANES]| v.iter().sum::<f64>();
    let (sum_y, sum_yhat, abs_err) = (total(sy), total(sh), total(se));
    Sums {
        n: y.len() as u64,
        sum_y,
        sum_yhat,
        abs_err,
        sq_err: total(se2),
        sq_y: total(sy2),
        sum_min: ((sum_y + sum_yhat - abs_err) / 2.0).max(0.0),
        sum_max: (sum_y + sum_yhat + abs_err) / 2.0,
        ..Sums::default()
    }
}

/// Scores from the sums of a set of days (repeats allowed, as in a bootstrap).
pub fn scores_of<'a>(days: impl Iterator<Item = &'a Sums>, interval_s: f64) -> Scores {
    let mut s = Sums::default();
    let mut day_abs = 0.0;
    for d in days {
        s.merge(d);
        day_abs += (d.sum_yhat - d.sum_y).abs();
    }
    let n = s.n.max(1) as f64;
    let (precision, recall, f1) = prf(s.tp, s.fp, s.fneg);
    Scores {
        n: s.n as usize,
        truth_kwh: s.sum_y * interval_s / 3.6e6,
        estimate_kwh: s.sum_yhat * interval_s / 3.6e6,
        // MAE = (1/T)·Σ|ŷ − y|, RMSE = √((1/T)·Σ(ŷ − y)²): as scikit-learn's
        // mean_absolute_error and mean_squared_error.
        mae_w: s.abs_err / n,
        rmse_w: (s.sq_err / n).sqrt(),
        // NDE = Σ(y − ŷ)² / Σy² — Zhong, Goddard, Sutton, "Signal aggregate
        // constraints in additive factorial HMMs", NIPS 2014.
        nde: ratio(s.sq_err, s.sq_y),
        // SAE = |Σŷ − Σy| / Σy — as used in Zhang et al., "Sequence-to-point
        // learning with neural networks for NILM", AAAI 2018.
        sae: ratio((s.sum_yhat - s.sum_y).abs(), s.sum_y),
        // Daily SAE: Σ_d |ê_d − e_d| / Σ_d e_d over the home's local days
        // (our aggregation of the same idea; days with no truth count too).
        sae_day: ratio(day_abs, s.sum_y),
        energy_error_pct: ratio(100.0 * (s.sum_yhat - s.sum_y), s.sum_y),
        precision,
        recall,
        f1,
        // Estimated accuracy = 1 − Σ_t Σ_i |ŷ − y| / (2·Σ_t Σ_i y) — Kolter &
        // Johnson, KDD workshop on data mining applications in sustainability, 2011.
        accuracy: ratio(s.abs_err, 2.0 * s.sum_y).map(|r| 1.0 - r),
        // Match rate = Σ min(y, ŷ) / Σ max(y, ŷ) — Mayhorn et al., PNNL, 2016.
        match_rate: ratio(s.sum_min, s.sum_max),
    }
}

impl Scores {
    /// The scores as the `loadloom-score/1` report writes them (undefined ones null).
    pub fn to_json(&self) -> Value {
        json!({
            "rows": self.n,
            "truth_kwh": self.truth_kwh,
            "estimate_kwh": self.estimate_kwh,
            "mae_w": self.mae_w,
            "rmse_w": self.rmse_w,
            "nde": self.nde,
            "sae": self.sae,
            "sae_day": self.sae_day,
            "energy_error_pct": self.energy_error_pct,
            "precision": self.precision,
            "recall": self.recall,
            "f1": self.f1,
            "accuracy": self.accuracy,
            "match_rate": self.match_rate,
        })
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    fn run(y: &[f64], yhat: &[f64], thr: f64) -> Scores {
        let on_y: Vec<bool> = y.iter().map(|v| *v > thr).collect();
        let on_h: Vec<bool> = yhat.iter().map(|v| *v > thr).collect();
        let mut a = Acc::default();
        a.add(y, yhat, Some((&on_y, &on_h)), &vec![0; y.len()]);
        a.scores(3600.0)
    }

    #[test]
    fn known_answers() {
        // Known answers of the metrics' definitions: a perfect estimate scores MAE 0, F1 1, estimated accuracy 1;
        // an all-zero estimate scores recall 0 and SAE 1.
        let y = [0.0, 100.0, 100.0, 0.0, 50.0];
        let s = run(&y, &y, 10.0);
        assert_eq!(
            (s.mae_w, s.f1, s.accuracy, s.match_rate, s.nde),
            (0.0, 1.0, Some(1.0), Some(1.0), Some(0.0))
        );
        let z = run(&y, &[0.0; 5], 10.0);
        assert_eq!((z.recall, z.sae, z.accuracy), (0.0, Some(1.0), Some(0.5)));
        assert!((z.truth_kwh - 0.25).abs() < 1e-12);
    }
}
