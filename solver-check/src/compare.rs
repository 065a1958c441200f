//! `score --against`: is one estimate really better than another? The
//! difference of each score (estimate minus the other) with a 95 %
//! confidence interval from a paired block bootstrap over the home's local
//! days (Efron & Tibshirani, "An Introduction to the Bootstrap", 1993, for the
//! percentile interval; days as blocks keep the within-day dependence).
//! Both estimates are scored on the same resampled days, so what they share
//! (the same hard days) cancels.

use crate::contract::COMPARE_FORMAT;
use crate::diagnostic::Error;
use crate::metrics::{scores_of, Scores};
use crate::render::{aligned_by, Render};
use crate::score::Report;
use serde_json::{json, Value};
use std::path::Path;

/// A score, and whether lower values are better.
pub const METRICS: [(&str, bool); 7] = [
    ("mae_w", true),
    ("rmse_w", true),
    ("nde", true),
    ("sae", true),
    ("f1", false),
    ("accuracy", false),
    ("match_rate", false),
];

fn get(s: &Scores, m: &str) -> Option<f64> {
    match m {
        "mae_w" => Some(s.mae_w),
        "rmse_w" => Some(s.rmse_w),
        "nde" => s.nde,
        "sae" => s.sae,
        "f1" => Some(s.f1),
        "accuracy" => s.accuracy,
        "match_rate" => s.match_rate,
        _ => None,
    }
}

/// One score of both estimates and their difference with its 95 % interval.
#[derive(Clone, Debug)]
pub struct Diff {
    /// The score's name (`mae_w`, `f1`, …).
    pub metric: &'static str,
    /// The estimate's score on all days (None: undefined, such as NDE of an
    /// appliance that never ran).
    pub estimate: Option<f64>,
    /// The other estimate's score on all days.
    pub against: Option<f64>,
    /// estimate − against, on all days.
    pub delta: Option<f64>,
    /// Lower end of the 95 % percentile interval of the difference.
    pub lo: Option<f64>,
    /// Upper end of the 95 % percentile interval of the difference.
    pub hi: Option<f64>,
}

impl Diff {
    /// "better", "worse" or "no clear difference" for the estimate.
    pub fn verdict(&self) -> &'static str {
        let lower_better = METRICS
            .iter()
            .find(|m| m.0 == self.metric)
            .map(|m| m.1)
            .unwrap_or(true);
        match (self.lo, self.hi) {
            (Some(lo), Some(_)) if lo > 0.0 => {
                if lower_better {
                    "worse"
                } else {
                    "better"
                }
            }
            (Some(_), Some(hi)) if hi < 0.0 => {
                if lower_better {
                    "better"
                } else {
                    "worse"
                }
            }
            _ => "no clear difference",
        }
    }
}

/// Two estimates of one dataset compared by a paired bootstrap over days.
pub struct Comparison {
    /// The first estimate's file, as given.
    pub estimate: String,
    /// The estimate it is compared with, as given.
    pub against: String,
    /// Local days resampled (the blocks of the bootstrap).
    pub days: usize,
    /// Bootstrap resamples drawn.
    pub resamples: usize,
    /// (appliance id or "overall", diffs).
    pub rows: Vec<(String, Vec<Diff>)>,
}

/// splitmix64: a small, well-mixed generator for resampling (Steele, Lea,
/// Flood, "Fast splittable pseudorandom number generators", OOPSLA 2014).
struct SplitMix(u64);

impl SplitMix {
    fn below(&mut self, n: usize) -> usize {
        self.0 = self.0.wrapping_add(0x9e37_79b9_7f4a_7c15);
        let mut z = self.0;
        z = (z ^ (z >> 30)).wrapping_mul(0xbf58_476d_1ce4_e5b9);
        z = (z ^ (z >> 27)).wrapping_mul(0x94d0_49bb_1331_11eb);
        z ^= z >> 31;
        ((z as u128 * n as u128) >> 64) as usize
    }
}

