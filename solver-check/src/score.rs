//! `loadloom score`: an estimate against a dataset's truth, per appliance,
//! per conductor and overall, as a table, JSON (`loadloom-score/1`) or Markdown.

use crate::align::{exact_cover, plan_from, Alignment, TimeScan};
use crate::contract::columns;
use crate::contract::SCORE_FORMAT;
use crate::dataset::{Dataset, DatasetError};
use crate::estimate::{open_estimate, rules, values_check, EstimateFile};
use crate::metrics::{Acc, Scores};
use crate::render::{aligned, Render};
use crate::stream::{header, read_ahead, Cursor, Header};
use crate::table::{table_err, TableError};
use serde_json::{json, Value};
use std::fmt;
use std::path::Path;

/// Why an estimate could not be scored; each names the file and the fix
/// (exit status 2).
#[derive(Debug)]
pub enum ScoreError {
    /// The dataset folder or its manifest is wrong, or its truth changed.
    Dataset(DatasetError),
    /// A table (truth or estimate) is wrong: its file, column and first bad row.
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

/// How to score.
pub struct Options {
    /// Score only the appliances the estimate gives.
    pub partial: bool,
    /// On-thresholds (W) replacing the manifest's.
    pub thresholds: Vec<(String, f64)>,
}

/// `--threshold fridge=20` or `fridge=20W`: an appliance's on-threshold in watts.
pub fn parse_threshold(t: &str) -> Result<(String, f64), crate::diagnostic::Error> {
    let bad = |message: String| {
        let help = "write ID=WATTS with zero or more watts, e.g. fridge=20";
        crate::diagnostic::Error::option(&format!("--threshold {t}"), message, help)
    };
    let (id, w) = t
        .split_once('=')
        .ok_or_else(|| bad("expected ID=WATTS".into()))?;
    let w = w.trim().trim_end_matches('W').trim();
    let v: f64 = w
        .parse()
        .map_err(|_| bad(format!("\"{w}\" is not a number of watts")))?;
    if !(v >= 0.0 && v.is_finite()) {
        return Err(bad("the threshold must be zero or more".into()));
    }
    Ok((id.to_string(), v))
}

/// One appliance's scores.
pub struct ApplianceReport {
    /// The appliance id.
    pub id: String,
    /// The on-threshold used for precision, recall and F1, W.
    pub threshold_w: f64,
    /// Its scores over the whole period.
    pub scores: Scores,
    /// Per local day sums, for comparisons.
    pub acc: Acc,
    /// (conductor, scores) where the estimate gives that conductor; only
    /// MAE, RMSE and NDE are meaningful for signed per-conductor power.
    pub conductors: Vec<(String, Scores)>,
}

/// The scores of an estimate against a dataset's truth (`loadloom-score/1`).
pub struct Report {
    /// The dataset folder, as given.
    pub dataset: String,
    /// The estimate file, as given.
    pub estimate: String,
    /// The scored intervals and how truth and estimate rows map onto them.
    pub plan: Alignment,
    /// Rows of the truth table (the share scored is `plan.rows` over these, at
    /// equal intervals).
    pub truth_rows: usize,
    /// The home's time zone (IANA name); local days follow it.
    pub timezone: String,
    /// Per appliance scored, in the dataset's order.
    pub appliances: Vec<ApplianceReport>,
    /// Errors and energies pooled over appliances and time; precision, recall
    /// and F1 averaged over appliances.
    pub overall: Scores,
    /// The pooled sums per local day, for comparisons.
    pub overall_acc: Acc,
}

/// Local day indices (0-based, in the home's zone) of consecutive scored
/// intervals, handed out block by block.
struct Days {
    tz: jiff::tz::TimeZone,
    next_midnight: i64,
    day: u32,
    t: i64,
    step: i64,
}

impl Days {
    fn new(plan: &Alignment, tz: &str) -> Days {
        let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
        let mut d = Days {
            tz,
            next_midnight: 0,
            day: 0,
            t: plan.start_ms,
            step: plan.interval_ms,
        };
        d.next_midnight = d.midnight_after(plan.start_ms);
        d
    }
    fn midnight_after(&self, ms: i64) -> i64 {
        let z = jiff::Timestamp::from_millisecond(ms)
            .unwrap_or(jiff::Timestamp::UNIX_EPOCH)
            .to_zoned(self.tz.clone());
        z.date()
            .tomorrow()
            .ok()
            .and_then(|d| d.to_zoned(self.tz.clone()).ok())
            .map(|z| z.timestamp().as_millisecond())
            .unwrap_or(i64::MAX)
    }
    fn take(&mut self, n: usize, out: &mut Vec<u32>) {
        out.clear();
        for _ in 0..n {
            while self.t >= self.next_midnight {
                self.day += 1;
                self.next_midnight = self.midnight_after(self.next_midnight);
            }
            out.push(self.day);
            self.t += self.step;
        }
    }
}

fn truth_path(ds: &Dataset) -> Result<std::path::PathBuf, DatasetError> {
    for name in ["truth.parquet", "truth.csv"] {
        if ds.manifest["files"].get(name).is_some() {
            return Ok(ds.dir.join(name));
        }
    }
    Err(DatasetError {
        file: ds.dir.join("manifest.json"),
        message: "the manifest lists no truth file".into(),
        help: "point --truth at a dataset folder written by `loadloom run`".into(),
    })
}

/// Scored intervals per block: the unit of streaming.
const BLOCK: usize = 8192;

/// Scores `estimate` against the dataset in `dataset`, streaming both.
///
/// The truth is checked against the manifest's sha256 first; the estimate
/// must cover exactly the dataset's period (see the README's "Scoring an
/// estimate" for every rule).
///
/// # Example
///
/// A dataset of four minutes written by hand (real measurements converted
/// to the contract look the same), and an estimate 100 W high in one of
/// them:
///
/// ```
/// use solver_check::{contract::DATASET_FORMAT, dataset::sha256_hex, score};
/// use std::fs;
/// let dir = std::env::temp_dir().join(format!("solver-check-score-{}", std::process::id()));
/// fs::create_dir_all(&dir)?;
/// let truth = "time,kettle_p_w\n\
///     2027-01-04T00:00:00Z,0\n\
///     2027-01-04T00:01:00Z,2000\n\
///     2027-01-04T00:02:00Z,2000\n\
///     2027-01-04T00:03:00Z,0\n";
/// fs::write(dir.join("truth.csv"), truth)?;
/// let manifest = serde_json::json!({
///     "format": DATASET_FORMAT,
///     "time": { "timezone": "UTC", "interval_s": 60.0, "rows": 4,
///               "start_utc_ms": 1_799_020_800_000i64 }, // 2027-01-04T00:00Z
///     "supply": { "conductors": ["l1", "n"] },
///     "appliances": [{ "id": "kettle", "conductors": ["l1"], "on_threshold_w": 10.0 }],
///     "files": { "truth.csv": { "rows": 4, "bytes": truth.len(),
///                               "sha256": sha256_hex(&dir.join("truth.csv"))? } },
/// });
/// fs::write(dir.join("manifest.json"), manifest.to_string())?;
///
/// let estimate = dir.join("estimate.csv");
/// fs::write(&estimate, "time,kettle_p_w\n\
///     2027-01-04T00:00:00Z,0\n\
///     2027-01-04T00:01:00Z,2100\n\
///     2027-01-04T00:02:00Z,2000\n\
///     2027-01-04T00:03:00Z,0\n")?;
/// let options = score::Options { partial: false, thresholds: vec![] };
/// let report = score::score(&dir, &estimate, &options).map_err(|e| e.to_string())?;
/// assert_eq!(report.overall.mae_w, 25.0); // W: 100 W off in one of four minutes
/// assert_eq!(report.appliances[0].scores.f1, 1.0); // on and off at the right times
/// fs::remove_dir_all(&dir)?;
/// # Ok::<(), Box<dyn std::error::Error>>(())
/// ```
pub fn score(dataset: &Path, estimate: &Path, opts: &Options) -> Result<Report, ScoreError> {
    let ds = Dataset::open(dataset)?;
    ds.verify_truth()?;
    let ef = open_estimate(estimate, &ds, opts.partial)?;
    let plan = align_estimate(estimate, &ef, &ds)?;

    // Pass 2: truth and estimate side by side, block by block.
    let th = header(&truth_path(&ds)?)?;
    let tcols = truth_columns(estimate, &ef, &th)?;
    let ecols = ef.columns();
    let rules = rules(&ef);
    let tstream = th.stream(&tcols)?;
    let estream = ef.header.stream(&ecols)?;
    let thresholds = thresholds(&ef, &ds, opts);
    let (accs, cond_accs) = std::thread::scope(|scope| -> Result<_, ScoreError> {
        let mut tc = Cursor::new(Box::new(read_ahead(scope, tstream)), Box::new(|_| Ok(())));
        // The estimate is decoded on a thread of its own too: this one
        // only checks values and sums errors.
        let mut ec = Cursor::new(
            Box::new(read_ahead(scope, estream)),
            Box::new(|b| values_check(estimate, &ecols, &rules, b)),
        );
        tc.skip(plan.truth_first)?;
        ec.skip(plan.est_first)?;
        let widths = (tcols.len(), ecols.len());
        sum_errors(
            &mut tc,
            &mut ec,
            &plan,
            &ds.timezone,
            &ef,
            &thresholds,
            widths,
        )
    })?;

    let interval_s = plan.interval_ms as f64 / 1000.0;
    let mut overall_acc = Acc::default();
    let mut reports = Vec::new();
    for ((a, acc), conds) in ef.apps.iter().zip(accs).zip(&cond_accs) {
        overall_acc.merge(&acc);
        reports.push(ApplianceReport {
            id: a.id.clone(),
            threshold_w: thresholds[reports.len()],
            scores: acc.scores(interval_s),
            conductors: a
                .per_conductor
                .iter()
                .zip(conds)
                .map(|((l, _), acc)| (l.clone(), acc.scores(interval_s)))
                .collect(),
            acc,
        });
    }
    let overall = overall_scores(&overall_acc, &reports, interval_s, plan.rows);
    Ok(Report {
        dataset: dataset.display().to_string(),
        estimate: estimate.display().to_string(),
        plan,
        truth_rows: ds.rows as usize,
        timezone: ds.timezone.clone(),
        appliances: reports,
        overall,
        overall_acc,
    })
}

/// Pass 1: reads the estimate's times, refuses one that does not cover
/// exactly the dataset's rows, and plans how its rows meet truth's.
fn align_estimate(
    estimate: &Path,
    ef: &EstimateFile,
    ds: &Dataset,
) -> Result<Alignment, ScoreError> {
    let dt = (ds.interval_s * 1000.0).round() as i64;
    let t0 = ds.manifest["time"]["start_utc_ms"]
        .as_i64()
        .ok_or_else(|| DatasetError {
            file: ds.dir.join("manifest.json"),
            message: "the manifest lacks time.start_utc_ms".into(),
            help: "rewrite the dataset with `loadloom run`".into(),
        })?;
    let mut scan = TimeScan::default();
    let mut st = ef.header.stream(&[])?;
    while let Some(b) = st.next_batch()? {
        scan.feed(estimate, b.first, &b.time_ms)?;
    }
    // Every row of the dataset is scored, no other: an estimate of other
    // times (training, say) or of part of the period gets no score.
    let de = scan.spacing.unwrap_or(dt);
    exact_cover(
        estimate,
        scan.first,
        de,
        scan.rows,
        t0,
        dt,
        ds.rows as usize,
        &ds.timezone,
    )?;
    Ok(plan_from(
        estimate,
        scan.first,
        scan.spacing.unwrap_or(dt),
        scan.rows,
        t0,
        dt,
        ds.rows as usize,
    )?)
}

/// Truth's columns in the estimate's order: per appliance its total, then
/// one per conductor the estimate gives (refused where truth has none).
fn truth_columns(
    estimate: &Path,
    ef: &EstimateFile,
    th: &Header,
) -> Result<Vec<String>, ScoreError> {
    let mut tcols: Vec<String> = Vec::new();
    for a in &ef.apps {
        tcols.push(columns::p(&a.id));
        for (line, col) in &a.per_conductor {
            let name = columns::p(&columns::on_line(&a.id, line));
            if !th.has(&name) {
                return Err(table_err(
                    estimate,
                    Some(col),
                    None,
                    format!("appliance {} draws nothing on {line}", a.id),
                    "drop the column, or check the wiring",
                )
                .into());
            }
            tcols.push(name);
        }
    }
    Ok(tcols)
}

/// Each estimated appliance's on-threshold, W: the `--threshold` given, else
/// the manifest's.
fn thresholds(ef: &EstimateFile, ds: &Dataset, opts: &Options) -> Vec<f64> {
    ef.apps
        .iter()
        .map(|a| {
            opts.thresholds
                .iter()
                .find(|(id, _)| *id == a.id)
                .map(|t| t.1)
                .unwrap_or_else(|| {
                    ds.appliances
                        .iter()
                        .find(|x| x.id == a.id)
                        .map(|x| x.on_threshold_w)
                        .unwrap_or(0.0)
                })
        })
        .collect()
}

/// Error sums per appliance and per (appliance, conductor).
type ErrorSums = (Vec<Acc>, Vec<Vec<Acc>>);

/// Streams both tables block by block over the plan's rows and sums each
/// appliance's (and conductor's) errors per local day. `widths` are the
/// numbers of truth and estimate columns.
fn sum_errors(
    tc: &mut Cursor<'_>,
    ec: &mut Cursor<'_>,
    plan: &Alignment,
    timezone: &str,
    ef: &EstimateFile,
    thresholds: &[f64],
    widths: (usize, usize),
) -> Result<ErrorSums, ScoreError> {
    let mut accs: Vec<Acc> = vec![Acc::default(); ef.apps.len()];
    let mut cond_accs: Vec<Vec<Acc>> = ef
        .apps
        .iter()
        .map(|a| vec![Acc::default(); a.per_conductor.len()])
        .collect();
    let mut days = Days::new(plan, timezone);
    let mut day = Vec::with_capacity(BLOCK);
    let mut y: Vec<Vec<f64>> = vec![Vec::with_capacity(BLOCK); widths.0];
    let mut yh: Vec<Vec<f64>> = vec![Vec::with_capacity(BLOCK); widths.1];
    let (mut on_y, mut on_hat) = (Vec::with_capacity(BLOCK), Vec::with_capacity(BLOCK));
    let mut done = 0;
    while done < plan.rows {
        let count = BLOCK.min(plan.rows - done);
        y.iter_mut().chain(yh.iter_mut()).for_each(Vec::clear);
        tc.means(plan.truth_per, count, &mut y)?;
        ec.means(plan.est_per, count, &mut yh)?;
        days.take(count, &mut day);
        let (mut ti, mut ei) = (0, 0);
        for (k, a) in ef.apps.iter().enumerate() {
            let thr = thresholds[k];
            on_y.clear();
            on_y.extend(y[ti].iter().map(|v| *v > thr));
            on_hat.clear();
            match a.on {
                // An on-state column: on for the interval when on for most of it.
                Some(_) => on_hat.extend(yh[ei + 1].iter().map(|v| *v > 0.5)),
                None => on_hat.extend(yh[ei].iter().map(|v| *v > thr)),
            }
            accs[k].add(&y[ti], &yh[ei], Some((&on_y, &on_hat)), &day);
            let e_cond = ei + 1 + a.on.is_some() as usize;
            for c in 0..a.per_conductor.len() {
                cond_accs[k][c].add(&y[ti + 1 + c], &yh[e_cond + c], None, &day);
            }
            ti += 1 + a.per_conductor.len();
            ei = e_cond + a.per_conductor.len();
        }
        done += count;
    }
    Ok((accs, cond_accs))
}

/// Overall: errors and energies pooled over appliances and time; precision,
/// recall and F1 averaged over appliances (macro average).
pub fn overall_scores(
    pooled: &Acc,
    apps: &[ApplianceReport],
    interval_s: f64,
    rows: usize,
) -> Scores {
    let mut o = pooled.scores(interval_s);
    let k = apps.len().max(1) as f64;
    o.n = rows;
    o.precision = apps.iter().map(|a| a.scores.precision).sum::<f64>() / k;
    o.recall = apps.iter().map(|a| a.scores.recall).sum::<f64>() / k;
    o.f1 = apps.iter().map(|a| a.scores.f1).sum::<f64>() / k;
    o
}

fn iso(ms: i64, tz: &str) -> String {
    let tz = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    jiff::Timestamp::from_millisecond(ms)
        .map(|t| t.to_zoned(tz).strftime("%Y-%m-%dT%H:%M:%S%:z").to_string())
        .unwrap_or_default()
}

impl Report {
    fn rows(&self) -> Vec<Vec<String>> {
        let f =
            |x: Option<f64>, d: usize| x.map(|v| format!("{v:.d$}")).unwrap_or_else(|| "–".into());
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
        let mut out: Vec<Vec<String>> = self
            .appliances
            .iter()
            .map(|a| row(&a.id, &a.scores))
            .collect();
        out.push(row("overall", &self.overall));
        out
    }

