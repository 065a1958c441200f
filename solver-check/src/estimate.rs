//! An estimate file: Parquet or CSV, wide (`time`, `{id}_p_w`, optional
//! `{id}_on` and `{id}_{conductor}_p_w`) or long (`time`, `appliance`, `p_w`).
//! Its columns are checked against the dataset here; its values are checked
//! as they stream past (see `values_check`).

use crate::contract::columns;
use crate::dataset::Dataset;
use crate::stream::read_table;
use crate::stream::{header, in_memory, localise_hint, Batch, Header};
use crate::table::{table_err, Column, Table, TableError};
use std::path::Path;

/// The columns that hold one appliance's estimate.
#[derive(Clone, Debug)]
pub struct AppColumns {
    /// The appliance id.
    pub id: String,
    /// The column of its power estimate, W.
    pub p: String,
    /// The column of its on-state estimate (0/1), if given.
    pub on: Option<String>,
    /// (conductor, column) for each `{id}_{conductor}_p_w` given.
    pub per_conductor: Vec<(String, String)>,
}

/// An opened estimate: its table header and which columns mean what.
pub struct EstimateFile {
    /// The table's header: file, columns, time zone.
    pub header: Header,
    /// The appliances it estimates, in the order of its columns.
    pub apps: Vec<AppColumns>,
}

impl EstimateFile {
    /// Every column to stream, in a fixed order: per appliance p, on, conductors.
    pub fn columns(&self) -> Vec<String> {
        self.apps
            .iter()
            .flat_map(|a| {
                std::iter::once(a.p.clone())
                    .chain(a.on.clone())
                    .chain(a.per_conductor.iter().map(|(_, c)| c.clone()))
            })
            .collect()
    }
}

/// Opens and checks an estimate against the dataset's appliances and time
/// zone. With `partial`, appliances the estimate lacks are left out.
pub fn open_estimate(path: &Path, ds: &Dataset, partial: bool) -> Result<EstimateFile, TableError> {
    let mut h = header(path)?;
    // Times are instants: a Parquet timestamp in any zone (the home's, UTC,
    // a fixed offset) or a CSV time with any UTC offset compares as the
    // same instant. Naive times are refused: zones are never guessed.
    h.zone_hint = Some(ds.timezone.clone());
    if h.time_zone.is_none() && path.extension().is_some_and(|e| e == "parquet") {
        return Err(table_err(
            path,
            Some(columns::TIME),
            None,
            "`time` has no time zone (naive timestamps)",
            localise_hint(Some(&ds.timezone)),
        ));
    }
    if h.has("appliance") && h.has("p_w") {
        h = in_memory(long_to_wide(&read_table(path, None, &["appliance"])?, ds)?);
    }
    let mut apps = total_columns(&h, ds);
    for (name, text) in &h.columns {
        attach_column(path, ds, name, *text, &mut apps)?;
    }
    check_coverage(path, ds, partial, &apps)?;
    Ok(EstimateFile { header: h, apps })
}

/// Whether `id` is one of the dataset's appliances.
fn known(ds: &Dataset, id: &str) -> bool {
    ds.appliances.iter().any(|a| a.id == id)
}

/// One entry per `{id}_p_w` column of a known appliance, in column order.
fn total_columns(h: &Header, ds: &Dataset) -> Vec<AppColumns> {
    let mut apps: Vec<AppColumns> = Vec::new();
    for (name, _) in &h.columns {
        if let Some(id) = name
            .strip_suffix(columns::P_SUFFIX)
            .filter(|id| known(ds, id))
        {
            apps.push(AppColumns {
                id: id.to_string(),
                p: name.clone(),
                on: None,
                per_conductor: Vec::new(),
            });
        }
    }
    apps
}

