//! `loadloom plot --monthly`: the energy of each local calendar month as a
//! bar, stacked by appliance or by end use from the truth (the largest
//! consumers each in a fill of their own, the rest together), for year
//! reports.

use super::axis::{self, Frame};
use super::palette::{self, FRAME, INK, PANEL_FILL};
use super::{err, escape, time_err, write_picture, zone};
use crate::contract::columns;
use crate::dataset::Dataset;
use crate::diagnostic::Error;
use crate::stream::header;
use std::fmt::Write as _;
use std::path::Path;

/// What was drawn.
pub struct Monthly {
    /// The local months, `YYYY-MM`.
    pub months: Vec<String>,
    /// The appliances (or end uses) with a bar part of their own, largest first.
    pub shown: Vec<String>,
    /// How many were summed as "others".
    pub others: usize,
}

/// What a month's bar is stacked by.
#[derive(Clone, Copy, Debug, PartialEq, Eq)]
pub enum Parts {
    /// One part per appliance.
    Appliance,
    /// One part per end use (the manifest's `end_use` of each appliance;
    /// "other" where a dataset has none): the appliances of a use summed.
    EndUse,
}

impl Parts {
    /// The SVG attribute naming a bar part, and the legend's title.
    fn names(self) -> (&'static str, &'static str) {
        match self {
            Parts::Appliance => ("data-appliance", "appliances"),
            Parts::EndUse => ("data-end-use", "end uses"),
        }
    }
}

/// The end uses of the dataset's appliances, in first-seen order, and per
/// month their kWh summed from the appliances' (`kwh` columns in the
/// order of the manifest's appliances).
fn by_end_use(ds: &Dataset, kwh: &[Vec<f64>]) -> (Vec<String>, Vec<Vec<f64>>) {
    let uses: Vec<String> = (0..ds.appliances.len())
        .map(|k| {
            ds.manifest["appliances"][k]["end_use"]
                .as_str()
                .unwrap_or("other")
                .to_string()
        })
        .collect();
    let mut names: Vec<String> = Vec::new();
    for u in &uses {
        if !names.contains(u) {
            names.push(u.clone());
        }
    }
    let sums = kwh
        .iter()
        .map(|month| {
            names
                .iter()
                .map(|n| {
                    (0..uses.len())
                        .filter(|&k| uses[k] == *n)
                        .map(|k| month[k])
                        .sum()
                })
                .collect()
        })
        .collect();
    (names, sums)
}

/// Appliances drawn on their own; the rest share one grey part.
const OWN_PARTS: usize = 12;

/// One local month: its label, its UTC span and the days of it in the data
/// (calendar days: a month with a change to or from daylight-saving time
/// counts its 31 or 30 days, not its 30 23/24 or 30 25/24 elapsed).
struct Month {
    label: String,
    end_ms: i64,
    days: f64,
}

/// The local calendar months that [t0, t1) touches.
fn months(tz: &jiff::tz::TimeZone, t0: i64, t1: i64) -> Result<Vec<Month>, jiff::Error> {
    let mut first = jiff::Timestamp::from_millisecond(t0)?
        .to_zoned(tz.clone())
        .date()
        .first_of_month();
    let mut out = Vec::new();
    let mut start = t0;
    while start < t1 {
        let next = first.checked_add(jiff::Span::new().months(1))?;
        let end_ms = next.to_zoned(tz.clone())?.timestamp().as_millisecond();
        out.push(Month {
            label: first.strftime("%Y-%m").to_string(),
            end_ms,
            days: local_days(tz, start, end_ms.min(t1))?,
        });
        start = end_ms;
        first = next;
    }
    Ok(out)
}

/// Days of the local calendar from instant `a_ms` to `b_ms`: the wall
/// clocks' difference, so a day that the change to or from daylight-saving
/// time makes 23 or 25 hours long counts as one.
fn local_days(tz: &jiff::tz::TimeZone, a_ms: i64, b_ms: i64) -> Result<f64, jiff::Error> {
    let wall = |ms: i64| -> Result<jiff::civil::DateTime, jiff::Error> {
        Ok(jiff::Timestamp::from_millisecond(ms)?
            .to_zoned(tz.clone())
            .datetime())
    };
    let d = wall(a_ms)?.duration_until(wall(b_ms)?);
    Ok(d.as_secs_f64() / 86_400.0)
}