/// The q-quantile of sorted values, with linear interpolation.
fn quantile(sorted: &[f64], q: f64) -> Option<f64> {
    if sorted.is_empty() {
        return None;
    }
    let x = q * (sorted.len() - 1) as f64;
    let (i, f) = (x.floor() as usize, x.fract());
    Some(if i + 1 < sorted.len() {
        sorted[i] * (1.0 - f) + sorted[i + 1] * f
    } else {
        sorted[i]
    })
}

/// Bootstrap deltas per row and metric: `samples[row][metric]`, where row
/// `n_apps` (one past the last appliance) is the overall row.
type Samples = Vec<Vec<Vec<f64>>>;

/// Compares two reports over the same period and appliances.
/// A mismatch is reported against `b`'s estimate file (the one compared
/// against `a`).
pub fn compare(a: &Report, b: &Report, resamples: usize, seed: u64) -> Result<Comparison, Error> {
    check_comparable(a, b)?;
    let days = a.overall_acc.days.len().max(b.overall_acc.days.len());
    let mut samples = bootstrap(a, b, days, resamples, seed);
    let rows = diff_rows(a, b, &mut samples);
    Ok(Comparison {
        estimate: a.estimate.clone(),
        against: b.estimate.clone(),
        days,
        resamples,
        rows,
    })
}

/// Refuses two reports that cover different periods or appliances, naming
/// `b`'s estimate file.
fn check_comparable(a: &Report, b: &Report) -> Result<(), Error> {
    let period = |r: &Report| {
        (
            r.plan.start_ms,
            r.plan.start_ms + r.plan.rows as i64 * r.plan.interval_ms,
        )
    };
    if period(a) != period(b) {
        return Err(Error::file(
            Path::new(&b.estimate),
            format!(
                "this estimate covers a different period than {}",
                a.estimate
            ),
            "give both estimates the same period to compare them",
        ));
    }
    let ids = |r: &Report| {
        r.appliances
            .iter()
            .map(|x| x.id.clone())
            .collect::<Vec<_>>()
    };
    if ids(a) != ids(b) {
        return Err(Error::file(
            Path::new(&b.estimate),
            format!(
                "this estimate gives different appliances ({}) than {} ({})",
                ids(b).join(", "),
                a.estimate,
                ids(a).join(", ")
            ),
            "compare the same appliances (or use --partial on both)",
        ));
    }
    Ok(())
}

/// Draws `resamples` paired resamples of `days` local days and records each
/// score's delta (a minus b) per appliance and overall.
fn bootstrap(a: &Report, b: &Report, days: usize, resamples: usize, seed: u64) -> Samples {
    let n_apps = a.appliances.len();
    let mut samples: Samples = vec![vec![Vec::with_capacity(resamples); METRICS.len()]; n_apps + 1];
    let mut rng = SplitMix(seed);
    let mut idx = vec![0usize; days];
    for _ in 0..resamples {
        idx.iter_mut().for_each(|i| *i = rng.below(days));
        resample_once(a, b, &idx, &mut samples);
    }
    samples
}

/// Scores both reports on the days `idx` picks and appends the deltas.
fn resample_once(a: &Report, b: &Report, idx: &[usize], samples: &mut Samples) {
    let (ia, ib) = (
        a.plan.interval_ms as f64 / 1000.0,
        b.plan.interval_ms as f64 / 1000.0,
    );
    let n_apps = a.appliances.len();
    let empty = crate::metrics::Sums::default();
    let pick = |acc: &crate::metrics::Acc| {
        idx.iter()
            .map(|&d| acc.days.get(d).copied().unwrap_or(empty))
            .collect::<Vec<_>>()
    };
    let mut f1 = (0.0, 0.0);
    let (mut pa, mut pb) = (
        crate::metrics::Acc::default(),
        crate::metrics::Acc::default(),
    );
    for k in 0..n_apps {
        let (da, db) = (pick(&a.appliances[k].acc), pick(&b.appliances[k].acc));
        let (sa, sb) = (scores_of(da.iter(), ia), scores_of(db.iter(), ib));
        f1.0 += sa.f1;
        f1.1 += sb.f1;
        push_deltas(&sa, &sb, &mut samples[k]);
        pa.days.extend(da);
        pb.days.extend(db);
    }
    let (mut sa, mut sb) = (pa.scores(ia), pb.scores(ib));
    sa.f1 = f1.0 / n_apps as f64;
    sb.f1 = f1.1 / n_apps as f64;
    push_deltas(&sa, &sb, &mut samples[n_apps]);
}

