//! `loadloom score`: an estimate against a dataset's truth, per appliance,
//! per conductor and overall, as a table, JSON (`loadloom-score/1`) or Markdown.

use crate::align::{means, plan, Plan};
use crate::dataset::{Dataset, DatasetError};
use crate::estimate::{read_estimate, Estimate};
use crate::metrics::{Acc, Scores};
use crate::table::{read, table_err, TableError};
use serde_json::{json, Value};
use std::fmt;
use std::path::Path;

pub const SCORE_FORMAT: &str = "loadloom-score/1";

#[derive(Debug)]
pub enum ScoreError {
    Dataset(DatasetError),
    Table(TableError),
}

impl fmt::Display for ScoreError {
    fn fmt(&self, f: &mut fmt::Formatter<'_>) -> fmt::Result {
        match self {
            ScoreError::Dataset(e) => e.fmt(f),
            ScoreError::Table(e) => e.fmt(f),
        }
    }
}

impl From<DatasetError> for ScoreError {
    fn from(e: DatasetError) -> Self {
        ScoreError::Dataset(e)
    }
}
impl From<TableError> for ScoreError {
    fn from(e: TableError) -> Self {
        ScoreError::Table(e)
    }
}

pub struct Options {
    /// Score only the appliances the estimate gives.
    pub partial: bool,
    /// On-thresholds (W) replacing the manifest's.
    pub thresholds: Vec<(String, f64)>,
}

pub struct ApplianceReport {
    pub id: String,
    pub threshold_w: f64,
    pub scores: Scores,
    /// (conductor, MAE, RMSE, NDE) where the estimate gives that conductor.
    pub conductors: Vec<(String, f64, f64, Option<f64>)>,
}

pub struct Report {
    pub dataset: String,
    pub estimate: String,
    pub plan: Plan,
    pub truth_rows: usize,
    pub timezone: String,
    pub appliances: Vec<ApplianceReport>,
    pub overall: Scores,
}

/// Local day index (0-based) of each scored interval start, in the home's zone.
fn day_index(plan: &Plan, tz: &str) -> Vec<u32> {
    let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    let start = jiff::Timestamp::from_millisecond(plan.start_ms).unwrap_or(jiff::Timestamp::UNIX_EPOCH).to_zoned(tz.clone());
    let mut next_midnight = start.date().tomorrow().ok().and_then(|d| d.to_zoned(tz.clone()).ok()).map(|z| z.timestamp().as_millisecond()).unwrap_or(i64::MAX);
    let mut day = 0u32;
    (0..plan.rows)
        .map(|j| {
            let t = plan.start_ms + j as i64 * plan.interval_ms;
            while t >= next_midnight {
                day += 1;
                let z = jiff::Timestamp::from_millisecond(next_midnight).unwrap().to_zoned(tz.clone());
                next_midnight = z.date().tomorrow().ok().and_then(|d| d.to_zoned(tz.clone()).ok()).map(|z| z.timestamp().as_millisecond()).unwrap_or(i64::MAX);
            }
            day
        })
        .collect()
}

fn truth_path(ds: &Dataset) -> Result<std::path::PathBuf, DatasetError> {
    for name in ["truth.parquet", "truth.csv"] {
        if ds.manifest["files"].get(name).is_some() {
            return Ok(ds.dir.join(name));
        }
    }
    Err(DatasetError { file: ds.dir.join("manifest.json"), message: "the manifest lists no truth file".into(), help: "point --truth at a dataset folder written by `loadloom run`".into() })
}