/// kWh per month (rows) and appliance (columns) from the truth's `ID_p_w`.
fn energies(ds: &Dataset, months: &[Month], ids: &[String]) -> Result<Vec<Vec<f64>>, Error> {
    let truth = ["truth.parquet", "truth.csv"]
        .into_iter()
        .find(|f| ds.manifest["files"].get(*f).is_some())
        .ok_or_else(|| {
            err(
                &ds.dir,
                "the manifest lists no truth file",
                "plot a folder written by `loadloom run`",
            )
        })?;
    let cols: Vec<String> = ids.iter().map(|i| columns::p(i)).collect();
    let h = header(&ds.dir.join(truth))?;
    let mut st = h.stream(&cols)?;
    let kwh_per_w_row = ds.interval_s / 3.6e6;
    let mut kwh = vec![vec![0.0f64; ids.len()]; months.len()];
    let mut m = 0;
    while let Some(b) = st.next_batch()? {
        for (k, &t) in b.time_ms.iter().enumerate() {
            // Rows come in time order, so the month only moves forward.
            while m + 1 < months.len() && t >= months[m].end_ms {
                m += 1;
            }
            for (c, col) in b.cols.iter().enumerate() {
                if col[k].is_finite() {
                    kwh[m][c] += col[k] * kwh_per_w_row;
                }
            }
        }
    }
    Ok(kwh)
}

/// A round step for `ticks` or so ticks up to `hi`: 1, 2 or 5 × 10^k.
fn nice_step(hi: f64, ticks: f64) -> f64 {
    let raw = (hi / ticks).max(1e-9);
    let mag = 10f64.powf(raw.log10().floor());
    [1.0, 2.0, 5.0, 10.0]
        .into_iter()
        .map(|m| m * mag)
        .find(|s| *s >= raw)
        .unwrap_or(10.0 * mag)
}

/// The largest consumers (by their total), at most [`OWN_PARTS`]; the rest
/// are summed. Returns (indices shown, indices summed).
fn split_parts(kwh: &[Vec<f64>], n: usize) -> (Vec<usize>, Vec<usize>) {
    let total = |c: usize| kwh.iter().map(|m| m[c]).sum::<f64>();
    let mut order: Vec<usize> = (0..n).filter(|&c| total(c) > 0.0).collect();
    order.sort_by(|&a, &b| total(b).total_cmp(&total(a)));
    if order.len() > OWN_PARTS {
        let rest = order.split_off(OWN_PARTS - 1);
        (order, rest)
    } else {
        (order, Vec::new())
    }
}

/// Per month, the parts of its bar: (name, fill, kWh), the appliances
/// shown on their own in order, then the rest together in grey.
fn parts(
    ids: &[String],
    kwh: &[Vec<f64>],
    shown: &[usize],
    rest: &[usize],
) -> Vec<Vec<(String, String, f64)>> {
    kwh.iter()
        .map(|month| {
            let mut p: Vec<(String, String, f64)> = shown
                .iter()
                .enumerate()
                .map(|(r, &c)| (ids[c].clone(), palette::fill(r), month[c]))
                .collect();
            if !rest.is_empty() {
                let e = rest.iter().map(|&c| month[c]).sum();
                p.push((format!("{} others", rest.len()), FRAME.to_string(), e));
            }
            p
        })
        .collect()
}

/// Stacks one month's parts upward from zero.
fn bar(
    svg: &mut String,
    (x, bw): (f64, f64),
    yp: &dyn Fn(f64) -> f64,
    parts: &[(String, String, f64)],
    month: &str,
    attr: &str,
) {
    let mut below = 0.0;
    for (id, fill, e) in parts.iter().filter(|p| p.2 > 0.0) {
        let _ = write!(
            svg,
            r#"<rect class="part" data-month="{month}" {attr}="{}" data-kwh="{e:.6}" x="{x:.1}" y="{:.1}" width="{bw:.1}" height="{:.1}" fill="{fill}"/>"#,
            escape(id),
            yp(below + e),
            yp(below) - yp(below + e),
        );
        below += e;
    }
}

