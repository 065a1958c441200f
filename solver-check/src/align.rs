//! Aligning an estimate's times with the truth's reporting intervals.
//! Same interval: rows matched by time. Coarser estimate: the truth averaged
//! to its intervals (energy-consistent). Finer estimate: averaged down to the
//! truth's intervals. Only whole intervals both sides cover are scored.

use crate::contract::columns;
use crate::table::{table_err, TableError};
use std::path::Path;

/// The scored intervals and where they sit in the truth and the estimate.
#[derive(Clone, Debug, PartialEq)]
pub struct Alignment {
    /// Start of the first scored interval, ms since 1970-01-01 UTC.
    pub start_ms: i64,
    /// Length of a scored interval, ms (the coarser of truth's and the estimate's).
    pub interval_ms: i64,
    /// Number of scored intervals.
    pub rows: usize,
    /// First truth row of the first scored interval.
    pub truth_first: usize,
    /// Truth rows averaged into each scored interval.
    pub truth_per: usize,
    /// First estimate row of the first scored interval.
    pub est_first: usize,
    /// Estimate rows averaged into each scored interval.
    pub est_per: usize,
}

/// Checks times batch by batch: strictly increasing and evenly spaced.
#[derive(Default)]
pub struct TimeScan {
    /// The first time seen, ms since 1970-01-01 UTC (None before any row).
    pub first: Option<i64>,
    /// The spacing of the first two rows, ms; every later pair must keep it.
    pub spacing: Option<i64>,
    /// Rows seen so far.
    pub rows: usize,
    last: i64,
}

impl TimeScan {
    /// Feeds the times of rows `first_row ..`.
    pub fn feed(&mut self, path: &Path, first_row: usize, t: &[i64]) -> Result<(), TableError> {
        for (k, &x) in t.iter().enumerate() {
            let r = first_row + k;
            if self.first.is_none() {
                self.first = Some(x);
            } else {
                let d = x - self.last;
                if d == 0 {
                    return Err(table_err(
                        path,
                        Some(columns::TIME),
                        Some(r),
                        "duplicate time",
                        "give each interval one row",
                    ));
                }
                if d < 0 {
                    return Err(table_err(
                        path,
                        Some(columns::TIME),
                        Some(r),
                        "times are not sorted (this row is earlier than the one before)",
                        "sort the rows by time",
                    ));
                }
                match self.spacing {
                    None => self.spacing = Some(d),
                    Some(s) if s != d => {
                        return Err(table_err(path, Some(columns::TIME), Some(r), format!("the spacing changes from {} s to {} s here (a gap or an irregular row)", s as f64 / 1000.0, d as f64 / 1000.0), "give an evenly spaced series without gaps (0 W where the appliance is off)"));
                    }
                    _ => {}
                }
            }
            self.last = x;
            self.rows += 1;
        }
        Ok(())
    }
}

/// Checks times are strictly increasing and evenly spaced; returns the spacing.
pub fn spacing(path: &Path, t: &[i64], fallback_ms: i64) -> Result<i64, TableError> {
    let mut s = TimeScan::default();
    s.feed(path, 0, t)?;
    Ok(s.spacing.unwrap_or(fallback_ms))
}

/// Plans the comparison of an estimate (times `est`) with truth rows
/// starting at `t0` every `dt` ms (`n` rows).
pub fn plan(path: &Path, est: &[i64], t0: i64, dt: i64, n: usize) -> Result<Alignment, TableError> {
    let de = spacing(path, est, dt)?;
    plan_from(path, est.first().copied(), de, est.len(), t0, dt, n)
}