    const HEAD: [&'static str; 14] = [
        "appliance",
        "truth kWh",
        "est kWh",
        "MAE W",
        "RMSE W",
        "NDE",
        "SAE",
        "SAE/day",
        "energy %",
        "precision",
        "recall",
        "F1",
        "accuracy",
        "match",
    ];
}

impl Render for Report {
    fn to_json(&self) -> Value {
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
                o.insert("conductors".into(), Value::Array(a.conductors.iter().map(|(l, s)| json!({ "conductor": l, "mae_w": s.mae_w, "rmse_w": s.rmse_w, "nde": s.nde })).collect()));
                v
            }).collect::<Vec<_>>(),
            "overall": self.overall.to_json(),
        })
    }

    fn to_text(&self) -> String {
        let mut o = format!(
            "{} scored against {}: {} intervals of {} s from {}\n\n",
            self.estimate,
            self.dataset,
            self.plan.rows,
            self.plan.interval_ms as f64 / 1000.0,
            iso(self.plan.start_ms, &self.timezone)
        );
        o += &aligned(&Self::HEAD, &self.rows(), 1);
        for a in &self.appliances {
            for (l, s) in &a.conductors {
                o += &format!(
                    "  {} on {}: MAE {:.1} W, RMSE {:.1} W, NDE {}\n",
                    a.id,
                    l.to_uppercase(),
                    s.mae_w,
                    s.rmse_w,
                    s.nde
                        .map(|v| format!("{v:.3}"))
                        .unwrap_or_else(|| "–".into())
                );
            }
        }
        o
    }

    fn to_markdown(&self) -> String {
        let rows = self.rows();
        let mut o = format!(
            "Scores of `{}` against `{}` ({} intervals of {} s).\n\n",
            self.estimate,
            self.dataset,
            self.plan.rows,
            self.plan.interval_ms as f64 / 1000.0
        );
        o += &format!("| {} |\n", Self::HEAD.join(" | "));
        o += &format!(
            "|{}\n",
            Self::HEAD
                .iter()
                .enumerate()
                .map(|(i, _)| if i == 0 { "---|" } else { "---:|" })
                .collect::<String>()
        );
        for r in &rows {
            o += &format!("| {} |\n", r.join(" | "));
        }
        o
    }
}

impl From<ScoreError> for crate::diagnostic::Error {
    /// The dataset's or the table's own error.
    fn from(e: ScoreError) -> crate::diagnostic::Error {
        match e {
            ScoreError::Dataset(d) => d.into(),
            ScoreError::Table(t) => t.into(),
        }
    }
}
