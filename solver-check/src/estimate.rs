//! An estimate file: Parquet or CSV, wide (`time`, `{id}_p_w`, optional
//! `{id}_on` and `{id}_{conductor}_p_w`) or long (`time`, `appliance`, `p_w`).

use crate::dataset::Dataset;
use crate::table::{read, table_err, Column, Table, TableError};
use std::path::Path;

#[derive(Clone, Debug)]
pub struct ApplianceEstimate {
    pub id: String,
    pub p_w: Vec<f64>,
    pub on: Option<Vec<bool>>,
    /// (conductor, P) for each `{id}_{conductor}_p_w` given.
    pub per_conductor: Vec<(String, Vec<f64>)>,
}

#[derive(Clone, Debug)]
pub struct Estimate {
    pub time_ms: Vec<i64>,
    pub appliances: Vec<ApplianceEstimate>,
}

fn check_finite(path: &Path, col: &str, v: &[f64], non_negative: bool) -> Result<(), TableError> {
    if let Some(r) = v.iter().position(|x| !x.is_finite()) {
        return Err(table_err(path, Some(col), Some(r), format!("value {} is not a finite number", v[r]), "give every row a finite power in W (0 where the appliance is off)"));
    }
    if non_negative {
        if let Some(r) = v.iter().position(|x| *x < 0.0) {
            return Err(table_err(path, Some(col), Some(r), format!("power {} W is negative; an appliance's own power cannot be", v[r]), "clip the estimate at 0 W"));
        }
    }
    Ok(())
}

/// Reads and checks an estimate against the dataset's appliances and time zone.
/// With `partial`, appliances the estimate lacks are left out of the scores.
pub fn read_estimate(path: &Path, ds: &Dataset, partial: bool) -> Result<Estimate, TableError> {
    let t = read(path, None)?;
    if let Some(tz) = &t.time_zone {
        if *tz != ds.timezone {
            return Err(table_err(path, Some("time"), None, format!("time zone \"{tz}\" differs from the dataset's \"{}\"", ds.timezone), format!("convert the times to the dataset's zone (pandas: .dt.tz_convert(\"{}\"))", ds.timezone)));
        }
    } else if path.extension().is_some_and(|e| e == "parquet") {
        return Err(table_err(path, Some("time"), None, "`time` has no time zone", format!("store tz-aware times (pandas: .dt.tz_localize(\"UTC\").dt.tz_convert(\"{}\")); time zones are never guessed", ds.timezone)));
    }
    let wide = if t.has("appliance") && t.has("p_w") { long_to_wide(&t, ds)? } else { t };
    let known = |id: &str| ds.appliances.iter().any(|a| a.id == id);
    let mut apps: Vec<ApplianceEstimate> = Vec::new();
    // First the appliance columns, then the per-conductor and on columns.
    for (name, col) in &wide.columns {
        let Some(id) = name.strip_suffix("_p_w") else { continue };
        if known(id) {
            let Column::Num(v) = col else { return Err(table_err(path, Some(name), None, "not a numeric column", "store powers as numbers in W")) };
            check_finite(path, name, v, true)?;
            apps.push(ApplianceEstimate { id: id.to_string(), p_w: v.clone(), on: None, per_conductor: Vec::new() });
        }
    }
    for (name, col) in &wide.columns {
        let per = name.strip_suffix("_p_w").and_then(|stem| {
            let (id, line) = stem.rsplit_once('_')?;
            (known(id) && ds.lines.iter().any(|l| l == line)).then(|| (id.to_string(), line.to_string()))
        });
        if let Some(id) = name.strip_suffix("_p_w") {
            if known(id) {
                continue;
            }
        }
        if let Some((id, line)) = per {
            let Column::Num(v) = col else { return Err(table_err(path, Some(name), None, "not a numeric column", "store powers as numbers in W")) };
            // Per-conductor power may be negative (two-wattmeter split).
            check_finite(path, name, v, false)?;
            let Some(a) = apps.iter_mut().find(|a| a.id == id) else {
                return Err(table_err(path, Some(name), None, format!("per-conductor column without `{id}_p_w`"), format!("add `{id}_p_w`, the appliance's total")));
            };
            a.per_conductor.push((line, v.clone()));
            continue;
        }
        if let Some(id) = name.strip_suffix("_on") {
            if known(id) {
                let Column::Num(v) = col else { return Err(table_err(path, Some(name), None, "not a 0/1 column", "store on-states as 0/1 or booleans")) };
                if let Some(r) = v.iter().position(|x| *x != 0.0 && *x != 1.0) {
                    return Err(table_err(path, Some(name), Some(r), format!("on-state {} is neither 0 nor 1", v[r]), "store on-states as 0/1 or booleans"));
                }
                let Some(a) = apps.iter_mut().find(|a| a.id == id) else {
                    return Err(table_err(path, Some(name), None, format!("on-state column without `{id}_p_w`"), format!("add `{id}_p_w`")));
                };
                a.on = Some(v.iter().map(|x| *x == 1.0).collect());
                continue;
            }
        }
        let ids: Vec<&str> = ds.appliances.iter().map(|a| a.id.as_str()).collect();
        return Err(table_err(path, Some(name), None, format!("`{name}` is not an appliance column of this dataset"), format!("columns are `{{id}}_p_w`, `{{id}}_on` or `{{id}}_{{conductor}}_p_w` with ids: {}", ids.join(", "))));
    }
    if !partial {
        let missing: Vec<&str> = ds.appliances.iter().map(|a| a.id.as_str()).filter(|id| !apps.iter().any(|a| a.id == *id)).collect();
        if !missing.is_empty() {
            return Err(table_err(path, None, None, format!("no estimate for {}", missing.join(", ")), "add a `{id}_p_w` column for each, or pass --partial to score only the appliances given"));
        }
    }
    if apps.is_empty() {
        return Err(table_err(path, None, None, "the estimate has no appliance columns", "add `{id}_p_w` columns (W)"));
    }
    Ok(Estimate { time_ms: wide.time_ms, appliances: apps })
}

