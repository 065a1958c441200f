//! Weather measurements from a file: CSV or Parquet with `time` (an instant:
//! ISO-8601 with its UTC offset, or a zoned timestamp), `temperature_c`, and
//! optionally `ghi_w_m2` (global horizontal irradiance) and `cloud_cover`
//! (0 … 1). Read through the same table reader as estimates.

use super::Weather;
use std::path::Path;

/// Checked measurements, sorted by time.
#[derive(Clone, Debug, Default)]
pub struct Recorded {
    /// Instant of each row, ms since 1970-01-01 UTC.
    pub time_ms: Vec<i64>,
    /// Outdoor dry-bulb temperature of each row, °C.
    pub temp_c: Vec<f64>,
    /// Global horizontal irradiance of each row, W/m², if the file has it.
    pub ghi_w_m2: Option<Vec<f64>>,
    /// Cloud cover of each row, fraction of the sky (0 … 1), if the file has it.
    pub cloud: Option<Vec<f64>>,
}

/// A problem with a weather file: the message, the row (0-based, data
/// rows) and column when known, and what would be accepted.
#[derive(Debug)]
pub struct FileError {
    /// What is wrong, with the row and column where known.
    pub message: String,
    /// What would be accepted instead.
    pub help: String,
}

/// Plausible ranges: the extremes ever measured at the surface, and
/// irradiance up to the solar constant (common practice, no source).
const RANGES: [(&str, f64, f64); 3] = [
    ("temperature_c", -90.0, 60.0),
    ("ghi_w_m2", 0.0, 1400.0),
    ("cloud_cover", 0.0, 1.0),
];

fn err(message: String, help: &str) -> FileError {
    FileError {
        message,
        help: help.to_string(),
    }
}

/// Reads and checks a weather file.
pub fn read(path: &Path) -> Result<Recorded, FileError> {
    let h = solver_check::stream::header(path).map_err(|e| err(e.message, &e.help))?;
    if !h.has("temperature_c") {
        return Err(err(
            format!("{} has no `temperature_c` column", path.display()),
            "name the outdoor temperature column temperature_c (°C); optional: ghi_w_m2, cloud_cover",
        ));
    }
    let mut cols = vec!["temperature_c".to_string()];
    let optional: Vec<&str> = ["ghi_w_m2", "cloud_cover"]
        .into_iter()
        .filter(|c| h.has(c))
        .collect();
    cols.extend(optional.iter().map(|c| c.to_string()));
    let mut stream = h.stream(&cols).map_err(|e| err(e.message, &e.help))?;
    let mut rec = Recorded::default();
    let mut values: Vec<Vec<f64>> = vec![Vec::new(); cols.len()];
    while let Some(b) = stream.next_batch().map_err(|e| err(e.message, &e.help))? {
        rec.time_ms.extend_from_slice(&b.time_ms);
        for (v, c) in values.iter_mut().zip(b.cols) {
            v.extend(c);
        }
    }
    check(path, &rec.time_ms, &cols, &values)?;
    let mut it = values.into_iter();
    rec.temp_c = it.next().expect("temperature column");
    for (name, v) in optional.iter().zip(it) {
        match *name {
            "ghi_w_m2" => rec.ghi_w_m2 = Some(v),
            _ => rec.cloud = Some(v),
        }
    }
    Ok(rec)
}