/// Appends, per metric both scores define, the delta `sa - sb`.
fn push_deltas(sa: &Scores, sb: &Scores, row: &mut [Vec<f64>]) {
    for (m, (name, _)) in METRICS.iter().enumerate() {
        if let (Some(x), Some(y)) = (get(sa, name), get(sb, name)) {
            row[m].push(x - y);
        }
    }
}

/// One row per appliance and one overall: each metric's full-period delta
/// with the 2.5 % and 97.5 % percentiles of its bootstrap deltas.
fn diff_rows(a: &Report, b: &Report, samples: &mut Samples) -> Vec<(String, Vec<Diff>)> {
    let n_apps = a.appliances.len();
    let mut rows = Vec::new();
    for k in 0..=n_apps {
        let (sa, sb, name) = if k < n_apps {
            (
                &a.appliances[k].scores,
                &b.appliances[k].scores,
                a.appliances[k].id.clone(),
            )
        } else {
            (&a.overall, &b.overall, "overall".to_string())
        };
        let diffs = METRICS
            .iter()
            .enumerate()
            .map(|(m, (metric, _))| {
                let s = &mut samples[k][m];
                s.sort_by(|x, y| x.partial_cmp(y).unwrap());
                let (ea, eb) = (get(sa, metric), get(sb, metric));
                Diff {
                    metric,
                    estimate: ea,
                    against: eb,
                    delta: ea.zip(eb).map(|(x, y)| x - y),
                    lo: quantile(s, 0.025),
                    hi: quantile(s, 0.975),
                }
            })
            .collect();
        rows.push((name, diffs));
    }
    rows
}

fn num(x: Option<f64>) -> String {
    x.map(|v| format!("{v:.4}")).unwrap_or_else(|| "–".into())
}

impl Comparison {
    fn table(&self, md: bool) -> String {
        let head = [
            "appliance",
            "score",
            "estimate",
            "against",
            "difference",
            "95 % interval",
            "verdict",
        ];
        let mut rows: Vec<Vec<String>> = Vec::new();
        for (id, diffs) in &self.rows {
            for d in diffs {
                rows.push(vec![
                    id.clone(),
                    d.metric.to_string(),
                    num(d.estimate),
                    num(d.against),
                    num(d.delta),
                    format!("[{}, {}]", num(d.lo), num(d.hi)),
                    d.verdict().to_string(),
                ]);
            }
        }
        let mut o = format!(
            "{} against {}: difference of each score (estimate − against), 95 % interval from a paired bootstrap over {} local days, {} resamples\n\n",
            self.estimate, self.against, self.days, self.resamples
        );
        if md {
            o += &format!(
                "| {} |\n|{}\n",
                head.join(" | "),
                head.iter().map(|_| "---|").collect::<String>()
            );
            for r in &rows {
                o += &format!("| {} |\n", r.join(" | "));
            }
        } else {
            o += &aligned_by(&head, &rows, &|c| c < 2 || c == 6);
        }
        if self.days < 10 {
            o += &format!("\nOnly {} days: the intervals are rough; compare over more days for a firm answer.\n", self.days);
        }
        o
    }
}

impl Render for Comparison {
    fn to_json(&self) -> Value {
        json!({
            "format": COMPARE_FORMAT,
            "estimate": self.estimate,
            "against": self.against,
            "days": self.days,
            "resamples": self.resamples,
            "confidence": 0.95,
            "rows": self.rows.iter().map(|(id, diffs)| json!({
                "id": id,
                "metrics": diffs.iter().map(|d| json!({
                    "metric": d.metric, "estimate": d.estimate, "against": d.against,
                    "delta": d.delta, "ci_low": d.lo, "ci_high": d.hi, "verdict": d.verdict(),
                })).collect::<Vec<_>>(),
            })).collect::<Vec<_>>(),
        })
    }

    fn to_text(&self) -> String {
        self.table(false)
    }
    fn to_markdown(&self) -> String {
        self.table(true)
    }
}