/// Places one column: a total (must be numeric), a per-conductor or an
/// on-state column of an appliance that has a total; anything else is refused.
fn attach_column(
    path: &Path,
    ds: &Dataset,
    name: &str,
    text: bool,
    apps: &mut [AppColumns],
) -> Result<(), TableError> {
    if name
        .strip_suffix(columns::P_SUFFIX)
        .is_some_and(|id| known(ds, id))
    {
        if text {
            return Err(table_err(
                path,
                Some(name),
                None,
                "not a numeric column",
                "store powers as numbers in W",
            ));
        }
        return Ok(());
    }
    let per = name.strip_suffix(columns::P_SUFFIX).and_then(|stem| {
        let (id, line) = stem.rsplit_once('_')?;
        (known(ds, id) && ds.lines.iter().any(|l| l == line))
            .then(|| (id.to_string(), line.to_string()))
    });
    if let Some((id, line)) = per {
        let Some(a) = apps.iter_mut().find(|a| a.id == id) else {
            return Err(table_err(
                path,
                Some(name),
                None,
                format!("per-conductor column without `{id}_p_w`"),
                format!("add `{id}_p_w`, the appliance's total"),
            ));
        };
        a.per_conductor.push((line, name.to_string()));
        return Ok(());
    }
    if let Some(id) = name.strip_suffix("_on").filter(|id| known(ds, id)) {
        let Some(a) = apps.iter_mut().find(|a| a.id == id) else {
            return Err(table_err(
                path,
                Some(name),
                None,
                format!("on-state column without `{id}_p_w`"),
                format!("add `{id}_p_w`"),
            ));
        };
        a.on = Some(name.to_string());
        return Ok(());
    }
    let ids: Vec<&str> = ds.appliances.iter().map(|a| a.id.as_str()).collect();
    Err(table_err(
        path,
        Some(name),
        None,
        format!("`{name}` is not an appliance column of this dataset"),
        format!(
            "columns are `{{id}}_p_w`, `{{id}}_on` or `{{id}}_{{conductor}}_p_w` with ids: {}",
            ids.join(", ")
        ),
    ))
}

/// Refuses an estimate with no appliance columns, or (unless `partial`) one
/// that leaves out an appliance of the dataset.
fn check_coverage(
    path: &Path,
    ds: &Dataset,
    partial: bool,
    apps: &[AppColumns],
) -> Result<(), TableError> {
    if !partial {
        let missing: Vec<&str> = ds
            .appliances
            .iter()
            .map(|a| a.id.as_str())
            .filter(|id| !apps.iter().any(|a| a.id == *id))
            .collect();
        if !missing.is_empty() {
            return Err(table_err(path, None, None, format!("no estimate for {}", missing.join(", ")), "add a `{id}_p_w` column for each, or pass --partial to score only the appliances given"));
        }
    }
    if apps.is_empty() {
        return Err(table_err(
            path,
            None,
            None,
            "the estimate has no appliance columns",
            "add `{id}_p_w` columns (W)",
        ));
    }
    Ok(())
}

/// The largest power, in size, an estimate may give: a thousand times the
/// largest draw a scenario allows (1 MW), so a wild estimate is refused
/// rather than scored, and no sum or square of the scores overflows to an
/// infinity (3 years of 100 ms rows at this power squared stay near 1e27).
pub const MAX_ESTIMATE_W: f64 = 1e9;

/// What each streamed column must hold: appliance power finite and ≥ 0,
/// per-conductor power finite (it may be negative: the two-wattmeter split),
/// both at most [`MAX_ESTIMATE_W`] in size; on-states 0 or 1.
#[derive(Clone, Copy, PartialEq)]
pub enum Rule {
    /// An appliance's power: finite and ≥ 0.
    Power,
    /// A per-conductor power: finite (it may be negative).
    Conductor,
    /// An on-state: 0 or 1.
    OnState,
}

/// The rule of each column of [`EstimateFile::columns`], in the same order.
pub fn rules(e: &EstimateFile) -> Vec<Rule> {
    e.apps
        .iter()
        .flat_map(|a| {
            std::iter::once(Rule::Power)
                .chain(a.on.iter().map(|_| Rule::OnState))
                .chain(a.per_conductor.iter().map(|_| Rule::Conductor))
        })
        .collect()
}