fn check(path: &Path, time: &[i64], cols: &[String], values: &[Vec<f64>]) -> Result<(), FileError> {
    if time.len() < 2 {
        return Err(err(
            format!(
                "{} holds {} rows; a weather file needs at least two",
                path.display(),
                time.len()
            ),
            "give at least hourly values over the whole run",
        ));
    }
    if let Some(r) = (1..time.len()).find(|&r| time[r] <= time[r - 1]) {
        return Err(err(
            format!(
                "{}: times are not increasing at row {r} (column `time`)",
                path.display()
            ),
            "sort the rows by time and drop duplicates",
        ));
    }
    for (name, v) in cols.iter().zip(values) {
        let (_, lo, hi) = RANGES.iter().find(|r| r.0 == name).expect("known column");
        if let Some(r) = v
            .iter()
            .position(|x| !x.is_finite() || *x < *lo || *x > *hi)
        {
            return Err(err(
                format!(
                    "{}: `{name}` is {} at row {r}, outside {lo} … {hi}",
                    path.display(),
                    v[r]
                ),
                "fill gaps before use (no nulls or NaN) and check the units (°C, W/m², 0 … 1)",
            ));
        }
    }
    Ok(())
}

impl Recorded {
    /// Whether the file covers `from_ms ..= to_ms`; else the first instant it misses.
    pub fn covers(&self, from_ms: i64, to_ms: i64) -> Result<(), i64> {
        if self.time_ms[0] > from_ms {
            return Err(from_ms);
        }
        if *self.time_ms.last().expect("two rows or more") < to_ms {
            return Err(*self.time_ms.last().unwrap());
        }
        Ok(())
    }

    /// The longest gap between two rows, ms.
    pub fn longest_gap_ms(&self) -> i64 {
        self.time_ms
            .windows(2)
            .map(|w| w[1] - w[0])
            .max()
            .unwrap_or(0)
    }

    /// Hourly values from `first_ms`, linear between rows, held at the ends.
    pub fn hourly(&self, first_ms: i64, hours: usize) -> Weather {
        let at = |v: &[f64], t: i64| -> f64 {
            let j = self.time_ms.partition_point(|&x| x <= t);
            if j == 0 {
                return v[0];
            }
            if j == self.time_ms.len() {
                return v[j - 1];
            }
            let (t0, t1) = (self.time_ms[j - 1], self.time_ms[j]);
            let w = (t - t0) as f64 / (t1 - t0) as f64;
            v[j - 1] * (1.0 - w) + v[j] * w
        };
        let times: Vec<i64> = (0..hours as i64)
            .map(|h| first_ms + h * 3_600_000)
            .collect();
        Weather {
            start_utc_ms: first_ms,
            temp_c: times.iter().map(|&t| at(&self.temp_c, t)).collect(),
            ghi_w_m2: self
                .ghi_w_m2
                .as_ref()
                .map(|g| times.iter().map(|&t| at(g, t)).collect()),
        }
    }
}

#[cfg(test)]
mod tests {
    use super::*;

    #[test]
    fn reads_a_csv_with_offsets_and_interpolates() {
        let dir = std::env::temp_dir().join(format!("loadloom-wx-{}", std::process::id()));
        std::fs::create_dir_all(&dir).unwrap();
        let p = dir.join("w.csv");
        std::fs::write(
            &p,
            "time,temperature_c,ghi_w_m2\n2027-01-04T00:00:00-06:00,-10,0\n2027-01-04T02:00:00-06:00,-6,100\n",
        )
        .unwrap();
        let r = read(&p).unwrap();
        let w = r.hourly(r.time_ms[0], 3);
        assert_eq!(w.temp_c, vec![-10.0, -8.0, -6.0]);
        assert_eq!(w.ghi_w_m2.unwrap()[1], 50.0);
        assert!(r.covers(r.time_ms[0], r.time_ms[1]).is_ok());
        assert!(r.covers(r.time_ms[0] - 1, r.time_ms[1]).is_err());
        std::fs::write(
            &p,
            "time,temperature_c\n2027-01-04T00:00:00Z,-10\n2027-01-04T01:00:00Z,95\n",
        )
        .unwrap();
        assert!(read(&p).unwrap_err().message.contains("outside"));
        std::fs::write(&p, "time,temp\n2027-01-04T00:00:00Z,1\n").unwrap();
        assert!(read(&p).unwrap_err().message.contains("temperature_c"));
        std::fs::remove_dir_all(&dir).ok();
    }
}