/// Grid lines and labels of the energy axis, every `step` kWh up to `hi`.
fn energy_axis(svg: &mut String, f: Frame, hi: f64, step: f64) {
    let decimals = (-step.log10().floor()).max(0.0) as usize;
    let yp = |v: f64| f.y + f.h - v / hi * f.h;
    for k in 0..=((hi / step).round() as usize) {
        let v = k as f64 * step;
        let _ = write!(
            svg,
            r#"<line class="tick" x1="{}" x2="{}" y1="{y:.1}" y2="{y:.1}" stroke="{}"/><text class="tick-label" x="{}" y="{:.1}" text-anchor="end" font-size="10" fill="{INK}">{v:.decimals$}</text>"#,
            f.x,
            f.x + f.w,
            palette::GRID,
            f.x - 4.0,
            yp(v) + 3.0,
            y = yp(v)
        );
    }
}

/// One stacked bar per month, labelled with the month and its days simulated.
fn month_bars(
    svg: &mut String,
    f: Frame,
    ms: &[Month],
    parts: &[Vec<(String, String, f64)>],
    yp: &dyn Fn(f64) -> f64,
    attr: &str,
) {
    let slot = f.w / ms.len() as f64;
    for (m, month) in ms.iter().enumerate() {
        let x = f.x + m as f64 * slot;
        let span = (x + slot * 0.15, slot * 0.7);
        bar(svg, span, yp, &parts[m], &month.label, attr);
        let days = if (month.days - month.days.round()).abs() < 1e-6 {
            format!("{:.0} d", month.days)
        } else {
            format!("{:.1} d", month.days)
        };
        let _ = write!(
            svg,
            r#"<text class="month" x="{:.1}" y="{:.1}" text-anchor="middle" font-size="10" fill="{INK}">{}</text><text x="{:.1}" y="{:.1}" text-anchor="middle" font-size="9" fill="{INK}">{days}</text>"#,
            x + slot / 2.0,
            f.y + f.h + 13.0,
            month.label,
            x + slot / 2.0,
            f.y + f.h + 25.0,
        );
    }
}