/// Plans from an estimate's first time, spacing `de` and row count.
pub fn plan_from(
    path: &Path,
    est_first: Option<i64>,
    de: i64,
    est_rows: usize,
    t0: i64,
    dt: i64,
    n: usize,
) -> Result<Alignment, TableError> {
    let t_end = t0 + n as i64 * dt;
    let iso = |ms: i64| {
        jiff::Timestamp::from_millisecond(ms)
            .map(|t| t.to_string())
            .unwrap_or_default()
    };
    let none = || {
        table_err(
            path,
            Some(columns::TIME),
            None,
            format!(
                "the estimate's times do not overlap the truth's ({} to {})",
                iso(t0),
                iso(t_end)
            ),
            "estimate the dataset's period",
        )
    };
    let Some(e0) = est_first else {
        return Err(none());
    };
    let off = e0 - t0;
    let (interval, truth_per, est_per) = if de == dt {
        (dt, 1, 1)
    } else if de > dt && de % dt == 0 {
        (de, (de / dt) as usize, 1)
    } else if de < dt && dt % de == 0 {
        (dt, 1, (dt / de) as usize)
    } else {
        return Err(table_err(path, Some(columns::TIME), None, format!("the estimate's interval ({} s) and the truth's ({} s) are not multiples of each other", de as f64 / 1000.0, dt as f64 / 1000.0), "resample the estimate to a multiple or a divisor of the truth's interval"));
    };
    // Interval boundaries must fall on each other.
    let grid = de.min(dt);
    if off.rem_euclid(grid) != 0 {
        return Err(table_err(
            path,
            Some(columns::TIME),
            Some(0),
            format!(
                "the first time is {} s off the truth's interval starts",
                off.rem_euclid(grid) as f64 / 1000.0
            ),
            "give interval-start times on the same grid as the truth's `time`",
        ));
    }
    // First scored interval: the first start ≥ both series' starts on the scored grid.
    let first = t0.max(e0);
    let first = if est_per > 1 || truth_per == 1 {
        t0 + (first - t0 + interval - 1).div_euclid(interval) * interval
    } else {
        e0 + (first - e0 + interval - 1).div_euclid(interval) * interval
    };
    let est_end = e0 + est_rows as i64 * de;
    let last = t_end.min(est_end);
    if last <= first {
        return Err(none());
    }
    let rows = ((last - first) / interval) as usize;
    if rows == 0 {
        return Err(none());
    }
    Ok(Alignment {
        start_ms: first,
        interval_ms: interval,
        rows,
        truth_first: ((first - t0) / dt) as usize,
        truth_per,
        est_first: ((first - e0) / de) as usize,
        est_per,
    })
}

/// Requires the estimate to cover exactly the truth's period, `t0 ..
/// t0 + n·dt`: every scored row, no other. An estimate that starts late or
/// ends early misses rows; one that starts early or runs on has extra rows
/// (training times, say). The error names the first missing or extra time.
#[allow(clippy::too_many_arguments)]
pub fn exact_cover(
    path: &Path,
    est_first: Option<i64>,
    de: i64,
    est_rows: usize,
    t0: i64,
    dt: i64,
    n: usize,
    tz: &str,
) -> Result<(), TableError> {
    let zone = jiff::tz::TimeZone::get(tz).unwrap_or(jiff::tz::TimeZone::UTC);
    let at = |ms: i64| {
        jiff::Timestamp::from_millisecond(ms)
            .map(|t| {
                t.to_zoned(zone.clone())
                    .strftime("%Y-%m-%dT%H:%M:%S%.f%:z")
                    .to_string()
            })
            .unwrap_or_else(|_| format!("{ms} ms"))
    };
    let t_end = t0 + n as i64 * dt;
    let period = format!(
        "{} to {} ({n} rows of {} s)",
        at(t0),
        at(t_end),
        dt as f64 / 1000.0
    );
    let help = "give one row per interval of the scored period, no other rows (a round trip scores exactly the test period of task.json)";
    let Some(e0) = est_first else {
        return Err(table_err(
            path,
            Some(columns::TIME),
            None,
            format!("the estimate has no rows; it must cover {period}"),
            help,
        ));
    };
    let e_end = e0 + est_rows as i64 * de;
    if e0 >= t_end || e_end <= t0 {
        let first = if e0 < t0 {
            format!("extra time {}", at(e0))
        } else {
            format!("missing time {}", at(t0))
        };
        return Err(table_err(path, Some(columns::TIME), Some(0), format!("{first}: the estimate's times ({} to {}) do not overlap the scored period {period}", at(e0), at(e_end)), help));
    }
    if e0 < t0 {
        return Err(table_err(
            path,
            Some(columns::TIME),
            Some(0),
            format!("extra time {}: before the scored period {period}", at(e0)),
            help,
        ));
    }
    if e0 > t0 {
        return Err(table_err(
            path,
            Some(columns::TIME),
            Some(0),
            format!(
                "missing time {}: the estimate starts at {}; the scored period is {period}",
                at(t0),
                at(e0)
            ),
            help,
        ));
    }
    if e_end > t_end {
        let row = ((t_end - e0) / de.max(1)) as usize;
        return Err(table_err(
            path,
            Some(columns::TIME),
            Some(row),
            format!("extra time {}: after the scored period {period}", at(t_end)),
            help,
        ));
    }
    if e_end < t_end {
        return Err(table_err(path, Some(columns::TIME), None, format!("missing time {}: the estimate ends there ({est_rows} rows); the scored period is {period}", at(e_end)), help));
    }
    Ok(())
}

