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
    let p = if tp + fp > 0 { tp as f64 / (tp + fp) as f64 } else { 0.0 };
    let r = if tp + fneg > 0 { tp as f64 / (tp + fneg) as f64 } else { 0.0 };
    let f = if p + r > 0.0 { 2.0 * p * r / (p + r) } else { 0.0 };
    (p, r, f)
}

/// Sums a series needs; adding accumulators pools several appliances.
#[derive(Clone, Debug, Default)]
pub struct Acc {
    pub n: usize,
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
    /// Per local day: (Σy, Σŷ).
    pub days: Vec<(f64, f64)>,
}

impl Acc {
    /// Accumulates `y` (truth) and `yhat` (estimate) over rows; `day[t]` is the
    /// local day index of row t; `on_y`/`on_hat` the on-states.
    pub fn add(&mut self, y: &[f64], yhat: &[f64], on_y: &[bool], on_hat: &[bool], day: &[u32]) {
        let ndays = day.last().map(|d| *d as usize + 1).unwrap_or(0);
        if self.days.len() < ndays {
            self.days.resize(ndays, (0.0, 0.0));
        }
        for t in 0..y.len() {
            let (a, b) = (y[t], yhat[t]);
            let e = b - a;
            self.sum_y += a;
            self.sum_yhat += b;
            self.abs_err += e.abs();
            self.sq_err += e * e;
            self.sq_y += a * a;
            self.sum_min += a.min(b);
            self.sum_max += a.max(b);
            match (on_y[t], on_hat[t]) {
                (true, true) => self.tp += 1,
                (false, true) => self.fp += 1,
                (true, false) => self.fneg += 1,
                _ => {}
            }
            let d = &mut self.days[day[t] as usize];
            d.0 += a;
            d.1 += b;
        }
        self.n += y.len();
    }

    pub fn scores(&self, interval_s: f64) -> Scores {
        let n = self.n.max(1) as f64;
        let (precision, recall, f1) = prf(self.tp, self.fp, self.fneg);
        let day_abs: f64 = self.days.iter().map(|(a, b)| (b - a).abs()).sum();
        Scores {
            n: self.n,
            truth_kwh: self.sum_y * interval_s / 3.6e6,
            estimate_kwh: self.sum_yhat * interval_s / 3.6e6,
            // MAE = (1/T)·Σ|ŷ − y|, RMSE = √((1/T)·Σ(ŷ − y)²): as scikit-learn's
            // mean_absolute_error and mean_squared_error.
            mae_w: self.abs_err / n,
            rmse_w: (self.sq_err / n).sqrt(),
            // NDE = Σ(y − ŷ)² / Σy² — Zhong, Goddard, Sutton, "Signal aggregate
            // constraints in additive factorial HMMs", NIPS 2014.
            nde: ratio(self.sq_err, self.sq_y),
            // SAE = |Σŷ − Σy| / Σy — as used in Zhang et al., "Sequence-to-point
            // learning with neural networks for NILM", AAAI 2018.
            sae: ratio((self.sum_yhat - self.sum_y).abs(), self.sum_y),
            // Daily SAE: Σ_d |ê_d − e_d| / Σ_d e_d over the home's local days
            // (our aggregation of the same idea; days with no truth count too).
            sae_day: ratio(day_abs, self.sum_y),
            energy_error_pct: ratio(100.0 * (self.sum_yhat - self.sum_y), self.sum_y),
            precision,
            recall,
            f1,
            // Estimated accuracy = 1 − Σ_t Σ_i |ŷ − y| / (2·Σ_t Σ_i y) — Kolter &
            // Johnson, KDD workshop on data mining applications in sustainability, 2011.
            accuracy: ratio(self.abs_err, 2.0 * self.sum_y).map(|r| 1.0 - r),
            // Match rate = Σ min(y, ŷ) / Σ max(y, ŷ) — Mayhorn et al., PNNL, 2016.
            match_rate: ratio(self.sum_min, self.sum_max),
        }
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
        a.add(y, yhat, &on_y, &on_h, &vec![0; y.len()]);
        a.scores(3600.0)
    }

    #[test]
    fn known_answers() {
        // CHECKS.md: a perfect estimate scores MAE 0, F1 1, estimated accuracy 1;
        // an all-zero estimate scores recall 0 and SAE 1.
        let y = [0.0, 100.0, 100.0, 0.0, 50.0];
        let s = run(&y, &y, 10.0);
        assert_eq!((s.mae_w, s.f1, s.accuracy, s.match_rate, s.nde), (0.0, 1.0, Some(1.0), Some(1.0), Some(0.0)));
        let z = run(&y, &[0.0; 5], 10.0);
        assert_eq!((z.recall, z.sae, z.accuracy), (0.0, Some(1.0), Some(0.5)));
        assert!((z.truth_kwh - 0.25).abs() < 1e-12);
    }
}