/// Checks one streamed batch against the rules, naming the first bad row.
pub fn values_check(
    path: &Path,
    names: &[String],
    rules: &[Rule],
    b: &Batch,
) -> Result<(), TableError> {
    for (c, v) in b.cols.iter().enumerate() {
        // One branch-free pass for the usual case (every value finite and
        // allowed); the rows are searched only when one is not.
        if plausible(v, rules[c]) {
            continue;
        }
        let name = &names[c];
        if let Some(r) = v.iter().position(|x| !x.is_finite()) {
            return Err(table_err(
                path,
                Some(name),
                Some(b.first + r),
                if v[r].is_nan() {
                    "value NaN (or null) is not a finite number".to_string()
                } else {
                    format!("value {} is not a finite number", v[r])
                },
                "give every row a finite value (0 W where the appliance is off)",
            ));
        }
        match rules[c] {
            Rule::Power => {
                if let Some(r) = v.iter().position(|x| *x < 0.0) {
                    return Err(table_err(
                        path,
                        Some(name),
                        Some(b.first + r),
                        format!(
                            "power {} W is negative; an appliance's own power cannot be",
                            v[r]
                        ),
                        "clip the estimate at 0 W",
                    ));
                }
            }
            Rule::OnState => {
                if let Some(r) = v.iter().position(|x| *x != 0.0 && *x != 1.0) {
                    return Err(table_err(
                        path,
                        Some(name),
                        Some(b.first + r),
                        format!("on-state {} is neither 0 nor 1", v[r]),
                        "store on-states as 0/1 or booleans",
                    ));
                }
            }
            Rule::Conductor => {}
        }
        if let Some(r) = v.iter().position(|x| x.abs() > MAX_ESTIMATE_W) {
            return Err(table_err(
                path,
                Some(name),
                Some(b.first + r),
                format!("power {} W is beyond 1 GW, no home's load", v[r]),
                "give the power in W (a home's loads stay under 1 MW)",
            ));
        }
    }
    Ok(())
}

/// Whether every value of a column passes its rule: finite, a power within
/// [`MAX_ESTIMATE_W`] and not negative, an on-state 0 or 1 (NaN fails every
/// comparison).
fn plausible(v: &[f64], rule: Rule) -> bool {
    let ok = |x: f64| match rule {
        Rule::Power => (0.0..=MAX_ESTIMATE_W).contains(&x),
        Rule::OnState => x == 0.0 || x == 1.0,
        Rule::Conductor => x.abs() <= MAX_ESTIMATE_W,
    };
    v.chunks(256)
        .all(|c| c.iter().fold(true, |all, &x| all & ok(x)))
}

/// Long form (`time`, `appliance`, `p_w`) to wide: every appliance must give
/// the same times, in order.
fn long_to_wide(t: &Table, ds: &Dataset) -> Result<Table, TableError> {
    let path = &t.file;
    let ids = t.text("appliance").ok_or_else(|| {
        table_err(
            path,
            Some("appliance"),
            None,
            "`appliance` is not a text column",
            "store appliance ids as strings",
        )
    })?;
    let p = t.num("p_w").ok_or_else(|| {
        table_err(
            path,
            Some("p_w"),
            None,
            "`p_w` is not numeric",
            "store powers as numbers in W",
        )
    })?;
    for (name, _) in &t.columns {
        if name != "appliance" && name != "p_w" {
            return Err(table_err(
                path,
                Some(name),
                None,
                format!("unexpected column `{name}` in a long estimate"),
                "a long estimate has exactly time, appliance, p_w",
            ));
        }
    }
    let mut order: Vec<String> = Vec::new();
    let mut cols: Vec<(Vec<i64>, Vec<f64>)> = Vec::new();
    for r in 0..ids.len() {
        let id = &ids[r];
        if !ds.appliances.iter().any(|a| &a.id == id) {
            let all: Vec<&str> = ds.appliances.iter().map(|a| a.id.as_str()).collect();
            return Err(table_err(
                path,
                Some("appliance"),
                Some(r),
                format!("\"{id}\" is not an appliance of this dataset"),
                format!("ids: {}", all.join(", ")),
            ));
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
            return Err(table_err(
                path,
                Some(columns::TIME),
                None,
                format!(
                    "appliance \"{}\" has other times than \"{}\"",
                    order[k], order[0]
                ),
                "give every appliance a row at each time",
            ));
        }
    }
    Ok(Table {
        file: t.file.clone(),
        time_ms: times,
        time_zone: t.time_zone.clone(),
        columns: order
            .into_iter()
            .zip(cols)
            .map(|(id, c)| (columns::p(&id), Column::Num(c.1)))
            .collect(),
    })
}