/// Means over `per` rows from `first`, `rows` times.
pub fn means(v: &[f64], first: usize, per: usize, rows: usize) -> Vec<f64> {
    if per == 1 {
        return v[first..first + rows].to_vec();
    }
    (0..rows)
        .map(|j| {
            v[first + j * per..first + (j + 1) * per]
                .iter()
                .sum::<f64>()
                / per as f64
        })
        .collect()
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn coarser_and_finer_estimates_align() {
        let p = Path::new("e.csv");
        // Truth at 1 s from 0; estimate at 10 s from 20 s.
        let est: Vec<i64> = (2..8).map(|k| k * 10_000).collect();
        let pl = plan(p, &est, 0, 1000, 100).unwrap();
        assert_eq!(
            (pl.rows, pl.truth_first, pl.truth_per, pl.est_first),
            (6, 20, 10, 0)
        );
        // Truth at 10 s; estimate at 1 s from 5 s: the first whole interval starts at 10 s.
        let est: Vec<i64> = (5..95).map(|k| k * 1000).collect();
        let pl = plan(p, &est, 0, 10_000, 10).unwrap();
        assert_eq!(
            (pl.start_ms, pl.rows, pl.est_first, pl.est_per),
            (10_000, 8, 5, 10)
        );
        assert_eq!(means(&[1.0, 3.0, 5.0, 7.0], 0, 2, 2), vec![2.0, 6.0]);
    }

    #[test]
    fn only_the_exact_period_is_accepted() {
        let p = Path::new("e.csv");
        let ok = |e0, de, n| exact_cover(p, Some(e0), de, n, 10_000, 1000, 100, "UTC");
        assert!(ok(10_000, 1000, 100).is_ok());
        assert!(
            ok(10_000, 10_000, 10).is_ok(),
            "a coarser estimate of the same period"
        );
        assert!(ok(10_000, 500, 200).is_ok(), "a finer one");
        // Training rows before the period, one row, ten rows short, an hour late.
        let e = ok(0, 1000, 110).unwrap_err();
        assert!(
            e.message.starts_with("extra time 1970-01-01T00:00:00"),
            "{}",
            e.message
        );
        let e = ok(10_000, 1000, 1).unwrap_err();
        assert!(
            e.message.starts_with("missing time 1970-01-01T00:00:11"),
            "{}",
            e.message
        );
        assert!(ok(10_000, 1000, 90)
            .unwrap_err()
            .message
            .contains("missing time"));
        let e = ok(10_000, 1000, 101).unwrap_err();
        assert!(
            e.message.starts_with("extra time 1970-01-01T00:01:50"),
            "{}",
            e.message
        );
        assert_eq!(e.row, Some(100));
        let e = ok(3_610_000, 1000, 100).unwrap_err();
        assert!(
            e.message.starts_with("missing time 1970-01-01T00:00:10"),
            "{}",
            e.message
        );
        assert!(exact_cover(p, None, 1000, 0, 0, 1000, 5, "UTC").is_err());
    }

    #[test]
    fn bad_times_are_named() {
        let p = Path::new("e.csv");
        assert!(spacing(p, &[0, 1000, 1000], 1000)
            .unwrap_err()
            .message
            .contains("duplicate"));
        assert_eq!(spacing(p, &[0, 2000, 1000], 1000).unwrap_err().row, Some(2));
        assert!(spacing(p, &[0, 1000, 3000], 1000)
            .unwrap_err()
            .message
            .contains("gap"));
        assert!(plan(p, &[500_000, 501_000], 0, 1000, 100)
            .unwrap_err()
            .message
            .contains("overlap"));
        assert!(plan(p, &[0, 1500], 0, 1000, 100)
            .unwrap_err()
            .message
            .contains("multiples"));
    }
}