/// Scores `estimate` against the dataset in `dataset`.
pub fn score(dataset: &Path, estimate: &Path, opts: &Options) -> Result<Report, ScoreError> {
    let ds = Dataset::open(dataset)?;
    let est: Estimate = read_estimate(estimate, &ds, opts.partial)?;
    let tpath = truth_path(&ds)?;
    let wanted_cols: Vec<String> = est.appliances.iter().flat_map(|a| std::iter::once(format!("{}_p_w", a.id)).chain(a.per_conductor.iter().map(|(l, _)| format!("{}_{l}_p_w", a.id)))).collect();
    let wanted = |name: &str| wanted_cols.iter().any(|w| w == name);
    let truth = read(&tpath, Some(&wanted))?;
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let t0 = *truth.time_ms.first().ok_or_else(|| table_err(&tpath, Some("time"), None, "the truth has no rows", "rewrite the dataset"))?;
    let plan = plan(estimate, &est.time_ms, t0, dt, truth.time_ms.len())?;
    let days = day_index(&plan, &ds.timezone);
    let interval_s = plan.interval_ms as f64 / 1000.0;
    let mut overall = Acc::default();
    let mut reports = Vec::new();
    let (mut sum_p, mut sum_r, mut sum_f) = (0.0, 0.0, 0.0);
    for a in &est.appliances {
        let info = ds.appliances.iter().find(|x| x.id == a.id).expect("checked when read");
        let threshold_w = opts.thresholds.iter().find(|(id, _)| *id == a.id).map(|t| t.1).unwrap_or(info.on_threshold_w);
        let tcol = truth.num(&format!("{}_p_w", a.id)).ok_or_else(|| table_err(&tpath, Some(&format!("{}_p_w", a.id)), None, "missing from the truth", "rewrite the dataset"))?;
        let y = means(tcol, plan.truth_first, plan.truth_per, plan.rows);
        let yhat = means(&a.p_w, plan.est_first, plan.est_per, plan.rows);
        let on_y: Vec<bool> = y.iter().map(|v| *v > threshold_w).collect();
        let on_hat: Vec<bool> = match &a.on {
            // An on-state column: on for the interval when on for most of it.
            Some(on) => means(&on.iter().map(|b| *b as u8 as f64).collect::<Vec<_>>(), plan.est_first, plan.est_per, plan.rows).iter().map(|v| *v > 0.5).collect(),
            None => yhat.iter().map(|v| *v > threshold_w).collect(),
        };
        let mut acc = Acc::default();
        acc.add(&y, &yhat, &on_y, &on_hat, &days);
        overall.add(&y, &yhat, &on_y, &on_hat, &days);
        let scores = acc.scores(interval_s);
        sum_p += scores.precision;
        sum_r += scores.recall;
        sum_f += scores.f1;
        let mut conductors = Vec::new();
        for (line, v) in &a.per_conductor {
            let name = format!("{}_{line}_p_w", a.id);
            let Some(tc) = truth.num(&name) else {
                return Err(table_err(estimate, Some(&name), None, format!("appliance {} draws nothing on {line}", a.id), "drop the column, or check the wiring").into());
            };
            let y = means(tc, plan.truth_first, plan.truth_per, plan.rows);
            let yh = means(v, plan.est_first, plan.est_per, plan.rows);
            let n = y.len().max(1) as f64;
            let abs: f64 = y.iter().zip(&yh).map(|(a, b)| (b - a).abs()).sum();
            let sq: f64 = y.iter().zip(&yh).map(|(a, b)| (b - a) * (b - a)).sum();
            let sy: f64 = y.iter().map(|a| a * a).sum();
            conductors.push((line.clone(), abs / n, (sq / n).sqrt(), (sy > 0.0).then(|| sq / sy)));
        }
        reports.push(ApplianceReport { id: a.id.clone(), threshold_w, scores, conductors });
    }
    // Overall: errors and energies pooled over appliances and time; precision,
    // recall and F1 averaged over appliances (macro average).
    let mut overall = overall.scores(interval_s);
    let k = reports.len().max(1) as f64;
    overall.n = plan.rows;
    overall.precision = sum_p / k;
    overall.recall = sum_r / k;
    overall.f1 = sum_f / k;
    Ok(Report {
        dataset: dataset.display().to_string(),
        estimate: estimate.display().to_string(),
        plan,
        truth_rows: truth.time_ms.len(),
        timezone: ds.timezone.clone(),
        appliances: reports,
        overall,
    })
}

fn iso(ms: i64, tz: &str) -> String {
    let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    jiff::Timestamp::from_millisecond(ms).map(|t| t.to_zoned(tz).strftime("%Y-%m-%dT%H:%M:%S%:z").to_string()).unwrap_or_default()
}