/// Long form (`time`, `appliance`, `p_w`) to wide: every appliance must give
/// the same times, in order.
fn long_to_wide(t: &Table, ds: &Dataset) -> Result<Table, TableError> {
    let path = &t.file;
    let ids = t.text("appliance").ok_or_else(|| table_err(path, Some("appliance"), None, "`appliance` is not a text column", "store appliance ids as strings"))?;
    let p = t.num("p_w").ok_or_else(|| table_err(path, Some("p_w"), None, "`p_w` is not numeric", "store powers as numbers in W"))?;
    for (name, _) in &t.columns {
        if name != "appliance" && name != "p_w" {
            return Err(table_err(path, Some(name), None, format!("unexpected column `{name}` in a long estimate"), "a long estimate has exactly time, appliance, p_w"));
        }
    }
    let mut order: Vec<String> = Vec::new();
    let mut cols: Vec<(Vec<i64>, Vec<f64>)> = Vec::new();
    for r in 0..ids.len() {
        let id = &ids[r];
        if !ds.appliances.iter().any(|a| &a.id == id) {
            let all: Vec<&str> = ds.appliances.iter().map(|a| a.id.as_str()).collect();
            return Err(table_err(path, Some("appliance"), Some(r), format!("\"{id}\" is not an appliance of this dataset"), format!("ids: {}", all.join(", "))));
        }
        let k = match order.iter().position(|o| o == id) {
            Some(k) => k,
            None => {
                order.push(id.clone());
                cols.push((Vec::new(), Vec::new()));
                order.len() - 1
            }
        };
        cols[k].0.push(t.time_ms[r]);
        cols[k].1.push(p[r]);
    }
    let times = cols.first().map(|c| c.0.clone()).unwrap_or_default();
    for (k, c) in cols.iter().enumerate() {
        if c.0 != times {
            return Err(table_err(path, Some("time"), None, format!("appliance \"{}\" has other times than \"{}\"", order[k], order[0]), "give every appliance a row at each time"));
        }
    }
    Ok(Table {
        file: t.file.clone(),
        time_ms: times,
        time_zone: t.time_zone.clone(),
        columns: order.into_iter().zip(cols).map(|(id, c)| (format!("{id}_p_w"), Column::Num(c.1))).collect(),
    })
}