/// Draws the monthly energy of `dataset` to `out` (.svg or .png), stacked by `by`.
pub fn plot_monthly(
    dataset: &Path,
    out: &Path,
    (width, height): (u32, u32),
    by: Parts,
) -> Result<Monthly, Error> {
    let ds = Dataset::open(dataset)?;
    let tz = zone(&ds)?;
    let t0 = ds.manifest["time"]["start_utc_ms"].as_i64().unwrap_or(0);
    let t1 = t0 + (ds.rows as f64 * ds.interval_s * 1000.0).round() as i64;
    let ms = months(&tz, t0, t1).map_err(time_err(dataset))?;
    let ids: Vec<String> = ds.appliances.iter().map(|a| a.id.clone()).collect();
    let kwh = energies(&ds, &ms, &ids)?;
    let (ids, kwh) = match by {
        Parts::Appliance => (ids, kwh),
        Parts::EndUse => by_end_use(&ds, &kwh),
    };
    let (attr, legend_title) = by.names();
    let (shown, rest) = split_parts(&kwh, ids.len());
    let parts = parts(&ids, &kwh, &shown, &rest);
    let (w, h) = (width as f64, height as f64);
    let f = Frame {
        x: 80.0,
        y: 50.0,
        w: w - 80.0 - 230.0,
        h: h - 50.0 - 70.0,
    };
    let top = parts
        .iter()
        .map(|p| p.iter().map(|p| p.2.max(0.0)).sum::<f64>())
        .fold(0.0f64, f64::max);
    let step = nice_step(top.max(1e-6), 6.0);
    let hi = (top / step).ceil().max(1.0) * step;
    let yp = |v: f64| f.y + f.h - v / hi * f.h;
    let mut svg = String::new();
    let _ = write!(
        svg,
        r#"<svg xmlns="http://www.w3.org/2000/svg" width="{width}" height="{height}" viewBox="0 0 {width} {height}" font-family="sans-serif" font-size="12"><rect width="{w}" height="{h}" fill="white"/>{}"#,
        palette::defs(shown.len())
    );
    let label = ds.manifest["scenario"]["home"]["label"]
        .as_str()
        .unwrap_or("");
    let _ = write!(
        svg,
        r#"<text x="{}" y="24" font-size="14" font-weight="bold" fill="{INK}">{}: energy per local month{}</text><rect x="{}" y="{}" width="{}" height="{}" fill="{PANEL_FILL}" stroke="{FRAME}"/>"#,
        f.x,
        escape(if label.is_empty() {
            &ds.timezone
        } else {
            label
        }),
        if by == Parts::EndUse {
            " by end use"
        } else {
            ""
        },
        f.x,
        f.y,
        f.w,
        f.h
    );
    energy_axis(&mut svg, f, hi, step);
    month_bars(&mut svg, f, &ms, &parts, &yp, attr);
    axis::y_title(&mut svg, f, "energy (kWh)", 55.0);
    let below = Frame { h: f.h + 15.0, ..f };
    axis::x_title(
        &mut svg,
        below,
        &format!(
            "local month ({}), with the days of it simulated",
            ds.timezone
        ),
    );
    legend(&mut svg, (w - 215.0, f.y), legend_title, &parts[0]);
    svg += "</svg>\n";
    write_picture(&svg, out)?;
    Ok(Monthly {
        months: ms.into_iter().map(|m| m.label).collect(),
        shown: shown.iter().map(|&c| ids[c].clone()).collect(),
        others: rest.len(),
    })
}

/// The legend: top part of the stack first, as the bars read.
fn legend(svg: &mut String, (lx, top): (f64, f64), title: &str, parts: &[(String, String, f64)]) {
    let _ = write!(
        svg,
        r#"<g class="legend-box"><text x="{lx}" y="{}" font-weight="bold" fill="{INK}">{title}</text>"#,
        top + 4.0
    );
    for (i, (id, fill, _)) in parts.iter().rev().enumerate() {
        let y = top + 20.0 + i as f64 * 16.0;
        let _ = write!(
            svg,
            r#"<rect x="{lx}" y="{:.1}" width="11" height="11" fill="{fill}"/><text class="legend" x="{}" y="{y:.1}" fill="{INK}">{}</text>"#,
            y - 9.0,
            lx + 16.0,
            escape(id)
        );
    }
    svg.push_str("</g>");
}

#[cfg(test)]
mod tests {
    use super::*;

    fn instant(tz: &jiff::tz::TimeZone, civil: &str) -> i64 {
        let dt: jiff::civil::DateTime = civil.parse().unwrap();
        dt.to_zoned(tz.clone())
            .unwrap()
            .timestamp()
            .as_millisecond()
    }

    #[test]
    fn months_with_a_clock_change_count_calendar_days() {
        // Chicago moves its clocks on 2027-03-14 and 2027-11-07 (US rule,
        // second Sunday of March and first Sunday of November).
        let tz = jiff::tz::TimeZone::get("America/Chicago").unwrap();
        let (t0, t1) = (
            instant(&tz, "2027-03-01T00:00"),
            instant(&tz, "2027-12-01T00:00"),
        );
        let ms = months(&tz, t0, t1).unwrap();
        let days: Vec<f64> = ms.iter().map(|m| m.days).collect();
        assert_eq!(days, [31.0, 30.0, 31.0, 30.0, 31.0, 31.0, 30.0, 31.0, 30.0]);
        // Elapsed time differs in the two months of a change.
        assert_eq!((ms[0].end_ms - t0) as f64 / 3.6e6, 31.0 * 24.0 - 1.0);
        // A part of a month counts its wall-clock days.
        let half = instant(&tz, "2027-03-16T12:00");
        assert_eq!(months(&tz, t0, half).unwrap()[0].days, 15.5);
    }
}