impl Report {
    pub fn to_json(&self) -> Value {
        json!({
            "format": SCORE_FORMAT,
            "dataset": self.dataset,
            "estimate": self.estimate,
            "period": {
                "start": iso(self.plan.start_ms, &self.timezone),
                "end": iso(self.plan.start_ms + self.plan.rows as i64 * self.plan.interval_ms, &self.timezone),
                "interval_s": self.plan.interval_ms as f64 / 1000.0,
                "rows": self.plan.rows,
                "share_of_truth": (self.plan.rows * self.plan.truth_per) as f64 / self.truth_rows as f64,
            },
            "appliances": self.appliances.iter().map(|a| {
                let mut v = a.scores.to_json();
                let o = v.as_object_mut().unwrap();
                o.insert("id".into(), json!(a.id));
                o.insert("on_threshold_w".into(), json!(a.threshold_w));
                o.insert("conductors".into(), Value::Array(a.conductors.iter().map(|(l, mae, rmse, nde)| json!({ "conductor": l, "mae_w": mae, "rmse_w": rmse, "nde": nde })).collect()));
                v
            }).collect::<Vec<_>>(),
            "overall": self.overall.to_json(),
        })
    }

    fn rows(&self) -> Vec<Vec<String>> {
        let f = |x: Option<f64>, d: usize| x.map(|v| format!("{v:.d$}")).unwrap_or_else(|| "–".into());
        let row = |name: &str, s: &Scores| {
            vec![
                name.to_string(),
                format!("{:.2}", s.truth_kwh),
                format!("{:.2}", s.estimate_kwh),
                format!("{:.1}", s.mae_w),
                format!("{:.1}", s.rmse_w),
                f(s.nde, 3),
                f(s.sae, 3),
                f(s.sae_day, 3),
                f(s.energy_error_pct, 1),
                format!("{:.3}", s.precision),
                format!("{:.3}", s.recall),
                format!("{:.3}", s.f1),
                f(s.accuracy, 3),
                f(s.match_rate, 3),
            ]
        };
        let mut out: Vec<Vec<String>> = self.appliances.iter().map(|a| row(&a.id, &a.scores)).collect();
        out.push(row("overall", &self.overall));
        out
    }

    const HEAD: [&'static str; 14] = ["appliance", "truth kWh", "est kWh", "MAE W", "RMSE W", "NDE", "SAE", "SAE/day", "energy %", "precision", "recall", "F1", "accuracy", "match"];

    pub fn to_text(&self) -> String {
        let rows = self.rows();
        let widths: Vec<usize> = (0..Self::HEAD.len()).map(|c| rows.iter().map(|r| r[c].chars().count()).chain([Self::HEAD[c].len()]).max().unwrap()).collect();
        let line = |cells: &[String]| -> String {
            cells.iter().enumerate().map(|(c, s)| if c == 0 { format!("{s:<w$}", w = widths[c]) } else { format!("{s:>w$}", w = widths[c]) }).collect::<Vec<_>>().join("  ")
        };
        let mut o = format!(
            "{} scored against {}: {} intervals of {} s from {}\n\n",
            self.estimate,
            self.dataset,
            self.plan.rows,
            self.plan.interval_ms as f64 / 1000.0,
            iso(self.plan.start_ms, &self.timezone)
        );
        o += &line(&Self::HEAD.iter().map(|s| s.to_string()).collect::<Vec<_>>());
        o += "\n";
        for r in &rows {
            o += &line(r);
            o += "\n";
        }
        for a in &self.appliances {
            for (l, mae, rmse, nde) in &a.conductors {
                o += &format!("  {} on {}: MAE {:.1} W, RMSE {:.1} W, NDE {}\n", a.id, l.to_uppercase(), mae, rmse, nde.map(|v| format!("{v:.3}")).unwrap_or_else(|| "–".into()));
            }
        }
        o
    }

    pub fn to_markdown(&self) -> String {
        let rows = self.rows();
        let mut o = format!("Scores of `{}` against `{}` ({} intervals of {} s).\n\n", self.estimate, self.dataset, self.plan.rows, self.plan.interval_ms as f64 / 1000.0);
        o += &format!("| {} |\n", Self::HEAD.join(" | "));
        o += &format!("|{}\n", Self::HEAD.iter().enumerate().map(|(i, _)| if i == 0 { "---|" } else { "---:|" }).collect::<String>());
        for r in &rows {
            o += &format!("| {} |\n", r.join(" | "));
        }
        o
    }
}
