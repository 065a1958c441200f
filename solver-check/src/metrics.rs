//! The scores of one appliance (or of all pooled), each formula with its source.

use serde_json::{json, Value};

/// Scores of one series against its truth. `None` where a score is undefined
/// (for example NDE of an appliance that never drew power).
#[derive(Clone, Debug, Default)]
pub struct Scores {
    pub n: usize,
    pub truth_kwh: f64,
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
    pub precision: f64,
    pub recall: f64,
    pub f1: f64,
    /// Estimated accuracy.
    pub accuracy: Option<f64>,
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
    pub n: u64,
    pub sum_y: f64,
    pub sum_yhat: f64,
    pub abs_err: f64,
    pub sq_err: f64,
    pub sq_y: f64,
    pub sum_min: f64,
    pub sum_max: f64,
    pub tp: u64,
    pub fp: u64,
    pub fneg: u64,
}

impl Sums {
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
            let mut s = Sums {
                n: (end - start) as u64,
                ..Sums::default()
            };
            for (&a, &b) in y[start..end].iter().zip(&yhat[start..end]) {
                let e = b - a;
                s.sum_y += a;
                s.sum_yhat += b;
                s.abs_err += e.abs();
                s.sq_err += e * e;
                s.sq_y += a * a;
                s.sum_min += a.min(b);
                s.sum_max += a.max(b);
            }
            if let Some((on_y, on_hat)) = on {
                for (&a, &b) in on_y[start..end].iter().zip(&on_hat[start..end]) {
                    s.tp += (a & b) as u64;
                    s.fp += (!a & b) as u64;
                    s.fneg += (a & !b) as u64;
                }
            }
            self.days[d as usize].merge(&s);
            start = end;
        }
    }

    pub fn merge(&mut self, o: &Acc) {
        if self.days.len() < o.days.len() {
            self.days.resize(o.days.len(), Sums::default());
        }
        for (a, b) in self.days.iter_mut().zip(&o.days) {
            a.merge(b);
        }
    }

    pub fn scores(&self, interval_s: f64) -> Scores {
        scores_of(self.days.iter(), interval_s)
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
        // CHECKS.md: a perfect estimate scores MAE 0, F1 1, estimated accuracy 1;
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
